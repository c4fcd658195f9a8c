/* check_compliance.c: the mass model and joint compliance (DEVELOPERS.md,
 * "Joint compliance under gravity"): the gravity torques against finite
 * differences of the potential energy, the deflected forward kinematics,
 * the model file's [mass JOINT], [payload NAME], gravity and compliance
 * (round trip and bad input), and the campaign's payload column. The
 * finite differences of the potential energy are the outside reference of
 * the torques: tau_i = -dV/dtheta_i is the definition of a generalised
 * force (any text on Lagrangian mechanics, e.g. Lynch and Park 2017,
 * ch. 8, recalled from memory). */
#include "testutil.h"
#include "arms.h"

#include <gsl/gsl_errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static void add_masses(twf_model *m)
{
  test_arm_add_masses(m);
  ck_assert_uint_eq(m->n_payloads, 2);
  {
    const double c[3] = { 0, 0, 0 };
    ck_assert_int_eq(twf_model_payload_add(m, "part", 1.0, c), TWF_ERR_DUPLICATE);
  }
}

/* Potential energy V = -sum m g . x of the bodies and the payload at joint
 * values theta (the rigid configuration), computed from forward kinematics
 * alone: each body's centre rides on the prefix of its joint. */
static double potential(const twf_model *m0, const double *theta, long payload)
{
  twf_model *m = twf_model_copy(m0);
  size_t n = m->n_joints;
  twf_pose *P = calloc(n + 1, sizeof *P), F;
  double *q = calloc(n, sizeof *q), V = 0.0, x[3];
  for (size_t i = 0; i < n; i++) {
    m->joints[i].scale = 1.0;
    m->joints[i].offset = 0.0;
    m->joints[i].compliance = 0.0;
    q[i] = theta[i];
  }
  twf_model_fk(m, q, P, &F);
  for (size_t i = 0; i < n; i++)
    if (m->joints[i].has_mass) {
      twf_pose_apply(&P[i + 1], m->joints[i].mass_center, x);
      for (int a = 0; a < 3; a++)
        V -= m->joints[i].mass * TWF_GRAVITY_STANDARD * m->gravity[a] * x[a];
    }
  if (payload >= 0) {
    twf_pose_apply(&F, m->payloads[payload].center, x);
    for (int a = 0; a < 3; a++)
      V -= m->payloads[payload].mass * TWF_GRAVITY_STANDARD * m->gravity[a] * x[a];
  }
  free(P);
  free(q);
  twf_model_free(m);
  return V;
}

START_TEST(test_torques_are_minus_dV_dtheta)
{
  twf_model *m = test_arm_model(ARM_TF6S);
  twf_test_rng rng;
  double q[6], th[6], tau[6];
  const double g2[3] = { 0.28, -0.41, -0.868 };
  add_masses(m);
  twf_test_rng_init(&rng, twf_test_seed(1501));
  for (int trial = 0; trial < 12; trial++) {
    long payload = trial % 3 - 1;
    if (trial == 6) { /* a tilted base: gravity off the base z axis */
      double n = sqrt(g2[0] * g2[0] + g2[1] * g2[1] + g2[2] * g2[2]);
      for (int a = 0; a < 3; a++)
        m->gravity[a] = g2[a] / n;
    }
    for (size_t i = 0; i < 6; i++) {
      m->joints[i].offset = twf_test_uniform(&rng, -0.01, 0.01);
      m->joints[i].scale = 1.0 + twf_test_uniform(&rng, -1e-3, 1e-3);
      q[i] = twf_test_uniform(&rng, m->joints[i].limit_lo, m->joints[i].limit_hi);
      th[i] = m->joints[i].scale * q[i] + m->joints[i].offset;
    }
    twf_model_gravity_torques(m, q, payload, tau, NULL);
    for (size_t i = 0; i < 6; i++) {
      const double h = 1e-6;
      double tp[6], tm[6], fd;
      memcpy(tp, th, sizeof th);
      memcpy(tm, th, sizeof th);
      tp[i] += h;
      tm[i] -= h;
      fd = -(potential(m, tp, payload) - potential(m, tm, payload)) / (2 * h);
      ck_assert_msg(fabs(tau[i] - fd) <= 1e-6 * fmax(1.0, fabs(fd)),
                    "trial %d joint %zu payload %ld: tau %.12g N m, -dV/dtheta %.12g N m",
                    trial, i + 1, payload, tau[i], fd);
    }
    /* joint 1 of an upright arm: gravity along its axis, no torque */
    if (trial < 6)
      ck_assert_msg(fabs(tau[0]) < 1e-9, "tau1 = %g on an upright arm", tau[0]);
  }
  twf_model_free(m);
}
END_TEST

