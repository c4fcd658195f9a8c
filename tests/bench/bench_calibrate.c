/* bench_calibrate.c: speed and memory of a full calibration (registration,
 * redundancy walks, Levenberg-Marquardt, outlier screen, covariance) on
 * simulated campaigns of the 6-axis (tf6s) and 7-axis (tf7) sample arms,
 * 3 targets, noise 0.02 mm, 10 % of the poses held out. Not a test: `make
 * bench` runs it and prints the figures recorded in DEVELOPERS.md.
 *
 *   usage: bench_calibrate                     the table (N = 100 .. 100,000;
 *                                              1,000,000 too with BENCH_LARGE=1)
 *          bench_calibrate POSES [TARGETS [REPEATS [THREADS [ARM]]]]
 *                                              one case (ARM 6 or 7, default 7);
 *                                              BENCH_TRACE=1 adds the solver's steps
 *
 * Every case runs in a child process, so that its peak resident memory
 * (getrusage) is its own. Wall time is the best of the repeats, CPU time
 * (user + system) that of the same run. With BENCH_LARGE=1 the
 * 1,000,000-pose case also checks the memory bound of 512 MB and the exit
 * status says whether it held. */
#include "twistfit.h"
#include "../arms.h"

#include <gsl/gsl_errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#define MEMORY_BOUND_MB 512.0

