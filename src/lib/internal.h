/* internal.h: helpers shared by the library's modules, not part of the
 * public interface. */
#ifndef TWF_INTERNAL_H
#define TWF_INTERNAL_H

#include "config.h"
#include "twistfit.h"

#include <math.h>
#include <string.h>

#define TWF_PI 3.14159265358979323846

/* Small 3-vector helpers (inline: they sit on every hot path). */
static inline void twf_v3_cross(const double a[3], const double b[3], double out[3])
{
  double x = a[1] * b[2] - a[2] * b[1];
  double y = a[2] * b[0] - a[0] * b[2];
  double z = a[0] * b[1] - a[1] * b[0];
  out[0] = x; out[1] = y; out[2] = z;
}
static inline double twf_v3_dot(const double a[3], const double b[3])
{
  return a[0] * b[0] + a[1] * b[1] + a[2] * b[2];
}
static inline double twf_v3_norm(const double a[3])
{
  return sqrt(twf_v3_dot(a, a));
}
static inline void twf_v3_copy(const double a[3], double out[3])
{
  out[0] = a[0]; out[1] = a[1]; out[2] = a[2];
}

/* splitmix64 (Steele, Lea and Flood 2014): a small seedable generator, so
 * that the library keeps no global random state. */
static inline unsigned long long twf_rng_next(unsigned long long *s)
{
  unsigned long long z = (*s += 0x9e3779b97f4a7c15ULL);
  z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
  z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
  return z ^ (z >> 31);
}
/* Uniform in [0, 1). */
static inline double twf_rng_uniform(unsigned long long *s)
{
  return (double)(twf_rng_next(s) >> 11) / 9007199254740992.0;
}
/* Standard normal (Box-Muller). */
static inline double twf_rng_gauss(unsigned long long *s)
{
  double u1 = 1.0 - twf_rng_uniform(s), u2 = twf_rng_uniform(s);
  return sqrt(-2.0 * log(u1)) * cos(2.0 * TWF_PI * u2);
}

/* The residual of one measurement ms, of orientation quat (its
 * campaign's twf_campaign_meas_quat), at the flange pose T (flange in the
 * tracker frame) with target offset t (flange frame): pos = measured - T t
 * and, for a 6-D row, rot = log(R_meas R_T^T), the orientation residual
 * the solver minimises (its length is the angle reports show). Returns 1
 * for a 6-D row, else 0 with rot untouched. Every residual of the library
 * comes from here (report/accuracy.c). */
int twf_meas_residual(const twf_pose *T, const double t[3], const twf_measurement *ms,
                      const double quat[4], double pos[3], double rot[3]);

/* The argument checks of twf_accuracy_residuals, alone. */
twf_status twf_accuracy_residuals_check(const twf_model *model, const twf_pose *base_in_tracker,
                                        const double *target_offsets, const twf_campaign *campaign,
                                        const double *pos_err, const double *angle_err, twf_error *err);

/* twf_accuracy_residuals over the measurements [i0, i1) only, with the
 * target offsets t (3 per target, checked by the caller): the same
 * operations for each measurement whatever the range, so that ranges
 * computed on separate threads give the bits of one loop. */
void twf_accuracy_residuals_range(const twf_model *model, const twf_pose *base_in_tracker,
                                  const double *t, const twf_campaign *campaign, size_t i0,
                                  size_t i1, double *pos_err, double *angle_err);

/* Copy a string into a fixed buffer, always NUL-terminated; returns 0 when
 * it fitted, -1 when truncated. */
int twf_strlcpy(char *dst, const char *src, size_t size);

#endif
