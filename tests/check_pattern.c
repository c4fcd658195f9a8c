/* Unit tests of the residual-pattern test (twistfit/pattern.h) and of the
 * drop screen's limit: the F statistic against GSL's general linear least
 * squares on the same regression, with the motion directions taken from
 * finite differences of the forward kinematics; quiet on rigid campaigns;
 * a gear-like harmonic, a scale error and a torque dependence flagged on
 * the joint that carries them; a systematic misfit not screened away. */
#include <check.h>
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_multifit.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "twistfit.h"
#include "arms.h"
#include "testutil.h"

static const twf_perturbation typical = { 1e-3, 0.5e-3, 2e-3, 1e-3, 0.0 };

/* How the arm's real joint angle departs from the logged one. */
typedef enum distortion { NONE, HARMONIC_J2, SCALE_J3, TORQUE_J2 } distortion;

/* A stand-in for the gravity torque of j2 (N m): the shape of the torque
 * of a shoulder under an upright arm's links, cos q2 and cos(q2 + q3). */
static double torque_j2(const double *q)
{
  return 400.0 * cos(q[1]) + 250.0 * cos(q[1] + q[2]);
}

static void distort(distortion d, double size, const double *q, double *out, size_t nj)
{
  memcpy(out, q, nj * sizeof *out);
  switch (d) {
  case NONE: break;
  case HARMONIC_J2: out[1] += size * sin(q[1] + 0.4); break;
  case SCALE_J3: out[2] *= 1.0 + size; break;
  case TORQUE_J2: out[1] += size * torque_j2(q); break;
  }
}

typedef struct scenario {
  twf_model *nominal, *truth;
  twf_campaign *c;
  twf_pose base;
  double *torque; /* n_poses x n_joints, j2's column set */
} scenario;

/* A campaign logged at q but measured on the arm at distort(q). */
static void make_scenario(scenario *s, size_t n_poses, distortion d, double size, double sigma,
                          unsigned long long seed)
{
  twf_simulate_options so = twf_simulate_default_options();
  twf_error err;
  double *q, *qm;
  unsigned long long state = seed * 7919u + 17u;
  size_t i, nj;
  memset(s, 0, sizeof *s);
  s->nominal = test_arm_model(ARM_TF6S);
  s->truth = twf_model_copy(s->nominal);
  twf_model_perturb(s->truth, &typical, seed);
  test_tracker_base(&s->base);
  nj = s->nominal->n_joints;
  q = malloc(n_poses * nj * sizeof *q);
  qm = malloc(n_poses * nj * sizeof *qm);
  s->torque = calloc(n_poses * nj, sizeof *s->torque);
  ck_assert(q != NULL && qm != NULL && s->torque != NULL);
  for (i = 0; i < n_poses; i++) {
    twf_simulate_joints(s->nominal, 0.05, &state, &q[i * nj]);
    distort(d, size, &q[i * nj], &qm[i * nj], nj);
    s->torque[i * nj + 1] = torque_j2(&q[i * nj]);
  }
  so.n_poses = n_poses;
  so.sigma_m = sigma;
  so.seed = seed + 100;
  so.check_fraction = 0.25;
  so.q = qm;
  s->c = twf_simulate_campaign(s->truth, &s->base, &so, &err);
  ck_assert_msg(s->c != NULL, "%s", err.message);
  /* the controller logged the commanded values */
  memcpy(s->c->q, q, n_poses * nj * sizeof *q);
  free(q);
  free(qm);
}

static void free_scenario(scenario *s)
{
  twf_campaign_free(s->c);
  twf_model_free(s->nominal);
  twf_model_free(s->truth);
  free(s->torque);
}

static twf_calib_result *calibrate(const scenario *s, const twf_calib_options *co, twf_warnings *w)
{
  twf_calib_result *r = NULL;
  twf_error err;
  ck_assert_msg(twf_calibrate(s->nominal, s->c, co, &r, w, &err) == TWF_OK, "%s", err.message);
  return r;
}

static const twf_pattern_test *test_of(const twf_calib_result *r, size_t joint, twf_pattern_kind k)
{
  return &r->pattern.tests[joint * TWF_PATTERN_NKINDS + k];
}

static int warned(const twf_warnings *w, const char *a, const char *b)
{
  size_t i;
  for (i = 0; i < w->count; i++)
    if (strstr(w->items[i].message, a) != NULL && (b == NULL || strstr(w->items[i].message, b) != NULL))
      return 1;
  return 0;
}

