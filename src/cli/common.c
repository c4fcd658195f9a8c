/* common.c: error printing, exit statuses, the output set (staged,
 * committed together, undone on failure or a terminating signal) and
 * option value parsing shared by the commands. */
#define _GNU_SOURCE
#include "config.h"
#include "cli.h"

#include <ctype.h>

#include <errno.h>
#include <fcntl.h>
#include <float.h>
#include <getopt.h>
#include <math.h>
#include <sha2.h>
#include <signal.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <sys/file.h>
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

int cli_out_of_memory(void)
{
  twf_error e;
  twf_error_set(&e, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
  return cli_report_error(&e);
}

int cli_report_error(const twf_error *err)
{
  fputs("twistfit: error: ", stderr);
  print_location(stderr, err->file, err->line, err->column);
  fprintf(stderr, "%s\n", err->message[0] ? err->message : twf_strerror(err->status));
  if (err->hint[0] != '\0' && strstr(err->hint, "(max_input_size)") != NULL)
    fputs("twistfit: hint: check that this is the right file; if it is, raise --max-input-size\n", stderr);
  else if (err->hint[0] != '\0')
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

/* The folder of path ("." for a bare name). Caller frees. */
static char *folder_of(const char *path)
{
  size_t n = strlen(path);
  char *dir = malloc(n + 2), *slash;
  if (dir == NULL)
    return NULL;
  memcpy(dir, path, n + 1);
  slash = strrchr(dir, '/');
  if (slash == NULL)
    strcpy(dir, ".");
  else if (slash == dir)
    dir[1] = '\0';
  else
    *slash = '\0';
  return dir;
}

int cli_output_check(const char *path, int force, const char *const *inputs, twf_error *err)
{
  struct stat st;
  char *dir;
  int writable;
  if (path == NULL || strcmp(path, "-") == 0)
    return TWF_EXIT_OK;
  if (path[0] == '\0') {
    twf_error_set(err, TWF_ERR_IO, NULL, 0, 0, "give the output a file name",
                  "an output file name is empty");
    return TWF_EXIT_USAGE;
  }
  for (; inputs != NULL && *inputs != NULL; inputs++)
    if (same_target(path, *inputs)) {
      twf_error_set(err, TWF_ERR_IO, path, 0, 0, "choose another output name",
                    "refusing to write over the input file '%s'", *inputs);
      return TWF_EXIT_IO;
    }
  /* lstat, not stat: a dangling link is a name the commit would replace,
   * so it exists as far as --force is concerned */
  if (lstat(path, &st) == 0) {
    struct stat target;
    int regular = S_ISLNK(st.st_mode) ? stat(path, &target) != 0 || S_ISREG(target.st_mode)
                                      : S_ISREG(st.st_mode);
    if (!regular) {
      twf_error_set(err, TWF_ERR_IO, path, 0, 0, "give the name of a file",
                    "the output exists and is not a regular file");
      return TWF_EXIT_IO;
    }
    if (!force) {
      twf_error_set(err, TWF_ERR_IO, path, 0, 0,
                    "choose another name, or pass --force to replace it",
                    S_ISLNK(st.st_mode) ? "output file already exists (as a symbolic link)"
                                        : "output file already exists");
      return TWF_EXIT_IO;
    }
  }
  dir = folder_of(path);
  if (dir == NULL) {
    twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    return TWF_EXIT_INTERNAL;
  }
  writable = access(dir, W_OK) == 0;
  free(dir);
  if (!writable) {
    twf_error_set(err, TWF_ERR_IO, path, 0, 0, "check that the folder exists and is writable",
                  "cannot write into the output's folder");
    return TWF_EXIT_IO;
  }
  return TWF_EXIT_OK;
}

int cli_outputs_check(const char *command, const char *const *outputs, const char *const *options,
                      size_t n, int force, const char *const *inputs)
{
  size_t a, b;
  twf_error err;
  twf_error_clear(&err);
  /* an empty name is a mistake on the command line, not a file problem:
   * say so before looking at any file */
  for (a = 0; a < n; a++)
    if (outputs[a] != NULL && outputs[a][0] == '\0')
      return cli_usage_error(command, "%s needs a file name, not an empty one",
                             options != NULL ? options[a] : "an output option");
  for (a = 0; a < n; a++) {
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
    if (cli_output_check(outputs[a], force, inputs, &err) != 0)
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

static void stdout_wrap(void);

void cli_run_start(int argc, char **argv)
{
  stdout_wrap();
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

/* -------------------------------------------------- run id of an input */

int cli_file_run_id(const char *path, char id[17])
{
  FILE *fp;
  char line[512];
  int lines = 0, found = 0;
  struct stat st;
  /* a pipe or a device was read once already: only files are read again */
  if (path == NULL || strcmp(path, "-") == 0 || stat(path, &st) != 0 || !S_ISREG(st.st_mode) ||
      (fp = fopen(path, "r")) == NULL)
    return -1;
  /* only the leading comment block: the outputs write the id there */
  while (!found && lines++ < 256 && fgets(line, sizeof line, fp) != NULL) {
    const char *p = line;
    size_t n = strlen(line);
    int whole = n > 0 && line[n - 1] == '\n';
    while (*p == ' ' || *p == '\t')
      p++;
    if (*p == '\n' || *p == '\r' || *p == '\0')
      goto next;
    if (*p != ';' && *p != '#')
      break;
    for (p++; *p == ' ' || *p == '\t'; p++)
      ;
    if (strncmp(p, "run_id:", 7) == 0 || strncmp(p, "run:", 4) == 0) {
      size_t k = 0;
      for (p = strchr(p, ':') + 1; *p == ' ' || *p == '\t'; p++)
        ;
      while (k < 16 && isxdigit((unsigned char)p[k]))
        k++;
      if (k == 16 && !isxdigit((unsigned char)p[k])) {
        memcpy(id, p, 16);
        id[16] = '\0';
        found = 1;
      }
    }
  next:
    /* the rest of a long line is not a line of its own */
    while (!whole && fgets(line, sizeof line, fp) != NULL) {
      n = strlen(line);
      whole = n > 0 && line[n - 1] == '\n';
    }
  }
  fclose(fp);
  return found;
}

int cli_check_same_run(const char *command, const char *path_a, const char *what_a, const char *path_b,
                       const char *what_b, int allow, int is_error)
{
  char a[17], b[17];
  twf_error err;
  (void)command;
  if (cli_file_run_id(path_a, a) != 1 || cli_file_run_id(path_b, b) != 1 || strcmp(a, b) == 0)
    return TWF_EXIT_OK;
  if (allow || !is_error) {
    if (cli_verbosity > 0)
      fprintf(stderr, "twistfit: warning: %s: %s and %s %s come from different runs (run ids %s and %s)%s\n",
              path_b, what_b, what_a, path_a, b, a, allow ? "; used together as --allow-mixed-runs asks" : "");
    return TWF_EXIT_OK;
  }
  twf_error_clear(&err);
  twf_error_set(&err, TWF_ERR_VALUE, path_b, 0, 0,
                "give the files that one run wrote together, or pass --allow-mixed-runs to use "
                "them anyway",
                "%s and %s %s come from different runs (run ids %s and %s)", what_b, what_a, path_a, b, a);
  return cli_report_error(&err);
}

/* ------------------------------------------------------- standard output */

static int stdout_reported;
/* The reason of the first write to standard output that failed: the C
 * library drops a buffer whose write failed and keeps only the error flag,
 * so a later flush with nothing pending succeeds and the reason (ENOSPC,
 * EPIPE, EIO) would be lost. */
static int stdout_first_errno;

#if defined(__GLIBC__)
/* Standard output goes through a stream of our own over descriptor 1
 * (fopencookie; glibc lets a program set stdout) whose write function
 * records the reason of the first failure. */
static ssize_t stdout_cookie_write(void *cookie, const char *buf, size_t n)
{
  size_t done = 0;
  (void)cookie;
  while (done < n) {
    ssize_t w = write(STDOUT_FILENO, buf + done, n - done);
    if (w < 0 && errno == EINTR)
      continue;
    if (w <= 0) {
      if (stdout_first_errno == 0)
        stdout_first_errno = w < 0 ? errno : EIO;
      break; /* a short count marks the stream's error flag */
    }
    done += (size_t)w;
  }
  return (ssize_t)done;
}

static int stdout_cookie_close(void *cookie)
{
  (void)cookie;
  return close(STDOUT_FILENO);
}

static void stdout_wrap(void)
{
  static int wrapped;
  cookie_io_functions_t io = { NULL, stdout_cookie_write, NULL, stdout_cookie_close };
  FILE *fp;
  if (wrapped)
    return;
  fp = fopencookie(NULL, "w", io);
  if (fp == NULL)
    return; /* keep the library's stream: only the reason may be lost */
  /* a terminal sees each line as it is complete, as with the library's
   * stream; anything else gets full buffering */
  setvbuf(fp, NULL, isatty(STDOUT_FILENO) ? _IOLBF : _IOFBF, BUFSIZ);
  fflush(stdout);
  stdout = fp;
  wrapped = 1;
}
#else
static void stdout_wrap(void) {}
#endif

/* Flush standard output; 1 when a write failed, with the reason in *e (0
 * when unknown). */
static int stdout_failed(int *e)
{
  int bad = ferror(stdout) != 0;
  *e = 0;
  errno = 0;
  if (fflush(stdout) != 0) {
    bad = 1;
    *e = errno;
  }
  return bad;
}

static int report_stdout(int e)
{
  /* the first failure is the cause; later ones follow from it */
  if (stdout_first_errno != 0)
    e = stdout_first_errno;
  if (!stdout_reported)
    fprintf(stderr, "twistfit: error: cannot write to standard output: %s\n",
            e != 0 ? strerror(e) : "an earlier write failed");
  stdout_reported = 1;
  return TWF_EXIT_IO;
}

int cli_finish_stdout(int status)
{
  int e, bad = stdout_failed(&e);
  errno = 0;
  /* EBADF with nothing pending: standard output was closed from the start
   * and nothing was written to it, which is no error */
  if (fclose(stdout) != 0 && !bad && errno != EBADF) {
    bad = 1;
    e = errno;
  }
  if (bad) {
    report_stdout(e);
    if (status == TWF_EXIT_OK || status == TWF_EXIT_REJECTED)
      status = TWF_EXIT_IO;
  }
  return status;
}

/* ------------------------------------------------------------ output set */

#define MAX_OUTPUTS 8

enum { SLOT_FREE, SLOT_STAGED, SLOT_COMMITTING, SLOT_COMMITTED };

/* One staged file. The signal handler reads these, so every field it uses
 * is set before n_slots counts the slot, and the strings are never freed
 * while the handler is installed. */
typedef struct staged {
  char *path, *tmp;
  char *old;       /* with force: a second name of the file being replaced */
  dev_t dev;       /* identity of the temporary file: a commit made by */
  ino_t ino;       /* this run leaves exactly this file under path */
  FILE *fp;
  volatile sig_atomic_t state;
  volatile sig_atomic_t has_old;
} staged;

static staged slots[MAX_OUTPUTS];
static volatile sig_atomic_t n_slots;

/* Signals that end the process: the handler removes the staged files and
 * undoes the commits, then dies of the same signal. */
static const int caught[] = { SIGINT, SIGTERM, SIGHUP, SIGQUIT, SIGPIPE, SIGXFSZ };
#define N_CAUGHT (sizeof caught / sizeof caught[0])
static struct sigaction previous[N_CAUGHT];
static int installed[N_CAUGHT];

/* Whether path holds the file this run committed (async-signal-safe). */
static int is_ours(const staged *s)
{
  struct stat st;
  return lstat(s->path, &st) == 0 && st.st_dev == s->dev && st.st_ino == s->ino;
}

/* Undo one slot with async-signal-safe calls only. Returns -1 when the
 * replaced file could not be put back (it is then kept under s->old). */
static int undo_slot(staged *s)
{
  int kept = 0;
  if (s->state >= SLOT_COMMITTING && is_ours(s)) {
    if (s->has_old) {
      if (rename(s->old, s->path) != 0)
        kept = 1;
    } else {
      unlink(s->path);
    }
  } else if (s->has_old) {
    /* the replacement did not happen: the second name is just a link */
    unlink(s->old);
  }
  if (s->state >= SLOT_STAGED)
    unlink(s->tmp);
  s->state = SLOT_FREE;
  return kept ? -1 : 0;
}

static void on_signal(int sig)
{
  struct sigaction dfl;
  sig_atomic_t i = n_slots;
  while (i-- > 0)
    undo_slot(&slots[i]);
  n_slots = 0;
  memset(&dfl, 0, sizeof dfl);
  dfl.sa_handler = SIG_DFL;
  sigemptyset(&dfl.sa_mask);
  sigaction(sig, &dfl, NULL);
  /* blocked while the handler runs: delivered, with the default action,
   * when it returns */
  raise(sig);
}

static void block_signals(sigset_t *saved)
{
  sigset_t set;
  size_t k;
  sigemptyset(&set);
  for (k = 0; k < N_CAUGHT; k++)
    sigaddset(&set, caught[k]);
  sigprocmask(SIG_BLOCK, &set, saved);
}

static void install_handlers(void)
{
  struct sigaction sa;
  size_t k;
  memset(&sa, 0, sizeof sa);
  sa.sa_handler = on_signal;
  sigemptyset(&sa.sa_mask);
  for (k = 0; k < N_CAUGHT; k++)
    sigaddset(&sa.sa_mask, caught[k]);
  for (k = 0; k < N_CAUGHT; k++) {
    installed[k] = 0;
    if (sigaction(caught[k], NULL, &previous[k]) != 0)
      continue;
    /* an ignored signal (nohup, a background job) stays ignored */
    if (previous[k].sa_handler == SIG_IGN)
      continue;
    installed[k] = sigaction(caught[k], &sa, NULL) == 0;
  }
}

static void restore_handlers(void)
{
  size_t k;
  for (k = 0; k < N_CAUGHT; k++)
    if (installed[k])
      sigaction(caught[k], &previous[k], NULL);
}

static void free_slots(void)
{
  size_t i;
  for (i = 0; i < MAX_OUTPUTS; i++) {
    if (slots[i].fp != NULL)
      fclose(slots[i].fp);
    free(slots[i].path);
    free(slots[i].tmp);
    free(slots[i].old);
    memset(&slots[i], 0, sizeof slots[i]);
  }
}

/* A test hook: with TWF_TEST_PAUSE set to the phase's name the process
 * stops itself there (SIGSTOP), so that a test can create files, send a
 * signal, or start a second run at a known point of the write phase. */
static void test_pause(const char *phase)
{
  const char *want = getenv("TWF_TEST_PAUSE");
  if (want == NULL || strcmp(want, phase) != 0)
    return;
  fprintf(stderr, "twistfit: test pause: %s\n", phase);
  fflush(stderr);
  raise(SIGSTOP);
}

/* Create the temporary file of s beside path. Called with the signals
 * blocked. */
static int stage_open(staged *s, const char *path, twf_error *err)
{
  size_t n = strlen(path);
  struct stat st;
  int fd;
  s->path = strdup(path);
  s->tmp = malloc(n + 16);
  s->old = malloc(n + 24);
  if (s->path == NULL || s->tmp == NULL || s->old == NULL) {
    twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    return TWF_EXIT_INTERNAL;
  }
  snprintf(s->tmp, n + 16, "%s.tmp.XXXXXX", path);
  fd = mkstemp(s->tmp);
  if (fd < 0) {
    twf_error_set(err, TWF_ERR_IO, path, 0, 0, "check that the folder exists and is writable",
                  "cannot create a temporary file beside the output: %s", strerror(errno));
    return TWF_EXIT_IO;
  }
  s->state = SLOT_STAGED;
  snprintf(s->old, n + 24, "%s.old", s->tmp);
  {
    /* mkstemp makes the file private; give it the mode a new file would
     * have (or the one of the file it replaces) */
    struct stat old;
    mode_t mask = umask(0);
    umask(mask);
    if (fchmod(fd, stat(path, &old) == 0 ? old.st_mode & 07777 : 0666 & ~mask) != 0) {
      /* not fatal: the file keeps its private mode */
    }
  }
  if (fstat(fd, &st) != 0 || (s->fp = fdopen(fd, "w")) == NULL) {
    twf_error_set(err, TWF_ERR_IO, path, 0, 0, "check that the folder exists and is writable",
                  "cannot create a temporary file beside the output: %s", strerror(errno));
    close(fd);
    return TWF_EXIT_IO;
  }
  s->dev = st.st_dev;
  s->ino = st.st_ino;
  return TWF_EXIT_OK;
}

/* Flush, sync and close a staged file after its content was written;
 * put_errno is errno as the writer left it. The error names the system's
 * reason. */
static int stage_finish(staged *s, int put_failed, int put_errno, twf_error *err)
{
  int e = put_errno, bad = put_failed || ferror(s->fp);
  errno = 0;
  /* a failed flush writes the buffer again: its errno is the reason */
  if (fflush(s->fp) != 0) {
    bad = 1;
    e = errno;
  }
  if (!bad && fsync(fileno(s->fp)) != 0) {
    bad = 1;
    e = errno;
  }
  errno = 0;
  if (fclose(s->fp) != 0 && !bad) {
    bad = 1;
    e = errno;
  }
  s->fp = NULL;
  if (!bad)
    return TWF_EXIT_OK;
  /* a writer's own error that is not about writing (e.g. a model it
   * cannot express) stands; a write error gets the system's reason */
  if (err->status == TWF_OK || err->status == TWF_ERR_IO)
    twf_error_set(err, TWF_ERR_IO, s->path, 0, 0, "check free space and permissions",
                  "cannot write the output file: %s", e != 0 ? strerror(e) : "write error");
  else if (err->file[0] == '\0')
    snprintf(err->file, sizeof err->file, "%s", s->path);
  return cli_exit_status(err->status);
}

/* Put the staged file in place without replacing anything: the check and
 * the replacement are one step, so a file that appeared while the run
 * was working is never clobbered (EEXIST). */
static int commit_noreplace(const staged *s)
{
  struct stat st;
#ifdef RENAME_NOREPLACE
  if (renameat2(AT_FDCWD, s->tmp, AT_FDCWD, s->path, RENAME_NOREPLACE) == 0)
    return 0;
  if (errno != EINVAL && errno != ENOSYS && errno != ENOTSUP && errno != EOPNOTSUPP)
    return -1;
  /* the file system cannot do it: a hard link is also one step */
#endif
  if (link(s->tmp, s->path) == 0) {
    unlink(s->tmp);
    return 0;
  }
  if (errno != EPERM && errno != ENOTSUP && errno != EOPNOTSUPP && errno != ENOSYS && errno != EMLINK)
    return -1;
  /* no hard links either (some network or foreign file systems): check
   * and rename, the best left */
  if (lstat(s->path, &st) == 0) {
    errno = EEXIST;
    return -1;
  }
  return rename(s->tmp, s->path);
}

static int commit_slot(staged *s, int force, twf_error *err)
{
  int failed;
  s->state = SLOT_COMMITTING;
  if (force) {
    struct stat st;
    /* keep a second name of the file being replaced, so that a later
     * failure of the set can put it back */
    if (lstat(s->path, &st) == 0) {
      s->has_old = 1;
      if (linkat(AT_FDCWD, s->path, AT_FDCWD, s->old, 0) != 0)
        s->has_old = 0;
    }
    failed = rename(s->tmp, s->path) != 0;
  } else {
    failed = commit_noreplace(s) != 0;
  }
  if (failed) {
    int e = errno;
    s->state = SLOT_STAGED;
    if (e == EEXIST)
      twf_error_set(err, TWF_ERR_IO, s->path, 0, 0,
                    "choose another name, or pass --force to replace it",
                    "output file already exists (it appeared while this run was working)");
    else
      twf_error_set(err, TWF_ERR_IO, s->path, 0, 0, "check free space and permissions",
                    "cannot put the output file in place: %s", strerror(e));
    return TWF_EXIT_IO;
  }
  s->state = SLOT_COMMITTED;
  return TWF_EXIT_OK;
}

/* The folders of the outputs, locked while a set is committed (and, on a
 * failure, undone), so that runs committing to the same folder do so one
 * at a time: with --force two runs racing on the same outputs would
 * otherwise interleave their renames and leave the model of one and the
 * JSON of the other. flock(2) on the folder itself: no lock file is left
 * behind, and the lock goes with the process however it ends. */
typedef struct folder_lock {
  int fd[MAX_OUTPUTS];
  size_t n;
} folder_lock;

static int folder_cmp(const void *a, const void *b)
{
  const struct stat *x = a, *y = b;
  if (x->st_dev != y->st_dev)
    return x->st_dev < y->st_dev ? -1 : 1;
  if (x->st_ino != y->st_ino)
    return x->st_ino < y->st_ino ? -1 : 1;
  return 0;
}

static void folders_lock(folder_lock *l, const staged *sl, size_t n)
{
  struct {
    struct stat st; /* first: folder_cmp compares it */
    int fd;
  } f[MAX_OUTPUTS], t;
  size_t i, k, m = 0;
  l->n = 0;
  for (i = 0; i < n; i++) {
    char dir[4096];
    const char *slash = strrchr(sl[i].path, '/');
    int fd;
    if (slash == NULL)
      snprintf(dir, sizeof dir, ".");
    else if (slash == sl[i].path)
      snprintf(dir, sizeof dir, "/");
    else
      snprintf(dir, sizeof dir, "%.*s", (int)(slash - sl[i].path), sl[i].path);
    fd = open(dir, O_RDONLY | O_DIRECTORY | O_CLOEXEC);
    if (fd < 0)
      continue; /* the commit reports what is wrong with the folder */
    if (fstat(fd, &f[m].st) != 0) {
      close(fd);
      continue;
    }
    f[m].fd = fd;
    for (k = 0; k < m && folder_cmp(&f[k].st, &f[m].st) != 0; k++)
      ;
    if (k < m)
      close(fd); /* a folder already listed */
    else
      m++;
  }
  /* one order for every run, so that two runs never wait on each other */
  for (i = 1; i < m; i++)
    for (k = i; k > 0 && folder_cmp(&f[k - 1].st, &f[k].st) > 0; k--) {
      t = f[k];
      f[k] = f[k - 1];
      f[k - 1] = t;
    }
  for (i = 0; i < m; i++) {
    while (flock(f[i].fd, LOCK_EX) != 0 && errno == EINTR)
      ;
    /* a file system without locks (some network ones): commit unlocked,
     * each output still without clobbering */
    l->fd[l->n++] = f[i].fd;
  }
}

static void folders_unlock(folder_lock *l)
{
  while (l->n > 0)
    close(l->fd[--l->n]); /* closing the descriptor releases the lock */
}

int cli_write_outputs(const cli_put *puts, size_t n, int force, const char *const *inputs)
{
  folder_lock lock = { { 0 }, 0 };
  twf_error err;
  sigset_t saved;
  int slot_of[MAX_OUTPUTS];
  size_t i, n_files = 0, committed = 0;
  int st = TWF_EXIT_OK, e;
  twf_error_clear(&err);
  if (n > MAX_OUTPUTS)
    return TWF_EXIT_INTERNAL;
  run_id_compute(inputs);
  /* the text report went out first: when it is lost, write nothing */
  if (stdout_failed(&e))
    return report_stdout(e);
  for (i = 0; i < n; i++)
    if (puts[i].path != NULL && strcmp(puts[i].path, "-") != 0 &&
        (st = cli_output_check(puts[i].path, force, inputs, &err)) != 0) {
      cli_report_error(&err);
      return st;
    }

  /* stage: every temporary file is registered before the handler could
   * need it */
  block_signals(&saved);
  install_handlers();
  for (i = 0; i < n; i++) {
    slot_of[i] = -1;
    if (puts[i].path == NULL || strcmp(puts[i].path, "-") == 0)
      continue;
    slot_of[i] = (int)n_files;
    st = stage_open(&slots[n_files], puts[i].path, &err);
    n_files++;
    n_slots = (sig_atomic_t)n_files;
    if (st != 0) {
      cli_report_error(&err);
      goto fail;
    }
  }
  sigprocmask(SIG_SETMASK, &saved, NULL);

  /* write: every content, each file flushed, synced and closed */
  for (i = 0; i < n; i++) {
    int failed;
    if (puts[i].path == NULL)
      continue;
    errno = 0;
    failed = puts[i].put(slot_of[i] >= 0 ? slots[slot_of[i]].fp : stdout, puts[i].ctx, &err) != 0;
    e = errno;
    if (slot_of[i] >= 0) {
      if ((st = stage_finish(&slots[slot_of[i]], failed, e, &err)) != 0) {
        cli_report_error(&err);
        goto fail_reported;
      }
    } else {
      int flush_errno, bad = stdout_failed(&flush_errno);
      if (failed && err.status != TWF_OK && err.status != TWF_ERR_IO) {
        st = cli_report_error(&err);
        goto fail_reported;
      }
      if (failed || bad) {
        st = report_stdout(bad && flush_errno != 0 ? flush_errno : e);
        goto fail_reported;
      }
    }
  }
  test_pause("staged");

  /* commit: all or none, one run at a time per folder */
  folders_lock(&lock, slots, n_files);
  for (i = 0; i < n_files; i++) {
    if ((st = commit_slot(&slots[i], force, &err)) != 0) {
      cli_report_error(&err);
      goto fail_reported;
    }
    committed++;
    if (committed == 1)
      test_pause("committed");
  }
  block_signals(&saved);
  n_slots = 0;
  for (i = 0; i < n_files; i++)
    if (slots[i].has_old)
      unlink(slots[i].old);
  folders_unlock(&lock);
  free_slots();
  restore_handlers();
  sigprocmask(SIG_SETMASK, &saved, NULL);
  return TWF_EXIT_OK;

fail_reported:
  block_signals(&saved);
fail:
  {
    size_t k = n_files;
    int kept = 0;
    while (k-- > 0)
      if (undo_slot(&slots[k]) != 0) {
        fprintf(stderr, "twistfit: error: could not put back the previous %s; it is kept as %s\n",
                slots[k].path, slots[k].old);
        kept = 1;
      }
    if (kept)
      committed = 0;
  }
  folders_unlock(&lock);
  if (committed > 0)
    fprintf(stderr, "twistfit: the outputs already in place were taken back: no output of this "
                    "run remains\n");
  n_slots = 0;
  free_slots();
  restore_handlers();
  sigprocmask(SIG_SETMASK, &saved, NULL);
  return st != TWF_EXIT_OK ? st : TWF_EXIT_IO;
}

int cli_parse_length_unit(const char *command, const char *value, twf_length_unit *u)
{
  if (twf_length_unit_parse(value, u) != TWF_OK)
    return cli_usage_error(command, "unknown length unit '%s' (use mm, m, um or in)", value);
  return TWF_EXIT_OK;
}

int cli_parse_size(const char *command, const char *value, unsigned long long *out)
{
  static const char suffix[] = "KMGT";
  const char *p = value, *s;
  unsigned long long v = 0, mul = 1;
  for (; *p >= '0' && *p <= '9'; p++) {
    if (v > (~0ULL - 9) / 10)
      goto bad;
    v = 10 * v + (unsigned long long)(*p - '0');
  }
  if (p == value)
    goto bad;
  if (*p != '\0' && (s = strchr(suffix, toupper((unsigned char)*p))) != NULL) {
    mul = 1ULL << (10 * (s - suffix + 1));
    p++;
    if (*p == 'i' && p[1] == 'B')
      p += 2;
  } else if (*p == 'B') {
    p++;
  }
  if (*p != '\0' || v == 0 || v > ~0ULL / mul)
    goto bad;
  *out = v * mul;
  return TWF_EXIT_OK;
bad:
  return cli_usage_error(command, "--max-input-size takes a positive byte count with an optional "
                         "suffix K, M, G or T (e.g. 4G), not '%s'", value);
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

int cli_bad_option(const char *command, int opt, char **argv)
{
  const char *word = optind > 0 ? argv[optind - 1] : "?";
  if (opt == ':')
    return cli_usage_error(command, "option '%s' needs a value", word);
  return cli_usage_error(command, "unknown option '%s'", word);
}

/* The group lists of --fit and --priority (cli.h). */
int cli_split_groups(const char *text, unsigned masks[2 * TWF_GROUP_COUNT])
{
  char buf[256], *tok, *save = NULL;
  int n = 0;
  if (strlen(text) >= sizeof buf)
    return -1;
  strcpy(buf, text);
  for (tok = strtok_r(buf, ",", &save); tok != NULL; tok = strtok_r(NULL, ",", &save)) {
    if (n == 2 * TWF_GROUP_COUNT)
      return -1;
    /* a preset in a list: "geometric,compliance" */
    if (strcmp(tok, "geometric") == 0)
      masks[n++] = TWF_GROUPS_GEOMETRIC;
    else if (strcmp(tok, "remaster") == 0)
      masks[n++] = TWF_GROUPS_REMASTER;
    else if (twf_group_parse(tok, &masks[n++]) != TWF_OK)
      return -1;
  }
  return n;
}
