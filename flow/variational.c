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
 * result independent of the thread count. */
#include <math.h>
#include <string.h>

#include "flow/internal/flowimpl.h"
#include "flow/internal/parallel.h"

int sinew__var_planes(int channels)
{
    /* 3 per channel + 5 gradient-constancy + du, dv + a12, b1, b2, inv1, inv2 + wx, wy +
     * edge weight + one zero row (counted as a plane for simplicity) */
    return 3 * channels + 5 + 2 + 5 + 2 + 1 + 1;
}

typedef struct planes {
    float *ix[SINEW__MAX_CH], *iy[SINEW__MAX_CH], *it[SINEW__MAX_CH];
    float *lxt, *lyt, *lxx, *lxy, *lyy;
    float *du, *dv, *a12, *b1, *b2, *inv1, *inv2, *wx, *wy, *edge, *zero;
} planes;

static void layout(planes *P, float *work, int channels, size_t n)
{
    for (int c = 0; c < channels; c++) {
        P->ix[c] = work; work += n;
        P->iy[c] = work; work += n;
        P->it[c] = work; work += n;
    }
    P->lxt = work; work += n;
    P->lyt = work; work += n;
    P->lxx = work; work += n;
    P->lxy = work; work += n;
    P->lyy = work; work += n;
    P->du = work; work += n;
    P->dv = work; work += n;
    P->a12 = work; work += n;
    P->b1 = work; work += n;
    P->b2 = work; work += n;
    P->inv1 = work; work += n;
    P->inv2 = work; work += n;
    P->wx = work; work += n;
    P->wy = work; work += n;
    P->edge = work; work += n;
    P->zero = work;
}

/* dst = 0.5 * (a + b) */
static void average(float *restrict dst, const float *restrict a, const float *restrict b,
                    size_t n, int nt)
{
    (void)nt; /* unused without OpenMP */
    SINEW_PARALLEL_FOR(nt)
    for (ptrdiff_t i = 0; i < (ptrdiff_t)n; i++)
        dst[i] = 0.5f * (a[i] + b[i]);
}

/* dst -= b; masked pixels of all listed planes are zeroed by the caller. */
static void subtract(float *restrict dst, const float *restrict b, size_t n, int nt)
{
    (void)nt; /* unused without OpenMP */
    SINEW_PARALLEL_FOR(nt)
    for (ptrdiff_t i = 0; i < (ptrdiff_t)n; i++)
        dst[i] -= b[i];
}

static void scale_masked(float *restrict p, const unsigned char *restrict mask, float s,
                         size_t n, int nt)
{
    (void)nt; /* unused without OpenMP */
    SINEW_PARALLEL_FOR(nt)
    for (ptrdiff_t i = 0; i < (ptrdiff_t)n; i++)
        p[i] = mask[i] ? 0.f : p[i] * s;
}

/* Warp frame 1 and compute all derivative planes. */
static void derivatives(planes *P, const float *u, const float *v, const sinew__level *l0,
                        const sinew__level *l1, int channels, unsigned char *mask, int nt)
{
    int w = l0->w, h = l0->h;
    size_t n = (size_t)w * (size_t)h;
    float *tmp = P->a12;
    /* brightness constancy per channel, scaled by 1/sqrt(C) so the data weight does not
     * depend on the channel count */
    float cs = 1.0f / sqrtf((float)channels);
    for (int c = 0; c < channels; c++) {
        const float *i0 = channels > 1 ? l0->ch[c] : l0->lum;
        const float *i1 = channels > 1 ? l1->ch[c] : l1->lum;
        sinew__warp(P->it[c], mask, i1, u, v, w, h, nt);
        average(tmp, i0, P->it[c], n, nt);
        sinew__gradient(P->ix[c], P->iy[c], tmp, w, h, nt);
        subtract(P->it[c], i0, n, nt);
        scale_masked(P->ix[c], mask, cs, n, nt);
        scale_masked(P->iy[c], mask, cs, n, nt);
        scale_masked(P->it[c], mask, cs, n, nt);
    }
    /* gradient constancy on the luminance: warp the gradient images of frame 1 */
    sinew__warp(P->lxt, NULL, l1->gx, u, v, w, h, nt);
    sinew__warp(P->lyt, NULL, l1->gy, u, v, w, h, nt);
    average(tmp, l0->gx, P->lxt, n, nt);
    sinew__gradient(P->lxx, P->lxy, tmp, w, h, nt);
    average(tmp, l0->gy, P->lyt, n, nt);
    sinew__gradient(NULL, P->lyy, tmp, w, h, nt);
    subtract(P->lxt, l0->gx, n, nt);
    subtract(P->lyt, l0->gy, n, nt);
    scale_masked(P->lxt, mask, 1.f, n, nt);
    scale_masked(P->lyt, mask, 1.f, n, nt);
    scale_masked(P->lxx, mask, 1.f, n, nt);
    scale_masked(P->lxy, mask, 1.f, n, nt);
    scale_masked(P->lyy, mask, 1.f, n, nt);
}