/* One joint's regressors at logged value q: the offset, the slope, the
 * harmonics, the torque (the order of twistfit/pattern.h). */
static void joint_regressors(double q, double tau, double *f)
{
  f[0] = 1.0;
  f[1] = q;
  f[2] = sin(q);
  f[3] = cos(q);
  f[4] = sin(2 * q);
  f[5] = cos(2 * q);
  f[6] = tau;
}

/* Residual sum of squares and rank of the regression of y on X without
 * the columns flagged in drop, by GSL's truncated-SVD least squares
 * (gsl_multifit_linear_tsvd, an outside reference for the algebra). */
static double gsl_ss(const gsl_matrix *X, const gsl_vector *y, const unsigned char *drop, size_t *rank,
                     double *coef)
{
  size_t n = X->size1, p = 0, c, i;
  gsl_matrix *Xs, *cov;
  gsl_vector *b;
  gsl_multifit_linear_workspace *ws;
  double chisq;
  for (c = 0; c < X->size2; c++)
    p += !drop[c];
  Xs = gsl_matrix_alloc(n, p);
  for (c = 0, p = 0; c < X->size2; c++)
    if (!drop[c]) {
      for (i = 0; i < n; i++)
        gsl_matrix_set(Xs, i, p, gsl_matrix_get(X, i, c));
      p++;
    }
  b = gsl_vector_alloc(p);
  cov = gsl_matrix_alloc(p, p);
  ws = gsl_multifit_linear_alloc(n, p);
  ck_assert_int_eq(gsl_multifit_linear_tsvd(Xs, y, 1e-5, b, cov, &chisq, rank, ws), GSL_SUCCESS);
  if (coef != NULL)
    for (c = 0, p = 0; c < X->size2; c++)
      coef[c] = drop[c] ? 0.0 : gsl_vector_get(b, p++);
  gsl_multifit_linear_free(ws);
  gsl_matrix_free(cov);
  gsl_vector_free(b);
  gsl_matrix_free(Xs);
  return chisq;
}

/* The F statistics and coefficients against the same joint regression
 * assembled here and solved by GSL, with each joint's point velocity from
 * central differences of the forward kinematics rather than the spatial
 * Jacobian the library uses. */
