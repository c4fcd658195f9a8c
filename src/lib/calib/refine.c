/* refine.c: the least-squares refinement of the registration (base pose
 * and unknown target offsets) with the calibration's own solver, walk and
 * gross-error screen, and the whole registration sequence every job starts
 * with (DEVELOPERS.md, "Registration"). */
#include "lsq.h"
#include "robust.h"
#include "ident.h"

#include <stdlib.h>

/* Bounds of the refinement's solver: the base and a few offsets converge
 * in a handful of steps; the tight step tolerance keeps the "before"
 * figure at its minimum. */
#define REFINE_MAX_ITERATIONS 100
#define REFINE_STEP_TOL_M 1e-12
/* Screen rounds: a few gross errors settle in one or two. */
#define REFINE_SCREEN_ROUNDS 5

twf_refine_options twf_refine_default_options(void)
{
  twf_refine_options o;
  o.sigma_length = 0.0;
  o.screen = 1;
  o.robust_threshold = TWF_ROBUST_THRESHOLD_DEFAULT;
  o.threads = 0;
  return o;
}

/* Keep the base columns and the flagged targets' columns that these poses
 * separate (a target offset the poses cannot separate from the base, as on
 * a four-axis arm, is fixed rather than left to the damping). */
static twf_status refine_columns(twf_lsq_problem *pr, const unsigned char *fit_target,
                                 unsigned char *keep, twf_error *err)
{
  size_t p = pr->p, j, n_order = 0;
  size_t *order = calloc(p, sizeof *order), *cols = calloc(p, sizeof *cols);
  double *R = calloc(p * p, sizeof *R), *rel = calloc(p, sizeof *rel);
  double *scales = calloc(p, sizeof *scales);
  twf_status st = TWF_OK;
  if (!order || !cols || !R || !rel || !scales)
    goto nomem;
  for (j = 0; j < p; j++) {
    cols[j] = j;
    scales[j] = twf_errmodel_param_scale(pr->em, j);
  }
  twf_lsq_factor(pr, cols, p, R);
  for (j = 0; j < p; j++) {
    const twf_param *par = twf_errmodel_param(pr->em, j);
    if (par->group == TWF_GROUP_TARGETS && !fit_target[par->target])
      continue;
    order[n_order++] = j;
  }
  /* the calibration's default tolerance: the same walk */
  if (twf_ident_walk_r(R, p, scales, order, n_order, TWF_REDUNDANCY_TOL_DEFAULT, keep, rel) == 0)
    goto done;
nomem:
  st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
done:
  free(order); free(cols); free(R); free(rel); free(scales);
  return st;
}

/* Fit, then drop gross errors (a broken beam, a wrong nest would pull the
 * base pose) and refit until the dropped set settles. */
static twf_status refine_fit(twf_lsq_problem *pr, const unsigned char *keep, const twf_refine_options *opt,
                             twf_trace *trace, twf_solve_report *rep, twf_error *err)
{
  twf_lsq_run run = { REFINE_MAX_ITERATIONS, REFINE_STEP_TOL_M, trace, "registration refinement", 0 };
  size_t n = pr->c->n_meas ? pr->c->n_meas : 1;
  double *value = calloc(pr->p ? pr->p : 1, sizeof *value);
  double *score = calloc(n, sizeof *score), *len = calloc(n, sizeof *len);
  twf_status st;
  if (value == NULL || score == NULL || len == NULL) {
    st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    goto done;
  }
  st = twf_lsq_solve(pr, keep, &run, value, rep, err);
  for (run.round = 1; st == TWF_OK && opt->screen && run.round <= REFINE_SCREEN_ROUNDS; run.round++) {
    size_t changed;
    if (twf_robust_screen(pr, TWF_ROBUST_DROP, opt->robust_threshold, score, len, &changed) != TWF_OK) {
      st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
      break;
    }
    if (changed == 0)
      break;
    st = twf_lsq_solve(pr, keep, &run, value, rep, err);
  }
done:
  free(value);
  free(score);
  free(len);
  return st;
}

