/* report.c: loading the inputs common to verify and calibrate, and the
 * text, JSON and CSV forms of the accuracy figures. Figures come from the
 * library as data; this file only formats them. */
#define _GNU_SOURCE
#include "config.h"
#include "cli.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

const char cli_safety_text[] =
  "Safety: a changed kinematic model moves the real arm differently. Keep the\n"
  "previous parameters; verify the new ones at reduced speed with the cell's\n"
  "safety functions active; validate on held-out poses before production use.\n"
  "Re-check the cell's safety settings that depend on the kinematics (safe\n"
  "zones, joint and Cartesian limits, collision detection) before use.\n"
  "Follow the robot maker's procedures and local codes; the work belongs to\n"
  "qualified personnel.\n";

/* ------------------------------------------------------------ words */

const char *cli_plural(size_t n, const char *one, const char *many)
{
  return n == 1 ? one : many;
}

const char *cli_stop_words(twf_stop s)
{
  switch (s) {
  case TWF_STOP_NONE: return "did not run";
  case TWF_STOP_STEP: return "converged (the steps became negligible)";
  case TWF_STOP_GRADIENT: return "converged (the slope of the cost vanished)";
  case TWF_STOP_COST: return "converged (the cost stopped decreasing)";
  case TWF_STOP_MAXITER: return "stopped at the iteration limit (not converged)";
  case TWF_STOP_DIVERGED: return "diverged";
  case TWF_STOP_SINGULAR: return "stopped: the system could not be solved";
  }
  return "?";
}

void cli_meas_where(const cli_inputs *in, const twf_measurement *ms, char *buf, size_t n)
{
  /* in the two-file form the line is in the points file */
  const char *file = in->data_path ? in->data_path : in->points_path;
  if (ms->line > 0)
    snprintf(buf, n, "%s:%lu", file ? file : "?", (unsigned long)ms->line);
  else
    snprintf(buf, n, "%s", file ? file : "?");
}

/* ------------------------------------------------------------ hints and trace */

void cli_hint_options(twf_error *err)
{
  const char *text = NULL;
  switch (twf_advice_of(err)) {
  case TWF_ADVICE_NONE: break;
  case TWF_ADVICE_FIX_MORE: text = "fix more parameters (--fit) or measure more varied poses"; break;
  case TWF_ADVICE_MORE_POSES: text = "measure more poses, or fit fewer groups (--fit)"; break;
  case TWF_ADVICE_MORE_POSES_OR_SIGMA:
    text = "measure more poses, fit fewer groups (--fit), or give the noise (--sigma)";
    break;
  case TWF_ADVICE_ACCEPT_LARGE:
    text = "check the joint order and signs, the units and that the model is this arm's; "
           "pass --accept-large if the arm really is that far from its model";
    break;
  }
  if (text != NULL)
    snprintf(err->hint, sizeof err->hint, "%s", text);
}

void cli_print_trace(const twf_trace *t)
{
  size_t i;
  if (cli_verbosity < 2 || t == NULL)
    return;
  for (i = 0; i < t->n_stages; i++)
    fprintf(stderr, "twistfit: stage %s: %.6f s\n", t->stages[i].name, t->stages[i].seconds);
  for (i = 0; i < t->n_steps; i++) {
    const twf_solver_step *s = &t->steps[i];
    fprintf(stderr, "twistfit: solver %s, round %d, iteration %d: cost %.9g, damping %.3g, %s\n", s->fit,
            s->round, s->iteration, s->cost, s->damping, s->accepted ? "accepted" : "rejected");
  }
}

/* ------------------------------------------------------------ inputs */

void cli_inputs_init(cli_inputs *in)
{
  memset(in, 0, sizeof *in);
  in->copt = twf_campaign_default_options();
  in->ropt = twf_read_default_options();
  twf_warnings_init(&in->warnings);
}

