/* example-calibrate.c: calibrate a model on a campaign through the
 * installed library, and print the conclusion with its figures.
 *
 *   cc example-calibrate.c $(pkg-config --cflags --libs twistfit gsl) -o example-calibrate
 *   ./example-calibrate samples/tf6s.ini samples/demo-campaign.csv
 *
 * Exit status: 0 when the calibration improved the check-set accuracy, 1
 * when it did not, 2 on an error. The library never prints: what it found
 * is data in twf_calib_result, and this program decides what to show. */
#include <gsl/gsl_errno.h>
#include <stdio.h>
#include <twistfit.h>

int main(int argc, char **argv)
{
  twf_warnings warnings;
  twf_error err;
  twf_model *model = NULL;
  twf_campaign *campaign = NULL;
  twf_calib_result *res = NULL;
  twf_calib_options opt = twf_calib_default_options();
  twf_campaign_options copt = twf_campaign_default_options();
  int status = 2;
  size_t i;

  if (argc != 3) {
    fprintf(stderr, "usage: %s MODEL DATA.csv\n", argv[0]);
    return 2;
  }
  /* GSL's default handler aborts; the library checks every return code */
  gsl_set_error_handler_off();
  twf_warnings_init(&warnings);
  twf_error_clear(&err);
  if ((model = twf_model_read(argv[1], &warnings, &err)) == NULL ||
      (campaign = twf_campaign_read(argv[2], model, &copt, &warnings, &err)) == NULL ||
      twf_calibrate(model, campaign, &opt, &res, &warnings, &err) != TWF_OK) {
    fprintf(stderr, "error: %s:%ld: %s\nhint: %s\n", err.file[0] ? err.file : "-", err.line, err.message,
            err.hint);
    goto done;
  }
  printf("twistfit %s: %zu parameters estimated, %zu weak, %zu not determined\n", twf_version(), res->n_kept,
         res->n_weak, res->n_fixed_data);
  printf("%s RMS before %.4f mm, after %.4f mm (%zu measurements); %zu dropped, %zu flagged\n",
         twf_verdict_basis_name(res->verdict_basis), res->verdict_before.rms * 1e3, res->verdict_after.rms * 1e3,
         res->verdict_after.count, res->n_dropped, res->n_check_flagged);
  printf("conclusion: %s\n", twf_calib_verdict_name(res->verdict));
  for (i = 0; i < warnings.count; i++)
    printf("warning: %s\n", warnings.items[i].message);
  printf("A changed kinematic model moves the real arm differently: keep the previous\n"
         "parameters, verify new ones at reduced speed with the cell's safety functions\n"
         "active, validate them on held-out poses before production use, re-check the\n"
         "safety settings that depend on the kinematics, and follow the robot maker's\n"
         "procedures, local codes and qualified personnel.\n");
  status = res->verdict == TWF_VERDICT_IMPROVED ? 0 : 1;
done:
  twf_calib_result_free(res);
  twf_campaign_free(campaign);
  twf_model_free(model);
  twf_warnings_clear(&warnings);
  return status;
}
