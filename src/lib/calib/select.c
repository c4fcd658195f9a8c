/* select.c: order statistics in linear time (see select.h). */
#include "select.h"

#include <math.h>

static void swap(double *v, size_t a, size_t b)
{
  double t = v[a];
  v[a] = v[b];
  v[b] = t;
}

/* Median of three values. */
static double med3(double a, double b, double c)
{
  if (a < b)
    return b < c ? b : (a < c ? c : a);
  return a < c ? a : (b < c ? c : b);
}

/* Insertion sort of v[lo..hi] (small ranges). */
static void small_sort(double *v, size_t lo, size_t hi)
{
  size_t i, j;
  for (i = lo + 1; i <= hi; i++) {
    double x = v[i];
    for (j = i; j > lo && v[j - 1] > x; j--)
      v[j] = v[j - 1];
    v[j] = x;
  }
}

static double select_range(double *v, size_t lo, size_t hi, size_t k, int budget);

/* The median of medians of groups of five of v[lo..hi]: a pivot with at
 * least 3/10 of the range on either side. The medians are gathered at the
 * front of the range. */
static double median_of_medians(double *v, size_t lo, size_t hi)
{
  size_t n = hi - lo + 1, g, m = 0;
  if (n <= 5) {
    small_sort(v, lo, hi);
    return v[lo + (n - 1) / 2];
  }
  for (g = lo; g <= hi; g += 5) {
    size_t e = g + 4 <= hi ? g + 4 : hi;
    small_sort(v, g, e);
    swap(v, lo + m, g + (e - g) / 2);
    m++;
  }
  return select_range(v, lo, lo + m - 1, lo + (m - 1) / 2, 0);
}

/* k-th smallest of v[lo..hi] (lo <= k <= hi); budget: unbalanced
 * partitions allowed before the median of medians takes over (0: always
 * use it). */
static double select_range(double *v, size_t lo, size_t hi, size_t k, int budget)
{
  while (hi > lo) {
    size_t n = hi - lo + 1, lt, gt, i;
    double pivot;
    if (n <= 16) {
      small_sort(v, lo, hi);
      return v[k];
    }
    if (budget > 0)
      pivot = med3(v[lo], v[lo + n / 2], v[hi]);
    else
      pivot = median_of_medians(v, lo, hi);
    /* three-way partition (Dijkstra): v[lo..lt) < pivot, v[lt..gt] ==
     * pivot, v(gt..hi] > pivot */
    lt = lo;
    gt = hi;
    i = lo;
    while (i <= gt) {
      if (v[i] < pivot) {
        swap(v, i++, lt++);
      } else if (v[i] > pivot) {
        swap(v, i, gt);
        if (gt == 0)
          break;
        gt--;
      } else {
        i++;
      }
    }
    if (k < lt) {
      hi = lt - 1;
    } else if (k > gt) {
      lo = gt + 1;
    } else {
      return pivot;
    }
    /* a partition that kept more than 3/4 of the range is unbalanced */
    if (budget > 0 && hi - lo + 1 > 3 * n / 4)
      budget--;
  }
  return v[k];
}

double twf_select_kth(double *v, size_t n, size_t k)
{
  int budget = 2;
  size_t m = n;
  while (m > 1) {
    budget += 2;
    m >>= 1;
  }
  return select_range(v, 0, n - 1, k, budget);
}

/* Smallest of v[lo..hi). */
static double min_of(const double *v, size_t lo, size_t hi)
{
  double m = v[lo];
  size_t i;
  for (i = lo + 1; i < hi; i++)
    if (v[i] < m)
      m = v[i];
  return m;
}

double twf_select_median(double *v, size_t n)
{
  double hi;
  if (n == 0)
    return 0.0;
  hi = twf_select_kth(v, n, n / 2);
  if (n % 2)
    return hi;
  /* v[0..n/2) holds the lower half: its largest is the other middle value */
  {
    double lo = v[0];
    size_t i;
    for (i = 1; i < n / 2; i++)
      if (v[i] > lo)
        lo = v[i];
    return 0.5 * (lo + hi);
  }
}

double twf_select_quantile(double *v, size_t n, double p)
{
  double h, f, a, b;
  size_t lo;
  if (v == NULL || n == 0 || !(p >= 0.0 && p <= 1.0))
    return NAN;
  h = (double)(n - 1) * p;
  f = floor(h);
  lo = (size_t)f;
  if (lo + 1 >= n)
    return twf_select_kth(v, n, n - 1);
  a = twf_select_kth(v, n, lo);
  b = min_of(v, lo + 1, n);
  return a + (h - f) * (b - a);
}
