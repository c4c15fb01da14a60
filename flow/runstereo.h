/* SPDX-License-Identifier: MIT */
/* Stereo sequences in `sinew run`: each frame's depth is computed from its left and right
 * frames by the stereo module (flow/stereo.h: rectified or raw-rig calibration), in the
 * left frame's own pixels, and cached in the run folder, so that flow, check and lift
 * then run as for RGB-D. The cache is resumable like the pairs: a depth map is reused
 * when its record carries the same key (left, right and calibration digests and the
 * stereo options) and the map still has its recorded size and digest.
 *
 * Files (docs/formats.md "Input: a folder"), per frame in OUTDIR/stereo/STEM/ (STEM = the
 * left frame's file name without extension): depth.npy (float32 H x W, metres, NaN =
 * none, the left frame's pixels), disparity.npy (float32, px, the filled left disparity of
 * the (rectified) pair), mask.png (the left-right check's reason bits) and done.json (the
 * record, written last). */
#ifndef SINEW_RUNSTEREO_H
#define SINEW_RUNSTEREO_H

#include "flow/camera.h"
#include "flow/run.h"
#include "flow/stereo.h"

#ifdef __cplusplus
extern "C" {
#endif

#define SINEW_RUN_STEREO_DIR "stereo"
#define SINEW_RUN_STEREO_DEPTH "depth.npy"
#define SINEW_RUN_STEREO_DISPARITY "disparity.npy"
#define SINEW_RUN_STEREO_MASK "mask.png"
#define SINEW_RUN_STEREO_DONE "done.json"
#define SINEW_RUN_STEREO_CALIB "stereo_calib.json" /* a stereo folder's calibration */

typedef struct sinew_run_stereo_params {
    const char *calib;  /* calibration file, either form (flow/stereo.h); required */
    const char *preset; /* stereo preset, "fast" or "balanced" (NULL = "balanced") */
    int resume;         /* 1: reuse cached depth whose record matches */
    int paths_only;     /* 1: compute nothing, only set the depth paths of every frame
                           (a --merge of shards: the pairs' keys hash the cached maps) */
} sinew_run_stereo_params;

typedef struct sinew_run_stereo_result {
    size_t computed, reused; /* depth maps */
} sinew_run_stereo_result;

/* The left camera the depth maps are in, from a calibration file (either form): a
 * rectified pair's left camera, or a raw rig's left camera with its distortion. Errors
 * of sinew_stereo_rig_load, naming the file. */
int sinew_run_stereo_camera(sinew_ctx *ctx, sinew_camera *cam, const char *calib);

/* OUTDIR/stereo/STEM of the left frame at path `left` into buf (n bytes); ELIMIT naming
 * the path when it does not fit. */
int sinew_run_stereo_frame_dir(sinew_ctx *ctx, char *buf, size_t n, const char *outdir,
                               const char *left);

/* For every frame of the pairs this shard owns (spec: frames, pairs, shard, outdir),
 * compute or reuse its depth (above) and set frames[i].depth to its path
 * (allocated on ctx, freed by sinew_run_source_free). frames is spec->frames' array,
 * writable; every used frame needs a right frame (ECONFIG naming the left frame
 * otherwise). Frames are processed in order with ctx's threads; the stereo search uses
 * the preset and its automatic disparity range. Errors name the file (unreadable frame,
 * sizes that differ, a pair that is not rectified after the calibration is applied:
 * median vertical offset of matched features above 1 px). EINTERRUPTED when the
 * context's stop flag is set between frames. */
int sinew_run_stereo_depths(sinew_ctx *ctx, sinew_run_frame *frames, sinew_run_stereo_result *res,
                            const sinew_run_spec *spec, const sinew_run_stereo_params *p);

#ifdef __cplusplus
}
#endif
#endif
