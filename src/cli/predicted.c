/* predicted.c: calibrate's predicted accuracy: the parameter covariance
 * of the as-built model propagated over the workspace and to the check
 * poses (twf_calib_predict), set beside the measured check figures. */
#include "config.h"
#include "plan_cli.h"

#include <math.h>
#include <string.h>

static twf_workspace_options workspace_of(const twf_calib_options *co)
{
  twf_workspace_options wo = twf_workspace_default_options();
  wo.seed = co->seed ^ 0x9e3779b97f4a7c15ULL;
  return wo;
}

void cli_print_predicted(FILE *fp, const twf_calib_result *r, const twf_model *m, const twf_campaign *c,
                         const twf_calib_options *co, const cli_units *u)
{
  twf_workspace_options wo = workspace_of(co);
  twf_calib_prediction *p = NULL;
  twf_error err;
  fprintf(fp, "\nPredicted accuracy of the as-built model (first order from the parameter covariance,\n"
              "instrument frame, base pose included; RMS over the targets per configuration)\n");
  if (twf_calib_predict(r, c, co, &wo, &p, &err) != TWF_OK) {
    fprintf(fp, "  not available: %s\n", err.message);
    return;
  }
  pcli_print_prediction(fp, "  workspace, random configurations within the limits", p->workspace, m, u);
  if (p->check->n > 0) {
    const twf_stats *meas = &r->accuracy_after->position[TWF_SET_CHECK];
    fprintf(fp, "  check poses (%zu): predicted rms %.*f, p95 %.*f, max %.*f %s against the true arm;\n"
                "    with the noise: predicted rms %.*f %s, measured %.*f %s\n",
            p->check->n, u->ldec, p->check->position_stats.rms / u->length_si, u->ldec,
            p->check->position_stats.p95 / u->length_si, u->ldec, p->check->position_stats.max / u->length_si,
            u->length, u->ldec, p->check_rms_with_noise / u->length_si, u->length, u->ldec,
            meas->rms / u->length_si, u->length);
  }
  twf_calib_prediction_free(p);
}

void cli_json_add_predicted(json_t *root, const twf_calib_result *r, const twf_model *m, const twf_campaign *c,
                            const twf_calib_options *co, const cli_units *u)
{
  twf_workspace_options wo = workspace_of(co);
  twf_calib_prediction *p = NULL;
  twf_error err;
  json_t *o, *check, *poses;
  size_t i;
  if (root == NULL)
    return;
  o = json_object();
  if (twf_calib_predict(r, c, co, &wo, &p, &err) != TWF_OK) {
    json_object_set_new(o, "error", json_string(err.message));
    json_object_set_new(root, "predicted_accuracy", o);
    return;
  }
  json_object_set_new(o, "workspace", pcli_json_prediction(p->workspace, m, u, 1));
  check = json_object();
  poses = json_array();
  for (i = 0; i < p->check->n; i++) {
    json_t *e = json_object();
    json_object_set_new(e, "pose", json_string(c->pose_ids[p->check_pose[i]]));
    json_object_set_new(e, "position", cli_json_number(p->check->position[i] / u->length_si));
    if (p->check->orientation != NULL)
      json_object_set_new(e, "orientation", cli_json_number(p->check->orientation[i] / u->angle_si));
    json_array_append_new(poses, e);
  }
  json_object_set_new(check, "position", cli_json_stats(&p->check->position_stats, u->length_si));
  json_object_set_new(check, "rms_with_noise", cli_json_number(p->check_rms_with_noise / u->length_si));
  json_object_set_new(check, "measured_rms",
                      cli_json_number(r->accuracy_after->position[TWF_SET_CHECK].rms / u->length_si));
  json_object_set_new(check, "poses", poses);
  json_object_set_new(o, "check", check);
  json_object_set_new(o, "length_unit", json_string(u->length));
  json_object_set_new(o, "angle_unit", json_string(u->angle));
  json_object_set_new(root, "predicted_accuracy", o);
  twf_calib_prediction_free(p);
}
