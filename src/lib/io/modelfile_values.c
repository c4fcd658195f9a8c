/* modelfile_values.c: the second pass of the model file reader: the
 * values of a section, numbers in the declared units converted to SI,
 * rotations in their three forms, joints in their three forms. Every
 * failure stops at the first error with its line and a hint. */
#include "io_internal.h"
#include "modelfile_internal.h"

#include <errno.h>
#include <stdlib.h>

const entry *twf_mf_find_entry(const section *s, const char *key)
{
  if (s == NULL)
    return NULL;
  for (size_t i = 0; i < s->n; i++)
    if (strcmp(s->entries[i].key, key) == 0)
      return &s->entries[i];
  return NULL;
}

static const char NUMBER_HINT[] =
    "write plain decimal numbers separated by spaces, e.g. 0 0 1";

/* Exactly n finite numbers, separated by blanks. what names the value in
 * messages, e.g. "axis of joint j1". */
/* As twf_mf_parse_numbers, accepting nmin to nmax numbers; *got (may be
 * NULL) receives the count read. */
static int parse_numbers_between(parse_ctx *c, const entry *e, const char *what,
                                 double *out, size_t nmin, size_t n, size_t *got);

int twf_mf_parse_numbers(parse_ctx *c, const entry *e, const char *what,
                         double *out, size_t n)
{
  return parse_numbers_between(c, e, what, out, n, n, NULL);
}

static int parse_numbers_between(parse_ctx *c, const entry *e, const char *what,
                                 double *out, size_t nmin, size_t n, size_t *got)
{
  const char *p = e->value;
  size_t count = 0;
  for (;;) {
    char tok[TWF_MODEL_LINE_MAX + 1];
    size_t len = 0;
    char *end;
    double v;
    while (twf_mf_is_blank(*p))
      p++;
    if (*p == '\0')
      break;
    while (p[len] && !twf_mf_is_blank(p[len]))
      len++;
    memcpy(tok, p, len);
    tok[len] = '\0';
    p += len;
    count++;
    errno = 0;
    v = strtod(tok, &end);
    if (end == tok || *end != '\0') {
      const char *hint = NUMBER_HINT;
      if (tok[0] == '#')
        hint = "'#' starts a comment only at the start of a line; end a line "
               "with a comment after ' ;'";
      else if (strchr(tok, ','))
        hint = "separate numbers with spaces, not commas, and write the "
               "decimal point as '.'";
      twf_ini_fail(&c->ini, TWF_ERR_VALUE, e->line, (long)count, hint,
                   "%s: '%s' is not a number", what, tok);
      return -1;
    }
    if (!isfinite(v)) {
      twf_ini_fail(&c->ini, TWF_ERR_VALUE, e->line, (long)count,
                   "every value must be a finite number",
                   "%s: '%s' is not a finite number", what, tok);
      return -1;
    }
    if (v == 0.0 && errno == ERANGE && twf_io_mantissa_nonzero(tok)) {
      twf_ini_fail(&c->ini, TWF_ERR_VALUE, e->line, (long)count,
                   "check the exponent; write 0 for zero",
                   "%s: '%s' is too small to be told from 0 (underflow)", what, tok);
      return -1;
    }
    if (count <= n)
      out[count - 1] = v;
  }
  if (nmin == n && count != n) {
    twf_ini_fail(&c->ini, TWF_ERR_VALUE, e->line, 0, NUMBER_HINT,
                 "%s needs %zu number%s, found %zu", what, n, n == 1 ? "" : "s",
                 count);
    return -1;
  }
  if (count < nmin || count > n) {
    twf_ini_fail(&c->ini, TWF_ERR_VALUE, e->line, 0, NUMBER_HINT,
                 "%s needs %zu or %zu numbers, found %zu", what, nmin, n, count);
    return -1;
  }
  if (got != NULL)
    *got = count;
  return 0;
}

int twf_mf_check_range(parse_ctx *c, const entry *e, const char *what,
                       mf_range kind, const double *v, const double *si,
                       size_t n, long first, const char *unit)
{
  static const double max[] = { TWF_READ_LENGTH_MAX, TWF_READ_ANGLE_MAX,
                                TWF_READ_SCALE_MAX };
  static const char *const what_max[] = { " m, the largest length accepted",
                                          " rad, the largest angle accepted",
                                          ", the largest scale accepted" };
  for (size_t k = 0; k < n; k++)
    if (!(fabs(si[k]) <= max[kind]))
      return twf_ini_fail(&c->ini, TWF_ERR_VALUE, e->line, first + (long)k,
                          "check the value and the file's units: no arm comes "
                          "near the limit",
                          "%s: %g%s%s lies beyond %g%s", what, v[k],
                          unit[0] ? " " : "", unit, max[kind], what_max[kind]);
  return 0;
}

