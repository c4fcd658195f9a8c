/* check_model.c: the kinematic model (src/lib/model.c) and DH conversion
 * (src/lib/dh.c). */
#include "testutil.h"
#include "twistfit.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define PI 3.14159265358979323846
#define SEED 0x6d0de1ULL
#define MAXJ 8
#define MAXFK 64

/* ---------------------------------------------------- KDL fixtures */

/* The fixtures written by tests/gen/gen_kdl_fk.py (format in its
 * docstring). */
static const char *const kdl_arms[] = { "tf6s", "tf6p", "tf4p", "tf7",
                                        "tf6s_mdh", "tf4p_mdh", "gen6",
                                        "gen6_mdh" };
#define N_KDL_ARMS (sizeof kdl_arms / sizeof kdl_arms[0])

typedef struct fixture {
  twf_dh_convention conv;
  size_t n;
  twf_dh_row rows[MAXJ];
  double lo[MAXJ], hi[MAXJ];
  twf_pose flange;
  size_t n_fk;
  double q[MAXFK][MAXJ];
  twf_pose T[MAXFK];
} fixture;

/* Parse up to max comma-separated numbers after s; returns the count. */
static size_t parse_numbers(const char *s, double *out, size_t max)
{
  size_t k = 0;
  while (*s == ',' && k < max) {
    char *end;
    out[k] = strtod(s + 1, &end);
    if (end == s + 1)
      break;
    k++;
    s = end;
  }
  return k;
}

static void pose_from_numbers(const double *v, twf_pose *T)
{
  for (int i = 0; i < 3; i++) {
    T->p[i] = v[i];
    for (int j = 0; j < 3; j++)
      T->R[i][j] = v[3 + 3 * i + j];
  }
}

static void load_fixture(const char *arm, fixture *fx)
{
  char rel[256], line[4096];
  const char *path;
  FILE *f;
  int have_conv = 0, have_flange = 0;
  snprintf(rel, sizeof rel, "tests/fixtures/kdl_fk_%s.csv", arm);
  path = twf_test_srcpath(rel);
  f = fopen(path, "r");
  ck_assert_msg(f != NULL, "cannot open %s", path);
  memset(fx, 0, sizeof *fx);
  while (fgets(line, sizeof line, f) != NULL) {
    double v[32];
    if (line[0] == '#' || line[0] == '\n')
      continue;
    if (strncmp(line, "convention,", 11) == 0) {
      fx->conv = strncmp(line + 11, "modified", 8) == 0 ? TWF_DH_MODIFIED
                                                         : TWF_DH_STANDARD;
      have_conv = 1;
    } else if (strncmp(line, "joint,", 6) == 0) {
      /* joint,<name>,<R|P>,a,alpha,d,theta,lo,hi */
      char *s = strchr(line + 6, ',');
      twf_dh_row *r = &fx->rows[fx->n];
      ck_assert_msg(s != NULL && fx->n < MAXJ, "%s: bad joint line", arm);
      r->type = s[1] == 'P' ? TWF_JOINT_PRISMATIC : TWF_JOINT_REVOLUTE;
      ck_assert_uint_eq(parse_numbers(s + 2, v, 6), 6);
      r->a = v[0]; r->alpha = v[1]; r->d = v[2]; r->theta = v[3];
      fx->lo[fx->n] = v[4];
      fx->hi[fx->n] = v[5];
      fx->n++;
    } else if (strncmp(line, "flange,", 7) == 0) {
      ck_assert_uint_eq(parse_numbers(line + 6, v, 12), 12);
      pose_from_numbers(v, &fx->flange);
      have_flange = 1;
    } else if (strncmp(line, "fk,", 3) == 0) {
      ck_assert_msg(fx->n_fk < MAXFK, "%s: too many fk lines", arm);
      ck_assert_uint_eq(parse_numbers(line + 2, v, 32), fx->n + 12);
      memcpy(fx->q[fx->n_fk], v, fx->n * sizeof(double));
      pose_from_numbers(v + fx->n, &fx->T[fx->n_fk]);
      fx->n_fk++;
    } else {
      ck_abort_msg("%s: unexpected line %s", arm, line);
    }
  }
  fclose(f);
  ck_assert_msg(have_conv && have_flange && fx->n > 0 && fx->n_fk >= 50,
                "%s: incomplete fixture", arm);
}

