/* plan_cli.h: the pieces that the commands for the days before measuring
 * (simulate, assess, plan) and calibrate's predicted accuracy share. */
#ifndef TWF_PLAN_CLI_H
#define TWF_PLAN_CLI_H

#include "cli.h"

extern const cli_command cli_cmd_simulate;
extern const cli_command cli_cmd_assess;
extern const cli_command cli_cmd_plan;

/* A whole number from lo to hi; prints a usage error. */
int pcli_parse_count(const char *command, const char *option, const char *arg, size_t lo, size_t hi,
                     size_t *out);
int pcli_parse_seed(const char *command, const char *arg, unsigned long long *out);
/* A fraction from lo to hi (no unit). */
int pcli_parse_fraction(const char *command, const char *option, const char *arg, double lo, double hi,
                        double *out);
/* Three comma-separated numbers in the unit (to SI). */
int pcli_parse_vector(const char *command, const char *option, const char *arg, double unit_si,
                      double out[3]);
/* Groups (--fit) and their walk order (--priority), as calibrate's. */
int pcli_parse_groups(const char *command, const char *arg, unsigned *mask);
int pcli_parse_priority(const char *command, const char *arg, twf_group priority[TWF_GROUP_COUNT]);
/* Comma-separated target names of m into mask[n_targets]. */
int pcli_parse_targets(const char *command, const twf_model *m, const char *arg, unsigned char *mask);

/* The options of assess and plan that say how the poses would be
 * measured; those with units are kept as text until the model is read. */
enum {
  PCLI_OPT_SIGMA = CLI_OPT_FIRST_FREE + 100,
  PCLI_OPT_SIGMA_ANGLE, PCLI_OPT_ORIENTATION, PCLI_OPT_FIT, PCLI_OPT_PRIORITY, PCLI_OPT_TARGETS,
  PCLI_OPT_CONFIGS, PCLI_OPT_SEED, PCLI_OPT_JSON,
  PCLI_OPT_FIRST_FREE
};
#define PCLI_MEASURE_LONGOPTS                                                     \
  { "sigma", required_argument, NULL, PCLI_OPT_SIGMA },                           \
  { "sigma-angle", required_argument, NULL, PCLI_OPT_SIGMA_ANGLE },               \
  { "orientation", no_argument, NULL, PCLI_OPT_ORIENTATION },                     \
  { "fit", required_argument, NULL, PCLI_OPT_FIT },                               \
  { "priority", required_argument, NULL, PCLI_OPT_PRIORITY },                     \
  { "targets", required_argument, NULL, PCLI_OPT_TARGETS },                       \
  { "configs", required_argument, NULL, PCLI_OPT_CONFIGS },                       \
  { "seed", required_argument, NULL, PCLI_OPT_SEED },                             \
  { "json", required_argument, NULL, PCLI_OPT_JSON }
#define PCLI_MEASURE_HELP                                                         \
  "      --sigma X           the instrument's noise per coordinate (length unit;\n" \
  "                          required)\n"                                          \
  "      --orientation       the instrument measures the flange orientation too\n" \
  "                          (6-D rows)\n"                                         \
  "      --sigma-angle X     noise of one orientation component (angle unit;\n"    \
  "                          default sigma / reach)\n"                             \
  "      --targets LIST      the targets measured at each pose, comma-separated\n" \
  "                          (default: every target with an offset)\n"             \
  "      --fit GROUPS        parameter groups, as for calibrate (default geometric)\n" \
  "      --priority GROUPS   walk order of the groups, as for calibrate\n"         \
  "      --configs N         random configurations of the workspace figures\n"     \
  "                          (default 1000)\n"                                     \
  "      --seed N            seed of the workspace configurations and the synthetic\n" \
  "                          pose set (and of the candidates for plan)\n"          \
  "      --json FILE         the figures as JSON ('-': standard output, then the\n" \
  "                          text goes to standard error)\n"

typedef struct pcli_measure {
  const char *sigma, *sigma_angle, *fit, *priority, *targets, *json;
  twf_assess_options opt;
  unsigned char *target_mask; /* owned */
} pcli_measure;

void pcli_measure_init(pcli_measure *me);
void pcli_measure_free(pcli_measure *me);
/* Handle one of PCLI_MEASURE_LONGOPTS: 1 when handled (*status set). */
int pcli_measure_option(pcli_measure *me, const char *command, int opt, const char *arg, int *status);
/* Resolve the options that need the model (units, names); exit status. */
int pcli_measure_resolve(pcli_measure *me, const char *command, const twf_model *m);

/* The assessment as text and as JSON (in m's units). */
void pcli_print_assessment(FILE *fp, const twf_assessment *a, const twf_model *m,
                           const twf_assess_options *opt, const cli_units *u);
json_t *pcli_json_assessment(const twf_assessment *a, const twf_model *m, const cli_units *u);
/* {rms, p95, max, worst: {index, joints}, values} of a prediction. */
json_t *pcli_json_prediction(const twf_prediction *p, const twf_model *m, const cli_units *u,
                             int with_values);
void pcli_print_prediction(FILE *fp, const char *title, const twf_prediction *p, const twf_model *m,
                           const cli_units *u);

/* A joints file (pose id, one column per joint, in the given units). */
typedef struct pcli_joints {
  const twf_model *m;
  const double *q;
  size_t n;
  const char *id_prefix;       /* ids PREFIX0001, ... unless ids is given */
  const char (*ids)[TWF_NAME_MAX]; /* NULL, or the ids of a pool ... */
  const size_t *id_index;      /* ... and each pose's index into it */
  twf_length_unit length_unit; /* of prismatic joints */
  twf_angle_unit angle_unit;   /* of revolute joints */
  const char *comment;         /* "# ..." line(s) above the units line, may be NULL */
  const size_t *station;       /* NULL, or each pose's station: a station column ... */
  const char (*station_names)[TWF_NAME_MAX]; /* ... of these names */
} pcli_joints;
int pcli_put_joints(FILE *fp, void *ctx, twf_error *err);

/* calibrate's predicted accuracy (predicted.c): the text section and the
 * JSON member "predicted_accuracy" (root may be NULL: nothing). Each
 * computes twf_calib_predict itself; a failure is reported in place. */
void cli_print_predicted(FILE *fp, const twf_calib_result *r, const twf_model *m, const twf_campaign *c,
                         const twf_calib_options *co, const cli_units *u);
void cli_json_add_predicted(json_t *root, const twf_calib_result *r, const twf_model *m, const twf_campaign *c,
                            const twf_calib_options *co, const cli_units *u);

#endif
