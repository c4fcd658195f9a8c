/* campaign.c: measurement campaigns, the CSV data format of
 * twistfit-data(5), read with libcsv and written back.
 *
 * A file is read whole and fed to libcsv one physical line at a time, so
 * that every field knows its line: libcsv reports records, not lines.
 * Comment and blank lines are never fed (libcsv knows no comments), which
 * keeps the line count right without rewriting the text. Numbers are
 * parsed in the "C" locale whatever the caller's locale is. */
#include "internal.h"

#include <csv.h>
#include <errno.h>
#include <locale.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <strings.h>

/* Accepted deviation of a quaternion's norm from 1 (relative). Exports with
 * 7 significant digits stay within it; anything beyond is a wrong column or
 * a rotation that is not one, and silently normalising would hide that. */
#define QUAT_NORM_TOL 1e-6
/* How many ids an error message lists before "and N more". */
#define LIST_IDS 5
/* Limits spanning more than this (30 degrees) make values that all stay
 * within +-6.3 (one turn in radians) suspicious when read as degrees. */
#define WIDE_ANGLE (30.0 * TWF_PI / 180.0)
#define ONE_TURN_RAD 6.3
#define WIDE_STROKE 0.030

#define NONE ((size_t)-1)

/* ------------------------------------------------------------------ */
/* Column roles                                                        */
/* ------------------------------------------------------------------ */

enum col_role {
  COL_POSE, COL_TARGET, COL_JOINT, COL_X, COL_Y, COL_Z,
  COL_QW, COL_QX, COL_QY, COL_QZ, COL_SIGMA, COL_SET, COL_N
};

/* Reserved column names; COL_JOINT columns carry the model's joint names. */
static const char *const role_name[COL_N] = {
  "pose", "target", NULL, "x", "y", "z", "qw", "qx", "qy", "qz", "sigma", "set"
};

typedef enum file_kind { KIND_ONE, KIND_JOINTS, KIND_POINTS } file_kind;

static int role_allowed(file_kind kind, int role)
{
  switch (kind) {
  case KIND_ONE: return 1;
  case KIND_JOINTS: return role == COL_POSE || role == COL_JOINT || role == COL_SET;
  case KIND_POINTS: return role != COL_JOINT;
  }
  return 0;
}

static int reserved_role(const char *name)
{
  int i;
  for (i = 0; i < COL_N; i++)
    if (role_name[i] != NULL && strcmp(name, role_name[i]) == 0)
      return i;
  return -1;
}

/* ------------------------------------------------------------------ */
/* Small helpers                                                       */
/* ------------------------------------------------------------------ */

