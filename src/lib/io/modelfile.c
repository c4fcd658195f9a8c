/* modelfile.c: reading and writing model files, twistfit-model(5).
 *
 * The reader works in two passes. The first runs libinih over the file
 * through our own line reader, which does what inih cannot do safely by
 * itself: it refuses lines longer than inih's buffer (inih would split them
 * silently and hand on the rest as a new line), strips leading white space
 * (inih would take an indented line as the continuation of the previous
 * value), sees every section header (inih reports none, and truncates names
 * at 49 characters) and keeps the full key of each line. The first pass
 * only checks structure (sections, keys, names, duplicates) and keeps every
 * value as text with its line. The second pass converts the values, in the
 * units declared by [robot] wherever that section stands, and builds the
 * model. Every failure stops at the first error with its line and a hint. */
#include "internal.h"

#include <ctype.h>
#include <errno.h>
#include <ini.h>
#include <stdarg.h>
#include <stdlib.h>

/* Tolerances of the format, documented in twistfit-model(5). */
#define AXIS_UNIT_TOL 1e-3    /* axis length accepted (and normalised) */
#define AXIS_QUIET_TOL 1e-12  /* below this, normalised without a warning */
#define QUAT_UNIT_TOL 1e-6    /* quaternion norm */
#define ROT_ORTHO_TOL 1e-6    /* max |R^T R - I| of rotation rows */

/* ------------------------------------------------------------------ */
/* First pass: structure                                               */
/* ------------------------------------------------------------------ */

typedef enum sec_kind {
  SEC_ROBOT, SEC_JOINT, SEC_HOME, SEC_FLANGE, SEC_TARGET, SEC_ASBUILT
} sec_kind;

typedef struct entry {
  char key[TWF_NAME_MAX];
  char *value;
  long line;
} entry;

typedef struct section {
  sec_kind kind;
  char name[TWF_NAME_MAX]; /* joint or target name, "" otherwise */
  long line;
  entry *entries;
  size_t n, cap;
} section;

typedef struct parse_ctx {
  FILE *fp;
  const char *path;
  long lineno;
  int content;           /* a section or key line was seen */
  section *secs;
  size_t nsec, capsec;
  char key[TWF_MODEL_LINE_MAX + 1]; /* key of the current line */
  twf_error *err;
  twf_warnings *warnings;
  twf_status status;     /* first error, TWF_OK while none */
} parse_ctx;

static const char *const kind_names[] = {
  "robot", "joint", "home", "flange", "target", "asbuilt"
};

static const char *const robot_keys[] = { "name", "length_unit", "angle_unit", NULL };
static const char *const joint_keys[] = { "type", "axis", "point", "limits",
                                          "offset", "scale", "dh", "mdh", NULL };
static const char *const pose_keys[] = { "position", "quaternion_wxyz",
                                         "rotation_row1", "rotation_row2",
                                         "rotation_row3", "rpy_fixed_xyz", NULL };
static const char *const target_keys[] = { "offset", NULL };

static const char *const *keys_of(sec_kind k)
{
  switch (k) {
  case SEC_ROBOT: return robot_keys;
  case SEC_JOINT: return joint_keys;
  case SEC_HOME: case SEC_FLANGE: return pose_keys;
  case SEC_TARGET: return target_keys;
  case SEC_ASBUILT: return NULL;
  }
  return NULL;
}

static const char *keys_hint(sec_kind k)
{
  switch (k) {
  case SEC_ROBOT: return "keys of [robot]: name, length_unit, angle_unit";
  case SEC_JOINT:
    return "keys of [joint NAME]: type, axis, point, limits, offset, scale, "
           "dh, mdh";
  case SEC_HOME: case SEC_FLANGE:
    return "keys of a pose section: position, and one of quaternion_wxyz, "
           "rotation_row1/2/3, rpy_fixed_xyz";
  case SEC_TARGET: return "the only key of [target NAME] is offset";
  case SEC_ASBUILT: return "";
  }
  return "";
}

/* Record the first error only (later ones are its consequences); returns
 * -1 so that callers can write return fail(...). */
static int fail(parse_ctx *c, twf_status st, long line, long column,
                const char *hint, const char *fmt, ...)
    __attribute__((format(printf, 6, 7)));

static int fail(parse_ctx *c, twf_status st, long line, long column,
                const char *hint, const char *fmt, ...)
{
  char msg[TWF_ERROR_TEXT_MAX];
  va_list ap;
  if (c->status != TWF_OK)
    return -1;
  va_start(ap, fmt);
  vsnprintf(msg, sizeof msg, fmt, ap);
  va_end(ap);
  c->status = st;
  twf_error_set(c->err, st, c->path, line, column, hint, "%s", msg);
  return -1;
}

/* Names of joints, targets and metadata keys: [A-Za-z0-9_.-]+. */
static int name_chars_ok(const char *s)
{
  if (*s == '\0')
    return 0;
  for (; *s; s++)
    if (!(isalnum((unsigned char)*s) || *s == '_' || *s == '.' || *s == '-'))
      return 0;
  return 1;
}

static const char NAME_HINT[] =
    "names use letters, digits, '_', '.' and '-' only, at most 63 characters";

static int check_name(parse_ctx *c, const char *what, const char *name, long line)
{
  if (!name_chars_ok(name)) {
    fail(c, TWF_ERR_SYNTAX, line, 0, NAME_HINT, "%s name '%s' is not valid",
         what, name);
    return -1;
  }
  if (strlen(name) >= TWF_NAME_MAX) {
    fail(c, TWF_ERR_VALUE, line, 0, NAME_HINT,
         "%s name '%.20s...' is %zu characters long", what, name, strlen(name));
    return -1;
  }
  return 0;
}

static int is_blank(char ch)
{
  return ch == ' ' || ch == '\t' || ch == '\v' || ch == '\f' || ch == '\r';
}

