/* lsq.c: the least-squares machinery (DEVELOPERS.md, "The maths").
 *
 * The normal matrix J^T W J and gradient J^T W r are accumulated pose by
 * pose (twf_errmodel_eval_pose once, then every target of that pose):
 * memory and time are linear in the number of measurements, the p x p
 * matrices are the only thing that grows with the parameter count. */
#include "lsq.h"
#include "ident.h"
#include "errmodel_internal.h"

#include <gsl/gsl_linalg.h>
#include <gsl/gsl_matrix.h>
#include <pthread.h>
#include <stdint.h>
#include <stdlib.h>
#include <time.h>
#include <unistd.h>

/* ------------------------------------------------------------ stop reasons */

const char *twf_stop_name(twf_stop s)
{
  switch (s) {
  case TWF_STOP_NONE: return "none";
  case TWF_STOP_STEP: return "step";
  case TWF_STOP_GRADIENT: return "gradient";
  case TWF_STOP_COST: return "cost";
  case TWF_STOP_MAXITER: return "max-iterations";
  case TWF_STOP_DIVERGED: return "diverged";
  case TWF_STOP_SINGULAR: return "singular";
  }
  return "?";
}

int twf_stop_converged(twf_stop s)
{
  return s == TWF_STOP_STEP || s == TWF_STOP_GRADIENT || s == TWF_STOP_COST;
}

/* ------------------------------------------------------------ the problem */

/* Per-thread workspace: an error model of its own (its evaluated pose is
 * state) and the blocks of one chunk. Sized once for p columns. */
struct twf_lsq_ws {
  twf_errmodel *em;     /* thread 0: the problem's own */
  twf_pose *prefix;     /* n_joints + 1 */
  double *X, *Y;        /* row batches (3 NB x p; X at least p x p) */
  double *B;            /* factor block, column-major, max_chunk_rows x p */
  double *rb;           /* its weighted residuals, max_chunk_rows */
};

/* A column of a pass: its parameter and, for a target's, which. */
typedef struct lsq_col {
  size_t j;
  long target;  /* -1: not a target parameter */
  int comp;
} lsq_col;

static void ws_free(twf_lsq_ws *w, int own_em);
static int pass_resources(twf_lsq_problem *pr);

/* Copy the geometry of src into dst of the same shape (no metadata). */
void twf_lsq_model_assign(twf_model *dst, const twf_model *src)
{
  memcpy(dst->joints, src->joints, src->n_joints * sizeof *src->joints);
  memcpy(dst->targets, src->targets, src->n_targets * sizeof *src->targets);
  dst->home = src->home;
}

void twf_lsq_release_pose_index(twf_lsq_problem *pr)
{
  free(pr->pose_start);
  free(pr->pose_meas);
  pr->pose_start = NULL;
  pr->pose_meas = NULL;
}

void twf_lsq_release_rows(twf_lsq_problem *pr)
{
  twf_lsq_release_pose_index(pr);
  free(pr->inv_sigma);
  free(pr->weight);
  free(pr->wlog);
  pr->inv_sigma = NULL;
  pr->weight = NULL;
  pr->wlog = NULL;
  pr->wlog_n = pr->wlog_cap = 0;
}

void twf_lsq_free(twf_lsq_problem *pr)
{
  int t;
  for (t = 0; pr->ws != NULL && t < pr->n_ws; t++)
    ws_free(&pr->ws[t], t != 0);
  free(pr->ws);
  free(pr->slot1);
  free(pr->acc);
  free(pr->coldesc);
  free(pr->cacheA);
  free(pr->cacheg);
  free(pr->cache_cols);
  free(pr->cache_pos);
  twf_model_free(pr->snap);
  free(pr->flanges);
  twf_model_free(pr->flange_model);
  free(pr->need);
  twf_model_free(pr->m);
  twf_model_free(pr->trial);
  twf_errmodel_free(pr->em);
  free(pr->pose_start);
  free(pr->pose_meas);
  free(pr->inv_sigma);
  free(pr->weight);
  free(pr->wlog);
  free(pr->rows);
  free(pr->A);
  free(pr->g);
  memset(pr, 0, sizeof *pr);
}

twf_status twf_lsq_init(twf_lsq_problem *pr, const twf_model *m, const twf_campaign *c,
                        unsigned groups, const unsigned char *use, double sigma_length,
                        double sigma_angle, twf_error *err)
{
  size_t i, n_poses = c->n_poses;
  memset(pr, 0, sizeof *pr);
  pr->c = c;
  pr->groups = groups;
  pr->n_threads = 1;
  pr->n_joints = m->n_joints;
  pr->use = use;
  pr->m = twf_model_copy(m);
  pr->trial = twf_model_copy(m);
  if (pr->m == NULL || pr->trial == NULL)
    goto nomem;
  pr->n_stations = twf_campaign_station_count(c);
  for (i = 0; i < TWF_STATIONS_MAX; i++)
    twf_pose_identity(&pr->base[i]);
  pr->em = twf_errmodel_alloc_stations(pr->m, groups, pr->n_stations,
                                       (const char (*)[TWF_NAME_MAX])c->station_names, err);
  if (pr->em == NULL) {
    twf_lsq_free(pr);
    return err ? err->status : TWF_ERR_NOMEM;
  }
  pr->p = twf_errmodel_n_params(pr->em);
  if (c->n_meas > TWF_CAMPAIGN_COUNT_MAX) {
    twf_lsq_free(pr);
    return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0,
                         "calibrate from a subset of the poses",
                         "a calibration takes at most %zu measurements, not %zu",
                         (size_t)TWF_CAMPAIGN_COUNT_MAX, c->n_meas);
  }
  pr->pose_start = calloc(n_poses + 1, sizeof *pr->pose_start);
  pr->pose_meas = calloc(c->n_meas ? c->n_meas : 1, sizeof *pr->pose_meas);
  pr->inv_sigma = calloc(c->n_meas ? c->n_meas : 1, sizeof *pr->inv_sigma);
  pr->weight = calloc(c->n_meas ? c->n_meas : 1, sizeof *pr->weight);
  pr->rows = calloc(6 * (pr->p ? pr->p : 1), sizeof *pr->rows);
  pr->A = calloc(pr->p ? pr->p * pr->p : 1, sizeof *pr->A);
  pr->g = calloc(pr->p ? pr->p : 1, sizeof *pr->g);
  /* room for the changes of a screen that drops a few per cent: beyond
   * that a full pass costs little more than updating row by row */
  pr->wlog_cap = c->n_meas / 32 > 64 ? c->n_meas / 32 : 64;
  pr->wlog = malloc(pr->wlog_cap * sizeof *pr->wlog);
  if (!pr->pose_start || !pr->pose_meas || !pr->inv_sigma || !pr->weight ||
      !pr->rows || !pr->A || !pr->g || !pr->wlog)
    goto nomem;
  /* counting sort of the measurements by pose */
  for (i = 0; i < c->n_meas; i++)
    pr->pose_start[c->meas[i].pose + 1]++;
  for (i = 0; i < n_poses; i++)
    pr->pose_start[i + 1] += pr->pose_start[i];
  {
    size_t *fill = calloc(n_poses + 1, sizeof *fill);
    if (fill == NULL)
      goto nomem;
    memcpy(fill, pr->pose_start, (n_poses + 1) * sizeof *fill);
    for (i = 0; i < c->n_meas; i++)
      pr->pose_meas[fill[c->meas[i].pose]++] = (uint32_t)i;
    free(fill);
  }
  for (i = 0; i < c->n_meas; i++) {
    double s = c->meas[i].sigma > 0 ? c->meas[i].sigma : sigma_length;
    pr->inv_sigma[i] = 1.0 / s;
    pr->weight[i] = 1.0;
  }
  pr->inv_sigma_rot = 1.0 / (sigma_angle > 0 ? sigma_angle : sigma_length / twf_model_reach(m));
  pr->sigma_len = sigma_length;
  if (pass_resources(pr) != 0)
    goto nomem;
  return TWF_OK;
nomem:
  twf_lsq_free(pr);
  return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
}

void twf_lsq_set_weight(twf_lsq_problem *pr, size_t i, double w)
{
  if (pr->weight[i] == w)
    return;
  if (pr->wlog_n < pr->wlog_cap) {
    pr->wlog[pr->wlog_n].meas = (uint32_t)i;
    pr->wlog[pr->wlog_n].change = w - pr->weight[i];
    pr->wlog_n++;
  } else {
    pr->wlog_full = 1;
  }
  pr->weight[i] = w;
  pr->weight_gen++;
}

void twf_lsq_reset_weights(twf_lsq_problem *pr)
{
  size_t i;
  for (i = 0; i < pr->c->n_meas; i++)
    twf_lsq_set_weight(pr, i, 1.0);
}

int twf_lsq_threads(int n)
{
  long cores;
  if (n > 0)
    return n < TWF_LSQ_THREADS_MAX ? n : TWF_LSQ_THREADS_MAX;
  cores = sysconf(_SC_NPROCESSORS_ONLN);
  if (cores < 1)
    return 1;
  return cores < TWF_LSQ_THREADS_MAX ? (int)cores : TWF_LSQ_THREADS_MAX;
}

int twf_lsq_active(const twf_lsq_problem *pr, size_t i)
{
  return pr->use[i] && pr->weight[i] > 0.0;
}

/* ------------------------------------------------------------ chunked passes */

/* Every pass over the measurements (the normal matrix, the factor, the
 * cost) cuts the poses into chunks of TWF_LSQ_CHUNK_POSES, computes each
 * chunk on its own from zero, and adds (or merges) the chunk results in
 * chunk order. The chunks do not depend on the number of threads, nor does
 * the order of the reduction, so every thread count gives the same bits. */
#define TWF_LSQ_CHUNK_POSES 64
/* Chunks computed ahead of the reduction, per thread. */
#define SLOTS_PER_THREAD 4
/* Row blocks per batch of the normal matrix's kernel. */
#define NB 8


static void ws_free(twf_lsq_ws *w, int own_em)
{
  if (own_em)
    twf_errmodel_free(w->em);
  free(w->prefix);
  free(w->X);
  free(w->Y);
  free(w->B);
  free(w->rb);
  memset(w, 0, sizeof *w);
}

static int ws_alloc(twf_lsq_problem *pr, twf_lsq_ws *w, int thread)
{
  size_t p = pr->p ? pr->p : 1, nx = 3 * NB * ((p + 3) & ~(size_t)3);
  memset(w, 0, sizeof *w);
  w->em = thread == 0 ? pr->em : twf_errmodel_alloc_stations(pr->m, pr->groups, pr->n_stations,
                                              (const char (*)[TWF_NAME_MAX])pr->c->station_names, NULL);
  w->prefix = calloc(pr->n_joints + 1, sizeof *w->prefix);
  w->X = calloc(nx > p * p ? nx : p * p, sizeof *w->X); /* padding stays zero */
  w->Y = calloc(nx, sizeof *w->Y);
  w->B = calloc((pr->max_chunk_rows ? pr->max_chunk_rows : 1) * p, sizeof *w->B);
  w->rb = calloc(pr->max_chunk_rows ? pr->max_chunk_rows : 1, sizeof *w->rb);
  if (w->em == NULL || !w->prefix || !w->X || !w->Y || !w->B || !w->rb) {
    ws_free(w, thread != 0);
    return -1;
  }
  return 0;
}

