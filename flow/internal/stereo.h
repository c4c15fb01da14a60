/* SPDX-License-Identifier: MIT */
/* Private: the rig validation shared by the calibration reader (flow/stereo_geom.c) and
 * the rectification (flow/stereo_rectify.c). */
#ifndef SINEW_INTERNAL_STEREO_H
#define SINEW_INTERNAL_STEREO_H

#include "flow/stereo.h"

/* Validate a form-2 rig read from `what` (a path, for messages) and orthonormalise its R
 * in place: cameras (sinew_camera_check), R a rotation, |T| in [1e-6, 100] m, a
 * horizontal baseline with the right camera on the right. SINEW_OK or SINEW_EVALUE with
 * one message naming `what`. */
int sinew__stereo_rig_check(sinew_ctx *ctx, sinew_stereo_rig *rig, const char *what);

#endif
