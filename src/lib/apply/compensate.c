/* compensate.c: inverse kinematics of a model by damped least squares
 * (Levenberg-Marquardt) and the compensation of joint programs: the joint
 * values with which the as-built arm reaches what the nominal model
 * promised for each row.
 *
 * Method: the damped least-squares step of Wampler (1986) and Nakamura and
 * Hanafusa (1986), dx = J^T (J J^T + lambda I)^-1 e, with Marquardt's
 * accept/reject control of lambda; for redundant tasks the null-space
 * projection of the pull toward the start (Liegeois 1977), so that the
 * spare freedom gives the least joint change. Joint and task coordinates
 * are scaled by a characteristic length so that the damping, the
 * null-space metric and the singularity measure are dimensionless. */
#include "internal.h"

#include <stdlib.h>

#define MAX_ROWS 6

struct twf_ik {
  size_t cap;
  twf_pose *prefix, *prefix_trial; /* cap + 1 each */
  double *J;                       /* 6 x cap spatial Jacobian (model.c layout) */
  double *Js;                      /* m x n scaled task Jacobian, row-major */
  double *x, *x0, *xt, *xprev, *g, *qt, *scale;
};

twf_ik_options twf_ik_default_options(void)
{
  twf_ik_options o;
  o.tol_position_m = 1e-10;
  o.tol_angle_rad = 1e-10;
  o.max_iter = 100;
  o.singular_threshold = 1e-2;
  o.length_scale_m = 0.0;
  o.limit_tolerance = 1e-9;
  o.payload = -1;
  return o;
}

twf_compensate_options twf_compensate_default_options(void)
{
  twf_compensate_options o;
  o.kind = TWF_IK_POSE;
  o.target = NULL;
  o.ik = twf_ik_default_options();
  return o;
}

void twf_ik_free(twf_ik *w)
{
  if (w == NULL)
    return;
  free(w->prefix);
  free(w->prefix_trial);
  free(w->J);
  free(w->Js);
  free(w->x);
  free(w);
}

twf_ik *twf_ik_alloc(size_t n_joints)
{
  twf_ik *w = calloc(1, sizeof *w);
  size_t n = n_joints ? n_joints : 1;
  if (w == NULL)
    return NULL;
  w->cap = n_joints;
  w->prefix = malloc((n + 1) * sizeof *w->prefix);
  w->prefix_trial = malloc((n + 1) * sizeof *w->prefix_trial);
  w->J = malloc(6 * n * sizeof *w->J);
  w->Js = malloc(6 * n * sizeof *w->Js);
  w->x = malloc(7 * n * sizeof *w->x); /* x, x0, xt, xprev, g, qt, scale */
  if (w->prefix == NULL || w->prefix_trial == NULL || w->J == NULL || w->Js == NULL || w->x == NULL) {
    twf_ik_free(w);
    return NULL;
  }
  w->x0 = w->x + n;
  w->xt = w->x + 2 * n;
  w->xprev = w->x + 3 * n;
  w->g = w->x + 4 * n;
  w->qt = w->x + 5 * n;
  w->scale = w->x + 6 * n;
  return w;
}

/* Cholesky solve of the symmetric positive definite m x m system A z = b
 * (A destroyed). Returns -1 when A is not positive definite. */
static int chol_solve(double A[MAX_ROWS][MAX_ROWS], int m, const double *b, double *z)
{
  int i, j, k;
  for (j = 0; j < m; j++) {
    double s = A[j][j];
    for (k = 0; k < j; k++)
      s -= A[j][k] * A[j][k];
    if (!(s > 0.0))
      return -1;
    A[j][j] = sqrt(s);
    for (i = j + 1; i < m; i++) {
      double t = A[i][j];
      for (k = 0; k < j; k++)
        t -= A[i][k] * A[j][k];
      A[i][j] = t / A[j][j];
    }
  }
  for (i = 0; i < m; i++) {
    double t = b[i];
    for (k = 0; k < i; k++)
      t -= A[i][k] * z[k];
    z[i] = t / A[i][i];
  }
  for (i = m - 1; i >= 0; i--) {
    double t = z[i];
    for (k = i + 1; k < m; k++)
      t -= A[k][i] * z[k];
    z[i] = t / A[i][i];
  }
  return 0;
}

