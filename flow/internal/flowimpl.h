/* SPDX-License-Identifier: MIT */
/* Private building blocks of the flow estimator, shared by flow/pyramid.c, flow/dis.c,
 * flow/variational.c, flow/hs.c and flow/estimate.c. All images here are planar float
 * with stride == width (row-major, unit stride), intensities scaled to [0, 1].
 * Every kernel takes `nt` (threads, 0 = default) and is bit-identical for any nt:
 * work is split over rows, each output element is written by exactly one thread and
 * computed in a fixed order. Kernels never allocate; callers pass scratch planes. */
#ifndef SINEW_INTERNAL_FLOWIMPL_H
#define SINEW_INTERNAL_FLOWIMPL_H

#include <math.h>
#include <stddef.h>
#include <stdint.h>

#include "flow/core.h"

/* Functions marked SINEW__CLONES are also built for AVX2 (8 floats per vector) and the
 * version is picked at run time where the CPU has it. AVX2 has no fused multiply-add and
 * we compile without FP contraction, so both versions compute the same bits. GCC on
 * x86-64 Linux (ifunc) only; elsewhere the plain build. */
#if defined(__GNUC__) && !defined(__clang__) && defined(__x86_64__) && defined(__linux__)
#define SINEW__CLONES __attribute__((target_clones("avx2", "default")))
#else
#define SINEW__CLONES
#endif

#define SINEW__MAX_LEVELS 12
#define SINEW__MAX_CH 3

/* One pyramid level of one frame. ch[c] are the data-term channels (1 gray or 3 RGB);
 * lum is the luminance (aliases ch[0] for gray); gx, gy its 5-point derivatives, which
 * the pyramid does not store: the estimator points them at scratch planes computed for
 * the level in use (NULL in a stored pyramid). */
typedef struct sinew__level {
    int w, h;
    float *ch[SINEW__MAX_CH];
    float *lum, *gx, *gy;
} sinew__level;

typedef struct sinew__pyramid {
    int levels;   /* valid levels: lv[0] full resolution .. lv[levels-1] coarsest */
    int channels; /* data-term channels (1 or 3) */
    sinew__level lv[SINEW__MAX_LEVELS];
} sinew__pyramid;

/* Floats needed by a pyramid of `levels` levels for a w x h frame with `channels`. */
size_t sinew__pyramid_floats(int w, int h, int channels, int levels);
/* Lay the pyramid out in `mem` (sinew__pyramid_floats floats). */
void sinew__pyramid_layout(sinew__pyramid *p, float *mem, int w, int h, int channels, int levels);
/* Fill the pyramid from a frame (U8/U16, 1..4 channels). tmp: >= 2*w*h floats. */
void sinew__pyramid_build(sinew__pyramid *p, const sinew_image *frame, float *tmp, int nt);
/* Level size for a given full size: each level halves (rounding up). */
void sinew__level_size(int w, int h, int level, int *lw, int *lh);

/* 5-point derivatives (-1 8 0 -8 1)/12 with clamped borders; gx or gy may be NULL. */
void sinew__gradient(float *gx, float *gy, const float *src, int w, int h, int nt);
/* Row y of sinew__gradient (same bits), for callers that fuse it with other row work. */
void sinew__gradient_row(float *gx, float *gy, const float *src, int w, int h, int y);
/* Upsample a flow field from (sw, sh) to (dw, dh) = level below: bilinear, values x2. */
void sinew__flow_up(float *du, float *dv, int dw, int dh, const float *su, const float *sv, int sw,
                    int sh, int nt);
/* Upsample a flow field (su, sv) of sw x sh by any factor straight into the interleaved
 * 2-channel float image `out` (its size is the target; bilinear, values scaled per
 * axis), so no full-size planar copy is needed. */
void sinew__flow_resize(sinew_image *out, const float *su, const float *sv, int sw, int sh, int nt);
/* Bicubic warp: dst(x,y) = src(x+u, y+v) with clamped coordinates. If `outside` is not
 * NULL it receives 1 where the sample point lies outside the image, else 0. */
void sinew__warp(float *dst, unsigned char *outside, const float *src, const float *u,
                 const float *v, int w, int h, int nt);
/* The same warp applied to `count` planes at once (shared weights): dst[c] from src[c].
 * dst, u, v, outside are h rows of a band starting at row y0 of the w x sh source:
 * dst(x, y) = src(x + u, y0 + y + v). */
void sinew__warp_n(float *const *dst, const float *const *src, int count, unsigned char *outside,
                   const float *u, const float *v, int w, int h, int y0, int sh, int nt);
