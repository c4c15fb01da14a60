/* SPDX-License-Identifier: MIT */
/* Rigid transforms, camera poses, and the weighted rigid fit
 * (Kabsch 1976 / Umeyama 1991) that checks lifted matches of a static scene against a
 * known camera motion — or estimates that motion.
 *
 * Lifting itself is done by sinew_matches_build (flow/match.h) when depth maps and
 * intrinsics are given; the rules are documented there and in docs/methods.md
 * "Lifting to 3-D". */
#ifndef SINEW_RIGID_H
#define SINEW_RIGID_H

#include "flow/core.h"

#ifdef __cplusplus
extern "C" {
#endif

/* A rigid transform y = R x + t (R row-major 3x3, t in metres). */
typedef struct sinew_rigid {
    double R[9];
    double t[3];
} sinew_rigid;

/* Identity transform. */
void sinew_rigid_identity(sinew_rigid *T);
/* y = T x (y may alias x). */
void sinew_rigid_apply(const sinew_rigid *T, const double x[3], double y[3]);
/* y = R x, the rotation alone, e.g. for normals (y may alias x). */
void sinew_rigid_rotate(const sinew_rigid *T, const double x[3], double y[3]);
/* A pose as sequence.json and the run frames store it (3x4 row-major [R | t]) and
 * back. */
void sinew_rigid_from_pose(sinew_rigid *T, const double pose[12]);
void sinew_rigid_to_pose(double pose[12], const sinew_rigid *T);
/* Inverse transform. */
void sinew_rigid_invert(const sinew_rigid *T, sinew_rigid *inv);
/* c = a * b (apply b first). c may alias a or b. */
void sinew_rigid_compose(const sinew_rigid *a, const sinew_rigid *b, sinew_rigid *c);
/* Difference between two transforms: translation distance |ta - tb| (metres) and the
 * rotation angle of Ra Rb^T (degrees). Either output may be NULL. */
void sinew_rigid_distance(const sinew_rigid *a, const sinew_rigid *b, double *dt, double *deg);

/* Read a 4x4 homogeneous matrix (16 numbers, row-major, blanks/CR/LF/commas) such as a
 * camera-to-world pose file. The last row must be 0 0 0 1 and the rotation part
 * orthonormal within 1e-3; otherwise SINEW_EVALUE naming the file. */
int sinew_rigid_load(sinew_ctx *ctx, sinew_rigid *T, const char *path);

/* Relative motion from camera-to-world poses: the transform taking camera-0
 * coordinates to camera-1 coordinates, T = inv(P1) * P0. */
void sinew_rigid_relative(const sinew_rigid *pose0, const sinew_rigid *pose1, sinew_rigid *T);

/* Weighted least-squares rigid fit (no scale): the (R, t) minimising
 * sum_i w_i |R src_i + t - dst_i|^2, via the SVD of the weighted cross-covariance with
 * the reflection fix (Kabsch 1976; Umeyama 1991). Points are read as
 * src[i * stride + 0..2], dst[i * stride + 0..2], weights as weight[i * stride]
 * (weight may be NULL = all 1; negative or non-finite weights are EVALUE), so rows of
 * a match table can be passed directly. Sums in double, serial (deterministic).
 * *rms (may be NULL) receives the weighted RMS residual in metres. Returns SINEW_EVALUE
 * if fewer than 3 points have positive weight or the points are (nearly) collinear. */
int sinew_rigid_fit(sinew_ctx *ctx, sinew_rigid *T, double *rms, const float *src, const float *dst,
                    const float *weight, size_t n, size_t stride);

#ifdef __cplusplus
}
#endif
#endif
