/* limits.c: a configuration against the model's joint limits, for the
 * commands that drive the model to given joint values (fk) and for its
 * home pose, which a model may put outside its own limits. */
#include "internal.h"

size_t twf_model_check_limits(const twf_model *m, const double *q, const char *where,
                              twf_warnings *w)
{
  size_t i, n = 0;
  if (m == NULL || q == NULL)
    return 0;
  for (i = 0; i < m->n_joints; i++) {
    const twf_joint *j = &m->joints[i];
    int rev = j->type == TWF_JOINT_REVOLUTE;
    double unit = rev ? twf_angle_unit_si(m->angle_unit) : twf_length_unit_si(m->length_unit);
    const char *name = rev ? twf_angle_unit_name(m->angle_unit) : twf_length_unit_name(m->length_unit);
    if (!j->has_limits || (q[i] >= j->limit_lo && q[i] <= j->limit_hi))
      continue;
    n++;
    if (w != NULL)
      twf_warnings_add(w, NULL, 0, 0, "%s: joint %s at %.6g %s is outside its limits %.6g to %.6g %s",
                       where ? where : "the configuration", j->name, q[i] / unit, name, j->limit_lo / unit,
                       j->limit_hi / unit, name);
  }
  return n;
}
