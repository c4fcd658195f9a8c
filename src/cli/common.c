/* common.c: error printing, exit statuses, atomic output files and option
 * value parsing shared by the commands. */
#define _GNU_SOURCE
#include "config.h"
#include "cli.h"

#include <errno.h>
#include <float.h>
#include <getopt.h>
#include <math.h>
#include <sha2.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

int cli_exit_status(twf_status st)
{
  switch (st) {
  case TWF_OK: return TWF_EXIT_OK;
  case TWF_ERR_NOMEM: return TWF_EXIT_INTERNAL;
  case TWF_ERR_IO: return TWF_EXIT_IO;
  case TWF_ERR_INVALID: return TWF_EXIT_INTERNAL; /* a library call the front end got wrong */
  case TWF_ERR_DEGENERATE:
  case TWF_ERR_SINGULAR:
  case TWF_ERR_DIVERGED: return TWF_EXIT_COMPUTE;
  case TWF_ERR_SYNTAX:
  case TWF_ERR_VALUE:
  case TWF_ERR_MISSING:
  case TWF_ERR_DUPLICATE:
  case TWF_ERR_UNKNOWN:
  case TWF_ERR_UNITS:
  case TWF_ERR_LIMIT: return TWF_EXIT_INPUT;
  }
  return TWF_EXIT_INTERNAL;
}

static void print_location(FILE *fp, const char *file, long line, long column)
{
  if (file != NULL && file[0] != '\0') {
    fprintf(fp, "%s:", file);
    if (line > 0) {
      fprintf(fp, "%ld:", line);
      if (column > 0)
        fprintf(fp, "%ld:", column);
    }
    fputc(' ', fp);
  }
}

int cli_report_error(const twf_error *err)
{
  fputs("twistfit: error: ", stderr);
  print_location(stderr, err->file, err->line, err->column);
  fprintf(stderr, "%s\n", err->message[0] ? err->message : twf_strerror(err->status));
  if (err->hint[0] != '\0')
    fprintf(stderr, "twistfit: hint: %s\n", err->hint);
  return cli_exit_status(err->status);
}

int cli_usage_error(const char *command, const char *fmt, ...)
{
  va_list ap;
  fputs("twistfit: error: ", stderr);
  va_start(ap, fmt);
  vfprintf(stderr, fmt, ap);
  va_end(ap);
  fprintf(stderr, "\ntwistfit: hint: run 'twistfit help %s'\n", command);
  return TWF_EXIT_USAGE;
}

void cli_print_warnings(const twf_warnings *w)
{
  size_t i;
  if (w == NULL || cli_verbosity == 0)
    return;
  for (i = 0; i < w->count; i++) {
    fputs("twistfit: warning: ", stderr);
    print_location(stderr, w->items[i].file, w->items[i].line, w->items[i].column);
    fprintf(stderr, "%s\n", w->items[i].message);
  }
}

static int same_file(const char *a, const char *b)
{
  struct stat sa, sb;
  if (stat(a, &sa) != 0 || stat(b, &sb) != 0)
    return 0;
  return sa.st_dev == sb.st_dev && sa.st_ino == sb.st_ino;
}

/* The canonical form of a path that may not exist yet: the real path of
 * its folder, then its last component. NULL when the folder cannot be
 * resolved (or out of memory). Caller frees. */
static char *canonical_target(const char *path)
{
  char *copy = strdup(path), *slash, *dir, *real, *out;
  const char *base;
  size_t n;
  if (copy == NULL)
    return NULL;
  slash = strrchr(copy, '/');
  if (slash == NULL) {
    dir = ".";
    base = copy;
  } else if (slash == copy) {
    dir = "/";
    base = slash + 1;
  } else {
    *slash = '\0';
    dir = copy;
    base = slash + 1;
  }
  real = realpath(dir, NULL);
  if (real == NULL) {
    free(copy);
    return NULL;
  }
  n = strlen(real) + strlen(base) + 2;
  out = malloc(n);
  if (out != NULL)
    snprintf(out, n, "%s/%s", strcmp(real, "/") == 0 ? "" : real, base);
  free(real);
  free(copy);
  return out;
}

/* Whether two paths name the same file, existing or not. */
static int same_target(const char *a, const char *b)
{
  char *ca, *cb;
  int same;
  if (same_file(a, b))
    return 1;
  ca = canonical_target(a);
  cb = canonical_target(b);
  same = ca != NULL && cb != NULL && strcmp(ca, cb) == 0;
  free(ca);
  free(cb);
  return same;
}

