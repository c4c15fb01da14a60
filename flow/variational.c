/* SPDX-License-Identifier: MIT */
/* Variational refinement at one pyramid level: one warping step of the energy of
 * Brox, Bruhn, Papenberg, Weickert, "High accuracy optical flow estimation based on a
 * theory for warping" (ECCV 2004):
 *
 *   E(du, dv) = sum_x  delta * Psi( (1/C) sum_c (I1w_c - I0_c + Ix_c du + Iy_c dv)^2 )
 *                    + gamma * Psi( |grad L1w - grad L0 + H (du, dv)|^2 )
 *                    + alpha * g(x) * Psi( |grad(u + du)|^2 + |grad(v + dv)|^2 )
 *
 * with the Charbonnier penalty Psi(s^2) = sqrt(s^2 + eps^2), C data channels (gray or RGB,
 * the colour data term), the gradient-constancy term on the luminance L (robust to
 * additive illumination change), H the Hessian of L, and the edge-aware weight
 * g(x) = exp(-edge * |grad L0(x)|) that lets the flow break at image edges (image-driven
 * regularisation in the spirit of Wedel et al. 2009 and Zimmer et al. 2011). Derivatives
 * are 5-point central differences of the average of frame 0 and the warped frame 1
 * (Sun, Roth, Black 2010). Pixels warped outside frame 1 get no data term.
 *
 * Solver: lagged nonlinearity. Each of `outer` fixed-point iterations freezes the
 * penalty derivatives and runs `inner` red-black SOR sweeps on the resulting 2x2-per-pixel
 * linear system. Red-black ordering makes each half-sweep embarrassingly parallel and the
 * result independent of the thread count.
 *
 * Layout: the planes the sweeps touch (du, dv, the system a12, b1, b2, inv1, inv2, the link
 * weights wx, wy and the edge weight) are stored split by colour c = (x + y) & 1: all red
 * pixels row by row, then all black ones (rb_row). A half-sweep then reads and writes
 * unit-stride rows: the four neighbours of pixel k of a red row are black pixels k - 1, k
 * or k, k + 1 of the same row (depending on the row's parity) and k of the rows above and
 * below, and a left / up link weight is the neighbour's wx / wy, at the same place in the
 * black planes. Border pixels (first / last column, first / last row) take the scalar
 * path with the same arithmetic; the interior loops vectorise. The split planes are
 * packed (w*h floats each); derivative planes stay row-major, and du, dv go back to the
 * row-major u, v once per warp. Sweeps run several at a time as a wavefront over rows
 * (sor_sweeps) so the rows in flight stay in cache. Results are bit-identical to plain
 * row-major half-sweeps, for any thread count. */
#include <math.h>
#include <string.h>

#include "flow/internal/flowimpl.h"
#include "flow/internal/parallel.h"

/* The row kernels below are instantiated with constant flags (and channel counts) for the
 * interior of the image; forcing them inline lets the constants remove the border
 * branches so the interior loops vectorise. */
#define RB_INLINE static inline __attribute__((always_inline))

/* The row functions are also built for AVX2 (SINEW__CLONES): the SOR rows run ~25%
 * faster on a 640-pixel-wide image, with the same bits. */
#define RB_CLONES SINEW__CLONES

int sinew__var_planes(int channels)
{
    /* 3 per channel + 5 gradient-constancy + du, dv + a12, b1, b2, inv1, inv2 + wx, wy +
     * edge weight */
    return 3 * channels + 5 + 2 + 5 + 2 + 1;
}

/* Derivative planes are row-major (stride w). The solver planes du .. edge are in the
 * red/black split layout (see the top of the file and rb_row). */
typedef struct planes {
    int w, h;
    size_t n;
    float *ix[SINEW__MAX_CH], *iy[SINEW__MAX_CH], *it[SINEW__MAX_CH];
    float *lxt, *lyt, *lxx, *lxy, *lyy;
    float *du, *dv, *a12, *b1, *b2, *inv1, *inv2, *wx, *wy, *edge;
} planes;

static void layout(planes *P, float *work, int channels, int w, int h)
{
    size_t n = (size_t)w * (size_t)h;
    P->w = w;
    P->h = h;
    P->n = n;
    /* assemble_run relies on this order */
    for (int c = 0; c < channels; c++) {
        P->ix[c] = work;
        work += n;
        P->iy[c] = work;
        work += n;
        P->it[c] = work;
        work += n;
    }
    P->lxt = work;
    work += n;
    P->lyt = work;
    work += n;
    P->lxx = work;
    work += n;
    P->lxy = work;
    work += n;
    P->lyy = work;
    work += n;
    P->du = work;
    work += n;
    P->dv = work;
    work += n;
    P->a12 = work;
    work += n;
    P->b1 = work;
    work += n;
    P->b2 = work;
    work += n;
    P->inv1 = work;
    work += n;
    P->inv2 = work;
    work += n;
    P->wx = work;
    work += n;
    P->wy = work;
    work += n;
    P->edge = work;
}