static twf_model *model_from_fixture(const fixture *fx)
{
  twf_error err;
  twf_model *m = twf_model_alloc(fx->n, 0);
  twf_status st;
  ck_assert_ptr_nonnull(m);
  st = twf_model_set_from_dh(m, fx->rows, fx->n, fx->conv, &fx->flange, &err);
  ck_assert_msg(st == TWF_OK, "set_from_dh: %s", err.message);
  for (size_t i = 0; i < fx->n; i++) {
    m->joints[i].has_limits = 1;
    m->joints[i].limit_lo = fx->lo[i];
    m->joints[i].limit_hi = fx->hi[i];
  }
  return m;
}

/* ----------------------------------------------------------- helpers */

static double pose_diff(const twf_pose *A, const twf_pose *B)
{
  double d = 0.0;
  for (int i = 0; i < 3; i++) {
    d = fmax(d, fabs(A->p[i] - B->p[i]));
    for (int j = 0; j < 3; j++)
      d = fmax(d, fabs(A->R[i][j] - B->R[i][j]));
  }
  return d;
}

static double norm3(const double a[3])
{
  return sqrt(a[0] * a[0] + a[1] * a[1] + a[2] * a[2]);
}

/* Forward kinematics as a direct product of the DH matrices, for the
 * checks that need no fixture (definition in src/twistfit.h). */
static void dh_direct(const twf_dh_row *rows, size_t n, twf_dh_convention conv,
                      const double *q, twf_pose *T)
{
  const double z[3] = { 0, 0, 1 }, x[3] = { 1, 0, 0 };
  twf_pose_identity(T);
  for (size_t i = 0; i < n; i++) {
    twf_pose Rz, Tz, Tx, Rx, A;
    double th = rows[i].theta, d = rows[i].d;
    if (rows[i].type == TWF_JOINT_REVOLUTE)
      th += q[i];
    else
      d += q[i];
    twf_pose_identity(&Rz); twf_so3_exp(z, th, Rz.R);
    twf_pose_identity(&Rx); twf_so3_exp(x, rows[i].alpha, Rx.R);
    twf_pose_identity(&Tz); Tz.p[2] = d;
    twf_pose_identity(&Tx); Tx.p[0] = rows[i].a;
    if (conv == TWF_DH_STANDARD) {
      twf_pose_mul(&Rz, &Tz, &A);
      twf_pose_mul(&A, &Tx, &A);
      twf_pose_mul(&A, &Rx, &A);
    } else {
      twf_pose_mul(&Rx, &Tx, &A);
      twf_pose_mul(&A, &Rz, &A);
      twf_pose_mul(&A, &Tz, &A);
    }
    twf_pose_mul(T, &A, T);
  }
}

/* The tf6s table of the notes (standard DH, SI). */
static void tf6s_rows(twf_dh_row rows[6])
{
  const double D = PI / 180.0;
  const double t[6][4] = { { 0.150, -90, 0.450, 0 }, { 0.610, 0, 0, -90 },
                           { 0.115, -90, 0, 0 },     { 0, 90, 0.640, 0 },
                           { 0, -90, 0, 0 },         { 0, 0, 0.095, 0 } };
  for (int i = 0; i < 6; i++) {
    rows[i].a = t[i][0];
    rows[i].alpha = t[i][1] * D;
    rows[i].d = t[i][2];
    rows[i].theta = t[i][3] * D;
    rows[i].type = TWF_JOINT_REVOLUTE;
  }
}

/* ------------------------------------------------------------- tests */

