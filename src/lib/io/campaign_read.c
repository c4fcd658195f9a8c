/* campaign_read.c: reading campaigns (twistfit-data(5)): the reader's
 * life, one file through the strict CSV layer, the rows of the one-file
 * form, and the one-file and joints-only entry points. */
#include "campaign_internal.h"

#include <stdarg.h>
#include <stdlib.h>

twf_status twf_creader_nomem(creader *r)
{
  return twf_error_set(r->err, TWF_ERR_NOMEM, r->path, 0, 0, NULL,
                       "out of memory reading the campaign");
}

twf_status twf_creader_error(creader *r, const twf_csv_row *row, long col,
                             twf_status st, const char *hint,
                             const char *fmt, ...)
{
  char msg[TWF_ERROR_TEXT_MAX];
  long line = row ? row->line : 0;
  va_list ap;
  if (row && col > 0 && (size_t)col <= row->nf)
    line = row->fline[col - 1];
  va_start(ap, fmt);
  vsnprintf(msg, sizeof msg, fmt, ap);
  va_end(ap);
  return twf_error_set(r->err, st, r->path, line, col, hint, "%s", msg);
}

const char *twf_creader_colname(const creader *r, long col)
{
  return col > 0 && (size_t)col <= r->nh ? r->hname[col - 1] : "?";
}

twf_status twf_creader_count_check(creader *r, const twf_csv_row *row,
                                   size_t value, size_t max, const char *what)
{
  if (value <= max)
    return TWF_OK;
  return twf_creader_error(r, row, 0, TWF_ERR_VALUE,
                           "split the campaign into several files and calibrate from a "
                           "subset of the poses",
                           "the campaign holds more %s than the %zu a campaign can hold",
                           what, max);
}

twf_status twf_creader_line_check(creader *r, const twf_csv_row *row)
{
  return twf_creader_count_check(r, row, row->line > 0 ? (size_t)row->line : 0,
                                 TWF_CAMPAIGN_COUNT_MAX, "lines");
}

twf_status twf_creader_pose_add(creader *r, const char *id, const double *q,
                                long line, size_t *index)
{
  twf_campaign *c = r->c;
  size_t nj = c->n_joints, nt = r->m->n_targets, n = c->n_poses + 1, k;
  size_t old_pt = r->cap_pt;
  if (n > TWF_CAMPAIGN_COUNT_MAX)
    return twf_error_set(r->err, TWF_ERR_VALUE, r->path, line, 0,
                         "split the campaign into several files and calibrate from a "
                         "subset of the poses",
                         "the campaign holds more poses than the %zu a campaign can hold",
                         (size_t)TWF_CAMPAIGN_COUNT_MAX);
  if (twf_io_grow((void **)&c->pose_ids, &r->cap_ids, n, sizeof *c->pose_ids) ||
      twf_io_grow((void **)&c->q, &r->cap_q, n * (nj ? nj : 1), sizeof *c->q) ||
      twf_io_grow((void **)&c->pose_lines, &r->cap_lines, n, sizeof *c->pose_lines) ||
      twf_io_grow((void **)&r->pt_line, &r->cap_pt, n * (nt ? nt : 1), sizeof *r->pt_line) ||
      twf_io_grow((void **)&r->pose_set, &r->cap_set, n, sizeof *r->pose_set) ||
      twf_io_grow((void **)&r->pose_npts, &r->cap_npts, n, sizeof *r->pose_npts))
    return twf_creader_nomem(r);
  for (k = old_pt; k < r->cap_pt; k++)
    r->pt_line[k] = 0;
  twf_strlcpy(c->pose_ids[c->n_poses], id, TWF_NAME_MAX);
  memcpy(c->q + c->n_poses * nj, q, nj * sizeof *q);
  c->pose_lines[c->n_poses] = line;
  r->pose_set[c->n_poses] = -1;
  r->pose_npts[c->n_poses] = 0;
  if (twf_idmap_add(&r->poses, c->pose_ids, n, c->n_poses))
    return twf_creader_nomem(r);
  *index = c->n_poses;
  c->n_poses = n;
  return TWF_OK;
}

