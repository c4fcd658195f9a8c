/* html_report.c: the HTML report (html_report.h) and the JSON members it
 * reads beyond the older reports. Everything shown comes from the JSON
 * report; the renderer sorts the errors for the cumulative curves and
 * lays out, and computes no figure of its own. */
#define _GNU_SOURCE
#include "config.h"
#include "html_report.h"
#include "svgchart.h"

#include <math.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

/* ------------------------------------------------------------ JSON members */

json_t *cli_json_robot(const twf_model *m, const cli_units *u)
{
  json_t *joints = json_array();
  size_t k;
  for (k = 0; k < m->n_joints; k++) {
    int prismatic = m->joints[k].type == TWF_JOINT_PRISMATIC;
    json_array_append_new(joints, json_pack("{s:s, s:s, s:s}", "name", m->joints[k].name, "type",
                                            prismatic ? "prismatic" : "revolute", "unit",
                                            prismatic ? u->length : u->angle));
  }
  return json_pack("{s:s, s:o}", "name", m->name, "joints", joints);
}

json_t *cli_json_inputs(const cli_inputs *in)
{
  json_t *a = json_array();
  size_t i;
  for (i = 0; in->paths[i] != NULL; i++) {
    const twf_input_digest *d = i == 0                               ? &in->model_digest
                                : i - 1 < in->campaign->n_inputs ? &in->campaign->inputs[i - 1]
                                                                   : NULL;
    json_array_append_new(a, json_pack("{s:s, s:s}", "path", in->paths[i], "sha256",
                                       d && d->sha256[0] ? d->sha256 : "unavailable"));
  }
  return a;
}

const char *cli_created_now(char *buf, size_t n)
{
  time_t now = time(NULL);
  struct tm tmv;
  gmtime_r(&now, &tmv);
  strftime(buf, n, "%Y-%m-%dT%H:%M:%SZ", &tmv);
  return buf;
}

json_t *cli_json_singular_values(const twf_calib_result *r, double weak_ratio, const cli_units *u)
{
  json_t *v = json_array();
  size_t k;
  char unit[48];
  double sw = r->singular_value_sigma;
  /* s in 1/m; in 1/(length unit): s * length_si */
  for (k = 0; k < r->n_singular; k++)
    json_array_append_new(v, cli_json_number(r->singular_values[k] * u->length_si));
  snprintf(unit, sizeof unit, "1/%s", u->length);
  return json_pack("{s:o, s:s, s:o, s:o}", "values", v, "unit", unit, "std_equals_noise",
                   cli_json_number(sw > 0 ? u->length_si / sw : NAN), "weak_below",
                   cli_json_number(sw > 0 && weak_ratio > 0 ? u->length_si / (weak_ratio * sw) : NAN));
}

json_t *cli_json_correlation_matrix(const twf_calib_result *r)
{
  json_t *names = json_array(), *rho = json_array();
  size_t a, b, p = r->n_params;
  for (a = 0; a < p; a++) {
    json_t *row;
    if (r->params[a].status != TWF_PARAM_KEPT)
      continue;
    json_array_append_new(names, json_string(r->params[a].param.name));
    row = json_array();
    for (b = 0; b < p; b++) {
      double caa = r->covariance[a * p + a], cbb = r->covariance[b * p + b];
      if (r->params[b].status != TWF_PARAM_KEPT)
        continue;
      json_array_append_new(row, cli_json_number(caa > 0 && cbb > 0 ? r->covariance[a * p + b] / sqrt(caa * cbb)
                                                                    : NAN));
    }
    json_array_append_new(rho, row);
  }
  return json_pack("{s:o, s:o}", "parameters", names, "rho", rho);
}

/* ------------------------------------------------------------ JSON reading */

static const json_t *jget(const json_t *o, const char *path)
{
  char key[64];
  const char *p = path;
  while (o != NULL && *p != '\0') {
    const char *dot = strchr(p, '.');
    size_t n = dot ? (size_t)(dot - p) : strlen(p);
    if (n >= sizeof key)
      return NULL;
    memcpy(key, p, n);
    key[n] = '\0';
    o = json_is_object(o) ? json_object_get(o, key) : NULL;
    p += n + (dot ? 1 : 0);
  }
  return o;
}

static double jnum(const json_t *o, const char *path)
{
  const json_t *v = jget(o, path);
  return json_is_number(v) ? json_number_value(v) : NAN;
}

static const char *jstr(const json_t *o, const char *path)
{
  const json_t *v = jget(o, path);
  return json_is_string(v) ? json_string_value(v) : "";
}

/* ------------------------------------------------------------ HTML pieces */

static void esc(FILE *fp, const char *s) { svgc_escape(fp, s); }