/* What every pass needs, made with the problem so that a pass cannot
 * fail: the first thread's workspace, one slot, the reduction. */
static int pass_resources(twf_lsq_problem *pr)
{
  size_t p = pr->p ? pr->p : 1, pose, rows, slot;
  const twf_campaign *c = pr->c;
  /* rows of the largest chunk (3 per point, 6 per 6-D measurement) */
  for (pose = 0; pose < c->n_poses; pose += TWF_LSQ_CHUNK_POSES) {
    size_t end = pose + TWF_LSQ_CHUNK_POSES < c->n_poses ? pose + TWF_LSQ_CHUNK_POSES : c->n_poses, t;
    rows = 0;
    for (t = pr->pose_start[pose]; t < pr->pose_start[end]; t++)
      rows += c->meas[pr->pose_meas[t]].has_orientation ? 6 : 3;
    if (rows > pr->max_chunk_rows)
      pr->max_chunk_rows = rows;
  }
  {
    size_t ld = (p + 3) & ~(size_t)3;
    slot = ld * ld + ld + 1;
  }
  pr->ws = calloc(TWF_LSQ_THREADS_MAX, sizeof *pr->ws);
  pr->slot1 = calloc(slot, sizeof *pr->slot1);
  pr->acc = calloc(slot, sizeof *pr->acc);
  pr->coldesc = calloc(p, sizeof(lsq_col));
  pr->cacheA = calloc(p * p, sizeof *pr->cacheA);
  pr->cacheg = calloc(p, sizeof *pr->cacheg);
  pr->cache_cols = calloc(p, sizeof *pr->cache_cols);
  pr->cache_pos = calloc(p, sizeof *pr->cache_pos);
  pr->snap = twf_model_copy(pr->m);
  pr->need = calloc(p, 1);
  if (!pr->ws || !pr->slot1 || !pr->acc || !pr->coldesc || !pr->need || !pr->cacheA || !pr->cacheg || !pr->cache_cols || !pr->cache_pos || !pr->snap || ws_alloc(pr, &pr->ws[0], 0) != 0)
    return -1;
  pr->n_ws = 1;
  return 0;
}

/* Workspaces for up to n threads; returns how many exist (at least 1:
 * the first is made with the problem). A thread count that cannot be served
 * falls back to fewer threads: the results do not depend on it. */
static int ws_ensure(twf_lsq_problem *pr, int n)
{
  if (n < 1)
    n = 1;
  if (n > TWF_LSQ_THREADS_MAX)
    n = TWF_LSQ_THREADS_MAX;
  while (pr->n_ws < n) {
    if (ws_alloc(pr, &pr->ws[pr->n_ws], pr->n_ws) != 0)
      break;
    pr->n_ws++;
  }
  /* the threads' error models follow the working model's joints */
  {
    int t;
    for (t = 1; t < pr->n_ws; t++)
      twf_errmodel_update(pr->ws[t].em, pr->m);
  }
  return pr->n_ws;
}

typedef struct pass pass;
struct pass {
  twf_lsq_problem *pr;
  size_t n_chunks, slot_size;
  /* compute chunk c from zero into slot (slot_size doubles) */
  void (*compute)(pass *ps, twf_lsq_ws *ws, size_t c, double *slot);
  /* fold chunk c's slot into the pass result (called in chunk order) */
  void (*reduce)(pass *ps, size_t c, double *slot);
  /* the pass's own data */
  const size_t *cols;
  size_t nc, ld;        /* columns, and nc padded to a multiple of 4 */
  const lsq_col *cd;    /* the columns' descriptions */
  const unsigned char *need; /* p: the parameters among the columns */
  double *acc;          /* the reduction */
  const twf_model *m;   /* cost pass */
  const twf_pose *B;
  const twf_pose *flanges; /* the problem's flange poses at this pass's arm, or NULL */
  /* scheduling */
  pthread_mutex_t mu;
  pthread_cond_t cv;
  size_t next_claim, next_reduce, n_slots;
  size_t *slot_chunk;   /* chunk held by a slot, SIZE_MAX when free */
  unsigned char *slot_ready;
  double *slots;
};

typedef struct worker {
  pass *ps;
  twf_lsq_ws *ws;
} worker;

/* Claim chunks, compute them, reduce what is ready in chunk order. */
static void *pass_worker(void *arg)
{
  worker *wk = arg;
  pass *ps = wk->ps;
  pthread_mutex_lock(&ps->mu);
  for (;;) {
    size_t c, s;
    while (ps->next_reduce < ps->n_chunks) {
      s = ps->next_reduce % ps->n_slots;
      if (!ps->slot_ready[s] || ps->slot_chunk[s] != ps->next_reduce)
        break;
      ps->reduce(ps, ps->next_reduce, ps->slots + s * ps->slot_size);
      ps->slot_ready[s] = 0;
      ps->slot_chunk[s] = SIZE_MAX;
      ps->next_reduce++;
      pthread_cond_broadcast(&ps->cv);
    }
    if (ps->next_claim >= ps->n_chunks)
      break;
    if (ps->next_claim - ps->next_reduce >= ps->n_slots) {
      pthread_cond_wait(&ps->cv, &ps->mu);
      continue;
    }
    c = ps->next_claim++;
    s = c % ps->n_slots;
    ps->slot_chunk[s] = c;
    pthread_mutex_unlock(&ps->mu);
    ps->compute(ps, wk->ws, c, ps->slots + s * ps->slot_size);
    pthread_mutex_lock(&ps->mu);
    ps->slot_ready[s] = 1;
  }
  pthread_mutex_unlock(&ps->mu);
  return NULL;
}

/* One thread: chunk after chunk through the problem's own slot. */
static void pass_serial(pass *ps)
{
  size_t c;
  for (c = 0; c < ps->n_chunks; c++) {
    ps->compute(ps, &ps->pr->ws[0], c, ps->pr->slot1);
    ps->reduce(ps, c, ps->pr->slot1);
  }
}

/* Run a pass on up to pr->n_threads threads (this one included). Memory
 * short for the threads' workspaces means fewer threads, never another
 * result. */
static void pass_run(pass *ps)
{
  twf_lsq_problem *pr = ps->pr;
  int n_threads = pr->n_threads > 1 ? pr->n_threads : 1, t, started = 1;
  pthread_t tid[TWF_LSQ_THREADS_MAX];
  worker wk[TWF_LSQ_THREADS_MAX];
  size_t s;
  if (n_threads > TWF_LSQ_THREADS_MAX)
    n_threads = TWF_LSQ_THREADS_MAX;
  /* a few chunks per thread at least, or threads cost more than they save */
  if ((size_t)n_threads > ps->n_chunks / 2)
    n_threads = ps->n_chunks / 2 > 1 ? (int)(ps->n_chunks / 2) : 1;
  n_threads = ws_ensure(pr, n_threads);
  if (n_threads == 1) {
    pass_serial(ps);
    return;
  }
  ps->n_slots = (size_t)n_threads * SLOTS_PER_THREAD;
  ps->slots = malloc(ps->n_slots * (ps->slot_size ? ps->slot_size : 1) * sizeof *ps->slots);
  ps->slot_chunk = malloc(ps->n_slots * sizeof *ps->slot_chunk);
  ps->slot_ready = calloc(ps->n_slots, 1);
  if (ps->slots == NULL || ps->slot_chunk == NULL || ps->slot_ready == NULL) {
    free(ps->slots);
    free(ps->slot_chunk);
    free(ps->slot_ready);
    pass_serial(ps);
    return;
  }
  for (s = 0; s < ps->n_slots; s++)
    ps->slot_chunk[s] = SIZE_MAX;
  ps->next_claim = ps->next_reduce = 0;
  pthread_mutex_init(&ps->mu, NULL);
  pthread_cond_init(&ps->cv, NULL);
  for (t = 0; t < n_threads; t++) {
    wk[t].ps = ps;
    wk[t].ws = &pr->ws[t];
  }
  for (t = 1; t < n_threads; t++) {
    if (pthread_create(&tid[t], NULL, pass_worker, &wk[t]) != 0)
      break;
    started++;
  }
  pass_worker(&wk[0]);
  for (t = 1; t < started; t++)
    pthread_join(tid[t], NULL);
  pthread_mutex_destroy(&ps->mu);
  pthread_cond_destroy(&ps->cv);
  free(ps->slots);
  free(ps->slot_chunk);
  free(ps->slot_ready);
  ps->slots = NULL;
}

/* 1 when a and b give the same forward kinematics: joints, home, gravity
 * and payloads (what twf_model_fk_load reads). */
static int same_arm(const twf_model *a, const twf_model *b)
{
  return a->n_joints == b->n_joints && a->n_payloads == b->n_payloads &&
         memcmp(a->joints, b->joints, a->n_joints * sizeof *a->joints) == 0 &&
         memcmp(&a->home, &b->home, sizeof a->home) == 0 &&
         memcmp(a->gravity, b->gravity, sizeof a->gravity) == 0 &&
         (a->n_payloads == 0 || memcmp(a->payloads, b->payloads, a->n_payloads * sizeof *a->payloads) == 0);
}

/* The flange poses of every pose at arm m when the problem keeps them
 * (see twf_lsq_problem), computed at the first pass at that arm; NULL
 * otherwise, and when memory is short (the passes then compute them). */
static const twf_pose *pass_flanges(twf_lsq_problem *pr, const twf_model *m)
{
  const twf_campaign *c = pr->c;
  size_t pose;
  unsigned fixed_arm = TWF_GROUP_BIT(TWF_GROUP_BASE) | TWF_GROUP_BIT(TWF_GROUP_TARGETS);
  if ((pr->groups & ~fixed_arm) != 0 || c->n_poses == 0 || c->n_poses > TWF_LSQ_FLANGE_CACHE_POSES)
    return NULL;
  if (pr->flanges != NULL && same_arm(pr->flange_model, m))
    return pr->flanges;
  if (pr->flanges == NULL)
    pr->flanges = malloc(c->n_poses * sizeof *pr->flanges);
  if (pr->flange_model == NULL)
    pr->flange_model = twf_model_copy(m);
  else
    twf_lsq_model_assign(pr->flange_model, m);
  if (pr->flanges == NULL || pr->flange_model == NULL || pr->flange_model->n_payloads != m->n_payloads)
    return NULL;
  if (m->n_payloads > 0)
    memcpy(pr->flange_model->payloads, m->payloads, m->n_payloads * sizeof *m->payloads);
  memcpy(pr->flange_model->gravity, m->gravity, sizeof m->gravity);
  for (pose = 0; pose < c->n_poses; pose++)
    twf_model_fk_load(m, c->q + pose * pr->n_joints, twf_campaign_payload(c, pose), NULL,
                      &pr->flanges[pose]);
  return pr->flanges;
}

