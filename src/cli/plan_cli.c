/* plan_cli.c: option parsing, reports and the joints file shared by the
 * commands for the days before measuring (simulate, assess, plan). */
#define _GNU_SOURCE
#include "config.h"
#include "plan_cli.h"

#include <errno.h>
#include <getopt.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

int pcli_parse_count(const char *command, const char *option, const char *arg, size_t lo, size_t hi,
                     size_t *out)
{
  char *end;
  unsigned long long v;
  errno = 0;
  v = strtoull(arg, &end, 10);
  if (*arg == '\0' || *arg == '-' || *end != '\0' || errno == ERANGE || v < lo || v > hi)
    return cli_usage_error(command, "%s takes a whole number from %zu to %zu, not '%s'", option, lo, hi, arg);
  *out = (size_t)v;
  return TWF_EXIT_OK;
}

int pcli_parse_seed(const char *command, const char *arg, unsigned long long *out)
{
  char *end;
  errno = 0;
  *out = strtoull(arg, &end, 10);
  if (*end != '\0' || *arg == '\0' || *arg == '-' || errno == ERANGE)
    return cli_usage_error(command, "--seed takes a non-negative whole number");
  return TWF_EXIT_OK;
}

int pcli_parse_fraction(const char *command, const char *option, const char *arg, double lo, double hi,
                        double *out)
{
  double v;
  if (cli_parse_double(arg, &v) != 0 || !(v >= lo && v <= hi))
    return cli_usage_error(command, "%s takes a number from %g to %g, not '%s'", option, lo, hi, arg);
  *out = v;
  return TWF_EXIT_OK;
}

int pcli_parse_vector(const char *command, const char *option, const char *arg, double unit_si,
                      double out[3])
{
  char buf[256], *tok, *save = NULL;
  int n = 0;
  if (strlen(arg) < sizeof buf) {
    strcpy(buf, arg);
    for (tok = strtok_r(buf, ",", &save); tok != NULL; tok = strtok_r(NULL, ",", &save)) {
      double v;
      if (n == 3 || cli_parse_double(tok, &v) != 0) {
        n = -1;
        break;
      }
      out[n++] = v * unit_si;
    }
  }
  if (n != 3)
    return cli_usage_error(command, "%s takes three comma-separated numbers X,Y,Z, not '%s'", option, arg);
  return TWF_EXIT_OK;
}

int pcli_parse_groups(const char *command, const char *text, unsigned *mask)
{
  unsigned masks[2 * TWF_GROUP_COUNT];
  int n, k;
  *mask = 0;
  if (strcmp(text, "geometric") == 0)
    *mask = TWF_GROUPS_GEOMETRIC;
  else if (strcmp(text, "remaster") == 0)
    *mask = TWF_GROUPS_REMASTER;
  else if (strcmp(text, "all") == 0)
    *mask = TWF_GROUPS_GEOMETRIC | TWF_GROUP_BIT(TWF_GROUP_SCALE);
  else if ((n = cli_split_groups(text, masks)) > 0)
    for (k = 0; k < n; k++)
      *mask |= masks[k];
  if (*mask == 0)
    return cli_usage_error(command, "unknown parameter groups '%s' (use base, targets, offsets, home, "
                           "shifts, tilts, axes, scale, or geometric, remaster, all)", text);
  return TWF_EXIT_OK;
}

int pcli_parse_priority(const char *command, const char *text, twf_group priority[TWF_GROUP_COUNT])
{
  unsigned masks[2 * TWF_GROUP_COUNT];
  int used[TWF_GROUP_COUNT] = { 0 }, n = 0, g, k, count;
  if ((count = cli_split_groups(text, masks)) <= 0)
    return cli_usage_error(command, "unknown groups in --priority '%s'", text);
  for (k = 0; k < count; k++)
    for (g = 0; g < TWF_GROUP_COUNT; g++)
      if ((masks[k] & TWF_GROUP_BIT(g)) && !used[g]) {
        used[g] = 1;
        priority[n++] = (twf_group)g;
      }
  for (g = 0; g < TWF_GROUP_COUNT; g++)
    if (!used[g])
      priority[n++] = (twf_group)g;
  return TWF_EXIT_OK;
}

