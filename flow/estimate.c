/* SPDX-License-Identifier: MIT */
/* The flow estimator: presets, buffer management and the coarse-to-fine schedule.
 *
 * For each direction, starting from zero flow at the coarsest level, every level
 *   1. takes the bilinearly upsampled (x2) flow of the level above,
 *   2. runs dense inverse search (flow/dis.c) if the level is at or above dis_finest,
 *   3. runs `warps` variational refinement steps (flow/variational.c), each followed by
 *      a median filter of the flow when enabled (and the first, at the finest
 *      fuse_levels levels, by candidate selection near motion boundaries, flow/fuse.c),
 * down to finest_level; a coarser final level is upsampled to full resolution.
 * Both frames' pyramids live in the estimator; when a run's frame0 equals the previous
 * run's frame1 (byte comparison) the old frame1 pyramid is reused.
 *
 * Memory (gray frames, n pixels): the pyramids hold images only (2 x 4/3 n floats); the
 * flow (2n) and one scratch block of 4n floats (`g`: both frames' gradients of the level
 * in use, the filtered flow after a warp, the coarse flow while upsampling, and the
 * pyramid builder's temporaries) are full size; the solver's work block is capped at
 * work_mib (the variational solver then runs in bands, flow/variational.c). Gradients
 * are recomputed when a filter has reused their planes. */
#include <math.h>
#include <string.h>

#include "flow/estimate.h"
#include "flow/internal/base.h"
#include "flow/internal/flowimpl.h"
#include "flow/internal/parallel.h"

struct sinew_estimator {
    sinew_ctx *ctx;
    sinew_flow_params p;
    /* shape the buffers were sized for */
    int w, h, channels, levels;
    float *pyr_mem[2];
    sinew__pyramid pyr[2];
    int cur0;             /* index of frame 0's pyramid in pyr[] */
    unsigned char *last1; /* copy of the previous frame 1 (for pyramid reuse) */
    size_t last1_len, last1_cap;
    int last1_valid;
    sinew_type last1_type;
    int last1_fc;
    float *u, *v; /* full-resolution flow planes */
    float *g;     /* 4 planes of gp floats: gradients, flow and pyramid scratch */
    size_t gp;    /* floats per plane of g (n rounded up to 16) */
    float *work;  /* solver work: var bands, patch densification, median weights */
    size_t work_floats;
    unsigned char *mask;
    float *pu, *pv; /* patch flows */
    /* large-displacement stage at level lm_level (0 = off for this size): seed flows and
     * costs forward (0) and backward (1), forward-backward flags */
    int lm_level, lm_nx, lm_ny;
    int lm_on; /* this run's matches passed the density test (lm_match) */
    int *lm_f[2][3];
    unsigned char *lm_ok[2];
};

/* Large-displacement stage constants (docs/methods.md) */
#define LM_WIDTH 512 /* working level: the finest at most this wide (and >= level 1) */
#define LM_MIN 16    /* ... and at least this many pixels on each side */
#define LM_STEP 3    /* seed grid step at that level (Hu et al. 2016: d = 3) */
#define LM_ITERS 8   /* PatchMatch iterations */
#define LM_SAMPLES 8 /* uniform draws over the frame per seed and iteration */
#define LM_SUPPORT 6 /* a kept seed needs this many agreeing kept neighbours in 5x5 */
#define LM_EVIDENCE                                                                                \
    600.f             /* the interpolated start wins a region if its descriptor cost is            \
                       * lower by this much per pixel (L1 of 32 bytes; docs/methods.md) */
#define LM_DEPTH 5    /* descriptor pyramid levels (Hu et al. 2016: k = 5) */
#define LM_RADIUS 4   /* random-search radius below the coarsest level, px */
#define LM_KEEP 0.25f /* matches are used only if this share of seeds survives both ways */

