/* cmd_plan.c: `twistfit plan MODEL --count N`: choose the poses of a
 * measuring day from a candidate pool (drawn within the limits, or a file
 * of reachable poses) under the instrument's constraints, ordered for
 * travel, with the assessment of the chosen set. */
#define _GNU_SOURCE
#include "config.h"
#include "plan_cli.h"

#include <getopt.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

static const char plan_help[] =
  "Usage: twistfit plan [OPTIONS] MODEL --count N --sigma X [-o POSES.csv]\n"
  "\n"
  "Choose N poses from a candidate pool that maximise a criterion: by default\n"
  "the smallest RMS predicted position uncertainty over the workspace; D-optimal\n"
  "or the noise amplification index O4 on request. Greedy build-up, then\n"
  "exchange excursions (DETMAX). Candidates are drawn within the limits (seeded)\n"
  "or read from a joints file of poses known to be reachable, and must satisfy\n"
  "the constraints: the instrument's range, the targets' acceptance cone and\n"
  "joint-space keep-out boxes. The poses are written as a joints file in the\n"
  "controller's units (twistfit-data(5)), ordered to shorten the travel; the\n"
  "assessment of the chosen set (as twistfit assess gives it) is the report.\n"
  "Lengths in MODEL's length unit, angles in its angle unit. The same seed gives\n"
  "the same poses.\n"
  "\n"
  "Options:\n"
  "      --count N           poses to choose (required)\n"
  "  -o, --output FILE       the poses (default: standard output, the report then\n"
  "                          goes to standard error)\n"
  "      --criterion C       workspace (default), d or o4\n"
  "      --candidates N      candidates drawn within the limits (default 5000) ...\n"
  "      --pool FILE         ... or the poses of a joints file\n"
  "      --limit-margin F    fraction of each joint's travel kept clear when drawing\n"
  "                          (default 0.05)\n"
  "      --instrument [NAME=]X,Y,Z  the instrument's position in the robot base frame;\n"
  "                          repeat for several stations: each pose is measured from\n"
  "                          the first that sees it (the output gets a station column)\n"
  "      --range-min X       the nearest a target may be to it (default 0)\n"
  "      --range-max X       the farthest (default: no limit)\n"
  "      --acceptance A      half-angle of the targets' acceptance cone (default: none)\n"
  "      --target-axis X,Y,Z the direction the targets face, flange frame (default 0,0,1)\n"
  "      --keep-out J=LO:HI[,J=LO:HI...]  a joint-space box no pose may enter (joints\n"
  "                          not named are not constrained); repeat for more boxes\n"
  "      --excursions N      exchange excursions (default 60)\n"
  PCLI_MEASURE_HELP
  "      --length-unit U     unit of prismatic joints in --pool and the output\n"
  "                          (default: the pool's declaration, else MODEL's)\n"
  "      --angle-unit U      unit of revolute joints in --pool and the output\n"
  "  -f, --force             replace output files that exist\n"
  CLI_URDF_HELP
  "  -h, --help              show this help\n";

enum {
  OPT_COUNT = PCLI_OPT_FIRST_FREE, OPT_CRITERION, OPT_CANDIDATES, OPT_POOL, OPT_MARGIN, OPT_INSTRUMENT, OPT_RMIN,
  OPT_RMAX, OPT_ACCEPT, OPT_AXIS, OPT_KEEPOUT, OPT_EXCURSIONS, OPT_LUNIT, OPT_AUNIT
};

#define MAX_BOXES 16
/* Joints a keep-out box can bound (the room of its corners) */
#define BOX_JOINTS_MAX 64