int pcli_parse_targets(const char *command, const twf_model *m, const char *arg, unsigned char *mask)
{
  char buf[1024], *tok, *save = NULL;
  memset(mask, 0, m->n_targets);
  if (strlen(arg) >= sizeof buf)
    return cli_usage_error(command, "--targets: the list is too long");
  strcpy(buf, arg);
  for (tok = strtok_r(buf, ",", &save); tok != NULL; tok = strtok_r(NULL, ",", &save)) {
    long k = twf_model_target_index(m, tok);
    if (k < 0)
      return cli_usage_error(command, "--targets: the model has no target '%s'", tok);
    if (!m->targets[k].offset_known)
      return cli_usage_error(command, "--targets: target '%s' has no offset in the model", tok);
    mask[k] = 1;
  }
  return TWF_EXIT_OK;
}

/* ------------------------------------------------------------ measuring options */

void pcli_measure_init(pcli_measure *me)
{
  memset(me, 0, sizeof *me);
  me->opt = twf_assess_default_options();
  me->opt.calib.sigma_length = 0.0; /* required */
}

void pcli_measure_free(pcli_measure *me)
{
  free(me->target_mask);
  me->target_mask = NULL;
}

int pcli_measure_option(pcli_measure *me, const char *command, int opt, const char *arg, int *status)
{
  *status = TWF_EXIT_OK;
  switch (opt) {
  case PCLI_OPT_SIGMA: me->sigma = arg; return 1;
  case PCLI_OPT_SIGMA_ANGLE: me->sigma_angle = arg; return 1;
  case PCLI_OPT_ORIENTATION: me->opt.orientation = 1; return 1;
  case PCLI_OPT_FIT: *status = pcli_parse_groups(command, arg, &me->opt.calib.groups); return 1;
  case PCLI_OPT_PRIORITY: *status = pcli_parse_priority(command, arg, me->opt.calib.priority); return 1;
  case PCLI_OPT_TARGETS: me->targets = arg; return 1;
  case PCLI_OPT_CONFIGS:
    *status = pcli_parse_count(command, "--configs", arg, 1, 1000000, &me->opt.workspace.n_configs);
    return 1;
  case PCLI_OPT_SEED:
    if ((*status = pcli_parse_seed(command, arg, &me->opt.calib.seed)) == 0)
      me->opt.workspace.seed = me->opt.calib.seed ^ 0x9e3779b97f4a7c15ULL;
    return 1;
  case PCLI_OPT_JSON: me->json = arg; return 1;
  default: return 0;
  }
}

int pcli_measure_resolve(pcli_measure *me, const char *command, const twf_model *m)
{
  cli_units u;
  int st;
  cli_units_of(&u, m);
  if (me->sigma == NULL)
    return cli_usage_error(command, "give the instrument's noise per coordinate with --sigma (%s)", u.length);
  if ((st = cli_parse_bounded(command, "--sigma", me->sigma, u.length_si, u.length, 1e-9, 0.01,
                              &me->opt.calib.sigma_length)) != 0)
    return st;
  if (me->sigma_angle != NULL) {
    if (!me->opt.orientation)
      return cli_usage_error(command, "--sigma-angle needs --orientation");
    if ((st = cli_parse_bounded(command, "--sigma-angle", me->sigma_angle, u.angle_si, u.angle, 1e-9, 0.1,
                                &me->opt.calib.sigma_angle)) != 0)
      return st;
  }
  if (me->targets != NULL) {
    me->target_mask = calloc(m->n_targets ? m->n_targets : 1, 1);
    if (me->target_mask == NULL)
      return cli_out_of_memory();
    if ((st = pcli_parse_targets(command, m, me->targets, me->target_mask)) != 0)
      return st;
    me->opt.targets = me->target_mask;
  }
  return TWF_EXIT_OK;
}

/* ------------------------------------------------------------ reports */

static double param_shown(const twf_param *p, double v, const cli_units *u, const char **unit)
{
  switch (p->kind) {
  case TWF_PARAM_LENGTH: *unit = u->length; return v / u->length_si;
  case TWF_PARAM_ANGLE: *unit = u->angle; return v / u->angle_si;
  case TWF_PARAM_RATIO: break;
  case TWF_PARAM_COMPLIANCE: *unit = "urad/Nm"; return v * 1e6;
  }
  *unit = "ppm";
  return v * 1e6;
}

static const char *status_text(const twf_param_result *p)
{
  if (p->status == TWF_PARAM_FIXED_STRUCTURAL)
    return "fixed (redundant)";
  if (p->status == TWF_PARAM_FIXED_DATA)
    return "fixed (not in these poses)";
  return p->weak ? "weak" : "identifiable";
}

