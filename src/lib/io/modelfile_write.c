/* modelfile_write.c: writing model files, twistfit-model(5), in the
 * axis-and-point form with the shortest decimals that read back to the
 * same doubles. */
#include "modelfile_internal.h"

#include <errno.h>
#include <stdlib.h>

/* How a number is stored in the file: as is, or in the declared unit. */
typedef enum conv_kind { CONV_NONE, CONV_LEN, CONV_ANG } conv_kind;

typedef struct units {
  twf_length_unit lu;
  twf_angle_unit au;
} units;

static double to_si(double v, conv_kind k, const units *u)
{
  return k == CONV_LEN ? twf_length_to_si(v, u->lu) : k == CONV_ANG ? twf_angle_to_si(v, u->au) : v;
}

static double from_si(double v, conv_kind k, const units *u)
{
  return k == CONV_LEN ? twf_length_from_si(v, u->lu) : k == CONV_ANG ? twf_angle_from_si(v, u->au) : v;
}

/* The shortest decimal (at most 17 significant digits) that the reader
 * turns back into the very same SI double: 120 deg stays 120 although
 * (120 pi/180) 180/pi is 119.99999999999999. When no decimal does (the
 * conversion is not always invertible), %.17g of a neighbour of the
 * converted value that converts back exactly, else of the converted value
 * itself (an ulp or two off). -0 is written as 0. */
static void put_num(FILE *out, double si, conv_kind k, const units *u)
{
  char s[40];
  double v = from_si(si, k, u);
  if (si == 0.0) {
    fputc('0', out);
    return;
  }
  for (int prec = 1; prec <= 17; prec++) {
    snprintf(s, sizeof s, "%.*g", prec, v);
    if (to_si(strtod(s, NULL), k, u) == si) {
      /* %g writes 1060 as 1.06e+03 at 3 digits: plain notation reads
       * better and is the same number. */
      if (strchr(s, 'e') != NULL && fabs(v) >= 1e-4 && fabs(v) < 1e17) {
        char f[40];
        int decimals = prec - 1 - (int)floor(log10(fabs(v)));
        snprintf(f, sizeof f, "%.*f", decimals > 0 ? decimals : 0, v);
        if (to_si(strtod(f, NULL), k, u) == si)
          memcpy(s, f, sizeof s);
      }
      fputs(s, out);
      return;
    }
  }
  /* v = from_si(si) was rounded: a neighbour of it may convert back
   * exactly, and %.17g reproduces any double. */
  for (int step = 1; step <= 4; step++) {
    double up = v, down = v;
    for (int i = 0; i < step; i++) {
      up = nextafter(up, INFINITY);
      down = nextafter(down, -INFINITY);
    }
    if (to_si(up, k, u) == si) {
      v = up;
      break;
    }
    if (to_si(down, k, u) == si) {
      v = down;
      break;
    }
  }
  snprintf(s, sizeof s, "%.17g", v);
  fputs(s, out);
}

static void put_nums(FILE *out, const char *key, const double *si, size_t n,
                     conv_kind k, const units *u)
{
  fprintf(out, "%s =", key);
  for (size_t i = 0; i < n; i++) {
    fputc(' ', out);
    put_num(out, si[i], k, u);
  }
  fputc('\n', out);
}

/* "key = text" for a text made by text_for_file. A ';' after a blank
 * starts an end comment, so a text that begins with ';' is written right
 * after the '=' ("name =;x"), where the reader takes it as the value. */
/* "key = text", or "key=text" where the spaces would take the line past
 * TWF_MODEL_LINE_MAX: the reader took a line "key =text" of that length,
 * and the written model must read back. */
static void put_text(FILE *out, const char *key, const char *text)
{
  if (strlen(key) + 3 + strlen(text) > TWF_MODEL_LINE_MAX)
    fprintf(out, "%s=%s\n", key, text);
  else
    fprintf(out, text[0] == ';' ? "%s =%s\n" : "%s = %s\n", key, text);
}

/* A text value as the reader will give it back, where possible: control
 * characters (line ends included) become spaces, blanks before ';' are
 * dropped (the reader would cut a comment there), and the ends are
 * trimmed (the reader trims them). dst holds at least strlen(src) + 1. */
static void text_for_file(const char *src, char *dst)
{
  size_t n = 0;
  for (; *src; src++) {
    unsigned char ch = (unsigned char)*src;
    if (ch < 0x20 || ch == 0x7f)
      ch = ' ';
    if (ch == ';')
      while (n > 0 && twf_mf_is_blank(dst[n - 1]))
        n--;
    if (ch == ' ' && n == 0)
      continue;
    dst[n++] = (char)ch;
  }
  while (n > 0 && twf_mf_is_blank(dst[n - 1]))
    n--;
  dst[n] = '\0';
}

