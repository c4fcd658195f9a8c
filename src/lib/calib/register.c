/* register.c: put the instrument's frame and the robot's in register.
 *
 * Two layers. twf_register_points is the closed-form weighted rigid
 * registration of two point sets: the SVD method of Arun, Huang and
 * Blostein (1987) with Umeyama's (1991) reflection fix. twf_register_campaign
 * uses it to find the base pose B in the tracker frame from a campaign,
 * alternating with the linear least-squares solve for the target offsets
 * that are not trusted. It stops after the alternation: the joint
 * refinement of B and the offsets by the least-squares solver is the
 * caller's next step (see twistfit.h). */
#include "internal.h"

#include <stddef.h>
#include <stdlib.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_matrix.h>
#include <gsl/gsl_vector.h>

/* A point cloud is judged degenerate from the singular values
 * s1 >= s2 >= s3 of its weighted, centred coordinates (the square roots of
 * the eigenvalues of its scatter matrix):
 *  - coincident when its RMS spread s1 / sqrt(W) is below
 *    TWF_REG_COINCIDENT_TOL times its RMS distance from the origin (a spread
 *    of a nanometre per metre of coordinate size is rounding, not data);
 *  - collinear when s2 < TWF_REG_COLLINEAR_TOL s1: a rotation about the
 *    line is then set by a spread of a millionth of the cloud's length,
 *    far below any instrument's noise. Forming the scatter matrix squares
 *    the ratio (1e-12 on eigenvalues), still well above rounding (1e-16). */
#define TWF_REG_COINCIDENT_TOL 1e-9
#define TWF_REG_COLLINEAR_TOL 1e-6

typedef enum reg_outcome {
  REG_OK = 0,
  REG_TOO_FEW,    /* fewer than 3 points of positive weight */
  REG_COINCIDENT, /* all points at one place */
  REG_COLLINEAR,  /* all points on one line */
  REG_NUMERIC     /* the SVD failed (non-finite input) */
} reg_outcome;

/* A cloud of n points: point i is the 3 doubles at base + stride * k
 * bytes, k = index[i] (k = i when index is NULL). The campaign's measured
 * points are read where they lie, the fit rows through their indices, so
 * that the registration keeps no copy of them. */
typedef struct reg_cloud {
  const char *base;
  size_t stride;
  const size_t *index;
} reg_cloud;

static inline const double *cloud_pt(const reg_cloud *x, size_t i)
{
  return (const double *)(const void *)(x->base + x->stride * (x->index != NULL ? x->index[i] : i));
}

static reg_cloud cloud_of_array(const double *a)
{
  reg_cloud x;
  x.base = (const char *)a;
  x.stride = 3 * sizeof *a;
  x.index = NULL;
  return x;
}

/* Weighted scatter statistics of one cloud: centroid and the singular
 * values of the centred cloud, largest first. */
static int cloud_shape(const reg_cloud *x, const double *w, size_t n,
                       double sumw, double centroid[3], double sv[3],
                       double *rms_size)
{
  double C[9] = { 0 }, vbuf[9];
  double ss = 0.0;
  size_t i;
  int r, c;
  gsl_matrix_view Cm = gsl_matrix_view_array(C, 3, 3);
  gsl_matrix_view Vm = gsl_matrix_view_array(vbuf, 3, 3);
  gsl_vector_view Sv = gsl_vector_view_array(sv, 3);

  centroid[0] = centroid[1] = centroid[2] = 0.0;
  for (i = 0; i < n; i++) {
    double wi = w ? w[i] : 1.0;
    const double *xi = cloud_pt(x, i);
    for (c = 0; c < 3; c++)
      centroid[c] += wi * xi[c];
  }
  for (c = 0; c < 3; c++)
    centroid[c] /= sumw;
  for (i = 0; i < n; i++) {
    double wi = w ? w[i] : 1.0, d[3];
    const double *xi;
    if (wi == 0.0)
      continue;
    xi = cloud_pt(x, i);
    for (c = 0; c < 3; c++) {
      d[c] = xi[c] - centroid[c];
      ss += wi * xi[c] * xi[c];
    }
    for (r = 0; r < 3; r++)
      for (c = 0; c < 3; c++)
        C[3 * r + c] += wi * d[r] * d[c];
  }
  *rms_size = sqrt(ss / sumw);
  /* The scatter matrix is symmetric positive semi-definite: its singular
   * values are its eigenvalues. */
  if (gsl_linalg_SV_decomp_jacobi(&Cm.matrix, &Vm.matrix, &Sv.vector) != GSL_SUCCESS)
    return -1;
  for (c = 0; c < 3; c++)
    sv[c] = sqrt(fmax(sv[c], 0.0));
  return 0;
}

