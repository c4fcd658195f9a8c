/* check_accuracy.c: residuals, summary statistics, worst poses and the
 * ISO 9283 pose accuracy and repeatability. */
#include "testutil.h"

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "twistfit.h"

/* A small arm whose forward kinematics are easy by hand: j1 slides along
 * base x, j2 along base y, j3 turns about the vertical line through
 * (0.05, -0.02, 0); home pose M = (rpy home_rpy, home_p). Two targets. */
static const double j3_point[3] = { 0.05, -0.02, 0.0 };

static twf_model *make_model(const double home_rpy[3], const double home_p[3])
{
  twf_model *m = twf_model_alloc(3, 2);
  const double x[3] = { 1, 0, 0 }, y[3] = { 0, 1, 0 }, z[3] = { 0, 0, 1 };
  ck_assert(m != NULL);
  snprintf(m->joints[0].name, TWF_NAME_MAX, "x");
  snprintf(m->joints[1].name, TWF_NAME_MAX, "y");
  snprintf(m->joints[2].name, TWF_NAME_MAX, "c");
  m->joints[0].type = m->joints[1].type = TWF_JOINT_PRISMATIC;
  twf_twist_prismatic(x, m->joints[0].twist);
  twf_twist_prismatic(y, m->joints[1].twist);
  m->joints[2].type = TWF_JOINT_REVOLUTE;
  twf_twist_revolute(z, j3_point, m->joints[2].twist);
  memcpy(m->joints[2].point, j3_point, sizeof j3_point);
  twf_rpy_fixed_xyz_to_rot(home_rpy[0], home_rpy[1], home_rpy[2], m->home.R);
  memcpy(m->home.p, home_p, 3 * sizeof(double));
  snprintf(m->targets[0].name, TWF_NAME_MAX, "T1");
  snprintf(m->targets[1].name, TWF_NAME_MAX, "T2");
  m->targets[1].offset[2] = 0.05;
  m->targets[0].offset_known = m->targets[1].offset_known = 1;
  return m;
}

/* The flange pose in the base frame by hand: translate by (q1, q2, 0),
 * turn by q3 about the vertical line through j3_point, then M. */
static void fk_by_hand(const twf_model *m, const double q[3], twf_pose *F)
{
  double c = cos(q[2]), s = sin(q[2]);
  double Rz[3][3] = { { c, -s, 0 }, { s, c, 0 }, { 0, 0, 1 } };
  int r, k;
  for (r = 0; r < 3; r++) {
    for (k = 0; k < 3; k++)
      F->R[r][k] = Rz[r][0] * m->home.R[0][k] + Rz[r][1] * m->home.R[1][k]
                 + Rz[r][2] * m->home.R[2][k];
    F->p[r] = Rz[r][0] * (m->home.p[0] - j3_point[0])
            + Rz[r][1] * (m->home.p[1] - j3_point[1])
            + Rz[r][2] * (m->home.p[2] - j3_point[2]) + j3_point[r];
  }
  F->p[0] += q[0];
  F->p[1] += q[1];
}

/* ------------------------------------------------------------------ */
/* Residuals                                                           */
/* ------------------------------------------------------------------ */