/* ---- red/black split layout ----
 * Pixel (x, y) has colour c = (x + y) & 1. A split plane holds the ceil(n/2) colour-0
 * values, then the floor(n/2) colour-1 values, each colour row by row: row y of colour c
 * holds the pixels x = 2k + rb_par(c, y), k = 0 .. rb_len - 1, so pixel (x, y) sits at
 * rb_row(c, y) + (x >> 1). The neighbours of a pixel all have the other colour: left and
 * right at columns k - 1, k (rb_par 0) or k, k + 1 (rb_par 1) of the same row, up and down
 * at column k of rows y - 1 and y + 1, so every half-sweep reads and writes unit-stride
 * rows. The planes are packed (no padding): a split plane has exactly w*h floats. */

/* x & 1 of the pixels of colour c in row y */
static inline int rb_par(int c, int y)
{
    return (c ^ y) & 1;
}

/* number of pixels of colour c in row y */
static inline int rb_len(int w, int c, int y)
{
    return (w + 1 - rb_par(c, y)) / 2;
}

/* offset of row y of colour c in a split plane */
static inline size_t rb_row(const planes *P, int c, int y)
{
    size_t r = (size_t)(y >> 1) * (size_t)P->w;
    if (y & 1)
        r += (size_t)rb_len(P->w, c, y - 1);
    return c ? (P->n + 1) / 2 + r : r;
}

/* dst = 0.5 * (a + b) on n elements */
static inline void average_row(float *restrict dst, const float *restrict a,
                               const float *restrict b, int n)
{
    for (int i = 0; i < n; i++)
        dst[i] = 0.5f * (a[i] + b[i]);
}

/* p = masked ? 0 : (p - sub) * s on n elements (sub may be NULL) */
static inline void finish_row(float *restrict p, const float *restrict sub,
                              const unsigned char *restrict mask, float s, int n)
{
    if (sub)
        for (int i = 0; i < n; i++)
            p[i] -= sub[i];
    for (int i = 0; i < n; i++)
        p[i] = mask[i] ? 0.f : p[i] * s;
}

/* Warp frame 1 and compute all derivative planes. l0, u, v, mask: the band's rows, which
 * start at row y0 of the level; l1: the whole level of frame 1.
 *
 * Three parallel loops in all (the warp, the averages, then the gradients of the averages
 * with the differences and the mask), so a busy machine sees three joins per warping
 * step instead of one per plane operation (17 for gray, 29 for colour). The averages go
 * to planes the solver fills only later (a12, b1, b2, inv1, inv2), one per channel plus
 * the two luminance-gradient averages. */
static void derivatives(planes *P, const float *u, const float *v, const sinew__level *l0,
                        const sinew__level *l1, int y0, int channels, unsigned char *mask, int nt)
{
    (void)nt; /* unused without OpenMP */
    int w = l0->w, h = l0->h;
    /* brightness constancy per channel, scaled by 1/sqrt(C) so the data weight does not
     * depend on the channel count */
    float cs = 1.0f / sqrtf((float)channels);
    /* one warp of frame 1's data channels and luminance gradients, shared weights */
    float *wdst[SINEW__MAX_CH + 2];
    const float *wsrc[SINEW__MAX_CH + 2];
    for (int c = 0; c < channels; c++) {
        wdst[c] = P->it[c];
        wsrc[c] = l1->ch[c]; /* ch[0] is the luminance for gray */
    }
    wdst[channels] = P->lxt;
    wsrc[channels] = l1->gx;
    wdst[channels + 1] = P->lyt;
    wsrc[channels + 1] = l1->gy;
    sinew__warp_n(wdst, wsrc, channels + 2, mask, u, v, w, h, y0, l1->h, nt);
    /* averages: channels c < channels, then of gx and of gy */
    float *avg[SINEW__MAX_CH + 2] = {P->a12, P->b1, P->b2, P->inv1, P->inv2};
    const float *avg_a[SINEW__MAX_CH + 2], *avg_b[SINEW__MAX_CH + 2];
    for (int c = 0; c < channels; c++) {
        avg_a[c] = l0->ch[c];
        avg_b[c] = P->it[c];
    }
    avg_a[channels] = l0->gx;
    avg_b[channels] = P->lxt;
    avg_a[channels + 1] = l0->gy;
    avg_b[channels + 1] = P->lyt;
    const int navg = channels + 2;
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++) {
        size_t o = (size_t)y * (size_t)w;
        for (int c = 0; c < navg; c++)
            average_row(avg[c] + o, avg_a[c] + o, avg_b[c] + o, w);
    }
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++) {
        size_t o = (size_t)y * (size_t)w;
        const unsigned char *m = mask + o;
        for (int c = 0; c < channels; c++) {
            sinew__gradient_row(P->ix[c], P->iy[c], avg[c], w, h, y);
            finish_row(P->it[c] + o, l0->ch[c] + o, m, cs, w);
            finish_row(P->ix[c] + o, NULL, m, cs, w);
            finish_row(P->iy[c] + o, NULL, m, cs, w);
        }
        /* gradient constancy on the luminance (gradients of frame 1 warped above) */
        sinew__gradient_row(P->lxx, P->lxy, avg[channels], w, h, y);
        sinew__gradient_row(NULL, P->lyy, avg[channels + 1], w, h, y);
        finish_row(P->lxt + o, l0->gx + o, m, 1.f, w);
        finish_row(P->lyt + o, l0->gy + o, m, 1.f, w);
        finish_row(P->lxx + o, NULL, m, 1.f, w);
        finish_row(P->lxy + o, NULL, m, 1.f, w);
        finish_row(P->lyy + o, NULL, m, 1.f, w);
    }
}

