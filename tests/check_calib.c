/* check_calib.c: the calibration job on synthetic campaigns from known
 * "true" arms: identifiable parameter counts, exact recovery without noise,
 * recovery within the noise, stationarity of the reported solution, the
 * offsets-only preset, a joint that never moves, gross outliers. */
#include "testutil.h"
#include "arms.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Independent prediction error of model m (base B) against the truth over
 * random configurations: RMS of the target position differences, m. */
static double prediction_rms(const twf_model *m, const twf_pose *B, const twf_model *truth,
                             const twf_pose *Bt, size_t n, unsigned long long seed)
{
  double *q = calloc(m->n_joints, sizeof *q), sum = 0.0;
  size_t i, k, count = 0;
  unsigned long long s = twf_test_seed(seed);
  for (i = 0; i < n; i++) {
    twf_pose F, T, Ft, Tt;
    twf_simulate_joints(truth, 0.05, &s, q);
    twf_model_fk(m, q, NULL, &F);
    twf_pose_mul(B, &F, &T);
    twf_model_fk(truth, q, NULL, &Ft);
    twf_pose_mul(Bt, &Ft, &Tt);
    for (k = 0; k < m->n_targets; k++) {
      double y[3], yt[3];
      int a;
      twf_pose_apply(&T, m->targets[k].offset, y);
      twf_pose_apply(&Tt, truth->targets[k].offset, yt);
      for (a = 0; a < 3; a++)
        sum += (y[a] - yt[a]) * (y[a] - yt[a]);
      count++;
    }
  }
  free(q);
  return sqrt(sum / (double)count);
}

static double rms_of(const double *res3, const uint8_t *set, size_t n, twf_meas_set which)
{
  double sum = 0.0;
  size_t i, count = 0;
  for (i = 0; i < n; i++) {
    if (set[i] != which)
      continue;
    sum += res3[3 * i] * res3[3 * i] + res3[3 * i + 1] * res3[3 * i + 1] +
           res3[3 * i + 2] * res3[3 * i + 2];
    count++;
  }
  return count ? sqrt(sum / (double)count) : NAN;
}

static const twf_perturbation typical = { 1e-3, 0.5e-3, 2e-3, 1e-3, 0.0 };

/* Independent counts of identifiable parameters (calibration-model.md,
 * "Redundant and weak parameters"): 4r + 2p + 6 with full-pose data,
 * 4r + 2p + 3k with k point targets of unknown offset (Everett, Driels and
 * Mooring 1987; He, Zhao, Yang and Yang 2010). */
static void check_count(test_arm arm, size_t n_targets, int full_pose, size_t expected)
{
  twf_model *m = test_arm_model(arm);
  twf_simulate_options so = twf_simulate_default_options();
  twf_calib_options co = twf_calib_default_options();
  twf_calib_result *res = NULL;
  twf_campaign *c;
  twf_error err;
  twf_pose B;
  unsigned char sel[3] = { 0, 0, 0 };
  size_t k;
  for (k = 0; k < n_targets; k++)
    sel[k] = 1;
  /* targets of unknown offset: they enter as fitted parameters */
  test_tracker_base(&B);
  so.n_poses = 60;
  so.seed = twf_test_seed(5);
  so.targets = sel;
  so.orientation = full_pose;
  so.sigma_rad = 0.0;
  c = twf_simulate_campaign(m, &B, &so, &err);
  ck_assert_ptr_nonnull(c);
  for (k = 0; k < m->n_targets; k++)
    m->targets[k].offset_known = 0;
  co.robust = TWF_ROBUST_OFF;
  co.sigma_length = 5e-5;
  ck_assert_int_eq(twf_calibrate(m, c, &co, &res, NULL, &err), TWF_OK);
  ck_assert_msg(res->structural_count == expected,
                "%s with %zu targets%s: %zu identifiable parameters, expected %zu", m->name,
                n_targets, full_pose ? " (full pose)" : "", res->structural_count, expected);
  ck_assert_uint_eq(res->n_kept, expected);
  twf_calib_result_free(res);
  twf_campaign_free(c);
  twf_model_free(m);
}

START_TEST(test_count_tf6s) { check_count(ARM_TF6S, 1, 0, 4 * 6 + 3); }
END_TEST
START_TEST(test_count_tf6s_three_targets) { check_count(ARM_TF6S, 3, 0, 4 * 6 + 3 * 3); }
END_TEST
START_TEST(test_count_tf6s_full_pose) { check_count(ARM_TF6S, 1, 1, 4 * 6 + 6); }
END_TEST
START_TEST(test_count_tf7) { check_count(ARM_TF7, 1, 0, 4 * 7 + 3); }
END_TEST
START_TEST(test_count_tf7_full_pose) { check_count(ARM_TF7, 1, 1, 4 * 7 + 6); }
END_TEST
START_TEST(test_count_tf4p) { check_count(ARM_TF4P, 2, 0, 4 * 3 + 2 * 1 + 3 * 2); }
END_TEST
START_TEST(test_count_tf4p_full_pose) { check_count(ARM_TF4P, 1, 1, 4 * 3 + 2 * 1 + 6); }
END_TEST
START_TEST(test_count_tf6p_parallel) { check_count(ARM_TF6P, 2, 0, 4 * 6 + 3 * 2); }
END_TEST

/* A campaign on a perturbed arm, calibrated from the nominal one. */
typedef struct scenario {
  twf_model *nominal, *truth;
  twf_pose base;
  twf_campaign *c;
  twf_calib_result *res;
} scenario;

static twf_status run_scenario(scenario *s, test_arm arm, size_t n_poses, double sigma,
                               unsigned long long seed, const twf_calib_options *co_in)
{
  twf_simulate_options so = twf_simulate_default_options();
  twf_calib_options co = co_in ? *co_in : twf_calib_default_options();
  twf_error err;
  memset(s, 0, sizeof *s);
  s->nominal = test_arm_model(arm);
  s->truth = twf_model_copy(s->nominal);
  twf_model_perturb(s->truth, &typical, twf_test_seed(seed));
  test_tracker_base(&s->base);
  so.n_poses = n_poses;
  so.sigma_m = sigma;
  so.seed = twf_test_seed(seed + 100);
  so.check_fraction = 0.25;
  s->c = twf_simulate_campaign(s->truth, &s->base, &so, &err);
  ck_assert_ptr_nonnull(s->c);
  if (co_in == NULL)
    co.sigma_length = sigma > 0 ? sigma : 1e-5;
  return twf_calibrate(s->nominal, s->c, &co, &s->res, NULL, &err);
}

static void free_scenario(scenario *s)
{
  twf_calib_result_free(s->res);
  twf_campaign_free(s->c);
  twf_model_free(s->nominal);
  twf_model_free(s->truth);
}

