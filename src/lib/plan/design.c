/* design.c: Jacobian rows of a pose before it is measured, and the
 * structural redundancy walk on a rich synthetic set (DEVELOPERS.md, "The maths"), built on the error model and the
 * identifiability routines the calibration uses. */
#include "design.h"
#include "calib/ident.h"

#include <stdlib.h>

twf_status twf_design_init(twf_design *d, const twf_model *m, const twf_pose *base,
                           unsigned groups, const unsigned char *targets, int orientation,
                           double sigma_len, double sigma_rot, twf_error *err)
{
  size_t k;
  memset(d, 0, sizeof *d);
  if (!(sigma_len > 0) || !isfinite(sigma_len) || !(sigma_rot >= 0) || !isfinite(sigma_rot))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0,
                         "give the instrument's noise per coordinate (a positive length)",
                         "the measurement noise is not a positive number");
  d->m = twf_model_copy(m);
  if (d->m == NULL)
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
  d->nj = m->n_joints;
  d->nt = m->n_targets;
  d->tmask = calloc(d->nt ? d->nt : 1, 1);
  if (d->tmask == NULL) {
    twf_design_free(d);
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
  }
  for (k = 0; k < d->nt; k++)
    if (m->targets[k].offset_known && (targets == NULL || targets[k])) {
      d->tmask[k] = 1;
      d->n_tg++;
    }
  if (d->n_tg == 0) {
    twf_design_free(d);
    return twf_error_set(err, TWF_ERR_MISSING, NULL, 0, 0,
                         "give the targets nominal offsets in the model file",
                         "no target with a known offset is measured");
  }
  d->em = twf_errmodel_alloc(d->m, groups, err);
  if (d->em == NULL) {
    twf_design_free(d);
    return err ? err->status : TWF_ERR_NOMEM;
  }
  d->p = twf_errmodel_n_params(d->em);
  d->scale = calloc(d->p ? d->p : 1, sizeof *d->scale);
  d->buf = calloc(3 * (d->p ? d->p : 1), sizeof *d->buf);
  if (d->scale == NULL || d->buf == NULL) {
    twf_design_free(d);
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
  }
  for (k = 0; k < d->p; k++)
    d->scale[k] = twf_errmodel_param_scale(d->em, k);
  if (base != NULL)
    d->base = *base;
  else
    twf_pose_identity(&d->base);
  d->orientation = orientation != 0;
  d->inv_sigma = 1.0 / sigma_len;
  d->inv_sigma_rot = 1.0 / (sigma_rot > 0 ? sigma_rot : sigma_len / twf_model_reach(d->m));
  d->r = d->n_tg * (d->orientation ? 6 : 3);
  return TWF_OK;
}

twf_status twf_design_set_stations(twf_design *d, size_t n_stations, const char (*names)[TWF_NAME_MAX],
                                   const twf_pose *bases, unsigned groups, twf_error *err)
{
  twf_errmodel *em = twf_errmodel_alloc_stations(d->m, groups, n_stations, names, err);
  double *scale, *buf;
  size_t k, p;
  if (em == NULL)
    return err ? err->status : TWF_ERR_NOMEM;
  p = twf_errmodel_n_params(em);
  scale = calloc(p ? p : 1, sizeof *scale);
  buf = calloc(3 * (p ? p : 1), sizeof *buf);
  if (scale == NULL || buf == NULL) {
    twf_errmodel_free(em);
    free(scale);
    free(buf);
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
  }
  for (k = 0; k < p; k++)
    scale[k] = twf_errmodel_param_scale(em, k);
  twf_errmodel_free(d->em);
  free(d->scale);
  free(d->buf);
  d->em = em;
  d->p = p;
  d->scale = scale;
  d->buf = buf;
  d->n_stations = n_stations;
  d->grad_station = 0;
  memcpy(d->station_base, bases, n_stations * sizeof *bases);
  return TWF_OK;
}

void twf_design_free(twf_design *d)
{
  if (d == NULL)
    return;
  twf_errmodel_free(d->em);
  twf_model_free(d->m);
  free(d->tmask);
  free(d->scale);
  free(d->buf);
  memset(d, 0, sizeof *d);
}

static void scale_rows(const twf_design *d, const double *in, double *out, size_t k, double w,
                       int scaled)
{
  size_t a, j;
  for (a = 0; a < k; a++)
    for (j = 0; j < d->p; j++)
      out[a * d->p + j] = in[a * d->p + j] * (scaled ? d->scale[j] : 1.0) * w;
}

