/* cmd_compensate.c: `twistfit compensate NOMINAL ASBUILT PROGRAM.csv`: the
 * joint values with which the as-built arm reaches what the nominal model
 * gives for each row of a joint program; and `--cartesian FILE`: inverse
 * kinematics of the as-built arm for Cartesian goals. CSV out, with a
 * status per row. */
#define _GNU_SOURCE
#include "config.h"
#include "cli.h"

#include <getopt.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

static const char compensate_help[] =
  "Usage: twistfit compensate [OPTIONS] NOMINAL ASBUILT PROGRAM.csv\n"
  "       twistfit compensate [OPTIONS] ASBUILT --cartesian TARGETS.csv\n"
  "\n"
  "For each row of PROGRAM.csv (a pose id and one column per joint, as fk reads\n"
  "them), find the joint values with which the ASBUILT arm puts the flange at\n"
  "the pose that NOMINAL gives for the row's values, taken in the as-built\n"
  "model's base frame; damped least squares started from the row's values.\n"
  "With --cartesian, solve the goals of TARGETS.csv (positions and quaternions\n"
  "in the as-built base frame, with seed joint values) on ASBUILT directly.\n"
  "Writes the rows with the compensated joint values in the program's units and\n"
  "a status per row (ok, near-singular, outside-limits, not-converged); a\n"
  "summary goes to standard error. Exit status 1 when any row is flagged.\n"
  "\n"
  "Safety: a compensated program moves the real arm elsewhere than the original.\n"
  "Run it first at reduced speed with the cell's safety functions active, look\n"
  "for new collisions near the workspace limits, follow the robot maker's\n"
  "procedures, and keep the original program.\n"
  "\n"
  "Options:\n"
  "  -o, --output FILE          write the CSV to FILE (atomically) instead of stdout\n"
  "  -f, --force                replace FILE when it exists\n"
  "      --point T              match the position of target T only (3 conditions);\n"
  "                             the spare freedom keeps the joint change least\n"
  "      --cartesian FILE       Cartesian goals instead of a program (see\n"
  "                             twistfit-compensate(1) for the columns)\n"
  "      --length-unit U        unit of prismatic joint values and positions in the\n"
  "                             input (default: as the file declares, else mm)\n"
  "      --angle-unit U         unit of revolute joint values (default: as the file\n"
  "                             declares, else deg)\n"
  "      --tol-position X       converged when the position error is at most X\n"
  "                             (the input's length unit; default 1e-10 m)\n"
  "      --tol-angle X          ... and the angle error at most X (the input's angle\n"
  "                             unit; default 1e-10 rad)\n"
  "      --max-iter N           forward-kinematics evaluations per row (default 100)\n"
  "      --singular-threshold X flag rows where the smallest singular value of the\n"
  "                             scaled Jacobian is below X (default 0.01)\n"
  "      --allow-flagged        exit status 0 even when rows are flagged\n"
  "      --payload NAME         the load carried ([payload NAME] of the models): an\n"
  "                             ASBUILT with compliances is solved deflected under it\n"
  "                             (or name it in the input's payload column, one load\n"
  "                             per program)\n"
  CLI_URDF_HELP
  "  -h, --help                 show this help\n";

enum {
  OPT_POINT = CLI_OPT_FIRST_FREE, OPT_CARTESIAN, OPT_LENGTH_UNIT, OPT_ANGLE_UNIT, OPT_TOL_POS,
  OPT_TOL_ANG, OPT_MAX_ITER, OPT_SINGULAR, OPT_ALLOW, OPT_PAYLOAD
};

/* The units a campaign-style file declares in its "# units:" line (above
 * the header row), as the reader took them: the caller's override, else
 * the declaration, else mm and deg. The reader has accepted the file, so
 * the declaration is well formed. */
