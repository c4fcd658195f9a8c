/* check_links.c: link parameters, their standard deviations and the
 * model -> DH / modified DH conversion (src/lib/report/links.c), and
 * Hayati's beta in the DH -> twists conversion (src/lib/kin/dh.c). */
#include "arms.h"
#include "testutil.h"
#include "twistfit.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define PI 3.14159265358979323846
#define DEG (PI / 180.0)
#define MAXJ 8
#define NV TWF_LINK_NVALUES

static const twf_perturbation perturb_mag = { 1e-3, 1e-3, 1e-3, 1e-3, 1e-4 };

static double wrap(double x) { return atan2(sin(x), cos(x)); }

static int is_angle(int v)
{
  return v == TWF_LINK_THETA || v == TWF_LINK_ALPHA || v == TWF_LINK_BETA;
}

static double value_diff(int v, double a, double b)
{
  return is_angle(v) ? wrap(a - b) : a - b;
}

/* Largest flange position and rotation difference of two models over
 * random configurations within a's limits. */
static void fk_diff(const twf_model *a, const twf_model *b, unsigned long long seed,
                    double *dp_max, double *da_max)
{
  double q[MAXJ];
  unsigned long long s = seed;
  *dp_max = *da_max = 0.0;
  for (int c = 0; c < 100; c++) {
    twf_pose Ta, Tb;
    double e = 0.0;
    twf_simulate_joints(a, 0.0, &s, q);
    twf_model_fk(a, q, NULL, &Ta);
    twf_model_fk(b, q, NULL, &Tb);
    for (int i = 0; i < 3; i++)
      e += (Ta.p[i] - Tb.p[i]) * (Ta.p[i] - Tb.p[i]);
    if (sqrt(e) > *dp_max)
      *dp_max = sqrt(e);
    if (twf_rot_angle_between(Ta.R, Tb.R) > *da_max)
      *da_max = twf_rot_angle_between(Ta.R, Tb.R);
  }
}

/* The model of a DH table, with m's names, limits and scales. */
static twf_model *from_table(const twf_model *m, const twf_dh_row *rows,
                             twf_dh_convention conv, const twf_pose *B,
                             const twf_pose *F)
{
  twf_model *r = twf_model_alloc(m->n_joints, 0);
  twf_error err;
  ck_assert_ptr_nonnull(r);
  for (size_t i = 0; i < m->n_joints; i++) {
    strcpy(r->joints[i].name, m->joints[i].name);
    r->joints[i].has_limits = m->joints[i].has_limits;
    r->joints[i].limit_lo = m->joints[i].limit_lo;
    r->joints[i].limit_hi = m->joints[i].limit_hi;
  }
  ck_assert_msg(twf_model_set_from_dh_beta(r, rows, m->n_joints, conv, B, F, &err) == TWF_OK,
                "set_from_dh_beta: %s", err.message);
  /* the DH variable is scale * q */
  for (size_t i = 0; i < m->n_joints; i++)
    r->joints[i].scale = m->joints[i].scale;
  return r;
}

/* Re-express m in another base frame: S <- Ad_G S, points <- G p, M <- G M
 * (every prediction changes by G only). */
static void reexpress(twf_model *m, const twf_pose *G)
{
  for (size_t i = 0; i < m->n_joints; i++) {
    twf_se3_adjoint_apply(G, m->joints[i].twist, m->joints[i].twist);
    twf_pose_apply(G, m->joints[i].point, m->joints[i].point);
  }
  twf_pose_mul(G, &m->home, &m->home);
}

static twf_model *arm_copy(test_arm arm, unsigned long long perturb_seed)
{
  twf_model *m = test_arm_model(arm);
  ck_assert_ptr_nonnull(m);
  if (perturb_seed != 0)
    twf_model_perturb(m, &perturb_mag, perturb_seed);
  return m;
}

static void links_ok(const twf_model *m, int full_pose, int use_beta,
                     const twf_model *ref, twf_links *l)
{
  twf_links_options o = twf_links_default_options();
  twf_error err;
  o.full_pose = full_pose;
  o.use_beta = use_beta;
  o.reference = ref;
  ck_assert_msg(twf_links_compute(m, &o, l, &err) == TWF_OK, "links: %s", err.message);
  ck_assert_uint_eq(l->n_rows, m->n_joints + 2);
}

/* ------------------------------------------------------------ (a) */

/* model -> DH (+beta) -> model gives the same forward kinematics, in both
 * conventions, for the sample arms and perturbed copies (reference: the
 * model's own forward kinematics; exact up to rounding by construction). */
START_TEST(test_round_trip)
{
  const unsigned long long seeds[4] = { 0, 11, 12, 13 };
  double worst_p = 0.0, worst_a = 0.0, worst_res = 0.0;
  for (int arm = 0; arm < ARM_COUNT; arm++)
    for (int s = 0; s < 4; s++)
      for (int conv = 0; conv < 2; conv++) {
        twf_model *m = arm_copy((test_arm)arm, seeds[s]), *r;
        twf_dh_row rows[MAXJ];
        twf_pose B, F;
        twf_dh_fit fit;
        twf_error err;
        double dp, da;
        ck_assert_int_eq(twf_model_to_dh(m, (twf_dh_convention)conv, 1, rows, &B, &F, &err),
                         TWF_OK);
        r = from_table(m, rows, (twf_dh_convention)conv, &B, &F);
        fk_diff(m, r, 77 + (unsigned long long)s, &dp, &da);
        ck_assert_msg(dp < 1e-9 && da < 1e-9, "%s seed %llu conv %d: %g m %g rad", m->name,
                      seeds[s], conv, dp, da);
        /* the residual function composes the table directly */
        ck_assert_int_eq(twf_dh_residual(m, rows, (twf_dh_convention)conv, &B, &F, 100, 5,
                                         &fit, &err), TWF_OK);
        ck_assert_uint_eq(fit.n_configs, 100);
        ck_assert_msg(fit.max_position_m < 1e-9 && fit.max_angle_rad < 1e-9,
                      "%s: residual %g m %g rad", m->name, fit.max_position_m,
                      fit.max_angle_rad);
        ck_assert(fit.rms_position_m <= fit.max_position_m);
        worst_p = fmax(worst_p, dp);
        worst_a = fmax(worst_a, da);
        worst_res = fmax(worst_res, fit.max_position_m);
        /* the residual sees a wrong table: 1 urad on one theta moves the
         * flange by about a micrometre at this reach */
        rows[1].theta += 1e-6;
        ck_assert_int_eq(twf_dh_residual(m, rows, (twf_dh_convention)conv, &B, &F, 100, 5,
                                         &fit, &err), TWF_OK);
        ck_assert_msg(fit.max_position_m > 1e-7, "residual blind: %g", fit.max_position_m);
        twf_model_free(r);
        twf_model_free(m);
      }
  fprintf(stderr, "round trip: worst %.2g m, %.2g rad; residual %.2g m\n", worst_p, worst_a,
          worst_res);
}
END_TEST

