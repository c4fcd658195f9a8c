/* campaign_limits.c: joint values of a campaign against the model's
 * limits, and the unit slips (radians read as degrees, metres read as
 * millimetres) that put them outside. */
#include "campaign_internal.h"

/* Limits spanning more than this (30 degrees) make values that all stay
 * within +-6.3 (one turn in radians) suspicious when read as degrees. */
#define WIDE_ANGLE (30.0 * TWF_PI / 180.0)
#define ONE_TURN_RAD 6.3
#define WIDE_STROKE 0.030

static int within(const twf_joint *jt, double v, double tol)
{
  return v >= jt->limit_lo - tol && v <= jt->limit_hi + tol;
}

/* Joint j's SI value si in the units of the joints-bearing file. */
static double file_value(const creader *r, size_t j, double si)
{
  return twf_creader_joint_from_si(&r->m->joints[j], si, r->j_lu, r->j_au);
}

/* When values outside the limits would all fit if the file's unit were
 * the other usual one, say so. */
static void unit_hint(const creader *r, size_t j, char *buf, size_t n)
{
  const twf_campaign *c = r->c;
  const twf_joint *jt = &r->m->joints[j];
  /* the other unit, to read the file's values in */
  twf_length_unit alt_lu = r->j_lu;
  twf_angle_unit alt_au = r->j_au;
  double maxabs = 0;
  const char *what = NULL, *decl = NULL;
  size_t p;
  int fits = 1;
  buf[0] = '\0';
  for (p = 0; p < c->n_poses; p++)
    maxabs = fmax(maxabs, fabs(file_value(r, j, c->q[p * c->n_joints + j])));
  if (jt->type == TWF_JOINT_REVOLUTE) {
    if (r->j_au == TWF_ANGLE_DEG && maxabs < ONE_TURN_RAD &&
        jt->limit_hi - jt->limit_lo > WIDE_ANGLE) {
      alt_au = TWF_ANGLE_RAD, what = "radians read as degrees", decl = "angle=rad";
    } else if (r->j_au == TWF_ANGLE_RAD && maxabs > ONE_TURN_RAD) {
      alt_au = TWF_ANGLE_DEG, what = "degrees read as radians", decl = "angle=deg";
    }
  } else {
    if (r->j_lu == TWF_LENGTH_MM && maxabs < 1.0 &&
        jt->limit_hi - jt->limit_lo > WIDE_STROKE) {
      alt_lu = TWF_LENGTH_M, what = "metres read as millimetres", decl = "length=m";
    } else if (r->j_lu == TWF_LENGTH_M && maxabs > 1.0) {
      alt_lu = TWF_LENGTH_MM, what = "millimetres read as metres", decl = "length=mm";
    }
  }
  if (what == NULL)
    return;
  for (p = 0; p < c->n_poses && fits; p++)
    fits = within(jt,
                  twf_creader_joint_to_si(jt, file_value(r, j, c->q[p * c->n_joints + j]),
                                          alt_lu, alt_au),
                  r->opt.limit_tolerance);
  if (fits)
    snprintf(buf, n,
             "the values look like %s: declare %s ('# units: %s' above the "
             "header, or on the command line)", what, decl, decl);
}