static void declared_units(const char *path, const twf_campaign_options *copt, twf_length_unit *lu,
                           twf_angle_unit *au)
{
  FILE *fp = fopen(path, "r");
  char *line = NULL; /* whole lines (the reader took them whole): no part of a long comment read as a line */
  size_t cap = 0;
  int first = 1;
  *lu = TWF_LENGTH_MM;
  *au = TWF_ANGLE_DEG;
  while (fp != NULL && getline(&line, &cap, fp) != -1) {
    char *p = line, *tok, *save = NULL;
    if (first && (unsigned char)p[0] == 0xEF && (unsigned char)p[1] == 0xBB && (unsigned char)p[2] == 0xBF)
      p += 3;
    first = 0;
    while (*p == ' ' || *p == '\t')
      p++;
    if (*p == '\0' || *p == '\n' || *p == '\r')
      continue;
    if (*p != '#')
      break; /* the header row */
    p++;
    while (*p == ' ' || *p == '\t')
      p++;
    if (strncmp(p, "units", 5) != 0)
      continue;
    p += 5;
    while (*p == ' ' || *p == '\t')
      p++;
    if (*p != ':')
      continue;
    for (tok = strtok_r(p + 1, " \t,;\r\n", &save); tok != NULL; tok = strtok_r(NULL, " \t,;\r\n", &save)) {
      char *eq = strchr(tok, '=');
      if (eq == NULL)
        continue;
      *eq = '\0';
      if (strcmp(tok, "length") == 0)
        twf_length_unit_parse(eq + 1, lu);
      else if (strcmp(tok, "angle") == 0)
        twf_angle_unit_parse(eq + 1, au);
    }
    break;
  }
  free(line);
  if (fp != NULL)
    fclose(fp);
  if (copt->length_from_caller)
    *lu = copt->length_unit;
  if (copt->angle_from_caller)
    *au = copt->angle_unit;
}

static void status_text(unsigned flags, char *buf, size_t n)
{
  buf[0] = '\0';
  if (flags == 0) {
    snprintf(buf, n, "ok");
    return;
  }
  if (flags & TWF_IK_NEAR_SINGULAR)
    snprintf(buf + strlen(buf), n - strlen(buf), "%snear-singular", buf[0] ? "+" : "");
  if (flags & TWF_IK_OUTSIDE_LIMITS)
    snprintf(buf + strlen(buf), n - strlen(buf), "%soutside-limits", buf[0] ? "+" : "");
  if (flags & TWF_IK_NOT_CONVERGED)
    snprintf(buf + strlen(buf), n - strlen(buf), "%snot-converged", buf[0] ? "+" : "");
}

typedef struct comp_out {
  const twf_model *model;     /* the as-built model: joint names and types */
  const twf_campaign *input;  /* poses (program) or goals (Cartesian) */
  const twf_model *goal_model;/* Cartesian: the model the goal file was read with */
  int cartesian;
  size_t n_rows;
  const double *q;            /* n_rows x n_joints, SI */
  const twf_ik_result *res;
  twf_length_unit lu;
  twf_angle_unit au;
  const char *nominal_path, *asbuilt_path, *input_path;
  const char *point;          /* --point target, or NULL */
} comp_out;

