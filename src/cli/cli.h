/* cli.h: shared pieces of the command-line front end. The front end parses
 * arguments, prints and maps statuses to exit codes; all maths lives in the
 * library behind twistfit.h. */
#ifndef TWF_CLI_H
#define TWF_CLI_H

#include "twistfit.h"

#include <jansson.h>
#include <stdio.h>

/* Exit statuses: stable, documented in twistfit(1). */
enum {
  TWF_EXIT_OK = 0,        /* success (verify: within the tolerances) */
  TWF_EXIT_REJECTED = 1,  /* measured, and outside the acceptance tolerances */
  TWF_EXIT_USAGE = 2,     /* the command line is wrong */
  TWF_EXIT_INPUT = 3,     /* an input file is invalid */
  TWF_EXIT_IO = 4,        /* a file cannot be read or written, or would be overwritten */
  TWF_EXIT_COMPUTE = 5,   /* the data cannot determine the answer, or the solver failed */
  TWF_EXIT_INTERNAL = 6   /* out of memory or an internal error */
};

typedef struct cli_command {
  const char *name;
  int (*run)(int argc, char **argv);
  const char *summary;
  const char *help; /* full help text of the command */
} cli_command;

extern const cli_command cli_cmd_fk;
extern const cli_command cli_cmd_verify;
extern const cli_command cli_cmd_calibrate;

/* Verbosity set by -q / -v before the command: 0 quiet, 1 normal, 2 verbose. */
extern int cli_verbosity;

/* Exit status for a library status. */
int cli_exit_status(twf_status st);
/* Print "twistfit: error: FILE:LINE:COL: message" and the hint to stderr;
 * return the exit status for err->status. */
int cli_report_error(const twf_error *err);
/* Report "out of memory" and return its exit status (TWF_EXIT_INTERNAL):
 * a command never stops without saying why. */
int cli_out_of_memory(void);
/* Print a usage error for the command and return TWF_EXIT_USAGE. */
int cli_usage_error(const char *command, const char *fmt, ...)
    __attribute__((format(printf, 2, 3)));
/* Usage error for getopt's '?' or ':' (call with opterr = 0 and an
 * optstring starting with ':'): names the option. */
int cli_bad_option(const char *command, int opt, char **argv);
/* Replace a library hint that speaks of option fields (twf_advice) by the
 * same advice in terms of the command line's options. */
void cli_hint_options(twf_error *err);
/* With -v: the stage timings and solver steps of a job, to stderr. */
void cli_print_trace(const twf_trace *t);
/* Print collected warnings to stderr (unless quiet). */
void cli_print_warnings(const twf_warnings *w);

/* The outputs of a run form one set: every output is staged as a
 * temporary file beside its target, all contents are written and synced,
 * and only then are all committed; a failure (or a terminating signal)
 * after the first commit undoes the commits made, so that the set appears
 * whole or not at all. Without force a commit never replaces a file, even
 * one created while the run was working. */

/* Check before any work that path ("-" or NULL: stdout) can be written:
 * not empty, not an input, not existing (a dangling link counts) unless
 * force, its folder writable. */
int cli_output_check(const char *path, int force, const char *const *inputs, twf_error *err);
/* The same for n outputs (NULL entries skipped), also refusing two outputs
 * of one name; options[k] names the option of outputs[k] for the message
 * on an empty name (a usage error of command). Prints the error and
 * returns an exit status. */
int cli_outputs_check(const char *command, const char *const *outputs, const char *const *options,
                      size_t n, int force, const char *const *inputs);

/* One output of the set: put writes the content and returns 0 on success
 * (and may fill err). */
typedef struct cli_put {
  const char *path;  /* NULL: skipped; "-": standard output */
  int (*put)(FILE *fp, void *ctx, twf_error *err);
  void *ctx;
} cli_put;
/* Write the set (at most 8 outputs); standard output is flushed and
 * checked first, so that a lost text report also writes nothing. Prints
 * the error and returns an exit status. */
int cli_write_outputs(const cli_put *puts, size_t n, int force, const char *const *inputs);

