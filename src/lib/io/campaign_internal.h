/* campaign_internal.h: the campaign reader's state, shared by the files
 * that read campaigns (campaign_read.c drives; campaign_header.c maps the
 * header row and the units declaration, campaign_fields.c converts fields,
 * campaign_pair.c holds the two-file form, campaign_limits.c checks joint
 * limits, campaign_ids.c hashes pose ids). Private to src/lib/io. */
#ifndef TWF_CAMPAIGN_INTERNAL_H
#define TWF_CAMPAIGN_INTERNAL_H

#include "csvstrict.h"

/* Accepted deviation of a quaternion's norm from 1: TWF_IO_QUAT_NORM_TOL
 * of io_internal.h, shared with the model and base pose readers. */
/* How many ids an error message lists before "and N more". */
#define LIST_IDS 5

#define NONE ((size_t)-1)

static inline int twf_creader_is_blank(char ch) { return ch == ' ' || ch == '\t'; }

/* ------------------------------------------------------------------ */
/* Column roles (campaign_header.c)                                    */
/* ------------------------------------------------------------------ */

enum col_role {
  COL_POSE, COL_TARGET, COL_JOINT, COL_X, COL_Y, COL_Z,
  COL_QW, COL_QX, COL_QY, COL_QZ, COL_SIGMA, COL_SET, COL_STATION, COL_PAYLOAD, COL_N
};

/* Reserved column names; COL_JOINT columns carry the model's joint names. */
extern const char *const twf_creader_role_name[COL_N];

typedef enum file_kind { KIND_ONE, KIND_JOINTS, KIND_POINTS } file_kind;

/* The role of a reserved column name, -1 for any other name. */
int twf_creader_reserved_role(const char *name);

/* ------------------------------------------------------------------ */
/* Pose ids (campaign_ids.c)                                           */
/* ------------------------------------------------------------------ */

/* Open-addressing hash of ids (indices into a names array), FNV-1a: a
 * campaign of 100,000 poses must not look ids up linearly. */
typedef struct twf_idmap {
  size_t cap;   /* power of two, 0 when empty */
  size_t *slot; /* index + 1, 0 = free */
} twf_idmap;

/* Index of s in names, NONE when absent. */
size_t twf_idmap_find(const twf_idmap *h, char (*names)[TWF_NAME_MAX],
                      const char *s);
/* Add names[index] (count = entries including it), keeping load <= 1/2.
 * Returns 0, -1 when out of memory. */
int twf_idmap_add(twf_idmap *h, char (*names)[TWF_NAME_MAX], size_t count,
                  size_t index);
/* "'a', 'b' and N more": the first LIST_IDS of count ids (ids[which[k]],
 * or ids[k] when which is NULL) into buf. */
void twf_creader_list_ids(char *buf, size_t n, char (*ids)[TWF_NAME_MAX],
                          const size_t *which, size_t count);

/* ------------------------------------------------------------------ */
/* The reader: columns, rows, the campaign being built                 */
/* ------------------------------------------------------------------ */

typedef struct creader {
  const twf_model *m;
  twf_campaign_options opt;
  twf_warnings *w;
  twf_error *err;
  twf_campaign *c;
  twf_io_c_locale loc;  /* the C locale while reading */
  /* the file being read */
  const char *path;
  file_kind kind;
  unsigned char delim;
  /* units declared by the file (a "# units:" line above the header) */
  long units_line;
  int decl_length, decl_angle;
  twf_length_unit length_unit;
  twf_angle_unit angle_unit;
  /* units the file is read in */
  twf_length_unit lu;
  twf_angle_unit au;
  size_t nh;
  char **hname;      /* header names */
  long col[COL_N];   /* 1-based field of each role, 0 when absent */
  long *jcol;        /* per joint: 1-based field, 0 when absent */
  double *qbuf;
  /* joints-bearing file, for the limit checks at the end */
  const char *jpath;
  twf_length_unit j_lu;
  twf_angle_unit j_au;
  long *jcol_saved;
  long jpose_col;
  /* builder */
  size_t cap_ids, cap_q, cap_lines, cap_meas, cap_pt, cap_set, cap_npts;
  size_t cap_payload;
  twf_idmap poses;
  long *pt_line;     /* cap poses x n_targets: line of (pose, target), 0 */
  int *pose_set;     /* two-file: set from the joints file, -1 none */
  size_t *pose_npts; /* two-file: points per pose */
  /* two-file: pose ids of the points file missing from the joints file */
  char (*unk)[TWF_NAME_MAX];
  size_t n_unk, cap_unk;
  twf_idmap unk_map;
  long unk_line;
  /* comment lines below the header that have the shape of a data row
   * (a pose id starting with '#'), for one warning per file */
  size_t n_rowlike;
  long rowlike_line;
  char rowlike_id[TWF_NAME_MAX];
  size_t cap_pst;    /* capacity of c->pose_station (campaign_station.c) */
} creader;

/* A joint value in the file's units to SI and back (units.c does the
 * conversion: one rule for every reader and writer). */
