/* resample.c: uncertainty by resampling (Efron and Tibshirani 1993, "An
 * Introduction to the Bootstrap", ch. 6 and 9: resampling the cases, here
 * the poses, whose rows share one joint configuration). The covariance of
 * the fit assumes the model is right and the noise independent; the spread
 * of refits on resampled poses does not, so a disagreement of the two
 * points at model error or correlated noise. */
#include "lsq.h"

#include <pthread.h>
#include <stdlib.h>

void twf_resample_result_free(twf_resample_result *r)
{
  if (r == NULL)
    return;
  free(r->params);
  free(r);
}

/* What the refits share: the poses to draw from and their fit rows, the
 * check rows, and where each refit puts its figures. */
typedef struct boot {
  const twf_model *start;
  const twf_campaign *c;
  twf_calib_options opt;
  const twf_calib_result *base;
  unsigned long long seed;
  size_t n_refits, p;
  size_t n_fit_poses, *fit_pose;   /* the poses with fit rows */
  size_t *fit_start, *fit_meas;    /* their fit rows (CSR over fit_pose) */
  size_t n_check_poses, *check_pose, *check_start, *check_meas;
  double *value;                   /* n_refits x p, NaN where not estimated */
  double *check;                   /* n_refits x TWF_RESAMPLE_FIGURES, NaN without */
  unsigned char *ok;
  /* Instrument stations: the draw is stratified, a fit pose of station s
   * replaced by one of that station's (so every station keeps its count
   * of poses, which the day's set-up fixed): fit_of_station lists the
   * indices into fit_pose of each station's, station-major. With one
   * station it is 0, 1, ... and the draws are those of a plain
   * bootstrap. */
  size_t n_stations, *fit_of_station, sta_start[TWF_STATIONS_MAX + 1];
  pthread_mutex_t mu;
  size_t next;
} boot;

