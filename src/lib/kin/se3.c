/* se3.c: rigid motions. Poses, the exponential and logarithm of SO(3) and
 * SE(3), adjoints, twists of joints, quaternions and roll-pitch-yaw.
 *
 * The exponential is the closed form of Murray, Li and Sastry (1994, ch. 2)
 * written for a general vector phi = w t (any |w|, any pitch):
 *   R = I + A hat(phi) + B hat(phi)^2,
 *   p = (I + B hat(phi) + C hat(phi)^2) rho,   rho = v t,
 * with theta = |phi|, A = sin theta / theta, B = (1 - cos theta) / theta^2,
 * C = (theta - sin theta) / theta^3. Each coefficient switches to its Taylor
 * series where the closed form loses digits to cancellation, so that the
 * exponential of a 1e-9 twist is as accurate as the double format allows.
 */
#include "internal.h"

#include <float.h>

/* ------------------------------------------------------------ helpers */

static inline void mat3_mul(const double A[3][3], const double B[3][3], double out[3][3])
{
  double T[3][3];
  for (int i = 0; i < 3; i++)
    for (int j = 0; j < 3; j++)
      T[i][j] = A[i][0] * B[0][j] + A[i][1] * B[1][j] + A[i][2] * B[2][j];
  memcpy(out, T, sizeof T);
}

static inline void mat3_vec(const double A[3][3], const double x[3], double out[3])
{
  double y0 = A[0][0] * x[0] + A[0][1] * x[1] + A[0][2] * x[2];
  double y1 = A[1][0] * x[0] + A[1][1] * x[1] + A[1][2] * x[2];
  double y2 = A[2][0] * x[0] + A[2][1] * x[1] + A[2][2] * x[2];
  out[0] = y0; out[1] = y1; out[2] = y2;
}

/* The coefficients of the exponential: a = sin(x)/x, b = (1 - cos x)/x^2
 * and, when c is not NULL, c = (x - sin x)/x^3. From the half angle
 * (sin x = 2 s h, 1 - cos x = 2 s^2 with s = sin(x/2), h = cos(x/2)):
 * two library calls, and no cancellation in 1 - cos x. Series where the
 * closed forms would divide 0 by 0 or cancel: a and b below 1e-3
 * (truncation below 1e-22), c below 0.1 (terms to x^10, truncation below
 * 1e-19 relative; the closed form of c loses digits to x - sin x). */
static inline void exp_coefs(double x, double *a, double *b, double *c)
{
  double x2 = x * x;
  double s = 0.0, h = 1.0;
  if (x >= 1e-3) {
    s = sin(0.5 * x);
    h = cos(0.5 * x);
  }
  if (x < 1e-3) {
    *a = 1.0 - x2 / 6.0 * (1.0 - x2 / 20.0 * (1.0 - x2 / 42.0));
    *b = 0.5 - x2 / 24.0 * (1.0 - x2 / 30.0 * (1.0 - x2 / 56.0));
  } else {
    *a = 2.0 * s * h / x;
    *b = 2.0 * s * s / x2;
  }
  if (c == NULL)
    return;
  if (x < 0.1) {
    *c = (1.0 / 6.0) *
         (1.0 - x2 / 20.0 *
                    (1.0 - x2 / 42.0 *
                               (1.0 - x2 / 72.0 *
                                          (1.0 - x2 / 110.0 * (1.0 - x2 / 156.0)))));
  } else {
    *c = (x - 2.0 * s * h) / (x2 * x);
  }
}

/* (1 - (x/2) cot(x/2)) / x^2, the coefficient of hat(phi)^2 in the inverse
 * of the left Jacobian V. Series from t cot t = 1 - t^2/3 - t^4/45
 * - 2 t^6/945 - t^8/4725 - 2 t^10/93555 - ... (t = x/2). Finite up to and
 * including x = pi (where it is 1/pi^2). */
static double coef_d(double x)
{
  double x2 = x * x;
  if (x < 0.1) {
    return 1.0 / 12.0 +
           x2 * (1.0 / 720.0 +
                 x2 * (1.0 / 30240.0 + x2 * (1.0 / 1209600.0 + x2 / 47900160.0)));
  }
  return (1.0 - 0.5 * x * cos(0.5 * x) / sin(0.5 * x)) / x2;
}

/* --------------------------------------------------------------- poses */

void twf_pose_identity(twf_pose *T)
{
  memset(T, 0, sizeof *T);
  T->R[0][0] = T->R[1][1] = T->R[2][2] = 1.0;
}