/* The error model at pose: the flange, and the twists of the pass's
 * parameters. */
static void pass_eval_pose(const pass *ps, twf_lsq_ws *ws, size_t pose)
{
  const twf_lsq_problem *pr = ps->pr;
  const twf_campaign *c = pr->c;
  size_t sta = twf_campaign_pose_station(c, pose);
  if (ps->flanges != NULL) {
    twf_errmodel_eval_flange(ws->em, &pr->base[sta], sta, &ps->flanges[pose], ps->need);
    return;
  }
  twf_errmodel_set_payload(ws->em, twf_campaign_payload(c, pose));
  twf_errmodel_eval_pose_some(ws->em, pr->m, &pr->base[sta], sta, c->q + pose * pr->n_joints, ps->need);
}

/* The columns of a pass (cols NULL: all p), described once. */
static void pass_columns(pass *ps, const size_t *cols, size_t nc)
{
  lsq_col *cd = (lsq_col *)ps->pr->coldesc;
  size_t a;
  unsigned char *need = ps->pr->need;
  ps->cols = cols;
  ps->nc = nc;
  ps->ld = (nc + 3) & ~(size_t)3;
  memset(need, 0, ps->pr->p);
  for (a = 0; a < nc; a++)
    need[cols ? cols[a] : a] = 1;
  ps->need = need;
  for (a = 0; a < nc; a++) {
    const twf_param *par = twf_errmodel_param(ps->pr->em, cols ? cols[a] : a);
    cd[a].j = cols ? cols[a] : a;
    cd[a].target = par->group == TWF_GROUP_TARGETS ? par->target : -1;
    cd[a].comp = par->component;
  }
  ps->cd = cd;
}

static size_t pass_chunks(const twf_lsq_problem *pr)
{
  return (pr->c->n_poses + TWF_LSQ_CHUNK_POSES - 1) / TWF_LSQ_CHUNK_POSES;
}

/* 1 when some measurement of the pose enters the fit. */
static int pose_active(const twf_lsq_problem *pr, size_t pose)
{
  size_t t;
  for (t = pr->pose_start[pose]; t < pr->pose_start[pose + 1]; t++)
    if (twf_lsq_active(pr, pr->pose_meas[t]))
      return 1;
  return 0;
}

/* ------------------------------------------------------------ the normal matrix */

/* Row blocks of a chunk are batched NB at a time: each entry of the
 * chunk's A is loaded once per batch and gains the batch's rank-3 updates
 * one after the other, in the order of the measurements. That is the same
 * sequence of floating-point operations as one update after another (so a
 * campaign of one chunk gives the bits of a plain row-by-row loop), with
 * a fraction of the loads and stores. */

/* The weighted rows of one measurement's block over the pass's columns:
 * c (3 x ld, ld = nc padded to a multiple of 4 with zeros) as
 * twf_errmodel_point / twf_errmodel_orientation form them, wc = w c, and
 * the residual; g gains gu^T r with gu = wc. An entry may instead be half
 * of a pose's rank-6 block (pose_rank6): then c holds 3 of the 6 rows of
 * the twists, wc those of M times them, r half of h, and gu = c. */
typedef struct row_batch {
  size_t n, ld;
  double *c, *wc;  /* NB x 3 x ld */
  double r[NB][3];
  const double *gu[NB]; /* the entry's rows that multiply r into g */
} row_batch;

#if defined(__GNUC__)
/* Two lanes of the same scalar operations (GCC's vector extension):
 * the bits of the scalar loop, two entries at a time. */
typedef double v2d __attribute__((vector_size(16)));
static inline v2d ld2(const double *p) { v2d v; memcpy(&v, p, sizeof v); return v; }
static inline void st2(double *p, v2d v) { memcpy(p, &v, sizeof v); }
typedef double v4d __attribute__((vector_size(32)));
#endif

/* batch_flush in two versions chosen at load time (GCC's function
 * multiversioning, x86-64 Linux): with AVX, four lanes per instruction,
 * else the SSE2 of the baseline. AVX without FMA rounds every product and
 * sum as SSE2 does, so both give the same bits. */
#if defined(__GNUC__) && !defined(__clang__) && defined(__x86_64__) && defined(__linux__) && \
    !defined(__SANITIZE_ADDRESS__)
#define TWF_BATCH_CLONES __attribute__((target_clones("avx", "default")))
#else
#define TWF_BATCH_CLONES
#endif

/* Rows a, a + 1 of A (stride ld), columns b .. b + w (w = 2 or 4), gain
 * the batch's updates in order. */
#if defined(__GNUC__)
#define TWF_TILE_INLINE __attribute__((always_inline))
#else
#define TWF_TILE_INLINE
#endif
static inline TWF_TILE_INLINE void batch_tile(const row_batch *bt, size_t a, size_t b, size_t w, double *A)
{
  size_t ld = bt->ld, k;
  double *A0 = A + a * ld + b, *A1 = A0 + ld;
#if defined(__GNUC__)
  if (w == 4) {
    /* four lanes (one AVX register where batch_flush's clone has AVX,
     * two SSE2 registers otherwise): the same operations per entry */
    v4d s0, s1;
    memcpy(&s0, A0, sizeof s0);
    memcpy(&s1, A1, sizeof s1);
    for (k = 0; k < bt->n; k++) {
      const double *c = bt->c + 3 * k * ld + b, *wc = bt->wc + 3 * k * ld + a;
      double u0 = wc[0], u1 = wc[ld], u2 = wc[2 * ld], v0 = wc[1], v1 = wc[ld + 1], v2 = wc[2 * ld + 1];
      v4d c0, c1, c2;
      memcpy(&c0, c, sizeof c0);
      memcpy(&c1, c + ld, sizeof c1);
      memcpy(&c2, c + 2 * ld, sizeof c2);
      s0 += u0 * c0 + u1 * c1 + u2 * c2;
      s1 += v0 * c0 + v1 * c1 + v2 * c2;
    }
    memcpy(A0, &s0, sizeof s0);
    memcpy(A1, &s1, sizeof s1);
    return;
  }
  {
    v2d s00 = ld2(A0), s10 = ld2(A1);
    for (k = 0; k < bt->n; k++) {
      const double *c = bt->c + 3 * k * ld + b, *wc = bt->wc + 3 * k * ld + a;
      v2d c0l = ld2(c), c1l = ld2(c + ld), c2l = ld2(c + 2 * ld);
      s00 += wc[0] * c0l + wc[ld] * c1l + wc[2 * ld] * c2l;
      s10 += wc[1] * c0l + wc[ld + 1] * c1l + wc[2 * ld + 1] * c2l;
    }
    st2(A0, s00); st2(A1, s10);
  }
#else
  {
    size_t i, e;
    for (i = 0; i < 2; i++)
      for (e = 0; e < w; e++) {
        double *s = (i ? A1 : A0) + e;
        for (k = 0; k < bt->n; k++) {
          const double *c = bt->c + 3 * k * ld + b + e, *wc = bt->wc + 3 * k * ld + a + i;
          *s += wc[0] * c[0] + wc[ld] * c[ld] + wc[2 * ld] * c[2 * ld];
        }
      }
  }
#endif
}

/* A (nc rows of stride ld, upper triangle) and g gain the batch's updates
 * in order: entry by entry the operations of one update after another
 * (the tiles also fill a few entries below the diagonal, unused). */
TWF_BATCH_CLONES static void batch_flush(row_batch *bt, size_t nc, double *A, double *g)
{
  size_t a, b, k, ld = bt->ld, n = bt->n;
  for (a = 0; a < nc; a += 2) {
    for (k = 0; k < n; k++) {
      const double *u = bt->gu[k];
      g[a] += u[a] * bt->r[k][0] + u[ld + a] * bt->r[k][1] + u[2 * ld + a] * bt->r[k][2];
      g[a + 1] += u[a + 1] * bt->r[k][0] + u[ld + a + 1] * bt->r[k][1] + u[2 * ld + a + 1] * bt->r[k][2];
    }
    for (b = a; b + 4 <= ld; b += 4)
      batch_tile(bt, a, b, 4, A);
    if (b < ld)
      batch_tile(bt, a, b, 2, A);
  }
  bt->n = 0;
}

/* Rows of the pose's measurements that enter the fit (3 per point, 6 with
 * an orientation): 0 when none does. */
static size_t pose_rows(const twf_lsq_problem *pr, size_t pose)
{
  size_t t, n = 0;
  for (t = pr->pose_start[pose]; t < pr->pose_start[pose + 1]; t++) {
    size_t i = pr->pose_meas[t];
    if (twf_lsq_active(pr, i))
      n += pr->c->meas[i].has_orientation ? 6 : 3;
  }
  return n;
}

/* The rows of one pose folded through its twists. Over a twist column
 * (e = (w, v), spatial) a point y's rows are A_y e with A_y = [-[y]x, I]
 * and an orientation's are [Ji, 0] e, so all the pose's rows over those
 * columns give T^T M T and T^T h (T: 6 x nt, the twists; M = sum w_i
 * A_i^T A_i, h = sum w_i A_i^T r_i): two 3-row entries of the batch (c =
 * the 6 rows of T, wc = those of M T, gu = c, r = h) where the rows
 * themselves would take one entry per point and per orientation. The
 * twists are taken about o, the flange's origin (v + w x o, y - o): the
 * same rows, without the cancellation of |y| |w| against |v| that M's
 * |y|^2 terms would otherwise bring about a point metres from the origin.
 *
 * A target column's rows are F->R[.][comp] for that target's points, zero
 * for the others: the pure translation (0, R_c) seen through A_y. Its
 * terms with a twist column are e^T N with N = sum over the target's
 * points of w_i A_i^T R_c = (s_t x R_c, W_t R_c) (s_t = sum w_i (y_i - o),
 * W_t = sum w_i): wc holds N in the target column and c zero, so the
 * kernel makes those where the target column comes first (A is the upper
 * triangle in the pass's order) and the ones where a twist column comes
 * first are added here, as are the target-target block W_t R_c . R_d and
 * the gradient R_c . sum w_i r_i (pose_rank6). */

/* M = [[P, [s]x], [-[s]x, W I]] about o: what a pose's twist columns are
 * multiplied by (pose_rank6 fills it, a local). */
typedef struct rank6_m {
  double P[3][3], s[3], W, o[3];
} rank6_m;

