/* check_ident.c: the redundancy walk. Known answers built here: columns
 * made exactly dependent on others must be fixed, independent ones kept,
 * whichever order; and the margin claimed in DEVELOPERS.md: on the
 * Givens factor the dependent columns' independent part sits at rounding
 * level (below 1e-12), while the same walk on the normal matrix only gets
 * to about the square root of the rounding (common practice, no source). */
#include "testutil.h"
#include "calib/ident.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define P 8
#define ROWS 400

/* J: ROWS x P, columns 5 = c0 + 2 c1 (exactly, up to rounding) and
 * 7 = 0.3 c2 - 1.7 c4; badly scaled columns to make it realistic */
static void build(double *J, twf_test_rng *rng)
{
  size_t i, j;
  for (i = 0; i < ROWS; i++) {
    double *r = J + i * P;
    for (j = 0; j < P; j++)
      r[j] = twf_test_uniform(rng, -1.0, 1.0) * (j == 3 ? 1e-3 : 1.0);
    r[5] = r[0] + 2.0 * r[1];
    r[7] = 0.3 * r[2] - 1.7 * r[4];
  }
}

/* The Givens factor R (when not NULL) and the normal matrix A of J. */
static void factor_and_normal(const double *J, double *R, double *A)
{
  double row[P];
  size_t i, a, b;
  if (R != NULL)
    memset(R, 0, P * P * sizeof *R);
  memset(A, 0, P * P * sizeof *A);
  for (i = 0; i < ROWS; i++) {
    if (R != NULL) {
      memcpy(row, J + i * P, sizeof row);
      twf_ident_qr_add_row(R, P, row);
    }
    for (a = 0; a < P; a++)
      for (b = 0; b < P; b++)
        A[a * P + b] += J[i * P + a] * J[i * P + b];
  }
}

START_TEST(test_walk_fixes_dependent_columns)
{
  double J[ROWS * P], R[P * P], A[P * P], rel[P];
  unsigned char keep[P];
  size_t order[P] = { 0, 1, 2, 3, 4, 5, 6, 7 }, a;
  size_t order_rev[P] = { 7, 6, 5, 4, 3, 2, 1, 0 };
  twf_test_rng rng;
  twf_test_rng_init(&rng, twf_test_seed(2385));
  build(J, &rng);
  factor_and_normal(J, R, A);
  /* R^T R reproduces the normal matrix */
  {
    double N[P * P];
    twf_ident_normal_from_r(R, P, NULL, N);
    for (a = 0; a < P * P; a++)
      ck_assert_close(N[a], A[a], 1e-12);
  }
  ck_assert_int_eq(twf_ident_walk_r(R, P, NULL, order, P, 1e-6, keep, rel), 0);
  for (a = 0; a < P; a++)
    ck_assert_msg(keep[a] == (a != 5 && a != 7), "column %zu kept %d (rel %.3g)", a, keep[a], rel[a]);
  ck_assert_msg(rel[5] < 1e-12 && rel[7] < 1e-12, "dependent parts %.3g %.3g", rel[5], rel[7]);
  ck_assert(rel[3] > 1e-2);
  /* reversed order: the later of each dependent set goes instead */
  ck_assert_int_eq(twf_ident_walk_r(R, P, NULL, order_rev, P, 1e-6, keep, rel), 0);
  ck_assert(!keep[0] && !keep[2] && keep[5] && keep[7]);
  /* the normal-matrix walk sees the same structure, with far less margin */
  ck_assert_int_eq(twf_ident_walk(A, P, order, P, 1e-6, keep, rel), 0);
  ck_assert(!keep[5] && !keep[7] && keep[3]);
}
END_TEST

/* The margin, over many draws. On the normal matrix the squared length of
 * an exactly dependent column's free part is A_jj - z.z, a difference of
 * two numbers of size A_jj: its rounding error is of size eps A_jj and of
 * either sign, so the walk reports either 0 (a negative square clamped) or
 * about sqrt(eps) = 1e-8, never the rounding level the factor R reaches.
 * One draw shows a positive value only with probability about 3/4 (both
 * of its columns come out negative about a quarter of the time), so the
 * claim is checked over 32 draws: every positive value is above 1e-10
 * (the smallest in 8,000 columns of 4,000 draws was 9e-9), at least 8 of
 * the 64 are positive (about half are; fewer than 8 has a probability
 * below 1e-10 for independent signs), and R stays below 1e-12 on every
 * draw (at most 4e-15 over those draws). */
