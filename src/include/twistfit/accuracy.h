/* twistfit/accuracy.h: accuracy figures and ISO 9283.
 * Part of the public interface of libtwistfit; include <twistfit.h>,
 * whose opening comment states the rules (units, frames, ownership,
 * errors) that hold for every declaration here. */
#ifndef TWISTFIT_ACCURACY_H
#define TWISTFIT_ACCURACY_H

#include "twistfit/common.h"
#include "twistfit/se3.h"
#include "twistfit/model.h"
#include "twistfit/campaign.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ------------------------------------------------------------------ */
/* Accuracy figures                                                    */
/* ------------------------------------------------------------------ */

/* Per-measurement errors of a model on a campaign, measured - model:
 *   pos_err[3 * i + c]: position error of measurement i, tracker frame,
 *                       metres (y_measured - B F(q) t_k).
 *   angle_err[i]:       for a 6-D row, the angle of R_meas R_model^T in
 *                       radians (R_model = R_B R_F, the flange orientation
 *                       in the tracker frame): the length of the
 *                       calibration's orientation residual
 *                       log(R_meas R_model^T); NaN for point rows.
 * Either output may be NULL (not both); both are caller-provided arrays of
 * campaign->n_meas (x 3) entries. target_offsets: n_targets x 3 metres,
 * flange frame, or NULL for the model's (then every measured target must
 * have offset_known, else TWF_ERR_MISSING). Every row is computed, fit and
 * check alike. Returns TWF_OK, TWF_ERR_INVALID, TWF_ERR_MISSING or
 * TWF_ERR_NOMEM. */
/* base_in_tracker: one pose per instrument station of the campaign
 * (twf_campaign_station_count; a single pose without a station column),
 * each pose's prediction made with its station's. */
twf_status twf_accuracy_residuals(const twf_model *model,
                                  const twf_pose *base_in_tracker,
                                  const double *target_offsets,
                                  const struct twf_campaign *campaign,
                                  double *pos_err, double *angle_err,
                                  twf_error *err);

/* Summary statistics of a set of error lengths (metres or radians). */
typedef struct twf_stats {
  size_t count;
  double mean;
  double rms;       /* sqrt(mean of squares) */
  double p95;       /* 95th percentile, twf_accuracy_percentile(., 0.95) */
  double max;
  size_t max_index; /* where the max is (first of equal maxima): an index
                       into the values given, or in a summary the
                       campaign's measurement index */
} twf_stats;          /* count 0: every figure NaN, max_index SIZE_MAX */

/* Percentile p in [0, 1] of sorted[0..n) (ascending), Hyndman and Fan
 * (1996) definition 7, numpy's default: with h = (n - 1) p, linear
 * interpolation between the order statistics x[floor h] and x[floor h + 1]
 * (0-based). NaN when n = 0 or p is outside [0, 1]. */
double twf_accuracy_percentile(const double *sorted, size_t n, double p);

/* Statistics of values[0..n) (not modified; n may be 0). TWF_ERR_VALUE for
 * a NaN, TWF_ERR_NOMEM, TWF_ERR_INVALID for NULL. O(n log n). */
twf_status twf_accuracy_stats(const double *values, size_t n, twf_stats *out,
                              twf_error *err);

/* One of the worst poses: the largest position error among its
 * measurements. */
typedef struct twf_accuracy_worst {
  size_t pose;     /* campaign pose index: its id is campaign->pose_ids[pose] */
  size_t meas;     /* campaign measurement index with that error */
  double error_m;  /* its length, metres */
} twf_accuracy_worst;

/* Figures per set, indexed by the set value: [TWF_SET_FIT] and
 * [TWF_SET_CHECK]. Allocated by twf_accuracy_summarize, released with
 * twf_accuracy_summary_free. */
typedef struct twf_accuracy_summary {
  size_t n_targets;
  twf_stats position[2];           /* |pos_err| over all targets, metres */
  twf_stats orientation[2];        /* angle_err over the 6-D rows, radians */
  twf_stats *target_position;      /* [2 * k + set]: target k only */
  twf_stats *target_orientation;   /* [2 * k + set] */
  size_t n_worst[2];               /* at most k_worst */
  twf_accuracy_worst *worst[2];    /* largest error first (ties: lower pose
                                      index first) */
} twf_accuracy_summary;

