/* campaign_write.c: writing a campaign in the one-file form of
 * twistfit-data(5), grouped by pose, every number with 17 significant
 * digits so that reading it back gives the same doubles. */
#include "io_internal.h"

#include <csv.h>
#include <errno.h>
#include <stdlib.h>

static int is_blank(char ch) { return ch == ' ' || ch == '\t'; }

/* Ids go out bare unless the reader would take them apart. */
static void put_text(FILE *out, const char *s)
{
  size_t n = strlen(s);
  int quote = n == 0 || s[0] == '#' || is_blank(s[0]) || is_blank(s[n - 1]) ||
              strpbrk(s, ",;\t\"\r\n") != NULL;
  if (quote)
    csv_fwrite(out, s, strlen(s));
  else
    fputs(s, out);
}

twf_status twf_campaign_write(const twf_campaign *c, const twf_model *m,
                              twf_length_unit length_unit,
                              twf_angle_unit angle_unit, FILE *out,
                              twf_error *err)
{
  size_t j, k, p, *order = NULL, *count = NULL, nj;
  int any_sigma = 0, any_orient = 0, any_payload = 0;
  twf_io_c_locale loc;
  twf_status st;
  twf_error_clear(err);
  if (c == NULL || m == NULL || out == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "campaign, model and output are required");
  if ((unsigned)length_unit > TWF_LENGTH_IN || (unsigned)angle_unit > TWF_ANGLE_MRAD)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "invalid unit");
  if (c->n_stations > TWF_STATIONS_MAX || (c->n_stations > 0 && (c->station_names == NULL ||
                                                                  c->pose_station == NULL)))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "invalid station table");
  for (p = 0; c->n_stations > 0 && p < c->n_poses; p++)
    if (c->pose_station[p] >= c->n_stations)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "pose %zu has a station index out of range", p);
  nj = c->n_joints;
  if (nj != m->n_joints)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "the campaign has %zu joints but the model %zu", nj,
                         m->n_joints);
  for (k = 0; k < c->n_meas; k++) {
    if (c->meas[k].pose >= c->n_poses || c->meas[k].target >= m->n_targets)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "measurement %zu has a pose or target index out of "
                           "range", k);
    any_sigma |= c->meas[k].sigma > 0;
    any_orient |= c->meas[k].has_orientation;
  }
  for (p = 0; p < c->n_poses; p++) {
    long pl = twf_campaign_payload(c, p);
    if (pl >= (long)m->n_payloads)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "pose %zu carries a payload the model does not declare", p);
    any_payload |= pl >= 0;
  }
  /* Group rows by pose (a counting sort keeps the order within a pose). */
  count = calloc(c->n_poses + 1, sizeof *count);
  order = malloc((c->n_meas ? c->n_meas : 1) * sizeof *order);
  if (count == NULL || order == NULL) {
    free(count);
    free(order);
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL,
                         "out of memory writing the campaign");
  }
  for (k = 0; k < c->n_meas; k++)
    count[c->meas[k].pose + 1]++;
  for (p = 0; p < c->n_poses; p++)
    if (count[p + 1] == 0) {
      st = twf_error_set(
          err, TWF_ERR_INVALID, NULL, 0, 0,
          "drop the pose, or write the two files yourself",
          "pose '%s' has no measurement: the one-file form cannot hold it",
          c->pose_ids[p]);
      free(count);
      free(order);
      return st;
    }
  for (p = 0; p < c->n_poses; p++)
    count[p + 1] += count[p];
  for (k = 0; k < c->n_meas; k++)
    order[count[c->meas[k].pose]++] = k;

  if ((st = twf_io_c_locale_enter(&loc, err)) != TWF_OK) {
    free(count);
    free(order);
    return st;
  }
  fprintf(out, "# units: length=%s angle=%s\n", twf_length_unit_name(length_unit),
          twf_angle_unit_name(angle_unit));
  fputs("pose,target", out);
  for (j = 0; j < nj; j++) {
    fputc(',', out);
    put_text(out, m->joints[j].name);
  }
  fputs(",x,y,z", out);
  if (any_orient)
    fputs(",qw,qx,qy,qz", out);
  if (any_sigma)
    fputs(",sigma", out);
  fputs(",set", out);
  if (c->n_stations > 0)
    fputs(",station", out);
  fputs(any_payload ? ",payload\n" : "\n", out);
  for (k = 0; k < c->n_meas; k++) {
    const twf_measurement *ms = &c->meas[order[k]];
    put_text(out, c->pose_ids[ms->pose]);
    fputc(',', out);
    put_text(out, m->targets[ms->target].name);
    for (j = 0; j < nj; j++)
      fprintf(out, ",%.17g",
              m->joints[j].type == TWF_JOINT_PRISMATIC
                  ? twf_length_from_si(c->q[ms->pose * nj + j], length_unit)
                  : twf_angle_from_si(c->q[ms->pose * nj + j], angle_unit));
    for (j = 0; j < 3; j++)
      fprintf(out, ",%.17g", twf_length_from_si(ms->pos[j], length_unit));
    if (any_orient) {
      if (ms->has_orientation) {
        const double *qt = twf_campaign_meas_quat(c, order[k]);
        fprintf(out, ",%.17g,%.17g,%.17g,%.17g", qt[0], qt[1], qt[2], qt[3]);
      } else
        fputs(",,,,", out);
    }
    if (any_sigma) {
      if (ms->sigma > 0)
        fprintf(out, ",%.17g", twf_length_from_si(ms->sigma, length_unit));
      else
        fputc(',', out);
    }
    fputs(ms->set == TWF_SET_CHECK ? ",check" : ",fit", out);
    if (c->n_stations > 0) {
      fputc(',', out);
      put_text(out, c->station_names[twf_campaign_pose_station(c, ms->pose)]);
    }
    if (any_payload) {
      long pl = twf_campaign_payload(c, ms->pose);
      fputc(',', out);
      if (pl >= 0)
        put_text(out, m->payloads[pl].name);
    }
    fputc('\n', out);
  }
  twf_io_c_locale_leave(&loc);
  free(count);
  free(order);
  if (ferror(out))
    return twf_error_set(err, TWF_ERR_IO, NULL, 0, 0, NULL,
                         "cannot write the campaign: %s", strerror(errno));
  return TWF_OK;
}
