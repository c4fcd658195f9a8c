/* modelfile_read.c: reading model files, twistfit-model(5): the first
 * pass (modelfile_parse.c) checks structure and keeps the values as text,
 * the second (modelfile_values.c) converts them, and build_model puts the
 * model together. */
#include "modelfile_internal.h"
#include "urdf_internal.h"

#include <errno.h>
#include <stdlib.h>

/* The plausible range of a DH row (a and d lengths, alpha and theta
 * angles), field by field in the file's order: dh is a alpha d theta, mdh
 * alpha a d theta, each with an optional fifth value beta (an angle). */
static int check_dh_range(parse_ctx *c, const section *s, joint_form form,
                          const twf_model *m, const twf_dh_row *row)
{
  const entry *e = twf_mf_find_entry(s, form == FORM_DH ? "dh" : "mdh");
  const char *lu = twf_length_unit_name(m->length_unit);
  const char *au = twf_angle_unit_name(m->angle_unit);
  double si[5], v[5];
  int angle[5];
  char what[96];
  snprintf(what, sizeof what, "%s row of joint %s", form == FORM_DH ? "dh" : "mdh",
           s->name);
  si[0] = form == FORM_DH ? row->a : row->alpha;
  si[1] = form == FORM_DH ? row->alpha : row->a;
  si[2] = row->d;
  si[3] = row->theta;
  angle[0] = form != FORM_DH;
  angle[1] = form == FORM_DH;
  angle[2] = 0;
  angle[3] = 1;
  si[4] = row->beta;
  angle[4] = 1;
  for (int k = 0; k < 5; k++) {
    v[k] = angle[k] ? twf_angle_from_si(si[k], m->angle_unit)
                    : twf_length_from_si(si[k], m->length_unit);
    if (twf_mf_check_range(c, e, what, angle[k] ? RANGE_ANGLE : RANGE_LENGTH, &v[k],
                           &si[k], 1, k + 1, angle[k] ? au : lu) != 0)
      return -1;
  }
  return 0;
}

