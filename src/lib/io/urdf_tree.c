/* urdf_tree.c: a URDF file parsed with libxml2 and indexed as a tree of
 * links and joints; the chain between two links; origins and axes. The
 * document is kept (urdf_like.c edits it in place). */
#include "urdf_internal.h"
#include "readtext.h"

#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <libxml/parser.h>
#include <strings.h>
#include <sys/stat.h>

int twf_urdf_is_urdf(const char *path)
{
  size_t n = strlen(path);
  struct stat sb;
  FILE *fp;
  int c;
  if (n >= 5 && strcasecmp(path + n - 5, ".urdf") == 0)
    return 1;
  if (stat(path, &sb) != 0 || !S_ISREG(sb.st_mode) || (fp = fopen(path, "rb")) == NULL)
    return 0;
  c = fgetc(fp);
  if (c == 0xEF && fgetc(fp) == 0xBB && fgetc(fp) == 0xBF) /* UTF-8 byte order mark */
    c = fgetc(fp);
  while (c == ' ' || c == '\t' || c == '\n' || c == '\r')
    c = fgetc(fp);
  fclose(fp);
  return c == '<';
}

long twf_urdf_line(xmlNodePtr node)
{
  return node != NULL ? xmlGetLineNo(node) : 0;
}

xmlNodePtr twf_urdf_child(xmlNodePtr node, const char *name)
{
  for (xmlNodePtr c = node ? node->children : NULL; c != NULL; c = c->next)
    if (c->type == XML_ELEMENT_NODE && xmlStrcmp(c->name, BAD_CAST name) == 0)
      return c;
  return NULL;
}

/* An attribute's value as the document holds it (no copy), or NULL. */
static const char *attr(xmlNodePtr node, const char *name)
{
  xmlAttrPtr a = xmlHasProp(node, BAD_CAST name);
  if (a == NULL || a->children == NULL)
    return a != NULL ? "" : NULL;
  return (const char *)a->children->content;
}

long twf_urdf_link_index(const urdf_tree *t, const char *name)
{
  for (size_t i = 0; i < t->n_links; i++)
    if (strcmp(t->links[i].name, name) == 0)
      return (long)i;
  return -1;
}

static twf_status parse_doc(const urdf_tree *t, const twf_io_text *text, xmlDocPtr *doc,
                            twf_error *err)
{
  xmlParserCtxtPtr ctx = xmlNewParserCtxt();
  const xmlError *e;
  if (ctx == NULL)
    return twf_error_set(err, TWF_ERR_NOMEM, t->path, 0, 0, NULL, "out of memory");
  /* No network, no messages on stderr (the library never prints); entities
   * are left unexpanded so that a file cannot make the parser grow. */
  /* Read as UTF-8 whatever the file declares: a converter for another
   * encoding reports its failures on stderr, past the context's error
   * switch, and the library never prints; URDF files are UTF-8 (ASCII in
   * practice), and anything else is then a clear syntax error. */
  *doc = xmlCtxtReadMemory(ctx, text->data + text->start, (int)(text->len - text->start),
                           t->path, "UTF-8", XML_PARSE_NONET | XML_PARSE_NOERROR |
                           XML_PARSE_NOWARNING | XML_PARSE_BIG_LINES);
  e = xmlCtxtGetLastError(ctx);
  if (*doc == NULL || (e != NULL && e->level >= XML_ERR_ERROR)) {
    /* libxml2's messages end with a newline: trimmed before the error
     * text, which would show it escaped */
    char msg[TWF_ERROR_TEXT_MAX];
    size_t n;
    snprintf(msg, sizeof msg, "%s", e && e->message ? e->message : "parse error");
    n = strlen(msg);
    while (n > 0 && (msg[n - 1] == '\n' || msg[n - 1] == ' '))
      msg[--n] = '\0';
    for (size_t i = 0; i < n; i++)
      if (msg[i] == '\n')
        msg[i] = ' ';
    twf_status st = twf_error_set(err, TWF_ERR_SYNTAX, t->path, e ? e->line : 0,
                                  e ? e->int2 : 0, "give a well-formed URDF (XML) file in UTF-8",
                                  "not well-formed XML: %s", msg);
    xmlFreeDoc(*doc);
    *doc = NULL;
    xmlFreeParserCtxt(ctx);
    return st;
  }
  xmlFreeParserCtxt(ctx);
  return TWF_OK;
}

