/* compliance.c: what a calibration found of the joints' compliance under
 * gravity (twistfit/compliance.h): per joint the compliance, its
 * stiffness, the torque range and the deflection at the pose where it is
 * largest, and the campaign's worst configuration. One pass over the
 * poses, memory of one pose. */
#include "internal.h"

#include <stdlib.h>

void twf_compliance_summary_clear(twf_compliance_summary *s)
{
  if (s == NULL)
    return;
  free(s->joints);
  memset(s, 0, sizeof *s);
}

/* The farthest target (the flange without targets) at flange pose F. */
static double tool_shift(const twf_model *m, const twf_pose *Fa, const twf_pose *Fb)
{
  double worst = 0.0, a[3], b[3], d[3];
  size_t k;
  if (m->n_targets == 0) {
    for (int c = 0; c < 3; c++)
      d[c] = Fa->p[c] - Fb->p[c];
    return twf_v3_norm(d);
  }
  for (k = 0; k < m->n_targets; k++) {
    twf_pose_apply(Fa, m->targets[k].offset, a);
    twf_pose_apply(Fb, m->targets[k].offset, b);
    for (int c = 0; c < 3; c++)
      d[c] = a[c] - b[c];
    worst = fmax(worst, twf_v3_norm(d));
  }
  return worst;
}

/* Forward kinematics at joint values theta (SI, as the exponentials use). */
static void fk_at(const twf_model *m, const double *theta, twf_pose *F)
{
  twf_pose E;
  twf_pose_identity(F);
  for (size_t i = 0; i < m->n_joints; i++) {
    twf_se3_exp(m->joints[i].twist, theta[i], &E);
    twf_pose_mul(F, &E, F);
  }
  twf_pose_mul(F, &m->home, F);
}

twf_status twf_compliance_summarize(const twf_model *m, const twf_campaign *c,
                                    const unsigned char *use, const int *fixed,
                                    const double *std, const unsigned char *weak,
                                    twf_compliance_summary *out, twf_error *err)
{
  size_t n, k, i, n_used = 0;
  double *tau = NULL, *theta = NULL, *rigid = NULL;
  unsigned char *seen = NULL; /* none and each payload: carried at a fit pose */
  size_t n_loads = 0;
  if (out == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "no summary given");
  memset(out, 0, sizeof *out);
  if (m == NULL || c == NULL || fixed == NULL || std == NULL || c->n_joints != m->n_joints)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "model, campaign, fixed flags and standard deviations are required");
  n = m->n_joints;
  out->joints = calloc(n ? n : 1, sizeof *out->joints);
  tau = malloc((n ? n : 1) * sizeof *tau);
  theta = malloc((n ? n : 1) * sizeof *theta);
  rigid = malloc((n ? n : 1) * sizeof *rigid);
  seen = calloc(m->n_payloads + 1, 1);
  if (out->joints == NULL || tau == NULL || theta == NULL || rigid == NULL || seen == NULL) {
    free(tau); free(theta); free(rigid); free(seen);
    twf_compliance_summary_clear(out);
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
  }
  out->n_joints = n;
  for (i = 0; i < n; i++) {
    twf_compliance_joint *cj = &out->joints[i];
    cj->torque_min = INFINITY;
    cj->torque_max = -INFINITY;
    cj->compliance = m->joints[i].compliance;
  }
  for (k = 0; k < c->n_poses; k++) {
    const double *q = c->q + k * n;
    long pl = twf_campaign_payload(c, k);
    twf_pose Fl, Fr, Fj;
    double all;
    if (use != NULL && !use[k])
      continue;
    n_used++;
    /* distinct loads: none and each payload */
    if (pl >= -1 && pl < (long)m->n_payloads && !seen[pl + 1]) {
      seen[pl + 1] = 1;
      n_loads++;
    }
    twf_model_theta(m, q, pl, theta, tau);
    for (i = 0; i < n; i++)
      rigid[i] = m->joints[i].scale * q[i] + m->joints[i].offset;
    fk_at(m, theta, &Fl);
    fk_at(m, rigid, &Fr);
    all = tool_shift(m, &Fl, &Fr);
    if (all > out->worst_tool_m || n_used == 1) {
      out->worst_tool_m = all;
      out->worst_pose = k;
    }
    for (i = 0; i < n; i++) {
      twf_compliance_joint *cj = &out->joints[i];
      double d = m->joints[i].compliance * tau[i];
      cj->torque_min = fmin(cj->torque_min, tau[i]);
      cj->torque_max = fmax(cj->torque_max, tau[i]);
      if (fabs(d) > fabs(cj->deflection) || n_used == 1) {
        double keep = rigid[i];
        rigid[i] += d;
        fk_at(m, rigid, &Fj);
        rigid[i] = keep;
        cj->deflection = d;
        cj->worst_pose = k;
        cj->tool_m = tool_shift(m, &Fj, &Fr);
      }
    }
  }
  out->n_payloads_used = n_loads;
  for (i = 0; i < n; i++) {
    twf_compliance_joint *cj = &out->joints[i];
    double big = fmax(fabs(cj->torque_min), fabs(cj->torque_max));
    double spread = cj->torque_max - cj->torque_min;
    if (n_used == 0)
      cj->torque_min = cj->torque_max = NAN;
    cj->weak = weak != NULL && weak[i];
    cj->std = NAN;
    if (m->joints[i].type != TWF_JOINT_REVOLUTE || fixed[i] < 0)
      cj->state = TWF_COMPLIANCE_NOT_REVOLUTE;
    else if (fixed[i] == 0)
      cj->state = TWF_COMPLIANCE_ESTIMATED;
    else if (fixed[i] == 1 || big <= 1e-9)
      cj->state = TWF_COMPLIANCE_NO_TORQUE;
    else if (spread <= 1e-6 * big)
      cj->state = TWF_COMPLIANCE_CONSTANT_TORQUE;
    else
      cj->state = TWF_COMPLIANCE_REDUNDANT;
    if (cj->state == TWF_COMPLIANCE_ESTIMATED)
      cj->std = std[i];
    cj->stiffness = cj->compliance > 0.0 ? 1.0 / cj->compliance : INFINITY;
    cj->stiffness_std = cj->compliance > 0.0 && isfinite(cj->std)
                            ? cj->std / (cj->compliance * cj->compliance) : NAN;
  }
  free(tau);
  free(theta);
  free(rigid);
  free(seen);
  return TWF_OK;
}
