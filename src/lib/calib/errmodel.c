/* errmodel.c: the calibration parameters of a PoE model and the exact
 * first-order effect of each on one measurement (the adjoint error model,
 * DEVELOPERS.md, "The maths"; Okamura and Park 1996, He, Zhao,
 * Yang and Yang 2010, Li, Wu, Loewe and others 2016).
 *
 * Each parameter is a small perturbation of the current model; its effect
 * on the flange is a spatial twist in the tracker frame. One pose is
 * evaluated at a time: the prefixes and twists cost O(n p), and every target
 * measured at that pose reuses them, so assembling a campaign is linear in
 * the number of measurements. */
#include "internal.h"
#include "errmodel_internal.h"

#include <stdlib.h>

struct twf_errmodel {
  size_t n_joints, n_targets, n_params;
  size_t n_stations;  /* base parameters: 6 per station */
  size_t station;     /* station of the evaluated pose */
  twf_param *params;
  double *scale;      /* column scale per parameter */
  double (*u1)[3];    /* axis-error directions per joint */
  double (*u2)[3];
  double reach;
  /* workspace of the evaluated pose */
  twf_pose *prefix;   /* n_joints + 1: B P_i, base included */
  twf_pose flange;    /* B P_n M */
  double *twists;     /* 6 x n_params, column j at twists[6 j] */
  double *axis_step;  /* 6 x n_joints, fold workspace */
  const double *q;
  /* compliance: the payload of the poses, the torques and joint values of
   * the evaluated pose */
  long payload;
  int comp_group;
  double *tau;
  double *theta;
  /* per joint i, at the evaluated pose, the axis-error lines seen through
   * the prefixes B P_(i-1) and B P_i (side 0 and 1): the directions R u1,
   * R u2 and the joint point P q_i, 9 numbers a side; line_ready[i] once
   * filled for this pose */
  double (*line)[2][9];
  unsigned char *line_ready;
};

static const char *const group_names[TWF_GROUP_COUNT] = {
  "base", "targets", "offsets", "home", "shifts", "tilts", "scale", "compliance"
};

const char *twf_group_name(twf_group g)
{
  return (unsigned)g < TWF_GROUP_COUNT ? group_names[g] : "?";
}

twf_status twf_group_parse(const char *name, unsigned *mask)
{
  int g;
  if (strcmp(name, "axes") == 0) {
    *mask = TWF_GROUP_BIT(TWF_GROUP_SHIFTS) | TWF_GROUP_BIT(TWF_GROUP_TILTS);
    return TWF_OK;
  }
  for (g = 0; g < TWF_GROUP_COUNT; g++)
    if (strcmp(name, group_names[g]) == 0) {
      *mask = TWF_GROUP_BIT(g);
      return TWF_OK;
    }
  return TWF_ERR_UNKNOWN;
}

static size_t count_params(const twf_model *m, unsigned groups, size_t n_stations)
{
  size_t n = 0, i;
  if (groups & TWF_GROUP_BIT(TWF_GROUP_BASE)) n += 6 * n_stations;
  if (groups & TWF_GROUP_BIT(TWF_GROUP_TARGETS)) n += 3 * m->n_targets;
  if (groups & TWF_GROUP_BIT(TWF_GROUP_OFFSETS)) n += m->n_joints;
  if (groups & TWF_GROUP_BIT(TWF_GROUP_HOME)) n += 6;
  for (i = 0; i < m->n_joints; i++) {
    int rev = m->joints[i].type == TWF_JOINT_REVOLUTE;
    if (rev && (groups & TWF_GROUP_BIT(TWF_GROUP_SHIFTS))) n += 2;
    if (groups & TWF_GROUP_BIT(TWF_GROUP_TILTS)) n += 2;
  }
  if (groups & TWF_GROUP_BIT(TWF_GROUP_SCALE)) n += m->n_joints;
  if (groups & TWF_GROUP_BIT(TWF_GROUP_COMPLIANCE))
    for (i = 0; i < m->n_joints; i++)
      n += m->joints[i].type == TWF_JOINT_REVOLUTE;
  return n;
}