static twf_model *build_model(parse_ctx *c)
{
  const section *robot = NULL, *home = NULL, *flange = NULL, *base = NULL;
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
    case SEC_BASE: base = s; break;
    case SEC_JOINT: nj++; break;
    case SEC_TARGET: nt++; break;
    case SEC_ASBUILT: case SEC_MASS: case SEC_PAYLOAD: break;
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
                                j->type, &rows[ij]) != 0 ||
                 check_dh_range(c, s, f, m, &rows[ij]) != 0) {
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
        double v[3];
        if (twf_mf_parse_numbers(c, e, what, v, 3) != 0)
          goto fail;
        for (int k = 0; k < 3; k++)
          t->offset[k] = twf_length_to_si(v[k], m->length_unit);
        if (twf_mf_check_range(c, e, what, RANGE_LENGTH, v, t->offset, 3, 1,
                               twf_length_unit_name(m->length_unit)) != 0)
          goto fail;
        t->offset_known = 1;
      }
    } else if (s->kind == SEC_ASBUILT && s->n > 0) {
      /* The first pass checked the keys (valid names, no repeats): fill
       * the metadata at once rather than through twf_model_meta_set,
       * whose look-up per key would make many keys quadratic. */
      m->meta = calloc(s->n, sizeof *m->meta);
      if (m->meta == NULL) {
        twf_ini_fail(&c->ini, TWF_ERR_NOMEM, s->line, 0, NULL, "out of memory");
        goto fail;
      }
      for (size_t k = 0; k < s->n; k++) {
        twf_strlcpy(m->meta[k].key, s->entries[k].key, sizeof m->meta[k].key);
        m->meta[k].value = s->entries[k].value;
        s->entries[k].value = NULL; /* now the model's */
        m->n_meta = k + 1;
      }
    }
  }

  /* the mass model, once every joint is known */
  for (size_t i = 0; i < c->nsec; i++) {
    const section *s = &c->secs[i];
    if (s->kind == SEC_MASS) {
      long k = twf_model_joint_index(m, s->name);
      twf_joint *jt;
      if (k < 0) {
        twf_ini_fail(&c->ini, TWF_ERR_UNKNOWN, s->line, 0,
                     "name the joint whose body this is, as in its [joint NAME] section",
                     "[mass %s]: the model has no joint '%s'", s->name, s->name);
        goto fail;
      }
      jt = &m->joints[k];
      if (twf_mf_parse_mass(c, s, m->length_unit, &jt->mass, jt->mass_center) != 0)
        goto fail;
      jt->has_mass = 1;
    } else if (s->kind == SEC_PAYLOAD) {
      double mass, center[3];
      if (twf_mf_parse_mass(c, s, m->length_unit, &mass, center) != 0)
        goto fail;
      if (twf_model_payload_add(m, s->name, mass, center) != TWF_OK) {
        twf_ini_fail(&c->ini, TWF_ERR_NOMEM, s->line, 0, NULL, "out of memory");
        goto fail;
      }
    }
  }

  if (form == FORM_AXIS) {
    if (base != NULL) {
      twf_ini_fail(&c->ini, TWF_ERR_SYNTAX, base->line, 0,
                   "in the axis-and-point form the axes and [home] are already "
                   "in the base frame: leave [base] out",
                   "[base] belongs to DH-form files, this file uses the "
                   "axis-and-point form");
      goto fail;
    }
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
    twf_pose F, B;
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
    twf_pose_identity(&B);
    if (base != NULL &&
        twf_mf_parse_pose(c, base, m->length_unit, m->angle_unit, &B) != 0)
      goto fail;
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
      st = twf_model_set_from_dh_beta(m, rows, nj,
                                      form == FORM_DH ? TWF_DH_STANDARD
                                                      : TWF_DH_MODIFIED,
                                      &B, &F, &e2);
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

twf_read_options twf_read_default_options(void)
{
  twf_read_options o;
  memset(&o, 0, sizeof o);
  o.max_input_size = TWF_INPUT_SIZE_DEFAULT;
  return o;
}

static twf_model *read_model(const char *path, const twf_read_options *opt,
                             twf_warnings *warnings, twf_input_digest *digest,
                             twf_error *err)
{
  parse_ctx c;
  twf_model *m;

  memset(&c, 0, sizeof c);
  c.ini.path = path;
  c.ini.err = err;
  c.ini.name = "model file";
  c.ini.max_size = opt && opt->max_input_size ? opt->max_input_size
                                               : TWF_INPUT_SIZE_DEFAULT;
  c.warnings = warnings;
  c.ini.status = TWF_OK;
  twf_mf_parse_structure(&c);
  if (c.ini.status != TWF_OK) {
    twf_mf_ctx_clear(&c);
    return NULL;
  }
  m = build_model(&c);
  twf_mf_ctx_clear(&c);
  if (m != NULL && digest != NULL)
    *digest = c.ini.digest;
  return m;
}

twf_model *twf_model_read(const char *path, twf_warnings *warnings,
                          twf_error *err)
{
  return twf_model_read_with(path, NULL, warnings, NULL, err);
}

twf_model *twf_model_read_with(const char *path, const twf_read_options *opt,
                               twf_warnings *warnings,
                               twf_input_digest *digest, twf_error *err)
{
  twf_io_c_locale loc;
  twf_model *m;
  twf_error_clear(err);
  if (digest != NULL)
    memset(digest, 0, sizeof *digest);
  if (path == NULL) {
    twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                  "no model file name given");
    return NULL;
  }
  if (twf_io_c_locale_enter(&loc, err) != TWF_OK)
    return NULL;
  if (twf_urdf_is_urdf(path)) {
    /* a URDF robot wherever a model file is accepted */
    twf_urdf_read_options u = twf_urdf_default_read_options();
    if (opt != NULL) {
      u.max_input_size = opt->max_input_size;
      u.base_link = opt->urdf_base_link;
      u.tip_link = opt->urdf_tip_link;
      u.target_links = opt->urdf_target_links;
      u.n_target_links = opt->urdf_n_target_links;
    }
    m = twf_urdf_read_model(path, &u, warnings, digest, err);
  } else {
    m = read_model(path, opt, warnings, digest, err);
    /* the chain of a URDF robot asked for, and a model file given: say
     * that the choice did nothing rather than ignore it */
    if (m != NULL && opt != NULL &&
        (opt->urdf_base_link != NULL || opt->urdf_tip_link != NULL || opt->urdf_n_target_links > 0))
      twf_warnings_add(warnings, path, 0, 0,
                       "a model file, not a URDF robot: the base link, tip link and target links chosen "
                       "for a URDF chain do not apply to it");
  }
  twf_io_c_locale_leave(&loc);
  return m;
}
