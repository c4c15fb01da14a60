/* SPDX-License-Identifier: MIT */
/* Pinhole camera intrinsics with optional Brown–Conrady lens distortion: loading
 * (JSON, plain 3x3 matrix text, values), validation, rescaling to another image size,
 * distortion removal by iterative inversion, back-projection and projection.
 *
 * Conventions (see docs/formats.md "Intrinsics files" and docs/methods.md "Lifting to
 * 3-D"): pixel coordinates (u, v) have x right, y down and pixel centres at integers, so
 * an image of width W spans u in [-0.5, W - 0.5]. Camera coordinates are x right, y down,
 * z forward (metres). The distortion model maps undistorted normalised coordinates
 * (x, y) = (X/Z, Y/Z) to distorted ones, with r^2 = x^2 + y^2:
 *   xd = x (1 + k1 r^2 + k2 r^4 + k3 r^6) + 2 p1 x y + p2 (r^2 + 2 x^2)
 *   yd = y (1 + k1 r^2 + k2 r^4 + k3 r^6) + p1 (r^2 + 2 y^2) + 2 p2 x y
 * and then u = fx xd + cx, v = fy yd + cy (zero skew). */
#ifndef SINEW_CAMERA_H
#define SINEW_CAMERA_H

#include "flow/core.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Intrinsics: a plain value type. width/height are the calibration image size in
 * pixels (0 = unknown, e.g. from a bare 3x3 matrix file: then no rescaling is done).
 * All distortion coefficients zero = ideal pinhole. */
typedef struct sinew_camera {
    double fx, fy;     /* focal lengths in pixels, > 0 */
    double cx, cy;     /* principal point in pixels (pixel centres at integers) */
    int width, height; /* calibration image size in pixels; 0 = unknown */
    double k1, k2, k3; /* radial coefficients */
    double p1, p2;     /* tangential coefficients */
} sinew_camera;

/* Fill a pinhole camera without distortion (no validation; see sinew_camera_check). */
void sinew_camera_init(sinew_camera *cam, double fx, double fy, double cx, double cy, int width,
                       int height);

/* Validate: finite values, fx > 0, fy > 0, width/height >= 0 and both zero or both
 * positive, |k|, |p| below 1e3. `what` names the source (file path or "--intrinsics")
 * for the message. Returns SINEW_OK or SINEW_EVALUE ("WHAT: fx must be > 0 (got 0)"). */
int sinew_camera_check(sinew_ctx *ctx, const sinew_camera *cam, const char *what);

/* True if any distortion coefficient is non-zero. */
int sinew_camera_has_distortion(const sinew_camera *cam);

/* Load intrinsics from a file. The content decides the format:
 *   JSON object (first non-blank character '{'): keys "fx" "fy" "cx" "cy" (required),
 *     "width" "height" (optional, calibration size), "k1" "k2" "p1" "p2" "k3" (optional,
 *     default 0), "comment" (ignored). Unknown keys are SINEW_ECONFIG (catches typos).
 *   Otherwise a plain 3x3 matrix: nine numbers separated by blanks, commas, semicolons
 *     or brackets, row-major [fx s cx; 0 fy cy; 0 0 1]; skew s must be 0 and the last row
 *     0 0 1; width/height unknown. Lines starting with '#' are comments.
 * Errors name the file: EIO (cannot read), EFORMAT (malformed), ECONFIG (bad keys),
 * EVALUE (hostile values, e.g. fx = 0, negative, NaN). Files above 1 MiB are ELIMIT. */
int sinew_camera_load(sinew_ctx *ctx, sinew_camera *cam, const char *path);

/* Parse intrinsics from a string, either "fx,fy,cx,cy" or "fx,fy,cx,cy,width,height"
 * (commas or blanks); for command lines. `what` names the source for messages. */
int sinew_camera_parse(sinew_ctx *ctx, sinew_camera *cam, const char *text, const char *what);

/* Write intrinsics as a JSON object file (the format sinew_camera_load reads); atomic. */
int sinew_camera_save(sinew_ctx *ctx, const char *path, const sinew_camera *cam);

/* Intrinsics for images of width x height. If the calibration size is unknown (0) or
 * equal, *out = *in with width/height set. Otherwise the camera is rescaled with
 * sx = width / in->width, sy = height / in->height, keeping pixel *edges* aligned (the
 * image spans [-0.5, W - 0.5] with centres at integers):
 *   fx' = sx fx,  cx' = sx (cx + 0.5) - 0.5   (same for y)
 * Distortion coefficients act on normalised coordinates and are unchanged. Refuses
 * (SINEW_ESIZE, naming `what`) when the aspect ratios differ by more than 1 % — that
 * is a crop, not a resize, and cannot be corrected by scaling. */
int sinew_camera_fit(sinew_ctx *ctx, sinew_camera *out, const sinew_camera *in, int width,
                     int height, const char *what);

/* A plausibility check of intrinsics fitted to width x height images: 1 (and a message
 * into msg, size n, naming both sizes) when the principal point lies more than a quarter
 * of the image size from the image centre in x or y — e.g. a calibration for 1280x960
 * frames given without its size and used on 640x480 frames; 0 otherwise. A warning, not
 * an error: off-centre crops exist. The 25 % margin is our choice (real lenses put the
 * principal point within a few percent of the centre, common practice). */
int sinew_camera_centre_check(const sinew_camera *cam, int width, int height, char *msg, size_t n);

/* Apply the distortion model to undistorted normalised coordinates. */
void sinew_camera_distort(const sinew_camera *cam, double x, double y, double *xd, double *yd);

/* Remove distortion: find (x, y) with distort(x, y) = (xd, yd) by Newton iteration with
 * the analytic Jacobian (at most 20 steps, stop when the residual is below 1e-12 in
 * normalised units), starting from (xd, yd). Returns 1 if converged, 0 otherwise (then
 * *x, *y hold the last iterate). Without distortion it returns (xd, yd) exactly.
 * Accuracy: see sinew_camera_roundtrip_error and docs/methods.md. */
int sinew_camera_undistort(const sinew_camera *cam, double xd, double yd, double *x, double *y);

/* Pixel (u, v) as observed (distorted) -> undistorted normalised ray (x, y, 1).
 * Returns 1 if the inversion converged. */
int sinew_camera_pixel_to_ray(const sinew_camera *cam, double u, double v, double ray[3]);

/* Back-project pixel (u, v) with depth z (metres along the optical axis) to camera
 * coordinates X = z * ray(u, v). Returns 1 if the distortion inversion converged. */
int sinew_camera_unproject(const sinew_camera *cam, double u, double v, double z, double X[3]);

/* Project a camera-frame point to a pixel (with distortion). Returns 0 (and leaves u, v
 * untouched) if X[2] <= 0 or X is not finite, 1 otherwise. */
int sinew_camera_project(const sinew_camera *cam, const double X[3], double *u, double *v);

/* Measure the distortion-removal accuracy over the image: for every `step`-th pixel
 * (u, v) of the width x height grid (and the last row/column), undistort, re-distort and
 * reproject; *max_px receives the largest pixel distance to (u, v) (0 without
 * distortion), *failures the number of non-converged inversions (may be NULL). Needs
 * width/height > 0 (the camera's own size if the arguments are 0). */
int sinew_camera_roundtrip_error(sinew_ctx *ctx, double *max_px, long *failures,
                                 const sinew_camera *cam, int width, int height, int step);

#ifdef __cplusplus
}
#endif
#endif