/* A section header's inner text, e.g. " joint  j1 ". */
static void open_section(parse_ctx *c, char *inner)
{
  char *word, *rest, *end;
  section *s;
  size_t i;
  int kind = -1;

  while (is_blank(*inner))
    inner++;
  end = inner + strlen(inner);
  while (end > inner && is_blank(end[-1]))
    *--end = '\0';
  if (*inner == '\0') {
    fail(c, TWF_ERR_SYNTAX, c->lineno, 0,
         "write the section's kind between the brackets, e.g. [robot]",
         "empty section header []");
    return;
  }
  word = inner;
  rest = word;
  while (*rest && !is_blank(*rest))
    rest++;
  if (*rest) {
    *rest++ = '\0';
    while (is_blank(*rest))
      rest++;
  }
  for (i = 0; i < sizeof kind_names / sizeof kind_names[0]; i++)
    if (strcmp(word, kind_names[i]) == 0)
      kind = (int)i;
  if (kind < 0) {
    fail(c, TWF_ERR_UNKNOWN, c->lineno, 0,
         "sections are [robot], [joint NAME], [home], [flange], "
         "[target NAME] and [asbuilt], in lower case",
         "unknown section [%s%s%s]", word, *rest ? " " : "", rest);
    return;
  }
  if (kind == SEC_JOINT || kind == SEC_TARGET) {
    if (*rest == '\0') {
      fail(c, TWF_ERR_SYNTAX, c->lineno, 0,
           "name it in the header, e.g. [joint j1] or [target T1]",
           "section [%s] has no name", word);
      return;
    }
    if (check_name(c, kind_names[kind], rest, c->lineno) != 0)
      return;
  } else if (*rest != '\0') {
    fail(c, TWF_ERR_SYNTAX, c->lineno, 0,
         "only [joint NAME] and [target NAME] carry a name",
         "section [%s] takes no name, found '%s'", word, rest);
    return;
  }
  for (i = 0; i < c->nsec; i++) {
    const section *o = &c->secs[i];
    if ((int)o->kind != kind || strcmp(o->name, kind == SEC_JOINT || kind == SEC_TARGET ? rest : "") != 0)
      continue;
    if (kind == SEC_JOINT || kind == SEC_TARGET)
      fail(c, TWF_ERR_DUPLICATE, c->lineno, 0,
           "give every joint and every target its own name",
           "%s name '%s' is used twice (first at line %ld)", word, rest,
           o->line);
    else
      fail(c, TWF_ERR_DUPLICATE, c->lineno, 0,
           "merge the two sections into one",
           "section [%s] appears twice (first at line %ld)", word, o->line);
    return;
  }
  if (c->nsec == c->capsec) {
    size_t cap = c->capsec ? 2 * c->capsec : 16;
    section *g = realloc(c->secs, cap * sizeof *g);
    if (g == NULL) {
      fail(c, TWF_ERR_NOMEM, c->lineno, 0, NULL, "out of memory");
      return;
    }
    c->secs = g;
    c->capsec = cap;
  }
  s = &c->secs[c->nsec++];
  memset(s, 0, sizeof *s);
  s->kind = (sec_kind)kind;
  s->line = c->lineno;
  if (kind == SEC_JOINT || kind == SEC_TARGET)
    twf_strlcpy(s->name, rest, sizeof s->name);
}

/* Classify one line (leading blanks already removed) as inih will see it,
 * and catch what inih would accept silently or report without a reason.
 * The rules mirror inih 55: start-of-line comments with ';' or '#', inline
 * comments with ';' after white space, key and value split at the first
 * '=' or ':'. */
static void classify_line(parse_ctx *c, const char *s)
{
  if (*s == '\0' || *s == ';' || *s == '#')
    return;
  c->content = 1;
  c->key[0] = '\0';
  if (*s == '[') {
    char inner[TWF_MODEL_LINE_MAX + 1];
    const char *p = s + 1, *q;
    int was_space = 0;
    while (*p && *p != ']' && !(was_space && *p == ';')) {
      was_space = is_blank(*p);
      p++;
    }
    if (*p != ']') {
      fail(c, TWF_ERR_SYNTAX, c->lineno, 0,
           "close the section header with ']'",
           "section header has no closing ']'");
      return;
    }
    for (q = p + 1; is_blank(*q); q++)
      ;
    if (*q != '\0' && *q != ';' && *q != '#') {
      fail(c, TWF_ERR_SYNTAX, c->lineno, 0,
           "put nothing but a comment after the section header",
           "unexpected text '%s' after the section header", q);
      return;
    }
    memcpy(inner, s + 1, (size_t)(p - s - 1));
    inner[p - s - 1] = '\0';
    open_section(c, inner);
    return;
  }
  {
    const char *p = s;
    int was_space = 0;
    size_t n;
    while (*p && *p != '=' && *p != ':' && !(was_space && *p == ';')) {
      was_space = is_blank(*p);
      p++;
    }
    if (*p == ':') {
      fail(c, TWF_ERR_SYNTAX, c->lineno, 0,
           "write key = value (':' is not a separator in model files)",
           "':' found where '=' was expected");
      return;
    }
    if (*p != '=') {
      fail(c, TWF_ERR_SYNTAX, c->lineno, 0,
           "lines are [section], key = value, blank, or comments starting "
           "with ';' or '#'",
           "line is neither a section header nor key = value");
      return;
    }
    n = (size_t)(p - s);
    while (n > 0 && is_blank(s[n - 1]))
      n--;
    if (n == 0) {
      fail(c, TWF_ERR_SYNTAX, c->lineno, 0, "write key = value",
           "key missing before '='");
      return;
    }
    memcpy(c->key, s, n);
    c->key[n] = '\0';
    if (c->nsec == 0)
      fail(c, TWF_ERR_SYNTAX, c->lineno, 0,
           "put keys under a section header such as [robot]",
           "key '%s' comes before any section", c->key);
  }
}

/* inih's reader: one physical line per call, checked and classified. */
static char *read_line(char *str, int num, void *stream)
{
  parse_ctx *c = stream;
  char line[TWF_MODEL_LINE_MAX + 2];
  size_t len = 0, limit = TWF_MODEL_LINE_MAX;
  int ch, prev = 0, nul = 0;
  const char *s;

  if (c->status != TWF_OK)
    return NULL;
  /* Our line plus "\n" and NUL must fit inih's buffer, whatever its size. */
  if (num < 3)
    return NULL;
  if ((size_t)num - 2 < limit)
    limit = (size_t)num - 2;
  /* Keep up to limit + 1 characters: one more than the limit already
   * makes the line too long; count the rest. */
  while ((ch = getc(c->fp)) != EOF && ch != '\n') {
    if (ch == '\0')
      nul = 1;
    if (len < limit + 1)
      line[len] = (char)ch;
    len++;
    prev = ch;
  }
  if (ch == EOF && ferror(c->fp)) {
    fail(c, TWF_ERR_IO, c->lineno + 1, 0, "check the file and the disk",
         "read error: %s", strerror(errno));
    return NULL;
  }
  if (ch == EOF && len == 0)
    return NULL;
  c->lineno++;
  /* CR LF line ends: the CR is not part of the line. */
  if (prev == '\r')
    len--;
  if (nul) {
    fail(c, TWF_ERR_SYNTAX, c->lineno, 0,
         "a model file is plain text (ASCII or UTF-8)",
         "line holds a NUL byte");
    return NULL;
  }
  if (len > limit) {
    fail(c, TWF_ERR_SYNTAX, c->lineno, 0,
         "split it or shorten its comment: the INI reader cannot hold "
         "longer lines",
         "line is %zu characters long, more than the limit of %zu", len,
         limit);
    return NULL;
  }
  line[len] = '\0';
  s = line;
  /* A UTF-8 byte order mark: editors on some systems add it. */
  if (c->lineno == 1 && (unsigned char)s[0] == 0xEF &&
      (unsigned char)s[1] == 0xBB && (unsigned char)s[2] == 0xBF)
    s += 3;
  while (is_blank(*s))
    s++;
  classify_line(c, s);
  if (c->status != TWF_OK)
    return NULL;
  len = strlen(s);
  memcpy(str, s, len);
  str[len] = '\n';
  str[len + 1] = '\0';
  return str;
}

static int key_known(const char *const *keys, const char *key)
{
  for (; *keys; keys++)
    if (strcmp(*keys, key) == 0)
      return 1;
  return 0;
}