/* Twist column a of the block: c = (w, v + w x o), wc = M c. */
static inline TWF_TILE_INLINE void rank6_col(const rank6_m *q, const double *e, size_t a, size_t ld, double *C, double *WC)
{
  const double *o = q->o, *s = q->s;
  double w0 = e[0], w1 = e[1], w2 = e[2], v0, v1, v2;
  v0 = e[3] + (w1 * o[2] - w2 * o[1]);
  v1 = e[4] + (w2 * o[0] - w0 * o[2]);
  v2 = e[5] + (w0 * o[1] - w1 * o[0]);
  C[a] = w0;
  C[ld + a] = w1;
  C[2 * ld + a] = w2;
  C[3 * ld + a] = v0;
  C[4 * ld + a] = v1;
  C[5 * ld + a] = v2;
  WC[a] = q->P[0][0] * w0 + q->P[0][1] * w1 + q->P[0][2] * w2 + (s[1] * v2 - s[2] * v1);
  WC[ld + a] = q->P[1][0] * w0 + q->P[1][1] * w1 + q->P[1][2] * w2 + (s[2] * v0 - s[0] * v2);
  WC[2 * ld + a] = q->P[2][0] * w0 + q->P[2][1] * w1 + q->P[2][2] * w2 + (s[0] * v1 - s[1] * v0);
  WC[3 * ld + a] = (w1 * s[2] - w2 * s[1]) + q->W * v0;
  WC[4 * ld + a] = (w2 * s[0] - w0 * s[2]) + q->W * v1;
  WC[5 * ld + a] = (w0 * s[1] - w1 * s[0]) + q->W * v2;
}

#if defined(__GNUC__)
/* M's coefficients in both lanes, made once a pose (SSE2 has no
 * broadcast from memory). */
typedef struct rank6_m2 {
  v2d P[3][3], s[3], W, o[3];
} rank6_m2;

/* rank6_col for twist columns a and a + 1 in two lanes: the same
 * operations, so the same bits. */
static inline TWF_TILE_INLINE void rank6_col2(const rank6_m2 *q, const double *e, const double *f, size_t a, size_t ld, double *C,
                              double *WC)
{
  const v2d *o = q->o, *s = q->s;
  v2d w0 = { e[0], f[0] }, w1 = { e[1], f[1] }, w2 = { e[2], f[2] }, v0, v1, v2;
  v0 = (v2d){ e[3], f[3] } + (w1 * o[2] - w2 * o[1]);
  v1 = (v2d){ e[4], f[4] } + (w2 * o[0] - w0 * o[2]);
  v2 = (v2d){ e[5], f[5] } + (w0 * o[1] - w1 * o[0]);
  st2(C + a, w0);
  st2(C + ld + a, w1);
  st2(C + 2 * ld + a, w2);
  st2(C + 3 * ld + a, v0);
  st2(C + 4 * ld + a, v1);
  st2(C + 5 * ld + a, v2);
  st2(WC + a, q->P[0][0] * w0 + q->P[0][1] * w1 + q->P[0][2] * w2 + (s[1] * v2 - s[2] * v1));
  st2(WC + ld + a, q->P[1][0] * w0 + q->P[1][1] * w1 + q->P[1][2] * w2 + (s[2] * v0 - s[0] * v2));
  st2(WC + 2 * ld + a, q->P[2][0] * w0 + q->P[2][1] * w1 + q->P[2][2] * w2 + (s[0] * v1 - s[1] * v0));
  st2(WC + 3 * ld + a, (w1 * s[2] - w2 * s[1]) + q->W * v0);
  st2(WC + 4 * ld + a, (w2 * s[0] - w0 * s[2]) + q->W * v1);
  st2(WC + 5 * ld + a, (w0 * s[1] - w1 * s[0]) + q->W * v2);
}
#endif

/* Every twist column of the block (rank6_col), then the terms e^T N of
 * a twist column before a target column (the base's), which the kernel
 * leaves out (the target's c is zero): along a row of A, up to four
 * target columns at a time. In the clones of batch_flush: with AVX the
 * lanes take three-operand instructions, the same operations. N is in
 * the target columns' wc already. */
TWF_BATCH_CLONES static void rank6_twists(const rank6_m *q, const lsq_col *cd, const double *tw, size_t nc,
                                          size_t ld, size_t tlo, size_t thi, double *C, double *WC, double *A)
{
  size_t a, b;
#if defined(__GNUC__)
  rank6_m2 q2;
  int k, l;
  for (k = 0; k < 3; k++) {
    for (l = 0; l < 3; l++)
      q2.P[k][l] = (v2d){ q->P[k][l], q->P[k][l] };
    q2.s[k] = (v2d){ q->s[k], q->s[k] };
    q2.o[k] = (v2d){ q->o[k], q->o[k] };
  }
  q2.W = (v2d){ q->W, q->W };
#endif
  for (a = 0; a < nc;) {
    if (cd[a].target >= 0) {
      a++;
      continue;
    }
#if defined(__GNUC__)
    if (a + 1 < nc && cd[a + 1].target < 0) {
      rank6_col2(&q2, tw + 6 * cd[a].j, tw + 6 * cd[a + 1].j, a, ld, C, WC);
      a += 2;
      continue;
    }
#endif
    rank6_col(q, tw + 6 * cd[a].j, a, ld, C, WC);
    a++;
  }
  for (a = 0; a < thi; a++) {
    double e0, e1, e2, e3, e4, e5, *Aa = A + a * ld;
    if (cd[a].target >= 0)
      continue;
    e0 = C[a];
    e1 = C[ld + a];
    e2 = C[2 * ld + a];
    e3 = C[3 * ld + a];
    e4 = C[4 * ld + a];
    e5 = C[5 * ld + a];
    for (b = a + 1 > tlo ? a + 1 : tlo; b < thi; b++) {
      if (cd[b].target < 0)
        continue;
#if defined(__GNUC__)
      if (b + 3 < thi && cd[b + 1].target >= 0 && cd[b + 2].target >= 0 && cd[b + 3].target >= 0) {
        v4d n0, n1, n2, n3, n4, n5, s0;
        memcpy(&n0, WC + b, sizeof n0);
        memcpy(&n1, WC + ld + b, sizeof n1);
        memcpy(&n2, WC + 2 * ld + b, sizeof n2);
        memcpy(&n3, WC + 3 * ld + b, sizeof n3);
        memcpy(&n4, WC + 4 * ld + b, sizeof n4);
        memcpy(&n5, WC + 5 * ld + b, sizeof n5);
        memcpy(&s0, Aa + b, sizeof s0);
        s0 += n0 * e0 + n1 * e1 + n2 * e2 + n3 * e3 + n4 * e4 + n5 * e5;
        memcpy(Aa + b, &s0, sizeof s0);
        b += 3;
        continue;
      }
#endif
      Aa[b] += WC[b] * e0 + WC[ld + b] * e1 + WC[2 * ld + b] * e2 + WC[3 * ld + b] * e3 + WC[4 * ld + b] * e4 +
               WC[5 * ld + b] * e5;
    }
  }
}

/* The pose's block as entries bt->n and bt->n + 1 of the batch (room for
 * two left by the caller), with the terms the kernel does not make added
 * to A and g; the pass's target columns lie in [tlo, thi). */
static void pose_rank6(const pass *ps, const twf_lsq_ws *ws, size_t pose, size_t tlo, size_t thi, row_batch *bt,
                       double *A, double *g, double *cost)
{
  const twf_lsq_problem *pr = ps->pr;
  const twf_campaign *c = pr->c;
  const twf_model *m = pr->m;
  const lsq_col *cd = ps->cd;
  const double *tw = twf_errmodel_twists(ws->em);
  const twf_pose *F = twf_errmodel_flange(ws->em);
  size_t nc = ps->nc, ld = ps->ld, a, b, t;
  double *C = bt->c + 3 * bt->n * ld, *WC = bt->wc + 3 * bt->n * ld, h[6] = { 0.0 };
  rank6_m q;
  int k, l;
  memset(&q, 0, sizeof q);
  memcpy(q.o, F->p, sizeof q.o);
  /* the target columns gather their sums in place while the measurements
   * are read: s_t in wc rows 0-2, W_t in wc row 3, sum w r in c rows 0-2 */
  for (a = tlo; a < thi; a++)
    if (cd[a].target >= 0)
      for (k = 0; k < 6; k++)
        C[(size_t)k * ld + a] = WC[(size_t)k * ld + a] = 0.0;
  for (t = pr->pose_start[pose]; t < pr->pose_start[pose + 1]; t++) {
    size_t i = pr->pose_meas[t];
    const twf_measurement *ms = &c->meas[i];
    double y[3], yc[3], r[3], w, yy;
    if (!twf_lsq_active(pr, i))
      continue;
    twf_pose_apply(F, m->targets[ms->target].offset, y);
    for (k = 0; k < 3; k++) {
      r[k] = ms->pos[k] - y[k];
      yc[k] = y[k] - q.o[k];
    }
    w = pr->weight[i] * pr->inv_sigma[i] * pr->inv_sigma[i];
    *cost += 0.5 * w * (r[0] * r[0] + r[1] * r[1] + r[2] * r[2]);
    /* A^T A = [[|y|^2 I - y y^T, [y]x], [-[y]x, I]], A^T r = (y x r, r) */
    yy = yc[0] * yc[0] + yc[1] * yc[1] + yc[2] * yc[2];
    q.P[0][0] += w * (yy - yc[0] * yc[0]);
    q.P[0][1] -= w * (yc[0] * yc[1]);
    q.P[0][2] -= w * (yc[0] * yc[2]);
    q.P[1][1] += w * (yy - yc[1] * yc[1]);
    q.P[1][2] -= w * (yc[1] * yc[2]);
    q.P[2][2] += w * (yy - yc[2] * yc[2]);
    h[0] += w * (yc[1] * r[2] - yc[2] * r[1]);
    h[1] += w * (yc[2] * r[0] - yc[0] * r[2]);
    h[2] += w * (yc[0] * r[1] - yc[1] * r[0]);
    for (k = 0; k < 3; k++) {
      q.s[k] += w * yc[k];
      h[3 + k] += w * r[k];
    }
    q.W += w;
    for (a = tlo; a < thi; a++)
      if (cd[a].target == (long)ms->target) {
        for (k = 0; k < 3; k++) {
          WC[(size_t)k * ld + a] += w * yc[k];
          C[(size_t)k * ld + a] += w * r[k];
        }
        WC[3 * ld + a] += w;
      }
    if (ms->has_orientation) {
      double Rm[3][3], Ji[3][3];
      twf_quat_to_rot(twf_campaign_meas_quat(c, i), Rm);
      twf_errmodel_orientation_jinv(ws->em, Rm, r, Ji);
      w = pr->weight[i] * pr->inv_sigma_rot * pr->inv_sigma_rot;
      *cost += 0.5 * w * (r[0] * r[0] + r[1] * r[1] + r[2] * r[2]);
      for (k = 0; k < 3; k++) {
        for (l = k; l < 3; l++)
          q.P[k][l] += w * (Ji[0][k] * Ji[0][l] + Ji[1][k] * Ji[1][l] + Ji[2][k] * Ji[2][l]);
        h[k] += w * (Ji[0][k] * r[0] + Ji[1][k] * r[1] + Ji[2][k] * r[2]);
      }
    }
  }
  q.P[1][0] = q.P[0][1];
  q.P[2][0] = q.P[0][2];
  q.P[2][1] = q.P[1][2];
  /* target columns: gradient, their own block, then N in place of the sums */
  for (b = tlo; b < thi; b++) {
    double R0, R1, R2, s0, s1, s2, Wt;
    size_t d;
    int cb;
    if (cd[b].target < 0)
      continue;
    cb = cd[b].comp;
    R0 = F->R[0][cb];
    R1 = F->R[1][cb];
    R2 = F->R[2][cb];
    g[b] += R0 * C[b] + R1 * C[ld + b] + R2 * C[2 * ld + b];
    s0 = WC[b];
    s1 = WC[ld + b];
    s2 = WC[2 * ld + b];
    Wt = WC[3 * ld + b];
    for (d = b; d < thi; d++)
      if (cd[d].target == cd[b].target) {
        int cc = cd[d].comp;
        A[b * ld + d] += Wt * (R0 * F->R[0][cc] + R1 * F->R[1][cc] + R2 * F->R[2][cc]);
      }
    WC[b] = s1 * R2 - s2 * R1;
    WC[ld + b] = s2 * R0 - s0 * R2;
    WC[2 * ld + b] = s0 * R1 - s1 * R0;
    WC[3 * ld + b] = Wt * R0;
    WC[4 * ld + b] = Wt * R1;
    WC[5 * ld + b] = Wt * R2;
    C[b] = C[ld + b] = C[2 * ld + b] = 0.0;
  }
  rank6_twists(&q, cd, tw, nc, ld, tlo, thi, C, WC, A);
  memcpy(bt->r[bt->n], h, sizeof bt->r[0]);
  memcpy(bt->r[bt->n + 1], h + 3, sizeof bt->r[0]);
  bt->gu[bt->n] = C;
  bt->gu[bt->n + 1] = C + 3 * ld;
  bt->n += 2;
}

