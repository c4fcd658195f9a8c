/* urdf_write.c: a model as a URDF robot, and the chain algebra that
 * urdf_like.c shares.
 *
 * Why the origins reproduce the model: let E_k be a frame whose origin is
 * on joint k's axis (pose in the base frame at all-zero twist values) and
 * a_k the axis in it, so that Ad(E_k) (a_k, 0) = S_k (revolute; (0, a_k)
 * prismatic). URDF's link frames are L_k(q) = L_(k-1)(q) O_k exp(a_k q_k).
 * With O_k = E_(k-1)^-1 E_k exp(a_k offset_k) (E_(-1) = I) induction gives
 * L_k(q) = exp(S_1 theta_1) ... exp(S_k theta_k) E_k, theta = q + offset,
 * and the flange on a fixed joint E_(n-1)^-1 home gives twf_model_fk's
 * flange exactly. A scale s != 1 would need exp(a s q): URDF has no such
 * factor (<mimic> couples joints, not a joint to its own value). */
#include "urdf_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

void twf_urdf_axis_point(const twf_joint *j, const double x[3], double out[3])
{
  const double *w = j->twist, *v = j->twist + 3;
  double q0[3], d[3], t;
  if (j->type == TWF_JOINT_PRISMATIC) {
    twf_v3_copy(x, out);
    return;
  }
  /* v = -w x q for q on the line, so w x v = q - (w.q) w is its point
   * nearest the origin (|w| = 1). */
  twf_v3_cross(w, v, q0);
  for (int k = 0; k < 3; k++)
    d[k] = x[k] - q0[k];
  t = twf_v3_dot(d, w);
  for (int k = 0; k < 3; k++)
    out[k] = q0[k] + t * w[k];
}

/* The motion of joint j by value t about its local axis a. */
static void local_motion(const twf_joint *j, const double a[3], double t, twf_pose *X)
{
  twf_pose_identity(X);
  if (j->type == TWF_JOINT_PRISMATIC) {
    for (int k = 0; k < 3; k++)
      X->p[k] = a[k] * t;
  } else {
    twf_so3_exp(a, t, X->R);
  }
}

void twf_urdf_chain_origins(const twf_model *m, const twf_pose *frames, twf_pose *origins,
                            double (*axes)[3], twf_pose *flange_in_last)
{
  twf_pose prev_inv, X;
  twf_pose_identity(&prev_inv);
  for (size_t k = 0; k < m->n_joints; k++) {
    const twf_joint *j = &m->joints[k];
    const double *dir = j->type == TWF_JOINT_PRISMATIC ? j->twist + 3 : j->twist;
    double a[3] = { 0, 0, 0 };
    for (int r = 0; r < 3; r++)
      for (int c = 0; c < 3; c++)
        a[r] += frames[k].R[c][r] * dir[c]; /* R^T dir */
    twf_v3_copy(a, axes[k]);
    local_motion(j, a, j->offset, &X);
    twf_pose_mul(&prev_inv, &frames[k], &origins[k]);
    twf_pose_mul(&origins[k], &X, &origins[k]);
    twf_pose_inv(&frames[k], &prev_inv);
  }
  twf_pose_mul(&prev_inv, &m->home, flange_in_last);
}

static int pose_finite(const twf_pose *T)
{
  for (int r = 0; r < 3; r++) {
    if (!isfinite(T->p[r]))
      return 0;
    for (int c = 0; c < 3; c++)
      if (!isfinite(T->R[r][c]))
        return 0;
  }
  return 1;
}

twf_status twf_urdf_check_model(const twf_model *m, twf_error *err)
{
  if (m == NULL || m->n_joints == 0)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "no model or no joint");
  for (size_t k = 0; k < m->n_joints; k++) {
    const twf_joint *j = &m->joints[k];
    int ok = isfinite(j->offset) && isfinite(j->scale);
    for (int i = 0; i < 6; i++)
      ok = ok && isfinite(j->twist[i]);
    for (int i = 0; i < 3; i++)
      ok = ok && isfinite(j->point[i]);
    if (!ok)
      return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0, NULL,
                           "joint %s has a value that is not finite", j->name);
    if (j->scale != 1.0)
      return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0,
                           "URDF joints move by the logged value itself: export to a model "
                           "file (or DH) to keep the scale, or fold it into the controller",
                           "joint %s has scale %.17g: URDF cannot hold a joint scale other than 1",
                           j->name, j->scale);
  }
  if (!pose_finite(&m->home))
    return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0, NULL,
                         "the home pose has a value that is not finite");
  for (size_t k = 0; k < m->n_targets; k++)
    for (int i = 0; i < 3; i++)
      if (m->targets[k].offset_known && !isfinite(m->targets[k].offset[i]))
        return twf_error_set(err, TWF_ERR_VALUE, NULL, 0, 0, NULL,
                             "target %s has an offset that is not finite", m->targets[k].name);
  return TWF_OK;
}

