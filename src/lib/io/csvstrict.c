/* csvstrict.c: the strict CSV layer (libcsv) of the campaign readers.
 *
 * A file is read whole and fed to libcsv one physical line at a time, so
 * that every field knows its line: libcsv reports records, not lines.
 * Comment and blank lines are never fed (libcsv knows no comments), which
 * keeps the line count right without rewriting the text. libcsv does not
 * count fields: the callers compare each record with the header. */
#include "csvstrict.h"
#include "readtext.h"

#include <csv.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>

static int is_blank(char ch) { return ch == ' ' || ch == '\t'; }

/* A NUL byte would end the field early for every C string function: the
 * value after it would be lost silently. */
static twf_status nul_error(twf_csv_in *in, long field)
{
  return twf_error_set(in->err, TWF_ERR_SYNTAX, in->path, in->cur_line, field,
                       "a campaign file is plain text (ASCII or UTF-8): check "
                       "the export, or remove the NUL bytes",
                       "line holds a NUL byte (in field %ld)", field);
}

static void cb_field(void *s, size_t len, void *data)
{
  twf_csv_in *in = data;
  if (in->status != TWF_OK)
    return;
  if (twf_io_grow((void **)&in->off, &in->off_cap, in->nf + 1, sizeof *in->off) ||
      twf_io_grow((void **)&in->fline, &in->fline_cap, in->nf + 1, sizeof *in->fline) ||
      twf_io_grow((void **)&in->buf, &in->buf_cap, in->buf_len + len + 1, 1)) {
    in->status = twf_error_set(in->err, TWF_ERR_NOMEM, in->path, in->cur_line,
                               0, NULL, "out of memory reading the file");
    return;
  }
  if (len > 0 && memchr(s, '\0', len) != NULL) {
    in->status = nul_error(in, (long)in->nf + 1);
    return;
  }
  if (len > 0)
    memcpy(in->buf + in->buf_len, s, len);
  in->buf[in->buf_len + len] = '\0';
  in->off[in->nf] = in->buf_len;
  in->fline[in->nf] = in->cur_line;
  if (in->nf == 0)
    in->row_line = in->cur_line;
  in->nf++;
  in->buf_len += len + 1;
}

static void cb_row(int c, void *data)
{
  twf_csv_in *in = data;
  twf_csv_row row;
  size_t k;
  (void)c;
  if (in->status != TWF_OK || in->nf == 0)
    return;
  if (twf_io_grow((void **)&in->fptr, &in->fptr_cap, in->nf, sizeof *in->fptr)) {
    in->status = twf_error_set(in->err, TWF_ERR_NOMEM, in->path, in->cur_line,
                               0, NULL, "out of memory reading the file");
    return;
  }
  for (k = 0; k < in->nf; k++)
    in->fptr[k] = in->buf + in->off[k];
  row.nf = in->nf;
  row.f = in->fptr;
  row.fline = in->fline;
  row.line = in->row_line;
  in->status = in->row(in->user, in, &row, !in->header_done);
  if (in->header_done)
    in->n_data_rows++;
  in->header_done = 1;
  in->nf = 0;
  in->buf_len = 0;
}

/* The delimiter is the one of , ; tab that occurs (outside quotes) in the
 * header row; column names never contain the others. */
static twf_status detect_delim(twf_csv_in *in, const char *p, const char *le)
{
  size_t n_comma = 0, n_semi = 0, n_tab = 0;
  int quoted = 0;
  for (; p < le; p++) {
    if (*p == '"')
      quoted = !quoted;
    else if (!quoted && *p == ',')
      n_comma++;
    else if (!quoted && *p == ';')
      n_semi++;
    else if (!quoted && *p == '\t')
      n_tab++;
  }
  if (n_comma + n_semi + n_tab == 0)
    return twf_error_set(in->err, TWF_ERR_SYNTAX, in->path, in->cur_line, 0,
                         "separate the column names by ',', ';' or a tab",
                         "cannot tell the delimiter: the header row holds no "
                         "',', ';' or tab");
  if ((n_comma > 0) + (n_semi > 0) + (n_tab > 0) > 1)
    return twf_error_set(in->err, TWF_ERR_SYNTAX, in->path, in->cur_line, 0,
                         "use one delimiter throughout the header row",
                         "cannot tell the delimiter: the header row mixes "
                         "%zu ',', %zu ';' and %zu tabs", n_comma, n_semi, n_tab);
  in->delim = n_comma ? ',' : n_semi ? ';' : '\t';
  return TWF_OK;
}

