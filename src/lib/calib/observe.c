/* observe.c: the observability indices of a pose set from the singular
 * values of its scaled, weighted Jacobian (Sun and Hollerbach 2008 compare
 * them): O1 of Borm and Menq 1991, the inverse condition number, the
 * minimum singular value, and the noise amplification index of Nahvi and
 * Hollerbach 1996. */
#include "internal.h"

void twf_observability_indices(const double *sv, size_t n, size_t m, twf_observability *out)
{
  double logsum = 0.0, smin, smax;
  size_t k;
  out->o1 = out->o2 = out->o3 = out->o4 = 0.0;
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
  out->o1 = exp(logsum / (double)n) / sqrt((double)(m ? m : 1));
  out->o2 = smin / smax;
  out->o3 = smin;
  out->o4 = smin * smin / smax;
}
