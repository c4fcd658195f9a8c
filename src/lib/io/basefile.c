/* basefile.c: the small file that holds a base pose (robot base frame in
 * the measuring instrument's frame), written by calibrate and read by verify --base. INI
 * read through the strict INI layer of the model file (inistrict.c):
 * unknown or repeated keys, missing keys, bad numbers and a non-unit
 * quaternion are refused. */
#include "inistrict.h"
#include "io_internal.h"

#include <errno.h>
#include <stdlib.h>

/* One section: [base], or [station NAME] of a file of several stations. */
typedef struct base_sec {
  char name[TWF_NAME_MAX]; /* "" for [base] */
  long line;
  int have_unit, have_pos, have_quat;
  twf_length_unit unit;
  double pos[3], quat[4];
  long pos_line;
} base_sec;

typedef struct base_ctx {
  twf_ini_strict ini;     /* path, error, line number, first status */
  size_t n, max;          /* sections seen, room */
  base_sec *sec;          /* max entries */
  int seen_base, seen_station;
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

/* The station name of a section name "station NAME", NULL for another. */
static const char *station_of(const char *section)
{
  return strncmp(section, "station ", 8) == 0 ? section + 8 : NULL;
}

/* The strict layer has stripped the indentation (inih would take an
 * indented line for a continuation of the previous value). inih does not
 * report sections, empty ones included: check section lines here. */
static void check_line(void *user, twf_ini_strict *ini, const char *p)
{
  base_ctx *c = user;
  char name[TWF_NAME_MAX + 16];
  const char *close, *st;
  size_t k, len;
  if (*p != '[' || c->ini.status != TWF_OK)
    return;
  close = strchr(p, ']');
  len = close ? (size_t)(close - p - 1) : 0;
  if (close == NULL || len >= sizeof name) {
    fail_at(c, TWF_ERR_UNKNOWN, ini->lineno,
            "a base pose file holds one [base] section, or one [station NAME] per station",
            "unknown section", NULL);
    return;
  }
  memcpy(name, p + 1, len);
  name[len] = '\0';
  st = station_of(name);
  if (strcmp(name, "base") != 0 && st == NULL) {
    fail_at(c, TWF_ERR_UNKNOWN, ini->lineno,
            "a base pose file holds one [base] section, or one [station NAME] per station",
            "unknown section", NULL);
    return;
  }
  if (st != NULL && twf_station_name_check(st) != 0) {
    fail_at(c, TWF_ERR_VALUE, ini->lineno,
            "name stations with letters, digits, '_', '-' and '.'", "invalid station name: ", st);
    return;
  }
  if ((st == NULL && (c->seen_base || c->seen_station)) || (st != NULL && c->seen_base)) {
    fail_at(c, TWF_ERR_DUPLICATE, ini->lineno,
            c->seen_station ? "give either one [base] section or [station NAME] sections"
                            : "keep one [base] section",
            st == NULL && c->seen_base ? "duplicate section [base]" : "[base] beside [station] sections",
            NULL);
    return;
  }
  for (k = 0; st != NULL && k < c->n; k++)
    if (strcmp(c->sec[k].name, st) == 0) {
      fail_at(c, TWF_ERR_DUPLICATE, ini->lineno, "give each station one section",
              "duplicate section for station ", st);
      return;
    }
  if (c->n == c->max) {
    fail_at(c, TWF_ERR_VALUE, ini->lineno, "give fewer stations", "too many stations", NULL);
    return;
  }
  memset(&c->sec[c->n], 0, sizeof c->sec[c->n]);
  twf_strlcpy(c->sec[c->n].name, st ? st : "", TWF_NAME_MAX);
  c->sec[c->n].line = ini->lineno;
  c->n++;
  if (st == NULL)
    c->seen_base = 1;
  else
    c->seen_station = 1;
}

static int handler(void *user, const char *section, const char *name, const char *value)
{
  base_ctx *c = user;
  base_sec *b;
  if (c->ini.status != TWF_OK)
    return 1;
  if (c->n == 0 || (strcmp(section, "base") != 0 && station_of(section) == NULL))
    return fail_at(c, TWF_ERR_SYNTAX, c->ini.lineno, "put the keys under [base]", "key outside [base]: ", name);
  b = &c->sec[c->n - 1];
  if (strcmp(name, "length_unit") == 0) {
    if (b->have_unit)
      return fail_at(c, TWF_ERR_DUPLICATE, c->ini.lineno, "give each key once", "duplicate key: ", name);
    b->have_unit = 1;
    if (twf_length_unit_parse(value, &b->unit) != TWF_OK)
      return fail_at(c, TWF_ERR_UNITS, c->ini.lineno, "use mm, m, um or in", "unknown length unit: ", value);
  } else if (strcmp(name, "position") == 0) {
    if (b->have_pos)
      return fail_at(c, TWF_ERR_DUPLICATE, c->ini.lineno, "give each key once", "duplicate key: ", name);
    b->have_pos = 1;
    b->pos_line = c->ini.lineno;
    if (parse_vec(value, b->pos, 3) != 0)
      return fail_at(c, TWF_ERR_VALUE, c->ini.lineno, "give three finite numbers x y z",
                     "bad position: ", value);
  } else if (strcmp(name, "quaternion_wxyz") == 0) {
    if (b->have_quat)
      return fail_at(c, TWF_ERR_DUPLICATE, c->ini.lineno, "give each key once", "duplicate key: ", name);
    b->have_quat = 1;
    if (parse_vec(value, b->quat, 4) != 0)
      return fail_at(c, TWF_ERR_VALUE, c->ini.lineno, "give four finite numbers w x y z",
                     "bad quaternion: ", value);
    {
      double n;
      char msg[TWF_ERROR_TEXT_MAX], hint[TWF_ERROR_TEXT_MAX];
      if (!twf_io_quat_is_unit(b->quat, &n))
        return fail_at(c, TWF_ERR_VALUE, c->ini.lineno, twf_io_quat_norm_hint(hint, sizeof hint, ""),
                       twf_io_quat_norm_message(msg, sizeof msg, "quaternion_wxyz", n), NULL);
    }
  } else {
    return fail_at(c, TWF_ERR_UNKNOWN, c->ini.lineno,
                   "the keys are length_unit, position and quaternion_wxyz", "unknown key: ", name);
  }
  return 1;
}

static twf_status read_base(const char *path, const twf_read_options *opt, twf_pose *bases,
                            char (*names)[TWF_NAME_MAX], size_t max, size_t *n_out,
                            twf_input_digest *digest, twf_error *err)
{
  base_ctx c;
  int rc, a;
  size_t k;
  twf_status st = TWF_OK;
  memset(&c, 0, sizeof c);
  c.max = max;
  c.sec = calloc(max ? max : 1, sizeof *c.sec);
  if (c.sec == NULL)
    return twf_error_set(err, TWF_ERR_NOMEM, path, 0, 0, NULL, "out of memory");
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
  if (c.ini.status != TWF_OK) {
    st = c.ini.status;
    goto done;
  }
  if (rc != 0) {
    st = twf_error_set(err, TWF_ERR_SYNTAX, path, rc, 0, "write 'key = value' lines under [base]",
                       "malformed line");
    goto done;
  }
  if (c.n == 0) {
    st = twf_error_set(err, TWF_ERR_MISSING, path, 0, 0,
                       "give [base] with length_unit, position and quaternion_wxyz",
                       "incomplete base pose file");
    goto done;
  }
  for (k = 0; k < c.n; k++) {
    const base_sec *b = &c.sec[k];
    if (!b->have_unit || !b->have_pos || !b->have_quat) {
      st = b->name[0] ? twf_error_set(err, TWF_ERR_MISSING, path, b->line, 0,
                                      "give [station NAME] with length_unit, position and quaternion_wxyz",
                                      "incomplete section of station %s", b->name)
                      : twf_error_set(err, TWF_ERR_MISSING, path, 0, 0,
                                      "give [base] with length_unit, position and quaternion_wxyz",
                                      "incomplete base pose file");
      goto done;
    }
    for (a = 0; a < 3; a++)
      if (!(fabs(twf_length_to_si(b->pos[a], b->unit)) <= TWF_READ_LENGTH_MAX)) {
        st = twf_error_set(err, TWF_ERR_VALUE, path, b->pos_line, a + 1,
                           "check the value and the file's length unit: no cell comes "
                           "near the limit",
                           "position: %g %s lies beyond %g m, the largest length accepted",
                           b->pos[a], twf_length_unit_name(b->unit), TWF_READ_LENGTH_MAX);
        goto done;
      }
  }
  for (k = 0; k < c.n; k++) {
    twf_quat_to_rot(c.sec[k].quat, bases[k].R);
    for (a = 0; a < 3; a++)
      bases[k].p[a] = twf_length_to_si(c.sec[k].pos[a], c.sec[k].unit);
    if (names != NULL)
      twf_strlcpy(names[k], c.sec[k].name, TWF_NAME_MAX);
  }
  *n_out = c.n;
  if (digest != NULL)
    *digest = c.ini.digest;
done:
  free(c.sec);
  return st;
}

twf_status twf_base_read_stations(const char *path, const twf_read_options *opt, twf_pose *bases,
                                  char (*names)[TWF_NAME_MAX], size_t max, size_t *n,
                                  twf_input_digest *digest, twf_error *err)
{
  twf_io_c_locale loc;
  twf_status st;
  if (digest != NULL)
    memset(digest, 0, sizeof *digest);
  if (path == NULL || bases == NULL || n == NULL || max == 0)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "no base pose file or no poses to fill given");
  st = twf_io_c_locale_enter(&loc, err);
  if (st != TWF_OK)
    return st;
  st = read_base(path, opt, bases, names, max, n, digest, err);
  twf_io_c_locale_leave(&loc);
  return st;
}