int cli_inputs_option(cli_inputs *in, const char *command, int opt, const char *arg, int *status)
{
  *status = TWF_EXIT_OK;
  switch (opt) {
  case CLI_OPT_JOINTS: in->joints_path = arg; return 1;
  case CLI_OPT_POINTS: in->points_path = arg; return 1;
  case CLI_OPT_LENGTH_UNIT:
    *status = cli_parse_length_unit(command, arg, &in->copt.length_unit);
    in->copt.length_from_caller = 1;
    return 1;
  case CLI_OPT_ANGLE_UNIT:
    *status = cli_parse_angle_unit(command, arg, &in->copt.angle_unit);
    in->copt.angle_from_caller = 1;
    return 1;
  case CLI_OPT_LIMITS_ERROR: in->copt.limits_are_errors = 1; return 1;
  case CLI_OPT_BASE_LINK:
  case CLI_OPT_TIP_LINK:
  case CLI_OPT_TARGET_LINK:
    *status = cli_urdf_longopt(command, opt, arg, &in->urdf_links, &in->ropt);
    return 1;
  case CLI_OPT_PAYLOAD: in->payload = arg; return 1;
  case CLI_OPT_MAX_INPUT_SIZE:
    *status = cli_parse_size(command, arg, &in->copt.max_input_size);
    in->ropt.max_input_size = in->copt.max_input_size;
    return 1;
  default: return 0;
  }
}

int cli_inputs_load(cli_inputs *in, const char *command, int argc, char **argv, int first)
{
  twf_error err;
  int n = argc - first;
  twf_error_clear(&err);
  if (in->joints_path != NULL || in->points_path != NULL) {
    if (in->joints_path == NULL || in->points_path == NULL)
      return cli_usage_error(command, "--joints and --points go together");
    if (n != 1)
      return cli_usage_error(command, "with --joints and --points, give MODEL only");
  } else if (n != 2) {
    return cli_usage_error(command, "expected MODEL and DATA.csv (or --joints and --points)");
  }
  in->model_path = argv[first];
  in->data_path = n == 2 ? argv[first + 1] : NULL;
  in->paths[0] = in->model_path;
  in->paths[1] = in->data_path ? in->data_path : in->joints_path;
  in->paths[2] = in->data_path ? NULL : in->points_path;
  in->paths[3] = NULL;
  in->model = twf_model_read_with(in->model_path, &in->ropt, &in->warnings, &in->model_digest, &err);
  if (in->model == NULL)
    goto fail;
  if (in->data_path != NULL)
    in->campaign = twf_campaign_read(in->data_path, in->model, &in->copt, &in->warnings, &err);
  else
    in->campaign = twf_campaign_read_pair(in->joints_path, in->points_path, in->model,
                                          &in->copt, &in->warnings, &err);
  if (in->campaign == NULL)
    goto fail;
  {
    long pl;
    int st = cli_payload_resolve(command, in->model, in->payload, &pl);
    if (st == 0)
      st = cli_payload_apply(command, in->campaign, in->paths[1], pl);
    if (st != 0) {
      cli_print_warnings(&in->warnings);
      return st;
    }
  }
  if (in->campaign->n_meas == 0) {
    twf_error_set(&err, TWF_ERR_MISSING, in->paths[1], 0, 0, "add measurement rows",
                  "the campaign holds no measurement");
    goto fail;
  }
  /* printed now, and kept for the reports that list warnings */
  cli_print_warnings(&in->warnings);
  return TWF_EXIT_OK;
fail:
  cli_print_warnings(&in->warnings);
  return cli_report_error(&err);
}

void cli_inputs_add_path(cli_inputs *in, const char *path)
{
  size_t i;
  for (i = 0; i + 1 < sizeof in->paths / sizeof in->paths[0]; i++)
    if (in->paths[i] == NULL) {
      in->paths[i] = path;
      in->paths[i + 1] = NULL;
      return;
    }
}

