/* accuracy.c: how accurate a model is on a campaign. Per-measurement
 * residuals, summary statistics per target and set, the worst poses, and
 * the pose accuracy and repeatability of ISO 9283:1998 (sections 7.2.1 and
 * 7.2.3) where a campaign revisits a commanded pose. Plain data only: the
 * report writers print it. */
#include "internal.h"
#include "calib/select.h"

#include <stdint.h>
#include <stdlib.h>

/* The summary indexes its per-set arrays by the set value. */
_Static_assert((TWF_SET_FIT == 0 && TWF_SET_CHECK == 1)
                   || (TWF_SET_FIT == 1 && TWF_SET_CHECK == 0),
               "twf_accuracy_summary indexes sets 0 and 1");

static const double *offsets_or_model(const twf_model *m, const double *given,
                                      double *scratch)
{
  size_t k;
  if (given != NULL)
    return given;
  for (k = 0; k < m->n_targets; k++)
    twf_v3_copy(m->targets[k].offset, scratch + 3 * k);
  return scratch;
}

/* Without explicit offsets, every measured target must have a known one. */
static twf_status check_offsets(const twf_model *m, const twf_campaign *c,
                                const double *given, twf_error *err)
{
  size_t i;
  for (i = 0; i < c->n_meas; i++) {
    const twf_measurement *me = &c->meas[i];
    if (me->pose >= c->n_poses || me->target >= m->n_targets)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, me->line, 0, NULL,
                           "measurement %zu refers to pose %zu / target %zu, "
                           "beyond the campaign's %zu poses or the model's "
                           "%zu targets", i, (size_t)me->pose, (size_t)me->target, c->n_poses,
                           m->n_targets);
    if (given == NULL && !m->targets[me->target].offset_known)
      return twf_error_set(err, TWF_ERR_MISSING, NULL, me->line, 0,
                           "register the campaign first (it fits the "
                           "offsets) or give the offset in the model",
                           "target %s has no known offset",
                           m->targets[me->target].name);
  }
  if (c->n_joints != m->n_joints)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "the campaign has %zu joint values per pose, the "
                         "model %zu joints", c->n_joints, m->n_joints);
  return TWF_OK;
}

/* ------------------------------------------------------------------ */
/* Residuals                                                           */
/* ------------------------------------------------------------------ */

int twf_meas_residual(const twf_pose *T, const double t[3], const twf_measurement *ms,
                      const double quat[4], double pos[3], double rot[3])
{
  double y[3], Rm[3][3], E[3][3];
  int a, b;
  twf_pose_apply(T, t, y);
  pos[0] = ms->pos[0] - y[0];
  pos[1] = ms->pos[1] - y[1];
  pos[2] = ms->pos[2] - y[2];
  if (!ms->has_orientation)
    return 0;
  twf_quat_to_rot(quat, Rm);
  for (a = 0; a < 3; a++)
    for (b = 0; b < 3; b++)
      E[a][b] = Rm[a][0] * T->R[b][0] + Rm[a][1] * T->R[b][1] + Rm[a][2] * T->R[b][2];
  twf_so3_log(E, rot);
  return 1;
}

twf_status twf_accuracy_residuals_check(const twf_model *model, const twf_pose *base_in_tracker,
                                        const double *target_offsets, const twf_campaign *campaign,
                                        const double *pos_err, const double *angle_err, twf_error *err)
{
  if (model == NULL || base_in_tracker == NULL || campaign == NULL
      || (pos_err == NULL && angle_err == NULL))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "model, base pose, campaign and an output array "
                         "must not be NULL");
  return check_offsets(model, campaign, target_offsets, err);
}

twf_status twf_accuracy_residuals(const twf_model *model,
                                  const twf_pose *base_in_tracker,
                                  const double *target_offsets,
                                  const twf_campaign *campaign,
                                  double *pos_err, double *angle_err,
                                  twf_error *err)
{
  double *scratch;
  const double *t;
  twf_status st;

  st = twf_accuracy_residuals_check(model, base_in_tracker, target_offsets, campaign, pos_err,
                                    angle_err, err);
  if (st != TWF_OK)
    return st;
  scratch = malloc((model->n_targets ? 3 * model->n_targets : 1) * sizeof *scratch);
  if (scratch == NULL)
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL,
                         "out of memory for the residuals");
  t = offsets_or_model(model, target_offsets, scratch);
  twf_accuracy_residuals_range(model, base_in_tracker, t, campaign, 0, campaign->n_meas, pos_err,
                               angle_err);
  free(scratch);
  return TWF_OK;
}