static reg_outcome cloud_check(const reg_cloud *x, const double *w, size_t n,
                               double sumw, double centroid[3])
{
  double sv[3], size;
  if (cloud_shape(x, w, n, sumw, centroid, sv, &size) != 0)
    return REG_NUMERIC;
  if (!isfinite(sv[0]) || !isfinite(size))
    return REG_NUMERIC;
  if (sv[0] / sqrt(sumw) <= TWF_REG_COINCIDENT_TOL * size)
    return REG_COINCIDENT;
  if (sv[1] < TWF_REG_COLLINEAR_TOL * sv[0])
    return REG_COLLINEAR;
  return REG_OK;
}

/* The core: *which receives 0 when cloud a decided the outcome, 1 for b. */
static reg_outcome register_core(const reg_cloud *a, const reg_cloud *b,
                                 const double *w, size_t n, twf_pose *T,
                                 size_t *n_pos, int *which)
{
  double sumw = 0.0, ca[3], cb[3];
  double H[9] = { 0 }, vbuf[9], sv[3];
  gsl_matrix_view Hm = gsl_matrix_view_array(H, 3, 3);
  gsl_matrix_view Vm = gsl_matrix_view_array(vbuf, 3, 3);
  gsl_vector_view Sv = gsl_vector_view_array(sv, 3);
  size_t i, count = 0;
  reg_outcome o;
  int r, c, k;

  *which = 0;
  for (i = 0; i < n; i++) {
    double wi = w ? w[i] : 1.0;
    if (wi > 0.0) {
      sumw += wi;
      count++;
    }
  }
  *n_pos = count;
  if (count < 3)
    return REG_TOO_FEW;
  o = cloud_check(a, w, n, sumw, ca);
  if (o != REG_OK)
    return o;
  *which = 1;
  o = cloud_check(b, w, n, sumw, cb);
  if (o != REG_OK)
    return o;
  *which = 0;

  /* H = sum w (a - ca)(b - cb)^T = U S V^T; R = V D U^T with
   * D = diag(1, 1, det(V U^T)) (Umeyama 1991: the nearest rotation, never
   * a reflection, also for coplanar clouds where s3 = 0). */
  for (i = 0; i < n; i++) {
    double wi = w ? w[i] : 1.0, da[3], db[3];
    const double *ai, *bi;
    if (wi == 0.0)
      continue;
    ai = cloud_pt(a, i);
    bi = cloud_pt(b, i);
    for (c = 0; c < 3; c++) {
      da[c] = ai[c] - ca[c];
      db[c] = bi[c] - cb[c];
    }
    for (r = 0; r < 3; r++)
      for (c = 0; c < 3; c++)
        H[3 * r + c] += wi * da[r] * db[c];
  }
  /* The SVD overwrites H with U, returns V untransposed and the singular
   * values in decreasing order (one-sided Jacobi: accurate for small
   * singular values). */
  if (gsl_linalg_SV_decomp_jacobi(&Hm.matrix, &Vm.matrix, &Sv.vector) != GSL_SUCCESS)
    return REG_NUMERIC;
  {
    /* Complete U and V to rotations from their first two columns:
     * u3 = u1 x u2 = det(U) u3 and v3 = v1 x v2 = det(V) v3, so that
     * V' U'^T = V diag(1, 1, det(V U^T)) U^T is Umeyama's answer. This also
     * holds for a planar cloud (s3 = 0), where the Jacobi SVD leaves the
     * third column of U zero instead of a unit vector. */
    double u[3][3], v[3][3];
    for (k = 0; k < 2; k++)
      for (r = 0; r < 3; r++) {
        u[k][r] = H[3 * r + k];
        v[k][r] = vbuf[3 * r + k];
      }
    twf_v3_cross(u[0], u[1], u[2]);
    twf_v3_cross(v[0], v[1], v[2]);
    for (r = 0; r < 3; r++)
      for (c = 0; c < 3; c++)
        T->R[r][c] = v[0][r] * u[0][c] + v[1][r] * u[1][c] + v[2][r] * u[2][c];
  }
  for (r = 0; r < 3; r++) {
    T->p[r] = cb[r];
    for (c = 0; c < 3; c++)
      T->p[r] -= T->R[r][c] * ca[c];
  }
  for (r = 0; r < 3; r++)
    if (!isfinite(T->p[r]))
      return REG_NUMERIC;
  return REG_OK;
}

