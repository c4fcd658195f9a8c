/* check_station.c: campaigns measured from several instrument stations.
 * A two-station simulated campaign calibrates to the same arm as the
 * one-station campaign of the same poses and noise, with 6 more
 * identified parameters; each station's registration finds its own true
 * base pose; the station column and the base pose file of several
 * stations round-trip; bad station names and a station of one pose are
 * refused with the station named. The known answers are the simulated
 * truth (the arm and the base poses the campaign was made with); the
 * bounds are our own (common practice, no source), stated beside each
 * check. */
#include "testutil.h"
#include "arms.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static const twf_perturbation typical = { 1e-3, 0.5e-3, 2e-3, 1e-3, 0.0 };
static const char station_names[2][TWF_NAME_MAX] = { "east", "west" };

/* The second station: the instrument moved 2.385 m and turned 61 deg
 * about a skew axis, so its frame shares nothing with the first. */
static void second_station(const twf_pose *B, twf_pose *B2)
{
  double xi[6] = { 0.31, -0.52, 0.83, 2.385, -0.74, 0.19 }, n;
  twf_pose X;
  int a;
  n = sqrt(xi[0] * xi[0] + xi[1] * xi[1] + xi[2] * xi[2]);
  for (a = 0; a < 3; a++)
    xi[a] *= (61.0 * 3.14159265358979323846 / 180.0) / n;
  twf_se3_exp(xi, 1.0, &X);
  twf_pose_mul(&X, B, B2);
}

typedef struct pair {
  twf_model *nominal, *truth;
  twf_pose base[2];
  twf_campaign *one, *two;
} pair;

/* The same seeded poses and noise seen from one station and from two
 * (poses in turn). */
static void make_pair(pair *s, test_arm arm, size_t n_poses, double sigma, unsigned long long seed)
{
  twf_simulate_options so = twf_simulate_default_options();
  twf_error err;
  memset(s, 0, sizeof *s);
  s->nominal = test_arm_model(arm);
  s->truth = twf_model_copy(s->nominal);
  twf_model_perturb(s->truth, &typical, twf_test_seed(seed));
  test_tracker_base(&s->base[0]);
  second_station(&s->base[0], &s->base[1]);
  so.n_poses = n_poses;
  so.sigma_m = sigma;
  so.seed = twf_test_seed(seed + 100);
  so.check_fraction = 0.2;
  s->one = twf_simulate_campaign(s->truth, &s->base[0], &so, &err);
  ck_assert_ptr_nonnull(s->one);
  so.n_stations = 2;
  so.station_base = s->base;
  so.station_names = station_names;
  s->two = twf_simulate_campaign(s->truth, NULL, &so, &err);
  ck_assert_ptr_nonnull(s->two);
}

static void pair_free(pair *s)
{
  twf_campaign_free(s->one);
  twf_campaign_free(s->two);
  twf_model_free(s->nominal);
  twf_model_free(s->truth);
}

/* RMS distance, over random configurations, between the target points of
 * two models each seen from its base pose in the same instrument frame
 * (station 0's), m: what the two calibrations predict, independent of the
 * datum each chose. */
static double models_rms(const twf_model *a, const twf_pose *Ba, const twf_model *b, const twf_pose *Bb,
                         size_t n, unsigned long long seed)
{
  double *q = calloc(a->n_joints, sizeof *q), sum = 0.0;
  size_t i, k, count = 0;
  unsigned long long s = twf_test_seed(seed);
  for (i = 0; i < n; i++) {
    twf_pose F, T, Fb, Tb;
    twf_simulate_joints(a, 0.05, &s, q);
    twf_model_fk(a, q, NULL, &F);
    twf_pose_mul(Ba, &F, &T);
    twf_model_fk(b, q, NULL, &Fb);
    twf_pose_mul(Bb, &Fb, &Tb);
    for (k = 0; k < a->n_targets; k++) {
      double y[3], yb[3];
      int c;
      twf_pose_apply(&T, a->targets[k].offset, y);
      twf_pose_apply(&Tb, b->targets[k].offset, yb);
      for (c = 0; c < 3; c++)
        sum += (y[c] - yb[c]) * (y[c] - yb[c]);
      count++;
    }
  }
  free(q);
  return sqrt(sum / (double)count);
}

