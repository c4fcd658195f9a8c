/* calib.c: the calibration job (DEVELOPERS.md, "The maths"). twf_calibrate is a
 * driver that runs named stages in order on one job: the sets and joint
 * ranges, the registration and its refinement, the problem at the
 * registered model, the structural redundancy and the redundancy on the
 * user's poses, the degrees-of-freedom check, the fit, the robust screen,
 * the covariance and identifiability figures, the as-built summary and the
 * plausibility checks. The least-squares machinery is in lsq.c, the screen
 * in robust.c, the registration in register.c and refine.c. */
#include "lsq.h"
#include "robust.h"
#include "ident.h"
#include "warn.h"

#include <stdlib.h>

twf_calib_options twf_calib_default_options(void)
{
  twf_calib_options o;
  int g;
  memset(&o, 0, sizeof o);
  o.groups = TWF_GROUPS_GEOMETRIC;
  for (g = 0; g < TWF_GROUP_COUNT; g++)
    o.priority[g] = (twf_group)g;
  o.robust = TWF_ROBUST_DROP;
  o.robust_threshold = TWF_ROBUST_THRESHOLD_DEFAULT;
  o.seed = 20261201ULL;
  o.max_iterations = 100;
  o.step_tol_m = 1e-10;
  o.redundancy_tol = TWF_REDUNDANCY_TOL_DEFAULT;
  o.weak_ratio = 5.0;
  o.worst_poses = 5;
  o.screen_max_fraction = 0.05;
  o.screen_pattern_fraction = 0.0;
  o.pattern = twf_pattern_default_options();
  return o;
}

/* ------------------------------------------------------------ advice */

static const char *const advice_texts[] = {
  [TWF_ADVICE_NONE] = "",
  [TWF_ADVICE_FIX_MORE] = "fix more parameters (fit fewer groups) or measure more varied poses",
  [TWF_ADVICE_MORE_POSES] = "measure more poses, or fit fewer groups",
  [TWF_ADVICE_MORE_POSES_OR_SIGMA] = "measure more poses, fit fewer groups, or give the noise (sigma_length)",
  /* one string in two pieces (parenthesised, so no compiler takes it for
   * a missing comma) */
  [TWF_ADVICE_ACCEPT_LARGE] = ("check the joint order and signs, the units and that the model is this arm's; "
                               "set accept_large if the arm really is that far from its model"),
};
#define N_ADVICE (sizeof advice_texts / sizeof advice_texts[0])

const char *twf_advice_text(twf_advice a)
{
  return (size_t)a < N_ADVICE ? advice_texts[a] : "";
}

twf_advice twf_advice_of(const twf_error *err)
{
  size_t a;
  if (err == NULL || err->hint[0] == '\0')
    return TWF_ADVICE_NONE;
  for (a = 1; a < N_ADVICE; a++)
    if (strcmp(err->hint, advice_texts[a]) == 0)
      return (twf_advice)a;
  return TWF_ADVICE_NONE;
}

/* ------------------------------------------------------------ the verdict */

const char *twf_calib_verdict_name(twf_calib_verdict v)
{
  switch (v) {
  case TWF_VERDICT_IMPROVED: return "improved";
  case TWF_VERDICT_NOT_IMPROVED: return "not improved";
  case TWF_VERDICT_DO_NOT_USE: return "do not use";
  }
  return "?";
}

const char *twf_verdict_basis_name(twf_verdict_basis b)
{
  switch (b) {
  case TWF_BASIS_CHECK: return "check set";
  case TWF_BASIS_CHECK_SCREENED: return "check set without flagged rows";
  case TWF_BASIS_FIT: return "fit set";
  }
  return "?";
}

/* ------------------------------------------------------------ the result */

void twf_calib_result_free(twf_calib_result *r)
{
  if (r == NULL)
    return;
  twf_model_free(r->asbuilt);
  twf_model_free(r->registered);
  free(r->params);
  free(r->outliers);
  free(r->meas_set);
  free(r->pos_err_before);
  free(r->pos_err_after);
  free(r->angle_err_before);
  free(r->angle_err_after);
  free(r->joint_range);
  free(r->target_in_fit);
  twf_asbuilt_comparison_clear(&r->comparison);
  twf_accuracy_summary_free(r->accuracy_before);
  twf_accuracy_summary_free(r->accuracy_after);
  free(r->excluded);
  free(r->check_flagged);
  free(r->joint_undetermined);
  twf_pattern_result_clear(&r->pattern);
  twf_compliance_summary_clear(&r->compliance);
  free(r->covariance);
  free(r->singular_values);
  twf_links_clear(&r->links);
  free(r->link_change);
  twf_trace_clear(&r->trace);
  free(r);
}

/* ------------------------------------------------------------ the job */

/* Everything the stages share. Arrays of n_meas or p entries are sized
 * once by the stage that first needs them and released by job_free. */
typedef struct job {
  const twf_model *start;
  const twf_campaign *c;
  twf_calib_options opt;
  twf_warnings *warnings;
  twf_error *err;
  twf_calib_result *res;
  double sigma_len;          /* sigma of the weights (given, the rows' mean, or a placeholder) */
  int sigma_from_rows;
  int with_orientation;      /* the fit set has 6-D rows */
  unsigned char *use;        /* n_meas: in the effective fit set */
  unsigned char *target_seen;/* n_targets: has fit rows */
  twf_measurement *view_meas;
  twf_campaign view;         /* the campaign with the effective sets */
  twf_model *reg;            /* the registered starting model */
  twf_lsq_problem pr;
  size_t p;
  size_t *order, n_order;    /* the walk order of the parameters */
  unsigned char *keep_struct, *keep;
  double *scales, *As, *Rf, *rel, *cov, *value, *ratio;
  double *score, *first_score, *first_err;
  size_t n_rows;             /* weighted rows at the solution */
} job;

static twf_status nomem(job *j)
{
  return twf_error_set(j->err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
}

static void job_free(job *j)
{
  twf_model_free(j->reg);
  twf_lsq_free(&j->pr);
  free(j->use); free(j->target_seen); free(j->view_meas);
  free(j->order); free(j->keep_struct); free(j->keep);
  free(j->scales); free(j->As); free(j->Rf); free(j->rel); free(j->cov); free(j->value); free(j->ratio);
  free(j->score); free(j->first_score); free(j->first_err);
}

static twf_status check_options(const twf_calib_options *o, twf_error *err)
{
  if (!(o->robust_threshold > 0) || !(o->check_fraction >= 0 && o->check_fraction < 1) ||
      o->max_iterations < 1 || !(o->redundancy_tol > 0 && o->redundancy_tol < 1) ||
      !(o->sigma_length >= 0) || !(o->sigma_angle >= 0) || !(o->weak_ratio > 0) || o->groups == 0 ||
      o->threads < 0 || !(o->screen_max_fraction > 0 && o->screen_max_fraction <= 1) ||
      !(o->screen_pattern_fraction >= 0 && o->screen_pattern_fraction <= 1) ||
      !(o->pattern.alpha > 0 && o->pattern.alpha < 1) ||
      !(o->pattern.min_explained >= 0 && o->pattern.min_explained < 1))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0,
                         "use positive thresholds, a held-out fraction in [0, 1), at least one iteration, "
                         "a screen limit in (0, 1] and a pattern alpha in (0, 1)",
                         "invalid calibration options");
  return TWF_OK;
}

/* The compliance group needs torques: a mass model in the model file. */
static twf_status check_mass_model(const twf_model *m, unsigned groups, twf_error *err)
{
  if ((groups & TWF_GROUP_BIT(TWF_GROUP_COMPLIANCE)) && !twf_model_has_masses(m))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0,
                         "declare the bodies' masses ([mass JOINT]) and the payloads ([payload NAME]) in "
                         "the model file, see twistfit-model(5)",
                         "the compliance group needs a mass model: the model declares no masses");
  return TWF_OK;
}

/* The sigma of the weights: given, else the mean of the rows' own (as the
 * registration does), else a placeholder scaled a posteriori. */
static void job_sigma(job *j)
{
  const twf_campaign *c = j->c;
  double sum = 0.0;
  size_t i, n_sig = 0;
  j->sigma_len = j->opt.sigma_length;
  if (j->sigma_len > 0)
    return;
  for (i = 0; i < c->n_meas; i++)
    if (c->meas[i].sigma > 0) {
      sum += c->meas[i].sigma;
      n_sig++;
    }
  j->sigma_len = n_sig ? sum / (double)n_sig : 1e-4;
  j->sigma_from_rows = n_sig > 0;
}