START_TEST(test_walk_margin_over_draws)
{
  enum { DRAWS = 32 };
  static double J[ROWS * P];
  double R[P * P], A[P * P], rel[P];
  unsigned char keep[P];
  size_t order[P] = { 0, 1, 2, 3, 4, 5, 6, 7 }, i, positive = 0;
  int d;
  twf_test_rng rng;
  twf_test_rng_init(&rng, twf_test_seed(2386));
  for (d = 0; d < DRAWS; d++) {
    static const size_t dep[2] = { 5, 7 };
    build(J, &rng);
    factor_and_normal(J, R, A);
    ck_assert_int_eq(twf_ident_walk_r(R, P, NULL, order, P, 1e-6, keep, rel), 0);
    ck_assert_msg(rel[5] < 1e-12 && rel[7] < 1e-12, "draw %d: dependent parts on R %.3g %.3g", d, rel[5],
                  rel[7]);
    ck_assert_int_eq(twf_ident_walk(A, P, order, P, 1e-6, keep, rel), 0);
    for (i = 0; i < 2; i++) {
      ck_assert_msg(!keep[dep[i]], "draw %d: dependent column %zu kept", d, dep[i]);
      ck_assert_msg(rel[dep[i]] == 0.0 || rel[dep[i]] > 1e-10,
                    "draw %d: the normal-matrix walk reached %.3g on column %zu: the claim in "
                    "DEVELOPERS.md no longer holds", d, rel[dep[i]], dep[i]);
      positive += rel[dep[i]] > 0.0;
    }
  }
  ck_assert_msg(positive >= 8, "only %zu of %d dependent columns came out positive on the normal matrix",
                positive, 2 * DRAWS);
}
END_TEST

START_TEST(test_explain_and_inverse)
{
  double J[ROWS * P], A[P * P], cov[P * P], coef[3];
  unsigned char keep[P] = { 1, 1, 1, 1, 1, 0, 1, 0 };
  size_t idx[3], a, b, n;
  twf_test_rng rng;
  twf_test_rng_init(&rng, 77);
  build(J, &rng);
  factor_and_normal(J, NULL, A);
  /* column 5 = c0 + 2 c1: the explanation finds exactly that */
  n = twf_ident_explain(A, P, keep, 5, 3, idx, coef);
  ck_assert_uint_eq(n, 2);
  ck_assert_uint_eq(idx[0], 1);
  ck_assert_close(coef[0], 2.0, 1e-9);
  ck_assert_uint_eq(idx[1], 0);
  ck_assert_close(coef[1], 1.0, 1e-9);
  /* the inverse of the kept block times the block is the identity */
  ck_assert_int_eq(twf_ident_inverse(A, P, keep, cov), 0);
  for (a = 0; a < P; a++)
    for (b = 0; b < P; b++) {
      double s = 0.0;
      size_t k;
      if (!keep[a] || !keep[b])
        continue;
      for (k = 0; k < P; k++)
        if (keep[k])
          s += cov[a * P + k] * A[k * P + b];
      ck_assert_close(s, a == b ? 1.0 : 0.0, 1e-9);
    }
}
END_TEST

/* Ties: column 7 = c0 - c1 + c2 - c3 + c4 + c6 exactly (all six
 * coefficients +-1, products exact in binary). Only the rounding of the
 * solve separates them, so the three listed must be the lowest indices, in
 * index order, on every draw. */
START_TEST(test_explain_ties_by_index)
{
  static double J[ROWS * P];
  double A[P * P], coef[3];
  unsigned char keep[P] = { 1, 1, 1, 1, 1, 0, 1, 0 };
  size_t idx[3], i, a, n;
  int d;
  twf_test_rng rng;
  twf_test_rng_init(&rng, twf_test_seed(78));
  for (d = 0; d < 16; d++) {
    for (i = 0; i < ROWS; i++) {
      double *r = J + i * P;
      for (a = 0; a < P; a++)
        r[a] = twf_test_uniform(&rng, -1.0, 1.0);
      r[5] = 0.0;
      r[7] = r[0] - r[1] + r[2] - r[3] + r[4] + r[6];
    }
    factor_and_normal(J, NULL, A);
    n = twf_ident_explain(A, P, keep, 7, 3, idx, coef);
    ck_assert_uint_eq(n, 3);
    for (i = 0; i < 3; i++) {
      ck_assert_msg(idx[i] == i, "draw %d: place %zu lists column %zu (%.17g), not %zu", d, i, idx[i], coef[i], i);
      ck_assert_close(coef[i], i == 1 ? -1.0 : 1.0, 1e-9);
    }
  }
}
END_TEST

int main(void)
{
  Suite *s = suite_create("ident");
  TCase *tc = tcase_create("walk");
  tcase_add_test(tc, test_walk_fixes_dependent_columns);
  tcase_add_test(tc, test_walk_margin_over_draws);
  tcase_add_test(tc, test_explain_and_inverse);
  tcase_add_test(tc, test_explain_ties_by_index);
  suite_add_tcase(s, tc);
  return twf_test_run(s);
}
