/* SPDX-License-Identifier: MIT */
/* Semi-global matching (Hirschmüller, "Stereo processing by semiglobal matching and
 * mutual information", PAMI 30(2):328-341, 2008) on census matching costs (Zabih &
 * Woodfill, "Non-parametric local transforms for computing visual correspondence",
 * ECCV 1994).
 *
 *   1. frames -> luma (float), 5x5 census signature per pixel (24 bits, bit set where
 *      the neighbour is darker than the centre; coordinates clamped at the border);
 *   2. per band of rows: cost C(x, y, d) = Hamming distance between the left signature
 *      at x and the right one at x - d (uint8; candidates falling outside the right
 *      frame copy the cost of the nearest candidate inside);
 *   3. aggregation along 4 or 8 straight paths,
 *        Lr(p, d) = C(p, d) + min(Lr(p-r, d), Lr(p-r, d±1) + P1, min_k Lr(p-r, k) + P2)
 *                   - min_k Lr(p-r, k),
 *      summed into S (uint16), one direction after the other, the independent paths
 *      (straight lines of pixels) of a direction in parallel;
 *   4. winner-take-all on S for the left view and, along the diagonals of the same
 *      volume, for the right view; parabola through S(d-1), S(d), S(d+1) for the
 *      sub-pixel offset; peak-ratio confidence 1 - S1/S2;
 *   5. 3x3 median of both maps, left-right check (flow/check.h bits), holes filled per
 *      row with the lower of the nearest kept disparities (the background side).
 * Costs and aggregation are integers and every parallel loop writes disjoint outputs,
 * so the results are bit-identical for any thread count. Memory: luma and census of both
 * frames (24 B/px), the four float maps (16 B/px), and 3 bytes per pixel and disparity
 * for the rows of one band (C and S), bands chosen from params.memory_budget. */
#include "flow/stereo.h"

#include <stdlib.h>
#include <math.h>
#include <string.h>

#include "flow/internal/base.h"
#include "flow/internal/parallel.h"

#define CENSUS_RX 2 /* 5x5 window: 24 bits (measured against 9x7 and 7x7, docs/methods.md) */
#define CENSUS_RY 2
#define CENSUS_BITS ((2 * CENSUS_RX + 1) * (2 * CENSUS_RY + 1) - 1)
#define BAND_OVERLAP 48 /* rows of run-up for vertical paths at band edges (our choice) */
#define BIG_COST 0x3fff /* sentinel outside the disparity range; P1 + BIG fits uint16 */
#define MAX_DISPARITIES 1024

void sinew_stereo_params_default(sinew_stereo_params *p)
{
    if (!p)
        return;
    memset(p, 0, sizeof *p);
    p->min_disparity = 0;
    p->num_disparities = 0;
    p->paths = 8;
    p->p1 = 20;
    p->p2 = 100;
    p->p2_edge = 4.0;
    p->lr_tolerance = 1.0;
    p->median = 1;
    p->memory_budget = (size_t)512 << 20;
}

int sinew_stereo_preset(sinew_stereo_params *p, const char *name)
{
    if (!p || !name)
        return SINEW_EINVAL;
    if (strcmp(name, "fast") == 0) {
        sinew_stereo_params_default(p);
        p->paths = 4;
        return SINEW_OK;
    }
    if (strcmp(name, "balanced") == 0) {
        sinew_stereo_params_default(p);
        return SINEW_OK;
    }
    return SINEW_EINVAL;
}

int sinew_stereo_num_disparities(const sinew_stereo_params *p, int width)
{
    if (p->num_disparities > 0)
        return p->num_disparities;
    int n = (width / 6 + 15) / 16 * 16;
    if (n < 16)
        n = 16;
    return n > 256 ? 256 : n;
}