/* "J=LO:HI,..." into a box (bounds in the joints' units). */
static int parse_box(const twf_model *m, const cli_units *u, const char *text, double *lo, double *hi)
{
  char buf[1024], *tok, *save = NULL;
  size_t j;
  for (j = 0; j < m->n_joints; j++) {
    lo[j] = -HUGE_VAL;
    hi[j] = HUGE_VAL;
  }
  if (strlen(text) >= sizeof buf)
    return cli_usage_error("plan", "--keep-out: the box is too long");
  strcpy(buf, text);
  for (tok = strtok_r(buf, ",", &save); tok != NULL; tok = strtok_r(NULL, ",", &save)) {
    char *eq = strchr(tok, '='), *colon = eq ? strchr(eq + 1, ':') : NULL;
    long k;
    double a, b, si;
    if (eq == NULL || colon == NULL)
      return cli_usage_error("plan", "--keep-out takes JOINT=LO:HI[,JOINT=LO:HI...], not '%s'", text);
    *eq = '\0';
    *colon = '\0';
    if ((k = twf_model_joint_index(m, tok)) < 0)
      return cli_usage_error("plan", "--keep-out: the model has no joint '%s'", tok);
    if (cli_parse_double(eq + 1, &a) != 0 || cli_parse_double(colon + 1, &b) != 0 || !(a <= b))
      return cli_usage_error("plan", "--keep-out: joint %s needs LO:HI with LO <= HI", tok);
    si = m->joints[k].type == TWF_JOINT_REVOLUTE ? u->angle_si : u->length_si;
    lo[k] = a * si;
    hi[k] = b * si;
  }
  return TWF_EXIT_OK;
}

static void print_plan(FILE *fp, const twf_plan_result *r, const twf_plan_options *o, const cli_units *u,
                       const char (*names)[TWF_NAME_MAX])
{
  fprintf(fp, "plan: %zu poses chosen from %zu candidates, %zu satisfying the constraints", r->n, r->n_candidates,
          r->n_feasible);
  if (r->n_feasible < r->n_candidates)
    fprintf(fp, " (rejected: %zu outside the limits, %zu in keep-out boxes, %zu out of range, %zu facing away)",
            r->n_rejected[0], r->n_rejected[1], r->n_rejected[2], r->n_rejected[3]);
  fputc('\n', fp);
  if (!isfinite(r->score) || (o->criterion == TWF_PLAN_O4 && !(r->score > 0)))
    fprintf(fp, "criterion %s: not defined: %zu poses do not determine the independent parameters\n",
            twf_plan_criterion_name(o->criterion), r->n);
  else if (o->criterion == TWF_PLAN_WORKSPACE)
    fprintf(fp, "criterion workspace (RMS predicted position uncertainty): %.*f %s after the greedy build-up, "
                "%.*f %s after %zu accepted excursions\n",
            u->ldec, r->score_greedy / u->length_si, u->length, u->ldec, r->score / u->length_si, u->length,
            r->exchanges);
  else
    fprintf(fp, "criterion %s: %.6g after the greedy build-up, %.6g after %zu accepted excursions\n",
            o->criterion == TWF_PLAN_D ? "D (mean log eigenvalue)" : "O4", r->score_greedy, r->score, r->exchanges);
  fprintf(fp, "travel in joint space: %.2f rad ordered (%.2f rad in the order chosen)\n", r->travel,
          r->travel_before);
  if (r->station != NULL) {
    size_t s, i, n;
    fprintf(fp, "instrument stations (each pose from the first that sees it; poses grouped by station):");
    for (s = 0; s < o->n_instruments; s++) {
      for (n = 0, i = 0; i < r->n; i++)
        n += r->station[i] == s;
      fprintf(fp, "%s %s %zu", s ? "," : "", names[s], n);
    }
    fprintf(fp, "\n  the criterion counts one base pose: the 6 base parameters of each further station\n"
                "  are not in it\n");
  }
  fputc('\n', fp);
}

/* The --instrument options: one position (one station), or several, each
 * NAME=X,Y,Z or a bare position named S1, S2, ... in the order given;
 * into po (instruments[] and station_names[] hold them). */
