/* Residuals that are not noise: the joint regression of the position
 * residuals on every joint's slope, harmonics and gravity torque, and the
 * F test of each family given the others (twistfit/pattern.h states the
 * test). One pass accumulates the normal matrix of the regression (at most
 * 7 columns per joint); nothing is kept per measurement. */
#include "config.h"

#include "twistfit/pattern.h"

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_eigen.h>
#include <gsl/gsl_matrix.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"

/* Columns of one joint: the offset, the slope, four harmonics, the torque. */
enum { COL_CONST = 0, COL_SLOPE, COL_H1, COL_H2, COL_H3, COL_H4, COL_TORQUE, COLS_PER_JOINT };

/* Relative eigenvalue below which a direction of the equilibrated normal
 * matrix counts as not determined (the pseudo-inverse's rank). */
#define PATTERN_RANK_TOL 1e-10

const char *twf_pattern_kind_name(twf_pattern_kind k)
{
  switch (k) {
  case TWF_PATTERN_SLOPE: return "slope";
  case TWF_PATTERN_HARMONIC: return "harmonic";
  case TWF_PATTERN_TORQUE: return "torque";
  case TWF_PATTERN_NKINDS: break;
  }
  return "?";
}

twf_pattern_options twf_pattern_default_options(void)
{
  twf_pattern_options o;
  memset(&o, 0, sizeof o);
  o.alpha = 0.01;
  o.min_explained = 0.05;
  o.min_explained_rms_m = 1e-7;
  return o;
}

void twf_pattern_result_clear(twf_pattern_result *r)
{
  if (r == NULL)
    return;
  free(r->tests);
  memset(r, 0, sizeof *r);
}

static void family_cols(twf_pattern_kind k, size_t *first, size_t *count)
{
  switch (k) {
  case TWF_PATTERN_SLOPE: *first = COL_SLOPE; *count = 1; return;
  case TWF_PATTERN_HARMONIC: *first = COL_H1; *count = 4; return;
  case TWF_PATTERN_TORQUE: *first = COL_TORQUE; *count = 1; return;
  case TWF_PATTERN_NKINDS: break;
  }
  *first = 0;
  *count = 0;
}

/* The normal equations and the scratch of the subset solves. */
typedef struct regression {
  size_t ncol;
  double *A;   /* ncol x ncol, lower triangle accumulated */
  double *b;   /* ncol */
  double yy;
  size_t n_rows;
  unsigned char *active; /* ncol: column in the model at all */
  /* scratch */
  gsl_matrix *M, *V;
  gsl_vector *eval;
  size_t *idx;
  double *d, *v;
} regression;

/* Residual sum of squares and rank of the least-squares fit on the active
 * columns without those flagged in drop (NULL: none); coef (NULL or ncol)
 * receives the coefficients of the columns, 0 for the others. */
