/* SPDX-License-Identifier: MIT */
/* Dense disparity of a rectified stereo pair by semi-global matching (Hirschmüller,
 * PAMI 30(2), 2008) on census costs (Zabih & Woodfill, ECCV 1994), with sub-pixel
 * refinement, a left-right consistency check that speaks the flow check's vocabulary
 * (flow/check.h mask bits), a per-pixel confidence, holes filled from the background
 * side, and disparity -> depth. Method, constants and measurements: docs/methods.md
 * "Stereo"; files: docs/formats.md "Disparity and stereo calibration".
 *
 * Convention (Middlebury and KITTI): a left pixel (x, y) with disparity d > 0 matches
 * the right pixel (x - d, y); a right pixel (x, y) with disparity d matches the left
 * pixel (x + d, y). Disparities are in pixels. */
#ifndef SINEW_STEREO_H
#define SINEW_STEREO_H

#include <stdint.h>

#include "flow/check.h"
#include "flow/camera.h"
#include "flow/core.h"
#include "flow/synth.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Parameters; sinew_stereo_params_default fills the documented defaults (or use
 * sinew_stereo_preset). Penalties are in census units (differing bits of a 5x5 census
 * window, 0..24). */
typedef struct sinew_stereo_params {
    int min_disparity;    /* smallest disparity searched, px (may be negative). Default 0 */
    int num_disparities;  /* number searched (1..1024); 0 = automatic: width / 6 rounded up
                             to a multiple of 16, at most 256. Default 0 */
    int paths;            /* aggregation directions: 4 (horizontal, vertical) or 8 (and
                             diagonals). Default 8 */
    int p1;               /* penalty for a disparity change of 1 px between neighbours.
                             Default 20 */
    int p2;               /* penalty for larger changes. Default 100 */
    double p2_edge;       /* intensity-adaptive P2 (Hirschmueller 2008): across a left luma
                             step |dI| > p2_edge gray levels (0..255) the penalty is
                             max(p1, p2 * p2_edge / |dI|); 0 = constant P2. Default 4 */
    double lr_tolerance;  /* left-right check: |dL(x) - dR(x - dL)| > tol is inconsistent,
                             px (>= 0). Default 1 */
    int median;           /* 1: 3x3 median of both disparity maps before the check. Default 1 */
    size_t memory_budget; /* bytes for the cost volumes (3 bytes per pixel and disparity);
                             larger images are processed in bands of rows with a 48-row
                             overlap (paths restart at band edges). Default 512 MiB */
} sinew_stereo_params;

void sinew_stereo_params_default(sinew_stereo_params *p);

/* Named presets: "fast" (4 paths) and "balanced" (8 paths, the default). Returns
 * SINEW_EINVAL for another name (p untouched). */
int sinew_stereo_preset(sinew_stereo_params *p, const char *name);

/* The number of disparities actually searched for an image width (resolves 0). */
int sinew_stereo_num_disparities(const sinew_stereo_params *p, int width);

/* Counts of one run. */
typedef struct sinew_stereo_stats {
    int64_t pixels;                     /* width * height */
    int64_t kept;                       /* mask == 0 */
    int64_t reason[SINEW_MASK_NBITS];   /* pixels with bit i set */
    int64_t filled;                     /* pixels whose disparity was filled (mask != 0) */
    int min_disparity, num_disparities; /* range searched */
    int bands;                          /* bands of rows processed */
} sinew_stereo_stats;

/* Outputs, allocated by the caller with the left frame's width and height (right map:
 * the right frame's, which is the same); each may be NULL except disparity:
 *   disparity:  SINEW_F32 1 channel, left view, sub-pixel, px; every pixel has a value:
 *               pixels the check rejects are filled from the background side (the
 *               lower of the nearest kept disparities to the left and right on the row).
 *   right:      SINEW_F32 1 channel, right view, sub-pixel, not filled (NaN where the
 *               check of the right view rejects).
 *   mask:       SINEW_U8 1 channel, left view, bits of flow/check.h: SINEW_MASK_OCCLUDED
 *               (left-right inconsistent), SINEW_MASK_OUTSIDE (x - d left of the right
 *               frame), SINEW_MASK_UNKNOWN (no disparity could be chosen). 0 = kept.
 *   confidence: SINEW_F32 1 channel in [0, 1]: 1 - S1 / S2 with S1 the best aggregated
 *               cost and S2 the best one at least 2 px away ("peak ratio", Hu &
 *               Mordohai, PAMI 2012); 0 where the mask is non-zero. */
