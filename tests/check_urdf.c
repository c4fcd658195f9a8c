/* check_urdf.c: URDF out and in (src/lib/io/urdf_*.c): model -> URDF ->
 * model on every sample arm, with offsets and tilted axes; the writer
 * into a user's file (--like); the reader's errors; and the URDF files
 * written independently of twistfit by tests/gen/gen_urdf_samples.py. */
#include "arms.h"
#include "testutil.h"
#include "twistfit.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define MAXJ 8

static const char *const samples[] = { "tf6s", "tf6p", "tf4p", "tf7", "tf6s-dh", "tf7-mdh" };
#define N_SAMPLES (sizeof samples / sizeof samples[0])

/* Largest flange position and rotation difference of two models over 200
 * seeded configurations within a's limits. */
static void fk_diff(const twf_model *a, const twf_model *b, uint64_t seed, double *dp,
                    double *da)
{
  unsigned long long s = twf_test_seed(seed);
  double q[MAXJ];
  *dp = *da = 0.0;
  ck_assert_uint_eq(a->n_joints, b->n_joints);
  for (int c = 0; c < 200; c++) {
    twf_pose Ta, Tb;
    double e = 0.0;
    twf_simulate_joints(a, 0.0, &s, q);
    twf_model_fk(a, q, NULL, &Ta);
    twf_model_fk(b, q, NULL, &Tb);
    for (int i = 0; i < 3; i++)
      e += (Ta.p[i] - Tb.p[i]) * (Ta.p[i] - Tb.p[i]);
    *dp = fmax(*dp, sqrt(e));
    *da = fmax(*da, twf_rot_angle_between(Ta.R, Tb.R));
  }
}

static void same_fk(const twf_model *a, const twf_model *b, const char *what)
{
  double dp, da;
  fk_diff(a, b, 90101, &dp, &da);
  ck_assert_msg(dp < 1e-9 && da < 1e-9, "%s: forward kinematics differ by %.3g m, %.3g rad",
                what, dp, da);
}

static void same_targets(const twf_model *a, const twf_model *b)
{
  size_t n = 0;
  for (size_t k = 0; k < a->n_targets; k++) {
    long i;
    if (!a->targets[k].offset_known)
      continue;
    n++;
    i = twf_model_target_index(b, a->targets[k].name);
    ck_assert_msg(i >= 0, "target %s lost", a->targets[k].name);
    for (int c = 0; c < 3; c++)
      ck_assert(fabs(a->targets[k].offset[c] - b->targets[i].offset[c]) < 1e-12);
  }
  ck_assert_uint_eq(n, b->n_targets);
}

static void same_limits(const twf_model *a, const twf_model *b)
{
  for (size_t k = 0; k < a->n_joints; k++) {
    ck_assert_str_eq(a->joints[k].name, b->joints[k].name);
    ck_assert_int_eq(a->joints[k].type, b->joints[k].type);
    ck_assert_int_eq(a->joints[k].has_limits, b->joints[k].has_limits);
    if (a->joints[k].has_limits) {
      ck_assert_close(a->joints[k].limit_lo, b->joints[k].limit_lo, 1e-15);
      ck_assert_close(a->joints[k].limit_hi, b->joints[k].limit_hi, 1e-15);
    }
  }
}

static void write_urdf(const twf_model *m, const char *path)
{
  FILE *fp = fopen(path, "w");
  twf_error err;
  ck_assert_ptr_nonnull(fp);
  ck_assert_msg(twf_model_write_urdf(m, NULL, fp, &err) == TWF_OK, "write: %s", err.message);
  ck_assert_int_eq(fclose(fp), 0);
}

