/* check_apply.c: inverse kinematics, program compensation and the
 * workspace comparison of two models (src/lib/apply). */
#include "testutil.h"
#include "arms.h"

#include <gsl/gsl_errno.h>
#include <gsl/gsl_linalg.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "twistfit.h"

#define DEG (3.14159265358979323846 / 180.0)

/* An as-built arm: realistic errors (1 mrad tilts, 0.5 mm shifts, 2 mrad
 * offsets, 1 mm nests, 1e-4 scale), the sizes the calibration tests use. */
static const twf_perturbation MAG = { 1e-3, 0.5e-3, 2e-3, 1e-3, 1e-4 };

static void random_q(const twf_model *m, twf_test_rng *rng, double margin, double *q)
{
  size_t j;
  for (j = 0; j < m->n_joints; j++) {
    double lo = m->joints[j].limit_lo, hi = m->joints[j].limit_hi, s = margin * (hi - lo);
    q[j] = twf_test_uniform(rng, lo + s, hi - s);
  }
}

static double dist3(const double a[3], const double b[3])
{
  return sqrt((a[0] - b[0]) * (a[0] - b[0]) + (a[1] - b[1]) * (a[1] - b[1]) + (a[2] - b[2]) * (a[2] - b[2]));
}

/* ------------------------------------------------------------------ */
/* Round trip                                                          */
/* ------------------------------------------------------------------ */

#define N_ROWS 100

/* The as-built forward kinematics at the compensated joints equals the
 * nominal forward kinematics at the original ones, on every sample arm:
 * the full pose on the 6- and 7-axis arms (tf7 redundant: 6 conditions, 7
 * joints), one target's position on the 4-axis tf4p (which cannot match a
 * full pose). Reference: the nominal model's forward kinematics (itself
 * checked against Orocos KDL in check_model.c); tolerance 1e-9 m and 1e-9
 * rad: common practice, no source. */
START_TEST(test_round_trip)
{
  test_arm arm = (test_arm)_i;
  twf_model *nom = test_arm_model(arm), *asb = twf_model_copy(nom);
  uint64_t seed = twf_test_seed(4100 + (uint64_t)_i);
  twf_test_rng rng;
  twf_compensate_options co = twf_compensate_default_options();
  twf_compensate_summary sum;
  twf_ik_result *res = malloc(N_ROWS * sizeof *res);
  double *q = malloc(N_ROWS * nom->n_joints * sizeof *q), *qc = malloc(N_ROWS * nom->n_joints * sizeof *qc);
  size_t r, good = 0, n = nom->n_joints;
  twf_error err;

  ck_assert_ptr_nonnull(asb);
  twf_model_perturb(asb, &MAG, seed);
  twf_test_rng_init(&rng, seed);
  for (r = 0; r < N_ROWS; r++)
    random_q(nom, &rng, 0.05, q + r * n);
  if (arm == ARM_TF4P) {
    co.kind = TWF_IK_POINT;
    co.target = "T1";
  }
  ck_assert_int_eq(twf_compensate_program(nom, asb, q, N_ROWS, &co, qc, res, &sum, &err), TWF_OK);
  ck_assert_uint_eq(sum.n_rows, N_ROWS);
  for (r = 0; r < N_ROWS; r++) {
    twf_pose Tn, Ta;
    twf_model_fk(nom, q + r * n, NULL, &Tn);
    twf_model_fk(asb, qc + r * n, NULL, &Ta);
    if (res[r].flags != 0) {
      /* a flagged row must say why: the singularity measure or limits */
      ck_assert_msg(!(res[r].flags & TWF_IK_NEAR_SINGULAR) || res[r].sigma_min < co.ik.singular_threshold,
                    "seed %llu row %zu flagged near-singular at sigma %g", (unsigned long long)seed, r,
                    res[r].sigma_min);
      continue;
    }
    good++;
    ck_assert(res[r].sigma_min >= co.ik.singular_threshold);
    if (arm == ARM_TF4P) {
      double yn[3], ya[3];
      twf_pose_apply(&Tn, nom->targets[0].offset, yn);
      twf_pose_apply(&Ta, asb->targets[0].offset, ya);
      ck_assert_msg(dist3(yn, ya) <= 1e-9, "seed %llu row %zu: %g m", (unsigned long long)seed, r,
                    dist3(yn, ya));
      ck_assert(res[r].position_error_m <= 1e-9);
    } else {
      ck_assert_msg(dist3(Tn.p, Ta.p) <= 1e-9, "seed %llu row %zu: %g m", (unsigned long long)seed, r,
                    dist3(Tn.p, Ta.p));
      ck_assert_msg(twf_rot_angle_between(Tn.R, Ta.R) <= 1e-9, "seed %llu row %zu: %g rad",
                    (unsigned long long)seed, r, twf_rot_angle_between(Tn.R, Ta.R));
    }
    /* a sanity bound: the as-built arm is millimetres from nominal; near
     * (not at) a singularity the change grows as 1 / sigma_min, up to 0.2
     * rad seen at sigma 0.015 (common practice, no source) */
    ck_assert_msg(res[r].max_change_rad < 0.5, "row %zu: change %g rad", r, res[r].max_change_rad);
  }
  /* the test is not vacuous: most random rows are good ones */
  ck_assert_msg(good >= N_ROWS * 8 / 10, "seed %llu: only %zu of %d rows unflagged", (unsigned long long)seed,
                good, N_ROWS);
  ck_assert_uint_eq(sum.n_flagged, N_ROWS - good);
  free(res);
  free(q);
  free(qc);
  twf_model_free(asb);
  twf_model_free(nom);
}
END_TEST

