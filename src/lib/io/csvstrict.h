/* csvstrict.h: the strict CSV layer over libcsv that the campaign readers
 * share: one physical line at a time, so that every field knows its line
 * (libcsv reports records, not lines). Private to src/lib/io. */
#ifndef TWF_CSVSTRICT_H
#define TWF_CSVSTRICT_H

#include "io_internal.h"

/* One record. Fields are NUL-terminated and valid during the callback
 * only. */
typedef struct twf_csv_row {
  size_t nf;
  const char *const *f;
  const long *fline;    /* line where each field ends */
  long line;            /* line of the row (where its first field ends) */
} twf_csv_row;

typedef struct twf_csv_in twf_csv_in;

/* Every record, the header row first (is_header 1). Returns TWF_OK or the
 * status of the error it has put in in->err; reading stops on an error. */
typedef twf_status (*twf_csv_row_fn)(void *user, twf_csv_in *in,
                                     const twf_csv_row *row, int is_header);
/* A comment line, from p (its first character) up to le (past its line
 * end). Same return rule. */
typedef twf_status (*twf_csv_comment_fn)(void *user, twf_csv_in *in,
                                         const char *p, const char *le);

struct twf_csv_in {
  /* set by the caller before twf_csv_run (zero the rest) */
  const char *path;
  twf_error *err;
  twf_csv_row_fn row;
  twf_csv_comment_fn comment;
  void *user;
  unsigned long long max_size; /* bytes (twf_campaign_options) */
  /* what the callbacks and the caller may read */
  unsigned char delim;  /* , ; or tab, from the header row */
  long cur_line;        /* line being read (1-based) */
  long header_line;
  int header_seen;      /* the header line was fed */
  size_t n_data_rows;   /* records after the header */
  twf_input_digest digest; /* of the bytes read */
  /* private: the record being assembled, fields packed NUL-separated */
  twf_status status;
  int header_done;      /* the header row was handed over */
  char *buf;
  size_t buf_len, buf_cap;
  size_t *off;
  long *fline;
  const char **fptr;
  size_t nf, off_cap, fline_cap, fptr_cap;
  long row_line;
};

/* Read in->path whole and hand its records over. A UTF-8 byte order mark
 * is skipped; blank and comment lines ('#' after blanks) are never fed to
 * libcsv (it knows no comments), which keeps the line count right; the
 * delimiter is the one of , ; tab found in the header row. Quoting is
 * strict (CSV_STRICT | CSV_STRICT_FINI): a stray quote or an unclosed
 * quoted field is an error with its line and field. An empty file is not
 * an error here: the caller looks at header_seen and n_data_rows. */
twf_status twf_csv_run(twf_csv_in *in);
/* Release the buffers of in (not in itself). */
void twf_csv_clear(twf_csv_in *in);

#endif
