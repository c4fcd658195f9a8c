/* error.c: status names, the error object and the warnings list. */
#include "internal.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>

const char *twf_strerror(twf_status status)
{
  switch (status) {
  case TWF_OK: return "success";
  case TWF_ERR_NOMEM: return "out of memory";
  case TWF_ERR_IO: return "input/output error";
  case TWF_ERR_SYNTAX: return "malformed input";
  case TWF_ERR_VALUE: return "invalid value";
  case TWF_ERR_MISSING: return "missing item";
  case TWF_ERR_DUPLICATE: return "duplicate item";
  case TWF_ERR_UNKNOWN: return "unknown name";
  case TWF_ERR_UNITS: return "unknown unit";
  case TWF_ERR_INVALID: return "invalid argument";
  case TWF_ERR_DEGENERATE: return "data insufficient";
  case TWF_ERR_SINGULAR: return "singular system";
  case TWF_ERR_DIVERGED: return "did not converge";
  case TWF_ERR_LIMIT: return "outside joint limits";
  }
  return "unknown status";
}

int twf_strlcpy(char *dst, const char *src, size_t size)
{
  size_t n;
  if (size == 0)
    return -1;
  if (src == NULL)
    src = "";
  n = strlen(src);
  if (n >= size) {
    memcpy(dst, src, size - 1);
    dst[size - 1] = '\0';
    return -1;
  }
  memcpy(dst, src, n + 1);
  return 0;
}

void twf_error_clear(twf_error *err)
{
  if (err == NULL)
    return;
  memset(err, 0, sizeof *err);
  err->status = TWF_OK;
}

/* Input bytes are quoted in messages ("unknown column '...'"); a control
 * character among them (an escape sequence, a carriage return) would act on
 * the user's terminal. Rewrite each control byte in place as \xNN, cutting
 * the text at a whole escape when the buffer is full. */
static void escape_controls(char *text, size_t size)
{
  char tmp[1024];
  size_t n = 0;
  const unsigned char *p;
  int any = 0;
  for (p = (const unsigned char *)text; *p; p++)
    if (*p < 0x20 || *p == 0x7f)
      any = 1;
  if (!any || size == 0)
    return;
  if (size > sizeof tmp)
    size = sizeof tmp;
  for (p = (const unsigned char *)text; *p && n + 1 < size; p++) {
    if (*p < 0x20 || *p == 0x7f) {
      if (n + 5 > size)
        break;
      snprintf(tmp + n, 5, "\\x%02x", (unsigned)*p);
      n += 4;
    } else {
      tmp[n++] = (char)*p;
    }
  }
  tmp[n] = '\0';
  twf_strlcpy(text, tmp, size);
}

twf_status twf_error_set(twf_error *err, twf_status status, const char *file,
                         long line, long column, const char *hint,
                         const char *fmt, ...)
{
  va_list ap;
  if (err == NULL)
    return status;
  err->status = status;
  twf_strlcpy(err->file, file ? file : "", sizeof err->file);
  err->line = line;
  err->column = column;
  va_start(ap, fmt);
  vsnprintf(err->message, sizeof err->message, fmt, ap);
  va_end(ap);
  escape_controls(err->message, sizeof err->message);
  twf_strlcpy(err->hint, hint ? hint : "", sizeof err->hint);
  escape_controls(err->hint, sizeof err->hint);
  return status;
}

void twf_warnings_init(twf_warnings *w)
{
  if (w != NULL)
    memset(w, 0, sizeof *w);
}

void twf_warnings_clear(twf_warnings *w)
{
  if (w == NULL)
    return;
  free(w->items);
  memset(w, 0, sizeof *w);
}

void twf_warnings_add(twf_warnings *w, const char *file, long line,
                      long column, const char *fmt, ...)
{
  va_list ap;
  twf_warning *item;
  if (w == NULL)
    return;
  if (w->count == w->capacity) {
    size_t cap = w->capacity ? 2 * w->capacity : 8;
    twf_warning *grown = realloc(w->items, cap * sizeof *grown);
    if (grown == NULL)
      return;
    w->items = grown;
    w->capacity = cap;
  }
  item = &w->items[w->count++];
  twf_strlcpy(item->file, file ? file : "", sizeof item->file);
  item->line = line;
  item->column = column;
  va_start(ap, fmt);
  vsnprintf(item->message, sizeof item->message, fmt, ap);
  va_end(ap);
  escape_controls(item->message, sizeof item->message);
}

const char *twf_version(void)
{
  return PACKAGE_VERSION;
}
