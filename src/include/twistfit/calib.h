/* twistfit/calib.h: the calibration job.
 * Part of the public interface of libtwistfit; include <twistfit.h>,
 * whose opening comment states the rules (units, frames, ownership,
 * errors) that hold for every declaration here. */
#ifndef TWISTFIT_CALIB_H
#define TWISTFIT_CALIB_H

#include "twistfit/common.h"
#include "twistfit/se3.h"
#include "twistfit/model.h"
#include "twistfit/campaign.h"
#include "twistfit/errmodel.h"
#include "twistfit/register.h"
#include "twistfit/accuracy.h"
#include "twistfit/asbuilt.h"
#include "twistfit/pattern.h"
#include "twistfit/compliance.h"
#include "twistfit/links.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ------------------------------------------------------------------ */
/* Calibration: Levenberg-Marquardt fit of the error model             */
/* ------------------------------------------------------------------ */

/* Outlier screen after a first fit (DEVELOPERS.md, "The maths"). */
typedef enum twf_robust {
  TWF_ROBUST_OFF = 0,  /* every measurement keeps full weight */
  TWF_ROBUST_DROP,     /* measurements beyond the threshold are dropped (listed) */
  TWF_ROBUST_HUBER,    /* Huber weights min(1, k/u) */
  TWF_ROBUST_CAUCHY    /* Cauchy weights 1 / (1 + (u/k)^2) */
} twf_robust;

/* Relative independent part a column needs to be kept by the redundancy
 * walks: the default of redundancy_tol, and the tolerance of the
 * registration refinement's walk. */
#define TWF_REDUNDANCY_TOL_DEFAULT 1e-6

typedef struct twf_calib_options {
  unsigned groups;                        /* TWF_GROUP_BIT mask; default TWF_GROUPS_GEOMETRIC */
  twf_group priority[TWF_GROUP_COUNT];    /* redundancy walk order of the groups */
  double sigma_length;  /* m: standard deviation of one coordinate where a row gives none
                           (0: unknown, estimated a posteriori from the residuals) */
  double sigma_angle;   /* rad: of one orientation component (0: sigma_length / reach) */
  twf_robust robust;    /* default TWF_ROBUST_DROP */
  double robust_threshold; /* in robust standard deviations of the error length
                              (default TWF_ROBUST_THRESHOLD_DEFAULT) */
  double check_fraction;   /* fraction of poses held out at random as check data (default 0) */
  unsigned long long seed; /* for the held-out fraction and the synthetic pose set */
  int max_iterations;      /* LM trial steps per fit (default 100) */
  double step_tol_m;       /* converged when every scaled step is below this (default 1e-10 m) */
  double redundancy_tol;   /* relative independent part to keep a column
                              (default TWF_REDUNDANCY_TOL_DEFAULT) */
  size_t synthetic_poses;  /* poses of the rich set for structural redundancy (0: automatic) */
  double weak_ratio;       /* weak when the scaled predicted std exceeds weak_ratio * sigma (default 5) */
  int accept_large;        /* 0 (default): refuse results beyond any calibration (noise over
                              1 mm, a joint line over 5 deg or 50 mm from the model's) */
  size_t worst_poses;      /* poses listed per set in the accuracy summaries (default 5) */
  int threads;             /* threads of the passes over the measurements (0, the default:
                              one per online core); every count gives the same bits */
  /* The drop screen may drop at most this fraction of the fit rows
   * (default 0.05): beyond it the readings are kept (weights 1, refit), a
   * warning says the model rather than the data is the likely problem, and
   * screen_refused counts the rows it would have dropped. 1 disables the
   * limit. Our own choice (common practice, no source): gross errors of a
   * tracker campaign are a few rows, a systematic misfit many. */
  double screen_max_fraction;
  /* The lower limit (default 0: none may be dropped; screen_max_fraction
   * when that is lower) that holds when the readings the screen keeps
   * still fail the residual pattern test: a model that lacks an effect
   * (compliance, a gear error) makes readings look bad that are not, so
   * none is dropped as a gross error while the pattern stands (the
   * warning says so). Our own choice. */
  double screen_pattern_fraction;
  /* The residual-pattern test run on the as-built residuals (alpha,
   * min_explained; torque for the torque family, NULL without a mass
   * model; scale_fitted is set by the calibration). */
  twf_pattern_options pattern;
} twf_calib_options;

