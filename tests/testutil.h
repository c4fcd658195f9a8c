/* testutil.h: helpers shared by the Check programs. */
#ifndef TWF_TESTUTIL_H
#define TWF_TESTUTIL_H

#include <check.h>
#include <stdint.h>

/* |a - b| <= tol * max(1, |a|, |b|); NaN and infinity compare unequal
 * unless both are the same infinity. Check's own double assertions are
 * absolute. */
int twf_test_close(double a, double b, double tol);
#define ck_assert_close(a, b, tol)                                            \
  do {                                                                        \
    double ck_a_ = (a), ck_b_ = (b);                                          \
    ck_assert_msg(twf_test_close(ck_a_, ck_b_, (tol)),                        \
                  "%s = %.17g differs from %s = %.17g beyond %g", #a, ck_a_,  \
                  #b, ck_b_, (double)(tol));                                  \
  } while (0)

/* Seeded random numbers (xorshift64*). Every random stream of a test starts
 * from twf_test_seed(its own fixed default): that default itself when
 * TWF_TEST_SEED is unset, so that a plain run repeats the committed streams;
 * else a hash of the default and TWF_TEST_SEED, so that setting it gives
 * every stream a new seed of its own (for one TWF_TEST_SEED, distinct
 * defaults give distinct seeds). Never 0. twf_test_run prints
 * the TWF_TEST_SEED in force when a test fails: set it again to repeat. */
typedef struct twf_test_rng { uint64_t state; } twf_test_rng;
uint64_t twf_test_seed(uint64_t fallback);
void twf_test_rng_init(twf_test_rng *rng, uint64_t seed);
double twf_test_uniform(twf_test_rng *rng, double lo, double hi);
double twf_test_gauss(twf_test_rng *rng);

/* Absolute path of a file in the source tree (TWF_SRCDIR or "."), in a
 * static buffer valid until the next call. */
const char *twf_test_srcpath(const char *relative);

/* Run a suite; returns the process exit status (0 when all passed). */
int twf_test_run(Suite *s);

/* A private temporary folder for the files of a test (made with the
 * prefix in its name under /tmp), the path of a file in it, and its
 * removal with every file in it. One folder at a time per process: Check
 * runs each test in a child of its own. */
void twf_test_tmpdir_make(const char *prefix);
const char *twf_test_tmppath(const char *name); /* two results stay valid at a time */
void twf_test_tmpdir_remove(void);
/* Write text to path (binary); read a whole file into a NUL-terminated
 * buffer the caller frees. Both fail the test on an error. */
void twf_test_write_file(const char *path, const char *text);
char *twf_test_slurp(const char *path);

#endif