static int finite_n(const double *v, size_t n)
{
  for (size_t i = 0; i < n; i++)
    if (!isfinite(v[i]))
      return 0;
  return 1;
}

/* Values the reader refuses as implausible (TWF_READ_*_MAX) are not
 * written either: every file written reads back. */
static int within_n(const double *v, size_t n, double max)
{
  for (size_t i = 0; i < n; i++)
    if (!(fabs(v[i]) <= max))
      return 0;
  return 1;
}

/* What the writer puts in a revolute joint's file: the unit axis and a
 * point of the twist's line. The stored reference point is kept when it
 * lies on the line (so 450 mm stays 450), else it is projected onto it. */
static void revolute_axis_point(const twf_joint *j, double w[3], double q[3])
{
  double n = twf_v3_norm(j->twist), v[3], q0[3], d[3], t, dist2 = 0.0;
  for (int i = 0; i < 3; i++) {
    w[i] = j->twist[i] / n;
    v[i] = j->twist[3 + i] / n;
  }
  twf_v3_cross(w, v, q0); /* the line's point closest to the origin */
  for (int i = 0; i < 3; i++)
    d[i] = j->point[i] - q0[i];
  t = twf_v3_dot(w, d);
  for (int i = 0; i < 3; i++) {
    double e = d[i] - t * w[i];
    dist2 += e * e;
  }
  if (sqrt(dist2) <= 1e-13 * fmax(1.0, twf_v3_norm(j->point))) {
    twf_v3_copy(j->point, q);
    return;
  }
  for (int i = 0; i < 3; i++)
    q[i] = q0[i] + t * w[i];
}