/* Where the sigma of the covariance came from. */
typedef enum twf_sigma_source {
  TWF_SIGMA_GIVEN = 0,     /* the caller's sigma_length */
  TWF_SIGMA_FROM_ROWS,     /* the rows' own sigmas (their mean where a row gives none) */
  TWF_SIGMA_ESTIMATED      /* estimated a posteriori from the fit residuals */
} twf_sigma_source;

twf_calib_options twf_calib_default_options(void);

typedef enum twf_param_status {
  TWF_PARAM_KEPT = 0,        /* estimated */
  TWF_PARAM_FIXED_STRUCTURAL,/* redundant for any pose set of this arm and measurement kind */
  TWF_PARAM_FIXED_DATA       /* exactly dependent on the given poses (e.g. a joint never moved) */
} twf_param_status;

#define TWF_EXPLAIN_MAX 3
typedef struct twf_param_result {
  twf_param param;
  twf_param_status status;
  double change;   /* total change from the starting model, SI (m, rad, ratio) */
  double std;      /* predicted standard deviation, SI; NAN when fixed */
  int weak;        /* 1: poorly determined by these poses (see warnings) */
  /* For a fixed parameter: the kept parameters whose columns explain it,
   * largest scaled least-squares coefficient first. */
  size_t n_explain;
  size_t explain[TWF_EXPLAIN_MAX];
  double explain_coef[TWF_EXPLAIN_MAX];
} twf_param_result;

typedef struct twf_correlation {
  size_t a, b;  /* parameter indices */
  double rho;   /* correlation coefficient */
} twf_correlation;

typedef struct twf_outlier {
  size_t meas;      /* measurement index in the campaign */
  double error_m;   /* position error length at the first fit, m */
  double score;     /* error length in robust standard deviations */
  double weight;    /* final weight: 0 dropped, below 1 down-weighted */
} twf_outlier;

#define TWF_CORRELATIONS_MAX 8

/* The conclusion of a calibration (twf_calib_result.verdict). The rule,
 * on the basis set (twf_verdict_basis) and with the RMS position error
 * over the same measurements before (registered starting model) and after:
 *   TWF_VERDICT_DO_NOT_USE    after > (1 + TWF_VERDICT_WORSE_MARGIN) x before:
 *                             the calibrated model predicts worse than the
 *                             start (it learnt the noise, or the data and the
 *                             model do not match); the margin keeps a change
 *                             in the last digits (a re-fit on the same data)
 *                             out of it;
 *   TWF_VERDICT_NOT_IMPROVED  after > TWF_VERDICT_IMPROVED_RATIO x before:
 *                             less than a tenth better, not worth the
 *                             change (keep the previous model);
 *   TWF_VERDICT_IMPROVED      otherwise.
 * The ratio is our own choice (no standard sets one). */
typedef enum twf_calib_verdict {
  TWF_VERDICT_IMPROVED = 0,
  TWF_VERDICT_NOT_IMPROVED,
  TWF_VERDICT_DO_NOT_USE
} twf_calib_verdict;
#define TWF_VERDICT_IMPROVED_RATIO 0.9
#define TWF_VERDICT_WORSE_MARGIN 1e-3

/* Which figures the verdict used. */
typedef enum twf_verdict_basis {
  TWF_BASIS_CHECK = 0,       /* the check set, every row (none flagged) */
  TWF_BASIS_CHECK_SCREENED,  /* the check set without its flagged gross errors */
  TWF_BASIS_FIT              /* no check rows: the fit set the fit kept (not a
                                validation: a fit always improves its own data) */
} twf_verdict_basis;

/* Name of a verdict ("improved", "not improved", "do not use") and of a
 * basis ("check set", "check set without flagged rows", "fit set"). */
const char *twf_calib_verdict_name(twf_calib_verdict v);
const char *twf_verdict_basis_name(twf_verdict_basis b);

/* The observability indices of a scaled, weighted Jacobian (Sun and
 * Hollerbach 2008 compare them). All larger is better. */
