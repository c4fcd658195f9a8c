/* check_register.c: point-set registration against SciPy, its degenerate
 * cases, and the registration of synthetic campaigns. */
#include "testutil.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "twistfit.h"

#define DEG (3.14159265358979323846 / 180.0)

/* ------------------------------------------------------------------ */
/* Fixtures of tests/gen/gen_align.py                                  */
/* ------------------------------------------------------------------ */

#define MAX_CASES 16
#define MAX_POINTS 256

typedef struct align_case {
  char name[32];
  size_t n, n_expected;
  int weighted;
  double noise;
  double R[3][3], p[3];   /* SciPy's answer */
  double Rt[3][3], pt[3]; /* the true transform */
  double a[MAX_POINTS][3], b[MAX_POINTS][3], w[MAX_POINTS];
} align_case;

static align_case cases[MAX_CASES];
static size_t n_cases;

/* Data lines of a fixture: '#' comments and the header row skipped. */
static FILE *open_fixture(const char *name, char *line, size_t size)
{
  FILE *f = fopen(twf_test_srcpath(name), "r");
  ck_assert_msg(f != NULL, "cannot open %s", twf_test_srcpath(name));
  while (fgets(line, (int)size, f) != NULL)
    if (line[0] != '#')
      return f; /* the header row */
  ck_abort_msg("%s has no header row", name);
  return NULL;
}

static void split(char *line, char **fields, int max, int *n)
{
  char *save = NULL, *tok;
  *n = 0;
  for (tok = strtok_r(line, ",\n", &save); tok && *n < max;
       tok = strtok_r(NULL, ",\n", &save))
    fields[(*n)++] = tok;
}

static align_case *find_case(const char *name)
{
  size_t i;
  for (i = 0; i < n_cases; i++)
    if (strcmp(cases[i].name, name) == 0)
      return &cases[i];
  return NULL;
}

static void load_fixtures(void)
{
  char line[2048], *f[40];
  int nf, r, c;
  FILE *fp;
  if (n_cases > 0)
    return;
  fp = open_fixture("tests/fixtures/align_results.csv", line, sizeof line);
  while (fgets(line, sizeof line, fp) != NULL) {
    align_case *k;
    if (line[0] == '#')
      continue;
    split(line, f, 40, &nf);
    ck_assert_int_eq(nf, 29);
    ck_assert(n_cases < MAX_CASES);
    k = &cases[n_cases++];
    snprintf(k->name, sizeof k->name, "%s", f[0]);
    k->n = 0;
    k->weighted = atoi(f[2]);
    k->noise = strtod(f[3], NULL);
    for (r = 0; r < 3; r++)
      for (c = 0; c < 3; c++) {
        k->R[r][c] = strtod(f[4 + 3 * r + c], NULL);
        k->Rt[r][c] = strtod(f[16 + 3 * r + c], NULL);
      }
    for (r = 0; r < 3; r++) {
      k->p[r] = strtod(f[13 + r], NULL);
      k->pt[r] = strtod(f[25 + r], NULL);
    }
    k->n_expected = (size_t)atoi(f[1]);
  }
  fclose(fp);
  fp = open_fixture("tests/fixtures/align_points.csv", line, sizeof line);
  while (fgets(line, sizeof line, fp) != NULL) {
    align_case *k;
    size_t i;
    if (line[0] == '#')
      continue;
    split(line, f, 40, &nf);
    ck_assert_int_eq(nf, 9);
    k = find_case(f[0]);
    ck_assert_msg(k != NULL, "points of unknown case %s", f[0]);
    i = (size_t)atoi(f[1]);
    ck_assert(i == k->n && i < MAX_POINTS);
    for (c = 0; c < 3; c++) {
      k->a[i][c] = strtod(f[2 + c], NULL);
      k->b[i][c] = strtod(f[5 + c], NULL);
    }
    k->w[i] = strtod(f[8], NULL);
    k->n++;
  }
  fclose(fp);
  ck_assert_uint_ge(n_cases, 8);
  for (size_t i = 0; i < n_cases; i++)
    ck_assert_msg(cases[i].n == cases[i].n_expected && cases[i].n >= 3,
                  "case %s: %zu points, results say %zu", cases[i].name,
                  cases[i].n, cases[i].n_expected);
}

static double rot_angle(const double A[3][3], const double B[3][3])
{
  return twf_rot_angle_between(A, B);
}

static double weighted_cost(const align_case *k, const double R[3][3],
                            const double p[3])
{
  double s = 0.0;
  size_t i;
  int r;
  for (i = 0; i < k->n; i++)
    for (r = 0; r < 3; r++) {
      double d = R[r][0] * k->a[i][0] + R[r][1] * k->a[i][1]
               + R[r][2] * k->a[i][2] + p[r] - k->b[i][r];
      s += k->w[i] * d * d;
    }
  return s;
}