twf_status twf_creader_meas_add(creader *r, const twf_measurement *ms,
                                const double quat[4])
{
  twf_campaign *c = r->c;
  twf_status st;
  if (twf_io_grow((void **)&c->meas, &r->cap_meas, c->n_meas + 1, sizeof *c->meas))
    return twf_creader_nomem(r);
  c->meas[c->n_meas] = *ms;
  c->meas[c->n_meas].has_orientation = 0;
  c->meas[c->n_meas].quat_slot = 0;
  c->n_meas++;
  if (!ms->has_orientation)
    return TWF_OK;
  if (c->n_quat >= TWF_CAMPAIGN_COUNT_MAX)
    return twf_error_set(r->err, TWF_ERR_VALUE, r->path, (long)ms->line, 0,
                         "split the campaign into several files and calibrate from a "
                         "subset of the poses",
                         "the campaign holds more 6-D rows than the %zu a campaign can hold",
                         (size_t)TWF_CAMPAIGN_COUNT_MAX);
  st = twf_campaign_meas_set_quat(c, c->n_meas - 1, quat);
  return st == TWF_OK ? TWF_OK : twf_creader_nomem(r);
}

/* A (pose, target) pair may appear once. */
twf_status twf_creader_pair_check(creader *r, const twf_csv_row *row,
                                  size_t pose, size_t target)
{
  long *first = &r->pt_line[pose * r->m->n_targets + target];
  if (*first != 0)
    return twf_creader_error(r, row, r->col[COL_TARGET], TWF_ERR_DUPLICATE,
                             "measure each target once per pose; give repeated visits "
                             "their own pose ids",
                             "pose '%s' target '%s' appears twice (first at line %ld)",
                             r->c->pose_ids[pose], r->m->targets[target].name, *first);
  *first = row->line;
  return TWF_OK;
}

static const char *joint_unit_name(const creader *r, size_t j)
{
  return r->m->joints[j].type == TWF_JOINT_PRISMATIC
             ? twf_length_unit_name(r->lu)
             : twf_angle_unit_name(r->au);
}

static twf_status row_one(creader *r, const twf_csv_row *row)
{
  char id[TWF_NAME_MAX];
  size_t target, pose, j, nj = r->m->n_joints;
  twf_measurement ms;
  double quat[4];
  int set;
  twf_status st;
  if ((st = twf_creader_check_nf(r, row)) != TWF_OK ||
      (st = twf_creader_field_id(r, row, r->col[COL_POSE], id, "pose id")) != TWF_OK ||
      (st = twf_creader_field_target(r, row, &target)) != TWF_OK ||
      (st = twf_creader_field_joints(r, row, r->qbuf)) != TWF_OK ||
      (st = twf_creader_field_meas(r, row, &ms, quat, &set)) != TWF_OK)
    return st;
  pose = twf_idmap_find(&r->poses, r->c->pose_ids, id);
  if (pose == NONE) {
    if ((st = twf_creader_pose_add(r, id, r->qbuf, row->line, &pose)) != TWF_OK ||
        (st = twf_creader_field_station(r, row, pose, 1)) != TWF_OK ||
        (st = twf_creader_field_payload(r, row, pose, 1)) != TWF_OK)
      return st;
  } else {
    if ((st = twf_creader_field_station(r, row, pose, 0)) != TWF_OK)
      return st;
    const double *q0 = r->c->q + pose * nj;
    for (j = 0; j < nj; j++)
      if (q0[j] != r->qbuf[j])
        return twf_creader_error(r, row, r->jcol[j], TWF_ERR_VALUE,
                                 "every row of a pose repeats its joint values; give "
                                 "different poses different ids",
                                 "pose '%s' repeats with other joint values: '%s' is %.10g "
                                 "%s here but %.10g %s at line %ld", id,
                                 r->m->joints[j].name,
                                 twf_creader_joint_from_si(&r->m->joints[j], r->qbuf[j], r->lu, r->au),
                                 joint_unit_name(r, j),
                                 twf_creader_joint_from_si(&r->m->joints[j], q0[j], r->lu, r->au),
                                 joint_unit_name(r, j), r->c->pose_lines[pose]);
  }
  if ((st = twf_creader_field_payload(r, row, pose, 0)) != TWF_OK ||
      (st = twf_creader_pair_check(r, row, pose, target)) != TWF_OK)
    return st;
  ms.pose = (uint32_t)pose;
  ms.target = (uint32_t)target;
  return twf_creader_meas_add(r, &ms, quat);
}

