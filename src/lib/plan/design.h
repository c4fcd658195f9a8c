/* design.h: the shared machinery of prediction, assessment and planning
 * (internal): the Jacobian rows a pose would give, scaled and weighted as
 * the calibration scales and weights them, and the structural redundancy
 * walk on a rich synthetic pose set. Everything streams pose by pose. */
#ifndef TWF_PLAN_DESIGN_H
#define TWF_PLAN_DESIGN_H

#include "internal.h"

typedef struct twf_design {
  twf_model *m;          /* owned copy */
  twf_pose base;         /* base pose in the tracker frame */
  twf_errmodel *em;
  size_t p, nj, nt;      /* parameters, joints, targets of the model */
  double *scale;         /* p column scales (twf_errmodel_param_scale) */
  unsigned char *tmask;  /* nt: targets measured */
  size_t n_tg;           /* how many */
  int orientation;       /* 6-D rows at every measured target */
  double inv_sigma;      /* 1/m */
  double inv_sigma_rot;  /* 1/rad */
  size_t r;              /* rows per pose: n_tg (3 or 6) */
  double *buf;           /* 3 x p */
  /* Several instrument stations (twf_design_set_stations): the base pose
   * of each, and the station twf_design_grad takes its rows at (0: base). */
  size_t n_stations, grad_station;
  twf_pose station_base[TWF_STATIONS_MAX];
} twf_design;

/* Set up the design for m (copied) seen from base (NULL: identity) with
 * the parameter groups; targets NULL: every target with a known offset.
 * sigma_rot 0: sigma_len / reach, as the calibration does. */
twf_status twf_design_init(twf_design *d, const twf_model *m, const twf_pose *base,
                           unsigned groups, const unsigned char *targets, int orientation,
                           double sigma_len, double sigma_rot, twf_error *err);
void twf_design_free(twf_design *d);
/* Replace d's error model by one of n_stations instrument stations (base
 * group 6 per station, twf_errmodel_alloc_stations): for the covariance of
 * a calibration of several stations, seen from bases[] (n_stations).
 * d->base stays station 0's, where the rows of twf_design_rows are taken;
 * twf_design_grad takes them at d->grad_station (default 0). */
twf_status twf_design_set_stations(twf_design *d, size_t n_stations, const char (*names)[TWF_NAME_MAX],
                                   const twf_pose *bases, unsigned groups, twf_error *err);

/* The r x p rows one pose gives: derivative of the predictions, columns
 * scaled (D), rows weighted by 1/sigma. */
void twf_design_rows(twf_design *d, const double *q, double *out);

/* Unweighted, scaled derivative rows at q: 3 per measured target into
 * pos (3 n_tg x p), and the orientation's 3 into rot (may be NULL). */
void twf_design_grad(twf_design *d, const double *q, double *pos, double *rot);

/* The walk order of the parameters: groups in priority order. */
size_t twf_design_order(const twf_design *d, const twf_group *priority, size_t *order);

/* Structural redundancy: the walk (twf_ident_walk_r, tolerance tol) on
 * n_syn seeded synthetic poses within the limits. keep[p] receives the
 * kept columns; As (p x p, may be NULL) the scaled normal matrix of the
 * synthetic set, for explanations. */
twf_status twf_design_structural(twf_design *d, const size_t *order, size_t n_order, size_t n_syn,
                                 unsigned long long seed, double tol, unsigned char *keep,
                                 double *As, twf_error *err);

/* Add w * rows^T rows (rows: k x p, over the columns idx[0..nk)) to the
 * upper triangle of M (nk x nk); twf_design_symmetrize fills the lower. */
void twf_design_add_normal(double *M, size_t nk, const size_t *idx, const double *rows, size_t k,
                           size_t p, double w);
void twf_design_symmetrize(double *M, size_t nk);

#endif

/* The predictor of a design (taken over: d is emptied) with the scaled
 * normal matrix As (p x p) of the kept columns keep[p]. NULL with err
 * filled (TWF_ERR_SINGULAR when the kept block is not positive definite). */
twf_predictor *twf_predictor_make(twf_design *d, const unsigned char *keep, const double *As,
                                  twf_error *err);
/* The scaled covariance of the kept columns (nk x nk) and their indices. */
const double *twf_predictor_cov(const twf_predictor *pr, size_t *nk, const size_t **idx);
