/* links.c: intrinsic link parameters of a model and the model -> DH /
 * modified DH conversion (DEVELOPERS.md, "The maths").
 *
 * The joint lines are taken at logged zero, where the data determine them
 * whichever redundant parameters a calibration fixed. Frames are built
 * link by link along them as in Denavit and Hartenberg 1955 (common
 * normals), or, where consecutive lines are nearly parallel and the common
 * normal's foot runs away, as in Hayati 1983 (the plane through the
 * previous origin perpendicular to the line cuts the next line; the tilt
 * between them is beta about the link's y axis, Veitschegger and Wu 1986).
 * Each frame is composed from the numbers just found rather than from the
 * lines, so that the table written is exactly the chain that was walked.
 *
 * Standard deviations are first order (chain rule) through the fold-in of
 * the error model: the Jacobian of the link values with respect to the
 * error parameters by central differences of twf_errmodel_fold, with the
 * forms and conventions held fixed. */
#include "internal.h"

#include <stdlib.h>

/* Exactly parallel lines (no common normal) and exactly perpendicular
 * ones (no cut point): only rounding separates these from zero, since
 * anything above is handled by the form choice. */
#define SIN_TINY 1e-12
/* Coincident lines: the next frame's x has no direction of its own. */
#define COINCIDENT_REL 1e-9

/* The choices a walk makes, kept fixed when differencing. */
typedef struct plan {
  twf_link_form form;
  int parallel;   /* plain DH on exactly parallel lines: the perpendicular through o */
  int coincident; /* no direction of its own for the next x */
  int flip;       /* DH: x along u2 x u1, so that a >= 0 */
} plan;

/* The lines at logged zero: directions, points, and the flange. */
typedef struct lines {
  size_t n;
  double (*u)[3];
  double (*p)[3];
  const twf_joint *joints;
  twf_pose flange;
  double reach;
} lines;

static const char *const why_text[] = {
  "determined",
  "not a parameter of this form",
  "absorbed by the base pose",
  "absorbed by the target offsets (points only)",
  "two revolute joints on one line: only the sum of their offsets is determined",
  "depends on where the prismatic joint's line is drawn (a convention)",
  "zero of a prismatic joint along a parallel line: trades off with the downstream geometry",
  "not fitted (no fitted parameter moves it)",
  "not determined by these poses (see the warnings)",
};

const char *twf_link_why_text(twf_link_why why)
{
  return (unsigned)why < sizeof why_text / sizeof why_text[0] ? why_text[why] : "?";
}

const char *twf_link_value_name(twf_link_value v)
{
  static const char *const names[TWF_LINK_NVALUES] = { "theta", "d", "a", "alpha", "beta" };
  return (unsigned)v < TWF_LINK_NVALUES ? names[v] : "?";
}

twf_links_options twf_links_default_options(void)
{
  twf_links_options o;
  o.full_pose = 0;
  o.use_beta = 1;
  o.reference = NULL;
  return o;
}

void twf_links_clear(twf_links *l)
{
  if (l == NULL)
    return;
  free(l->rows);
  l->rows = NULL;
  l->n_rows = l->n_joints = 0;
}

static void lines_free(lines *L)
{
  free(L->u);
  free(L->p);
}

static int lines_at_zero(const twf_model *m, lines *L)
{
  size_t n = m->n_joints;
  twf_pose *prefix = calloc(n + 1, sizeof *prefix);
  double *q = calloc(n ? n : 1, sizeof *q);
  L->n = n;
  L->u = calloc(n ? n : 1, sizeof *L->u);
  L->p = calloc(n ? n : 1, sizeof *L->p);
  L->joints = m->joints;
  L->reach = twf_model_reach(m);
  if (prefix == NULL || q == NULL || L->u == NULL || L->p == NULL) {
    free(prefix);
    free(q);
    lines_free(L);
    return -1;
  }
  /* q = 0: theta = offset, the configuration the report describes */
  twf_model_fk_rigid(m, q, prefix, &L->flange);
  for (size_t j = 0; j < n; j++) {
    const twf_joint *jt = &m->joints[j];
    const double *d = jt->type == TWF_JOINT_REVOLUTE ? jt->twist : jt->twist + 3;
    double nn;
    twf_pose_rotate(&prefix[j], d, L->u[j]);
    nn = twf_v3_norm(L->u[j]);
    for (int a = 0; a < 3; a++)
      L->u[j][a] /= nn;
    twf_pose_apply(&prefix[j], jt->point, L->p[j]);
  }
  free(prefix);
  free(q);
  return 0;
}

/* Line k+1 of the walk (k = 0..n): joint k's line, or the flange z-axis. */
static void next_line(const lines *L, size_t k, double u[3], double p[3])
{
  if (k < L->n) {
    twf_v3_copy(L->u[k], u);
    twf_v3_copy(L->p[k], p);
  } else {
    for (int a = 0; a < 3; a++) {
      u[a] = L->flange.R[a][2];
      p[a] = L->flange.p[a];
    }
  }
}

static void col(const twf_pose *T, int c, double v[3])
{
  v[0] = T->R[0][c];
  v[1] = T->R[1][c];
  v[2] = T->R[2][c];
}

