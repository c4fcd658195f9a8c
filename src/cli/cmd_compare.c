/* cmd_compare.c: `twistfit compare A B`: how far apart two models of one
 * arm put the tool points and flange orientations over the workspace
 * (nominal against as-built, or as-built models of two dates), with an
 * optional acceptance verdict. Figures come from twf_compare_models. */
#define _GNU_SOURCE
#include "config.h"
#include "cli.h"

#include <errno.h>
#include <getopt.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

static const char compare_help[] =
  "Usage: twistfit compare [OPTIONS] A B\n"
  "\n"
  "Compare two models of the same arm (nominal and as-built, or as-built models\n"
  "of two dates) over configurations: random ones within A's joint limits\n"
  "(--count, --seed) or the rows of a joints file (--joints). Reports the mean,\n"
  "RMS, 95th percentile and maximum distance between the tool points that A and\n"
  "B predict (each target with an offset in both, else the flange origin) and\n"
  "of the angle between their flange orientations, per tool point and overall,\n"
  "and the worst configuration. By default B's base frame is first aligned to\n"
  "A's by the best rigid fit of the predicted tool points (two as-built models\n"
  "of different dates live in different base frames); --no-align compares in\n"
  "the frames as written. Then, link by link, the intrinsic link parameters\n"
  "(DH a, alpha, d, theta or Hayati's beta, in A's forms) of A and B and their\n"
  "differences. Lengths and angles in A's units.\n"
  "\n"
  "Options:\n"
  "      --joints FILE       configurations from a joints file (pose id and one\n"
  "                          column per joint, as fk reads it)\n"
  "      --count N           random configurations (default 1000)\n"
  "      --seed N            seed of the random configurations (default 1)\n"
  "      --length-unit U     unit of prismatic joint values in FILE (default: as\n"
  "                          the file declares, else mm)\n"
  "      --angle-unit U      unit of revolute joint values in FILE (default: as\n"
  "                          the file declares, else deg)\n"
  "      --no-align          compare in the frames as written\n"
  "      --full-pose         the models come from 6-D data: the flange link is\n"
  "                          determined (default: points only, the targets\n"
  "                          absorb it, and the table says so)\n"
  "      --tol-rms X         acceptance: RMS distance at most X (length unit)\n"
  "      --tol-max X         acceptance: largest distance at most X\n"
  "      --tol-angle-max X   acceptance: largest angle at most X (angle unit);\n"
  "                          exit status 1 when a tolerance is exceeded\n"
  "      --json FILE         write the figures as JSON ('-' for standard output,\n"
  "                          then the text report goes to standard error)\n"
  "      --payload NAME      the load both arms carry ([payload NAME]): models with\n"
  "                          compliances deflect under it (default: none)\n"
  "  -f, --force             replace an output file that exists\n"
  CLI_URDF_HELP
  "  -h, --help              show this help\n";

enum {
  OPT_JOINTS = CLI_OPT_FIRST_FREE, OPT_COUNT, OPT_SEED, OPT_LENGTH_UNIT, OPT_ANGLE_UNIT, OPT_NO_ALIGN,
  OPT_TOL_RMS, OPT_TOL_MAX, OPT_TOL_ANGLE, OPT_JSON, OPT_FULL_POSE, OPT_PAYLOAD
};

typedef struct tolerance {
  const char *name;
  double limit; /* SI; 0 = not set */
  double value;
  int is_angle;
} tolerance;

static const char *point_name(const twf_compare_result *r, const twf_model *a, size_t k)
{
  return r->point_target[k] >= 0 ? a->targets[r->point_target[k]].name : "flange origin";
}

static void config_id(const twf_campaign *joints, size_t c, char *buf, size_t n)
{
  if (joints != NULL)
    snprintf(buf, n, "%s", joints->pose_ids[c]);
  else
    snprintf(buf, n, "R%04zu", c + 1);
}

static void print_row(FILE *fp, const char *label, const twf_stats *s, double unit, int dec)
{
  fprintf(fp, "  %-16s %7zu %12.*f %12.*f %12.*f %12.*f\n", label, s->count, dec, s->mean / unit, dec,
          s->rms / unit, dec, s->p95 / unit, dec, s->max / unit);
}

