/* twistfit/model.h: the kinematic model, forward kinematics, DH tables.
 * Part of the public interface of libtwistfit; include <twistfit.h>,
 * whose opening comment states the rules (units, frames, ownership,
 * errors) that hold for every declaration here. */
#ifndef TWISTFIT_MODEL_H
#define TWISTFIT_MODEL_H

#include "twistfit/common.h"
#include "twistfit/se3.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ------------------------------------------------------------------ */
/* The kinematic model                                                 */
/* ------------------------------------------------------------------ */

#define TWF_NAME_MAX 64

typedef enum twf_joint_type {
  TWF_JOINT_REVOLUTE = 0,
  TWF_JOINT_PRISMATIC = 1
} twf_joint_type;

typedef struct twf_joint {
  char name[TWF_NAME_MAX];
  twf_joint_type type;
  /* Screw axis in the base frame at all-zero joint values, S = (w, v):
   * revolute |w| = 1 and v = -w x point; prismatic w = 0, |v| = 1. */
  double twist[6];
  /* Reference point on the axis line, metres, base frame: the point closest
   * to the nominal joint frame origin (for a DH input, that frame's origin).
   * Fixes the naming of axis errors (tilts about lines through it). For a
   * prismatic joint any point of reference (not used by the kinematics). */
  double point[3];
  /* Joint model: theta = scale * q + offset, q the value the controller
   * logs (rad or m), theta the value the exponential uses. Nominal: 1, 0. */
  double scale;
  double offset;
  /* Travel limits on the logged value q (rad or m); valid when has_limits. */
  int has_limits;
  double limit_lo, limit_hi;
  /* Elastostatic joint model (twistfit-model(5), [joint NAME] compliance;
   * Dumas, Caro, Garnier and Furet 2011, recalled from memory): the joint
   * yields by compliance * tau under the gravity torque tau about its
   * axis, rad per N m (revolute joints only; 0 = rigid, the nominal). */
  double compliance;
  /* Mass of the body the joint moves (up to the next joint), kg, and its
   * centre of mass, metres, base frame at all-zero joint values; valid
   * when has_mass ([mass NAME] of the model file). */
  int has_mass;
  double mass;
  double mass_center[3];
} twf_joint;

/* A load the flange can carry ([payload NAME]): mass in kg, centre of mass
 * in metres in the flange frame. */
typedef struct twf_payload {
  char name[TWF_NAME_MAX];
  double mass;
  double center[3];
} twf_payload;

/* Standard acceleration of gravity, m/s^2 (the conventional value of the
 * 3rd CGPM, 1901; ISO 80000-3): the torques of the mass model use it. */
#define TWF_GRAVITY_STANDARD 9.80665

typedef struct twf_target {
  char name[TWF_NAME_MAX];
  double offset[3];  /* metres, flange frame; meaningful when offset_known */
  int offset_known;  /* 0: declared without an offset (unknown, to be fitted) */
} twf_target;

/* Free-form key/value metadata carried by a model file (as-built models
 * record date, version, command line, input digests, accuracy). */
typedef struct twf_meta_entry {
  char key[TWF_NAME_MAX];
  char *value; /* owned by the model */
} twf_meta_entry;

typedef struct twf_model {
  char name[128];
  twf_length_unit length_unit; /* declared units: used by files and reports */
  twf_angle_unit angle_unit;
  size_t n_joints;
  twf_joint *joints;
  twf_pose home;       /* flange pose in the base frame at theta = 0 */
  size_t n_targets;
  twf_target *targets;
  size_t n_meta;
  twf_meta_entry *meta;
  /* Mass model: the direction of gravity in the base frame (unit; default
   * 0 0 -1) and the payloads the campaigns may name. */
  double gravity[3];
  size_t n_payloads;
  twf_payload *payloads; /* owned by the model */
} twf_model;

/* A model with n_joints joints and n_targets targets, all zero-filled except
 * scale = 1 per joint and home = identity. NULL when out of memory. */
twf_model *twf_model_alloc(size_t n_joints, size_t n_targets);
void twf_model_free(twf_model *m);
/* Deep copy; NULL when out of memory. */
twf_model *twf_model_copy(const twf_model *m);
/* Set (replace) a metadata value; copies value. */
twf_status twf_model_meta_set(twf_model *m, const char *key, const char *value);
/* The metadata value, or NULL. */
const char *twf_model_meta_get(const twf_model *m, const char *key);
/* Index of the joint or target named name, or -1. */
long twf_model_joint_index(const twf_model *m, const char *name);
long twf_model_target_index(const twf_model *m, const char *name);
long twf_model_payload_index(const twf_model *m, const char *name);
/* Add a payload (mass kg, centre m in the flange frame; center may point
 * into m's own payloads), copying name; TWF_ERR_DUPLICATE for a name
 * already used, TWF_ERR_NOMEM. */
twf_status twf_model_payload_add(twf_model *m, const char *name, double mass,
                                 const double center[3]);
/* 1 when some joint has a nonzero compliance (then forward kinematics
 * computes the gravity torques), else 0. */
int twf_model_has_compliance(const twf_model *m);
/* 1 when some joint or payload carries a mass. */
int twf_model_has_masses(const twf_model *m);
/* Characteristic length of the arm in metres (largest distance of a joint
 * reference point or the home flange from the base origin, at least 0.1 m):
 * scales angular columns into length units. */