/* A row at the wrist singularity of tf6s (j5 = 0: j4 and j6 on one line)
 * is flagged, and the singularity measure there is small. Reference: the
 * singular configurations of a spherical wrist (the standard result for
 * j5 = 0); threshold: common practice, no source. */
START_TEST(test_singular_row_flagged)
{
  twf_model *nom = test_arm_model(ARM_TF6S), *asb = twf_model_copy(nom);
  double q[6] = { 0.3, 0.2, -0.4, 0.5, 0.0, 0.7 }, qc[6];
  twf_ik_result res;
  twf_error err;
  twf_model_perturb(asb, &MAG, 11);
  ck_assert_int_eq(twf_compensate_program(nom, asb, q, 1, NULL, qc, &res, NULL, &err), TWF_OK);
  ck_assert_msg(res.flags & TWF_IK_NEAR_SINGULAR, "flags %u sigma %g", res.flags, res.sigma_min);
  ck_assert(res.sigma_min < 1e-2);
  /* and ten degrees away from it, the same row is good */
  q[4] = 10 * DEG;
  ck_assert_int_eq(twf_compensate_program(nom, asb, q, 1, NULL, qc, &res, NULL, &err), TWF_OK);
  ck_assert_uint_eq(res.flags, 0);
  twf_model_free(asb);
  twf_model_free(nom);
}
END_TEST

/* An offsets-only change of joint 1 (a rotation of everything about the
 * base z axis) is compensated exactly by the opposite change of q1, the
 * other joints unchanged; at the upper limit of j1 the result leaves the
 * limits and is flagged. Reference: theta = scale q + offset, so q1' = q1 -
 * d offset reproduces every theta (exact; tolerance 1e-9 rad: common
 * practice, no source). */
START_TEST(test_offset_exact_and_limits)
{
  twf_model *nom = test_arm_model(ARM_TF6S), *asb = twf_model_copy(nom);
  double q[12] = { 0.3, 0.2, -0.4, 0.5, 0.6, 0.7, 0, 0.2, -0.4, 0.5, 0.6, 0.7 }, qc[12];
  twf_ik_result res[2];
  twf_compensate_summary sum;
  twf_error err;
  int j;
  q[6] = nom->joints[0].limit_hi;
  asb->joints[0].offset -= 0.01;
  ck_assert_int_eq(twf_compensate_program(nom, asb, q, 2, NULL, qc, res, &sum, &err), TWF_OK);
  for (j = 0; j < 6; j++) {
    ck_assert_msg(fabs(qc[j] - (q[j] + (j == 0 ? 0.01 : 0.0))) <= 1e-9, "joint %d: %.17g", j, qc[j] - q[j]);
    ck_assert_msg(fabs(qc[6 + j] - (q[6 + j] + (j == 0 ? 0.01 : 0.0))) <= 1e-9, "joint %d: %.17g", j,
                  qc[6 + j] - q[6 + j]);
  }
  ck_assert_uint_eq(res[0].flags, 0);
  ck_assert_uint_eq(res[1].flags, TWF_IK_OUTSIDE_LIMITS);
  ck_assert_int_eq(res[1].outside_joint, 0);
  ck_assert_int_eq(res[0].max_change_joint, 0);
  ck_assert(fabs(res[0].max_change_rad - 0.01) <= 1e-9);
  ck_assert_uint_eq(sum.n_flagged, 1);
  ck_assert_uint_eq(sum.n_outside_limits, 1);
  twf_model_free(asb);
  twf_model_free(nom);
}
END_TEST

/* Too few evaluations: not converged, flagged, the best values kept. */
START_TEST(test_not_converged_flagged)
{
  twf_model *nom = test_arm_model(ARM_TF6S), *asb = twf_model_copy(nom);
  double q[6] = { 0.3, 0.2, -0.4, 0.5, 0.6, 0.7 }, qc[6];
  twf_compensate_options co = twf_compensate_default_options();
  twf_ik_result res;
  twf_error err;
  twf_model_perturb(asb, &MAG, 12);
  co.ik.max_iter = 2;
  ck_assert_int_eq(twf_compensate_program(nom, asb, q, 1, &co, qc, &res, NULL, &err), TWF_OK);
  ck_assert(res.flags & TWF_IK_NOT_CONVERGED);
  ck_assert_uint_le(res.evaluations, 2);
  /* one Gauss-Newton step already took most of the error away */
  ck_assert(res.position_error_m < 1e-5);
  twf_model_free(asb);
  twf_model_free(nom);
}
END_TEST

/* Refusals: a full pose on a 4-axis arm, models of different arms, an
 * unknown target. */
START_TEST(test_refusals)
{
  twf_model *a4 = test_arm_model(ARM_TF4P), *a6 = test_arm_model(ARM_TF6S);
  double q[7] = { 0 }, qc[7];
  twf_compensate_options co = twf_compensate_default_options();
  twf_error err;
  ck_assert_int_eq(twf_compensate_program(a4, a4, q, 1, NULL, qc, NULL, NULL, &err), TWF_ERR_DEGENERATE);
  ck_assert_int_eq(err.line, 1);
  ck_assert_int_eq(twf_compensate_program(a4, a6, q, 1, NULL, qc, NULL, NULL, &err), TWF_ERR_VALUE);
  ck_assert_ptr_nonnull(strstr(err.message, "4 joints"));
  co.kind = TWF_IK_POINT;
  co.target = "T9";
  ck_assert_int_eq(twf_compensate_program(a6, a6, q, 1, &co, qc, NULL, NULL, &err), TWF_ERR_UNKNOWN);
  twf_model_free(a4);
  twf_model_free(a6);
}
END_TEST