/* (J J^T + lambda I) z = b, J m x n row-major. */
static int solve_jjt(const double *J, int m, size_t n, double lambda, const double *b, double *z)
{
  double A[MAX_ROWS][MAX_ROWS];
  int r, c;
  size_t i;
  for (r = 0; r < m; r++)
    for (c = 0; c <= r; c++) {
      double s = 0.0;
      for (i = 0; i < n; i++)
        s += J[(size_t)r * n + i] * J[(size_t)c * n + i];
      A[r][c] = A[c][r] = s;
    }
  for (r = 0; r < m; r++)
    A[r][r] += lambda;
  return chol_solve(A, m, b, z);
}

typedef struct eval {
  twf_pose T;      /* reached flange pose */
  double y[3];     /* reached point, base frame */
  double e[MAX_ROWS]; /* scaled task error */
  double pos_err;  /* metres */
  double ang_err;  /* radians */
  double cost;     /* |e|^2 */
} eval;

/* Forward kinematics at joint values q and the task error. */
static void evaluate(const twf_model *m, const twf_ik_goal *goal, double L, const double *q,
                     long payload, twf_pose *prefix, eval *ev)
{
  double Rt[3][3], w[3], d[3];
  int a, b, k, r = 0;
  twf_model_fk_load(m, q, payload, prefix, &ev->T);
  twf_pose_apply(&ev->T, goal->point, ev->y);
  for (a = 0; a < 3; a++)
    d[a] = goal->p[a] - ev->y[a];
  /* R_goal R^T */
  for (a = 0; a < 3; a++)
    for (b = 0; b < 3; b++) {
      double s = 0.0;
      for (k = 0; k < 3; k++)
        s += goal->R[a][k] * ev->T.R[b][k];
      Rt[a][b] = s;
    }
  twf_so3_log(Rt, w);
  ev->pos_err = twf_v3_norm(d);
  ev->ang_err = twf_v3_norm(w);
  if (goal->kind == TWF_IK_POSE)
    for (a = 0; a < 3; a++)
      ev->e[r++] = w[a];
  for (a = 0; a < 3; a++)
    ev->e[r++] = d[a] / L;
  ev->cost = 0.0;
  for (k = 0; k < r; k++)
    ev->cost += ev->e[k] * ev->e[k];
}

/* The scaled task Jacobian at the prefixes of the last accepted point. */
static void task_jacobian(twf_ik *w, const twf_model *m, const twf_ik_goal *goal, double L,
                          const double y[3], int rows)
{
  size_t n = m->n_joints, i;
  int a, r0 = 0;
  twf_model_jacobian_spatial(m, w->prefix, w->J);
  for (i = 0; i < n; i++) {
    double wi[3], vi[3], wxy[3];
    for (a = 0; a < 3; a++) {
      wi[a] = w->J[(size_t)a * n + i];
      vi[a] = w->J[(size_t)(3 + a) * n + i];
    }
    /* a point y moved by the spatial twist (w, v) moves by w x y + v */
    twf_v3_cross(wi, y, wxy);
    r0 = 0;
    if (goal->kind == TWF_IK_POSE) {
      for (a = 0; a < 3; a++)
        w->Js[(size_t)a * n + i] = wi[a] * w->scale[i];
      r0 = 3;
    }
    for (a = 0; a < 3; a++)
      w->Js[(size_t)(r0 + a) * n + i] = (vi[a] + wxy[a]) / L * w->scale[i];
  }
  (void)rows;
}

