/* dh.c: Denavit-Hartenberg tables to product-of-exponentials joints.
 *
 * Every joint turns (or slides) about the z-axis of one DH frame F taken at
 * q = 0: frame i-1 for standard DH (A_i = Rz(q) A_i(0)), frame i for
 * modified DH (A_i = Rx Tx Rz(q) Rz(theta) Tz(d), and frame i has the same
 * z-axis and a point of it as origin). Writing every A_i(q) that way and
 * moving the joint motions to the front gives the PoE form with
 *   S_i = Ad_F (0, 0, 1, 0, 0, 0)  (revolute: axis z_F through origin of F)
 *   S_i = (0, z_F)                 (prismatic),
 * and the home pose M = A_1(0) ... A_n(0) * flange_in_last
 * (Lynch and Park 2017, appendix C).
 *
 * Hayati's beta (Hayati 1983; Veitschegger and Wu 1986) is one more
 * elementary rotation Ry(beta) at the end of the link motion
 * Tx(a) Rx(alpha): after Rx(alpha) in standard DH (frame i then has the
 * next joint's axis as z, so the argument above is unchanged), before
 * Rz(theta) in modified DH (the joint frame is the one after it). An exact
 * zero beta adds an exact identity, so beta = 0 reproduces the plain
 * tables bit for bit. */
#include "internal.h"

/* The DH elementary motions, composed onto T from the right. */
static void post_rz(twf_pose *T, double angle)
{
  double w[3] = { 0.0, 0.0, 1.0 };
  twf_pose E;
  twf_so3_exp(w, angle, E.R);
  E.p[0] = E.p[1] = E.p[2] = 0.0;
  twf_pose_mul(T, &E, T);
}

static void post_rx(twf_pose *T, double angle)
{
  double w[3] = { 1.0, 0.0, 0.0 };
  twf_pose E;
  twf_so3_exp(w, angle, E.R);
  E.p[0] = E.p[1] = E.p[2] = 0.0;
  twf_pose_mul(T, &E, T);
}

static void post_ry(twf_pose *T, double angle)
{
  double w[3] = { 0.0, 1.0, 0.0 };
  twf_pose E;
  if (angle == 0.0)
    return; /* keeps plain DH tables bit for bit */
  twf_so3_exp(w, angle, E.R);
  E.p[0] = E.p[1] = E.p[2] = 0.0;
  twf_pose_mul(T, &E, T);
}

static void post_translate(twf_pose *T, int axis, double dist)
{
  /* T * Trans(dist e_axis): p += dist * column axis of R. */
  for (int i = 0; i < 3; i++)
    T->p[i] += dist * T->R[i][axis];
}

static int pose_is_finite(const twf_pose *T)
{
  for (int i = 0; i < 3; i++) {
    if (!isfinite(T->p[i]))
      return 0;
    for (int j = 0; j < 3; j++)
      if (!isfinite(T->R[i][j]))
        return 0;
  }
  return 1;
}

/* Joint i's axis is the z-axis of F; its reference point F's origin. */
static void joint_from_frame(twf_joint *j, twf_joint_type type, const twf_pose *F)
{
  double z[3] = { F->R[0][2], F->R[1][2], F->R[2][2] };
  j->type = type;
  if (type == TWF_JOINT_REVOLUTE)
    twf_twist_revolute(z, F->p, j->twist);
  else
    twf_twist_prismatic(z, j->twist);
  twf_v3_copy(F->p, j->point);
  j->scale = 1.0;
  j->offset = 0.0;
}

static twf_status check_pose(const twf_pose *P, const char *what,
                             const char *rot_what, twf_error *err)
{
  double det;
  if (!pose_is_finite(P))
    return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0, NULL,
                         "the %s has a non-finite value", what);
  /* Not a rotation: the home pose would not be one either. 1e-9 leaves
   * room for a rotation written with 10 digits. */
  if (twf_rot_orthonormality_error(P->R, &det) > 1e-9 || det < 0.0)
    return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0,
                         "give an orthonormal rotation with determinant +1",
                         "the %s is not a rotation", rot_what);
  return TWF_OK;
}