static void post_elem(twf_pose *T, int axis, double angle)
{
  double w[3] = { 0, 0, 0 };
  twf_pose E;
  w[axis] = 1.0;
  twf_so3_exp(w, angle, E.R);
  E.p[0] = E.p[1] = E.p[2] = 0.0;
  twf_pose_mul(T, &E, T);
}

static void post_trans(twf_pose *T, int axis, double dist)
{
  for (int i = 0; i < 3; i++)
    T->p[i] += dist * T->R[i][axis];
}

/* T <- T Rz(theta) Tz(d) Tx(a) Rx(alpha) Ry(beta): one standard row. */
static void post_row(twf_pose *T, const double v[TWF_LINK_NVALUES])
{
  post_elem(T, 2, v[TWF_LINK_THETA]);
  post_trans(T, 2, v[TWF_LINK_D]);
  post_trans(T, 0, v[TWF_LINK_A]);
  post_elem(T, 0, v[TWF_LINK_ALPHA]);
  if (v[TWF_LINK_BETA] != 0.0)
    post_elem(T, 1, v[TWF_LINK_BETA]);
}

/* Conditioning gains of both forms for the link from line (o, u1) to line
 * (p, u2), p its reference point: the Frobenius norm of the derivative of
 * the frame-fixing positions (DH: feet t1 along line 1 and t2 along line 2;
 * Hayati: the cut point t along line 2) with respect to two unit shifts of
 * line 2 and two tilts about p scaled by the reach L (basis independent).
 * d0 is the plane's height along line 1 in Hayati's form. */
static void gains(const double o[3], const double u1[3], const double p[3],
                  const double u2[3], double d0, double L, double *g_dh,
                  double *g_beta)
{
  double w[3], cr[3], e[2][3], c = twf_v3_dot(u1, u2), s, A, B, D, t1, t2, Ab;
  double sdh = 0.0, sb = 0.0;
  int k, a;
  for (a = 0; a < 3; a++)
    w[a] = p[a] - o[a];
  twf_v3_cross(u1, u2, cr);
  s = twf_v3_norm(cr);
  /* an orthonormal pair perpendicular to u2 */
  {
    double ref[3] = { 1, 0, 0 }, dot, nn;
    if (fabs(u2[0]) > 0.6) {
      ref[0] = 0;
      ref[1] = 1;
    }
    dot = twf_v3_dot(ref, u2);
    for (a = 0; a < 3; a++)
      e[0][a] = ref[a] - dot * u2[a];
    nn = twf_v3_norm(e[0]);
    for (a = 0; a < 3; a++)
      e[0][a] /= nn;
    twf_v3_cross(u2, e[0], e[1]);
  }
  A = twf_v3_dot(w, u1);
  B = twf_v3_dot(w, u2);
  D = s * s;
  t1 = D > 0 ? (A - c * B) / D : 0.0;
  t2 = D > 0 ? (c * A - B) / D : 0.0;
  Ab = A - d0;
  for (k = 0; k < 2; k++) {
    double du[3], dc, dB, eu = twf_v3_dot(e[k], u1);
    /* shift along e_k */
    if (D > 0) {
      double dt1 = eu / D, dt2 = c * eu / D;
      sdh += dt1 * dt1 + dt2 * dt2;
    }
    if (c != 0.0) {
      double dt = -eu / c;
      sb += dt * dt;
    }
    /* tilt about e_k through p, per unit of (reach x angle) */
    twf_v3_cross(e[k], u2, du);
    for (a = 0; a < 3; a++)
      du[a] /= L;
    dc = twf_v3_dot(u1, du);
    dB = twf_v3_dot(w, du);
    if (D > 0) {
      double dt1 = (-dc * B - c * dB) / D + t1 * 2.0 * c * dc / D;
      double dt2 = (dc * A - dB) / D + t2 * 2.0 * c * dc / D;
      sdh += dt1 * dt1 + dt2 * dt2;
    }
    if (c != 0.0) {
      double dt = Ab * dc / (c * c);
      sb += dt * dt;
    }
  }
  *g_dh = s > SIN_TINY ? sqrt(sdh) : INFINITY;
  *g_beta = fabs(c) > SIN_TINY ? sqrt(sb) : INFINITY;
}

/* Hayati's plane height along line k for row k, from frame k-1's origin
 * o: a prismatic joint keeps its variable d (its raw offset at logged
 * zero); row 1 cuts at joint 1's reference point, a point the model
 * carries with its line, since frame 0's origin is wherever the base puts
 * it (its d is absorbed by the base anyway) and a run of parallel lines
 * from joint 1 would otherwise inherit that; anything else has none. */
static double beta_plane_d(const lines *L, size_t k, const double o[3], const double u1[3])
{
  if (k >= 1 && k <= L->n && L->joints[k - 1].type == TWF_JOINT_PRISMATIC)
    return L->joints[k - 1].offset;
  if (k == 1 && L->n > 0) {
    double w[3] = { L->p[0][0] - o[0], L->p[0][1] - o[1], L->p[0][2] - o[2] };
    return twf_v3_dot(w, u1);
  }
  return 0.0;
}

/* What the walk chooses of the conventions (choose_conv). */
enum {
  CONV_KEEP = 0,      /* all of pl's conventions as given */
  CONV_CHOOSE = 1,    /* parallel, coincident and the sign of each DH x */
  CONV_KEEP_SIGNS = 2 /* parallel and coincident, the signs of the x as given
                         (a reference's: a may then be negative) */
};