static int check_params(sinew_ctx *ctx, const sinew_stereo_params *p)
{
    if (p->num_disparities < 0 || p->num_disparities > MAX_DISPARITIES)
        return sinew__fail(ctx, SINEW_EINVAL, "stereo: num_disparities must be 0..%d (got %d)",
                           MAX_DISPARITIES, p->num_disparities);
    if (p->min_disparity < -MAX_DISPARITIES || p->min_disparity > MAX_DISPARITIES)
        return sinew__fail(ctx, SINEW_EINVAL, "stereo: min_disparity must be within +-%d",
                           MAX_DISPARITIES);
    if (p->paths != 4 && p->paths != 8)
        return sinew__fail(ctx, SINEW_EINVAL, "stereo: paths must be 4 or 8 (got %d)", p->paths);
    if (p->p1 < 0 || p->p2 < p->p1 || p->p2 > 1000)
        return sinew__fail(ctx, SINEW_EINVAL,
                           "stereo: penalties need 0 <= p1 <= p2 <= 1000 (got %d, %d)", p->p1,
                           p->p2);
    if (!isfinite(p->p2_edge) || p->p2_edge < 0 || p->p2_edge > 255)
        return sinew__fail(ctx, SINEW_EINVAL, "stereo: p2_edge must be within 0..255");
    if (!isfinite(p->lr_tolerance) || p->lr_tolerance < 0)
        return sinew__fail(ctx, SINEW_EINVAL, "stereo: lr_tolerance must be finite and >= 0");
    return SINEW_OK;
}

static int check_frame(sinew_ctx *ctx, const sinew_image *f, const char *what)
{
    if (!f || !f->data || (f->type != SINEW_U8 && f->type != SINEW_U16) || f->channels < 1 ||
        f->channels > 4)
        return sinew__fail(ctx, SINEW_EINVAL,
                           "stereo: %s frame must be 8- or 16-bit, 1..4 channels", what);
    return SINEW_OK;
}

static int check_out(sinew_ctx *ctx, const sinew_image *im, int w, int h, sinew_type t,
                     const char *what)
{
    if (!im)
        return SINEW_OK;
    if (!im->data || im->type != t || im->channels != 1)
        return sinew__fail(ctx, SINEW_EINVAL, "stereo: %s output has the wrong type", what);
    if (im->width != w || im->height != h)
        return sinew__fail(ctx, SINEW_ESIZE, "stereo: %s output is %dx%d, frames are %dx%d", what,
                           im->width, im->height, w, h);
    return SINEW_OK;
}

/* ---- step 1: luma and census ---- */

static void luma(const sinew_image *img, float *g, int nt)
{
    (void)nt; /* unused without OpenMP */
    const int w = img->width, h = img->height, c = img->channels;
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++) {
        float *o = g + (size_t)y * w;
        for (int x = 0; x < w; x++) {
            double v[3];
            for (int k = 0; k < 3; k++) {
                const int ch = c >= 3 ? k : 0;
                const size_t i = (size_t)x * c + ch;
                v[k] = img->type == SINEW_U8 ? sinew_image_row_u8(img, y)[i]
                                             : sinew_image_row_u16(img, y)[i] / 257.0;
            }
            o[x] = (float)(0.299 * v[0] + 0.587 * v[1] + 0.114 * v[2]);
        }
    }
}

static void census(const float *g, uint64_t *cs, int w, int h, int nt)
{
    (void)nt; /* unused without OpenMP */
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++) {
        for (int x = 0; x < w; x++) {
            const float c = g[(size_t)y * w + x];
            uint64_t s = 0;
            for (int j = -CENSUS_RY; j <= CENSUS_RY; j++) {
                const int yy = y + j < 0 ? 0 : (y + j >= h ? h - 1 : y + j);
                const float *row = g + (size_t)yy * w;
                for (int i = -CENSUS_RX; i <= CENSUS_RX; i++) {
                    if (i == 0 && j == 0)
                        continue;
                    const int xx = x + i < 0 ? 0 : (x + i >= w ? w - 1 : x + i);
                    s = (s << 1) | (uint64_t)(row[xx] < c);
                }
            }
            cs[(size_t)y * w + x] = s;
        }
    }
}

/* ---- steps 2 and 3: costs and aggregation over one band ---- */

typedef struct band {
    int w, h, nd, dmin; /* band width, rows, disparities, smallest disparity */
    int y0;             /* first image row of the band */
    uint8_t *c;         /* [h][w][nd] */
    uint16_t *s;        /* [h][w][nd] */
    const float *g;     /* left luma of the band's first row ([h][w]) */
    float p2_edge;      /* luma step (gray levels) above which P2 is reduced; 0 = never */
} band;

