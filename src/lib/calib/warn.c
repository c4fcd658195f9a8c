/* warn.c: the warnings of a calibration about what the poses could not
 * determine: one warning per cause, naming the narrowest joint involved
 * when there is one (DEVELOPERS.md, "Redundancy"), so that the advice says
 * which poses to add. */
#include "warn.h"

#include <stdio.h>
#include <string.h>

/* A joint counts as narrow in the fit poses when it moved through less
 * than a quarter of its travel (or 30 degrees / 50 mm without limits):
 * common practice, no source. */
static int joint_narrow(const twf_joint *jt, double range)
{
  double span = jt->has_limits ? jt->limit_hi - jt->limit_lo
                               : (jt->type == TWF_JOINT_REVOLUTE ? 2 * TWF_PI : 0.2);
  double floor_abs = jt->type == TWF_JOINT_REVOLUTE ? 30.0 * TWF_PI / 180.0 : 0.05;
  return range < fmin(0.25 * span, floor_abs);
}

/* A joint's range in the model's declared units. */
static double joint_range_shown(const twf_model *m, const twf_joint *jt, double range)
{
  return range / (jt->type == TWF_JOINT_REVOLUTE ? twf_angle_unit_si(m->angle_unit)
                                                 : twf_length_unit_si(m->length_unit));
}

static const char *joint_range_unit(const twf_model *m, const twf_joint *jt)
{
  return jt->type == TWF_JOINT_REVOLUTE ? twf_angle_unit_name(m->angle_unit)
                                        : twf_length_unit_name(m->length_unit);
}

/* The narrowest joint among those whose motion the parameter depends on:
 * its own joint and, for a joint parameter, the joints after it. -1 when
 * none is narrow. */
static long narrowest_joint(const twf_model *m, const twf_calib_result *res, long from)
{
  long best = -1;
  size_t i;
  for (i = from < 0 ? 0 : (size_t)from; i < m->n_joints; i++)
    if (joint_narrow(&m->joints[i], res->joint_range[i]) &&
        (best < 0 || res->joint_range[i] < res->joint_range[best]))
      best = (long)i;
  return best;
}

/* One warning per cause for the weak parameters: the narrowest joint they
 * depend on, or too few varied poses; the worst one is quoted, the rest
 * named. ratio[j] is the scaled std over sigma (0 for parameters that are
 * not weak). */
void twf_calib_warn_weak(const twf_model *m, const twf_calib_result *res, const double *ratio,
                         twf_warnings *w)
{
  long cause;
  for (cause = -1; cause < (long)m->n_joints; cause++) {
    char names[TWF_ERROR_TEXT_MAX / 2];
    size_t j, n = 0, used = 0, worst = 0;
    names[0] = '\0';
    for (j = 0; j < res->n_params; j++) {
      const twf_param *par = &res->params[j].param;
      if (!res->params[j].weak || narrowest_joint(m, res, par->joint) != cause)
        continue;
      if (n == 0 || ratio[j] > ratio[worst])
        worst = j;
      n++;
    }
    if (n == 0)
      continue;
    {
      size_t listed = 0;
      for (j = 0; j < res->n_params; j++) {
        const twf_param *par = &res->params[j].param;
        int k;
        if (j == worst || !res->params[j].weak || narrowest_joint(m, res, par->joint) != cause)
          continue;
        if (listed == 6) {
          k = snprintf(names + used, sizeof names - used, " and %zu more", n - 1 - listed);
          used = k > 0 && used + (size_t)k < sizeof names ? used + (size_t)k : sizeof names - 1;
          break;
        }
        k = snprintf(names + used, sizeof names - used, "%s%s", listed ? ", " : "", par->name);
        used = k > 0 && used + (size_t)k < sizeof names ? used + (size_t)k : sizeof names - 1;
        listed++;
      }
    }
    {
      const twf_param *par = &res->params[worst].param;
      const char *unit = par->kind == TWF_PARAM_ANGLE    ? twf_angle_unit_name(m->angle_unit)
                         : par->kind == TWF_PARAM_LENGTH ? twf_length_unit_name(m->length_unit)
                                                         : "";
      double shown = res->params[worst].std /
                     (par->kind == TWF_PARAM_ANGLE    ? twf_angle_unit_si(m->angle_unit)
                      : par->kind == TWF_PARAM_LENGTH ? twf_length_unit_si(m->length_unit)
                                                      : 1.0);
      char what[TWF_ERROR_TEXT_MAX];
      snprintf(what, sizeof what, "%zu parameter%s poorly determined by these poses (worst %s: std %.3g %s, "
               "%.2g times the noise at the arm's reach%s%s)",
               n, n == 1 ? " is" : "s are", par->name, shown, unit, ratio[worst], n > 1 ? "; also " : "", names);
      if (cause >= 0) {
        const twf_joint *jt = &m->joints[cause];
        twf_warnings_add(w, NULL, 0, 0,
                         "%s: joint %s moved through only %.3g %s in the fit poses; add poses that move %s "
                         "over more of its range",
                         what, jt->name, joint_range_shown(m, jt, res->joint_range[cause]), joint_range_unit(m, jt),
                         jt->name);
      } else {
        twf_warnings_add(w, NULL, 0, 0, "%s: add poses that vary more joints together (%zu fit poses now)",
                         what, res->n_fit_poses);
      }
    }
  }
}