/* Bilinear sample with clamped coordinates. */
static inline float sinew__sample(const float *img, int w, int h, float x, float y)
{
    if (x < 0.f)
        x = 0.f;
    if (y < 0.f)
        y = 0.f;
    if (x > (float)(w - 1))
        x = (float)(w - 1);
    if (y > (float)(h - 1))
        y = (float)(h - 1);
    int x0 = (int)x, y0 = (int)y;
    if (x0 > w - 2)
        x0 = w > 1 ? w - 2 : 0;
    if (y0 > h - 2)
        y0 = h > 1 ? h - 2 : 0;
    float fx = x - (float)x0, fy = y - (float)y0;
    int x1 = w > 1 ? x0 + 1 : x0;
    size_t r0 = (size_t)y0 * (size_t)w, r1 = h > 1 ? r0 + (size_t)w : r0;
    /* weights form (not a + f (b - a)) so integer positions reproduce pixels exactly */
    float a = (1.f - fx) * img[r0 + (size_t)x0] + fx * img[r0 + (size_t)x1];
    float b = (1.f - fx) * img[r1 + (size_t)x0] + fx * img[r1 + (size_t)x1];
    return (1.f - fy) * a + fy * b;
}
/* Median filter of radius r (1: 3x3, 2: 5x5) of one plane into dst (dst != src). */
void sinew__median(float *dst, const float *src, int w, int h, int r, int nt);

/* ---- dense inverse search (Kroeger et al. 2016) at one level ---- */
typedef struct sinew__dis_params {
    int patch, stride, iters;
    float max_move; /* a patch whose search moves further than this (px) keeps its start */
} sinew__dis_params;
/* Patch-grid size for a level. */
void sinew__dis_grid(int w, int h, const sinew__dis_params *p, int *nx, int *ny);
/* Refine (u, v) at one level: patch inverse-compositional search initialised from the
 * current dense flow, then densification. l0 carries its gradient planes. pu, pv: nx*ny
 * floats each. accw: acc_floats >= 3*w floats of scratch (densification runs in chunks of
 * rows that fit; the result does not depend on the chunking). u, v are overwritten with
 * the densified flow. */
void sinew__dis_level(float *u, float *v, const sinew__level *l0, const sinew__level *l1,
                      const sinew__dis_params *p, float *pu, float *pv, float *accw,
                      size_t acc_floats, int nt);

/* ---- variational refinement at one level (Brox et al. 2004 energy) ---- */
typedef struct sinew__var_params {
    float alpha, gamma, delta, edge, eps, omega;
    int outer, inner;
} sinew__var_params;
/* Work planes of w*h floats needed by sinew__var_level for `channels`. */
int sinew__var_planes(int channels);
/* Work floats for sinew__var_level on a w x h level: the whole level's planes when they
 * fit `budget` floats, else at least `budget` (or the least that bands need). */
size_t sinew__var_work(int channels, int w, int h, size_t budget);
/* One warping step: warp frame 1 by (u, v), solve for the increment with `outer`
 * fixed-point iterations of `inner` red-black SOR sweeps, add it to (u, v). l0 and l1
 * carry their gradient planes. work: work_floats floats (sinew__var_work); when the whole
 * level does not fit, it is solved in bands of rows with overlapping context, so the
 * result depends on work_floats but never on the thread count. mask: w*h bytes. */
void sinew__var_level(float *u, float *v, const sinew__level *l0, const sinew__level *l1,
                      int channels, const sinew__var_params *p, float *work, size_t work_floats,
                      unsigned char *mask, int nt);

/* 1 if some flow vector in the 5x5 neighbourhood of (x, y) (clipped at the border)
 * differs from the one at (x, y) by more than `band` px (L1): a motion-boundary pixel. */
static inline int sinew__flow_edge(const float *u, const float *v, int w, int h, int x, int y,
                                   float band)
{
    size_t i = (size_t)y * (size_t)w + (size_t)x;
    float uc = u[i], vc = v[i];
    for (int dy = -2; dy <= 2; dy++) {
        int yy = y + dy;
        if (yy < 0 || yy >= h)
            continue;
        for (int dx = -2; dx <= 2; dx++) {
            int xx = x + dx;
            if (xx < 0 || xx >= w)
                continue;
            size_t j = (size_t)yy * (size_t)w + (size_t)xx;
            if (fabsf(u[j] - uc) + fabsf(v[j] - vc) > band)
                return 1;
        }
    }
    return 0;
}

/* ---- occlusion-aware weighted median near motion boundaries (flow/wmedian.c) ---- */
typedef struct sinew__wmed_params {
    int radius;                     /* window radius, 1..10 */
    float sigma_space, sigma_color; /* pixels; intensity in 0..255 units */
    float sigma_div, sigma_err;     /* divergence (px/px); intensity 0..255 units */
    float band;                     /* boundary test: L1 flow difference in a 5x5, px */
} sinew__wmed_params;
/* Replace (uo, vo) at boundary pixels of the flow (u, v) by its weighted median; other
 * pixels of (uo, vo) are left untouched. (uo, vo) must not alias (u, v). occ: occ_floats
 * >= (2 * radius + 1) * w floats of scratch (the rows run in chunks that fit; the result
 * does not depend on the chunking). */
void sinew__wmedian(float *uo, float *vo, const float *u, const float *v, const sinew__level *l0,
                    const sinew__level *l1, int channels, const sinew__wmed_params *p, float *occ,
                    size_t occ_floats, int nt);