/* Without beta, nearly parallel axes need far feet: still a valid table,
 * but the residual shows the rounding of large d (recorded, and bounded so
 * a regression to a broken conversion shows). */
START_TEST(test_plain_dh_residual)
{
  for (int arm = 0; arm < ARM_COUNT; arm++) {
    twf_model *m = arm_copy((test_arm)arm, 21);
    twf_dh_row rows[MAXJ];
    twf_pose B, F;
    twf_dh_fit fit;
    twf_error err;
    ck_assert_int_eq(twf_model_to_dh(m, TWF_DH_STANDARD, 0, rows, &B, &F, &err), TWF_OK);
    for (size_t i = 0; i < m->n_joints; i++)
      ck_assert(rows[i].beta == 0.0);
    ck_assert_int_eq(twf_dh_residual(m, rows, TWF_DH_STANDARD, &B, &F, 100, 5, &fit, &err),
                     TWF_OK);
    fprintf(stderr, "plain DH %s: residual max %.2g m\n", m->name, fit.max_position_m);
    ck_assert(fit.max_position_m < 1e-6);
    twf_model_free(m);
  }
}
END_TEST

/* beta = 0 everywhere: twf_model_set_from_dh_beta gives exactly what
 * twf_model_set_from_dh gives (bit for bit), and a beta of 0.01 deg moves
 * the arm (so the field is read). */
START_TEST(test_beta_zero_is_plain_dh)
{
  twf_model *m = arm_copy(ARM_TF7, 31), *a = twf_model_alloc(7, 0), *b = twf_model_alloc(7, 0);
  twf_dh_row rows[MAXJ];
  twf_pose B, F;
  twf_error err;
  double dp, da;
  ck_assert_int_eq(twf_model_to_dh(m, TWF_DH_MODIFIED, 0, rows, &B, &F, &err), TWF_OK);
  ck_assert_int_eq(twf_model_set_from_dh(a, rows, 7, TWF_DH_MODIFIED, &F, &err), TWF_OK);
  ck_assert_int_eq(twf_model_set_from_dh_beta(b, rows, 7, TWF_DH_MODIFIED, NULL, &F, &err),
                   TWF_OK);
  for (size_t i = 0; i < 7; i++) {
    ck_assert(memcmp(a->joints[i].twist, b->joints[i].twist, sizeof a->joints[i].twist) == 0);
    ck_assert(memcmp(a->joints[i].point, b->joints[i].point, sizeof a->joints[i].point) == 0);
  }
  ck_assert(memcmp(&a->home, &b->home, sizeof a->home) == 0);
  /* the plain entry point ignores beta, the new one reads it */
  rows[3].beta = 0.01 * DEG;
  ck_assert_int_eq(twf_model_set_from_dh(a, rows, 7, TWF_DH_MODIFIED, &F, &err), TWF_OK);
  ck_assert_int_eq(twf_model_set_from_dh_beta(b, rows, 7, TWF_DH_MODIFIED, NULL, &F, &err),
                   TWF_OK);
  for (size_t i = 0; i < 7; i++)
    a->joints[i].has_limits = b->joints[i].has_limits = 0;
  fk_diff(a, b, 3, &dp, &da);
  ck_assert_msg(dp > 1e-5, "beta not honoured: %g", dp);
  /* out of range and non-finite beta are refused, the model left alone */
  rows[3].beta = 0.5 * PI;
  ck_assert_int_eq(twf_model_set_from_dh_beta(b, rows, 7, TWF_DH_MODIFIED, NULL, &F, &err),
                   TWF_ERR_VALUE);
  rows[3].beta = NAN;
  ck_assert_int_eq(twf_model_set_from_dh_beta(b, rows, 7, TWF_DH_MODIFIED, NULL, &F, &err),
                   TWF_ERR_VALUE);
  twf_model_free(a);
  twf_model_free(b);
  twf_model_free(m);
}
END_TEST

/* ------------------------------------------------------------ (b) */

typedef struct kdl_fixture {
  twf_dh_convention conv;
  size_t n;
  twf_dh_row rows[MAXJ];
  double lo[MAXJ], hi[MAXJ];
  double u[MAXJ][3], p[MAXJ][3];
  twf_pose flange, home;
  size_t n_fk;
  double q[64][MAXJ];
  twf_pose T[64];
} kdl_fixture;

static int numbers(const char *s, double *v, int max)
{
  int k = 0;
  while (k < max && s != NULL && *s) {
    char *end;
    v[k++] = strtod(s, &end);
    s = strchr(end, ',');
    if (s)
      s++;
  }
  return k;
}

static void pose_from(const double *v, twf_pose *T)
{
  for (int i = 0; i < 3; i++) {
    T->p[i] = v[i];
    for (int j = 0; j < 3; j++)
      T->R[i][j] = v[3 + 3 * i + j];
  }
}

