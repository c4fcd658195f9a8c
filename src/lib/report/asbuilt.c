/* asbuilt.c: report the as-built geometry in a base frame fixed by a
 * stated datum rule, not by the calibration's choice of redundant
 * parameters (DEVELOPERS.md, "The maths").
 *
 * Everything here works on the joint lines at logged zero (q = 0, so
 * theta = offset): those, not the stored twists and offsets, are what the
 * data determine whichever redundant parameters were fixed. */
#include "internal.h"

#include <stdlib.h>

/* Relative size of the part of a feature perpendicular to a joint line
 * below which it cannot show a rotation about that line. */
#define FEATURE_MIN 1e-2

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

/* The part of v perpendicular to the unit vector d. */
static void perpendicular(const double d[3], const double v[3], double out[3])
{
  double t = twf_v3_dot(d, v);
  int a;
  for (a = 0; a < 3; a++)
    out[a] = v[a] - t * d[a];
}

/* Directions and points of the joint lines at logged zero (n x 3 each). */
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
    /* the mass model is in the base frame too (payloads ride on the
     * flange, whose frame the datum does not change) */
    if (m->joints[i].has_mass)
      twf_pose_apply(G, m->joints[i].mass_center, m->joints[i].mass_center);
  }
  if (twf_model_has_masses(m)) /* else gravity plays no part: keep the default */
    twf_pose_rotate(G, m->gravity, m->gravity);
  twf_pose_mul(G, &m->home, &m->home);
  twf_pose_inv(G, &Ginv);
  twf_pose_mul(B, &Ginv, B);
}

/* 1 when every revolute line of m is parallel to the first: the lines then
 * leave the translation along that direction free. */
static int revolute_lines_parallel(const twf_model *m, const double *dirs)
{
  const double *first = NULL;
  size_t i;
  for (i = 0; i < m->n_joints; i++) {
    double c[3];
    if (m->joints[i].type != TWF_JOINT_REVOLUTE)
      continue;
    if (first == NULL) {
      first = dirs + 3 * i;
      continue;
    }
    twf_v3_cross(first, dirs + 3 * i, c);
    if (twf_v3_norm(c) > 1e-6)
      return 0;
  }
  return 1;
}

/* The signed rotation about as-built revolute line i that carries a
 * downstream feature of the nominal arm onto the as-built one, both at
 * logged zero in the datum frame: the order-independent counterpart of the
 * joint offset. The feature is chosen on the nominal model: the first later
 * direction with a part perpendicular to line i of at least FEATURE_MIN,
 * else the first later revolute line point at least FEATURE_MIN of the
 * reach off line i, else (full-pose data only) a flange axis. NaN when
 * none exists, as for the last joint measured with points only: its
 * rotation is absorbed by the target offsets. */
