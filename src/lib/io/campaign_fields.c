/* campaign_fields.c: the fields of one data row of a campaign file, read
 * as ids, numbers in the file's units (stored in SI) and set names. */
#include "campaign_internal.h"

#include <errno.h>
#include <stdlib.h>
#include <strings.h>

static int is_digit(char ch) { return ch >= '0' && ch <= '9'; }

twf_status twf_creader_check_nf(creader *r, const twf_csv_row *row)
{
  const char *hint =
      r->delim == ','
          ? "each row needs one field per header column; with ',' as "
            "delimiter numbers need a decimal point (use ';' for decimal "
            "commas)"
          : "each row needs one field per header column; look for a missing "
            "or extra delimiter";
  if (row->nf < r->nh)
    return twf_creader_error(r, row, (long)row->nf + 1, TWF_ERR_SYNTAX, hint,
                             "the row has %zu fields but the header has %zu: column '%s' "
                             "(field %zu) and any after it are missing", row->nf, r->nh,
                             r->hname[row->nf], row->nf + 1);
  if (row->nf > r->nh)
    return twf_creader_error(r, row, (long)r->nh + 1, TWF_ERR_SYNTAX, hint,
                             "the row has %zu fields but the header has %zu", row->nf, r->nh);
  return TWF_OK;
}

static int number_syntax(const char *s)
{
  int digits = 0;
  if (*s == '+' || *s == '-')
    s++;
  for (; is_digit(*s); s++)
    digits++;
  if (*s == '.')
    for (s++; is_digit(*s); s++)
      digits++;
  if (digits == 0)
    return 0;
  if (*s == 'e' || *s == 'E') {
    s++;
    if (*s == '+' || *s == '-')
      s++;
    if (!is_digit(*s))
      return 0;
    while (is_digit(*s))
      s++;
  }
  return *s == '\0';
}

/* Does the field f..e (blanks trimmed, quotes not removed) read as a
 * number, a decimal comma allowed with ';'? */
static int field_is_number(const creader *r, const char *f, const char *e)
{
  char text[128];
  size_t n;
  char *comma;
  while (f < e && twf_creader_is_blank(*f))
    f++;
  while (e > f && (twf_creader_is_blank(e[-1]) || e[-1] == '\r' || e[-1] == '\n'))
    e--;
  n = (size_t)(e - f);
  if (n == 0 || n >= sizeof text)
    return 0;
  memcpy(text, f, n);
  text[n] = '\0';
  comma = strchr(text, ',');
  if (r->delim == ';' && comma != NULL && strchr(text, '.') == NULL)
    *comma = '.';
  return number_syntax(text);
}

void twf_creader_rowlike_comment(creader *r, long line, const char *p,
                                 const char *le)
{
  const char *f = p, *s;
  size_t nf = 0, j;
  long k;
  int quoted = 0, numeric_ok = 1;
  const char *start[512], *end[512];
  if (r->nh == 0 || r->nh > sizeof start / sizeof start[0])
    return;
  while (f < le && twf_creader_is_blank(*f))
    f++;
  for (s = f;; s++) {
    if (s < le && *s == '"')
      quoted = !quoted;
    if (s == le || (!quoted && (unsigned char)*s == r->delim) ||
        (!quoted && (*s == '\n' || *s == '\r'))) {
      if (nf == r->nh)
        return; /* more fields than the header */
      start[nf] = f;
      end[nf] = s;
      nf++;
      if (s == le || *s == '\n' || *s == '\r')
        break;
      f = s + 1;
    }
  }
  if (nf != r->nh)
    return;
  for (j = 0; j < r->m->n_joints && numeric_ok; j++)
    if (r->jcol[j] > 0)
      numeric_ok = field_is_number(r, start[r->jcol[j] - 1], end[r->jcol[j] - 1]);
  for (k = COL_X; k <= COL_Z && numeric_ok; k++)
    if (r->col[k] > 0)
      numeric_ok = field_is_number(r, start[r->col[k] - 1], end[r->col[k] - 1]);
  if (!numeric_ok)
    return;
  if (r->n_rowlike++ == 0) {
    size_t n = (size_t)(end[r->col[COL_POSE] - 1] - start[r->col[COL_POSE] - 1]);
    r->rowlike_line = line;
    if (n >= TWF_NAME_MAX)
      n = TWF_NAME_MAX - 1;
    memcpy(r->rowlike_id, start[r->col[COL_POSE] - 1], n);
    r->rowlike_id[n] = '\0';
  }
}

