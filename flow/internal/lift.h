/* SPDX-License-Identifier: MIT */
/* Private: the per-pixel lifting rules shared by flow/match.c and flow/lift.c. */
#ifndef SINEW_INTERNAL_LIFT_H
#define SINEW_INTERNAL_LIFT_H

#include "flow/camera.h"
#include "flow/core.h"
#include "flow/match.h"

/* Result of lifting one correspondence. */
typedef struct sinew__lift_point {
    double X0[3], X1[3]; /* camera-0 and camera-1 points, metres */
    double n0[3], n1[3]; /* unit normals (zero unless p->normals) */
} sinew__lift_point;

/* Lift source pixel (x, y) with target (u1, v1) (inside [0, W-1] x [0, H-1]) using z
 * maps d0, d1 (SINEW_F32, NaN = invalid) and the camera. Returns SINEW_REJECT_COUNT
 * when kept (and fills *lp), otherwise the first failing rejection reason among
 * DEPTH0_INVALID .. NORMAL. Pure and thread-safe. */
int sinew__lift_eval(const sinew_image *d0, const sinew_image *d1, const sinew_camera *cam,
                     const sinew_match_params *p, int x, int y, double u1, double v1,
                     sinew__lift_point *lp);

#endif
