/* robust.c: the gross-error screen (DEVELOPERS.md, "The maths"). The
 * scale is 1.4826 MAD of the weighted residual components (the factor makes
 * it the standard deviation for normal noise), so that a few gross errors
 * cannot inflate it as they inflate the RMS. */
#include "robust.h"
#include "select.h"

#include <stdlib.h>

/* The median by selection (linear time; the same value as sorting). */
static double median_of(double *v, size_t n)
{
  return twf_select_median(v, n);
}

/* The robust scales of the position components (1.4826 MAD) and, for 6-D
 * rows, of the rotation error (its median over 1.5382, the median of a chi
 * distribution with 3 degrees of freedom), both in weighted units, from the
 * fit rows' residuals pos and rot. comp and rs are workspaces of 3 n_meas
 * and n_meas. */
static void robust_scales(const twf_lsq_problem *pr, const double *pos, const double *rot,
                          double *comp, double *rs, double *s, double *s_rot)
{
  const twf_campaign *c = pr->c;
  size_t i, n = 0, nr = 0;
  double med;
  for (i = 0; i < c->n_meas; i++) {
    int k;
    if (!pr->use[i])
      continue;
    for (k = 0; k < 3; k++)
      comp[n++] = pos[3 * i + (size_t)k] * pr->inv_sigma[i];
    if (c->meas[i].has_orientation)
      rs[nr++] = rot[i] * pr->inv_sigma_rot;
  }
  med = median_of(comp, n);
  for (i = 0; i < n; i++)
    comp[i] = fabs(comp[i] - med);
  *s = 1.4826 * median_of(comp, n);
  /* floor the scales at 1 um (and 1 urad): below any instrument's noise, so
   * that a noise-free campaign flags no rounding-level "outliers" (common
   * practice, no source) */
  if (!(*s > 1e-6 / pr->sigma_len))
    *s = 1e-6 / pr->sigma_len;
  *s_rot = 0.0;
  if (nr > 0) {
    *s_rot = median_of(rs, nr) / 1.5382;
    if (!(*s_rot > 1e-6 * pr->inv_sigma_rot))
      *s_rot = 1e-6 * pr->inv_sigma_rot;
  }
}

/* The weight of a score u for mode with threshold k. */
static double robust_weight(twf_robust mode, double u, double k)
{
  switch (mode) {
  case TWF_ROBUST_DROP: return u > k ? 0.0 : 1.0;
  case TWF_ROBUST_HUBER: return u > k ? k / u : 1.0;
  case TWF_ROBUST_CAUCHY: return 1.0 / (1.0 + (u / k) * (u / k));
  case TWF_ROBUST_OFF: break;
  }
  return 1.0;
}

/* Score each fit measurement's error length against the position scale
 * (a 6-D row scores the larger of that and its rotation error against the
 * rotation scale) and set the weights. */
twf_status twf_robust_screen(twf_lsq_problem *pr, twf_robust mode, double k, double *score,
                             double *err_len, size_t *changed)
{
  const twf_campaign *c = pr->c;
  size_t i, cap = c->n_meas ? c->n_meas : 1;
  int six_d = 0;
  double *pos, *rot = NULL, *len, *own_len = NULL;
  double s, s_rot;
  twf_status st = TWF_ERR_NOMEM;
  *changed = 0;
  for (i = 0; i < c->n_meas && !six_d; i++)
    six_d = c->meas[i].has_orientation;
  /* Without 6-D rows neither the rotation errors nor their workspace
   * exist, and the error lengths, when the caller does not want them,
   * wait in score (each entry is read before its score is written). */
  pos = malloc(3 * cap * sizeof *pos);
  if (six_d)
    rot = malloc(cap * sizeof *rot);
  len = err_len;
  if (len == NULL)
    len = six_d ? (own_len = malloc(cap * sizeof *own_len)) : score;
  if (pos == NULL || (six_d && rot == NULL) || len == NULL ||
      twf_lsq_residuals(pr->m, pr->base, c, pr->n_threads, pos, rot, NULL) != TWF_OK)
    goto done;
  for (i = 0; i < c->n_meas; i++)
    len[i] = sqrt(pos[3 * i] * pos[3 * i] + pos[3 * i + 1] * pos[3 * i + 1] +
                  pos[3 * i + 2] * pos[3 * i + 2]);
  /* score takes the rotation errors, and the residuals become the
   * workspace of the scales in place (robust_scales writes entry n <= 3 i
   * only after reading entry 3 i): no arrays of the campaign's size beyond
   * these two */
  if (six_d)
    memcpy(score, rot, c->n_meas * sizeof *score);
  robust_scales(pr, pos, score, pos, rot, &s, &s_rot);
  for (i = 0; i < c->n_meas; i++) {
    double len_i = len[i];
    double u = len_i * pr->inv_sigma[i] / s, w;
    if (c->meas[i].has_orientation && s_rot > 0)
      u = fmax(u, score[i] * pr->inv_sigma_rot / s_rot);
    score[i] = u;
    if (!pr->use[i])
      continue;
    w = robust_weight(mode, u, k);
    if (fabs(w - pr->weight[i]) > 1e-3 * fmax(w, pr->weight[i]))
      (*changed)++;
    twf_lsq_set_weight(pr, i, w);
  }
  st = TWF_OK;
done:
  free(pos);
  free(rot);
  free(own_len);
  return st;
}

int twf_robust_listed(const twf_lsq_problem *pr, twf_robust mode, double k, const double *score,
                      size_t i)
{
  if (!pr->use[i])
    return 0;
  return mode == TWF_ROBUST_CAUCHY ? score[i] > k : pr->weight[i] < 1.0;
}