/* The result's per-measurement and per-joint arrays. */
static twf_status job_alloc_result(job *j)
{
  const twf_campaign *c = j->c;
  size_t nm = c->n_meas ? c->n_meas : 1, nt = j->start->n_targets ? j->start->n_targets : 1;
  twf_calib_result *res = j->res = calloc(1, sizeof *res);
  j->use = calloc(nm, 1);
  j->target_seen = calloc(nt, 1);
  if (res == NULL || j->use == NULL || j->target_seen == NULL)
    return nomem(j);
  twf_trace_init(&res->trace);
  res->n_meas = c->n_meas;
  res->meas_set = calloc(nm, sizeof *res->meas_set);
  res->joint_range = calloc(j->start->n_joints ? j->start->n_joints : 1, sizeof(double));
  /* the residuals before and after: at the as-built summary, so that they
   * add neither to the registration's peak memory nor to the fit's and
   * the screen's */
  if (!res->meas_set || !res->joint_range)
    return nomem(j);
  return TWF_OK;
}

/* ------------------------------------------------------------ stage: sets */

/* Range of each joint over the fit poses. */
static twf_status joint_ranges(job *j)
{
  const twf_campaign *c = j->c;
  size_t nj = j->start->n_joints, i, k;
  double *lo = calloc(nj ? nj : 1, sizeof *lo), *hi = calloc(nj ? nj : 1, sizeof *hi);
  unsigned char *seen = calloc(c->n_poses ? c->n_poses : 1, 1);
  twf_status st = TWF_OK;
  if (!lo || !hi || !seen) {
    st = nomem(j);
    goto done;
  }
  for (k = 0; k < nj; k++) {
    lo[k] = INFINITY;
    hi[k] = -INFINITY;
  }
  for (i = 0; i < c->n_meas; i++) {
    size_t ps = c->meas[i].pose;
    if (!j->use[i] || seen[ps])
      continue;
    seen[ps] = 1;
    j->res->n_fit_poses++;
    for (k = 0; k < nj; k++) {
      double v = c->q[ps * nj + k];
      lo[k] = fmin(lo[k], v);
      hi[k] = fmax(hi[k], v);
    }
  }
  for (k = 0; k < nj; k++)
    j->res->joint_range[k] = hi[k] - lo[k];
done:
  free(lo); free(hi); free(seen);
  return st;
}

/* The effective sets: the tagged check rows plus a seeded random fraction
 * of the poses held out; the campaign view carries them. */
static twf_status stage_sets(job *j)
{
  const twf_campaign *c = j->c;
  twf_calib_result *res = j->res;
  unsigned char *held = calloc(c->n_poses ? c->n_poses : 1, 1);
  size_t i, n_moved = 0;
  if (held == NULL)
    return nomem(j);
  if (j->opt.check_fraction > 0) {
    unsigned long long s = j->opt.seed ^ 0x5deece66dULL;
    for (i = 0; i < c->n_poses; i++)
      held[i] = twf_rng_uniform(&s) < j->opt.check_fraction;
  }
  for (i = 0; i < c->n_meas; i++) {
    const twf_measurement *ms = &c->meas[i];
    res->meas_set[i] = ms->set == TWF_SET_CHECK || held[ms->pose] ? TWF_SET_CHECK : TWF_SET_FIT;
    n_moved += res->meas_set[i] != ms->set;
  }
  /* A copy of the measurements (the size of the campaign) only when the
   * held-out fraction moved rows; else the view is the campaign itself. */
  if (n_moved > 0) {
    j->view_meas = malloc((c->n_meas ? c->n_meas : 1) * sizeof *j->view_meas);
    if (j->view_meas == NULL) {
      free(held);
      return nomem(j);
    }
    memcpy(j->view_meas, c->meas, c->n_meas * sizeof *j->view_meas);
  }
  for (i = 0; i < c->n_meas; i++) {
    const twf_measurement *ms = &c->meas[i];
    if (j->view_meas != NULL)
      j->view_meas[i].set = res->meas_set[i];
    j->use[i] = res->meas_set[i] == TWF_SET_FIT;
    if (j->use[i]) {
      res->n_fit_meas++;
      j->target_seen[ms->target] = 1;
      if (ms->has_orientation)
        j->with_orientation = 1;
    } else {
      res->n_check_meas++;
    }
  }
  free(held);
  j->view = *c;
  if (j->view_meas != NULL)
    j->view.meas = j->view_meas;
  if (res->n_fit_meas == 0)
    return twf_error_set(j->err, TWF_ERR_DEGENERATE, NULL, 0, 0,
                         "tag fewer rows as check data or lower the held-out fraction",
                         "no measurement is left for the fit");
  return joint_ranges(j);
}

/* ------------------------------------------------------------ stage: registration */

/* The registration of the starting model and its refinement on the
 * effective fit set: the "before" figures. */
static twf_status stage_registration(job *j)
{
  twf_register_options ro = twf_register_default_options();
  twf_refine_options fo = twf_refine_default_options();
  twf_status st;
  j->reg = twf_model_copy(j->start);
  if (j->reg == NULL)
    return nomem(j);
  ro.sigma_default_m = j->opt.sigma_length;
  fo.sigma_length = j->sigma_len;
  fo.screen = j->opt.robust != TWF_ROBUST_OFF;
  fo.robust_threshold = j->opt.robust_threshold;
  fo.threads = j->opt.threads;
  {
    twf_registration_report rep;
    j->res->n_stations = twf_campaign_station_count(j->c);
    st = twf_register_and_refine(j->reg, &j->view, &ro, &fo, j->res->station_base_before, &rep, NULL,
                                 &j->res->trace, j->err);
    j->res->registration = rep.refinement;
    j->res->base_before = j->res->station_base_before[0];
  }
  return st;
}

/* ------------------------------------------------------------ stage: the problem */

/* Walk order: groups in priority order, parameters of a group in their
 * internal order. */
static size_t walk_order(const twf_lsq_problem *pr, const twf_group *priority, size_t *order)
{
  size_t n = 0, k;
  int gi;
  for (gi = 0; gi < TWF_GROUP_COUNT; gi++)
    for (k = 0; k < pr->p; k++)
      if (twf_errmodel_param(pr->em, k)->group == priority[gi])
        order[n++] = k;
  return n;
}

/* The least-squares problem at the registered model, its workspaces and
 * the parameter list of the result. */
static twf_status stage_problem(job *j)
{
  size_t p, k, nm = j->c->n_meas ? j->c->n_meas : 1;
  twf_status st = twf_lsq_init(&j->pr, j->reg, j->c, j->opt.groups, j->use, j->sigma_len,
                               j->opt.sigma_angle, j->err);
  if (st != TWF_OK)
    return st;
  memcpy(j->pr.base, j->res->station_base_before, j->res->n_stations * sizeof *j->pr.base);
  j->pr.n_threads = twf_lsq_threads(j->opt.threads);
  p = j->p = j->pr.p;
  j->res->n_params = p;
  j->res->params = calloc(p ? p : 1, sizeof *j->res->params);
  j->keep_struct = calloc(p ? p : 1, 1);
  j->keep = calloc(p ? p : 1, 1);
  j->order = calloc(p ? p : 1, sizeof *j->order);
  j->As = calloc(p ? p * p : 1, sizeof *j->As);
  j->Rf = calloc(p ? p * p : 1, sizeof *j->Rf);
  j->scales = calloc(p ? p : 1, sizeof *j->scales);
  j->cov = calloc(p ? p * p : 1, sizeof *j->cov);
  j->value = calloc(p ? p : 1, sizeof *j->value);
  j->rel = calloc(p ? p : 1, sizeof *j->rel);
  j->ratio = calloc(p ? p : 1, sizeof *j->ratio);
  j->score = calloc(nm, sizeof *j->score);
  j->first_err = calloc(nm, sizeof *j->first_err);
  j->first_score = calloc(nm, sizeof *j->first_score);
  if (!j->res->params || !j->keep_struct || !j->keep || !j->order || !j->As || !j->Rf || !j->scales ||
      !j->cov || !j->value || !j->rel || !j->ratio || !j->score || !j->first_err ||
      !j->first_score)
    return nomem(j);
  for (k = 0; k < p; k++) {
    j->res->params[k].param = *twf_errmodel_param(j->pr.em, k);
    j->scales[k] = twf_errmodel_param_scale(j->pr.em, k);
  }
  j->n_order = walk_order(&j->pr, j->opt.priority, j->order);
  return TWF_OK;
}

