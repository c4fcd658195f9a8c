/* bench_compensate.c: speed of program compensation: a random joint
 * program for the 6-axis sample arm tf6s within its joint limits,
 * compensated for a perturbed as-built arm (full pose per row). Not a test:
 * `make bench-compensate` runs it and prints the figures recorded in
 * DEVELOPERS.md.
 *
 *   usage: bench_compensate [ROWS [REPEATS]]   (default 100000 3) */
#include "twistfit.h"
#include "../arms.h"

#include <gsl/gsl_errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

/* Processor time of this process (one thread: the time on one core), so
 * that other work on a shared machine does not count; and wall time. */
static double cpu_now(void)
{
  struct timespec t;
  clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &t);
  return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

static double wall_now(void)
{
  struct timespec t;
  clock_gettime(CLOCK_MONOTONIC, &t);
  return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

int main(int argc, char **argv)
{
  size_t n_rows = argc > 1 ? strtoul(argv[1], NULL, 10) : 100000;
  int repeats = argc > 2 ? atoi(argv[2]) : 3, r;
  /* the errors of the calibration benchmark: 1 mrad tilts, 0.5 mm shifts,
   * 2 mrad offsets */
  const twf_perturbation mag = { 1e-3, 0.5e-3, 2e-3, 1e-3, 0.0 };
  twf_model *nominal = test_arm_model(ARM_TF6S), *asbuilt;
  twf_ik_result *res;
  twf_compensate_summary sum;
  unsigned long long state = 9;
  double *q, *qc, best = 1e300, best_wall = 1e300;
  twf_error err;
  size_t i;

  gsl_set_error_handler_off();
  if (nominal == NULL || n_rows == 0 || repeats < 1)
    return 1;
  asbuilt = twf_model_copy(nominal);
  twf_model_perturb(asbuilt, &mag, 7);
  q = malloc(n_rows * 6 * sizeof *q);
  qc = malloc(n_rows * 6 * sizeof *qc);
  res = malloc(n_rows * sizeof *res);
  if (q == NULL || qc == NULL || res == NULL)
    return 1;
  for (i = 0; i < n_rows; i++)
    twf_simulate_joints(nominal, 0.05, &state, q + 6 * i);
  for (r = 0; r < repeats; r++) {
    double t0 = cpu_now(), w0 = wall_now(), dt;
    if (twf_compensate_program(nominal, asbuilt, q, n_rows, NULL, qc, res, &sum, &err) != TWF_OK) {
      fprintf(stderr, "compensation failed: %s\n", err.message);
      return 1;
    }
    dt = cpu_now() - t0;
    if (dt < best)
      best = dt;
    if (wall_now() - w0 < best_wall)
      best_wall = wall_now() - w0;
  }
  printf("program: tf6s, %zu rows, full pose; as-built: tilts 1 mrad, shifts 0.5 mm, offsets 2 mrad\n",
         n_rows);
  printf("rows: %zu ok, %zu flagged (%zu near a singularity, %zu outside the limits, %zu not converged)\n",
         sum.n_rows - sum.n_flagged, sum.n_flagged, sum.n_near_singular, sum.n_outside_limits,
         sum.n_not_converged);
  printf("accepted steps: %.2f per row; largest remaining error of a converged row %.2g m, %.2g rad\n",
         (double)sum.iterations / (double)n_rows, sum.max_position_error_m, sum.max_angle_error_rad);
  printf("compensation: best of %d runs %.3f s processor time on one core (%.2f us per row); "
         "wall %.3f s\n", repeats, best, 1e6 * best / (double)n_rows, best_wall);
  free(q);
  free(qc);
  free(res);
  twf_model_free(asbuilt);
  twf_model_free(nominal);
  return 0;
}
