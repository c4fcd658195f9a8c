/* cmd_simulate.c: `twistfit simulate MODEL -o CAMPAIGN.csv`: a synthetic
 * campaign in the normal data format, measured on a true arm (a model
 * file, or MODEL with drawn errors) from a base pose, with noise, gross
 * errors and a check fraction on request; the true arm and base pose can
 * be written too. Deterministic for a seed. */
#define _GNU_SOURCE
#include "config.h"
#include "plan_cli.h"

#include <getopt.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

static const char simulate_help[] =
  "Usage: twistfit simulate [OPTIONS] MODEL -o CAMPAIGN.csv\n"
  "\n"
  "A synthetic campaign in the normal data format (twistfit-data(5)): the poses\n"
  "of a joints file or drawn within MODEL's limits, measured on a true arm (a\n"
  "model file, or MODEL with errors drawn at the sizes given) seen from a base\n"
  "pose, with noise per coordinate, optional gross errors and a check fraction.\n"
  "Lengths are in MODEL's length unit, angles in its angle unit. The same seed\n"
  "gives the same files.\n"
  "\n"
  "Options:\n"
  "  -o, --output FILE       the campaign (required)\n"
  "      --true-output FILE  the true arm as a model file\n"
  "      --base-output FILE  the true base pose (robot base in the instrument frame)\n"
  "      --joints FILE       the poses of a joints file (ids kept) ...\n"
  "      --poses N           ... or N poses drawn within the limits (default 100)\n"
  "      --limit-margin F    fraction of each joint's travel kept clear (default 0.05)\n"
  "      --true FILE         the true arm: a model file with MODEL's joints and targets\n"
  "      --angle-sd X        ... or MODEL with drawn errors: axis tilts and home rotation\n"
  "      --length-sd X       axis shifts, home translation, prismatic joint offsets\n"
  "      --offset-sd X       revolute joint offsets (angle unit)\n"
  "      --scale-sd X        joint scale (a ratio, e.g. 1e-4; default 0)\n"
  "      --target-sd X       target offsets\n"
  "                          (each a standard deviation; default 0)\n"
  "      --base FILE         the base pose file (default: the identity)\n"
  "      --stations FILE     ... or several instrument stations: a base pose file of\n"
  "                          [station NAME] sections (the campaign gets a station column)\n"
  "      --assign HOW        which station sees each pose: turn (pose i from station\n"
  "                          i mod n, the default) or block (consecutive blocks)\n"
  "      --sigma X           measurement noise per coordinate (default 0)\n"
  "      --orientation       6-D rows: the flange orientation is measured too\n"
  "      --sigma-angle X     its noise per axis (default 0)\n"
  "      --targets LIST      the targets measured (default: every target with an offset)\n"
  "      --outliers F        fraction of rows with a gross error (default 0) ...\n"
  "      --outlier-size X    ... of this length, random direction (default 1 mm)\n"
  "      --check-fraction F  fraction of the poses tagged as check data (default 0)\n"
  "      --seed N            seed of the draws (default 1)\n"
  "      --length-unit U     length unit of the campaign file (default MODEL's)\n"
  "      --angle-unit U      angle unit of the campaign file (default MODEL's)\n"
  "  -f, --force             replace output files that exist\n"
  CLI_URDF_HELP
  "  -h, --help              show this help\n";

enum {
  OPT_TRUE_OUT = PCLI_OPT_FIRST_FREE, OPT_BASE_OUT, OPT_JOINTS, OPT_POSES, OPT_MARGIN, OPT_TRUE, OPT_ANGLE_SD,
  OPT_LENGTH_SD, OPT_OFFSET_SD, OPT_SCALE_SD, OPT_TARGET_SD, OPT_BASE, OPT_SIGMA, OPT_ORIENTATION,
  OPT_SIGMA_ANGLE, OPT_TARGETS, OPT_OUTLIERS, OPT_OUTLIER_SIZE, OPT_CHECK, OPT_SEED, OPT_LUNIT, OPT_AUNIT,
  OPT_STATIONS, OPT_ASSIGN
};

typedef struct sim_text {
  const char *angle_sd, *length_sd, *offset_sd, *target_sd, *sigma, *sigma_angle, *outlier_size;
} sim_text;

