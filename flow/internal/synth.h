/* SPDX-License-Identifier: MIT */
/* Private interface between the demo-scene files: the analytic scene (motion, ray
 * casting, material points) in synth_scene.c and its procedural textures and shading in
 * synth_texture.c. flow/synth.c builds images and ground truth on top of these. */
#ifndef SINEW_INTERNAL_SYNTH_H
#define SINEW_INTERNAL_SYNTH_H

#include <stdint.h>

#include "flow/synth.h"

/* Frame rate of the scene clock (frames per second). */
#define SINEW__SYNTH_FPS 30.0

/* Surface parts. The label written to the label PNG is sinew__synth_label(part). */
enum {
    SINEW__PART_NONE = 0,
    SINEW__PART_TRAY = 1,
    SINEW__PART_PAD_TOP = 2, /* the deforming top of the pad */
    SINEW__PART_BLOCK = 3,
    SINEW__PART_PROBE = 4,
    SINEW__PART_PAD_SIDE = 5 /* the four static side walls of the pad */
};

/* Everything fixed for a seed and an image size: intrinsics, motion constants,
 * texture parameters. Plain data, read-only after sinew__synth_scene_init. */
typedef struct sinew__synth_scene {
    uint64_t seed;
    int width, height;
    double fx, fy, cx, cy;
    double fps;
    /* camera drift (start value and change over one sweep) */
    double cam_az0, cam_daz, cam_el0, cam_del, cam_dist0, cam_ddist;
    double cam_target0[3], cam_dtarget[3];
    /* pad: rest box [-pad_hx, pad_hx] x [-pad_hy, pad_hy] x [0, pad_h] */
    double pad_hx, pad_hy, pad_h;
    /* dent (Eulerian height field) and drag (Lagrangian lateral displacement) */
    double dent_radius, dent_depth0, dent_depth1;
    double drag_radius, drag_anchor[2], drag_end[2], drag_bend;
    /* probe: capsule of radius probe_r, axis probe_axis (unit), length probe_len */
    double probe_r, probe_axis[3], probe_len;
    /* block: half extents, path (x from block_x0 to block_x1 at y = block_y), yaw */
    double block_half[3], block_x0, block_x1, block_y, block_yaw0, block_dyaw;
    /* tray rectangle at z = 0 */
    double tray_x0, tray_x1, tray_y0, tray_y1;
    /* textures */
    double lowtex_c[2], lowtex_r;
    double tint[5][3];
    double light[3];
    /* fast-motion sweep (sinew_synth_params.swing): 0 = off; else the probe tip moves
       by swing_v metres per frame along swing_dir from swing_p0, reached at frame
       swing_c */
    double swing_v, swing_c, swing_dir[3], swing_p0[3];
} sinew__synth_scene;

/* The scene at one instant: camera pose and every motion parameter. */
typedef struct sinew__synth_state {
    double R[9];      /* world -> camera rotation, rows = camera x (right), y (down), z (forward) */
    double o[3];      /* camera centre in world coordinates (metres) */
    double dent_c[2]; /* dent centre = probe contact point (world xy) */
    double dent_depth;
    double drag[2]; /* lateral displacement of the anchor material point */
    double tip[3];  /* probe tip sphere centre */
    double block_c[3], block_cos, block_sin;
} sinew__synth_state;

/* One ray hit. */
typedef struct sinew__synth_hit {
    int part;     /* SINEW__PART_*, NONE if the ray hits nothing */
    double depth; /* camera z of the hit (metres) */
    double X[3];  /* world position */
    double m[3];  /* material coordinates (meaning depends on the part) */
    double n[3];  /* unit world normal (for shading) */
} sinew__synth_hit;

void sinew__synth_scene_init(sinew__synth_scene *sc, uint64_t seed, int width, int height);
/* Set up the fast-motion sweep for `px` px/frame (0 = off) over `frames` frames. */
void sinew__synth_swing_init(sinew__synth_scene *sc, double px, int frames);
/* State at frame index `frame` (time frame / fps seconds). */
void sinew__synth_state_at(const sinew__synth_scene *sc, double frame, sinew__synth_state *st);
/* Cast the camera ray through pixel position (px, py) (pixel centres at integers).
 * Fills *hit; returns hit->part. */
int sinew__synth_cast(const sinew__synth_scene *sc, const sinew__synth_state *st, double px,
                      double py, sinew__synth_hit *hit);
/* World position of material point m of `part` in state st. */
void sinew__synth_position(const sinew__synth_scene *sc, const sinew__synth_state *st, int part,
                           const double m[3], double Y[3]);
/* World -> camera coordinates for state st. */
void sinew__synth_to_camera(const sinew__synth_state *st, const double Xw[3], double Xc[3]);
/* Label value of a part: tray 1, pad 2, block 3, probe 4, none 0. */
int sinew__synth_label(int part);
/* Shaded colour (0..1 per channel) of a hit: albedo from the material coordinates,
 * Lambertian shading from the normal; st gives the camera for texture filtering. */
void sinew__synth_shade(const sinew__synth_scene *sc, const sinew__synth_state *st,
                        const sinew__synth_hit *hit, double rgb[3]);

/* Seeded hashing: uniform double in [0, 1) from a 64-bit key (splitmix64 finaliser). */
uint64_t sinew__synth_mix(uint64_t x);
double sinew__synth_unit(uint64_t seed, uint64_t a, uint64_t b, uint64_t c);

/* Accessors for flow/synth_write.c. */
sinew_ctx *sinew__synth_ctx(const sinew_synth *s);
const sinew_synth_params *sinew__synth_params(const sinew_synth *s);

#endif
