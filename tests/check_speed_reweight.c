/* check_speed_reweight.c: the normal matrix after a change of weights, and
 * the solver's linearised trials.
 *  - A screen that changes a few weights: the next normal matrix at the
 *    same point is the cached one with the changed rows' contributions
 *    changed (no pass over every row), and agrees with a full pass at the
 *    new weights to rounding; with points and with 6-D rows.
 *  - Changes beyond the log's room: a full pass, the same bits as a fresh
 *    problem's.
 *  - The factor pass leaves R^T R, the gradient and the cost in the cache:
 *    the fit's first normal matrix makes no pass.
 *  - The solver: a trial after an accepted step is linearised at once, so
 *    a solve costs one normal pass per trial plus the first, and the
 *    normal matrix it ends on is still cached for the covariance. */
#include "testutil.h"
#include "arms.h"
#include "calib/lsq.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

/* A campaign of a perturbed arm with 2 % gross errors (perturbed 1), or
 * of nominal itself without. */
static twf_campaign *campaign(const twf_model *nominal, size_t n_poses, int six_d, int perturbed, twf_pose *B)
{
  const twf_perturbation mag = { 1e-3, 0.5e-3, 2e-3, 1e-3, 0.0 };
  twf_model *truth = twf_model_copy(nominal);
  twf_simulate_options so = twf_simulate_default_options();
  twf_campaign *c;
  twf_error err;
  ck_assert(truth != NULL);
  if (perturbed)
    twf_model_perturb(truth, &mag, 17);
  test_tracker_base(B);
  so.n_poses = n_poses;
  so.sigma_m = 2e-5;
  so.orientation = six_d;
  so.sigma_rad = 2e-5;
  so.seed = 9;
  so.outlier_fraction = perturbed ? 0.02 : 0.0;
  so.outlier_m = 2e-3;
  c = twf_simulate_campaign(truth, B, &so, &err);
  ck_assert_msg(c != NULL, "simulation: %s", err.message);
  twf_model_free(truth);
  return c;
}

static void problem(twf_lsq_problem *pr, const twf_model *m, const twf_campaign *c, const unsigned char *use,
                    unsigned groups, const twf_pose *B)
{
  twf_error err;
  ck_assert_msg(twf_lsq_init(pr, m, c, groups, use, 2e-5, 0.0, &err) == TWF_OK, "%s", err.message);
  pr->base[0] = *B;
  pr->n_threads = 2;
}

/* (A1, g1, cost1) agrees with the full pass's (A2, g2, cost2) over nc
 * columns to rounding: the cost to 1e-12, the entries against their
 * columns' scales sqrt(A_aa A_bb) to 1e-12, the gradient against
 * sqrt(A_aa 2 cost) (the solver's gradient test) to 1e-11. */
static void assert_normal_agrees(size_t nc, const double *A1, const double *g1, double cost1, const double *A2,
                                 const double *g2, double cost2)
{
  size_t a, b;
  ck_assert_msg(fabs(cost1 - cost2) <= 1e-12 * cost2, "cost %.17g against %.17g", cost1, cost2);
  for (a = 0; a < nc; a++) {
    double ga = sqrt(A2[a * nc + a] * 2.0 * cost2);
    ck_assert_msg(fabs(g1[a] - g2[a]) <= 1e-11 * ga, "g[%zu]: %.17g against %.17g", a, g1[a], g2[a]);
    for (b = 0; b < nc; b++) {
      double s = sqrt(A2[a * nc + a] * A2[b * nc + b]);
      ck_assert_msg(fabs(A1[a * nc + b] - A2[a * nc + b]) <= 1e-12 * s, "A[%zu][%zu]: %.17g against %.17g", a,
                    b, A1[a * nc + b], A2[a * nc + b]);
    }
  }
}

/* The screen's kind of change: a few rows dropped, one down-weighted, one
 * dropped and restored (two log entries that cancel). */
static void change_weights(twf_lsq_problem *pr, const twf_campaign *c)
{
  size_t i, n = 0;
  for (i = 0; i < c->n_meas; i += 37)
    if (pr->use[i]) {
      twf_lsq_set_weight(pr, i, 0.0);
      n++;
    }
  ck_assert(n >= 5);
  twf_lsq_set_weight(pr, 5, 0.25);
  twf_lsq_set_weight(pr, 8, 0.0);
  twf_lsq_set_weight(pr, 8, 1.0);
}