typedef struct campaign_ctx {
  const twf_campaign *c;
  const twf_model *m;
  twf_length_unit lu;
  twf_angle_unit au;
  unsigned long long seed;
} campaign_ctx;

static int put_campaign(FILE *fp, void *ctx, twf_error *err)
{
  const campaign_ctx *x = ctx;
  fprintf(fp, "# Simulated campaign written by twistfit simulate (seed %llu): not measured data.\n"
              "# run: %s\n", x->seed, cli_run_id());
  return twf_campaign_write(x->c, x->m, x->lu, x->au, fp, err) == TWF_OK ? 0 : -1;
}

static int put_true(FILE *fp, void *ctx, twf_error *err)
{
  fprintf(fp, "; The true arm of a campaign simulated by twistfit simulate: not a calibrated model.\n"
              "; run_id: %s\n", cli_run_id());
  return twf_model_write((const twf_model *)ctx, fp, err) == TWF_OK ? 0 : -1;
}

typedef struct base_ctx {
  const twf_pose *B;                 /* one per station */
  const char (*names)[TWF_NAME_MAX]; /* NULL: one station, the [base] file */
  size_t n;
  twf_length_unit lu;
} base_ctx;

static int put_base(FILE *fp, void *ctx, twf_error *err)
{
  const base_ctx *b = ctx;
  fprintf(fp, "; run_id: %s\n", cli_run_id());
  return twf_base_write_stations(b->B, b->names, b->n, b->lu,
                                 "true base pose of a campaign simulated by twistfit simulate", fp, err) ==
                 TWF_OK
             ? 0
             : -1;
}

/* A length or angle option given as text, in the model's units. */
static int unit_value(const char *text, const char *option, double unit_si, const char *unit, double hi_si,
                      double *out)
{
  if (text == NULL)
    return 0;
  return cli_parse_bounded("simulate", option, text, unit_si, unit, 0.0, hi_si, out);
}

/* The true arm must be MODEL's arm: the same joints (names, types) and
 * targets (names). */
static int same_shape(const twf_model *a, const twf_model *b, const char *path)
{
  size_t k;
  int ok = a->n_joints == b->n_joints && a->n_targets == b->n_targets;
  for (k = 0; ok && k < a->n_joints; k++)
    ok = strcmp(a->joints[k].name, b->joints[k].name) == 0 && a->joints[k].type == b->joints[k].type;
  for (k = 0; ok && k < a->n_targets; k++)
    ok = strcmp(a->targets[k].name, b->targets[k].name) == 0 && b->targets[k].offset_known;
  if (!ok) {
    twf_error e;
    twf_error_set(&e, TWF_ERR_VALUE, path, 0, 0,
                  "give a true arm with MODEL's joints (names and types, in order) and targets with offsets",
                  "the true arm does not match MODEL");
    return cli_report_error(&e);
  }
  return 0;
}

static const struct option simulate_longopts[] = {
  { "output", required_argument, NULL, 'o' },
  { "true-output", required_argument, NULL, OPT_TRUE_OUT },
  { "base-output", required_argument, NULL, OPT_BASE_OUT },
  { "joints", required_argument, NULL, OPT_JOINTS },
  { "poses", required_argument, NULL, OPT_POSES },
  { "limit-margin", required_argument, NULL, OPT_MARGIN },
  { "true", required_argument, NULL, OPT_TRUE },
  { "angle-sd", required_argument, NULL, OPT_ANGLE_SD },
  { "length-sd", required_argument, NULL, OPT_LENGTH_SD },
  { "offset-sd", required_argument, NULL, OPT_OFFSET_SD },
  { "scale-sd", required_argument, NULL, OPT_SCALE_SD },
  { "target-sd", required_argument, NULL, OPT_TARGET_SD },
  { "base", required_argument, NULL, OPT_BASE },
  { "stations", required_argument, NULL, OPT_STATIONS },
  { "assign", required_argument, NULL, OPT_ASSIGN },
  { "sigma", required_argument, NULL, OPT_SIGMA },
  { "orientation", no_argument, NULL, OPT_ORIENTATION },
  { "sigma-angle", required_argument, NULL, OPT_SIGMA_ANGLE },
  { "targets", required_argument, NULL, OPT_TARGETS },
  { "outliers", required_argument, NULL, OPT_OUTLIERS },
  { "outlier-size", required_argument, NULL, OPT_OUTLIER_SIZE },
  { "check-fraction", required_argument, NULL, OPT_CHECK },
  { "seed", required_argument, NULL, OPT_SEED },
  { "length-unit", required_argument, NULL, OPT_LUNIT },
  { "angle-unit", required_argument, NULL, OPT_AUNIT },
  { "force", no_argument, NULL, 'f' },
  CLI_URDF_LONGOPTS,
  { "help", no_argument, NULL, 'h' },
  { NULL, 0, NULL, 0 }
};