static int handle_pair(void *user, const char *section_name, const char *name,
                       const char *value)
{
  parse_ctx *c = user;
  section *s;
  const char *key = c->key;
  const char *const *keys;
  size_t i;
  (void)section_name;

  if (c->status != TWF_OK)
    return 0;
  /* inih truncates long keys; ours is the whole key. They must agree. */
  if (c->nsec == 0 || strncmp(name, key, strlen(name)) != 0) {
    fail(c, TWF_ERR_SYNTAX, c->lineno, 0, "report this as a bug",
         "the INI parser and the line reader disagree on key '%s'", name);
    return 0;
  }
  s = &c->secs[c->nsec - 1];
  keys = keys_of(s->kind);
  if (keys != NULL && !key_known(keys, key)) {
    fail(c, TWF_ERR_UNKNOWN, c->lineno, 0, keys_hint(s->kind),
         "unknown key '%s' in [%s%s%s]", key, kind_names[s->kind],
         s->name[0] ? " " : "", s->name);
    return 0;
  }
  if (keys == NULL && check_name(c, "metadata key", key, c->lineno) != 0)
    return 0;
  for (i = 0; i < s->n; i++)
    if (strcmp(s->entries[i].key, key) == 0) {
      fail(c, TWF_ERR_DUPLICATE, c->lineno, 0, "keep only one of them",
           "key '%s' appears twice in [%s%s%s] (first at line %ld)", key,
           kind_names[s->kind], s->name[0] ? " " : "", s->name,
           s->entries[i].line);
      return 0;
    }
  if (s->n == s->cap) {
    size_t cap = s->cap ? 2 * s->cap : 8;
    entry *g = realloc(s->entries, cap * sizeof *g);
    if (g == NULL) {
      fail(c, TWF_ERR_NOMEM, c->lineno, 0, NULL, "out of memory");
      return 0;
    }
    s->entries = g;
    s->cap = cap;
  }
  {
    entry *e = &s->entries[s->n];
    size_t n = strlen(value) + 1;
    e->value = malloc(n);
    if (e->value == NULL) {
      fail(c, TWF_ERR_NOMEM, c->lineno, 0, NULL, "out of memory");
      return 0;
    }
    memcpy(e->value, value, n);
    twf_strlcpy(e->key, key, sizeof e->key);
    e->line = c->lineno;
    s->n++;
  }
  return 1;
}

static void ctx_clear(parse_ctx *c)
{
  for (size_t i = 0; i < c->nsec; i++) {
    for (size_t j = 0; j < c->secs[i].n; j++)
      free(c->secs[i].entries[j].value);
    free(c->secs[i].entries);
  }
  free(c->secs);
  c->secs = NULL;
  c->nsec = c->capsec = 0;
}

/* ------------------------------------------------------------------ */
/* Second pass: values                                                 */
/* ------------------------------------------------------------------ */

static const entry *find_entry(const section *s, const char *key)
{
  if (s == NULL)
    return NULL;
  for (size_t i = 0; i < s->n; i++)
    if (strcmp(s->entries[i].key, key) == 0)
      return &s->entries[i];
  return NULL;
}

static const char NUMBER_HINT[] =
    "write plain decimal numbers separated by spaces, e.g. 0 0 1";

/* Exactly n finite numbers, separated by blanks. what names the value in
 * messages, e.g. "axis of joint j1". */
static int parse_numbers(parse_ctx *c, const entry *e, const char *what,
                         double *out, size_t n)
{
  const char *p = e->value;
  size_t count = 0;
  for (;;) {
    char tok[TWF_MODEL_LINE_MAX + 1];
    size_t len = 0;
    char *end;
    double v;
    while (is_blank(*p))
      p++;
    if (*p == '\0')
      break;
    while (p[len] && !is_blank(p[len]))
      len++;
    memcpy(tok, p, len);
    tok[len] = '\0';
    p += len;
    count++;
    errno = 0;
    v = strtod(tok, &end);
    if (end == tok || *end != '\0') {
      const char *hint = NUMBER_HINT;
      if (tok[0] == '#')
        hint = "'#' starts a comment only at the start of a line; end a line "
               "with a comment after ' ;'";
      else if (strchr(tok, ','))
        hint = "separate numbers with spaces, not commas, and write the "
               "decimal point as '.'";
      fail(c, TWF_ERR_VALUE, e->line, (long)count, hint,
           "%s: '%s' is not a number", what, tok);
      return -1;
    }
    if (!isfinite(v)) {
      fail(c, TWF_ERR_VALUE, e->line, (long)count,
           "every value must be a finite number",
           "%s: '%s' is not a finite number", what, tok);
      return -1;
    }
    if (count <= n)
      out[count - 1] = v;
  }
  if (count != n) {
    fail(c, TWF_ERR_VALUE, e->line, 0, NUMBER_HINT,
         "%s needs %zu number%s, found %zu", what, n, n == 1 ? "" : "s",
         count);
    return -1;
  }
  return 0;
}

/* Unit conversions. Divide by the exact integers 1000 and 1e6 rather than
 * multiply by their inexact inverses, so that 450 mm reads as the double
 * nearest 0.45 m and writes back as 450. */
static double len_to_si(double v, twf_length_unit u)
{
  switch (u) {
  case TWF_LENGTH_MM: return v / 1e3;
  case TWF_LENGTH_UM: return v / 1e6;
  case TWF_LENGTH_M: return v;
  case TWF_LENGTH_IN: return v * 0.0254;
  }
  return v;
}

static double len_from_si(double v, twf_length_unit u)
{
  switch (u) {
  case TWF_LENGTH_MM: return v * 1e3;
  case TWF_LENGTH_UM: return v * 1e6;
  case TWF_LENGTH_M: return v;
  case TWF_LENGTH_IN: return v / 0.0254;
  }
  return v;
}

static double ang_to_si(double v, twf_angle_unit u)
{
  switch (u) {
  case TWF_ANGLE_DEG: return v * (TWF_PI / 180.0);
  case TWF_ANGLE_MRAD: return v / 1e3;
  case TWF_ANGLE_RAD: return v;
  }
  return v;
}

static double ang_from_si(double v, twf_angle_unit u)
{
  switch (u) {
  case TWF_ANGLE_DEG: return v / (TWF_PI / 180.0);
  case TWF_ANGLE_MRAD: return v * 1e3;
  case TWF_ANGLE_RAD: return v;
  }
  return v;
}

/* Nearest rotation to an almost orthonormal R (error below 1e-6): Newton's
 * iteration for the polar factor, R <- (R + R^-T) / 2 (Higham, "Functions
 * of Matrices", 2008, ch. 8), quadratic, so three steps reach rounding. */