int sinew_flow_params_preset(sinew_flow_params *p, const char *name)
{
    if (!p || !name)
        return SINEW_EINVAL;
    /* the balanced preset; the others change what differs */
    sinew_flow_params d = {
        .method = SINEW_FLOW_VARIATIONAL,
        .levels = 0,
        .finest_level = 0,
        .dis_finest = 1,
        .dis_patch = 8,
        .dis_stride = 3,
        .dis_iters = 12,
        .warps = 1,
        .warps_fine = 0,
        .fine_levels = 2,
        .outer = 5,
        .inner = 10,
        .alpha = 0.02f,
        .gamma = 0.1f,
        .delta = 1.0f,
        .edge = 5.0f,
        .eps = 0.001f,
        .omega = 1.6f,
        .median = 1,
        .wmedian = 7,
        .wmedian_levels = SINEW__MAX_LEVELS,
        .wmedian_band = 0.5f,
        .fuse_levels = 0,
        .large_motion = 0,
        .color = 1,
        .hs_iters = 0,
        .work_mib = 32,
    };
    if (!strcmp(name, "fast")) {
        d.dis_finest = 2;
        d.dis_stride = 6;
        d.dis_iters = 8;
        d.finest_level = 1;
        d.outer = 3;
        d.inner = 5;
        d.median = 0;
        d.wmedian = 5;
        d.wmedian_band = 0.6f;
    } else if (!strcmp(name, "accurate")) {
        d.dis_finest = 0;
        d.dis_iters = 16;
        d.warps = 2;
        d.warps_fine = 4;
        d.inner = 15;
        d.median = 2;
        d.fuse_levels = 2;
        d.large_motion = 1;
    } else if (!strcmp(name, "baseline")) {
        d.method = SINEW_FLOW_HORN_SCHUNCK;
        d.dis_finest = -1;
        d.warps = 2;
        d.hs_iters = 60;
        d.median = 0;
        d.wmedian = 0;
    } else if (strcmp(name, "balanced")) {
        return SINEW_EINVAL;
    }
    *p = d;
    return SINEW_OK;
}

#define RANGE_I(f, lo, hi)                                                                         \
    if (p->f < (lo) || p->f > (hi))                                                                \
        return sinew__fail(ctx, SINEW_EINVAL, "flow parameter " #f " = %d outside [%d, %d]", p->f, \
                           (int)(lo), (int)(hi));
#define RANGE_F(f, lo, hi)                                                                         \
    if (!(p->f >= (lo) && p->f <= (hi)))                                                           \
        return sinew__fail(ctx, SINEW_EINVAL, "flow parameter " #f " = %g outside [%g, %g]",       \
                           (double)p->f, (double)(lo), (double)(hi));

int sinew_flow_params_check(sinew_ctx *ctx, const sinew_flow_params *p)
{
    if (!p)
        return sinew__fail(ctx, SINEW_EINVAL, "flow parameters: NULL");
    if (p->method != SINEW_FLOW_VARIATIONAL && p->method != SINEW_FLOW_HORN_SCHUNCK)
        return sinew__fail(ctx, SINEW_EINVAL, "flow parameter method = %d unknown", (int)p->method);
    RANGE_I(levels, 0, SINEW__MAX_LEVELS);
    RANGE_I(finest_level, 0, SINEW__MAX_LEVELS - 1);
    RANGE_I(dis_finest, -1, SINEW__MAX_LEVELS - 1);
    RANGE_I(dis_patch, 4, 32);
    RANGE_I(dis_stride, 1, p->dis_patch);
    RANGE_I(dis_iters, 1, 100);
    RANGE_I(warps, 0, 50);
    RANGE_I(warps_fine, 0, 50);
    RANGE_I(fine_levels, 1, SINEW__MAX_LEVELS);
    RANGE_I(outer, 1, 50);
    RANGE_I(inner, 1, 200);
    RANGE_F(alpha, 1e-9, 1e6);
    RANGE_F(gamma, 0, 1e6);
    RANGE_F(delta, 0, 1e6);
    RANGE_F(edge, 0, 1e4);
    RANGE_F(eps, 1e-9, 1e3);
    RANGE_F(omega, 0.01, 1.99);
    RANGE_I(median, 0, 2);
    RANGE_I(wmedian, 0, 10);
    RANGE_I(wmedian_levels, 1, SINEW__MAX_LEVELS);
    RANGE_F(wmedian_band, 1e-6, 1e6);
    RANGE_I(fuse_levels, 0, SINEW__MAX_LEVELS);
    RANGE_I(large_motion, 0, 1);
    RANGE_I(color, 0, 1);
    RANGE_I(hs_iters, 0, 10000);
    RANGE_I(work_mib, 1, 65536);
    return SINEW_OK;
}