static int within(const eval *ev, const twf_ik_goal *goal, const twf_ik_options *o)
{
  return ev->pos_err <= o->tol_position_m &&
         (goal->kind == TWF_IK_POINT || ev->ang_err <= o->tol_angle_rad);
}

/* g = (I - J^T (J J^T + mu I)^-1 J) d, d = x - x0: the part of the change
 * from the start that the task does not see to first order. Returns its
 * largest component (0 when the task has as many conditions as joints). */
static double null_pull(twf_ik *w, size_t n, int rows)
{
  double Jd[MAX_ROWS], z[MAX_ROWS], big = 0.0;
  size_t i;
  int r;
  for (i = 0; i < n; i++)
    w->g[i] = 0.0;
  if ((size_t)rows >= n)
    return 0.0;
  for (r = 0; r < rows; r++) {
    double s = 0.0;
    for (i = 0; i < n; i++)
      s += w->Js[(size_t)r * n + i] * (w->x[i] - w->x0[i]);
    Jd[r] = s;
  }
  /* a fixed tiny damping keeps the projector defined at singularities */
  if (solve_jjt(w->Js, rows, n, 1e-14, Jd, z) != 0)
    return 0.0;
  for (i = 0; i < n; i++) {
    double s = w->x[i] - w->x0[i];
    for (r = 0; r < rows; r++)
      s -= w->Js[(size_t)r * n + i] * z[r];
    w->g[i] = s;
    if (fabs(s) > big)
      big = fabs(s);
  }
  return big;
}

typedef struct solve_ctx {
  twf_ik *w;
  const twf_model *m;
  const twf_ik_goal *goal;
  const twf_ik_options *o;
  double L;
  int rows;
  twf_ik_result *r;
} solve_ctx;

/* Evaluate at the scaled joint values w->x as the current point (the
 * Jacobian included). */
static void set_current(solve_ctx *c, eval *cur)
{
  size_t i, n = c->m->n_joints;
  for (i = 0; i < n; i++)
    c->w->qt[i] = c->w->x[i] * c->w->scale[i];
  evaluate(c->m, c->goal, c->L, c->w->qt, c->o->payload, c->w->prefix, cur);
  c->r->evaluations++;
  task_jacobian(c->w, c->m, c->goal, c->L, cur->y, c->rows);
}

/* Levenberg-Marquardt from the current point until the tolerances hold:
 * damped minimum-norm steps dx = J^T (J J^T + lambda I)^-1 e, a step
 * accepted when it lowers |e|, lambda divided by 10 on success and
 * multiplied by 10 on failure (Marquardt 1963), starting near
 * Gauss-Newton. Returns 1 when within the tolerances, 0 when the budget ran
 * out, no step lowers the error any more, or the error stalls: four
 * accepted steps in a row that did not halve it (a goal the arm cannot
 * reach, next to a singularity, where the steps only creep; measured on
 * tf6s such rows otherwise used the whole budget for nothing). */
static int lm_converge(solve_ctx *c, eval *cur)
{
  twf_ik *w = c->w;
  size_t n = c->m->n_joints, i;
  double lambda = 1e-9, z[MAX_ROWS], past[4];
  unsigned accepted = 0;
  eval trial;
  while (!within(cur, c->goal, c->o)) {
    int k;
    if (c->r->evaluations >= c->o->max_iter)
      return 0;
    if (solve_jjt(w->Js, c->rows, n, lambda, cur->e, z) == 0) {
      for (i = 0; i < n; i++) {
        double s = 0.0;
        for (k = 0; k < c->rows; k++)
          s += w->Js[(size_t)k * n + i] * z[k];
        w->xt[i] = w->x[i] + s;
        w->qt[i] = w->xt[i] * w->scale[i];
      }
      evaluate(c->m, c->goal, c->L, w->qt, c->o->payload, w->prefix_trial, &trial);
      c->r->evaluations++;
      if (trial.cost < cur->cost) {
        twf_pose *tmp = w->prefix;
        w->prefix = w->prefix_trial;
        w->prefix_trial = tmp;
        memcpy(w->x, w->xt, n * sizeof *w->x);
        *cur = trial;
        task_jacobian(w, c->m, c->goal, c->L, cur->y, c->rows);
        c->r->iterations++;
        lambda = lambda * 0.1 > 1e-15 ? lambda * 0.1 : 1e-15;
        if (accepted >= 4 && cur->cost > 0.25 * past[accepted % 4])
          return 0; /* |e| did not halve over four steps */
        past[accepted++ % 4] = cur->cost;
        continue;
      }
    }
    lambda = lambda < 1e-12 ? 1e-12 : lambda * 10.0;
    if (lambda > 1e12)
      return 0;
  }
  return 1;
}