/* Summarise the residuals of twf_accuracy_residuals (pos_err required,
 * angle_err may be NULL) for campaign, whose target indices must be below
 * n_targets: count, mean, RMS, 95th percentile and max of the error
 * lengths per target and overall, for the fit and check sets separately,
 * and the k_worst poses of each set. NULL with err filled on failure
 * (TWF_ERR_INVALID, TWF_ERR_VALUE for a non-finite position error,
 * TWF_ERR_NOMEM). O(n log n). */
twf_accuracy_summary *
twf_accuracy_summarize(const struct twf_campaign *campaign, size_t n_targets,
                       const double *pos_err, const double *angle_err,
                       size_t k_worst, twf_error *err);
/* The same over the measurements i with excluded[i] == 0 only (excluded
 * NULL: every one); the excluded rows' errors are not read. */
twf_accuracy_summary *
twf_accuracy_summarize_kept(const struct twf_campaign *campaign, size_t n_targets,
                            const double *pos_err, const double *angle_err,
                            const unsigned char *excluded, size_t k_worst,
                            twf_error *err);
void twf_accuracy_summary_free(twf_accuracy_summary *s);

/* Acceptance of a model against tolerances. */
typedef struct twf_acceptance_limits {
  double rms_m, p95_m, max_m; /* position error limits, m; 0: not set */
  double angle_max_rad;       /* orientation error limit, rad; 0: not set */
} twf_acceptance_limits;

enum { TWF_ACCEPT_RMS = 0, TWF_ACCEPT_P95, TWF_ACCEPT_MAX, TWF_ACCEPT_ANGLE_MAX, TWF_ACCEPT_COUNT };

typedef struct twf_acceptance {
  int set;                       /* the set judged: TWF_SET_CHECK when it has
                                    rows, else TWF_SET_FIT */
  size_t n_limits;               /* limits set */
  double limit[TWF_ACCEPT_COUNT];/* as given (0: not set) */
  double value[TWF_ACCEPT_COUNT];/* the set's RMS, p95, max (m), max angle (rad) */
  int pass[TWF_ACCEPT_COUNT];    /* 1: within the limit (value <= limit); 0 for
                                    a limit not set */
  int accepted;                  /* 1 when every limit set passes (1 with none) */
} twf_acceptance;

/* Judge the summary s against lim: the check set when it has position
 * rows, else the fit set; a value that is NaN (no 6-D rows for an angle
 * limit) fails. TWF_ERR_INVALID for NULL or a negative limit. */
twf_status twf_accuracy_accept(const twf_accuracy_summary *s, const twf_acceptance_limits *lim,
                               twf_acceptance *out, twf_error *err);

/* ISO 9283:1998 pose accuracy (7.2.1) and pose repeatability (7.2.3) where
 * a campaign revisits a commanded pose. */
typedef struct twf_iso9283_options {
  /* Poses are the same commanded pose when every joint value agrees within
   * joint_tol (rad or m; default 1e-6), chained joint by joint (single
   * linkage: see joint_spread). */
  double joint_tol;
  /* The same for prismatic joints, m (0, the default: joint_tol). */
  double joint_tol_prismatic;
  size_t min_visits; /* visits needed per target, default and minimum 2 */
  int set;           /* -1 (default): all rows; else TWF_SET_FIT or
                        TWF_SET_CHECK only */
} twf_iso9283_options;

twf_iso9283_options twf_iso9283_default_options(void);

/* Figures of one target at one commanded pose, all metres, tracker frame.
 * With x_j the n attained (measured) positions and x_c the commanded one:
 *   barycentre  xbar = sum x_j / n
 *   AP_P        |xbar - x_c|, components ap = xbar - x_c      (7.2.1)
 *   RP_l        lbar + 3 S_l, l_j = |x_j - xbar|, lbar = mean l_j,
 *               S_l = sqrt(sum (l_j - lbar)^2 / (n - 1))      (7.2.3) */