static int subset_fit(regression *g, const unsigned char *drop, double *ss, size_t *rank, double *coef)
{
  size_t m = 0, r, c, e;
  double fit = 0.0, emax = 0.0;
  for (c = 0; c < g->ncol; c++)
    if (g->active[c] && (drop == NULL || !drop[c]) && g->A[c * g->ncol + c] > 0.0)
      g->idx[m++] = c;
  if (coef != NULL)
    memset(coef, 0, g->ncol * sizeof *coef);
  *rank = 0;
  *ss = g->yy;
  if (m == 0)
    return 0;
  for (r = 0; r < m; r++)
    g->d[r] = 1.0 / sqrt(g->A[g->idx[r] * g->ncol + g->idx[r]]);
  {
    gsl_matrix_view Mv = gsl_matrix_submatrix(g->M, 0, 0, m, m);
    gsl_matrix_view Vv = gsl_matrix_submatrix(g->V, 0, 0, m, m);
    gsl_vector_view ev = gsl_vector_subvector(g->eval, 0, m);
    gsl_eigen_symmv_workspace *ws = gsl_eigen_symmv_alloc(m);
    if (ws == NULL)
      return -1;
    for (r = 0; r < m; r++) {
      for (c = 0; c <= r; c++) {
        size_t a = g->idx[r], bb = g->idx[c];
        double x = g->A[a * g->ncol + bb] * g->d[r] * g->d[c];
        gsl_matrix_set(&Mv.matrix, r, c, x);
        gsl_matrix_set(&Mv.matrix, c, r, x);
      }
      g->v[r] = g->b[g->idx[r]] * g->d[r];
    }
    if (gsl_eigen_symmv(&Mv.matrix, &ev.vector, &Vv.matrix, ws) != GSL_SUCCESS) {
      gsl_eigen_symmv_free(ws);
      return -1;
    }
    gsl_eigen_symmv_free(ws);
    for (e = 0; e < m; e++)
      emax = fmax(emax, gsl_vector_get(&ev.vector, e));
    for (e = 0; e < m; e++) {
      double lam = gsl_vector_get(&ev.vector, e), proj = 0.0;
      if (!(lam > PATTERN_RANK_TOL * emax))
        continue;
      (*rank)++;
      for (r = 0; r < m; r++)
        proj += gsl_matrix_get(&Vv.matrix, r, e) * g->v[r];
      fit += proj * proj / lam;
      if (coef != NULL)
        for (r = 0; r < m; r++)
          coef[g->idx[r]] += gsl_matrix_get(&Vv.matrix, r, e) * proj / lam * g->d[r];
    }
  }
  *ss = g->yy - fit;
  if (*ss < 0.0)
    *ss = 0.0;
  return 0;
}

/* The pose's factors f_j[col] of every joint's columns (0 for a column
 * not in the model): offset, slope, harmonics, torque (tau: the pose's nj
 * gravity torques, NULL for none). */
static void pattern_features(const regression *g, size_t nj, const double *q, const double *tau, double *f)
{
  size_t j, col;
  for (j = 0; j < nj; j++) {
    double *fj = &f[j * COLS_PER_JOINT];
    double s1 = sin(q[j]), c1 = cos(q[j]);
    fj[COL_CONST] = 1.0;
    fj[COL_SLOPE] = q[j];
    fj[COL_H1] = s1;
    fj[COL_H2] = c1;
    fj[COL_H3] = sin(2.0 * q[j]);
    fj[COL_H4] = cos(2.0 * q[j]);
    fj[COL_TORQUE] = tau != NULL ? tau[j] : 0.0;
    for (col = 0; col < COLS_PER_JOINT; col++)
      if (!g->active[j * COLS_PER_JOINT + col])
        fj[col] = 0.0;
  }
}

/* Add one pose's rows to the normal equations: A[(j,c),(k,d)] +=
 * S_jk f_j[c] f_k[d] on the lower triangle, b[(j,c)] += f_j[c] t_j. */
static void pose_flush(regression *g, size_t nj, const double *f, const double *S, const double *t)
{
  size_t j, k, c, d, n = g->ncol;
  for (j = 0; j < nj; j++) {
    const double *fj = &f[j * COLS_PER_JOINT];
    for (c = 0; c < COLS_PER_JOINT; c++) {
      size_t r = j * COLS_PER_JOINT + c;
      double *Ar = &g->A[r * n];
      if (fj[c] == 0.0)
        continue;
      for (k = 0; k <= j; k++) {
        const double *fk = &f[k * COLS_PER_JOINT];
        double s = S[j * nj + k] * fj[c];
        size_t dmax = k < j ? COLS_PER_JOINT : c + 1;
        for (d = 0; d < dmax; d++)
          Ar[k * COLS_PER_JOINT + d] += s * fk[d];
      }
      g->b[r] += fj[c] * t[j];
    }
  }
}

static void regression_free(regression *g)
{
  free(g->A);
  free(g->b);
  free(g->active);
  gsl_matrix_free(g->M);
  gsl_matrix_free(g->V);
  gsl_vector_free(g->eval);
  free(g->idx);
  free(g->d);
  free(g->v);
}

/* Free the scratch arrays of twf_residual_pattern (any may be NULL). */
static void scratch_free(twf_pose *prefix, double *J, double *x, double *coef, unsigned char *drop, double *f,
                         double *S, double *t)
{
  free(prefix);
  free(J);
  free(x);
  free(coef);
  free(drop);
  free(f);
  free(S);
  free(t);
}