static double dist2_start(const twf_ik *w, const double *x, size_t n)
{
  double s = 0.0;
  size_t i;
  for (i = 0; i < n; i++)
    s += (x[i] - w->x0[i]) * (x[i] - w->x0[i]);
  return s;
}

/* For a redundant task, once on the solution set: the least change from
 * the start. Each round steps along -g (the projection of the change onto
 * the null space of J, the first-order direction of decrease of |x - x0|
 * that keeps the task; Liegeois 1977), then returns to the solution set
 * with lm_converge; the round is kept when the change decreased, else the
 * step is halved. Stops when |g| falls below tol_angle_rad, the budget
 * runs out or the step no longer helps; the result is always a point within
 * the tolerances. */
static void least_change(solve_ctx *c, eval *cur)
{
  twf_ik *w = c->w;
  size_t n = c->m->n_joints, i;
  while (null_pull(w, n, c->rows) > c->o->tol_angle_rad) {
    double step = 1.0, before = dist2_start(w, w->x, n);
    int kept = 0;
    memcpy(w->xprev, w->x, n * sizeof *w->x);
    while (step >= 1.0 / 64 && c->r->evaluations + 2 <= c->o->max_iter) {
      for (i = 0; i < n; i++)
        w->x[i] = w->xprev[i] - step * w->g[i];
      set_current(c, cur);
      if (lm_converge(c, cur) && dist2_start(w, w->x, n) < before) {
        kept = 1;
        break;
      }
      step *= 0.5;
      /* g is overwritten by nothing here: lm_converge leaves it alone */
    }
    if (!kept) {
      memcpy(w->x, w->xprev, n * sizeof *w->x);
      set_current(c, cur);
      return;
    }
  }
}

/* Smallest singular value of the m x n scaled Jacobian (m <= n): the
 * square root of the smallest eigenvalue of J J^T, by the cyclic Jacobi
 * method (Golub and Van Loan, 8.5) on that m x m matrix, m <= 6. Its
 * absolute error is about 1e-16 of the largest eigenvalue, so values near
 * the thresholds (1e-3 and up) are exact to many digits; a GSL SVD per row
 * cost more than the whole solve. */
