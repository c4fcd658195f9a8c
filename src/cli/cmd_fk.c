/* cmd_fk.c: `twistfit fk MODEL [JOINTS.csv]`: forward kinematics of a model
 * at the joint rows of a file: flange pose and target positions, CSV. */
#define _GNU_SOURCE
#include "config.h"
#include "cli.h"
#include "urdf_cli.h"

#include <getopt.h>
#include <stdlib.h>
#include <string.h>

static const char fk_help[] =
  "Usage: twistfit fk [OPTIONS] MODEL [JOINTS.csv]\n"
  "\n"
  "Forward kinematics: for each row of JOINTS.csv (a header naming the model's\n"
  "joints, optionally a 'pose' id column; see twistfit-data(5)) print the flange\n"
  "pose in the robot base frame and the position of every target with a known\n"
  "offset, as CSV. Without JOINTS.csv, the home configuration (all joints 0).\n"
  "Positions are in the model's length unit (or --output-length-unit), the\n"
  "orientation as a unit quaternion w x y z.\n"
  "\n"
  "Options:\n"
  "  -o, --output FILE          write the CSV to FILE (atomically) instead of stdout\n"
  "  -f, --force                replace FILE when it exists\n"
  "      --length-unit U        unit of prismatic joint values in JOINTS.csv\n"
  "                             (mm, m, um, in; default: as the file declares, else mm)\n"
  "      --angle-unit U         unit of revolute joint values (deg, rad, mrad;\n"
  "                             default: as the file declares, else deg)\n"
  "      --output-length-unit U unit of the printed positions (default: the model's)\n"
  "      --max-input-size N     refuse input files larger than N bytes (suffix\n"
  "                             K, M, G, T: binary multiples; default 2G)\n"
  "      --base-link LINK       a URDF MODEL's base link (default: the root)\n"
  "      --tip-link LINK        a URDF MODEL's flange link (default: the one tip)\n"
  "      --target-link LINK     a link fixed to the tip that is a target (repeat;\n"
  "                             default: every such link without children)\n"
  "      --payload NAME         the load carried at every row ([payload NAME] of\n"
  "                             the model; for a JOINTS.csv without a payload\n"
  "                             column): a model with compliances deflects under it\n"
  "  -h, --help                 show this help\n";

static void write_header(cli_csv *csv, const twf_model *m, const char *lu)
{
  char name[TWF_NAME_MAX + 32];
  static const char *axes[3] = { "x", "y", "z" };
  size_t k;
  int a;
  cli_csv_text(csv, "pose");
  for (a = 0; a < 3; a++) {
    snprintf(name, sizeof name, "flange_%s_%s", axes[a], lu);
    cli_csv_text(csv, name);
  }
  cli_csv_text(csv, "flange_qw");
  cli_csv_text(csv, "flange_qx");
  cli_csv_text(csv, "flange_qy");
  cli_csv_text(csv, "flange_qz");
  for (k = 0; k < m->n_targets; k++) {
    if (!m->targets[k].offset_known)
      continue;
    for (a = 0; a < 3; a++) {
      snprintf(name, sizeof name, "%s_%s_%s", m->targets[k].name, axes[a], lu);
      cli_csv_text(csv, name);
    }
  }
  cli_csv_end_row(csv);
}

static void write_row(cli_csv *csv, const twf_model *m, const char *id,
                      const double *q, long payload, double per_unit)
{
  twf_pose flange;
  double quat[4], y[3];
  size_t k;
  int a;
  twf_model_fk_load(m, q, payload, NULL, &flange);
  cli_quat_of(flange.R, quat);
  cli_csv_text(csv, id);
  /* positions below 1 pm are rounding left-overs (a DH chain's 1e-15 mm):
   * printed as 0 */
  for (a = 0; a < 3; a++)
    cli_csv_number(csv, cli_clean(flange.p[a], 1e-12) / per_unit);
  for (a = 0; a < 4; a++)
    cli_csv_number(csv, quat[a]);
  for (k = 0; k < m->n_targets; k++) {
    if (!m->targets[k].offset_known)
      continue;
    twf_pose_apply(&flange, m->targets[k].offset, y);
    for (a = 0; a < 3; a++)
      cli_csv_number(csv, cli_clean(y[a], 1e-12) / per_unit);
  }
  cli_csv_end_row(csv);
}

typedef struct fk_ctx {
  const twf_model *model;
  const twf_campaign *joints; /* NULL: the home configuration */
  long payload;               /* of the home configuration (--payload) */
  twf_length_unit out_unit;
} fk_ctx;

static int put_fk(FILE *fp, void *ctx, twf_error *err)
{
  const fk_ctx *f = ctx;
  cli_csv csv;
  size_t i;
  cli_csv_init(&csv, fp);
  write_header(&csv, f->model, twf_length_unit_name(f->out_unit));
  if (f->joints == NULL) {
    double *zero = calloc(f->model->n_joints ? f->model->n_joints : 1, sizeof *zero);
    if (zero == NULL) {
      twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
      return -1;
    }
    write_row(&csv, f->model, "home", zero, f->payload, twf_length_unit_si(f->out_unit));
    free(zero);
  } else {
    for (i = 0; i < f->joints->n_poses; i++)
      write_row(&csv, f->model, f->joints->pose_ids[i], f->joints->q + i * f->model->n_joints,
                twf_campaign_payload(f->joints, i), twf_length_unit_si(f->out_unit));
  }
  return 0;
}