/* ------------------------------------------------------------------ */
/* Inverse kinematics of the as-built arm                              */
/* ------------------------------------------------------------------ */

/* The scaled task Jacobian: central differences of the forward
 * kinematics (step 1e-6; common practice, no source). Rows: rotation
 * (pose goals), then position / L; prismatic columns times L. */
static void fd_jacobian(const twf_model *m, const double *q, int pose, const double pt[3], double L,
                        double *J)
{
  size_t n = m->n_joints, i;
  int rows = pose ? 6 : 3, a;
  double qp[8], qm[8], h = 1e-6;
  for (i = 0; i < n; i++) {
    twf_pose Tp, Tm;
    double yp[3], ym[3], s = m->joints[i].type == TWF_JOINT_PRISMATIC ? L : 1.0, dR[3][3], w[3];
    int x, y, z;
    memcpy(qp, q, n * sizeof *q);
    memcpy(qm, q, n * sizeof *q);
    qp[i] += h * s;
    qm[i] -= h * s;
    twf_model_fk(m, qp, NULL, &Tp);
    twf_model_fk(m, qm, NULL, &Tm);
    twf_pose_apply(&Tp, pt, yp);
    twf_pose_apply(&Tm, pt, ym);
    /* spatial angular velocity: log(R+ R-^T) / 2h */
    for (x = 0; x < 3; x++)
      for (y = 0; y < 3; y++) {
        dR[x][y] = 0;
        for (z = 0; z < 3; z++)
          dR[x][y] += Tp.R[x][z] * Tm.R[y][z];
      }
    twf_so3_log(dR, w);
    a = 0;
    if (pose)
      for (x = 0; x < 3; x++)
        J[(size_t)(a++) * n + i] = w[x] / (2 * h);
    for (x = 0; x < 3; x++)
      J[(size_t)(a++) * n + i] = (yp[x] - ym[x]) / (2 * h) / L;
  }
  (void)rows;
}

static double fd_sigma_min(const double *J, int rows, size_t n)
{
  gsl_matrix *A = gsl_matrix_alloc(n, (size_t)rows), *V = gsl_matrix_alloc((size_t)rows, (size_t)rows);
  gsl_vector *S = gsl_vector_alloc((size_t)rows), *work = gsl_vector_alloc((size_t)rows);
  size_t i;
  int r;
  double s;
  for (i = 0; i < n; i++)
    for (r = 0; r < rows; r++)
      gsl_matrix_set(A, i, (size_t)r, J[(size_t)r * n + i]);
  ck_assert_int_eq(gsl_linalg_SV_decomp(A, V, S, work), 0);
  s = gsl_vector_min(S);
  gsl_matrix_free(A);
  gsl_matrix_free(V);
  gsl_vector_free(S);
  gsl_vector_free(work);
  return s;
}

/* Cartesian goals: the as-built pose of a target at known joint values,
 * started 2 degrees away on every joint, is reached to 1e-9 m and rad, and
 * for the non-redundant tf6s the known joint values come back; the
 * reported singularity measure is the smallest singular value of a
 * finite-difference scaled Jacobian (to 1e-6 relative). References:
 * forward kinematics; central differences (common practice, no source). */
START_TEST(test_ik_cartesian)
{
  twf_model *m = test_arm_model(ARM_TF6S);
  twf_ik *w = twf_ik_alloc(m->n_joints);
  twf_ik_options o = twf_ik_default_options();
  twf_test_rng rng;
  double q[6], q0[6], qs[6], J[36];
  int row, j;
  twf_model_perturb(m, &MAG, 21);
  twf_test_rng_init(&rng, twf_test_seed(22));
  for (row = 0; row < 20; row++) {
    twf_ik_goal g;
    twf_pose T, Ts;
    twf_ik_result res;
    twf_error err;
    double ys[3], L = twf_model_reach(m);
    random_q(m, &rng, 0.1, q);
    if (fabs(q[4]) < 10 * DEG)
      q[4] = 10 * DEG; /* away from the wrist singularity */
    for (j = 0; j < 6; j++)
      q0[j] = q[j] + (j % 2 ? 2 : -2) * DEG;
    twf_model_fk(m, q, NULL, &T);
    g.kind = TWF_IK_POSE;
    memcpy(g.R, T.R, sizeof g.R);
    memcpy(g.point, m->targets[1].offset, sizeof g.point);
    twf_pose_apply(&T, g.point, g.p);
    ck_assert_int_eq(twf_ik_solve(w, m, &g, q0, &o, qs, &res, &err), TWF_OK);
    fd_jacobian(m, qs, 1, g.point, L, J);
    ck_assert_close(res.sigma_min, fd_sigma_min(J, 6, 6), 1e-6);
    /* random rows may lie near the elbow or shoulder singularity too */
    ck_assert_msg((res.flags & ~(unsigned)TWF_IK_NEAR_SINGULAR) == 0, "row %d flags %u", row, res.flags);
    twf_model_fk(m, qs, NULL, &Ts);
    twf_pose_apply(&Ts, g.point, ys);
    ck_assert(dist3(ys, g.p) <= 1e-9);
    ck_assert(twf_rot_angle_between(Ts.R, T.R) <= 1e-9);
    for (j = 0; j < 6; j++)
      ck_assert_msg(fabs(qs[j] - q[j]) <= 1e-8, "row %d joint %d: %g", row, j, qs[j] - q[j]);
    ck_assert(fabs(res.max_change_rad - 2 * DEG) < 1e-6);
  }
  twf_ik_free(w);
  twf_model_free(m);
}
END_TEST

