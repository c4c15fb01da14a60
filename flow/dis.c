/* SPDX-License-Identifier: MIT */
/* Dense inverse search at one pyramid level (Kroeger, Timofte, Dai, Van Gool, "Fast
 * Optical Flow using Dense Inverse Search", ECCV 2016).
 *
 * A regular grid of square patches covers the level (the last row/column is clamped to
 * the border). Each patch starts from the dense flow at its centre (the upsampled result
 * of the coarser level) and is refined by inverse-compositional Gauss-Newton on the
 * mean-normalised patch (Baker and Matthews 2004): the Hessian of the frame-0 template
 * is computed once, each iteration samples frame 1 at the current displacement. If the
 * search ends with a larger error than it started with, or wanders further than one
 * patch size, the patch keeps its initial flow (as in the paper's outlier rule).
 * Densification: every pixel takes the weighted average of the flows of the patches
 * covering it, weight 1 / max(1, |I1(x + u_i) - I0(x)|) with intensities in 0..255
 * units (paper, eq. 3).
 *
 * Determinism: patches are independent (parallel over patch rows); densification is a
 * gather over pixel rows that visits covering patches in a fixed order. */
#include <math.h>

#include "flow/internal/flowimpl.h"
#include "flow/internal/parallel.h"

void sinew__dis_grid(int w, int h, const sinew__dis_params *p, int *nx, int *ny)
{
    int ps = p->patch, st = p->stride;
    *nx = w <= ps ? 1 : (w - ps + st - 1) / st + 1;
    *ny = h <= ps ? 1 : (h - ps + st - 1) / st + 1;
}

static int patch_origin(int i, int stride, int size, int ps)
{
    int x = i * stride;
    if (x > size - ps)
        x = size - ps;
    return x < 0 ? 0 : x;
}

/* Sample a ps x ps patch of img at origin (x0 + dx, y0 + dy) into out. Coordinates are
 * clamped per pixel; the bilinear weights are shared by the whole patch. */
static void sample_patch(float *restrict out, const float *img, int w, int h, int x0, int y0,
                         float dx, float dy, int ps)
{
    float fxf = floorf(dx), fyf = floorf(dy);
    float ax = dx - fxf, ay = dy - fyf;
    int bx = x0 + (int)fxf, by = y0 + (int)fyf;
    float w00 = (1 - ax) * (1 - ay), w01 = ax * (1 - ay), w10 = (1 - ax) * ay, w11 = ax * ay;
    for (int j = 0; j < ps; j++) {
        int ya = by + j, yb = ya + 1;
        ya = ya < 0 ? 0 : (ya >= h ? h - 1 : ya);
        yb = yb < 0 ? 0 : (yb >= h ? h - 1 : yb);
        const float *ra = img + (size_t)ya * (size_t)w, *rb = img + (size_t)yb * (size_t)w;
        int inside = bx >= 0 && bx + ps < w;
        if (inside) {
            const float *a0 = ra + bx, *b0 = rb + bx;
            for (int i = 0; i < ps; i++)
                out[j * ps + i] = w00 * a0[i] + w01 * a0[i + 1] + w10 * b0[i] + w11 * b0[i + 1];
        } else {
            for (int i = 0; i < ps; i++) {
                int xa = bx + i, xb = xa + 1;
                xa = xa < 0 ? 0 : (xa >= w ? w - 1 : xa);
                xb = xb < 0 ? 0 : (xb >= w ? w - 1 : xb);
                out[j * ps + i] = w00 * ra[xa] + w01 * ra[xb] + w10 * rb[xa] + w11 * rb[xb];
            }
        }
    }
}

#define MAXPS 32

/* Zero-mean SSD between sample s and template t (both mean-removed on the fly). */
static float patch_error(float *restrict e, const float *restrict s, const float *restrict t,
                         float mt, int n)
{
    float ms = 0.f;
    for (int i = 0; i < n; i++)
        ms += s[i];
    ms /= (float)n;
    float ssd = 0.f;
    for (int i = 0; i < n; i++) {
        e[i] = (s[i] - ms) - (t[i] - mt);
        ssd += e[i] * e[i];
    }
    return ssd;
}

static void search_patch(float *pu, float *pv, const sinew__level *l0, const sinew__level *l1,
                         int x0, int y0, int ps, int iters, float max_move, float u0, float v0)
{
    float t[MAXPS * MAXPS], gx[MAXPS * MAXPS], gy[MAXPS * MAXPS];
    float s[MAXPS * MAXPS], e[MAXPS * MAXPS];
    int w = l0->w, n = ps * ps;
    float h11 = 0.f, h12 = 0.f, h22 = 0.f, mt = 0.f;
    for (int j = 0; j < ps; j++) {
        size_t o = (size_t)(y0 + j) * (size_t)w + (size_t)x0;
        for (int i = 0; i < ps; i++) {
            float a = l0->gx[o + i], b = l0->gy[o + i];
            t[j * ps + i] = l0->lum[o + i];
            gx[j * ps + i] = a;
            gy[j * ps + i] = b;
            mt += l0->lum[o + i];
            h11 += a * a;
            h12 += a * b;
            h22 += b * b;
        }
    }
    mt /= (float)n;
    /* small ridge keeps flat patches well-posed (common practice) */
    float ridge = 1e-6f * (float)n;
    h11 += ridge;
    h22 += ridge;
    float det = h11 * h22 - h12 * h12;
    *pu = u0;
    *pv = v0;
    if (!(det > 1e-12f))
        return;
    float i11 = h22 / det, i12 = -h12 / det, i22 = h11 / det;
    float u = u0, v = v0, first = -1.f;
    for (int it = 0; it < iters; it++) {
        sample_patch(s, l1->lum, l1->w, l1->h, x0, y0, u, v, ps);
        float ssd = patch_error(e, s, t, mt, n);
        if (it == 0)
            first = ssd;
        float b1 = 0.f, b2 = 0.f;
        for (int i = 0; i < n; i++) {
            b1 += gx[i] * e[i];
            b2 += gy[i] * e[i];
        }
        float du = i11 * b1 + i12 * b2, dv = i12 * b1 + i22 * b2;
        u -= du;
        v -= dv;
        if (du * du + dv * dv < 1e-6f)
            break;
    }
    sample_patch(s, l1->lum, l1->w, l1->h, x0, y0, u, v, ps);
    float last = patch_error(e, s, t, mt, n);
    float ddu = u - u0, ddv = v - v0;
    if (!(last <= first) || ddu * ddu + ddv * ddv > max_move * max_move)
        return;
    *pu = u;
    *pv = v;
}