/* Rounding left-overs of the algebra (below 1e-13 m or rad) written as 0. */
static double tidy(double v)
{
  return fabs(v) < 1e-13 ? 0.0 : v;
}

void twf_urdf_fmt3(char *buf, size_t n, const double v[3])
{
  snprintf(buf, n, "%.17g %.17g %.17g", tidy(v[0]), tidy(v[1]), tidy(v[2]));
}

static twf_status nomem(twf_error *err)
{
  return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
}

/* The child element called name of parent, made (as the last child) when
 * absent. */
static xmlNodePtr child_made(xmlNodePtr parent, const char *name)
{
  xmlNodePtr c = twf_urdf_child(parent, name);
  return c != NULL ? c : xmlNewChild(parent, NULL, BAD_CAST name, NULL);
}

twf_status twf_urdf_set_origin(xmlNodePtr joint, const twf_pose *O, twf_error *err)
{
  char xyz[96], rpy[96];
  double a[3];
  xmlNodePtr o = child_made(joint, "origin");
  twf_rot_to_rpy_fixed_xyz(O->R, &a[0], &a[1], &a[2]);
  twf_urdf_fmt3(xyz, sizeof xyz, O->p);
  twf_urdf_fmt3(rpy, sizeof rpy, a);
  if (o == NULL || xmlSetProp(o, BAD_CAST "xyz", BAD_CAST xyz) == NULL ||
      xmlSetProp(o, BAD_CAST "rpy", BAD_CAST rpy) == NULL)
    return nomem(err);
  return TWF_OK;
}

twf_status twf_urdf_set_axis(xmlNodePtr joint, const double a[3], twf_error *err)
{
  char xyz[96];
  xmlNodePtr ax = child_made(joint, "axis");
  twf_urdf_fmt3(xyz, sizeof xyz, a);
  if (ax == NULL || xmlSetProp(ax, BAD_CAST "xyz", BAD_CAST xyz) == NULL)
    return nomem(err);
  return TWF_OK;
}

twf_status twf_urdf_doc_write(xmlDocPtr doc, FILE *out, int format, twf_error *err)
{
  xmlChar *text = NULL;
  int len = 0;
  xmlDocDumpFormatMemoryEnc(doc, &text, &len, "UTF-8", format);
  if (text == NULL)
    return nomem(err);
  size_t put = fwrite(text, 1, (size_t)len, out);
  xmlFree(text);
  if (put != (size_t)len || fflush(out) != 0 || ferror(out))
    return twf_error_set(err, TWF_ERR_IO, NULL, 0, 0, NULL, "cannot write the URDF file");
  return TWF_OK;
}

twf_urdf_write_options twf_urdf_default_write_options(void)
{
  twf_urdf_write_options o = { NULL, "base_link", "flange", "_link" };
  return o;
}

typedef struct names {
  twf_urdf_write_options o;
  char (*links)[TWF_NAME_MAX + 32];
  size_t n;
} names;

static const char *link_name(const names *nm, size_t k)
{
  return nm->links[k];
}

/* Link names: the base, one per joint, the flange, then the targets
 * written; all must differ, as URDF requires. */