static cli_links_table links_table(const twf_links *l, const double *diff, const twf_model *a, const cli_units *u)
{
  return cli_links_table_of(l, diff, a, u, "A", "B", "a", "b", 0);
}

static void print_links(FILE *fp, const cli_links_table *t, int full_pose)
{
  fprintf(fp, "\nLink parameters, link by link: A and B in A's forms (row k: joint k's line and the link to\n"
              "line k+1; row 0 the base, the last row the flange), %s and %s\n", t->units->length, t->units->angle);
  cli_links_print(fp, t);
  fprintf(fp, "  notes: %s; standard deviations: none (a model file carries no covariance)\n",
          full_pose ? "the models come from 6-D data (--full-pose)"
                    : "points-only calibration assumed: the targets absorb the flange link (--full-pose if not)");
}

/* What the report of one comparison shows (text and JSON). */
typedef struct compare_view {
  const char *const *inputs;     /* model A, model B */
  const twf_model *a, *b;
  const twf_campaign *joints;    /* the --joints file's configurations, or NULL */
  const char *joints_path;
  unsigned long long seed;       /* of the random configurations */
  size_t n_cfg;
  const double *q;               /* n_cfg x n_joints */
  const twf_compare_result *res;
  const twf_links *links;
  const double *ldiff;
  const tolerance *tol;          /* 3 */
  int rejected, full_pose;
  const cli_units *u;
} compare_view;

/* The text report of a comparison. */
static void print_compare(FILE *txt, const compare_view *v)
{
  const cli_units *u = v->u;
  size_t k;
  int i;
  char id[TWF_NAME_MAX];
  size_t wc = v->res->worst_config, j;
  double qa[4];
  fprintf(txt, "twistfit %s compare\n", twf_version());
  fprintf(txt, "model A: %s (%s, %zu joints)\n", v->inputs[0], v->a->name, v->a->n_joints);
  fprintf(txt, "model B: %s (%s)\n", v->inputs[1], v->b->name);
  if (v->joints != NULL)
    fprintf(txt, "configurations: %zu, the rows of %s\n", v->n_cfg, v->joints_path);
  else
    fprintf(txt, "configurations: %zu, uniformly random within A's joint limits (seed %llu)\n", v->n_cfg, v->seed);
  fprintf(txt, "tool points:");
  for (k = 0; k < v->res->n_points; k++)
    fprintf(txt, "%s %s", k ? "," : "", point_name(v->res, v->a, k));
  fprintf(txt, v->res->point_target[0] < 0 ? " (no target has an offset in both models)\n"
                                        : " (the targets with an offset in both models)\n");
  if (v->res->aligned) {
    double w[3];
    twf_so3_log(v->res->b_to_a.R, w);
    twf_rot_to_quat(v->res->b_to_a.R, qa);
    fprintf(txt, "frames: B aligned to A by the best rigid fit of the predicted tool points: rotation %.*f %s, "
                 "translation %.*f %s (quaternion_wxyz %.9f %.9f %.9f %.9f, position %.*f %.*f %.*f)\n",
            u->adec, sqrt(w[0] * w[0] + w[1] * w[1] + w[2] * w[2]) / u->angle_si, u->angle, u->ldec,
            sqrt(v->res->b_to_a.p[0] * v->res->b_to_a.p[0] + v->res->b_to_a.p[1] * v->res->b_to_a.p[1] +
                 v->res->b_to_a.p[2] * v->res->b_to_a.p[2]) / u->length_si,
            u->length, qa[0], qa[1], qa[2], qa[3], u->ldec, v->res->b_to_a.p[0] / u->length_si, u->ldec,
            v->res->b_to_a.p[1] / u->length_si, u->ldec, v->res->b_to_a.p[2] / u->length_si);
  } else {
    fprintf(txt, "frames: as written (no alignment)\n");
  }
  fputc('\n', txt);
  fprintf(txt, "Effect in the workspace: A against %sB\n", v->res->aligned ? "aligned " : "");
  fprintf(txt, "  distance between the tool points, %s\n", u->length);
  fprintf(txt, "  %-16s %7s %12s %12s %12s %12s\n", "point", "count", "mean", "rms", "p95", "max");
  print_row(txt, "all", &v->res->position, u->length_si, u->ldec);
  if (v->res->n_points > 1)
    for (k = 0; k < v->res->n_points; k++)
      print_row(txt, point_name(v->res, v->a, k), &v->res->point_position[k], u->length_si, u->ldec);
  fprintf(txt, "  angle between the flange orientations, %s\n", u->angle);
  print_row(txt, "flange", &v->res->angle, u->angle_si, u->adec);
  config_id(v->joints, wc, id, sizeof id);
  fprintf(txt, "worst configuration: %s: distance %.*f %s at %s, angle %.*f %s; joints (%s, %s):", id, u->ldec,
          v->res->position.max / u->length_si, u->length, point_name(v->res, v->a, v->res->worst_point), u->adec,
          v->res->worst_angle_rad / u->angle_si, u->angle, u->angle, u->length);
  for (j = 0; j < v->a->n_joints; j++)
    fprintf(txt, " %s %.6g", v->a->joints[j].name,
            v->q[wc * v->a->n_joints + j] / (v->a->joints[j].type == TWF_JOINT_PRISMATIC ? u->length_si : u->angle_si));
  fputc('\n', txt);
  config_id(v->joints, v->res->angle.max_index, id, sizeof id);
  fprintf(txt, "largest angle: %.*f %s at %s\n", u->adec, v->res->angle.max / u->angle_si, u->angle, id);
  {
    cli_links_table lt = links_table(v->links, v->ldiff, v->a, u);
    print_links(txt, &lt, v->full_pose);
  }
  {
    int any = 0;
    for (i = 0; i < 3; i++)
      any |= v->tol[i].limit > 0;
    if (any) {
      fprintf(txt, "\nAcceptance:\n");
      for (i = 0; i < 3; i++)
        if (v->tol[i].limit > 0)
          fprintf(txt, "  %-10s %12.*f %s  limit %12.*f  %s\n", v->tol[i].name, v->tol[i].is_angle ? u->adec : u->ldec,
                  v->tol[i].value / (v->tol[i].is_angle ? u->angle_si : u->length_si), v->tol[i].is_angle ? u->angle : u->length,
                  v->tol[i].is_angle ? u->adec : u->ldec, v->tol[i].limit / (v->tol[i].is_angle ? u->angle_si : u->length_si),
                  v->tol[i].value <= v->tol[i].limit ? "pass" : "FAIL");
      fprintf(txt, "verdict: %s\n", v->rejected ? "REJECTED" : "ACCEPTED");
    }
  }
}

