/* check_modelfile.c: model files (src/lib/modelfile.c, twistfit-model(5)).
 *
 * What is checked against what:
 *  - read(write(m)) reproduces m's forward kinematics to 1e-12 relative,
 *    for every sample and for random perturbed models in every unit; the
 *    text is stable (writing what was read gives the same bytes);
 *  - the DH sample files and the DH tables below (the sample arms' own
 *    tables, invented for the project) give the same forward kinematics as
 *    the axis-and-point samples, which were written by hand from them;
 *  - every file of tests/bad-models/ gives the status, line and message
 *    fragment of its row in tests/bad-models/expected.tsv;
 *  - reader details (indentation, CR LF, byte order mark, inline comments,
 *    the 198-character line, names longer than inih's 49-character buffers)
 *    and every refusal of the writer;
 *  - the examples of twistfit-model(5) load and agree with each other. */
#include "testutil.h"
#include "twistfit.h"
/* the first pass's key-comparison counter (test_many_asbuilt_keys) */
#include "io/modelfile_internal.h"

#include <dirent.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#define PI 3.14159265358979323846
#define D2R (PI / 180.0)
#define SEED 0x6d6f64656cULL
#define FK_TOL 1e-12

static const char *const axis_samples[] = { "tf6s", "tf6p", "tf7", "tf4p" };
static const char *const all_samples[] = { "tf6s", "tf6p", "tf7", "tf4p",
                                           "tf6s-dh", "tf7-mdh" };

/* ------------------------------------------------------------ helpers */

static char *sample_path(const char *name)
{
  static char buf[4096];
  char rel[256];
  snprintf(rel, sizeof rel, "samples/%s.ini", name);
  snprintf(buf, sizeof buf, "%s", twf_test_srcpath(rel));
  return buf;
}

static twf_model *read_ok(const char *path, twf_warnings *w)
{
  twf_error err;
  twf_model *m = twf_model_read(path, w, &err);
  ck_assert_msg(m != NULL, "%s:%ld: %s (%s)", path, err.line, err.message,
                err.hint);
  ck_assert_int_eq(err.status, TWF_OK);
  return m;
}

/* A fresh temporary file name; the file exists (empty). */
static void temp_name(char *buf, size_t size)
{
  const char *dir = getenv("TMPDIR");
  int fd;
  snprintf(buf, size, "%s/twf-modelfile-XXXXXX", dir && *dir ? dir : "/tmp");
  fd = mkstemp(buf);
  ck_assert_msg(fd >= 0, "mkstemp: %s", strerror(errno));
  close(fd);
}

static void write_text(const char *path, const char *text)
{
  FILE *f = fopen(path, "wb");
  ck_assert_msg(f != NULL, "%s: %s", path, strerror(errno));
  ck_assert_int_eq(fputs(text, f) >= 0, 1);
  ck_assert_int_eq(fclose(f), 0);
}

/* Write m to a temporary file and return its text (caller frees) and,
 * when back is not NULL, the model read back from it. */
static char *roundtrip(const twf_model *m, twf_model **back)
{
  char path[4096];
  twf_error err;
  FILE *f;
  char *text;
  temp_name(path, sizeof path);
  f = fopen(path, "w");
  ck_assert_ptr_nonnull(f);
  ck_assert_msg(twf_model_write(m, f, &err) == TWF_OK, "write: %s",
                err.message);
  ck_assert_int_eq(fclose(f), 0);
  text = twf_test_slurp(path);
  if (back != NULL) {
    twf_warnings w;
    twf_warnings_init(&w);
    *back = twf_model_read(path, &w, &err);
    ck_assert_msg(*back != NULL, "reading back line %ld: %s\n%s", err.line,
                  err.message, text);
    ck_assert_msg(w.count == 0, "reading back warned: %s", w.items[0].message);
    twf_warnings_clear(&w);
  }
  remove(path);
  return text;
}

static void random_q(twf_test_rng *rng, const twf_model *m, double *q)
{
  for (size_t i = 0; i < m->n_joints; i++) {
    const twf_joint *j = &m->joints[i];
    if (j->has_limits)
      q[i] = twf_test_uniform(rng, j->limit_lo, j->limit_hi);
    else if (j->type == TWF_JOINT_REVOLUTE)
      q[i] = twf_test_uniform(rng, -PI, PI);
    else
      q[i] = twf_test_uniform(rng, -0.3, 0.3);
  }
}

/* Forward kinematics of a and b agree at count random configurations. */
static void assert_same_fk(const twf_model *a, const twf_model *b,
                           twf_test_rng *rng, int count, double tol,
                           const char *what, uint64_t seed)
{
  double q[16];
  ck_assert_uint_eq(a->n_joints, b->n_joints);
  ck_assert_uint_le(a->n_joints, 16);
  for (int k = 0; k < count; k++) {
    twf_pose Ta, Tb;
    random_q(rng, a, q);
    if (k == 0)
      memset(q, 0, sizeof q);  /* the home pose itself */
    twf_model_fk(a, q, NULL, &Ta);
    twf_model_fk(b, q, NULL, &Tb);
    for (int i = 0; i < 3; i++) {
      ck_assert_msg(twf_test_close(Ta.p[i], Tb.p[i], tol),
                    "%s (seed %#llx, configuration %d): p[%d] %.17g vs %.17g",
                    what, (unsigned long long)seed, k, i, Ta.p[i], Tb.p[i]);
      for (int j = 0; j < 3; j++)
        ck_assert_msg(twf_test_close(Ta.R[i][j], Tb.R[i][j], tol),
                      "%s (seed %#llx, configuration %d): R[%d][%d] %.17g vs "
                      "%.17g", what, (unsigned long long)seed, k, i, j,
                      Ta.R[i][j], Tb.R[i][j]);
    }
  }
}

/* Everything but the geometry survives the round trip exactly; the
 * geometry to tol. */
static void assert_same_model(const twf_model *a, const twf_model *b,
                              double tol, const char *what)
{
  ck_assert_str_eq(a->name, b->name);
  ck_assert_int_eq(a->length_unit, b->length_unit);
  ck_assert_int_eq(a->angle_unit, b->angle_unit);
  ck_assert_uint_eq(a->n_joints, b->n_joints);
  ck_assert_uint_eq(a->n_targets, b->n_targets);
  ck_assert_uint_eq(a->n_meta, b->n_meta);
  for (size_t i = 0; i < a->n_joints; i++) {
    const twf_joint *x = &a->joints[i], *y = &b->joints[i];
    ck_assert_str_eq(x->name, y->name);
    ck_assert_int_eq(x->type, y->type);
    ck_assert_int_eq(x->has_limits, y->has_limits);
    for (int k = 0; k < 6; k++)
      ck_assert_msg(twf_test_close(x->twist[k], y->twist[k], tol),
                    "%s: joint %s twist[%d] %.17g vs %.17g", what, x->name, k,
                    x->twist[k], y->twist[k]);
    if (x->has_limits) {
      ck_assert_close(x->limit_lo, y->limit_lo, tol);
      ck_assert_close(x->limit_hi, y->limit_hi, tol);
    }
    ck_assert_close(x->offset, y->offset, tol);
    ck_assert_close(x->scale, y->scale, tol);
  }
  for (size_t i = 0; i < a->n_targets; i++) {
    ck_assert_str_eq(a->targets[i].name, b->targets[i].name);
    ck_assert_int_eq(a->targets[i].offset_known, b->targets[i].offset_known);
    if (a->targets[i].offset_known)
      for (int k = 0; k < 3; k++)
        ck_assert_close(a->targets[i].offset[k], b->targets[i].offset[k], tol);
  }
  for (size_t i = 0; i < a->n_meta; i++) {
    ck_assert_str_eq(a->meta[i].key, b->meta[i].key);
    ck_assert_str_eq(a->meta[i].value, b->meta[i].value);
  }
}

static void assert_lines_fit(const char *text)
{
  long line = 1;
  size_t len = 0;
  for (const char *p = text; *p; p++) {
    if (*p == '\n') {
      line++;
      len = 0;
      continue;
    }
    len++;
    ck_assert_msg(len <= TWF_MODEL_LINE_MAX, "written line %ld is longer "
                  "than %d characters", line, TWF_MODEL_LINE_MAX);
  }
}