#if defined(__GNUC__)
/* Two lanes of the same scalar operations (GCC's vector extension). */
typedef double se3_v2d __attribute__((vector_size(16)));
#endif

void twf_pose_mul(const twf_pose *A, const twf_pose *B, twf_pose *out)
{
  twf_pose C;
#if defined(__GNUC__)
  /* columns 0 and 1 of each row of A->R B->R in two lanes, column 2
   * alone: entry by entry the operations of mat3_mul, so the same bits */
  se3_v2d b0, b1, b2;
  memcpy(&b0, &B->R[0][0], sizeof b0);
  memcpy(&b1, &B->R[1][0], sizeof b1);
  memcpy(&b2, &B->R[2][0], sizeof b2);
  for (int i = 0; i < 3; i++) {
    se3_v2d r = A->R[i][0] * b0 + A->R[i][1] * b1 + A->R[i][2] * b2;
    memcpy(&C.R[i][0], &r, sizeof r);
    C.R[i][2] = A->R[i][0] * B->R[0][2] + A->R[i][1] * B->R[1][2] + A->R[i][2] * B->R[2][2];
  }
#else
  mat3_mul(A->R, B->R, C.R);
#endif
  mat3_vec(A->R, B->p, C.p);
  for (int i = 0; i < 3; i++)
    C.p[i] += A->p[i];
  *out = C;
}

void twf_pose_inv(const twf_pose *T, twf_pose *out)
{
  twf_pose I;
  for (int i = 0; i < 3; i++)
    for (int j = 0; j < 3; j++)
      I.R[i][j] = T->R[j][i];
  mat3_vec(I.R, T->p, I.p);
  for (int i = 0; i < 3; i++)
    I.p[i] = -I.p[i];
  *out = I;
}

void twf_pose_apply(const twf_pose *T, const double x[3], double out[3])
{
  double y[3];
  mat3_vec(T->R, x, y);
  out[0] = y[0] + T->p[0];
  out[1] = y[1] + T->p[1];
  out[2] = y[2] + T->p[2];
}

void twf_pose_rotate(const twf_pose *T, const double x[3], double out[3])
{
  mat3_vec(T->R, x, out);
}

/* -------------------------------------------------------------- hats */

void twf_so3_hat(const double a[3], double A[3][3])
{
  double a0 = a[0], a1 = a[1], a2 = a[2];
  A[0][0] = 0.0; A[0][1] = -a2; A[0][2] = a1;
  A[1][0] = a2;  A[1][1] = 0.0; A[1][2] = -a0;
  A[2][0] = -a1; A[2][1] = a0;  A[2][2] = 0.0;
}

void twf_se3_hat(const double S[6], double X[4][4])
{
  double W[3][3];
  twf_so3_hat(S, W);
  for (int i = 0; i < 3; i++) {
    for (int j = 0; j < 3; j++)
      X[i][j] = W[i][j];
    X[i][3] = S[3 + i];
    X[3][i] = 0.0;
  }
  X[3][3] = 0.0;
}

/* ------------------------------------------------------- exponentials */

/* R = I + a hat(phi) + b hat(phi)^2, written out: hat(phi)^2 = phi phi^T
 * - |phi|^2 I. */
static inline void rot_from_coefs(const double phi[3], double a, double b, double R[3][3])
{
  double x = phi[0], y = phi[1], z = phi[2];
  double xx = x * x, yy = y * y, zz = z * z;
  R[0][0] = 1.0 - b * (yy + zz);
  R[1][1] = 1.0 - b * (xx + zz);
  R[2][2] = 1.0 - b * (xx + yy);
  R[0][1] = b * x * y - a * z;
  R[1][0] = b * x * y + a * z;
  R[0][2] = b * x * z + a * y;
  R[2][0] = b * x * z - a * y;
  R[1][2] = b * y * z - a * x;
  R[2][1] = b * y * z + a * x;
}

void twf_so3_exp(const double w[3], double t, double R[3][3])
{
  double phi[3] = { w[0] * t, w[1] * t, w[2] * t };
  double a, b;
  exp_coefs(twf_v3_norm(phi), &a, &b, NULL);
  rot_from_coefs(phi, a, b, R);
}

