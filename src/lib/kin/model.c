/* model.c: the kinematic model object, its metadata, forward kinematics
 * by prefix products and the spatial Jacobian (DEVELOPERS.md, "The maths"). */
#include "internal.h"

#include <stdlib.h>

twf_model *twf_model_alloc(size_t n_joints, size_t n_targets)
{
  twf_model *m = calloc(1, sizeof *m);
  if (m == NULL)
    return NULL;
  if (n_joints > 0) {
    m->joints = calloc(n_joints, sizeof *m->joints);
    if (m->joints == NULL)
      goto fail;
  }
  if (n_targets > 0) {
    m->targets = calloc(n_targets, sizeof *m->targets);
    if (m->targets == NULL)
      goto fail;
  }
  m->n_joints = n_joints;
  m->n_targets = n_targets;
  m->length_unit = TWF_LENGTH_MM;
  m->angle_unit = TWF_ANGLE_DEG;
  for (size_t i = 0; i < n_joints; i++)
    m->joints[i].scale = 1.0;
  twf_pose_identity(&m->home);
  return m;
fail:
  free(m->joints);
  free(m);
  return NULL;
}

void twf_model_free(twf_model *m)
{
  if (m == NULL)
    return;
  for (size_t i = 0; i < m->n_meta; i++)
    free(m->meta[i].value);
  free(m->meta);
  free(m->targets);
  free(m->joints);
  free(m);
}

static char *dup_string(const char *s)
{
  size_t n = strlen(s) + 1;
  char *d = malloc(n);
  if (d != NULL)
    memcpy(d, s, n);
  return d;
}

twf_model *twf_model_copy(const twf_model *m)
{
  twf_model *c;
  if (m == NULL)
    return NULL;
  c = twf_model_alloc(m->n_joints, m->n_targets);
  if (c == NULL)
    return NULL;
  memcpy(c->name, m->name, sizeof c->name);
  c->length_unit = m->length_unit;
  c->angle_unit = m->angle_unit;
  c->home = m->home;
  if (m->n_joints > 0)
    memcpy(c->joints, m->joints, m->n_joints * sizeof *m->joints);
  if (m->n_targets > 0)
    memcpy(c->targets, m->targets, m->n_targets * sizeof *m->targets);
  if (m->n_meta > 0) {
    c->meta = calloc(m->n_meta, sizeof *c->meta);
    if (c->meta == NULL)
      goto fail;
    for (size_t i = 0; i < m->n_meta; i++) {
      memcpy(c->meta[i].key, m->meta[i].key, sizeof c->meta[i].key);
      c->meta[i].value = dup_string(m->meta[i].value ? m->meta[i].value : "");
      if (c->meta[i].value == NULL)
        goto fail;
      c->n_meta = i + 1;
    }
  }
  return c;
fail:
  twf_model_free(c);
  return NULL;
}

static long meta_find(const twf_model *m, const char *key)
{
  for (size_t i = 0; i < m->n_meta; i++)
    if (strcmp(m->meta[i].key, key) == 0)
      return (long)i;
  return -1;
}

twf_status twf_model_meta_set(twf_model *m, const char *key, const char *value)
{
  long i;
  char *v;
  if (m == NULL || key == NULL || value == NULL || key[0] == '\0')
    return TWF_ERR_INVALID;
  /* A key that does not fit would be stored truncated and then never be
   * found again under its own name: refuse it. */
  if (strlen(key) >= TWF_NAME_MAX)
    return TWF_ERR_INVALID;
  v = dup_string(value);
  if (v == NULL)
    return TWF_ERR_NOMEM;
  i = meta_find(m, key);
  if (i >= 0) {
    free(m->meta[i].value);
    m->meta[i].value = v;
    return TWF_OK;
  }
  {
    twf_meta_entry *grown = realloc(m->meta, (m->n_meta + 1) * sizeof *grown);
    if (grown == NULL) {
      free(v);
      return TWF_ERR_NOMEM;
    }
    m->meta = grown;
  }
  twf_strlcpy(m->meta[m->n_meta].key, key, sizeof m->meta[m->n_meta].key);
  m->meta[m->n_meta].value = v;
  m->n_meta++;
  return TWF_OK;
}

const char *twf_model_meta_get(const twf_model *m, const char *key)
{
  long i;
  if (m == NULL || key == NULL)
    return NULL;
  i = meta_find(m, key);
  return i >= 0 ? m->meta[i].value : NULL;
}

long twf_model_joint_index(const twf_model *m, const char *name)
{
  if (m == NULL || name == NULL)
    return -1;
  for (size_t i = 0; i < m->n_joints; i++)
    if (strcmp(m->joints[i].name, name) == 0)
      return (long)i;
  return -1;
}

long twf_model_target_index(const twf_model *m, const char *name)
{
  if (m == NULL || name == NULL)
    return -1;
  for (size_t i = 0; i < m->n_targets; i++)
    if (strcmp(m->targets[i].name, name) == 0)
      return (long)i;
  return -1;
}

double twf_model_reach(const twf_model *m)
{
  double r = 0.1;
  for (size_t i = 0; i < m->n_joints; i++)
    r = fmax(r, twf_v3_norm(m->joints[i].point));
  r = fmax(r, twf_v3_norm(m->home.p));
  return r;
}

void twf_model_fk(const twf_model *m, const double *q, twf_pose *prefix,
                  twf_pose *flange)
{
  twf_pose P, E;
  twf_pose_identity(&P);
  if (prefix != NULL)
    prefix[0] = P;
  for (size_t i = 0; i < m->n_joints; i++) {
    const twf_joint *j = &m->joints[i];
    twf_se3_exp(j->twist, j->scale * q[i] + j->offset, &E);
    twf_pose_mul(&P, &E, &P);
    if (prefix != NULL)
      prefix[i + 1] = P;
  }
  if (flange != NULL)
    twf_pose_mul(&P, &m->home, flange);
}

void twf_model_jacobian_spatial(const twf_model *m, const twf_pose *prefix,
                                double *J)
{
  size_t n = m->n_joints;
  for (size_t i = 0; i < n; i++) {
    double col[6];
    twf_se3_adjoint_apply(&prefix[i], m->joints[i].twist, col);
    for (int r = 0; r < 6; r++)
      J[(size_t)r * n + i] = m->joints[i].scale * col[r];
  }
}
