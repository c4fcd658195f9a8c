/* twistfit/plan.h: before the measuring day: the predicted accuracy of a
 * calibration, the assessment of a pose set, and the choice of poses.
 * Part of the public interface of libtwistfit; include <twistfit.h>,
 * whose opening comment states the rules (units, frames, ownership,
 * errors) that hold for every declaration here.
 *
 * Every figure here is first order: the parameter covariance of the kept
 * parameters, C = (J^T W J)^-1 over the scaled, weighted Jacobian of the
 * poses (W = 1/sigma^2 per coordinate), propagated through the forward
 * kinematics. The predicted uncertainty of a target at a configuration is
 * sqrt(trace(G C G^T)) with G the 3 x p derivative of its position: the
 * root-mean-square length of its predicted position error, in the
 * instrument's frame with the uncertainty of the base pose included (what
 * a held-out check set measures). It does not depend on which redundant
 * parameters were fixed. */
#ifndef TWISTFIT_PLAN_H
#define TWISTFIT_PLAN_H

#include "twistfit/common.h"
#include "twistfit/se3.h"
#include "twistfit/model.h"
#include "twistfit/campaign.h"
#include "twistfit/errmodel.h"
#include "twistfit/accuracy.h"
#include "twistfit/calib.h"

#ifdef __cplusplus
extern "C" {
#endif


/* ------------------------------------------------------------------ */
/* Predicted accuracy                                                  */
/* ------------------------------------------------------------------ */

/* The configurations over which workspace figures are computed: seeded,
 * uniform within the joint limits less a margin (twf_simulate_joints). */
typedef struct twf_workspace_options {
  size_t n_configs;         /* default 1000 */
  double limit_margin;      /* fraction of each span kept clear of the limits (default 0.05) */
  unsigned long long seed;  /* default 20261211 */
} twf_workspace_options;

twf_workspace_options twf_workspace_default_options(void);

/* A model with the covariance of its kept parameters: predicts the
 * uncertainty of the tool points (the targets measured) and, for 6-D data,
 * of the flange orientation, at any configuration. Opaque; one per thread. */
typedef struct twf_predictor twf_predictor;

void twf_predictor_free(twf_predictor *pr);
/* 1 when the predictor was built for 6-D data (orientation figures). */
int twf_predictor_has_orientation(const twf_predictor *pr);
/* At logged joint values q (SI): position_m receives the predicted
 * standard uncertainty of the tool point position (m), the root mean
 * square over the tool points of sqrt(trace(G C G^T)); orientation_rad
 * (may be NULL) that of the flange orientation (rad, NaN without 6-D
 * data). O(n p + t p^2) for t tool points. */
void twf_predictor_at(twf_predictor *pr, const double *q, double *position_m,
                      double *orientation_rad);

/* Predicted uncertainties at a set of configurations. */
typedef struct twf_prediction {
  size_t n;               /* configurations */
  size_t n_joints;
  double *q;              /* n x n_joints logged joint values, SI */
  double *position;       /* n: predicted position uncertainty, m */
  double *orientation;    /* n: of the flange orientation, rad; NULL without 6-D data */
  twf_stats position_stats;    /* over the n values; max_index is the worst configuration */
  twf_stats orientation_stats; /* count 0 without 6-D data */
} twf_prediction;

void twf_prediction_free(twf_prediction *p);
/* At the n configurations q (n x n_joints, SI; copied). NULL with err
 * filled when out of memory. */
twf_prediction *twf_predict_at_configs(twf_predictor *pr, const double *q, size_t n,
                                       twf_error *err);
/* Over seeded random configurations within the limits (wo NULL: defaults). */
twf_prediction *twf_predict_workspace(twf_predictor *pr, const twf_workspace_options *wo,
                                      twf_error *err);

/* The predictor of a calibration: the covariance is recomputed at the
 * as-built model and fitted base pose over the result's fit set with the
 * final weights of the outlier screen (the listed measurements'; the rows
 * a Cauchy screen does not list are taken at full weight), with the sigma
 * the result reports (given, from the rows, or estimated), for the kept
 * parameters. opt: the options of the calibration (NULL: defaults); only
 * sigma_angle is read. c: the campaign calibrated. */
twf_predictor *twf_predictor_from_calibration(const twf_calib_result *res,
                                              const twf_campaign *c,
                                              const twf_calib_options *opt, twf_error *err);

/* What calibrate reports as its predicted accuracy. */
typedef struct twf_calib_prediction {
  twf_prediction *workspace;  /* seeded random configurations within the limits */
  twf_prediction *check;      /* at the check poses (n = 0 without a check set) */
  size_t *check_pose;         /* check->n campaign pose indices */
  /* Predicted RMS of the measured check errors (m): model uncertainty and
   * measurement noise together, sqrt(mean(u^2 + 3 sigma^2)) over the check
   * rows, to set beside the measured figure; NaN without a check set. */
  double check_rms_with_noise;
} twf_calib_prediction;

void twf_calib_prediction_free(twf_calib_prediction *p);
/* The predicted accuracy of a calibration result (see
 * twf_predictor_from_calibration) over the workspace (wo NULL: defaults)
 * and at the effective check poses. */
twf_status twf_calib_predict(const twf_calib_result *res, const twf_campaign *c,
                             const twf_calib_options *opt, const twf_workspace_options *wo,
                             twf_calib_prediction **out, twf_error *err);

/* ------------------------------------------------------------------ */
/* Assessment of a pose set before measuring                           */
/* ------------------------------------------------------------------ */

typedef struct twf_assess_options {
  /* groups, priority, sigma_length (required, > 0: the instrument's noise
   * per coordinate, m), sigma_angle, redundancy_tol, synthetic_poses,
   * weak_ratio and seed (of the synthetic pose set), as for calibrate */
  twf_calib_options calib;
  int orientation;               /* 1: 6-D rows (flange orientation) at every target */
  const unsigned char *targets;  /* n_targets flags of the targets measured, NULL: every
                                    one with a known offset */
  twf_workspace_options workspace;
} twf_assess_options;

/* calib defaults with sigma_length 0.02 mm (a laser tracker at a few
 * metres: common practice, no source), workspace defaults. */
twf_assess_options twf_assess_default_options(void);

typedef struct twf_assessment {
  size_t n_poses;
  size_t n_rows;                 /* measured coordinates */
  size_t n_params;
  twf_param_result *params;      /* status, predicted std (SI), weak, explanation; change 0 */
  size_t n_kept, n_fixed_structural, n_fixed_data, n_weak;
  size_t structural_count;       /* independent parameters of the rich synthetic set */
  double condition_number;       /* of the scaled, weighted Jacobian of the kept columns */
  twf_observability observability; /* O1 to O4, twf_observability_indices */
  size_t n_correlations;
  twf_correlation correlations[TWF_CORRELATIONS_MAX];
  size_t n_joints;
  double *joint_min, *joint_max; /* n_joints: exercised range of each joint, SI */
  twf_prediction *workspace;     /* predicted accuracy over the workspace */
  double log_det;                /* mean log eigenvalue of the scaled, weighted normal
                                    matrix of the kept columns: the D criterion */
} twf_assessment;

void twf_assessment_free(twf_assessment *a);

/* Assess the n_poses poses q (n_poses x n_joints, SI) for calibrating m:
 * structural redundancy on a rich synthetic set, the walk on these poses,
 * predicted standard deviations, weak parameters, correlations,
 * observability, workspace figures. Warnings (w, may be NULL) as
 * twf_calibrate gives them: too few poses, joints moved too little, weak
 * parameters, strong correlations. A pose set that determines nothing
 * still gives an assessment (every figure saying so): errors are for bad
 * arguments and memory only. */
twf_status twf_assess(const twf_model *m, const double *q, size_t n_poses,
                      const twf_assess_options *opt, twf_assessment **out,
                      twf_warnings *w, twf_error *err);

/* ------------------------------------------------------------------ */
/* Planning: choosing the poses                                        */
/* ------------------------------------------------------------------ */

typedef enum twf_plan_criterion {
  TWF_PLAN_WORKSPACE = 0, /* minimise the RMS predicted position uncertainty over the workspace
                             (an I-optimal design), m */
  TWF_PLAN_D,             /* maximise the mean log eigenvalue of the information (D-optimal) */
  TWF_PLAN_O4             /* maximise the noise amplification index O4 */
} twf_plan_criterion;

const char *twf_plan_criterion_name(twf_plan_criterion c); /* "workspace", "d", "o4" */
twf_status twf_plan_criterion_parse(const char *name, twf_plan_criterion *out);

/* A joint-space box that no pose may enter: a pose is inside when
 * lo[j] <= q[j] <= hi[j] for every joint (use -HUGE_VAL and HUGE_VAL for
 * joints the box does not constrain). */
typedef struct twf_keepout {
  double *lo, *hi; /* n_joints each, SI; borrowed */
} twf_keepout;

typedef struct twf_plan_options {
  twf_assess_options assess;    /* how the poses will be measured, and the figures */
  size_t count;                 /* poses to choose (required) */
  twf_plan_criterion criterion; /* default TWF_PLAN_WORKSPACE */
  /* Candidates: pool (n_pool x n_joints, SI, poses known to be reachable)
   * or, when pool is NULL, n_candidates drawn within the limits less
   * limit_margin, seeded. Candidates outside the limits are refused. */
  const double *pool;
  size_t n_pool;
  size_t n_candidates;          /* default 5000 */
  double limit_margin;          /* default 0.05 */
  /* The instrument, in the robot base frame: every measured target must
   * lie between range_min and range_max from position (m) and, when
   * acceptance_rad > 0, face it: the angle between target_axis (flange
   * frame, the direction the reflector looks) and the direction to the
   * instrument at most acceptance_rad (a reflector's acceptance cone:
   * common practice, no source). */
  int has_instrument;
  double instrument[3];
  double range_min, range_max;  /* default 0 and HUGE_VAL */
  double acceptance_rad;        /* default 0: no cone */
  double target_axis[3];        /* default 0 0 1 */
  /* Several instrument stations: n_instruments positions (n x 3, robot
   * base frame, m; borrowed) that replace instrument when n_instruments
   * > 0. A pose is feasible when one station sees every measured target
   * (range and acceptance cone as above); it is measured from the first
   * such station in the given order. The criterion is that of one base
   * pose: the 6 base parameters each further station adds are not in it
   * (DEVELOPERS.md). At most TWF_STATIONS_MAX. */
  size_t n_instruments;
  const double *instruments;
  size_t n_keepout;
  const twf_keepout *keepout;
  /* Exchange refinement after the greedy build-up (DETMAX, Mitchell
   * 1974): excursions tried (default 60) and their deepest length
   * (default 3). */
  size_t excursions;
  size_t max_depth;
  /* Candidates scored per greedy or exchange step (0: automatic,
   * (pool / count) log 100 and at least 500: stochastic greedy). */
  size_t sample;
  unsigned long long seed;      /* default 1 */
} twf_plan_options;

twf_plan_options twf_plan_default_options(void);

typedef struct twf_plan_result {
  size_t n, n_joints;
  double *q;                 /* n x n_joints chosen poses, SI, in travel order */
  size_t *candidate;         /* n: index of each pose in the candidate list */
  size_t n_candidates;       /* candidates considered */
  size_t n_feasible;         /* of which satisfy every constraint */
  size_t n_rejected[4];      /* rejected: [0] outside the limits, [1] in a keep-out box,
                                [2] out of the instrument's range, [3] facing away */
  double score_greedy;       /* criterion after the greedy build-up (twf_plan_score's value) */
  double score;              /* after the exchange refinement */
  size_t exchanges;          /* accepted excursions */
  double travel_before;      /* joint-space path length (rad, prismatic m / reach) in choice order */
  double travel;             /* after nearest neighbour and 2-opt ordering */
  twf_assessment *assessment;/* the assess figures of the chosen set */
  /* n: the station each pose is measured from (index into the options'
   * instruments; poses grouped by station, each group ordered for
   * travel); NULL without several instruments. */
  size_t *station;
} twf_plan_result;

void twf_plan_result_free(twf_plan_result *r);

/* Choose opt->count poses from the candidates that satisfy the
 * constraints, maximising the criterion: greedy build-up with rank-one
 * (rank-r for r measured coordinates per pose) updates of the
 * information matrix, then exchange excursions, then ordering for travel.
 * Deterministic for a seed. TWF_ERR_DEGENERATE when fewer feasible
 * candidates than count remain. */
twf_status twf_plan(const twf_model *m, const twf_plan_options *opt, twf_plan_result **out,
                    twf_warnings *w, twf_error *err);

/* The plan criterion of any pose set (n x n_joints, SI) for the options'
 * criterion, as twf_plan reports it: WORKSPACE the RMS predicted position
 * uncertainty (m, lower is better; over the workspace configurations of
 * opt->assess.workspace), D the mean log eigenvalue, O4 the index (both
 * higher is better). */
twf_status twf_plan_score(const twf_model *m, const double *q, size_t n,
                          const twf_plan_options *opt, double *score, twf_error *err);

/* 1 when score a is better than b for criterion c. */
int twf_plan_better(twf_plan_criterion c, double a, double b);

/* Check one pose against the constraints of opt (limits, keep-out boxes,
 * range, acceptance angle): 0 when it satisfies them all, else 1 + the
 * index of the first broken one in twf_plan_result.n_rejected's order. */
int twf_plan_pose_check(const twf_model *m, const twf_plan_options *opt, const double *q);
/* The station that measures pose q: the first of the options' instruments
 * (or the one instrument: 0) that sees every measured target, -1 when none
 * does (or the pose breaks the limits or a keep-out box); 0 without an
 * instrument. */
long twf_plan_pose_station(const twf_model *m, const twf_plan_options *opt, const double *q);

#ifdef __cplusplus
}
#endif

#endif /* TWISTFIT_PLAN_H */