double twf_model_reach(const twf_model *m);

/* Forward kinematics at logged joint values q[n_joints] (rad or m).
 * prefix (may be NULL) receives n_joints + 1 poses: prefix[0] = I and
 * prefix[i] = exp(S_1 theta_1) ... exp(S_i theta_i). flange receives
 * prefix[n] * home, the flange pose in the base frame. O(n). */
void twf_model_fk(const twf_model *m, const double *q, twf_pose *prefix,
                  twf_pose *flange);

/* Gravity torques of the mass model at logged joint values q with payload
 * index payload (-1: none) at the flange: tau[i] (N m for a revolute
 * joint, N for a prismatic one) is the generalised force of gravity on
 * joint i, that of the bodies of joints i..n-1 and of the payload, about
 * (along) joint i's axis at the rigid configuration theta = scale q +
 * offset of the current model: tau_i = -dV/dtheta_i with V the potential
 * energy, positive along the joint's own direction. prefix (n_joints + 1,
 * may be NULL) receives the rigid prefixes. O(n). */
void twf_model_gravity_torques(const twf_model *m, const double *q,
                               long payload, double *tau, twf_pose *prefix);

/* The joint values the exponentials use: theta_i = scale_i q_i + offset_i
 * + compliance_i tau_i, tau from twf_model_gravity_torques (the change of
 * tau with the deflection itself is left out: first order in the
 * compliance; twistfit-model(5) states the bound). tau (n_joints, may be
 * NULL) receives the torques. Without compliance theta = scale q + offset
 * exactly. */
void twf_model_theta(const twf_model *m, const double *q, long payload,
                     double *theta, double *tau);

/* twf_model_fk with the payload carried (-1: none): the joints deflect
 * under the mass model's gravity torques by their compliances.
 * twf_model_fk is twf_model_fk_load with payload -1 (the arm's own
 * bodies still load the joints). */
void twf_model_fk_load(const twf_model *m, const double *q, long payload,
                       twf_pose *prefix, twf_pose *flange);
/* The rigid arm: the product of exponentials at theta = scale q + offset
 * whatever the compliances (the geometry the link reports, the DH
 * conversion and the datum rule describe). */
void twf_model_fk_rigid(const twf_model *m, const double *q, twf_pose *prefix,
                        twf_pose *flange);

/* Spatial Jacobian with respect to the logged joint values, from the
 * prefixes of twf_model_fk: column i = scale_i Ad_{prefix[i]} S_i, so that
 * dT T^-1 = sum_i J_i dq_i. J is 6 x n_joints, row-major (J[r*n + i]). */
void twf_model_jacobian_spatial(const twf_model *m, const twf_pose *prefix,
                                double *J);

/* A Denavit-Hartenberg row, SI units. Standard (distal) DH:
 *   A_i = Rz(theta_i + q_i) Tz(d_i) Tx(a_i) Rx(alpha_i) Ry(beta_i),
 *   joint axis z_(i-1);
 * modified (proximal, Craig) DH, where a, alpha and beta are a_(i-1),
 * alpha_(i-1) and beta_(i-1):
 *   A_i = Rx(alpha_i) Tx(a_i) Ry(beta_i) Rz(theta_i + q_i) Tz(d_i),
 *   joint axis z_i.
 * For a prismatic joint q adds to d instead of theta. beta is Hayati's
 * rotation about the link's y axis (Hayati 1983; Veitschegger and Wu 1986),
 * used instead of d where consecutive axes are nearly parallel; 0 for a
 * plain DH row. Since Tx(a) and Rx(alpha) commute, a row of either
 * convention describes the same link motion Tx(a) Rx(alpha) Ry(beta). */
typedef struct twf_dh_row {
  double a, alpha, d, theta;
  twf_joint_type type;
  double beta;
} twf_dh_row;

typedef enum twf_dh_convention {
  TWF_DH_STANDARD = 0,
  TWF_DH_MODIFIED = 1
} twf_dh_convention;

/* Convert a DH table into the joints and home pose of m (m->n_joints must
 * equal n). flange_in_last (may be NULL for identity) is the flange pose in
 * the last DH frame. Names and limits of m's joints are left unchanged;
 * scale and offset are reset to 1 and 0. Reads a, alpha, d, theta and type
 * only: beta is taken as 0, so that callers that fill only those fields
 * keep their exact behaviour (use twf_model_set_from_dh_beta for beta). */
twf_status twf_model_set_from_dh(twf_model *m, const twf_dh_row *rows,
                                 size_t n, twf_dh_convention conv,
                                 const twf_pose *flange_in_last,
                                 twf_error *err);

/* As twf_model_set_from_dh, honouring each row's beta (every field of
 * every row must be set; beta = 0 everywhere gives twf_model_set_from_dh's
 * result exactly), with the model's base frame at base_to_first (may be
 * NULL for identity): the pose of DH frame 0 in the model's base frame,
 * so that T(q) = base_to_first A_1 ... A_n flange_in_last. */
twf_status twf_model_set_from_dh_beta(twf_model *m, const twf_dh_row *rows,
                                      size_t n, twf_dh_convention conv,
                                      const twf_pose *base_to_first,
                                      const twf_pose *flange_in_last,
                                      twf_error *err);


#ifdef __cplusplus
}
#endif

#endif /* TWISTFIT_MODEL_H */