int sinew_estimator_new(sinew_ctx *ctx, sinew_estimator **out, const sinew_flow_params *p)
{
    if (!ctx || !out)
        return SINEW_EINVAL;
    *out = NULL;
    int st = sinew_flow_params_check(ctx, p);
    if (st)
        return st;
    sinew_estimator *e = sinew__calloc(ctx, 1, sizeof *e);
    if (!e)
        return SINEW_ENOMEM;
    e->ctx = ctx;
    e->p = *p;
    *out = e;
    return SINEW_OK;
}

static void release_buffers(sinew_estimator *e)
{
    sinew_ctx *ctx = e->ctx;
    for (int i = 0; i < 2; i++) {
        sinew__free(ctx, e->pyr_mem[i]);
        e->pyr_mem[i] = NULL;
    }
    float **planes[] = {&e->u, &e->v, &e->g, &e->work, &e->pu, &e->pv};
    for (size_t i = 0; i < sizeof planes / sizeof planes[0]; i++) {
        sinew__free(ctx, *planes[i]);
        *planes[i] = NULL;
    }
    for (int d = 0; d < 2; d++) {
        for (int k = 0; k < 3; k++) {
            sinew__free(ctx, e->lm_f[d][k]);
            e->lm_f[d][k] = NULL;
        }
        sinew__free(ctx, e->lm_ok[d]);
        e->lm_ok[d] = NULL;
    }
    e->lm_level = 0;
    sinew__free(ctx, e->mask);
    e->mask = NULL;
    e->w = e->h = e->channels = e->levels = 0;
    e->last1_valid = 0;
}

void sinew_estimator_free(sinew_estimator *est)
{
    if (!est)
        return;
    release_buffers(est);
    sinew__free(est->ctx, est->last1);
    sinew__free(est->ctx, est);
}

/* Number of pyramid levels for a frame size under the parameters. */
static int pick_levels(const sinew_flow_params *p, int w, int h)
{
    int minside = 2 * p->dis_patch > 16 ? 2 * p->dis_patch : 16;
    int levels = 1;
    while (levels < SINEW__MAX_LEVELS) {
        int lw, lh;
        sinew__level_size(w, h, levels, &lw, &lh);
        if (lw < minside || lh < minside)
            break;
        levels++;
    }
    if (p->levels > 0 && p->levels < levels)
        levels = p->levels;
    return levels;
}

static void *alloc_floats(sinew_ctx *ctx, size_t count, int *fail)
{
    size_t bytes;
    if (*fail || sinew__mul_size(count, sizeof(float), &bytes)) {
        *fail = 1;
        return NULL;
    }
    void *q = sinew__alloc(ctx, bytes ? bytes : 64);
    if (!q)
        *fail = 1;
    return q;
}

/* Finest pyramid level the estimator computes (coarser results are upsampled). */
static int computed_finest(const sinew_flow_params *p, int levels)
{
    return p->finest_level < levels - 1 ? p->finest_level : levels - 1;
}

/* Working level of the large-displacement stage for a frame size, 0 = none. */
static int pick_lm_level(const sinew_flow_params *p, int w, int h, int levels)
{
    if (!p->large_motion || p->method != SINEW_FLOW_VARIATIONAL)
        return 0;
    int finest = computed_finest(p, levels);
    for (int s = finest > 1 ? finest : 1; s < levels; s++) {
        int lw, lh;
        sinew__level_size(w, h, s, &lw, &lh);
        if (lw < LM_MIN || lh < LM_MIN)
            return 0;
        if (lw <= LM_WIDTH)
            return s;
    }
    return 0;
}