/* The two-station calibration equals the one-station one: same kept
 * count plus 6 (one more base pose), the same arm (predictions and link
 * table), and each station's base pose found. */
static void check_same_arm(test_arm arm, size_t n_poses)
{
  const double sigma = 2e-5;
  twf_calib_options co = twf_calib_default_options();
  twf_calib_result *r1 = NULL, *r2 = NULL;
  twf_error err;
  pair s;
  size_t k, r, n_base = 0;
  double d12, d1t, d2t;
  make_pair(&s, arm, n_poses, sigma, 41);
  co.sigma_length = sigma;
  ck_assert_int_eq(twf_calibrate(s.nominal, s.one, &co, &r1, NULL, &err), TWF_OK);
  ck_assert_msg(twf_calibrate(s.nominal, s.two, &co, &r2, NULL, &err) == TWF_OK, "%s", err.message);
  ck_assert_uint_eq(r2->n_stations, 2);
  ck_assert_uint_eq(r2->n_params, r1->n_params + 6);
  ck_assert_msg(r2->structural_count == r1->structural_count + 6 && r2->n_kept == r1->n_kept + 6,
                "%s: one station %zu structural / %zu kept, two stations %zu / %zu", s.nominal->name,
                r1->structural_count, r1->n_kept, r2->structural_count, r2->n_kept);
  for (k = 0; k < r2->n_params; k++)
    if (r2->params[k].param.group == TWF_GROUP_BASE) {
      const twf_param *p = &r2->params[k].param;
      char want[TWF_NAME_MAX + 16];
      snprintf(want, sizeof want, "base.%s.%s", station_names[p->station], strrchr(p->name, '.') + 1);
      ck_assert_str_eq(p->name, want);
      n_base++;
    }
  ck_assert_uint_eq(n_base, 12);
  /* The same arm: the predictions of the two as-built models from station
   * 0's frame agree well within the noise-based standard uncertainty of
   * the two-station model's prediction (twf_calib_predict, first order
   * from the covariance of the kept parameters, RMS over the workspace).
   * The two estimates share the data, so their difference has about the
   * standard uncertainty sqrt(u2^2 - u1^2) of nested least-squares
   * estimates (here some 0.4 u2). Our bounds: below 0.75 u2 and below 2.5
   * sqrt(u2^2 - u1^2); each model as close to the truth as its own
   * uncertainty says (below twice it). */
  d12 = models_rms(r1->asbuilt, &r1->base_in_tracker, r2->asbuilt, &r2->station_base[0], 500, 7);
  d1t = models_rms(r1->asbuilt, &r1->base_in_tracker, s.truth, &s.base[0], 500, 7);
  d2t = models_rms(r2->asbuilt, &r2->station_base[0], s.truth, &s.base[0], 500, 7);
  {
    twf_calib_prediction *pr1 = NULL, *pr2 = NULL;
    double u1, u2;
    ck_assert_int_eq(twf_calib_predict(r1, s.one, &co, NULL, &pr1, &err), TWF_OK);
    ck_assert_msg(twf_calib_predict(r2, s.two, &co, NULL, &pr2, &err) == TWF_OK, "%s", err.message);
    u1 = pr1->workspace->position_stats.rms;
    u2 = pr2->workspace->position_stats.rms;
    /* one more base pose from the same poses: the prediction is no surer */
    ck_assert_msg(u2 >= u1 * (1 - 1e-9), "predicted %.4g m with two stations, %.4g m with one", u2, u1);
    ck_assert_msg(d12 < 0.75 * u2 && d12 < 2.5 * sqrt(u2 * u2 - u1 * u1) && d1t < 2 * u1 && d2t < 2 * u2,
                  "%s: one vs two stations %.3g m, against the truth %.3g and %.3g m (predicted %.3g "
                  "and %.3g m)", s.nominal->name, d12, d1t, d2t, u1, u2);
    /* at the check poses, each taken at its own station: the predicted RMS
     * of the measured check errors (model uncertainty and noise) against
     * the measured one, within the 30 % the simulation test of predicted
     * accuracy allows */
    {
      double pc = pr2->check_rms_with_noise, mc = r2->accuracy_after->position[TWF_SET_CHECK].rms;
      ck_assert_msg(fabs(pc - mc) < 0.3 * mc, "check set: predicted %.4g m, measured %.4g m", pc, mc);
    }
    twf_calib_prediction_free(pr1);
    twf_calib_prediction_free(pr2);
  }
  /* the link table: every determined value within three of the
   * two-station result's standard deviations of it (a three-sigma bound,
   * common practice, no source) */
  ck_assert_uint_eq(r1->links.n_rows, r2->links.n_rows);
  for (r = 0; r < r1->links.n_rows; r++) {
    int v;
    for (v = 0; v < TWF_LINK_NVALUES; v++) {
      double a = r1->links.rows[r].value[v], b = r2->links.rows[r].value[v];
      double sd = r2->links.rows[r].std[v];
      if (!isfinite(a) || !isfinite(sd) || !(sd > 0) || r1->links.rows[r].why[v] != TWF_LINK_DETERMINED)
        continue;
      ck_assert_msg(fabs(atan2(sin(a - b), cos(a - b))) < 3 * sd || fabs(a - b) < 3 * sd,
                    "%s link row %zu value %d: %.10g against %.10g (std %.3g)", s.nominal->name, r, v, a,
                    b, sd);
    }
  }
  /* each station's fitted base pose against its truth (the as-built model
   * is in its datum frame: compare the frames through the truth's fk at
   * a configuration, which the prediction check already bounds, and the
   * second station against the first, which no datum changes) */
  {
    twf_pose inv, rel_fit, rel_true;
    double xi[6];
    twf_pose_inv(&r2->station_base[0], &inv);
    twf_pose_mul(&r2->station_base[1], &inv, &rel_fit);
    twf_pose_inv(&s.base[0], &inv);
    twf_pose_mul(&s.base[1], &inv, &rel_true);
    twf_pose_inv(&rel_true, &inv);
    twf_pose_mul(&rel_fit, &inv, &rel_true);
    twf_se3_log(&rel_true, xi);
    ck_assert_msg(sqrt(xi[0] * xi[0] + xi[1] * xi[1] + xi[2] * xi[2]) < 1e-4 &&
                      sqrt(xi[3] * xi[3] + xi[4] * xi[4] + xi[5] * xi[5]) < 1e-4,
                  "station west relative to east off by %.3g rad, %.3g m",
                  sqrt(xi[0] * xi[0] + xi[1] * xi[1] + xi[2] * xi[2]),
                  sqrt(xi[3] * xi[3] + xi[4] * xi[4] + xi[5] * xi[5]));
  }
  twf_calib_result_free(r1);
  twf_calib_result_free(r2);
  pair_free(&s);
}

