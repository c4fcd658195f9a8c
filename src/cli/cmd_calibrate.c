/* cmd_calibrate.c: `twistfit calibrate MODEL DATA`: fit the PoE error
 * model to a campaign, report accuracy before and after, the as-built
 * geometry, identifiability and warnings, and write the as-built model, the
 * base pose, JSON and residuals on request. */
#define _GNU_SOURCE
#include "config.h"
#include "cli.h"
#include "plan_cli.h"
#include "html_report.h"

#include <errno.h>
#include <getopt.h>
#include <math.h>
#include <sha2.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>

static const char calibrate_help[] =
  "Usage: twistfit calibrate [OPTIONS] MODEL DATA.csv\n"
  "       twistfit calibrate [OPTIONS] MODEL --joints JOINTS.csv --points POINTS.csv\n"
  "\n"
  "Calibrate: register MODEL to the instrument, then fit the chosen parameter\n"
  "groups by Levenberg-Marquardt with redundant parameters fixed, screen\n"
  "outliers, and report accuracy before (registered MODEL) and after, on the fit\n"
  "and check sets; the as-built joint lines against MODEL's; identifiability;\n"
  "warnings. The report goes to standard output, in MODEL's units.\n"
  "\n"
  "Options:\n"
  CLI_INPUT_HELP
  "  -o, --output FILE       write the as-built model (model file, axis-and-point form)\n"
  "      --base-output FILE  write the fitted base pose in the instrument frame\n"
  "      --json FILE         write the report as JSON ('-': standard output, then the\n"
  "                          text report goes to standard error)\n"
  "      --residuals FILE    write the per-measurement residuals before and after (CSV)\n"
  "      --html FILE         write the report as one self-contained HTML file with\n"
  "                          charts (as 'twistfit report' makes from the JSON)\n"
  "      --fit GROUPS        parameter groups, comma-separated: base, targets, offsets,\n"
  "                          home, shifts, tilts, axes (= shifts,tilts), scale, compliance\n"
  "                          (joint yield under gravity: needs the model's mass model); or a\n"
  "                          preset: geometric (default: all but scale and compliance),\n"
  "                          remaster (base,targets,offsets: re-mastering after a crash or\n"
  "                          a motor swap, best started from the previous as-built model),\n"
  "                          all (geometric and scale); presets mix with groups, e.g.\n"
  "                          geometric,compliance\n"
  "      --priority GROUPS   order in which redundant parameters are kept (default\n"
  "                          base,targets,offsets,home,shifts,tilts,scale,compliance); groups left\n"
  "                          out follow in the default order\n"
  "      --sigma X           standard deviation of one measured coordinate (length unit)\n"
  "                          where the data give none (default: estimated from the fit)\n"
  "      --sigma-angle X     of one orientation component (angle unit), for 6-D rows\n"
  "      --robust MODE       outlier screen: drop (default), huber, cauchy or off\n"
  "      --robust-threshold K  in robust standard deviations of the error (default 5)\n"
  "      --screen-limit P    the drop screen keeps every reading when it would drop more\n"
  "                          than P %% of the fit readings (default 5; 100: no limit)\n"
  "      --check-fraction F  also hold out this fraction of the poses as check data\n"
  "      --seed N            seed of the held-out draw and of the synthetic pose set\n"
  "      --max-iterations N  solver iterations per fit (default 100)\n"
  "      --threads N         threads for the passes over the measurements\n"
  "                          (default: one per core; the result is the same)\n"
  "      --resample N        N refits on poses drawn with replacement (seeded by\n"
  "                          --seed): each parameter's spread beside its std\n"
  "      --accept-large      accept a result beyond any calibration (noise over 1 mm,\n"
  "                          a joint line over 5 deg or 50 mm from the model's);\n"
  "                          without it such a run fails (exit 5): the data and the\n"
  "                          model then rarely describe the same arm\n"
  "      --write-anyway      write the model (and base pose) even when the report's\n"
  "                          conclusion is 'do not use' (worse than the starting model\n"
  "                          on the check set); recorded in the model's [asbuilt] section;\n"
  "                          without it such a run writes nothing (exit 5)\n"
  "  -f, --force             replace output files that exist\n"
  "  -h, --help              show this help\n"
  "\n"
  "No output file is written when the solver fails. Output files are written\n"
  "atomically, never over an input, and replace an existing file only with --force.\n";

enum {
  OPT_BASE_OUT = CLI_OPT_FIRST_FREE, OPT_JSON, OPT_RESIDUALS, OPT_FIT, OPT_PRIORITY, OPT_SIGMA,
  OPT_SIGMA_ANGLE, OPT_ROBUST, OPT_ROBUST_K, OPT_SCREEN_LIMIT, OPT_CHECK_FRACTION, OPT_SEED, OPT_MAXIT, OPT_THREADS, OPT_RESAMPLE, OPT_ACCEPT_LARGE,
  OPT_WRITE_ANYWAY, OPT_HTML
};

/* Parse a comma list of groups or a preset into a mask. */
static int parse_groups(const char *text, unsigned *mask)
{
  unsigned masks[2 * TWF_GROUP_COUNT];
  int n, k;
  *mask = 0;
  if (strcmp(text, "geometric") == 0) { *mask = TWF_GROUPS_GEOMETRIC; return 0; }
  if (strcmp(text, "remaster") == 0) { *mask = TWF_GROUPS_REMASTER; return 0; }
  if (strcmp(text, "all") == 0) {
    *mask = TWF_GROUPS_GEOMETRIC | TWF_GROUP_BIT(TWF_GROUP_SCALE);
    return 0;
  }
  if ((n = cli_split_groups(text, masks)) < 0)
    return -1;
  for (k = 0; k < n; k++)
    *mask |= masks[k];
  return *mask ? 0 : -1;
}

/* The walk order: the listed groups first, the others in default order. */
static int parse_priority(const char *text, twf_group priority[TWF_GROUP_COUNT])
{
  unsigned masks[2 * TWF_GROUP_COUNT];
  int used[TWF_GROUP_COUNT] = { 0 }, n = 0, g, k, count;
  if ((count = cli_split_groups(text, masks)) < 0)
    return -1;
  for (k = 0; k < count; k++)
    for (g = 0; g < TWF_GROUP_COUNT; g++)
      if ((masks[k] & TWF_GROUP_BIT(g)) && !used[g]) {
        used[g] = 1;
        priority[n++] = (twf_group)g;
      }
  for (g = 0; g < TWF_GROUP_COUNT; g++)
    if (!used[g])
      priority[n++] = (twf_group)g;
  return 0;
}

/* Value of a parameter in report units, with its unit name. */
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

/* Decimals of a parameter in report units: a tenth of the resolution of
 * the figures (0.01 um, 1e-8 rad). */
static int param_decimals(const twf_param *p, const cli_units *u)
{
  return p->kind == TWF_PARAM_LENGTH ? u->ldec + 2 : p->kind == TWF_PARAM_ANGLE ? u->adec + 1 : 3;
}

static const char *status_name(twf_param_status s)
{
  switch (s) {
  case TWF_PARAM_KEPT: return "estimated";
  case TWF_PARAM_FIXED_STRUCTURAL: return "fixed (redundant)";
  case TWF_PARAM_FIXED_DATA: return "fixed (not in the data)";
  }
  return "?";
}

static const char *robust_name(twf_robust r)
{
  switch (r) {
  case TWF_ROBUST_OFF: return "off";
  case TWF_ROBUST_DROP: return "drop";
  case TWF_ROBUST_HUBER: return "huber";
  case TWF_ROBUST_CAUCHY: return "cauchy";
  }
  return "?";
}

static void explain_text(const twf_calib_result *r, const twf_param_result *p, char *buf, size_t n)
{
  size_t k, used = 0;
  buf[0] = '\0';
  for (k = 0; k < p->n_explain && used + 1 < n; k++) {
    int w = snprintf(buf + used, n - used, "%s%s %+.3g", k ? ", " : "", r->params[p->explain[k]].param.name,
                     p->explain_coef[k]);
    if (w < 0)
      break;
    used += (size_t)w;
  }
}

typedef struct digest { const char *path; char hex[40 > SHA256_DIGEST_STRING_LENGTH ? 40 : SHA256_DIGEST_STRING_LENGTH]; } digest;

/* "base, targets, offsets": the groups of a mask, in the default order. */
static void groups_text(unsigned mask, char *buf, size_t n)
{
  size_t used = 0;
  int g;
  buf[0] = '\0';
  for (g = 0; g < TWF_GROUP_COUNT; g++)
    if (mask & TWF_GROUP_BIT(g)) {
      int w = snprintf(buf + used, n - used, "%s%s", used ? ", " : "", twf_group_name((twf_group)g));
      if (w < 0 || used + (size_t)w >= n)
        break;
      used += (size_t)w;
    }
}

static double len_shown(double v, const cli_units *u) { return v / u->length_si; }

static double norm3(const double *v) { return sqrt(v[0] * v[0] + v[1] * v[1] + v[2] * v[2]); }