START_TEST(test_deflected_fk)
{
  /* theta = scale q + offset + C tau: the loaded arm is the rigid arm at
   * the deflected joint values */
  twf_model *m = test_arm_model(ARM_TF6S), *r;
  double q[6] = { 0.3, -0.4, 0.6, 0.2, -0.7, 0.5 }, tau[6], th[6], qd[6];
  twf_pose F, Fr;
  add_masses(m);
  r = twf_model_copy(m);
  for (size_t i = 1; i < 6; i++)
    m->joints[i].compliance = 1e-6 * (double)(i + 1);
  ck_assert_int_eq(twf_model_has_compliance(m), 1);
  ck_assert_int_eq(twf_model_has_compliance(r), 0);
  twf_model_theta(m, q, 1, th, tau);
  for (size_t i = 0; i < 6; i++) {
    ck_assert_close(th[i], q[i] + m->joints[i].compliance * tau[i], 1e-15);
    qd[i] = th[i];
  }
  twf_model_fk_load(m, q, 1, NULL, &F);
  twf_model_fk(r, qd, NULL, &Fr);
  for (int a = 0; a < 3; a++)
    ck_assert_close(F.p[a], Fr.p[a], 1e-14);
  /* without a payload the bodies still load the joints, and less */
  twf_model_fk_load(m, q, -1, NULL, &F);
  twf_model_fk(m, q, NULL, &Fr);
  for (int a = 0; a < 3; a++)
    ck_assert_close(F.p[a], Fr.p[a], 1e-15);
  twf_model_fk(r, q, NULL, &Fr);
  ck_assert_msg(fabs(F.p[2] - Fr.p[2]) > 1e-5, "the bodies' weight deflects the arm");
  twf_model_free(m);
  twf_model_free(r);
}
END_TEST

static const char heavy_model[] =
  "[robot]\nname = heavy\nlength_unit = mm\nangle_unit = deg\ngravity = 0 0.6 -0.8\n"
  "[joint j1]\ntype = revolute\naxis = 0 0 1\npoint = 0 0 0\n"
  "[joint j2]\ntype = revolute\naxis = 0 1 0\npoint = 300 0 700\ncompliance = 2.5e-7\n"
  "[joint j3]\ntype = prismatic\naxis = 1 0 0\npoint = 300 0 1800\n"
  "[mass j2]\nmass = 120.5\ncenter = 300 -150 1200\n"
  "[payload gripper]\nmass = 40\ncenter = 0 0 150\n"
  "[mass j3]\nmass = 30\ncenter = 800 0 1800\n"
  "[home]\nposition = 1500 0 1800\nquaternion_wxyz = 1 0 0 0\n"
  "[target T1]\noffset = 0 0 50\n";