START_TEST(test_alloc_defaults)
{
  twf_model *m = twf_model_alloc(3, 2);
  twf_pose I;
  ck_assert_ptr_nonnull(m);
  ck_assert_uint_eq(m->n_joints, 3);
  ck_assert_uint_eq(m->n_targets, 2);
  ck_assert_uint_eq(m->n_meta, 0);
  twf_pose_identity(&I);
  ck_assert(pose_diff(&m->home, &I) == 0.0);
  for (int i = 0; i < 3; i++) {
    ck_assert(m->joints[i].scale == 1.0);
    ck_assert(m->joints[i].offset == 0.0);
    ck_assert(m->joints[i].has_limits == 0);
    ck_assert(m->joints[i].name[0] == '\0');
  }
  ck_assert(m->targets[1].offset_known == 0);
  twf_model_free(m);
  twf_model_free(NULL);
  m = twf_model_alloc(0, 0);
  ck_assert_ptr_nonnull(m);
  ck_assert_ptr_null(twf_model_meta_get(m, "x"));
  twf_model_free(m);
}
END_TEST

START_TEST(test_meta_and_copy)
{
  twf_model *m = twf_model_alloc(2, 1), *c;
  char longkey[TWF_NAME_MAX + 8];
  ck_assert_ptr_nonnull(m);
  ck_assert_int_eq(twf_model_meta_set(m, "date", "2026-03-07"), TWF_OK);
  ck_assert_int_eq(twf_model_meta_set(m, "command", "twistfit fit a.csv"), TWF_OK);
  ck_assert_int_eq(twf_model_meta_set(m, "date", "2026-03-08T10:15"), TWF_OK);
  ck_assert_uint_eq(m->n_meta, 2);
  ck_assert_str_eq(twf_model_meta_get(m, "date"), "2026-03-08T10:15");
  ck_assert_str_eq(twf_model_meta_get(m, "command"), "twistfit fit a.csv");
  ck_assert_ptr_null(twf_model_meta_get(m, "Date"));
  ck_assert_int_eq(twf_model_meta_set(m, "", "x"), TWF_ERR_INVALID);
  ck_assert_int_eq(twf_model_meta_set(m, NULL, "x"), TWF_ERR_INVALID);
  ck_assert_int_eq(twf_model_meta_set(m, "k", NULL), TWF_ERR_INVALID);
  memset(longkey, 'k', sizeof longkey - 1);
  longkey[sizeof longkey - 1] = '\0';
  ck_assert_int_eq(twf_model_meta_set(m, longkey, "x"), TWF_ERR_INVALID);
  ck_assert_int_eq(twf_model_meta_set(m, "empty", ""), TWF_OK);
  ck_assert_str_eq(twf_model_meta_get(m, "empty"), "");

  strcpy(m->name, "tf6s-as-built");
  strcpy(m->joints[0].name, "j1");
  strcpy(m->joints[1].name, "j2");
  strcpy(m->targets[0].name, "T1");
  m->joints[1].twist[2] = 1.0;
  m->joints[1].limit_hi = 2.53;
  m->targets[0].offset[1] = 0.045;
  m->home.p[0] = 1.234;
  m->length_unit = TWF_LENGTH_UM;

  c = twf_model_copy(m);
  ck_assert_ptr_nonnull(c);
  ck_assert_str_eq(c->name, "tf6s-as-built");
  ck_assert_str_eq(c->joints[1].name, "j2");
  ck_assert(c->joints[1].twist[2] == 1.0 && c->joints[1].limit_hi == 2.53);
  ck_assert(c->targets[0].offset[1] == 0.045);
  ck_assert(c->home.p[0] == 1.234);
  ck_assert_int_eq(c->length_unit, TWF_LENGTH_UM);
  ck_assert_uint_eq(c->n_meta, 3);
  /* deep: the copy's strings and arrays are its own */
  ck_assert_ptr_ne(c->meta[0].value, m->meta[0].value);
  ck_assert_ptr_ne(c->joints, m->joints);
  ck_assert_int_eq(twf_model_meta_set(c, "date", "changed"), TWF_OK);
  ck_assert_str_eq(twf_model_meta_get(m, "date"), "2026-03-08T10:15");
  c->joints[0].name[0] = 'X';
  ck_assert_str_eq(m->joints[0].name, "j1");

  ck_assert_int_eq(twf_model_joint_index(m, "j2"), 1);
  ck_assert_int_eq(twf_model_joint_index(m, "j3"), -1);
  ck_assert_int_eq(twf_model_joint_index(m, NULL), -1);
  ck_assert_int_eq(twf_model_target_index(m, "T1"), 0);
  ck_assert_int_eq(twf_model_target_index(m, "T2"), -1);
  ck_assert_ptr_null(twf_model_copy(NULL));
  twf_model_free(c);
  twf_model_free(m);
}
END_TEST

