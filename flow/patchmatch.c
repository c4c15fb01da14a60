/* SPDX-License-Identifier: MIT */
/* Large-displacement matching of a grid of seeds by PatchMatch (Barnes, Shechtman,
 * Finkelstein, Goldman, "PatchMatch", SIGGRAPH 2009) on dense descriptors
 * (flow/descriptor.c), with matches kept only where forward and backward agree.
 *
 * Seeds sit on a regular grid of step d at the working level (as in Hu, Song, Li,
 * "Efficient Coarse-to-Fine PatchMatch for Large Displacement Optical Flow", CVPR 2016:
 * one match per seed, neighbours on the grid). A seed's flow is an integer displacement
 * whose target lies inside frame 1; its cost is the L1 distance of the two 32-byte
 * descriptors. Starting from zero flow, each of `iters` iterations runs
 *   1. random search, all seeds independently (parallel): `samples` targets drawn
 *      uniformly over the whole of frame 1 (no motion prior, so any displacement can be
 *      found), then samples in a square around the current best whose radius halves from
 *      half the frame size down to 1 px (PatchMatch's search);
 *   2. propagation, one serial scan over the grid (raster order on even iterations, the
 *      reverse on odd ones): a seed takes its left and upper (right and lower) grid
 *      neighbour's flow if that costs less, so one lucky draw spreads over the whole
 *      object within an iteration.
 * Random draws come from a counter-based hash of (seed, iteration, draw, direction), so
 * the result is independent of the thread count; the scan is serial.
 *
 * Consistency: a forward match p -> q = p + f survives if the backward flow b of the
 * backward seed nearest to q satisfies |f + b| <= d (the grid step: a seed's match is
 * only known to within its cell; ours), and vice versa. */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>

#include "flow/internal/flowimpl.h"
#include "flow/internal/parallel.h"

void sinew__pm_grid(int w, int h, int step, int *nx, int *ny)
{
    *nx = (w + step - 1) / step;
    *ny = (h + step - 1) / step;
}

static inline int seed_pos(int i, int step, int size)
{
    int p = i * step + step / 2;
    return p < size ? p : size - 1;
}

/* L1 distance of two descriptors (vectorises to sums of absolute differences). */
static inline int desc_cost(const unsigned char *restrict a, const unsigned char *restrict b)
{
    int s = 0;
    for (int k = 0; k < SINEW__DESC_BYTES; k++)
        s += abs((int)a[k] - (int)b[k]);
    return s;
}

static inline uint64_t mix64(uint64_t x)
{
    /* splitmix64 finaliser (Steele, Lea, Flood, OOPSLA 2014) */
    x ^= x >> 30;
    x *= 0xbf58476d1ce4e5b9ull;
    x ^= x >> 27;
    x *= 0x94d049bb133111ebull;
    return x ^ (x >> 31);
}

typedef struct pm_ctx {
    const unsigned char *d0, *d1;
    int w, h;         /* level size */
    int w0, h0, step; /* the grid's level (seed positions there, shifted right by shift) */
    int shift, nx, ny;
} pm_ctx;

static inline void seed_xy(const pm_ctx *c, int s, int *x, int *y)
{
    int px = seed_pos(s % c->nx, c->step, c->w0) >> c->shift;
    int py = seed_pos(s / c->nx, c->step, c->h0) >> c->shift;
    *x = px < c->w ? px : c->w - 1;
    *y = py < c->h ? py : c->h - 1;
}

static inline int cost_at(const pm_ctx *c, int x, int y, int tx, int ty)
{
    return desc_cost(c->d0 + ((size_t)y * (size_t)c->w + (size_t)x) * SINEW__DESC_BYTES,
                     c->d1 + ((size_t)ty * (size_t)c->w + (size_t)tx) * SINEW__DESC_BYTES);
}

/* Try target (tx, ty) for the seed at (x, y): keep it if inside and cheaper. */
static inline void try_target(const pm_ctx *c, int x, int y, int tx, int ty, int *fu, int *fv,
                              int *cost)
{
    if (tx < 0 || ty < 0 || tx >= c->w || ty >= c->h)
        return;
    int k = cost_at(c, x, y, tx, ty);
    if (k < *cost) {
        *cost = k;
        *fu = tx - x;
        *fv = ty - y;
    }
}

static void random_search(const pm_ctx *c, int *fu, int *fv, int *cost, int it,
                          const sinew__pm_params *p, int radius, uint64_t key, int nt)
{
    (void)nt; /* unused without OpenMP */
    int nseed = c->nx * c->ny;
    SINEW_PARALLEL_FOR(nt)
    for (int s = 0; s < nseed; s++) {
        int x, y;
        seed_xy(c, s, &x, &y);
        uint64_t r = mix64(key ^ mix64((uint64_t)s * (uint64_t)(nseed + 1) + (uint64_t)it));
        for (int k = 0; k < p->samples; k++) {
            r = mix64(r + 0x9e3779b97f4a7c15ull);
            int tx = (int)((r & 0xffffffffu) % (uint64_t)c->w);
            int ty = (int)((r >> 32) % (uint64_t)c->h);
            try_target(c, x, y, tx, ty, &fu[s], &fv[s], &cost[s]);
        }
        for (int rad = radius; rad >= 1; rad /= 2) {
            r = mix64(r + 0x9e3779b97f4a7c15ull);
            int span = 2 * rad + 1;
            int dx = (int)((r & 0xffffffffu) % (uint64_t)span) - rad;
            int dy = (int)((r >> 32) % (uint64_t)span) - rad;
            try_target(c, x, y, x + fu[s] + dx, y + fv[s] + dy, &fu[s], &fv[s], &cost[s]);
        }
    }
}

