/* twistfit/urdf.h: models as URDF (Unified Robot Description Format)
 * robots, in and out.
 * Part of the public interface of libtwistfit; include <twistfit.h>,
 * whose opening comment states the rules (units, frames, ownership,
 * errors) that hold for every declaration here. */
#ifndef TWISTFIT_URDF_H
#define TWISTFIT_URDF_H

#include "twistfit/common.h"
#include "twistfit/model.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ------------------------------------------------------------------ */
/* Reading a URDF robot as a model                                     */
/* ------------------------------------------------------------------ */

/* Which chain of a URDF robot is the model; get the defaults from
 * twf_urdf_default_read_options() and change fields. Strings are
 * borrowed for the call. */
typedef struct twf_urdf_read_options {
  /* The link whose frame is the model's base frame; NULL: the root. */
  const char *base_link;
  /* The link whose frame is the flange; NULL: the one tip, the deepest
   * link that every link moved by a joint and without children hangs from
   * through fixed joints only (a tree with two or more such tips is
   * refused, TWF_ERR_MISSING, the tips listed). */
  const char *tip_link;
  /* Links fixed to the tip that become targets, the offset their fixed
   * joint's origin xyz (rotation ignored). NULL: every link without
   * children fixed directly to the tip; n_target_links = 0 with a
   * non-NULL list: none. A named link that is not fixed to the tip is
   * refused (TWF_ERR_UNKNOWN). */
  const char *const *target_links;
  size_t n_target_links;
  /* Largest file read, bytes; 0: TWF_INPUT_SIZE_DEFAULT (campaign.h). */
  unsigned long long max_input_size;
} twf_urdf_read_options;

twf_urdf_read_options twf_urdf_default_read_options(void);

/* Read the chain from base_link to tip_link of the URDF file path (opt
 * NULL: the defaults). Fixed joints in the chain are merged into the next
 * joint's origin (after the last moving joint, into [home]); revolute and
 * prismatic joints keep their <limit> lower and upper (SI), continuous
 * joints are revolute without limits. Joint names are the URDF joints';
 * the model's name is the robot's; units declared mm and deg (the
 * defaults of model files; the values are SI as always).
 * Refused (NULL, err with file and line of the element):
 *   TWF_ERR_IO       the file cannot be opened or read;
 *   TWF_ERR_SYNTAX   not well-formed XML, no <robot> root, a joint without
 *                    parent, child or name, a link with two parents, a
 *                    cycle;
 *   TWF_ERR_UNKNOWN  a joint type URDF does not define, a base, tip or
 *                    target link that is not there or not on the chain;
 *   TWF_ERR_MISSING  a tree with two tips and no tip_link (the tips are
 *                    listed), no moving joint;
 *   TWF_ERR_VALUE    a chain joint of type floating or planar, or with
 *                    <mimic> (no model of twistfit holds them), a number
 *                    that is not one (or not finite, or a wrong count), a
 *                    zero axis, lower > upper, a file over the size limit;
 *   TWF_ERR_DUPLICATE two links or joints of one name;
 *   TWF_ERR_NOMEM.
 * warnings (NULL: discard) receive axes normalised from a length that was
 * not 1 within 1e-6. */
twf_model *twf_model_read_urdf(const char *path,
                               const twf_urdf_read_options *opt,
                               twf_warnings *warnings, twf_error *err);

/* ------------------------------------------------------------------ */
/* Writing a model as a URDF robot                                     */
/* ------------------------------------------------------------------ */

/* Names of what twf_model_write_urdf writes; NULL fields take the
 * defaults of twf_urdf_default_write_options(). */
typedef struct twf_urdf_write_options {
  const char *robot_name;  /* NULL: the model's name, else "robot" */
  const char *base_link;   /* NULL: "base_link" */
  const char *flange_link; /* NULL: "flange" */
  const char *link_suffix; /* link of joint J is J + suffix; NULL: "_link" */
} twf_urdf_write_options;

twf_urdf_write_options twf_urdf_default_write_options(void);

/* Write m as a URDF robot to out (for a buffer, open one with
 * open_memstream): the base link, one link per joint moved by a
 * revolute, continuous (revolute without limits) or prismatic joint,
 * the flange link on a fixed joint, and each target with a known offset
 * as a link on a fixed joint to the flange, named after the target. Each
 * joint frame sits at the joint's point on its axis (the point nearest
 * twf_joint.point) with the base frame's orientation at all-zero twist
 * values, turned by the joint's offset (URDF has no zero offset, so the
 * offset goes into the origin's rpy or xyz); the axis is in that frame.
 * The forward kinematics of the file equal twf_model_fk's exactly up to
 * rounding. Limits are on the logged value, in rad or m; <limit> has
 * effort and velocity 0 (not known to a model). Numbers with 17
 * significant digits, values within 1e-13 of 0 written 0.
 * Returns TWF_OK; TWF_ERR_VALUE when a joint's scale is not 1 (URDF
 * cannot hold it) or a value is not finite, TWF_ERR_DUPLICATE when two
 * links or joints would share a name (err says which); TWF_ERR_INVALID
 * for no model or stream; TWF_ERR_IO when the stream fails; TWF_ERR_NOMEM.
 * Nothing is written unless m passed the checks. */
twf_status twf_model_write_urdf(const twf_model *m,
                                const twf_urdf_write_options *opt,
                                FILE *out, twf_error *err);

/* Write into a copy of the URDF file like_path: its chain (chosen by
 * ropt as twf_model_read_urdf does, NULL: the defaults) must have m's
 * moving joints in number and type; only the origins and axes of the
 * chain's moving joints change, and the origin of the last fixed joint
 * before the tip when the flange is not on the last joint's axis, so
 * that the copy's forward kinematics equal m's. Each moving link keeps
 * the orientation it had at logged zero and its origin moves to the
 * nearest point of m's axis; targets of m that are links fixed to the
 * tip get their offsets. Everything else (other joints and links,
 * visuals, collisions, inertias, comments, attribute order) is kept.
 * Errors as twf_model_read_urdf for the file; TWF_ERR_VALUE when the
 * chain does not match m, a scale is not 1, or the flange is off the
 * last axis and the tip is that joint's own link (no fixed joint to
 * change); TWF_ERR_IO when out fails. All are the user's data, so the
 * command line answers them with exit status 3. */
twf_status twf_model_write_urdf_like(const twf_model *m, const char *like_path,
                                     const twf_urdf_read_options *ropt,
                                     FILE *out, twf_error *err);

#ifdef __cplusplus
}
#endif

#endif /* TWISTFIT_URDF_H */
