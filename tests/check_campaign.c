/* check_campaign.c: the campaign reader and writer (twistfit-data(5)).
 *
 * Expected values come from the test data themselves (the files of
 * tests/data and tests/bad-campaigns are invented, see their README) and
 * from unit definitions; no outside program is the reference: "common
 * practice, no source" for the CSV rules beyond libcsv's. */
#include "testutil.h"
#include "arms.h"
#include "twistfit.h"

#include <dirent.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/wait.h>
#include <unistd.h>

#define PI 3.14159265358979323846
#define DEG (PI / 180.0)

/* ------------------------------------------------------------------ */
/* Helpers                                                             */
/* ------------------------------------------------------------------ */

static const char *data(const char *name)
{
  static char buf[2][1024];
  static int k;
  k = !k;
  snprintf(buf[k], sizeof buf[k], "%s", twf_test_srcpath(name));
  return buf[k];
}

static twf_campaign *read_ok(const char *path, const twf_model *m,
                             const twf_campaign_options *opt, twf_warnings *w)
{
  twf_error err;
  twf_campaign *c = twf_campaign_read(path, m, opt, w, &err);
  ck_assert_msg(c != NULL, "%s:%ld:%ld: %s (%s)", err.file, err.line,
                err.column, err.message, err.hint);
  return c;
}

static twf_campaign *read_pair_ok(const char *jp, const char *pp,
                                  const twf_model *m,
                                  const twf_campaign_options *opt,
                                  twf_warnings *w)
{
  twf_error err;
  twf_campaign *c = twf_campaign_read_pair(jp, pp, m, opt, w, &err);
  ck_assert_msg(c != NULL, "%s:%ld:%ld: %s (%s)", err.file, err.line,
                err.column, err.message, err.hint);
  return c;
}

/* Same poses, joint values, measurements; lines too when lines != 0. */
static void assert_same(const twf_campaign *a, const twf_campaign *b,
                        double tol, int lines)
{
  size_t p, j, k;
  ck_assert_uint_eq(a->n_joints, b->n_joints);
  ck_assert_uint_eq(a->n_poses, b->n_poses);
  ck_assert_uint_eq(a->n_meas, b->n_meas);
  ck_assert_int_eq(a->has_orientation_any, b->has_orientation_any);
  for (p = 0; p < a->n_poses; p++) {
    ck_assert_str_eq(a->pose_ids[p], b->pose_ids[p]);
    for (j = 0; j < a->n_joints; j++)
      ck_assert_close(a->q[p * a->n_joints + j], b->q[p * b->n_joints + j], tol);
    if (lines)
      ck_assert_int_eq(a->pose_lines[p], b->pose_lines[p]);
  }
  for (k = 0; k < a->n_meas; k++) {
    const twf_measurement *x = &a->meas[k], *y = &b->meas[k];
    ck_assert_uint_eq(x->pose, y->pose);
    ck_assert_uint_eq(x->target, y->target);
    for (j = 0; j < 3; j++)
      ck_assert_close(x->pos[j], y->pos[j], tol);
    ck_assert_int_eq(x->has_orientation, y->has_orientation);
    for (j = 0; j < 4; j++)
      ck_assert_close(twf_campaign_meas_quat(a, k)[j], twf_campaign_meas_quat(b, k)[j], tol);
    ck_assert_close(x->sigma, y->sigma, tol);
    ck_assert_int_eq(x->set, y->set);
    if (lines)
      ck_assert_int_eq(x->line, y->line);
  }
}

static int warned(const twf_warnings *w, const char *fragment)
{
  size_t k;
  for (k = 0; k < w->count; k++)
    if (strstr(w->items[k].message, fragment) != NULL)
      return (int)k + 1;
  return 0;
}

static twf_model *tf6s(void)
{
  twf_model *m = test_arm_model(ARM_TF6S);
  ck_assert_ptr_nonnull(m);
  return m;
}

/* ------------------------------------------------------------------ */
/* The one-file form, values by hand from tests/data/campaign-one.csv  */
/* ------------------------------------------------------------------ */

START_TEST(test_one_file_values)
{
  twf_model *m = tf6s();
  twf_warnings w;
  twf_campaign *c;
  twf_warnings_init(&w);
  c = read_ok(data("tests/data/campaign-one.csv"), m, NULL, &w);
  ck_assert_uint_eq(w.count, 0);
  ck_assert_uint_eq(c->n_joints, 6);
  ck_assert_uint_eq(c->n_poses, 4);
  ck_assert_uint_eq(c->n_meas, 11);
  ck_assert_str_eq(c->pose_ids[0], "p01");
  ck_assert_str_eq(c->pose_ids[3], "p04");
  /* mm and deg to SI: unit definitions (1 mm = 1e-3 m, 1 deg = pi/180) */
  ck_assert_close(c->q[0 * 6 + 1], -33.25 * DEG, 1e-15);
  ck_assert_close(c->q[2 * 6 + 5], 211.125 * DEG, 1e-15);
  ck_assert_close(c->q[3 * 6 + 0], -133.3125 * DEG, 1e-15);
  ck_assert_close(c->meas[0].pos[0], 1.5032871, 1e-15);
  ck_assert_close(c->meas[10].pos[1], -1.0692258, 1e-15);
  ck_assert_close(c->meas[0].sigma, 0.025e-3, 1e-15);
  ck_assert_close(c->meas[9].sigma, 0.031e-3, 1e-15);
  ck_assert(c->meas[6].sigma == 0); /* empty: not given */
  ck_assert_uint_eq(c->meas[7].pose, 2);
  ck_assert_uint_eq(c->meas[7].target, 2); /* T3: T2 missing at p03 */
  ck_assert_int_eq(c->meas[5].set, TWF_SET_FIT);
  ck_assert_int_eq(c->meas[6].set, TWF_SET_FIT); /* empty: fit */
  ck_assert_int_eq(c->meas[8].set, TWF_SET_CHECK);
  ck_assert_int_eq(c->has_orientation_any, 0);
  ck_assert(twf_campaign_meas_quat(c, 0)[0] == 1 && twf_campaign_meas_quat(c, 0)[3] == 0);
  ck_assert_uint_eq(c->n_quat, 0);
  /* Lines count comments and the blank line (file lines 10 and 13). */
  ck_assert_int_eq(c->meas[0].line, 4);
  ck_assert_int_eq(c->meas[5].line, 9);
  ck_assert_int_eq(c->meas[6].line, 11);
  ck_assert_int_eq(c->meas[8].line, 14);
  ck_assert_int_eq(c->meas[10].line, 16);
  ck_assert_int_eq(c->pose_lines[0], 4);
  ck_assert_int_eq(c->pose_lines[2], 11);
  ck_assert_int_eq(c->pose_lines[3], 14);
  twf_campaign_free(c);
  twf_warnings_clear(&w);
  twf_model_free(m);
}
END_TEST

START_TEST(test_pair_equals_one)
{
  twf_model *m = tf6s();
  twf_campaign *a = read_ok(data("tests/data/campaign-one.csv"), m, NULL, NULL);
  twf_campaign *b = read_pair_ok(data("tests/data/campaign-joints.csv"),
                                 data("tests/data/campaign-points.csv"), m,
                                 NULL, NULL);
  assert_same(a, b, 0.0, 0);
  /* Lines refer to each file: poses to the joints file, points to theirs. */
  ck_assert_int_eq(b->pose_lines[0], 3);
  ck_assert_int_eq(b->pose_lines[3], 6);
  ck_assert_int_eq(b->meas[0].line, 4);
  ck_assert_int_eq(b->meas[10].line, 14);
  twf_campaign_free(a);
  twf_campaign_free(b);
  twf_model_free(m);
}
END_TEST