/* The command's settings as the options give them. The sizes in MODEL's
 * units stay text (tx) until MODEL is read; so and mag are completed by
 * the loading steps. */
typedef struct sim_settings {
  const char *outputs[3];  /* the campaign, the true arm, the base pose */
  const char *inputs[5];   /* MODEL, joints, true arm, base or stations file; NULL-terminated */
  const char *model_path, *joints_path, *true_path, *base_path, *stations_path, *targets_text;
  sim_text tx;
  int force, have_lu, have_au, have_poses, drawn, assign_block, have_assign;
  int help_shown;          /* -h: the help is printed, nothing else to do */
  twf_simulate_options so;
  twf_perturbation mag;
  twf_length_unit lu;      /* of the campaign file when have_lu */
  twf_angle_unit au;       /* of the campaign file when have_au */
  twf_read_options ropt;
  cli_urdf_links urdf_links; /* the --target-link names that ropt points to */
} sim_settings;

static void sim_settings_init(sim_settings *s)
{
  memset(s, 0, sizeof *s);
  s->so = twf_simulate_default_options();
  s->mag = (twf_perturbation){ 0, 0, 0, 0, 0 };
  s->lu = TWF_LENGTH_MM;
  s->au = TWF_ANGLE_DEG;
  s->ropt = twf_read_default_options();
  s->urdf_links = (cli_urdf_links){ { NULL }, 0 };
}

static int parse_assign(sim_settings *s, const char *arg)
{
  if (strcmp(arg, "turn") == 0)
    s->assign_block = 0;
  else if (strcmp(arg, "block") == 0)
    s->assign_block = 1;
  else
    return cli_usage_error("simulate", "--assign takes turn or block");
  s->have_assign = 1;
  return 0;
}

/* One option of getopt_long into s: 0, or the exit status of a bad one. */
static int take_option(sim_settings *s, int opt, char *arg, char **argv)
{
  int status;
  switch (opt) {
  case 'o': s->outputs[0] = arg; break;
  case OPT_TRUE_OUT: s->outputs[1] = arg; break;
  case OPT_BASE_OUT: s->outputs[2] = arg; break;
  case OPT_JOINTS: s->joints_path = arg; break;
  case OPT_POSES:
    if ((status = pcli_parse_count("simulate", "--poses", arg, 1, 10000000, &s->so.n_poses)) != 0)
      return status;
    s->have_poses = 1;
    break;
  case OPT_MARGIN:
    return pcli_parse_fraction("simulate", "--limit-margin", arg, 0.0, 0.45, &s->so.limit_margin);
  case OPT_TRUE: s->true_path = arg; break;
  case OPT_ANGLE_SD: s->tx.angle_sd = arg; s->drawn = 1; break;
  case OPT_LENGTH_SD: s->tx.length_sd = arg; s->drawn = 1; break;
  case OPT_OFFSET_SD: s->tx.offset_sd = arg; s->drawn = 1; break;
  case OPT_SCALE_SD:
    if ((status = pcli_parse_fraction("simulate", "--scale-sd", arg, 0.0, 0.1, &s->mag.scale)) != 0)
      return status;
    s->drawn = 1;
    break;
  case OPT_TARGET_SD: s->tx.target_sd = arg; s->drawn = 1; break;
  case OPT_BASE: s->base_path = arg; break;
  case OPT_STATIONS: s->stations_path = arg; break;
  case OPT_ASSIGN: return parse_assign(s, arg);
  case OPT_SIGMA: s->tx.sigma = arg; break;
  case OPT_ORIENTATION: s->so.orientation = 1; break;
  case OPT_SIGMA_ANGLE: s->tx.sigma_angle = arg; break;
  case OPT_TARGETS: s->targets_text = arg; break;
  case OPT_OUTLIERS:
    return pcli_parse_fraction("simulate", "--outliers", arg, 0.0, 1.0, &s->so.outlier_fraction);
  case OPT_OUTLIER_SIZE: s->tx.outlier_size = arg; break;
  case OPT_CHECK:
    return pcli_parse_fraction("simulate", "--check-fraction", arg, 0.0, 0.9, &s->so.check_fraction);
  case OPT_SEED: return pcli_parse_seed("simulate", arg, &s->so.seed);
  case OPT_LUNIT:
    if ((status = cli_parse_length_unit("simulate", arg, &s->lu)) != 0)
      return status;
    s->have_lu = 1;
    break;
  case OPT_AUNIT:
    if ((status = cli_parse_angle_unit("simulate", arg, &s->au)) != 0)
      return status;
    s->have_au = 1;
    break;
  case 'f': s->force = 1; break;
  case CLI_OPT_BASE_LINK:
  case CLI_OPT_TIP_LINK:
  case CLI_OPT_TARGET_LINK: return cli_urdf_longopt("simulate", opt, arg, &s->urdf_links, &s->ropt);
  case 'h': fputs(simulate_help, stdout); s->help_shown = 1; break;
  default: return cli_bad_option("simulate", opt, argv);
  }
  return 0;
}