/* The walk. pl (n+1 entries) gives the forms and conventions; with
 * choose_form the forms are chosen here (by the gains when use_beta, else
 * plain DH), with choose_conv (CONV_*) whether lines are exactly parallel
 * or coincide and which way a DH x points; choices are written back into
 * pl. vals
 * receives (n+2) x 5 values; frames (may be NULL) n+1 poses: frame k after
 * row k; g (may be NULL) 2 (n+1) gains. */
static void walk(const lines *L, plan *pl, int choose_form, int choose_conv, int use_beta,
                 double (*vals)[TWF_LINK_NVALUES], twf_pose *frames, double *g)
{
  twf_pose T;
  size_t n = L->n;
  twf_pose_identity(&T);
  for (size_t k = 0; k <= n; k++) {
    double u1[3], xp[3], o[3], u2[3], p[3], w[3], cr[3], xn[3], yn[3];
    double c, s, a = 0.0, d = 0.0, v[TWF_LINK_NVALUES], gd, gb;
    int ax;
    col(&T, 2, u1);
    col(&T, 0, xp);
    twf_v3_copy(T.p, o);
    next_line(L, k, u2, p);
    for (ax = 0; ax < 3; ax++)
      w[ax] = p[ax] - o[ax];
    c = twf_v3_dot(u1, u2);
    twf_v3_cross(u1, u2, cr);
    s = twf_v3_norm(cr);
    gains(o, u1, p, u2, beta_plane_d(L, k, o, u1), L->reach, &gd, &gb);
    if (g != NULL) {
      g[2 * k] = gd;
      g[2 * k + 1] = gb;
    }
    if (choose_form)
      pl[k].form = use_beta && gb < gd ? TWF_LINK_FORM_BETA : TWF_LINK_FORM_DH;
    if (choose_conv)
      pl[k].parallel = pl[k].form == TWF_LINK_FORM_DH && !(s > SIN_TINY);

    if (pl[k].form == TWF_LINK_FORM_DH && !pl[k].parallel) {
      /* common normal, d its foot on line 1: x from line 1 to line 2 (a >= 0)
       * where they are apart, else along u1 x u2 (alpha in (0, pi)); the
       * sign is kept in the plan, so the values stay smooth when
       * differenced */
      for (ax = 0; ax < 3; ax++)
        xn[ax] = cr[ax] / s;
      d = (twf_v3_dot(w, u1) - c * twf_v3_dot(w, u2)) / (s * s);
      a = twf_v3_dot(w, xn);
      if (choose_conv != CONV_KEEP)
        pl[k].coincident = 0;
      if (choose_conv == CONV_CHOOSE)
        pl[k].flip = a < -COINCIDENT_REL * L->reach;
      if (pl[k].flip) {
        for (ax = 0; ax < 3; ax++)
          xn[ax] = -xn[ax];
        a = -a;
      }
    } else {
      /* Hayati's plane through o + d0 u1 perpendicular to line 1 (also
       * plain DH's convention for exactly parallel lines, with d0 = 0) */
      double d0 = pl[k].form == TWF_LINK_FORM_BETA ? beta_plane_d(L, k, o, u1) : 0.0;
      double t, P[3], vv[3], na;
      if (pl[k].form == TWF_LINK_FORM_BETA) {
        t = -(twf_v3_dot(w, u1) - d0) / c;
      } else {
        t = -twf_v3_dot(w, u2); /* foot of the perpendicular from o */
      }
      for (ax = 0; ax < 3; ax++) {
        P[ax] = p[ax] + t * u2[ax];
        vv[ax] = P[ax] - o[ax] - d0 * u1[ax];
      }
      na = twf_v3_norm(vv);
      if (choose_conv)
        pl[k].coincident = na < COINCIDENT_REL * L->reach;
      d = d0;
      if (!pl[k].coincident) {
        for (ax = 0; ax < 3; ax++)
          xn[ax] = vv[ax] / na;
        a = na;
      } else {
        /* no direction of its own: the upstream x, or for the last
         * revolute joint the flange x, which turns with it */
        double f[3], dot, nf;
        if (k == n && n > 0 && L->joints[n - 1].type == TWF_JOINT_REVOLUTE) {
          col(&L->flange, 0, f);
          if (fabs(twf_v3_dot(f, u1)) > 0.9)
            col(&L->flange, 1, f);
        } else {
          twf_v3_copy(xp, f);
        }
        dot = twf_v3_dot(f, u1);
        for (ax = 0; ax < 3; ax++)
          f[ax] -= dot * u1[ax];
        nf = twf_v3_norm(f);
        for (ax = 0; ax < 3; ax++)
          xn[ax] = f[ax] / nf;
        a = twf_v3_dot(vv, xn);
      }
    }
    {
      double xx[3];
      twf_v3_cross(xp, xn, xx);
      v[TWF_LINK_THETA] = atan2(twf_v3_dot(xx, u1), twf_v3_dot(xp, xn));
    }
    v[TWF_LINK_D] = d;
    v[TWF_LINK_A] = a;
    twf_v3_cross(u1, xn, yn);
    /* Rx(alpha) Ry(beta) e_z = (sin b, -sin a cos b, cos a cos b) in the
     * frame (xn, yn, u1); cos b > 0 */
    v[TWF_LINK_ALPHA] = atan2(-twf_v3_dot(u2, yn), twf_v3_dot(u2, u1));
    if (pl[k].form == TWF_LINK_FORM_BETA) {
      double sb = twf_v3_dot(u2, xn);
      v[TWF_LINK_BETA] = asin(sb > 1 ? 1 : sb < -1 ? -1 : sb);
    } else {
      v[TWF_LINK_BETA] = 0.0;
    }
    memcpy(vals[k], v, sizeof v);
    post_row(&T, v);
    if (frames != NULL)
      frames[k] = T;
  }
  /* the flange in frame n: a turn about and a distance along its z */
  {
    double xp[3], z[3], f[3], xx[3], dp[3];
    double *v = vals[n + 1];
    col(&T, 0, xp);
    col(&T, 2, z);
    col(&L->flange, 0, f);
    twf_v3_cross(xp, f, xx);
    for (int ax = 0; ax < 3; ax++)
      dp[ax] = L->flange.p[ax] - T.p[ax];
    v[TWF_LINK_THETA] = atan2(twf_v3_dot(xx, z), twf_v3_dot(xp, f));
    v[TWF_LINK_D] = twf_v3_dot(dp, z);
    v[TWF_LINK_A] = v[TWF_LINK_ALPHA] = v[TWF_LINK_BETA] = 0.0;
  }
}

