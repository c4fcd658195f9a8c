/* twistfit/campaign.h: measurement campaigns.
 * Part of the public interface of libtwistfit; include <twistfit.h>,
 * whose opening comment states the rules (units, frames, ownership,
 * errors) that hold for every declaration here. */
#ifndef TWISTFIT_CAMPAIGN_H
#define TWISTFIT_CAMPAIGN_H

#include <stdint.h>

#include "twistfit/common.h"
#include "twistfit/se3.h"
#include "twistfit/model.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ------------------------------------------------------------------ */
/* Limits of every reader (campaigns, model files, base pose files)    */
/* ------------------------------------------------------------------ */

/* Largest input file read by default, in bytes (2 GiB): a campaign of
 * 200,000 poses and three targets is about 60 MB. Readers refuse larger
 * files (TWF_ERR_VALUE) before their memory grows without bound, as it
 * would reading /dev/zero or /dev/urandom; the limit is an option. */
#define TWF_INPUT_SIZE_DEFAULT (2ULL << 30)
/* Longest line of a campaign file, in bytes, without its line end.
 * Reading stops at a longer line (TWF_ERR_SYNTAX), so that an endless line
 * neither spins nor grows memory. */
#define TWF_CAMPAIGN_LINE_MAX 65536
/* Plausible range of the values every reader accepts (campaigns, model
 * files, base pose files), in SI: a length (coordinate, joint point,
 * prismatic value, offset, DH length) beyond 1 km, an angle (joint value,
 * offset, limit, DH angle, roll-pitch-yaw) beyond 1e4 rad (about 1600
 * turns) or a joint scale beyond 1e6 in magnitude is a slip (a unit, an
 * exponent, a column) and is refused at its line and column
 * (TWF_ERR_VALUE). Far beyond any arm: common practice, no source. Such
 * values would otherwise reach forward kinematics as non-finite results
 * or the registration as a singular problem. */
/* What a reader read: the size and the SHA-256 digest of exactly the
 * bytes it parsed (not of the file opened again, which may have been
 * replaced since; pipes and devices get one too). */
typedef struct twf_input_digest {
  unsigned long long size;  /* bytes read */
  char sha256[65];          /* 64 lower-case hex digits and a NUL; "" when
                               nothing was read */
} twf_input_digest;

#define TWF_READ_LENGTH_MAX 1e3
#define TWF_READ_ANGLE_MAX 1e4
#define TWF_READ_SCALE_MAX 1e6

/* ------------------------------------------------------------------ */
/* Measurement campaigns (CSV, see twistfit-data(5))                   */
/* ------------------------------------------------------------------ */

/* Which use a measurement is for: fitting the model, or the held-out check
 * set that the solver never sees (its accuracy is reported separately). */
typedef enum twf_meas_set {
  TWF_SET_FIT = 0,
  TWF_SET_CHECK = 1
} twf_meas_set;

/* Most poses of a campaign, most 6-D rows, and the last source line a
 * measurement records: the row below keeps its indices and its line in 32
 * bits. The readers refuse a larger campaign (TWF_ERR_VALUE). */
#define TWF_CAMPAIGN_COUNT_MAX 4294967295u

/* One measured target at one pose: 56 bytes, so that a campaign of
 * millions of rows stays small. The orientation of a 6-D row is not in
 * the row but in the campaign's side array (quat_slot): read it with
 * twf_campaign_meas_quat, give it with twf_campaign_meas_set_quat. */
typedef struct twf_measurement {
  uint32_t pose;       /* index into the campaign's poses */
  uint32_t target;     /* index of the target in the model's targets */
  double pos[3];       /* measured target position, metres, tracker frame */
  double sigma;        /* standard deviation of each coordinate, metres;
                          0 = not given (the caller picks a default) */
  uint32_t line;       /* source line (in the points file for the two-file
                          form), 0 when not read from a file */
  /* 1 + the index in the campaign's meas_quat of this row's quaternion
   * when has_orientation is 1; 0 for a point row. */
  uint32_t quat_slot;
  uint8_t set;         /* a twf_meas_set */
  /* 1 for a 6-D row: its quaternion is the orientation of the flange frame
   * in the tracker frame (the rotation part of the flange pose in the
   * tracker). Set through twf_campaign_meas_set_quat. */
  uint8_t has_orientation;
} twf_measurement;

/* A campaign: the poses the arm was driven to, with the joint values the
 * controller logged, and the measurements taken there. Poses keep the order
 * of their first appearance in the file (the joints file for the two-file
 * form); measurements keep the order of the rows. */
