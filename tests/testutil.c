/* testutil.c: helpers shared by the Check programs. */
#include "testutil.h"

#include <gsl/gsl_errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>

int twf_test_close(double a, double b, double tol)
{
  double scale;
  if (isnan(a) || isnan(b))
    return 0;
  if (isinf(a) || isinf(b))
    return a == b;
  scale = fmax(1.0, fmax(fabs(a), fabs(b)));
  return fabs(a - b) <= tol * scale;
}

uint64_t twf_test_seed(uint64_t fallback)
{
  const char *s = getenv("TWF_TEST_SEED");
  if (s != NULL && *s != '\0')
    return strtoull(s, NULL, 0);
  return fallback;
}

void twf_test_rng_init(twf_test_rng *rng, uint64_t seed)
{
  rng->state = seed ? seed : 0x9e3779b97f4a7c15ULL;
}

static uint64_t next_u64(twf_test_rng *rng)
{
  uint64_t x = rng->state;
  x ^= x >> 12;
  x ^= x << 25;
  x ^= x >> 27;
  rng->state = x;
  return x * 0x2545F4914F6CDD1DULL;
}

double twf_test_uniform(twf_test_rng *rng, double lo, double hi)
{
  double u = (double)(next_u64(rng) >> 11) / 9007199254740992.0;
  return lo + (hi - lo) * u;
}

double twf_test_gauss(twf_test_rng *rng)
{
  /* Box-Muller */
  double u1 = twf_test_uniform(rng, 1e-300, 1.0);
  double u2 = twf_test_uniform(rng, 0.0, 1.0);
  return sqrt(-2.0 * log(u1)) * cos(2.0 * 3.14159265358979323846 * u2);
}

const char *twf_test_srcpath(const char *relative)
{
  static char buf[4096];
  const char *top = getenv("TWF_SRCDIR");
  snprintf(buf, sizeof buf, "%s/%s", top && *top ? top : ".", relative);
  return buf;
}

int twf_test_run(Suite *s)
{
  SRunner *sr = srunner_create(s);
  int failed;
  gsl_set_error_handler_off();
  srunner_run_all(sr, CK_NORMAL);
  failed = srunner_ntests_failed(sr);
  srunner_free(sr);
  return failed == 0 ? 0 : 1;
}