static double joint_si(const twf_joint *jt, const cli_units *u)
{
  return jt->type == TWF_JOINT_REVOLUTE ? u->angle_si : u->length_si;
}

static const char *joint_unit(const twf_joint *jt, const cli_units *u)
{
  return jt->type == TWF_JOINT_REVOLUTE ? u->angle : u->length;
}

void pcli_print_prediction(FILE *fp, const char *title, const twf_prediction *p, const twf_model *m,
                           const cli_units *u)
{
  size_t k;
  fprintf(fp, "%s (%zu configurations):\n", title, p->n);
  if (p->n == 0)
    return;
  fprintf(fp, "  position:    rms %.*f, p95 %.*f, max %.*f %s\n", u->ldec, p->position_stats.rms / u->length_si,
          u->ldec, p->position_stats.p95 / u->length_si, u->ldec, p->position_stats.max / u->length_si, u->length);
  if (p->orientation != NULL)
    fprintf(fp, "  orientation: rms %.*f, p95 %.*f, max %.*f %s\n", u->adec,
            p->orientation_stats.rms / u->angle_si, u->adec, p->orientation_stats.p95 / u->angle_si, u->adec,
            p->orientation_stats.max / u->angle_si, u->angle);
  fprintf(fp, "  worst configuration:");
  for (k = 0; k < m->n_joints; k++)
    fprintf(fp, " %s %.2f", m->joints[k].name,
            p->q[p->position_stats.max_index * m->n_joints + k] / joint_si(&m->joints[k], u));
  fputc('\n', fp);
}

json_t *pcli_json_prediction(const twf_prediction *p, const twf_model *m, const cli_units *u, int with_values)
{
  json_t *o = json_object(), *worst = json_object(), *wq = json_object();
  size_t k, i;
  json_object_set_new(o, "configurations", json_integer((json_int_t)p->n));
  json_object_set_new(o, "position", cli_json_stats(&p->position_stats, u->length_si));
  if (p->orientation != NULL)
    json_object_set_new(o, "orientation", cli_json_stats(&p->orientation_stats, u->angle_si));
  if (p->n > 0) {
    size_t w = p->position_stats.max_index;
    for (k = 0; k < m->n_joints; k++)
      json_object_set_new(wq, m->joints[k].name, cli_json_number(p->q[w * m->n_joints + k] /
                                                                 joint_si(&m->joints[k], u)));
    json_object_set_new(worst, "index", json_integer((json_int_t)w));
    json_object_set_new(worst, "joints", wq);
    json_object_set_new(o, "worst", worst);
  } else {
    json_decref(worst);
    json_decref(wq);
  }
  if (with_values) {
    json_t *arr = json_array();
    for (i = 0; i < p->n; i++) {
      json_t *e = json_object(), *jq = json_array();
      for (k = 0; k < m->n_joints; k++)
        json_array_append_new(jq, cli_json_number(p->q[i * m->n_joints + k] / joint_si(&m->joints[k], u)));
      json_object_set_new(e, "joints", jq);
      json_object_set_new(e, "position", cli_json_number(p->position[i] / u->length_si));
      if (p->orientation != NULL)
        json_object_set_new(e, "orientation", cli_json_number(p->orientation[i] / u->angle_si));
      json_array_append_new(arr, e);
    }
    json_object_set_new(o, "values", arr);
  }
  return o;
}