static void summary_row(FILE *fp, const char *label, const twf_stats *s, const cli_units *u)
{
  if (s->count == 0) {
    fprintf(fp, "    %-34s %7zu %10s %10s %10s\n", label, s->count, "-", "-", "-");
    return;
  }
  fprintf(fp, "    %-34s %7zu %10.*f %10.*f %10.*f\n", label, s->count, u->ldec, len_shown(s->rms, u), u->ldec,
          len_shown(s->p95, u), u->ldec, len_shown(s->max, u));
}

/* The errors after calibration of the left-out rows of one kind, listed
 * when few. */
static void left_out_errors(FILE *fp, const twf_calib_result *r, unsigned char kind, const cli_units *u)
{
  size_t i, n = 0;
  for (i = 0; i < r->n_meas; i++)
    if (r->excluded[i] == kind)
      n++;
  if (n > 5) {
    const twf_stats *s = &r->excluded_after[kind == TWF_EXCLUDED_DROPPED ? TWF_SET_FIT : TWF_SET_CHECK];
    fprintf(fp, "rms %.*f, max %.*f %s", u->ldec, len_shown(s->rms, u), u->ldec, len_shown(s->max, u), u->length);
    return;
  }
  for (i = 0, n = 0; i < r->n_meas; i++)
    if (r->excluded[i] == kind)
      fprintf(fp, "%s%.*f", n++ ? ", " : "", u->ldec, len_shown(norm3(r->pos_err_after + 3 * i), u));
  fprintf(fp, " %s", u->length);
}

static void print_summary(FILE *fp, const twf_calib_result *r, const cli_units *u, const twf_warnings *w,
                          const char *fitted)
{
  const twf_accuracy_summary *before = r->accuracy_before, *after = r->accuracy_after;
  int have_check = r->n_check_meas > 0;
  char label[96];
  fprintf(fp, "Summary\n");
  fprintf(fp, "  fitted: %s (%zu parameters estimated)\n", fitted, r->n_kept);
  fprintf(fp, "  position error |measured - model|, %s:\n", u->length);
  fprintf(fp, "    %-34s %7s %10s %10s %10s\n", "", "count", "rms", "p95", "max");
  if (have_check) {
    const char *which = r->n_check_flagged ? "check, without flagged rows" : "check";
    snprintf(label, sizeof label, "%s, before", which);
    summary_row(fp, label, &before->position[TWF_SET_CHECK], u);
    snprintf(label, sizeof label, "%s, after", which);
    summary_row(fp, label, &after->position[TWF_SET_CHECK], u);
    if (r->n_check_flagged) {
      summary_row(fp, "check, every row, before", &r->check_all_before, u);
      summary_row(fp, "check, every row, after", &r->check_all_after, u);
    }
  } else {
    summary_row(fp, "fit (no check data), before", &before->position[TWF_SET_FIT], u);
  }
  if (have_check)
    summary_row(fp, "fit, before", &before->position[TWF_SET_FIT], u);
  summary_row(fp, have_check ? "fit, after" : "fit (no check data), after", &after->position[TWF_SET_FIT], u);
  fprintf(fp, "  left out of the figures: %zu fit %s dropped by the outlier screen", r->n_dropped,
          cli_plural(r->n_dropped, "measurement", "measurements"));
  if (r->n_dropped) {
    fprintf(fp, "\n    (errors after calibration ");
    left_out_errors(fp, r, TWF_EXCLUDED_DROPPED, u);
    fputc(')', fp);
  }
  fprintf(fp, ";\n    %zu check %s flagged as gross %s", r->n_check_flagged,
          cli_plural(r->n_check_flagged, "measurement", "measurements"),
          cli_plural(r->n_check_flagged, "error", "errors"));
  if (r->n_check_flagged) {
    fprintf(fp, " (");
    left_out_errors(fp, r, TWF_EXCLUDED_FLAGGED, u);
    fputc(')', fp);
  }
  fprintf(fp, "\n");
  fprintf(fp, "  parameters: %zu estimated, %zu weak, %zu not determined by these poses, %zu fixed as redundant\n",
          r->n_kept, r->n_weak, r->n_fixed_data, r->n_fixed_structural);
  fprintf(fp, "  warnings: %zu\n", w->count);
  fprintf(fp, "  conclusion: %s: %s RMS %.*f -> %.*f %s", twf_calib_verdict_name(r->verdict),
          twf_verdict_basis_name(r->verdict_basis), u->ldec, len_shown(r->verdict_before.rms, u), u->ldec,
          len_shown(r->verdict_after.rms, u), u->length);
  switch (r->verdict) {
  case TWF_VERDICT_IMPROVED:
    fprintf(fp, "%s\n", r->verdict_basis == TWF_BASIS_FIT
                            ? ";\n    no check data, so not validated on held-out poses: hold out poses\n"
                              "    (--check-fraction) or verify on a new campaign before use"
                            : "");
    break;
  case TWF_VERDICT_NOT_IMPROVED:
    fprintf(fp, ",\n    less than a tenth better: keep the previous model\n");
    break;
  case TWF_VERDICT_DO_NOT_USE:
    fprintf(fp, ",\n    worse than the starting model: do not use it (no model file is written\n"
                "    without --write-anyway)\n");
    break;
  }
  fprintf(fp, "\n%s", cli_safety_text);
}

/* The link table of a result: as-built against the starting model. */
static cli_links_table links_table(const twf_model *m, const twf_calib_result *r, const cli_units *u)
{
  return cli_links_table_of(&r->links, r->link_change, m, u, "starting", "as-built", "starting",
                            "asbuilt", 1);
}

/* The as-built geometry: the link parameters against the starting model
 * (intrinsic, so the same whichever redundant parameters were fixed), then
 * the target offsets the fit determined. */
static void print_geometry(FILE *fp, const twf_model *m, const twf_calib_result *r, const cli_units *u,
                           const char *fitted)
{
  cli_links_table t = links_table(m, r, u);
  size_t j;
  fprintf(fp, "\nAs-built link parameters against the starting model (fitted: %s), %s and %s\n", fitted,
          u->length, u->angle);
  fprintf(fp, "  row k: joint k's line and the link to line k+1 (row 0 the base, the last the flange);\n"
              "  dh: common normal of length a and twist alpha, d along the line between normals;\n"
              "  beta: Hayati's form for nearly parallel lines (a, alpha and beta, no d);\n"
              "  theta: the joint's angle at logged zero, so its difference is the zero offset change;\n"
              "  std: one standard deviation, propagated from the parameter covariance%s\n",
          r->links.full_pose ? "" : ";\n  points only: the target offsets absorb the flange link");
  cli_links_print(fp, &t);
  for (j = 0; j < r->asbuilt->n_targets; j++)
    if (r->asbuilt->targets[j].offset_known && r->target_in_fit[j])
      fprintf(fp, "  target %s offset (flange frame): %.*f %.*f %.*f %s\n", m->targets[j].name,
              u->ldec, r->asbuilt->targets[j].offset[0] / u->length_si, u->ldec,
              r->asbuilt->targets[j].offset[1] / u->length_si, u->ldec,
              r->asbuilt->targets[j].offset[2] / u->length_si, u->length);
}

/* The solver section: the fits' iterations and stops, the outlier screen
 * and the measurements it affected, the check measurements flagged. */
static void print_solver(FILE *fp, const cli_inputs *in, const twf_calib_result *r,
                         const twf_calib_options *co, const cli_units *u)
{
  const twf_model *m = in->model;
  const twf_campaign *view = in->campaign;
  char where[TWF_ERROR_TEXT_MAX];
  size_t i;
  fprintf(fp, "\nSolver\n");
  fprintf(fp, "  registration refinement: %d %s, %s\n", r->registration.iterations,
          cli_plural((size_t)r->registration.iterations, "iteration", "iterations"),
          cli_stop_words(r->registration.stop));
  fprintf(fp, "  calibration: %d %s, cost %.6g -> %.6g, %s\n", r->solve.iterations,
          cli_plural((size_t)r->solve.iterations, "iteration", "iterations"), r->solve.cost_start,
          r->solve.cost_end, cli_stop_words(r->solve.stop));
  if (co->robust == TWF_ROBUST_OFF)
    fprintf(fp, "  outlier screen: off\n");
  else if (r->robust_rounds == 0)
    fprintf(fp, "  outlier screen: %s beyond %.3g robust standard deviations; nothing to screen, no refit\n",
            robust_name(co->robust), co->robust_threshold);
  else if (r->robust_rounds == 1)
    fprintf(fp, "  outlier screen: %s beyond %.3g robust standard deviations; refitted once\n",
            robust_name(co->robust), co->robust_threshold);
  else
    fprintf(fp, "  outlier screen: %s beyond %.3g robust standard deviations; refitted %d times\n",
            robust_name(co->robust), co->robust_threshold, r->robust_rounds);
  if (r->n_outliers > 0) {
    fprintf(fp, "  %zu fit %s affected (error at the first fit and after calibration, %s):\n", r->n_outliers,
            cli_plural(r->n_outliers, "measurement", "measurements"), u->length);
    for (i = 0; i < r->n_outliers; i++) {
      const twf_outlier *o = &r->outliers[i];
      const twf_measurement *ms = &view->meas[o->meas];
      cli_meas_where(in, ms, where, sizeof where);
      fprintf(fp, "    %s: pose %s target %s: %.*f (%.1f robust sd), after %.*f, %s\n", where,
              view->pose_ids[ms->pose], m->targets[ms->target].name, u->ldec, o->error_m / u->length_si, o->score,
              u->ldec, len_shown(norm3(r->pos_err_after + 3 * o->meas), u),
              o->weight == 0.0 ? "dropped" : "down-weighted");
    }
  }
  if (r->n_check_flagged > 0) {
    fprintf(fp, "  %zu check %s flagged (error after calibration, %s; against the fit's robust scale):\n",
            r->n_check_flagged, cli_plural(r->n_check_flagged, "measurement", "measurements"), u->length);
    for (i = 0; i < r->n_check_flagged; i++) {
      const twf_outlier *o = &r->check_flagged[i];
      const twf_measurement *ms = &view->meas[o->meas];
      cli_meas_where(in, ms, where, sizeof where);
      fprintf(fp, "    %s: pose %s target %s: %.*f (%.1f robust sd)\n", where, view->pose_ids[ms->pose],
              m->targets[ms->target].name, u->ldec, o->error_m / u->length_si, o->score);
    }
  }
}

