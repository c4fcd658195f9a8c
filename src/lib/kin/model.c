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
  m->gravity[2] = -1.0;
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
  free(m->payloads);
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
  twf_v3_copy(m->gravity, c->gravity);
  if (m->n_payloads > 0) {
    c->payloads = malloc(m->n_payloads * sizeof *c->payloads);
    if (c->payloads == NULL)
      goto fail;
    memcpy(c->payloads, m->payloads, m->n_payloads * sizeof *m->payloads);
    c->n_payloads = m->n_payloads;
  }
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

long twf_model_payload_index(const twf_model *m, const char *name)
{
  if (m == NULL || name == NULL)
    return -1;
  for (size_t i = 0; i < m->n_payloads; i++)
    if (strcmp(m->payloads[i].name, name) == 0)
      return (long)i;
  return -1;
}

twf_status twf_model_payload_add(twf_model *m, const char *name, double mass,
                                 const double center[3])
{
  twf_payload *g;
  double c[3];
  if (m == NULL || name == NULL || center == NULL || strlen(name) >= TWF_NAME_MAX)
    return TWF_ERR_INVALID;
  if (twf_model_payload_index(m, name) >= 0)
    return TWF_ERR_DUPLICATE;
  /* center may be another payload's, which the realloc moves */
  twf_v3_copy(center, c);
  g = realloc(m->payloads, (m->n_payloads + 1) * sizeof *g);
  if (g == NULL)
    return TWF_ERR_NOMEM;
  m->payloads = g;
  memset(&g[m->n_payloads], 0, sizeof *g);
  twf_strlcpy(g[m->n_payloads].name, name, sizeof g->name);
  g[m->n_payloads].mass = mass;
  twf_v3_copy(c, g[m->n_payloads].center);
  m->n_payloads++;
  return TWF_OK;
}

int twf_model_has_compliance(const twf_model *m)
{
  for (size_t i = 0; i < m->n_joints; i++)
    if (m->joints[i].compliance != 0.0)
      return 1;
  return 0;
}

int twf_model_has_masses(const twf_model *m)
{
  for (size_t i = 0; i < m->n_joints; i++)
    if (m->joints[i].has_mass && m->joints[i].mass != 0.0)
      return 1;
  for (size_t i = 0; i < m->n_payloads; i++)
    if (m->payloads[i].mass != 0.0)
      return 1;
  return 0;
}

double twf_model_reach(const twf_model *m)
{
  double r = 0.1;
  for (size_t i = 0; i < m->n_joints; i++)
    r = fmax(r, twf_v3_norm(m->joints[i].point));
  r = fmax(r, twf_v3_norm(m->home.p));
  return r;
}

/* Forward kinematics at given theta (NULL: the rigid scale q + offset). */
static void fk_theta(const twf_model *m, const double *q, const double *theta,
                     twf_pose *prefix, twf_pose *flange)
{
  twf_pose P, E;
  twf_pose_identity(&P);
  if (prefix != NULL)
    prefix[0] = P;
  for (size_t i = 0; i < m->n_joints; i++) {
    const twf_joint *j = &m->joints[i];
    twf_se3_exp_joint(j->twist, theta != NULL ? theta[i] : j->scale * q[i] + j->offset, &E);
    twf_pose_mul(&P, &E, &P);
    if (prefix != NULL)
      prefix[i + 1] = P;
  }
  if (flange != NULL)
    twf_pose_mul(&P, &m->home, flange);
}

void twf_model_gravity_torques(const twf_model *m, const double *q,
                               long payload, double *tau, twf_pose *prefix)
{
  size_t n = m->n_joints;
  twf_pose local[17], *P = prefix, flange;
  double msum = 0.0, mx[3] = { 0.0, 0.0, 0.0 }, g[3];
  int heap = 0;
  if (P == NULL) {
    if (n + 1 <= sizeof local / sizeof local[0]) {
      P = local;
    } else {
      P = malloc((n + 1) * sizeof *P);
      if (P == NULL) { /* no room: no torques rather than a crash */
        for (size_t i = 0; i < n; i++)
          tau[i] = 0.0;
        return;
      }
      heap = 1;
    }
  }
  fk_theta(m, q, NULL, P, &flange);
  for (int a = 0; a < 3; a++)
    g[a] = TWF_GRAVITY_STANDARD * m->gravity[a];
  if (payload >= 0 && (size_t)payload < m->n_payloads) {
    const twf_payload *pl = &m->payloads[payload];
    double x[3];
    twf_pose_apply(&flange, pl->center, x);
    msum = pl->mass;
    for (int a = 0; a < 3; a++)
      mx[a] = pl->mass * x[a];
  }
  /* Sum over the bodies beyond joint i of F_j . (w x x_j + v), F_j = m_j g
   * and (w, v) joint i's twist at the configuration: w . (sum m_j x_j x g)
   * + v . g sum m_j, so suffix sums make it O(n). */
  for (size_t k = n; k-- > 0;) {
    const twf_joint *j = &m->joints[k];
    double S[6], mxg[3];
    if (j->has_mass) {
      double x[3];
      twf_pose_apply(&P[k + 1], j->mass_center, x);
      msum += j->mass;
      for (int a = 0; a < 3; a++)
        mx[a] += j->mass * x[a];
    }
    twf_se3_adjoint_apply(&P[k], j->twist, S);
    twf_v3_cross(mx, g, mxg);
    tau[k] = twf_v3_dot(S, mxg) + msum * twf_v3_dot(S + 3, g);
  }
  if (heap)
    free(P);
}

void twf_model_theta(const twf_model *m, const double *q, long payload,
                     double *theta, double *tau)
{
  size_t n = m->n_joints;
  int comp = twf_model_has_compliance(m);
  if (comp || tau != NULL) {
    double local[16], *t = tau;
    if (t == NULL) {
      t = n <= 16 ? local : malloc(n * sizeof *t);
      if (t == NULL)
        comp = 0;
    }
    if (t != NULL)
      twf_model_gravity_torques(m, q, payload, t, NULL);
    for (size_t i = 0; i < n; i++) {
      const twf_joint *j = &m->joints[i];
      theta[i] = j->scale * q[i] + j->offset;
      if (comp && j->compliance != 0.0)
        theta[i] += j->compliance * t[i];
    }
    if (t != tau && t != local)
      free(t);
    return;
  }
  for (size_t i = 0; i < n; i++)
    theta[i] = m->joints[i].scale * q[i] + m->joints[i].offset;
}

void twf_model_fk_load(const twf_model *m, const double *q, long payload,
                       twf_pose *prefix, twf_pose *flange)
{
  size_t n = m->n_joints;
  double local[16], *theta;
  if (!twf_model_has_compliance(m)) {
    fk_theta(m, q, NULL, prefix, flange);
    return;
  }
  theta = n <= 16 ? local : malloc(n * sizeof *theta);
  if (theta == NULL) {
    fk_theta(m, q, NULL, prefix, flange);
    return;
  }
  twf_model_theta(m, q, payload, theta, NULL);
  fk_theta(m, q, theta, prefix, flange);
  if (theta != local)
    free(theta);
}

void twf_model_fk_rigid(const twf_model *m, const double *q, twf_pose *prefix,
                        twf_pose *flange)
{
  fk_theta(m, q, NULL, prefix, flange);
}

void twf_model_fk(const twf_model *m, const double *q, twf_pose *prefix,
                  twf_pose *flange)
{
  twf_model_fk_load(m, q, -1, prefix, flange);
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
