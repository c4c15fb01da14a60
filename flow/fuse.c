/* SPDX-License-Identifier: MIT */
/* Candidate selection near motion boundaries: each boundary pixel may take the flow of a
 * nearby pixel when that flow explains its neighbourhood clearly better (a per-pixel
 * fusion of candidate flows by their data cost, in the spirit of the fusion moves of
 * Lempitsky, Roth, Rother, "FusionFlow", CVPR 2008, and of the candidate propagation of
 * PatchMatch, Barnes et al. 2009; here a greedy local choice, not a graph cut).
 *
 * Coarse-to-fine flow loses regions smaller than a few pixels at the coarse levels
 * (background seen between thin branches, the far side of an edge): the smoothness term
 * then keeps the flow of the surrounding surface there. The data term alone would pick
 * the right one of the two motions if it were offered, so at a boundary pixel x we offer
 * the flows found at 8 directions x 3 distances around x and keep the one with the lowest
 * cost
 *
 *   C(w) = sum_j a_j min(tau, (1/C) sum_c |I1_c(j + w) - I0_c(j)|),   j in the 3x3 of x,
 *   a_j  = exp(-|I0(j) - I0(x)|^2 / (2 s_c^2)) / sum of those weights
 *
 * (truncated colour difference over a colour-weighted window, adaptive support weights
 * in the manner of Yoon and Kweon, TPAMI 2006). A candidate wins only if its cost is
 * below both (1 - FU_MARGIN) times the current cost and FU_ACCEPT (a clear, good match),
 * and only if its source region does not move towards x relative to x's current flow:
 * when it does, x may be about to be covered by that region (occluded in frame 1), where
 * no data cost is meaningful. Points sampled outside frame 1 cost tau.
 *
 * All constants are ours and were chosen on the Middlebury training pairs (mean EPE,
 * accurate preset; docs/benchmarks.md), checked on FlyingChairs and the demo scene.
 * Boundary pixels use the weighted median's 5x5 test (sinew__flow_edge). */
#include <math.h>

#include "flow/internal/flowimpl.h"
#include "flow/internal/parallel.h"

#define FU_SIGMA_C (10.f / 255.f) /* colour weight of the window, intensity in [0, 1] */
#define FU_TAU 0.1f               /* truncation of the per-pixel colour difference */
#define FU_MARGIN 0.3f            /* a candidate must cost < (1 - margin) x current ... */
#define FU_ACCEPT 0.01f           /* ... and < this (mean truncated difference) */
#define FU_SAME 0.1f              /* candidates closer than this (L1, px) count once */
#define FU_NDIST 3
#define FU_MAXC (8 * FU_NDIST)

/* Cost C(w) at (x, y) with the normalised window weights aw[9]. */
static float cand_cost(const sinew__level *l0, const sinew__level *l1, int channels, int x, int y,
                       float cu, float cv, const float *aw)
{
    int w = l0->w, h = l0->h;
    float cost = 0.f;
    int k = 0;
    for (int dy = -1; dy <= 1; dy++) {
        int yy = y + dy < 0 ? 0 : (y + dy >= h ? h - 1 : y + dy);
        for (int dx = -1; dx <= 1; dx++, k++) {
            int xx = x + dx < 0 ? 0 : (x + dx >= w ? w - 1 : x + dx);
            float px = (float)xx + cu, py = (float)yy + cv;
            float r = FU_TAU;
            if (px >= -0.5f && py >= -0.5f && px <= (float)w - 0.5f && py <= (float)h - 0.5f) {
                size_t j = (size_t)yy * (size_t)w + (size_t)xx;
                float d = 0.f;
                for (int c = 0; c < channels; c++)
                    d += fabsf(sinew__sample(l1->ch[c], w, h, px, py) - l0->ch[c][j]);
                d /= (float)channels;
                r = d < FU_TAU ? d : FU_TAU;
            }
            cost += aw[k] * r;
        }
    }
    return cost;
}