typedef struct twf_campaign {
  size_t n_joints;                /* = the model's n_joints, in model order */
  size_t n_poses;
  char (*pose_ids)[TWF_NAME_MAX]; /* n_poses ids, NUL-terminated, unique */
  double *q;          /* n_poses x n_joints logged joint values, SI (rad for
                         revolute, m for prismatic), row-major q[p*n_joints+j] */
  long *pose_lines;   /* n_poses source lines (first row of the pose; in the
                         joints file for the two-file form), 0 if none */
  long *pose_payload; /* n_poses payload carried, index into the model's
                         payloads, -1 none; NULL when no pose carries one
                         (read it through twf_campaign_payload) */
  size_t n_meas;
  twf_measurement *meas;
  int has_orientation_any; /* some measurement has has_orientation */
  /* Quaternions (w x y z, unit) of the 6-D rows, n_quat of them, in the
   * order they were given; row i's is meas_quat[meas[i].quat_slot - 1].
   * NULL when there are none. Read through twf_campaign_meas_quat. */
  size_t n_quat, cap_quat;
  double (*meas_quat)[4];
  /* Instrument stations (the optional "station" column of
   * twistfit-data(5)): each station is one set-up of the instrument with
   * its own frame, so each has its own base pose. n_stations 0: no station
   * column, every pose seen from the one station (station_names and
   * pose_station NULL); else station_names holds the n_stations names in
   * the order of first appearance and pose_station[p] the station of pose
   * p. Read them through twf_campaign_station_count and
   * twf_campaign_pose_station. */
  size_t n_stations;
  char (*station_names)[TWF_NAME_MAX];
  size_t *pose_station;
  /* The files read, in the order read: the one file, or the joints file
   * and the points file; n_inputs 0 for a campaign not read from files. */
  size_t n_inputs;
  twf_input_digest inputs[2];
} twf_campaign;

/* Most stations of one campaign: a measuring day moves the instrument a
 * few times, and the error model holds 6 base parameters per station. */
#define TWF_STATIONS_MAX 32

/* Stations of c: n_stations, or 1 when c has no station column. */
size_t twf_campaign_station_count(const twf_campaign *c);
/* Station index of pose p of c (0 without a station column). */
size_t twf_campaign_pose_station(const twf_campaign *c, size_t p);
/* Give c the stations names[0..n) (n from 1 to TWF_STATIONS_MAX, each
 * name valid for twf_station_name_check and distinct) and each pose its
 * station station_of_pose[p] < n (copied). Replaces any stations c had.
 * TWF_ERR_INVALID (names, indices, count), TWF_ERR_NOMEM. */
twf_status twf_campaign_set_stations(twf_campaign *c, size_t n,
                                     const char (*names)[TWF_NAME_MAX],
                                     const size_t *station_of_pose,
                                     twf_error *err);
/* 0 when name is a valid station name: 1 to TWF_NAME_MAX - 1 bytes, letters,
 * digits, '_', '-' and '.', starting with a letter or a digit (it becomes
 * part of parameter names and of base pose file sections); else -1. */
int twf_station_name_check(const char *name);

/* How to read a campaign; get the defaults from
 * twf_campaign_default_options() and change fields. */
typedef struct twf_campaign_options {
  /* 1: read lengths (angles) in length_unit (angle_unit) whatever the file
   * declares (a differing declaration gives a warning); 0: use the file's
   * "# units:" line, else millimetres (degrees). */
  int length_from_caller;
  int angle_from_caller;
  twf_length_unit length_unit; /* default TWF_LENGTH_MM */
  twf_angle_unit angle_unit;   /* default TWF_ANGLE_DEG */
  /* 0: joint values outside the model's limits give one warning per joint;
   * 1: they are an error (TWF_ERR_LIMIT) at the first such value. */
  int limits_are_errors;
  /* Slack on the limits, SI of the joint (rad or m); default 1e-9. */
  double limit_tolerance;
  /* Largest file read, bytes, per file; default TWF_INPUT_SIZE_DEFAULT
   * (0 means the default too). */
  unsigned long long max_input_size;
} twf_campaign_options;

twf_campaign_options twf_campaign_default_options(void);

/* A zero-filled campaign with room for n_poses poses and n_meas
 * measurements (n_poses and n_meas set; point rows; set fit), for
 * simulators and tests. NULL when out of memory or when n_poses exceeds
 * TWF_CAMPAIGN_COUNT_MAX. */
twf_campaign *twf_campaign_alloc(size_t n_joints, size_t n_poses,
                                 size_t n_meas);