void twf_accuracy_residuals_range(const twf_model *model, const twf_pose *base_in_tracker,
                                  const double *t, const twf_campaign *campaign, size_t i0,
                                  size_t i1, double *pos_err, double *angle_err)
{
  size_t i, last_pose = SIZE_MAX;
  twf_pose T; /* flange pose in the tracker frame of the current pose */
  for (i = i0; i < i1; i++) {
    const twf_measurement *me = &campaign->meas[i];
    double pos[3], rot[3];
    int six_d;
    if (me->pose != last_pose) {
      twf_pose F;
      twf_model_fk_load(model, campaign->q + me->pose * model->n_joints,
                        twf_campaign_payload(campaign, me->pose), NULL, &F);
      twf_pose_mul(&base_in_tracker[twf_campaign_pose_station(campaign, me->pose)], &F, &T);
      last_pose = me->pose;
    }
    six_d = twf_meas_residual(&T, t + 3 * me->target, me, twf_campaign_meas_quat(campaign, i), pos, rot);
    if (pos_err != NULL)
      twf_v3_copy(pos, pos_err + 3 * i);
    if (angle_err != NULL)
      angle_err[i] = six_d ? twf_v3_norm(rot) : NAN;
  }
}

/* ------------------------------------------------------------------ */
/* Statistics                                                          */
/* ------------------------------------------------------------------ */

double twf_accuracy_percentile(const double *sorted, size_t n, double p)
{
  double h, f;
  size_t lo;
  if (sorted == NULL || n == 0 || !(p >= 0.0 && p <= 1.0))
    return NAN;
  /* Hyndman and Fan (1996) type 7: h = (n - 1) p, linear between the
   * order statistics around it (numpy's default "linear" method). */
  h = (double)(n - 1) * p;
  f = floor(h);
  lo = (size_t)f;
  if (lo + 1 >= n)
    return sorted[n - 1];
  return sorted[lo] + (h - f) * (sorted[lo + 1] - sorted[lo]);
}

static void stats_empty(twf_stats *s)
{
  s->count = 0;
  s->mean = s->rms = s->p95 = s->max = NAN;
  s->max_index = SIZE_MAX;
}

/* Statistics of vals[0..n) (permuted in place); idx[j] is the index reported
 * for vals[j] as max_index (NULL: j itself). */
static void stats_of(double *vals, const size_t *idx, size_t n, twf_stats *s)
{
  double sum = 0.0, ss = 0.0, mx = -INFINITY;
  size_t j, arg = 0;
  if (n == 0) {
    stats_empty(s);
    return;
  }
  for (j = 0; j < n; j++) {
    sum += vals[j];
    ss += vals[j] * vals[j];
    if (vals[j] > mx) { /* first of equal maxima */
      mx = vals[j];
      arg = j;
    }
  }
  s->count = n;
  s->mean = sum / (double)n;
  s->rms = sqrt(ss / (double)n);
  s->max = mx;
  s->max_index = idx ? idx[arg] : arg;
  /* selection, not a sort: the same order statistics in linear time */
  s->p95 = twf_select_quantile(vals, n, 0.95);
}

twf_status twf_accuracy_stats(const double *values, size_t n, twf_stats *out,
                              twf_error *err)
{
  double *copy;
  size_t j;
  if (out == NULL || (values == NULL && n > 0))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "values and output must not be NULL");
  for (j = 0; j < n; j++)
    if (isnan(values[j]))
      return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0, NULL,
                           "value %zu is not a number", j);
  if (n == 0) {
    stats_empty(out);
    return TWF_OK;
  }
  copy = malloc(n * sizeof *copy);
  if (copy == NULL)
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL,
                         "out of memory for the statistics");
  memcpy(copy, values, n * sizeof *copy);
  stats_of(copy, NULL, n, out);
  free(copy);
  return TWF_OK;
}

/* ------------------------------------------------------------------ */
/* Summary per target and set                                          */
/* ------------------------------------------------------------------ */

void twf_accuracy_summary_free(twf_accuracy_summary *s)
{
  if (s == NULL)
    return;
  free(s->target_position);
  free(s->target_orientation);
  free(s->worst[0]);
  free(s->worst[1]);
  free(s);
}

typedef struct worst_item {
  double err;
  size_t pose;
  size_t meas;
} worst_item;

static int cmp_worst(const void *pa, const void *pb)
{
  const worst_item *a = pa, *b = pb;
  if (a->err != b->err)
    return a->err < b->err ? 1 : -1; /* largest first */
  return (a->pose > b->pose) - (a->pose < b->pose);
}

/* Bucket the measurements by key = set * (n_targets + 1) + target and by
 * key = set * (n_targets + 1) + n_targets (overall), then one statistics
 * pass per bucket: O(n log n) overall. which selects lengths of pos_err (0)
 * or the angles (1, NaN rows skipped). The per-target buckets first, then
 * the overall ones in the same arrays (each bucket holds its rows in
 * measurement order either way): one entry per measurement, not two. */