void cli_inputs_free(cli_inputs *in)
{
  twf_campaign_free(in->campaign);
  twf_model_free(in->model);
  twf_warnings_clear(&in->warnings);
  memset(in, 0, sizeof *in);
}

/* ------------------------------------------------------------ units */

void cli_units_of(cli_units *u, const twf_model *m)
{
  u->length = twf_length_unit_name(m->length_unit);
  u->length_si = twf_length_unit_si(m->length_unit);
  u->angle = twf_angle_unit_name(m->angle_unit);
  u->angle_si = twf_angle_unit_si(m->angle_unit);
  /* enough decimals for 0.1 um and 1e-7 rad whatever the unit */
  u->ldec = (int)ceil(log10(u->length_si / 1e-7) - 1e-9);
  u->adec = (int)ceil(log10(u->angle_si / 1e-7) - 1e-9);
  if (u->ldec < 1)
    u->ldec = 1;
  if (u->adec < 1)
    u->adec = 1;
}

/* ------------------------------------------------------------ text */

static const char *set_name(int set) { return set == TWF_SET_CHECK ? "check" : "fit"; }

static void print_stats_row(FILE *fp, const char *label, const twf_stats *s, double unit, int dec,
                            const twf_campaign *c, int with_worst)
{
  if (s->count == 0) {
    fprintf(fp, "  %-14s %7zu %10s %10s %10s %10s\n", label, s->count, "-", "-", "-", "-");
    return;
  }
  fprintf(fp, "  %-14s %7zu %10.*f %10.*f %10.*f %10.*f", label, s->count, dec, s->mean / unit, dec,
          s->rms / unit, dec, s->p95 / unit, dec, s->max / unit);
  if (with_worst && s->max_index < c->n_meas)
    fprintf(fp, "  %s", c->pose_ids[c->meas[s->max_index].pose]);
  fputc('\n', fp);
}

void cli_print_accuracy(FILE *fp, const char *title, const twf_accuracy_summary *s,
                        const twf_model *m, const twf_campaign *c, const cli_units *u)
{
  int set;
  size_t k;
  fprintf(fp, "%s\n", title);
  fprintf(fp, "  position error |measured - model|, %s\n", u->length);
  fprintf(fp, "  %-14s %7s %10s %10s %10s %10s  %s\n", "set", "count", "mean", "rms", "p95",
          "max", "worst pose");
  for (set = 0; set < 2; set++)
    print_stats_row(fp, set_name(set), &s->position[set], u->length_si, u->ldec, c, 1);
  for (set = 0; set < 2; set++)
    for (k = 0; k < s->n_targets; k++) {
      char label[TWF_NAME_MAX + 16];
      if (s->target_position[2 * k + (size_t)set].count == 0 || s->n_targets < 2)
        continue;
      snprintf(label, sizeof label, "%s %s", set_name(set), m->targets[k].name);
      print_stats_row(fp, label, &s->target_position[2 * k + (size_t)set], u->length_si, u->ldec, c, 1);
    }
  if (s->orientation[0].count + s->orientation[1].count > 0) {
    fprintf(fp, "  orientation error, %s\n", u->angle);
    for (set = 0; set < 2; set++)
      print_stats_row(fp, set_name(set), &s->orientation[set], u->angle_si, u->adec, c, 1);
  }
}

void cli_print_worst(FILE *fp, const twf_accuracy_summary *s, const twf_campaign *c,
                     const twf_model *m, const cli_units *u)
{
  int set;
  size_t i;
  for (set = 0; set < 2; set++) {
    if (s->n_worst[set] == 0)
      continue;
    fprintf(fp, "  worst poses (%s set), %s:", set_name(set), u->length);
    for (i = 0; i < s->n_worst[set]; i++) {
      const twf_accuracy_worst *w = &s->worst[set][i];
      fprintf(fp, " %s/%s %.*f", c->pose_ids[w->pose], m->targets[c->meas[w->meas].target].name, u->ldec,
              w->error_m / u->length_si);
    }
    fputc('\n', fp);
  }
}

