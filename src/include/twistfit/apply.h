/* twistfit/apply.h: using a calibrated model: inverse kinematics of the
 * as-built arm, compensation of joint programs, and the comparison of two
 * models of one arm over its workspace.
 * Part of the public interface of libtwistfit; include <twistfit.h>,
 * whose opening comment states the rules (units, frames, ownership,
 * errors) that hold for every declaration here. */
#ifndef TWISTFIT_APPLY_H
#define TWISTFIT_APPLY_H

#include "twistfit/common.h"
#include "twistfit/se3.h"
#include "twistfit/model.h"
#include "twistfit/accuracy.h"
#include "twistfit/links.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ------------------------------------------------------------------ */
/* Inverse kinematics (damped least squares)                           */
/* ------------------------------------------------------------------ */

/* What a goal asks of the arm. */
typedef enum twf_ik_kind {
  TWF_IK_POSE = 0,  /* orientation and position: 6 conditions */
  TWF_IK_POINT = 1  /* the position of one flange-fixed point: 3 conditions */
} twf_ik_kind;

/* A goal in the solving model's base frame, SI units. */
typedef struct twf_ik_goal {
  twf_ik_kind kind;
  /* Wanted flange orientation (row-major). TWF_IK_POSE: a condition;
   * TWF_IK_POINT: only the reference of the reported angle error. */
  double R[3][3];
  /* Wanted position of the point, metres, base frame. */
  double p[3];
  /* The point, metres, in the solving model's flange frame: (0, 0, 0) for
   * the flange origin, or a target's offset. */
  double point[3];
} twf_ik_goal;

/* Options: take twf_ik_default_options() and change fields. */
typedef struct twf_ik_options {
  /* Converged when the position error is at most tol_position_m (metres,
   * default 1e-10) and, for TWF_IK_POSE, the angle error at most
   * tol_angle_rad (radians, default 1e-10); for a redundant task (fewer
   * conditions than joints) the step toward the least joint change must
   * also have fallen below tol_angle_rad (scaled joint units, see below). */
  double tol_position_m;
  double tol_angle_rad;
  /* Evaluations of the forward kinematics allowed per goal (default 100). */
  unsigned max_iter;
  /* A solution is near a singularity when the smallest singular value of
   * the scaled Jacobian there is below this (default 1e-2). Scaling:
   * position rows divided by length_scale_m, prismatic columns multiplied
   * by it, so that every entry is dimensionless (rad per rad). */
  double singular_threshold;
  /* Characteristic length of the scaling, metres (0, the default: the
   * solving model's twf_model_reach). */
  double length_scale_m;
  /* Slack on the joint limits, rad or m (default 1e-9). */
  double limit_tolerance;
  /* The payload carried (index into the model's payloads; -1, the
   * default: none): a model with compliances is solved deflected under it
   * (twf_model_fk_load; the Jacobian is the rigid one, which changes the
   * steps, not the solution). */
  long payload;
} twf_ik_options;

twf_ik_options twf_ik_default_options(void);

/* Flags of a solution (bits of twf_ik_result.flags); 0 = a good row. */
enum {
  TWF_IK_NEAR_SINGULAR = 1,   /* smallest scaled singular value below the threshold */
  TWF_IK_OUTSIDE_LIMITS = 2,  /* a joint value outside the model's limits */
  TWF_IK_NOT_CONVERGED = 4    /* tolerances not reached within max_iter, or no
                                 further decrease possible */
};

/* What one solve did, SI units. */
typedef struct twf_ik_result {
  unsigned flags;
  unsigned iterations;       /* accepted steps */
  unsigned evaluations;      /* forward-kinematics evaluations */
  double position_error_m;   /* |wanted - reached| position of the point */
  double angle_error_rad;    /* angle between the wanted and the reached
                                flange orientation (with TWF_IK_POINT the
                                orientation is not a condition: this says
                                how far it turned) */
  double max_change_rad;     /* largest |q - q_start| of a revolute joint */
  double max_change_m;       /* largest |q - q_start| of a prismatic joint */
  long max_change_joint;     /* the joint of the largest scaled change, -1
                                when nothing moved */
  double sigma_min;          /* smallest singular value of the scaled
                                Jacobian at the solution (dimensionless) */
  long outside_joint;        /* first joint outside its limits, -1 if none */
} twf_ik_result;