static void band_costs(band *b, const uint64_t *cl, const uint64_t *cr, int nt)
{
    (void)nt; /* unused without OpenMP */
    const int w = b->w, nd = b->nd;
    SINEW_PARALLEL_FOR(nt)
    for (int yb = 0; yb < b->h; yb++) {
        const size_t row = (size_t)(b->y0 + yb) * w;
        for (int x = 0; x < w; x++) {
            uint8_t *c = b->c + ((size_t)yb * w + x) * nd;
            const uint64_t sl = cl[row + x];
            int first = -1, last = -1;
            for (int d = 0; d < nd; d++) {
                const int xr = x - (b->dmin + d);
                if (xr < 0 || xr >= w)
                    continue;
                c[d] = (uint8_t)__builtin_popcountll(sl ^ cr[row + xr]);
                if (first < 0)
                    first = d;
                last = d;
            }
            if (first < 0) {
                memset(c, CENSUS_BITS / 2, (size_t)nd);
                continue;
            }
            for (int d = 0; d < first; d++)
                c[d] = c[first];
            for (int d = last + 1; d < nd; d++)
                c[d] = c[last];
        }
    }
}

/* One path step: out[d] = c[d] + min(prev[d], prev[d±1] + p1, pmin + p2) - pmin, where
 * prev and out point one past a BIG_COST sentinel and have one after. Returns min out. */
static uint16_t path_step(uint16_t *restrict out, const uint16_t *restrict prev, uint16_t pmin,
                          const uint8_t *restrict c, int nd, int p1, int p2)
{
    /* all in 16 bits (values stay below BIG_COST + P2 + 24) so the loops vectorise */
    const uint16_t jump = (uint16_t)(pmin + p2), q1 = (uint16_t)p1;
    for (int d = 0; d < nd; d++) {
        uint16_t v = prev[d];
        const uint16_t a = (uint16_t)(prev[d - 1] + q1), b = (uint16_t)(prev[d + 1] + q1);
        v = a < v ? a : v;
        v = b < v ? b : v;
        v = jump < v ? jump : v;
        out[d] = (uint16_t)(c[d] + v - pmin);
    }
    uint16_t mn = BIG_COST;
    for (int d = 0; d < nd; d++)
        mn = out[d] < mn ? out[d] : mn;
    return mn;
}

/* First pixel of a path: Lr = C. */
static uint16_t path_start(uint16_t *restrict out, const uint8_t *restrict c, int nd)
{
    int mn = BIG_COST;
    for (int d = 0; d < nd; d++) {
        out[d] = c[d];
        mn = c[d] < mn ? c[d] : mn;
    }
    return (uint16_t)mn;
}

static void add_to(uint16_t *restrict s, const uint16_t *restrict l, int nd)
{
    for (int d = 0; d < nd; d++)
        s[d] = (uint16_t)(s[d] + l[d]);
}

/* Start pixel of chain i of direction (dx, dy): chains start on the row the path
 * enters from (dy != 0), then on the column it enters from (dx != 0). */
static void chain_start(int i, int w, int h, int dx, int dy, int *x, int *y)
{
    if (dy != 0 && i < w) {
        *x = i;
        *y = dy > 0 ? 0 : h - 1;
        return;
    }
    if (dy != 0)
        i -= w;
    *x = dx > 0 ? 0 : w - 1;
    *y = dy > 0 ? i + 1 : (dy < 0 ? h - 2 - i : i);
}

/* Add the path costs Lr of direction (dx, dy) into S. Every path is a chain of pixels
 * independent of the others, so chains run in parallel (each pixel on exactly one
 * chain: disjoint writes). tmp: per thread 2 * (nd + 2) uint16. */
static void aggregate_dir(band *b, int dx, int dy, int first, uint16_t *tmp, int p1, int p2, int nt)
{
    (void)nt; /* unused without OpenMP */
    const int w = b->w, h = b->h, nd = b->nd;
    const size_t stride = (size_t)nd + 2;
    const int nchains = (dy ? w : 0) + (dx ? (dy ? h - 1 : h) : 0);
    SINEW_PARALLEL_FOR(nt)
    for (int i = 0; i < nchains; i++) {
        uint16_t *buf = tmp + (size_t)sinew__thread_id() * 2 * stride;
        uint16_t *l[2] = {buf + 1, buf + stride + 1};
        l[0][-1] = l[0][nd] = l[1][-1] = l[1][nd] = BIG_COST;
        int x, y;
        chain_start(i, w, h, dx, dy, &x, &y);
        uint16_t pmin = 0;
        float gprev = 0;
        for (int k = 0; x >= 0 && x < w && y >= 0 && y < h; k++, x += dx, y += dy) {
            const size_t o = ((size_t)y * w + x) * nd;
            const float gcur = b->g[(size_t)y * w + x];
            uint16_t *cur = l[k & 1];
            int p2e = p2;
            if (b->p2_edge > 0) {
                const float step = fabsf(gcur - gprev);
                if (step > b->p2_edge)
                    p2e = (int)((float)p2 * b->p2_edge / step);
                p2e = p2e < p1 ? p1 : p2e;
            }
            pmin = k == 0 ? path_start(cur, b->c + o, nd)
                          : path_step(cur, l[(k + 1) & 1], pmin, b->c + o, nd, p1, p2e);
            gprev = gcur;
            if (first)
                memcpy(b->s + o, cur, (size_t)nd * sizeof *cur);
            else
                add_to(b->s + o, cur, nd);
        }
    }
}

