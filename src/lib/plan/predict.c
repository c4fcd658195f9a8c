/* predict.c: predicted accuracy: the covariance of the kept parameters
 * propagated to the tool points and the flange orientation, first order
 * through the forward kinematics (plan.h). */
#include "design.h"
#include "calib/ident.h"

#include <stdlib.h>

struct twf_predictor {
  twf_design d;
  size_t nk;
  size_t *idx;   /* nk kept columns */
  double *C;     /* nk x nk covariance of the scaled parameters */
  double *pos;   /* 3 n_tg x p */
  double *rot;   /* 3 x p */
  double *g, *t; /* nk */
};

twf_workspace_options twf_workspace_default_options(void)
{
  twf_workspace_options o;
  o.n_configs = 1000;
  o.limit_margin = 0.05;
  o.seed = 20261211ULL;
  return o;
}

void twf_predictor_free(twf_predictor *pr)
{
  if (pr == NULL)
    return;
  twf_design_free(&pr->d);
  free(pr->idx);
  free(pr->C);
  free(pr->pos);
  free(pr->rot);
  free(pr->g);
  free(pr->t);
  free(pr);
}

int twf_predictor_has_orientation(const twf_predictor *pr)
{
  return pr->d.orientation;
}

const double *twf_predictor_cov(const twf_predictor *pr, size_t *nk, const size_t **idx)
{
  *nk = pr->nk;
  *idx = pr->idx;
  return pr->C;
}

twf_predictor *twf_predictor_make(twf_design *d, const unsigned char *keep, const double *As,
                                  twf_error *err)
{
  twf_predictor *pr = calloc(1, sizeof *pr);
  size_t p = d->p, a, b, n1 = p ? p : 1;
  double *full = NULL;
  if (pr == NULL)
    goto nomem;
  pr->d = *d;
  memset(d, 0, sizeof *d);
  pr->idx = calloc(n1, sizeof *pr->idx);
  pr->pos = calloc(3 * pr->d.n_tg * n1, sizeof *pr->pos);
  pr->rot = calloc(3 * n1, sizeof *pr->rot);
  pr->g = calloc(n1, sizeof *pr->g);
  pr->t = calloc(n1, sizeof *pr->t);
  full = calloc(n1 * n1, sizeof *full);
  if (!pr->idx || !pr->pos || !pr->rot || !pr->g || !pr->t || !full)
    goto nomem;
  for (a = 0; a < p; a++)
    if (keep[a])
      pr->idx[pr->nk++] = a;
  pr->C = calloc(pr->nk ? pr->nk * pr->nk : 1, sizeof *pr->C);
  if (pr->C == NULL)
    goto nomem;
  if (twf_ident_inverse(As, p, keep, full) != 0) {
    free(full);
    twf_predictor_free(pr);
    return twf_error_set(err, TWF_ERR_SINGULAR, NULL, 0, 0,
                         "measure more varied poses, or fit fewer groups",
                         "the normal matrix of the kept parameters is singular on these poses"), NULL;
  }
  for (a = 0; a < pr->nk; a++)
    for (b = 0; b < pr->nk; b++)
      pr->C[a * pr->nk + b] = full[pr->idx[a] * p + pr->idx[b]];
  free(full);
  return pr;
nomem:
  free(full);
  twf_predictor_free(pr);
  return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory"), NULL;
}

/* g^T C g over the kept columns of one row. */
static double quad(twf_predictor *pr, const double *row)
{
  size_t nk = pr->nk, a, b;
  double s = 0.0;
  for (a = 0; a < nk; a++)
    pr->g[a] = row[pr->idx[a]];
  for (a = 0; a < nk; a++) {
    const double *Ca = pr->C + a * nk;
    double t = 0.0;
    for (b = 0; b < nk; b++)
      t += Ca[b] * pr->g[b];
    s += t * pr->g[a];
  }
  return s;
}

void twf_predictor_at(twf_predictor *pr, const double *q, double *position_m,
                      double *orientation_rad)
{
  size_t r, p = pr->d.p, nr = 3 * pr->d.n_tg;
  double sp = 0.0, sr = 0.0;
  twf_design_grad(&pr->d, q, pr->pos, pr->d.orientation ? pr->rot : NULL);
  for (r = 0; r < nr; r++)
    sp += quad(pr, pr->pos + r * p);
  *position_m = sqrt(sp / (double)pr->d.n_tg);
  if (orientation_rad != NULL) {
    if (pr->d.orientation) {
      for (r = 0; r < 3; r++)
        sr += quad(pr, pr->rot + r * p);
      *orientation_rad = sqrt(sr);
    } else {
      *orientation_rad = NAN;
    }
  }
}

