/* SPDX-License-Identifier: MIT */
/* The demo scene: an invented, deforming RGB-D sequence with exact ground truth.
 *
 * A textured silicone practice pad lies on a patterned tray; a rounded probe presses a
 * dent into the pad and drags its surface sideways; a foam block slides across the tray
 * in front of the pad (occluding and disoccluding it); the camera drifts. Everything is
 * analytic, so colour, depth, labels, optical flow, occlusion and scene flow are
 * computed by ray casting the surfaces with their known motion, never estimated.
 * Conventions (see docs/formats.md, "Demo scene"):
 *   - pinhole camera, no distortion; x right, y down, z forward; pixel centres at
 *     integer coordinates; depth = camera z in metres (not ray length);
 *   - flow from frame a to frame b at pixel p = projection in b of the material point
 *     seen at p in a, minus p (pixels); defined for every pixel that sees a surface,
 *     including occluded ones; NaN where the pixel sees nothing;
 *   - occlusion: 255 where that material point is hidden in frame b (the ray through its
 *     projection hits a different point first) or projects outside the image area
 *     [-0.5, W-0.5) x [-0.5, H-0.5); 0 where it is visible;
 *   - scene flow = Xb - Xa, where Xa is the point in frame a's camera coordinates and Xb
 *     the same material point in frame b's camera coordinates (metres). It includes the
 *     camera's own motion, like optical flow does, so it can be checked with depth and
 *     intrinsics alone: Xa = depth_a(p) K^-1 (p, 1), then K (Xa + sf) projects to
 *     p + flow and its z equals depth_b there when the point is visible.
 * Deterministic for a seed (own hashing, no rand()) and bit-identical for any thread
 * count. An object is used by one thread at a time. */
#ifndef SINEW_SYNTH_H
#define SINEW_SYNTH_H

#include "flow/core.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Largest image the generator accepts (width * height): it keeps ~60 bytes of ray hits
 * per pixel, so 2^24 pixels (e.g. 4096 x 4096) need about 1 GB. */
#define SINEW_SYNTH_MAX_PIXELS ((int64_t)1 << 24)

/* Generation settings (a plain value type). */
typedef struct sinew_synth_params {
    int width;       /* pixels, >= 8 (default 640); the focal length scales with it */
    int height;      /* pixels, >= 8 (default 480) */
    int frames;      /* >= 2 (default 30); the scene runs at 30 frames per second and
                        repeats its one-second sweep back and forth */
    uint64_t seed;   /* textures, colours and small variations of the motion (default 1) */
    int depth_noise; /* 0: written depth is the exact depth rounded to millimetres;
                        1: adds sensor-like noise and holes at depth edges (default 0) */
    double swing;    /* 0 (default): the probe presses and drags the pad. > 0: fast-motion
                        sweep instead: the pad stays at rest and the probe, lifted 20 mm
                        above it, is swung across the view at constant speed, crossing the
                        pad centre between the middle frames; its own motion there is
                        `swing` px/frame in the image (the camera's slow drift adds a few
                        px). At most SINEW_SYNTH_MAX_SWING. */
} sinew_synth_params;

/* Largest swing speed, px/frame. */
#define SINEW_SYNTH_MAX_SWING 1000.0

/* Fill *p with the defaults above. */
void sinew_synth_params_default(sinew_synth_params *p);

/* Opaque generator: the scene for one parameter set plus cached ray hits of the last
 * frame cast. */
typedef struct sinew_synth sinew_synth;

/* Create a generator. EINVAL (message names the field) for bad parameters, ELIMIT above
 * SINEW_SYNTH_MAX_PIXELS or the context's pixel limit, ENOMEM.
 * The context must outlive the generator. Free with sinew_synth_free. */
int sinew_synth_new(sinew_ctx *ctx, sinew_synth **out, const sinew_synth_params *p);
void sinew_synth_free(sinew_synth *s);

/* Pinhole intrinsics in pixels (pixel centres at integers). */
void sinew_synth_intrinsics(const sinew_synth *s, double *fx, double *fy, double *cx, double *cy);

/* Camera-to-world pose of a frame: 3x4 row-major [R | t], metres; world z is up and the
 * tray is the plane z = 0. EINVAL if frame is out of range. */
int sinew_synth_pose(const sinew_synth *s, int frame, double pose[12]);

/* Render frame `frame` (0 <= frame < frames). Outputs are caller-allocated images of the
 * generator's size, any may be NULL:
 *   color  SINEW_U8 3 channels (RGB), one ray per pixel centre;
 *   depth  SINEW_F32 1 channel, exact camera z in metres, NaN where nothing is hit;
 *   labels SINEW_U8 1 channel: 0 nothing, 1 tray, 2 pad, 3 block, 4 probe.
 * ESIZE if an output has the wrong shape or type. Parallel over rows. */
int sinew_synth_render(sinew_synth *s, int frame, sinew_image *color, sinew_image *depth,
                       sinew_image *labels);

/* Exact ground truth from frame `from` to frame `to` (any two distinct frames), on the
 * pixel grid of `from`. Outputs caller-allocated, any may be NULL:
 *   flow       SINEW_F32 2 channels (u, v) pixels, NaN where `from` sees nothing;
 *   occlusion  SINEW_U8 1 channel, 255 occluded or outside in `to`, 0 visible;
 *   scene_flow SINEW_F32 3 channels, metres (see the header comment), NaN where `from`
 *              sees nothing.
 * ESIZE for wrong shapes, EINVAL for bad frame indices. */
int sinew_synth_truth(sinew_synth *s, int from, int to, sinew_image *flow, sinew_image *occlusion,
                      sinew_image *scene_flow);

/* Exact ground truth at one sub-pixel position (x, y) of frame `from` (the same
 * computation sinew_synth_truth does at pixel centres). */
typedef struct sinew_synth_point {
    int label;            /* label seen at (x, y) in `from` (0 = nothing) */
    double depth;         /* camera z in `from`, metres; NaN if nothing */
    double flow[2];       /* to `to`, pixels; NaN if nothing or behind camera `to` */
    int occluded;         /* 1 if hidden or outside the image in `to` (or nothing seen) */
    double scene_flow[3]; /* metres, as in sinew_synth_truth; NaN if nothing */
} sinew_synth_point;
int sinew_synth_query(sinew_synth *s, int from, int to, double x, double y, sinew_synth_point *out);

/* Convert an exact depth map (SINEW_F32, metres, NaN = none) of frame `frame` to the
 * 16-bit millimetre codes that are written to disk (SINEW_U16 1 channel, 0 = invalid),
 * applying the sensor-like noise and edge holes when params.depth_noise is set (seeded
 * per frame, so the result is deterministic). */
int sinew_synth_depth_mm(sinew_synth *s, int frame, const sinew_image *depth,
                         sinew_image *depth_mm);

/* Write the whole sequence into folder `dir` (created if missing; its parent must exist):
 *   color/NNNNNN.png  depth/NNNNNN.png  labels/NNNNNN.png           per frame
 *   truth/flow_forward/NNNNNN.flo   truth/flow_backward/NNNNNN.flo   per pair (t, t+1),
 *   truth/occlusion_forward/NNNNNN.png  truth/occlusion_backward/NNNNNN.png
 *   truth/scene_flow/NNNNNN.npy                                      (NNNNNN = t)
 *   sequence.json (written last; see flow/sequence.h)
 * Every file is written atomically. EIO with a message naming the path on failure. */
int sinew_synth_write(sinew_synth *s, const char *dir);

#ifdef __cplusplus
}
#endif
#endif