/* Record the command line and the start time (call first in main); puts
 * standard output on a stream that keeps the reason of its first failed
 * write (reported by cli_finish_stdout and the output set). */
void cli_run_start(int argc, char **argv);
/* The run id written into every output of a set: 16 hex digits of a
 * SHA-256 over the command line, the start time, the process id and the
 * identity (device, inode, size, modification time) of the inputs, so
 * that outputs of two runs mixed in one folder can be told apart. Set by
 * cli_write_outputs before the contents are written. */
const char *cli_run_id(void);
/* The run id that an output of twistfit carries in its leading comment
 * lines ("; run_id: ID", "# run_id: ID" or "# run: ID"), into id (16 hex
 * digits and a NUL). Returns 1 when found, 0 when the file has none
 * (written by hand or by another tool), -1 when it cannot be opened (the
 * reader of the file reports that). */
int cli_file_run_id(const char *path, char id[17]);
/* Two inputs that belong together (the model and the base pose file of
 * verify --base): when both carry a run id and the ids differ, an error
 * (status 3: inputs of different runs) unless allow (--allow-mixed-runs)
 * or !is_error, else a warning. Files without a run id are not checked.
 * Prints and returns an exit status. */
int cli_check_same_run(const char *command, const char *path_a, const char *what_a, const char *path_b,
                       const char *what_b, int allow, int is_error);
/* Flush and close standard output at the end of main; on a write error
 * print the reason (once) and turn a success or a rejection into
 * TWF_EXIT_IO. Returns the final exit status. */
int cli_finish_stdout(int status);

/* CSV writing (libcsv quotes text fields; numbers are written plainly). */
typedef struct cli_csv {
  FILE *fp;
  int fields_in_row;
} cli_csv;
void cli_csv_init(cli_csv *c, FILE *fp);
void cli_csv_text(cli_csv *c, const char *text);
void cli_csv_number(cli_csv *c, double value); /* 12 significant digits, empty for NaN */
void cli_csv_end_row(cli_csv *c);

/* The shortest of %.15g, %.16g, %.17g of si / unit that a reader turns
 * back into si exactly (value * unit == si), so 120 deg prints as 120
 * rather than 119.99999999999999; 0 for -0. unit is the SI size of the
 * printed unit (1 for plain numbers). buf of n >= 32 bytes; returns buf. */
#define CLI_SHORTEST_MAX 32
const char *cli_shortest_double(char *buf, size_t n, double si, double unit);

/* Parse a length or angle unit option value, printing a usage error. */
int cli_parse_length_unit(const char *command, const char *value, twf_length_unit *u);
int cli_parse_angle_unit(const char *command, const char *value, twf_angle_unit *u);
/* Parse a strictly finite double; a number too small for a normal double
 * (one that would read as 0 or lose precision) is refused like one too
 * large. Returns 0 on success. */
int cli_parse_double(const char *text, double *out);
/* A number from lo to hi in the given unit (unit_name for the message),
 * to SI; lo_si and hi_si are the bounds in SI. Prints a usage error. */
int cli_parse_bounded(const char *command, const char *option, const char *arg, double unit_si,
                      const char *unit_name, double lo_si, double hi_si, double *out);

/* The safety cautions every report that proposes parameters prints. */
extern const char cli_safety_text[];
/* one or many by the count */
const char *cli_plural(size_t n, const char *one, const char *many);
/* Why a solver stopped, in plain words ("converged (the cost stopped
 * decreasing)"). */
const char *cli_stop_words(twf_stop s);

/* Long-option codes shared by the commands that read a campaign. */
enum {
  CLI_OPT_JOINTS = 1000,
  CLI_OPT_POINTS,
  CLI_OPT_LENGTH_UNIT,
  CLI_OPT_ANGLE_UNIT,
  CLI_OPT_LIMITS_ERROR,
  CLI_OPT_MAX_INPUT_SIZE,
  CLI_OPT_PAYLOAD,
  CLI_OPT_FIRST_FREE /* commands number their own options from here */
};
/* The options that choose the chain of a URDF model (twistfit-model(5)),
 * on every command that reads a model: numbers of their own, clear of
 * CLI_OPT_JOINTS.. and of the commands' own enums (from 256). */
