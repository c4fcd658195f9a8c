/* urdf_internal.h: the parsed URDF document and its kinematic tree,
 * shared by the URDF reader (urdf_read.c), writer (urdf_write.c) and the
 * writer into a user's file (urdf_like.c). Private to src/lib/io. */
#ifndef TWF_URDF_INTERNAL_H
#define TWF_URDF_INTERNAL_H

#include "io_internal.h"
#include "twistfit/urdf.h"

#include <libxml/tree.h>

typedef enum urdf_jtype {
  UJ_FIXED, UJ_REVOLUTE, UJ_CONTINUOUS, UJ_PRISMATIC, UJ_FLOATING, UJ_PLANAR
} urdf_jtype;

typedef struct urdf_link {
  const char *name;   /* the name attribute, owned by the document */
  xmlNodePtr node;
  long parent_joint;  /* index into joints, -1 for the root */
  size_t n_children;
} urdf_link;

typedef struct urdf_joint {
  const char *name;
  xmlNodePtr node;
  urdf_jtype type;
  size_t parent, child; /* indices into links */
} urdf_joint;

typedef struct urdf_tree {
  const char *path;   /* borrowed, for errors */
  xmlDocPtr doc;
  xmlNodePtr robot;
  urdf_link *links;
  size_t n_links;
  urdf_joint *joints;
  size_t n_joints;
  size_t root;
  twf_input_digest digest; /* of the bytes parsed */
} urdf_tree;

/* The chain picked by the read options: joints[0 .. n-1] from base to
 * tip (fixed ones included), the base and tip links. */
typedef struct urdf_chain {
  size_t *joints;
  size_t n;
  size_t base, tip;
  size_t n_moving;
} urdf_chain;

/* twf_model_read_urdf in the C locale already entered; digest (may be
 * NULL) receives the size and SHA-256 of the bytes parsed. */
twf_model *twf_urdf_read_model(const char *path, const twf_urdf_read_options *opt,
                               twf_warnings *warnings, twf_input_digest *digest,
                               twf_error *err);
/* Whether path names a URDF file for twf_model_read: a name ending in
 * .urdf, or a regular file whose first non-blank character is '<' (a
 * model file never starts so; pipes are not peeked at, since that would
 * eat their bytes). */
int twf_urdf_is_urdf(const char *path);

/* Read, parse (no network, no entity expansion, libxml2's messages kept
 * out of stderr) and index path. On failure err says where. */
twf_status twf_urdf_tree_read(const char *path, unsigned long long max_size,
                              urdf_tree *t, twf_error *err);
void twf_urdf_tree_free(urdf_tree *t);
/* The chain from opt->base_link (root) to opt->tip_link (the one tip). */
twf_status twf_urdf_chain_find(const urdf_tree *t, const twf_urdf_read_options *opt,
                               urdf_chain *c, twf_error *err);
void twf_urdf_chain_free(urdf_chain *c);
/* Index of the link called name, or -1. */
long twf_urdf_link_index(const urdf_tree *t, const char *name);
/* A joint's <origin> as a pose (identity when absent) and its <axis> as
 * a unit vector (1 0 0 when absent). */
twf_status twf_urdf_joint_origin(const urdf_tree *t, size_t j, twf_pose *O,
                                 twf_error *err);
twf_status twf_urdf_joint_axis(const urdf_tree *t, size_t j, double a[3],
                               twf_warnings *w, twf_error *err);
long twf_urdf_line(xmlNodePtr node);
/* TWF_ERR_INVALID for a chain joint a model cannot hold: floating,
 * planar, <mimic> (the element and its line in err). */
twf_status twf_urdf_check_joint(const urdf_tree *t, size_t j, twf_error *err);
/* One finite number from attribute name of n (v unchanged when absent). */
twf_status twf_urdf_number(const urdf_tree *t, xmlNodePtr n, const char *name, double *v,
                           twf_error *err);
/* The first child element called name, or NULL. */
xmlNodePtr twf_urdf_child(xmlNodePtr node, const char *name);

/* The URDF joints of m's chain: frames[k] is the pose in the base frame,
 * at all-zero twist values, of the frame of joint k's link, its origin on
 * joint k's axis. Gives joint k's origin (from the previous link frame,
 * the base for k = 0, offset included), its axis in its own frame, and
 * the flange in the last link frame. Exact algebra, see urdf_write.c. */
void twf_urdf_chain_origins(const twf_model *m, const twf_pose *frames,
                            twf_pose *origins, double (*axes)[3],
                            twf_pose *flange_in_last);
/* The point of joint k's axis line nearest x (any point for prismatic). */
void twf_urdf_axis_point(const twf_joint *j, const double x[3], double out[3]);
/* Why a model cannot be written as URDF: a scale not 1, a value not
 * finite. TWF_OK when it can. */
twf_status twf_urdf_check_model(const twf_model *m, twf_error *err);
/* "x y z" with 17 significant digits, |v| < 1e-13 written 0. */
void twf_urdf_fmt3(char *buf, size_t n, const double v[3]);
/* Set <origin xyz rpy> of a joint element from a pose (made when absent). */
twf_status twf_urdf_set_origin(xmlNodePtr joint, const twf_pose *O, twf_error *err);
twf_status twf_urdf_set_axis(xmlNodePtr joint, const double a[3], twf_error *err);
/* Write doc to out as text; TWF_ERR_IO when out fails. */
twf_status twf_urdf_doc_write(xmlDocPtr doc, FILE *out, int format, twf_error *err);

#endif
