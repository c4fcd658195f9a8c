/* plan.c: choosing the poses of a measuring day (plan.h). Candidates that
 * satisfy the constraints (limits, keep-out boxes, the instrument's range
 * and the targets' acceptance cone) are scored on the information matrix
 * M = sum A^T A of their scaled, weighted rows A (r x k for the k
 * structurally independent parameters). The criteria:
 *   workspace: trace(M^-1 Q), Q the mean of G^T G over the tool points of
 *              seeded random configurations (an I-optimal design): the
 *              square of the RMS predicted position uncertainty;
 *   D:         -log det M;
 *   O4:        -lambda_min / sqrt(lambda_max) of M (Nahvi and Hollerbach
 *              1996's index, sigma_min^2 / sigma_max).
 * Adding a pose with rows A changes M by a rank-r term; with M = L L^T,
 * B = A L^-T, S = I + B B^T and H = L^-1 chol(Q), the new criteria are
 * trace(M^-1 Q) - |chol(S)^-1 B H|_F^2 and -log det M - log det S
 * (Woodbury), so a candidate costs O(r k^2) and M is refactored once per
 * accepted change, never per candidate. Removing a pose uses
 * S = I - B B^T. The build-up is greedy over a seeded sample of the
 * candidates per step (stochastic greedy: (pool / count) log 100 of them,
 * recalled from memory); the refinement is DETMAX's excursions (Mitchell
 * 1974): add the best d, remove the worst d, keep the change when the
 * criterion improves, else try a longer excursion. O4, undefined while M
 * is singular, is built up by D and refined by O4 itself, scoring a short
 * list of the best D candidates exactly. */
#include "design.h"

#include <gsl/gsl_eigen.h>
#include <stdlib.h>

const char *twf_plan_criterion_name(twf_plan_criterion c)
{
  switch (c) {
  case TWF_PLAN_WORKSPACE: return "workspace";
  case TWF_PLAN_D: return "d";
  case TWF_PLAN_O4: return "o4";
  }
  return "?";
}

twf_status twf_plan_criterion_parse(const char *name, twf_plan_criterion *out)
{
  if (strcmp(name, "workspace") == 0)
    *out = TWF_PLAN_WORKSPACE;
  else if (strcmp(name, "d") == 0 || strcmp(name, "D") == 0 || strcmp(name, "d-optimal") == 0)
    *out = TWF_PLAN_D;
  else if (strcmp(name, "o4") == 0 || strcmp(name, "O4") == 0)
    *out = TWF_PLAN_O4;
  else
    return TWF_ERR_UNKNOWN;
  return TWF_OK;
}

int twf_plan_better(twf_plan_criterion c, double a, double b)
{
  return c == TWF_PLAN_WORKSPACE ? a < b : a > b;
}

twf_plan_options twf_plan_default_options(void)
{
  twf_plan_options o;
  memset(&o, 0, sizeof o);
  o.assess = twf_assess_default_options();
  o.criterion = TWF_PLAN_WORKSPACE;
  o.n_candidates = 5000;
  o.limit_margin = 0.05;
  o.range_max = HUGE_VAL;
  o.target_axis[2] = 1.0;
  o.excursions = 60;
  o.max_depth = 3;
  o.seed = 1;
  return o;
}

void twf_plan_result_free(twf_plan_result *r)
{
  if (r == NULL)
    return;
  free(r->q);
  free(r->station);
  free(r->candidate);
  twf_assessment_free(r->assessment);
  free(r);
}

/* ------------------------------------------------------------ constraints */

static int measured(const twf_model *m, const twf_plan_options *o, size_t k)
{
  return m->targets[k].offset_known && (o->assess.targets == NULL || o->assess.targets[k]);
}

/* 0 when the instrument at pos sees every measured target of the pose
 * whose flange is F, 3 when one is out of range, 4 when one faces away. */
static int station_sees(const twf_model *m, const twf_plan_options *o, const double pos[3], const twf_pose *F)
{
  size_t k;
  for (k = 0; k < m->n_targets; k++) {
    double y[3], d[3], dist, axis[3], c;
    int a;
    if (!measured(m, o, k))
      continue;
    twf_pose_apply(F, m->targets[k].offset, y);
    for (a = 0; a < 3; a++)
      d[a] = pos[a] - y[a];
    dist = twf_v3_norm(d);
    if (dist < o->range_min || dist > o->range_max)
      return 3;
    if (o->acceptance_rad > 0) {
      for (a = 0; a < 3; a++)
        axis[a] = F->R[a][0] * o->target_axis[0] + F->R[a][1] * o->target_axis[1] + F->R[a][2] * o->target_axis[2];
      c = twf_v3_dot(axis, d) / (twf_v3_norm(axis) * (dist > 0 ? dist : 1.0));
      if (c < cos(o->acceptance_rad))
        return 4;
    }
  }
  return 0;
}

/* The check of twf_plan_pose_check, and in *station the first station
 * that sees the pose (-1 when none). */
