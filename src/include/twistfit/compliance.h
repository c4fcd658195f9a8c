/* twistfit/compliance.h: what a calibration found of the joints'
 * compliance under gravity.
 * Part of the public interface of libtwistfit; include <twistfit.h>,
 * whose opening comment states the rules (units, frames, ownership,
 * errors) that hold for every declaration here. */
#ifndef TWISTFIT_COMPLIANCE_H
#define TWISTFIT_COMPLIANCE_H

#include "twistfit/common.h"
#include "twistfit/se3.h"
#include "twistfit/model.h"
#include "twistfit/campaign.h"

#ifdef __cplusplus
extern "C" {
#endif

/* The elastostatic joint model (twistfit-model(5); Dumas, Caro, Garnier
 * and Furet 2011, recalled from memory): theta_i = scale_i q_i + offset_i
 * + C_i tau_i, tau_i the gravity torque about joint i's axis of the
 * bodies beyond it and the payload (twf_model_gravity_torques) at the
 * rigid configuration. The torque's own change with the deflection is left
 * out: the deflection is then wrong by at most C_i |dtau_i/dtheta| times
 * the largest deflection (second order; 4e-7 rad on the heavy reference
 * arm of tests/gen/gen_kdl_compliance.py, whose deflections reach 5e-4
 * rad). */

/* Why a joint's compliance was or was not determined. */
typedef enum twf_compliance_state {
  TWF_COMPLIANCE_ESTIMATED = 0,  /* fitted (may still be weak: see weak) */
  TWF_COMPLIANCE_NOT_REVOLUTE,   /* a prismatic joint has none */
  TWF_COMPLIANCE_NO_TORQUE,      /* no gravity torque about the axis at any pose
                                    (gravity along it, as for the first joint of an
                                    upright arm, or no mass beyond it) */
  TWF_COMPLIANCE_CONSTANT_TORQUE,/* the torque hardly varies over the fit poses:
                                    the joint's offset takes the deflection */
  TWF_COMPLIANCE_REDUNDANT       /* fixed by the redundancy walk for another reason
                                    (the parameters that explain it are listed with
                                    the calibration's parameters) */
} twf_compliance_state;

typedef struct twf_compliance_joint {
  twf_compliance_state state;
  int weak;                 /* estimated but poorly determined by the poses */
  double compliance;        /* rad per N m, as written into the as-built model */
  double std;               /* its standard deviation, rad per N m (NAN if not estimated) */
  double stiffness;         /* 1 / compliance, N m per rad (INFINITY when <= 0) */
  double stiffness_std;     /* std / compliance^2, first order, N m per rad */
  double torque_min, torque_max; /* range of the gravity torque over the fit poses, N m */
  size_t worst_pose;        /* campaign pose of the largest |C tau| */
  double deflection;        /* C tau there, rad */
  double tool_m;            /* how far that deflection alone moves the farthest
                               target (the flange without targets) there, m */
} twf_compliance_joint;

typedef struct twf_compliance_summary {
  size_t n_joints;               /* 0 when the compliance group was not fitted */
  twf_compliance_joint *joints;  /* owned */
  size_t n_payloads_used;        /* distinct loads over the fit poses (none counts) */
  size_t worst_pose;             /* pose where the deflections together move the
                                    tool most */
  double worst_tool_m;           /* that displacement, m */
} twf_compliance_summary;

void twf_compliance_summary_clear(twf_compliance_summary *s);

/* The summary of model m (the calibrated one, with its compliances) over
 * the fit poses of c (use: NULL or n_poses flags of the poses to take),
 * with state per joint from fixed (n_joints flags: 1 where the
 * compliance parameter was fixed, -1 where the group had none), the
 * standard deviations std (n_joints, SI, NAN where not estimated) and
 * weak (n_joints flags, may be NULL). A torque "hardly varies" when its
 * spread over the poses is below 1e-6 of its largest magnitude (or below
 * 1e-9 N m). TWF_OK, TWF_ERR_NOMEM, TWF_ERR_INVALID. */
twf_status twf_compliance_summarize(const twf_model *m, const twf_campaign *c,
                                    const unsigned char *use, const int *fixed,
                                    const double *std, const unsigned char *weak,
                                    twf_compliance_summary *out, twf_error *err);

#ifdef __cplusplus
}
#endif

#endif /* TWISTFIT_COMPLIANCE_H */