START_TEST(test_two_stations_same_arm_tf6s) { check_same_arm(ARM_TF6S, 80); }
END_TEST
START_TEST(test_two_stations_same_arm_tf7) { check_same_arm(ARM_TF7, 90); }
END_TEST

/* Registration alone, on the true arm: each station's base pose is its
 * own true one to the noise (our bound: 10 sigma at a metre's lever). */
START_TEST(test_registration_per_station)
{
  const double sigma = 2e-5;
  twf_pose B[TWF_STATIONS_MAX];
  twf_error err;
  pair s;
  size_t k;
  make_pair(&s, ARM_TF6S, 40, sigma, 43);
  ck_assert_int_eq(twf_register_and_refine(s.truth, s.two, NULL, NULL, B, NULL, NULL, NULL, &err), TWF_OK);
  for (k = 0; k < 2; k++) {
    twf_pose inv, D;
    double xi[6];
    twf_pose_inv(&s.base[k], &inv);
    twf_pose_mul(&inv, &B[k], &D);
    twf_se3_log(&D, xi);
    ck_assert_msg(sqrt(xi[0] * xi[0] + xi[1] * xi[1] + xi[2] * xi[2]) < 10 * sigma &&
                      sqrt(xi[3] * xi[3] + xi[4] * xi[4] + xi[5] * xi[5]) < 10 * sigma,
                  "station %s: base off by %.3g rad, %.3g m", station_names[k],
                  sqrt(xi[0] * xi[0] + xi[1] * xi[1] + xi[2] * xi[2]),
                  sqrt(xi[3] * xi[3] + xi[4] * xi[4] + xi[5] * xi[5]));
  }
  pair_free(&s);
}
END_TEST