static twf_status summary_stats(const twf_campaign *c, size_t nt,
                                const double *pos_err, const double *angle_err,
                                const unsigned char *excluded,
                                int which, twf_stats *overall,
                                twf_stats *per_target)
{
  size_t nb = 2 * (nt + 1), i, b;
  size_t *count = calloc(nb + 1, sizeof *count);
  size_t *start = calloc(nb + 1, sizeof *start);
  size_t *idx = malloc((c->n_meas ? c->n_meas : 1) * sizeof *idx);
  double *vals = malloc((c->n_meas ? c->n_meas : 1) * sizeof *vals);
  twf_status st = TWF_OK;
  int pass;

  if (!count || !start || !idx || !vals) {
    st = TWF_ERR_NOMEM;
    goto done;
  }
  for (i = 0; i < c->n_meas; i++) {
    const twf_measurement *me = &c->meas[i];
    size_t set = (size_t)me->set;
    if (excluded != NULL && excluded[i])
      continue;
    if (which == 1 && (angle_err == NULL || isnan(angle_err[i])))
      continue;
    count[set * (nt + 1) + me->target]++;
    count[set * (nt + 1) + nt]++;
  }
  /* pass 0: the per-target buckets (b % (nt + 1) < nt) side by side;
   * pass 1: the two overall buckets */
  for (pass = 0; pass < 2; pass++) {
    start[0] = 0;
    for (b = 0; b < nb; b++)
      start[b + 1] = start[b] + ((b % (nt + 1) == nt) == (pass == 1) ? count[b] : 0);
    {
      size_t *fill = calloc(nb, sizeof *fill);
      if (fill == NULL) {
        st = TWF_ERR_NOMEM;
        goto done;
      }
      for (i = 0; i < c->n_meas; i++) {
        const twf_measurement *me = &c->meas[i];
        size_t set = (size_t)me->set, key, at;
        double v;
        if (excluded != NULL && excluded[i])
          continue;
        if (which == 1) {
          if (angle_err == NULL || isnan(angle_err[i]))
            continue;
          v = angle_err[i];
        } else {
          v = twf_v3_norm(pos_err + 3 * i);
        }
        key = set * (nt + 1) + (pass == 0 ? (size_t)me->target : nt);
        at = start[key] + fill[key]++;
        vals[at] = v;
        idx[at] = i;
      }
      free(fill);
    }
    for (b = 0; b < nb; b++) {
      size_t set = b / (nt + 1), k = b % (nt + 1);
      twf_stats *s = k == nt ? &overall[set] : &per_target[2 * k + set];
      if ((k == nt) == (pass == 1))
        stats_of(vals + start[b], idx + start[b], start[b + 1] - start[b], s);
    }
  }
done:
  free(count);
  free(start);
  free(idx);
  free(vals);
  return st;
}

static twf_status summary_worst(const twf_campaign *c, const double *pos_err,
                                const unsigned char *excluded,
                                size_t k_worst, twf_accuracy_summary *s)
{
  worst_item *items = malloc((c->n_poses ? c->n_poses : 1) * sizeof *items);
  size_t set, i, n;
  if (items == NULL)
    return TWF_ERR_NOMEM;
  for (set = 0; set < 2; set++) {
    for (i = 0; i < c->n_poses; i++) {
      items[i].err = -1.0;
      items[i].pose = i;
      items[i].meas = SIZE_MAX;
    }
    for (i = 0; i < c->n_meas; i++) {
      const twf_measurement *me = &c->meas[i];
      double l;
      if ((size_t)me->set != set || (excluded != NULL && excluded[i]))
        continue;
      l = twf_v3_norm(pos_err + 3 * i);
      if (l > items[me->pose].err) {
        items[me->pose].err = l;
        items[me->pose].meas = i;
      }
    }
    n = 0;
    for (i = 0; i < c->n_poses; i++)
      if (items[i].meas != SIZE_MAX)
        items[n++] = items[i];
    qsort(items, n, sizeof *items, cmp_worst);
    if (n > k_worst)
      n = k_worst;
    s->worst[set] = malloc((n ? n : 1) * sizeof *s->worst[set]);
    if (s->worst[set] == NULL) {
      free(items);
      return TWF_ERR_NOMEM;
    }
    for (i = 0; i < n; i++) {
      s->worst[set][i].pose = items[i].pose;
      s->worst[set][i].meas = items[i].meas;
      s->worst[set][i].error_m = items[i].err;
    }
    s->n_worst[set] = n;
  }
  free(items);
  return TWF_OK;
}

twf_accuracy_summary *twf_accuracy_summarize(const twf_campaign *campaign,
                                             size_t n_targets,
                                             const double *pos_err,
                                             const double *angle_err,
                                             size_t k_worst, twf_error *err)
{
  return twf_accuracy_summarize_kept(campaign, n_targets, pos_err, angle_err, NULL,
                                     k_worst, err);
}