static twf_status make_names(const twf_model *m, const twf_urdf_write_options *opt, names *nm,
                             twf_error *err)
{
  twf_urdf_write_options d = twf_urdf_default_write_options();
  nm->o = opt ? *opt : d;
  if (nm->o.base_link == NULL) nm->o.base_link = d.base_link;
  if (nm->o.flange_link == NULL) nm->o.flange_link = d.flange_link;
  if (nm->o.link_suffix == NULL) nm->o.link_suffix = d.link_suffix;
  if (nm->o.robot_name == NULL) nm->o.robot_name = m->name[0] ? m->name : "robot";
  nm->links = calloc(m->n_joints + m->n_targets + 2, sizeof *nm->links);
  if (nm->links == NULL)
    return nomem(err);
  snprintf(nm->links[nm->n++], sizeof nm->links[0], "%s", nm->o.base_link);
  for (size_t k = 0; k < m->n_joints; k++)
    snprintf(nm->links[nm->n++], sizeof nm->links[0], "%s%s", m->joints[k].name,
             nm->o.link_suffix);
  snprintf(nm->links[nm->n++], sizeof nm->links[0], "%s", nm->o.flange_link);
  for (size_t k = 0; k < m->n_targets; k++)
    if (m->targets[k].offset_known)
      snprintf(nm->links[nm->n++], sizeof nm->links[0], "%s", m->targets[k].name);
  for (size_t a = 0; a < nm->n; a++)
    for (size_t b = a + 1; b < nm->n; b++)
      if (strcmp(nm->links[a], nm->links[b]) == 0)
        return twf_error_set(err, TWF_ERR_DUPLICATE, NULL, 0, 0,
                             "rename the joint or target (URDF links need names of their own)",
                             "two URDF links would be called '%s'", nm->links[a]);
  /* the fixed joints are called LINK_joint (add_fixed): none may take a
   * moving joint's name */
  for (size_t a = m->n_joints + 1; a < nm->n; a++)
    for (size_t k = 0; k < m->n_joints; k++) {
      size_t n = strlen(nm->links[a]);
      if (strncmp(m->joints[k].name, nm->links[a], n) == 0 &&
          strcmp(m->joints[k].name + n, "_joint") == 0)
        return twf_error_set(err, TWF_ERR_DUPLICATE, NULL, 0, 0,
                             "rename the joint (URDF joints need names of their own)",
                             "joint %s would share its name with the fixed joint of link %s",
                             m->joints[k].name, nm->links[a]);
    }
  return TWF_OK;
}

static xmlNodePtr add_link(xmlNodePtr robot, const char *name)
{
  xmlNodePtr l = xmlNewChild(robot, NULL, BAD_CAST "link", NULL);
  if (l != NULL && xmlNewProp(l, BAD_CAST "name", BAD_CAST name) == NULL)
    return NULL;
  return l;
}

static xmlNodePtr add_joint(xmlNodePtr robot, const char *name, const char *type,
                            const char *parent, const char *child)
{
  xmlNodePtr j = xmlNewChild(robot, NULL, BAD_CAST "joint", NULL);
  xmlNodePtr p, c;
  if (j == NULL || xmlNewProp(j, BAD_CAST "name", BAD_CAST name) == NULL ||
      xmlNewProp(j, BAD_CAST "type", BAD_CAST type) == NULL ||
      (p = xmlNewChild(j, NULL, BAD_CAST "parent", NULL)) == NULL ||
      xmlNewProp(p, BAD_CAST "link", BAD_CAST parent) == NULL ||
      (c = xmlNewChild(j, NULL, BAD_CAST "child", NULL)) == NULL ||
      xmlNewProp(c, BAD_CAST "link", BAD_CAST child) == NULL)
    return NULL;
  return j;
}

static twf_status add_limit(xmlNodePtr joint, const twf_joint *j, twf_error *err)
{
  char lo[40], hi[40];
  xmlNodePtr l = xmlNewChild(joint, NULL, BAD_CAST "limit", NULL);
  if (l == NULL)
    return nomem(err);
  if (j->has_limits) {
    snprintf(lo, sizeof lo, "%.17g", tidy(j->limit_lo));
    snprintf(hi, sizeof hi, "%.17g", tidy(j->limit_hi));
    if (xmlNewProp(l, BAD_CAST "lower", BAD_CAST lo) == NULL ||
        xmlNewProp(l, BAD_CAST "upper", BAD_CAST hi) == NULL)
      return nomem(err);
  }
  /* URDF requires effort and velocity; a model knows neither. */
  if (xmlNewProp(l, BAD_CAST "effort", BAD_CAST "0") == NULL ||
      xmlNewProp(l, BAD_CAST "velocity", BAD_CAST "0") == NULL)
    return nomem(err);
  return TWF_OK;
}