static void read_kdl(const char *name, kdl_fixture *fx)
{
  char path[256], line[4096];
  double v[64];
  size_t nl = 0;
  FILE *f;
  snprintf(path, sizeof path, "tests/fixtures/kdl_links_%s.csv", name);
  f = fopen(twf_test_srcpath(path), "r");
  ck_assert_msg(f != NULL, "cannot open %s (run tests/gen/gen_kdl_links.py)", path);
  memset(fx, 0, sizeof *fx);
  while (fgets(line, sizeof line, f)) {
    if (line[0] == '#')
      continue;
    if (strncmp(line, "convention,", 11) == 0) {
      fx->conv = strncmp(line + 11, "modified", 8) == 0 ? TWF_DH_MODIFIED : TWF_DH_STANDARD;
    } else if (strncmp(line, "joint,", 6) == 0) {
      /* joint,<name>,<R|P>,a,alpha,d,theta,beta,lo,hi */
      char *s = strchr(line + 6, ',');
      twf_dh_row *r = &fx->rows[fx->n];
      ck_assert(s != NULL && fx->n < MAXJ);
      r->type = s[1] == 'P' ? TWF_JOINT_PRISMATIC : TWF_JOINT_REVOLUTE;
      ck_assert_int_eq(numbers(s + 3, v, 7), 7);
      r->a = v[0]; r->alpha = v[1]; r->d = v[2]; r->theta = v[3]; r->beta = v[4];
      fx->lo[fx->n] = v[5];
      fx->hi[fx->n] = v[6];
      fx->n++;
    } else if (strncmp(line, "line,", 5) == 0) {
      /* line,<name>,ux,uy,uz,px,py,pz: joint line at q = 0 from KDL */
      ck_assert(nl < MAXJ);
      ck_assert_int_eq(numbers(strchr(line + 5, ',') + 1, v, 6), 6);
      memcpy(fx->u[nl], v, sizeof fx->u[nl]);
      memcpy(fx->p[nl], v + 3, sizeof fx->p[nl]);
      nl++;
    } else if (strncmp(line, "flange,", 7) == 0) {
      ck_assert_int_eq(numbers(line + 7, v, 12), 12);
      pose_from(v, &fx->flange);
    } else if (strncmp(line, "home,", 5) == 0) {
      ck_assert_int_eq(numbers(line + 5, v, 12), 12);
      pose_from(v, &fx->home);
    } else if (strncmp(line, "fk,", 3) == 0) {
      ck_assert(fx->n_fk < 64);
      ck_assert_int_eq(numbers(line + 3, v, (int)fx->n + 12), (int)fx->n + 12);
      memcpy(fx->q[fx->n_fk], v, fx->n * sizeof v[0]);
      pose_from(v + fx->n, &fx->T[fx->n_fk]);
      fx->n_fk++;
    }
  }
  fclose(f);
  ck_assert_uint_eq(nl, fx->n);
  ck_assert(fx->n_fk >= 10);
}

static void against_kdl(const twf_model *m, const kdl_fixture *fx, double tol, double *worst)
{
  for (size_t c = 0; c < fx->n_fk; c++) {
    twf_pose T;
    double e = 0.0;
    twf_model_fk(m, fx->q[c], NULL, &T);
    for (int i = 0; i < 3; i++)
      e += (T.p[i] - fx->T[c].p[i]) * (T.p[i] - fx->T[c].p[i]);
    e = sqrt(e);
    ck_assert_msg(e < tol && twf_rot_angle_between(T.R, fx->T[c].R) < tol,
                  "config %zu: %g m, %g rad from KDL", c, e,
                  twf_rot_angle_between(T.R, fx->T[c].R));
    *worst = fmax(*worst, e);
  }
}

/* A perturbed tf6s with a 0.01 deg beta between j2 and j3, in standard DH
 * and regrouped into modified DH: Orocos KDL (Debian python3-pykdl, through
 * tests/gen/gen_kdl_links.py: Frame.DH / Frame.DH_Craig1989, beta as an
 * extra RotY segment) computes the forward kinematics and the joint lines
 * at zero. Checked: (1) the DH -> twists conversion with beta against
 * KDL's FK; (2) the model built from KDL's lines (not from our DH code),
 * converted to DH by twf_model_to_dh and back, against KDL's FK; (3) the
 * recovered numbers against the table KDL was built from, where the forms
 * agree (every row but the last, whose link to the flange we take in
 * Hayati's form). */