/* One refit into its own rows of value and check; no shared writes. */
static void refit(boot *b, size_t k)
{
  const twf_campaign *c = b->c;
  unsigned long long s = b->seed ^ (0x9e3779b97f4a7c15ULL * (unsigned long long)(k + 1));
  size_t n_poses = b->n_fit_poses + b->n_check_poses, n_meas = 0, i, t, a, pose = 0, mi = 0;
  size_t *draw = malloc((b->n_fit_poses ? b->n_fit_poses : 1) * sizeof *draw);
  twf_campaign *rc = NULL;
  twf_calib_result *res = NULL;
  twf_error err;
  double *v = b->value + k * b->p, *f = b->check + k * TWF_RESAMPLE_FIGURES;
  for (a = 0; a < b->p; a++)
    v[a] = NAN;
  for (a = 0; a < TWF_RESAMPLE_FIGURES; a++)
    f[a] = NAN;
  if (draw == NULL)
    return;
  for (i = 0; i < b->n_fit_poses; i++) {
    size_t st = twf_campaign_pose_station(c, b->fit_pose[i]);
    size_t n_st = b->sta_start[st + 1] - b->sta_start[st];
    draw[i] = b->fit_of_station[b->sta_start[st] + (size_t)(twf_rng_next(&s) % n_st)];
    n_meas += b->fit_start[draw[i] + 1] - b->fit_start[draw[i]];
  }
  n_meas += b->check_start[b->n_check_poses];
  rc = twf_campaign_alloc(c->n_joints, n_poses, n_meas);
  if (rc == NULL)
    goto done;
  rc->has_orientation_any = c->has_orientation_any;
  if (c->pose_payload != NULL && twf_campaign_payload_alloc(rc) != TWF_OK) {
    twf_campaign_free(rc);
    rc = NULL;
    goto done;
  }
  /* the drawn poses with their fit rows, then the check poses with theirs */
  for (i = 0; i < b->n_fit_poses + b->n_check_poses; i++, pose++) {
    int fit = i < b->n_fit_poses;
    size_t src = fit ? b->fit_pose[draw[i]] : b->check_pose[i - b->n_fit_poses];
    size_t t0 = fit ? b->fit_start[draw[i]] : b->check_start[i - b->n_fit_poses];
    size_t t1 = fit ? b->fit_start[draw[i] + 1] : b->check_start[i - b->n_fit_poses + 1];
    memcpy(rc->q + pose * c->n_joints, c->q + src * c->n_joints, c->n_joints * sizeof *c->q);
    snprintf(rc->pose_ids[pose], TWF_NAME_MAX, "%c%zu", fit ? 'R' : 'C', i + 1);
    rc->pose_lines[pose] = c->pose_lines[src];
    if (rc->pose_payload != NULL)
      rc->pose_payload[pose] = twf_campaign_payload(c, src);
    for (t = t0; t < t1; t++) {
      size_t from = fit ? b->fit_meas[t] : b->check_meas[t];
      rc->meas[mi] = c->meas[from];
      rc->meas[mi].pose = (uint32_t)pose;
      rc->meas[mi].set = fit ? TWF_SET_FIT : TWF_SET_CHECK;
      rc->meas[mi].has_orientation = 0;
      rc->meas[mi].quat_slot = 0;
      if (c->meas[from].has_orientation &&
          twf_campaign_meas_set_quat(rc, mi, twf_campaign_meas_quat(c, from)) != TWF_OK) {
        twf_campaign_free(rc);
        rc = NULL;
        goto done;
      }
      mi++;
    }
  }
  if (c->n_stations > 0) {
    size_t *ps = malloc((n_poses ? n_poses : 1) * sizeof *ps);
    twf_status sst;
    if (ps == NULL)
      goto done;
    for (i = 0; i < n_poses; i++) {
      int fit = i < b->n_fit_poses;
      ps[i] = twf_campaign_pose_station(c, fit ? b->fit_pose[draw[i]] : b->check_pose[i - b->n_fit_poses]);
    }
    sst = twf_campaign_set_stations(rc, c->n_stations, (const char (*)[TWF_NAME_MAX])c->station_names, ps, NULL);
    free(ps);
    if (sst != TWF_OK)
      goto done;
  }
  if (twf_calibrate(b->start, rc, &b->opt, &res, NULL, &err) != TWF_OK)
    goto done;
  b->ok[k] = 1;
  /* Each refit registers anew, so its changes start from its own
   * registration: express the base and the registered target offsets
   * against the base result's registration, where they compare. */
  {
    double step[TWF_STATIONS_MAX][6], xi[TWF_STATIONS_MAX][6];
    twf_pose E, Bk, B0inv, D;
    int any_base[TWF_STATIONS_MAX];
    size_t sta;
    memset(step, 0, sizeof step);
    memset(xi, 0, sizeof xi);
    memset(any_base, 0, sizeof any_base);
    for (a = 0; a < b->p && a < res->n_params; a++)
      if (res->params[a].param.group == TWF_GROUP_BASE) {
        step[res->params[a].param.station][res->params[a].param.component] = res->params[a].change;
        any_base[res->params[a].param.station] = 1;
      }
    for (sta = 0; sta < b->n_stations; sta++)
      if (any_base[sta]) {
        twf_se3_exp(step[sta], 1.0, &E);
        twf_pose_mul(&res->station_base_before[sta], &E, &Bk);
        twf_pose_inv(&b->base->station_base_before[sta], &B0inv);
        twf_pose_mul(&B0inv, &Bk, &D);
        twf_se3_log(&D, xi[sta]);
      }
    for (a = 0; a < b->p && a < res->n_params; a++) {
      const twf_param *par = &res->params[a].param;
      if (res->params[a].status != TWF_PARAM_KEPT)
        continue;
      if (par->group == TWF_GROUP_BASE)
        v[a] = xi[par->station][par->component];
      else if (par->group == TWF_GROUP_TARGETS)
        v[a] = res->params[a].change + res->registered->targets[par->target].offset[par->component] -
               b->base->registered->targets[par->target].offset[par->component];
      else
        v[a] = res->params[a].change;
    }
  }
  if (res->accuracy_after->position[TWF_SET_CHECK].count > 0) {
    f[0] = res->accuracy_after->position[TWF_SET_CHECK].rms;
    f[1] = res->accuracy_after->position[TWF_SET_CHECK].p95;
    f[2] = res->accuracy_after->position[TWF_SET_CHECK].max;
  }
done:
  twf_calib_result_free(res);
  twf_campaign_free(rc);
  free(draw);
}

static void *boot_worker(void *arg)
{
  boot *b = arg;
  for (;;) {
    size_t k;
    pthread_mutex_lock(&b->mu);
    k = b->next++;
    pthread_mutex_unlock(&b->mu);
    if (k >= b->n_refits)
      return NULL;
    refit(b, k);
  }
}