/* Nearest rotation to an almost orthonormal R (error below 1e-6): Newton's
 * iteration for the polar factor, R <- (R + R^-T) / 2 (Higham, "Functions
 * of Matrices", 2008, ch. 8), quadratic, so three steps reach rounding. */
static void rot_polish(double R[3][3])
{
  for (int it = 0; it < 3; it++) {
    double C[3][3], det;
    C[0][0] = R[1][1] * R[2][2] - R[1][2] * R[2][1];
    C[0][1] = R[1][2] * R[2][0] - R[1][0] * R[2][2];
    C[0][2] = R[1][0] * R[2][1] - R[1][1] * R[2][0];
    C[1][0] = R[0][2] * R[2][1] - R[0][1] * R[2][2];
    C[1][1] = R[0][0] * R[2][2] - R[0][2] * R[2][0];
    C[1][2] = R[0][1] * R[2][0] - R[0][0] * R[2][1];
    C[2][0] = R[0][1] * R[1][2] - R[0][2] * R[1][1];
    C[2][1] = R[0][2] * R[1][0] - R[0][0] * R[1][2];
    C[2][2] = R[0][0] * R[1][1] - R[0][1] * R[1][0];
    det = R[0][0] * C[0][0] + R[0][1] * C[0][1] + R[0][2] * C[0][2];
    /* R^-T is the cofactor matrix over the determinant. */
    for (int i = 0; i < 3; i++)
      for (int j = 0; j < 3; j++)
        R[i][j] = 0.5 * (R[i][j] + C[i][j] / det);
  }
}