enum { CLI_OPT_BASE_LINK = 990, CLI_OPT_TIP_LINK, CLI_OPT_TARGET_LINK };
#define CLI_URDF_LONGOPTS                                                      \
  { "base-link", required_argument, NULL, CLI_OPT_BASE_LINK },                 \
  { "tip-link", required_argument, NULL, CLI_OPT_TIP_LINK },                   \
  { "target-link", required_argument, NULL, CLI_OPT_TARGET_LINK }
#define CLI_URDF_HELP                                                          \
  "      --base-link LINK    URDF MODEL: the chain's base link (default: the root)\n" \
  "      --tip-link LINK     URDF MODEL: the flange link (default: the one tip)\n" \
  "      --target-link LINK  URDF MODEL: a link fixed to the tip that is a target\n" \
  "                          (repeat; default: every such link without children)\n"
/* The most --target-link options of one command. */
#define CLI_URDF_TARGETS_MAX 64
/* The --target-link names; must outlive the twf_read_options that point
 * into it. */
typedef struct cli_urdf_links {
  const char *targets[CLI_URDF_TARGETS_MAX];
  size_t n_targets;
} cli_urdf_links;
/* Handle CLI_OPT_BASE_LINK, _TIP_LINK or _TARGET_LINK into ropt (names
 * kept in links): 0, or a usage error's exit status. */
int cli_urdf_longopt(const char *command, int opt, const char *value, cli_urdf_links *links,
                     twf_read_options *ropt);

#define CLI_INPUT_LONGOPTS                                                     \
  CLI_URDF_LONGOPTS,                                                           \
  { "joints", required_argument, NULL, CLI_OPT_JOINTS },                       \
  { "points", required_argument, NULL, CLI_OPT_POINTS },                       \
  { "length-unit", required_argument, NULL, CLI_OPT_LENGTH_UNIT },             \
  { "angle-unit", required_argument, NULL, CLI_OPT_ANGLE_UNIT },               \
  { "limits-error", no_argument, NULL, CLI_OPT_LIMITS_ERROR },               \
  { "max-input-size", required_argument, NULL, CLI_OPT_MAX_INPUT_SIZE },        \
  { "payload", required_argument, NULL, CLI_OPT_PAYLOAD }
#define CLI_INPUT_HELP                                                         \
  "      --joints FILE       two-file form: the controller's joint log ...\n"  \
  "      --points FILE       ... and the instrument's points (instead of DATA)\n" \
  "      --length-unit U     length unit of the data files (mm, m, um, in;\n"  \
  "                          default: as each file declares, else mm)\n"       \
  "      --angle-unit U      angle unit of the joint values (deg, rad, mrad;\n" \
  "                          default: as each file declares, else deg)\n"      \
  "      --limits-error      joint values outside the model's limits are an\n" \
  "                          error (default: a warning)\n"                    \
  "      --max-input-size N  refuse input files larger than N bytes (suffix\n" \
  "                          K, M, G, T: binary multiples; default 2G)\n"       \
  "      --payload NAME      the load carried at every pose ([payload NAME] of\n" \
  "                          the model) when the data have no payload column\n" \
  CLI_URDF_HELP

/* A model and a campaign read from the command line. */
typedef struct cli_inputs {
  const char *model_path, *data_path, *joints_path, *points_path;
  const char *paths[6]; /* NULL-terminated list of the input files */
  twf_campaign_options copt;
  twf_read_options ropt; /* model and base pose files */
  cli_urdf_links urdf_links; /* --target-link names that ropt points to */
  const char *payload;   /* --payload NAME, or NULL */
  twf_input_digest model_digest; /* of the model file as read */
  twf_model *model;
  twf_campaign *campaign;
  twf_warnings warnings;
} cli_inputs;