static void add_param(twf_errmodel *em, const twf_model *m, size_t *j,
                      twf_group g, long joint, long target, int comp,
                      twf_param_kind kind, const char *suffix)
{
  twf_param *p = &em->params[*j];
  const char *owner = g == TWF_GROUP_BASE ? "base"
                      : g == TWF_GROUP_HOME ? "home"
                      : target >= 0 ? m->targets[target].name
                                    : m->joints[joint].name;
  p->group = g;
  p->joint = joint;
  p->target = target;
  p->component = comp;
  p->kind = kind;
  p->station = -1;
  snprintf(p->name, sizeof p->name, "%s.%s", owner, suffix);
  em->scale[*j] = kind == TWF_PARAM_LENGTH ? 1.0 : em->reach;
  (*j)++;
}

twf_errmodel *twf_errmodel_alloc(const twf_model *m, unsigned groups, twf_error *err)
{
  return twf_errmodel_alloc_stations(m, groups, 1, NULL, err);
}

size_t twf_errmodel_n_stations(const twf_errmodel *em) { return em->n_stations; }

twf_errmodel *twf_errmodel_alloc_stations(const twf_model *m, unsigned groups, size_t n_stations,
                                          const char (*names)[TWF_NAME_MAX], twf_error *err)
{
  static const char *const pose_names[6] = { "rx", "ry", "rz", "tx", "ty", "tz" };
  static const char *const xyz[3] = { "x", "y", "z" };
  twf_errmodel *em;
  size_t n, j = 0, i;
  int c;

  if (m == NULL || groups == 0 || (groups >> TWF_GROUP_COUNT) != 0)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "no valid parameter group chosen"), NULL;
  if (n_stations == 0 || n_stations > TWF_STATIONS_MAX || (n_stations > 1 && names == NULL))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "the error model takes 1 to %d named stations", TWF_STATIONS_MAX), NULL;
  n = count_params(m, groups, n_stations);
  em = calloc(1, sizeof *em);
  if (em == NULL)
    goto nomem;
  em->n_joints = m->n_joints;
  em->n_targets = m->n_targets;
  em->n_params = n;
  em->n_stations = n_stations;
  em->reach = twf_model_reach(m);
  em->params = calloc(n ? n : 1, sizeof *em->params);
  em->scale = calloc(n ? n : 1, sizeof *em->scale);
  em->u1 = calloc(m->n_joints ? m->n_joints : 1, sizeof *em->u1);
  em->u2 = calloc(m->n_joints ? m->n_joints : 1, sizeof *em->u2);
  em->prefix = calloc(m->n_joints + 1, sizeof *em->prefix);
  em->twists = calloc(6 * (n ? n : 1), sizeof *em->twists);
  em->axis_step = calloc(6 * (m->n_joints ? m->n_joints : 1), sizeof *em->axis_step);
  em->tau = calloc(m->n_joints ? m->n_joints : 1, sizeof *em->tau);
  em->theta = calloc(m->n_joints ? m->n_joints : 1, sizeof *em->theta);
  em->line = calloc(m->n_joints ? m->n_joints : 1, sizeof *em->line);
  em->line_ready = calloc(m->n_joints ? m->n_joints : 1, 1);
  em->payload = -1;
  em->comp_group = (groups & TWF_GROUP_BIT(TWF_GROUP_COMPLIANCE)) != 0;
  if (!em->params || !em->scale || !em->u1 || !em->u2 || !em->prefix || !em->twists ||
      !em->axis_step || !em->tau || !em->theta || !em->line || !em->line_ready)
    goto nomem;

  /* The internal layout is group-major in enum order; the redundancy walk
   * chooses its own order, so this one only fixes names and indices. */
  /* Base parameters station-major: one station gives the 6 of before,
   * named as before. */
  if (groups & TWF_GROUP_BIT(TWF_GROUP_BASE))
    for (i = 0; i < n_stations; i++)
      for (c = 0; c < 6; c++) {
        add_param(em, m, &j, TWF_GROUP_BASE, -1, -1, c,
                  c < 3 ? TWF_PARAM_ANGLE : TWF_PARAM_LENGTH, pose_names[c]);
        em->params[j - 1].station = (long)i;
        if (n_stations > 1)
          snprintf(em->params[j - 1].name, sizeof em->params[j - 1].name, "base.%s.%s", names[i],
                   pose_names[c]);
      }
  if (groups & TWF_GROUP_BIT(TWF_GROUP_TARGETS))
    for (i = 0; i < m->n_targets; i++)
      for (c = 0; c < 3; c++)
        add_param(em, m, &j, TWF_GROUP_TARGETS, -1, (long)i, c, TWF_PARAM_LENGTH, xyz[c]);
  if (groups & TWF_GROUP_BIT(TWF_GROUP_OFFSETS))
    for (i = 0; i < m->n_joints; i++)
      add_param(em, m, &j, TWF_GROUP_OFFSETS, (long)i, -1, 0,
                m->joints[i].type == TWF_JOINT_REVOLUTE ? TWF_PARAM_ANGLE : TWF_PARAM_LENGTH,
                "offset");
  if (groups & TWF_GROUP_BIT(TWF_GROUP_HOME))
    for (c = 0; c < 6; c++)
      add_param(em, m, &j, TWF_GROUP_HOME, -1, -1, c,
                c < 3 ? TWF_PARAM_ANGLE : TWF_PARAM_LENGTH, pose_names[c]);
  if (groups & TWF_GROUP_BIT(TWF_GROUP_SHIFTS))
    for (i = 0; i < m->n_joints; i++)
      if (m->joints[i].type == TWF_JOINT_REVOLUTE)
        for (c = 0; c < 2; c++)
          add_param(em, m, &j, TWF_GROUP_SHIFTS, (long)i, -1, c, TWF_PARAM_LENGTH,
                    c == 0 ? "shift1" : "shift2");
  if (groups & TWF_GROUP_BIT(TWF_GROUP_TILTS))
    for (i = 0; i < m->n_joints; i++)
      for (c = 0; c < 2; c++)
        add_param(em, m, &j, TWF_GROUP_TILTS, (long)i, -1, c, TWF_PARAM_ANGLE,
                  c == 0 ? "tilt1" : "tilt2");
  if (groups & TWF_GROUP_BIT(TWF_GROUP_SCALE))
    for (i = 0; i < m->n_joints; i++)
      add_param(em, m, &j, TWF_GROUP_SCALE, (long)i, -1, 0,
                TWF_PARAM_RATIO, "scale");
  if (groups & TWF_GROUP_BIT(TWF_GROUP_COMPLIANCE))
    for (i = 0; i < m->n_joints; i++)
      if (m->joints[i].type == TWF_JOINT_REVOLUTE)
        add_param(em, m, &j, TWF_GROUP_COMPLIANCE, (long)i, -1, 0, TWF_PARAM_COMPLIANCE,
                  "compliance");
  /* a joint scale moves the arm by c q: angular for a revolute joint */
  for (i = 0; i < n; i++)
    if (em->params[i].group == TWF_GROUP_SCALE)
      em->scale[i] = m->joints[em->params[i].joint].type == TWF_JOINT_REVOLUTE ? em->reach : 1.0;
  /* a compliance moves the arm by C tau: the reach times a bound of the
   * joint's torque, so that a scaled compliance is a length like the
   * others (the redundancy walk's tolerance is relative to it) */
  for (i = 0; i < n; i++)
    if (em->params[i].group == TWF_GROUP_COMPLIANCE) {
      double mass = 0.0, pay = 0.0;
      size_t k;
      for (k = (size_t)em->params[i].joint; k < m->n_joints; k++)
        if (m->joints[k].has_mass)
          mass += fabs(m->joints[k].mass);
      for (k = 0; k < m->n_payloads; k++)
        pay = fmax(pay, fabs(m->payloads[k].mass));
      em->scale[i] = em->reach * fmax(1.0, TWF_GRAVITY_STANDARD * em->reach * (mass + pay));
    }
  twf_errmodel_update(em, m);
  return em;

