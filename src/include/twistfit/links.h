/* twistfit/links.h: intrinsic link parameters of a model, with standard
 * deviations, and the model -> DH / modified DH conversion.
 * Part of the public interface of libtwistfit; include <twistfit.h>,
 * whose opening comment states the rules (units, frames, ownership,
 * errors) that hold for every declaration here. */
#ifndef TWISTFIT_LINKS_H
#define TWISTFIT_LINKS_H

#include "twistfit/common.h"
#include "twistfit/se3.h"
#include "twistfit/model.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ------------------------------------------------------------------ */
/* Link parameters (DEVELOPERS.md, "The maths")                      */
/* ------------------------------------------------------------------ */

/* The joint lines are taken at logged zero (q = 0, theta = offset), line 0
 * being the base z-axis and line n+1 the flange z-axis. Row k (k = 0..n+1)
 * is the standard-DH motion from frame k-1 (z along line k, origin on it;
 * frame -1 is the base frame) to frame k (z along line k+1):
 *   Rz(theta_k) Tz(d_k) Tx(a_k) Rx(alpha_k) Ry(beta_k).
 * Row 0 places DH frame 0 in the base frame; rows 1..n are joint k's line
 * (theta_k, d_k: its zero offset at logged zero, or the constant of a
 * prismatic joint) and the link to the next line (a_k, alpha_k and d_k or
 * beta_k); row n+1 is the flange in frame n and uses theta and d only.
 *
 * Form of a link (rows 0..n): plain DH (common normal: a its length,
 * alpha its twist, d the distance along line k between successive common
 * normals; beta 0) or Hayati's (Hayati 1983): the plane through frame
 * k-1's origin perpendicular to line k cuts line k+1 at the next origin,
 * a is the distance to it, alpha the twist about it, beta the angle about
 * the perpendicular to both, and there is no d (0; for a prismatic joint d
 * is still its variable; in row 1 the plane passes through joint 1's
 * reference point, since frame 0's origin is the base's). The form is chosen per link by conditioning:
 * cond_dh and cond_beta below are the gains from an error of line k+1 to
 * the positions that fix the frames (the feet of the common normal along
 * both lines for DH, the cut point along line k+1 for Hayati's form),
 * with 2 shifts in metres and 2 tilts about its reference point times the
 * arm's reach; the smaller gain wins. Nearly parallel lines give DH a gain
 * of order a / sin^2(angle) and Hayati's about 1; nearly perpendicular
 * lines the reverse. Exactly parallel lines are always Hayati's. */
typedef enum twf_link_form {
  TWF_LINK_FORM_DH = 0,
  TWF_LINK_FORM_BETA = 1
} twf_link_form;

/* The five values of a row, in this order. */
typedef enum twf_link_value {
  TWF_LINK_THETA = 0, /* rad */
  TWF_LINK_D,         /* m */
  TWF_LINK_A,         /* m */
  TWF_LINK_ALPHA,     /* rad */
  TWF_LINK_BETA,      /* rad */
  TWF_LINK_NVALUES
} twf_link_value;

/* Whether a calibration determines a value, and why not. */
typedef enum twf_link_why {
  TWF_LINK_DETERMINED = 0,
  TWF_LINK_NOT_IN_FORM,   /* d of a Hayati link, beta of a DH link, a, alpha, beta
                             of the flange row: 0 by the form, not a parameter */
  TWF_LINK_BY_BASE,       /* absorbed by the base pose: row 0, theta and d of row 1,
                             and the flange's d when all lines are parallel */
  TWF_LINK_BY_TARGETS,    /* points-only data: the target offsets absorb the flange
                             (row n's theta, d, a, alpha, beta and row n+1) */
  TWF_LINK_COINCIDENT,    /* two revolute joints on one line: only the sum of their
                             offsets is determined (the first shows 0) */
  TWF_LINK_PRISMATIC_LINE,/* depends on where a prismatic joint's line is drawn,
                             a convention (its reference point) */
  TWF_LINK_PARALLEL_SLIDE,/* the zero of a prismatic joint whose next line is
                             parallel to it: it trades off with the downstream
                             geometry (the model's raw offset is shown) */
  /* set by twf_links_mark_fit only: */
  TWF_LINK_NOT_FITTED,    /* no fitted parameter moves it: the groups that would
                             were not fitted (the value is the starting model's) */
  TWF_LINK_BY_POSES       /* it depends on a parameter that these poses could not
                             determine (e.g. a joint that did not move) */
} twf_link_why;