START_TEST(test_recovery_noise_free)
{
  /* without noise the as-built model predicts the true arm exactly:
   * within 1e-6 mm over 1000 random configurations (issue requirement) */
  static const test_arm arms[] = { ARM_TF6S, ARM_TF7, ARM_TF4P, ARM_TF6P };
  size_t a;
  for (a = 0; a < 4; a++) {
    scenario s;
    double rms;
    ck_assert_int_eq(run_scenario(&s, arms[a], 80, 0.0, 21 + a, NULL), TWF_OK);
    ck_assert(twf_stop_converged(s.res->solve.stop));
    rms = prediction_rms(s.res->asbuilt, &s.res->base_in_tracker, s.truth, &s.base, 1000, 77);
    ck_assert_msg(rms < 1e-9, "%s: prediction RMS %.3g m", s.nominal->name, rms);
    ck_assert(rms_of(s.res->pos_err_after, s.res->meas_set, s.res->n_meas, TWF_SET_CHECK) < 1e-9);
    /* the errors were real: before calibration they were far larger */
    ck_assert(rms_of(s.res->pos_err_before, s.res->meas_set, s.res->n_meas, TWF_SET_FIT) > 1e-4);
    free_scenario(&s);
  }
}
END_TEST

START_TEST(test_recovery_with_noise)
{
  /* noise sigma 0.05 mm per coordinate: the check-set RMS comes to at most
   * 1.2 sigma sqrt(3) (the RMS length of isotropic 3-D noise; common
   * practice, no source) and the model predicts within 3 sigma RMS */
  const double sigma = 5e-5;
  scenario s;
  double check, pred;
  ck_assert_int_eq(run_scenario(&s, ARM_TF6S, 200, sigma, 31, NULL), TWF_OK);
  check = rms_of(s.res->pos_err_after, s.res->meas_set, s.res->n_meas, TWF_SET_CHECK);
  pred = prediction_rms(s.res->asbuilt, &s.res->base_in_tracker, s.truth, &s.base, 1000, 78);
  ck_assert_msg(check <= 1.2 * sigma * sqrt(3.0), "check RMS %.4g mm", check * 1e3);
  ck_assert_msg(pred <= 3 * sigma, "prediction RMS %.4g mm", pred * 1e3);
  ck_assert_uint_eq(s.res->n_outliers, 0);
  ck_assert(s.res->condition_number > 1 && isfinite(s.res->condition_number));
  free_scenario(&s);
}
END_TEST

/* weighted cost of a model on the fit set, computed independently */
static double cost_of(const twf_model *m, const twf_pose *B, const twf_campaign *c,
                      const uint8_t *set, double sigma)
{
  size_t i;
  double cost = 0;
  for (i = 0; i < c->n_meas; i++) {
    twf_pose F, T;
    double y[3];
    int a;
    if (set[i] != TWF_SET_FIT)
      continue;
    twf_model_fk(m, c->q + c->meas[i].pose * m->n_joints, NULL, &F);
    twf_pose_mul(B, &F, &T);
    twf_pose_apply(&T, m->targets[c->meas[i].target].offset, y);
    for (a = 0; a < 3; a++)
      cost += 0.5 * (c->meas[i].pos[a] - y[a]) * (c->meas[i].pos[a] - y[a]) / (sigma * sigma);
  }
  return cost;
}

START_TEST(test_stationary_solution)
{
  /* calibration-model.md test 2: at the reported solution the gradient,
   * recomputed from scratch by central finite differences of the cost, is
   * zero to the solver's tolerance. Finite differences: common practice,
   * no source. */
  const double sigma = 5e-5;
  scenario s;
  twf_errmodel *em;
  size_t p, j;
  double c0;
  ck_assert_int_eq(run_scenario(&s, ARM_TF7, 120, sigma, 41, NULL), TWF_OK);
  em = twf_errmodel_alloc(s.res->asbuilt, TWF_GROUPS_GEOMETRIC, NULL);
  p = twf_errmodel_n_params(em);
  c0 = cost_of(s.res->asbuilt, &s.res->base_in_tracker, s.c, s.res->meas_set, sigma);
  for (j = 0; j < p; j++) {
    double h = 1e-7 / twf_errmodel_param_scale(em, j), cp, cm, grad, curv;
    double *d = calloc(p, sizeof *d);
    twf_model *mp = twf_model_copy(s.res->asbuilt), *mm = twf_model_copy(s.res->asbuilt);
    twf_pose Bp = s.res->base_in_tracker, Bm = s.res->base_in_tracker;
    twf_errmodel *ep = twf_errmodel_alloc(mp, TWF_GROUPS_GEOMETRIC, NULL);
    twf_errmodel *emm = twf_errmodel_alloc(mm, TWF_GROUPS_GEOMETRIC, NULL);
    d[j] = h;
    twf_errmodel_fold(ep, d, mp, &Bp);
    d[j] = -h;
    twf_errmodel_fold(emm, d, mm, &Bm);
    cp = cost_of(mp, &Bp, s.c, s.res->meas_set, sigma);
    cm = cost_of(mm, &Bm, s.c, s.res->meas_set, sigma);
    grad = (cp - cm) / (2 * h);
    curv = (cp - 2 * c0 + cm) / (h * h);
    /* a stationary point: the cost would fall by less than 1e-6 of itself
     * along this parameter (Newton decrease grad^2 / (2 curv)) */
    ck_assert_msg(curv <= 0 || grad * grad / (2 * curv) < 1e-6 * c0 + 1e-9,
                  "%s: gradient %.3g, curvature %.3g, cost %.6g",
                  twf_errmodel_param(em, j)->name, grad, curv, c0);
    twf_errmodel_free(ep);
    twf_errmodel_free(emm);
    twf_model_free(mp);
    twf_model_free(mm);
    free(d);
  }
  twf_errmodel_free(em);
  free_scenario(&s);
}
END_TEST

static const twf_param_result *find_param(const twf_calib_result *r, const char *name)
{
  size_t j;
  for (j = 0; j < r->n_params; j++)
    if (strcmp(r->params[j].param.name, name) == 0)
      return &r->params[j];
  return NULL;
}

