/* modelfile_read.c: reading model files, twistfit-model(5): the first
 * pass (modelfile_parse.c) checks structure and keeps the values as text,
 * the second (modelfile_values.c) converts them, and build_model puts the
 * model together. */
#include "modelfile_internal.h"

#include <errno.h>
#include <stdlib.h>

static twf_model *build_model(parse_ctx *c)
{
  const section *robot = NULL, *home = NULL, *flange = NULL;
  size_t nj = 0, nt = 0, ij = 0, it = 0;
  twf_model *m = NULL;
  twf_dh_row *rows = NULL;
  joint_form form = FORM_NONE;
  const section *form_joint = NULL;

  for (size_t i = 0; i < c->nsec; i++) {
    const section *s = &c->secs[i];
    switch (s->kind) {
    case SEC_ROBOT: robot = s; break;
    case SEC_HOME: home = s; break;
    case SEC_FLANGE: flange = s; break;
    case SEC_JOINT: nj++; break;
    case SEC_TARGET: nt++; break;
    case SEC_ASBUILT: break;
    }
  }
  if (!c->content) {
    twf_ini_fail(&c->ini, TWF_ERR_MISSING, 0, 0,
                 "a model needs [robot], one [joint NAME] per joint and [home]; see "
                 "twistfit-model(5)",
                 "file holds no sections (it is empty or only comments)");
    return NULL;
  }
  if (robot == NULL) {
    twf_ini_fail(&c->ini, TWF_ERR_MISSING, 0, 0,
                 "start the file with [robot] giving name, length_unit and "
                 "angle_unit",
                 "no [robot] section");
    return NULL;
  }
  if (nj == 0) {
    twf_ini_fail(&c->ini, TWF_ERR_MISSING, 0, 0,
                 "add one [joint NAME] section per joint, base to flange",
                 "no [joint NAME] section");
    return NULL;
  }
  m = twf_model_alloc(nj, nt);
  rows = calloc(nj, sizeof *rows);
  if (m == NULL || rows == NULL) {
    twf_ini_fail(&c->ini, TWF_ERR_NOMEM, 0, 0, NULL, "out of memory");
    goto fail;
  }
  if (twf_mf_parse_robot(c, robot, m) != 0)
    goto fail;

  for (size_t i = 0; i < c->nsec; i++) {
    const section *s = &c->secs[i];
    if (s->kind == SEC_JOINT) {
      twf_joint *j = &m->joints[ij];
      joint_form f;
      const entry *first;
      if (twf_mf_parse_joint_common(c, s, m->length_unit, m->angle_unit, j) != 0 ||
          twf_mf_joint_form_of(c, s, &f, &first) != 0)
        goto fail;
      if (f == FORM_NONE) {
        twf_ini_fail(&c->ini, TWF_ERR_MISSING, s->line, 0,
                     "add axis and point, or a dh or mdh row",
                     "joint %s has no axis", s->name);
        goto fail;
      }
      if (form == FORM_NONE) {
        form = f;
        form_joint = s;
      } else if (f != form) {
        twf_ini_fail(&c->ini, TWF_ERR_SYNTAX, first->line, 0,
                     "all joints of a file use the same form",
                     "joint %s uses %s but joint %s uses %s", s->name, twf_mf_form_name(f),
                     form_joint->name, twf_mf_form_name(form));
        goto fail;
      }
      if (f == FORM_AXIS) {
        if (twf_mf_parse_joint_axis(c, s, m->length_unit, j) != 0)
          goto fail;
      } else if (twf_mf_parse_joint_dh(c, s, f, m->length_unit, m->angle_unit,
                                j->type, &rows[ij]) != 0) {
        goto fail;
      }
      ij++;
    } else if (s->kind == SEC_TARGET) {
      twf_target *t = &m->targets[it++];
      const entry *e = twf_mf_find_entry(s, "offset");
      twf_strlcpy(t->name, s->name, sizeof t->name);
      if (e != NULL) {
        char what[96];
        snprintf(what, sizeof what, "offset of target %s", s->name);
        if (twf_mf_parse_numbers(c, e, what, t->offset, 3) != 0)
          goto fail;
        for (int k = 0; k < 3; k++)
          t->offset[k] = twf_length_to_si(t->offset[k], m->length_unit);
        t->offset_known = 1;
      }
    } else if (s->kind == SEC_ASBUILT) {
      for (size_t k = 0; k < s->n; k++) {
        twf_status st = twf_model_meta_set(m, s->entries[k].key,
                                           s->entries[k].value);
        if (st != TWF_OK) {
          twf_ini_fail(&c->ini, st, s->entries[k].line, 0, NULL,
                       "cannot keep metadata '%s'", s->entries[k].key);
          goto fail;
        }
      }
    }
  }

  if (form == FORM_AXIS) {
    if (flange != NULL) {
      twf_ini_fail(&c->ini, TWF_ERR_SYNTAX, flange->line, 0,
                   "in the axis-and-point form give the flange pose at zero in "
                   "[home]",
                   "[flange] belongs to DH-form files, this file uses the "
                   "axis-and-point form");
      goto fail;
    }
    if (home == NULL) {
      twf_ini_fail(&c->ini, TWF_ERR_MISSING, 0, 0,
                   "add [home] with the flange pose in the base frame at zero joint "
                   "values: position and one rotation",
                   "no [home] section");
      goto fail;
    }
    if (twf_mf_parse_pose(c, home, m->length_unit, m->angle_unit, &m->home) != 0)
      goto fail;
  } else {
    twf_pose F;
    twf_error e2;
    if (home != NULL) {
      twf_ini_fail(&c->ini, TWF_ERR_SYNTAX, home->line, 0,
                   "in DH form give the flange pose in the last DH frame in "
                   "[flange]",
                   "[home] belongs to the axis-and-point form, this file uses DH "
                   "rows");
      goto fail;
    }
    twf_pose_identity(&F);
    if (flange != NULL &&
        twf_mf_parse_pose(c, flange, m->length_unit, m->angle_unit, &F) != 0)
      goto fail;
    {
      /* set_from_dh resets scale and offset: keep the file's. */
      double *sc = malloc(2 * nj * sizeof *sc);
      twf_status st;
      if (sc == NULL) {
        twf_ini_fail(&c->ini, TWF_ERR_NOMEM, 0, 0, NULL, "out of memory");
        goto fail;
      }
      for (size_t k = 0; k < nj; k++) {
        sc[2 * k] = m->joints[k].scale;
        sc[2 * k + 1] = m->joints[k].offset;
      }
      twf_error_clear(&e2);
      st = twf_model_set_from_dh(m, rows, nj,
                                 form == FORM_DH ? TWF_DH_STANDARD
                                                 : TWF_DH_MODIFIED,
                                 &F, &e2);
      for (size_t k = 0; k < nj; k++) {
        m->joints[k].scale = sc[2 * k];
        m->joints[k].offset = sc[2 * k + 1];
      }
      free(sc);
      if (st != TWF_OK) {
        twf_ini_fail(&c->ini, st, 0, 0, e2.hint, "%s", e2.message);
        goto fail;
      }
    }
  }
  free(rows);
  return m;
fail:
  free(rows);
  twf_model_free(m);
  return NULL;
}