static void set_why(twf_link_row *r, int v, twf_link_why why)
{
  if (r->why[v] == TWF_LINK_DETERMINED)
    r->why[v] = why;
}

/* Which values a calibration determines (see links.h). */
static void fill_why(twf_links *l, const twf_model *m)
{
  size_t n = l->n_joints, k;
  int v;
  for (k = 0; k < n + 2; k++) {
    twf_link_row *r = &l->rows[k];
    for (v = 0; v < TWF_LINK_NVALUES; v++)
      r->why[v] = TWF_LINK_DETERMINED;
    if (k == n + 1) {
      r->why[TWF_LINK_A] = r->why[TWF_LINK_ALPHA] = r->why[TWF_LINK_BETA] = TWF_LINK_NOT_IN_FORM;
    } else if (r->form == TWF_LINK_FORM_DH) {
      r->why[TWF_LINK_BETA] = TWF_LINK_NOT_IN_FORM;
    } else if (r->variable != TWF_LINK_D) {
      r->why[TWF_LINK_D] = TWF_LINK_NOT_IN_FORM;
    }
  }
  /* the base pose (6) moves frame 0 freely and turns and slides along line 1 */
  for (v = 0; v < TWF_LINK_NVALUES; v++)
    set_why(&l->rows[0], v, TWF_LINK_BY_BASE);
  if (n > 0) {
    set_why(&l->rows[1], TWF_LINK_THETA, TWF_LINK_BY_BASE);
    set_why(&l->rows[1], TWF_LINK_D, TWF_LINK_BY_BASE);
  }
  /* every link Hayati's (all lines parallel): the lines leave the
   * translation along them to the base, and the flange height with it */
  {
    int all_beta = 1;
    for (k = 1; k <= n; k++)
      all_beta &= l->rows[k].form == TWF_LINK_FORM_BETA;
    if (all_beta)
      set_why(&l->rows[n + 1], TWF_LINK_D, TWF_LINK_BY_BASE);
  }
  /* points only: the targets absorb the flange (home pose) */
  if (!l->full_pose && n > 0) {
    for (v = 0; v < TWF_LINK_NVALUES; v++)
      set_why(&l->rows[n], v, TWF_LINK_BY_TARGETS);
    set_why(&l->rows[n + 1], TWF_LINK_THETA, TWF_LINK_BY_TARGETS);
    set_why(&l->rows[n + 1], TWF_LINK_D, TWF_LINK_BY_TARGETS);
  } else if (!l->full_pose) {
    for (v = 0; v < TWF_LINK_NVALUES; v++)
      set_why(&l->rows[1], v, TWF_LINK_BY_TARGETS);
  }
  for (k = 1; k <= n; k++) {
    twf_link_row *r = &l->rows[k];
    if (m->joints[k - 1].type == TWF_JOINT_PRISMATIC) {
      size_t rr[3] = { k - 1, k, k + 1 };
      for (int i = 0; i < 3; i++) {
        twf_link_row *q = &l->rows[rr[i]];
        set_why(q, TWF_LINK_D, TWF_LINK_PRISMATIC_LINE);
        if (i < 2) {
          set_why(q, TWF_LINK_A, TWF_LINK_PRISMATIC_LINE);
          if (q->form == TWF_LINK_FORM_BETA) {
            set_why(q, TWF_LINK_ALPHA, TWF_LINK_PRISMATIC_LINE);
            set_why(q, TWF_LINK_BETA, TWF_LINK_PRISMATIC_LINE);
            set_why(q, TWF_LINK_THETA, TWF_LINK_PRISMATIC_LINE);
          }
        }
      }
      if (r->form == TWF_LINK_FORM_BETA)
        r->why[TWF_LINK_D] = TWF_LINK_PARALLEL_SLIDE;
    }
    if (k < n && r->coincident && m->joints[k - 1].type == TWF_JOINT_REVOLUTE &&
        m->joints[k].type == TWF_JOINT_REVOLUTE) {
      set_why(r, TWF_LINK_THETA, TWF_LINK_COINCIDENT);
      set_why(&l->rows[k + 1], TWF_LINK_THETA, TWF_LINK_COINCIDENT);
    }
  }
}

