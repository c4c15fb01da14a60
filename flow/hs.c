/* SPDX-License-Identifier: MIT */
/* Plain Horn-Schunck (Horn and Schunck, "Determining optical flow", AI 17, 1981) as a
 * reference baseline for benchmarks: quadratic brightness-constancy data term,
 * quadratic smoothness, the original Jacobi update
 *   U = Ubar - Ix (Ix Ubar + Iy Vbar + It) / (alpha^2 + Ix^2 + Iy^2),
 * linearised around the current flow after warping frame 1 (so it can run coarse to fine
 * like the main estimator). Jacobi with two buffers is independent of the thread count. */
#include <string.h>

#include "flow/internal/flowimpl.h"
#include "flow/internal/parallel.h"

int sinew__hs_planes(void)
{
    return 7; /* ix, iy, it, u2, v2, u0, v0 */
}

void sinew__hs_level(float *u, float *v, const sinew__level *l0, const sinew__level *l1,
                     float alpha, int iters, float *work, unsigned char *mask, int nt)
{
    int w = l0->w, h = l0->h;
    size_t n = (size_t)w * (size_t)h;
    float *ix = work, *iy = ix + n, *it = iy + n, *u2 = it + n, *v2 = u2 + n;
    float *u0 = v2 + n, *v0 = u0 + n;
    sinew__warp(it, mask, l1->lum, u, v, w, h, nt);
    SINEW_PARALLEL_FOR(nt)
    for (ptrdiff_t i = 0; i < (ptrdiff_t)n; i++)
        u2[i] = 0.5f * (it[i] + l0->lum[i]);
    sinew__gradient(ix, iy, u2, w, h, nt);
    SINEW_PARALLEL_FOR(nt)
    for (ptrdiff_t i = 0; i < (ptrdiff_t)n; i++) {
        float m = mask[i] ? 0.f : 1.f;
        it[i] = (it[i] - l0->lum[i]) * m;
        ix[i] *= m;
        iy[i] *= m;
    }
    memcpy(u0, u, n * sizeof(float));
    memcpy(v0, v, n * sizeof(float));
    float a2 = alpha * alpha;
    for (int k = 0; k < iters; k++) {
        SINEW_PARALLEL_FOR(nt)
        for (int y = 0; y < h; y++) {
            size_t o = (size_t)y * (size_t)w;
            size_t ou = y > 0 ? o - (size_t)w : o, od = y + 1 < h ? o + (size_t)w : o;
            for (int x = 0; x < w; x++) {
                int xl = x > 0 ? x - 1 : x, xr = x + 1 < w ? x + 1 : x;
                size_t i = o + (size_t)x;
                float ub = 0.25f * (u[o + xl] + u[o + xr] + u[ou + x] + u[od + x]);
                float vb = 0.25f * (v[o + xl] + v[o + xr] + v[ou + x] + v[od + x]);
                float r = it[i] + ix[i] * (ub - u0[i]) + iy[i] * (vb - v0[i]);
                float d = r / (a2 + ix[i] * ix[i] + iy[i] * iy[i]);
                u2[i] = ub - ix[i] * d;
                v2[i] = vb - iy[i] * d;
            }
        }
        memcpy(u, u2, n * sizeof(float));
        memcpy(v, v2, n * sizeof(float));
    }
}