/* Smoothness weights from forward differences of (u + du, v + dv): the weight of the link
 * x -> x+1 is wx(x), of y -> y+1 is wy(x); zero past the last column / row. */
static void smooth_weights(planes *P, const float *u, const float *v, int w, int h,
                           float alpha, float eps, int nt)
{
    (void)nt; /* unused without OpenMP */
    float e2 = eps * eps;
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++) {
        size_t o = (size_t)y * (size_t)w;
        size_t od = y + 1 < h ? o + (size_t)w : o;
        const float *restrict ur = u + o, *restrict vr = v + o;
        const float *restrict dur = P->du + o, *restrict dvr = P->dv + o;
        const float *restrict ud = u + od, *restrict vd = v + od;
        const float *restrict dud = P->du + od, *restrict dvd = P->dv + od;
        const float *restrict eg = P->edge + o;
        float *restrict wx = P->wx + o, *restrict wy = P->wy + o;
        for (int x = 0; x < w; x++) {
            int xr = x + 1 < w ? x + 1 : x;
            float ux = (ur[xr] + dur[xr]) - (ur[x] + dur[x]);
            float vx = (vr[xr] + dvr[xr]) - (vr[x] + dvr[x]);
            float uy = (ud[x] + dud[x]) - (ur[x] + dur[x]);
            float vy = (vd[x] + dvd[x]) - (vr[x] + dvr[x]);
            float s = alpha * eg[x] / sqrtf(ux * ux + uy * uy + vx * vx + vy * vy + e2);
            wx[x] = x + 1 < w ? s : 0.f;
            wy[x] = y + 1 < h ? s : 0.f;
        }
    }
}

/* Freeze the data-term penalty derivatives and assemble the per-pixel system. */
static void assemble(planes *P, const float *u, const float *v, int w, int h, int channels,
                     const sinew__var_params *p, int nt)
{
    (void)nt; /* unused without OpenMP */
    float e2 = p->eps * p->eps;
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++) {
        size_t o = (size_t)y * (size_t)w;
        for (int x = 0; x < w; x++) {
            size_t i = o + (size_t)x;
            float du = P->du[i], dv = P->dv[i];
            float j11 = 0.f, j12 = 0.f, j22 = 0.f, j13 = 0.f, j23 = 0.f, r2 = 0.f;
            for (int c = 0; c < channels; c++) {
                float ix = P->ix[c][i], iy = P->iy[c][i], it = P->it[c][i];
                float r = it + ix * du + iy * dv;
                r2 += r * r;
                j11 += ix * ix;
                j12 += ix * iy;
                j22 += iy * iy;
                j13 += ix * it;
                j23 += iy * it;
            }
            float pd = p->delta / sqrtf(r2 + e2);
            float lxx = P->lxx[i], lxy = P->lxy[i], lyy = P->lyy[i];
            float lxt = P->lxt[i], lyt = P->lyt[i];
            float gx = lxt + lxx * du + lxy * dv, gy = lyt + lxy * du + lyy * dv;
            float pg = p->gamma / sqrtf(gx * gx + gy * gy + e2);
            float a11 = pd * j11 + pg * (lxx * lxx + lxy * lxy);
            float a12 = pd * j12 + pg * (lxx * lxy + lxy * lyy);
            float a22 = pd * j22 + pg * (lxy * lxy + lyy * lyy);
            float b1 = -(pd * j13 + pg * (lxx * lxt + lxy * lyt));
            float b2 = -(pd * j23 + pg * (lxy * lxt + lyy * lyt));
            /* smoothness: sum_n w_n (u_n - u) moves to the right-hand side */
            float wl = x > 0 ? P->wx[i - 1] : 0.f, wr = P->wx[i];
            float wu = y > 0 ? P->wy[i - (size_t)w] : 0.f, wd = P->wy[i];
            float sw = wl + wr + wu + wd;
            float su = 0.f, sv = 0.f;
            if (x > 0) su += wl * (u[i - 1] - u[i]), sv += wl * (v[i - 1] - v[i]);
            if (x + 1 < w) su += wr * (u[i + 1] - u[i]), sv += wr * (v[i + 1] - v[i]);
            if (y > 0) su += wu * (u[i - (size_t)w] - u[i]), sv += wu * (v[i - (size_t)w] - v[i]);
            if (y + 1 < h) su += wd * (u[i + (size_t)w] - u[i]), sv += wd * (v[i + (size_t)w] - v[i]);
            P->a12[i] = a12;
            P->b1[i] = b1 + su;
            P->b2[i] = b2 + sv;
            P->inv1[i] = 1.0f / (a11 + sw + 1e-9f);
            P->inv2[i] = 1.0f / (a22 + sw + 1e-9f);
        }
    }
}