static int pose_check_station(const twf_model *m, const twf_plan_options *o, const double *q, long *station)
{
  size_t j, b, s;
  twf_pose F;
  int why = 3;
  *station = -1;
  for (j = 0; j < m->n_joints; j++) {
    const twf_joint *jt = &m->joints[j];
    if (!isfinite(q[j]) || (jt->has_limits && (q[j] < jt->limit_lo - 1e-9 || q[j] > jt->limit_hi + 1e-9)))
      return 1;
  }
  for (b = 0; b < o->n_keepout; b++) {
    int inside = 1;
    for (j = 0; j < m->n_joints && inside; j++)
      inside = q[j] >= o->keepout[b].lo[j] && q[j] <= o->keepout[b].hi[j];
    if (inside)
      return 2;
  }
  if (!o->has_instrument && o->n_instruments == 0) {
    *station = 0;
    return 0;
  }
  twf_model_fk(m, q, NULL, &F);
  if (o->n_instruments == 0) {
    why = station_sees(m, o, o->instrument, &F);
    if (why == 0)
      *station = 0;
    return why;
  }
  /* the reason given is the nearest miss: facing away from a station in
   * range before out of every station's range */
  for (s = 0; s < o->n_instruments; s++) {
    int w = station_sees(m, o, o->instruments + 3 * s, &F);
    if (w == 0) {
      *station = (long)s;
      return 0;
    }
    if (w == 4)
      why = 4;
  }
  return why;
}

int twf_plan_pose_check(const twf_model *m, const twf_plan_options *o, const double *q)
{
  long s;
  return pose_check_station(m, o, q, &s);
}

long twf_plan_pose_station(const twf_model *m, const twf_plan_options *o, const double *q)
{
  long s;
  pose_check_station(m, o, q, &s);
  return s;
}

/* ------------------------------------------------------------ small dense algebra */

/* Lower Cholesky factor of the n x n symmetric A into L; -1 when not
 * positive definite. */
static int chol(const double *A, double *L, size_t n)
{
  size_t i, j, k;
  for (i = 0; i < n; i++)
    for (j = 0; j <= i; j++) {
      double s = A[i * n + j];
      for (k = 0; k < j; k++)
        s -= L[i * n + k] * L[j * n + k];
      if (i == j) {
        if (!(s > 0))
          return -1;
        L[i * n + i] = sqrt(s);
      } else {
        L[i * n + j] = s / L[j * n + j];
      }
    }
  for (i = 0; i < n; i++)
    for (j = i + 1; j < n; j++)
      L[i * n + j] = 0.0;
  return 0;
}

/* x = L^-1 b (forward substitution); x may be b. */
static void fsolve(const double *L, size_t n, const double *b, double *x)
{
  size_t i, k;
  for (i = 0; i < n; i++) {
    const double *Li = L + i * n;
    double s = b[i];
    for (k = 0; k < i; k++)
      s -= Li[k] * x[k];
    x[i] = s / Li[i];
  }
}

/* Eigenvalues of the n x n symmetric A (destroyed): lambda_min and max. */
static int eig_range(double *A, size_t n, gsl_eigen_symm_workspace *ws, double *ev, double *lo, double *hi)
{
  gsl_matrix_view Av = gsl_matrix_view_array(A, n, n);
  gsl_vector_view ev_v = gsl_vector_view_array(ev, n);
  size_t k;
  if (gsl_eigen_symm(&Av.matrix, &ev_v.vector, ws) != 0)
    return -1;
  *lo = *hi = ev[0];
  for (k = 1; k < n; k++) {
    *lo = fmin(*lo, ev[k]);
    *hi = fmax(*hi, ev[k]);
  }
  return 0;
}

/* ------------------------------------------------------------ the planner */

typedef struct planner {
  twf_design d;
  twf_plan_criterion crit;
  size_t p, nk, r;
  size_t *idx;          /* nk kept columns */
  double *Q, *Lq;       /* nk x nk workspace matrix and its factor */
  double *M, *L, *H;    /* information, its factor, L^-1 Lq */
  double *Mt;           /* scratch nk x nk */
  double *rows;         /* r x p */
  double *B, *Z, *S, *Ls; /* r x nk, r x nk, r x r, r x r */
  double *ev;
  gsl_eigen_symm_workspace *ws;
  double f;             /* current cost (lower is better) */
} planner;

static void planner_free(planner *pl)
{
  twf_design_free(&pl->d);
  free(pl->idx); free(pl->Q); free(pl->Lq); free(pl->M); free(pl->L); free(pl->H); free(pl->Mt);
  free(pl->rows); free(pl->B); free(pl->Z); free(pl->S); free(pl->Ls); free(pl->ev);
  if (pl->ws != NULL)
    gsl_eigen_symm_free(pl->ws);
  memset(pl, 0, sizeof *pl);
}