/* The command line into s (MODEL is the one operand): 0, or the exit
 * status of a usage error; s->help_shown after -h. */
static int parse_options(int argc, char **argv, sim_settings *s)
{
  int opt, status;
  sim_settings_init(s);
  optind = 0;
  opterr = 0;
  while ((opt = getopt_long(argc, argv, ":o:fh", simulate_longopts, NULL)) != -1)
    if ((status = take_option(s, opt, optarg, argv)) != 0 || s->help_shown)
      return status;
  if (argc - optind != 1)
    return cli_usage_error("simulate", "expected one MODEL");
  s->model_path = argv[optind];
  return 0;
}

/* The options that need or exclude each other. */
static int check_settings(const sim_settings *s)
{
  const char *const *outputs = s->outputs;
  if (outputs[0] == NULL)
    return cli_usage_error("simulate", "give the campaign file with -o FILE");
  if (s->joints_path != NULL && s->have_poses)
    return cli_usage_error("simulate", "give --joints or --poses, not both");
  if (s->true_path != NULL && s->drawn)
    return cli_usage_error("simulate", "give the true arm (--true) or error sizes (--angle-sd ...), not both");
  if (s->tx.sigma_angle != NULL && !s->so.orientation)
    return cli_usage_error("simulate", "--sigma-angle needs --orientation");
  if (s->stations_path != NULL && s->base_path != NULL)
    return cli_usage_error("simulate", "give --base or --stations, not both");
  if (s->have_assign && s->stations_path == NULL)
    return cli_usage_error("simulate", "--assign needs --stations");
  if (outputs[0] != NULL && strcmp(outputs[0], "-") == 0 && (outputs[1] != NULL || outputs[2] != NULL) &&
      ((outputs[1] && strcmp(outputs[1], "-") == 0) || (outputs[2] && strcmp(outputs[2], "-") == 0)))
    return cli_usage_error("simulate", "only one output can go to standard output");
  return 0;
}

/* The output files checked against each other, the inputs and what
 * exists, before any work. */
static int check_outputs(sim_settings *s)
{
  static const char *const names[3] = { "--output", "--true-output", "--base-output" };
  s->inputs[0] = s->model_path;
  s->inputs[1] = s->joints_path;
  s->inputs[2] = s->true_path;
  s->inputs[3] = s->base_path != NULL ? s->base_path : s->stations_path;
  s->inputs[4] = NULL;
  return cli_outputs_check("simulate", s->outputs, names, 3, s->force, s->inputs);
}

/* What a run reads and makes; sim_job_free releases it. so in the
 * settings points into it (targets, stations, poses), so it stays where
 * it was made. */