int cli_output_check(const char *path, int force, const char *const *inputs, twf_error *err)
{
  char *dir, *slash;
  int writable;
  if (path == NULL || strcmp(path, "-") == 0)
    return TWF_EXIT_OK;
  for (; inputs != NULL && *inputs != NULL; inputs++)
    if (same_target(path, *inputs)) {
      twf_error_set(err, TWF_ERR_IO, path, 0, 0, "choose another output name",
                    "refusing to write over the input file '%s'", *inputs);
      return TWF_EXIT_IO;
    }
  {
    struct stat st;
    if (stat(path, &st) == 0 && !S_ISREG(st.st_mode)) {
      twf_error_set(err, TWF_ERR_IO, path, 0, 0, "give the name of a file",
                    "the output exists and is not a regular file");
      return TWF_EXIT_IO;
    }
  }
  if (!force && access(path, F_OK) == 0) {
    twf_error_set(err, TWF_ERR_IO, path, 0, 0,
                  "choose another name, or pass --force to replace it",
                  "output file already exists");
    return TWF_EXIT_IO;
  }
  dir = strdup(path);
  if (dir == NULL) {
    twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    return TWF_EXIT_INTERNAL;
  }
  slash = strrchr(dir, '/');
  if (slash == NULL)
    strcpy(dir, ".");
  else if (slash == dir)
    dir[1] = '\0';
  else
    *slash = '\0';
  writable = access(dir, W_OK) == 0;
  free(dir);
  if (!writable) {
    twf_error_set(err, TWF_ERR_IO, path, 0, 0, "check that the folder exists and is writable",
                  "cannot write into the output's folder");
    return TWF_EXIT_IO;
  }
  return TWF_EXIT_OK;
}

int cli_outputs_check(const char *const *outputs, size_t n, int force, const char *const *inputs)
{
  size_t a, b;
  twf_error err;
  twf_error_clear(&err);
  for (a = 0; a < n; a++) {
    int st;
    if (outputs[a] == NULL)
      continue;
    for (b = a + 1; b < n; b++)
      if (outputs[b] != NULL &&
          (strcmp(outputs[a], "-") == 0 ? strcmp(outputs[b], "-") == 0
                                        : strcmp(outputs[b], "-") != 0 && same_target(outputs[a], outputs[b]))) {
        twf_error_set(&err, TWF_ERR_IO, outputs[a], 0, 0, "give each output its own name",
                      strcmp(outputs[a], "-") == 0 ? "two outputs would go to standard output"
                                                   : "two outputs name the same file");
        return cli_report_error(&err);
      }
    if ((st = cli_output_check(outputs[a], force, inputs, &err)) != 0)
      return cli_report_error(&err);
  }
  return TWF_EXIT_OK;
}

/* ------------------------------------------------------------ run id */

static struct {
  int argc;
  char **argv;
  struct timespec start;
  int started, have_id;
  char id[17];
} run;

void cli_run_start(int argc, char **argv)
{
  run.argc = argc;
  run.argv = argv;
  clock_gettime(CLOCK_REALTIME, &run.start);
  run.started = 1;
}

static void run_id_compute(const char *const *inputs)
{
  SHA2_CTX ctx;
  uint8_t d[SHA256_DIGEST_LENGTH];
  long long word[6];
  int k;
  if (run.have_id)
    return;
  if (!run.started)
    clock_gettime(CLOCK_REALTIME, &run.start);
  SHA256Init(&ctx);
  for (k = 0; k < run.argc; k++)
    SHA256Update(&ctx, (const uint8_t *)run.argv[k], strlen(run.argv[k]) + 1);
  /* the time and the process tell apart two runs of one command line,
   * even when started in the same second */
  word[0] = (long long)run.start.tv_sec;
  word[1] = (long long)run.start.tv_nsec;
  word[2] = (long long)getpid();
  SHA256Update(&ctx, (const uint8_t *)word, 3 * sizeof word[0]);
  /* the inputs as found on disk (identity and version, without reading
   * them again) */
  for (; inputs != NULL && *inputs != NULL; inputs++) {
    struct stat st;
    SHA256Update(&ctx, (const uint8_t *)*inputs, strlen(*inputs) + 1);
    if (stat(*inputs, &st) == 0) {
      word[0] = (long long)st.st_dev;
      word[1] = (long long)st.st_ino;
      word[2] = (long long)st.st_size;
      word[3] = (long long)st.st_mtim.tv_sec;
      word[4] = (long long)st.st_mtim.tv_nsec;
      word[5] = (long long)st.st_ctim.tv_nsec;
      SHA256Update(&ctx, (const uint8_t *)word, sizeof word);
    }
  }
  SHA256Final(d, &ctx);
  for (k = 0; k < 8; k++)
    snprintf(run.id + 2 * k, 3, "%02x", d[k]);
  run.have_id = 1;
}