/* Slot of the normal pass: A (ld x ld, upper triangle), g (ld), the cost. */
static void normal_compute(pass *ps, twf_lsq_ws *ws, size_t chunk, double *slot)
{
  twf_lsq_problem *pr = ps->pr;
  const twf_campaign *c = pr->c;
  const twf_model *m = pr->m;
  const lsq_col *cd = ps->cd;
  size_t nc = ps->nc, ld = ps->ld, pose0 = chunk * TWF_LSQ_CHUNK_POSES, pose1 = pose0 + TWF_LSQ_CHUNK_POSES;
  size_t pose, a, tlo = 0, thi = 0;
  double *A = slot, *g = slot + ld * ld, *cost = g + ld;
  row_batch bt;
  if (pose1 > c->n_poses)
    pose1 = c->n_poses;
  memset(slot, 0, ps->slot_size * sizeof *slot);
  bt.n = 0;
  bt.ld = ld;
  bt.c = ws->X;
  bt.wc = ws->Y;
  for (a = 0; a < nc; a++)
    if (cd[a].target >= 0) {
      if (thi == 0)
        tlo = a;
      thi = a + 1;
    }
  for (pose = pose0; pose < pose1; pose++) {
    const double *tw;
    const twf_pose *F;
    size_t t, rows = pose_rows(pr, pose);
    if (rows == 0)
      continue;
    pass_eval_pose(ps, ws, pose);
    /* beyond 6 rows (two points, or one with an orientation) the pose's
     * rank-6 block is the cheaper: the kernel's work goes with the rows */
    if (rows > 6) {
      if (bt.n + 2 > NB)
        batch_flush(&bt, nc, A, g);
      pose_rank6(ps, ws, pose, tlo, thi, &bt, A, g, cost);
      if (bt.n == NB)
        batch_flush(&bt, nc, A, g);
      continue;
    }
    tw = twf_errmodel_twists(ws->em);
    F = twf_errmodel_flange(ws->em);
    for (t = pr->pose_start[pose]; t < pr->pose_start[pose + 1]; t++) {
      size_t i = pr->pose_meas[t];
      const twf_measurement *ms = &c->meas[i];
      double y[3], w, *c0, *w0, *r;
      int k;
      if (!twf_lsq_active(pr, i))
        continue;
      /* position rows (twf_errmodel_point over the pass's columns) */
      twf_pose_apply(F, m->targets[ms->target].offset, y);
      c0 = bt.c + 3 * bt.n * ld;
      w0 = bt.wc + 3 * bt.n * ld;
      r = bt.r[bt.n];
      for (k = 0; k < 3; k++)
        r[k] = ms->pos[k] - y[k];
      w = pr->weight[i] * pr->inv_sigma[i] * pr->inv_sigma[i];
      *cost += 0.5 * w * (r[0] * r[0] + r[1] * r[1] + r[2] * r[2]);
      for (a = 0; a < nc; a++) {
        if (cd[a].target >= 0) {
          for (k = 0; k < 3; k++)
            c0[(size_t)k * ld + a] = cd[a].target == (long)ms->target ? F->R[k][cd[a].comp] : 0.0;
        } else {
          /* a spatial twist (w, v) moves the point y by w x y + v */
          const double *e = tw + 6 * cd[a].j;
          double wxy[3];
          twf_v3_cross(e, y, wxy);
          c0[a] = wxy[0] + e[3];
          c0[ld + a] = wxy[1] + e[4];
          c0[2 * ld + a] = wxy[2] + e[5];
        }
      }
      for (a = 0; a < 3 * ld; a++)
        w0[a] = w * c0[a];
      bt.gu[bt.n] = w0;
      if (++bt.n == NB)
        batch_flush(&bt, nc, A, g);
      if (ms->has_orientation) {
        double Rm[3][3], Ji[3][3];
        c0 = bt.c + 3 * bt.n * ld;
        w0 = bt.wc + 3 * bt.n * ld;
        r = bt.r[bt.n];
        twf_quat_to_rot(twf_campaign_meas_quat(c, i), Rm);
        twf_errmodel_orientation_jinv(ws->em, Rm, r, Ji);
        w = pr->weight[i] * pr->inv_sigma_rot * pr->inv_sigma_rot;
        *cost += 0.5 * w * (r[0] * r[0] + r[1] * r[1] + r[2] * r[2]);
        for (a = 0; a < nc; a++) {
          const double *e = tw + 6 * cd[a].j;
          if (cd[a].target >= 0) {
            c0[a] = c0[ld + a] = c0[2 * ld + a] = 0.0;
          } else {
            for (k = 0; k < 3; k++)
              c0[(size_t)k * ld + a] = Ji[k][0] * e[0] + Ji[k][1] * e[1] + Ji[k][2] * e[2];
          }
        }
        for (a = 0; a < 3 * ld; a++)
          w0[a] = w * c0[a];
        bt.gu[bt.n] = w0;
        if (++bt.n == NB)
          batch_flush(&bt, nc, A, g);
      }
    }
  }
  if (bt.n > 0)
    batch_flush(&bt, nc, A, g);
}

static void sum_reduce(pass *ps, size_t chunk, double *slot)
{
  size_t k;
  (void)chunk;
  for (k = 0; k < ps->slot_size; k++)
    ps->acc[k] += slot[k];
}

/* The normal matrix by chunks, and the cost. */
static double normal_pass(twf_lsq_problem *pr, const size_t *cols, size_t nc, double *A, double *g)
{
  pass ps;
  size_t a, b;
  memset(&ps, 0, sizeof ps);
  ps.pr = pr;
  pass_columns(&ps, cols, nc);
  ps.slot_size = ps.ld * ps.ld + ps.ld + 1;
  ps.n_chunks = pass_chunks(pr);
  ps.flanges = pass_flanges(pr, pr->m);
  ps.compute = normal_compute;
  ps.reduce = sum_reduce;
  pr->n_normal_passes++;
  ps.acc = pr->acc;
  memset(ps.acc, 0, ps.slot_size * sizeof *ps.acc);
  pass_run(&ps);
  for (a = 0; a < nc; a++) {
    for (b = a; b < nc; b++)
      A[a * nc + b] = A[b * nc + a] = ps.acc[a * ps.ld + b];
    g[a] = ps.acc[ps.ld * ps.ld + a];
  }
  return ps.acc[ps.ld * ps.ld + ps.ld];
}

/* ------------------------------------------------------------ the factor */

/* The weighted rows of a chunk into the column-major block B (rows x nc),
 * formed as twf_errmodel_point and twf_errmodel_orientation form them, and
 * their weighted residuals into rb; returns the row count. */
static size_t factor_rows(pass *ps, twf_lsq_ws *ws, size_t pose0, size_t pose1, double *B, size_t ldb,
                          double *rb)
{
  twf_lsq_problem *pr = ps->pr;
  const twf_campaign *c = pr->c;
  const twf_model *m = pr->m;
  size_t pose, n = 0, a;
  for (pose = pose0; pose < pose1; pose++) {
    const double *tw;
    const twf_pose *F;
    size_t t;
    if (!pose_active(pr, pose))
      continue;
    pass_eval_pose(ps, ws, pose);
    tw = twf_errmodel_twists(ws->em);
    F = twf_errmodel_flange(ws->em);
    for (t = pr->pose_start[pose]; t < pr->pose_start[pose + 1]; t++) {
      size_t i = pr->pose_meas[t];
      const twf_measurement *ms = &c->meas[i];
      double y[3], sw;
      int r;
      if (!twf_lsq_active(pr, i))
        continue;
      twf_pose_apply(F, m->targets[ms->target].offset, y);
      sw = sqrt(pr->weight[i] * pr->inv_sigma[i] * pr->inv_sigma[i]);
      for (r = 0; r < 3; r++)
        rb[n + (size_t)r] = sw * (ms->pos[r] - y[r]);
      for (a = 0; a < ps->nc; a++) {
        const lsq_col *cd = &ps->cd[a];
        double *col = B + a * ldb + n;
        if (cd->target >= 0) {
          for (r = 0; r < 3; r++)
            col[r] = sw * (cd->target == (long)ms->target ? F->R[r][cd->comp] : 0.0);
        } else {
          /* a spatial twist (w, v) moves the point y by w x y + v */
          const double *e = tw + 6 * cd->j;
          double wxy[3];
          twf_v3_cross(e, y, wxy);
          col[0] = sw * (wxy[0] + e[3]);
          col[1] = sw * (wxy[1] + e[4]);
          col[2] = sw * (wxy[2] + e[5]);
        }
      }
      n += 3;
      if (ms->has_orientation) {
        double Rm[3][3], Ji[3][3], ro[3];
        sw = sqrt(pr->weight[i] * pr->inv_sigma_rot * pr->inv_sigma_rot);
        twf_quat_to_rot(twf_campaign_meas_quat(c, i), Rm);
        twf_errmodel_orientation_jinv(ws->em, Rm, ro, Ji);
        for (r = 0; r < 3; r++)
          rb[n + (size_t)r] = sw * ro[r];
        for (a = 0; a < ps->nc; a++) {
          const double *e = tw + 6 * ps->cd[a].j;
          double *col = B + a * ldb + n;
          if (ps->cd[a].target >= 0) {
            col[0] = col[1] = col[2] = 0.0;
            continue;
          }
          for (r = 0; r < 3; r++)
            col[r] = sw * (Ji[r][0] * e[0] + Ji[r][1] * e[1] + Ji[r][2] * e[2]);
        }
        n += 3;
      }
    }
  }
  return n;
}