void pcli_print_assessment(FILE *fp, const twf_assessment *a, const twf_model *m,
                           const twf_assess_options *opt, const cli_units *u)
{
  size_t k, n_t = 0;
  fprintf(fp, "poses: %zu, %zu coordinates measured; noise %.*f %s per coordinate\n", a->n_poses, a->n_rows,
          u->ldec, opt->calib.sigma_length / u->length_si, u->length);
  fprintf(fp, "targets measured:");
  for (k = 0; k < m->n_targets; k++)
    if (m->targets[k].offset_known && (opt->targets == NULL || opt->targets[k])) {
      fprintf(fp, " %s", m->targets[k].name);
      n_t++;
    }
  fprintf(fp, "%s\n", opt->orientation ? " (6-D rows)" : "");
  fprintf(fp, "parameters: %zu requested, %zu identifiable of %zu independent, %zu fixed as redundant, "
          "%zu fixed (not in these poses), %zu weak\n",
          a->n_params, a->n_kept, a->structural_count, a->n_fixed_structural, a->n_fixed_data, a->n_weak);
  fputc('\n', fp);
  fprintf(fp, "Parameters (predicted standard deviation of the estimated ones):\n");
  for (k = 0; k < a->n_params; k++) {
    const twf_param_result *p = &a->params[k];
    const char *unit;
    if (p->status == TWF_PARAM_KEPT) {
      double v = param_shown(&p->param, p->std, u, &unit);
      fprintf(fp, "  %-14s %-28s %.*f %s\n", p->param.name, status_text(p),
              p->param.kind == TWF_PARAM_LENGTH ? u->ldec + 1 : p->param.kind == TWF_PARAM_ANGLE ? u->adec : 3, v,
              unit);
    } else {
      size_t e;
      fprintf(fp, "  %-14s %-28s", p->param.name, status_text(p));
      for (e = 0; e < p->n_explain; e++)
        fprintf(fp, "%s%s %+.3g", e ? ", " : " explained by ", a->params[p->explain[e]].param.name,
                p->explain_coef[e]);
      fputc('\n', fp);
    }
  }
  fputc('\n', fp);
  fprintf(fp, "Observability (scaled, weighted Jacobian of the identifiable parameters):\n");
  fprintf(fp, "  O1 %.4g  O2 (inverse condition number) %.4g  O3 (minimum singular value) %.4g  O4 %.4g\n",
          a->observability.o1, a->observability.o2, a->observability.o3, a->observability.o4);
  fprintf(fp, "  condition number %.4g\n", a->condition_number);
  if (a->n_correlations > 0) {
    fprintf(fp, "  strongest correlations:");
    for (k = 0; k < a->n_correlations; k++)
      fprintf(fp, "%s %s/%s %+.3f", k ? "," : "", a->params[a->correlations[k].a].param.name,
              a->params[a->correlations[k].b].param.name, a->correlations[k].rho);
    fputc('\n', fp);
  }
  fputc('\n', fp);
  fprintf(fp, "Joint ranges exercised:\n");
  for (k = 0; k < m->n_joints; k++) {
    const twf_joint *jt = &m->joints[k];
    double si = joint_si(jt, u), range = a->joint_max[k] - a->joint_min[k];
    fprintf(fp, "  %-8s %9.2f to %9.2f %s", jt->name, a->joint_min[k] / si, a->joint_max[k] / si,
            joint_unit(jt, u));
    if (jt->has_limits && jt->limit_hi > jt->limit_lo)
      fprintf(fp, "  (limits %.2f to %.2f: %.0f %% of the travel)", jt->limit_lo / si, jt->limit_hi / si,
              100.0 * range / (jt->limit_hi - jt->limit_lo));
    fputc('\n', fp);
  }
  fputc('\n', fp);
  if (a->workspace != NULL)
    pcli_print_prediction(fp, "Predicted accuracy over the workspace, random configurations within the limits",
                          a->workspace, m, u);
}

