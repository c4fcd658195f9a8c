/* modelfile_internal.h: the model file reader's state, shared by its two
 * passes (modelfile_parse.c: structure; modelfile_values.c and
 * modelfile_read.c: values and the model) and the writer. Private to
 * src/lib/io. */
#ifndef TWF_MODELFILE_INTERNAL_H
#define TWF_MODELFILE_INTERNAL_H

#include "inistrict.h"

/* Tolerances of the format, documented in twistfit-model(5). */
#define AXIS_UNIT_TOL 1e-3    /* axis length accepted (and normalised) */
#define AXIS_QUIET_TOL 1e-12  /* below this, normalised without a warning */
/* quaternion norm: TWF_IO_QUAT_NORM_TOL of io_internal.h */
#define ROT_ORTHO_TOL 1e-6    /* max |R^T R - I| of rotation rows */

static inline int twf_mf_is_blank(char ch)
{
  return ch == ' ' || ch == '\t' || ch == '\v' || ch == '\f' || ch == '\r';
}

/* Names of joints, targets and metadata keys: [A-Za-z0-9_.-]+. */
int twf_mf_name_chars_ok(const char *s);
extern const char twf_mf_name_hint[];

/* ------------------------------------------------------------------ */
/* First pass: structure (modelfile_parse.c)                           */
/* ------------------------------------------------------------------ */

typedef enum sec_kind {
  SEC_ROBOT, SEC_JOINT, SEC_HOME, SEC_FLANGE, SEC_TARGET, SEC_ASBUILT,
  SEC_BASE, SEC_MASS, SEC_PAYLOAD
} sec_kind;

/* Sections that carry a name: [joint NAME], [target NAME], [mass JOINT],
 * [payload NAME]. */
static inline int twf_mf_kind_named(int k)
{
  return k == SEC_JOINT || k == SEC_TARGET || k == SEC_MASS || k == SEC_PAYLOAD;
}

extern const char *const twf_mf_kind_names[];

typedef struct entry {
  char key[TWF_NAME_MAX];
  char *value;
  long line;
} entry;

typedef struct section {
  sec_kind kind;
  char name[TWF_NAME_MAX]; /* joint or target name, "" otherwise */
  long line;
  entry *entries;
  size_t n, cap;
} section;

typedef struct parse_ctx {
  twf_ini_strict ini;    /* path, error, line number, first status */
  int content;           /* a section or key line was seen */
  section *secs;
  size_t nsec, capsec;
  char key[TWF_MODEL_LINE_MAX + 1]; /* key of the current line */
  twf_warnings *warnings;
  /* Keys of the current section (index ksec - 1), hashed, so that a
   * section of many keys ([asbuilt]) reads in linear time: open
   * addressing, slots hold entry index + 1, load at most 1/2. */
  size_t *kslot, kcap, ksec;
  /* key comparisons made (a test hook for the linear time) */
  unsigned long n_key_compares;
} parse_ctx;

/* Run the first pass over c->ini.path: sections and keys checked, every value kept
 * as text with its line. Returns c->ini.status. */
twf_status twf_mf_parse_structure(parse_ctx *c);
void twf_mf_ctx_clear(parse_ctx *c);

/* ------------------------------------------------------------------ */
/* Second pass: values (modelfile_values.c)                            */
/* ------------------------------------------------------------------ */

typedef enum joint_form { FORM_NONE, FORM_AXIS, FORM_DH, FORM_MDH } joint_form;

const entry *twf_mf_find_entry(const section *s, const char *key);
/* Exactly n finite numbers, separated by blanks. what names the value in
 * messages, e.g. "axis of joint j1". Returns 0 or -1 (error recorded). */
int twf_mf_parse_numbers(parse_ctx *c, const entry *e, const char *what,
                         double *out, size_t n);
/* The plausible range of values read (TWF_READ_*_MAX, campaign.h): n
 * values of entry e, si[k] the SI value of field first + k, v[k] its value
 * in unit (a unit name, "" for a scale). Returns 0 or -1 (error recorded
 * at the field). */
typedef enum mf_range { RANGE_LENGTH, RANGE_ANGLE, RANGE_SCALE } mf_range;
int twf_mf_check_range(parse_ctx *c, const entry *e, const char *what,
                       mf_range kind, const double *v, const double *si,
                       size_t n, long first, const char *unit);
/* A pose section: position and exactly one rotation form. */
int twf_mf_parse_pose(parse_ctx *c, const section *s, twf_length_unit lu,
                      twf_angle_unit au, twf_pose *T);
const char *twf_mf_form_name(joint_form f);
/* Which geometry a joint section gives, and the line that first says so. */
int twf_mf_joint_form_of(parse_ctx *c, const section *s, joint_form *form,
                         const entry **first);
/* Everything of a joint except its geometry. */
int twf_mf_parse_joint_common(parse_ctx *c, const section *s,
                              twf_length_unit lu, twf_angle_unit au,
                              twf_joint *j);
int twf_mf_parse_joint_axis(parse_ctx *c, const section *s,
                            twf_length_unit lu, twf_joint *j);
int twf_mf_parse_joint_dh(parse_ctx *c, const section *s, joint_form form,
                          twf_length_unit lu, twf_angle_unit au,
                          twf_joint_type type, twf_dh_row *row);
int twf_mf_parse_robot(parse_ctx *c, const section *s, twf_model *m);
/* mass and center of [mass JOINT] or [payload NAME] (SI). */
int twf_mf_parse_mass(parse_ctx *c, const section *s, twf_length_unit lu, double *mass,
                      double center[3]);
/* Largest compliance (rad per N m) and mass (kg) accepted: far beyond any
 * arm (common practice, no source). */
#define TWF_READ_COMPLIANCE_MAX 1.0
#define TWF_READ_MASS_MAX 1e5

#endif