START_TEST(test_reweighted_normal_agrees_with_a_full_pass)
{
  twf_model *m = test_arm_model(ARM_TF7);
  twf_pose B;
  twf_campaign *c = campaign(m, 200, _i, 1, &B);
  unsigned char *use = malloc(c->n_meas);
  twf_lsq_problem pr, fresh;
  double *A0, *g0, *A1, *g1, *A2, *g2, cost0, cost1, cost2;
  size_t i, p, nc = 0, *cols;
  for (i = 0; i < c->n_meas; i++)
    use[i] = c->meas[i].set == TWF_SET_FIT;
  problem(&pr, m, c, use, TWF_GROUPS_GEOMETRIC, &B);
  p = pr.p;
  cols = malloc(p * sizeof *cols);
  for (i = 0; i < p; i++)
    if (i % 3 != 1) /* a column subset, as the solver uses */
      cols[nc++] = i;
  A0 = malloc(nc * nc * sizeof *A0);
  A1 = malloc(nc * nc * sizeof *A1);
  A2 = malloc(nc * nc * sizeof *A2);
  g0 = malloc(nc * sizeof *g0);
  g1 = malloc(nc * sizeof *g1);
  g2 = malloc(nc * sizeof *g2);
  cost0 = twf_lsq_normal(&pr, cols, nc, A0, g0);
  ck_assert_uint_eq(pr.n_normal_passes, 1);
  change_weights(&pr, c);
  cost1 = twf_lsq_normal(&pr, cols, nc, A1, g1);
  ck_assert_msg(pr.n_normal_passes == 1, "a full pass after a few changed weights");
  /* the same weights on a problem without a cached matrix: a full pass */
  problem(&fresh, m, c, use, TWF_GROUPS_GEOMETRIC, &B);
  change_weights(&fresh, c);
  cost2 = twf_lsq_normal(&fresh, cols, nc, A2, g2);
  ck_assert_uint_eq(fresh.n_normal_passes, 1);
  /* the changes moved the matrix (the dropped rows are a few per cent) */
  ck_assert_msg(cost0 > 1.01 * cost2, "cost %g before, %g after dropping", cost0, cost2);
  assert_normal_agrees(nc, A1, g1, cost1, A2, g2, cost2);
  twf_lsq_free(&fresh);
  /* changes beyond the log's room: a full pass, a fresh problem's bits */
  for (i = 0; i < c->n_meas; i++)
    twf_lsq_set_weight(&pr, i, 0.5);
  problem(&fresh, m, c, use, TWF_GROUPS_GEOMETRIC, &B);
  for (i = 0; i < c->n_meas; i++)
    twf_lsq_set_weight(&fresh, i, 0.5);
  cost1 = twf_lsq_normal(&pr, cols, nc, A1, g1);
  cost2 = twf_lsq_normal(&fresh, cols, nc, A2, g2);
  ck_assert_uint_eq(pr.n_normal_passes, 2);
  ck_assert(memcmp(&cost1, &cost2, sizeof cost1) == 0);
  ck_assert(memcmp(A1, A2, nc * nc * sizeof *A1) == 0 && memcmp(g1, g2, nc * sizeof *g1) == 0);
  twf_lsq_free(&fresh);
  twf_lsq_free(&pr);
  free(A0); free(A1); free(A2); free(g0); free(g1); free(g2); free(cols); free(use);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

/* The factor pass leaves the normal matrix R^T R, the gradient and the
 * cost in the cache: the normal matrix over a subset of its columns then
 * makes no pass and agrees with a fresh problem's full pass to rounding
 * (points and 6-D rows). */
START_TEST(test_factor_leaves_the_normal_matrix)
{
  twf_model *m = test_arm_model(ARM_TF7);
  twf_pose B;
  twf_campaign *c = campaign(m, 150, _i, 1, &B);
  unsigned char *use = malloc(c->n_meas);
  twf_lsq_problem pr, fresh;
  double *R, *A1, *g1, *A2, *g2, cost1, cost2;
  size_t i, p, nf = 0, nc = 0, *fcols, *cols;
  for (i = 0; i < c->n_meas; i++)
    use[i] = c->meas[i].set == TWF_SET_FIT;
  problem(&pr, m, c, use, TWF_GROUPS_GEOMETRIC, &B);
  problem(&fresh, m, c, use, TWF_GROUPS_GEOMETRIC, &B);
  p = pr.p;
  fcols = malloc(p * sizeof *fcols);
  cols = malloc(p * sizeof *cols);
  for (i = 0; i < p; i++)
    if (i % 5 != 2)
      fcols[nf++] = i;
  for (i = 0; i < nf; i++)
    if (i % 3 != 1) /* a subset of the factor's columns */
      cols[nc++] = fcols[i];
  R = malloc(nf * nf * sizeof *R);
  A1 = malloc(nc * nc * sizeof *A1);
  A2 = malloc(nc * nc * sizeof *A2);
  g1 = malloc(nc * sizeof *g1);
  g2 = malloc(nc * sizeof *g2);
  twf_lsq_factor(&pr, fcols, nf, R);
  cost1 = twf_lsq_normal(&pr, cols, nc, A1, g1);
  ck_assert_msg(pr.n_normal_passes == 0, "the factor's normal matrix was not used");
  cost2 = twf_lsq_normal(&fresh, cols, nc, A2, g2);
  ck_assert_uint_eq(fresh.n_normal_passes, 1);
  assert_normal_agrees(nc, A1, g1, cost1, A2, g2, cost2);
  /* a column the factor did not have: a full pass */
  cols[nc - 1] = 2;
  twf_lsq_normal(&pr, cols, nc, A1, g1);
  ck_assert_uint_eq(pr.n_normal_passes, 1);
  twf_lsq_free(&fresh);
  twf_lsq_free(&pr);
  free(R); free(A1); free(A2); free(g1); free(g2); free(fcols); free(cols); free(use);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

/* A base-and-targets problem (the registration refinement's) from a
 * displaced base: the solve converges, costs one normal pass per trial
 * plus the first, and leaves the normal matrix of its solution cached. */
START_TEST(test_solve_linearises_trials_and_leaves_its_matrix)
{
  twf_model *m = test_arm_model(ARM_TF6S);
  twf_pose B, start;
  twf_campaign *c = campaign(m, 80, 0, 0, &B);
  unsigned char *use = malloc(c->n_meas), *keep;
  twf_lsq_problem pr;
  twf_lsq_run run = { 50, 1e-12, NULL, "test", 0 };
  twf_solve_report rep;
  twf_error err;
  double *value, *A, *g, cost;
  size_t *cols;
  const double nudge[6] = { 2e-3, -1e-3, 1.5e-3, 0.02, -0.01, 0.015 };
  size_t i, p;
  unsigned long before;
  twf_pose E;
  for (i = 0; i < c->n_meas; i++)
    use[i] = c->meas[i].set == TWF_SET_FIT;
  twf_se3_exp(nudge, 1.0, &E);
  twf_pose_mul(&B, &E, &start);
  problem(&pr, m, c, use, TWF_GROUP_BIT(TWF_GROUP_BASE) | TWF_GROUP_BIT(TWF_GROUP_TARGETS), &start);
  p = pr.p;
  keep = malloc(p);
  memset(keep, 1, p);
  value = calloc(p, sizeof *value);
  A = malloc(p * p * sizeof *A);
  g = malloc(p * sizeof *g);
  cols = malloc(p * sizeof *cols);
  ck_assert_msg(twf_lsq_solve(&pr, keep, &run, value, &rep, &err) == TWF_OK, "%s", err.message);
  ck_assert(twf_stop_converged(rep.stop));
  ck_assert(rep.iterations >= 2);
  ck_assert_msg(rep.cost_end < 1e-3 * rep.cost_start, "cost %g -> %g", rep.cost_start, rep.cost_end);
  ck_assert_msg(pr.n_normal_passes <= 1 + (unsigned long)rep.iterations, "%lu passes for %d trials",
                pr.n_normal_passes, rep.iterations);
  before = pr.n_normal_passes;
  for (i = 0; i < p; i++)
    cols[i] = i; /* the kept columns, as the covariance asks for them */
  cost = twf_lsq_normal(&pr, cols, p, A, g);
  ck_assert_uint_eq(pr.n_normal_passes, before);
  ck_assert(memcmp(&cost, &rep.cost_end, sizeof cost) == 0);
  ck_assert(memcmp(A, pr.A, p * p * sizeof *A) == 0);
  /* the base it found is the simulation's (noise 0.02 mm: 0.01 mm here) */
  for (i = 0; i < 3; i++)
    ck_assert_msg(fabs(pr.base[0].p[i] - B.p[i]) < 1e-5, "base %zu: %g m off", i, pr.base[0].p[i] - B.p[i]);
  twf_lsq_free(&pr);
  free(keep); free(value); free(A); free(g); free(cols); free(use);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

int main(void)
{
  Suite *s = suite_create("speed-reweight");
  TCase *tc = tcase_create("reweight");
  tcase_set_timeout(tc, 120);
  tcase_add_loop_test(tc, test_reweighted_normal_agrees_with_a_full_pass, 0, 2);
  tcase_add_test(tc, test_solve_linearises_trials_and_leaves_its_matrix);
  tcase_add_loop_test(tc, test_factor_leaves_the_normal_matrix, 0, 2);
  suite_add_tcase(s, tc);
  return twf_test_run(s);
}