/* The JSON report of a comparison (caller owns it). */
static json_t *compare_json(const compare_view *v)
{
  const cli_units *u = v->u;
  json_t *root;
  size_t k;
  int i;
  json_t *pts = json_object(), *tols = json_object(), *wj = json_array();
  char id[TWF_NAME_MAX];
  size_t j, wc = v->res->worst_config;
  root = json_object();
  json_object_set_new(root, "tool", json_pack("{s:s, s:s}", "name", "twistfit", "version", twf_version()));
  json_object_set_new(root, "command", json_string("compare"));
  json_object_set_new(root, "units", json_pack("{s:s, s:s}", "length", u->length, "angle", u->angle));
  json_object_set_new(root, "models", json_pack("{s:s, s:s}", "a", v->inputs[0], "b", v->inputs[1]));
  json_object_set_new(root, "configurations",
                      v->joints != NULL
                          ? json_pack("{s:s, s:s, s:I}", "source", "joints", "file", v->joints_path, "count",
                                      (json_int_t)v->n_cfg)
                          : json_pack("{s:s, s:I, s:I}", "source", "random", "seed", (json_int_t)v->seed, "count",
                                      (json_int_t)v->n_cfg));
  json_object_set_new(root, "alignment",
                      json_pack("{s:b, s:o}", "aligned", v->res->aligned, "b_to_a", cli_json_pose(&v->res->b_to_a, u)));
  for (k = 0; k < v->res->n_points; k++)
    json_object_set_new(pts, point_name(v->res, v->a, k), cli_json_stats(&v->res->point_position[k], u->length_si));
  json_object_set_new(root, "position", cli_json_stats(&v->res->position, u->length_si));
  json_object_set_new(root, "points", pts);
  json_object_set_new(root, "orientation", cli_json_stats(&v->res->angle, u->angle_si));
  for (j = 0; j < v->a->n_joints; j++)
    json_array_append_new(
        wj, cli_json_number(v->q[wc * v->a->n_joints + j] /
                            (v->a->joints[j].type == TWF_JOINT_PRISMATIC ? u->length_si : u->angle_si)));
  config_id(v->joints, wc, id, sizeof id);
  json_object_set_new(root, "worst",
                      json_pack("{s:s, s:I, s:s, s:o, s:o, s:o}", "configuration", id, "index", (json_int_t)wc,
                                "point", point_name(v->res, v->a, v->res->worst_point), "distance",
                                cli_json_number(v->res->position.max / u->length_si), "angle",
                                cli_json_number(v->res->worst_angle_rad / u->angle_si), "joints", wj));
  {
    cli_links_table lt = links_table(v->links, v->ldiff, v->a, u);
    json_t *lj = cli_links_json(&lt);
    json_object_set_new(lj, "forms_from", json_string("a"));
    json_object_set_new(root, "links", lj);
  }
  for (i = 0; i < 3; i++)
    if (v->tol[i].limit > 0)
      json_object_set_new(tols, v->tol[i].name,
                          json_pack("{s:o, s:o, s:b}", "limit",
                                    cli_json_number(v->tol[i].limit / (v->tol[i].is_angle ? u->angle_si : u->length_si)),
                                    "value",
                                    cli_json_number(v->tol[i].value / (v->tol[i].is_angle ? u->angle_si : u->length_si)),
                                    "pass", v->tol[i].value <= v->tol[i].limit));
  json_object_set_new(root, "acceptance",
                      json_pack("{s:o, s:s}", "tolerances", tols, "verdict",
                                json_object_size(tols) == 0 ? "none"
                                : v->rejected ? "rejected" : "accepted"));
  return root;
}