/* ------------------------------------------------- samples, round trip */

START_TEST(test_samples_roundtrip)
{
  uint64_t seed = twf_test_seed(SEED);
  twf_test_rng rng;
  twf_test_rng_init(&rng, seed);
  for (size_t s = 0; s < sizeof all_samples / sizeof all_samples[0]; s++) {
    twf_warnings w;
    twf_model *m, *back, *again;
    char *text, *text2;
    twf_warnings_init(&w);
    m = read_ok(sample_path(all_samples[s]), &w);
    ck_assert_msg(w.count == 0, "%s warns: %s", all_samples[s],
                  w.items[0].message);
    twf_warnings_clear(&w);
    ck_assert_uint_ge(m->n_joints, 4);
    ck_assert_uint_ge(m->n_targets, 2);
    text = roundtrip(m, &back);
    assert_lines_fit(text);
    assert_same_model(m, back, FK_TOL, all_samples[s]);
    assert_same_fk(m, back, &rng, 40, FK_TOL, all_samples[s], seed);
    /* Numbers that came from a file are written back exactly (shortest
     * decimal giving the same double), so from the second write on the
     * text is a fixed point. Not from the first: a DH-derived double in
     * metres need not be any double in mm divided by 1000. */
    {
      twf_model *third;
      char *text3;
      text2 = roundtrip(back, &again);
      text3 = roundtrip(again, &third);
      ck_assert_str_eq(text2, text3);
      free(text3);
      twf_model_free(third);
    }
    free(text);
    free(text2);
    twf_model_free(m);
    twf_model_free(back);
    twf_model_free(again);
  }
}
END_TEST

/* Known answers from the text of the samples (values in mm and deg). */
START_TEST(test_sample_values)
{
  twf_model *m = read_ok(sample_path("tf6s"), NULL);
  const double rows[3][3] = { { 0, 0, 1 }, { 0, -1, 0 }, { 1, 0, 0 } };
  ck_assert_str_eq(m->name, "tf6s");
  ck_assert_int_eq(m->length_unit, TWF_LENGTH_MM);
  ck_assert_int_eq(m->angle_unit, TWF_ANGLE_DEG);
  ck_assert_uint_eq(m->n_joints, 6);
  ck_assert_str_eq(m->joints[1].name, "j2");
  /* "point = 150 0 450": the doubles nearest 0.15 m and 0.45 m. */
  ck_assert(m->joints[1].point[0] == 0.15);
  ck_assert(m->joints[1].point[2] == 0.45);
  ck_assert(m->joints[1].twist[1] == 1.0);
  /* v = -w x q = -(0,1,0) x (0.15,0,0.45) = (-0.45, 0, 0.15) */
  ck_assert_close(m->joints[1].twist[3], -0.45, 1e-15);
  ck_assert_close(m->joints[1].twist[5], 0.15, 1e-15);
  ck_assert_close(m->joints[1].limit_lo, -100.0 * D2R, 1e-15);
  ck_assert_close(m->joints[1].limit_hi, 145.0 * D2R, 1e-15);
  ck_assert(m->joints[1].scale == 1.0 && m->joints[1].offset == 0.0);
  for (int i = 0; i < 3; i++)
    for (int j = 0; j < 3; j++)
      ck_assert(m->home.R[i][j] == rows[i][j]);
  ck_assert(m->home.p[0] == 0.885 && m->home.p[2] == 1.175);
  ck_assert_str_eq(m->targets[1].name, "T2");
  ck_assert(m->targets[1].offset_known);
  ck_assert(m->targets[1].offset[0] == -0.03);
  twf_model_free(m);

  /* tf6p: rpy_fixed_xyz = 90 0 0 is Rx(90 deg). */
  m = read_ok(sample_path("tf6p"), NULL);
  {
    const double rx[3][3] = { { 1, 0, 0 }, { 0, 0, -1 }, { 0, 1, 0 } };
    for (int i = 0; i < 3; i++)
      for (int j = 0; j < 3; j++)
        ck_assert_close(m->home.R[i][j], rx[i][j], 1e-15);
  }
  twf_model_free(m);

  /* tf4p: the prismatic joint, its limits in mm. */
  m = read_ok(sample_path("tf4p"), NULL);
  ck_assert_int_eq(m->joints[2].type, TWF_JOINT_PRISMATIC);
  ck_assert(m->joints[2].twist[0] == 0.0 && m->joints[2].twist[5] == -1.0);
  ck_assert(m->joints[2].limit_lo == 0.0 && m->joints[2].limit_hi == 0.2);
  twf_model_free(m);
}
END_TEST

/* ------------------------------------------ DH forms vs axis-and-point */

START_TEST(test_dh_files_match_axis_files)
{
  uint64_t seed = twf_test_seed(SEED + 1);
  twf_test_rng rng;
  const char *pairs[2][2] = { { "tf6s-dh", "tf6s" }, { "tf7-mdh", "tf7" } };
  twf_test_rng_init(&rng, seed);
  for (int k = 0; k < 2; k++) {
    twf_model *dh = read_ok(sample_path(pairs[k][0]), NULL);
    twf_model *ax = read_ok(sample_path(pairs[k][1]), NULL);
    char what[64];
    snprintf(what, sizeof what, "%s vs %s", pairs[k][0], pairs[k][1]);
    assert_same_fk(dh, ax, &rng, 200, FK_TOL, what, seed);
    /* Limits, names, targets agree too; scale and offset are nominal. */
    for (size_t i = 0; i < dh->n_joints; i++) {
      ck_assert_str_eq(dh->joints[i].name, ax->joints[i].name);
      ck_assert_close(dh->joints[i].limit_lo, ax->joints[i].limit_lo, 1e-15);
      ck_assert_close(dh->joints[i].limit_hi, ax->joints[i].limit_hi, 1e-15);
      ck_assert(dh->joints[i].scale == 1.0 && dh->joints[i].offset == 0.0);
    }
    for (size_t i = 0; i < dh->n_targets; i++)
      for (int c = 0; c < 3; c++)
        ck_assert(dh->targets[i].offset[c] == ax->targets[i].offset[c]);
    twf_model_free(dh);
    twf_model_free(ax);
  }
}
END_TEST

/* The sample arms' DH tables (lengths m, angles deg), as designed for the
 * project; the axis-and-point samples were written by hand from them. */
typedef struct arm_row { int prismatic; double a, alpha, d, theta; } arm_row;
typedef struct arm {
  const char *name;
  twf_dh_convention conv;
  size_t n;
  arm_row rows[7];
  double flange_z;
} arm;

static const arm arms[] = {
  { "tf6s", TWF_DH_STANDARD, 6,
    { { 0, 0.150, -90, 0.450, 0 }, { 0, 0.610, 0, 0, -90 },
      { 0, 0.115, -90, 0, 0 }, { 0, 0, 90, 0.640, 0 },
      { 0, 0, -90, 0, 0 }, { 0, 0, 0, 0.095, 0 } }, 0.0 },
  { "tf6p", TWF_DH_STANDARD, 6,
    { { 0, 0, 90, 0.171, 0 }, { 0, -0.480, 0, 0, 0 },
      { 0, -0.405, 0, 0, 0 }, { 0, 0, 90, 0.118, 0 },
      { 0, 0, -90, 0.108, 0 }, { 0, 0, 0, 0.086, 0 } }, 0.0 },
  /* modified DH: a and alpha are a_(i-1) and alpha_(i-1) */
  { "tf7", TWF_DH_MODIFIED, 7,
    { { 0, 0, 0, 0.340, 0 }, { 0, 0, -90, 0, 0 }, { 0, 0, 90, 0.400, 0 },
      { 0, 0.060, 90, 0, 0 }, { 0, -0.060, -90, 0.390, 0 },
      { 0, 0, 90, 0, 0 }, { 0, 0.080, 90, 0, 0 } }, 0.110 },
  { "tf4p", TWF_DH_STANDARD, 4,
    { { 0, 0.325, 0, 0.200, 0 }, { 0, 0.275, 180, 0, 0 },
      { 1, 0, 0, 0, 0 }, { 0, 0, 0, 0.050, 0 } }, 0.0 },
};