static int ensure_buffers(sinew_estimator *e, int w, int h, int channels)
{
    int levels = pick_levels(&e->p, w, h);
    if (e->w == w && e->h == h && e->channels == channels && e->levels == levels)
        return SINEW_OK;
    release_buffers(e);
    sinew_ctx *ctx = e->ctx;
    size_t n = (size_t)w * (size_t)h;
    int fail = 0;
    size_t pf = sinew__pyramid_floats(w, h, channels, levels);
    for (int i = 0; i < 2; i++)
        e->pyr_mem[i] = alloc_floats(ctx, pf, &fail);
    e->u = alloc_floats(ctx, n, &fail);
    e->v = alloc_floats(ctx, n, &fail);
    e->gp = n;
    int lm = pick_lm_level(&e->p, w, h, levels), lw = 0, lh = 0;
    if (lm > 0) {
        /* lm_level keeps three planes of the level in the full-size u (and v) */
        sinew__level_size(w, h, lm, &lw, &lh);
        if (3 * (((size_t)lw * (size_t)lh + 15u) & ~(size_t)15u) > n)
            lm = 0;
    }
    if (lm > 0) {
        /* the stage keeps both frames' descriptors in g (level lm: >= level 1, so at most
         * a quarter of the pixels, rounded up per side) */
        sinew__level_size(w, h, lm, &lw, &lh);
        size_t need = (size_t)lw * (size_t)lh * SINEW__DESC_BYTES / (2 * sizeof(float));
        if (need > e->gp)
            e->gp = need;
        sinew__pm_grid(lw, lh, LM_STEP, &e->lm_nx, &e->lm_ny);
        /* ... and, in the interpolation, two planes of the level plus the affine fits'
         * scratch (one worker at least) in g's last two planes */
        size_t lp = ((size_t)lw * (size_t)lh + 15u) & ~(size_t)15u;
        need = lp + (lp + sinew__interp_scratch(e->lm_nx * e->lm_ny, 1) + 1) / 2;
        if (need > e->gp)
            e->gp = need;
        size_t ns = (size_t)e->lm_nx * (size_t)e->lm_ny;
        for (int d = 0; d < 2; d++) {
            for (int k = 0; k < 3; k++)
                e->lm_f[d][k] = alloc_floats(ctx, ns, &fail); /* ints, same size */
            e->lm_ok[d] = fail ? NULL : sinew__alloc(ctx, ns);
            fail |= !e->lm_ok[d];
        }
    }
    e->gp = (e->gp + 15u) & ~(size_t)15u;
    e->g = alloc_floats(ctx, 4 * e->gp, &fail);
    /* solver work for the finest computed level (coarser levels need less) */
    int fw, fh;
    sinew__level_size(w, h, computed_finest(&e->p, levels), &fw, &fh);
    size_t fn = (size_t)fw * (size_t)fh;
    size_t budget = (size_t)e->p.work_mib << 18; /* floats */
    size_t wf = sinew__var_work(channels, fw, fh, budget);
    if (e->p.method == SINEW_FLOW_HORN_SCHUNCK)
        wf = (size_t)sinew__hs_planes() * fn;
    if (lm > 0 && wf < sinew__describe_rows_floats(lw))
        wf = sinew__describe_rows_floats(lw);
    e->work_floats = wf;
    e->work = alloc_floats(ctx, wf, &fail);
    /* patch grid at the finest level that may run patch search (level 0 worst case) */
    sinew__dis_params dp = {e->p.dis_patch, e->p.dis_stride, e->p.dis_iters, 0.f};
    int nx, ny;
    sinew__dis_grid(w, h, &dp, &nx, &ny);
    e->pu = alloc_floats(ctx, (size_t)nx * (size_t)ny, &fail);
    e->pv = alloc_floats(ctx, (size_t)nx * (size_t)ny, &fail);
    if (!fail) {
        e->mask = sinew__alloc(ctx, n);
        fail = !e->mask;
    }
    if (fail) {
        release_buffers(e);
        if (!*sinew_ctx_message(ctx))
            sinew__fail(ctx, SINEW_ENOMEM, "flow estimator: out of memory for %dx%d", w, h);
        return SINEW_ENOMEM;
    }
    for (int i = 0; i < 2; i++)
        sinew__pyramid_layout(&e->pyr[i], e->pyr_mem[i], w, h, channels, levels);
    e->w = w;
    e->h = h;
    e->channels = channels;
    e->levels = levels;
    e->lm_level = lm;
    e->cur0 = 0;
    return SINEW_OK;
}

static int check_frame(sinew_ctx *ctx, const sinew_image *f, const char *what)
{
    if (!f || !f->data)
        return sinew__fail(ctx, SINEW_EINVAL, "%s: no image", what);
    if ((f->type != SINEW_U8 && f->type != SINEW_U16) || f->channels < 1 || f->channels > 4)
        return sinew__fail(ctx, SINEW_EINVAL, "%s: frames must be 8/16-bit with 1..4 channels",
                           what);
    if (f->width < 1 || f->height < 1)
        return sinew__fail(ctx, SINEW_EINVAL, "%s: empty image", what);
    return SINEW_OK;
}