/* The identifiability section: the counts, conditioning and observability,
 * each parameter not estimated and why, the offsets left open, the
 * strongest correlations. */
static void print_identifiability(FILE *fp, const twf_model *m, const twf_calib_result *r)
{
  char expl[256];
  size_t i, j;
  fprintf(fp, "\nIdentifiability\n");
  fprintf(fp, "  requested %zu parameters; identifiable for this arm and measurement kind %zu;\n"
              "  estimated %zu; fixed as redundant %zu; fixed because the poses cannot determine them %zu;\n"
              "  weak %zu\n",
          r->n_params, r->structural_count, r->n_kept, r->n_fixed_structural, r->n_fixed_data, r->n_weak);
  fprintf(fp, "  condition number of the scaled Jacobian %.4g; observability O1 %.4g, O2 %.4g, O3 %.4g, O4 %.4g\n",
          r->condition_number, r->observability.o1, r->observability.o2, r->observability.o3,
          r->observability.o4);
  for (j = 0; j < r->n_params; j++) {
    const twf_param_result *p = &r->params[j];
    if (p->status == TWF_PARAM_KEPT ||
        (p->param.group == TWF_GROUP_TARGETS && !r->target_in_fit[p->param.target]))
      continue;
    explain_text(r, p, expl, sizeof expl);
    fprintf(fp, "  %-14s %s%s%s\n", p->param.name, status_name(p->status), expl[0] ? ": ~ " : "", expl);
  }
  for (j = 0; j < r->n_params; j++) {
    const twf_param_result *p = &r->params[j];
    if (p->param.group != TWF_GROUP_OFFSETS || p->status == TWF_PARAM_KEPT)
      continue;
    if (p->status == TWF_PARAM_FIXED_STRUCTURAL && p->n_explain > 0)
      fprintf(fp, "  the offset of joint %s cannot be determined: it is absorbed by %s%s\n",
              m->joints[p->param.joint].name,
              r->params[p->explain[0]].param.group == TWF_GROUP_BASE ? "the base pose"
              : r->params[p->explain[0]].param.group == TWF_GROUP_TARGETS ? "the target offsets"
                                                                          : "other parameters",
              p->param.joint == 0 ? " (rotation about the first axis)"
              : (size_t)p->param.joint + 1 == m->n_joints ? " (rotation about the last axis)" : "");
    else
      fprintf(fp, "  the offset of joint %s is not determined by these poses and keeps its starting value\n",
              m->joints[p->param.joint].name);
  }
  if (r->n_correlations > 0) {
    fprintf(fp, "  strongest correlations above 0.9:");
    for (i = 0; i < r->n_correlations; i++)
      fprintf(fp, "%s %s/%s %.3f", i ? "," : "", r->params[r->correlations[i].a].param.name,
              r->params[r->correlations[i].b].param.name, r->correlations[i].rho);
    fputc('\n', fp);
  }
}

static void print_report(FILE *fp, const cli_inputs *in, const twf_calib_result *r,
                         const twf_calib_options *co, const cli_units *u, const digest *dg, size_t n_dg,
                         const char *created, const twf_warnings *w)
{
  size_t j, i;
  const twf_model *m = in->model;
  const twf_campaign *view = in->campaign;
  const twf_accuracy_summary *before = r->accuracy_before, *after = r->accuracy_after;
  char fitted[160];
  groups_text(r->groups, fitted, sizeof fitted);
  fprintf(fp, "twistfit %s calibrate, %s\n", twf_version(), created);
  for (i = 0; i < n_dg; i++)
    fprintf(fp, "input: %s (SHA-256 %s)\n", dg[i].path, dg[i].hex);
  fprintf(fp, "model: %s, %zu joints, %zu targets; units %s and %s\n", m->name, m->n_joints,
          m->n_targets, u->length, u->angle);
  fprintf(fp, "campaign: %zu poses, %zu measurements: %zu fit, %zu check%s\n", view->n_poses,
          view->n_meas, r->n_fit_meas, r->n_check_meas, view->has_orientation_any ? " (6-D rows)" : "");
  fprintf(fp, "noise: sigma %.*f %s per coordinate (%s)\n", u->ldec, r->sigma_length / u->length_si, u->length,
          r->sigma_source == TWF_SIGMA_ESTIMATED   ? "estimated from the fit residuals"
          : r->sigma_source == TWF_SIGMA_FROM_ROWS ? "from the rows' sigma column"
                                                   : "given with --sigma");
  fputc('\n', fp);
  print_summary(fp, r, u, w, fitted);

  if (w->count > 0) {
    fprintf(fp, "\nWarnings\n");
    for (i = 0; i < w->count; i++)
      fprintf(fp, "  - %s\n", w->items[i].message);
  } else {
    fprintf(fp, "\nwarnings: none\n");
  }

  fputc('\n', fp);
  cli_print_accuracy(fp, "Accuracy before calibration (starting model, registered)", before, m, view, u);
  fputc('\n', fp);
  {
    char title[256];
    snprintf(title, sizeof title, "Accuracy after calibration (calibrated model; fitted: %s)", fitted);
    cli_print_accuracy(fp, title, after, m, view, u);
  }
  cli_print_worst(fp, after, view, m, u);
  if (r->n_dropped > 0 || r->n_check_flagged > 0) {
    fprintf(fp, "  left out of both tables (position error, %s):\n", u->length);
    fprintf(fp, "    %-34s %7s %10s %10s %10s %10s\n", "", "count", "rms before", "max before", "rms after",
            "max after");
    for (i = 0; i < 2; i++) {
      const twf_stats *b = &r->excluded_before[i], *a = &r->excluded_after[i];
      if (b->count == 0)
        continue;
      fprintf(fp, "    %-34s %7zu %10.*f %10.*f %10.*f %10.*f\n",
              i == TWF_SET_FIT ? "fit, dropped by the outlier screen" : "check, flagged as gross errors", b->count,
              u->ldec, len_shown(b->rms, u), u->ldec, len_shown(b->max, u), u->ldec, len_shown(a->rms, u), u->ldec,
              len_shown(a->max, u));
    }
  }
  cli_print_stations(fp, r, view, u);
  cli_print_pattern(fp, m, &r->pattern, r->screen_refused, u);
  cli_print_compliance(fp, r->asbuilt, view, &r->compliance, u);

  print_solver(fp, in, r, co, u);

  print_geometry(fp, m, r, u, fitted);

  print_identifiability(fp, m, r);

  fprintf(fp, "\nParameters fitted (%s; raw, in the error model's coordinates; change from the\n"
              "starting model)\n", fitted);
  fprintf(fp, "  %-8s %-14s %14s %12s %-5s %s\n", "group", "name", "value", "std", "unit", "status");
  for (j = 0; j < r->n_params; j++) {
    const twf_param_result *p = &r->params[j];
    const char *unit;
    double v = param_shown(&p->param, p->change, u, &unit);
    double s = param_shown(&p->param, p->std, u, &unit);
    if (p->status == TWF_PARAM_KEPT)
      fprintf(fp, "  %-8s %-14s %14.*f %12.*f %-5s %s%s\n", twf_group_name(p->param.group), p->param.name,
              param_decimals(&p->param, u), v, param_decimals(&p->param, u), s,
              unit, status_name(p->status), p->weak ? ", weak" : "");
    else
      fprintf(fp, "  %-8s %-14s %14s %12s %-5s %s\n", twf_group_name(p->param.group), p->param.name, "-", "-",
              unit,
              p->param.group == TWF_GROUP_TARGETS && !r->target_in_fit[p->param.target]
                  ? "fixed (target not measured)"
                  : status_name(p->status));
  }
  cli_print_predicted(fp, r, m, in->campaign, co, u);
}