/* printf into a buffer, then escaped */
static void escf(FILE *fp, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
static void escf(FILE *fp, const char *fmt, ...)
{
  char buf[1024];
  va_list ap;
  va_start(ap, fmt);
  vsnprintf(buf, sizeof buf, fmt, ap);
  va_end(ap);
  esc(fp, buf);
}

/* Decimals that show 0.1 um (lengths) and 1e-7 rad (angles) in a unit,
 * as the text reports do. */
static int length_decimals(const char *unit)
{
  if (strcmp(unit, "m") == 0) return 7;
  if (strcmp(unit, "um") == 0) return 1;
  if (strcmp(unit, "in") == 0) return 6;
  return 4;
}
static int angle_decimals(const char *unit)
{
  if (strcmp(unit, "rad") == 0) return 7;
  if (strcmp(unit, "mrad") == 0) return 4;
  return 6;
}

/* A number cell: fixed decimals, "-" for a missing value. */
static void num_cell(FILE *fp, double v, int dec)
{
  if (!isfinite(v))
    fputs("<td class=\"n\">-</td>", fp);
  else /* no -0.0000 for a rounding left-over */
    fprintf(fp, "<td class=\"n\">%.*f</td>", dec, fabs(v) < 0.5 * pow(10.0, -dec) ? 0.0 : v);
}

static void text_cell(FILE *fp, const char *s)
{
  fputs("<td>", fp);
  esc(fp, s);
  fputs("</td>", fp);
}

static const char style_css[] =
  "body{font-family:sans-serif;font-size:10.5pt;color:#111;margin:16px auto;max-width:720px;line-height:1.35}\n"
  "h1{font-size:17pt;margin:0 0 6px}h2{font-size:13.5pt;border-bottom:1px solid #888;margin:22px 0 8px}\n"
  "h3{font-size:11pt;margin:14px 0 6px}\n"
  "table{border-collapse:collapse;margin:6px 0 10px;font-size:9pt}\n"
  "th,td{border:1px solid #bbb;padding:2px 5px;vertical-align:top}th{background:#eee;text-align:left}\n"
  "td.n{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}\n"
  "table.meas,table.matrix{font-size:7.5pt}table.matrix td,table.matrix th{padding:1px 2px}\n"
  "table.matrix{font-size:5.6pt}\n"
  "code,.hash{font-family:monospace;font-size:8.5pt;word-break:break-all}\n"
  "figure{margin:10px 0;break-inside:avoid;page-break-inside:avoid}\n"
  "figcaption{font-size:9pt;color:#333;margin-top:2px}\n"
  "svg.chart{display:block;max-width:100%;height:auto}\n"
  ".panels{display:flex;flex-wrap:wrap;gap:6px}.panels figure{margin:0;width:354px}\n"
  ".verdict{font-weight:bold;font-size:11.5pt;padding:6px 8px;border:2px solid #333;display:inline-block}\n"
  ".caution{border-left:4px solid #D55E00;padding:4px 10px;background:#fff7f0;white-space:pre-wrap}\n"
  "tr{break-inside:avoid;page-break-inside:avoid}thead{display:table-header-group}\n"
  "@media print{\n"
  "  @page{margin:14mm 13mm}\n"
  "  body{margin:0;max-width:none;font-size:9.5pt}\n"
  "  section{break-before:page;page-break-before:always}\n"
  "  section.first{break-before:auto;page-break-before:auto}\n"
  "  h2{break-after:avoid;page-break-after:avoid}\n"
  "  .caution{background:none}\n"
  "}\n";

/* ------------------------------------------------------------ figure data */

typedef struct meas_view {
  size_t n;
  double *index, *before, *after, *joints; /* joints: n x n_joints */
  int *is_check, *excluded;
  size_t n_joints;
} meas_view;

static void meas_view_free(meas_view *v)
{
  free(v->index);
  free(v->before);
  free(v->after);
  free(v->joints);
  free(v->is_check);
  free(v->excluded);
}

/* The per-measurement errors of the report: before and after (calibrate)
 * or the one error (verify, in before; after NaN). */
static int meas_view_read(const json_t *root, int calibrate, size_t n_joints, meas_view *v)
{
  const json_t *ms = jget(root, "measurements");
  size_t i, k, n = json_is_array(ms) ? json_array_size(ms) : 0;
  memset(v, 0, sizeof *v);
  v->n = n;
  v->n_joints = n_joints;
  v->index = malloc((n ? n : 1) * sizeof *v->index);
  v->before = malloc((n ? n : 1) * sizeof *v->before);
  v->after = malloc((n ? n : 1) * sizeof *v->after);
  v->joints = malloc((n * n_joints > 0 ? n * n_joints : 1) * sizeof *v->joints);
  v->is_check = malloc((n ? n : 1) * sizeof *v->is_check);
  v->excluded = malloc((n ? n : 1) * sizeof *v->excluded);
  if (!v->index || !v->before || !v->after || !v->joints || !v->is_check || !v->excluded)
    return -1;
  for (i = 0; i < n; i++) {
    const json_t *m = json_array_get(ms, i), *q = json_object_get(m, "joints");
    v->index[i] = (double)i + 1;
    v->before[i] = jnum(m, calibrate ? "before.position" : "error.position");
    v->after[i] = calibrate ? jnum(m, "after.position") : NAN;
    v->is_check[i] = strcmp(jstr(m, "set"), "check") == 0;
    v->excluded[i] = json_is_string(json_object_get(m, "excluded"));
    for (k = 0; k < n_joints; k++) {
      const json_t *x = json_is_array(q) ? json_array_get(q, k) : NULL;
      v->joints[i * n_joints + k] = json_is_number(x) ? json_number_value(x) : NAN;
    }
  }
  return 0;
}

/* y values of the rows matching a selection, others NaN (a series over
 * the same x). which: 0 fit kept, 1 check kept, 2 excluded. */
static double *select_rows(const meas_view *v, const double *y, int which)
{
  double *out = malloc((v->n ? v->n : 1) * sizeof *out);
  size_t i;
  if (out == NULL)
    return NULL;
  for (i = 0; i < v->n; i++) {
    int w = v->excluded[i] ? 2 : v->is_check[i] ? 1 : 0;
    out[i] = w == which ? y[i] : NAN;
  }
  return out;
}

static int cmp_double(const void *a, const void *b)
{
  double x = *(const double *)a, y = *(const double *)b;
  return (x > y) - (x < y);
}

/* The sorted finite values of y over the kept rows, and their cumulative
 * fractions (k + 1) / n. */
static size_t cdf_of(const meas_view *v, const double *y, double **xs, double **fs)
{
  size_t i, n = 0;
  *xs = malloc((v->n ? v->n : 1) * sizeof **xs);
  *fs = malloc((v->n ? v->n : 1) * sizeof **fs);
  if (*xs == NULL || *fs == NULL)
    return 0;
  for (i = 0; i < v->n; i++)
    if (!v->excluded[i] && isfinite(y[i]) && y[i] > 0)
      (*xs)[n++] = y[i];
  qsort(*xs, n, sizeof **xs, cmp_double);
  for (i = 0; i < n; i++)
    (*fs)[i] = (double)(i + 1) / (double)n;
  return n;
}

/* ------------------------------------------------------------ sections */

typedef struct ctx {
  FILE *fp;
  const json_t *root;
  int calibrate;
  const char *lu, *au;
  int ldec, adec;
  double sigma; /* noise level, length unit (NaN: none) */
  meas_view mv;
  const json_t *joints; /* robot.joints */
  int fig;              /* figure counter */
} ctx;

static void fig_open(ctx *c) { fputs("<figure>\n", c->fp); }
static void fig_close(ctx *c, const char *caption)
{
  c->fig++;
  fprintf(c->fp, "<figcaption>Figure %d. ", c->fig);
  esc(c->fp, caption);
  fputs("</figcaption>\n</figure>\n", c->fp);
}

static void stats_row(ctx *c, const char *label, const json_t *s)
{
  fputs("<tr>", c->fp);
  text_cell(c->fp, label);
  fprintf(c->fp, "<td class=\"n\">%.0f</td>", jnum(s, "count"));
  num_cell(c->fp, jnum(s, "rms"), c->ldec);
  num_cell(c->fp, jnum(s, "mean"), c->ldec);
  num_cell(c->fp, jnum(s, "p95"), c->ldec);
  num_cell(c->fp, jnum(s, "max"), c->ldec);
  fputs("</tr>\n", c->fp);
}

static void stats_head_of(ctx *c, const char *what)
{
  fputs("<table><thead><tr><th>", c->fp);
  esc(c->fp, what);
  fputs("</th><th>count</th>", c->fp);
  fputs("<th>", c->fp);
  escf(c->fp, "rms (%s)", c->lu);
  fputs("</th><th>", c->fp);
  escf(c->fp, "mean (%s)", c->lu);
  fputs("</th><th>", c->fp);
  escf(c->fp, "p95 (%s)", c->lu);
  fputs("</th><th>", c->fp);
  escf(c->fp, "max (%s)", c->lu);
  fputs("</th></tr></thead><tbody>\n", c->fp);
}

static void stats_head(ctx *c) { stats_head_of(c, "position error |measured - model|"); }

static void section_header(ctx *c)
{
  FILE *fp = c->fp;
  const json_t *inputs = jget(c->root, "inputs");
  size_t k;
  fputs("<section class=\"first\" id=\"header\">\n<h1>", fp);
  escf(fp, "%s report: %s", c->calibrate ? "Calibration" : "Verification",
       jstr(c->root, "robot.name")[0] ? jstr(c->root, "robot.name") : "(robot not named)");
  fputs("</h1>\n<table><tbody>\n", fp);
  fputs("<tr><th>robot</th>", fp);
  text_cell(fp, jstr(c->root, "robot.name"));
  fputs("</tr>\n<tr><th>date (UTC)</th>", fp);
  text_cell(fp, jstr(c->root, "created"));
  fputs("</tr>\n<tr><th>tool</th>", fp);
  fputs("<td>", fp);
  escf(fp, "%s %s, command %s", jstr(c->root, "tool.name"), jstr(c->root, "tool.version"), jstr(c->root, "command"));
  fputs("</td></tr>\n<tr><th>run id</th>", fp);
  text_cell(fp, jstr(c->root, "run_id"));
  fputs("</tr>\n<tr><th>units</th>", fp);
  fputs("<td>", fp);
  escf(fp, "lengths in %s, angles in %s", c->lu, c->au);
  fputs("</td></tr>\n</tbody></table>\n<h3>Inputs</h3>\n<table><thead><tr><th>file</th><th>SHA-256 of the bytes read</th>"
        "</tr></thead><tbody>\n",
        fp);
  for (k = 0; json_is_array(inputs) && k < json_array_size(inputs); k++) {
    const json_t *in = json_array_get(inputs, k);
    fputs("<tr>", fp);
    text_cell(fp, jstr(in, "path"));
    fputs("<td class=\"hash\">", fp);
    esc(fp, jstr(in, "sha256"));
    fputs("</td></tr>\n", fp);
  }
  if (k == 0)
    fputs("<tr><td colspan=\"2\">not recorded in this report</td></tr>\n", fp);
  fputs("</tbody></table>\n", fp);

  fputs("<h2>Summary and verdict</h2>\n", fp);
  if (c->calibrate) {
    const json_t *v = jget(c->root, "verdict");
    const char *conclusion = jstr(v, "conclusion");
    fputs("<p class=\"verdict\">", fp);
    escf(fp, "Conclusion: %s (%s RMS %.*f %s before, %.*f %s after)", conclusion, jstr(v, "basis"), c->ldec,
         jnum(v, "before.rms"), c->lu, c->ldec, jnum(v, "after.rms"), c->lu);
    fputs("</p>\n<p>", fp);
    if (strcmp(conclusion, "improved") == 0)
      esc(fp, strcmp(jstr(v, "basis"), "fit set") == 0
                  ? "The fit improved the errors, but no poses were held out: the result is not validated. Hold out "
                    "poses (--check-fraction) or verify on a new campaign before use."
                  : "The calibrated model predicts the held-out check poses better than the starting model.");
    else if (strcmp(conclusion, "not improved") == 0)
      esc(fp, "Less than a tenth better: keep the previous model.");
    else
      esc(fp, "Worse than the starting model: do not use it.");
    fputs("</p>\n<p>", fp);
    escf(fp, "Fitted: %s. ", jstr(c->root, "fitted"));
    escf(fp, "Noise level (one measured coordinate): %.*f %s, %s.", c->ldec, c->sigma, c->lu,
         strcmp(jstr(c->root, "sigma.source"), "estimated") == 0 ? "estimated from the fit"
         : strcmp(jstr(c->root, "sigma.source"), "rows") == 0   ? "the mean of the rows' own sigmas"
                                                                 : "given");
    fputs("</p>\n", fp);
    stats_head(c);
    stats_row(c, "fit, before", jget(c->root, "accuracy_before.fit.position"));
    stats_row(c, "fit, after", jget(c->root, "accuracy_after.fit.position"));
    if (jnum(c->root, "accuracy_before.check.position.count") > 0) {
      stats_row(c, "check, before", jget(c->root, "accuracy_before.check.position"));
      stats_row(c, "check, after", jget(c->root, "accuracy_after.check.position"));
    }
    fputs("</tbody></table>\n<p>", fp);
    escf(fp, "Left out of these figures: %zu fit measurements dropped by the outlier screen, %zu check "
             "measurements flagged as gross errors.",
         json_array_size(jget(c->root, "outliers")), json_array_size(jget(c->root, "check_flagged")));
    fputs("</p>\n", fp);
  } else {
    const json_t *a = jget(c->root, "acceptance");
    const json_t *tols = jget(a, "tolerances");
    const char *key;
    const json_t *t;
    fputs("<p class=\"verdict\">", fp);
    escf(fp, "Acceptance: %s (on the %s set)", jstr(a, "verdict"), jstr(a, "set"));
    fputs("</p>\n", fp);
    if (json_object_size(tols) > 0) {
      fprintf(fp, "<table><thead><tr><th>tolerance</th><th>limit</th><th>value</th><th>result</th></tr></thead><tbody>\n");
      json_object_foreach((json_t *)tols, key, t) {
        int ang = strcmp(key, "angle-max") == 0;
        fputs("<tr>", fp);
        fputs("<td>", fp);
        escf(fp, "%s (%s)", key, ang ? c->au : c->lu);
        fputs("</td>", fp);
        num_cell(fp, jnum(t, "limit"), ang ? c->adec : c->ldec);
        num_cell(fp, jnum(t, "value"), ang ? c->adec : c->ldec);
        text_cell(fp, json_is_true(json_object_get(t, "pass")) ? "pass" : "fail");
        fputs("</tr>\n", fp);
      }
      fputs("</tbody></table>\n", fp);
    }
    fputs("<p>", fp);
    escf(fp, "Base pose: %s.", strcmp(jstr(c->root, "base_source"), "given") == 0 ? "given" : "registered to these data");
    fputs("</p>\n", fp);
    stats_head(c);
    stats_row(c, "fit", jget(c->root, "accuracy.fit.position"));
    if (jnum(c->root, "accuracy.check.position.count") > 0)
      stats_row(c, "check", jget(c->root, "accuracy.check.position"));
    fputs("</tbody></table>\n", fp);
  }
  {
    const json_t *w = jget(c->root, "warnings");
    fputs("<h3>Warnings</h3>\n", fp);
    if (json_array_size(w) == 0) {
      fputs("<p>None.</p>\n", fp);
    } else {
      fputs("<ul>\n", fp);
      for (k = 0; k < json_array_size(w); k++) {
        fputs("<li>", fp);
        esc(fp, json_string_value(json_array_get(w, k)));
        fputs("</li>\n", fp);
      }
      fputs("</ul>\n", fp);
    }
  }
  if (json_is_string(jget(c->root, "safety"))) {
    fputs("<h3>Cautions</h3>\n<div class=\"caution\">", fp);
    esc(fp, jstr(c->root, "safety"));
    fputs("</div>\n", fp);
  }
  fputs("</section>\n", fp);
}

/* One panel of errors per measurement. */
static void errors_panel(ctx *c, const char *title, const double *y, const char *ytitle)
{
  double *fit = select_rows(&c->mv, y, 0), *chk = select_rows(&c->mv, y, 1), *exc = select_rows(&c->mv, y, 2);
  svgc_series s[3];
  size_t n = 0;
  svgc_xy_chart ch;
  if (fit && chk && exc) {
    s[n++] = (svgc_series){ "fit set", SVGC_SCATTER, 0, c->mv.n, c->mv.index, fit };
    s[n++] = (svgc_series){ "check set", SVGC_SCATTER, 2, c->mv.n, c->mv.index, chk };
    s[n++] = (svgc_series){ c->calibrate ? "dropped or flagged (left out of the figures)" : "left out of the figures",
                            SVGC_SCATTER, 4, c->mv.n, c->mv.index, exc };
    memset(&ch, 0, sizeof ch);
    ch.title = title;
    ch.width = 680;
    ch.height = 260;
    ch.x = (svgc_axis){ "measurement (campaign order)", 0, (double)c->mv.n + 1, 0, 0 };
    ch.y = (svgc_axis){ ytitle, NAN, NAN, 1, 0 };
    ch.n_series = n;
    ch.series = s;
    fig_open(c);
    if (svgc_xy(c->fp, &ch) != 0)
      fputs("<p>(no data to draw)</p>\n", c->fp);
    fig_close(c, "Position error of each measurement in campaign order; circles the fit set, triangles the check "
                 "set, crosses the measurements the figures leave out. The numbers are in the table of the "
                 "measurements at the end.");
  }
  free(fit);
  free(chk);
  free(exc);
}

static void section_errors(ctx *c)
{
  char yt[96];
  fputs("<section id=\"errors\">\n<h2>Error per measurement</h2>\n", c->fp);
  snprintf(yt, sizeof yt, "position error (%s)", c->lu);
  if (c->calibrate) {
    errors_panel(c, "Before calibration (starting model, registered; log scale)", c->mv.before, yt);
    errors_panel(c, "After calibration (as-built model; log scale)", c->mv.after, yt);
  } else {
    errors_panel(c, "Error of the model on this campaign (log scale)", c->mv.before, yt);
  }
  fputs("</section>\n", c->fp);
}

static void section_distribution(ctx *c)
{
  double *xb = NULL, *fb = NULL, *xa = NULL, *fa = NULL;
  size_t nb = cdf_of(&c->mv, c->mv.before, &xb, &fb), na = c->calibrate ? cdf_of(&c->mv, c->mv.after, &xa, &fa) : 0;
  svgc_series s[2];
  svgc_mark mk;
  svgc_xy_chart ch;
  char xt[96], ml[96];
  fputs("<section id=\"distribution\">\n<h2>Distribution of the errors</h2>\n", c->fp);
  snprintf(xt, sizeof xt, "position error (%s, log scale)", c->lu);
  memset(&ch, 0, sizeof ch);
  s[0] = (svgc_series){ c->calibrate ? "before calibration" : "this campaign", SVGC_STEP, 0, nb, xb, fb };
  s[1] = (svgc_series){ "after calibration", SVGC_STEP, 1, na, xa, fa };
  ch.title = "Cumulative distribution of the position errors";
  ch.width = 680;
  ch.height = 300;
  ch.x = (svgc_axis){ xt, NAN, NAN, 1, 0 };
  ch.y = (svgc_axis){ "fraction of measurements", 0, 1, 0, 0 };
  ch.n_series = c->calibrate ? 2 : 1;
  ch.series = s;
  if (isfinite(c->sigma)) {
    snprintf(ml, sizeof ml, "noise level %.*f %s", c->ldec, c->sigma, c->lu);
    mk = (svgc_mark){ c->sigma, 1, ml };
    ch.marks = &mk;
    ch.n_marks = 1;
  }
  fig_open(c);
  if (nb == 0 || svgc_xy(c->fp, &ch) != 0)
    fputs("<p>(no data to draw)</p>\n", c->fp);
  fig_close(c, c->calibrate ? "Fraction of the kept measurements whose position error is at most the value on the x "
                              "axis, before (solid) and after (dashed) calibration; the dashed vertical line is the "
                              "noise level (one standard deviation of one measured coordinate)."
                            : "Fraction of the kept measurements whose position error is at most the value on the x axis.");
  stats_head(c);
  if (c->calibrate) {
    stats_row(c, "fit, before", jget(c->root, "accuracy_before.fit.position"));
    stats_row(c, "fit, after", jget(c->root, "accuracy_after.fit.position"));
    stats_row(c, "check, before", jget(c->root, "accuracy_before.check.position"));
    stats_row(c, "check, after", jget(c->root, "accuracy_after.check.position"));
  } else {
    stats_row(c, "fit", jget(c->root, "accuracy.fit.position"));
    stats_row(c, "check", jget(c->root, "accuracy.check.position"));
  }
  fputs("</tbody></table>\n", c->fp);
  if (isfinite(c->sigma)) {
    fputs("<p>", c->fp);
    escf(c->fp, "Noise level: %.*f %s per coordinate.", c->ldec, c->sigma, c->lu);
    fputs("</p>\n", c->fp);
  }
  fputs("</section>\n", c->fp);
  free(xb);
  free(fb);
  free(xa);
  free(fa);
}

static void section_joints(ctx *c)
{
  size_t k;
  const double *y = c->calibrate ? c->mv.after : c->mv.before;
  const json_t *tests = jget(c->root, "residual_pattern.tests");
  double *xj = malloc((c->mv.n ? c->mv.n : 1) * sizeof *xj);
  double *fit = select_rows(&c->mv, y, 0), *chk = select_rows(&c->mv, y, 1);
  fputs("<section id=\"joints\">\n<h2>Errors against each joint</h2>\n<p>", c->fp);
  esc(c->fp, "One panel per joint: the position error of each kept measurement against that joint's logged value. "
             "A wavy pattern against a joint points to gear or encoder error; a slope against a joint under load "
             "points to compliance; noise looks like an even band.");
  fputs("</p>\n<div class=\"panels\">\n", c->fp);
  for (k = 0; xj && fit && chk && k < c->mv.n_joints; k++) {
    const json_t *j = json_array_get(c->joints, k);
    char title[96], xt[96], yt[96];
    svgc_series s[2];
    svgc_xy_chart ch;
    size_t i;
    for (i = 0; i < c->mv.n; i++)
      xj[i] = c->mv.joints[i * c->mv.n_joints + k];
    snprintf(title, sizeof title, "joint %s", jstr(j, "name"));
    snprintf(xt, sizeof xt, "%s (%s)", jstr(j, "name"), jstr(j, "unit"));
    snprintf(yt, sizeof yt, "error %s(%s)", c->calibrate ? "after " : "", c->lu);
    s[0] = (svgc_series){ "fit", SVGC_SCATTER, 0, c->mv.n, xj, fit };
    s[1] = (svgc_series){ "check", SVGC_SCATTER, 2, c->mv.n, xj, chk };
    memset(&ch, 0, sizeof ch);
    ch.title = title;
    ch.width = 354;
    ch.height = 230;
    ch.x = (svgc_axis){ xt, NAN, NAN, 0, 0 };
    ch.y = (svgc_axis){ yt, NAN, NAN, 0, 1 };
    ch.n_series = 2;
    ch.series = s;
    fputs("<figure>\n", c->fp);
    if (svgc_xy(c->fp, &ch) != 0)
      fputs("<p>(no data to draw)</p>\n", c->fp);
    c->fig++;
    fprintf(c->fp, "<figcaption>Figure %d. ", c->fig);
    escf(c->fp, "Error against %s; circles fit, triangles check.", jstr(j, "name"));
    fputs("</figcaption>\n</figure>\n", c->fp);
  }
  fputs("</div>\n", c->fp);
  if (json_array_size(tests) > 0) {
    fputs("<h3>Do the residuals look like noise?</h3>\n<p>", c->fp);
    escf(c->fp, "Each family of each joint tested against the noise (F test, significant below p = %.3g, from a "
                "share of %.0f %% of the residual sum of squares and from %.2g %s RMS): %.0f significant of %.0f tested.",
         jnum(c->root, "residual_pattern.p_threshold"), 100 * jnum(c->root, "residual_pattern.min_explained"),
         jnum(c->root, "residual_pattern.min_explained_rms"), c->lu,
         jnum(c->root, "residual_pattern.significant"), jnum(c->root, "residual_pattern.tested"));
    fprintf(c->fp, "</p>\n<table><thead><tr><th>joint</th><th>family</th><th>share of the residuals</th><th>p</th>"
                   "<th>explained rms (%s)</th><th>significant</th></tr></thead><tbody>\n",
            c->lu);
    for (k = 0; k < json_array_size(tests); k++) {
      const json_t *t = json_array_get(tests, k);
      if (strcmp(jstr(t, "status"), "tested") != 0)
        continue;
      fputs("<tr>", c->fp);
      text_cell(c->fp, jstr(t, "joint"));
      text_cell(c->fp, jstr(t, "family"));
      num_cell(c->fp, jnum(t, "share"), 4);
      fprintf(c->fp, "<td class=\"n\">%.3g</td>", jnum(t, "p"));
      num_cell(c->fp, jnum(t, "explained_rms"), c->ldec);
      text_cell(c->fp, json_is_true(json_object_get(t, "significant")) ? "yes" : "no");
      fputs("</tr>\n", c->fp);
    }
    fputs("</tbody></table>\n", c->fp);
  }
  fputs("</section>\n", c->fp);
  free(xj);
  free(fit);
  free(chk);
}

/* The link values of one kind (lengths: a, d; angles: alpha, beta,
 * theta) as bars of the difference with the std. */
static void link_bars(ctx *c, int angles)
{
  static const char *const len_keys[2] = { "a", "d" }, *const ang_keys[3] = { "alpha", "beta", "theta" };
  const char *const *keys = angles ? ang_keys : len_keys;
  size_t nk = angles ? 3 : 2, r, k, n = 0;
  const json_t *rows = jget(c->root, "links.rows");
  size_t cap = json_array_size(rows) * nk + 1;
  char **labels = calloc(cap, sizeof *labels);
  double *v = malloc(cap * sizeof *v), *e = malloc(cap * sizeof *e);
  char title[128], at[96];
  svgc_bar_chart ch;
  if (labels == NULL || v == NULL || e == NULL)
    goto out;
  for (r = 0; r < json_array_size(rows); r++) {
    const json_t *row = json_array_get(rows, r);
    for (k = 0; k < nk; k++) {
      const json_t *x = jget(row, "values");
      x = x ? json_object_get(x, keys[k]) : NULL;
      if (x == NULL || !json_is_true(json_object_get(x, "determined")))
        continue;
      labels[n] = malloc(64);
      if (labels[n] == NULL)
        goto out;
      snprintf(labels[n], 64, "%s %s", jstr(row, "line"), keys[k]);
      v[n] = jnum(x, "difference");
      e[n] = jnum(x, "std");
      n++;
    }
  }
  if (n == 0)
    goto out;
  snprintf(title, sizeof title, "Link %s: as-built minus starting", angles ? "angles" : "lengths");
  snprintf(at, sizeof at, "difference (%s)", angles ? c->au : c->lu);
  ch = (svgc_bar_chart){ title, 680, at, n, (const char *const *)labels, v, e };
  fig_open(c);
  svgc_bars(c->fp, &ch);
  fig_close(c, angles ? "Changes of the link angles the data determined, with one standard deviation either side."
                      : "Changes of the link lengths the data determined, with one standard deviation either side.");
out:
  for (k = 0; labels && k < n; k++)
    free(labels[k]);
  free(labels);
  free(v);
  free(e);
}

static void section_links(ctx *c)
{
  const json_t *rows = jget(c->root, "links.rows");
  static const char *const keys[5] = { "a", "alpha", "d", "beta", "theta" };
  size_t r, k;
  if (!json_is_array(rows))
    return;
  fputs("<section id=\"links\">\n<h2>Link parameters</h2>\n<p>", c->fp);
  esc(c->fp, "Row k: joint k's line and the link to line k+1 (row 0 the base, the last the flange); dh: common "
             "normal of length a and twist alpha, d along the line between normals; beta: Hayati's form for nearly "
             "parallel lines; theta: the joint's angle at logged zero, so its difference is the zero offset change. "
             "Values the data could not determine are not drawn.");
  fputs("</p>\n", c->fp);
  link_bars(c, 0);
  link_bars(c, 1);
  fprintf(c->fp, "<table><thead><tr><th>row</th><th>line</th><th>form</th><th>value</th><th>starting</th>"
                 "<th>as-built</th><th>difference</th><th>std</th><th>note</th></tr></thead><tbody>\n");
  for (r = 0; r < json_array_size(rows); r++) {
    const json_t *row = json_array_get(rows, r), *vals = json_object_get(row, "values");
    for (k = 0; k < 5; k++) {
      const json_t *x = vals ? json_object_get(vals, keys[k]) : NULL;
      int ang = k == 1 || k >= 3, dec = ang ? c->adec : c->ldec;
      if (x == NULL)
        continue;
      fputs("<tr>", c->fp);
      fprintf(c->fp, "<td class=\"n\">%.0f</td>", jnum(row, "row"));
      text_cell(c->fp, jstr(row, "line"));
      text_cell(c->fp, jstr(row, "form"));
      fputs("<td>", c->fp);
      escf(c->fp, "%s (%s)", keys[k], ang ? c->au : c->lu);
      fputs("</td>", c->fp);
      num_cell(c->fp, jnum(x, "starting"), dec);
      num_cell(c->fp, jnum(x, "asbuilt"), dec);
      num_cell(c->fp, jnum(x, "difference"), dec);
      num_cell(c->fp, jnum(x, "std"), dec);
      text_cell(c->fp, jstr(x, "note"));
      fputs("</tr>\n", c->fp);
    }
  }
  fputs("</tbody></table>\n</section>\n", c->fp);
}

static void section_predicted(ctx *c)
{
  const json_t *p = jget(c->root, "predicted_accuracy"), *vals = jget(p, "workspace.values");
  size_t n = json_array_size(vals), i, m = 0;
  double *x, *f;
  svgc_series s;
  svgc_mark mk;
  svgc_xy_chart ch;
  char xt[96], ml[96];
  if (!json_is_object(p))
    return;
  fputs("<section id=\"predicted\">\n<h2>Predicted accuracy</h2>\n<p>", c->fp);
  esc(c->fp, "First-order prediction from the covariance of the estimated parameters: the standard uncertainty of "
             "the predicted target positions, in the instrument's frame with the base pose's uncertainty included, "
             "over random configurations within the joint limits and at the check poses.");
  fputs("</p>\n", c->fp);
  x = malloc((n ? n : 1) * sizeof *x);
  f = malloc((n ? n : 1) * sizeof *f);
  if (x != NULL && f != NULL) {
    for (i = 0; i < n; i++) {
      double v = jnum(json_array_get(vals, i), "position");
      if (isfinite(v) && v > 0)
        x[m++] = v;
    }
    qsort(x, m, sizeof *x, cmp_double);
    for (i = 0; i < m; i++)
      f[i] = (double)(i + 1) / (double)m;
    snprintf(xt, sizeof xt, "predicted position uncertainty (%s)", c->lu);
    s = (svgc_series){ "workspace configurations", SVGC_STEP, 0, m, x, f };
    memset(&ch, 0, sizeof ch);
    ch.title = "Predicted uncertainty over the workspace";
    ch.width = 680;
    ch.height = 280;
    ch.x = (svgc_axis){ xt, NAN, NAN, 0, 1 };
    ch.y = (svgc_axis){ "fraction of configurations", 0, 1, 0, 0 };
    ch.n_series = 1;
    ch.series = &s;
    if (isfinite(jnum(p, "check.position.rms"))) {
      snprintf(ml, sizeof ml, "predicted rms at the check poses %.*f %s", c->ldec, jnum(p, "check.position.rms"), c->lu);
      mk = (svgc_mark){ jnum(p, "check.position.rms"), 1, ml };
      ch.marks = &mk;
      ch.n_marks = 1;
    }
    if (m > 0) {
      fig_open(c);
      if (svgc_xy(c->fp, &ch) != 0)
        fputs("<p>(no data to draw)</p>\n", c->fp);
      fig_close(c, "Cumulative distribution of the predicted uncertainty over the workspace configurations.");
    }
  }
  free(x);
  free(f);
  stats_head_of(c, "predicted position uncertainty");
  stats_row(c, "predicted, workspace", jget(p, "workspace.position"));
  if (json_is_object(jget(p, "check")))
    stats_row(c, "predicted, check poses", jget(p, "check.position"));
  fputs("</tbody></table>\n", c->fp);
  if (json_is_object(jget(p, "check"))) {
    fputs("<p>", c->fp);
    escf(c->fp, "Measured RMS on the check set after calibration: %.*f %s; the prediction with the noise added: %.*f %s.",
         c->ldec, jnum(p, "check.measured_rms"), c->lu, c->ldec, jnum(p, "check.rms_with_noise"), c->lu);
    fputs("</p>\n", c->fp);
  }
  fputs("</section>\n", c->fp);
}

static void section_ident(ctx *c)
{
  const json_t *id = jget(c->root, "identifiability"), *sv = jget(c->root, "singular_values");
  const json_t *cm = jget(c->root, "correlation_matrix");
  const json_t *vals = jget(sv, "values");
  size_t n = json_array_size(vals), k, i;
  if (!json_is_object(id))
    return;
  fputs("<section id=\"identifiability\">\n<h2>Identifiability</h2>\n<p>", c->fp);
  escf(c->fp, "%.0f parameters requested, %.0f identifiable, %.0f estimated, %.0f fixed as redundant, %.0f not "
              "determined by these poses, %.0f weak; condition number %.4g.",
       jnum(id, "requested"), jnum(id, "identifiable"), jnum(id, "estimated"), jnum(id, "fixed_redundant"),
       jnum(id, "fixed_by_data"), jnum(id, "weak"), jnum(id, "condition_number"));
  fputs("</p>\n", c->fp);
  if (n > 0) {
    double *x = malloc(n * sizeof *x), *y = malloc(n * sizeof *y);
    svgc_series s;
    svgc_mark mk[2];
    svgc_xy_chart ch;
    char yt[96];
    size_t nm = 0;
    if (x && y) {
      for (k = 0; k < n; k++) {
        x[k] = (double)k + 1;
        y[k] = json_is_number(json_array_get(vals, k)) ? json_number_value(json_array_get(vals, k)) : NAN;
      }
      snprintf(yt, sizeof yt, "singular value (%s)", jstr(sv, "unit"));
      s = (svgc_series){ "singular value", SVGC_SCATTER, 0, n, x, y };
      if (isfinite(jnum(sv, "std_equals_noise")))
        mk[nm++] = (svgc_mark){ jnum(sv, "std_equals_noise"), 0, "a direction's std = the noise level" };
      if (isfinite(jnum(sv, "weak_below")))
        mk[nm++] = (svgc_mark){ jnum(sv, "weak_below"), 0, "below: a direction's std over 5 x the noise" };
      memset(&ch, 0, sizeof ch);
      ch.title = "Singular values of the scaled, weighted Jacobian (log scale)";
      ch.width = 680;
      ch.height = 280;
      ch.x = (svgc_axis){ "index (largest first)", 0, (double)n + 1, 0, 0 };
      ch.y = (svgc_axis){ yt, NAN, NAN, 1, 0 };
      ch.n_series = 1;
      ch.series = &s;
      ch.marks = mk;
      ch.n_marks = nm;
      fig_open(c);
      if (svgc_xy(c->fp, &ch) != 0)
        fputs("<p>(no data to draw)</p>\n", c->fp);
      fig_close(c, "One point per estimated direction of the parameter space; a smaller singular value is a "
                   "direction the poses determine less well (its standard deviation, length at the arm's reach, is "
                   "the noise level times the noise line's value over the singular value).");
      /* the values in rows of 11: index, then value */
      fputs("<table><tbody>\n", c->fp);
      for (i = 0; i < n; i += 11) {
        fputs("<tr><th>index</th>", c->fp);
        for (k = i; k < n && k < i + 11; k++)
          fprintf(c->fp, "<td class=\"n\">%zu</td>", k + 1);
        fputs("</tr>\n<tr><th>value</th>", c->fp);
        for (k = i; k < n && k < i + 11; k++)
          fprintf(c->fp, "<td class=\"n\">%.4g</td>", y[k]);
        fputs("</tr>\n", c->fp);
      }
      fputs("</tbody></table>\n<p>", c->fp);
      escf(c->fp, "Noise line: %.4g %s; weak line: %.4g %s.", jnum(sv, "std_equals_noise"), jstr(sv, "unit"),
           jnum(sv, "weak_below"), jstr(sv, "unit"));
      fputs("</p>\n", c->fp);
    }
    free(x);
    free(y);
  }
  {
    const json_t *names = jget(cm, "parameters"), *rho = jget(cm, "rho");
    size_t np = json_array_size(names);
    if (np > 0 && json_array_size(rho) == np) {
      const char **labels = malloc(np * sizeof *labels);
      double *m = malloc(np * np * sizeof *m);
      if (labels && m) {
        svgc_heatmap h;
        for (k = 0; k < np; k++) {
          const json_t *row = json_array_get(rho, k);
          labels[k] = json_string_value(json_array_get(names, k));
          for (i = 0; i < np; i++) {
            const json_t *v = json_array_get(row, i);
            m[k * np + i] = json_is_number(v) ? json_number_value(v) : NAN;
          }
        }
        h = (svgc_heatmap){ "Correlation of the estimated parameters", np, labels, m };
        fig_open(c);
        svgc_heat(c->fp, &h);
        fig_close(c, "Correlation coefficient of each pair of estimated parameters: red positive, blue negative, "
                     "darker is stronger (white: uncorrelated).");
        fputs("<table class=\"matrix\"><thead><tr><th>rho x 100</th>", c->fp);
        for (k = 0; k < np; k++)
          fprintf(c->fp, "<th>%zu</th>", k + 1);
        fputs("</tr></thead><tbody>\n", c->fp);
        for (k = 0; k < np; k++) {
          fprintf(c->fp, "<tr><th>%zu ", k + 1);
          esc(c->fp, labels[k]);
          fputs("</th>", c->fp);
          for (i = 0; i < np; i++)
            if (isfinite(m[k * np + i]))
              fprintf(c->fp, "<td class=\"n\">%ld</td>", lround(100 * m[k * np + i]));
            else
              fputs("<td class=\"n\">-</td>", c->fp);
          fputs("</tr>\n", c->fp);
        }
        fputs("</tbody></table>\n", c->fp);
      }
      free(labels);
      free(m);
    }
  }
  {
    const json_t *corr = jget(id, "correlations"), *params = jget(c->root, "parameters");
    size_t nweak = 0, nfixed = 0;
    fputs("<h3>What the poses could not determine, and what to do</h3>\n<ul>\n", c->fp);
    for (k = 0; k < json_array_size(params); k++) {
      const json_t *p = json_array_get(params, k);
      if (json_is_true(json_object_get(p, "weak")))
        nweak++;
      if (strcmp(jstr(p, "status"), "fixed (not in the data)") == 0)
        nfixed++;
    }
    if (nweak > 0) {
      fputs("<li>", c->fp);
      escf(c->fp, "%zu weak parameters: the poses determine them poorly (a standard deviation above five times the "
                  "noise at the arm's reach, or nearly dependent on the others). Add poses that move the joints "
                  "named in the warnings over a wider range and vary the orientation of the tool.",
           nweak);
      fputs("</li>\n", c->fp);
    }
    if (nfixed > 0) {
      fputs("<li>", c->fp);
      escf(c->fp, "%zu parameters were fixed because these poses cannot determine them (for example a joint that did "
                  "not move): their values are the starting model's. Measure poses that move those joints.",
           nfixed);
      fputs("</li>\n", c->fp);
    }
    if (json_array_size(corr) > 0) {
      fputs("<li>", c->fp);
      esc(c->fp, "Strongly correlated pairs (|rho| above 0.9, listed below): the poses move these parameters "
                 "together, so each value alone is less certain than the fit as a whole; the predicted positions "
                 "are not affected. To separate them, add poses that move one without the other.");
      fputs("</li>\n", c->fp);
    }
    if (nweak == 0 && nfixed == 0 && json_array_size(corr) == 0)
      fputs("<li>Every estimated parameter is well determined by these poses.</li>\n", c->fp);
    fputs("</ul>\n", c->fp);
    if (json_array_size(corr) > 0) {
      fputs("<table><thead><tr><th>parameter</th><th>parameter</th><th>rho</th></tr></thead><tbody>\n", c->fp);
      for (k = 0; k < json_array_size(corr); k++) {
        const json_t *x = json_array_get(corr, k);
        fputs("<tr>", c->fp);
        text_cell(c->fp, jstr(x, "a"));
        text_cell(c->fp, jstr(x, "b"));
        num_cell(c->fp, jnum(x, "rho"), 4);
        fputs("</tr>\n", c->fp);
      }
      fputs("</tbody></table>\n", c->fp);
    }
  }
  fputs("</section>\n", c->fp);
}

static void section_measurements(ctx *c)
{
  const json_t *ms = jget(c->root, "measurements");
  size_t i, k;
  fputs("<section id=\"measurements\">\n<h2>Measurements</h2>\n", c->fp);
  fputs("<table class=\"meas\"><thead><tr><th>#</th><th>line</th><th>pose</th><th>target</th><th>set</th>"
        "<th>left out</th>",
        c->fp);
  if (c->calibrate) {
    fputs("<th>", c->fp);
    escf(c->fp, "before (%s)", c->lu);
    fputs("</th><th>", c->fp);
    escf(c->fp, "after (%s)", c->lu);
    fputs("</th>", c->fp);
  } else {
    fputs("<th>", c->fp);
    escf(c->fp, "error (%s)", c->lu);
    fputs("</th>", c->fp);
  }
  for (k = 0; k < c->mv.n_joints; k++) {
    const json_t *j = json_array_get(c->joints, k);
    fputs("<th>", c->fp);
    escf(c->fp, "%s (%s)", jstr(j, "name"), jstr(j, "unit"));
    fputs("</th>", c->fp);
  }
  fputs("</tr></thead><tbody>\n", c->fp);
  for (i = 0; i < json_array_size(ms); i++) {
    const json_t *m = json_array_get(ms, i);
    fprintf(c->fp, "<tr><td class=\"n\">%zu</td><td class=\"n\">%.0f</td>", i + 1, jnum(m, "line"));
    text_cell(c->fp, jstr(m, "pose"));
    text_cell(c->fp, jstr(m, "target"));
    text_cell(c->fp, jstr(m, "set"));
    text_cell(c->fp, jstr(m, "excluded"));
    num_cell(c->fp, c->mv.before[i], c->ldec);
    if (c->calibrate)
      num_cell(c->fp, c->mv.after[i], c->ldec);
    for (k = 0; k < c->mv.n_joints; k++) {
      const json_t *j = json_array_get(c->joints, k);
      num_cell(c->fp, c->mv.joints[i * c->mv.n_joints + k],
               strcmp(jstr(j, "type"), "prismatic") == 0 ? 3 : 3);
    }
    fputs("</tr>\n", c->fp);
  }
  fputs("</tbody></table>\n</section>\n", c->fp);
}

int cli_html_render(FILE *fp, const json_t *root, twf_error *err)
{
  ctx c;
  const char *cmd = jstr(root, "command");
  memset(&c, 0, sizeof c);
  if (!json_is_object(root) || strcmp(jstr(root, "tool.name"), "twistfit") != 0 ||
      (strcmp(cmd, "calibrate") != 0 && strcmp(cmd, "verify") != 0) || !json_is_array(jget(root, "measurements"))) {
    twf_error_set(err, TWF_ERR_SYNTAX, NULL, 0, 0,
                  "give the JSON that 'twistfit calibrate --json' or 'twistfit verify --json' wrote",
                  "not a twistfit calibrate or verify JSON report (its tool, command or measurements are missing)");
    return -1;
  }
  c.fp = fp;
  c.root = root;
  c.calibrate = strcmp(cmd, "calibrate") == 0;
  c.lu = jstr(root, "units.length")[0] ? jstr(root, "units.length") : "mm";
  c.au = jstr(root, "units.angle")[0] ? jstr(root, "units.angle") : "deg";
  c.ldec = length_decimals(c.lu);
  c.adec = angle_decimals(c.au);
  c.sigma = jnum(root, "sigma.length");
  c.joints = jget(root, "robot.joints");
  {
    /* joints: from robot.joints, else as many as the first row has */
    size_t nj = json_array_size(c.joints);
    const json_t *first = json_array_get(jget(root, "measurements"), 0);
    if (nj == 0 && first != NULL)
      nj = json_array_size(json_object_get(first, "joints"));
    if (meas_view_read(root, c.calibrate, nj, &c.mv) != 0) {
      meas_view_free(&c.mv);
      twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
      return -1;
    }
  }
  /* polyglot: HTML that is also well-formed XML (xmllint checks it whole) */
  fputs("<!DOCTYPE html>\n<html xmlns=\"http://www.w3.org/1999/xhtml\" lang=\"en\">\n<head>\n<meta charset=\"utf-8\"/>\n"
        "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"/>\n<title>",
        fp);
  escf(fp, "twistfit %s report: %s", cmd, jstr(root, "robot.name"));
  fprintf(fp, "</title>\n<style>\n%s</style>\n</head>\n<body>\n", style_css);
  section_header(&c);
  section_errors(&c);
  section_distribution(&c);
  section_joints(&c);
  if (c.calibrate) {
    section_links(&c);
    section_predicted(&c);
    section_ident(&c);
  }
  section_measurements(&c);
  fputs("</body>\n</html>\n", fp);
  meas_view_free(&c.mv);
  return 0;
}

int cli_put_html(FILE *fp, void *ctx_, twf_error *err)
{
  return cli_html_render(fp, (const json_t *)ctx_, err);
}

int cli_put_html_run(FILE *fp, void *ctx_, twf_error *err)
{
  json_object_set_new((json_t *)ctx_, "run_id", json_string(cli_run_id()));
  return cli_html_render(fp, (const json_t *)ctx_, err);
}