START_TEST(test_dh_tables_match_axis_files)
{
  uint64_t seed = twf_test_seed(SEED + 2);
  twf_test_rng rng;
  twf_test_rng_init(&rng, seed);
  for (size_t k = 0; k < sizeof arms / sizeof arms[0]; k++) {
    const arm *a = &arms[k];
    twf_model *file = read_ok(sample_path(a->name), NULL);
    twf_model *ref = twf_model_alloc(a->n, 0);
    twf_dh_row rows[7];
    twf_pose F;
    twf_error err;
    ck_assert_ptr_nonnull(ref);
    for (size_t i = 0; i < a->n; i++) {
      rows[i].a = a->rows[i].a;
      rows[i].alpha = a->rows[i].alpha * D2R;
      rows[i].d = a->rows[i].d;
      rows[i].theta = a->rows[i].theta * D2R;
      rows[i].type = a->rows[i].prismatic ? TWF_JOINT_PRISMATIC
                                          : TWF_JOINT_REVOLUTE;
      ref->joints[i].has_limits = file->joints[i].has_limits;
      ref->joints[i].limit_lo = file->joints[i].limit_lo;
      ref->joints[i].limit_hi = file->joints[i].limit_hi;
    }
    twf_pose_identity(&F);
    F.p[2] = a->flange_z;
    ck_assert_msg(twf_model_set_from_dh(ref, rows, a->n, a->conv, &F, &err) ==
                  TWF_OK, "%s", err.message);
    for (size_t i = 0; i < a->n; i++)
      ck_assert_int_eq(ref->joints[i].type, file->joints[i].type);
    assert_same_fk(ref, file, &rng, 200, FK_TOL, a->name, seed);
    twf_model_free(ref);
    twf_model_free(file);
  }
}
END_TEST

/* -------------------------------------------- random perturbed models */

static void perturb(twf_test_rng *rng, twf_model *m)
{
  for (size_t i = 0; i < m->n_joints; i++) {
    twf_joint *j = &m->joints[i];
    double e[6];
    twf_pose E;
    /* Move the joint line by a small rigid motion, its point with it. */
    for (int k = 0; k < 6; k++)
      e[k] = twf_test_uniform(rng, -0.02, 0.02);
    twf_se3_exp(e, 1.0, &E);
    twf_se3_adjoint_apply(&E, j->twist, j->twist);
    twf_pose_apply(&E, j->point, j->point);
    j->offset = twf_test_uniform(rng, -0.013, 0.013);
    j->scale = 1.0 + twf_test_uniform(rng, -3e-4, 3e-4);
    j->has_limits = twf_test_uniform(rng, 0, 1) < 0.8;
    j->limit_lo = twf_test_uniform(rng, -3.1, -0.01);
    j->limit_hi = twf_test_uniform(rng, 0.01, 3.1);
  }
  {
    double e[6];
    twf_pose E;
    for (int k = 0; k < 6; k++)
      e[k] = twf_test_uniform(rng, -0.5, 0.5);
    twf_se3_exp(e, 1.0, &E);
    twf_pose_mul(&m->home, &E, &m->home);
  }
  for (size_t i = 0; i < m->n_targets; i++) {
    m->targets[i].offset_known = twf_test_uniform(rng, 0, 1) < 0.7;
    for (int k = 0; k < 3; k++)
      m->targets[i].offset[k] = twf_test_uniform(rng, -0.0873, 0.0873);
  }
  m->length_unit = (twf_length_unit)(int)twf_test_uniform(rng, 0, 3.999);
  m->angle_unit = (twf_angle_unit)(int)twf_test_uniform(rng, 0, 2.999);
}

START_TEST(test_random_models_roundtrip)
{
  uint64_t seed = twf_test_seed(SEED + 3);
  twf_test_rng rng;
  twf_test_rng_init(&rng, seed);
  for (int trial = 0; trial < 240; trial++) {
    const char *name = axis_samples[trial % 4];
    twf_model *m = read_ok(sample_path(name), NULL);
    twf_model *back;
    char *text, what[64];
    perturb(&rng, m);
    ck_assert_int_eq(twf_model_meta_set(m, "tilt.j2-mrad", "0.0123"), TWF_OK);
    text = roundtrip(m, &back);
    assert_lines_fit(text);
    snprintf(what, sizeof what, "random %s #%d (%s, %s)", name, trial,
             twf_length_unit_name(m->length_unit),
             twf_angle_unit_name(m->angle_unit));
    assert_same_model(m, back, FK_TOL, what);
    assert_same_fk(m, back, &rng, 10, FK_TOL, what, seed);
    free(text);
    twf_model_free(m);
    twf_model_free(back);
  }
}
END_TEST

/* Values at the ends of the double range still fit a line and come back. */
START_TEST(test_extreme_values_roundtrip)
{
  twf_model *m = read_ok(sample_path("tf4p"), NULL), *back;
  char *text;
  m->length_unit = TWF_LENGTH_UM;
  m->angle_unit = TWF_ANGLE_MRAD;
  m->home.p[0] = -1.2345678901234567e-300;
  m->home.p[1] = 9.8765432109876543e+2; /* up to TWF_READ_LENGTH_MAX */
  m->home.p[2] = -2.2250738585072014e-308;
  m->targets[0].offset[0] = -4.9406564584124654e-324; /* subnormal */
  m->joints[0].limit_lo = -9.9999999999999982e+3; /* up to TWF_READ_ANGLE_MAX */
  /* As a file gives it: the double nearest -1.1111111111111111e-197 mrad
   * divided by 1000 (not every double in rad is one of those). */
  m->joints[3].offset = -1.1111111111111111e-197 / 1e3;
  text = roundtrip(m, &back);
  assert_lines_fit(text);
  ck_assert(back->home.p[0] == m->home.p[0]);
  ck_assert(back->home.p[1] == m->home.p[1]);
  ck_assert(back->home.p[2] == m->home.p[2]);
  ck_assert(back->targets[0].offset[0] == m->targets[0].offset[0]);
  ck_assert(back->joints[0].limit_lo == m->joints[0].limit_lo);
  ck_assert(back->joints[3].offset == m->joints[3].offset);
  /* Beyond the range the reader accepts, the writer refuses too. */
  {
    twf_error err;
    FILE *f = tmpfile();
    ck_assert_ptr_nonnull(f);
    m->joints[0].limit_lo = -1.7976931348623157e+300;
    ck_assert_int_eq(twf_model_write(m, f, &err), TWF_ERR_INVALID);
    m->joints[0].limit_lo = -1.0;
    m->home.p[1] = 9.8765432109876543e+250;
    ck_assert_int_eq(twf_model_write(m, f, &err), TWF_ERR_INVALID);
    ck_assert_int_eq(ftell(f), 0);
    fclose(f);
  }
  free(text);
  twf_model_free(m);
  twf_model_free(back);
}
END_TEST

/* ------------------------------------------------------- bad models */

static int status_from_name(const char *s, twf_status *out)
{
  static const struct { const char *name; twf_status st; } names[] = {
    { "TWF_OK", TWF_OK }, { "TWF_ERR_NOMEM", TWF_ERR_NOMEM },
    { "TWF_ERR_IO", TWF_ERR_IO }, { "TWF_ERR_SYNTAX", TWF_ERR_SYNTAX },
    { "TWF_ERR_VALUE", TWF_ERR_VALUE }, { "TWF_ERR_MISSING", TWF_ERR_MISSING },
    { "TWF_ERR_DUPLICATE", TWF_ERR_DUPLICATE },
    { "TWF_ERR_UNKNOWN", TWF_ERR_UNKNOWN }, { "TWF_ERR_UNITS", TWF_ERR_UNITS },
  };
  for (size_t i = 0; i < sizeof names / sizeof names[0]; i++)
    if (strcmp(s, names[i].name) == 0) {
      *out = names[i].st;
      return 0;
    }
  return -1;
}

static void copy_str(char *dst, const char *src, size_t size)
{
  snprintf(dst, size, "%s", src);
}

#define MAX_CASES 512

typedef struct bad_case {
  char file[256];
  twf_status status;
  long line;
  char fragment[512];
} bad_case;

