/* check_speed_passes.c: the chunked passes over the measurements.
 *  - Threads: the normal matrix, the gradient, the cost and the factor of
 *    1, 2 and 3 threads are the same bits (memcmp), and so is a whole
 *    calibration (parameters, standard deviations, base pose, residuals,
 *    the calibrated model, the solver's report).
 *  - The blocked factor (Householder by blocks, merged chunk by chunk)
 *    keeps and fixes the same parameters as the row-by-row Givens factor
 *    it replaced (twf_ident_qr_add_row, kept as the reference), on every
 *    sample arm, with points and with 6-D rows, with every joint moving and
 *    with one joint never moved (a data redundancy); and R^T R agrees. */
#include "testutil.h"
#include "arms.h"
#include "calib/lsq.h"
#include "calib/ident.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

static twf_campaign *campaign(const twf_model *nominal, test_arm arm, size_t n_poses, int six_d,
                              long frozen_joint, twf_pose *B)
{
  const twf_perturbation mag = { 1e-3, 0.5e-3, 2e-3, 1e-3, 0.0 };
  twf_model *truth = twf_model_copy(nominal);
  twf_simulate_options so = twf_simulate_default_options();
  twf_campaign *c;
  twf_error err;
  size_t i;
  ck_assert(truth != NULL);
  twf_model_perturb(truth, &mag, 11 + (unsigned long long)arm);
  test_tracker_base(B);
  so.n_poses = n_poses;
  so.sigma_m = 2e-5;
  so.orientation = six_d;
  so.sigma_rad = 2e-5;
  so.seed = 5 + (unsigned long long)arm;
  so.check_fraction = 0.1;
  c = twf_simulate_campaign(truth, B, &so, &err);
  ck_assert_msg(c != NULL, "simulation: %s", err.message);
  if (frozen_joint >= 0)
    for (i = 0; i < c->n_poses; i++)
      c->q[i * c->n_joints + (size_t)frozen_joint] = 0.3;
  twf_model_free(truth);
  return c;
}

/* ------------------------------------------------------------ threads */

