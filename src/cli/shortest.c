/* shortest.c: numbers a file reader turns back into the very same double.
 * %.17g reproduces any double but shows round-off (a limit read as 120 deg
 * is 2.0943951023931953 rad, and 2.0943951023931953 / (pi / 180) prints as
 * 119.99999999999999); the shortest of %.15g, %.16g and %.17g whose value,
 * converted to SI the way the readers do (value * unit), gives the same SI
 * double back is exact and shows 120. */
#include "config.h"
#include "cli.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>

static int reads_back(const char *s, double si, double unit)
{
  return strtod(s, NULL) * unit == si;
}

const char *cli_shortest_double(char *buf, size_t n, double si, double unit)
{
  double v = si / unit;
  if (si == 0.0) { /* -0 too: a sign on zero says nothing to a reader */
    snprintf(buf, n, "0");
    return buf;
  }
  if (!isfinite(si)) {
    snprintf(buf, n, "%g", si);
    return buf;
  }
  for (int prec = 15; prec <= 17; prec++) {
    snprintf(buf, n, "%.*g", prec, v);
    if (reads_back(buf, si, unit))
      return buf;
  }
  /* si / unit was rounded: a neighbour of it may multiply back exactly
   * (the model writer does the same). */
  for (int step = 1; step <= 4; step++) {
    double up = v, down = v;
    for (int i = 0; i < step; i++) {
      up = nextafter(up, INFINITY);
      down = nextafter(down, -INFINITY);
    }
    for (int prec = 15; prec <= 17; prec++) {
      snprintf(buf, n, "%.*g", prec, up);
      if (reads_back(buf, si, unit))
        return buf;
      snprintf(buf, n, "%.*g", prec, down);
      if (reads_back(buf, si, unit))
        return buf;
    }
  }
  snprintf(buf, n, "%.17g", v);
  return buf;
}
