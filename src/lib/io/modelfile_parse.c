/* modelfile_parse.c: the first pass of the model file reader,
 * twistfit-model(5). libinih runs over the file through the strict INI
 * layer; on every line, before inih sees it, this pass sees every section
 * header (inih reports none, and truncates names at 49 characters) and
 * keeps the full key (inih truncates long keys). It checks structure only
 * (sections, keys, names, duplicates) and keeps every value as text with
 * its line: the values are converted in the second pass, in the units
 * that [robot] declares wherever that section stands. */
#include "modelfile_internal.h"

#include <ctype.h>
#include <stdlib.h>

const char *const twf_mf_kind_names[] = {
  "robot", "joint", "home", "flange", "target", "asbuilt", "base", "mass",
  "payload"
};

static const char *const robot_keys[] = { "name", "length_unit", "angle_unit", "gravity",
                                          NULL };
static const char *const joint_keys[] = { "type", "axis", "point", "limits",
                                          "offset", "scale", "dh", "mdh", "compliance",
                                          NULL };
static const char *const mass_keys[] = { "mass", "center", NULL };
static const char *const pose_keys[] = { "position", "quaternion_wxyz",
                                         "rotation_row1", "rotation_row2",
                                         "rotation_row3", "rpy_fixed_xyz", NULL };
static const char *const target_keys[] = { "offset", NULL };

static const char *const *keys_of(sec_kind k)
{
  switch (k) {
  case SEC_ROBOT: return robot_keys;
  case SEC_JOINT: return joint_keys;
  case SEC_HOME: case SEC_FLANGE: case SEC_BASE: return pose_keys;
  case SEC_TARGET: return target_keys;
  case SEC_ASBUILT: return NULL;
  case SEC_MASS: case SEC_PAYLOAD: return mass_keys;
  }
  return NULL;
}

static const char *keys_hint(sec_kind k)
{
  switch (k) {
  case SEC_ROBOT: return "keys of [robot]: name, length_unit, angle_unit, gravity";
  case SEC_JOINT:
    return "keys of [joint NAME]: type, axis, point, limits, offset, scale, "
           "dh, mdh, compliance";
  case SEC_MASS: return "keys of [mass JOINT]: mass, center";
  case SEC_PAYLOAD: return "keys of [payload NAME]: mass, center";
  case SEC_HOME: case SEC_FLANGE: case SEC_BASE:
    return "keys of a pose section: position, and one of quaternion_wxyz, "
           "rotation_row1/2/3, rpy_fixed_xyz";
  case SEC_TARGET: return "the only key of [target NAME] is offset";
  case SEC_ASBUILT: return "";
  }
  return "";
}

/* Names of joints, targets and metadata keys: [A-Za-z0-9_.-]+. */
int twf_mf_name_chars_ok(const char *s)
{
  if (*s == '\0')
    return 0;
  for (; *s; s++)
    if (!(isalnum((unsigned char)*s) || *s == '_' || *s == '.' || *s == '-'))
      return 0;
  return 1;
}

const char twf_mf_name_hint[] =
    "names use letters, digits, '_', '.' and '-' only, at most 63 characters";

static int check_name(parse_ctx *c, const char *what, const char *name, long line)
{
  if (!twf_mf_name_chars_ok(name)) {
    twf_ini_fail(&c->ini, TWF_ERR_SYNTAX, line, 0, twf_mf_name_hint, "%s name '%s' is not valid",
                 what, name);
    return -1;
  }
  if (strlen(name) >= TWF_NAME_MAX) {
    twf_ini_fail(&c->ini, TWF_ERR_VALUE, line, 0, twf_mf_name_hint,
                 "%s name '%.20s...' is %zu characters long", what, name, strlen(name));
    return -1;
  }
  return 0;
}