static int put_compensated(FILE *fp, void *ctx, twf_error *err)
{
  const comp_out *c = ctx;
  const twf_model *m = c->model;
  const char *lu = twf_length_unit_name(c->lu), *au = twf_angle_unit_name(c->au);
  double lsi = twf_length_unit_si(c->lu), asi = twf_angle_unit_si(c->au);
  int any_prismatic = 0;
  cli_csv csv;
  char name[TWF_NAME_MAX + 32];
  size_t r, j;
  (void)err;
  for (j = 0; j < m->n_joints; j++)
    any_prismatic |= m->joints[j].type == TWF_JOINT_PRISMATIC;
  if (c->cartesian)
    fprintf(fp, "# twistfit %s compensate: inverse kinematics of the as-built model %s for the goals of %s\n",
            twf_version(), c->asbuilt_path, c->input_path);
  else
    fprintf(fp, "# twistfit %s compensate: program %s, nominal model %s, as-built model %s%s%s\n", twf_version(),
            c->input_path, c->nominal_path, c->asbuilt_path, c->point != NULL ? ", position of target " : "",
            c->point != NULL ? c->point : "");
  fprintf(fp, "# run_id: %s\n", cli_run_id());
  fprintf(fp, "# safety: run first at reduced speed with the cell's safety functions active; keep the original\n");
  fprintf(fp, "# units: length=%s angle=%s\n", lu, au);
  cli_csv_init(&csv, fp);
  cli_csv_text(&csv, "pose");
  if (c->cartesian)
    cli_csv_text(&csv, "target");
  for (j = 0; j < m->n_joints; j++)
    cli_csv_text(&csv, m->joints[j].name);
  cli_csv_text(&csv, "status");
  snprintf(name, sizeof name, "position_error_%s", lu);
  cli_csv_text(&csv, name);
  snprintf(name, sizeof name, "angle_error_%s", au);
  cli_csv_text(&csv, name);
  cli_csv_text(&csv, "iterations");
  snprintf(name, sizeof name, "max_change_%s", au);
  cli_csv_text(&csv, name);
  if (any_prismatic) {
    snprintf(name, sizeof name, "max_change_%s", lu);
    cli_csv_text(&csv, name);
  }
  cli_csv_text(&csv, "sigma_min");
  cli_csv_end_row(&csv);
  for (r = 0; r < c->n_rows; r++) {
    const twf_ik_result *res = &c->res[r];
    char st[64];
    if (c->cartesian) {
      const twf_measurement *ms = &c->input->meas[r];
      cli_csv_text(&csv, c->input->pose_ids[ms->pose]);
      cli_csv_text(&csv, c->goal_model->targets[ms->target].name);
    } else {
      cli_csv_text(&csv, c->input->pose_ids[r]);
    }
    for (j = 0; j < m->n_joints; j++)
      cli_csv_number(&csv, c->q[r * m->n_joints + j] /
                               (m->joints[j].type == TWF_JOINT_PRISMATIC ? lsi : asi));
    status_text(res->flags, st, sizeof st);
    cli_csv_text(&csv, st);
    cli_csv_number(&csv, res->position_error_m / lsi);
    cli_csv_number(&csv, res->angle_error_rad / asi);
    cli_csv_number(&csv, (double)res->iterations);
    cli_csv_number(&csv, res->max_change_rad / asi);
    if (any_prismatic)
      cli_csv_number(&csv, res->max_change_m / lsi);
    cli_csv_number(&csv, res->sigma_min);
    cli_csv_end_row(&csv);
  }
  return 0;
}

static void print_summary(const twf_compensate_summary *s, const comp_out *c, int allow)
{
  double lsi = twf_length_unit_si(c->lu), asi = twf_angle_unit_si(c->au);
  const char *lu = twf_length_unit_name(c->lu), *au = twf_angle_unit_name(c->au);
  const char *row_id = "-";
  if (cli_verbosity == 0)
    return;
  if (s->n_rows > 0)
    row_id = c->cartesian ? c->input->pose_ids[c->input->meas[s->max_change_row].pose]
                          : c->input->pose_ids[s->max_change_row];
  fprintf(stderr, "twistfit: compensated %zu row%s: %zu ok, %zu flagged", s->n_rows, s->n_rows == 1 ? "" : "s",
          s->n_rows - s->n_flagged, s->n_flagged);
  if (s->n_flagged > 0)
    fprintf(stderr, " (%zu near a singularity, %zu outside the joint limits, %zu not converged)",
            s->n_near_singular, s->n_outside_limits, s->n_not_converged);
  fputc('\n', stderr);
  if (c->point != NULL)
    fprintf(stderr, "twistfit: largest remaining position error of a converged row: %.3g %s; the flange "
                    "orientation, not a condition with --point, turned by up to %.3g %s\n",
            s->max_position_error_m / lsi, lu, s->max_angle_error_rad / asi, au);
  else
    fprintf(stderr, "twistfit: largest remaining error of a converged row: %.3g %s, %.3g %s\n",
            s->max_position_error_m / lsi, lu, s->max_angle_error_rad / asi, au);
  fprintf(stderr, "twistfit: largest joint change: %.6g %s", s->max_change_rad / asi, au);
  if (s->max_change_m > 0)
    fprintf(stderr, ", %.6g %s", s->max_change_m / lsi, lu);
  fprintf(stderr, " (largest in row %s)\n", row_id);
  if (s->n_flagged > 0 && !allow)
    fprintf(stderr, "twistfit: flagged rows are marked in the status column and must not be run as they "
                    "are; exit status 1 (--allow-flagged: 0)\n");
  fprintf(stderr, "twistfit: safety: run the compensated program first at reduced speed with the cell's "
                  "safety functions active, check for new collisions near the workspace limits, follow the "
                  "robot maker's procedures and keep the original program\n");
}