typedef struct sinew_stereo_output {
    sinew_image *disparity;
    sinew_image *right;
    sinew_image *mask;
    sinew_image *confidence;
    sinew_stereo_stats stats; /* filled on success */
} sinew_stereo_output;

/* Disparity of a rectified pair. left, right: SINEW_U8 or SINEW_U16, 1..4 channels
 * (alpha ignored, colour to luma 0.299 R + 0.587 G + 0.114 B), same size (ESIZE
 * otherwise). p = NULL uses the defaults. Returns SINEW_OK, EINVAL (bad parameters or
 * types), ESIZE, ENOMEM. Integer costs and aggregation: outputs are bit-identical for
 * every thread count of ctx. Outputs are undefined on failure. */
int sinew_stereo_run(sinew_ctx *ctx, sinew_stereo_output *out, const sinew_image *left,
                     const sinew_image *right, const sinew_stereo_params *p);

/* ---- scoring against true disparity (Scharstein & Szeliski, IJCV 2002; KITTI 2015) ---- */
typedef struct sinew_stereo_scores {
    int64_t pixels; /* pixels counted: region non-zero and true disparity known */
    int64_t bad1;   /* |d - d_true| > 1 px; non-finite estimates count as bad (holes) */
    int64_t bad2;   /* > 2 px */
    int64_t d1;     /* KITTI D1: > 3 px and > 5 % of d_true */
    double abs_sum; /* sum of |d - d_true| (|d_true| for non-finite estimates) */
} sinew_stereo_scores;

/* True disparity in px from stored codes: SINEW_U8/U16 1..4 channels (first channel
 * read), d = code / scale, code 0 = unknown (NaN). *out receives a new SINEW_F32 map.
 * scale > 0 (Middlebury 2003 quarter size: 4, Tsukuba: 16, Venus: 8, KITTI: 256). */
int sinew_stereo_truth(sinew_ctx *ctx, sinew_image *out, const sinew_image *codes, double scale);

/* Count errors of disparity est (SINEW_F32 1 channel) against truth (SINEW_F32, NaN =
 * unknown) over pixels where region (optional SINEW_U8/U16, first channel) is non-zero.
 * *out is overwritten. Rates: bad1 / pixels etc.; mean absolute error abs_sum / pixels.
 * EINVAL / ESIZE. Serial per-row partial sums: deterministic. */
int sinew_stereo_score(sinew_ctx *ctx, sinew_stereo_scores *out, const sinew_image *est,
                       const sinew_image *truth, const sinew_image *region);

/* Rectification test: the median vertical offset (px, right minus left) of features
 * matched between the frames. Textured points (one per 24x24 cell) of the left frame are
 * searched in the right frame over the disparities [min_disparity, min_disparity +
 * num_disparities) and +-search_y rows (1..256) by census block matching with a ratio
 * test. *dy receives the median offset of the reliable matches (0 with none) and
 * *matched their number; a rectified pair gives |dy| well below 1 px. Returns SINEW_OK,
 * EINVAL, ESIZE, ENOMEM. Deterministic for any thread count. */
int sinew_stereo_vertical_offset(sinew_ctx *ctx, double *dy, int *matched, const sinew_image *left,
                                 const sinew_image *right, int min_disparity, int num_disparities,
                                 int search_y);

/* Rectified stereo geometry for disparity -> depth: Z = fx * baseline / (d + doffs). */
typedef struct sinew_stereo_calib {
    double fx, fy, cx, cy; /* left camera (rectified), px */
    double doffs;          /* x-difference of the principal points, cx(right) -
                              cx(left), px (Middlebury 2014 convention) */
    double baseline;       /* metres, > 0 */
    int width, height;     /* calibration image size, 0 = unknown */
} sinew_stereo_calib;

