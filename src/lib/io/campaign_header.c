/* campaign_header.c: what comes above the data rows of a campaign file:
 * the units declaration and the header row, mapped to column roles. */
#include "campaign_internal.h"

#include <stdlib.h>

/* Reserved column names; COL_JOINT columns carry the model's joint names. */
const char *const twf_creader_role_name[COL_N] = {
  "pose", "target", NULL, "x", "y", "z", "qw", "qx", "qy", "qz", "sigma", "set",
  "station", "payload"
};

static int role_allowed(file_kind kind, int role)
{
  switch (kind) {
  case KIND_ONE: return 1;
  case KIND_JOINTS: return role == COL_POSE || role == COL_JOINT || role == COL_SET ||
                           role == COL_STATION || role == COL_PAYLOAD;
  case KIND_POINTS: return role != COL_JOINT && role != COL_STATION && role != COL_PAYLOAD;
  }
  return 0;
}

int twf_creader_reserved_role(const char *name)
{
  int i;
  for (i = 0; i < COL_N; i++)
    if (twf_creader_role_name[i] != NULL && strcmp(name, twf_creader_role_name[i]) == 0)
      return i;
  return -1;
}

/* "# units: length=mm angle=deg" above the header row. Other comments are
 * ignored; a units line below the header is refused rather than ignored. */
twf_status twf_creader_units_line(void *user, twf_csv_in *in, const char *p,
                                  const char *le)
{
  creader *r = user;
  char text[256];
  char *tok, *save = NULL;
  size_t n;
  int seen_length = 0, seen_angle = 0, any = 0;
  while (p < le && twf_creader_is_blank(*p))
    p++;
  if (in->header_seen)
    twf_creader_rowlike_comment(r, in->cur_line, p, le);
  p++; /* the '#' */
  while (p < le && twf_creader_is_blank(*p))
    p++;
  if ((size_t)(le - p) < 5 || strncmp(p, "units", 5) != 0)
    return TWF_OK;
  p += 5;
  while (p < le && twf_creader_is_blank(*p))
    p++;
  if (p == le || *p != ':')
    return TWF_OK;
  p++;
  if (in->header_seen)
    return twf_error_set(in->err, TWF_ERR_SYNTAX, in->path, in->cur_line, 0,
                         "move the '# units:' line above the header row",
                         "a units declaration must come before the header row");
  if (r->units_line != 0)
    return twf_error_set(in->err, TWF_ERR_DUPLICATE, in->path, in->cur_line, 0,
                         "keep one '# units:' line",
                         "a second units declaration (the first is at line %ld)",
                         r->units_line);
  n = (size_t)(le - p);
  if (n >= sizeof text)
    return twf_error_set(in->err, TWF_ERR_SYNTAX, in->path, in->cur_line, 0,
                         "write it as '# units: length=mm angle=deg'",
                         "the units declaration is too long");
  memcpy(text, p, n);
  text[n] = '\0';
  r->units_line = in->cur_line;
  for (tok = strtok_r(text, " \t,;\r\n", &save); tok != NULL;
       tok = strtok_r(NULL, " \t,;\r\n", &save)) {
    char *eq = strchr(tok, '=');
    any = 1;
    if (eq == NULL)
      return twf_error_set(in->err, TWF_ERR_SYNTAX, in->path, in->cur_line, 0,
                           "write it as '# units: length=mm angle=deg'",
                           "'%s' in the units declaration is not key=unit", tok);
    *eq = '\0';
    if (strcmp(tok, "length") == 0) {
      if (seen_length++)
        return twf_error_set(in->err, TWF_ERR_DUPLICATE, in->path, in->cur_line,
                             0, "keep one length=...", "the length unit is declared twice");
      if (twf_length_unit_parse(eq + 1, &r->length_unit) != TWF_OK)
        return twf_error_set(in->err, TWF_ERR_UNITS, in->path, in->cur_line, 0,
                             "use one of mm, m, um, in",
                             "unknown length unit '%s'", eq + 1);
      r->decl_length = 1;
    } else if (strcmp(tok, "angle") == 0) {
      if (seen_angle++)
        return twf_error_set(in->err, TWF_ERR_DUPLICATE, in->path, in->cur_line,
                             0, "keep one angle=...", "the angle unit is declared twice");
      if (twf_angle_unit_parse(eq + 1, &r->angle_unit) != TWF_OK)
        return twf_error_set(in->err, TWF_ERR_UNITS, in->path, in->cur_line, 0,
                             "use one of deg, rad, mrad",
                             "unknown angle unit '%s'", eq + 1);
      r->decl_angle = 1;
    } else {
      return twf_error_set(in->err, TWF_ERR_SYNTAX, in->path, in->cur_line, 0,
                           "the keys are 'length' and 'angle'",
                           "unknown key '%s' in the units declaration", tok);
    }
  }
  if (!any)
    return twf_error_set(in->err, TWF_ERR_SYNTAX, in->path, in->cur_line, 0,
                         "write it as '# units: length=mm angle=deg'",
                         "the units declaration is empty");
  return TWF_OK;
}


static void known_columns(const creader *r, char *buf, size_t n)
{
  int i;
  size_t j;
  buf[0] = '\0';
  for (i = 0; i < COL_N; i++) {
    if (!role_allowed(r->kind, i))
      continue;
    if (i == COL_JOINT) {
      for (j = 0; j < r->m->n_joints; j++)
        twf_io_appendf(buf, n, "%s%s", buf[0] ? ", " : "", r->m->joints[j].name);
    } else {
      twf_io_appendf(buf, n, "%s%s", buf[0] ? ", " : "", twf_creader_role_name[i]);
    }
  }
}