/* The poses with rows of one set and those rows, in campaign order. */
static int rows_by_pose(const twf_campaign *c, const twf_calib_result *base, twf_meas_set set,
                        size_t **pose_out, size_t **start_out, size_t **meas_out, size_t *n_out)
{
  size_t *first = malloc((c->n_poses ? c->n_poses : 1) * sizeof *first);
  size_t *count = calloc(c->n_poses ? c->n_poses : 1, sizeof *count);
  size_t i, n = 0, total = 0;
  int rc = -1;
  *pose_out = *start_out = *meas_out = NULL;
  if (first == NULL || count == NULL)
    goto done;
  for (i = 0; i < c->n_meas; i++)
    if (base->meas_set[i] == set)
      count[c->meas[i].pose]++;
  for (i = 0; i < c->n_poses; i++)
    if (count[i] > 0) {
      first[i] = n++;
      total += count[i];
    }
  *pose_out = malloc((n ? n : 1) * sizeof **pose_out);
  *start_out = calloc(n + 1, sizeof **start_out);
  *meas_out = malloc((total ? total : 1) * sizeof **meas_out);
  if (*pose_out == NULL || *start_out == NULL || *meas_out == NULL)
    goto done;
  for (i = 0; i < c->n_poses; i++)
    if (count[i] > 0) {
      (*pose_out)[first[i]] = i;
      (*start_out)[first[i] + 1] = count[i];
    }
  for (i = 0; i < n; i++)
    (*start_out)[i + 1] += (*start_out)[i];
  memset(count, 0, c->n_poses * sizeof *count);
  for (i = 0; i < c->n_meas; i++)
    if (base->meas_set[i] == set) {
      size_t ps = c->meas[i].pose;
      (*meas_out)[(*start_out)[first[ps]] + count[ps]++] = i;
    }
  *n_out = n;
  rc = 0;
done:
  free(first);
  free(count);
  return rc;
}

/* Mean and sample standard deviation of the finite v[k * stride] (two
 * passes, in index order). */
static size_t spread(const double *v, size_t n, size_t stride, double *mean, double *std)
{
  size_t k, m = 0;
  double s = 0.0, ss = 0.0;
  for (k = 0; k < n; k++)
    if (isfinite(v[k * stride])) {
      s += v[k * stride];
      m++;
    }
  *mean = m ? s / (double)m : NAN;
  for (k = 0; k < n; k++)
    if (isfinite(v[k * stride]))
      ss += (v[k * stride] - *mean) * (v[k * stride] - *mean);
  *std = m > 1 ? sqrt(ss / (double)(m - 1)) : NAN;
  return m;
}

