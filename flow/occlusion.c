/* SPDX-License-Identifier: MIT */
/* Forward-warp visibility for the occlusion rule of flow/check.c.
 *
 * Splatting the backward flow onto frame 0 gives the range map (how much of frame 1
 * lands on each frame-0 pixel); frame-0 pixels that nothing lands on are not seen in
 * frame 1. Splatting the forward flow onto frame 1 counts how many frame-0 pixels compete
 * for each target; with a depth map the nearest one wins (z-buffer). Both splats are
 * scatters, so they run serially in a fixed order: the sums are bit-identical for every
 * thread count. Cost: one pass over the pixels, a few ms per megapixel. */
#include "flow/internal/occlusion.h"

#include <math.h>
#include <string.h>

/* Left cell and right weight of a splat coordinate; the caller drops cells outside. */
static inline int cell(double p, double *frac)
{
    double f = floor(p);
    *frac = p - f;
    return (int)f;
}

/* The target of pixel (x, y) and its 2x2 footprint; 0 when the footprint is entirely
 * outside the grid or the vector is unknown. */
static int footprint(const float *v, int x, int y, int w, int h, int *x0, int *y0, double *fx,
                     double *fy)
{
    if (!isfinite(v[0]) || !isfinite(v[1]))
        return 0;
    double px = x + (double)v[0], py = y + (double)v[1];
    if (!(px > -1 && px < w && py > -1 && py < h))
        return 0;
    *x0 = cell(px, fx);
    *y0 = cell(py, fy);
    return 1;
}

void sinew__splat_density(const sinew_image *flow, float *out)
{
    int w = flow->width, h = flow->height;
    memset(out, 0, (size_t)w * h * sizeof *out);
    for (int y = 0; y < h; y++) {
        const float *row = sinew_image_row_f32(flow, y);
        for (int x = 0; x < w; x++) {
            int x0, y0;
            double fx, fy;
            if (!footprint(row + 2 * (size_t)x, x, y, w, h, &x0, &y0, &fx, &fy))
                continue;
            for (int j = 0; j < 2; j++) {
                int yy = y0 + j;
                if (yy < 0 || yy >= h)
                    continue;
                double wy = j ? fy : 1 - fy;
                for (int i = 0; i < 2; i++) {
                    int xx = x0 + i;
                    if (xx >= 0 && xx < w)
                        out[(size_t)yy * w + xx] += (float)(wy * (i ? fx : 1 - fx));
                }
            }
        }
    }
}

void sinew__splat_zmin(const sinew_image *flow, const sinew_image *depth, float *out)
{
    int w = flow->width, h = flow->height;
    size_t n = (size_t)w * h;
    for (size_t k = 0; k < n; k++)
        out[k] = INFINITY;
    for (int y = 0; y < h; y++) {
        const float *row = sinew_image_row_f32(flow, y);
        const float *zr = sinew_image_row_f32(depth, y);
        for (int x = 0; x < w; x++) {
            int x0, y0;
            double fx, fy;
            float z = zr[x];
            if (!(isfinite(z) && z > 0) ||
                !footprint(row + 2 * (size_t)x, x, y, w, h, &x0, &y0, &fx, &fy))
                continue;
            for (int j = 0; j < 2; j++) {
                int yy = y0 + j;
                if (yy < 0 || yy >= h || (j && fy == 0))
                    continue;
                for (int i = 0; i < 2; i++) {
                    int xx = x0 + i;
                    if (xx < 0 || xx >= w || (i && fx == 0))
                        continue;
                    float *c = out + (size_t)yy * w + xx;
                    if (z < *c)
                        *c = z;
                }
            }
        }
    }
}