/* Load a calibration JSON (docs/formats.md): {"left": {"fx","fy","cx","cy"},
 * "right": {"fx","fy","cx","cy"}, "baseline": metres, optional "width", "height",
 * "comment"}. Refuses with one message naming the file: unknown keys (ECONFIG),
 * missing or non-finite values, focal length outside (0, 1e6) px, baseline outside
 * (0, 100] m, focal lengths of the two cameras differing by more than 1 %, or
 * cy differing by more than 1 px (not a rectified pair) (EVALUE). */
int sinew_stereo_calib_load(sinew_ctx *ctx, sinew_stereo_calib *calib, const char *path);

/* ---- calibration form 2: a raw rig, rectified by sinew (flow/stereo_rectify.c) ----
 * Camera coordinates are x right, y down, z forward, metres; a point X_left in the left
 * camera's coordinates is X_right = R X_left + T in the right camera's (the usual
 * convention of stereo calibration). The baseline is |T|. */
typedef struct sinew_stereo_rig {
    int raw;                  /* 0: the file was form 1 (rectified; only calib is set);
                                 1: form 2 (left, right, R, T set) */
    sinew_stereo_calib calib; /* form 1 as loaded */
    sinew_camera left, right; /* intrinsics with Brown-Conrady distortion (flow/camera.h);
                                 width/height = the file's image size or 0 */
    double R[9];              /* rotation, row-major, orthonormalised on loading */
    double T[3];              /* metres */
} sinew_stereo_rig;

/* Load either calibration form (docs/formats.md): form 1 as sinew_stereo_calib_load;
 * form 2 {"left": {"fx","fy","cx","cy", optional "k1","k2","p1","p2","k3"}, "right":
 * {...}, "R": 9 numbers row-major or 3 rows of 3, "T": 3 numbers in metres, optional
 * "width", "height", "comment"}. Form 2 is refused with one message naming the file
 * (EVALUE) for a focal length outside (0, 1e6) px, implausible distortion (flow/camera.h
 * sinew_camera_check), an R that is not a rotation (|R R^T - I| > 1e-3 in any element or
 * det R < 0), |T| below 1 um or above 100 m, a baseline more than 45 degrees from the
 * x axis of the half-rotated cameras (not a horizontal rig), or a right camera left of
 * the left one (frames swapped, or R, T inverted). */
int sinew_stereo_rig_load(sinew_ctx *ctx, sinew_stereo_rig *rig, const char *path);

/* Rectification of a raw rig for width x height frames (Bouguet's method as described in
 * Bradski & Kaehler, "Learning OpenCV", 2008): each camera turns by half of R toward the
 * other, then both by the rotation that lays the baseline along x; both rectified views
 * share one pinhole camera without distortion, f = the smallest of the four focal
 * lengths, cy = the mean of the rows where the two original image centres land, and one
 * cx likewise (so doffs = 0 and every disparity of a point in front is positive). */
typedef struct sinew_stereo_rectification {
    sinew_stereo_calib calib; /* the rectified pair: fx = fy = f, cx, cy, doffs 0, baseline
                                 |T|, width, height */
    double rot[2][9];         /* rectifying rotations, row-major: X_rect = rot[v] X_camera,
                                 v = 0 left, 1 right */
    sinew_camera cam[2];      /* the original cameras (distortion included) */
} sinew_stereo_rectification;

/* Fill *rect from a form-2 rig for frames of width x height (the rig's size, if it has
 * one, must match: ESIZE). EINVAL for a form-1 rig or bad arguments. */
int sinew_stereo_rectify_init(sinew_ctx *ctx, sinew_stereo_rectification *rect,
                              const sinew_stereo_rig *rig, int width, int height);

/* Original (distorted) pixel (u, v) of view v (0 left, 1 right) -> rectified pixel
 * (*ur, *vr). Returns 1, or 0 when the distortion cannot be inverted or the ray turns
 * behind the rectified camera. */
int sinew_stereo_rectify_point(const sinew_stereo_rectification *rect, int view, double u, double v,
                               double *ur, double *vr);

/* Resample frame `in` (SINEW_U8, U16 or F32, any channels, rect's size) of view `view`
 * into the rectified view: for each rectified pixel the ray is turned back into the
 * original camera, distorted and projected, and the frame is sampled bilinearly
 * (integer types rounded). *out receives a new image of in's type and channels; inside
 * (may be NULL) a new SINEW_U8 map, 255 where the source point lies inside the original
 * frame, 0 elsewhere (there out is 0). Deterministic for any thread count. */