static void rot_polish(double R[3][3])
{
  for (int it = 0; it < 3; it++) {
    double C[3][3], det;
    C[0][0] = R[1][1] * R[2][2] - R[1][2] * R[2][1];
    C[0][1] = R[1][2] * R[2][0] - R[1][0] * R[2][2];
    C[0][2] = R[1][0] * R[2][1] - R[1][1] * R[2][0];
    C[1][0] = R[0][2] * R[2][1] - R[0][1] * R[2][2];
    C[1][1] = R[0][0] * R[2][2] - R[0][2] * R[2][0];
    C[1][2] = R[0][1] * R[2][0] - R[0][0] * R[2][1];
    C[2][0] = R[0][1] * R[1][2] - R[0][2] * R[1][1];
    C[2][1] = R[0][2] * R[1][0] - R[0][0] * R[1][2];
    C[2][2] = R[0][0] * R[1][1] - R[0][1] * R[1][0];
    det = R[0][0] * C[0][0] + R[0][1] * C[0][1] + R[0][2] * C[0][2];
    /* R^-T is the cofactor matrix over the determinant. */
    for (int i = 0; i < 3; i++)
      for (int j = 0; j < 3; j++)
        R[i][j] = 0.5 * (R[i][j] + C[i][j] / det);
  }
}

/* A pose section: position and exactly one rotation form. */
static int parse_pose(parse_ctx *c, const section *s, twf_length_unit lu,
                      twf_angle_unit au, twf_pose *T)
{
  const char *sec = kind_names[s->kind];
  const entry *pos = find_entry(s, "position");
  const entry *quat = find_entry(s, "quaternion_wxyz");
  const entry *rows[3] = { find_entry(s, "rotation_row1"),
                           find_entry(s, "rotation_row2"),
                           find_entry(s, "rotation_row3") };
  const entry *rpy = find_entry(s, "rpy_fixed_xyz");
  const entry *forms[3];
  const char *form_names[3];
  size_t nforms = 0;
  char what[96];

  /* The forms in file order, so that the second one is blamed. */
  {
    const entry *row_first = NULL;
    for (int i = 0; i < 3; i++)
      if (rows[i] && (row_first == NULL || rows[i]->line < row_first->line))
        row_first = rows[i];
    const entry *cand[3] = { quat, row_first, rpy };
    const char *cand_names[3] = { "quaternion_wxyz", "rotation_row1/2/3",
                                  "rpy_fixed_xyz" };
    for (int i = 0; i < 3; i++) {
      if (cand[i] == NULL)
        continue;
      size_t k = nforms++;
      while (k > 0 && forms[k - 1]->line > cand[i]->line) {
        forms[k] = forms[k - 1];
        form_names[k] = form_names[k - 1];
        k--;
      }
      forms[k] = cand[i];
      form_names[k] = cand_names[i];
    }
  }
  if (pos == NULL)
    return fail(c, TWF_ERR_MISSING, s->line, 0,
                "add position = x y z in the length unit",
                "[%s] has no position", sec);
  if (nforms == 0)
    return fail(c, TWF_ERR_MISSING, s->line, 0,
                "add one of quaternion_wxyz, rotation_row1/2/3 or "
                "rpy_fixed_xyz",
                "[%s] has no rotation", sec);
  if (nforms > 1)
    return fail(c, TWF_ERR_DUPLICATE, forms[1]->line, 0,
                "keep exactly one rotation form",
                "[%s] gives its rotation twice: %s (line %ld) and %s", sec,
                form_names[0], forms[0]->line, form_names[1]);

  snprintf(what, sizeof what, "position in [%s]", sec);
  if (parse_numbers(c, pos, what, T->p, 3) != 0)
    return -1;
  for (int i = 0; i < 3; i++)
    T->p[i] = len_to_si(T->p[i], lu);

  if (quat != NULL) {
    double q[4], n;
    snprintf(what, sizeof what, "quaternion_wxyz in [%s]", sec);
    if (parse_numbers(c, quat, what, q, 4) != 0)
      return -1;
    n = sqrt(q[0] * q[0] + q[1] * q[1] + q[2] * q[2] + q[3] * q[3]);
    if (!(fabs(n - 1.0) <= QUAT_UNIT_TOL))
      return fail(c, TWF_ERR_VALUE, quat->line, 0,
                  "give a unit quaternion w x y z (norm within 1e-6 of 1)",
                  "quaternion_wxyz in [%s] has norm %.9g, not 1", sec, n);
    twf_quat_to_rot(q, T->R);
  } else if (rpy != NULL) {
    double a[3];
    snprintf(what, sizeof what, "rpy_fixed_xyz in [%s]", sec);
    if (parse_numbers(c, rpy, what, a, 3) != 0)
      return -1;
    twf_rpy_fixed_xyz_to_rot(ang_to_si(a[0], au), ang_to_si(a[1], au),
                             ang_to_si(a[2], au), T->R);
  } else {
    double err, det;
    for (int i = 0; i < 3; i++)
      if (rows[i] == NULL)
        return fail(c, TWF_ERR_MISSING, s->line, 0,
                    "a rotation matrix needs rotation_row1, rotation_row2 "
                    "and rotation_row3",
                    "[%s] has no rotation_row%d", sec, i + 1);
    for (int i = 0; i < 3; i++) {
      snprintf(what, sizeof what, "rotation_row%d in [%s]", i + 1, sec);
      if (parse_numbers(c, rows[i], what, T->R[i], 3) != 0)
        return -1;
    }
    err = twf_rot_orthonormality_error(T->R, &det);
    if (!(err <= ROT_ORTHO_TOL))
      return fail(c, TWF_ERR_VALUE, rows[2]->line, 0,
                  "the rows must be orthonormal to 1e-6; give more digits or "
                  "use quaternion_wxyz",
                  "rotation in [%s] is not orthonormal (largest error of "
                  "R^T R - I is %.3g)", sec, err);
    if (det < 0.0)
      return fail(c, TWF_ERR_VALUE, rows[2]->line, 0,
                  "a rotation has determinant +1; check the signs of a row",
                  "rotation in [%s] is a reflection (determinant %.6g)", sec,
                  det);
    if (err > 0.0)
      rot_polish(T->R);
  }
  return 0;
}

typedef enum joint_form { FORM_NONE, FORM_AXIS, FORM_DH, FORM_MDH } joint_form;

static const char *form_name(joint_form f)
{
  switch (f) {
  case FORM_AXIS: return "the axis-and-point form";
  case FORM_DH: return "a standard DH row (dh)";
  case FORM_MDH: return "a modified DH row (mdh)";
  case FORM_NONE: break;
  }
  return "no form";
}

/* Which geometry a joint section gives, and the line that first says so. */
static int joint_form_of(parse_ctx *c, const section *s, joint_form *form,
                         const entry **first)
{
  const entry *axis = find_entry(s, "axis"), *point = find_entry(s, "point");
  const entry *ax = axis;
  const entry *cand[3];
  joint_form kinds[3] = { FORM_AXIS, FORM_DH, FORM_MDH };
  const entry *a = NULL, *b = NULL;
  joint_form fa = FORM_NONE, fb = FORM_NONE;
  if (ax == NULL || (point != NULL && point->line < ax->line))
    ax = point;
  cand[0] = ax;
  cand[1] = find_entry(s, "dh");
  cand[2] = find_entry(s, "mdh");
  for (int i = 0; i < 3; i++) {
    if (cand[i] == NULL)
      continue;
    if (a == NULL || cand[i]->line < a->line) {
      b = a; fb = fa;
      a = cand[i]; fa = kinds[i];
    } else if (b == NULL || cand[i]->line < b->line) {
      b = cand[i]; fb = kinds[i];
    }
  }
  if (b != NULL) {
    fail(c, TWF_ERR_DUPLICATE, b->line, 0,
         "keep one form: axis and point, or one dh row, or one mdh row",
         "joint %s gives its geometry twice: %s (line %ld) and %s", s->name,
         form_name(fa), a->line, form_name(fb));
    return -1;
  }
  *form = fa;
  *first = a;
  return 0;
}

