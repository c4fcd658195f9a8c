/* twistfit/se3.h: rigid motions: SO(3), SE(3), se(3).
 * Part of the public interface of libtwistfit; include <twistfit.h>,
 * whose opening comment states the rules (units, frames, ownership,
 * errors) that hold for every declaration here. */
#ifndef TWISTFIT_SE3_H
#define TWISTFIT_SE3_H

#include "twistfit/common.h"

#ifdef __cplusplus
extern "C" {
#endif

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
/* twf_se3_exp for a joint's twist, whose rotation part is a unit vector
 * (revolute, or a screw with pitch) or zero (prismatic): the same closed
 * forms without the norm and the divisions, to rounding the same pose (a
 * rotation part of any other length takes twf_se3_exp). */
void twf_se3_exp_joint(const double S[6], double t, twf_pose *out);
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
/* Euler angles                                                        */
/* ------------------------------------------------------------------ */

/* Three angles (a[0], a[1], a[2]) in radians, each a right-handed rotation
 * (counter-clockwise seen from the axis' tip looking back at the origin):
 *   TWF_EULER_RPY  roll, pitch, yaw about the fixed x, y, z axes, in that
 *                  order: R = Rz(yaw) Ry(pitch) Rx(roll) (SciPy's
 *                  extrinsic "xyz"; twf_rpy_fixed_xyz_to_rot)
 *   TWF_EULER_ZYX  intrinsic Z-Y'-X'': a about z, then b about the new y,
 *                  then c about the newest x: R = Rz(a) Ry(b) Rx(c); the
 *                  matrix of RPY with the angles in reverse order (SciPy's
 *                  intrinsic "ZYX")
 *   TWF_EULER_ZYZ  intrinsic Z-Y'-Z'': R = Rz(a) Ry(b) Rz(c) (SciPy's
 *                  intrinsic "ZYZ") */
typedef enum twf_euler_convention {
  TWF_EULER_RPY = 0,
  TWF_EULER_ZYX = 1,
  TWF_EULER_ZYZ = 2
} twf_euler_convention;

/* R from the three angles of convention c (above). */
void twf_euler_to_rot(twf_euler_convention c, const double a[3],
                      double R[3][3]);
/* The angles of convention c with R = twf_euler_to_rot(c, a): the first
 * and third in [-pi, pi], the middle one in [-pi/2, pi/2] (RPY, ZYX) or
 * [0, pi] (ZYZ), to rounding. R must be a rotation (not checked).
 * Gimbal lock (middle angle +-pi/2 for RPY and ZYX, 0 or pi for ZYZ):
 * only the sum or difference of the outer rotations is defined, so the
 * third angle (yaw for RPY, c for ZYX and ZYZ) is set to 0, as SciPy's
 * Rotation.as_euler does. The lock is taken when the middle angle's cosine
 * (RPY, ZYX) or sine (ZYZ), the norm of two entries of R, is at most
 * 1e-15; near it the outer angles are ill-conditioned (an error of R of
 * 1e-16 moves them by 1e-16 over that cosine or sine) but are computed so
 * that the three angles still reproduce R to rounding. No pointer may be
 * NULL. */
void twf_rot_to_euler(twf_euler_convention c, const double R[3][3],
                      double a[3]);

#ifdef __cplusplus
}
#endif

#endif /* TWISTFIT_SE3_H */
