/* check_testutil.c: the seed rule of tests/testutil.c, on which every
 * random test relies: TWF_TEST_SEED unset gives each stream its committed
 * default; set, it gives every stream a new seed of its own. */
#include "testutil.h"

#include <stdlib.h>

#define N_DEFAULTS 10
static const uint64_t defaults[N_DEFAULTS] = { 5, 6, 11, 12, 2385, 9283, 0x5e3a11ceULL,
                                               0x5e3a11ceULL + 1, 0x6d0de1ULL, 0 };

START_TEST(test_unset_keeps_defaults)
{
  size_t i;
  ck_assert_int_eq(unsetenv("TWF_TEST_SEED"), 0);
  for (i = 0; i < N_DEFAULTS; i++)
    ck_assert_uint_eq(twf_test_seed(defaults[i]), defaults[i]);
  /* an empty value counts as unset (a make variable left blank) */
  ck_assert_int_eq(setenv("TWF_TEST_SEED", "", 1), 0);
  ck_assert_uint_eq(twf_test_seed(2385), 2385);
  unsetenv("TWF_TEST_SEED");
}
END_TEST

START_TEST(test_set_gives_each_stream_its_own_seed)
{
  uint64_t a[N_DEFAULTS], b[N_DEFAULTS];
  size_t i, j;
  ck_assert_int_eq(setenv("TWF_TEST_SEED", "1", 1), 0);
  for (i = 0; i < N_DEFAULTS; i++)
    a[i] = twf_test_seed(defaults[i]);
  ck_assert_int_eq(setenv("TWF_TEST_SEED", "0x2", 1), 0);
  for (i = 0; i < N_DEFAULTS; i++)
    b[i] = twf_test_seed(defaults[i]);
  for (i = 0; i < N_DEFAULTS; i++) {
    ck_assert_uint_ne(a[i], 0);
    ck_assert_uint_ne(a[i], defaults[i]);
    ck_assert_msg(a[i] != b[i], "default %#llx: the same seed under two values",
                  (unsigned long long)defaults[i]);
    for (j = 0; j < N_DEFAULTS; j++) {
      ck_assert_msg(i == j || a[i] != a[j], "defaults %zu and %zu share a seed", i, j);
      /* no shift between neighbours: default d under 1 is not d + 1 under 2 */
      ck_assert(a[i] != b[j]);
    }
  }
  /* the same pair gives the same seed: a failure can be repeated */
  ck_assert_int_eq(setenv("TWF_TEST_SEED", "1", 1), 0);
  ck_assert_uint_eq(twf_test_seed(defaults[4]), a[4]);
  unsetenv("TWF_TEST_SEED");
}
END_TEST

int main(void)
{
  Suite *s = suite_create("testutil");
  TCase *tc = tcase_create("seed");
  tcase_add_test(tc, test_unset_keeps_defaults);
  tcase_add_test(tc, test_set_gives_each_stream_its_own_seed);
  suite_add_tcase(s, tc);
  return twf_test_run(s);
}