/* The kept rows of pose q (r x nk) into out. */
static void planner_rows(planner *pl, const double *q, double *out)
{
  size_t a, b, p = pl->p;
  twf_design_rows(&pl->d, q, pl->rows);
  for (a = 0; a < pl->r; a++)
    for (b = 0; b < pl->nk; b++)
      out[a * pl->nk + b] = pl->rows[a * p + pl->idx[b]];
}

/* Design, structural walk and, for the workspace criterion, Q. */
static twf_status planner_init(planner *pl, const twf_model *m, const twf_plan_options *o, twf_error *err)
{
  const twf_calib_options *co = &o->assess.calib;
  size_t p, k, nk, n_order, i, r;
  size_t *order = NULL;
  unsigned char *keep = NULL;
  twf_status st;
  memset(pl, 0, sizeof *pl);
  pl->crit = o->criterion;
  if ((st = twf_design_init(&pl->d, m, NULL, co->groups, o->assess.targets, o->assess.orientation,
                            co->sigma_length, co->sigma_angle, err)) != TWF_OK)
    return st;
  p = pl->p = pl->d.p;
  r = pl->r = pl->d.r;
  order = calloc(p ? p : 1, sizeof *order);
  keep = calloc(p ? p : 1, 1);
  pl->idx = calloc(p ? p : 1, sizeof *pl->idx);
  if (!order || !keep || !pl->idx)
    goto nomem;
  n_order = twf_design_order(&pl->d, co->priority, order);
  if ((st = twf_design_structural(&pl->d, order, n_order,
                                  co->synthetic_poses ? co->synthetic_poses : (p < 40 ? 200 : 5 * p), co->seed,
                                  co->redundancy_tol, keep, NULL, err)) != TWF_OK)
    goto fail;
  for (k = 0; k < p; k++)
    if (keep[k])
      pl->idx[pl->nk++] = k;
  nk = pl->nk;
  pl->Q = calloc(nk * nk + 1, sizeof *pl->Q);
  pl->Lq = calloc(nk * nk + 1, sizeof *pl->Lq);
  pl->M = calloc(nk * nk + 1, sizeof *pl->M);
  pl->L = calloc(nk * nk + 1, sizeof *pl->L);
  pl->H = calloc(nk * nk + 1, sizeof *pl->H);
  pl->Mt = calloc(nk * nk + 1, sizeof *pl->Mt);
  pl->rows = calloc(r * p + 1, sizeof *pl->rows);
  pl->B = calloc(r * nk + 1, sizeof *pl->B);
  pl->Z = calloc(r * nk + 1, sizeof *pl->Z);
  pl->S = calloc(r * r + 1, sizeof *pl->S);
  pl->Ls = calloc(r * r + 1, sizeof *pl->Ls);
  pl->ev = calloc(nk + 1, sizeof *pl->ev);
  pl->ws = gsl_eigen_symm_alloc(nk ? nk : 1);
  if (!pl->Q || !pl->Lq || !pl->M || !pl->L || !pl->H || !pl->Mt || !pl->rows || !pl->B || !pl->Z || !pl->S ||
      !pl->Ls || !pl->ev || !pl->ws)
    goto nomem;
  if (nk == 0) {
    st = twf_error_set(err, TWF_ERR_DEGENERATE, NULL, 0, 0, NULL, "no parameter can be determined");
    goto fail;
  }
  if (pl->crit == TWF_PLAN_WORKSPACE) {
    twf_workspace_options wo = o->assess.workspace;
    unsigned long long s = wo.seed;
    double *q = calloc(m->n_joints + 1, sizeof *q), *G = calloc(3 * pl->d.n_tg * p + 1, sizeof *G);
    double *g = calloc(nk + 1, sizeof *g), tr = 0.0;
    size_t e, a, b;
    if (!q || !G || !g) {
      free(q); free(G); free(g);
      goto nomem;
    }
    for (e = 0; e < wo.n_configs; e++) {
      twf_simulate_joints(pl->d.m, wo.limit_margin, &s, q);
      twf_design_grad(&pl->d, q, G, NULL);
      for (i = 0; i < 3 * pl->d.n_tg; i++) {
        for (a = 0; a < nk; a++)
          g[a] = G[i * p + pl->idx[a]];
        for (a = 0; a < nk; a++)
          for (b = a; b < nk; b++)
            pl->Q[a * nk + b] += g[a] * g[b];
      }
    }
    for (a = 0; a < nk; a++)
      for (b = a; b < nk; b++)
        pl->Q[b * nk + a] = pl->Q[a * nk + b] /= (double)(wo.n_configs * pl->d.n_tg);
    for (a = 0; a < nk; a++)
      tr += pl->Q[a * nk + a];
    /* a whisker on the diagonal so that the factor exists when some
     * parameter does not move the tool points (a target not used) */
    memcpy(pl->Mt, pl->Q, nk * nk * sizeof *pl->Mt);
    for (a = 0; a < nk; a++)
      pl->Mt[a * nk + a] += 1e-12 * tr / (double)nk;
    if (chol(pl->Mt, pl->Lq, nk) != 0) {
      free(q); free(G); free(g);
      st = twf_error_set(err, TWF_ERR_SINGULAR, NULL, 0, 0, NULL, "the workspace criterion is singular");
      goto fail;
    }
    free(q); free(G); free(g);
  }
  free(order);
  free(keep);
  return TWF_OK;
nomem:
  st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
fail:
  free(order);
  free(keep);
  planner_free(pl);
  return st;
}

