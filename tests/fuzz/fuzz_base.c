/* fuzz_base.c: the base pose file reader (twf_base_read). An accepted pose
 * is a rigid motion, and writing it and reading it back gives it again. */
#include "fuzz.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static void check_pose(const twf_pose *T)
{
  for (int i = 0; i < 3; i++) {
    FUZZ_CHECK(isfinite(T->p[i]));
    for (int j = 0; j < 3; j++) {
      double d = 0;
      for (int k = 0; k < 3; k++)
        d += T->R[i][k] * T->R[j][k];
      FUZZ_CHECK(isfinite(T->R[i][j]) && fabs(d - (i == j)) < 1e-9);
    }
  }
}

static void round_trip(const twf_pose *T)
{
  char *buf = NULL;
  size_t len = 0;
  FILE *out = open_memstream(&buf, &len);
  twf_error err;
  twf_pose back;
  const char *path;
  twf_status st;
  if (out == NULL)
    return;
  twf_error_clear(&err);
  st = twf_base_write(T, TWF_LENGTH_MM, "fuzz", out, &err);
  fclose(out);
  if (st != TWF_OK) {
    free(buf);
    FUZZ_CHECK(!"a base pose that was read cannot be written");
  }
  path = twf_fuzz_file(1, (const uint8_t *)buf, len);
  free(buf);
  if (path == NULL)
    return;
  st = twf_base_read(path, &back, &err);
  FUZZ_CHECK(st == TWF_OK);
  for (int i = 0; i < 3; i++) {
    FUZZ_CHECK(fabs(back.p[i] - T->p[i]) <= 1e-12 * (1 + fabs(T->p[i])));
    for (int j = 0; j < 3; j++)
      FUZZ_CHECK(fabs(back.R[i][j] - T->R[i][j]) < 1e-12);
  }
}

void twf_fuzz_base(const uint8_t *data, size_t size)
{
  const char *path = twf_fuzz_file(0, data, size);
  twf_pose T;
  twf_error err;
  twf_status st;
  unsigned long before = twf_fuzz_failures;
  if (path == NULL)
    return;
  twf_error_clear(&err);
  st = twf_base_read(path, &T, &err);
  if (st != TWF_OK) {
    FUZZ_CHECK(err.status == st);
    twf_fuzz_check_error(&err, 0);
    return;
  }
  twf_fuzz_check_no_nul(data, size);
  check_pose(&T);
  if (twf_fuzz_tolerated("write-overflow") &&
      (fabs(T.p[0]) > 1e300 || fabs(T.p[1]) > 1e300 || fabs(T.p[2]) > 1e300))
    return;
  if (twf_fuzz_failures == before)
    round_trip(&T);
}

#ifdef TWF_FUZZER
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
  twf_fuzz_base(data, size);
  return 0;
}
#endif