static double sigma_min(const twf_ik *w, size_t n, int m)
{
  double A[MAX_ROWS][MAX_ROWS], lo;
  int r, c, p, q, sweep;
  size_t i;
  for (r = 0; r < m; r++)
    for (c = 0; c <= r; c++) {
      double s = 0.0;
      for (i = 0; i < n; i++)
        s += w->Js[(size_t)r * n + i] * w->Js[(size_t)c * n + i];
      A[r][c] = A[c][r] = s;
    }
  for (sweep = 0; sweep < 50; sweep++) {
    double off = 0.0, diag = 0.0;
    for (p = 0; p < m; p++) {
      diag += A[p][p] * A[p][p];
      for (q = p + 1; q < m; q++)
        off += A[p][q] * A[p][q];
    }
    if (off <= 1e-36 * diag || off == 0.0)
      break;
    for (p = 0; p < m; p++)
      for (q = p + 1; q < m; q++) {
        double theta, t, cs, sn;
        int k;
        if (A[p][q] == 0.0)
          continue;
        theta = (A[q][q] - A[p][p]) / (2.0 * A[p][q]);
        t = (theta >= 0 ? 1.0 : -1.0) / (fabs(theta) + sqrt(theta * theta + 1.0));
        cs = 1.0 / sqrt(t * t + 1.0);
        sn = t * cs;
        for (k = 0; k < m; k++) {
          double akp = A[k][p], akq = A[k][q];
          A[k][p] = cs * akp - sn * akq;
          A[k][q] = sn * akp + cs * akq;
        }
        for (k = 0; k < m; k++) {
          double apk = A[p][k], aqk = A[q][k];
          A[p][k] = cs * apk - sn * aqk;
          A[q][k] = sn * apk + cs * aqk;
        }
      }
  }
  lo = A[0][0];
  for (p = 1; p < m; p++)
    if (A[p][p] < lo)
      lo = A[p][p];
  return lo > 0.0 ? sqrt(lo) : 0.0;
}

twf_status twf_ik_solve(twf_ik *w, const twf_model *model, const twf_ik_goal *goal,
                        const double *q_start, const twf_ik_options *opt, double *q_out,
                        twf_ik_result *res, twf_error *err)
{
  twf_ik_options o = opt != NULL ? *opt : twf_ik_default_options();
  twf_ik_result r;
  size_t n, i;
  int rows, a, b, converged = 0;
  double L, best = 0.0;
  eval cur;
  solve_ctx ctx;

  if (w == NULL || model == NULL || goal == NULL || q_start == NULL || q_out == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "twf_ik_solve: NULL argument");
  n = model->n_joints;
  if (n > w->cap)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "twf_ik_solve: the workspace holds %zu joints, the model has %zu", w->cap, n);
  rows = goal->kind == TWF_IK_POSE ? 6 : 3;
  if ((size_t)rows > n)
    return twf_error_set(err, TWF_ERR_DEGENERATE, NULL, 0, 0,
                         rows == 6 ? "match the position of one point instead of the whole pose" : NULL,
                         "the goal has %d conditions and the arm only %zu joints", rows, n);
  for (a = 0; a < 3; a++) {
    int bad = !isfinite(goal->p[a]) || !isfinite(goal->point[a]);
    for (b = 0; b < 3; b++)
      bad |= !isfinite(goal->R[a][b]);
    if (bad)
      return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0, NULL, "the goal holds a non-finite value");
  }
  for (i = 0; i < n; i++)
    if (!isfinite(q_start[i]))
      return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0, NULL,
                           "the start value of joint %s is not finite", model->joints[i].name);

  L = o.length_scale_m > 0.0 ? o.length_scale_m : twf_model_reach(model);
  memset(&r, 0, sizeof r);
  r.max_change_joint = -1;
  r.outside_joint = -1;
  for (i = 0; i < n; i++) {
    w->scale[i] = model->joints[i].type == TWF_JOINT_PRISMATIC ? L : 1.0;
    w->x0[i] = w->x[i] = q_start[i] / w->scale[i];
    w->qt[i] = q_start[i];
  }
  ctx.w = w;
  ctx.m = model;
  ctx.goal = goal;
  ctx.o = &o;
  ctx.L = L;
  ctx.rows = rows;
  ctx.r = &r;
  set_current(&ctx, &cur);
  converged = lm_converge(&ctx, &cur);
  if (converged && (size_t)rows < n)
    least_change(&ctx, &cur);

  for (i = 0; i < n; i++) {
    const twf_joint *jt = &model->joints[i];
    double q = w->x[i] * w->scale[i], dq = fabs(q - q_start[i]), scaled = fabs(w->x[i] - w->x0[i]);
    q_out[i] = q; /* q_out may alias q_start: q_start[i] is not read again */
    if (jt->type == TWF_JOINT_PRISMATIC) {
      if (dq > r.max_change_m)
        r.max_change_m = dq;
    } else if (dq > r.max_change_rad) {
      r.max_change_rad = dq;
    }
    if (scaled > best) {
      best = scaled;
      r.max_change_joint = (long)i;
    }
    if (jt->has_limits && r.outside_joint < 0 &&
        (q < jt->limit_lo - o.limit_tolerance || q > jt->limit_hi + o.limit_tolerance))
      r.outside_joint = (long)i;
  }
  r.position_error_m = cur.pos_err;
  r.angle_error_rad = cur.ang_err;
  r.sigma_min = sigma_min(w, n, rows);
  if (!converged)
    r.flags |= TWF_IK_NOT_CONVERGED;
  if (!(r.sigma_min >= o.singular_threshold))
    r.flags |= TWF_IK_NEAR_SINGULAR;
  if (r.outside_joint >= 0)
    r.flags |= TWF_IK_OUTSIDE_LIMITS;
  if (res != NULL)
    *res = r;
  return TWF_OK;
}