/* --resample: the bootstrap's spreads beside the covariance figures. */
static int print_resample(FILE *fp, const cli_inputs *in, const twf_calib_result *r, const twf_calib_options *co,
                          const cli_units *u, size_t n, twf_resample_result **keep, twf_warnings *keep_w)
{
  twf_resample_result *rs = NULL;
  twf_warnings w;
  twf_error err;
  size_t k;
  twf_warnings_init(&w);
  if (twf_calibrate_resample(in->model, in->campaign, co, r, n, co->seed, &rs, &w, &err) != TWF_OK) {
    twf_warnings_clear(&w);
    return cli_report_error(&err);
  }
  fprintf(fp, "\nResampling: %zu refits on the fit poses drawn with replacement (seed %llu), %zu refused\n",
          rs->n_refits, rs->seed, rs->n_refits - rs->n_ok);
  fprintf(fp, "  %-16s %14s %14s %7s\n", "parameter", "std", "resampled", "ratio");
  for (k = 0; k < rs->n_params; k++) {
    const twf_param_result *p = &r->params[k];
    double sc = p->param.kind == TWF_PARAM_LENGTH ? u->length_si : p->param.kind == TWF_PARAM_ANGLE ? u->angle_si : 1.0;
    const char *un = p->param.kind == TWF_PARAM_LENGTH ? u->length : p->param.kind == TWF_PARAM_ANGLE ? u->angle : "";
    if (p->status != TWF_PARAM_KEPT)
      continue;
    fprintf(fp, "  %-16s %10.4g %-3s %10.4g %-3s %7.2f%s\n", p->param.name, p->std / sc, un, rs->params[k].std / sc, un,
            rs->params[k].ratio, rs->params[k].disagree ? "  disagree" : "");
  }
  if (rs->n_check > 0)
    fprintf(fp, "  check set: RMS %.4g %s (resampled %.4g +- %.4g), max %.4g %s (resampled %.4g +- %.4g)\n",
            rs->check_base[0] / u->length_si, u->length, rs->check_mean[0] / u->length_si, rs->check_std[0] / u->length_si,
            rs->check_base[2] / u->length_si, u->length, rs->check_mean[2] / u->length_si, rs->check_std[2] / u->length_si);
  cli_print_warnings(&w);
  *keep = rs;
  *keep_w = w;
  return TWF_EXIT_OK;
}

/* The member "resample" of --json: the same figures as the text, lengths
 * and angles in the report's units (null where a figure is missing). */
static json_t *resample_json(const twf_resample_result *rs, const twf_calib_result *r, const cli_units *u,
                             const twf_warnings *w)
{
  static const char *const fig[TWF_RESAMPLE_FIGURES] = { "rms", "p95", "max" };
  json_t *params = json_array(), *warn = json_array(), *check = json_object(), *o;
  size_t k;
  for (k = 0; k < rs->n_params; k++) {
    const twf_param_result *p = &r->params[k];
    const twf_resample_param *q = &rs->params[k];
    const char *unit;
    if (p->status != TWF_PARAM_KEPT)
      continue;
    o = json_pack("{s:s, s:s, s:I}", "group", twf_group_name(p->param.group), "name", p->param.name, "refits",
                  (json_int_t)q->n);
    json_object_set_new(o, "std", cli_json_number(param_shown(&p->param, p->std, u, &unit)));
    json_object_set_new(o, "resampled_std", cli_json_number(param_shown(&p->param, q->std, u, &unit)));
    json_object_set_new(o, "change", cli_json_number(param_shown(&p->param, p->change, u, &unit)));
    json_object_set_new(o, "resampled_mean_change", cli_json_number(param_shown(&p->param, q->mean, u, &unit)));
    json_object_set_new(o, "unit", json_string(unit));
    json_object_set_new(o, "ratio", cli_json_number(q->ratio));
    json_object_set_new(o, "disagree", json_boolean(q->disagree));
    json_array_append_new(params, o);
  }
  for (k = 0; rs->n_check > 0 && k < TWF_RESAMPLE_FIGURES; k++)
    json_object_set_new(check, fig[k],
                        json_pack("{s:o, s:o, s:o}", "value", cli_json_number(rs->check_base[k] / u->length_si),
                                  "resampled_mean", cli_json_number(rs->check_mean[k] / u->length_si),
                                  "resampled_std", cli_json_number(rs->check_std[k] / u->length_si)));
  for (k = 0; k < w->count; k++)
    json_array_append_new(warn, json_string(w->items[k].message));
  return json_pack("{s:I, s:I, s:I, s:I, s:o, s:o, s:o}", "refits", (json_int_t)rs->n_refits, "refused",
                   (json_int_t)(rs->n_refits - rs->n_ok), "seed", (json_int_t)rs->seed, "refits_with_check",
                   (json_int_t)rs->n_check, "parameters", params, "check", rs->n_check > 0 ? check : json_null(),
                   "warnings", warn);
}

/* What made the report: the tool, when, from which inputs, in which units. */
static void add_json_origin(json_t *root, const digest *dg, size_t n_dg, const char *created, const cli_units *u)
{
  json_t *inputs = json_array();
  size_t i;
  for (i = 0; i < n_dg; i++)
    json_array_append_new(inputs, json_pack("{s:s, s:s}", "path", dg[i].path, "sha256", dg[i].hex));
  json_object_set_new(root, "tool", json_pack("{s:s, s:s}", "name", "twistfit", "version", twf_version()));
  json_object_set_new(root, "command", json_string("calibrate"));
  json_object_set_new(root, "created", json_string(created));
  json_object_set_new(root, "inputs", inputs);
  json_object_set_new(root, "units", json_pack("{s:s, s:s}", "length", u->length, "angle", u->angle));
}

/* The campaign's counts and the noise the fit weighted by. */
static void add_json_campaign(json_t *root, const twf_campaign *view, const twf_calib_result *r, const cli_units *u)
{
  json_object_set_new(root, "campaign",
                      json_pack("{s:I, s:I, s:I, s:I}", "poses", (json_int_t)view->n_poses, "measurements",
                                (json_int_t)view->n_meas, "fit", (json_int_t)r->n_fit_meas, "check",
                                (json_int_t)r->n_check_meas));
  json_object_set_new(root, "sigma", json_pack("{s:o, s:s, s:b}", "length", cli_json_number(r->sigma_length / u->length_si),
                                               "source",
                                               r->sigma_source == TWF_SIGMA_ESTIMATED   ? "estimated"
                                               : r->sigma_source == TWF_SIGMA_FROM_ROWS ? "rows"
                                                                                        : "given",
                                               "estimated", r->sigma_source == TWF_SIGMA_ESTIMATED));
}

/* The base pose before and after, and the target offsets the fit
 * determined. */
static void add_json_base_targets(json_t *root, const twf_model *m, const twf_calib_result *r, const cli_units *u)
{
  json_t *targets = json_object();
  size_t j;
  /* base_in_tracker: the older name, kept for existing readers */
  json_object_set_new(root, "base_in_instrument",
                      json_pack("{s:o, s:o}", "before", cli_json_pose(&r->base_before, u), "after",
                                cli_json_pose(&r->base_in_tracker, u)));
  json_object_set_new(root, "base_in_tracker",
                      json_pack("{s:o, s:o}", "before", cli_json_pose(&r->base_before, u), "after",
                                cli_json_pose(&r->base_in_tracker, u)));
  for (j = 0; j < r->asbuilt->n_targets; j++)
    if (r->target_in_fit[j])
      json_object_set_new(targets, m->targets[j].name,
                          json_pack("[o,o,o]", cli_json_number(r->asbuilt->targets[j].offset[0] / u->length_si),
                                    cli_json_number(r->asbuilt->targets[j].offset[1] / u->length_si),
                                    cli_json_number(r->asbuilt->targets[j].offset[2] / u->length_si)));
  json_object_set_new(root, "target_offsets_flange", targets);
}