START_TEST(test_align_reference)
{
  size_t i, n_exact = 0, n_noisy = 0;
  load_fixtures();
  for (i = 0; i < n_cases; i++) {
    align_case *k = &cases[i];
    twf_pose T;
    twf_error err;
    int r, c;
    twf_status st = twf_register_points(&k->a[0][0], &k->b[0][0],
                                        k->weighted ? k->w : NULL, k->n, &T,
                                        &err);
    ck_assert_msg(st == TWF_OK, "case %s: %s", k->name, err.message);
    /* reference: SciPy 1.10.1 scipy.spatial.transform.Rotation.align_vectors
     * on centred clouds, tests/gen/gen_align.py (fixtures/align_*.csv) */
    for (r = 0; r < 3; r++) {
      for (c = 0; c < 3; c++)
        ck_assert_msg(fabs(T.R[r][c] - k->R[r][c]) <= 1e-10,
                      "case %s: R%d%d = %.17g, SciPy %.17g", k->name, r, c,
                      T.R[r][c], k->R[r][c]);
      ck_assert_msg(fabs(T.p[r] - k->p[r]) <= 1e-10,
                    "case %s: p%d = %.17g, SciPy %.17g", k->name, r, T.p[r],
                    k->p[r]);
    }
    if (k->noise == 0.0) {
      /* noise-free: the true transform exactly (the generator's R, p) */
      n_exact++;
      for (r = 0; r < 3; r++) {
        for (c = 0; c < 3; c++)
          ck_assert_msg(fabs(T.R[r][c] - k->Rt[r][c]) <= 1e-12,
                        "case %s: R%d%d off by %g", k->name, r, c,
                        T.R[r][c] - k->Rt[r][c]);
        ck_assert_msg(fabs(T.p[r] - k->pt[r]) <= 1e-12,
                      "case %s: p%d off by %g", k->name, r, T.p[r] - k->pt[r]);
      }
    } else {
      /* With noise: the least-squares answer never costs more than the
       * truth (exact inequality, common practice, no source), and its
       * error is bounded. With sigma per coordinate (the largest, for the
       * weighted case) and s the RMS distance of a from its centroid, the
       * rotation error is about sigma / (s sqrt(n)) and the error at the
       * centroid about sigma sqrt(3 / n); 5 times those bounds are never
       * reached by chance at this fixed seed (common practice, no
       * source). */
      double abar[3] = { 0 }, s2 = 0.0, e[3], s;
      n_noisy++;
      ck_assert(weighted_cost(k, T.R, T.p)
                <= weighted_cost(k, k->Rt, k->pt) * (1.0 + 1e-12));
      for (r = 0; r < 3; r++) {
        size_t j;
        for (j = 0; j < k->n; j++)
          abar[r] += k->a[j][r] / (double)k->n;
      }
      for (size_t j = 0; j < k->n; j++)
        for (r = 0; r < 3; r++)
          s2 += (k->a[j][r] - abar[r]) * (k->a[j][r] - abar[r]) / (double)k->n;
      s = sqrt(s2);
      ck_assert_msg(rot_angle(T.R, k->Rt) <= 5.0 * k->noise / (s * sqrt((double)k->n)),
                    "case %s: rotation error %g", k->name, rot_angle(T.R, k->Rt));
      for (r = 0; r < 3; r++) {
        e[r] = T.p[r] - k->pt[r];
        for (c = 0; c < 3; c++)
          e[r] += (T.R[r][c] - k->Rt[r][c]) * abar[c];
      }
      ck_assert_msg(sqrt(e[0] * e[0] + e[1] * e[1] + e[2] * e[2])
                        <= 5.0 * k->noise * sqrt(3.0 / (double)k->n),
                    "case %s: error at the centroid %g", k->name,
                    sqrt(e[0] * e[0] + e[1] * e[1] + e[2] * e[2]));
      /* and it is really off the truth: the noise is there */
      ck_assert(rot_angle(T.R, k->Rt) > 1e-9);
    }
  }
  ck_assert_uint_ge(n_exact, 4);
  ck_assert_uint_ge(n_noisy, 3);
}
END_TEST

/* A mirror image is the best unconstrained fit, but the answer must be a
 * rotation (Umeyama 1991): det R = +1 and orthonormal. */