static twf_status check_weights(const double *w, size_t n, twf_error *err)
{
  size_t i;
  if (w == NULL)
    return TWF_OK;
  for (i = 0; i < n; i++)
    if (!isfinite(w[i]) || w[i] < 0.0)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "weight %zu is %g: weights must be finite and "
                           "not negative", i, w[i]);
  return TWF_OK;
}

twf_status twf_register_points(const double *a, const double *b,
                               const double *w, size_t n, twf_pose *T,
                               twf_error *err)
{
  size_t n_pos, i;
  reg_outcome rc;
  int which;
  twf_status st;

  if ((a == NULL || b == NULL) && n > 0)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "point arrays must not be NULL");
  if (T == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "the output pose must not be NULL");
  st = check_weights(w, n, err);
  if (st != TWF_OK)
    return st;
  for (i = 0; i < 3 * n; i++)
    if (!isfinite(a[i]) || !isfinite(b[i]))
      return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0, NULL,
                           "coordinate %zu of point %zu is not finite",
                           i % 3, i / 3);
  {
    reg_cloud ca = cloud_of_array(a), cb = cloud_of_array(b);
    rc = register_core(&ca, &cb, w, n, T, &n_pos, &which);
  }
  switch (rc) {
  case REG_OK:
    return TWF_OK;
  case REG_TOO_FEW:
    return twf_error_set(err, TWF_ERR_DEGENERATE, NULL, 0, 0,
                         "a rigid registration needs at least 3 distinct "
                         "points not on one line",
                         "only %zu point%s of positive weight: %zu more "
                         "distinct, non-collinear point%s needed",
                         n_pos, n_pos == 1 ? "" : "s", 3 - n_pos,
                         3 - n_pos == 1 ? " is" : "s are");
  case REG_COINCIDENT:
    return twf_error_set(err, TWF_ERR_DEGENERATE, NULL, 0, 0,
                         "a rigid registration needs at least 3 distinct "
                         "points not on one line",
                         "all %zu points of %s coincide: 2 more distinct "
                         "points, not on one line with them, are needed",
                         n_pos, which ? "b" : "a");
  case REG_COLLINEAR:
    return twf_error_set(err, TWF_ERR_DEGENERATE, NULL, 0, 0,
                         "a rigid registration needs at least 3 distinct "
                         "points not on one line",
                         "all %zu points of %s lie on one line: 1 more "
                         "distinct point off that line is needed",
                         n_pos, which ? "b" : "a");
  case REG_NUMERIC:
    break;
  }
  return twf_error_set(err, TWF_ERR_SINGULAR, NULL, 0, 0, NULL,
                       "the singular value decomposition of the point "
                       "registration failed");
}

/* ------------------------------------------------------------------ */
/* Registration of a campaign                                          */
/* ------------------------------------------------------------------ */

twf_register_options twf_register_default_options(void)
{
  twf_register_options o;
  memset(&o, 0, sizeof o);
  o.fit_all_offsets = 0;
  o.trusted = NULL;
  o.use_sigma = 1;
  o.sigma_default_m = 0.0;
  o.tol_m = 1e-12;
  o.max_iter = 200;
  return o;
}

int twf_register_target_is_fitted(const twf_model *model,
                                  const twf_register_options *options,
                                  size_t k)
{
  twf_register_options def = twf_register_default_options();
  const twf_register_options *o = options ? options : &def;
  if (model == NULL || k >= model->n_targets)
    return 0;
  if (o->fit_all_offsets)
    return 1;
  if (o->trusted != NULL)
    return o->trusted[k] == 0;
  return model->targets[k].offset_known == 0;
}

void twf_register_offsets_init(const twf_model *model, double *offsets)
{
  size_t k;
  if (model == NULL || offsets == NULL)
    return;
  for (k = 0; k < model->n_targets; k++) {
    if (model->targets[k].offset_known)
      twf_v3_copy(model->targets[k].offset, offsets + 3 * k);
    else
      offsets[3 * k] = offsets[3 * k + 1] = offsets[3 * k + 2] = 0.0;
  }
}