START_TEST(test_kdl_links)
{
  const char *names[2] = { "tf6s_beta", "tf6s_beta_mdh" };
  double worst1 = 0, worst2 = 0, worst_num = 0;
  for (int a = 0; a < 2; a++) {
    static kdl_fixture fx;
    twf_model *m, *lines_model, *back;
    twf_dh_row rows[MAXJ];
    twf_pose B, F;
    twf_error err;
    read_kdl(names[a], &fx);
    m = twf_model_alloc(fx.n, 0);
    ck_assert_ptr_nonnull(m);
    for (size_t i = 0; i < fx.n; i++) {
      snprintf(m->joints[i].name, TWF_NAME_MAX, "j%zu", i + 1);
      m->joints[i].has_limits = 1;
      m->joints[i].limit_lo = fx.lo[i];
      m->joints[i].limit_hi = fx.hi[i];
    }
    ck_assert_int_eq(twf_model_set_from_dh_beta(m, fx.rows, fx.n, fx.conv, NULL, &fx.flange,
                                                &err), TWF_OK);
    against_kdl(m, &fx, 1e-12, &worst1);

    lines_model = twf_model_copy(m);
    for (size_t i = 0; i < fx.n; i++) {
      twf_joint *j = &lines_model->joints[i];
      twf_twist_revolute(fx.u[i], fx.p[i], j->twist);
      memcpy(j->point, fx.p[i], sizeof j->point);
    }
    lines_model->home = fx.home;
    ck_assert_int_eq(twf_model_to_dh(lines_model, fx.conv, 1, rows, &B, &F, &err), TWF_OK);
    back = from_table(lines_model, rows, fx.conv, &B, &F);
    against_kdl(back, &fx, 1e-12, &worst2);
    /* the frame 0 of KDL's chain is the base: z along line 1 through the
     * origin */
    for (int i = 0; i < 3; i++) {
      ck_assert(fabs(B.p[i]) < 1e-12);
      for (int j = 0; j < 3; j++)
        ck_assert(fabs(B.R[i][j] - (i == j)) < 1e-12);
    }
    for (size_t i = 0; i + 1 < fx.n; i++) {
      /* standard: row i holds link i; modified: row i holds link i-1, so
       * its theta and d of row i are comparable up to n-1, its link from 2 */
      const double got[5] = { rows[i].theta, rows[i].d, rows[i].a, rows[i].alpha, rows[i].beta };
      const double want[5] = { fx.rows[i].theta, fx.rows[i].d, fx.rows[i].a, fx.rows[i].alpha,
                               fx.rows[i].beta };
      for (int v = 0; v < 5; v++) {
        double e = fabs(value_diff(v, got[v], want[v]));
        ck_assert_msg(e < 1e-10, "%s row %zu %s: %.15g against KDL's table %.15g", names[a],
                      i + 1, twf_link_value_name((twf_link_value)v), got[v], want[v]);
        worst_num = fmax(worst_num, e);
      }
    }
    /* the beta row is recognised as Hayati's */
    {
      size_t ib = fx.conv == TWF_DH_STANDARD ? 1 : 2;
      ck_assert(fx.rows[ib].beta != 0.0);
      ck_assert(fabs(rows[ib].beta - fx.rows[ib].beta) < 1e-12);
    }
    twf_model_free(back);
    twf_model_free(lines_model);
    twf_model_free(m);
  }
  fprintf(stderr, "KDL: DH+beta -> twists %.2g m, lines -> DH -> twists %.2g m, "
          "table numbers %.2g\n", worst1, worst2, worst_num);
}
END_TEST

/* ------------------------------------------------------------ (c) */

/* The link values a calibration determines do not depend on the base frame
 * (the model re-expressed by a rigid motion G) nor on another joint's
 * offset; an offsets-only change moves only that joint's variable, by
 * exactly the change (design: calibration-model.md, link parameters).
 * Row 0 must change with the base, or the test proves nothing. */
START_TEST(test_invariance)
{
  const unsigned long long seeds[3] = { 0, 41, 42 };
  twf_pose G;
  test_tracker_base(&G);
  G.p[0] *= 0.2; /* a frame nearer the arm, still rotated about a skew axis */
  for (int arm = 0; arm < ARM_COUNT; arm++)
    for (int s = 0; s < 3; s++)
      for (int full = 0; full < 2; full++) {
        twf_model *m = arm_copy((test_arm)arm, seeds[s]), *g = twf_model_copy(m);
        twf_links l0, l1;
        double moved = 0.0;
        size_t checked = 0;
        links_ok(m, full, 1, NULL, &l0);
        reexpress(g, &G);
        links_ok(g, full, 1, NULL, &l1);
        for (size_t k = 0; k < l0.n_rows; k++) {
          ck_assert_int_eq(l0.rows[k].form, l1.rows[k].form);
          for (int v = 0; v < NV; v++) {
            double e = fabs(value_diff(v, l1.rows[k].value[v], l0.rows[k].value[v]));
            if (l0.rows[k].why[v] == TWF_LINK_DETERMINED) {
              ck_assert_msg(e < 1e-9, "%s seed %llu row %zu %s moved %g with the base",
                            m->name, seeds[s], k, twf_link_value_name((twf_link_value)v), e);
              checked++;
            } else if (k == 0) {
              moved = fmax(moved, e);
            }
          }
        }
        ck_assert_msg(moved > 1e-3, "%s: the base frame change did not show in row 0", m->name);
        /* tf4p, a SCARA: its prismatic line's place is a convention */
        ck_assert_msg(checked >= 3, "%s: only %zu determined values", m->name, checked);
        /* offsets */
        for (size_t j = 0; j < m->n_joints; j++) {
          twf_model *o = twf_model_copy(m);
          twf_links l2;
          size_t var_row = j + 1;
          int var = m->joints[j].type == TWF_JOINT_REVOLUTE ? TWF_LINK_THETA : TWF_LINK_D;
          double delta = var == TWF_LINK_THETA ? 0.01 : 0.003;
          o->joints[j].offset += delta;
          links_ok(o, full, 1, NULL, &l2);
          ck_assert_int_eq(l2.rows[var_row].variable, var);
          ck_assert_msg(fabs(value_diff(var, l2.rows[var_row].value[var],
                                        l0.rows[var_row].value[var]) - delta) < 1e-9,
                        "%s joint %zu: offset change %g shows as %g", m->name, j + 1, delta,
                        value_diff(var, l2.rows[var_row].value[var], l0.rows[var_row].value[var]));
          for (size_t k = 0; k < l0.n_rows; k++)
            for (int v = 0; v < NV; v++) {
              if (k == var_row && v == var)
                continue;
              if (l0.rows[k].why[v] != TWF_LINK_DETERMINED)
                continue;
              ck_assert_msg(fabs(value_diff(v, l2.rows[k].value[v], l0.rows[k].value[v])) < 1e-9,
                            "%s: offset of joint %zu moved row %zu %s by %g", m->name, j + 1, k,
                            twf_link_value_name((twf_link_value)v),
                            value_diff(v, l2.rows[k].value[v], l0.rows[k].value[v]));
            }
          twf_links_clear(&l2);
          twf_model_free(o);
        }
        twf_links_clear(&l0);
        twf_links_clear(&l1);
        twf_model_free(g);
        twf_model_free(m);
      }
}
END_TEST