/* All paths of one band: S = sum over directions of Lr. */
static void aggregate(band *b, int paths, uint16_t *tmp, int p1, int p2, int nt)
{
    static const int dirs[8][2] = {{1, 0}, {-1, 0}, {0, 1},  {0, -1},
                                   {1, 1}, {-1, 1}, {1, -1}, {-1, -1}};
    /* the first direction (left to right: one path per row) stores, the others add */
    for (int r = 0; r < paths; r++)
        aggregate_dir(b, dirs[r][0], dirs[r][1], r == 0, tmp, p1, p2, nt);
}

/* ---- step 4: winner-take-all ---- */

static float parabola(int d, int nd, const uint16_t *sm, const uint16_t *s0, const uint16_t *sp)
{
    if (d <= 0 || d >= nd - 1 || !sm || !sp)
        return 0.0f;
    const int den = *sm - 2 * *s0 + *sp;
    if (den <= 0)
        return 0.0f;
    return (float)(*sm - *sp) / (float)(2 * den);
}

/* Left and right winners for the band rows [a, b) (image rows), written to full maps. */
static void band_winners(const band *b, int a, int e, float *dl, float *dr, float *conf, int nt)
{
    (void)nt; /* unused without OpenMP */
    const int w = b->w, nd = b->nd;
    SINEW_PARALLEL_FOR(nt)
    for (int y = a; y < e; y++) {
        const uint16_t *srow = b->s + (size_t)(y - b->y0) * w * nd;
        for (int x = 0; x < w; x++) {
            const uint16_t *s = srow + (size_t)x * nd;
            int best = 0;
            for (int d = 1; d < nd; d++)
                if (s[d] < s[best])
                    best = d;
            int second = BIG_COST * 4;
            for (int d = 0; d < nd; d++)
                if ((d < best - 1 || d > best + 1) && s[d] < second)
                    second = s[d];
            const size_t i = (size_t)y * w + x;
            dl[i] =
                (float)(b->dmin + best) + parabola(best, nd, best > 0 ? s + best - 1 : NULL,
                                                   s + best, best < nd - 1 ? s + best + 1 : NULL);
            conf[i] =
                second > 0 && second < BIG_COST * 4 ? 1.0f - (float)s[best] / (float)second : 0.0f;
            /* right view: right pixel x, disparity dmin + d -> left pixel x + dmin + d */
            int rb = -1;
            for (int d = 0; d < nd; d++) {
                const int xl = x + b->dmin + d;
                if (xl < 0 || xl >= w)
                    continue;
                if (rb < 0 ||
                    srow[(size_t)xl * nd + d] < srow[(size_t)(x + b->dmin + rb) * nd + rb])
                    rb = d;
            }
            if (rb < 0) {
                dr[i] = NAN;
                continue;
            }
            const int xl = x + b->dmin + rb;
            const uint16_t *sm = rb > 0 && xl > 0 ? srow + (size_t)(xl - 1) * nd + rb - 1 : NULL;
            const uint16_t *sp =
                rb < nd - 1 && xl < w - 1 ? srow + (size_t)(xl + 1) * nd + rb + 1 : NULL;
            dr[i] = (float)(b->dmin + rb) + parabola(rb, nd, sm, srow + (size_t)xl * nd + rb, sp);
        }
    }
}

/* ---- step 5: median, check, fill ---- */