/* ------------------------------------------------------------ JSON */

double cli_clean(double v, double zero)
{
  /* "+ 0.0" turns -0 into 0 */
  return fabs(v) < zero ? 0.0 : v + 0.0;
}

double cli_clean_shown(double v, int dec)
{
  return fabs(v) < 0.5 * pow(10.0, -dec) ? 0.0 : v + 0.0;
}

void cli_quat_of(const double R[3][3], double q[4])
{
  int k;
  twf_rot_to_quat(R, q);
  for (k = 0; k < 4; k++)
    q[k] = cli_clean(q[k], 1e-12);
  /* one convention: w > 0, or for w = 0 (a half turn) the first nonzero
   * component positive, so that one rotation always prints one way */
  if (q[0] == 0.0) {
    for (k = 1; k < 4 && q[k] == 0.0; k++)
      ;
    if (k < 4 && q[k] < 0)
      for (k = 1; k < 4; k++)
        q[k] = cli_clean(-q[k], 1e-12);
  }
}

json_t *cli_json_pose(const twf_pose *T, const cli_units *u)
{
  double q[4];
  cli_quat_of(T->R, q);
  return json_pack("{s:[o,o,o], s:[o,o,o,o]}", "position", cli_json_number(T->p[0] / u->length_si),
                   cli_json_number(T->p[1] / u->length_si), cli_json_number(T->p[2] / u->length_si),
                   "quaternion_wxyz", cli_json_number(q[0]), cli_json_number(q[1]), cli_json_number(q[2]),
                   cli_json_number(q[3]));
}

json_t *cli_json_number(double v)
{
  /* jansson refuses NaN and infinity: they become null */
  return isfinite(v) ? json_real(v) : json_null();
}

json_t *cli_json_stats(const twf_stats *s, double unit)
{
  json_t *o = json_object();
  json_object_set_new(o, "count", json_integer((json_int_t)s->count));
  json_object_set_new(o, "mean", cli_json_number(s->mean / unit));
  json_object_set_new(o, "rms", cli_json_number(s->rms / unit));
  json_object_set_new(o, "p95", cli_json_number(s->p95 / unit));
  json_object_set_new(o, "max", cli_json_number(s->max / unit));
  return o;
}

json_t *cli_json_measurements(const twf_campaign *c, const twf_model *m, const uint8_t *sets,
                              size_t n_models, const char *const *names, const double *const *pos_err,
                              const double *const *angle_err, const unsigned char *excluded_code,
                              const twf_outlier *outliers, size_t n_outliers, const cli_units *u)
{
  json_t *a = json_array();
  double *weight = malloc((c->n_meas > 0 ? c->n_meas : 1) * sizeof *weight);
  size_t i, j, k;
  if (a == NULL || weight == NULL) {
    free(weight);
    json_decref(a);
    return NULL;
  }
  for (i = 0; i < c->n_meas; i++)
    weight[i] = 1.0;
  for (k = 0; outliers != NULL && k < n_outliers; k++)
    if (outliers[k].meas < c->n_meas)
      weight[outliers[k].meas] = outliers[k].weight;
  for (i = 0; i < c->n_meas; i++) {
    const twf_measurement *ms = &c->meas[i];
    twf_meas_set set = sets != NULL ? sets[i] : ms->set;
    const char *why = NULL;
    json_t *e = json_object(), *jq = json_array();
    if (excluded_code != NULL && excluded_code[i] != 0)
      why = excluded_code[i] == TWF_EXCLUDED_DROPPED   ? "dropped"
            : excluded_code[i] == TWF_EXCLUDED_FLAGGED ? "flagged"
                                                       : "registration";
    json_object_set_new(e, "index", json_integer((json_int_t)i));
    json_object_set_new(e, "line", json_integer((json_int_t)ms->line));
    json_object_set_new(e, "pose", json_string(c->pose_ids[ms->pose]));
    json_object_set_new(e, "target", json_string(m->targets[ms->target].name));
    json_object_set_new(e, "set", json_string(set == TWF_SET_CHECK ? "check" : "fit"));
    json_object_set_new(e, "excluded", why != NULL ? json_string(why) : json_null());
    json_object_set_new(e, "weight", cli_json_number(weight[i]));
    for (j = 0; j < c->n_joints; j++)
      json_array_append_new(jq, cli_json_number(c->q[ms->pose * c->n_joints + j] /
                                                (m->joints[j].type == TWF_JOINT_PRISMATIC ? u->length_si
                                                                                           : u->angle_si)));
    json_object_set_new(e, "joints", jq);
    for (k = 0; k < n_models; k++) {
      const double *d = &pos_err[k][3 * i];
      double ang = angle_err != NULL && angle_err[k] != NULL ? angle_err[k][i] : NAN;
      json_object_set_new(e, names[k],
                          json_pack("{s:o, s:[o,o,o], s:o}", "position",
                                    cli_json_number(sqrt(d[0] * d[0] + d[1] * d[1] + d[2] * d[2]) / u->length_si),
                                    "xyz", cli_json_number(d[0] / u->length_si),
                                    cli_json_number(d[1] / u->length_si), cli_json_number(d[2] / u->length_si),
                                    "angle", cli_json_number(ms->has_orientation ? ang / u->angle_si : NAN)));
    }
    json_array_append_new(a, e);
  }
  free(weight);
  return a;
}

