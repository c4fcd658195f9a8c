/* arms.h: the sample arms' DH tables (samples/, notes in DEVELOPERS.md),
 * built in memory so that library tests do not depend on the model-file
 * reader. Invented arms for tests and demos. */
#ifndef TWF_TEST_ARMS_H
#define TWF_TEST_ARMS_H

#include "twistfit.h"

typedef enum { ARM_TF6S, ARM_TF6P, ARM_TF7, ARM_TF4P, ARM_COUNT } test_arm;

/* A nominal model of the arm with its targets (offsets known) and limits.
 * Caller frees. */
twf_model *test_arm_model(test_arm arm);
/* A base pose metres away from the tracker, rotated about a skew axis. */
void test_tracker_base(twf_pose *B);
/* An invented mass model for any arm: body i of 60 / (i + 1) kg centred
 * between its joint's point and the next (off the line by a few cm), and
 * two payloads, "gripper" (12.5 kg) and "part" (31 kg). */
void test_arm_add_masses(twf_model *m);

#endif