START_TEST(test_model_file_round_trip)
{
  twf_error err;
  twf_model *m, *m2;
  FILE *f;
  char *text;
  twf_test_tmpdir_make("compliance");
  twf_test_write_file(twf_test_tmppath("heavy.ini"), heavy_model);
  m = twf_model_read(twf_test_tmppath("heavy.ini"), NULL, &err);
  ck_assert_msg(m != NULL, "%s", err.message);
  ck_assert_close(m->gravity[1], 0.6, 1e-15);
  ck_assert_close(m->gravity[2], -0.8, 1e-15);
  ck_assert_close(m->joints[1].compliance, 2.5e-7, 1e-15);
  ck_assert_int_eq(m->joints[0].has_mass, 0);
  ck_assert_int_eq(m->joints[1].has_mass, 1);
  ck_assert_close(m->joints[1].mass, 120.5, 1e-15);
  ck_assert_close(m->joints[1].mass_center[1], -0.15, 1e-15);
  ck_assert_close(m->joints[2].mass_center[0], 0.8, 1e-15);
  ck_assert_uint_eq(m->n_payloads, 1);
  ck_assert_str_eq(m->payloads[0].name, "gripper");
  ck_assert_close(m->payloads[0].center[2], 0.15, 1e-15);
  f = fopen(twf_test_tmppath("again.ini"), "w");
  ck_assert_int_eq(twf_model_write(m, f, &err), TWF_OK);
  fclose(f);
  text = twf_test_slurp(twf_test_tmppath("again.ini"));
  ck_assert_ptr_nonnull(strstr(text, "[payload gripper]"));
  ck_assert_ptr_nonnull(strstr(text, "[mass j2]"));
  free(text);
  m2 = twf_model_read(twf_test_tmppath("again.ini"), NULL, &err);
  ck_assert_msg(m2 != NULL, "%s", err.message);
  for (int a = 0; a < 3; a++) {
    ck_assert_close(m2->gravity[a], m->gravity[a], 1e-15);
    ck_assert_close(m2->joints[1].mass_center[a], m->joints[1].mass_center[a], 1e-15);
    ck_assert_close(m2->payloads[0].center[a], m->payloads[0].center[a], 1e-15);
  }
  ck_assert(m2->joints[1].compliance == m->joints[1].compliance);
  ck_assert(m2->joints[2].mass == m->joints[2].mass);
  ck_assert_int_eq(m2->joints[0].has_mass, 0);
  twf_model_free(m2);
  m2 = twf_model_copy(m);
  ck_assert_uint_eq(m2->n_payloads, 1);
  ck_assert_str_eq(m2->payloads[0].name, "gripper");
  twf_model_free(m2);
  twf_model_free(m);
  twf_test_tmpdir_remove();
}
END_TEST

/* A bad mass model: one replacement in the good file, the status, line
 * and a word of the message. */
static void bad_model(const char *from, const char *to, twf_status want, long line,
                      const char *word)
{
  char text[sizeof heavy_model + 256];
  const char *at = strstr(heavy_model, from);
  twf_error err;
  twf_model *m;
  ck_assert_ptr_nonnull(at);
  snprintf(text, sizeof text, "%.*s%s%s", (int)(at - heavy_model), heavy_model, to,
           at + strlen(from));
  twf_test_write_file(twf_test_tmppath("bad.ini"), text);
  m = twf_model_read(twf_test_tmppath("bad.ini"), NULL, &err);
  ck_assert_msg(m == NULL, "'%s' accepted", to);
  ck_assert_int_eq(err.status, want);
  ck_assert_int_eq(err.line, line);
  ck_assert_msg(strstr(err.message, word) != NULL, "message '%s' lacks '%s'", err.message, word);
}

START_TEST(test_model_file_bad_mass_model)
{
  twf_test_tmpdir_make("compliance");
  bad_model("[mass j2]", "[mass j9]", TWF_ERR_UNKNOWN, 19, "no joint 'j9'");
  bad_model("mass = 120.5", "mass = -3", TWF_ERR_VALUE, 20, "kg");
  bad_model("mass = 120.5", "mass = 0", TWF_ERR_VALUE, 20, "kg");
  bad_model("mass = 120.5\n", "", TWF_ERR_MISSING, 19, "no mass");
  bad_model("center = 0 0 150", "center = 0 150", TWF_ERR_VALUE, 24, "center");
  bad_model("gravity = 0 0.6 -0.8", "gravity = 0 0 0", TWF_ERR_VALUE, 5, "zero");
  bad_model("point = 300 0 1800\n", "point = 300 0 1800\ncompliance = 1e-6\n", TWF_ERR_VALUE,
            19, "prismatic");
  bad_model("compliance = 2.5e-7", "compliance = 3", TWF_ERR_VALUE, 14, "rad/(N m)");
  bad_model("[payload gripper]", "[payload]", TWF_ERR_SYNTAX, 22, "no name");
  bad_model("[mass j3]", "[mass j2]", TWF_ERR_DUPLICATE, 25, "twice");
  bad_model("center = 0 0 150", "centre = 0 0 150", TWF_ERR_UNKNOWN, 24, "centre");
  twf_test_tmpdir_remove();
}
END_TEST

