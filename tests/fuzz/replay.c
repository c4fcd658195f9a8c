/* replay.c: feed every seed and regression input of tests/fuzz to the
 * reader harnesses, without libFuzzer, as a test of make check. The checks
 * are those of the fuzzers (fuzz.h), so an input that once crashed a reader
 * or broke a check keeps being tried after the fix; under the sanitizer or
 * valgrind build the same run finds memory errors and leaks.
 *
 *   replay                    every input under $TWF_SRCDIR/tests/fuzz
 *   replay READER FILE...     the given files, in this process, with the
 *                             harness's messages (READER: model, base,
 *                             campaign, pair, urdf)
 *
 * Each input runs in a child process with a time limit, so that a crash or
 * an endless loop is one failed input, not the end of the run. Inputs of
 * unfixed bugs are listed in known.txt ("PATH reason"): they are reported
 * as expected failures, and as a failure once they pass, so that the list
 * is emptied as the bugs are fixed. */
#define _GNU_SOURCE /* scandir's alphasort, strdup */
#include "fuzz.h"

#include <dirent.h>
#include <errno.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

/* Seconds one input may take; the readers take milliseconds. */
#define INPUT_SECONDS 30

typedef void (*harness_fn)(const uint8_t *, size_t);

static const struct {
  const char *name;
  harness_fn fn;
} readers[] = {
  { "model", twf_fuzz_model },
  { "base", twf_fuzz_base },
  { "campaign", twf_fuzz_campaign },
  { "pair", twf_fuzz_pair },
  { "urdf", twf_fuzz_urdf },
};
#define N_READERS (sizeof readers / sizeof readers[0])

static harness_fn find_reader(const char *name)
{
  for (size_t i = 0; i < N_READERS; i++)
    if (strcmp(readers[i].name, name) == 0)
      return readers[i].fn;
  return NULL;
}

/* Whole file into memory; NULL (errno set) on failure. */
static uint8_t *slurp(const char *path, size_t *size)
{
  FILE *f = fopen(path, "rb");
  uint8_t *buf = NULL;
  size_t cap = 0, n = 0;
  if (f == NULL)
    return NULL;
  for (;;) {
    size_t got;
    if (n == cap) {
      uint8_t *nb = realloc(buf, cap ? 2 * cap : 4096);
      if (nb == NULL) {
        free(buf);
        fclose(f);
        errno = ENOMEM;
        return NULL;
      }
      buf = nb;
      cap = cap ? 2 * cap : 4096;
    }
    got = fread(buf + n, 1, cap - n, f);
    n += got;
    if (got == 0)
      break;
  }
  if (ferror(f)) {
    free(buf);
    fclose(f);
    errno = EIO;
    return NULL;
  }
  fclose(f);
  *size = n;
  return buf;
}

/* Run one input in this process: 0 when every check passed. */
static int run_here(harness_fn fn, const char *path)
{
  size_t size = 0;
  uint8_t *data = slurp(path, &size);
  if (data == NULL) {
    fprintf(stderr, "replay: cannot read %s: %s\n", path, strerror(errno));
    return 1;
  }
  twf_fuzz_failures = 0;
  fn(data, size);
  free(data);
  return twf_fuzz_failures != 0;
}

/* Run one input in a child: 0 when it exits cleanly in time. The child's
 * messages go to this program's standard error. */
static int run_child(harness_fn fn, const char *path)
{
  int status;
  pid_t pid;
  fflush(NULL);
  pid = fork();
  if (pid < 0) {
    fprintf(stderr, "replay: fork: %s\n", strerror(errno));
    return 1;
  }
  if (pid == 0) {
    alarm(INPUT_SECONDS);
    exit(run_here(fn, path)); /* exit, not _exit: leak checkers run at exit */
  }
  while (waitpid(pid, &status, 0) < 0)
    if (errno != EINTR)
      return 1;
  if (WIFSIGNALED(status)) {
    fprintf(stderr, "replay: %s: killed by signal %d%s\n", path, WTERMSIG(status),
            WTERMSIG(status) == SIGALRM ? " (time limit)" : "");
    return 1;
  }
  return WEXITSTATUS(status) != 0;
}

