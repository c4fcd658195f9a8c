/* lsq.h: the least-squares machinery shared by the calibration fit and the
 * registration refinement (internal): the problem (a working model, the
 * error model, measurements grouped by pose, weights), the row visitors
 * that stream the weighted Jacobian pose by pose into the normal matrix or
 * its triangular factor, and the Levenberg-Marquardt loop. */
#ifndef TWF_LSQ_H
#define TWF_LSQ_H

#include "internal.h"

/* Threads of one pass at most. */
#define TWF_LSQ_THREADS_MAX 64

typedef struct twf_lsq_ws twf_lsq_ws;

typedef struct twf_lsq_problem {
  const twf_campaign *c;
  unsigned groups;
  size_t n_joints;
  twf_model *m;            /* working model (owned) */
  twf_model *trial;        /* trial copy (owned) */
  size_t n_stations;       /* instrument stations of the campaign (>= 1) */
  twf_pose base[TWF_STATIONS_MAX]; /* the base pose seen from each station */
  twf_errmodel *em;
  size_t p;
  size_t *pose_start;      /* measurements grouped by pose (CSR) */
  uint32_t *pose_meas;     /* 32-bit: at most TWF_CAMPAIGN_COUNT_MAX measurements */
  double *inv_sigma;       /* per measurement, 1/m */
  double inv_sigma_rot;    /* 1/rad */
  double sigma_len;        /* typical sigma of a coordinate, m */
  double *weight;          /* robust weight, 0 = dropped (write with twf_lsq_set_weight) */
  const unsigned char *use;/* 1: enters the fit */
  double *rows;            /* 3 x p rows, then 3 x p gathered columns */
  double *A, *g;           /* p x p, p */
  /* The passes over the measurements (lsq.c, "chunked passes"): threads
   * used (1 after init; any count gives the same bits), their workspaces,
   * and what every pass needs, made with the problem. */
  int n_threads;
  twf_lsq_ws *ws;          /* TWF_LSQ_THREADS_MAX entries, n_ws made */
  int n_ws;
  size_t max_chunk_rows;   /* weighted rows of the largest chunk */
  double *slot1, *acc;     /* one chunk's result, the reduction */
  void *coldesc;           /* p: the columns of a pass */
  unsigned char *need;     /* p: the parameters of a pass */
  /* The last normal matrix, and what it was made at (twf_lsq_normal). A
   * writer of weight[] bumps weight_gen. */
  unsigned long weight_gen, cache_weight_gen;
  /* The weights changed since the last normal matrix, each with the value
   * it had (twf_lsq_set_weight): while they are few, the next normal
   * matrix at the same point is that one with their rows' contributions
   * changed (a screen's refit), not a pass over every row. */
  struct twf_lsq_reweight { uint32_t meas; double change; } *wlog;
  size_t wlog_n, wlog_cap;
  int wlog_full;           /* more changes than the log holds: a full pass */
  unsigned long n_normal_passes; /* normal matrices made over every row (a diagnostic) */
  int cache_valid;
  size_t cache_nc, *cache_cols;  /* its columns */
  size_t *cache_pos;       /* p: each parameter's place among them, SIZE_MAX when not there */
  double *cacheA, *cacheg, cache_cost;
  twf_pose cache_base[TWF_STATIONS_MAX];
  twf_model *snap;
  /* Flange poses in the base frame of every pose (twf_model_fk_load), kept
   * while the arm's geometry stays that of flange_model: for problems
   * whose groups are base and targets only (the registration refinement),
   * where every pass would otherwise repeat the same forward kinematics.
   * NULL when not kept (other groups, or more than
   * TWF_LSQ_FLANGE_CACHE_POSES poses: 96 bytes a pose). */
  twf_pose *flanges;
  twf_model *flange_model;
} twf_lsq_problem;

#define TWF_LSQ_FLANGE_CACHE_POSES 262144

/* Set up the problem at model m (copied) for the parameter groups, over
 * the measurements flagged in use (borrowed: it must outlive the problem).
 * Rows without a sigma take sigma_length; orientation rows sigma_angle
 * (0: sigma_length / reach). The base poses (one per station of c)
 * start at the identity: set pr->base[]. */
twf_status twf_lsq_init(twf_lsq_problem *pr, const twf_model *m, const twf_campaign *c,
                        unsigned groups, const unsigned char *use, double sigma_length,
                        double sigma_angle, twf_error *err);