/* A pose section: position and exactly one rotation form. */
int twf_mf_parse_pose(parse_ctx *c, const section *s, twf_length_unit lu,
                      twf_angle_unit au, twf_pose *T)
{
  const char *sec = twf_mf_kind_names[s->kind];
  const entry *pos = twf_mf_find_entry(s, "position");
  const entry *quat = twf_mf_find_entry(s, "quaternion_wxyz");
  const entry *rows[3] = { twf_mf_find_entry(s, "rotation_row1"),
                           twf_mf_find_entry(s, "rotation_row2"),
                           twf_mf_find_entry(s, "rotation_row3") };
  const entry *rpy = twf_mf_find_entry(s, "rpy_fixed_xyz");
  const entry *forms[3];
  const char *form_names[3];
  size_t nforms = 0;
  char what[96];

  /* The forms in file order, so that the second one is blamed. */
  {
    const entry *row_first = NULL;
    for (int i = 0; i < 3; i++)
      if (rows[i] && (row_first == NULL || rows[i]->line < row_first->line))
        row_first = rows[i];
    const entry *cand[3] = { quat, row_first, rpy };
    const char *cand_names[3] = { "quaternion_wxyz", "rotation_row1/2/3",
                                  "rpy_fixed_xyz" };
    for (int i = 0; i < 3; i++) {
      if (cand[i] == NULL)
        continue;
      size_t k = nforms++;
      while (k > 0 && forms[k - 1]->line > cand[i]->line) {
        forms[k] = forms[k - 1];
        form_names[k] = form_names[k - 1];
        k--;
      }
      forms[k] = cand[i];
      form_names[k] = cand_names[i];
    }
  }
  if (pos == NULL)
    return twf_ini_fail(&c->ini, TWF_ERR_MISSING, s->line, 0,
                        "add position = x y z in the length unit",
                        "[%s] has no position", sec);
  if (nforms == 0)
    return twf_ini_fail(&c->ini, TWF_ERR_MISSING, s->line, 0,
                        "add one of quaternion_wxyz, rotation_row1/2/3 or "
                        "rpy_fixed_xyz",
                        "[%s] has no rotation", sec);
  if (nforms > 1)
    return twf_ini_fail(&c->ini, TWF_ERR_DUPLICATE, forms[1]->line, 0,
                        "keep exactly one rotation form",
                        "[%s] gives its rotation twice: %s (line %ld) and %s", sec,
                        form_names[0], forms[0]->line, form_names[1]);

  snprintf(what, sizeof what, "position in [%s]", sec);
  {
    double v[3];
    if (twf_mf_parse_numbers(c, pos, what, v, 3) != 0)
      return -1;
    for (int i = 0; i < 3; i++)
      T->p[i] = twf_length_to_si(v[i], lu);
    if (twf_mf_check_range(c, pos, what, RANGE_LENGTH, v, T->p, 3, 1,
                           twf_length_unit_name(lu)) != 0)
      return -1;
  }

  if (quat != NULL) {
    double q[4], n;
    snprintf(what, sizeof what, "quaternion_wxyz in [%s]", sec);
    if (twf_mf_parse_numbers(c, quat, what, q, 4) != 0)
      return -1;
    if (!twf_io_quat_is_unit(q, &n)) {
      char msg[TWF_ERROR_TEXT_MAX], hint[TWF_ERROR_TEXT_MAX];
      return twf_ini_fail(&c->ini, TWF_ERR_VALUE, quat->line, 0, twf_io_quat_norm_hint(hint, sizeof hint, ""),
                          "%s", twf_io_quat_norm_message(msg, sizeof msg, what, n));
    }
    twf_quat_to_rot(q, T->R);
  } else if (rpy != NULL) {
    double a[3];
    snprintf(what, sizeof what, "rpy_fixed_xyz in [%s]", sec);
    double si[3];
    if (twf_mf_parse_numbers(c, rpy, what, a, 3) != 0)
      return -1;
    for (int i = 0; i < 3; i++)
      si[i] = twf_angle_to_si(a[i], au);
    if (twf_mf_check_range(c, rpy, what, RANGE_ANGLE, a, si, 3, 1,
                           twf_angle_unit_name(au)) != 0)
      return -1;
    twf_rpy_fixed_xyz_to_rot(si[0], si[1], si[2], T->R);
  } else {
    double err, det;
    for (int i = 0; i < 3; i++)
      if (rows[i] == NULL)
        return twf_ini_fail(&c->ini, TWF_ERR_MISSING, s->line, 0,
                            "a rotation matrix needs rotation_row1, rotation_row2 "
                            "and rotation_row3",
                            "[%s] has no rotation_row%d", sec, i + 1);
    for (int i = 0; i < 3; i++) {
      snprintf(what, sizeof what, "rotation_row%d in [%s]", i + 1, sec);
      if (twf_mf_parse_numbers(c, rows[i], what, T->R[i], 3) != 0)
        return -1;
    }
    err = twf_rot_orthonormality_error(T->R, &det);
    if (!(err <= ROT_ORTHO_TOL))
      return twf_ini_fail(&c->ini, TWF_ERR_VALUE, rows[2]->line, 0,
                          "the rows must be orthonormal to 1e-6; give more digits or "
                          "use quaternion_wxyz",
                          "rotation in [%s] is not orthonormal (largest error of "
                          "R^T R - I is %.3g)", sec, err);
    if (det < 0.0)
      return twf_ini_fail(&c->ini, TWF_ERR_VALUE, rows[2]->line, 0,
                          "a rotation has determinant +1; check the signs of a row",
                          "rotation in [%s] is a reflection (determinant %.6g)", sec,
                          det);
    if (err > 0.0)
      rot_polish(T->R);
  }
  return 0;
}

const char *twf_mf_form_name(joint_form f)
{
  switch (f) {
  case FORM_AXIS: return "the axis-and-point form";
  case FORM_DH: return "a standard DH row (dh)";
  case FORM_MDH: return "a modified DH row (mdh)";
  case FORM_NONE: break;
  }
  return "no form";
}

/* Which geometry a joint section gives, and the line that first says so. */
int twf_mf_joint_form_of(parse_ctx *c, const section *s, joint_form *form,
                         const entry **first)
{
  const entry *axis = twf_mf_find_entry(s, "axis"), *point = twf_mf_find_entry(s, "point");
  const entry *ax = axis;
  const entry *cand[3];
  joint_form kinds[3] = { FORM_AXIS, FORM_DH, FORM_MDH };
  const entry *a = NULL, *b = NULL;
  joint_form fa = FORM_NONE, fb = FORM_NONE;
  if (ax == NULL || (point != NULL && point->line < ax->line))
    ax = point;
  cand[0] = ax;
  cand[1] = twf_mf_find_entry(s, "dh");
  cand[2] = twf_mf_find_entry(s, "mdh");
  for (int i = 0; i < 3; i++) {
    if (cand[i] == NULL)
      continue;
    if (a == NULL || cand[i]->line < a->line) {
      b = a; fb = fa;
      a = cand[i]; fa = kinds[i];
    } else if (b == NULL || cand[i]->line < b->line) {
      b = cand[i]; fb = kinds[i];
    }
  }
  if (b != NULL) {
    twf_ini_fail(&c->ini, TWF_ERR_DUPLICATE, b->line, 0,
                 "keep one form: axis and point, or one dh row, or one mdh row",
                 "joint %s gives its geometry twice: %s (line %ld) and %s", s->name,
                 twf_mf_form_name(fa), a->line, twf_mf_form_name(fb));
    return -1;
  }
  *form = fa;
  *first = a;
  return 0;
}

