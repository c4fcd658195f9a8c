/* check_errmodel.c: the analytic Jacobian of the error model against
 * central finite differences through the same fold-in (calibration-model.md,
 * "Exactness and the solver loop", test 1), for every group, point and
 * full-pose measurements, on perturbed sample arms. The finite differences
 * are the outside reference here: common practice, no source. */
#include "testutil.h"
#include "arms.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static const unsigned all_groups =
  TWF_GROUPS_GEOMETRIC | TWF_GROUP_BIT(TWF_GROUP_SCALE);
/* the payload carried in the compliance tests (-1: none) */
static long fd_payload = -1;

/* prediction of target k (or the orientation residual) after folding h e_j */
static void predict(const twf_model *m0, const twf_pose *B0, unsigned groups,
                    const double *q, size_t j, double h, size_t k,
                    const double R_meas[3][3], double y[3], double r[3])
{
  twf_model *m = twf_model_copy(m0);
  twf_pose B = *B0;
  twf_errmodel *em = twf_errmodel_alloc(m, groups, NULL);
  size_t p = twf_errmodel_n_params(em);
  double *delta = calloc(p, sizeof *delta);
  delta[j] = h;
  twf_errmodel_fold(em, delta, m, &B);
  twf_errmodel_set_payload(em, fd_payload);
  twf_errmodel_eval_pose(em, m, &B, q, NULL);
  twf_errmodel_point(em, m, k, y, NULL);
  twf_errmodel_orientation(em, R_meas, r, NULL);
  free(delta);
  twf_errmodel_free(em);
  twf_model_free(m);
}

static void check_arm_with(test_arm arm, unsigned groups, unsigned long long seed, int masses)
{
  twf_model *m = test_arm_model(arm);
  twf_pose B, T;
  twf_perturbation mag = { 2e-3, 1.5e-3, 3e-3, 2e-3, 1e-3 };
  twf_test_rng rng;
  twf_errmodel *em;
  size_t p, j, k, trial;
  double q[8], tau[8];
  ck_assert_ptr_nonnull(m);
  twf_model_perturb(m, &mag, twf_test_seed(seed));
  if (masses)
    test_arm_add_masses(m);
  test_tracker_base(&B);
  em = twf_errmodel_alloc(m, groups, NULL);
  ck_assert_ptr_nonnull(em);
  twf_errmodel_set_payload(em, fd_payload);
  p = twf_errmodel_n_params(em);
  twf_test_rng_init(&rng, twf_test_seed(seed));
  for (trial = 0; trial < 4; trial++) {
    double *rows = calloc(3 * p, sizeof *rows), *orows = calloc(3 * p, sizeof *orows);
    double R_meas[3][3], w[3];
    for (k = 0; k < m->n_joints; k++) {
      const twf_joint *jt = &m->joints[k];
      q[k] = twf_test_uniform(&rng, jt->limit_lo, jt->limit_hi);
    }
    twf_errmodel_eval_pose(em, m, &B, q, &T);
    /* a measured orientation 0.3 rad away, so that the inverse right
     * Jacobian of the orientation residual is exercised */
    for (k = 0; k < 3; k++)
      w[k] = twf_test_uniform(&rng, -0.2, 0.2);
    {
      double E[3][3];
      int a, b, c;
      twf_so3_exp(w, 1.0, E);
      for (a = 0; a < 3; a++)
        for (b = 0; b < 3; b++) {
          R_meas[a][b] = 0;
          for (c = 0; c < 3; c++)
            R_meas[a][b] += E[a][c] * T.R[c][b];
        }
    }
    twf_model_gravity_torques(m, q, fd_payload, tau, NULL);
    for (k = 0; k < m->n_targets; k++) {
      double y0[3], r0[3];
      twf_errmodel_eval_pose(em, m, &B, q, NULL);
      twf_errmodel_point(em, m, k, y0, rows);
      twf_errmodel_orientation(em, R_meas, r0, orows);
      for (j = 0; j < p; j++) {
        /* a compliance moves the joint by h tau: the step over the
         * joint's torque, so that h tau stays 1e-6 rad */
        const twf_param *par = twf_errmodel_param(em, j);
        const double h = par->group == TWF_GROUP_COMPLIANCE
                             ? 1e-6 / fmax(fabs(tau[par->joint]), 1e-6)
                             : 1e-6;
        double yp[3], ym[3], rp[3], rm[3];
        int a;
        predict(m, &B, groups, q, j, h, k, R_meas, yp, rp);
        predict(m, &B, groups, q, j, -h, k, R_meas, ym, rm);
        for (a = 0; a < 3; a++) {
          double fd = (yp[a] - ym[a]) / (2 * h);
          double fdr = -(rp[a] - rm[a]) / (2 * h); /* rows hold G = -dr/dp */
          ck_assert_msg(twf_test_close(rows[(size_t)a * p + j], fd, 1e-7),
                        "%s: point row %d of %s: analytic %.12g, finite difference %.12g (seed %llu)",
                        m->name, a, twf_errmodel_param(em, j)->name, rows[(size_t)a * p + j], fd, seed);
          ck_assert_msg(fabs(fdr - orows[(size_t)a * p + j]) <= 1e-7 * fmax(1.0, fabs(fdr)),
                        "%s: orientation row %d of %s: analytic %.12g, finite difference %.12g",
                        m->name, a, twf_errmodel_param(em, j)->name, orows[(size_t)a * p + j], fdr);
        }
      }
    }
    free(rows);
    free(orows);
  }
  twf_errmodel_free(em);
  twf_model_free(m);
}