START_TEST(test_campaign_payload_column)
{
  twf_error err;
  twf_model *m;
  twf_campaign *c;
  FILE *f;
  char *text;
  twf_test_tmpdir_make("compliance");
  twf_test_write_file(twf_test_tmppath("heavy.ini"), heavy_model);
  m = twf_model_read(twf_test_tmppath("heavy.ini"), NULL, &err);
  ck_assert_ptr_nonnull(m);
  twf_test_write_file(twf_test_tmppath("c.csv"),
                      "pose,target,j1,j2,j3,x,y,z,payload\n"
                      "P1,T1,10,20,30,1,2,3,gripper\n"
                      "P2,T1,11,21,31,1,2,3,\n"
                      "P3,T1,12,22,32,1,2,3,gripper\n");
  c = twf_campaign_read(twf_test_tmppath("c.csv"), m, NULL, NULL, &err);
  ck_assert_msg(c != NULL, "%s", err.message);
  ck_assert_int_eq(twf_campaign_payload(c, 0), 0);
  ck_assert_int_eq(twf_campaign_payload(c, 1), -1);
  ck_assert_int_eq(twf_campaign_payload(c, 2), 0);
  f = fopen(twf_test_tmppath("w.csv"), "w");
  ck_assert_int_eq(twf_campaign_write(c, m, TWF_LENGTH_MM, TWF_ANGLE_DEG, f, &err), TWF_OK);
  fclose(f);
  text = twf_test_slurp(twf_test_tmppath("w.csv"));
  ck_assert_ptr_nonnull(strstr(text, ",set,payload\n"));
  free(text);
  twf_campaign_free(c);
  c = twf_campaign_read(twf_test_tmppath("w.csv"), m, NULL, NULL, &err);
  ck_assert_msg(c != NULL, "%s", err.message);
  ck_assert_int_eq(twf_campaign_payload(c, 0), 0);
  ck_assert_int_eq(twf_campaign_payload(c, 1), -1);
  twf_campaign_free(c);

  /* no payload column: none anywhere */
  twf_test_write_file(twf_test_tmppath("n.csv"), "pose,target,j1,j2,j3,x,y,z\nP1,T1,1,2,3,1,2,3\n");
  c = twf_campaign_read(twf_test_tmppath("n.csv"), m, NULL, NULL, &err);
  ck_assert_ptr_nonnull(c);
  ck_assert_ptr_null(c->pose_payload);
  ck_assert_int_eq(twf_campaign_payload(c, 0), -1);
  twf_campaign_free(c);

  /* a payload the model does not declare */
  twf_test_write_file(twf_test_tmppath("u.csv"),
                      "pose,target,j1,j2,j3,x,y,z,payload\nP1,T1,1,2,3,1,2,3,anvil\n");
  c = twf_campaign_read(twf_test_tmppath("u.csv"), m, NULL, NULL, &err);
  ck_assert_ptr_null(c);
  ck_assert_int_eq(err.status, TWF_ERR_UNKNOWN);
  ck_assert_int_eq(err.line, 2);
  ck_assert_int_eq(err.column, 9);
  ck_assert_ptr_nonnull(strstr(err.message, "gripper"));

  /* two rows of a pose with different loads */
  twf_model_payload_add(m, "T2", 1.0, m->payloads[0].center);
  twf_test_write_file(twf_test_tmppath("d.csv"),
                      "pose,target,j1,j2,j3,x,y,z,payload\nP1,T1,1,2,3,1,2,3,gripper\n"
                      "P1,T1,1,2,3,1,2,3,\n");
  c = twf_campaign_read(twf_test_tmppath("d.csv"), m, NULL, NULL, &err);
  ck_assert_ptr_null(c);
  ck_assert_int_eq(err.status, TWF_ERR_VALUE);
  ck_assert_int_eq(err.line, 3);
  ck_assert_ptr_nonnull(strstr(err.message, "another payload"));

  /* the two-file form: the joints file names the load */
  twf_test_write_file(twf_test_tmppath("j.csv"), "pose,j1,j2,j3,payload\nA,1,2,3,gripper\nB,1,2,4,\n");
  twf_test_write_file(twf_test_tmppath("p.csv"), "pose,target,x,y,z\nA,T1,1,2,3\nB,T1,1,2,3\n");
  c = twf_campaign_read_pair(twf_test_tmppath("j.csv"), twf_test_tmppath("p.csv"), m, NULL, NULL,
                             &err);
  ck_assert_msg(c != NULL, "%s", err.message);
  ck_assert_int_eq(twf_campaign_payload(c, 0), 0);
  ck_assert_int_eq(twf_campaign_payload(c, 1), -1);
  twf_campaign_free(c);
  twf_test_write_file(twf_test_tmppath("p2.csv"), "pose,target,x,y,z,payload\nA,T1,1,2,3,gripper\n");
  c = twf_campaign_read_pair(twf_test_tmppath("j.csv"), twf_test_tmppath("p2.csv"), m, NULL, NULL,
                             &err);
  ck_assert_ptr_null(c);
  twf_model_free(m);
  twf_test_tmpdir_remove();
}
END_TEST

