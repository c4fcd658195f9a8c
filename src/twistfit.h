/*
 * twistfit.h: the public interface of libtwistfit, the calibration core of
 * twistfit (product-of-exponentials kinematic calibration of serial arms).
 *
 * Copyright (C) 2026 the twistfit developers. GPL-3.0-or-later.
 *
 * Rules that hold for every function below unless its comment says otherwise:
 *
 *  - Units: everything in memory is SI, metres and radians. Files declare
 *    their own units and the readers/writers convert once at the edge.
 *  - Frames: "base" is the robot base frame the model is written in,
 *    "flange" the tool flange frame, "tracker" the measuring instrument's
 *    frame. A pose T = (R, p) maps flange (or child) coordinates to the
 *    parent frame: x_parent = R x_child + p. Rotations are row-major 3x3.
 *  - Twists are S = (w, v), angular part first (see DEVELOPERS.md).
 *  - Ownership: an object returned by a *_alloc or *_read function belongs
 *    to the caller, who releases it with the matching *_free; *_free(NULL)
 *    is a no-op. Pointers passed in are borrowed for the call only.
 *  - Errors: functions return a twf_status; on failure they fill the
 *    twf_error passed in (which may be NULL) with what went wrong, where in
 *    the input, and a hint. The library never prints, exits or aborts, and
 *    keeps no global state.
 */
#ifndef TWISTFIT_H
#define TWISTFIT_H

#include <stddef.h>
#include <stdio.h>

#ifdef __cplusplus
extern "C" {
#endif

/* ------------------------------------------------------------------ */
/* Status codes and error reports                                      */
/* ------------------------------------------------------------------ */

/* Stable values: the command line maps them to exit statuses. */
typedef enum twf_status {
  TWF_OK = 0,
  TWF_ERR_NOMEM = 1,      /* out of memory */
  TWF_ERR_IO = 2,         /* a file could not be opened, read or written */
  TWF_ERR_SYNTAX = 3,     /* the input's form is wrong (section, key, field) */
  TWF_ERR_VALUE = 4,      /* a value is non-numeric, non-finite or out of range */
  TWF_ERR_MISSING = 5,    /* something required is absent */
  TWF_ERR_DUPLICATE = 6,  /* something appears twice */
  TWF_ERR_UNKNOWN = 7,    /* a name the model or format does not know */
  TWF_ERR_UNITS = 8,      /* a unit is not recognised */
  TWF_ERR_INVALID = 9,    /* an argument of the call is invalid */
  TWF_ERR_DEGENERATE = 10,/* data too poor to determine the answer */
  TWF_ERR_SINGULAR = 11,  /* a linear system is singular */
  TWF_ERR_DIVERGED = 12,  /* an iteration diverged or did not converge */
  TWF_ERR_LIMIT = 13      /* a joint value lies outside the model's limits */
} twf_status;

#define TWF_ERROR_TEXT_MAX 512
#define TWF_ERROR_FILE_MAX 256

typedef struct twf_error {
  twf_status status;
  char file[TWF_ERROR_FILE_MAX]; /* input file concerned, "" if none */
  long line;                     /* 1-based line in file, 0 if unknown */
  long column;                   /* 1-based column (field), 0 if unknown */
  char message[TWF_ERROR_TEXT_MAX]; /* what is wrong, one line, no trailing period */
  char hint[TWF_ERROR_TEXT_MAX];    /* what to do about it, "" if nothing useful */
} twf_error;

/* Short English name of a status ("out of memory", ...). Never NULL. */
const char *twf_strerror(twf_status status);

/* Reset err to TWF_OK with empty fields. err may be NULL. */
void twf_error_clear(twf_error *err);

/* Fill err (may be NULL) and return status. file may be NULL; hint may be
 * NULL; fmt is a printf format for the message. */
twf_status twf_error_set(twf_error *err, twf_status status, const char *file,
                         long line, long column, const char *hint,
                         const char *fmt, ...)
    __attribute__((format(printf, 7, 8)));

/* Warnings collected by readers and solvers (never printed by the library).
 * Initialise with twf_warnings_init, release with twf_warnings_clear.
 * Wherever a function takes a twf_warnings *, NULL means "discard". */
typedef struct twf_warning {
  char file[TWF_ERROR_FILE_MAX];
  long line;
  long column;
  char message[TWF_ERROR_TEXT_MAX];
} twf_warning;

typedef struct twf_warnings {
  size_t count;
  size_t capacity;
  twf_warning *items;
} twf_warnings;

void twf_warnings_init(twf_warnings *w);
void twf_warnings_clear(twf_warnings *w);
/* Append one warning; silently dropped when w is NULL or memory is short. */
void twf_warnings_add(twf_warnings *w, const char *file, long line,
                      long column, const char *fmt, ...)
    __attribute__((format(printf, 5, 6)));

/* ------------------------------------------------------------------ */
/* Units                                                               */
/* ------------------------------------------------------------------ */

typedef enum twf_length_unit {
  TWF_LENGTH_MM = 0,  /* millimetre (the default) */
  TWF_LENGTH_M,       /* metre */
  TWF_LENGTH_UM,      /* micrometre */
  TWF_LENGTH_IN       /* inch, 25.4 mm exactly */
} twf_length_unit;

typedef enum twf_angle_unit {
  TWF_ANGLE_DEG = 0,  /* degree (the default) */
  TWF_ANGLE_RAD,      /* radian */
  TWF_ANGLE_MRAD      /* milliradian */
} twf_angle_unit;

/* Parse a unit name ("mm", "m", "um", "in"; "deg", "rad", "mrad"; a few
 * spelled-out synonyms). Return TWF_ERR_UNITS when not recognised. */
twf_status twf_length_unit_parse(const char *name, twf_length_unit *out);
twf_status twf_angle_unit_parse(const char *name, twf_angle_unit *out);
/* Canonical short name, as accepted by the parsers. */
const char *twf_length_unit_name(twf_length_unit u);
const char *twf_angle_unit_name(twf_angle_unit u);
/* SI value of one unit: metres per unit, radians per unit. */
double twf_length_unit_si(twf_length_unit u);
double twf_angle_unit_si(twf_angle_unit u);

/* ------------------------------------------------------------------ */
/* Rigid motions: SO(3), SE(3), se(3)                                  */
/* ------------------------------------------------------------------ */

typedef struct twf_pose {
  double R[3][3]; /* rotation, row-major */
  double p[3];    /* translation, metres */
} twf_pose;

void twf_pose_identity(twf_pose *T);
/* out = A * B. out may alias A or B. */
void twf_pose_mul(const twf_pose *A, const twf_pose *B, twf_pose *out);
/* out = T^-1. out may alias T. */
void twf_pose_inv(const twf_pose *T, twf_pose *out);
/* out = R x + p (transform a point). out may alias x. */
void twf_pose_apply(const twf_pose *T, const double x[3], double out[3]);
/* out = R x (rotate a vector). out may alias x. */
void twf_pose_rotate(const twf_pose *T, const double x[3], double out[3]);

/* hat(a): 3x3 skew matrix with hat(a) b = a x b. */
void twf_so3_hat(const double a[3], double A[3][3]);
/* hat(S): 4x4 matrix [[hat(w), v], [0, 0]] of a twist S = (w, v). */
void twf_se3_hat(const double S[6], double X[4][4]);
/* exp(hat(S) t) in closed form, exact for any S: revolute (|w| = 1),
 * prismatic (w = 0), general screws with pitch and any |w| (the angle is
 * |w| t); series expansions keep it accurate for tiny |w| t. */
void twf_se3_exp(const double S[6], double t, twf_pose *out);
/* Rotation part only: exp(hat(w) t). */
void twf_so3_exp(const double w[3], double t, double R[3][3]);
/* Logarithm: xi = (w, v) with exp(hat(xi)) = T and |w| in [0, pi].
 * Accurate near angle 0 and near pi. */
void twf_se3_log(const twf_pose *T, double xi[6]);
/* Rotation logarithm: w with exp(hat(w)) = R, |w| in [0, pi]. */
void twf_so3_log(const double R[3][3], double w[3]);
/* Ad_T = [[R, 0], [hat(p) R, R]] acting on (w, v). Row-major 6x6. */
void twf_se3_adjoint(const twf_pose *T, double Ad[6][6]);
/* out = Ad_T S without forming the matrix. out may alias S. */
void twf_se3_adjoint_apply(const twf_pose *T, const double S[6], double out[6]);
/* Revolute twist from unit axis w through point q: S = (w, -w x q). */
void twf_twist_revolute(const double w[3], const double q[3], double S[6]);
/* Prismatic twist from unit direction u: S = (0, u). */
void twf_twist_prismatic(const double u[3], double S[6]);

/* Unit quaternion (w x y z) conversions. twf_quat_to_rot normalises q.
 * twf_rot_to_quat returns w >= 0. */
void twf_quat_to_rot(const double q[4], double R[3][3]);
void twf_rot_to_quat(const double R[3][3], double q[4]);
/* Roll-pitch-yaw about fixed axes x, then y, then z:
 * R = Rz(yaw) Ry(pitch) Rx(roll), angles in radians. */
void twf_rpy_fixed_xyz_to_rot(double roll, double pitch, double yaw,
                              double R[3][3]);
/* Largest |(R^T R - I)_ij| and det(R): to test orthonormality. */
double twf_rot_orthonormality_error(const double R[3][3], double *det);
/* Angle of the rotation A^T B in radians, accurate for small angles. */
double twf_rot_angle_between(const double A[3][3], const double B[3][3]);

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
} twf_joint;

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