static const char *kind_label(file_kind kind)
{
  switch (kind) {
  case KIND_ONE: return "campaign file";
  case KIND_JOINTS: return "joints file";
  case KIND_POINTS: return "points file";
  }
  return "file";
}

/* Units of this file: the caller's when imposed, else the declaration,
 * else mm and deg. */
static void resolve_units(creader *r)
{
  r->lu = r->decl_length ? r->length_unit : TWF_LENGTH_MM;
  r->au = r->decl_angle ? r->angle_unit : TWF_ANGLE_DEG;
  if (r->opt.length_from_caller) {
    if (r->decl_length && r->length_unit != r->opt.length_unit)
      twf_warnings_add(r->w, r->path, r->units_line, 0,
                       "the file declares length=%s; reading %s as requested",
                       twf_length_unit_name(r->length_unit),
                       twf_length_unit_name(r->opt.length_unit));
    r->lu = r->opt.length_unit;
  }
  if (r->opt.angle_from_caller) {
    if (r->decl_angle && r->angle_unit != r->opt.angle_unit)
      twf_warnings_add(r->w, r->path, r->units_line, 0,
                       "the file declares angle=%s; reading %s as requested",
                       twf_angle_unit_name(r->angle_unit),
                       twf_angle_unit_name(r->opt.angle_unit));
    r->au = r->opt.angle_unit;
  }
}

twf_status twf_creader_map_header(creader *r, const twf_csv_in *in,
                                  const twf_csv_row *row)
{
  size_t k, j;
  char known[TWF_ERROR_TEXT_MAX];
  resolve_units(r);
  r->delim = in->delim;
  r->hname = calloc(row->nf, sizeof *r->hname);
  if (r->hname == NULL)
    return twf_creader_nomem(r);
  r->nh = row->nf;
  for (k = 0; k < row->nf; k++) {
    r->hname[k] = strdup(row->f[k]);
    if (r->hname[k] == NULL)
      return twf_creader_nomem(r);
  }
  for (k = 0; k < row->nf; k++) {
    const char *name = row->f[k];
    long col = (long)k + 1;
    int role = twf_creader_reserved_role(name);
    long ji = -1;
    if (name[0] == '\0')
      return twf_creader_error(r, row, col, TWF_ERR_SYNTAX,
                               "give every column a name, or remove the extra delimiter",
                               "header field %ld has no column name", col);
    if (role < 0) {
      ji = twf_model_joint_index(r->m, name);
      if (ji >= 0)
        role = COL_JOINT;
    }
    if (role < 0 || !role_allowed(r->kind, role)) {
      const char *hint =
          "column names are case-sensitive; name joint columns exactly as "
          "the model's joints, or remove the column";
      if (r->kind == KIND_JOINTS && role >= 0)
        hint = "this looks like a points file: give the joints file first";
      else if (r->kind == KIND_POINTS && role == COL_JOINT)
        hint = "this looks like a joints file: give the points file second, "
               "or use the one-file form";
      known_columns(r, known, sizeof known);
      return twf_creader_error(r, row, col, TWF_ERR_UNKNOWN, hint,
                               "unknown column '%s' in the %s; the known columns are %s",
                               name, kind_label(r->kind), known);
    }
    if (role == COL_JOINT) {
      if (r->jcol[ji] != 0)
        return twf_creader_error(r, row, col, TWF_ERR_DUPLICATE, "keep one column per name",
                                 "column '%s' appears twice (fields %ld and %ld)", name,
                                 r->jcol[ji], col);
      r->jcol[ji] = col;
    } else {
      if (r->col[role] != 0)
        return twf_creader_error(r, row, col, TWF_ERR_DUPLICATE, "keep one column per name",
                                 "column '%s' appears twice (fields %ld and %ld)", name,
                                 r->col[role], col);
      r->col[role] = col;
    }
  }
  /* Required columns, in the order a reader of the message expects. */
  if (r->col[COL_POSE] == 0)
    return twf_creader_error(r, row, 0, TWF_ERR_MISSING, "add a 'pose' column of pose ids",
                             "the %s has no 'pose' column", kind_label(r->kind));
  if (r->kind != KIND_JOINTS && r->col[COL_TARGET] == 0)
    return twf_creader_error(r, row, 0, TWF_ERR_MISSING,
                             "add a 'target' column naming the model's target of each row",
                             "the %s has no 'target' column", kind_label(r->kind));
  if (r->kind != KIND_POINTS)
    for (j = 0; j < r->m->n_joints; j++)
      if (r->jcol[j] == 0)
        return twf_creader_error(r, row, 0, TWF_ERR_MISSING,
                                 "add one column per model joint, named as in the model",
                                 "the %s has no column for joint '%s' of the model",
                                 kind_label(r->kind), r->m->joints[j].name);
  if (r->kind != KIND_JOINTS) {
    int i, nq = 0;
    for (i = COL_X; i <= COL_Z; i++)
      if (r->col[i] == 0)
        return twf_creader_error(r, row, 0, TWF_ERR_MISSING,
                                 "add the measured coordinates as columns x, y, z",
                                 "the %s has no '%s' column", kind_label(r->kind),
                                 twf_creader_role_name[i]);
    for (i = COL_QW; i <= COL_QZ; i++)
      nq += r->col[i] != 0;
    if (nq != 0 && nq != 4)
      for (i = COL_QW; i <= COL_QZ; i++)
        if (r->col[i] == 0)
          return twf_creader_error(r, row, 0, TWF_ERR_MISSING,
                                   "give all four quaternion columns qw qx qy qz, or none",
                                   "the %s has quaternion columns but no '%s' column",
                                   kind_label(r->kind), twf_creader_role_name[i]);
  }
  return TWF_OK;
}