static twf_status need_name(const urdf_tree *t, xmlNodePtr n, const char *what, const char *name,
                            const char **out, twf_error *err)
{
  *out = attr(n, name);
  if (*out == NULL || (*out)[0] == '\0')
    return twf_error_set(err, TWF_ERR_SYNTAX, t->path, twf_urdf_line(n), 0,
                         "every <link> has a name; every <joint> a name, a type, "
                         "<parent link=...> and <child link=...>",
                         "<%s> without %s", what, name);
  return TWF_OK;
}

static twf_status joint_type(const urdf_tree *t, xmlNodePtr n, urdf_jtype *type, twf_error *err)
{
  static const char *const names[] = { "fixed", "revolute", "continuous",
                                       "prismatic", "floating", "planar" };
  const char *s;
  twf_status st = need_name(t, n, "joint", "type", &s, err);
  if (st != TWF_OK)
    return st;
  for (int k = 0; k < 6; k++)
    if (strcmp(s, names[k]) == 0) {
      *type = (urdf_jtype)k;
      return TWF_OK;
    }
  return twf_error_set(err, TWF_ERR_UNKNOWN, t->path, twf_urdf_line(n), 0,
                       "URDF joint types are fixed, revolute, continuous, prismatic, "
                       "floating and planar", "unknown joint type '%s'", s);
}

static twf_status index_links(urdf_tree *t, twf_error *err)
{
  size_t cap = 0;
  for (xmlNodePtr n = t->robot->children; n != NULL; n = n->next) {
    const char *name;
    twf_status st;
    if (n->type != XML_ELEMENT_NODE || xmlStrcmp(n->name, BAD_CAST "link") != 0)
      continue;
    if ((st = need_name(t, n, "link", "name", &name, err)) != TWF_OK)
      return st;
    if (twf_urdf_link_index(t, name) >= 0)
      return twf_error_set(err, TWF_ERR_DUPLICATE, t->path, twf_urdf_line(n), 0,
                           "give every link a name of its own", "link '%s' given twice", name);
    if (twf_io_grow((void **)&t->links, &cap, t->n_links + 1, sizeof *t->links) != 0)
      return twf_error_set(err, TWF_ERR_NOMEM, t->path, 0, 0, NULL, "out of memory");
    t->links[t->n_links].name = name;
    t->links[t->n_links].node = n;
    t->links[t->n_links].parent_joint = -1;
    t->links[t->n_links].n_children = 0;
    t->n_links++;
  }
  return TWF_OK;
}

/* The link named by <parent link=...> or <child link=...> of joint n. */
static twf_status joint_end(const urdf_tree *t, xmlNodePtr n, const char *jname, const char *end,
                            size_t *out, twf_error *err)
{
  xmlNodePtr e = twf_urdf_child(n, end);
  const char *name = e ? attr(e, "link") : NULL;
  long i;
  if (name == NULL || name[0] == '\0')
    return twf_error_set(err, TWF_ERR_SYNTAX, t->path, twf_urdf_line(e ? e : n), 0,
                         "every <joint> has <parent link=...> and <child link=...>",
                         "joint %s has no <%s link=...>", jname, end);
  if ((i = twf_urdf_link_index(t, name)) < 0)
    return twf_error_set(err, TWF_ERR_UNKNOWN, t->path, twf_urdf_line(e), 0,
                         "declare the link with <link name=...>",
                         "joint %s names %s link '%s', which is not declared", jname, end, name);
  *out = (size_t)i;
  return TWF_OK;
}

static twf_status index_joints(urdf_tree *t, twf_error *err)
{
  size_t cap = 0;
  for (xmlNodePtr n = t->robot->children; n != NULL; n = n->next) {
    urdf_joint j;
    twf_status st;
    if (n->type != XML_ELEMENT_NODE || xmlStrcmp(n->name, BAD_CAST "joint") != 0)
      continue;
    memset(&j, 0, sizeof j);
    j.node = n;
    if ((st = need_name(t, n, "joint", "name", &j.name, err)) != TWF_OK ||
        (st = joint_type(t, n, &j.type, err)) != TWF_OK ||
        (st = joint_end(t, n, j.name, "parent", &j.parent, err)) != TWF_OK ||
        (st = joint_end(t, n, j.name, "child", &j.child, err)) != TWF_OK)
      return st;
    for (size_t k = 0; k < t->n_joints; k++)
      if (strcmp(t->joints[k].name, j.name) == 0)
        return twf_error_set(err, TWF_ERR_DUPLICATE, t->path, twf_urdf_line(n), 0,
                             "give every joint a name of its own", "joint '%s' given twice",
                             j.name);
    if (t->links[j.child].parent_joint >= 0)
      return twf_error_set(err, TWF_ERR_SYNTAX, t->path, twf_urdf_line(n), 0,
                           "a URDF robot is a tree: each link has one parent joint",
                           "link %s is the child of joints %s and %s", t->links[j.child].name,
                           t->joints[t->links[j.child].parent_joint].name, j.name);
    if (twf_io_grow((void **)&t->joints, &cap, t->n_joints + 1, sizeof *t->joints) != 0)
      return twf_error_set(err, TWF_ERR_NOMEM, t->path, 0, 0, NULL, "out of memory");
    t->links[j.child].parent_joint = (long)t->n_joints;
    t->links[j.parent].n_children++;
    t->joints[t->n_joints++] = j;
  }
  return TWF_OK;
}