/* ------------------------------------------------------------------ */
/* Calibration on the elastostatic reference campaigns                 */
/* ------------------------------------------------------------------ */

/* reference: Orocos KDL via Debian python3-pykdl 1.5.1 (forward kinematics
 * and inverse dynamics), tests/gen/gen_kdl_compliance.py: the true
 * stiffnesses of its STIFFNESS table, noise 0.02 mm per coordinate. */
static const double true_stiffness[6] = { 4.0e6, 1.5e7, 8.0e6, 2.0e6, 1.5e6, 1.0e6 };
static const double ref_sigma = 2e-5;

static twf_model *read_ref_model(void)
{
  twf_error err;
  twf_model *m = twf_model_read(twf_test_srcpath("tests/fixtures/compliance_nominal.ini"), NULL, &err);
  ck_assert_msg(m != NULL, "%s:%ld: %s", err.file, err.line, err.message);
  ck_assert_uint_eq(m->n_payloads, 2);
  return m;
}

static twf_campaign *read_ref_campaign(const char *rel, const twf_model *m)
{
  twf_error err;
  twf_campaign *c = twf_campaign_read(twf_test_srcpath(rel), m, NULL, NULL, &err);
  ck_assert_msg(c != NULL, "%s:%ld: %s", err.file, err.line, err.message);
  ck_assert_uint_eq(c->n_poses, 160);
  return c;
}

static double set_rms(const twf_calib_result *res, const double *e3, twf_meas_set which)
{
  double sum = 0.0;
  size_t i, n = 0;
  for (i = 0; i < res->n_meas; i++)
    if (res->meas_set[i] == which) {
      sum += e3[3 * i] * e3[3 * i] + e3[3 * i + 1] * e3[3 * i + 1] + e3[3 * i + 2] * e3[3 * i + 2];
      n++;
    }
  ck_assert_uint_gt(n, 0);
  return sqrt(sum / (double)n);
}

/* RMS distance from the noise-free truth at its poses, each with its
 * payload, from the public forward kinematics. */
static double truth_rms(const twf_calib_result *res, const twf_campaign *truth)
{
  const twf_model *m = res->asbuilt;
  double sum = 0.0;
  size_t i;
  for (i = 0; i < truth->n_meas; i++) {
    const twf_measurement *ms = &truth->meas[i];
    twf_pose F, T;
    double y[3];
    twf_model_fk_load(m, truth->q + ms->pose * truth->n_joints, twf_campaign_payload(truth, ms->pose),
                      NULL, &F);
    twf_pose_mul(&res->base_in_tracker, &F, &T);
    twf_pose_apply(&T, m->targets[ms->target].offset, y);
    for (int a = 0; a < 3; a++)
      sum += (ms->pos[a] - y[a]) * (ms->pos[a] - y[a]);
  }
  return sqrt(sum / (double)truth->n_meas);
}

