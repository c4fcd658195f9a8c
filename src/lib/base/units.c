/* units.c: the length and angle units files may declare, and the one
 * conversion between them and SI. Conversion happens once, in the readers
 * and writers. */
#include "internal.h"

#include <strings.h>

static const struct { const char *name; twf_length_unit unit; } length_names[] = {
  { "mm", TWF_LENGTH_MM }, { "millimetre", TWF_LENGTH_MM }, { "millimeter", TWF_LENGTH_MM },
  { "m", TWF_LENGTH_M }, { "metre", TWF_LENGTH_M }, { "meter", TWF_LENGTH_M },
  { "um", TWF_LENGTH_UM }, { "micrometre", TWF_LENGTH_UM }, { "micrometer", TWF_LENGTH_UM },
  { "in", TWF_LENGTH_IN }, { "inch", TWF_LENGTH_IN },
};

static const struct { const char *name; twf_angle_unit unit; } angle_names[] = {
  { "deg", TWF_ANGLE_DEG }, { "degree", TWF_ANGLE_DEG }, { "degrees", TWF_ANGLE_DEG },
  { "rad", TWF_ANGLE_RAD }, { "radian", TWF_ANGLE_RAD }, { "radians", TWF_ANGLE_RAD },
  { "mrad", TWF_ANGLE_MRAD }, { "milliradian", TWF_ANGLE_MRAD },
};

twf_status twf_length_unit_parse(const char *name, twf_length_unit *out)
{
  size_t i;
  if (name == NULL)
    return TWF_ERR_UNITS;
  for (i = 0; i < sizeof length_names / sizeof length_names[0]; i++)
    if (strcasecmp(name, length_names[i].name) == 0) {
      *out = length_names[i].unit;
      return TWF_OK;
    }
  return TWF_ERR_UNITS;
}

twf_status twf_angle_unit_parse(const char *name, twf_angle_unit *out)
{
  size_t i;
  if (name == NULL)
    return TWF_ERR_UNITS;
  for (i = 0; i < sizeof angle_names / sizeof angle_names[0]; i++)
    if (strcasecmp(name, angle_names[i].name) == 0) {
      *out = angle_names[i].unit;
      return TWF_OK;
    }
  return TWF_ERR_UNITS;
}

const char *twf_length_unit_name(twf_length_unit u)
{
  switch (u) {
  case TWF_LENGTH_MM: return "mm";
  case TWF_LENGTH_M: return "m";
  case TWF_LENGTH_UM: return "um";
  case TWF_LENGTH_IN: return "in";
  }
  return "?";
}

const char *twf_angle_unit_name(twf_angle_unit u)
{
  switch (u) {
  case TWF_ANGLE_DEG: return "deg";
  case TWF_ANGLE_RAD: return "rad";
  case TWF_ANGLE_MRAD: return "mrad";
  }
  return "?";
}

double twf_length_unit_si(twf_length_unit u)
{
  switch (u) {
  case TWF_LENGTH_MM: return 1e-3;
  case TWF_LENGTH_M: return 1.0;
  case TWF_LENGTH_UM: return 1e-6;
  case TWF_LENGTH_IN: return 0.0254;
  }
  return 1.0;
}

double twf_angle_unit_si(twf_angle_unit u)
{
  switch (u) {
  case TWF_ANGLE_DEG: return TWF_PI / 180.0;
  case TWF_ANGLE_RAD: return 1.0;
  case TWF_ANGLE_MRAD: return 1e-3;
  }
  return 1.0;
}

/* One rule for every reader, writer and report: multiply by the SI value
 * of one unit on the way in, divide by it on the way out, so that a figure
 * a report derives with twf_length_unit_si agrees bit for bit with the
 * value a reader stored. Dividing by the exact 1000 would round better
 * (v * 1e-3 is one ulp off the double nearest v/1000 for about 14 % of
 * millimetre values), but every result that hangs on the last bit, such
 * as the order in which equally redundant parameters are named, would
 * move with it. */
double twf_length_to_si(double v, twf_length_unit u)
{
  return v * twf_length_unit_si(u);
}

double twf_length_from_si(double si, twf_length_unit u)
{
  return si / twf_length_unit_si(u);
}

double twf_angle_to_si(double v, twf_angle_unit u)
{
  return v * twf_angle_unit_si(u);
}

double twf_angle_from_si(double si, twf_angle_unit u)
{
  return si / twf_angle_unit_si(u);
}