/* The rows of every measured target at the pose evaluated last (flange
 * in the tracker T), in the calibration's order: position, then with
 * with_rot the orientation, per target. rot_only (may be NULL) receives
 * the orientation's rows once. */
static void pose_rows(twf_design *d, const twf_pose *T, double *out, double w_pos, double w_rot,
                      int with_rot, int scaled, double *rot_only)
{
  size_t k, at = 0, p = d->p;
  double y[3], r[3];
  for (k = 0; k < d->nt; k++) {
    if (!d->tmask[k])
      continue;
    twf_errmodel_point(d->em, d->m, k, y, d->buf);
    scale_rows(d, d->buf, out + at * p, 3, w_pos, scaled);
    at += 3;
    if (with_rot) {
      twf_errmodel_orientation(d->em, T->R, r, d->buf);
      scale_rows(d, d->buf, out + at * p, 3, w_rot, scaled);
      at += 3;
    }
  }
  if (rot_only != NULL) {
    twf_errmodel_orientation(d->em, T->R, r, d->buf);
    scale_rows(d, d->buf, rot_only, 3, w_rot, scaled);
  }
}

void twf_design_rows(twf_design *d, const double *q, double *out)
{
  twf_pose T;
  twf_errmodel_eval_pose(d->em, d->m, &d->base, q, &T);
  pose_rows(d, &T, out, d->inv_sigma, d->inv_sigma_rot, d->orientation, 1, NULL);
}

void twf_design_grad(twf_design *d, const double *q, double *pos, double *rot)
{
  twf_pose T;
  if (d->n_stations > 1 && d->grad_station < d->n_stations)
    twf_errmodel_eval_station(d->em, d->m, &d->station_base[d->grad_station], d->grad_station, q, &T);
  else
    twf_errmodel_eval_pose(d->em, d->m, &d->base, q, &T);
  pose_rows(d, &T, pos, 1.0, 1.0, 0, 1, rot);
}

size_t twf_design_order(const twf_design *d, const twf_group *priority, size_t *order)
{
  size_t n = 0, k;
  int gi;
  for (gi = 0; gi < TWF_GROUP_COUNT; gi++)
    for (k = 0; k < d->p; k++)
      if (twf_errmodel_param(d->em, k)->group == priority[gi])
        order[n++] = k;
  return n;
}

twf_status twf_design_structural(twf_design *d, const size_t *order, size_t n_order, size_t n_syn,
                                 unsigned long long seed, double tol, unsigned char *keep,
                                 double *As, twf_error *err)
{
  size_t p = d->p, s, a;
  double *R = calloc(p ? p * p : 1, sizeof *R);
  double *rows = calloc((d->r ? d->r : 1) * (p ? p : 1), sizeof *rows);
  double *q = calloc(d->nj ? d->nj : 1, sizeof *q);
  unsigned long long st = seed;
  int bad = R == NULL || rows == NULL || q == NULL;
  for (s = 0; !bad && s < n_syn; s++) {
    /* the calibration's synthetic set: uniform over the full limits */
    twf_pose T;
    twf_simulate_joints(d->m, 0.0, &st, q);
    twf_errmodel_eval_pose(d->em, d->m, &d->base, q, &T);
    /* unscaled, unweighted rows: the walk scales the columns itself */
    pose_rows(d, &T, rows, 1.0, 1.0, d->orientation, 0, NULL);
    for (a = 0; a < d->r; a++)
      twf_ident_qr_add_row(R, p, rows + a * p);
  }
  if (!bad)
    bad = twf_ident_walk_r(R, p, d->scale, order, n_order, tol, keep, NULL) != 0;
  if (!bad && As != NULL)
    twf_ident_normal_from_r(R, p, d->scale, As);
  free(R);
  free(rows);
  free(q);
  return bad ? twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory") : TWF_OK;
}

void twf_design_add_normal(double *M, size_t nk, const size_t *idx, const double *rows, size_t k,
                           size_t p, double w)
{
  size_t r, a, b;
  for (r = 0; r < k; r++) {
    const double *row = rows + r * p;
    for (a = 0; a < nk; a++) {
      double va = w * row[idx[a]];
      double *Ma = M + a * nk;
      if (va == 0.0)
        continue;
      for (b = a; b < nk; b++)
        Ma[b] += va * row[idx[b]];
    }
  }
}

void twf_design_symmetrize(double *M, size_t nk)
{
  size_t a, b;
  for (a = 0; a < nk; a++)
    for (b = 0; b < a; b++)
      M[a * nk + b] = M[b * nk + a];
}
