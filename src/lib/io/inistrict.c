/* inistrict.c: the strict libinih layer of the model file and the base
 * pose file (see inistrict.h for what inih alone gets wrong). */
#include "inistrict.h"

#include <errno.h>
#include <ini.h>
#include <stdarg.h>

static int is_blank(char ch)
{
  return ch == ' ' || ch == '\t' || ch == '\v' || ch == '\f' || ch == '\r';
}

int twf_ini_fail(twf_ini_strict *ini, twf_status st, long line, long column,
                 const char *hint, const char *fmt, ...)
{
  char msg[TWF_ERROR_TEXT_MAX];
  va_list ap;
  if (ini->status != TWF_OK)
    return -1;
  va_start(ap, fmt);
  vsnprintf(msg, sizeof msg, fmt, ap);
  va_end(ap);
  ini->status = st;
  twf_error_set(ini->err, st, ini->path, line, column, hint, "%s", msg);
  return -1;
}

/* inih's reader: one physical line per call from the text read whole,
 * checked, shown to the format's line check, then handed to inih. */
static char *read_line(char *str, int num, void *stream)
{
  twf_ini_strict *ini = stream;
  const char *p, *le, *nl, *s, *nul;
  char line[TWF_INI_LINE_MAX + 2];
  size_t len, limit = TWF_INI_LINE_MAX;

  if (ini->status != TWF_OK)
    return NULL;
  /* Our line plus "\n" and NUL must fit inih's buffer, whatever its size. */
  if (num < 3)
    return NULL;
  if ((size_t)num - 2 < limit)
    limit = (size_t)num - 2;
  if (ini->pos >= ini->text.len)
    return NULL;
  p = ini->text.data + ini->pos;
  nl = memchr(p, '\n', ini->text.len - ini->pos);
  le = nl ? nl : ini->text.data + ini->text.len;
  ini->pos = (size_t)(le - ini->text.data) + (nl != NULL);
  ini->lineno++;
  len = (size_t)(le - p);
  /* CR LF line ends: the CR is not part of the line. */
  if (len > 0 && p[len - 1] == '\r')
    len--;
  nul = memchr(p, '\0', len);
  if (nul != NULL) {
    char hint[96];
    snprintf(hint, sizeof hint, "%s is plain text (ASCII or UTF-8)",
             ini->what ? ini->what : "the file");
    twf_ini_fail(ini, TWF_ERR_SYNTAX, ini->lineno, 0, hint,
                 "line holds a NUL byte (at character %ld)", (long)(nul - p) + 1);
    return NULL;
  }
  if (len > limit) {
    if (ini->long_line_message != NULL)
      twf_ini_fail(ini, TWF_ERR_SYNTAX, ini->lineno, 0, ini->long_line_hint,
                   "%s", ini->long_line_message);
    else
      twf_ini_fail(ini, TWF_ERR_SYNTAX, ini->lineno, 0,
                   "split it or shorten its comment: the INI reader cannot "
                   "hold longer lines",
                   "line is %zu characters long, more than the limit of %zu",
                   len, limit);
    return NULL;
  }
  memcpy(line, p, len);
  line[len] = '\0';
  s = line;
  /* A UTF-8 byte order mark (the read stage found it): editors on some
   * systems add it. */
  if (ini->lineno == 1 && ini->text.start > 0)
    s += ini->text.start;
  /* inih would take an indented line for the continuation of the
   * previous value. */
  while (is_blank(*s))
    s++;
  ini->indent = (long)(s - line);
  if (ini->line != NULL)
    ini->line(ini->user, ini, s);
  if (ini->status != TWF_OK)
    return NULL;
  len = strlen(s);
  memcpy(str, s, len);
  str[len] = '\n';
  str[len + 1] = '\0';
  return str;
}

int twf_ini_parse(twf_ini_strict *ini)
{
  twf_io_rules rules;
  int rc;
  twf_status st;
  rules.max_size = ini->max_size ? ini->max_size : TWF_INPUT_SIZE_DEFAULT;
  rules.format_line_max = TWF_INI_LINE_MAX;
  rules.what = ini->what;
  rules.name = ini->name;
  ini->lineno = 0;
  ini->pos = 0;
  st = twf_io_read_text(ini->path, &rules, &ini->text, ini->err);
  if (st != TWF_OK) {
    ini->status = st;
    return 0;
  }
  ini->digest = ini->text.digest;
  rc = ini_parse_stream(read_line, ini, ini->pair, ini->user);
  twf_io_text_free(&ini->text);
  return rc;
}