START_TEST(test_against_gsl_multifit)
{
  scenario s;
  twf_calib_options co = twf_calib_default_options();
  twf_calib_result *r;
  size_t j, kind, i, n = 0, nj = 6, ncol = 6 * 7, rank_full;
  gsl_matrix *X;
  gsl_vector *y;
  unsigned char drop[42];
  double coef[42], ss_full;
  make_scenario(&s, 50, HARMONIC_J2, 3e-4, 2e-5, 3);
  co.sigma_length = 2e-5;
  co.pattern.torque = s.torque;
  r = calibrate(&s, &co, NULL);
  X = gsl_matrix_calloc(3 * s.c->n_meas, ncol);
  y = gsl_vector_alloc(3 * s.c->n_meas);
  for (i = 0; i < s.c->n_meas; i++) {
    const twf_measurement *ms = &s.c->meas[i];
    size_t a, col;
    if (r->excluded[i])
      continue;
    for (j = 0; j < nj; j++) {
      double q[6], pp[3], pm[3], d[3], di[3], h = 1e-6, f[7];
      twf_pose F;
      memcpy(q, &s.c->q[ms->pose * nj], sizeof q);
      q[j] += h;
      twf_model_fk(r->asbuilt, q, NULL, &F);
      twf_pose_apply(&F, r->asbuilt->targets[ms->target].offset, pp);
      q[j] -= 2 * h;
      twf_model_fk(r->asbuilt, q, NULL, &F);
      twf_pose_apply(&F, r->asbuilt->targets[ms->target].offset, pm);
      for (a = 0; a < 3; a++)
        d[a] = (pp[a] - pm[a]) / (2 * h);
      twf_pose_rotate(&r->base_in_tracker, d, di);
      joint_regressors(s.c->q[ms->pose * nj + j], s.torque[ms->pose * nj + j], f);
      for (a = 0; a < 3; a++)
        for (col = 0; col < 7; col++)
          gsl_matrix_set(X, 3 * n + a, 7 * j + col, di[a] * f[col]);
    }
    for (a = 0; a < 3; a++)
      gsl_vector_set(y, 3 * n + a, r->pos_err_after[3 * i + a]);
    n++;
  }
  ck_assert_uint_eq(n, r->pattern.n_used);
  {
    gsl_matrix_view Xv = gsl_matrix_submatrix(X, 0, 0, 3 * n, ncol);
    gsl_vector_view yv = gsl_vector_subvector(y, 0, 3 * n);
    /* the torque columns of joints other than j2 are zero here: leave them out */
    memset(drop, 0, sizeof drop);
    for (j = 0; j < nj; j++)
      drop[7 * j + 6] = j != 1;
    ss_full = gsl_ss(&Xv.matrix, &yv.vector, drop, &rank_full, coef);
    ck_assert_uint_eq(rank_full, r->pattern.rank);
    for (j = 0; j < nj; j++)
      for (kind = 0; kind < TWF_PATTERN_NKINDS; kind++) {
        const twf_pattern_test *t = test_of(r, j, (twf_pattern_kind)kind);
        size_t first = kind == TWF_PATTERN_SLOPE ? 1 : kind == TWF_PATTERN_HARMONIC ? 2 : 6;
        size_t k = kind == TWF_PATTERN_HARMONIC ? 4 : 1, col, rank_red;
        unsigned char d2[42];
        double ss_red, f;
        if (t->skip != TWF_PATTERN_TESTED)
          continue;
        double ss_none;
        size_t rank_none;
        memcpy(d2, drop, sizeof d2);
        for (col = 1; col < 7; col++)
          d2[7 * j + col] = 1;
        ss_none = gsl_ss(&Xv.matrix, &yv.vector, d2, &rank_none, NULL);
        for (col = 0; col < k; col++)
          d2[7 * j + first + col] = drop[7 * j + first + col];
        ss_red = gsl_ss(&Xv.matrix, &yv.vector, d2, &rank_red, coef);
        ck_assert_uint_eq(rank_red - rank_none, t->k);
        f = ((ss_none - ss_red) / (double)t->k) / (ss_full / (double)(3 * n - rank_full));
        ck_assert_msg(fabs(f - t->f) <= 1e-5 * fabs(f) + 1e-6, "joint %zu %s: F %g, GSL %g", j,
                      twf_pattern_kind_name(t->kind), t->f, f);
        ck_assert(fabs(t->p_value - gsl_cdf_fdist_Q(f, (double)t->k, (double)(3 * n - rank_full))) <=
                  1e-4 * t->p_value + 1e-12);
        for (col = 0; col < k; col++)
          ck_assert_msg(fabs(t->coef[col] - coef[7 * j + first + col]) <= 1e-4 * fabs(coef[7 * j + first + col]) + 1e-9,
                        "joint %zu %s coef %zu: %g against %g", j, twf_pattern_kind_name(t->kind), col,
                        t->coef[col], coef[7 * j + first + col]);
      }
  }
  gsl_matrix_free(X);
  gsl_vector_free(y);
  twf_calib_result_free(r);
  free_scenario(&s);
}
END_TEST

/* Rigid arms with Gaussian noise, judged on the p-values alone
 * (min_explained 0): over 200 campaigns at alpha = 0.01 the
 * expected number of calibrations with any alarm is at most 2 (Bonferroni
 * bounds each below alpha); six or more would happen with probability
 * below 0.02 if the bound holds (binomial tail). */
START_TEST(test_rigid_quiet)
{
  size_t seed, alarms = 0, tested = 0;
  for (seed = 1; seed <= 200; seed++) {
    scenario s;
    twf_calib_options co = twf_calib_default_options();
    twf_calib_result *r;
    make_scenario(&s, 40, NONE, 0.0, 2e-5, seed);
    co.sigma_length = 2e-5;
    co.pattern.torque = s.torque;
    co.pattern.min_explained = 0.0; /* the p-values alone */
    r = calibrate(&s, &co, NULL);
    alarms += r->pattern.n_significant > 0;
    tested += r->pattern.n_tested;
    ck_assert_uint_eq(r->screen_refused, 0);
    twf_calib_result_free(r);
    free_scenario(&s);
  }
  ck_assert_msg(alarms <= 5, "%zu of 200 rigid campaigns raised an alarm", alarms);
  ck_assert_uint_gt(tested, 200 * 10);
}
END_TEST

/* A gear-like error of 0.017 deg on j2 (0.3 mm at the tool, noise 0.02 mm):
 * its harmonic is the strongest pattern and the warning names j2. */