/* A short English reason ("absorbed by the base pose", ...). Never NULL. */
const char *twf_link_why_text(twf_link_why why);
/* Stable names of the values: "theta", "d", "a", "alpha", "beta". */
const char *twf_link_value_name(twf_link_value v);

typedef struct twf_link_row {
  twf_link_form form;      /* rows 0..n; TWF_LINK_FORM_DH for row n+1 */
  int parallel;            /* plain DH on exactly parallel lines (use_beta = 0): the
                              common normal through frame k-1's origin, d = 0 */
  int coincident;          /* lines k and k+1 coincide (within 1e-9 of the reach):
                              the direction of the next frame's x is a convention
                              (upstream x; the flange x for the last revolute joint) */
  int flip_;               /* private: the sign of a DH link's x, kept for
                              twf_links_jacobian */
  int variable;            /* rows 1..n: TWF_LINK_THETA (revolute) or TWF_LINK_D
                              (prismatic), the joint's variable; -1 for rows 0, n+1 */
  double value[TWF_LINK_NVALUES];     /* at logged zero, SI */
  double reference[TWF_LINK_NVALUES]; /* of the reference model with the same forms;
                                         NAN when none was given */
  double std[TWF_LINK_NVALUES];       /* first-order standard deviation; NAN until
                                         twf_links_propagate, 0 where not a parameter */
  twf_link_why why[TWF_LINK_NVALUES];
  double cond_dh, cond_beta; /* the conditioning gains above (INFINITY where a form
                                does not exist); NAN for row n+1 */
} twf_link_row;

typedef struct twf_links {
  size_t n_joints;
  size_t n_rows;        /* n_joints + 2 */
  twf_link_row *rows;   /* owned; release with twf_links_clear */
  int full_pose;        /* as given: 1 when the data had 6-D rows */
  double reach;         /* m, the tilt scale of the conditioning gains */
} twf_links;

typedef struct twf_links_options {
  int full_pose;        /* 0 (default): points only, the targets absorb the flange */
  int use_beta;         /* 1 (default): choose the form by conditioning;
                           0: plain DH everywhere (exactly parallel lines then
                           take the common normal through frame k-1's origin) */
  const twf_model *reference; /* optional (NULL): e.g. the nominal model; its values
                           fill reference[] and its lines choose the forms, so that
                           model and reference are compared in one convention */
} twf_links_options;

twf_links_options twf_links_default_options(void);
void twf_links_clear(twf_links *l);

/* The link parameters of m (see above). out is filled (clear it with
 * twf_links_clear); std[] is NAN until twf_links_propagate. m and the
 * reference must have the same joints. */
twf_status twf_links_compute(const twf_model *m, const twf_links_options *opt,
                             twf_links *out, twf_error *err);

/* d(link values)/d(error parameters) at m, for the parameters of
 * twf_errmodel_alloc(m, groups) in their order: J is
 * (n_rows * TWF_LINK_NVALUES) x p, row-major, row r = 5 * row + value.
 * Central differences of the fold-in (twf_errmodel_fold on copies of m,
 * forms and conventions of l kept) with steps rel_step in metres for
 * lengths and rel_step / reach for angles (rel_step <= 0: 1e-6); angles
 * are differenced on the circle. l must come from twf_links_compute on m. */
twf_status twf_links_jacobian(const twf_model *m, unsigned groups,
                              const twf_links *l, double rel_step, double *J,
                              twf_error *err);

/* Fill l->rows[].std from a parameter covariance cov (p x p, row-major,
 * SI) of the parameters of twf_errmodel_alloc(m, groups), the layout of
 * twf_calib_result.params (zero rows and columns for fixed parameters):
 * std = sqrt(diag(J cov J^T)) with J from twf_links_jacobian. */