/* Working arrays of one campaign registration, sized once up front. */
typedef struct reg_work {
  size_t n;           /* fit-set measurements used */
  size_t *meas;       /* their indices in the campaign */
  double *w;          /* weights */
  double *a;          /* predicted target points, base frame */
  twf_pose *flange;   /* flange pose in the base frame, per campaign pose */
  unsigned char *pose_used;
  size_t n_poses_used;
  int *fitted;        /* per target: offset fitted */
  double *t_sum;      /* per target: accumulators of the offset solve */
  double *t_w;
  double *w_sta;      /* weights masked to one station (several only) */
} reg_work;

static void reg_work_free(reg_work *wk)
{
  free(wk->meas);
  free(wk->w);
  free(wk->a);
  free(wk->flange);
  free(wk->pose_used);
  free(wk->fitted);
  free(wk->t_sum);
  free(wk->t_w);
  free(wk->w_sta);
}

static void flange_point(const twf_pose *F, const double t[3], double out[3])
{
  int r;
  for (r = 0; r < 3; r++)
    out[r] = F->R[r][0] * t[0] + F->R[r][1] * t[1] + F->R[r][2] * t[2] + F->p[r];
}

/* Names of the fitted targets, for messages: "T1, T2". */
static void fitted_names(const twf_model *m, const int *fitted, char *buf,
                         size_t size)
{
  size_t k, used = 0;
  buf[0] = '\0';
  for (k = 0; k < m->n_targets && used + 1 < size; k++) {
    int n;
    if (!fitted[k])
      continue;
    n = snprintf(buf + used, size - used, "%s%s", used ? ", " : "",
                 m->targets[k].name);
    if (n < 0)
      break;
    used += (size_t)n;
  }
}

/* Report that a fitted offset is not separable from the base pose: the
 * flange orientations of its measurements leave a direction t of the
 * flange frame with R_Fj t the same for every j (all orientations equal, or
 * all rotations about one axis, as on a four-axis arm whose wrist turns only
 * about the vertical): that component trades off against the base
 * translation. Judged by the smallest eigenvalue of
 * sum w (R_Fj - Rbar)^T (R_Fj - Rbar) / W, dimensionless (about the squared
 * spread of the orientations in radians). */
#define TWF_REG_SEPARABLE_TOL 1e-10

static double orientation_spread(const reg_work *wk, const twf_campaign *c,
                                 size_t k)
{
  double Rbar[3][3] = { { 0 } }, N[9] = { 0 }, vbuf[9], sv[3], sumw = 0.0;
  gsl_matrix_view Nm = gsl_matrix_view_array(N, 3, 3);
  gsl_matrix_view Vm = gsl_matrix_view_array(vbuf, 3, 3);
  gsl_vector_view Sv = gsl_vector_view_array(sv, 3);
  size_t i;
  int r, s, q;

  for (i = 0; i < wk->n; i++) {
    const twf_measurement *me = &c->meas[wk->meas[i]];
    const twf_pose *F = &wk->flange[me->pose];
    if (me->target != k)
      continue;
    sumw += wk->w[i];
    for (r = 0; r < 3; r++)
      for (s = 0; s < 3; s++)
        Rbar[r][s] += wk->w[i] * F->R[r][s];
  }
  if (sumw <= 0.0)
    return 0.0;
  for (r = 0; r < 3; r++)
    for (s = 0; s < 3; s++)
      Rbar[r][s] /= sumw;
  for (i = 0; i < wk->n; i++) {
    const twf_measurement *me = &c->meas[wk->meas[i]];
    const twf_pose *F = &wk->flange[me->pose];
    if (me->target != k)
      continue;
    for (r = 0; r < 3; r++)
      for (s = 0; s < 3; s++)
        for (q = 0; q < 3; q++)
          N[3 * r + s] += wk->w[i] * (F->R[q][r] - Rbar[q][r])
                          * (F->R[q][s] - Rbar[q][s]) / sumw;
  }
  if (gsl_linalg_SV_decomp_jacobi(&Nm.matrix, &Vm.matrix, &Sv.vector) != GSL_SUCCESS)
    return 0.0;
  return sv[2];
}

/* Given B, the offset t_k minimising sum w |B F_j t - y_j|^2 over the
 * measurements of target k. The normal matrix sum w R_Fj^T R_Fj is
 * (sum w) I because every R_Fj is a rotation, so the 3x3 system solves in
 * closed form: t = sum w R_Fj^T (R_B^T (y_j - p_B) - p_Fj) / sum w. */