void twf_se3_exp(const double S[6], double t, twf_pose *out)
{
  double phi[3] = { S[0] * t, S[1] * t, S[2] * t };
  double rho[3] = { S[3] * t, S[4] * t, S[5] * t };
  double x = twf_v3_norm(phi);
  double a, b, c, pr[3], ppr[3];
  exp_coefs(x, &a, &b, &c);
  rot_from_coefs(phi, a, b, out->R);
  /* p = rho + b phi x rho + c phi x (phi x rho) */
  twf_v3_cross(phi, rho, pr);
  twf_v3_cross(phi, pr, ppr);
  for (int i = 0; i < 3; i++)
    out->p[i] = rho[i] + b * pr[i] + c * ppr[i];
}

void twf_se3_exp_joint(const double S[6], double t, twf_pose *out)
{
  const double *w = S, *v = S + 3;
  double n2 = w[0] * w[0] + w[1] * w[1] + w[2] * w[2];
  double s, h, A, B, C, x = fabs(t), wv[3], wwv[3];
  if (n2 == 0.0) {
    /* prismatic: a translation along v */
    for (int i = 0; i < 3; i++) {
      for (int k = 0; k < 3; k++)
        out->R[i][k] = i == k ? 1.0 : 0.0;
      out->p[i] = v[i] * t;
    }
    return;
  }
  if (fabs(n2 - 1.0) > 4.0 * DBL_EPSILON) {
    twf_se3_exp(S, t, out);
    return;
  }
  /* |w| = 1: the coefficients of twf_se3_exp times the powers of t they
   * divide by, sin t = 2 s h and 1 - cos t = 2 s^2 (half angles, no
   * cancellation near 0), and t - sin t by its series below 0.1 */
  s = sin(0.5 * t);
  h = cos(0.5 * t);
  A = 2.0 * s * h;
  B = 2.0 * s * s;
  if (x < 0.1) {
    double x2 = x * x;
    C = t * x2 * (1.0 / 6.0) *
        (1.0 - x2 / 20.0 * (1.0 - x2 / 42.0 * (1.0 - x2 / 72.0 * (1.0 - x2 / 110.0 * (1.0 - x2 / 156.0)))));
  } else {
    C = t - A;
  }
  rot_from_coefs(w, A, B, out->R);
  twf_v3_cross(w, v, wv);
  twf_v3_cross(w, wv, wwv);
  for (int i = 0; i < 3; i++)
    out->p[i] = v[i] * t + B * wv[i] + C * wwv[i];
}

/* --------------------------------------------------------- logarithms */

void twf_so3_log(const double R[3][3], double w[3])
{
  /* vee(R - R^T) / 2 = sin(theta) n and (tr R - 1) / 2 = cos(theta):
   * atan2 of the two keeps full precision at both ends, where acos of a
   * value near +-1 would lose half the digits. */
  double s3[3] = { 0.5 * (R[2][1] - R[1][2]), 0.5 * (R[0][2] - R[2][0]),
                   0.5 * (R[1][0] - R[0][1]) };
  double s = twf_v3_norm(s3);
  double c = 0.5 * (R[0][0] + R[1][1] + R[2][2] - 1.0);
  double theta = atan2(s, c);

  if (c > -0.5) {
    /* theta < 2 pi / 3: the skew part gives the axis with error eps/sin,
     * at most 1.2 eps. theta / sin(theta) by series near 0. */
    double f;
    if (theta < 1e-3) {
      double t2 = theta * theta;
      f = 1.0 + t2 / 6.0 * (1.0 + t2 * 7.0 / 60.0 * (1.0 + t2 * 31.0 / 294.0));
    } else {
      f = theta / s;
    }
    w[0] = f * s3[0];
    w[1] = f * s3[1];
    w[2] = f * s3[2];
    return;
  }

  /* Near pi the skew part vanishes: use the symmetric part instead,
   * R + R^T = 2 c I + 2 (1 - c) n n^T, from its largest diagonal entry
   * (>= 1/3 of the total), then take the sign that makes
   * n . vee(R - R^T) >= 0 (sin(theta) >= 0). At theta = pi exactly both
   * signs are correct. */
  {
    double d = 1.0 - c; /* in [1.5, 2] here */
    int k = 0;
    double n[3];
    if (R[1][1] > R[k][k])
      k = 1;
    if (R[2][2] > R[k][k])
      k = 2;
    n[k] = sqrt(fmax(0.0, (R[k][k] - c) / d));
    for (int j = 0; j < 3; j++) {
      if (j != k)
        n[j] = 0.5 * (R[j][k] + R[k][j]) / (d * n[k]);
    }
    {
      double nn = twf_v3_norm(n);
      n[0] /= nn; n[1] /= nn; n[2] /= nn;
    }
    if (twf_v3_dot(n, s3) < 0.0) {
      n[0] = -n[0]; n[1] = -n[1]; n[2] = -n[2];
    }
    w[0] = theta * n[0];
    w[1] = theta * n[1];
    w[2] = theta * n[2];
  }
}

