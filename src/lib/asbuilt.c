/* asbuilt.c: report the as-built geometry in a base frame fixed by a
 * stated datum rule, not by the calibration's choice of redundant
 * parameters (calibration-model.md, "Reporting the as-built geometry"). */
#include "internal.h"

#include <stdlib.h>

void twf_asbuilt_comparison_clear(twf_asbuilt_comparison *c)
{
  if (c == NULL)
    return;
  free(c->joints);
  free(c->target_change_m);
  memset(c, 0, sizeof *c);
}

static const double *joint_dir(const twf_joint *j)
{
  return j->type == TWF_JOINT_REVOLUTE ? j->twist : j->twist + 3;
}

/* The point of the line (point q, unit direction d) closest to x. */
static void closest_on_line(const double q[3], const double d[3], const double x[3],
                            double out[3])
{
  double t = (x[0] - q[0]) * d[0] + (x[1] - q[1]) * d[1] + (x[2] - q[2]) * d[2];
  int a;
  for (a = 0; a < 3; a++)
    out[a] = q[a] + t * d[a];
}

/* The joint lines at logged zero (q = 0, so theta = offset): the prefix
 * of the offsets moves each line. These, not the stored twists, are what
 * the data determine. dirs/points: n x 3. */
static void lines_at_logged_zero(const twf_model *m, double *dirs, double *points)
{
  twf_pose P, E;
  size_t i;
  twf_pose_identity(&P);
  for (i = 0; i < m->n_joints; i++) {
    const twf_joint *j = &m->joints[i];
    twf_pose_rotate(&P, joint_dir(j), dirs + 3 * i);
    twf_pose_apply(&P, j->point, points + 3 * i);
    twf_se3_exp(j->twist, j->offset, &E);
    twf_pose_mul(&P, &E, &P);
  }
}

static void apply_datum(twf_model *m, twf_pose *B, const twf_pose *G)
{
  twf_pose Ginv;
  size_t i;
  for (i = 0; i < m->n_joints; i++) {
    twf_se3_adjoint_apply(G, m->joints[i].twist, m->joints[i].twist);
    twf_pose_apply(G, m->joints[i].point, m->joints[i].point);
  }
  twf_pose_mul(G, &m->home, &m->home);
  twf_pose_inv(G, &Ginv);
  twf_pose_mul(B, &Ginv, B);
}