/* A station with one pose is refused, naming the station. */
START_TEST(test_station_of_one_pose)
{
  static const char names[2][TWF_NAME_MAX] = { "main", "lonely" };
  twf_calib_result *res = NULL;
  twf_pose B[TWF_STATIONS_MAX];
  twf_error err;
  pair s;
  size_t *ps, k;
  make_pair(&s, ARM_TF6S, 30, 2e-5, 44);
  ps = calloc(s.one->n_poses, sizeof *ps);
  for (k = 0; k < s.one->n_poses; k++)
    ps[k] = 0;
  /* the first fit pose is the one measured from the second station */
  for (k = 0; k < s.one->n_meas; k++)
    if (s.one->meas[k].set == TWF_SET_FIT) {
      ps[s.one->meas[k].pose] = 1;
      break;
    }
  ck_assert_int_eq(twf_campaign_set_stations(s.one, 2, names, ps, &err), TWF_OK);
  ck_assert_int_eq(twf_register_and_refine(s.nominal, s.one, NULL, NULL, B, NULL, NULL, NULL, &err),
                   TWF_ERR_DEGENERATE);
  ck_assert_msg(strstr(err.message, "station 'lonely' has 1 pose") != NULL, "%s", err.message);
  ck_assert_int_eq(twf_calibrate(s.nominal, s.one, NULL, &res, NULL, &err), TWF_ERR_DEGENERATE);
  ck_assert_ptr_null(res);
  ck_assert_msg(strstr(err.message, "lonely") != NULL, "%s", err.message);
  free(ps);
  pair_free(&s);
}
END_TEST

/* The base pose file of several stations reads back bit for bit; one
 * station keeps the [base] file byte for byte. */
