/* SPDX-License-Identifier: MIT */
/* Occlusion-aware weighted median of the flow near motion boundaries: the non-local
 * term of Sun, Roth and Black ("Secrets of optical flow estimation and their
 * principles", CVPR 2010; IJCV 2014), applied as a filter after each warping step.
 *
 * Each flow component at pixel i becomes the weighted median of the component over a
 * (2r+1)^2 window N(i), with weights
 *
 *   w_ij = exp(-|i - j|^2 / (2 s_s^2) - |I0(i) - I0(j)|^2 / (2 s_c^2)) * o(j)
 *
 * (spatial and colour closeness in frame 0; |.|^2 summed over the data channels,
 * intensities in 0..255 units) and o(j) in (0, 1] a soft visibility estimate of pixel j:
 *
 *   o(j) = exp(-div(j)^2 / (2 s_d^2)) where the flow divergence div < 0 (the pixel is being
 *          covered), else 1;  times  exp(-e(j)^2 / (2 s_e^2)),  e = I1(j + w(j)) - I0(j).
 *
 * Sun et al. divide by o(i) as well; that factor is common to the whole window and does
 * not move the median, so it is left out. The paper's constants as we recall them (from
 * memory) are s_s = s_c = 7, s_d = 0.3, s_e = 20; we use s_s = 7, s_d = 0.3 and
 * s_c = s_e = 10, tuned on the Middlebury-8 training pairs (mean EPE of the accurate
 * preset 0.299 -> 0.293, FlyingChairs-2 2.48 -> 2.38; docs/benchmarks.md).
 *
 * Only pixels near motion boundaries are filtered this way (as the fast variant of the
 * paper does): pixel i is a boundary pixel when some flow vector in its 5x5 neighbourhood
 * differs from the one at i by more than `band` pixels (L1). Other pixels keep the
 * caller's value (the plain median, when enabled).
 *
 * Speed (our choices, measured on the Middlebury pairs in docs/benchmarks.md): the window
 * is sampled on every second row and column aligned on the centre ((r+1)^2 samples
 * instead of (2r+1)^2; Middlebury mean EPE 0.330 vs 0.326 for the accurate preset at
 * 0.65x the time), weights come from a 1024-entry table of exp(-x), and neighbours with
 * x >= 9 (weight < 1.3e-4) are dropped. The weighted median itself is a deterministic
 * three-way weighted quickselect. */
#include <math.h>
#include <string.h>

#include "flow/internal/flowimpl.h"
#include "flow/internal/parallel.h"

#define WM_MAXR 10
#define WM_MAXN ((2 * WM_MAXR + 1) * (2 * WM_MAXR + 1))
#define WM_LUT 1024
#define WM_XMAX 9.0f

/* Value v such that the weights of the values below v sum to less than half of the
 * total and those of the values up to v to at least half. val/wt (n entries) are used
 * as scratch. Quickselect with a branch-free three-way split: each pass writes the
 * values below and above the pivot to the front of val/wt and of lv/lw (in order),
 * advancing each output index by a comparison result, so mispredictions stay rare. */
static float weighted_select(float *val, float *wt, float *lv, float *lw, int n, float total)
{
    float target = 0.5f * total;
    while (n > 1) {
        float pivot = val[n / 2];
        int nl = 0, nh = 0;
        float wless = 0.f, weq = 0.f;
        for (int i = 0; i < n; i++) {
            float x = val[i], wi = wt[i];
            int lt = x<pivot, gt = x> pivot;
            lv[nl] = x;
            lw[nl] = wi;
            nl += lt;
            val[nh] = x; /* nh <= i: never overwrites an unread entry */
            wt[nh] = wi;
            nh += gt;
            wless += lt ? wi : 0.f;
            weq += lt | gt ? 0.f : wi;
        }
        if (wless >= target && nl > 0) {
            /* continue in the lower part, now in lv/lw */
            float *t = val;
            val = lv;
            lv = t;
            t = wt;
            wt = lw;
            lw = t;
            n = nl;
        } else if (wless + weq >= target || nh == 0) {
            return pivot;
        } else {
            target -= wless + weq;
            n = nh;
        }
    }
    return val[0];
}

/* Soft visibility o(x) of rows ya .. yb - 1 into occ (row ya first): low where the flow
 * converges (negative divergence) or frame 1 does not match at x + w(x). */
static void visibility_rows(float *occ, const float *u, const float *v, const sinew__level *l0,
                            const sinew__level *l1, const sinew__wmed_params *p, int ya, int yb,
                            int nt)
{
    (void)nt; /* unused without OpenMP */
    int w = l0->w, h = l0->h;
    float kd = 1.f / (2.f * p->sigma_div * p->sigma_div);
    float ke = 255.f * 255.f / (2.f * p->sigma_err * p->sigma_err);
    SINEW_PARALLEL_FOR(nt)
    for (int y = ya; y < yb; y++) {
        for (int x = 0; x < w; x++) {
            size_t i = (size_t)y * (size_t)w + (size_t)x;
            int xl = x > 0 ? x - 1 : x, xr = x + 1 < w ? x + 1 : x;
            int yu = y > 0 ? y - 1 : y, yd = y + 1 < h ? y + 1 : y;
            float div = 0.f;
            if (xr > xl)
                div += (u[(size_t)y * w + xr] - u[(size_t)y * w + xl]) / (float)(xr - xl);
            if (yd > yu)
                div += (v[(size_t)yd * w + x] - v[(size_t)yu * w + x]) / (float)(yd - yu);
            float o = div < 0.f ? expf(-div * div * kd) : 1.f;
            float e = sinew__sample(l1->lum, w, h, (float)x + u[i], (float)y + v[i]) - l0->lum[i];
            occ[i - (size_t)ya * (size_t)w] = o * expf(-e * e * ke);
        }
    }
}

