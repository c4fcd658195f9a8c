/* calib.c: the calibration job. Registration of the starting model, the
 * redundancy walk, a Levenberg-Marquardt loop that linearises at the
 * current model and folds every accepted step into it (so the answer is a
 * true stationary point of the exact cost), the outlier screen and the
 * covariance of the kept parameters (calibration-model.md).
 *
 * The normal matrix J^T W J and gradient J^T W r are accumulated pose by
 * pose (twf_errmodel_eval_pose once, then every target of that pose):
 * memory and time are linear in the number of measurements, the p x p
 * matrices are the only thing that grows with the parameter count. */
#include "internal.h"
#include "ident.h"

#include <gsl/gsl_linalg.h>
#include <gsl/gsl_matrix.h>
#include <gsl/gsl_sort.h>
#include <stdlib.h>

/* ------------------------------------------------------------ names */

const char *twf_stop_name(twf_stop s)
{
  switch (s) {
  case TWF_STOP_NONE: return "none";
  case TWF_STOP_STEP: return "step";
  case TWF_STOP_GRADIENT: return "gradient";
  case TWF_STOP_COST: return "cost";
  case TWF_STOP_MAXITER: return "max-iterations";
  case TWF_STOP_DIVERGED: return "diverged";
  case TWF_STOP_SINGULAR: return "singular";
  }
  return "?";
}

int twf_stop_converged(twf_stop s)
{
  return s == TWF_STOP_STEP || s == TWF_STOP_GRADIENT || s == TWF_STOP_COST;
}

twf_calib_options twf_calib_default_options(void)
{
  twf_calib_options o;
  int g;
  memset(&o, 0, sizeof o);
  o.groups = TWF_GROUPS_GEOMETRIC;
  for (g = 0; g < TWF_GROUP_COUNT; g++)
    o.priority[g] = (twf_group)g;
  o.robust = TWF_ROBUST_DROP;
  o.robust_threshold = 5.0;
  o.seed = 20261201ULL;
  o.max_iterations = 100;
  o.step_tol_m = 1e-10;
  o.redundancy_tol = 1e-6;
  o.weak_ratio = 5.0;
  return o;
}

/* ------------------------------------------------------------ the problem */

typedef struct problem {
  const twf_campaign *c;
  size_t n_joints;
  twf_model *m;            /* working model (owned) */
  twf_model *trial;        /* trial copy (owned) */
  twf_pose base;
  twf_errmodel *em;
  size_t p;
  size_t *pose_start;      /* measurements grouped by pose (CSR) */
  size_t *pose_meas;
  double *inv_sigma;       /* per measurement, 1/m */
  double inv_sigma_rot;    /* 1/rad */
  double sigma_len;        /* typical sigma of a coordinate, m */
  double *weight;          /* robust weight, 0 = dropped */
  const unsigned char *use;/* 1: enters the fit */
  double *rows;            /* 3 x p rows, then 3 x p gathered columns */
  double *A, *g;           /* p x p, p */
} problem;

/* Copy the geometry of src into dst of the same shape (no metadata). */
static void model_assign(twf_model *dst, const twf_model *src)
{
  memcpy(dst->joints, src->joints, src->n_joints * sizeof *src->joints);
  memcpy(dst->targets, src->targets, src->n_targets * sizeof *src->targets);
  dst->home = src->home;
}

static void quat_to_R(const double q[4], double R[3][3])
{
  twf_quat_to_rot(q, R);
}

static void problem_free(problem *pr)
{
  twf_model_free(pr->m);
  twf_model_free(pr->trial);
  twf_errmodel_free(pr->em);
  free(pr->pose_start);
  free(pr->pose_meas);
  free(pr->inv_sigma);
  free(pr->weight);
  free(pr->rows);
  free(pr->A);
  free(pr->g);
  memset(pr, 0, sizeof *pr);
}

static twf_status problem_init(problem *pr, const twf_model *m, const twf_campaign *c,
                               unsigned groups, const unsigned char *use,
                               double sigma_length, double sigma_angle, twf_error *err)
{
  size_t i, n_poses = c->n_poses;
  memset(pr, 0, sizeof *pr);
  pr->c = c;
  pr->n_joints = m->n_joints;
  pr->use = use;
  pr->m = twf_model_copy(m);
  pr->trial = twf_model_copy(m);
  if (pr->m == NULL || pr->trial == NULL)
    goto nomem;
  pr->em = twf_errmodel_alloc(pr->m, groups, err);
  if (pr->em == NULL) {
    problem_free(pr);
    return err ? err->status : TWF_ERR_NOMEM;
  }
  pr->p = twf_errmodel_n_params(pr->em);
  pr->pose_start = calloc(n_poses + 1, sizeof *pr->pose_start);
  pr->pose_meas = calloc(c->n_meas ? c->n_meas : 1, sizeof *pr->pose_meas);
  pr->inv_sigma = calloc(c->n_meas ? c->n_meas : 1, sizeof *pr->inv_sigma);
  pr->weight = calloc(c->n_meas ? c->n_meas : 1, sizeof *pr->weight);
  pr->rows = calloc(6 * (pr->p ? pr->p : 1), sizeof *pr->rows);
  pr->A = calloc(pr->p ? pr->p * pr->p : 1, sizeof *pr->A);
  pr->g = calloc(pr->p ? pr->p : 1, sizeof *pr->g);
  if (!pr->pose_start || !pr->pose_meas || !pr->inv_sigma || !pr->weight ||
      !pr->rows || !pr->A || !pr->g)
    goto nomem;
  /* counting sort of the measurements by pose */
  for (i = 0; i < c->n_meas; i++)
    pr->pose_start[c->meas[i].pose + 1]++;
  for (i = 0; i < n_poses; i++)
    pr->pose_start[i + 1] += pr->pose_start[i];
  {
    size_t *fill = calloc(n_poses + 1, sizeof *fill);
    if (fill == NULL)
      goto nomem;
    memcpy(fill, pr->pose_start, (n_poses + 1) * sizeof *fill);
    for (i = 0; i < c->n_meas; i++)
      pr->pose_meas[fill[c->meas[i].pose]++] = i;
    free(fill);
  }
  for (i = 0; i < c->n_meas; i++) {
    double s = c->meas[i].sigma > 0 ? c->meas[i].sigma : sigma_length;
    pr->inv_sigma[i] = 1.0 / s;
    pr->weight[i] = 1.0;
  }
  pr->inv_sigma_rot = 1.0 / (sigma_angle > 0 ? sigma_angle : sigma_length / twf_model_reach(m));
  pr->sigma_len = sigma_length;
  return TWF_OK;
nomem:
  problem_free(pr);
  return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
}

static int meas_active(const problem *pr, size_t i)
{
  return pr->use[i] && pr->weight[i] > 0.0;
}

/* Visit every weighted 3-row block of the Jacobian over the active
 * measurements at the working model: pose by pose (one evaluation of the
 * prefixes and parameter twists), then each target of the pose, its
 * position rows and, for a 6-D row, its orientation rows. visit receives
 * the 3 x p rows (derivative of the prediction, so r ~ r0 - J delta), the
 * residual and the weight (robust weight / sigma^2). Returns the cost
 * 0.5 r^T W r. */
typedef void (*row_visitor)(problem *pr, void *ctx, const double *rows, const double r[3], double w);