static size_t read_expected(bad_case *cases)
{
  char path[4096], buf[2048];
  FILE *f;
  size_t n = 0;
  long lineno = 0;
  snprintf(path, sizeof path, "%s",
           twf_test_srcpath("tests/bad-models/expected.tsv"));
  f = fopen(path, "r");
  ck_assert_msg(f != NULL, "%s: %s", path, strerror(errno));
  while (fgets(buf, sizeof buf, f) != NULL) {
    char *fields[4], *p = buf, *nl = strchr(buf, '\n');
    int nf = 0;
    lineno++;
    if (nl)
      *nl = '\0';
    if (buf[0] == '#' || buf[0] == '\0')
      continue;
    while (nf < 4) {
      fields[nf++] = p;
      p = strchr(p, '\t');
      if (p == NULL)
        break;
      *p++ = '\0';
    }
    ck_assert_msg(nf == 4 && p == NULL,
                  "expected.tsv:%ld: want 4 tab-separated fields", lineno);
    ck_assert_uint_lt(n, MAX_CASES);
    copy_str(cases[n].file, fields[0], sizeof cases[n].file);
    ck_assert_msg(status_from_name(fields[1], &cases[n].status) == 0,
                  "expected.tsv:%ld: unknown status %s", lineno, fields[1]);
    cases[n].line = strtol(fields[2], NULL, 10);
    copy_str(cases[n].fragment, fields[3], sizeof cases[n].fragment);
    n++;
  }
  fclose(f);
  return n;
}


START_TEST(test_bad_models)
{
  static bad_case cases[MAX_CASES];
  size_t n = read_expected(cases);
  char report[8192] = "";
  size_t nfail = 0;
  char dirpath[4096];
  DIR *dir;
  struct dirent *de;

  ck_assert_uint_ge(n, 60);  /* a broken table must not pass silently */
  for (size_t i = 0; i < n; i++) {
    char path[4096], why[600] = "";
    twf_error err;
    twf_warnings w;
    twf_model *m;
    snprintf(path, sizeof path, "%s", twf_test_srcpath("tests/bad-models"));
    strncat(path, "/", sizeof path - strlen(path) - 1);
    strncat(path, cases[i].file, sizeof path - strlen(path) - 1);
    twf_warnings_init(&w);
    m = twf_model_read(path, &w, &err);
    if (cases[i].status == TWF_OK) {
      int found = 0;
      if (m == NULL)
        snprintf(why, sizeof why, "refused: %s", err.message);
      for (size_t k = 0; m != NULL && k < w.count; k++)
        if (w.items[k].line == cases[i].line &&
            strstr(w.items[k].message, cases[i].fragment) != NULL &&
            strcmp(w.items[k].file, path) == 0)
          found = 1;
      if (m != NULL && !found)
        snprintf(why, sizeof why, "no warning '%s' at line %ld (%zu warnings%s%s)",
                 cases[i].fragment, cases[i].line, w.count,
                 w.count ? ", first: " : "", w.count ? w.items[0].message : "");
    } else if (m != NULL) {
      snprintf(why, sizeof why, "loaded, expected %s",
               twf_strerror(cases[i].status));
    } else if (err.status != cases[i].status) {
      snprintf(why, sizeof why, "status '%s', expected '%s' (%s)",
               twf_strerror(err.status), twf_strerror(cases[i].status),
               err.message);
    } else if (err.line != cases[i].line) {
      snprintf(why, sizeof why, "line %ld, expected %ld (%s)", err.line,
               cases[i].line, err.message);
    } else if (strstr(err.message, cases[i].fragment) == NULL) {
      snprintf(why, sizeof why, "message '%s' lacks '%s'", err.message,
               cases[i].fragment);
    } else if (strcmp(err.file, path) != 0) {
      snprintf(why, sizeof why, "error names file '%s'", err.file);
    } else if (err.hint[0] == '\0') {
      snprintf(why, sizeof why, "no hint for '%s'", err.message);
    } else if (strchr(err.message, '\n') != NULL ||
               err.message[strlen(err.message) - 1] == '.') {
      snprintf(why, sizeof why, "message not one line without period: '%s'",
               err.message);
    }
    if (why[0] != '\0') {
      char line[800];
      nfail++;
      snprintf(line, sizeof line, "\n  %s: %s", cases[i].file, why);
      strncat(report, line, sizeof report - strlen(report) - 1);
    }
    twf_warnings_clear(&w);
    twf_model_free(m);
  }

  /* Every file of the folder has a row, so that no case goes unchecked. */
  copy_str(dirpath, twf_test_srcpath("tests/bad-models"), sizeof dirpath);
  dir = opendir(dirpath);
  ck_assert_msg(dir != NULL, "%s: %s", dirpath, strerror(errno));
  while ((de = readdir(dir)) != NULL) {
    size_t len = strlen(de->d_name), k;
    if (len < 4 || strcmp(de->d_name + len - 4, ".ini") != 0)
      continue;
    for (k = 0; k < n; k++)
      if (strcmp(cases[k].file, de->d_name) == 0)
        break;
    if (k == n) {
      char line[400];
      nfail++;
      snprintf(line, sizeof line, "\n  %s: no row in expected.tsv",
               de->d_name);
      strncat(report, line, sizeof report - strlen(report) - 1);
    }
  }
  closedir(dir);
  ck_assert_msg(nfail == 0, "%zu of %zu bad-model cases failed:%s", nfail, n,
                report);
}
END_TEST