twf_accuracy_summary *twf_accuracy_summarize_kept(const twf_campaign *campaign,
                                                  size_t n_targets,
                                                  const double *pos_err,
                                                  const double *angle_err,
                                                  const unsigned char *excluded,
                                                  size_t k_worst, twf_error *err)
{
  twf_accuracy_summary *s;
  size_t i;
  if (campaign == NULL || (pos_err == NULL && campaign->n_meas > 0)) {
    twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                  "campaign and position errors must not be NULL");
    return NULL;
  }
  for (i = 0; i < campaign->n_meas; i++) {
    const twf_measurement *me = &campaign->meas[i];
    if (me->target >= n_targets || me->pose >= campaign->n_poses
        || (me->set != TWF_SET_FIT && me->set != TWF_SET_CHECK)) {
      twf_error_set(err, TWF_ERR_INVALID, NULL, me->line, 0, NULL,
                    "measurement %zu has target %zu, pose %zu or set %d "
                    "out of range", i, (size_t)me->target, (size_t)me->pose, (int)me->set);
      return NULL;
    }
    if (excluded != NULL && excluded[i])
      continue;
    if (!isfinite(pos_err[3 * i]) || !isfinite(pos_err[3 * i + 1])
        || !isfinite(pos_err[3 * i + 2])) {
      twf_error_set(err, TWF_ERR_VALUE, NULL, me->line, 0, NULL,
                    "the position error of measurement %zu is not finite", i);
      return NULL;
    }
  }
  s = calloc(1, sizeof *s);
  if (s == NULL)
    goto nomem;
  s->n_targets = n_targets;
  s->target_position = calloc(n_targets ? 2 * n_targets : 1, sizeof *s->target_position);
  s->target_orientation = calloc(n_targets ? 2 * n_targets : 1, sizeof *s->target_orientation);
  if (!s->target_position || !s->target_orientation)
    goto nomem;
  if (summary_stats(campaign, n_targets, pos_err, angle_err, excluded, 0, s->position,
                    s->target_position) != TWF_OK
      || summary_stats(campaign, n_targets, pos_err, angle_err, excluded, 1,
                       s->orientation, s->target_orientation) != TWF_OK
      || summary_worst(campaign, pos_err, excluded, k_worst, s) != TWF_OK)
    goto nomem;
  return s;
nomem:
  twf_accuracy_summary_free(s);
  twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL,
                "out of memory for the accuracy summary");
  return NULL;
}

/* ------------------------------------------------------------------ */
/* Acceptance                                                          */
/* ------------------------------------------------------------------ */

twf_status twf_accuracy_accept(const twf_accuracy_summary *s, const twf_acceptance_limits *lim,
                               twf_acceptance *out, twf_error *err)
{
  int k;
  if (s == NULL || lim == NULL || out == NULL || !(lim->rms_m >= 0) || !(lim->p95_m >= 0) ||
      !(lim->max_m >= 0) || !(lim->angle_max_rad >= 0))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "acceptance: summary, limits (>= 0) and output are needed");
  memset(out, 0, sizeof *out);
  out->set = s->position[TWF_SET_CHECK].count > 0 ? TWF_SET_CHECK : TWF_SET_FIT;
  out->limit[TWF_ACCEPT_RMS] = lim->rms_m;
  out->limit[TWF_ACCEPT_P95] = lim->p95_m;
  out->limit[TWF_ACCEPT_MAX] = lim->max_m;
  out->limit[TWF_ACCEPT_ANGLE_MAX] = lim->angle_max_rad;
  out->value[TWF_ACCEPT_RMS] = s->position[out->set].rms;
  out->value[TWF_ACCEPT_P95] = s->position[out->set].p95;
  out->value[TWF_ACCEPT_MAX] = s->position[out->set].max;
  out->value[TWF_ACCEPT_ANGLE_MAX] = s->orientation[out->set].max;
  out->accepted = 1;
  for (k = 0; k < TWF_ACCEPT_COUNT; k++) {
    if (!(out->limit[k] > 0))
      continue;
    out->n_limits++;
    out->pass[k] = out->value[k] <= out->limit[k];
    if (!out->pass[k])
      out->accepted = 0;
  }
  return TWF_OK;
}

/* ------------------------------------------------------------------ */
/* ISO 9283 pose accuracy and repeatability                            */
/* ------------------------------------------------------------------ */

twf_iso9283_options twf_iso9283_default_options(void)
{
  twf_iso9283_options o;
  memset(&o, 0, sizeof o);
  o.joint_tol = 1e-6;
  o.joint_tol_prismatic = 0.0;
  o.min_visits = 2;
  o.set = -1;
  return o;
}

void twf_iso9283_free(twf_iso9283 *r)
{
  if (r == NULL)
    return;
  free(r->entries);
  free(r->orientation);
  free(r);
}

typedef struct key_item {
  double v;
  size_t pose;
} key_item;