/* Interior / border split of one colour row: pixel k = 0 has no left neighbour when
 * `first`; the row's last pixel lies in the last column (no right neighbour) when `ends`;
 * `last` when that pixel is not also pixel 0 of a `first` row; pixels k0 .. k1 - 1 have
 * both neighbours. */
typedef struct rbseg {
    int par, len, first, ends, last, k0, k1;
} rbseg;

static inline rbseg rb_seg(int w, int c, int y)
{
    rbseg s;
    s.par = rb_par(c, y);
    s.len = rb_len(w, c, y);
    s.first = s.len > 0 && s.par == 0;
    s.ends = s.len > 0 && 2 * (s.len - 1) + s.par == w - 1;
    s.k0 = s.first;
    s.last = s.ends && s.len - 1 >= s.k0;
    s.k1 = s.len - s.ends;
    if (s.k1 < s.k0)
        s.k1 = s.k0;
    return s;
}

/* One pixel's smoothness weight from its (u + du, v + dv) value c*, the value at its right
 * neighbour r* and the value below d* (equal to c* past the last column / row). */
static inline float smooth_px(float uc, float vc, float ur, float vr, float ud, float vd, float eg,
                              float alpha, float e2)
{
    float ux = ur - uc, vx = vr - vc, uy = ud - uc, vy = vd - vc;
    return alpha * eg / sqrtf(ux * ux + uy * uy + vx * vx + vy * vy + e2);
}

/* Weights of pixels 0 .. k1 - 1 of a colour row, none in the last column. u, v: image row
 * from the row's first pixel (pixel k at [2k], its right neighbour at [2k + 1]); ud, vd:
 * the same for the row below; du, dv, eg: this colour's row; hdu, hdv: the other colour's
 * row (right neighbour of k at [k]); ddu, ddv: the other colour's row below (pixel below
 * k at [k]). On the last row the "below" arguments repeat the row itself. */
static void smooth_run(float *restrict wx, float *restrict wy, const float *restrict u,
                       const float *restrict v, const float *restrict ud, const float *restrict vd,
                       const float *restrict du, const float *restrict dv,
                       const float *restrict hdu, const float *restrict hdv,
                       const float *restrict ddu, const float *restrict ddv,
                       const float *restrict eg, int k1, float alpha, float e2)
{
    for (int k = 0; k < k1; k++) {
        float uc = u[2 * k] + du[k], vc = v[2 * k] + dv[k];
        float s = smooth_px(uc, vc, u[2 * k + 1] + hdu[k], v[2 * k + 1] + hdv[k],
                            ud[2 * k] + ddu[k], vd[2 * k] + ddv[k], eg[k], alpha, e2);
        wx[k] = s;
        wy[k] = s;
    }
}

/* Smoothness weights from forward differences of (u + du, v + dv): the weight of the link
 * x -> x+1 is wx(x), of y -> y+1 is wy(x); zero past the last column / row. */
static void smooth_weights(planes *P, const float *u, const float *v, float alpha, float eps,
                           int nt)
{
    (void)nt; /* unused without OpenMP */
    int w = P->w, h = P->h;
    float e2 = eps * eps;
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++) {
        int yd = y + 1 < h ? y + 1 : y;
        for (int c = 0; c < 2; c++) {
            rbseg s = rb_seg(w, c, y);
            size_t o = rb_row(P, c, y), oh = rb_row(P, !c, y);
            /* the pixel below has the other colour; on the last row it is the pixel itself */
            size_t od = yd != y ? rb_row(P, !c, yd) : o;
            size_t xo = (size_t)y * (size_t)w + (size_t)s.par;
            size_t xd = (size_t)yd * (size_t)w + (size_t)s.par;
            float *wx = P->wx + o, *wy = P->wy + o;
            const float *du = P->du + o, *dv = P->dv + o, *eg = P->edge + o;
            int kr = s.len - s.ends; /* pixels with a right neighbour */
            smooth_run(wx, wy, u + xo, v + xo, u + xd, v + xd, du, dv, P->du + oh + s.par,
                       P->dv + oh + s.par, P->du + od, P->dv + od, eg, kr, alpha, e2);
            if (s.ends) {
                int k = s.len - 1;
                float uc = u[xo + 2 * (size_t)k] + du[k], vc = v[xo + 2 * (size_t)k] + dv[k];
                wx[k] = 0.f;
                wy[k] = smooth_px(uc, vc, uc, vc, u[xd + 2 * (size_t)k] + P->du[od + (size_t)k],
                                  v[xd + 2 * (size_t)k] + P->dv[od + (size_t)k], eg[k], alpha, e2);
            }
            if (yd == y)
                for (int k = 0; k < s.len; k++)
                    wy[k] = 0.f;
        }
    }
}