nomem:
  twf_errmodel_free(em);
  twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
  return NULL;
}

void twf_errmodel_free(twf_errmodel *em)
{
  if (em == NULL)
    return;
  free(em->params);
  free(em->scale);
  free(em->u1);
  free(em->u2);
  free(em->prefix);
  free(em->twists);
  free(em->axis_step);
  free(em->tau);
  free(em->theta);
  free(em->line);
  free(em->line_ready);
  free(em);
}

size_t twf_errmodel_n_params(const twf_errmodel *em) { return em->n_params; }

const twf_param *twf_errmodel_param(const twf_errmodel *em, size_t j)
{
  return j < em->n_params ? &em->params[j] : NULL;
}

double twf_errmodel_param_scale(const twf_errmodel *em, size_t j)
{
  return j < em->n_params ? em->scale[j] : 1.0;
}

double twf_errmodel_column_scale(const twf_errmodel *em, size_t j)
{
  if (j >= em->n_params)
    return 1.0;
  if (em->params[j].group == TWF_GROUP_COMPLIANCE)
    return em->reach * em->reach / em->scale[j]; /* the reach over the torque bound */
  return em->scale[j];
}

/* u1: the component of base x perpendicular to the joint direction (base y
 * when x is within 30 degrees of it), u2 = d x u1: reproducible names and
 * values for the axis errors (DEVELOPERS.md, "The maths"). */