static twf_status add_fixed(xmlNodePtr robot, const char *parent, const char *child,
                            const twf_pose *O, twf_error *err)
{
  char jname[TWF_NAME_MAX + 48];
  xmlNodePtr j;
  snprintf(jname, sizeof jname, "%s_joint", child);
  if (add_link(robot, child) == NULL ||
      (j = add_joint(robot, jname, "fixed", parent, child)) == NULL)
    return nomem(err);
  return twf_urdf_set_origin(j, O, err);
}

static twf_status build_doc(const twf_model *m, const names *nm, xmlDocPtr doc, twf_error *err)
{
  size_t n = m->n_joints;
  twf_pose *frames = calloc(2 * n, sizeof *frames), *origins = frames + n, flange;
  double (*axes)[3] = calloc(n, sizeof *axes);
  xmlNodePtr robot = xmlNewDocNode(doc, NULL, BAD_CAST "robot", NULL), c;
  twf_status st = TWF_OK;
  if (frames == NULL || axes == NULL || robot == NULL)
    st = nomem(err);
  if (st == TWF_OK) {
    xmlDocSetRootElement(doc, robot);
    c = xmlNewDocComment(doc, BAD_CAST " Written by twistfit export. Each joint frame is at the "
                         "joint's point on its axis, base-aligned at zero twist values and "
                         "turned by the joint's zero offset (URDF has none); units m and rad. ");
    if (c == NULL || xmlAddPrevSibling(robot, c) == NULL ||
        xmlNewProp(robot, BAD_CAST "name", BAD_CAST nm->o.robot_name) == NULL ||
        add_link(robot, link_name(nm, 0)) == NULL)
      st = nomem(err);
  }
  for (size_t k = 0; st == TWF_OK && k < n; k++) {
    twf_pose_identity(&frames[k]);
    twf_urdf_axis_point(&m->joints[k], m->joints[k].point, frames[k].p);
  }
  if (st == TWF_OK)
    twf_urdf_chain_origins(m, frames, origins, axes, &flange);
  for (size_t k = 0; st == TWF_OK && k < n; k++) {
    const twf_joint *j = &m->joints[k];
    const char *type = j->type == TWF_JOINT_PRISMATIC ? "prismatic"
                       : j->has_limits                ? "revolute"
                                                      : "continuous";
    xmlNodePtr x;
    if (add_link(robot, link_name(nm, k + 1)) == NULL ||
        (x = add_joint(robot, j->name, type, link_name(nm, k), link_name(nm, k + 1))) == NULL) {
      st = nomem(err);
      break;
    }
    if ((st = twf_urdf_set_origin(x, &origins[k], err)) == TWF_OK &&
        (st = twf_urdf_set_axis(x, axes[k], err)) == TWF_OK && strcmp(type, "continuous") != 0)
      st = add_limit(x, j, err);
  }
  if (st == TWF_OK)
    st = add_fixed(robot, link_name(nm, n), link_name(nm, n + 1), &flange, err);
  for (size_t k = 0, i = n + 2; st == TWF_OK && k < m->n_targets; k++) {
    twf_pose T;
    if (!m->targets[k].offset_known)
      continue;
    twf_pose_identity(&T);
    twf_v3_copy(m->targets[k].offset, T.p);
    st = add_fixed(robot, link_name(nm, n + 1), link_name(nm, i++), &T, err);
  }
  free(frames);
  free(axes);
  return st;
}

twf_status twf_model_write_urdf(const twf_model *m, const twf_urdf_write_options *opt, FILE *out,
                                twf_error *err)
{
  twf_io_c_locale loc;
  names nm;
  xmlDocPtr doc;
  twf_status st;
  twf_error_clear(err);
  if (out == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "no output stream");
  if ((st = twf_urdf_check_model(m, err)) != TWF_OK)
    return st;
  memset(&nm, 0, sizeof nm);
  if ((st = make_names(m, opt, &nm, err)) != TWF_OK) {
    free(nm.links);
    return st;
  }
  if ((st = twf_io_c_locale_enter(&loc, err)) != TWF_OK) {
    free(nm.links);
    return st;
  }
  doc = xmlNewDoc(BAD_CAST "1.0");
  st = doc == NULL ? nomem(err) : build_doc(m, &nm, doc, err);
  if (st == TWF_OK)
    st = twf_urdf_doc_write(doc, out, 1, err);
  xmlFreeDoc(doc);
  twf_io_c_locale_leave(&loc);
  free(nm.links);
  return st;
}