typedef struct sim_job {
  twf_model *model, *truth;
  twf_campaign *joints;              /* the --joints file, or NULL */
  twf_campaign *c;                   /* the simulated campaign */
  unsigned char *mask;               /* the --targets measured, or NULL */
  size_t *pose_station;              /* each pose's station, or NULL */
  twf_pose B;                        /* the one base pose (no --stations) */
  twf_pose station_base[TWF_STATIONS_MAX];
  char station_names[TWF_STATIONS_MAX][TWF_NAME_MAX];
  size_t n_stations;                 /* 0: no --stations, the base pose B */
  twf_warnings warnings;
  twf_error err;
} sim_job;

static void sim_job_init(sim_job *j)
{
  j->model = j->truth = NULL;
  j->joints = j->c = NULL;
  j->mask = NULL;
  j->pose_station = NULL;
  j->n_stations = 0;
  twf_warnings_init(&j->warnings);
  twf_error_clear(&j->err);
}

static void sim_job_free(sim_job *j)
{
  free(j->pose_station);
  twf_campaign_free(j->c);
  twf_campaign_free(j->joints);
  twf_model_free(j->truth);
  twf_model_free(j->model);
  free(j->mask);
  twf_warnings_clear(&j->warnings);
}

/* MODEL, then the sizes given in its units and the --targets it names. */
static int read_model(sim_settings *s, sim_job *j)
{
  const sim_text *tx = &s->tx;
  cli_units u;
  int status;
  j->model = twf_model_read_with(s->model_path, &s->ropt, &j->warnings, NULL, &j->err);
  if (j->model == NULL)
    return cli_report_error(&j->err);
  cli_units_of(&u, j->model);
  if ((status = unit_value(tx->angle_sd, "--angle-sd", u.angle_si, u.angle, 0.1, &s->mag.tilt_rad)) != 0 ||
      (status = unit_value(tx->length_sd, "--length-sd", u.length_si, u.length, 0.1, &s->mag.shift_m)) != 0 ||
      (status = unit_value(tx->offset_sd, "--offset-sd", u.angle_si, u.angle, 0.1, &s->mag.offset_rad)) != 0 ||
      (status = unit_value(tx->target_sd, "--target-sd", u.length_si, u.length, 0.1, &s->mag.target_m)) != 0 ||
      (status = unit_value(tx->sigma, "--sigma", u.length_si, u.length, 0.01, &s->so.sigma_m)) != 0 ||
      (status = unit_value(tx->sigma_angle, "--sigma-angle", u.angle_si, u.angle, 0.1, &s->so.sigma_rad)) != 0 ||
      (status = unit_value(tx->outlier_size, "--outlier-size", u.length_si, u.length, 1.0, &s->so.outlier_m)) != 0)
    return status;
  if (s->targets_text != NULL) {
    j->mask = calloc(j->model->n_targets ? j->model->n_targets : 1, 1);
    if (j->mask == NULL)
      return cli_out_of_memory();
    if ((status = pcli_parse_targets("simulate", j->model, s->targets_text, j->mask)) != 0)
      return status;
    s->so.targets = j->mask;
  }
  return 0;
}

/* The true arm: the --true file (MODEL's shape), or MODEL with errors
 * drawn at the sizes given. */
static int make_true_arm(const sim_settings *s, sim_job *j)
{
  char note[128];
  if (s->true_path != NULL) {
    j->truth = twf_model_read_with(s->true_path, &s->ropt, &j->warnings, NULL, &j->err);
    if (j->truth == NULL)
      return cli_report_error(&j->err);
    return same_shape(j->model, j->truth, s->true_path);
  }
  j->truth = twf_model_copy(j->model);
  if (j->truth == NULL)
    return cli_out_of_memory();
  /* the errors are drawn from their own stream of the seed */
  twf_model_perturb(j->truth, &s->mag, s->so.seed ^ 0x6a09e667f3bcc909ULL);
  snprintf(note, sizeof note, "drawn by twistfit simulate, seed %llu", s->so.seed);
  twf_model_meta_set(j->truth, "simulated", note);
  return 0;
}