/* One warning per cause for the parameters fixed on the user's poses: a
 * joint that never moved (or barely), else the parameters by name. */
void twf_calib_warn_fixed_on_data(const twf_model *m, const twf_calib_result *res, twf_warnings *w)
{
  char list[TWF_ERROR_TEXT_MAX / 2];
  size_t j, used = 0;
  long jn = narrowest_joint(m, res, 0);
  list[0] = '\0';
  for (j = 0; j < res->n_params; j++)
    if (res->params[j].status == TWF_PARAM_FIXED_DATA && used + 2 < sizeof list) {
      int n = snprintf(list + used, sizeof list - used, "%s%s", used ? ", " : "",
                       res->params[j].param.name);
      used = n > 0 && used + (size_t)n < sizeof list ? used + (size_t)n : sizeof list - 1;
    }
  if (used == 0)
    return;
  if (jn >= 0)
    twf_warnings_add(w, NULL, 0, 0,
                     "joint %s moved through %.3g %s in the fit poses: %zu parameters cannot be determined "
                     "and stay at their starting values (%s); measure poses that move %s over its range",
                     m->joints[jn].name, joint_range_shown(m, &m->joints[jn], res->joint_range[jn]),
                     joint_range_unit(m, &m->joints[jn]), res->n_fixed_data, list, m->joints[jn].name);
  else
    twf_warnings_add(w, NULL, 0, 0,
                     "%zu parameters cannot be determined from these poses and stay at their starting values (%s): "
                     "measure more varied poses", res->n_fixed_data, list);
}

/* The family of joint j that the warning names: among the significant ones
 * the one with the smallest p-value (a slope error also shows in the
 * harmonics over a limited range, and a harmonic in the slope). NULL when
 * none is significant. */
static const twf_pattern_test *pattern_cause(const twf_pattern_result *p, size_t j)
{
  const twf_pattern_test *best = NULL;
  size_t k;
  for (k = 0; k < TWF_PATTERN_NKINDS; k++) {
    const twf_pattern_test *t = &p->tests[j * TWF_PATTERN_NKINDS + k];
    if (t->significant && (best == NULL || t->p_value < best->p_value))
      best = t;
  }
  return best;
}

void twf_calib_warn_pattern(const twf_model *m, const twf_pattern_result *p, twf_warnings *w)
{
  size_t j;
  char torque[256] = "";
  size_t n_torque = 0;
  double strongest = 0.0;
  for (j = 0; j < m->n_joints; j++) {
    const twf_pattern_test *t = pattern_cause(p, j);
    if (t != NULL && t->explained > strongest)
      strongest = t->explained;
  }
  for (j = 0; j < m->n_joints; j++) {
    const twf_pattern_test *t = pattern_cause(p, j);
    /* once the fit has bent the geometry toward one joint's error, traces
     * of it show in the others: name the joints whose pattern is at least
     * a quarter of the strongest */
    if (t == NULL || t->explained < 0.25 * strongest)
      continue;
    if (t->kind == TWF_PATTERN_TORQUE) {
      size_t len = strlen(torque);
      snprintf(torque + len, sizeof torque - len, "%s%s", n_torque ? " and " : "", m->joints[j].name);
      n_torque++;
    } else if (t->kind == TWF_PATTERN_SLOPE)
      twf_warnings_add(w, NULL, 0, 0,
                       "the residuals are not noise: they change with the value of %s (%.0f %% of their sum of "
                       "squares, p = %.1e): a joint scale (gear ratio) error; fit the scale group",
                       m->joints[j].name, 100.0 * t->explained, t->p_value);
    else
      twf_warnings_add(w, NULL, 0, 0,
                       "the residuals are not noise: they follow a periodic pattern in the angle of %s (%.0f %% of "
                       "their sum of squares, p = %.1e): gear or encoder error, or another effect of that joint the "
                       "kinematic model does not represent",
                       m->joints[j].name, 100.0 * t->explained, t->p_value);
  }
  if (n_torque > 0)
    twf_warnings_add(w, NULL, 0, 0,
                     "the residuals are not noise: they grow with the gravity load on %s: fit the compliance group "
                     "with a mass model", torque);
}