/* Everything of a joint except its geometry. */
static int parse_joint_common(parse_ctx *c, const section *s,
                              twf_length_unit lu, twf_angle_unit au,
                              twf_joint *j)
{
  const entry *e;
  char what[96];
  int rev;

  twf_strlcpy(j->name, s->name, sizeof j->name);
  e = find_entry(s, "type");
  if (e == NULL)
    return fail(c, TWF_ERR_MISSING, s->line, 0,
                "add type = revolute or type = prismatic",
                "joint %s has no type", s->name);
  if (strcmp(e->value, "revolute") == 0)
    j->type = TWF_JOINT_REVOLUTE;
  else if (strcmp(e->value, "prismatic") == 0)
    j->type = TWF_JOINT_PRISMATIC;
  else
    return fail(c, TWF_ERR_UNKNOWN, e->line, 0,
                "type is revolute or prismatic",
                "joint %s has unknown type '%s'", s->name, e->value);
  rev = j->type == TWF_JOINT_REVOLUTE;

  j->scale = 1.0;
  j->offset = 0.0;
  j->has_limits = 0;
  if ((e = find_entry(s, "limits")) != NULL) {
    double l[2];
    snprintf(what, sizeof what, "limits of joint %s", s->name);
    if (parse_numbers(c, e, what, l, 2) != 0)
      return -1;
    if (l[0] > l[1])
      return fail(c, TWF_ERR_VALUE, e->line, 0,
                  "write the lower limit first: limits = min max",
                  "limits of joint %s: min %.17g is above max %.17g", s->name,
                  l[0], l[1]);
    j->has_limits = 1;
    j->limit_lo = rev ? ang_to_si(l[0], au) : len_to_si(l[0], lu);
    j->limit_hi = rev ? ang_to_si(l[1], au) : len_to_si(l[1], lu);
  }
  if ((e = find_entry(s, "offset")) != NULL) {
    snprintf(what, sizeof what, "offset of joint %s", s->name);
    if (parse_numbers(c, e, what, &j->offset, 1) != 0)
      return -1;
    j->offset = rev ? ang_to_si(j->offset, au) : len_to_si(j->offset, lu);
  }
  if ((e = find_entry(s, "scale")) != NULL) {
    snprintf(what, sizeof what, "scale of joint %s", s->name);
    if (parse_numbers(c, e, what, &j->scale, 1) != 0)
      return -1;
    if (j->scale == 0.0)
      return fail(c, TWF_ERR_VALUE, e->line, 0,
                  "scale multiplies the logged joint value; nominal is 1",
                  "scale of joint %s is zero", s->name);
  }
  return 0;
}

static int parse_joint_axis(parse_ctx *c, const section *s,
                            twf_length_unit lu, twf_joint *j)
{
  const entry *axis = find_entry(s, "axis"), *point = find_entry(s, "point");
  double w[3], q[3] = { 0.0, 0.0, 0.0 }, n;
  char what[96];

  if (axis == NULL)
    return fail(c, TWF_ERR_MISSING, s->line, 0,
                "add axis = x y z, the unit direction of the joint axis",
                "joint %s has no axis", s->name);
  snprintf(what, sizeof what, "axis of joint %s", s->name);
  if (parse_numbers(c, axis, what, w, 3) != 0)
    return -1;
  n = twf_v3_norm(w);
  if (n == 0.0)
    return fail(c, TWF_ERR_VALUE, axis->line, 0,
                "give the unit direction of the joint axis, e.g. 0 0 1",
                "axis of joint %s has zero length", s->name);
  if (!(fabs(n - 1.0) <= AXIS_UNIT_TOL))
    return fail(c, TWF_ERR_VALUE, axis->line, 0,
                "give a unit vector; lengths within 1e-3 of 1 are normalised "
                "with a warning",
                "axis of joint %s has length %.12g, not 1", s->name, n);
  if (fabs(n - 1.0) > AXIS_QUIET_TOL)
    twf_warnings_add(c->warnings, c->path, axis->line, 0,
                     "axis of joint %s has length %.12g and was normalised",
                     s->name, n);
  for (int i = 0; i < 3; i++)
    w[i] /= n;

  if (point == NULL && j->type == TWF_JOINT_REVOLUTE)
    return fail(c, TWF_ERR_MISSING, s->line, 0,
                "add point = x y z, any point of the axis line, in the "
                "length unit",
                "revolute joint %s has no point", s->name);
  if (point != NULL) {
    snprintf(what, sizeof what, "point of joint %s", s->name);
    if (parse_numbers(c, point, what, q, 3) != 0)
      return -1;
    for (int i = 0; i < 3; i++)
      q[i] = len_to_si(q[i], lu);
  }
  twf_v3_copy(q, j->point);
  if (j->type == TWF_JOINT_REVOLUTE)
    twf_twist_revolute(w, q, j->twist);
  else
    twf_twist_prismatic(w, j->twist);
  return 0;
}

static int parse_joint_dh(parse_ctx *c, const section *s, joint_form form,
                          twf_length_unit lu, twf_angle_unit au,
                          twf_joint_type type, twf_dh_row *row)
{
  const entry *e = find_entry(s, form == FORM_DH ? "dh" : "mdh");
  double v[4];
  char what[96];
  snprintf(what, sizeof what, "%s row of joint %s",
           form == FORM_DH ? "dh" : "mdh", s->name);
  if (parse_numbers(c, e, what, v, 4) != 0)
    return -1;
  if (form == FORM_DH) {         /* a alpha d theta */
    row->a = len_to_si(v[0], lu);
    row->alpha = ang_to_si(v[1], au);
  } else {                       /* alpha a d theta */
    row->alpha = ang_to_si(v[0], au);
    row->a = len_to_si(v[1], lu);
  }
  row->d = len_to_si(v[2], lu);
  row->theta = ang_to_si(v[3], au);
  row->type = type;
  return 0;
}

static int parse_robot(parse_ctx *c, const section *s, twf_model *m)
{
  const entry *e;
  if ((e = find_entry(s, "name")) != NULL) {
    if (twf_strlcpy(m->name, e->value, sizeof m->name) != 0)
      return fail(c, TWF_ERR_VALUE, e->line, 0, "shorten the name",
                  "robot name is %zu characters long, the limit is %zu",
                  strlen(e->value), sizeof m->name - 1);
  }
  if ((e = find_entry(s, "length_unit")) != NULL &&
      twf_length_unit_parse(e->value, &m->length_unit) != TWF_OK)
    return fail(c, TWF_ERR_UNITS, e->line, 0,
                "length_unit is one of mm, m, um, in",
                "unknown length unit '%s'", e->value);
  if ((e = find_entry(s, "angle_unit")) != NULL &&
      twf_angle_unit_parse(e->value, &m->angle_unit) != TWF_OK)
    return fail(c, TWF_ERR_UNITS, e->line, 0,
                "angle_unit is one of deg, rad, mrad",
                "unknown angle unit '%s'", e->value);
  return 0;
}

