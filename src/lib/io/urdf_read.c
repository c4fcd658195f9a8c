/* urdf_read.c: the chain of a URDF robot as a model. Each moving joint's
 * frame at zero is the product of the origins from the base link (fixed
 * joints merged on the way); its twist is that frame's axis through that
 * frame's origin in the base frame, the product of exponentials form of
 * URDF's L_k(q) = L_(k-1)(q) O_k exp(a_k q_k). */
#include "urdf_internal.h"

#include <stdlib.h>
#include <string.h>

twf_urdf_read_options twf_urdf_default_read_options(void)
{
  twf_urdf_read_options o;
  memset(&o, 0, sizeof o);
  o.max_input_size = TWF_INPUT_SIZE_DEFAULT;
  return o;
}

/* Chain joints twistfit cannot hold: say which element and where. */
twf_status twf_urdf_check_joint(const urdf_tree *t, size_t j, twf_error *err)
{
  const urdf_joint *u = &t->joints[j];
  xmlNodePtr mimic = twf_urdf_child(u->node, "mimic");
  if (u->type == UJ_FLOATING || u->type == UJ_PLANAR)
    return twf_error_set(err, TWF_ERR_VALUE, t->path, twf_urdf_line(u->node), 0,
                         "a model's joints are revolute, continuous or prismatic; choose a "
                         "chain without it (base and tip links)",
                         "joint %s is of type %s, which a serial-arm model cannot hold", u->name,
                         u->type == UJ_FLOATING ? "floating" : "planar");
  if (mimic != NULL)
    return twf_error_set(err, TWF_ERR_VALUE, t->path, twf_urdf_line(mimic), 0,
                         "a model's joints move independently; choose a chain without the "
                         "mimic joint or remove <mimic>",
                         "<mimic> in joint %s: joints coupled to others are not supported",
                         u->name);
  return TWF_OK;
}

static twf_status read_limits(const urdf_tree *t, size_t j, twf_joint *out, twf_error *err)
{
  const urdf_joint *u = &t->joints[j];
  xmlNodePtr l = twf_urdf_child(u->node, "limit");
  double lo = 0, hi = 0;
  twf_status st;
  out->has_limits = 0;
  /* continuous joints have no travel limits, whatever <limit> says */
  if (u->type == UJ_CONTINUOUS || l == NULL)
    return TWF_OK;
  if (xmlHasProp(l, BAD_CAST "lower") == NULL && xmlHasProp(l, BAD_CAST "upper") == NULL)
    return TWF_OK;
  if ((st = twf_urdf_number(t, l, "lower", &lo, err)) != TWF_OK ||
      (st = twf_urdf_number(t, l, "upper", &hi, err)) != TWF_OK)
    return st;
  if (lo > hi)
    return twf_error_set(err, TWF_ERR_VALUE, t->path, twf_urdf_line(l), 0,
                         "give lower <= upper", "joint %s has lower limit %.17g above upper %.17g",
                         u->name, lo, hi);
  out->has_limits = 1;
  out->limit_lo = lo;
  out->limit_hi = hi;
  return TWF_OK;
}

static twf_status name_copy(const urdf_tree *t, xmlNodePtr n, char *dst, size_t size,
                            const char *name, twf_error *err)
{
  if (twf_strlcpy(dst, name, size) != 0)
    return twf_error_set(err, TWF_ERR_VALUE, t->path, twf_urdf_line(n), 0, NULL,
                         "name '%s' longer than %zu bytes", name, size - 1);
  return TWF_OK;
}

/* Joint k of the model from URDF joint j, the chain's pose so far T (at
 * zero) multiplied by the joint's origin on the way. */
static twf_status moving_joint(const urdf_tree *t, size_t j, twf_pose *T, twf_joint *out,
                               twf_warnings *w, twf_error *err)
{
  const urdf_joint *u = &t->joints[j];
  double a[3], d[3];
  twf_status st;
  if ((st = twf_urdf_joint_axis(t, j, a, w, err)) != TWF_OK ||
      (st = name_copy(t, u->node, out->name, sizeof out->name, u->name, err)) != TWF_OK ||
      (st = read_limits(t, j, out, err)) != TWF_OK)
    return st;
  twf_pose_rotate(T, a, d);
  twf_v3_copy(T->p, out->point);
  out->scale = 1.0;
  out->offset = 0.0;
  if (u->type == UJ_PRISMATIC) {
    out->type = TWF_JOINT_PRISMATIC;
    twf_twist_prismatic(d, out->twist);
  } else {
    out->type = TWF_JOINT_REVOLUTE;
    twf_twist_revolute(d, T->p, out->twist);
  }
  return TWF_OK;
}

static int is_target(const twf_urdf_read_options *o, const urdf_tree *t, size_t link)
{
  if (o == NULL || o->target_links == NULL)
    return t->links[link].n_children == 0;
  for (size_t k = 0; k < o->n_target_links; k++)
    if (strcmp(o->target_links[k], t->links[link].name) == 0)
      return 1;
  return 0;
}