START_TEST(test_base_file_round_trip)
{
  twf_pose B[2], got[TWF_STATIONS_MAX];
  char names[TWF_STATIONS_MAX][TWF_NAME_MAX], *a, *b;
  size_t n = 0, k;
  twf_error err;
  FILE *fp;
  twf_test_tmpdir_make("station");
  test_tracker_base(&B[0]);
  second_station(&B[0], &B[1]);
  fp = fopen(twf_test_tmppath("two.ini"), "w");
  ck_assert_int_eq(twf_base_write_stations(B, station_names, 2, TWF_LENGTH_MM, "test", fp, &err), TWF_OK);
  fclose(fp);
  ck_assert_int_eq(twf_base_read_stations(twf_test_tmppath("two.ini"), NULL, got, names, TWF_STATIONS_MAX,
                                          &n, NULL, &err), TWF_OK);
  ck_assert_uint_eq(n, 2);
  for (k = 0; k < 2; k++) {
    int r, c;
    ck_assert_str_eq(names[k], station_names[k]);
    for (r = 0; r < 3; r++) {
      ck_assert(twf_test_close(got[k].p[r], B[k].p[r], 1e-15));
      for (c = 0; c < 3; c++)
        ck_assert(fabs(got[k].R[r][c] - B[k].R[r][c]) < 1e-15);
    }
  }
  /* the one-pose reader refuses a file of stations */
  ck_assert_int_eq(twf_base_read_with(twf_test_tmppath("two.ini"), NULL, got, NULL, &err), TWF_ERR_UNKNOWN);
  /* one station: today's file */
  fp = fopen(twf_test_tmppath("one-a.ini"), "w");
  ck_assert_int_eq(twf_base_write(&B[0], TWF_LENGTH_MM, "c", fp, &err), TWF_OK);
  fclose(fp);
  fp = fopen(twf_test_tmppath("one-b.ini"), "w");
  ck_assert_int_eq(twf_base_write_stations(B, NULL, 1, TWF_LENGTH_MM, "c", fp, &err), TWF_OK);
  fclose(fp);
  a = twf_test_slurp(twf_test_tmppath("one-a.ini"));
  b = twf_test_slurp(twf_test_tmppath("one-b.ini"));
  ck_assert_str_eq(a, b);
  free(a);
  free(b);
  ck_assert_int_eq(twf_base_read_stations(twf_test_tmppath("one-a.ini"), NULL, got, names, TWF_STATIONS_MAX,
                                          &n, NULL, &err), TWF_OK);
  ck_assert_uint_eq(n, 1);
  ck_assert_str_eq(names[0], "");
  /* bad files: a repeated station, [base] beside stations, a bad name, a
   * missing key */
  {
    static const char *const bad[][2] = {
      { "[station a]\nlength_unit = mm\nposition = 0 0 0\nquaternion_wxyz = 1 0 0 0\n"
        "[station a]\nlength_unit = mm\nposition = 0 0 0\nquaternion_wxyz = 1 0 0 0\n", "duplicate" },
      { "[base]\nlength_unit = mm\nposition = 0 0 0\nquaternion_wxyz = 1 0 0 0\n"
        "[station a]\nlength_unit = mm\nposition = 0 0 0\nquaternion_wxyz = 1 0 0 0\n", "beside" },
      { "[station a b]\nlength_unit = mm\nposition = 0 0 0\nquaternion_wxyz = 1 0 0 0\n", "invalid station" },
      { "[station a]\nlength_unit = mm\nposition = 0 0 0\nquaternion_wxyz = 1 0 0 0\n"
        "[station b]\nlength_unit = mm\nposition = 0 0 0\n", "incomplete section of station b" },
    };
    for (k = 0; k < sizeof bad / sizeof bad[0]; k++) {
      twf_test_write_file(twf_test_tmppath("bad.ini"), bad[k][0]);
      ck_assert_int_ne(twf_base_read_stations(twf_test_tmppath("bad.ini"), NULL, got, names,
                                              TWF_STATIONS_MAX, &n, NULL, &err), TWF_OK);
      ck_assert_msg(strstr(err.message, bad[k][1]) != NULL, "case %zu: %s", k, err.message);
    }
  }
  twf_test_tmpdir_remove();
}
END_TEST

/* The station column: written, read back (names in order of first
 * appearance, each pose's station), and its refusals. */
