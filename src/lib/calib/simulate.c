/* simulate.c: synthetic campaigns from a known ("true") arm, and random
 * perturbations of a model: for tests, the benchmark, demos, and later the
 * assessment of pose sets before measuring. */
#include "internal.h"

#include <stdlib.h>

twf_simulate_options twf_simulate_default_options(void)
{
  twf_simulate_options o;
  memset(&o, 0, sizeof o);
  o.n_poses = 100;
  o.sigma_m = 0.0;
  o.seed = 1;
  o.limit_margin = 0.05;
  o.outlier_m = 1e-3;
  return o;
}

/* Joint values uniform over the limits less a margin on each side (or
 * +-pi, +-0.1 m without limits). */
void twf_simulate_joints(const twf_model *m, double margin, unsigned long long *state,
                         double *q)
{
  size_t k;
  for (k = 0; k < m->n_joints; k++) {
    const twf_joint *jt = &m->joints[k];
    double lo = jt->has_limits ? jt->limit_lo : (jt->type == TWF_JOINT_REVOLUTE ? -TWF_PI : -0.1);
    double hi = jt->has_limits ? jt->limit_hi : (jt->type == TWF_JOINT_REVOLUTE ? TWF_PI : 0.1);
    double span = hi - lo;
    lo += margin * span;
    hi -= margin * span;
    q[k] = lo + (hi - lo) * twf_rng_uniform(state);
  }
}

twf_campaign *twf_simulate_campaign(const twf_model *truth, const twf_pose *base_in_tracker,
                                    const twf_simulate_options *opt_in, twf_error *err)
{
  twf_simulate_options opt = opt_in ? *opt_in : twf_simulate_default_options();
  size_t n_targets = 0, k, i, mi = 0;
  twf_campaign *c;
  unsigned long long state = opt.seed;
  twf_pose F, T;

  for (k = 0; k < truth->n_targets; k++)
    if (truth->targets[k].offset_known && (opt.targets == NULL || opt.targets[k]))
      n_targets++;
  if (!(opt.outlier_fraction >= 0 && opt.outlier_fraction <= 1) || !(opt.outlier_m >= 0) ||
      !(opt.sigma_m >= 0) || !(opt.sigma_rad >= 0) || !(opt.check_fraction >= 0 && opt.check_fraction <= 1))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0,
                         "use non-negative noise and fractions from 0 to 1",
                         "invalid simulation options"), NULL;
  if (n_targets == 0 || opt.n_poses == 0)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0,
                         "give targets with known offsets and at least one pose",
                         "nothing to simulate"), NULL;
  if (opt.n_stations > TWF_STATIONS_MAX ||
      (opt.n_stations > 0 && (opt.station_base == NULL || opt.station_names == NULL)) ||
      (opt.n_stations == 0 && base_in_tracker == NULL))
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "give a base pose, or 1 to %d stations with their base poses and names",
                         TWF_STATIONS_MAX), NULL;
  for (i = 0; opt.pose_station != NULL && i < opt.n_poses; i++)
    if (opt.pose_station[i] >= opt.n_stations)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                           "pose %zu is given station %zu of %zu", i + 1, opt.pose_station[i],
                           opt.n_stations), NULL;
  c = twf_campaign_alloc(truth->n_joints, opt.n_poses, opt.n_poses * n_targets);
  if (c == NULL)
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory"), NULL;
  if (opt.n_stations > 0) {
    size_t *ps = malloc(opt.n_poses * sizeof *ps);
    twf_status st = ps == NULL ? TWF_ERR_NOMEM : TWF_OK;
    for (i = 0; ps != NULL && i < opt.n_poses; i++)
      ps[i] = opt.pose_station != NULL ? opt.pose_station[i] : i % opt.n_stations;
    if (ps == NULL)
      twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    else
      st = twf_campaign_set_stations(c, opt.n_stations, opt.station_names, ps, err);
    free(ps);
    if (st != TWF_OK) {
      twf_campaign_free(c);
      return NULL;
    }
    base_in_tracker = NULL;
  }
  for (i = 0; i < opt.n_poses; i++) {
    double *q = c->q + i * truth->n_joints;
    int check = opt.check_fraction > 0 && twf_rng_uniform(&state) < opt.check_fraction;
    snprintf(c->pose_ids[i], TWF_NAME_MAX, "P%04zu", i + 1);
    if (opt.q != NULL)
      memcpy(q, opt.q + i * truth->n_joints, truth->n_joints * sizeof *q);
    else
      twf_simulate_joints(truth, opt.limit_margin, &state, q);
    twf_model_fk(truth, q, NULL, &F);
    twf_pose_mul(base_in_tracker != NULL ? base_in_tracker : &opt.station_base[c->pose_station[i]], &F, &T);
    for (k = 0; k < truth->n_targets; k++) {
      twf_measurement *ms;
      int a;
      if (!truth->targets[k].offset_known || (opt.targets != NULL && !opt.targets[k]))
        continue;
      ms = &c->meas[mi++];
      ms->pose = (uint32_t)i;
      ms->target = (uint32_t)k;
      twf_pose_apply(&T, truth->targets[k].offset, ms->pos);
      for (a = 0; a < 3; a++)
        ms->pos[a] += opt.sigma_m * twf_rng_gauss(&state);
      if (opt.outlier_fraction > 0 && twf_rng_uniform(&state) < opt.outlier_fraction) {
        double d[3], n;
        do {
          for (a = 0; a < 3; a++)
            d[a] = twf_rng_gauss(&state);
          n = twf_v3_norm(d);
        } while (n < 1e-6);
        for (a = 0; a < 3; a++)
          ms->pos[a] += opt.outlier_m * d[a] / n;
      }
      ms->sigma = 0.0;
      ms->set = check ? TWF_SET_CHECK : TWF_SET_FIT;
      if (opt.orientation) {
        double w[3], E[3][3], R[3][3], quat[4];
        int b, d;
        for (a = 0; a < 3; a++)
          w[a] = opt.sigma_rad * twf_rng_gauss(&state);
        twf_so3_exp(w, 1.0, E);
        for (a = 0; a < 3; a++)
          for (b = 0; b < 3; b++) {
            R[a][b] = 0.0;
            for (d = 0; d < 3; d++)
              R[a][b] += E[a][d] * T.R[d][b];
          }
        twf_rot_to_quat(R, quat);
        if (twf_campaign_meas_set_quat(c, mi - 1, quat) != TWF_OK) {
          twf_campaign_free(c);
          return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory"), NULL;
        }
      }
    }
  }
  return c;
}