static void propagate(const pm_ctx *c, int *fu, int *fv, int *cost, int reverse)
{
    int nseed = c->nx * c->ny;
    for (int t = 0; t < nseed; t++) {
        int s = reverse ? nseed - 1 - t : t;
        int i = s % c->nx, j = s / c->nx, d = reverse ? 1 : -1, x, y;
        seed_xy(c, s, &x, &y);
        if (i + d >= 0 && i + d < c->nx)
            try_target(c, x, y, x + fu[s + d], y + fv[s + d], &fu[s], &fv[s], &cost[s]);
        if (j + d >= 0 && j + d < c->ny)
            try_target(c, x, y, x + fu[s + d * c->nx], y + fv[s + d * c->nx], &fu[s], &fv[s],
                       &cost[s]);
    }
}

void sinew__pm_level(int *fu, int *fv, int *cost, const unsigned char *d0, const unsigned char *d1,
                     int w, int h, int w0, int h0, int shift, int init, const sinew__pm_params *p,
                     uint64_t key, int nt)
{
    (void)nt; /* unused without OpenMP */
    pm_ctx c = {d0, d1, w, h, w0, h0, p->step, shift, 0, 0};
    sinew__pm_grid(w0, h0, p->step, &c.nx, &c.ny);
    int nseed = c.nx * c.ny;
    SINEW_PARALLEL_FOR(nt)
    for (int s = 0; s < nseed; s++) {
        int x, y;
        seed_xy(&c, s, &x, &y);
        /* start: zero, or the coarser level's flow doubled (clamped into the frame) */
        int tx = init ? x + 2 * fu[s] : x, ty = init ? y + 2 * fv[s] : y;
        tx = tx < 0 ? 0 : (tx >= w ? w - 1 : tx);
        ty = ty < 0 ? 0 : (ty >= h ? h - 1 : ty);
        fu[s] = tx - x;
        fv[s] = ty - y;
        cost[s] = cost_at(&c, x, y, tx, ty);
    }
    int radius = init ? p->radius : (w > h ? w : h) / 2;
    for (int it = 0; it < p->iters; it++) {
        random_search(&c, fu, fv, cost, it, p, radius, key + (uint64_t)shift * 0x1000193u, nt);
        propagate(&c, fu, fv, cost, it & 1);
    }
}

int sinew__pm_check(unsigned char *ok, const int *fu, const int *fv, const int *bu, const int *bv,
                    int w, int h, int step)
{
    int nx, ny, kept = 0;
    sinew__pm_grid(w, h, step, &nx, &ny);
    for (int s = 0; s < nx * ny; s++) {
        int x = seed_pos(s % nx, step, w), y = seed_pos(s / nx, step, h);
        int tx = x + fu[s], ty = y + fv[s];
        /* nearest seed to the target */
        int i = tx / step, j = ty / step;
        i = i < nx ? i : nx - 1;
        j = j < ny ? j : ny - 1;
        int t = j * nx + i, eu = fu[s] + bu[t], ev = fv[s] + bv[t];
        ok[s] = eu * eu + ev * ev <= step * step;
        kept += ok[s];
    }
    return kept;
}

int sinew__pm_support(unsigned char *ok, unsigned char *tmp, const int *fu, const int *fv, int nx,
                      int ny, int tol, int need)
{
    int kept = 0;
    for (int s = 0; s < nx * ny; s++) {
        tmp[s] = 0;
        if (!ok[s])
            continue;
        int i = s % nx, j = s / nx, agree = 0;
        for (int b = j - 2; b <= j + 2; b++) {
            for (int a = i - 2; a <= i + 2; a++) {
                if (a < 0 || b < 0 || a >= nx || b >= ny || (a == i && b == j))
                    continue;
                int t = b * nx + a, du = fu[t] - fu[s], dv = fv[t] - fv[s];
                agree += ok[t] && du * du + dv * dv <= tol * tol;
            }
        }
        tmp[s] = agree >= need;
        kept += tmp[s];
    }
    for (int s = 0; s < nx * ny; s++)
        ok[s] = tmp[s];
    return kept;
}

void sinew__desc_margin(float *d, const unsigned char *d0, const unsigned char *d1, const float *ua,
                        const float *va, const float *uc, const float *vc, int w, int h,
                        float evidence, int nt)
{
    (void)nt; /* unused without OpenMP */
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++) {
        for (int x = 0; x < w; x++) {
            size_t i = (size_t)y * (size_t)w + (size_t)x;
            int ax = (int)floorf((float)x + ua[i] + 0.5f),
                ay = (int)floorf((float)y + va[i] + 0.5f);
            int cx = (int)floorf((float)x + uc[i] + 0.5f),
                cy = (int)floorf((float)y + vc[i] + 0.5f);
            d[i] = 0.f;
            if (ax < 0 || ay < 0 || ax >= w || ay >= h || cx < 0 || cy < 0 || cx >= w || cy >= h)
                continue;
            const unsigned char *p = d0 + i * SINEW__DESC_BYTES;
            int ca = desc_cost(p, d1 + ((size_t)ay * (size_t)w + (size_t)ax) * SINEW__DESC_BYTES);
            int cc = desc_cost(p, d1 + ((size_t)cy * (size_t)w + (size_t)cx) * SINEW__DESC_BYTES);
            d[i] = (float)(ca - cc) + evidence;
        }
    }
}