/* One point on a 6-axis arm (3 conditions, 6 joints): the solution reaches
 * the point and its change from the start lies in the row space of the
 * scaled Jacobian (the Lagrange condition of the least change subject to
 * reaching the point: d = J^T y). References: the first-order optimality
 * condition of equality-constrained least squares (Lagrange); the
 * finite-difference Jacobian above; tolerance 1e-7 of |d|: common
 * practice, no source. */
START_TEST(test_ik_point_least_change)
{
  twf_model *nom = test_arm_model(ARM_TF6S), *asb = twf_model_copy(nom);
  twf_compensate_options co = twf_compensate_default_options();
  twf_test_rng rng;
  double q[6], qc[6], J[18], d[6], Jd[3], y[3], A[9];
  int row, i, j, k;
  twf_model_perturb(asb, &MAG, 31);
  twf_test_rng_init(&rng, twf_test_seed(32));
  co.kind = TWF_IK_POINT;
  co.target = "T2";
  for (row = 0; row < 10; row++) {
    twf_ik_result res;
    twf_error err;
    double nd = 0.0, nr = 0.0, L = twf_model_reach(asb);
    gsl_matrix_view Am;
    gsl_vector_view bv, yv;
    random_q(nom, &rng, 0.1, q);
    ck_assert_int_eq(twf_compensate_program(nom, asb, q, 1, &co, qc, &res, NULL, &err), TWF_OK);
    ck_assert_msg(res.flags == 0, "row %d flags %u", row, res.flags);
    ck_assert(res.position_error_m <= 1e-10);
    fd_jacobian(asb, qc, 0, asb->targets[1].offset, L, J);
    for (j = 0; j < 6; j++)
      d[j] = qc[j] - q[j];
    /* y = (J J^T)^-1 J d; residual d - J^T y */
    for (i = 0; i < 3; i++) {
      Jd[i] = 0;
      for (j = 0; j < 6; j++)
        Jd[i] += J[i * 6 + j] * d[j];
      for (k = 0; k < 3; k++) {
        A[i * 3 + k] = 0;
        for (j = 0; j < 6; j++)
          A[i * 3 + k] += J[i * 6 + j] * J[k * 6 + j];
      }
    }
    Am = gsl_matrix_view_array(A, 3, 3);
    bv = gsl_vector_view_array(Jd, 3);
    yv = gsl_vector_view_array(y, 3);
    ck_assert_int_eq(gsl_linalg_cholesky_decomp1(&Am.matrix), 0);
    ck_assert_int_eq(gsl_linalg_cholesky_solve(&Am.matrix, &bv.vector, &yv.vector), 0);
    for (j = 0; j < 6; j++) {
      double rj = d[j];
      for (i = 0; i < 3; i++)
        rj -= J[i * 6 + j] * y[i];
      nr += rj * rj;
      nd += d[j] * d[j];
    }
    ck_assert_msg(sqrt(nr) <= 1e-7 * sqrt(nd), "row %d: null-space part %g of %g", row, sqrt(nr), sqrt(nd));
    ck_assert(nd > 0);
  }
  twf_model_free(asb);
  twf_model_free(nom);
}
END_TEST

/* ------------------------------------------------------------------ */
/* Against Orocos KDL                                                  */
/* ------------------------------------------------------------------ */

#define KDL_ROWS 60

/* The fixtures of tests/gen/gen_kdl_compensate.py: a nominal tf6s and a
 * DH-perturbed as-built tf6s built in Orocos KDL (python3-pykdl), a
 * program, and KDL's flange poses of both arms at the program rows. The
 * generator cannot see the compensation: this test compensates the program
 * with the two model files and compares the as-built forward kinematics at
 * the compensated joints with KDL's nominal poses, to 1e-9 m and 1e-9 rad
 * (common practice, no source) on the rows not flagged; the flagged rows
 * are the ones near a singularity (the program keeps rows near the elbow
 * and shoulder singularities, where the as-built arm may not even reach the
 * nominal pose). First, the as-built model file must mean the arm KDL
 * built: our forward kinematics of it at the program rows against KDL's, to
 * 1e-12 m (rounding; common practice, no source). */