/* A copy of the as-built model with a target "flange" at the flange
 * origin (unless it has one of that name), to read Cartesian goals in the
 * campaign form. */
static twf_model *with_flange_target(const twf_model *m)
{
  twf_model *c;
  if (twf_model_target_index(m, "flange") >= 0)
    return twf_model_copy(m);
  c = twf_model_alloc(m->n_joints, m->n_targets + 1);
  if (c == NULL)
    return NULL;
  /* joints and targets hold no pointers: plain copies */
  memcpy(c->joints, m->joints, m->n_joints * sizeof *c->joints);
  memcpy(c->targets, m->targets, m->n_targets * sizeof *c->targets);
  c->home = m->home;
  c->length_unit = m->length_unit;
  c->angle_unit = m->angle_unit;
  snprintf(c->name, sizeof c->name, "%s", m->name);
  snprintf(c->targets[m->n_targets].name, TWF_NAME_MAX, "flange");
  c->targets[m->n_targets].offset_known = 1;
  return c;
}

static const struct option compensate_longopts[] = {
  { "output", required_argument, NULL, 'o' },
  { "force", no_argument, NULL, 'f' },
  { "point", required_argument, NULL, OPT_POINT },
  { "cartesian", required_argument, NULL, OPT_CARTESIAN },
  { "length-unit", required_argument, NULL, OPT_LENGTH_UNIT },
  { "angle-unit", required_argument, NULL, OPT_ANGLE_UNIT },
  { "tol-position", required_argument, NULL, OPT_TOL_POS },
  { "tol-angle", required_argument, NULL, OPT_TOL_ANG },
  { "max-iter", required_argument, NULL, OPT_MAX_ITER },
  { "singular-threshold", required_argument, NULL, OPT_SINGULAR },
  { "allow-flagged", no_argument, NULL, OPT_ALLOW },
  CLI_URDF_LONGOPTS,
  { "payload", required_argument, NULL, OPT_PAYLOAD },
  { "help", no_argument, NULL, 'h' },
  { NULL, 0, NULL, 0 }
};

/* The command's settings as the options give them. The tolerances stay
 * text until the input's units are known; co is completed by the loading
 * steps (payload, tolerances, --point). */
typedef struct comp_settings {
  const char *output;           /* -o, or NULL: standard output */
  const char *point;            /* --point target, or NULL */
  const char *cartesian;        /* --cartesian goal file, or NULL: a program */
  const char *tol_pos, *tol_ang;/* --tol-position, --tol-angle as typed */
  const char *payload_name;     /* --payload, or NULL */
  /* the operands, NULL-terminated: NOMINAL, ASBUILT, PROGRAM.csv; with
   * --cartesian ASBUILT and the goal file */
  const char *inputs[4];
  const char *asbuilt_path, *input_path;
  int force, allow;
  int help_shown;               /* -h: the help is printed, nothing else to do */
  twf_campaign_options copt;
  twf_compensate_options co;
  twf_read_options ropt;
  cli_urdf_links urdf_links;    /* the --target-link names that ropt points to */
} comp_settings;

static void comp_settings_init(comp_settings *s)
{
  memset(s, 0, sizeof *s);
  s->copt = twf_campaign_default_options();
  s->co = twf_compensate_default_options();
  s->ropt = twf_read_default_options();
  s->urdf_links = (cli_urdf_links){ { NULL }, 0 };
}