static twf_calib_result *calibrate_ref(const twf_model *m, const twf_campaign *c, unsigned groups)
{
  twf_calib_options co = twf_calib_default_options();
  twf_calib_result *res = NULL;
  twf_warnings w;
  twf_error err;
  co.groups = groups;
  co.sigma_length = ref_sigma;
  twf_warnings_init(&w);
  ck_assert_msg(twf_calibrate(m, c, &co, &res, &w, &err) == TWF_OK, "calibrate: %s (%s)", err.message,
                err.hint);
  for (size_t k = 0; k < w.count; k++)
    fprintf(stderr, "check_compliance: warning: %s\n", w.items[k].message);
  twf_warnings_clear(&w);
  return res;
}

/* Recovery of the compliances: the loaded joints' within 3 standard
 * deviations, the check set at the noise floor (sigma sqrt(3), the RMS
 * length of isotropic 3-D noise; limit 1.15 of it with the fit's
 * parameters against 120 fit poses), j1 fixed (gravity along its axis). */
static void check_recovery(const char *campaign, double *truth_out)
{
  twf_model *m = read_ref_model();
  twf_campaign *c = read_ref_campaign(campaign, m);
  twf_calib_result *res =
      calibrate_ref(m, c, TWF_GROUPS_GEOMETRIC | TWF_GROUP_BIT(TWF_GROUP_COMPLIANCE));
  double floor = ref_sigma * sqrt(3.0), check = set_rms(res, res->pos_err_after, TWF_SET_CHECK);
  size_t k, found = 0;
  for (k = 0; k < res->n_params; k++) {
    const twf_param_result *p = &res->params[k];
    double truth, got;
    if (p->param.group != TWF_GROUP_COMPLIANCE)
      continue;
    found++;
    truth = 1.0 / true_stiffness[p->param.joint];
    got = res->asbuilt->joints[p->param.joint].compliance;
    fprintf(stderr, "check_compliance: %s: %s %.4g rad/(N m) (std %.2g), true %.4g: %.2f std%s\n",
            campaign, p->param.name, got, p->std, truth, (got - truth) / p->std,
            p->status != TWF_PARAM_KEPT ? " (fixed)" : p->weak ? " (weak)" : "");
    if (p->param.joint == 0) {
      ck_assert_msg(p->status != TWF_PARAM_KEPT, "j1's compliance has no torque to go by");
      continue;
    }
    ck_assert_msg(p->status == TWF_PARAM_KEPT, "%s fixed", p->param.name);
    /* the loaded joints: shoulder, elbow and the wrist bend */
    if (p->param.joint == 1 || p->param.joint == 2 || p->param.joint == 4)
      ck_assert_msg(fabs(got - truth) <= 3 * p->std, "%s: %.4g against %.4g, std %.2g", p->param.name,
                    got, truth, p->std);
  }
  ck_assert_uint_eq(found, 6);
  /* the summary: j1 has no torque, the loads counted, stiffness 1/C with
   * its first-order std, the worst deflection C tau within the torque
   * range seen */
  {
    const twf_compliance_summary *cs = &res->compliance;
    ck_assert_uint_eq(cs->n_joints, 6);
    ck_assert_int_eq(cs->joints[0].state, TWF_COMPLIANCE_NO_TORQUE);
    ck_assert_uint_eq(cs->n_payloads_used, strstr(campaign, "two") != NULL ? 2 : 1);
    for (k = 1; k < 6; k++) {
      const twf_compliance_joint *cj = &cs->joints[k];
      double t = cj->deflection / cj->compliance;
      ck_assert_int_eq(cj->state, TWF_COMPLIANCE_ESTIMATED);
      ck_assert_close(cj->stiffness * cj->compliance, 1.0, 1e-12);
      ck_assert_close(cj->stiffness_std, cj->std / (cj->compliance * cj->compliance), 1e-12);
      ck_assert_msg(t >= cj->torque_min - 1e-9 && t <= cj->torque_max + 1e-9, "joint %zu", k + 1);
      ck_assert_msg(fabs(t) >= 0.999 * fmax(-cj->torque_min, cj->torque_max), "the worst torque, joint %zu", k + 1);
      ck_assert_msg(cj->tool_m > 0.0 && cj->tool_m < 0.01, "joint %zu moves the tool %g m", k + 1, cj->tool_m);
    }
    /* j2, the shoulder: its stiffness within 3 std of the truth */
    ck_assert_msg(fabs(cs->joints[1].stiffness - true_stiffness[1]) <= 3 * cs->joints[1].stiffness_std,
                  "k2 %.4g N m/rad, std %.2g", cs->joints[1].stiffness, cs->joints[1].stiffness_std);
    ck_assert_msg(cs->worst_tool_m > 5e-4, "the arm deflects: %g m", cs->worst_tool_m);
  }
  fprintf(stderr, "check_compliance: %s: check RMS %.5f mm (floor %.5f mm), dropped %zu, refused %zu\n",
          campaign, check * 1e3, floor * 1e3, res->n_dropped, res->screen_refused);
  ck_assert_msg(check <= 1.15 * floor, "check RMS %.5f mm against the floor %.5f mm", check * 1e3,
                floor * 1e3);
  ck_assert_uint_eq(res->n_dropped, 0);
  if (truth_out != NULL)
    *truth_out = 0.0;
  if (strstr(campaign, "two") != NULL) {
    twf_campaign *t = read_ref_campaign("tests/fixtures/compliance_truth.csv", m);
    double tr = truth_rms(res, t);
    fprintf(stderr, "check_compliance: against the noise-free truth %.5f mm\n", tr * 1e3);
    ck_assert_msg(tr <= 0.5 * floor, "%.5f mm from the truth", tr * 1e3);
    twf_campaign_free(t);
  }
  /* the torque family has nothing left to find */
  for (k = 0; k < res->pattern.n_tests; k++)
    ck_assert_msg(!(res->pattern.tests[k].kind == TWF_PATTERN_TORQUE && res->pattern.tests[k].significant),
                  "torque pattern of joint %zu after the compliance fit", res->pattern.tests[k].joint + 1);
  twf_calib_result_free(res);
  twf_campaign_free(c);
  twf_model_free(m);
}

