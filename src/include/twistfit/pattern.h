/* twistfit/pattern.h: do the residuals of a calibration look like noise?
 * Part of the public interface of libtwistfit; include <twistfit.h>,
 * whose opening comment states the rules (units, frames, ownership,
 * errors) that hold for every declaration here. */
#ifndef TWISTFIT_PATTERN_H
#define TWISTFIT_PATTERN_H

#include "twistfit/common.h"
#include "twistfit/se3.h"
#include "twistfit/model.h"
#include "twistfit/campaign.h"

#ifdef __cplusplus
extern "C" {
#endif

/* An effect the model lacks shows as a joint-angle error that follows the
 * configuration: a slope in the joint's value (a wrong gear ratio, when the
 * scale group is not fitted), a low-order harmonic in its angle (gear and
 * encoder eccentricity), or a dependence on the gravity torque the joint
 * carries (compliance). The test regresses the position residuals r_i
 * (measured - model, instrument frame, each coordinate a row) on every
 * joint's pattern at once:
 *     r_i = sum_j v_ij (c_j + b_j . x_ij) + e_i,
 * v_ij the velocity of the measured point per unit of joint j's logged
 * value, x_ij the families' regressors of joint j (slope: q; harmonic:
 * sin q, cos q, sin 2q, cos 2q; torque: tau) and c_j a plain offset the
 * fit may already have taken. Regressing all joints together keeps an
 * error of one joint from showing as a pattern of another whose motion
 * happens to point the same way. Each family of each joint is tested by
 * the F statistic of nested linear models: the reduction of the residual
 * sum of squares when that family alone is added for joint j to the
 * regression holding every other joint's families (but none of joint
 * j's), over the noise variance of the full regression (any regression
 * text; the F distribution from GSL), with the ranks of a pseudo-inverse
 * as degrees of freedom. Testing a family against none of its joint's
 * others keeps collinear families (a slope and a first harmonic over a
 * limited range) from hiding each other. It is significant when its
 * p-value is below alpha divided by the number of families tested
 * (Bonferroni: the chance of any false alarm in one calibration stays
 * below alpha, for residuals that are independent Gaussian noise of one
 * standard deviation) and it
 * removes at least min_explained of the residual sum of squares (so that
 * a huge campaign does not flag a pattern far below the noise) and at
 * least min_explained_rms_m in RMS length (so that noise-free simulated
 * data, whose residuals are the solver's last digits, raise no alarm: 0.1
 * um is below what trackers and CMMs resolve). The limits are our own
 * choice (common practice, no source). At most
 * TWF_PATTERN_MAX_MEAS measurements enter, evenly spaced in campaign order
 * (the test has power to spare long before). */
#define TWF_PATTERN_MAX_MEAS 20000

typedef enum twf_pattern_kind {
  TWF_PATTERN_SLOPE = 0,
  TWF_PATTERN_HARMONIC,
  TWF_PATTERN_TORQUE,
  TWF_PATTERN_NKINDS
} twf_pattern_kind;

/* "slope", "harmonic", "torque". */
const char *twf_pattern_kind_name(twf_pattern_kind k);

/* Why a family was not tested. */
typedef enum twf_pattern_skip {
  TWF_PATTERN_TESTED = 0,
  TWF_PATTERN_NOT_APPLICABLE, /* harmonic or torque of a prismatic joint */
  TWF_PATTERN_FITTED,         /* slope of a joint whose scale was fitted */
  TWF_PATTERN_NO_TORQUE,      /* torque family without torques (no mass model) */
  TWF_PATTERN_TOO_FEW,        /* fewer rows than twice the regression's rank */
  TWF_PATTERN_DEGENERATE      /* the family's columns add nothing to the others (a joint
                                 that did not move, or a pattern the others already hold) */
} twf_pattern_skip;

typedef struct twf_pattern_test {
  size_t joint;
  twf_pattern_kind kind;
  twf_pattern_skip skip;
  size_t n;                /* measurements used */
  size_t k;                /* degrees of freedom of the family (rank it adds, <= 4) */
  double f;                /* F statistic (NAN when not tested) */
  double p_value;
  double residual_rms_m;   /* RMS position residual length over the measurements used, m */
  double explained_rms_m;  /* RMS length of what the family's columns remove, m */
  double explained;        /* fraction of the residual sum of squares they remove */
  double coef[4];          /* b in the regression with this family alone for the joint:
                              slope rad per unit of q; harmonic rad (sin q, cos q,
                              sin 2q, cos 2q); torque rad per N m */
  int significant;
} twf_pattern_test;

typedef struct twf_pattern_options {
  double alpha;            /* family-wise false alarm rate (default 0.01) */
  double min_explained;    /* default 0.05 */
  double min_explained_rms_m; /* default 1e-7 m */
  /* NULL, or n_poses x n_joints gravity torques about each joint at the
   * campaign's poses, N m (row-major, as campaign->q) */
  const double *torque;
  /* NULL, or n_joints flags: 1 where the joint's scale was fitted (its
   * slope is then absorbed by the fit and not tested) */
  const unsigned char *scale_fitted;
} twf_pattern_options;

twf_pattern_options twf_pattern_default_options(void);

typedef struct twf_pattern_result {
  size_t n_tests;          /* n_joints * TWF_PATTERN_NKINDS, joint-major */
  twf_pattern_test *tests; /* owned; release with twf_pattern_result_clear */
  size_t n_tested;         /* families with skip TWF_PATTERN_TESTED */
  size_t n_significant;
  double p_threshold;      /* alpha / n_tested */
  size_t n_used;           /* measurements in the regression */
  size_t rank;             /* of the full regression (3 rows per measurement) */
  double alpha, min_explained, min_explained_rms_m;
} twf_pattern_result;

void twf_pattern_result_clear(twf_pattern_result *r);

/* Test the position residuals pos_err (n_meas x 3, measured - model, metres,
 * instrument frame) of model m seen from base_in_instrument (one pose per
 * instrument station of c) on campaign c;
 * the gravity torques opt->torque, when given, at the logged values;
 * use (NULL: every measurement) flags the measurements to include. The
 * target offsets are the model's (every used measurement's target must
 * have offset_known). One pass over the measurements, constant memory
 * beyond the result. TWF_OK; TWF_ERR_INVALID for bad arguments;
 * TWF_ERR_NOMEM. */
twf_status twf_residual_pattern(const twf_model *m, const twf_pose *base_in_instrument,
                                const twf_campaign *c, const double *pos_err,
                                const unsigned char *use, const twf_pattern_options *opt,
                                twf_pattern_result *out, twf_error *err);

#ifdef __cplusplus
}
#endif

#endif /* TWISTFIT_PATTERN_H */