START_TEST(test_kdl_compensation)
{
  twf_error err;
  twf_model *nom = twf_model_read(twf_test_srcpath("tests/fixtures/kdl_comp_nominal.ini"), NULL, &err);
  twf_model *asb = nom ? twf_model_read(twf_test_srcpath("tests/fixtures/kdl_comp_asbuilt.ini"), NULL, &err) : NULL;
  twf_campaign *prog = NULL;
  twf_pose kdl_nom[KDL_ROWS], kdl_asb[KDL_ROWS];
  twf_ik_result res[KDL_ROWS];
  twf_compensate_summary sum;
  double qc[KDL_ROWS * 6];
  char line[2048];
  FILE *f;
  size_t r, good = 0, n_nom = 0, n_asb = 0;
  ck_assert_msg(asb != NULL, "%s", err.message);
  prog = twf_campaign_read_joints(twf_test_srcpath("tests/fixtures/kdl_comp_program.csv"), nom, NULL, NULL, &err);
  ck_assert_msg(prog != NULL, "%s", err.message);
  ck_assert_uint_eq(prog->n_poses, KDL_ROWS);
  f = fopen(twf_test_srcpath("tests/fixtures/kdl_comp_fk.csv"), "r");
  ck_assert_ptr_nonnull(f);
  while (fgets(line, sizeof line, f) != NULL) {
    char *save = NULL, *which, *pose, *tok;
    double v[12];
    int k = 0;
    twf_pose *T;
    if (line[0] == '#')
      continue;
    which = strtok_r(line, ",\n", &save);
    pose = strtok_r(NULL, ",\n", &save);
    while (k < 12 && (tok = strtok_r(NULL, ",\n", &save)) != NULL)
      v[k++] = strtod(tok, NULL);
    ck_assert_int_eq(k, 12);
    if (strcmp(which, "nominal") == 0) {
      ck_assert_uint_lt(n_nom, KDL_ROWS);
      ck_assert_str_eq(pose, prog->pose_ids[n_nom]);
      T = &kdl_nom[n_nom++];
    } else {
      ck_assert_str_eq(which, "asbuilt");
      ck_assert_uint_lt(n_asb, KDL_ROWS);
      T = &kdl_asb[n_asb++];
    }
    for (k = 0; k < 3; k++) {
      T->p[k] = v[k];
      T->R[k][0] = v[3 + 3 * k];
      T->R[k][1] = v[4 + 3 * k];
      T->R[k][2] = v[5 + 3 * k];
    }
  }
  fclose(f);
  ck_assert_uint_eq(n_nom, KDL_ROWS);
  ck_assert_uint_eq(n_asb, KDL_ROWS);
  for (r = 0; r < KDL_ROWS; r++) {
    twf_pose T;
    twf_model_fk(asb, prog->q + 6 * r, NULL, &T);
    ck_assert_msg(dist3(T.p, kdl_asb[r].p) <= 1e-12, "row %zu: as-built model vs KDL %g m", r,
                  dist3(T.p, kdl_asb[r].p));
    ck_assert(twf_rot_angle_between(T.R, kdl_asb[r].R) <= 1e-12);
  }

  ck_assert_int_eq(twf_compensate_program(nom, asb, prog->q, KDL_ROWS, NULL, qc, res, &sum, &err), TWF_OK);
  for (r = 0; r < KDL_ROWS; r++) {
    twf_pose T;
    if (res[r].flags != 0) {
      ck_assert_msg(res[r].flags & TWF_IK_NEAR_SINGULAR, "row %s flags %u", prog->pose_ids[r], res[r].flags);
      continue;
    }
    good++;
    twf_model_fk(asb, qc + 6 * r, NULL, &T);
    ck_assert_msg(dist3(T.p, kdl_nom[r].p) <= 1e-9, "row %s: %g m from KDL's nominal pose", prog->pose_ids[r],
                  dist3(T.p, kdl_nom[r].p));
    ck_assert_msg(twf_rot_angle_between(T.R, kdl_nom[r].R) <= 1e-9, "row %s: %g rad", prog->pose_ids[r],
                  twf_rot_angle_between(T.R, kdl_nom[r].R));
    /* and the compensation did something: the as-built arm at the
     * original joints is off by the DH deviations (0.1 mm or more) */
    ck_assert(dist3(kdl_asb[r].p, kdl_nom[r].p) > 1e-4);
  }
  ck_assert_msg(good >= 50, "only %zu of %d rows unflagged", good, KDL_ROWS);
  ck_assert_uint_eq(sum.n_flagged, KDL_ROWS - good);
  twf_campaign_free(prog);
  twf_model_free(asb);
  twf_model_free(nom);
}
END_TEST

/* ------------------------------------------------------------------ */
/* Comparison of two models                                            */
/* ------------------------------------------------------------------ */

static int cmp_double(const void *a, const void *b)
{
  double x = *(const double *)a, y = *(const double *)b;
  return x < y ? -1 : x > y;
}

/* Figures of values[0..n) computed here, for the comparison: mean, RMS,
 * max and the 95th percentile of Hyndman and Fan (1996) definition 7
 * (numpy's default). */
static void direct_stats(const double *values, size_t n, double *mean, double *rms, double *p95,
                         double *max, size_t *imax)
{
  double *s = malloc(n * sizeof *s), h;
  size_t i, lo;
  *mean = *rms = *max = 0;
  *imax = 0;
  for (i = 0; i < n; i++) {
    *mean += values[i] / (double)n;
    *rms += values[i] * values[i] / (double)n;
    if (values[i] > *max) {
      *max = values[i];
      *imax = i;
    }
    s[i] = values[i];
  }
  *rms = sqrt(*rms);
  qsort(s, n, sizeof *s, cmp_double);
  h = (double)(n - 1) * 0.95;
  lo = (size_t)floor(h);
  *p95 = lo + 1 < n ? s[lo] + (h - (double)lo) * (s[lo + 1] - s[lo]) : s[lo];
  free(s);
}

#define N_CFG 200