static void median3(float *dst, const float *src, int w, int h, int nt)
{
    (void)nt; /* unused without OpenMP */
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++) {
        for (int x = 0; x < w; x++) {
            const float centre = src[(size_t)y * w + x];
            if (isnan(centre)) {
                dst[(size_t)y * w + x] = centre;
                continue;
            }
            float v[9];
            int n = 0;
            for (int j = -1; j <= 1; j++)
                for (int i = -1; i <= 1; i++) {
                    const int yy = y + j, xx = x + i;
                    if (yy < 0 || yy >= h || xx < 0 || xx >= w)
                        continue;
                    const float f = src[(size_t)yy * w + xx];
                    if (isnan(f))
                        continue;
                    int k = n++;
                    for (; k > 0 && v[k - 1] > f; k--)
                        v[k] = v[k - 1];
                    v[k] = f;
                }
            dst[(size_t)y * w + x] = v[n / 2];
        }
    }
}

static int nearest_index(float x, int w)
{
    const long i = lroundf(x);
    return i < 0 ? 0 : (i >= w ? w - 1 : (int)i);
}

/* Left-right check of the left map (mask bits) and of the right map (NaN where it
 * fails), then fill the left map's rejected pixels from the background side. */
static void check_fill(float *dl, float *dr, uint8_t *mask, const float *dl_raw, int w, int h,
                       int dmin, double tol, int nt)
{
    (void)nt; /* unused without OpenMP */
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++) {
        float *l = dl + (size_t)y * w;
        float *r = dr + (size_t)y * w;
        const float *l0 = dl_raw + (size_t)y * w;
        uint8_t *m = mask + (size_t)y * w;
        for (int x = 0; x < w; x++) {
            const float xr = (float)x - l[x];
            uint8_t bits = 0;
            if (!isfinite(l[x]))
                bits = SINEW_MASK_UNKNOWN;
            else if (xr < -0.5f || xr >= (float)w - 0.5f)
                bits = SINEW_MASK_OUTSIDE;
            else {
                const float o = r[nearest_index(xr, w)];
                if (!(fabsf(o - l[x]) <= (float)tol))
                    bits = SINEW_MASK_OCCLUDED;
            }
            m[x] = bits;
        }
        /* right view against the (unchecked) left map; dl_raw is the median-filtered
         * left map kept aside before filling */
        for (int x = 0; x < w; x++) {
            if (isnan(r[x]))
                continue;
            const float xl = (float)x + r[x];
            if (xl < -0.5f || xl >= (float)w - 0.5f ||
                !(fabsf(l0[nearest_index(xl, w)] - r[x]) <= (float)tol))
                r[x] = NAN;
        }
        /* fill: lower of the nearest kept values left and right on the row */
        float lastk = NAN;
        for (int x = 0; x < w; x++) {
            if (!m[x]) {
                lastk = l[x];
                continue;
            }
            int e = x;
            while (e < w && m[e])
                e++;
            const float nextk = e < w ? l[e] : NAN;
            float f = isnan(lastk) ? nextk : (isnan(nextk) ? lastk : fminf(lastk, nextk));
            if (isnan(f))
                f = (float)dmin;
            for (int k = x; k < e; k++)
                l[k] = f;
            x = e - 1;
        }
    }
}

/* ---- driver ---- */

typedef struct scratch {
    float *gl, *gr;    /* luma [h][w] */
    uint64_t *cl, *cr; /* census [h][w] */
    float *dl, *dr, *conf, *dtmp;
    uint8_t *mask;
    uint8_t *c;
    uint16_t *s, *rowtmp;
} scratch;

static void scratch_free(sinew_ctx *ctx, scratch *sc)
{
    void *all[] = {sc->gl,   sc->gr,   sc->cl,   sc->cr, sc->dl, sc->dr,
                   sc->conf, sc->dtmp, sc->mask, sc->c,  sc->s,  sc->rowtmp};
    for (size_t i = 0; i < sizeof all / sizeof all[0]; i++)
        sinew__free(ctx, all[i]);
}

/* Rows of the band core so that (core + 2 * overlap) rows fit the budget. */
static int band_rows(const sinew_stereo_params *p, int w, int h, int nd, int *nbands)
{
    const size_t per_row = (size_t)w * (size_t)nd * 3;
    size_t fit = per_row ? p->memory_budget / per_row : (size_t)h;
    if (fit >= (size_t)h) {
        *nbands = 1;
        return h;
    }
    long core = (long)fit - 2 * BAND_OVERLAP;
    if (core < 16)
        core = 16;
    const int nb = (int)((h + core - 1) / core);
    *nbands = nb;
    return (h + nb - 1) / nb;
}

