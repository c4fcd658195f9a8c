/* cmd_verify.c: `twistfit verify MODEL DATA`: how accurate a model really
 * is on a campaign. Registers the model to the instrument (or takes a given
 * base pose), reports the accuracy figures and ISO 9283 pose accuracy and
 * repeatability, and judges acceptance tolerances. */
#define _GNU_SOURCE
#include "config.h"
#include "cli.h"
#include "html_report.h"

#include <getopt.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

static const char verify_help[] =
  "Usage: twistfit verify [OPTIONS] MODEL DATA.csv\n"
  "       twistfit verify [OPTIONS] MODEL --joints JOINTS.csv --points POINTS.csv\n"
  "\n"
  "Put the instrument's frame and the robot's in register (closed-form\n"
  "registration of the predicted target points to the measured ones, then a\n"
  "least-squares refinement of the base pose and of the target offsets that are\n"
  "unknown), and report the position error |measured - model| of MODEL on the\n"
  "fit and check sets: count, mean, RMS, 95th percentile and maximum, per target\n"
  "and overall, and the worst poses; the orientation error for 6-D rows; ISO 9283\n"
  "pose accuracy AP and repeatability RP where a commanded pose repeats. Only the\n"
  "fit set enters the registration. Lengths in the model's length unit.\n"
  "\n"
  "Options:\n"
  CLI_INPUT_HELP
  "      --base FILE         use this base pose (instrument frame) instead of registering;\n"
  "                          every measured target then needs an offset in MODEL\n"
  "      --allow-mixed-runs  use a --base file and a MODEL that different runs wrote\n"
  "                          (default: refused when both carry a run id and they differ)\n"
  "      --fit-offsets       fit every target's offset in the registration (default:\n"
  "                          only targets declared without an offset)\n"
  "      --tol-rms X         acceptance: RMS position error at most X (length unit)\n"
  "      --tol-p95 X         acceptance: 95th percentile at most X\n"
  "      --tol-max X         acceptance: maximum position error at most X\n"
  "      --tol-angle-max X   acceptance: maximum orientation error at most X (angle unit)\n"
  "                          The verdict uses the check set when it has rows, else\n"
  "                          the fit set; exit status 1 when measured and rejected.\n"
  "      --repeat-tol X      joint values within X (the model's angle unit; its length\n"
  "                          unit for prismatic joints) are the same commanded pose\n"
  "                          (default 1e-6 rad, 1e-6 m)\n"
  "      --worst N           list the N worst poses (default 5)\n"
  "      --residuals FILE    write the per-measurement residuals as CSV\n"
  "      --json FILE         write the figures as JSON ('-' for standard output,\n"
  "                          then the text report goes to standard error)\n"
  "      --html FILE         write the report as one self-contained HTML file with\n"
  "                          charts (as 'twistfit report' makes from the JSON)\n"
  "  -f, --force             replace output files that exist\n"
  "  -h, --help              show this help\n";

enum {
  OPT_BASE = CLI_OPT_FIRST_FREE, OPT_FIT_OFFSETS, OPT_TOL_RMS, OPT_TOL_P95, OPT_TOL_MAX,
  OPT_TOL_ANGLE, OPT_REPEAT_TOL, OPT_WORST, OPT_RESIDUALS, OPT_JSON, OPT_ALLOW_MIXED, OPT_HTML
};

typedef struct tolerance {
  const char *name;
  double limit; /* SI; 0 = not set */
  double value;
  int is_angle;
  int pass;
} tolerance;