static const struct option compare_longopts[] = {
  { "joints", required_argument, NULL, OPT_JOINTS },
  { "count", required_argument, NULL, OPT_COUNT },
  { "seed", required_argument, NULL, OPT_SEED },
  { "length-unit", required_argument, NULL, OPT_LENGTH_UNIT },
  { "angle-unit", required_argument, NULL, OPT_ANGLE_UNIT },
  { "no-align", no_argument, NULL, OPT_NO_ALIGN },
  { "full-pose", no_argument, NULL, OPT_FULL_POSE },
  { "tol-rms", required_argument, NULL, OPT_TOL_RMS },
  { "tol-max", required_argument, NULL, OPT_TOL_MAX },
  { "tol-angle-max", required_argument, NULL, OPT_TOL_ANGLE },
  { "json", required_argument, NULL, OPT_JSON },
  { "payload", required_argument, NULL, OPT_PAYLOAD },
  { "force", no_argument, NULL, 'f' },
  CLI_URDF_LONGOPTS,
  { "help", no_argument, NULL, 'h' },
  { NULL, 0, NULL, 0 }
};

/* The command's settings as the options give them. The tolerances stay
 * text until model A's units are known. Filled in place: ropt points to
 * the names kept in urdf_links. */
typedef struct compare_settings {
  const char *joints_path;      /* --joints, or NULL: random configurations */
  const char *json_path;        /* --json, or NULL */
  const char *tol_text[3];      /* --tol-rms, --tol-max, --tol-angle-max as typed */
  const char *inputs[4];        /* model A, model B, the joints file, NULL */
  unsigned long long seed;      /* --seed */
  long count;                   /* --count */
  int have_count, have_seed;    /* given on the command line */
  int full_pose, force;
  int help_shown;               /* -h: the help is printed, nothing else to do */
  twf_campaign_options copt;
  twf_compare_options co;       /* --no-align, --payload */
  twf_read_options ropt;
  cli_urdf_links urdf_links;    /* the --target-link names that ropt points to */
} compare_settings;

