/* SPDX-License-Identifier: MIT */
/* Depth-map conventions: turning stored depth (16-bit codes, float metres, ray
 * distance, disparity) into one canonical map — SINEW_F32, 1 channel, z in metres
 * along the optical axis, NaN where invalid — plus the median check that catches a
 * wrong scale. See docs/formats.md "Depth conventions". */
#ifndef SINEW_DEPTH_H
#define SINEW_DEPTH_H

#include "flow/camera.h"
#include "flow/core.h"

#ifdef __cplusplus
extern "C" {
#endif

/* What the stored values measure. */
typedef enum sinew_depth_kind {
    SINEW_DEPTH_Z = 0,    /* distance along the optical axis (the usual RGB-D convention) */
    SINEW_DEPTH_RAY,      /* Euclidean distance from the camera centre along the pixel ray */
    SINEW_DEPTH_DISPARITY /* stereo disparity in pixels: z = fx * baseline / d */
} sinew_depth_kind;

/* Depth conversion settings. Initialise with sinew_depth_params_default. */
typedef struct sinew_depth_params {
    sinew_depth_kind kind;
    /* SINEW_U16 input: stored codes per unit, i.e. value = code / scale. For depth the
     * unit is the metre (1000 for millimetre sensors, 5000 in the TUM RGB-D convention);
     * for disparity the pixel (e.g. 256). Must be > 0. SINEW_F32 input is taken as
     * metres (or pixels of disparity) and `scale` is ignored. Default 1000. */
    double scale;
    double near, far; /* valid z range in metres, inclusive; default 0 and +inf */
    double baseline;  /* metres, for SINEW_DEPTH_DISPARITY (> 0) */
} sinew_depth_params;

/* Defaults: z depth, scale 1000, near 0, far +inf, baseline 0. */
void sinew_depth_params_default(sinew_depth_params *p);

/* Per-map counts from sinew_depth_convert (pixels). */
typedef struct sinew_depth_stats {
    size_t total;
    size_t valid;
    size_t invalid_code; /* 0 or 65535 codes, NaN/Inf, <= 0, zero disparity */
    size_t out_of_range; /* finite but outside [near, far] */
} sinew_depth_stats;

/* Convert a raw depth map to z in metres. raw: SINEW_U16 (codes; 0 and 65535 are
 * invalid) or SINEW_F32 (metres or disparity pixels; NaN, Inf and values <= 0 are
 * invalid; so is a z beyond the float range, e.g. from a denormal disparity), 1
 * channel; SINEW_U8 is refused (SINEW_EUNSUPPORTED: 8 bits cannot hold depth). `cam`
 * (already fitted to the map's size) is needed for SINEW_DEPTH_RAY and
 * SINEW_DEPTH_DISPARITY, may be NULL for SINEW_DEPTH_Z. *z receives a freshly
 * allocated SINEW_F32 map of the same size with NaN where invalid or out of range.
 * `what` names the file for messages; stats may be NULL. Threads: rows in parallel,
 * deterministic. */
int sinew_depth_convert(sinew_ctx *ctx, sinew_image *z, sinew_depth_stats *stats,
                        const sinew_image *raw, const sinew_camera *cam,
                        const sinew_depth_params *p, const char *what);

/* Median of the finite values of a SINEW_F32 1-channel map (exact: the lower middle
 * element for even counts). *count receives the number of finite values (may be NULL);
 * with none, *median = NaN and SINEW_OK. */
int sinew_depth_median(sinew_ctx *ctx, double *median, size_t *count, const sinew_image *z);

/* The plausible range for a median scene depth, metres (common practice for hand-held
 * RGB-D: outside it the scale is almost certainly wrong). */
#define SINEW_DEPTH_PLAUSIBLE_MIN 0.05
#define SINEW_DEPTH_PLAUSIBLE_MAX 20.0

#ifdef __cplusplus
}
#endif
#endif