static void print_iso9283(FILE *fp, const twf_iso9283 *iso, const twf_model *m,
                          const twf_campaign *c, const cli_units *u, int registered)
{
  size_t i;
  if (iso == NULL || (iso->n_entries == 0 && iso->n_orientation == 0)) {
    fprintf(fp, "ISO 9283 pose accuracy and repeatability: no commanded pose is repeated\n");
    return;
  }
  fprintf(fp, "ISO 9283 pose accuracy AP and repeatability RP (ISO 9283:1998, 7.2.1 and 7.2.3), %s\n",
          u->length);
  fprintf(fp, "  %-12s %-8s %6s %10s %10s %10s %10s %10s\n", "pose", "target", "visits", "AP_P",
          "AP_x", "AP_y", "AP_z", "RP_l");
  for (i = 0; i < iso->n_entries; i++) {
    const twf_iso9283_entry *e = &iso->entries[i];
    fprintf(fp, "  %-12s %-8s %6zu %10.*f %10.*f %10.*f %10.*f %10.*f\n",
            c->pose_ids[e->first_pose], m->targets[e->target].name, e->n, u->ldec, e->ap_p / u->length_si,
            u->ldec, e->ap[0] / u->length_si, u->ldec, e->ap[1] / u->length_si, u->ldec,
            e->ap[2] / u->length_si, u->ldec, e->rp / u->length_si);
  }
  if (iso->n_entries > 0)
    fprintf(fp, "  %-12s %-8s %6s %10.*f %10s %10s %10s %10.*f\n", "worst", "", "", u->ldec,
            iso->ap_p_max / u->length_si, "", "", "", u->ldec, iso->rp_max / u->length_si);
  if (iso->n_orientation > 0) {
    fprintf(fp, "  orientation (6-D rows; about the base frame's x, y, z, relative to the commanded\n"
                "  orientation), %s:\n", u->angle);
    fprintf(fp, "  %-12s %6s %10s %10s %10s %10s %10s %10s\n", "pose", "visits", "AP_a", "AP_b", "AP_c", "RP_a",
            "RP_b", "RP_c");
    for (i = 0; i < iso->n_orientation; i++) {
      const twf_iso9283_orientation *e = &iso->orientation[i];
      fprintf(fp, "  %-12s %6zu %10.*f %10.*f %10.*f %10.*f %10.*f %10.*f\n", c->pose_ids[e->first_pose], e->n,
              u->adec, e->ap[0] / u->angle_si, u->adec, e->ap[1] / u->angle_si, u->adec, e->ap[2] / u->angle_si,
              u->adec, e->rp[0] / u->angle_si, u->adec, e->rp[1] / u->angle_si, u->adec, e->rp[2] / u->angle_si);
    }
    fprintf(fp, "  %-12s %6s %10.*f %10s %10s %10.*f\n", "worst", "", u->adec, iso->ap_angle_max / u->angle_si,
            "(|AP|)", "", u->adec, iso->rp_angle_max / u->angle_si);
  }
  if (iso->n_entries > 0 && iso->min_cycles < TWF_ISO9283_CYCLES) {
    char cyc[64];
    if (iso->min_cycles == iso->max_cycles)
      snprintf(cyc, sizeof cyc, "%zu", iso->min_cycles);
    else
      snprintf(cyc, sizeof cyc, "%zu to %zu", iso->min_cycles, iso->max_cycles);
    fprintf(fp, "  note: %s cycles per pose; the standard's pose test uses %d, so these figures\n"
                "  are indicative, not a test to ISO 9283\n",
            cyc, TWF_ISO9283_CYCLES);
  }
  fprintf(fp, "  note: AP is against the model's prediction at the commanded joint values, with the base\n"
              "  pose %s\n",
          registered ? "registered to these same measurements (which pulls AP towards zero)"
                     : "of --base (not fitted to these measurements)");
}

static json_t *json_iso9283(const twf_iso9283 *iso, const twf_model *m, const twf_campaign *c,
                            const cli_units *u)
{
  json_t *a = json_array();
  size_t i;
  for (i = 0; iso != NULL && i < iso->n_entries; i++) {
    const twf_iso9283_entry *e = &iso->entries[i];
    json_array_append_new(
        a, json_pack("{s:s, s:s, s:I, s:o, s:[o,o,o], s:o}", "pose", c->pose_ids[e->first_pose],
                     "target", m->targets[e->target].name, "visits", (json_int_t)e->n, "ap_p",
                     cli_json_number(e->ap_p / u->length_si), "ap",
                     cli_json_number(e->ap[0] / u->length_si), cli_json_number(e->ap[1] / u->length_si),
                     cli_json_number(e->ap[2] / u->length_si), "rp",
                     cli_json_number(e->rp / u->length_si)));
  }
  return a;
}

/* The command's settings, as its options give them. */
typedef struct verify_settings {
  const char *base_path;                 /* --base, or NULL: register */
  const char *residuals_path, *json_path, *html_path;
  const char *repeat_text;               /* --repeat-tol as typed (read in the model's units) */
  const char *tol_text[4];               /* --tol-rms, --tol-p95, --tol-max, --tol-angle-max */
  int force, fit_offsets, allow_mixed;
  int help_shown;                        /* -h: the help is printed, nothing more to do */
  long worst;                            /* --worst */
} verify_settings;

/* Read the options into *s and the input options into *in (argv is
 * permuted and optind left at MODEL, as getopt_long does); returns an exit
 * status, 0 with s->help_shown set after --help. */
