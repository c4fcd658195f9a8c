/* html_report.h: the HTML report of a calibrate or verify result: one
 * self-contained file (no scripts, no network: inline SVG charts of
 * svgchart.h and inline CSS with print rules) rendered from the JSON
 * report those commands write with --json. The renderer only draws and
 * tabulates what the JSON holds; the members it needs beyond the older
 * reports are added by the functions below from the library's results. */
#ifndef TWF_HTML_REPORT_H
#define TWF_HTML_REPORT_H

#include "cli.h"

/* Write the HTML report of root (a calibrate or verify JSON report).
 * Returns 0, or -1 with err filled when root is not such a report. */
int cli_html_render(FILE *fp, const json_t *root, twf_error *err);
/* cli_put writer of the HTML report (ctx: json_t *). */
int cli_put_html(FILE *fp, void *ctx, twf_error *err);
/* The same for the report of this run (calibrate, verify --html): the
 * run id of the output set is set in the JSON first, as cli_put_json
 * does. */
int cli_put_html_run(FILE *fp, void *ctx, twf_error *err);

/* JSON members the report uses. */
/* {name, joints: [{name, type, unit}]}: the arm and its joints' units. */
json_t *cli_json_robot(const twf_model *m, const cli_units *u);
/* [{path, sha256}] of the inputs as read (model, then the campaign's). */
json_t *cli_json_inputs(const cli_inputs *in);
/* The current time, UTC, ISO 8601, into buf (n >= 32). */
const char *cli_created_now(char *buf, size_t n);
/* {values (1/length unit), unit, std_equals_noise, weak_below}: the
 * singular values of the scaled, weighted Jacobian and the two levels
 * that place them against the noise: where a direction's standard
 * deviation (length at the arm's reach) equals sigma, and where it is
 * weak_ratio times sigma (the weak-parameter rule). */
json_t *cli_json_singular_values(const twf_calib_result *r, double weak_ratio, const cli_units *u);
/* {parameters: [names], rho: [[...]]}: the correlation matrix of the
 * estimated parameters, read from the result's covariance. */
json_t *cli_json_correlation_matrix(const twf_calib_result *r);

#endif