json_t *pcli_json_assessment(const twf_assessment *a, const twf_model *m, const cli_units *u)
{
  json_t *o = json_object(), *params = json_array(), *obs = json_object(), *cor = json_array();
  json_t *joints = json_array();
  size_t k, e;
  json_object_set_new(o, "poses", json_integer((json_int_t)a->n_poses));
  json_object_set_new(o, "coordinates", json_integer((json_int_t)a->n_rows));
  json_object_set_new(o, "identifiable", json_integer((json_int_t)a->n_kept));
  json_object_set_new(o, "independent", json_integer((json_int_t)a->structural_count));
  json_object_set_new(o, "fixed_redundant", json_integer((json_int_t)a->n_fixed_structural));
  json_object_set_new(o, "fixed_not_in_poses", json_integer((json_int_t)a->n_fixed_data));
  json_object_set_new(o, "weak", json_integer((json_int_t)a->n_weak));
  for (k = 0; k < a->n_params; k++) {
    const twf_param_result *p = &a->params[k];
    json_t *j = json_object();
    const char *unit;
    double v = param_shown(&p->param, p->std, u, &unit);
    json_object_set_new(j, "name", json_string(p->param.name));
    json_object_set_new(j, "status", json_string(p->status == TWF_PARAM_FIXED_STRUCTURAL ? "fixed_redundant"
                                                 : p->status == TWF_PARAM_FIXED_DATA   ? "fixed_not_in_poses"
                                                 : p->weak                             ? "weak"
                                                                                       : "identifiable"));
    json_object_set_new(j, "std", cli_json_number(p->status == TWF_PARAM_KEPT ? v : NAN));
    json_object_set_new(j, "unit", json_string(unit));
    if (p->n_explain > 0) {
      json_t *ex = json_array();
      for (e = 0; e < p->n_explain; e++) {
        json_t *x = json_object();
        json_object_set_new(x, "name", json_string(a->params[p->explain[e]].param.name));
        json_object_set_new(x, "coefficient", cli_json_number(p->explain_coef[e]));
        json_array_append_new(ex, x);
      }
      json_object_set_new(j, "explained_by", ex);
    }
    json_array_append_new(params, j);
  }
  json_object_set_new(o, "parameters", params);
  json_object_set_new(obs, "O1", cli_json_number(a->observability.o1));
  json_object_set_new(obs, "O2", cli_json_number(a->observability.o2));
  json_object_set_new(obs, "O3", cli_json_number(a->observability.o3));
  json_object_set_new(obs, "O4", cli_json_number(a->observability.o4));
  json_object_set_new(obs, "condition_number", cli_json_number(a->condition_number));
  json_object_set_new(obs, "mean_log_eigenvalue", cli_json_number(a->log_det));
  json_object_set_new(o, "observability", obs);
  for (k = 0; k < a->n_correlations; k++) {
    json_t *c = json_object();
    json_object_set_new(c, "a", json_string(a->params[a->correlations[k].a].param.name));
    json_object_set_new(c, "b", json_string(a->params[a->correlations[k].b].param.name));
    json_object_set_new(c, "rho", cli_json_number(a->correlations[k].rho));
    json_array_append_new(cor, c);
  }
  json_object_set_new(o, "correlations", cor);
  for (k = 0; k < m->n_joints; k++) {
    const twf_joint *jt = &m->joints[k];
    json_t *j = json_object();
    double si = joint_si(jt, u);
    json_object_set_new(j, "name", json_string(jt->name));
    json_object_set_new(j, "min", cli_json_number(a->joint_min[k] / si));
    json_object_set_new(j, "max", cli_json_number(a->joint_max[k] / si));
    json_object_set_new(j, "unit", json_string(joint_unit(jt, u)));
    if (jt->has_limits && jt->limit_hi > jt->limit_lo)
      json_object_set_new(j, "fraction_of_travel",
                          cli_json_number((a->joint_max[k] - a->joint_min[k]) / (jt->limit_hi - jt->limit_lo)));
    json_array_append_new(joints, j);
  }
  json_object_set_new(o, "joints", joints);
  if (a->workspace != NULL)
    json_object_set_new(o, "workspace", pcli_json_prediction(a->workspace, m, u, 0));
  return o;
}

/* ------------------------------------------------------------ joints file */

int pcli_put_joints(FILE *fp, void *ctx, twf_error *err)
{
  const pcli_joints *j = ctx;
  const twf_model *m = j->m;
  double lsi = twf_length_unit_si(j->length_unit), asi = twf_angle_unit_si(j->angle_unit);
  size_t i, k;
  (void)err;
  if (j->comment != NULL)
    fprintf(fp, "# %s\n", j->comment);
  fprintf(fp, "# run: %s\n", cli_run_id());
  fprintf(fp, "# units: length=%s angle=%s\n", twf_length_unit_name(j->length_unit),
          twf_angle_unit_name(j->angle_unit));
  fprintf(fp, "pose");
  for (k = 0; k < m->n_joints; k++)
    fprintf(fp, ",%s", m->joints[k].name);
  if (j->station != NULL)
    fputs(",station", fp);
  fputc('\n', fp);
  for (i = 0; i < j->n; i++) {
    if (j->ids != NULL)
      fprintf(fp, "%s", j->ids[j->id_index[i]]);
    else
      fprintf(fp, "%s%04zu", j->id_prefix, i + 1);
    for (k = 0; k < m->n_joints; k++)
      fprintf(fp, ",%.10g",
              j->q[i * m->n_joints + k] / (m->joints[k].type == TWF_JOINT_REVOLUTE ? asi : lsi));
    if (j->station != NULL)
      fprintf(fp, ",%s", j->station_names[j->station[i]]);
    fputc('\n', fp);
  }
  return ferror(fp) ? -1 : 0;
}