/* Append formatted text to buf (size n), never overflowing. */
static void appendf(char *buf, size_t n, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
static void appendf(char *buf, size_t n, const char *fmt, ...)
{
  size_t len = strlen(buf);
  va_list ap;
  if (len + 1 >= n)
    return;
  va_start(ap, fmt);
  vsnprintf(buf + len, n - len, fmt, ap);
  va_end(ap);
}

static int is_blank(char ch) { return ch == ' ' || ch == '\t'; }
static int is_digit(char ch) { return ch >= '0' && ch <= '9'; }

/* Grow *p (of *cap elements of size sz) to hold at least need elements. */
static int grow(void **p, size_t *cap, size_t need, size_t sz)
{
  size_t cap2;
  void *q;
  if (need <= *cap)
    return 0;
  cap2 = *cap ? *cap : 16;
  while (cap2 < need)
    cap2 *= 2;
  q = realloc(*p, cap2 * sz);
  if (q == NULL)
    return -1;
  *p = q;
  *cap = cap2;
  return 0;
}

/* Open-addressing hash of ids (indices into a names array), FNV-1a. */
typedef struct idmap {
  size_t cap;   /* power of two, 0 when empty */
  size_t *slot; /* index + 1, 0 = free */
} idmap;

static size_t str_hash(const char *s)
{
  uint64_t h = 1469598103934665603ULL;
  for (; *s; s++) {
    h ^= (unsigned char)*s;
    h *= 1099511628211ULL;
  }
  return (size_t)h;
}

static size_t idmap_find(const idmap *h, char (*names)[TWF_NAME_MAX],
                         const char *s)
{
  size_t i;
  if (h->cap == 0)
    return NONE;
  for (i = str_hash(s) & (h->cap - 1); h->slot[i] != 0; i = (i + 1) & (h->cap - 1))
    if (strcmp(names[h->slot[i] - 1], s) == 0)
      return h->slot[i] - 1;
  return NONE;
}

static void idmap_place(idmap *h, char (*names)[TWF_NAME_MAX], size_t index)
{
  size_t i = str_hash(names[index]) & (h->cap - 1);
  while (h->slot[i] != 0)
    i = (i + 1) & (h->cap - 1);
  h->slot[i] = index + 1;
}

/* Add names[index] (count = entries including it), keeping load <= 1/2. */
static int idmap_add(idmap *h, char (*names)[TWF_NAME_MAX], size_t count,
                     size_t index)
{
  if (2 * count > h->cap) {
    size_t cap = h->cap ? 2 * h->cap : 64, k;
    size_t *slot;
    while (2 * count > cap)
      cap *= 2;
    slot = calloc(cap, sizeof *slot);
    if (slot == NULL)
      return -1;
    free(h->slot);
    h->slot = slot;
    h->cap = cap;
    for (k = 0; k < count; k++)
      if (k != index)
        idmap_place(h, names, k);
  }
  idmap_place(h, names, index);
  return 0;
}

/* ------------------------------------------------------------------ */
/* The line-aware CSV front end                                        */
/* ------------------------------------------------------------------ */

typedef struct csv_row {
  size_t nf;
  const char *const *f; /* NUL-terminated fields */
  const long *fline;    /* line where each field ends */
  long line;            /* line of the row (where its first field ends) */
} csv_row;

struct reader;

typedef struct csv_in {
  struct reader *r;
  const char *path;
  twf_error *err;
  twf_status status;
  unsigned char delim;
  long cur_line;
  long header_line;
  int header_seen;   /* the header line was fed */
  int header_done;   /* the header row was handed over */
  size_t n_data_rows;
  /* units declared by the file (a "# units:" line above the header) */
  long units_line;
  int decl_length, decl_angle;
  twf_length_unit length_unit;
  twf_angle_unit angle_unit;
  /* the row being assembled: fields packed NUL-separated in buf */
  char *buf;
  size_t buf_len, buf_cap;
  size_t *off;
  long *fline;
  const char **fptr;
  size_t nf, f_cap, off_cap, fline_cap, fptr_cap;
  long row_line;
} csv_in;

static twf_status reader_row(struct reader *r, csv_in *in, const csv_row *row,
                             int is_header);

static void cb_field(void *s, size_t len, void *data)
{
  csv_in *in = data;
  if (in->status != TWF_OK)
    return;
  if (grow((void **)&in->off, &in->off_cap, in->nf + 1, sizeof *in->off) ||
      grow((void **)&in->fline, &in->fline_cap, in->nf + 1, sizeof *in->fline) ||
      grow((void **)&in->buf, &in->buf_cap, in->buf_len + len + 1, 1)) {
    in->status = twf_error_set(in->err, TWF_ERR_NOMEM, in->path, in->cur_line,
                               0, NULL, "out of memory reading the file");
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
  csv_in *in = data;
  csv_row row;
  size_t k;
  (void)c;
  if (in->status != TWF_OK || in->nf == 0)
    return;
  if (grow((void **)&in->fptr, &in->fptr_cap, in->nf, sizeof *in->fptr)) {
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
  in->status = reader_row(in->r, in, &row, !in->header_done);
  if (in->header_done)
    in->n_data_rows++;
  in->header_done = 1;
  in->nf = 0;
  in->buf_len = 0;
}

static twf_status read_all(const char *path, char **out, size_t *len,
                           twf_error *err)
{
  FILE *f = fopen(path, "rb");
  char *buf = NULL;
  size_t cap = 0, n = 0;
  if (f == NULL)
    return twf_error_set(err, TWF_ERR_IO, path, 0, 0,
                         "check the file name and its permissions",
                         "cannot open the file: %s", strerror(errno));
  for (;;) {
    size_t got;
    if (grow((void **)&buf, &cap, n + 65536 + 1, 1)) {
      free(buf);
      fclose(f);
      return twf_error_set(err, TWF_ERR_NOMEM, path, 0, 0, NULL,
                           "out of memory reading the file");
    }
    got = fread(buf + n, 1, cap - n - 1, f);
    n += got;
    if (got == 0)
      break;
  }
  if (ferror(f)) {
    int e = errno;
    free(buf);
    fclose(f);
    return twf_error_set(err, TWF_ERR_IO, path, 0, 0,
                         "check the file and the device it is on",
                         "cannot read the file: %s", strerror(e));
  }
  fclose(f);
  buf[n] = '\0';
  *out = buf;
  *len = n;
  return TWF_OK;
}

/* "# units: length=mm angle=deg" above the header row. Other comments are
 * ignored; a units line below the header is refused rather than ignored. */
static twf_status comment_line(csv_in *in, const char *p, const char *le)
{
  char text[256];
  char *tok, *save = NULL;
  size_t n;
  int seen_length = 0, seen_angle = 0, any = 0;
  while (p < le && is_blank(*p))
    p++;
  p++; /* the '#' */
  while (p < le && is_blank(*p))
    p++;
  if ((size_t)(le - p) < 5 || strncmp(p, "units", 5) != 0)
    return TWF_OK;
  p += 5;
  while (p < le && is_blank(*p))
    p++;
  if (p == le || *p != ':')
    return TWF_OK;
  p++;
  if (in->header_seen)
    return twf_error_set(in->err, TWF_ERR_SYNTAX, in->path, in->cur_line, 0,
                         "move the '# units:' line above the header row",
                         "a units declaration must come before the header row");
  if (in->units_line != 0)
    return twf_error_set(in->err, TWF_ERR_DUPLICATE, in->path, in->cur_line, 0,
                         "keep one '# units:' line",
                         "a second units declaration (the first is at line %ld)",
                         in->units_line);
  n = (size_t)(le - p);
  if (n >= sizeof text)
    return twf_error_set(in->err, TWF_ERR_SYNTAX, in->path, in->cur_line, 0,
                         "write it as '# units: length=mm angle=deg'",
                         "the units declaration is too long");
  memcpy(text, p, n);
  text[n] = '\0';
  in->units_line = in->cur_line;
  for (tok = strtok_r(text, " \t,;\r\n", &save); tok != NULL;
       tok = strtok_r(NULL, " \t,;\r\n", &save)) {
    char *eq = strchr(tok, '=');
    any = 1;
    if (eq == NULL)
      return twf_error_set(in->err, TWF_ERR_SYNTAX, in->path, in->cur_line, 0,
                           "write it as '# units: length=mm angle=deg'",
                           "'%s' in the units declaration is not key=unit", tok);
    *eq = '\0';
    if (strcmp(tok, "length") == 0) {
      if (seen_length++)
        return twf_error_set(in->err, TWF_ERR_DUPLICATE, in->path, in->cur_line,
                             0, "keep one length=...", "the length unit is declared twice");
      if (twf_length_unit_parse(eq + 1, &in->length_unit) != TWF_OK)
        return twf_error_set(in->err, TWF_ERR_UNITS, in->path, in->cur_line, 0,
                             "use one of mm, m, um, in",
                             "unknown length unit '%s'", eq + 1);
      in->decl_length = 1;
    } else if (strcmp(tok, "angle") == 0) {
      if (seen_angle++)
        return twf_error_set(in->err, TWF_ERR_DUPLICATE, in->path, in->cur_line,
                             0, "keep one angle=...", "the angle unit is declared twice");
      if (twf_angle_unit_parse(eq + 1, &in->angle_unit) != TWF_OK)
        return twf_error_set(in->err, TWF_ERR_UNITS, in->path, in->cur_line, 0,
                             "use one of deg, rad, mrad",
                             "unknown angle unit '%s'", eq + 1);
      in->decl_angle = 1;
    } else {
      return twf_error_set(in->err, TWF_ERR_SYNTAX, in->path, in->cur_line, 0,
                           "the keys are 'length' and 'angle'",
                           "unknown key '%s' in the units declaration", tok);
    }
  }
  if (!any)
    return twf_error_set(in->err, TWF_ERR_SYNTAX, in->path, in->cur_line, 0,
                         "write it as '# units: length=mm angle=deg'",
                         "the units declaration is empty");
  return TWF_OK;
}

/* The delimiter is the one of , ; tab that occurs (outside quotes) in the
 * header row; column names never contain the others. */
static twf_status detect_delim(csv_in *in, const char *p, const char *le)
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

static twf_status csv_in_run(csv_in *in)
{
  char *data = NULL;
  size_t len = 0;
  const char *p, *end;
  struct csv_parser parser;
  int ready = 0, quoted = 0;
  long quote_line = 0;
  long line = 0;
  twf_status st = read_all(in->path, &data, &len, in->err);
  if (st != TWF_OK)
    return st;
  p = data;
  end = data + len;
  if (len >= 3 && (unsigned char)p[0] == 0xEF && (unsigned char)p[1] == 0xBB &&
      (unsigned char)p[2] == 0xBF)
    p += 3;
  while (p < end && in->status == TWF_OK) {
    const char *nl = memchr(p, '\n', (size_t)(end - p));
    const char *le = nl ? nl + 1 : end;
    const char *s;
    size_t n;
    in->cur_line = ++line;
    if (!quoted) {
      if (line_is_blank(p, le)) {
        p = le;
        continue;
      }
      if (line_is_comment(p, le)) {
        in->status = comment_line(in, p, le);
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
  free(data);
  if (in->status != TWF_OK)
    return in->status;
  if (!ready)
    return twf_error_set(in->err, TWF_ERR_MISSING, in->path, 0, 0,
                         "a campaign file starts with a header row of column "
                         "names (see twistfit-data(5))",
                         "the file is empty: no header row");
  if (in->n_data_rows == 0)
    return twf_error_set(in->err, TWF_ERR_MISSING, in->path, in->header_line, 0,
                         "add one row per measurement below the header",
                         "no data rows after the header row");
  return TWF_OK;
}

static void csv_in_clear(csv_in *in)
{
  free(in->buf);
  free(in->off);
  free(in->fline);
  free(in->fptr);
}

/* ------------------------------------------------------------------ */
/* The reader: columns, rows, the campaign being built                 */
/* ------------------------------------------------------------------ */

typedef struct reader {
  const twf_model *m;
  twf_campaign_options opt;
  twf_warnings *w;
  twf_error *err;
  twf_campaign *c;
  locale_t c_locale;
  /* the file being read */
  const char *path;
  file_kind kind;
  unsigned char delim;
  twf_length_unit lu;
  twf_angle_unit au;
  double len_si;     /* metres per file length unit */
  double *joint_si;  /* per joint: SI per file unit */
  size_t nh;
  char **hname;      /* header names */
  long col[COL_N];   /* 1-based field of each role, 0 when absent */
  long *jcol;        /* per joint: 1-based field, 0 when absent */
  double *qbuf;
  /* joints-bearing file, for the limit checks at the end */
  const char *jpath;
  twf_length_unit j_lu;
  twf_angle_unit j_au;
  long *jcol_saved;
  long jpose_col;
  double *joint_si_saved;
  /* builder */
  size_t cap_ids, cap_q, cap_lines, cap_meas, cap_pt, cap_set, cap_npts;
  idmap poses;
  long *pt_line;     /* cap poses x n_targets: line of (pose, target), 0 */
  int *pose_set;     /* two-file: set from the joints file, -1 none */
  size_t *pose_npts; /* two-file: points per pose */
  /* two-file: pose ids of the points file missing from the joints file */
  char (*unk)[TWF_NAME_MAX];
  size_t n_unk, cap_unk;
  idmap unk_map;
  long unk_line;
} reader;

static twf_status nomem(reader *r)
{
  return twf_error_set(r->err, TWF_ERR_NOMEM, r->path, 0, 0, NULL,
                       "out of memory reading the campaign");
}

/* An error about field col (1-based) of row; 0 = the row as a whole. */
static twf_status rerr(reader *r, const csv_row *row, long col, twf_status st,
                       const char *hint, const char *fmt, ...)
    __attribute__((format(printf, 6, 7)));
static twf_status rerr(reader *r, const csv_row *row, long col, twf_status st,
                       const char *hint, const char *fmt, ...)
{
  char msg[TWF_ERROR_TEXT_MAX];
  long line = row ? row->line : 0;
  va_list ap;
  if (row && col > 0 && (size_t)col <= row->nf)
    line = row->fline[col - 1];
  va_start(ap, fmt);
  vsnprintf(msg, sizeof msg, fmt, ap);
  va_end(ap);
  return twf_error_set(r->err, st, r->path, line, col, hint, "%s", msg);
}

static const char *colname(const reader *r, long col)
{
  return col > 0 && (size_t)col <= r->nh ? r->hname[col - 1] : "?";
}

static void known_columns(const reader *r, char *buf, size_t n)
{
  int i;
  size_t j;
  buf[0] = '\0';
  for (i = 0; i < COL_N; i++) {
    if (!role_allowed(r->kind, i))
      continue;
    if (i == COL_JOINT) {
      for (j = 0; j < r->m->n_joints; j++)
        appendf(buf, n, "%s%s", buf[0] ? ", " : "", r->m->joints[j].name);
    } else {
      appendf(buf, n, "%s%s", buf[0] ? ", " : "", role_name[i]);
    }
  }
}

static const char *kind_label(file_kind kind)
{
  switch (kind) {
  case KIND_ONE: return "campaign file";
  case KIND_JOINTS: return "joints file";
  case KIND_POINTS: return "points file";
  }
  return "file";
}

/* Units of this file: the caller's when imposed, else the declaration,
 * else mm and deg. */
static void resolve_units(reader *r, const csv_in *in)
{
  size_t j;
  r->lu = in->decl_length ? in->length_unit : TWF_LENGTH_MM;
  r->au = in->decl_angle ? in->angle_unit : TWF_ANGLE_DEG;
  if (r->opt.length_from_caller) {
    if (in->decl_length && in->length_unit != r->opt.length_unit)
      twf_warnings_add(r->w, r->path, in->units_line, 0,
                       "the file declares length=%s; reading %s as requested",
                       twf_length_unit_name(in->length_unit),
                       twf_length_unit_name(r->opt.length_unit));
    r->lu = r->opt.length_unit;
  }
  if (r->opt.angle_from_caller) {
    if (in->decl_angle && in->angle_unit != r->opt.angle_unit)
      twf_warnings_add(r->w, r->path, in->units_line, 0,
                       "the file declares angle=%s; reading %s as requested",
                       twf_angle_unit_name(in->angle_unit),
                       twf_angle_unit_name(r->opt.angle_unit));
    r->au = r->opt.angle_unit;
  }
  r->len_si = twf_length_unit_si(r->lu);
  for (j = 0; j < r->m->n_joints; j++)
    r->joint_si[j] = r->m->joints[j].type == TWF_JOINT_PRISMATIC
                         ? r->len_si
                         : twf_angle_unit_si(r->au);
}

static twf_status map_header(reader *r, const csv_in *in, const csv_row *row)
{
  size_t k, j;
  char known[TWF_ERROR_TEXT_MAX];
  resolve_units(r, in);
  r->delim = in->delim;
  r->hname = calloc(row->nf, sizeof *r->hname);
  if (r->hname == NULL)
    return nomem(r);
  r->nh = row->nf;
  for (k = 0; k < row->nf; k++) {
    r->hname[k] = strdup(row->f[k]);
    if (r->hname[k] == NULL)
      return nomem(r);
  }
  for (k = 0; k < row->nf; k++) {
    const char *name = row->f[k];
    long col = (long)k + 1;
    int role = reserved_role(name);
    long ji = -1;
    if (name[0] == '\0')
      return rerr(r, row, col, TWF_ERR_SYNTAX,
                  "give every column a name, or remove the extra delimiter",
                  "header field %ld has no column name", col);
    if (role < 0) {
      ji = twf_model_joint_index(r->m, name);
      if (ji >= 0)
        role = COL_JOINT;
    }
    if (role < 0 || !role_allowed(r->kind, role)) {
      const char *hint =
          "column names are case-sensitive; name joint columns exactly as "
          "the model's joints, or remove the column";
      if (r->kind == KIND_JOINTS && role >= 0)
        hint = "this looks like a points file: give the joints file first";
      else if (r->kind == KIND_POINTS && role == COL_JOINT)
        hint = "this looks like a joints file: give the points file second, "
               "or use the one-file form";
      known_columns(r, known, sizeof known);
      return rerr(r, row, col, TWF_ERR_UNKNOWN, hint,
                  "unknown column '%s' in the %s; the known columns are %s",
                  name, kind_label(r->kind), known);
    }
    if (role == COL_JOINT) {
      if (r->jcol[ji] != 0)
        return rerr(r, row, col, TWF_ERR_DUPLICATE, "keep one column per name",
                    "column '%s' appears twice (fields %ld and %ld)", name,
                    r->jcol[ji], col);
      r->jcol[ji] = col;
    } else {
      if (r->col[role] != 0)
        return rerr(r, row, col, TWF_ERR_DUPLICATE, "keep one column per name",
                    "column '%s' appears twice (fields %ld and %ld)", name,
                    r->col[role], col);
      r->col[role] = col;
    }
  }
  /* Required columns, in the order a reader of the message expects. */
  if (r->col[COL_POSE] == 0)
    return rerr(r, row, 0, TWF_ERR_MISSING, "add a 'pose' column of pose ids",
                "the %s has no 'pose' column", kind_label(r->kind));
  if (r->kind != KIND_JOINTS && r->col[COL_TARGET] == 0)
    return rerr(r, row, 0, TWF_ERR_MISSING,
                "add a 'target' column naming the model's target of each row",
                "the %s has no 'target' column", kind_label(r->kind));
  if (r->kind != KIND_POINTS)
    for (j = 0; j < r->m->n_joints; j++)
      if (r->jcol[j] == 0)
        return rerr(r, row, 0, TWF_ERR_MISSING,
                    "add one column per model joint, named as in the model",
                    "the %s has no column for joint '%s' of the model",
                    kind_label(r->kind), r->m->joints[j].name);
  if (r->kind != KIND_JOINTS) {
    int i, nq = 0;
    for (i = COL_X; i <= COL_Z; i++)
      if (r->col[i] == 0)
        return rerr(r, row, 0, TWF_ERR_MISSING,
                    "add the measured coordinates as columns x, y, z",
                    "the %s has no '%s' column", kind_label(r->kind),
                    role_name[i]);
    for (i = COL_QW; i <= COL_QZ; i++)
      nq += r->col[i] != 0;
    if (nq != 0 && nq != 4)
      for (i = COL_QW; i <= COL_QZ; i++)
        if (r->col[i] == 0)
          return rerr(r, row, 0, TWF_ERR_MISSING,
                      "give all four quaternion columns qw qx qy qz, or none",
                      "the %s has quaternion columns but no '%s' column",
                      kind_label(r->kind), role_name[i]);
  }
  return TWF_OK;
}

static twf_status check_nf(reader *r, const csv_row *row)
{
  const char *hint =
      r->delim == ','
          ? "each row needs one field per header column; with ',' as "
            "delimiter numbers need a decimal point (use ';' for decimal "
            "commas)"
          : "each row needs one field per header column; look for a missing "
            "or extra delimiter";
  if (row->nf < r->nh)
    return rerr(r, row, (long)row->nf + 1, TWF_ERR_SYNTAX, hint,
                "the row has %zu fields but the header has %zu: column '%s' "
                "(field %zu) and any after it are missing", row->nf, r->nh,
                r->hname[row->nf], row->nf + 1);
  if (row->nf > r->nh)
    return rerr(r, row, (long)r->nh + 1, TWF_ERR_SYNTAX, hint,
                "the row has %zu fields but the header has %zu", row->nf, r->nh);
  return TWF_OK;
}

static int number_syntax(const char *s)
{
  int digits = 0;
  if (*s == '+' || *s == '-')
    s++;
  for (; is_digit(*s); s++)
    digits++;
  if (*s == '.')
    for (s++; is_digit(*s); s++)
      digits++;
  if (digits == 0)
    return 0;
  if (*s == 'e' || *s == 'E') {
    s++;
    if (*s == '+' || *s == '-')
      s++;
    if (!is_digit(*s))
      return 0;
    while (is_digit(*s))
      s++;
  }
  return *s == '\0';
}

static int looks_nonfinite(const char *s)
{
  if (*s == '+' || *s == '-')
    s++;
  return strncasecmp(s, "nan", 3) == 0 || strncasecmp(s, "inf", 3) == 0;
}

/* Field col (1-based) as a number in file units. */
static twf_status field_number(reader *r, const csv_row *row, long col,
                               double *out)
{
  const char *f = row->f[col - 1];
  char text[128];
  size_t n;
  char *comma, *endp;
  double v;
  while (is_blank(*f))
    f++;
  n = strlen(f);
  while (n > 0 && is_blank(f[n - 1]))
    n--;
  if (n == 0)
    return rerr(r, row, col, TWF_ERR_MISSING, "fill in the value",
                "column '%s' is empty; a number is needed", colname(r, col));
  if (n >= sizeof text)
    return rerr(r, row, col, TWF_ERR_VALUE, "write a plain decimal number",
                "column '%s': the value is too long to be a number",
                colname(r, col));
  memcpy(text, f, n);
  text[n] = '\0';
  comma = strchr(text, ',');
  if (r->delim == ';' && comma != NULL && strchr(comma + 1, ',') == NULL &&
      strchr(text, '.') == NULL)
    *comma = '.'; /* a decimal comma */
  if (looks_nonfinite(text))
    return rerr(r, row, col, TWF_ERR_VALUE,
                "replace the value by a measured one, or drop the row",
                "column '%s': '%s' is not a finite number", colname(r, col),
                text);
  if (!number_syntax(text))
    return rerr(r, row, col, TWF_ERR_VALUE,
                r->delim == ';'
                    ? "write a decimal number such as 12.5 or 12,5"
                    : "write a decimal number such as 12.5 (a decimal comma "
                      "only with ';' as delimiter)",
                "column '%s': '%s' is not a number", colname(r, col), text);
  errno = 0;
  v = strtod(text, &endp);
  if (*endp != '\0' || !isfinite(v))
    return rerr(r, row, col, TWF_ERR_VALUE,
                "replace the value by a measured one, or drop the row",
                "column '%s': '%s' is not a finite number", colname(r, col),
                text);
  *out = v;
  return TWF_OK;
}

static int field_empty(const csv_row *row, long col)
{
  const char *f = row->f[col - 1];
  while (is_blank(*f))
    f++;
  return *f == '\0';
}

static twf_status field_id(reader *r, const csv_row *row, long col,
                           char out[TWF_NAME_MAX], const char *what)
{
  const char *f = row->f[col - 1];
  const char *s;
  if (f[0] == '\0')
    return rerr(r, row, col, TWF_ERR_MISSING, "fill in the field",
                "column '%s' is empty; a %s is needed", colname(r, col), what);
  /* A line break in an id would break every report that prints it. */
  for (s = f; *s; s++)
    if ((unsigned char)*s < 0x20 || *s == 0x7f)
      return rerr(r, row, col, TWF_ERR_VALUE,
                  "remove line breaks and tabs from ids (check the quotes)",
                  "column '%s': the %s contains a control character",
                  colname(r, col), what);
  if (twf_strlcpy(out, f, TWF_NAME_MAX) != 0)
    return rerr(r, row, col, TWF_ERR_VALUE, "shorten it",
                "column '%s': the %s is longer than %d bytes", colname(r, col),
                what, TWF_NAME_MAX - 1);
  return TWF_OK;
}

static twf_status field_target(reader *r, const csv_row *row, size_t *out)
{
  long col = r->col[COL_TARGET];
  char name[TWF_NAME_MAX], list[TWF_ERROR_TEXT_MAX];
  long t;
  size_t k;
  twf_status st = field_id(r, row, col, name, "target name");
  if (st != TWF_OK)
    return st;
  t = twf_model_target_index(r->m, name);
  if (t >= 0) {
    *out = (size_t)t;
    return TWF_OK;
  }
  if (r->m->n_targets == 0)
    return rerr(r, row, col, TWF_ERR_UNKNOWN,
                "declare the targets in the model file",
                "target '%s' is not declared: the model declares no targets",
                name);
  list[0] = '\0';
  for (k = 0; k < r->m->n_targets; k++)
    appendf(list, sizeof list, "%s%s", k ? ", " : "", r->m->targets[k].name);
  return rerr(r, row, col, TWF_ERR_UNKNOWN,
              "name each target as in the model (names are case-sensitive), "
              "or declare it in the model",
              "target '%s' is not declared by the model; the declared targets "
              "are %s", name, list);
}

static twf_status field_joints(reader *r, const csv_row *row, double *q)
{
  size_t j;
  for (j = 0; j < r->m->n_joints; j++) {
    double v;
    twf_status st = field_number(r, row, r->jcol[j], &v);
    if (st != TWF_OK)
      return st;
    q[j] = v * r->joint_si[j];
  }
  return TWF_OK;
}

/* set: -1 when absent or empty. */
static twf_status field_set(reader *r, const csv_row *row, int *set)
{
  long col = r->col[COL_SET];
  const char *f;
  *set = -1;
  if (col == 0 || field_empty(row, col))
    return TWF_OK;
  f = row->f[col - 1];
  if (strcmp(f, "fit") == 0)
    *set = TWF_SET_FIT;
  else if (strcmp(f, "check") == 0)
    *set = TWF_SET_CHECK;
  else
    return rerr(r, row, col, TWF_ERR_VALUE,
                "use 'fit' or 'check', or leave it empty for 'fit'",
                "column 'set': '%s' is not a set name", f);
  return TWF_OK;
}

static twf_status field_meas(reader *r, const csv_row *row,
                             twf_measurement *ms, int *set)
{
  twf_status st;
  int i;
  memset(ms, 0, sizeof *ms);
  ms->quat[0] = 1.0;
  for (i = 0; i < 3; i++) {
    double v;
    st = field_number(r, row, r->col[COL_X + i], &v);
    if (st != TWF_OK)
      return st;
    ms->pos[i] = v * r->len_si;
  }
  if (r->col[COL_QW] != 0) {
    int n_empty = 0;
    for (i = 0; i < 4; i++)
      n_empty += field_empty(row, r->col[COL_QW + i]);
    if (n_empty != 0 && n_empty != 4) {
      for (i = 0; i < 4 && !field_empty(row, r->col[COL_QW + i]); i++)
        ;
      return rerr(r, row, r->col[COL_QW + i], TWF_ERR_MISSING,
                  "give all four of qw qx qy qz, or leave all four empty for "
                  "a position-only row",
                  "column '%s' is empty but other quaternion fields are not",
                  colname(r, r->col[COL_QW + i]));
    }
    if (n_empty == 0) {
      double norm;
      for (i = 0; i < 4; i++) {
        st = field_number(r, row, r->col[COL_QW + i], &ms->quat[i]);
        if (st != TWF_OK)
          return st;
      }
      norm = sqrt(ms->quat[0] * ms->quat[0] + ms->quat[1] * ms->quat[1] +
                  ms->quat[2] * ms->quat[2] + ms->quat[3] * ms->quat[3]);
      if (!(fabs(norm - 1.0) <= QUAT_NORM_TOL))
        return rerr(r, row, r->col[COL_QW], TWF_ERR_VALUE,
                    "check the column order (qw qx qy qz) and write the "
                    "quaternion with at least 7 significant digits",
                    "the quaternion (%.9g %.9g %.9g %.9g) has norm %.9g, not 1 "
                    "within %g", ms->quat[0], ms->quat[1], ms->quat[2],
                    ms->quat[3], norm, QUAT_NORM_TOL);
      for (i = 0; i < 4; i++)
        ms->quat[i] /= norm;
      ms->has_orientation = 1;
    }
  }
  if (r->col[COL_SIGMA] != 0 && !field_empty(row, r->col[COL_SIGMA])) {
    double s;
    st = field_number(r, row, r->col[COL_SIGMA], &s);
    if (st != TWF_OK)
      return st;
    if (s < 0)
      return rerr(r, row, r->col[COL_SIGMA], TWF_ERR_VALUE,
                  "give the standard deviation as a positive number",
                  "column 'sigma': %g is negative", s);
    if (s == 0)
      return rerr(r, row, r->col[COL_SIGMA], TWF_ERR_VALUE,
                  "leave the field empty when the standard deviation is not "
                  "known",
                  "column 'sigma': a standard deviation of 0 gives infinite "
                  "weight");
    ms->sigma = s * r->len_si;
    /* 1 nm to 1 m spans every instrument; outside it the value is a slip
     * (a unit, a variance for a standard deviation) and would wreck the
     * weights */
    if (ms->sigma < 1e-9 || ms->sigma > 1.0)
      return rerr(r, row, r->col[COL_SIGMA], TWF_ERR_VALUE,
                  "give the standard deviation of one coordinate in the file's length unit "
                  "(between 1 nm and 1 m)",
                  "column 'sigma': %g is outside 1 nm to 1 m", s);
  }
  st = field_set(r, row, set);
  if (st != TWF_OK)
    return st;
  ms->set = *set == TWF_SET_CHECK ? TWF_SET_CHECK : TWF_SET_FIT;
  ms->line = row->line;
  return TWF_OK;
}

static twf_status pose_add(reader *r, const char *id, const double *q,
                           long line, size_t *index)
{
  twf_campaign *c = r->c;
  size_t nj = c->n_joints, nt = r->m->n_targets, n = c->n_poses + 1, k;
  size_t old_pt = r->cap_pt;
  if (grow((void **)&c->pose_ids, &r->cap_ids, n, sizeof *c->pose_ids) ||
      grow((void **)&c->q, &r->cap_q, n * (nj ? nj : 1), sizeof *c->q) ||
      grow((void **)&c->pose_lines, &r->cap_lines, n, sizeof *c->pose_lines) ||
      grow((void **)&r->pt_line, &r->cap_pt, n * (nt ? nt : 1), sizeof *r->pt_line) ||
      grow((void **)&r->pose_set, &r->cap_set, n, sizeof *r->pose_set) ||
      grow((void **)&r->pose_npts, &r->cap_npts, n, sizeof *r->pose_npts))
    return nomem(r);
  for (k = old_pt; k < r->cap_pt; k++)
    r->pt_line[k] = 0;
  twf_strlcpy(c->pose_ids[c->n_poses], id, TWF_NAME_MAX);
  memcpy(c->q + c->n_poses * nj, q, nj * sizeof *q);
  c->pose_lines[c->n_poses] = line;
  r->pose_set[c->n_poses] = -1;
  r->pose_npts[c->n_poses] = 0;
  if (idmap_add(&r->poses, c->pose_ids, n, c->n_poses))
    return nomem(r);
  *index = c->n_poses;
  c->n_poses = n;
  return TWF_OK;
}

static twf_status meas_add(reader *r, const twf_measurement *ms)
{
  twf_campaign *c = r->c;
  if (grow((void **)&c->meas, &r->cap_meas, c->n_meas + 1, sizeof *c->meas))
    return nomem(r);
  c->meas[c->n_meas++] = *ms;
  return TWF_OK;
}

/* A (pose, target) pair may appear once. */
static twf_status pair_check(reader *r, const csv_row *row, size_t pose,
                             size_t target)
{
  long *first = &r->pt_line[pose * r->m->n_targets + target];
  if (*first != 0)
    return rerr(r, row, r->col[COL_TARGET], TWF_ERR_DUPLICATE,
                "measure each target once per pose; give repeated visits "
                "their own pose ids",
                "pose '%s' target '%s' appears twice (first at line %ld)",
                r->c->pose_ids[pose], r->m->targets[target].name, *first);
  *first = row->line;
  return TWF_OK;
}

static const char *joint_unit_name(const reader *r, size_t j)
{
  return r->m->joints[j].type == TWF_JOINT_PRISMATIC
             ? twf_length_unit_name(r->lu)
             : twf_angle_unit_name(r->au);
}

static twf_status row_one(reader *r, const csv_row *row)
{
  char id[TWF_NAME_MAX];
  size_t target, pose, j, nj = r->m->n_joints;
  twf_measurement ms;
  int set;
  twf_status st;
  if ((st = check_nf(r, row)) != TWF_OK ||
      (st = field_id(r, row, r->col[COL_POSE], id, "pose id")) != TWF_OK ||
      (st = field_target(r, row, &target)) != TWF_OK ||
      (st = field_joints(r, row, r->qbuf)) != TWF_OK ||
      (st = field_meas(r, row, &ms, &set)) != TWF_OK)
    return st;
  pose = idmap_find(&r->poses, r->c->pose_ids, id);
  if (pose == NONE) {
    if ((st = pose_add(r, id, r->qbuf, row->line, &pose)) != TWF_OK)
      return st;
  } else {
    const double *q0 = r->c->q + pose * nj;
    for (j = 0; j < nj; j++)
      if (q0[j] != r->qbuf[j])
        return rerr(r, row, r->jcol[j], TWF_ERR_VALUE,
                    "every row of a pose repeats its joint values; give "
                    "different poses different ids",
                    "pose '%s' repeats with other joint values: '%s' is %.10g "
                    "%s here but %.10g %s at line %ld", id,
                    r->m->joints[j].name, r->qbuf[j] / r->joint_si[j],
                    joint_unit_name(r, j), q0[j] / r->joint_si[j],
                    joint_unit_name(r, j), r->c->pose_lines[pose]);
  }
  if ((st = pair_check(r, row, pose, target)) != TWF_OK)
    return st;
  ms.pose = pose;
  ms.target = target;
  return meas_add(r, &ms);
}

static twf_status row_joints(reader *r, const csv_row *row)
{
  char id[TWF_NAME_MAX];
  size_t pose;
  int set;
  twf_status st;
  if ((st = check_nf(r, row)) != TWF_OK ||
      (st = field_id(r, row, r->col[COL_POSE], id, "pose id")) != TWF_OK ||
      (st = field_joints(r, row, r->qbuf)) != TWF_OK ||
      (st = field_set(r, row, &set)) != TWF_OK)
    return st;
  pose = idmap_find(&r->poses, r->c->pose_ids, id);
  if (pose != NONE)
    return rerr(r, row, r->col[COL_POSE], TWF_ERR_DUPLICATE,
                "give every pose of the joints file its own id",
                "pose '%s' appears twice in the joints file (first at line %ld)",
                id, r->c->pose_lines[pose]);
  if ((st = pose_add(r, id, r->qbuf, row->line, &pose)) != TWF_OK)
    return st;
  r->pose_set[pose] = set;
  return TWF_OK;
}

static twf_status row_points(reader *r, const csv_row *row)
{
  char id[TWF_NAME_MAX];
  size_t target, pose;
  twf_measurement ms;
  int set;
  twf_status st;
  if ((st = check_nf(r, row)) != TWF_OK ||
      (st = field_id(r, row, r->col[COL_POSE], id, "pose id")) != TWF_OK ||
      (st = field_target(r, row, &target)) != TWF_OK ||
      (st = field_meas(r, row, &ms, &set)) != TWF_OK)
    return st;
  pose = idmap_find(&r->poses, r->c->pose_ids, id);
  if (pose == NONE) {
    /* Collect them all so that the error can list them. */
    if (idmap_find(&r->unk_map, r->unk, id) == NONE) {
      if (grow((void **)&r->unk, &r->cap_unk, r->n_unk + 1, sizeof *r->unk))
        return nomem(r);
      twf_strlcpy(r->unk[r->n_unk], id, TWF_NAME_MAX);
      if (idmap_add(&r->unk_map, r->unk, r->n_unk + 1, r->n_unk))
        return nomem(r);
      r->n_unk++;
    }
    if (r->unk_line == 0)
      r->unk_line = row->line;
    return TWF_OK;
  }
  if ((st = pair_check(r, row, pose, target)) != TWF_OK)
    return st;
  if (set < 0 && r->pose_set[pose] >= 0)
    ms.set = (twf_meas_set)r->pose_set[pose];
  ms.pose = pose;
  ms.target = target;
  r->pose_npts[pose]++;
  return meas_add(r, &ms);
}

static twf_status reader_row(reader *r, csv_in *in, const csv_row *row,
                             int is_header)
{
  if (is_header)
    return map_header(r, in, row);
  switch (r->kind) {
  case KIND_ONE: return row_one(r, row);
  case KIND_JOINTS: return row_joints(r, row);
  case KIND_POINTS: return row_points(r, row);
  }
  return TWF_ERR_INVALID;
}

/* Reset the per-file state and read path as kind. */
static twf_status read_file(reader *r, const char *path, file_kind kind)
{
  csv_in in;
  size_t k;
  twf_status st;
  for (k = 0; k < r->nh; k++)
    free(r->hname[k]);
  free(r->hname);
  r->hname = NULL;
  r->nh = 0;
  memset(r->col, 0, sizeof r->col);
  memset(r->jcol, 0, r->m->n_joints * sizeof *r->jcol);
  r->path = path;
  r->kind = kind;
  memset(&in, 0, sizeof in);
  in.r = r;
  in.path = path;
  in.err = r->err;
  st = csv_in_run(&in);
  csv_in_clear(&in);
  if (st == TWF_OK && kind != KIND_POINTS) {
    r->jpath = path;
    r->j_lu = r->lu;
    r->j_au = r->au;
    r->jpose_col = r->col[COL_POSE];
    memcpy(r->jcol_saved, r->jcol, r->m->n_joints * sizeof *r->jcol);
    memcpy(r->joint_si_saved, r->joint_si, r->m->n_joints * sizeof *r->joint_si);
  }
  return st;
}

/* ------------------------------------------------------------------ */
/* Joint limits and unit suspicions                                    */
/* ------------------------------------------------------------------ */

static int within(const twf_joint *jt, double v, double tol)
{
  return v >= jt->limit_lo - tol && v <= jt->limit_hi + tol;
}

/* When values outside the limits would all fit if the file's unit were
 * the other usual one, say so. */
static void unit_hint(const reader *r, size_t j, char *buf, size_t n)
{
  const twf_campaign *c = r->c;
  const twf_joint *jt = &r->m->joints[j];
  double f = r->joint_si_saved[j], alt = 0, maxabs = 0;
  const char *what = NULL, *decl = NULL;
  size_t p;
  int fits = 1;
  buf[0] = '\0';
  for (p = 0; p < c->n_poses; p++)
    maxabs = fmax(maxabs, fabs(c->q[p * c->n_joints + j] / f));
  if (jt->type == TWF_JOINT_REVOLUTE) {
    if (r->j_au == TWF_ANGLE_DEG && maxabs < ONE_TURN_RAD &&
        jt->limit_hi - jt->limit_lo > WIDE_ANGLE) {
      alt = 1.0, what = "radians read as degrees", decl = "angle=rad";
    } else if (r->j_au == TWF_ANGLE_RAD && maxabs > ONE_TURN_RAD) {
      alt = TWF_PI / 180.0, what = "degrees read as radians", decl = "angle=deg";
    }
  } else {
    if (r->j_lu == TWF_LENGTH_MM && maxabs < 1.0 &&
        jt->limit_hi - jt->limit_lo > WIDE_STROKE) {
      alt = 1.0, what = "metres read as millimetres", decl = "length=m";
    } else if (r->j_lu == TWF_LENGTH_M && maxabs > 1.0) {
      alt = 1e-3, what = "millimetres read as metres", decl = "length=mm";
    }
  }
  if (what == NULL)
    return;
  for (p = 0; p < c->n_poses && fits; p++)
    fits = within(jt, c->q[p * c->n_joints + j] / f * alt, r->opt.limit_tolerance);
  if (fits)
    snprintf(buf, n,
             "the values look like %s: declare %s ('# units: %s' above the "
             "header, or on the command line)", what, decl, decl);
}

static twf_status check_limits(reader *r)
{
  const twf_campaign *c = r->c;
  const twf_model *m = r->m;
  size_t j, p, nj = c->n_joints;
  size_t n_wide = 0, n_small = 0;
  double maxall = 0;
  char hint[TWF_ERROR_TEXT_MAX], names[TWF_ERROR_TEXT_MAX];
  for (j = 0; j < nj; j++) {
    const twf_joint *jt = &m->joints[j];
    double f = r->joint_si_saved[j];
    const char *un = jt->type == TWF_JOINT_PRISMATIC ? twf_length_unit_name(r->j_lu)
                                                     : twf_angle_unit_name(r->j_au);
    size_t n_out = 0, first = 0;
    if (!jt->has_limits)
      continue;
    for (p = 0; p < c->n_poses; p++)
      if (!within(jt, c->q[p * nj + j], r->opt.limit_tolerance)) {
        if (n_out++ == 0)
          first = p;
      }
    if (n_out == 0)
      continue;
    unit_hint(r, j, hint, sizeof hint);
    if (r->opt.limits_are_errors)
      return twf_error_set(
          r->err, TWF_ERR_LIMIT, r->jpath, c->pose_lines[first],
          r->jcol_saved[j],
          hint[0] ? hint
                  : "check the joint columns and units, or the model's limits",
          "column '%s': %.10g %s at pose '%s' lies outside the joint's limits "
          "[%.10g, %.10g] %s (%zu of %zu values outside)", jt->name,
          c->q[first * nj + j] / f, un, c->pose_ids[first], jt->limit_lo / f,
          jt->limit_hi / f, un, n_out, c->n_poses);
    twf_warnings_add(r->w, r->jpath, c->pose_lines[first], r->jcol_saved[j],
                     "joint '%s': %zu of %zu values lie outside its limits "
                     "[%.10g, %.10g] %s, the first %.10g %s at pose '%s'%s%s",
                     jt->name, n_out, c->n_poses, jt->limit_lo / f,
                     jt->limit_hi / f, un, c->q[first * nj + j] / f, un,
                     c->pose_ids[first], hint[0] ? "; " : "", hint);
  }
  /* Radians read as degrees mostly stay inside wide limits: look at the
   * whole campaign. A calibration campaign that moves no joint by more than
   * a few degrees could not calibrate anything anyway. */
  if (r->j_au != TWF_ANGLE_DEG || c->n_poses < 2)
    return TWF_OK;
  names[0] = '\0';
  for (j = 0; j < nj; j++) {
    const twf_joint *jt = &m->joints[j];
    double maxabs = 0;
    if (jt->type != TWF_JOINT_REVOLUTE || !jt->has_limits ||
        jt->limit_hi - jt->limit_lo <= WIDE_ANGLE)
      continue;
    n_wide++;
    for (p = 0; p < c->n_poses; p++)
      maxabs = fmax(maxabs, fabs(c->q[p * nj + j] / r->joint_si_saved[j]));
    maxall = fmax(maxall, maxabs);
    if (maxabs < ONE_TURN_RAD) {
      n_small++;
      appendf(names, sizeof names, "%s%s", names[0] ? ", " : "", jt->name);
    }
  }
  if (n_wide > 0 && n_small == n_wide && maxall > 0)
    twf_warnings_add(r->w, r->jpath, 0, 0,
                     "the values look like radians read as degrees: no "
                     "revolute joint moves beyond +-%.1f deg over the %zu "
                     "poses (%s); declare angle=rad ('# units: angle=rad' "
                     "above the header, or on the command line) if they are "
                     "radians", ONE_TURN_RAD, c->n_poses, names);
  return TWF_OK;
}

/* ------------------------------------------------------------------ */
/* Entry points                                                        */
/* ------------------------------------------------------------------ */

twf_campaign_options twf_campaign_default_options(void)
{
  twf_campaign_options o;
  memset(&o, 0, sizeof o);
  o.length_from_caller = 0;
  o.angle_from_caller = 0;
  o.length_unit = TWF_LENGTH_MM;
  o.angle_unit = TWF_ANGLE_DEG;
  o.limits_are_errors = 0;
  o.limit_tolerance = 1e-9;
  return o;
}

twf_campaign *twf_campaign_alloc(size_t n_joints, size_t n_poses, size_t n_meas)
{
  twf_campaign *c = calloc(1, sizeof *c);
  size_t k;
  if (c == NULL)
    return NULL;
  c->n_joints = n_joints;
  c->n_poses = n_poses;
  c->n_meas = n_meas;
  c->pose_ids = calloc(n_poses ? n_poses : 1, sizeof *c->pose_ids);
  c->q = calloc(n_poses * n_joints > 0 ? n_poses * n_joints : 1, sizeof *c->q);
  c->pose_lines = calloc(n_poses ? n_poses : 1, sizeof *c->pose_lines);
  c->meas = calloc(n_meas ? n_meas : 1, sizeof *c->meas);
  if (!c->pose_ids || !c->q || !c->pose_lines || !c->meas) {
    twf_campaign_free(c);
    return NULL;
  }
  for (k = 0; k < n_meas; k++) {
    c->meas[k].quat[0] = 1.0;
    c->meas[k].set = TWF_SET_FIT;
  }
  return c;
}

void twf_campaign_free(twf_campaign *c)
{
  if (c == NULL)
    return;
  free(c->pose_ids);
  free(c->q);
  free(c->pose_lines);
  free(c->meas);
  free(c);
}

static twf_status reader_init(reader *r, const twf_model *m,
                              const twf_campaign_options *opt,
                              twf_warnings *w, twf_error *err)
{
  size_t j, nj;
  memset(r, 0, sizeof *r);
  r->err = err;
  r->w = w;
  r->m = m;
  r->c_locale = (locale_t)0;
  if (m == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "no model given to read the campaign against");
  r->opt = opt ? *opt : twf_campaign_default_options();
  if (!(r->opt.limit_tolerance >= 0) || !isfinite(r->opt.limit_tolerance) ||
      (unsigned)r->opt.length_unit > TWF_LENGTH_IN ||
      (unsigned)r->opt.angle_unit > TWF_ANGLE_MRAD)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "invalid campaign options (units or limit tolerance)");
  nj = m->n_joints;
  if (nj == 0)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "the model has no joints");
  for (j = 0; j < nj; j++)
    if (reserved_role(m->joints[j].name) >= 0)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0,
                           "rename the joint in the model",
                           "model joint '%s' has the name of a reserved "
                           "campaign column", m->joints[j].name);
  r->c = calloc(1, sizeof *r->c);
  r->joint_si = calloc(nj, sizeof *r->joint_si);
  r->joint_si_saved = calloc(nj, sizeof *r->joint_si_saved);
  r->jcol = calloc(nj, sizeof *r->jcol);
  r->jcol_saved = calloc(nj, sizeof *r->jcol_saved);
  r->qbuf = calloc(nj, sizeof *r->qbuf);
  if (!r->c || !r->joint_si || !r->joint_si_saved || !r->jcol ||
      !r->jcol_saved || !r->qbuf)
    return nomem(r);
  r->c->n_joints = nj;
  /* Numbers are read and written in the C locale; uselocale is per thread
   * and restored before returning, so no global state changes. */
  r->c_locale = newlocale(LC_ALL_MASK, "C", (locale_t)0);
  return TWF_OK;
}

static void reader_clear(reader *r)
{
  size_t k;
  for (k = 0; k < r->nh; k++)
    free(r->hname[k]);
  free(r->hname);
  free(r->joint_si);
  free(r->joint_si_saved);
  free(r->jcol);
  free(r->jcol_saved);
  free(r->qbuf);
  free(r->poses.slot);
  free(r->pt_line);
  free(r->pose_set);
  free(r->pose_npts);
  free(r->unk);
  free(r->unk_map.slot);
  if (r->c_locale != (locale_t)0)
    freelocale(r->c_locale);
  twf_campaign_free(r->c);
}

static twf_campaign *reader_finish(reader *r, twf_status st)
{
  twf_campaign *c = NULL;
  size_t k;
  if (st == TWF_OK)
    st = check_limits(r);
  if (st == TWF_OK) {
    c = r->c;
    r->c = NULL;
    for (k = 0; k < c->n_meas; k++)
      c->has_orientation_any |= c->meas[k].has_orientation;
  }
  reader_clear(r);
  return c;
}

static void list_ids(char *buf, size_t n, char (*ids)[TWF_NAME_MAX],
                     const size_t *which, size_t count)
{
  size_t k;
  buf[0] = '\0';
  for (k = 0; k < count && k < LIST_IDS; k++)
    appendf(buf, n, "%s'%s'", k ? ", " : "", ids[which ? which[k] : k]);
  if (count > LIST_IDS)
    appendf(buf, n, " and %zu more", count - LIST_IDS);
}

/* Every reader entry point parses in the C locale (so the caller's locale
 * cannot change what a number means) and ends through reader_finish. */
static twf_status reader_begin(reader *r, const twf_model *m, const twf_campaign_options *opt,
                               twf_warnings *w, twf_error *err, locale_t *old)
{
  twf_status st = reader_init(r, m, opt, w, err);
  *old = (locale_t)0;
  if (r->c_locale != (locale_t)0)
    *old = uselocale(r->c_locale);
  return st;
}

static twf_campaign *reader_end(reader *r, twf_status st, locale_t old)
{
  twf_campaign *c = reader_finish(r, st);
  if (old != (locale_t)0)
    uselocale(old);
  return c;
}

twf_campaign *twf_campaign_read(const char *path, const twf_model *m,
                                const twf_campaign_options *opt,
                                twf_warnings *w, twf_error *err)
{
  reader r;
  locale_t old;
  twf_status st;
  twf_error_clear(err);
  if (path == NULL) {
    twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "no campaign file given");
    return NULL;
  }
  st = reader_begin(&r, m, opt, w, err, &old);
  if (st == TWF_OK)
    st = read_file(&r, path, KIND_ONE);
  return reader_end(&r, st, old);
}

twf_campaign *twf_campaign_read_pair(const char *joints_path,
                                     const char *points_path,
                                     const twf_model *m,
                                     const twf_campaign_options *opt,
                                     twf_warnings *w, twf_error *err)
{
  reader r;
  locale_t old;
  twf_status st;
  twf_error_clear(err);
  if (joints_path == NULL || points_path == NULL) {
    twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                  "the two-file form needs a joints file and a points file");
    return NULL;
  }
  st = reader_begin(&r, m, opt, w, err, &old);
  if (st == TWF_OK)
    st = read_file(&r, joints_path, KIND_JOINTS);
  if (st == TWF_OK)
    st = read_file(&r, points_path, KIND_POINTS);
  if (st == TWF_OK && r.n_unk > 0) {
    char list[TWF_ERROR_TEXT_MAX];
    list_ids(list, sizeof list, r.unk, NULL, r.n_unk);
    st = twf_error_set(err, TWF_ERR_MISSING, points_path, r.unk_line,
                       r.col[COL_POSE],
                       "every pose of the points file needs its joint values "
                       "in the joints file; check that both files come from "
                       "the same campaign",
                       "%zu pose id%s of the points file %s no row in the "
                       "joints file: %s", r.n_unk, r.n_unk == 1 ? "" : "s",
                       r.n_unk == 1 ? "has" : "have", list);
  }
  if (st == TWF_OK) {
    size_t k, n = 0, *which = malloc((r.c->n_poses ? r.c->n_poses : 1) * sizeof *which);
    if (which == NULL) {
      st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL,
                         "out of memory reading the campaign");
    } else {
      for (k = 0; k < r.c->n_poses; k++)
        if (r.pose_npts[k] == 0)
          which[n++] = k;
      if (n > 0 && n == r.c->n_poses) {
        st = twf_error_set(err, TWF_ERR_MISSING, points_path, 0, 0,
                           "check that both files come from the same campaign",
                           "no pose of the joints file has points in the points file");
      } else if (n > 0) {
        /* A pose the instrument missed (a broken beam, a target out of
         * sight) is common: say which, and leave it out of the campaign. */
        char list[TWF_ERROR_TEXT_MAX];
        size_t *map = malloc(r.c->n_poses * sizeof *map), kept = 0, i;
        list_ids(list, sizeof list, r.c->pose_ids, which, n);
        twf_warnings_add(w, joints_path, r.c->pose_lines[which[0]], r.jpose_col,
                         "%zu pose%s of the joints file %s no points in the points file "
                         "and %s left out: %s", n, n == 1 ? "" : "s", n == 1 ? "has" : "have",
                         n == 1 ? "is" : "are", list);
        if (map == NULL) {
          st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL,
                             "out of memory reading the campaign");
        } else {
          for (k = 0; k < r.c->n_poses; k++) {
            map[k] = kept;
            if (r.pose_npts[k] == 0)
              continue;
            if (kept != k) {
              memcpy(r.c->pose_ids[kept], r.c->pose_ids[k], sizeof r.c->pose_ids[k]);
              memcpy(r.c->q + kept * r.c->n_joints, r.c->q + k * r.c->n_joints,
                     r.c->n_joints * sizeof *r.c->q);
              r.c->pose_lines[kept] = r.c->pose_lines[k];
            }
            kept++;
          }
          for (i = 0; i < r.c->n_meas; i++)
            r.c->meas[i].pose = map[r.c->meas[i].pose];
          r.c->n_poses = kept;
          free(map);
        }
      }
      free(which);
    }
  }
  return reader_end(&r, st, old);
}

