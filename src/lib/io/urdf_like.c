/* urdf_like.c: a model written into a copy of the user's URDF file. The
 * parsed document is edited in place with libxml2's tree API and written
 * back unformatted, so that everything not on the chain (links, visuals,
 * inertias, other joints, comments, whitespace) stays as the user wrote
 * it.
 *
 * The algebra is urdf_write.c's: with a frame E_k on each model axis and
 * P_k the product of the fixed joints' origins between the previous
 * moving link and joint k (kept as they are), joint k's new origin is
 * P_k^-1 E_(k-1)^-1 E_k exp(a_k offset_k). E_k is the user's link frame
 * at logged zero taken back through the model's offsets (so that a model
 * read from this very file gives back its frames), its origin moved to
 * the nearest point of the model's axis. */
#include "urdf_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

typedef struct like_ctx {
  const twf_model *m;
  urdf_tree t;
  urdf_chain c;
  twf_pose *frames;  /* E_k, n */
  twf_pose *fixed;   /* P_k, n */
  twf_pose *origins; /* n */
  double (*axes)[3]; /* n */
  size_t *moving;    /* URDF joint of model joint k */
  twf_pose tail;     /* product of the fixed joints after the last moving one */
  size_t n_tail;
  long last_fixed;   /* the last of them, -1 when none */
} like_ctx;

static twf_status nomem(twf_error *err)
{
  return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
}

static twf_status check_match(like_ctx *x, twf_error *err)
{
  const urdf_tree *t = &x->t;
  size_t k = 0;
  twf_status st;
  if (x->c.n_moving != x->m->n_joints)
    return twf_error_set(err, TWF_ERR_VALUE, t->path, 0, 0,
                         "choose the chain with the base and tip link options",
                         "the chain from link %s to link %s has %zu moving joints, the model %zu",
                         t->links[x->c.base].name, t->links[x->c.tip].name, x->c.n_moving,
                         x->m->n_joints);
  for (size_t i = 0; i < x->c.n; i++) {
    const urdf_joint *u = &t->joints[x->c.joints[i]];
    if ((st = twf_urdf_check_joint(t, x->c.joints[i], err)) != TWF_OK)
      return st;
    if (u->type == UJ_FIXED)
      continue;
    if ((u->type == UJ_PRISMATIC) != (x->m->joints[k].type == TWF_JOINT_PRISMATIC))
      return twf_error_set(err, TWF_ERR_VALUE, t->path, twf_urdf_line(u->node), 0,
                           "the file's chain must have the model's joint types in order",
                           "joint %s of the file is %s, model joint %s is %s", u->name,
                           u->type == UJ_PRISMATIC ? "prismatic" : "revolute",
                           x->m->joints[k].name,
                           x->m->joints[k].type == TWF_JOINT_PRISMATIC ? "prismatic"
                                                                       : "revolute");
    x->moving[k++] = x->c.joints[i];
  }
  return TWF_OK;
}

/* The file's link frames at zero and the fixed products between them;
 * E_k from them and the model. */
static twf_status walk(like_ctx *x, twf_error *err)
{
  twf_pose T, P, O, G, X;
  size_t k = 0;
  twf_status st;
  twf_pose_identity(&T);
  twf_pose_identity(&P);
  twf_pose_identity(&G);
  x->last_fixed = -1;
  x->n_tail = 0;
  for (size_t i = 0; i < x->c.n; i++) {
    size_t j = x->c.joints[i];
    if ((st = twf_urdf_joint_origin(&x->t, j, &O, err)) != TWF_OK)
      return st;
    twf_pose_mul(&T, &O, &T);
    if (x->t.joints[j].type == UJ_FIXED) {
      twf_pose_mul(&P, &O, &P);
      x->last_fixed = (long)j;
      x->n_tail++;
      continue;
    }
    const twf_joint *mj = &x->m->joints[k];
    x->fixed[k] = P;
    twf_pose_identity(&P);
    x->last_fixed = -1;
    x->n_tail = 0;
    /* G = exp(S_1 o_1) ... exp(S_k o_k): the model's link k at logged zero
     * is G E_k, which should be the file's link frame T. */
    twf_se3_exp(mj->twist, mj->offset, &X);
    twf_pose_mul(&G, &X, &G);
    twf_pose_inv(&G, &X);
    twf_pose_mul(&X, &T, &x->frames[k]);
    twf_urdf_axis_point(mj, x->frames[k].p, x->frames[k].p);
    k++;
  }
  x->tail = P;
  return TWF_OK;
}

/* The flange: through the last fixed joint before the tip when there is
 * one; else the tip is the last joint's own link, whose frame must then be
 * the flange, possible only when the flange lies on that joint's axis. */
