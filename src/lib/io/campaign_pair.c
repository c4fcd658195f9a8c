/* campaign_pair.c: the two-file form of a campaign, a joints file (one
 * row per pose) and a points file (one row per measured target). */
#include "campaign_internal.h"

#include <stdlib.h>

twf_status twf_creader_row_joints(creader *r, const twf_csv_row *row)
{
  char id[TWF_NAME_MAX];
  size_t pose;
  int set;
  twf_status st;
  if ((st = twf_creader_check_nf(r, row)) != TWF_OK ||
      (st = twf_creader_field_id(r, row, r->col[COL_POSE], id, "pose id")) != TWF_OK ||
      (st = twf_creader_field_joints(r, row, r->qbuf)) != TWF_OK ||
      (st = twf_creader_field_set(r, row, &set)) != TWF_OK)
    return st;
  pose = twf_idmap_find(&r->poses, r->c->pose_ids, id);
  if (pose != NONE)
    return twf_creader_error(r, row, r->col[COL_POSE], TWF_ERR_DUPLICATE,
                             "give every pose of the joints file its own id",
                             "pose '%s' appears twice in the joints file (first at line %ld)",
                             id, r->c->pose_lines[pose]);
  if ((st = twf_creader_pose_add(r, id, r->qbuf, row->line, &pose)) != TWF_OK ||
      (st = twf_creader_field_station(r, row, pose, 1)) != TWF_OK ||
      (st = twf_creader_field_payload(r, row, pose, 1)) != TWF_OK)
    return st;
  r->pose_set[pose] = set;
  return TWF_OK;
}

twf_status twf_creader_row_points(creader *r, const twf_csv_row *row)
{
  char id[TWF_NAME_MAX];
  size_t target, pose;
  twf_measurement ms;
  double quat[4];
  int set;
  twf_status st;
  if ((st = twf_creader_check_nf(r, row)) != TWF_OK ||
      (st = twf_creader_field_id(r, row, r->col[COL_POSE], id, "pose id")) != TWF_OK ||
      (st = twf_creader_field_target(r, row, &target)) != TWF_OK ||
      (st = twf_creader_field_meas(r, row, &ms, quat, &set)) != TWF_OK)
    return st;
  pose = twf_idmap_find(&r->poses, r->c->pose_ids, id);
  if (pose == NONE) {
    /* Collect them all so that the error can list them. */
    if (twf_idmap_find(&r->unk_map, r->unk, id) == NONE) {
      if (twf_io_grow((void **)&r->unk, &r->cap_unk, r->n_unk + 1, sizeof *r->unk))
        return twf_creader_nomem(r);
      twf_strlcpy(r->unk[r->n_unk], id, TWF_NAME_MAX);
      if (twf_idmap_add(&r->unk_map, r->unk, r->n_unk + 1, r->n_unk))
        return twf_creader_nomem(r);
      r->n_unk++;
    }
    if (r->unk_line == 0)
      r->unk_line = row->line;
    return TWF_OK;
  }
  if ((st = twf_creader_pair_check(r, row, pose, target)) != TWF_OK)
    return st;
  if (set < 0 && r->pose_set[pose] >= 0)
    ms.set = (uint8_t)r->pose_set[pose];
  ms.pose = (uint32_t)pose;
  ms.target = (uint32_t)target;
  r->pose_npts[pose]++;
  return twf_creader_meas_add(r, &ms, quat);
}

twf_campaign *twf_campaign_read_pair(const char *joints_path,
                                     const char *points_path,
                                     const twf_model *m,
                                     const twf_campaign_options *opt,
                                     twf_warnings *w, twf_error *err)
{
  creader r;
  twf_status st;
  twf_error_clear(err);
  if (joints_path == NULL || points_path == NULL) {
    twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                  "the two-file form needs a joints file and a points file");
    return NULL;
  }
  st = twf_creader_begin(&r, m, opt, w, err);
  if (st == TWF_OK)
    st = twf_creader_read_file(&r, joints_path, KIND_JOINTS);
  if (st == TWF_OK)
    st = twf_creader_read_file(&r, points_path, KIND_POINTS);
  if (st == TWF_OK && r.n_unk > 0) {
    char list[TWF_ERROR_TEXT_MAX];
    twf_creader_list_ids(list, sizeof list, r.unk, NULL, r.n_unk);
    st = twf_error_set(err, TWF_ERR_MISSING, points_path, r.unk_line,
                       r.col[COL_POSE],
                       "every pose of the points file needs its joint values "
                       "in the joints file; check that both files come from "
                       "the same campaign",
                       "%zu pose id%s of the points file %s no row in the "
                       "joints file: %s", r.n_unk, r.n_unk == 1 ? "" : "s",
                       r.n_unk == 1 ? "has" : "have", list);
  }
  if (st == TWF_OK) {
    size_t k, n = 0, *which = malloc((r.c->n_poses ? r.c->n_poses : 1) * sizeof *which);
    if (which == NULL) {
      st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL,
                         "out of memory reading the campaign");
    } else {
      for (k = 0; k < r.c->n_poses; k++)
        if (r.pose_npts[k] == 0)
          which[n++] = k;
      if (n > 0 && n == r.c->n_poses) {
        st = twf_error_set(err, TWF_ERR_MISSING, points_path, 0, 0,
                           "check that both files come from the same campaign",
                           "no pose of the joints file has points in the points file");
      } else if (n > 0) {
        /* A pose the instrument missed (a broken beam, a target out of
         * sight) is common: say which, and leave it out of the campaign. */
        char list[TWF_ERROR_TEXT_MAX];
        size_t *map = malloc(r.c->n_poses * sizeof *map), kept = 0, i;
        twf_creader_list_ids(list, sizeof list, r.c->pose_ids, which, n);
        twf_warnings_add(w, joints_path, r.c->pose_lines[which[0]], r.jpose_col,
                         "%zu pose%s of the joints file %s no points in the points file "
                         "and %s left out: %s", n, n == 1 ? "" : "s", n == 1 ? "has" : "have",
                         n == 1 ? "is" : "are", list);
        if (map == NULL) {
          st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL,
                             "out of memory reading the campaign");
        } else {
          for (k = 0; k < r.c->n_poses; k++) {
            map[k] = kept;
            if (r.pose_npts[k] == 0)
              continue;
            if (kept != k) {
              memcpy(r.c->pose_ids[kept], r.c->pose_ids[k], sizeof r.c->pose_ids[k]);
              memcpy(r.c->q + kept * r.c->n_joints, r.c->q + k * r.c->n_joints,
                     r.c->n_joints * sizeof *r.c->q);
              r.c->pose_lines[kept] = r.c->pose_lines[k];
              if (r.c->pose_station != NULL)
                r.c->pose_station[kept] = r.c->pose_station[k];
              if (r.c->pose_payload != NULL)
                r.c->pose_payload[kept] = r.c->pose_payload[k];
            }
            kept++;
          }
          for (i = 0; i < r.c->n_meas; i++)
            r.c->meas[i].pose = (uint32_t)map[r.c->meas[i].pose];
          r.c->n_poses = kept;
          free(map);
        }
      }
      free(which);
    }
  }
  return twf_creader_end(&r, st);
}