static void solve_offsets(reg_work *wk, const twf_campaign *c,
                          const twf_pose *Bs, size_t n_targets,
                          double *offsets)
{
  size_t i, k;
  int r, s;
  for (k = 0; k < n_targets; k++) {
    wk->t_w[k] = 0.0;
    wk->t_sum[3 * k] = wk->t_sum[3 * k + 1] = wk->t_sum[3 * k + 2] = 0.0;
  }
  for (i = 0; i < wk->n; i++) {
    const twf_measurement *me = &c->meas[wk->meas[i]];
    const twf_pose *F = &wk->flange[me->pose];
    const twf_pose *B = &Bs[twf_campaign_pose_station(c, me->pose)];
    double d[3], z[3];
    k = me->target;
    if (!wk->fitted[k])
      continue;
    for (r = 0; r < 3; r++)
      d[r] = me->pos[r] - B->p[r];
    for (r = 0; r < 3; r++)
      z[r] = B->R[0][r] * d[0] + B->R[1][r] * d[1] + B->R[2][r] * d[2] - F->p[r];
    for (r = 0; r < 3; r++)
      for (s = 0; s < 3; s++)
        wk->t_sum[3 * k + (size_t)r] += wk->w[i] * F->R[s][r] * z[s];
    wk->t_w[k] += wk->w[i];
  }
  for (k = 0; k < n_targets; k++)
    if (wk->fitted[k] && wk->t_w[k] > 0.0)
      for (r = 0; r < 3; r++)
        offsets[3 * k + (size_t)r] = wk->t_sum[3 * k + (size_t)r] / wk->t_w[k];
}

static void predict_points(reg_work *wk, const twf_campaign *c,
                           const double *offsets)
{
  size_t i;
  for (i = 0; i < wk->n; i++) {
    const twf_measurement *me = &c->meas[wk->meas[i]];
    flange_point(&wk->flange[me->pose], offsets + 3 * me->target,
                 wk->a + 3 * i);
  }
}

static twf_status degenerate_message(const twf_model *m, const reg_work *wk,
                                     reg_outcome o, size_t n_pos, int which,
                                     int first_round, int any_fitted,
                                     const double *offsets, twf_error *err)
{
  char names[256];
  size_t n_poses, i;
  int at_origin = 0;
  const char *shape = o == REG_COINCIDENT ? "all coincide" : "lie on one line";
  const char *more = o == REG_COINCIDENT
    ? "at least 2 more distinct poses, not on one line with them, are needed"
    : "at least 1 more distinct pose, off that line, is needed";

  if (o == REG_NUMERIC)
    return twf_error_set(err, TWF_ERR_SINGULAR, NULL, 0, 0, NULL,
                         "the singular value decomposition of the "
                         "registration failed (non-finite model prediction?)");
  for (i = 0; i < m->n_targets; i++)
    if (wk->fitted[i] && offsets[3 * i] == 0.0 && offsets[3 * i + 1] == 0.0
        && offsets[3 * i + 2] == 0.0)
      at_origin = 1;
  n_poses = wk->n_poses_used;
  if (o == REG_TOO_FEW)
    return twf_error_set(err, TWF_ERR_DEGENERATE, NULL, 0, 0,
                         "measure more poses of the fit set (or mark fewer "
                         "rows as check data)",
                         "registration to the instrument needs at least 3 "
                         "fit-set measurements, the campaign has %zu: %zu "
                         "more distinct, non-collinear pose%s needed",
                         n_pos, 3 - n_pos, 3 - n_pos == 1 ? " is" : "s are");
  if (which == 1)
    return twf_error_set(err, TWF_ERR_DEGENERATE, NULL, 0, 0,
                         "check that the points file belongs to the joints "
                         "file and that each row names the right target",
                         "the %zu measured points of the fit set %s while "
                         "the model's predictions do not: %s",
                         n_pos, shape, more);
  if (first_round && any_fitted && at_origin) {
    fitted_names(m, wk->fitted, names, sizeof names);
    return twf_error_set(err, TWF_ERR_DEGENERATE, NULL, 0, 0,
                         "measure poses in which the flange itself moves "
                         "(not only the last joints), or give approximate "
                         "offsets for these targets in the model",
                         "the first registration places the targets without "
                         "a trusted offset (%s) at the flange origin, and "
                         "the flange origin's positions in the %zu fit "
                         "pose%s %s: %s",
                         names, n_poses, n_poses == 1 ? "" : "s", shape, more);
  }
  return twf_error_set(err, TWF_ERR_DEGENERATE, NULL, 0, 0,
                       "add poses that move the targets in all three "
                       "directions",
                       "the model's %zu predicted target points of the fit "
                       "set (%zu pose%s) %s: %s",
                       n_pos, n_poses, n_poses == 1 ? "" : "s", shape, more);
}

