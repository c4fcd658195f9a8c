/* fuzz_model.c: the model file reader (twf_model_read). What it accepts
 * must pass the model checks, and must survive a write and a second read
 * unchanged: calibrate writes as-built models that later runs read. */
#include "fuzz.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static int close_to(double a, double b)
{
  return fabs(a - b) <= 1e-9 * (fabs(a) + fabs(b)) + 1e-12;
}

/* Names equal; when control characters are tolerated (fuzz.h), a name
 * with one is not compared, since the writer turns them into spaces and
 * the reader then trims those at the ends. */
static int same_name(const char *a, const char *b)
{
  if (strcmp(a, b) == 0)
    return 1;
  if (twf_fuzz_tolerated("name-comment") && strpbrk(a, ";#") != NULL)
    return 1;
  if (!twf_fuzz_tolerated("control-chars"))
    return 0;
  for (; *a != '\0'; a++)
    if ((unsigned char)*a < 0x20 || *a == 0x7f)
      return 1;
  return 0;
}

static void same_model(const twf_model *a, const twf_model *b)
{
  FUZZ_CHECK(a->n_joints == b->n_joints && a->n_targets == b->n_targets);
  FUZZ_CHECK(a->length_unit == b->length_unit && a->angle_unit == b->angle_unit);
  FUZZ_CHECK(same_name(a->name, b->name));
  for (size_t i = 0; i < a->n_joints; i++) {
    const twf_joint *x = &a->joints[i], *y = &b->joints[i];
    FUZZ_CHECK(strcmp(x->name, y->name) == 0 && x->type == y->type);
    for (int k = 0; k < 6; k++)
      FUZZ_CHECK(close_to(x->twist[k], y->twist[k]));
    FUZZ_CHECK(close_to(x->scale, y->scale) && close_to(x->offset, y->offset));
    FUZZ_CHECK(x->has_limits == y->has_limits);
    if (x->has_limits)
      FUZZ_CHECK(close_to(x->limit_lo, y->limit_lo) && close_to(x->limit_hi, y->limit_hi));
  }
  for (int r = 0; r < 3; r++) {
    FUZZ_CHECK(close_to(a->home.p[r], b->home.p[r]));
    for (int k = 0; k < 3; k++)
      FUZZ_CHECK(close_to(a->home.R[r][k], b->home.R[r][k]));
  }
  for (size_t i = 0; i < a->n_targets; i++) {
    const twf_target *x = &a->targets[i], *y = &b->targets[i];
    FUZZ_CHECK(strcmp(x->name, y->name) == 0 && x->offset_known == y->offset_known);
    if (x->offset_known)
      for (int k = 0; k < 3; k++)
        FUZZ_CHECK(close_to(x->offset[k], y->offset[k]));
  }
}

static int finite_model(const twf_model *m)
{
  for (size_t i = 0; i < m->n_joints; i++)
    for (int k = 0; k < 6; k++)
      if (!isfinite(m->joints[i].twist[k]) || (k < 3 && !isfinite(m->joints[i].point[k])))
        return 0;
  for (int r = 0; r < 3; r++)
    if (!isfinite(m->home.p[r]) || !isfinite(m->home.R[r][0]) ||
        !isfinite(m->home.R[r][1]) || !isfinite(m->home.R[r][2]))
      return 0;
  return 1;
}

/* Largest length of m in metres: joint points, home, target offsets. */
static double largest_length(const twf_model *m)
{
  double big = 0;
  for (size_t i = 0; i < m->n_joints; i++)
    for (int k = 0; k < 3; k++)
      big = fmax(big, fabs(m->joints[i].point[k]));
  for (int k = 0; k < 3; k++)
    big = fmax(big, fabs(m->home.p[k]));
  for (size_t i = 0; i < m->n_targets; i++)
    for (int k = 0; k < 3; k++)
      big = fmax(big, fabs(m->targets[i].offset[k]));
  return big;
}

static void round_trip(const twf_model *m)
{
  char *buf = NULL;
  size_t len = 0;
  FILE *out = open_memstream(&buf, &len);
  twf_error err;
  twf_model *back;
  const char *path;
  twf_status st;
  if (out == NULL)
    return;
  twf_error_clear(&err);
  st = twf_model_write(m, out, &err);
  fclose(out);
  if (st != TWF_OK) {
    free(buf);
    fprintf(stderr, "twf_model_write: %s\n", err.message);
    FUZZ_CHECK(!"a model that was read cannot be written");
  }
  path = twf_fuzz_file(1, (const uint8_t *)buf, len);
  if (path == NULL) {
    free(buf);
    return;
  }
  back = twf_model_read(path, NULL, &err);
  if (back == NULL) {
    fprintf(stderr, "reading the written model: line %ld: %s\n--- written:\n%s",
            err.line, err.message, buf);
    free(buf);
    FUZZ_CHECK(!"a written model cannot be read back");
  }
  free(buf);
  same_model(m, back);
  twf_model_free(back);
}

void twf_fuzz_model(const uint8_t *data, size_t size)
{
  const char *path = twf_fuzz_file(0, data, size);
  twf_warnings w;
  twf_error err;
  twf_model *m;
  unsigned long before = twf_fuzz_failures;
  if (path == NULL)
    return;
  twf_warnings_init(&w);
  twf_error_clear(&err);
  m = twf_model_read(path, &w, &err);
  if (m == NULL) {
    twf_fuzz_check_error(&err, 0);
  } else {
    FUZZ_CHECK(err.status == TWF_OK);
    twf_fuzz_check_no_nul(data, size);
    if (twf_fuzz_tolerated("nonfinite-model") && !finite_model(m)) {
      twf_model_free(m);
      twf_warnings_clear(&w);
      return;
    }
    twf_fuzz_check_model(m);
    if (twf_fuzz_failures == before &&
        !(twf_fuzz_tolerated("write-overflow") && largest_length(m) > 1e6))
      round_trip(m);
    twf_model_free(m);
  }
  twf_warnings_clear(&w);
}

#ifdef TWF_FUZZER
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
  twf_fuzz_model(data, size);
  return 0;
}
#endif