/* Cost of M (exactly, from scratch): +inf when singular. */
static double cost_of(planner *pl, const double *M)
{
  size_t nk = pl->nk, a, b;
  if (pl->crit == TWF_PLAN_O4) {
    double lo, hi;
    memcpy(pl->Mt, M, nk * nk * sizeof *M);
    if (eig_range(pl->Mt, nk, pl->ws, pl->ev, &lo, &hi) != 0 || !(lo > 0))
      return HUGE_VAL;
    return -lo / sqrt(hi);
  }
  if (chol(M, pl->Mt, nk) != 0)
    return HUGE_VAL;
  if (pl->crit == TWF_PLAN_D) {
    double s = 0.0;
    for (a = 0; a < nk; a++)
      s += 2.0 * log(pl->Mt[a * nk + a]);
    return -s;
  }
  {
    /* trace(M^-1 Q) = |L^-1 Lq|_F^2 */
    double s = 0.0, *col = pl->ev;
    for (b = 0; b < nk; b++) {
      for (a = 0; a < nk; a++)
        col[a] = pl->Lq[a * nk + b];
      fsolve(pl->Mt, nk, col, col);
      for (a = 0; a < nk; a++)
        s += col[a] * col[a];
    }
    return s;
  }
}

/* After a change of M: its factor L, H = L^-1 Lq and the cost. */
static int planner_refresh(planner *pl)
{
  size_t nk = pl->nk, a, b;
  if (chol(pl->M, pl->L, nk) != 0)
    return -1;
  if (pl->crit == TWF_PLAN_WORKSPACE) {
    double *col = pl->ev;
    for (b = 0; b < nk; b++) {
      for (a = 0; a < nk; a++)
        col[a] = pl->Lq[a * nk + b];
      fsolve(pl->L, nk, col, col);
      for (a = 0; a < nk; a++)
        pl->H[a * nk + b] = col[a];
    }
  }
  pl->f = cost_of(pl, pl->M);
  return 0;
}

/* Change of the cost when the pose with rows A (r x nk) is added (sign
 * +1) or removed (-1), through the Woodbury identity; the D change for
 * O4 (its short list). HUGE_VAL when a removal would make M singular. */
static double delta(planner *pl, const double *A, int sign, int as_d)
{
  size_t nk = pl->nk, r = pl->r, i, j, k;
  double *B = pl->B, *S = pl->S, *Ls = pl->Ls;
  for (i = 0; i < r; i++)
    fsolve(pl->L, nk, A + i * nk, B + i * nk);
  for (i = 0; i < r; i++)
    for (j = 0; j <= i; j++) {
      const double *bi = B + i * nk, *bj = B + j * nk;
      double s = 0.0;
      for (k = 0; k < nk; k++)
        s += bi[k] * bj[k];
      S[i * r + j] = S[j * r + i] = (i == j ? 1.0 : 0.0) + sign * s;
    }
  if (chol(S, Ls, r) != 0)
    return sign > 0 ? 0.0 : HUGE_VAL;
  if (pl->crit != TWF_PLAN_WORKSPACE || as_d) {
    double s = 0.0;
    for (i = 0; i < r; i++)
      s += 2.0 * log(Ls[i * r + i]);
    return -s;
  }
  {
    /* Z = B H (rows z_i = H^T b_i), then |Ls^-1 Z|_F^2 */
    double *Z = pl->Z, t = 0.0;
    size_t l;
    for (i = 0; i < r; i++) {
      const double *bi = B + i * nk;
      double *zi = Z + i * nk;
      for (k = 0; k < nk; k++) {
        double s = 0.0;
        for (l = k; l < nk; l++)
          s += pl->H[l * nk + k] * bi[l];
        zi[k] = s;
      }
    }
    for (k = 0; k < nk; k++) {
      double y[64], *yy = y;
      double *heap = NULL;
      if (r > 64) {
        heap = malloc(r * sizeof *heap);
        if (heap == NULL)
          return HUGE_VAL;
        yy = heap;
      }
      for (i = 0; i < r; i++)
        yy[i] = Z[i * nk + k];
      fsolve(Ls, r, yy, yy);
      for (i = 0; i < r; i++)
        t += yy[i] * yy[i];
      free(heap);
    }
    return -sign * t;
  }
}