/* Spatial Jacobian with respect to the logged joint values, from the
 * prefixes of twf_model_fk: column i = scale_i Ad_{prefix[i]} S_i, so that
 * dT T^-1 = sum_i J_i dq_i. J is 6 x n_joints, row-major (J[r*n + i]). */
void twf_model_jacobian_spatial(const twf_model *m, const twf_pose *prefix,
                                double *J);

/* A Denavit-Hartenberg row, SI units. Standard (distal) DH:
 *   A_i = Rz(theta_i + q_i) Tz(d_i) Tx(a_i) Rx(alpha_i), joint axis z_(i-1);
 * modified (proximal, Craig) DH, where a and alpha are a_(i-1), alpha_(i-1):
 *   A_i = Rx(alpha_i) Tx(a_i) Rz(theta_i + q_i) Tz(d_i), joint axis z_i.
 * For a prismatic joint q adds to d instead of theta. */
typedef struct twf_dh_row {
  double a, alpha, d, theta;
  twf_joint_type type;
} twf_dh_row;

typedef enum twf_dh_convention {
  TWF_DH_STANDARD = 0,
  TWF_DH_MODIFIED = 1
} twf_dh_convention;

/* Convert a DH table into the joints and home pose of m (m->n_joints must
 * equal n). flange_in_last (may be NULL for identity) is the flange pose in
 * the last DH frame. Names and limits of m's joints are left unchanged;
 * scale and offset are reset to 1 and 0. */
twf_status twf_model_set_from_dh(twf_model *m, const twf_dh_row *rows,
                                 size_t n, twf_dh_convention conv,
                                 const twf_pose *flange_in_last,
                                 twf_error *err);

/* ------------------------------------------------------------------ */
/* Model files (INI, see twistfit-model(5))                            */
/* ------------------------------------------------------------------ */

/* Read a model file. On failure returns NULL and fills err with the file,
 * line and what to do. Recoverable oddities (an axis normalised within
 * 1e-3 of unit length, ...) go to warnings. */
twf_model *twf_model_read(const char *path, twf_warnings *warnings,
                          twf_error *err);
/* Write m in axis-and-point form with full precision (17 significant
 * digits) in m's declared units, metadata included. */
twf_status twf_model_write(const twf_model *m, FILE *out, twf_error *err);

/* ------------------------------------------------------------------ */
/* Rigid motions: additions (se3.c)                                    */
/* ------------------------------------------------------------------ */

/* Inverse of twf_rpy_fixed_xyz_to_rot: angles in radians with
 * R = Rz(yaw) Ry(pitch) Rx(roll), roll and yaw in [-pi, pi], pitch in
 * [-pi/2, pi/2]. R must be a rotation (not checked). At the gimbal lock
 * (|pitch| = pi/2, where only roll - yaw or roll + yaw is defined) yaw is
 * set to 0; the three angles always reproduce R to rounding. No pointer
 * may be NULL. */
void twf_rot_to_rpy_fixed_xyz(const double R[3][3], double *roll,
                              double *pitch, double *yaw);

/* ------------------------------------------------------------------ */
/* Error model: calibration parameters and their Jacobian              */
/* ------------------------------------------------------------------ */

/* Parameter groups (calibration-model.md, "Error parameters"). The enum
 * order is the default priority of the redundancy walk: the parameters a
 * user cares about first. */