/* twf_refine_base with the solver's steps recorded in trace (may be NULL). */
static twf_status refine_traced(twf_model *m, const twf_campaign *c, const unsigned char *fit_target,
                                const twf_refine_options *opt_in, twf_pose *base_in_tracker,
                                twf_solve_report *report, unsigned char *excluded, twf_trace *trace,
                                twf_error *err)
{
  twf_refine_options opt = opt_in ? *opt_in : twf_refine_default_options();
  unsigned groups = TWF_GROUP_BIT(TWF_GROUP_BASE);
  unsigned char *use = NULL, *keep = NULL;
  size_t i;
  twf_lsq_problem pr;
  twf_status st;
  twf_solve_report rep;

  memset(&rep, 0, sizeof rep);
  if (m == NULL || c == NULL || c->n_joints != m->n_joints)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "the campaign does not match the model");
  if (!(opt.robust_threshold > 0) || !(opt.sigma_length >= 0))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "invalid refinement options");
  for (i = 0; fit_target != NULL && i < m->n_targets; i++)
    if (fit_target[i])
      groups |= TWF_GROUP_BIT(TWF_GROUP_TARGETS);
  use = calloc(c->n_meas ? c->n_meas : 1, 1);
  if (use == NULL)
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
  for (i = 0; i < c->n_meas; i++)
    use[i] = c->meas[i].set == TWF_SET_FIT;
  st = twf_lsq_init(&pr, m, c, groups, use, opt.sigma_length > 0 ? opt.sigma_length : 1e-4, 0.0, err);
  if (st != TWF_OK) {
    free(use);
    return st;
  }
  memcpy(pr.base, base_in_tracker, pr.n_stations * sizeof *pr.base);
  pr.n_threads = twf_lsq_threads(opt.threads);
  keep = calloc(pr.p ? pr.p : 1, 1);
  if (keep == NULL)
    st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
  else
    st = refine_columns(&pr, fit_target, keep, err);
  if (st == TWF_OK)
    st = refine_fit(&pr, keep, &opt, trace, &rep, err);
  if (report != NULL)
    *report = rep;
  if (st == TWF_OK) {
    twf_lsq_model_assign(m, pr.m);
    memcpy(base_in_tracker, pr.base, pr.n_stations * sizeof *pr.base);
    if (excluded != NULL)
      for (i = 0; i < c->n_meas; i++)
        excluded[i] = use[i] && pr.weight[i] == 0.0;
  }
  free(use);
  free(keep);
  twf_lsq_free(&pr);
  return st;
}

twf_status twf_refine_base(twf_model *m, const twf_campaign *c,
                           const unsigned char *fit_target, const twf_refine_options *opt,
                           twf_pose *base_in_tracker, twf_solve_report *report,
                           unsigned char *excluded, twf_error *err)
{
  return refine_traced(m, c, fit_target, opt, base_in_tracker, report, excluded, NULL, err);
}

/* ------------------------------------------------------------ the sequence */

twf_status twf_register_and_refine(twf_model *model, const twf_campaign *c,
                                   const twf_register_options *reg_options,
                                   const twf_refine_options *refine_options,
                                   twf_pose *base_in_tracker, twf_registration_report *report,
                                   unsigned char *excluded, twf_trace *trace, twf_error *err)
{
  twf_register_options ropt = reg_options ? *reg_options : twf_register_default_options();
  twf_refine_options fopt = refine_options ? *refine_options : twf_refine_default_options();
  twf_registration_report rep;
  twf_model *work = NULL;
  double *offsets = NULL;
  unsigned char *fit = NULL, *seen = NULL, *ex = NULL;
  twf_pose base[TWF_STATIONS_MAX];
  size_t i, k;
  twf_status st;
  double t0 = twf_trace_now();

  memset(&rep, 0, sizeof rep);
  if (model == NULL || c == NULL || base_in_tracker == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "model, campaign and base pose must not be NULL");
  /* the work happens on a copy, so that a failure leaves model as it was */
  work = twf_model_copy(model);
  offsets = calloc(3 * (model->n_targets ? model->n_targets : 1), sizeof *offsets);
  fit = calloc(model->n_targets ? model->n_targets : 1, 1);
  seen = calloc(model->n_targets ? model->n_targets : 1, 1);
  ex = calloc(c->n_meas ? c->n_meas : 1, 1);
  if (work == NULL || offsets == NULL || fit == NULL || seen == NULL || ex == NULL) {
    st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    goto done;
  }
  twf_register_offsets_init(model, offsets);
  st = twf_register_campaign(model, c, &ropt, base, offsets, &rep.alternation, err);
  twf_trace_stage(trace, "registration", t0);
  if (st != TWF_OK)
    goto done;
  for (i = 0; i < c->n_meas; i++)
    if (c->meas[i].set == TWF_SET_FIT && c->meas[i].target < model->n_targets)
      seen[c->meas[i].target] = 1;
  /* only targets with fit rows are determined: the others stay as they are */
  for (k = 0; k < model->n_targets; k++) {
    memcpy(work->targets[k].offset, offsets + 3 * k, sizeof work->targets[k].offset);
    fit[k] = seen[k] && twf_register_target_is_fitted(model, &ropt, k);
    if (seen[k])
      work->targets[k].offset_known = 1;
  }
  t0 = twf_trace_now();
  st = refine_traced(work, c, fit, &fopt, base, &rep.refinement, ex, trace, err);
  twf_trace_stage(trace, "registration refinement", t0);
  if (st != TWF_OK)
    goto done;
  for (i = 0; i < c->n_meas; i++)
    rep.n_excluded += ex[i];
  rep.robust_threshold = fopt.screen ? fopt.robust_threshold : 0.0;
  twf_lsq_model_assign(model, work);
  memcpy(base_in_tracker, base, twf_campaign_station_count(c) * sizeof *base);
  if (excluded != NULL)
    memcpy(excluded, ex, c->n_meas);
done:
  if (report != NULL)
    *report = rep;
  twf_model_free(work);
  free(offsets);
  free(fit);
  free(seen);
  free(ex);
  return st;
}
