/* ident.c: which parameters a pose set determines, and how well: the
 * redundancy walk, the explanation of fixed parameters, covariance and
 * singular values, on the normal matrix or its triangular factor (DEVELOPERS.md, "The maths"). */
#include "ident.h"

#include <gsl/gsl_eigen.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_matrix.h>
#include <gsl/gsl_sort_vector.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

int twf_ident_walk(const double *A, size_t p, const size_t *order,
                   size_t n_order, double tol, unsigned char *keep,
                   double *rel_out)
{
  /* L is the Cholesky factor of A over the kept columns, in walk order:
   * for a candidate j, z = L^-1 A_Kj and A_jj - z.z is the squared length
   * of the part of column j orthogonal to the kept ones. */
  double *L = calloc(p ? p * p : 1, sizeof *L);
  double *z = calloc(p ? p : 1, sizeof *z);
  size_t *kept = calloc(p ? p : 1, sizeof *kept);
  size_t nk = 0, t, a, b;
  if (L == NULL || z == NULL || kept == NULL) {
    free(L); free(z); free(kept);
    return -1;
  }
  memset(keep, 0, p);
  for (t = 0; t < n_order; t++) {
    size_t j = order[t];
    double ajj = A[j * p + j], r2, rel;
    for (a = 0; a < nk; a++) {
      double s = A[kept[a] * p + j];
      for (b = 0; b < a; b++)
        s -= L[a * p + b] * z[b];
      z[a] = s / L[a * p + a];
    }
    r2 = ajj;
    for (a = 0; a < nk; a++)
      r2 -= z[a] * z[a];
    rel = ajj > 0 && r2 > 0 ? sqrt(r2 / ajj) : 0.0;
    if (rel_out != NULL)
      rel_out[j] = rel;
    if (ajj > 0 && rel >= tol) {
      for (a = 0; a < nk; a++)
        L[nk * p + a] = z[a];
      L[nk * p + nk] = sqrt(r2);
      kept[nk++] = j;
      keep[j] = 1;
    }
  }
  free(L); free(z); free(kept);
  return 0;
}

/* Gather the kept block of A into a GSL matrix; idx receives the map. */
static gsl_matrix *kept_block(const double *A, size_t p, const unsigned char *keep,
                              size_t *idx, size_t *nk_out)
{
  size_t nk = 0, a, b;
  gsl_matrix *K;
  for (a = 0; a < p; a++)
    if (keep[a])
      idx[nk++] = a;
  *nk_out = nk;
  if (nk == 0)
    return NULL;
  K = gsl_matrix_alloc(nk, nk);
  if (K == NULL)
    return NULL;
  for (a = 0; a < nk; a++)
    for (b = 0; b < nk; b++)
      gsl_matrix_set(K, a, b, A[idx[a] * p + idx[b]]);
  return K;
}

size_t twf_ident_explain(const double *A, size_t p, const unsigned char *keep,
                         size_t j, size_t max_out, size_t *idx_out, double *coef_out)
{
  size_t *idx = malloc((p ? p : 1) * sizeof *idx), nk, a, n = 0;
  gsl_matrix *K = idx ? kept_block(A, p, keep, idx, &nk) : NULL;
  gsl_vector *rhs = NULL, *c = NULL;
  if (K == NULL || gsl_linalg_cholesky_decomp1(K) != 0)
    goto done;
  rhs = gsl_vector_alloc(nk);
  c = gsl_vector_alloc(nk);
  if (rhs == NULL || c == NULL)
    goto done;
  for (a = 0; a < nk; a++)
    gsl_vector_set(rhs, a, A[idx[a] * p + j]);
  if (gsl_linalg_cholesky_solve(K, rhs, c) != 0)
    goto done;
  /* a simple selection of the largest |c|. Dependencies of a model are
   * often exact sums (a base offset against a joint offset: +1, -1), so
   * several coefficients tie and rounding alone would pick among them:
   * coefficients within TIE_REL of each other are a tie, taken in the
   * order of the parameter index (idx is ascending, so the first of a tie
   * stays best). TIE_REL is far above the solve's rounding and far below
   * the 3 digits a report prints. */
  for (n = 0; n < max_out && n < nk; n++) {
    const double TIE_REL = 1e-6;
    size_t best = nk;
    double bv = 0.0;
    for (a = 0; a < nk; a++) {
      double v = fabs(gsl_vector_get(c, a));
      size_t k;
      int used = 0;
      for (k = 0; k < n; k++)
        if (idx_out[k] == idx[a])
          used = 1;
      if (!used && (best == nk ? v > 0.0 : v > bv + TIE_REL * bv)) {
        bv = v;
        best = a;
      }
    }
    if (best == nk || bv < 1e-9)
      break;
    idx_out[n] = idx[best];
    coef_out[n] = gsl_vector_get(c, best);
  }
done:
  gsl_vector_free(rhs);
  gsl_vector_free(c);
  if (K != NULL)
    gsl_matrix_free(K);
  free(idx);
  return n;
}