/* ------------------------------------------------------------------ */
/* Programs                                                             */
/* ------------------------------------------------------------------ */

twf_status twf_models_same_joints(const twf_model *a, const twf_model *b, const char *a_name,
                                  const char *b_name, twf_error *err)
{
  size_t i;
  const char *an = a_name != NULL ? a_name : "the first model";
  const char *bn = b_name != NULL ? b_name : "the second model";
  if (a == NULL || b == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "twf_models_same_joints: NULL model");
  if (a->n_joints != b->n_joints)
    return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0, "give two models of the same arm",
                         "%s has %zu joints and %s %zu", an, a->n_joints, bn, b->n_joints);
  for (i = 0; i < a->n_joints; i++) {
    if (strcmp(a->joints[i].name, b->joints[i].name) != 0)
      return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0, "give two models of the same arm",
                           "joint %zu is '%s' in %s and '%s' in %s", i + 1, a->joints[i].name, an,
                           b->joints[i].name, bn);
    if (a->joints[i].type != b->joints[i].type)
      return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0, "give two models of the same arm",
                           "joint %s is %s in %s and %s in %s", a->joints[i].name,
                           a->joints[i].type == TWF_JOINT_REVOLUTE ? "revolute" : "prismatic", an,
                           b->joints[i].type == TWF_JOINT_REVOLUTE ? "revolute" : "prismatic", bn);
  }
  return TWF_OK;
}

static void summary_add(twf_compensate_summary *s, const twf_ik_result *r, double L, size_t row,
                        double *big)
{
  double scaled = r->max_change_rad > r->max_change_m / L ? r->max_change_rad : r->max_change_m / L;
  s->n_rows++;
  if (r->flags != 0)
    s->n_flagged++;
  if (r->flags & TWF_IK_NEAR_SINGULAR)
    s->n_near_singular++;
  if (r->flags & TWF_IK_OUTSIDE_LIMITS)
    s->n_outside_limits++;
  if (r->flags & TWF_IK_NOT_CONVERGED) {
    s->n_not_converged++;
  } else {
    if (r->position_error_m > s->max_position_error_m)
      s->max_position_error_m = r->position_error_m;
    if (r->angle_error_rad > s->max_angle_error_rad)
      s->max_angle_error_rad = r->angle_error_rad;
  }
  if (r->max_change_rad > s->max_change_rad)
    s->max_change_rad = r->max_change_rad;
  if (r->max_change_m > s->max_change_m)
    s->max_change_m = r->max_change_m;
  if (scaled > *big) {
    *big = scaled;
    s->max_change_row = row;
  }
  s->iterations += r->iterations;
}

void twf_compensate_summarize(const twf_model *model, const twf_ik_result *results, size_t n,
                              twf_compensate_summary *s)
{
  double L = model != NULL ? twf_model_reach(model) : 1.0, big = -1.0;
  size_t i;
  memset(s, 0, sizeof *s);
  for (i = 0; i < n; i++)
    summary_add(s, &results[i], L, i, &big);
}