static int cmp_key(const void *pa, const void *pb)
{
  const key_item *a = pa, *b = pb;
  if (a->v != b->v)
    return a->v < b->v ? -1 : 1;
  return (a->pose > b->pose) - (a->pose < b->pose);
}

/* Group the poses whose joint values agree within tol, joint by joint:
 * sort the segment by joint j, cut it where consecutive values differ by
 * more than tol, and refine every piece by joint j + 1 (single linkage per
 * joint; O(n_joints n log n)). Each final piece is one commanded pose;
 * group_of[pose] receives its number (SIZE_MAX for poses not in poses[]). */
typedef struct grouper {
  const double *q;
  size_t nj;
  const twf_model *model;
  double tol, tol_prismatic;
  key_item *keys;
  size_t *group_of;
  size_t n_groups;
} grouper;

static void group_segment(grouper *g, size_t *poses, size_t n, size_t j)
{
  size_t i, start;
  if (n == 0)
    return;
  if (j == g->nj || n == 1) {
    for (i = 0; i < n; i++)
      g->group_of[poses[i]] = g->n_groups;
    g->n_groups++;
    return;
  }
  for (i = 0; i < n; i++) {
    g->keys[i].v = g->q[poses[i] * g->nj + j];
    g->keys[i].pose = poses[i];
  }
  qsort(g->keys, n, sizeof *g->keys, cmp_key);
  for (i = 0; i < n; i++)
    poses[i] = g->keys[i].pose;
  start = 0;
  for (i = 1; i <= n; i++) {
    double tol = g->model->joints[j].type == TWF_JOINT_PRISMATIC ? g->tol_prismatic : g->tol;
    if (i == n || g->q[poses[i] * g->nj + j] - g->q[poses[i - 1] * g->nj + j] > tol) {
      group_segment(g, poses + start, i - start, j + 1);
      start = i;
    }
  }
}

/* The orientation figures of one commanded pose (see
 * twf_iso9283_orientation): its visits gp[0..n) with their measurements
 * pose_meas[pose_start[p] .. pose_start[p + 1]), F the commanded flange
 * pose in the base frame. Appends an entry when at least min_visits
 * visits have a 6-D row. */
static twf_status iso_orientation(const twf_campaign *c, const twf_pose *B, const twf_pose *F,
                                  const size_t *gp, size_t n, const size_t *pose_start,
                                  const size_t *pose_meas, size_t min_visits, size_t group,
                                  size_t first_pose, twf_iso9283 *res, size_t *cap)
{
  double sum[3] = { 0, 0, 0 }, ss[3] = { 0, 0, 0 }, *abc;
  size_t a, j, m = 0;
  int k;
  twf_iso9283_orientation *e;
  abc = malloc((n ? 3 * n : 1) * sizeof *abc);
  if (abc == NULL)
    return TWF_ERR_NOMEM;
  for (a = 0; a < n; a++)
    for (j = pose_start[gp[a]]; j < pose_start[gp[a] + 1]; j++) {
      const twf_measurement *me = &c->meas[pose_meas[j]];
      double Rt[3][3], Rb[3][3], D[3][3];
      int r, q, t;
      if (!me->has_orientation)
        continue;
      /* the attained orientation in the base frame, R_B^T R_tracker, then
       * relative to the commanded one */
      twf_quat_to_rot(twf_campaign_meas_quat(c, pose_meas[j]), Rt);
      for (r = 0; r < 3; r++)
        for (q = 0; q < 3; q++) {
          Rb[r][q] = 0.0;
          for (t = 0; t < 3; t++)
            Rb[r][q] += B->R[t][r] * Rt[t][q];
        }
      for (r = 0; r < 3; r++)
        for (q = 0; q < 3; q++) {
          D[r][q] = 0.0;
          for (t = 0; t < 3; t++)
            D[r][q] += Rb[r][t] * F->R[q][t];
        }
      twf_rot_to_rpy_fixed_xyz(D, &abc[3 * m], &abc[3 * m + 1], &abc[3 * m + 2]);
      m++;
      break;
    }
  if (m < min_visits) {
    free(abc);
    return TWF_OK;
  }
  if (res->n_orientation == *cap) {
    size_t ncap = *cap ? 2 * *cap : 8;
    twf_iso9283_orientation *grown = realloc(res->orientation, ncap * sizeof *grown);
    if (grown == NULL) {
      free(abc);
      return TWF_ERR_NOMEM;
    }
    res->orientation = grown;
    *cap = ncap;
  }
  e = &res->orientation[res->n_orientation++];
  memset(e, 0, sizeof *e);
  e->group = group;
  e->first_pose = first_pose;
  e->n = m;
  for (a = 0; a < m; a++)
    for (k = 0; k < 3; k++)
      sum[k] += abc[3 * a + (size_t)k];
  for (k = 0; k < 3; k++)
    e->ap[k] = sum[k] / (double)m;
  for (a = 0; a < m; a++)
    for (k = 0; k < 3; k++)
      ss[k] += (abc[3 * a + (size_t)k] - e->ap[k]) * (abc[3 * a + (size_t)k] - e->ap[k]);
  for (k = 0; k < 3; k++)
    e->rp[k] = 3.0 * sqrt(ss[k] / (double)(m - 1));
  free(abc);
  return TWF_OK;
}

