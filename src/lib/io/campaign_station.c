/* campaign_station.c: the optional station column of a campaign
 * (twistfit-data(5)): which set-up of the instrument measured a pose.
 * Each station has its own instrument frame, so each has its own base
 * pose; the column is per pose, like the joint values. */
#include "campaign_internal.h"

#include <stdlib.h>

twf_status twf_creader_field_station(creader *r, const twf_csv_row *row,
                                     size_t pose, int new_pose)
{
  twf_campaign *c = r->c;
  long col = r->col[COL_STATION];
  char name[TWF_NAME_MAX];
  size_t k;
  twf_status st;
  /* no column: one station (only one file of a campaign may carry it:
   * the one-file form or the joints file) */
  if (col == 0)
    return TWF_OK;
  if ((st = twf_creader_field_id(r, row, col, name, "station name")) != TWF_OK)
    return st;
  if (twf_station_name_check(name) != 0)
    return twf_creader_error(r, row, col, TWF_ERR_VALUE,
                             "name stations with letters, digits, '_', '-' and '.', starting "
                             "with a letter or a digit",
                             "station name '%s' is not valid", name);
  for (k = 0; k < c->n_stations; k++)
    if (strcmp(c->station_names[k], name) == 0)
      break;
  if (k == c->n_stations) {
    char (*grown)[TWF_NAME_MAX];
    if (c->n_stations == TWF_STATIONS_MAX)
      return twf_creader_error(r, row, col, TWF_ERR_VALUE,
                               "merge stations, or split the campaign",
                               "station '%s' is station %d: at most %d stations are accepted",
                               name, TWF_STATIONS_MAX + 1, TWF_STATIONS_MAX);
    grown = realloc(c->station_names, (c->n_stations + 1) * sizeof *grown);
    if (grown == NULL)
      return twf_creader_nomem(r);
    c->station_names = grown;
    twf_strlcpy(c->station_names[c->n_stations++], name, TWF_NAME_MAX);
  }
  if (new_pose) {
    if (twf_io_grow((void **)&c->pose_station, &r->cap_pst, pose + 1, sizeof *c->pose_station))
      return twf_creader_nomem(r);
    c->pose_station[pose] = k;
    return TWF_OK;
  }
  if (c->pose_station[pose] != k)
    return twf_creader_error(r, row, col, TWF_ERR_VALUE,
                             "a pose is measured from one station; give the visit from the "
                             "other station its own pose id",
                             "pose '%s' repeats with another station: '%s' here but '%s' at line %ld",
                             c->pose_ids[pose], name, c->station_names[c->pose_station[pose]],
                             c->pose_lines[pose]);
  return TWF_OK;
}