static twf_status check_model(const twf_model *m, twf_error *err)
{
  if (m == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "no model given");
  for (size_t j = 0; j < m->n_joints; j++) {
    const twf_joint *jt = &m->joints[j];
    const double *d = jt->type == TWF_JOINT_REVOLUTE ? jt->twist : jt->twist + 3;
    if (!(fabs(twf_v3_norm(d) - 1.0) < 1e-9) || !isfinite(jt->offset) ||
        !isfinite(jt->point[0] + jt->point[1] + jt->point[2]))
      return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0,
                           "joint directions are unit vectors and every value finite",
                           "joint %s has a direction that is not a unit vector "
                           "or a non-finite value", jt->name);
  }
  return TWF_OK;
}

/* A reference model of the same joints as m (checked). */
static twf_status check_same_joints(const twf_model *m, const twf_model *ref,
                                    twf_error *err)
{
  twf_status st;
  if ((st = check_model(ref, err)) != TWF_OK)
    return st;
  /* a reference of another arm is the user's data, not a bad call */
  if (ref->n_joints != m->n_joints)
    return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0,
                         "give a reference model of the same arm (e.g. its nominal)",
                         "the reference model has %zu joints, the model %zu",
                         ref->n_joints, m->n_joints);
  for (size_t k = 0; k < m->n_joints; k++)
    if (ref->joints[k].type != m->joints[k].type)
      return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0,
                           "give a reference model of the same arm (e.g. its nominal)",
                           "joint %zu is of another type in the reference model", k + 1);
  return TWF_OK;
}

static twf_status nomem(twf_error *err)
{
  return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
}

twf_status twf_links_compute(const twf_model *m, const twf_links_options *opt,
                             twf_links *out, twf_error *err)
{
  twf_links_options o = opt ? *opt : twf_links_default_options();
  lines L, LR;
  plan *pl = NULL;
  double (*vals)[TWF_LINK_NVALUES] = NULL, *g = NULL;
  size_t n, k;
  twf_status st;

  if (out == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "no result given");
  memset(out, 0, sizeof *out);
  if ((st = check_model(m, err)) != TWF_OK)
    return st;
  if (o.reference != NULL && (st = check_same_joints(m, o.reference, err)) != TWF_OK)
    return st;
  n = m->n_joints;
  if (lines_at_zero(m, &L) != 0)
    return nomem(err);
  pl = calloc(n + 1, sizeof *pl);
  vals = calloc(n + 2, sizeof *vals);
  g = calloc(2 * (n + 1), sizeof *g);
  out->rows = calloc(n + 2, sizeof *out->rows);
  if (pl == NULL || vals == NULL || g == NULL || out->rows == NULL) {
    st = nomem(err);
    goto done;
  }
  out->n_joints = n;
  out->n_rows = n + 2;
  out->full_pose = o.full_pose;
  out->reach = L.reach;

  if (o.reference != NULL) {
    /* the reference's lines choose the forms, so that both are told in one
     * convention; each model's own lines say whether they coincide */
    if (lines_at_zero(o.reference, &LR) != 0) {
      st = nomem(err);
      goto done;
    }
    LR.reach = L.reach; /* one tilt scale for both */
    walk(&LR, pl, 1, CONV_CHOOSE, o.use_beta, vals, NULL, NULL);
    for (k = 0; k < n + 2; k++)
      memcpy(out->rows[k].reference, vals[k], sizeof vals[k]);
    lines_free(&LR);
    /* m's own conventions (parallel, coincident) under those forms, the
     * reference's signs of x: a common normal that is 0 in the reference
     * (intersecting axes) keeps the reference's twist, so that a slightly
     * negative a shows rather than a half-turn in alpha and theta */
    walk(&L, pl, 0, CONV_KEEP_SIGNS, o.use_beta, vals, NULL, g);
  } else {
    walk(&L, pl, 1, CONV_CHOOSE, o.use_beta, vals, NULL, g);
    for (k = 0; k < n + 2; k++)
      for (int v = 0; v < TWF_LINK_NVALUES; v++)
        out->rows[k].reference[v] = NAN;
  }
  for (k = 0; k < n + 2; k++) {
    twf_link_row *r = &out->rows[k];
    memcpy(r->value, vals[k], sizeof vals[k]);
    for (int v = 0; v < TWF_LINK_NVALUES; v++)
      r->std[v] = NAN;
    r->form = k <= n ? pl[k].form : TWF_LINK_FORM_DH;
    r->coincident = k <= n ? pl[k].coincident : 0;
    r->parallel = k <= n ? pl[k].parallel : 0;
    r->flip_ = k <= n ? pl[k].flip : 0;
    r->variable = k >= 1 && k <= n
                      ? (m->joints[k - 1].type == TWF_JOINT_REVOLUTE ? TWF_LINK_THETA : TWF_LINK_D)
                      : -1;
    r->cond_dh = k <= n ? g[2 * k] : NAN;
    r->cond_beta = k <= n ? g[2 * k + 1] : NAN;
  }
  fill_why(out, m);
  st = TWF_OK;

done:
  lines_free(&L);
  free(pl);
  free(vals);
  free(g);
  if (st != TWF_OK)
    twf_links_clear(out);
  return st;
}