/* A model compared with itself: zeros, aligned or not. */
START_TEST(test_compare_self)
{
  twf_model *m = test_arm_model(ARM_TF6S);
  twf_test_rng rng;
  double *q = malloc(N_CFG * 6 * sizeof *q);
  twf_compare_result *r = NULL;
  twf_compare_options o = twf_compare_default_options();
  twf_error err;
  size_t c;
  twf_test_rng_init(&rng, 41);
  for (c = 0; c < N_CFG; c++)
    random_q(m, &rng, 0, q + 6 * c);
  ck_assert_int_eq(twf_compare_models(m, m, q, N_CFG, &o, &r, &err), TWF_OK);
  ck_assert_uint_eq(r->n_points, 3);
  ck_assert_uint_eq(r->position.count, 3 * N_CFG);
  ck_assert(r->aligned);
  /* rounding of the registration only (common practice, no source) */
  ck_assert(r->position.max <= 1e-12);
  ck_assert(r->angle.max <= 1e-12);
  twf_compare_result_free(r);
  o.align = 0;
  ck_assert_int_eq(twf_compare_models(m, m, q, N_CFG, &o, &r, &err), TWF_OK);
  ck_assert(r->position.max == 0.0 && r->angle.max == 0.0);
  twf_compare_result_free(r);
  free(q);
  twf_model_free(m);
}
END_TEST

/* Tilt joint k of b by angle about the line through its reference point
 * along the unit vector u perpendicular to the axis. */
static void tilt_joint(twf_model *b, size_t k, const double u_in[3], double angle)
{
  twf_joint *jt = &b->joints[k];
  double u[3], e[6], uxq[3], dot = 0, nn = 0;
  twf_pose E;
  int a;
  for (a = 0; a < 3; a++)
    dot += u_in[a] * jt->twist[a];
  for (a = 0; a < 3; a++) {
    u[a] = u_in[a] - dot * jt->twist[a];
    nn += u[a] * u[a];
  }
  for (a = 0; a < 3; a++)
    u[a] /= sqrt(nn);
  uxq[0] = u[1] * jt->point[2] - u[2] * jt->point[1];
  uxq[1] = u[2] * jt->point[0] - u[0] * jt->point[2];
  uxq[2] = u[0] * jt->point[1] - u[1] * jt->point[0];
  for (a = 0; a < 3; a++) {
    e[a] = angle * u[a];
    e[3 + a] = -angle * uxq[a];
  }
  twf_se3_exp(e, 1.0, &E);
  twf_se3_adjoint_apply(&E, jt->twist, jt->twist);
}

/* A copy with joint 3's line tilted by 0.05 degrees: the figures equal a
 * direct computation here, in the frames as written (forward kinematics of
 * both models, distances, angles, the statistics by hand) and after the
 * alignment (the registration of B's points onto A's by
 * twf_register_points, itself checked against SciPy's
 * Rotation.align_vectors in check_register.c). Tolerance 1e-12 relative:
 * common practice, no source. */
START_TEST(test_compare_tilted_joint)
{
  twf_model *a = test_arm_model(ARM_TF6S), *b = twf_model_copy(a);
  const double u[3] = { 0.0, 0.0, 1.0 };
  twf_test_rng rng;
  double *q = malloc(N_CFG * 6 * sizeof *q), *d = malloc(3 * N_CFG * sizeof *d), *ang = malloc(N_CFG * sizeof *ang);
  double *ya = malloc(9 * N_CFG * sizeof *ya), *yb = malloc(9 * N_CFG * sizeof *yb);
  twf_compare_result *r = NULL;
  twf_compare_options o = twf_compare_default_options();
  twf_error err;
  twf_pose G;
  int pass;
  size_t c, k;
  twf_test_rng_init(&rng, 42);
  for (c = 0; c < N_CFG; c++)
    random_q(a, &rng, 0, q + 6 * c);
  tilt_joint(b, 2, u, 0.05 * DEG);
  for (c = 0; c < N_CFG; c++) {
    twf_pose Ta, Tb;
    twf_model_fk(a, q + 6 * c, NULL, &Ta);
    twf_model_fk(b, q + 6 * c, NULL, &Tb);
    for (k = 0; k < 3; k++) {
      twf_pose_apply(&Ta, a->targets[k].offset, ya + 3 * (3 * c + k));
      twf_pose_apply(&Tb, b->targets[k].offset, yb + 3 * (3 * c + k));
    }
  }
  ck_assert_int_eq(twf_register_points(yb, ya, NULL, 3 * N_CFG, &G, &err), TWF_OK);
  for (pass = 0; pass < 2; pass++) {
    double mean, rms, p95, max;
    size_t imax;
    o.align = pass == 0;
    for (c = 0; c < N_CFG; c++) {
      twf_pose Ta, Tb, GTb;
      twf_model_fk(a, q + 6 * c, NULL, &Ta);
      twf_model_fk(b, q + 6 * c, NULL, &Tb);
      if (o.align)
        twf_pose_mul(&G, &Tb, &GTb);
      else
        GTb = Tb;
      for (k = 0; k < 3; k++) {
        double p[3];
        twf_pose_apply(&GTb, b->targets[k].offset, p);
        d[3 * c + k] = dist3(ya + 3 * (3 * c + k), p);
      }
      ang[c] = twf_rot_angle_between(Ta.R, GTb.R);
    }
    ck_assert_int_eq(twf_compare_models(a, b, q, N_CFG, &o, &r, &err), TWF_OK);
    ck_assert_int_eq(r->aligned, o.align);
    direct_stats(d, 3 * N_CFG, &mean, &rms, &p95, &max, &imax);
    ck_assert_close(r->position.mean, mean, 1e-12);
    ck_assert_close(r->position.rms, rms, 1e-12);
    ck_assert_close(r->position.p95, p95, 1e-12);
    ck_assert_close(r->position.max, max, 1e-12);
    ck_assert_uint_eq(r->worst_config, imax / 3);
    ck_assert_uint_eq(r->worst_point, imax % 3);
    ck_assert_close(r->worst_angle_rad, ang[imax / 3], 1e-12);
    direct_stats(ang, N_CFG, &mean, &rms, &p95, &max, &imax);
    ck_assert_close(r->angle.mean, mean, 1e-12);
    ck_assert_close(r->angle.rms, rms, 1e-12);
    ck_assert_close(r->angle.max, max, 1e-12);
    /* the tilt shows: up to twice the tilt in orientation, and the
     * figures are not zero (the test can fail) */
    ck_assert(r->angle.max > 0.02 * DEG && r->angle.max < 0.2 * DEG);
    ck_assert(r->position.max > 1e-4);
    twf_compare_result_free(r);
    r = NULL;
  }
  free(q);
  free(d);
  free(ang);
  free(ya);
  free(yb);
  twf_model_free(b);
  twf_model_free(a);
}
END_TEST