/* The summary: the verdict and the figures it used, the left-out rows. */
static void add_json_summary(json_t *root, const twf_model *m, const twf_campaign *view, const twf_calib_result *r,
                             const cli_units *u)
{
  json_t *flagged = json_array();
  char gtext[160];
  size_t i;
  groups_text(r->groups, gtext, sizeof gtext);
  json_object_set_new(root, "fitted", json_string(gtext));
  json_object_set_new(root, "verdict",
                      json_pack("{s:s, s:s, s:o, s:o}", "conclusion", twf_calib_verdict_name(r->verdict), "basis",
                                twf_verdict_basis_name(r->verdict_basis), "before",
                                cli_json_stats(&r->verdict_before, u->length_si), "after",
                                cli_json_stats(&r->verdict_after, u->length_si)));
  json_object_set_new(root, "left_out",
                      json_pack("{s:{s:o, s:o}, s:{s:o, s:o}}", "fit_dropped", "before",
                                cli_json_stats(&r->excluded_before[TWF_SET_FIT], u->length_si), "after",
                                cli_json_stats(&r->excluded_after[TWF_SET_FIT], u->length_si), "check_flagged",
                                "before", cli_json_stats(&r->excluded_before[TWF_SET_CHECK], u->length_si), "after",
                                cli_json_stats(&r->excluded_after[TWF_SET_CHECK], u->length_si)));
  json_object_set_new(root, "check_every_row",
                      json_pack("{s:o, s:o}", "before", cli_json_stats(&r->check_all_before, u->length_si),
                                "after", cli_json_stats(&r->check_all_after, u->length_si)));
  for (i = 0; i < r->n_check_flagged; i++) {
    const twf_outlier *o = &r->check_flagged[i];
    const twf_measurement *ms = &view->meas[o->meas];
    json_array_append_new(flagged, json_pack("{s:I, s:s, s:s, s:o, s:o}", "line", (json_int_t)ms->line, "pose",
                                             view->pose_ids[ms->pose], "target", m->targets[ms->target].name,
                                             "error", cli_json_number(o->error_m / u->length_si), "score",
                                             cli_json_number(o->score)));
  }
  json_object_set_new(root, "check_flagged", flagged);
}

/* The solver's iterations and stops, the outlier screen and the fit
 * measurements it affected. */
static void add_json_solver(json_t *root, const twf_model *m, const twf_campaign *view, const twf_calib_result *r,
                            const twf_calib_options *co, const cli_units *u)
{
  json_t *outl = json_array();
  size_t i;
  json_object_set_new(root, "solver",
                      json_pack("{s:{s:i, s:s}, s:{s:i, s:o, s:o, s:s, s:b}, s:{s:s, s:o, s:i}}",
                                "registration", "iterations", r->registration.iterations, "stop",
                                twf_stop_name(r->registration.stop), "calibration", "iterations",
                                r->solve.iterations, "cost_start", cli_json_number(r->solve.cost_start),
                                "cost_end", cli_json_number(r->solve.cost_end), "stop",
                                twf_stop_name(r->solve.stop), "converged", twf_stop_converged(r->solve.stop),
                                "robust", "mode", robust_name(co->robust), "threshold",
                                cli_json_number(co->robust_threshold), "refits", r->robust_rounds));
  for (i = 0; i < r->n_outliers; i++) {
    const twf_outlier *o = &r->outliers[i];
    const twf_measurement *ms = &view->meas[o->meas];
    json_array_append_new(outl, json_pack("{s:I, s:s, s:s, s:o, s:o, s:o}", "line", (json_int_t)ms->line, "pose",
                                          view->pose_ids[ms->pose], "target", m->targets[ms->target].name,
                                          "error", cli_json_number(o->error_m / u->length_si), "score",
                                          cli_json_number(o->score), "weight", cli_json_number(o->weight)));
  }
  json_object_set_new(root, "outliers", outl);
}

/* The residual pattern, the compliance, each measurement's errors before
 * and after, and the as-built link table. */
static void add_json_residuals(json_t *root, const twf_model *m, const twf_campaign *view, const twf_calib_result *r,
                               const cli_units *u)
{
  static const char *const names[2] = { "before", "after" };
  const double *pe[2] = { r->pos_err_before, r->pos_err_after };
  const double *ae[2] = { r->angle_err_before, r->angle_err_after };
  json_t *meas;
  cli_links_table t;
  json_object_set_new(root, "residual_pattern", cli_json_pattern(m, &r->pattern, r->screen_refused, u));
  if (r->compliance.n_joints > 0)
    json_object_set_new(root, "compliance", cli_json_compliance(r->asbuilt, view, &r->compliance, u));
  meas = cli_json_measurements(view, m, r->meas_set, 2, names, pe, ae, r->excluded, r->outliers, r->n_outliers, u);
  if (meas != NULL)
    json_object_set_new(root, "measurements", meas);
  t = links_table(m, r, u);
  json_object_set_new(root, "links", cli_links_json(&t));
}

/* The parameters member: each parameter's change and std in report
 * units (null when not estimated), with what explains a fixed one. */
static json_t *params_json(const twf_calib_result *r, const cli_units *u)
{
  json_t *params = json_array();
  size_t i, j;
  for (j = 0; j < r->n_params; j++) {
    const twf_param_result *p = &r->params[j];
    const char *unit;
    double v = param_shown(&p->param, p->change, u, &unit);
    double s = param_shown(&p->param, p->std, u, &unit);
    json_t *o = json_pack("{s:s, s:s, s:s, s:s, s:b}", "group", twf_group_name(p->param.group), "name",
                          p->param.name, "unit", unit, "status", status_name(p->status), "weak", p->weak);
    json_object_set_new(o, "value", p->status == TWF_PARAM_KEPT ? cli_json_number(v) : json_null());
    json_object_set_new(o, "std", p->status == TWF_PARAM_KEPT ? cli_json_number(s) : json_null());
    if (p->n_explain > 0) {
      json_t *e = json_array();
      for (i = 0; i < p->n_explain; i++)
        json_array_append_new(e, json_pack("{s:s, s:o}", "param", r->params[p->explain[i]].param.name, "coef",
                                           cli_json_number(p->explain_coef[i])));
      json_object_set_new(o, "explained_by", e);
    }
    json_array_append_new(params, o);
  }
  return params;
}

/* The identifiability member: the counts, conditioning, observability
 * and the strongest correlations. */
static json_t *identifiability_json(const twf_calib_result *r)
{
  json_t *corr = json_array();
  size_t i;
  for (i = 0; i < r->n_correlations; i++)
    json_array_append_new(corr, json_pack("{s:s, s:s, s:o}", "a", r->params[r->correlations[i].a].param.name, "b",
                                          r->params[r->correlations[i].b].param.name, "rho",
                                          cli_json_number(r->correlations[i].rho)));
  return json_pack("{s:I, s:I, s:I, s:I, s:I, s:I, s:o, s:[o,o,o,o], s:o}", "requested",
                   (json_int_t)r->n_params, "identifiable", (json_int_t)r->structural_count, "estimated",
                   (json_int_t)r->n_kept, "fixed_redundant", (json_int_t)r->n_fixed_structural,
                   "fixed_by_data", (json_int_t)r->n_fixed_data, "weak", (json_int_t)r->n_weak,
                   "condition_number", cli_json_number(r->condition_number), "observability",
                   cli_json_number(r->observability.o1), cli_json_number(r->observability.o2),
                   cli_json_number(r->observability.o3), cli_json_number(r->observability.o4),
                   "correlations", corr);
}

/* The report as JSON: the members in the order readers have seen them. */
static json_t *report_json(const cli_inputs *in, const twf_calib_result *r, const twf_calib_options *co,
                           const cli_units *u, const digest *dg, size_t n_dg, const char *created,
                           const twf_warnings *w)
{
  const twf_campaign *view = in->campaign;
  const twf_model *m = in->model;
  json_t *root = json_object(), *warn = json_array();
  size_t i;
  add_json_origin(root, dg, n_dg, created, u);
  add_json_campaign(root, view, r, u);
  add_json_base_targets(root, m, r, u);
  json_object_set_new(root, "accuracy_before", cli_json_accuracy(r->accuracy_before, m, view, u));
  json_object_set_new(root, "accuracy_after", cli_json_accuracy(r->accuracy_after, m, view, u));
  json_object_set_new(root, "accuracy_after_fit_screened", cli_json_stats(&r->fit_screened, u->length_si));
  add_json_summary(root, m, view, r, u);
  add_json_solver(root, m, view, r, co, u);
  add_json_residuals(root, m, view, r, u);
  json_object_set_new(root, "parameters", params_json(r, u));
  json_object_set_new(root, "identifiability", identifiability_json(r));
  /* for the HTML report: the arm and its joints' units, the singular
   * values against the noise, the correlation matrix */
  json_object_set_new(root, "robot", cli_json_robot(m, u));
  json_object_set_new(root, "singular_values", cli_json_singular_values(r, co->weak_ratio, u));
  json_object_set_new(root, "correlation_matrix", cli_json_correlation_matrix(r));
  for (i = 0; i < w->count; i++)
    json_array_append_new(warn, json_string(w->items[i].message));
  json_object_set_new(root, "warnings", warn);
  json_object_set_new(root, "safety", json_string(cli_safety_text));
  return root;
}

static int put_model(FILE *fp, void *ctx, twf_error *err)
{
  const char *t = cli_safety_text;
  fprintf(fp, "; Calibrated model written by twistfit calibrate (the [asbuilt] section says\n"
              "; how it came about).\n");
  /* the report's cautions in full, as comment lines */
  while (*t != '\0') {
    const char *nl = strchr(t, '\n');
    size_t len = nl ? (size_t)(nl - t) : strlen(t);
    fprintf(fp, "; %.*s\n", (int)len, t);
    t += len + (nl ? 1 : 0);
  }
  fprintf(fp, "; run_id: %s\n", cli_run_id());
  return twf_model_write((const twf_model *)ctx, fp, err) == TWF_OK ? 0 : -1;
}