void twf_se3_log(const twf_pose *T, double xi[6])
{
  /* v = V^-1 p with V^-1 = I - hat(w)/2 + D hat(w)^2 (Lynch and Park 2017,
   * sec. 3.3.3, written for the vector w = theta n). */
  double w[3], wp[3], wwp[3], d;
  twf_so3_log(T->R, w);
  d = coef_d(twf_v3_norm(w));
  twf_v3_cross(w, T->p, wp);
  twf_v3_cross(w, wp, wwp);
  for (int i = 0; i < 3; i++) {
    xi[i] = w[i];
    xi[3 + i] = T->p[i] - 0.5 * wp[i] + d * wwp[i];
  }
}

/* ----------------------------------------------------------- adjoints */

void twf_se3_adjoint(const twf_pose *T, double Ad[6][6])
{
  double P[3][3], PR[3][3];
  twf_so3_hat(T->p, P);
  mat3_mul(P, T->R, PR);
  for (int i = 0; i < 3; i++) {
    for (int j = 0; j < 3; j++) {
      Ad[i][j] = T->R[i][j];
      Ad[i][3 + j] = 0.0;
      Ad[3 + i][j] = PR[i][j];
      Ad[3 + i][3 + j] = T->R[i][j];
    }
  }
}

void twf_se3_adjoint_apply(const twf_pose *T, const double S[6], double out[6])
{
  double rw[3], rv[3], prw[3];
  mat3_vec(T->R, S, rw);
  mat3_vec(T->R, S + 3, rv);
  twf_v3_cross(T->p, rw, prw);
  for (int i = 0; i < 3; i++) {
    out[i] = rw[i];
    out[3 + i] = prw[i] + rv[i];
  }
}

/* ------------------------------------------------------------- twists */

void twf_twist_revolute(const double w[3], const double q[3], double S[6])
{
  double wq[3];
  twf_v3_cross(w, q, wq);
  S[0] = w[0]; S[1] = w[1]; S[2] = w[2];
  S[3] = -wq[0]; S[4] = -wq[1]; S[5] = -wq[2];
}

void twf_twist_prismatic(const double u[3], double S[6])
{
  S[0] = S[1] = S[2] = 0.0;
  S[3] = u[0]; S[4] = u[1]; S[5] = u[2];
}

/* -------------------------------------------------- quaternions, rpy */

void twf_quat_to_rot(const double q[4], double R[3][3])
{
  double n = sqrt(q[0] * q[0] + q[1] * q[1] + q[2] * q[2] + q[3] * q[3]);
  double w = q[0] / n, x = q[1] / n, y = q[2] / n, z = q[3] / n;
  R[0][0] = 1.0 - 2.0 * (y * y + z * z);
  R[1][1] = 1.0 - 2.0 * (x * x + z * z);
  R[2][2] = 1.0 - 2.0 * (x * x + y * y);
  R[0][1] = 2.0 * (x * y - w * z);
  R[1][0] = 2.0 * (x * y + w * z);
  R[0][2] = 2.0 * (x * z + w * y);
  R[2][0] = 2.0 * (x * z - w * y);
  R[1][2] = 2.0 * (y * z - w * x);
  R[2][1] = 2.0 * (y * z + w * x);
}