twf_status twf_links_propagate(const twf_model *m, unsigned groups,
                               const double *cov, twf_links *l,
                               twf_error *err);

/* What a fit leaves open, and the standard deviations of the rest: with
 * J from twf_links_jacobian at m (the fitted model, before any change of
 * its base frame, so that the parameters are the fit's own), a value still
 * marked determined becomes TWF_LINK_BY_POSES when it moves with a
 * parameter flagged in by_poses (n = the parameter count, may be NULL),
 * TWF_LINK_NOT_FITTED when no parameter moves it, and otherwise gets
 * std = sqrt(J cov J^T). "Moves" means by more than 1e-6 m (lengths) or
 * 1e-6 m at the reach (angles) per metre of the parameter's motion at the
 * reach: central differences leave about 1e-10 there. std of values not
 * determined is NAN, of values not in the form 0. */
twf_status twf_links_mark_fit(const twf_model *m, unsigned groups,
                              const double *cov,
                              const unsigned char *by_poses, twf_links *l,
                              twf_error *err);

/* ------------------------------------------------------------------ */
/* Model -> DH table                                                   */
/* ------------------------------------------------------------------ */

/* The DH table of m by the conversion above: rows[n_joints] (beta set, 0
 * for a plain DH link), base_to_first (the pose of DH frame 0 in the base
 * frame) and flange_in_last (the flange in the last DH frame), so that
 * twf_model_set_from_dh_beta(rows, base_to_first, flange_in_last) with
 * each joint's scale copied back reproduces m's forward kinematics: the
 * rows' theta and d hold the values at logged zero (offsets included) and
 * the DH joint variable is scale * q. Modified DH regroups the same
 * numbers: row k takes a, alpha, beta of link k-1; base_to_first then holds
 * Rz(theta_0) Tz(d_0) and flange_in_last the last link's Tx Rx Ry with the
 * flange row. With use_beta = 0, nearly parallel lines give far feet and
 * large d (see twf_dh_residual). */
twf_status twf_model_to_dh(const twf_model *m, twf_dh_convention conv,
                           int use_beta, twf_dh_row *rows,
                           twf_pose *base_to_first, twf_pose *flange_in_last,
                           twf_error *err);

/* As twf_model_to_dh, in the conventions of a reference model (NULL: as
 * twf_model_to_dh): the forms of the links (DH or Hayati's) and the sign of
 * each DH frame's x are the ones the conversion chooses for the reference,
 * so that an as-built model written like its nominal reads row by row
 * against the nominal's table (a common normal that is 0 in the reference
 * keeps the reference's twist and may come out slightly negative, instead
 * of a half turn in alpha and theta). Whether lines are exactly parallel
 * or coincide is m's own. The reference must have m's joints, in type. */
twf_status twf_model_to_dh_like(const twf_model *m, const twf_model *reference,
                                twf_dh_convention conv, int use_beta,
                                twf_dh_row *rows, twf_pose *base_to_first,
                                twf_pose *flange_in_last, twf_error *err);

/* How well a DH table reproduces a model. */
typedef struct twf_dh_fit {
  size_t n_configs;
  double rms_position_m, max_position_m;  /* flange origin */
  double rms_angle_rad, max_angle_rad;    /* flange rotation */
} twf_dh_fit;

/* Forward kinematics of the table (the elementary motions composed
 * directly, not through twists; joint variable scale * q with m's scales)
 * against m's at n_configs seeded random configurations within the limits
 * (twf_simulate_joints, no margin). */
twf_status twf_dh_residual(const twf_model *m, const twf_dh_row *rows,
                           twf_dh_convention conv,
                           const twf_pose *base_to_first,
                           const twf_pose *flange_in_last, size_t n_configs,
                           unsigned long long seed, twf_dh_fit *out,
                           twf_error *err);

#ifdef __cplusplus
}
#endif

#endif /* TWISTFIT_LINKS_H */