/* Normalised colour-similarity weights of the 3x3 window of pixel i = (x, y). */
static void window_weights(float *aw, const sinew__level *l0, int channels, int x, int y)
{
    int w = l0->w, h = l0->h;
    size_t i = (size_t)y * (size_t)w + (size_t)x;
    float kc = 1.f / (2.f * FU_SIGMA_C * FU_SIGMA_C), sum = 0.f;
    int k = 0;
    for (int dy = -1; dy <= 1; dy++) {
        int yy = y + dy < 0 ? 0 : (y + dy >= h ? h - 1 : y + dy);
        for (int dx = -1; dx <= 1; dx++, k++) {
            int xx = x + dx < 0 ? 0 : (x + dx >= w ? w - 1 : x + dx);
            size_t j = (size_t)yy * (size_t)w + (size_t)xx;
            float dc = 0.f;
            for (int c = 0; c < channels; c++) {
                float d = l0->ch[c][j] - l0->ch[c][i];
                dc += d * d;
            }
            aw[k] = expf(-dc * kc);
            sum += aw[k];
        }
    }
    for (k = 0; k < 9; k++)
        aw[k] /= sum; /* the centre weighs 1, so sum >= 1 */
}

void sinew__fuse(float *uo, float *vo, const float *u, const float *v, const sinew__level *l0,
                 const sinew__level *l1, int channels, float band, int nt)
{
    (void)nt; /* unused without OpenMP */
    static const int dir[8][2] = {{1, 0}, {-1, 0},  {0, 1},  {0, -1},
                                  {1, 1}, {-1, -1}, {1, -1}, {-1, 1}};
    static const int dist[FU_NDIST] = {3, 6, 12};
    int w = l0->w, h = l0->h;
    /* boundary pixels cluster in some rows: dynamic schedule (rows are independent) */
    SINEW_PARALLEL_FOR_DYNAMIC(nt)
    for (int y = 0; y < h; y++) {
        for (int x = 0; x < w; x++) {
            size_t i = (size_t)y * (size_t)w + (size_t)x;
            float uc = u[i], vc = v[i];
            uo[i] = uc;
            vo[i] = vc;
            if (!sinew__flow_edge(u, v, w, h, x, y, band))
                continue;
            float aw[9];
            window_weights(aw, l0, channels, x, y);
            float cur = cand_cost(l0, l1, channels, x, y, uc, vc, aw);
            float limit = cur * (1.f - FU_MARGIN);
            if (limit > FU_ACCEPT)
                limit = FU_ACCEPT;
            float tu[FU_MAXC], tv[FU_MAXC];
            int nc = 0;
            for (int r = 0; r < FU_NDIST; r++) {
                for (int q = 0; q < 8; q++) {
                    int xx = x + dir[q][0] * dist[r], yy = y + dir[q][1] * dist[r];
                    if (xx < 0 || yy < 0 || xx >= w || yy >= h)
                        continue;
                    size_t j = (size_t)yy * (size_t)w + (size_t)xx;
                    float cu = u[j], cv = v[j];
                    /* another motion, and its region does not move towards x */
                    if (fabsf(cu - uc) + fabsf(cv - vc) <= band ||
                        (cu - uc) * (float)dir[q][0] + (cv - vc) * (float)dir[q][1] < 0.f)
                        continue;
                    int seen = 0;
                    for (int t = 0; t < nc && !seen; t++)
                        seen = fabsf(cu - tu[t]) + fabsf(cv - tv[t]) <= FU_SAME;
                    if (seen)
                        continue;
                    tu[nc] = cu;
                    tv[nc] = cv;
                    nc++;
                    float c = cand_cost(l0, l1, channels, x, y, cu, cv, aw);
                    if (c < limit) {
                        limit = c;
                        uo[i] = cu;
                        vo[i] = cv;
                    }
                }
            }
        }
    }
}

void sinew__choose_regions(float *u, float *v, const float *ua, const float *va, const int *label,
                           int nlabels, const float *d, float *sum, int w, int h, int nt)
{
    (void)nt; /* unused without OpenMP */
    for (int k = 0; k < nlabels; k++)
        sum[k] = 0.f;
    size_t n = (size_t)w * (size_t)h;
    for (size_t i = 0; i < n; i++) /* serial: the sums do not depend on the threads */
        if (label[i] >= 0)
            sum[label[i]] += d[i];
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++) {
        for (int x = 0; x < w; x++) {
            size_t i = (size_t)y * (size_t)w + (size_t)x;
            if (label[i] >= 0 && sum[label[i]] < 0.f) {
                u[i] = ua[i];
                v[i] = va[i];
            }
        }
    }
}
