/* twistfit/asbuilt.h: as-built geometry against nominal.
 * Part of the public interface of libtwistfit; include <twistfit.h>,
 * whose opening comment states the rules (units, frames, ownership,
 * errors) that hold for every declaration here. */
#ifndef TWISTFIT_ASBUILT_H
#define TWISTFIT_ASBUILT_H

#include "twistfit/common.h"
#include "twistfit/se3.h"
#include "twistfit/model.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ------------------------------------------------------------------ */
/* As-built geometry against nominal                                   */
/* ------------------------------------------------------------------ */

/* Deviation of one as-built joint line from its nominal line, both in the
 * datum base frame (see twf_asbuilt_align). */
typedef struct twf_joint_deviation {
  /* Lines are compared at logged zero (q = 0, so theta = offset), where
   * the data determine them whichever redundant parameters were fixed. */
  double angle_rad;    /* angle between the as-built and nominal directions */
  double distance_m;   /* distance from the nominal reference point to the
                          as-built line (revolute); 0 for prismatic joints,
                          whose line position has no meaning */
  /* Rotation about the as-built line that carries a downstream feature of
   * the nominal arm (a later joint direction, else a later line's point,
   * else with full-pose data a flange axis) onto the as-built one, rad:
   * the order-independent joint offset. NaN where no feature shows it (the
   * last joint measured with points only: the targets absorb it) and for
   * prismatic joints. */
  double offset;
  double offset_raw;   /* as-built minus nominal offset parameter, rad or m:
                          depends on which redundant parameters were fixed */
  double scale;        /* as-built minus nominal joint scale */
  double direction[3]; /* as-built unit direction, datum frame */
  double point[3];     /* as-built line's point closest to the nominal
                          reference point, datum frame, m */
} twf_joint_deviation;

typedef struct twf_asbuilt_comparison {
  twf_pose datum;          /* G applied to the as-built model: its old base
                              frame expressed in the datum frame */
  double datum_rms_m;      /* RMS distance of the aligned line points */
  int settled;             /* 0: the datum rule did not reach its fixed point
                              (the lines leave the frame partly free) */
  size_t n_joints;
  twf_joint_deviation *joints; /* owned; free with twf_asbuilt_comparison_clear */
  /* The flange at logged zero. Its rotation is determined by full-pose
   * data only, its position only when the target offsets were not fitted
   * (they trade off against it): the calibration sets what the data cannot
   * tell to NaN. */
  double home_angle_rad;   /* rotation between the as-built and nominal flange at logged zero */
  double home_distance_m;  /* distance between their origins, m */
  size_t n_targets;
  /* owned; n_targets x 3: as-built minus nominal position of each target
   * at logged zero, datum frame, m (NaN where the nominal offset is
   * unknown): determined by point data too */
  double *target_change_m;
} twf_asbuilt_comparison;

void twf_asbuilt_comparison_clear(twf_asbuilt_comparison *c);

/* The datum rule: find the rigid motion G that best aligns the as-built
 * joint lines at logged zero with the nominal ones (least squares over two
 * points per revolute line, the one nearest the nominal reference point and
 * one a quarter of the reach along the line, re-chosen until they settle;
 * when every revolute line is parallel, the targets at logged zero are
 * added to pin the translation along them), re-express asbuilt in that
 * frame (S <- Ad_G S, points <- G q, M <- G M) and base_in_tracker <-
 * B G^-1, so that every prediction is unchanged, then compare line by line.
 * full_pose: the data had 6-D rows (a flange axis may then show the last
 * joint's offset). The result does not depend on which redundant
 * parameters the calibration fixed. nominal and asbuilt must have the same
 * joints and targets. out is filled (clear it with
 * twf_asbuilt_comparison_clear). */
twf_status twf_asbuilt_align(const twf_model *nominal, twf_model *asbuilt,
                             twf_pose *base_in_tracker, int full_pose,
                             twf_asbuilt_comparison *out, twf_error *err);


/* The same comparison in the as-built model's own base frame, without the
 * datum rule (datum identity, asbuilt not modified): for a fit that
 * changed no joint line (neither tilts nor shifts), where the frame is
 * already fixed by the unchanged lines. */
twf_status twf_asbuilt_compare(const twf_model *nominal, const twf_model *asbuilt,
                               int full_pose, twf_asbuilt_comparison *out, twf_error *err);

/* Keep the history of an as-built model's record: move the metadata keys
 * without a record prefix (the record of the run that wrote the file) to
 * "recordN.KEY", N one more than the highest record already kept, in
 * place (the order stays: earlier records first), so that a new run can
 * set its own unprefixed record. *record_no (may be NULL) receives N, or 0
 * when there was nothing to keep. TWF_ERR_INVALID (model unchanged) when a
 * prefixed key would not fit TWF_NAME_MAX. */
twf_status twf_asbuilt_record_push(twf_model *m, long *record_no, twf_error *err);

#ifdef __cplusplus
}
#endif

#endif /* TWISTFIT_ASBUILT_H */