/* Everything of a joint except its geometry. */
int twf_mf_parse_joint_common(parse_ctx *c, const section *s,
                              twf_length_unit lu, twf_angle_unit au,
                              twf_joint *j)
{
  const entry *e;
  char what[96];
  int rev;

  twf_strlcpy(j->name, s->name, sizeof j->name);
  e = twf_mf_find_entry(s, "type");
  if (e == NULL)
    return twf_ini_fail(&c->ini, TWF_ERR_MISSING, s->line, 0,
                        "add type = revolute or type = prismatic",
                        "joint %s has no type", s->name);
  if (strcmp(e->value, "revolute") == 0)
    j->type = TWF_JOINT_REVOLUTE;
  else if (strcmp(e->value, "prismatic") == 0)
    j->type = TWF_JOINT_PRISMATIC;
  else
    return twf_ini_fail(&c->ini, TWF_ERR_UNKNOWN, e->line, 0,
                        "type is revolute or prismatic",
                        "joint %s has unknown type '%s'", s->name, e->value);
  rev = j->type == TWF_JOINT_REVOLUTE;

  j->scale = 1.0;
  j->offset = 0.0;
  j->has_limits = 0;
  if ((e = twf_mf_find_entry(s, "limits")) != NULL) {
    double l[2];
    snprintf(what, sizeof what, "limits of joint %s", s->name);
    if (twf_mf_parse_numbers(c, e, what, l, 2) != 0)
      return -1;
    if (l[0] > l[1])
      return twf_ini_fail(&c->ini, TWF_ERR_VALUE, e->line, 0,
                          "write the lower limit first: limits = min max",
                          "limits of joint %s: min %.17g is above max %.17g", s->name,
                          l[0], l[1]);
    j->has_limits = 1;
    j->limit_lo = rev ? twf_angle_to_si(l[0], au) : twf_length_to_si(l[0], lu);
    j->limit_hi = rev ? twf_angle_to_si(l[1], au) : twf_length_to_si(l[1], lu);
    {
      double si[2] = { j->limit_lo, j->limit_hi };
      if (twf_mf_check_range(c, e, what, rev ? RANGE_ANGLE : RANGE_LENGTH, l, si, 2, 1,
                             rev ? twf_angle_unit_name(au) : twf_length_unit_name(lu)) != 0)
        return -1;
    }
  }
  if ((e = twf_mf_find_entry(s, "offset")) != NULL) {
    snprintf(what, sizeof what, "offset of joint %s", s->name);
    double v;
    if (twf_mf_parse_numbers(c, e, what, &v, 1) != 0)
      return -1;
    j->offset = rev ? twf_angle_to_si(v, au) : twf_length_to_si(v, lu);
    if (twf_mf_check_range(c, e, what, rev ? RANGE_ANGLE : RANGE_LENGTH, &v, &j->offset, 1, 1,
                           rev ? twf_angle_unit_name(au) : twf_length_unit_name(lu)) != 0)
      return -1;
  }
  if ((e = twf_mf_find_entry(s, "scale")) != NULL) {
    snprintf(what, sizeof what, "scale of joint %s", s->name);
    if (twf_mf_parse_numbers(c, e, what, &j->scale, 1) != 0)
      return -1;
    if (j->scale == 0.0)
      return twf_ini_fail(&c->ini, TWF_ERR_VALUE, e->line, 0,
                          "scale multiplies the logged joint value; nominal is 1",
                          "scale of joint %s is zero", s->name);
    if (twf_mf_check_range(c, e, what, RANGE_SCALE, &j->scale, &j->scale, 1, 1, "") != 0)
      return -1;
  }
  j->compliance = 0.0;
  if ((e = twf_mf_find_entry(s, "compliance")) != NULL) {
    snprintf(what, sizeof what, "compliance of joint %s", s->name);
    if (twf_mf_parse_numbers(c, e, what, &j->compliance, 1) != 0)
      return -1;
    if (!rev && j->compliance != 0.0)
      return twf_ini_fail(&c->ini, TWF_ERR_VALUE, e->line, 0,
                          "compliance is the yield of a revolute joint under its gravity "
                          "torque; leave it out for a prismatic joint",
                          "joint %s is prismatic but has a compliance", s->name);
    if (!(fabs(j->compliance) <= TWF_READ_COMPLIANCE_MAX))
      return twf_ini_fail(&c->ini, TWF_ERR_VALUE, e->line, 1,
                          "compliance is in rad per N m (a stiffness of 1e5 N m/rad is "
                          "1e-5): check the value",
                          "%s: %g rad/(N m) lies beyond %g rad/(N m), the largest accepted",
                          what, j->compliance, TWF_READ_COMPLIANCE_MAX);
  }
  return 0;
}