/* Poses whose rows form one block of the factor: a block of a few dozen
 * rows stays in the first-level cache through its reflections. */
#define FACTOR_BLOCK_POSES 8

/* Slot of the factor pass: the chunk's own factor, column-major (as a
 * triangular block of rows for the merge), then the chunk's gradient
 * J^T W r (nc) and cost. */
static void factor_compute(pass *ps, twf_lsq_ws *ws, size_t chunk, double *slot)
{
  size_t nc = ps->nc, ldb = ps->pr->max_chunk_rows, n, a, b, i;
  size_t pose0 = chunk * TWF_LSQ_CHUNK_POSES, pose1 = pose0 + TWF_LSQ_CHUNK_POSES, p0;
  double *Rc = ws->X; /* nc x nc, free during the factor pass */
  double *g = slot + nc * nc, *cost = g + nc;
  if (pose1 > ps->pr->c->n_poses)
    pose1 = ps->pr->c->n_poses;
  memset(Rc, 0, nc * nc * sizeof *Rc);
  memset(g, 0, (nc + 1) * sizeof *g);
  for (p0 = pose0; p0 < pose1; p0 += FACTOR_BLOCK_POSES) {
    n = factor_rows(ps, ws, p0, p0 + FACTOR_BLOCK_POSES < pose1 ? p0 + FACTOR_BLOCK_POSES : pose1, ws->B, ldb,
                    ws->rb);
    if (n == 0)
      continue;
    /* the gradient and the cost from the rows before the reflections
     * overwrite them: the fit's first normal matrix is R^T R at this
     * point, and these (twf_lsq_factor) */
    for (a = 0; a < nc; a++) {
      const double *col = ws->B + a * ldb;
      double s = 0.0;
      for (i = 0; i < n; i++)
        s += col[i] * ws->rb[i];
      g[a] += s;
    }
    for (i = 0; i < n; i++)
      *cost += 0.5 * ws->rb[i] * ws->rb[i];
    /* the block's columns are ldb apart: compact them to n rows */
    if (n < ldb)
      for (a = 1; a < nc; a++)
        memmove(ws->B + a * n, ws->B + a * ldb, n * sizeof *ws->B);
    twf_ident_qr_add_block(Rc, nc, ws->B, n, 0);
  }
  for (a = 0; a < nc; a++)
    for (b = 0; b < nc; b++)
      slot[b * nc + a] = Rc[a * nc + b];
}

static void factor_reduce(pass *ps, size_t chunk, double *slot)
{
  size_t nc = ps->nc, a;
  double *g = ps->acc + nc * nc;
  (void)chunk;
  twf_ident_qr_add_block(ps->acc, nc, slot, nc, 1);
  for (a = 0; a <= nc; a++)
    g[a] += slot[nc * nc + a]; /* the gradient, then the cost */
}

/* ------------------------------------------------------------ the cost */

/* The cost only (no Jacobian), at model m and base B: the same rows, the
 * same order and the same residuals (twf_meas_residual) as the normal
 * pass's chunks, so that a trial's cost compares with the linearisation's. */
static void cost_compute(pass *ps, twf_lsq_ws *ws, size_t chunk, double *slot)
{
  const twf_lsq_problem *pr = ps->pr;
  const twf_campaign *c = pr->c;
  const twf_model *m = ps->m;
  size_t pose0 = chunk * TWF_LSQ_CHUNK_POSES, pose1 = pose0 + TWF_LSQ_CHUNK_POSES, pose, t;
  double cost = 0.0;
  if (pose1 > c->n_poses)
    pose1 = c->n_poses;
  for (pose = pose0; pose < pose1; pose++) {
    twf_pose F, T;
    int done = 0;
    for (t = pr->pose_start[pose]; t < pr->pose_start[pose + 1]; t++) {
      size_t i = pr->pose_meas[t];
      const twf_measurement *ms = &c->meas[i];
      double r[3], v[3], w;
      if (!twf_lsq_active(pr, i))
        continue;
      if (!done) {
        if (ps->flanges != NULL)
          F = ps->flanges[pose];
        else
          twf_model_fk_load(m, c->q + pose * pr->n_joints, twf_campaign_payload(c, pose), ws->prefix,
                            &F);
        twf_pose_mul(&ps->B[twf_campaign_pose_station(c, pose)], &F, &T);
        done = 1;
      }
      w = pr->weight[i] * pr->inv_sigma[i] * pr->inv_sigma[i];
      if (twf_meas_residual(&T, m->targets[ms->target].offset, ms, twf_campaign_meas_quat(c, i), r, v)) {
        cost += 0.5 * w * (r[0] * r[0] + r[1] * r[1] + r[2] * r[2]);
        w = pr->weight[i] * pr->inv_sigma_rot * pr->inv_sigma_rot;
        cost += 0.5 * w * twf_v3_dot(v, v);
      } else {
        cost += 0.5 * w * (r[0] * r[0] + r[1] * r[1] + r[2] * r[2]);
      }
    }
  }
  slot[0] = cost;
}

static double cost_at(twf_lsq_problem *pr, const twf_model *m, const twf_pose *B)
{
  pass ps;
  double acc = 0.0;
  memset(&ps, 0, sizeof ps);
  ps.pr = pr;
  ps.m = m;
  ps.B = B;
  ps.slot_size = 1;
  ps.n_chunks = pass_chunks(pr);
  ps.flanges = pass_flanges(pr, m);
  ps.compute = cost_compute;
  ps.reduce = sum_reduce;
  ps.acc = &acc;
  pass_run(&ps);
  return acc;
}

/* ------------------------------------------------------------ entry points */

/* The normal matrix A = J^T W J (nc x nc) and gradient g = J^T W r (nc)
 * over the columns cols[0..nc) (NULL: all p), and the cost. Restricting to
 * the kept columns in the solver saves the updates of the fixed ones. */
/* 1 when the last normal matrix was made at this model and base over
 * columns that include these (its weights may have changed since:
 * twf_lsq_normal): the covariance asks again for the one the solver ended
 * on, and the fit's first is part of the factor pass's. */
static int cache_at_point(const twf_lsq_problem *pr, const size_t *cols, size_t nc)
{
  const twf_model *a = pr->m, *b = pr->snap;
  size_t k;
  if (!pr->cache_valid)
    return 0;
  for (k = 0; k < nc; k++)
    if (pr->cache_pos[cols ? cols[k] : k] == SIZE_MAX)
      return 0;
  return memcmp(pr->base, pr->cache_base, sizeof pr->base) == 0 &&
         memcmp(a->joints, b->joints, a->n_joints * sizeof *a->joints) == 0 &&
         memcmp(a->targets, b->targets, a->n_targets * sizeof *a->targets) == 0 &&
         memcmp(&a->home, &b->home, sizeof a->home) == 0;
}

/* Accumulate dw (the weight times 1/sigma^2) times the k rows (k x p,
 * row-major) over the cache's columns into the cached A and g, and the
 * residual r (k) into the cost. */
static double cache_add_rows(twf_lsq_problem *pr, const double *rows, size_t k, const double *r, double dw)
{
  size_t n = pr->cache_nc, p = pr->p, a, b, e;
  double sq = 0.0;
  for (a = 0; a < n; a++) {
    size_t ca = pr->cache_cols[a];
    double ga = 0.0;
    for (e = 0; e < k; e++)
      ga += rows[e * p + ca] * r[e];
    pr->cacheg[a] += dw * ga;
    for (b = a; b < n; b++) {
      size_t cb = pr->cache_cols[b];
      double s = 0.0;
      for (e = 0; e < k; e++)
        s += rows[e * p + ca] * rows[e * p + cb];
      pr->cacheA[a * n + b] += dw * s;
      if (b != a)
        pr->cacheA[b * n + a] = pr->cacheA[a * n + b];
    }
  }
  for (e = 0; e < k; e++)
    sq += r[e] * r[e];
  pr->cache_cost += 0.5 * dw * sq;
  return fabs(0.5 * dw * sq);
}

/* The cached normal matrix, made at the working model with the weights
 * before the logged changes, brought to the current weights: each changed
 * row's contribution changes with its weight (the rows as
 * twf_errmodel_point and twf_errmodel_orientation form them). The same
 * sums as a full pass up to rounding, at the cost of the changed rows: a
 * screen that drops a few gross errors refits from here. Where the rows
 * taken out carried most of the cost (gross errors of a thousand sigmas),
 * their subtraction would leave the rest with too few digits for the
 * solver's tests on the cost: the cost is then summed afresh. */
static void cache_reweight(twf_lsq_problem *pr)
{
  const twf_campaign *c = pr->c;
  twf_errmodel *em = pr->em;
  double *rows = pr->rows; /* 6 x p, the problem's scratch */
  double changed_cost = 0.0;
  size_t k;
  for (k = 0; k < pr->wlog_n; k++) {
    size_t i = pr->wlog[k].meas, pose = c->meas[i].pose, sta = twf_campaign_pose_station(c, pose);
    const twf_measurement *ms = &c->meas[i];
    double y[3], r[3], dw;
    twf_pose F;
    if (!pr->use[i] || pr->wlog[k].change == 0.0)
      continue;
    twf_errmodel_set_payload(em, twf_campaign_payload(c, pose));
    twf_errmodel_eval_station(em, pr->m, &pr->base[sta], sta, c->q + pose * pr->n_joints, &F);
    twf_errmodel_point(em, pr->m, ms->target, y, rows);
    r[0] = ms->pos[0] - y[0];
    r[1] = ms->pos[1] - y[1];
    r[2] = ms->pos[2] - y[2];
    dw = pr->wlog[k].change * pr->inv_sigma[i] * pr->inv_sigma[i];
    changed_cost += cache_add_rows(pr, rows, 3, r, dw);
    if (ms->has_orientation) {
      double Rm[3][3];
      twf_quat_to_rot(twf_campaign_meas_quat(c, i), Rm);
      twf_errmodel_orientation(em, Rm, r, rows);
      dw = pr->wlog[k].change * pr->inv_sigma_rot * pr->inv_sigma_rot;
      changed_cost += cache_add_rows(pr, rows, 3, r, dw);
    }
  }
  if (!(changed_cost <= 1e3 * pr->cache_cost))
    pr->cache_cost = cost_at(pr, pr->m, pr->base);
}

/* The cache now holds A, g and the cost at the working model and base
 * with the current weights. */
static void cache_settle(twf_lsq_problem *pr)
{
  pr->cache_valid = 1;
  memcpy(pr->cache_base, pr->base, sizeof pr->base);
  pr->cache_weight_gen = pr->weight_gen;
  twf_lsq_model_assign(pr->snap, pr->m);
  pr->wlog_n = 0;
  pr->wlog_full = 0;
}

