/* campaign.c: the campaign object (twistfit-data(5)): reader options,
 * allocation and release. Reading is in campaign_read.c and
 * campaign_pair.c, writing in campaign_write.c. */
#include "internal.h"

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
  twf_campaign *c = calloc(1, sizeof *c);
  size_t k;
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
  for (k = 0; k < n_meas; k++) {
    c->meas[k].quat[0] = 1.0;
    c->meas[k].set = TWF_SET_FIT;
  }
  return c;
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
  free(c);
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