/* One root, and every link reaches it (a cycle would not). */
static twf_status find_root(urdf_tree *t, twf_error *err)
{
  long root = -1;
  for (size_t i = 0; i < t->n_links; i++) {
    if (t->links[i].parent_joint >= 0)
      continue;
    if (root >= 0)
      return twf_error_set(err, TWF_ERR_SYNTAX, t->path, twf_urdf_line(t->links[i].node), 0,
                           "join every link to the tree with a joint",
                           "links %s and %s both have no parent joint (two roots)",
                           t->links[root].name, t->links[i].name);
    root = (long)i;
  }
  if (root < 0)
    return twf_error_set(err, TWF_ERR_SYNTAX, t->path, t->n_links ? 0 : twf_urdf_line(t->robot),
                         0, "a URDF robot is a tree of links from one root",
                         t->n_links ? "the joints form a cycle (no root link)"
                                    : "<robot> has no <link>");
  for (size_t i = 0; i < t->n_links; i++) {
    size_t k = i, steps = 0;
    while (t->links[k].parent_joint >= 0 && steps++ <= t->n_links)
      k = t->joints[t->links[k].parent_joint].parent;
    if (k != (size_t)root)
      return twf_error_set(err, TWF_ERR_SYNTAX, t->path, twf_urdf_line(t->links[i].node), 0,
                           "a URDF robot is a tree of links from one root",
                           "link %s lies on a cycle of joints", t->links[i].name);
  }
  t->root = (size_t)root;
  return TWF_OK;
}

twf_status twf_urdf_tree_read(const char *path, unsigned long long max_size, urdf_tree *t,
                              twf_error *err)
{
  twf_io_rules rules = { max_size ? max_size : TWF_INPUT_SIZE_DEFAULT, TWF_IO_LINE_STOP,
                         "a URDF file", "URDF file" };
  twf_io_text text;
  twf_status st;
  memset(t, 0, sizeof *t);
  t->path = path;
  memset(&text, 0, sizeof text);
  if ((st = twf_io_read_text(path, &rules, &text, err)) != TWF_OK)
    return st;
  if (text.nul_at != (size_t)-1) {
    st = twf_error_set(err, TWF_ERR_SYNTAX, path, text.nul_line, text.nul_col,
                       "a URDF file is text", "NUL byte in the file");
    twf_io_text_free(&text);
    return st;
  }
  st = parse_doc(t, &text, &t->doc, err);
  t->digest = text.digest;
  twf_io_text_free(&text);
  if (st != TWF_OK)
    return st;
  t->robot = xmlDocGetRootElement(t->doc);
  if (t->robot == NULL || xmlStrcmp(t->robot->name, BAD_CAST "robot") != 0) {
    st = twf_error_set(err, TWF_ERR_SYNTAX, path, twf_urdf_line(t->robot), 0,
                       "a URDF file has one <robot> element holding links and joints",
                       "the root element is <%s>, not <robot>",
                       t->robot ? (const char *)t->robot->name : "");
  } else if ((st = index_links(t, err)) == TWF_OK && (st = index_joints(t, err)) == TWF_OK) {
    st = find_root(t, err);
  }
  if (st != TWF_OK)
    twf_urdf_tree_free(t);
  return st;
}

void twf_urdf_tree_free(urdf_tree *t)
{
  if (t == NULL)
    return;
  xmlFreeDoc(t->doc);
  free(t->links);
  free(t->joints);
  t->doc = NULL;
  t->links = NULL;
  t->joints = NULL;
  t->n_links = t->n_joints = 0;
}

static int moving(urdf_jtype type)
{
  return type != UJ_FIXED;
}

/* Whether the path from the root to link i has a moving joint. */
static int is_moved(const urdf_tree *t, size_t i)
{
  while (t->links[i].parent_joint >= 0) {
    const urdf_joint *j = &t->joints[t->links[i].parent_joint];
    if (moving(j->type))
      return 1;
    i = j->parent;
  }
  return 0;
}

