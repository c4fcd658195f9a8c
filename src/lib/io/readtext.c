/* readtext.c: the read stage of every reader (see readtext.h). One pass
 * over the bytes as they arrive: the size limit, the line limit, the
 * first line end (CR-only files), the first NUL byte and, when the text
 * does not look like UTF-8, which encoding it is. */
#include "readtext.h"

#include <errno.h>
#include <sha2.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>

#define CHUNK 65536

/* "2 GiB" for whole binary multiples, else the bytes. */
static void size_text(char *buf, size_t n, unsigned long long v)
{
  static const char *const unit[] = { "KiB", "MiB", "GiB", "TiB" };
  int k = -1;
  unsigned long long u = v;
  while (u >= 1024 && u % 1024 == 0 && k < 3) {
    u /= 1024;
    k++;
  }
  if (k >= 0)
    snprintf(buf, n, "%llu %s", u, unit[k]);
  else
    snprintf(buf, n, "%llu bytes", v);
}

/* What the first bytes say about the encoding, NULL when they look like
 * ASCII or UTF-8: a byte order mark, or the NUL pattern of UTF-16 or
 * UTF-32 text in the ASCII range, or mostly NUL bytes. */
static const char *encoding_of(const unsigned char *b, size_t n, char *buf,
                               size_t bn)
{
  size_t k = n < 256 ? n : 256, i, z4[4] = { 0, 0, 0, 0 }, c4[4] = { 0, 0, 0, 0 };
  size_t zeros = 0;
  if (n >= 4 && b[0] == 0xFF && b[1] == 0xFE && b[2] == 0 && b[3] == 0)
    return "UTF-32 (little-endian, with a byte order mark)";
  if (n >= 4 && b[0] == 0 && b[1] == 0 && b[2] == 0xFE && b[3] == 0xFF)
    return "UTF-32 (big-endian, with a byte order mark)";
  if (n >= 2 && b[0] == 0xFF && b[1] == 0xFE)
    return "UTF-16 (little-endian, with a byte order mark)";
  if (n >= 2 && b[0] == 0xFE && b[1] == 0xFF)
    return "UTF-16 (big-endian, with a byte order mark)";
  for (i = 0; i < k; i++) {
    c4[i % 4]++;
    if (b[i] == 0) {
      z4[i % 4]++;
      zeros++;
    }
  }
  if (k < 4 || zeros == 0)
    return NULL;
  /* ASCII text in UTF-32 has three NULs in every four bytes, in UTF-16
   * one in every two; allow a few non-ASCII characters. */
  if (z4[1] + z4[2] + z4[3] >= (c4[1] + c4[2] + c4[3]) * 9 / 10 && z4[0] * 2 < c4[0])
    return "UTF-32 (little-endian)";
  if (z4[0] + z4[1] + z4[2] >= (c4[0] + c4[1] + c4[2]) * 9 / 10 && z4[3] * 2 < c4[3])
    return "UTF-32 (big-endian)";
  if (z4[1] + z4[3] >= (c4[1] + c4[3]) * 9 / 10 && (z4[0] + z4[2]) * 10 < c4[0] + c4[2])
    return "UTF-16 (little-endian)";
  if (z4[0] + z4[2] >= (c4[0] + c4[2]) * 9 / 10 && (z4[1] + z4[3]) * 10 < c4[1] + c4[3])
    return "UTF-16 (big-endian)";
  if (zeros * 4 >= k) {
    snprintf(buf, bn, "not text: %zu of its first %zu bytes are NUL", zeros, k);
    return buf;
  }
  return NULL;
}

static twf_status encoding_error(const char *path, const twf_io_rules *rules,
                                 const unsigned char *b, size_t n, twf_error *err)
{
  char buf[96], hint[160];
  const char *enc = encoding_of(b, n, buf, sizeof buf);
  if (enc == NULL)
    return TWF_OK;
  if (enc == buf) {
    snprintf(hint, sizeof hint, "check that this is %s: plain text, UTF-8 or ASCII",
             rules->what ? rules->what : "the right file");
    return twf_error_set(err, TWF_ERR_SYNTAX, path, 0, 0, hint, "the file is %s", enc);
  }
  snprintf(hint, sizeof hint, "save the file as UTF-8 (or plain ASCII) text, e.g. "
           "with iconv -f %.6s -t UTF-8", enc);
  return twf_error_set(err, TWF_ERR_SYNTAX, path, 0, 0, hint,
                       "the file is %s text, not UTF-8", enc);
}

void twf_io_text_free(twf_io_text *t)
{
  free(t->data);
  t->data = NULL;
  t->len = 0;
}

