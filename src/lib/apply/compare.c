/* compare.c: the effect in the workspace of the difference between two
 * models of one arm: distances between the tool points and angles between
 * the flange orientations that they predict at the same joint values,
 * optionally after aligning their base frames by the closed-form rigid
 * registration of register.c. */
#include "internal.h"

#include <stdint.h>
#include <stdlib.h>

twf_compare_options twf_compare_default_options(void)
{
  twf_compare_options o;
  o.align = 1;
  o.payload = NULL;
  return o;
}

void twf_compare_result_free(twf_compare_result *r)
{
  if (r == NULL)
    return;
  free(r->point_target);
  free(r->point_position);
  free(r);
}

twf_status twf_compare_models(const twf_model *a, const twf_model *b, const double *q,
                              size_t n_configs, const twf_compare_options *opt,
                              twf_compare_result **out, twf_error *err)
{
  twf_compare_options o = opt != NULL ? *opt : twf_compare_default_options();
  twf_compare_result *r = NULL;
  double *ya = NULL, *yb = NULL, *dist = NULL, *ang = NULL, *col = NULL;
  double (*Ra)[3][3] = NULL, (*Rb)[3][3] = NULL;
  size_t n, np, c, k, i, *tb = NULL;
  twf_status st;

  if (a == NULL || b == NULL || out == NULL || (q == NULL && n_configs > 0))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "twf_compare_models: NULL argument");
  *out = NULL;
  if ((st = twf_models_same_joints(a, b, "model A", "model B", err)) != TWF_OK)
    return st;
  if (n_configs == 0)
    return twf_error_set(err, TWF_ERR_MISSING, NULL, 0, 0, "give at least one configuration",
                         "no configuration to compare the models at");
  n = a->n_joints;
  for (i = 0; i < n_configs * n; i++)
    if (!isfinite(q[i]))
      return twf_error_set(err, TWF_ERR_VALUE, NULL, (long)(i / (n ? n : 1) + 1), 0, NULL,
                           "configuration %zu holds a non-finite joint value", i / (n ? n : 1) + 1);

  r = calloc(1, sizeof *r);
  if (r == NULL)
    goto nomem;
  /* the tool points: targets known in both models, in A's order */
  r->point_target = malloc((a->n_targets + 1) * sizeof *r->point_target);
  tb = malloc((a->n_targets + 1) * sizeof *tb);
  if (r->point_target == NULL || tb == NULL)
    goto nomem;
  np = 0;
  for (k = 0; k < a->n_targets; k++) {
    long kb = twf_model_target_index(b, a->targets[k].name);
    if (a->targets[k].offset_known && kb >= 0 && b->targets[kb].offset_known) {
      r->point_target[np] = (long)k;
      tb[np++] = (size_t)kb;
    }
  }
  if (np == 0)
    r->point_target[np++] = -1;
  r->n_points = np;
  r->n_configs = n_configs;
  r->point_position = calloc(np, sizeof *r->point_position);
  ya = malloc(3 * np * n_configs * sizeof *ya);
  yb = malloc(3 * np * n_configs * sizeof *yb);
  dist = malloc(np * n_configs * sizeof *dist);
  col = malloc(n_configs * sizeof *col);
  ang = malloc(n_configs * sizeof *ang);
  Ra = malloc(n_configs * sizeof *Ra);
  Rb = malloc(n_configs * sizeof *Rb);
  if (r->point_position == NULL || ya == NULL || yb == NULL || dist == NULL || col == NULL ||
      ang == NULL || Ra == NULL || Rb == NULL)
    goto nomem;

  for (c = 0; c < n_configs; c++) {
    twf_pose Ta, Tb;
    twf_model_fk_load(a, q + c * n, twf_model_payload_index(a, o.payload), NULL, &Ta);
    twf_model_fk_load(b, q + c * n, twf_model_payload_index(b, o.payload), NULL, &Tb);
    memcpy(Ra[c], Ta.R, sizeof Ta.R);
    memcpy(Rb[c], Tb.R, sizeof Tb.R);
    for (k = 0; k < np; k++) {
      static const double origin[3] = { 0, 0, 0 };
      long ka = r->point_target[k];
      twf_pose_apply(&Ta, ka >= 0 ? a->targets[ka].offset : origin, ya + 3 * (c * np + k));
      twf_pose_apply(&Tb, ka >= 0 ? b->targets[tb[k]].offset : origin, yb + 3 * (c * np + k));
    }
  }

  twf_pose_identity(&r->b_to_a);
  if (o.align) {
    st = twf_register_points(yb, ya, NULL, np * n_configs, &r->b_to_a, err);
    if (st != TWF_OK) {
      if (st == TWF_ERR_DEGENERATE && err != NULL)
        snprintf(err->hint, sizeof err->hint, "%s",
                 "compare at more varied configurations, or in the frames as written (no alignment)");
      goto fail;
    }
    r->aligned = 1;
  }
  for (c = 0; c < n_configs; c++) {
    double Rab[3][3];
    int x, y, z;
    for (k = 0; k < np; k++) {
      double p[3], d[3];
      twf_pose_apply(&r->b_to_a, yb + 3 * (c * np + k), p);
      for (x = 0; x < 3; x++)
        d[x] = ya[3 * (c * np + k) + (size_t)x] - p[x];
      dist[c * np + k] = twf_v3_norm(d);
    }
    for (x = 0; x < 3; x++)
      for (y = 0; y < 3; y++) {
        double s = 0.0;
        for (z = 0; z < 3; z++)
          s += r->b_to_a.R[x][z] * Rb[c][z][y];
        Rab[x][y] = s;
      }
    ang[c] = twf_rot_angle_between(Ra[c], Rab);
  }
  if ((st = twf_accuracy_stats(dist, np * n_configs, &r->position, err)) != TWF_OK ||
      (st = twf_accuracy_stats(ang, n_configs, &r->angle, err)) != TWF_OK)
    goto fail;
  for (k = 0; k < np; k++) {
    for (c = 0; c < n_configs; c++)
      col[c] = dist[c * np + k];
    if ((st = twf_accuracy_stats(col, n_configs, &r->point_position[k], err)) != TWF_OK)
      goto fail;
  }
  r->worst_config = r->position.max_index / np;
  r->worst_point = r->position.max_index % np;
  r->worst_angle_rad = ang[r->worst_config];

  free(tb);
  free(ya);
  free(yb);
  free(dist);
  free(col);
  free(ang);
  free(Ra);
  free(Rb);
  *out = r;
  return TWF_OK;