static void compare_settings_init(compare_settings *s)
{
  memset(s, 0, sizeof *s);
  s->seed = 1;
  s->count = 1000;
  s->copt = twf_campaign_default_options();
  s->co = twf_compare_default_options();
  s->ropt = twf_read_default_options();
  s->urdf_links = (cli_urdf_links){ { NULL }, 0 };
}

static int parse_count(compare_settings *s, const char *arg)
{
  char *end;
  errno = 0;
  s->count = strtol(arg, &end, 10);
  if (*arg == '\0' || *end != '\0' || errno != 0 || s->count < 1 || s->count > 10000000)
    return cli_usage_error("compare", "--count takes a number of configurations from 1 to 10000000");
  s->have_count = 1;
  return 0;
}

static int parse_seed(compare_settings *s, const char *arg)
{
  char *end;
  errno = 0;
  s->seed = strtoull(arg, &end, 10);
  if (*arg == '\0' || *arg == '-' || *end != '\0' || errno != 0)
    return cli_usage_error("compare", "--seed takes a non-negative whole number");
  s->have_seed = 1;
  return 0;
}

/* One option of getopt_long into s: 0, or the exit status of a bad one. */
static int take_option(compare_settings *s, int opt, char *arg, char **argv)
{
  int status;
  switch (opt) {
  case OPT_JOINTS: s->joints_path = arg; break;
  case OPT_COUNT: return parse_count(s, arg);
  case OPT_SEED: return parse_seed(s, arg);
  case OPT_LENGTH_UNIT:
    if ((status = cli_parse_length_unit("compare", arg, &s->copt.length_unit)) != 0)
      return status;
    s->copt.length_from_caller = 1;
    break;
  case OPT_ANGLE_UNIT:
    if ((status = cli_parse_angle_unit("compare", arg, &s->copt.angle_unit)) != 0)
      return status;
    s->copt.angle_from_caller = 1;
    break;
  case OPT_NO_ALIGN: s->co.align = 0; break;
  case OPT_FULL_POSE: s->full_pose = 1; break;
  case OPT_TOL_RMS: s->tol_text[0] = arg; break;
  case OPT_TOL_MAX: s->tol_text[1] = arg; break;
  case OPT_TOL_ANGLE: s->tol_text[2] = arg; break;
  case OPT_JSON: s->json_path = arg; break;
  case OPT_PAYLOAD: s->co.payload = arg; break;
  case 'f': s->force = 1; break;
  case CLI_OPT_BASE_LINK:
  case CLI_OPT_TIP_LINK:
  case CLI_OPT_TARGET_LINK: return cli_urdf_longopt("compare", opt, arg, &s->urdf_links, &s->ropt);
  case 'h': fputs(compare_help, stdout); s->help_shown = 1; break;
  default: return cli_bad_option("compare", opt, argv);
  }
  return 0;
}

/* The operands after the options: models A and B; --joints excludes
 * --count and --seed. */
static int take_operands(compare_settings *s, int n_pos, char **pos)
{
  if (n_pos != 2)
    return cli_usage_error("compare", "expected two models, A and B");
  if (s->joints_path != NULL && (s->have_count || s->have_seed))
    return cli_usage_error("compare", "--joints gives the configurations: --count and --seed do not apply");
  s->inputs[0] = pos[0];
  s->inputs[1] = pos[1];
  s->inputs[2] = s->joints_path;
  return 0;
}

/* The command line into s: 0, or the exit status of a usage error;
 * s->help_shown after -h. */
static int parse_options(int argc, char **argv, compare_settings *s)
{
  int opt, status;
  compare_settings_init(s);
  optind = 0;
  opterr = 0;
  while ((opt = getopt_long(argc, argv, ":fh", compare_longopts, NULL)) != -1)
    if ((status = take_option(s, opt, optarg, argv)) != 0 || s->help_shown)
      return status;
  return take_operands(s, argc - optind, argv + optind);
}

/* The --json output checked against the inputs and what exists, before
 * any work. */
static int check_output(compare_settings *s)
{
  static const char *const names[1] = { "--json" };
  return cli_outputs_check("compare", &s->json_path, names, 1, s->force, s->inputs);
}