typedef struct base_file_ctx {
  const twf_pose *B;  /* one per station */
  const char (*names)[TWF_NAME_MAX];
  size_t n;
  twf_length_unit lu;
} base_file_ctx;

static int put_base(FILE *fp, void *ctx, twf_error *err)
{
  const base_file_ctx *b = ctx;
  fprintf(fp, "; run_id: %s\n", cli_run_id());
  /* one station: the [base] file; several: a [station NAME] section each */
  return twf_base_write_stations(b->B, b->names, b->n, b->lu, "base pose fitted by twistfit calibrate", fp, err) ==
                 TWF_OK
             ? 0
             : -1;
}

/* Model files keep every line under TWF_MODEL_LINE_MAX: shorten long
 * metadata values (a long command line or path) with a marked cut. */
static void meta_set_short(twf_model *m, const char *key, const char *value)
{
  char buf[TWF_MODEL_LINE_MAX];
  size_t room = TWF_MODEL_LINE_MAX - strlen(key) - 8;
  if (strlen(value) <= room) {
    twf_model_meta_set(m, key, value);
    return;
  }
  /* keep the head (the command and its options), mark the cut */
  snprintf(buf, sizeof buf, "%.*s...", (int)(room - 3), value);
  twf_model_meta_set(m, key, buf);
}

/* The command line as typed (before getopt reorders argv), cut to n - 1
 * bytes. */
static void command_line_of(int argc, char **argv, char *cmdline, size_t n)
{
  size_t used = 0;
  int k;
  cmdline[0] = '\0';
  for (k = 0; k < argc && used + 2 < n; k++) {
    int w = snprintf(cmdline + used, n - used, "%s%s", k ? " " : "twistfit ", argv[k]);
    if (w < 0)
      break;
    used = used + (size_t)w < n ? used + (size_t)w : n - 1;
  }
}

/* The metadata of the as-built model: the earlier records of a model that
 * was itself calibrated stay, numbered, and this run's is added (when it
 * was made, by what command from which inputs, what was fitted, the
 * figures and the verdict). */
static int record_run(twf_calib_result *res, const cli_units *u, const char *created, const char *cmdline,
                      const digest *dg, size_t n_dg, int write_anyway)
{
  const twf_accuracy_summary *before = res->accuracy_before, *after = res->accuracy_after;
  twf_error err;
  size_t i;
  char key[TWF_NAME_MAX], val[256];
  long record_no = 0;
  twf_error_clear(&err);
  if (twf_asbuilt_record_push(res->asbuilt, &record_no, &err) != TWF_OK)
    return cli_report_error(&err);
  twf_model_meta_set(res->asbuilt, "created", created);
  twf_model_meta_set(res->asbuilt, "tool", "twistfit " PACKAGE_VERSION);
  meta_set_short(res->asbuilt, "command", cmdline);
  if (record_no > 0) {
    snprintf(val, sizeof val, "record%ld (the starting model's own record)", record_no);
    twf_model_meta_set(res->asbuilt, "started_from", val);
  }
  for (i = 0; i < n_dg; i++) {
    snprintf(key, sizeof key, "input%zu", i + 1);
    meta_set_short(res->asbuilt, key, dg[i].path);
    snprintf(key, sizeof key, "input%zu_sha256", i + 1);
    twf_model_meta_set(res->asbuilt, key, dg[i].hex);
  }
  groups_text(res->groups, val, sizeof val);
  twf_model_meta_set(res->asbuilt, "fitted", val);
  /* the figures over the measurements the fit kept (the report's) */
  snprintf(val, sizeof val, "%.6g %s", before->position[TWF_SET_FIT].rms / u->length_si, u->length);
  twf_model_meta_set(res->asbuilt, "rms_before_fit", val);
  snprintf(val, sizeof val, "%.6g %s", after->position[TWF_SET_FIT].rms / u->length_si, u->length);
  twf_model_meta_set(res->asbuilt, "rms_after_fit", val);
  snprintf(val, sizeof val, "%zu", res->n_dropped);
  twf_model_meta_set(res->asbuilt, "outliers_dropped", val);
  if (after->position[TWF_SET_CHECK].count > 0) {
    snprintf(val, sizeof val, "%.6g %s", before->position[TWF_SET_CHECK].rms / u->length_si, u->length);
    twf_model_meta_set(res->asbuilt, "rms_before_check", val);
    snprintf(val, sizeof val, "%.6g %s", after->position[TWF_SET_CHECK].rms / u->length_si, u->length);
    twf_model_meta_set(res->asbuilt, "rms_after_check", val);
    snprintf(val, sizeof val, "%zu", res->n_check_flagged);
    twf_model_meta_set(res->asbuilt, "check_flagged", val);
  }
  snprintf(val, sizeof val, "%s (%s RMS %.6g -> %.6g %s)", twf_calib_verdict_name(res->verdict),
           twf_verdict_basis_name(res->verdict_basis), res->verdict_before.rms / u->length_si,
           res->verdict_after.rms / u->length_si, u->length);
  twf_model_meta_set(res->asbuilt, "verdict", val);
  {
    /* the weak parameters by name, and those the poses could not determine */
    size_t used = 0, k, nw = 0, nd = 0;
    int pass;
    for (pass = 0; pass < 2; pass++) {
      used = 0;
      val[0] = '\0';
      for (k = 0; k < res->n_params; k++) {
        const twf_param_result *p = &res->params[k];
        int w;
        if (pass == 0 ? !p->weak : p->status != TWF_PARAM_FIXED_DATA)
          continue;
        pass == 0 ? nw++ : nd++;
        w = snprintf(val + used, sizeof val - used, "%s%s", used ? ", " : "", p->param.name);
        if (w < 0 || used + (size_t)w >= sizeof val - 8) {
          snprintf(val + used, sizeof val - used, ", ...");
          break;
        }
        used += (size_t)w;
      }
      if ((pass == 0 ? nw : nd) > 0)
        meta_set_short(res->asbuilt, pass == 0 ? "weak_parameters" : "undetermined_parameters", val);
    }
  }
  if (res->verdict == TWF_VERDICT_DO_NOT_USE && write_anyway)
    twf_model_meta_set(res->asbuilt, "written_anyway",
                       "yes: the report said do not use this model (--write-anyway)");
  return TWF_EXIT_OK;
}

static const struct option calibrate_longopts[] = {
  CLI_INPUT_LONGOPTS,
  { "output", required_argument, NULL, 'o' },
  { "base-output", required_argument, NULL, OPT_BASE_OUT },
  { "json", required_argument, NULL, OPT_JSON },
  { "residuals", required_argument, NULL, OPT_RESIDUALS },
  { "fit", required_argument, NULL, OPT_FIT },
  { "priority", required_argument, NULL, OPT_PRIORITY },
  { "sigma", required_argument, NULL, OPT_SIGMA },
  { "sigma-angle", required_argument, NULL, OPT_SIGMA_ANGLE },
  { "robust", required_argument, NULL, OPT_ROBUST },
  { "robust-threshold", required_argument, NULL, OPT_ROBUST_K },
  { "screen-limit", required_argument, NULL, OPT_SCREEN_LIMIT },
  { "check-fraction", required_argument, NULL, OPT_CHECK_FRACTION },
  { "seed", required_argument, NULL, OPT_SEED },
  { "max-iterations", required_argument, NULL, OPT_MAXIT },
  { "threads", required_argument, NULL, OPT_THREADS },
  { "resample", required_argument, NULL, OPT_RESAMPLE },
  { "accept-large", no_argument, NULL, OPT_ACCEPT_LARGE },
  { "write-anyway", no_argument, NULL, OPT_WRITE_ANYWAY },
  { "html", required_argument, NULL, OPT_HTML },
  { "force", no_argument, NULL, 'f' },
  { "help", no_argument, NULL, 'h' },
  { NULL, 0, NULL, 0 }
};

/* The command's settings as the options give them. The sigmas stay text
 * until the model's units are known, the group lists until all options
 * are read; co is completed by parse_options and load_inputs. The input
 * options go to the job's cli_inputs (cli_inputs_option). */
typedef struct calib_settings {
  const char *model_out, *base_out, *json_path, *residuals_path, *html_path;
  const char *sigma_text, *sigma_angle_text, *fit_text, *priority_text;
  int force, write_anyway;
  int help_shown;      /* -h: the help is printed, nothing else to do */
  int first_operand;   /* optind after the options: MODEL, then the data */
  size_t n_resample;   /* --resample, 0: none */
  twf_calib_options co;
  char cmdline[1024];  /* as typed (getopt reorders argv), for the record */
} calib_settings;

static void calib_settings_init(calib_settings *s)
{
  memset(s, 0, sizeof *s);
  s->co = twf_calib_default_options();
}