void cli_inputs_init(cli_inputs *in);
/* --max-input-size: a byte count with an optional binary suffix K, M, G
 * or T (KiB... accepted too); returns an exit status. */
int cli_parse_size(const char *command, const char *value, unsigned long long *out);
/* Handle one of the CLI_INPUT_LONGOPTS; returns 1 when handled (with
 * *status the exit status of a bad value, else 0). */
int cli_inputs_option(cli_inputs *in, const char *command, int opt, const char *arg,
                      int *status);
/* Read MODEL and DATA (argv[first], argv[first + 1]) or the two-file form;
 * prints warnings and errors; returns an exit status. */
int cli_inputs_load(cli_inputs *in, const char *command, int argc, char **argv, int first);
void cli_inputs_free(cli_inputs *in);
/* Add one more input file (a base pose file) to in->paths. */
void cli_inputs_add_path(cli_inputs *in, const char *path);
/* "FILE:LINE" of a measurement: the campaign file, or in the two-file
 * form the points file. */
void cli_meas_where(const cli_inputs *in, const twf_measurement *ms, char *buf, size_t n);

/* The units reports use: the model's declared ones. */
typedef struct cli_units {
  const char *length, *angle;
  double length_si, angle_si; /* SI value of one unit */
  int ldec, adec;             /* decimals that show 0.1 um and 1e-7 rad */
} cli_units;
void cli_units_of(cli_units *u, const twf_model *m);

/* Accuracy tables (text) and their JSON form. */
void cli_print_accuracy(FILE *fp, const char *title, const twf_accuracy_summary *s,
                        const twf_model *m, const twf_campaign *c, const cli_units *u);
void cli_print_worst(FILE *fp, const twf_accuracy_summary *s, const twf_campaign *c,
                     const twf_model *m, const cli_units *u);
json_t *cli_json_number(double v);

/* The link-parameter table (links_table.c): per row and value the
 * reference and the model's value, their difference (difference[5 * row +
 * value], SI) and, with with_std, the standard deviation; values the fit
 * left open (why != determined) then show n/d (or - when not fitted)
 * instead of a difference. Labels head the text columns, keys name the JSON
 * members. */
typedef struct cli_links_table {
  const twf_links *links;
  const double *difference;
  const twf_model *model;          /* joint names of the rows */
  const cli_units *units;
  const char *reference_label, *value_label; /* text column heads */
  const char *reference_key, *value_key;     /* JSON members */
  int with_std;
} cli_links_table;
/* Split a comma list of group names and presets (geometric, remaster)
 * into one mask per name (--fit, --priority); returns the count, or -1
 * for an unknown name or an over-long list. */
int cli_split_groups(const char *text, unsigned masks[2 * TWF_GROUP_COUNT]);
/* A table of l with the given column heads and JSON member names. */
cli_links_table cli_links_table_of(const twf_links *l, const double *difference,
                                   const twf_model *model, const cli_units *units,
                                   const char *reference_label, const char *value_label,
                                   const char *reference_key, const char *value_key,
                                   int with_std);
void cli_links_print(FILE *fp, const cli_links_table *t);
json_t *cli_links_json(const cli_links_table *t);
/* v, or 0 when |v| < zero (rounding left-overs); never -0. */
double cli_clean(double v, double zero);
/* v for printing with dec decimals: 0 when it prints as zero, so that a
 * rounding left-over never shows as "-0.0000". */
double cli_clean_shown(double v, int dec);
/* The quaternion w x y z every output prints: w >= 0 (for w = 0, the
 * first nonzero component positive), components below 1e-12 as 0. */
void cli_quat_of(const double R[3][3], double q[4]);
/* {position: [x y z] (length unit), quaternion_wxyz: [...]} */
json_t *cli_json_pose(const twf_pose *T, const cli_units *u);
/* The base pose file for campaign c (report.c): [base] for one station,
 * else a [station NAME] section per station of c, into bases[station]. */
twf_status cli_read_station_bases(const char *path, const twf_read_options *opt, const twf_campaign *c,
                                  twf_pose *bases, twf_error *err);