/* Targets: links on fixed joints to the tip. */
static twf_status read_targets(const urdf_tree *t, const urdf_chain *c,
                               const twf_urdf_read_options *o, twf_model *m, twf_error *err)
{
  size_t n = 0;
  twf_status st;
  for (size_t j = 0; j < t->n_joints; j++)
    n += t->joints[j].parent == c->tip && t->joints[j].type == UJ_FIXED &&
         is_target(o, t, t->joints[j].child);
  if (o != NULL && o->target_links != NULL && n != o->n_target_links) {
    for (size_t k = 0; k < o->n_target_links; k++) {
      long i = twf_urdf_link_index(t, o->target_links[k]);
      const urdf_joint *u = i >= 0 && t->links[i].parent_joint >= 0
                                ? &t->joints[t->links[i].parent_joint] : NULL;
      if (u == NULL || u->parent != c->tip || u->type != UJ_FIXED)
        return twf_error_set(err, TWF_ERR_UNKNOWN, t->path, 0, 0,
                             "targets are links on fixed joints to the tip link",
                             "target link '%s' is not fixed to the tip link %s",
                             o->target_links[k], t->links[c->tip].name);
    }
  }
  if (n == 0)
    return TWF_OK;
  m->targets = calloc(n, sizeof *m->targets);
  if (m->targets == NULL)
    return twf_error_set(err, TWF_ERR_NOMEM, t->path, 0, 0, NULL, "out of memory");
  for (size_t j = 0; j < t->n_joints; j++) {
    const urdf_joint *u = &t->joints[j];
    twf_pose O;
    twf_target *tg = &m->targets[m->n_targets];
    if (u->parent != c->tip || u->type != UJ_FIXED || !is_target(o, t, u->child))
      continue;
    if ((st = twf_urdf_joint_origin(t, j, &O, err)) != TWF_OK ||
        (st = name_copy(t, t->links[u->child].node, tg->name, sizeof tg->name,
                        t->links[u->child].name, err)) != TWF_OK)
      return st;
    twf_v3_copy(O.p, tg->offset);
    tg->offset_known = 1;
    m->n_targets++;
  }
  return TWF_OK;
}

static twf_model *build(const urdf_tree *t, const urdf_chain *c, const twf_urdf_read_options *o,
                        twf_warnings *w, twf_error *err)
{
  twf_model *m;
  twf_pose T, O;
  size_t k = 0;
  twf_status st = TWF_OK;
  const char *name = (const char *)xmlGetProp(t->robot, BAD_CAST "name");
  if (c->n_moving == 0) {
    twf_error_set(err, TWF_ERR_MISSING, t->path, 0, 0,
                  "choose base and tip links with revolute, continuous or prismatic joints "
                  "between them",
                  "no moving joint between links %s and %s", t->links[c->base].name,
                  t->links[c->tip].name);
    xmlFree((xmlChar *)name);
    return NULL;
  }
  m = twf_model_alloc(c->n_moving, 0);
  if (m == NULL) {
    twf_error_set(err, TWF_ERR_NOMEM, t->path, 0, 0, NULL, "out of memory");
    xmlFree((xmlChar *)name);
    return NULL;
  }
  if (name != NULL)
    twf_strlcpy(m->name, name, sizeof m->name);
  xmlFree((xmlChar *)name);
  twf_pose_identity(&T);
  for (size_t i = 0; st == TWF_OK && i < c->n; i++) {
    size_t j = c->joints[i];
    if ((st = twf_urdf_check_joint(t, j, err)) != TWF_OK ||
        (st = twf_urdf_joint_origin(t, j, &O, err)) != TWF_OK)
      break;
    twf_pose_mul(&T, &O, &T);
    if (t->joints[j].type != UJ_FIXED)
      st = moving_joint(t, j, &T, &m->joints[k++], w, err);
  }
  for (size_t a = 0; st == TWF_OK && a < m->n_joints; a++)
    for (size_t b = a + 1; b < m->n_joints; b++)
      if (strcmp(m->joints[a].name, m->joints[b].name) == 0)
        st = twf_error_set(err, TWF_ERR_DUPLICATE, t->path, 0, 0, NULL,
                           "two chain joints called %s", m->joints[a].name);
  if (st == TWF_OK) {
    m->home = T;
    st = read_targets(t, c, o, m, err);
  }
  if (st != TWF_OK) {
    twf_model_free(m);
    return NULL;
  }
  return m;
}

twf_model *twf_urdf_read_model(const char *path, const twf_urdf_read_options *opt,
                               twf_warnings *warnings, twf_input_digest *digest,
                               twf_error *err)
{
  urdf_tree t;
  urdf_chain c;
  twf_model *m = NULL;
  if (twf_urdf_tree_read(path, opt ? opt->max_input_size : 0, &t, err) == TWF_OK) {
    if (twf_urdf_chain_find(&t, opt, &c, err) == TWF_OK)
      m = build(&t, &c, opt, warnings, err);
    if (m != NULL && digest != NULL)
      *digest = t.digest;
    twf_urdf_chain_free(&c);
    twf_urdf_tree_free(&t);
  }
  return m;
}

twf_model *twf_model_read_urdf(const char *path, const twf_urdf_read_options *opt,
                               twf_warnings *warnings, twf_error *err)
{
  twf_io_c_locale loc;
  twf_model *m;
  twf_error_clear(err);
  if (path == NULL) {
    twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "no URDF file name given");
    return NULL;
  }
  if (twf_io_c_locale_enter(&loc, err) != TWF_OK)
    return NULL;
  m = twf_urdf_read_model(path, opt, warnings, NULL, err);
  twf_io_c_locale_leave(&loc);
  return m;
}