json_t *cli_json_accuracy(const twf_accuracy_summary *s, const twf_model *m,
                          const twf_campaign *c, const cli_units *u)
{
  json_t *o = json_object();
  int set;
  size_t k, i;
  for (set = 0; set < 2; set++) {
    json_t *so = json_object(), *targets = json_object(), *worst = json_array();
    json_object_set_new(so, "position", cli_json_stats(&s->position[set], u->length_si));
    if (s->orientation[set].count > 0)
      json_object_set_new(so, "orientation", cli_json_stats(&s->orientation[set], u->angle_si));
    for (k = 0; k < s->n_targets; k++)
      if (s->target_position[2 * k + (size_t)set].count > 0)
        json_object_set_new(targets, m->targets[k].name,
                            cli_json_stats(&s->target_position[2 * k + (size_t)set], u->length_si));
    json_object_set_new(so, "targets", targets);
    for (i = 0; i < s->n_worst[set]; i++) {
      const twf_accuracy_worst *w = &s->worst[set][i];
      json_array_append_new(worst, json_pack("{s:s, s:s, s:o}", "pose", c->pose_ids[w->pose],
                                             "target", m->targets[c->meas[w->meas].target].name,
                                             "error", cli_json_number(w->error_m / u->length_si)));
    }
    json_object_set_new(so, "worst_poses", worst);
    json_object_set_new(o, set_name(set), so);
  }
  return o;
}

int cli_put_json(FILE *fp, void *ctx, twf_error *err)
{
  json_object_set_new((json_t *)ctx, "run_id", json_string(cli_run_id()));
  if (json_dumpf((json_t *)ctx, fp, JSON_INDENT(2) | JSON_REAL_PRECISION(12) | JSON_SORT_KEYS) != 0) {
    twf_error_set(err, TWF_ERR_IO, NULL, 0, 0, "check free space", "cannot write the JSON report");
    return -1;
  }
  fputc('\n', fp);
  return 0;
}

/* ------------------------------------------------------------ residual CSV */