/* Densification of row y: each pixel's flow becomes the average of the flows of the
 * patches covering it, weighted by 1 / max(1, |I1(x + w) - I0(x)| in 0..255 units);
 * pixels no patch covers keep theirs. au, av, aw: w floats of scratch each. */
static void densify_row(float *u, float *v, const sinew__level *l0, const sinew__level *l1,
                        const sinew__dis_params *p, const float *pu, const float *pv, int nx,
                        int ny, int y, float *restrict au, float *restrict av, float *restrict aw)
{
    int w = l0->w, h = l0->h, ps = p->patch < MAXPS ? p->patch : MAXPS, st = p->stride;
    size_t ro = (size_t)y * (size_t)w;
    for (int x = 0; x < w; x++)
        au[x] = av[x] = aw[x] = 0.f;
    const float *i0 = l0->lum + ro;
    for (int j = 0; j < ny; j++) {
        int y0 = patch_origin(j, st, h, ps);
        if (y < y0 || y >= y0 + ps)
            continue;
        for (int i = 0; i < nx; i++) {
            int x0 = patch_origin(i, st, w, ps);
            float fu = pu[(size_t)j * nx + i], fv = pv[(size_t)j * nx + i];
            float fxf = floorf(fu), fyf = floorf(fv);
            float ax = fu - fxf, ay = fv - fyf;
            int ya = y + (int)fyf, yb = ya + 1;
            ya = ya < 0 ? 0 : (ya >= h ? h - 1 : ya);
            yb = yb < 0 ? 0 : (yb >= h ? h - 1 : yb);
            const float *ra = l1->lum + (size_t)ya * (size_t)w;
            const float *rb = l1->lum + (size_t)yb * (size_t)w;
            for (int x = x0; x < x0 + ps; x++) {
                int xa = x + (int)fxf, xb = xa + 1;
                xa = xa < 0 ? 0 : (xa >= w ? w - 1 : xa);
                xb = xb < 0 ? 0 : (xb >= w ? w - 1 : xb);
                float top = ra[xa] + ax * (ra[xb] - ra[xa]);
                float bot = rb[xa] + ax * (rb[xb] - rb[xa]);
                float d = fabsf(top + ay * (bot - top) - i0[x]) * 255.0f;
                float lam = 1.0f / (d > 1.0f ? d : 1.0f);
                au[x] += lam * fu;
                av[x] += lam * fv;
                aw[x] += lam;
            }
        }
    }
    for (int x = 0; x < w; x++) {
        if (aw[x] > 0.f) {
            u[ro + x] = au[x] / aw[x];
            v[ro + x] = av[x] / aw[x];
        }
    }
}

void sinew__dis_level(float *u, float *v, const sinew__level *l0, const sinew__level *l1,
                      const sinew__dis_params *p, float *pu, float *pv, float *accw,
                      size_t acc_floats, int nt)
{
    (void)nt; /* unused without OpenMP */
    int w = l0->w, h = l0->h, ps = p->patch, st = p->stride, nx, ny;
    if (ps > MAXPS)
        ps = MAXPS;
    sinew__dis_grid(w, h, p, &nx, &ny);
    SINEW_PARALLEL_FOR(nt)
    for (int j = 0; j < ny; j++) {
        int y0 = patch_origin(j, st, h, ps);
        for (int i = 0; i < nx; i++) {
            int x0 = patch_origin(i, st, w, ps);
            size_t c = (size_t)(y0 + ps / 2) * (size_t)w + (size_t)(x0 + ps / 2);
            search_patch(&pu[(size_t)j * nx + i], &pv[(size_t)j * nx + i], l0, l1, x0, y0, ps,
                         p->iters, p->max_move, u[c], v[c]);
        }
    }
    /* densification: gather per pixel row, in chunks of rows whose three accumulator
     * planes fit accw (rows are independent) */
    size_t rows = acc_floats / (3 * (size_t)w);
    int chunk = rows < (size_t)h ? (int)rows : h;
    for (int ca = 0; ca < h; ca += chunk) {
        int cb = ca + chunk < h ? ca + chunk : h;
        size_t cn = (size_t)w * (size_t)(cb - ca);
        SINEW_PARALLEL_FOR(nt)
        for (int y = ca; y < cb; y++) {
            size_t ao = (size_t)(y - ca) * (size_t)w;
            densify_row(u, v, l0, l1, p, pu, pv, nx, ny, y, accw + ao, accw + cn + ao,
                        accw + 2 * cn + ao);
        }
    }
}