twf_campaign *twf_campaign_read_joints(const char *joints_path,
                                       const twf_model *m,
                                       const twf_campaign_options *opt,
                                       twf_warnings *w, twf_error *err)
{
  reader r;
  locale_t old;
  twf_status st;
  twf_error_clear(err);
  if (joints_path == NULL) {
    twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "no joints file given");
    return NULL;
  }
  st = reader_begin(&r, m, opt, w, err, &old);
  if (st == TWF_OK)
    st = read_file(&r, joints_path, KIND_JOINTS);
  return reader_end(&r, st, old);
}

/* ------------------------------------------------------------------ */
/* Writer                                                              */
/* ------------------------------------------------------------------ */

/* Ids go out bare unless the reader would take them apart. */
static void put_text(FILE *out, const char *s)
{
  size_t n = strlen(s);
  int quote = n == 0 || s[0] == '#' || is_blank(s[0]) || is_blank(s[n - 1]) ||
              strpbrk(s, ",;\t\"\r\n") != NULL;
  if (quote)
    csv_fwrite(out, s, strlen(s));
  else
    fputs(s, out);
}

twf_status twf_campaign_write(const twf_campaign *c, const twf_model *m,
                              twf_length_unit length_unit,
                              twf_angle_unit angle_unit, FILE *out,
                              twf_error *err)
{
  size_t j, k, p, *order = NULL, *count = NULL, nj;
  double lf, af;
  int any_sigma = 0, any_orient = 0;
  locale_t loc, old = (locale_t)0;
  twf_error_clear(err);
  if (c == NULL || m == NULL || out == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "campaign, model and output are required");
  if ((unsigned)length_unit > TWF_LENGTH_IN || (unsigned)angle_unit > TWF_ANGLE_MRAD)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "invalid unit");
  nj = c->n_joints;
  if (nj != m->n_joints)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "the campaign has %zu joints but the model %zu", nj,
                         m->n_joints);
  for (k = 0; k < c->n_meas; k++) {
    if (c->meas[k].pose >= c->n_poses || c->meas[k].target >= m->n_targets)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "measurement %zu has a pose or target index out of "
                           "range", k);
    any_sigma |= c->meas[k].sigma > 0;
    any_orient |= c->meas[k].has_orientation;
  }
  /* Group rows by pose (a counting sort keeps the order within a pose). */
  count = calloc(c->n_poses + 1, sizeof *count);
  order = malloc((c->n_meas ? c->n_meas : 1) * sizeof *order);
  if (count == NULL || order == NULL) {
    free(count);
    free(order);
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL,
                         "out of memory writing the campaign");
  }
  for (k = 0; k < c->n_meas; k++)
    count[c->meas[k].pose + 1]++;
  for (p = 0; p < c->n_poses; p++)
    if (count[p + 1] == 0) {
      twf_status st = twf_error_set(
          err, TWF_ERR_INVALID, NULL, 0, 0,
          "drop the pose, or write the two files yourself",
          "pose '%s' has no measurement: the one-file form cannot hold it",
          c->pose_ids[p]);
      free(count);
      free(order);
      return st;
    }
  for (p = 0; p < c->n_poses; p++)
    count[p + 1] += count[p];
  for (k = 0; k < c->n_meas; k++)
    order[count[c->meas[k].pose]++] = k;

  loc = newlocale(LC_ALL_MASK, "C", (locale_t)0);
  if (loc != (locale_t)0)
    old = uselocale(loc);
  lf = twf_length_unit_si(length_unit);
  af = twf_angle_unit_si(angle_unit);
  fprintf(out, "# units: length=%s angle=%s\n", twf_length_unit_name(length_unit),
          twf_angle_unit_name(angle_unit));
  fputs("pose,target", out);
  for (j = 0; j < nj; j++) {
    fputc(',', out);
    put_text(out, m->joints[j].name);
  }
  fputs(",x,y,z", out);
  if (any_orient)
    fputs(",qw,qx,qy,qz", out);
  if (any_sigma)
    fputs(",sigma", out);
  fputs(",set\n", out);
  for (k = 0; k < c->n_meas; k++) {
    const twf_measurement *ms = &c->meas[order[k]];
    put_text(out, c->pose_ids[ms->pose]);
    fputc(',', out);
    put_text(out, m->targets[ms->target].name);
    for (j = 0; j < nj; j++)
      fprintf(out, ",%.17g",
              c->q[ms->pose * nj + j] /
                  (m->joints[j].type == TWF_JOINT_PRISMATIC ? lf : af));
    for (j = 0; j < 3; j++)
      fprintf(out, ",%.17g", ms->pos[j] / lf);
    if (any_orient) {
      if (ms->has_orientation)
        fprintf(out, ",%.17g,%.17g,%.17g,%.17g", ms->quat[0], ms->quat[1],
                ms->quat[2], ms->quat[3]);
      else
        fputs(",,,,", out);
    }
    if (any_sigma) {
      if (ms->sigma > 0)
        fprintf(out, ",%.17g", ms->sigma / lf);
      else
        fputc(',', out);
    }
    fputs(ms->set == TWF_SET_CHECK ? ",check\n" : ",fit\n", out);
  }
  if (old != (locale_t)0)
    uselocale(old);
  if (loc != (locale_t)0)
    freelocale(loc);
  free(count);
  free(order);
  if (ferror(out))
    return twf_error_set(err, TWF_ERR_IO, NULL, 0, 0, NULL,
                         "cannot write the campaign: %s", strerror(errno));
  return TWF_OK;
}
