/* check_campaign_compact.c: the compact measurement row of a campaign
 * (twistfit/campaign.h): 32-bit indices and lines with their limit, the
 * quaternions of 6-D rows in the campaign's side array and the accessor
 * that gives (1 0 0 0) for point rows, and the exact round trip of a
 * campaign that mixes point and 6-D rows.
 *
 * No outside reference: the expected values are the inputs themselves
 * (a round trip) and the limit is the largest 32-bit unsigned value
 * (ISO C11, 7.20.2.1, UINT32_MAX). */
#include "testutil.h"
#include "arms.h"
#include "twistfit.h"
#include "io/campaign_internal.h"

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* A quaternion of norm 1 to rounding, "unround" values. */
static void unit_quat(double a, double b, double c, double d, double q[4])
{
  double n = sqrt(a * a + b * b + c * c + d * d);
  q[0] = a / n;
  q[1] = b / n;
  q[2] = c / n;
  q[3] = d / n;
}

START_TEST(test_row_is_small)
{
  /* 32-bit pose, target, line and slot, two doubles' worth of flags:
   * pos (24) + sigma (8) + 4 x 4 + 2 bytes, padded to 8. */
  ck_assert_uint_le(sizeof(twf_measurement), 56);
}
END_TEST

START_TEST(test_accessor_point_and_6d)
{
  twf_campaign *c = twf_campaign_alloc(2, 2, 4);
  double q1[4], q3[4], q3b[4];
  const double *g;
  int k;
  ck_assert_ptr_nonnull(c);
  ck_assert_ptr_null(c->meas_quat);
  for (k = 0; k < 4; k++) {
    g = twf_campaign_meas_quat(c, (size_t)k);
    ck_assert(g[0] == 1 && g[1] == 0 && g[2] == 0 && g[3] == 0);
  }
  /* beyond the rows: the identity too, never a read out of bounds */
  g = twf_campaign_meas_quat(c, 4);
  ck_assert(g[0] == 1 && g[3] == 0);
  unit_quat(0.8775649, 0.2302946, -0.1535297, 0.3915008, q1);
  unit_quat(-0.125, 0.625, 0.5, -0.585, q3);
  ck_assert_int_eq(twf_campaign_meas_set_quat(c, 1, q1), TWF_OK);
  ck_assert_int_eq(twf_campaign_meas_set_quat(c, 3, q3), TWF_OK);
  ck_assert_uint_eq(c->n_quat, 2);
  ck_assert_int_eq(c->has_orientation_any, 1);
  ck_assert_int_eq(c->meas[0].has_orientation, 0);
  ck_assert_uint_eq(c->meas[0].quat_slot, 0);
  ck_assert_int_eq(c->meas[1].has_orientation, 1);
  ck_assert_int_eq(c->meas[3].has_orientation, 1);
  ck_assert_int_eq(memcmp(twf_campaign_meas_quat(c, 1), q1, sizeof q1), 0);
  ck_assert_int_eq(memcmp(twf_campaign_meas_quat(c, 3), q3, sizeof q3), 0);
  g = twf_campaign_meas_quat(c, 2);
  ck_assert(g[0] == 1 && g[1] == 0 && g[2] == 0 && g[3] == 0);
  /* giving a row a new orientation reuses its slot */
  unit_quat(0.25, -0.375, 0.5, 0.71, q3b);
  ck_assert_int_eq(twf_campaign_meas_set_quat(c, 3, q3b), TWF_OK);
  ck_assert_uint_eq(c->n_quat, 2);
  ck_assert_int_eq(memcmp(twf_campaign_meas_quat(c, 3), q3b, sizeof q3b), 0);
  ck_assert_int_eq(memcmp(twf_campaign_meas_quat(c, 1), q1, sizeof q1), 0);
  /* bad arguments */
  ck_assert_int_eq(twf_campaign_meas_set_quat(c, 4, q1), TWF_ERR_INVALID);
  ck_assert_int_eq(twf_campaign_meas_set_quat(c, 0, NULL), TWF_ERR_INVALID);
  ck_assert_int_eq(twf_campaign_meas_set_quat(NULL, 0, q1), TWF_ERR_INVALID);
  twf_campaign_free(c);
}
END_TEST

