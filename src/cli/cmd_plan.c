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

static void print_plan(FILE *fp, const twf_plan_result *r, const twf_plan_options *o, const twf_model *m,
                       const cli_units *u, const char (*names)[TWF_NAME_MAX])
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
  (void)m;
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

static int run_plan(int argc, char **argv)
{
  static const struct option longopts[] = {
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
  static const char *const names[2] = { "--output", "--json" };
  pcli_measure me;
  twf_plan_options po = twf_plan_default_options();
  twf_campaign_options copt = twf_campaign_default_options();
  const char *output = NULL, *pool_path = NULL, *instrument = NULL, *rmin = NULL, *rmax = NULL;
  const char *instrument_text[TWF_STATIONS_MAX];
  char station_names[TWF_STATIONS_MAX][TWF_NAME_MAX];
  double instruments[3 * TWF_STATIONS_MAX];
  size_t n_instruments = 0;
  const char *accept = NULL, *axis = NULL, *boxes_text[MAX_BOXES];
  const char *inputs[3] = { NULL, NULL, NULL }, *outputs[2];
  size_t n_boxes = 0, b;
  int force = 0, opt, status = TWF_EXIT_OK, have_count = 0;
  double box_lo[MAX_BOXES][64], box_hi[MAX_BOXES][64];
  twf_keepout boxes[MAX_BOXES];
  twf_model *model = NULL;
  twf_campaign *pool = NULL;
  twf_plan_result *res = NULL;
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
  while ((opt = getopt_long(argc, argv, ":o:fh", longopts, NULL)) != -1) {
    if (pcli_measure_option(&me, "plan", opt, optarg, &status)) {
      if (status != 0)
        goto done;
      continue;
    }
    switch (opt) {
    case OPT_COUNT:
      if ((status = pcli_parse_count("plan", "--count", optarg, 1, 100000, &po.count)) != 0)
        goto done;
      have_count = 1;
      break;
    case 'o': output = optarg; break;
    case OPT_CRITERION:
      if (twf_plan_criterion_parse(optarg, &po.criterion) != TWF_OK) {
        status = cli_usage_error("plan", "--criterion takes workspace, d or o4, not '%s'", optarg);
        goto done;
      }
      break;
    case OPT_CANDIDATES:
      if ((status = pcli_parse_count("plan", "--candidates", optarg, 1, 10000000, &po.n_candidates)) != 0)
        goto done;
      break;
    case OPT_POOL: pool_path = optarg; break;
    case OPT_MARGIN:
      if ((status = pcli_parse_fraction("plan", "--limit-margin", optarg, 0.0, 0.45, &po.limit_margin)) != 0)
        goto done;
      break;
    case OPT_INSTRUMENT:
      if (n_instruments == TWF_STATIONS_MAX) {
        status = cli_usage_error("plan", "at most %d instrument stations", TWF_STATIONS_MAX);
        goto done;
      }
      instrument = instrument_text[n_instruments++] = optarg;
      break;
    case OPT_RMIN: rmin = optarg; break;
    case OPT_RMAX: rmax = optarg; break;
    case OPT_ACCEPT: accept = optarg; break;
    case OPT_AXIS: axis = optarg; break;
    case OPT_KEEPOUT:
      if (n_boxes == MAX_BOXES) {
        status = cli_usage_error("plan", "at most %d --keep-out boxes", MAX_BOXES);
        goto done;
      }
      boxes_text[n_boxes++] = optarg;
      break;
    case OPT_EXCURSIONS:
      if ((status = pcli_parse_count("plan", "--excursions", optarg, 0, 100000, &po.excursions)) != 0)
        goto done;
      break;
    case OPT_LUNIT:
      if ((status = cli_parse_length_unit("plan", optarg, &copt.length_unit)) != 0)
        goto done;
      copt.length_from_caller = 1;
      break;
    case OPT_AUNIT:
      if ((status = cli_parse_angle_unit("plan", optarg, &copt.angle_unit)) != 0)
        goto done;
      copt.angle_from_caller = 1;
      break;
    case 'f': force = 1; break;
    case CLI_OPT_BASE_LINK:
    case CLI_OPT_TIP_LINK:
    case CLI_OPT_TARGET_LINK:
      if ((status = cli_urdf_longopt("plan", opt, optarg, &urdf_links, &ropt)) != 0)
        goto done;
      break;
    case 'h': fputs(plan_help, stdout); goto done;
    default: status = cli_bad_option("plan", opt, argv); goto done;
    }
  }
  if (argc - optind != 1) {
    status = cli_usage_error("plan", "expected one MODEL");
    goto done;
  }
  if (!have_count) {
    status = cli_usage_error("plan", "give the number of poses with --count N");
    goto done;
  }
  if ((rmin || rmax || accept) && instrument == NULL) {
    status = cli_usage_error("plan", "--range-min, --range-max and --acceptance need --instrument");
    goto done;
  }
  if ((output == NULL || strcmp(output, "-") == 0) && me.json != NULL && strcmp(me.json, "-") == 0) {
    status = cli_usage_error("plan", "the poses and the JSON cannot both go to standard output");
    goto done;
  }
  inputs[0] = argv[optind];
  inputs[1] = pool_path;
  outputs[0] = output;
  outputs[1] = me.json;
  if ((status = cli_outputs_check("plan", outputs, names, 2, force, inputs)) != 0)
    goto done;
  model = twf_model_read_with(inputs[0], &ropt, &warnings, NULL, &err);
  if (model == NULL) {
    cli_print_warnings(&warnings);
    status = cli_report_error(&err);
    goto done;
  }
  if (model->n_joints > 64) {
    status = cli_usage_error("plan", "at most 64 joints");
    goto done;
  }
  cli_units_of(&u, model);
  if ((status = pcli_measure_resolve(&me, "plan", model)) != 0)
    goto done;
  po.assess = me.opt;
  po.seed = me.opt.calib.seed;
  if ((status = parse_instruments(instrument_text, n_instruments, &u, station_names, instruments, &po)) != 0)
    goto done;
  if (rmin != NULL && (status = cli_parse_bounded("plan", "--range-min", rmin, u.length_si, u.length, 0.0, 1e3,
                                                  &po.range_min)) != 0)
    goto done;
  if (rmax != NULL && (status = cli_parse_bounded("plan", "--range-max", rmax, u.length_si, u.length, 1e-3, 1e3,
                                                  &po.range_max)) != 0)
    goto done;
  if (!(po.range_max > po.range_min)) {
    status = cli_usage_error("plan", "--range-max must exceed --range-min");
    goto done;
  }
  if (accept != NULL && (status = cli_parse_bounded("plan", "--acceptance", accept, u.angle_si, u.angle, 1e-6,
                                                    3.14159265358979323846, &po.acceptance_rad)) != 0)
    goto done;
  if (axis != NULL) {
    if ((status = pcli_parse_vector("plan", "--target-axis", axis, 1.0, po.target_axis)) != 0)
      goto done;
    if (!(po.target_axis[0] != 0 || po.target_axis[1] != 0 || po.target_axis[2] != 0)) {
      status = cli_usage_error("plan", "--target-axis must not be zero");
      goto done;
    }
  }
  for (b = 0; b < n_boxes; b++) {
    if ((status = parse_box(model, &u, boxes_text[b], box_lo[b], box_hi[b])) != 0)
      goto done;
    boxes[b].lo = box_lo[b];
    boxes[b].hi = box_hi[b];
  }
  po.keepout = boxes;
  po.n_keepout = n_boxes;
  if (pool_path != NULL) {
    pool = twf_campaign_read_joints(pool_path, model, &copt, &warnings, &err);
    if (pool == NULL) {
      cli_print_warnings(&warnings);
      status = cli_report_error(&err);
      goto done;
    }
    po.pool = pool->q;
    po.n_pool = pool->n_poses;
  }
  if (twf_plan(model, &po, &res, &warnings, &err) != TWF_OK) {
    cli_print_warnings(&warnings);
    status = cli_report_error(&err);
    goto done;
  }
  {
    FILE *text = output == NULL || strcmp(output, "-") == 0 || (me.json && strcmp(me.json, "-") == 0) ? stderr
                                                                                                    : stdout;
    pcli_joints pj;
    cli_put puts[2];
    char comment[256];
    snprintf(comment, sizeof comment, "Poses planned by twistfit plan (criterion %s, seed %llu) for %s",
             twf_plan_criterion_name(po.criterion), po.seed, model->name);
    fprintf(text, "twistfit %s plan: %s, %zu joints\n", twf_version(), model->name, model->n_joints);
    print_plan(text, res, &po, model, &u, (const char (*)[TWF_NAME_MAX])station_names);
    pcli_print_assessment(text, res->assessment, model, &po.assess, &u);
    cli_print_warnings(&warnings);
    pj.m = model;
    pj.q = res->q;
    pj.n = res->n;
    pj.id_prefix = "P";
    pj.ids = pool != NULL ? (const char (*)[TWF_NAME_MAX])pool->pose_ids : NULL;
    pj.id_index = res->candidate;
    pj.length_unit = copt.length_from_caller ? copt.length_unit : model->length_unit;
    pj.angle_unit = copt.angle_from_caller ? copt.angle_unit : model->angle_unit;
    pj.comment = comment;
    pj.station = res->station;
    pj.station_names = (const char (*)[TWF_NAME_MAX])station_names;
    if (me.json != NULL)
      root = plan_json(res, &po, model, &u);
    puts[0] = (cli_put){ output != NULL ? output : "-", pcli_put_joints, &pj };
    puts[1] = (cli_put){ me.json, cli_put_json, root };
    status = cli_write_outputs(puts, 2, force, inputs);
  }

done:
  json_decref(root);
  twf_plan_result_free(res);
  twf_campaign_free(pool);
  twf_model_free(model);
  pcli_measure_free(&me);
  twf_warnings_clear(&warnings);
  return status;
}

const cli_command cli_cmd_plan = {
  "plan",
  run_plan,
  "choose the poses of a measuring day",
  plan_help,
};
