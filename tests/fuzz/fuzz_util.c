/* fuzz_util.c: temporary files, the shared checks and the models of the
 * reader harnesses (fuzz.h). */
#define _GNU_SOURCE /* memfd_create */
#include "fuzz.h"
#include "arms.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mman.h>
#include <unistd.h>

unsigned long twf_fuzz_failures;

void twf_fuzz_fail(const char *file, int line, const char *what)
{
  fprintf(stderr, "%s:%d: check failed: %s\n", file, line, what);
  twf_fuzz_failures++;
#ifdef TWF_FUZZER
  abort();
#endif
}

/* ---------------------------------------------------------- files */

static int fds[2] = { -1, -1 };
static char paths[2][64];
static char tmp_paths[2][4096];

static void remove_tmp(void)
{
  for (int i = 0; i < 2; i++)
    if (tmp_paths[i][0] != '\0')
      unlink(tmp_paths[i]);
}

static int open_slot(int slot)
{
  int fd = -1;
#ifdef MFD_CLOEXEC
  /* A memory file: no disk traffic, nothing to clean up. The readers open
   * it again by its /proc name. */
  fd = memfd_create("twf-fuzz", MFD_CLOEXEC);
  if (fd >= 0) {
    snprintf(paths[slot], sizeof paths[slot], "/proc/self/fd/%d", fd);
    return fd;
  }
#endif
  {
    const char *dir = getenv("TMPDIR");
    if (dir == NULL || dir[0] == '\0')
      dir = "/tmp";
    snprintf(tmp_paths[slot], sizeof tmp_paths[slot], "%s/twf-fuzz-XXXXXX", dir);
    fd = mkstemp(tmp_paths[slot]);
    if (fd < 0) {
      tmp_paths[slot][0] = '\0';
      return -1;
    }
    if (tmp_paths[0][0] == '\0' || tmp_paths[1][0] == '\0')
      atexit(remove_tmp);
    snprintf(paths[slot], sizeof paths[slot], "%.63s", tmp_paths[slot]);
    if (strlen(tmp_paths[slot]) >= sizeof paths[slot]) {
      /* the readers must get the name in full */
      close(fd);
      unlink(tmp_paths[slot]);
      tmp_paths[slot][0] = '\0';
      return -1;
    }
  }
  return fd;
}

const char *twf_fuzz_file(int slot, const uint8_t *data, size_t size)
{
  size_t done = 0;
  if (slot < 0 || slot > 1)
    return NULL;
  if (fds[slot] < 0 && (fds[slot] = open_slot(slot)) < 0) {
    twf_fuzz_fail(__FILE__, __LINE__, "cannot make a temporary file");
    return NULL;
  }
  if (ftruncate(fds[slot], 0) != 0) {
    twf_fuzz_fail(__FILE__, __LINE__, "ftruncate of the temporary file");
    return NULL;
  }
  while (done < size) {
    ssize_t n = pwrite(fds[slot], data + done, size - done, (off_t)done);
    if (n < 0 && errno == EINTR)
      continue;
    if (n <= 0) {
      twf_fuzz_fail(__FILE__, __LINE__, "write of the temporary file");
      return NULL;
    }
    done += (size_t)n;
  }
  return paths[slot];
}

/* --------------------------------------------------------- checks */

void twf_fuzz_check_no_nul(const uint8_t *data, size_t size)
{
  if (!twf_fuzz_tolerated("nul-accepted"))
    FUZZ_CHECK(memchr(data, '\0', size) == NULL);
}

/* A text field of a report: terminated inside its array, and free of
 * control characters, since the command line prints it as one line to a
 * terminal (a quoted input byte must not move the cursor or end the line). */
static int clean_text(const char *s, size_t cap)
{
  const char *end = memchr(s, '\0', cap);
  if (end == NULL)
    return 0;
  for (; s < end; s++) {
    unsigned char c = (unsigned char)*s;
    if (c < 0x20 || c == 0x7f)
      return 0;
  }
  return 1;
}

/* Print a report field with its control characters escaped, so that the
 * log of a failed check shows what the reader put there. */
static void dump_text(const char *label, const char *s, size_t cap)
{
  fprintf(stderr, "  %s: \"", label);
  for (size_t i = 0; i < cap && s[i] != '\0'; i++) {
    unsigned char c = (unsigned char)s[i];
    if (c < 0x20 || c == 0x7f || c == '\\' || c == '"')
      fprintf(stderr, "\\x%02x", c);
    else
      fputc(c, stderr);
  }
  fprintf(stderr, "\"%s\n", memchr(s, '\0', cap) ? "" : " (not terminated)");
}