void twf_errmodel_update(twf_errmodel *em, const twf_model *m)
{
  size_t i;
  for (i = 0; i < m->n_joints; i++) {
    const twf_joint *jt = &m->joints[i];
    const double *d = jt->type == TWF_JOINT_REVOLUTE ? jt->twist : jt->twist + 3;
    double ref[3] = { 1.0, 0.0, 0.0 };
    double dot, n;
    int a;
    if (fabs(d[0]) > cos(30.0 * TWF_PI / 180.0)) {
      ref[0] = 0.0;
      ref[1] = 1.0;
    }
    dot = twf_v3_dot(ref, d);
    for (a = 0; a < 3; a++)
      em->u1[i][a] = ref[a] - dot * d[a];
    n = twf_v3_norm(em->u1[i]);
    for (a = 0; a < 3; a++)
      em->u1[i][a] /= n;
    twf_v3_cross(d, em->u1[i], em->u2[i]);
  }
}

void twf_errmodel_axis_basis(const twf_errmodel *em, size_t joint,
                             double u1[3], double u2[3])
{
  twf_v3_copy(em->u1[joint], u1);
  twf_v3_copy(em->u2[joint], u2);
}

/* The basis twist of an axis parameter: tilt about the line through the
 * joint's reference point along u, (u, -u x q); shift along u, (0, u). */
static void axis_basis_twist(const twf_errmodel *em, const twf_model *m,
                             const twf_param *p, double e[6])
{
  const double *u = p->component == 0 ? em->u1[p->joint] : em->u2[p->joint];
  if (p->group == TWF_GROUP_TILTS) {
    double uxq[3];
    twf_v3_cross(u, m->joints[p->joint].point, uxq);
    e[0] = u[0]; e[1] = u[1]; e[2] = u[2];
    e[3] = -uxq[0]; e[4] = -uxq[1]; e[5] = -uxq[2];
  } else {
    e[0] = e[1] = e[2] = 0.0;
    e[3] = u[0]; e[4] = u[1]; e[5] = u[2];
  }
}

/* The lines of joint i's axis errors through both prefixes (see
 * em->line): an axis error along u of joint i, at the reference point q_i,
 * is the basis twist (u, -u x q_i) for a tilt and (0, u) for a shift; a
 * prefix P = (R, p) carries them to (R u, (P q_i) x (R u)) and (0, R u),
 * since R (u x q) = (R u) x (R q). */
static void axis_lines(twf_errmodel *em, const twf_model *m, size_t i)
{
  int side;
  for (side = 0; side < 2; side++) {
    const twf_pose *P = &em->prefix[i + (size_t)side];
    double *l = em->line[i][side];
    twf_pose_rotate(P, em->u1[i], l);
    twf_pose_rotate(P, em->u2[i], l + 3);
    twf_pose_apply(P, m->joints[i].point, l + 6);
  }
  em->line_ready[i] = 1;
}

/* The twist of an axis parameter: Ad_{B P_(i-1)} e - Ad_{B P_i} e for its
 * basis twist e (see axis_lines). */
static void axis_param_twist(twf_errmodel *em, const twf_model *m, const twf_param *p, double t[6])
{
  size_t i = (size_t)p->joint, k = (size_t)(3 * p->component);
  const double *a, *b;
  if (!em->line_ready[i])
    axis_lines(em, m, i);
  a = em->line[i][0];
  b = em->line[i][1];
  if (p->group == TWF_GROUP_TILTS) {
    double xa[3], xb[3];
    twf_v3_cross(a + 6, a + k, xa);
    twf_v3_cross(b + 6, b + k, xb);
    t[0] = a[k] - b[k];
    t[1] = a[k + 1] - b[k + 1];
    t[2] = a[k + 2] - b[k + 2];
    t[3] = xa[0] - xb[0];
    t[4] = xa[1] - xb[1];
    t[5] = xa[2] - xb[2];
  } else {
    t[0] = t[1] = t[2] = 0.0;
    t[3] = a[k] - b[k];
    t[4] = a[k + 1] - b[k + 1];
    t[5] = a[k + 2] - b[k + 2];
  }
}

