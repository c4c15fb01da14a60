/* SPDX-License-Identifier: MIT */
/* Edge-preserving sparse-to-dense interpolation of seed matches, after EpicFlow (Revaud,
 * Weinzaepfel, Harchaoui, Schmid, "EpicFlow: Edge-Preserving Interpolation of
 * Correspondences for Optical Flow", CVPR 2015), with an image-gradient edge map in place
 * of their trained edge detector.
 *
 * Cost map: c(x) = 1 + |grad L(x)| / IP_EDGE (central differences of the luminance in
 * [0, 1]; IP_EDGE = 8 grey levels per pixel doubles the cost; ours, a round value, not
 * tuned). The geodesic distance D(x, s) is the least sum of c along an 8-connected path
 * from seed s (step cost: mean of the two pixels' c, times sqrt 2 on diagonals). A raster
 * chamfer transform (forward and backward passes, repeated IP_PASSES times; Borgefors,
 * "Distance transformations in digital images", CVGIP 1986) gives every pixel its
 * geodesically nearest kept seed, whose match it takes (EpicFlow's first step; their
 * locally weighted affine fits over the K nearest seeds are not used here: the
 * variational refinement that follows smooths within regions). Paths rarely cross
 * strong edges, so a region takes the matches found inside it.
 * The labelling is serial (it does not depend on the thread count); the rest runs in
 * parallel over rows. */
#include <float.h>
#include <math.h>
#include <string.h>

#include "flow/internal/flowimpl.h"
#include "flow/internal/parallel.h"

#define IP_EDGE (8.f / 255.f)
#define IP_PASSES 2

/* Cost map into c (w*h floats). */
static void cost_map(float *c, const float *lum, int w, int h, int nt)
{
    (void)nt; /* unused without OpenMP */
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++) {
        int ya = y > 0 ? y - 1 : 0, yb = y < h - 1 ? y + 1 : h - 1;
        for (int x = 0; x < w; x++) {
            int xa = x > 0 ? x - 1 : 0, xb = x < w - 1 ? x + 1 : w - 1;
            size_t r = (size_t)y * (size_t)w;
            float gx = 0.5f * (lum[r + (size_t)xb] - lum[r + (size_t)xa]);
            float gy = 0.5f * (lum[(size_t)yb * (size_t)w + (size_t)x] -
                               lum[(size_t)ya * (size_t)w + (size_t)x]);
            c[r + (size_t)x] = 1.f + sqrtf(gx * gx + gy * gy) / IP_EDGE;
        }
    }
}

/* Relax pixel i from neighbour j (step length len). */
static inline void relax(float *dist, int *label, const float *c, size_t i, size_t j, float len)
{
    if (label[j] < 0)
        return;
    float d = dist[j] + 0.5f * (c[i] + c[j]) * len;
    if (d < dist[i]) {
        dist[i] = d;
        label[i] = label[j];
    }
}

void sinew__geodesic_label(float *dist, int *label, const float *c, int w, int h)
{
    const float r2 = 1.41421356f;
    for (int pass = 0; pass < IP_PASSES; pass++) {
        for (int y = 0; y < h; y++) {
            for (int x = 0; x < w; x++) {
                size_t i = (size_t)y * (size_t)w + (size_t)x;
                if (x > 0)
                    relax(dist, label, c, i, i - 1, 1.f);
                if (y > 0) {
                    size_t u = i - (size_t)w;
                    relax(dist, label, c, i, u, 1.f);
                    if (x > 0)
                        relax(dist, label, c, i, u - 1, r2);
                    if (x < w - 1)
                        relax(dist, label, c, i, u + 1, r2);
                }
            }
        }
        for (int y = h - 1; y >= 0; y--) {
            for (int x = w - 1; x >= 0; x--) {
                size_t i = (size_t)y * (size_t)w + (size_t)x;
                if (x < w - 1)
                    relax(dist, label, c, i, i + 1, 1.f);
                if (y < h - 1) {
                    size_t d = i + (size_t)w;
                    relax(dist, label, c, i, d, 1.f);
                    if (x > 0)
                        relax(dist, label, c, i, d - 1, r2);
                    if (x < w - 1)
                        relax(dist, label, c, i, d + 1, r2);
                }
            }
        }
    }
}

int sinew__interpolate(float *u, float *v, float *dist, int *label, const float *lum, int w, int h,
                       const sinew__seeds *sd, int nt)
{
    size_t n = (size_t)w * (size_t)h;
    int used = 0;
    for (size_t i = 0; i < n; i++) {
        dist[i] = FLT_MAX;
        label[i] = -1;
    }
    for (int j = 0; j < sd->ny; j++) {
        int y = j * sd->step + sd->step / 2 < h ? j * sd->step + sd->step / 2 : h - 1;
        for (int i = 0; i < sd->nx; i++) {
            int x = i * sd->step + sd->step / 2 < w ? i * sd->step + sd->step / 2 : w - 1;
            int s = j * sd->nx + i;
            if (!sd->ok[s])
                continue;
            size_t q = (size_t)y * (size_t)w + (size_t)x;
            dist[q] = 0.f;
            label[q] = s;
            used++;
        }
    }
    if (!used)
        return 0;
    cost_map(u, lum, w, h, nt); /* u holds the cost map until the labels are known */
    sinew__geodesic_label(dist, label, u, w, h);
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++) {
        for (int x = 0; x < w; x++) {
            size_t i = (size_t)y * (size_t)w + (size_t)x;
            int s = label[i];
            u[i] = (float)sd->fu[s];
            v[i] = (float)sd->fv[s];
        }
    }
    return used;
}