typedef enum twf_group {
  TWF_GROUP_BASE = 0,    /* 6: B <- B exp(b), b in the robot base frame */
  TWF_GROUP_TARGETS,     /* 3 per target: t_k <- t_k + dt_k (flange frame) */
  TWF_GROUP_OFFSETS,     /* 1 per joint: theta_i = scale q_i + offset_i */
  TWF_GROUP_HOME,        /* 6: M <- M exp(m) */
  TWF_GROUP_SHIFTS,      /* 2 per revolute joint: translate the line along u1, u2 */
  TWF_GROUP_TILTS,       /* 2 per joint: rotate the line about u1, u2 through its point */
  TWF_GROUP_SCALE,       /* 1 per joint: scale_i <- scale_i + c_i (optional) */
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
 * "tilts", "scale". */
const char *twf_group_name(twf_group g);
/* Parse a group name (also "axes" = shifts + tilts) into a bit mask;
 * TWF_ERR_UNKNOWN when not recognised. */
twf_status twf_group_parse(const char *name, unsigned *mask);

typedef enum twf_param_kind {
  TWF_PARAM_LENGTH = 0, /* metres */
  TWF_PARAM_ANGLE,      /* radians */
  TWF_PARAM_RATIO       /* dimensionless (joint scale) */
} twf_param_kind;

typedef struct twf_param {
  twf_group group;
  long joint;      /* joint index (offsets, shifts, tilts, scale), else -1 */
  long target;     /* target index (targets), else -1 */
  int component;   /* base/home: 0-2 rotation x y z, 3-5 translation x y z;
                      targets: 0-2 x y z; shifts and tilts: 0 for u1, 1 for u2 */
  twf_param_kind kind;
  char name[TWF_NAME_MAX + 16]; /* stable, e.g. "base.rx", "home.tz",
                                   "j3.offset", "j2.tilt1", "j2.shift2",
                                   "T1.y", "j4.scale" */
} twf_param;

/* The error model of one kinematic model: its parameter list and a
 * workspace for one pose at a time (so one object per thread). Sized once
 * at allocation: no allocation happens per measurement. */
typedef struct twf_errmodel twf_errmodel;

/* Parameters of the groups in mask for model m (whose joint count and
 * target count are then fixed). NULL with err filled on failure. */
twf_errmodel *twf_errmodel_alloc(const twf_model *m, unsigned groups, twf_error *err);
void twf_errmodel_free(twf_errmodel *em);
size_t twf_errmodel_n_params(const twf_errmodel *em);
const twf_param *twf_errmodel_param(const twf_errmodel *em, size_t j);
/* Column scale of parameter j: the arm's reach (m) for angular parameters,
 * 1 for lengths, so that scaled columns are all in length units. */
double twf_errmodel_param_scale(const twf_errmodel *em, size_t j);
/* Recompute the axis-error directions u1, u2 from m's current joints. Call
 * after every fold (twf_errmodel_fold does it). */
void twf_errmodel_update(twf_errmodel *em, const twf_model *m);
/* The unit directions u1, u2 (base frame) of joint i's axis errors. */
void twf_errmodel_axis_basis(const twf_errmodel *em, size_t joint,
                             double u1[3], double u2[3]);

/* Evaluate one pose: forward kinematics at logged joint values q with the
 * base pose base_in_tracker, and the spatial twist (tracker frame) that
 * every parameter induces on the flange. flange_in_tracker (may be NULL)
 * receives the flange pose. Results stay in em until the next call. O(n p). */
void twf_errmodel_eval_pose(twf_errmodel *em, const twf_model *m,
                            const twf_pose *base_in_tracker, const double *q,
                            twf_pose *flange_in_tracker);
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
/* Fold a parameter step delta[p] (SI) into the model and base pose (a
 * retraction: axes stay unit, rotations orthonormal), then update em.
 * Targets whose offset was unknown become known. */
void twf_errmodel_fold(twf_errmodel *em, const double *delta, twf_model *m,
                       twf_pose *base_in_tracker);

/* ------------------------------------------------------------------ */
/* Registration                                                        */
/* ------------------------------------------------------------------ */

/* The campaign type (struct twf_campaign, see "Measurement campaigns") is
 * named by its tag so that this section does not depend on the order of
 * sections. */
struct twf_campaign;

/* Closed-form weighted rigid registration: the pose T = (R, p) minimising
 * sum_i w_i |R a_i + p - b_i|^2 (Arun, Huang and Blostein 1987, SVD of the
 * weighted cross-covariance of the centred clouds, with Umeyama's 1991
 * correction so that R is a rotation, never a reflection). Exact for
 * noise-free data; planar clouds are fine.
 *   a, b: n points each, row-major (a[3*i + c]), any common unit (metres in
 *         the library); T maps the frame of a into the frame of b.
 *   w:    n weights >= 0, or NULL for equal weights. Points of weight 0 do
 *         not count.
 * Returns TWF_OK; TWF_ERR_DEGENERATE when fewer than 3 points have positive
 * weight, or either cloud's points all coincide or all lie on one line
 * (judged by the singular values s1 >= s2 >= s3 of the weighted centred
 * cloud: coincident when its RMS spread is below 1e-9 of its RMS distance
 * from the origin, collinear when s2 < 1e-6 s1); the message says how many
 * more distinct, non-collinear points are needed. TWF_ERR_INVALID for a
 * negative or non-finite weight or NULL arrays, TWF_ERR_VALUE for a
 * non-finite coordinate. T is written only on success. */
twf_status twf_register_points(const double *a, const double *b,
                               const double *w, size_t n, twf_pose *T,
                               twf_error *err);

/* Options of twf_register_campaign: take twf_register_default_options()
 * and change fields. */
typedef struct twf_register_options {
  /* Nonzero: fit every measured target's offset (the given offsets are only
   * the start). Default 0. */
  int fit_all_offsets;
  /* NULL (default): a target whose model offset is known (offset_known) is
   * trusted and kept, the others are fitted. Otherwise n_targets flags,
   * nonzero = trusted: overrides offset_known. Borrowed for the call.
   * Ignored when fit_all_offsets is set. */
  const int *trusted;
  /* Nonzero (default): weight each measurement by 1/sigma^2. Rows without a
   * sigma (0) take sigma_default_m, or when that is 0 the mean of the
   * sigmas given; with no sigma at all every row weighs the same. */
  int use_sigma;
  double sigma_default_m;
  /* Stop when no predicted point moved by more than tol_m (metres, default
   * 1e-12) in one alternation, or after max_iter alternations (default
   * 200). */
  double tol_m;
  unsigned max_iter;
} twf_register_options;

twf_register_options twf_register_default_options(void);

/* What twf_register_campaign did. */
typedef struct twf_register_report {
  unsigned iterations;   /* registrations performed (each followed by an
                            offset solve when offsets are fitted) */
  int converged;         /* 1: the change fell below tol_m (always 1 when no
                            offset is fitted); 0: max_iter reached */
  double last_change_m;  /* largest move of a predicted point in the last
                            alternation, metres (0 without fitted offsets) */
  double rms_m;          /* RMS of |measured - predicted| over the fit-set
                            measurements after registration, metres,
                            unweighted: the "before calibration" figure */
  double max_m;          /* largest such error, metres */
  size_t n_used;         /* fit-set measurements used */
  size_t n_poses_used;   /* distinct poses among them */
  size_t n_fitted;       /* targets whose offset was fitted */
  /* Fitted targets whose offset is not fully separable from the base pose
   * on these poses: the flange orientations of their measurements are all
   * equal or all rotations about one axis (as on a four-axis arm), so one
   * component of the offset trades off against the base translation. The
   * alternation still returns a solution (that component stays near its
   * start); the caller should warn and fix the component before refining.
   * Judged only when no trusted target is measured in the fit set (a
   * trusted target pins the base). */
  size_t n_inseparable;
  long first_inseparable; /* index of the first such target, -1 if none */
} twf_register_report;

/* Nonzero when target k's offset is fitted under options (NULL: defaults)
 * for model: fit_all_offsets, else !trusted[k], else !offset_known. The
 * least-squares refinement frees exactly these targets. */
int twf_register_target_is_fitted(const twf_model *model,
                                  const twf_register_options *options,
                                  size_t k);

/* Fill offsets[3 * n_targets] (metres, flange frame) with the model's
 * target offsets, the flange origin (0, 0, 0) for targets whose offset is
 * unknown: the default start of twf_register_campaign. */
void twf_register_offsets_init(const twf_model *model, double *offsets);

/* Register a campaign to the instrument: the first step of every job.
 * With model's kinematics (twf_model_fk), the predicted target points in
 * the base frame, F_j t_k, are registered to the measured ones y in the
 * tracker frame by twf_register_points, using only the fit set
 * (TWF_SET_FIT) and weights from sigma (see options). When some offsets
 * are fitted, registration alternates with the linear least-squares solve
 * for those offsets given B (per target, min over t of
 * sum w |B F_j t - y_j|^2; its normal matrix is (sum w) I because every
 * R_Fj is a rotation, so it never fails), until the predicted points move by
 * at most tol_m or max_iter alternations. Each step lowers the weighted sum
 * of squares (block coordinate descent), but convergence is linear: the
 * report says whether it converged; not converging is not an error.
 *   model:           borrowed, unchanged.
 *   campaign:        borrowed; its joint count must equal the model's.
 *                    6-D rows enter only with their position: orientations
 *                    are ignored here (the refinement uses them).
 *   options:         NULL for twf_register_default_options().
 *   base_in_tracker: out, B (robot base frame to tracker frame).
 *   target_offsets:  in/out, n_targets x 3, metres, flange frame. In: the
 *                    trusted offsets and the start of the fitted ones (fill
 *                    with twf_register_offsets_init for the default, which
 *                    starts unknown targets at the flange origin). Out: the
 *                    fitted ones replaced; trusted and unmeasured targets
 *                    unchanged.
 *   report:          out, may be NULL.
 * The function stops after the alternation. The caller refines B and the
 * fitted offsets jointly with the least-squares solver (parameter groups
 * base and targets, the targets of twf_register_target_is_fitted), starting
 * from these values; the refined residual then replaces report->rms_m as
 * the "before" figure.
 * Returns TWF_OK; TWF_ERR_DEGENERATE when the fit set has fewer than 3
 * measurements or its predicted (or measured) points coincide or lie on one
 * line: the message says how many more distinct poses are needed and, when
 * the first registration used the flange origin for targets without a
 * trusted offset, says so (a flange origin that barely moves, e.g. only
 * the wrist turned). TWF_ERR_MISSING when a fitted target has check rows
 * but no fit row; TWF_ERR_INVALID for NULL arguments, mismatched joint
 * counts or measurement indices out of range; TWF_ERR_VALUE for non-finite
 * inputs; TWF_ERR_NOMEM. On failure the outputs are left unchanged. */
twf_status twf_register_campaign(const twf_model *model,
                                 const struct twf_campaign *campaign,
                                 const twf_register_options *options,
                                 twf_pose *base_in_tracker,
                                 double *target_offsets,
                                 twf_register_report *report,
                                 twf_error *err);

/* ------------------------------------------------------------------ */
/* Accuracy figures                                                    */
/* ------------------------------------------------------------------ */

/* Per-measurement errors of a model on a campaign, measured - model:
 *   pos_err[3 * i + c]: position error of measurement i, tracker frame,
 *                       metres (y_measured - B F(q) t_k).
 *   angle_err[i]:       for a 6-D row, the angle of R_meas R_model^T in
 *                       radians (R_model = R_B R_F, the flange orientation
 *                       in the tracker frame); NaN for point rows.
 * Either output may be NULL (not both); both are caller-provided arrays of
 * campaign->n_meas (x 3) entries. target_offsets: n_targets x 3 metres,
 * flange frame, or NULL for the model's (then every measured target must
 * have offset_known, else TWF_ERR_MISSING). Every row is computed, fit and
 * check alike. Returns TWF_OK, TWF_ERR_INVALID, TWF_ERR_MISSING or
 * TWF_ERR_NOMEM. */
twf_status twf_accuracy_residuals(const twf_model *model,
                                  const twf_pose *base_in_tracker,
                                  const double *target_offsets,
                                  const struct twf_campaign *campaign,
                                  double *pos_err, double *angle_err,
                                  twf_error *err);

/* Summary statistics of a set of error lengths (metres or radians). */
typedef struct twf_stats {
  size_t count;
  double mean;
  double rms;       /* sqrt(mean of squares) */
  double p95;       /* 95th percentile, twf_accuracy_percentile(., 0.95) */
  double max;
  size_t max_index; /* where the max is (first of equal maxima): an index
                       into the values given, or in a summary the
                       campaign's measurement index */
} twf_stats;          /* count 0: every figure NaN, max_index SIZE_MAX */

/* Percentile p in [0, 1] of sorted[0..n) (ascending), Hyndman and Fan
 * (1996) definition 7, numpy's default: with h = (n - 1) p, linear
 * interpolation between the order statistics x[floor h] and x[floor h + 1]
 * (0-based). NaN when n = 0 or p is outside [0, 1]. */
double twf_accuracy_percentile(const double *sorted, size_t n, double p);

/* Statistics of values[0..n) (not modified; n may be 0). TWF_ERR_VALUE for
 * a NaN, TWF_ERR_NOMEM, TWF_ERR_INVALID for NULL. O(n log n). */
twf_status twf_accuracy_stats(const double *values, size_t n, twf_stats *out,
                              twf_error *err);

/* One of the worst poses: the largest position error among its
 * measurements. */
typedef struct twf_accuracy_worst {
  size_t pose;     /* campaign pose index: its id is campaign->pose_ids[pose] */
  size_t meas;     /* campaign measurement index with that error */
  double error_m;  /* its length, metres */
} twf_accuracy_worst;

/* Figures per set, indexed by the set value: [TWF_SET_FIT] and
 * [TWF_SET_CHECK]. Allocated by twf_accuracy_summarize, released with
 * twf_accuracy_summary_free. */
typedef struct twf_accuracy_summary {
  size_t n_targets;
  twf_stats position[2];           /* |pos_err| over all targets, metres */
  twf_stats orientation[2];        /* angle_err over the 6-D rows, radians */
  twf_stats *target_position;      /* [2 * k + set]: target k only */
  twf_stats *target_orientation;   /* [2 * k + set] */
  size_t n_worst[2];               /* at most k_worst */
  twf_accuracy_worst *worst[2];    /* largest error first (ties: lower pose
                                      index first) */
} twf_accuracy_summary;

/* Summarise the residuals of twf_accuracy_residuals (pos_err required,
 * angle_err may be NULL) for campaign, whose target indices must be below
 * n_targets: count, mean, RMS, 95th percentile and max of the error
 * lengths per target and overall, for the fit and check sets separately,
 * and the k_worst poses of each set. NULL with err filled on failure
 * (TWF_ERR_INVALID, TWF_ERR_VALUE for a non-finite position error,
 * TWF_ERR_NOMEM). O(n log n). */
twf_accuracy_summary *
twf_accuracy_summarize(const struct twf_campaign *campaign, size_t n_targets,
                       const double *pos_err, const double *angle_err,
                       size_t k_worst, twf_error *err);
void twf_accuracy_summary_free(twf_accuracy_summary *s);

/* ISO 9283:1998 pose accuracy (7.2.1) and pose repeatability (7.2.3) where
 * a campaign revisits a commanded pose. */
typedef struct twf_iso9283_options {
  /* Poses are the same commanded pose when every joint value agrees within
   * joint_tol (rad or m; default 1e-6), chained joint by joint (single
   * linkage: see joint_spread). */
  double joint_tol;
  /* The same for prismatic joints, m (0, the default: joint_tol). */
  double joint_tol_prismatic;
  size_t min_visits; /* visits needed per target, default and minimum 2 */
  int set;           /* -1 (default): all rows; else TWF_SET_FIT or
                        TWF_SET_CHECK only */
} twf_iso9283_options;

twf_iso9283_options twf_iso9283_default_options(void);

/* Figures of one target at one commanded pose, all metres, tracker frame.
 * With x_j the n attained (measured) positions and x_c the commanded one:
 *   barycentre  xbar = sum x_j / n
 *   AP_P        |xbar - x_c|, components ap = xbar - x_c      (7.2.1)
 *   RP_l        lbar + 3 S_l, l_j = |x_j - xbar|, lbar = mean l_j,
 *               S_l = sqrt(sum (l_j - lbar)^2 / (n - 1))      (7.2.3) */
typedef struct twf_iso9283_entry {
  size_t group;          /* commanded-pose number, 0-based, in order of the
                            first visit */
  size_t first_pose;     /* campaign pose index of the first visit */
  size_t n_poses;        /* visits of this commanded pose */
  size_t target;         /* model target index */
  size_t n;              /* attained positions of this target */
  double commanded[3];   /* model prediction at the mean joint values of
                            the visits, with the given base and offsets */
  double barycentre[3];
  double ap[3];          /* AP_x, AP_y, AP_z */
  double ap_p;           /* AP_P */
  double l_mean;         /* lbar */
  double s_l;            /* S_l */
  double rp;             /* RP_l */
  double joint_spread;   /* largest (max - min) of one joint over the
                            visits, rad or m: above joint_tol only when
                            single linkage chained nearby poses */
} twf_iso9283_entry;

typedef struct twf_iso9283 {
  size_t n_groups;             /* commanded poses with at least one entry */
  size_t n_entries;
  twf_iso9283_entry *entries;  /* by group, then target; NULL when none */
} twf_iso9283;

/* Group the campaign's poses by commanded joint values (sorting joint by
 * joint, O(n_joints n log n)) and compute the figures for every group and
 * target with at least min_visits measurements. The commanded position is
 * the model's prediction with base_in_tracker and target_offsets (NULL:
 * the model's, which must then be known). options NULL for the defaults.
 * Returns a result to free with twf_iso9283_free (n_entries 0 when no pose
 * repeats), or NULL with err filled (TWF_ERR_INVALID, TWF_ERR_MISSING,
 * TWF_ERR_NOMEM). */
twf_iso9283 *twf_accuracy_iso9283(const twf_model *model,
                                  const twf_pose *base_in_tracker,
                                  const double *target_offsets,
                                  const struct twf_campaign *campaign,
                                  const twf_iso9283_options *options,
                                  twf_error *err);
void twf_iso9283_free(twf_iso9283 *r);

/* ------------------------------------------------------------------ */
/* Model files: limits and return codes (modelfile.c)                  */
/* ------------------------------------------------------------------ */

/* Longest line of a model file, in bytes, not counting the line end: one
 * less than what libinih's 200-byte line buffer holds with its newline and
 * NUL. The reader refuses longer lines (inih would split them silently);
 * the writer never writes one.
 *
 * twf_model_read (declared above) returns NULL with err->status:
 *   TWF_ERR_IO         the file cannot be opened or read (line 0);
 *   TWF_ERR_SYNTAX     a malformed line, section header or name, a line
 *                      longer than TWF_MODEL_LINE_MAX, joints in different
 *                      forms, [home] in a DH file or [flange] in an
 *                      axis-and-point file;
 *   TWF_ERR_UNKNOWN    an unknown section, key or joint type;
 *   TWF_ERR_DUPLICATE  a key, section, joint or target name given twice,
 *                      two rotation forms or two joint geometries;
 *   TWF_ERR_MISSING    no [robot], no joint, no [home], a missing type,
 *                      axis, point, position or rotation, an empty file;
 *   TWF_ERR_VALUE      a value that is not a finite number, a wrong count,
 *                      a zero or non-unit axis (beyond 1e-3), min > max,
 *                      a zero scale, a rotation not orthonormal to 1e-6 or
 *                      a reflection, a quaternion norm beyond 1e-6 of 1;
 *   TWF_ERR_UNITS      an unknown length_unit or angle_unit;
 *   TWF_ERR_NOMEM      out of memory.
 * err->line is the 1-based line concerned (the section header for a
 * missing key, 0 for what concerns the whole file), err->column the
 * 1-based field of a bad number, else 0. warnings (NULL: discard) receive
 * axes normalised from within 1e-3 of unit length.
 *
 * twf_model_write (declared above) returns TWF_OK, TWF_ERR_INVALID when m
 * cannot be written faithfully (a non-finite value, an invalid or repeated
 * name, a revolute twist with screw pitch, a home rotation that is not
 * one, a metadata line longer than TWF_MODEL_LINE_MAX), TWF_ERR_IO when
 * the stream fails, TWF_ERR_NOMEM. Nothing is written unless m passed the
 * checks. Metadata values are put on one line: control characters (line
 * ends included) become spaces, blanks before ';' are dropped so that the
 * reader does not take the rest for a comment, and the ends are trimmed. */
#define TWF_MODEL_LINE_MAX 198

/* ------------------------------------------------------------------ */
/* Measurement campaigns (CSV, see twistfit-data(5))                   */
/* ------------------------------------------------------------------ */

/* Which use a measurement is for: fitting the model, or the held-out check
 * set that the solver never sees (its accuracy is reported separately). */
typedef enum twf_meas_set {
  TWF_SET_FIT = 0,
  TWF_SET_CHECK = 1
} twf_meas_set;

/* One measured target at one pose. */
typedef struct twf_measurement {
  size_t pose;         /* index into the campaign's poses */
  size_t target;       /* index of the target in the model's targets */
  double pos[3];       /* measured target position, metres, tracker frame */
  /* 1 for a 6-D row: quat is the orientation of the flange frame in the
   * tracker frame (the rotation part of the flange pose in the tracker). */
  int has_orientation;
  double quat[4];      /* unit quaternion w x y z; (1 0 0 0) when absent */
  double sigma;        /* standard deviation of each coordinate, metres;
                          0 = not given (the caller picks a default) */
  twf_meas_set set;
  long line;           /* source line (in the points file for the two-file
                          form), 0 when not read from a file */
} twf_measurement;

/* A campaign: the poses the arm was driven to, with the joint values the
 * controller logged, and the measurements taken there. Poses keep the order
 * of their first appearance in the file (the joints file for the two-file
 * form); measurements keep the order of the rows. */
typedef struct twf_campaign {
  size_t n_joints;                /* = the model's n_joints, in model order */
  size_t n_poses;
  char (*pose_ids)[TWF_NAME_MAX]; /* n_poses ids, NUL-terminated, unique */
  double *q;          /* n_poses x n_joints logged joint values, SI (rad for
                         revolute, m for prismatic), row-major q[p*n_joints+j] */
  long *pose_lines;   /* n_poses source lines (first row of the pose; in the
                         joints file for the two-file form), 0 if none */
  size_t n_meas;
  twf_measurement *meas;
  int has_orientation_any; /* some measurement has has_orientation */
} twf_campaign;

/* How to read a campaign; get the defaults from
 * twf_campaign_default_options() and change fields. */
typedef struct twf_campaign_options {
  /* 1: read lengths (angles) in length_unit (angle_unit) whatever the file
   * declares (a differing declaration gives a warning); 0: use the file's
   * "# units:" line, else millimetres (degrees). */
  int length_from_caller;
  int angle_from_caller;
  twf_length_unit length_unit; /* default TWF_LENGTH_MM */
  twf_angle_unit angle_unit;   /* default TWF_ANGLE_DEG */
  /* 0: joint values outside the model's limits give one warning per joint;
   * 1: they are an error (TWF_ERR_LIMIT) at the first such value. */
  int limits_are_errors;
  /* Slack on the limits, SI of the joint (rad or m); default 1e-9. */
  double limit_tolerance;
} twf_campaign_options;

twf_campaign_options twf_campaign_default_options(void);

/* A zero-filled campaign with room for n_poses poses and n_meas
 * measurements (n_poses and n_meas set; quaternions (1 0 0 0); set fit),
 * for simulators and tests. NULL when out of memory. */
twf_campaign *twf_campaign_alloc(size_t n_joints, size_t n_poses,
                                 size_t n_meas);
void twf_campaign_free(twf_campaign *c);

/* Read the one-file form: one row per measurement with pose id, target,
 * one column per joint of m, x y z, optional qw qx qy qz, sigma, set.
 * m (borrowed for the call) gives the joint names, types and limits and
 * the target names. opt may be NULL for the defaults; w may be NULL.
 * Returns the campaign (caller frees) or NULL with err filled: file, line,
 * column (1-based field, its name in the message) and a hint. Statuses:
 * TWF_ERR_IO (cannot read), TWF_ERR_SYNTAX (quoting, field count, units
 * line), TWF_ERR_MISSING (empty file, no data, missing column or field),
 * TWF_ERR_UNKNOWN (column or target), TWF_ERR_DUPLICATE (column, pose and
 * target), TWF_ERR_VALUE (number, quaternion, sigma, set, a pose repeated
 * with other joint values), TWF_ERR_UNITS, TWF_ERR_LIMIT (only with
 * limits_are_errors), TWF_ERR_INVALID (arguments), TWF_ERR_NOMEM. */
twf_campaign *twf_campaign_read(const char *path, const twf_model *m,
                                const twf_campaign_options *opt,
                                twf_warnings *w, twf_error *err);

/* Read the two-file form: joints_path holds pose id, one column per joint
 * and optionally set (per pose); points_path holds pose id, target, x y z,
 * optional quaternion, sigma and set (per measurement, it takes precedence
 * over the pose's). Joined on pose id: points whose pose the joints file
 * lacks, and poses without points, are errors (TWF_ERR_MISSING) that list
 * the ids. Otherwise as twf_campaign_read; each file may declare its own
 * units. */
twf_campaign *twf_campaign_read_pair(const char *joints_path,
                                     const char *points_path,
                                     const twf_model *m,
                                     const twf_campaign_options *opt,
                                     twf_warnings *w, twf_error *err);

/* Read a joints file alone (the first file of the two-file form: pose id,
 * one column per joint, optional set): a campaign of poses without
 * measurements (n_meas = 0, meas may be NULL), e.g. to evaluate forward
 * kinematics at logged poses. Units, limits, errors and warnings as for
 * twf_campaign_read_pair. */
twf_campaign *twf_campaign_read_joints(const char *joints_path,
                                       const twf_model *m,
                                       const twf_campaign_options *opt,
                                       twf_warnings *w, twf_error *err);

/* Write c in the one-file form, in the given units (declared in a
 * "# units:" line), numbers with 17 significant digits so that reading
 * back gives the same values to rounding. Rows are grouped by pose in pose
 * order (measurement order kept within a pose), so the poses read back in
 * the same order. Every pose needs at least one measurement and indices
 * must be in range (else TWF_ERR_INVALID); TWF_ERR_IO on a write error. */
twf_status twf_campaign_write(const twf_campaign *c, const twf_model *m,
                              twf_length_unit length_unit,
                              twf_angle_unit angle_unit, FILE *out,
                              twf_error *err);

/* ------------------------------------------------------------------ */
/* As-built geometry against nominal                                   */
/* ------------------------------------------------------------------ */

/* Deviation of one as-built joint line from its nominal line, both in the
 * datum base frame (see twf_asbuilt_align). */
typedef struct twf_joint_deviation {
  /* Lines are compared at logged zero (q = 0, so theta = offset), where
   * the data determine them whichever redundant parameters were fixed. */
  double angle_rad;    /* angle between the as-built and nominal directions */
  double distance_m;   /* distance from the nominal reference point to the
                          as-built line (revolute); 0 for prismatic joints,
                          whose line position has no meaning */
  /* Rotation about the as-built line that carries a downstream feature of
   * the nominal arm (a later joint direction, else a later line's point,
   * else with full-pose data a flange axis) onto the as-built one, rad:
   * the order-independent joint offset. NaN where no feature shows it (the
   * last joint measured with points only: the targets absorb it) and for
   * prismatic joints. */
  double offset;
  double offset_raw;   /* as-built minus nominal offset parameter, rad or m:
                          depends on which redundant parameters were fixed */
  double scale;        /* as-built minus nominal joint scale */
  double direction[3]; /* as-built unit direction, datum frame */
  double point[3];     /* as-built line's point closest to the nominal
                          reference point, datum frame, m */
} twf_joint_deviation;

typedef struct twf_asbuilt_comparison {
  twf_pose datum;          /* G applied to the as-built model: its old base
                              frame expressed in the datum frame */
  double datum_rms_m;      /* RMS distance of the aligned line points */
  int settled;             /* 0: the datum rule did not reach its fixed point
                              (the lines leave the frame partly free) */
  size_t n_joints;
  twf_joint_deviation *joints; /* owned; free with twf_asbuilt_comparison_clear */
  /* The flange at logged zero. Its rotation is determined by full-pose
   * data only, its position only when the target offsets were not fitted
   * (they trade off against it): the calibration sets what the data cannot
   * tell to NaN. */
  double home_angle_rad;   /* rotation between the as-built and nominal flange at logged zero */
  double home_distance_m;  /* distance between their origins, m */
  size_t n_targets;
  /* owned; n_targets x 3: as-built minus nominal position of each target
   * at logged zero, datum frame, m (NaN where the nominal offset is
   * unknown): determined by point data too */
  double *target_change_m;
} twf_asbuilt_comparison;

void twf_asbuilt_comparison_clear(twf_asbuilt_comparison *c);

/* The datum rule: find the rigid motion G that best aligns the as-built
 * joint lines at logged zero with the nominal ones (least squares over two
 * points per revolute line, the one nearest the nominal reference point and
 * one a quarter of the reach along the line, re-chosen until they settle;
 * when every revolute line is parallel, the targets at logged zero are
 * added to pin the translation along them), re-express asbuilt in that
 * frame (S <- Ad_G S, points <- G q, M <- G M) and base_in_tracker <-
 * B G^-1, so that every prediction is unchanged, then compare line by line.
 * full_pose: the data had 6-D rows (a flange axis may then show the last
 * joint's offset). The result does not depend on which redundant
 * parameters the calibration fixed. nominal and asbuilt must have the same
 * joints and targets. out is filled (clear it with
 * twf_asbuilt_comparison_clear). */
twf_status twf_asbuilt_align(const twf_model *nominal, twf_model *asbuilt,
                             twf_pose *base_in_tracker, int full_pose,
                             twf_asbuilt_comparison *out, twf_error *err);

/* ------------------------------------------------------------------ */
/* Calibration: Levenberg-Marquardt fit of the error model             */
/* ------------------------------------------------------------------ */

/* Outlier screen after a first fit (calibration-model.md "Outliers"). */
typedef enum twf_robust {
  TWF_ROBUST_OFF = 0,  /* every measurement keeps full weight */
  TWF_ROBUST_DROP,     /* measurements beyond the threshold are dropped (listed) */
  TWF_ROBUST_HUBER,    /* Huber weights min(1, k/u) */
  TWF_ROBUST_CAUCHY    /* Cauchy weights 1 / (1 + (u/k)^2) */
} twf_robust;

/* Why the solver stopped. */
typedef enum twf_stop {
  TWF_STOP_NONE = 0,    /* did not run */
  TWF_STOP_STEP,        /* the scaled step fell below step_tol_m: converged */
  TWF_STOP_GRADIENT,    /* the scaled gradient vanished: converged */
  TWF_STOP_COST,        /* no step reduces the cost any more (at rounding level): converged */
  TWF_STOP_MAXITER,     /* iteration limit reached: not converged */
  TWF_STOP_DIVERGED,    /* the cost became non-finite or the damping exploded */
  TWF_STOP_SINGULAR     /* the damped normal system could not be solved */
} twf_stop;

/* Stable names: "none", "step", "gradient", "cost", "max-iterations",
 * "diverged", "singular". */
const char *twf_stop_name(twf_stop s);
/* 1 for the converged stop reasons. */
int twf_stop_converged(twf_stop s);

typedef struct twf_solve_report {
  int iterations;     /* accepted and rejected trial steps */
  double cost_start;  /* 0.5 sum of squared weighted residuals, before */
  double cost_end;    /* after */
  twf_stop stop;
} twf_solve_report;

typedef struct twf_calib_options {
  unsigned groups;                        /* TWF_GROUP_BIT mask; default TWF_GROUPS_GEOMETRIC */
  twf_group priority[TWF_GROUP_COUNT];    /* redundancy walk order of the groups */
  double sigma_length;  /* m: standard deviation of one coordinate where a row gives none
                           (0: unknown, estimated a posteriori from the residuals) */
  double sigma_angle;   /* rad: of one orientation component (0: sigma_length / reach) */
  twf_robust robust;    /* default TWF_ROBUST_DROP */
  double robust_threshold; /* in robust standard deviations of the error length (default 5) */
  double check_fraction;   /* fraction of poses held out at random as check data (default 0) */
  unsigned long long seed; /* for the held-out fraction and the synthetic pose set */
  int max_iterations;      /* LM trial steps per fit (default 100) */
  double step_tol_m;       /* converged when every scaled step is below this (default 1e-10 m) */
  double redundancy_tol;   /* relative independent part to keep a column (default 1e-6) */
  size_t synthetic_poses;  /* poses of the rich set for structural redundancy (0: automatic) */
  double weak_ratio;       /* weak when the scaled predicted std exceeds weak_ratio * sigma (default 5) */
  int accept_large;        /* 0 (default): refuse results beyond any calibration (noise over
                              1 mm, a joint line over 5 deg or 50 mm from the model's) */
} twf_calib_options;

/* Where the sigma of the covariance came from. */
typedef enum twf_sigma_source {
  TWF_SIGMA_GIVEN = 0,     /* the caller's sigma_length */
  TWF_SIGMA_FROM_ROWS,     /* the rows' own sigmas (their mean where a row gives none) */
  TWF_SIGMA_ESTIMATED      /* estimated a posteriori from the fit residuals */
} twf_sigma_source;

twf_calib_options twf_calib_default_options(void);

typedef enum twf_param_status {
  TWF_PARAM_KEPT = 0,        /* estimated */
  TWF_PARAM_FIXED_STRUCTURAL,/* redundant for any pose set of this arm and measurement kind */
  TWF_PARAM_FIXED_DATA       /* exactly dependent on the given poses (e.g. a joint never moved) */
} twf_param_status;

#define TWF_EXPLAIN_MAX 3
typedef struct twf_param_result {
  twf_param param;
  twf_param_status status;
  double value;    /* total change from the starting model, SI (m, rad, ratio) */
  double std;      /* predicted standard deviation, SI; NAN when fixed */
  int weak;        /* 1: poorly determined by these poses (see warnings) */
  /* For a fixed parameter: the kept parameters whose columns explain it,
   * largest scaled least-squares coefficient first. */
  size_t n_explain;
  size_t explain[TWF_EXPLAIN_MAX];
  double explain_coef[TWF_EXPLAIN_MAX];
} twf_param_result;

typedef struct twf_correlation {
  size_t a, b;  /* parameter indices */
  double rho;   /* correlation coefficient */
} twf_correlation;

typedef struct twf_outlier {
  size_t meas;      /* measurement index in the campaign */
  double error_m;   /* position error length at the first fit, m */
  double score;     /* error length in robust standard deviations */
  double weight;    /* final weight: 0 dropped, below 1 down-weighted */
} twf_outlier;

#define TWF_CORRELATIONS_MAX 8

typedef struct twf_calib_result {
  twf_model *asbuilt;         /* owned: the calibrated model (datum frame, see DEVELOPERS.md) */
  twf_pose base_in_tracker;   /* fitted base pose in the tracker frame */
  twf_pose base_before;       /* registered base pose of the starting model */
  twf_model *registered;      /* owned: the starting model with registered target offsets */
  size_t n_params;
  twf_param_result *params;
  size_t n_kept, n_fixed_structural, n_fixed_data, n_weak;
  size_t structural_count;    /* independent parameters of the rich synthetic set */
  double condition_number;    /* of the scaled, weighted Jacobian of the kept columns */
  double observability[4];    /* O1 (Borm-Menq), O2 (inverse condition), O3 (min singular value),
                                 O4 (noise amplification), Sun and Hollerbach 2008 */
  size_t n_correlations;
  twf_correlation correlations[TWF_CORRELATIONS_MAX];
  size_t n_outliers;
  twf_outlier *outliers;
  size_t n_meas;
  twf_meas_set *meas_set;     /* effective set of each measurement (held-out fraction applied) */
  double *residual_before;    /* n_meas x 3, measured - model, m, tracker frame */
  double *residual_after;
  double *rot_before;         /* n_meas orientation error angles, rad (NAN for point rows) */
  double *rot_after;
  twf_solve_report registration;  /* refinement of base and targets on the starting model */
  twf_solve_report solve;         /* the calibration fit (last robust round) */
  int robust_rounds;
  double sigma_length;        /* sigma used for the covariance, m */
  twf_sigma_source sigma_source;
  size_t n_fit_meas, n_check_meas, n_fit_poses;
  double *joint_range;        /* n_joints: range of each joint over the fit poses, SI */
  unsigned char *target_in_fit; /* n_targets: 1 for a target with fit-set rows (only those are
                                   determined) */
  twf_asbuilt_comparison comparison; /* as-built lines against the starting model's */
} twf_calib_result;

void twf_calib_result_free(twf_calib_result *r);

/* Calibrate: register start to the campaign (base pose and the offsets of
 * targets declared without one), refine, then fit the chosen groups by
 * Levenberg-Marquardt with redundant parameters fixed, screen outliers,
 * and return everything a report shows. start is not modified. On failure
 * returns the status with err filled and *out NULL. */
twf_status twf_calibrate(const twf_model *start, const twf_campaign *c,
                         const twf_calib_options *opt, twf_calib_result **out,
                         twf_warnings *warnings, twf_error *err);

/* Options of twf_refine_base: take twf_refine_default_options(). */
typedef struct twf_refine_options {
  double sigma_length;      /* m, where rows give none (0: 0.1 mm; only weights matter) */
  int screen;               /* 1 (default): drop gross errors as the calibration does */
  double robust_threshold;  /* in robust standard deviations (default 5) */
} twf_refine_options;

twf_refine_options twf_refine_default_options(void);

/* Least-squares refinement of the base pose and of the offsets of the
 * targets flagged in fit_target (n_targets flags, NULL: none) for a fixed
 * model, on the fit set, after the closed-form registration. m's target
 * offsets are updated in place. With screening, fit rows beyond the robust
 * threshold (1.4826 MAD of the residual components) are left out and the
 * refinement repeated; excluded (n_meas flags, may be NULL) receives 1 for
 * each. Offset components the poses cannot separate from the base are
 * fixed at their start. */
twf_status twf_refine_base(twf_model *m, const twf_campaign *c,
                           const unsigned char *fit_target, const twf_refine_options *opt,
                           twf_pose *base_in_tracker, twf_solve_report *report,
                           unsigned char *excluded, twf_error *err);

/* ------------------------------------------------------------------ */
/* Simulation: synthetic campaigns and perturbed models                */
/* ------------------------------------------------------------------ */

typedef struct twf_simulate_options {
  size_t n_poses;          /* default 100 */
  double sigma_m;          /* Gaussian noise per coordinate, m (default 0) */
  int orientation;         /* 1: 6-D rows (flange orientation) too */
  double sigma_rad;        /* orientation noise per axis, rad */
  double check_fraction;   /* fraction of poses tagged as check data */
  double limit_margin;     /* fraction of each joint's span kept clear of its limits (default 0.05) */
  const unsigned char *targets; /* n_targets flags of targets to measure, NULL: every known one */
  unsigned long long seed; /* default 1 */
} twf_simulate_options;

twf_simulate_options twf_simulate_default_options(void);

/* Random joint values within m's limits less margin (a fraction of each
 * span), uniform; +-pi or +-0.1 m for joints without limits. state is the
 * caller's seeded generator state. */
void twf_simulate_joints(const twf_model *m, double margin,
                         unsigned long long *state, double *q);

/* A campaign measured on the arm truth seen from the tracker at
 * base_in_tracker: random poses, every selected target with a known offset
 * at every pose, Gaussian noise. Pose ids P0001, P0002, ... NULL with err
 * filled on failure. */
twf_campaign *twf_simulate_campaign(const twf_model *truth,
                                    const twf_pose *base_in_tracker,
                                    const twf_simulate_options *opt,
                                    twf_error *err);

/* Standard deviations of a random perturbation of a model (SI). */
typedef struct twf_perturbation {
  double tilt_rad;    /* axis tilts and home rotation */
  double shift_m;     /* axis shifts, home translation, prismatic offsets */
  double offset_rad;  /* revolute joint offsets */
  double target_m;    /* target offsets */
  double scale;       /* joint scale */
} twf_perturbation;

/* Perturb m in place with seeded Gaussian errors of the given sizes: the
 * "true" arm of a synthetic campaign. */
void twf_model_perturb(twf_model *m, const twf_perturbation *mag,
                       unsigned long long seed);

/* ------------------------------------------------------------------ */
/* Base pose files (see twistfit-model(5), "BASE POSE FILES")          */
/* ------------------------------------------------------------------ */

/* Read a base pose file: the robot base frame in the tracker frame, one
 * [base] section with length_unit, position and quaternion_wxyz. NULL
 * rules and errors as twf_model_read (file, line and a hint). */
twf_status twf_base_read(const char *path, twf_pose *base_in_tracker,
                         twf_error *err);
/* Write base_in_tracker in that form with 17 significant digits, position
 * in length unit u; comment (may be NULL) becomes a leading ';' line. */
twf_status twf_base_write(const twf_pose *base_in_tracker, twf_length_unit u,
                          const char *comment, FILE *out, twf_error *err);

/* ------------------------------------------------------------------ */
/* Version                                                             */
/* ------------------------------------------------------------------ */

/* The library's version string, e.g. "0.1.0". */
const char *twf_version(void);

#ifdef __cplusplus
}
#endif

#endif /* TWISTFIT_H */