/* Exact cost of M with the pose A added or removed (O4's short list). */
static double exact_change(planner *pl, const double *A, int sign, double *scratch)
{
  size_t nk = pl->nk, i, a, b;
  memcpy(scratch, pl->M, nk * nk * sizeof *scratch);
  for (i = 0; i < pl->r; i++)
    for (a = 0; a < nk; a++)
      for (b = 0; b < nk; b++)
        scratch[a * nk + b] += sign * A[i * nk + a] * A[i * nk + b];
  return cost_of(pl, scratch) - pl->f;
}

static void add_pose(planner *pl, const double *A, int sign)
{
  size_t nk = pl->nk, i, a, b;
  for (i = 0; i < pl->r; i++)
    for (a = 0; a < nk; a++) {
      double v = sign * A[i * nk + a];
      for (b = 0; b < nk; b++)
        pl->M[a * nk + b] += v * A[i * nk + b];
    }
}

/* ------------------------------------------------------------ the search */

typedef struct search {
  planner *pl;
  const double *A;      /* nc x r x nk */
  size_t nc, n;         /* candidates, design size */
  size_t *avail, *pos;  /* unchosen candidates and each one's place in avail */
  size_t n_avail;
  size_t *chosen;       /* design points */
  size_t n_chosen;
  size_t sample;
  unsigned long long rng;
  double *scratch;      /* nk x nk */
  int by_d;             /* score by D (O4's build-up) */
} search;

static const double *rows_of(const search *s, size_t c)
{
  return s->A + c * s->pl->r * s->pl->nk;
}

static void take(search *s, size_t c)
{
  size_t at = s->pos[c], last = s->avail[--s->n_avail];
  s->avail[at] = last;
  s->pos[last] = at;
  s->chosen[s->n_chosen++] = c;
  add_pose(s->pl, rows_of(s, c), +1);
}

static void give_back(search *s, size_t k)
{
  size_t c = s->chosen[k];
  s->chosen[k] = s->chosen[--s->n_chosen];
  s->pos[c] = s->n_avail;
  s->avail[s->n_avail++] = c;
  add_pose(s->pl, rows_of(s, c), -1);
}

/* The best candidate to add among a seeded sample of the unchosen ones. */
static size_t best_add(search *s)
{
  planner *pl = s->pl;
  size_t m = s->sample < s->n_avail ? s->sample : s->n_avail, t, best = s->nc;
  double bv = HUGE_VAL;
  int o4 = pl->crit == TWF_PLAN_O4 && !s->by_d;
  size_t short_c[8], n_short = 0;
  double short_v[8];
  for (t = 0; t < m; t++) {
    /* partial Fisher-Yates: a fresh seeded sample each step */
    size_t j = t + (size_t)(twf_rng_uniform(&s->rng) * (double)(s->n_avail - t)), c, u;
    double v;
    if (j >= s->n_avail)
      j = s->n_avail - 1;
    c = s->avail[j];
    s->avail[j] = s->avail[t];
    s->avail[t] = c;
    s->pos[s->avail[j]] = j;
    s->pos[c] = t;
    v = delta(pl, rows_of(s, c), +1, o4 || s->by_d);
    if (!o4) {
      if (v < bv) {
        bv = v;
        best = c;
      }
      continue;
    }
    /* O4: keep the eight best by D for the exact score */
    if (n_short < 8 || v < short_v[n_short - 1]) {
      u = n_short < 8 ? n_short++ : 7;
      while (u > 0 && short_v[u - 1] > v) {
        short_v[u] = short_v[u - 1];
        short_c[u] = short_c[u - 1];
        u--;
      }
      short_v[u] = v;
      short_c[u] = c;
    }
  }
  if (o4)
    for (t = 0; t < n_short; t++) {
      double v = exact_change(pl, rows_of(s, short_c[t]), +1, s->scratch);
      if (v < bv) {
        bv = v;
        best = short_c[t];
      }
    }
  return best;
}

/* The design point whose removal costs least. */
static size_t best_remove(search *s)
{
  planner *pl = s->pl;
  size_t k, best = 0;
  double bv = HUGE_VAL;
  for (k = 0; k < s->n_chosen; k++) {
    const double *A = rows_of(s, s->chosen[k]);
    double v = pl->crit == TWF_PLAN_O4 ? exact_change(pl, A, -1, s->scratch) : delta(pl, A, -1, 0);
    if (v < bv) {
      bv = v;
      best = k;
    }
  }
  return best;
}

/* ------------------------------------------------------------ travel order */

static double joint_distance(const twf_model *m, const double *a, const double *b, double reach)
{
  size_t j;
  double s = 0.0;
  for (j = 0; j < m->n_joints; j++) {
    double d = a[j] - b[j];
    if (m->joints[j].type == TWF_JOINT_PRISMATIC)
      d /= reach;
    s += d * d;
  }
  return sqrt(s);
}

static double path_length(const twf_model *m, const double *q, const size_t *ord, size_t n, double reach)
{
  size_t i;
  double s = 0.0;
  for (i = 1; i < n; i++)
    s += joint_distance(m, q + ord[i - 1] * m->n_joints, q + ord[i] * m->n_joints, reach);
  return s;
}