int sinew_stereo_rectify_image(sinew_ctx *ctx, sinew_image *out, sinew_image *inside,
                               const sinew_image *in, const sinew_stereo_rectification *rect,
                               int view);

/* After sinew_stereo_run on a rectified pair: mark SINEW_MASK_OUTSIDE in out->mask where
 * the rectified left pixel came from outside the original left frame (inside_left == 0)
 * or its match x - d lands where the rectified right frame has no source
 * (inside_right == 0), set out->confidence (if any) to 0 there, and update out->stats
 * (kept, reason). inside_* are the SINEW_U8
 * maps of sinew_stereo_rectify_image (either may be NULL); out->disparity and out->mask
 * are required. Returns SINEW_OK or SINEW_EINVAL / SINEW_ESIZE. */
int sinew_stereo_mark_outside(sinew_ctx *ctx, sinew_stereo_output *out,
                              const sinew_image *inside_left, const sinew_image *inside_right);

/* Depth of the rectified left view (SINEW_F32, metres, NaN = none; rect's size) back to
 * the left camera's original pixels: each original pixel's ray is located in the
 * rectified view and the depth there is read bilinearly when the four neighbours are all
 * valid and within 5 % of each other (one surface), otherwise from the nearest neighbour;
 * a hole there (or a ray leaving the rectified frame) stays a hole (NaN). The value is
 * converted to the original camera's z (the rectified camera is rotated). *out receives
 * a new SINEW_F32 map; valid (may be NULL) the number of finite depths. */
int sinew_stereo_unrectify_depth(sinew_ctx *ctx, sinew_image *out, const sinew_image *z,
                                 const sinew_stereo_rectification *rect, int64_t *valid);

/* Depth z = fx * baseline / (d + doffs) in metres for every pixel of a SINEW_F32
 * 1-channel disparity; NaN where mask (optional SINEW_U8, same size) is non-zero,
 * where d is not finite or d <= 0, or where d + doffs <= 0. *z receives a newly
 * allocated SINEW_F32 map. valid (may be NULL) receives the number of finite depths. */
int sinew_stereo_depth(sinew_ctx *ctx, sinew_image *z, const sinew_image *disparity,
                       const sinew_image *mask, const sinew_stereo_calib *calib, int64_t *valid);

/* Write a SINEW_F32 1-channel map (disparity in px or depth in m) by the path's
 * extension, atomically: .npy (float32 H x W, NaN kept), .pfm (float, NaN kept) or .png
 * (16-bit gray codes round(v * png_scale), 0 where v is NaN or <= 0 or the code would
 * exceed 65535; KITTI disparity uses png_scale 256, millimetre depth 1000). Another
 * extension is SINEW_EUNSUPPORTED naming the path. Needs io. */
int sinew_stereo_write_map(sinew_ctx *ctx, const char *path, const sinew_image *map,
                           double png_scale);

/* ---- stereo mode of the demo scene (flow/synth.h) ----
 * The right camera is the scene camera moved by `baseline` metres (0 < baseline <= 1)
 * along its x axis: same intrinsics and orientation, so the pair is rectified with
 * doffs = 0 and the exact left disparity is fx * baseline / z. Outputs (each may be NULL,
 * sized like the scene): right frame SINEW_U8 RGB rendered like the left frames;
 * disparity SINEW_F32 1 channel, NaN where the ray hits nothing; occluded SINEW_U8 1
 * channel, 255 where the left pixel is hidden from or outside the right view. */
int sinew_stereo_synth_render(sinew_synth *s, int frame, double baseline, sinew_image *right,
                              sinew_image *disparity, sinew_image *occluded);

/* Write the stereo files of every frame into the sequence folder dir (beside the files
 * of sinew_synth_write): right/NNNNNN.png, truth/disparity/NNNNNN.pfm,
 * truth/occlusion_stereo/NNNNNN.png, and stereo_calib.json (the calibration format of
 * sinew_stereo_calib_load); then the folder's sequence.json gains each frame's "right"
 * and "stereo_calib" (flow/sequence.h). Atomic per file. */
int sinew_stereo_synth_write(sinew_synth *s, const char *dir, double baseline);

#ifdef __cplusplus
}
#endif
#endif