START_TEST(test_passes_same_bits_for_any_thread_count)
{
  twf_model *m = test_arm_model(ARM_TF7);
  twf_pose B;
  twf_campaign *c = campaign(m, ARM_TF7, 700, _i, -1, &B); /* 11 chunks */
  unsigned char *use = malloc(c->n_meas);
  double *A[3], *g[3], *R[3], cost[3];
  size_t i, p, nc = 0, *cols;
  int t;
  twf_error err;
  for (i = 0; i < c->n_meas; i++)
    use[i] = c->meas[i].set == TWF_SET_FIT;
  for (t = 0; t < 3; t++) {
    twf_lsq_problem pr;
    ck_assert(twf_lsq_init(&pr, m, c, TWF_GROUPS_GEOMETRIC, use, 2e-5, 0.0, &err) == TWF_OK);
    pr.base[0] = B;
    pr.n_threads = t + 1;
    p = pr.p;
    cols = malloc(p * sizeof *cols);
    nc = 0;
    for (i = 0; i < p; i++)
      if (i % 3 != 1) /* a column subset, as the solver uses */
        cols[nc++] = i;
    A[t] = malloc(p * p * sizeof(double));
    g[t] = malloc(p * sizeof(double));
    R[t] = malloc(p * p * sizeof(double));
    cost[t] = twf_lsq_normal(&pr, cols, nc, A[t], g[t]);
    twf_lsq_factor(&pr, cols, nc, R[t]);
    ck_assert(isfinite(cost[t]) && cost[t] > 0);
    free(cols);
    twf_lsq_free(&pr);
  }
  for (t = 1; t < 3; t++) {
    ck_assert_msg(memcmp(A[0], A[t], nc * nc * sizeof(double)) == 0, "normal matrix, %d threads", t + 1);
    ck_assert_msg(memcmp(g[0], g[t], nc * sizeof(double)) == 0, "gradient, %d threads", t + 1);
    ck_assert_msg(memcmp(&cost[0], &cost[t], sizeof(double)) == 0, "cost, %d threads", t + 1);
    ck_assert_msg(memcmp(R[0], R[t], nc * nc * sizeof(double)) == 0, "factor, %d threads", t + 1);
  }
  for (t = 0; t < 3; t++) {
    free(A[t]);
    free(g[t]);
    free(R[t]);
  }
  free(use);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

/* A problem of base and target parameters (the registration refinement)
 * keeps the flange pose of every pose between passes: its normal matrix,
 * gradient, cost and factor agree with those of a problem that computes
 * the forward kinematics in every pass (the same columns of a problem that
 * also has offsets: its passes do not keep them) to rounding, and are the
 * same bits on 1 and 2 threads; a changed arm is noticed (the cost at a
 * changed offset differs). */
START_TEST(test_kept_flanges_agree_with_fresh_kinematics)
{
  twf_model *m = test_arm_model(ARM_TF7);
  twf_pose B;
  twf_campaign *c = campaign(m, ARM_TF7, 700, _i, -1, &B);
  unsigned char *use = malloc(c->n_meas);
  unsigned fixed_arm = TWF_GROUP_BIT(TWF_GROUP_BASE) | TWF_GROUP_BIT(TWF_GROUP_TARGETS);
  twf_lsq_problem kept[2], fresh;
  double *A[3], *g[3], *R[3], cost[3], scale = 0.0;
  size_t i, a, p, *cols;
  int t;
  twf_error err;
  for (i = 0; i < c->n_meas; i++)
    use[i] = c->meas[i].set == TWF_SET_FIT;
  for (t = 0; t < 2; t++) {
    ck_assert(twf_lsq_init(&kept[t], m, c, fixed_arm, use, 2e-5, 0.0, &err) == TWF_OK);
    kept[t].base[0] = B;
    kept[t].n_threads = t + 1;
  }
  ck_assert(twf_lsq_init(&fresh, m, c, fixed_arm | TWF_GROUP_BIT(TWF_GROUP_OFFSETS), use, 2e-5, 0.0, &err) ==
            TWF_OK);
  fresh.base[0] = B;
  p = kept[0].p;
  cols = malloc(p * sizeof *cols);
  /* the fresh problem's base and target columns, in the kept problem's order */
  for (a = 0, i = 0; i < fresh.p; i++) {
    twf_group gr = twf_errmodel_param(fresh.em, i)->group;
    if (gr == TWF_GROUP_BASE || gr == TWF_GROUP_TARGETS)
      cols[a++] = i;
  }
  ck_assert(a == p);
  for (t = 0; t < 3; t++) {
    A[t] = malloc(p * p * sizeof(double));
    g[t] = malloc(p * sizeof(double));
    R[t] = malloc(p * p * sizeof(double));
    if (t < 2) {
      cost[t] = twf_lsq_normal(&kept[t], NULL, p, A[t], g[t]);
      twf_lsq_factor(&kept[t], NULL, p, R[t]);
      ck_assert(kept[t].flanges != NULL);
    } else {
      cost[t] = twf_lsq_normal(&fresh, cols, p, A[t], g[t]);
      twf_lsq_factor(&fresh, cols, p, R[t]);
      ck_assert(fresh.flanges == NULL);
    }
  }
  ck_assert(memcmp(A[0], A[1], p * p * sizeof(double)) == 0);
  ck_assert(memcmp(g[0], g[1], p * sizeof(double)) == 0);
  ck_assert(memcmp(&cost[0], &cost[1], sizeof(double)) == 0);
  ck_assert(memcmp(R[0], R[1], p * p * sizeof(double)) == 0);
  for (i = 0; i < p * p; i++)
    scale = fmax(scale, fabs(A[2][i]));
  for (i = 0; i < p * p; i++)
    ck_assert_msg(fabs(A[0][i] - A[2][i]) <= 1e-12 * scale, "A entry %zu: %.17g against %.17g", i, A[0][i],
                  A[2][i]);
  ck_assert(fabs(cost[0] - cost[2]) <= 1e-10 * cost[2]);
  for (i = 0; i < p; i++)
    ck_assert(fabs(R[0][i * p + i] - R[2][i * p + i]) <= 1e-9 * fabs(R[2][i * p + i]) + 1e-300);
  /* another arm: the kept flanges are made again */
  kept[0].m->joints[2].offset += 1e-3;
  ck_assert(twf_lsq_normal(&kept[0], NULL, p, A[0], g[0]) != cost[0]);
  for (t = 0; t < 3; t++) {
    free(A[t]);
    free(g[t]);
    free(R[t]);
  }
  free(cols);
  twf_lsq_free(&kept[0]);
  twf_lsq_free(&kept[1]);
  twf_lsq_free(&fresh);
  free(use);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

/* One chunk (at most 64 poses): the batched, vectorised accumulation (an
 * AVX or an SSE2 version of the kernel, whichever the processor runs)
 * gives the bits of the plain loop written here, entry by entry
 * A[a][b] += (w c0a) c0b + (w c1a) c1b + (w c2a) c2b over the rows of
 * twf_errmodel_point, one measurement after another. That is the path of
 * poses of at most 6 rows: two of the three targets enter (with all
 * three the pose's rows are folded into one rank-6 block, which agrees to
 * rounding: test_normal_matrix_folded_per_pose). */
START_TEST(test_normal_matrix_bits_of_the_plain_loop)
{
  twf_model *m = test_arm_model(_i ? ARM_TF6S : ARM_TF7);
  twf_pose B;
  twf_campaign *c = campaign(m, _i ? ARM_TF6S : ARM_TF7, 60, 0, -1, &B);
  unsigned char *use = malloc(c->n_meas);
  twf_lsq_problem pr;
  twf_errmodel *em;
  double *A, *g, *A0, *g0, *rows;
  size_t i, p, a, b, pose;
  twf_error err;
  for (i = 0; i < c->n_meas; i++)
    use[i] = c->meas[i].set == TWF_SET_FIT && c->meas[i].target < 2;
  ck_assert(twf_lsq_init(&pr, m, c, TWF_GROUPS_GEOMETRIC, use, 2e-5, 0.0, &err) == TWF_OK);
  pr.base[0] = B;
  pr.n_threads = 1;
  p = pr.p;
  A = malloc(p * p * sizeof *A);
  g = malloc(p * sizeof *g);
  A0 = calloc(p * p, sizeof *A0);
  g0 = calloc(p, sizeof *g0);
  rows = malloc(3 * p * sizeof *rows);
  twf_lsq_normal(&pr, NULL, p, A, g);
  em = twf_errmodel_alloc(m, TWF_GROUPS_GEOMETRIC, NULL);
  ck_assert(em != NULL && twf_errmodel_n_params(em) == p);
  for (pose = 0; pose < c->n_poses; pose++) {
    twf_errmodel_eval_pose(em, m, &B, c->q + pose * c->n_joints, NULL);
    for (i = 0; i < c->n_meas; i++) {
      double y[3], r[3], w;
      int k;
      if (c->meas[i].pose != pose || !twf_lsq_active(&pr, i))
        continue;
      twf_errmodel_point(em, m, c->meas[i].target, y, rows);
      for (k = 0; k < 3; k++)
        r[k] = c->meas[i].pos[k] - y[k];
      w = pr.weight[i] * pr.inv_sigma[i] * pr.inv_sigma[i];
      for (a = 0; a < p; a++) {
        double u0 = w * rows[a], u1 = w * rows[p + a], u2 = w * rows[2 * p + a];
        g0[a] += u0 * r[0] + u1 * r[1] + u2 * r[2];
        for (b = a; b < p; b++)
          A0[a * p + b] += u0 * rows[b] + u1 * rows[p + b] + u2 * rows[2 * p + b];
      }
    }
  }
  for (a = 0; a < p; a++) {
    ck_assert_msg(memcmp(&g[a], &g0[a], sizeof(double)) == 0, "gradient %zu: %.17g against %.17g", a, g[a], g0[a]);
    for (b = a; b < p; b++)
      ck_assert_msg(memcmp(&A[a * p + b], &A0[a * p + b], sizeof(double)) == 0, "A[%zu][%zu]: %.17g against %.17g",
                    a, b, A[a * p + b], A0[a * p + b]);
  }
  free(A); free(g); free(A0); free(g0); free(rows); free(use);
  twf_errmodel_free(em);
  twf_lsq_free(&pr);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

/* The normal matrix, gradient and cost of poses folded into one rank-6
 * block through their twists (more than 6 rows a pose) against the plain
 * sums over the rows of twf_errmodel_point and twf_errmodel_orientation,
 * to 1e-12 of each entry's scale (sqrt(A_aa A_bb) for A, sqrt(A_aa 2 cost)
 * for g: Cauchy-Schwarz bounds of the entries). Cases: 3 targets (points;
 * 6-D), one target, two of three targets with 6-D rows (the third target's
 * columns stay zero), column subsets with target columns between twist
 * columns (the base's before them, the joints' after), every column in
 * a shuffled order (target columns among twist columns, twist columns
 * among them), dropped (weight 0) and down-weighted rows (some poses then
 * fall back to the row path), and the 6-axis arm; every case over several
 * chunks. */
START_TEST(test_normal_matrix_folded_per_pose)
{
  static const struct {
    test_arm arm;
    int six_d, targets, subset, weights;
  } cases[] = {
    { ARM_TF7, 0, 3, 0, 0 }, { ARM_TF7, 0, 1, 0, 0 }, { ARM_TF7, 1, 3, 0, 0 }, { ARM_TF7, 0, 3, 1, 0 },
    { ARM_TF7, 1, 3, 2, 1 }, { ARM_TF7, 1, 2, 1, 0 }, { ARM_TF6S, 0, 3, 0, 1 }, { ARM_TF6S, 1, 3, 1, 1 },
    { ARM_TF7, 0, 3, 3, 0 }, { ARM_TF7, 1, 3, 3, 1 },
  };
  const int k = _i;
  twf_model *m = test_arm_model(cases[k].arm);
  twf_pose B;
  twf_campaign *c = campaign(m, cases[k].arm, 200, cases[k].six_d, -1, &B); /* 4 chunks */
  unsigned char *use = malloc(c->n_meas);
  twf_lsq_problem pr;
  twf_errmodel *em;
  double *A, *g, *A0, *g0, *rows, cost, cost0 = 0.0;
  size_t i, p, a, b, pose, nc = 0, *cols, n_target_cols = 0, n_folded = 0, n_rowwise = 0;
  twf_error err;
  for (i = 0; i < c->n_meas; i++)
    use[i] = c->meas[i].set == TWF_SET_FIT && c->meas[i].target < (size_t)cases[k].targets;
  ck_assert(twf_lsq_init(&pr, m, c, TWF_GROUPS_GEOMETRIC, use, 2e-5, 0.0, &err) == TWF_OK);
  pr.base[0] = B;
  p = pr.p;
  if (cases[k].weights)
    for (i = 0; i < c->n_meas; i++)
      twf_lsq_set_weight(&pr, i, (c->meas[i].pose % 4 == 1 && c->meas[i].target != 0) || i % 7 == 3 ? 0.0
                                 : i % 5 == 1                                               ? 0.25
                                                                                            : 1.0);
  cols = malloc(p * sizeof *cols);
  for (i = 0; i < p; i++)
    if (cases[k].subset == 0 || cases[k].subset == 3 || (cases[k].subset == 1 ? i % 3 != 1 : i % 4 != 2))
      cols[nc++] = i;
  if (cases[k].subset == 3) {
    /* Fisher-Yates with a fixed linear congruential sequence */
    unsigned long long x = 12345;
    size_t first = nc, last = 0, twist_inside = 0;
    for (a = nc - 1; a > 0; a--) {
      size_t tmp;
      x = x * 6364136223846793005ULL + 1442695040888963407ULL;
      b = (size_t)((x >> 33) % (a + 1));
      tmp = cols[a];
      cols[a] = cols[b];
      cols[b] = tmp;
    }
    for (a = 0; a < nc; a++)
      if (twf_errmodel_param(pr.em, cols[a])->group == TWF_GROUP_TARGETS) {
        first = a < first ? a : first;
        last = a;
      }
    for (a = first; a < last; a++)
      twist_inside += twf_errmodel_param(pr.em, cols[a])->group != TWF_GROUP_TARGETS;
    ck_assert(twist_inside > 0);
  }
  /* the subsets keep target columns with twist columns before and after */
  for (a = 0; a < nc; a++)
    if (twf_errmodel_param(pr.em, cols[a])->group == TWF_GROUP_TARGETS)
      n_target_cols++;
  ck_assert(n_target_cols > 0 && twf_errmodel_param(pr.em, cols[0])->group != TWF_GROUP_TARGETS &&
            twf_errmodel_param(pr.em, cols[nc - 1])->group != TWF_GROUP_TARGETS);
  A = malloc(nc * nc * sizeof *A);
  g = malloc(nc * sizeof *g);
  A0 = calloc(p * p, sizeof *A0);
  g0 = calloc(p, sizeof *g0);
  rows = malloc(3 * p * sizeof *rows);
  cost = twf_lsq_normal(&pr, cases[k].subset ? cols : NULL, nc, A, g);
  em = twf_errmodel_alloc(m, TWF_GROUPS_GEOMETRIC, NULL);
  ck_assert(em != NULL && twf_errmodel_n_params(em) == p);
  for (pose = 0; pose < c->n_poses; pose++) {
    size_t n_rows = 0;
    twf_errmodel_eval_pose(em, m, &B, c->q + pose * c->n_joints, NULL);
    for (i = 0; i < c->n_meas; i++) {
      double y[3], r[3], w;
      int pass, e;
      if (c->meas[i].pose != pose || !twf_lsq_active(&pr, i))
        continue;
      n_rows += c->meas[i].has_orientation ? 6 : 3;
      for (pass = 0; pass < (c->meas[i].has_orientation ? 2 : 1); pass++) {
        if (pass == 0) {
          twf_errmodel_point(em, m, c->meas[i].target, y, rows);
          for (e = 0; e < 3; e++)
            r[e] = c->meas[i].pos[e] - y[e];
          w = pr.weight[i] * pr.inv_sigma[i] * pr.inv_sigma[i];
        } else {
          double Rm[3][3];
          twf_quat_to_rot(twf_campaign_meas_quat(c, i), Rm);
          twf_errmodel_orientation(em, Rm, r, rows);
          w = pr.weight[i] * pr.inv_sigma_rot * pr.inv_sigma_rot;
        }
        cost0 += 0.5 * w * (r[0] * r[0] + r[1] * r[1] + r[2] * r[2]);
        for (a = 0; a < p; a++) {
          g0[a] += w * (rows[a] * r[0] + rows[p + a] * r[1] + rows[2 * p + a] * r[2]);
          for (b = a; b < p; b++)
            A0[a * p + b] += w * (rows[a] * rows[b] + rows[p + a] * rows[p + b] + rows[2 * p + a] * rows[2 * p + b]);
        }
      }
    }
    if (n_rows > 6)
      n_folded++;
    else if (n_rows > 0)
      n_rowwise++;
  }
  /* the case takes the path it is meant to test */
  ck_assert(cases[k].targets == 1 ? n_folded == 0 : n_folded > c->n_poses / 4);
  if (cases[k].weights)
    ck_assert(n_rowwise > 0);
  ck_assert_msg(fabs(cost - cost0) <= 1e-12 * cost0, "cost %.17g against %.17g", cost, cost0);
  for (a = 0; a < nc; a++) {
    size_t ca = cols[a];
    double gs = sqrt(A0[ca * p + ca] * 2.0 * cost0);
    ck_assert_msg(fabs(g[a] - g0[ca]) <= 1e-12 * gs, "gradient %zu: %.17g against %.17g (scale %g)", a, g[a],
                  g0[ca], gs);
    for (b = a; b < nc; b++) {
      size_t cb = cols[b];
      /* the reference holds its upper triangle in parameter order */
      double ref = ca <= cb ? A0[ca * p + cb] : A0[cb * p + ca], s = sqrt(A0[ca * p + ca] * A0[cb * p + cb]);
      ck_assert_msg(fabs(A[a * nc + b] - ref) <= 1e-12 * s, "A[%zu][%zu]: %.17g against %.17g (scale %g)", a, b,
                    A[a * nc + b], ref, s);
      ck_assert(A[b * nc + a] == A[a * nc + b]);
    }
  }
  free(A); free(g); free(A0); free(g0); free(rows); free(use); free(cols);
  twf_errmodel_free(em);
  twf_lsq_free(&pr);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

/* The Householder block update, written out as plainly as possible: per
 * column k the dot products with two partial sums (even and odd entries,
 * added at the end), the reflection applied to one column after another.
 * twf_ident_qr_add_block (two columns per loop, vector lanes) must give
 * these bits. */
static double plain_dot(const double *x, const double *y, size_t n)
{
  double d0 = 0.0, d1 = 0.0;
  size_t i;
  for (i = 0; i + 2 <= n; i += 2) {
    d0 += x[i] * y[i];
    d1 += x[i + 1] * y[i + 1];
  }
  if (i < n)
    d0 += x[i] * y[i];
  return d0 + d1;
}

static void plain_qr_add_block(double *R, size_t p, double *B, size_t m, int tri)
{
  size_t k, j, i;
  for (k = 0; k < p; k++) {
    size_t mk = tri ? (k + 1 < m ? k + 1 : m) : m;
    double *x = B + k * m, alpha = R[k * p + k], sigma = plain_dot(x, x, mk), norm, beta, tau, scale;
    if (sigma == 0.0)
      continue;
    norm = sqrt(alpha * alpha + sigma);
    beta = alpha > 0.0 ? -norm : norm;
    tau = (beta - alpha) / beta;
    scale = 1.0 / (alpha - beta);
    for (i = 0; i < mk; i++)
      x[i] *= scale;
    R[k * p + k] = beta;
    for (j = k + 1; j < p; j++) {
      double *y = B + j * m, d = (R[k * p + j] + plain_dot(x, y, mk)) * tau;
      R[k * p + j] -= d;
      for (i = 0; i < mk; i++)
        y[i] -= d * x[i];
    }
  }
}

START_TEST(test_householder_block_bits_of_the_plain_loop)
{
  /* p odd and even, m odd and even, full and triangular blocks */
  size_t p = 7 + (size_t)(_i % 2), m = _i < 2 ? 24 + (size_t)(_i % 2) : p, n, t;
  int tri = _i >= 2;
  unsigned long long seed = twf_test_seed(91 + (unsigned long long)_i);
  double *R = calloc(p * p, sizeof *R), *R0 = calloc(p * p, sizeof *R0);
  double *B = calloc(p * m, sizeof *B), *B0 = calloc(p * m, sizeof *B0);
  for (t = 0; t < 5; t++) {
    size_t j, r;
    for (j = 0; j < p; j++)
      for (r = 0; r < m; r++)
        B[j * m + r] = tri && r > j ? 0.0 : 2.0 * twf_rng_uniform(&seed) - 1.0;
    memcpy(B0, B, p * m * sizeof *B);
    twf_ident_qr_add_block(R, p, B, m, tri);
    plain_qr_add_block(R0, p, B0, m, tri);
  }
  for (n = 0; n < p * p; n++)
    ck_assert_msg(memcmp(&R[n], &R0[n], sizeof(double)) == 0, "R entry %zu: %.17g against %.17g", n, R[n], R0[n]);
  free(R); free(R0); free(B); free(B0);
}
END_TEST

static void same_bits(const void *a, const void *b, size_t n, const char *what, int threads)
{
  ck_assert_msg(memcmp(a, b, n) == 0, "%s differs with %d threads", what, threads);
}

START_TEST(test_calibration_same_bits_for_any_thread_count)
{
  twf_model *m = test_arm_model(_i ? ARM_TF6S : ARM_TF7);
  twf_pose B;
  twf_campaign *c = campaign(m, _i ? ARM_TF6S : ARM_TF7, 400, _i, -1, &B);
  twf_calib_options o = twf_calib_default_options();
  twf_calib_result *res[3];
  twf_error err;
  int t;
  size_t k;
  /* a gross error in a fit row, so that the screen and a refit run too */
  for (k = 7; c->meas[k].set != TWF_SET_FIT; k++)
    ;
  c->meas[k].pos[0] += 0.01;
  o.sigma_length = 2e-5;
  for (t = 0; t < 3; t++) {
    o.threads = t + 1;
    ck_assert_msg(twf_calibrate(m, c, &o, &res[t], NULL, &err) == TWF_OK, "%s", err.message);
  }
  ck_assert(res[0]->n_outliers >= 1 && res[0]->robust_rounds >= 1);
  for (t = 1; t < 3; t++) {
    const twf_calib_result *a = res[0], *b = res[t];
    ck_assert(a->n_params == b->n_params && a->n_kept == b->n_kept && a->n_outliers == b->n_outliers);
    for (k = 0; k < a->n_params; k++) {
      same_bits(&a->params[k].change, &b->params[k].change, sizeof(double), "a value", t + 1);
      same_bits(&a->params[k].std, &b->params[k].std, sizeof(double), "a standard deviation", t + 1);
      ck_assert(a->params[k].status == b->params[k].status && a->params[k].weak == b->params[k].weak);
    }
    same_bits(&a->base_in_tracker, &b->base_in_tracker, sizeof a->base_in_tracker, "the base", t + 1);
    same_bits(a->pos_err_after, b->pos_err_after, 3 * c->n_meas * sizeof(double), "residuals", t + 1);
    same_bits(a->asbuilt->joints, b->asbuilt->joints, m->n_joints * sizeof *m->joints, "the joints", t + 1);
    same_bits(&a->solve, &b->solve, sizeof a->solve, "the solver's report", t + 1);
    same_bits(&a->registration, &b->registration, sizeof a->registration, "the registration", t + 1);
    same_bits(&a->condition_number, &b->condition_number, sizeof(double), "the condition number", t + 1);
    same_bits(&a->sigma_length, &b->sigma_length, sizeof(double), "sigma", t + 1);
  }
  for (t = 0; t < 3; t++)
    twf_calib_result_free(res[t]);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

/* ------------------------------------------------------------ residuals on threads */

/* twf_lsq_residuals on 1, 2 and 3 threads gives the bits of
 * twf_accuracy_residuals' one loop (point rows, and 6-D rows with _i). The
 * campaign is large enough (3,000 poses, 9,000 rows) for the threads to
 * take ranges of their own. */
START_TEST(test_residuals_same_bits_for_any_thread_count)
{
  twf_model *m = test_arm_model(ARM_TF7);
  twf_pose B;
  twf_campaign *c = campaign(m, ARM_TF7, 3000, _i, -1, &B);
  size_t n = c->n_meas, k;
  double *pos0 = malloc(3 * n * sizeof *pos0), *rot0 = malloc(n * sizeof *rot0);
  double *pos = malloc(3 * n * sizeof *pos), *rot = malloc(n * sizeof *rot);
  twf_error err;
  int t;
  ck_assert(n >= 9000);
  for (k = 0; k < m->n_targets; k++)
    m->targets[k].offset_known = 1;
  ck_assert(twf_accuracy_residuals(m, &B, NULL, c, pos0, rot0, &err) == TWF_OK);
  for (t = 1; t <= 3; t++) {
    memset(pos, 0, 3 * n * sizeof *pos);
    memset(rot, 0, n * sizeof *rot);
    ck_assert(twf_lsq_residuals(m, &B, c, t, pos, rot, &err) == TWF_OK);
    same_bits(pos0, pos, 3 * n * sizeof *pos, "position residuals", t);
    same_bits(rot0, rot, n * sizeof *rot, "angle residuals", t);
  }
  /* NULL outputs are refused on the threaded path as on the one loop */
  ck_assert(twf_lsq_residuals(m, &B, c, 2, NULL, NULL, &err) == TWF_ERR_INVALID);
  free(pos0); free(rot0); free(pos); free(rot);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

/* ------------------------------------------------------------ blocked factor */

/* The reference: the rows of twf_errmodel_point and _orientation, weighted,
 * one Givens update at a time. */
static void givens_factor(twf_lsq_problem *pr, double *R)
{
  const twf_campaign *c = pr->c;
  size_t p = pr->p, i, k;
  double *rows = malloc(3 * p * sizeof *rows);
  memset(R, 0, p * p * sizeof *R);
  for (i = 0; i < c->n_meas; i++) {
    const twf_measurement *ms = &c->meas[i];
    double y[3], sw = sqrt(pr->weight[i]) * pr->inv_sigma[i];
    if (!twf_lsq_active(pr, i))
      continue;
    twf_errmodel_eval_pose(pr->em, pr->m, &pr->base[0], c->q + ms->pose * c->n_joints, NULL);
    twf_errmodel_point(pr->em, pr->m, ms->target, y, rows);
    for (k = 0; k < 3 * p; k++)
      rows[k] *= sw;
    for (k = 0; k < 3; k++)
      twf_ident_qr_add_row(R, p, rows + k * p);
    if (ms->has_orientation) {
      double Rm[3][3], r[3];
      twf_quat_to_rot(twf_campaign_meas_quat(c, i), Rm);
      twf_errmodel_orientation(pr->em, Rm, r, rows);
      for (k = 0; k < 3 * p; k++)
        rows[k] *= sqrt(pr->weight[i]) * pr->inv_sigma_rot;
      for (k = 0; k < 3; k++)
        twf_ident_qr_add_row(R, p, rows + k * p);
    }
  }
  free(rows);
}

START_TEST(test_blocked_factor_keeps_what_givens_kept)
{
  int arm = _i / 4, six_d = (_i / 2) % 2, frozen = _i % 2;
  twf_model *m = test_arm_model((test_arm)arm);
  twf_pose B;
  twf_campaign *c = campaign(m, (test_arm)arm, 300, six_d, frozen ? 2 : -1, &B);
  unsigned char *use = malloc(c->n_meas), *keep_b, *keep_g;
  double *Rb, *Rg, *Ab, *Ag, *scale, *rel_b, *rel_g;
  size_t i, p, *order, a, n_fixed = 0;
  twf_lsq_problem pr;
  twf_error err;
  for (i = 0; i < c->n_meas; i++)
    use[i] = c->meas[i].set == TWF_SET_FIT;
  ck_assert(twf_lsq_init(&pr, m, c, TWF_GROUPS_GEOMETRIC, use, 2e-5, 0.0, &err) == TWF_OK);
  pr.base[0] = B;
  p = pr.p;
  Rb = malloc(p * p * sizeof *Rb);
  Rg = malloc(p * p * sizeof *Rg);
  Ab = malloc(p * p * sizeof *Ab);
  Ag = malloc(p * p * sizeof *Ag);
  scale = malloc(p * sizeof *scale);
  rel_b = malloc(p * sizeof *rel_b);
  rel_g = malloc(p * sizeof *rel_g);
  keep_b = malloc(p);
  keep_g = malloc(p);
  order = malloc(p * sizeof *order);
  for (i = 0; i < p; i++) {
    order[i] = i;
    scale[i] = twf_errmodel_param_scale(pr.em, i);
  }
  twf_lsq_factor(&pr, NULL, p, Rb);
  givens_factor(&pr, Rg);
  ck_assert(twf_ident_walk_r(Rb, p, scale, order, p, TWF_REDUNDANCY_TOL_DEFAULT, keep_b, rel_b) == 0);
  ck_assert(twf_ident_walk_r(Rg, p, scale, order, p, TWF_REDUNDANCY_TOL_DEFAULT, keep_g, rel_g) == 0);
  for (a = 0; a < p; a++) {
    ck_assert_msg(keep_b[a] == keep_g[a], "arm %d, 6-D %d, frozen %d: %s kept %d by the blocked factor, %d by Givens",
                  arm, six_d, frozen, twf_errmodel_param(pr.em, a)->name, keep_b[a], keep_g[a]);
    n_fixed += !keep_b[a];
    /* the kept ones' independent parts agree closely; the fixed ones sit at rounding level in both */
    if (keep_b[a])
      ck_assert_close(rel_b[a], rel_g[a], 1e-6);
    else
      ck_assert(rel_b[a] < 1e-9 && rel_g[a] < 1e-9);
  }
  ck_assert(n_fixed > 0); /* the walk had something to fix */
  twf_ident_normal_from_r(Rb, p, scale, Ab);
  twf_ident_normal_from_r(Rg, p, scale, Ag);
  for (a = 0; a < p * p; a++)
    ck_assert(fabs(Ab[a] - Ag[a]) <= 1e-10 * sqrt(Ag[(a / p) * p + a / p] * Ag[(a % p) * p + a % p]) + 1e-300);
  free(Rb); free(Rg); free(Ab); free(Ag); free(scale); free(rel_b); free(rel_g);
  free(keep_b); free(keep_g); free(order); free(use);
  twf_lsq_free(&pr);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

int main(void)
{
  Suite *s = suite_create("speed-passes");
  TCase *tc = tcase_create("passes");
  tcase_set_timeout(tc, 120);
  tcase_add_loop_test(tc, test_passes_same_bits_for_any_thread_count, 0, 2);
  tcase_add_loop_test(tc, test_calibration_same_bits_for_any_thread_count, 0, 2);
  tcase_add_loop_test(tc, test_normal_matrix_bits_of_the_plain_loop, 0, 2);
  tcase_add_loop_test(tc, test_normal_matrix_folded_per_pose, 0, 10);
  tcase_add_loop_test(tc, test_residuals_same_bits_for_any_thread_count, 0, 2);
  tcase_add_loop_test(tc, test_kept_flanges_agree_with_fresh_kinematics, 0, 2);
  tcase_add_loop_test(tc, test_householder_block_bits_of_the_plain_loop, 0, 4);
  tcase_add_loop_test(tc, test_blocked_factor_keeps_what_givens_kept, 0, 4 * ARM_COUNT);
  suite_add_tcase(s, tc);
  return twf_test_run(s);
}