START_TEST(test_reach)
{
  twf_model *m = twf_model_alloc(2, 0);
  ck_assert_ptr_nonnull(m);
  ck_assert(twf_model_reach(m) == 0.1); /* the floor */
  m->joints[1].point[0] = 0.3; m->joints[1].point[2] = 0.4;   /* 0.5 */
  ck_assert_close(twf_model_reach(m), 0.5, 1e-15);
  m->home.p[0] = -0.6; m->home.p[1] = 0.3; m->home.p[2] = 0.2; /* 0.7 */
  ck_assert_close(twf_model_reach(m), 0.7, 1e-15);
  twf_model_free(m);
}
END_TEST

/* Reference: Orocos KDL (PyKDL 1.5.1) ChainFkSolverPos_recursive with
 * Frame.DH / Frame.DH_Craig1989, tests/gen/gen_kdl_fk.py, fixtures
 * tests/fixtures/kdl_fk_<arm>.csv. Position within 1e-9 m, rotation
 * elements within 1e-12. */
START_TEST(test_fk_vs_kdl)
{
  const char *arm = kdl_arms[_i];
  static fixture fx;
  twf_model *m;
  load_fixture(arm, &fx);
  m = model_from_fixture(&fx);
  for (size_t k = 0; k < fx.n_fk; k++) {
    twf_pose T;
    double dp = 0.0, dr = 0.0;
    for (size_t i = 0; i < fx.n; i++) {
      /* the fixture stays within the limits it declares */
      ck_assert(fx.q[k][i] >= fx.lo[i] && fx.q[k][i] <= fx.hi[i]);
    }
    twf_model_fk(m, fx.q[k], NULL, &T);
    for (int i = 0; i < 3; i++) {
      dp = fmax(dp, fabs(T.p[i] - fx.T[k].p[i]));
      for (int j = 0; j < 3; j++)
        dr = fmax(dr, fabs(T.R[i][j] - fx.T[k].R[i][j]));
    }
    ck_assert_msg(dp <= 1e-9 && dr <= 1e-12,
                  "%s configuration %zu: position off by %g m, rotation by %g",
                  arm, k + 1, dp, dr);
  }
  twf_model_free(m);
}
END_TEST

/* prefix[i] is the product of the first i exponentials, flange =
 * prefix[n] home, theta = scale q + offset, NULL prefix allowed (header
 * contract). */