static int parse_instruments(const char *const *text, size_t n, const cli_units *u,
                             char station_names[][TWF_NAME_MAX], double *instruments, twf_plan_options *po)
{
  int status = TWF_EXIT_OK;
  if (n == 1 && strchr(text[0], '=') == NULL) {
    po->has_instrument = 1;
    return pcli_parse_vector("plan", "--instrument", text[0], u->length_si, po->instrument);
  }
  if (n > 0) {
    size_t k, l;
    for (k = 0; k < n; k++) {
      const char *eq = strchr(text[k], '='), *vec = eq ? eq + 1 : text[k];
      if (eq != NULL) {
        size_t len = (size_t)(eq - text[k]);
        if (len >= TWF_NAME_MAX)
          return cli_usage_error("plan", "--instrument: the station name is too long");
        memcpy(station_names[k], text[k], len);
        station_names[k][len] = '\0';
      } else {
        snprintf(station_names[k], TWF_NAME_MAX, "S%zu", k + 1);
      }
      if (twf_station_name_check(station_names[k]) != 0)
        return cli_usage_error("plan", "--instrument: station name '%s' is not valid (letters, digits, "
                               "'_', '-' and '.')", station_names[k]);
      for (l = 0; l < k; l++)
        if (strcmp(station_names[l], station_names[k]) == 0)
          return cli_usage_error("plan", "--instrument: station '%s' is given twice", station_names[k]);
      if ((status = pcli_parse_vector("plan", "--instrument", vec, u->length_si, instruments + 3 * k)) != 0)
        return status;
    }
    po->n_instruments = n;
    po->instruments = instruments;
  }
  return status;
}

/* The JSON of a plan (caller owns it). */
static json_t *plan_json(const twf_plan_result *res, const twf_plan_options *po, const twf_model *model,
                         const cli_units *u)
{
  json_t *pl = json_object(), *root = json_object();
  json_object_set_new(pl, "criterion", json_string(twf_plan_criterion_name(po->criterion)));
  json_object_set_new(pl, "score", cli_json_number(po->criterion == TWF_PLAN_WORKSPACE ? res->score / u->length_si
                                                                                       : res->score));
  json_object_set_new(pl, "score_greedy", cli_json_number(po->criterion == TWF_PLAN_WORKSPACE
                                                              ? res->score_greedy / u->length_si
                                                              : res->score_greedy));
  json_object_set_new(pl, "candidates", json_integer((json_int_t)res->n_candidates));
  json_object_set_new(pl, "feasible", json_integer((json_int_t)res->n_feasible));
  json_object_set_new(pl, "excursions_accepted", json_integer((json_int_t)res->exchanges));
  json_object_set_new(pl, "travel_rad", cli_json_number(res->travel));
  json_object_set_new(root, "plan", pl);
  json_object_set_new(root, "assessment", pcli_json_assessment(res->assessment, model, u));
  json_object_set_new(root, "length_unit", json_string(u->length));
  json_object_set_new(root, "angle_unit", json_string(u->angle));
  return root;
}

static const struct option plan_longopts[] = {
  PCLI_MEASURE_LONGOPTS,
  { "count", required_argument, NULL, OPT_COUNT },
  { "output", required_argument, NULL, 'o' },
  { "criterion", required_argument, NULL, OPT_CRITERION },
  { "candidates", required_argument, NULL, OPT_CANDIDATES },
  { "pool", required_argument, NULL, OPT_POOL },
  { "limit-margin", required_argument, NULL, OPT_MARGIN },
  { "instrument", required_argument, NULL, OPT_INSTRUMENT },
  { "range-min", required_argument, NULL, OPT_RMIN },
  { "range-max", required_argument, NULL, OPT_RMAX },
  { "acceptance", required_argument, NULL, OPT_ACCEPT },
  { "target-axis", required_argument, NULL, OPT_AXIS },
  { "keep-out", required_argument, NULL, OPT_KEEPOUT },
  { "excursions", required_argument, NULL, OPT_EXCURSIONS },
  { "length-unit", required_argument, NULL, OPT_LUNIT },
  { "angle-unit", required_argument, NULL, OPT_AUNIT },
  { "force", no_argument, NULL, 'f' },
  CLI_URDF_LONGOPTS,
  { "help", no_argument, NULL, 'h' },
  { NULL, 0, NULL, 0 }
};