/* ------------------------------------------------------------ stages: redundancy */

/* The triangular factor R (R^T R = J^T J) of a synthetic rich pose set
 * within the joint limits: the structural redundancy is walked on it. */
static twf_status synthetic_factor(const twf_lsq_problem *pr, size_t n_poses, unsigned long long seed,
                                   const unsigned char *target_seen, int with_orientation,
                                   double *R)
{
  const twf_model *m = pr->m;
  size_t p = pr->p, n = m->n_joints, s, k;
  long pl;
  double *q = calloc(n ? n : 1, sizeof *q);
  double *rows = calloc(3 * (p ? p : 1), sizeof *rows);
  unsigned long long st = seed;
  if (q == NULL || rows == NULL) {
    free(q); free(rows);
    return TWF_ERR_NOMEM;
  }
  memset(R, 0, p * p * sizeof *R);
  for (s = 0; s < n_poses; s++) {
    for (k = 0; k < n; k++) {
      const twf_joint *jt = &m->joints[k];
      double lo = jt->has_limits ? jt->limit_lo : (jt->type == TWF_JOINT_REVOLUTE ? -TWF_PI : -0.1);
      double hi = jt->has_limits ? jt->limit_hi : (jt->type == TWF_JOINT_REVOLUTE ? TWF_PI : 0.1);
      q[k] = lo + (hi - lo) * twf_rng_uniform(&st);
    }
    /* the synthetic poses are shared out over the stations in turn, and
     * every load the model declares in turn, so that a compliance is
     * judged on every torque the campaign could give */
    size_t sta = s % pr->n_stations;
    pl = m->n_payloads > 0 ? (long)(s % (m->n_payloads + 1)) - 1 : -1;
    twf_errmodel_set_payload(pr->em, pl);
    twf_errmodel_eval_station(pr->em, m, &pr->base[sta], sta, q, NULL);
    for (k = 0; k < m->n_targets; k++) {
      double y[3];
      int pass;
      if (!target_seen[k])
        continue;
      for (pass = 0; pass < (with_orientation ? 2 : 1); pass++) {
        if (pass == 0) {
          twf_errmodel_point(pr->em, m, k, y, rows);
        } else {
          double r[3];
          twf_pose T;
          twf_model_fk_load(m, q, pl, NULL, &T);
          twf_pose_mul(&pr->base[sta], &T, &T);
          twf_errmodel_orientation(pr->em, T.R, r, rows);
        }
        twf_ident_qr_add_row(R, p, rows);
        twf_ident_qr_add_row(R, p, rows + p);
        twf_ident_qr_add_row(R, p, rows + 2 * p);
      }
    }
  }
  free(q);
  free(rows);
  return TWF_OK;
}


/* Structural redundancy on a rich synthetic pose set: what no pose set of
 * this arm and measurement kind can determine. */
static twf_status stage_structural_redundancy(job *j)
{
  twf_calib_result *res = j->res;
  size_t p = j->p, k;
  size_t n_syn = j->opt.synthetic_poses ? j->opt.synthetic_poses : (p < 40 ? 200 : 5 * p);
  if (synthetic_factor(&j->pr, n_syn, j->opt.seed, j->target_seen, j->with_orientation, j->Rf) != TWF_OK)
    return nomem(j);
  if (twf_ident_walk_r(j->Rf, p, j->scales, j->order, j->n_order, j->opt.redundancy_tol, j->keep_struct,
                       j->rel) != 0)
    return nomem(j);
  twf_ident_normal_from_r(j->Rf, p, j->scales, j->As);
  for (k = 0; k < p; k++)
    res->structural_count += j->keep_struct[k];
  for (k = 0; k < p; k++)
    if (!j->keep_struct[k]) {
      res->params[k].status = TWF_PARAM_FIXED_STRUCTURAL;
      res->params[k].n_explain = twf_ident_explain(j->As, p, j->keep_struct, k, TWF_EXPLAIN_MAX,
                                                   res->params[k].explain, res->params[k].explain_coef);
    }
  return TWF_OK;
}

/* The walk on the user's poses over the structurally kept columns (the
 * others are fixed already): keep, the walk's relative independent parts
 * in rel, and the scaled normal matrix of those columns spread into As. */
static twf_status walk_on_fit_poses(job *j)
{
  size_t p = j->p, nc = 0, n2 = 0, a, b, k;
  size_t *cols = calloc(p ? p : 1, sizeof *cols), *order2 = calloc(p ? p : 1, sizeof *order2);
  size_t *pos_of = calloc(p ? p : 1, sizeof *pos_of);
  double *sc = calloc(p ? p : 1, sizeof *sc), *Ac = calloc(p ? p * p : 1, sizeof *Ac);
  unsigned char *keep_c = calloc(p ? p : 1, 1);
  int bad = !cols || !order2 || !pos_of || !sc || !Ac || !keep_c;
  if (!bad) {
    for (k = 0; k < p; k++)
      if (j->keep_struct[k]) {
        pos_of[k] = nc;
        sc[nc] = j->scales[k];
        cols[nc++] = k;
      }
    for (k = 0; k < j->n_order; k++)
      if (j->keep_struct[j->order[k]])
        order2[n2++] = pos_of[j->order[k]];
    twf_lsq_factor(&j->pr, cols, nc, j->Rf);
    bad = twf_ident_walk_r(j->Rf, nc, sc, order2, n2, j->opt.redundancy_tol, keep_c, Ac) != 0;
  }
  if (!bad) {
    memset(j->keep, 0, p);
    for (a = 0; a < nc; a++) {
      j->keep[cols[a]] = keep_c[a];
      j->rel[cols[a]] = Ac[a]; /* the walk's relative independent parts */
    }
    twf_ident_normal_from_r(j->Rf, nc, sc, Ac);
    memset(j->As, 0, p * p * sizeof *j->As);
    for (a = 0; a < nc; a++)
      for (b = 0; b < nc; b++)
        j->As[cols[a] * p + cols[b]] = Ac[a * nc + b];
  }
  free(cols); free(order2); free(pos_of); free(sc); free(Ac); free(keep_c);
  return bad ? nomem(j) : TWF_OK;
}

/* Columns exactly dependent on the user's own poses (a joint never moved). */
static twf_status stage_data_redundancy(job *j)
{
  twf_calib_result *res = j->res;
  size_t p = j->p, k;
  twf_status st = walk_on_fit_poses(j);
  if (st != TWF_OK)
    return st;
  for (k = 0; k < p; k++)
    if (j->keep_struct[k] && !j->keep[k]) {
      res->params[k].status = TWF_PARAM_FIXED_DATA;
      res->params[k].n_explain = twf_ident_explain(j->As, p, j->keep, k, TWF_EXPLAIN_MAX,
                                                   res->params[k].explain, res->params[k].explain_coef);
    }
  for (k = 0; k < p; k++) {
    if (res->params[k].status == TWF_PARAM_FIXED_STRUCTURAL)
      res->n_fixed_structural++;
    else if (res->params[k].status == TWF_PARAM_FIXED_DATA)
      res->n_fixed_data++;
  }
  return TWF_OK;
}

/* ------------------------------------------------------------ stage: degrees of freedom */

/* Enough coordinates beyond the parameters to check the fit (and, with no
 * sigma given, to estimate it). */
static twf_status stage_dof(job *j)
{
  const twf_campaign *c = j->c;
  size_t rows0 = 0, nk0 = 0, need, i, k, per_pose, more;
  int sigma_known = j->opt.sigma_length > 0 || j->sigma_from_rows;
  for (i = 0; i < c->n_meas; i++)
    if (j->use[i])
      rows0 += c->meas[i].has_orientation ? 6 : 3;
  for (k = 0; k < j->p; k++)
    nk0 += j->keep[k];
  need = nk0 + (sigma_known ? 3 : (nk0 / 5 > 10 ? nk0 / 5 : 10));
  if (rows0 >= need)
    return TWF_OK;
  per_pose = j->res->n_fit_poses ? (rows0 + j->res->n_fit_poses - 1) / j->res->n_fit_poses : 3;
  more = (need - rows0 + per_pose - 1) / (per_pose ? per_pose : 1);
  return twf_error_set(j->err, TWF_ERR_DEGENERATE, NULL, 0, 0,
                       twf_advice_text(sigma_known ? TWF_ADVICE_MORE_POSES : TWF_ADVICE_MORE_POSES_OR_SIGMA),
                       "the fit set has %zu coordinates for %zu parameters: at least %zu are needed "
                       "to check the fit%s (about %zu more poses)",
                       rows0, nk0, need, sigma_known ? "" : " and estimate the noise", more);
}