/* What is flagged as not determined: row 0 by the base, theta and d of row
 * 1 by the base, the last link and the flange by the targets with points
 * only, none of that by the targets with 6-D data (the reasons of
 * calibration-model.md, "Redundant and weak parameters"). */
START_TEST(test_not_determined_flags)
{
  twf_model *m = arm_copy(ARM_TF6S, 0);
  twf_links lp, lf;
  size_t n = m->n_joints;
  links_ok(m, 0, 1, NULL, &lp);
  links_ok(m, 1, 1, NULL, &lf);
  ck_assert_int_eq(lp.rows[0].why[TWF_LINK_A], TWF_LINK_BY_BASE);
  ck_assert_int_eq(lp.rows[1].why[TWF_LINK_THETA], TWF_LINK_BY_BASE);
  ck_assert_int_eq(lp.rows[1].why[TWF_LINK_D], TWF_LINK_BY_BASE);
  ck_assert_int_eq(lp.rows[1].why[TWF_LINK_A], TWF_LINK_DETERMINED);
  ck_assert_int_eq(lp.rows[2].why[TWF_LINK_THETA], TWF_LINK_DETERMINED);
  ck_assert_int_eq(lp.rows[n].why[TWF_LINK_THETA], TWF_LINK_BY_TARGETS);
  ck_assert_int_eq(lp.rows[n + 1].why[TWF_LINK_D], TWF_LINK_BY_TARGETS);
  ck_assert_int_eq(lf.rows[n].why[TWF_LINK_THETA], TWF_LINK_DETERMINED);
  ck_assert_int_eq(lf.rows[n + 1].why[TWF_LINK_D], TWF_LINK_DETERMINED);
  ck_assert_int_eq(lf.rows[n + 1].why[TWF_LINK_A], TWF_LINK_NOT_IN_FORM);
  ck_assert_int_eq(lf.rows[2].why[TWF_LINK_D], TWF_LINK_NOT_IN_FORM); /* Hayati's */
  ck_assert_int_eq(lf.rows[3].why[TWF_LINK_BETA], TWF_LINK_NOT_IN_FORM); /* DH */
  ck_assert_str_eq(twf_link_why_text(TWF_LINK_BY_BASE), "absorbed by the base pose");
  ck_assert_str_eq(twf_link_value_name(TWF_LINK_BETA), "beta");
  twf_links_clear(&lp);
  twf_links_clear(&lf);
  twf_model_free(m);
}
END_TEST

/* ------------------------------------------------------------ (d) */

static size_t jac_alloc(const twf_model *m, unsigned groups, const twf_links *l, double **J)
{
  twf_error err;
  twf_errmodel *em = twf_errmodel_alloc(m, groups, &err);
  size_t p;
  ck_assert_ptr_nonnull(em);
  p = twf_errmodel_n_params(em);
  twf_errmodel_free(em);
  *J = calloc(l->n_rows * NV * p, sizeof **J);
  ck_assert_ptr_nonnull(*J);
  return p;
}

/* The standard deviations' Jacobian: central differences of the fold-in at
 * two step sizes agree (1e-6 and 3e-6 m at the reach, on the values a
 * calibration determines); analytic columns
 * agree (an offset moves exactly its joint's variable; the home pose moves
 * only the last link and the flange row; a shift of line k+1 changes the
 * common normal's length a_k by the shift's component along the normal,
 * first order of a = (p - o).x, calibration-model.md's shifts). */