/* The --base pose file, or the identity. */
static int read_base(const sim_settings *s, sim_job *j)
{
  if (s->base_path == NULL) {
    twf_pose_identity(&j->B);
    return 0;
  }
  if (twf_base_read(s->base_path, &j->B, &j->err) != TWF_OK)
    return cli_report_error(&j->err);
  /* any base pose places a simulated arm, but a true arm and a base
   * pose that different runs wrote are more likely a slip: a warning */
  if (s->true_path != NULL)
    cli_check_same_run("simulate", s->true_path, "the true arm", s->base_path, "the base pose file", 0, 0);
  return 0;
}

/* The --stations file: [station NAME] sections only. */
static int read_stations(const sim_settings *s, sim_job *j)
{
  if (s->stations_path == NULL)
    return 0;
  if (twf_base_read_stations(s->stations_path, NULL, j->station_base, j->station_names, TWF_STATIONS_MAX,
                             &j->n_stations, NULL, &j->err) != TWF_OK)
    return cli_report_error(&j->err);
  if (j->station_names[0][0] == '\0') {
    twf_error_set(&j->err, TWF_ERR_MISSING, s->stations_path, 0, 0,
                  "give one [station NAME] section per station, or use --base for one",
                  "the file holds a [base] section, not instrument stations");
    return cli_report_error(&j->err);
  }
  if (s->true_path != NULL)
    cli_check_same_run("simulate", s->true_path, "the true arm", s->stations_path, "the stations file", 0, 0);
  return 0;
}

/* The poses of the --joints file replace the drawn ones. */
static int read_joints(sim_settings *s, sim_job *j)
{
  if (s->joints_path == NULL)
    return 0;
  j->joints = twf_campaign_read_joints(s->joints_path, j->model, NULL, &j->warnings, &j->err);
  if (j->joints == NULL)
    return cli_report_error(&j->err);
  s->so.n_poses = j->joints->n_poses;
  s->so.q = j->joints->q;
  if (j->joints->n_stations > 0 && s->stations_path == NULL)
    twf_warnings_add(&j->warnings, s->joints_path, 0, 0,
                     "the joints file names instrument stations (the first '%s'), but without --stations "
                     "every pose is measured from the one base pose and the campaign has no station column",
                     j->joints->station_names[0]);
  return 0;
}

/* Every input read and checked; the readers' warnings are printed only
 * when all of them could be read. */
static int load_inputs(sim_settings *s, sim_job *j)
{
  int status;
  if ((status = read_model(s, j)) != 0 || (status = make_true_arm(s, j)) != 0 ||
      (status = read_base(s, j)) != 0 || (status = read_stations(s, j)) != 0 ||
      (status = read_joints(s, j)) != 0)
    return status;
  cli_print_warnings(&j->warnings);
  return 0;
}

/* Room for the station of each of the so.n_poses poses. */
static int alloc_pose_station(const sim_settings *s, sim_job *j)
{
  j->pose_station = malloc((s->so.n_poses ? s->so.n_poses : 1) * sizeof *j->pose_station);
  return j->pose_station == NULL ? cli_out_of_memory() : 0;
}

/* The joints file names each pose's station (plan writes it): by name
 * into the stations file. */
static int stations_by_name(const sim_settings *s, sim_job *j)
{
  const twf_campaign *joints = j->joints;
  size_t k, l;
  int status;
  if (s->have_assign)
    return cli_usage_error("simulate", "the joints file has a station column: --assign does not apply");
  if ((status = alloc_pose_station(s, j)) != 0)
    return status;
  for (k = 0; k < s->so.n_poses; k++) {
    const char *nm = joints->station_names[twf_campaign_pose_station(joints, k)];
    for (l = 0; l < j->n_stations; l++)
      if (strcmp(j->station_names[l], nm) == 0)
        break;
    if (l == j->n_stations) {
      twf_error_set(&j->err, TWF_ERR_MISSING, s->stations_path, 0, 0,
                    "give a section for every station of the joints file",
                    "no section [station %s] for station '%s' of pose '%s' in %s", nm, nm, joints->pose_ids[k],
                    s->joints_path);
      return cli_report_error(&j->err);
    }
    j->pose_station[k] = l;
  }
  return 0;
}