START_TEST(test_no_reflection)
{
  double a[5][3] = { { 0.213, -0.481, 0.377 }, { 1.092, 0.334, -0.262 },
                     { -0.647, 0.918, 0.151 }, { 0.402, 0.127, 1.233 },
                     { -0.311, -0.719, -0.884 } };
  double b[5][3], det, orth;
  twf_pose T;
  twf_error err;
  int i;
  for (i = 0; i < 5; i++) {
    b[i][0] = a[i][0] + 0.5;
    b[i][1] = a[i][1] - 0.25;
    b[i][2] = -a[i][2]; /* reflection in the xy plane */
  }
  ck_assert_int_eq(twf_register_points(&a[0][0], &b[0][0], NULL, 5, &T, &err), TWF_OK);
  orth = twf_rot_orthonormality_error(T.R, &det);
  ck_assert(orth < 1e-14);
  ck_assert_close(det, 1.0, 1e-14);
}
END_TEST

/* Weights: a point of weight 0 does not count, and scaling every weight
 * changes nothing. */
START_TEST(test_weights)
{
  align_case *k;
  twf_pose T1, T2;
  double w[MAX_POINTS], a[MAX_POINTS][3], b[MAX_POINTS][3];
  size_t i, n;
  int r, c;
  load_fixtures();
  k = find_case("noisy_w");
  ck_assert(k != NULL);
  n = k->n;
  for (i = 0; i < n; i++)
    w[i] = 37.25 * k->w[i];
  ck_assert_int_eq(twf_register_points(&k->a[0][0], &k->b[0][0], w, n, &T1, NULL), TWF_OK);
  for (r = 0; r < 3; r++)
    for (c = 0; c < 3; c++)
      ck_assert(fabs(T1.R[r][c] - k->R[r][c]) <= 1e-10);
  /* append a wild point with weight zero */
  memcpy(a, k->a, n * sizeof a[0]);
  memcpy(b, k->b, n * sizeof b[0]);
  a[n][0] = 7.1; a[n][1] = -3.3; a[n][2] = 0.2;
  b[n][0] = -40.0; b[n][1] = 12.0; b[n][2] = 99.0;
  w[n] = 0.0;
  ck_assert_int_eq(twf_register_points(&a[0][0], &b[0][0], w, n + 1, &T2, NULL), TWF_OK);
  for (r = 0; r < 3; r++) {
    for (c = 0; c < 3; c++)
      ck_assert(fabs(T2.R[r][c] - T1.R[r][c]) <= 1e-13);
    ck_assert(fabs(T2.p[r] - T1.p[r]) <= 1e-13);
  }
}
END_TEST

START_TEST(test_points_degenerate)
{
  double a[6][3] = { { 0.113, 0.271, -0.354 }, { 0.842, -0.119, 0.077 } };
  double b[6][3], w[6] = { 1, 1, 1, 1, 1, 1 };
  twf_pose T;
  twf_error err;
  int i, c;
  for (i = 0; i < 6; i++)
    for (c = 0; c < 3; c++)
      b[i][c] = a[i][c] + 0.3;
  /* two points */
  ck_assert_int_eq(twf_register_points(&a[0][0], &b[0][0], NULL, 2, &T, &err),
                   TWF_ERR_DEGENERATE);
  ck_assert_int_eq(err.status, TWF_ERR_DEGENERATE);
  ck_assert_msg(strstr(err.message, "1 more distinct, non-collinear point is needed"),
                "%s", err.message);
  /* three points, one of weight zero: still two */
  a[2][0] = -0.5; a[2][1] = 0.61; a[2][2] = 0.93;
  w[2] = 0.0;
  ck_assert_int_eq(twf_register_points(&a[0][0], &b[0][0], w, 3, &T, &err),
                   TWF_ERR_DEGENERATE);
  ck_assert_msg(strstr(err.message, "only 2 points"), "%s", err.message);
  /* five points on one line, unround spacing */
  for (i = 0; i < 5; i++)
    for (c = 0; c < 3; c++) {
      double dir[3] = { 0.267, -0.535, 0.801 };
      a[i][c] = 0.41 + (0.137 * i + 0.0213 * i * i) * dir[c];
      b[i][c] = a[i][c] + 0.7;
    }
  ck_assert_int_eq(twf_register_points(&a[0][0], &b[0][0], NULL, 5, &T, &err),
                   TWF_ERR_DEGENERATE);
  ck_assert_msg(strstr(err.message, "lie on one line")
                && strstr(err.message, "1 more distinct point off that line"),
                "%s", err.message);
  /* all coincide */
  for (i = 0; i < 4; i++)
    for (c = 0; c < 3; c++) {
      a[i][c] = 1.25 - 0.5 * c;
      b[i][c] = a[i][c];
    }
  ck_assert_int_eq(twf_register_points(&a[0][0], &b[0][0], NULL, 4, &T, &err),
                   TWF_ERR_DEGENERATE);
  ck_assert_msg(strstr(err.message, "coincide") && strstr(err.message, "2 more"),
                "%s", err.message);
  /* a fine, b collinear: named */
  {
    double a2[4][3] = { { 0, 0, 0 }, { 1.1, 0, 0 }, { 0, 0.9, 0 }, { 0, 0, 1.3 } };
    double b2[4][3] = { { 0, 0, 0 }, { 1.1, 0, 0 }, { 2.2, 0, 0 }, { 3.3, 0, 0 } };
    ck_assert_int_eq(twf_register_points(&a2[0][0], &b2[0][0], NULL, 4, &T, &err),
                     TWF_ERR_DEGENERATE);
    ck_assert_msg(strstr(err.message, "of b lie on one line"), "%s", err.message);
  }
  /* bad arguments */
  w[0] = -1.0;
  ck_assert_int_eq(twf_register_points(&a[0][0], &b[0][0], w, 3, &T, &err), TWF_ERR_INVALID);
  a[1][1] = NAN;
  ck_assert_int_eq(twf_register_points(&a[0][0], &b[0][0], NULL, 3, &T, &err), TWF_ERR_VALUE);
  ck_assert_int_eq(twf_register_points(&a[0][0], &b[0][0], NULL, 3, NULL, &err), TWF_ERR_INVALID);
}
END_TEST