static twf_model *build_model(parse_ctx *c)
{
  const section *robot = NULL, *home = NULL, *flange = NULL;
  size_t nj = 0, nt = 0, ij = 0, it = 0;
  twf_model *m = NULL;
  twf_dh_row *rows = NULL;
  joint_form form = FORM_NONE;
  const section *form_joint = NULL;

  for (size_t i = 0; i < c->nsec; i++) {
    const section *s = &c->secs[i];
    switch (s->kind) {
    case SEC_ROBOT: robot = s; break;
    case SEC_HOME: home = s; break;
    case SEC_FLANGE: flange = s; break;
    case SEC_JOINT: nj++; break;
    case SEC_TARGET: nt++; break;
    case SEC_ASBUILT: break;
    }
  }
  if (!c->content) {
    fail(c, TWF_ERR_MISSING, 0, 0,
         "a model needs [robot], one [joint NAME] per joint and [home]; see "
         "twistfit-model(5)",
         "file holds no sections (it is empty or only comments)");
    return NULL;
  }
  if (robot == NULL) {
    fail(c, TWF_ERR_MISSING, 0, 0,
         "start the file with [robot] giving name, length_unit and "
         "angle_unit",
         "no [robot] section");
    return NULL;
  }
  if (nj == 0) {
    fail(c, TWF_ERR_MISSING, 0, 0,
         "add one [joint NAME] section per joint, base to flange",
         "no [joint NAME] section");
    return NULL;
  }
  m = twf_model_alloc(nj, nt);
  rows = calloc(nj, sizeof *rows);
  if (m == NULL || rows == NULL) {
    fail(c, TWF_ERR_NOMEM, 0, 0, NULL, "out of memory");
    goto fail;
  }
  if (parse_robot(c, robot, m) != 0)
    goto fail;

  for (size_t i = 0; i < c->nsec; i++) {
    const section *s = &c->secs[i];
    if (s->kind == SEC_JOINT) {
      twf_joint *j = &m->joints[ij];
      joint_form f;
      const entry *first;
      if (parse_joint_common(c, s, m->length_unit, m->angle_unit, j) != 0 ||
          joint_form_of(c, s, &f, &first) != 0)
        goto fail;
      if (f == FORM_NONE) {
        fail(c, TWF_ERR_MISSING, s->line, 0,
             "add axis and point, or a dh or mdh row",
             "joint %s has no axis", s->name);
        goto fail;
      }
      if (form == FORM_NONE) {
        form = f;
        form_joint = s;
      } else if (f != form) {
        fail(c, TWF_ERR_SYNTAX, first->line, 0,
             "all joints of a file use the same form",
             "joint %s uses %s but joint %s uses %s", s->name, form_name(f),
             form_joint->name, form_name(form));
        goto fail;
      }
      if (f == FORM_AXIS) {
        if (parse_joint_axis(c, s, m->length_unit, j) != 0)
          goto fail;
      } else if (parse_joint_dh(c, s, f, m->length_unit, m->angle_unit,
                                j->type, &rows[ij]) != 0) {
        goto fail;
      }
      ij++;
    } else if (s->kind == SEC_TARGET) {
      twf_target *t = &m->targets[it++];
      const entry *e = find_entry(s, "offset");
      twf_strlcpy(t->name, s->name, sizeof t->name);
      if (e != NULL) {
        char what[96];
        snprintf(what, sizeof what, "offset of target %s", s->name);
        if (parse_numbers(c, e, what, t->offset, 3) != 0)
          goto fail;
        for (int k = 0; k < 3; k++)
          t->offset[k] = len_to_si(t->offset[k], m->length_unit);
        t->offset_known = 1;
      }
    } else if (s->kind == SEC_ASBUILT) {
      for (size_t k = 0; k < s->n; k++) {
        twf_status st = twf_model_meta_set(m, s->entries[k].key,
                                           s->entries[k].value);
        if (st != TWF_OK) {
          fail(c, st, s->entries[k].line, 0, NULL,
               "cannot keep metadata '%s'", s->entries[k].key);
          goto fail;
        }
      }
    }
  }

  if (form == FORM_AXIS) {
    if (flange != NULL) {
      fail(c, TWF_ERR_SYNTAX, flange->line, 0,
           "in the axis-and-point form give the flange pose at zero in "
           "[home]",
           "[flange] belongs to DH-form files, this file uses the "
           "axis-and-point form");
      goto fail;
    }
    if (home == NULL) {
      fail(c, TWF_ERR_MISSING, 0, 0,
           "add [home] with the flange pose in the base frame at zero joint "
           "values: position and one rotation",
           "no [home] section");
      goto fail;
    }
    if (parse_pose(c, home, m->length_unit, m->angle_unit, &m->home) != 0)
      goto fail;
  } else {
    twf_pose F;
    twf_error e2;
    if (home != NULL) {
      fail(c, TWF_ERR_SYNTAX, home->line, 0,
           "in DH form give the flange pose in the last DH frame in "
           "[flange]",
           "[home] belongs to the axis-and-point form, this file uses DH "
           "rows");
      goto fail;
    }
    twf_pose_identity(&F);
    if (flange != NULL &&
        parse_pose(c, flange, m->length_unit, m->angle_unit, &F) != 0)
      goto fail;
    {
      /* set_from_dh resets scale and offset: keep the file's. */
      double *sc = malloc(2 * nj * sizeof *sc);
      twf_status st;
      if (sc == NULL) {
        fail(c, TWF_ERR_NOMEM, 0, 0, NULL, "out of memory");
        goto fail;
      }
      for (size_t k = 0; k < nj; k++) {
        sc[2 * k] = m->joints[k].scale;
        sc[2 * k + 1] = m->joints[k].offset;
      }
      twf_error_clear(&e2);
      st = twf_model_set_from_dh(m, rows, nj,
                                 form == FORM_DH ? TWF_DH_STANDARD
                                                 : TWF_DH_MODIFIED,
                                 &F, &e2);
      for (size_t k = 0; k < nj; k++) {
        m->joints[k].scale = sc[2 * k];
        m->joints[k].offset = sc[2 * k + 1];
      }
      free(sc);
      if (st != TWF_OK) {
        fail(c, st, 0, 0, e2.hint, "%s", e2.message);
        goto fail;
      }
    }
  }
  free(rows);
  return m;
fail:
  free(rows);
  twf_model_free(m);
  return NULL;
}