static twf_status reader_row(void *user, twf_csv_in *in,
                             const twf_csv_row *row, int is_header)
{
  creader *r = user;
  if (is_header)
    return twf_creader_map_header(r, in, row);
  switch (r->kind) {
  case KIND_ONE: return row_one(r, row);
  case KIND_JOINTS: return twf_creader_row_joints(r, row);
  case KIND_POINTS: return twf_creader_row_points(r, row);
  }
  return TWF_ERR_INVALID;
}

/* Reset the per-file state and read path as kind. */
twf_status twf_creader_read_file(creader *r, const char *path, file_kind kind)
{
  twf_csv_in in;
  size_t k;
  twf_status st;
  for (k = 0; k < r->nh; k++)
    free(r->hname[k]);
  free(r->hname);
  r->hname = NULL;
  r->nh = 0;
  memset(r->col, 0, sizeof r->col);
  memset(r->jcol, 0, r->m->n_joints * sizeof *r->jcol);
  r->path = path;
  r->kind = kind;
  r->units_line = 0;
  r->decl_length = r->decl_angle = 0;
  r->n_rowlike = 0;
  memset(&in, 0, sizeof in);
  in.path = path;
  in.err = r->err;
  in.row = reader_row;
  in.comment = twf_creader_units_line;
  in.user = r;
  in.max_size = r->opt.max_input_size ? r->opt.max_input_size : TWF_INPUT_SIZE_DEFAULT;
  st = twf_csv_run(&in);
  if (st == TWF_OK && !in.header_seen)
    st = twf_error_set(r->err, TWF_ERR_MISSING, path, 0, 0,
                       "a campaign file starts with a header row of column "
                       "names (see twistfit-data(5))",
                       "the file is empty: no header row");
  else if (st == TWF_OK && in.n_data_rows == 0)
    st = twf_error_set(r->err, TWF_ERR_MISSING, path, in.header_line, 0,
                       "add one row per measurement below the header",
                       "no data rows after the header row");
  twf_csv_clear(&in);
  if (st == TWF_OK && r->c->n_inputs < sizeof r->c->inputs / sizeof r->c->inputs[0])
    r->c->inputs[r->c->n_inputs++] = in.digest;
  /* '#' starts a comment (twistfit-data(5)), so a row whose pose id
   * starts with it is dropped: say so when it looks like one. */
  if (st == TWF_OK && r->n_rowlike > 0)
    twf_warnings_add(r->w, path, r->rowlike_line, r->col[COL_POSE],
                     "%zu comment line%s below the header %s the shape of a data row "
                     "and %s skipped, the first with pose id '%s': quote a pose id "
                     "that starts with '#' (\"%s\") to keep its row", r->n_rowlike,
                     r->n_rowlike == 1 ? "" : "s", r->n_rowlike == 1 ? "has" : "have",
                     r->n_rowlike == 1 ? "is" : "are", r->rowlike_id, r->rowlike_id);
  if (st == TWF_OK && kind != KIND_POINTS) {
    r->jpath = path;
    r->j_lu = r->lu;
    r->j_au = r->au;
    r->jpose_col = r->col[COL_POSE];
    memcpy(r->jcol_saved, r->jcol, r->m->n_joints * sizeof *r->jcol);
  }
  return st;
}