START_TEST(test_jacobian)
{
  const unsigned groups = TWF_GROUPS_GEOMETRIC | TWF_GROUP_BIT(TWF_GROUP_SCALE);
  double worst_rel = 0.0;
  for (int arm = 0; arm < ARM_COUNT; arm++)
    for (int pert = 0; pert < 2; pert++) {
      twf_model *m = arm_copy((test_arm)arm, pert ? 51 : 0);
      twf_links l;
      twf_errmodel *em;
      twf_error err;
      double *J1, *J2;
      size_t p, r, j, n = m->n_joints;
      links_ok(m, 1, 1, NULL, &l);
      p = jac_alloc(m, groups, &l, &J1);
      jac_alloc(m, groups, &l, &J2);
      ck_assert_int_eq(twf_links_jacobian(m, groups, &l, 1e-6, J1, &err), TWF_OK);
      ck_assert_int_eq(twf_links_jacobian(m, groups, &l, 3e-6, J2, &err), TWF_OK);
      em = twf_errmodel_alloc(m, groups, &err);
      for (r = 0; r < l.n_rows * NV; r++)
        for (j = 0; j < p; j++) {
          /* both in length units: per metre of motion at the reach */
          double sc = twf_errmodel_param_scale(em, j) == 1.0 ? 1.0 : 1.0 / l.reach;
          double v = is_angle((int)(r % NV)) ? l.reach : 1.0;
          double a = J1[r * p + j] * sc * v, b = J2[r * p + j] * sc * v;
          double rel = fabs(a - b) / fmax(1.0, fmax(fabs(a), fabs(b)));
          /* values a calibration leaves free carry no standard deviation */
          if (l.rows[r / NV].why[r % NV] != TWF_LINK_DETERMINED)
            continue;
          /* 1e-4: the perturbed arms' flange z-axis lies within 1 mm of
           * the last joint line, so the last frame's x turns by ~1/a per
           * metre and second-order terms reach (h/a)^2 = 1e-5 */
          ck_assert_msg(rel < 1e-4, "%s row %zu %s, %s: %g against %g", m->name, r / NV,
                        twf_link_value_name((twf_link_value)(r % NV)),
                        twf_errmodel_param(em, j)->name, a, b);
          worst_rel = fmax(worst_rel, rel);
        }
      for (j = 0; j < p; j++) {
        const twf_param *pa = twf_errmodel_param(em, j);
        if (pa->group == TWF_GROUP_OFFSETS) {
          size_t vr = (size_t)pa->joint + 1;
          int var = l.rows[vr].variable;
          for (r = 0; r < l.n_rows * NV; r++) {
            double want = (r == vr * NV + (size_t)var) ? 1.0 : 0.0;
            /* rounding through the near-coincident last link reaches 1e-7 */
            ck_assert_msg(fabs(J1[r * p + j] - want) < 1e-6, "%s %s on row %zu %s: %g",
                          m->name, pa->name, r / NV,
                          twf_link_value_name((twf_link_value)(r % NV)), J1[r * p + j]);
          }
        } else if (pa->group == TWF_GROUP_HOME || pa->group == TWF_GROUP_TARGETS ||
                   pa->group == TWF_GROUP_BASE || pa->group == TWF_GROUP_SCALE) {
          /* the base moves the tracker frame, not the model; targets and
           * scales are not geometry at logged zero */
          size_t first = pa->group == TWF_GROUP_HOME ? n : l.n_rows;
          for (r = 0; r < first * NV; r++)
            ck_assert_msg(J1[r * p + j] == 0.0, "%s %s moves row %zu", m->name, pa->name, r / NV);
          if (pa->group != TWF_GROUP_HOME)
            for (r = 0; r < l.n_rows * NV; r++)
              ck_assert(J1[r * p + j] == 0.0);
        } else if (!pert && pa->group == TWF_GROUP_SHIFTS) {
          /* nominal arm (offsets 0: lines at logged zero are the twists):
           * shift of line k+1 against a_k of a DH link k */
          size_t k = (size_t)pa->joint;
          const twf_joint *j0 = &m->joints[k - (k > 0)], *j1 = &m->joints[k];
          double u1[3], u2[3], x[3], w[3], s, a_s;
          if (k == 0 || l.rows[k].form != TWF_LINK_FORM_DH || j0->type != TWF_JOINT_REVOLUTE)
            continue;
          x[0] = j0->twist[1] * j1->twist[2] - j0->twist[2] * j1->twist[1];
          x[1] = j0->twist[2] * j1->twist[0] - j0->twist[0] * j1->twist[2];
          x[2] = j0->twist[0] * j1->twist[1] - j0->twist[1] * j1->twist[0];
          s = sqrt(x[0] * x[0] + x[1] * x[1] + x[2] * x[2]);
          for (int i = 0; i < 3; i++) {
            x[i] /= s;
            w[i] = j1->point[i] - j0->point[i];
          }
          a_s = x[0] * w[0] + x[1] * w[1] + x[2] * w[2];
          if (a_s < -1e-9)
            for (int i = 0; i < 3; i++)
              x[i] = -x[i];
          twf_errmodel_axis_basis(em, k, u1, u2);
          {
            const double *u = pa->component == 0 ? u1 : u2;
            double want = x[0] * u[0] + x[1] * u[1] + x[2] * u[2];
            double got = J1[(k * NV + TWF_LINK_A) * p + j];
            ck_assert_msg(fabs(got - want) < 1e-8, "%s %s: da = %g, analytic %g", m->name,
                          pa->name, got, want);
          }
        }
      }
      twf_errmodel_free(em);
      free(J1);
      free(J2);
      twf_links_clear(&l);
      twf_model_free(m);
    }
  fprintf(stderr, "Jacobian: steps 1e-6 and 3e-6 agree to %.2g (relative, length units)\n",
          worst_rel);
}
END_TEST

/* Propagation: with the offsets alone and a diagonal covariance, each
 * joint's variable has its offset's standard deviation exactly; values a
 * calibration does not determine get NAN, values not in the form 0. */
START_TEST(test_propagate)
{
  const unsigned groups = TWF_GROUP_BIT(TWF_GROUP_OFFSETS);
  twf_model *m = arm_copy(ARM_TF6P, 61);
  twf_links l;
  twf_error err;
  size_t n = m->n_joints;
  double cov[36] = { 0 };
  links_ok(m, 0, 1, NULL, &l);
  for (size_t i = 0; i < n; i++)
    cov[i * n + i] = pow(1e-4 * (double)(i + 1), 2);
  ck_assert_int_eq(twf_links_propagate(m, groups, cov, &l, &err), TWF_OK);
  for (size_t i = 1; i + 1 < n; i++)
    ck_assert_close(l.rows[i + 1].std[TWF_LINK_THETA], 1e-4 * (double)(i + 1), 1e-7);
  ck_assert(isnan(l.rows[1].std[TWF_LINK_THETA]));   /* by the base */
  ck_assert(isnan(l.rows[n].std[TWF_LINK_THETA]));   /* by the targets */
  ck_assert(l.rows[2].std[TWF_LINK_D] == 0.0);       /* Hayati's: no d */
  ck_assert(l.rows[3].std[TWF_LINK_A] < 1e-10);      /* offsets do not move a */
  twf_links_clear(&l);
  twf_model_free(m);
}
END_TEST

/* ------------------------------------------------------------ (e) */

/* tf6s's j2 and j3 are parallel: the link takes Hayati's form, and a
 * 0.01 deg tilt of j3 either way keeps it there with small values and a
 * Jacobian of order one (in length units), where plain DH puts the foot
 * kilometres away and its d's derivatives at 1e6 and more (Hayati 1983's
 * argument; the gains are links.h's criterion). */
