/* SPDX-License-Identifier: MIT */
/* Dense gradient-orientation descriptors for large-displacement matching
 * (flow/patchmatch.c).
 *
 * Orientation maps as in DAISY (Tola, Lepetit, Fua, "DAISY: An Efficient Dense
 * Descriptor Applied to Wide-Baseline Stereo", TPAMI 2010): for 8 directions
 * e_o = (cos(o pi/4), sin(o pi/4)), G_o(x) = max(0, <grad L(x), e_o>) with central
 * differences of the luminance L (clamped borders). The descriptor of pixel x pools the
 * maps over 2 x 2 cells of 4 x 4 pixels (the 8 x 8 window [x-4, x+3]^2), the cell
 * layout of SIFT (Lowe, IJCV 2004) at a quarter of its 4 x 4 cells: 32 values,
 * L2-normalised, clipped at 0.2 and renormalised (Lowe's values), then quantised to
 * bytes as min(255, round(512 v)) (the scale of common dense-SIFT code; from memory).
 * The norm is floored at DESC_FLOOR so flat, noisy windows keep small values instead of
 * amplified noise.
 *
 * Invariances: a brightness offset leaves the gradients unchanged; a gain scales them,
 * and the normalisation removes it (exactly while the norm is above the floor and no
 * value clips; up to the byte rounding otherwise).
 *
 * Rows run in chunks whose orientation rows fit the scratch block; every descriptor is
 * computed from the same inputs in the same order, so the result depends neither on the
 * chunking nor on the thread count. */
#include <math.h>
#include <string.h>

#include "flow/internal/flowimpl.h"
#include "flow/internal/parallel.h"

#define NO 8             /* orientations */
#define CELL 4           /* cell side, pixels */
#define DESC_CLIP 0.2f   /* Lowe, IJCV 2004 */
#define DESC_SCALE 512   /* byte quantisation (from memory, common dense-SIFT practice) */
#define DESC_FLOOR 0.02f /* norm floor: ~ one 10-grey-level step in the window; ours */

static inline int clampi(int v, int lo, int hi)
{
    return v < lo ? lo : (v > hi ? hi : v);
}

size_t sinew__describe_rows_floats(int w)
{
    /* at least one output row with its 2 * CELL rows of context */
    return (size_t)NO * (size_t)(w + CELL) * (size_t)(2 * CELL + 1);
}

/* Horizontal 4-sums of the orientation maps of source row r (clamped): hrow[o][i] =
 * sum_{k<4} G_o(clamp(i - CELL + k), r), for i in [0, w + CELL). */
static void orient_row(float *hrow, const float *lum, int w, int h, int r)
{
    static const float co[NO] = {1.f,  0.70710678f,  0.f, -0.70710678f,
                                 -1.f, -0.70710678f, 0.f, 0.70710678f};
    static const float si[NO] = {0.f, 0.70710678f,  1.f,  0.70710678f,
                                 0.f, -0.70710678f, -1.f, -0.70710678f};
    int y = clampi(r, 0, h - 1), ya = clampi(y - 1, 0, h - 1), yb = clampi(y + 1, 0, h - 1);
    const float *row = lum + (size_t)y * (size_t)w;
    const float *ra = lum + (size_t)ya * (size_t)w, *rb = lum + (size_t)yb * (size_t)w;
    size_t hw = (size_t)(w + CELL);
    float g[NO][4] = {{0}};
    /* sliding window over x = i - CELL + k */
    for (int i = -3; i < w + CELL; i++) {
        int x = clampi(i - CELL + 3, 0, w - 1);
        float gx = 0.5f * (row[clampi(x + 1, 0, w - 1)] - row[clampi(x - 1, 0, w - 1)]);
        float gy = 0.5f * (rb[x] - ra[x]);
        int slot = (i + 3) & 3;
        for (int o = 0; o < NO; o++) {
            float p = gx * co[o] + gy * si[o];
            g[o][slot] = p > 0.f ? p : 0.f;
        }
        if (i >= 0)
            for (int o = 0; o < NO; o++)
                hrow[(size_t)o * hw + (size_t)i] = (g[o][0] + g[o][1]) + (g[o][2] + g[o][3]);
    }
}

void sinew__describe(unsigned char *desc, const float *lum, int w, int h, float *work,
                     size_t work_floats, int nt)
{
    (void)nt; /* unused without OpenMP */
    size_t hw = (size_t)(w + CELL), per_row = (size_t)NO * hw;
    /* chunk of output rows [ya, yb) needs source rows [ya - CELL, yb + CELL) */
    size_t fit = work_floats / per_row;
    int chunk = fit > (size_t)(2 * CELL) ? (int)(fit - 2 * CELL) : 1;
    if (chunk > h)
        chunk = h;
    for (int ya = 0; ya < h; ya += chunk) {
        int yb = ya + chunk < h ? ya + chunk : h;
        int nr = yb - ya + 2 * CELL;
        SINEW_PARALLEL_FOR(nt)
        for (int k = 0; k < nr; k++)
            orient_row(work + (size_t)k * per_row, lum, w, h, ya - CELL + k);
        SINEW_PARALLEL_FOR(nt)
        for (int y = ya; y < yb; y++) {
            for (int x = 0; x < w; x++) {
                float v[4 * NO];
                for (int cy = 0; cy < 2; cy++) {
                    for (int cx = 0; cx < 2; cx++) {
                        float *c = v + (cy * 2 + cx) * NO;
                        /* cell rows y - CELL + cy*CELL .. +3, columns x - CELL + cx*CELL .. */
                        size_t col = (size_t)(x + cx * CELL);
                        for (int o = 0; o < NO; o++)
                            c[o] = 0.f;
                        for (int j = 0; j < CELL; j++) {
                            const float *hr = work + (size_t)(y - ya + cy * CELL + j) * per_row;
                            for (int o = 0; o < NO; o++)
                                c[o] += hr[(size_t)o * hw + col];
                        }
                    }
                }
                float n2 = 0.f;
                for (int k = 0; k < 4 * NO; k++)
                    n2 += v[k] * v[k];
                float inv = 1.f / fmaxf(sqrtf(n2), DESC_FLOOR);
                n2 = 0.f;
                for (int k = 0; k < 4 * NO; k++) {
                    v[k] = fminf(v[k] * inv, DESC_CLIP);
                    n2 += v[k] * v[k];
                }
                inv = n2 > 0.f ? 1.f / fmaxf(sqrtf(n2), DESC_FLOOR * DESC_CLIP) : 0.f;
                unsigned char *d = desc + ((size_t)y * (size_t)w + (size_t)x) * SINEW__DESC_BYTES;
                for (int k = 0; k < 4 * NO; k++) {
                    float q = v[k] * inv * (float)DESC_SCALE + 0.5f;
                    d[k] = (unsigned char)(q < 255.f ? q : 255.f);
                }
            }
        }
    }
}