START_TEST(test_station_column)
{
  twf_model *m = test_arm_model(ARM_TF6S);
  twf_campaign *c;
  twf_error err;
  pair s;
  size_t k;
  FILE *fp;
  twf_test_tmpdir_make("station");
  make_pair(&s, ARM_TF6S, 6, 0.0, 45);
  fp = fopen(twf_test_tmppath("two.csv"), "w");
  ck_assert_int_eq(twf_campaign_write(s.two, s.truth, TWF_LENGTH_MM, TWF_ANGLE_DEG, fp, &err), TWF_OK);
  fclose(fp);
  c = twf_campaign_read(twf_test_tmppath("two.csv"), m, NULL, NULL, &err);
  ck_assert_msg(c != NULL, "%s", err.message);
  ck_assert_uint_eq(c->n_stations, 2);
  ck_assert_str_eq(c->station_names[0], "east");
  ck_assert_str_eq(c->station_names[1], "west");
  for (k = 0; k < c->n_poses; k++)
    ck_assert_uint_eq(twf_campaign_pose_station(c, k), k % 2);
  twf_campaign_free(c);
  /* a campaign without the column has one station */
  fp = fopen(twf_test_tmppath("one.csv"), "w");
  ck_assert_int_eq(twf_campaign_write(s.one, s.truth, TWF_LENGTH_MM, TWF_ANGLE_DEG, fp, &err), TWF_OK);
  fclose(fp);
  c = twf_campaign_read(twf_test_tmppath("one.csv"), m, NULL, NULL, &err);
  ck_assert_ptr_nonnull(c);
  ck_assert_uint_eq(c->n_stations, 0);
  ck_assert_uint_eq(twf_campaign_station_count(c), 1);
  twf_campaign_free(c);
  {
    static const char *const bad[][3] = {
      { "pose,target,j1,j2,j3,j4,j5,j6,x,y,z,station\nP1,T1,0,0,0,0,0,0,1,2,3,east side\n",
        "not valid", "4" },
      { "pose,target,j1,j2,j3,j4,j5,j6,x,y,z,station\nP1,T1,0,0,0,0,0,0,1,2,3,\n", "empty", "3" },
      { "pose,target,j1,j2,j3,j4,j5,j6,x,y,z,station\nP1,T1,0,0,0,0,0,0,1,2,3,east\n"
        "P1,T2,0,0,0,0,0,0,1,2,3,west\n", "another station", "4" },
      { "pose,target,j1,j2,j3,j4,j5,j6,x,y,z,station\nP1,T1,0,0,0,0,0,0,1,2,3,-east\n",
        "not valid", "4" },
    };
    for (k = 0; k < sizeof bad / sizeof bad[0]; k++) {
      twf_test_write_file(twf_test_tmppath("bad.csv"), bad[k][0]);
      c = twf_campaign_read(twf_test_tmppath("bad.csv"), m, NULL, NULL, &err);
      ck_assert_ptr_null(c);
      ck_assert_msg(strstr(err.message, bad[k][1]) != NULL, "case %zu: %s", k, err.message);
      ck_assert_int_eq((int)err.status, atoi(bad[k][2]) == 4 ? TWF_ERR_VALUE : TWF_ERR_MISSING);
      ck_assert_int_eq(err.column, 12);
    }
  }
  /* the two-file form: the station in the joints file, a pose without
   * points left out with its station */
  twf_test_write_file(twf_test_tmppath("j.csv"), "pose,j1,j2,j3,j4,j5,j6,station\n"
                                                 "a,1,2,3,4,5,6,east\nb,1,2,3,4,5,7,west\n"
                                                 "c,1,2,3,4,5,8,south\n");
  twf_test_write_file(twf_test_tmppath("p.csv"), "pose,target,x,y,z\na,T1,1,2,3\nc,T1,1,2,3\n");
  c = twf_campaign_read_pair(twf_test_tmppath("j.csv"), twf_test_tmppath("p.csv"), m, NULL, NULL, &err);
  ck_assert_msg(c != NULL, "%s", err.message);
  ck_assert_uint_eq(c->n_poses, 2);
  ck_assert_uint_eq(c->n_stations, 3);
  ck_assert_str_eq(c->pose_ids[1], "c");
  ck_assert_str_eq(c->station_names[twf_campaign_pose_station(c, 1)], "south");
  twf_campaign_free(c);
  pair_free(&s);
  twf_model_free(m);
  twf_test_tmpdir_remove();
}
END_TEST

/* plan with two instrument positions on opposite sides: every chosen pose
 * is seen (range and acceptance cone, recomputed here from the forward
 * kinematics) by the station it is assigned to, and by no station listed
 * before it; poses come grouped by station; both stations get poses, and
 * a candidate neither sees is refused. */