twf_status twf_io_read_text(const char *path, const twf_io_rules *rules,
                            twf_io_text *t, twf_error *err)
{
  FILE *f;
  char *buf = NULL;
  size_t cap = 0, n = 0;
  unsigned long long max = rules->max_size;
  long line = 1;
  size_t col = 0;
  int prev_cr = 0, seen_lf = 0, stop = 0;
  twf_status st = TWF_OK;
  SHA2_CTX sha;
  memset(t, 0, sizeof *t);
  SHA256Init(&sha);
  t->nul_at = (size_t)-1;
  /* size_t arithmetic below: a limit beyond what memory can hold is no
   * limit at all. */
  if (max > (unsigned long long)(SIZE_MAX / 2))
    max = (unsigned long long)(SIZE_MAX / 2);
  f = fopen(path, "rb");
  if (f == NULL)
    return twf_error_set(err, TWF_ERR_IO, path, 0, 0,
                         "check the file name and its permissions",
                         "cannot open %s: %s", rules->name ? rules->name : "the file",
                         strerror(errno));
  while (!stop) {
    size_t want = CHUNK, got, i;
    /* one byte beyond the limit tells that the file is larger */
    if ((unsigned long long)n + want > max + 1)
      want = (size_t)(max + 1 - n);
    if (twf_io_grow((void **)&buf, &cap, n + want + 1, 1)) {
      st = twf_error_set(err, TWF_ERR_NOMEM, path, 0, 0, NULL,
                         "out of memory reading the file");
      break;
    }
    got = fread(buf + n, 1, want, f);
    if (got == 0) {
      if (ferror(f))
        st = twf_error_set(err, TWF_ERR_IO, path, 0, 0,
                           "check the file and the device it is on",
                           "cannot read the file: %s", strerror(errno));
      break;
    }
    for (i = 0; i < got && st == TWF_OK; i++) {
      unsigned char ch = (unsigned char)buf[n + i];
      /* (CR CR LF, a CR LF file converted once more, is not CR-only) */
      if (prev_cr && ch != '\n' && ch != '\r' && !seen_lf) {
        st = encoding_error(path, rules, (unsigned char *)buf, n + got, err);
        if (st == TWF_OK)
          st = twf_error_set(err, TWF_ERR_SYNTAX, path, 0, 0,
                             "convert the line ends to LF or CR LF, e.g. with "
                             "tr '\\r' '\\n'",
                             "the file has CR-only line ends (no line feeds): "
                             "its lines cannot be told apart");
        break;
      }
      prev_cr = ch == '\r';
      if (ch == '\n') {
        seen_lf = 1;
        line++;
        col = 0;
        continue;
      }
      if (ch == '\0' && t->nul_at == (size_t)-1) {
        st = encoding_error(path, rules, (unsigned char *)buf, n + got, err);
        t->nul_at = n + i;
        t->nul_line = line;
        t->nul_col = (long)col + 1;
        stop = 1;
        break;
      }
      /* a CR before the LF is not part of the line */
      if (++col > TWF_IO_LINE_STOP && !(ch == '\r' && col == TWF_IO_LINE_STOP + 1)) {
        st = encoding_error(path, rules, (unsigned char *)buf, n + got, err);
        if (st == TWF_OK) {
          char lim[64] = "";
          if (rules->format_line_max < TWF_IO_LINE_STOP)
            snprintf(lim, sizeof lim, ", more than the limit of %zu",
                     rules->format_line_max);
          st = twf_error_set(err, TWF_ERR_SYNTAX, path, line, 0,
                             "lines end with LF or CR LF; check that this is "
                             "the right file",
                             "line is longer than %d characters%s: reading "
                             "stopped there", TWF_IO_LINE_STOP, lim);
        }
        break;
      }
    }
    SHA256Update(&sha, (const uint8_t *)buf + n, got);
    n += got;
    if (st != TWF_OK)
      break;
    if ((unsigned long long)n > max) {
      char lim[64];
      size_text(lim, sizeof lim, max);
      st = encoding_error(path, rules, (unsigned char *)buf, n, err);
      if (st == TWF_OK)
        st = twf_error_set(err, TWF_ERR_VALUE, path, 0, 0,
                           "check that this is the right file; if it is, raise "
                           "the input size limit (max_input_size)",
                           "the file is larger than the input size limit of %s", lim);
      break;
    }
  }
  fclose(f);
  if (st == TWF_OK)
    st = encoding_error(path, rules, (unsigned char *)buf, n, err);
  if (st != TWF_OK) {
    free(buf);
    return st;
  }
  if (buf == NULL && (buf = malloc(1)) == NULL)
    return twf_error_set(err, TWF_ERR_NOMEM, path, 0, 0, NULL,
                         "out of memory reading the file");
  buf[n] = '\0';
  t->data = buf;
  t->len = n;
  /* With a NUL the reading stopped early and the format refuses the file:
   * no digest is handed out then. */
  t->digest.size = n;
  SHA256End(&sha, t->digest.sha256);
  if (n >= 3 && (unsigned char)buf[0] == 0xEF && (unsigned char)buf[1] == 0xBB &&
      (unsigned char)buf[2] == 0xBF)
    t->start = 3;
  return TWF_OK;
}
