/* basefile.c: the small file that holds a base pose (robot base frame in
 * the measuring instrument's frame), written by calibrate and read by verify --base. INI
 * read through the strict INI layer of the model file (inistrict.c):
 * unknown or repeated keys, missing keys, bad numbers and a non-unit
 * quaternion are refused. */
#include "inistrict.h"
#include "io_internal.h"

#include <errno.h>
#include <stdlib.h>

typedef struct base_ctx {
  twf_ini_strict ini;     /* path, error, line number, first status */
  int seen_base;
  int have_unit, have_pos, have_quat;
  twf_length_unit unit;
  double pos[3], quat[4];
  long pos_line;
} base_ctx;

static int fail_at(base_ctx *c, twf_status st, long line, const char *hint, const char *msg,
                   const char *detail)
{
  twf_ini_fail(&c->ini, st, line, 0, hint, "%s%s", msg, detail ? detail : "");
  return 0;
}

static int parse_vec(const char *text, double *out, int n)
{
  const char *s = text;
  int i;
  for (i = 0; i < n; i++) {
    char *end;
    errno = 0;
    out[i] = strtod(s, &end);
    if (end == s || errno == ERANGE || !isfinite(out[i]))
      return -1;
    s = end;
  }
  while (*s == ' ' || *s == '\t')
    s++;
  return *s == '\0' ? 0 : -1;
}

/* The strict layer has stripped the indentation (inih would take an
 * indented line for a continuation of the previous value). inih does not
 * report sections, empty ones included: check section lines here. */
static void check_line(void *user, twf_ini_strict *ini, const char *p)
{
  base_ctx *c = user;
  if (*p == '[') {
    if (strncmp(p, "[base]", 6) != 0)
      fail_at(c, TWF_ERR_UNKNOWN, ini->lineno, "a base pose file holds one [base] section",
              "unknown section", NULL);
    else if (c->seen_base)
      fail_at(c, TWF_ERR_DUPLICATE, ini->lineno, "keep one [base] section",
              "duplicate section [base]", NULL);
    c->seen_base = 1;
  }
}

static int handler(void *user, const char *section, const char *name, const char *value)
{
  base_ctx *c = user;
  if (c->ini.status != TWF_OK)
    return 1;
  if (strcmp(section, "base") != 0)
    return fail_at(c, TWF_ERR_SYNTAX, c->ini.lineno, "put the keys under [base]", "key outside [base]: ", name);
  if (strcmp(name, "length_unit") == 0) {
    if (c->have_unit)
      return fail_at(c, TWF_ERR_DUPLICATE, c->ini.lineno, "give each key once", "duplicate key: ", name);
    c->have_unit = 1;
    if (twf_length_unit_parse(value, &c->unit) != TWF_OK)
      return fail_at(c, TWF_ERR_UNITS, c->ini.lineno, "use mm, m, um or in", "unknown length unit: ", value);
  } else if (strcmp(name, "position") == 0) {
    if (c->have_pos)
      return fail_at(c, TWF_ERR_DUPLICATE, c->ini.lineno, "give each key once", "duplicate key: ", name);
    c->have_pos = 1;
    c->pos_line = c->ini.lineno;
    if (parse_vec(value, c->pos, 3) != 0)
      return fail_at(c, TWF_ERR_VALUE, c->ini.lineno, "give three finite numbers x y z",
                     "bad position: ", value);
  } else if (strcmp(name, "quaternion_wxyz") == 0) {
    if (c->have_quat)
      return fail_at(c, TWF_ERR_DUPLICATE, c->ini.lineno, "give each key once", "duplicate key: ", name);
    c->have_quat = 1;
    if (parse_vec(value, c->quat, 4) != 0)
      return fail_at(c, TWF_ERR_VALUE, c->ini.lineno, "give four finite numbers w x y z",
                     "bad quaternion: ", value);
    {
      double n;
      char msg[TWF_ERROR_TEXT_MAX], hint[TWF_ERROR_TEXT_MAX];
      if (!twf_io_quat_is_unit(c->quat, &n))
        return fail_at(c, TWF_ERR_VALUE, c->ini.lineno, twf_io_quat_norm_hint(hint, sizeof hint, ""),
                       twf_io_quat_norm_message(msg, sizeof msg, "quaternion_wxyz", n), NULL);
    }
  } else {
    return fail_at(c, TWF_ERR_UNKNOWN, c->ini.lineno,
                   "the keys are length_unit, position and quaternion_wxyz", "unknown key: ", name);
  }
  return 1;
}