/* NULL warnings and NULL err are allowed. */
START_TEST(test_null_arguments)
{
  twf_error err;
  twf_model *m = twf_model_read(
      twf_test_srcpath("tests/bad-models/axis-0.05-percent.ini"), NULL, NULL);
  ck_assert_ptr_nonnull(m);
  {
    const double *w = m->joints[1].twist;
    ck_assert_close(sqrt(w[0] * w[0] + w[1] * w[1] + w[2] * w[2]), 1.0, 1e-15);
  }
  twf_model_free(m);
  ck_assert_ptr_null(twf_model_read(
      twf_test_srcpath("tests/bad-models/zero-axis.ini"), NULL, NULL));
  ck_assert_ptr_null(twf_model_read(NULL, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_INVALID);
  ck_assert_int_eq(twf_model_write(NULL, stdout, &err), TWF_ERR_INVALID);
}
END_TEST

/* --------------------------------------------------- reader details */

/* tf4p.ini rewritten with CR LF line ends, a byte order mark, indented
 * keys (inih would take them for continuation lines), tabs, inline
 * comments, and [robot] last: the same model. */
START_TEST(test_reader_tolerates_layout)
{
  twf_model *ref = read_ok(sample_path("tf4p"), NULL), *m;
  char *src = twf_test_slurp(sample_path("tf4p")), *out, path[4096];
  const char *robot = "[robot]\nname = tf4p\nlength_unit = mm\nangle_unit = deg\n";
  char *cut = strstr(src, robot);
  size_t n = 0;
  ck_assert_ptr_nonnull(cut);
  memmove(cut, cut + strlen(robot), strlen(cut + strlen(robot)) + 1);
  out = malloc(4 * strlen(src) + 512);
  ck_assert_ptr_nonnull(out);
  n += (size_t)sprintf(out + n, "\xEF\xBB\xBF; byte order mark above\r\n");
  for (char *line = strtok(src, "\n"); line; line = strtok(NULL, "\n")) {
    if (line[0] == '[' || line[0] == ';')
      n += (size_t)sprintf(out + n, "%s ; header\r\n", line);
    else
      n += (size_t)sprintf(out + n, "  \t%s\t ; an inline comment\r\n", line);
  }
  n += (size_t)sprintf(out + n, "\r\n[ robot ]\r\n\tname = tf4p\r\n"
                                "  length_unit = millimetre\r\n"
                                "angle_unit=degree\r\n");
  temp_name(path, sizeof path);
  write_text(path, out);
  m = read_ok(path, NULL);
  assert_same_model(ref, m, 0.0, "tf4p relaid");
  for (size_t i = 0; i < m->n_joints; i++)
    for (int k = 0; k < 6; k++)
      ck_assert(m->joints[i].twist[k] == ref->joints[i].twist[k]);
  remove(path);
  free(out);
  free(src);
  twf_model_free(m);
  twf_model_free(ref);
}
END_TEST

/* inih keeps section names and keys in 50-byte buffers: names of 63
 * characters must come through whole, and a line of exactly the limit
 * must be accepted. */
START_TEST(test_long_names_and_limit_line)
{
  char name[TWF_NAME_MAX], key[TWF_NAME_MAX], text[4096], path[4096];
  char value[TWF_MODEL_LINE_MAX + 1], comment[TWF_MODEL_LINE_MAX + 1];
  twf_model *m, *back;
  char *written;
  memset(name, 'n', TWF_NAME_MAX - 1);
  name[TWF_NAME_MAX - 1] = '\0';
  memset(key, 'k', TWF_NAME_MAX - 1);
  key[TWF_NAME_MAX - 1] = '\0';
  /* "key = value" of exactly TWF_MODEL_LINE_MAX characters */
  memset(value, 'v', TWF_MODEL_LINE_MAX - (TWF_NAME_MAX - 1) - 3);
  value[TWF_MODEL_LINE_MAX - (TWF_NAME_MAX - 1) - 3] = '\0';
  memset(comment, '-', TWF_MODEL_LINE_MAX);
  comment[0] = ';';
  comment[TWF_MODEL_LINE_MAX] = '\0';
  snprintf(text, sizeof text,
           "%s\n[robot]\nname = long\n[joint %s]\ntype = prismatic\n"
           "axis = 0 0 1\n[home]\nposition = 0 0 0\n"
           "quaternion_wxyz = 1 0 0 0\n[target %s]\n[asbuilt]\n%s = %s\n",
           comment, name, name, key, value);
  temp_name(path, sizeof path);
  write_text(path, text);
  m = read_ok(path, NULL);
  ck_assert_str_eq(m->joints[0].name, name);
  ck_assert_str_eq(m->targets[0].name, name);
  ck_assert(!m->targets[0].offset_known);
  ck_assert(m->joints[0].point[0] == 0.0 && m->joints[0].point[2] == 0.0);
  ck_assert_str_eq(twf_model_meta_get(m, key), value);
  written = roundtrip(m, &back);
  assert_lines_fit(written);
  assert_same_model(m, back, 0.0, "long names");
  /* The same with CR LF: the CR does not count. */
  {
    char crlf[8192];
    size_t o = 0;
    twf_model *m2;
    for (const char *p = text; *p; p++) {
      if (*p == '\n')
        crlf[o++] = '\r';
      crlf[o++] = *p;
    }
    crlf[o] = '\0';
    write_text(path, crlf);
    m2 = read_ok(path, NULL);
    assert_same_model(m, m2, 0.0, "long names, CR LF");
    twf_model_free(m2);
  }
  free(written);
  twf_model_free(back);
  twf_model_free(m);
  remove(path);
}
END_TEST

/* A line beyond the read stage's stop (TWF_CAMPAIGN_LINE_MAX) ends the
 * reading there instead of scanning an endless line. */
START_TEST(test_endless_line_stops)
{
  char path[4096];
  twf_error err;
  FILE *f;
  size_t k;
  temp_name(path, sizeof path);
  f = fopen(path, "wb");
  ck_assert_ptr_nonnull(f);
  fputs("[robot]\nname = x\n;", f);
  for (k = 0; k < 2 * (size_t)TWF_CAMPAIGN_LINE_MAX; k++)
    fputc('-', f);
  fclose(f);
  ck_assert_ptr_null(twf_model_read(path, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_SYNTAX);
  ck_assert_int_eq(err.line, 3);
  ck_assert_str_eq(err.message, "line is longer than 65536 characters, more than "
                                "the limit of 198: reading stopped there");
  ck_assert(err.hint[0] != '\0');
  remove(path);
}
END_TEST

/* twf_model_read_with: a file of exactly max_input_size bytes is read,
 * one byte more is refused. */
START_TEST(test_size_limit)
{
  char *text = twf_test_slurp(sample_path("tf6s"));
  size_t n = strlen(text);
  twf_read_options o = twf_read_default_options();
  twf_model *m;
  twf_error err;
  ck_assert(o.max_input_size == TWF_INPUT_SIZE_DEFAULT);
  o.max_input_size = n;
  m = twf_model_read_with(sample_path("tf6s"), &o, NULL, NULL, &err);
  ck_assert_ptr_nonnull(m);
  twf_model_free(m);
  o.max_input_size = n - 1;
  ck_assert_ptr_null(twf_model_read_with(sample_path("tf6s"), &o, NULL, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_VALUE);
  ck_assert_ptr_nonnull(strstr(err.message, "larger than the input size limit"));
  free(text);
}
END_TEST

/* The chain options of a URDF robot given for a model file: the model
 * is read as without them, with a warning that they do not apply. */
START_TEST(test_urdf_options_on_a_model_file_warn)
{
  twf_read_options o = twf_read_default_options();
  twf_warnings w;
  twf_model *m;
  twf_error err;
  size_t i, n = 0;
  twf_warnings_init(&w);
  m = twf_model_read_with(sample_path("tf6s"), &o, &w, NULL, &err);
  ck_assert_ptr_nonnull(m);
  for (i = 0; i < w.count; i++)
    n += strstr(w.items[i].message, "not a URDF robot") != NULL;
  ck_assert_uint_eq(n, 0);
  twf_model_free(m);
  o.urdf_tip_link = "tool0";
  m = twf_model_read_with(sample_path("tf6s"), &o, &w, NULL, &err);
  ck_assert_ptr_nonnull(m);
  for (i = 0; i < w.count; i++)
    n += strstr(w.items[i].message, "not a URDF robot") != NULL;
  ck_assert_uint_eq(n, 1);
  twf_model_free(m);
  twf_warnings_clear(&w);
}
END_TEST

/* twf_model_read_with hands out the size and SHA-256 of the bytes it
 * parsed (reference: Python's hashlib); nothing on failure. */
START_TEST(test_input_digest)
{
  static const char text[] = "[robot]\nname = x\n[joint j1]\ntype = revolute\n"
                             "axis = 0 0 1\npoint = 0 0 0\n[home]\nposition = 0 0 0\n"
                             "quaternion_wxyz = 1 0 0 0\n";
  char path[4096];
  twf_input_digest d;
  twf_error err;
  twf_model *m;
  temp_name(path, sizeof path);
  write_text(path, text);
  m = twf_model_read_with(path, NULL, NULL, &d, &err);
  ck_assert_ptr_nonnull(m);
  ck_assert_str_eq(d.sha256, "788118a0ca0978a5b21edf1a3c79c432b0e4374dafa624243aba210e9c950858");
  ck_assert(d.size == 121);
  twf_model_free(m);
  write_text(path, "[robot]\n");
  ck_assert_ptr_null(twf_model_read_with(path, NULL, NULL, &d, &err));
  ck_assert_str_eq(d.sha256, "");
  remove(path);
}
END_TEST

/* Many [asbuilt] keys read in linear time: the first pass's key
 * comparisons (a counter of the reader, not a clock) stay within a small
 * multiple of the number of keys, where a look-up per key would make
 * n^2 / 2 (800 million for 40,000 keys); every key is kept, in order, and
 * a repeat at the end is still found with its first line. */
START_TEST(test_many_asbuilt_keys)
{
  enum { N = 40000 };
  char path[4096];
  twf_error err;
  twf_model *m;
  parse_ctx c;
  FILE *f;
  temp_name(path, sizeof path);
  f = fopen(path, "w");
  ck_assert_ptr_nonnull(f);
  fputs("[robot]\nname = x\n[joint j1]\ntype = revolute\naxis = 0 0 1\npoint = 0 0 0\n"
        "[home]\nposition = 0 0 0\nquaternion_wxyz = 1 0 0 0\n[asbuilt]\n", f);
  for (int k = 0; k < N; k++)
    fprintf(f, "key%d = value %d\n", k, k);
  fclose(f);
  memset(&c, 0, sizeof c);
  c.ini.path = path;
  c.ini.err = &err;
  ck_assert_int_eq(twf_mf_parse_structure(&c), TWF_OK);
  ck_assert_uint_le(c.n_key_compares, 2 * (unsigned long)N);
  twf_mf_ctx_clear(&c);
  m = read_ok(path, NULL);
  ck_assert_uint_eq(m->n_meta, N);
  ck_assert_str_eq(m->meta[0].key, "key0");
  ck_assert_str_eq(m->meta[N - 1].key, "key39999");
  ck_assert_str_eq(twf_model_meta_get(m, "key12345"), "value 12345");
  twf_model_free(m);
  f = fopen(path, "a");
  fputs("key17 = again\n", f);
  fclose(f);
  ck_assert_ptr_null(twf_model_read(path, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_DUPLICATE);
  ck_assert_int_eq(err.line, 10 + N + 1);
  ck_assert_ptr_nonnull(strstr(err.message, "key 'key17' appears twice in [asbuilt] (first at line 28)"));
  remove(path);
}
END_TEST

/* Units: the same arm in m/rad, um/mrad and in/deg; 1 in = 25.4 mm exactly
 * (international inch, 1959: common practice, no source in the project). */
START_TEST(test_units)
{
  char path[4096];
  twf_model *m;
  temp_name(path, sizeof path);
  write_text(path,
             "[robot]\nlength_unit = in\nangle_unit = mrad\n"
             "[joint a]\ntype = revolute\naxis = 1 0 0\npoint = 0 10 0\n"
             "limits = -1500 1500\noffset = 2.5\n"
             "[joint b]\ntype = prismatic\naxis = 0 1 0\nlimits = 0 4\n"
             "offset = 0.5\n"
             "[home]\nposition = 1 2 3\nrpy_fixed_xyz = 0 0 1570.8\n");
  m = read_ok(path, NULL);
  ck_assert_str_eq(m->name, "");
  ck_assert_int_eq(m->length_unit, TWF_LENGTH_IN);
  ck_assert_int_eq(m->angle_unit, TWF_ANGLE_MRAD);
  ck_assert_close(m->joints[0].point[1], 0.254, 1e-15);
  ck_assert_close(m->joints[0].limit_hi, 1.5, 1e-15);
  ck_assert_close(m->joints[0].offset, 0.0025, 1e-15);
  ck_assert_close(m->joints[1].limit_hi, 4 * 0.0254, 1e-15);
  ck_assert_close(m->joints[1].offset, 0.5 * 0.0254, 1e-15);
  ck_assert_close(m->home.p[2], 3 * 0.0254, 1e-15);
  ck_assert_close(m->home.R[1][0], sin(1.5708), 1e-15);
  twf_model_free(m);

  write_text(path,
             "[robot]\nlength_unit = m\nangle_unit = rad\n"
             "[joint a]\ntype = revolute\ndh = 0.25 1.5 0.125 -0.5\n"
             "offset = 0.01\nscale = -1.0001\nlimits = -2 2\n"
             "[flange]\nposition = 0 0 0.1\n"
             "rotation_row1 = 1 0 0\nrotation_row2 = 0 1 0\n"
             "rotation_row3 = 0 0 1\n");
  m = read_ok(path, NULL);
  /* set_from_dh resets scale and offset: the file's must survive. */
  ck_assert(m->joints[0].offset == 0.01);
  ck_assert(m->joints[0].scale == -1.0001);
  ck_assert(m->joints[0].limit_lo == -2.0);
  twf_model_free(m);
  remove(path);
}
END_TEST

/* 4x4 homogeneous helpers for the beta test below, written out here so the
 * check does not reuse the library's DH code. */
static void h_mul(double A[4][4], const double B[4][4])
{
  double C[4][4];
  for (int i = 0; i < 4; i++)
    for (int j = 0; j < 4; j++) {
      C[i][j] = 0;
      for (int k = 0; k < 4; k++)
        C[i][j] += A[i][k] * B[k][j];
    }
  memcpy(A, C, sizeof C);
}

static void h_rot(double A[4][4], int axis, double t)
{
  double R[4][4] = { { 1, 0, 0, 0 }, { 0, 1, 0, 0 }, { 0, 0, 1, 0 }, { 0, 0, 0, 1 } };
  int i = (axis + 1) % 3, j = (axis + 2) % 3;
  R[i][i] = cos(t); R[i][j] = -sin(t);
  R[j][i] = sin(t); R[j][j] = cos(t);
  h_mul(A, (const double (*)[4])R);
}

static void h_trans(double A[4][4], int axis, double v)
{
  double T[4][4] = { { 1, 0, 0, 0 }, { 0, 1, 0, 0 }, { 0, 0, 1, 0 }, { 0, 0, 0, 1 } };
  T[axis][3] = v;
  h_mul(A, (const double (*)[4])T);
}

/* The optional fifth value of a dh / mdh row is Hayati's beta, a rotation
 * about the link's y axis: standard A = Rz(theta+q) Tz(d) Tx(a) Rx(alpha)
 * Ry(beta), modified A = Rx(alpha) Tx(a) Ry(beta) Rz(theta+q) Tz(d)
 * (reference: Hayati 1983, Veitschegger and Wu 1986; the products are
 * written out here), after [base]. Rows without beta keep reading as
 * before. */
START_TEST(test_dh_beta_fifth_value)
{
  static const double a[2] = { 0.25, 0.4 }, al[2] = { 0.3, -0.2 },
                      d[2] = { 0.125, 0.05 }, th[2] = { -0.5, 0.7 },
                      be[2] = { 0.0, 0.015 };
  static const double q[2] = { 0.4, -1.1 };
  char path[4096];
  temp_name(path, sizeof path);
  for (int conv = 0; conv < 2; conv++) {
    char text[1024];
    twf_model *m;
    twf_pose F;
    double H[4][4] = { { 1, 0, 0, 0 }, { 0, 1, 0, 0 }, { 0, 0, 1, 0 }, { 0, 0, 0, 1 } };
    if (conv == 0)
      snprintf(text, sizeof text,
               "[robot]\nlength_unit = m\nangle_unit = rad\n"
               "[joint a]\ntype = revolute\ndh = %.17g %.17g %.17g %.17g\n"
               "[joint b]\ntype = revolute\ndh = %.17g %.17g %.17g %.17g %.17g\n",
               a[0], al[0], d[0], th[0], a[1], al[1], d[1], th[1], be[1]);
    else
      snprintf(text, sizeof text,
               "[robot]\nlength_unit = m\nangle_unit = rad\n"
               "[joint a]\ntype = revolute\nmdh = %.17g %.17g %.17g %.17g\n"
               "[joint b]\ntype = revolute\nmdh = %.17g %.17g %.17g %.17g %.17g\n",
               al[0], a[0], d[0], th[0], al[1], a[1], d[1], th[1], be[1]);
    /* [base]: the pose of DH frame 0 in the base frame, here a turn of
     * pi/2 about z and a shift (Rz(pi/2): x -> y, y -> -x). */
    strcat(text, "[base]\nposition = 0.1 -0.2 0.3\n"
                 "rotation_row1 = 0 -1 0\nrotation_row2 = 1 0 0\n"
                 "rotation_row3 = 0 0 1\n");
    h_trans(H, 0, 0.1);
    h_trans(H, 1, -0.2);
    h_trans(H, 2, 0.3);
    h_rot(H, 2, 2.0 * atan(1.0));
    write_text(path, text);
    m = read_ok(path, NULL);
    for (int k = 0; k < 2; k++) {
      if (conv == 0) {
        h_rot(H, 2, th[k] + q[k]);
        h_trans(H, 2, d[k]);
        h_trans(H, 0, a[k]);
        h_rot(H, 0, al[k]);
        h_rot(H, 1, be[k]);
      } else {
        h_rot(H, 0, al[k]);
        h_trans(H, 0, a[k]);
        h_rot(H, 1, be[k]);
        h_rot(H, 2, th[k] + q[k]);
        h_trans(H, 2, d[k]);
      }
    }
    twf_model_fk(m, q, NULL, &F);
    for (int i = 0; i < 3; i++) {
      ck_assert_msg(fabs(F.p[i] - H[i][3]) < 1e-12, "conv %d p[%d] %.17g vs %.17g",
                    conv, i, F.p[i], H[i][3]);
      for (int j = 0; j < 3; j++)
        ck_assert_msg(fabs(F.R[i][j] - H[i][j]) < 1e-12, "conv %d R[%d][%d]", conv, i, j);
    }
    twf_model_free(m);
  }
  remove(path);
}
END_TEST

/* Every reader converts with units.c (twf_length_to_si), the arithmetic
 * of the reports that divide by twf_length_unit_si: 3.1 is a value where
 * 3.1 / 1e3 and 3.1 * 1e-3 differ in the last bit, so a reader with a
 * conversion of its own shows here. */
START_TEST(test_one_unit_conversion)
{
  char path[4096];
  twf_model *m;
  temp_name(path, sizeof path);
  ck_assert(3.1 / 1e3 != 3.1 * 1e-3);
  write_text(path,
             "[robot]\nlength_unit = mm\nangle_unit = mrad\n"
             "[joint a]\ntype = revolute\naxis = 1 0 0\npoint = 0 3.1 0\n"
             "offset = 3.1\n"
             "[home]\nposition = 3.1 0 0\nquaternion_wxyz = 1 0 0 0\n"
             "[target T]\noffset = 0 0 3.1\n");
  m = read_ok(path, NULL);
  ck_assert(m->joints[0].point[1] == twf_length_to_si(3.1, TWF_LENGTH_MM));
  ck_assert(m->joints[0].point[1] == 3.1 * twf_length_unit_si(TWF_LENGTH_MM));
  ck_assert(m->joints[0].offset == twf_angle_to_si(3.1, TWF_ANGLE_MRAD));
  ck_assert(m->home.p[0] == twf_length_to_si(3.1, TWF_LENGTH_MM));
  ck_assert(m->targets[0].offset[2] == twf_length_to_si(3.1, TWF_LENGTH_MM));
  twf_model_free(m);
  remove(path);
}
END_TEST

/* A rotation within 1e-6 of orthonormal is accepted and made exact. */
START_TEST(test_rotation_rows_polished)
{
  char path[4096];
  twf_model *m;
  double det;
  temp_name(path, sizeof path);
  write_text(path,
             "[robot]\n[joint a]\ntype = revolute\naxis = 0 0 1\n"
             "point = 0 0 0\n[home]\nposition = 0 0 0\n"
             "rotation_row1 = 0.8660254 -0.5 0\n"
             "rotation_row2 = 0.5 0.8660254 0\n"
             "rotation_row3 = 0 0 1\n");
  m = read_ok(path, NULL);
  ck_assert(twf_rot_orthonormality_error(m->home.R, &det) < 1e-15);
  ck_assert_close(det, 1.0, 1e-15);
  ck_assert_close(m->home.R[0][1], -0.5, 1e-7);
  twf_model_free(m);
  remove(path);
}
END_TEST

/* ------------------------------------------------------------ writer */

static twf_status write_to(const twf_model *m, char **text, twf_error *err)
{
  char path[4096];
  FILE *f;
  twf_status st;
  temp_name(path, sizeof path);
  f = fopen(path, "w");
  ck_assert_ptr_nonnull(f);
  st = twf_model_write(m, f, err);
  fclose(f);
  *text = twf_test_slurp(path);
  remove(path);
  return st;
}

START_TEST(test_writer_refuses)
{
  twf_model *m = read_ok(sample_path("tf6s"), NULL), *c;
  twf_error err;
  char *text, longv[300];

  c = twf_model_copy(m);
  c->joints[2].twist[4] = NAN;
  ck_assert_int_eq(write_to(c, &text, &err), TWF_ERR_INVALID);
  ck_assert_ptr_nonnull(strstr(err.message, "j3"));
  ck_assert_str_eq(text, "");  /* nothing written */
  free(text);
  twf_model_free(c);

  c = twf_model_copy(m);
  c->targets[0].offset[1] = INFINITY;
  ck_assert_int_eq(write_to(c, &text, &err), TWF_ERR_INVALID);
  free(text);
  twf_model_free(c);

  c = twf_model_copy(m);
  strcpy(c->joints[3].name, "j 4");
  ck_assert_int_eq(write_to(c, &text, &err), TWF_ERR_INVALID);
  free(text);
  strcpy(c->joints[3].name, "j3");  /* repeated */
  ck_assert_int_eq(write_to(c, &text, &err), TWF_ERR_INVALID);
  free(text);
  twf_model_free(c);

  c = twf_model_copy(m);
  c->joints[0].twist[5] += 0.01;  /* a screw pitch along w = z */
  ck_assert_int_eq(write_to(c, &text, &err), TWF_ERR_INVALID);
  free(text);
  twf_model_free(c);

  c = twf_model_copy(m);
  c->home.R[0][0] = 2.0;
  ck_assert_int_eq(write_to(c, &text, &err), TWF_ERR_INVALID);
  free(text);
  twf_model_free(c);

  c = twf_model_copy(m);
  c->angle_unit = (twf_angle_unit)7;
  ck_assert_int_eq(write_to(c, &text, &err), TWF_ERR_INVALID);
  free(text);
  twf_model_free(c);

  c = twf_model_copy(m);
  c->joints[1].scale = 0.0;
  ck_assert_int_eq(write_to(c, &text, &err), TWF_ERR_INVALID);
  free(text);
  twf_model_free(c);

  c = twf_model_copy(m);
  memset(longv, 'x', sizeof longv - 1);
  longv[sizeof longv - 1] = '\0';
  ck_assert_int_eq(twf_model_meta_set(c, "command", longv), TWF_OK);
  ck_assert_int_eq(write_to(c, &text, &err), TWF_ERR_INVALID);
  ck_assert_ptr_nonnull(strstr(err.message, "command"));
  ck_assert_str_eq(text, "");
  free(text);
  twf_model_free(c);

  c = twf_model_copy(m);
  ck_assert_int_eq(twf_model_meta_set(c, "bad key", "x"), TWF_OK);
  ck_assert_int_eq(write_to(c, &text, &err), TWF_ERR_INVALID);
  free(text);
  twf_model_free(c);

  /* A full device: the stream error is reported. */
  {
    FILE *full = fopen("/dev/full", "w");
    if (full != NULL) {
      ck_assert_int_eq(twf_model_write(m, full, &err), TWF_ERR_IO);
      fclose(full);
    }
  }
  twf_model_free(m);
}
END_TEST

/* Metadata kept on one line and readable back; a stale reference point
 * off the joint line is projected onto it. */
START_TEST(test_writer_metadata_and_points)
{
  twf_model *m = read_ok(sample_path("tf7"), NULL), *back;
  char *text;
  ck_assert_int_eq(twf_model_meta_set(m, "note", "two\nlines\r\tand tab"), TWF_OK);
  ck_assert_int_eq(twf_model_meta_set(m, "cmd", "  twistfit calibrate a.csv ; x ;y  "), TWF_OK);
  ck_assert_int_eq(twf_model_meta_set(m, "eq", "a = b: c # d"), TWF_OK);
  ck_assert_int_eq(twf_model_meta_set(m, "empty", ""), TWF_OK);
  ck_assert_int_eq(twf_model_meta_set(m, "utf8", "\xC2\xB5m r\xC3\xA9sidu"), TWF_OK);
  m->joints[4].point[0] += 0.0123;  /* off the line: x is across axis z */
  m->joints[4].point[2] += 0.3;     /* along the line: harmless */
  text = roundtrip(m, &back);
  ck_assert_ptr_nonnull(strstr(text, "note = two lines  and tab\n"));
  ck_assert_str_eq(twf_model_meta_get(back, "note"), "two lines  and tab");
  ck_assert_str_eq(twf_model_meta_get(back, "cmd"), "twistfit calibrate a.csv; x;y");
  ck_assert_str_eq(twf_model_meta_get(back, "eq"), "a = b: c # d");
  ck_assert_str_eq(twf_model_meta_get(back, "empty"), "");
  ck_assert_str_eq(twf_model_meta_get(back, "utf8"), "\xC2\xB5m r\xC3\xA9sidu");
  /* Metadata in file order. */
  ck_assert_str_eq(back->meta[0].key, "note");
  ck_assert_str_eq(back->meta[4].key, "utf8");
  for (int k = 0; k < 6; k++)
    ck_assert_close(back->joints[4].twist[k], m->joints[4].twist[k], 1e-15);
  ck_assert_close(back->joints[4].point[0], m->joints[4].point[0] - 0.0123, 1e-15);
  ck_assert_close(back->joints[4].point[2], m->joints[4].point[2], 1e-15);
  free(text);
  twf_model_free(m);
  twf_model_free(back);
}
END_TEST

/* Free text (the robot's name, [asbuilt] values) round-trips or is
 * refused, the same way by reader and writer: a control character inside
 * is refused at reading with its line and column, and by the writer for
 * the name (a space for it would read back as another name); a text that
 * starts with ';' is written right after the '=' and reads back whole. */
START_TEST(test_free_text_round_trip)
{
  static const struct {
    const char *line; /* after "[robot]\n" */
    long col;          /* of the control character, 0: accepted */
    const char *name;  /* read name when accepted */
  } cases[] = {
    { "name = tf6s\x1b[2J\n", 12, NULL },
    { "  name = a\tb\n", 11, NULL },
    { "name = tf6s\x7f\n", 12, NULL },
    { "name =\ttf6s\t ; comment \x01 kept out\n", 0, "tf6s" },
    { "name =;tf6s\n", 0, ";tf6s" },
    { "name = a;b\n", 0, "a;b" },
  };
  static const char tail[] = "length_unit = mm\nangle_unit = deg\n[joint j1]\ntype = revolute\n"
                             "axis = 0 0 1\npoint = 0 0 0\n[home]\nposition = 0 0 1\n"
                             "quaternion_wxyz = 1 0 0 0\n";
  char path[4096], text[512];
  twf_error err;
  size_t i;
  temp_name(path, sizeof path);
  for (i = 0; i < sizeof cases / sizeof cases[0]; i++) {
    twf_model *m, *back;
    char *out;
    snprintf(text, sizeof text, "[robot]\n%s%s", cases[i].line, tail);
    write_text(path, text);
    m = twf_model_read(path, NULL, &err);
    if (cases[i].col != 0) {
      ck_assert_msg(m == NULL, "case %zu accepted", i);
      ck_assert_int_eq(err.status, TWF_ERR_VALUE);
      ck_assert_int_eq(err.line, 2);
      ck_assert_int_eq(err.column, cases[i].col);
      ck_assert_ptr_nonnull(strstr(err.message, "control character"));
      continue;
    }
    ck_assert_msg(m != NULL, "case %zu: %s", i, err.message);
    ck_assert_str_eq(m->name, cases[i].name);
    out = roundtrip(m, &back);
    ck_assert_msg(strcmp(back->name, m->name) == 0, "case %zu: '%s' read back as '%s':\n%s", i, m->name,
                  back->name, out);
    free(out);
    twf_model_free(back);
    twf_model_free(m);
  }
  /* [asbuilt] values: the same rule, and a value starting with ';' */
  snprintf(text, sizeof text, "[robot]\n%s[asbuilt]\nnote = a\x01b\n", tail);
  write_text(path, text);
  ck_assert_ptr_null(twf_model_read(path, NULL, &err));
  ck_assert_int_eq(err.line, 12);
  ck_assert_int_eq(err.column, 9);
  {
    twf_model *m = read_ok(sample_path("tf6s"), NULL), *back;
    char *out;
    ck_assert_int_eq(twf_model_meta_set(m, "note", "  ;starts with a semicolon"), TWF_OK);
    out = roundtrip(m, &back);
    ck_assert_str_eq(twf_model_meta_get(back, "note"), ";starts with a semicolon");
    free(out);
    twf_model_free(back);
    /* the writer refuses a name it cannot give back */
    snprintf(m->name, sizeof m->name, "tf6s\nsecond line");
    ck_assert_int_eq(write_to(m, &out, &err), TWF_ERR_INVALID);
    ck_assert_ptr_nonnull(strstr(err.message, "control character (byte 0x0A) at character 5"));
    free(out);
    twf_model_free(m);
  }
  remove(path);
}
END_TEST

/* ------------------------------------------------ man page examples */

/* The two example files of twistfit-model(5) (the .nf/.fi blocks of its
 * EXAMPLE section, roff escapes undone) load, and the axis-and-point and
 * DH versions of the arm agree. */
START_TEST(test_man_page_examples)
{
  char *man = twf_test_slurp(twf_test_srcpath("man/twistfit-model.5"));
  char *sec = strstr(man, "\n.SH EXAMPLE\n"), *end;
  char *blocks[2] = { NULL, NULL };
  char paths[2][4096];
  twf_model *m[2];
  int nb = 0;
  uint64_t seed = twf_test_seed(SEED + 4);
  twf_test_rng rng;
  ck_assert_ptr_nonnull(sec);
  end = strstr(sec + 1, "\n.SH ");
  if (end != NULL)
    *end = '\0';
  for (char *p = strstr(sec, "\n.nf\n"); p != NULL && nb < 3;
       p = strstr(p, "\n.nf\n")) {
    char *q = strstr(p + 5, "\n.fi\n"), *out;
    size_t o = 0;
    ck_assert_ptr_nonnull(q);
    ck_assert_int_lt(nb, 2);
    out = malloc((size_t)(q - p) + 2);
    ck_assert_ptr_nonnull(out);
    for (char *c = p + 5; c <= q; c++) {
      if (c[0] == '\\' && c[1] == '-') {
        out[o++] = '-';
        c++;
      } else if (c[0] == '\\' && c[1] == 'e') {
        out[o++] = '\\';
        c++;
      } else {
        out[o++] = *c;
      }
    }
    out[o] = '\0';
    blocks[nb++] = out;
    p = q;
  }
  ck_assert_int_eq(nb, 2);
  for (int k = 0; k < 2; k++) {
    twf_warnings w;
    twf_warnings_init(&w);
    temp_name(paths[k], sizeof paths[k]);
    write_text(paths[k], blocks[k]);
    m[k] = read_ok(paths[k], &w);
    ck_assert_uint_eq(w.count, 0);
    remove(paths[k]);
    free(blocks[k]);
  }
  ck_assert_str_eq(m[0]->name, "planar2");
  ck_assert_uint_eq(m[0]->n_joints, 2);
  ck_assert_uint_eq(m[0]->n_targets, 1);
  ck_assert(!m[0]->targets[0].offset_known);
  ck_assert_close(m[0]->joints[1].offset, 0.25 * D2R, 1e-15);
  twf_test_rng_init(&rng, seed);
  assert_same_model(m[0], m[1], 1e-15, "man page examples");
  assert_same_fk(m[0], m[1], &rng, 50, FK_TOL, "man page examples", seed);
  twf_model_free(m[0]);
  twf_model_free(m[1]);
  free(man);
}
END_TEST

static Suite *modelfile_suite(void)
{
  Suite *s = suite_create("modelfile");
  TCase *tc = tcase_create("core");
  tcase_set_timeout(tc, 60);
  tcase_add_test(tc, test_samples_roundtrip);
  tcase_add_test(tc, test_sample_values);
  tcase_add_test(tc, test_dh_files_match_axis_files);
  tcase_add_test(tc, test_dh_tables_match_axis_files);
  tcase_add_test(tc, test_random_models_roundtrip);
  tcase_add_test(tc, test_extreme_values_roundtrip);
  tcase_add_test(tc, test_bad_models);
  tcase_add_test(tc, test_null_arguments);
  tcase_add_test(tc, test_reader_tolerates_layout);
  tcase_add_test(tc, test_long_names_and_limit_line);
  tcase_add_test(tc, test_endless_line_stops);
  tcase_add_test(tc, test_size_limit);
  tcase_add_test(tc, test_urdf_options_on_a_model_file_warn);
  tcase_add_test(tc, test_input_digest);
  tcase_add_test(tc, test_many_asbuilt_keys);
  tcase_add_test(tc, test_units);
  tcase_add_test(tc, test_one_unit_conversion);
  tcase_add_test(tc, test_rotation_rows_polished);
  tcase_add_test(tc, test_dh_beta_fifth_value);
  tcase_add_test(tc, test_writer_refuses);
  tcase_add_test(tc, test_writer_metadata_and_points);
  tcase_add_test(tc, test_free_text_round_trip);
  tcase_add_test(tc, test_man_page_examples);
  suite_add_tcase(s, tc);
  return s;
}

int main(void)
{
  return twf_test_run(modelfile_suite());
}