twf_status twf_compensate_program(const twf_model *nominal, const twf_model *asbuilt,
                                  const double *q, size_t n_rows,
                                  const twf_compensate_options *opt, double *q_out,
                                  twf_ik_result *results, twf_compensate_summary *summary,
                                  twf_error *err)
{
  long nominal_payload;
  twf_compensate_options o = opt != NULL ? *opt : twf_compensate_default_options();
  double t_nom[3] = { 0, 0, 0 }, t_asb[3] = { 0, 0, 0 };
  twf_ik_result one;
  twf_compensate_summary sum;
  double big = -1.0, L;
  twf_ik *w;
  twf_status st;
  size_t n, row;

  if (nominal == NULL || asbuilt == NULL || (q == NULL && n_rows > 0) || (q_out == NULL && n_rows > 0))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "twf_compensate_program: NULL argument");
  if ((st = twf_models_same_joints(nominal, asbuilt, "the nominal model", "the as-built model", err)) != TWF_OK)
    return st;
  n = asbuilt->n_joints;
  if (o.kind == TWF_IK_POINT) {
    long ka, kn;
    if (o.target == NULL)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "matching a point needs a target name");
    ka = twf_model_target_index(asbuilt, o.target);
    kn = twf_model_target_index(nominal, o.target);
    if (ka < 0 || kn < 0)
      return twf_error_set(err, TWF_ERR_UNKNOWN, NULL, 0, 0, "name a target that both models declare",
                           "the %s model has no target '%s'", ka < 0 ? "as-built" : "nominal", o.target);
    if (!asbuilt->targets[ka].offset_known)
      return twf_error_set(err, TWF_ERR_MISSING, NULL, 0, 0,
                           "use an as-built model that carries the target's fitted offset",
                           "the as-built model declares no offset for target '%s'", o.target);
    memcpy(t_asb, asbuilt->targets[ka].offset, sizeof t_asb);
    /* the program was made for the nominal tool point; a nominal model
     * without one means the drawing gave none: the as-built one stands in */
    memcpy(t_nom, nominal->targets[kn].offset_known ? nominal->targets[kn].offset : t_asb, sizeof t_nom);
  }
  L = o.ik.length_scale_m > 0.0 ? o.ik.length_scale_m : twf_model_reach(asbuilt);
  if (o.ik.payload >= (long)asbuilt->n_payloads)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "payload index out of range");
  /* the same load by name in the nominal model (none when it lacks it) */
  nominal_payload = o.ik.payload >= 0 ? twf_model_payload_index(nominal, asbuilt->payloads[o.ik.payload].name) : -1;
  memset(&sum, 0, sizeof sum);
  w = twf_ik_alloc(n);
  if (w == NULL)
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
  for (row = 0; row < n_rows; row++) {
    twf_ik_goal goal;
    twf_pose T;
    const double *qr = q + row * n;
    /* the program's goal: the nominal model as drawn (rigid unless it
     * carries compliances of its own) */
    twf_model_fk_load(nominal, qr, nominal_payload, NULL, &T);
    goal.kind = o.kind;
    memcpy(goal.R, T.R, sizeof goal.R);
    twf_pose_apply(&T, t_nom, goal.p);
    memcpy(goal.point, t_asb, sizeof goal.point);
    st = twf_ik_solve(w, asbuilt, &goal, qr, &o.ik, q_out + row * n, &one, err);
    if (st != TWF_OK) {
      if (err != NULL)
        err->line = (long)(row + 1);
      twf_ik_free(w);
      return st;
    }
    if (results != NULL)
      results[row] = one;
    summary_add(&sum, &one, L, row, &big);
  }
  twf_ik_free(w);
  if (summary != NULL)
    *summary = sum;
  return TWF_OK;
}