/* [mass JOINT] and [payload NAME]: mass (kg, positive) and center (a point
 * in the length unit: base frame at zero for a body, flange frame for a
 * payload). */
int twf_mf_parse_mass(parse_ctx *c, const section *s, twf_length_unit lu, double *mass,
                      double center[3])
{
  const entry *em = twf_mf_find_entry(s, "mass"), *ec = twf_mf_find_entry(s, "center");
  const char *kind = s->kind == SEC_MASS ? "mass" : "payload";
  char what[96];
  double v[3];
  if (em == NULL || ec == NULL)
    return twf_ini_fail(&c->ini, TWF_ERR_MISSING, s->line, 0,
                        "give both mass = KG and center = x y z",
                        "[%s %s] has no %s", kind, s->name, em == NULL ? "mass" : "center");
  snprintf(what, sizeof what, "mass of [%s %s]", kind, s->name);
  if (twf_mf_parse_numbers(c, em, what, mass, 1) != 0)
    return -1;
  if (!(*mass > 0.0) || !(*mass <= TWF_READ_MASS_MAX))
    return twf_ini_fail(&c->ini, TWF_ERR_VALUE, em->line, 1,
                        "mass is in kilograms, above 0 and at most 1e5",
                        "%s is %g kg", what, *mass);
  snprintf(what, sizeof what, "center of [%s %s]", kind, s->name);
  if (twf_mf_parse_numbers(c, ec, what, v, 3) != 0)
    return -1;
  for (int k = 0; k < 3; k++)
    center[k] = twf_length_to_si(v[k], lu);
  return twf_mf_check_range(c, ec, what, RANGE_LENGTH, v, center, 3, 1,
                            twf_length_unit_name(lu));
}

int twf_mf_parse_joint_axis(parse_ctx *c, const section *s,
                            twf_length_unit lu, twf_joint *j)
{
  const entry *axis = twf_mf_find_entry(s, "axis"), *point = twf_mf_find_entry(s, "point");
  double w[3], q[3] = { 0.0, 0.0, 0.0 }, n;
  char what[96];

  if (axis == NULL)
    return twf_ini_fail(&c->ini, TWF_ERR_MISSING, s->line, 0,
                        "add axis = x y z, the unit direction of the joint axis",
                        "joint %s has no axis", s->name);
  snprintf(what, sizeof what, "axis of joint %s", s->name);
  if (twf_mf_parse_numbers(c, axis, what, w, 3) != 0)
    return -1;
  n = twf_v3_norm(w);
  if (n == 0.0)
    return twf_ini_fail(&c->ini, TWF_ERR_VALUE, axis->line, 0,
                        "give the unit direction of the joint axis, e.g. 0 0 1",
                        "axis of joint %s has zero length", s->name);
  if (!(fabs(n - 1.0) <= AXIS_UNIT_TOL))
    return twf_ini_fail(&c->ini, TWF_ERR_VALUE, axis->line, 0,
                        "give a unit vector; lengths within 1e-3 of 1 are normalised "
                        "with a warning",
                        "axis of joint %s has length %.12g, not 1", s->name, n);
  if (fabs(n - 1.0) > AXIS_QUIET_TOL)
    twf_warnings_add(c->warnings, c->ini.path, axis->line, 0,
                     "axis of joint %s has length %.12g and was normalised",
                     s->name, n);
  for (int i = 0; i < 3; i++)
    w[i] /= n;

  if (point == NULL && j->type == TWF_JOINT_REVOLUTE)
    return twf_ini_fail(&c->ini, TWF_ERR_MISSING, s->line, 0,
                        "add point = x y z, any point of the axis line, in the "
                        "length unit",
                        "revolute joint %s has no point", s->name);
  if (point != NULL) {
    snprintf(what, sizeof what, "point of joint %s", s->name);
    double v[3];
    if (twf_mf_parse_numbers(c, point, what, v, 3) != 0)
      return -1;
    for (int i = 0; i < 3; i++)
      q[i] = twf_length_to_si(v[i], lu);
    if (twf_mf_check_range(c, point, what, RANGE_LENGTH, v, q, 3, 1,
                           twf_length_unit_name(lu)) != 0)
      return -1;
  }
  twf_v3_copy(q, j->point);
  if (j->type == TWF_JOINT_REVOLUTE)
    twf_twist_revolute(w, q, j->twist);
  else
    twf_twist_prismatic(w, j->twist);
  return 0;
}