/* A solver workspace for arms of up to n_joints joints (allocated once,
 * used for any number of goals). NULL when out of memory. */
typedef struct twf_ik twf_ik;
twf_ik *twf_ik_alloc(size_t n_joints);
void twf_ik_free(twf_ik *w);

/* Joint values with which model puts the goal's point at goal->p (and,
 * for TWF_IK_POSE, the flange at orientation goal->R): Levenberg-
 * Marquardt on the damped least-squares step
 *   dx = J^T (J J^T + lambda I)^-1 e
 * in scaled joint units (rad; prismatic m / length scale), task error e =
 * (log(R_goal R^T), (p_goal - y) / length scale) (position only for
 * TWF_IK_POINT), started from q_start. With fewer conditions than joints
 * (a point on a 6-axis arm, a pose on a 7-axis arm) the spare freedom goes
 * to the least joint change from q_start (sum of squared scaled changes):
 * each step adds the projection of (q_start - q) onto the null space of J,
 * whose fixed point is the first-order optimum of that problem.
 *   q_start: model->n_joints logged values (rad or m); q_out the same
 *            size, receives the solution (the best one reached when not
 *            converged); may alias q_start.
 *   res:     out, may be NULL.
 * Returns TWF_OK whenever a solution was computed (flags say how good it
 * is); TWF_ERR_DEGENERATE when the goal has more conditions than the arm
 * has joints (a pose for a 4-axis arm: use TWF_IK_POINT);
 * TWF_ERR_VALUE for a non-finite goal or start; TWF_ERR_INVALID for NULL
 * arguments or a model with more joints than the workspace. */
twf_status twf_ik_solve(twf_ik *w, const twf_model *model, const twf_ik_goal *goal,
                        const double *q_start, const twf_ik_options *opt, double *q_out,
                        twf_ik_result *res, twf_error *err);

/* ------------------------------------------------------------------ */
/* Program compensation                                                */
/* ------------------------------------------------------------------ */

/* Options: take twf_compensate_default_options() and change fields. */
typedef struct twf_compensate_options {
  /* TWF_IK_POSE (default): the flange pose; TWF_IK_POINT: the position of
   * the target named target only. */
  twf_ik_kind kind;
  /* TWF_IK_POINT: the target's name. Its wanted position uses the nominal
   * model's offset (the as-built one when the nominal declares none); the
   * as-built arm carries it at the as-built offset, which must be known. */
  const char *target;
  twf_ik_options ik;
} twf_compensate_options;

twf_compensate_options twf_compensate_default_options(void);

/* Figures over a compensated program, SI units. */
typedef struct twf_compensate_summary {
  size_t n_rows;
  size_t n_flagged;          /* rows with any flag */
  size_t n_near_singular, n_outside_limits, n_not_converged;
  double max_position_error_m; /* over the rows that converged */
  double max_angle_error_rad;  /* over the rows that converged (TWF_IK_POSE) */
  double max_change_rad;       /* over all rows */
  double max_change_m;
  size_t max_change_row;       /* row of the largest scaled change */
  unsigned long iterations;    /* accepted steps, all rows */
} twf_compensate_summary;

/* Compensate a joint program: for each row r of q (n_rows x n_joints,
 * logged values, rad or m, row-major), the joint values with which the
 * as-built arm puts the flange at the pose the nominal model gives for
 * the row, taken as coordinates in the as-built model's base frame
 * (TWF_IK_POINT: the target's position only), solved by twf_ik_solve
 * started from the row's own values.
 *   nominal, asbuilt: the same joints (count, names, types), else
 *            TWF_ERR_VALUE naming the first difference.
 *   q_out:   n_rows x n_joints, may alias q.
 *   results: n_rows results (may be NULL); summary may be NULL.
 * Returns TWF_OK when every row was computed, whatever its flags;
 * TWF_ERR_UNKNOWN for an unknown target, TWF_ERR_MISSING when the as-built
 * model declares no offset for it (or neither model does), otherwise as
 * twf_ik_solve (err->line is then the 1-based row), TWF_ERR_NOMEM. */
twf_status twf_compensate_program(const twf_model *nominal, const twf_model *asbuilt,
                                  const double *q, size_t n_rows,
                                  const twf_compensate_options *opt, double *q_out,
                                  twf_ik_result *results, twf_compensate_summary *summary,
                                  twf_error *err);