/* Assemble pixels k0 .. k1 - 1 of a colour row. Outputs and du, dv, wx, wy: this colour's
 * row; hwx: the other colour's row (left neighbour of k at [k + lo]); uwy: the other
 * colour's row above; u, v: image row from the row's first pixel (pixel k at [2k]); dp:
 * the same pixel in the first derivative plane, the others follow at multiples of n in
 * the order of layout() (ix, iy, it per channel, then lxt, lyt, lxx, lxy, lyy). The has_*
 * flags say which neighbours exist (constant 1 in the interior). */
RB_INLINE void assemble_run(float *restrict a12o, float *restrict b1o, float *restrict b2o,
                            float *restrict inv1o, float *restrict inv2o, const float *restrict dup,
                            const float *restrict dvp, const float *restrict wx,
                            const float *restrict wy, const float *restrict hwx, int lo,
                            const float *restrict uwy, const float *restrict dp, size_t n,
                            const float *restrict u, const float *restrict v, size_t w, int k0,
                            int k1, int channels, const sinew__var_params *p, int has_l, int has_r,
                            int has_u, int has_d)
{
    float e2 = p->eps * p->eps;
    for (int k = k0; k < k1; k++) {
        size_t i = 2 * (size_t)k;
        float du = dup[k], dv = dvp[k];
        float j11 = 0.f, j12 = 0.f, j22 = 0.f, j13 = 0.f, j23 = 0.f, r2 = 0.f;
#pragma GCC unroll 3
        for (int c = 0; c < channels; c++) {
            const float *dc = dp + 3 * (size_t)c * n;
            float ix = dc[i], iy = dc[n + i], it = dc[2 * n + i];
            float r = it + ix * du + iy * dv;
            r2 += r * r;
            j11 += ix * ix;
            j12 += ix * iy;
            j22 += iy * iy;
            j13 += ix * it;
            j23 += iy * it;
        }
        float pd = p->delta / sqrtf(r2 + e2);
        const float *dl = dp + 3 * (size_t)channels * n;
        float lxt = dl[i], lyt = dl[n + i];
        float lxx = dl[2 * n + i], lxy = dl[3 * n + i], lyy = dl[4 * n + i];
        float gx = lxt + lxx * du + lxy * dv, gy = lyt + lxy * du + lyy * dv;
        float pg = p->gamma / sqrtf(gx * gx + gy * gy + e2);
        float a11 = pd * j11 + pg * (lxx * lxx + lxy * lxy);
        float a12 = pd * j12 + pg * (lxx * lxy + lxy * lyy);
        float a22 = pd * j22 + pg * (lxy * lxy + lyy * lyy);
        float b1 = -(pd * j13 + pg * (lxx * lxt + lxy * lyt));
        float b2 = -(pd * j23 + pg * (lxy * lxt + lyy * lyt));
        /* smoothness: sum_n w_n (u_n - u) moves to the right-hand side */
        float wl = has_l ? hwx[k + lo] : 0.f, wr = wx[k];
        float wu = has_u ? uwy[k] : 0.f, wd = wy[k];
        float sw = wl + wr + wu + wd;
        float su = 0.f, sv = 0.f;
        if (has_l)
            su += wl * (u[i - 1] - u[i]), sv += wl * (v[i - 1] - v[i]);
        if (has_r)
            su += wr * (u[i + 1] - u[i]), sv += wr * (v[i + 1] - v[i]);
        if (has_u)
            su += wu * (u[i - w] - u[i]), sv += wu * (v[i - w] - v[i]);
        if (has_d)
            su += wd * (u[i + w] - u[i]), sv += wd * (v[i + w] - v[i]);
        a12o[k] = a12;
        b1o[k] = b1 + su;
        b2o[k] = b2 + sv;
        inv1o[k] = 1.0f / (a11 + sw + 1e-9f);
        inv2o[k] = 1.0f / (a22 + sw + 1e-9f);
    }
}