void twf_campaign_free(twf_campaign *c);
/* The orientation of measurement i of c (i < n_meas), unit quaternion
 * w x y z of the flange frame in the tracker frame: the campaign's for a
 * 6-D row, (1 0 0 0) for a point row. The pointer is valid until c
 * changes. */
const double *twf_campaign_meas_quat(const twf_campaign *c, size_t i);
/* Make measurement i of c a 6-D row with the orientation quat (w x y z,
 * copied as given: normalise it first), in the row's slot of the side
 * array, a new slot when the row had none. Sets has_orientation and
 * has_orientation_any. TWF_ERR_INVALID (c, i, quat NULL or more than
 * TWF_CAMPAIGN_COUNT_MAX 6-D rows), TWF_ERR_NOMEM. */
twf_status twf_campaign_meas_set_quat(twf_campaign *c, size_t i,
                                      const double quat[4]);
/* The payload carried at pose (index into the model's payloads), -1 for
 * none (also when c has no payload column). */
long twf_campaign_payload(const twf_campaign *c, size_t pose);
/* Give c a payload per pose, all -1 (none), unless it has them already.
 * TWF_ERR_NOMEM. */
twf_status twf_campaign_payload_alloc(twf_campaign *c);

/* Read the one-file form: one row per measurement with pose id, target,
 * one column per joint of m, x y z, optional qw qx qy qz, sigma, set,
 * station (per pose: n_stations, station_names, pose_station) and
 * payload (a name of m's payloads, empty for none; the same on every row
 * of a pose; in the joints file for the two-file form).
 * m (borrowed for the call) gives the joint names, types and limits and
 * the target names. opt may be NULL for the defaults; w may be NULL.
 * Returns the campaign (caller frees) or NULL with err filled: file, line,
 * column (1-based field, its name in the message) and a hint. Statuses:
 * TWF_ERR_IO (cannot read), TWF_ERR_SYNTAX (quoting, field count, units
 * line), TWF_ERR_MISSING (empty file, no data, missing column or field),
 * TWF_ERR_UNKNOWN (column or target), TWF_ERR_DUPLICATE (column, pose and
 * target), TWF_ERR_VALUE (number, quaternion, sigma, set, a pose repeated
 * with other joint values), TWF_ERR_UNITS, TWF_ERR_LIMIT (only with
 * limits_are_errors), TWF_ERR_INVALID (arguments), TWF_ERR_NOMEM. */
twf_campaign *twf_campaign_read(const char *path, const twf_model *m,
                                const twf_campaign_options *opt,
                                twf_warnings *w, twf_error *err);

/* Read the two-file form: joints_path holds pose id, one column per joint
 * and optionally set and station (per pose); points_path holds pose id, target, x y z,
 * optional quaternion, sigma and set (per measurement, it takes precedence
 * over the pose's). Joined on pose id: points whose pose the joints file
 * lacks, and poses without points, are errors (TWF_ERR_MISSING) that list
 * the ids. Otherwise as twf_campaign_read; each file may declare its own
 * units. */
twf_campaign *twf_campaign_read_pair(const char *joints_path,
                                     const char *points_path,
                                     const twf_model *m,
                                     const twf_campaign_options *opt,
                                     twf_warnings *w, twf_error *err);

/* Read a joints file alone (the first file of the two-file form: pose id,
 * one column per joint, optional set): a campaign of poses without
 * measurements (n_meas = 0, meas may be NULL), e.g. to evaluate forward
 * kinematics at logged poses. Units, limits, errors and warnings as for
 * twf_campaign_read_pair. */
twf_campaign *twf_campaign_read_joints(const char *joints_path,
                                       const twf_model *m,
                                       const twf_campaign_options *opt,
                                       twf_warnings *w, twf_error *err);

/* Numbers are read and written in the "C" locale whatever the caller's
 * (see "Locale" in io.h); the decimal comma of a ';'-delimited file is
 * the format's, not the locale's. */

/* Write c in the one-file form, in the given units (declared in a
 * "# units:" line), numbers with 17 significant digits so that reading
 * back gives the same values to rounding. Rows are grouped by pose in pose
 * order (measurement order kept within a pose), so the poses read back in
 * the same order. Every pose needs at least one measurement and indices
 * must be in range (else TWF_ERR_INVALID); TWF_ERR_IO on a write error. */
twf_status twf_campaign_write(const twf_campaign *c, const twf_model *m,
                              twf_length_unit length_unit,
                              twf_angle_unit angle_unit, FILE *out,
                              twf_error *err);


#ifdef __cplusplus
}
#endif

#endif /* TWISTFIT_CAMPAIGN_H */