/* ------------------------------------------------------------ stages: fit and screen */

static twf_status fit_round(job *j, int round)
{
  twf_lsq_run run = { j->opt.max_iterations, j->opt.step_tol_m, &j->res->trace, "calibration", round };
  return twf_lsq_solve(&j->pr, j->keep, &run, j->value, &j->res->solve, j->err);
}

static twf_status stage_fit(job *j)
{
  return fit_round(j, 0);
}

/* List the outliers with their figures at the first fit. */
static twf_status list_outliers(job *j)
{
  twf_calib_result *res = j->res;
  size_t i, k;
  for (i = 0; i < j->c->n_meas; i++)
    res->n_outliers += (size_t)twf_robust_listed(&j->pr, j->opt.robust, j->opt.robust_threshold, j->score, i);
  res->outliers = calloc(res->n_outliers ? res->n_outliers : 1, sizeof *res->outliers);
  if (res->outliers == NULL)
    return nomem(j);
  for (i = 0, k = 0; i < j->c->n_meas; i++)
    if (twf_robust_listed(&j->pr, j->opt.robust, j->opt.robust_threshold, j->score, i)) {
      res->outliers[k].meas = i;
      res->outliers[k].error_m = j->first_err[i];
      res->outliers[k].score = j->first_score[i];
      res->outliers[k].weight = j->pr.weight[i];
      k++;
    }
  return TWF_OK;
}

/* A drop screen that takes more than screen_max_fraction of the fit rows
 * is not finding gross errors but a model that does not fit: keep every
 * row (weights back to 1, refit) and say so. */
/* The gravity torques of model m at the poses of c, each with its payload
 * (n_poses x n_joints, caller frees), or NULL with *st set: TWF_OK when
 * the model has no masses. */
static double *pose_torques(const twf_model *m, const twf_campaign *c, twf_status *st)
{
  size_t k, nj = m->n_joints;
  double *t;
  *st = TWF_OK;
  if (!twf_model_has_masses(m) || c->n_poses == 0)
    return NULL;
  t = malloc(c->n_poses * (nj ? nj : 1) * sizeof *t);
  if (t == NULL) {
    *st = TWF_ERR_NOMEM;
    return NULL;
  }
  for (k = 0; k < c->n_poses; k++)
    twf_model_gravity_torques(m, c->q + k * nj, twf_campaign_payload(c, k), t + k * nj, NULL);
  return t;
}

/* Whether c has 6-D rows (or says so). */
static int campaign_has_6d(const twf_campaign *c)
{
  size_t i;
  if (c->has_orientation_any)
    return 1;
  for (i = 0; i < c->n_meas; i++)
    if (c->meas[i].has_orientation)
      return 1;
  return 0;
}

/* Do the residuals of the rows the screen kept show a systematic pattern
 * (twistfit/pattern.h)? 1 yes, 0 no, -1 out of memory. */
static int screened_pattern(job *j)
{
  size_t i, nm = j->c->n_meas;
  int six_d = campaign_has_6d(j->c);
  double *pos = malloc(3 * (nm ? nm : 1) * sizeof *pos);
  double *rot = six_d ? malloc((nm ? nm : 1) * sizeof *rot) : NULL; /* the angles: 6-D rows only */
  unsigned char *use = malloc(nm ? nm : 1);
  twf_pattern_options po = j->opt.pattern;
  twf_pattern_result pr;
  twf_status st = TWF_OK;
  double *torque = NULL;
  int found = -1;
  twf_error e;
  memset(&pr, 0, sizeof pr);
  if (pos != NULL && (rot != NULL || !six_d) && use != NULL && po.torque == NULL)
    po.torque = torque = pose_torques(j->pr.m, &j->view, &st);
  if (pos != NULL && (rot != NULL || !six_d) && use != NULL && st == TWF_OK) {
    for (i = 0; i < nm; i++)
      use[i] = j->pr.use[i] && j->pr.weight[i] > 0.0;
    if (twf_lsq_residuals(j->pr.m, j->pr.base, &j->view, j->pr.n_threads, pos, rot, &e) == TWF_OK &&
        twf_residual_pattern(j->pr.m, j->pr.base, &j->view, pos, use, &po, &pr, &e) == TWF_OK)
      found = pr.n_significant > 0;
    else
      found = 0; /* no verdict on the pattern: the plain limit holds */
  }
  twf_pattern_result_clear(&pr);
  free(torque);
  free(pos);
  free(rot);
  free(use);
  return found;
}

static twf_status screen_limit(job *j)
{
  const twf_calib_options *o = &j->opt;
  size_t i, n_fit = 0, n_drop = 0;
  double limit = o->screen_max_fraction;
  int pattern = 0;
  if (o->robust != TWF_ROBUST_DROP || o->screen_max_fraction >= 1.0)
    return TWF_OK;
  for (i = 0; i < j->c->n_meas; i++)
    if (j->pr.use[i]) {
      n_fit++;
      n_drop += j->pr.weight[i] == 0.0;
    }
  if (n_drop == 0)
    return TWF_OK;
  /* A screen that drops readings while the readings it keeps still show a
   * systematic pattern is taking the pattern for gross errors: the lower
   * limit then holds (measured on the elastostatic reference campaigns of
   * check_compliance without the compliance group: 18 of 360 good readings
   * dropped, just within 5 %, on one; 1 of 360 on the other, which the
   * former 1 % threshold let through). */
  if ((double)n_drop > o->screen_pattern_fraction * (double)n_fit &&
      (double)n_drop <= limit * (double)n_fit) {
    pattern = screened_pattern(j);
    if (pattern < 0)
      return nomem(j);
    if (pattern)
      limit = fmin(o->screen_pattern_fraction, limit);
  }
  if ((double)n_drop <= limit * (double)n_fit)
    return TWF_OK;
  j->res->screen_refused = n_drop;
  if (pattern)
    twf_warnings_add(j->warnings, NULL, 0, 0,
                     "the outlier screen would drop %zu of the %zu fit readings (%.1f %%) while the readings "
                     "it keeps still show a systematic pattern (see the residual pattern test): the model, "
                     "not the data, is the likely problem, so the readings were kept",
                     n_drop, n_fit, 100.0 * (double)n_drop / (double)n_fit);
  else
    twf_warnings_add(j->warnings, NULL, 0, 0,
                   "the outlier screen would drop %zu of the %zu fit readings (%.1f %%, more than %.0f %%): "
                   "so many gross errors are unlikely; the model, not the data, is the likely problem "
                   "(see the residual pattern test), so the readings were kept",
                   n_drop, n_fit, 100.0 * (double)n_drop / (double)n_fit, 100.0 * o->screen_max_fraction);
  twf_lsq_reset_weights(&j->pr);
  j->res->robust_rounds++;
  return fit_round(j, j->res->robust_rounds);
}

/* Screen and refit until the weights settle (a dropped set that no longer
 * changes, or reweighting that moves no weight by more than 1e-3), at most
 * 10 refits; the model reported is always the fit with the final weights. */
static twf_status stage_robust(job *j)
{
  const twf_calib_options *o = &j->opt;
  twf_calib_result *res = j->res;
  size_t changed;
  twf_status st;
  if (o->robust == TWF_ROBUST_OFF)
    return TWF_OK;
  if (twf_robust_screen(&j->pr, o->robust, o->robust_threshold, j->first_score, j->first_err, &changed) !=
      TWF_OK)
    return nomem(j);
  memcpy(j->score, j->first_score, j->c->n_meas * sizeof *j->score);
  while (changed > 0) {
    res->robust_rounds++;
    if ((st = fit_round(j, res->robust_rounds)) != TWF_OK)
      return st;
    if (res->robust_rounds >= 10)
      break;
    if (twf_robust_screen(&j->pr, o->robust, o->robust_threshold, j->score, NULL, &changed) != TWF_OK)
      return nomem(j);
    if (changed > 0 && res->robust_rounds >= 9) {
      /* last refit with these weights */
      res->robust_rounds++;
      if ((st = fit_round(j, res->robust_rounds)) != TWF_OK)
        return st;
      break;
    }
  }
  /* only Cauchy lists by the final score (twf_robust_listed), the others
   * by the weights: the scores go before the screen's limit check takes
   * its memory */
  if (o->robust != TWF_ROBUST_CAUCHY) {
    free(j->score);
    j->score = NULL;
  }
  if ((st = screen_limit(j)) != TWF_OK)
    return st;
  st = list_outliers(j);
  /* the screen's per-measurement figures are in the outlier list now */
  free(j->score); free(j->first_score); free(j->first_err);
  j->score = j->first_score = j->first_err = NULL;
  return st;
}

