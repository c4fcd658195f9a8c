/* check_speed_select.c: selection gives what sorting gives. The median,
 * every order statistic and the type-7 quantile of random data with many
 * ties, all-equal data, sorted and reversed data and small sizes, against
 * qsort and twf_accuracy_percentile (the reference is a plain sort). */
#include "testutil.h"
#include "twistfit.h"
#include "calib/select.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

static int cmp_double(const void *pa, const void *pb)
{
  double a = *(const double *)pa, b = *(const double *)pb;
  return (a > b) - (a < b);
}

/* Fill v with a pattern: 0 uniform, 1 few distinct values (ties), 2 all
 * equal, 3 ascending, 4 descending, 5 organ pipe (a quickselect trap). */
static void fill(double *v, size_t n, int kind, twf_test_rng *rng)
{
  size_t i;
  for (i = 0; i < n; i++) {
    switch (kind) {
    case 0: v[i] = twf_test_gauss(rng); break;
    case 1: v[i] = floor(twf_test_uniform(rng, 0.0, 5.0)) - 2.0; break;
    case 2: v[i] = 3.25; break;
    case 3: v[i] = (double)i; break;
    case 4: v[i] = -(double)i; break;
    default: v[i] = (double)(i < n / 2 ? i : n - i); break;
    }
  }
}

START_TEST(test_select_equals_sort)
{
  static const size_t sizes[] = { 1, 2, 3, 4, 5, 7, 16, 17, 31, 100, 101, 1000, 4097 };
  twf_test_rng rng;
  size_t s, n, k;
  int kind;
  twf_test_rng_init(&rng, twf_test_seed(9283));
  for (s = 0; s < sizeof sizes / sizeof sizes[0]; s++)
    for (kind = 0; kind < 6; kind++) {
      double *v, *sorted, *w, med_ref, q, qref;
      n = sizes[s];
      v = malloc(n * sizeof *v);
      sorted = malloc(n * sizeof *sorted);
      w = malloc(n * sizeof *w);
      ck_assert(v && sorted && w);
      fill(v, n, kind, &rng);
      memcpy(sorted, v, n * sizeof *v);
      qsort(sorted, n, sizeof *sorted, cmp_double);
      /* a few order statistics (all of them for small n) */
      for (k = 0; k < n; k += n < 40 ? 1 : n / 13 + 1) {
        memcpy(w, v, n * sizeof *v);
        ck_assert_msg(twf_select_kth(w, n, k) == sorted[k], "n %zu kind %d k %zu", n, kind, k);
        /* the partial order promised */
        {
          size_t i;
          for (i = 0; i < n; i++)
            ck_assert(i < k ? w[i] <= sorted[k] : i > k ? w[i] >= sorted[k] : w[i] == sorted[k]);
        }
      }
      memcpy(w, v, n * sizeof *v);
      med_ref = n % 2 ? sorted[n / 2] : 0.5 * (sorted[n / 2 - 1] + sorted[n / 2]);
      ck_assert_msg(twf_select_median(w, n) == med_ref, "median n %zu kind %d", n, kind);
      for (q = 0.0; q <= 1.0; q += 0.05) {
        memcpy(w, v, n * sizeof *v);
        qref = twf_accuracy_percentile(sorted, n, q);
        ck_assert_msg(twf_select_quantile(w, n, q) == qref, "quantile %g n %zu kind %d", q, n, kind);
      }
      memcpy(w, v, n * sizeof *v);
      ck_assert(twf_select_quantile(w, n, 0.95) == twf_accuracy_percentile(sorted, n, 0.95));
      free(v);
      free(sorted);
      free(w);
    }
}
END_TEST

START_TEST(test_select_edges)
{
  double v[3] = { 2.0, 1.0, 3.0 };
  ck_assert(twf_select_median(v, 0) == 0.0);
  ck_assert(isnan(twf_select_quantile(v, 0, 0.5)));
  ck_assert(isnan(twf_select_quantile(v, 3, 1.5)));
  ck_assert(twf_select_quantile(v, 3, 1.0) == 3.0);
  ck_assert(twf_select_quantile(v, 3, 0.0) == 1.0);
}
END_TEST

int main(void)
{
  Suite *s = suite_create("select");
  TCase *tc = tcase_create("select");
  tcase_add_test(tc, test_select_equals_sort);
  tcase_add_test(tc, test_select_edges);
  suite_add_tcase(s, tc);
  return twf_test_run(s);
}
