/* arms.c: in-memory sample arms for library tests (tables of samples/). */
#include "arms.h"

#include <math.h>
#include <string.h>
#include <stdio.h>

#define D2R (3.14159265358979323846 / 180.0)

typedef struct { double a, alpha, d, theta; int prismatic; double lo, hi; } row;

static const row tf6s[] = {
  { 0.150, -90, 0.450, 0, 0, -170, 170 }, { 0.610, 0, 0, -90, 0, -100, 145 },
  { 0.115, -90, 0, 0, 0, -120, 155 },     { 0, 90, 0.640, 0, 0, -185, 185 },
  { 0, -90, 0, 0, 0, -125, 125 },         { 0, 0, 0.095, 0, 0, -350, 350 },
};
static const double tf6s_t[][3] = { { 0.040, 0, 0.060 }, { -0.030, 0.045, 0.075 }, { 0, -0.050, 0.050 } };
static const row tf6p[] = {
  { 0, 90, 0.171, 0, 0, -360, 360 },  { -0.480, 0, 0, 0, 0, -360, 360 },
  { -0.405, 0, 0, 0, 0, -170, 170 },  { 0, 90, 0.118, 0, 0, -360, 360 },
  { 0, -90, 0.108, 0, 0, -360, 360 }, { 0, 0, 0.086, 0, 0, -360, 360 },
};
static const double tf6p_t[][3] = { { 0.035, 0, 0.040 }, { 0, 0.035, 0.055 } };
/* modified DH: a, alpha hold a_(i-1), alpha_(i-1) */
static const row tf7[] = {
  { 0, 0, 0.340, 0, 0, -165, 165 },     { 0, -90, 0, 0, 0, -100, 100 },
  { 0, 90, 0.400, 0, 0, -165, 165 },    { 0.060, 90, 0, 0, 0, -170, -5 },
  { -0.060, -90, 0.390, 0, 0, -165, 165 }, { 0, 90, 0, 0, 0, -5, 210 },
  { 0.080, 90, 0, 0, 0, -170, 170 },
};
static const double tf7_t[][3] = { { 0.030, 0.020, 0.050 }, { -0.040, 0, 0.065 }, { 0.010, -0.045, 0.045 } };
static const row tf4p[] = {
  { 0.325, 0, 0.200, 0, 0, -140, 140 }, { 0.275, 180, 0, 0, 0, -145, 145 },
  { 0, 0, 0, 0, 1, 0, 200 },            { 0, 0, 0.050, 0, 0, -360, 360 },
};
static const double tf4p_t[][3] = { { 0.030, 0, 0.020 }, { 0, 0.030, 0.025 } };

twf_model *test_arm_model(test_arm arm)
{
  const row *rows;
  const double (*tg)[3];
  size_t n, nt, i;
  twf_dh_convention conv = TWF_DH_STANDARD;
  twf_dh_row dh[8];
  twf_pose flange;
  twf_model *m;
  switch (arm) {
  case ARM_TF6S: rows = tf6s; n = 6; tg = tf6s_t; nt = 3; break;
  case ARM_TF6P: rows = tf6p; n = 6; tg = tf6p_t; nt = 2; break;
  case ARM_TF7: rows = tf7; n = 7; tg = tf7_t; nt = 3; conv = TWF_DH_MODIFIED; break;
  default: rows = tf4p; n = 4; tg = tf4p_t; nt = 2; break;
  }
  m = twf_model_alloc(n, nt);
  if (m == NULL)
    return NULL;
  twf_pose_identity(&flange);
  if (arm == ARM_TF7)
    flange.p[2] = 0.110;
  for (i = 0; i < n; i++) {
    dh[i].a = rows[i].a;
    dh[i].alpha = rows[i].alpha * D2R;
    dh[i].d = rows[i].d;
    dh[i].theta = rows[i].theta * D2R;
    dh[i].type = rows[i].prismatic ? TWF_JOINT_PRISMATIC : TWF_JOINT_REVOLUTE;
    snprintf(m->joints[i].name, TWF_NAME_MAX, "j%zu", i + 1);
    m->joints[i].has_limits = 1;
    m->joints[i].limit_lo = rows[i].prismatic ? rows[i].lo * 1e-3 : rows[i].lo * D2R;
    m->joints[i].limit_hi = rows[i].prismatic ? rows[i].hi * 1e-3 : rows[i].hi * D2R;
  }
  if (twf_model_set_from_dh(m, dh, n, conv, &flange, NULL) != TWF_OK) {
    twf_model_free(m);
    return NULL;
  }
  for (i = 0; i < nt; i++) {
    snprintf(m->targets[i].name, TWF_NAME_MAX, "T%zu", i + 1);
    memcpy(m->targets[i].offset, tg[i], sizeof tg[i]);
    m->targets[i].offset_known = 1;
  }
  snprintf(m->name, sizeof m->name, "%s",
           arm == ARM_TF6S ? "tf6s" : arm == ARM_TF6P ? "tf6p" : arm == ARM_TF7 ? "tf7" : "tf4p");
  return m;
}

void test_tracker_base(twf_pose *B)
{
  const double w[3] = { 0.31, -0.52, 0.79 };
  const double S[6] = { w[0], w[1], w[2], 0, 0, 0 };
  twf_se3_exp(S, 1.0, B);
  B->p[0] = 3.217;
  B->p[1] = -1.845;
  B->p[2] = 0.734;
}

void test_arm_add_masses(twf_model *m)
{
  const double p1[3] = { 0.01, -0.02, 0.12 }, p2[3] = { -0.04, 0.05, 0.21 };
  for (size_t i = 0; i < m->n_joints; i++) {
    const double *a = m->joints[i].point;
    const double *b = i + 1 < m->n_joints ? m->joints[i + 1].point : m->home.p;
    m->joints[i].has_mass = 1;
    m->joints[i].mass = 60.0 / (double)(i + 1);
    for (int k = 0; k < 3; k++)
      m->joints[i].mass_center[k] = 0.5 * (a[k] + b[k]) + 0.03 * (double)((int)(i + (size_t)k) % 3 - 1);
  }
  twf_model_payload_add(m, "gripper", 12.5, p1);
  twf_model_payload_add(m, "part", 31.0, p2);
}