static twf_status read_base(const char *path, const twf_read_options *opt,
                            twf_pose *base_in_tracker, twf_input_digest *digest,
                            twf_error *err)
{
  base_ctx c;
  int rc, a;
  memset(&c, 0, sizeof c);
  c.ini.path = path;
  c.ini.err = err;
  c.ini.what = "a base pose file";
  c.ini.line = check_line;
  c.ini.pair = handler;
  c.ini.user = &c;
  c.ini.long_line_message = "line too long";
  c.ini.long_line_hint = "keep lines under 199 characters";
  c.ini.name = "the base pose file";
  c.ini.max_size = opt && opt->max_input_size ? opt->max_input_size
                                               : TWF_INPUT_SIZE_DEFAULT;
  rc = twf_ini_parse(&c.ini);
  if (c.ini.status != TWF_OK)
    return c.ini.status;
  if (rc != 0)
    return twf_error_set(err, TWF_ERR_SYNTAX, path, rc, 0, "write 'key = value' lines under [base]",
                         "malformed line");
  if (!c.seen_base || !c.have_unit || !c.have_pos || !c.have_quat)
    return twf_error_set(err, TWF_ERR_MISSING, path, 0, 0,
                         "give [base] with length_unit, position and quaternion_wxyz",
                         "incomplete base pose file");
  for (a = 0; a < 3; a++)
    if (!(fabs(twf_length_to_si(c.pos[a], c.unit)) <= TWF_READ_LENGTH_MAX))
      return twf_error_set(err, TWF_ERR_VALUE, path, c.pos_line, a + 1,
                           "check the value and the file's length unit: no cell comes "
                           "near the limit",
                           "position: %g %s lies beyond %g m, the largest length accepted",
                           c.pos[a], twf_length_unit_name(c.unit), TWF_READ_LENGTH_MAX);
  twf_quat_to_rot(c.quat, base_in_tracker->R);
  for (a = 0; a < 3; a++)
    base_in_tracker->p[a] = twf_length_to_si(c.pos[a], c.unit);
  if (digest != NULL)
    *digest = c.ini.digest;
  return TWF_OK;
}

twf_status twf_base_read(const char *path, twf_pose *base_in_tracker, twf_error *err)
{
  return twf_base_read_with(path, NULL, base_in_tracker, NULL, err);
}

twf_status twf_base_read_with(const char *path, const twf_read_options *opt,
                              twf_pose *base_in_tracker,
                              twf_input_digest *digest, twf_error *err)
{
  twf_io_c_locale loc;
  twf_status st;
  if (digest != NULL)
    memset(digest, 0, sizeof *digest);
  if (path == NULL || base_in_tracker == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "no base pose file or no pose to fill given");
  st = twf_io_c_locale_enter(&loc, err);
  if (st != TWF_OK)
    return st;
  st = read_base(path, opt, base_in_tracker, digest, err);
  twf_io_c_locale_leave(&loc);
  return st;
}

twf_status twf_base_write(const twf_pose *base_in_tracker, twf_length_unit u,
                          const char *comment, FILE *out, twf_error *err)
{
  twf_io_c_locale loc;
  twf_status st;
  double q[4];
  twf_rot_to_quat(base_in_tracker->R, q);
  if ((st = twf_io_c_locale_enter(&loc, err)) != TWF_OK)
    return st;
  if (comment != NULL)
    fprintf(out, "; %s\n", comment);
  fprintf(out, "; robot base frame in the measuring instrument's frame (x_instrument = R x_base + p)\n"
               "[base]\nlength_unit = %s\nposition = %.17g %.17g %.17g\n"
               "quaternion_wxyz = %.17g %.17g %.17g %.17g\n",
          twf_length_unit_name(u), twf_length_from_si(base_in_tracker->p[0], u),
          twf_length_from_si(base_in_tracker->p[1], u),
          twf_length_from_si(base_in_tracker->p[2], u), q[0], q[1], q[2], q[3]);
  twf_io_c_locale_leave(&loc);
  if (ferror(out))
    return twf_error_set(err, TWF_ERR_IO, NULL, 0, 0, NULL, "cannot write the base pose");
  return TWF_OK;
}