static twf_status set_tail(like_ctx *x, const twf_pose *flange_in_last, twf_error *err)
{
  twf_pose before, inv, O;
  twf_status st;
  if (x->last_fixed < 0) {
    size_t n = x->m->n_joints;
    double on[3];
    twf_urdf_axis_point(&x->m->joints[n - 1], x->m->home.p, on);
    for (int r = 0; r < 3; r++)
      on[r] -= x->m->home.p[r];
    if (twf_v3_norm(on) > 1e-12)
      return twf_error_set(err, TWF_ERR_VALUE, x->t.path, 0, 0,
                           "add a flange link on a fixed joint to the last link, or give such "
                           "a link as the tip link",
                           "the tip link %s is the last joint's own link, and the model's flange "
                           "is %.3g m off that joint's axis: no fixed joint to carry it",
                           x->t.links[x->c.tip].name, twf_v3_norm(on));
    x->frames[n - 1] = x->m->home;
    twf_urdf_chain_origins(x->m, x->frames, x->origins, x->axes, &O);
    return TWF_OK;
  }
  /* tail = before * O_last, so O_last = before^-1 flange_in_last */
  if ((st = twf_urdf_joint_origin(&x->t, (size_t)x->last_fixed, &O, err)) != TWF_OK)
    return st;
  twf_pose_inv(&O, &inv);
  twf_pose_mul(&x->tail, &inv, &before);
  twf_pose_inv(&before, &inv);
  twf_pose_mul(&inv, flange_in_last, &O);
  return twf_urdf_set_origin(x->t.joints[x->last_fixed].node, &O, err);
}

static twf_status set_targets(like_ctx *x, twf_error *err)
{
  for (size_t k = 0; k < x->m->n_targets; k++) {
    const twf_target *tg = &x->m->targets[k];
    long i = tg->offset_known ? twf_urdf_link_index(&x->t, tg->name) : -1;
    const urdf_joint *u;
    twf_pose O;
    twf_status st;
    if (i < 0 || x->t.links[i].parent_joint < 0)
      continue;
    u = &x->t.joints[x->t.links[i].parent_joint];
    if (u->parent != x->c.tip || u->type != UJ_FIXED)
      continue;
    if ((st = twf_urdf_joint_origin(&x->t, (size_t)x->t.links[i].parent_joint, &O, err)) !=
        TWF_OK)
      return st;
    twf_v3_copy(tg->offset, O.p);
    if ((st = twf_urdf_set_origin(u->node, &O, err)) != TWF_OK)
      return st;
  }
  return TWF_OK;
}

static twf_status edit(like_ctx *x, twf_error *err)
{
  size_t n = x->m->n_joints;
  twf_pose flange, Pinv;
  twf_status st;
  if ((st = check_match(x, err)) != TWF_OK || (st = walk(x, err)) != TWF_OK)
    return st;
  twf_urdf_chain_origins(x->m, x->frames, x->origins, x->axes, &flange);
  if ((st = set_tail(x, &flange, err)) != TWF_OK)
    return st;
  for (size_t k = 0; k < n; k++) {
    twf_pose_inv(&x->fixed[k], &Pinv);
    twf_pose_mul(&Pinv, &x->origins[k], &x->origins[k]);
    if ((st = twf_urdf_set_origin(x->t.joints[x->moving[k]].node, &x->origins[k], err)) !=
            TWF_OK ||
        (st = twf_urdf_set_axis(x->t.joints[x->moving[k]].node, x->axes[k], err)) != TWF_OK)
      return st;
  }
  return set_targets(x, err);
}

twf_status twf_model_write_urdf_like(const twf_model *m, const char *like_path,
                                     const twf_urdf_read_options *ropt, FILE *out,
                                     twf_error *err)
{
  twf_io_c_locale loc;
  like_ctx x;
  twf_status st;
  size_t n;
  twf_error_clear(err);
  if (out == NULL || like_path == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "no output stream or file");
  if ((st = twf_urdf_check_model(m, err)) != TWF_OK)
    return st;
  memset(&x, 0, sizeof x);
  x.m = m;
  n = m->n_joints;
  x.frames = calloc(3 * n, sizeof *x.frames);
  x.axes = calloc(n, sizeof *x.axes);
  x.moving = calloc(n, sizeof *x.moving);
  if (x.frames == NULL || x.axes == NULL || x.moving == NULL) {
    st = nomem(err);
    goto done;
  }
  x.fixed = x.frames + n;
  x.origins = x.frames + 2 * n;
  if ((st = twf_io_c_locale_enter(&loc, err)) != TWF_OK)
    goto done;
  if ((st = twf_urdf_tree_read(like_path, ropt ? ropt->max_input_size : 0, &x.t, err)) ==
      TWF_OK) {
    if ((st = twf_urdf_chain_find(&x.t, ropt, &x.c, err)) == TWF_OK &&
        (st = edit(&x, err)) == TWF_OK)
      st = twf_urdf_doc_write(x.t.doc, out, 0, err);
    twf_urdf_chain_free(&x.c);
    twf_urdf_tree_free(&x.t);
  }
  twf_io_c_locale_leave(&loc);
done:
  free(x.frames);
  free(x.axes);
  free(x.moving);
  return st;
}