START_TEST(test_side_array_grows)
{
  /* more 6-D rows than the first capacity: every quaternion stays its
   * row's after the array moves */
  size_t n = 1000, k;
  twf_campaign *c = twf_campaign_alloc(1, 1, n);
  ck_assert_ptr_nonnull(c);
  for (k = 0; k < n; k++)
    if (k % 3 != 1) {
      double q[4];
      unit_quat(1.0 + 0.001 * (double)k, -0.25, 0.125 * (double)(k % 7), 0.5, q);
      ck_assert_int_eq(twf_campaign_meas_set_quat(c, k, q), TWF_OK);
    }
  for (k = 0; k < n; k++) {
    const double *g = twf_campaign_meas_quat(c, k);
    if (k % 3 != 1) {
      double q[4];
      unit_quat(1.0 + 0.001 * (double)k, -0.25, 0.125 * (double)(k % 7), 0.5, q);
      ck_assert_int_eq(memcmp(g, q, sizeof q), 0);
    } else {
      ck_assert(g[0] == 1 && g[1] == 0 && g[2] == 0 && g[3] == 0);
    }
  }
  twf_campaign_free(c);
}
END_TEST

START_TEST(test_32_bit_limit)
{
  twf_error err;
  creader r;
  twf_csv_row row;
  twf_campaign *c;
  double q[4] = {1, 0, 0, 0};
  memset(&r, 0, sizeof r);
  memset(&row, 0, sizeof row);
  memset(&err, 0, sizeof err);
  r.err = &err;
  r.path = "big.csv";
  row.line = 17;
  /* the largest count a campaign holds passes, one more is refused with
   * the file and line */
  ck_assert_int_eq(twf_creader_count_check(&r, &row, (size_t)UINT32_MAX, TWF_CAMPAIGN_COUNT_MAX,
                                           "poses"), TWF_OK);
  ck_assert_int_eq(twf_creader_count_check(&r, &row, (size_t)UINT32_MAX + 1,
                                           TWF_CAMPAIGN_COUNT_MAX, "poses"), TWF_ERR_VALUE);
  ck_assert_int_eq(err.status, TWF_ERR_VALUE);
  ck_assert_int_eq(err.line, 17);
  ck_assert_str_eq(err.file, "big.csv");
  ck_assert_ptr_nonnull(strstr(err.message, "more poses than the 4294967295"));
  /* a line beyond 32 bits */
  row.line = (long)UINT32_MAX;
  ck_assert_int_eq(twf_creader_line_check(&r, &row), TWF_OK);
  row.line = (long)UINT32_MAX + 1;
  ck_assert_int_eq(twf_creader_line_check(&r, &row), TWF_ERR_VALUE);
  ck_assert_ptr_nonnull(strstr(err.message, "lines"));
  /* a campaign of more poses than 32 bits index is not allocated */
  ck_assert_ptr_null(twf_campaign_alloc(1, (size_t)UINT32_MAX + 1, 0));
  /* the side array holds at most TWF_CAMPAIGN_COUNT_MAX quaternions: a
   * full one (its count set by hand, nothing allocated) takes no new row */
  c = twf_campaign_alloc(1, 1, 1);
  ck_assert_ptr_nonnull(c);
  c->n_quat = TWF_CAMPAIGN_COUNT_MAX;
  ck_assert_int_eq(twf_campaign_meas_set_quat(c, 0, q), TWF_ERR_INVALID);
  ck_assert_int_eq(c->meas[0].has_orientation, 0);
  c->n_quat = 0;
  twf_campaign_free(c);
}
END_TEST

/* Write in metres and radians (the one-file form, 17 digits) and read
 * back: every field of every row the same bits, the quaternions of the
 * 6-D rows too (unit to rounding, so the reader's normalisation keeps
 * them within an ulp or two), and the point rows still point rows. */