/* The command's settings as the options give them. What is in MODEL's
 * units or names its joints (--range-min, --range-max, --acceptance,
 * --instrument, --keep-out) stays text until MODEL is read; po is
 * completed by the loading steps. */
typedef struct plan_settings {
  const char *model_path, *output, *pool_path;
  const char *rmin, *rmax, *accept, *axis;
  const char *instrument_text[TWF_STATIONS_MAX];
  size_t n_instruments;
  const char *boxes_text[MAX_BOXES];
  size_t n_boxes;
  const char *inputs[3];      /* MODEL, the pool; NULL-terminated */
  int force, have_count;
  int help_shown;             /* -h: the help is printed, nothing else to do */
  pcli_measure me;            /* the measurement options and --json; pcli_measure_free */
  twf_plan_options po;
  twf_campaign_options copt;  /* the units of --pool and of the output */
  twf_read_options ropt;
  cli_urdf_links urdf_links;  /* the --target-link names that ropt points to */
} plan_settings;

static void plan_settings_init(plan_settings *s)
{
  memset(s, 0, sizeof *s);
  pcli_measure_init(&s->me);
  s->po = twf_plan_default_options();
  s->copt = twf_campaign_default_options();
  s->ropt = twf_read_default_options();
  s->urdf_links = (cli_urdf_links){ { NULL }, 0 };
}

/* One option of getopt_long into s: 0, or the exit status of a bad one. */
static int take_option(plan_settings *s, int opt, char *arg, char **argv)
{
  int status;
  if (pcli_measure_option(&s->me, "plan", opt, arg, &status))
    return status;
  switch (opt) {
  case OPT_COUNT:
    if ((status = pcli_parse_count("plan", "--count", arg, 1, 100000, &s->po.count)) != 0)
      return status;
    s->have_count = 1;
    break;
  case 'o': s->output = arg; break;
  case OPT_CRITERION:
    if (twf_plan_criterion_parse(arg, &s->po.criterion) != TWF_OK)
      return cli_usage_error("plan", "--criterion takes workspace, d or o4, not '%s'", arg);
    break;
  case OPT_CANDIDATES:
    return pcli_parse_count("plan", "--candidates", arg, 1, 10000000, &s->po.n_candidates);
  case OPT_POOL: s->pool_path = arg; break;
  case OPT_MARGIN:
    return pcli_parse_fraction("plan", "--limit-margin", arg, 0.0, 0.45, &s->po.limit_margin);
  case OPT_INSTRUMENT:
    if (s->n_instruments == TWF_STATIONS_MAX)
      return cli_usage_error("plan", "at most %d instrument stations", TWF_STATIONS_MAX);
    s->instrument_text[s->n_instruments++] = arg;
    break;
  case OPT_RMIN: s->rmin = arg; break;
  case OPT_RMAX: s->rmax = arg; break;
  case OPT_ACCEPT: s->accept = arg; break;
  case OPT_AXIS: s->axis = arg; break;
  case OPT_KEEPOUT:
    if (s->n_boxes == MAX_BOXES)
      return cli_usage_error("plan", "at most %d --keep-out boxes", MAX_BOXES);
    s->boxes_text[s->n_boxes++] = arg;
    break;
  case OPT_EXCURSIONS:
    return pcli_parse_count("plan", "--excursions", arg, 0, 100000, &s->po.excursions);
  case OPT_LUNIT:
    if ((status = cli_parse_length_unit("plan", arg, &s->copt.length_unit)) != 0)
      return status;
    s->copt.length_from_caller = 1;
    break;
  case OPT_AUNIT:
    if ((status = cli_parse_angle_unit("plan", arg, &s->copt.angle_unit)) != 0)
      return status;
    s->copt.angle_from_caller = 1;
    break;
  case 'f': s->force = 1; break;
  case CLI_OPT_BASE_LINK:
  case CLI_OPT_TIP_LINK:
  case CLI_OPT_TARGET_LINK: return cli_urdf_longopt("plan", opt, arg, &s->urdf_links, &s->ropt);
  case 'h': fputs(plan_help, stdout); s->help_shown = 1; break;
  default: return cli_bad_option("plan", opt, argv);
  }
  return 0;
}