START_TEST(test_offsets_only_remaster)
{
  /* re-mastering after a motor swap: the previous as-built model with
   * offsets changed on joints 2 to 5; 24 poses, noise 0.03 mm */
  const double sigma = 3e-5;
  const double injected[6] = { 0.0, 0.21e-2, -0.17e-2, 0.33e-2, 0.12e-2, 0.0 };
  twf_model *previous = test_arm_model(ARM_TF6S), *truth;
  twf_simulate_options so = twf_simulate_default_options();
  twf_calib_options co = twf_calib_default_options();
  twf_calib_result *res = NULL;
  twf_campaign *c;
  twf_error err;
  twf_pose B;
  size_t i;
  twf_model_perturb(previous, &typical, twf_test_seed(51));
  truth = twf_model_copy(previous);
  for (i = 0; i < 6; i++)
    truth->joints[i].offset += injected[i];
  test_tracker_base(&B);
  so.n_poses = 24;
  so.sigma_m = sigma;
  so.seed = twf_test_seed(52);
  c = twf_simulate_campaign(truth, &B, &so, &err);
  co.groups = TWF_GROUPS_REMASTER;
  co.sigma_length = sigma;
  ck_assert_int_eq(twf_calibrate(previous, c, &co, &res, NULL, &err), TWF_OK);
  /* the first joint's offset goes into the base, the last one's into the targets */
  ck_assert_int_eq(find_param(res, "j1.offset")->status, TWF_PARAM_FIXED_STRUCTURAL);
  ck_assert_int_eq(find_param(res, "j6.offset")->status, TWF_PARAM_FIXED_STRUCTURAL);
  ck_assert_uint_gt(find_param(res, "j1.offset")->n_explain, 0);
  for (i = 1; i < 5; i++) {
    char name[32];
    const twf_param_result *pr;
    snprintf(name, sizeof name, "j%zu.offset", i + 1);
    pr = find_param(res, name);
    ck_assert_int_eq(pr->status, TWF_PARAM_KEPT);
    ck_assert_msg(fabs(pr->change - injected[i]) < 4 * pr->std,
                  "%s: %.6g rad recovered, %.6g injected, std %.3g", name, pr->change,
                  injected[i], pr->std);
  }
  /* no joint line was fitted: the lines stay the starting model's (no
   * datum rule), the comparison shows no tilt or shift, and its offsets
   * are the fitted offset changes (NaN where the offset was fixed) */
  for (i = 0; i < 6; i++) {
    int k;
    for (k = 0; k < 6; k++)
      ck_assert_double_eq(res->asbuilt->joints[i].twist[k], previous->joints[i].twist[k]);
    for (k = 0; k < 3; k++)
      ck_assert_double_eq(res->asbuilt->joints[i].point[k], previous->joints[i].point[k]);
    ck_assert(isnan(res->comparison.joints[i].angle_rad));
    ck_assert(isnan(res->comparison.joints[i].distance_m));
    if (i == 0 || i == 5)
      ck_assert(isnan(res->comparison.joints[i].offset));
    else
      ck_assert_double_eq(res->comparison.joints[i].offset, res->comparison.joints[i].offset_raw);
  }
  ck_assert_uint_eq(res->groups, TWF_GROUPS_REMASTER);
  /* the link table: only the offsets moved, each theta by its fitted
   * offset change and with that parameter's standard deviation (the
   * Jacobian of theta_k on j_k.offset is 1: a check of the propagation);
   * joints 1 and 6 not determined (base, targets), the rest not fitted */
  ck_assert_uint_eq(res->links.n_rows, 8);
  for (i = 0; i < res->links.n_rows; i++) {
    const twf_link_row *row = &res->links.rows[i];
    int v;
    for (v = 0; v < TWF_LINK_NVALUES; v++) {
      if (row->why[v] == TWF_LINK_NOT_IN_FORM)
        continue;
      if (v == TWF_LINK_THETA && i >= 2 && i <= 5) {
        char name[32];
        const twf_param_result *pr;
        snprintf(name, sizeof name, "j%zu.offset", i);
        pr = find_param(res, name);
        ck_assert_int_eq(row->why[v], TWF_LINK_DETERMINED);
        ck_assert_msg(fabs(res->link_change[5 * i + (size_t)v] - pr->change) < 1e-12, "%s: link %.9g, param %.9g",
                      name, res->link_change[5 * i + (size_t)v], pr->change);
        ck_assert_msg(fabs(row->std[v] - pr->std) < 1e-6 * pr->std, "%s: std %.9g against %.9g", name,
                      row->std[v], pr->std);
      } else if (i == 0 || i == 1 || i >= 6) {
        ck_assert_msg(row->why[v] == TWF_LINK_BY_BASE || row->why[v] == TWF_LINK_BY_TARGETS ||
                      row->why[v] == TWF_LINK_NOT_FITTED, "row %zu value %d: why %d", i, v, (int)row->why[v]);
      } else {
        ck_assert_int_eq(row->why[v], TWF_LINK_NOT_FITTED);
        ck_assert(fabs(res->link_change[5 * i + (size_t)v]) < 1e-12);
      }
    }
  }
  ck_assert_int_eq(res->links.rows[1].why[TWF_LINK_THETA], TWF_LINK_BY_BASE);
  ck_assert_int_eq(res->links.rows[6].why[TWF_LINK_THETA], TWF_LINK_BY_TARGETS);
  twf_calib_result_free(res);
  twf_campaign_free(c);
  twf_model_free(previous);
  twf_model_free(truth);
}
END_TEST

START_TEST(test_joint_never_moves)
{
  /* joint 6 stays at 12.5 deg in every pose: its axis columns are exactly
   * dependent on these poses, fixed, and named in a warning */
  twf_model *m = test_arm_model(ARM_TF6S), *truth = twf_model_copy(m);
  twf_simulate_options so = twf_simulate_default_options();
  twf_calib_options co = twf_calib_default_options();
  twf_calib_result *res = NULL;
  twf_campaign *c;
  twf_warnings w;
  twf_error err;
  twf_pose B;
  size_t i, fixed = 0;
  int named = 0;
  twf_model_perturb(truth, &typical, twf_test_seed(61));
  test_tracker_base(&B);
  so.n_poses = 60;
  so.seed = twf_test_seed(62);
  so.sigma_m = 2e-5;
  c = twf_simulate_campaign(truth, &B, &so, &err);
  /* re-measure with joint 6 frozen */
  for (i = 0; i < c->n_poses; i++)
    c->q[i * 6 + 5] = 12.5 * 3.14159265358979323846 / 180.0;
  {
    for (i = 0; i < c->n_meas; i++) {
      twf_pose F, T;
      twf_model_fk(truth, c->q + c->meas[i].pose * 6, NULL, &F);
      twf_pose_mul(&B, &F, &T);
      twf_pose_apply(&T, truth->targets[c->meas[i].target].offset, c->meas[i].pos);
    }
  }
  twf_warnings_init(&w);
  co.sigma_length = 2e-5;
  ck_assert_int_eq(twf_calibrate(m, c, &co, &res, &w, &err), TWF_OK);
  for (i = 0; i < res->n_params; i++)
    if (res->params[i].status == TWF_PARAM_FIXED_DATA) {
      fixed++;
      /* the chain after joint 5 is rigid: joint 6 or 5 and its neighbour lose parameters */
      ck_assert_int_ge(res->params[i].param.joint, 3);
    }
  /* a frozen joint takes the four parameters of its line with it (4 per
   * revolute joint, as in the count 4r + 2p + 3k) */
  ck_assert_uint_eq(fixed, 4);
  for (i = 0; i < w.count; i++)
    if (strstr(w.items[i].message, "joint j6 moved through 0 deg in the fit poses") != NULL)
      named = 1;
  ck_assert_msg(named, "no warning names joint j6 (%zu warnings)", w.count);
  /* the joints whose parameters were fixed on these poses are marked, the
   * others not */
  for (i = 0; i < 6; i++) {
    unsigned want = 0;
    size_t k;
    for (k = 0; k < res->n_params; k++)
      if (res->params[k].status == TWF_PARAM_FIXED_DATA && res->params[k].param.joint == (long)i)
        want |= TWF_GROUP_BIT(res->params[k].param.group);
    ck_assert_uint_eq(res->joint_undetermined[i], want);
  }
  ck_assert_uint_ne(res->joint_undetermined[5] | res->joint_undetermined[4], 0);
  twf_warnings_clear(&w);
  twf_calib_result_free(res);
  twf_campaign_free(c);
  twf_model_free(m);
  twf_model_free(truth);
}
END_TEST