static int parse_verify_options(int argc, char **argv, cli_inputs *in, verify_settings *s)
{
  static const struct option longopts[] = {
    CLI_INPUT_LONGOPTS,
    { "base", required_argument, NULL, OPT_BASE },
    { "fit-offsets", no_argument, NULL, OPT_FIT_OFFSETS },
    { "allow-mixed-runs", no_argument, NULL, OPT_ALLOW_MIXED },
    { "tol-rms", required_argument, NULL, OPT_TOL_RMS },
    { "tol-p95", required_argument, NULL, OPT_TOL_P95 },
    { "tol-max", required_argument, NULL, OPT_TOL_MAX },
    { "tol-angle-max", required_argument, NULL, OPT_TOL_ANGLE },
    { "repeat-tol", required_argument, NULL, OPT_REPEAT_TOL },
    { "worst", required_argument, NULL, OPT_WORST },
    { "residuals", required_argument, NULL, OPT_RESIDUALS },
    { "json", required_argument, NULL, OPT_JSON },
    { "html", required_argument, NULL, OPT_HTML },
    { "force", no_argument, NULL, 'f' },
    { "help", no_argument, NULL, 'h' },
    { NULL, 0, NULL, 0 }
  };
  static const verify_settings defaults = { NULL, NULL, NULL, NULL, NULL, { NULL, NULL, NULL, NULL }, 0, 0, 0, 0, 5 };
  int opt, status = TWF_EXIT_OK;

  *s = defaults;
  optind = 0;
  opterr = 0;
  while ((opt = getopt_long(argc, argv, ":fh", longopts, NULL)) != -1) {
    if (cli_inputs_option(in, "verify", opt, optarg, &status)) {
      if (status != 0)
        return status;
      continue;
    }
    switch (opt) {
    case OPT_BASE: s->base_path = optarg; break;
    case OPT_FIT_OFFSETS: s->fit_offsets = 1; break;
    case OPT_ALLOW_MIXED: s->allow_mixed = 1; break;
    case OPT_TOL_RMS: s->tol_text[0] = optarg; break;
    case OPT_TOL_P95: s->tol_text[1] = optarg; break;
    case OPT_TOL_MAX: s->tol_text[2] = optarg; break;
    case OPT_TOL_ANGLE: s->tol_text[3] = optarg; break;
    case OPT_REPEAT_TOL: s->repeat_text = optarg; break;
    case OPT_WORST: {
      char *end;
      s->worst = strtol(optarg, &end, 10);
      if (*end != '\0' || *optarg == '\0' || s->worst < 0 || s->worst > 1000)
        return cli_usage_error("verify", "--worst takes a count from 0 to 1000");
      break;
    }
    case OPT_RESIDUALS: s->residuals_path = optarg; break;
    case OPT_JSON: s->json_path = optarg; break;
    case OPT_HTML: s->html_path = optarg; break;
    case 'f': s->force = 1; break;
    case 'h': fputs(verify_help, stdout); s->help_shown = 1; return TWF_EXIT_OK;
    default: return cli_bad_option("verify", opt, argv);
    }
  }
  if (s->base_path != NULL && s->fit_offsets)
    return cli_usage_error("verify", "--base and --fit-offsets exclude each other");
  return TWF_EXIT_OK;
}

/* One run of the command: its inputs and what it works out from them. */
typedef struct verify_run {
  cli_inputs in;
  cli_units u;
  twf_error err;
  twf_pose base[TWF_STATIONS_MAX];  /* robot base in the instrument frame, per station */
  double *offsets;                  /* per target: 3, flange frame */
  double *pos, *rot;                /* per measurement: measured - model (3), orientation error */
  unsigned char *excluded;          /* per measurement: left out of the registration */
  twf_registration_report rrep;
  twf_trace trace;
  twf_accuracy_summary *summary;
  twf_iso9283 *iso;
  tolerance tol[4];                 /* rms, p95, max, angle-max */
  double repeat_tol;                /* --repeat-tol in the model's units, 0 when not given */
  twf_acceptance acc;
} verify_run;

static void verify_run_init(verify_run *r)
{
  static const tolerance tol[4] = { { "rms", 0, 0, 0, 0 }, { "p95", 0, 0, 0, 0 }, { "max", 0, 0, 0, 0 },
                                    { "angle-max", 0, 0, 1, 0 } };
  memset(r, 0, sizeof *r);
  cli_inputs_init(&r->in);
  twf_error_clear(&r->err);
  twf_trace_init(&r->trace);
  memcpy(r->tol, tol, sizeof r->tol);
}