START_TEST(test_recovery_one_payload) { check_recovery("tests/fixtures/compliance_one.csv", NULL); }
END_TEST
START_TEST(test_recovery_two_payloads) { check_recovery("tests/fixtures/compliance_two.csv", NULL); }
END_TEST

/* Without the compliance group: the residual test flags a torque
 * pattern and names the loaded joints, and the screen drops no good
 * reading (the campaigns hold no gross error). */
static void check_without_group(const char *campaign)
{
  twf_model *m = read_ref_model();
  twf_campaign *c = read_ref_campaign(campaign, m);
  twf_calib_result *res = calibrate_ref(m, c, TWF_GROUPS_GEOMETRIC);
  double floor = ref_sigma * sqrt(3.0), check = set_rms(res, res->pos_err_after, TWF_SET_CHECK);
  int torque_flag = 0, j2_or_j3 = 0;
  size_t k;
  for (k = 0; k < res->pattern.n_tests; k++) {
    const twf_pattern_test *t = &res->pattern.tests[k];
    if (t->kind == TWF_PATTERN_TORQUE)
      ck_assert_int_ne(t->skip, TWF_PATTERN_NO_TORQUE);
    if (t->significant)
      fprintf(stderr, "check_compliance: %s without compliance: j%zu %s p %.2g explains %.1f %%\n",
              campaign, t->joint + 1, twf_pattern_kind_name(t->kind), t->p_value, 100 * t->explained);
    if (t->significant && t->kind == TWF_PATTERN_TORQUE) {
      torque_flag = 1;
      j2_or_j3 |= t->joint == 1 || t->joint == 2;
    }
  }
  fprintf(stderr, "check_compliance: %s without compliance: check RMS %.5f mm, dropped %zu, refused %zu\n",
          campaign, check * 1e3, res->n_dropped, res->screen_refused);
  ck_assert_msg(check > 1.5 * floor, "the deflection is visible: %.5f mm", check * 1e3);
  ck_assert_msg(torque_flag && j2_or_j3, "the torque pattern of j2 or j3 is flagged");
  ck_assert_msg(res->pattern.n_significant > 0, "residuals flagged");
  ck_assert_msg(res->n_dropped == 0, "%zu good readings dropped", res->n_dropped);
  twf_calib_result_free(res);
  twf_campaign_free(c);
  twf_model_free(m);
}