/* ------------------------------------------------------------ stage: covariance */

/* The normal matrix of the kept columns at the solution, spread into the
 * full p x p layout of pr.A, and its inverse scaled by the a-posteriori
 * variance factor when sigma was not given. */
static twf_status stage_covariance(job *j)
{
  twf_calib_result *res = j->res;
  twf_lsq_problem *pr = &j->pr;
  size_t p = j->p, nkc = 0, a, b, i, k;
  double factor = 1.0;
  for (k = 0; k < p; k++)
    if (j->keep[k])
      j->order[nkc++] = k; /* order is free again: reuse it as the column map */
  twf_lsq_normal(pr, j->order, nkc, j->As, pr->g);
  memset(pr->A, 0, p * p * sizeof *pr->A);
  for (a = 0; a < nkc; a++)
    for (b = 0; b < nkc; b++)
      pr->A[j->order[a] * p + j->order[b]] = j->As[a * nkc + b];
  for (i = 0; i < j->c->n_meas; i++)
    if (twf_lsq_active(pr, i))
      j->n_rows += j->c->meas[i].has_orientation ? 6 : 3;
  res->n_kept = nkc;
  res->sigma_source = j->opt.sigma_length > 0 ? TWF_SIGMA_GIVEN
                      : j->sigma_from_rows    ? TWF_SIGMA_FROM_ROWS
                                              : TWF_SIGMA_ESTIMATED;
  if (res->sigma_source == TWF_SIGMA_ESTIMATED && j->n_rows > nkc)
    factor = 2.0 * res->solve.cost_end / (double)(j->n_rows - nkc);
  res->sigma_length = j->sigma_len * sqrt(factor);
  if (twf_ident_inverse(pr->A, p, j->keep, j->cov) != 0)
    return twf_error_set(j->err, TWF_ERR_SINGULAR, NULL, 0, 0, twf_advice_text(TWF_ADVICE_FIX_MORE),
                         "the normal matrix of the kept parameters is singular at the solution");
  for (k = 0; k < p * p; k++)
    j->cov[k] *= factor;
  res->covariance = malloc((p ? p * p : 1) * sizeof *res->covariance);
  if (res->covariance == NULL)
    return nomem(j);
  memcpy(res->covariance, j->cov, p * p * sizeof *res->covariance);
  return TWF_OK;
}

/* ------------------------------------------------------------ stage: identifiability */

/* Insert the correlation of a and b among the strongest kept (by |rho|,
 * at most TWF_CORRELATIONS_MAX). */
static void correlation_insert(twf_calib_result *res, size_t a, size_t b, double rho)
{
  size_t k, pos = res->n_correlations;
  while (pos > 0 && fabs(res->correlations[pos - 1].rho) < fabs(rho))
    pos--;
  if (pos >= TWF_CORRELATIONS_MAX)
    return;
  if (res->n_correlations < TWF_CORRELATIONS_MAX)
    res->n_correlations++;
  for (k = res->n_correlations - 1; k > pos; k--)
    res->correlations[k] = res->correlations[k - 1];
  res->correlations[pos].a = a;
  res->correlations[pos].b = b;
  res->correlations[pos].rho = rho;
}

/* Conditioning and observability of the scaled, weighted Jacobian (Sun
 * and Hollerbach 2008). As and ratio are free again: workspaces here. */
static twf_status conditioning(job *j)
{
  twf_calib_result *res = j->res;
  double *sv = j->ratio;
  size_t ns;
  twf_lsq_scale_normal(&j->pr, j->pr.A, j->As);
  ns = twf_ident_singular_values(j->As, j->p, j->keep, sv);
  res->singular_values = malloc((ns ? ns : 1) * sizeof *res->singular_values);
  if (res->singular_values == NULL)
    return nomem(j);
  memcpy(res->singular_values, sv, ns * sizeof *sv);
  res->n_singular = ns;
  res->singular_value_sigma = j->sigma_len;
  twf_observability_indices(sv, ns, j->n_rows, &res->observability);
  if (ns > 0 && sv[ns - 1] > 0) {
    res->condition_number = sv[0] / sv[ns - 1];
  } else {
    res->condition_number = INFINITY;
  }
  return TWF_OK;
}

/* Values and standard deviations, weak parameters and their warnings, the
 * strongest correlations above 0.9, the conditioning. */
static twf_status stage_identifiability(job *j)
{
  twf_calib_result *res = j->res;
  size_t p = j->p, a, b;
  double sigma_ref = res->sigma_length;
  twf_calib_warn_fixed_on_data(j->start, res, j->warnings);
  for (a = 0; a < p; a++) {
    twf_param_result *pa = &res->params[a];
    double scaled;
    pa->change = j->value[a];
    pa->std = j->keep[a] ? sqrt(j->cov[a * p + a]) : NAN;
    j->ratio[a] = 0.0; /* the weak parameters' std over sigma */
    if (!j->keep[a]) {
      pa->change = 0.0;
      continue;
    }
    scaled = pa->std * j->scales[a];
    if (scaled > j->opt.weak_ratio * sigma_ref || j->rel[a] < 1e-3) {
      pa->weak = 1;
      res->n_weak++;
      j->ratio[a] = scaled / sigma_ref;
    }
  }
  twf_calib_warn_weak(j->pr.m, res, j->ratio, j->warnings);
  for (a = 0; a < p; a++)
    for (b = a + 1; b < p; b++) {
      double rho;
      if (!j->keep[a] || !j->keep[b])
        continue;
      rho = j->cov[a * p + b] / sqrt(j->cov[a * p + a] * j->cov[b * p + b]);
      if (fabs(rho) > 0.9)
        correlation_insert(res, a, b, rho);
    }
  return conditioning(j);
}

/* ------------------------------------------------------------ stage: as-built summary */

/* Statistics of the position error lengths of res (after or before) over
 * the measurements of one set with excluded == want. */
static twf_status stats_where(job *j, const double *resid, int set, unsigned char want, twf_stats *out)
{
  const twf_calib_result *res = j->res;
  size_t n = j->c->n_meas, i, m = 0;
  double *len = malloc((n ? n : 1) * sizeof *len);
  twf_status st;
  if (len == NULL)
    return nomem(j);
  for (i = 0; i < n; i++)
    if ((int)res->meas_set[i] == set && (want == 0xff || res->excluded[i] == want))
      len[m++] = twf_v3_norm(resid + 3 * i);
  st = twf_accuracy_stats(len, m, out, j->err);
  free(len);
  return st;
}

/* Per instrument station: its poses of each set and the position errors
 * of its rows the figures keep, before and after. */
static twf_status station_summaries(job *j)
{
  twf_calib_result *res = j->res;
  const twf_campaign *c = j->c;
  size_t n = c->n_meas, i, sta, m;
  double *len = malloc((n ? n : 1) * sizeof *len);
  unsigned char *seen = calloc(c->n_poses ? c->n_poses : 1, 1);
  twf_status st = TWF_OK;
  int set, pass;
  if (len == NULL || seen == NULL) {
    free(len);
    free(seen);
    return nomem(j);
  }
  for (i = 0; i < n; i++) {
    size_t pose = c->meas[i].pose, bit = res->meas_set[i] == TWF_SET_FIT ? 1u : 2u;
    if (!(seen[pose] & bit)) {
      seen[pose] |= (unsigned char)bit;
      if (bit == 1u)
        res->station[twf_campaign_pose_station(c, pose)].n_fit_poses++;
      else
        res->station[twf_campaign_pose_station(c, pose)].n_check_poses++;
    }
  }
  for (sta = 0; sta < res->n_stations && st == TWF_OK; sta++)
    for (set = 0; set < 2 && st == TWF_OK; set++)
      for (pass = 0; pass < 2 && st == TWF_OK; pass++) {
        const double *e = pass == 0 ? res->pos_err_before : res->pos_err_after;
        twf_station_summary *su = &res->station[sta];
        twf_stats *out = set == TWF_SET_FIT ? (pass == 0 ? &su->fit_before : &su->fit_after)
                                            : (pass == 0 ? &su->check_before : &su->check_after);
        m = 0;
        for (i = 0; i < n; i++)
          if ((int)res->meas_set[i] == set && res->excluded[i] == 0 &&
              twf_campaign_pose_station(c, c->meas[i].pose) == sta)
            len[m++] = twf_v3_norm(e + 3 * i);
        st = twf_accuracy_stats(len, m, out, j->err);
      }
  free(len);
  free(seen);
  return st;
}