START_TEST(test_narrow_joint_warning)
{
  /* joint 6 moved through only about 12 degrees: the parameters that depend
   * on its motion are weak (predicted std far above the noise), and one
   * warning names the joint and what to measure */
  twf_model *nominal = test_arm_model(ARM_TF6S), *truth = twf_model_copy(nominal);
  twf_simulate_options so = twf_simulate_default_options();
  twf_calib_options co = twf_calib_default_options();
  twf_calib_result *res = NULL;
  twf_campaign *c;
  twf_warnings w;
  twf_error err;
  twf_pose B;
  size_t i, hits = 0;
  twf_model_perturb(truth, &typical, twf_test_seed(95));
  truth->joints[5].limit_lo = -6.6 * 3.14159265358979323846 / 180.0;
  truth->joints[5].limit_hi = 6.6 * 3.14159265358979323846 / 180.0;
  test_tracker_base(&B);
  so.n_poses = 60;
  so.seed = 195; /* fixed: the message checked below names the 11.7 deg this stream covers */
  so.sigma_m = 3e-5;
  c = twf_simulate_campaign(truth, &B, &so, &err);
  co.sigma_length = 3e-5;
  twf_warnings_init(&w);
  ck_assert_int_eq(twf_calibrate(nominal, c, &co, &res, &w, &err), TWF_OK);
  ck_assert_uint_gt(res->n_weak, 0);
  for (i = 0; i < w.count; i++)
    hits += strstr(w.items[i].message, "joint j6 moved through only 11.7 deg in the fit poses") != NULL;
  ck_assert_msg(hits == 1, "%zu warnings name the narrow joint (of %zu)", hits, w.count);
  twf_warnings_clear(&w);
  twf_calib_result_free(res);
  twf_campaign_free(c);
  twf_model_free(nominal);
  twf_model_free(truth);
}
END_TEST

START_TEST(test_gross_outliers)
{
  /* three gross errors of 2 to 5 mm (a broken beam, a wrong nest) are found
   * and listed by every robust mode, and the result stays within the noise */
  const double sigma = 5e-5;
  const size_t bad[3] = { 17, 101, 230 };
  const double size[3] = { 2e-3, -3.5e-3, 5e-3 };
  static const twf_robust modes[] = { TWF_ROBUST_DROP, TWF_ROBUST_HUBER, TWF_ROBUST_CAUCHY };
  size_t mode;
  for (mode = 0; mode < 3; mode++) {
    scenario s;
    twf_simulate_options so = twf_simulate_default_options();
    twf_calib_options co = twf_calib_default_options();
    twf_error err;
    size_t i, k;
    double pred;
    memset(&s, 0, sizeof s);
    s.nominal = test_arm_model(ARM_TF6S);
    s.truth = twf_model_copy(s.nominal);
    twf_model_perturb(s.truth, &typical, twf_test_seed(71));
    test_tracker_base(&s.base);
    so.n_poses = 120;
    so.sigma_m = sigma;
    so.seed = twf_test_seed(72);
    s.c = twf_simulate_campaign(s.truth, &s.base, &so, &err);
    for (k = 0; k < 3; k++)
      s.c->meas[bad[k]].pos[k] += size[k];
    co.sigma_length = sigma;
    co.robust = modes[mode];
    ck_assert_int_eq(twf_calibrate(s.nominal, s.c, &co, &s.res, NULL, &err), TWF_OK);
    for (k = 0; k < 3; k++) {
      int found = 0;
      for (i = 0; i < s.res->n_outliers; i++)
        found |= s.res->outliers[i].meas == bad[k] &&
                 (modes[mode] == TWF_ROBUST_DROP ? s.res->outliers[i].weight == 0.0
                                                 : s.res->outliers[i].weight < 0.2);
      ck_assert_msg(found, "mode %zu: outlier %zu not listed", mode, bad[k]);
    }
    ck_assert_msg(s.res->n_outliers <= 6, "mode %zu lists %zu measurements", mode, s.res->n_outliers);
    pred = prediction_rms(s.res->asbuilt, &s.res->base_in_tracker, s.truth, &s.base, 500, 79);
    ck_assert_msg(pred <= 3 * sigma, "mode %zu: prediction RMS %.4g mm", mode, pred * 1e3);
    free_scenario(&s);
  }
}
END_TEST

START_TEST(test_orientation_outliers)
{
  /* full-pose rows: four orientation readings 10 mrad off are screened
   * against the rotation errors' own robust scale, listed, and the result
   * stays within the noise */
  const double sigma = 3e-5, sigma_rad = 2e-5;
  const size_t bad[4] = { 11, 57, 123, 201 };
  scenario s;
  twf_simulate_options so = twf_simulate_default_options();
  twf_calib_options co = twf_calib_default_options();
  twf_error err;
  size_t i, k;
  double pred;
  unsigned char sel[3] = { 1, 0, 0 };
  memset(&s, 0, sizeof s);
  s.nominal = test_arm_model(ARM_TF6S);
  s.truth = twf_model_copy(s.nominal);
  twf_model_perturb(s.truth, &typical, twf_test_seed(73));
  test_tracker_base(&s.base);
  so.n_poses = 300;
  so.sigma_m = sigma;
  so.sigma_rad = sigma_rad;
  so.orientation = 1;
  so.targets = sel;
  so.seed = twf_test_seed(74);
  s.c = twf_simulate_campaign(s.truth, &s.base, &so, &err);
  for (k = 0; k < 4; k++) {
    double R[3][3], E[3][3], Rn[3][3], qn[4];
    const double w[3] = { 0.01, 0.0, 0.0 };
    int a, b, d;
    twf_quat_to_rot(twf_campaign_meas_quat(s.c, bad[k]), R);
    twf_so3_exp(w, 1.0, E);
    for (a = 0; a < 3; a++)
      for (b = 0; b < 3; b++)
        for (Rn[a][b] = 0, d = 0; d < 3; d++)
          Rn[a][b] += E[a][d] * R[d][b];
    twf_rot_to_quat(Rn, qn);
    ck_assert_int_eq(twf_campaign_meas_set_quat(s.c, bad[k], qn), TWF_OK);
  }
  co.sigma_length = sigma;
  co.sigma_angle = sigma_rad;
  ck_assert_int_eq(twf_calibrate(s.nominal, s.c, &co, &s.res, NULL, &err), TWF_OK);
  for (k = 0; k < 4; k++) {
    int found = 0;
    for (i = 0; i < s.res->n_outliers; i++)
      found |= s.res->outliers[i].meas == bad[k];
    ck_assert_msg(found, "orientation outlier %zu not listed", bad[k]);
  }
  ck_assert_uint_le(s.res->n_outliers, 6);
  /* only T1 was measured: predict T1 */
  s.res->asbuilt->n_targets = 1;
  pred = prediction_rms(s.res->asbuilt, &s.res->base_in_tracker, s.truth, &s.base, 500, 80);
  s.res->asbuilt->n_targets = 3;
  ck_assert_msg(pred <= 3 * sigma, "prediction RMS %.4g mm", pred * 1e3);
  free_scenario(&s);
}
END_TEST