/* Link by link: the copy with joint 3's line tilted by 0.05 degrees about
 * the base z axis through its reference point. Lines 2 and 3 of tf6s are
 * parallel (both along y, their connecting line along z), so the tilt is a
 * twist of line 3 against line 2 about their connecting line: row 2's
 * alpha changes by exactly the tilt, row 3's alpha (line 3 against line 4,
 * which the tilt did not move) by minus the tilt, and nothing else changes
 * (the other values within 1e-12; a theta that reads pi in one model and
 * -pi in the other is the same angle). Reference: the geometry of the
 * construction (the twist of two lines about their common perpendicular
 * is the angle between their directions); tolerance 1e-12 rad: common
 * practice, no source. The same model with itself: all zeros. */
START_TEST(test_compare_links_tilt)
{
  twf_model *a = test_arm_model(ARM_TF6S), *b = twf_model_copy(a);
  const double u[3] = { 0.0, 0.0, 1.0 }, tilt = 0.05 * DEG;
  double diff[5 * 8];
  twf_links l;
  twf_error err;
  size_t r;
  int v;
  ck_assert_int_eq(twf_compare_links(a, a, 0, &l, diff, &err), TWF_OK);
  for (r = 0; r < 8; r++)
    for (v = 0; v < 5; v++)
      ck_assert(isnan(diff[5 * r + (size_t)v]) || fabs(diff[5 * r + (size_t)v]) <= 1e-12);
  twf_links_clear(&l);
  tilt_joint(b, 2, u, tilt);
  ck_assert_int_eq(twf_compare_links(a, b, 0, &l, diff, &err), TWF_OK);
  ck_assert_uint_eq(l.n_rows, 8);
  for (r = 0; r < 8; r++)
    for (v = 0; v < 5; v++) {
      double want = 0.0, d = diff[5 * r + (size_t)v];
      if (l.rows[r].why[v] == TWF_LINK_NOT_IN_FORM) {
        ck_assert(isnan(d));
        continue;
      }
      if (v == TWF_LINK_ALPHA && r == 2)
        want = tilt;
      if (v == TWF_LINK_ALPHA && r == 3)
        want = -tilt;
      ck_assert_msg(fabs(d - want) <= 1e-12, "row %zu %s: %.17g, expected %.17g", r,
                    twf_link_value_name((twf_link_value)v), d, want);
    }
  twf_links_clear(&l);
  twf_model_free(b);
  twf_model_free(a);
}
END_TEST

/* A perturbed copy of every sample arm (1 mrad, 0.5 mm errors): every
 * link value of B is within 0.01 rad or 10 mm of A's, whatever sign of x a
 * link through intersecting lines (a = 0) came out with; without the
 * re-expression of B in A's signs the tf6s wrist link read 180 degrees
 * apart. Only the values a calibration determines are compared: the others
 * are conventions (frame 0's x when line 1 is parallel to the base z axis
 * differed by up to 2.7 rad). Bounds: a few times the perturbation (common practice, no
 * source). */
START_TEST(test_compare_links_perturbed)
{
  twf_model *a = test_arm_model((test_arm)_i), *b = twf_model_copy(a);
  double diff[5 * 9];
  twf_links l;
  twf_error err;
  size_t r;
  int v;
  twf_model_perturb(b, &MAG, 51 + (unsigned long long)_i);
  ck_assert_int_eq(twf_compare_links(a, b, 0, &l, diff, &err), TWF_OK);
  for (r = 0; r < l.n_rows; r++)
    for (v = 0; v < 5; v++) {
      double d = diff[5 * r + (size_t)v];
      int angle = v == TWF_LINK_THETA || v == TWF_LINK_ALPHA || v == TWF_LINK_BETA;
      /* values a calibration does not determine are conventions (frame
       * 0's x where line 1 is parallel to the base z axis, the flange link
       * with points only, where a prismatic line is drawn), as the note in
       * the report says */
      if (isnan(d) || l.rows[r].why[v] != TWF_LINK_DETERMINED)
        continue;
      ck_assert_msg(fabs(d) <= (angle ? 0.01 : 0.01) /* rad or m */, "arm %d row %zu %s: %g (why %d)", _i, r,
                    twf_link_value_name((twf_link_value)v), d, (int)l.rows[r].why[v]);
    }
  twf_links_clear(&l);
  twf_model_free(b);
  twf_model_free(a);
}
END_TEST