typedef struct twf_observability {
  double o1;   /* (sv_1 ... sv_n)^(1/n) / sqrt(m), Borm and Menq 1991 */
  double o2;   /* sv_n / sv_1, the inverse condition number */
  double o3;   /* sv_n, the minimum singular value */
  double o4;   /* sv_n^2 / sv_1, the noise amplification index, Nahvi and
                  Hollerbach 1996 */
} twf_observability;

/* The indices from the singular values sv[0..n) (descending) of a Jacobian
 * with m rows. A zero smallest value (or n = 0) gives all four 0. */
void twf_observability_indices(const double *sv, size_t n, size_t m, twf_observability *out);

/* What one instrument station of a calibration saw (twf_calib_result). */
typedef struct twf_station_summary {
  size_t n_fit_poses, n_check_poses; /* poses with rows of that set */
  twf_stats fit_before, fit_after;     /* position errors of its kept fit rows, m */
  twf_stats check_before, check_after; /* of its kept check rows, m (count 0: none) */
} twf_station_summary;

typedef struct twf_calib_result {
  twf_model *asbuilt;         /* owned: the calibrated model (datum frame, see DEVELOPERS.md) */
  twf_pose base_in_tracker;   /* fitted base pose in the tracker frame (station 0's) */
  twf_pose base_before;       /* registered base pose of the starting model (station 0's) */
  /* Instrument stations of the campaign (twf_campaign_station_count, 1
   * without a station column; names in the campaign): the fitted and the
   * registered base pose seen from each, [0] equal to base_in_tracker and
   * base_before. The base group holds 6 parameters per station. */
  size_t n_stations;
  twf_pose station_base[TWF_STATIONS_MAX];
  twf_pose station_base_before[TWF_STATIONS_MAX];
  /* Per station: its poses and the position errors of its rows that the
   * figures keep (see excluded), before and after calibration. */
  twf_station_summary station[TWF_STATIONS_MAX];
  twf_model *registered;      /* owned: the starting model with registered target offsets */
  size_t n_params;
  twf_param_result *params;
  size_t n_kept, n_fixed_structural, n_fixed_data, n_weak;
  size_t structural_count;    /* independent parameters of the rich synthetic set */
  double condition_number;    /* of the scaled, weighted Jacobian of the kept columns */
  twf_observability observability; /* of the same Jacobian, twf_observability_indices */
  size_t n_correlations;
  twf_correlation correlations[TWF_CORRELATIONS_MAX];
  size_t n_outliers;
  twf_outlier *outliers;
  size_t n_meas;
  uint8_t *meas_set;          /* effective set (a twf_meas_set) of each measurement (held-out
                                 fraction applied); one byte each */
  /* the same quantities, in the same layout, as twf_accuracy_residuals's
   * pos_err and angle_err */
  double *pos_err_before;     /* n_meas x 3, measured - model, m, instrument frame */
  double *pos_err_after;
  double *angle_err_before;   /* n_meas orientation error angles, rad (NAN for point rows);
                                 NULL when the campaign has no 6-D row (has_orientation_any
                                 0), so that a large campaign of points stores no angles */
  double *angle_err_after;
  twf_solve_report registration;  /* refinement of base and targets on the starting model */
  twf_solve_report solve;         /* the calibration fit (last robust round) */
  int robust_rounds;
  double sigma_length;        /* sigma used for the covariance, m */
  twf_sigma_source sigma_source;
  size_t n_fit_meas, n_check_meas, n_fit_poses;
  double *joint_range;        /* n_joints: range of each joint over the fit poses, SI */
  unsigned char *target_in_fit; /* n_targets: 1 for a target with fit-set rows (only those are
                                   determined) */
  /* As-built lines against the starting model's. Only what the fit could
   * change is given: without tilts the angles, without tilts and shifts
   * the distances, without offsets the offsets are NaN, and when no joint
   * line was fitted (neither tilts nor shifts) the model keeps its own
   * frame (no datum alignment, so the lines stay exactly the starting
   * model's) and the offset is the fitted offset change (offset_raw; NaN
   * where that parameter was fixed). */
  twf_asbuilt_comparison comparison;
  /* The accuracy figures of pos_err_before and pos_err_after over the
   * effective sets (meas_set), worst_poses per set: owned. */
  twf_accuracy_summary *accuracy_before;
  twf_accuracy_summary *accuracy_after;
  /* What the fit achieved on the rows it kept: the position errors after
   * calibration over the fit set without the dropped measurements (weight
   * 0), and how many were dropped (fit rows only; 0 without a screen or
   * with reweighting). */
  twf_stats fit_screened;
  size_t n_dropped;
  /* Which measurements the figures of accuracy_before and accuracy_after
   * leave out (n_meas): 0 kept, TWF_EXCLUDED_DROPPED a fit row the screen
   * dropped (weight 0), TWF_EXCLUDED_FLAGGED a check row whose error after
   * calibration is beyond the screen's threshold against the fit's robust
   * scale (a gross error such as a broken beam; never with robust OFF).
   * The summaries are over the kept rows, so before and after compare the
   * same measurements. */
  unsigned char *excluded;
  size_t n_check_flagged;
  twf_outlier *check_flagged;  /* n_check_flagged: meas, error after (m), score; weight 1 */
  /* Position errors of the left-out rows, before and after calibration:
   * [TWF_SET_FIT] the dropped fit rows, [TWF_SET_CHECK] the flagged check
   * rows (count 0 when none). */
  twf_stats excluded_before[2], excluded_after[2];
  /* The check set with every row, flagged ones included. */
  twf_stats check_all_before, check_all_after;
  /* The verdict and the figures it used (same measurements before and
   * after): see twf_calib_verdict. */
  twf_calib_verdict verdict;
  twf_verdict_basis verdict_basis;
  twf_stats verdict_before, verdict_after;
  unsigned groups;             /* the groups fitted (the options' mask) */
  /* n_joints: per joint, TWF_GROUP_BIT of each group with a parameter of
   * this joint fixed because the fit poses cannot determine it
   * (TWF_PARAM_FIXED_DATA, e.g. a joint that did not move): its figures
   * in a report are not determined. */
  unsigned *joint_undetermined;
  /* Fit rows the drop screen would have dropped beyond screen_max_fraction
   * (0 when the screen ran as usual): they were kept. */
  size_t screen_refused;
  /* Whether the as-built residuals (fit and check rows the figures keep)
   * look like noise: see twistfit/pattern.h. */
  twf_pattern_result pattern;
  /* The parameter covariance: n_params x n_params, row-major, SI, in the
   * layout of params (rows and columns of fixed parameters 0), scaled by
   * the a-posteriori variance factor when sigma was estimated; params[].std
   * and the correlations are read from it. */
  double *covariance;
  /* Singular values of the scaled, weighted Jacobian of the kept columns,
   * largest first (n_singular of them, normally n_kept): the condition
   * number and the observability indices derive from them. */
  size_t n_singular;
  double *singular_values;
  /* The sigma of the row weights of that Jacobian (m): a singular value
   * s (1/m) belongs to a direction whose standard deviation, length at
   * the arm's reach, is sigma_length / (s * singular_value_sigma) m; so
   * s = 1 / singular_value_sigma is where it equals the noise. */
  double singular_value_sigma;
  /* The as-built link parameters (twistfit/links.h) in the forms the
   * starting model's lines choose: value[] the as-built model's, reference[]
   * the starting model's, std[] propagated from covariance, why[] including
   * what this fit left open (twf_links_mark_fit). Intrinsic: the same
   * whichever redundant parameters the walk fixed. Values and link_change
   * (as-built - starting, 5 per row, angles wrapped, NAN where not in the
   * form) as twf_compare_links gives them. */
  twf_links links;
  double *link_change;
  /* With the compliance group: per joint the compliance found, its
   * stiffness and the deflection at the fit poses' worst configuration
   * (twistfit/compliance.h); n_joints 0 without the group. */
  twf_compliance_summary compliance;
  twf_trace trace;            /* stage timings and solver steps, for a verbose report */
} twf_calib_result;