static int looks_nonfinite(const char *s)
{
  if (*s == '+' || *s == '-')
    s++;
  return strncasecmp(s, "nan", 3) == 0 || strncasecmp(s, "inf", 3) == 0;
}

/* Field col (1-based) as a number in file units. */
static twf_status field_number(creader *r, const twf_csv_row *row, long col,
                               double *out)
{
  const char *f = row->f[col - 1];
  char text[128];
  size_t n;
  char *comma, *endp;
  double v;
  while (twf_creader_is_blank(*f))
    f++;
  n = strlen(f);
  while (n > 0 && twf_creader_is_blank(f[n - 1]))
    n--;
  if (n == 0)
    return twf_creader_error(r, row, col, TWF_ERR_MISSING, "fill in the value",
                             "column '%s' is empty; a number is needed", twf_creader_colname(r, col));
  if (n >= sizeof text)
    return twf_creader_error(r, row, col, TWF_ERR_VALUE, "write a plain decimal number",
                             "column '%s': the value is too long to be a number",
                             twf_creader_colname(r, col));
  memcpy(text, f, n);
  text[n] = '\0';
  comma = strchr(text, ',');
  if (r->delim == ';' && comma != NULL && strchr(comma + 1, ',') == NULL &&
      strchr(text, '.') == NULL)
    *comma = '.'; /* a decimal comma */
  if (looks_nonfinite(text))
    return twf_creader_error(r, row, col, TWF_ERR_VALUE,
                             "replace the value by a measured one, or drop the row",
                             "column '%s': '%s' is not a finite number", twf_creader_colname(r, col),
                             text);
  if (!number_syntax(text))
    return twf_creader_error(r, row, col, TWF_ERR_VALUE,
                             r->delim == ';'
                                 ? "write a decimal number such as 12.5 or 12,5"
                                 : "write a decimal number such as 12.5 (a decimal comma "
                                   "only with ';' as delimiter)",
                             "column '%s': '%s' is not a number", twf_creader_colname(r, col), text);
  errno = 0;
  v = strtod(text, &endp);
  if (*endp != '\0' || !isfinite(v))
    return twf_creader_error(r, row, col, TWF_ERR_VALUE,
                             "replace the value by a measured one, or drop the row",
                             "column '%s': '%s' is not a finite number", twf_creader_colname(r, col),
                             text);
  if (v == 0.0 && errno == ERANGE && twf_io_mantissa_nonzero(text))
    return twf_creader_error(r, row, col, TWF_ERR_VALUE,
                             "check the exponent; write 0 for zero",
                             "column '%s': '%s' is too small to be told from 0 (underflow)",
                             twf_creader_colname(r, col), text);
  *out = v;
  return TWF_OK;
}

/* A value in file units and its SI value against the plausible range. */
static twf_status check_range(creader *r, const twf_csv_row *row, long col,
                              double v, double si, int angle)
{
  if (angle ? fabs(si) <= TWF_READ_ANGLE_MAX : fabs(si) <= TWF_READ_LENGTH_MAX)
    return TWF_OK;
  return twf_creader_error(r, row, col, TWF_ERR_VALUE,
                           "check the value, its column and the file's units: no arm "
                           "comes near the limit",
                           angle ? "column '%s': %g %s lies beyond %g rad, the largest "
                                   "angle accepted"
                                 : "column '%s': %g %s lies beyond %g m, the largest "
                                   "length accepted",
                           twf_creader_colname(r, col), v,
                           angle ? twf_angle_unit_name(r->au) : twf_length_unit_name(r->lu),
                           angle ? TWF_READ_ANGLE_MAX : TWF_READ_LENGTH_MAX);
}

static int field_empty(const twf_csv_row *row, long col)
{
  const char *f = row->f[col - 1];
  while (twf_creader_is_blank(*f))
    f++;
  return *f == '\0';
}

twf_status twf_creader_field_id(creader *r, const twf_csv_row *row, long col,
                                char out[TWF_NAME_MAX], const char *what)
{
  const char *f = row->f[col - 1];
  const char *s;
  if (f[0] == '\0')
    return twf_creader_error(r, row, col, TWF_ERR_MISSING, "fill in the field",
                             "column '%s' is empty; a %s is needed", twf_creader_colname(r, col), what);
  /* A line break in an id would break every report that prints it. */
  for (s = f; *s; s++)
    if ((unsigned char)*s < 0x20 || *s == 0x7f)
      return twf_creader_error(r, row, col, TWF_ERR_VALUE,
                               "remove line breaks and tabs from ids (check the quotes)",
                               "column '%s': the %s contains a control character",
                               twf_creader_colname(r, col), what);
  if (twf_strlcpy(out, f, TWF_NAME_MAX) != 0)
    return twf_creader_error(r, row, col, TWF_ERR_VALUE, "shorten it",
                             "column '%s': the %s is longer than %d bytes", twf_creader_colname(r, col),
                             what, TWF_NAME_MAX - 1);
  return TWF_OK;
}