static double visit_rows(problem *pr, row_visitor visit, void *ctx)
{
  const twf_campaign *c = pr->c;
  size_t pose, t;
  double cost = 0.0;
  for (pose = 0; pose < c->n_poses; pose++) {
    int any = 0;
    for (t = pr->pose_start[pose]; t < pr->pose_start[pose + 1]; t++)
      any |= meas_active(pr, pr->pose_meas[t]);
    if (!any)
      continue;
    twf_errmodel_eval_pose(pr->em, pr->m, &pr->base, c->q + pose * pr->n_joints, NULL);
    for (t = pr->pose_start[pose]; t < pr->pose_start[pose + 1]; t++) {
      size_t i = pr->pose_meas[t];
      const twf_measurement *ms = &c->meas[i];
      double y[3], r[3], w;
      int pass, k;
      if (!meas_active(pr, i))
        continue;
      for (pass = 0; pass < (ms->has_orientation ? 2 : 1); pass++) {
        if (pass == 0) {
          twf_errmodel_point(pr->em, pr->m, ms->target, y, pr->rows);
          for (k = 0; k < 3; k++)
            r[k] = ms->pos[k] - y[k];
          w = pr->weight[i] * pr->inv_sigma[i] * pr->inv_sigma[i];
        } else {
          double R[3][3];
          quat_to_R(ms->quat, R);
          twf_errmodel_orientation(pr->em, R, r, pr->rows);
          w = pr->weight[i] * pr->inv_sigma_rot * pr->inv_sigma_rot;
        }
        cost += 0.5 * w * (r[0] * r[0] + r[1] * r[1] + r[2] * r[2]);
        visit(pr, ctx, pr->rows, r, w);
      }
    }
  }
  return cost;
}

/* Columns of the Jacobian a visitor works on (NULL: all p). */
typedef struct col_ctx {
  const size_t *cols;
  size_t nc;
  double *M;  /* nc x nc: the normal matrix, or the triangular factor */
  double *g;  /* nc: the gradient (normal matrix only) */
} col_ctx;

/* rank-3 update of the upper triangle of A and of g */
static void visit_normal(problem *pr, void *vctx, const double *rows, const double r[3], double w)
{
  col_ctx *x = vctx;
  size_t p = pr->p, nc = x->nc, a, b;
  double *c0 = pr->rows + 3 * p, *c1 = c0 + p, *c2 = c1 + p;
  for (a = 0; a < nc; a++) {
    size_t j = x->cols ? x->cols[a] : a;
    c0[a] = rows[j];
    c1[a] = rows[p + j];
    c2[a] = rows[2 * p + j];
  }
  for (a = 0; a < nc; a++) {
    double wa0 = w * c0[a], wa1 = w * c1[a], wa2 = w * c2[a];
    double *Arow = x->M + a * nc;
    x->g[a] += wa0 * r[0] + wa1 * r[1] + wa2 * r[2];
    if (wa0 == 0.0 && wa1 == 0.0 && wa2 == 0.0)
      continue;
    for (b = a; b < nc; b++)
      Arow[b] += wa0 * c0[b] + wa1 * c1[b] + wa2 * c2[b];
  }
}

/* three Givens row updates of the factor */
static void visit_factor(problem *pr, void *vctx, const double *rows, const double r[3], double w)
{
  col_ctx *x = vctx;
  size_t p = pr->p, a;
  double sw = sqrt(w), *row = pr->rows + 3 * p;
  int k;
  (void)r;
  for (k = 0; k < 3; k++) {
    for (a = 0; a < x->nc; a++)
      row[a] = sw * rows[k * p + (x->cols ? x->cols[a] : a)];
    twf_ident_qr_add_row(x->M, x->nc, row);
  }
}

/* The normal matrix A = J^T W J (nc x nc) and gradient g = J^T W r (nc)
 * over the columns cols[0..nc) (NULL: all p), and the cost. Restricting to
 * the kept columns in the solver saves the rank-3 updates of the fixed
 * ones, which dominate the cost of an iteration. */
static double accumulate_cols(problem *pr, const size_t *cols, size_t nc, double *A, double *g)
{
  col_ctx x;
  double cost;
  size_t a, b;
  x.cols = cols;
  x.nc = cols ? nc : pr->p;
  x.M = A;
  x.g = g;
  memset(A, 0, x.nc * x.nc * sizeof *A);
  memset(g, 0, x.nc * sizeof *g);
  cost = visit_rows(pr, visit_normal, &x);
  for (a = 0; a < x.nc; a++)
    for (b = 0; b < a; b++)
      A[a * x.nc + b] = A[b * x.nc + a];
  return cost;
}

/* The triangular factor R of the weighted Jacobian (R^T R = J^T W J) over
 * the columns cols[0..nc) (R is nc x nc), streamed row by row with Givens
 * rotations: the redundancy walks run on it. */
static void accumulate_r(problem *pr, const size_t *cols, size_t nc, double *R)
{
  col_ctx x;
  x.cols = cols;
  x.nc = nc;
  x.M = R;
  x.g = NULL;
  memset(R, 0, nc * nc * sizeof *R);
  visit_rows(pr, visit_factor, &x);
}

/* The cost only (no Jacobian), at model m and base B. */
static double cost_at(const problem *pr, const twf_model *m, const twf_pose *B,
                      twf_pose *prefix_ws)
{
  const twf_campaign *c = pr->c;
  size_t pose, t;
  double cost = 0.0;
  for (pose = 0; pose < c->n_poses; pose++) {
    twf_pose F, T;
    int done = 0;
    for (t = pr->pose_start[pose]; t < pr->pose_start[pose + 1]; t++) {
      size_t i = pr->pose_meas[t];
      const twf_measurement *ms = &c->meas[i];
      double y[3], r[3], w;
      int k;
      if (!meas_active(pr, i))
        continue;
      if (!done) {
        twf_model_fk(m, c->q + pose * pr->n_joints, prefix_ws, &F);
        twf_pose_mul(B, &F, &T);
        done = 1;
      }
      twf_pose_apply(&T, m->targets[ms->target].offset, y);
      for (k = 0; k < 3; k++)
        r[k] = ms->pos[k] - y[k];
      w = pr->weight[i] * pr->inv_sigma[i] * pr->inv_sigma[i];
      cost += 0.5 * w * (r[0] * r[0] + r[1] * r[1] + r[2] * r[2]);
      if (ms->has_orientation) {
        double R[3][3], E[3][3], v[3];
        int a, b;
        quat_to_R(ms->quat, R);
        for (a = 0; a < 3; a++)
          for (b = 0; b < 3; b++)
            E[a][b] = R[a][0] * T.R[b][0] + R[a][1] * T.R[b][1] + R[a][2] * T.R[b][2];
        twf_so3_log(E, v);
        w = pr->weight[i] * pr->inv_sigma_rot * pr->inv_sigma_rot;
        cost += 0.5 * w * twf_v3_dot(v, v);
      }
    }
  }
  return cost;
}

/* Levenberg-Marquardt over the kept columns with Marquardt's diagonal
 * scaling and Nielsen's (1999) damping update; every accepted step is
 * folded into the working model (a retraction), so the next linearisation
 * is exact. value[] accumulates the steps taken. */