int twf_ident_inverse(const double *A, size_t p, const unsigned char *keep, double *cov)
{
  size_t *idx = malloc((p ? p : 1) * sizeof *idx), nk = 0, a, b;
  gsl_matrix *K = idx ? kept_block(A, p, keep, idx, &nk) : NULL;
  int rc = -1;
  memset(cov, 0, p * p * sizeof *cov);
  if (idx != NULL && nk == 0) {
    rc = 0;
    goto done;
  }
  if (K == NULL || gsl_linalg_cholesky_decomp1(K) != 0 || gsl_linalg_cholesky_invert(K) != 0)
    goto done;
  for (a = 0; a < nk; a++)
    for (b = 0; b < nk; b++)
      cov[idx[a] * p + idx[b]] = gsl_matrix_get(K, a, b);
  rc = 0;
done:
  if (K != NULL)
    gsl_matrix_free(K);
  free(idx);
  return rc;
}

size_t twf_ident_singular_values(const double *A, size_t p,
                                 const unsigned char *keep, double *sv)
{
  size_t *idx = malloc((p ? p : 1) * sizeof *idx), nk = 0, a;
  gsl_matrix *K = idx ? kept_block(A, p, keep, idx, &nk) : NULL;
  gsl_vector *ev = NULL;
  gsl_eigen_symm_workspace *ws = NULL;
  size_t out = 0;
  if (K == NULL)
    goto done;
  ev = gsl_vector_alloc(nk);
  ws = gsl_eigen_symm_alloc(nk);
  if (ev == NULL || ws == NULL || gsl_eigen_symm(K, ev, ws) != 0)
    goto done;
  gsl_sort_vector(ev);
  for (a = 0; a < nk; a++) {
    double e = gsl_vector_get(ev, nk - 1 - a);
    sv[a] = e > 0 ? sqrt(e) : 0.0;
  }
  out = nk;
done:
  if (ws != NULL)
    gsl_eigen_symm_free(ws);
  gsl_vector_free(ev);
  if (K != NULL)
    gsl_matrix_free(K);
  free(idx);
  return out;
}

void twf_ident_qr_add_row(double *R, size_t p, double *row)
{
  size_t k, j;
  for (k = 0; k < p; k++) {
    double a = R[k * p + k], b = row[k], h, c, sn;
    if (b == 0.0)
      continue;
    h = sqrt(a * a + b * b); /* values are moderate here: no need for hypot's care */
    c = a / h;
    sn = b / h;
    R[k * p + k] = h;
    for (j = k + 1; j < p; j++) {
      double x = R[k * p + j], y = row[j];
      R[k * p + j] = c * x + sn * y;
      row[j] = -sn * x + c * y;
    }
  }
}

/* x . y over n entries with two partial sums (even and odd entries),
 * added at the end, and y -= d x: written as two-lane vector loops where
 * GCC's vector extension is there, as the same scalar operations
 * elsewhere (the same bits either way). */
#if defined(__GNUC__)
typedef double v2d __attribute__((vector_size(16)));
static inline v2d ld2(const double *p) { v2d v; memcpy(&v, p, sizeof v); return v; }
static inline void st2(double *p, v2d v) { memcpy(p, &v, sizeof v); }
#endif

static inline double dot2(const double *x, const double *y, size_t n)
{
  double d0 = 0.0, d1 = 0.0;
  size_t i = 0;
#if defined(__GNUC__)
  v2d acc = { 0.0, 0.0 };
  for (; i + 2 <= n; i += 2)
    acc += ld2(x + i) * ld2(y + i);
  d0 = acc[0];
  d1 = acc[1];
#else
  for (; i + 2 <= n; i += 2) {
    d0 += x[i] * y[i];
    d1 += x[i + 1] * y[i + 1];
  }
#endif
  if (i < n)
    d0 += x[i] * y[i];
  return d0 + d1;
}

static inline void axpy2(double d, const double *x, double *y, size_t n)
{
  size_t i = 0;
#if defined(__GNUC__)
  for (; i + 2 <= n; i += 2)
    st2(y + i, ld2(y + i) - d * ld2(x + i));
#endif
  for (; i < n; i++)
    y[i] -= d * x[i];
}

/* dot2(x, y0, n) and dot2(x, y1, n) in one loop: two independent chains of
 * additions (the latency of one add no longer paces the loop), each the
 * operations of dot2 in its order, so the same bits. */