/* What a run reads and makes; compare_job_free releases it. */
typedef struct compare_job {
  twf_model *a, *b;
  twf_campaign *joints;          /* the --joints file, or NULL */
  double *q;                     /* n_cfg x n_joints: joints->q, or the random ones (owned) */
  size_t n_cfg;
  cli_units u;                   /* model A's */
  tolerance tol[3];              /* rms, max, angle-max */
  twf_compare_result *res;
  twf_links links;
  double *ldiff;                 /* 5 per link row: B - A, SI */
  int rejected;                  /* a tolerance is exceeded */
  twf_warnings warnings;
  twf_error err;
} compare_job;

static void compare_job_init(compare_job *j)
{
  static const tolerance tol[3] = { { "rms", 0, 0, 0 }, { "max", 0, 0, 0 }, { "angle-max", 0, 0, 1 } };
  memset(j, 0, sizeof *j);
  memcpy(j->tol, tol, sizeof j->tol);
  twf_warnings_init(&j->warnings);
  twf_error_clear(&j->err);
}

static void compare_job_free(compare_job *j)
{
  twf_links_clear(&j->links);
  free(j->ldiff);
  twf_compare_result_free(j->res);
  if (j->joints == NULL)
    free(j->q);
  twf_campaign_free(j->joints);
  twf_model_free(j->a);
  twf_model_free(j->b);
  twf_warnings_clear(&j->warnings);
}

/* The library's error in j->err reported, after the readers' warnings
 * (none left once load_inputs has printed them); returns the exit status. */
static int report_failure(compare_job *j)
{
  cli_print_warnings(&j->warnings);
  return cli_report_error(&j->err);
}

/* Models A and B, with the same joints. */
static int read_models(const compare_settings *s, compare_job *j)
{
  if ((j->a = twf_model_read_with(s->inputs[0], &s->ropt, &j->warnings, NULL, &j->err)) == NULL ||
      (j->b = twf_model_read_with(s->inputs[1], &s->ropt, &j->warnings, NULL, &j->err)) == NULL)
    return report_failure(j);
  if (twf_models_same_joints(j->a, j->b, s->inputs[0], s->inputs[1], &j->err) != TWF_OK)
    return report_failure(j);
  return 0;
}

/* --payload must name a load of A or of B; when neither declares it, the
 * error lists A's payloads. */
static int check_payload(const compare_settings *s, const compare_job *j)
{
  long dummy;
  if (s->co.payload != NULL && twf_model_payload_index(j->a, s->co.payload) < 0 &&
      twf_model_payload_index(j->b, s->co.payload) < 0)
    return cli_payload_resolve("compare", j->a, s->co.payload, &dummy);
  return 0;
}

/* A's units, and the tolerances given in them. */
static int take_tolerances(const compare_settings *s, compare_job *j)
{
  static const char *const tol_opt[3] = { "--tol-rms", "--tol-max", "--tol-angle-max" };
  tolerance *tol = j->tol;
  int status, i;
  cli_units_of(&j->u, j->a);
  for (i = 0; i < 3; i++)
    if (s->tol_text[i] != NULL &&
        (status = cli_parse_tolerance("compare", tol_opt[i], s->tol_text[i],
                                      tol[i].is_angle ? j->u.angle_si : j->u.length_si, &tol[i].limit)) != 0)
      return status;
  return 0;
}

/* The configurations: the rows of the --joints file (read with A's
 * joints), else --count random ones within A's limits from --seed. */
