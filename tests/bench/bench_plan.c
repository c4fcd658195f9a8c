/* bench_plan.c: speed and worth of the planner on the 7-axis sample arm.
 * Not a test: `make bench-plan` builds and runs it and prints the figures
 * recorded in DEVELOPERS.md. Plans COUNT poses from CANDIDATES drawn
 * within the limits (3 targets, 0.02 mm noise, geometric groups, the
 * workspace criterion), best of REPEATS runs on one core; then plans 30
 * poses and says how many random poses give the same predicted accuracy
 * over the workspace (the mean over 5 random sets per size, interpolated
 * on the 1 / sqrt(n) law of random sets).
 *
 *   usage: bench_plan [COUNT [CANDIDATES [REPEATS]]]   (default 60 20000 3) */
#include "twistfit.h"
#include "../arms.h"

#include <gsl/gsl_errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

/* processor time of this process: the machine may be shared, and the
 * figure is the time on one core */
static double now(void)
{
  struct timespec t;
  clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &t);
  return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

/* Mean workspace score of 5 random sets of n poses within the limits. */
static double random_score(const twf_model *m, const twf_plan_options *o, size_t n, unsigned long long seed)
{
  double *q = malloc(n * m->n_joints * sizeof *q), sum = 0.0;
  unsigned long long st = seed;
  int r;
  size_t i;
  for (r = 0; r < 5; r++) {
    double s;
    twf_error err;
    for (i = 0; i < n; i++)
      twf_simulate_joints(m, o->limit_margin, &st, q + i * m->n_joints);
    if (twf_plan_score(m, q, n, o, &s, &err) != TWF_OK) {
      fprintf(stderr, "score failed: %s\n", err.message);
      exit(1);
    }
    sum += s;
  }
  free(q);
  return sum / 5.0;
}

int main(int argc, char **argv)
{
  size_t count = argc > 1 ? strtoul(argv[1], NULL, 10) : 60;
  size_t n_cand = argc > 2 ? strtoul(argv[2], NULL, 10) : 20000;
  int repeats = argc > 3 ? atoi(argv[3]) : 3, r;
  twf_model *m;
  twf_plan_options o = twf_plan_default_options();
  twf_plan_result *res = NULL;
  twf_error err;
  double best = 1e300, rnd;
  static const size_t sizes[] = { 30, 45, 60, 90, 120, 180, 240, 360, 480 };
  size_t k;

  gsl_set_error_handler_off();
  m = test_arm_model(ARM_TF7);
  o.assess.calib.sigma_length = 2e-5;
  o.n_candidates = n_cand;
  o.count = count;
  for (r = 0; r < repeats; r++) {
    double t0 = now(), dt;
    if (twf_plan(m, &o, &res, NULL, &err) != TWF_OK) {
      fprintf(stderr, "planning failed: %s\n", err.message);
      return 1;
    }
    dt = now() - t0;
    if (dt < best)
      best = dt;
    if (r == 0)
      printf("plan: tf7, %zu poses from %zu candidates (%zu feasible), %zu parameters identifiable\n"
             "criterion workspace: RMS predicted position uncertainty %.4f mm after the greedy build-up, "
             "%.4f mm after %zu accepted excursions\n"
             "travel in joint space: %.1f rad in choice order, %.1f rad ordered\n",
             res->n, res->n_candidates, res->n_feasible, res->assessment->n_kept, res->score_greedy * 1e3,
             res->score * 1e3, res->exchanges, res->travel_before, res->travel);
    if (r + 1 < repeats)
      twf_plan_result_free(res);
  }
  printf("planning: best of %d runs %.3f s of processor time (one core)\n", repeats, best);
  rnd = random_score(m, &o, count, 99);
  printf("random %zu poses: %.4f mm (mean of 5 sets); planned: %.4f mm\n", count, rnd * 1e3, res->score * 1e3);
  twf_plan_result_free(res);

  /* the worth of 30 planned poses in random ones */
  o.count = 30;
  if (twf_plan(m, &o, &res, NULL, &err) != TWF_OK) {
    fprintf(stderr, "planning failed: %s\n", err.message);
    return 1;
  }
  printf("planned 30 poses: %.4f mm; random sets:", res->score * 1e3);
  {
    double worth = NAN, prev_s = NAN;
    size_t prev_n = 0;
    for (k = 0; k < sizeof sizes / sizeof sizes[0]; k++) {
      double s = random_score(m, &o, sizes[k], 1000 + k);
      printf(" %zu: %.4f", sizes[k], s * 1e3);
      if (isnan(worth) && s <= res->score) {
        /* between the two sizes, on s ~ 1 / sqrt(n) */
        worth = k == 0 ? (double)sizes[0]
                       : exp(log((double)prev_n) + (log((double)sizes[k]) - log((double)prev_n)) *
                                                       (log(prev_s) - log(res->score)) / (log(prev_s) - log(s)));
      }
      prev_s = s;
      prev_n = sizes[k];
    }
    printf(" mm\n");
    if (isnan(worth))
      printf("30 planned poses are worth more than %zu random ones\n", prev_n);
    else
      printf("30 planned poses are worth about %.0f random ones\n", worth);
  }
  twf_plan_result_free(res);
  twf_model_free(m);
  return 0;
}