START_TEST(test_fk_prefix_scale_offset)
{
  static fixture fx;
  twf_model *m, *m0;
  twf_test_rng rng;
  twf_pose prefix[MAXJ + 1], T, T0, P;
  double q[MAXJ], theta[MAXJ];
  load_fixture("gen6", &fx);
  m = model_from_fixture(&fx);
  m0 = twf_model_copy(m);
  ck_assert_ptr_nonnull(m0);
  twf_test_rng_init(&rng, twf_test_seed(SEED));
  for (size_t i = 0; i < fx.n; i++) {
    m->joints[i].scale = 1.0 + twf_test_uniform(&rng, -0.01, 0.01);
    m->joints[i].offset = twf_test_uniform(&rng, -0.05, 0.05);
    q[i] = twf_test_uniform(&rng, fx.lo[i], fx.hi[i]);
    theta[i] = m->joints[i].scale * q[i] + m->joints[i].offset;
  }
  twf_model_fk(m, q, prefix, &T);
  twf_model_fk(m0, theta, NULL, &T0);
  ck_assert(pose_diff(&T, &T0) <= 1e-15);
  twf_pose_identity(&P);
  ck_assert(pose_diff(&prefix[0], &P) == 0.0);
  for (size_t i = 0; i < fx.n; i++) {
    twf_pose E;
    twf_se3_exp_joint(m->joints[i].twist, theta[i], &E);
    twf_pose_mul(&P, &E, &P);
    ck_assert(pose_diff(&prefix[i + 1], &P) <= 1e-15);
  }
  twf_pose_mul(&prefix[fx.n], &m->home, &P);
  ck_assert(pose_diff(&T, &P) == 0.0);
  twf_model_free(m0);
  twf_model_free(m);
}
END_TEST

/* log(T(q + h e_i) T(q - h e_i)^-1) / 2h against column i of the spatial
 * Jacobian (central differences, common practice, no source). */
START_TEST(test_jacobian_vs_finite_differences)
{
  static const char *const arms[] = { "tf6s", "tf4p", "tf7", "gen6_mdh" };
  static fixture fx;
  twf_test_rng rng;
  twf_test_rng_init(&rng, twf_test_seed(SEED + 1));
  for (size_t a = 0; a < sizeof arms / sizeof arms[0]; a++) {
    twf_model *m;
    load_fixture(arms[a], &fx);
    m = model_from_fixture(&fx);
    for (size_t i = 0; i < fx.n; i++) {
      m->joints[i].scale = 1.0 + twf_test_uniform(&rng, -0.02, 0.02);
      m->joints[i].offset = twf_test_uniform(&rng, -0.1, 0.1);
    }
    for (int rep = 0; rep < 10; rep++) {
      double q[MAXJ], J[6 * MAXJ];
      twf_pose prefix[MAXJ + 1];
      const double h = 1e-6;
      size_t n = fx.n;
      for (size_t i = 0; i < n; i++)
        q[i] = twf_test_uniform(&rng, fx.lo[i], fx.hi[i]);
      twf_model_fk(m, q, prefix, NULL);
      twf_model_jacobian_spatial(m, prefix, J);
      for (size_t i = 0; i < n; i++) {
        twf_pose Tp, Tm, D;
        double xi[6];
        double qi = q[i];
        q[i] = qi + h;
        twf_model_fk(m, q, NULL, &Tp);
        q[i] = qi - h;
        twf_model_fk(m, q, NULL, &Tm);
        q[i] = qi;
        twf_pose_inv(&Tm, &D);
        twf_pose_mul(&Tp, &D, &D);
        twf_se3_log(&D, xi);
        for (int r = 0; r < 6; r++) {
          double fd = xi[r] / (2.0 * h);
          ck_assert_msg(fabs(fd - J[(size_t)r * n + i]) <= 1e-8,
                        "%s joint %zu row %d: Jacobian %.12g, finite "
                        "difference %.12g", arms[a], i + 1, r,
                        J[(size_t)r * n + i], fd);
        }
      }
    }
    twf_model_free(m);
  }
}
END_TEST

/* Joint lines from a DH table: unit axes, reference point on the axis,
 * values worked by hand from the tf6s table (standard DH: joint i about
 * z_(i-1) through the origin of frame i-1). */