static int check_flow(sinew_ctx *ctx, const sinew_image *f, const sinew_image *frame,
                      const char *what)
{
    if (!f->data || f->type != SINEW_F32 || f->channels != 2)
        return sinew__fail(ctx, SINEW_EINVAL, "%s: flow must be a 2-channel float image", what);
    if (f->width != frame->width || f->height != frame->height)
        return sinew__fail(ctx, SINEW_ESIZE, "%s: flow is %dx%d, frames are %dx%d", what, f->width,
                           f->height, frame->width, frame->height);
    return SINEW_OK;
}

/* Byte-exact comparison of a frame with the stored copy of the previous frame 1. */
static int same_as_last1(const sinew_estimator *e, const sinew_image *f)
{
    if (!e->last1_valid || f->type != e->last1_type || f->channels != e->last1_fc)
        return 0;
    size_t row = (size_t)f->width * (size_t)f->channels * sinew_type_size(f->type);
    for (int y = 0; y < f->height; y++)
        if (memcmp(sinew_image_row(f, y), e->last1 + (size_t)y * row, row))
            return 0;
    return 1;
}

static int remember_last1(sinew_estimator *e, const sinew_image *f)
{
    size_t row = (size_t)f->width * (size_t)f->channels * sinew_type_size(f->type);
    size_t len = row * (size_t)f->height;
    e->last1_valid = 0;
    if (len > e->last1_cap) {
        sinew__free(e->ctx, e->last1);
        e->last1 = sinew__alloc(e->ctx, len);
        e->last1_cap = e->last1 ? len : 0;
        if (!e->last1)
            return SINEW_ENOMEM;
    }
    for (int y = 0; y < f->height; y++)
        memcpy(e->last1 + (size_t)y * row, sinew_image_row(f, y), row);
    e->last1_len = len;
    e->last1_type = f->type;
    e->last1_fc = f->channels;
    e->last1_valid = 1;
    return SINEW_OK;
}

/* Gradient planes of both frames' level-s luminance into g (planes 0, 1: frame a; 2, 3:
 * frame b) and the level views that carry them. */
static void level_gradients(const sinew_estimator *e, sinew__level *l0, sinew__level *l1, int nt)
{
    float *g = e->g;
    size_t gp = e->gp;
    l0->gx = g;
    l0->gy = g + gp;
    l1->gx = g + 2 * gp;
    l1->gy = g + 3 * gp;
    sinew__gradient(l0->gx, l0->gy, l0->lum, l0->w, l0->h, nt);
    sinew__gradient(l1->gx, l1->gy, l1->lum, l1->w, l1->h, nt);
}

/* (du, dv) = (su, sv), n floats each */
static void copy_flow(float *du, float *dv, const float *su, const float *sv, size_t n)
{
    memcpy(du, su, n * sizeof(float));
    memcpy(dv, sv, n * sizeof(float));
}

_Static_assert(sizeof(int) == sizeof(float), "int planes share float storage");

/* Large-displacement stage, matching part: descriptors of both frames at the working
 * level (in g), seed matches both ways, forward-backward flags. Returns 1 when at least
 * LM_KEEP of the seeds survive the checks in both directions, 0 when the match field is
 * not trusted (blurred, foggy or mostly occluded frames) and the stage is skipped. */