static double now(void)
{
  struct timespec t;
  clock_gettime(CLOCK_MONOTONIC, &t);
  return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

static double cpu_now(void)
{
  struct timespec t;
  clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &t);
  return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

static double peak_mb(void)
{
  struct rusage ru;
  getrusage(RUSAGE_SELF, &ru);
  return (double)ru.ru_maxrss / 1024.0; /* kB on Linux */
}

typedef struct bench_case {
  test_arm arm;
  size_t poses, targets;
  int repeats, threads;
  int verbose;       /* 1: stages and the kinematics comparison */
} bench_case;

/* What a child reports to the table: wall seconds, and 0 for success. */
typedef struct bench_out {
  double wall, cpu, mb;
  int ok;
} bench_out;

static const char *arm_name(test_arm a) { return a == ARM_TF6S ? "tf6s" : "tf7"; }

/* Forward kinematics of every measurement against the residual-and-
 * Jacobian evaluation (twf_errmodel_eval_pose, then twf_errmodel_point
 * with rows for each target), over the same poses: best of 3 each. */
static void kinematics_ratio(const twf_model *m, const twf_pose *B, const twf_campaign *c)
{
  twf_errmodel *em = twf_errmodel_alloc(m, TWF_GROUPS_GEOMETRIC, NULL);
  size_t p = em ? twf_errmodel_n_params(em) : 0, n = c->n_poses < 20000 ? c->n_poses : 20000;
  double *rows = malloc(3 * (p ? p : 1) * sizeof *rows), best_fk = 1e300, best_j = 1e300, sink = 0.0;
  int rep;
  if (em == NULL || rows == NULL) {
    free(rows);
    twf_errmodel_free(em);
    return;
  }
  for (rep = 0; rep < 3; rep++) {
    double t0 = now();
    size_t i, k;
    for (i = 0; i < n; i++) {
      twf_pose F, T;
      twf_model_fk(m, c->q + i * c->n_joints, NULL, &F);
      twf_pose_mul(B, &F, &T);
      for (k = 0; k < m->n_targets; k++) {
        double y[3];
        twf_pose_apply(&T, m->targets[k].offset, y);
        sink += y[0];
      }
    }
    t0 = now() - t0;
    if (t0 < best_fk)
      best_fk = t0;
    t0 = now();
    for (i = 0; i < n; i++) {
      twf_errmodel_eval_pose(em, m, B, c->q + i * c->n_joints, NULL);
      for (k = 0; k < m->n_targets; k++) {
        double y[3];
        twf_errmodel_point(em, m, k, y, rows);
        sink += y[0] + rows[p];
      }
    }
    t0 = now() - t0;
    if (t0 < best_j)
      best_j = t0;
  }
  printf("    kinematics: forward %.3f us per pose, residual and Jacobian (%zu parameters) %.3f us, "
         "ratio %.2f%s\n",
         1e6 * best_fk / (double)n, p, 1e6 * best_j / (double)n, best_j / best_fk,
         sink == 12345.678 ? " " : "");
  free(rows);
  twf_errmodel_free(em);
}

/* Run one case in this process; prints its line. */
static int run_case(const bench_case *bc, bench_out *out)
{
  const twf_perturbation mag = { 1e-3, 0.5e-3, 2e-3, 1e-3, 0.0 };
  twf_model *nominal = test_arm_model(bc->arm), *truth = twf_model_copy(nominal);
  twf_simulate_options so = twf_simulate_default_options();
  twf_calib_options co = twf_calib_default_options();
  unsigned char sel[3] = { 1, 1, 1 };
  twf_calib_result *best_res = NULL;
  twf_campaign *c;
  twf_error err;
  twf_pose B;
  double best = 1e300, best_cpu = 0.0;
  size_t k;
  int r;

  twf_model_perturb(truth, &mag, 7);
  test_tracker_base(&B);
  for (k = bc->targets; k < 3; k++)
    sel[k] = 0;
  so.n_poses = bc->poses;
  so.sigma_m = 2e-5;
  so.seed = 8;
  so.targets = sel;
  so.check_fraction = 0.1;
  c = twf_simulate_campaign(truth, &B, &so, &err);
  if (c == NULL) {
    fprintf(stderr, "simulation failed: %s\n", err.message);
    return 1;
  }
  co.sigma_length = 2e-5;
  co.threads = bc->threads;
  for (r = 0; r < bc->repeats; r++) {
    twf_calib_result *res = NULL;
    double t0 = now(), c0 = cpu_now(), dt, dc;
    if (twf_calibrate(nominal, c, &co, &res, NULL, &err) != TWF_OK) {
      fprintf(stderr, "calibration failed: %s\n", err.message);
      return 1;
    }
    dt = now() - t0;
    dc = cpu_now() - c0;
    if (dt < best) {
      best = dt;
      best_cpu = dc;
      twf_calib_result_free(best_res);
      best_res = res;
    } else {
      twf_calib_result_free(res);
    }
  }
  out->wall = best;
  out->cpu = best_cpu;
  out->mb = peak_mb();
  out->ok = 1;
  {
    const twf_calib_result *res = best_res;
    double fit_s = 0.0;
    int its = res->solve.iterations;
    for (k = 0; k < res->trace.n_stages; k++)
      if (strcmp(res->trace.stages[k].name, "fit") == 0)
        fit_s = res->trace.stages[k].seconds;
    printf("  %-4s %8zu poses %8zu meas  threads %-2d  wall %8.3f s  cpu %8.3f s  its %2d+%d  "
           "%6.3f us/meas/it  peak %7.1f MB\n",
           arm_name(bc->arm), c->n_poses, c->n_meas, bc->threads ? bc->threads : 0, best, best_cpu, its,
           res->robust_rounds, its > 0 ? 1e6 * fit_s / ((double)res->n_fit_meas * its) : 0.0, out->mb);
    if (bc->verbose) {
      printf("    stages:");
      for (k = 0; k < res->trace.n_stages; k++)
        printf("%s %s %.3f", k ? "," : "", res->trace.stages[k].name, res->trace.stages[k].seconds);
      printf("\n    parameters: %zu requested, %zu estimated; stop %s; %zu outliers\n", res->n_params,
             res->n_kept, twf_stop_name(res->solve.stop), res->n_outliers);
      kinematics_ratio(nominal, &B, c);
      if (getenv("BENCH_TRACE") != NULL)
        for (k = 0; k < res->trace.n_steps; k++) {
          const twf_solver_step *st = &res->trace.steps[k];
          printf("    step: %s round %d trial %d cost %.17g damping %.3g %s\n", st->fit, st->round, st->iteration,
                 st->cost, st->damping, st->accepted ? "accepted" : "rejected");
        }
    }
  }
  twf_calib_result_free(best_res);
  twf_campaign_free(c);
  twf_model_free(nominal);
  twf_model_free(truth);
  fflush(stdout);
  return 0;
}

/* Run a case in a child process (its own peak memory); the child writes
 * its figures through a pipe. */
static int run_child(const bench_case *bc, bench_out *out)
{
  int fd[2], status;
  pid_t pid;
  memset(out, 0, sizeof *out);
  fflush(stdout);
  if (pipe(fd) != 0)
    return -1;
  pid = fork();
  if (pid < 0)
    return -1;
  if (pid == 0) {
    bench_out o;
    int rc;
    close(fd[0]);
    memset(&o, 0, sizeof o);
    rc = run_case(bc, &o);
    if (write(fd[1], &o, sizeof o) != (ssize_t)sizeof o)
      rc = 1;
    close(fd[1]);
    _exit(rc);
  }
  close(fd[1]);
  if (read(fd[0], out, sizeof *out) != (ssize_t)sizeof *out)
    out->ok = 0;
  close(fd[0]);
  if (waitpid(pid, &status, 0) < 0 || !WIFEXITED(status) || WEXITSTATUS(status) != 0)
    out->ok = 0;
  return out->ok ? 0 : -1;
}

/* The bootstrap: refits of a 100-pose 7-axis campaign on every core. */
static int bench_resample(size_t n_refits)
{
  const twf_perturbation mag = { 1e-3, 0.5e-3, 2e-3, 1e-3, 0.0 };
  twf_model *m = test_arm_model(ARM_TF7), *truth = twf_model_copy(m);
  twf_simulate_options so = twf_simulate_default_options();
  twf_calib_options co = twf_calib_default_options();
  twf_calib_result *base = NULL;
  twf_resample_result *r = NULL;
  twf_campaign *c;
  twf_error err;
  twf_pose B;
  double t0, c0;
  int rc = 1;
  twf_model_perturb(truth, &mag, 7);
  test_tracker_base(&B);
  so.n_poses = 100;
  so.sigma_m = 2e-5;
  so.seed = 8;
  so.check_fraction = 0.1;
  c = twf_simulate_campaign(truth, &B, &so, &err);
  co.sigma_length = 2e-5;
  if (c != NULL && twf_calibrate(m, c, &co, &base, NULL, &err) == TWF_OK) {
    t0 = now();
    c0 = cpu_now();
    if (twf_calibrate_resample(m, c, &co, base, n_refits, 1, &r, NULL, &err) == TWF_OK) {
      printf("resample: %zu refits of a 100-pose tf7 campaign on every core: wall %.2f s, cpu %.2f s "
             "(%zu refused)\n",
             n_refits, now() - t0, cpu_now() - c0, r->n_refits - r->n_ok);
      rc = 0;
    }
  }
  if (rc != 0)
    printf("resample: failed: %s\n", err.message);
  twf_resample_result_free(r);
  twf_calib_result_free(base);
  twf_campaign_free(c);
  twf_model_free(truth);
  twf_model_free(m);
  return rc;
}

/* Least-squares slope of log(wall) against log(N). */
static double exponent(const double *n, const double *t, int k)
{
  double sx = 0, sy = 0, sxx = 0, sxy = 0;
  int i;
  for (i = 0; i < k; i++) {
    double x = log(n[i]), y = log(t[i]);
    sx += x; sy += y; sxx += x * x; sxy += x * y;
  }
  return (k * sxy - sx * sy) / (k * sxx - sx * sx);
}

int main(int argc, char **argv)
{
  static const size_t sizes[] = { 100, 1000, 10000, 100000, 1000000 };
  const test_arm arms[2] = { ARM_TF6S, ARM_TF7 };
  int large = getenv("BENCH_LARGE") != NULL && strcmp(getenv("BENCH_LARGE"), "1") == 0;
  int n_sizes = large ? 5 : 4, a, s, status = 0;
  long cores = sysconf(_SC_NPROCESSORS_ONLN);
  double load[3] = { 0, 0, 0 };

  gsl_set_error_handler_off();
  if (argc > 1) {
    bench_case bc;
    bench_out o;
    bc.poses = strtoul(argv[1], NULL, 10);
    bc.targets = argc > 2 ? strtoul(argv[2], NULL, 10) : 3;
    bc.repeats = argc > 3 ? atoi(argv[3]) : 3;
    bc.threads = argc > 4 ? atoi(argv[4]) : 1;
    bc.arm = argc > 5 && atoi(argv[5]) == 6 ? ARM_TF6S : ARM_TF7;
    bc.verbose = 1;
    if (bc.targets < 1 || bc.targets > 3 || bc.repeats < 1 || bc.threads < 0) {
      fprintf(stderr, "usage: bench_calibrate [POSES [TARGETS(1-3) [REPEATS [THREADS [ARM(6|7)]]]]]\n");
      return 2;
    }
    return run_case(&bc, &o);
  }
  {
    FILE *f = fopen("/proc/loadavg", "r"); /* Linux; NaN elsewhere */
    if (f == NULL || fscanf(f, "%lf %lf %lf", &load[0], &load[1], &load[2]) != 3)
      load[0] = NAN;
    if (f != NULL)
      fclose(f);
  }
  printf("twistfit %s benchmark: %ld online cores, load average %.2f at start; "
         "wall = best of the repeats, cpu = user + system of that run\n",
         twf_version(), cores, load[0]);
  for (a = 0; a < 2; a++) {
    double ns[5], ts[5];
    int k = 0;
    printf("%s, 3 targets, one thread:\n", arm_name(arms[a]));
    for (s = 0; s < n_sizes; s++) {
      bench_case bc;
      bench_out o;
      bc.arm = arms[a];
      bc.poses = sizes[s];
      bc.targets = 3;
      bc.repeats = sizes[s] <= 1000 ? 5 : sizes[s] <= 10000 ? 3 : 1;
      bc.threads = 1;
      bc.verbose = sizes[s] == 10000;
      if (run_child(&bc, &o) != 0) {
        printf("  %s %zu poses: failed\n", arm_name(arms[a]), sizes[s]);
        status = 1;
        continue;
      }
      if (sizes[s] >= 1000) {
        ns[k] = (double)sizes[s];
        ts[k++] = o.wall;
      }
      if (sizes[s] == 1000000) {
        int held = o.mb < MEMORY_BOUND_MB;
        printf("  memory bound: peak %.1f MB for 1,000,000 poses, %s %.0f MB\n", o.mb,
               held ? "under" : "OVER", MEMORY_BOUND_MB);
        if (!held)
          status = 1;
      }
    }
    if (k >= 2)
      printf("  time ~ N^%.2f (least squares over N >= 1000)\n", exponent(ns, ts, k));
    if (cores > 1) {
      bench_case bc;
      bench_out o;
      bc.arm = arms[a];
      bc.poses = 100000;
      bc.targets = 3;
      bc.repeats = 1;
      bc.threads = 0;
      bc.verbose = 0;
      printf("%s, every core:\n", arm_name(arms[a]));
      if (run_child(&bc, &o) != 0)
        status = 1;
    }
  }
  if (bench_resample(1000) != 0)
    status = 1;
  return status;
}
