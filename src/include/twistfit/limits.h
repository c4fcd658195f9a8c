/* twistfit/limits.h: a configuration against the model's joint limits.
 * Part of the public interface of libtwistfit; include <twistfit.h>,
 * whose opening comment states the rules (units, frames, ownership,
 * errors) that hold for every declaration here. */
#ifndef TWISTFIT_LIMITS_H
#define TWISTFIT_LIMITS_H

#include "twistfit/common.h"
#include "twistfit/model.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Check the logged joint values q[n_joints] (rad or m) against the limits
 * of m's joints that have them (inclusive). For each joint outside, when
 * w is not NULL, add a warning "WHERE: joint J at V U is outside its
 * limits LO to HI U" in the model's declared units (where: e.g. "the home
 * pose" or "pose p07"; NULL: "the configuration"). Returns the number of
 * joints outside (0 when m or q is NULL). */
size_t twf_model_check_limits(const twf_model *m, const double *q, const char *where,
                              twf_warnings *w);

#ifdef __cplusplus
}
#endif

#endif /* TWISTFIT_LIMITS_H */