START_TEST(test_harmonic_flagged)
{
  scenario s;
  twf_calib_options co = twf_calib_default_options();
  twf_warnings w;
  twf_calib_result *r;
  size_t j;
  make_scenario(&s, 60, HARMONIC_J2, 3e-4, 2e-5, 5);
  twf_warnings_init(&w);
  co.sigma_length = 2e-5;
  r = calibrate(&s, &co, &w);
  ck_assert(test_of(r, 1, TWF_PATTERN_HARMONIC)->significant);
  for (j = 0; j < 6; j++)
    if (j != 1 && test_of(r, j, TWF_PATTERN_HARMONIC)->skip == TWF_PATTERN_TESTED)
      ck_assert(test_of(r, j, TWF_PATTERN_HARMONIC)->f < test_of(r, 1, TWF_PATTERN_HARMONIC)->f);
  ck_assert_msg(warned(&w, "periodic pattern in the angle of j2", NULL), "no warning names j2");
  /* without a mass model the torque family is not tested */
  ck_assert_int_eq(test_of(r, 1, TWF_PATTERN_TORQUE)->skip, TWF_PATTERN_NO_TORQUE);
  twf_warnings_clear(&w);
  twf_calib_result_free(r);
  free_scenario(&s);
}
END_TEST

/* A gear ratio 1e-3 off on j3: flagged as a slope while the scale group
 * is not fitted; fitting it absorbs the slope (not tested) and quiets the
 * test. */
START_TEST(test_slope_flagged)
{
  scenario s;
  twf_calib_options co = twf_calib_default_options();
  twf_warnings w;
  twf_calib_result *r;
  make_scenario(&s, 60, SCALE_J3, 1e-3, 2e-5, 7);
  twf_warnings_init(&w);
  co.sigma_length = 2e-5;
  r = calibrate(&s, &co, &w);
  ck_assert(test_of(r, 2, TWF_PATTERN_SLOPE)->significant);
  ck_assert(warned(&w, "value of j3", "fit the scale group"));
  twf_warnings_clear(&w);
  twf_calib_result_free(r);
  co.groups |= TWF_GROUP_BIT(TWF_GROUP_SCALE);
  r = calibrate(&s, &co, NULL);
  ck_assert_int_eq(test_of(r, 2, TWF_PATTERN_SLOPE)->skip, TWF_PATTERN_FITTED);
  ck_assert_uint_eq(r->pattern.n_significant, 0);
  twf_calib_result_free(r);
  free_scenario(&s);
}
END_TEST

/* Compliance-like: j2 yields by 2e-7 rad per N m of its torque (up to
 * 0.0075 deg); with the torques given the torque family of j2 is flagged
 * and the warning points to the compliance group. */
START_TEST(test_torque_flagged)
{
  scenario s;
  twf_calib_options co = twf_calib_default_options();
  twf_warnings w;
  twf_calib_result *r;
  const twf_pattern_test *t;
  make_scenario(&s, 60, TORQUE_J2, 2e-7, 2e-5, 9);
  twf_warnings_init(&w);
  co.sigma_length = 2e-5;
  co.pattern.torque = s.torque;
  r = calibrate(&s, &co, &w);
  t = test_of(r, 1, TWF_PATTERN_TORQUE);
  ck_assert_msg(t->significant, "j2 torque: F %g p %g explained %g", t->f, t->p_value, t->explained);
  /* the fitted compliance has the right sign and size (the geometry takes
   * part of it, so only the order of magnitude is claimed) */
  ck_assert_msg(t->coef[0] > 0.3 * 2e-7 && t->coef[0] < 3 * 2e-7, "coef %g", t->coef[0]);
  ck_assert(warned(&w, "gravity load on j2", "compliance"));
  twf_warnings_clear(&w);
  twf_calib_result_free(r);
  free_scenario(&s);
}
END_TEST

/* A misfit large against the noise makes the drop screen want many rows:
 * it keeps them and says the model is the likely problem; a few gross
 * errors are still dropped. */