/* twf_se3_adjoint_apply, inline: the same operations in the same order
 * (so the same bits) without a call through the library's symbol table
 * for each of the pose's seventy-odd twists. */
static inline void ad_apply(const twf_pose *T, const double S[6], double out[6])
{
  const double (*R)[3] = T->R;
  double rw0 = R[0][0] * S[0] + R[0][1] * S[1] + R[0][2] * S[2];
  double rw1 = R[1][0] * S[0] + R[1][1] * S[1] + R[1][2] * S[2];
  double rw2 = R[2][0] * S[0] + R[2][1] * S[1] + R[2][2] * S[2];
  double rv0 = R[0][0] * S[3] + R[0][1] * S[4] + R[0][2] * S[5];
  double rv1 = R[1][0] * S[3] + R[1][1] * S[4] + R[1][2] * S[5];
  double rv2 = R[2][0] * S[3] + R[2][1] * S[4] + R[2][2] * S[5];
  const double *p = T->p;
  double px = p[1] * rw2 - p[2] * rw1;
  double py = p[2] * rw0 - p[0] * rw2;
  double pz = p[0] * rw1 - p[1] * rw0;
  out[0] = rw0;
  out[1] = rw1;
  out[2] = rw2;
  out[3] = px + rv0;
  out[4] = py + rv1;
  out[5] = pz + rv2;
}

void twf_errmodel_set_payload(twf_errmodel *em, long payload)
{
  em->payload = payload;
}

void twf_errmodel_eval_pose_some(twf_errmodel *em, const twf_model *m, const twf_pose *base_in_tracker,
                                 size_t station, const double *q, const unsigned char *need)
{
  size_t i, j, n = m->n_joints;
  em->station = station;
  int loaded = em->comp_group || twf_model_has_compliance(m);
  em->prefix[0] = *base_in_tracker;
  if (loaded)
    twf_model_theta(m, q, em->payload, em->theta, em->tau);
  for (i = 0; i < n; i++) {
    const twf_joint *jt = &m->joints[i];
    twf_pose E;
    twf_se3_exp_joint(jt->twist, loaded ? em->theta[i] : jt->scale * q[i] + jt->offset, &E);
    twf_pose_mul(&em->prefix[i], &E, &em->prefix[i + 1]);
  }
  twf_pose_mul(&em->prefix[n], &m->home, &em->flange);
  em->q = q;
  memset(em->line_ready, 0, n);

  for (j = 0; j < em->n_params; j++) {
    const twf_param *p = &em->params[j];
    double *t = em->twists + 6 * j;
    double e[6] = { 0, 0, 0, 0, 0, 0 };
    int c;
    if (need != NULL && !need[j])
      continue;
    switch (p->group) {
    case TWF_GROUP_BASE:
      if ((size_t)p->station != em->station) {
        for (c = 0; c < 6; c++)
          t[c] = 0.0;
        break;
      }
      e[p->component] = 1.0;
      ad_apply(base_in_tracker, e, t);
      break;
    case TWF_GROUP_HOME:
      e[p->component] = 1.0;
      ad_apply(&em->flange, e, t);
      break;
    case TWF_GROUP_OFFSETS:
      ad_apply(&em->prefix[p->joint], m->joints[p->joint].twist, t);
      break;
    case TWF_GROUP_SCALE:
      ad_apply(&em->prefix[p->joint], m->joints[p->joint].twist, t);
      for (c = 0; c < 6; c++)
        t[c] *= q[p->joint];
      break;
    case TWF_GROUP_COMPLIANCE:
      /* theta_i += C_i tau_i: the offset's column times the torque (the
       * torque's own change with the geometry is left out: DEVELOPERS.md) */
      ad_apply(&em->prefix[p->joint], m->joints[p->joint].twist, t);
      for (c = 0; c < 6; c++)
        t[c] *= em->tau[p->joint];
      break;
    case TWF_GROUP_SHIFTS:
    case TWF_GROUP_TILTS:
      /* Ad_{B P_(i-1)} (I - Ad_{exp(S_i theta_i)}) e = Ad_{B P_(i-1)} e - Ad_{B P_i} e */
      axis_param_twist(em, m, p, t);
      break;
    case TWF_GROUP_TARGETS:
    case TWF_GROUP_COUNT:
      break; /* targets move the point only: handled in twf_errmodel_point */
    }
  }
}

