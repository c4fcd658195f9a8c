/* cmd_report.c: `twistfit report RESULT.json --html FILE`: the HTML report
 * of a saved calibrate or verify JSON result (html_report.c), so that a
 * report can be made again without running the fit again. */
#define _GNU_SOURCE
#include "config.h"
#include "cli.h"
#include "html_report.h"

#include <errno.h>
#include <getopt.h>
#include <string.h>
#include <sys/stat.h>

static const char report_help[] =
  "Usage: twistfit report [OPTIONS] RESULT.json --html FILE\n"
  "\n"
  "Render the JSON report that 'twistfit calibrate --json' or 'twistfit verify\n"
  "--json' wrote as one self-contained HTML file: the summary and verdict, the\n"
  "errors per measurement, their distribution, the errors against each joint,\n"
  "and for a calibration the link parameters, the predicted accuracy and the\n"
  "identifiability, each chart with a table of its numbers. No scripts and no\n"
  "network; prints to A4 or Letter. Nothing is computed again: the figures are\n"
  "the JSON's, in its units.\n"
  "\n"
  "Options:\n"
  "      --html FILE         write the HTML report to FILE\n"
  "      --max-input-size N  refuse a RESULT.json larger than N bytes (suffix K, M,\n"
  "                          G, T: binary multiples; default 2G)\n"
  "  -f, --force             replace FILE when it exists\n"
  "  -h, --help              show this help\n";

enum { OPT_HTML = CLI_OPT_FIRST_FREE, OPT_MAX_SIZE };

static int run_report(int argc, char **argv)
{
  static const struct option longopts[] = {
    { "html", required_argument, NULL, OPT_HTML },
    { "max-input-size", required_argument, NULL, OPT_MAX_SIZE },
    { "force", no_argument, NULL, 'f' },
    { "help", no_argument, NULL, 'h' },
    { NULL, 0, NULL, 0 }
  };
  const char *html = NULL, *inputs[2] = { NULL, NULL };
  static const char *const names[1] = { "--html" };
  unsigned long long max_size = 2ULL << 30;
  int force = 0, opt, status;
  json_t *root;
  json_error_t jerr;
  struct stat st;
  cli_put put;

  optind = 0;
  opterr = 0;
  while ((opt = getopt_long(argc, argv, ":fh", longopts, NULL)) != -1) {
    switch (opt) {
    case OPT_HTML: html = optarg; break;
    case OPT_MAX_SIZE:
      if ((status = cli_parse_size("report", optarg, &max_size)) != 0)
        return status;
      break;
    case 'f': force = 1; break;
    case 'h': fputs(report_help, stdout); return TWF_EXIT_OK;
    default: return cli_bad_option("report", opt, argv);
    }
  }
  if (argc - optind != 1)
    return cli_usage_error("report", "expected one RESULT.json");
  if (html == NULL)
    return cli_usage_error("report", "give the output: --html FILE");
  if (strcmp(html, "-") == 0)
    return cli_usage_error("report", "--html takes a file name, not standard output");
  inputs[0] = argv[optind];
  if ((status = cli_outputs_check("report", &html, names, 1, force, inputs)) != 0)
    return status;
  if (stat(inputs[0], &st) == 0 && S_ISREG(st.st_mode) && (unsigned long long)st.st_size > max_size) {
    fprintf(stderr, "twistfit: error: %s: larger than %llu bytes\n"
                    "twistfit: hint: raise --max-input-size if the file is really a report\n",
            inputs[0], max_size);
    return TWF_EXIT_INPUT;
  }
  if (stat(inputs[0], &st) != 0) {
    fprintf(stderr, "twistfit: error: %s: cannot be read: %s\ntwistfit: hint: check the file name\n", inputs[0],
            strerror(errno));
    return TWF_EXIT_IO;
  }
  root = json_load_file(inputs[0], JSON_REJECT_DUPLICATES, &jerr);
  if (root == NULL) {
    if (jerr.line > 0)
      fprintf(stderr, "twistfit: error: %s:%d:%d: %s\n", inputs[0], jerr.line, jerr.column, jerr.text);
    else
      fprintf(stderr, "twistfit: error: %s: %s\n", inputs[0], jerr.text);
    fprintf(stderr, "twistfit: hint: give the JSON that 'twistfit calibrate --json' or 'verify --json' wrote\n");
    return TWF_EXIT_INPUT;
  }
  {
    /* refuse what is not a report before anything is written */
    FILE *null = fopen("/dev/null", "w");
    twf_error err;
    twf_error_clear(&err);
    if (null == NULL) {
      json_decref(root);
      return TWF_EXIT_IO;
    }
    if (cli_html_render(null, root, &err) != 0) {
      fclose(null);
      json_decref(root);
      fprintf(stderr, "twistfit: error: %s: %s\ntwistfit: hint: %s\n", inputs[0], err.message, err.hint);
      return TWF_EXIT_INPUT;
    }
    fclose(null);
  }
  put = (cli_put){ html, cli_put_html, root };
  status = cli_write_outputs(&put, 1, force, inputs);
  json_decref(root);
  return status;
}

const cli_command cli_cmd_report = { "report", run_report, "render a saved calibrate or verify JSON result as HTML",
                                     report_help };