START_TEST(test_dh_joint_lines)
{
  twf_dh_row rows[6];
  twf_model *m = twf_model_alloc(6, 0);
  twf_error err;
  ck_assert_ptr_nonnull(m);
  tf6s_rows(rows);
  strcpy(m->joints[2].name, "elbow");
  m->joints[2].has_limits = 1;
  m->joints[2].limit_lo = -2.09;
  m->joints[2].limit_hi = 2.705;
  m->joints[4].scale = 1.25;
  m->joints[4].offset = 0.3;
  ck_assert_int_eq(twf_model_set_from_dh(m, rows, 6, TWF_DH_STANDARD, NULL, &err),
                   TWF_OK);
  /* names and limits kept, scale and offset reset */
  ck_assert_str_eq(m->joints[2].name, "elbow");
  ck_assert(m->joints[2].has_limits == 1 && m->joints[2].limit_lo == -2.09 &&
            m->joints[2].limit_hi == 2.705);
  ck_assert(m->joints[4].scale == 1.0 && m->joints[4].offset == 0.0);
  for (int i = 0; i < 6; i++) {
    const twf_joint *j = &m->joints[i];
    double wq[3];
    ck_assert_int_eq(j->type, TWF_JOINT_REVOLUTE);
    ck_assert_close(norm3(j->twist), 1.0, 1e-15);
    wq[0] = j->twist[1] * j->point[2] - j->twist[2] * j->point[1];
    wq[1] = j->twist[2] * j->point[0] - j->twist[0] * j->point[2];
    wq[2] = j->twist[0] * j->point[1] - j->twist[1] * j->point[0];
    for (int k = 0; k < 3; k++)
      ck_assert(fabs(j->twist[3 + k] + wq[k]) <= 1e-15);
  }
  /* joint 1: z through the origin; joint 2: frame 1 = Rz(0) Tz(0.45)
   * Tx(0.15) Rx(-90 deg), so axis Rx(-90) z = +y through (0.15, 0, 0.45);
   * joint 3: frame 2 adds Rz(-90) Tx(0.61): origin (0.15, 0, 1.06). */
  ck_assert(fabs(m->joints[0].twist[2] - 1.0) <= 1e-15);
  ck_assert(norm3(m->joints[0].point) == 0.0);
  ck_assert_close(m->joints[1].twist[1], 1.0, 1e-15);
  ck_assert_close(m->joints[1].point[0], 0.15, 1e-15);
  ck_assert(fabs(m->joints[1].point[1]) <= 1e-15);
  ck_assert_close(m->joints[1].point[2], 0.45, 1e-15);
  ck_assert_close(m->joints[2].point[0], 0.15, 1e-15);
  ck_assert(fabs(m->joints[2].point[1]) <= 1e-15);
  ck_assert_close(m->joints[2].point[2], 1.06, 1e-15);
  ck_assert_close(m->joints[2].twist[1], 1.0, 1e-15);
  /* home = A_1(0) ... A_6(0), the direct product of the DH matrices */
  {
    double q[6] = { 0 };
    twf_pose T;
    dh_direct(rows, 6, TWF_DH_STANDARD, q, &T);
    ck_assert(pose_diff(&T, &m->home) <= 1e-15);
  }
  twf_model_free(m);
}
END_TEST

/* Modified DH: joint i about z_i through the origin of frame i; prismatic
 * joints slide along it. Against the direct product of the definitions. */