static double offset_deviation(const twf_model *nm, size_t i,
                               const double *nd, const double *nq, const double *ad,
                               const double *aq, const twf_pose *Fn, const twf_pose *Fa,
                               int full_pose)
{
  const double *dn = nd + 3 * i, *da = ad + 3 * i;
  double fn[3], fa[3], vn[3], cr[3], reach = twf_model_reach(nm);
  size_t j;
  int found = 0, a;
  for (j = i + 1; j < nm->n_joints && !found; j++) {
    perpendicular(dn, nd + 3 * j, fn);
    if (twf_v3_norm(fn) > FEATURE_MIN) {
      perpendicular(da, ad + 3 * j, fa);
      found = 1;
    }
  }
  for (j = i + 1; j < nm->n_joints && !found; j++) {
    /* as-built points: those of the lines nearest the nominal reference
     * points, so that where a fold left the stored point does not matter */
    double v[3], w[3], pi[3], pj[3];
    if (nm->joints[j].type != TWF_JOINT_REVOLUTE)
      continue;
    closest_on_line(aq + 3 * i, da, nq + 3 * i, pi);
    closest_on_line(aq + 3 * j, ad + 3 * j, nq + 3 * j, pj);
    for (a = 0; a < 3; a++) {
      v[a] = nq[3 * j + (size_t)a] - nq[3 * i + (size_t)a];
      w[a] = pj[a] - pi[a];
    }
    perpendicular(dn, v, fn);
    if (twf_v3_norm(fn) > FEATURE_MIN * reach) {
      perpendicular(da, w, fa);
      found = 1;
    }
  }
  for (j = 0; j < 3 && full_pose && !found; j++) {
    double v[3] = { Fn->R[0][j], Fn->R[1][j], Fn->R[2][j] };
    double w[3] = { Fa->R[0][j], Fa->R[1][j], Fa->R[2][j] };
    perpendicular(dn, v, fn);
    if (twf_v3_norm(fn) > FEATURE_MIN) {
      perpendicular(da, w, fa);
      found = 1;
    }
  }
  if (!found)
    return NAN;
  /* the nominal feature seen perpendicular to the as-built line */
  perpendicular(da, fn, vn);
  twf_v3_cross(vn, fa, cr);
  return atan2(twf_v3_dot(da, cr), twf_v3_dot(vn, fa));
}