int twf_fuzz_tolerated(const char *check)
{
  const char *t = getenv("TWF_FUZZ_TOLERATE");
  size_t n = strlen(check);
  while (t != NULL && *t != '\0') {
    if (strncmp(t, check, n) == 0 && (t[n] == '\0' || t[n] == ','))
      return 1;
    t = strchr(t, ',');
    if (t != NULL)
      t++;
  }
  return 0;
}

void twf_fuzz_check_error(const twf_error *e, int need_hint)
{
  FUZZ_CHECK(e->status > TWF_OK && e->status <= TWF_ERR_LIMIT);
  FUZZ_CHECK(memchr(e->message, '\0', sizeof e->message) != NULL);
  FUZZ_CHECK(memchr(e->hint, '\0', sizeof e->hint) != NULL);
  FUZZ_CHECK(memchr(e->file, '\0', sizeof e->file) != NULL);
  FUZZ_CHECK(e->message[0] != '\0');
  FUZZ_CHECK(e->line >= 0 && e->column >= 0);
  if (need_hint && e->status != TWF_ERR_NOMEM)
    FUZZ_CHECK(e->hint[0] != '\0');
  if (!twf_fuzz_tolerated("control-chars") &&
      (!clean_text(e->message, sizeof e->message) ||
       !clean_text(e->hint, sizeof e->hint))) {
    fprintf(stderr, "error report, status %d, line %ld, column %ld:\n",
            (int)e->status, e->line, e->column);
    dump_text("message", e->message, sizeof e->message);
    dump_text("hint", e->hint, sizeof e->hint);
    FUZZ_CHECK(!"a control character in the error report");
  }
}

static int finite_n(const double *v, size_t n)
{
  for (size_t i = 0; i < n; i++)
    if (!isfinite(v[i]))
      return 0;
  return 1;
}

static int name_ok(const char *s, size_t cap)
{
  const char *end = memchr(s, '\0', cap);
  return end != NULL && end != s && clean_text(s, cap);
}

/* R is a rotation to about 1e-6, the readers' own tolerance. */
static int rotation_ok(const double R[3][3])
{
  double det;
  for (int i = 0; i < 3; i++)
    for (int j = 0; j < 3; j++) {
      double d = 0;
      if (!isfinite(R[i][j]))
        return 0;
      for (int k = 0; k < 3; k++)
        d += R[i][k] * R[j][k];
      if (fabs(d - (i == j)) > 1e-6)
        return 0;
    }
  det = R[0][0] * (R[1][1] * R[2][2] - R[1][2] * R[2][1])
      - R[0][1] * (R[1][0] * R[2][2] - R[1][2] * R[2][0])
      + R[0][2] * (R[1][0] * R[2][1] - R[1][1] * R[2][0]);
  return det > 0;
}

void twf_fuzz_check_model(const twf_model *m)
{
  FUZZ_CHECK(m->n_joints >= 1 && m->joints != NULL);
  FUZZ_CHECK(memchr(m->name, '\0', sizeof m->name) != NULL);
  /* the name is printed in reports and written on one line */
  if (!twf_fuzz_tolerated("control-chars"))
    FUZZ_CHECK(clean_text(m->name, sizeof m->name));
  for (size_t i = 0; i < m->n_joints; i++) {
    const twf_joint *j = &m->joints[i];
    FUZZ_CHECK(name_ok(j->name, sizeof j->name));
    FUZZ_CHECK(j->type == TWF_JOINT_REVOLUTE || j->type == TWF_JOINT_PRISMATIC);
    FUZZ_CHECK(finite_n(j->twist, 6) && finite_n(j->point, 3));
    FUZZ_CHECK(isfinite(j->scale) && j->scale != 0 && isfinite(j->offset));
    if (j->has_limits)
      FUZZ_CHECK(isfinite(j->limit_lo) && isfinite(j->limit_hi) &&
                 j->limit_lo <= j->limit_hi);
    {
      double w = sqrt(j->twist[0] * j->twist[0] + j->twist[1] * j->twist[1] +
                      j->twist[2] * j->twist[2]);
      double v = sqrt(j->twist[3] * j->twist[3] + j->twist[4] * j->twist[4] +
                      j->twist[5] * j->twist[5]);
      if (j->type == TWF_JOINT_REVOLUTE)
        FUZZ_CHECK(fabs(w - 1) < 1e-9);
      else
        FUZZ_CHECK(w == 0 && fabs(v - 1) < 1e-9);
    }
    for (size_t k = 0; k < i; k++)
      FUZZ_CHECK(strcmp(m->joints[k].name, j->name) != 0);
  }
  FUZZ_CHECK(rotation_ok(m->home.R) && finite_n(m->home.p, 3));
  FUZZ_CHECK(m->n_targets == 0 || m->targets != NULL);
  for (size_t i = 0; i < m->n_targets; i++) {
    const twf_target *t = &m->targets[i];
    FUZZ_CHECK(name_ok(t->name, sizeof t->name));
    if (t->offset_known)
      FUZZ_CHECK(finite_n(t->offset, 3));
    for (size_t k = 0; k < i; k++)
      FUZZ_CHECK(strcmp(m->targets[k].name, t->name) != 0);
  }
  for (size_t i = 0; i < m->n_meta; i++) {
    FUZZ_CHECK(name_ok(m->meta[i].key, sizeof m->meta[i].key));
    FUZZ_CHECK(m->meta[i].value != NULL);
    if (!twf_fuzz_tolerated("control-chars"))
      FUZZ_CHECK(clean_text(m->meta[i].value, strlen(m->meta[i].value) + 1));
  }
}