/* assemble_run for any channel count and flags: the border pixels (scalar). */
RB_CLONES static void assemble_border(float *a12, float *b1, float *b2, float *inv1, float *inv2,
                                      const float *du, const float *dv, const float *wx,
                                      const float *wy, const float *hwx, int lo, const float *uwy,
                                      const float *dp, size_t n, const float *u, const float *v,
                                      size_t w, int k0, int k1, int channels,
                                      const sinew__var_params *p, int has_l, int has_r, int has_u,
                                      int has_d)
{
    assemble_run(a12, b1, b2, inv1, inv2, du, dv, wx, wy, hwx, lo, uwy, dp, n, u, v, w, k0, k1,
                 channels, p, has_l, has_r, has_u, has_d);
}

/* Freeze the data-term penalty derivatives and assemble the per-pixel system of row y of
 * colour c. */
RB_CLONES static void assemble_row(planes *P, const float *u, const float *v, int c, int y,
                                   int channels, const sinew__var_params *p)
{
    int w = P->w, h = P->h;
    rbseg s = rb_seg(w, c, y);
    if (!s.len)
        return;
    size_t o = rb_row(P, c, y), oh = rb_row(P, !c, y);
    size_t ou = y > 0 ? rb_row(P, !c, y - 1) : oh;
    size_t xo = (size_t)y * (size_t)w + (size_t)s.par;
    const float *dp = P->ix[0] + xo;
    size_t n = P->n;
    float *a12 = P->a12 + o, *b1 = P->b1 + o, *b2 = P->b2 + o;
    float *inv1 = P->inv1 + o, *inv2 = P->inv2 + o;
    const float *du = P->du + o, *dv = P->dv + o, *wx = P->wx + o, *wy = P->wy + o;
    const float *hwx = P->wx + oh, *uwy = P->wy + ou;
    const float *ur = u + xo, *vr = v + xo;
    size_t ws = (size_t)w;
    int lo = s.par ? 0 : -1, hu = y > 0, hd = y + 1 < h;
    if (s.first)
        assemble_border(a12, b1, b2, inv1, inv2, du, dv, wx, wy, hwx, lo, uwy, dp, n, ur, vr, ws, 0,
                        1, channels, p, 0, w > 1, hu, hd);
    if (hu && hd && channels == 1)
        assemble_run(a12, b1, b2, inv1, inv2, du, dv, wx, wy, hwx, lo, uwy, dp, n, ur, vr, ws, s.k0,
                     s.k1, 1, p, 1, 1, 1, 1);
    else if (hu && hd && channels == 3)
        assemble_run(a12, b1, b2, inv1, inv2, du, dv, wx, wy, hwx, lo, uwy, dp, n, ur, vr, ws, s.k0,
                     s.k1, 3, p, 1, 1, 1, 1);
    else
        assemble_border(a12, b1, b2, inv1, inv2, du, dv, wx, wy, hwx, lo, uwy, dp, n, ur, vr, ws,
                        s.k0, s.k1, channels, p, 1, 1, hu, hd);
    if (s.last)
        assemble_border(a12, b1, b2, inv1, inv2, du, dv, wx, wy, hwx, lo, uwy, dp, n, ur, vr, ws,
                        s.len - 1, s.len, channels, p, 1, 0, hu, hd);
}

static void assemble(planes *P, const float *u, const float *v, int channels,
                     const sinew__var_params *p, int nt)
{
    (void)nt; /* unused without OpenMP */
    int h = P->h;
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++)
        for (int c = 0; c < 2; c++)
            assemble_row(P, u, v, c, y, channels, p);
}

/* SOR update of pixels k0 .. k1 - 1 of a colour row. du .. wy: this colour's row; h*: the
 * other colour's row (left neighbour of k at [k + lo], right at [k + lo + 1]); u*, d*: the
 * other colour's rows above and below (pixel k's neighbours at [k]). A missing neighbour
 * (has_* = 0) contributes weight * the pixel's own value, as the link weights are zero
 * there (wx, wy are 0 past the last column / row; left and up weights are taken as 0). */
RB_INLINE void sor_run(float *restrict du, float *restrict dv, const float *restrict b1,
                       const float *restrict b2, const float *restrict a12,
                       const float *restrict inv1, const float *restrict inv2,
                       const float *restrict wx, const float *restrict wy,
                       const float *restrict hdu, const float *restrict hdv,
                       const float *restrict hwx, int lo, const float *restrict udu,
                       const float *restrict udv, const float *restrict uwy,
                       const float *restrict ddu, const float *restrict ddv, int k0, int k1,
                       float omega, int has_l, int has_r, int has_u, int has_d)
{
    for (int k = k0; k < k1; k++) {
        float wl = has_l ? hwx[k + lo] : 0.f, wr = wx[k];
        float wu = has_u ? uwy[k] : 0.f, wd = wy[k];
        float ul = has_l ? hdu[k + lo] : du[k], ur = has_r ? hdu[k + lo + 1] : du[k];
        float uu = has_u ? udu[k] : du[k], ud = has_d ? ddu[k] : du[k];
        float nu = wl * ul + wr * ur + wu * uu + wd * ud;
        float un = (b1[k] + nu - a12[k] * dv[k]) * inv1[k];
        du[k] += omega * (un - du[k]);
        float vl = has_l ? hdv[k + lo] : dv[k], vr = has_r ? hdv[k + lo + 1] : dv[k];
        float vu = has_u ? udv[k] : dv[k], vd = has_d ? ddv[k] : dv[k];
        float nv = wl * vl + wr * vr + wu * vu + wd * vd;
        float vn = (b2[k] + nv - a12[k] * du[k]) * inv2[k];
        dv[k] += omega * (vn - dv[k]);
    }
}