/* Weights 1/sigma^2. Rows without a sigma get options->sigma_default_m,
 * or, when that is 0, the mean of the sigmas given; with no sigma at all,
 * or with use_sigma off, every row weighs 1. */
static void fill_weights(reg_work *wk, const twf_campaign *c,
                         const twf_register_options *o)
{
  double sum = 0.0, fallback;
  size_t i, given = 0;
  for (i = 0; i < wk->n; i++) {
    double s = c->meas[wk->meas[i]].sigma;
    if (s > 0.0) {
      sum += s;
      given++;
    }
  }
  if (!o->use_sigma || given == 0) {
    for (i = 0; i < wk->n; i++)
      wk->w[i] = 1.0;
    return;
  }
  fallback = o->sigma_default_m > 0.0 ? o->sigma_default_m : sum / (double)given;
  for (i = 0; i < wk->n; i++) {
    double s = c->meas[wk->meas[i]].sigma;
    if (!(s > 0.0))
      s = fallback;
    /* relative to the fallback, so that weights stay near 1 */
    wk->w[i] = (fallback / s) * (fallback / s);
  }
}

twf_status twf_register_campaign(const twf_model *model,
                                 const twf_campaign *campaign,
                                 const twf_register_options *options,
                                 twf_pose *base_in_tracker,
                                 double *target_offsets,
                                 twf_register_report *report,
                                 twf_error *err)
{
  twf_register_options def = twf_register_default_options();
  const twf_register_options *o = options ? options : &def;
  reg_work wk;
  twf_register_report rep;
  twf_pose B[TWF_STATIONS_MAX], B_prev[TWF_STATIONS_MAX];
  double *offsets = NULL, *offsets_prev = NULL;
  size_t *fit_count = NULL, *check_count = NULL;
  size_t i, k, nt, nj, n_st, sp;
  size_t sta_poses[TWF_STATIONS_MAX];
  int any_fitted = 0;
  twf_status st = TWF_OK;

  memset(&wk, 0, sizeof wk);
  memset(&rep, 0, sizeof rep);
  rep.first_inseparable = -1;
  if (model == NULL || campaign == NULL || base_in_tracker == NULL
      || target_offsets == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "model, campaign, base pose and target offsets "
                         "must not be NULL");
  if (!(o->tol_m >= 0.0) || o->max_iter == 0)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "registration tolerance must be >= 0 and the "
                         "alternation limit at least 1");
  nt = model->n_targets;
  nj = model->n_joints;
  n_st = twf_campaign_station_count(campaign);
  memset(sta_poses, 0, sizeof sta_poses);
  if (n_st > TWF_STATIONS_MAX || (campaign->n_stations > 0 && campaign->pose_station == NULL))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "invalid station table");
  if (campaign->n_joints != nj)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "the campaign has %zu joint values per pose, the "
                         "model %zu joints", campaign->n_joints, nj);
  for (k = 0; k < 3 * nt; k++)
    if (!isfinite(target_offsets[k]))
      return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0, NULL,
                           "the starting offset of target %s is not finite",
                           model->targets[k / 3].name);

  wk.fitted = calloc(nt ? nt : 1, sizeof *wk.fitted);
  wk.t_sum = calloc(nt ? 3 * nt : 1, sizeof *wk.t_sum);
  wk.t_w = calloc(nt ? nt : 1, sizeof *wk.t_w);
  offsets = malloc((nt ? 3 * nt : 1) * sizeof *offsets);
  offsets_prev = malloc((nt ? 3 * nt : 1) * sizeof *offsets_prev);
  fit_count = calloc(nt ? nt : 1, sizeof *fit_count);
  check_count = calloc(nt ? nt : 1, sizeof *check_count);
  wk.pose_used = calloc(campaign->n_poses ? campaign->n_poses : 1, 1);
  if (!wk.fitted || !wk.t_sum || !wk.t_w || !offsets || !offsets_prev || !fit_count
      || !check_count || !wk.pose_used) {
    st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL,
                       "out of memory for the registration");
    goto done;
  }
  memcpy(offsets, target_offsets, 3 * nt * sizeof *offsets);

  /* The fit set, checked against the model. */
  for (i = 0; i < campaign->n_meas; i++) {
    const twf_measurement *me = &campaign->meas[i];
    if (me->pose >= campaign->n_poses || me->target >= nt) {
      st = twf_error_set(err, TWF_ERR_INVALID, NULL, me->line, 0, NULL,
                         "measurement %zu refers to pose %zu / target %zu, "
                         "beyond the campaign's %zu poses or the model's "
                         "%zu targets", i, (size_t)me->pose, (size_t)me->target,
                         campaign->n_poses, nt);
      goto done;
    }
    if (me->set == TWF_SET_FIT) {
      fit_count[me->target]++;
      wk.n++;
    } else {
      check_count[me->target]++;
    }
  }
  for (k = 0; k < nt; k++) {
    wk.fitted[k] = twf_register_target_is_fitted(model, o, k) && fit_count[k] > 0;
    if (twf_register_target_is_fitted(model, o, k) && fit_count[k] == 0
        && check_count[k] > 0) {
      st = twf_error_set(err, TWF_ERR_MISSING, NULL, 0, 0,
                         "mark some of its rows as fit data, or give its "
                         "offset in the model",
                         "target %s has no trusted offset and no fit-set "
                         "measurement to fit it from",
                         model->targets[k].name);
      goto done;
    }
    if (wk.fitted[k]) {
      any_fitted = 1;
      rep.n_fitted++;
    }
  }
  rep.n_used = wk.n;
  wk.meas = malloc((wk.n ? wk.n : 1) * sizeof *wk.meas);
  wk.w = malloc((wk.n ? wk.n : 1) * sizeof *wk.w);
  wk.a = malloc((wk.n ? 3 * wk.n : 1) * sizeof *wk.a);
  wk.flange = malloc((campaign->n_poses ? campaign->n_poses : 1) * sizeof *wk.flange);
  if (n_st > 1)
    wk.w_sta = malloc((wk.n ? wk.n : 1) * sizeof *wk.w_sta);
  if (!wk.meas || !wk.w || !wk.a || !wk.flange || (n_st > 1 && !wk.w_sta)) {
    st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL,
                       "out of memory for the registration");
    goto done;
  }
  {
    size_t j = 0;
    for (i = 0; i < campaign->n_meas; i++) {
      const twf_measurement *me = &campaign->meas[i];
      if (me->set != TWF_SET_FIT)
        continue;
      if (!isfinite(me->pos[0]) || !isfinite(me->pos[1]) || !isfinite(me->pos[2])) {
        st = twf_error_set(err, TWF_ERR_VALUE, NULL, me->line, 0, NULL,
                           "measurement %zu has a non-finite position", i);
        goto done;
      }
      wk.meas[j] = i;
      j++;
      if (!wk.pose_used[me->pose]) {
        wk.pose_used[me->pose] = 1;
        wk.n_poses_used++;
        sta_poses[twf_campaign_pose_station(campaign, me->pose)]++;
        twf_model_fk_load(model, campaign->q + me->pose * nj,
                          twf_campaign_payload(campaign, me->pose), NULL,
                          &wk.flange[me->pose]);
      }
    }
  }
  rep.n_poses_used = wk.n_poses_used;
  fill_weights(&wk, campaign, o);
  /* Each station has its own instrument frame: its base pose comes from
   * its own poses alone (the same registration on the station's rows),
   * the target offsets from every station's. */
  if (n_st > 1)
    for (sp = 0; sp < n_st; sp++)
      if (sta_poses[sp] < TWF_STATION_POSES_MIN) {
        st = twf_error_set(err, TWF_ERR_DEGENERATE, NULL, 0, 0,
                           "measure more poses from this station, or merge its rows into "
                           "another station's if the instrument did not move",
                           "station '%s' has %zu pose%s in the fit set: a station's base pose "
                           "needs at least %d", campaign->station_names[sp], sta_poses[sp],
                           sta_poses[sp] == 1 ? "" : "s", TWF_STATION_POSES_MIN);
        goto done;
      }

  /* Alternate: B from the points predicted with the current offsets, then
   * the fitted offsets given B (block coordinate descent: the weighted sum
   * of squares never increases), until the predicted points stop moving. */
  predict_points(&wk, campaign, offsets);
  for (;;) {
    size_t n_pos = 0;
    int which = 0;
    reg_outcome oc = REG_OK;
    double change = 0.0;
    for (sp = 0; sp < n_st && oc == REG_OK; sp++) {
      const double *w = wk.w;
      if (n_st > 1) {
        for (i = 0; i < wk.n; i++)
          wk.w_sta[i] = twf_campaign_pose_station(campaign, campaign->meas[wk.meas[i]].pose) == sp
                            ? wk.w[i] : 0.0;
        w = wk.w_sta;
      }
      reg_cloud ca = cloud_of_array(wk.a), cy;
      cy.base = (const char *)campaign->meas + offsetof(twf_measurement, pos);
      cy.stride = sizeof *campaign->meas;
      cy.index = wk.meas;
      oc = register_core(&ca, &cy, w, wk.n, &B[sp], &n_pos, &which);
    }
    if (oc != REG_OK) {
      st = degenerate_message(model, &wk, oc, n_pos, which,
                              rep.iterations == 0, any_fitted, offsets, err);
      if (n_st > 1 && err != NULL) {
        char msg[TWF_ERROR_TEXT_MAX];
        snprintf(msg, sizeof msg, "station '%.63s': %.400s", campaign->station_names[sp - 1], err->message);
        twf_strlcpy(err->message, msg, sizeof err->message);
      }
      goto done;
    }
    rep.iterations++;
    if (!any_fitted) {
      rep.converged = 1;
      break;
    }
    solve_offsets(&wk, campaign, B, nt, offsets);
    predict_points(&wk, campaign, offsets);
    /* the last alternation's prediction is recomputed from its base poses
     * and offsets (the same operations, so the same bits) rather than
     * kept per measurement */
    for (i = 0; i < wk.n && rep.iterations > 1; i++) { /* no previous prediction before */
      const twf_measurement *me = &campaign->meas[wk.meas[i]];
      size_t s = twf_campaign_pose_station(campaign, me->pose);
      double yp[3], ap[3], pp[3], d[3];
      twf_pose_apply(&B[s], wk.a + 3 * i, yp);
      flange_point(&wk.flange[me->pose], offsets_prev + 3 * me->target, ap);
      twf_pose_apply(&B_prev[s], ap, pp);
      d[0] = yp[0] - pp[0];
      d[1] = yp[1] - pp[1];
      d[2] = yp[2] - pp[2];
      change = fmax(change, twf_v3_norm(d));
    }
    memcpy(B_prev, B, n_st * sizeof *B);
    memcpy(offsets_prev, offsets, 3 * nt * sizeof *offsets);
    if (rep.iterations > 1) {
      rep.last_change_m = change;
      if (change <= o->tol_m) {
        rep.converged = 1;
        break;
      }
    }
    if (rep.iterations >= o->max_iter)
      break;
  }

  /* The residual after registration, unweighted: the "before" figure. */
  {
    double ss = 0.0, mx = 0.0;
    for (i = 0; i < wk.n; i++) {
      const twf_measurement *me = &campaign->meas[wk.meas[i]];
      double yp[3], d[3], l;
      twf_pose_apply(&B[twf_campaign_pose_station(campaign, me->pose)], wk.a + 3 * i, yp);
      d[0] = me->pos[0] - yp[0];
      d[1] = me->pos[1] - yp[1];
      d[2] = me->pos[2] - yp[2];
      l = twf_v3_norm(d);
      ss += l * l;
      mx = fmax(mx, l);
    }
    rep.rms_m = sqrt(ss / (double)wk.n);
    rep.max_m = mx;
  }
  /* A trusted target measured in the fit set pins the base pose (unless
   * its own points are degenerate), and given B every offset is
   * determined: then nothing trades off. */
  {
    int pinned = 0;
    for (k = 0; k < nt; k++)
      if (!wk.fitted[k] && fit_count[k] > 0)
        pinned = 1;
    for (k = 0; k < nt && !pinned; k++)
      if (wk.fitted[k]
          && orientation_spread(&wk, campaign, k) < TWF_REG_SEPARABLE_TOL) {
        if (rep.n_inseparable == 0)
          rep.first_inseparable = (long)k;
        rep.n_inseparable++;
      }
  }
  memcpy(base_in_tracker, B, n_st * sizeof *B);
  memcpy(target_offsets, offsets, 3 * nt * sizeof *offsets);
  if (report != NULL)
    *report = rep;

done:
  reg_work_free(&wk);
  free(offsets);
  free(offsets_prev);
  free(fit_count);
  free(check_count);
  return st;
}