static twf_status write_check(const twf_model *m, twf_error *err)
{
  double det;
  twf_pose home;
  if (m->n_joints == 0 || m->joints == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "model has no joints");
  if (strcmp(twf_length_unit_name(m->length_unit), "?") == 0 ||
      strcmp(twf_angle_unit_name(m->angle_unit), "?") == 0)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "model declares an unknown unit (%d, %d)",
                         (int)m->length_unit, (int)m->angle_unit);
  if (m->n_targets > 0 && m->targets == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "model has %zu targets but no target array",
                         m->n_targets);
  for (size_t i = 0; i < m->n_joints; i++) {
    const twf_joint *j = &m->joints[i];
    double wn = twf_v3_norm(j->twist), vn = twf_v3_norm(j->twist + 3);
    if (!twf_mf_name_chars_ok(j->name) || strlen(j->name) >= TWF_NAME_MAX ||
        twf_model_joint_index(m, j->name) != (long)i)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, twf_mf_name_hint,
                           "joint %zu has an invalid or repeated name '%s'",
                           i + 1, j->name);
    if (!finite_n(j->twist, 6) || !finite_n(j->point, 3) ||
        !isfinite(j->scale) || !isfinite(j->offset) ||
        (j->has_limits && (!isfinite(j->limit_lo) || !isfinite(j->limit_hi))))
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "joint %s has a non-finite value", j->name);
    if (j->scale == 0.0)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "joint %s has scale zero", j->name);
    {
      double q_max = j->type == TWF_JOINT_REVOLUTE ? TWF_READ_ANGLE_MAX : TWF_READ_LENGTH_MAX;
      double lim[2] = { j->limit_lo, j->limit_hi };
      if (!within_n(j->point, 3, TWF_READ_LENGTH_MAX) || !within_n(&j->scale, 1, TWF_READ_SCALE_MAX) ||
          !within_n(&j->offset, 1, q_max) || (j->has_limits && !within_n(lim, 2, q_max)))
        return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0,
                             "lengths up to 1 km, angles up to 1e4 rad and scales up to 1e6 "
                             "are read back (twistfit-model(5))",
                             "joint %s has a value beyond the range the reader accepts", j->name);
    }
    if (j->has_limits && j->limit_lo > j->limit_hi)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "joint %s has lower limit above upper limit",
                           j->name);
    if (j->type == TWF_JOINT_REVOLUTE) {
      /* The axis-and-point form has no screw pitch w . v. */
      if (wn == 0.0 ||
          fabs(twf_v3_dot(j->twist, j->twist + 3)) > 1e-9 * wn * wn)
        return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0,
                             "a revolute twist is (w, -w x q) with w != 0",
                             "joint %s is not a pure rotation twist", j->name);
    } else if (j->type == TWF_JOINT_PRISMATIC) {
      if (vn == 0.0 || wn > 1e-12 * vn)
        return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0,
                             "a prismatic twist is (0, u) with u != 0",
                             "joint %s is not a pure translation twist",
                             j->name);
    } else {
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "joint %s has unknown type %d", j->name,
                           (int)j->type);
    }
  }
  for (size_t i = 0; i < m->n_joints; i++) {
    const twf_joint *j = &m->joints[i];
    if (!isfinite(j->compliance) || !(fabs(j->compliance) <= TWF_READ_COMPLIANCE_MAX) ||
        (j->type != TWF_JOINT_REVOLUTE && j->compliance != 0.0))
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "joint %s has a compliance the reader would refuse", j->name);
    if (j->has_mass && (!(j->mass > 0.0) || !(j->mass <= TWF_READ_MASS_MAX) ||
                        !finite_n(j->mass_center, 3) ||
                        !within_n(j->mass_center, 3, TWF_READ_LENGTH_MAX)))
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "the body of joint %s has a mass or centre the reader would refuse",
                           j->name);
  }
  for (size_t i = 0; i < m->n_payloads; i++) {
    const twf_payload *pl = &m->payloads[i];
    if (!twf_mf_name_chars_ok(pl->name) || strlen(pl->name) >= TWF_NAME_MAX ||
        twf_model_payload_index(m, pl->name) != (long)i)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, twf_mf_name_hint,
                           "payload %zu has an invalid or repeated name '%s'", i + 1, pl->name);
    if (!(pl->mass > 0.0) || !(pl->mass <= TWF_READ_MASS_MAX) || !finite_n(pl->center, 3) ||
        !within_n(pl->center, 3, TWF_READ_LENGTH_MAX))
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "payload %s has a mass or centre the reader would refuse", pl->name);
  }
  if (!finite_n(m->gravity, 3) || !(fabs(twf_v3_norm(m->gravity) - 1.0) < 1e-9))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "the gravity direction is not a unit vector");
  for (size_t i = 0; i < m->n_targets; i++) {
    const twf_target *t = &m->targets[i];
    if (!twf_mf_name_chars_ok(t->name) || strlen(t->name) >= TWF_NAME_MAX ||
        twf_model_target_index(m, t->name) != (long)i)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, twf_mf_name_hint,
                           "target %zu has an invalid or repeated name '%s'",
                           i + 1, t->name);
    if (t->offset_known && !finite_n(t->offset, 3))
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "target %s has a non-finite offset", t->name);
    if (t->offset_known && !within_n(t->offset, 3, TWF_READ_LENGTH_MAX))
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "target %s has an offset beyond 1 km", t->name);
  }
  /* A local copy: GCC 12 misjudges the size of m->home.R as an argument
   * (-Wstringop-overflow false positive). */
  home = m->home;
  if (!finite_n(home.p, 3) || !finite_n(home.R[0], 3) ||
      !finite_n(home.R[1], 3) || !finite_n(home.R[2], 3) ||
      !(twf_rot_orthonormality_error(home.R, &det) <= ROT_ORTHO_TOL) ||
      det < 0.0)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "home pose is not a finite rigid motion");
  if (!within_n(home.p, 3, TWF_READ_LENGTH_MAX))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "home position lies beyond 1 km");
  /* the reader refuses control characters in the name (a space for
   * them would read back as another name) */
  for (size_t i = 0; i < sizeof m->name && m->name[i] != '\0'; i++)
    if ((unsigned char)m->name[i] < 0x20 || m->name[i] == 0x7f)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0,
                           "give the robot a name of printable text on one line",
                           "the robot name has a control character (byte 0x%02X) at "
                           "character %zu", (unsigned)(unsigned char)m->name[i], i + 1);
  for (size_t i = 0; i < m->n_meta; i++) {
    const char *k = m->meta[i].key, *v = m->meta[i].value ? m->meta[i].value : "";
    if (!twf_mf_name_chars_ok(k) || strlen(k) >= TWF_NAME_MAX)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, twf_mf_name_hint,
                           "metadata key '%s' is not valid", k);
    /* "key=value" at the shortest (put_text): the line must fit the
     * reader. */
    if (strlen(k) + 1 + strlen(v) > TWF_MODEL_LINE_MAX) {
      char *t = malloc(strlen(v) + 1);
      size_t len;
      if (t == NULL)
        return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL,
                             "out of memory");
      text_for_file(v, t);
      len = strlen(k) + 1 + strlen(t);
      free(t);
      if (len > TWF_MODEL_LINE_MAX)
        return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0,
                             "shorten the value: a line of a model file "
                             "holds at most TWF_MODEL_LINE_MAX (198) "
                             "characters",
                             "metadata '%s' would need a line of %zu "
                             "characters", k, len);
    }
  }
  return TWF_OK;
}