static void verify_run_free(verify_run *r)
{
  twf_iso9283_free(r->iso);
  twf_accuracy_summary_free(r->summary);
  free(r->offsets);
  free(r->pos);
  free(r->rot);
  free(r->excluded);
  twf_trace_clear(&r->trace);
  cli_inputs_free(&r->in);
}

/* --residuals and --html need file names; no output may be an input or
 * (without --force) an existing file. Checked before any work. */
static int check_verify_outputs(const verify_settings *s, const cli_inputs *in)
{
  const char *outs[3] = { s->json_path, s->residuals_path, s->html_path };
  static const char *const names[3] = { "--json", "--residuals", "--html" };
  if (s->residuals_path != NULL && strcmp(s->residuals_path, "-") == 0)
    return cli_usage_error("verify", "--residuals needs a file name");
  if (s->html_path != NULL && strcmp(s->html_path, "-") == 0)
    return cli_usage_error("verify", "--html needs a file name");
  return cli_outputs_check("verify", outs, names, 3, s->force, in->paths);
}

/* Read MODEL and DATA (from argv[first]), take the tolerances in the
 * model's units and check the outputs; returns an exit status. */
static int load_verify_inputs(const verify_settings *s, verify_run *r, int argc, char **argv, int first)
{
  static const char *const tol_opt[4] = { "--tol-rms", "--tol-p95", "--tol-max", "--tol-angle-max" };
  int status, i;
  if ((status = cli_inputs_load(&r->in, "verify", argc, argv, first)) != 0)
    return status;
  cli_units_of(&r->u, r->in.model);
  for (i = 0; i < 4; i++)
    if (s->tol_text[i] != NULL &&
        (status = cli_parse_tolerance("verify", tol_opt[i], s->tol_text[i],
                                      r->tol[i].is_angle ? r->u.angle_si : r->u.length_si, &r->tol[i].limit)) != 0)
      return status;
  /* read with the tolerances, before any work: a bad value is a usage
   * error of the command line, not of the figures */
  if (s->repeat_text != NULL &&
      (cli_parse_double(s->repeat_text, &r->repeat_tol) != 0 || !(r->repeat_tol > 0)))
    return cli_usage_error("verify", "--repeat-tol takes a positive number");
  if (s->base_path != NULL)
    cli_inputs_add_path(&r->in, s->base_path);
  if ((status = check_verify_outputs(s, &r->in)) != 0)
    return status;
  if (s->tol_text[3] != NULL && !r->in.campaign->has_orientation_any)
    return cli_usage_error("verify", "--tol-angle-max needs 6-D rows (with a quaternion); the campaign has none");
  return TWF_EXIT_OK;
}

/* The per-target and per-measurement arrays, the offsets starting as the
 * model gives them; returns an exit status. */
static int alloc_verify_arrays(verify_run *r)
{
  size_t n_meas = r->in.campaign->n_meas, n_targets = r->in.model->n_targets;
  r->excluded = calloc(n_meas, 1);
  r->offsets = calloc(3 * (n_targets ? n_targets : 1), sizeof *r->offsets);
  r->pos = calloc(3 * n_meas, sizeof *r->pos);
  r->rot = calloc(n_meas, sizeof *r->rot);
  if (r->offsets == NULL || r->pos == NULL || r->rot == NULL || r->excluded == NULL)
    return cli_out_of_memory();
  twf_register_offsets_init(r->in.model, r->offsets);
  return TWF_EXIT_OK;
}

/* --base: the base pose of each station as given. Nothing is fitted, so
 * every measured target needs its offset in the model; returns an exit
 * status. */
static int take_given_base(const verify_settings *s, verify_run *r)
{
  const twf_model *m = r->in.model;
  const twf_campaign *c = r->in.campaign;
  size_t k;
  int status;
  if (cli_read_station_bases(s->base_path, &r->in.ropt, c, r->base, &r->err) != TWF_OK)
    return cli_report_error(&r->err);
  /* the base pose is in the frame of the model it was fitted with */
  if ((status = cli_check_same_run("verify", r->in.model_path, "the model", s->base_path, "the base pose file",
                                   s->allow_mixed, 1)) != 0)
    return status;
  for (k = 0; k < c->n_meas; k++)
    if (!m->targets[c->meas[k].target].offset_known) {
      twf_error_set(&r->err, TWF_ERR_MISSING, r->in.model_path, 0, 0,
                    "give the target an offset in the model, or drop --base to fit it",
                    "target %s has no offset and --base fits nothing", m->targets[c->meas[k].target].name);
      return cli_report_error(&r->err);
    }
  return TWF_EXIT_OK;
}

