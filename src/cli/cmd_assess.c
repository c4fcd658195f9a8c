/* cmd_assess.c: `twistfit assess MODEL POSES.csv`: what a pose set would
 * determine before it is measured: identifiable, fixed and weak
 * parameters and why, observability indices, predicted standard
 * deviations, predicted accuracy over the workspace, joint ranges. */
#define _GNU_SOURCE
#include "config.h"
#include "plan_cli.h"

#include <getopt.h>
#include <stdlib.h>
#include <string.h>

static const char assess_help[] =
  "Usage: twistfit assess [OPTIONS] MODEL POSES.csv --sigma X\n"
  "\n"
  "Assess a pose set before measuring it. POSES.csv holds joint values only (a\n"
  "joints file: pose id and one column per joint of MODEL, twistfit-data(5)).\n"
  "For the targets measured and the instrument's noise, report which requested\n"
  "parameters would be identifiable, fixed (redundant, or not determined by\n"
  "these poses) or weak and why; the observability indices O1 (Borm and Menq),\n"
  "O2 (inverse condition number), O3 (minimum singular value) and O4 (noise\n"
  "amplification, Nahvi and Hollerbach); the predicted standard deviation of\n"
  "every estimated parameter; the predicted accuracy over the workspace (seeded\n"
  "random configurations within the limits); and the range each joint exercises\n"
  "against its limits. Warnings as calibrate gives them. Figures in MODEL's units.\n"
  "\n"
  "Options:\n"
  PCLI_MEASURE_HELP
  "      --length-unit U     length unit of POSES.csv (default: as declared, else mm)\n"
  "      --angle-unit U      angle unit of POSES.csv (default: as declared, else deg)\n"
  "  -f, --force             replace the JSON file when it exists\n"
  CLI_URDF_HELP
  "  -h, --help              show this help\n";

enum { OPT_LUNIT = PCLI_OPT_FIRST_FREE, OPT_AUNIT };

static int run_assess(int argc, char **argv)
{
  static const struct option longopts[] = {
    PCLI_MEASURE_LONGOPTS,
    { "length-unit", required_argument, NULL, OPT_LUNIT },
    { "angle-unit", required_argument, NULL, OPT_AUNIT },
    { "force", no_argument, NULL, 'f' },
    CLI_URDF_LONGOPTS,
    { "help", no_argument, NULL, 'h' },
    { NULL, 0, NULL, 0 }
  };
  static const char *const names[1] = { "--json" };
  pcli_measure me;
  twf_campaign_options copt = twf_campaign_default_options();
  const char *inputs[3] = { NULL, NULL, NULL };
  int force = 0, opt, status = TWF_EXIT_OK;
  twf_model *model = NULL;
  twf_campaign *poses = NULL;
  twf_assessment *a = NULL;
  twf_warnings warnings;
  twf_read_options ropt = twf_read_default_options();
  cli_urdf_links urdf_links = { { NULL }, 0 };
  twf_error err;
  json_t *root = NULL;
  cli_units u;

  pcli_measure_init(&me);
  twf_warnings_init(&warnings);
  twf_error_clear(&err);
  optind = 0;
  opterr = 0;
  while ((opt = getopt_long(argc, argv, ":fh", longopts, NULL)) != -1) {
    if (pcli_measure_option(&me, "assess", opt, optarg, &status)) {
      if (status != 0)
        goto done;
      continue;
    }
    switch (opt) {
    case OPT_LUNIT:
      if ((status = cli_parse_length_unit("assess", optarg, &copt.length_unit)) != 0)
        goto done;
      copt.length_from_caller = 1;
      break;
    case OPT_AUNIT:
      if ((status = cli_parse_angle_unit("assess", optarg, &copt.angle_unit)) != 0)
        goto done;
      copt.angle_from_caller = 1;
      break;
    case 'f': force = 1; break;
    case CLI_OPT_BASE_LINK:
    case CLI_OPT_TIP_LINK:
    case CLI_OPT_TARGET_LINK:
      if ((status = cli_urdf_longopt("assess", opt, optarg, &urdf_links, &ropt)) != 0)
        goto done;
      break;
    case 'h': fputs(assess_help, stdout); goto done;
    default: status = cli_bad_option("assess", opt, argv); goto done;
    }
  }
  if (argc - optind != 2) {
    status = cli_usage_error("assess", "expected MODEL and POSES.csv");
    goto done;
  }
  inputs[0] = argv[optind];
  inputs[1] = argv[optind + 1];
  if ((status = cli_outputs_check("assess", &me.json, names, 1, force, inputs)) != 0)
    goto done;
  model = twf_model_read_with(inputs[0], &ropt, &warnings, NULL, &err);
  if (model == NULL) {
    cli_print_warnings(&warnings);
    status = cli_report_error(&err);
    goto done;
  }
  if ((status = pcli_measure_resolve(&me, "assess", model)) != 0)
    goto done;
  poses = twf_campaign_read_joints(inputs[1], model, &copt, &warnings, &err);
  if (poses == NULL) {
    cli_print_warnings(&warnings);
    status = cli_report_error(&err);
    goto done;
  }
  if (twf_assess(model, poses->q, poses->n_poses, &me.opt, &a, &warnings, &err) != TWF_OK) {
    cli_print_warnings(&warnings);
    status = cli_report_error(&err);
    goto done;
  }
  cli_units_of(&u, model);
  {
    FILE *text = me.json != NULL && strcmp(me.json, "-") == 0 ? stderr : stdout;
    cli_put put;
    fprintf(text, "twistfit %s assess: %s, %zu joints; poses %s\n", twf_version(), model->name, model->n_joints,
            inputs[1]);
    pcli_print_assessment(text, a, model, &me.opt, &u);
    cli_print_warnings(&warnings);
    if (me.json != NULL) {
      root = pcli_json_assessment(a, model, &u);
      json_object_set_new(root, "length_unit", json_string(u.length));
      json_object_set_new(root, "angle_unit", json_string(u.angle));
      json_object_set_new(root, "sigma", cli_json_number(me.opt.calib.sigma_length / u.length_si));
      put = (cli_put){ me.json, cli_put_json, root };
      status = cli_write_outputs(&put, 1, force, inputs);
    }
  }

done:
  json_decref(root);
  twf_assessment_free(a);
  twf_campaign_free(poses);
  twf_model_free(model);
  pcli_measure_free(&me);
  twf_warnings_clear(&warnings);
  return status;
}

const cli_command cli_cmd_assess = {
  "assess",
  run_assess,
  "what a pose set would determine, before measuring it",
  assess_help,
};