START_TEST(test_asbuilt_independent_of_order)
{
  /* the per-joint deviations in the datum frame (tilt, line shift, offset)
   * and the targets at logged zero do not depend on which redundant
   * parameters the walk fixed (calibration-model.md, "Reporting the as-built
   * geometry"), while the raw parameters do; on every sample arm, the
   * four-axis one with all revolute axes parallel included */
  static const test_arm arms[] = { ARM_TF6S, ARM_TF6P, ARM_TF7, ARM_TF4P };
  const twf_group order_b[TWF_GROUP_COUNT] = { TWF_GROUP_TILTS, TWF_GROUP_SHIFTS, TWF_GROUP_HOME,
                                               TWF_GROUP_OFFSETS, TWF_GROUP_TARGETS,
                                               TWF_GROUP_BASE, TWF_GROUP_SCALE, TWF_GROUP_COMPLIANCE };
  size_t arm;
  for (arm = 0; arm < 4; arm++) {
    twf_calib_options a = twf_calib_default_options(), b = twf_calib_default_options();
    scenario sa, sb;
    size_t i, n;
    int raw_differs = 0;
    a.sigma_length = b.sigma_length = 1e-5;
    memcpy(b.priority, order_b, sizeof order_b);
    ck_assert_int_eq(run_scenario(&sa, arms[arm], 80, 0.0, 81, &a), TWF_OK);
    ck_assert_int_eq(run_scenario(&sb, arms[arm], 80, 0.0, 81, &b), TWF_OK);
    ck_assert(sa.res->comparison.settled && sb.res->comparison.settled);
    /* the count of identifiable parameters does not depend on the order
     * either (a walk on the normal matrix once kept one too many under
     * tilts-first orders, with an infinite condition number) */
    ck_assert_uint_eq(sa.res->structural_count, sb.res->structural_count);
    ck_assert_uint_eq(sa.res->n_kept, sb.res->n_kept);
    ck_assert(isfinite(sb.res->condition_number) && sb.res->condition_number < 1e4);
    n = sa.nominal->n_joints;
    for (i = 0; i < n; i++) {
      const twf_joint_deviation *da = &sa.res->comparison.joints[i], *db = &sb.res->comparison.joints[i];
      int offset_same = isnan(da->offset) ? isnan(db->offset) : fabs(da->offset - db->offset) < 1e-9;
      ck_assert_msg(fabs(da->angle_rad - db->angle_rad) < 1e-9 && fabs(da->distance_m - db->distance_m) < 1e-9 &&
                    offset_same,
                    "%s joint %zu: %.6g rad / %.6g m / offset %.6g against %.6g rad / %.6g m / offset %.6g",
                    sa.nominal->name, i + 1, da->angle_rad, da->distance_m, da->offset, db->angle_rad,
                    db->distance_m, db->offset);
      if (da->offset_raw != db->offset_raw)
        raw_differs = 1;
    }
    /* with points only the last joint's offset is absorbed by the targets */
    ck_assert(isnan(sa.res->comparison.joints[n - 1].offset));
    ck_assert(isnan(sa.res->comparison.home_distance_m) && isnan(sa.res->comparison.home_angle_rad));
    for (i = 0; i < 3 * sa.nominal->n_targets; i++)
      ck_assert(fabs(sa.res->comparison.target_change_m[i] - sb.res->comparison.target_change_m[i]) < 1e-9);
    for (i = 0; i < sa.res->n_params; i++)
      if (sa.res->params[i].status != sb.res->params[i].status)
        raw_differs = 1;
    /* the link table, values to 1e-9 relative (of the value, or of 1 m /
     * 1 rad near zero), standard deviations to 1e-8 relative: they come
     * through the inverse of the normal matrix of each order's kept
     * columns, which brings its rounding to about 1e-9 of them (tf6s row
     * 4's d: 0.5e-9 to 2.1e-9 between builds that differ by rounding) */
    ck_assert_uint_eq(sa.res->links.n_rows, sb.res->links.n_rows);
    for (i = 0; i < sa.res->links.n_rows; i++) {
      const twf_link_row *ra = &sa.res->links.rows[i], *rb = &sb.res->links.rows[i];
      int v;
      ck_assert_int_eq(ra->form, rb->form);
      for (v = 0; v < TWF_LINK_NVALUES; v++) {
        double ca = sa.res->link_change[5 * i + (size_t)v], cb = sb.res->link_change[5 * i + (size_t)v];
        ck_assert_int_eq(ra->why[v], rb->why[v]);
        if (ra->why[v] != TWF_LINK_DETERMINED)
          continue;
        /* Known limit: on tf4p every line is parallel, and row 1's Hayati
         * plane goes through joint 1's reference point, whose place along
         * the line differs between the two fits; a then moves by that
         * distance times the tilt between lines 1 and 2 (0.27 um here).
         * Kept visible with its own bound until an intrinsic place exists. */
        double tol = arm == 3 && i == 1 ? 1e-6 : 1e-9 * fmax(fabs(ra->value[v]), 1.0);
        double stol = arm == 3 && i == 1 ? 1e-3 * ra->std[v] : 1e-8 * ra->std[v] + 1e-15;
        ck_assert_msg(fabs(ca - cb) <= tol && fabs(ra->std[v] - rb->std[v]) <= stol,
                      "%s row %zu %s: change %.12g / %.12g, std %.12g / %.12g", sa.nominal->name, i,
                      twf_link_value_name((twf_link_value)v), ca, cb, ra->std[v], rb->std[v]);
      }
    }
    ck_assert_msg(raw_differs, "%s: the two orders fixed the same parameters: the test shows nothing",
                  sa.nominal->name);
    free_scenario(&sa);
    free_scenario(&sb);
  }
}
END_TEST

START_TEST(test_parallel_axes_well_conditioned)
{
  /* tf6p has parallel shoulder and elbow axes, where a DH model cannot
   * express a small tilt between them; the PoE model stays as well
   * conditioned as the spherical-wrist arm (within a factor 2 of tf6s on the
   * same kind of campaign; the bound 1000 is common practice, no source)
   * and the check set comes down to the noise */
  const double sigma = 5e-5;
  scenario sp, ss;
  double check;
  ck_assert_int_eq(run_scenario(&sp, ARM_TF6P, 100, sigma, 91, NULL), TWF_OK);
  ck_assert_int_eq(run_scenario(&ss, ARM_TF6S, 100, sigma, 91, NULL), TWF_OK);
  ck_assert_msg(sp.res->condition_number < 1000 &&
                sp.res->condition_number < 2 * ss.res->condition_number,
                "condition number %.4g (tf6s %.4g)", sp.res->condition_number, ss.res->condition_number);
  ck_assert_uint_eq(sp.res->n_kept, 4 * 6 + 3 * 2);
  check = rms_of(sp.res->pos_err_after, sp.res->meas_set, sp.res->n_meas, TWF_SET_CHECK);
  ck_assert_msg(check <= 1.2 * sigma * sqrt(3.0), "check RMS %.4g mm", check * 1e3);
  free_scenario(&sp);
  free_scenario(&ss);
}
END_TEST