/* ------------------------------------------------------------------ */
/* Campaigns                                                           */
/* ------------------------------------------------------------------ */

/* The invented arm tf6s of notes/arms.md (standard DH, metres, radians). */
static twf_model *make_tf6s(void)
{
  static const double tab[6][4] = {
    { 0.150, -90, 0.450, 0 }, { 0.610, 0, 0, -90 }, { 0.115, -90, 0, 0 },
    { 0, 90, 0.640, 0 },      { 0, -90, 0, 0 },     { 0, 0, 0.095, 0 } };
  static const double lim[6][2] = { { -170, 170 }, { -100, 145 }, { -120, 155 },
                                    { -185, 185 }, { -125, 125 }, { -350, 350 } };
  static const double targ[3][3] = { { 0.040, 0, 0.060 }, { -0.030, 0.045, 0.075 },
                                     { 0, -0.050, 0.050 } };
  twf_model *m = twf_model_alloc(6, 3);
  twf_dh_row rows[6];
  twf_error err;
  size_t i;
  ck_assert(m != NULL);
  for (i = 0; i < 6; i++) {
    rows[i].a = tab[i][0];
    rows[i].alpha = tab[i][1] * DEG;
    rows[i].d = tab[i][2];
    rows[i].theta = tab[i][3] * DEG;
    rows[i].type = TWF_JOINT_REVOLUTE;
    snprintf(m->joints[i].name, sizeof m->joints[i].name, "j%zu", i + 1);
    m->joints[i].has_limits = 1;
    m->joints[i].limit_lo = lim[i][0] * DEG;
    m->joints[i].limit_hi = lim[i][1] * DEG;
  }
  ck_assert_int_eq(twf_model_set_from_dh(m, rows, 6, TWF_DH_STANDARD, NULL, &err), TWF_OK);
  for (i = 0; i < 3; i++) {
    snprintf(m->targets[i].name, sizeof m->targets[i].name, "T%zu", i + 1);
    memcpy(m->targets[i].offset, targ[i], sizeof targ[i]);
    m->targets[i].offset_known = 1;
  }
  return m;
}

/* The base pose of the synthetic instrument: metres away, turned. */
static void make_base(twf_pose *B)
{
  twf_rpy_fixed_xyz_to_rot(0.2137, -0.4418, 2.3091, B->R);
  B->p[0] = 3.418;
  B->p[1] = -2.077;
  B->p[2] = 0.6153;
}

/* n_poses random poses within the limits (only joints with move[j] move,
 * the others stay at 0.3 rad), every target measured at every pose with
 * positions B F t exact; check_every > 0 puts every check_every-th pose in
 * the check set with a gross error of 5 mm added. */
static twf_campaign *make_campaign(const twf_model *m, const twf_pose *B,
                                   size_t n_poses, const int *move,
                                   size_t check_every, uint64_t seed)
{
  size_t nj = m->n_joints, nt = m->n_targets, p, k, j;
  twf_campaign *c = twf_campaign_alloc(nj, n_poses, n_poses * nt);
  twf_test_rng rng;
  ck_assert(c != NULL);
  twf_test_rng_init(&rng, twf_test_seed(seed));
  for (p = 0; p < n_poses; p++) {
    twf_pose F, T;
    snprintf(c->pose_ids[p], TWF_NAME_MAX, "P%03zu", p + 1);
    for (j = 0; j < nj; j++) {
      const twf_joint *J = &m->joints[j];
      c->q[p * nj + j] = (move == NULL || move[j])
        ? twf_test_uniform(&rng, 0.8 * J->limit_lo, 0.8 * J->limit_hi) : 0.3;
    }
    twf_model_fk(m, c->q + p * nj, NULL, &F);
    twf_pose_mul(B, &F, &T);
    for (k = 0; k < nt; k++) {
      twf_measurement *me = &c->meas[p * nt + k];
      me->pose = (uint32_t)p;
      me->target = (uint32_t)k;
      twf_pose_apply(&T, m->targets[k].offset, me->pos);
      me->set = TWF_SET_FIT;
      me->line = (uint32_t)(p * nt + k + 2);
      if (check_every > 0 && p % check_every == check_every - 1) {
        me->set = TWF_SET_CHECK;
        me->pos[0] += 0.005;
      }
    }
  }
  return c;
}