/* The same, over the columns cols[0..n) (NULL: 0 .. n - 1). */
static void cache_mark(twf_lsq_problem *pr, const size_t *cols, size_t n)
{
  size_t k;
  pr->cache_nc = n;
  for (k = 0; k < pr->p; k++)
    pr->cache_pos[k] = SIZE_MAX;
  for (k = 0; k < n; k++) {
    pr->cache_cols[k] = cols ? cols[k] : k;
    pr->cache_pos[pr->cache_cols[k]] = k;
  }
  cache_settle(pr);
}

/* Put a normal matrix made at the working model with the current weights
 * (the solver's, after a rejected trial took the cache's place). */
static void cache_store(twf_lsq_problem *pr, const size_t *cols, size_t n, const double *A, const double *g,
                        double cost)
{
  memcpy(pr->cacheA, A, n * n * sizeof *A);
  memcpy(pr->cacheg, g, n * sizeof *g);
  pr->cache_cost = cost;
  cache_mark(pr, cols, n);
}

double twf_lsq_normal(twf_lsq_problem *pr, const size_t *cols, size_t nc, double *A, double *g)
{
  size_t n = cols ? nc : pr->p, N, a, b;
  int same;
  if (!cache_at_point(pr, cols, n) || (pr->cache_weight_gen != pr->weight_gen && pr->wlog_full)) {
    pr->cache_cost = normal_pass(pr, cols, n, pr->cacheA, pr->cacheg);
    cache_mark(pr, cols, n);
  } else if (pr->cache_weight_gen != pr->weight_gen) {
    cache_reweight(pr);
    cache_settle(pr);
  }
  /* these columns out of the cache's (the same ones: a copy) */
  N = pr->cache_nc;
  for (a = 0, same = N == n; a < n && same; a++)
    same = pr->cache_cols[a] == (cols ? cols[a] : a);
  if (same) {
    memcpy(A, pr->cacheA, n * n * sizeof *A);
    memcpy(g, pr->cacheg, n * sizeof *g);
    return pr->cache_cost;
  }
  for (a = 0; a < n; a++) {
    size_t ia = pr->cache_pos[cols ? cols[a] : a];
    g[a] = pr->cacheg[ia];
    for (b = 0; b < n; b++)
      A[a * n + b] = pr->cacheA[ia * N + pr->cache_pos[cols ? cols[b] : b]];
  }
  return pr->cache_cost;
}

/* The triangular factor R of the weighted Jacobian (R^T R = J^T W J) over
 * the columns cols[0..nc) (R is nc x nc): each chunk's rows are reduced
 * by Householder reflections to a factor of their own, and the chunks'
 * factors are merged in chunk order (a tall-skinny QR). Rows are then
 * signed so that the diagonal is not negative. */
void twf_lsq_factor(twf_lsq_problem *pr, const size_t *cols, size_t nc, double *R)
{
  pass ps;
  size_t a, b;
  memset(&ps, 0, sizeof ps);
  ps.pr = pr;
  pass_columns(&ps, cols, nc);
  ps.n_chunks = pass_chunks(pr);
  ps.flanges = pass_flanges(pr, pr->m);
  ps.compute = factor_compute;
  ps.reduce = factor_reduce;
  ps.slot_size = nc * nc + nc + 1;
  ps.acc = pr->acc; /* R, then the gradient and the cost */
  memset(ps.acc, 0, ps.slot_size * sizeof *ps.acc);
  pass_run(&ps);
  memcpy(R, ps.acc, nc * nc * sizeof *R);
  for (a = 0; a < nc; a++)
    if (R[a * nc + a] < 0.0)
      for (b = a; b < nc; b++)
        R[a * nc + b] = -R[a * nc + b];
  /* the normal matrix at this point is R^T R: the cache takes it with the
   * gradient and the cost, for the fit's first linearisation */
  for (a = 0; a < nc; a++)
    for (b = a; b < nc; b++) {
      double s = 0.0;
      size_t k;
      for (k = 0; k <= a; k++)
        s += R[k * nc + a] * R[k * nc + b];
      pr->cacheA[a * nc + b] = pr->cacheA[b * nc + a] = s;
    }
  memcpy(pr->cacheg, ps.acc + nc * nc, nc * sizeof *pr->cacheg);
  pr->cache_cost = ps.acc[nc * nc + nc];
  cache_mark(pr, cols, nc);
}

/* One thread's range of twf_lsq_residuals. */
typedef struct residual_range {
  const twf_model *m;
  const twf_pose *B;
  const double *t;
  const twf_campaign *c;
  size_t i0, i1;
  double *pos, *rot;
} residual_range;

static void *residual_worker(void *arg)
{
  const residual_range *r = arg;
  twf_accuracy_residuals_range(r->m, r->B, r->t, r->c, r->i0, r->i1, r->pos, r->rot);
  return NULL;
}

/* Fewer measurements than this per thread are not worth a thread. */
#define RESIDUALS_PER_THREAD_MIN 4096

twf_status twf_lsq_residuals(const twf_model *m, const twf_pose *B, const twf_campaign *c,
                             int n_threads, double *pos, double *rot, twf_error *err)
{
  /* the model's offsets given explicitly: a target still being fitted
   * (offset_known 0) has a current value too */
  double *t = malloc(3 * (m->n_targets ? m->n_targets : 1) * sizeof *t);
  size_t k, n = c->n_meas;
  twf_status st;
  residual_range part[TWF_LSQ_THREADS_MAX];
  pthread_t tid[TWF_LSQ_THREADS_MAX];
  int nt, started = 0, i;
  if (t == NULL)
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
  for (k = 0; k < m->n_targets; k++)
    twf_v3_copy(m->targets[k].offset, t + 3 * k);
  nt = n_threads < 1 ? 1 : n_threads > TWF_LSQ_THREADS_MAX ? TWF_LSQ_THREADS_MAX : n_threads;
  if ((size_t)nt > n / RESIDUALS_PER_THREAD_MIN)
    nt = n / RESIDUALS_PER_THREAD_MIN > 1 ? (int)(n / RESIDUALS_PER_THREAD_MIN) : 1;
  if (nt == 1) {
    st = twf_accuracy_residuals(m, B, t, c, pos, rot, err);
    free(t);
    return st;
  }
  st = twf_accuracy_residuals_check(m, B, t, c, pos, rot, err);
  if (st != TWF_OK) {
    free(t);
    return st;
  }
  for (i = 0; i < nt; i++) {
    part[i].m = m;
    part[i].B = B;
    part[i].t = t;
    part[i].c = c;
    part[i].i0 = n * (size_t)i / (size_t)nt;
    part[i].i1 = n * (size_t)(i + 1) / (size_t)nt;
    part[i].pos = pos;
    part[i].rot = rot;
  }
  for (i = 1; i < nt; i++) {
    if (pthread_create(&tid[i], NULL, residual_worker, &part[i]) != 0)
      break;
    started++;
  }
  residual_worker(&part[0]);
  /* a range whose thread could not start runs here */
  for (i = started + 1; i < nt; i++)
    residual_worker(&part[i]);
  for (i = 1; i <= started; i++)
    pthread_join(tid[i], NULL);
  free(t);
  return TWF_OK;
}

/* ------------------------------------------------------------ the solver */

/* The solver's state between iterations over the nk kept columns idx. */
typedef struct lm_state {
  twf_lsq_problem *pr;
  const twf_lsq_run *run;
  size_t nk, *idx;
  double *delta;       /* p: the trial step, zero outside the kept columns */
  gsl_matrix *M;
  gsl_vector *rhs, *x;
  double cost, lambda, nu;
  twf_pose trial_base[TWF_STATIONS_MAX];
  /* A trial after an accepted step is linearised at once: its normal
   * matrix gives its cost too, and an accepted trial needs it anyway (for
   * the next step, or for the stop test on it and the covariance), so the
   * cost pass is saved; trial_A, trial_g hold it. A rejected trial then
   * cost a normal pass (about six cost passes) instead of a cost pass, so
   * after a rejection trials take the cost alone until one is accepted.
   * The trials at the noise floor, where rejections by rounding were
   * common, are not made (lm_step_negligible). */
  int after_accept, linearised;
  double *trial_A, *trial_g;
  size_t rows;         /* weighted rows in the fit (3 a point, 6 a 6-D measurement) */
} lm_state;

/* Converged when every column is orthogonal to the weighted residual
 * (cosine below 1e-12): the gradient test, scale free. */
static int lm_gradient_vanished(const lm_state *s)
{
  const twf_lsq_problem *pr = s->pr;
  double grad_max = 0.0;
  size_t a, nk = s->nk;
  for (a = 0; a < nk; a++) {
    double ajj = pr->A[a * nk + a];
    double cosine = ajj > 0 && s->cost > 0 ? fabs(pr->g[a]) / sqrt(ajj * 2.0 * s->cost) : 0.0;
    if (cosine > grad_max)
      grad_max = cosine;
  }
  return grad_max < 1e-12;
}

/* Solve (A + lambda diag A) x = g by Cholesky (Marquardt's scaling);
 * nonzero when the damped system is not positive definite. */
static int lm_solve_damped(lm_state *s)
{
  const twf_lsq_problem *pr = s->pr;
  size_t a, b, nk = s->nk;
  for (a = 0; a < nk; a++) {
    for (b = 0; b < nk; b++)
      gsl_matrix_set(s->M, a, b, pr->A[a * nk + b]);
    *gsl_matrix_ptr(s->M, a, a) *= 1.0 + s->lambda;
    gsl_vector_set(s->rhs, a, pr->g[a]);
  }
  return gsl_linalg_cholesky_decomp1(s->M) != 0 || gsl_linalg_cholesky_solve(s->M, s->rhs, s->x) != 0;
}

/* Exchange the working model and base with the trial's. */
static void lm_swap(lm_state *s)
{
  twf_lsq_problem *pr = s->pr;
  twf_model *tmp = pr->m;
  twf_pose b[TWF_STATIONS_MAX];
  pr->m = pr->trial;
  pr->trial = tmp;
  memcpy(b, pr->base, sizeof b);
  memcpy(pr->base, s->trial_base, sizeof b);
  memcpy(s->trial_base, b, sizeof b);
}

/* The solved step into delta, with the largest scaled step and the
 * predicted decrease of the cost. */
static void lm_step(lm_state *s, double *step_max, double *pred)
{
  twf_lsq_problem *pr = s->pr;
  size_t a;
  *step_max = 0.0;
  *pred = 0.0;
  memset(s->delta, 0, pr->p * sizeof *s->delta);
  for (a = 0; a < s->nk; a++) {
    double d = gsl_vector_get(s->x, a);
    double sc = fabs(d) * twf_errmodel_param_scale(pr->em, s->idx[a]);
    s->delta[s->idx[a]] = d;
    if (sc > *step_max)
      *step_max = sc;
    *pred += d * (s->lambda * pr->A[a * s->nk + a] * d + pr->g[a]);
  }
  *pred *= 0.5;
}