static inline void sor_pixel(planes *P, size_t i, float wl, float wr, float wu, float wd,
                             size_t il, size_t ir, size_t iu, size_t id, float omega)
{
    float *du = P->du, *dv = P->dv;
    float nu = wl * du[il] + wr * du[ir] + wu * du[iu] + wd * du[id];
    float un = (P->b1[i] + nu - P->a12[i] * dv[i]) * P->inv1[i];
    du[i] += omega * (un - du[i]);
    float nv = wl * dv[il] + wr * dv[ir] + wu * dv[iu] + wd * dv[id];
    float vn = (P->b2[i] + nv - P->a12[i] * du[i]) * P->inv2[i];
    dv[i] += omega * (vn - dv[i]);
}

/* One half-sweep over the pixels with (x + y) % 2 == colour. */
static void sor_half(planes *P, int w, int h, int colour, float omega, int nt)
{
    (void)nt; /* unused without OpenMP */
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++) {
        size_t o = (size_t)y * (size_t)w;
        size_t ou = y > 0 ? o - (size_t)w : o, od = y + 1 < h ? o + (size_t)w : o;
        const float *wyu = y > 0 ? P->wy + ou : P->zero;
        const float *wx = P->wx + o, *wy = P->wy + o;
        for (int x = (y + colour) & 1; x < w; x += 2) {
            size_t i = o + (size_t)x;
            size_t il = x > 0 ? i - 1 : i, ir = x + 1 < w ? i + 1 : i;
            float wl = x > 0 ? wx[x - 1] : 0.f;
            sor_pixel(P, i, wl, wx[x], wyu[x], wy[x], il, ir, ou + (size_t)x, od + (size_t)x,
                      omega);
        }
    }
}

void sinew__var_level(float *u, float *v, const sinew__level *l0, const sinew__level *l1,
                      int channels, const sinew__var_params *p, float *work,
                      unsigned char *mask, int nt)
{
    int w = l0->w, h = l0->h;
    size_t n = (size_t)w * (size_t)h;
    planes P;
    layout(&P, work, channels, n);
    memset(P.zero, 0, (size_t)w * sizeof(float));
    derivatives(&P, u, v, l0, l1, channels, mask, nt);
    /* edge-aware weight from the frame-0 luminance gradient */
    SINEW_PARALLEL_FOR(nt)
    for (ptrdiff_t i = 0; i < (ptrdiff_t)n; i++)
        P.edge[i] = expf(-p->edge * sqrtf(l0->gx[i] * l0->gx[i] + l0->gy[i] * l0->gy[i]));
    memset(P.du, 0, n * sizeof(float));
    memset(P.dv, 0, n * sizeof(float));
    for (int k = 0; k < p->outer; k++) {
        smooth_weights(&P, u, v, w, h, p->alpha, p->eps, nt);
        assemble(&P, u, v, w, h, channels, p, nt);
        for (int s = 0; s < p->inner; s++) {
            sor_half(&P, w, h, 0, p->omega, nt);
            sor_half(&P, w, h, 1, p->omega, nt);
        }
    }
    SINEW_PARALLEL_FOR(nt)
    for (ptrdiff_t i = 0; i < (ptrdiff_t)n; i++) {
        u[i] += P.du[i];
        v[i] += P.dv[i];
    }
}
