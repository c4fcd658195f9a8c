/* observe.c: the observability indices of a pose set from the singular
 * values of its scaled, weighted Jacobian (Sun and Hollerbach 2008 compare
 * them): O1 of Borm and Menq 1991, the inverse condition number, the
 * minimum singular value, and the noise amplification index of Nahvi and
 * Hollerbach 1996. */
#include "internal.h"

void twf_observability_indices(const double *sv, size_t n, size_t m, double out[4])
{
  double logsum = 0.0, smin, smax;
  size_t k;
  out[0] = out[1] = out[2] = out[3] = 0.0;
  if (n == 0 || sv == NULL)
    return;
  smax = sv[0];
  smin = sv[n - 1];
  if (!(smin > 0) || !(smax > 0))
    return;
  /* the geometric mean through logarithms: the product of dozens of
   * singular values of 1e3 to 1e6 overflows */
  for (k = 0; k < n; k++)
    logsum += log(sv[k]);
  out[0] = exp(logsum / (double)n) / sqrt((double)(m ? m : 1));
  out[1] = smin / smax;
  out[2] = smin;
  out[3] = smin * smin / smax;
}