/* A section header's inner text, e.g. " joint  j1 ". */
static void open_section(parse_ctx *c, char *inner)
{
  char *word, *rest, *end;
  section *s;
  size_t i;
  int kind = -1;

  while (twf_mf_is_blank(*inner))
    inner++;
  end = inner + strlen(inner);
  while (end > inner && twf_mf_is_blank(end[-1]))
    *--end = '\0';
  if (*inner == '\0') {
    twf_ini_fail(&c->ini, TWF_ERR_SYNTAX, c->ini.lineno, 0,
                 "write the section's kind between the brackets, e.g. [robot]",
                 "empty section header []");
    return;
  }
  word = inner;
  rest = word;
  while (*rest && !twf_mf_is_blank(*rest))
    rest++;
  if (*rest) {
    *rest++ = '\0';
    while (twf_mf_is_blank(*rest))
      rest++;
  }
  for (i = 0; i < sizeof twf_mf_kind_names / sizeof twf_mf_kind_names[0]; i++)
    if (strcmp(word, twf_mf_kind_names[i]) == 0)
      kind = (int)i;
  if (kind < 0) {
    twf_ini_fail(&c->ini, TWF_ERR_UNKNOWN, c->ini.lineno, 0,
                 "sections are [robot], [joint NAME], [home], [flange], [base], "
                 "[target NAME], [mass JOINT], [payload NAME] and [asbuilt], in lower case",
                 "unknown section [%s%s%s]", word, *rest ? " " : "", rest);
    return;
  }
  if (twf_mf_kind_named(kind)) {
    if (*rest == '\0') {
      twf_ini_fail(&c->ini, TWF_ERR_SYNTAX, c->ini.lineno, 0,
                   "name it in the header, e.g. [joint j1], [target T1], [mass j1] or "
                   "[payload tool]",
                   "section [%s] has no name", word);
      return;
    }
    if (check_name(c, twf_mf_kind_names[kind], rest, c->ini.lineno) != 0)
      return;
  } else if (*rest != '\0') {
    twf_ini_fail(&c->ini, TWF_ERR_SYNTAX, c->ini.lineno, 0,
                 "only [joint NAME], [target NAME], [mass JOINT] and [payload NAME] "
                 "carry a name",
                 "section [%s] takes no name, found '%s'", word, rest);
    return;
  }
  for (i = 0; i < c->nsec; i++) {
    const section *o = &c->secs[i];
    if ((int)o->kind != kind || strcmp(o->name, twf_mf_kind_named(kind) ? rest : "") != 0)
      continue;
    if (twf_mf_kind_named(kind))
      twf_ini_fail(&c->ini, TWF_ERR_DUPLICATE, c->ini.lineno, 0,
                   kind == SEC_MASS ? "give each joint's body one [mass JOINT] section"
                                    : "give every joint, target and payload its own name",
                   "%s name '%s' is used twice (first at line %ld)", word, rest,
                   o->line);
    else
      twf_ini_fail(&c->ini, TWF_ERR_DUPLICATE, c->ini.lineno, 0,
                   "merge the two sections into one",
                   "section [%s] appears twice (first at line %ld)", word, o->line);
    return;
  }
  if (c->nsec == c->capsec) {
    size_t cap = c->capsec ? 2 * c->capsec : 16;
    section *g = realloc(c->secs, cap * sizeof *g);
    if (g == NULL) {
      twf_ini_fail(&c->ini, TWF_ERR_NOMEM, c->ini.lineno, 0, NULL, "out of memory");
      return;
    }
    c->secs = g;
    c->capsec = cap;
  }
  s = &c->secs[c->nsec++];
  memset(s, 0, sizeof *s);
  s->kind = (sec_kind)kind;
  s->line = c->ini.lineno;
  if (twf_mf_kind_named(kind))
    twf_strlcpy(s->name, rest, sizeof s->name);
}

/* The robot's name and the [asbuilt] values are free text, printed in
 * reports and written back on one line: a control character inside one
 * (an escape sequence, a tab) is refused, since the writer could not give
 * it back (it writes spaces for them; twistfit-model(5)). s is the line,
 * v the text after its '='; the blanks inih trims at the ends and an end
 * comment are not part of the value. */
static void check_text_value(parse_ctx *c, const char *s, const char *v)
{
  const section *sec = &c->secs[c->nsec - 1];
  const char *end;
  int was_space = 0;
  if (!(sec->kind == SEC_ROBOT && strcmp(c->key, "name") == 0) && sec->kind != SEC_ASBUILT)
    return;
  /* as inih: the end comment is found on the text right after '=' */
  for (end = v; *end != '\0' && !(was_space && *end == ';'); end++)
    was_space = twf_mf_is_blank(*end);
  while (v < end && twf_mf_is_blank(*v))
    v++;
  while (end > v && twf_mf_is_blank(end[-1]))
    end--;
  for (; v < end; v++) {
    unsigned char ch = (unsigned char)*v;
    if (ch < 0x20 || ch == 0x7f) {
      char what[TWF_MODEL_LINE_MAX + 40];
      if (sec->kind == SEC_ROBOT)
        snprintf(what, sizeof what, "the robot name");
      else
        snprintf(what, sizeof what, "the value of '%s' in [asbuilt]", c->key);
      twf_ini_fail(&c->ini, TWF_ERR_VALUE, c->ini.lineno, c->ini.indent + (long)(v - s) + 1,
                   "names and metadata values are printable text on one line: remove the "
                   "control character (write a space for a tab)",
                   "control character (byte 0x%02X) in %s", ch, what);
      return;
    }
  }
}

