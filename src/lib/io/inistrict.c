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

/* inih's reader: one physical line per call, checked, shown to the
 * format's line check, then handed to inih. */
static char *read_line(char *str, int num, void *stream)
{
  twf_ini_strict *ini = stream;
  char line[TWF_INI_LINE_MAX + 2];
  size_t len = 0, limit = TWF_INI_LINE_MAX;
  int ch, prev = 0, nul = 0;
  const char *s;

  if (ini->status != TWF_OK)
    return NULL;
  /* Our line plus "\n" and NUL must fit inih's buffer, whatever its size. */
  if (num < 3)
    return NULL;
  if ((size_t)num - 2 < limit)
    limit = (size_t)num - 2;
  /* Keep up to limit + 1 characters: one more than the limit already
   * makes the line too long; count the rest. */
  while ((ch = getc(ini->fp)) != EOF && ch != '\n') {
    if (ch == '\0')
      nul = 1;
    if (len < limit + 1)
      line[len] = (char)ch;
    len++;
    prev = ch;
  }
  if (ch == EOF && ferror(ini->fp)) {
    twf_ini_fail(ini, TWF_ERR_IO, ini->lineno + 1, 0,
                 "check the file and the disk", "read error: %s",
                 strerror(errno));
    return NULL;
  }
  if (ch == EOF && len == 0)
    return NULL;
  ini->lineno++;
  /* CR LF line ends: the CR is not part of the line. */
  if (prev == '\r')
    len--;
  if (nul) {
    char hint[96];
    snprintf(hint, sizeof hint, "%s is plain text (ASCII or UTF-8)",
             ini->what ? ini->what : "the file");
    twf_ini_fail(ini, TWF_ERR_SYNTAX, ini->lineno, 0, hint,
                 "line holds a NUL byte");
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
  line[len] = '\0';
  s = line;
  /* A UTF-8 byte order mark: editors on some systems add it. */
  if (ini->lineno == 1 && (unsigned char)s[0] == 0xEF &&
      (unsigned char)s[1] == 0xBB && (unsigned char)s[2] == 0xBF)
    s += 3;
  /* inih would take an indented line for the continuation of the
   * previous value. */
  while (is_blank(*s))
    s++;
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

int twf_ini_parse(twf_ini_strict *ini, FILE *fp)
{
  ini->fp = fp;
  ini->lineno = 0;
  return ini_parse_stream(read_line, ini, ini->pair, ini->user);
}