START_TEST(test_bad_calls)
{
  twf_model *m = test_arm_model(ARM_TF6S);
  twf_campaign *c = twf_campaign_alloc(5, 1, 1);
  twf_calib_result *res = (twf_calib_result *)1;
  twf_error err;
  ck_assert_int_eq(twf_calibrate(m, c, NULL, &res, NULL, &err), TWF_ERR_INVALID);
  ck_assert_ptr_null(res);
  twf_campaign_free(c);
  twf_model_free(m);
}
END_TEST

/* A gross-error scenario on tf6s: three rows off by 2 to 5 mm. */
static void gross_scenario(scenario *s, twf_calib_options *co)
{
  static const size_t near[3] = { 17, 101, 230 };
  static const double size[3] = { 2.3e-3, -3.7e-3, 24.9e-3 };
  twf_simulate_options so = twf_simulate_default_options();
  twf_error err;
  size_t k;
  memset(s, 0, sizeof *s);
  s->nominal = test_arm_model(ARM_TF6S);
  s->truth = twf_model_copy(s->nominal);
  twf_model_perturb(s->truth, &typical, 83);
  test_tracker_base(&s->base);
  so.n_poses = 120;
  so.sigma_m = 4e-5;
  so.seed = 84;
  so.check_fraction = 0.2;
  s->c = twf_simulate_campaign(s->truth, &s->base, &so, &err);
  ck_assert_ptr_nonnull(s->c);
  for (k = 0; k < 3; k++) {
    size_t i = near[k];
    while (s->c->meas[i].set != TWF_SET_FIT) /* a fit row: check rows are never screened */
      i++;
    s->c->meas[i].pos[k] += size[k];
  }
  ck_assert_int_eq(twf_calibrate(s->nominal, s->c, co, &s->res, NULL, &err), TWF_OK);
}

static int cmp_double(const void *a, const void *b)
{
  double x = *(const double *)a, y = *(const double *)b;
  return (x > y) - (x < y);
}

START_TEST(test_registration_matches_verify_sequence)
{
  /* the sequence verify runs (default options) gives the base pose and
   * target offsets of twf_calibrate's registration with default options */
  scenario s;
  twf_calib_options co = twf_calib_default_options();
  twf_model *m;
  twf_pose B;
  twf_registration_report rep;
  twf_error err;
  size_t k;
  int r, c;
  gross_scenario(&s, &co);
  m = twf_model_copy(s.nominal);
  ck_assert_int_eq(twf_register_and_refine(m, s.c, NULL, NULL, &B, &rep, NULL, NULL, &err), TWF_OK);
  ck_assert_uint_ge(rep.n_excluded, 1); /* the 25 mm error: the screen ran */
  for (r = 0; r < 3; r++) {
    ck_assert_close(B.p[r], s.res->base_before.p[r], 1e-12);
    for (c = 0; c < 3; c++)
      ck_assert_close(B.R[r][c], s.res->base_before.R[r][c], 1e-12);
  }
  for (k = 0; k < m->n_targets; k++)
    for (r = 0; r < 3; r++)
      ck_assert_close(m->targets[k].offset[r], s.res->registered->targets[k].offset[r], 1e-12);
  ck_assert_int_eq(rep.refinement.iterations, s.res->registration.iterations);
  twf_model_free(m);
  free_scenario(&s);
}
END_TEST

START_TEST(test_fit_screened_figures)
{
  /* the result's fit figures without the dropped rows, against a direct
   * computation from the residuals and the outlier list */
  scenario s;
  twf_calib_options co = twf_calib_default_options();
  double *len, sum = 0.0, ss = 0.0, mx = 0.0, h, p95;
  size_t i, k, n = 0, dropped = 0, n_fit = 0;
  co.sigma_length = 4e-5;
  gross_scenario(&s, &co);
  len = malloc(s.c->n_meas * sizeof *len);
  for (k = 0; k < s.res->n_outliers; k++)
    dropped += s.res->outliers[k].weight == 0.0;
  for (i = 0; i < s.c->n_meas; i++) {
    int out = 0;
    const double *e = s.res->pos_err_after + 3 * i;
    if (s.res->meas_set[i] != TWF_SET_FIT)
      continue;
    n_fit++;
    for (k = 0; k < s.res->n_outliers; k++)
      out |= s.res->outliers[k].meas == i && s.res->outliers[k].weight == 0.0;
    if (out)
      continue;
    len[n] = sqrt(e[0] * e[0] + e[1] * e[1] + e[2] * e[2]);
    sum += len[n];
    ss += len[n] * len[n];
    mx = fmax(mx, len[n]);
    n++;
  }
  qsort(len, n, sizeof *len, cmp_double);
  h = 0.95 * (double)(n - 1); /* Hyndman and Fan type 7 */
  p95 = len[(size_t)h] + (h - floor(h)) * (len[(size_t)h + 1] - len[(size_t)h]);
  ck_assert_uint_ge(dropped, 3);
  ck_assert_uint_eq(s.res->n_dropped, dropped);
  ck_assert_uint_eq(s.res->fit_screened.count, n);
  /* the main figures are over the rows the fit kept; the dropped ones
   * are figures of their own */
  ck_assert_uint_eq(s.res->accuracy_after->position[TWF_SET_FIT].count, n);
  ck_assert_uint_eq(s.res->accuracy_before->position[TWF_SET_FIT].count, n);
  ck_assert_uint_eq(s.res->excluded_after[TWF_SET_FIT].count, dropped);
  ck_assert_uint_eq(s.res->excluded_before[TWF_SET_FIT].count, dropped);
  ck_assert_uint_eq(n_fit, s.res->n_fit_meas);
  ck_assert_double_eq(s.res->accuracy_after->position[TWF_SET_FIT].rms, s.res->fit_screened.rms);
  ck_assert_close(s.res->fit_screened.mean, sum / (double)n, 1e-12);
  ck_assert_close(s.res->fit_screened.rms, sqrt(ss / (double)n), 1e-12);
  ck_assert_close(s.res->fit_screened.max, mx, 1e-15);
  ck_assert_close(s.res->fit_screened.p95, p95, 1e-12);
  /* the dropped rows are what makes the difference */
  ck_assert(s.res->fit_screened.max < s.res->excluded_after[TWF_SET_FIT].max);
  for (i = 0; i < s.c->n_meas; i++) {
    int out = 0;
    for (k = 0; k < s.res->n_outliers; k++)
      out |= s.res->outliers[k].meas == i && s.res->outliers[k].weight == 0.0;
    ck_assert_int_eq(s.res->excluded[i] == TWF_EXCLUDED_DROPPED, out);
  }
  free(len);
  free_scenario(&s);
}
END_TEST