int sinew_stereo_run(sinew_ctx *ctx, sinew_stereo_output *out, const sinew_image *left,
                     const sinew_image *right, const sinew_stereo_params *pin)
{
    if (!ctx)
        return SINEW_EINVAL;
    if (!out || !out->disparity)
        return sinew__fail(ctx, SINEW_EINVAL, "stereo: no disparity output");
    sinew_stereo_params p;
    if (pin)
        p = *pin;
    else
        sinew_stereo_params_default(&p);
    int st;
    if ((st = check_params(ctx, &p)) || (st = check_frame(ctx, left, "left")) ||
        (st = check_frame(ctx, right, "right")))
        return st;
    const int w = left->width, h = left->height;
    if (right->width != w || right->height != h)
        return sinew__fail(ctx, SINEW_ESIZE, "stereo: left frame is %dx%d, right frame %dx%d", w, h,
                           right->width, right->height);
    if ((st = check_out(ctx, out->disparity, w, h, SINEW_F32, "disparity")) ||
        (st = check_out(ctx, out->right, w, h, SINEW_F32, "right disparity")) ||
        (st = check_out(ctx, out->mask, w, h, SINEW_U8, "mask")) ||
        (st = check_out(ctx, out->confidence, w, h, SINEW_F32, "confidence")))
        return st;

    const int nd = sinew_stereo_num_disparities(&p, w), dmin = p.min_disparity;
    const int nt = sinew_ctx_threads(ctx), nthr = sinew__nthreads(nt);
    int nbands;
    const int core = band_rows(&p, w, h, nd, &nbands);
    const int bh_max = core + 2 * BAND_OVERLAP < h ? core + 2 * BAND_OVERLAP : h;
    const size_t npx = (size_t)w * h, stride = (size_t)nd + 2;
    size_t vol;
    if (sinew__mul_size((size_t)w * (size_t)bh_max, (size_t)nd, &vol) || vol > SIZE_MAX / 4)
        return sinew__fail(ctx, SINEW_EOVERFLOW, "stereo: cost volume size overflows");

    scratch sc = {0};
    if (!(sc.gl = sinew__calloc(ctx, npx, sizeof(float))) ||
        !(sc.gr = sinew__calloc(ctx, npx, sizeof(float))) ||
        !(sc.cl = sinew__calloc(ctx, npx, sizeof(uint64_t))) ||
        !(sc.cr = sinew__calloc(ctx, npx, sizeof(uint64_t))) ||
        !(sc.dl = sinew__calloc(ctx, npx, sizeof(float))) ||
        !(sc.dr = sinew__calloc(ctx, npx, sizeof(float))) ||
        !(sc.conf = sinew__calloc(ctx, npx, sizeof(float))) ||
        !(sc.dtmp = sinew__calloc(ctx, npx, sizeof(float))) ||
        !(sc.mask = sinew__calloc(ctx, npx, 1)) || !(sc.c = sinew__alloc(ctx, vol)) ||
        !(sc.s = sinew__alloc(ctx, vol * sizeof(uint16_t))) || /* fully written per band */
        !(sc.rowtmp = sinew__calloc(ctx, (size_t)nthr * 2, stride * sizeof(uint16_t)))) {
        scratch_free(ctx, &sc);
        return SINEW_ENOMEM;
    }

    luma(left, sc.gl, nt);
    luma(right, sc.gr, nt);
    census(sc.gl, sc.cl, w, h, nt);
    census(sc.gr, sc.cr, w, h, nt);

    for (int k = 0; k < nbands; k++) {
        const int a = k * core, e = a + core < h ? a + core : h;
        if (a >= e)
            break;
        const int y0 = a - BAND_OVERLAP > 0 && nbands > 1 ? a - BAND_OVERLAP : 0;
        const int y1 = e + BAND_OVERLAP < h && nbands > 1 ? e + BAND_OVERLAP : h;
        band b = {.w = w,
                  .h = y1 - y0,
                  .nd = nd,
                  .dmin = dmin,
                  .y0 = y0,
                  .c = sc.c,
                  .s = sc.s,
                  .g = sc.gl + (size_t)y0 * w,
                  .p2_edge = (float)p.p2_edge};
        band_costs(&b, sc.cl, sc.cr, nt);
        aggregate(&b, p.paths, sc.rowtmp, p.p1, p.p2, nt);
        band_winners(&b, a, e, sc.dl, sc.dr, sc.conf, nt);
    }

    if (p.median) {
        median3(sc.dtmp, sc.dl, w, h, nt);
        memcpy(sc.dl, sc.dtmp, npx * sizeof(float));
        median3(sc.dtmp, sc.dr, w, h, nt);
        memcpy(sc.dr, sc.dtmp, npx * sizeof(float));
    }
    memcpy(sc.dtmp, sc.dl, npx * sizeof(float));
    check_fill(sc.dl, sc.dr, sc.mask, sc.dtmp, w, h, dmin, p.lr_tolerance, nt);

    sinew_stereo_stats *s = &out->stats;
    memset(s, 0, sizeof *s);
    s->pixels = (int64_t)npx;
    s->min_disparity = dmin;
    s->num_disparities = nd;
    s->bands = nbands;
    for (int y = 0; y < h; y++) {
        const size_t o = (size_t)y * w;
        float *dst = sinew_image_row_f32(out->disparity, y);
        memcpy(dst, sc.dl + o, (size_t)w * sizeof(float));
        if (out->right)
            memcpy(sinew_image_row_f32(out->right, y), sc.dr + o, (size_t)w * sizeof(float));
        if (out->mask)
            memcpy(sinew_image_row_u8(out->mask, y), sc.mask + o, (size_t)w);
        float *cf = out->confidence ? sinew_image_row_f32(out->confidence, y) : NULL;
        for (int x = 0; x < w; x++) {
            const uint8_t m = sc.mask[o + x];
            if (cf)
                cf[x] = m ? 0.0f : sc.conf[o + x];
            if (!m) {
                s->kept++;
                continue;
            }
            s->filled++;
            for (int bit = 0; bit < SINEW_MASK_NBITS; bit++)
                if (m & (1u << bit))
                    s->reason[bit]++;
        }
    }
    scratch_free(ctx, &sc);
    return SINEW_OK;
}

