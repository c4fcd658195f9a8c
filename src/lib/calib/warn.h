/* warn.h: the calibration's warnings about weak and undetermined
 * parameters (internal). */
#ifndef TWF_CALIB_WARN_H
#define TWF_CALIB_WARN_H

#include "internal.h"

/* One warning per cause for the parameters fixed on the user's poses
 * (status TWF_PARAM_FIXED_DATA): a joint that never moved (or barely),
 * else the parameters by name. m: the model the result's joints name. */
void twf_calib_warn_fixed_on_data(const twf_model *m, const twf_calib_result *res, twf_warnings *w);

/* One warning per cause for the weak parameters: the narrowest joint they
 * depend on, or too few varied poses. ratio[n_params] is each weak
 * parameter's scaled std over sigma (0 for the others). */
void twf_calib_warn_weak(const twf_model *m, const twf_calib_result *res, const double *ratio,
                         twf_warnings *w);

/* One warning per joint whose residuals follow a pattern the model lacks
 * (res->pattern's significant families), with the likely cause. */
void twf_calib_warn_pattern(const twf_model *m, const twf_pattern_result *p, twf_warnings *w);

#endif