void twf_lsq_free(twf_lsq_problem *pr);
/* Free the per-measurement arrays (the pose grouping, sigmas and weights)
 * once no pass over the measurements runs any more, so that the figures
 * computed after the fit do not add to them; pr keeps its model, base
 * poses and normal matrix. No pass, screen or residual of pr may run
 * after. */
void twf_lsq_release_rows(twf_lsq_problem *pr);
/* Free only the pose grouping (pose_start, pose_meas): the screen and the
 * residuals do not need it, the passes do. */
void twf_lsq_release_pose_index(twf_lsq_problem *pr);

/* Set measurement i's weight (>= 0), the normal matrix made with the old
 * one marked stale (and the change logged for its update). */
void twf_lsq_set_weight(twf_lsq_problem *pr, size_t i, double w);
/* Every weight back to 1 (a screen's refused drops). */
void twf_lsq_reset_weights(twf_lsq_problem *pr);
/* The thread count of a request: n itself, or for 0 one per online core
 * (at most TWF_LSQ_THREADS_MAX). */
int twf_lsq_threads(int n);

/* Copy the geometry of src into dst of the same shape (no metadata). */
void twf_lsq_model_assign(twf_model *dst, const twf_model *src);

/* 1 when measurement i enters the fit with a positive weight. */
int twf_lsq_active(const twf_lsq_problem *pr, size_t i);

/* The normal matrix A = J^T W J (nc x nc) and gradient g = J^T W r (nc)
 * over the columns cols[0..nc) (NULL: all p) at the working model; returns
 * the cost 0.5 r^T W r. */
double twf_lsq_normal(twf_lsq_problem *pr, const size_t *cols, size_t nc, double *A, double *g);

/* The triangular factor R of the weighted Jacobian (R^T R = J^T W J) over
 * the columns cols[0..nc) (R is nc x nc, diagonal not negative), streamed
 * by blocks of rows (Householder) and merged chunk by chunk: the
 * redundancy walks run on it. The same pass sums the gradient and the
 * cost, and the normal matrix R^T R over these columns, with them, takes
 * the place of the last one (twf_lsq_normal at this point over any of
 * these columns then makes no pass: the fit's first linearisation). */
void twf_lsq_factor(twf_lsq_problem *pr, const size_t *cols, size_t nc, double *R);

/* Scale A (p x p) into length units: As = D A D. */
void twf_lsq_scale_normal(const twf_lsq_problem *pr, const double *A, double *As);

/* How one Levenberg-Marquardt run is bounded and where its steps go. */
typedef struct twf_lsq_run {
  int max_iterations;   /* trial steps */
  double step_tol_m;    /* converged when every scaled step is below this */
  twf_trace *trace;     /* NULL: steps not recorded */
  const char *name;     /* static name of the fit in the trace */
  int round;            /* robust round in the trace */
} twf_lsq_run;

/* Levenberg-Marquardt over the columns flagged in keep; every accepted
 * step is folded into the working model and base. value[p] accumulates the
 * steps taken. rep receives the counts and the stop reason. */
twf_status twf_lsq_solve(twf_lsq_problem *pr, const unsigned char *keep, const twf_lsq_run *run,
                         double *value, twf_solve_report *rep, twf_error *err);

/* Residuals of every measurement (fit and check) at model m and base B
 * with the model's own target offsets, as twf_accuracy_residuals gives
 * them: pos[3 n_meas], rot[n_meas] (NaN for point rows). On up to
 * n_threads threads (each a contiguous range of the measurements; every
 * measurement's residual is computed alone, so any thread count gives the
 * same bits). */
twf_status twf_lsq_residuals(const twf_model *m, const twf_pose *B, const twf_campaign *c,
                             int n_threads, double *pos, double *rot, twf_error *err);

/* ------------------------------------------------------------ trace */

/* Seconds on the monotonic clock (stage timings only: never a result). */
double twf_trace_now(void);
/* Record a stage that started at t0 (twf_trace_now). t may be NULL. */
void twf_trace_stage(twf_trace *t, const char *name, double t0);
/* Append a solver step; dropped when t is NULL or memory is short (a trace
 * is a diagnostic: it never fails a job). */
void twf_trace_step(twf_trace *t, const twf_solver_step *s);

#endif