static int lm_match(sinew_estimator *e, const sinew__pyramid *a, const sinew__pyramid *b)
{
    int nt = sinew_ctx_threads(e->ctx), s0 = e->lm_level;
    int w0 = a->lv[s0].w, h0 = a->lv[s0].h;
    /* descriptor pyramid: from the coarsest level of at least LM_MIN px a side, at most
     * LM_DEPTH levels above the working level, down to the working level */
    int top = s0;
    while (top + 1 < e->levels && top + 1 < s0 + LM_DEPTH && a->lv[top + 1].w >= LM_MIN &&
           a->lv[top + 1].h >= LM_MIN)
        top++;
    sinew__pm_params pp = {LM_STEP, LM_ITERS, LM_SAMPLES, LM_RADIUS};
    int **f = e->lm_f[0], **r = e->lm_f[1];
    for (int s = top; s >= s0; s--) {
        const sinew__level *la = &a->lv[s], *lb = &b->lv[s];
        int w = la->w, h = la->h, init = s < top;
        unsigned char *d0 = (unsigned char *)e->g;
        unsigned char *d1 = d0 + (size_t)w * (size_t)h * SINEW__DESC_BYTES;
        sinew__describe(d0, la->lum, w, h, e->work, e->work_floats, nt);
        sinew__describe(d1, lb->lum, w, h, e->work, e->work_floats, nt);
        sinew__pm_level(f[0], f[1], f[2], d0, d1, w, h, w0, h0, s - s0, init, &pp, 0x5157u, nt);
        sinew__pm_level(r[0], r[1], r[2], d1, d0, w, h, w0, h0, s - s0, init, &pp, 0xB157u, nt);
    }
    sinew__pm_check(e->lm_ok[0], f[0], f[1], r[0], r[1], w0, h0, LM_STEP);
    sinew__pm_check(e->lm_ok[1], r[0], r[1], f[0], f[1], w0, h0, LM_STEP);
    /* the cost planes are free now: scratch for the support test */
    int k0 = sinew__pm_support(e->lm_ok[0], (unsigned char *)f[2], f[0], f[1], e->lm_nx, e->lm_ny,
                               LM_STEP, LM_SUPPORT);
    int k1 = sinew__pm_support(e->lm_ok[1], (unsigned char *)r[2], r[0], r[1], e->lm_nx, e->lm_ny,
                               LM_STEP, LM_SUPPORT);
    float need = LM_KEEP * (float)e->lm_nx * (float)e->lm_ny;
    return (float)k0 >= need && (float)k1 >= need;
}

/* Floats of one level plane in g, rounded up to 16. */
static size_t lm_plane(const sinew__level *l)
{
    return ((size_t)l->w * (size_t)l->h + 15u) & ~(size_t)15u;
}

/* The interpolation's label plane: in g's third plane after the distances, used as ints
 * (allocated storage, written as int before it is read as int). */
static int *lm_labels(sinew_estimator *e, const sinew__level *l0)
{
    return (int *)(void *)(e->g + 2 * e->gp + lm_plane(l0));
}

/* Interpolate direction dir's kept seeds at level l0 into g (planes 0, 1: flow; 2:
 * geodesic distance, then labels, then the fits' scratch to the end of g). Returns the
 * number of seeds used. */
static int lm_interpolate(sinew_estimator *e, const sinew__level *l0, int dir)
{
    sinew__seeds sd = {e->lm_nx,        e->lm_ny,        LM_STEP,
                       e->lm_f[dir][0], e->lm_f[dir][1], e->lm_ok[dir]};
    float *g = e->g, *tmp = g + 2 * e->gp + 2 * lm_plane(l0);
    return sinew__interpolate(g, g + e->gp, g + 2 * e->gp, lm_labels(e, l0), tmp,
                              2 * e->gp - 2 * lm_plane(l0), l0->lum, l0->w, l0->h, &sd,
                              sinew_ctx_threads(e->ctx));
}

/* One level of the coarse-to-fine schedule on (u, v), already at this level's size:
 * patch search, then the warping steps with their filters. */
