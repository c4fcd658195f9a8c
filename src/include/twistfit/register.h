/* twistfit/register.h: registration of the instrument frame to the robot base.
 * Part of the public interface of libtwistfit; include <twistfit.h>,
 * whose opening comment states the rules (units, frames, ownership,
 * errors) that hold for every declaration here. */
#ifndef TWISTFIT_REGISTER_H
#define TWISTFIT_REGISTER_H

#include "twistfit/common.h"
#include "twistfit/se3.h"
#include "twistfit/model.h"
#include "twistfit/campaign.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ------------------------------------------------------------------ */
/* Registration                                                        */
/* ------------------------------------------------------------------ */

/* The campaign type (struct twf_campaign, see "Measurement campaigns") is
 * named by its tag so that this section does not depend on the order of
 * sections. */
struct twf_campaign;

/* Closed-form weighted rigid registration: the pose T = (R, p) minimising
 * sum_i w_i |R a_i + p - b_i|^2 (Arun, Huang and Blostein 1987, SVD of the
 * weighted cross-covariance of the centred clouds, with Umeyama's 1991
 * correction so that R is a rotation, never a reflection). Exact for
 * noise-free data; planar clouds are fine.
 *   a, b: n points each, row-major (a[3*i + c]), any common unit (metres in
 *         the library); T maps the frame of a into the frame of b.
 *   w:    n weights >= 0, or NULL for equal weights. Points of weight 0 do
 *         not count.
 * Returns TWF_OK; TWF_ERR_DEGENERATE when fewer than 3 points have positive
 * weight, or either cloud's points all coincide or all lie on one line
 * (judged by the singular values s1 >= s2 >= s3 of the weighted centred
 * cloud: coincident when its RMS spread is below 1e-9 of its RMS distance
 * from the origin, collinear when s2 < 1e-6 s1); the message says how many
 * more distinct, non-collinear points are needed. TWF_ERR_INVALID for a
 * negative or non-finite weight or NULL arrays, TWF_ERR_VALUE for a
 * non-finite coordinate. T is written only on success. */
twf_status twf_register_points(const double *a, const double *b,
                               const double *w, size_t n, twf_pose *T,
                               twf_error *err);

/* Options of twf_register_campaign: take twf_register_default_options()
 * and change fields. */
typedef struct twf_register_options {
  /* Nonzero: fit every measured target's offset (the given offsets are only
   * the start). Default 0. */
  int fit_all_offsets;
  /* NULL (default): a target whose model offset is known (offset_known) is
   * trusted and kept, the others are fitted. Otherwise n_targets flags,
   * nonzero = trusted: overrides offset_known. Borrowed for the call.
   * Ignored when fit_all_offsets is set. */
  const int *trusted;
  /* Nonzero (default): weight each measurement by 1/sigma^2. Rows without a
   * sigma (0) take sigma_default_m, or when that is 0 the mean of the
   * sigmas given; with no sigma at all every row weighs the same. */
  int use_sigma;
  double sigma_default_m;
  /* Stop when no predicted point moved by more than tol_m (metres, default
   * 1e-12) in one alternation, or after max_iter alternations (default
   * 200). */
  double tol_m;
  unsigned max_iter;
} twf_register_options;

twf_register_options twf_register_default_options(void);

/* What twf_register_campaign did. */
typedef struct twf_register_report {
  unsigned iterations;   /* registrations performed (each followed by an
                            offset solve when offsets are fitted) */
  int converged;         /* 1: the change fell below tol_m (always 1 when no
                            offset is fitted); 0: max_iter reached */
  double last_change_m;  /* largest move of a predicted point in the last
                            alternation, metres (0 without fitted offsets) */
  double rms_m;          /* RMS of |measured - predicted| over the fit-set
                            measurements after registration, metres,
                            unweighted: the "before calibration" figure */
  double max_m;          /* largest such error, metres */
  size_t n_used;         /* fit-set measurements used */
  size_t n_poses_used;   /* distinct poses among them */
  size_t n_fitted;       /* targets whose offset was fitted */
  /* Fitted targets whose offset is not fully separable from the base pose
   * on these poses: the flange orientations of their measurements are all
   * equal or all rotations about one axis (as on a four-axis arm), so one
   * component of the offset trades off against the base translation. The
   * alternation still returns a solution (that component stays near its
   * start); the caller should warn and fix the component before refining.
   * Judged only when no trusted target is measured in the fit set (a
   * trusted target pins the base). */
  size_t n_inseparable;
  long first_inseparable; /* index of the first such target, -1 if none */
} twf_register_report;

/* Fewest fit-set poses of one instrument station in a campaign of several:
 * the station's 6 base parameters come from its own poses alone (three
 * poses are the fewest from which three points of one target register;
 * our own choice, no source). */
#define TWF_STATION_POSES_MIN 3