START_TEST(test_check_gross_error_flagged)
{
  /* a 3 mm gross error in a check row: flagged against the fit's robust
   * scale, left out of the check figures (which then describe the arm),
   * kept in the every-row figures, and the verdict says it used the
   * screened check set */
  scenario s;
  twf_calib_options co = twf_calib_default_options();
  twf_warnings w;
  twf_error err;
  size_t i, bad = SIZE_MAX, n_check = 0;
  double ss = 0.0;
  co.sigma_length = 4e-5;
  gross_scenario(&s, &co);
  for (i = 0; i < s.c->n_meas && bad == SIZE_MAX; i++)
    if (s.res->meas_set[i] == TWF_SET_CHECK)
      bad = i;
  twf_calib_result_free(s.res);
  s.res = NULL;
  s.c->meas[bad].pos[1] += 3e-3;
  twf_warnings_init(&w);
  ck_assert_int_eq(twf_calibrate(s.nominal, s.c, &co, &s.res, &w, &err), TWF_OK);
  ck_assert_uint_eq(s.res->n_check_flagged, 1);
  ck_assert_uint_eq(s.res->check_flagged[0].meas, bad);
  ck_assert(s.res->check_flagged[0].score > co.robust_threshold);
  ck_assert_int_eq(s.res->excluded[bad], TWF_EXCLUDED_FLAGGED);
  for (i = 0; i < s.c->n_meas; i++)
    if (s.res->meas_set[i] == TWF_SET_CHECK && i != bad) {
      const double *e = s.res->pos_err_after + 3 * i;
      ss += e[0] * e[0] + e[1] * e[1] + e[2] * e[2];
      n_check++;
    }
  ck_assert_uint_eq(s.res->accuracy_after->position[TWF_SET_CHECK].count, n_check);
  ck_assert_close(s.res->accuracy_after->position[TWF_SET_CHECK].rms, sqrt(ss / (double)n_check), 1e-12);
  ck_assert_uint_eq(s.res->check_all_after.count, n_check + 1);
  ck_assert(s.res->check_all_after.rms > 3 * s.res->accuracy_after->position[TWF_SET_CHECK].rms);
  ck_assert_uint_eq(s.res->excluded_after[TWF_SET_CHECK].count, 1);
  ck_assert_int_eq(s.res->verdict_basis, TWF_BASIS_CHECK_SCREENED);
  ck_assert_int_eq(s.res->verdict, TWF_VERDICT_IMPROVED);
  ck_assert_double_eq(s.res->verdict_after.rms, s.res->accuracy_after->position[TWF_SET_CHECK].rms);
  {
    int named = 0;
    for (i = 0; i < w.count; i++)
      named |= strstr(w.items[i].message, "check-set measurement") != NULL;
    ck_assert(named);
  }
  /* with the screen off nothing is flagged */
  twf_calib_result_free(s.res);
  s.res = NULL;
  co.robust = TWF_ROBUST_OFF;
  ck_assert_int_eq(twf_calibrate(s.nominal, s.c, &co, &s.res, NULL, &err), TWF_OK);
  ck_assert_uint_eq(s.res->n_check_flagged, 0);
  ck_assert_int_eq(s.res->verdict_basis, TWF_BASIS_CHECK);
  twf_warnings_clear(&w);
  free_scenario(&s);
}
END_TEST

/* The documented verdict rule, on the figures the result carries. */
static twf_calib_verdict verdict_rule(const twf_calib_result *r)
{
  if (!(r->verdict_after.rms <= (1.0 + TWF_VERDICT_WORSE_MARGIN) * r->verdict_before.rms))
    return TWF_VERDICT_DO_NOT_USE;
  return r->verdict_after.rms > TWF_VERDICT_IMPROVED_RATIO * r->verdict_before.rms ? TWF_VERDICT_NOT_IMPROVED
                                                                                  : TWF_VERDICT_IMPROVED;
}

START_TEST(test_verdict)
{
  /* a full calibration of a perturbed arm improves the check set; fitting
   * the base alone (what the registration did already) does not; the
   * verdict follows the rule on the check figures of the same rows */
  scenario s;
  twf_calib_options co = twf_calib_default_options();
  twf_error err;
  co.sigma_length = 4e-5;
  gross_scenario(&s, &co);
  ck_assert_int_eq(s.res->verdict, TWF_VERDICT_IMPROVED);
  ck_assert_int_eq(s.res->verdict, verdict_rule(s.res));
  ck_assert_int_eq(s.res->verdict_basis, TWF_BASIS_CHECK);
  ck_assert_double_eq(s.res->verdict_before.rms, s.res->accuracy_before->position[TWF_SET_CHECK].rms);
  ck_assert_str_eq(twf_calib_verdict_name(TWF_VERDICT_DO_NOT_USE), "do not use");
  twf_calib_result_free(s.res);
  s.res = NULL;
  co.groups = TWF_GROUP_BIT(TWF_GROUP_BASE);
  ck_assert_int_eq(twf_calibrate(s.nominal, s.c, &co, &s.res, NULL, &err), TWF_OK);
  ck_assert_int_ne(s.res->verdict, TWF_VERDICT_IMPROVED);
  ck_assert_int_eq(s.res->verdict, verdict_rule(s.res));
  free_scenario(&s);
}
END_TEST

START_TEST(test_record_history)
{
  /* a model's as-built record moves under record1., then record2., in
   * place; a model without a record is left alone */
  twf_model *m = test_arm_model(ARM_TF6S);
  twf_error err;
  long n = -1;
  ck_assert_int_eq(twf_asbuilt_record_push(m, &n, &err), TWF_OK);
  ck_assert_int_eq(n, 0);
  ck_assert_uint_eq(m->n_meta, 0);
  twf_model_meta_set(m, "created", "2026-01-01");
  twf_model_meta_set(m, "rms_after_fit", "0.03 mm");
  ck_assert_int_eq(twf_asbuilt_record_push(m, &n, &err), TWF_OK);
  ck_assert_int_eq(n, 1);
  ck_assert_str_eq(twf_model_meta_get(m, "record1.created"), "2026-01-01");
  ck_assert_ptr_null(twf_model_meta_get(m, "created"));
  twf_model_meta_set(m, "created", "2026-02-01");
  ck_assert_int_eq(twf_asbuilt_record_push(m, &n, &err), TWF_OK);
  ck_assert_int_eq(n, 2);
  ck_assert_str_eq(twf_model_meta_get(m, "record1.created"), "2026-01-01");
  ck_assert_str_eq(twf_model_meta_get(m, "record2.created"), "2026-02-01");
  ck_assert_str_eq(m->meta[0].key, "record1.created");
  ck_assert_uint_eq(m->n_meta, 3);
  twf_model_free(m);
}
END_TEST