/* No --base: register the model to the instrument (the base pose of each
 * station and the offsets of the targets declared without one, or of all
 * with --fit-offsets), leaving out gross errors; returns an exit status. */
static int register_base(const verify_settings *s, verify_run *r)
{
  twf_register_options ro = twf_register_default_options();
  size_t k;
  ro.fit_all_offsets = s->fit_offsets;
  if (twf_register_and_refine(r->in.model, r->in.campaign, &ro, NULL, r->base, &r->rrep, r->excluded, &r->trace,
                              &r->err) != TWF_OK) {
    cli_hint_options(&r->err);
    return cli_report_error(&r->err);
  }
  /* the registration leaves the fitted offsets in the model */
  for (k = 0; k < r->in.model->n_targets; k++)
    memcpy(r->offsets + 3 * k, r->in.model->targets[k].offset, sizeof r->in.model->targets[k].offset);
  cli_print_trace(&r->trace);
  return TWF_EXIT_OK;
}

/* The error of every measurement and their summary (with the --worst
 * poses); returns an exit status. */
static int accuracy_figures(const verify_settings *s, verify_run *r)
{
  if (twf_accuracy_residuals(r->in.model, r->base, r->offsets, r->in.campaign, r->pos, r->rot, &r->err) != TWF_OK ||
      (r->summary = twf_accuracy_summarize(r->in.campaign, r->in.model->n_targets, r->pos, r->rot, (size_t)s->worst,
                                           &r->err)) == NULL)
    return cli_report_error(&r->err);
  return TWF_EXIT_OK;
}

/* ISO 9283 AP and RP over the commanded poses that repeat (--repeat-tol:
 * how close joint values are for one pose); returns an exit status. */
static int iso9283_figures(verify_run *r)
{
  twf_iso9283_options io = twf_iso9283_default_options();
  if (r->repeat_tol > 0) {
    io.joint_tol = r->repeat_tol * r->u.angle_si;
    io.joint_tol_prismatic = r->repeat_tol * r->u.length_si;
  }
  r->iso = twf_accuracy_iso9283(r->in.model, r->base, r->offsets, r->in.campaign, &io, &r->err);
  if (r->iso == NULL)
    return cli_report_error(&r->err);
  return TWF_EXIT_OK;
}

/* The acceptance verdict (library): on the check set when it has rows,
 * else on the fit set. Returns the exit status of an error; the verdict
 * is in r->acc and r->tol. */
static int judge_acceptance(verify_run *r)
{
  twf_acceptance_limits lim;
  int i;
  lim.rms_m = r->tol[0].limit;
  lim.p95_m = r->tol[1].limit;
  lim.max_m = r->tol[2].limit;
  lim.angle_max_rad = r->tol[3].limit;
  if (twf_accuracy_accept(r->summary, &lim, &r->acc, &r->err) != TWF_OK)
    return cli_report_error(&r->err);
  for (i = 0; i < 4; i++) {
    r->tol[i].value = r->acc.value[i];
    r->tol[i].pass = r->acc.pass[i];
  }
  return TWF_EXIT_OK;
}

/* The verdict, first in the report: one line per tolerance set. */
static void print_verdict(FILE *txt, const verify_run *r)
{
  const cli_units *u = &r->u;
  int i;
  fprintf(txt, "verdict: %s on the %s set\n", r->acc.accepted ? "ACCEPTED" : "REJECTED",
          r->acc.set == TWF_SET_CHECK ? "check" : "fit");
  for (i = 0; i < 4; i++) {
    const tolerance *t = &r->tol[i];
    double unit = t->is_angle ? u->angle_si : u->length_si;
    int dec = t->is_angle ? u->adec : u->ldec;
    if (t->limit > 0)
      fprintf(txt, "  %-10s %10.*f %s  limit %10.*f  %s\n", t->name, dec, t->value / unit,
              t->is_angle ? u->angle : u->length, dec, t->limit / unit, t->pass ? "PASS" : "FAIL");
  }
  fputc('\n', txt);
}

