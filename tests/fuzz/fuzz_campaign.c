/* fuzz_campaign.c: the one-file campaign reader (twf_campaign_read), with
 * the default options and with caller units and limits as errors, against a
 * 6-axis arm and a 4-axis arm with a prismatic joint. What it accepts must
 * pass the campaign checks and read back the same after a write. */
#include "fuzz.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static int close_to(double a, double b)
{
  return fabs(a - b) <= 1e-12 * (fabs(a) + fabs(b)) + 1e-300;
}

static void same_campaign(const twf_campaign *a, const twf_campaign *b)
{
  FUZZ_CHECK(a->n_poses == b->n_poses && a->n_meas == b->n_meas);
  for (size_t p = 0; p < a->n_poses; p++) {
    FUZZ_CHECK(strcmp(a->pose_ids[p], b->pose_ids[p]) == 0);
    for (size_t j = 0; j < a->n_joints; j++)
      FUZZ_CHECK(close_to(a->q[p * a->n_joints + j], b->q[p * b->n_joints + j]));
  }
  /* the writer groups rows by pose: compare each pose's rows in order */
  for (size_t p = 0; p < a->n_poses; p++) {
    size_t i = 0, k = 0;
    for (;;) {
      while (i < a->n_meas && a->meas[i].pose != p)
        i++;
      while (k < b->n_meas && b->meas[k].pose != p)
        k++;
      if (i == a->n_meas || k == b->n_meas) {
        FUZZ_CHECK(i == a->n_meas && k == b->n_meas);
        break;
      }
      {
        const twf_measurement *x = &a->meas[i], *y = &b->meas[k];
        FUZZ_CHECK(x->target == y->target && x->set == y->set &&
                   x->has_orientation == y->has_orientation);
        for (int c = 0; c < 3; c++)
          FUZZ_CHECK(close_to(x->pos[c], y->pos[c]));
        for (int c = 0; c < 4; c++)
          FUZZ_CHECK(close_to(twf_campaign_meas_quat(a, i)[c], twf_campaign_meas_quat(b, k)[c]));
        FUZZ_CHECK(close_to(x->sigma, y->sigma));
      }
      i++;
      k++;
    }
  }
}

static void round_trip(const twf_campaign *c, const twf_model *m)
{
  char *buf = NULL;
  size_t len = 0;
  FILE *out = open_memstream(&buf, &len);
  twf_error err;
  twf_campaign *back;
  const char *path;
  twf_status st;
  if (out == NULL)
    return;
  twf_error_clear(&err);
  st = twf_campaign_write(c, m, TWF_LENGTH_M, TWF_ANGLE_RAD, out, &err);
  fclose(out);
  if (st != TWF_OK) {
    free(buf);
    FUZZ_CHECK(!"a campaign that was read cannot be written");
  }
  path = twf_fuzz_file(1, (const uint8_t *)buf, len);
  if (path == NULL) {
    free(buf);
    return;
  }
  back = twf_campaign_read(path, m, NULL, NULL, &err);
  if (back == NULL) {
    fprintf(stderr, "reading the written campaign: line %ld: %s\n", err.line,
            err.message);
    free(buf);
    FUZZ_CHECK(!"a written campaign cannot be read back");
  }
  free(buf);
  same_campaign(c, back);
  twf_campaign_free(back);
}

static void read_one(const uint8_t *data, size_t size, const char *path,
                     const twf_model *m, const twf_campaign_options *opt,
                     int write_back)
{
  twf_warnings w;
  twf_error err;
  twf_campaign *c;
  unsigned long before = twf_fuzz_failures;
  twf_warnings_init(&w);
  twf_error_clear(&err);
  c = twf_campaign_read(path, m, opt, &w, &err);
  if (c == NULL) {
    twf_warnings_clear(&w);
    twf_fuzz_check_error(&err, 1);
    return;
  }
  twf_warnings_clear(&w);
  twf_fuzz_check_no_nul(data, size);
  twf_fuzz_check_campaign(c, m, 1);
  if (write_back && twf_fuzz_failures == before)
    round_trip(c, m);
  twf_campaign_free(c);
}

void twf_fuzz_campaign(const uint8_t *data, size_t size)
{
  const char *path = twf_fuzz_file(0, data, size);
  twf_campaign_options strict = twf_campaign_default_options();
  if (path == NULL)
    return;
  read_one(data, size, path, twf_fuzz_arm(0), NULL, 1);
  strict.length_from_caller = 1;
  strict.length_unit = TWF_LENGTH_IN;
  strict.angle_from_caller = 1;
  strict.angle_unit = TWF_ANGLE_MRAD;
  strict.limits_are_errors = 1;
  read_one(data, size, path, twf_fuzz_arm(0), &strict, 0);
  read_one(data, size, path, twf_fuzz_arm(1), NULL, 1);
}

#ifdef TWF_FUZZER
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
  twf_fuzz_campaign(data, size);
  return 0;
}
#endif