void twf_errmodel_eval_flange(twf_errmodel *em, const twf_pose *base_in_tracker, size_t station,
                              const twf_pose *flange_in_base, const unsigned char *need)
{
  size_t j;
  em->station = station;
  twf_pose_mul(base_in_tracker, flange_in_base, &em->flange);
  em->q = NULL;
  for (j = 0; j < em->n_params; j++) {
    const twf_param *p = &em->params[j];
    double *t = em->twists + 6 * j;
    double e[6] = { 0, 0, 0, 0, 0, 0 };
    int c;
    if ((need != NULL && !need[j]) || p->group != TWF_GROUP_BASE)
      continue;
    if ((size_t)p->station != em->station) {
      for (c = 0; c < 6; c++)
        t[c] = 0.0;
      continue;
    }
    e[p->component] = 1.0;
    ad_apply(base_in_tracker, e, t);
  }
}

void twf_errmodel_eval_station(twf_errmodel *em, const twf_model *m, const twf_pose *station_base,
                               size_t station, const double *q, twf_pose *flange_in_tracker)
{
  twf_errmodel_eval_pose_some(em, m, station_base, station, q, NULL);
  if (flange_in_tracker != NULL)
    *flange_in_tracker = em->flange;
}

void twf_errmodel_eval_pose(twf_errmodel *em, const twf_model *m,
                            const twf_pose *base_in_tracker, const double *q,
                            twf_pose *flange_in_tracker)
{
  twf_errmodel_eval_pose_some(em, m, base_in_tracker, 0, q, NULL);
  if (flange_in_tracker != NULL)
    *flange_in_tracker = em->flange;
}

void twf_errmodel_point(const twf_errmodel *em, const twf_model *m,
                        size_t target, double y[3], double *rows)
{
  size_t j, p = em->n_params;
  twf_pose_apply(&em->flange, m->targets[target].offset, y);
  if (rows == NULL)
    return;
  for (j = 0; j < p; j++) {
    const twf_param *par = &em->params[j];
    if (par->group == TWF_GROUP_TARGETS) {
      int r;
      for (r = 0; r < 3; r++)
        rows[(size_t)r * p + j] = par->target == (long)target ? em->flange.R[r][par->component] : 0.0;
    } else {
      /* a spatial twist (w, v) moves the point y by w x y + v */
      const double *t = em->twists + 6 * j;
      double wxy[3];
      twf_v3_cross(t, y, wxy);
      rows[0 * p + j] = wxy[0] + t[3];
      rows[1 * p + j] = wxy[1] + t[4];
      rows[2 * p + j] = wxy[2] + t[5];
    }
  }
}

const double *twf_errmodel_twists(const twf_errmodel *em) { return em->twists; }
const twf_pose *twf_errmodel_flange(const twf_errmodel *em) { return &em->flange; }

void twf_errmodel_orientation_jinv(const twf_errmodel *em, const double R_meas[3][3], double r[3],
                                   double Jinv[3][3])
{
  double E[3][3], H[3][3], H2[3][3], theta, coef;
  int a, b, k;
  for (a = 0; a < 3; a++)
    for (b = 0; b < 3; b++) {
      E[a][b] = 0.0;
      for (k = 0; k < 3; k++)
        E[a][b] += R_meas[a][k] * em->flange.R[b][k];
    }
  twf_so3_log(E, r);
  if (Jinv == NULL)
    return;
  /* r(a) = log(E exp(-hat a)) ~ r - Jr^-1(r) a, with the inverse right
   * Jacobian Jr^-1(phi) = I + hat(phi)/2 + (1/t^2 - (1 + cos t)/(2 t sin t)) hat(phi)^2. */
  theta = twf_v3_norm(r);
  coef = theta < 1e-4 ? 1.0 / 12.0 + theta * theta / 720.0
                      : 1.0 / (theta * theta) - (1.0 + cos(theta)) / (2.0 * theta * sin(theta));
  twf_so3_hat(r, H);
  for (a = 0; a < 3; a++)
    for (b = 0; b < 3; b++) {
      H2[a][b] = 0.0;
      for (k = 0; k < 3; k++)
        H2[a][b] += H[a][k] * H[k][b];
    }
  for (a = 0; a < 3; a++)
    for (b = 0; b < 3; b++)
      Jinv[a][b] = (a == b ? 1.0 : 0.0) + 0.5 * H[a][b] + coef * H2[a][b];
}