static inline double twf_creader_joint_to_si(const twf_joint *jt, double v,
                                             twf_length_unit lu,
                                             twf_angle_unit au)
{
  return jt->type == TWF_JOINT_PRISMATIC ? twf_length_to_si(v, lu)
                                         : twf_angle_to_si(v, au);
}
static inline double twf_creader_joint_from_si(const twf_joint *jt, double si,
                                               twf_length_unit lu,
                                               twf_angle_unit au)
{
  return jt->type == TWF_JOINT_PRISMATIC ? twf_length_from_si(si, lu)
                                         : twf_angle_from_si(si, au);
}

/* campaign_read.c: errors, the reader's life, one file, the rows */
twf_status twf_creader_nomem(creader *r);
/* An error about field col (1-based) of row; 0 = the row as a whole. */
twf_status twf_creader_error(creader *r, const twf_csv_row *row, long col,
                             twf_status st, const char *hint,
                             const char *fmt, ...)
    __attribute__((format(printf, 6, 7)));
const char *twf_creader_colname(const creader *r, long col);
/* Every entry point starts with begin (the C locale on this thread, so
 * the caller's cannot change what a number means) and ends with end,
 * which checks the limits, restores the caller's locale and hands over
 * the campaign (NULL on error). */
twf_status twf_creader_begin(creader *r, const twf_model *m,
                             const twf_campaign_options *opt,
                             twf_warnings *w, twf_error *err);
twf_campaign *twf_creader_end(creader *r, twf_status st);
/* Reset the per-file state and read path as kind. */
twf_status twf_creader_read_file(creader *r, const char *path, file_kind kind);
twf_status twf_creader_pose_add(creader *r, const char *id, const double *q,
                                long line, size_t *index);
/* Append ms, and quat (w x y z) to the side array when ms is a 6-D row. */
twf_status twf_creader_meas_add(creader *r, const twf_measurement *ms,
                                const double quat[4]);
/* The campaign's 32-bit counts (TWF_CAMPAIGN_COUNT_MAX): value, the
 * number of poses, of 6-D rows or a source line, must not exceed max;
 * else TWF_ERR_VALUE at row (may be NULL) naming what. max is
 * TWF_CAMPAIGN_COUNT_MAX in the readers (a parameter so that a test can
 * reach the limit). */
twf_status twf_creader_count_check(creader *r, const twf_csv_row *row,
                                   size_t value, size_t max, const char *what);
/* The row's line fits a measurement's 32-bit line. */
twf_status twf_creader_line_check(creader *r, const twf_csv_row *row);
/* A (pose, target) pair may appear once. */
twf_status twf_creader_pair_check(creader *r, const twf_csv_row *row,
                                  size_t pose, size_t target);

/* campaign_header.c */
/* A comment line of the layer: "# units: length=mm angle=deg" above the
 * header row; other comments are ignored. */
twf_status twf_creader_units_line(void *user, twf_csv_in *in, const char *p,
                                  const char *le);
twf_status twf_creader_map_header(creader *r, const twf_csv_in *in,
                                  const twf_csv_row *row);

/* campaign_fields.c: fields of a data row, in file units converted to SI */
twf_status twf_creader_check_nf(creader *r, const twf_csv_row *row);
twf_status twf_creader_field_id(creader *r, const twf_csv_row *row, long col,
                                char out[TWF_NAME_MAX], const char *what);
twf_status twf_creader_field_target(creader *r, const twf_csv_row *row,
                                    size_t *out);
twf_status twf_creader_field_joints(creader *r, const twf_csv_row *row,
                                    double *q);
/* The payload column of a row of pose (a joints-bearing row): the name
 * of one of the model's payloads or empty; every row of a pose agrees. */
twf_status twf_creader_field_payload(creader *r, const twf_csv_row *row,
                                     size_t pose, int first_row);
/* set: -1 when absent or empty. */
twf_status twf_creader_field_set(creader *r, const twf_csv_row *row, int *set);
/* The position, orientation (quat, (1 0 0 0) for a point row), sigma
 * and set of a row. */
twf_status twf_creader_field_meas(creader *r, const twf_csv_row *row,
                                  twf_measurement *ms, double quat[4], int *set);

/* A comment line p..le below the header with exactly the shape of a data
 * row: as many fields as the header, numbers where numbers belong. Counts
 * it for the warning of twf_creader_read_file. */
void twf_creader_rowlike_comment(creader *r, long line, const char *p,
                                 const char *le);

/* campaign_station.c: the optional station column (one per pose, in the
 * one-file form and the joints file): the station of pose, new_pose 1
 * when the row added it, else it must repeat the pose's station. */
twf_status twf_creader_field_station(creader *r, const twf_csv_row *row,
                                     size_t pose, int new_pose);

/* campaign_pair.c: rows of the two-file form */
twf_status twf_creader_row_joints(creader *r, const twf_csv_row *row);
twf_status twf_creader_row_points(creader *r, const twf_csv_row *row);

/* campaign_limits.c: joint values against the model's limits, and the
 * unit slips that put them outside */
twf_status twf_creader_check_limits(creader *r);
/* The spread of the measured points against the model's at the logged
 * joint values: a unit slip of the lengths or angles (TWF_ERR_UNITS). */
twf_status twf_creader_check_scale(creader *r);

#endif
