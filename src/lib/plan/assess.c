/* assess.c: what a pose set would determine before it is measured: the
 * calibration's redundancy walks, predicted standard deviations, weak
 * parameters and their warnings, correlations, observability and the
 * predicted accuracy over the workspace (plan.h), all on the rows the
 * poses would give with the instrument's noise. */
#include "design.h"
#include "calib/ident.h"
#include "calib/warn.h"

#include <stdlib.h>

twf_assess_options twf_assess_default_options(void)
{
  twf_assess_options o;
  memset(&o, 0, sizeof o);
  o.calib = twf_calib_default_options();
  o.calib.sigma_length = 2e-5;
  o.workspace = twf_workspace_default_options();
  return o;
}

void twf_assessment_free(twf_assessment *a)
{
  if (a == NULL)
    return;
  free(a->params);
  free(a->joint_min);
  free(a->joint_max);
  twf_prediction_free(a->workspace);
  free(a);
}

static void correlation_insert(twf_assessment *a, size_t i, size_t j, double rho)
{
  size_t k, pos = a->n_correlations;
  while (pos > 0 && fabs(a->correlations[pos - 1].rho) < fabs(rho))
    pos--;
  if (pos >= TWF_CORRELATIONS_MAX)
    return;
  if (a->n_correlations < TWF_CORRELATIONS_MAX)
    a->n_correlations++;
  for (k = a->n_correlations - 1; k > pos; k--)
    a->correlations[k] = a->correlations[k - 1];
  a->correlations[pos].a = i;
  a->correlations[pos].b = j;
  a->correlations[pos].rho = rho;
}

/* The walk on the poses over the structurally kept columns: keep, the
 * relative independent parts in rel and the scaled, weighted normal
 * matrix of those columns in As (p x p). */
static int walk_on_poses(twf_design *d, const double *q, size_t n, const size_t *order, size_t n_order,
                         const unsigned char *keep_struct, double tol, unsigned char *keep, double *rel,
                         double *As)
{
  size_t p = d->p, nc = 0, n2 = 0, a, b, i, k;
  size_t *cols = calloc(p ? p : 1, sizeof *cols), *order2 = calloc(p ? p : 1, sizeof *order2);
  size_t *pos_of = calloc(p ? p : 1, sizeof *pos_of);
  double *R = calloc(p ? p * p : 1, sizeof *R), *rows = calloc((d->r ? d->r : 1) * (p ? p : 1), sizeof *rows);
  double *g = calloc(p ? p : 1, sizeof *g), *relc = calloc(p ? p : 1, sizeof *relc);
  unsigned char *keep_c = calloc(p ? p : 1, 1);
  int bad = !cols || !order2 || !pos_of || !R || !rows || !g || !relc || !keep_c;
  if (!bad) {
    for (k = 0; k < p; k++)
      if (keep_struct[k]) {
        pos_of[k] = nc;
        cols[nc++] = k;
      }
    for (k = 0; k < n_order; k++)
      if (keep_struct[order[k]])
        order2[n2++] = pos_of[order[k]];
    for (i = 0; i < n; i++) {
      twf_design_rows(d, q + i * d->nj, rows);
      for (a = 0; a < d->r; a++) {
        for (b = 0; b < nc; b++)
          g[b] = rows[a * p + cols[b]];
        twf_ident_qr_add_row(R, nc, g);
      }
    }
    bad = twf_ident_walk_r(R, nc, NULL, order2, n2, tol, keep_c, relc) != 0;
  }
  if (!bad) {
    double *Ac = calloc(nc ? nc * nc : 1, sizeof *Ac);
    bad = Ac == NULL;
    if (!bad) {
      memset(keep, 0, p);
      for (a = 0; a < nc; a++) {
        keep[cols[a]] = keep_c[a];
        rel[cols[a]] = relc[a];
      }
      twf_ident_normal_from_r(R, nc, NULL, Ac);
      memset(As, 0, p * p * sizeof *As);
      for (a = 0; a < nc; a++)
        for (b = 0; b < nc; b++)
          As[cols[a] * p + cols[b]] = Ac[a * nc + b];
    }
    free(Ac);
  }
  free(cols); free(order2); free(pos_of); free(R); free(rows); free(g); free(relc); free(keep_c);
  return bad ? -1 : 0;
}