nomem:
  st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
fail:
  free(tb);
  free(ya);
  free(yb);
  free(dist);
  free(col);
  free(ang);
  free(Ra);
  free(Rb);
  twf_compare_result_free(r);
  return st;
}

/* An angle in [-pi, pi). */
static double wrap_angle(double x)
{
  return x - 2.0 * TWF_PI * floor((x + TWF_PI) / (2.0 * TWF_PI));
}

twf_status twf_compare_links(const twf_model *a, const twf_model *b, int full_pose,
                             twf_links *links, double *diff, twf_error *err)
{
  twf_links_options o = twf_links_default_options();
  twf_status st;
  size_t r;
  int v;
  if (a == NULL || b == NULL || links == NULL || diff == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "twf_compare_links: NULL argument");
  if ((st = twf_models_same_joints(a, b, "model A", "model B", err)) != TWF_OK)
    return st;
  o.full_pose = full_pose;
  o.reference = a;
  if ((st = twf_links_compute(b, &o, links, err)) != TWF_OK)
    return st;
  /* The x axis of a DH link whose lines (nearly) intersect has a free sign:
   * Rz(theta + pi) Tz(d) Tx(-a) Rx(-alpha) = Rz(theta) Tz(d) Tx(a) Rx(alpha)
   * Rz(pi), the next row's theta taking -pi. Where B's link came out with
   * the other sign than A's (measured on the demo arm: the wrist link, a =
   * 0 in A, showed theta and alpha 180 degrees apart), re-express B's
   * values in A's sign, which brings them closer: a real link (a far from
   * 0) never gains from it. */
  for (r = 1; r + 1 < links->n_rows; r++) {
    twf_link_row *row = &links->rows[r], *next = &links->rows[r + 1];
    double L = links->reach > 0 ? links->reach : 1.0, keep, flip;
    if (row->form != TWF_LINK_FORM_DH || row->why[TWF_LINK_A] == TWF_LINK_NOT_IN_FORM)
      continue;
    keep = fabs(wrap_angle(row->value[TWF_LINK_ALPHA] - row->reference[TWF_LINK_ALPHA])) +
           fabs(row->value[TWF_LINK_A] - row->reference[TWF_LINK_A]) / L;
    flip = fabs(wrap_angle(-row->value[TWF_LINK_ALPHA] - row->reference[TWF_LINK_ALPHA])) +
           fabs(-row->value[TWF_LINK_A] - row->reference[TWF_LINK_A]) / L;
    if (flip < keep) {
      row->value[TWF_LINK_THETA] = wrap_angle(row->value[TWF_LINK_THETA] + TWF_PI);
      row->value[TWF_LINK_A] = -row->value[TWF_LINK_A];
      row->value[TWF_LINK_ALPHA] = wrap_angle(-row->value[TWF_LINK_ALPHA]);
      next->value[TWF_LINK_THETA] = wrap_angle(next->value[TWF_LINK_THETA] - TWF_PI);
    }
  }
  for (r = 0; r < links->n_rows; r++)
    for (v = 0; v < TWF_LINK_NVALUES; v++) {
      const twf_link_row *row = &links->rows[r];
      double d = row->value[v] - row->reference[v];
      if (row->why[v] == TWF_LINK_NOT_IN_FORM) {
        d = NAN;
      } else if (v == TWF_LINK_THETA || v == TWF_LINK_ALPHA || v == TWF_LINK_BETA) {
        d = wrap_angle(d);
      }
      diff[5 * r + (size_t)v] = d;
    }
  return TWF_OK;
}
