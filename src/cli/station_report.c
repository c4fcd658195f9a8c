/* station_report.c: calibrate's section on the instrument stations of a
 * campaign measured from several (the station column of twistfit-data(5)):
 * per station its poses, the accuracy before and after calibration of its
 * kept rows and its fitted base pose; and the JSON member "stations". The
 * figures are the library's (twf_calib_result.station, station_base). A
 * campaign of one station shows nothing here. */
#include "cli.h"

#include <math.h>

static void stats_cell(FILE *fp, const twf_stats *s, const cli_units *u)
{
  if (s->count == 0)
    fprintf(fp, " %10s", "-");
  else
    fprintf(fp, " %10.*f", u->ldec, s->rms / u->length_si);
}

void cli_print_stations(FILE *fp, const twf_calib_result *r, const twf_campaign *c, const cli_units *u)
{
  size_t s;
  if (r->n_stations < 2 || c->station_names == NULL)
    return;
  fprintf(fp, "\nInstrument stations (%zu, each its own base pose: 6 base parameters each)\n", r->n_stations);
  fprintf(fp, "  position error RMS of the rows kept, %s\n", u->length);
  fprintf(fp, "    %-20s %9s %11s %10s %10s %10s %10s\n", "station", "fit poses", "check poses", "fit before",
          "fit after", "chk before", "chk after");
  for (s = 0; s < r->n_stations; s++) {
    const twf_station_summary *su = &r->station[s];
    fprintf(fp, "    %-20s %9zu %11zu", c->station_names[s], su->n_fit_poses, su->n_check_poses);
    stats_cell(fp, &su->fit_before, u);
    stats_cell(fp, &su->fit_after, u);
    stats_cell(fp, &su->check_before, u);
    stats_cell(fp, &su->check_after, u);
    fputc('\n', fp);
  }
  fprintf(fp, "  fitted base pose (robot base frame in the instrument frame at each station):\n");
  for (s = 0; s < r->n_stations; s++) {
    double q[4];
    const twf_pose *B = &r->station_base[s];
    cli_quat_of(B->R, q);
    fprintf(fp, "    %-20s position %.*f %.*f %.*f %s, quaternion_wxyz %.9f %.9f %.9f %.9f\n",
            c->station_names[s], u->ldec, B->p[0] / u->length_si, u->ldec, B->p[1] / u->length_si, u->ldec,
            B->p[2] / u->length_si, u->length, q[0], q[1], q[2], q[3]);
  }
  fprintf(fp, "  the tables above and the predicted accuracy are over every station's rows, each in its own\n"
              "  instrument frame; the workspace prediction is in the frame of station %s\n",
          c->station_names[0]);
}

void cli_json_add_stations(json_t *root, const twf_calib_result *r, const twf_campaign *c, const cli_units *u)
{
  json_t *arr;
  size_t s;
  if (root == NULL || r->n_stations < 2 || c->station_names == NULL)
    return;
  arr = json_array();
  for (s = 0; s < r->n_stations; s++) {
    const twf_station_summary *su = &r->station[s];
    json_array_append_new(
        arr, json_pack("{s:s, s:I, s:I, s:o, s:o, s:{s:o, s:o}, s:{s:o, s:o}}", "name", c->station_names[s],
                       "fit_poses", (json_int_t)su->n_fit_poses, "check_poses", (json_int_t)su->n_check_poses,
                       "base_before", cli_json_pose(&r->station_base_before[s], u), "base_after",
                       cli_json_pose(&r->station_base[s], u), "fit", "before",
                       cli_json_stats(&su->fit_before, u->length_si), "after",
                       cli_json_stats(&su->fit_after, u->length_si), "check", "before",
                       cli_json_stats(&su->check_before, u->length_si), "after",
                       cli_json_stats(&su->check_after, u->length_si)));
  }
  json_object_set_new(root, "stations", arr);
}