static twf_status fail_nomem(regression *g, twf_pattern_result *out, twf_error *err)
{
  regression_free(g);
  twf_pattern_result_clear(out);
  return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory in the residual pattern test");
}

twf_status twf_residual_pattern(const twf_model *m, const twf_pose *base_in_instrument,
                                const twf_campaign *c, const double *pos_err,
                                const unsigned char *use, const twf_pattern_options *opt,
                                twf_pattern_result *out, twf_error *err)
{
  twf_pattern_options o = opt != NULL ? *opt : twf_pattern_default_options();
  regression g;
  size_t nj, i, j, n_avail = 0, stride, seen = 0, last_pose = (size_t)-1, rank_full = 0;
  twf_pose *prefix = NULL, flange;
  double *J = NULL, *x = NULL, *coef = NULL, *f = NULL, *S = NULL, *t = NULL, ss_full = 0.0;
  const double *q = NULL;
  size_t pose_rows = 0;
  unsigned char *drop = NULL;
  memset(&g, 0, sizeof g);
  if (out != NULL)
    memset(out, 0, sizeof *out);
  if (m == NULL || base_in_instrument == NULL || c == NULL || pos_err == NULL || out == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "twf_residual_pattern: a required argument is NULL");
  if (c->n_joints != m->n_joints)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "the campaign has %zu joint values per pose, the model %zu joints", c->n_joints,
                         m->n_joints);
  if (!(o.alpha > 0.0 && o.alpha < 1.0) || !(o.min_explained >= 0.0 && o.min_explained < 1.0) ||
      !(o.min_explained_rms_m >= 0.0 && isfinite(o.min_explained_rms_m)))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "residual pattern: alpha must lie in (0, 1), min_explained in [0, 1) "
                         "and min_explained_rms_m be finite and >= 0");
  for (i = 0; i < c->n_meas; i++) {
    const twf_measurement *ms = &c->meas[i];
    if (use != NULL && !use[i])
      continue;
    if (ms->pose >= c->n_poses || ms->target >= m->n_targets || !m->targets[ms->target].offset_known)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, ms->line, 0, NULL,
                           "residual pattern: measurement %zu has no pose, target or target offset", i);
    n_avail++;
  }
  nj = m->n_joints;
  g.ncol = nj * COLS_PER_JOINT;
  g.A = calloc(g.ncol * g.ncol + 1, sizeof *g.A);
  g.b = calloc(g.ncol + 1, sizeof *g.b);
  g.active = calloc(g.ncol + 1, 1);
  g.M = gsl_matrix_alloc(g.ncol, g.ncol);
  g.V = gsl_matrix_alloc(g.ncol, g.ncol);
  g.eval = gsl_vector_alloc(g.ncol);
  g.idx = malloc(g.ncol * sizeof *g.idx);
  g.d = malloc(g.ncol * sizeof *g.d);
  g.v = malloc(g.ncol * sizeof *g.v);
  prefix = malloc((nj + 1) * sizeof *prefix);
  J = malloc(6 * nj * sizeof *J);
  x = malloc(3 * g.ncol * sizeof *x);
  coef = malloc(g.ncol * sizeof *coef);
  drop = calloc(g.ncol, 1);
  f = malloc(g.ncol * sizeof *f);
  S = malloc(nj * nj * sizeof *S);
  t = malloc(nj * sizeof *t);
  out->tests = calloc(nj * TWF_PATTERN_NKINDS + 1, sizeof *out->tests);
  if (g.A == NULL || g.b == NULL || g.active == NULL || g.M == NULL || g.V == NULL || g.eval == NULL ||
      g.idx == NULL || g.d == NULL || g.v == NULL || prefix == NULL || J == NULL || x == NULL || coef == NULL ||
      drop == NULL || f == NULL || S == NULL || t == NULL || out->tests == NULL) {
    scratch_free(prefix, J, x, coef, drop, f, S, t);
    return fail_nomem(&g, out, err);
  }
  out->n_tests = nj * TWF_PATTERN_NKINDS;
  for (j = 0; j < nj; j++) {
    int rev = m->joints[j].type == TWF_JOINT_REVOLUTE;
    unsigned char *act = &g.active[j * COLS_PER_JOINT];
    act[COL_CONST] = 1;
    act[COL_SLOPE] = !(o.scale_fitted != NULL && o.scale_fitted[j]);
    act[COL_H1] = act[COL_H2] = act[COL_H3] = act[COL_H4] = (unsigned char)rev;
    act[COL_TORQUE] = (unsigned char)(rev && o.torque != NULL);
  }
  stride = n_avail > TWF_PATTERN_MAX_MEAS ? (n_avail + TWF_PATTERN_MAX_MEAS - 1) / TWF_PATTERN_MAX_MEAS : 1;
  /* The regression row of coordinate a of a measurement at pose p is
   * x[(j, col)] = v_j[a] f_j[col], with v_j the point's velocity per unit
   * of q_j and f_j (offset, slope, harmonics, torque) a function of the
   * pose alone. So the rows of one pose add to the normal matrix
   * sum_k S_jk f_j f_k^T, S_jk = sum over its rows of v_j . v_k: nj^2
   * products per row instead of (7 nj)^2, the outer products once per pose. */
  for (i = 0; i <= c->n_meas; i++) {
    const twf_measurement *ms = i < c->n_meas ? &c->meas[i] : NULL;
    size_t k;
    if (ms != NULL && use != NULL && !use[i])
      continue;
    if (ms != NULL && seen++ % stride != 0)
      continue;
    if (ms == NULL || ms->pose != last_pose) {
      if (last_pose != (size_t)-1 && pose_rows > 0)
        pose_flush(&g, nj, f, S, t);
      if (ms == NULL)
        break;
      last_pose = ms->pose;
      q = &c->q[ms->pose * nj];
      twf_model_fk_load(m, q, twf_campaign_payload(c, ms->pose), prefix, &flange);
      twf_model_jacobian_spatial(m, prefix, J);
      pattern_features(&g, nj, q, o.torque != NULL ? &o.torque[ms->pose * nj] : NULL, f);
      memset(S, 0, nj * nj * sizeof *S);
      memset(t, 0, nj * sizeof *t);
      pose_rows = 0;
    }
    {
      double pt[3];
      const double *y = &pos_err[3 * i];
      twf_pose_apply(&flange, m->targets[ms->target].offset, pt);
      for (j = 0; j < nj; j++) {
        /* velocity of the point per unit of q_j: base frame, then instrument frame */
        double w[3] = { J[0 * nj + j], J[1 * nj + j], J[2 * nj + j] }, vb[3];
        double *vi = &x[3 * j];
        twf_v3_cross(w, pt, vb);
        vb[0] += J[3 * nj + j];
        vb[1] += J[4 * nj + j];
        vb[2] += J[5 * nj + j];
        twf_pose_rotate(&base_in_instrument[twf_campaign_pose_station(c, ms->pose)], vb, vi);
      }
      for (j = 0; j < nj; j++) {
        const double *vj = &x[3 * j];
        for (k = 0; k <= j; k++) {
          const double *vk = &x[3 * k];
          S[j * nj + k] += vj[0] * vk[0] + vj[1] * vk[1] + vj[2] * vk[2];
        }
        t[j] += vj[0] * y[0] + vj[1] * y[1] + vj[2] * y[2];
      }
      g.yy += y[0] * y[0] + y[1] * y[1] + y[2] * y[2];
    }
    pose_rows++;
    g.n_rows += 3;
    out->n_used++;
  }
  for (i = 0; i < g.ncol; i++)
    for (j = i + 1; j < g.ncol; j++)
      g.A[i * g.ncol + j] = g.A[j * g.ncol + i];
  if (subset_fit(&g, NULL, &ss_full, &rank_full, coef) != 0) {
    scratch_free(prefix, J, x, coef, drop, f, S, t);
    return fail_nomem(&g, out, err);
  }
  out->rank = rank_full;
  for (j = 0; j < nj; j++) {
    size_t kind, col, rank_none = 0;
    double ss_none = 0.0;
    /* the model without any pattern of joint j (its offset column stays) */
    for (col = COL_SLOPE; col < COLS_PER_JOINT; col++)
      drop[j * COLS_PER_JOINT + col] = 1;
    if (subset_fit(&g, drop, &ss_none, &rank_none, NULL) != 0)
      goto nomem;
    for (kind = 0; kind < TWF_PATTERN_NKINDS; kind++) {
      twf_pattern_test *t = &out->tests[j * TWF_PATTERN_NKINDS + kind];
      size_t first, count, rank_f = 0;
      double ss_f = 0.0;
      family_cols((twf_pattern_kind)kind, &first, &count);
      t->joint = j;
      t->kind = (twf_pattern_kind)kind;
      t->n = out->n_used;
      t->f = t->p_value = t->explained_rms_m = t->explained = NAN;
      t->residual_rms_m = out->n_used > 0 ? sqrt(g.yy / (double)out->n_used) : NAN;
      if (m->joints[j].type != TWF_JOINT_REVOLUTE && kind != TWF_PATTERN_SLOPE)
        t->skip = TWF_PATTERN_NOT_APPLICABLE;
      else if (kind == TWF_PATTERN_SLOPE && o.scale_fitted != NULL && o.scale_fitted[j])
        t->skip = TWF_PATTERN_FITTED;
      else if (kind == TWF_PATTERN_TORQUE && o.torque == NULL)
        t->skip = TWF_PATTERN_NO_TORQUE;
      else if (g.n_rows < 2 * rank_full + 2)
        t->skip = TWF_PATTERN_TOO_FEW;
      if (t->skip != TWF_PATTERN_TESTED)
        continue;
      /* this family alone for joint j, every other joint's patterns in */
      for (col = 0; col < count; col++)
        drop[j * COLS_PER_JOINT + first + col] = 0;
      if (subset_fit(&g, drop, &ss_f, &rank_f, coef) != 0)
        goto nomem;
      for (col = 0; col < count; col++) {
        drop[j * COLS_PER_JOINT + first + col] = 1;
        t->coef[col] = coef[j * COLS_PER_JOINT + first + col];
      }
      if (rank_f <= rank_none) {
        t->skip = TWF_PATTERN_DEGENERATE;
        continue;
      }
      if (ss_f > ss_none)
        ss_f = ss_none;
      t->k = rank_f - rank_none;
      t->explained_rms_m = sqrt((ss_none - ss_f) / (double)out->n_used);
      t->explained = g.yy > 0.0 ? (ss_none - ss_f) / g.yy : 0.0;
      if (ss_full <= 0.0) {
        /* an exact pattern with no noise at all */
        t->f = INFINITY;
        t->p_value = 0.0;
      } else {
        /* the noise variance from the full regression: the same
         * denominator for every family */
        size_t dof = g.n_rows - rank_full;
        t->f = ((ss_none - ss_f) / (double)t->k) / (ss_full / (double)dof);
        t->p_value = gsl_cdf_fdist_Q(t->f, (double)t->k, (double)dof);
      }
      out->n_tested++;
    }
    for (col = COL_SLOPE; col < COLS_PER_JOINT; col++)
      drop[j * COLS_PER_JOINT + col] = 0;
  }
  out->alpha = o.alpha;
  out->min_explained = o.min_explained;
  out->min_explained_rms_m = o.min_explained_rms_m;
  out->p_threshold = out->n_tested > 0 ? o.alpha / (double)out->n_tested : o.alpha;
  for (i = 0; i < out->n_tests; i++) {
    twf_pattern_test *t = &out->tests[i];
    t->significant = t->skip == TWF_PATTERN_TESTED && t->p_value < out->p_threshold &&
                     t->explained >= o.min_explained &&
                     t->explained_rms_m >= o.min_explained_rms_m;
    out->n_significant += (size_t)t->significant;
  }
  scratch_free(prefix, J, x, coef, drop, f, S, t);
  regression_free(&g);
  return TWF_OK;
nomem:
  scratch_free(prefix, J, x, coef, drop, f, S, t);
  return fail_nomem(&g, out, err);
}