static int run_fk(int argc, char **argv)
{
  static const struct option longopts[] = {
    { "output", required_argument, NULL, 'o' },
    { "force", no_argument, NULL, 'f' },
    { "length-unit", required_argument, NULL, 'L' },
    { "angle-unit", required_argument, NULL, 'A' },
    { "output-length-unit", required_argument, NULL, 'U' },
    { "max-input-size", required_argument, NULL, 'S' },
    { "base-link", required_argument, NULL, 'B' },
    { "tip-link", required_argument, NULL, 'T' },
    { "target-link", required_argument, NULL, 'G' },
    { "payload", required_argument, NULL, 'P' },
    { "help", no_argument, NULL, 'h' },
    { NULL, 0, NULL, 0 }
  };
  static const char *const names[1] = { "--output" };
  const char *output = NULL, *payload_name = NULL;
  long payload = -1;
  int force = 0, opt, status;
  twf_campaign_options copt = twf_campaign_default_options();
  twf_read_options ropt = twf_read_default_options();
  cli_urdf_links links = { { NULL }, 0 };
  int have_out_unit = 0;
  twf_length_unit out_unit = TWF_LENGTH_MM;
  twf_model *model = NULL;
  twf_campaign *joints = NULL;
  twf_warnings warnings;
  twf_error err;
  const char *inputs[3] = { NULL, NULL, NULL };
  fk_ctx ctx;
  cli_put put;

  optind = 0;
  opterr = 0;
  while ((opt = getopt_long(argc, argv, ":o:fh", longopts, NULL)) != -1) {
    switch (opt) {
    case 'o': output = optarg; break;
    case 'f': force = 1; break;
    case 'L':
      if ((status = cli_parse_length_unit("fk", optarg, &copt.length_unit)) != 0)
        return status;
      copt.length_from_caller = 1;
      break;
    case 'A':
      if ((status = cli_parse_angle_unit("fk", optarg, &copt.angle_unit)) != 0)
        return status;
      copt.angle_from_caller = 1;
      break;
    case 'U':
      if ((status = cli_parse_length_unit("fk", optarg, &out_unit)) != 0)
        return status;
      have_out_unit = 1;
      break;
    case 'S':
      if ((status = cli_parse_size("fk", optarg, &copt.max_input_size)) != 0)
        return status;
      ropt.max_input_size = copt.max_input_size;
      break;
    case 'B':
    case 'T':
    case 'G':
      if ((status = cli_urdf_option("fk", opt == 'B' ? "base-link" : opt == 'T' ? "tip-link"
                                                                  : "target-link",
                                    optarg, &links, &ropt)) != 0)
        return status;
      break;
    case 'P': payload_name = optarg; break;
    case 'h': fputs(fk_help, stdout); return TWF_EXIT_OK;
    default: return cli_bad_option("fk", opt, argv);
    }
  }
  if (argc - optind < 1 || argc - optind > 2)
    return cli_usage_error("fk", "expected MODEL and an optional JOINTS.csv");

  inputs[0] = argv[optind];
  inputs[1] = argc - optind == 2 ? argv[optind + 1] : NULL;
  /* the output is checked before the work, as the other commands do */
  if ((status = cli_outputs_check("fk", &output, names, 1, force, inputs)) != 0)
    return status;
  twf_warnings_init(&warnings);
  twf_error_clear(&err);
  model = twf_model_read_with(argv[optind], &ropt, &warnings, NULL, &err);
  if (model == NULL) {
    cli_print_warnings(&warnings);
    twf_warnings_clear(&warnings);
    return cli_report_error(&err);
  }
  if ((status = cli_payload_resolve("fk", model, payload_name, &payload)) != 0)
    goto done;
  if (inputs[1] != NULL) {
    joints = twf_campaign_read_joints(inputs[1], model, &copt, &warnings, &err);
    if (joints == NULL) {
      /* the reader's hint speaks of the two-file form, which fk does not
       * have */
      if (err.status == TWF_ERR_UNKNOWN && strstr(err.hint, "give the joints file first") != NULL)
        snprintf(err.hint, sizeof err.hint, "%s",
                 "fk reads joint rows only (a pose column and the model's joint columns, see "
                 "twistfit-data(5)); this file has measurement columns: give fk a joints file, or use "
                 "verify or calibrate for a campaign");
      cli_print_warnings(&warnings);
      status = cli_report_error(&err);
      goto done;
    }
    if ((status = cli_payload_apply("fk", joints, inputs[1], payload)) != 0)
      goto done;
  }
  /* the home pose against the model's own limits (the joint rows of a
   * file are checked by the reader, which names the file and line) */
  if (joints == NULL) {
    double *zero = calloc(model->n_joints ? model->n_joints : 1, sizeof *zero);
    if (zero != NULL)
      twf_model_check_limits(model, zero, "the home pose (all joints 0)", &warnings);
    free(zero);
  }
  cli_print_warnings(&warnings);
  if (!have_out_unit)
    out_unit = model->length_unit;

  ctx.model = model;
  ctx.joints = joints;
  ctx.payload = payload;
  ctx.out_unit = out_unit;
  put.path = output != NULL ? output : "-";
  put.put = put_fk;
  put.ctx = &ctx;
  status = cli_write_outputs(&put, 1, force, inputs);

done:
  twf_campaign_free(joints);
  twf_model_free(model);
  twf_warnings_clear(&warnings);
  return status;
}

const cli_command cli_cmd_fk = {
  "fk", run_fk, "forward kinematics of a model at joint values (CSV)", fk_help
};
