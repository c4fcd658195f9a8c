/* io_util.c: small helpers of the readers and writers (growing arrays,
 * bounded message text). */
#include "io_internal.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>

int twf_io_grow(void **p, size_t *cap, size_t need, size_t sz)
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

void twf_io_appendf(char *buf, size_t n, const char *fmt, ...)
{
  size_t len = strlen(buf);
  va_list ap;
  if (len + 1 >= n)
    return;
  va_start(ap, fmt);
  vsnprintf(buf + len, n - len, fmt, ap);
  va_end(ap);
}

int twf_io_mantissa_nonzero(const char *s)
{
  int hex = 0;
  if (*s == '+' || *s == '-')
    s++;
  if (s[0] == '0' && (s[1] == 'x' || s[1] == 'X')) {
    hex = 1;
    s += 2;
  }
  for (; *s; s++) {
    if (hex ? (*s == 'p' || *s == 'P') : (*s == 'e' || *s == 'E'))
      break;
    if ((*s >= '1' && *s <= '9') ||
        (hex && ((*s >= 'a' && *s <= 'f') || (*s >= 'A' && *s <= 'F'))))
      return 1;
  }
  return 0;
}