typedef struct twf_iso9283_entry {
  size_t group;          /* commanded-pose number, 0-based, in order of the
                            first visit */
  size_t first_pose;     /* campaign pose index of the first visit */
  size_t n_poses;        /* visits of this commanded pose */
  size_t target;         /* model target index */
  size_t n;              /* attained positions of this target */
  double commanded[3];   /* model prediction at the mean joint values of
                            the visits, with the given base and offsets */
  double barycentre[3];
  double ap[3];          /* AP_x, AP_y, AP_z */
  double ap_p;           /* AP_P */
  double l_mean;         /* lbar */
  double s_l;            /* S_l */
  double rp;             /* RP_l */
  double joint_spread;   /* largest (max - min) of one joint over the
                            visits, rad or m: above joint_tol only when
                            single linkage chained nearby poses */
} twf_iso9283_entry;

/* Orientation figures of one commanded pose from its 6-D rows (recalled
 * from ISO 9283:1998 7.2.1 and 7.2.3, not checked against the text): with
 * (a_j, b_j, c_j) the rotations of the j-th attained flange orientation
 * about the robot base frame's fixed x, y, z axes relative to the
 * commanded one (roll-pitch-yaw of D_j = R_attained R_commanded^T, both in
 * the base frame; to first order the standard's a_j - a_c, b_j - b_c,
 * c_j - c_c, without its wrap-around at +-180 deg):
 *   AP_a = mean a_j (likewise b, c)                              (7.2.1)
 *   RP_a = 3 S_a, S_a = sqrt(sum (a_j - mean a)^2 / (n - 1))     (7.2.3)
 * all in radians. */
typedef struct twf_iso9283_orientation {
  size_t group;          /* as in the entries */
  size_t first_pose;
  size_t n;              /* visits with a 6-D row */
  double ap[3];          /* AP_a, AP_b, AP_c */
  double rp[3];          /* RP_a, RP_b, RP_c (the +- half-width) */
} twf_iso9283_orientation;

/* The number of cycles of the standard's pose test (ISO 9283:1998 7.2.1:
 * each pose visited 30 times; recalled from memory). */
#define TWF_ISO9283_CYCLES 30

typedef struct twf_iso9283 {
  size_t n_groups;             /* commanded poses with at least one entry */
  size_t n_entries;
  twf_iso9283_entry *entries;  /* by group, then target; NULL when none */
  /* Summary over the entries: the worst AP_P and RP_l and where they are
   * (entry indices; SIZE_MAX and NaN when there are no entries), and the
   * fewest and most visits of an entry (its cycles). */
  double ap_p_max, rp_max;
  size_t ap_p_worst, rp_worst;
  size_t min_cycles, max_cycles;
  /* Orientation figures per commanded pose with at least min_visits 6-D
   * visits, and the worst |AP| and RP component over them (rad; NaN when
   * none). */
  size_t n_orientation;
  twf_iso9283_orientation *orientation;
  double ap_angle_max, rp_angle_max;
} twf_iso9283;

/* Group the campaign's poses by commanded joint values (sorting joint by
 * joint, O(n_joints n log n)) and compute the figures for every group and
 * target with at least min_visits measurements. The commanded position is
 * the model's prediction with base_in_tracker (one pose per station of the
 * campaign; visits from different stations are never grouped together) and target_offsets (NULL:
 * the model's, which must then be known). options NULL for the defaults.
 * Returns a result to free with twf_iso9283_free (n_entries 0 when no pose
 * repeats), or NULL with err filled (TWF_ERR_INVALID, TWF_ERR_MISSING,
 * TWF_ERR_NOMEM). */
twf_iso9283 *twf_accuracy_iso9283(const twf_model *model,
                                  const twf_pose *base_in_tracker,
                                  const double *target_offsets,
                                  const struct twf_campaign *campaign,
                                  const twf_iso9283_options *options,
                                  twf_error *err);
void twf_iso9283_free(twf_iso9283 *r);


#ifdef __cplusplus
}
#endif

#endif /* TWISTFIT_ACCURACY_H */