twf_status twf_assess(const twf_model *m, const double *q, size_t n, const twf_assess_options *opt_in,
                      twf_assessment **out, twf_warnings *w, twf_error *err)
{
  twf_assess_options opt = opt_in ? *opt_in : twf_assess_default_options();
  const twf_calib_options *co = &opt.calib;
  twf_design d;
  twf_assessment *a = NULL;
  size_t p, nj, i, k, j, n_order, n_syn, ns;
  size_t *order = NULL;
  unsigned char *keep_struct = NULL, *keep = NULL;
  double *As_struct = NULL, *As = NULL, *rel = NULL, *cov = NULL, *ratio = NULL, *sv = NULL;
  twf_status st;

  *out = NULL;
  if (m == NULL || (q == NULL && n > 0) || co->groups == 0 || !(co->redundancy_tol > 0 && co->redundancy_tol < 1) ||
      !(co->weak_ratio > 0))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "invalid assessment arguments");
  st = twf_design_init(&d, m, NULL, co->groups, opt.targets, opt.orientation, co->sigma_length, co->sigma_angle, err);
  if (st != TWF_OK)
    return st;
  p = d.p;
  nj = m->n_joints;
  a = calloc(1, sizeof *a);
  order = calloc(p ? p : 1, sizeof *order);
  keep_struct = calloc(p ? p : 1, 1);
  keep = calloc(p ? p : 1, 1);
  As_struct = calloc(p ? p * p : 1, sizeof *As_struct);
  As = calloc(p ? p * p : 1, sizeof *As);
  rel = calloc(p ? p : 1, sizeof *rel);
  cov = calloc(p ? p * p : 1, sizeof *cov);
  ratio = calloc(p ? p : 1, sizeof *ratio);
  sv = calloc(p ? p : 1, sizeof *sv);
  if (!a || !order || !keep_struct || !keep || !As_struct || !As || !rel || !cov || !ratio || !sv)
    goto nomem;
  a->n_poses = n;
  a->n_rows = n * d.r;
  a->n_params = p;
  a->n_joints = nj;
  a->params = calloc(p ? p : 1, sizeof *a->params);
  a->joint_min = calloc(nj ? nj : 1, sizeof *a->joint_min);
  a->joint_max = calloc(nj ? nj : 1, sizeof *a->joint_max);
  if (!a->params || !a->joint_min || !a->joint_max)
    goto nomem;
  for (k = 0; k < p; k++) {
    a->params[k].param = *twf_errmodel_param(d.em, k);
    a->params[k].std = NAN;
  }
  for (j = 0; j < nj; j++) {
    a->joint_min[j] = n ? INFINITY : 0.0;
    a->joint_max[j] = n ? -INFINITY : 0.0;
    for (i = 0; i < n; i++) {
      a->joint_min[j] = fmin(a->joint_min[j], q[i * nj + j]);
      a->joint_max[j] = fmax(a->joint_max[j], q[i * nj + j]);
    }
  }

  /* structural redundancy, as the calibration finds it */
  n_order = twf_design_order(&d, co->priority, order);
  n_syn = co->synthetic_poses ? co->synthetic_poses : (p < 40 ? 200 : 5 * p);
  if ((st = twf_design_structural(&d, order, n_order, n_syn, co->seed, co->redundancy_tol, keep_struct, As_struct,
                                  err)) != TWF_OK)
    goto fail;
  for (k = 0; k < p; k++) {
    a->structural_count += keep_struct[k];
    if (!keep_struct[k]) {
      a->params[k].status = TWF_PARAM_FIXED_STRUCTURAL;
      a->params[k].n_explain = twf_ident_explain(As_struct, p, keep_struct, k, TWF_EXPLAIN_MAX,
                                                 a->params[k].explain, a->params[k].explain_coef);
      a->n_fixed_structural++;
    }
  }
  /* the walk on these poses */
  if (walk_on_poses(&d, q, n, order, n_order, keep_struct, co->redundancy_tol, keep, rel, As) != 0)
    goto nomem;
  for (k = 0; k < p; k++)
    if (keep_struct[k] && !keep[k]) {
      a->params[k].status = TWF_PARAM_FIXED_DATA;
      a->params[k].n_explain = twf_ident_explain(As, p, keep, k, TWF_EXPLAIN_MAX, a->params[k].explain,
                                                 a->params[k].explain_coef);
      a->n_fixed_data++;
    }
  for (k = 0; k < p; k++)
    a->n_kept += keep[k];

  /* the calibration's warnings, through its own wording */
  {
    twf_calib_result view;
    double *range = calloc(nj ? nj : 1, sizeof *range);
    if (range == NULL)
      goto nomem;
    for (j = 0; j < nj; j++)
      range[j] = a->joint_max[j] - a->joint_min[j];
    memset(&view, 0, sizeof view);
    view.params = a->params;
    view.n_params = p;
    view.joint_range = range;
    view.n_fit_poses = n;
    view.n_fixed_data = a->n_fixed_data;
    twf_calib_warn_fixed_on_data(m, &view, w);

    /* the calibration's degrees-of-freedom rule (3 coordinates more than
     * parameters), against the independent parameters of the arm: the walk
     * on too few poses keeps only what they can carry */
    if (a->n_rows < a->structural_count + 3) {
      size_t need = a->structural_count + 3;
      size_t more = d.r ? (need - a->n_rows + d.r - 1) / d.r : 0;
      twf_warnings_add(w, NULL, 0, 0,
                       "these poses give %zu coordinates for the %zu independent parameters: at least %zu are "
                       "needed to determine and check them (about %zu more poses)",
                       a->n_rows, a->structural_count, need, more);
    }
    if (a->n_kept > 0 && twf_ident_inverse(As, p, keep, cov) == 0) {
      for (k = 0; k < p; k++) {
        twf_param_result *pa = &a->params[k];
        double scaled;
        if (!keep[k])
          continue;
        pa->std = d.scale[k] * sqrt(cov[k * p + k]);
        scaled = pa->std * d.scale[k];
        if (scaled > co->weak_ratio * co->sigma_length || rel[k] < 1e-3) {
          pa->weak = 1;
          a->n_weak++;
          ratio[k] = scaled / co->sigma_length;
        }
      }
      view.n_weak = a->n_weak;
      twf_calib_warn_weak(m, &view, ratio, w);
      for (i = 0; i < p; i++)
        for (j = i + 1; j < p; j++) {
          double rho;
          if (!keep[i] || !keep[j])
            continue;
          rho = cov[i * p + j] / sqrt(cov[i * p + i] * cov[j * p + j]);
          if (fabs(rho) > 0.9)
            correlation_insert(a, i, j, rho);
        }
      /* the report lists the correlations above 0.9 as calibrate does (a
       * full arm has dozens, some with any pose set); a warning only where
       * the pair's standard deviations are inflated seventy-fold, 1 /
       * sqrt(1 - rho^2) (common practice, no source) */
      if (a->n_correlations > 0 && fabs(a->correlations[0].rho) > 0.9999)
        twf_warnings_add(w, NULL, 0, 0,
                         "parameters %s and %s are correlated at %.4f on these poses: add poses that separate "
                         "them (more joints moved together, more of their ranges)",
                         a->params[a->correlations[0].a].param.name, a->params[a->correlations[0].b].param.name,
                         a->correlations[0].rho);
      ns = twf_ident_singular_values(As, p, keep, sv);
      if (ns > 0 && sv[ns - 1] > 0) {
        double logsum = 0.0;
        twf_observability_indices(sv, ns, a->n_rows, &a->observability);
        a->condition_number = sv[0] / sv[ns - 1];
        for (k = 0; k < ns; k++)
          logsum += 2.0 * log(sv[k]);
        a->log_det = logsum / (double)ns;
      } else {
        a->condition_number = INFINITY;
        a->log_det = -INFINITY;
      }
      {
        twf_predictor *pr = twf_predictor_make(&d, keep, As, err);
        if (pr == NULL) {
          free(range);
          st = err ? err->status : TWF_ERR_NOMEM;
          goto fail;
        }
        a->workspace = twf_predict_workspace(pr, &opt.workspace, err);
        twf_predictor_free(pr);
        if (a->workspace == NULL) {
          free(range);
          st = err ? err->status : TWF_ERR_NOMEM;
          goto fail;
        }
      }
    } else {
      a->condition_number = INFINITY;
      a->log_det = -INFINITY;
      twf_warnings_add(w, NULL, 0, 0,
                       "these poses determine no parameter set: the normal matrix of the kept parameters is "
                       "singular; measure more, and more varied, poses");
    }
    free(range);
  }
  *out = a;
  a = NULL;
  st = TWF_OK;
  goto done;
nomem:
  st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
fail:
done:
  twf_design_free(&d);
  twf_assessment_free(a);
  free(order); free(keep_struct); free(keep); free(As_struct); free(As); free(rel); free(cov); free(ratio);
  free(sv);
  return st;
}
