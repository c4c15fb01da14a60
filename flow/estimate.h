/* SPDX-License-Identifier: MIT */
/* Dense optical flow between two frames on the CPU: a coarse-to-fine estimator that
 * combines dense inverse search (large displacements) with a robust variational
 * refinement (sub-pixel accuracy, edges), run forward and optionally backward.
 * Method and citations: docs/methods.md, section "Flow estimation". */
#ifndef SINEW_ESTIMATE_H
#define SINEW_ESTIMATE_H

#include "flow/core.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Which solver runs at each pyramid level. */
typedef enum sinew_flow_method {
    SINEW_FLOW_VARIATIONAL = 0, /* Charbonnier data + gradient constancy + edge-aware TV-like
                                   smoothness (Brox et al. 2004 energy), the default */
    SINEW_FLOW_HORN_SCHUNCK = 1 /* plain quadratic Horn-Schunck 1981 (benchmark baseline) */
} sinew_flow_method;

/* Estimator parameters: a plain value type. Start from sinew_flow_params_preset() and
 * change fields as needed. Pyramid levels halve the resolution; level 0 is the input. */
typedef struct sinew_flow_params {
    sinew_flow_method method;
    int levels;       /* coarsest pyramid level + 1 to use; 0 = automatic (coarsest level at
                         least 2 patch sizes tall), capped at 12 */
    int finest_level; /* finest level at which flow is computed (0 = full resolution); a
                         coarser result is upsampled bilinearly. 0..levels-1 */
    /* dense inverse search (Kroeger et al. 2016) */
    int dis_finest; /* finest level that runs patch search; -1 = no patch search */
    int dis_patch;  /* patch side in pixels, 4..32 */
    int dis_stride; /* distance between patch origins in pixels, 1..dis_patch */
    int dis_iters;  /* Gauss-Newton iterations per patch, 1..100 */
    /* variational refinement (Brox et al. 2004), at every level from the coarsest used
       down to finest_level */
    int warps;          /* warping steps per level, 0..50 (0 = no refinement) */
    int warps_fine;     /* warping steps at the finest fine_levels computed levels instead
                           of `warps`, 0..50; 0 = `warps` everywhere */
    int fine_levels;    /* how many of the finest computed levels use warps_fine, 1..12 */
    int outer;          /* fixed-point (lagged-nonlinearity) iterations per warp, 1..50 */
    int inner;          /* red-black SOR sweeps per fixed-point iteration, 1..200 */
    float alpha;        /* smoothness weight (> 0) */
    float gamma;        /* gradient-constancy weight (>= 0) */
    float delta;        /* brightness/colour-constancy weight (>= 0) */
    float edge;         /* edge-aware smoothness: weight exp(-edge*|grad I0|), I in [0,1]; >= 0 */
    float eps;          /* Charbonnier epsilon, > 0 */
    float omega;        /* SOR relaxation, in (0, 2) */
    int median;         /* median filter radius after each warp: 0 off, 1 = 3x3, 2 = 5x5
                           (Sun, Roth, Black 2010) */
    int wmedian;        /* occlusion-aware weighted median (Sun, Roth, Black 2010) near motion
                           boundaries after each warp: window radius 1..10, 0 = off */
    int wmedian_levels; /* ... at the finest this many computed levels, 1..12 */
    float wmedian_band; /* boundary test: flow differs by more than this (L1, px) within
                           a 5x5 neighbourhood, > 0 */
    int fuse_levels;    /* candidate selection near motion boundaries (a boundary pixel takes
                           a nearby pixel's flow when that one matches frame 1 clearly
                           better; same boundary test) after the first warp of each of the
                           finest this many computed levels, 0..12; 0 = off */
    int large_motion;   /* large-displacement stage: 1 = on (accurate), 0 = off (fast,
                           balanced, baseline; balanced regressed on Middlebury Urban3). Descriptor
                           matching of seeds by PatchMatch,   forward-backward check, edge-preserving
                           interpolation at the   finest pyramid level at most 512 px wide (level >=
                           1);   per   pixel the interpolated or the coarse-to-fine flow, whichever
                           matches   frame 1 better, then starts that level's refinement
                           (docs/methods.md) */
    int color;          /* 1: RGB frames use a 3-channel data term; 0: luminance only */
    int hs_iters;       /* Jacobi iterations per warp for SINEW_FLOW_HORN_SCHUNCK */
    int work_mib;       /* solver scratch budget in MiB, 1..65536 (presets: 32). A level whose
                           variational planes exceed it is solved in bands of rows with 32
                           rows of overlapping context, so memory stays ~ 30 bytes per pixel
                           plus this budget. Results depend on it (for images that large),
                           never on the thread count. */
} sinew_flow_params;

/* Fill *p with a named preset: "fast", "balanced", "accurate", or "baseline" (coarse-to-
 * fine Horn-Schunck, for benchmark ratios). Returns SINEW_OK or SINEW_EINVAL (unknown
 * name or NULL). */
int sinew_flow_params_preset(sinew_flow_params *p, const char *name);

/* Check every field's range; SINEW_OK or SINEW_EINVAL with a message naming the field. */
int sinew_flow_params_check(sinew_ctx *ctx, const sinew_flow_params *p);

/* Opaque estimator holding the parameters and work buffers (pyramids of both frames,
 * flow and solver planes). Buffers are sized on the first run and reused while the frame
 * size and channel count stay the same. One estimator is used by one thread at a time;
 * parallelism inside a run follows sinew_ctx_threads(ctx). */
typedef struct sinew_estimator sinew_estimator;

/* Create an estimator; parameters are copied and checked (EINVAL). ctx is borrowed and
 * must outlive the estimator. Free with sinew_estimator_free. */
int sinew_estimator_new(sinew_ctx *ctx, sinew_estimator **out, const sinew_flow_params *p);
/* Release the estimator and its buffers; NULL is fine. */
void sinew_estimator_free(sinew_estimator *est);

/* Estimate flow from frame0 to frame1 into fwd and, if bwd is not NULL, from frame1 to
 * frame0 into bwd. Frames: SINEW_U8 or SINEW_U16, 1..4 channels (gray, gray+alpha, RGB,
 * RGBA; alpha is ignored), equal size and type. fwd/bwd: caller-allocated SINEW_F32
 * 2-channel images of the frames' size; every vector is finite. Flow is in pixels:
 * frame0(x) matches frame1(x + flow(x)).
 * Sequences: if frame0 has the same content as the previous call's frame1, its pyramid is
 * reused instead of rebuilt. Output is bit-identical for every thread count.
 * Returns SINEW_OK, EINVAL (bad types/channels), ESIZE (sizes differ), ENOMEM. */
int sinew_estimator_run(sinew_estimator *est, sinew_image *fwd, sinew_image *bwd,
                        const sinew_image *frame0, const sinew_image *frame1);

#ifdef __cplusplus
}
#endif
#endif