static twf_status lm_run(problem *pr, const unsigned char *keep, int max_iter,
                         double step_tol_m, double *value, twf_solve_report *rep,
                         twf_error *err)
{
  size_t p = pr->p, nk = 0, a, b;
  size_t *idx = calloc(p ? p : 1, sizeof *idx);
  double *delta = calloc(p ? p : 1, sizeof *delta);
  twf_pose *prefix = calloc(pr->n_joints + 1, sizeof *prefix);
  gsl_matrix *M = NULL;
  gsl_vector *rhs = NULL, *x = NULL;
  /* start close to Gauss-Newton: with Marquardt's diagonal scaling a
   * damping of 1e-3 held back the weak directions (the normal matrix's
   * condition number is the square of the Jacobian's) and the fit crept on
   * linearly; a rejected step raises the damping quickly (Nielsen) */
  double cost, lambda = 1e-9, nu = 2.0;
  twf_status st = TWF_OK;
  twf_pose trial_base;

  memset(rep, 0, sizeof *rep);
  if (idx == NULL || delta == NULL || prefix == NULL)
    goto nomem;
  for (a = 0; a < p; a++)
    if (keep[a])
      idx[nk++] = a;
  cost = accumulate_cols(pr, idx, nk, pr->A, pr->g);
  rep->cost_start = rep->cost_end = cost;
  if (!isfinite(cost)) {
    rep->stop = TWF_STOP_DIVERGED;
    st = twf_error_set(err, TWF_ERR_DIVERGED, NULL, 0, 0,
                       "check the inputs for values far out of range",
                       "the starting cost is not finite");
    goto done;
  }
  if (nk == 0) {
    rep->stop = TWF_STOP_STEP;
    goto done;
  }
  M = gsl_matrix_alloc(nk, nk);
  rhs = gsl_vector_alloc(nk);
  x = gsl_vector_alloc(nk);
  if (M == NULL || rhs == NULL || x == NULL)
    goto nomem;

  while (rep->iterations < max_iter) {
    double grad_max = 0.0, step_max = 0.0, pred = 0.0, cost_new, rho;
    /* converged when every column is orthogonal to the weighted residual
     * (cosine below 1e-12): the gradient test, scale free */
    for (a = 0; a < nk; a++) {
      double ajj = pr->A[a * nk + a];
      double cosine = ajj > 0 && cost > 0 ? fabs(pr->g[a]) / sqrt(ajj * 2.0 * cost) : 0.0;
      if (cosine > grad_max)
        grad_max = cosine;
    }
    if (grad_max < 1e-12) {
      rep->stop = TWF_STOP_GRADIENT;
      break;
    }
    for (a = 0; a < nk; a++) {
      for (b = 0; b < nk; b++)
        gsl_matrix_set(M, a, b, pr->A[a * nk + b]);
      *gsl_matrix_ptr(M, a, a) *= 1.0 + lambda;
      gsl_vector_set(rhs, a, pr->g[a]);
    }
    rep->iterations++;
    if (gsl_linalg_cholesky_decomp1(M) != 0 || gsl_linalg_cholesky_solve(M, rhs, x) != 0) {
      lambda *= nu;
      nu *= 2.0;
      if (lambda > 1e16) {
        rep->stop = TWF_STOP_SINGULAR;
        st = twf_error_set(err, TWF_ERR_SINGULAR, NULL, 0, 0,
                           "fix more parameters (--fit) or measure more varied poses",
                           "the damped normal equations are singular");
        goto done;
      }
      continue;
    }
    memset(delta, 0, p * sizeof *delta);
    for (a = 0; a < nk; a++) {
      double d = gsl_vector_get(x, a);
      double s = fabs(d) * twf_errmodel_param_scale(pr->em, idx[a]);
      delta[idx[a]] = d;
      if (s > step_max)
        step_max = s;
      pred += d * (lambda * pr->A[a * nk + a] * d + pr->g[a]);
    }
    pred *= 0.5;
    model_assign(pr->trial, pr->m);
    trial_base = pr->base;
    twf_errmodel_fold(pr->em, delta, pr->trial, &trial_base);
    cost_new = cost_at(pr, pr->trial, &trial_base, prefix);
    rho = pred > 0 ? (cost - cost_new) / pred : -1.0;
    if (isfinite(cost_new) && cost_new < cost) {
      double decrease = cost - cost_new;
      twf_model *tmp = pr->m;
      pr->m = pr->trial;
      pr->trial = tmp;
      pr->base = trial_base;
      for (a = 0; a < p; a++)
        value[a] += delta[a];
      cost = accumulate_cols(pr, idx, nk, pr->A, pr->g);
      rep->cost_end = cost;
      lambda *= fmax(1.0 / 3.0, 1.0 - pow(2.0 * rho - 1.0, 3));
      nu = 2.0;
      if (step_max < step_tol_m) {
        rep->stop = TWF_STOP_STEP;
        break;
      }
      /* a decrease at the level of rounding in the cost: nothing left */
      if (decrease <= 1e-13 * (cost + decrease)) {
        rep->stop = TWF_STOP_COST;
        break;
      }
    } else {
      twf_errmodel_update(pr->em, pr->m);
      if (!isfinite(cost_new) && lambda > 1e12) {
        rep->stop = TWF_STOP_DIVERGED;
        st = twf_error_set(err, TWF_ERR_DIVERGED, NULL, 0, 0,
                           "check units and the starting model",
                           "the solver diverged (non-finite cost)");
        goto done;
      }
      if (step_max < step_tol_m || nu > 1e12 || pred <= 1e-13 * cost) {
        /* no smaller step lowers the cost: the cost is at its rounding floor */
        rep->stop = TWF_STOP_COST;
        break;
      }
      lambda *= nu;
      nu *= 2.0;
    }
  }
  if (rep->stop == TWF_STOP_NONE) {
    rep->stop = TWF_STOP_MAXITER;
    st = twf_error_set(err, TWF_ERR_DIVERGED, NULL, 0, 0,
                       "raise the iteration limit or check the data for gross errors",
                       "the solver did not converge in %d iterations", max_iter);
  }
  goto done;
nomem:
  st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
done:
  if (M) gsl_matrix_free(M);
  if (rhs) gsl_vector_free(rhs);
  if (x) gsl_vector_free(x);
  free(idx);
  free(delta);
  free(prefix);
  return st;
}

/* Scale A into length units: A_s = D A D. */
static void scale_normal(const problem *pr, const double *A, double *As)
{
  size_t p = pr->p, a, b;
  for (a = 0; a < p; a++)
    for (b = 0; b < p; b++)
      As[a * p + b] = A[a * p + b] * twf_errmodel_param_scale(pr->em, a) *
                      twf_errmodel_param_scale(pr->em, b);
}

/* Walk order: groups in priority order, parameters of a group in their
 * internal order. */
static size_t walk_order(const problem *pr, const twf_group *priority, size_t *order)
{
  size_t n = 0, j;
  int gi;
  for (gi = 0; gi < TWF_GROUP_COUNT; gi++)
    for (j = 0; j < pr->p; j++)
      if (twf_errmodel_param(pr->em, j)->group == priority[gi])
        order[n++] = j;
  return n;
}

/* ------------------------------------------------------------ refinement of the base */

static twf_status robust_screen(problem *pr, twf_robust mode, double k_threshold, double *score,
                                double *err_len, size_t *changed);

twf_refine_options twf_refine_default_options(void)
{
  twf_refine_options o;
  o.sigma_length = 0.0;
  o.screen = 1;
  o.robust_threshold = 5.0;
  return o;
}

twf_status twf_refine_base(twf_model *m, const twf_campaign *c,
                           const unsigned char *fit_target, const twf_refine_options *opt_in,
                           twf_pose *base_in_tracker, twf_solve_report *report,
                           unsigned char *excluded, twf_error *err)
{
  twf_refine_options opt = opt_in ? *opt_in : twf_refine_default_options();
  unsigned groups = TWF_GROUP_BIT(TWF_GROUP_BASE);
  unsigned char *use = NULL, *keep = NULL;
  double *value = NULL, *R = NULL, *rel = NULL, *scales = NULL, *score = NULL, *len = NULL;
  size_t *order = NULL, *cols = NULL, i, j, n_order;
  problem pr;
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
  st = problem_init(&pr, m, c, groups, use, opt.sigma_length > 0 ? opt.sigma_length : 1e-4, 0.0, err);
  if (st != TWF_OK) {
    free(use);
    return st;
  }
  pr.base = *base_in_tracker;
  value = calloc(pr.p, sizeof *value);
  keep = calloc(pr.p, 1);
  order = calloc(pr.p, sizeof *order);
  cols = calloc(pr.p, sizeof *cols);
  R = calloc(pr.p * pr.p, sizeof *R);
  rel = calloc(pr.p, sizeof *rel);
  scales = calloc(pr.p, sizeof *scales);
  score = calloc(c->n_meas ? c->n_meas : 1, sizeof *score);
  len = calloc(c->n_meas ? c->n_meas : 1, sizeof *len);
  if (!value || !keep || !order || !cols || !R || !rel || !scales || !score || !len) {
    st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    goto done;
  }
  /* free only the flagged targets; fix columns exactly dependent on these
   * poses (a target offset the poses cannot separate from the base, as on a
   * four-axis arm) rather than leave them to the damping */
  for (j = 0; j < pr.p; j++) {
    cols[j] = j;
    scales[j] = twf_errmodel_param_scale(pr.em, j);
  }
  accumulate_r(&pr, cols, pr.p, R);
  n_order = 0;
  for (j = 0; j < pr.p; j++) {
    const twf_param *par = twf_errmodel_param(pr.em, j);
    if (par->group == TWF_GROUP_TARGETS && !fit_target[par->target])
      continue;
    order[n_order++] = j;
  }
  if (twf_ident_walk_r(R, pr.p, scales, order, n_order, 1e-6, keep, rel) != 0) {
    st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    goto done;
  }
  st = lm_run(&pr, keep, 100, 1e-12, value, &rep, err);
  /* gross errors (a broken beam, a wrong nest) would pull the base pose:
   * drop them from the refinement as the calibration does, and say which */
  if (st == TWF_OK && opt.screen) {
    int round;
    for (round = 0; round < 5; round++) {
      size_t changed;
      if (robust_screen(&pr, TWF_ROBUST_DROP, opt.robust_threshold, score, len, &changed) != TWF_OK) {
        st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
        break;
      }
      if (changed == 0)
        break;
      st = lm_run(&pr, keep, 100, 1e-12, value, &rep, err);
      if (st != TWF_OK)
        break;
    }
  }
  if (report != NULL)
    *report = rep;
  if (st == TWF_OK) {
    model_assign(m, pr.m);
    *base_in_tracker = pr.base;
    if (excluded != NULL)
      for (i = 0; i < c->n_meas; i++)
        excluded[i] = use[i] && pr.weight[i] == 0.0;
  }
done:
  free(use);
  free(value);
  free(keep);
  free(order);
  free(cols);
  free(R);
  free(rel);
  free(scales);
  free(score);
  free(len);
  problem_free(&pr);
  return st;
}