twf_model *twf_model_read(const char *path, twf_warnings *warnings,
                          twf_error *err)
{
  parse_ctx c;
  twf_model *m;
  int rc;

  twf_error_clear(err);
  if (path == NULL) {
    twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                  "no model file name given");
    return NULL;
  }
  memset(&c, 0, sizeof c);
  c.path = path;
  c.err = err;
  c.warnings = warnings;
  c.status = TWF_OK;
  c.fp = fopen(path, "rb");
  if (c.fp == NULL) {
    twf_error_set(err, TWF_ERR_IO, path, 0, 0,
                  "check the file name and its permissions",
                  "cannot open model file '%s': %s", path, strerror(errno));
    return NULL;
  }
  rc = ini_parse_stream(read_line, &c, handle_pair, &c);
  fclose(c.fp);
  if (c.status == TWF_OK && rc == -2)
    fail(&c, TWF_ERR_NOMEM, 0, 0, NULL, "out of memory");
  else if (c.status == TWF_OK && rc != 0)
    fail(&c, TWF_ERR_SYNTAX, rc, 0, "see twistfit-model(5) for the format",
         "malformed line");
  if (c.status != TWF_OK) {
    ctx_clear(&c);
    return NULL;
  }
  m = build_model(&c);
  ctx_clear(&c);
  return m;
}

/* ------------------------------------------------------------------ */
/* Writer                                                              */
/* ------------------------------------------------------------------ */

/* How a number is stored in the file: as is, or in the declared unit. */
typedef enum conv_kind { CONV_NONE, CONV_LEN, CONV_ANG } conv_kind;

typedef struct units {
  twf_length_unit lu;
  twf_angle_unit au;
} units;

static double to_si(double v, conv_kind k, const units *u)
{
  return k == CONV_LEN ? len_to_si(v, u->lu) : k == CONV_ANG ? ang_to_si(v, u->au) : v;
}

static double from_si(double v, conv_kind k, const units *u)
{
  return k == CONV_LEN ? len_from_si(v, u->lu) : k == CONV_ANG ? ang_from_si(v, u->au) : v;
}

/* The shortest decimal (at most 17 significant digits) that the reader
 * turns back into the very same SI double: 120 deg stays 120 although
 * (120 pi/180) 180/pi is 119.99999999999999. When no decimal does (the
 * conversion is not always invertible), %.17g of a neighbour of the
 * converted value that converts back exactly, else of the converted value
 * itself (an ulp or two off). -0 is written as 0. */
static void put_num(FILE *out, double si, conv_kind k, const units *u)
{
  char s[40];
  double v = from_si(si, k, u);
  if (si == 0.0) {
    fputc('0', out);
    return;
  }
  for (int prec = 1; prec <= 17; prec++) {
    snprintf(s, sizeof s, "%.*g", prec, v);
    if (to_si(strtod(s, NULL), k, u) == si) {
      /* %g writes 1060 as 1.06e+03 at 3 digits: plain notation reads
       * better and is the same number. */
      if (strchr(s, 'e') != NULL && fabs(v) >= 1e-4 && fabs(v) < 1e17) {
        char f[40];
        int decimals = prec - 1 - (int)floor(log10(fabs(v)));
        snprintf(f, sizeof f, "%.*f", decimals > 0 ? decimals : 0, v);
        if (to_si(strtod(f, NULL), k, u) == si)
          memcpy(s, f, sizeof s);
      }
      fputs(s, out);
      return;
    }
  }
  /* v = from_si(si) was rounded: a neighbour of it may convert back
   * exactly, and %.17g reproduces any double. */
  for (int step = 1; step <= 4; step++) {
    double up = v, down = v;
    for (int i = 0; i < step; i++) {
      up = nextafter(up, INFINITY);
      down = nextafter(down, -INFINITY);
    }
    if (to_si(up, k, u) == si) {
      v = up;
      break;
    }
    if (to_si(down, k, u) == si) {
      v = down;
      break;
    }
  }
  snprintf(s, sizeof s, "%.17g", v);
  fputs(s, out);
}

static void put_nums(FILE *out, const char *key, const double *si, size_t n,
                     conv_kind k, const units *u)
{
  fprintf(out, "%s =", key);
  for (size_t i = 0; i < n; i++) {
    fputc(' ', out);
    put_num(out, si[i], k, u);
  }
  fputc('\n', out);
}

/* A text value as the reader will give it back, where possible: control
 * characters (line ends included) become spaces, blanks before ';' are
 * dropped (the reader would cut a comment there), and the ends are
 * trimmed (the reader trims them). dst holds at least strlen(src) + 1. */
static void text_for_file(const char *src, char *dst)
{
  size_t n = 0;
  for (; *src; src++) {
    unsigned char ch = (unsigned char)*src;
    if (ch < 0x20 || ch == 0x7f)
      ch = ' ';
    if (ch == ';')
      while (n > 0 && is_blank(dst[n - 1]))
        n--;
    if (ch == ' ' && n == 0)
      continue;
    dst[n++] = (char)ch;
  }
  while (n > 0 && is_blank(dst[n - 1]))
    n--;
  dst[n] = '\0';
}

static int finite_n(const double *v, size_t n)
{
  for (size_t i = 0; i < n; i++)
    if (!isfinite(v[i]))
      return 0;
  return 1;
}

/* What the writer puts in a revolute joint's file: the unit axis and a
 * point of the twist's line. The stored reference point is kept when it
 * lies on the line (so 450 mm stays 450), else it is projected onto it. */
static void revolute_axis_point(const twf_joint *j, double w[3], double q[3])
{
  double n = twf_v3_norm(j->twist), v[3], q0[3], d[3], t, dist2 = 0.0;
  for (int i = 0; i < 3; i++) {
    w[i] = j->twist[i] / n;
    v[i] = j->twist[3 + i] / n;
  }
  twf_v3_cross(w, v, q0); /* the line's point closest to the origin */
  for (int i = 0; i < 3; i++)
    d[i] = j->point[i] - q0[i];
  t = twf_v3_dot(w, d);
  for (int i = 0; i < 3; i++) {
    double e = d[i] - t * w[i];
    dist2 += e * e;
  }
  if (sqrt(dist2) <= 1e-13 * fmax(1.0, twf_v3_norm(j->point))) {
    twf_v3_copy(j->point, q);
    return;
  }
  for (int i = 0; i < 3; i++)
    q[i] = q0[i] + t * w[i];
}