/* ---- rectification test ----
 * Features: in each OFF_CELL x OFF_CELL cell the pixel with the largest smallest
 * eigenvalue of the 5x5 structure tensor (Shi & Tomasi, CVPR 1994), if it is textured
 * at all. Each is matched in the right frame over the disparity range and +-search_y
 * rows by the summed census Hamming distance over a 7x7 block; a match counts when its
 * cost is below OFF_RATIO times the best cost at least 2 px away (ratio test, Lowe, IJCV
 * 2004) and it is not on the edge of the search window. The answer is the median
 * vertical offset of the counted matches. */
#define OFF_CELL 24    /* px between features (our choice) */
#define OFF_BLOCK 3    /* 7x7 block of census signatures */
#define OFF_RATIO 0.8  /* common practice for the ratio test */
#define OFF_MIN_EIG 25 /* (gray level / px)^2 summed over 5x5: flat cells are skipped */

static double min_eig(const float *g, int w, int x, int y)
{
    double a = 0, b = 0, c = 0;
    for (int j = -2; j <= 2; j++)
        for (int i = -2; i <= 2; i++) {
            const float *p = g + (size_t)(y + j) * w + x + i;
            const double gx = 0.5 * (p[1] - p[-1]), gy = 0.5 * (p[w] - p[-w]);
            a += gx * gx;
            b += gx * gy;
            c += gy * gy;
        }
    return 0.5 * (a + c - sqrt((a - c) * (a - c) + 4 * b * b));
}

static int block_cost(const uint64_t *cl, const uint64_t *cr, int w, int xl, int yl, int xr, int yr)
{
    int s = 0;
    for (int j = -OFF_BLOCK; j <= OFF_BLOCK; j++)
        for (int i = -OFF_BLOCK; i <= OFF_BLOCK; i++)
            s += __builtin_popcountll(cl[(size_t)(yl + j) * w + xl + i] ^
                                      cr[(size_t)(yr + j) * w + xr + i]);
    return s;
}

static int cmp_float(const void *a, const void *b)
{
    const float x = *(const float *)a, y = *(const float *)b;
    return (x > y) - (x < y);
}