twf_status twf_creader_check_limits(creader *r)
{
  const twf_campaign *c = r->c;
  const twf_model *m = r->m;
  size_t j, p, nj = c->n_joints;
  size_t n_wide = 0, n_small = 0;
  double maxall = 0;
  char hint[TWF_ERROR_TEXT_MAX], names[TWF_ERROR_TEXT_MAX];
  for (j = 0; j < nj; j++) {
    const twf_joint *jt = &m->joints[j];
    const char *un = jt->type == TWF_JOINT_PRISMATIC ? twf_length_unit_name(r->j_lu)
                                                     : twf_angle_unit_name(r->j_au);
    size_t n_out = 0, first = 0;
    if (!jt->has_limits)
      continue;
    for (p = 0; p < c->n_poses; p++)
      if (!within(jt, c->q[p * nj + j], r->opt.limit_tolerance)) {
        if (n_out++ == 0)
          first = p;
      }
    if (n_out == 0)
      continue;
    unit_hint(r, j, hint, sizeof hint);
    if (r->opt.limits_are_errors)
      return twf_error_set(
          r->err, TWF_ERR_LIMIT, r->jpath, c->pose_lines[first],
          r->jcol_saved[j],
          hint[0] ? hint
                  : "check the joint columns and units, or the model's limits",
          "column '%s': %.10g %s at pose '%s' lies outside the joint's limits "
          "[%.10g, %.10g] %s (%zu of %zu values outside)", jt->name,
          file_value(r, j, c->q[first * nj + j]), un, c->pose_ids[first],
          file_value(r, j, jt->limit_lo), file_value(r, j, jt->limit_hi), un, n_out,
          c->n_poses);
    twf_warnings_add(r->w, r->jpath, c->pose_lines[first], r->jcol_saved[j],
                     "joint '%s': %zu of %zu values lie outside its limits "
                     "[%.10g, %.10g] %s, the first %.10g %s at pose '%s'%s%s",
                     jt->name, n_out, c->n_poses, file_value(r, j, jt->limit_lo),
                     file_value(r, j, jt->limit_hi), un,
                     file_value(r, j, c->q[first * nj + j]), un,
                     c->pose_ids[first], hint[0] ? "; " : "", hint);
  }
  /* Radians read as degrees mostly stay inside wide limits: look at the
   * whole campaign. A calibration campaign that moves no joint by more than
   * a few degrees could not calibrate anything anyway. */
  if (r->j_au != TWF_ANGLE_DEG || c->n_poses < 2)
    return TWF_OK;
  names[0] = '\0';
  for (j = 0; j < nj; j++) {
    const twf_joint *jt = &m->joints[j];
    double maxabs = 0;
    if (jt->type != TWF_JOINT_REVOLUTE || !jt->has_limits ||
        jt->limit_hi - jt->limit_lo <= WIDE_ANGLE)
      continue;
    n_wide++;
    for (p = 0; p < c->n_poses; p++)
      maxabs = fmax(maxabs, fabs(file_value(r, j, c->q[p * nj + j])));
    maxall = fmax(maxall, maxabs);
    if (maxabs < ONE_TURN_RAD) {
      n_small++;
      twf_io_appendf(names, sizeof names, "%s%s", names[0] ? ", " : "", jt->name);
    }
  }
  if (n_wide > 0 && n_small == n_wide && maxall > 0)
    twf_warnings_add(r->w, r->jpath, 0, 0,
                     "the values look like radians read as degrees: no "
                     "revolute joint moves beyond +-%.1f deg over the %zu "
                     "poses (%s); declare angle=rad ('# units: angle=rad' "
                     "above the header, or on the command line) if they are "
                     "radians", ONE_TURN_RAD, c->n_poses, names);
  return TWF_OK;
}

/* The spread of the measured points against the size of the arm: no
 * target can be farther than R = reach + the longest target offset + the
 * prismatic travel from the base origin, so the measured points lie
 * within a sphere of diameter 2 R, and the diagonal of their bounding box
 * (within sqrt(3) of the diameter, whatever the instrument's frame) within
 * 3.5 R. Millimetre data declared as metres are a thousand times larger;
 * left alone they end in a singular normal matrix with a hint about
 * parameters. A factor of 20 on R leaves room for any model a calibration
 * can fix. (Metres read as millimetres, a thousand times too small, cannot
 * be told from a campaign that hardly moves, and are not checked.) */
#define SPREAD_FACTOR 20.0

twf_status twf_creader_check_scale(creader *r)
{
  const twf_campaign *c = r->c;
  const twf_model *m = r->m;
  double lo[3], hi[3], d2 = 0, reach, spread, offset = 0, travel = 0;
  size_t k, j;
  if (c->n_meas < 2)
    return TWF_OK;
  for (int a = 0; a < 3; a++) {
    lo[a] = INFINITY;
    hi[a] = -INFINITY;
  }
  for (k = 0; k < c->n_meas; k++)
    for (int a = 0; a < 3; a++) {
      lo[a] = fmin(lo[a], c->meas[k].pos[a]);
      hi[a] = fmax(hi[a], c->meas[k].pos[a]);
    }
  for (int a = 0; a < 3; a++)
    d2 += (hi[a] - lo[a]) * (hi[a] - lo[a]);
  spread = sqrt(d2);
  for (k = 0; k < m->n_targets; k++)
    if (m->targets[k].offset_known)
      offset = fmax(offset, twf_v3_norm(m->targets[k].offset));
  /* the model's travel where it has limits: the campaign's values may
   * carry the same unit slip as its coordinates */
  for (j = 0; j < m->n_joints; j++) {
    const twf_joint *jt = &m->joints[j];
    if (jt->type != TWF_JOINT_PRISMATIC)
      continue;
    if (jt->has_limits)
      travel += fmax(fabs(jt->limit_lo), fabs(jt->limit_hi));
    else
      for (k = 0; k < c->n_poses; k++)
        travel = fmax(travel, fabs(c->q[k * c->n_joints + j]));
  }
  reach = twf_model_reach(m) + offset + travel;
  if (!(spread > SPREAD_FACTOR * reach))
    return TWF_OK;
  return twf_error_set(
      r->err, TWF_ERR_UNITS, r->path, 0, 0,
      "declare the unit the instrument exported ('# units: length=mm' above "
      "the header, or the caller's length unit); a campaign of another arm "
      "or instrument gives this too",
      "check the units: the measured points spread over %.4g %s, but the arm "
      "reaches no farther than %.4g %s from its base",
      twf_length_from_si(spread, r->lu), twf_length_unit_name(r->lu),
      twf_length_from_si(reach, r->lu), twf_length_unit_name(r->lu));
}