static twf_model *read_model(const char *path, twf_warnings *warnings,
                             twf_error *err)
{
  parse_ctx c;
  twf_model *m;
  FILE *fp;

  memset(&c, 0, sizeof c);
  c.ini.path = path;
  c.ini.err = err;
  c.warnings = warnings;
  c.ini.status = TWF_OK;
  fp = fopen(path, "rb");
  if (fp == NULL) {
    twf_error_set(err, TWF_ERR_IO, path, 0, 0,
                  "check the file name and its permissions",
                  "cannot open model file '%s': %s", path, strerror(errno));
    return NULL;
  }
  twf_mf_parse_structure(&c, fp);
  fclose(fp);
  if (c.ini.status != TWF_OK) {
    twf_mf_ctx_clear(&c);
    return NULL;
  }
  m = build_model(&c);
  twf_mf_ctx_clear(&c);
  return m;
}

twf_model *twf_model_read(const char *path, twf_warnings *warnings,
                          twf_error *err)
{
  twf_io_c_locale loc;
  twf_model *m;
  twf_error_clear(err);
  if (path == NULL) {
    twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                  "no model file name given");
    return NULL;
  }
  if (twf_io_c_locale_enter(&loc, err) != TWF_OK)
    return NULL;
  m = read_model(path, warnings, err);
  twf_io_c_locale_leave(&loc);
  return m;
}