int sinew_stereo_vertical_offset(sinew_ctx *ctx, double *dy, int *matched, const sinew_image *left,
                                 const sinew_image *right, int min_disparity, int num_disparities,
                                 int search_y)
{
    if (!ctx || !dy || !matched)
        return SINEW_EINVAL;
    *dy = 0;
    *matched = 0;
    int st;
    if ((st = check_frame(ctx, left, "left")) || (st = check_frame(ctx, right, "right")))
        return st;
    const int w = left->width, h = left->height;
    if (right->width != w || right->height != h)
        return sinew__fail(ctx, SINEW_ESIZE, "stereo: left frame is %dx%d, right frame %dx%d", w, h,
                           right->width, right->height);
    if (num_disparities < 1 || num_disparities > MAX_DISPARITIES || search_y < 1 ||
        search_y > 256 || min_disparity < -MAX_DISPARITIES || min_disparity > MAX_DISPARITIES)
        return sinew__fail(ctx, SINEW_EINVAL, "stereo: bad range for the rectification test");
    const int margin = OFF_BLOCK + 3 + search_y, nt = sinew_ctx_threads(ctx);
    const int nx = (w - 2 * margin) / OFF_CELL, ny = (h - 2 * margin) / OFF_CELL;
    if (nx < 1 || ny < 1)
        return SINEW_OK; /* too small to tell */
    const size_t npx = (size_t)w * h, nf = (size_t)nx * ny;
    float *gl = sinew__calloc(ctx, npx, sizeof(float)),
          *gr = sinew__calloc(ctx, npx, sizeof(float));
    uint64_t *cl = sinew__calloc(ctx, npx, sizeof(uint64_t));
    uint64_t *cr = sinew__calloc(ctx, npx, sizeof(uint64_t));
    float *off = sinew__calloc(ctx, nf, sizeof(float));
    if (!gl || !gr || !cl || !cr || !off) {
        void *all[] = {gl, gr, cl, cr, off};
        for (int i = 0; i < 5; i++)
            sinew__free(ctx, all[i]);
        return SINEW_ENOMEM;
    }
    luma(left, gl, nt);
    luma(right, gr, nt);
    census(gl, cl, w, h, nt);
    census(gr, cr, w, h, nt);
    SINEW_PARALLEL_FOR(nt)
    for (int k = 0; k < (int)nf; k++) {
        const int cx0 = margin + (k % nx) * OFF_CELL, cy0 = margin + (k / nx) * OFF_CELL;
        int fx = -1, fy = -1;
        double best_eig = OFF_MIN_EIG;
        for (int y = cy0; y < cy0 + OFF_CELL; y += 2)
            for (int x = cx0; x < cx0 + OFF_CELL; x += 2) {
                const double e = min_eig(gl, w, x, y);
                if (e > best_eig)
                    best_eig = e, fx = x, fy = y;
            }
        off[k] = NAN;
        if (fx < 0)
            continue;
        int best = INT32_MAX, bd = 0, bj = 0;
        for (int j = -search_y; j <= search_y; j++)
            for (int d = min_disparity; d < min_disparity + num_disparities; d++) {
                const int xr = fx - d;
                if (xr < OFF_BLOCK + 1 || xr >= w - OFF_BLOCK - 1)
                    continue;
                const int c = block_cost(cl, cr, w, fx, fy, xr, fy + j);
                if (c < best)
                    best = c, bd = d, bj = j;
            }
        if (best == INT32_MAX || bj == -search_y || bj == search_y)
            continue;
        int second = INT32_MAX;
        for (int j = -search_y; j <= search_y; j++)
            for (int d = min_disparity; d < min_disparity + num_disparities; d++) {
                const int xr = fx - d;
                if ((abs(j - bj) <= 1 && abs(d - bd) <= 1) || xr < OFF_BLOCK + 1 ||
                    xr >= w - OFF_BLOCK - 1)
                    continue;
                const int c = block_cost(cl, cr, w, fx, fy, xr, fy + j);
                second = c < second ? c : second;
            }
        if (second == INT32_MAX || (double)best >= OFF_RATIO * (double)second)
            continue;
        const int xr = fx - bd;
        const int cm = block_cost(cl, cr, w, fx, fy, xr, fy + bj - 1);
        const int cp = block_cost(cl, cr, w, fx, fy, xr, fy + bj + 1);
        const int den = cm - 2 * best + cp;
        off[k] = (float)bj + (den > 0 ? (float)(cm - cp) / (float)(2 * den) : 0.0f);
    }
    size_t n = 0;
    for (size_t k = 0; k < nf; k++)
        if (!isnan(off[k]))
            off[n++] = off[k];
    if (n > 0) {
        qsort(off, n, sizeof *off, cmp_float);
        *dy = n % 2 ? off[n / 2] : 0.5 * ((double)off[n / 2 - 1] + off[n / 2]);
    }
    *matched = (int)n;
    void *all[] = {gl, gr, cl, cr, off};
    for (int i = 0; i < 5; i++)
        sinew__free(ctx, all[i]);
    return SINEW_OK;
}