/* Whether a descends from anc (or is it) through fixed joints only. */
static int fixed_below(const urdf_tree *t, size_t anc, size_t a)
{
  while (a != anc) {
    if (t->links[a].parent_joint < 0)
      return 0;
    const urdf_joint *j = &t->joints[t->links[a].parent_joint];
    if (moving(j->type))
      return 0;
    a = j->parent;
  }
  return 1;
}

static size_t depth(const urdf_tree *t, size_t i)
{
  size_t d = 0;
  while (t->links[i].parent_joint >= 0) {
    i = t->joints[t->links[i].parent_joint].parent;
    d++;
  }
  return d;
}

static size_t common_ancestor(const urdf_tree *t, size_t a, size_t b)
{
  size_t da = depth(t, a), db = depth(t, b);
  for (; da > db; da--)
    a = t->joints[t->links[a].parent_joint].parent;
  for (; db > da; db--)
    b = t->joints[t->links[b].parent_joint].parent;
  while (a != b) {
    a = t->joints[t->links[a].parent_joint].parent;
    b = t->joints[t->links[b].parent_joint].parent;
  }
  return a;
}

/* The default tip: leaves moved by some joint are the candidates (a link
 * fixed to the base, like a pedestal, is not a tip); their common
 * ancestor is the tip when every candidate hangs from it through fixed
 * joints only (the flange with its tool and target links). */
static twf_status default_tip(const urdf_tree *t, size_t *tip, twf_error *err)
{
  long anc = -1;
  size_t n = 0;
  for (size_t i = 0; i < t->n_links; i++) {
    if (t->links[i].n_children != 0 || !is_moved(t, i))
      continue;
    anc = anc < 0 ? (long)i : (long)common_ancestor(t, (size_t)anc, i);
    n++;
  }
  if (n == 0)
    return twf_error_set(err, TWF_ERR_MISSING, t->path, 0, 0,
                         "a model needs at least one revolute, continuous or prismatic joint",
                         "no link of the robot is moved by a joint");
  int ok = is_moved(t, (size_t)anc);
  for (size_t i = 0; ok && i < t->n_links; i++)
    if (t->links[i].n_children == 0 && is_moved(t, i) && !fixed_below(t, (size_t)anc, i))
      ok = 0;
  if (ok) {
    *tip = (size_t)anc;
    return TWF_OK;
  }
  char list[TWF_ERROR_TEXT_MAX] = "";
  for (size_t i = 0, k = 0; i < t->n_links; i++)
    if (t->links[i].n_children == 0 && is_moved(t, i))
      twf_io_appendf(list, sizeof list, "%s%s", k++ ? ", " : "", t->links[i].name);
  return twf_error_set(err, TWF_ERR_MISSING, t->path, 0, 0,
                       "choose the flange with the tip link option (--tip-link LINK)",
                       "the robot is a tree with %zu tips (%s): which one is the flange?", n, list);
}

static twf_status named_link(const urdf_tree *t, const char *name, const char *what, size_t *out,
                             twf_error *err)
{
  long i = twf_urdf_link_index(t, name);
  if (i < 0)
    return twf_error_set(err, TWF_ERR_UNKNOWN, t->path, 0, 0,
                         "name a <link> of the file", "no link '%s' (the %s link)", name, what);
  *out = (size_t)i;
  return TWF_OK;
}

twf_status twf_urdf_chain_find(const urdf_tree *t, const twf_urdf_read_options *opt,
                               urdf_chain *c, twf_error *err)
{
  twf_status st;
  size_t k, n = 0;
  memset(c, 0, sizeof *c);
  c->base = t->root;
  if (opt != NULL && opt->base_link != NULL &&
      (st = named_link(t, opt->base_link, "base", &c->base, err)) != TWF_OK)
    return st;
  if (opt != NULL && opt->tip_link != NULL)
    st = named_link(t, opt->tip_link, "tip", &c->tip, err);
  else
    st = default_tip(t, &c->tip, err);
  if (st != TWF_OK)
    return st;
  for (k = c->tip; k != c->base; k = t->joints[t->links[k].parent_joint].parent, n++)
    if (t->links[k].parent_joint < 0)
      return twf_error_set(err, TWF_ERR_UNKNOWN, t->path, 0, 0,
                           "give a tip link below the base link",
                           "link %s does not hang from link %s", t->links[c->tip].name,
                           t->links[c->base].name);
  c->joints = malloc((n ? n : 1) * sizeof *c->joints);
  if (c->joints == NULL)
    return twf_error_set(err, TWF_ERR_NOMEM, t->path, 0, 0, NULL, "out of memory");
  c->n = n;
  for (k = c->tip; k != c->base; k = t->joints[t->links[k].parent_joint].parent) {
    size_t j = (size_t)t->links[k].parent_joint;
    c->joints[--n] = j;
    c->n_moving += moving(t->joints[j].type) ? 1u : 0u;
  }
  return TWF_OK;
}