/* Converged when the next step, undamped, would move the parameters by
 * less than LM_STEP_SIGMAS of their standard deviations: its predicted
 * decrease is 0.5 d^T A d (A = J^T W J) for small damping, and for any
 * parameter (or combination c of them) |c^T d| <= sqrt(c^T A^-1 c)
 * sqrt(d^T A d), so d^T A d < tau^2 s^2 bounds every change by tau of its
 * standard deviation, s^2 = 2 cost / (rows - columns) the a-posteriori
 * variance factor (so that a sigma given too large or too small does not
 * move the test). Such a step changes no figure a report shows; the
 * steps before it, near the noise floor, took a normal pass each. Only
 * after an accepted step at small damping, where the solved step is the
 * Gauss-Newton one. */
#define LM_STEP_SIGMAS 1e-2

static int lm_step_negligible(const lm_state *s, double pred)
{
  double dof = (double)s->rows - (double)s->nk;
  if (!s->after_accept || s->lambda > 1e-6 || dof < 1.0 || !(s->cost > 0.0))
    return 0;
  return pred >= 0.0 && pred < LM_STEP_SIGMAS * LM_STEP_SIGMAS * s->cost / dof;
}

/* Fold the step of lm_step into the trial model; returns the trial cost.
 * A linearised trial (s->linearised) is made the working model (lm_swap
 * undoes it) and its normal matrix is in trial_A, trial_g. */
static double lm_trial(lm_state *s)
{
  twf_lsq_problem *pr = s->pr;
  twf_lsq_model_assign(pr->trial, pr->m);
  memcpy(s->trial_base, pr->base, sizeof pr->base);
  twf_errmodel_fold(pr->em, s->delta, pr->trial, s->trial_base);
  s->linearised = s->after_accept;
  if (!s->linearised)
    return cost_at(pr, pr->trial, s->trial_base);
  lm_swap(s);
  return twf_lsq_normal(pr, s->idx, s->nk, s->trial_A, s->trial_g);
}

static void lm_record(const lm_state *s, int iteration, double cost, int accepted)
{
  twf_solver_step st;
  if (s->run->trace == NULL)
    return;
  st.fit = s->run->name;
  st.round = s->run->round;
  st.iteration = iteration;
  st.cost = cost;
  st.damping = s->lambda;
  st.accepted = accepted;
  twf_trace_step(s->run->trace, &st);
}

/* The loop (Nielsen 1999 for the damping): returns TWF_OK with rep->stop
 * set, or an error. */
static twf_status lm_iterate(lm_state *s, double *value, twf_solve_report *rep, twf_error *err)
{
  twf_lsq_problem *pr = s->pr;
  size_t a;
  while (rep->iterations < s->run->max_iterations) {
    double step_max, pred, cost_new, rho;
    if (lm_gradient_vanished(s)) {
      rep->stop = TWF_STOP_GRADIENT;
      return TWF_OK;
    }
    rep->iterations++;
    if (lm_solve_damped(s)) {
      lm_record(s, rep->iterations, NAN, 0);
      s->lambda *= s->nu;
      s->nu *= 2.0;
      if (s->lambda > 1e16) {
        rep->stop = TWF_STOP_SINGULAR;
        return twf_error_set(err, TWF_ERR_SINGULAR, NULL, 0, 0, twf_advice_text(TWF_ADVICE_FIX_MORE),
                             "the damped normal equations are singular");
      }
      continue;
    }
    lm_step(s, &step_max, &pred);
    if (lm_step_negligible(s, pred)) {
      rep->iterations--; /* no trial made */
      rep->stop = TWF_STOP_STEP;
      return TWF_OK;
    }
    cost_new = lm_trial(s);
    rho = pred > 0 ? (s->cost - cost_new) / pred : -1.0;
    if (isfinite(cost_new) && cost_new < s->cost) {
      double decrease = s->cost - cost_new;
      lm_record(s, rep->iterations, cost_new, 1);
      for (a = 0; a < pr->p; a++)
        value[a] += s->delta[a];
      if (s->linearised) {
        /* the trial is the working model already, linearised */
        memcpy(pr->A, s->trial_A, s->nk * s->nk * sizeof *pr->A);
        memcpy(pr->g, s->trial_g, s->nk * sizeof *pr->g);
        s->cost = cost_new;
      } else {
        lm_swap(s);
        s->cost = twf_lsq_normal(pr, s->idx, s->nk, pr->A, pr->g);
      }
      s->after_accept = 1;
      rep->cost_end = s->cost;
      s->lambda *= fmax(1.0 / 3.0, 1.0 - pow(2.0 * rho - 1.0, 3));
      s->nu = 2.0;
      if (step_max < s->run->step_tol_m) {
        rep->stop = TWF_STOP_STEP;
        return TWF_OK;
      }
      /* a decrease at the level of rounding in the cost: nothing left */
      if (decrease <= 1e-13 * (s->cost + decrease)) {
        rep->stop = TWF_STOP_COST;
        return TWF_OK;
      }
    } else {
      lm_record(s, rep->iterations, cost_new, 0);
      if (s->linearised) {
        /* back to the linearisation point, whose normal matrix the
         * solver holds: the cache takes it back for the covariance */
        lm_swap(s);
        cache_store(pr, s->idx, s->nk, pr->A, pr->g, s->cost);
      }
      s->after_accept = 0;
      twf_errmodel_update(pr->em, pr->m);
      if (!isfinite(cost_new) && s->lambda > 1e12) {
        rep->stop = TWF_STOP_DIVERGED;
        return twf_error_set(err, TWF_ERR_DIVERGED, NULL, 0, 0, "check units and the starting model",
                             "the solver diverged (non-finite cost)");
      }
      if (step_max < s->run->step_tol_m || s->nu > 1e12 || pred <= 1e-13 * s->cost) {
        /* no smaller step lowers the cost: the cost is at its rounding floor */
        rep->stop = TWF_STOP_COST;
        return TWF_OK;
      }
      s->lambda *= s->nu;
      s->nu *= 2.0;
    }
  }
  rep->stop = TWF_STOP_MAXITER;
  return twf_error_set(err, TWF_ERR_DIVERGED, NULL, 0, 0,
                       "raise the iteration limit or check the data for gross errors",
                       "the solver did not converge in %d iterations", s->run->max_iterations);
}

/* Levenberg-Marquardt over the kept columns with Marquardt's diagonal
 * scaling and Nielsen's (1999) damping update; every accepted step is
 * folded into the working model (a retraction), so the next linearisation
 * is exact. */
twf_status twf_lsq_solve(twf_lsq_problem *pr, const unsigned char *keep, const twf_lsq_run *run,
                         double *value, twf_solve_report *rep, twf_error *err)
{
  size_t p = pr->p, a;
  lm_state s;
  twf_status st = TWF_OK;

  memset(&s, 0, sizeof s);
  memset(rep, 0, sizeof *rep);
  s.pr = pr;
  s.run = run;
  s.idx = calloc(p ? p : 1, sizeof *s.idx);
  s.delta = calloc(p ? p : 1, sizeof *s.delta);
  /* start close to Gauss-Newton: with Marquardt's diagonal scaling a
   * damping of 1e-3 held back the weak directions (the normal matrix's
   * condition number is the square of the Jacobian's) and the fit crept on
   * linearly; a rejected step raises the damping quickly (Nielsen) */
  s.lambda = 1e-9;
  s.nu = 2.0;
  if (s.idx == NULL || s.delta == NULL)
    goto nomem;
  for (a = 0; a < p; a++)
    if (keep[a])
      s.idx[s.nk++] = a;
  for (a = 0; a < pr->c->n_meas; a++)
    if (twf_lsq_active(pr, a))
      s.rows += pr->c->meas[a].has_orientation ? 6 : 3;
  s.cost = twf_lsq_normal(pr, s.idx, s.nk, pr->A, pr->g);
  rep->cost_start = rep->cost_end = s.cost;
  if (!isfinite(s.cost)) {
    rep->stop = TWF_STOP_DIVERGED;
    st = twf_error_set(err, TWF_ERR_DIVERGED, NULL, 0, 0,
                       "check the inputs for values far out of range",
                       "the starting cost is not finite");
    goto done;
  }
  if (s.nk == 0) {
    rep->stop = TWF_STOP_STEP;
    goto done;
  }
  s.M = gsl_matrix_alloc(s.nk, s.nk);
  s.rhs = gsl_vector_alloc(s.nk);
  s.x = gsl_vector_alloc(s.nk);
  s.trial_A = malloc(s.nk * s.nk * sizeof *s.trial_A);
  s.trial_g = malloc(s.nk * sizeof *s.trial_g);
  s.after_accept = 1;
  if (s.M == NULL || s.rhs == NULL || s.x == NULL || s.trial_A == NULL || s.trial_g == NULL)
    goto nomem;
  st = lm_iterate(&s, value, rep, err);
  goto done;
nomem:
  st = twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
done:
  if (s.M) gsl_matrix_free(s.M);
  if (s.rhs) gsl_vector_free(s.rhs);
  if (s.x) gsl_vector_free(s.x);
  free(s.idx);
  free(s.delta);
  free(s.trial_A);
  free(s.trial_g);
  return st;
}

/* Scale A into length units: A_s = D A D. */
void twf_lsq_scale_normal(const twf_lsq_problem *pr, const double *A, double *As)
{
  size_t p = pr->p, a, b;
  for (a = 0; a < p; a++)
    for (b = 0; b < p; b++)
      As[a * p + b] = A[a * p + b] * twf_errmodel_column_scale(pr->em, a) *
                      twf_errmodel_column_scale(pr->em, b);
}


/* ------------------------------------------------------------ trace */

double twf_trace_now(void)
{
  struct timespec ts;
  if (clock_gettime(CLOCK_MONOTONIC, &ts) != 0)
    return 0.0;
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

void twf_trace_init(twf_trace *t)
{
  if (t != NULL)
    memset(t, 0, sizeof *t);
}

void twf_trace_clear(twf_trace *t)
{
  if (t == NULL)
    return;
  free(t->steps);
  memset(t, 0, sizeof *t);
}

void twf_trace_stage(twf_trace *t, const char *name, double t0)
{
  double dt;
  if (t == NULL || t->n_stages >= TWF_TRACE_STAGES_MAX)
    return;
  dt = twf_trace_now() - t0;
  t->stages[t->n_stages].name = name;
  t->stages[t->n_stages].seconds = dt > 0.0 ? dt : 0.0;
  t->n_stages++;
}

void twf_trace_step(twf_trace *t, const twf_solver_step *s)
{
  if (t == NULL)
    return;
  if (t->n_steps == t->capacity) {
    size_t cap = t->capacity ? 2 * t->capacity : 64;
    twf_solver_step *grown = realloc(t->steps, cap * sizeof *grown);
    if (grown == NULL)
      return;
    t->steps = grown;
    t->capacity = cap;
  }
  t->steps[t->n_steps++] = *s;
}
