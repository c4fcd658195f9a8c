/* errmodel_internal.h: what the streamed accumulation (lsq.c) reads from
 * an evaluated pose of the error model, without going through the 3 x p
 * rows of twf_errmodel_point (internal). */
#ifndef TWF_ERRMODEL_INTERNAL_H
#define TWF_ERRMODEL_INTERNAL_H

#include "internal.h"

/* The spatial twists (w, v) of every parameter at the evaluated pose,
 * column j at [6 j, 6 j + 6) (zero for target parameters), and the flange
 * pose: valid until the next twf_errmodel_eval_pose. */
const double *twf_errmodel_twists(const twf_errmodel *em);
const twf_pose *twf_errmodel_flange(const twf_errmodel *em);

/* twf_errmodel_eval_station for the twists of the parameters flagged in
 * need[p] only (NULL: all): a pass over the kept columns skips the fixed
 * ones. The twists computed are those of twf_errmodel_eval_pose, bit for
 * bit; the others are left as they were. */
void twf_errmodel_eval_pose_some(twf_errmodel *em, const twf_model *m, const twf_pose *base_in_tracker,
                                 size_t station, const double *q, const unsigned char *need);

/* The pose of twf_errmodel_eval_pose_some for a pass whose parameters
 * are all base or target parameters, from the flange pose in the base
 * frame (twf_model_fk_load) computed before: the flange base_in_tracker *
 * flange_in_base and the base twists; the other twists are left as they
 * were. */
void twf_errmodel_eval_flange(twf_errmodel *em, const twf_pose *base_in_tracker, size_t station,
                              const twf_pose *flange_in_base, const unsigned char *need);

/* The orientation residual of twf_errmodel_orientation and the inverse
 * right Jacobian Jinv of SO(3) at it: the orientation rows are Jinv times
 * the rotation part of each parameter's twist. */
void twf_errmodel_orientation_jinv(const twf_errmodel *em, const double R_meas[3][3], double r[3],
                                   double Jinv[3][3]);

#endif