/* The command line into s (MODEL is the one operand): 0, or the exit
 * status of a usage error; s->help_shown after -h. s is initialised
 * first whatever happens, so pcli_measure_free(&s->me) always applies. */
static int parse_options(int argc, char **argv, plan_settings *s)
{
  int opt, status;
  plan_settings_init(s);
  optind = 0;
  opterr = 0;
  while ((opt = getopt_long(argc, argv, ":o:fh", plan_longopts, NULL)) != -1)
    if ((status = take_option(s, opt, optarg, argv)) != 0 || s->help_shown)
      return status;
  if (argc - optind != 1)
    return cli_usage_error("plan", "expected one MODEL");
  s->model_path = argv[optind];
  return 0;
}

/* The options that are required or need each other. */
static int check_settings(const plan_settings *s)
{
  const char *output = s->output;
  if (!s->have_count)
    return cli_usage_error("plan", "give the number of poses with --count N");
  if ((s->rmin || s->rmax || s->accept) && s->n_instruments == 0)
    return cli_usage_error("plan", "--range-min, --range-max and --acceptance need --instrument");
  /* the axis only tilts the acceptance cone: alone it would do nothing */
  if (s->axis != NULL && s->accept == NULL)
    return cli_usage_error("plan", "--target-axis needs --acceptance (the direction of the acceptance cone)");
  if ((output == NULL || strcmp(output, "-") == 0) && s->me.json != NULL && strcmp(s->me.json, "-") == 0)
    return cli_usage_error("plan", "the poses and the JSON cannot both go to standard output");
  return 0;
}

/* The output files checked against each other, the inputs and what
 * exists, before any work. */
static int check_outputs(plan_settings *s)
{
  static const char *const names[2] = { "--output", "--json" };
  const char *outputs[2];
  s->inputs[0] = s->model_path;
  s->inputs[1] = s->pool_path;
  s->inputs[2] = NULL;
  outputs[0] = s->output;
  outputs[1] = s->me.json;
  return cli_outputs_check("plan", outputs, names, 2, s->force, s->inputs);
}

/* What a run reads and makes; plan_job_free releases it. The plan
 * options in the settings point into it (stations, boxes, pool), so it
 * stays where it was made. */
typedef struct plan_job {
  twf_model *model;
  cli_units u;                       /* MODEL's */
  char station_names[TWF_STATIONS_MAX][TWF_NAME_MAX];
  double instruments[3 * TWF_STATIONS_MAX];
  double box_lo[MAX_BOXES][BOX_JOINTS_MAX], box_hi[MAX_BOXES][BOX_JOINTS_MAX];
  twf_keepout boxes[MAX_BOXES];
  twf_campaign *pool;                /* the --pool file, or NULL */
  twf_plan_result *res;
  twf_warnings warnings;
  twf_error err;
} plan_job;

static void plan_job_init(plan_job *j)
{
  j->model = NULL;
  j->pool = NULL;
  j->res = NULL;
  twf_warnings_init(&j->warnings);
  twf_error_clear(&j->err);
}

static void plan_job_free(plan_job *j)
{
  twf_plan_result_free(j->res);
  twf_campaign_free(j->pool);
  twf_model_free(j->model);
  twf_warnings_clear(&j->warnings);
}

/* A reader or the planner failed: what it warned of, then the error. */
static int report_failure(const plan_job *j)
{
  cli_print_warnings(&j->warnings);
  return cli_report_error(&j->err);
}