/* Nonzero when target k's offset is fitted under options (NULL: defaults)
 * for model: fit_all_offsets, else !trusted[k], else !offset_known. The
 * least-squares refinement frees exactly these targets. */
int twf_register_target_is_fitted(const twf_model *model,
                                  const twf_register_options *options,
                                  size_t k);

/* Fill offsets[3 * n_targets] (metres, flange frame) with the model's
 * target offsets, the flange origin (0, 0, 0) for targets whose offset is
 * unknown: the default start of twf_register_campaign. */
void twf_register_offsets_init(const twf_model *model, double *offsets);

/* Register a campaign to the instrument: the first step of every job.
 * With model's kinematics (twf_model_fk), the predicted target points in
 * the base frame, F_j t_k, are registered to the measured ones y in the
 * tracker frame by twf_register_points, using only the fit set
 * (TWF_SET_FIT) and weights from sigma (see options). When some offsets
 * are fitted, registration alternates with the linear least-squares solve
 * for those offsets given B (per target, min over t of
 * sum w |B F_j t - y_j|^2; its normal matrix is (sum w) I because every
 * R_Fj is a rotation, so it never fails), until the predicted points move by
 * at most tol_m or max_iter alternations. Each step lowers the weighted sum
 * of squares (block coordinate descent), but convergence is linear: the
 * report says whether it converged; not converging is not an error.
 *   model:           borrowed, unchanged.
 *   campaign:        borrowed; its joint count must equal the model's.
 *                    6-D rows enter only with their position: orientations
 *                    are ignored here (the refinement uses them).
 *   options:         NULL for twf_register_default_options().
 *   base_in_tracker: out, B (robot base frame to tracker frame): an array
 *                    of twf_campaign_station_count(campaign) poses, one per
 *                    instrument station, each registered on its station's
 *                    fit rows (the target offsets on every station's).
 *   target_offsets:  in/out, n_targets x 3, metres, flange frame. In: the
 *                    trusted offsets and the start of the fitted ones (fill
 *                    with twf_register_offsets_init for the default, which
 *                    starts unknown targets at the flange origin). Out: the
 *                    fitted ones replaced; trusted and unmeasured targets
 *                    unchanged.
 *   report:          out, may be NULL.
 * The function stops after the alternation. The caller refines B and the
 * fitted offsets jointly with the least-squares solver (parameter groups
 * base and targets, the targets of twf_register_target_is_fitted), starting
 * from these values; the refined residual then replaces report->rms_m as
 * the "before" figure.
 * Returns TWF_OK; TWF_ERR_DEGENERATE when a station of several has fewer
 * than TWF_STATION_POSES_MIN fit poses (the message names it), when the
 * fit set (of a station) has fewer than 3
 * measurements or its predicted (or measured) points coincide or lie on one
 * line: the message says how many more distinct poses are needed and, when
 * the first registration used the flange origin for targets without a
 * trusted offset, says so (a flange origin that barely moves, e.g. only
 * the wrist turned). TWF_ERR_MISSING when a fitted target has check rows
 * but no fit row; TWF_ERR_INVALID for NULL arguments, mismatched joint
 * counts or measurement indices out of range; TWF_ERR_VALUE for non-finite
 * inputs; TWF_ERR_NOMEM. On failure the outputs are left unchanged. */
twf_status twf_register_campaign(const twf_model *model,
                                 const struct twf_campaign *campaign,
                                 const twf_register_options *options,
                                 twf_pose *base_in_tracker,
                                 double *target_offsets,
                                 twf_register_report *report,
                                 twf_error *err);


/* ------------------------------------------------------------------ */
/* The least-squares solver's report (refinement and calibration)      */
/* ------------------------------------------------------------------ */

/* Why the solver stopped. */
typedef enum twf_stop {
  TWF_STOP_NONE = 0,    /* did not run */
  TWF_STOP_STEP,        /* the scaled step fell below step_tol_m, or the next step would move
                           every parameter by less than 1 % of its standard deviation
                           (DEVELOPERS.md): converged */
  TWF_STOP_GRADIENT,    /* the scaled gradient vanished: converged */
  TWF_STOP_COST,        /* no step reduces the cost any more (at rounding level): converged */
  TWF_STOP_MAXITER,     /* iteration limit reached: not converged */
  TWF_STOP_DIVERGED,    /* the cost became non-finite or the damping exploded */
  TWF_STOP_SINGULAR     /* the damped normal system could not be solved */
} twf_stop;

/* Stable names: "none", "step", "gradient", "cost", "max-iterations",
 * "diverged", "singular". */
const char *twf_stop_name(twf_stop s);
/* 1 for the converged stop reasons. */
int twf_stop_converged(twf_stop s);

typedef struct twf_solve_report {
  int iterations;     /* accepted and rejected trial steps */
  double cost_start;  /* 0.5 sum of squared weighted residuals, before */
  double cost_end;    /* after */
  twf_stop stop;
} twf_solve_report;

