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
 * geodesically nearest kept seed (EpicFlow's first step). Paths rarely cross strong
 * edges, so a region takes the matches found inside it.
 *
 * Locally weighted affine fits (EpicFlow's second step): seeds whose regions touch are
 * linked with the length of the shortest path through their common boundary
 * (D(p, a) + D(q, b) + step cost, p, q 4-adjacent; at most IP_DEG links per seed, the
 * shortest); for each kept seed, Dijkstra over that graph finds its K = IP_K
 * geodesically nearest kept seeds, weighted by exp(-D / sigma) with
 * sigma = step * sqrt(K / pi), the radius within which K grid seeds lie on a flat image
 * (ours: EpicFlow's kernel coefficient is in units of their edge map). Ours as well: each
 * weight is multiplied by a Cauchy weight 1 / (1 + (r / IP_TAU)^2) of the seed's residual
 * r, first to the fitted seed's own match, then to the first fit (IP_ROUNDS = 2 weighted
 * least-squares fits), so a thin object's few seeds are not pulled towards the more
 * numerous background seeds the kernel also reaches (without it the 64 px/frame probe of
 * the displacement sweep took the background's motion). A fit whose normal equations are
 * singular (fewer than 3 seeds, collinear seeds) falls back to the weighted mean
 * (Nadaraya-Watson, as in EpicFlow). Each pixel takes the affine model of its nearest
 * seed. Without scratch for one fit (tmp_floats too small) each pixel takes its nearest
 * seed's match.
 *
 * Threads: the labelling and the graph are built serially; the fits run over seeds split
 * statically between workers (each seed's fit reads only the shared graph and writes its
 * own model); the final fill runs over rows. Nothing depends on the thread count. */
#include <float.h>
#include <math.h>
#include <string.h>

#include "flow/internal/flowimpl.h"
#include "flow/internal/parallel.h"

#define IP_EDGE (8.f / 255.f)
#define IP_PASSES 2
#define IP_K 100     /* seeds per affine fit (EpicFlow's K; from memory) */
#define IP_TAU 3.f   /* Cauchy scale of a seed's residual, px at the level (the grid step) */
#define IP_ROUNDS 2  /* fits per seed: from its own match, then from the first fit */
#define IP_DEG 16    /* seed-graph links kept per seed */
#define IP_COND 1e-6 /* determinant test of the 3x3 normal equations (relative) */

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

static inline int seed_at(int i, int step, int size)
{
    int p = i * step + step / 2;
    return p < size ? p : size - 1;
}

/* Seed graph: up to IP_DEG neighbours per seed, weight = the shortest geodesic path
 * between the two seeds through a pixel boundary of their regions. */
typedef struct ip_graph {
    int ns;
    int *deg, *nbr; /* ns, ns * IP_DEG */
    float *wt;      /* ns * IP_DEG */
} ip_graph;

static void graph_link(ip_graph *g, int a, int b, float d)
{
    int *nb = g->nbr + (size_t)a * IP_DEG;
    float *wt = g->wt + (size_t)a * IP_DEG;
    int k, worst = 0;
    for (k = 0; k < g->deg[a]; k++) {
        if (nb[k] == b) {
            if (d < wt[k])
                wt[k] = d;
            return;
        }
        if (wt[k] > wt[worst])
            worst = k;
    }
    if (g->deg[a] < IP_DEG) {
        nb[g->deg[a]] = b;
        wt[g->deg[a]++] = d;
    } else if (d < wt[worst]) { /* full: keep the IP_DEG shortest links */
        nb[worst] = b;
        wt[worst] = d;
    }
}

static void graph_build(ip_graph *g, const float *dist, const int *label, const float *c, int w,
                        int h)
{
    for (int s = 0; s < g->ns; s++)
        g->deg[s] = 0;
    for (int y = 0; y < h; y++) {
        for (int x = 0; x < w; x++) {
            size_t i = (size_t)y * (size_t)w + (size_t)x;
            size_t nb[2] = {i + 1, i + (size_t)w};
            int has[2] = {x + 1 < w, y + 1 < h};
            for (int k = 0; k < 2; k++) {
                if (!has[k])
                    continue;
                size_t j = nb[k];
                int a = label[i], b = label[j];
                if (a < 0 || b < 0 || a == b)
                    continue;
                float d = dist[i] + dist[j] + 0.5f * (c[i] + c[j]);
                graph_link(g, a, b, d);
                graph_link(g, b, a, d);
            }
        }
    }
}

/* Per-worker Dijkstra scratch over the seed graph. */
typedef struct ip_heap {
    float *hd;   /* heap keys */
    int *hn;     /* heap nodes */
    int size;    /* entries in use */
    float *best; /* ns: tentative distance, valid where stamp == cur */
    int *stamp;  /* ns */
    int cur;
    float *list; /* 6 * K: the nearest seeds' offsets, flows, kernel and fit weights */
} ip_heap;

static void heap_push(ip_heap *q, float d, int n)
{
    int i = q->size++;
    while (i > 0) {
        int p = (i - 1) / 2;
        if (q->hd[p] < d || (q->hd[p] == d && q->hn[p] <= n))
            break;
        q->hd[i] = q->hd[p];
        q->hn[i] = q->hn[p];
        i = p;
    }
    q->hd[i] = d;
    q->hn[i] = n;
}

static void heap_pop(ip_heap *q, float *d, int *n)
{
    *d = q->hd[0];
    *n = q->hn[0];
    float ld = q->hd[--q->size];
    int ln = q->hn[q->size], i = 0;
    for (;;) {
        int a = 2 * i + 1, b = a + 1, m = i;
        float md = ld;
        int mn = ln;
        if (a < q->size && (q->hd[a] < md || (q->hd[a] == md && q->hn[a] < mn)))
            m = a, md = q->hd[a], mn = q->hn[a];
        if (b < q->size && (q->hd[b] < md || (q->hd[b] == md && q->hn[b] < mn)))
            m = b;
        if (m == i)
            break;
        q->hd[i] = q->hd[m];
        q->hn[i] = q->hn[m];
        i = m;
    }
    q->hd[i] = ld;
    q->hn[i] = ln;
}

/* Weighted least-squares affine fit to the listed seeds (positions relative to the fitted
 * seed in dx, dy; flows fu, fv; weights wt): m as in fit_seed. The weighted mean
 * (Nadaraya-Watson) when the normal equations are singular (collinear or < 3 seeds). */
static void affine_fit(float *m, const float *dx, const float *dy, const float *fu, const float *fv,
                       const float *wt, int n)
{
    double S[3][3] = {{0}}, bu[3] = {0}, bv[3] = {0};
    for (int k = 0; k < n; k++) {
        double r[3] = {1.0, dx[k], dy[k]};
        for (int i = 0; i < 3; i++) {
            for (int j = 0; j < 3; j++)
                S[i][j] += wt[k] * r[i] * r[j];
            bu[i] += wt[k] * r[i] * fu[k];
            bv[i] += wt[k] * r[i] * fv[k];
        }
    }
    double c00 = S[1][1] * S[2][2] - S[1][2] * S[2][1];
    double c01 = S[1][2] * S[2][0] - S[1][0] * S[2][2];
    double c02 = S[1][0] * S[2][1] - S[1][1] * S[2][0];
    double det = S[0][0] * c00 + S[0][1] * c01 + S[0][2] * c02;
    if (n >= 3 && det > IP_COND * S[0][0] * S[1][1] * S[2][2]) {
        double inv[3][3] = {
            {c00, S[0][2] * S[2][1] - S[0][1] * S[2][2], S[0][1] * S[1][2] - S[0][2] * S[1][1]},
            {c01, S[0][0] * S[2][2] - S[0][2] * S[2][0], S[0][2] * S[1][0] - S[0][0] * S[1][2]},
            {c02, S[0][1] * S[2][0] - S[0][0] * S[2][1], S[0][0] * S[1][1] - S[0][1] * S[1][0]}};
        for (int i = 0; i < 3; i++) {
            double au = 0, av = 0;
            for (int j = 0; j < 3; j++) {
                au += inv[i][j] * bu[j];
                av += inv[i][j] * bv[j];
            }
            m[i] = (float)(au / det);
            m[3 + i] = (float)(av / det);
        }
    } else {
        m[0] = (float)(bu[0] / S[0][0]);
        m[3] = (float)(bv[0] / S[0][0]);
        m[1] = m[2] = m[4] = m[5] = 0.f;
    }
}

/* Affine motion model of seed s (6 floats: u = m0 + m1 dx + m2 dy, v = m3 + m4 dx + m5 dy,
 * (dx, dy) from the seed) fitted to its K geodesically nearest kept seeds (Dijkstra over
 * the seed graph) with weights exp(-D / IP_SIGMA) times a Cauchy weight
 * 1 / (1 + (r / IP_TAU)^2) of each seed's residual r, first to the seed's own match, then
 * to the previous fit (IP_ROUNDS fits), so the model stays on the seed's own motion layer
 * where a thin object's few seeds are outnumbered by the background's. */
static void fit_seed(float *m, int s, const ip_graph *g, ip_heap *q, const sinew__seeds *sd, int w,
                     int h, int kmax, float sigma)
{
    int sx = seed_at(s % sd->nx, sd->step, w), sy = seed_at(s / sd->nx, sd->step, h);
    float *lx = q->list, *ly = lx + kmax, *lu = ly + kmax, *lv = lu + kmax, *lw = lv + kmax,
          *wt = lw + kmax;
    int found = 0;
    q->cur++;
    q->size = 0;
    q->best[s] = 0.f;
    q->stamp[s] = q->cur;
    heap_push(q, 0.f, s);
    while (q->size > 0 && found < kmax) {
        float d;
        int a;
        heap_pop(q, &d, &a);
        if (d > q->best[a])
            continue;      /* stale entry */
        q->best[a] = -1.f; /* settled */
        lx[found] = (float)(seed_at(a % sd->nx, sd->step, w) - sx);
        ly[found] = (float)(seed_at(a / sd->nx, sd->step, h) - sy);
        lu[found] = (float)sd->fu[a];
        lv[found] = (float)sd->fv[a];
        lw[found] = expf(-d / sigma);
        found++;
        const int *nb = g->nbr + (size_t)a * IP_DEG;
        const float *wl = g->wt + (size_t)a * IP_DEG;
        for (int k = 0; k < g->deg[a]; k++) {
            int b = nb[k];
            float nd = d + wl[k];
            if (q->stamp[b] == q->cur && !(nd < q->best[b]))
                continue; /* settled (best < 0) or no shorter */
            q->stamp[b] = q->cur;
            q->best[b] = nd;
            heap_push(q, nd, b);
        }
    }
    float ref[6] = {(float)sd->fu[s], 0.f, 0.f, (float)sd->fv[s], 0.f, 0.f};
    for (int round = 0; round < IP_ROUNDS; round++) {
        const float *r = round ? m : ref;
        for (int k = 0; k < found; k++) {
            float eu = lu[k] - (r[0] + r[1] * lx[k] + r[2] * ly[k]);
            float ev = lv[k] - (r[3] + r[4] * lx[k] + r[5] * ly[k]);
            wt[k] = lw[k] / (1.f + (eu * eu + ev * ev) / (IP_TAU * IP_TAU));
        }
        affine_fit(m, lx, ly, lu, lv, wt, found);
    }
}

size_t sinew__interp_scratch(int nseeds, int workers)
{
    size_t ns = (size_t)nseeds, per = 2 * ns + 2 * ((size_t)IP_K * IP_DEG + 1) + 6 * (size_t)IP_K;
    return ns * (1 + 2 * IP_DEG + 6) + (size_t)(workers > 0 ? workers : 1) * per;
}

int sinew__interpolate(float *u, float *v, float *dist, int *label, float *tmp, size_t tmp_floats,
                       const float *lum, int w, int h, const sinew__seeds *sd, int nt)
{
    size_t n = (size_t)w * (size_t)h;
    int used = 0, ns = sd->nx * sd->ny;
    for (size_t i = 0; i < n; i++) {
        dist[i] = FLT_MAX;
        label[i] = -1;
    }
    for (int j = 0; j < sd->ny; j++) {
        int y = seed_at(j, sd->step, h);
        for (int i = 0; i < sd->nx; i++) {
            int x = seed_at(i, sd->step, w), s = j * sd->nx + i;
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
    /* scratch: graph, models, then one Dijkstra block per worker */
    int workers = sinew__nthreads(nt);
    while (workers > 1 && sinew__interp_scratch(ns, workers) > tmp_floats)
        workers--;
    float *model = NULL;
    /* kernel scale: the radius within which K seeds of the grid lie on a flat image */
    float sigma = (float)sd->step * sqrtf((float)IP_K / 3.14159265f);
    if (sinew__interp_scratch(ns, workers) <= tmp_floats) {
        ip_graph g = {ns, (int *)(void *)tmp, (int *)(void *)(tmp + ns),
                      tmp + (size_t)ns * (1 + IP_DEG)};
        model = tmp + (size_t)ns * (1 + 2 * IP_DEG);
        float *blk = model + (size_t)ns * 6;
        size_t per = 2 * (size_t)ns + 2 * ((size_t)IP_K * IP_DEG + 1) + 6 * (size_t)IP_K;
        graph_build(&g, dist, label, u, w, h);
        SINEW_PARALLEL_FOR(workers)
        for (int k = 0; k < workers; k++) {
            float *b = blk + (size_t)k * per;
            size_t hn = (size_t)IP_K * IP_DEG + 1;
            ip_heap q = {
                b, (int *)(void *)(b + hn),    0, b + 2 * hn, (int *)(void *)(b + 2 * hn + ns),
                0, b + 2 * hn + 2 * (size_t)ns};
            for (int s = 0; s < ns; s++)
                q.stamp[s] = 0;
            for (int s = k; s < ns; s += workers)
                if (sd->ok[s])
                    fit_seed(model + (size_t)s * 6, s, &g, &q, sd, w, h, IP_K, sigma);
        }
    }
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++) {
        for (int x = 0; x < w; x++) {
            size_t i = (size_t)y * (size_t)w + (size_t)x;
            int s = label[i];
            if (model) {
                const float *m = model + (size_t)s * 6;
                float dx = (float)(x - seed_at(s % sd->nx, sd->step, w));
                float dy = (float)(y - seed_at(s / sd->nx, sd->step, h));
                u[i] = m[0] + m[1] * dx + m[2] * dy;
                v[i] = m[3] + m[4] * dx + m[5] * dy;
            } else {
                u[i] = (float)sd->fu[s];
                v[i] = (float)sd->fv[s];
            }
        }
    }
    return used;
}