START_TEST(test_dh_modified_prismatic_and_flange)
{
  const twf_dh_row rows[4] = {
    { 0.0, 0.0, 0.2175, 0.3, TWF_JOINT_REVOLUTE, 0.0 },
    { 0.3125, -1.2, 0.0, -0.45, TWF_JOINT_PRISMATIC, 0.0 },
    { -0.085, 2.1, 0.125, 0.0, TWF_JOINT_REVOLUTE, 0.0 },
    { 0.0415, 1.5707963267948966, -0.0625, 1.1, TWF_JOINT_PRISMATIC, 0.0 },
  };
  const twf_dh_convention convs[2] = { TWF_DH_STANDARD, TWF_DH_MODIFIED };
  twf_test_rng rng;
  twf_test_rng_init(&rng, twf_test_seed(SEED + 2));
  for (int c = 0; c < 2; c++) {
    twf_model *m = twf_model_alloc(4, 0);
    twf_pose F, Fi;
    twf_error err;
    double S[6] = { 0.2, -0.6, 0.3, 0.05, 0.11, -0.07 };
    ck_assert_ptr_nonnull(m);
    twf_se3_exp(S, 1.3, &F);
    ck_assert_int_eq(twf_model_set_from_dh(m, rows, 4, convs[c], &F, &err), TWF_OK);
    ck_assert_int_eq(m->joints[1].type, TWF_JOINT_PRISMATIC);
    ck_assert(norm3(m->joints[1].twist) == 0.0);
    ck_assert_close(norm3(m->joints[1].twist + 3), 1.0, 1e-15);
    for (int rep = 0; rep < 20; rep++) {
      double q[4];
      twf_pose T, Td;
      for (int i = 0; i < 4; i++)
        q[i] = twf_test_uniform(&rng, -1.5, 1.5);
      twf_model_fk(m, q, NULL, &T);
      dh_direct(rows, 4, convs[c], q, &Td);
      twf_pose_mul(&Td, &F, &Td);
      ck_assert_msg(pose_diff(&T, &Td) <= 1e-14, "convention %d: off by %g",
                    c, pose_diff(&T, &Td));
    }
    /* frame origins: the reference point of joint 1 in modified DH is
     * (0, 0, 0.2175), the origin of frame 1 */
    if (convs[c] == TWF_DH_MODIFIED) {
      ck_assert(fabs(m->joints[0].point[0]) <= 1e-15);
      ck_assert_close(m->joints[0].point[2], 0.2175, 1e-15);
    }
    /* without the flange the home pose is the last frame */
    ck_assert_int_eq(twf_model_set_from_dh(m, rows, 4, convs[c], NULL, &err), TWF_OK);
    twf_pose_inv(&F, &Fi);
    {
      twf_model *m2 = twf_model_alloc(4, 0);
      twf_pose H;
      ck_assert_ptr_nonnull(m2);
      ck_assert_int_eq(twf_model_set_from_dh(m2, rows, 4, convs[c], &F, &err),
                       TWF_OK);
      twf_pose_mul(&m2->home, &Fi, &H);
      ck_assert(pose_diff(&H, &m->home) <= 1e-15 * 4);
      twf_model_free(m2);
    }
    twf_model_free(m);
  }
}
END_TEST