void twf_rot_to_quat(const double R[3][3], double q[4])
{
  /* Shepperd (1978): start from the largest of 4w^2, 4x^2, 4y^2, 4z^2 so
   * that the division is by a number of at least 1/2. */
  double tr = R[0][0] + R[1][1] + R[2][2];
  double v[4];
  double n;
  if (tr >= R[0][0] && tr >= R[1][1] && tr >= R[2][2]) {
    double r = sqrt(1.0 + tr);
    v[0] = 0.5 * r;
    v[1] = 0.5 * (R[2][1] - R[1][2]) / r;
    v[2] = 0.5 * (R[0][2] - R[2][0]) / r;
    v[3] = 0.5 * (R[1][0] - R[0][1]) / r;
  } else if (R[0][0] >= R[1][1] && R[0][0] >= R[2][2]) {
    double r = sqrt(1.0 + R[0][0] - R[1][1] - R[2][2]);
    v[1] = 0.5 * r;
    v[0] = 0.5 * (R[2][1] - R[1][2]) / r;
    v[2] = 0.5 * (R[0][1] + R[1][0]) / r;
    v[3] = 0.5 * (R[0][2] + R[2][0]) / r;
  } else if (R[1][1] >= R[2][2]) {
    double r = sqrt(1.0 - R[0][0] + R[1][1] - R[2][2]);
    v[2] = 0.5 * r;
    v[0] = 0.5 * (R[0][2] - R[2][0]) / r;
    v[1] = 0.5 * (R[0][1] + R[1][0]) / r;
    v[3] = 0.5 * (R[1][2] + R[2][1]) / r;
  } else {
    double r = sqrt(1.0 - R[0][0] - R[1][1] + R[2][2]);
    v[3] = 0.5 * r;
    v[0] = 0.5 * (R[1][0] - R[0][1]) / r;
    v[1] = 0.5 * (R[0][2] + R[2][0]) / r;
    v[2] = 0.5 * (R[1][2] + R[2][1]) / r;
  }
  n = sqrt(v[0] * v[0] + v[1] * v[1] + v[2] * v[2] + v[3] * v[3]);
  if (v[0] < 0.0)
    n = -n;
  for (int i = 0; i < 4; i++)
    q[i] = v[i] / n;
}

void twf_rpy_fixed_xyz_to_rot(double roll, double pitch, double yaw,
                              double R[3][3])
{
  double cr = cos(roll), sr = sin(roll);
  double cp = cos(pitch), sp = sin(pitch);
  double cy = cos(yaw), sy = sin(yaw);
  /* Rz(yaw) Ry(pitch) Rx(roll), multiplied out. */
  R[0][0] = cy * cp;
  R[0][1] = cy * sp * sr - sy * cr;
  R[0][2] = cy * sp * cr + sy * sr;
  R[1][0] = sy * cp;
  R[1][1] = sy * sp * sr + cy * cr;
  R[1][2] = sy * sp * cr - cy * sr;
  R[2][0] = -sp;
  R[2][1] = cp * sr;
  R[2][2] = cp * cr;
}

void twf_rot_to_rpy_fixed_xyz(const double R[3][3], double *roll,
                              double *pitch, double *yaw)
{
  /* yaw from the first column, then the rest from M = Rz(-yaw) R =
   * Ry(pitch) Rx(roll), so that the three angles reproduce R to rounding
   * even near the gimbal lock (cos(pitch) = 0), where only roll -+ yaw is
   * defined and yaw is set to 0. */
  double cp = hypot(R[0][0], R[1][0]);
  double y = cp > 1e-15 ? atan2(R[1][0], R[0][0]) : 0.0;
  double cy = cos(y), sy = sin(y);
  double m00 = cy * R[0][0] + sy * R[1][0];
  double m11 = -sy * R[0][1] + cy * R[1][1];
  double m12 = -sy * R[0][2] + cy * R[1][2];
  *yaw = y;
  *pitch = atan2(-R[2][0], m00);
  *roll = atan2(-m12, m11);
}

double twf_rot_orthonormality_error(const double R[3][3], double *det)
{
  double e = 0.0;
  for (int i = 0; i < 3; i++) {
    for (int j = 0; j < 3; j++) {
      double s = R[0][i] * R[0][j] + R[1][i] * R[1][j] + R[2][i] * R[2][j];
      if (i == j)
        s -= 1.0;
      if (fabs(s) > e || isnan(s))
        e = isnan(s) ? s : fabs(s);
    }
  }
  if (det != NULL) {
    *det = R[0][0] * (R[1][1] * R[2][2] - R[1][2] * R[2][1]) -
           R[0][1] * (R[1][0] * R[2][2] - R[1][2] * R[2][0]) +
           R[0][2] * (R[1][0] * R[2][1] - R[1][1] * R[2][0]);
  }
  return e;
}

double twf_rot_angle_between(const double A[3][3], const double B[3][3])
{
  /* C = A^T B; angle = atan2(|vee(C - C^T)| / 2, (tr C - 1) / 2), which
   * keeps full absolute precision for tiny angles (acos would not). */
  double C[3][3];
  for (int i = 0; i < 3; i++)
    for (int j = 0; j < 3; j++)
      C[i][j] = A[0][i] * B[0][j] + A[1][i] * B[1][j] + A[2][i] * B[2][j];
  {
    double s3[3] = { 0.5 * (C[2][1] - C[1][2]), 0.5 * (C[0][2] - C[2][0]),
                     0.5 * (C[1][0] - C[0][1]) };
    double c = 0.5 * (C[0][0] + C[1][1] + C[2][2] - 1.0);
    return atan2(twf_v3_norm(s3), c);
  }
}

