/* calibrate's section "Joint compliance under gravity" and its JSON member
 * "compliance" (the library's twf_compliance_summary, formatted only). */
#include "config.h"
#include "cli.h"

#include <math.h>
#include <stdio.h>

const char cli_compliance_caution[] =
    "The compliances hold only for the masses declared in the model file (its [mass JOINT] and\n"
    "[payload NAME] sections): a body or load heavier or lighter than declared deflects the arm\n"
    "otherwise. Run fk, verify and compensate with --payload naming the load actually carried,\n"
    "and check the compensated program slowly before production.\n";

static const char *state_words(twf_compliance_state s)
{
  switch (s) {
  case TWF_COMPLIANCE_ESTIMATED: return "estimated";
  case TWF_COMPLIANCE_NOT_REVOLUTE: return "none: not a revolute joint";
  case TWF_COMPLIANCE_NO_TORQUE:
    return "fixed: no gravity torque about its axis at any pose (gravity along it, or no mass beyond it)";
  case TWF_COMPLIANCE_CONSTANT_TORQUE: return "fixed: its torque hardly varies over the poses (the offset takes it)";
  case TWF_COMPLIANCE_REDUNDANT: return "fixed: the other parameters explain it (see the parameter list)";
  }
  return "?";
}

static const char *state_name(twf_compliance_state s)
{
  switch (s) {
  case TWF_COMPLIANCE_ESTIMATED: return "estimated";
  case TWF_COMPLIANCE_NOT_REVOLUTE: return "not revolute";
  case TWF_COMPLIANCE_NO_TORQUE: return "no torque";
  case TWF_COMPLIANCE_CONSTANT_TORQUE: return "constant torque";
  case TWF_COMPLIANCE_REDUNDANT: return "redundant";
  }
  return "?";
}

void cli_print_compliance(FILE *fp, const twf_model *m, const twf_campaign *c,
                          const twf_compliance_summary *s, const cli_units *u)
{
  size_t j;
  if (s->n_joints == 0)
    return;
  fprintf(fp, "\nJoint compliance under gravity (theta = scale q + offset + C tau, tau the gravity torque\n"
              "of the declared masses about the joint's axis)\n");
  fprintf(fp, "  loads over the fit poses: %zu (no payload counts as one); the deflections together move\n"
              "  the tool most at pose %s: %.*f %s\n",
          s->n_payloads_used, c->n_poses > s->worst_pose ? c->pose_ids[s->worst_pose] : "-", u->ldec,
          s->worst_tool_m / u->length_si, u->length);
  fprintf(fp, "    %-8s %12s %10s %12s %10s %21s %12s %10s  %s\n", "joint", "C urad/Nm", "std", "k N m/rad", "std",
          "torque range N m", "deflection", "at tool", "pose");
  for (j = 0; j < s->n_joints; j++) {
    const twf_compliance_joint *cj = &s->joints[j];
    if (cj->state != TWF_COMPLIANCE_ESTIMATED) {
      fprintf(fp, "    %-8s %s\n", m->joints[j].name, state_words(cj->state));
      continue;
    }
    fprintf(fp, "    %-8s %12.5f %10.5f %12.4g %10.2g %10.0f..%-10.0f %8.*f %-3s %7.*f %-2s  %s%s\n",
            m->joints[j].name, cj->compliance * 1e6, cj->std * 1e6, cj->stiffness, cj->stiffness_std,
            cj->torque_min, cj->torque_max, u->adec + 1, cj->deflection / u->angle_si, u->angle, u->ldec,
            cj->tool_m / u->length_si, u->length, c->n_poses > cj->worst_pose ? c->pose_ids[cj->worst_pose] : "-",
            cj->weak ? "  (weak)" : "");
  }
  fprintf(fp, "  stiffness k = 1 / C; its std to first order (std / C^2). The model leaves out the change of\n"
              "  tau with the deflection itself (second order: C |dtau/dtheta| times the deflection).\n");
  /* the caution's lines indented under its first */
  fputs("  Caution: ", fp);
  for (const char *c = cli_compliance_caution; *c != '\0'; c++) {
    fputc(*c, fp);
    if (*c == '\n' && c[1] != '\0')
      fputs("           ", fp);
  }
}

json_t *cli_json_compliance(const twf_model *m, const twf_campaign *c, const twf_compliance_summary *s,
                            const cli_units *u)
{
  json_t *o, *arr;
  size_t j;
  if (s->n_joints == 0)
    return json_null();
  o = json_object();
  arr = json_array();
  json_object_set_new(o, "units", json_pack("{s:s, s:s, s:s, s:s, s:s, s:s}", "compliance", "rad/(N m)",
                                            "stiffness", "N m/rad", "torque", "N m", "deflection", u->angle,
                                            "tool", u->length, "mass", "kg"));
  json_object_set_new(o, "loads", json_integer((json_int_t)s->n_payloads_used));
  json_object_set_new(o, "worst_pose",
                      json_string(c->n_poses > s->worst_pose ? c->pose_ids[s->worst_pose] : ""));
  json_object_set_new(o, "worst_tool", cli_json_number(s->worst_tool_m / u->length_si));
  for (j = 0; j < s->n_joints; j++) {
    const twf_compliance_joint *cj = &s->joints[j];
    int est = cj->state == TWF_COMPLIANCE_ESTIMATED;
    json_array_append_new(
        arr, json_pack("{s:s, s:s, s:b, s:o, s:o, s:o, s:o, s:o, s:o, s:o, s:o, s:s}", "joint", m->joints[j].name,
                       "state", state_name(cj->state), "weak", cj->weak, "compliance",
                       cli_json_number(cj->compliance), "std", cli_json_number(est ? cj->std : NAN), "stiffness",
                       cli_json_number(est ? cj->stiffness : NAN), "stiffness_std",
                       cli_json_number(est ? cj->stiffness_std : NAN), "torque_min", cli_json_number(cj->torque_min),
                       "torque_max", cli_json_number(cj->torque_max), "deflection",
                       cli_json_number(cj->deflection / u->angle_si), "tool", cli_json_number(cj->tool_m / u->length_si),
                       "pose", c->n_poses > cj->worst_pose ? c->pose_ids[cj->worst_pose] : ""));
  }
  json_object_set_new(o, "joints", arr);
  json_object_set_new(o, "caution", json_string(cli_compliance_caution));
  return o;
}