twf_status twf_calibrate_resample(const twf_model *start, const twf_campaign *c,
                                  const twf_calib_options *opt, const twf_calib_result *base,
                                  size_t n_refits, unsigned long long seed,
                                  twf_resample_result **out, twf_warnings *warnings, twf_error *err)
{
  boot b;
  twf_resample_result *r = NULL;
  pthread_t tid[TWF_LSQ_THREADS_MAX];
  int n_threads, t, started = 0;
  size_t a, k;
  twf_status st = TWF_OK;

  *out = NULL;
  if (start == NULL || c == NULL || base == NULL || base->n_meas != c->n_meas || n_refits == 0)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "resampling needs the campaign's calibration and at least one refit");
  memset(&b, 0, sizeof b);
  b.start = start;
  b.c = c;
  b.opt = opt ? *opt : twf_calib_default_options();
  b.opt.check_fraction = 0.0; /* the sets are the base result's */
  b.opt.threads = 1;          /* one refit per thread */
  /* Each refit takes the base run's verdict on its screen: a drawn set
   * that repeats a pose repeats its gross errors (more than the screen's
   * limit can then be dropped) and its residual pattern (the pattern test
   * takes the repeats for independent readings and finds a pattern more
   * readily), so the refits would refuse screens the base run accepted,
   * keep gross errors and spread for that reason alone. Accepted: every
   * refit screens without the limit; refused: no refit screens. */
  if (base->screen_refused > 0)
    b.opt.robust = TWF_ROBUST_OFF;
  else
    b.opt.screen_max_fraction = 1.0;
  b.base = base;
  b.seed = seed;
  b.n_refits = n_refits;
  b.p = base->n_params;
  if (rows_by_pose(c, base, TWF_SET_FIT, &b.fit_pose, &b.fit_start, &b.fit_meas, &b.n_fit_poses) != 0 ||
      rows_by_pose(c, base, TWF_SET_CHECK, &b.check_pose, &b.check_start, &b.check_meas, &b.n_check_poses) != 0)
    goto nomem;
  /* the fit poses of each station, for the stratified draw */
  b.n_stations = twf_campaign_station_count(c);
  b.fit_of_station = malloc((b.n_fit_poses ? b.n_fit_poses : 1) * sizeof *b.fit_of_station);
  if (b.fit_of_station == NULL)
    goto nomem;
  {
    size_t sta, i2, n2 = 0;
    for (sta = 0; sta < b.n_stations; sta++) {
      b.sta_start[sta] = n2;
      for (i2 = 0; i2 < b.n_fit_poses; i2++)
        if (twf_campaign_pose_station(c, b.fit_pose[i2]) == sta)
          b.fit_of_station[n2++] = i2;
      if (n2 == b.sta_start[sta]) {
        st = twf_error_set(err, TWF_ERR_DEGENERATE, NULL, 0, 0, NULL,
                           "station '%s' has no fit pose to resample", c->station_names[sta]);
        goto fail_early;
      }
    }
    b.sta_start[b.n_stations] = n2;
  }
  b.value = malloc(n_refits * (b.p ? b.p : 1) * sizeof *b.value);
  b.check = malloc(n_refits * TWF_RESAMPLE_FIGURES * sizeof *b.check);
  b.ok = calloc(n_refits, 1);
  r = calloc(1, sizeof *r);
  if (b.value == NULL || b.check == NULL || b.ok == NULL || r == NULL)
    goto nomem;
  r->params = calloc(b.p ? b.p : 1, sizeof *r->params);
  if (r->params == NULL)
    goto nomem;

  n_threads = twf_lsq_threads(opt ? opt->threads : 0);
  if ((size_t)n_threads > n_refits)
    n_threads = (int)n_refits;
  pthread_mutex_init(&b.mu, NULL);
  for (t = 1; t < n_threads; t++) {
    if (pthread_create(&tid[t], NULL, boot_worker, &b) != 0)
      break;
    started++;
  }
  boot_worker(&b);
  for (t = 1; t <= started; t++)
    pthread_join(tid[t], NULL);
  pthread_mutex_destroy(&b.mu);

  r->n_refits = n_refits;
  r->seed = seed;
  r->n_params = b.p;
  for (k = 0; k < n_refits; k++)
    r->n_ok += b.ok[k];
  for (a = 0; a < b.p; a++) {
    twf_resample_param *rp = &r->params[a];
    double pred = base->params[a].std;
    rp->n = spread(b.value + a, n_refits, b.p, &rp->mean, &rp->std);
    rp->ratio = isfinite(rp->std) && pred > 0 ? rp->std / pred : NAN;
    rp->disagree = isfinite(rp->ratio) && (rp->ratio > 2.0 || rp->ratio < 0.5);
    if (rp->disagree)
      twf_warnings_add(warnings, NULL, 0, 0,
                       "%s: the spread over %zu resampled refits is %.3g times the predicted standard "
                       "deviation (model error or correlated noise, or too few poses)",
                       base->params[a].param.name, rp->n, rp->ratio);
  }
  {
    const twf_stats *cs = &base->accuracy_after->position[TWF_SET_CHECK];
    r->check_base[0] = cs->count ? cs->rms : NAN;
    r->check_base[1] = cs->count ? cs->p95 : NAN;
    r->check_base[2] = cs->count ? cs->max : NAN;
    for (k = 0; k < TWF_RESAMPLE_FIGURES; k++)
      r->n_check = spread(b.check + k, n_refits, TWF_RESAMPLE_FIGURES, &r->check_mean[k], &r->check_std[k]);
  }
  if (r->n_ok < n_refits)
    twf_warnings_add(warnings, NULL, 0, 0, "%zu of %zu resampled refits were refused (too few distinct poses "
                     "or a degenerate draw); the spreads are over the %zu others",
                     n_refits - r->n_ok, n_refits, r->n_ok);
  *out = r;
  r = NULL;
  goto done;
nomem:
  st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
fail_early:
done:
  twf_resample_result_free(r);
  free(b.fit_of_station);
  free(b.fit_pose); free(b.fit_start); free(b.fit_meas);
  free(b.check_pose); free(b.check_start); free(b.check_meas);
  free(b.value); free(b.check); free(b.ok);
  return st;
}