/* Classify one line (leading blanks already removed) as inih will see it,
 * and catch what inih would accept silently or report without a reason.
 * The rules mirror inih 55: start-of-line comments with ';' or '#', inline
 * comments with ';' after white space, key and value split at the first
 * '=' or ':'. */
static void classify_line(void *user, twf_ini_strict *ini, const char *s)
{
  parse_ctx *c = user;
  (void)ini;
  if (*s == '\0' || *s == ';' || *s == '#')
    return;
  c->content = 1;
  c->key[0] = '\0';
  if (*s == '[') {
    char inner[TWF_MODEL_LINE_MAX + 1];
    const char *p = s + 1, *q;
    int was_space = 0;
    while (*p && *p != ']' && !(was_space && *p == ';')) {
      was_space = twf_mf_is_blank(*p);
      p++;
    }
    if (*p != ']') {
      twf_ini_fail(&c->ini, TWF_ERR_SYNTAX, c->ini.lineno, 0,
                   "close the section header with ']'",
                   "section header has no closing ']'");
      return;
    }
    for (q = p + 1; twf_mf_is_blank(*q); q++)
      ;
    if (*q != '\0' && *q != ';' && *q != '#') {
      twf_ini_fail(&c->ini, TWF_ERR_SYNTAX, c->ini.lineno, 0,
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
      was_space = twf_mf_is_blank(*p);
      p++;
    }
    if (*p == ':') {
      twf_ini_fail(&c->ini, TWF_ERR_SYNTAX, c->ini.lineno, 0,
                   "write key = value (':' is not a separator in model files)",
                   "':' found where '=' was expected");
      return;
    }
    if (*p != '=') {
      twf_ini_fail(&c->ini, TWF_ERR_SYNTAX, c->ini.lineno, 0,
                   "lines are [section], key = value, blank, or comments starting "
                   "with ';' or '#'",
                   "line is neither a section header nor key = value");
      return;
    }
    n = (size_t)(p - s);
    while (n > 0 && twf_mf_is_blank(s[n - 1]))
      n--;
    if (n == 0) {
      twf_ini_fail(&c->ini, TWF_ERR_SYNTAX, c->ini.lineno, 0, "write key = value",
                   "key missing before '='");
      return;
    }
    memcpy(c->key, s, n);
    c->key[n] = '\0';
    if (c->nsec == 0)
      twf_ini_fail(&c->ini, TWF_ERR_SYNTAX, c->ini.lineno, 0,
                   "put keys under a section header such as [robot]",
                   "key '%s' comes before any section", c->key);
    else
      check_text_value(c, s, p + 1);
  }
}


static size_t key_hash(const char *s)
{
  size_t h = 1469598103934665603ULL & (size_t)-1; /* FNV-1a */
  for (; *s; s++) {
    h ^= (unsigned char)*s;
    h *= (size_t)1099511628211ULL;
  }
  return h;
}

/* The entry of section s (index si) holding key, or NULL. */
static const entry *key_find(parse_ctx *c, const section *s, size_t si, const char *key)
{
  size_t i;
  if (c->ksec != si + 1 || c->kcap == 0)
    return NULL;
  for (i = key_hash(key) & (c->kcap - 1); c->kslot[i] != 0; i = (i + 1) & (c->kcap - 1)) {
    c->n_key_compares++;
    if (strcmp(s->entries[c->kslot[i] - 1].key, key) == 0)
      return &s->entries[c->kslot[i] - 1];
  }
  return NULL;
}

static void key_place(parse_ctx *c, const section *s, size_t k)
{
  size_t i = key_hash(s->entries[k].key) & (c->kcap - 1);
  while (c->kslot[i] != 0)
    i = (i + 1) & (c->kcap - 1);
  c->kslot[i] = k + 1;
}

/* Add entry s->entries[s->n - 1] of section si to the table. */
static int key_add(parse_ctx *c, const section *s, size_t si)
{
  if (c->ksec != si + 1) { /* a new section: start afresh */
    free(c->kslot);
    c->kslot = NULL;
    c->kcap = 0;
    c->ksec = si + 1;
  }
  if (2 * s->n > c->kcap) {
    size_t cap = c->kcap ? 2 * c->kcap : 16, k;
    size_t *slot;
    while (2 * s->n > cap)
      cap *= 2;
    slot = calloc(cap, sizeof *slot);
    if (slot == NULL)
      return -1;
    free(c->kslot);
    c->kslot = slot;
    c->kcap = cap;
    for (k = 0; k + 1 < s->n; k++)
      key_place(c, s, k);
  }
  key_place(c, s, s->n - 1);
  return 0;
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
  (void)section_name;

  if (c->ini.status != TWF_OK)
    return 0;
  /* inih truncates long keys; ours is the whole key. They must agree. */
  if (c->nsec == 0 || strncmp(name, key, strlen(name)) != 0) {
    twf_ini_fail(&c->ini, TWF_ERR_SYNTAX, c->ini.lineno, 0, "report this as a bug",
                 "the INI parser and the line reader disagree on key '%s'", name);
    return 0;
  }
  s = &c->secs[c->nsec - 1];
  keys = keys_of(s->kind);
  if (keys != NULL && !key_known(keys, key)) {
    twf_ini_fail(&c->ini, TWF_ERR_UNKNOWN, c->ini.lineno, 0, keys_hint(s->kind),
                 "unknown key '%s' in [%s%s%s]", key, twf_mf_kind_names[s->kind],
                 s->name[0] ? " " : "", s->name);
    return 0;
  }
  if (keys == NULL && check_name(c, "metadata key", key, c->ini.lineno) != 0)
    return 0;
  {
    const entry *first = key_find(c, s, c->nsec - 1, key);
    if (first != NULL) {
      twf_ini_fail(&c->ini, TWF_ERR_DUPLICATE, c->ini.lineno, 0, "keep only one of them",
                   "key '%s' appears twice in [%s%s%s] (first at line %ld)", key,
                   twf_mf_kind_names[s->kind], s->name[0] ? " " : "", s->name,
                   first->line);
      return 0;
    }
  }
  if (s->n == s->cap) {
    size_t cap = s->cap ? 2 * s->cap : 8;
    entry *g = realloc(s->entries, cap * sizeof *g);
    if (g == NULL) {
      twf_ini_fail(&c->ini, TWF_ERR_NOMEM, c->ini.lineno, 0, NULL, "out of memory");
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
      twf_ini_fail(&c->ini, TWF_ERR_NOMEM, c->ini.lineno, 0, NULL, "out of memory");
      return 0;
    }
    memcpy(e->value, value, n);
    twf_strlcpy(e->key, key, sizeof e->key);
    e->line = c->ini.lineno;
    s->n++;
    if (key_add(c, s, c->nsec - 1) != 0) {
      twf_ini_fail(&c->ini, TWF_ERR_NOMEM, c->ini.lineno, 0, NULL, "out of memory");
      return 0;
    }
  }
  return 1;
}

void twf_mf_ctx_clear(parse_ctx *c)
{
  for (size_t i = 0; i < c->nsec; i++) {
    for (size_t j = 0; j < c->secs[i].n; j++)
      free(c->secs[i].entries[j].value);
    free(c->secs[i].entries);
  }
  free(c->secs);
  c->secs = NULL;
  c->nsec = c->capsec = 0;
  free(c->kslot);
  c->kslot = NULL;
  c->kcap = c->ksec = 0;
}

twf_status twf_mf_parse_structure(parse_ctx *c)
{
  int rc;
  c->ini.what = "a model file";
  c->ini.line = classify_line;
  c->ini.pair = handle_pair;
  c->ini.user = c;
  rc = twf_ini_parse(&c->ini);
  if (c->ini.status == TWF_OK && rc == -2)
    twf_ini_fail(&c->ini, TWF_ERR_NOMEM, 0, 0, NULL, "out of memory");
  else if (c->ini.status == TWF_OK && rc != 0)
    twf_ini_fail(&c->ini, TWF_ERR_SYNTAX, rc, 0,
                         "see twistfit-model(5) for the format", "malformed line");
  return c->ini.status;
}