static void assert_pose_close(const twf_pose *A, const twf_pose *B, double tol_m,
                              double reach)
{
  int r;
  ck_assert_msg(twf_rot_angle_between(A->R, B->R) * reach <= tol_m,
                "rotation off by %g rad", twf_rot_angle_between(A->R, B->R));
  for (r = 0; r < 3; r++)
    ck_assert_msg(fabs(A->p[r] - B->p[r]) <= tol_m, "p%d off by %g", r,
                  A->p[r] - B->p[r]);
}

/* Trusted offsets: one registration, exact. */
START_TEST(test_campaign_trusted)
{
  twf_model *m = make_tf6s();
  twf_pose B, Bf;
  twf_campaign *c;
  twf_register_report rep;
  twf_error err;
  double t[9];
  make_base(&B);
  c = make_campaign(m, &B, 24, NULL, 0, 101);
  twf_register_offsets_init(m, t);
  ck_assert_int_eq(twf_register_campaign(m, c, NULL, &Bf, t, &rep, &err), TWF_OK);
  assert_pose_close(&Bf, &B, 1e-9, 1.5);
  ck_assert_uint_eq(rep.iterations, 1);
  ck_assert_int_eq(rep.converged, 1);
  ck_assert_uint_eq(rep.n_fitted, 0);
  ck_assert_uint_eq(rep.n_used, 72);
  ck_assert_uint_eq(rep.n_poses_used, 24);
  ck_assert(rep.rms_m < 1e-12 && rep.max_m < 1e-12);
  ck_assert_double_eq(t[3], -0.030); /* trusted: untouched */
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

/* Unknown offsets: the alternation starts at the flange origin and
 * recovers base and offsets; check rows (with gross errors) are ignored. */
START_TEST(test_campaign_unknown)
{
  twf_model *m = make_tf6s();
  twf_pose B, Bf;
  twf_campaign *c;
  twf_register_report rep;
  twf_error err;
  double t[9], truth[9];
  size_t k;
  make_base(&B);
  c = make_campaign(m, &B, 30, NULL, 4, 202);
  for (k = 0; k < 3; k++) {
    memcpy(truth + 3 * k, m->targets[k].offset, sizeof(double[3]));
    m->targets[k].offset_known = 0;
  }
  twf_register_offsets_init(m, t);
  ck_assert(t[0] == 0.0 && t[8] == 0.0);
  ck_assert(twf_register_target_is_fitted(m, NULL, 1));
  ck_assert_int_eq(twf_register_campaign(m, c, NULL, &Bf, t, &rep, &err), TWF_OK);
  ck_assert_msg(rep.converged, "not converged after %u, change %g",
                rep.iterations, rep.last_change_m);
  assert_pose_close(&Bf, &B, 1e-9, 1.5);
  for (k = 0; k < 9; k++)
    ck_assert_msg(fabs(t[k] - truth[k]) <= 1e-9, "offset %zu off by %g", k,
                  t[k] - truth[k]);
  ck_assert_uint_eq(rep.n_fitted, 3);
  ck_assert_uint_eq(rep.n_inseparable, 0);
  ck_assert_int_eq(rep.first_inseparable, -1);
  ck_assert_uint_eq(rep.n_used, 3 * (30 - 30 / 4));
  ck_assert(rep.rms_m < 1e-10);

  /* fit_all_offsets with known but wrong starting offsets; 1 trusted via
   * the flags array keeps its (true) value */
  {
    twf_register_options o = twf_register_default_options();
    int trusted[3] = { 0, 1, 0 };
    for (k = 0; k < 3; k++)
      m->targets[k].offset_known = 1;
    memcpy(t, truth, sizeof t);
    t[0] += 0.0213;
    t[7] -= 0.0117;
    o.trusted = trusted;
    ck_assert(!twf_register_target_is_fitted(m, &o, 1));
    ck_assert(twf_register_target_is_fitted(m, &o, 2));
    ck_assert_int_eq(twf_register_campaign(m, c, &o, &Bf, t, &rep, &err), TWF_OK);
    ck_assert_uint_eq(rep.n_fitted, 2);
    ck_assert(rep.converged);
    assert_pose_close(&Bf, &B, 1e-9, 1.5);
    for (k = 0; k < 9; k++)
      ck_assert(fabs(t[k] - truth[k]) <= 1e-9);
    o.fit_all_offsets = 1;
    o.trusted = NULL;
    t[3] += 0.0301;
    ck_assert_int_eq(twf_register_campaign(m, c, &o, &Bf, t, &rep, &err), TWF_OK);
    ck_assert_uint_eq(rep.n_fitted, 3);
    for (k = 0; k < 9; k++)
      ck_assert(fabs(t[k] - truth[k]) <= 1e-9);
    /* too few alternations: returns, says not converged */
    o.max_iter = 2;
    t[3] += 0.0301;
    ck_assert_int_eq(twf_register_campaign(m, c, &o, &Bf, t, &rep, &err), TWF_OK);
    ck_assert_uint_eq(rep.iterations, 2);
    ck_assert_int_eq(rep.converged, 0);
    ck_assert(rep.last_change_m > 0.0);
  }
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

/* Weights from sigma: exact data stay exact, and a noisy row with a large
 * sigma hardly matters. */
START_TEST(test_campaign_sigma)
{
  twf_model *m = make_tf6s();
  twf_pose B, Bf;
  twf_campaign *c;
  twf_register_report rep;
  double t[9];
  size_t i;
  make_base(&B);
  c = make_campaign(m, &B, 20, NULL, 0, 303);
  for (i = 0; i < c->n_meas; i++)
    c->meas[i].sigma = (i % 3 == 0) ? 0.0 : 2.5e-5 * (double)(1 + i % 4);
  twf_register_offsets_init(m, t);
  ck_assert_int_eq(twf_register_campaign(m, c, NULL, &Bf, t, &rep, NULL), TWF_OK);
  assert_pose_close(&Bf, &B, 1e-9, 1.5);
  /* one gross error of 3 mm on a row of sigma 1 m: weight 1e-9 relative */
  c->meas[4].pos[1] += 0.003;
  c->meas[4].sigma = 1.0;
  ck_assert_int_eq(twf_register_campaign(m, c, NULL, &Bf, t, &rep, NULL), TWF_OK);
  assert_pose_close(&Bf, &B, 1e-9, 1.5);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

START_TEST(test_campaign_degenerate)
{
  twf_model *m = make_tf6s();
  twf_pose B, Bf;
  twf_campaign *c;
  twf_error err;
  double t[9];
  size_t k;
  int only_j6[6] = { 0, 0, 0, 0, 0, 1 };
  make_base(&B);
  /* only the last joint turns: the flange origin stays put */
  c = make_campaign(m, &B, 12, only_j6, 0, 404);
  for (k = 0; k < 3; k++)
    m->targets[k].offset_known = 0;
  twf_register_offsets_init(m, t);
  ck_assert_int_eq(twf_register_campaign(m, c, NULL, &Bf, t, NULL, &err),
                   TWF_ERR_DEGENERATE);
  ck_assert_msg(strstr(err.message, "flange origin") && strstr(err.message, "T1, T2, T3")
                && strstr(err.message, "coincide")
                && strstr(err.message, "at least 2 more distinct poses"),
                "%s", err.message);
  ck_assert(strstr(err.hint, "flange itself moves") != NULL);
  /* with trusted offsets the same poses register: three targets per pose */
  for (k = 0; k < 3; k++)
    m->targets[k].offset_known = 1;
  twf_register_offsets_init(m, t);
  ck_assert_int_eq(twf_register_campaign(m, c, NULL, &Bf, t, NULL, &err), TWF_OK);
  assert_pose_close(&Bf, &B, 1e-9, 1.5);
  twf_campaign_free(c);

  /* one target, two poses: too few */
  c = make_campaign(m, &B, 2, NULL, 0, 505);
  c->n_meas = 2;
  c->meas[1] = c->meas[3]; /* pose 1, target 0 */
  ck_assert_int_eq(twf_register_campaign(m, c, NULL, &Bf, t, NULL, &err),
                   TWF_ERR_DEGENERATE);
  ck_assert_msg(strstr(err.message, "has 2: 1 more distinct, non-collinear pose is needed"),
                "%s", err.message);
  /* all in the check set: none left */
  c->meas[0].set = c->meas[1].set = TWF_SET_CHECK;
  ck_assert_int_eq(twf_register_campaign(m, c, NULL, &Bf, t, NULL, &err),
                   TWF_ERR_DEGENERATE);
  ck_assert_msg(strstr(err.message, "has 0: 3 more"), "%s", err.message);
  /* a fitted target with check rows only */
  m->targets[0].offset_known = 0;
  ck_assert_int_eq(twf_register_campaign(m, c, NULL, &Bf, t, NULL, &err),
                   TWF_ERR_MISSING);
  ck_assert(strstr(err.message, "T1") != NULL);
  /* bad arguments */
  c->meas[0].target = 7;
  ck_assert_int_eq(twf_register_campaign(m, c, NULL, &Bf, t, NULL, &err),
                   TWF_ERR_INVALID);
  ck_assert_int_eq(twf_register_campaign(m, NULL, NULL, &Bf, t, NULL, &err),
                   TWF_ERR_INVALID);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

/* The four-axis arm tf4p of notes/arms.md: its flange turns only about the
 * vertical, so with every offset unknown their vertical components trade
 * off against the base height (flagged, not an error); turning only the
 * prismatic joint moves the flange origin along a line (an error). */
START_TEST(test_campaign_scara)
{
  static const double tab[4][4] = { { 0.325, 0, 0.200, 0 }, { 0.275, 180, 0, 0 },
                                    { 0, 0, 0, 0 }, { 0, 0, 0.050, 0 } };
  twf_model *m = twf_model_alloc(4, 2);
  twf_dh_row rows[4];
  twf_pose B, Bf;
  twf_campaign *c;
  twf_register_report rep;
  twf_error err;
  double t[6];
  int only_j3[4] = { 0, 0, 1, 0 };
  size_t i;
  ck_assert(m != NULL);
  for (i = 0; i < 4; i++) {
    rows[i].a = tab[i][0];
    rows[i].alpha = tab[i][1] * DEG;
    rows[i].d = tab[i][2];
    rows[i].theta = tab[i][3] * DEG;
    rows[i].type = i == 2 ? TWF_JOINT_PRISMATIC : TWF_JOINT_REVOLUTE;
    snprintf(m->joints[i].name, sizeof m->joints[i].name, "j%zu", i + 1);
    m->joints[i].has_limits = 1;
    m->joints[i].limit_lo = i == 2 ? 0.0 : -140 * DEG;
    m->joints[i].limit_hi = i == 2 ? 0.2 : 140 * DEG;
  }
  ck_assert_int_eq(twf_model_set_from_dh(m, rows, 4, TWF_DH_STANDARD, NULL, &err), TWF_OK);
  snprintf(m->targets[0].name, TWF_NAME_MAX, "T1");
  snprintf(m->targets[1].name, TWF_NAME_MAX, "T2");
  m->targets[0].offset[0] = 0.030; m->targets[0].offset[2] = 0.020;
  m->targets[1].offset[1] = 0.030; m->targets[1].offset[2] = 0.025;
  m->targets[0].offset_known = m->targets[1].offset_known = 1;
  make_base(&B);
  c = make_campaign(m, &B, 25, NULL, 0, 606);
  m->targets[0].offset_known = m->targets[1].offset_known = 0;
  twf_register_offsets_init(m, t);
  ck_assert_int_eq(twf_register_campaign(m, c, NULL, &Bf, t, &rep, &err), TWF_OK);
  /* the data are still fitted exactly, but the offsets' vertical parts
   * trade off against the base: flagged */
  ck_assert(rep.rms_m < 1e-9);
  ck_assert_uint_eq(rep.n_inseparable, 2);
  ck_assert_int_eq(rep.first_inseparable, 0);
  /* with T1 trusted the base is pinned: T2's offset comes back exactly */
  m->targets[0].offset_known = 1;
  twf_register_offsets_init(m, t);
  ck_assert(t[3] == 0.0 && t[5] == 0.0);
  ck_assert_int_eq(twf_register_campaign(m, c, NULL, &Bf, t, &rep, &err), TWF_OK);
  ck_assert(rep.converged);
  ck_assert_uint_eq(rep.n_inseparable, 0);
  assert_pose_close(&Bf, &B, 1e-9, 1.0);
  ck_assert(fabs(t[3]) < 1e-9 && fabs(t[4] - 0.030) < 1e-9 && fabs(t[5] - 0.025) < 1e-9);
  m->targets[0].offset_known = 0;
  twf_campaign_free(c);

  /* only the prismatic joint moves: the flange origins lie on a line */
  c = make_campaign(m, &B, 6, only_j3, 0, 707);
  twf_register_offsets_init(m, t);
  ck_assert_int_eq(twf_register_campaign(m, c, NULL, &Bf, t, &rep, &err),
                   TWF_ERR_DEGENERATE);
  ck_assert_msg(strstr(err.message, "lie on one line")
                && strstr(err.message, "at least 1 more distinct pose, off that line"),
                "%s", err.message);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

/* The registration sequence in one call: alternation, offset copy and
 * refinement. Targets 2 and 3 start unknown (at the flange origin), one fit
 * row carries a gross error of 4.1 mm: the sequence recovers base and
 * offsets exactly from the others, leaves out exactly that row and marks
 * the measured targets known. */
START_TEST(test_register_and_refine)
{
  twf_model *m = make_tf6s(), *before;
  twf_pose B, Bf;
  twf_campaign *c;
  twf_registration_report rep;
  twf_trace trace;
  twf_error err;
  unsigned char *excluded;
  double truth[9];
  size_t k, bad = 7, n_fit = 0, n_steps = 0;
  make_base(&B);
  c = make_campaign(m, &B, 30, NULL, 4, 311);
  ck_assert(c->meas[bad].set == TWF_SET_FIT);
  c->meas[bad].pos[1] += 0.0041;
  for (k = 0; k < 3; k++)
    memcpy(truth + 3 * k, m->targets[k].offset, sizeof(double[3]));
  for (k = 1; k < 3; k++) {
    memset(m->targets[k].offset, 0, sizeof m->targets[k].offset);
    m->targets[k].offset_known = 0;
  }
  excluded = calloc(c->n_meas, 1);
  twf_trace_init(&trace);
  ck_assert_int_eq(twf_register_and_refine(m, c, NULL, NULL, &Bf, &rep, excluded, &trace, &err), TWF_OK);
  assert_pose_close(&Bf, &B, 1e-9, 1.5);
  for (k = 0; k < 9; k++)
    ck_assert_msg(fabs(m->targets[k / 3].offset[k % 3] - truth[k]) <= 1e-9, "offset %zu off by %g", k,
                  m->targets[k / 3].offset[k % 3] - truth[k]);
  for (k = 0; k < 3; k++)
    ck_assert(m->targets[k].offset_known);
  ck_assert_uint_eq(rep.alternation.n_fitted, 2);
  ck_assert(twf_stop_converged(rep.refinement.stop));
  ck_assert_uint_eq(rep.n_excluded, 1);
  ck_assert(rep.robust_threshold == TWF_ROBUST_THRESHOLD_DEFAULT);
  for (k = 0; k < c->n_meas; k++) {
    n_fit += c->meas[k].set == TWF_SET_FIT;
    ck_assert_msg(excluded[k] == (k == bad), "row %zu excluded %d", k, excluded[k]);
  }
  ck_assert(n_fit > 0);
  /* the trace: both stages, and the refinement's steps */
  ck_assert_uint_eq(trace.n_stages, 2);
  ck_assert_str_eq(trace.stages[0].name, "registration");
  ck_assert_str_eq(trace.stages[1].name, "registration refinement");
  for (k = 0; k < trace.n_stages; k++)
    ck_assert(trace.stages[k].seconds >= 0.0 && isfinite(trace.stages[k].seconds));
  for (k = 0; k < trace.n_steps; k++) {
    ck_assert_str_eq(trace.steps[k].fit, "registration refinement");
    ck_assert(trace.steps[k].damping > 0.0);
    n_steps += trace.steps[k].round == trace.steps[trace.n_steps - 1].round;
  }
  ck_assert_uint_eq(n_steps, (size_t)rep.refinement.iterations);
  twf_trace_clear(&trace);

  /* a failure leaves the model as it was */
  before = twf_model_copy(m);
  for (k = 2; k < c->n_meas; k++)
    c->meas[k].set = TWF_SET_CHECK;
  ck_assert_int_eq(twf_register_and_refine(m, c, NULL, NULL, &Bf, NULL, NULL, NULL, &err), TWF_ERR_DEGENERATE);
  for (k = 0; k < 3; k++)
    ck_assert(memcmp(&m->targets[k], &before->targets[k], sizeof m->targets[k]) == 0);
  twf_model_free(before);
  free(excluded);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

static Suite *register_suite(void)
{
  Suite *s = suite_create("register");
  TCase *tc = tcase_create("points");
  tcase_add_test(tc, test_align_reference);
  tcase_add_test(tc, test_no_reflection);
  tcase_add_test(tc, test_weights);
  tcase_add_test(tc, test_points_degenerate);
  suite_add_tcase(s, tc);
  tc = tcase_create("campaign");
  tcase_add_test(tc, test_campaign_trusted);
  tcase_add_test(tc, test_campaign_unknown);
  tcase_add_test(tc, test_campaign_sigma);
  tcase_add_test(tc, test_campaign_degenerate);
  tcase_add_test(tc, test_campaign_scara);
  tcase_add_test(tc, test_register_and_refine);
  suite_add_tcase(s, tc);
  return s;
}

int main(void)
{
  return twf_test_run(register_suite());
}