/* Write m, read it back by both entry points, compare. */
static void round_trip(const twf_model *m, const char *what)
{
  const char *path = twf_test_tmppath("arm.urdf");
  twf_error err;
  twf_model *r;
  write_urdf(m, path);
  r = twf_model_read_urdf(path, NULL, NULL, &err);
  ck_assert_msg(r != NULL, "%s: read back: %s line %ld: %s", what, err.file, err.line,
                err.message);
  same_fk(m, r, what);
  same_limits(m, r);
  same_targets(m, r);
  twf_model_free(r);
  /* wherever a model file is accepted */
  r = twf_model_read(path, NULL, &err);
  ck_assert_msg(r != NULL, "%s: twf_model_read: %s", what, err.message);
  same_fk(m, r, what);
  twf_model_free(r);
}

static twf_model *sample(const char *name)
{
  char rel[64];
  twf_error err;
  twf_model *m;
  snprintf(rel, sizeof rel, "samples/%s.ini", name);
  m = twf_model_read(twf_test_srcpath(rel), NULL, &err);
  ck_assert_msg(m != NULL, "%s: %s", rel, err.message);
  return m;
}

START_TEST(test_round_trip_samples)
{
  twf_test_tmpdir_make("urdf");
  for (size_t k = 0; k < N_SAMPLES; k++) {
    twf_model *m = sample(samples[k]);
    round_trip(m, samples[k]);
    twf_model_free(m);
  }
  twf_test_tmpdir_remove();
}
END_TEST

/* Tilt joint k's axis by small unround angles about its point, as a
 * calibration would, and give it an offset (prismatic: a shift). */
static void perturb(twf_model *m, twf_test_rng *rng)
{
  for (size_t k = 0; k < m->n_joints; k++) {
    twf_joint *j = &m->joints[k];
    double w[3], R[3][3], d[3] = { twf_test_uniform(rng, -2e-3, 2e-3),
                                   twf_test_uniform(rng, -2e-3, 2e-3),
                                   twf_test_uniform(rng, -2e-3, 2e-3) };
    double *dir = j->type == TWF_JOINT_PRISMATIC ? j->twist + 3 : j->twist;
    twf_so3_exp(d, 1.0, R);
    for (int r = 0; r < 3; r++)
      w[r] = R[r][0] * dir[0] + R[r][1] * dir[1] + R[r][2] * dir[2];
    for (int r = 0; r < 3; r++)
      j->point[r] += twf_test_uniform(rng, -1e-3, 1e-3);
    if (j->type == TWF_JOINT_PRISMATIC)
      twf_twist_prismatic(w, j->twist);
    else
      twf_twist_revolute(w, j->point, j->twist);
    j->offset = twf_test_uniform(rng, -0.3, 0.3) * (j->type == TWF_JOINT_PRISMATIC ? 0.1 : 1.0);
  }
}

START_TEST(test_round_trip_offsets)
{
  twf_test_rng rng;
  twf_test_rng_init(&rng, twf_test_seed(424242));
  twf_test_tmpdir_make("urdf");
  for (int a = 0; a < ARM_COUNT; a++) {
    twf_model *m = test_arm_model((test_arm)a);
    perturb(m, &rng);
    m->joints[0].has_limits = 0; /* written as continuous */
    if (m->joints[0].type == TWF_JOINT_PRISMATIC)
      m->joints[0].has_limits = 1;
    round_trip(m, m->name);
    twf_model_free(m);
  }
  twf_test_tmpdir_remove();
}
END_TEST

/* Targets named by the caller: only those, and a name not fixed to the
 * tip refused. */