json_t *cli_json_stats(const twf_stats *s, double unit);
json_t *cli_json_accuracy(const twf_accuracy_summary *s, const twf_model *m,
                          const twf_campaign *c, const cli_units *u);
/* The per-measurement array of a --json report, one entry per
 * measurement in campaign order: index, line (source line, 0 when none),
 * pose, target, set ("fit"/"check", from sets when given, else the
 * campaign's), excluded (null, or why the figures leave it out: "dropped"
 * by the robust screen, "flagged" as a gross error of the check set,
 * "registration" left out of the registration), weight (the final fit
 * weight; 1 unless the screen changed it), joints (logged values, report
 * units: angle unit for revolute, length unit for prismatic joints), and
 * one error object per model given, named by names[k], with position (the
 * length of measured - model), xyz (its components, instrument frame) in
 * the length unit, and angle (angle unit; null for point rows).
 * excluded_code: NULL or n_meas codes (TWF_EXCLUDED_DROPPED,
 * TWF_EXCLUDED_FLAGGED, or any other non-zero value: "registration").
 * outliers (NULL or n_outliers) give the weights. */
json_t *cli_json_measurements(const twf_campaign *c, const twf_model *m, const uint8_t *sets,
                              size_t n_models, const char *const *names, const double *const *pos_err,
                              const double *const *angle_err, const unsigned char *excluded_code,
                              const twf_outlier *outliers, size_t n_outliers, const cli_units *u);
/* calibrate's section "Do the residuals look like noise?" and its JSON
 * member (pattern_report.c). */
/* calibrate's instrument stations (station_report.c): the section and
 * the JSON member "stations", both nothing for a campaign of one station. */
void cli_print_stations(FILE *fp, const twf_calib_result *r, const twf_campaign *c, const cli_units *u);
void cli_json_add_stations(json_t *root, const twf_calib_result *r, const twf_campaign *c, const cli_units *u);
void cli_print_pattern(FILE *fp, const twf_model *m, const twf_pattern_result *p, size_t screen_refused,
                       const cli_units *u);
json_t *cli_json_pattern(const twf_model *m, const twf_pattern_result *p, size_t screen_refused,
                         const cli_units *u);
/* --payload NAME (payload_cli.c): the index of the model's payload (-1
 * for NULL); a name the model lacks is a usage error listing the
 * declared ones. */
int cli_payload_resolve(const char *command, const twf_model *m, const char *name, long *index);
/* Give every pose of c (read from path) the payload index (nothing for
 * -1); a file with its own payload column is a usage error. */
int cli_payload_apply(const char *command, twf_campaign *c, const char *path, long index);
/* calibrate's section "Joint compliance under gravity" and its JSON
 * member (compliance_report.c); nothing (null) without the group. */
extern const char cli_compliance_caution[];
void cli_print_compliance(FILE *fp, const twf_model *m, const twf_campaign *c,
                          const twf_compliance_summary *s, const cli_units *u);
json_t *cli_json_compliance(const twf_model *m, const twf_campaign *c, const twf_compliance_summary *s,
                            const cli_units *u);
/* cli_put writer of a JSON document (ctx: json_t *). */
int cli_put_json(FILE *fp, void *ctx, twf_error *err);
/* Per-measurement residual CSV with one or two variants (labels such as
 * "before_", "after_"; pos[v] NULL to skip) and, when weights is not NULL,
 * the fit weight of each row (0: dropped). */
typedef struct cli_residuals {
  const twf_model *m;
  const twf_campaign *c;
  const uint8_t *sets;        /* a twf_meas_set each; NULL: the campaign's own */
  const double *pos[2], *rot[2];
  const char *labels[2];
  const double *weights;
  const cli_units *u;
} cli_residuals;
int cli_put_residuals(FILE *fp, void *ctx, twf_error *err);
/* A positive tolerance in the given unit, to SI. */
int cli_parse_tolerance(const char *command, const char *option, const char *arg, double unit_si,
                        double *out);

#endif