static void check_arm(test_arm arm, unsigned groups, unsigned long long seed)
{
  check_arm_with(arm, groups, seed, 0);
}

/* The compliance group (theta_i += C_i tau_i): its column is the offset's
 * times the torque, exact at any compliance since tau does not depend on
 * C; at zero compliance every other column stays exact too. Each payload
 * in turn, on the 6-axis arms and the prismatic one. */
START_TEST(test_jacobian_compliance)
{
  const unsigned g = all_groups | TWF_GROUP_BIT(TWF_GROUP_COMPLIANCE);
  for (fd_payload = -1; fd_payload < 2; fd_payload++) {
    check_arm_with(ARM_TF6S, g, 21, 1);
    check_arm_with(ARM_TF6P, g, 22, 1);
    check_arm_with(ARM_TF4P, g, 23, 1);
  }
  fd_payload = -1;
}
END_TEST

/* With compliance in the model the geometric columns leave out C dtau /
 * dparam (DEVELOPERS.md): the compliance column stays exact, the others
 * agree within |C dtau/dtheta| relative (the bound stated there). */
START_TEST(test_jacobian_with_compliance_set)
{
  const unsigned g = TWF_GROUPS_GEOMETRIC | TWF_GROUP_BIT(TWF_GROUP_COMPLIANCE);
  twf_model *m = test_arm_model(ARM_TF6S);
  twf_pose B;
  twf_errmodel *em;
  size_t p, j, k;
  double q[6] = { 0.4, -0.6, 0.9, -0.3, 0.8, 1.1 }, *rows;
  const double C = 2e-7; /* rad per N m: a stiffness of 5e6 N m/rad */
  test_arm_add_masses(m);
  for (k = 1; k < 6; k++)
    m->joints[k].compliance = C;
  test_tracker_base(&B);
  fd_payload = 1;
  em = twf_errmodel_alloc(m, g, NULL);
  twf_errmodel_set_payload(em, fd_payload);
  p = twf_errmodel_n_params(em);
  rows = calloc(3 * p, sizeof *rows);
  twf_errmodel_eval_pose(em, m, &B, q, NULL);
  for (k = 0; k < m->n_targets; k++) {
    double y0[3];
    twf_errmodel_eval_pose(em, m, &B, q, NULL);
    twf_errmodel_point(em, m, k, y0, rows);
    for (j = 0; j < p; j++) {
      const twf_param *par = twf_errmodel_param(em, j);
      const double h = par->group == TWF_GROUP_COMPLIANCE ? 1e-9 : 1e-6;
      double yp[3], ym[3], rp[3], rm[3], R[3][3] = { { 1, 0, 0 }, { 0, 1, 0 }, { 0, 0, 1 } };
      double col = 0.0, diff = 0.0;
      int a;
      predict(m, &B, g, q, j, h, k, R, yp, rp);
      predict(m, &B, g, q, j, -h, k, R, ym, rm);
      for (a = 0; a < 3; a++) {
        double fd = (yp[a] - ym[a]) / (2 * h), an = rows[(size_t)a * p + j];
        col = fmax(col, fabs(fd));
        diff = fmax(diff, fabs(fd - an));
      }
      /* tau of the joints of tf6s with these masses stays below 2e3 N m
       * and dtau/dtheta below 2e3 N m/rad: C dtau/dtheta below 4e-4 */
      if (par->group == TWF_GROUP_COMPLIANCE)
        ck_assert_msg(diff <= 1e-6 * fmax(col, 1.0), "%s: analytic and finite difference differ by %g of %g",
                      par->name, diff, col);
      else
        ck_assert_msg(diff <= 4e-4 * fmax(col, 1e-3), "%s: %g of %g beyond the stated bound",
                      par->name, diff, col);
    }
  }
  free(rows);
  twf_errmodel_free(em);
  twf_model_free(m);
  fd_payload = -1;
}
END_TEST