START_TEST(test_without_group_one_payload) { check_without_group("tests/fixtures/compliance_one.csv"); }
END_TEST
START_TEST(test_without_group_two_payloads) { check_without_group("tests/fixtures/compliance_two.csv"); }
END_TEST

/* A rigid arm with a mass model: the torque family runs and the residual
 * test stays quiet. 40 seeded campaigns of tf6s (60 poses, 0.02 mm, two
 * payloads in turn); the false-alarm rate of the whole test is below
 * alpha = 0.01 per campaign (twistfit/pattern.h), so more than one alarm
 * in 40 would be a fault (probability below 0.1 % at the stated rate). */
START_TEST(test_rigid_quiet_with_masses)
{
  const twf_perturbation mag = { 1e-3, 0.5e-3, 1e-3, 1e-3, 0.0 };
  size_t alarms = 0, tested = 0;
  for (unsigned long long seed = 1; seed <= 40; seed++) {
    twf_model *nominal = test_arm_model(ARM_TF6S), *truth;
    twf_simulate_options so = twf_simulate_default_options();
    twf_calib_options co = twf_calib_default_options();
    twf_calib_result *res = NULL;
    twf_campaign *c;
    twf_pose base;
    twf_error err;
    test_arm_add_masses(nominal);
    truth = twf_model_copy(nominal);
    twf_model_perturb(truth, &mag, twf_test_seed(1500 + seed));
    test_tracker_base(&base);
    so.n_poses = 60;
    so.sigma_m = 2e-5;
    so.seed = twf_test_seed(2500 + seed);
    so.check_fraction = 0.25;
    c = twf_simulate_campaign(truth, &base, &so, &err);
    ck_assert_msg(c != NULL, "%s", err.message);
    ck_assert_int_eq(twf_campaign_payload_alloc(c), TWF_OK);
    for (size_t k = 0; k < c->n_poses; k++)
      c->pose_payload[k] = (long)(k % 2);
    co.sigma_length = 2e-5;
    ck_assert_msg(twf_calibrate(nominal, c, &co, &res, NULL, &err) == TWF_OK, "%s", err.message);
    for (size_t k = 0; k < res->pattern.n_tests; k++)
      tested += res->pattern.tests[k].kind == TWF_PATTERN_TORQUE &&
                res->pattern.tests[k].skip == TWF_PATTERN_TESTED;
    alarms += res->pattern.n_significant > 0;
    ck_assert_uint_eq(res->n_dropped, 0);
    twf_calib_result_free(res);
    twf_campaign_free(c);
    twf_model_free(truth);
    twf_model_free(nominal);
  }
  fprintf(stderr, "check_compliance: rigid arm with masses: %zu alarms in 40 campaigns, %zu torque families "
          "tested\n", alarms, tested);
  ck_assert_uint_gt(tested, 40);
  ck_assert_uint_le(alarms, 1);
}
END_TEST

int main(void)
{
  Suite *s = suite_create("compliance");
  TCase *tc = tcase_create("core");
  gsl_set_error_handler_off();
  tcase_set_timeout(tc, 60);
  tcase_add_test(tc, test_torques_are_minus_dV_dtheta);
  tcase_add_test(tc, test_deflected_fk);
  tcase_add_test(tc, test_model_file_round_trip);
  tcase_add_test(tc, test_model_file_bad_mass_model);
  tcase_add_test(tc, test_campaign_payload_column);
  suite_add_tcase(s, tc);
  tc = tcase_create("calibrate");
  tcase_set_timeout(tc, 300);
  tcase_add_test(tc, test_recovery_one_payload);
  tcase_add_test(tc, test_recovery_two_payloads);
  tcase_add_test(tc, test_without_group_one_payload);
  tcase_add_test(tc, test_without_group_two_payloads);
  tcase_add_test(tc, test_rigid_quiet_with_masses);
  suite_add_tcase(s, tc);
  return twf_test_run(s);
}