START_TEST(test_residuals)
{
  const double rpy[3] = { 0.317, -0.208, 1.093 }, hp[3] = { 0.412, -0.133, 0.287 };
  twf_model *m = make_model(rpy, hp);
  twf_campaign *c = twf_campaign_alloc(3, 3, 5);
  twf_pose B;
  double q[3][3] = { { 0.113, -0.271, 0.9 }, { -0.402, 0.089, -2.3 }, { 0.25, 0.31, 0.04 } };
  double delta[5][3] = { { 1.3e-4, -2.1e-4, 0.7e-4 }, { -3.3e-5, 0, 8.9e-5 },
                         { 0, 0, 0 }, { 2.2e-4, 1.1e-4, -4.4e-4 }, { 5e-6, -6e-6, 7e-6 } };
  /* a small angle and one beyond 2 pi / 3: the angle is the length of the
   * solver's orientation residual log(R_meas R_model^T), whose two branches
   * both show here */
  double angle[5] = { 0, 0.00123, 0, 2.9417, 0 };
  double t_other[6] = { 0.011, -0.007, 0.023, 0, 0.019, 0.031 };
  double pos_err[15], ang_err[5];
  size_t pose_of[5] = { 0, 0, 1, 2, 2 }, target_of[5] = { 0, 1, 0, 0, 1 };
  twf_error err;
  size_t i, j;
  ck_assert(c != NULL);
  twf_rpy_fixed_xyz_to_rot(-0.61, 0.27, 2.91, B.R);
  B.p[0] = 2.734; B.p[1] = -1.905; B.p[2] = 0.388;
  for (i = 0; i < 3; i++) {
    snprintf(c->pose_ids[i], TWF_NAME_MAX, "p%zu", i);
    memcpy(c->q + 3 * i, q[i], sizeof q[i]);
  }
  for (i = 0; i < 5; i++) {
    twf_measurement *me = &c->meas[i];
    twf_pose F, T;
    double y[3], Rm[3][3], axis[3] = { 0.48, -0.6, 0.64 }, Ra[3][3];
    fk_by_hand(m, q[pose_of[i]], &F);
    twf_pose_mul(&B, &F, &T);
    me->pose = (uint32_t)pose_of[i];
    me->target = (uint32_t)target_of[i];
    twf_pose_apply(&T, m->targets[target_of[i]].offset, y);
    for (j = 0; j < 3; j++)
      me->pos[j] = y[j] + delta[i][j];
    if (angle[i] > 0) {
      /* measured orientation: the model's turned by angle about axis
       * (in the tracker frame), R_meas = Ra R_model */
      twf_so3_exp(axis, angle[i], Ra);
      for (j = 0; j < 9; j++)
        Rm[j / 3][j % 3] = Ra[j / 3][0] * T.R[0][j % 3] + Ra[j / 3][1] * T.R[1][j % 3]
                         + Ra[j / 3][2] * T.R[2][j % 3];
      double qm[4];
      twf_rot_to_quat(Rm, qm);
      ck_assert_int_eq(twf_campaign_meas_set_quat(c, i, qm), TWF_OK);
    }
  }
  ck_assert_int_eq(twf_accuracy_residuals(m, &B, NULL, c, pos_err, ang_err, &err), TWF_OK);
  for (i = 0; i < 5; i++) {
    for (j = 0; j < 3; j++)
      ck_assert_msg(fabs(pos_err[3 * i + j] - delta[i][j]) <= 1e-13,
                    "meas %zu coord %zu: %g vs %g", i, j, pos_err[3 * i + j], delta[i][j]);
    if (angle[i] > 0)
      ck_assert_close(ang_err[i], angle[i], 1e-9);
    else
      ck_assert(isnan(ang_err[i]));
  }
  /* explicit offsets replace the model's */
  ck_assert_int_eq(twf_accuracy_residuals(m, &B, t_other, c, pos_err, NULL, &err), TWF_OK);
  {
    twf_pose F, T;
    double y[3];
    fk_by_hand(m, q[2], &F);
    twf_pose_mul(&B, &F, &T);
    twf_pose_apply(&T, t_other + 3, y);
    for (j = 0; j < 3; j++)
      ck_assert(fabs(pos_err[12 + j] - (c->meas[4].pos[j] - y[j])) <= 1e-13);
  }
  /* an unknown offset without explicit offsets */
  m->targets[1].offset_known = 0;
  ck_assert_int_eq(twf_accuracy_residuals(m, &B, NULL, c, pos_err, ang_err, &err),
                   TWF_ERR_MISSING);
  ck_assert(strstr(err.message, "T2") != NULL);
  ck_assert_int_eq(twf_accuracy_residuals(m, &B, NULL, c, NULL, NULL, &err),
                   TWF_ERR_INVALID);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

/* ------------------------------------------------------------------ */
/* Statistics                                                          */
/* ------------------------------------------------------------------ */

/* By hand, for 2.1, 0.4, 1.7, 3.3, 0.9, 2.6 (sorted 0.4 0.9 1.7 2.1 2.6
 * 3.3): mean 11.0 / 6 = 1.8333...; RMS sqrt(25.92 / 6) = sqrt(4.32) =
 * 2.0784609690826528; 95th percentile by Hyndman and Fan (1996)
 * definition 7 (numpy's default): h = (6 - 1) 0.95 = 4.75, x[4] + 0.75
 * (x[5] - x[4]) = 2.6 + 0.75 * 0.7 = 3.125; max 3.3 at index 3. */
START_TEST(test_stats_by_hand)
{
  const double v[6] = { 2.1, 0.4, 1.7, 3.3, 0.9, 2.6 };
  const double sorted[6] = { 0.4, 0.9, 1.7, 2.1, 2.6, 3.3 };
  double one = 0.000731, bad[2] = { 1.0, NAN };
  twf_stats s;
  twf_error err;
  ck_assert_int_eq(twf_accuracy_stats(v, 6, &s, &err), TWF_OK);
  ck_assert_uint_eq(s.count, 6);
  ck_assert_close(s.mean, 11.0 / 6.0, 1e-15);
  ck_assert_close(s.rms, sqrt(4.32), 1e-15);
  ck_assert_close(s.p95, 3.125, 1e-15);
  ck_assert_close(s.max, 3.3, 0);
  ck_assert_uint_eq(s.max_index, 3);
  ck_assert(v[0] == 2.1 && v[3] == 3.3); /* input untouched */
  /* percentile definition 7 at the ends and in between, by hand */
  ck_assert_close(twf_accuracy_percentile(sorted, 6, 0.0), 0.4, 0);
  ck_assert_close(twf_accuracy_percentile(sorted, 6, 1.0), 3.3, 0);
  ck_assert_close(twf_accuracy_percentile(sorted, 6, 0.5), 1.9, 1e-15); /* h = 2.5 */
  ck_assert_close(twf_accuracy_percentile(sorted, 6, 0.1), 0.65, 1e-15); /* h = 0.5 */
  ck_assert(isnan(twf_accuracy_percentile(sorted, 6, 1.5)));
  ck_assert(isnan(twf_accuracy_percentile(sorted, 0, 0.5)));
  /* one value: every figure is that value */
  ck_assert_int_eq(twf_accuracy_stats(&one, 1, &s, &err), TWF_OK);
  ck_assert(s.mean == one && s.rms == one && s.p95 == one && s.max == one);
  /* none: NaN, no index */
  ck_assert_int_eq(twf_accuracy_stats(NULL, 0, &s, &err), TWF_OK);
  ck_assert_uint_eq(s.count, 0);
  ck_assert(isnan(s.mean) && isnan(s.p95) && s.max_index == SIZE_MAX);
  ck_assert_int_eq(twf_accuracy_stats(bad, 2, &s, &err), TWF_ERR_VALUE);
}
END_TEST

/* A summary computed by hand (lengths in units of 1e-4 m; directions
 * unit vectors, so only the lengths matter):
 *   meas  pose target set    length
 *    0     p0   T1    fit    2.1      angle 0.0012
 *    1     p0   T2    fit    1.2
 *    2     p1   T1    fit    0.4      angle 0.0005
 *    3     p1   T2    fit    0.5
 *    4     p2   T1    fit    1.7
 *    5     p3   T1    fit    3.3
 *    6     p4   T1    fit    0.9
 *    7     p5   T1    fit    2.6
 *    8     p6   T1    check  4.4
 *    9     p6   T2    check  0.8
 *   10     p7   T2    check  1.9
 * fit T1: the six values of test_stats_by_hand (max at meas 5).
 * fit T2: 1.2, 0.5: mean 0.85, RMS sqrt(1.69 / 2) = 0.91923881554251186,
 *   p95 h = 0.95: 0.5 + 0.95 * 0.7 = 1.165, max 1.2 (meas 1).
 * fit overall: eight values, sum 12.7, mean 1.5875, squares 27.61, RMS
 *   sqrt(3.45125); sorted 0.4 0.5 0.9 1.2 1.7 2.1 2.6 3.3, h = 6.65:
 *   2.6 + 0.65 * 0.7 = 3.055; max 3.3 (meas 5).
 * check T1: 4.4 alone. check T2: 0.8, 1.9: mean 1.35, RMS sqrt(2.125),
 *   p95 0.8 + 0.95 * 1.1 = 1.845, max 1.9 (meas 10).
 * check overall: 4.4 0.8 1.9: mean 7.1 / 3, RMS sqrt(23.61 / 3),
 *   h = 1.9: 1.9 + 0.9 * 2.5 = 4.15, max 4.4 (meas 8).
 * worst fit poses (largest error per pose): p3 3.3, p5 2.6, p0 2.1 (meas
 *   0), then p2 1.7; worst check poses: p6 4.4 (meas 8), p7 1.9.
 * orientation, fit: 0.0012 and 0.0005 (both T1); check: none. */
START_TEST(test_summary_by_hand)
{
  static const size_t pose[11] = { 0, 0, 1, 1, 2, 3, 4, 5, 6, 6, 7 };
  static const size_t target[11] = { 0, 1, 0, 1, 0, 0, 0, 0, 0, 1, 1 };
  static const double len[11] = { 2.1, 1.2, 0.4, 0.5, 1.7, 3.3, 0.9, 2.6, 4.4, 0.8, 1.9 };
  const double u[2][3] = { { 0.6, 0.0, 0.8 }, { 0.0, -0.28, 0.96 } };
  twf_campaign *c = twf_campaign_alloc(3, 8, 11);
  double pos_err[33], ang[11];
  twf_accuracy_summary *s;
  twf_error err;
  size_t i, j;
  const double e = 1e-4, tol = 1e-14;
  ck_assert(c != NULL);
  for (i = 0; i < 11; i++) {
    c->meas[i].pose = (uint32_t)pose[i];
    c->meas[i].target = (uint32_t)target[i];
    c->meas[i].set = i >= 8 ? TWF_SET_CHECK : TWF_SET_FIT;
    for (j = 0; j < 3; j++)
      pos_err[3 * i + j] = len[i] * e * u[i % 2][j];
    ang[i] = NAN;
  }
  ang[0] = 0.0012;
  ang[2] = 0.0005;
  s = twf_accuracy_summarize(c, 2, pos_err, ang, 3, &err);
  ck_assert_msg(s != NULL, "%s", err.message);
  /* fit, per target */
  ck_assert_uint_eq(s->target_position[2 * 0 + TWF_SET_FIT].count, 6);
  ck_assert_close(s->target_position[2 * 0 + TWF_SET_FIT].mean, 11.0 / 6.0 * e, tol);
  ck_assert_close(s->target_position[2 * 0 + TWF_SET_FIT].rms, sqrt(4.32) * e, tol);
  ck_assert_close(s->target_position[2 * 0 + TWF_SET_FIT].p95, 3.125 * e, tol);
  ck_assert_uint_eq(s->target_position[2 * 0 + TWF_SET_FIT].max_index, 5);
  ck_assert_close(s->target_position[2 * 1 + TWF_SET_FIT].mean, 0.85 * e, tol);
  ck_assert_close(s->target_position[2 * 1 + TWF_SET_FIT].rms, sqrt(1.69 / 2) * e, tol);
  ck_assert_close(s->target_position[2 * 1 + TWF_SET_FIT].p95, 1.165 * e, tol);
  ck_assert_close(s->target_position[2 * 1 + TWF_SET_FIT].max, 1.2 * e, tol);
  ck_assert_uint_eq(s->target_position[2 * 1 + TWF_SET_FIT].max_index, 1);
  /* fit, overall */
  ck_assert_uint_eq(s->position[TWF_SET_FIT].count, 8);
  ck_assert_close(s->position[TWF_SET_FIT].mean, 1.5875 * e, tol);
  ck_assert_close(s->position[TWF_SET_FIT].rms, sqrt(3.45125) * e, tol);
  ck_assert_close(s->position[TWF_SET_FIT].p95, 3.055 * e, tol);
  ck_assert_close(s->position[TWF_SET_FIT].max, 3.3 * e, tol);
  ck_assert_uint_eq(s->position[TWF_SET_FIT].max_index, 5);
  /* check */
  ck_assert_uint_eq(s->target_position[2 * 0 + TWF_SET_CHECK].count, 1);
  ck_assert_close(s->target_position[2 * 0 + TWF_SET_CHECK].p95, 4.4 * e, tol);
  ck_assert_close(s->target_position[2 * 1 + TWF_SET_CHECK].rms, sqrt(2.125) * e, tol);
  ck_assert_close(s->target_position[2 * 1 + TWF_SET_CHECK].p95, 1.845 * e, tol);
  ck_assert_uint_eq(s->target_position[2 * 1 + TWF_SET_CHECK].max_index, 10);
  ck_assert_uint_eq(s->position[TWF_SET_CHECK].count, 3);
  ck_assert_close(s->position[TWF_SET_CHECK].mean, 7.1 / 3 * e, tol);
  ck_assert_close(s->position[TWF_SET_CHECK].rms, sqrt(23.61 / 3) * e, tol);
  ck_assert_close(s->position[TWF_SET_CHECK].p95, 4.15 * e, tol);
  ck_assert_uint_eq(s->position[TWF_SET_CHECK].max_index, 8);
  /* worst poses */
  ck_assert_uint_eq(s->n_worst[TWF_SET_FIT], 3);
  ck_assert_uint_eq(s->worst[TWF_SET_FIT][0].pose, 3);
  ck_assert_uint_eq(s->worst[TWF_SET_FIT][1].pose, 5);
  ck_assert_uint_eq(s->worst[TWF_SET_FIT][2].pose, 0);
  ck_assert_uint_eq(s->worst[TWF_SET_FIT][2].meas, 0);
  ck_assert_close(s->worst[TWF_SET_FIT][2].error_m, 2.1 * e, tol);
  ck_assert_uint_eq(s->n_worst[TWF_SET_CHECK], 2);
  ck_assert_uint_eq(s->worst[TWF_SET_CHECK][0].pose, 6);
  ck_assert_uint_eq(s->worst[TWF_SET_CHECK][0].meas, 8);
  ck_assert_uint_eq(s->worst[TWF_SET_CHECK][1].pose, 7);
  /* orientation */
  ck_assert_uint_eq(s->orientation[TWF_SET_FIT].count, 2);
  ck_assert_close(s->orientation[TWF_SET_FIT].mean, 0.00085, tol);
  ck_assert_uint_eq(s->orientation[TWF_SET_FIT].max_index, 0);
  ck_assert_uint_eq(s->target_orientation[2 * 0 + TWF_SET_FIT].count, 2);
  ck_assert_uint_eq(s->target_orientation[2 * 1 + TWF_SET_FIT].count, 0);
  ck_assert_uint_eq(s->orientation[TWF_SET_CHECK].count, 0);
  ck_assert(isnan(s->orientation[TWF_SET_CHECK].rms));
  twf_accuracy_summary_free(s);
  /* without angles; k_worst 0 */
  s = twf_accuracy_summarize(c, 2, pos_err, NULL, 0, &err);
  ck_assert(s != NULL);
  ck_assert_uint_eq(s->orientation[TWF_SET_FIT].count, 0);
  ck_assert_uint_eq(s->n_worst[TWF_SET_FIT], 0);
  twf_accuracy_summary_free(s);
  twf_accuracy_summary_free(NULL);
  /* errors */
  ck_assert(twf_accuracy_summarize(c, 1, pos_err, NULL, 3, &err) == NULL);
  ck_assert_int_eq(err.status, TWF_ERR_INVALID);
  pos_err[4] = INFINITY;
  ck_assert(twf_accuracy_summarize(c, 2, pos_err, NULL, 3, &err) == NULL);
  ck_assert_int_eq(err.status, TWF_ERR_VALUE);
  twf_campaign_free(c);
}
END_TEST

/* ------------------------------------------------------------------ */
/* ISO 9283                                                            */
/* ------------------------------------------------------------------ */

/* A worked example, by hand, for ISO 9283:1998 section 7.2.1 (pose
 * accuracy AP_P = |xbar - x_c|, AP_x,y,z = xbar - x_c, xbar the barycentre
 * of the attained positions) and section 7.2.3 (pose repeatability
 * RP_l = lbar + 3 S_l, l_j = |x_j - xbar|, S_l = sqrt(sum (l_j - lbar)^2 /
 * (n - 1))). The arm of make_model with identity home rotation, home
 * position (0.25, -0.1, 0.4), base = identity: at q = (q1, q2, 0) target
 * T1 (offset 0) is commanded at (0.25 + q1, -0.1 + q2, 0.4) and T2 (offset
 * (0, 0, 0.05)) 0.05 higher.
 *
 * Poses (q3 = 0 throughout):
 *   0 A (0.3, 0.2)        T1 x1 = (0.5503, 0.1002, 0.3999)
 *   1 (0.3000002, 0.5)    T1 once (within tolerance of A in q1 only)
 *   2 A                   T1 x2 = (0.5501, 0.0998, 0.4003), T2 y1 = (0.5504, 0.0997, 0.4502)
 *   3 D (0.7, 0.1)        T1 d1 = (0.9502, 0.0001, 0.4001)
 *   4 A                   T1 x3 = (0.5506, 0.1001, 0.4000)
 *   5 D' (0.7000006, 0.1) T1 d2 = (0.9504, -0.0001, 0.3999)
 *   6 A                   T1 x4 = (0.5502, 0.1003, 0.3998), T2 y2 = (0.5498, 0.1001, 0.4496)
 *   7 (0.3, 0.200005)     T1 once (5e-6 from A in q2: beyond 1e-6)
 *
 * Group A, T1 (n = 4), commanded (0.55, 0.1, 0.4):
 *   xbar = (2.2012, 0.4004, 1.6000) / 4 = (0.5503, 0.1001, 0.4000)
 *   AP = (0.0003, 0.0001, 0), AP_P = sqrt(1e-7) = 3.1622776601683794e-4
 *   x_j - xbar: (0, 1, -1), (-2, -3, 3), (3, 0, 0), (-1, 2, -2) x 1e-4
 *   l_j = sqrt(2), sqrt(22), 3, 3 (x 1e-4)
 *   lbar = (1.41421356 + 4.69041576 + 3 + 3) / 4 = 3.02615733e-4
 *   deviations -1.61194377, 1.66425843, -0.02615733, -0.02615733 (e-4)
 *   S_l = sqrt((2.59836272 + 2.76975614 + 0.00068421 + 0.00068421) / 3)
 *       = sqrt(1.78982909) = 1.33784494e-4
 *   RP_l = 3.02615733e-4 + 3 * 1.33784494e-4 = 7.03969215e-4
 * Group A, T2 (n = 2), commanded (0.55, 0.1, 0.45):
 *   ybar = (0.5501, 0.0999, 0.4499), AP = (1, -1, -1) e-4,
 *   AP_P = sqrt(3) e-4; l = sqrt(22) e-4 twice: lbar = 4.69041576e-4,
 *   S_l = 0, RP_l = lbar
 * Group D, T1 (n = 2): commanded at the mean joint values
 *   (0.7000003, 0.1, 0): (0.9500003, 0, 0.4); dbar = (0.9503, 0, 0.4),
 *   AP = (2.997e-4, 0, 0); l = sqrt(3) e-4 twice: RP_l = sqrt(3) e-4;
 *   joint spread 6e-7.
 * Poses 1 and 7 are single visits: no figures. */
static twf_campaign *iso_campaign(void)
{
  static const double q[8][2] = { { 0.3, 0.2 }, { 0.3000002, 0.5 }, { 0.3, 0.2 },
                                  { 0.7, 0.1 }, { 0.3, 0.2 }, { 0.7000006, 0.1 },
                                  { 0.3, 0.2 }, { 0.3, 0.200005 } };
  static const struct { size_t pose, target; double x[3]; } rows[] = {
    { 0, 0, { 0.5503, 0.1002, 0.3999 } }, { 1, 0, { 0.5503, 0.4001, 0.4002 } },
    { 2, 0, { 0.5501, 0.0998, 0.4003 } }, { 2, 1, { 0.5504, 0.0997, 0.4502 } },
    { 3, 0, { 0.9502, 0.0001, 0.4001 } }, { 4, 0, { 0.5506, 0.1001, 0.4000 } },
    { 5, 0, { 0.9504, -0.0001, 0.3999 } }, { 6, 0, { 0.5502, 0.1003, 0.3998 } },
    { 6, 1, { 0.5498, 0.1001, 0.4496 } }, { 7, 0, { 0.5501, 0.1049, 0.4001 } } };
  twf_campaign *c = twf_campaign_alloc(3, 8, 10);
  size_t i;
  ck_assert(c != NULL);
  for (i = 0; i < 8; i++) {
    snprintf(c->pose_ids[i], TWF_NAME_MAX, "v%zu", i);
    c->q[3 * i] = q[i][0];
    c->q[3 * i + 1] = q[i][1];
    c->q[3 * i + 2] = 0.0;
  }
  for (i = 0; i < 10; i++) {
    c->meas[i].pose = (uint32_t)rows[i].pose;
    c->meas[i].target = (uint32_t)rows[i].target;
    memcpy(c->meas[i].pos, rows[i].x, sizeof rows[i].x);
    c->meas[i].set = TWF_SET_FIT;
  }
  return c;
}

START_TEST(test_iso9283_worked_example)
{
  const double rpy[3] = { 0, 0, 0 }, hp[3] = { 0.25, -0.1, 0.4 };
  twf_model *m = make_model(rpy, hp);
  twf_campaign *c = iso_campaign();
  twf_pose B;
  twf_iso9283 *r;
  twf_iso9283_options o = twf_iso9283_default_options();
  twf_error err;
  const twf_iso9283_entry *e;
  const double tol = 1e-9; /* relative to 1e-4 m figures: 1e-13 m */
  twf_pose_identity(&B);

  /* reference: ISO 9283:1998 sections 7.2.1 and 7.2.3, by hand above */
  r = twf_accuracy_iso9283(m, &B, NULL, c, NULL, &err);
  ck_assert_msg(r != NULL, "%s", err.message);
  ck_assert_uint_eq(r->n_groups, 2);
  ck_assert_uint_eq(r->n_entries, 3);
  e = &r->entries[0];
  ck_assert_uint_eq(e->group, 0);
  ck_assert_uint_eq(e->first_pose, 0);
  ck_assert_uint_eq(e->n_poses, 4);
  ck_assert_uint_eq(e->target, 0);
  ck_assert_uint_eq(e->n, 4);
  ck_assert(fabs(e->commanded[0] - 0.55) < 1e-15 && fabs(e->commanded[2] - 0.4) < 1e-15);
  ck_assert(fabs(e->barycentre[0] - 0.5503) < 1e-15);
  ck_assert(fabs(e->ap[0] - 3e-4) < 1e-13 && fabs(e->ap[1] - 1e-4) < 1e-13
            && fabs(e->ap[2]) < 1e-13);
  ck_assert_close(e->ap_p * 1e4, 3.1622776601683794, tol);
  ck_assert_close(e->l_mean * 1e4, 3.02615733, 1e-8);
  ck_assert_close(e->s_l * 1e4, 1.33784494, 1e-8);
  ck_assert_close(e->rp * 1e4, 7.03969215, 1e-8);
  ck_assert(e->joint_spread == 0.0);
  e = &r->entries[1];
  ck_assert_uint_eq(e->group, 0);
  ck_assert_uint_eq(e->target, 1);
  ck_assert_uint_eq(e->n, 2);
  ck_assert(fabs(e->commanded[2] - 0.45) < 1e-15);
  ck_assert_close(e->ap_p * 1e4, sqrt(3.0), tol);
  ck_assert(fabs(e->ap[1] + 1e-4) < 1e-13 && fabs(e->ap[2] + 1e-4) < 1e-13);
  ck_assert_close(e->l_mean * 1e4, sqrt(22.0), tol);
  ck_assert(fabs(e->s_l) < 1e-15);
  ck_assert_close(e->rp * 1e4, sqrt(22.0), tol);
  e = &r->entries[2];
  ck_assert_uint_eq(e->group, 1);
  ck_assert_uint_eq(e->first_pose, 3);
  ck_assert_uint_eq(e->n_poses, 2);
  ck_assert(fabs(e->commanded[0] - 0.9500003) < 1e-15);
  ck_assert(fabs(e->ap[0] - 2.997e-4) < 1e-13);
  ck_assert_close(e->ap_p * 1e4, 2.997, tol);
  ck_assert_close(e->rp * 1e4, sqrt(3.0), tol);
  ck_assert(fabs(e->joint_spread - 6e-7) < 1e-15);
  twf_iso9283_free(r);

  /* three visits needed: only group A's T1 */
  o.min_visits = 3;
  r = twf_accuracy_iso9283(m, &B, NULL, c, &o, &err);
  ck_assert(r != NULL);
  ck_assert_uint_eq(r->n_groups, 1);
  ck_assert_uint_eq(r->n_entries, 1);
  ck_assert_uint_eq(r->entries[0].n, 4);
  twf_iso9283_free(r);

  /* fit set only, with pose 6 in the check set: T1 of A from 3 visits
   * (x1, x2, x3: barycentre (0.55033333, 0.10003333, 0.40006667)), no T2 */
  c->meas[7].set = c->meas[8].set = TWF_SET_CHECK;
  o = twf_iso9283_default_options();
  o.set = TWF_SET_FIT;
  r = twf_accuracy_iso9283(m, &B, NULL, c, &o, &err);
  ck_assert(r != NULL);
  ck_assert_uint_eq(r->n_entries, 2);
  ck_assert_uint_eq(r->entries[0].n, 3);
  ck_assert_close(r->entries[0].barycentre[0], 1.651 / 3, 1e-15);
  ck_assert_uint_eq(r->entries[1].group, 1);
  twf_iso9283_free(r);

  /* a wider tolerance merges pose 7 into A */
  o = twf_iso9283_default_options();
  o.joint_tol = 1e-5;
  c->meas[7].set = c->meas[8].set = TWF_SET_FIT;
  r = twf_accuracy_iso9283(m, &B, NULL, c, &o, &err);
  ck_assert(r != NULL);
  ck_assert_uint_eq(r->entries[0].n, 5);
  ck_assert_uint_eq(r->entries[0].n_poses, 5);
  ck_assert(fabs(r->entries[0].joint_spread - 5e-6) < 1e-15);
  twf_iso9283_free(r);

  /* bad options */
  o.min_visits = 1;
  ck_assert(twf_accuracy_iso9283(m, &B, NULL, c, &o, &err) == NULL);
  ck_assert_int_eq(err.status, TWF_ERR_INVALID);
  twf_iso9283_free(NULL);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

/* The summary row and the orientation figures, by hand. The formulas are
 * ISO 9283:1998 7.2.1 and 7.2.3 as recalled from memory (the text was not
 * at hand): AP_a = mean a_j - a_c, RP_a = 3 S_a, likewise b and c, with
 * a, b, c rotations about the base frame's x, y, z axes.
 * Commanded pose A, q = (0.3, 0.2, 0.4), three visits, 6-D rows whose
 * orientation relative to the commanded one is D_j = rpy(a_j, b_j, c_j):
 *   a = (1, 2, 3) mrad: AP_a = 2 mrad, S_a = 1 mrad, RP_a = 3 mrad
 *   b = (-2, 0, -1) mrad: AP_b = -1 mrad, S_b = 1 mrad, RP_b = 3 mrad
 *   c = 0.5 mrad each: AP_c = 0.5 mrad, RP_c = 0
 * and T1 at the commanded position plus (+0.1, -0.1, 0) mm along x:
 *   AP_P = 0; l = (0.1, 0.1, 0) mm, lbar = 0.0667 mm,
 *   S_l = sqrt(((1/3)^2 2 + (2/3)^2) / 2) 0.1 mm = 0.057735 mm,
 *   RP_l = 0.0667 + 3 x 0.057735 = 0.239871 mm.
 * Commanded pose B, q = (0.6, -0.1, -0.5), two visits at +0.2 mm along x:
 *   AP_P = 0.2 mm, RP_l = 0; points only, no orientation figures.
 * Summary: worst AP_P 0.2 mm (entry 1), worst RP_l 0.239871 mm (entry 0),
 * cycles 2 to 3, worst |AP| angle 2 mrad, worst RP angle 3 mrad. The base
 * and home pose are turned, so that the frames matter. */
START_TEST(test_iso9283_summary_and_orientation)
{
  const double rpy[3] = { 0.317, -0.208, 1.093 }, hp[3] = { 0.412, -0.133, 0.287 };
  const double qa[3] = { 0.3, 0.2, 0.4 }, qb[3] = { 0.6, -0.1, -0.5 };
  const double a[3] = { 1e-3, 2e-3, 3e-3 }, b[3] = { -2e-3, 0.0, -1e-3 }, dx[5] = { 1e-4, -1e-4, 0, 2e-4, 2e-4 };
  twf_model *m = make_model(rpy, hp);
  twf_campaign *c = twf_campaign_alloc(3, 5, 5);
  twf_pose B, F, T;
  twf_iso9283 *r;
  twf_error err;
  size_t i;
  int k;
  B.p[0] = 2.1; B.p[1] = -0.4; B.p[2] = 0.3;
  twf_rpy_fixed_xyz_to_rot(0.3, -0.2, 1.1, B.R);
  for (i = 0; i < 5; i++) {
    const double *q = i < 3 ? qa : qb;
    snprintf(c->pose_ids[i], TWF_NAME_MAX, "v%zu", i);
    memcpy(c->q + 3 * i, q, 3 * sizeof *q);
    fk_by_hand(m, q, &F);
    twf_pose_mul(&B, &F, &T);
    c->meas[i].pose = (uint32_t)i;
    c->meas[i].target = 0;
    c->meas[i].set = TWF_SET_FIT;
    twf_pose_apply(&T, m->targets[0].offset, c->meas[i].pos);
    /* along the tracker's x: the distances are what the figures see */
    c->meas[i].pos[0] += dx[i];
    if (i < 3) {
      double D[3][3], Rb[3][3], Rt[3][3], qt[4];
      int u, v, w;
      twf_rpy_fixed_xyz_to_rot(a[i], b[i], 0.5e-3, D);
      for (u = 0; u < 3; u++)
        for (v = 0; v < 3; v++) {
          Rb[u][v] = 0.0;
          for (w = 0; w < 3; w++)
            Rb[u][v] += D[u][w] * F.R[w][v];
        }
      for (u = 0; u < 3; u++)
        for (v = 0; v < 3; v++) {
          Rt[u][v] = 0.0;
          for (w = 0; w < 3; w++)
            Rt[u][v] += B.R[u][w] * Rb[w][v];
        }
      twf_rot_to_quat(Rt, qt);
      ck_assert_int_eq(twf_campaign_meas_set_quat(c, i, qt), TWF_OK);
    }
  }
  c->has_orientation_any = 1;
  r = twf_accuracy_iso9283(m, &B, NULL, c, NULL, &err);
  ck_assert_msg(r != NULL, "%s", err.message);
  ck_assert_uint_eq(r->n_groups, 2);
  ck_assert_uint_eq(r->n_entries, 2);
  ck_assert(fabs(r->entries[0].ap_p) < 1e-12);
  ck_assert_close(r->entries[0].rp, 2.398717e-4, 1e-6);
  ck_assert_close(r->entries[1].ap_p, 2e-4, 1e-9);
  ck_assert(fabs(r->entries[1].rp) < 1e-12);
  ck_assert_close(r->ap_p_max, 2e-4, 1e-9);
  ck_assert_uint_eq(r->ap_p_worst, 1);
  ck_assert_close(r->rp_max, 2.398717e-4, 1e-6);
  ck_assert_uint_eq(r->rp_worst, 0);
  ck_assert_uint_eq(r->min_cycles, 2);
  ck_assert_uint_eq(r->max_cycles, 3);
  ck_assert_uint_eq(r->n_orientation, 1);
  ck_assert_uint_eq(r->orientation[0].group, 0);
  ck_assert_uint_eq(r->orientation[0].n, 3);
  {
    const double ap[3] = { 2e-3, -1e-3, 0.5e-3 }, rp[3] = { 3e-3, 3e-3, 0.0 };
    for (k = 0; k < 3; k++) {
      ck_assert_msg(fabs(r->orientation[0].ap[k] - ap[k]) < 1e-12, "AP %d: %.15g", k, r->orientation[0].ap[k]);
      ck_assert_msg(fabs(r->orientation[0].rp[k] - rp[k]) < 1e-11, "RP %d: %.15g", k, r->orientation[0].rp[k]);
    }
  }
  ck_assert_close(r->ap_angle_max, 2e-3, 1e-9);
  ck_assert_close(r->rp_angle_max, 3e-3, 1e-8);
  ck_assert_int_eq(TWF_ISO9283_CYCLES, 30);
  twf_iso9283_free(r);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

START_TEST(test_acceptance)
{
  /* the check set when it has rows, else the fit set; a NaN angle fails */
  twf_accuracy_summary s;
  twf_acceptance_limits lim = { 1e-4, 0, 3e-4, 0 };
  twf_acceptance a;
  twf_error err;
  memset(&s, 0, sizeof s);
  s.position[TWF_SET_FIT].count = 10;
  s.position[TWF_SET_FIT].rms = 0.9e-4;
  s.position[TWF_SET_FIT].max = 2e-4;
  s.orientation[TWF_SET_FIT].max = NAN;
  ck_assert_int_eq(twf_accuracy_accept(&s, &lim, &a, &err), TWF_OK);
  ck_assert_int_eq(a.set, TWF_SET_FIT);
  ck_assert_uint_eq(a.n_limits, 2);
  ck_assert(a.accepted && a.pass[TWF_ACCEPT_RMS] && a.pass[TWF_ACCEPT_MAX] && !a.pass[TWF_ACCEPT_P95]);
  s.position[TWF_SET_CHECK].count = 3;
  s.position[TWF_SET_CHECK].rms = 1.1e-4;
  s.position[TWF_SET_CHECK].max = 2e-4;
  ck_assert_int_eq(twf_accuracy_accept(&s, &lim, &a, &err), TWF_OK);
  ck_assert_int_eq(a.set, TWF_SET_CHECK);
  ck_assert(!a.accepted && !a.pass[TWF_ACCEPT_RMS] && a.pass[TWF_ACCEPT_MAX]);
  lim.angle_max_rad = 1e-3;
  s.orientation[TWF_SET_CHECK].max = NAN;
  lim.rms_m = 0;
  ck_assert_int_eq(twf_accuracy_accept(&s, &lim, &a, &err), TWF_OK);
  ck_assert(!a.accepted && !a.pass[TWF_ACCEPT_ANGLE_MAX]);
  lim.max_m = -1;
  ck_assert_int_eq(twf_accuracy_accept(&s, &lim, &a, &err), TWF_ERR_INVALID);
}
END_TEST

/* 100,000 poses, each commanded pose visited twice far apart in the
 * campaign: grouping by sorting, not pairwise comparison (which would take
 * 5e9 comparisons and time out). Every visit pair gives one entry with
 * AP = 0 (measured exactly at the model) and RP = 0. */
START_TEST(test_iso9283_large)
{
  const double rpy[3] = { 0.1, 0.2, 0.3 }, hp[3] = { 0.3, 0.1, 0.5 };
  twf_model *m = make_model(rpy, hp);
  const size_t half = 50000, n = 2 * half;
  twf_campaign *c = twf_campaign_alloc(3, n, n);
  twf_test_rng rng;
  twf_pose B;
  twf_iso9283 *r;
  twf_accuracy_summary *s;
  double *pos_err;
  twf_error err;
  size_t i, j;
  ck_assert(c != NULL);
  twf_pose_identity(&B);
  twf_test_rng_init(&rng, twf_test_seed(9283));
  for (i = 0; i < half; i++)
    for (j = 0; j < 3; j++) {
      /* coarse values so that many poses share a joint value */
      double v = j == 0 ? 0.01 * (double)(i % 7) : twf_test_uniform(&rng, -1.0, 1.0);
      c->q[3 * i + j] = c->q[3 * (i + half) + j] = v;
    }
  for (i = 0; i < n; i++) {
    twf_pose F;
    snprintf(c->pose_ids[i], TWF_NAME_MAX, "P%zu", i);
    c->meas[i].pose = (uint32_t)i;
    c->meas[i].target = 0;
    twf_model_fk(m, c->q + 3 * i, NULL, &F);
    twf_pose_apply(&F, m->targets[0].offset, c->meas[i].pos);
  }
  r = twf_accuracy_iso9283(m, &B, NULL, c, NULL, &err);
  ck_assert_msg(r != NULL, "%s", err.message);
  ck_assert_uint_eq(r->n_groups, half);
  ck_assert_uint_eq(r->n_entries, half);
  for (i = 0; i < half; i++) {
    ck_assert_uint_eq(r->entries[i].first_pose, i);
    ck_assert_uint_eq(r->entries[i].n, 2);
    ck_assert(r->entries[i].ap_p < 1e-15 && r->entries[i].rp < 1e-15);
  }
  twf_iso9283_free(r);
  /* the summary of the same size */
  pos_err = calloc(3 * n, sizeof *pos_err);
  ck_assert(pos_err != NULL);
  ck_assert_int_eq(twf_accuracy_residuals(m, &B, NULL, c, pos_err, NULL, &err), TWF_OK);
  for (i = 0; i < 3 * n; i++)
    ck_assert(fabs(pos_err[i]) < 1e-15);
  pos_err[3 * 77777 + 1] = 2.5e-4;
  s = twf_accuracy_summarize(c, 2, pos_err, NULL, 5, &err);
  ck_assert(s != NULL);
  ck_assert_uint_eq(s->position[TWF_SET_FIT].count, n);
  ck_assert_uint_eq(s->position[TWF_SET_FIT].max_index, 77777);
  ck_assert_uint_eq(s->worst[TWF_SET_FIT][0].pose, 77777);
  ck_assert_uint_eq(s->n_worst[TWF_SET_FIT], 5);
  ck_assert_uint_eq(s->position[TWF_SET_CHECK].count, 0);
  twf_accuracy_summary_free(s);
  free(pos_err);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

static Suite *accuracy_suite(void)
{
  Suite *s = suite_create("accuracy");
  TCase *tc = tcase_create("core");
  tcase_add_test(tc, test_residuals);
  tcase_add_test(tc, test_stats_by_hand);
  tcase_add_test(tc, test_summary_by_hand);
  tcase_add_test(tc, test_iso9283_worked_example);
  tcase_add_test(tc, test_iso9283_large);
  tcase_add_test(tc, test_iso9283_summary_and_orientation);
  tcase_add_test(tc, test_acceptance);
  tcase_set_timeout(tc, 30);
  suite_add_tcase(s, tc);
  return s;
}

int main(void)
{
  return twf_test_run(accuracy_suite());
}
