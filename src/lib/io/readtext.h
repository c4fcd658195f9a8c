/* readtext.h: reading an input file whole, with the checks every reader
 * shares, before any format sees a byte. Private to src/lib/io.
 *
 * The CSV layer (csvstrict.c) and the INI layer (inistrict.c) both read
 * their file through here, so that the same bytes are parsed whatever the
 * file is (a regular file, a pipe, a device) and no input can make a
 * reader spin or grow without end. */
#ifndef TWF_READTEXT_H
#define TWF_READTEXT_H

#include "io_internal.h"

/* The longest physical line the read stage lets through, in bytes,
 * without its line end: a line that grows beyond it stops the reading
 * (an endless line, /dev/zero without its NULs, must not spin). The
 * campaign format's own limit; the INI formats check a lower one. */
#define TWF_IO_LINE_STOP TWF_CAMPAIGN_LINE_MAX

typedef struct twf_io_rules {
  unsigned long long max_size; /* bytes; larger files are refused */
  size_t format_line_max;      /* the format's line limit, for the message */
  const char *what;            /* "a campaign file", for hints */
  const char *name;            /* "model file": "cannot open model file";
                                  NULL: "the file" */
} twf_io_rules;

typedef struct twf_io_text {
  char *data;        /* the bytes read, NUL-terminated after len */
  size_t len;
  size_t start;      /* 3 when the text starts with a UTF-8 byte order mark */
  /* Reading stops at the end of the chunk that holds the first NUL byte:
   * the formats report it at its line (and field). nul_at is its offset,
   * (size_t)-1 when the file has none. */
  size_t nul_at;
  long nul_line, nul_col;  /* 1-based line and byte column of the NUL */
  twf_input_digest digest; /* size and SHA-256 of the bytes read */
} twf_io_text;

/* Read path whole. Refused, with the file, the line and a hint: a file
 * that cannot be opened or read (TWF_ERR_IO); a file beyond max_size
 * (TWF_ERR_VALUE); a line longer than TWF_IO_LINE_STOP, CR-only line ends,
 * UTF-16 or UTF-32 text (with or without a byte order mark) and text that
 * is mostly NUL bytes (TWF_ERR_SYNTAX). */
twf_status twf_io_read_text(const char *path, const twf_io_rules *rules,
                            twf_io_text *t, twf_error *err);
void twf_io_text_free(twf_io_text *t);

#endif