void twf_errmodel_orientation(const twf_errmodel *em, const double R_meas[3][3],
                              double r[3], double *rows)
{
  double Jinv[3][3];
  size_t j, p = em->n_params;
  int a;
  twf_errmodel_orientation_jinv(em, R_meas, r, rows ? Jinv : NULL);
  if (rows == NULL)
    return;
  for (j = 0; j < p; j++) {
    const double *t = em->twists + 6 * j;
    if (em->params[j].group == TWF_GROUP_TARGETS) {
      rows[j] = rows[p + j] = rows[2 * p + j] = 0.0;
      continue;
    }
    for (a = 0; a < 3; a++)
      rows[(size_t)a * p + j] = Jinv[a][0] * t[0] + Jinv[a][1] * t[1] + Jinv[a][2] * t[2];
  }
}

void twf_errmodel_fold(twf_errmodel *em, const double *delta, twf_model *m,
                       twf_pose *base_in_tracker)
{
  double base_step[TWF_STATIONS_MAX][6], home_step[6] = { 0 };
  double *axis_step = em->axis_step;
  size_t j, i;
  int c, any_base[TWF_STATIONS_MAX], any_home = 0;

  memset(base_step, 0, sizeof base_step);
  memset(any_base, 0, sizeof any_base);

  for (j = 0; j < em->n_params; j++) {
    const twf_param *p = &em->params[j];
    double d = delta[j], e[6];
    switch (p->group) {
    case TWF_GROUP_BASE:
      base_step[p->station][p->component] += d;
      any_base[p->station] = 1;
      break;
    case TWF_GROUP_HOME: home_step[p->component] += d; any_home = 1; break;
    case TWF_GROUP_TARGETS:
      m->targets[p->target].offset[p->component] += d;
      m->targets[p->target].offset_known = 1;
      break;
    case TWF_GROUP_OFFSETS: m->joints[p->joint].offset += d; break;
    case TWF_GROUP_SCALE: m->joints[p->joint].scale += d; break;
    case TWF_GROUP_COMPLIANCE: m->joints[p->joint].compliance += d; break;
    case TWF_GROUP_SHIFTS:
    case TWF_GROUP_TILTS:
      axis_basis_twist(em, m, p, e);
      for (c = 0; c < 6; c++)
        axis_step[6 * p->joint + c] += d * e[c];
      break;
    case TWF_GROUP_COUNT: break;
    }
  }
  for (i = 0; i < em->n_stations; i++)
    if (any_base[i]) {
      twf_pose E;
      twf_se3_exp(base_step[i], 1.0, &E);
      twf_pose_mul(&base_in_tracker[i], &E, &base_in_tracker[i]);
    }
  if (any_home) {
    twf_pose E;
    twf_se3_exp(home_step, 1.0, &E);
    twf_pose_mul(&m->home, &E, &m->home);
  }
  for (i = 0; i < m->n_joints; i++) {
    twf_joint *jt = &m->joints[i];
    const double *e = axis_step + 6 * i;
    twf_pose E;
    if (e[0] == 0 && e[1] == 0 && e[2] == 0 && e[3] == 0 && e[4] == 0 && e[5] == 0)
      continue;
    /* S <- Ad_{exp(e)} S moves the line rigidly; the reference point rides along */
    twf_se3_exp(e, 1.0, &E);
    twf_se3_adjoint_apply(&E, jt->twist, jt->twist);
    twf_pose_apply(&E, jt->point, jt->point);
    /* keep the axis exactly unit against rounding drift over many folds */
    {
      double *d = jt->type == TWF_JOINT_REVOLUTE ? jt->twist : jt->twist + 3;
      double n = twf_v3_norm(d);
      for (c = 0; c < 3; c++)
        d[c] /= n;
      if (jt->type == TWF_JOINT_REVOLUTE) {
        double w[3] = { d[0], d[1], d[2] };
        twf_twist_revolute(w, jt->point, jt->twist);
      }
    }
  }
  memset(axis_step, 0, 6 * m->n_joints * sizeof *axis_step);
  twf_errmodel_update(em, m);
}