void twf_model_perturb(twf_model *m, const twf_perturbation *mag, unsigned long long seed)
{
  unsigned long long s = seed;
  size_t i, k;
  int a;
  for (i = 0; i < m->n_joints; i++) {
    twf_joint *jt = &m->joints[i];
    double e[6], d[3], u[3], ref[3] = { 0.3, -0.5, 0.8 };
    twf_pose E;
    double *dir = jt->type == TWF_JOINT_REVOLUTE ? jt->twist : jt->twist + 3;
    /* a tilt about a random direction perpendicular to the axis, through
     * the reference point, and a shift perpendicular to it */
    for (a = 0; a < 3; a++)
      ref[a] += twf_rng_gauss(&s);
    twf_v3_cross(dir, ref, u);
    {
      double n = twf_v3_norm(u), ang = mag->tilt_rad * twf_rng_gauss(&s);
      double uxq[3];
      for (a = 0; a < 3; a++)
        u[a] /= n;
      twf_v3_cross(u, jt->point, uxq);
      for (a = 0; a < 3; a++) {
        e[a] = ang * u[a];
        e[3 + a] = -ang * uxq[a];
      }
    }
    twf_v3_cross(dir, u, d);
    if (jt->type == TWF_JOINT_REVOLUTE) {
      double sh1 = mag->shift_m * twf_rng_gauss(&s), sh2 = mag->shift_m * twf_rng_gauss(&s);
      for (a = 0; a < 3; a++)
        e[3 + a] += sh1 * u[a] + sh2 * d[a];
    }
    twf_se3_exp(e, 1.0, &E);
    twf_se3_adjoint_apply(&E, jt->twist, jt->twist);
    twf_pose_apply(&E, jt->point, jt->point);
    jt->offset += (jt->type == TWF_JOINT_REVOLUTE ? mag->offset_rad : mag->shift_m) * twf_rng_gauss(&s);
    jt->scale += mag->scale * twf_rng_gauss(&s);
  }
  {
    double h[6];
    twf_pose E;
    for (a = 0; a < 3; a++) {
      h[a] = mag->tilt_rad * twf_rng_gauss(&s);
      h[3 + a] = mag->shift_m * twf_rng_gauss(&s);
    }
    twf_se3_exp(h, 1.0, &E);
    twf_pose_mul(&m->home, &E, &m->home);
  }
  for (k = 0; k < m->n_targets; k++)
    for (a = 0; a < 3; a++)
      m->targets[k].offset[a] += mag->target_m * twf_rng_gauss(&s);
}