void twf_prediction_free(twf_prediction *p)
{
  if (p == NULL)
    return;
  free(p->q);
  free(p->position);
  free(p->orientation);
  free(p);
}

twf_prediction *twf_predict_at_configs(twf_predictor *pr, const double *q, size_t n,
                                       twf_error *err)
{
  twf_prediction *out = calloc(1, sizeof *out);
  size_t nj = pr->d.nj, i, n1 = n ? n : 1;
  if (out == NULL)
    goto nomem;
  out->n = n;
  out->n_joints = nj;
  out->q = malloc(n1 * (nj ? nj : 1) * sizeof *out->q);
  out->position = calloc(n1, sizeof *out->position);
  if (pr->d.orientation)
    out->orientation = calloc(n1, sizeof *out->orientation);
  if (!out->q || !out->position || (pr->d.orientation && !out->orientation))
    goto nomem;
  if (n > 0)
    memcpy(out->q, q, n * nj * sizeof *q);
  for (i = 0; i < n; i++) {
    double o;
    twf_predictor_at(pr, q + i * nj, &out->position[i], &o);
    if (out->orientation != NULL)
      out->orientation[i] = o;
  }
  if (twf_accuracy_stats(out->position, n, &out->position_stats, err) != TWF_OK ||
      twf_accuracy_stats(out->orientation, out->orientation ? n : 0, &out->orientation_stats, err) !=
          TWF_OK) {
    twf_prediction_free(out);
    return NULL;
  }
  return out;
nomem:
  twf_prediction_free(out);
  return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory"), NULL;
}

twf_prediction *twf_predict_workspace(twf_predictor *pr, const twf_workspace_options *wo_in,
                                      twf_error *err)
{
  twf_workspace_options wo = wo_in ? *wo_in : twf_workspace_default_options();
  size_t nj = pr->d.nj, i;
  unsigned long long st = wo.seed;
  double *q;
  twf_prediction *out;
  if (wo.n_configs == 0 || !(wo.limit_margin >= 0 && wo.limit_margin < 0.5))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0,
                         "use at least one configuration and a margin in [0, 0.5)",
                         "invalid workspace options"), NULL;
  q = malloc(wo.n_configs * (nj ? nj : 1) * sizeof *q);
  if (q == NULL)
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory"), NULL;
  for (i = 0; i < wo.n_configs; i++)
    twf_simulate_joints(pr->d.m, wo.limit_margin, &st, q + i * nj);
  out = twf_predict_at_configs(pr, q, wo.n_configs, err);
  free(q);
  return out;
}

/* ------------------------------------------------------------ from a calibration */

/* The sigma of one coordinate of measurement ms as the calibration's
 * covariance has it: the row's own, else the result's (given, the rows'
 * mean, or estimated: in each case res->sigma_length). */
static double meas_sigma(const twf_calib_result *res, const twf_measurement *ms)
{
  return ms->sigma > 0 ? ms->sigma : res->sigma_length;
}