#define TWF_EXCLUDED_DROPPED 1
#define TWF_EXCLUDED_FLAGGED 2

void twf_calib_result_free(twf_calib_result *r);

/* Calibrate: register start to the campaign (base pose and the offsets of
 * targets declared without one) and refine (twf_register_and_refine on the
 * effective sets), then fit the chosen groups by
 * Levenberg-Marquardt with redundant parameters fixed, screen outliers,
 * and return everything a report shows. start is not modified. On failure
 * returns the status with err filled and *out NULL. */
twf_status twf_calibrate(const twf_model *start, const twf_campaign *c,
                         const twf_calib_options *opt, twf_calib_result **out,
                         twf_warnings *warnings, twf_error *err);

/* ------------------------------------------------------------------ */
/* Uncertainty by resampling: a bootstrap over the fit poses           */
/* ------------------------------------------------------------------ */

typedef struct twf_resample_param {
  size_t n;        /* refits in which the parameter was estimated */
  double mean;     /* of its value over those refits, SI */
  double std;      /* their sample standard deviation, SI (NaN for n < 2) */
  double ratio;    /* std over the base result's predicted std (NaN when either is missing) */
  int disagree;    /* 1: ratio above 2 or below 1/2 (a warning names it) */
} twf_resample_param;

/* The check-set figures of the refits (position error after calibration
 * over the base result's check rows, m): 0 RMS, 1 p95, 2 max. */