/* sor_run for any flags: the border pixels (scalar). */
RB_CLONES static void sor_border(float *du, float *dv, const float *b1, const float *b2,
                                 const float *a12, const float *inv1, const float *inv2,
                                 const float *wx, const float *wy, const float *hdu,
                                 const float *hdv, const float *hwx, int lo, const float *udu,
                                 const float *udv, const float *uwy, const float *ddu,
                                 const float *ddv, int k0, int k1, float omega, int has_l,
                                 int has_r, int has_u, int has_d)
{
    sor_run(du, dv, b1, b2, a12, inv1, inv2, wx, wy, hdu, hdv, hwx, lo, udu, udv, uwy, ddu, ddv, k0,
            k1, omega, has_l, has_r, has_u, has_d);
}

/* Half-sweep update of row y of colour c (the other colour is read only). */
RB_CLONES static void sor_row(planes *P, int c, int y, float omega)
{
    int w = P->w, h = P->h;
    rbseg s = rb_seg(w, c, y);
    if (!s.len)
        return;
    size_t o = rb_row(P, c, y), oh = rb_row(P, !c, y);
    size_t ou = y > 0 ? rb_row(P, !c, y - 1) : oh, od = y + 1 < h ? rb_row(P, !c, y + 1) : oh;
    float *du = P->du + o, *dv = P->dv + o;
    const float *b1 = P->b1 + o, *b2 = P->b2 + o, *a12 = P->a12 + o;
    const float *inv1 = P->inv1 + o, *inv2 = P->inv2 + o, *wx = P->wx + o, *wy = P->wy + o;
    const float *hdu = P->du + oh, *hdv = P->dv + oh, *hwx = P->wx + oh;
    const float *udu = P->du + ou, *udv = P->dv + ou, *uwy = P->wy + ou;
    const float *ddu = P->du + od, *ddv = P->dv + od;
    int lo = s.par ? 0 : -1, hu = y > 0, hd = y + 1 < h;
    if (hu && hd && w > 1) {
        /* interior row: all flags constant */
        if (s.first)
            sor_run(du, dv, b1, b2, a12, inv1, inv2, wx, wy, hdu, hdv, hwx, lo, udu, udv, uwy, ddu,
                    ddv, 0, 1, omega, 0, 1, 1, 1);
        sor_run(du, dv, b1, b2, a12, inv1, inv2, wx, wy, hdu, hdv, hwx, lo, udu, udv, uwy, ddu, ddv,
                s.k0, s.k1, omega, 1, 1, 1, 1);
        if (s.last)
            sor_run(du, dv, b1, b2, a12, inv1, inv2, wx, wy, hdu, hdv, hwx, lo, udu, udv, uwy, ddu,
                    ddv, s.len - 1, s.len, omega, 1, 0, 1, 1);
        return;
    }
    if (s.first)
        sor_border(du, dv, b1, b2, a12, inv1, inv2, wx, wy, hdu, hdv, hwx, lo, udu, udv, uwy, ddu,
                   ddv, 0, 1, omega, 0, w > 1, hu, hd);
    sor_border(du, dv, b1, b2, a12, inv1, inv2, wx, wy, hdu, hdv, hwx, lo, udu, udv, uwy, ddu, ddv,
               s.k0, s.k1, omega, 1, 1, hu, hd);
    if (s.last)
        sor_border(du, dv, b1, b2, a12, inv1, inv2, wx, wy, hdu, hdv, hwx, lo, udu, udv, uwy, ddu,
                   ddv, s.len - 1, s.len, omega, 1, 0, hu, hd);
}

/* ---- sweep schedule ----
 * Stage j of a pass updates colour j & 1 (red, black, red, ...); the stage-j update of row
 * y reads the other colour in rows y - 1 .. y + 1 as left by stage j - 1 and overwrites the
 * values its own colour had after stage j - 2. Any order that respects this gives the
 * same bits as whole half-sweeps one after the other. A pass runs `stages` stages as a
 * wavefront over rows (step t: stage j on row t - j, j ascending), so the few rows in
 * flight stay in cache instead of every half-sweep streaming all planes from memory.
 * With T threads the rows are cut into T chunks: each chunk first runs the trapezoid
 * that needs nothing from its neighbours (stage j on rows [a + j, b - j), the image
 * borders are not cut), then each inner chunk boundary a fills its triangle (stage j on
 * rows [a - j, a + j)). Chunks are at least 2 * stages rows tall so the triangles of
 * different boundaries never touch. */