static twf_status reader_init(creader *r, const twf_model *m,
                              const twf_campaign_options *opt,
                              twf_warnings *w, twf_error *err)
{
  size_t j, nj;
  memset(r, 0, sizeof *r);
  r->err = err;
  r->w = w;
  r->m = m;
  if (m == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "no model given to read the campaign against");
  r->opt = opt ? *opt : twf_campaign_default_options();
  if (!(r->opt.limit_tolerance >= 0) || !isfinite(r->opt.limit_tolerance) ||
      (unsigned)r->opt.length_unit > TWF_LENGTH_IN ||
      (unsigned)r->opt.angle_unit > TWF_ANGLE_MRAD)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "invalid campaign options (units or limit tolerance)");
  nj = m->n_joints;
  if (nj == 0)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "the model has no joints");
  for (j = 0; j < nj; j++)
    if (twf_creader_reserved_role(m->joints[j].name) >= 0)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0,
                           "rename the joint in the model",
                           "model joint '%s' has the name of a reserved "
                           "campaign column", m->joints[j].name);
  r->c = calloc(1, sizeof *r->c);
  r->jcol = calloc(nj, sizeof *r->jcol);
  r->jcol_saved = calloc(nj, sizeof *r->jcol_saved);
  r->qbuf = calloc(nj, sizeof *r->qbuf);
  if (!r->c || !r->jcol ||
      !r->jcol_saved || !r->qbuf)
    return twf_creader_nomem(r);
  r->c->n_joints = nj;
  return TWF_OK;
}

static void reader_clear(creader *r)
{
  size_t k;
  for (k = 0; k < r->nh; k++)
    free(r->hname[k]);
  free(r->hname);
  free(r->jcol);
  free(r->jcol_saved);
  free(r->qbuf);
  free(r->poses.slot);
  free(r->pt_line);
  free(r->pose_set);
  free(r->pose_npts);
  free(r->unk);
  free(r->unk_map.slot);
  twf_campaign_free(r->c);
}

static twf_campaign *reader_finish(creader *r, twf_status st)
{
  twf_campaign *c = NULL;
  size_t k;
  if (st == TWF_OK)
    st = twf_creader_check_limits(r);
  if (st == TWF_OK)
    st = twf_creader_check_scale(r);
  if (st == TWF_OK) {
    c = r->c;
    r->c = NULL;
    for (k = 0; k < c->n_meas; k++)
      c->has_orientation_any |= c->meas[k].has_orientation;
  }
  reader_clear(r);
  return c;
}

twf_status twf_creader_begin(creader *r, const twf_model *m,
                             const twf_campaign_options *opt,
                             twf_warnings *w, twf_error *err)
{
  twf_status st = reader_init(r, m, opt, w, err);
  if (st == TWF_OK)
    st = twf_io_c_locale_enter(&r->loc, err);
  return st;
}

twf_campaign *twf_creader_end(creader *r, twf_status st)
{
  /* The limit messages are formatted in the C locale too. */
  twf_campaign *c = reader_finish(r, st);
  twf_io_c_locale_leave(&r->loc);
  return c;
}

twf_campaign *twf_campaign_read(const char *path, const twf_model *m,
                                const twf_campaign_options *opt,
                                twf_warnings *w, twf_error *err)
{
  creader r;
  twf_status st;
  twf_error_clear(err);
  if (path == NULL) {
    twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "no campaign file given");
    return NULL;
  }
  st = twf_creader_begin(&r, m, opt, w, err);
  if (st == TWF_OK)
    st = twf_creader_read_file(&r, path, KIND_ONE);
  return twf_creader_end(&r, st);
}

twf_campaign *twf_campaign_read_joints(const char *joints_path,
                                       const twf_model *m,
                                       const twf_campaign_options *opt,
                                       twf_warnings *w, twf_error *err)
{
  creader r;
  twf_status st;
  twf_error_clear(err);
  if (joints_path == NULL) {
    twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "no joints file given");
    return NULL;
  }
  st = twf_creader_begin(&r, m, opt, w, err);
  if (st == TWF_OK)
    st = twf_creader_read_file(&r, joints_path, KIND_JOINTS);
  return twf_creader_end(&r, st);
}