/* A rigidly moved copy (every twist and the home pose carried by a known
 * motion G) compares to zero once aligned, and the alignment found is
 * G^-1; as written, the distances are |G y - y|. Reference: Ad_G S is the
 * twist S seen through G (Murray, Li and Sastry 1994, 2.4), so that FK_B =
 * G FK_A; tolerance 1e-9: common practice, no source. */
START_TEST(test_compare_rigid_copy)
{
  twf_model *a = test_arm_model(ARM_TF7), *b = twf_model_copy(a);
  const double S[6] = { 0.2, -0.5, 0.3, 0.4, 0.1, -0.2 };
  twf_test_rng rng;
  double *q = malloc(50 * 7 * sizeof *q), worst = 0;
  twf_compare_result *r = NULL;
  twf_compare_options o = twf_compare_default_options();
  twf_error err;
  twf_pose G, P, Ginv;
  size_t c, j;
  int x, y;
  twf_se3_exp(S, 1.0, &G);
  for (j = 0; j < b->n_joints; j++)
    twf_se3_adjoint_apply(&G, b->joints[j].twist, b->joints[j].twist);
  twf_pose_mul(&G, &b->home, &b->home);
  twf_test_rng_init(&rng, 43);
  for (c = 0; c < 50; c++)
    random_q(a, &rng, 0, q + 7 * c);
  ck_assert_int_eq(twf_compare_models(a, b, q, 50, &o, &r, &err), TWF_OK);
  ck_assert(r->position.max <= 1e-9);
  ck_assert(r->angle.max <= 1e-9);
  twf_pose_inv(&G, &Ginv);
  twf_pose_mul(&r->b_to_a, &G, &P);
  for (x = 0; x < 3; x++) {
    ck_assert(fabs(P.p[x]) <= 1e-9);
    for (y = 0; y < 3; y++)
      ck_assert(fabs(P.R[x][y] - (x == y)) <= 1e-9);
  }
  twf_compare_result_free(r);
  o.align = 0;
  ck_assert_int_eq(twf_compare_models(a, b, q, 50, &o, &r, &err), TWF_OK);
  for (c = 0; c < 50; c++)
    for (j = 0; j < 3; j++) {
      twf_pose T;
      double ya[3], gy[3];
      twf_model_fk(a, q + 7 * c, NULL, &T);
      twf_pose_apply(&T, a->targets[j].offset, ya);
      twf_pose_apply(&G, ya, gy);
      if (dist3(ya, gy) > worst)
        worst = dist3(ya, gy);
    }
  ck_assert_close(r->position.max, worst, 1e-9);
  /* every flange turns by the rotation of G, |w| of its twist */
  ck_assert_close(r->angle.max, sqrt(S[0] * S[0] + S[1] * S[1] + S[2] * S[2]), 1e-9);
  twf_compare_result_free(r);
  free(q);
  twf_model_free(b);
  twf_model_free(a);
}
END_TEST

/* Without common targets the flange origin is the tool point; too few
 * configurations cannot be aligned. */
START_TEST(test_compare_flange_and_degenerate)
{
  twf_model *a = test_arm_model(ARM_TF6S), *b = twf_model_copy(a);
  double q[12] = { 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, -0.1, 0.3, 0.1, 0.2, -0.5, 0.1 };
  twf_compare_result *r = NULL;
  twf_compare_options o = twf_compare_default_options();
  twf_error err;
  size_t k;
  for (k = 0; k < b->n_targets; k++)
    b->targets[k].offset_known = 0;
  ck_assert_int_eq(twf_compare_models(a, b, q, 2, &o, &r, &err), TWF_ERR_DEGENERATE);
  ck_assert_ptr_null(r);
  o.align = 0;
  ck_assert_int_eq(twf_compare_models(a, b, q, 2, &o, &r, &err), TWF_OK);
  ck_assert_uint_eq(r->n_points, 1);
  ck_assert_int_eq(r->point_target[0], -1);
  twf_compare_result_free(r);
  twf_model_free(b);
  twf_model_free(a);
}
END_TEST

static Suite *apply_suite(void)
{
  Suite *s = suite_create("apply");
  TCase *tc = tcase_create("core");
  tcase_add_loop_test(tc, test_round_trip, 0, ARM_COUNT);
  tcase_add_test(tc, test_singular_row_flagged);
  tcase_add_test(tc, test_offset_exact_and_limits);
  tcase_add_test(tc, test_not_converged_flagged);
  tcase_add_test(tc, test_refusals);
  tcase_add_test(tc, test_ik_cartesian);
  tcase_add_test(tc, test_ik_point_least_change);
  tcase_add_test(tc, test_kdl_compensation);
  tcase_add_test(tc, test_compare_self);
  tcase_add_test(tc, test_compare_tilted_joint);
  tcase_add_test(tc, test_compare_links_tilt);
  tcase_add_loop_test(tc, test_compare_links_perturbed, 0, ARM_COUNT);
  tcase_add_test(tc, test_compare_rigid_copy);
  tcase_add_test(tc, test_compare_flange_and_degenerate);
  tcase_set_timeout(tc, 60);
  suite_add_tcase(s, tc);
  return s;
}

int main(void)
{
  gsl_set_error_handler_off();
  return twf_test_run(apply_suite());
}