/* The threshold of the gross-error screens, in robust standard deviations
 * of the error length: the default of the refinement and the calibration. */
#define TWF_ROBUST_THRESHOLD_DEFAULT 5.0

/* Where a job's time went and how its solver moved: plain data for a
 * verbose report, never needed for the results. Initialise with
 * twf_trace_init, release with twf_trace_clear. */
#define TWF_TRACE_STAGES_MAX 24

typedef struct twf_stage_time {
  const char *name;  /* static string, e.g. "registration refinement" */
  double seconds;    /* wall time on the monotonic clock, >= 0 */
} twf_stage_time;

typedef struct twf_solver_step {
  const char *fit;   /* static string: "registration refinement" or "calibration" */
  int round;         /* 0: the first fit, k: the refit after the k-th screen */
  int iteration;     /* 1-based trial step within that fit */
  double cost;       /* cost at the trial parameters; NaN when the damped
                        system could not be solved (the damping then rises) */
  double damping;    /* the Levenberg-Marquardt damping of the trial */
  int accepted;      /* 1: the step was taken */
} twf_solver_step;

typedef struct twf_trace {
  size_t n_stages;                            /* in the order they ran */
  twf_stage_time stages[TWF_TRACE_STAGES_MAX];
  size_t n_steps, capacity;
  twf_solver_step *steps;                     /* owned */
} twf_trace;

void twf_trace_init(twf_trace *t);
void twf_trace_clear(twf_trace *t);

/* ------------------------------------------------------------------ */
/* Least-squares refinement of the registration                        */
/* ------------------------------------------------------------------ */

/* Options of twf_refine_base: take twf_refine_default_options(). */
typedef struct twf_refine_options {
  double sigma_length;      /* m, where rows give none (0: 0.1 mm; only weights matter) */
  int screen;               /* 1 (default): drop gross errors as the calibration does */
  double robust_threshold;  /* in robust standard deviations (default TWF_ROBUST_THRESHOLD_DEFAULT) */
  int threads;              /* threads of the passes (0, the default: one per core; results
                               do not depend on it) */
} twf_refine_options;

twf_refine_options twf_refine_default_options(void);

/* Least-squares refinement of the base pose and of the offsets of the
 * targets flagged in fit_target (n_targets flags, NULL: none) for a fixed
 * model, on the fit set, after the closed-form registration. m's target
 * offsets are updated in place. With screening, fit rows beyond the robust
 * threshold (1.4826 MAD of the residual components) are left out and the
 * refinement repeated; excluded (n_meas flags, may be NULL) receives 1 for
 * each. Offset components the poses cannot separate from the base are
 * fixed at their start. base_in_tracker: one pose per instrument station
 * of c (twf_campaign_station_count). */
twf_status twf_refine_base(twf_model *m, const struct twf_campaign *c,
                           const unsigned char *fit_target, const twf_refine_options *opt,
                           twf_pose *base_in_tracker, twf_solve_report *report,
                           unsigned char *excluded, twf_error *err);

/* What twf_register_and_refine did. */
typedef struct twf_registration_report {
  twf_register_report alternation; /* the closed-form registration and offset solve */
  twf_solve_report refinement;     /* the least-squares refinement */
  size_t n_excluded;               /* fit rows the refinement left out as gross errors */
  double robust_threshold;         /* their threshold, robust standard deviations
                                      (0 when the refinement did not screen) */
} twf_registration_report;

/* The registration every job starts with, in one call: the closed-form
 * registration alternating with the offset solve (twf_register_campaign
 * with reg_options, NULL: defaults), then the least-squares refinement of
 * the base and of the fitted offsets (twf_refine_base with refine_options,
 * NULL: defaults) of the targets that twf_register_target_is_fitted names
 * and that have fit-set rows.
 *   model:           in/out. On success its target offsets are the refined
 *                    ones and every target with fit-set rows is marked
 *                    offset_known; on failure it is unchanged.
 *   base_in_tracker: out, the refined base pose of each instrument station
 *                    (an array of twf_campaign_station_count(campaign)).
 *   report:          out, may be NULL.
 *   excluded:        n_meas flags (may be NULL): 1 for a fit row left out
 *                    of the refinement as a gross error.
 *   trace:           may be NULL; receives the stages "registration" and
 *                    "registration refinement" and the refinement's steps.
 * Returns the status of the step that failed, with err filled. */
twf_status twf_register_and_refine(twf_model *model, const struct twf_campaign *campaign,
                                   const twf_register_options *reg_options,
                                   const twf_refine_options *refine_options,
                                   twf_pose *base_in_tracker, twf_registration_report *report,
                                   unsigned char *excluded, twf_trace *trace, twf_error *err);


#ifdef __cplusplus
}
#endif

#endif /* TWISTFIT_REGISTER_H */