twf_predictor *twf_predictor_from_calibration(const twf_calib_result *res,
                                              const twf_campaign *c,
                                              const twf_calib_options *opt_in, twf_error *err)
{
  twf_calib_options opt = opt_in ? *opt_in : twf_calib_default_options();
  twf_design d;
  unsigned groups = 0;
  size_t p, k, i, nk = 0, n_sig = 0;
  int orientation = 0;
  double sigma_rot, factor = 1.0, sum_sig = 0.0;
  unsigned char *keep = NULL;
  double *weight = NULL, *M = NULL, *As = NULL, *rows = NULL;
  size_t *idx = NULL, *start = NULL, *list = NULL;
  twf_predictor *pr = NULL;
  twf_status st;

  if (res == NULL || c == NULL || res->asbuilt == NULL || res->n_meas != c->n_meas ||
      c->n_joints != res->asbuilt->n_joints)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "the calibration result does not belong to this campaign"), NULL;
  for (k = 0; k < res->n_params; k++)
    groups |= TWF_GROUP_BIT(res->params[k].param.group);
  for (i = 0; i < c->n_meas; i++) {
    if (res->meas_set[i] == TWF_SET_FIT && c->meas[i].has_orientation)
      orientation = 1;
    if (c->meas[i].sigma > 0) {
      sum_sig += c->meas[i].sigma;
      n_sig++;
    }
  }
  /* the orientation sigma of the fit, scaled as the covariance was when
   * the noise was estimated (calib.c: the placeholder 1e-4 m) */
  {
    double sigma_len = opt.sigma_length > 0 ? opt.sigma_length : n_sig ? sum_sig / (double)n_sig : 1e-4;
    factor = res->sigma_length / sigma_len;
    sigma_rot = (opt.sigma_angle > 0 ? opt.sigma_angle : sigma_len / twf_model_reach(res->registered ? res->registered : res->asbuilt)) * factor;
  }
  st = twf_design_init(&d, res->asbuilt, &res->base_in_tracker, groups, res->target_in_fit, orientation,
                       res->sigma_length, sigma_rot, err);
  if (st != TWF_OK)
    return NULL;
  if (res->n_stations > 1 &&
      twf_design_set_stations(&d, res->n_stations, (const char (*)[TWF_NAME_MAX])c->station_names,
                              res->station_base, groups, err) != TWF_OK) {
    twf_design_free(&d);
    return NULL;
  }
  p = d.p;
  if (p != res->n_params) {
    twf_design_free(&d);
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "the calibration result's parameters do not match its model"), NULL;
  }
  for (k = 0; k < p; k++)
    if (strcmp(twf_errmodel_param(d.em, k)->name, res->params[k].param.name) != 0) {
      twf_design_free(&d);
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "the calibration result's parameters do not match its model"), NULL;
    }
  keep = calloc(p ? p : 1, 1);
  idx = calloc(p ? p : 1, sizeof *idx);
  weight = malloc((c->n_meas ? c->n_meas : 1) * sizeof *weight);
  start = calloc(c->n_poses + 1, sizeof *start);
  list = malloc((c->n_meas ? c->n_meas : 1) * sizeof *list);
  rows = calloc(3 * (p ? p : 1), sizeof *rows);
  As = calloc(p ? p * p : 1, sizeof *As);
  if (!keep || !idx || !weight || !start || !list || !rows || !As)
    goto nomem;
  for (k = 0; k < p; k++)
    if (res->params[k].status == TWF_PARAM_KEPT) {
      keep[k] = 1;
      idx[nk++] = k;
    }
  M = calloc(nk ? nk * nk : 1, sizeof *M);
  if (M == NULL)
    goto nomem;
  for (i = 0; i < c->n_meas; i++)
    weight[i] = res->meas_set[i] == TWF_SET_FIT ? 1.0 : 0.0;
  for (k = 0; k < res->n_outliers; k++)
    if (res->outliers[k].meas < c->n_meas && weight[res->outliers[k].meas] > 0)
      weight[res->outliers[k].meas] = res->outliers[k].weight;
  /* measurements grouped by pose: one evaluation per pose */
  for (i = 0; i < c->n_meas; i++)
    start[c->meas[i].pose + 1]++;
  for (k = 0; k < c->n_poses; k++)
    start[k + 1] += start[k];
  {
    size_t *fill = calloc(c->n_poses ? c->n_poses : 1, sizeof *fill);
    if (fill == NULL)
      goto nomem;
    for (i = 0; i < c->n_meas; i++) {
      size_t ps = c->meas[i].pose;
      list[start[ps] + fill[ps]++] = i;
    }
    free(fill);
  }
  for (k = 0; k < c->n_poses; k++) {
    size_t t;
    int any = 0;
    twf_pose T;
    for (t = start[k]; t < start[k + 1]; t++)
      any |= weight[list[t]] > 0;
    if (!any)
      continue;
    {
      size_t sta = twf_campaign_pose_station(c, k);
      const twf_pose *Bs = sta < res->n_stations && res->n_stations > 1 ? &res->station_base[sta] : &d.base;
      twf_errmodel_set_payload(d.em, twf_campaign_payload(c, k));
      twf_errmodel_eval_station(d.em, d.m, Bs, sta, c->q + k * c->n_joints, &T);
    }
    for (t = start[k]; t < start[k + 1]; t++) {
      const twf_measurement *ms = &c->meas[list[t]];
      double w = weight[list[t]], y[3], r[3], s = meas_sigma(res, ms);
      size_t a, j;
      if (!(w > 0))
        continue;
      twf_errmodel_point(d.em, d.m, ms->target, y, rows);
      for (a = 0; a < 3; a++)
        for (j = 0; j < p; j++)
          rows[a * p + j] *= d.scale[j];
      twf_design_add_normal(M, nk, idx, rows, 3, p, w / (s * s));
      if (ms->has_orientation) {
        twf_errmodel_orientation(d.em, T.R, r, rows);
        for (a = 0; a < 3; a++)
          for (j = 0; j < p; j++)
            rows[a * p + j] *= d.scale[j];
        twf_design_add_normal(M, nk, idx, rows, 3, p, w * d.inv_sigma_rot * d.inv_sigma_rot);
      }
    }
  }
  twf_design_symmetrize(M, nk);
  {
    size_t a, b;
    for (a = 0; a < nk; a++)
      for (b = 0; b < nk; b++)
        As[idx[a] * p + idx[b]] = M[a * nk + b];
  }
  pr = twf_predictor_make(&d, keep, As, err);
  goto done;