static twf_status set_from_dh(twf_model *m, const twf_dh_row *rows, size_t n,
                              twf_dh_convention conv, int use_beta,
                              const twf_pose *base_to_first,
                              const twf_pose *flange_in_last, twf_error *err)
{
  twf_pose T;

  if (m == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "no model given for the DH table");
  if (n > 0 && rows == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "no DH rows given for %zu joints", n);
  if (m->n_joints != n)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0,
                         "allocate the model with one joint per DH row",
                         "DH table has %zu rows but the model has %zu joints",
                         n, m->n_joints);
  if (conv != TWF_DH_STANDARD && conv != TWF_DH_MODIFIED)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "unknown DH convention %d", (int)conv);

  /* Validate everything before touching m, so that a failure leaves it as
   * it was. */
  for (size_t i = 0; i < n; i++) {
    const twf_dh_row *r = &rows[i];
    if (!isfinite(r->a) || !isfinite(r->alpha) || !isfinite(r->d) ||
        !isfinite(r->theta) || (use_beta && !isfinite(r->beta)))
      return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0,
                           "every DH parameter must be a finite number",
                           "DH row %zu (joint %zu) has a non-finite value",
                           i + 1, i + 1);
    if (r->type != TWF_JOINT_REVOLUTE && r->type != TWF_JOINT_PRISMATIC)
      return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0,
                           "a joint is revolute or prismatic",
                           "DH row %zu has unknown joint type %d", i + 1,
                           (int)r->type);
  }
  if (use_beta) {
    /* Hayati's beta stands for a tilt of nearly parallel axes: beyond a
     * quarter turn the row would describe a different link. */
    for (size_t i = 0; i < n; i++)
      if (!(fabs(rows[i].beta) < 0.5 * TWF_PI))
        return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0,
                             "beta lies strictly between -90 and 90 degrees",
                             "DH row %zu (joint %zu) has beta %g rad", i + 1,
                             i + 1, rows[i].beta);
  }
  if (flange_in_last != NULL) {
    twf_status st = check_pose(flange_in_last, "flange pose in the last DH frame",
                                "flange rotation in the last DH frame", err);
    if (st != TWF_OK)
      return st;
  }
  if (base_to_first != NULL) {
    twf_status st = check_pose(base_to_first, "pose of DH frame 0 in the base frame",
                                "rotation of DH frame 0 in the base frame", err);
    if (st != TWF_OK)
      return st;
  }

  if (base_to_first != NULL)
    T = *base_to_first;
  else
    twf_pose_identity(&T);
  for (size_t i = 0; i < n; i++) {
    const twf_dh_row *r = &rows[i];
    if (conv == TWF_DH_STANDARD) {
      /* Joint i moves about z of the frame before its own transform. */
      joint_from_frame(&m->joints[i], r->type, &T);
      post_rz(&T, r->theta);
      post_translate(&T, 2, r->d);
      post_translate(&T, 0, r->a);
      post_rx(&T, r->alpha);
      if (use_beta)
        post_ry(&T, r->beta);
    } else {
      post_rx(&T, r->alpha);
      post_translate(&T, 0, r->a);
      if (use_beta)
        post_ry(&T, r->beta);
      post_rz(&T, r->theta);
      post_translate(&T, 2, r->d);
      /* Frame i at q = 0: its z-axis is the joint's, its origin on it. */
      joint_from_frame(&m->joints[i], r->type, &T);
    }
  }
  if (flange_in_last != NULL)
    twf_pose_mul(&T, flange_in_last, &T);
  m->home = T;
  return TWF_OK;
}

twf_status twf_model_set_from_dh(twf_model *m, const twf_dh_row *rows,
                                 size_t n, twf_dh_convention conv,
                                 const twf_pose *flange_in_last,
                                 twf_error *err)
{
  /* beta is not read: callers written before it existed leave it unset. */
  return set_from_dh(m, rows, n, conv, 0, NULL, flange_in_last, err);
}

twf_status twf_model_set_from_dh_beta(twf_model *m, const twf_dh_row *rows,
                                      size_t n, twf_dh_convention conv,
                                      const twf_pose *base_to_first,
                                      const twf_pose *flange_in_last,
                                      twf_error *err)
{
  return set_from_dh(m, rows, n, conv, 1, base_to_first, flange_in_last, err);
}