static twf_status write_check(const twf_model *m, twf_error *err)
{
  double det;
  twf_pose home;
  if (m->n_joints == 0 || m->joints == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "model has no joints");
  if (strcmp(twf_length_unit_name(m->length_unit), "?") == 0 ||
      strcmp(twf_angle_unit_name(m->angle_unit), "?") == 0)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "model declares an unknown unit (%d, %d)",
                         (int)m->length_unit, (int)m->angle_unit);
  if (m->n_targets > 0 && m->targets == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "model has %zu targets but no target array",
                         m->n_targets);
  for (size_t i = 0; i < m->n_joints; i++) {
    const twf_joint *j = &m->joints[i];
    double wn = twf_v3_norm(j->twist), vn = twf_v3_norm(j->twist + 3);
    if (!name_chars_ok(j->name) || strlen(j->name) >= TWF_NAME_MAX ||
        twf_model_joint_index(m, j->name) != (long)i)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NAME_HINT,
                           "joint %zu has an invalid or repeated name '%s'",
                           i + 1, j->name);
    if (!finite_n(j->twist, 6) || !finite_n(j->point, 3) ||
        !isfinite(j->scale) || !isfinite(j->offset) ||
        (j->has_limits && (!isfinite(j->limit_lo) || !isfinite(j->limit_hi))))
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "joint %s has a non-finite value", j->name);
    if (j->scale == 0.0)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "joint %s has scale zero", j->name);
    if (j->has_limits && j->limit_lo > j->limit_hi)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "joint %s has lower limit above upper limit",
                           j->name);
    if (j->type == TWF_JOINT_REVOLUTE) {
      /* The axis-and-point form has no screw pitch w . v. */
      if (wn == 0.0 ||
          fabs(twf_v3_dot(j->twist, j->twist + 3)) > 1e-9 * wn * wn)
        return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0,
                             "a revolute twist is (w, -w x q) with w != 0",
                             "joint %s is not a pure rotation twist", j->name);
    } else if (j->type == TWF_JOINT_PRISMATIC) {
      if (vn == 0.0 || wn > 1e-12 * vn)
        return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0,
                             "a prismatic twist is (0, u) with u != 0",
                             "joint %s is not a pure translation twist",
                             j->name);
    } else {
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "joint %s has unknown type %d", j->name,
                           (int)j->type);
    }
  }
  for (size_t i = 0; i < m->n_targets; i++) {
    const twf_target *t = &m->targets[i];
    if (!name_chars_ok(t->name) || strlen(t->name) >= TWF_NAME_MAX ||
        twf_model_target_index(m, t->name) != (long)i)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NAME_HINT,
                           "target %zu has an invalid or repeated name '%s'",
                           i + 1, t->name);
    if (t->offset_known && !finite_n(t->offset, 3))
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "target %s has a non-finite offset", t->name);
  }
  /* A local copy: GCC 12 misjudges the size of m->home.R as an argument
   * (-Wstringop-overflow false positive). */
  home = m->home;
  if (!finite_n(home.p, 3) || !finite_n(home.R[0], 3) ||
      !finite_n(home.R[1], 3) || !finite_n(home.R[2], 3) ||
      !(twf_rot_orthonormality_error(home.R, &det) <= ROT_ORTHO_TOL) ||
      det < 0.0)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "home pose is not a finite rigid motion");
  for (size_t i = 0; i < m->n_meta; i++) {
    const char *k = m->meta[i].key, *v = m->meta[i].value ? m->meta[i].value : "";
    if (!name_chars_ok(k) || strlen(k) >= TWF_NAME_MAX)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NAME_HINT,
                           "metadata key '%s' is not valid", k);
    /* "key = value": the line must fit the reader. */
    if (strlen(k) + 3 + strlen(v) > TWF_MODEL_LINE_MAX) {
      char *t = malloc(strlen(v) + 1);
      size_t len;
      if (t == NULL)
        return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL,
                             "out of memory");
      text_for_file(v, t);
      len = strlen(k) + 3 + strlen(t);
      free(t);
      if (len > TWF_MODEL_LINE_MAX)
        return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0,
                             "shorten the value: a line of a model file "
                             "holds at most TWF_MODEL_LINE_MAX (198) "
                             "characters",
                             "metadata '%s' would need a line of %zu "
                             "characters", k, len);
    }
  }
  return TWF_OK;
}

twf_status twf_model_write(const twf_model *m, FILE *out, twf_error *err)
{
  twf_status st;
  units u;
  char *buf;
  size_t bufsize = sizeof m->name;

  twf_error_clear(err);
  if (m == NULL || out == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "no model or no output stream given");
  if ((st = write_check(m, err)) != TWF_OK)
    return st;
  for (size_t i = 0; i < m->n_meta; i++)
    if (m->meta[i].value && strlen(m->meta[i].value) + 1 > bufsize)
      bufsize = strlen(m->meta[i].value) + 1;
  buf = malloc(bufsize);
  if (buf == NULL)
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
  u.lu = m->length_unit;
  u.au = m->angle_unit;

  fprintf(out, "; twistfit model file, see twistfit-model(5); written by "
               "libtwistfit %s\n", twf_version());
  fprintf(out, "[robot]\n");
  memcpy(buf, m->name, sizeof m->name);
  buf[sizeof m->name - 1] = '\0';
  text_for_file(buf, buf);
  if (buf[0] != '\0')
    fprintf(out, "name = %s\n", buf);
  fprintf(out, "length_unit = %s\nangle_unit = %s\n",
          twf_length_unit_name(u.lu), twf_angle_unit_name(u.au));

  for (size_t i = 0; i < m->n_joints; i++) {
    const twf_joint *j = &m->joints[i];
    int rev = j->type == TWF_JOINT_REVOLUTE;
    conv_kind jk = rev ? CONV_ANG : CONV_LEN;
    double w[3], q[3], v[2];
    fprintf(out, "\n[joint %s]\ntype = %s\n", j->name,
            rev ? "revolute" : "prismatic");
    if (rev) {
      revolute_axis_point(j, w, q);
    } else {
      double n = twf_v3_norm(j->twist + 3);
      for (int k = 0; k < 3; k++)
        w[k] = j->twist[3 + k] / n;
      twf_v3_copy(j->point, q);
    }
    put_nums(out, "axis", w, 3, CONV_NONE, &u);
    put_nums(out, "point", q, 3, CONV_LEN, &u);
    if (j->has_limits) {
      v[0] = j->limit_lo;
      v[1] = j->limit_hi;
      put_nums(out, "limits", v, 2, jk, &u);
    }
    put_nums(out, "offset", &j->offset, 1, jk, &u);
    put_nums(out, "scale", &j->scale, 1, CONV_NONE, &u);
  }

  {
    double qu[4];
    fprintf(out, "\n[home]\n");
    put_nums(out, "position", m->home.p, 3, CONV_LEN, &u);
    twf_rot_to_quat(m->home.R, qu);
    put_nums(out, "quaternion_wxyz", qu, 4, CONV_NONE, &u);
  }

  for (size_t i = 0; i < m->n_targets; i++) {
    const twf_target *t = &m->targets[i];
    fprintf(out, "\n[target %s]\n", t->name);
    if (t->offset_known)
      put_nums(out, "offset", t->offset, 3, CONV_LEN, &u);
    else
      fprintf(out, "; offset unknown: to be fitted\n");
  }

  if (m->n_meta > 0) {
    fprintf(out, "\n[asbuilt]\n");
    for (size_t i = 0; i < m->n_meta; i++) {
      text_for_file(m->meta[i].value ? m->meta[i].value : "", buf);
      fprintf(out, "%s = %s\n", m->meta[i].key, buf);
    }
  }
  free(buf);
  if (fflush(out) != 0 || ferror(out))
    return twf_error_set(err, TWF_ERR_IO, NULL, 0, 0,
                         "check the disk space and permissions",
                         "writing the model file failed: %s", strerror(errno));
  return TWF_OK;
}