static int parse_max_iter(comp_settings *s, const char *arg)
{
  char *end;
  long v = strtol(arg, &end, 10);
  if (*arg == '\0' || *end != '\0' || v < 1 || v > 100000)
    return cli_usage_error("compensate", "--max-iter takes a count from 1 to 100000");
  s->co.ik.max_iter = (unsigned)v;
  return 0;
}

static int parse_singular_threshold(comp_settings *s, const char *arg)
{
  double *t = &s->co.ik.singular_threshold;
  if (cli_parse_double(arg, t) != 0 || *t < 0 || *t > 1)
    return cli_usage_error("compensate", "--singular-threshold takes a number from 0 to 1, not '%s'", arg);
  return 0;
}

/* One option of getopt_long into s: 0, or the exit status of a bad one. */
static int take_option(comp_settings *s, int opt, char *arg, char **argv)
{
  int status;
  switch (opt) {
  case 'o': s->output = arg; break;
  case 'f': s->force = 1; break;
  case OPT_POINT: s->point = arg; break;
  case OPT_CARTESIAN: s->cartesian = arg; break;
  case OPT_LENGTH_UNIT:
    if ((status = cli_parse_length_unit("compensate", arg, &s->copt.length_unit)) != 0)
      return status;
    s->copt.length_from_caller = 1;
    break;
  case OPT_ANGLE_UNIT:
    if ((status = cli_parse_angle_unit("compensate", arg, &s->copt.angle_unit)) != 0)
      return status;
    s->copt.angle_from_caller = 1;
    break;
  case OPT_TOL_POS: s->tol_pos = arg; break;
  case OPT_TOL_ANG: s->tol_ang = arg; break;
  case OPT_MAX_ITER: return parse_max_iter(s, arg);
  case OPT_SINGULAR: return parse_singular_threshold(s, arg);
  case OPT_ALLOW: s->allow = 1; break;
  case CLI_OPT_BASE_LINK:
  case CLI_OPT_TIP_LINK:
  case CLI_OPT_TARGET_LINK: return cli_urdf_longopt("compensate", opt, arg, &s->urdf_links, &s->ropt);
  case OPT_PAYLOAD: s->payload_name = arg; break;
  case 'h': fputs(compensate_help, stdout); s->help_shown = 1; break;
  default: return cli_bad_option("compensate", opt, argv);
  }
  return 0;
}

/* The operands after the options: NOMINAL ASBUILT PROGRAM.csv, or
 * ASBUILT alone with --cartesian (which excludes --point). */
static int take_operands(comp_settings *s, int n_pos, char **pos)
{
  if (s->cartesian != NULL ? n_pos != 1 : n_pos != 3)
    return cli_usage_error("compensate", s->cartesian != NULL ? "with --cartesian, give ASBUILT only"
                                                              : "expected NOMINAL, ASBUILT and PROGRAM.csv");
  if (s->cartesian != NULL && s->point != NULL)
    return cli_usage_error("compensate", "--point and --cartesian exclude each other (a Cartesian row names "
                                         "its point in the target column)");
  if (s->cartesian != NULL) {
    s->inputs[0] = pos[0];
    s->inputs[1] = s->cartesian;
  } else {
    s->inputs[0] = pos[0];
    s->inputs[1] = pos[1];
    s->inputs[2] = pos[2];
  }
  s->asbuilt_path = s->inputs[s->cartesian ? 0 : 1];
  s->input_path = s->cartesian ? s->cartesian : s->inputs[2];
  return 0;
}

/* The command line into s: 0, or the exit status of a usage error;
 * s->help_shown after -h. */
static int parse_options(int argc, char **argv, comp_settings *s)
{
  int opt, status;
  comp_settings_init(s);
  optind = 0;
  opterr = 0;
  while ((opt = getopt_long(argc, argv, ":o:fh", compensate_longopts, NULL)) != -1)
    if ((status = take_option(s, opt, optarg, argv)) != 0 || s->help_shown)
      return status;
  return take_operands(s, argc - optind, argv + optind);
}

/* The output checked against the inputs and what exists, before any work. */
static int check_output(comp_settings *s)
{
  static const char *const names[1] = { "--output" };
  return cli_outputs_check("compensate", &s->output, names, 1, s->force, s->inputs);
}