twf_status twf_creader_field_target(creader *r, const twf_csv_row *row,
                                    size_t *out)
{
  long col = r->col[COL_TARGET];
  char name[TWF_NAME_MAX], list[TWF_ERROR_TEXT_MAX];
  long t;
  size_t k;
  twf_status st = twf_creader_field_id(r, row, col, name, "target name");
  if (st != TWF_OK)
    return st;
  t = twf_model_target_index(r->m, name);
  if (t >= 0) {
    *out = (size_t)t;
    return twf_creader_count_check(r, row, *out, TWF_CAMPAIGN_COUNT_MAX, "targets");
  }
  if (r->m->n_targets == 0)
    return twf_creader_error(r, row, col, TWF_ERR_UNKNOWN,
                             "declare the targets in the model file",
                             "target '%s' is not declared: the model declares no targets",
                             name);
  list[0] = '\0';
  for (k = 0; k < r->m->n_targets; k++)
    twf_io_appendf(list, sizeof list, "%s%s", k ? ", " : "", r->m->targets[k].name);
  return twf_creader_error(r, row, col, TWF_ERR_UNKNOWN,
                           "name each target as in the model (names are case-sensitive), "
                           "or declare it in the model",
                           "target '%s' is not declared by the model; the declared targets "
                           "are %s", name, list);
}

twf_status twf_creader_field_joints(creader *r, const twf_csv_row *row,
                                    double *q)
{
  size_t j;
  for (j = 0; j < r->m->n_joints; j++) {
    double v;
    twf_status st = field_number(r, row, r->jcol[j], &v);
    if (st != TWF_OK)
      return st;
    q[j] = twf_creader_joint_to_si(&r->m->joints[j], v, r->lu, r->au);
    st = check_range(r, row, r->jcol[j], v, q[j],
                     r->m->joints[j].type == TWF_JOINT_REVOLUTE);
    if (st != TWF_OK)
      return st;
  }
  return TWF_OK;
}

twf_status twf_creader_field_payload(creader *r, const twf_csv_row *row,
                                     size_t pose, int first_row)
{
  long col = r->col[COL_PAYLOAD], k = -1;
  twf_campaign *c = r->c;
  if (col == 0)
    return TWF_OK;
  if (!field_empty(row, col)) {
    const char *f = row->f[col - 1];
    k = twf_model_payload_index(r->m, f);
    if (k < 0) {
      char list[TWF_ERROR_TEXT_MAX];
      size_t i;
      list[0] = '\0';
      for (i = 0; i < r->m->n_payloads; i++)
        twf_io_appendf(list, sizeof list, "%s%s", i ? ", " : "", r->m->payloads[i].name);
      return twf_creader_error(r, row, col, TWF_ERR_UNKNOWN,
                               "declare each payload in the model file as [payload NAME] "
                               "with mass and center, or leave the field empty for none",
                               r->m->n_payloads ? "payload '%s' is not declared by the model; "
                                                  "the declared payloads are %s"
                                                : "payload '%s' is not declared: the model "
                                                  "declares no payloads%s",
                               f, list);
    }
  }
  if (twf_io_grow((void **)&c->pose_payload, &r->cap_payload, c->n_poses,
                  sizeof *c->pose_payload))
    return twf_creader_nomem(r);
  if (first_row) {
    c->pose_payload[pose] = k;
  } else if (c->pose_payload[pose] != k) {
    long was = c->pose_payload[pose];
    return twf_creader_error(r, row, col, TWF_ERR_VALUE,
                             "every row of a pose names the same payload; give poses with "
                             "another load their own ids",
                             "pose '%s' repeats with another payload: '%s' here but '%s' at "
                             "line %ld", c->pose_ids[pose],
                             k >= 0 ? r->m->payloads[k].name : "",
                             was >= 0 ? r->m->payloads[was].name : "", c->pose_lines[pose]);
  }
  return TWF_OK;
}