/* The worst figures over the entries, and the cycles. */
static void iso_summary(twf_iso9283 *r)
{
  size_t i;
  int k;
  r->ap_p_max = r->rp_max = r->ap_angle_max = r->rp_angle_max = NAN;
  r->ap_p_worst = r->rp_worst = SIZE_MAX;
  r->min_cycles = r->max_cycles = 0;
  for (i = 0; i < r->n_entries; i++) {
    const twf_iso9283_entry *e = &r->entries[i];
    if (r->ap_p_worst == SIZE_MAX || e->ap_p > r->ap_p_max) {
      r->ap_p_max = e->ap_p;
      r->ap_p_worst = i;
    }
    if (r->rp_worst == SIZE_MAX || e->rp > r->rp_max) {
      r->rp_max = e->rp;
      r->rp_worst = i;
    }
    if (i == 0 || e->n < r->min_cycles)
      r->min_cycles = e->n;
    if (e->n > r->max_cycles)
      r->max_cycles = e->n;
  }
  for (i = 0; i < r->n_orientation; i++)
    for (k = 0; k < 3; k++) {
      const twf_iso9283_orientation *e = &r->orientation[i];
      if (!(fabs(e->ap[k]) <= r->ap_angle_max))
        r->ap_angle_max = isnan(r->ap_angle_max) ? fabs(e->ap[k]) : fmax(r->ap_angle_max, fabs(e->ap[k]));
      if (!(e->rp[k] <= r->rp_angle_max))
        r->rp_angle_max = isnan(r->rp_angle_max) ? e->rp[k] : fmax(r->rp_angle_max, e->rp[k]);
    }
}