/* Euler angles. Each inverse takes the third angle from the entries that
 * hold it alone, then the other two from R with that rotation taken off,
 * so that the three angles reproduce R to rounding even next to the
 * gimbal lock, where the third angle itself is ill-conditioned (the same
 * construction as twf_rot_to_rpy_fixed_xyz). */
#define EULER_LOCK 1e-15

static void rot_z(double t, double R[3][3])
{
  double c = cos(t), s = sin(t);
  double M[3][3] = { { c, -s, 0.0 }, { s, c, 0.0 }, { 0.0, 0.0, 1.0 } };
  memcpy(R, M, sizeof M);
}

static void rot_y(double t, double R[3][3])
{
  double c = cos(t), s = sin(t);
  double M[3][3] = { { c, 0.0, s }, { 0.0, 1.0, 0.0 }, { -s, 0.0, c } };
  memcpy(R, M, sizeof M);
}

void twf_euler_to_rot(twf_euler_convention c, const double a[3], double R[3][3])
{
  double Z[3][3], Y[3][3], Z2[3][3];
  switch (c) {
  case TWF_EULER_RPY: twf_rpy_fixed_xyz_to_rot(a[0], a[1], a[2], R); return;
  case TWF_EULER_ZYX: twf_rpy_fixed_xyz_to_rot(a[2], a[1], a[0], R); return;
  case TWF_EULER_ZYZ:
    rot_z(a[0], Z);
    rot_y(a[1], Y);
    rot_z(a[2], Z2);
    mat3_mul(Z, Y, R);
    mat3_mul(R, Z2, R);
    return;
  }
}

/* R = Rz(a) Ry(b) Rx(c): c from the last row (cos(b) (sin c, cos c)), then
 * M = R Rx(-c) = Rz(a) Ry(b), whose middle column is (-sin a, cos a, 0). */
static void rot_to_zyx(const double R[3][3], double out[3])
{
  double cb = hypot(R[2][1], R[2][2]);
  double x = cb > EULER_LOCK ? atan2(R[2][1], R[2][2]) : 0.0;
  double cc = cos(x), sc = sin(x);
  double m01 = R[0][1] * cc - R[0][2] * sc;
  double m11 = R[1][1] * cc - R[1][2] * sc;
  double z = atan2(-m01, m11);
  double ca = cos(z), sa = sin(z);
  out[0] = z;
  out[1] = atan2(-R[2][0], ca * R[0][0] + sa * R[1][0]);
  out[2] = x;
}

/* R = Rz(a) Ry(b) Rz(c): c from the last row (sin(b) (-cos c, sin c)),
 * then M = R Rz(-c) = Rz(a) Ry(b), whose middle column is (-sin a, cos a,
 * 0) and whose last column is (cos a sin b, sin a sin b, cos b). */
static void rot_to_zyz(const double R[3][3], double out[3])
{
  double sb = hypot(R[2][0], R[2][1]);
  double z2 = sb > EULER_LOCK ? atan2(R[2][1], -R[2][0]) : 0.0;
  double cc = cos(z2), sc = sin(z2);
  double m01 = R[0][0] * sc + R[0][1] * cc;
  double m11 = R[1][0] * sc + R[1][1] * cc;
  double z = atan2(-m01, m11);
  double ca = cos(z), sa = sin(z);
  out[0] = z;
  /* At the lock the cut-off sine may carry either sign: take its size from
   * the last row, so that b stays in [0, pi]. */
  out[1] = sb > EULER_LOCK ? atan2(ca * R[0][2] + sa * R[1][2], R[2][2]) : atan2(sb, R[2][2]);
  out[2] = z2;
}

void twf_rot_to_euler(twf_euler_convention c, const double R[3][3], double a[3])
{
  switch (c) {
  case TWF_EULER_RPY: twf_rot_to_rpy_fixed_xyz(R, &a[0], &a[1], &a[2]); return;
  case TWF_EULER_ZYX: rot_to_zyx(R, a); return;
  case TWF_EULER_ZYZ: rot_to_zyz(R, a); return;
  }
}