/* The values of m under l's forms and conventions. */
static int values_with_plan(const twf_model *m, const twf_links *l,
                            double (*vals)[TWF_LINK_NVALUES])
{
  lines L;
  plan *pl = calloc(l->n_joints + 1, sizeof *pl);
  if (pl == NULL || lines_at_zero(m, &L) != 0) {
    free(pl);
    return -1;
  }
  L.reach = l->reach;
  for (size_t k = 0; k <= l->n_joints; k++) {
    pl[k].form = l->rows[k].form;
    pl[k].coincident = l->rows[k].coincident;
    pl[k].parallel = l->rows[k].form == TWF_LINK_FORM_DH && l->rows[k].parallel;
    pl[k].flip = l->rows[k].flip_;
  }
  walk(&L, pl, 0, CONV_KEEP, 1, vals, NULL, NULL);
  lines_free(&L);
  free(pl);
  return 0;
}

static double wrap(double x)
{
  return atan2(sin(x), cos(x));
}

twf_status twf_links_jacobian(const twf_model *m, unsigned groups,
                              const twf_links *l, double rel_step, double *J,
                              twf_error *err)
{
  twf_errmodel *em;
  twf_model *mc = NULL;
  double *delta = NULL, (*vp)[TWF_LINK_NVALUES] = NULL, (*vm)[TWF_LINK_NVALUES] = NULL;
  size_t p, nr, j, r;
  twf_status st = TWF_OK;

  if (m == NULL || l == NULL || J == NULL || l->n_joints != m->n_joints)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0,
                         "compute the links of this model first",
                         "no model, links or Jacobian given, or they do not match");
  em = twf_errmodel_alloc(m, groups, err);
  if (em == NULL)
    return err ? err->status : TWF_ERR_INVALID;
  if (rel_step <= 0)
    rel_step = 1e-6;
  p = twf_errmodel_n_params(em);
  nr = l->n_rows;
  delta = calloc(p ? p : 1, sizeof *delta);
  vp = calloc(nr, sizeof *vp);
  vm = calloc(nr, sizeof *vm);
  if (delta == NULL || vp == NULL || vm == NULL) {
    st = nomem(err);
    goto done;
  }
  for (j = 0; j < p; j++) {
    /* the step moves the arm by rel_step metres at its reach */
    double h = rel_step / twf_errmodel_param_scale(em, j);
    for (int sgn = 0; sgn < 2; sgn++) {
      twf_pose B;
      twf_pose_identity(&B);
      twf_model_free(mc);
      mc = twf_model_copy(m);
      if (mc == NULL) {
        st = nomem(err);
        goto done;
      }
      /* the axis-error directions of m, not of the last copy folded */
      twf_errmodel_update(em, m);
      delta[j] = sgn == 0 ? h : -h;
      twf_errmodel_fold(em, delta, mc, &B);
      delta[j] = 0.0;
      if (values_with_plan(mc, l, sgn == 0 ? vp : vm) != 0) {
        st = nomem(err);
        goto done;
      }
    }
    for (r = 0; r < nr; r++)
      for (int v = 0; v < TWF_LINK_NVALUES; v++) {
        double dv = vp[r][v] - vm[r][v];
        if (v == TWF_LINK_THETA || v == TWF_LINK_ALPHA || v == TWF_LINK_BETA)
          dv = wrap(dv);
        J[((size_t)r * TWF_LINK_NVALUES + (size_t)v) * p + j] = dv / (2.0 * h);
      }
  }
done:
  twf_errmodel_free(em);
  twf_model_free(mc);
  free(delta);
  free(vp);
  free(vm);
  return st;
}

/* The variance of the value of Jacobian row Jr: Jr cov Jr^T. */
static double row_variance(const double *Jr, const double *cov, size_t p)
{
  double var = 0.0;
  size_t a, b;
  for (a = 0; a < p; a++) {
    double t = 0.0;
    if (Jr[a] == 0.0)
      continue;
    for (b = 0; b < p; b++)
      t += cov[a * p + b] * Jr[b];
    var += Jr[a] * t;
  }
  return var > 0 ? var : 0.0;
}

/* J of m's links, allocated ((n_rows * 5) x p); *p_out the parameter count. */
static twf_status links_jacobian_alloc(const twf_model *m, unsigned groups, const twf_links *l, double **J,
                                       size_t *p_out, twf_error *err)
{
  twf_errmodel *em = twf_errmodel_alloc(m, groups, err);
  size_t p;
  twf_status st;
  *J = NULL;
  if (em == NULL)
    return err ? err->status : TWF_ERR_INVALID;
  p = twf_errmodel_n_params(em);
  twf_errmodel_free(em);
  *J = calloc(l->n_rows * TWF_LINK_NVALUES * (p ? p : 1), sizeof **J);
  if (*J == NULL)
    return nomem(err);
  st = twf_links_jacobian(m, groups, l, 0.0, *J, err);
  if (st != TWF_OK) {
    free(*J);
    *J = NULL;
  }
  *p_out = p;
  return st;
}

