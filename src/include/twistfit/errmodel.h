/* twistfit/errmodel.h: the error model: calibration parameters and their Jacobian.
 * Part of the public interface of libtwistfit; include <twistfit.h>,
 * whose opening comment states the rules (units, frames, ownership,
 * errors) that hold for every declaration here. */
#ifndef TWISTFIT_ERRMODEL_H
#define TWISTFIT_ERRMODEL_H

#include "twistfit/common.h"
#include "twistfit/se3.h"
#include "twistfit/model.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ------------------------------------------------------------------ */
/* Error model: calibration parameters and their Jacobian              */
/* ------------------------------------------------------------------ */

/* Parameter groups (DEVELOPERS.md, "The maths"). The enum
 * order is the default priority of the redundancy walk: the parameters a
 * user cares about first. */
typedef enum twf_group {
  TWF_GROUP_BASE = 0,    /* 6 per instrument station: B_s <- B_s exp(b_s), b_s in the
                            robot base frame */
  TWF_GROUP_TARGETS,     /* 3 per target: t_k <- t_k + dt_k (flange frame) */
  TWF_GROUP_OFFSETS,     /* 1 per joint: theta_i = scale q_i + offset_i */
  TWF_GROUP_HOME,        /* 6: M <- M exp(m) */
  TWF_GROUP_SHIFTS,      /* 2 per revolute joint: translate the line along u1, u2 */
  TWF_GROUP_TILTS,       /* 2 per joint: rotate the line about u1, u2 through its point */
  TWF_GROUP_SCALE,       /* 1 per joint: scale_i <- scale_i + c_i (optional) */
  TWF_GROUP_COMPLIANCE,  /* 1 per revolute joint: compliance_i <- compliance_i + C_i,
                            theta_i += C_i tau_i (optional, needs a mass model) */
  TWF_GROUP_COUNT
} twf_group;

#define TWF_GROUP_BIT(g) (1u << (g))
/* Full geometric calibration: every group but scale. */
#define TWF_GROUPS_GEOMETRIC                                                  \
  (TWF_GROUP_BIT(TWF_GROUP_BASE) | TWF_GROUP_BIT(TWF_GROUP_TARGETS) |         \
   TWF_GROUP_BIT(TWF_GROUP_OFFSETS) | TWF_GROUP_BIT(TWF_GROUP_HOME) |         \
   TWF_GROUP_BIT(TWF_GROUP_SHIFTS) | TWF_GROUP_BIT(TWF_GROUP_TILTS))
/* Offsets-only re-mastering: base, targets and joint offsets. */
#define TWF_GROUPS_REMASTER                                                   \
  (TWF_GROUP_BIT(TWF_GROUP_BASE) | TWF_GROUP_BIT(TWF_GROUP_TARGETS) |         \
   TWF_GROUP_BIT(TWF_GROUP_OFFSETS))

/* Stable group names: "base", "targets", "offsets", "home", "shifts",
 * "tilts", "scale", "compliance". */
const char *twf_group_name(twf_group g);
/* Parse a group name (also "axes" = shifts + tilts) into a bit mask;
 * TWF_ERR_UNKNOWN when not recognised. */
twf_status twf_group_parse(const char *name, unsigned *mask);

typedef enum twf_param_kind {
  TWF_PARAM_LENGTH = 0, /* metres */
  TWF_PARAM_ANGLE,      /* radians */
  TWF_PARAM_RATIO,      /* dimensionless (joint scale) */
  TWF_PARAM_COMPLIANCE  /* rad per N m (joint compliance) */
} twf_param_kind;

typedef struct twf_param {
  twf_group group;
  long joint;      /* joint index (offsets, shifts, tilts, scale), else -1 */
  long target;     /* target index (targets), else -1 */
  int component;   /* base/home: 0-2 rotation x y z, 3-5 translation x y z;
                      targets: 0-2 x y z; shifts and tilts: 0 for u1, 1 for u2 */
  twf_param_kind kind;
  long station;    /* base: the instrument station (0 with one station), else -1 */
  char name[TWF_NAME_MAX + 16]; /* stable, e.g. "base.rx" (with several stations
                                   "base.STATION.rx"), "home.tz",
                                   "j3.offset", "j2.tilt1", "j2.shift2",
                                   "T1.y", "j4.scale", "j2.compliance" */
} twf_param;

/* The error model of one kinematic model: its parameter list and a
 * workspace for one pose at a time (so one object per thread). Sized once
 * at allocation: no allocation happens per measurement. */
typedef struct twf_errmodel twf_errmodel;

/* Parameters of the groups in mask for model m (whose joint count and
 * target count are then fixed). NULL with err filled on failure. */
