/* bench_calibrate.c: speed of a full calibration (registration, redundancy
 * walks, Levenberg-Marquardt, outlier screen, covariance) on a simulated
 * 7-axis campaign. Not a test: `make bench` runs it and prints the figures
 * recorded in DEVELOPERS.md.
 *
 *   usage: bench_calibrate [POSES [TARGETS [REPEATS]]]   (default 10000 3 3) */
#include "twistfit.h"
#include "../arms.h"

#include <gsl/gsl_errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

static double now(void)
{
  struct timespec t;
  clock_gettime(CLOCK_MONOTONIC, &t);
  return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

int main(int argc, char **argv)
{
  size_t n_poses = argc > 1 ? strtoul(argv[1], NULL, 10) : 10000;
  size_t n_targets = argc > 2 ? strtoul(argv[2], NULL, 10) : 3;
  int repeats = argc > 3 ? atoi(argv[3]) : 3, r;
  const twf_perturbation mag = { 1e-3, 0.5e-3, 2e-3, 1e-3, 0.0 };
  twf_model *nominal, *truth;
  twf_simulate_options so = twf_simulate_default_options();
  twf_calib_options co = twf_calib_default_options();
  unsigned char sel[3] = { 1, 1, 1 };
  twf_campaign *c;
  twf_error err;
  twf_pose B;
  double best = 1e300, t_sim;
  size_t k;

  gsl_set_error_handler_off();
  nominal = test_arm_model(ARM_TF7);
  truth = twf_model_copy(nominal);
  twf_model_perturb(truth, &mag, 7);
  test_tracker_base(&B);
  for (k = n_targets; k < 3; k++)
    sel[k] = 0;
  so.n_poses = n_poses;
  so.sigma_m = 2e-5;
  so.seed = 8;
  so.targets = sel;
  so.check_fraction = 0.1;
  t_sim = now();
  c = twf_simulate_campaign(truth, &B, &so, &err);
  if (c == NULL) {
    fprintf(stderr, "simulation failed: %s\n", err.message);
    return 1;
  }
  t_sim = now() - t_sim;
  co.sigma_length = 2e-5;
  for (r = 0; r < repeats; r++) {
    twf_calib_result *res = NULL;
    double t0 = now(), dt;
    if (twf_calibrate(nominal, c, &co, &res, NULL, &err) != TWF_OK) {
      fprintf(stderr, "calibration failed: %s\n", err.message);
      return 1;
    }
    dt = now() - t0;
    if (dt < best)
      best = dt;
    if (r == 0)
      printf("campaign: tf7, %zu poses, %zu targets, %zu measurements (simulated in %.3f s)\n"
             "parameters: %zu requested, %zu estimated; %d LM iterations, stop %s\n",
             c->n_poses, n_targets, c->n_meas, t_sim, res->n_params, res->n_kept,
             res->solve.iterations, twf_stop_name(res->solve.stop));
    if (r == 0)
      printf("outlier screen: %d refits, %zu measurements dropped or down-weighted\n", res->robust_rounds,
             res->n_outliers);
    twf_calib_result_free(res);
  }
  printf("calibration: best of %d runs %.3f s (one core)\n", repeats, best);
  twf_campaign_free(c);
  twf_model_free(nominal);
  twf_model_free(truth);
  return 0;
}