/* Most stages per pass. A pass keeps about stages + 2 rows of the nine split planes in
 * flight (~0.3 MB at 640 pixels wide). Measured on a 640x480 pair, single thread: 2
 * stages (red and black fused) already take 20% off the SOR time, 8 take 28%, 20 or 30
 * no more than 8. Each pass costs two joins of the threads (trapezoids, then triangles),
 * which on a busy machine means two waits for a descheduled thread, so the stages are
 * split evenly (whole sweeps) over as few passes as this allows: the presets' 5, 10 and
 * 15 sweeps (10, 20, 30 stages) take 1, 2 and 2 passes instead of 2, 3 and 4 with 8. */
#define SOR_STAGES 16

/* Stage j of the pass on row y of a chunk [a, b) or boundary region, if in range. */
static void sor_trapezoid(planes *P, int a, int b, int stages, float omega)
{
    int h = P->h, cut_a = a > 0, cut_b = b < h;
    for (int t = a; t < b + stages - 1; t++)
        for (int j = 0; j < stages; j++) {
            int y = t - j;
            if (y >= a + j * cut_a && y < b - j * cut_b)
                sor_row(P, j & 1, y, omega);
        }
}

/* Triangle of chunk boundary a: stage j on rows [a - j, a + j). */
static void sor_triangle(planes *P, int a, int stages, float omega)
{
    for (int t = a - stages; t < a + 2 * stages; t++)
        for (int j = 1; j < stages; j++) {
            int y = t - j;
            if (y >= a - j && y < a + j)
                sor_row(P, j & 1, y, omega);
        }
}

/* `sweeps` red-black sweeps (a sweep: all red pixels, then all black ones). */
static void sor_sweeps(planes *P, int sweeps, float omega, int nt)
{
    /* whole sweeps per pass, so every pass starts with red */
    int h = P->h, passes = (2 * sweeps + SOR_STAGES - 1) / SOR_STAGES, done = 0;
    for (int q = 0; q < passes; q++) {
        int stages = 2 * ((sweeps - done) / (passes - q));
        done += stages / 2;
        int chunks = sinew__nthreads(nt);
        if (chunks > h / (2 * stages))
            chunks = h / (2 * stages);
        if (chunks < 1)
            chunks = 1;
        SINEW_PARALLEL_FOR(nt)
        for (int c = 0; c < chunks; c++) {
            int a = (int)((long long)c * h / chunks), b = (int)((long long)(c + 1) * h / chunks);
            sor_trapezoid(P, a, b, stages, omega);
        }
        if (chunks > 1) {
            SINEW_PARALLEL_FOR(nt)
            for (int c = 1; c < chunks; c++)
                sor_triangle(P, (int)((long long)c * h / chunks), stages, omega);
        }
    }
}

/* Edge-aware smoothness weight from the frame-0 luminance gradient, in the split layout. */
static void edge_weights(planes *P, const sinew__level *l0, float edge, int nt)
{
    (void)nt; /* unused without OpenMP */
    int w = P->w, h = P->h;
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++) {
        for (int c = 0; c < 2; c++) {
            int par = rb_par(c, y), len = rb_len(w, c, y);
            float *eg = P->edge + rb_row(P, c, y);
            const float *gx = l0->gx + (size_t)y * (size_t)w + par;
            const float *gy = l0->gy + (size_t)y * (size_t)w + par;
            for (int k = 0; k < len; k++) {
                size_t i = 2 * (size_t)k;
                eg[k] = expf(-edge * sqrtf(gx[i] * gx[i] + gy[i] * gy[i]));
            }
        }
    }
}

/* One image row from its even-x and odd-x halves (split layout): added to dst (add) or
 * stored. */
static inline void unsplit_row(float *restrict dst, const float *restrict even,
                               const float *restrict odd, int w, int add)
{
    for (int x = 0; x < w; x++) {
        float d = x & 1 ? odd[x >> 1] : even[x >> 1];
        dst[x] = add ? dst[x] + d : d;
    }
}

/* Rows ya .. yb - 1 of the increment (du, dv, split layout) into row-major planes whose
 * first row is row ya: added to them (add) or stored. */
static void put_increment(float *u, float *v, int add, const planes *P, int ya, int yb, int nt)
{
    (void)nt; /* unused without OpenMP */
    int w = P->w;
    SINEW_PARALLEL_FOR(nt)
    for (int y = ya; y < yb; y++) {
        /* even x have colour y & 1, odd x the other one */
        size_t o = (size_t)(y - ya) * (size_t)w;
        size_t oe = rb_row(P, y & 1, y), oo = rb_row(P, !(y & 1), y);
        unsplit_row(u + o, P->du + oe, P->du + oo, w, add);
        unsplit_row(v + o, P->dv + oe, P->dv + oo, w, add);
    }
}