START_TEST(test_pair_pose_without_points)
{
  /* a pose the instrument missed is left out with a warning that names it;
   * the measurements keep pointing at their own poses */
  twf_model *m = tf6s();
  twf_warnings w;
  twf_error err;
  twf_campaign *c;
  size_t k;
  int named = 0;
  twf_warnings_init(&w);
  c = twf_campaign_read_pair(data("tests/data/campaign-joints-missed.csv"),
                             data("tests/data/campaign-points-missed.csv"), m, NULL, &w, &err);
  ck_assert_msg(c != NULL, "%s", err.message);
  ck_assert_uint_eq(c->n_poses, 2);
  ck_assert_uint_eq(c->n_meas, 2);
  ck_assert_str_eq(c->pose_ids[1], "p02");
  ck_assert_uint_eq(c->meas[1].pose, 1);
  ck_assert_close(c->q[6], -47.875 * 3.14159265358979323846 / 180.0, 1e-15);
  for (k = 0; k < w.count; k++)
    named |= strstr(w.items[k].message, "'p03'") != NULL && w.items[k].line == 6;
  ck_assert_msg(named, "no warning names p03 at line 6 (%zu warnings)", w.count);
  twf_warnings_clear(&w);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

START_TEST(test_joints_only)
{
  twf_model *m = tf6s();
  twf_campaign *a = read_ok(data("tests/data/campaign-one.csv"), m, NULL, NULL);
  twf_error err;
  twf_campaign *c = twf_campaign_read_joints(data("tests/data/campaign-joints.csv"),
                                             m, NULL, NULL, &err);
  size_t k;
  ck_assert_msg(c != NULL, "%s", err.message);
  ck_assert_uint_eq(c->n_poses, 4);
  ck_assert_uint_eq(c->n_meas, 0);
  for (k = 0; k < 4 * 6; k++)
    ck_assert(c->q[k] == a->q[k]);
  ck_assert_int_eq(c->pose_lines[1], 4);
  twf_campaign_free(c);
  /* A points file is not a joints file. */
  ck_assert_ptr_null(twf_campaign_read_joints(data("tests/data/campaign-points.csv"),
                                              m, NULL, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_UNKNOWN);
  twf_campaign_free(a);
  twf_model_free(m);
}
END_TEST

START_TEST(test_pair_set_precedence)
{
  twf_model *m = tf6s();
  twf_campaign *c;
  twf_test_tmpdir_make("check_campaign");
  twf_test_write_file(twf_test_tmppath("j.csv"),
             "pose,j1,j2,j3,j4,j5,j6,set\n"
             "a,1.5,2.5,3.5,4.5,5.5,6.5,check\n"
             "b,-1.5,-2.5,-3.5,-4.5,-5.5,-6.5,\n");
  twf_test_write_file(twf_test_tmppath("p.csv"),
             "pose,target,x,y,z,set\n"
             "a,T1,100.25,200.5,300.75,\n"
             "a,T2,101.25,201.5,301.75,fit\n"
             "b,T1,102.25,202.5,302.75,\n"
             "b,T3,103.25,203.5,303.75,check\n");
  c = read_pair_ok(twf_test_tmppath("j.csv"), twf_test_tmppath("p.csv"), m, NULL, NULL);
  ck_assert_int_eq(c->meas[0].set, TWF_SET_CHECK); /* from the pose */
  ck_assert_int_eq(c->meas[1].set, TWF_SET_FIT);   /* the point's own */
  ck_assert_int_eq(c->meas[2].set, TWF_SET_FIT);   /* default */
  ck_assert_int_eq(c->meas[3].set, TWF_SET_CHECK);
  twf_campaign_free(c);
  twf_test_tmpdir_remove();
  twf_model_free(m);
}
END_TEST

/* ------------------------------------------------------------------ */
/* Delimiters, decimal comma, BOM, CRLF, comments, units               */
/* ------------------------------------------------------------------ */

START_TEST(test_delimiters)
{
  static const char *const files[] = { "tests/data/campaign-one-semicolon.csv",
                                       "tests/data/campaign-one.tsv" };
  twf_model *m = tf6s();
  twf_campaign *base = read_ok(data("tests/data/campaign-one.csv"), m, NULL, NULL);
  size_t i;
  for (i = 0; i < 2; i++) {
    twf_warnings w;
    twf_campaign *c;
    twf_warnings_init(&w);
    c = read_ok(data(files[i]), m, NULL, &w);
    ck_assert_uint_eq(w.count, 0);
    /* Same text, same parse: exactly equal. */
    assert_same(base, c, 0.0, 0);
    twf_campaign_free(c);
    twf_warnings_clear(&w);
  }
  twf_campaign_free(base);
  twf_model_free(m);
}
END_TEST

/* campaign-one.csv rewritten with a BOM, CRLF line ends, an indented
 * comment and a blank line of spaces: same campaign, same lines. */
START_TEST(test_bom_crlf_comments)
{
  twf_model *m = tf6s();
  char *text = twf_test_slurp(data("tests/data/campaign-one.csv"));
  char *out = malloc(2 * strlen(text) + 16), *o = out;
  const char *s;
  twf_campaign *a, *b;
  twf_error err;
  twf_test_tmpdir_make("check_campaign");
  memcpy(o, "\xEF\xBB\xBF", 3);
  o += 3;
  for (s = text; *s; s++) {
    if (*s == '\n')
      *o++ = '\r';
    *o++ = *s;
  }
  *o = '\0';
  /* line 10 "# p03: ..." indented; line 13 (empty) becomes blanks */
  {
    char *p = strstr(out, "# p03");
    char *q = strstr(out, "\r\n\r\np04");
    ck_assert_ptr_nonnull(p);
    ck_assert_ptr_nonnull(q);
    twf_test_write_file(twf_test_tmppath("crlf.csv"), "");
    {
      FILE *f = fopen(twf_test_tmppath("crlf.csv"), "wb");
      fwrite(out, 1, (size_t)(p - out), f);
      fputs("  \t", f);
      fwrite(p, 1, (size_t)(q - p) + 2, f);
      fputs(" \t ", f);
      fputs(q + 2, f);
      fclose(f);
    }
  }
  a = read_ok(data("tests/data/campaign-one.csv"), m, NULL, NULL);
  b = read_ok(twf_test_tmppath("crlf.csv"), m, NULL, NULL);
  assert_same(a, b, 0.0, 1);
  /* An error after CRLF lines is still reported at the right line. */
  {
    char *bad = strstr(out, "-101.5,-305.25,841.3370");
    ck_assert_ptr_nonnull(bad);
    memcpy(bad, "-101.5,-305.25,841.33x0", 23);
    twf_test_write_file(twf_test_tmppath("crlf-bad.csv"), out);
    ck_assert_ptr_null(twf_campaign_read(twf_test_tmppath("crlf-bad.csv"), m, NULL, NULL, &err));
    ck_assert_int_eq(err.status, TWF_ERR_VALUE);
    ck_assert_int_eq(err.line, 16);
    ck_assert_int_eq(err.column, 9);
  }
  twf_campaign_free(a);
  twf_campaign_free(b);
  free(text);
  free(out);
  twf_test_tmpdir_remove();
  twf_model_free(m);
}
END_TEST

START_TEST(test_units_declared)
{
  twf_model *m = tf6s();
  twf_campaign *a = read_ok(data("tests/data/campaign-one.csv"), m, NULL, NULL);
  twf_campaign *b = read_ok(data("tests/data/campaign-one-si.csv"), m, NULL, NULL);
  /* campaign-one-si.csv holds the same values converted to m and rad and
   * printed with 17 digits (tests/data/README.md), so equal to rounding. */
  assert_same(a, b, 1e-15, 0);
  twf_campaign_free(a);
  twf_campaign_free(b);
  twf_model_free(m);
}
END_TEST

/* The reader converts with units.c (twf_length_to_si), the arithmetic of
 * the reports that divide by twf_length_unit_si: 3.1 is a value where
 * 3.1 / 1e3 and 3.1 * 1e-3 differ in the last bit, so a reader with a
 * conversion of its own shows here. */
START_TEST(test_one_unit_conversion)
{
  twf_model *m = tf6s();
  twf_campaign *c;
  char text[1024];
  size_t j;
  twf_test_tmpdir_make("check_campaign");
  snprintf(text, sizeof text, "# units: length=mm angle=mrad\npose,target");
  for (j = 0; j < m->n_joints; j++)
    snprintf(text + strlen(text), sizeof text - strlen(text), ",%s", m->joints[j].name);
  snprintf(text + strlen(text), sizeof text - strlen(text), ",x,y,z,sigma\np1,%s",
           m->targets[0].name);
  for (j = 0; j < m->n_joints; j++)
    snprintf(text + strlen(text), sizeof text - strlen(text), ",3.1");
  snprintf(text + strlen(text), sizeof text - strlen(text), ",3.1,0,-3.1,0.0031\n");
  twf_test_write_file(twf_test_tmppath("u.csv"), text);
  c = read_ok(twf_test_tmppath("u.csv"), m, NULL, NULL);
  for (j = 0; j < m->n_joints; j++)
    ck_assert(c->q[j] == (m->joints[j].type == TWF_JOINT_PRISMATIC
                              ? twf_length_to_si(3.1, TWF_LENGTH_MM)
                              : twf_angle_to_si(3.1, TWF_ANGLE_MRAD)));
  ck_assert(c->meas[0].pos[0] == twf_length_to_si(3.1, TWF_LENGTH_MM));
  ck_assert(c->meas[0].pos[2] == twf_length_to_si(-3.1, TWF_LENGTH_MM));
  ck_assert(c->meas[0].sigma == twf_length_to_si(0.0031, TWF_LENGTH_MM));
  twf_campaign_free(c);
  twf_model_free(m);
  twf_test_tmpdir_remove();
}
END_TEST

START_TEST(test_units_override)
{
  twf_model *m = tf6s();
  twf_campaign_options o = twf_campaign_default_options();
  twf_warnings w;
  twf_campaign *c;
  twf_warnings_init(&w);
  o.length_from_caller = 1;
  o.length_unit = TWF_LENGTH_UM;
  o.angle_from_caller = 1;
  o.angle_unit = TWF_ANGLE_RAD;
  c = read_ok(data("tests/data/campaign-one.csv"), m, &o, &w);
  /* The file's numbers taken as micrometres and radians unchanged. */
  ck_assert(c->q[1] == -33.25);
  ck_assert(c->meas[0].pos[0] == twf_length_to_si(1503.2871, TWF_LENGTH_UM));
  ck_assert(c->meas[0].sigma == twf_length_to_si(0.025, TWF_LENGTH_UM));
  /* The file declares mm and deg: both overrides are reported. */
  ck_assert(warned(&w, "declares length=mm; reading um"));
  ck_assert(warned(&w, "declares angle=deg; reading rad"));
  twf_campaign_free(c);
  twf_warnings_clear(&w);

  /* Millimetres read as metres: 1503 m is beyond the plausible range. */
  {
    twf_error err;
    o = twf_campaign_default_options();
    o.length_from_caller = 1;
    o.length_unit = TWF_LENGTH_M;
    ck_assert_ptr_null(twf_campaign_read(data("tests/data/campaign-one.csv"), m, &o, NULL, &err));
    ck_assert_int_eq(err.status, TWF_ERR_VALUE);
    ck_assert_int_eq(err.column, 9);
    ck_assert_ptr_nonnull(strstr(err.message, "column 'x': 1503.29 m lies beyond 1000 m"));
  }

  /* Only the angle imposed: lengths keep the file's mm. */
  twf_warnings_init(&w);
  o = twf_campaign_default_options();
  o.angle_from_caller = 1;
  o.angle_unit = TWF_ANGLE_MRAD;
  c = read_ok(data("tests/data/campaign-one.csv"), m, &o, &w);
  ck_assert_close(c->q[1], -33.25e-3, 1e-15);
  ck_assert_close(c->meas[0].pos[0], 1.5032871, 1e-15);
  ck_assert(warned(&w, "declares angle=deg; reading mrad"));
  ck_assert(!warned(&w, "declares length"));
  twf_campaign_free(c);
  twf_warnings_clear(&w);

  /* No declaration in the file: an override gives no warning. */
  twf_warnings_init(&w);
  o = twf_campaign_default_options();
  o.length_from_caller = 1;
  o.length_unit = TWF_LENGTH_UM;
  c = read_ok(data("tests/data/campaign-one-semicolon.csv"), m, &o, &w);
  ck_assert(c->meas[0].pos[0] == twf_length_to_si(1503.2871, TWF_LENGTH_UM));
  ck_assert_uint_eq(w.count, 0);
  twf_campaign_free(c);
  twf_warnings_clear(&w);
  twf_model_free(m);
}
END_TEST

/* ------------------------------------------------------------------ */
/* Quaternions                                                         */
/* ------------------------------------------------------------------ */

START_TEST(test_six_d)
{
  twf_model *m = tf6s();
  twf_campaign *c = read_ok(data("tests/data/campaign-6d.csv"), m, NULL, NULL);
  const double q0[4] = { 0.8775649, 0.2302946, -0.1535297, 0.3915008 };
  double n0 = sqrt(q0[0] * q0[0] + q0[1] * q0[1] + q0[2] * q0[2] + q0[3] * q0[3]);
  double n2;
  size_t i;
  ck_assert_int_eq(c->has_orientation_any, 1);
  ck_assert_int_eq(c->meas[0].has_orientation, 1);
  for (i = 0; i < 4; i++)
    ck_assert_close(twf_campaign_meas_quat(c, 0)[i], q0[i] / n0, 1e-15);
  /* A row with the four fields empty is position-only. */
  ck_assert_int_eq(c->meas[1].has_orientation, 0);
  ck_assert(twf_campaign_meas_quat(c, 1)[0] == 1 && twf_campaign_meas_quat(c, 1)[1] == 0);
  /* Norm 1 + 4e-7 is accepted and normalised. */
  ck_assert_int_eq(c->meas[2].has_orientation, 1);
  {
    const double *q2 = twf_campaign_meas_quat(c, 2);
    n2 = sqrt(q2[0] * q2[0] + q2[1] * q2[1] + q2[2] * q2[2] + q2[3] * q2[3]);
  }
  ck_assert_close(n2, 1.0, 1e-15);
  ck_assert_close(twf_campaign_meas_quat(c, 2)[2], -0.5 / sqrt(0.75 + 0.5000008 * 0.5000008), 1e-15);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

/* ------------------------------------------------------------------ */
/* Write and read back                                                 */
/* ------------------------------------------------------------------ */

static twf_campaign *random_campaign(const twf_model *m, twf_test_rng *rng)
{
  size_t np = 7, nt = m->n_targets, p, t, k = 0, j;
  twf_campaign *c = twf_campaign_alloc(m->n_joints, np, np * nt);
  ck_assert_ptr_nonnull(c);
  for (p = 0; p < np; p++) {
    snprintf(c->pose_ids[p], TWF_NAME_MAX, p == 3 ? "pose %zu; \"odd\"" : "P-%03zu", p);
    for (j = 0; j < m->n_joints; j++)
      c->q[p * m->n_joints + j] = twf_test_uniform(rng, m->joints[j].limit_lo,
                                                   m->joints[j].limit_hi);
    for (t = 0; t < nt; t++, k++) {
      twf_measurement *ms = &c->meas[k];
      ms->pose = (uint32_t)p;
      ms->target = (uint32_t)t;
      for (j = 0; j < 3; j++)
        ms->pos[j] = twf_test_uniform(rng, -2.5, 2.5);
      if ((k % 3) != 1) {
        double n = 0, qt[4];
        for (j = 0; j < 4; j++) {
          qt[j] = twf_test_gauss(rng);
          n += qt[j] * qt[j];
        }
        for (j = 0; j < 4; j++)
          qt[j] /= sqrt(n);
        ck_assert_int_eq(twf_campaign_meas_set_quat(c, k, qt), TWF_OK);
      }
      ms->sigma = (k % 4) ? twf_test_uniform(rng, 5e-6, 6e-5) : 0.0;
      ms->set = (k % 5 == 2) ? TWF_SET_CHECK : TWF_SET_FIT;
    }
  }
  return c;
}

static void roundtrip(const twf_model *m, const twf_campaign *c,
                      twf_length_unit lu, twf_angle_unit au)
{
  twf_error err;
  twf_warnings w;
  twf_campaign *back;
  FILE *f = fopen(twf_test_tmppath("rt.csv"), "w");
  ck_assert_ptr_nonnull(f);
  ck_assert_int_eq(twf_campaign_write(c, m, lu, au, f, &err), TWF_OK);
  ck_assert_int_eq(fclose(f), 0);
  twf_warnings_init(&w);
  back = read_ok(twf_test_tmppath("rt.csv"), m, NULL, &w);
  ck_assert_uint_eq(w.count, 0);
  /* 17 significant digits and one multiplication by the unit each way:
   * within a few ulp. */
  assert_same(c, back, 1e-15, 0);
  twf_campaign_free(back);
  twf_warnings_clear(&w);
}

START_TEST(test_roundtrip)
{
  static const twf_length_unit lus[] = { TWF_LENGTH_MM, TWF_LENGTH_M, TWF_LENGTH_UM, TWF_LENGTH_IN };
  static const twf_angle_unit aus[] = { TWF_ANGLE_DEG, TWF_ANGLE_RAD, TWF_ANGLE_MRAD, TWF_ANGLE_DEG };
  static const test_arm arms[] = { ARM_TF6S, ARM_TF4P, ARM_TF7 };
  uint64_t seed = twf_test_seed(0x5eed2385ULL);
  twf_test_rng rng;
  size_t a, u;
  twf_test_rng_init(&rng, seed);
  twf_test_tmpdir_make("check_campaign");
  for (a = 0; a < 3; a++) {
    twf_model *m = test_arm_model(arms[a]);
    twf_campaign *c = random_campaign(m, &rng);
    for (u = 0; u < 4; u++)
      roundtrip(m, c, lus[u], aus[u]);
    twf_campaign_free(c);
    twf_model_free(m);
  }
  /* A file read, written and read again. */
  {
    twf_model *m = tf6s();
    twf_campaign *c = read_ok(data("tests/data/campaign-6d.csv"), m, NULL, NULL);
    roundtrip(m, c, TWF_LENGTH_MM, TWF_ANGLE_DEG);
    twf_campaign_free(c);
    c = read_ok(data("tests/data/campaign-one.csv"), m, NULL, NULL);
    roundtrip(m, c, TWF_LENGTH_IN, TWF_ANGLE_RAD);
    twf_campaign_free(c);
    twf_model_free(m);
  }
  twf_test_tmpdir_remove();
}
END_TEST

START_TEST(test_write_groups_by_pose)
{
  twf_model *m = tf6s();
  twf_campaign *c = twf_campaign_alloc(6, 2, 3), *back;
  twf_error err;
  FILE *f;
  size_t j;
  twf_test_tmpdir_make("check_campaign");
  snprintf(c->pose_ids[0], TWF_NAME_MAX, "#first");
  snprintf(c->pose_ids[1], TWF_NAME_MAX, " second");
  for (j = 0; j < 6; j++) {
    c->q[j] = 0.0125 * (double)(j + 1);
    c->q[6 + j] = -0.0375 * (double)(j + 1);
  }
  /* Measurements interleaved: pose 1, pose 0, pose 1. */
  c->meas[0].pose = 1, c->meas[0].target = 0, c->meas[0].pos[0] = 1.25;
  c->meas[1].pose = 0, c->meas[1].target = 1, c->meas[1].pos[0] = 2.25;
  c->meas[2].pose = 1, c->meas[2].target = 2, c->meas[2].pos[0] = 3.25;
  f = fopen(twf_test_tmppath("g.csv"), "w");
  ck_assert_int_eq(twf_campaign_write(c, m, TWF_LENGTH_MM, TWF_ANGLE_DEG, f, &err), TWF_OK);
  fclose(f);
  back = read_ok(twf_test_tmppath("g.csv"), m, NULL, NULL);
  ck_assert_uint_eq(back->n_poses, 2);
  /* Ids starting with '#' or a blank are quoted, so they survive. */
  ck_assert_str_eq(back->pose_ids[0], "#first");
  ck_assert_str_eq(back->pose_ids[1], " second");
  ck_assert_uint_eq(back->meas[0].pose, 0);
  ck_assert_close(back->meas[0].pos[0], 2.25, 1e-15);
  ck_assert_close(back->meas[1].pos[0], 1.25, 1e-15);
  ck_assert_close(back->meas[2].pos[0], 3.25, 1e-15);
  ck_assert_close(back->q[6 + 5], -0.225, 1e-15);
  twf_campaign_free(back);

  /* A pose without measurement cannot be written in the one-file form. */
  c->meas[1].pose = 1;
  f = fopen(twf_test_tmppath("g2.csv"), "w");
  ck_assert_int_eq(twf_campaign_write(c, m, TWF_LENGTH_MM, TWF_ANGLE_DEG, f, &err),
                   TWF_ERR_INVALID);
  ck_assert_ptr_nonnull(strstr(err.message, "'#first' has no measurement"));
  c->meas[1].pose = 0;
  c->meas[1].target = 3;
  ck_assert_int_eq(twf_campaign_write(c, m, TWF_LENGTH_MM, TWF_ANGLE_DEG, f, &err),
                   TWF_ERR_INVALID);
  fclose(f);
  twf_campaign_free(c);
  twf_test_tmpdir_remove();
  twf_model_free(m);
}
END_TEST

/* ------------------------------------------------------------------ */
/* Limits and unit suspicions                                          */
/* ------------------------------------------------------------------ */

START_TEST(test_limit_warning)
{
  twf_model *m = tf6s();
  twf_warnings w;
  twf_campaign *c;
  int k;
  twf_warnings_init(&w);
  c = read_ok(data("tests/data/campaign-limits.csv"), m, NULL, &w);
  ck_assert_uint_eq(c->n_poses, 3);
  ck_assert_uint_eq(w.count, 2);
  k = warned(&w, "joint 'j2': 1 of 3 values lie outside its limits [-100, 145] deg, "
                 "the first 151.375 deg at pose 'p02'");
  ck_assert(k);
  ck_assert_int_eq(w.items[k - 1].line, 4);
  ck_assert_int_eq(w.items[k - 1].column, 4);
  k = warned(&w, "joint 'j5': 1 of 3 values");
  ck_assert(k);
  ck_assert_int_eq(w.items[k - 1].line, 5);
  ck_assert_int_eq(w.items[k - 1].column, 7);
  ck_assert(!warned(&w, "look like"));
  twf_campaign_free(c);
  twf_warnings_clear(&w);
  twf_model_free(m);
}
END_TEST

START_TEST(test_limit_error_and_tolerance)
{
  twf_model *m = tf6s();
  twf_campaign_options o = twf_campaign_default_options();
  twf_warnings w;
  twf_error err;
  twf_campaign *c;
  o.limits_are_errors = 1;
  c = twf_campaign_read(data("tests/data/campaign-limits.csv"), m, &o, NULL, &err);
  ck_assert_ptr_null(c);
  ck_assert_int_eq(err.status, TWF_ERR_LIMIT);
  ck_assert_int_eq(err.line, 4);
  ck_assert_int_eq(err.column, 4);
  ck_assert_ptr_nonnull(strstr(err.message, "'j2': 151.375 deg at pose 'p02'"));
  ck_assert(err.hint[0] != '\0');
  /* Slack of 6.5 deg covers j2 (6.375 over) but not j5 (6.625 under). */
  o.limits_are_errors = 0;
  o.limit_tolerance = 6.5 * DEG;
  twf_warnings_init(&w);
  c = read_ok(data("tests/data/campaign-limits.csv"), m, &o, &w);
  ck_assert_uint_eq(w.count, 1);
  ck_assert(warned(&w, "joint 'j5'"));
  twf_campaign_free(c);
  twf_warnings_clear(&w);
  /* Two-file form: the error points into the joints file. */
  twf_test_tmpdir_make("check_campaign");
  twf_test_write_file(twf_test_tmppath("j.csv"), "pose,j6,j5,j4,j3,j2,j1\n"
                               "a,1.5,2.5,3.5,4.5,5.5,6.5\n"
                               "b,-1.5,-2.5,-3.5,-4.5,-5.5,-171.25\n");
  twf_test_write_file(twf_test_tmppath("p.csv"), "pose,target,x,y,z\na,T1,1.5,2.5,3.5\nb,T1,1.5,2.5,3.5\n");
  o = twf_campaign_default_options();
  o.limits_are_errors = 1;
  ck_assert_ptr_null(twf_campaign_read_pair(twf_test_tmppath("j.csv"), twf_test_tmppath("p.csv"), m, &o, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_LIMIT);
  ck_assert_str_eq(err.file, twf_test_tmppath("j.csv"));
  ck_assert_int_eq(err.line, 3);
  ck_assert_int_eq(err.column, 7);
  ck_assert_ptr_nonnull(strstr(err.message, "column 'j1': -171.25 deg at pose 'b'"));
  twf_test_tmpdir_remove();
  twf_model_free(m);
}
END_TEST

START_TEST(test_radians_as_degrees)
{
  twf_model *m = tf6s();
  twf_warnings w;
  twf_campaign *c;
  int k;
  /* All joints within +-6.3 "deg" under wide limits: one warning. */
  twf_warnings_init(&w);
  c = read_ok(data("tests/data/campaign-radians.csv"), m, NULL, &w);
  ck_assert_uint_eq(w.count, 1);
  ck_assert(warned(&w, "look like radians read as degrees: no revolute joint moves "
                       "beyond +-6.3 deg over the 3 poses (j1, j2, j3, j4, j5, j6)"));
  twf_campaign_free(c);
  twf_warnings_clear(&w);
  /* With j4 limited to [-170, -5] deg (as tf7's j4) the radian values
   * fall outside, and the limit warning carries the hint. */
  m->joints[3].limit_lo = -170 * DEG;
  m->joints[3].limit_hi = -5 * DEG;
  twf_warnings_init(&w);
  c = read_ok(data("tests/data/campaign-radians.csv"), m, NULL, &w);
  ck_assert_uint_eq(w.count, 2);
  k = warned(&w, "joint 'j4': 3 of 3 values lie outside");
  ck_assert(k);
  ck_assert_ptr_nonnull(strstr(w.items[k - 1].message,
                               "the values look like radians read as degrees: declare angle=rad"));
  twf_campaign_free(c);
  twf_warnings_clear(&w);
  /* Declared as radians: no warning at all. */
  {
    twf_campaign_options o = twf_campaign_default_options();
    o.angle_from_caller = 1;
    o.angle_unit = TWF_ANGLE_RAD;
    twf_warnings_init(&w);
    c = read_ok(data("tests/data/campaign-radians.csv"), m, &o, &w);
    ck_assert_uint_eq(w.count, 0);
    twf_campaign_free(c);
    twf_warnings_clear(&w);
  }
  twf_model_free(m);
}
END_TEST

START_TEST(test_degrees_as_radians)
{
  twf_model *m = tf6s();
  twf_warnings w;
  twf_campaign *c;
  size_t k;
  twf_warnings_init(&w);
  c = read_ok(data("tests/data/campaign-degrees.csv"), m, NULL, &w);
  /* Every joint leaves its limits, each warning with the hint. */
  ck_assert_uint_eq(w.count, 6);
  for (k = 0; k < w.count; k++)
    ck_assert_msg(strstr(w.items[k].message, "look like degrees read as radians: "
                                             "declare angle=deg") != NULL,
                  "%s", w.items[k].message);
  ck_assert(warned(&w, "joint 'j1': 2 of 2 values lie outside its limits "
                       "[-2.967059728, 2.967059728] rad"));
  twf_campaign_free(c);
  twf_warnings_clear(&w);
  twf_model_free(m);
}
END_TEST

START_TEST(test_prismatic_units_hint)
{
  twf_model *m = test_arm_model(ARM_TF4P);
  twf_warnings w;
  twf_campaign *c;
  int k;
  twf_test_tmpdir_make("check_campaign");
  /* tf4p's j3 strokes 0..200 mm; millimetres under length=m. */
  twf_test_write_file(twf_test_tmppath("mm.csv"),
             "# units: length=m angle=deg\n"
             "pose,target,j1,j2,j3,j4,x,y,z\n"
             "a,T1,12.5,-33.25,112.5,45.5,1.25,0.5,0.75\n"
             "b,T2,-42.5,63.25,37.75,-145.5,1.5,0.25,0.5\n");
  twf_warnings_init(&w);
  c = read_ok(twf_test_tmppath("mm.csv"), m, NULL, &w);
  ck_assert_uint_eq(w.count, 1);
  k = warned(&w, "joint 'j3': 2 of 2 values lie outside its limits [0, 0.2] m");
  ck_assert(k);
  ck_assert_ptr_nonnull(strstr(w.items[k - 1].message, "millimetres read as metres: declare length=mm"));
  /* The prismatic value is read in the length unit. */
  ck_assert_close(c->q[2], 112.5, 1e-15);
  twf_campaign_free(c);
  twf_warnings_clear(&w);
  twf_test_tmpdir_remove();
  twf_model_free(m);
}
END_TEST

/* ------------------------------------------------------------------ */
/* The bad-campaign catalogue                                          */
/* ------------------------------------------------------------------ */

static const struct { const char *name; twf_status st; } status_names[] = {
  { "NOMEM", TWF_ERR_NOMEM }, { "IO", TWF_ERR_IO }, { "SYNTAX", TWF_ERR_SYNTAX },
  { "VALUE", TWF_ERR_VALUE }, { "MISSING", TWF_ERR_MISSING },
  { "DUPLICATE", TWF_ERR_DUPLICATE }, { "UNKNOWN", TWF_ERR_UNKNOWN },
  { "UNITS", TWF_ERR_UNITS }, { "INVALID", TWF_ERR_INVALID },
  { "LIMIT", TWF_ERR_LIMIT },
};

static const char *base_name(const char *p)
{
  const char *s = strrchr(p, '/');
  return s ? s + 1 : p;
}

START_TEST(test_bad_campaigns)
{
  twf_model *m = tf6s();
  char *table = twf_test_slurp(data("tests/bad-campaigns/expect.tsv"));
  char *line, *save = NULL, report[8192] = "";
  size_t n_cases = 0, n_fail = 0;
  char listed[16384] = "|";
  DIR *d;
  struct dirent *e;
  for (line = strtok_r(table, "\n", &save); line != NULL;
       line = strtok_r(NULL, "\n", &save)) {
    char *f[7], *s = line, *plus;
    size_t k, i;
    twf_campaign_options o = twf_campaign_default_options();
    twf_error err;
    twf_campaign *c;
    twf_status want = TWF_OK;
    char path1[1024], path2[1024];
    if (line[0] == '#')
      continue;
    for (k = 0; k < 7; k++) {
      f[k] = s;
      s = strchr(s, '\t');
      if (k < 6) {
        ck_assert_msg(s != NULL, "expect.tsv: too few fields in '%s'", line);
        *s++ = '\0';
      }
    }
    for (i = 0; i < sizeof status_names / sizeof status_names[0]; i++)
      if (strcmp(f[2], status_names[i].name) == 0)
        want = status_names[i].st;
    ck_assert_msg(want != TWF_OK, "expect.tsv: unknown status %s", f[2]);
    if (strcmp(f[1], "limits=error") == 0)
      o.limits_are_errors = 1;
    plus = strchr(f[0], '+');
    n_cases++;
    if (plus) {
      *plus = '\0';
      snprintf(path1, sizeof path1, "%s/%s", twf_test_srcpath("tests/bad-campaigns"), f[0]);
      snprintf(path2, sizeof path2, "%s/%s", twf_test_srcpath("tests/bad-campaigns"), plus + 1);
      c = twf_campaign_read_pair(path1, path2, m, &o, NULL, &err);
      snprintf(listed + strlen(listed), sizeof listed - strlen(listed), "%s|%s|", f[0], plus + 1);
    } else {
      snprintf(path1, sizeof path1, "%s/%s", twf_test_srcpath("tests/bad-campaigns"), f[0]);
      c = twf_campaign_read(path1, m, &o, NULL, &err);
      snprintf(listed + strlen(listed), sizeof listed - strlen(listed), "%s|", f[0]);
    }
    if (c != NULL || err.status != want || strcmp(base_name(err.file), f[3]) != 0 ||
        err.line != atol(f[4]) || err.column != atol(f[5]) ||
        strstr(err.message, f[6]) == NULL || err.hint[0] == '\0') {
      n_fail++;
      snprintf(report + strlen(report), sizeof report - strlen(report),
               "\n  %s: got %s %s:%ld:%ld: %s [hint: %s]; want %s %s:%s:%s: ...%s...",
               f[0], c ? "success" : twf_strerror(err.status), base_name(err.file),
               err.line, err.column, err.message, err.hint, f[2], f[3], f[4], f[5], f[6]);
    }
    twf_campaign_free(c);
  }
  ck_assert_msg(n_fail == 0, "%zu of %zu bad campaigns misread:%s", n_fail, n_cases, report);
  ck_assert_uint_ge(n_cases, 40);
  /* Every file of the folder is in the table. */
  d = opendir(twf_test_srcpath("tests/bad-campaigns"));
  ck_assert_ptr_nonnull(d);
  while ((e = readdir(d)) != NULL) {
    char key[300];
    const char *dot = strrchr(e->d_name, '.');
    if (dot == NULL || strcmp(dot, ".csv") != 0)
      continue;
    snprintf(key, sizeof key, "|%s|", e->d_name);
    ck_assert_msg(strstr(listed, key) != NULL, "%s is not in expect.tsv", e->d_name);
  }
  closedir(d);
  free(table);
  twf_model_free(m);
}
END_TEST

/* ------------------------------------------------------------------ */
/* Arguments, allocation, many poses                                   */
/* ------------------------------------------------------------------ */

START_TEST(test_arguments)
{
  twf_model *m = tf6s();
  twf_campaign_options o = twf_campaign_default_options();
  twf_error err;
  twf_campaign *c;
  ck_assert_int_eq(o.length_from_caller, 0);
  ck_assert_int_eq(o.angle_from_caller, 0);
  ck_assert_int_eq(o.length_unit, TWF_LENGTH_MM);
  ck_assert_int_eq(o.angle_unit, TWF_ANGLE_DEG);
  ck_assert_int_eq(o.limits_are_errors, 0);
  ck_assert(o.limit_tolerance == 1e-9);
  ck_assert_ptr_null(twf_campaign_read(data("tests/data/campaign-one.csv"), NULL, NULL, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_INVALID);
  ck_assert_ptr_null(twf_campaign_read(NULL, m, NULL, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_INVALID);
  ck_assert_ptr_null(twf_campaign_read(data("tests/data/no-such-file.csv"), m, NULL, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_IO);
  ck_assert_ptr_nonnull(strstr(err.file, "no-such-file.csv"));
  ck_assert_ptr_null(twf_campaign_read_pair(data("tests/data/campaign-joints.csv"), NULL, m,
                                            NULL, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_INVALID);
  o.limit_tolerance = -1;
  ck_assert_ptr_null(twf_campaign_read(data("tests/data/campaign-one.csv"), m, &o, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_INVALID);
  /* A joint named like a reserved column cannot be read unambiguously. */
  snprintf(m->joints[2].name, TWF_NAME_MAX, "x");
  ck_assert_ptr_null(twf_campaign_read(data("tests/data/campaign-one.csv"), m, NULL, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_INVALID);
  /* err may be NULL */
  ck_assert_ptr_null(twf_campaign_read(data("tests/data/campaign-one.csv"), m, NULL, NULL, NULL));
  twf_model_free(m);

  c = twf_campaign_alloc(4, 3, 5);
  ck_assert_ptr_nonnull(c);
  ck_assert_uint_eq(c->n_poses, 3);
  ck_assert_uint_eq(c->n_meas, 5);
  ck_assert(twf_campaign_meas_quat(c, 4)[0] == 1 && c->meas[4].set == TWF_SET_FIT);
  ck_assert(c->q[11] == 0);
  twf_campaign_free(c);
  twf_campaign_free(NULL);
}
END_TEST

/* 600 poses exercise the id table's growth; a duplicate pair at the end
 * must still be found. */
START_TEST(test_many_poses)
{
  twf_model *m = tf6s();
  FILE *f;
  size_t p;
  twf_campaign *c;
  twf_error err;
  twf_test_tmpdir_make("check_campaign");
  f = fopen(twf_test_tmppath("many.csv"), "w");
  fputs("pose,target,j1,j2,j3,j4,j5,j6,x,y,z\n", f);
  for (p = 0; p < 600; p++)
    fprintf(f, "pose-%zu,T%zu,%.3f,1.5,2.5,3.5,4.5,5.5,%zu.25,0.5,0.75\n", p, 1 + p % 3,
            -160.0 + 0.5 * (double)p, p);
  fclose(f);
  c = read_ok(twf_test_tmppath("many.csv"), m, NULL, NULL);
  ck_assert_uint_eq(c->n_poses, 600);
  ck_assert_str_eq(c->pose_ids[599], "pose-599");
  ck_assert_close(c->meas[437].pos[0], 437.25e-3, 1e-15);
  ck_assert_close(c->q[437 * 6], (-160.0 + 218.5) * DEG, 1e-15);
  twf_campaign_free(c);
  f = fopen(twf_test_tmppath("many.csv"), "a");
  fputs("pose-7,T2,-156.5,1.5,2.5,3.5,4.5,5.5,1,2,3\n", f);
  fclose(f);
  ck_assert_ptr_null(twf_campaign_read(twf_test_tmppath("many.csv"), m, NULL, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_DUPLICATE);
  ck_assert_int_eq(err.line, 602);
  ck_assert_ptr_nonnull(strstr(err.message, "pose 'pose-7' target 'T2' appears twice (first at line 9)"));
  twf_test_tmpdir_remove();
  twf_model_free(m);
}
END_TEST

/* ------------------------------------------------------------------ */
/* Input limits: lines, size, encodings                                */
/* ------------------------------------------------------------------ */

/* A campaign file with a comment line of n characters above the data of
 * tests/data/campaign-one.csv, with LF or CR LF line ends. */
static void write_with_long_comment(const char *path, size_t n, int crlf)
{
  char *text = twf_test_slurp(data("tests/data/campaign-one.csv"));
  FILE *f = fopen(path, "wb");
  size_t k;
  ck_assert_ptr_nonnull(f);
  fputc('#', f);
  for (k = 1; k < n; k++)
    fputc('-', f);
  fputs(crlf ? "\r\n" : "\n", f);
  fputs(text, f);
  ck_assert_int_eq(fclose(f), 0);
  free(text);
}

/* A line longer than TWF_CAMPAIGN_LINE_MAX stops the reading at that line
 * (an endless line would otherwise spin or grow memory); a line of exactly
 * the limit, with either line end, is read. */
START_TEST(test_line_limit)
{
  twf_model *m = tf6s();
  twf_campaign *c;
  twf_error err;
  twf_test_tmpdir_make("check_campaign");
  write_with_long_comment(twf_test_tmppath("at-limit.csv"), TWF_CAMPAIGN_LINE_MAX, 0);
  c = read_ok(twf_test_tmppath("at-limit.csv"), m, NULL, NULL);
  twf_campaign_free(c);
  write_with_long_comment(twf_test_tmppath("at-limit-crlf.csv"), TWF_CAMPAIGN_LINE_MAX, 1);
  c = read_ok(twf_test_tmppath("at-limit-crlf.csv"), m, NULL, NULL);
  twf_campaign_free(c);
  write_with_long_comment(twf_test_tmppath("over.csv"), TWF_CAMPAIGN_LINE_MAX + 1, 0);
  ck_assert_ptr_null(twf_campaign_read(twf_test_tmppath("over.csv"), m, NULL, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_SYNTAX);
  ck_assert_int_eq(err.line, 1);
  ck_assert_str_eq(err.message, "line is longer than 65536 characters: reading stopped there");
  ck_assert(err.hint[0] != '\0');
  /* CR CR LF (a CR LF file converted once more) is not CR-only. */
  {
    char *text = twf_test_slurp(data("tests/data/campaign-one.csv")), *o;
    char *out = malloc(3 * strlen(text) + 1);
    const char *s;
    for (s = text, o = out; *s; s++) {
      if (*s == '\n') {
        *o++ = '\r';
        *o++ = '\r';
      }
      *o++ = *s;
    }
    *o = '\0';
    twf_test_write_file(twf_test_tmppath("crcrlf.csv"), out);
    c = read_ok(twf_test_tmppath("crcrlf.csv"), m, NULL, NULL);
    twf_campaign_free(c);
    free(out);
    free(text);
  }
  /* A long data line after good ones: its own line number. */
  {
    FILE *f = fopen(twf_test_tmppath("long-row.csv"), "wb");
    size_t k;
    fputs("pose,target,j1,j2,j3,j4,j5,j6,x,y,z\n"
          "p01,T1,12.5,-33.25,41.125,-7.75,28.375,93.5,1503.2871,-212.4409,987.1153\n"
          "p02,T1,1", f);
    for (k = 0; k < 3 * (size_t)TWF_CAMPAIGN_LINE_MAX; k++)
      fputc('0', f);
    fclose(f);
  }
  ck_assert_ptr_null(twf_campaign_read(twf_test_tmppath("long-row.csv"), m, NULL, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_SYNTAX);
  ck_assert_int_eq(err.line, 3);
  twf_test_tmpdir_remove();
  twf_model_free(m);
}
END_TEST

/* max_input_size: a file of exactly the limit is read, one byte more is
 * refused before memory grows (0 keeps the default). */
START_TEST(test_size_limit)
{
  twf_model *m = tf6s();
  twf_campaign_options o = twf_campaign_default_options();
  char *text = twf_test_slurp(data("tests/data/campaign-one.csv"));
  size_t n = strlen(text);
  char want[128];
  twf_campaign *c;
  twf_error err;
  ck_assert(o.max_input_size == TWF_INPUT_SIZE_DEFAULT);
  ck_assert(TWF_INPUT_SIZE_DEFAULT == 2147483648ULL);
  o.max_input_size = n;
  c = read_ok(data("tests/data/campaign-one.csv"), m, &o, NULL);
  twf_campaign_free(c);
  o.max_input_size = 0;
  c = read_ok(data("tests/data/campaign-one.csv"), m, &o, NULL);
  twf_campaign_free(c);
  o.max_input_size = n - 1;
  ck_assert_ptr_null(twf_campaign_read(data("tests/data/campaign-one.csv"), m, &o, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_VALUE);
  ck_assert_int_eq(err.line, 0);
  snprintf(want, sizeof want, "the file is larger than the input size limit of %zu bytes", n - 1);
  ck_assert_str_eq(err.message, want);
  ck_assert_ptr_nonnull(strstr(err.hint, "max_input_size"));
  /* the two-file form: each file against the limit */
  o.max_input_size = 1024;
  ck_assert_ptr_null(twf_campaign_read_pair(data("tests/data/campaign-joints.csv"),
                                            data("tests/data/campaign-one.csv"), m, &o, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_VALUE);
  ck_assert_ptr_nonnull(strstr(err.message, "limit of 1 KiB"));
  free(text);
  twf_model_free(m);
}
END_TEST

/* A pose id that starts with '#' makes its row a comment by the
 * documented rule: a comment line with exactly the shape of a data row
 * gives one warning per file (how many, the first line and id); other
 * comments, and rows with the id quoted, give none. */
START_TEST(test_rowlike_comment_warns)
{
  static const char head[] = "pose,target,j1,j2,j3,j4,j5,j6,x,y,z\n"
      "p01,T1,12.5,-33.25,41.125,-7.75,28.375,93.5,1503.2871,-212.4409,987.1153\n"
      "p02,T1,-47.875,15.625,-22.5,61.25,-54.125,-128.75,1219.5532,904.3317,1377.2081\n";
  static const char row3[] = "p03,T1,1,2,3,4,5,6,1256.0248,877.1194,1354.4487\n";
  twf_model *m = tf6s();
  twf_warnings w;
  twf_campaign *c;
  char text[2048];
  twf_test_tmpdir_make("check_campaign");
  snprintf(text, sizeof text, "%s# checked by the operator\n# pose,target,x\n"
           "#p09,T1,12.5,-33.25,41.125,-7.75,28.375,93.5,1503.2871,-212.4409\n%s"
           "\"#p04\",T2,1,2,3,4,5,6,1,2,3\n", head, row3);
  twf_test_write_file(twf_test_tmppath("plain.csv"), text);
  twf_warnings_init(&w);
  c = read_ok(twf_test_tmppath("plain.csv"), m, NULL, &w);
  ck_assert_uint_eq(c->n_poses, 4);
  ck_assert_str_eq(c->pose_ids[3], "#p04");
  ck_assert_uint_eq(w.count, 0);
  twf_campaign_free(c);
  twf_warnings_clear(&w);

  snprintf(text, sizeof text, "%s#p05,T1,12.5,-33.25,41.125,-7.75,28.375,93.5,1,2,3\n%s"
           "  # p06 , T2 ,1,2,3,4,5,6, 1 , 2 , 3 \n", head, row3);
  twf_test_write_file(twf_test_tmppath("rowlike.csv"), text);
  twf_warnings_init(&w);
  c = read_ok(twf_test_tmppath("rowlike.csv"), m, NULL, &w);
  ck_assert_uint_eq(c->n_poses, 3);
  ck_assert_uint_eq(w.count, 1);
  ck_assert_int_eq(w.items[0].line, 4);
  ck_assert_int_eq(w.items[0].column, 1);
  ck_assert_ptr_nonnull(strstr(w.items[0].message, "2 comment lines below the header have the "
                                                   "shape of a data row and are skipped, the "
                                                   "first with pose id '#p05'"));
  twf_campaign_free(c);
  twf_warnings_clear(&w);
  twf_test_tmpdir_remove();
  twf_model_free(m);
}
END_TEST

/* Millimetre data declared as metres: the measured points spread a
 * thousand times farther than the arm reaches. The campaign is simulated
 * on tf4p and centred on the tracker's origin, so that every coordinate
 * stays below the 1 km range check and only the spread tells. */
START_TEST(test_units_against_reach)
{
  twf_model *m = test_arm_model(ARM_TF4P);
  twf_simulate_options so = twf_simulate_default_options();
  twf_pose I;
  twf_campaign *c, *back;
  twf_error err;
  double mean[3] = { 0, 0, 0 }, maxabs = 0;
  size_t k;
  char *text, *u;
  FILE *f;
  twf_test_tmpdir_make("check_campaign");
  twf_pose_identity(&I);
  so.n_poses = 20;
  c = twf_simulate_campaign(m, &I, &so, &err);
  ck_assert_ptr_nonnull(c);
  for (k = 0; k < c->n_meas; k++)
    for (int a = 0; a < 3; a++)
      mean[a] += c->meas[k].pos[a] / (double)c->n_meas;
  for (k = 0; k < c->n_meas; k++)
    for (int a = 0; a < 3; a++) {
      c->meas[k].pos[a] -= mean[a];
      maxabs = fmax(maxabs, fabs(c->meas[k].pos[a]));
    }
  ck_assert(maxabs < 1.0); /* below 1000 mm */
  f = fopen(twf_test_tmppath("mm.csv"), "w");
  ck_assert_int_eq(twf_campaign_write(c, m, TWF_LENGTH_MM, TWF_ANGLE_DEG, f, &err), TWF_OK);
  fclose(f);
  back = read_ok(twf_test_tmppath("mm.csv"), m, NULL, NULL);
  twf_campaign_free(back);
  text = twf_test_slurp(twf_test_tmppath("mm.csv"));
  u = strstr(text, "length=mm");
  ck_assert_ptr_nonnull(u);
  memmove(u + 8, u + 9, strlen(u + 9) + 1); /* length=m */
  twf_test_write_file(twf_test_tmppath("as-m.csv"), text);
  ck_assert_ptr_null(twf_campaign_read(twf_test_tmppath("as-m.csv"), m, NULL, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_UNITS);
  ck_assert_ptr_nonnull(strstr(err.message, "check the units: the measured points spread over"));
  ck_assert_ptr_nonnull(strstr(err.hint, "length="));
  free(text);
  twf_campaign_free(c);
  twf_test_tmpdir_remove();
  twf_model_free(m);
}
END_TEST

/* The campaign carries the size and SHA-256 of the bytes each reader
 * parsed, in the order read (reference digests: Python's hashlib). A
 * file replaced after reading keeps the digest of what was read. */
START_TEST(test_input_digests)
{
  static const char joints[] = "pose,j1,j2,j3,j4,j5,j6\n"
                               "p01,12.5,-33.25,41.125,-7.75,28.375,93.5\n";
  static const char want[] =
      "7a7632f1e4d3370803b111c3b16a3a294aa0a6ce57478076d784581a94874eb3";
  twf_model *m = tf6s();
  twf_campaign *c;
  twf_test_tmpdir_make("check_campaign");
  twf_test_write_file(twf_test_tmppath("j.csv"), joints);
  c = twf_campaign_read_joints(twf_test_tmppath("j.csv"), m, NULL, NULL, NULL);
  ck_assert_ptr_nonnull(c);
  twf_test_write_file(twf_test_tmppath("j.csv"), "replaced\n");
  ck_assert_uint_eq(c->n_inputs, 1);
  ck_assert_str_eq(c->inputs[0].sha256, want);
  ck_assert(c->inputs[0].size == 64);
  twf_campaign_free(c);
  twf_test_write_file(twf_test_tmppath("j.csv"), joints);
  twf_test_write_file(twf_test_tmppath("p.csv"), "pose,target,x,y,z\np01,T1,1,2,3\np01,T2,1,2,4\n");
  c = read_pair_ok(twf_test_tmppath("j.csv"), twf_test_tmppath("p.csv"), m, NULL, NULL);
  ck_assert_uint_eq(c->n_inputs, 2);
  ck_assert_str_eq(c->inputs[0].sha256, want);
  ck_assert_uint_eq(strlen(c->inputs[1].sha256), 64);
  ck_assert(c->inputs[1].size == 44);
  twf_campaign_free(c);
  c = twf_campaign_alloc(6, 1, 1);
  ck_assert_uint_eq(c->n_inputs, 0);
  twf_campaign_free(c);
  twf_test_tmpdir_remove();
  twf_model_free(m);
}
END_TEST

/* Load: a campaign of 200,000 poses and 3 targets (600,000 rows, about
 * 60 MB) reads within the memory twistfit-data(5) states: the text read
 * whole plus the campaign, at most 4 times the file's size. The reader
 * runs in a child process, whose peak resident size (getrusage) is
 * compared before and after; not under AddressSanitizer, whose shadow
 * memory and quarantine change the figures (there the reading is
 * checked only). */
#if defined(__SANITIZE_ADDRESS__)
#define TWF_TEST_ASAN 1
#elif defined(__has_feature)
#if __has_feature(address_sanitizer)
#define TWF_TEST_ASAN 1
#endif
#endif

START_TEST(test_load_200k_poses)
{
  enum { N_POSES = 200000 };
  twf_model *m = tf6s();
  FILE *f;
  size_t p;
  long size;
  int fds[2], status;
  pid_t pid;
  long grown_kib = -1;
  twf_test_tmpdir_make("check_campaign");
  f = fopen(twf_test_tmppath("large.csv"), "w");
  ck_assert_ptr_nonnull(f);
  fputs("# units: length=mm angle=deg\npose,target,j1,j2,j3,j4,j5,j6,x,y,z\n", f);
  for (p = 0; p < N_POSES; p++) {
    double a = -150.0 + 300.0 * (double)(p % 9973) / 9973.0;
    for (int t = 1; t <= 3; t++)
      fprintf(f, "p%06zu,T%d,%.4f,%.4f,12.5,-7.75,28.375,%.4f,%.4f,%.4f,%.4f\n", p, t,
              a, a / 3.0, -a, 1500.0 + a, -200.0 + t, 900.0 - a / 2.0);
  }
  size = ftell(f);
  ck_assert_int_eq(fclose(f), 0);
  ck_assert(pipe(fds) == 0);
  pid = fork();
  ck_assert(pid >= 0);
  if (pid == 0) {
    struct rusage before, after;
    twf_error err;
    twf_campaign *c;
    long out[3];
    close(fds[0]);
    getrusage(RUSAGE_SELF, &before);
    c = twf_campaign_read(twf_test_tmppath("large.csv"), m, NULL, NULL, &err);
    getrusage(RUSAGE_SELF, &after);
    out[0] = c != NULL && c->n_poses == N_POSES && c->n_meas == 3 * N_POSES &&
             strcmp(c->pose_ids[N_POSES - 1], "p199999") == 0;
    out[1] = after.ru_maxrss - before.ru_maxrss; /* KiB on Linux */
    out[2] = c != NULL ? 0 : (long)err.line;
    if (write(fds[1], out, sizeof out) != (ssize_t)sizeof out)
      _exit(2);
    _exit(0);
  }
  close(fds[1]);
  {
    long in[3] = { 0, 0, 0 };
    ck_assert(read(fds[0], in, sizeof in) == (ssize_t)sizeof in);
    close(fds[0]);
    ck_assert(waitpid(pid, &status, 0) == pid);
    ck_assert_msg(in[0] == 1, "the large campaign was not read (error at line %ld)", in[2]);
    grown_kib = in[1];
  }
#ifndef TWF_TEST_ASAN
  /* valgrind's own bookkeeping counts in the peak (CI's valgrind step and
   * configure --enable-valgrind set this): there only correctness holds */
  if (getenv("TWF_TEST_UNDER_VALGRIND") == NULL)
    ck_assert_msg((double)grown_kib * 1024.0 <= 4.0 * (double)size,
                  "reading %ld bytes grew the peak memory by %ld KiB, more than 4 times the file",
                  size, grown_kib);
#endif
  fprintf(stderr, "check_campaign: 200,000 poses: %ld bytes read, peak memory grew by %ld KiB\n",
          size, grown_kib);
  twf_test_tmpdir_remove();
  twf_model_free(m);
}
END_TEST

/* ------------------------------------------------------------------ */
/* The examples of twistfit-data(5) are read as they stand             */
/* ------------------------------------------------------------------ */

/* The k-th .nf/.fi block of the man page, roff escapes undone, written to
 * a file in the test folder. */
static void man_example(const char *page, int k, const char *name)
{
  const char *s = page, *e;
  FILE *f;
  int i;
  for (i = 0; i <= k; i++) {
    s = strstr(s, "\n.nf\n");
    ck_assert_ptr_nonnull(s);
    s += 5;
  }
  e = strstr(s, ".fi\n");
  ck_assert_ptr_nonnull(e);
  f = fopen(twf_test_tmppath(name), "w");
  ck_assert_ptr_nonnull(f);
  for (; s < e; s++) {
    if (s[0] == '\\' && s[1] == '-')
      s++;
    fputc(*s, f);
  }
  fclose(f);
}

START_TEST(test_man_examples)
{
  twf_model *m = tf6s();
  char *page = twf_test_slurp(data("man/twistfit-data.5"));
  twf_warnings w;
  twf_campaign *a, *b;
  twf_test_tmpdir_make("check_campaign");
  man_example(page, 0, "one.csv");
  man_example(page, 1, "joints.csv");
  man_example(page, 2, "points.csv");
  twf_warnings_init(&w);
  a = read_ok(twf_test_tmppath("one.csv"), m, NULL, &w);
  b = read_pair_ok(twf_test_tmppath("joints.csv"), twf_test_tmppath("points.csv"), m, NULL, &w);
  ck_assert_uint_eq(w.count, 0);
  ck_assert_uint_eq(a->n_poses, 2);
  ck_assert_uint_eq(a->n_meas, 4);
  ck_assert_int_eq(a->meas[3].set, TWF_SET_CHECK);
  ck_assert_close(a->meas[3].pos[2], 1.3544487, 1e-15);
  assert_same(a, b, 0.0, 0);
  twf_campaign_free(a);
  twf_campaign_free(b);
  twf_warnings_clear(&w);
  free(page);
  twf_test_tmpdir_remove();
  twf_model_free(m);
}
END_TEST

static Suite *campaign_suite(void)
{
  Suite *s = suite_create("campaign");
  TCase *tc = tcase_create("read");
  tcase_add_test(tc, test_one_file_values);
  tcase_add_test(tc, test_pair_equals_one);
  tcase_add_test(tc, test_pair_set_precedence);
  tcase_add_test(tc, test_joints_only);
  tcase_add_test(tc, test_pair_pose_without_points);
  tcase_add_test(tc, test_delimiters);
  tcase_add_test(tc, test_bom_crlf_comments);
  tcase_add_test(tc, test_units_declared);
  tcase_add_test(tc, test_units_override);
  tcase_add_test(tc, test_one_unit_conversion);
  tcase_add_test(tc, test_six_d);
  tcase_add_test(tc, test_limit_warning);
  tcase_add_test(tc, test_limit_error_and_tolerance);
  tcase_add_test(tc, test_radians_as_degrees);
  tcase_add_test(tc, test_degrees_as_radians);
  tcase_add_test(tc, test_prismatic_units_hint);
  tcase_add_test(tc, test_bad_campaigns);
  tcase_add_test(tc, test_arguments);
  tcase_add_test(tc, test_many_poses);
  tcase_add_test(tc, test_line_limit);
  tcase_add_test(tc, test_size_limit);
  tcase_add_test(tc, test_rowlike_comment_warns);
  tcase_add_test(tc, test_units_against_reach);
  tcase_add_test(tc, test_input_digests);
  tcase_add_test(tc, test_man_examples);
  suite_add_tcase(s, tc);
  tc = tcase_create("write");
  tcase_add_test(tc, test_roundtrip);
  tcase_add_test(tc, test_write_groups_by_pose);
  suite_add_tcase(s, tc);
  /* about 2 s; more under the sanitizers */
  tc = tcase_create("load");
  tcase_set_timeout(tc, 300);
  tcase_add_test(tc, test_load_200k_poses);
  suite_add_tcase(s, tc);
  return s;
}

int main(void)
{
  return twf_test_run(campaign_suite());
}