/* What a run reads and makes; comp_job_free releases it. */
typedef struct comp_job {
  twf_model *nominal;            /* NULL with --cartesian */
  twf_model *asbuilt;
  twf_model *goal_model;         /* --cartesian: the as-built model with a flange target */
  twf_campaign *input;           /* the program or the goals */
  size_t n_rows;
  twf_ik_result *res;            /* per row */
  double *qout;                  /* per row: the compensated joint values, SI */
  twf_compensate_summary sum;
  twf_length_unit lu;            /* of the input file */
  twf_angle_unit au;
  twf_warnings warnings;
  int warned;                    /* the readers' warnings are printed */
  twf_error err;
} comp_job;

static void comp_job_init(comp_job *j)
{
  memset(j, 0, sizeof *j);
  twf_warnings_init(&j->warnings);
  twf_error_clear(&j->err);
}

static void comp_job_free(comp_job *j)
{
  free(j->res);
  free(j->qout);
  twf_campaign_free(j->input);
  twf_model_free(j->goal_model);
  twf_model_free(j->asbuilt);
  twf_model_free(j->nominal);
  twf_warnings_clear(&j->warnings);
}

/* The library's error in j->err reported, after the readers' warnings
 * (unless printed already) and with a hint for a goal the arm cannot
 * meet; returns the exit status. */
static int report_failure(const comp_settings *s, comp_job *j)
{
  if (!j->warned)
    cli_print_warnings(&j->warnings);
  if (j->err.status == TWF_ERR_DEGENERATE && s->cartesian == NULL)
    snprintf(j->err.hint, sizeof j->err.hint, "match one target's position with --point T");
  else if (j->err.status == TWF_ERR_DEGENERATE)
    snprintf(j->err.hint, sizeof j->err.hint, "leave out the quaternion: the row then asks for the position only");
  return cli_report_error(&j->err);
}

/* Out of memory, said after the readers' warnings; returns the exit
 * status. */
