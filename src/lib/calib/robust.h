/* robust.h: the gross-error screen of the calibration and of the
 * registration refinement (internal; DEVELOPERS.md, "The maths"). */
#ifndef TWF_ROBUST_H
#define TWF_ROBUST_H

#include "lsq.h"

/* Score each fit measurement of the problem at its working model and set
 * its weight for mode with threshold k (robust standard deviations).
 * score[n_meas] and err_len[n_meas] (position error length, m) receive
 * every measurement's figures, check rows too (err_len may be NULL when
 * the lengths are not wanted: less memory); *changed the number of
 * weights that moved. Returns TWF_OK or TWF_ERR_NOMEM (err not filled). */
twf_status twf_robust_screen(twf_lsq_problem *pr, twf_robust mode, double k, double *score,
                             double *err_len, size_t *changed);

/* The measurements listed as outliers after a screen: dropped or
 * down-weighted beyond the threshold (a Cauchy weight is below 1 for every
 * residual, so there only scores past the threshold count). */
int twf_robust_listed(const twf_lsq_problem *pr, twf_robust mode, double k, const double *score,
                      size_t i);

#endif