/* Blanks only (a CR allowed): skipped. */
static int line_is_blank(const char *p, const char *le)
{
  for (; p < le; p++)
    if (!is_blank(*p) && *p != '\r' && *p != '\n')
      return 0;
  return 1;
}

static int line_is_comment(const char *p, const char *le)
{
  while (p < le && is_blank(*p))
    p++;
  return p < le && *p == '#';
}

static int space_only(unsigned char ch) { return ch == ' '; }
static int space_tab(unsigned char ch) { return ch == ' ' || ch == '\t'; }

twf_status twf_csv_run(twf_csv_in *in)
{
  twf_io_text text;
  twf_io_rules rules;
  const char *p, *end, *nul;
  struct csv_parser parser;
  int ready = 0, quoted = 0;
  long quote_line = 0;
  long line = 0;
  twf_status st;
  rules.max_size = in->max_size;
  rules.format_line_max = TWF_IO_LINE_STOP;
  rules.what = "a campaign file";
  rules.name = NULL;
  st = twf_io_read_text(in->path, &rules, &text, in->err);
  if (st != TWF_OK)
    return st;
  in->digest = text.digest;
  p = text.data + text.start;
  end = text.data + text.len;
  nul = text.nul_at != (size_t)-1 ? text.data + text.nul_at : NULL;
  while (p < end && in->status == TWF_OK) {
    const char *nl = memchr(p, '\n', (size_t)(end - p));
    const char *le = nl ? nl + 1 : end;
    const char *s;
    size_t n;
    int has_nul = nul != NULL && nul >= p && nul < le;
    in->cur_line = ++line;
    if (has_nul && !quoted && (line_is_blank(p, le) || line_is_comment(p, le))) {
      in->status = twf_error_set(in->err, TWF_ERR_SYNTAX, in->path, line, 0,
                                 "a campaign file is plain text (ASCII or UTF-8)",
                                 "line holds a NUL byte");
      break;
    }
    if (!quoted) {
      if (line_is_blank(p, le)) {
        p = le;
        continue;
      }
      if (line_is_comment(p, le)) {
        in->status = in->comment(in->user, in, p, le);
        p = le;
        continue;
      }
      if (!ready) {
        in->status = detect_delim(in, p, le);
        if (in->status != TWF_OK)
          break;
        if (csv_init(&parser, CSV_STRICT | CSV_STRICT_FINI | CSV_APPEND_NULL) != 0) {
          in->status = twf_error_set(in->err, TWF_ERR_NOMEM, in->path, line, 0,
                                     NULL, "out of memory reading the file");
          break;
        }
        csv_set_delim(&parser, in->delim);
        /* With tab as delimiter only spaces may be trimmed. */
        csv_set_space_func(&parser, in->delim == '\t' ? space_only : space_tab);
        ready = 1;
        in->header_seen = 1;
        in->header_line = line;
      }
    }
    for (s = p; s < le; s++)
      if (*s == '"') {
        quoted = !quoted;
        if (quoted)
          quote_line = line;
      }
    n = (size_t)(le - p);
    if (csv_parse(&parser, p, n, cb_field, cb_row, in) != n &&
        in->status == TWF_OK) {
      int e = csv_error(&parser);
      if (e == CSV_EPARSE)
        in->status = twf_error_set(
            in->err, TWF_ERR_SYNTAX, in->path, line, (long)in->nf + 1,
            "quote a whole field (\"...\") and double any quote inside it",
            "malformed quoting in field %zu: a double quote inside an unquoted "
            "field, or text after a closing quote", in->nf + 1);
      else
        in->status = twf_error_set(in->err, TWF_ERR_NOMEM, in->path, line, 0,
                                   NULL, "out of memory reading the file");
    }
    /* the NUL is in a field that has not ended on this line */
    if (has_nul && in->status == TWF_OK)
      in->status = nul_error(in, (long)in->nf + 1);
    p = le;
  }
  if (ready) {
    if (in->status == TWF_OK &&
        csv_fini(&parser, cb_field, cb_row, in) != 0 && in->status == TWF_OK)
      in->status = twf_error_set(in->err, TWF_ERR_SYNTAX, in->path, quote_line,
                                 (long)in->nf + 1, "close the quoted field",
                                 "a quoted field opened at line %ld is not "
                                 "closed by the end of the file", quote_line);
    csv_free(&parser);
  }
  twf_io_text_free(&text);
  return in->status;
}

void twf_csv_clear(twf_csv_in *in)
{
  free(in->buf);
  free(in->off);
  free(in->fline);
  free(in->fptr);
}