twf_status twf_links_propagate(const twf_model *m, unsigned groups,
                               const double *cov, twf_links *l,
                               twf_error *err)
{
  double *J;
  size_t p, nv, r;
  twf_status st;
  if (cov == NULL || l == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "no covariance or links given");
  if ((st = links_jacobian_alloc(m, groups, l, &J, &p, err)) != TWF_OK)
    return st;
  nv = l->n_rows * TWF_LINK_NVALUES;
  for (r = 0; r < nv; r++) {
    twf_link_row *row = &l->rows[r / TWF_LINK_NVALUES];
    int v = (int)(r % TWF_LINK_NVALUES);
    if (row->why[v] == TWF_LINK_NOT_IN_FORM)
      row->std[v] = 0.0;
    else if (row->why[v] != TWF_LINK_DETERMINED)
      row->std[v] = NAN; /* the covariance says nothing about a free value */
    else
      row->std[v] = sqrt(row_variance(J + r * p, cov, p));
  }
  free(J);
  return TWF_OK;
}

/* Value change per metre of parameter motion at the reach, as metres
 * (lengths) or metres at the reach (angles), below which a parameter does
 * not move a value: central differences with 1e-6 m steps leave 1e-10. */
#define LINKS_MOVES_TOL 1e-6

twf_status twf_links_mark_fit(const twf_model *m, unsigned groups,
                              const double *cov,
                              const unsigned char *by_poses, twf_links *l,
                              twf_error *err)
{
  twf_errmodel *em;
  double *J, *pscale;
  size_t p, nv, r, a;
  twf_status st;
  if (cov == NULL || l == NULL || m == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "no model, covariance or links given");
  if ((st = links_jacobian_alloc(m, groups, l, &J, &p, err)) != TWF_OK)
    return st;
  em = twf_errmodel_alloc(m, groups, err);
  pscale = malloc((p ? p : 1) * sizeof *pscale);
  if (em == NULL || pscale == NULL) {
    twf_errmodel_free(em);
    free(J);
    free(pscale);
    return em == NULL ? (err ? err->status : TWF_ERR_INVALID) : nomem(err);
  }
  for (a = 0; a < p; a++)
    pscale[a] = twf_errmodel_param_scale(em, a); /* metres at the reach per unit */
  twf_errmodel_free(em);
  nv = l->n_rows * TWF_LINK_NVALUES;
  for (r = 0; r < nv; r++) {
    twf_link_row *row = &l->rows[r / TWF_LINK_NVALUES];
    int v = (int)(r % TWF_LINK_NVALUES);
    int angle = v == TWF_LINK_THETA || v == TWF_LINK_ALPHA || v == TWF_LINK_BETA;
    const double *Jr = J + r * p;
    int moved = 0, by_data = 0;
    if (row->why[v] == TWF_LINK_NOT_IN_FORM) {
      row->std[v] = 0.0;
      continue;
    }
    for (a = 0; a < p; a++) {
      double gain = fabs(Jr[a]) / pscale[a] * (angle ? l->reach : 1.0);
      if (!(gain > LINKS_MOVES_TOL))
        continue;
      moved = 1;
      if (by_poses != NULL && by_poses[a])
        by_data = 1;
    }
    if (row->why[v] == TWF_LINK_DETERMINED && by_data)
      row->why[v] = TWF_LINK_BY_POSES;
    else if (row->why[v] == TWF_LINK_DETERMINED && !moved)
      row->why[v] = TWF_LINK_NOT_FITTED;
    row->std[v] = row->why[v] == TWF_LINK_DETERMINED ? sqrt(row_variance(Jr, cov, p)) : NAN;
  }
  free(J);
  free(pscale);
  return TWF_OK;
}

/* ------------------------------------------------------------------ */

twf_status twf_model_to_dh(const twf_model *m, twf_dh_convention conv,
                           int use_beta, twf_dh_row *rows,
                           twf_pose *base_to_first, twf_pose *flange_in_last,
                           twf_error *err)
{
  return twf_model_to_dh_like(m, NULL, conv, use_beta, rows, base_to_first,
                              flange_in_last, err);
}