/* Which rows the figures leave out: the fit rows the screen dropped, and
 * the check rows whose error after calibration is beyond the threshold
 * against the fit's robust scale (scored at the final model; the weights
 * of the fit are kept as they are). */
static twf_status mark_excluded(job *j)
{
  twf_calib_result *res = j->res;
  size_t n = j->c->n_meas, i, k;
  double *score = NULL, *len = NULL;
  size_t changed;
  res->excluded = calloc(n ? n : 1, 1);
  if (res->excluded == NULL)
    return nomem(j);
  for (k = 0; k < res->n_outliers; k++)
    if (res->outliers[k].weight == 0.0) {
      res->excluded[res->outliers[k].meas] = TWF_EXCLUDED_DROPPED;
      res->n_dropped++;
    }
  if (j->opt.robust == TWF_ROBUST_OFF || res->n_check_meas == 0)
    return TWF_OK;
  score = malloc((n ? n : 1) * sizeof *score);
  len = malloc((n ? n : 1) * sizeof *len);
  if (score == NULL || len == NULL)
    goto nomem;
  /* the screen's new weights are not kept: the problem's rows are freed
   * right after (stage_asbuilt), nothing reads them any more */
  if (twf_robust_screen(&j->pr, j->opt.robust, j->opt.robust_threshold, score, len, &changed) != TWF_OK)
    goto nomem;
  for (i = 0; i < n; i++)
    if (res->meas_set[i] == TWF_SET_CHECK && score[i] > j->opt.robust_threshold) {
      res->excluded[i] = TWF_EXCLUDED_FLAGGED;
      res->n_check_flagged++;
    }
  res->check_flagged = calloc(res->n_check_flagged ? res->n_check_flagged : 1, sizeof *res->check_flagged);
  if (res->check_flagged == NULL)
    goto nomem;
  for (i = 0, k = 0; i < n; i++)
    if (res->excluded[i] == TWF_EXCLUDED_FLAGGED) {
      res->check_flagged[k].meas = i;
      res->check_flagged[k].error_m = len[i];
      res->check_flagged[k].score = score[i];
      res->check_flagged[k].weight = 1.0;
      k++;
    }
  free(score); free(len);
  return TWF_OK;
nomem:
  free(score); free(len);
  return nomem(j);
}

/* The verdict (twf_calib_verdict) on the check set without its flagged
 * rows, else the fit set the fit kept. */
static void verdict(twf_calib_result *res)
{
  int set = TWF_SET_FIT;
  if (res->accuracy_after->position[TWF_SET_CHECK].count > 0) {
    set = TWF_SET_CHECK;
    res->verdict_basis = res->n_check_flagged > 0 ? TWF_BASIS_CHECK_SCREENED : TWF_BASIS_CHECK;
  } else {
    res->verdict_basis = TWF_BASIS_FIT;
  }
  res->verdict_before = res->accuracy_before->position[set];
  res->verdict_after = res->accuracy_after->position[set];
  if (!(res->verdict_after.rms <= (1.0 + TWF_VERDICT_WORSE_MARGIN) * res->verdict_before.rms))
    res->verdict = TWF_VERDICT_DO_NOT_USE;
  else if (res->verdict_after.rms > TWF_VERDICT_IMPROVED_RATIO * res->verdict_before.rms)
    res->verdict = TWF_VERDICT_NOT_IMPROVED;
  else
    res->verdict = TWF_VERDICT_IMPROVED;
}

/* Per joint, the groups with a parameter the poses could not determine. */
static twf_status joints_undetermined(job *j)
{
  twf_calib_result *res = j->res;
  size_t k;
  res->joint_undetermined = calloc(j->start->n_joints ? j->start->n_joints : 1, sizeof *res->joint_undetermined);
  if (res->joint_undetermined == NULL)
    return nomem(j);
  for (k = 0; k < res->n_params; k++) {
    const twf_param *pa = &res->params[k].param;
    if (res->params[k].status == TWF_PARAM_FIXED_DATA && pa->joint >= 0 &&
        (size_t)pa->joint < j->start->n_joints)
      res->joint_undetermined[pa->joint] |= TWF_GROUP_BIT(pa->group);
  }
  return TWF_OK;
}

/* Leave out of the comparison what the fit could not change (see
 * twf_calib_result.comparison). */
static void comparison_restrict(job *j, int lines_fitted)
{
  twf_calib_result *res = j->res;
  unsigned g = j->opt.groups;
  size_t i, k;
  for (i = 0; i < res->comparison.n_joints; i++) {
    twf_joint_deviation *d = &res->comparison.joints[i];
    if (!(g & TWF_GROUP_BIT(TWF_GROUP_TILTS)))
      d->angle_rad = NAN;
    if (!lines_fitted)
      d->distance_m = NAN;
    if (!(g & TWF_GROUP_BIT(TWF_GROUP_OFFSETS))) {
      d->offset = NAN;
    } else if (!lines_fitted) {
      d->offset = NAN;
      if (j->start->joints[i].type == TWF_JOINT_REVOLUTE)
        for (k = 0; k < res->n_params; k++)
          if (res->params[k].param.group == TWF_GROUP_OFFSETS && res->params[k].param.joint == (long)i &&
              res->params[k].status == TWF_PARAM_KEPT)
            d->offset = d->offset_raw;
    }
  }
}

/* The outputs: residuals after, the as-built model and its comparison with
 * the start (in the datum frame when joint lines were fitted), the
 * accuracy figures over the kept rows, the left-out rows, the verdict. */