/* MODEL, then the measurement options that need it. */
static int read_model(plan_settings *s, plan_job *j)
{
  int status;
  j->model = twf_model_read_with(s->model_path, &s->ropt, &j->warnings, NULL, &j->err);
  if (j->model == NULL)
    return report_failure(j);
  if (j->model->n_joints > BOX_JOINTS_MAX) /* the room of box_lo and box_hi */
    return cli_usage_error("plan", "at most %d joints", BOX_JOINTS_MAX);
  cli_units_of(&j->u, j->model);
  if ((status = pcli_measure_resolve(&s->me, "plan", j->model)) != 0)
    return status;
  s->po.assess = s->me.opt;
  s->po.seed = s->me.opt.calib.seed;
  return 0;
}

/* --range-min and --range-max in MODEL's length unit. */
static int parse_range(plan_settings *s, const plan_job *j)
{
  const cli_units *u = &j->u;
  int status;
  if (s->rmin != NULL && (status = cli_parse_bounded("plan", "--range-min", s->rmin, u->length_si, u->length, 0.0,
                                                     1e3, &s->po.range_min)) != 0)
    return status;
  if (s->rmax != NULL && (status = cli_parse_bounded("plan", "--range-max", s->rmax, u->length_si, u->length, 1e-3,
                                                     1e3, &s->po.range_max)) != 0)
    return status;
  if (!(s->po.range_max > s->po.range_min))
    return cli_usage_error("plan", "--range-max must exceed --range-min");
  return 0;
}

/* --acceptance in MODEL's angle unit and --target-axis: the cone the
 * targets see the instrument in. */
static int parse_acceptance(plan_settings *s, const plan_job *j)
{
  const cli_units *u = &j->u;
  const double *axis = s->po.target_axis;
  int status;
  if (s->accept != NULL && (status = cli_parse_bounded("plan", "--acceptance", s->accept, u->angle_si, u->angle,
                                                       1e-6, 3.14159265358979323846, &s->po.acceptance_rad)) != 0)
    return status;
  if (s->axis != NULL) {
    if ((status = pcli_parse_vector("plan", "--target-axis", s->axis, 1.0, s->po.target_axis)) != 0)
      return status;
    if (!(axis[0] != 0 || axis[1] != 0 || axis[2] != 0))
      return cli_usage_error("plan", "--target-axis must not be zero");
  }
  return 0;
}

/* The --keep-out boxes, in MODEL's joints and units. */
static int parse_boxes(plan_settings *s, plan_job *j)
{
  size_t b;
  int status;
  for (b = 0; b < s->n_boxes; b++) {
    if ((status = parse_box(j->model, &j->u, s->boxes_text[b], j->box_lo[b], j->box_hi[b])) != 0)
      return status;
    j->boxes[b].lo = j->box_lo[b];
    j->boxes[b].hi = j->box_hi[b];
  }
  s->po.keepout = j->boxes;
  s->po.n_keepout = s->n_boxes;
  return 0;
}

/* The constraints that need MODEL (its units, its joints), in the order
 * their errors are reported. */
static int parse_constraints(plan_settings *s, plan_job *j)
{
  int status;
  if ((status = parse_instruments(s->instrument_text, s->n_instruments, &j->u, j->station_names, j->instruments,
                                  &s->po)) != 0 ||
      (status = parse_range(s, j)) != 0 || (status = parse_acceptance(s, j)) != 0 ||
      (status = parse_boxes(s, j)) != 0)
    return status;
  return 0;
}

/* The --pool file's poses replace the drawn candidates. */
static int read_pool(plan_settings *s, plan_job *j)
{
  if (s->pool_path == NULL)
    return 0;
  j->pool = twf_campaign_read_joints(s->pool_path, j->model, &s->copt, &j->warnings, &j->err);
  if (j->pool == NULL)
    return report_failure(j);
  s->po.pool = j->pool->q;
  s->po.n_pool = j->pool->n_poses;
  return 0;
}