START_TEST(test_mixed_round_trip)
{
  twf_model *m = test_arm_model(ARM_TF6S);
  size_t np = 5, nt, p, t, k = 0, j, nj;
  twf_campaign *c, *b;
  twf_error err;
  char path[] = "/tmp/twf-compact-XXXXXX";
  FILE *f;
  int fd;
  ck_assert_ptr_nonnull(m);
  nt = m->n_targets;
  nj = m->n_joints;
  c = twf_campaign_alloc(nj, np, np * nt);
  ck_assert_ptr_nonnull(c);
  for (p = 0; p < np; p++) {
    snprintf(c->pose_ids[p], TWF_NAME_MAX, "P%zu", p + 1);
    for (j = 0; j < nj; j++)
      c->q[p * nj + j] = 0.5 * (m->joints[j].limit_lo + m->joints[j].limit_hi) +
                         0.0123 * (double)(p + j);
    for (t = 0; t < nt; t++, k++) {
      twf_measurement *ms = &c->meas[k];
      ms->pose = (uint32_t)p;
      ms->target = (uint32_t)t;
      ms->pos[0] = 0.731 + 0.0017 * (double)k;
      ms->pos[1] = -0.4125 + 0.0031 * (double)k;
      ms->pos[2] = 1.1035 - 0.0023 * (double)k;
      ms->sigma = k % 4 ? 2.5e-5 : 0.0;
      ms->set = k % 5 == 2 ? TWF_SET_CHECK : TWF_SET_FIT;
      if (k % 3 != 1) {
        double q[4];
        unit_quat(0.9 - 0.01 * (double)k, 0.2, -0.15 + 0.02 * (double)k, 0.39, q);
        ck_assert_int_eq(twf_campaign_meas_set_quat(c, k, q), TWF_OK);
      }
    }
  }
  fd = mkstemp(path);
  ck_assert_int_ge(fd, 0);
  f = fdopen(fd, "w");
  ck_assert_ptr_nonnull(f);
  ck_assert_int_eq(twf_campaign_write(c, m, TWF_LENGTH_M, TWF_ANGLE_RAD, f, &err), TWF_OK);
  ck_assert_int_eq(fclose(f), 0);
  {
    twf_campaign_options o = twf_campaign_default_options();
    o.length_from_caller = o.angle_from_caller = 1;
    o.length_unit = TWF_LENGTH_M;
    o.angle_unit = TWF_ANGLE_RAD;
    b = twf_campaign_read(path, m, &o, NULL, &err);
  }
  remove(path);
  ck_assert_msg(b != NULL, "%s", err.message);
  ck_assert_uint_eq(b->n_meas, c->n_meas);
  ck_assert_uint_eq(b->n_quat, c->n_quat);
  ck_assert_int_eq(b->has_orientation_any, 1);
  for (k = 0; k < c->n_meas; k++) {
    const twf_measurement *x = &c->meas[k], *y = &b->meas[k];
    const double *qx = twf_campaign_meas_quat(c, k), *qy = twf_campaign_meas_quat(b, k);
    ck_assert_uint_eq(x->pose, y->pose);
    ck_assert_uint_eq(x->target, y->target);
    ck_assert_int_eq(memcmp(x->pos, y->pos, sizeof x->pos), 0);
    ck_assert(x->sigma == y->sigma);
    ck_assert_int_eq(x->set, y->set);
    ck_assert_int_eq(x->has_orientation, y->has_orientation);
    ck_assert_uint_eq(y->line, k + 3); /* after the units line and the header */
    for (j = 0; j < 4; j++)
      ck_assert_msg(fabs(qx[j] - qy[j]) <= 4e-16, "row %zu quaternion %zu: %.17g against %.17g",
                    k, j, qx[j], qy[j]);
  }
  for (p = 0; p < np; p++)
    ck_assert_int_eq(memcmp(c->q + p * nj, b->q + p * nj, nj * sizeof *c->q), 0);
  twf_campaign_free(b);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

static Suite *compact_suite(void)
{
  Suite *s = suite_create("campaign_compact");
  TCase *tc = tcase_create("core");
  tcase_add_test(tc, test_row_is_small);
  tcase_add_test(tc, test_accessor_point_and_6d);
  tcase_add_test(tc, test_side_array_grows);
  tcase_add_test(tc, test_32_bit_limit);
  tcase_add_test(tc, test_mixed_round_trip);
  suite_add_tcase(s, tc);
  return s;
}

int main(void)
{
  return twf_test_run(compact_suite());
}