int twf_mf_parse_joint_dh(parse_ctx *c, const section *s, joint_form form,
                          twf_length_unit lu, twf_angle_unit au,
                          twf_joint_type type, twf_dh_row *row)
{
  const entry *e = twf_mf_find_entry(s, form == FORM_DH ? "dh" : "mdh");
  double v[5] = { 0, 0, 0, 0, 0 };
  size_t got = 0;
  char what[96];
  snprintf(what, sizeof what, "%s row of joint %s",
           form == FORM_DH ? "dh" : "mdh", s->name);
  if (parse_numbers_between(c, e, what, v, 4, 5, &got) != 0)
    return -1;
  if (form == FORM_DH) {         /* a alpha d theta */
    row->a = twf_length_to_si(v[0], lu);
    row->alpha = twf_angle_to_si(v[1], au);
  } else {                       /* alpha a d theta */
    row->alpha = twf_angle_to_si(v[0], au);
    row->a = twf_length_to_si(v[1], lu);
  }
  row->d = twf_length_to_si(v[2], lu);
  row->theta = twf_angle_to_si(v[3], au);
  row->beta = got == 5 ? twf_angle_to_si(v[4], au) : 0.0; /* Hayati's beta */
  row->type = type;
  return 0;
}

int twf_mf_parse_robot(parse_ctx *c, const section *s, twf_model *m)
{
  const entry *e;
  if ((e = twf_mf_find_entry(s, "name")) != NULL) {
    if (twf_strlcpy(m->name, e->value, sizeof m->name) != 0)
      return twf_ini_fail(&c->ini, TWF_ERR_VALUE, e->line, 0, "shorten the name",
                          "robot name is %zu characters long, the limit is %zu",
                          strlen(e->value), sizeof m->name - 1);
  }
  if ((e = twf_mf_find_entry(s, "length_unit")) != NULL &&
      twf_length_unit_parse(e->value, &m->length_unit) != TWF_OK)
    return twf_ini_fail(&c->ini, TWF_ERR_UNITS, e->line, 0,
                        "length_unit is one of mm, m, um, in",
                        "unknown length unit '%s'", e->value);
  if ((e = twf_mf_find_entry(s, "angle_unit")) != NULL &&
      twf_angle_unit_parse(e->value, &m->angle_unit) != TWF_OK)
    return twf_ini_fail(&c->ini, TWF_ERR_UNITS, e->line, 0,
                        "angle_unit is one of deg, rad, mrad",
                        "unknown angle unit '%s'", e->value);
  if ((e = twf_mf_find_entry(s, "gravity")) != NULL) {
    double g[3], n;
    if (twf_mf_parse_numbers(c, e, "gravity direction", g, 3) != 0)
      return -1;
    n = twf_v3_norm(g);
    if (!(n > 0.0) || !isfinite(n))
      return twf_ini_fail(&c->ini, TWF_ERR_VALUE, e->line, 0,
                          "gravity is the direction of the fall in the base frame, e.g. "
                          "0 0 -1 for an upright arm",
                          "gravity direction is zero");
    /* a unit vector is kept as written, so that a written model reads
     * back to the same bits */
    for (int k = 0; k < 3; k++)
      m->gravity[k] = fabs(n - 1.0) <= 4e-16 ? g[k] : g[k] / n;
  }
  return 0;
}
