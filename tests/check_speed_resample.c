/* check_speed_resample.c: the bootstrap over poses. The same bits for 1
 * and 2 threads (memcmp of every figure), a refit count that adds up, and
 * spreads that agree with the covariance where the model is right (a
 * campaign simulated from the fitted kind of arm with Gaussian noise): no
 * parameter's spread more than a factor 2 from its predicted standard
 * deviation by more than a few of 56, and the check-set RMS spread finite. */
#include "testutil.h"
#include "arms.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

START_TEST(test_resample_same_bits_and_sane)
{
  const twf_perturbation mag = { 1e-3, 0.5e-3, 2e-3, 1e-3, 0.0 };
  twf_model *m = test_arm_model(ARM_TF7), *truth = twf_model_copy(m);
  twf_simulate_options so = twf_simulate_default_options();
  twf_calib_options o = twf_calib_default_options();
  twf_calib_result *base;
  twf_resample_result *r[2];
  twf_warnings ws, *w = &ws;
  twf_campaign *c;
  twf_error err;
  twf_pose B;
  size_t a, estimated = 0, disagree = 0;
  int t;
  twf_warnings_init(w);
  twf_model_perturb(truth, &mag, 3);
  test_tracker_base(&B);
  so.n_poses = 100;
  so.sigma_m = 2e-5;
  so.seed = 21;
  so.check_fraction = 0.2;
  c = twf_simulate_campaign(truth, &B, &so, &err);
  ck_assert(c != NULL && w != NULL);
  o.sigma_length = 2e-5;
  ck_assert_msg(twf_calibrate(m, c, &o, &base, NULL, &err) == TWF_OK, "%s", err.message);
  for (t = 0; t < 2; t++) {
    o.threads = t + 1;
    ck_assert_msg(twf_calibrate_resample(m, c, &o, base, 24, 77, &r[t], t ? NULL : w, &err) == TWF_OK, "%s",
                  err.message);
  }
  ck_assert(r[0]->n_refits == 24 && r[0]->n_ok == r[1]->n_ok && r[0]->n_ok >= 20);
  ck_assert(r[0]->n_params == base->n_params);
  ck_assert(memcmp(r[0]->params, r[1]->params, r[0]->n_params * sizeof *r[0]->params) == 0);
  ck_assert(memcmp(r[0]->check_mean, r[1]->check_mean, sizeof r[0]->check_mean) == 0);
  ck_assert(memcmp(r[0]->check_std, r[1]->check_std, sizeof r[0]->check_std) == 0);
  for (a = 0; a < base->n_params; a++) {
    if (base->params[a].status != TWF_PARAM_KEPT)
      continue;
    estimated++;
    ck_assert(r[0]->params[a].n >= 2 && isfinite(r[0]->params[a].std) && r[0]->params[a].std > 0);
    disagree += (size_t)r[0]->params[a].disagree;
  }
  ck_assert(estimated > 20);
  /* 24 refits estimate a std to about 15 %: a factor 2 is rare */
  ck_assert_msg(disagree <= estimated / 5, "%zu of %zu parameters disagree", disagree, estimated);
  ck_assert(w->count >= disagree);
  ck_assert(r[0]->n_check >= 20 && isfinite(r[0]->check_std[0]) && r[0]->check_std[0] > 0);
  ck_assert_close(r[0]->check_mean[0], base->accuracy_after->position[TWF_SET_CHECK].rms, 0.5);
  /* another seed, other draws */
  {
    twf_resample_result *r2;
    o.threads = 2;
    ck_assert(twf_calibrate_resample(m, c, &o, base, 24, 78, &r2, NULL, &err) == TWF_OK);
    ck_assert(memcmp(r[0]->params, r2->params, r[0]->n_params * sizeof *r2->params) != 0);
    twf_resample_result_free(r2);
  }
  for (t = 0; t < 2; t++)
    twf_resample_result_free(r[t]);
  twf_calib_result_free(base);
  twf_warnings_clear(w);
  twf_campaign_free(c);
  twf_model_free(truth);
  twf_model_free(m);
}
END_TEST

/* Gross errors in the campaign: the base run's screen drops them (within
 * its limit) and every refit screens in the same way, so the refits'
 * check figures spread by the noise, not by refits that kept repeated
 * gross errors (a drawn set repeats a pose's readings, and with them its
 * gross errors and residual pattern). */
START_TEST(test_resample_keeps_the_screen_verdict)
{
  const twf_perturbation mag = { 1e-3, 0.5e-3, 2e-3, 1e-3, 0.0 };
  twf_model *m = test_arm_model(ARM_TF6S), *truth = twf_model_copy(m);
  twf_simulate_options so = twf_simulate_default_options();
  twf_calib_options o = twf_calib_default_options();
  twf_calib_result *base;
  twf_resample_result *r;
  twf_campaign *c;
  twf_error err;
  twf_pose B;
  twf_model_perturb(truth, &mag, 5);
  test_tracker_base(&B);
  so.n_poses = 60;
  so.sigma_m = 2e-5;
  so.seed = 31;
  so.check_fraction = 0.2;
  so.outlier_fraction = 0.02;
  so.outlier_m = 2e-3;
  c = twf_simulate_campaign(truth, &B, &so, &err);
  ck_assert(c != NULL);
  o.sigma_length = 2e-5;
  o.threads = 2;
  ck_assert_msg(twf_calibrate(m, c, &o, &base, NULL, &err) == TWF_OK, "%s", err.message);
  ck_assert_uint_gt(base->n_dropped, 0);
  ck_assert_uint_eq(base->screen_refused, 0);
  ck_assert(twf_calibrate_resample(m, c, &o, base, 40, 7, &r, NULL, &err) == TWF_OK);
  ck_assert(r->n_ok >= 36 && r->n_check >= 36);
  /* the check RMS of the refits: the base's to within noise (common
   * practice, no source: a bootstrap spread of a fit on the noise floor
   * stays a fraction of the figure itself) */
  ck_assert_msg(r->check_std[0] < 0.5 * r->check_base[0] && r->check_mean[0] < 1.5 * r->check_base[0],
                "check RMS %g m: refits %g +- %g m", r->check_base[0], r->check_mean[0], r->check_std[0]);
  twf_resample_result_free(r);
  twf_calib_result_free(base);
  twf_campaign_free(c);
  twf_model_free(truth);
  twf_model_free(m);
}
END_TEST

int main(void)
{
  Suite *s = suite_create("speed-resample");
  TCase *tc = tcase_create("resample");
  tcase_set_timeout(tc, 120);
  tcase_add_test(tc, test_resample_same_bits_and_sane);
  tcase_add_test(tc, test_resample_keeps_the_screen_verdict);
  suite_add_tcase(s, tc);
  return twf_test_run(s);
}