START_TEST(test_screen_limit)
{
  scenario s;
  twf_calib_options co = twf_calib_default_options();
  twf_simulate_options so = twf_simulate_default_options();
  twf_warnings w;
  twf_calib_result *r;
  twf_error err;
  make_scenario(&s, 60, SCALE_J3, 3e-3, 2e-5, 11);
  twf_warnings_init(&w);
  co.sigma_length = 2e-5;
  r = calibrate(&s, &co, &w);
  ck_assert_uint_gt(r->screen_refused, 0);
  ck_assert_uint_eq(r->n_dropped, 0);
  ck_assert(warned(&w, "the model, not the data", NULL));
  /* the rows were kept: the model is the fit with every weight 1, the one
   * a run without the screen gives (the refit after the refusal must not
   * start from the normal matrix of the screened weights) */
  {
    twf_calib_options off = co;
    twf_calib_result *plain;
    size_t i;
    off.robust = TWF_ROBUST_OFF;
    plain = calibrate(&s, &off, NULL);
    ck_assert_uint_eq(plain->n_meas, r->n_meas);
    /* both converged: within a few hundredths of the 0.02 mm noise (the
     * solver stops when the next step moves no parameter by 1 % of its
     * standard deviation); the screened fit is 0.2 mm away */
    for (i = 0; i < 3 * r->n_meas; i++)
      ck_assert_msg(fabs(r->pos_err_after[i] - plain->pos_err_after[i]) < 1e-6,
                    "residual %zu: %g m kept against %g m without the screen", i, r->pos_err_after[i],
                    plain->pos_err_after[i]);
    twf_calib_result_free(plain);
  }
  twf_warnings_clear(&w);
  twf_calib_result_free(r);
  free_scenario(&s);

  make_scenario(&s, 60, NONE, 0.0, 2e-5, 13);
  twf_campaign_free(s.c);
  so.n_poses = 60;
  so.sigma_m = 2e-5;
  so.seed = 113;
  so.outlier_fraction = 0.02;
  so.outlier_m = 2e-3;
  s.c = twf_simulate_campaign(s.truth, &s.base, &so, &err);
  ck_assert(s.c != NULL);
  r = calibrate(&s, &co, NULL);
  ck_assert_uint_eq(r->screen_refused, 0);
  ck_assert_uint_gt(r->n_dropped, 0);
  twf_calib_result_free(r);
  free_scenario(&s);
}
END_TEST

/* Noise-free campaigns (a simulation): what the fit leaves is the solver's
 * last digits, systematic but far below any instrument; the test stays
 * quiet (min_explained_rms_m, 0.1 um). A gear-like harmonic of 0.2 mm on
 * noise-free data is still flagged, so the floor hides nothing real. */
START_TEST(test_noise_free_quiet)
{
  for (unsigned long long seed = 1; seed <= 5; seed++) {
    scenario s;
    twf_calib_options co = twf_calib_default_options();
    twf_calib_result *r;
    make_scenario(&s, 60, NONE, 0.0, 0.0, seed);
    co.sigma_length = 2e-5; /* the noise the user states, as for a real instrument */
    co.pattern.torque = s.torque;
    r = calibrate(&s, &co, NULL);
    for (size_t i = 0; i < r->pattern.n_tests; i++)
      ck_assert_msg(!r->pattern.tests[i].significant || r->pattern.tests[i].explained_rms_m >= 1e-7,
                    "seed %llu: %s of joint %zu flagged at %.3g m", seed,
                    twf_pattern_kind_name(r->pattern.tests[i].kind), r->pattern.tests[i].joint + 1,
                    r->pattern.tests[i].explained_rms_m);
    ck_assert_uint_eq(r->pattern.n_significant, 0);
    twf_calib_result_free(r);
    free_scenario(&s);
  }
  {
    scenario s;
    twf_calib_options co = twf_calib_default_options();
    twf_calib_result *r;
    make_scenario(&s, 60, HARMONIC_J2, 2e-4, 0.0, 3);
    co.sigma_length = 2e-5;
    r = calibrate(&s, &co, NULL);
    ck_assert(test_of(r, 1, TWF_PATTERN_HARMONIC)->significant);
    twf_calib_result_free(r);
    free_scenario(&s);
  }
}
END_TEST

int main(void)
{
  Suite *s = suite_create("pattern");
  TCase *tc = tcase_create("pattern");
  gsl_set_error_handler_off();
  tcase_set_timeout(tc, 300);
  tcase_add_test(tc, test_against_gsl_multifit);
  tcase_add_test(tc, test_rigid_quiet);
  tcase_add_test(tc, test_harmonic_flagged);
  tcase_add_test(tc, test_slope_flagged);
  tcase_add_test(tc, test_torque_flagged);
  tcase_add_test(tc, test_screen_limit);
  tcase_add_test(tc, test_noise_free_quiet);
  suite_add_tcase(s, tc);
  return twf_test_run(s);
}