/* Consecutive blocks of (nearly) equal size, in station order. */
static int stations_in_blocks(const sim_settings *s, sim_job *j)
{
  size_t n;
  int status;
  if ((status = alloc_pose_station(s, j)) != 0)
    return status;
  for (n = 0; n < s->so.n_poses; n++)
    j->pose_station[n] = n * j->n_stations / s->so.n_poses;
  return 0;
}

/* With --stations, which station sees each pose: the joints file's
 * station column, --assign block, or (pose_station left NULL) the
 * library's default, in turn. */
static int assign_stations(sim_settings *s, sim_job *j)
{
  int status = 0;
  if (j->n_stations == 0)
    return 0;
  s->so.n_stations = j->n_stations;
  s->so.station_base = j->station_base;
  s->so.station_names = (const char (*)[TWF_NAME_MAX])j->station_names;
  if (j->joints != NULL && j->joints->n_stations > 0)
    status = stations_by_name(s, j);
  else if (s->assign_block)
    status = stations_in_blocks(s, j);
  else
    return 0;
  if (status == 0)
    s->so.pose_station = j->pose_station;
  return status;
}

/* The campaign measured on the true arm; the poses keep the joints
 * file's ids. */
static int simulate(const sim_settings *s, sim_job *j)
{
  size_t n;
  j->c = twf_simulate_campaign(j->truth, j->n_stations > 0 ? NULL : &j->B, &s->so, &j->err);
  if (j->c == NULL)
    return cli_report_error(&j->err);
  if (j->joints != NULL)
    for (n = 0; n < j->c->n_poses; n++)
      memcpy(j->c->pose_ids[n], j->joints->pose_ids[n], TWF_NAME_MAX);
  return 0;
}

/* The campaign, the true arm and the base pose or stations, written
 * together (or none). */
static int write_outputs(const sim_settings *s, sim_job *j)
{
  const twf_model *model = j->model;
  twf_length_unit lu = s->have_lu ? s->lu : model->length_unit;
  campaign_ctx cc = { j->c, model, lu, s->have_au ? s->au : model->angle_unit, s->so.seed };
  base_ctx bc = { j->n_stations > 0 ? j->station_base : &j->B,
                  j->n_stations > 0 ? (const char (*)[TWF_NAME_MAX])j->station_names : NULL,
                  j->n_stations > 0 ? j->n_stations : 1, lu };
  cli_put puts[3];
  puts[0] = (cli_put){ s->outputs[0], put_campaign, &cc };
  puts[1] = (cli_put){ s->outputs[1], put_true, j->truth };
  puts[2] = (cli_put){ s->outputs[2], put_base, &bc };
  return cli_write_outputs(puts, 3, s->force, s->inputs);
}

/* With -v, what was written (unless the campaign went to standard
 * output). */
static void say_simulated(const sim_settings *s, const twf_campaign *c)
{
  size_t i, n_check = 0;
  if (cli_verbosity <= 0 || strcmp(s->outputs[0], "-") == 0)
    return;
  for (i = 0; i < c->n_meas; i++)
    n_check += c->meas[i].set == TWF_SET_CHECK;
  fprintf(stderr, "twistfit: simulated %zu poses, %zu measurements (%zu check) into %s\n", c->n_poses, c->n_meas,
          n_check, s->outputs[0]);
}

static int run_simulate(int argc, char **argv)
{
  sim_settings s;
  sim_job j;
  int status;

  if ((status = parse_options(argc, argv, &s)) != 0 || s.help_shown)
    return status;
  if ((status = check_settings(&s)) != 0 || (status = check_outputs(&s)) != 0)
    return status;
  sim_job_init(&j);
  if ((status = load_inputs(&s, &j)) == 0 && (status = assign_stations(&s, &j)) == 0 &&
      (status = simulate(&s, &j)) == 0 && (status = write_outputs(&s, &j)) == TWF_EXIT_OK)
    say_simulated(&s, j.c);
  sim_job_free(&j);
  return status;
}

const cli_command cli_cmd_simulate = {
  "simulate",
  run_simulate,
  "a synthetic campaign on a true arm (before the measuring day)",
  simulate_help,
};