static void refine_level(sinew_estimator *e, float *u, float *v, sinew__level *l0, sinew__level *l1,
                         int s, int warps)
{
    const sinew_flow_params *p = &e->p;
    int nt = sinew_ctx_threads(e->ctx);
    int finest = computed_finest(p, e->levels);
    float *gu = e->g, *gv = e->g + e->gp;
    size_t n = (size_t)l0->w * (size_t)l0->h;
    sinew__dis_params dp = {p->dis_patch, p->dis_stride, p->dis_iters, 0.f};
    sinew__var_params vp = {p->alpha, p->gamma, p->delta, p->edge,
                            p->eps,   p->omega, p->outer, p->inner};
    /* weighted-median constants: flow/wmedian.c */
    sinew__wmed_params wp = {p->wmedian, 7.f, 10.f, 0.3f, 10.f, p->wmedian_band};
    int var = p->method == SINEW_FLOW_VARIATIONAL;
    int grads = 0; /* g holds this level's gradients */
    if (p->dis_finest >= 0 && s >= p->dis_finest && l0->w >= p->dis_patch &&
        l0->h >= p->dis_patch) {
        level_gradients(e, l0, l1, nt);
        grads = 1;
        /* a patch may move up to one patch size from its start, half of that at the
         * two finest patch levels, where the coarse flow is already close and
         * repeated texture (facades, stripes) offers wrong minima one period away */
        dp.max_move = (float)p->dis_patch * (s <= p->dis_finest + 1 ? 0.5f : 1.0f);
        sinew__dis_level(u, v, l0, l1, &dp, e->pu, e->pv, e->work, e->work_floats, nt);
    }
    int nw = p->warps_fine > 0 && s < finest + p->fine_levels ? p->warps_fine : p->warps;
    if (warps > 0 && warps < nw)
        nw = warps;
    for (int k = 0; k < nw; k++) {
        if (!var) {
            sinew__hs_level(u, v, l0, l1, p->alpha, p->hs_iters, e->work, e->mask, nt);
        } else {
            if (!grads)
                level_gradients(e, l0, l1, nt);
            grads = 1;
            sinew__var_level(u, v, l0, l1, e->channels, &vp, e->work, e->work_floats, e->mask, nt);
        }
        /* filters write the new flow to g (the gradients there are recomputed when
         * needed again), then it is copied back */
        int wm = p->wmedian > 0 && s < finest + p->wmedian_levels;
        if (p->median > 0) {
            sinew__median(gu, u, l0->w, l0->h, p->median, nt);
            sinew__median(gv, v, l0->w, l0->h, p->median, nt);
        } else if (wm) {
            copy_flow(gu, gv, u, v, n);
        }
        /* boundary pixels: weighted median of the flow before the plain median */
        if (wm)
            sinew__wmedian(gu, gv, u, v, l0, l1, e->channels, &wp, e->work, e->work_floats, nt);
        if (p->median > 0 || wm) {
            copy_flow(u, v, gu, gv, n);
            grads = 0;
        }
        /* once per level, so the later warps refine what it chose */
        if (k == 0 && s < finest + p->fuse_levels) {
            sinew__fuse(gu, gv, u, v, l0, l1, e->channels, p->wmedian_band, nt);
            copy_flow(u, v, gu, gv, n);
            grads = 0;
        }
    }
}

/* The working level of the large-displacement stage: per region of the interpolation
 * (the pixels nearest to one seed) the start of the refinement is either the upsampled
 * coarse-to-fine flow (u, v) or the interpolated seed matches, whichever maps the
 * region's pixels to frame 1 descriptors that are closer (L1), the interpolated one only
 * by LM_EVIDENCE per pixel: both starts are judged before any refinement at this level
 * (a refined field always explains the colours it was fitted to, so the colour cost
 * after refinement favours it whether or not it is right), then the level is refined
 * once. The unused upper parts of the full-size planes u, v hold the interpolated flow,
 * the labels and the per-pixel cost differences (the level has at most a quarter of the
 * pixels; ensure_buffers checks 3 fit); both frames' descriptors fill g. */
static void lm_level(sinew_estimator *e, float *u, float *v, sinew__level *l0, sinew__level *l1,
                     int s, int dir)
{
    size_t n = (size_t)l0->w * (size_t)l0->h, off = (n + 15u) & ~(size_t)15u;
    float *iu = u + off, *iv = v + off, *cost = v + 2 * off;
    int *lab = (int *)(void *)(u + 2 * off);
    int nt = sinew_ctx_threads(e->ctx);
    if (lm_interpolate(e, l0, dir)) {
        copy_flow(iu, iv, e->g, e->g + e->gp, n);
        memcpy(lab, lm_labels(e, l0), n * sizeof(int));
        unsigned char *d0 = (unsigned char *)e->g, *d1 = d0 + n * SINEW__DESC_BYTES;
        sinew__describe(d0, l0->lum, l0->w, l0->h, e->work, e->work_floats, nt);
        sinew__describe(d1, l1->lum, l0->w, l0->h, e->work, e->work_floats, nt);
        sinew__desc_margin(cost, d0, d1, iu, iv, u, v, l0->w, l0->h, LM_EVIDENCE, nt);
        /* the seed cost array (ints, free after lm_match) holds the per-region float sums */
        sinew__choose_regions(u, v, iu, iv, lab, e->lm_nx * e->lm_ny, cost,
                              (float *)(void *)e->lm_f[0][2], l0->w, l0->h, nt);
    }
    refine_level(e, u, v, l0, l1, s, 0);
}

/* Coarse-to-fine estimation from pyramid a to pyramid b into the interleaved image out;
 * dir: 0 forward, 1 backward (which seed matches the large-displacement stage uses). */
