/* inistrict.h: the strict layer over libinih that the model file and the
 * base pose file share. Private to src/lib/io.
 *
 * libinih alone splits a line longer than its buffer silently (the rest
 * passes as a line of its own), takes an indented line for the
 * continuation of the previous value and gives its handler no line
 * number. This layer is inih's line reader: it refuses long lines and NUL
 * bytes, drops a UTF-8 byte order mark, CR line ends and indentation,
 * counts lines and shows every line to the format's own check before inih
 * sees it. */
#ifndef TWF_INISTRICT_H
#define TWF_INISTRICT_H

#include "readtext.h"

#include <stdio.h>

typedef struct twf_ini_strict twf_ini_strict;

/* Every physical line, without byte order mark, line end and leading
 * blanks (as inih will parse it), before inih sees it. Errors go through
 * twf_ini_fail; after one, reading stops. */
typedef void (*twf_ini_line_fn)(void *user, twf_ini_strict *ini,
                                const char *text);
/* inih's handler: nonzero to go on. ini->lineno is the pair's line. */
typedef int (*twf_ini_pair_fn)(void *user, const char *section,
                               const char *key, const char *value);

struct twf_ini_strict {
  /* set by the caller (zero the rest) */
  const char *path;
  twf_error *err;
  const char *what;        /* "a model file": names the file in hints */
  const char *name;        /* "model file": "cannot open model file" */
  twf_ini_line_fn line;    /* may be NULL */
  twf_ini_pair_fn pair;
  void *user;
  /* The base pose file kept its own words for a long line; NULL gives
   * the default, which says how long the line is. */
  const char *long_line_message, *long_line_hint;
  unsigned long long max_size; /* bytes; the read stage refuses larger files */
  /* state */
  twf_io_text text;        /* the file, read whole */
  size_t pos;              /* offset of the next line in text */
  long lineno;             /* lines read so far: the current line */
  long indent;             /* blanks removed before the text given to line */
  twf_status status;       /* first error, TWF_OK while none */
  twf_input_digest digest; /* of the bytes read, once read */
};

/* Record an error unless one is recorded already (later ones are its
 * consequences). Returns -1, so that callers can write
 * return twf_ini_fail(...). line 0: the whole file; column 0: none. */
int twf_ini_fail(twf_ini_strict *ini, twf_status st, long line, long column,
                 const char *hint, const char *fmt, ...)
    __attribute__((format(printf, 6, 7)));

/* Read ini->path whole through the read stage (readtext.h: size, line
 * stop, encoding, CR-only line ends) and parse it through inih. Returns
 * inih's result: 0, the first line inih found malformed, or -2 when inih
 * ran out of memory; ini->status tells whether the read stage, the layer,
 * the line check or the handler recorded an error (it wins over the
 * result). */
int twf_ini_parse(twf_ini_strict *ini);

/* The longest line accepted, without its line end (TWF_MODEL_LINE_MAX). */
#define TWF_INI_LINE_MAX TWF_MODEL_LINE_MAX

#endif