static twf_status stage_asbuilt(job *j)
{
  twf_calib_result *res = j->res;
  int lines_fitted = (j->opt.groups & (TWF_GROUP_BIT(TWF_GROUP_TILTS) | TWF_GROUP_BIT(TWF_GROUP_SHIFTS))) != 0;
  int set;
  twf_status st;
  size_t nm = j->c->n_meas ? j->c->n_meas : 1;
  /* the check rows scored at the final model first, then the problem's
   * per-measurement arrays are freed (no pass runs after the fit), and
   * only then the residual arrays of the result: the three never add up
   * (peak memory of a large campaign) */
  twf_lsq_release_pose_index(&j->pr);
  if ((st = mark_excluded(j)) != TWF_OK)
    return st;
  twf_lsq_release_rows(&j->pr);
  res->pos_err_before = calloc(3 * nm, sizeof(double));
  res->pos_err_after = calloc(3 * nm, sizeof(double));
  if (res->pos_err_before == NULL || res->pos_err_after == NULL)
    return nomem(j);
  /* the angles only when there are 6-D rows (else all NaN) */
  if (campaign_has_6d(j->c)) {
    res->angle_err_before = calloc(nm, sizeof(double));
    res->angle_err_after = calloc(nm, sizeof(double));
    if (res->angle_err_before == NULL || res->angle_err_after == NULL)
      return nomem(j);
  }
  /* before: at the registered start model (j->reg, unchanged since the
   * registration) and the registered base poses */
  st = twf_lsq_residuals(j->reg, res->station_base_before, j->c, j->pr.n_threads, res->pos_err_before,
                         res->angle_err_before, j->err);
  if (st != TWF_OK)
    return st;
  st = twf_lsq_residuals(j->pr.m, j->pr.base, j->c, j->pr.n_threads, res->pos_err_after,
                         res->angle_err_after, j->err);
  if (st != TWF_OK)
    return st;
  res->groups = j->opt.groups;
  memcpy(res->station_base, j->pr.base, res->n_stations * sizeof *res->station_base);
  res->base_in_tracker = j->pr.base[0];
  res->asbuilt = twf_model_copy(j->pr.m);
  res->registered = j->reg;
  j->reg = NULL;
  res->target_in_fit = j->target_seen;
  j->target_seen = NULL;
  if (res->asbuilt == NULL)
    return nomem(j);
  /* without a fitted joint line the frame is fixed by the unchanged lines:
   * no datum rule, so that the written model keeps them exactly */
  st = lines_fitted ? twf_asbuilt_align(j->start, res->asbuilt, &res->base_in_tracker, j->with_orientation,
                                        &res->comparison, j->err)
                    : twf_asbuilt_compare(j->start, res->asbuilt, j->with_orientation, &res->comparison, j->err);
  if (st != TWF_OK)
    return st;
  /* The datum rule is a change of the robot base frame, B <- B X, the same
   * X for every station: carry station 0's change to the others. */
  {
    twf_pose inv0, X;
    size_t sta;
    twf_pose_inv(&res->station_base[0], &inv0);
    twf_pose_mul(&inv0, &res->base_in_tracker, &X);
    res->station_base[0] = res->base_in_tracker;
    for (sta = 1; sta < res->n_stations; sta++)
      twf_pose_mul(&res->station_base[sta], &X, &res->station_base[sta]);
  }
  /* what the data cannot tell about the flange at logged zero */
  if (!j->with_orientation)
    res->comparison.home_angle_rad = NAN;
  if (j->opt.groups & TWF_GROUP_BIT(TWF_GROUP_TARGETS))
    res->comparison.home_distance_m = NAN;
  if ((st = joints_undetermined(j)) != TWF_OK)
    return st;
  comparison_restrict(j, lines_fitted);
  res->accuracy_before = twf_accuracy_summarize_kept(&j->view, j->start->n_targets, res->pos_err_before,
                                                     res->angle_err_before, res->excluded, j->opt.worst_poses, j->err);
  if (res->accuracy_before == NULL)
    return j->err ? j->err->status : TWF_ERR_NOMEM;
  res->accuracy_after = twf_accuracy_summarize_kept(&j->view, j->start->n_targets, res->pos_err_after,
                                                    res->angle_err_after, res->excluded, j->opt.worst_poses, j->err);
  if (res->accuracy_after == NULL)
    return j->err ? j->err->status : TWF_ERR_NOMEM;
  res->fit_screened = res->accuracy_after->position[TWF_SET_FIT];
  for (set = 0; set < 2; set++) {
    unsigned char want = set == TWF_SET_FIT ? TWF_EXCLUDED_DROPPED : TWF_EXCLUDED_FLAGGED;
    if ((st = stats_where(j, res->pos_err_before, set, want, &res->excluded_before[set])) != TWF_OK ||
        (st = stats_where(j, res->pos_err_after, set, want, &res->excluded_after[set])) != TWF_OK)
      return st;
  }
  if ((st = station_summaries(j)) != TWF_OK)
    return st;
  if ((st = stats_where(j, res->pos_err_before, TWF_SET_CHECK, 0xff, &res->check_all_before)) != TWF_OK ||
      (st = stats_where(j, res->pos_err_after, TWF_SET_CHECK, 0xff, &res->check_all_after)) != TWF_OK)
    return st;
  verdict(res);
  return TWF_OK;
}

/* ------------------------------------------------------------ stage: residual pattern */

/* Do the as-built residuals of the rows the figures keep (fit and check)
 * look like noise? (twistfit/pattern.h) */
/* ------------------------------------------------------------ stage: link parameters */

/* The as-built link parameters against the starting model, with standard
 * deviations and what the fit left open. The values come from the written
 * (datum-aligned) model; the Jacobian from the fitted model in the fit's
 * own frame, where the covariance's parameters live. The two agree in
 * every intrinsic value and in the forms, which the starting model's lines
 * choose. */
static twf_status stage_links(job *j)
{
  twf_calib_result *res = j->res;
  twf_links_options lo = twf_links_default_options();
  twf_links fit;
  unsigned char *by_poses = calloc(res->n_params ? res->n_params : 1, 1);
  twf_status st;
  size_t a, r;
  if (by_poses == NULL)
    return nomem(j);
  memset(&fit, 0, sizeof fit);
  for (a = 0; a < res->n_params; a++)
    by_poses[a] = res->params[a].status == TWF_PARAM_FIXED_DATA;
  lo.full_pose = j->with_orientation;
  lo.reference = j->start;
  res->link_change = malloc(TWF_LINK_NVALUES * (res->asbuilt->n_joints + 2) * sizeof *res->link_change);
  if (res->link_change == NULL) {
    free(by_poses);
    return nomem(j);
  }
  /* the comparison's values (a free DH x sign put in the start's) */
  st = twf_compare_links(j->start, res->asbuilt, j->with_orientation, &res->links, res->link_change, j->err);
  if (st == TWF_OK)
    st = twf_links_compute(j->pr.m, &lo, &fit, j->err);
  if (st == TWF_OK) {
    /* The links do not depend on the base poses: with several stations the
     * covariance is given in the one-station layout (station 0's base
     * parameters, the others' left out), the layout links.c's error model
     * has. */
    double *cov = res->covariance;
    if (res->n_stations > 1) {
      size_t p = res->n_params, n1 = 0, a2, b2, *keep = malloc((p ? p : 1) * sizeof *keep);
      cov = malloc((p ? p * p : 1) * sizeof *cov);
      if (keep == NULL || cov == NULL) {
        free(keep);
        free(cov);
        free(by_poses);
        return nomem(j);
      }
      for (a2 = 0; a2 < p; a2++)
        if (res->params[a2].param.group != TWF_GROUP_BASE || res->params[a2].param.station == 0)
          keep[n1++] = a2;
      for (a2 = 0; a2 < n1; a2++) {
        by_poses[a2] = res->params[keep[a2]].status == TWF_PARAM_FIXED_DATA;
        for (b2 = 0; b2 < n1; b2++)
          cov[a2 * n1 + b2] = res->covariance[keep[a2] * p + keep[b2]];
      }
      free(keep);
    }
    st = twf_links_mark_fit(j->pr.m, res->groups, cov, by_poses, &fit, j->err);
    if (cov != res->covariance)
      free(cov);
  }
  for (r = 0; st == TWF_OK && r < fit.n_rows; r++) {
    if (fit.rows[r].form != res->links.rows[r].form) {
      st = twf_error_set(j->err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "the link forms of the fitted and the written model differ");
      break;
    }
    memcpy(res->links.rows[r].std, fit.rows[r].std, sizeof fit.rows[r].std);
    memcpy(res->links.rows[r].why, fit.rows[r].why, sizeof fit.rows[r].why);
  }
  twf_links_clear(&fit);
  free(by_poses);
  return st;
}

static twf_status stage_pattern(job *j)
{
  twf_calib_result *res = j->res;
  size_t i, nj = j->start->n_joints, nm = j->c->n_meas;
  unsigned char *use = malloc(nm ? nm : 1), *scale_fitted = calloc(nj ? nj : 1, 1);
  twf_pattern_options po = j->opt.pattern;
  double *torque = NULL;
  twf_status st = TWF_OK;
  /* the torque family runs when the model carries masses: the gravity
   * torques at the as-built model, each pose with its payload (n_poses x
   * n_joints, linear in the campaign) */
  if (po.torque == NULL)
    po.torque = torque = pose_torques(res->asbuilt, &j->view, &st);
  if (use == NULL || scale_fitted == NULL || st != TWF_OK) {
    free(use);
    free(scale_fitted);
    free(torque);
    return nomem(j);
  }
  for (i = 0; i < nm; i++)
    use[i] = res->excluded == NULL || res->excluded[i] == 0;
  for (i = 0; i < res->n_params; i++)
    if (res->params[i].param.group == TWF_GROUP_SCALE && res->params[i].status == TWF_PARAM_KEPT &&
        res->params[i].param.joint >= 0)
      scale_fitted[res->params[i].param.joint] = 1;
  po.scale_fitted = scale_fitted;
  st = twf_residual_pattern(res->asbuilt, res->station_base, &j->view, res->pos_err_after, use, &po,
                            &res->pattern, j->err);
  free(use);
  free(scale_fitted);
  free(torque);
  if (st == TWF_OK)
    twf_calib_warn_pattern(res->asbuilt, &res->pattern, j->warnings);
  return st;
}

/* ------------------------------------------------------------ stage: compliance */

/* With the compliance group: per joint what was found, over the fit poses
 * (twistfit/compliance.h). A compliance fixed with nothing explaining it
 * had a zero column: no torque about its axis at any pose the walks saw. */
