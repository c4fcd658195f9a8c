/*
 * twistfit.h: the public interface of libtwistfit, the calibration core of
 * twistfit (product-of-exponentials kinematic calibration of serial arms).
 *
 * Copyright (C) 2026 the twistfit developers. GPL-3.0-or-later.
 *
 * Rules that hold for every function below unless its comment says otherwise:
 *
 *  - Units: everything in memory is SI, metres and radians. Files declare
 *    their own units and the readers/writers convert once at the edge.
 *  - Frames: "base" is the robot base frame the model is written in,
 *    "flange" the tool flange frame, "tracker" the measuring instrument's
 *    frame. A pose T = (R, p) maps flange (or child) coordinates to the
 *    parent frame: x_parent = R x_child + p. Rotations are row-major 3x3.
 *  - Twists are S = (w, v), angular part first (see DEVELOPERS.md).
 *  - Ownership: an object returned by a *_alloc or *_read function belongs
 *    to the caller, who releases it with the matching *_free; *_free(NULL)
 *    is a no-op. Pointers passed in are borrowed for the call only.
 *  - Errors: functions return a twf_status; on failure they fill the
 *    twf_error passed in (which may be NULL) with what went wrong, where in
 *    the input, and a hint. The library never prints, exits or aborts, and
 *    keeps no global state.
 */
#ifndef TWISTFIT_H
#define TWISTFIT_H

/* One header per module, in dependency order. */

#include "twistfit/common.h"
#include "twistfit/se3.h"
#include "twistfit/model.h"
#include "twistfit/limits.h"
#include "twistfit/campaign.h"
#include "twistfit/io.h"
#include "twistfit/urdf.h"
#include "twistfit/errmodel.h"
#include "twistfit/register.h"
#include "twistfit/accuracy.h"
#include "twistfit/asbuilt.h"
#include "twistfit/links.h"
#include "twistfit/pattern.h"
#include "twistfit/compliance.h"
#include "twistfit/calib.h"
#include "twistfit/simulate.h"
#include "twistfit/plan.h"
#include "twistfit/apply.h"

#endif /* TWISTFIT_H */