static void estimate_dir(sinew_estimator *e, sinew_image *out, const sinew__pyramid *a,
                         const sinew__pyramid *b, int dir)
{
    const sinew_flow_params *p = &e->p;
    int nt = sinew_ctx_threads(e->ctx);
    int top = e->levels - 1;
    int finest = computed_finest(p, e->levels);
    float *u = e->u, *v = e->v, *gu = e->g, *gv = e->g + e->gp;
    {
        size_t n = (size_t)a->lv[top].w * (size_t)a->lv[top].h;
        memset(u, 0, n * sizeof(float));
        memset(v, 0, n * sizeof(float));
    }
    for (int s = top; s >= finest; s--) {
        sinew__level l0 = a->lv[s], l1 = b->lv[s];
        if (s < top) {
            /* the coarse flow moves to g, the upsampled one fills (u, v) */
            const sinew__level *up = &a->lv[s + 1];
            copy_flow(gu, gv, u, v, (size_t)up->w * (size_t)up->h);
            sinew__flow_up(u, v, l0.w, l0.h, gu, gv, up->w, up->h, nt);
        }
        if (s == e->lm_level && e->lm_on)
            lm_level(e, u, v, &l0, &l1, s, dir);
        else
            refine_level(e, u, v, &l0, &l1, s, 0);
    }
    if (finest > 0) {
        /* upsample straight into the output: the full-size planes stay untouched (and
         * out of resident memory) when no level-0 flow is computed */
        const sinew__level *f = &a->lv[finest];
        sinew__flow_resize(out, u, v, f->w, f->h, nt);
    } else {
        int w = e->w;
        SINEW_PARALLEL_FOR(nt)
        for (int y = 0; y < e->h; y++) {
            float *row = sinew_image_row_f32(out, y);
            const float *ur = u + (size_t)y * (size_t)w, *vr = v + (size_t)y * (size_t)w;
            for (int x = 0; x < w; x++) {
                row[2 * x] = ur[x];
                row[2 * x + 1] = vr[x];
            }
        }
    }
}

int sinew_estimator_run(sinew_estimator *est, sinew_image *fwd, sinew_image *bwd,
                        const sinew_image *frame0, const sinew_image *frame1)
{
    if (!est)
        return SINEW_EINVAL;
    sinew_ctx *ctx = est->ctx;
    int st;
    if ((st = check_frame(ctx, frame0, "frame 0")) || (st = check_frame(ctx, frame1, "frame 1")))
        return st;
    if (frame0->width != frame1->width || frame0->height != frame1->height)
        return sinew__fail(ctx, SINEW_ESIZE, "frames differ in size: %dx%d and %dx%d",
                           frame0->width, frame0->height, frame1->width, frame1->height);
    if (frame0->type != frame1->type || frame0->channels != frame1->channels)
        return sinew__fail(ctx, SINEW_EINVAL, "frames differ in type or channel count");
    if (!fwd)
        return sinew__fail(ctx, SINEW_EINVAL, "forward flow: NULL");
    if ((st = check_flow(ctx, fwd, frame0, "forward flow")))
        return st;
    if (bwd && (st = check_flow(ctx, bwd, frame0, "backward flow")))
        return st;
    int channels = est->p.color && frame0->channels >= 3 ? 3 : 1;
    int reuse = est->w == frame0->width && est->h == frame0->height && est->channels == channels &&
                same_as_last1(est, frame0);
    if ((st = ensure_buffers(est, frame0->width, frame0->height, channels)))
        return st;
    int nt = sinew_ctx_threads(ctx);
    if (reuse && est->last1_valid) {
        est->cur0 = 1 - est->cur0;
    } else {
        sinew__pyramid_build(&est->pyr[est->cur0], frame0, est->g, nt);
    }
    sinew__pyramid_build(&est->pyr[1 - est->cur0], frame1, est->g, nt);
    if ((st = remember_last1(est, frame1)))
        return st;
    const sinew__pyramid *p0 = &est->pyr[est->cur0], *p1 = &est->pyr[1 - est->cur0];
    est->lm_on = est->lm_level > 0 && lm_match(est, p0, p1);
    estimate_dir(est, fwd, p0, p1, 0);
    if (bwd)
        estimate_dir(est, bwd, p1, p0, 1);
    return SINEW_OK;
}