static twf_status stage_compliance(job *j)
{
  twf_calib_result *res = j->res;
  size_t nj = res->asbuilt->n_joints, k;
  int *fixed;
  double *std;
  unsigned char *weak, *use;
  twf_status st;
  if (!(res->groups & TWF_GROUP_BIT(TWF_GROUP_COMPLIANCE)))
    return TWF_OK;
  fixed = malloc((nj ? nj : 1) * sizeof *fixed);
  std = malloc((nj ? nj : 1) * sizeof *std);
  weak = calloc(nj ? nj : 1, 1);
  use = calloc(j->view.n_poses ? j->view.n_poses : 1, 1);
  if (fixed == NULL || std == NULL || weak == NULL || use == NULL) {
    free(fixed); free(std); free(weak); free(use);
    return nomem(j);
  }
  for (k = 0; k < nj; k++) {
    fixed[k] = -1;
    std[k] = NAN;
  }
  for (k = 0; k < res->n_params; k++) {
    const twf_param_result *p = &res->params[k];
    if (p->param.group != TWF_GROUP_COMPLIANCE || p->param.joint < 0)
      continue;
    fixed[p->param.joint] = p->status == TWF_PARAM_KEPT ? 0
                            : p->status == TWF_PARAM_FIXED_STRUCTURAL && p->n_explain == 0 ? 1 : 2;
    std[p->param.joint] = p->std;
    weak[p->param.joint] = (unsigned char)(p->weak != 0);
  }
  for (k = 0; k < j->view.n_meas; k++)
    if (res->meas_set[k] == TWF_SET_FIT && (res->excluded == NULL || res->excluded[k] == 0))
      use[j->view.meas[k].pose] = 1;
  st = twf_compliance_summarize(res->asbuilt, &j->view, use, fixed, std, weak, &res->compliance, j->err);
  free(fixed); free(std); free(weak); free(use);
  if (st == TWF_OK && res->compliance.n_payloads_used < 2)
    twf_warnings_add(j->warnings, NULL, 0, 0,
                     "every fit pose carries the same load: compliance and geometry are told apart only "
                     "by how the torques vary with the configuration; poses with two or more loads "
                     "(the payload column, twistfit-data(5)) separate them far better");
  if (st == TWF_OK)
    for (k = 0; k < nj; k++)
      if (res->compliance.joints[k].state == TWF_COMPLIANCE_CONSTANT_TORQUE)
        twf_warnings_add(j->warnings, NULL, 0, 0,
                         "the gravity torque about %s hardly varies over the fit poses: its compliance "
                         "cannot be told from its offset and was fixed",
                         res->asbuilt->joints[k].name);
  return st;
}

/* ------------------------------------------------------------ stage: plausibility */

/* Far beyond any calibration, the data and the model do not describe the
 * same arm (joint order, signs, units, another model). */
static twf_status beyond_any_calibration(job *j)
{
  const twf_calib_result *res = j->res;
  const twf_model *start = j->start;
  double worst_tilt = 0.0, worst_shift = 0.0;
  size_t k, wt = 0, ws = 0;
  for (k = 0; k < start->n_joints; k++) {
    if (res->comparison.joints[k].angle_rad > worst_tilt) {
      worst_tilt = res->comparison.joints[k].angle_rad;
      wt = k;
    }
    if (res->comparison.joints[k].distance_m > worst_shift) {
      worst_shift = res->comparison.joints[k].distance_m;
      ws = k;
    }
  }
  if (res->sigma_source == TWF_SIGMA_ESTIMATED && res->sigma_length > 1e-3)
    return twf_error_set(j->err, TWF_ERR_DEGENERATE, NULL, 0, 0, twf_advice_text(TWF_ADVICE_ACCEPT_LARGE),
                         "the fit leaves %.3g mm of noise per coordinate, far beyond a measuring instrument's",
                         res->sigma_length * 1e3);
  if (worst_tilt > 5.0 * TWF_PI / 180.0 || worst_shift > 0.05)
    return twf_error_set(j->err, TWF_ERR_DEGENERATE, NULL, 0, 0, twf_advice_text(TWF_ADVICE_ACCEPT_LARGE),
                         "the as-built line of joint %s is %.3g deg and of joint %s %.3g mm from the model's: "
                         "beyond any calibration",
                         start->joints[wt].name, worst_tilt * 180.0 / TWF_PI, start->joints[ws].name,
                         worst_shift * 1e3);
  return TWF_OK;
}

static twf_status stage_plausibility(job *j)
{
  const twf_calib_result *res = j->res;
  const twf_model *start = j->start;
  twf_status st;
  if (!j->opt.accept_large && (st = beyond_any_calibration(j)) != TWF_OK)
    return st;
  if (!isfinite(res->condition_number))
    return twf_error_set(j->err, TWF_ERR_SINGULAR, NULL, 0, 0, twf_advice_text(TWF_ADVICE_FIX_MORE),
                         "the kept parameters are not independent on these poses (condition number infinite)");
  /* a calibrated model that predicts the held-out poses worse than the
   * starting one has learnt the noise, not the arm */
  if (res->verdict == TWF_VERDICT_DO_NOT_USE)
    twf_warnings_add(j->warnings, NULL, 0, 0,
                     "the calibrated model predicts the %s worse than the starting model "
                     "(RMS %.4g against %.4g %s): do not use it; measure more, and more varied, poses",
                     twf_verdict_basis_name(res->verdict_basis),
                     res->verdict_after.rms / twf_length_unit_si(start->length_unit),
                     res->verdict_before.rms / twf_length_unit_si(start->length_unit),
                     twf_length_unit_name(start->length_unit));
  if (res->n_check_flagged > 0)
    twf_warnings_add(j->warnings, NULL, 0, 0,
                     "%zu check-set measurement%s beyond %.3g robust standard deviations of the fit "
                     "(gross errors such as a broken beam?) %s left out of the check figures; with %s the "
                     "check RMS is %.4g %s",
                     res->n_check_flagged, res->n_check_flagged == 1 ? "" : "s", j->opt.robust_threshold,
                     res->n_check_flagged == 1 ? "is" : "are", res->n_check_flagged == 1 ? "it" : "them",
                     res->check_all_after.rms / twf_length_unit_si(start->length_unit),
                     twf_length_unit_name(start->length_unit));
  if (!res->comparison.settled)
    twf_warnings_add(j->warnings, NULL, 0, 0,
                     "the datum of the as-built report did not settle: the joint lines leave the base "
                     "frame partly free (give the targets offsets in the starting model); the model "
                     "and its predictions are not affected");
  return TWF_OK;
}

/* ------------------------------------------------------------ the driver */

typedef twf_status (*stage_fn)(job *j);

/* The stages in the order they run; each is timed into the result's trace
 * under its name (the registration records its own two parts). */
static const struct stage {
  const char *name;
  stage_fn run;
} stages[] = {
  { "sets and joint ranges", stage_sets },
  { NULL, stage_registration },
  { "problem set-up", stage_problem },
  { "structural redundancy", stage_structural_redundancy },
  { "redundancy on the fit poses", stage_data_redundancy },
  { "degrees of freedom", stage_dof },
  { "fit", stage_fit },
  { "robust screen", stage_robust },
  { "covariance", stage_covariance },
  { "identifiability", stage_identifiability },
  { "as-built summary", stage_asbuilt },
  { "link parameters", stage_links },
  { "residual pattern", stage_pattern },
  { "compliance summary", stage_compliance },
  { "plausibility", stage_plausibility },
};

twf_status twf_calibrate(const twf_model *start, const twf_campaign *c,
                         const twf_calib_options *opt_in, twf_calib_result **out,
                         twf_warnings *warnings, twf_error *err)
{
  job j;
  size_t k;
  twf_status st;

  *out = NULL;
  if (start == NULL || c == NULL || c->n_joints != start->n_joints)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "the campaign does not match the model");
  memset(&j, 0, sizeof j);
  j.start = start;
  j.c = c;
  j.opt = opt_in ? *opt_in : twf_calib_default_options();
  j.warnings = warnings;
  j.err = err;
  if ((st = check_options(&j.opt, err)) != TWF_OK ||
      (st = check_mass_model(start, j.opt.groups, err)) != TWF_OK)
    return st;
  job_sigma(&j);
  st = job_alloc_result(&j);
  for (k = 0; st == TWF_OK && k < sizeof stages / sizeof stages[0]; k++) {
    double t0 = twf_trace_now();
    st = stages[k].run(&j);
    if (stages[k].name != NULL)
      twf_trace_stage(&j.res->trace, stages[k].name, t0);
  }
  if (st == TWF_OK) {
    *out = j.res;
    j.res = NULL;
  }
  twf_calib_result_free(j.res);
  job_free(&j);
  return st;
}