/* The base pose of each station, given or registered. */
static void print_base_poses(FILE *txt, const verify_settings *s, const verify_run *r)
{
  const cli_units *u = &r->u;
  size_t sta, n_st = twf_campaign_station_count(r->in.campaign);
  for (sta = 0; sta < n_st; sta++) {
    double q[4];
    char at[TWF_NAME_MAX + 16] = "";
    const twf_pose *b = &r->base[sta];
    if (n_st > 1)
      snprintf(at, sizeof at, " at station %s", r->in.campaign->station_names[sta]);
    cli_quat_of(b->R, q);
    fprintf(txt, "base pose in the instrument frame%s (%s): position %.*f %.*f %.*f %s, quaternion_wxyz %.9f %.9f %.9f %.9f\n",
            at, s->base_path ? "given" : "registered", u->ldec, b->p[0] / u->length_si, u->ldec,
            b->p[1] / u->length_si, u->ldec, b->p[2] / u->length_si, u->length, q[0], q[1], q[2], q[3]);
  }
}

/* How the registration went, and the measurements it left out as gross
 * errors (with their error, as they stay in the figures). */
static void print_registration(FILE *txt, const verify_run *r)
{
  const twf_registration_report *rrep = &r->rrep;
  const twf_campaign *c = r->in.campaign;
  const cli_units *u = &r->u;
  size_t k, n_ex = rrep->n_excluded;
  fprintf(txt, "registration: closed form, %u %s with the target offsets%s; refinement %d %s, %s\n",
          rrep->alternation.iterations, cli_plural(rrep->alternation.iterations, "round", "rounds"),
          rrep->alternation.converged ? "" : " (not settled)", rrep->refinement.iterations,
          cli_plural((size_t)rrep->refinement.iterations, "iteration", "iterations"),
          cli_stop_words(rrep->refinement.stop));
  if (n_ex == 0)
    return;
  fprintf(txt, "registration left out %zu fit-set measurement%s as gross error%s (beyond %g robust "
               "standard deviations; %s in the figures below):\n", n_ex, n_ex == 1 ? "" : "s",
          n_ex == 1 ? "" : "s", rrep->robust_threshold, n_ex == 1 ? "it stays" : "they stay");
  for (k = 0; k < c->n_meas; k++)
    if (r->excluded[k]) {
      const twf_measurement *ms = &c->meas[k];
      const double *p = r->pos + 3 * k;
      char where[TWF_ERROR_TEXT_MAX];
      cli_meas_where(&r->in, ms, where, sizeof where);
      fprintf(txt, "  %s: pose %s target %s: %.*f %s\n", where, c->pose_ids[ms->pose],
              r->in.model->targets[ms->target].name, u->ldec,
              sqrt(p[0] * p[0] + p[1] * p[1] + p[2] * p[2]) / u->length_si, u->length);
    }
}

/* The offset of every target that has one (given or fitted). */
static void print_offsets(FILE *txt, const verify_run *r)
{
  const twf_model *m = r->in.model;
  const cli_units *u = &r->u;
  size_t k;
  for (k = 0; k < m->n_targets; k++)
    if (m->targets[k].offset_known)
      fprintf(txt, "target %s offset in the flange frame, %s: %.*f %.*f %.*f\n", m->targets[k].name, u->length,
              u->ldec, r->offsets[3 * k] / u->length_si, u->ldec, r->offsets[3 * k + 1] / u->length_si, u->ldec,
              r->offsets[3 * k + 2] / u->length_si);
}

/* The text report. */
static void print_verify(FILE *txt, const verify_settings *s, const verify_run *r)
{
  const cli_inputs *in = &r->in;
  fprintf(txt, "twistfit %s verify\n", twf_version());
  fprintf(txt, "model: %s (%s, %zu joints)\n", in->model_path, in->model->name, in->model->n_joints);
  if (in->data_path)
    fprintf(txt, "data: %s\n", in->data_path);
  else
    fprintf(txt, "data: %s + %s\n", in->joints_path, in->points_path);
  fprintf(txt, "campaign: %zu poses, %zu measurements\n", in->campaign->n_poses, in->campaign->n_meas);
  if (r->acc.n_limits > 0)
    print_verdict(txt, r);
  print_base_poses(txt, s, r);
  if (s->base_path == NULL)
    print_registration(txt, r);
  print_offsets(txt, r);
  fputc('\n', txt);
  cli_print_accuracy(txt, "Accuracy of the model on this campaign", r->summary, in->model, in->campaign, &r->u);
  cli_print_worst(txt, r->summary, in->campaign, in->model, &r->u);
  fputc('\n', txt);
  print_iso9283(txt, r->iso, in->model, in->campaign, &r->u, s->base_path == NULL);
}