void twf_fuzz_check_campaign(const twf_campaign *c, const twf_model *m,
                             int need_meas)
{
  size_t *count;
  FUZZ_CHECK(c->n_joints == m->n_joints);
  FUZZ_CHECK(c->n_poses >= 1 && c->pose_ids != NULL && c->q != NULL);
  if (need_meas)
    FUZZ_CHECK(c->n_meas >= 1 && c->meas != NULL);
  else
    FUZZ_CHECK(c->n_meas == 0);
  for (size_t p = 0; p < c->n_poses; p++) {
    FUZZ_CHECK(name_ok(c->pose_ids[p], TWF_NAME_MAX));
    FUZZ_CHECK(finite_n(c->q + p * c->n_joints, c->n_joints));
    FUZZ_CHECK(c->pose_lines == NULL || c->pose_lines[p] >= 1);
  }
  /* ids unique: the sizes here are small, the quadratic scan will do */
  for (size_t p = 0; p < c->n_poses && c->n_poses < 2000; p++)
    for (size_t k = 0; k < p; k++)
      FUZZ_CHECK(strcmp(c->pose_ids[k], c->pose_ids[p]) != 0);
  count = calloc(c->n_poses, sizeof *count);
  if (count == NULL)
    return;
  for (size_t i = 0; i < c->n_meas; i++) {
    const twf_measurement *r = &c->meas[i];
    const double *rq = twf_campaign_meas_quat(c, i);
    int ok = r->pose < c->n_poses && r->target < m->n_targets &&
             finite_n(r->pos, 3) && finite_n(rq, 4) &&
             isfinite(r->sigma) && r->sigma >= 0 &&
             (r->set == TWF_SET_FIT || r->set == TWF_SET_CHECK) && r->line >= 1;
    if (ok && r->has_orientation) {
      double n = rq[0] * rq[0] + rq[1] * rq[1] + rq[2] * rq[2] + rq[3] * rq[3];
      ok = fabs(n - 1) < 1e-9 && c->has_orientation_any && r->quat_slot >= 1 &&
           r->quat_slot <= c->n_quat;
    } else if (ok) {
      ok = rq[0] == 1 && rq[1] == 0 && rq[2] == 0 && rq[3] == 0 && r->quat_slot == 0;
    }
    if (!ok) {
      free(count);
      FUZZ_CHECK(ok);
    }
    count[r->pose]++;
  }
  for (size_t p = 0; need_meas && p < c->n_poses; p++)
    if (count[p] == 0) {
      free(count);
      FUZZ_CHECK(!"a pose without a measurement");
    }
  free(count);
}

/* --------------------------------------------------------- models */

static twf_model *arms[2];

static void free_arms(void)
{
  for (int i = 0; i < 2; i++)
    twf_model_free(arms[i]);
}

const twf_model *twf_fuzz_arm(int which)
{
  if (arms[0] == NULL) {
    arms[0] = test_arm_model(ARM_TF6S);
    arms[1] = test_arm_model(ARM_TF4P);
    if (arms[0] == NULL || arms[1] == NULL) {
      fprintf(stderr, "cannot build the sample arms\n");
      abort();
    }
    atexit(free_arms);
  }
  return arms[which != 0];
}