const char *cli_run_id(void)
{
  run_id_compute(NULL);
  return run.id;
}

int cli_output_open(cli_output *out, const char *path, int force,
                    const char *const *inputs, twf_error *err)
{
  size_t n;
  int fd, st;
  memset(out, 0, sizeof *out);
  if (path == NULL || strcmp(path, "-") == 0) {
    out->fp = stdout;
    return TWF_EXIT_OK;
  }
  if ((st = cli_output_check(path, force, inputs, err)) != 0)
    return st;
  n = strlen(path);
  out->path = strdup(path);
  out->tmp_path = malloc(n + 16);
  if (out->path == NULL || out->tmp_path == NULL) {
    free(out->path);
    free(out->tmp_path);
    memset(out, 0, sizeof *out);
    twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    return TWF_EXIT_INTERNAL;
  }
  snprintf(out->tmp_path, n + 16, "%s.tmp.XXXXXX", path);
  fd = mkstemp(out->tmp_path);
  if (fd >= 0) {
    /* mkstemp makes the file private; give it the mode a new file would
     * have (or the one of the file it replaces) */
    struct stat old;
    mode_t mask = umask(0);
    umask(mask);
    if (fchmod(fd, stat(path, &old) == 0 ? old.st_mode & 07777 : 0666 & ~mask) != 0) {
      /* not fatal: the file keeps its private mode */
    }
  }
  if (fd < 0 || (out->fp = fdopen(fd, "w")) == NULL) {
    twf_error_set(err, TWF_ERR_IO, path, 0, 0,
                  "check that the folder exists and is writable",
                  "cannot create a temporary file beside the output: %s", strerror(errno));
    if (fd >= 0) {
      close(fd);
      unlink(out->tmp_path);
    }
    free(out->path);
    free(out->tmp_path);
    memset(out, 0, sizeof *out);
    return TWF_EXIT_IO;
  }
  return TWF_EXIT_OK;
}

int cli_output_commit(cli_output *out)
{
  twf_error err;
  int bad;
  if (out->fp == NULL)
    return TWF_EXIT_OK;
  if (out->path == NULL) {
    bad = fflush(out->fp) != 0 || ferror(out->fp);
    out->fp = NULL;
    if (bad) {
      twf_error_set(&err, TWF_ERR_IO, NULL, 0, 0, NULL, "cannot write to standard output");
      return cli_report_error(&err);
    }
    return TWF_EXIT_OK;
  }
  bad = ferror(out->fp);
  if (fclose(out->fp) != 0)
    bad = 1;
  out->fp = NULL;
  if (bad || rename(out->tmp_path, out->path) != 0) {
    twf_error_set(&err, TWF_ERR_IO, out->path, 0, 0, "check free space and permissions",
                  "cannot write the output file: %s", strerror(errno));
    unlink(out->tmp_path);
    free(out->path);
    free(out->tmp_path);
    out->path = out->tmp_path = NULL;
    return cli_report_error(&err);
  }
  free(out->path);
  free(out->tmp_path);
  out->path = out->tmp_path = NULL;
  return TWF_EXIT_OK;
}

void cli_output_abort(cli_output *out)
{
  if (out->path != NULL) {
    if (out->fp != NULL)
      fclose(out->fp);
    unlink(out->tmp_path);
    free(out->path);
    free(out->tmp_path);
  }
  memset(out, 0, sizeof *out);
}

int cli_parse_length_unit(const char *command, const char *value, twf_length_unit *u)
{
  if (twf_length_unit_parse(value, u) != TWF_OK)
    return cli_usage_error(command, "unknown length unit '%s' (use mm, m, um or in)", value);
  return TWF_EXIT_OK;
}