/* The poses chosen and ordered, with the assessment of the set. */
static int make_plan(const plan_settings *s, plan_job *j)
{
  if (twf_plan(j->model, &s->po, &j->res, &j->warnings, &j->err) != TWF_OK)
    return report_failure(j);
  return 0;
}

/* The report goes to standard error when standard output carries the
 * poses or the JSON. */
static FILE *report_stream(const plan_settings *s)
{
  const char *output = s->output, *json = s->me.json;
  return output == NULL || strcmp(output, "-") == 0 || (json && strcmp(json, "-") == 0) ? stderr : stdout;
}

/* The text report: the plan, the assessment of the chosen set, then the
 * warnings of the run. */
static void print_report(FILE *text, const plan_settings *s, const plan_job *j)
{
  const twf_model *model = j->model;
  fprintf(text, "twistfit %s plan: %s, %zu joints\n", twf_version(), model->name, model->n_joints);
  print_plan(text, j->res, &s->po, &j->u, (const char (*)[TWF_NAME_MAX])j->station_names);
  pcli_print_assessment(text, j->res->assessment, model, &s->po.assess, &j->u);
  cli_print_warnings(&j->warnings);
}

/* The poses (standard output unless -o) and the JSON, written together
 * (or none). */
static int write_outputs(const plan_settings *s, const plan_job *j)
{
  const twf_model *model = j->model;
  const twf_plan_result *res = j->res;
  pcli_joints pj;
  cli_put puts[2];
  char comment[256];
  json_t *root = NULL;
  int status;
  snprintf(comment, sizeof comment, "Poses planned by twistfit plan (criterion %s, seed %llu) for %s",
           twf_plan_criterion_name(s->po.criterion), s->po.seed, model->name);
  pj.m = model;
  pj.q = res->q;
  pj.n = res->n;
  pj.id_prefix = "P";
  pj.ids = j->pool != NULL ? (const char (*)[TWF_NAME_MAX])j->pool->pose_ids : NULL;
  pj.id_index = res->candidate;
  pj.length_unit = s->copt.length_from_caller ? s->copt.length_unit : model->length_unit;
  pj.angle_unit = s->copt.angle_from_caller ? s->copt.angle_unit : model->angle_unit;
  pj.comment = comment;
  pj.station = res->station;
  pj.station_names = (const char (*)[TWF_NAME_MAX])j->station_names;
  if (s->me.json != NULL)
    root = plan_json(res, &s->po, model, &j->u);
  puts[0] = (cli_put){ s->output != NULL ? s->output : "-", pcli_put_joints, &pj };
  puts[1] = (cli_put){ s->me.json, cli_put_json, root };
  status = cli_write_outputs(puts, 2, s->force, s->inputs);
  json_decref(root);
  return status;
}

/* A run whose options are checked: MODEL and the constraints in its
 * units, the pool, the plan; the report and the outputs only when all of
 * them succeeded. */
static int plan_and_write(plan_settings *s)
{
  plan_job j;
  int status;
  plan_job_init(&j);
  if ((status = read_model(s, &j)) == 0 && (status = parse_constraints(s, &j)) == 0 &&
      (status = read_pool(s, &j)) == 0 && (status = make_plan(s, &j)) == 0) {
    print_report(report_stream(s), s, &j);
    status = write_outputs(s, &j);
  }
  plan_job_free(&j);
  return status;
}

static int run_plan(int argc, char **argv)
{
  plan_settings s;
  int status;

  if ((status = parse_options(argc, argv, &s)) == 0 && !s.help_shown && (status = check_settings(&s)) == 0 &&
      (status = check_outputs(&s)) == 0)
    status = plan_and_write(&s);
  pcli_measure_free(&s.me);
  return status;
}

const cli_command cli_cmd_plan = {
  "plan",
  run_plan,
  "choose the poses of a measuring day",
  plan_help,
};