/* What the filter of one pixel reads: the flow, frame 0, the visibility of rows from
 * occ_row0 on, and the weight tables. */
typedef struct wm_window {
    const float *u, *v, *occ;
    const sinew__level *l0;
    int channels, r, occ_row0;
    float kc;
    const float *lut, *sx;
} wm_window;

/* Weighted median of the flow at pixel (x, y) over its sampled window into *uo, *vo
 * (unchanged when no neighbour has weight). */
static inline void filter_pixel(const wm_window *t, int x, int y, float *uo, float *vo)
{
    const sinew__level *l0 = t->l0;
    int w = l0->w, h = l0->h, r = t->r;
    size_t i = (size_t)y * (size_t)w + (size_t)x, oo = (size_t)t->occ_row0 * (size_t)w;
    float val[WM_MAXN], wt[WM_MAXN], vv[WM_MAXN], wt2[WM_MAXN], sv[WM_MAXN], sw[WM_MAXN];
    int n = 0;
    float total = 0.f;
    int y0 = y - r < 0 ? 0 : y - r, y1 = y + r >= h ? h - 1 : y + r;
    int x0 = x - r < 0 ? 0 : x - r, x1 = x + r >= w ? w - 1 : x + r;
    /* every second row and column of the window, aligned on the centre */
    y0 = y - ((y - y0) / 2) * 2;
    x0 = x - ((x - x0) / 2) * 2;
    for (int yy = y0; yy <= y1; yy += 2) {
        const float *srow = t->sx + (yy - y + r) * (2 * r + 1) + r - x;
        size_t ro = (size_t)yy * (size_t)w;
        for (int xx = x0; xx <= x1; xx += 2) {
            size_t j = ro + (size_t)xx;
            float dc = 0.f;
            for (int c = 0; c < t->channels; c++) {
                float d = l0->ch[c][j] - l0->ch[c][i]; /* ch[0] is lum for gray */
                dc += d * d;
            }
            float ex = srow[xx] + dc * t->kc;
            if (!(ex < WM_XMAX))
                continue;
            float wgt = t->lut[(int)(ex * (WM_LUT / WM_XMAX))] * t->occ[j - oo];
            val[n] = t->u[j];
            vv[n] = t->v[j];
            wt[n] = wgt;
            wt2[n] = wgt;
            total += wgt;
            n++;
        }
    }
    if (!(total > 1e-20f)) {
        *uo = t->u[i];
        *vo = t->v[i];
        return;
    }
    *uo = weighted_select(val, wt, sv, sw, n, total);
    *vo = weighted_select(vv, wt2, sv, sw, n, total);
}

void sinew__wmedian(float *uo, float *vo, const float *u, const float *v, const sinew__level *l0,
                    const sinew__level *l1, int channels, const sinew__wmed_params *p, float *occ,
                    size_t occ_floats, int nt)
{
    (void)nt; /* unused without OpenMP */
    int w = l0->w, h = l0->h, r = p->radius < WM_MAXR ? p->radius : WM_MAXR;
    /* weights exp(-x) from a table over x in [0, WM_XMAX); smaller weights are dropped
     * (below 1.2e-4 of a perfect neighbour's). Spatial exponents per window offset. */
    float lut[WM_LUT + 1], sx[WM_MAXN];
    for (int k = 0; k <= WM_LUT; k++)
        lut[k] = expf(-(float)k * (WM_XMAX / WM_LUT));
    float ks = 1.f / (2.f * p->sigma_space * p->sigma_space);
    for (int dy = -r; dy <= r; dy++)
        for (int dx = -r; dx <= r; dx++)
            sx[(dy + r) * (2 * r + 1) + dx + r] = (float)(dx * dx + dy * dy) * ks;
    wm_window t = {u,        v, occ, l0,
                   channels, r, 0,   255.f * 255.f / (2.f * p->sigma_color * p->sigma_color),
                   lut,      sx};
    /* chunks of rows: the visibility of a chunk's rows and r rows around them fits occ */
    size_t rows = occ_floats / (size_t)w;
    int chunk = rows >= (size_t)h ? h : (int)rows - 2 * r;
    for (int ca = 0; ca < h; ca += chunk) {
        int cb = ca + chunk < h ? ca + chunk : h;
        t.occ_row0 = ca - r > 0 ? ca - r : 0;
        visibility_rows(occ, u, v, l0, l1, p, t.occ_row0, cb + r < h ? cb + r : h, nt);
        /* boundary pixels cluster in some rows: dynamic schedule (rows are independent) */
        SINEW_PARALLEL_FOR_DYNAMIC(nt)
        for (int y = ca; y < cb; y++)
            for (int x = 0; x < w; x++)
                if (sinew__flow_edge(u, v, w, h, x, y, p->band))
                    filter_pixel(&t, x, y, &uo[(size_t)y * w + x], &vo[(size_t)y * w + x]);
    }
}