START_TEST(test_check_limits)
{
  /* joint 2 put outside its limits: counted, and one warning in the
   * model's units naming where */
  twf_model *m = test_arm_model(ARM_TF6S);
  double q[6] = { 0, 0, 0, 0, 0, 0 };
  twf_warnings w;
  twf_warnings_init(&w);
  m->joints[1].has_limits = 1;
  m->joints[1].limit_lo = -0.5;
  m->joints[1].limit_hi = 0.5;
  ck_assert_uint_eq(twf_model_check_limits(m, q, "the home pose", &w), 0);
  q[1] = 0.5; /* inclusive */
  ck_assert_uint_eq(twf_model_check_limits(m, q, "the home pose", &w), 0);
  q[1] = 0.6;
  ck_assert_uint_eq(twf_model_check_limits(m, q, "pose p1", &w), 1);
  ck_assert_uint_eq(w.count, 1);
  ck_assert_msg(strstr(w.items[0].message, "pose p1: joint") != NULL &&
                    strstr(w.items[0].message, "is outside its limits") != NULL,
                "%s", w.items[0].message);
  ck_assert_uint_eq(twf_model_check_limits(m, q, NULL, NULL), 1);
  ck_assert_uint_eq(twf_model_check_limits(NULL, q, NULL, NULL), 0);
  twf_warnings_clear(&w);
  twf_model_free(m);
}
END_TEST

START_TEST(test_trace)
{
  /* every stage timed once, in order, and the steps of the last fit add
   * up to the solver report */
  static const char *const names[] = { "sets and joint ranges", "registration", "registration refinement",
                                       "problem set-up", "structural redundancy",
                                       "redundancy on the fit poses", "degrees of freedom", "fit",
                                       "robust screen", "covariance", "identifiability",
                                       "as-built summary", "link parameters", "residual pattern",
                                       "compliance summary", "plausibility" };
  scenario s;
  twf_calib_options co = twf_calib_default_options();
  const twf_trace *t;
  size_t k, last = 0;
  int last_round = -1;
  co.sigma_length = 4e-5;
  gross_scenario(&s, &co);
  t = &s.res->trace;
  ck_assert_uint_eq(t->n_stages, sizeof names / sizeof names[0]);
  for (k = 0; k < t->n_stages; k++) {
    ck_assert_str_eq(t->stages[k].name, names[k]);
    ck_assert_msg(t->stages[k].seconds >= 0.0 && isfinite(t->stages[k].seconds), "stage %s: %g s",
                  t->stages[k].name, t->stages[k].seconds);
  }
  ck_assert_uint_gt(t->n_steps, 0);
  for (k = 0; k < t->n_steps; k++) {
    const twf_solver_step *st = &t->steps[k];
    ck_assert(st->damping > 0.0);
    ck_assert(!st->accepted || isfinite(st->cost));
    if (strcmp(st->fit, "calibration") == 0) {
      ck_assert_int_ge(st->round, last_round);
      if (st->round != last_round)
        last = 0;
      last_round = st->round;
      last++;
      ck_assert_int_eq(st->iteration, (int)last);
    }
  }
  ck_assert_int_eq(last_round, s.res->robust_rounds);
  ck_assert_int_eq((int)last, s.res->solve.iterations);
  free_scenario(&s);
}
END_TEST

START_TEST(test_hints_without_options)
{
  /* the library's advice names option fields, never a command-line option,
   * and is recognised by twf_advice_of */
  twf_model *m = test_arm_model(ARM_TF6S);
  twf_simulate_options so = twf_simulate_default_options();
  twf_calib_options co = twf_calib_default_options();
  twf_calib_result *res = NULL;
  twf_campaign *c;
  twf_error err;
  twf_pose B;
  int a;
  static const unsigned char one_target[3] = { 1, 0, 0 };
  size_t n;
  int found;
  test_tracker_base(&B);
  /* the fewest poses that pass the redundancy walk but not the
   * degrees-of-freedom check: with the noise unknown (10 coordinates
   * beyond the parameters), then given (3) */
  for (found = 0; found < 2; found++) {
    int hit = 0;
    co.sigma_length = found == 0 ? 0.0 : 3e-5;
    for (n = 3; n <= 20 && !hit; n++) {
      so.n_poses = n;
      so.seed = 91;
      so.targets = found == 0 ? NULL : one_target;
      c = twf_simulate_campaign(m, &B, &so, &err);
      ck_assert_ptr_nonnull(c);
      if (twf_calibrate(m, c, &co, &res, NULL, &err) == TWF_ERR_DEGENERATE &&
          strstr(err.message, "coordinates for") != NULL) {
        ck_assert_int_eq(twf_advice_of(&err), found == 0 ? TWF_ADVICE_MORE_POSES_OR_SIGMA : TWF_ADVICE_MORE_POSES);
        hit = 1;
      }
      twf_calib_result_free(res);
      res = NULL;
      twf_campaign_free(c);
    }
    ck_assert_msg(hit, "no pose count below 21 fails the check (sigma %s)", found ? "given" : "unknown");
  }
  for (a = TWF_ADVICE_FIX_MORE; a <= TWF_ADVICE_ACCEPT_LARGE; a++) {
    ck_assert_msg(strstr(twf_advice_text((twf_advice)a), "--") == NULL, "%s", twf_advice_text((twf_advice)a));
    ck_assert(strlen(twf_advice_text((twf_advice)a)) > 0);
    twf_error_set(&err, TWF_ERR_SINGULAR, NULL, 0, 0, twf_advice_text((twf_advice)a), "x");
    ck_assert_int_eq(twf_advice_of(&err), a);
  }
  twf_error_set(&err, TWF_ERR_SINGULAR, NULL, 0, 0, "some other hint", "x");
  ck_assert_int_eq(twf_advice_of(&err), TWF_ADVICE_NONE);
  twf_model_free(m);
}
END_TEST

int main(void)
{
  Suite *s = suite_create("calib");
  TCase *counts = tcase_create("counts"), *fit = tcase_create("fit");
  tcase_set_timeout(counts, 300);
  tcase_set_timeout(fit, 300);
  tcase_add_test(counts, test_count_tf6s);
  tcase_add_test(counts, test_count_tf6s_three_targets);
  tcase_add_test(counts, test_count_tf6s_full_pose);
  tcase_add_test(counts, test_count_tf7);
  tcase_add_test(counts, test_count_tf7_full_pose);
  tcase_add_test(counts, test_count_tf4p);
  tcase_add_test(counts, test_count_tf4p_full_pose);
  tcase_add_test(counts, test_count_tf6p_parallel);
  tcase_add_test(fit, test_recovery_noise_free);
  tcase_add_test(fit, test_recovery_with_noise);
  tcase_add_test(fit, test_stationary_solution);
  tcase_add_test(fit, test_offsets_only_remaster);
  tcase_add_test(fit, test_joint_never_moves);
  tcase_add_test(fit, test_narrow_joint_warning);
  tcase_add_test(fit, test_gross_outliers);
  tcase_add_test(fit, test_orientation_outliers);
  tcase_add_test(fit, test_asbuilt_independent_of_order);
  tcase_add_test(fit, test_parallel_axes_well_conditioned);
  tcase_add_test(fit, test_bad_calls);
  tcase_add_test(fit, test_registration_matches_verify_sequence);
  tcase_add_test(fit, test_fit_screened_figures);
  tcase_add_test(fit, test_check_gross_error_flagged);
  tcase_add_test(fit, test_verdict);
  tcase_add_test(fit, test_record_history);
  tcase_add_test(fit, test_check_limits);
  tcase_add_test(fit, test_trace);
  tcase_add_test(fit, test_hints_without_options);
  suite_add_tcase(s, counts);
  suite_add_tcase(s, fit);
  return twf_test_run(s);
}