START_TEST(test_parallel_beta)
{
  const unsigned groups = TWF_GROUPS_GEOMETRIC;
  twf_model *nominal = arm_copy(ARM_TF6S, 0);
  twf_links ln;
  links_ok(nominal, 1, 1, NULL, &ln);
  ck_assert_int_eq(ln.rows[2].form, TWF_LINK_FORM_BETA);
  ck_assert_int_eq(ln.rows[1].form, TWF_LINK_FORM_DH);
  ck_assert_int_eq(ln.rows[3].form, TWF_LINK_FORM_DH);
  ck_assert(isinf(ln.rows[2].cond_dh));
  for (int comp = 0; comp < 2; comp++) {
    twf_model *m = twf_model_copy(nominal);
    twf_errmodel *em;
    twf_error err;
    twf_pose B;
    twf_links lb, ld;
    double *delta, *Jb, *Jd, maxb = 0.0, maxd = 0.0;
    size_t p, j;
    em = twf_errmodel_alloc(m, groups, &err);
    p = twf_errmodel_n_params(em);
    delta = calloc(p, sizeof *delta);
    for (j = 0; j < p; j++) {
      const twf_param *pa = twf_errmodel_param(em, j);
      if (pa->group == TWF_GROUP_TILTS && pa->joint == 2 && pa->component == comp)
        delta[j] = 0.01 * DEG;
    }
    twf_pose_identity(&B);
    twf_errmodel_fold(em, delta, m, &B);
    links_ok(m, 1, 1, NULL, &lb);
    links_ok(m, 1, 0, NULL, &ld);
    ck_assert_int_eq(lb.rows[2].form, TWF_LINK_FORM_BETA);
    ck_assert(lb.rows[2].cond_beta < 10.0);
    ck_assert_msg(lb.rows[2].cond_dh > 1e6, "cond_dh %g", lb.rows[2].cond_dh);
    /* the tilt shows as alpha or beta of about 0.01 deg, a stays near 0.61 m */
    ck_assert(fabs(lb.rows[2].value[TWF_LINK_A] - 0.610) < 1e-3);
    ck_assert(hypot(lb.rows[2].value[TWF_LINK_ALPHA], lb.rows[2].value[TWF_LINK_BETA]) <
              0.011 * DEG);
    ck_assert(fabs(lb.rows[3].value[TWF_LINK_D] - ln.rows[3].value[TWF_LINK_D]) < 1e-3);
    /* plain DH: the feet run away */
    ck_assert_int_eq(ld.rows[2].form, TWF_LINK_FORM_DH);
    jac_alloc(m, groups, &lb, &Jb);
    jac_alloc(m, groups, &ld, &Jd);
    ck_assert_int_eq(twf_links_jacobian(m, groups, &lb, 0, Jb, &err), TWF_OK);
    ck_assert_int_eq(twf_links_jacobian(m, groups, &ld, 0, Jd, &err), TWF_OK);
    twf_errmodel_update(em, m);
    for (size_t r = 2 * NV; r < 4 * NV; r++)
      for (j = 0; j < p; j++) {
        double sc = twf_errmodel_param_scale(em, j) == 1.0 ? 1.0 : 1.0 / lb.reach;
        double v = is_angle((int)(r % NV)) ? lb.reach : 1.0;
        maxb = fmax(maxb, fabs(Jb[r * p + j]) * sc * v);
        maxd = fmax(maxd, fabs(Jd[r * p + j]) * sc * v);
      }
    fprintf(stderr, "tf6s j2/j3 tilted 0.01 deg about u%d: Hayati d %.3g m, plain DH d %.3g m; "
            "largest derivative %.3g (Hayati) against %.3g (DH); gains %.3g / %.3g\n", comp + 1,
            lb.rows[3].value[TWF_LINK_D], ld.rows[2].value[TWF_LINK_D], maxb, maxd,
            lb.rows[2].cond_beta, lb.rows[2].cond_dh);
    ck_assert(maxb < 10.0);
    ck_assert(maxd > 1e6);
    free(delta);
    free(Jb);
    free(Jd);
    twf_errmodel_free(em);
    twf_links_clear(&lb);
    twf_links_clear(&ld);
    twf_model_free(m);
  }
  twf_links_clear(&ln);
  twf_model_free(nominal);
}
END_TEST

/* The reference model chooses the forms and fills reference[]. */
START_TEST(test_reference)
{
  twf_model *nominal = arm_copy(ARM_TF6P, 0), *m = arm_copy(ARM_TF6P, 71);
  twf_links l, ln;
  links_ok(nominal, 1, 1, NULL, &ln);
  links_ok(m, 1, 1, nominal, &l);
  for (size_t k = 0; k < l.n_rows; k++) {
    ck_assert_int_eq(l.rows[k].form, ln.rows[k].form);
    for (int v = 0; v < NV; v++)
      ck_assert(fabs(value_diff(v, l.rows[k].reference[v], ln.rows[k].value[v])) < 1e-12);
  }
  twf_links_clear(&ln);
  links_ok(m, 1, 1, NULL, &ln);
  ck_assert(isnan(ln.rows[1].reference[TWF_LINK_A]));
  twf_links_clear(&l);
  twf_links_clear(&ln);
  twf_model_free(m);
  twf_model_free(nominal);
}
END_TEST

START_TEST(test_offsets_only_change)
{
  /* An offsets-only change of a model changes only the offset column
   * (theta of a revolute joint's row, d of a prismatic one's), by exactly
   * that amount, on every sample arm and in the comparison's convention. */
  for (int arm = 0; arm < ARM_COUNT; arm++) {
    twf_model *nominal = arm_copy((test_arm)arm, 73), *m = twf_model_copy(nominal);
    double delta[MAXJ], *diff;
    twf_links l;
    twf_error err;
    size_t j, k;
    ck_assert_ptr_nonnull(m);
    for (j = 0; j < m->n_joints; j++) {
      delta[j] = (m->joints[j].type == TWF_JOINT_REVOLUTE ? 1e-3 : 2e-4) * (double)(j + 1) * (j % 2 ? -1 : 1);
      m->joints[j].offset += delta[j];
    }
    diff = malloc(NV * (m->n_joints + 2) * sizeof *diff);
    ck_assert_ptr_nonnull(diff);
    ck_assert_msg(twf_compare_links(nominal, m, 0, &l, diff, &err) == TWF_OK, "%s", err.message);
    for (k = 0; k < l.n_rows; k++)
      for (int v = 0; v < NV; v++) {
        double want = 0.0, got = diff[NV * k + (size_t)v];
        if (l.rows[k].why[v] == TWF_LINK_NOT_IN_FORM)
          continue;
        if (k >= 1 && k <= m->n_joints && v == l.rows[k].variable)
          want = delta[k - 1];
        if (l.rows[k].why[v] == TWF_LINK_COINCIDENT && v == TWF_LINK_THETA)
          continue; /* only the sum of two coincident offsets is shown */
        ck_assert_msg(fabs(got - want) < 1e-12, "%s row %zu %s: %.3g, want %.3g", m->name, k,
                      twf_link_value_name((twf_link_value)v), got, want);
      }
    twf_links_clear(&l);
    free(diff);
    twf_model_free(m);
    twf_model_free(nominal);
  }
}
END_TEST

