/* lsq.c: the least-squares machinery (DEVELOPERS.md, "The maths").
 *
 * The normal matrix J^T W J and gradient J^T W r are accumulated pose by
 * pose (twf_errmodel_eval_pose once, then every target of that pose):
 * memory and time are linear in the number of measurements, the p x p
 * matrices are the only thing that grows with the parameter count. */
#include "lsq.h"
#include "ident.h"

#include <gsl/gsl_linalg.h>
#include <gsl/gsl_matrix.h>
#include <stdlib.h>
#include <time.h>

/* ------------------------------------------------------------ stop reasons */

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

/* ------------------------------------------------------------ the problem */

/* Copy the geometry of src into dst of the same shape (no metadata). */
void twf_lsq_model_assign(twf_model *dst, const twf_model *src)
{
  memcpy(dst->joints, src->joints, src->n_joints * sizeof *src->joints);
  memcpy(dst->targets, src->targets, src->n_targets * sizeof *src->targets);
  dst->home = src->home;
}

void twf_lsq_free(twf_lsq_problem *pr)
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

twf_status twf_lsq_init(twf_lsq_problem *pr, const twf_model *m, const twf_campaign *c,
                        unsigned groups, const unsigned char *use, double sigma_length,
                        double sigma_angle, twf_error *err)
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
    twf_lsq_free(pr);
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
  twf_lsq_free(pr);
  return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
}

int twf_lsq_active(const twf_lsq_problem *pr, size_t i)
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
typedef void (*row_visitor)(twf_lsq_problem *pr, void *ctx, const double *rows, const double r[3], double w);

