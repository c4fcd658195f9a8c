/* fuzz_urdf.c: the URDF reader (twf_model_read_urdf, libxml2 underneath).
 * What it accepts must pass the model checks; written back as URDF, both
 * on its own (twf_model_write_urdf) and into a copy of the very input
 * (twf_model_write_urdf_like), and read again, it must give the same
 * forward kinematics: export --as urdf [--like] promise exactly that. */
#define _GNU_SOURCE /* open_memstream */
#include "fuzz.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Configurations compared per round trip. */
#define URDF_FUZZ_CONFIGS 4

/* Largest length of m in metres (joint points, home); beyond 1e6 m the
 * written 17 digits no longer promise 1e-9 of the reach. */
static double largest_length(const twf_model *m)
{
  double big = 0;
  for (size_t i = 0; i < m->n_joints; i++)
    for (int k = 0; k < 3; k++)
      big = fmax(big, fabs(m->joints[i].point[k]));
  for (int k = 0; k < 3; k++)
    big = fmax(big, fabs(m->home.p[k]));
  return big;
}

/* A configuration of m, deterministic in c: within the limits where there
 * are any, clipped to +-2 (rad or m): limits of 1e16 rad are legal input,
 * but the sine of such an angle carries no digits, so two exact
 * descriptions of one arm need not agree there. */
static void config(const twf_model *m, int c, double *q)
{
  for (size_t i = 0; i < m->n_joints; i++) {
    double t = 0.5 + 0.45 * sin(1.7 * (double)(c + 1) + 2.3 * (double)i);
    const twf_joint *j = &m->joints[i];
    double lo = -2.0, hi = 2.0;
    if (j->has_limits && isfinite(j->limit_hi - j->limit_lo)) {
      lo = fmax(lo, fmin(j->limit_lo, 2.0));
      hi = fmin(hi, fmax(j->limit_hi, -2.0));
      if (hi < lo)
        hi = lo;
    }
    q[i] = lo + t * (hi - lo);
  }
}

/* a and b move the flange alike (to 1e-9 of the size, plus the size of the
 * joint values: a prismatic joint moves it by q). */
static void same_fk(const twf_model *a, const twf_model *b)
{
  double *q;
  double size = 1.0 + largest_length(a);
  FUZZ_CHECK(a->n_joints == b->n_joints);
  q = calloc(a->n_joints, sizeof *q);
  if (q == NULL)
    return;
  for (int c = 0; c < URDF_FUZZ_CONFIGS; c++) {
    twf_pose Ta, Tb;
    double dp = 0.0;
    config(a, c, q);
    twf_model_fk(a, q, NULL, &Ta);
    twf_model_fk(b, q, NULL, &Tb);
    for (int k = 0; k < 3; k++)
      dp = fmax(dp, fabs(Ta.p[k] - Tb.p[k]));
    if (!(dp <= 1e-9 * (size + 2.0 * (double)a->n_joints)) ||
        !(twf_rot_angle_between(Ta.R, Tb.R) <= 1e-9)) {
      free(q);
      fprintf(stderr, "configuration %d: position %.3g m, angle %.3g rad apart\n", c, dp,
              twf_rot_angle_between(Ta.R, Tb.R));
      FUZZ_CHECK(!"the written URDF moves the flange elsewhere");
    }
  }
  free(q);
}

/* Write m with the writer (like: NULL, or the input's path for the
 * copy-into writer), read it back, compare. */
static void round_trip(const twf_model *m, const char *like)
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
  st = like == NULL ? twf_model_write_urdf(m, NULL, out, &err)
                    : twf_model_write_urdf_like(m, like, NULL, out, &err);
  fclose(out);
  if (st != TWF_OK) {
    free(buf);
    /* a scale is the one thing URDF cannot hold; the reader never makes
     * one, so a refusal is a bug */
    fprintf(stderr, "%s: %s\n", like ? "twf_model_write_urdf_like" : "twf_model_write_urdf",
            err.message);
    FUZZ_CHECK(!"a URDF model that was read cannot be written as URDF");
  }
  path = twf_fuzz_file(1, (const uint8_t *)buf, len);
  if (path == NULL) {
    free(buf);
    return;
  }
  back = twf_model_read_urdf(path, NULL, NULL, &err);
  if (back == NULL) {
    fprintf(stderr, "reading the written URDF: line %ld: %s\n--- written:\n%s", err.line,
            err.message, buf);
    free(buf);
    FUZZ_CHECK(!"a written URDF cannot be read back");
  }
  free(buf);
  same_fk(m, back);
  twf_model_free(back);
}

void twf_fuzz_urdf(const uint8_t *data, size_t size)
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
  m = twf_model_read_urdf(path, NULL, &w, &err);
  if (m == NULL) {
    twf_fuzz_check_error(&err, 0);
  } else {
    FUZZ_CHECK(err.status == TWF_OK);
    twf_fuzz_check_model(m);
    if (twf_fuzz_failures == before && largest_length(m) <= 1e6) {
      round_trip(m, NULL);
      if (twf_fuzz_failures == before)
        round_trip(m, path);
    }
    twf_model_free(m);
  }
  twf_warnings_clear(&w);
}

#ifdef TWF_FUZZER
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
  twf_fuzz_urdf(data, size);
  return 0;
}
#endif