/* Summary of results[0..n) (for inverse kinematics called row by row). */
void twf_compensate_summarize(const twf_model *model, const twf_ik_result *results, size_t n,
                              twf_compensate_summary *summary);

/* ------------------------------------------------------------------ */
/* Comparison of two models over the workspace                         */
/* ------------------------------------------------------------------ */

/* Options: take twf_compare_default_options() and change fields. */
typedef struct twf_compare_options {
  /* 1 (default): before measuring, align B's base frame to A's by the best
   * rigid fit (twf_register_points, equal weights) of B's predicted tool
   * points onto A's over all configurations: two as-built models of
   * different dates live in different base frames. 0: compare in the
   * frames as written. */
  int align;
  /* The load both arms carry, by name (NULL, the default: none); a model
   * that does not declare it carries none. Models with compliances deflect
   * under it (twf_model_fk_load). */
  const char *payload;
} twf_compare_options;

twf_compare_options twf_compare_default_options(void);

/* The figures. Tool points are the targets whose offsets both models know
 * (matched by name, in A's order); when there is none, the flange origin. */
typedef struct twf_compare_result {
  size_t n_configs;
  size_t n_points;           /* tool points per configuration */
  long *point_target;        /* n_points indices into A's targets; -1 for
                                the flange origin */
  int aligned;               /* 1 when B was aligned */
  twf_pose b_to_a;           /* the alignment: x_A = b_to_a x_B (identity
                                when not aligned) */
  twf_stats position;        /* |y_A - b_to_a y_B| over every point of every
                                configuration, metres; max_index =
                                config * n_points + point */
  twf_stats *point_position; /* n_points: per tool point, metres; max_index
                                = configuration */
  twf_stats angle;           /* angle between A's and the aligned B's flange
                                orientation per configuration, radians;
                                max_index = configuration */
  size_t worst_config;       /* configuration of the largest distance */
  size_t worst_point;        /* and its tool point */
  double worst_angle_rad;    /* the angle at worst_config */
} twf_compare_result;

/* Compare A and B (the same joints: count, names, types, else
 * TWF_ERR_VALUE) at n_configs configurations q (n_configs x n_joints,
 * logged values, rad or m). *out receives an object to free with
 * twf_compare_result_free. Returns TWF_OK; TWF_ERR_DEGENERATE when the
 * alignment cannot be determined (fewer than 3 configurations, or the tool
 * points all on one line: give more varied configurations or no
 * alignment); TWF_ERR_MISSING when n_configs is 0; TWF_ERR_VALUE for a
 * non-finite joint value; TWF_ERR_INVALID, TWF_ERR_NOMEM. */
twf_status twf_compare_models(const twf_model *a, const twf_model *b, const double *q,
                              size_t n_configs, const twf_compare_options *opt,
                              twf_compare_result **out, twf_error *err);
void twf_compare_result_free(twf_compare_result *r);

/* Link by link: the intrinsic link parameters (twistfit/links.h) of B with
 * A as the reference, in A's forms (A's lines choose DH or Hayati's form per
 * link, so that both are read in one convention): twf_links_compute(b,
 * {reference = a, full_pose}) into *links (clear with twf_links_clear), and
 * diff[5 * row + value] = B - A, SI, angles wrapped to [-pi, pi) (theta of
 * two models may differ by a turn that means nothing); NAN where the value
 * is not in the row's form (TWF_LINK_NOT_IN_FORM). Where a DH link's x
 * axis has a free sign (lines that nearly intersect, a near 0) and B's came
 * out opposite to A's, B's values of that row and the next row's theta are
 * re-expressed in A's sign (theta + pi, -a, -alpha; next theta - pi: the
 * same motion). diff holds
 * 5 * (n_joints + 2) values. links->rows[].std stays NAN: a model file
 * carries no covariance. Errors as twf_links_compute (TWF_ERR_VALUE for
 * different joints). */
twf_status twf_compare_links(const twf_model *a, const twf_model *b, int full_pose,
                             twf_links *links, double *diff, twf_error *err);

/* TWF_OK when a and b have the same joints (count, names and types), else
 * TWF_ERR_VALUE naming the first difference (a_name, b_name name the
 * models in the message; may be NULL). */
twf_status twf_models_same_joints(const twf_model *a, const twf_model *b, const char *a_name,
                                  const char *b_name, twf_error *err);

#ifdef __cplusplus
}
#endif

#endif /* TWISTFIT_APPLY_H */