/* ---- candidate selection near motion boundaries (flow/fuse.c) ---- */
/* Copy (u, v) to (uo, vo) (no aliasing), except that at boundary pixels (sinew__flow_edge
 * with `band`) the flow of a nearby pixel replaces the own one when it explains the
 * pixel's 3x3 neighbourhood in frame 1 clearly better. */
void sinew__fuse(float *uo, float *vo, const float *u, const float *v, const sinew__level *l0,
                 const sinew__level *l1, int channels, float band, int nt);

/* ---- large-displacement stage: descriptors, seed matching, interpolation ---- */
#define SINEW__DESC_BYTES 32
/* Scratch floats sinew__describe needs at least (one output row) for width w. */
size_t sinew__describe_rows_floats(int w);
/* Dense descriptors (flow/descriptor.c) of a w x h luminance plane into desc (w*h*32
 * bytes, pixel-major). work: work_floats >= sinew__describe_rows_floats(w). */
void sinew__describe(unsigned char *desc, const float *lum, int w, int h, float *work,
                     size_t work_floats, int nt);

typedef struct sinew__pm_params {
    int step;    /* seed grid step, px */
    int iters;   /* PatchMatch iterations */
    int samples; /* uniform draws over the whole frame per seed and iteration */
    int radius;  /* random-search radius at levels started from a coarser one, px */
} sinew__pm_params;
/* Seed grid size: seeds at (i * step + step / 2, j * step + step / 2), clamped. */
void sinew__pm_grid(int w, int h, int step, int *nx, int *ny);
/* One level of coarse-to-fine PatchMatch (flow/patchmatch.c): integer seed flows (fu, fv)
 * and descriptor costs from d0 to d1 (w x h). The seed grid belongs to the w0 x h0 level
 * `shift` levels finer (positions shifted right by shift). init = 0: start from zero
 * flow and search the whole frame; 1: start from (fu, fv) of the next coarser level,
 * doubled, and search within p->radius. key seeds the random draws. */
void sinew__pm_level(int *fu, int *fv, int *cost, const unsigned char *d0, const unsigned char *d1,
                     int w, int h, int w0, int h0, int shift, int init, const sinew__pm_params *p,
                     uint64_t key, int nt);
/* Forward-backward test of forward seeds (fu, fv) against backward seeds (bu, bv): ok[s] = 1
 * where consistent. Returns the number kept. */
int sinew__pm_check(unsigned char *ok, const int *fu, const int *fv, const int *bu, const int *bv,
                    int w, int h, int step);

/* Keep only kept seeds with at least `need` kept neighbours in their 5x5 grid window whose
 * flow is within `tol` px (tmp: nx*ny bytes). Returns the number kept. */
int sinew__pm_support(unsigned char *ok, unsigned char *tmp, const int *fu, const int *fv, int nx,
                      int ny, int tol, int need);

/* Seed matches on a grid (sinew__pm_grid) at one level: flows and a keep flag per seed. */
typedef struct sinew__seeds {
    int nx, ny, step;
    const int *fu, *fv;
    const unsigned char *ok;
} sinew__seeds;
/* Geodesic labelling (flow/interpolate.c): dist, label hold 0 / a seed index at seeds and
 * FLT_MAX / -1 elsewhere on entry; on return every pixel reachable has its nearest seed. */
void sinew__geodesic_label(float *dist, int *label, const float *c, int w, int h);
/* Dense (u, v) at a w x h level from the kept seeds, edge-preserving (flow/interpolate.c).
 * dist, label: w*h scratch each. Returns the number of seeds used (0: u, v untouched). */
int sinew__interpolate(float *u, float *v, float *dist, int *label, float *tmp, size_t tmp_floats,
                       const float *lum, int w, int h, const sinew__seeds *sd, int nt);
/* Scratch floats sinew__interpolate needs for its affine fits with `workers` threads. */
size_t sinew__interp_scratch(int nseeds, int workers);

/* Per pixel, d = C(ua, va) - C(uc, vc) + evidence, C the L1 distance between the
 * descriptor d0 at the pixel and d1 at its target rounded to the nearest pixel; 0 where
 * either target falls outside frame 1 (flow/patchmatch.c). */
void sinew__desc_margin(float *d, const unsigned char *d0, const unsigned char *d1, const float *ua,
                        const float *va, const float *uc, const float *vc, int w, int h,
                        float evidence, int nt);
/* Per region (pixels sharing a label in 0..nlabels-1; -1 = none) take (ua, va) where the
 * region's sum of d is negative (flow/fuse.c). sum: nlabels floats of scratch. */
void sinew__choose_regions(float *u, float *v, const float *ua, const float *va, const int *label,
                           int nlabels, const float *d, float *sum, int w, int h, int nt);

/* ---- coarse-to-fine Horn-Schunck baseline (Horn and Schunck 1981) ---- */
int sinew__hs_planes(void);
/* One warping step of quadratic Horn-Schunck with `iters` Jacobi iterations. */
void sinew__hs_level(float *u, float *v, const sinew__level *l0, const sinew__level *l1,
                     float alpha, int iters, float *work, unsigned char *mask, int nt);

#endif
