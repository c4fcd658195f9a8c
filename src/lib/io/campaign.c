/* campaign.c: the campaign object (twistfit-data(5)): reader options,
 * allocation and release. Reading is in campaign_read.c and
 * campaign_pair.c, writing in campaign_write.c. */
#include "internal.h"

#include <ctype.h>
#include <stdlib.h>

twf_campaign_options twf_campaign_default_options(void)
{
  twf_campaign_options o;
  memset(&o, 0, sizeof o);
  o.length_from_caller = 0;
  o.angle_from_caller = 0;
  o.length_unit = TWF_LENGTH_MM;
  o.angle_unit = TWF_ANGLE_DEG;
  o.limits_are_errors = 0;
  o.limit_tolerance = 1e-9;
  o.max_input_size = TWF_INPUT_SIZE_DEFAULT;
  return o;
}

twf_campaign *twf_campaign_alloc(size_t n_joints, size_t n_poses, size_t n_meas)
{
  twf_campaign *c;
  size_t k;
  if (n_poses > TWF_CAMPAIGN_COUNT_MAX)
    return NULL;
  c = calloc(1, sizeof *c);
  if (c == NULL)
    return NULL;
  c->n_joints = n_joints;
  c->n_poses = n_poses;
  c->n_meas = n_meas;
  c->pose_ids = calloc(n_poses ? n_poses : 1, sizeof *c->pose_ids);
  c->q = calloc(n_poses * n_joints > 0 ? n_poses * n_joints : 1, sizeof *c->q);
  c->pose_lines = calloc(n_poses ? n_poses : 1, sizeof *c->pose_lines);
  c->meas = calloc(n_meas ? n_meas : 1, sizeof *c->meas);
  if (!c->pose_ids || !c->q || !c->pose_lines || !c->meas) {
    twf_campaign_free(c);
    return NULL;
  }
  for (k = 0; k < n_meas; k++)
    c->meas[k].set = TWF_SET_FIT;
  return c;
}

const double *twf_campaign_meas_quat(const twf_campaign *c, size_t i)
{
  static const double identity[4] = {1.0, 0.0, 0.0, 0.0};
  const twf_measurement *ms;
  if (c == NULL || i >= c->n_meas)
    return identity;
  ms = &c->meas[i];
  if (!ms->has_orientation || ms->quat_slot == 0 || ms->quat_slot > c->n_quat)
    return identity;
  return c->meas_quat[ms->quat_slot - 1];
}

twf_status twf_campaign_meas_set_quat(twf_campaign *c, size_t i, const double quat[4])
{
  twf_measurement *ms;
  if (c == NULL || quat == NULL || i >= c->n_meas)
    return TWF_ERR_INVALID;
  ms = &c->meas[i];
  if (ms->quat_slot == 0 || ms->quat_slot > c->n_quat) {
    if (c->n_quat >= TWF_CAMPAIGN_COUNT_MAX)
      return TWF_ERR_INVALID;
    if (c->n_quat == c->cap_quat) {
      size_t cap = c->cap_quat ? 2 * c->cap_quat : 16;
      double(*grown)[4] = realloc(c->meas_quat, cap * sizeof *grown);
      if (grown == NULL)
        return TWF_ERR_NOMEM;
      c->meas_quat = grown;
      c->cap_quat = cap;
    }
    ms->quat_slot = (uint32_t)(++c->n_quat);
  }
  memcpy(c->meas_quat[ms->quat_slot - 1], quat, sizeof c->meas_quat[0]);
  ms->has_orientation = 1;
  c->has_orientation_any = 1;
  return TWF_OK;
}

void twf_campaign_free(twf_campaign *c)
{
  if (c == NULL)
    return;
  free(c->pose_ids);
  free(c->q);
  free(c->pose_lines);
  free(c->pose_payload);
  free(c->meas);
  free(c->meas_quat);
  free(c->station_names);
  free(c->pose_station);
  free(c);
}

size_t twf_campaign_station_count(const twf_campaign *c)
{
  return c->n_stations > 1 ? c->n_stations : 1;
}

size_t twf_campaign_pose_station(const twf_campaign *c, size_t p)
{
  return c->pose_station != NULL && p < c->n_poses ? c->pose_station[p] : 0;
}

int twf_station_name_check(const char *name)
{
  size_t n = 0;
  const char *s;
  if (name == NULL || !isalnum((unsigned char)name[0]))
    return -1;
  for (s = name; *s; s++, n++)
    if (!isalnum((unsigned char)*s) && *s != '_' && *s != '-' && *s != '.')
      return -1;
  return n < TWF_NAME_MAX ? 0 : -1;
}

twf_status twf_campaign_set_stations(twf_campaign *c, size_t n,
                                     const char (*names)[TWF_NAME_MAX],
                                     const size_t *station_of_pose,
                                     twf_error *err)
{
  char (*nm)[TWF_NAME_MAX];
  size_t *ps, k, l;
  if (c == NULL || names == NULL || station_of_pose == NULL || n == 0 || n > TWF_STATIONS_MAX)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "give 1 to %d stations and the station of every pose", TWF_STATIONS_MAX);
  for (k = 0; k < n; k++) {
    if (memchr(names[k], '\0', TWF_NAME_MAX) == NULL || twf_station_name_check(names[k]) != 0)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0,
                           "use letters, digits, '_', '-' and '.'", "invalid station name");
    for (l = 0; l < k; l++)
      if (strcmp(names[k], names[l]) == 0)
        return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                             "station '%s' is named twice", names[k]);
  }
  for (k = 0; k < c->n_poses; k++)
    if (station_of_pose[k] >= n)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "pose %zu has station index %zu of %zu", k, station_of_pose[k], n);
  nm = malloc(n * sizeof *nm);
  ps = malloc((c->n_poses ? c->n_poses : 1) * sizeof *ps);
  if (nm == NULL || ps == NULL) {
    free(nm);
    free(ps);
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
  }
  memcpy(nm, names, n * sizeof *nm);
  memcpy(ps, station_of_pose, c->n_poses * sizeof *ps);
  free(c->station_names);
  free(c->pose_station);
  c->station_names = nm;
  c->pose_station = ps;
  c->n_stations = n;
  return TWF_OK;
}

long twf_campaign_payload(const twf_campaign *c, size_t pose)
{
  return c->pose_payload != NULL && pose < c->n_poses ? c->pose_payload[pose] : -1;
}

twf_status twf_campaign_payload_alloc(twf_campaign *c)
{
  size_t k;
  if (c->pose_payload != NULL)
    return TWF_OK;
  c->pose_payload = malloc((c->n_poses ? c->n_poses : 1) * sizeof *c->pose_payload);
  if (c->pose_payload == NULL)
    return TWF_ERR_NOMEM;
  for (k = 0; k < c->n_poses; k++)
    c->pose_payload[k] = -1;
  return TWF_OK;
}