/* ------------------------------------------------------------ the job */

void twf_calib_result_free(twf_calib_result *r)
{
  if (r == NULL)
    return;
  twf_model_free(r->asbuilt);
  twf_model_free(r->registered);
  free(r->params);
  free(r->outliers);
  free(r->meas_set);
  free(r->residual_before);
  free(r->residual_after);
  free(r->rot_before);
  free(r->rot_after);
  free(r->joint_range);
  free(r->target_in_fit);
  twf_asbuilt_comparison_clear(&r->comparison);
  free(r);
}

/* Residuals of every measurement (fit and check) at model m, base B. */
static void all_residuals(const twf_model *m, const twf_pose *B, const twf_campaign *c,
                          double *pos, double *rot)
{
  size_t i;
  twf_pose F, T;
  size_t last_pose = (size_t)-1;
  for (i = 0; i < c->n_meas; i++) {
    const twf_measurement *ms = &c->meas[i];
    double y[3];
    int k;
    if (ms->pose != last_pose) {
      twf_model_fk(m, c->q + ms->pose * m->n_joints, NULL, &F);
      twf_pose_mul(B, &F, &T);
      last_pose = ms->pose;
    }
    twf_pose_apply(&T, m->targets[ms->target].offset, y);
    for (k = 0; k < 3; k++)
      pos[3 * i + k] = ms->pos[k] - y[k];
    if (ms->has_orientation) {
      double R[3][3];
      twf_quat_to_rot(ms->quat, R);
      rot[i] = twf_rot_angle_between(T.R, R);
    } else {
      rot[i] = NAN;
    }
  }
}

/* The triangular factor R (R^T R = J^T J) of a synthetic rich pose set
 * within the joint limits: the structural redundancy is walked on it. */