void twf_urdf_chain_free(urdf_chain *c)
{
  if (c != NULL) {
    free(c->joints);
    c->joints = NULL;
  }
}

/* count finite numbers from an attribute; the file's line in errors */
static twf_status numbers(const urdf_tree *t, xmlNodePtr n, const char *name, double *v,
                          int count, twf_error *err)
{
  const char *s = attr(n, name);
  char *end;
  int k = 0;
  if (s == NULL)
    return TWF_OK;
  for (;;) {
    while (*s == ' ' || *s == '\t' || *s == '\n' || *s == '\r')
      s++;
    if (*s == '\0')
      break;
    if (k == count)
      return twf_error_set(err, TWF_ERR_VALUE, t->path, twf_urdf_line(n), 0,
                           NULL, "<%s %s=...> has more than %d numbers", (const char *)n->name,
                           name, count);
    errno = 0;
    v[k] = strtod(s, &end);
    if (end == s || (*end != '\0' && *end != ' ' && *end != '\t' && *end != '\n' && *end != '\r') ||
        !isfinite(v[k]) || (errno == ERANGE && twf_io_mantissa_nonzero(s)))
      return twf_error_set(err, TWF_ERR_VALUE, t->path, twf_urdf_line(n), 0,
                           "give finite decimal numbers separated by spaces",
                           "<%s %s=...>: '%.*s' is not a finite number", (const char *)n->name,
                           name, (int)strcspn(s, " \t\r\n"), s);
    s = end;
    k++;
  }
  if (k != count)
    return twf_error_set(err, TWF_ERR_VALUE, t->path, twf_urdf_line(n), 0, NULL,
                         "<%s %s=...> has %d numbers, not %d", (const char *)n->name, name, k,
                         count);
  return TWF_OK;
}

twf_status twf_urdf_number(const urdf_tree *t, xmlNodePtr n, const char *name, double *v,
                           twf_error *err)
{
  return numbers(t, n, name, v, 1, err);
}

twf_status twf_urdf_joint_origin(const urdf_tree *t, size_t j, twf_pose *O, twf_error *err)
{
  xmlNodePtr o = twf_urdf_child(t->joints[j].node, "origin");
  double xyz[3] = { 0, 0, 0 }, rpy[3] = { 0, 0, 0 };
  twf_status st;
  if (o != NULL && ((st = numbers(t, o, "xyz", xyz, 3, err)) != TWF_OK ||
                    (st = numbers(t, o, "rpy", rpy, 3, err)) != TWF_OK))
    return st;
  twf_rpy_fixed_xyz_to_rot(rpy[0], rpy[1], rpy[2], O->R);
  twf_v3_copy(xyz, O->p);
  return TWF_OK;
}

twf_status twf_urdf_joint_axis(const urdf_tree *t, size_t j, double a[3], twf_warnings *w,
                               twf_error *err)
{
  xmlNodePtr ax = twf_urdf_child(t->joints[j].node, "axis");
  twf_status st;
  double len, scale, n, u[3];
  a[0] = 1; /* URDF's default axis */
  a[1] = a[2] = 0;
  if (ax != NULL && (st = numbers(t, ax, "xyz", a, 3, err)) != TWF_OK)
    return st;
  /* the length of the axis scaled by its largest component first: an
   * axis such as (1e308, 0, 2) would overflow the sum of squares and
   * normalise to zero */
  scale = fmax(fabs(a[0]), fmax(fabs(a[1]), fabs(a[2])));
  for (int k = 0; k < 3; k++)
    u[k] = scale > 0 ? a[k] / scale : 0.0;
  n = twf_v3_norm(u); /* in [1, sqrt 3] for a nonzero axis */
  len = scale * n;
  if (!(len > 1e-12))
    return twf_error_set(err, TWF_ERR_VALUE, t->path, twf_urdf_line(ax), 0,
                         "give the joint's axis direction", "joint %s has a zero axis",
                         t->joints[j].name);
  if (fabs(len - 1.0) > 1e-6)
    twf_warnings_add(w, t->path, twf_urdf_line(ax), 0,
                     "axis of joint %s normalised (length %.9g)", t->joints[j].name, len);
  for (int k = 0; k < 3; k++)
    a[k] = u[k] / n;
  return TWF_OK;
}