twf_status twf_base_read(const char *path, twf_pose *base_in_tracker, twf_error *err)
{
  return twf_base_read_with(path, NULL, base_in_tracker, NULL, err);
}

twf_status twf_base_read_with(const char *path, const twf_read_options *opt,
                              twf_pose *base_in_tracker,
                              twf_input_digest *digest, twf_error *err)
{
  size_t n = 0;
  if (path == NULL || base_in_tracker == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "no base pose file or no pose to fill given");
  /* one [base] section: a file of stations has more than one section, or
   * one [station] section, refused here */
  {
    twf_pose tmp[TWF_STATIONS_MAX];
    char names[TWF_STATIONS_MAX][TWF_NAME_MAX];
    twf_status st = twf_base_read_stations(path, opt, tmp, names, TWF_STATIONS_MAX, &n, digest, err);
    if (st != TWF_OK)
      return st;
    if (n != 1 || names[0][0] != '\0')
      return twf_error_set(err, TWF_ERR_UNKNOWN, path, 0, 0,
                           "give the base pose file of a campaign of one station",
                           "the base pose file holds %zu station section%s, not one [base] section", n,
                           n == 1 ? "" : "s");
    *base_in_tracker = tmp[0];
  }
  return TWF_OK;
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

twf_status twf_base_write_stations(const twf_pose *bases, const char (*names)[TWF_NAME_MAX], size_t n,
                                   twf_length_unit u, const char *comment, FILE *out,
                                   twf_error *err)
{
  twf_io_c_locale loc;
  twf_status st;
  size_t k;
  if (bases == NULL || out == NULL || n == 0 || (n > 1 && names == NULL))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "no base poses or station names given");
  if (n == 1)
    return twf_base_write(bases, u, comment, out, err);
  for (k = 0; k < n; k++)
    if (memchr(names[k], '\0', TWF_NAME_MAX) == NULL || twf_station_name_check(names[k]) != 0)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "invalid station name");
  if ((st = twf_io_c_locale_enter(&loc, err)) != TWF_OK)
    return st;
  if (comment != NULL)
    fprintf(out, "; %s\n", comment);
  fprintf(out, "; robot base frame in the measuring instrument's frame at each station "
               "(x_instrument = R x_base + p)\n");
  for (k = 0; k < n; k++) {
    double q[4];
    twf_rot_to_quat(bases[k].R, q);
    fprintf(out, "%s[station %s]\nlength_unit = %s\nposition = %.17g %.17g %.17g\n"
                 "quaternion_wxyz = %.17g %.17g %.17g %.17g\n",
            k ? "\n" : "", names[k], twf_length_unit_name(u), twf_length_from_si(bases[k].p[0], u),
            twf_length_from_si(bases[k].p[1], u), twf_length_from_si(bases[k].p[2], u), q[0], q[1], q[2],
            q[3]);
  }
  twf_io_c_locale_leave(&loc);
  if (ferror(out))
    return twf_error_set(err, TWF_ERR_IO, NULL, 0, 0, NULL, "cannot write the base poses");
  return TWF_OK;
}