START_TEST(test_plan_two_instruments)
{
  twf_model *m = test_arm_model(ARM_TF6S);
  twf_plan_options o = twf_plan_default_options();
  twf_plan_result *r = NULL;
  twf_error err;
  const double pos[6] = { 2.5, 0.3, 0.8, -2.5, -0.3, 0.8 };
  const double acc = 60.0 * 3.14159265358979323846 / 180.0;
  size_t i, k, count[2] = { 0, 0 };
  o.count = 24;
  o.n_candidates = 3000;
  o.excursions = 10;
  o.assess.workspace.n_configs = 200;
  o.n_instruments = 2;
  o.instruments = pos;
  o.range_min = 1.0;
  o.range_max = 3.4;
  o.acceptance_rad = acc;
  ck_assert_msg(twf_plan(m, &o, &r, NULL, &err) == TWF_OK, "%s", err.message);
  ck_assert_ptr_nonnull(r->station);
  for (i = 0; i < r->n; i++) {
    const double *q = r->q + i * 6;
    twf_pose F;
    size_t s, sta = r->station[i];
    ck_assert_uint_lt(sta, 2);
    if (i > 0)
      ck_assert_uint_ge(sta, r->station[i - 1]);
    count[sta]++;
    ck_assert_int_eq(twf_plan_pose_check(m, &o, q), 0);
    ck_assert_int_eq(twf_plan_pose_station(m, &o, q), (long)sta);
    twf_model_fk(m, q, NULL, &F);
    for (s = 0; s <= sta; s++) {
      int sees = 1;
      for (k = 0; k < m->n_targets; k++) {
        double y[3], d[3], dist, zf[3];
        int a;
        twf_pose_apply(&F, m->targets[k].offset, y);
        for (a = 0; a < 3; a++)
          d[a] = pos[3 * s + (size_t)a] - y[a];
        dist = sqrt(d[0] * d[0] + d[1] * d[1] + d[2] * d[2]);
        for (a = 0; a < 3; a++)
          zf[a] = F.R[a][2];
        if (dist < o.range_min || dist > o.range_max ||
            (zf[0] * d[0] + zf[1] * d[1] + zf[2] * d[2]) / dist < cos(acc) - 1e-12)
          sees = 0;
      }
      ck_assert_int_eq(sees, s == sta);
    }
  }
  ck_assert_msg(count[0] > 0 && count[1] > 0, "stations got %zu and %zu poses", count[0], count[1]);
  ck_assert(r->n_rejected[2] + r->n_rejected[3] > 0);
  twf_plan_result_free(r);
  twf_model_free(m);
}
END_TEST

/* The bootstrap of a two-station calibration: every refit keeps both
 * stations (the draw is stratified by station), so none is refused, and
 * each station's base parameters get a spread that agrees with the
 * predicted standard deviation within the factor 2 of the warning (our
 * bound, as the warning's). */
START_TEST(test_resample_two_stations)
{
  const double sigma = 2e-5;
  twf_calib_options co = twf_calib_default_options();
  twf_calib_result *r = NULL;
  twf_resample_result *rs = NULL;
  twf_error err;
  pair s;
  size_t k, n_base = 0;
  make_pair(&s, ARM_TF6S, 60, sigma, 46);
  co.sigma_length = sigma;
  co.threads = 2;
  ck_assert_int_eq(twf_calibrate(s.nominal, s.two, &co, &r, NULL, &err), TWF_OK);
  ck_assert_msg(twf_calibrate_resample(s.nominal, s.two, &co, r, 24, 5, &rs, NULL, &err) == TWF_OK, "%s",
                err.message);
  ck_assert_uint_eq(rs->n_ok, 24);
  for (k = 0; k < r->n_params; k++)
    if (r->params[k].param.group == TWF_GROUP_BASE && r->params[k].status == TWF_PARAM_KEPT) {
      ck_assert_msg(rs->params[k].ratio > 0.5 && rs->params[k].ratio < 2.0, "%s: ratio %.3g",
                    r->params[k].param.name, rs->params[k].ratio);
      n_base++;
    }
  ck_assert_uint_ge(n_base, 7);
  twf_resample_result_free(rs);
  twf_calib_result_free(r);
  pair_free(&s);
}
END_TEST

int main(void)
{
  Suite *s = suite_create("station");
  TCase *tc = tcase_create("station");
  tcase_set_timeout(tc, 120);
  tcase_add_test(tc, test_two_stations_same_arm_tf6s);
  tcase_add_test(tc, test_two_stations_same_arm_tf7);
  tcase_add_test(tc, test_registration_per_station);
  tcase_add_test(tc, test_station_of_one_pose);
  tcase_add_test(tc, test_base_file_round_trip);
  tcase_add_test(tc, test_station_column);
  tcase_add_test(tc, test_plan_two_instruments);
  tcase_add_test(tc, test_resample_two_stations);
  suite_add_tcase(s, tc);
  return twf_test_run(s);
}