/* set: -1 when absent or empty. */
twf_status twf_creader_field_set(creader *r, const twf_csv_row *row, int *set)
{
  long col = r->col[COL_SET];
  const char *f;
  *set = -1;
  if (col == 0 || field_empty(row, col))
    return TWF_OK;
  f = row->f[col - 1];
  if (strcmp(f, "fit") == 0)
    *set = TWF_SET_FIT;
  else if (strcmp(f, "check") == 0)
    *set = TWF_SET_CHECK;
  else
    return twf_creader_error(r, row, col, TWF_ERR_VALUE,
                             "use 'fit' or 'check', or leave it empty for 'fit'",
                             "column 'set': '%s' is not a set name", f);
  return TWF_OK;
}

twf_status twf_creader_field_meas(creader *r, const twf_csv_row *row,
                                  twf_measurement *ms, double quat[4], int *set)
{
  twf_status st;
  int i;
  memset(ms, 0, sizeof *ms);
  quat[0] = 1.0;
  quat[1] = quat[2] = quat[3] = 0.0;
  if ((st = twf_creader_line_check(r, row)) != TWF_OK)
    return st;
  for (i = 0; i < 3; i++) {
    double v;
    st = field_number(r, row, r->col[COL_X + i], &v);
    if (st != TWF_OK)
      return st;
    ms->pos[i] = twf_length_to_si(v, r->lu);
    st = check_range(r, row, r->col[COL_X + i], v, ms->pos[i], 0);
    if (st != TWF_OK)
      return st;
  }
  if (r->col[COL_QW] != 0) {
    int n_empty = 0;
    for (i = 0; i < 4; i++)
      n_empty += field_empty(row, r->col[COL_QW + i]);
    if (n_empty != 0 && n_empty != 4) {
      for (i = 0; i < 4 && !field_empty(row, r->col[COL_QW + i]); i++)
        ;
      return twf_creader_error(r, row, r->col[COL_QW + i], TWF_ERR_MISSING,
                               "give all four of qw qx qy qz, or leave all four empty for "
                               "a position-only row",
                               "column '%s' is empty but other quaternion fields are not",
                               twf_creader_colname(r, r->col[COL_QW + i]));
    }
    if (n_empty == 0) {
      double norm;
      for (i = 0; i < 4; i++) {
        st = field_number(r, row, r->col[COL_QW + i], &quat[i]);
        if (st != TWF_OK)
          return st;
      }
      if (!twf_io_quat_is_unit(quat, &norm)) {
        char what[160], msg[TWF_ERROR_TEXT_MAX];
        snprintf(what, sizeof what, "the quaternion (%.9g %.9g %.9g %.9g)", quat[0], quat[1],
                 quat[2], quat[3]);
        return twf_creader_error(r, row, r->col[COL_QW], TWF_ERR_VALUE,
                                 "check the column order (qw qx qy qz) and write the "
                                 "quaternion with at least 7 significant digits",
                                 "%s", twf_io_quat_norm_message(msg, sizeof msg, what, norm));
      }
      for (i = 0; i < 4; i++)
        quat[i] /= norm;
      ms->has_orientation = 1;
    }
  }
  if (r->col[COL_SIGMA] != 0 && !field_empty(row, r->col[COL_SIGMA])) {
    double s;
    st = field_number(r, row, r->col[COL_SIGMA], &s);
    if (st != TWF_OK)
      return st;
    if (s < 0)
      return twf_creader_error(r, row, r->col[COL_SIGMA], TWF_ERR_VALUE,
                               "give the standard deviation as a positive number",
                               "column 'sigma': %g is negative", s);
    if (s == 0)
      return twf_creader_error(r, row, r->col[COL_SIGMA], TWF_ERR_VALUE,
                               "leave the field empty when the standard deviation is not "
                               "known",
                               "column 'sigma': a standard deviation of 0 gives infinite "
                               "weight");
    ms->sigma = twf_length_to_si(s, r->lu);
    /* 1 nm to 1 m spans every instrument; outside it the value is a slip
     * (a unit, a variance for a standard deviation) and would wreck the
     * weights */
    if (ms->sigma < 1e-9 || ms->sigma > 1.0)
      return twf_creader_error(r, row, r->col[COL_SIGMA], TWF_ERR_VALUE,
                               "give the standard deviation of one coordinate in the file's length unit "
                               "(between 1 nm and 1 m)",
                               "column 'sigma': %g is outside 1 nm to 1 m", s);
  }
  st = twf_creader_field_set(r, row, set);
  if (st != TWF_OK)
    return st;
  ms->set = *set == TWF_SET_CHECK ? TWF_SET_CHECK : TWF_SET_FIT;
  ms->line = (uint32_t)row->line;
  return TWF_OK;
}