/* Nearest neighbour from the pose closest to the middle of the limits,
 * then 2-opt on the open path until no reversal shortens it. */
static void order_for_travel(const twf_model *m, const double *q, size_t n, size_t *ord, double reach)
{
  size_t nj = m->n_joints, i, j, k, start = 0;
  unsigned char *used = calloc(n ? n : 1, 1);
  double *mid = calloc(nj ? nj : 1, sizeof *mid), bd = HUGE_VAL;
  int improved = 1, rounds = 0;
  if (used == NULL || mid == NULL) {
    for (i = 0; i < n; i++)
      ord[i] = i;
    free(used);
    free(mid);
    return;
  }
  for (j = 0; j < nj; j++)
    mid[j] = m->joints[j].has_limits ? 0.5 * (m->joints[j].limit_lo + m->joints[j].limit_hi) : 0.0;
  for (i = 0; i < n; i++) {
    double d = joint_distance(m, q + i * nj, mid, reach);
    if (d < bd) {
      bd = d;
      start = i;
    }
  }
  ord[0] = start;
  used[start] = 1;
  for (k = 1; k < n; k++) {
    size_t best = 0;
    bd = HUGE_VAL;
    for (i = 0; i < n; i++)
      if (!used[i]) {
        double d = joint_distance(m, q + ord[k - 1] * nj, q + i * nj, reach);
        if (d < bd) {
          bd = d;
          best = i;
        }
      }
    ord[k] = best;
    used[best] = 1;
  }
  while (improved && rounds++ < 100) {
    improved = 0;
    for (i = 0; i + 2 < n; i++)
      for (k = i + 2; k < n; k++) {
        /* reverse ord[i+1..k]: edges (i, i+1) and (k, k+1) become (i, k) and (i+1, k+1) */
        const double *a = q + ord[i] * nj, *b = q + ord[i + 1] * nj, *c = q + ord[k] * nj;
        double before = joint_distance(m, a, b, reach), after = joint_distance(m, a, c, reach);
        if (k + 1 < n) {
          const double *d = q + ord[k + 1] * nj;
          before += joint_distance(m, c, d, reach);
          after += joint_distance(m, b, d, reach);
        }
        if (after < before - 1e-12) {
          size_t lo = i + 1, hi = k;
          while (lo < hi) {
            size_t t = ord[lo];
            ord[lo++] = ord[hi];
            ord[hi--] = t;
          }
          improved = 1;
        }
      }
  }
  free(used);
  free(mid);
}

/* ------------------------------------------------------------ entry points */

static twf_status check_plan_options(const twf_model *m, const twf_plan_options *o, twf_error *err)
{
  size_t b, j;
  if (m == NULL || o->count == 0 || !(o->limit_margin >= 0 && o->limit_margin < 0.5) ||
      !(o->range_min >= 0) || !(o->range_max > o->range_min) || !(o->acceptance_rad >= 0) ||
      !(o->acceptance_rad <= TWF_PI) || (o->pool == NULL && o->n_candidates == 0) ||
      (o->pool != NULL && o->n_pool == 0) || (o->n_keepout > 0 && o->keepout == NULL) ||
      !(twf_v3_norm(o->target_axis) > 0) || o->n_instruments > TWF_STATIONS_MAX ||
      (o->n_instruments > 0 && o->instruments == NULL))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "invalid planning options");
  for (b = 0; b < o->n_keepout; b++)
    for (j = 0; j < m->n_joints; j++)
      if (o->keepout[b].lo == NULL || o->keepout[b].hi == NULL || !(o->keepout[b].lo[j] <= o->keepout[b].hi[j]))
        return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, "give each box its lower bound first",
                             "keep-out box %zu is empty", b + 1);
  return TWF_OK;
}

twf_status twf_plan_score(const twf_model *m, const double *q, size_t n, const twf_plan_options *o,
                          double *score, twf_error *err)
{
  planner pl;
  double *A;
  size_t i;
  twf_status st;
  *score = NAN;
  if ((st = planner_init(&pl, m, o, err)) != TWF_OK)
    return st;
  A = calloc(pl.r * pl.nk + 1, sizeof *A);
  if (A == NULL) {
    planner_free(&pl);
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
  }
  for (i = 0; i < n; i++) {
    planner_rows(&pl, q + i * m->n_joints, A);
    add_pose(&pl, A, +1);
  }
  pl.f = cost_of(&pl, pl.M);
  *score = pl.crit == TWF_PLAN_WORKSPACE ? sqrt(pl.f)
           : pl.crit == TWF_PLAN_D       ? (isfinite(pl.f) ? -pl.f / (double)pl.nk : -HUGE_VAL)
                                         : (isfinite(pl.f) ? -pl.f : 0.0);
  free(A);
  planner_free(&pl);
  return TWF_OK;
}