/* Every error path of twf_model_set_from_dh; the model is left as it was. */
START_TEST(test_dh_errors)
{
  twf_dh_row rows[6], bad[6];
  twf_model *m = twf_model_alloc(6, 0), *orig;
  twf_error err;
  twf_pose F;
  const double nonfinite[3] = { NAN, INFINITY, -INFINITY };
  ck_assert_ptr_nonnull(m);
  tf6s_rows(rows);
  ck_assert_int_eq(twf_model_set_from_dh(m, rows, 6, TWF_DH_STANDARD, NULL, &err),
                   TWF_OK);
  m->joints[0].scale = 1.5; /* to see that failures do not reset it */
  orig = twf_model_copy(m);
  ck_assert_ptr_nonnull(orig);

  twf_error_clear(&err);
  ck_assert_int_eq(twf_model_set_from_dh(m, rows, 5, TWF_DH_STANDARD, NULL, &err),
                   TWF_ERR_INVALID);
  ck_assert_int_eq(err.status, TWF_ERR_INVALID);
  ck_assert_msg(strstr(err.message, "5 rows") != NULL, "message: %s", err.message);
  ck_assert_int_eq(twf_model_set_from_dh(m, NULL, 6, TWF_DH_STANDARD, NULL, &err),
                   TWF_ERR_INVALID);
  ck_assert_int_eq(twf_model_set_from_dh(NULL, rows, 6, TWF_DH_STANDARD, NULL, &err),
                   TWF_ERR_INVALID);
  ck_assert_int_eq(twf_model_set_from_dh(m, rows, 6, (twf_dh_convention)7, NULL,
                                         &err), TWF_ERR_INVALID);
  ck_assert_int_eq(twf_model_set_from_dh(m, rows, 6, TWF_DH_STANDARD, NULL, NULL),
                   TWF_OK); /* err may be NULL */
  m->joints[0].scale = 1.5;
  ck_assert_int_eq(twf_model_set_from_dh(m, rows, 5, TWF_DH_MODIFIED, NULL, NULL),
                   TWF_ERR_INVALID);

  for (int field = 0; field < 4; field++) {
    for (int k = 0; k < 3; k++) {
      memcpy(bad, rows, sizeof bad);
      switch (field) {
      case 0: bad[3].a = nonfinite[k]; break;
      case 1: bad[3].alpha = nonfinite[k]; break;
      case 2: bad[3].d = nonfinite[k]; break;
      default: bad[3].theta = nonfinite[k]; break;
      }
      twf_error_clear(&err);
      ck_assert_int_eq(twf_model_set_from_dh(m, bad, 6, TWF_DH_MODIFIED, NULL, &err),
                       TWF_ERR_VALUE);
      ck_assert_msg(strstr(err.message, "row 4") != NULL, "message: %s",
                    err.message);
    }
  }
  memcpy(bad, rows, sizeof bad);
  bad[1].type = (twf_joint_type)5;
  ck_assert_int_eq(twf_model_set_from_dh(m, bad, 6, TWF_DH_STANDARD, NULL, &err),
                   TWF_ERR_VALUE);

  twf_pose_identity(&F);
  F.p[1] = NAN;
  ck_assert_int_eq(twf_model_set_from_dh(m, rows, 6, TWF_DH_STANDARD, &F, &err),
                   TWF_ERR_VALUE);
  twf_pose_identity(&F);
  F.R[2][2] = INFINITY;
  ck_assert_int_eq(twf_model_set_from_dh(m, rows, 6, TWF_DH_STANDARD, &F, &err),
                   TWF_ERR_VALUE);
  twf_pose_identity(&F);
  F.R[0][0] = 1.001; /* not orthonormal */
  ck_assert_int_eq(twf_model_set_from_dh(m, rows, 6, TWF_DH_STANDARD, &F, &err),
                   TWF_ERR_VALUE);
  twf_pose_identity(&F);
  F.R[2][2] = -1.0; /* a reflection */
  ck_assert_int_eq(twf_model_set_from_dh(m, rows, 6, TWF_DH_STANDARD, &F, &err),
                   TWF_ERR_VALUE);

  /* untouched by every failure */
  ck_assert(m->joints[0].scale == 1.5);
  ck_assert(pose_diff(&m->home, &orig->home) == 0.0);
  for (int i = 0; i < 6; i++)
    for (int k = 0; k < 6; k++)
      ck_assert(m->joints[i].twist[k] == orig->joints[i].twist[k]);
  twf_model_free(orig);
  twf_model_free(m);
}
END_TEST

static Suite *model_suite(void)
{
  Suite *s = suite_create("model");
  TCase *tc = tcase_create("core");
  tcase_add_test(tc, test_alloc_defaults);
  tcase_add_test(tc, test_meta_and_copy);
  tcase_add_test(tc, test_reach);
  tcase_add_loop_test(tc, test_fk_vs_kdl, 0, (int)N_KDL_ARMS);
  tcase_add_test(tc, test_fk_prefix_scale_offset);
  tcase_add_test(tc, test_jacobian_vs_finite_differences);
  tcase_add_test(tc, test_dh_joint_lines);
  tcase_add_test(tc, test_dh_modified_prismatic_and_flange);
  tcase_add_test(tc, test_dh_errors);
  suite_add_tcase(s, tc);
  return s;
}

int main(void)
{
  return twf_test_run(model_suite());
}