static int parse_robust(calib_settings *s, const char *arg)
{
  if (strcmp(arg, "drop") == 0) s->co.robust = TWF_ROBUST_DROP;
  else if (strcmp(arg, "huber") == 0) s->co.robust = TWF_ROBUST_HUBER;
  else if (strcmp(arg, "cauchy") == 0) s->co.robust = TWF_ROBUST_CAUCHY;
  else if (strcmp(arg, "off") == 0) s->co.robust = TWF_ROBUST_OFF;
  else return cli_usage_error("calibrate", "--robust takes drop, huber, cauchy or off");
  return 0;
}

static int parse_robust_threshold(calib_settings *s, const char *arg)
{
  if (cli_parse_double(arg, &s->co.robust_threshold) != 0 || s->co.robust_threshold <= 0)
    return cli_usage_error("calibrate", "--robust-threshold takes a positive number");
  return 0;
}

static int parse_screen_limit(calib_settings *s, const char *arg)
{
  double pct;
  if (cli_parse_double(arg, &pct) != 0 || !(pct > 0 && pct <= 100))
    return cli_usage_error("calibrate", "--screen-limit takes a percentage above 0 and at most 100");
  s->co.screen_max_fraction = pct / 100.0;
  return 0;
}

static int parse_check_fraction(calib_settings *s, const char *arg)
{
  double *f = &s->co.check_fraction;
  if (cli_parse_double(arg, f) != 0 || *f < 0 || *f >= 1)
    return cli_usage_error("calibrate", "--check-fraction takes a number from 0 up to (not including) 1");
  return 0;
}

static int parse_seed(calib_settings *s, const char *arg)
{
  char *end;
  errno = 0;
  s->co.seed = strtoull(arg, &end, 10);
  if (*end != '\0' || *arg == '\0' || *arg == '-' || errno == ERANGE)
    return cli_usage_error("calibrate", "--seed takes a non-negative whole number");
  return 0;
}

/* A whole number from lo to hi into *v: 0, or -1 for anything else. */
static int count_in(const char *arg, long lo, long hi, long *v)
{
  char *end;
  *v = strtol(arg, &end, 10);
  return *end == '\0' && *v >= lo && *v <= hi ? 0 : -1;
}

/* --max-iterations, --threads and --resample. */
static int parse_count(calib_settings *s, int opt, const char *arg)
{
  long v;
  switch (opt) {
  case OPT_MAXIT:
    if (count_in(arg, 1, 100000, &v) != 0)
      return cli_usage_error("calibrate", "--max-iterations takes a count from 1 to 100000");
    s->co.max_iterations = (int)v;
    break;
  case OPT_THREADS:
    if (count_in(arg, 1, 256, &v) != 0)
      return cli_usage_error("calibrate", "--threads takes a count from 1 to 256");
    s->co.threads = (int)v;
    break;
  default:
    if (count_in(arg, 1, 100000, &v) != 0)
      return cli_usage_error("calibrate", "--resample takes a count from 1 to 100000");
    s->n_resample = (size_t)v;
    break;
  }
  return 0;
}

/* One option of getopt_long into s, or into in for the input options: 0,
 * or the exit status of a bad one. */
static int take_option(calib_settings *s, cli_inputs *in, int opt, const char *arg, char **argv)
{
  int status;
  if (cli_inputs_option(in, "calibrate", opt, arg, &status))
    return status;
  switch (opt) {
  case 'o': s->model_out = arg; break;
  case OPT_BASE_OUT: s->base_out = arg; break;
  case OPT_JSON: s->json_path = arg; break;
  case OPT_RESIDUALS: s->residuals_path = arg; break;
  case OPT_HTML: s->html_path = arg; break;
  case OPT_FIT: s->fit_text = arg; break;
  case OPT_PRIORITY: s->priority_text = arg; break;
  case OPT_SIGMA: s->sigma_text = arg; break;
  case OPT_SIGMA_ANGLE: s->sigma_angle_text = arg; break;
  case OPT_ROBUST: return parse_robust(s, arg);
  case OPT_ROBUST_K: return parse_robust_threshold(s, arg);
  case OPT_SCREEN_LIMIT: return parse_screen_limit(s, arg);
  case OPT_CHECK_FRACTION: return parse_check_fraction(s, arg);
  case OPT_SEED: return parse_seed(s, arg);
  case OPT_MAXIT:
  case OPT_THREADS:
  case OPT_RESAMPLE: return parse_count(s, opt, arg);
  case OPT_ACCEPT_LARGE: s->co.accept_large = 1; break;
  case OPT_WRITE_ANYWAY: s->write_anyway = 1; break;
  case 'f': s->force = 1; break;
  case 'h': fputs(calibrate_help, stdout); s->help_shown = 1; break;
  default: return cli_bad_option("calibrate", opt, argv);
  }
  return 0;
}

/* --fit and --priority into co, once all options are read. */
static int take_groups(calib_settings *s)
{
  if (s->fit_text != NULL && parse_groups(s->fit_text, &s->co.groups) != 0)
    return cli_usage_error("calibrate", "unknown group in --fit '%s'", s->fit_text);
  if (s->priority_text != NULL && parse_priority(s->priority_text, s->co.priority) != 0)
    return cli_usage_error("calibrate", "unknown group in --priority '%s'", s->priority_text);
  return 0;
}

/* The command line into s (the input options into in): 0, or the exit
 * status of a usage error; s->help_shown after -h. */
static int parse_options(int argc, char **argv, calib_settings *s, cli_inputs *in)
{
  int opt, status;
  calib_settings_init(s);
  command_line_of(argc, argv, s->cmdline, sizeof s->cmdline);
  optind = 0;
  opterr = 0;
  while ((opt = getopt_long(argc, argv, ":o:fh", calibrate_longopts, NULL)) != -1)
    if ((status = take_option(s, in, opt, optarg, argv)) != 0 || s->help_shown)
      return status;
  s->first_operand = optind;
  return take_groups(s);
}

/* What a run reads and makes; calib_job_free releases it. */
typedef struct calib_job {
  cli_inputs in;                   /* the input options, then the model and campaign */
  cli_units u;                     /* the model's, for the report */
  FILE *txt;                       /* the text report: stderr when --json is '-' */
  digest dg[6];                    /* one per input path (at most 5) */
  size_t n_dg;
  char created[64];                /* when the run was made, UTC */
  twf_warnings warnings;           /* the readers', then the calibration's */
  twf_calib_result *res;
  twf_resample_result *resampled;  /* --resample */
  twf_warnings resample_w;
  json_t *root;                    /* the JSON report, for --json and --html */
} calib_job;

static void calib_job_init(calib_job *j)
{
  memset(j, 0, sizeof *j);
  cli_inputs_init(&j->in);
  twf_warnings_init(&j->warnings);
  twf_warnings_init(&j->resample_w);
  j->txt = stdout;
}

static void calib_job_free(calib_job *j)
{
  json_decref(j->root);
  twf_resample_result_free(j->resampled);
  twf_warnings_clear(&j->resample_w);
  twf_calib_result_free(j->res);
  twf_warnings_clear(&j->warnings);
  cli_inputs_free(&j->in);
}

/* The compliance group fits joint yield under gravity: without the
 * model's masses there is nothing to fit. */
static int check_masses(const calib_settings *s, const calib_job *j)
{
  if (!(s->co.groups & TWF_GROUP_BIT(TWF_GROUP_COMPLIANCE)) || twf_model_has_masses(j->in.model))
    return TWF_EXIT_OK;
  fprintf(stderr, "twistfit: error: %s: the compliance group needs a mass model: the model declares no "
                  "masses\n", j->in.model_path);
  fprintf(stderr, "twistfit: hint: declare the bodies' masses ([mass JOINT]) and the payloads ([payload "
                  "NAME]) in the model file, see twistfit-model(5)\n");
  return TWF_EXIT_INPUT;
}

/* --sigma and --sigma-angle into co, in the model's units. */
static int take_sigmas(calib_settings *s, const calib_job *j)
{
  const cli_units *u = &j->u;
  int status;
  /* bounded: a sigma far outside what an instrument can have (1e-300)
   * would reach the solver as infinite weights */
  if (s->sigma_text != NULL &&
      (status = cli_parse_bounded("calibrate", "--sigma", s->sigma_text, u->length_si, u->length, 1e-9, 1.0,
                                  &s->co.sigma_length)) != 0)
    return status;
  if (s->sigma_angle_text != NULL &&
      (status = cli_parse_bounded("calibrate", "--sigma-angle", s->sigma_angle_text, u->angle_si, u->angle, 1e-9, 1.0,
                                  &s->co.sigma_angle)) != 0)
    return status;
  /* as verify treats --tol-angle-max: an orientation option without 6-D
   * rows is a mistake, not a no-op */
  if (s->sigma_angle_text != NULL && !j->in.campaign->has_orientation_any)
    return cli_usage_error("calibrate", "--sigma-angle needs 6-D rows (with a quaternion); the campaign has none");
  return TWF_EXIT_OK;
}

/* The model and the campaign, checked against the settings (the masses
 * for compliance, the sigmas in the model's units). */