/* known.txt: one "PATH reason" a line, PATH relative to tests/fuzz. */
static char **known;
static size_t n_known;

static void load_known(const char *dir)
{
  char path[4096 + 16], line[4096];
  FILE *f;
  snprintf(path, sizeof path, "%s/known.txt", dir);
  f = fopen(path, "r");
  if (f == NULL)
    return;
  while (fgets(line, sizeof line, f) != NULL) {
    char *p = line + strspn(line, " \t");
    size_t len = strcspn(p, " \t\r\n");
    char **nk;
    if (*p == '#' || len == 0)
      continue;
    p[len] = '\0';
    nk = realloc(known, (n_known + 1) * sizeof *known);
    if (nk == NULL || (nk[n_known] = strdup(p)) == NULL) {
      fprintf(stderr, "replay: out of memory\n");
      exit(99);
    }
    known = nk;
    n_known++;
  }
  fclose(f);
}

static int is_known(const char *rel)
{
  for (size_t i = 0; i < n_known; i++)
    if (strcmp(known[i], rel) == 0)
      return 1;
  return 0;
}

static unsigned passed, failed, xfailed;

static void replay_dir(const char *top, const char *kind, size_t r)
{
  char dir[4096];
  struct dirent **list;
  int n;
  snprintf(dir, sizeof dir, "%s/%s/%s", top, kind, readers[r].name);
  n = scandir(dir, &list, NULL, alphasort);
  if (n < 0)
    return; /* a reader without regressions has no folder */
  for (int i = 0; i < n; i++) {
    char path[8192], rel[4096];
    struct stat st;
    int bad, expect;
    snprintf(path, sizeof path, "%s/%s", dir, list[i]->d_name);
    snprintf(rel, sizeof rel, "%s/%s/%s", kind, readers[r].name, list[i]->d_name);
    if (list[i]->d_name[0] == '.' || stat(path, &st) != 0 || !S_ISREG(st.st_mode)) {
      free(list[i]);
      continue;
    }
    bad = run_child(readers[r].fn, path);
    expect = is_known(rel);
    if (bad && expect) {
      xfailed++;
      printf("XFAIL: %s (known.txt)\n", rel);
    } else if (bad) {
      failed++;
      printf("FAIL: %s\n", rel);
    } else if (expect) {
      failed++;
      printf("FAIL: %s passes now: remove its line from tests/fuzz/known.txt\n", rel);
    } else {
      passed++;
    }
    free(list[i]);
  }
  free(list);
}

int main(int argc, char **argv)
{
  const char *src = getenv("TWF_SRCDIR");
  char top[4096];
  if (argc >= 2) {
    harness_fn fn = find_reader(argv[1]);
    int bad = 0;
    if (fn == NULL || argc < 3) {
      fprintf(stderr, "usage: replay [model|base|campaign|pair|urdf FILE...]\n");
      return 2;
    }
    for (int i = 2; i < argc; i++) {
      int b = run_here(fn, argv[i]);
      printf("%s: %s\n", b ? "FAIL" : "PASS", argv[i]);
      bad |= b;
    }
    return bad;
  }
  snprintf(top, sizeof top, "%s/tests/fuzz", src != NULL && src[0] ? src : ".");
  load_known(top);
  for (size_t r = 0; r < N_READERS; r++) {
    replay_dir(top, "corpus", r);
    replay_dir(top, "regressions", r);
  }
  if (passed + failed + xfailed == 0) {
    fprintf(stderr, "replay: no inputs under %s (set TWF_SRCDIR)\n", top);
    return 1;
  }
  printf("replay: %u expected failures (known.txt)\n", xfailed);
  printf("replay: %u passed, %u failed\n", passed, failed);
  for (size_t i = 0; i < n_known; i++)
    free(known[i]);
  free(known);
  return failed != 0;
}