static twf_status synthetic_factor(const problem *pr, size_t n_poses, unsigned long long seed,
                                   const unsigned char *target_seen, int with_orientation,
                                   double *R)
{
  const twf_model *m = pr->m;
  size_t p = pr->p, n = m->n_joints, s, k;
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
    twf_errmodel_eval_pose(pr->em, m, &pr->base, q, NULL);
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
          twf_model_fk(m, q, NULL, &T);
          twf_pose_mul(&pr->base, &T, &T);
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

static double median_of(double *v, size_t n)
{
  if (n == 0)
    return 0.0;
  gsl_sort(v, 1, n);
  return n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
}

/* Robust screen: score each fit measurement's error length against
 * 1.4826 MAD of the weighted residual components (and, for 6-D rows, the
 * rotation error against its own robust scale, the median over 1.5382, the
 * median of a chi distribution with 3 degrees of freedom; a row scores the
 * larger of the two); set the weights. *changed receives the number of
 * measurements whose weight changed. */
static twf_status robust_screen(problem *pr, twf_robust mode, double k_threshold, double *score,
                                double *err_len, size_t *changed)
{
  const twf_campaign *c = pr->c;
  size_t i, n = 0, nr = 0;
  size_t cap = c->n_meas ? c->n_meas : 1;
  double *comp = malloc(3 * cap * sizeof *comp);
  double *pos = malloc(3 * cap * sizeof *pos);
  double *rot = malloc(cap * sizeof *rot);
  double *rs = malloc(cap * sizeof *rs);
  double med, mad, s, s_rot = 0.0;
  *changed = 0;
  if (comp == NULL || pos == NULL || rot == NULL || rs == NULL) {
    free(comp); free(pos); free(rot); free(rs);
    return TWF_ERR_NOMEM;
  }
  all_residuals(pr->m, &pr->base, c, pos, rot);
  for (i = 0; i < c->n_meas; i++) {
    int k;
    if (!pr->use[i])
      continue;
    for (k = 0; k < 3; k++)
      comp[n++] = pos[3 * i + k] * pr->inv_sigma[i];
    if (c->meas[i].has_orientation)
      rs[nr++] = rot[i] * pr->inv_sigma_rot;
  }
  med = median_of(comp, n);
  for (i = 0; i < n; i++)
    comp[i] = fabs(comp[i] - med);
  mad = median_of(comp, n);
  s = 1.4826 * mad;
  /* floor the scales at 1 um (and 1 urad): below any instrument's noise, so
   * that a noise-free campaign flags no rounding-level "outliers" (common
   * practice, no source) */
  if (!(s > 1e-6 / pr->sigma_len))
    s = 1e-6 / pr->sigma_len;
  if (nr > 0) {
    s_rot = median_of(rs, nr) / 1.5382;
    if (!(s_rot > 1e-6 * pr->inv_sigma_rot))
      s_rot = 1e-6 * pr->inv_sigma_rot;
  }
  for (i = 0; i < c->n_meas; i++) {
    double len = sqrt(pos[3 * i] * pos[3 * i] + pos[3 * i + 1] * pos[3 * i + 1] +
                      pos[3 * i + 2] * pos[3 * i + 2]);
    double u = len * pr->inv_sigma[i] / s, w = 1.0, k = k_threshold;
    if (c->meas[i].has_orientation && s_rot > 0)
      u = fmax(u, rot[i] * pr->inv_sigma_rot / s_rot);
    err_len[i] = len;
    score[i] = u;
    if (!pr->use[i])
      continue;
    switch (mode) {
    case TWF_ROBUST_DROP: w = u > k ? 0.0 : 1.0; break;
    case TWF_ROBUST_HUBER: w = u > k ? k / u : 1.0; break;
    case TWF_ROBUST_CAUCHY: w = 1.0 / (1.0 + (u / k) * (u / k)); break;
    case TWF_ROBUST_OFF: w = 1.0; break;
    }
    if (fabs(w - pr->weight[i]) > 1e-3 * fmax(w, pr->weight[i]))
      (*changed)++;
    pr->weight[i] = w;
  }
  free(comp);
  free(pos);
  free(rot);
  free(rs);
  return TWF_OK;
}

/* A joint counts as narrow in the fit poses when it moved through less
 * than a quarter of its travel (or 30 degrees / 50 mm without limits):
 * common practice, no source. */
static int joint_narrow(const twf_joint *jt, double range)
{
  double span = jt->has_limits ? jt->limit_hi - jt->limit_lo
                               : (jt->type == TWF_JOINT_REVOLUTE ? 2 * TWF_PI : 0.2);
  double floor_abs = jt->type == TWF_JOINT_REVOLUTE ? 30.0 * TWF_PI / 180.0 : 0.05;
  return range < fmin(0.25 * span, floor_abs);
}

/* A joint's range in the model's declared units. */
static double joint_range_shown(const twf_model *m, const twf_joint *jt, double range)
{
  return range / (jt->type == TWF_JOINT_REVOLUTE ? twf_angle_unit_si(m->angle_unit)
                                                 : twf_length_unit_si(m->length_unit));
}

static const char *joint_range_unit(const twf_model *m, const twf_joint *jt)
{
  return jt->type == TWF_JOINT_REVOLUTE ? twf_angle_unit_name(m->angle_unit)
                                        : twf_length_unit_name(m->length_unit);
}

/* The narrowest joint among those whose motion the parameter depends on:
 * its own joint and, for a joint parameter, the joints after it. -1 when
 * none is narrow. */
static long narrowest_joint(const twf_model *m, const twf_calib_result *res, long from)
{
  long best = -1;
  size_t i;
  for (i = from < 0 ? 0 : (size_t)from; i < m->n_joints; i++)
    if (joint_narrow(&m->joints[i], res->joint_range[i]) &&
        (best < 0 || res->joint_range[i] < res->joint_range[best]))
      best = (long)i;
  return best;
}

/* One warning per cause for the weak parameters: the narrowest joint they
 * depend on, or too few varied poses; the worst one is quoted, the rest
 * named. ratio[j] is the scaled std over sigma (0 for parameters that are
 * not weak). */
static void warn_weak(const problem *pr, const twf_calib_result *res, const double *ratio,
                      twf_warnings *w)
{
  long cause;
  for (cause = -1; cause < (long)pr->m->n_joints; cause++) {
    char names[TWF_ERROR_TEXT_MAX / 2];
    size_t j, n = 0, used = 0, worst = 0;
    names[0] = '\0';
    for (j = 0; j < res->n_params; j++) {
      const twf_param *par = &res->params[j].param;
      if (!res->params[j].weak || narrowest_joint(pr->m, res, par->joint) != cause)
        continue;
      if (n == 0 || ratio[j] > ratio[worst])
        worst = j;
      n++;
    }
    if (n == 0)
      continue;
    {
      size_t listed = 0;
      for (j = 0; j < res->n_params; j++) {
        const twf_param *par = &res->params[j].param;
        int k;
        if (j == worst || !res->params[j].weak || narrowest_joint(pr->m, res, par->joint) != cause)
          continue;
        if (listed == 6) {
          k = snprintf(names + used, sizeof names - used, " and %zu more", n - 1 - listed);
          used = k > 0 && used + (size_t)k < sizeof names ? used + (size_t)k : sizeof names - 1;
          break;
        }
        k = snprintf(names + used, sizeof names - used, "%s%s", listed ? ", " : "", par->name);
        used = k > 0 && used + (size_t)k < sizeof names ? used + (size_t)k : sizeof names - 1;
        listed++;
      }
    }
    {
      const twf_param *par = &res->params[worst].param;
      const char *unit = par->kind == TWF_PARAM_ANGLE    ? twf_angle_unit_name(pr->m->angle_unit)
                         : par->kind == TWF_PARAM_LENGTH ? twf_length_unit_name(pr->m->length_unit)
                                                         : "";
      double shown = res->params[worst].std /
                     (par->kind == TWF_PARAM_ANGLE    ? twf_angle_unit_si(pr->m->angle_unit)
                      : par->kind == TWF_PARAM_LENGTH ? twf_length_unit_si(pr->m->length_unit)
                                                      : 1.0);
      char what[TWF_ERROR_TEXT_MAX];
      snprintf(what, sizeof what, "%zu parameter%s poorly determined by these poses (worst %s: std %.3g %s, "
               "%.2g times the noise at the arm's reach%s%s)",
               n, n == 1 ? " is" : "s are", par->name, shown, unit, ratio[worst], n > 1 ? "; also " : "", names);
      if (cause >= 0) {
        const twf_joint *jt = &pr->m->joints[cause];
        twf_warnings_add(w, NULL, 0, 0,
                         "%s: joint %s moved through only %.3g %s in the fit poses; add poses that move %s "
                         "over more of its range",
                         what, jt->name, joint_range_shown(pr->m, jt, res->joint_range[cause]), joint_range_unit(pr->m, jt),
                         jt->name);
      } else {
        twf_warnings_add(w, NULL, 0, 0, "%s: add poses that vary more joints together (%zu fit poses now)",
                         what, res->n_fit_poses);
      }
    }
  }
}

/* One warning per cause for the parameters fixed on the user's poses: a
 * joint that never moved (or barely), else the parameters by name. */
static void warn_fixed_on_data(const twf_model *m, const twf_calib_result *res,
                               twf_warnings *w)
{
  char list[TWF_ERROR_TEXT_MAX / 2];
  size_t j, used = 0;
  long jn = narrowest_joint(m, res, 0);
  list[0] = '\0';
  for (j = 0; j < res->n_params; j++)
    if (res->params[j].status == TWF_PARAM_FIXED_DATA && used + 2 < sizeof list) {
      int n = snprintf(list + used, sizeof list - used, "%s%s", used ? ", " : "",
                       res->params[j].param.name);
      used = n > 0 && used + (size_t)n < sizeof list ? used + (size_t)n : sizeof list - 1;
    }
  if (used == 0)
    return;
  if (jn >= 0)
    twf_warnings_add(w, NULL, 0, 0,
                     "joint %s moved through %.3g %s in the fit poses: %zu parameters cannot be determined "
                     "and stay at their starting values (%s); measure poses that move %s over its range",
                     m->joints[jn].name, joint_range_shown(m, &m->joints[jn], res->joint_range[jn]),
                     joint_range_unit(m, &m->joints[jn]), res->n_fixed_data, list, m->joints[jn].name);
  else
    twf_warnings_add(w, NULL, 0, 0,
                     "%zu parameters cannot be determined from these poses and stay at their starting values (%s): "
                     "measure more varied poses", res->n_fixed_data, list);
}

twf_status twf_calibrate(const twf_model *start, const twf_campaign *c,
                         const twf_calib_options *opt_in, twf_calib_result **out,
                         twf_warnings *warnings, twf_error *err)
{
  twf_calib_options opt = opt_in ? *opt_in : twf_calib_default_options();
  twf_calib_result *res = NULL;
  twf_model *reg = NULL;
  unsigned char *use = NULL, *keep_struct = NULL, *keep = NULL, *target_seen = NULL,
                *fit_target = NULL, *pose_held = NULL;
  double *Rf = NULL, *scales = NULL;
  double *offsets = NULL, *As = NULL, *cov = NULL, *value = NULL, *rel = NULL, *sv = NULL,
         *score = NULL, *err_len = NULL, *first_err = NULL, *first_score = NULL;
  size_t *order = NULL;
  size_t i, j, p = 0, n_order, n_rows = 0, nk;
  double sigma_len, sigma_ref;
  int sigma_from_rows = 0;
  problem pr;
  twf_status st;
  twf_register_report rrep;
  twf_register_options ropt = twf_register_default_options();
  int with_orientation = 0;

  memset(&pr, 0, sizeof pr);
  *out = NULL;
  if (start == NULL || c == NULL || c->n_joints != start->n_joints)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "the campaign does not match the model");
  if (!(opt.robust_threshold > 0) || !(opt.check_fraction >= 0 && opt.check_fraction < 1) ||
      opt.max_iterations < 1 || !(opt.redundancy_tol > 0 && opt.redundancy_tol < 1) ||
      !(opt.sigma_length >= 0) || !(opt.sigma_angle >= 0) || !(opt.weak_ratio > 0) || opt.groups == 0)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0,
                         "use positive thresholds, a held-out fraction in [0, 1) and at least one iteration",
                         "invalid calibration options");
  /* the sigma of the covariance: given, else the mean of the rows' own
   * (as the registration does), else a placeholder scaled a posteriori */
  sigma_len = opt.sigma_length;
  if (!(sigma_len > 0)) {
    double sum = 0.0;
    size_t n_sig = 0;
    for (i = 0; i < c->n_meas; i++)
      if (c->meas[i].sigma > 0) {
        sum += c->meas[i].sigma;
        n_sig++;
      }
    sigma_len = n_sig ? sum / (double)n_sig : 1e-4;
    sigma_from_rows = n_sig > 0;
  }

  res = calloc(1, sizeof *res);
  use = calloc(c->n_meas ? c->n_meas : 1, 1);
  pose_held = calloc(c->n_poses ? c->n_poses : 1, 1);
  offsets = calloc(3 * (start->n_targets ? start->n_targets : 1), sizeof *offsets);
  target_seen = calloc(start->n_targets ? start->n_targets : 1, 1);
  fit_target = calloc(start->n_targets ? start->n_targets : 1, 1);
  if (!res || !use || !pose_held || !offsets || !target_seen || !fit_target)
    goto nomem;
  res->n_meas = c->n_meas;
  res->meas_set = calloc(c->n_meas ? c->n_meas : 1, sizeof *res->meas_set);
  res->residual_before = calloc(3 * (c->n_meas ? c->n_meas : 1), sizeof(double));
  res->residual_after = calloc(3 * (c->n_meas ? c->n_meas : 1), sizeof(double));
  res->rot_before = calloc(c->n_meas ? c->n_meas : 1, sizeof(double));
  res->rot_after = calloc(c->n_meas ? c->n_meas : 1, sizeof(double));
  res->joint_range = calloc(start->n_joints ? start->n_joints : 1, sizeof(double));
  if (!res->meas_set || !res->residual_before || !res->residual_after || !res->rot_before ||
      !res->rot_after || !res->joint_range)
    goto nomem;

  /* held-out check poses: the tagged ones plus a seeded random fraction */
  if (opt.check_fraction > 0) {
    unsigned long long s = opt.seed ^ 0x5deece66dULL;
    for (i = 0; i < c->n_poses; i++)
      pose_held[i] = twf_rng_uniform(&s) < opt.check_fraction;
  }
  for (i = 0; i < c->n_meas; i++) {
    const twf_measurement *ms = &c->meas[i];
    res->meas_set[i] = ms->set == TWF_SET_CHECK || pose_held[ms->pose] ? TWF_SET_CHECK : TWF_SET_FIT;
    use[i] = res->meas_set[i] == TWF_SET_FIT;
    if (use[i]) {
      res->n_fit_meas++;
      target_seen[ms->target] = 1;
      if (ms->has_orientation)
        with_orientation = 1;
    } else {
      res->n_check_meas++;
    }
  }
  if (res->n_fit_meas == 0) {
    st = twf_error_set(err, TWF_ERR_DEGENERATE, NULL, 0, 0,
                       "tag fewer rows as check data or lower the held-out fraction",
                       "no measurement is left for the fit");
    goto fail;
  }
  /* joint ranges over the fit poses */
  {
    double *lo = calloc(start->n_joints ? start->n_joints : 1, sizeof *lo);
    double *hi = calloc(start->n_joints ? start->n_joints : 1, sizeof *hi);
    unsigned char *seen = calloc(c->n_poses ? c->n_poses : 1, 1);
    if (!lo || !hi || !seen) {
      free(lo); free(hi); free(seen);
      goto nomem;
    }
    for (j = 0; j < start->n_joints; j++) {
      lo[j] = INFINITY;
      hi[j] = -INFINITY;
    }
    for (i = 0; i < c->n_meas; i++) {
      size_t ps = c->meas[i].pose;
      if (!use[i] || seen[ps])
        continue;
      seen[ps] = 1;
      res->n_fit_poses++;
      for (j = 0; j < start->n_joints; j++) {
        double v = c->q[ps * start->n_joints + j];
        lo[j] = fmin(lo[j], v);
        hi[j] = fmax(hi[j], v);
      }
    }
    for (j = 0; j < start->n_joints; j++)
      res->joint_range[j] = hi[j] - lo[j];
    free(lo); free(hi); free(seen);
  }

  /* 1. registration of the starting model, then its least-squares refinement */
  {
    twf_campaign view = *c;
    twf_measurement *meas = malloc((c->n_meas ? c->n_meas : 1) * sizeof *meas);
    if (meas == NULL)
      goto nomem;
    memcpy(meas, c->meas, c->n_meas * sizeof *meas);
    for (i = 0; i < c->n_meas; i++)
      meas[i].set = res->meas_set[i];
    view.meas = meas;
    reg = twf_model_copy(start);
    if (reg == NULL) {
      free(meas);
      goto nomem;
    }
    twf_register_offsets_init(start, offsets);
    ropt.sigma_default_m = opt.sigma_length;
    st = twf_register_campaign(start, &view, &ropt, &res->base_before, offsets, &rrep, err);
    if (st != TWF_OK) {
      free(meas);
      goto fail;
    }
    for (j = 0; j < start->n_targets; j++) {
      memcpy(reg->targets[j].offset, offsets + 3 * j, sizeof reg->targets[j].offset);
      fit_target[j] = target_seen[j] && twf_register_target_is_fitted(start, &ropt, j);
      if (target_seen[j])
        reg->targets[j].offset_known = 1;
    }
    {
      twf_refine_options ro = twf_refine_default_options();
      ro.sigma_length = sigma_len;
      ro.screen = opt.robust != TWF_ROBUST_OFF;
      ro.robust_threshold = opt.robust_threshold;
      st = twf_refine_base(reg, &view, fit_target, &ro, &res->base_before, &res->registration, NULL, err);
    }
    free(meas);
    if (st != TWF_OK)
      goto fail;
  }
  all_residuals(reg, &res->base_before, c, res->residual_before, res->rot_before);

  /* 2. the problem at the registered model */
  st = problem_init(&pr, reg, c, opt.groups, use, sigma_len, opt.sigma_angle, err);
  if (st != TWF_OK)
    goto fail;
  pr.base = res->base_before;
  p = pr.p;
  res->n_params = p;
  res->params = calloc(p ? p : 1, sizeof *res->params);
  keep_struct = calloc(p ? p : 1, 1);
  keep = calloc(p ? p : 1, 1);
  order = calloc(p ? p : 1, sizeof *order);
  As = calloc(p ? p * p : 1, sizeof *As);
  Rf = calloc(p ? p * p : 1, sizeof *Rf);
  scales = calloc(p ? p : 1, sizeof *scales);
  cov = calloc(p ? p * p : 1, sizeof *cov);
  value = calloc(p ? p : 1, sizeof *value);
  rel = calloc(p ? p : 1, sizeof *rel);
  sv = calloc(p ? p : 1, sizeof *sv);
  score = calloc(c->n_meas ? c->n_meas : 1, sizeof *score);
  err_len = calloc(c->n_meas ? c->n_meas : 1, sizeof *err_len);
  first_err = calloc(c->n_meas ? c->n_meas : 1, sizeof *first_err);
  first_score = calloc(c->n_meas ? c->n_meas : 1, sizeof *first_score);
  if (!res->params || !keep_struct || !keep || !order || !As || !Rf || !scales || !cov || !value || !rel || !sv ||
      !score || !err_len || !first_err || !first_score)
    goto nomem;
  for (j = 0; j < p; j++)
    res->params[j].param = *twf_errmodel_param(pr.em, j);
  n_order = walk_order(&pr, opt.priority, order);

  for (j = 0; j < p; j++)
    scales[j] = twf_errmodel_param_scale(pr.em, j);
  /* 3. structural redundancy on a rich synthetic pose set */
  {
    size_t n_syn = opt.synthetic_poses ? opt.synthetic_poses : (p < 40 ? 200 : 5 * p);
    if (synthetic_factor(&pr, n_syn, opt.seed, target_seen, with_orientation, Rf) != TWF_OK)
      goto nomem;
    if (twf_ident_walk_r(Rf, p, scales, order, n_order, opt.redundancy_tol, keep_struct, rel) != 0)
      goto nomem;
    twf_ident_normal_from_r(Rf, p, scales, As);
    for (j = 0; j < p; j++)
      res->structural_count += keep_struct[j];
    for (j = 0; j < p; j++)
      if (!keep_struct[j]) {
        res->params[j].status = TWF_PARAM_FIXED_STRUCTURAL;
        res->params[j].n_explain = twf_ident_explain(As, p, keep_struct, j, TWF_EXPLAIN_MAX,
                                                     res->params[j].explain,
                                                     res->params[j].explain_coef);
      }
  }
  /* 4. columns exactly dependent on the user's own poses: the factor over
   * the structurally kept columns only (the others are fixed already) */
  {
    size_t *cols = calloc(p ? p : 1, sizeof *cols), *order2 = calloc(p ? p : 1, sizeof *order2);
    size_t *pos_of = calloc(p ? p : 1, sizeof *pos_of);
    double *sc = calloc(p ? p : 1, sizeof *sc), *Ac = calloc(p ? p * p : 1, sizeof *Ac);
    unsigned char *keep_c = calloc(p ? p : 1, 1);
    size_t nc = 0, n2 = 0, a, b;
    int bad = cols == NULL || order2 == NULL || pos_of == NULL || sc == NULL || Ac == NULL ||
              keep_c == NULL;
    if (!bad) {
      for (j = 0; j < p; j++)
        if (keep_struct[j]) {
          pos_of[j] = nc;
          sc[nc] = scales[j];
          cols[nc++] = j;
        }
      for (i = 0; i < n_order; i++)
        if (keep_struct[order[i]])
          order2[n2++] = pos_of[order[i]];
      accumulate_r(&pr, cols, nc, Rf);
      bad = twf_ident_walk_r(Rf, nc, sc, order2, n2, opt.redundancy_tol, keep_c, Ac) != 0;
    }
    if (!bad) {
      memset(keep, 0, p);
      for (a = 0; a < nc; a++) {
        keep[cols[a]] = keep_c[a];
        rel[cols[a]] = Ac[a]; /* the walk's relative independent parts */
      }
      twf_ident_normal_from_r(Rf, nc, sc, Ac);
      memset(As, 0, p * p * sizeof *As);
      for (a = 0; a < nc; a++)
        for (b = 0; b < nc; b++)
          As[cols[a] * p + cols[b]] = Ac[a * nc + b];
    }
    free(cols); free(order2); free(pos_of); free(sc); free(Ac); free(keep_c);
    if (bad)
      goto nomem;
  }
  for (j = 0; j < p; j++)
    if (keep_struct[j] && !keep[j]) {
      res->params[j].status = TWF_PARAM_FIXED_DATA;
      res->params[j].n_explain = twf_ident_explain(As, p, keep, j, TWF_EXPLAIN_MAX,
                                                   res->params[j].explain,
                                                   res->params[j].explain_coef);
    }
  for (j = 0; j < p; j++) {
    if (res->params[j].status == TWF_PARAM_FIXED_STRUCTURAL)
      res->n_fixed_structural++;
    else if (res->params[j].status == TWF_PARAM_FIXED_DATA)
      res->n_fixed_data++;
  }

  /* enough coordinates beyond the parameters to check the fit (and, with
   * no sigma given, to estimate it) */
  {
    size_t rows0 = 0, nk0 = 0, need;
    int sigma_known = opt.sigma_length > 0 || sigma_from_rows;
    for (i = 0; i < c->n_meas; i++)
      if (use[i])
        rows0 += c->meas[i].has_orientation ? 6 : 3;
    for (j = 0; j < p; j++)
      nk0 += keep[j];
    need = nk0 + (sigma_known ? 3 : (nk0 / 5 > 10 ? nk0 / 5 : 10));
    if (rows0 < need) {
      size_t per_pose = res->n_fit_poses ? (rows0 + res->n_fit_poses - 1) / res->n_fit_poses : 3;
      st = twf_error_set(err, TWF_ERR_DEGENERATE, NULL, 0, 0,
                         sigma_known ? "measure more poses, or fit fewer groups (--fit)"
                                     : "measure more poses, fit fewer groups (--fit), or give the noise (--sigma)",
                         "the fit set has %zu coordinates for %zu parameters: at least %zu are needed "
                         "to check the fit%s (about %zu more poses)",
                         rows0, nk0, need, sigma_known ? "" : " and estimate the noise",
                         (need - rows0 + per_pose - 1) / (per_pose ? per_pose : 1));
      goto fail;
    }
  }

  /* 5. fit, then the outlier screen and refits */
  st = lm_run(&pr, keep, opt.max_iterations, opt.step_tol_m, value, &res->solve, err);
  if (st != TWF_OK)
    goto fail;
  if (opt.robust != TWF_ROBUST_OFF) {
    size_t changed;
    /* iterate screen and refit until the weights settle (a dropped set
     * that no longer changes, or reweighting that moves no weight by more
     * than 1e-3); the model reported is always the fit with the final
     * weights */
    if (robust_screen(&pr, opt.robust, opt.robust_threshold, first_score, first_err, &changed) != TWF_OK)
      goto nomem;
    memcpy(score, first_score, c->n_meas * sizeof *score);
    while (changed > 0) {
      res->robust_rounds++;
      st = lm_run(&pr, keep, opt.max_iterations, opt.step_tol_m, value, &res->solve, err);
      if (st != TWF_OK)
        goto fail;
      if (res->robust_rounds >= 10)
        break;
      if (robust_screen(&pr, opt.robust, opt.robust_threshold, score, err_len, &changed) != TWF_OK)
        goto nomem;
      if (changed > 0 && res->robust_rounds >= 9) {
        /* last refit with these weights */
        res->robust_rounds++;
        st = lm_run(&pr, keep, opt.max_iterations, opt.step_tol_m, value, &res->solve, err);
        if (st != TWF_OK)
          goto fail;
        break;
      }
    }
    /* listed: dropped or down-weighted beyond the threshold (a Cauchy weight
     * is below 1 for every residual, so only scores past the threshold count) */
    for (i = 0; i < c->n_meas; i++)
      if (use[i] && (opt.robust == TWF_ROBUST_CAUCHY ? score[i] > opt.robust_threshold : pr.weight[i] < 1.0))
        res->n_outliers++;
    res->outliers = calloc(res->n_outliers ? res->n_outliers : 1, sizeof *res->outliers);
    if (res->outliers == NULL)
      goto nomem;
    for (i = 0, j = 0; i < c->n_meas; i++)
      if (use[i] && (opt.robust == TWF_ROBUST_CAUCHY ? score[i] > opt.robust_threshold : pr.weight[i] < 1.0)) {
        res->outliers[j].meas = i;
        res->outliers[j].error_m = first_err[i];
        res->outliers[j].score = first_score[i];
        res->outliers[j].weight = pr.weight[i];
        j++;
      }
  }

  /* 6. covariance, conditioning, correlations, weak parameters: the normal
   * matrix of the kept columns, spread into the full p x p layout */
  {
    size_t nkc = 0, a, b;
    for (j = 0; j < p; j++)
      if (keep[j])
        order[nkc++] = j; /* order is free again: reuse it as the column map */
    accumulate_cols(&pr, order, nkc, As, pr.g);
    memset(pr.A, 0, p * p * sizeof *pr.A);
    for (a = 0; a < nkc; a++)
      for (b = 0; b < nkc; b++)
        pr.A[order[a] * p + order[b]] = As[a * nkc + b];
  }
  for (i = 0; i < c->n_meas; i++)
    if (meas_active(&pr, i))
      n_rows += c->meas[i].has_orientation ? 6 : 3;
  for (j = 0, nk = 0; j < p; j++)
    nk += keep[j];
  res->n_kept = nk;
  {
    /* with no sigma given, the a-posteriori variance factor scales sigma */
    double factor = 1.0;
    res->sigma_source = opt.sigma_length > 0 ? TWF_SIGMA_GIVEN
                        : sigma_from_rows    ? TWF_SIGMA_FROM_ROWS
                                             : TWF_SIGMA_ESTIMATED;
    if (res->sigma_source == TWF_SIGMA_ESTIMATED && n_rows > nk)
      factor = 2.0 * res->solve.cost_end / (double)(n_rows - nk);
    res->sigma_length = sigma_len * sqrt(factor);
    if (twf_ident_inverse(pr.A, p, keep, cov) != 0) {
      st = twf_error_set(err, TWF_ERR_SINGULAR, NULL, 0, 0,
                         "fix more parameters (--fit) or measure more varied poses",
                         "the normal matrix of the kept parameters is singular at the solution");
      goto fail;
    }
    for (j = 0; j < p * p; j++)
      cov[j] *= factor;
  }
  warn_fixed_on_data(start, res, warnings);
  sigma_ref = res->sigma_length;
  for (j = 0; j < p; j++) {
    twf_param_result *pj = &res->params[j];
    pj->value = value[j];
    pj->std = keep[j] ? sqrt(cov[j * p + j]) : NAN;
    sv[j] = 0.0; /* reused below: the weak parameters' std over sigma */
    if (!keep[j]) {
      pj->value = 0.0;
      continue;
    }
    {
      double scaled = pj->std * twf_errmodel_param_scale(pr.em, j);
      if (scaled > opt.weak_ratio * sigma_ref || rel[j] < 1e-3) {
        pj->weak = 1;
        res->n_weak++;
        sv[j] = scaled / sigma_ref;
      }
    }
  }
  warn_weak(&pr, res, sv, warnings);
  /* strongest correlations above 0.9 */
  for (i = 0; i < p; i++)
    for (j = i + 1; j < p; j++) {
      double rho, ar;
      size_t k, pos;
      if (!keep[i] || !keep[j])
        continue;
      rho = cov[i * p + j] / sqrt(cov[i * p + i] * cov[j * p + j]);
      ar = fabs(rho);
      if (!(ar > 0.9))
        continue;
      pos = res->n_correlations;
      while (pos > 0 && fabs(res->correlations[pos - 1].rho) < ar)
        pos--;
      if (pos >= TWF_CORRELATIONS_MAX)
        continue;
      if (res->n_correlations < TWF_CORRELATIONS_MAX)
        res->n_correlations++;
      for (k = res->n_correlations - 1; k > pos; k--)
        res->correlations[k] = res->correlations[k - 1];
      res->correlations[pos].a = i;
      res->correlations[pos].b = j;
      res->correlations[pos].rho = rho;
    }
  /* conditioning of the scaled, weighted Jacobian (Sun and Hollerbach 2008) */
  scale_normal(&pr, pr.A, As);
  {
    size_t ns = twf_ident_singular_values(As, p, keep, sv);
    if (ns > 0 && sv[ns - 1] > 0) {
      double logsum = 0.0;
      for (j = 0; j < ns; j++)
        logsum += log(sv[j]);
      res->condition_number = sv[0] / sv[ns - 1];
      res->observability[0] = exp(logsum / (double)ns) / sqrt((double)(n_rows ? n_rows : 1));
      res->observability[1] = sv[ns - 1] / sv[0];
      res->observability[2] = sv[ns - 1];
      res->observability[3] = sv[ns - 1] * sv[ns - 1] / sv[0];
    } else {
      res->condition_number = INFINITY;
    }
  }

  /* 7. outputs */
  all_residuals(pr.m, &pr.base, c, res->residual_after, res->rot_after);
  res->base_in_tracker = pr.base;
  res->asbuilt = twf_model_copy(pr.m);
  res->registered = reg;
  reg = NULL;
  res->target_in_fit = target_seen;
  target_seen = NULL;
  if (res->asbuilt == NULL)
    goto nomem;
  st = twf_asbuilt_align(start, res->asbuilt, &res->base_in_tracker, with_orientation,
                         &res->comparison, err);
  if (st != TWF_OK)
    goto fail;
  /* what the data cannot tell about the flange at logged zero */
  if (!with_orientation)
    res->comparison.home_angle_rad = NAN;
  if (opt.groups & TWF_GROUP_BIT(TWF_GROUP_TARGETS))
    res->comparison.home_distance_m = NAN;
  /* plausibility: far beyond any calibration, the data and the model do
   * not describe the same arm (joint order, signs, units, another model) */
  if (!opt.accept_large) {
    double worst_tilt = 0.0, worst_shift = 0.0;
    size_t wt = 0, ws = 0;
    for (j = 0; j < start->n_joints; j++) {
      if (res->comparison.joints[j].angle_rad > worst_tilt) {
        worst_tilt = res->comparison.joints[j].angle_rad;
        wt = j;
      }
      if (res->comparison.joints[j].distance_m > worst_shift) {
        worst_shift = res->comparison.joints[j].distance_m;
        ws = j;
      }
    }
    if (res->sigma_source == TWF_SIGMA_ESTIMATED && res->sigma_length > 1e-3) {
      st = twf_error_set(err, TWF_ERR_DEGENERATE, NULL, 0, 0,
                         "check the joint order and signs, the units and that the model is this arm's; "
                         "pass --accept-large if the arm really is that far from its model",
                         "the fit leaves %.3g mm of noise per coordinate, far beyond a measuring instrument's",
                         res->sigma_length * 1e3);
      goto fail;
    }
    if (worst_tilt > 5.0 * TWF_PI / 180.0 || worst_shift > 0.05) {
      st = twf_error_set(err, TWF_ERR_DEGENERATE, NULL, 0, 0,
                         "check the joint order and signs, the units and that the model is this arm's; "
                         "pass --accept-large if the arm really is that far from its model",
                         "the as-built line of joint %s is %.3g deg and of joint %s %.3g mm from the model's: "
                         "beyond any calibration",
                         start->joints[wt].name, worst_tilt * 180.0 / TWF_PI, start->joints[ws].name,
                         worst_shift * 1e3);
      goto fail;
    }
  }
  if (!isfinite(res->condition_number)) {
    st = twf_error_set(err, TWF_ERR_SINGULAR, NULL, 0, 0,
                       "fix more parameters (--fit) or measure more varied poses",
                       "the kept parameters are not independent on these poses (condition number infinite)");
    goto fail;
  }
  /* a calibrated model that predicts the held-out poses worse than the
   * starting one has learnt the noise, not the arm */
  {
    double b2 = 0.0, a2 = 0.0;
    size_t nc = 0;
    for (i = 0; i < c->n_meas; i++)
      if (res->meas_set[i] == TWF_SET_CHECK) {
        int k;
        for (k = 0; k < 3; k++) {
          b2 += res->residual_before[3 * i + k] * res->residual_before[3 * i + k];
          a2 += res->residual_after[3 * i + k] * res->residual_after[3 * i + k];
        }
        nc++;
      }
    if (nc > 0 && a2 > b2)
      twf_warnings_add(warnings, NULL, 0, 0,
                       "the calibrated model predicts the check set worse than the starting model "
                       "(RMS %.4g against %.4g %s): do not use it; measure more, and more varied, poses",
                       sqrt(a2 / (double)nc) / twf_length_unit_si(start->length_unit),
                       sqrt(b2 / (double)nc) / twf_length_unit_si(start->length_unit),
                       twf_length_unit_name(start->length_unit));
  }
  if (!res->comparison.settled)
    twf_warnings_add(warnings, NULL, 0, 0,
                     "the datum of the as-built report did not settle: the joint lines leave the base "
                     "frame partly free (give the targets offsets in the starting model); the model "
                     "and its predictions are not affected");
  *out = res;
  res = NULL;
  st = TWF_OK;
  goto cleanup;

nomem:
  st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
fail:
  twf_calib_result_free(res);
  res = NULL;
cleanup:
  twf_model_free(reg);
  problem_free(&pr);
  free(use); free(keep_struct); free(keep); free(target_seen); free(fit_target);
  free(pose_held); free(offsets); free(As); free(Rf); free(scales); free(cov); free(value); free(rel); free(sv);
  free(score); free(err_len); free(first_err); free(first_score); free(order);
  return st;
}