START_TEST(test_dh_like_reference)
{
  /* An as-built arm written in its nominal's conventions reads row by row
   * against the nominal table: every value within the perturbation's size
   * of the nominal's (no half turn in alpha or theta), the flange pose
   * reproduced (round trip through twf_model_set_from_dh_beta), for both
   * conventions and every sample arm over several perturbations. The plain
   * conversion (a >= 0) must show a half turn on at least one of them, or
   * this test would prove nothing. */
  int plain_half_turns = 0;
  for (int arm = 0; arm < ARM_COUNT; arm++)
    for (unsigned long long seed = 1; seed <= 8; seed++)
      for (int conv = 0; conv < 2; conv++) {
        twf_model *nominal = arm_copy((test_arm)arm, 0), *m = arm_copy((test_arm)arm, 100 + seed);
        size_t n = m->n_joints;
        twf_dh_row rn[MAXJ], rl[MAXJ], rp[MAXJ];
        twf_pose Bn, Fn, Bl, Fl, Bp, Fp;
        twf_error err;
        double dp, da;
        twf_model *back;
        ck_assert_int_eq(twf_model_to_dh(nominal, (twf_dh_convention)conv, 1, rn, &Bn, &Fn, &err),
                         TWF_OK);
        ck_assert_msg(twf_model_to_dh_like(m, nominal, (twf_dh_convention)conv, 1, rl, &Bl, &Fl,
                                           &err) == TWF_OK, "%s", err.message);
        ck_assert_int_eq(twf_model_to_dh(m, (twf_dh_convention)conv, 1, rp, &Bp, &Fp, &err),
                         TWF_OK);
        twf_links ln;
        links_ok(nominal, 1, 1, NULL, &ln);
        for (size_t k = 0; k < n; k++) {
          /* theta of joint k+1 is the turn from frame k's x to frame k+1's:
           * where either comes from nominally coincident lines, its
           * direction in the as-built arm is that of a sub-millimetre gap
           * and the angle is a convention, not geometry */
          int theta_free = k == 0 || ln.rows[k].coincident || ln.rows[k + 1].coincident;
          /* perturbations of 1 mm and 1 mrad (standard deviations) turn a
           * frame's x by a few mm over the shortest link, 0.4 m: 0.05 rad
           * and 10 mm bound every row's change, a half turn is 3.14 rad */
          /* joint 1's theta hangs on frame 0's x, which the base pose
           * absorbs (and row 0 is free to turn): not compared */
          ck_assert_msg((theta_free || fabs(wrap(rl[k].theta - rn[k].theta)) < 0.05) &&
                            fabs(wrap(rl[k].alpha - rn[k].alpha)) < 0.05 &&
                            fabs(rl[k].a - rn[k].a) < 0.01,
                        "%s seed %llu conv %d row %zu: theta %g/%g alpha %g/%g a %g/%g", m->name,
                        seed, conv, k + 1, rl[k].theta, rn[k].theta, rl[k].alpha, rn[k].alpha,
                        rl[k].a, rn[k].a);
          if ((!theta_free && fabs(wrap(rp[k].theta - rn[k].theta)) > 3.0) ||
              fabs(wrap(rp[k].alpha - rn[k].alpha)) > 3.0)
            plain_half_turns++;
        }
        twf_links_clear(&ln);
        back = from_table(m, rl, (twf_dh_convention)conv, &Bl, &Fl);
        fk_diff(m, back, 7, &dp, &da);
        ck_assert_msg(dp < 1e-12 && da < 1e-12, "%s: round trip %g m %g rad", m->name, dp, da);
        twf_model_free(back);
        twf_model_free(m);
        twf_model_free(nominal);
      }
  ck_assert_int_gt(plain_half_turns, 0);
  {
    /* a reference of other joints is refused */
    twf_model *a = arm_copy(ARM_TF6S, 0), *b = arm_copy(ARM_TF7, 0);
    twf_dh_row r[MAXJ];
    twf_pose B, F;
    twf_error err;
    ck_assert_int_eq(twf_model_to_dh_like(a, b, TWF_DH_STANDARD, 1, r, &B, &F, &err),
                     TWF_ERR_VALUE);
    ck_assert_ptr_nonnull(strstr(err.message, "reference model has 7 joints"));
    twf_model_free(a);
    twf_model_free(b);
  }
}
END_TEST

int main(void)
{
  Suite *s = suite_create("links");
  TCase *tc = tcase_create("links");
  tcase_set_timeout(tc, 120);
  tcase_add_test(tc, test_round_trip);
  tcase_add_test(tc, test_plain_dh_residual);
  tcase_add_test(tc, test_beta_zero_is_plain_dh);
  tcase_add_test(tc, test_kdl_links);
  tcase_add_test(tc, test_invariance);
  tcase_add_test(tc, test_not_determined_flags);
  tcase_add_test(tc, test_jacobian);
  tcase_add_test(tc, test_propagate);
  tcase_add_test(tc, test_parallel_beta);
  tcase_add_test(tc, test_reference);
  tcase_add_test(tc, test_offsets_only_change);
  tcase_add_test(tc, test_dh_like_reference);
  suite_add_tcase(s, tc);
  return twf_test_run(s);
}