int cli_parse_angle_unit(const char *command, const char *value, twf_angle_unit *u)
{
  if (twf_angle_unit_parse(value, u) != TWF_OK)
    return cli_usage_error(command, "unknown angle unit '%s' (use deg, rad or mrad)", value);
  return TWF_EXIT_OK;
}

/* Whether the digits of a number (before its exponent) are not all zero. */
static int mantissa_nonzero(const char *p)
{
  int hex = 0;
  while (*p == ' ' || *p == '\t' || *p == '+' || *p == '-')
    p++;
  if (p[0] == '0' && (p[1] == 'x' || p[1] == 'X')) {
    hex = 1;
    p += 2;
  }
  for (; *p != '\0'; p++) {
    if (hex ? (*p == 'p' || *p == 'P') : (*p == 'e' || *p == 'E'))
      break;
    if (*p != '0' && *p != '.')
      return 1;
  }
  return 0;
}

int cli_parse_double(const char *text, double *out)
{
  char *end;
  double v;
  if (text == NULL || *text == '\0')
    return -1;
  errno = 0;
  v = strtod(text, &end);
  if (end == text || *end != '\0' || errno == ERANGE || !isfinite(v))
    return -1;
  /* C leaves ERANGE on underflow to the library: refuse a number below
   * the normal range here, and a 0 read from digits that are not zero */
  if ((v != 0 && fabs(v) < DBL_MIN) || (v == 0 && mantissa_nonzero(text)))
    return -1;
  *out = v;
  return 0;
}

int cli_parse_bounded(const char *command, const char *option, const char *arg, double unit_si,
                      const char *unit_name, double lo_si, double hi_si, double *out)
{
  double v;
  /* a relative slack of 1e-9 keeps the bounds themselves, written in
   * another unit, inside */
  if (cli_parse_double(arg, &v) != 0 || !(v * unit_si >= lo_si * (1 - 1e-9)) ||
      !(v * unit_si <= hi_si * (1 + 1e-9)))
    return cli_usage_error(command, "%s takes a number from %g to %g (%s), not '%s'", option,
                           lo_si / unit_si, hi_si / unit_si, unit_name, arg);
  *out = v * unit_si;
  return TWF_EXIT_OK;
}

int cli_write_outputs(const cli_put *puts, size_t n, int force, const char *const *inputs)
{
  cli_output outs[8];
  twf_error err;
  size_t i, opened = 0;
  int st = TWF_EXIT_OK;
  twf_error_clear(&err);
  if (n > sizeof outs / sizeof outs[0])
    return TWF_EXIT_INTERNAL;
  run_id_compute(inputs);
  /* every temporary file first, then every content, then the renames: a
   * failure anywhere leaves no output behind */
  for (i = 0; i < n; i++) {
    memset(&outs[i], 0, sizeof outs[i]);
    if (puts[i].path == NULL)
      continue;
    if ((st = cli_output_open(&outs[i], puts[i].path, force, inputs, &err)) != 0) {
      cli_report_error(&err);
      goto abort;
    }
    opened = i + 1;
  }
  for (i = 0; i < n; i++) {
    if (puts[i].path == NULL)
      continue;
    if (puts[i].put(outs[i].fp, puts[i].ctx, &err) != 0 || ferror(outs[i].fp) || fflush(outs[i].fp) != 0) {
      if (err.status == TWF_OK)
        twf_error_set(&err, TWF_ERR_IO, puts[i].path, 0, 0, "check free space and permissions",
                      "cannot write the output file");
      if (err.file[0] == '\0')
        snprintf(err.file, sizeof err.file, "%s", puts[i].path);
      st = cli_report_error(&err);
      opened = n;
      goto abort;
    }
  }
  for (i = 0; i < n; i++)
    if (puts[i].path != NULL) {
      int c = cli_output_commit(&outs[i]);
      if (c != 0 && st == TWF_EXIT_OK)
        st = c;
    }
  return st;
abort:
  for (i = 0; i < opened && i < n; i++)
    cli_output_abort(&outs[i]);
  return st != TWF_EXIT_OK ? st : TWF_EXIT_IO;
}

int cli_bad_option(const char *command, int opt, char **argv)
{
  const char *word = optind > 0 ? argv[optind - 1] : "?";
  if (opt == ':')
    return cli_usage_error(command, "option '%s' needs a value", word);
  return cli_usage_error(command, "unknown option '%s'", word);
}