/* With several instrument stations: the base pose at each. */
static json_t *json_stations(const verify_run *r)
{
  json_t *arr = json_array();
  size_t sta;
  for (sta = 0; sta < twf_campaign_station_count(r->in.campaign); sta++)
    json_array_append_new(arr, json_pack("{s:s, s:o}", "name", r->in.campaign->station_names[sta],
                                         "base_in_instrument", cli_json_pose(&r->base[sta], &r->u)));
  return arr;
}

/* The per-measurement errors; NULL when there are none to give. */
static json_t *json_measurements(const verify_settings *s, const verify_run *r)
{
  static const char *const names[1] = { "error" };
  const double *pe[1] = { r->pos }, *ae[1] = { r->rot };
  return cli_json_measurements(r->in.campaign, r->in.model, NULL, 1, names, pe, ae,
                               s->base_path == NULL ? r->excluded : NULL, NULL, 0, &r->u);
}

/* ISO 9283 orientation AP and RP of each repeated 6-D pose. */
static json_t *json_iso9283_orientation(const twf_iso9283 *iso, const twf_campaign *c, const cli_units *u)
{
  json_t *ori = json_array();
  size_t k;
  for (k = 0; k < iso->n_orientation; k++) {
    const twf_iso9283_orientation *e = &iso->orientation[k];
    json_array_append_new(ori, json_pack("{s:s, s:I, s:[o,o,o], s:[o,o,o]}", "pose", c->pose_ids[e->first_pose],
                                         "visits", (json_int_t)e->n, "ap_abc", cli_json_number(e->ap[0] / u->angle_si),
                                         cli_json_number(e->ap[1] / u->angle_si),
                                         cli_json_number(e->ap[2] / u->angle_si), "rp_abc",
                                         cli_json_number(e->rp[0] / u->angle_si),
                                         cli_json_number(e->rp[1] / u->angle_si),
                                         cli_json_number(e->rp[2] / u->angle_si)));
  }
  return ori;
}

/* The worst ISO 9283 figures and the cycles they rest on. */
static json_t *json_iso9283_summary(const twf_iso9283 *iso, const cli_units *u)
{
  return json_pack("{s:o, s:o, s:o, s:o, s:I, s:I, s:I}", "ap_p_max", cli_json_number(iso->ap_p_max / u->length_si),
                   "rp_max", cli_json_number(iso->rp_max / u->length_si), "ap_angle_max",
                   cli_json_number(iso->ap_angle_max / u->angle_si), "rp_angle_max",
                   cli_json_number(iso->rp_angle_max / u->angle_si), "min_cycles", (json_int_t)iso->min_cycles,
                   "max_cycles", (json_int_t)iso->max_cycles, "standard_cycles", (json_int_t)TWF_ISO9283_CYCLES);
}

/* The set judged, each tolerance set and the verdict (none without
 * tolerances). */
static json_t *json_acceptance(const verify_run *r)
{
  const cli_units *u = &r->u;
  json_t *tols = json_object();
  int i;
  for (i = 0; i < 4; i++) {
    const tolerance *t = &r->tol[i];
    double unit = t->is_angle ? u->angle_si : u->length_si;
    if (t->limit > 0)
      json_object_set_new(tols, t->name,
                          json_pack("{s:o, s:o, s:b}", "limit", cli_json_number(t->limit / unit), "value",
                                    cli_json_number(t->value / unit), "pass", t->pass));
  }
  return json_pack("{s:s, s:o, s:s}", "set", r->acc.set == TWF_SET_CHECK ? "check" : "fit", "tolerances", tols,
                   "verdict", json_object_size(tols) == 0 ? "none" : r->acc.accepted ? "accepted" : "rejected");
}

static json_t *json_warnings(const twf_warnings *w)
{
  json_t *wa = json_array();
  size_t k;
  for (k = 0; k < w->count; k++)
    json_array_append_new(wa, json_string(w->items[k].message));
  return wa;
}