twf_iso9283 *twf_accuracy_iso9283(const twf_model *model,
                                  const twf_pose *base_in_tracker,
                                  const double *target_offsets,
                                  const twf_campaign *campaign,
                                  const twf_iso9283_options *options,
                                  twf_error *err)
{
  twf_iso9283_options def = twf_iso9283_default_options();
  const twf_iso9283_options *o = options ? options : &def;
  twf_iso9283 *res = NULL;
  grouper g;
  size_t np, nj, nt, i, gi, k;
  size_t *poses = NULL, *pose_count = NULL, *pose_start = NULL, *pose_meas = NULL;
  size_t *group_size = NULL, *group_start = NULL, *group_poses = NULL, *first_pose = NULL;
  size_t *order = NULL, *tcount = NULL, n_used = 0, cap = 0, ocap = 0;
  double *scratch = NULL, *tsum = NULL, *lsum = NULL, *qmean = NULL;
  const double *t;

  memset(&g, 0, sizeof g);
  if (model == NULL || base_in_tracker == NULL || campaign == NULL) {
    twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                  "model, base pose and campaign must not be NULL");
    return NULL;
  }
  if (!(o->joint_tol >= 0.0) || o->min_visits < 2
      || (o->set != -1 && o->set != (int)TWF_SET_FIT && o->set != (int)TWF_SET_CHECK)) {
    twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                  "ISO 9283 options: the joint tolerance must be >= 0, the "
                  "visits at least 2 and the set -1, fit or check");
    return NULL;
  }
  if (check_offsets(model, campaign, target_offsets, err) != TWF_OK)
    return NULL;
  np = campaign->n_poses;
  nj = model->n_joints;
  nt = model->n_targets;

  /* Measurements by pose (compressed rows), restricted to the chosen set. */
  pose_count = calloc(np + 1, sizeof *pose_count);
  pose_start = calloc(np + 1, sizeof *pose_start);
  pose_meas = malloc((campaign->n_meas ? campaign->n_meas : 1) * sizeof *pose_meas);
  poses = malloc((np ? np : 1) * sizeof *poses);
  g.keys = malloc((np ? np : 1) * sizeof *g.keys);
  g.group_of = malloc((np ? np : 1) * sizeof *g.group_of);
  scratch = malloc((nt ? 3 * nt : 1) * sizeof *scratch);
  tsum = malloc((nt ? 3 * nt : 1) * sizeof *tsum);
  lsum = malloc((nt ? 2 * nt : 1) * sizeof *lsum);
  tcount = malloc((nt ? nt : 1) * sizeof *tcount);
  qmean = malloc((nj ? nj : 1) * sizeof *qmean);
  res = calloc(1, sizeof *res);
  if (!pose_count || !pose_start || !pose_meas || !poses || !g.keys
      || !g.group_of || !scratch || !tsum || !lsum || !tcount || !qmean || !res)
    goto nomem;
  t = offsets_or_model(model, target_offsets, scratch);
  for (i = 0; i < campaign->n_meas; i++) {
    const twf_measurement *me = &campaign->meas[i];
    if (o->set == -1 || (int)me->set == o->set)
      pose_count[me->pose]++;
  }
  for (i = 0; i < np; i++)
    pose_start[i + 1] = pose_start[i] + pose_count[i];
  memset(pose_count, 0, (np + 1) * sizeof *pose_count);
  for (i = 0; i < campaign->n_meas; i++) {
    const twf_measurement *me = &campaign->meas[i];
    if (o->set == -1 || (int)me->set == o->set)
      pose_meas[pose_start[me->pose] + pose_count[me->pose]++] = i;
  }
  for (i = 0; i < np; i++) {
    g.group_of[i] = SIZE_MAX;
    if (pose_count[i] > 0)
      poses[n_used++] = i;
  }

  g.q = campaign->q;
  g.nj = nj;
  g.model = model;
  g.tol = o->joint_tol;
  g.tol_prismatic = o->joint_tol_prismatic > 0 ? o->joint_tol_prismatic : o->joint_tol;
  /* Visits of one commanded pose from different instrument stations are
   * in different frames: group each station's poses on their own. */
  {
    size_t n_st = twf_campaign_station_count(campaign), sp, off = 0, k2, n_s;
    for (sp = 0; sp < n_st; sp++) {
      n_s = 0;
      for (k2 = off; k2 < n_used; k2++)
        if (twf_campaign_pose_station(campaign, poses[k2]) == sp) {
          size_t tmp = poses[off + n_s];
          poses[off + n_s] = poses[k2];
          poses[k2] = tmp;
          n_s++;
        }
      group_segment(&g, poses + off, n_s, 0);
      off += n_s;
    }
  }

  /* Poses of each group, in pose order; groups numbered by first visit. */
  group_size = calloc(g.n_groups + 1, sizeof *group_size);
  group_start = calloc(g.n_groups + 1, sizeof *group_start);
  group_poses = malloc((n_used ? n_used : 1) * sizeof *group_poses);
  first_pose = malloc((g.n_groups ? g.n_groups : 1) * sizeof *first_pose);
  order = malloc((g.n_groups ? g.n_groups : 1) * sizeof *order);
  if (!group_size || !group_start || !group_poses || !first_pose || !order)
    goto nomem;
  for (gi = 0; gi < g.n_groups; gi++)
    first_pose[gi] = SIZE_MAX;
  for (i = 0; i < np; i++) {
    size_t gr = g.group_of[i];
    if (gr == SIZE_MAX)
      continue;
    group_size[gr]++;
    if (first_pose[gr] == SIZE_MAX)
      first_pose[gr] = i;
  }
  for (gi = 0; gi < g.n_groups; gi++)
    group_start[gi + 1] = group_start[gi] + group_size[gi];
  memset(group_size, 0, (g.n_groups + 1) * sizeof *group_size);
  for (i = 0; i < np; i++) {
    size_t gr = g.group_of[i];
    if (gr != SIZE_MAX)
      group_poses[group_start[gr] + group_size[gr]++] = i;
  }
  /* first_pose values are distinct: order the groups by them through the
   * key array (already sized for n_used >= n_groups entries). */
  for (gi = 0; gi < g.n_groups; gi++) {
    g.keys[gi].v = (double)first_pose[gi];
    g.keys[gi].pose = gi;
  }
  qsort(g.keys, g.n_groups, sizeof *g.keys, cmp_key);
  for (gi = 0; gi < g.n_groups; gi++)
    order[gi] = g.keys[gi].pose;

  for (gi = 0; gi < g.n_groups; gi++) {
    size_t gr = order[gi], n = group_size[gr], a, j;
    const size_t *gp = group_poses + group_start[gr];
    double spread = 0.0;
    twf_pose F, T;
    if (n < o->min_visits)
      continue;
    /* The commanded pose: the mean of the visits' joint values (they agree
     * within the tolerance), and its spread for the report. */
    for (j = 0; j < nj; j++) {
      double lo = INFINITY, hi = -INFINITY, sum = 0.0;
      for (a = 0; a < n; a++) {
        double v = campaign->q[gp[a] * nj + j];
        sum += v;
        lo = fmin(lo, v);
        hi = fmax(hi, v);
      }
      qmean[j] = sum / (double)n;
      spread = fmax(spread, hi - lo);
    }
    /* the visits' load (the first visit's: a pose repeated under another
     * load is another commanded pose for a compliant arm) */
    twf_model_fk_load(model, qmean, twf_campaign_payload(campaign, gp[0]), NULL, &F);
    twf_pose_mul(&base_in_tracker[twf_campaign_pose_station(campaign, first_pose[gr])], &F, &T);
    for (k = 0; k < nt; k++) {
      tcount[k] = 0;
      tsum[3 * k] = tsum[3 * k + 1] = tsum[3 * k + 2] = 0.0;
      lsum[2 * k] = lsum[2 * k + 1] = 0.0;
    }
    /* barycentre of the attained positions, per target (ISO 9283 7.2.1) */
    for (a = 0; a < n; a++)
      for (j = pose_start[gp[a]]; j < pose_start[gp[a] + 1]; j++) {
        const twf_measurement *me = &campaign->meas[pose_meas[j]];
        tcount[me->target]++;
        tsum[3 * me->target] += me->pos[0];
        tsum[3 * me->target + 1] += me->pos[1];
        tsum[3 * me->target + 2] += me->pos[2];
      }
    for (k = 0; k < nt; k++)
      if (tcount[k] >= o->min_visits)
        for (j = 0; j < 3; j++)
          tsum[3 * k + j] /= (double)tcount[k];
    /* mean distance to the barycentre, then its sample standard deviation
     * (ISO 9283 7.2.3), two passes for accuracy */
    for (a = 0; a < n; a++)
      for (j = pose_start[gp[a]]; j < pose_start[gp[a] + 1]; j++) {
        const twf_measurement *me = &campaign->meas[pose_meas[j]];
        double d[3];
        if (tcount[me->target] < o->min_visits)
          continue;
        d[0] = me->pos[0] - tsum[3 * me->target];
        d[1] = me->pos[1] - tsum[3 * me->target + 1];
        d[2] = me->pos[2] - tsum[3 * me->target + 2];
        lsum[2 * me->target] += twf_v3_norm(d);
      }
    for (k = 0; k < nt; k++)
      if (tcount[k] >= o->min_visits)
        lsum[2 * k] /= (double)tcount[k];
    for (a = 0; a < n; a++)
      for (j = pose_start[gp[a]]; j < pose_start[gp[a] + 1]; j++) {
        const twf_measurement *me = &campaign->meas[pose_meas[j]];
        double d[3], l;
        if (tcount[me->target] < o->min_visits)
          continue;
        d[0] = me->pos[0] - tsum[3 * me->target];
        d[1] = me->pos[1] - tsum[3 * me->target + 1];
        d[2] = me->pos[2] - tsum[3 * me->target + 2];
        l = twf_v3_norm(d) - lsum[2 * me->target];
        lsum[2 * me->target + 1] += l * l;
      }
    for (k = 0; k < nt; k++) {
      twf_iso9283_entry *e;
      double c[3];
      if (tcount[k] < o->min_visits)
        continue;
      if (res->n_entries == cap) {
        size_t ncap = cap ? 2 * cap : 16;
        twf_iso9283_entry *grown = realloc(res->entries, ncap * sizeof *grown);
        if (grown == NULL)
          goto nomem;
        res->entries = grown;
        cap = ncap;
      }
      e = &res->entries[res->n_entries++];
      memset(e, 0, sizeof *e);
      e->group = res->n_groups;
      e->first_pose = first_pose[gr];
      e->n_poses = n;
      e->target = k;
      e->n = tcount[k];
      twf_pose_apply(&T, t + 3 * k, c);
      for (j = 0; j < 3; j++) {
        e->commanded[j] = c[j];
        e->barycentre[j] = tsum[3 * k + j];
        e->ap[j] = e->barycentre[j] - c[j];
      }
      e->ap_p = twf_v3_norm(e->ap);
      e->l_mean = lsum[2 * k];
      e->s_l = sqrt(lsum[2 * k + 1] / (double)(tcount[k] - 1));
      e->rp = e->l_mean + 3.0 * e->s_l;
      e->joint_spread = spread;
    }
    /* orientation: one 6-D row per visit (the flange's, whichever target) */
    if (iso_orientation(campaign, &base_in_tracker[twf_campaign_pose_station(campaign, first_pose[gr])],
                        &F, gp, n, pose_start, pose_meas, o->min_visits,
                        res->n_groups, first_pose[gr], res, &ocap) != TWF_OK)
      goto nomem;
    /* a group counts once, whether one target or several qualified */
    if ((res->n_entries > 0 && res->entries[res->n_entries - 1].group == res->n_groups) ||
        (res->n_orientation > 0 && res->orientation[res->n_orientation - 1].group == res->n_groups))
      res->n_groups++;
  }
  iso_summary(res);
  goto done;
nomem:
  twf_iso9283_free(res);
  res = NULL;
  twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL,
                "out of memory for the ISO 9283 figures");
done:
  free(pose_count);
  free(pose_start);
  free(pose_meas);
  free(poses);
  free(g.keys);
  free(g.group_of);
  free(scratch);
  free(tsum);
  free(lsum);
  free(tcount);
  free(qmean);
  free(group_size);
  free(group_start);
  free(group_poses);
  free(first_pose);
  free(order);
  return res;
}