/* (u, v) += (du, dv) on rows ya .. yb - 1, the increment stored row-major from row ya */
static void add_rows(float *u, float *v, const float *du, const float *dv, int ya, int yb, int w,
                     int nt)
{
    (void)nt; /* unused without OpenMP */
    size_t o = (size_t)ya * (size_t)w;
    ptrdiff_t n = (ptrdiff_t)(yb - ya) * w;
    SINEW_PARALLEL_FOR(nt)
    for (ptrdiff_t i = 0; i < n; i++) {
        u[o + (size_t)i] += du[i];
        v[o + (size_t)i] += dv[i];
    }
}

/* Solve for the increment on rows r0 .. r1 - 1 of the level, treating them as a whole
 * image (their first and last rows get the image-border treatment). The increment is
 * left in P->du, P->dv (split layout). */
static void solve_band(planes *P, const float *u, const float *v, const sinew__level *l0,
                       const sinew__level *l1, int r0, int r1, int channels,
                       const sinew__var_params *p, float *work, unsigned char *mask, int nt)
{
    int w = l0->w;
    size_t off = (size_t)r0 * (size_t)w;
    sinew__level b = *l0;
    b.h = r1 - r0;
    for (int c = 0; c < channels; c++)
        b.ch[c] = l0->ch[c] + off;
    b.lum = l0->lum + off;
    b.gx = l0->gx + off;
    b.gy = l0->gy + off;
    u += off;
    v += off;
    layout(P, work, channels, w, b.h);
    derivatives(P, u, v, &b, l1, r0, channels, mask, nt);
    edge_weights(P, &b, p->edge, nt);
    memset(P->du, 0, P->n * sizeof(float));
    memset(P->dv, 0, P->n * sizeof(float));
    for (int k = 0; k < p->outer; k++) {
        smooth_weights(P, u, v, p->alpha, p->eps, nt);
        assemble(P, u, v, channels, p, nt);
        sor_sweeps(P, p->inner, p->omega, nt);
    }
}

/* Rows of context above and below a band: the band's increment is kept only on its core
 * rows, where the artificial border at the band's edge has faded. */
#define BAND_HALO 32

/* Core rows of a band that fits `work` floats (band planes for core + 2 * BAND_HALO rows
 * and the pending increment for core rows). */
static size_t band_core(int channels, int w, size_t work)
{
    size_t np = (size_t)sinew__var_planes(channels), rows = work / (size_t)w;
    if (rows < np * 2 * BAND_HALO)
        return 0;
    return (rows - np * 2 * BAND_HALO) / (np + 2);
}

size_t sinew__var_work(int channels, int w, int h, size_t budget)
{
    size_t n = (size_t)w * (size_t)h, np = (size_t)sinew__var_planes(channels);
    size_t whole = np * n;
    if (whole <= budget)
        return whole;
    /* bands of at least BAND_HALO core rows */
    size_t least = (np * 3 + 2) * BAND_HALO * (size_t)w;
    size_t need = budget > least ? budget : least;
    return need < whole ? need : whole;
}

void sinew__var_level(float *u, float *v, const sinew__level *l0, const sinew__level *l1,
                      int channels, const sinew__var_params *p, float *work, size_t work_floats,
                      unsigned char *mask, int nt)
{
    int w = l0->w, h = l0->h;
    size_t n = (size_t)w * (size_t)h;
    planes P;
    if ((size_t)sinew__var_planes(channels) * n <= work_floats) {
        solve_band(&P, u, v, l0, l1, 0, h, channels, p, work, mask, nt);
        put_increment(u, v, 1, &P, 0, h, nt);
        return;
    }
    /* Bands of `core` rows, each solved with BAND_HALO rows of context on both sides. A
     * band's increment (rows pa .. pb - 1) waits in pend_u, pend_v until the next band,
     * whose context reaches into it, is solved; bands are at least BAND_HALO rows, so no
     * later band reads it. */
    int core = (int)band_core(channels, w, work_floats);
    size_t band_floats =
        (size_t)sinew__var_planes(channels) * (size_t)w * (size_t)(core + 2 * BAND_HALO);
    float *pend_u = work + band_floats, *pend_v = pend_u + (size_t)core * (size_t)w;
    int pa = 0, pb = 0;
    for (int a = 0; a < h; a += core) {
        int b = a + core < h ? a + core : h;
        int r0 = a > BAND_HALO ? a - BAND_HALO : 0, r1 = b + BAND_HALO < h ? b + BAND_HALO : h;
        solve_band(&P, u, v, l0, l1, r0, r1, channels, p, work, mask, nt);
        add_rows(u, v, pend_u, pend_v, pa, pb, w, nt);
        put_increment(pend_u, pend_v, 0, &P, a - r0, b - r0, nt);
        pa = a;
        pb = b;
    }
    add_rows(u, v, pend_u, pend_v, pa, pb, w, nt);
}
