/* main.c: twistfit's entry point: global options and command dispatch. */
#include "config.h"
#include "cli.h"
#include "plan_cli.h"

#include <gsl/gsl_errno.h>
#include <string.h>

int cli_verbosity = 1;

/* Using a calibration (cmd_compensate.c, cmd_compare.c). */
extern const cli_command cli_cmd_compensate;
extern const cli_command cli_cmd_compare;
/* Writing a model in other forms (cmd_export.c). */
extern const cli_command cli_cmd_export;
/* The HTML report of a saved result (cmd_report.c). */
extern const cli_command cli_cmd_report;

static const cli_command *const commands[] = {
  &cli_cmd_fk,
  &cli_cmd_verify,
  &cli_cmd_calibrate,
  &cli_cmd_simulate,
  &cli_cmd_assess,
  &cli_cmd_plan,
  &cli_cmd_compensate,
  &cli_cmd_compare,
  &cli_cmd_export,
  &cli_cmd_report,
};
static const size_t n_commands = sizeof commands / sizeof commands[0];

static void print_main_help(FILE *fp)
{
  size_t i;
  fprintf(fp,
          "Usage: twistfit [-q|-v] COMMAND [ARGS...]\n"
          "       twistfit --help | --version | help COMMAND\n"
          "\n"
          "Kinematic calibration of serial robot arms with the product-of-exponentials\n"
          "model. Lengths and angles are in the units each file declares (default mm and\n"
          "degrees).\n"
          "\n"
          "Commands:\n");
  for (i = 0; i < n_commands; i++)
    fprintf(fp, "  %-10s %s\n", commands[i]->name, commands[i]->summary);
  fprintf(fp, "  %-10s %s\n", "help", "show the help of a command");
  fprintf(fp,
          "\nOptions:\n"
          "  -q, --quiet    print errors only (no warnings)\n"
          "  -v, --verbose  print more detail\n"
          "  -h, --help     show this help\n"
          "  -V, --version  show the version\n"
          "\nSee twistfit(1), twistfit-model(5) and twistfit-data(5).\n");
}

static const cli_command *find_command(const char *name)
{
  size_t i;
  for (i = 0; i < n_commands; i++)
    if (strcmp(commands[i]->name, name) == 0)
      return commands[i];
  return NULL;
}

static int run_main(int argc, char **argv)
{
  int i = 1;
  const cli_command *cmd;

  gsl_set_error_handler_off();
  for (; i < argc && argv[i][0] == '-'; i++) {
    const char *a = argv[i];
    if (strcmp(a, "-h") == 0 || strcmp(a, "--help") == 0) {
      print_main_help(stdout);
      return TWF_EXIT_OK;
    } else if (strcmp(a, "-V") == 0 || strcmp(a, "--version") == 0) {
      printf("twistfit %s\n", twf_version());
      return TWF_EXIT_OK;
    } else if (strcmp(a, "-q") == 0 || strcmp(a, "--quiet") == 0) {
      cli_verbosity = 0;
    } else if (strcmp(a, "-v") == 0 || strcmp(a, "--verbose") == 0) {
      cli_verbosity = 2;
    } else {
      fprintf(stderr, "twistfit: error: unknown option '%s'\n"
                      "twistfit: hint: run 'twistfit --help'\n", a);
      return TWF_EXIT_USAGE;
    }
  }
  if (i >= argc) {
    print_main_help(stderr);
    return TWF_EXIT_USAGE;
  }
  if (strcmp(argv[i], "help") == 0) {
    if (i + 1 >= argc) {
      print_main_help(stdout);
      return TWF_EXIT_OK;
    }
    cmd = find_command(argv[i + 1]);
    if (cmd == NULL) {
      fprintf(stderr, "twistfit: error: unknown command '%s'\n"
                      "twistfit: hint: run 'twistfit --help' for the list\n", argv[i + 1]);
      return TWF_EXIT_USAGE;
    }
    fputs(cmd->help, stdout);
    return TWF_EXIT_OK;
  }
  cmd = find_command(argv[i]);
  if (cmd == NULL) {
    fprintf(stderr, "twistfit: error: unknown command '%s'\n"
                    "twistfit: hint: run 'twistfit --help' for the list\n", argv[i]);
    return TWF_EXIT_USAGE;
  }
  return cmd->run(argc - i, argv + i);
}

int main(int argc, char **argv)
{
  cli_run_start(argc, argv);
  /* a report lost on a full disk or a closed pipe is a failed run */
  return cli_finish_stdout(run_main(argc, argv));
}