static inline void dot2x2(const double *x, const double *y0, const double *y1, size_t n, double *out0, double *out1)
{
  double a0 = 0.0, a1 = 0.0, b0 = 0.0, b1 = 0.0;
  size_t i = 0;
#if defined(__GNUC__)
  v2d acc0 = { 0.0, 0.0 }, acc1 = { 0.0, 0.0 };
  for (; i + 2 <= n; i += 2) {
    v2d xv = ld2(x + i);
    acc0 += xv * ld2(y0 + i);
    acc1 += xv * ld2(y1 + i);
  }
  a0 = acc0[0];
  a1 = acc0[1];
  b0 = acc1[0];
  b1 = acc1[1];
#else
  for (; i + 2 <= n; i += 2) {
    a0 += x[i] * y0[i];
    a1 += x[i + 1] * y0[i + 1];
    b0 += x[i] * y1[i];
    b1 += x[i + 1] * y1[i + 1];
  }
#endif
  if (i < n) {
    a0 += x[i] * y0[i];
    b0 += x[i] * y1[i];
  }
  *out0 = a0 + a1;
  *out1 = b0 + b1;
}

void twf_ident_qr_add_block(double *R, size_t p, double *B, size_t m, int tri)
{
  size_t k, j, i;
  for (k = 0; k < p; k++) {
    size_t mk = tri ? (k + 1 < m ? k + 1 : m) : m;
    double *x = B + k * m, alpha = R[k * p + k], sigma, norm, beta, tau, scale;
    sigma = dot2(x, x, mk);
    if (sigma == 0.0)
      continue;
    /* H = I - tau v v^T with v = (1, x / (alpha - beta)) maps (alpha, x)
     * onto (beta, 0); beta takes the sign opposite to alpha so that
     * alpha - beta does not cancel (LAPACK's dlarfg) */
    norm = sqrt(alpha * alpha + sigma);
    beta = alpha > 0.0 ? -norm : norm;
    tau = (beta - alpha) / beta;
    scale = 1.0 / (alpha - beta);
    for (i = 0; i < mk; i++)
      x[i] *= scale;
    R[k * p + k] = beta;
    for (j = k + 1; j + 1 < p; j += 2) {
      double *y0 = B + j * m, *y1 = y0 + m, e0, e1, d0, d1;
      dot2x2(x, y0, y1, mk, &e0, &e1);
      d0 = (R[k * p + j] + e0) * tau;
      d1 = (R[k * p + j + 1] + e1) * tau;
      R[k * p + j] -= d0;
      R[k * p + j + 1] -= d1;
      axpy2(d0, x, y0, mk);
      axpy2(d1, x, y1, mk);
    }
    for (; j < p; j++) {
      double *y = B + j * m, d = R[k * p + j] + dot2(x, y, mk);
      d *= tau;
      R[k * p + j] -= d;
      axpy2(d, x, y, mk);
    }
  }
}

int twf_ident_walk_r(const double *R, size_t p, const double *scale, const size_t *order,
                     size_t n_order, double tol, unsigned char *keep, double *rel_out)
{
  double *Q = calloc(p ? p * p : 1, sizeof *Q); /* kept orthonormal columns, one per row of Q */
  double *v = calloc(p ? p : 1, sizeof *v);
  size_t nk = 0, t, a, r;
  int pass;
  if (Q == NULL || v == NULL) {
    free(Q);
    free(v);
    return -1;
  }
  memset(keep, 0, p);
  for (t = 0; t < n_order; t++) {
    size_t j = order[t];
    double norm0 = 0.0, norm = 0.0, rel;
    for (r = 0; r < p; r++) {
      v[r] = R[r * p + j] * (scale ? scale[j] : 1.0);
      norm0 += v[r] * v[r];
    }
    norm0 = sqrt(norm0);
    for (pass = 0; pass < 2; pass++)
      for (a = 0; a < nk; a++) {
        double d = 0.0;
        for (r = 0; r < p; r++)
          d += Q[a * p + r] * v[r];
        for (r = 0; r < p; r++)
          v[r] -= d * Q[a * p + r];
      }
    for (r = 0; r < p; r++)
      norm += v[r] * v[r];
    norm = sqrt(norm);
    rel = norm0 > 0 ? norm / norm0 : 0.0;
    if (rel_out != NULL)
      rel_out[j] = rel;
    if (norm0 > 0 && rel >= tol) {
      for (r = 0; r < p; r++)
        Q[nk * p + r] = v[r] / norm;
      nk++;
      keep[j] = 1;
    }
  }
  free(Q);
  free(v);
  return 0;
}

void twf_ident_normal_from_r(const double *R, size_t p, const double *scale, double *A)
{
  size_t a, b, k;
  for (a = 0; a < p; a++)
    for (b = a; b < p; b++) {
      double s = 0.0;
      for (k = 0; k <= (a < b ? a : b); k++)
        s += R[k * p + a] * R[k * p + b];
      if (scale != NULL)
        s *= scale[a] * scale[b];
      A[a * p + b] = A[b * p + a] = s;
    }
}