static double visit_rows(twf_lsq_problem *pr, row_visitor visit, void *ctx)
{
  const twf_campaign *c = pr->c;
  size_t pose, t;
  double cost = 0.0;
  for (pose = 0; pose < c->n_poses; pose++) {
    int any = 0;
    for (t = pr->pose_start[pose]; t < pr->pose_start[pose + 1]; t++)
      any |= twf_lsq_active(pr, pr->pose_meas[t]);
    if (!any)
      continue;
    twf_errmodel_eval_pose(pr->em, pr->m, &pr->base, c->q + pose * pr->n_joints, NULL);
    for (t = pr->pose_start[pose]; t < pr->pose_start[pose + 1]; t++) {
      size_t i = pr->pose_meas[t];
      const twf_measurement *ms = &c->meas[i];
      double y[3], r[3], w;
      int pass, k;
      if (!twf_lsq_active(pr, i))
        continue;
      for (pass = 0; pass < (ms->has_orientation ? 2 : 1); pass++) {
        if (pass == 0) {
          twf_errmodel_point(pr->em, pr->m, ms->target, y, pr->rows);
          for (k = 0; k < 3; k++)
            r[k] = ms->pos[k] - y[k];
          w = pr->weight[i] * pr->inv_sigma[i] * pr->inv_sigma[i];
        } else {
          double R[3][3];
          twf_quat_to_rot(ms->quat, R);
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
static void visit_normal(twf_lsq_problem *pr, void *vctx, const double *rows, const double r[3], double w)
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
static void visit_factor(twf_lsq_problem *pr, void *vctx, const double *rows, const double r[3], double w)
{
  col_ctx *x = vctx;
  size_t p = pr->p, a;
  double sw = sqrt(w), *row = pr->rows + 3 * p;
  int k;
  (void)r;
  for (k = 0; k < 3; k++) {
    for (a = 0; a < x->nc; a++)
      row[a] = sw * rows[(size_t)k * p + (x->cols ? x->cols[a] : a)];
    twf_ident_qr_add_row(x->M, x->nc, row);
  }
}

/* The normal matrix A = J^T W J (nc x nc) and gradient g = J^T W r (nc)
 * over the columns cols[0..nc) (NULL: all p), and the cost. Restricting to
 * the kept columns in the solver saves the rank-3 updates of the fixed
 * ones, which dominate the cost of an iteration. */
double twf_lsq_normal(twf_lsq_problem *pr, const size_t *cols, size_t nc, double *A, double *g)
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
void twf_lsq_factor(twf_lsq_problem *pr, const size_t *cols, size_t nc, double *R)
{
  col_ctx x;
  x.cols = cols;
  x.nc = nc;
  x.M = R;
  x.g = NULL;
  memset(R, 0, nc * nc * sizeof *R);
  visit_rows(pr, visit_factor, &x);
}

/* The cost only (no Jacobian), at model m and base B: the same rows, the
 * same order and the same residuals (twf_meas_residual) as visit_rows, so
 * that a trial's cost compares exactly with the linearisation's. */
static double cost_at(const twf_lsq_problem *pr, const twf_model *m, const twf_pose *B,
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
      double r[3], v[3], w;
      if (!twf_lsq_active(pr, i))
        continue;
      if (!done) {
        twf_model_fk(m, c->q + pose * pr->n_joints, prefix_ws, &F);
        twf_pose_mul(B, &F, &T);
        done = 1;
      }
      w = pr->weight[i] * pr->inv_sigma[i] * pr->inv_sigma[i];
      if (twf_meas_residual(&T, m->targets[ms->target].offset, ms, r, v)) {
        cost += 0.5 * w * (r[0] * r[0] + r[1] * r[1] + r[2] * r[2]);
        w = pr->weight[i] * pr->inv_sigma_rot * pr->inv_sigma_rot;
        cost += 0.5 * w * twf_v3_dot(v, v);
      } else {
        cost += 0.5 * w * (r[0] * r[0] + r[1] * r[1] + r[2] * r[2]);
      }
    }
  }
  return cost;
}

twf_status twf_lsq_residuals(const twf_model *m, const twf_pose *B, const twf_campaign *c,
                             double *pos, double *rot, twf_error *err)
{
  /* the model's offsets given explicitly: a target still being fitted
   * (offset_known 0) has a current value too */
  double *t = malloc(3 * (m->n_targets ? m->n_targets : 1) * sizeof *t);
  size_t k;
  twf_status st;
  if (t == NULL)
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
  for (k = 0; k < m->n_targets; k++)
    twf_v3_copy(m->targets[k].offset, t + 3 * k);
  st = twf_accuracy_residuals(m, B, t, c, pos, rot, err);
  free(t);
  return st;
}

/* ------------------------------------------------------------ the solver */

/* The solver's state between iterations over the nk kept columns idx. */
typedef struct lm_state {
  twf_lsq_problem *pr;
  const twf_lsq_run *run;
  size_t nk, *idx;
  double *delta;       /* p: the trial step, zero outside the kept columns */
  twf_pose *prefix;    /* n_joints + 1: workspace of cost_at */
  gsl_matrix *M;
  gsl_vector *rhs, *x;
  double cost, lambda, nu;
  twf_pose trial_base;
} lm_state;

/* Converged when every column is orthogonal to the weighted residual
 * (cosine below 1e-12): the gradient test, scale free. */
static int lm_gradient_vanished(const lm_state *s)
{
  const twf_lsq_problem *pr = s->pr;
  double grad_max = 0.0;
  size_t a, nk = s->nk;
  for (a = 0; a < nk; a++) {
    double ajj = pr->A[a * nk + a];
    double cosine = ajj > 0 && s->cost > 0 ? fabs(pr->g[a]) / sqrt(ajj * 2.0 * s->cost) : 0.0;
    if (cosine > grad_max)
      grad_max = cosine;
  }
  return grad_max < 1e-12;
}

/* Solve (A + lambda diag A) x = g by Cholesky (Marquardt's scaling);
 * nonzero when the damped system is not positive definite. */
static int lm_solve_damped(lm_state *s)
{
  const twf_lsq_problem *pr = s->pr;
  size_t a, b, nk = s->nk;
  for (a = 0; a < nk; a++) {
    for (b = 0; b < nk; b++)
      gsl_matrix_set(s->M, a, b, pr->A[a * nk + b]);
    *gsl_matrix_ptr(s->M, a, a) *= 1.0 + s->lambda;
    gsl_vector_set(s->rhs, a, pr->g[a]);
  }
  return gsl_linalg_cholesky_decomp1(s->M) != 0 || gsl_linalg_cholesky_solve(s->M, s->rhs, s->x) != 0;
}

/* Fold the solved step into the trial model; returns the trial cost, with
 * the largest scaled step and the predicted decrease. */
static double lm_trial(lm_state *s, double *step_max, double *pred)
{
  twf_lsq_problem *pr = s->pr;
  size_t a;
  *step_max = 0.0;
  *pred = 0.0;
  memset(s->delta, 0, pr->p * sizeof *s->delta);
  for (a = 0; a < s->nk; a++) {
    double d = gsl_vector_get(s->x, a);
    double sc = fabs(d) * twf_errmodel_param_scale(pr->em, s->idx[a]);
    s->delta[s->idx[a]] = d;
    if (sc > *step_max)
      *step_max = sc;
    *pred += d * (s->lambda * pr->A[a * s->nk + a] * d + pr->g[a]);
  }
  *pred *= 0.5;
  twf_lsq_model_assign(pr->trial, pr->m);
  s->trial_base = pr->base;
  twf_errmodel_fold(pr->em, s->delta, pr->trial, &s->trial_base);
  return cost_at(pr, pr->trial, &s->trial_base, s->prefix);
}

static void lm_record(const lm_state *s, int iteration, double cost, int accepted)
{
  twf_solver_step st;
  if (s->run->trace == NULL)
    return;
  st.fit = s->run->name;
  st.round = s->run->round;
  st.iteration = iteration;
  st.cost = cost;
  st.damping = s->lambda;
  st.accepted = accepted;
  twf_trace_step(s->run->trace, &st);
}

/* The loop (Nielsen 1999 for the damping): returns TWF_OK with rep->stop
 * set, or an error. */
static twf_status lm_iterate(lm_state *s, double *value, twf_solve_report *rep, twf_error *err)
{
  twf_lsq_problem *pr = s->pr;
  size_t a;
  while (rep->iterations < s->run->max_iterations) {
    double step_max, pred, cost_new, rho;
    if (lm_gradient_vanished(s)) {
      rep->stop = TWF_STOP_GRADIENT;
      return TWF_OK;
    }
    rep->iterations++;
    if (lm_solve_damped(s)) {
      lm_record(s, rep->iterations, NAN, 0);
      s->lambda *= s->nu;
      s->nu *= 2.0;
      if (s->lambda > 1e16) {
        rep->stop = TWF_STOP_SINGULAR;
        return twf_error_set(err, TWF_ERR_SINGULAR, NULL, 0, 0, twf_advice_text(TWF_ADVICE_FIX_MORE),
                             "the damped normal equations are singular");
      }
      continue;
    }
    cost_new = lm_trial(s, &step_max, &pred);
    rho = pred > 0 ? (s->cost - cost_new) / pred : -1.0;
    if (isfinite(cost_new) && cost_new < s->cost) {
      double decrease = s->cost - cost_new;
      twf_model *tmp = pr->m;
      lm_record(s, rep->iterations, cost_new, 1);
      pr->m = pr->trial;
      pr->trial = tmp;
      pr->base = s->trial_base;
      for (a = 0; a < pr->p; a++)
        value[a] += s->delta[a];
      s->cost = twf_lsq_normal(pr, s->idx, s->nk, pr->A, pr->g);
      rep->cost_end = s->cost;
      s->lambda *= fmax(1.0 / 3.0, 1.0 - pow(2.0 * rho - 1.0, 3));
      s->nu = 2.0;
      if (step_max < s->run->step_tol_m) {
        rep->stop = TWF_STOP_STEP;
        return TWF_OK;
      }
      /* a decrease at the level of rounding in the cost: nothing left */
      if (decrease <= 1e-13 * (s->cost + decrease)) {
        rep->stop = TWF_STOP_COST;
        return TWF_OK;
      }
    } else {
      lm_record(s, rep->iterations, cost_new, 0);
      twf_errmodel_update(pr->em, pr->m);
      if (!isfinite(cost_new) && s->lambda > 1e12) {
        rep->stop = TWF_STOP_DIVERGED;
        return twf_error_set(err, TWF_ERR_DIVERGED, NULL, 0, 0, "check units and the starting model",
                             "the solver diverged (non-finite cost)");
      }
      if (step_max < s->run->step_tol_m || s->nu > 1e12 || pred <= 1e-13 * s->cost) {
        /* no smaller step lowers the cost: the cost is at its rounding floor */
        rep->stop = TWF_STOP_COST;
        return TWF_OK;
      }
      s->lambda *= s->nu;
      s->nu *= 2.0;
    }
  }
  rep->stop = TWF_STOP_MAXITER;
  return twf_error_set(err, TWF_ERR_DIVERGED, NULL, 0, 0,
                       "raise the iteration limit or check the data for gross errors",
                       "the solver did not converge in %d iterations", s->run->max_iterations);
}

/* Levenberg-Marquardt over the kept columns with Marquardt's diagonal
 * scaling and Nielsen's (1999) damping update; every accepted step is
 * folded into the working model (a retraction), so the next linearisation
 * is exact. */
twf_status twf_lsq_solve(twf_lsq_problem *pr, const unsigned char *keep, const twf_lsq_run *run,
                         double *value, twf_solve_report *rep, twf_error *err)
{
  size_t p = pr->p, a;
  lm_state s;
  twf_status st = TWF_OK;

  memset(&s, 0, sizeof s);
  memset(rep, 0, sizeof *rep);
  s.pr = pr;
  s.run = run;
  s.idx = calloc(p ? p : 1, sizeof *s.idx);
  s.delta = calloc(p ? p : 1, sizeof *s.delta);
  s.prefix = calloc(pr->n_joints + 1, sizeof *s.prefix);
  /* start close to Gauss-Newton: with Marquardt's diagonal scaling a
   * damping of 1e-3 held back the weak directions (the normal matrix's
   * condition number is the square of the Jacobian's) and the fit crept on
   * linearly; a rejected step raises the damping quickly (Nielsen) */
  s.lambda = 1e-9;
  s.nu = 2.0;
  if (s.idx == NULL || s.delta == NULL || s.prefix == NULL)
    goto nomem;
  for (a = 0; a < p; a++)
    if (keep[a])
      s.idx[s.nk++] = a;
  s.cost = twf_lsq_normal(pr, s.idx, s.nk, pr->A, pr->g);
  rep->cost_start = rep->cost_end = s.cost;
  if (!isfinite(s.cost)) {
    rep->stop = TWF_STOP_DIVERGED;
    st = twf_error_set(err, TWF_ERR_DIVERGED, NULL, 0, 0,
                       "check the inputs for values far out of range",
                       "the starting cost is not finite");
    goto done;
  }
  if (s.nk == 0) {
    rep->stop = TWF_STOP_STEP;
    goto done;
  }
  s.M = gsl_matrix_alloc(s.nk, s.nk);
  s.rhs = gsl_vector_alloc(s.nk);
  s.x = gsl_vector_alloc(s.nk);
  if (s.M == NULL || s.rhs == NULL || s.x == NULL)
    goto nomem;
  st = lm_iterate(&s, value, rep, err);
  goto done;
nomem:
  st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
done:
  if (s.M) gsl_matrix_free(s.M);
  if (s.rhs) gsl_vector_free(s.rhs);
  if (s.x) gsl_vector_free(s.x);
  free(s.idx);
  free(s.delta);
  free(s.prefix);
  return st;
}

/* Scale A into length units: A_s = D A D. */
void twf_lsq_scale_normal(const twf_lsq_problem *pr, const double *A, double *As)
{
  size_t p = pr->p, a, b;
  for (a = 0; a < p; a++)
    for (b = 0; b < p; b++)
      As[a * p + b] = A[a * p + b] * twf_errmodel_param_scale(pr->em, a) *
                      twf_errmodel_param_scale(pr->em, b);
}


/* ------------------------------------------------------------ trace */

double twf_trace_now(void)
{
  struct timespec ts;
  if (clock_gettime(CLOCK_MONOTONIC, &ts) != 0)
    return 0.0;
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

void twf_trace_init(twf_trace *t)
{
  if (t != NULL)
    memset(t, 0, sizeof *t);
}

void twf_trace_clear(twf_trace *t)
{
  if (t == NULL)
    return;
  free(t->steps);
  memset(t, 0, sizeof *t);
}

void twf_trace_stage(twf_trace *t, const char *name, double t0)
{
  double dt;
  if (t == NULL || t->n_stages >= TWF_TRACE_STAGES_MAX)
    return;
  dt = twf_trace_now() - t0;
  t->stages[t->n_stages].name = name;
  t->stages[t->n_stages].seconds = dt > 0.0 ? dt : 0.0;
  t->n_stages++;
}

void twf_trace_step(twf_trace *t, const twf_solver_step *s)
{
  if (t == NULL)
    return;
  if (t->n_steps == t->capacity) {
    size_t cap = t->capacity ? 2 * t->capacity : 64;
    twf_solver_step *grown = realloc(t->steps, cap * sizeof *grown);
    if (grown == NULL)
      return;
    t->steps = grown;
    t->capacity = cap;
  }
  t->steps[t->n_steps++] = *s;
}