static twf_status write_model(const twf_model *m, FILE *out, twf_error *err)
{
  twf_status st;
  units u;
  char *buf;
  size_t bufsize = sizeof m->name;

  if ((st = write_check(m, err)) != TWF_OK)
    return st;
  for (size_t i = 0; i < m->n_meta; i++)
    if (m->meta[i].value && strlen(m->meta[i].value) + 1 > bufsize)
      bufsize = strlen(m->meta[i].value) + 1;
  buf = malloc(bufsize);
  if (buf == NULL)
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
  u.lu = m->length_unit;
  u.au = m->angle_unit;

  fprintf(out, "; twistfit model file, see twistfit-model(5); written by "
               "libtwistfit %s\n", twf_version());
  fprintf(out, "[robot]\n");
  memcpy(buf, m->name, sizeof m->name);
  buf[sizeof m->name - 1] = '\0';
  text_for_file(buf, buf);
  if (buf[0] != '\0')
    put_text(out, "name", buf);
  fprintf(out, "length_unit = %s\nangle_unit = %s\n",
          twf_length_unit_name(u.lu), twf_angle_unit_name(u.au));
  if (m->gravity[0] != 0.0 || m->gravity[1] != 0.0 || m->gravity[2] != -1.0)
    put_nums(out, "gravity", m->gravity, 3, CONV_NONE, &u);

  for (size_t i = 0; i < m->n_joints; i++) {
    const twf_joint *j = &m->joints[i];
    int rev = j->type == TWF_JOINT_REVOLUTE;
    conv_kind jk = rev ? CONV_ANG : CONV_LEN;
    double w[3], q[3], v[2];
    fprintf(out, "\n[joint %s]\ntype = %s\n", j->name,
            rev ? "revolute" : "prismatic");
    if (rev) {
      revolute_axis_point(j, w, q);
    } else {
      double n = twf_v3_norm(j->twist + 3);
      for (int k = 0; k < 3; k++)
        w[k] = j->twist[3 + k] / n;
      twf_v3_copy(j->point, q);
    }
    put_nums(out, "axis", w, 3, CONV_NONE, &u);
    put_nums(out, "point", q, 3, CONV_LEN, &u);
    if (j->has_limits) {
      v[0] = j->limit_lo;
      v[1] = j->limit_hi;
      put_nums(out, "limits", v, 2, jk, &u);
    }
    put_nums(out, "offset", &j->offset, 1, jk, &u);
    put_nums(out, "scale", &j->scale, 1, CONV_NONE, &u);
    if (j->compliance != 0.0) {
      fprintf(out, "; rad per N m: yield under the gravity torque of the masses below\n");
      put_nums(out, "compliance", &j->compliance, 1, CONV_NONE, &u);
    }
  }

  /* the mass model: kilograms, centres in the length unit */
  for (size_t i = 0; i < m->n_joints; i++) {
    const twf_joint *j = &m->joints[i];
    if (!j->has_mass)
      continue;
    fprintf(out, "\n[mass %s]\n", j->name);
    put_nums(out, "mass", &j->mass, 1, CONV_NONE, &u);
    put_nums(out, "center", j->mass_center, 3, CONV_LEN, &u);
  }
  for (size_t i = 0; i < m->n_payloads; i++) {
    const twf_payload *pl = &m->payloads[i];
    fprintf(out, "\n[payload %s]\n", pl->name);
    put_nums(out, "mass", &pl->mass, 1, CONV_NONE, &u);
    put_nums(out, "center", pl->center, 3, CONV_LEN, &u);
  }

  {
    double qu[4];
    fprintf(out, "\n[home]\n");
    put_nums(out, "position", m->home.p, 3, CONV_LEN, &u);
    twf_rot_to_quat(m->home.R, qu);
    put_nums(out, "quaternion_wxyz", qu, 4, CONV_NONE, &u);
  }

  for (size_t i = 0; i < m->n_targets; i++) {
    const twf_target *t = &m->targets[i];
    fprintf(out, "\n[target %s]\n", t->name);
    if (t->offset_known)
      put_nums(out, "offset", t->offset, 3, CONV_LEN, &u);
    else
      fprintf(out, "; offset unknown: to be fitted\n");
  }

  if (m->n_meta > 0) {
    fprintf(out, "\n[asbuilt]\n");
    for (size_t i = 0; i < m->n_meta; i++) {
      text_for_file(m->meta[i].value ? m->meta[i].value : "", buf);
      put_text(out, m->meta[i].key, buf);
    }
  }
  free(buf);
  if (fflush(out) != 0 || ferror(out))
    return twf_error_set(err, TWF_ERR_IO, NULL, 0, 0,
                         "check the disk space and permissions",
                         "writing the model file failed: %s", strerror(errno));
  return TWF_OK;
}

twf_status twf_model_write(const twf_model *m, FILE *out, twf_error *err)
{
  twf_io_c_locale loc;
  twf_status st;
  twf_error_clear(err);
  if (m == NULL || out == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "no model or no output stream given");
  if ((st = twf_io_c_locale_enter(&loc, err)) != TWF_OK)
    return st;
  st = write_model(m, out, err);
  twf_io_c_locale_leave(&loc);
  return st;
}