static int load_inputs(calib_settings *s, calib_job *j, int argc, char **argv)
{
  int status;
  if ((status = cli_inputs_load(&j->in, "calibrate", argc, argv, s->first_operand)) != 0)
    return status;
  if ((status = check_masses(s, j)) != 0)
    return status;
  cli_units_of(&j->u, j->in.model);
  return take_sigmas(s, j);
}

/* Refuse outputs that would fail before the work is done: a failed run
 * then writes nothing. */
static int check_outputs(const calib_settings *s, calib_job *j)
{
  const char *outs[5] = { s->model_out, s->base_out, s->json_path, s->residuals_path, s->html_path };
  static const char *const names[5] = { "--output", "--base-output", "--json", "--residuals", "--html" };
  size_t k;
  if (s->json_path != NULL && strcmp(s->json_path, "-") == 0)
    j->txt = stderr;
  for (k = 0; k < 5; k++)
    if (k != 2 && outs[k] != NULL && strcmp(outs[k], "-") == 0)
      return cli_usage_error("calibrate", "only --json may go to standard output ('-'); give file names for the others");
  return cli_outputs_check("calibrate", outs, names, 5, s->force, j->in.paths);
}

/* The digests of the bytes the readers parsed (paths: the model, then
 * the campaign's files in the order read), and the time of the run. */
static void note_inputs(calib_job *j)
{
  const cli_inputs *in = &j->in;
  time_t now = time(NULL);
  struct tm tmv;
  size_t i;
  for (i = 0; in->paths[i] != NULL; i++) {
    const twf_input_digest *d = i == 0 ? &in->model_digest
                                : i - 1 < in->campaign->n_inputs ? &in->campaign->inputs[i - 1] : NULL;
    j->dg[j->n_dg].path = in->paths[i];
    snprintf(j->dg[j->n_dg].hex, sizeof j->dg[j->n_dg].hex, "%s", d && d->sha256[0] ? d->sha256 : "unavailable");
    j->n_dg++;
  }
  gmtime_r(&now, &tmv);
  strftime(j->created, sizeof j->created, "%Y-%m-%dT%H:%M:%SZ", &tmv);
}

/* The fit. On failure the warnings printed are the calibration's own
 * (the readers' were printed as they were read), and nothing is written. */
static int calibrate_model(const calib_settings *s, calib_job *j)
{
  twf_error err;
  size_t i, n_reader_warnings;
  int status;
  twf_error_clear(&err);
  /* the report lists the readers' warnings too */
  for (i = 0; i < j->in.warnings.count; i++)
    twf_warnings_add(&j->warnings, j->in.warnings.items[i].file, j->in.warnings.items[i].line,
                     j->in.warnings.items[i].column, "%s", j->in.warnings.items[i].message);
  n_reader_warnings = j->warnings.count;
  if (twf_calibrate(j->in.model, j->in.campaign, &s->co, &j->res, &j->warnings, &err) != TWF_OK) {
    twf_warnings tail = j->warnings;
    tail.items += n_reader_warnings;
    tail.count -= n_reader_warnings;
    cli_print_warnings(&tail);
    cli_hint_options(&err);
    status = cli_report_error(&err);
    fprintf(stderr, "twistfit: no output file was written\n");
    return status;
  }
  cli_print_trace(&j->res->trace);
  return TWF_EXIT_OK;
}

/* The text report, then the refusal of a model the report calls worse
 * than the start (not written unless asked for by name), then the
 * bootstrap with --resample. */
static int print_reports(const calib_settings *s, calib_job *j)
{
  const twf_calib_result *res = j->res;
  print_report(j->txt, &j->in, res, &s->co, &j->u, j->dg, j->n_dg, j->created, &j->warnings);
  if (res->verdict == TWF_VERDICT_DO_NOT_USE && !s->write_anyway && (s->model_out != NULL || s->base_out != NULL)) {
    fflush(j->txt);
    fprintf(stderr, "twistfit: error: the calibrated model predicts the %s worse than the starting model: "
                    "not written\n"
                    "twistfit: hint: keep the previous model and measure more, and more varied, poses; "
                    "--write-anyway writes it regardless (recorded in its [asbuilt] section)\n"
                    "twistfit: no output file was written\n",
            twf_verdict_basis_name(res->verdict_basis));
    return TWF_EXIT_COMPUTE;
  }
  if (s->n_resample == 0)
    return TWF_EXIT_OK;
  return print_resample(j->txt, &j->in, res, &s->co, &j->u, s->n_resample, &j->resampled, &j->resample_w);
}

/* The weight of each measurement in the fit (1, or the outlier screen's),
 * for the residuals file; NULL when out of memory. */
static double *fit_weights(const calib_job *j)
{
  const twf_campaign *c = j->in.campaign;
  double *weights = malloc((c->n_meas ? c->n_meas : 1) * sizeof *weights);
  size_t i;
  if (weights == NULL)
    return NULL;
  for (i = 0; i < c->n_meas; i++)
    weights[i] = 1.0;
  for (i = 0; i < j->res->n_outliers; i++)
    weights[j->res->outliers[i].meas] = j->res->outliers[i].weight;
  return weights;
}

/* The JSON report for --json and --html (NULL when neither is asked
 * for), with the bootstrap, the predictions and the stations. */
static json_t *run_json(const calib_settings *s, const calib_job *j)
{
  const cli_inputs *in = &j->in;
  json_t *root = NULL;
  if (s->json_path != NULL || s->html_path != NULL)
    root = report_json(in, j->res, &s->co, &j->u, j->dg, j->n_dg, j->created, &j->warnings);
  if (root != NULL && j->resampled != NULL)
    json_object_set_new(root, "resample", resample_json(j->resampled, j->res, &j->u, &j->resample_w));
  cli_json_add_predicted(root, j->res, in->model, in->campaign, &s->co, &j->u);
  cli_json_add_stations(root, j->res, in->campaign, &j->u);
  return root;
}

/* The residuals file: before and after, per measurement, with weights. */
static void residuals_of(const calib_job *j, const double *weights, cli_residuals *rr)
{
  memset(rr, 0, sizeof *rr);
  rr->m = j->in.model;
  rr->c = j->in.campaign;
  rr->sets = j->res->meas_set;
  rr->pos[0] = j->res->pos_err_before;
  rr->pos[1] = j->res->pos_err_after;
  rr->rot[0] = j->res->angle_err_before;
  rr->rot[1] = j->res->angle_err_after;
  rr->labels[0] = "before_";
  rr->labels[1] = "after_";
  rr->weights = weights;
  rr->u = &j->u;
}

/* The base file: the one base pose, or one per station. */
static void base_file_of(const calib_job *j, base_file_ctx *bo)
{
  const twf_calib_result *res = j->res;
  bo->B = res->n_stations > 1 ? res->station_base : &res->base_in_tracker;
  bo->names = (const char (*)[TWF_NAME_MAX])j->in.campaign->station_names;
  bo->n = res->n_stations > 1 ? res->n_stations : 1;
  bo->lu = j->in.model->length_unit;
}

/* Every output asked for, as one set (cli_write_outputs). */
static int write_outputs(const calib_settings *s, calib_job *j)
{
  cli_put puts[5];
  cli_residuals rr;
  base_file_ctx bo;
  double *weights = fit_weights(j);
  int status;
  if (weights == NULL)
    return cli_out_of_memory();
  j->root = run_json(s, j);
  residuals_of(j, weights, &rr);
  base_file_of(j, &bo);
  puts[0] = (cli_put){ s->model_out, put_model, j->res->asbuilt };
  puts[1] = (cli_put){ s->base_out, put_base, &bo };
  puts[2] = (cli_put){ s->json_path, cli_put_json, j->root };
  puts[3] = (cli_put){ s->residuals_path, cli_put_residuals, &rr };
  puts[4] = (cli_put){ s->html_path, cli_put_html_run, j->root };
  status = cli_write_outputs(puts, 5, s->force, j->in.paths);
  free(weights);
  return status;
}

static int run_calibrate(int argc, char **argv)
{
  calib_settings s;
  calib_job j;
  int status;

  calib_job_init(&j);
  if ((status = parse_options(argc, argv, &s, &j.in)) != 0 || s.help_shown)
    goto done;
  if ((status = load_inputs(&s, &j, argc, argv)) != 0 || (status = check_outputs(&s, &j)) != 0)
    goto done;
  note_inputs(&j);
  if ((status = calibrate_model(&s, &j)) != 0)
    goto done;
  if ((status = record_run(j.res, &j.u, j.created, s.cmdline, j.dg, j.n_dg, s.write_anyway)) != TWF_EXIT_OK)
    goto done;
  if ((status = print_reports(&s, &j)) != TWF_EXIT_OK)
    goto done;
  status = write_outputs(&s, &j);
done:
  calib_job_free(&j);
  return status;
}

const cli_command cli_cmd_calibrate = {
  "calibrate", run_calibrate, "fit the as-built model to a campaign; report and write it", calibrate_help
};