int cli_put_residuals(FILE *fp, void *ctx, twf_error *err)
{
  static const char *axes[3] = { "ex", "ey", "ez" };
  const cli_residuals *r = ctx;
  const twf_campaign *c = r->c;
  const cli_units *u = r->u;
  cli_csv csv;
  int v, a;
  size_t i;
  char name[64];
  (void)err;
  /* the campaign reader skips comment lines: the run id can lead */
  fprintf(fp, "# run_id: %s\n", cli_run_id());
  cli_csv_init(&csv, fp);
  cli_csv_text(&csv, "pose");
  cli_csv_text(&csv, "target");
  cli_csv_text(&csv, "set");
  if (r->weights != NULL)
    cli_csv_text(&csv, "fit_weight");
  for (v = 0; v < 2; v++) {
    if (r->pos[v] == NULL)
      continue;
    for (a = 0; a < 3; a++) {
      snprintf(name, sizeof name, "%s%s_%s", r->labels[v], axes[a], u->length);
      cli_csv_text(&csv, name);
    }
    snprintf(name, sizeof name, "%serror_%s", r->labels[v], u->length);
    cli_csv_text(&csv, name);
    if (c->has_orientation_any) {
      snprintf(name, sizeof name, "%sangle_%s", r->labels[v], u->angle);
      cli_csv_text(&csv, name);
    }
  }
  cli_csv_end_row(&csv);
  for (i = 0; i < c->n_meas; i++) {
    const twf_measurement *ms = &c->meas[i];
    int set = r->sets ? (int)r->sets[i] : (int)ms->set;
    cli_csv_text(&csv, c->pose_ids[ms->pose]);
    cli_csv_text(&csv, r->m->targets[ms->target].name);
    cli_csv_text(&csv, set_name(set));
    if (r->weights != NULL)
      cli_csv_number(&csv, set == TWF_SET_FIT ? r->weights[i] : NAN);
    for (v = 0; v < 2; v++) {
      const double *e;
      if (r->pos[v] == NULL)
        continue;
      e = r->pos[v] + 3 * i;
      for (a = 0; a < 3; a++)
        cli_csv_number(&csv, e[a] / u->length_si);
      cli_csv_number(&csv, sqrt(e[0] * e[0] + e[1] * e[1] + e[2] * e[2]) / u->length_si);
      if (c->has_orientation_any)
        cli_csv_number(&csv, r->rot[v][i] / u->angle_si);
    }
    cli_csv_end_row(&csv);
  }
  return 0;
}

/* ------------------------------------------------------------ acceptance */

int cli_parse_tolerance(const char *command, const char *option, const char *arg, double unit_si,
                        double *out)
{
  double v;
  if (cli_parse_double(arg, &v) != 0 || v <= 0)
    return cli_usage_error(command, "%s takes a positive number, not '%s'", option, arg);
  *out = v * unit_si;
  return TWF_EXIT_OK;
}

/* The base pose file for campaign c: today's [base] file for a campaign of
 * one station, else one [station NAME] section per station of c, matched
 * by name into bases[station]. */
twf_status cli_read_station_bases(const char *path, const twf_read_options *opt, const twf_campaign *c,
                                  twf_pose *bases, twf_error *err)
{
  twf_pose got[TWF_STATIONS_MAX];
  char names[TWF_STATIONS_MAX][TWF_NAME_MAX];
  size_t n = 0, k, l, n_st = twf_campaign_station_count(c);
  twf_status st;
  if (n_st == 1)
    return twf_base_read_with(path, opt, bases, NULL, err);
  st = twf_base_read_stations(path, opt, got, names, TWF_STATIONS_MAX, &n, NULL, err);
  if (st != TWF_OK)
    return st;
  for (k = 0; k < n_st; k++) {
    for (l = 0; l < n; l++)
      if (strcmp(names[l], c->station_names[k]) == 0)
        break;
    if (l == n)
      return twf_error_set(err, TWF_ERR_MISSING, path, 0, 0,
                           "give the base pose file that calibrate wrote for this campaign "
                           "(--base-output)",
                           "the base pose file has no section [station %s] for station '%s' of the "
                           "campaign", c->station_names[k], c->station_names[k]);
    bases[k] = got[l];
  }
  return TWF_OK;
}
