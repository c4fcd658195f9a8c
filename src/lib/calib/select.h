/* select.h: order statistics by selection (internal). The robust scale of
 * the outlier screen needs two medians of every residual component and the
 * accuracy figures a 95th percentile: a full sort costs O(n log n) where
 * selection costs O(n). */
#ifndef TWF_SELECT_H
#define TWF_SELECT_H

#include <stddef.h>

/* The k-th smallest of v[0..n) (k < n, 0-based; no NaN). v is permuted so
 * that v[0..k) <= v[k] <= v(k..n): the value a sort would put at k.
 * Introselect: quickselect with a median-of-three pivot and a three-way
 * partition (ties cost nothing), falling back to the median of medians
 * (Blum, Floyd, Pratt, Rivest and Tarjan 1973) when the partitions stay
 * unbalanced, so the worst case is linear too. */
double twf_select_kth(double *v, size_t n, size_t k);

/* The median of v[0..n) (0 for n = 0), the mean of the two middle values
 * for even n: bit for bit what sorting gives. v is permuted. */
double twf_select_median(double *v, size_t n);

/* The p quantile of v[0..n) by Hyndman and Fan's type 7 (linear between
 * the order statistics around (n - 1) p), as twf_accuracy_percentile of the
 * sorted values; NaN for n = 0 or p outside [0, 1]. v is permuted. */
double twf_select_quantile(double *v, size_t n, double p);

#endif
