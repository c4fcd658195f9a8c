/* twistfit/simulate.h: synthetic campaigns and perturbed models.
 * Part of the public interface of libtwistfit; include <twistfit.h>,
 * whose opening comment states the rules (units, frames, ownership,
 * errors) that hold for every declaration here. */
#ifndef TWISTFIT_SIMULATE_H
#define TWISTFIT_SIMULATE_H

#include "twistfit/common.h"
#include "twistfit/se3.h"
#include "twistfit/model.h"
#include "twistfit/campaign.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ------------------------------------------------------------------ */
/* Simulation: synthetic campaigns and perturbed models                */
/* ------------------------------------------------------------------ */

typedef struct twf_simulate_options {
  size_t n_poses;          /* default 100 */
  double sigma_m;          /* Gaussian noise per coordinate, m (default 0) */
  int orientation;         /* 1: 6-D rows (flange orientation) too */
  double sigma_rad;        /* orientation noise per axis, rad */
  double check_fraction;   /* fraction of poses tagged as check data */
  double limit_margin;     /* fraction of each joint's span kept clear of its limits (default 0.05) */
  const unsigned char *targets; /* n_targets flags of targets to measure, NULL: every known one */
  unsigned long long seed; /* default 1 */
  /* Given poses instead of random ones: n_poses x n_joints logged joint
   * values, SI (borrowed); NULL (default): drawn within the limits. */
  const double *q;
  /* Gross errors: each measurement is, with this probability (default 0),
   * displaced by outlier_m (default 1 mm) in a random direction (a broken
   * beam, a reflector in the wrong nest). The draws happen only when the
   * fraction is positive, so that campaigns without them keep their
   * values. */
  double outlier_fraction;
  double outlier_m;
  /* Several instrument stations (default n_stations 0: one, the
   * campaign without a station column): station s sees the arm's base at
   * station_base[s] (robot base frame in that station's instrument frame)
   * and is named station_names[s]; pose i is seen from station
   * pose_station[i], or with pose_station NULL from station i mod
   * n_stations (in turn). All borrowed; base_in_tracker is then not used.
   * The draws (poses, noise, outliers) do not depend on the stations: the
   * same seed gives the same poses and the same noise in each station's
   * frame. */
  size_t n_stations;
  const twf_pose *station_base;
  const char (*station_names)[TWF_NAME_MAX];
  const size_t *pose_station;
} twf_simulate_options;

twf_simulate_options twf_simulate_default_options(void);

/* Random joint values within m's limits less margin (a fraction of each
 * span), uniform; +-pi or +-0.1 m for joints without limits. state is the
 * caller's seeded generator state. */
void twf_simulate_joints(const twf_model *m, double margin,
                         unsigned long long *state, double *q);

/* A campaign measured on the arm truth seen from the tracker at
 * base_in_tracker: random (or the given) poses, every selected target with a known offset
 * at every pose, Gaussian noise. Pose ids P0001, P0002, ... With several
 * stations (options) base_in_tracker may be NULL. NULL with err
 * filled on failure. */
twf_campaign *twf_simulate_campaign(const twf_model *truth,
                                    const twf_pose *base_in_tracker,
                                    const twf_simulate_options *opt,
                                    twf_error *err);

/* Standard deviations of a random perturbation of a model (SI). */
typedef struct twf_perturbation {
  double tilt_rad;    /* axis tilts and home rotation */
  double shift_m;     /* axis shifts, home translation, prismatic offsets */
  double offset_rad;  /* revolute joint offsets */
  double target_m;    /* target offsets */
  double scale;       /* joint scale */
} twf_perturbation;

/* Perturb m in place with seeded Gaussian errors of the given sizes: the
 * "true" arm of a synthetic campaign. */
void twf_model_perturb(twf_model *m, const twf_perturbation *mag,
                       unsigned long long seed);


#ifdef __cplusplus
}
#endif

#endif /* TWISTFIT_SIMULATE_H */
