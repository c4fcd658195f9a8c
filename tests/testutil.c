/* testutil.c: helpers shared by the Check programs. */
#include "testutil.h"

#include <gsl/gsl_errno.h>
#include <math.h>
#include <stdio.h>
#include <dirent.h>
#include <errno.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

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

/* The finalizer of splitmix64 (Steele, Lea and Flood, "Fast splittable
 * pseudorandom number generators", OOPSLA 2014): a bijection of 64-bit
 * words in which every input bit moves every output bit, so that nearby
 * defaults (SEED, SEED + 1) and nearby TWF_TEST_SEED values give unrelated
 * seeds. */
static uint64_t mix64(uint64_t z)
{
  z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
  z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
  return z ^ (z >> 31);
}

/* TWF_TEST_SEED as given (any strtoull base), or NULL when unset or empty. */
static const char *env_seed(void)
{
  const char *s = getenv("TWF_TEST_SEED");
  return s != NULL && *s != '\0' ? s : NULL;
}

uint64_t twf_test_seed(uint64_t fallback)
{
  const char *s = env_seed();
  uint64_t seed;
  if (s == NULL)
    return fallback;
  /* hash the pair, not the sum: default + value would make test A under
   * TWF_TEST_SEED=1 repeat test B (default A + 1) under 0 */
  seed = mix64(mix64((uint64_t)strtoull(s, NULL, 0) ^ 0x9e3779b97f4a7c15ULL) ^ fallback);
  return seed != 0 ? seed : 0x9e3779b97f4a7c15ULL;
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
  if (failed != 0) {
    const char *seed = env_seed();
    if (seed != NULL)
      fprintf(stderr, "random streams: TWF_TEST_SEED=%s (each test's seed a hash of it and the "
                      "test's default): set it again to repeat\n", seed);
    else
      fprintf(stderr, "random streams: the fixed defaults (TWF_TEST_SEED unset)\n");
  }
  return failed == 0 ? 0 : 1;
}

static char tmpdir[256];

void twf_test_tmpdir_make(const char *prefix)
{
  snprintf(tmpdir, sizeof tmpdir, "/tmp/%s.XXXXXX", prefix);
  ck_assert_ptr_nonnull(mkdtemp(tmpdir));
}

const char *twf_test_tmppath(const char *name)
{
  static char buf[2][512];
  static int k;
  k = !k;
  snprintf(buf[k], sizeof buf[k], "%s/%s", tmpdir, name);
  return buf[k];
}

void twf_test_tmpdir_remove(void)
{
  DIR *d = opendir(tmpdir);
  struct dirent *e;
  if (d == NULL)
    return;
  while ((e = readdir(d)) != NULL)
    if (strcmp(e->d_name, ".") && strcmp(e->d_name, ".."))
      remove(twf_test_tmppath(e->d_name));
  closedir(d);
  rmdir(tmpdir);
}

void twf_test_write_file(const char *path, const char *text)
{
  FILE *f = fopen(path, "wb");
  ck_assert_ptr_nonnull(f);
  fputs(text, f);
  ck_assert_int_eq(fclose(f), 0);
}

char *twf_test_slurp(const char *path)
{
  FILE *f = fopen(path, "rb");
  char *buf;
  long n;
  ck_assert_msg(f != NULL, "%s: %s", path, strerror(errno));
  fseek(f, 0, SEEK_END);
  n = ftell(f);
  ck_assert(n >= 0);
  rewind(f);
  buf = malloc((size_t)n + 1);
  ck_assert_ptr_nonnull(buf);
  ck_assert_uint_eq(fread(buf, 1, (size_t)n, f), (size_t)n);
  buf[n] = '\0';
  fclose(f);
  return buf;
}