twf_status twf_plan(const twf_model *m, const twf_plan_options *o, twf_plan_result **out, twf_warnings *w,
                    twf_error *err)
{
  planner pl;
  search s;
  twf_plan_result *res = NULL;
  size_t nj, nc_all, c, k, i, t;
  double *qc = NULL, *A = NULL, *greedy = NULL, ridge = 0.0, reach;
  size_t *ord = NULL, *cand_index = NULL;
  twf_status st;
  unsigned long long rng;

  *out = NULL;
  if ((st = check_plan_options(m, o, err)) != TWF_OK)
    return st;
  if ((st = planner_init(&pl, m, o, err)) != TWF_OK)
    return st;
  memset(&s, 0, sizeof s);
  nj = m->n_joints;
  reach = twf_model_reach(m);
  res = calloc(1, sizeof *res);
  nc_all = o->pool != NULL ? o->n_pool : o->n_candidates;
  qc = malloc(nc_all * (nj ? nj : 1) * sizeof *qc);
  cand_index = malloc((nc_all ? nc_all : 1) * sizeof *cand_index);
  if (res == NULL || qc == NULL || cand_index == NULL)
    goto nomem;
  res->n_joints = nj;
  res->n_candidates = nc_all;
  /* the feasible candidates */
  rng = o->seed;
  for (c = 0; c < nc_all; c++) {
    double *q = qc + res->n_feasible * nj;
    int why;
    if (o->pool != NULL)
      memcpy(q, o->pool + c * nj, nj * sizeof *q);
    else
      twf_simulate_joints(m, o->limit_margin, &rng, q);
    why = twf_plan_pose_check(m, o, q);
    if (why != 0) {
      res->n_rejected[why - 1]++;
      continue;
    }
    cand_index[res->n_feasible++] = c;
  }
  if (res->n_feasible < o->count) {
    st = twf_error_set(err, TWF_ERR_DEGENERATE, NULL, 0, 0,
                       "draw more candidates, widen the instrument's range or acceptance angle, or shrink "
                       "the keep-out boxes",
                       "only %zu of %zu candidates satisfy the constraints (%zu outside the limits, %zu in "
                       "keep-out boxes, %zu out of range, %zu facing away) for %zu poses",
                       res->n_feasible, nc_all, res->n_rejected[0], res->n_rejected[1], res->n_rejected[2],
                       res->n_rejected[3], o->count);
    goto fail;
  }
  A = malloc(res->n_feasible * pl.r * pl.nk * sizeof *A);
  if (A == NULL)
    goto nomem;
  for (c = 0; c < res->n_feasible; c++) {
    double *Ac = A + c * pl.r * pl.nk;
    planner_rows(&pl, qc + c * nj, Ac);
    for (k = 0; k < pl.r * pl.nk; k++)
      ridge += Ac[k] * Ac[k];
  }
  /* a ridge far below one pose's information keeps M invertible while
   * the first poses are added (common practice, no source) */
  ridge = 1e-8 * ridge / (double)(res->n_feasible * pl.nk);
  s.pl = &pl;
  s.A = A;
  s.nc = res->n_feasible;
  s.n = o->count;
  s.avail = malloc(s.nc * sizeof *s.avail);
  s.pos = malloc(s.nc * sizeof *s.pos);
  s.chosen = malloc((o->count + o->max_depth + 1) * sizeof *s.chosen);
  s.scratch = malloc(pl.nk * pl.nk * sizeof *s.scratch);
  if (!s.avail || !s.pos || !s.chosen || !s.scratch)
    goto nomem;
  for (c = 0; c < s.nc; c++) {
    s.avail[c] = c;
    s.pos[c] = c;
  }
  s.n_avail = s.nc;
  s.rng = o->seed ^ 0xbb67ae8584caa73bULL;
  s.sample = o->sample ? o->sample
                       : (size_t)fmax(500.0, ceil((double)s.nc / (double)o->count * log(100.0)));
  for (k = 0; k < pl.nk; k++)
    pl.M[k * pl.nk + k] = ridge;
  if (planner_refresh(&pl) != 0)
    goto singular;

  /* greedy build-up (O4 by D) */
  s.by_d = pl.crit == TWF_PLAN_O4;
  if (s.by_d) {
    pl.crit = TWF_PLAN_D;
    if (planner_refresh(&pl) != 0)
      goto singular;
  }
  for (t = 0; t < o->count; t++) {
    size_t b = best_add(&s);
    if (b >= s.nc)
      goto singular;
    take(&s, b);
    if (planner_refresh(&pl) != 0)
      goto singular;
  }
  if (s.by_d) {
    s.by_d = 0;
    pl.crit = TWF_PLAN_O4;
    if (planner_refresh(&pl) != 0)
      goto singular;
  }
  /* the greedy set, scored exactly (without the ridge) below */
  greedy = malloc(o->count * (nj ? nj : 1) * sizeof *greedy);
  if (greedy == NULL)
    goto nomem;
  for (i = 0; i < o->count; i++)
    memcpy(greedy + i * nj, qc + s.chosen[i] * nj, nj * sizeof *greedy);

  /* exchange excursions */
  {
    size_t depth = 1, e, *saved = malloc((o->count + 1) * sizeof *saved), n_saved;
    if (saved == NULL)
      goto nomem;
    for (e = 0; e < o->excursions; e++) {
      double f0 = pl.f;
      size_t dd, ok = 1;
      memcpy(saved, s.chosen, o->count * sizeof *saved);
      n_saved = s.n_chosen;
      for (dd = 0; dd < depth && ok; dd++) {
        size_t b = best_add(&s);
        if (b >= s.nc) {
          ok = 0;
          break;
        }
        take(&s, b);
        ok = planner_refresh(&pl) == 0;
      }
      while (ok && s.n_chosen > o->count) {
        give_back(&s, best_remove(&s));
        ok = planner_refresh(&pl) == 0;
      }
      if (ok && pl.f < f0 - 1e-12 * fabs(f0)) {
        res->exchanges++;
        depth = 1;
        continue;
      }
      /* restore the design before the excursion */
      while (s.n_chosen > 0)
        give_back(&s, s.n_chosen - 1);
      for (k = 0; k < n_saved; k++)
        take(&s, saved[k]);
      if (planner_refresh(&pl) != 0) {
        free(saved);
        goto singular;
      }
      depth = depth < o->max_depth ? depth + 1 : 1;
    }
    free(saved);
  }

  /* the result: poses ordered for travel, scores from scratch */
  res->n = o->count;
  res->q = malloc(o->count * (nj ? nj : 1) * sizeof *res->q);
  res->candidate = malloc(o->count * sizeof *res->candidate);
  ord = calloc(o->count, sizeof *ord);
  if (!res->q || !res->candidate || !ord)
    goto nomem;
  {
    double *qs = calloc(o->count * (nj ? nj : 1), sizeof *qs);
    if (qs == NULL)
      goto nomem;
    for (i = 0; i < o->count; i++)
      memcpy(qs + i * nj, qc + s.chosen[i] * nj, nj * sizeof *qs);
    for (i = 0; i < o->count; i++)
      ord[i] = i;
    res->travel_before = path_length(m, qs, ord, o->count, reach);
    if (o->n_instruments > 0) {
      /* the instrument moves between stations: group the poses by
       * station, in station order, each group ordered for travel */
      size_t *sta = malloc(o->count * sizeof *sta), *sub = malloc(o->count * sizeof *sub), st_i, k2, n_s, off = 0;
      double *qg = malloc(o->count * (nj ? nj : 1) * sizeof *qg);
      res->station = malloc(o->count * sizeof *res->station);
      if (sta == NULL || sub == NULL || qg == NULL || res->station == NULL) {
        free(sta); free(sub); free(qg); free(qs);
        goto nomem;
      }
      for (i = 0; i < o->count; i++)
        sta[i] = (size_t)twf_plan_pose_station(m, o, qs + i * nj);
      for (st_i = 0; st_i < o->n_instruments; st_i++) {
        n_s = 0;
        for (i = 0; i < o->count; i++)
          if (sta[i] == st_i) {
            memcpy(qg + n_s * nj, qs + i * nj, nj * sizeof *qs);
            sub[n_s++] = i;
          }
        for (k2 = 0; k2 < n_s; k2++)
          ord[off + k2] = k2;
        if (n_s > 0)
          order_for_travel(m, qg, n_s, ord + off, reach);
        for (k2 = 0; k2 < n_s; k2++) {
          ord[off + k2] = sub[ord[off + k2]];
          res->station[off + k2] = st_i;
        }
        off += n_s;
      }
      free(sta); free(sub); free(qg);
    } else {
      order_for_travel(m, qs, o->count, ord, reach);
    }
    res->travel = path_length(m, qs, ord, o->count, reach);
    for (i = 0; i < o->count; i++) {
      memcpy(res->q + i * nj, qs + ord[i] * nj, nj * sizeof *qs);
      res->candidate[i] = cand_index[s.chosen[ord[i]]];
    }
    free(qs);
  }
  if ((st = twf_plan_score(m, greedy, o->count, o, &res->score_greedy, err)) != TWF_OK)
    goto fail;
  if ((st = twf_plan_score(m, res->q, res->n, o, &res->score, err)) != TWF_OK)
    goto fail;
  if ((st = twf_assess(m, res->q, res->n, &o->assess, &res->assessment, w, err)) != TWF_OK)
    goto fail;
  *out = res;
  res = NULL;
  st = TWF_OK;
  goto done;
singular:
  st = twf_error_set(err, TWF_ERR_SINGULAR, NULL, 0, 0, "plan more poses or fit fewer groups",
                     "the information matrix became singular while planning");
  goto fail;
nomem:
  st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
fail:
done:
  twf_plan_result_free(res);
  planner_free(&pl);
  free(qc); free(A); free(greedy); free(ord); free(cand_index);
  free(s.avail); free(s.pos); free(s.chosen); free(s.scratch);
  return st;
}
