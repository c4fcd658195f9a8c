/* cli.h: shared pieces of the command-line front end. The front end parses
 * arguments, prints and maps statuses to exit codes; all maths lives in the
 * library behind twistfit.h. */
#ifndef TWF_CLI_H
#define TWF_CLI_H

#include "twistfit.h"

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

/* Verbosity set by -q / -v before the command: 0 quiet, 1 normal, 2 verbose. */
extern int cli_verbosity;

/* Exit status for a library status. */
int cli_exit_status(twf_status st);
/* Print "twistfit: error: FILE:LINE:COL: message" and the hint to stderr;
 * return the exit status for err->status. */
int cli_report_error(const twf_error *err);
/* Print a usage error for the command and return TWF_EXIT_USAGE. */
int cli_usage_error(const char *command, const char *fmt, ...)
    __attribute__((format(printf, 2, 3)));
/* Print collected warnings to stderr (unless quiet). */
void cli_print_warnings(const twf_warnings *w);

/* Output files are written atomically: a temporary file beside the target,
 * renamed over it only on success, so that a failed run never creates or
 * truncates the output. An existing file is replaced only with force. */
typedef struct cli_output {
  FILE *fp;
  char *path;     /* final path, NULL for stdout */
  char *tmp_path; /* temporary path */
} cli_output;

/* Open path for writing ("-" or NULL: stdout). inputs (NULL-terminated) are
 * the run's input files: writing over one is refused. */
int cli_output_open(cli_output *out, const char *path, int force,
                    const char *const *inputs, twf_error *err);
/* Flush, close and rename into place. Returns TWF_EXIT_OK or an exit status
 * after printing the error. */
int cli_output_commit(cli_output *out);
/* Remove the temporary file (after a failure). */
void cli_output_abort(cli_output *out);

/* CSV writing (libcsv quotes text fields; numbers are written plainly). */
typedef struct cli_csv {
  FILE *fp;
  int fields_in_row;
} cli_csv;
void cli_csv_init(cli_csv *c, FILE *fp);
void cli_csv_text(cli_csv *c, const char *text);
void cli_csv_number(cli_csv *c, double value); /* 12 significant digits, empty for NaN */
void cli_csv_end_row(cli_csv *c);

/* Parse a length or angle unit option value, printing a usage error. */
int cli_parse_length_unit(const char *command, const char *value, twf_length_unit *u);
int cli_parse_angle_unit(const char *command, const char *value, twf_angle_unit *u);
/* Parse a strictly finite double. Returns 0 on success. */
int cli_parse_double(const char *text, double *out);

#endif
