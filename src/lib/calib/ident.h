/* ident.h: identifiability on scaled normal matrices (internal). Every
 * function here works on a symmetric p x p matrix A = D J^T W J D (the
 * normal matrix of the scaled, weighted Jacobian), so that the assembly can
 * stream measurement by measurement and nothing is quadratic in their
 * number. */
#ifndef TWF_IDENT_H
#define TWF_IDENT_H

#include <stddef.h>

/* Walk the columns in order[0..n_order) and keep a column when the part of
 * it orthogonal to the columns kept so far is at least tol of its length
 * (a Gram-Schmidt walk done on A through an incremental Cholesky factor).
 * keep[p] receives 1 for kept, 0 otherwise (columns not in order stay 0).
 * rel_out[p] (may be NULL) receives each walked column's relative
 * independent part. Returns 0, or -1 when out of memory. */
int twf_ident_walk(const double *A, size_t p, const size_t *order,
                   size_t n_order, double tol, unsigned char *keep,
                   double *rel_out);

/* Least-squares coefficients of column j on the kept columns: c solves
 * A_KK c = A_Kj. idx/coef receive the up to max_out kept columns with the
 * largest |c| (coefficients in scaled units), largest first; |c| within
 * 1e-6 relative of each other tie and go by column index, so that exact
 * dependencies (sums with coefficients +-1) list the same columns in the
 * same order whatever the rounding. Returns how many. */
size_t twf_ident_explain(const double *A, size_t p, const unsigned char *keep,
                         size_t j, size_t max_out, size_t *idx, double *coef);

/* Inverse of A restricted to the kept columns, written into cov (p x p,
 * zero outside the kept block). Returns 0, or -1 when A_KK is not positive
 * definite or memory is short. */
int twf_ident_inverse(const double *A, size_t p, const unsigned char *keep,
                      double *cov);

/* Singular values of the scaled Jacobian of the kept columns (square roots
 * of the eigenvalues of A_KK), descending, into sv[n_kept]. Returns the
 * count, or 0 on failure. */
size_t twf_ident_singular_values(const double *A, size_t p,
                                 const unsigned char *keep, double *sv);

/* Stream one row into the upper-triangular p x p factor R (row-major) so
 * that R^T R gains row row^T: Givens rotations, O(p^2), row is destroyed.
 * Working on R instead of the normal matrix keeps the redundancy walk's
 * margins at rounding level (1e-14) rather than at its square root. */
void twf_ident_qr_add_row(double *R, size_t p, double *row);

/* Stream a block of m rows into the upper-triangular p x p factor R
 * (row-major) so that R^T R gains B^T B: one Householder reflection per
 * column over the stacked [R; B] (Golub and Van Loan, "Matrix
 * Computations", 5.2, the structured update of a triangular factor). B is
 * column-major (column j at B[j m]) and is destroyed. tri: B is itself
 * upper triangular (column j has rows 0..j only, as a factor of another
 * block of rows), which the reflections keep. Same R^T R as m calls of
 * twf_ident_qr_add_row, at two thirds of the work and in contiguous
 * loops; the diagonal of R may come out negative (R^T R does not care). */
void twf_ident_qr_add_block(double *R, size_t p, double *B, size_t m, int tri);

/* The walk of twf_ident_walk on the columns of R D (D = diag(scale), NULL
 * for none): modified Gram-Schmidt with one re-orthogonalisation. Same
 * outputs. Returns 0, or -1 when out of memory. */
int twf_ident_walk_r(const double *R, size_t p, const double *scale, const size_t *order,
                     size_t n_order, double tol, unsigned char *keep, double *rel_out);

/* A = D R^T R D (p x p, full), the scaled normal matrix of a factor. */
void twf_ident_normal_from_r(const double *R, size_t p, const double *scale, double *A);

#endif