twf_errmodel *twf_errmodel_alloc(const twf_model *m, unsigned groups, twf_error *err);
/* twf_errmodel_alloc for a campaign of n_stations instrument stations
 * (1 to TWF_STATIONS_MAX): the base group holds 6 parameters per station,
 * station-major, named "base.NAME.rx" after names[s] when n_stations > 1
 * (names may be NULL for one station). Poses are then evaluated with
 * twf_errmodel_eval_station, and twf_errmodel_fold takes n_stations base
 * poses. */
twf_errmodel *twf_errmodel_alloc_stations(const twf_model *m, unsigned groups, size_t n_stations,
                                          const char (*names)[TWF_NAME_MAX], twf_error *err);
size_t twf_errmodel_n_stations(const twf_errmodel *em);
void twf_errmodel_free(twf_errmodel *em);
size_t twf_errmodel_n_params(const twf_errmodel *em);
const twf_param *twf_errmodel_param(const twf_errmodel *em, size_t j);
/* Column scale of parameter j: the arm's reach (m) for angular parameters,
 * 1 for lengths, so that scaled columns are all in length units; for a
 * compliance the reach times a torque bound of the joint (standard
 * gravity times the reach times the masses beyond the joint and the
 * heaviest payload, at least 1 N m), the deflection it could cause. */
double twf_errmodel_param_scale(const twf_errmodel *em, size_t j);
/* The factor that brings column j of the Jacobian to the geometric
 * columns' size where columns are multiplied by it (the conditioning of
 * the scaled Jacobian, its singular values and observability indices):
 * twf_errmodel_param_scale for every parameter but a compliance, whose
 * column (the reach times a torque) times the reach over that torque
 * bound is of an angle's column size times the reach. With the torque
 * bound itself (about 1e4 N m on a heavy arm) the compliance columns
 * outgrew the others by 1e8 and the normal matrix's eigenvalues lost the
 * smallest directions to rounding. */
double twf_errmodel_column_scale(const twf_errmodel *em, size_t j);
/* Recompute the axis-error directions u1, u2 from m's current joints. Call
 * after every fold (twf_errmodel_fold does it). */
void twf_errmodel_update(twf_errmodel *em, const twf_model *m);
/* The unit directions u1, u2 (base frame) of joint i's axis errors. */
void twf_errmodel_axis_basis(const twf_errmodel *em, size_t joint,
                             double u1[3], double u2[3]);

/* The payload carried at the poses evaluated from now on (index into the
 * model's payloads, -1: none, the default): the joints deflect under the
 * gravity torques of the mass model (twf_model_theta) when the model has
 * compliances or the compliance group is chosen. */
void twf_errmodel_set_payload(twf_errmodel *em, long payload);

/* Evaluate one pose: forward kinematics at logged joint values q with the
 * base pose base_in_tracker, and the spatial twist (tracker frame) that
 * every parameter induces on the flange. flange_in_tracker (may be NULL)
 * receives the flange pose. Results stay in em until the next call. O(n p). */
void twf_errmodel_eval_pose(twf_errmodel *em, const twf_model *m,
                            const twf_pose *base_in_tracker, const double *q,
                            twf_pose *flange_in_tracker);
/* twf_errmodel_eval_pose for a pose seen from station `station`, whose base
 * pose is *station_base: the base parameters of the other stations get
 * zero twists. twf_errmodel_eval_pose is station 0. */
void twf_errmodel_eval_station(twf_errmodel *em, const twf_model *m, const twf_pose *station_base,
                               size_t station, const double *q, twf_pose *flange_in_tracker);
/* At the evaluated pose: the predicted position of target k (tracker
 * frame, m) and, when rows is not NULL, the 3 x p derivative of that
 * prediction with respect to the parameters (row-major, rows[r*p + j]). */
void twf_errmodel_point(const twf_errmodel *em, const twf_model *m,
                        size_t target, double y_model[3], double *rows);
/* At the evaluated pose: the orientation residual r = log(R_meas R^T)
 * (rotation vector, tracker frame, rad) and, when rows is not NULL, the
 * 3 x p matrix G = -dr/dparam, so that r(delta) ~ r - G delta exactly to
 * first order (uses the inverse right Jacobian of SO(3)). */
void twf_errmodel_orientation(const twf_errmodel *em, const double R_meas[3][3],
                              double r[3], double *rows);
/* Fold a parameter step delta[p] (SI) into the model and base poses (a
 * retraction: axes stay unit, rotations orthonormal), then update em.
 * base_in_tracker is an array of the error model's n_stations poses.
 * Targets whose offset was unknown become known. */
void twf_errmodel_fold(twf_errmodel *em, const double *delta, twf_model *m,
                       twf_pose *base_in_tracker);


#ifdef __cplusplus
}
#endif

#endif /* TWISTFIT_ERRMODEL_H */