static int report_nomem(const comp_settings *s, comp_job *j)
{
  twf_error_set(&j->err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
  return report_failure(s, j);
}

/* NOMINAL (not with --cartesian) and ASBUILT, with the same joints. */
static int read_models(const comp_settings *s, comp_job *j)
{
  if (s->cartesian == NULL) {
    j->nominal = twf_model_read_with(s->inputs[0], &s->ropt, &j->warnings, NULL, &j->err);
    if (j->nominal == NULL)
      return report_failure(s, j);
  }
  j->asbuilt = twf_model_read_with(s->asbuilt_path, &s->ropt, &j->warnings, NULL, &j->err);
  if (j->asbuilt == NULL)
    return report_failure(s, j);
  if (j->nominal != NULL &&
      twf_models_same_joints(j->nominal, j->asbuilt, s->inputs[0], s->inputs[1], &j->err) != TWF_OK)
    return report_failure(s, j);
  return 0;
}

/* The program (read with NOMINAL's joints) or the Cartesian goals (read
 * with the as-built model and its flange target); then the readers'
 * warnings. */
static int read_input(const comp_settings *s, comp_job *j)
{
  if (s->cartesian == NULL) {
    j->input = twf_campaign_read_joints(s->inputs[2], j->nominal, &s->copt, &j->warnings, &j->err);
  } else {
    j->goal_model = with_flange_target(j->asbuilt);
    if (j->goal_model == NULL)
      return report_nomem(s, j);
    j->input = twf_campaign_read(s->cartesian, j->goal_model, &s->copt, &j->warnings, &j->err);
  }
  if (j->input == NULL)
    return report_failure(s, j);
  cli_print_warnings(&j->warnings);
  j->warned = 1;
  return 0;
}

/* The load: --payload, or the input's payload column (one for all rows),
 * into s->co.ik.payload. */
static int settle_payload(comp_settings *s, const comp_job *j)
{
  const twf_campaign *input = j->input;
  const twf_model *named = s->cartesian ? j->goal_model : j->nominal;
  long first;
  size_t k;
  int status;
  if ((status = cli_payload_resolve("compensate", j->asbuilt, s->payload_name, &s->co.ik.payload)) != 0)
    return status;
  if (input->pose_payload == NULL)
    return 0;
  first = twf_campaign_payload(input, 0);
  if (s->payload_name != NULL)
    return cli_usage_error("compensate", "%s names the payload of its rows: leave out --payload", s->input_path);
  for (k = 1; k < input->n_poses; k++)
    if (twf_campaign_payload(input, k) != first)
      return cli_usage_error("compensate", "%s names more than one payload: compensate one program "
                             "per load", s->input_path);
  s->co.ik.payload = first >= 0 ? twf_model_payload_index(j->asbuilt, named->payloads[first].name) : -1;
  if (first >= 0 && s->co.ik.payload < 0)
    return cli_usage_error("compensate", "the as-built model does not declare the payload '%s'",
                           named->payloads[first].name);
  return 0;
}

/* The input's units, the tolerances given in them and --point, into
 * s->co. */
static int take_tolerances(comp_settings *s, comp_job *j)
{
  int status;
  declared_units(s->input_path, &s->copt, &j->lu, &j->au);
  if (s->tol_pos != NULL &&
      (status = cli_parse_tolerance("compensate", "--tol-position", s->tol_pos, twf_length_unit_si(j->lu),
                                    &s->co.ik.tol_position_m)) != 0)
    return status;
  if (s->tol_ang != NULL &&
      (status = cli_parse_tolerance("compensate", "--tol-angle", s->tol_ang, twf_angle_unit_si(j->au),
                                    &s->co.ik.tol_angle_rad)) != 0)
    return status;
  if (s->point != NULL) {
    s->co.kind = TWF_IK_POINT;
    s->co.target = s->point;
  }
  return 0;
}

/* Every input read and checked, the options completed in the input's
 * units. */
static int load_inputs(comp_settings *s, comp_job *j)
{
  int status;
  if ((status = read_models(s, j)) != 0 || (status = read_input(s, j)) != 0 ||
      (status = settle_payload(s, j)) != 0 || (status = take_tolerances(s, j)) != 0)
    return status;
  return 0;
}

/* Room for the result and the joint values of every row. */
static int alloc_rows(const comp_settings *s, comp_job *j)
{
  j->n_rows = s->cartesian ? j->input->n_meas : j->input->n_poses;
  j->res = calloc(j->n_rows ? j->n_rows : 1, sizeof *j->res);
  j->qout = calloc((j->n_rows ? j->n_rows : 1) * j->asbuilt->n_joints, sizeof *j->qout);
  return j->res == NULL || j->qout == NULL ? report_nomem(s, j) : 0;
}

/* Each row of the program on the as-built arm; an error names the row's
 * line in the program. */
static int compensate_program(const comp_settings *s, comp_job *j)
{
  const twf_campaign *input = j->input;
  if (twf_compensate_program(j->nominal, j->asbuilt, input->q, input->n_poses, &s->co, j->qout, j->res, &j->sum,
                             &j->err) != TWF_OK) {
    if (j->err.line > 0) {
      /* the row's line in the program */
      j->err.line = input->pose_lines[j->err.line - 1];
      snprintf(j->err.file, sizeof j->err.file, "%s", s->inputs[2]);
    }
    return report_failure(s, j);
  }
  return 0;
}

/* The goal of Cartesian row r in the as-built base frame. */
static void goal_of_row(const comp_job *j, size_t r, twf_ik_goal *g)
{
  const twf_campaign *input = j->input;
  const twf_measurement *ms = &input->meas[r];
  g->kind = ms->has_orientation ? TWF_IK_POSE : TWF_IK_POINT;
  if (ms->has_orientation) {
    twf_quat_to_rot(twf_campaign_meas_quat(input, r), g->R);
  } else {
    /* no orientation given: the seed's orientation is the reference of
     * the reported angle */
    twf_pose T;
    twf_model_fk(j->asbuilt, input->q + ms->pose * j->asbuilt->n_joints, NULL, &T);
    memcpy(g->R, T.R, sizeof g->R);
  }
  memcpy(g->p, ms->pos, sizeof g->p);
  memcpy(g->point, j->goal_model->targets[ms->target].offset, sizeof g->point);
}

/* Cartesian row r solved from its seed: TWF_OK, or the error in j->err
 * (at the row's line of the goal file). */
static twf_status solve_goal_row(const comp_settings *s, comp_job *j, twf_ik *w, size_t r)
{
  const twf_measurement *ms = &j->input->meas[r];
  const twf_target *t = &j->goal_model->targets[ms->target];
  size_t n = j->asbuilt->n_joints;
  twf_ik_goal g;
  goal_of_row(j, r, &g);
  if (!t->offset_known)
    return twf_error_set(&j->err, TWF_ERR_MISSING, s->cartesian, ms->line, 0,
                         "give the target an offset in the as-built model, or use 'flange'",
                         "target %s has no offset in the as-built model", t->name);
  if (twf_ik_solve(w, j->asbuilt, &g, j->input->q + ms->pose * n, &s->co.ik, j->qout + r * n, &j->res[r],
                   &j->err) != TWF_OK) {
    snprintf(j->err.file, sizeof j->err.file, "%s", s->cartesian);
    j->err.line = ms->line;
    return j->err.status;
  }
  return TWF_OK;
}

/* --cartesian: inverse kinematics of the as-built arm for every goal, and
 * the summary over the rows. */
static int solve_goals(const comp_settings *s, comp_job *j)
{
  twf_ik *w = twf_ik_alloc(j->asbuilt->n_joints);
  size_t r;
  if (w == NULL)
    return report_nomem(s, j);
  for (r = 0; r < j->input->n_meas; r++)
    if (solve_goal_row(s, j, w, r) != TWF_OK) {
      twf_ik_free(w);
      return report_failure(s, j);
    }
  twf_ik_free(w);
  twf_compensate_summarize(j->asbuilt, j->res, j->input->n_meas, &j->sum);
  return 0;
}

/* The joint values of every row (program or goals) and their summary. */
static int compensate(const comp_settings *s, comp_job *j)
{
  int status;
  if ((status = alloc_rows(s, j)) != 0)
    return status;
  return s->cartesian == NULL ? compensate_program(s, j) : solve_goals(s, j);
}

/* What the CSV and the summary show of a run. */
static void compensate_view(const comp_settings *s, const comp_job *j, comp_out *out)
{
  memset(out, 0, sizeof *out);
  out->model = j->asbuilt;
  out->input = j->input;
  out->goal_model = j->goal_model;
  out->cartesian = s->cartesian != NULL;
  out->n_rows = j->n_rows;
  out->q = j->qout;
  out->res = j->res;
  out->lu = j->lu;
  out->au = j->au;
  out->nominal_path = s->inputs[0];
  out->asbuilt_path = s->asbuilt_path;
  out->input_path = s->input_path;
  out->point = s->point;
}

/* The CSV to -o FILE (atomically) or standard output. */
static int write_compensated(const comp_settings *s, comp_out *out)
{
  cli_put put;
  put.path = s->output != NULL ? s->output : "-";
  put.put = put_compensated;
  put.ctx = out;
  return cli_write_outputs(&put, 1, s->force, s->inputs);
}

static int run_compensate(int argc, char **argv)
{
  comp_settings s;
  comp_job j;
  comp_out out;
  int status;

  if ((status = parse_options(argc, argv, &s)) != 0 || s.help_shown)
    return status;
  if ((status = check_output(&s)) != 0)
    return status;
  comp_job_init(&j);
  if ((status = load_inputs(&s, &j)) == 0 && (status = compensate(&s, &j)) == 0) {
    compensate_view(&s, &j, &out);
    status = write_compensated(&s, &out);
    if (status == TWF_EXIT_OK) {
      print_summary(&j.sum, &out, s.allow);
      if (j.sum.n_flagged > 0 && !s.allow)
        status = TWF_EXIT_REJECTED;
    }
  }
  comp_job_free(&j);
  return status;
}

const cli_command cli_cmd_compensate = {
  "compensate", run_compensate, "compensate a joint program for the as-built arm (CSV)", compensate_help
};