START_TEST(test_jacobian_tf6s) { check_arm(ARM_TF6S, all_groups, 11); }
END_TEST
START_TEST(test_jacobian_tf6p) { check_arm(ARM_TF6P, all_groups, 12); }
END_TEST
START_TEST(test_jacobian_tf7) { check_arm(ARM_TF7, all_groups, 13); }
END_TEST
START_TEST(test_jacobian_tf4p_prismatic) { check_arm(ARM_TF4P, all_groups, 14); }
END_TEST

START_TEST(test_param_counts)
{
  /* 6 + 3k + n + 6 + 2r + 2n (+ n scale): the group table of calibration-model.md */
  twf_model *m = test_arm_model(ARM_TF4P);
  twf_errmodel *em = twf_errmodel_alloc(m, all_groups, NULL);
  ck_assert_uint_eq(twf_errmodel_n_params(em), 6 + 6 + 4 + 6 + 2 * 3 + 2 * 4 + 4);
  ck_assert_str_eq(twf_errmodel_param(em, 0)->name, "base.rx");
  twf_errmodel_free(em);
  /* one compliance per revolute joint (tf4p: 3 revolute, 1 prismatic) */
  em = twf_errmodel_alloc(m, TWF_GROUP_BIT(TWF_GROUP_COMPLIANCE), NULL);
  ck_assert_uint_eq(twf_errmodel_n_params(em), 3);
  ck_assert_int_eq(twf_errmodel_param(em, 0)->kind, TWF_PARAM_COMPLIANCE);
  ck_assert_msg(strstr(twf_errmodel_param(em, 0)->name, ".compliance") != NULL, "name");
  twf_errmodel_free(em);
  {
    unsigned mask = 0;
    ck_assert_int_eq(twf_group_parse("compliance", &mask), TWF_OK);
    ck_assert_uint_eq(mask, TWF_GROUP_BIT(TWF_GROUP_COMPLIANCE));
  }
  em = twf_errmodel_alloc(m, 0, NULL);
  ck_assert_ptr_null(em);
  twf_model_free(m);
}
END_TEST

START_TEST(test_fold_keeps_model_exact)
{
  /* after many folds the axes stay unit and rotations orthonormal */
  twf_model *m = test_arm_model(ARM_TF7);
  twf_errmodel *em = twf_errmodel_alloc(m, all_groups, NULL);
  size_t p = twf_errmodel_n_params(em), j, i;
  double *d = calloc(p, sizeof *d), det;
  twf_pose B;
  twf_test_rng rng;
  int it;
  test_tracker_base(&B);
  twf_test_rng_init(&rng, 99);
  for (it = 0; it < 200; it++) {
    for (j = 0; j < p; j++)
      d[j] = twf_test_uniform(&rng, -1e-3, 1e-3);
    twf_errmodel_fold(em, d, m, &B);
  }
  for (i = 0; i < m->n_joints; i++) {
    const double *w = m->joints[i].twist;
    ck_assert_close(sqrt(w[0] * w[0] + w[1] * w[1] + w[2] * w[2]), 1.0, 1e-14);
    /* v = -w x point: the reference point stays on the line */
    ck_assert_close(w[0] * w[3] + w[1] * w[4] + w[2] * w[5], 0.0, 1e-14);
  }
  ck_assert(twf_rot_orthonormality_error(m->home.R, &det) < 1e-13);
  ck_assert(twf_rot_orthonormality_error(B.R, &det) < 1e-13);
  free(d);
  twf_errmodel_free(em);
  twf_model_free(m);
}
END_TEST

int main(void)
{
  Suite *s = suite_create("errmodel");
  TCase *tc = tcase_create("jacobian");
  tcase_set_timeout(tc, 120);
  tcase_add_test(tc, test_jacobian_tf6s);
  tcase_add_test(tc, test_jacobian_compliance);
  tcase_add_test(tc, test_jacobian_with_compliance_set);
  tcase_add_test(tc, test_jacobian_tf6p);
  tcase_add_test(tc, test_jacobian_tf7);
  tcase_add_test(tc, test_jacobian_tf4p_prismatic);
  tcase_add_test(tc, test_param_counts);
  tcase_add_test(tc, test_fold_keeps_model_exact);
  suite_add_tcase(s, tc);
  return twf_test_run(s);
}