static twf_status compare(const twf_model *nominal, twf_model *asbuilt,
                          twf_pose *base_in_tracker, int full_pose, int align,
                          twf_asbuilt_comparison *out, twf_error *err)
{
  size_t n = nominal->n_joints, nt = nominal->n_targets, i, np = 0, k;
  double *a = NULL, *b = NULL, L = 0.25 * twf_model_reach(nominal);
  double *nd = NULL, *nq = NULL, *ad = NULL, *aq = NULL, *zero = NULL;
  twf_pose G, Fa, Fn;
  int round, pin_with_targets;
  twf_status st = TWF_OK;

  memset(out, 0, sizeof *out);
  if (asbuilt->n_joints != n || asbuilt->n_targets != nt)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "the as-built and nominal models differ in shape");
  a = calloc(6 * n + 3 * nt + 3, sizeof *a);
  b = calloc(6 * n + 3 * nt + 3, sizeof *b);
  zero = calloc(n ? n : 1, sizeof *zero);
  out->joints = calloc(n ? n : 1, sizeof *out->joints);
  out->target_change_m = calloc(3 * (nt ? nt : 1), sizeof(double));
  nd = calloc(3 * (n ? n : 1), sizeof *nd);
  nq = calloc(3 * (n ? n : 1), sizeof *nq);
  ad = calloc(3 * (n ? n : 1), sizeof *ad);
  aq = calloc(3 * (n ? n : 1), sizeof *aq);
  if (!a || !b || !zero || !out->joints || !out->target_change_m || !nd || !nq || !ad || !aq) {
    st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    goto done;
  }
  out->n_joints = n;
  out->n_targets = nt;
  out->settled = 1;
  twf_pose_identity(&out->datum);
  lines_at_logged_zero(nominal, nd, nq);
  twf_model_fk_rigid(nominal, zero, NULL, &Fn);
  /* Parallel revolute lines (a four-axis arm) leave the translation along
   * their direction free: the targets at logged zero, which the data
   * determine too, pin it. Otherwise the lines alone fix the frame, so that
   * the datum says nothing about the target offsets. */
  pin_with_targets = revolute_lines_parallel(nominal, nd);

  /* The points slide along the lines as the frame moves, so the rule is a
   * fixed point: iterate until the correction is at rounding level (it
   * converges linearly: some tens to hundreds of 2n-point registrations). */
  for (round = 0; align && round < 2000; round++) {
    np = 0;
    lines_at_logged_zero(asbuilt, ad, aq);
    for (i = 0; i < n; i++) {
      const double *dn = nd + 3 * i, *da = ad + 3 * i;
      double qa[3];
      int c;
      if (nominal->joints[i].type != TWF_JOINT_REVOLUTE)
        continue;
      closest_on_line(aq + 3 * i, da, nq + 3 * i, qa);
      for (c = 0; c < 3; c++) {
        a[3 * np + (size_t)c] = qa[c];
        b[3 * np + (size_t)c] = nq[3 * i + (size_t)c];
        a[3 * (np + 1) + (size_t)c] = qa[c] + L * da[c];
        b[3 * (np + 1) + (size_t)c] = nq[3 * i + (size_t)c] + L * dn[c];
      }
      np += 2;
    }
    if (pin_with_targets) {
      twf_model_fk_rigid(asbuilt, zero, NULL, &Fa);
      for (k = 0; k < nt; k++)
        if (nominal->targets[k].offset_known && asbuilt->targets[k].offset_known) {
          twf_pose_apply(&Fa, asbuilt->targets[k].offset, a + 3 * np);
          twf_pose_apply(&Fn, nominal->targets[k].offset, b + 3 * np);
          np++;
        }
    }
    if (np < 3)
      break; /* too little to align: keep the model's own frame */
    st = twf_register_points(a, b, NULL, np, &G, err);
    if (st != TWF_OK)
      goto done;
    apply_datum(asbuilt, base_in_tracker, &G);
    twf_pose_mul(&G, &out->datum, &out->datum);
    {
      double xi[6];
      twf_se3_log(&G, xi);
      /* settled when the correction is at the rounding level of the
       * registration (some 1e-15 of the arm's size) */
      if (twf_v3_norm(xi) * L + twf_v3_norm(xi + 3) < 1e-13 * L)
        break;
    }
  }
  if (round == 2000)
    out->settled = 0;

  lines_at_logged_zero(asbuilt, ad, aq);
  twf_model_fk_rigid(asbuilt, zero, NULL, &Fa);
  {
    double sum = 0.0;
    size_t used = 0;
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
      /* a prismatic joint's offset slides the downstream arm along its own
       * line, which the downstream lines cannot show: not reported */
      dv->offset = jn->type == TWF_JOINT_REVOLUTE
                       ? offset_deviation(nominal, i, nd, nq, ad, aq, &Fn, &Fa, full_pose)
                       : NAN;
      dv->offset_raw = ja->offset - jn->offset;
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
    out->home_angle_rad = twf_rot_angle_between(Fa.R, Fn.R);
    for (c = 0; c < 3; c++)
      d[c] = Fa.p[c] - Fn.p[c];
    out->home_distance_m = twf_v3_norm(d);
  }
  for (k = 0; k < nt; k++) {
    double ya[3], yn[3];
    int c;
    twf_pose_apply(&Fa, asbuilt->targets[k].offset, ya);
    twf_pose_apply(&Fn, nominal->targets[k].offset, yn);
    for (c = 0; c < 3; c++)
      out->target_change_m[3 * k + (size_t)c] = nominal->targets[k].offset_known ? ya[c] - yn[c] : NAN;
  }
done:
  free(a);
  free(b);
  free(zero);
  free(nd);
  free(nq);
  free(ad);
  free(aq);
  if (st != TWF_OK)
    twf_asbuilt_comparison_clear(out);
  return st;
}

twf_status twf_asbuilt_align(const twf_model *nominal, twf_model *asbuilt,
                             twf_pose *base_in_tracker, int full_pose,
                             twf_asbuilt_comparison *out, twf_error *err)
{
  return compare(nominal, asbuilt, base_in_tracker, full_pose, 1, out, err);
}

twf_status twf_asbuilt_compare(const twf_model *nominal, const twf_model *asbuilt,
                               int full_pose, twf_asbuilt_comparison *out, twf_error *err)
{
  twf_pose B;
  twf_pose_identity(&B);
  /* without alignment neither the model nor the base pose is touched */
  return compare(nominal, (twf_model *)asbuilt, &B, full_pose, 0, out, err);
}
