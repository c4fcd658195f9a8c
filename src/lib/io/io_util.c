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

int twf_io_quat_is_unit(const double q[4], double *norm)
{
  *norm = sqrt(q[0] * q[0] + q[1] * q[1] + q[2] * q[2] + q[3] * q[3]);
  return fabs(*norm - 1.0) <= TWF_IO_QUAT_NORM_TOL;
}

const char *twf_io_quat_norm_message(char *buf, size_t n, const char *what, double norm)
{
  snprintf(buf, n, "%s has norm %.9g, not 1 within %g", what, norm, TWF_IO_QUAT_NORM_TOL);
  return buf;
}

const char *twf_io_quat_norm_hint(char *buf, size_t n, const char *tail)
{
  snprintf(buf, n, "give a unit quaternion w x y z (norm within %g of 1)%s", TWF_IO_QUAT_NORM_TOL,
           tail != NULL ? tail : "");
  return buf;
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