nomem:
  twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
done:
  twf_design_free(&d);
  free(keep); free(idx); free(weight); free(start); free(list); free(rows); free(As); free(M);
  return pr;
}

void twf_calib_prediction_free(twf_calib_prediction *p)
{
  if (p == NULL)
    return;
  twf_prediction_free(p->workspace);
  twf_prediction_free(p->check);
  free(p->check_pose);
  free(p);
}

twf_status twf_calib_predict(const twf_calib_result *res, const twf_campaign *c,
                             const twf_calib_options *opt, const twf_workspace_options *wo,
                             twf_calib_prediction **out, twf_error *err)
{
  twf_predictor *pr;
  twf_calib_prediction *cp;
  unsigned char *is_check = NULL;
  double *q = NULL, sum = 0.0;
  size_t i, n = 0, nj, rows = 0;
  *out = NULL;
  pr = twf_predictor_from_calibration(res, c, opt, err);
  if (pr == NULL)
    return err ? err->status : TWF_ERR_NOMEM;
  nj = c->n_joints;
  cp = calloc(1, sizeof *cp);
  is_check = calloc(c->n_poses ? c->n_poses : 1, 1);
  if (cp == NULL || is_check == NULL)
    goto nomem;
  cp->check_rms_with_noise = NAN;
  cp->workspace = twf_predict_workspace(pr, wo, err);
  if (cp->workspace == NULL)
    goto fail;
  for (i = 0; i < c->n_meas; i++)
    if (res->meas_set[i] == TWF_SET_CHECK && !is_check[c->meas[i].pose]) {
      is_check[c->meas[i].pose] = 1;
      n++;
    }
  cp->check_pose = calloc(n ? n : 1, sizeof *cp->check_pose);
  q = malloc((n ? n : 1) * (nj ? nj : 1) * sizeof *q);
  if (cp->check_pose == NULL || q == NULL)
    goto nomem;
  for (i = 0, n = 0; i < c->n_poses; i++)
    if (is_check[i]) {
      cp->check_pose[n] = i;
      memcpy(q + n * nj, c->q + i * nj, nj * sizeof *q);
      n++;
    }
  cp->check = twf_predict_at_configs(pr, q, n, err);
  if (cp->check == NULL)
    goto fail;
  /* a check pose of another station: its rows, and so its base pose's
   * uncertainty, are that station's */
  if (pr->d.n_stations > 1) {
    for (i = 0; i < n; i++) {
      double o;
      pr->d.grad_station = twf_campaign_pose_station(c, cp->check_pose[i]);
      twf_predictor_at(pr, q + i * nj, &cp->check->position[i], &o);
      if (cp->check->orientation != NULL)
        cp->check->orientation[i] = o;
    }
    pr->d.grad_station = 0;
    if (twf_accuracy_stats(cp->check->position, n, &cp->check->position_stats, err) != TWF_OK ||
        twf_accuracy_stats(cp->check->orientation, cp->check->orientation ? n : 0,
                           &cp->check->orientation_stats, err) != TWF_OK)
      goto fail;
  }
  /* the measured check errors hold the model's error and the noise of
   * the three coordinates of each row */
  {
    size_t *slot = malloc((c->n_poses ? c->n_poses : 1) * sizeof *slot);
    if (slot == NULL)
      goto nomem;
    for (i = 0; i < n; i++)
      slot[cp->check_pose[i]] = i;
    for (i = 0; i < c->n_meas; i++)
      if (res->meas_set[i] == TWF_SET_CHECK) {
        double u = cp->check->position[slot[c->meas[i].pose]], s = meas_sigma(res, &c->meas[i]);
        sum += u * u + 3.0 * s * s;
        rows++;
      }
    free(slot);
  }
  if (rows > 0)
    cp->check_rms_with_noise = sqrt(sum / (double)rows);
  free(q);
  free(is_check);
  twf_predictor_free(pr);
  *out = cp;
  return TWF_OK;
nomem:
  twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
fail:
  free(q);
  free(is_check);
  twf_calib_prediction_free(cp);
  twf_predictor_free(pr);
  return err ? err->status : TWF_ERR_NOMEM;
}