#define TWF_RESAMPLE_FIGURES 3

typedef struct twf_resample_result {
  size_t n_refits;            /* asked for */
  size_t n_ok;                /* refits that calibrated (the others are refused fits) */
  unsigned long long seed;
  size_t n_params;            /* = the base result's */
  twf_resample_param *params; /* owned */
  size_t n_check;             /* refits with check rows */
  double check_base[TWF_RESAMPLE_FIGURES]; /* the base result's figures */
  double check_mean[TWF_RESAMPLE_FIGURES];
  double check_std[TWF_RESAMPLE_FIGURES];
} twf_resample_result;

void twf_resample_result_free(twf_resample_result *r);

/* Bootstrap the calibration base (made by twf_calibrate(start, c, opt)):
 * n_refits times, draw as many poses as base had fit poses, with
 * replacement, from them (refit k draws from its own splitmix stream of
 * seed and k), keep base's check rows as they are, and calibrate again
 * with opt (held-out fraction 0: the sets are base's). Each parameter's
 * spread over the refits stands beside its predicted std, with a warning
 * where they disagree by more than a factor 2; the check-set figures get
 * their spread too. With several instrument stations the draw is
 * stratified: each station's fit poses are drawn from that station's, so
 * every station keeps its pose count. The refits run on opt->threads threads (0: one per
 * core), one refit per thread; the result is the same bits for every
 * thread count. */
twf_status twf_calibrate_resample(const twf_model *start, const twf_campaign *c,
                                  const twf_calib_options *opt, const twf_calib_result *base,
                                  size_t n_refits, unsigned long long seed,
                                  twf_resample_result **out, twf_warnings *warnings,
                                  twf_error *err);

/* The plain-words hints (twf_error.hint) of twf_calibrate and of the
 * solvers it shares with twf_refine_base. A front end that has options of
 * its own for these fields recognises the hint with twf_advice_of and may
 * print its own wording. */
typedef enum twf_advice {
  TWF_ADVICE_NONE = 0,            /* another hint, or none */
  TWF_ADVICE_FIX_MORE,            /* fix more parameters (fewer groups) or measure more varied poses */
  TWF_ADVICE_MORE_POSES,          /* measure more poses or fit fewer groups */
  TWF_ADVICE_MORE_POSES_OR_SIGMA, /* ... or give the noise (sigma_length) */
  TWF_ADVICE_ACCEPT_LARGE         /* check the model and data; accept_large if really so far */
} twf_advice;

/* The library's hint text of a (never NULL; "" for TWF_ADVICE_NONE). */
const char *twf_advice_text(twf_advice a);
/* Which advice err->hint is (TWF_ADVICE_NONE for any other text or NULL). */
twf_advice twf_advice_of(const twf_error *err);


#ifdef __cplusplus
}
#endif

#endif /* TWISTFIT_CALIB_H */