twf_status twf_model_to_dh_like(const twf_model *m, const twf_model *reference,
                                twf_dh_convention conv, int use_beta,
                                twf_dh_row *rows, twf_pose *base_to_first,
                                twf_pose *flange_in_last, twf_error *err)
{
  lines L;
  plan *pl;
  twf_pose *frames;
  double (*vals)[TWF_LINK_NVALUES];
  size_t n, i;
  twf_status st;

  if ((st = check_model(m, err)) != TWF_OK)
    return st;
  if ((m->n_joints > 0 && rows == NULL) || base_to_first == NULL || flange_in_last == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "no rows, base or flange pose to fill");
  if (conv != TWF_DH_STANDARD && conv != TWF_DH_MODIFIED)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "unknown DH convention %d", (int)conv);
  if (reference != NULL && (st = check_same_joints(m, reference, err)) != TWF_OK)
    return st;
  n = m->n_joints;
  if (lines_at_zero(m, &L) != 0)
    return nomem(err);
  pl = calloc(n + 1, sizeof *pl);
  frames = calloc(n + 1, sizeof *frames);
  vals = calloc(n + 2, sizeof *vals);
  if (pl == NULL || frames == NULL || vals == NULL) {
    st = nomem(err);
    goto done;
  }
  if (reference != NULL) {
    /* the reference's forms and signs of x (as twf_links_compute with a
     * reference), m's own parallel and coincident lines: the written
     * table then reads row by row against the reference's */
    lines LR;
    if (lines_at_zero(reference, &LR) != 0) {
      st = nomem(err);
      goto done;
    }
    LR.reach = L.reach;
    walk(&LR, pl, 1, CONV_CHOOSE, use_beta, vals, NULL, NULL);
    lines_free(&LR);
    walk(&L, pl, 0, CONV_KEEP_SIGNS, use_beta, vals, frames, NULL);
  } else {
    walk(&L, pl, 1, CONV_CHOOSE, use_beta, vals, frames, NULL);
  }
  {
    /* the flange in frame n exactly (its numbers are row n+1) */
    twf_pose inv, F;
    twf_pose_inv(&frames[n], &inv);
    twf_pose_mul(&inv, &L.flange, &F);
    if (conv == TWF_DH_STANDARD) {
      *base_to_first = frames[0];
      *flange_in_last = F;
    } else {
      /* regroup: Rz Tz of row 0 stays in the base; the last link's
       * Tx Rx Ry goes to the flange */
      double v0[TWF_LINK_NVALUES] = { vals[0][0], vals[0][1], 0, 0, 0 };
      double vn[TWF_LINK_NVALUES] = { 0, 0, vals[n][2], vals[n][3], vals[n][4] };
      twf_pose link;
      twf_pose_identity(base_to_first);
      post_row(base_to_first, v0);
      twf_pose_identity(&link);
      post_row(&link, vn);
      twf_pose_mul(&link, &F, flange_in_last);
    }
  }
  for (i = 0; i < n; i++) {
    twf_dh_row *r = &rows[i];
    const double *jv = vals[i + 1];                                  /* theta, d of joint i */
    const double *lv = conv == TWF_DH_STANDARD ? vals[i + 1] : vals[i]; /* the link */
    r->theta = jv[TWF_LINK_THETA];
    r->d = jv[TWF_LINK_D];
    r->a = lv[TWF_LINK_A];
    r->alpha = lv[TWF_LINK_ALPHA];
    r->beta = lv[TWF_LINK_BETA];
    r->type = m->joints[i].type;
  }
  st = TWF_OK;
done:
  lines_free(&L);
  free(pl);
  free(frames);
  free(vals);
  return st;
}

/* ------------------------------------------------------------------ */

twf_status twf_dh_residual(const twf_model *m, const twf_dh_row *rows,
                           twf_dh_convention conv,
                           const twf_pose *base_to_first,
                           const twf_pose *flange_in_last, size_t n_configs,
                           unsigned long long seed, twf_dh_fit *out,
                           twf_error *err)
{
  size_t n, c, i;
  double *q;
  unsigned long long state = seed;
  double s2p = 0.0, s2a = 0.0;
  twf_status st;

  if ((st = check_model(m, err)) != TWF_OK)
    return st;
  if (out == NULL || (m->n_joints > 0 && rows == NULL) || n_configs == 0)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL,
                         "no rows, result or configurations given");
  n = m->n_joints;
  q = calloc(n ? n : 1, sizeof *q);
  if (q == NULL)
    return nomem(err);
  memset(out, 0, sizeof *out);
  out->n_configs = n_configs;
  for (c = 0; c < n_configs; c++) {
    twf_pose T, Tm;
    double dp[3], e, ang;
    twf_simulate_joints(m, 0.0, &state, q);
    twf_model_fk_rigid(m, q, NULL, &Tm);
    if (base_to_first != NULL)
      T = *base_to_first;
    else
      twf_pose_identity(&T);
    for (i = 0; i < n; i++) {
      const twf_dh_row *r = &rows[i];
      double x = m->joints[i].scale * q[i];
      double th = r->theta + (r->type == TWF_JOINT_REVOLUTE ? x : 0.0);
      double d = r->d + (r->type == TWF_JOINT_PRISMATIC ? x : 0.0);
      if (conv == TWF_DH_STANDARD) {
        double v[TWF_LINK_NVALUES] = { th, d, r->a, r->alpha, r->beta };
        post_row(&T, v);
      } else {
        post_elem(&T, 0, r->alpha);
        post_trans(&T, 0, r->a);
        if (r->beta != 0.0)
          post_elem(&T, 1, r->beta);
        post_elem(&T, 2, th);
        post_trans(&T, 2, d);
      }
    }
    if (flange_in_last != NULL)
      twf_pose_mul(&T, flange_in_last, &T);
    for (i = 0; i < 3; i++)
      dp[i] = T.p[i] - Tm.p[i];
    e = twf_v3_norm(dp);
    ang = twf_rot_angle_between(T.R, Tm.R);
    s2p += e * e;
    s2a += ang * ang;
    if (e > out->max_position_m)
      out->max_position_m = e;
    if (ang > out->max_angle_rad)
      out->max_angle_rad = ang;
  }
  out->rms_position_m = sqrt(s2p / (double)n_configs);
  out->rms_angle_rad = sqrt(s2a / (double)n_configs);
  free(q);
  return TWF_OK;
}