static int make_configurations(const compare_settings *s, compare_job *j)
{
  const twf_model *a = j->a;
  unsigned long long state = s->seed;
  size_t c;
  if (s->joints_path != NULL) {
    if ((j->joints = twf_campaign_read_joints(s->joints_path, a, &s->copt, &j->warnings, &j->err)) == NULL)
      return report_failure(j);
    j->n_cfg = j->joints->n_poses;
    j->q = j->joints->q;
    return 0;
  }
  j->n_cfg = (size_t)s->count;
  j->q = malloc(j->n_cfg * (a->n_joints ? a->n_joints : 1) * sizeof *j->q);
  if (j->q == NULL) {
    twf_error_set(&j->err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    return report_failure(j);
  }
  for (c = 0; c < j->n_cfg; c++)
    twf_simulate_joints(a, 0.0, &state, j->q + c * a->n_joints);
  return 0;
}

/* Every input read and checked; the readers' warnings printed as soon as
 * their files are read (before an error about the options that follow:
 * a warning such as URDF link options given for a model file may be its
 * cause) and dropped, so that a later failure does not repeat them. */
static int load_inputs(const compare_settings *s, compare_job *j)
{
  int status;
  if ((status = read_models(s, j)) != 0)
    return status;
  cli_print_warnings(&j->warnings);
  twf_warnings_clear(&j->warnings);
  if ((status = check_payload(s, j)) != 0 || (status = take_tolerances(s, j)) != 0 ||
      (status = make_configurations(s, j)) != 0)
    return status;
  cli_print_warnings(&j->warnings);
  twf_warnings_clear(&j->warnings);
  return 0;
}

/* A against B over the configurations, and link by link. */
static int compare(const compare_settings *s, compare_job *j)
{
  if (twf_compare_models(j->a, j->b, j->q, j->n_cfg, &s->co, &j->res, &j->err) != TWF_OK) {
    if (j->err.status == TWF_ERR_DEGENERATE)
      snprintf(j->err.hint, sizeof j->err.hint, "give more varied configurations, or pass --no-align");
    return report_failure(j);
  }
  j->ldiff = malloc(5 * (j->a->n_joints + 2) * sizeof *j->ldiff);
  if (j->ldiff == NULL)
    return cli_out_of_memory();
  if (twf_compare_links(j->a, j->b, s->full_pose, &j->links, j->ldiff, &j->err) != TWF_OK)
    return report_failure(j);
  return 0;
}

/* The figures the tolerances judge, and the verdict. */
static void judge(compare_job *j)
{
  tolerance *tol = j->tol;
  int i;
  tol[0].value = j->res->position.rms;
  tol[1].value = j->res->position.max;
  tol[2].value = j->res->angle.max;
  for (i = 0; i < 3; i++)
    if (tol[i].limit > 0 && !(tol[i].value <= tol[i].limit))
      j->rejected = 1;
}

/* What the text and JSON reports show of a run. */
static void compare_view_of(const compare_settings *s, const compare_job *j, compare_view *v)
{
  v->inputs = s->inputs;
  v->a = j->a;
  v->b = j->b;
  v->joints = j->joints;
  v->joints_path = s->joints_path;
  v->seed = s->seed;
  v->n_cfg = j->n_cfg;
  v->q = j->q;
  v->res = j->res;
  v->links = &j->links;
  v->ldiff = j->ldiff;
  v->tol = j->tol;
  v->rejected = j->rejected;
  v->full_pose = s->full_pose;
  v->u = &j->u;
}

/* The text report goes to standard error when the JSON takes standard
 * output. */
static FILE *report_stream(const compare_settings *s)
{
  return s->json_path != NULL && strcmp(s->json_path, "-") == 0 ? stderr : stdout;
}

/* --json FILE (atomically) or standard output: 0, or the exit status of a
 * failed write. */
static int write_json(const compare_settings *s, const compare_view *v)
{
  cli_put put;
  json_t *root = compare_json(v);
  int w;
  put.path = s->json_path;
  put.put = cli_put_json;
  put.ctx = root;
  w = cli_write_outputs(&put, 1, s->force, s->inputs);
  json_decref(root);
  return w;
}

static int run_compare(int argc, char **argv)
{
  compare_settings s;
  compare_job j;
  compare_view v;
  int status;

  if ((status = parse_options(argc, argv, &s)) != 0 || s.help_shown)
    return status;
  if ((status = check_output(&s)) != 0)
    return status;
  compare_job_init(&j);
  if ((status = load_inputs(&s, &j)) == 0 && (status = compare(&s, &j)) == 0) {
    judge(&j);
    status = j.rejected ? TWF_EXIT_REJECTED : TWF_EXIT_OK;
    compare_view_of(&s, &j, &v);
    print_compare(report_stream(&s), &v);
    if (s.json_path != NULL) {
      int w = write_json(&s, &v);
      if (w != 0)
        status = w;
    }
  }
  compare_job_free(&j);
  return status;
}

const cli_command cli_cmd_compare = {
  "compare", run_compare, "compare two models of one arm over the workspace", compare_help
};