/* The JSON report (--json, and what --html is made from). */
static json_t *verify_json(const verify_settings *s, const verify_run *r)
{
  const cli_inputs *in = &r->in;
  const cli_units *u = &r->u;
  json_t *root = json_object(), *meas;
  char created[64];
  json_object_set_new(root, "tool", json_pack("{s:s, s:s}", "name", "twistfit", "version", twf_version()));
  json_object_set_new(root, "command", json_string("verify"));
  json_object_set_new(root, "created", json_string(cli_created_now(created, sizeof created)));
  json_object_set_new(root, "inputs", cli_json_inputs(in));
  json_object_set_new(root, "robot", cli_json_robot(in->model, u));
  json_object_set_new(root, "units", json_pack("{s:s, s:s}", "length", u->length, "angle", u->angle));
  /* base_in_tracker: the older name, kept for existing readers */
  json_object_set_new(root, "base_in_instrument", cli_json_pose(r->base, u));
  json_object_set_new(root, "base_in_tracker", cli_json_pose(r->base, u));
  json_object_set_new(root, "base_source", json_string(s->base_path ? "given" : "registered"));
  /* several instrument stations: the base pose at each (the members
   * above are the first station's) */
  if (twf_campaign_station_count(in->campaign) > 1)
    json_object_set_new(root, "stations", json_stations(r));
  json_object_set_new(root, "accuracy", cli_json_accuracy(r->summary, in->model, in->campaign, u));
  json_object_set_new(root, "iso9283", json_iso9283(r->iso, in->model, in->campaign, u));
  if ((meas = json_measurements(s, r)) != NULL)
    json_object_set_new(root, "measurements", meas);
  json_object_set_new(root, "iso9283_orientation", json_iso9283_orientation(r->iso, in->campaign, u));
  json_object_set_new(root, "iso9283_summary", json_iso9283_summary(r->iso, u));
  json_object_set_new(root, "acceptance", json_acceptance(r));
  json_object_set_new(root, "warnings", json_warnings(&in->warnings));
  return root;
}

/* Write --json, --residuals and --html (root: the JSON report, or NULL
 * without either) as one set, after everything else succeeded; returns
 * an exit status. */
static int write_verify_outputs(const verify_settings *s, const verify_run *r, json_t *root)
{
  cli_residuals rr;
  cli_put puts[3];
  int w;
  double *weights = NULL;
  memset(&rr, 0, sizeof rr);
  rr.m = r->in.model;
  rr.c = r->in.campaign;
  rr.pos[0] = r->pos;
  rr.rot[0] = r->rot;
  rr.labels[0] = rr.labels[1] = "";
  rr.u = &r->u;
  if (s->residuals_path != NULL && s->base_path == NULL) {
    /* the registration's weight of each fit row: 0 for a gross error */
    size_t k;
    weights = malloc((r->in.campaign->n_meas ? r->in.campaign->n_meas : 1) * sizeof *weights);
    if (weights == NULL) /* the file would lack its weight column: nothing rather than less */
      return cli_out_of_memory();
    for (k = 0; k < r->in.campaign->n_meas; k++)
      weights[k] = r->excluded[k] ? 0.0 : 1.0;
    rr.weights = weights;
  }
  puts[0].path = s->json_path;
  puts[0].put = cli_put_json;
  puts[0].ctx = root;
  puts[1].path = s->residuals_path;
  puts[1].put = cli_put_residuals;
  puts[1].ctx = &rr;
  puts[2] = (cli_put){ s->html_path, cli_put_html_run, root };
  w = cli_write_outputs(puts, 3, s->force, r->in.paths);
  free(weights);
  return w;
}

static int run_verify(int argc, char **argv)
{
  verify_settings s;
  verify_run r;
  FILE *txt = stdout;
  json_t *root = NULL;
  int status, w;

  verify_run_init(&r);
  if ((status = parse_verify_options(argc, argv, &r.in, &s)) != 0 || s.help_shown)
    goto done;
  if ((status = load_verify_inputs(&s, &r, argc, argv, optind)) != 0)
    goto done;
  /* with the JSON on standard output, the text report goes to standard error */
  if (s.json_path != NULL && strcmp(s.json_path, "-") == 0)
    txt = stderr;
  if ((status = alloc_verify_arrays(&r)) != 0)
    goto done;
  status = s.base_path != NULL ? take_given_base(&s, &r) : register_base(&s, &r);
  if (status != 0)
    goto done;
  if ((status = accuracy_figures(&s, &r)) != 0 || (status = iso9283_figures(&r)) != 0)
    goto done;
  if ((status = judge_acceptance(&r)) != 0)
    goto done;
  if (r.acc.n_limits > 0 && !r.acc.accepted)
    status = TWF_EXIT_REJECTED;

  /* the outputs only now, all or none, when everything has succeeded */
  print_verify(txt, &s, &r);
  if (s.json_path != NULL || s.html_path != NULL)
    root = verify_json(&s, &r);
  if ((w = write_verify_outputs(&s, &r, root)) != 0)
    status = w;

done:
  json_decref(root);
  verify_run_free(&r);
  return status;
}

const cli_command cli_cmd_verify = {
  "verify", run_verify, "accuracy of a model on a measured campaign; acceptance", verify_help
};