START_TEST(test_target_links)
{
  const char *const one[] = { "T2" }, *const bad[] = { "j3_link" };
  twf_urdf_read_options o = twf_urdf_default_read_options();
  twf_model *m = test_arm_model(ARM_TF6S), *r;
  twf_error err;
  twf_test_tmpdir_make("urdf");
  write_urdf(m, twf_test_tmppath("arm.urdf"));
  o.target_links = one;
  o.n_target_links = 1;
  r = twf_model_read_urdf(twf_test_tmppath("arm.urdf"), &o, NULL, &err);
  ck_assert_msg(r != NULL, "%s", err.message);
  ck_assert_uint_eq(r->n_targets, 1);
  ck_assert_str_eq(r->targets[0].name, "T2");
  ck_assert(fabs(r->targets[0].offset[1] - m->targets[1].offset[1]) < 1e-15);
  twf_model_free(r);
  o.n_target_links = 0; /* none */
  r = twf_model_read_urdf(twf_test_tmppath("arm.urdf"), &o, NULL, &err);
  ck_assert_ptr_nonnull(r);
  ck_assert_uint_eq(r->n_targets, 0);
  twf_model_free(r);
  o.target_links = bad;
  o.n_target_links = 1;
  ck_assert_ptr_null(twf_model_read_urdf(twf_test_tmppath("arm.urdf"), &o, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_UNKNOWN);
  ck_assert_ptr_nonnull(strstr(err.message, "'j3_link' is not fixed to the tip link flange"));
  twf_model_free(m);
  twf_test_tmpdir_remove();
}
END_TEST

START_TEST(test_scale_refused)
{
  twf_model *m = test_arm_model(ARM_TF6S);
  twf_error err;
  char *buf = NULL;
  size_t len = 0;
  FILE *fp = open_memstream(&buf, &len);
  m->joints[2].scale = 1.0021;
  ck_assert_int_eq(twf_model_write_urdf(m, NULL, fp, &err), TWF_ERR_VALUE);
  ck_assert_ptr_nonnull(strstr(err.message, "scale"));
  ck_assert_ptr_nonnull(strstr(err.message, m->joints[2].name));
  fclose(fp);
  ck_assert_uint_eq(len, 0); /* nothing written */
  free(buf);
  twf_model_free(m);
}
END_TEST

START_TEST(test_name_clash)
{
  twf_model *m = test_arm_model(ARM_TF6S);
  twf_error err;
  FILE *fp = fopen("/dev/null", "w");
  strcpy(m->targets[0].name, "flange");
  ck_assert_int_eq(twf_model_write_urdf(m, NULL, fp, &err), TWF_ERR_DUPLICATE);
  ck_assert_ptr_nonnull(strstr(err.message, "'flange'"));
  strcpy(m->targets[0].name, "T1");
  strcpy(m->joints[3].name, "T2_joint"); /* the name of T2's fixed joint */
  ck_assert_int_eq(twf_model_write_urdf(m, NULL, fp, &err), TWF_ERR_DUPLICATE);
  ck_assert_ptr_nonnull(strstr(err.message, "joint T2_joint"));
  fclose(fp);
  twf_model_free(m);
}
END_TEST

/* ----------------------------------------------------------- reader errors */

static const char head[] = "<?xml version=\"1.0\"?>\n<robot name=\"bad\">\n"
                           "  <link name=\"base\"/>\n  <link name=\"l1\"/>\n";

static twf_model *read_text(const char *text, const twf_urdf_read_options *o, twf_error *err)
{
  const char *path = twf_test_tmppath("bad.urdf");
  twf_test_write_file(path, text);
  return twf_model_read_urdf(path, o, NULL, err);
}

static void expect_error(const char *body, twf_status st, long line, const char *needle)
{
  char text[4096];
  twf_error err;
  twf_model *m;
  snprintf(text, sizeof text, "%s%s</robot>\n", head, body);
  m = read_text(text, NULL, &err);
  ck_assert_msg(m == NULL, "accepted: %s", body);
  ck_assert_msg(err.status == st, "status %d (%s), not %d", err.status, err.message, st);
  ck_assert_msg(err.line == line, "line %ld, not %ld: %s", err.line, line, err.message);
  ck_assert_msg(strstr(err.message, needle) != NULL, "'%s' lacks '%s'", err.message, needle);
}

START_TEST(test_errors)
{
  twf_error err;
  twf_test_tmpdir_make("urdf");
  /* <mimic> named with its line (line 9 of the text) */
  expect_error("  <link name=\"l2\"/>\n"
               "  <joint name=\"a\" type=\"revolute\"><parent link=\"base\"/><child link=\"l1\"/>"
               "<limit lower=\"-1\" upper=\"1\" effort=\"0\" velocity=\"0\"/></joint>\n"
               "  <joint name=\"b\" type=\"revolute\">\n"
               "    <parent link=\"l1\"/><child link=\"l2\"/>\n"
               "    <mimic joint=\"a\"/>\n  </joint>\n",
               TWF_ERR_VALUE, 9, "<mimic> in joint b");
  expect_error("  <joint name=\"a\" type=\"floating\"><parent link=\"base\"/><child link=\"l1\"/>"
               "</joint>\n", TWF_ERR_VALUE, 5, "floating");
  expect_error("  <joint name=\"a\" type=\"planar\"><parent link=\"base\"/><child link=\"l1\"/>"
               "</joint>\n", TWF_ERR_VALUE, 5, "planar");
  expect_error("  <joint name=\"a\" type=\"hinge\"><parent link=\"base\"/><child link=\"l1\"/>"
               "</joint>\n", TWF_ERR_UNKNOWN, 5, "hinge");
  /* bad numbers: not a number, a wrong count, not finite */
  expect_error("  <joint name=\"a\" type=\"continuous\"><parent link=\"base\"/><child link=\"l1\"/>\n"
               "  <origin xyz=\"0 0.1x 0\"/></joint>\n", TWF_ERR_VALUE, 6, "0.1x");
  expect_error("  <joint name=\"a\" type=\"continuous\"><parent link=\"base\"/><child link=\"l1\"/>\n"
               "  <axis xyz=\"0 1\"/></joint>\n", TWF_ERR_VALUE, 6, "2 numbers, not 3");
  expect_error("  <joint name=\"a\" type=\"continuous\"><parent link=\"base\"/><child link=\"l1\"/>\n"
               "  <origin rpy=\"0 inf 0\"/></joint>\n", TWF_ERR_VALUE, 6, "not a finite number");
  expect_error("  <joint name=\"a\" type=\"continuous\"><parent link=\"base\"/><child link=\"l1\"/>\n"
               "  <axis xyz=\"0 0 0\"/></joint>\n", TWF_ERR_VALUE, 6, "zero axis");
  expect_error("  <joint name=\"a\" type=\"revolute\"><parent link=\"base\"/><child link=\"l1\"/>\n"
               "  <limit lower=\"1\" upper=\"-1\"/></joint>\n", TWF_ERR_VALUE, 6, "lower limit");
  expect_error("  <joint name=\"a\" type=\"revolute\"><parent link=\"base\"/><child link=\"l9\"/>"
               "</joint>\n", TWF_ERR_UNKNOWN, 5, "'l9'");
  expect_error("  <link name=\"l1\"/>\n", TWF_ERR_DUPLICATE, 5, "'l1' given twice");
  expect_error("  <joint name=\"a\" type=\"fixed\"><parent link=\"base\"/><child link=\"l1\"/>"
               "</joint>\n", TWF_ERR_MISSING, 0, "no link of the robot is moved");
  /* not well-formed: libxml2's message with its line */
  expect_error("  <joint name=\"a\" type=\"revolute\">\n</robot>\n", TWF_ERR_SYNTAX, 6,
               "not well-formed");
  /* missing file */
  ck_assert_ptr_null(twf_model_read_urdf(twf_test_tmppath("none.urdf"), NULL, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_IO);
  ck_assert_ptr_null(twf_model_read(twf_test_tmppath("none.urdf"), NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_IO);
  twf_test_tmpdir_remove();
}
END_TEST

/* Two arms on one base: two tips, refused without tip_link (the tips
 * listed), read with it. */
static const char two_tips[] =
  "<?xml version=\"1.0\"?>\n<robot name=\"twin\">\n"
  "  <link name=\"base\"/><link name=\"a1\"/><link name=\"a2\"/><link name=\"b1\"/>\n"
  "  <link name=\"tool_a\"/><link name=\"tool_b\"/><link name=\"stand\"/>\n"
  "  <joint name=\"s\" type=\"fixed\"><parent link=\"base\"/><child link=\"stand\"/></joint>\n"
  "  <joint name=\"ja1\" type=\"continuous\"><parent link=\"base\"/><child link=\"a1\"/>"
  "<origin xyz=\"0.1 0 0.3\"/><axis xyz=\"0 0 1\"/></joint>\n"
  "  <joint name=\"ja2\" type=\"prismatic\"><parent link=\"a1\"/><child link=\"a2\"/>"
  "<origin xyz=\"0.25 0 0\" rpy=\"0.1 0.2 0.3\"/><axis xyz=\"0 1 0\"/>"
  "<limit lower=\"-0.1\" upper=\"0.2\" effort=\"1\" velocity=\"1\"/></joint>\n"
  "  <joint name=\"ta\" type=\"fixed\"><parent link=\"a2\"/><child link=\"tool_a\"/>"
  "<origin xyz=\"0 0 0.05\"/></joint>\n"
  "  <joint name=\"jb1\" type=\"revolute\"><parent link=\"base\"/><child link=\"b1\"/>"
  "<origin xyz=\"-0.1 0 0.3\"/><axis xyz=\"1 0 0\"/>"
  "<limit lower=\"-1\" upper=\"1\" effort=\"1\" velocity=\"1\"/></joint>\n"
  "  <joint name=\"tb\" type=\"fixed\"><parent link=\"b1\"/><child link=\"tool_b\"/>"
  "<origin xyz=\"0 0.2 0\"/></joint>\n"
  "</robot>\n";

START_TEST(test_two_tips)
{
  twf_urdf_read_options o = twf_urdf_default_read_options();
  twf_error err;
  twf_model *m;
  twf_test_tmpdir_make("urdf");
  ck_assert_ptr_null(read_text(two_tips, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_MISSING);
  /* the fixed stand is not a tip: only links a joint moves */
  ck_assert_msg(strstr(err.message, "2 tips (tool_a, tool_b)") != NULL, "%s", err.message);
  ck_assert_ptr_nonnull(strstr(err.hint, "tip"));
  o.tip_link = "tool_a";
  o.n_target_links = 0;
  m = read_text(two_tips, &o, &err);
  ck_assert_msg(m != NULL, "%s", err.message);
  ck_assert_uint_eq(m->n_joints, 2);
  ck_assert_str_eq(m->joints[0].name, "ja1");
  ck_assert_int_eq(m->joints[0].has_limits, 0);
  ck_assert_int_eq(m->joints[1].type, TWF_JOINT_PRISMATIC);
  ck_assert(m->joints[1].has_limits && m->joints[1].limit_lo == -0.1);
  {
    /* reference: URDF's kinematics by hand, T = Tr(0.1,0,0.3) Rz(q1)
     * Tr(0.25,0,0) RPY(0.1,0.2,0.3) Tr(q2 y) Tr(0,0,0.05) at q = (0, 0) */
    double R[3][3], p[3] = { 0.1 + 0.25, 0, 0.3 };
    twf_rpy_fixed_xyz_to_rot(0.1, 0.2, 0.3, R);
    for (int r = 0; r < 3; r++)
      p[r] += R[r][2] * 0.05;
    for (int r = 0; r < 3; r++)
      ck_assert(fabs(m->home.p[r] - p[r]) < 1e-15);
  }
  twf_model_free(m);
  o.tip_link = "tool_b";
  o.base_link = "stand";
  ck_assert_ptr_null(read_text(two_tips, &o, &err));
  ck_assert_int_eq(err.status, TWF_ERR_UNKNOWN);
  o.base_link = "nowhere";
  ck_assert_ptr_null(read_text(two_tips, &o, &err));
  ck_assert_ptr_nonnull(strstr(err.message, "'nowhere'"));
  twf_test_tmpdir_remove();
}
END_TEST

/* ------------------------------------------------------------ --like */

static const char like_text[] =
  "<?xml version=\"1.0\"?>\n"
  "<!-- a hand-written description: kept as it is -->\n"
  "<robot name=\"like\">\n"
  "  <link name=\"world\"/>\n"
  "  <link name=\"base\"><inertial><mass value=\"12.5\"/><inertia ixx=\"1\" ixy=\"0\" ixz=\"0\""
  " iyy=\"1\" iyz=\"0\" izz=\"1\"/></inertial></link>\n"
  "  <joint name=\"mount\" type=\"fixed\"><parent link=\"world\"/><child link=\"base\"/>"
  "<origin xyz=\"0 0 0.02\"/></joint>\n"
  "  <link name=\"upper\"><visual><geometry><box size=\"0.1 0.1 0.4\"/></geometry></visual>"
  "<collision><geometry><cylinder radius=\"0.05\" length=\"0.4\"/></geometry></collision></link>\n"
  "  <joint name=\"shoulder\" type=\"revolute\"><parent link=\"base\"/><child link=\"upper\"/>"
  "<origin xyz=\"0 0 0.3\" rpy=\"0 0 1.5707963267948966\"/><axis xyz=\"0 1 0\"/>"
  "<limit lower=\"-2\" upper=\"2\" effort=\"50\" velocity=\"2\"/></joint>\n"
  "  <link name=\"fore\"/>\n"
  "  <joint name=\"elbow\" type=\"continuous\"><parent link=\"upper\"/><child link=\"fore\"/>"
  "<origin xyz=\"0.4 0 0\"/><axis xyz=\"0 0 1\"/></joint>\n"
  "  <link name=\"slide\"/>\n"
  "  <joint name=\"reach\" type=\"prismatic\"><parent link=\"fore\"/><child link=\"slide\"/>"
  "<origin xyz=\"0.3 0 0\"/><axis xyz=\"1 0 0\"/>"
  "<limit lower=\"0\" upper=\"0.2\" effort=\"5\" velocity=\"0.1\"/></joint>\n"
  "  <link name=\"tool0\"/>\n"
  "  <joint name=\"tool_mount\" type=\"fixed\"><parent link=\"slide\"/><child link=\"tool0\"/>"
  "<origin xyz=\"0.05 0 0\"/></joint>\n"
  "  <link name=\"camera\"/>\n"
  "  <joint name=\"camera_mount\" type=\"fixed\"><parent link=\"upper\"/><child link=\"camera\"/>"
  "<origin xyz=\"0 0.1 0.1\"/></joint>\n"
  "</robot>\n";

START_TEST(test_like)
{
  const char *like = twf_test_tmppath("like.urdf"), *out;
  twf_urdf_read_options o = twf_urdf_default_read_options();
  twf_test_rng rng;
  twf_error err;
  twf_model *m, *r;
  char *text;
  FILE *fp;
  twf_test_tmpdir_make("urdf");
  like = twf_test_tmppath("like.urdf");
  twf_test_write_file(like, like_text);
  o.tip_link = "tool0";
  m = twf_model_read_urdf(like, &o, NULL, &err);
  ck_assert_msg(m != NULL, "%s", err.message);
  ck_assert_uint_eq(m->n_joints, 3);
  twf_test_rng_init(&rng, twf_test_seed(5150));
  perturb(m, &rng);
  out = twf_test_tmppath("out.urdf");
  fp = fopen(out, "w");
  ck_assert_msg(twf_model_write_urdf_like(m, like, &o, fp, &err) == TWF_OK, "%s", err.message);
  fclose(fp);
  r = twf_model_read_urdf(out, &o, NULL, &err);
  ck_assert_msg(r != NULL, "%s", err.message);
  same_fk(m, r, "like");
  twf_model_free(r);
  text = twf_test_slurp(out);
  ck_assert_ptr_nonnull(strstr(text, "<!-- a hand-written description: kept as it is -->"));
  ck_assert_ptr_nonnull(strstr(text, "<mass value=\"12.5\"/>"));
  ck_assert_ptr_nonnull(strstr(text, "<cylinder radius=\"0.05\" length=\"0.4\"/>"));
  ck_assert_ptr_nonnull(strstr(text, "<origin xyz=\"0 0.1 0.1\"/>"));  /* off the chain */
  ck_assert_ptr_nonnull(strstr(text, "<origin xyz=\"0 0 0.02\"/>"));   /* fixed, before */
  ck_assert_ptr_nonnull(strstr(text, "effort=\"50\" velocity=\"2\""));
  free(text);
  /* the chain must match: a model of other joints is refused */
  twf_model_free(m);
  m = test_arm_model(ARM_TF6S);
  fp = fopen("/dev/null", "w");
  ck_assert_int_eq(twf_model_write_urdf_like(m, like, &o, fp, &err), TWF_ERR_VALUE);
  ck_assert_ptr_nonnull(strstr(err.message, "3 moving joints, the model 6"));
  /* the tip is the last joint's own link and the flange is off its axis */
  o.tip_link = "slide";
  twf_model_free(m);
  m = twf_model_read_urdf(like, &o, NULL, &err);
  ck_assert_ptr_nonnull(m);
  m->home.p[1] += 1e-4; /* off the prismatic axis is fine: any point is on it */
  ck_assert_int_eq(twf_model_write_urdf_like(m, like, &o, fp, &err), TWF_OK);
  fclose(fp);
  twf_model_free(m);
  twf_test_tmpdir_remove();
}
END_TEST

/* --------------------------------------------- independent URDF fixtures */

START_TEST(test_generated_fixtures)
{
  twf_warnings w;
  twf_error err;
  for (size_t k = 0; k < N_SAMPLES; k++) {
    char rel[64];
    twf_model *m = sample(samples[k]), *u;
    /* reference: tests/gen/gen_urdf_samples.py writes the sample arms as
     * URDF from the model files' axis and point data, and checks them
     * against Orocos KDL (Debian python3-pykdl) */
    snprintf(rel, sizeof rel, "tests/fixtures/urdf_%s.urdf", samples[k]);
    twf_warnings_init(&w);
    u = twf_model_read(twf_test_srcpath(rel), &w, &err);
    ck_assert_msg(u != NULL, "%s: %s line %ld", rel, err.message, err.line);
    ck_assert_uint_eq(w.count, 0);
    same_fk(m, u, rel);
    same_limits(m, u);
    same_targets(m, u);
    twf_warnings_clear(&w);
    twf_model_free(u);
    twf_model_free(m);
  }
}
END_TEST

START_TEST(test_generated_two_tips)
{
  twf_read_options ro = twf_read_default_options();
  twf_error err;
  twf_model *m;
  /* reference: tests/fixtures/urdf_two_tips.urdf, a tree written by
   * tests/gen/gen_urdf_samples.py; urdfdom's check_urdf parses it */
  const char *path = twf_test_srcpath("tests/fixtures/urdf_two_tips.urdf");
  ck_assert_ptr_null(twf_model_read(path, NULL, &err));
  ck_assert_int_eq(err.status, TWF_ERR_MISSING);
  ck_assert_ptr_nonnull(strstr(err.message, "2 tips"));
  ro.urdf_tip_link = "left_flange";
  m = twf_model_read_with(path, &ro, NULL, NULL, &err);
  ck_assert_msg(m != NULL, "%s", err.message);
  ck_assert_uint_eq(m->n_joints, 3);
  twf_model_free(m);
}
END_TEST

int main(void)
{
  Suite *s = suite_create("urdf");
  TCase *tc = tcase_create("urdf");
  tcase_set_timeout(tc, 60);
  tcase_add_test(tc, test_round_trip_samples);
  tcase_add_test(tc, test_round_trip_offsets);
  tcase_add_test(tc, test_target_links);
  tcase_add_test(tc, test_scale_refused);
  tcase_add_test(tc, test_name_clash);
  tcase_add_test(tc, test_errors);
  tcase_add_test(tc, test_two_tips);
  tcase_add_test(tc, test_like);
  tcase_add_test(tc, test_generated_fixtures);
  tcase_add_test(tc, test_generated_two_tips);
  suite_add_tcase(s, tc);
  return twf_test_run(s);
}