twf_status twf_asbuilt_align(const twf_model *nominal, twf_model *asbuilt,
                             twf_pose *base_in_tracker,
                             twf_asbuilt_comparison *out, twf_error *err)
{
  size_t n = nominal->n_joints, i, np = 0, k;
  double *a = NULL, *b = NULL, L = 0.25 * twf_model_reach(nominal);
  double *nd = NULL, *nq = NULL, *ad = NULL, *aq = NULL;
  twf_pose G, flange_a, flange_n;
  int round;
  twf_status st = TWF_OK;

  memset(out, 0, sizeof *out);
  if (asbuilt->n_joints != n || asbuilt->n_targets != nominal->n_targets)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "the as-built and nominal models differ in shape");
  a = calloc(6 * (n ? n : 1), sizeof *a);
  b = calloc(6 * (n ? n : 1), sizeof *b);
  out->joints = calloc(n ? n : 1, sizeof *out->joints);
  out->target_change_m = calloc(3 * (nominal->n_targets ? nominal->n_targets : 1), sizeof(double));
  nd = calloc(3 * (n ? n : 1), sizeof *nd);
  nq = calloc(3 * (n ? n : 1), sizeof *nq);
  ad = calloc(3 * (n ? n : 1), sizeof *ad);
  aq = calloc(3 * (n ? n : 1), sizeof *aq);
  if (!a || !b || !out->joints || !out->target_change_m || !nd || !nq || !ad || !aq) {
    st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    goto done;
  }
  out->n_joints = n;
  out->n_targets = nominal->n_targets;
  twf_pose_identity(&out->datum);
  lines_at_logged_zero(nominal, nd, nq);
  /* The points slide along the lines as the frame moves, so the rule is a
   * fixed point: iterate until the correction is at rounding level (it
   * converges linearly; a few hundred rounds of a 2n-point registration). */
  for (round = 0; round < 2000; round++) {
    np = 0;
    lines_at_logged_zero(asbuilt, ad, aq);
    for (i = 0; i < n; i++) {
      const twf_joint *jn = &nominal->joints[i];
      const double *dn = nd + 3 * i, *da = ad + 3 * i;
      double qa[3];
      int c;
      if (jn->type != TWF_JOINT_REVOLUTE)
        continue;
      closest_on_line(aq + 3 * i, da, nq + 3 * i, qa);
      for (c = 0; c < 3; c++) {
        a[3 * np + c] = qa[c];
        b[3 * np + c] = nq[3 * i + c];
        a[3 * (np + 1) + c] = qa[c] + L * da[c];
        b[3 * (np + 1) + c] = nq[3 * i + c] + L * dn[c];
      }
      np += 2;
    }
    if (np < 3)
      break; /* fewer than two revolute lines: keep the model's own frame */
    st = twf_register_points(a, b, NULL, np, &G, err);
    if (st != TWF_OK)
      goto done;
    apply_datum(asbuilt, base_in_tracker, &G);
    twf_pose_mul(&G, &out->datum, &out->datum);
    {
      double xi[6];
      twf_se3_log(&G, xi);
      if (twf_v3_norm(xi) * L + twf_v3_norm(xi + 3) < 1e-15 * L)
        break;
    }
  }
  /* residual of the alignment */
  {
    double sum = 0.0;
    size_t used = 0;
    lines_at_logged_zero(asbuilt, ad, aq);
    for (i = 0; i < n; i++) {
      const twf_joint *jn = &nominal->joints[i], *ja = &asbuilt->joints[i];
      const double *dn = nd + 3 * i, *da = ad + 3 * i, *qn = nq + 3 * i;
      twf_joint_deviation *dv = &out->joints[i];
      double cr[3], qa[3], diff[3];
      int c;
      twf_v3_cross(da, dn, cr);
      dv->angle_rad = atan2(twf_v3_norm(cr), twf_v3_dot(da, dn));
      twf_v3_copy(da, dv->direction);
      closest_on_line(aq + 3 * i, da, qn, qa);
      twf_v3_copy(qa, dv->point);
      for (c = 0; c < 3; c++)
        diff[c] = qa[c] - qn[c];
      dv->distance_m = jn->type == TWF_JOINT_REVOLUTE ? twf_v3_norm(diff) : 0.0;
      dv->offset = ja->offset - jn->offset;
      dv->scale = ja->scale - jn->scale;
      if (jn->type == TWF_JOINT_REVOLUTE) {
        sum += dv->distance_m * dv->distance_m;
        for (c = 0; c < 3; c++)
          diff[c] = qa[c] + L * da[c] - qn[c] - L * dn[c];
        sum += twf_v3_dot(diff, diff);
        used += 2;
      }
    }
    out->datum_rms_m = used ? sqrt(sum / (double)used) : 0.0;
  }
  {
    double d[3];
    int c;
    /* the flange at logged zero, where the offsets have turned the chain */
    double *zero = calloc(n ? n : 1, sizeof *zero);
    twf_pose Fa, Fn;
    if (zero == NULL) {
      st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
      goto done;
    }
    twf_model_fk(asbuilt, zero, NULL, &Fa);
    twf_model_fk(nominal, zero, NULL, &Fn);
    free(zero);
    flange_a = Fa;
    flange_n = Fn;
    out->home_angle_rad = twf_rot_angle_between(Fa.R, Fn.R);
    for (c = 0; c < 3; c++)
      d[c] = Fa.p[c] - Fn.p[c];
    out->home_distance_m = twf_v3_norm(d);
  }
  for (k = 0; k < nominal->n_targets; k++) {
    double ya[3], yn[3];
    int c;
    twf_pose_apply(&flange_a, asbuilt->targets[k].offset, ya);
    twf_pose_apply(&flange_n, nominal->targets[k].offset, yn);
    for (c = 0; c < 3; c++)
      out->target_change_m[3 * k + c] = nominal->targets[k].offset_known ? ya[c] - yn[c] : NAN;
  }
done:
  free(a);
  free(b);
  free(nd);
  free(nq);
  free(ad);
  free(aq);
  if (st != TWF_OK)
    twf_asbuilt_comparison_clear(out);
  return st;
}
