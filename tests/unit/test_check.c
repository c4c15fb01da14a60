/* SPDX-License-Identifier: MIT */
/* Unit tests for flow/check.c: each mask criterion on hand-computed cases (the
 * forward-backward and motion-boundary inequalities of Sundaram, Brox, Keutzer, ECCV
 * 2010), out-of-frame rule, robust photometric fit, saturation, ignore polarity,
 * exact distance transform against brute force, confidence range, NaN handling,
 * determinism across thread counts, size errors and allocation failures. */
#include "tests/support/testutil.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* ---- helpers ---- */

static sinew_ctx *ctx_new(void)
{
    sinew_ctx *ctx = sinew_ctx_new();
    assert_non_null(ctx);
    return ctx;
}

static void flow_fill(sinew_ctx *ctx, sinew_image *f, int w, int h, float u, float v)
{
    assert_int_equal(sinew_image_alloc(ctx, f, w, h, 2, SINEW_F32), SINEW_OK);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            sinew_image_row_f32(f, y)[2 * x] = u;
            sinew_image_row_f32(f, y)[2 * x + 1] = v;
        }
}

/* Free up to four images (NULL entries are skipped). */
static void free_imgs(sinew_image *a, sinew_image *b, sinew_image *c, sinew_image *d)
{
    sinew_image *all[4] = {a, b, c, d};
    for (int i = 0; i < 4; i++)
        if (all[i])
            sinew_image_free(all[i]);
}

static float *fl(const sinew_image *f, int x, int y)
{
    return sinew_image_row_f32(f, y) + (size_t)f->channels * x;
}

static uint8_t mk(const sinew_image *m, int x, int y)
{
    return sinew_image_row_u8(m, y)[x];
}

typedef struct outs {
    sinew_image fb, mask, conf;
    sinew_check_output o;
} outs;

static void outs_alloc(sinew_ctx *ctx, outs *r, int w, int h)
{
    assert_int_equal(sinew_image_alloc(ctx, &r->fb, w, h, 1, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &r->mask, w, h, 1, SINEW_U8), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &r->conf, w, h, 1, SINEW_F32), SINEW_OK);
    memset(&r->o, 0, sizeof r->o);
    r->o.fb_error = &r->fb;
    r->o.mask = &r->mask;
    r->o.confidence = &r->conf;
}

static void outs_free(outs *r)
{
    sinew_image_free(&r->fb);
    sinew_image_free(&r->mask);
    sinew_image_free(&r->conf);
}

static int run(sinew_ctx *ctx, outs *r, const sinew_image *fwd, const sinew_image *bwd,
               const sinew_image *f0, const sinew_image *f1, const sinew_image *ign,
               const sinew_check_params *p)
{
    sinew_check_input in = {fwd, bwd, f0, f1, ign, NULL};
    return sinew_check_run(ctx, &r->o, &in, p);
}

/* Deterministic pseudo-random textured 8-bit gray frame (LCG, values lo..lo+span-1). */
static void texture_u8(sinew_ctx *ctx, sinew_image *img, int w, int h, unsigned seed, int lo,
                       int span)
{
    assert_int_equal(sinew_image_alloc(ctx, img, w, h, 1, SINEW_U8), SINEW_OK);
    unsigned s = seed;
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            s = s * 1664525u + 1013904223u;
            sinew_image_row_u8(img, y)[x] = (uint8_t)(lo + (int)((s >> 16) % (unsigned)span));
        }
}

/* The confidence by hand from the cues f (order of flow/check.h): the logistic
 * calibration 1 / (1 + exp(-(bias - sum k_i f_i))). */
static double conf_of(const sinew_check_params *p, const double f[SINEW_CHECK_NFEATURES])
{
    const double k[SINEW_CHECK_NFEATURES] = {
        p->conf_k_fb,        p->conf_k_photo,    p->conf_k_texture,
        p->conf_k_boundary,  p->conf_k_motion,   p->conf_k_outside,
        p->conf_k_saturated, p->conf_k_fb_local, p->conf_k_fb_share};
    double z = p->conf_bias;
    for (int i = 0; i < SINEW_CHECK_NFEATURES; i++)
        z -= k[i] * f[i];
    return 1 / (1 + exp(-z));
}

/* Cue fb_local by hand: the mean of v (w x h, row-major; NaN = left out) over the 7x7
 * window around (x, y) clipped at the border, 0 if nothing is left. */
static double local_mean(const double *v, int w, int h, int x, int y)
{
    double sum = 0, n = 0;
    for (int j = y - 3; j <= y + 3; j++)
        for (int i = x - 3; i <= x + 3; i++)
            if (i >= 0 && i < w && j >= 0 && j < h && !isnan(v[j * w + i])) {
                sum += v[j * w + i];
                n += 1;
            }
    return n > 0 ? sum / n : 0;
}

/* The value a pixel whose target leaves the frame takes in fb_local: the fb cue of an
 * error as long as the image diagonal, log(1 + D / sqrt(conf_fb_beta)). */
static double local_top(const sinew_check_params *p, int w, int h)
{
    return log1p(sqrt((double)w * w + (double)h * h) / sqrt(p->conf_fb_beta));
}

static void assert_conf_range(const sinew_image *c)
{
    for (int y = 0; y < c->height; y++)
        for (int x = 0; x < c->width; x++) {
            float v = *fl(c, x, y);
            assert_false(isnan(v));
            assert_true(v >= 0.0f && v <= 1.0f);
        }
}

/* ---- tests ---- */

static void test_check_defaults_are_published_constants(void **state)
{
    (void)state;
    sinew_check_params p;
    sinew_check_params_default(&p);
    /* Sundaram, Brox, Keutzer ECCV 2010 constants (the boundary floor is ours:
     * fb_beta / 4, docs/methods.md). */
    assert_true(p.fb_alpha == 0.01 && p.fb_beta == 0.5);
    assert_true(p.boundary_alpha == 0.01 && p.boundary_beta == p.fb_beta / 4);
    assert_true(p.occ_range == 0.5 && p.occ_crowd == 1.5 && p.occ_depth_tolerance == 0.05);
    sinew_check_param list[SINEW_CHECK_NPARAMS];
    assert_int_equal(sinew_check_params_list(&p, list, SINEW_CHECK_NPARAMS), SINEW_CHECK_NPARAMS);
    assert_string_equal(list[1].name, "fb_beta");
    assert_true(list[1].value == 0.5);
    assert_int_equal(sinew_check_params_list(&p, NULL, 0), SINEW_CHECK_NPARAMS);
    assert_string_equal(sinew_check_bit_name(0), "occluded");
    assert_string_equal(sinew_check_bit_name(7), "fb_mismatch");
    assert_null(sinew_check_bit_name(SINEW_MASK_NBITS));
    assert_int_equal(SINEW_MASK_OCCLUDED, 1);
    assert_int_equal(SINEW_MASK_MISMATCH, 128);
    assert_int_equal(SINEW_MASK_OUTSIDE, 2);
    assert_int_equal(SINEW_MASK_BOUNDARY, 4);
    assert_int_equal(SINEW_MASK_PHOTO, 8);
    assert_int_equal(SINEW_MASK_IGNORE, 16);
    assert_int_equal(SINEW_MASK_SATURATED, 32);
}

/* Constant flows that cancel: error 0, everything kept except pixels whose target
 * leaves the frame (x + 1 > W - 1, or y + 0.5 > H - 1). */
static void test_check_constant_consistent(void **state)
{
    (void)state;
    sinew_ctx *ctx = ctx_new();
    sinew_image f, b;
    flow_fill(ctx, &f, 8, 6, 1.0f, 0.5f);
    flow_fill(ctx, &b, 8, 6, -1.0f, -0.5f);
    outs r;
    outs_alloc(ctx, &r, 8, 6);
    assert_int_equal(run(ctx, &r, &f, &b, NULL, NULL, NULL, NULL), SINEW_OK);
    sinew_check_params p;
    sinew_check_params_default(&p);
    /* cues: fb log(1 + 0) = 0, motion log(1 + |w|), outside 0 or 1, fb_local the share
     * of outside pixels in the window times the top value, the rest 0 */
    const double m = log1p(sqrt(1.25));
    double v[48];
    for (int k = 0; k < 48; k++)
        v[k] = (k % 8 == 7 || k / 8 == 5) ? local_top(&p, 8, 6) : 0;
    for (int y = 0; y < 6; y++)
        for (int x = 0; x < 8; x++) {
            double loc = local_mean(v, 8, 6, x, y);
            const double fin[SINEW_CHECK_NFEATURES] = {0, 0, 0, 0, m, 0, 0, loc, 0};
            const double fout[SINEW_CHECK_NFEATURES] = {0, 0, 0, 0, m, 1, 0, loc, 0};
            int out = x == 7 || y == 5;
            assert_int_equal(mk(&r.mask, x, y), out ? SINEW_MASK_OUTSIDE : 0);
            if (out) {
                assert_true(isnan(*fl(&r.fb, x, y)));
                assert_float_equal(*fl(&r.conf, x, y), conf_of(&p, fout), 1e-6);
            } else {
                assert_true(*fl(&r.fb, x, y) == 0.0f);
                assert_float_equal(*fl(&r.conf, x, y), conf_of(&p, fin), 1e-6);
            }
        }
    assert_int_equal(r.o.stats.pixels, 48);
    assert_int_equal(r.o.stats.kept, 35);
    assert_int_equal(r.o.stats.reason[1], 13);
    outs_free(&r);
    free_imgs(&f, &b, NULL, NULL);
    sinew_ctx_free(ctx);
}

/* Forward u = 0.5, backward u(x) = -0.5 x: bilinear sampling of a linear field is exact,
 * ŵ = -0.5 (x + 0.5), e = |0.25 - 0.5 x|.  Sundaram test by hand:
 *   x = 1: e² = 0.0625 <= 0.01 (0.25 + 0.5625) + 0.5      -> consistent
 *   x = 2: e² = 0.5625 >  0.01 (0.25 + 1.5625) + 0.5 = 0.518125 -> inconsistent
 *   x = 3: e² = 1.5625 >  0.533125                         -> inconsistent */
static void test_check_fb_hand_computed(void **state)
{
    (void)state;
    sinew_ctx *ctx = ctx_new();
    sinew_image f, b;
    flow_fill(ctx, &f, 8, 3, 0.5f, 0.0f);
    flow_fill(ctx, &b, 8, 3, 0.0f, 0.0f);
    for (int y = 0; y < 3; y++)
        for (int x = 0; x < 8; x++)
            fl(&b, x, y)[0] = -0.5f * (float)x;
    outs r;
    outs_alloc(ctx, &r, 8, 3);
    assert_int_equal(run(ctx, &r, &f, &b, NULL, NULL, NULL, NULL), SINEW_OK);
    for (int x = 0; x < 7; x++) {
        assert_float_equal(*fl(&r.fb, x, 1), fabs(0.25 - 0.5 * x), 1e-6);
        int bad = x >= 2;
        assert_int_equal((mk(&r.mask, x, 1) & SINEW_MASK_FB_ANY) != 0, bad);
    }
    assert_int_equal(mk(&r.mask, 7, 1), SINEW_MASK_OUTSIDE);
    assert_conf_range(&r.conf);
    /* Confidence by hand at x = 2 (no frames, no boundary) with the FB tolerance of the
     * cue set to Sundaram's: fb cue log(1 + e / sqrt(0.01 (|w|² + |ŵ|²) + 0.5)), motion
     * cue log(1 + 0.5). */
    sinew_check_params p;
    sinew_check_params_default(&p);
    p.conf_fb_alpha = 0.01;
    p.conf_fb_beta = 0.5;
    assert_int_equal(run(ctx, &r, &f, &b, NULL, NULL, NULL, &p), SINEW_OK);
    double tol = sqrt(0.01 * (0.25 + 1.5625) + 0.5);
    /* fb_share: x = 2..6 inconsistent in each of the 3 rows, 15 of 24 pixels */
    assert_int_equal(r.o.stats.reason[0] + r.o.stats.reason[7], 15);
    /* fb_local: the fb cue of columns 0..5 (every row alike), e = |0.25 - 0.5 x|, ŵ =
     * -0.5 (x + 0.5); column 7 (target outside) is outside the window */
    double v[24];
    for (int k = 0; k < 24; k++) {
        double x = k % 8, bw = -0.5 * (x + 0.5);
        v[k] = log1p(fabs(0.25 - 0.5 * x) / sqrt(0.01 * (0.25 + bw * bw) + 0.5));
    }
    const double cue[SINEW_CHECK_NFEATURES] = {
        log1p(0.75 / tol), 0, 0, 0, log1p(0.5), 0, 0, local_mean(v, 8, 3, 2, 1), 15.0 / 24};
    assert_float_equal(*fl(&r.conf, 2, 1), conf_of(&p, cue), 1e-6);
    /* The constants are tunable: a looser beta makes x = 2 consistent. */
    p.fb_beta = 0.6;
    assert_int_equal(run(ctx, &r, &f, &b, NULL, NULL, NULL, &p), SINEW_OK);
    assert_int_equal(mk(&r.mask, 2, 1) & SINEW_MASK_FB_ANY, 0);
    assert_true(mk(&r.mask, 3, 1) & SINEW_MASK_FB_ANY);
    outs_free(&r);
    free_imgs(&f, &b, NULL, NULL);
    sinew_ctx_free(ctx);
}

/* Step edge in u between columns 3 and 4. Central differences: |∂u/∂x| = step/2 at
 * x = 3 and x = 4, 0 elsewhere; threshold 0.01 |w|² + 0.125. Step 1: 0.25 > 0.125
 * (x = 3) and > 0.01 + 0.125 (x = 4) -> boundary. Step 0.5: 0.0625 < 0.125 -> none.
 * Step 0.8: 0.16 > 0.125 (x = 3, |w| = 0) and > 0.01 * 0.64 + 0.125 = 0.1314 (x = 4). */
static void test_check_motion_boundary_step(void **state)
{
    (void)state;
    sinew_ctx *ctx = ctx_new();
    const float steps[3] = {1.0f, 0.5f, 0.8f};
    const int expect[3] = {1, 0, 1};
    for (int t = 0; t < 3; t++) {
        sinew_image f, b;
        flow_fill(ctx, &f, 8, 4, 0.0f, 0.0f);
        flow_fill(ctx, &b, 8, 4, 0.0f, 0.0f);
        for (int y = 0; y < 4; y++)
            for (int x = 4; x < 8; x++) {
                fl(&f, x, y)[0] = -steps[t]; /* pointing left: stays inside */
                fl(&b, x - 1, y)[0] = steps[t];
            }
        outs r;
        outs_alloc(ctx, &r, 8, 4);
        assert_int_equal(run(ctx, &r, &f, &b, NULL, NULL, NULL, NULL), SINEW_OK);
        for (int y = 0; y < 4; y++)
            for (int x = 0; x < 8; x++) {
                int bnd = expect[t] && (x == 3 || x == 4);
                assert_int_equal(mk(&r.mask, x, y) & SINEW_MASK_BOUNDARY,
                                 bnd ? SINEW_MASK_BOUNDARY : 0);
            }
        outs_free(&r);
        free_imgs(&f, &b, NULL, NULL);
    }
    sinew_ctx_free(ctx);
}

/* A block of columns 2..5 moves right by 2 over a static background (12 x 3): in
 * frame 1 it covers columns 4..7, so background columns 6 and 7 of frame 0 are occluded
 * and columns 2, 3 of frame 1 are disoccluded (backward flow 0 there). Forward flow at
 * 6, 7 is the background's 0, the backward flow at their targets the block's -2: FB
 * error 2 px, inconsistent. Range map (backward splat): frame-1 columns 4..7 land on
 * 2..5, the rest on themselves, so columns 6 and 7 get 0 -> OCCLUDED. Forward splat
 * density at their targets: 2 (the block's pixels 4, 5 land there too) -> crowded. */
static void block_scene(sinew_ctx *ctx, sinew_image *f, sinew_image *b, sinew_image *z, float zfg,
                        float zbg)
{
    flow_fill(ctx, f, 12, 3, 0.0f, 0.0f);
    flow_fill(ctx, b, 12, 3, 0.0f, 0.0f);
    assert_int_equal(sinew_image_alloc(ctx, z, 12, 3, 1, SINEW_F32), SINEW_OK);
    for (int y = 0; y < 3; y++)
        for (int x = 0; x < 12; x++) {
            int fg = x >= 2 && x <= 5;
            fl(f, x, y)[0] = fg ? 2.0f : 0.0f;
            fl(b, x, y)[0] = x >= 4 && x <= 7 ? -2.0f : 0.0f;
            *fl(z, x, y) = fg ? zfg : zbg;
        }
}

static void test_check_occlusion_rule(void **state)
{
    (void)state;
    sinew_ctx *ctx = ctx_new();
    sinew_image f, b, z;
    block_scene(ctx, &f, &b, &z, 1.0f, 2.0f);
    outs r;
    outs_alloc(ctx, &r, 12, 3);
    sinew_check_params p;
    sinew_check_params_default(&p);
    for (int variant = 0; variant < 5; variant++) {
        /* 0: range map; 1: crowding alone (occ_range 0); 2: z-buffer alone, block nearer;
         * 3: z-buffer alone, block farther (a wrong depth order): visible -> MISMATCH;
         * 4: neither cue (occ_range 0, occ_crowd huge) -> MISMATCH. */
        p.occ_range = variant == 0 ? 0.5 : 0.0;
        p.occ_crowd = variant == 4 ? 1e9 : 1.5;
        if (variant == 3)
            for (int y = 0; y < 3; y++)
                for (int x = 0; x < 12; x++)
                    *fl(&z, x, y) = x >= 2 && x <= 5 ? 3.0f : 2.0f;
        sinew_check_input in = {&f, &b, NULL, NULL, NULL, variant >= 2 && variant <= 3 ? &z : NULL};
        assert_int_equal(sinew_check_run(ctx, &r.o, &in, &p), SINEW_OK);
        unsigned want = variant <= 2 ? SINEW_MASK_OCCLUDED : SINEW_MASK_MISMATCH;
        for (int y = 0; y < 3; y++)
            for (int x = 0; x < 12; x++) {
                unsigned m = mk(&r.mask, x, y) & (SINEW_MASK_FB_ANY | SINEW_MASK_OUTSIDE);
                assert_int_equal(m, x == 6 || x == 7 ? want : 0);
            }
        assert_int_equal(r.o.stats.reason[variant <= 2 ? 0 : 7], 6);
    }
    outs_free(&r);
    free_imgs(&f, &b, &z, NULL);
    sinew_ctx_free(ctx);
}

/* Uniform forward flow 1 px right, backward flow 0: every pixel is inconsistent (error
 * 1 px > sqrt(0.51)), but frame 1 covers frame 0 once (range 1) and no target is hit
 * twice (density 1): a flow error, not an occlusion. */
static void test_check_mismatch_is_not_occlusion(void **state)
{
    (void)state;
    sinew_ctx *ctx = ctx_new();
    sinew_image f, b;
    flow_fill(ctx, &f, 10, 4, 1.0f, 0.0f);
    flow_fill(ctx, &b, 10, 4, 0.0f, 0.0f);
    outs r;
    outs_alloc(ctx, &r, 10, 4);
    assert_int_equal(run(ctx, &r, &f, &b, NULL, NULL, NULL, NULL), SINEW_OK);
    for (int y = 0; y < 4; y++)
        for (int x = 0; x < 9; x++)
            assert_int_equal(mk(&r.mask, x, y) & SINEW_MASK_FB_ANY, SINEW_MASK_MISMATCH);
    assert_int_equal(r.o.stats.reason[0], 0);
    outs_free(&r);
    free_imgs(&f, &b, NULL, NULL);
    sinew_ctx_free(ctx);
}

/* Out-of-frame rule: the target must lie in the image area [-0.5, W - 0.5) x
 * [-0.5, H - 0.5) (pixel squares, half-open); in the half-pixel margin the backward
 * flow is sampled at the nearest pixel-centre position (border value). */
static void test_check_outside_rule(void **state)
{
    (void)state;
    sinew_ctx *ctx = ctx_new();
    sinew_image f, b;
    flow_fill(ctx, &f, 5, 2, -0.5f, 0.0f);
    flow_fill(ctx, &b, 5, 2, 0.5f, 0.0f);
    fl(&f, 1, 0)[0] = -1.6f; /* target -0.6: outside */
    fl(&b, 4, 1)[0] = 0.25f; /* border value used at x = 4 */
    fl(&f, 4, 1)[0] = 0.4f;  /* target 4.4: inside, samples x = 4 */
    fl(&f, 3, 1)[0] = 1.5f;  /* target 4.5: outside (half-open) */
    outs r;
    outs_alloc(ctx, &r, 5, 2);
    assert_int_equal(run(ctx, &r, &f, &b, NULL, NULL, NULL, NULL), SINEW_OK);
    /* (the edited vectors also make motion boundaries; only bits 0 and 1 matter here) */
    const unsigned ob = SINEW_MASK_OCCLUSION;
    assert_int_equal(mk(&r.mask, 0, 0) & ob, 0);                  /* target -0.5: inside */
    assert_float_equal(*fl(&r.fb, 0, 0), 0.0, 1e-6);              /* -0.5 + b(0) = 0 */
    assert_int_equal(mk(&r.mask, 1, 0) & ob, SINEW_MASK_OUTSIDE); /* target -0.6 */
    assert_int_equal(mk(&r.mask, 4, 1) & ob, 0);
    assert_float_equal(*fl(&r.fb, 4, 1), 0.65, 1e-6); /* 0.4 + 0.25 */
    assert_int_equal(mk(&r.mask, 3, 1) & ob, SINEW_MASK_OUTSIDE);
    free_imgs(&f, &b, NULL, NULL);
    flow_fill(ctx, &f, 5, 2, 1.0f, 1.0f);
    flow_fill(ctx, &b, 5, 2, -1.0f, -1.0f);
    assert_int_equal(run(ctx, &r, &f, &b, NULL, NULL, NULL, NULL), SINEW_OK);
    assert_int_equal(mk(&r.mask, 3, 0), 0); /* target (4, 1): the last centre */
    assert_int_equal(mk(&r.mask, 4, 0), SINEW_MASK_OUTSIDE);
    assert_int_equal(mk(&r.mask, 0, 1), SINEW_MASK_OUTSIDE);
    outs_free(&r);
    free_imgs(&f, &b, NULL, NULL);
    sinew_ctx_free(ctx);
}

/* Frame 1 = frame 0 shifted right by one pixel with gain 1.3 and offset +10 gray
 * levels: the fitted gain/offset absorb it, so no PHOTO bit (without the fit the
 * residual would reach 0.3 * 160 + 10 = 58 levels = 0.23 > 0.1). A corrupted patch
 * in frame 1 is flagged. */
static void test_check_photometric_brightness_gain(void **state)
{
    (void)state;
    sinew_ctx *ctx = ctx_new();
    const int w = 40, h = 30;
    sinew_image f0, f1, f, b;
    texture_u8(ctx, &f0, w, h, 7u, 40, 121);
    assert_int_equal(sinew_image_alloc(ctx, &f1, w, h, 1, SINEW_U8), SINEW_OK);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            int src = x > 0 ? x - 1 : 0;
            double v = 1.3 * sinew_image_row_u8(&f0, y)[src] + 10;
            sinew_image_row_u8(&f1, y)[x] = (uint8_t)lround(v);
        }
    flow_fill(ctx, &f, w, h, 1.0f, 0.0f);
    flow_fill(ctx, &b, w, h, -1.0f, 0.0f);
    outs r;
    outs_alloc(ctx, &r, w, h);
    assert_int_equal(run(ctx, &r, &f, &b, &f0, &f1, NULL, NULL), SINEW_OK);
    assert_float_equal(r.o.stats.gain, 1.3, 0.01);
    assert_float_equal(r.o.stats.offset * 255, 10, 1.0);
    assert_int_equal(r.o.stats.reason[3], 0);
    /* corrupt a 5x5 patch of frame 1 at x 20..24, y 10..14 (sources x 19..23) */
    for (int y = 10; y < 15; y++)
        for (int x = 20; x < 25; x++) {
            uint8_t *p = &sinew_image_row_u8(&f1, y)[x];
            *p = (uint8_t)(*p > 128 ? 20 : 230);
        }
    assert_int_equal(run(ctx, &r, &f, &b, &f0, &f1, NULL, NULL), SINEW_OK);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w - 1; x++) {
            int in = y >= 10 && y < 15 && x >= 19 && x < 24;
            if (!in)
                assert_int_equal(mk(&r.mask, x, y) & SINEW_MASK_PHOTO, 0);
            else
                assert_int_equal(mk(&r.mask, x, y) & SINEW_MASK_PHOTO, SINEW_MASK_PHOTO);
        }
    assert_conf_range(&r.conf);
    /* with the photometric cue alone in the calibration, the corrupted pixels rank
     * below the clean ones (the default weight is fitted and may be 0) */
    sinew_check_params p;
    sinew_check_params_default(&p);
    p.conf_k_fb = p.conf_k_texture = p.conf_k_boundary = p.conf_k_motion = 0;
    p.conf_k_photo = 1;
    assert_int_equal(run(ctx, &r, &f, &b, &f0, &f1, NULL, &p), SINEW_OK);
    assert_true(*fl(&r.conf, 21, 12) < *fl(&r.conf, 5, 5));
    outs_free(&r);
    free_imgs(&f0, &f1, &f, &b);
    sinew_ctx_free(ctx);
}

/* Saturation: all colour channels >= 0.98 of full scale (8-bit: >= 249.9, i.e. 250),
 * at the source in frame 0 or at the nearest target pixel in frame 1. */
static void test_check_saturated_pixels(void **state)
{
    (void)state;
    sinew_ctx *ctx = ctx_new();
    const int w = 6, h = 2;
    sinew_image f0, f1, f, b;
    assert_int_equal(sinew_image_alloc(ctx, &f0, w, h, 3, SINEW_U8), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &f1, w, h, 1, SINEW_U16), SINEW_OK);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            uint8_t *p = sinew_image_row_u8(&f0, y) + 3 * x;
            p[0] = p[1] = p[2] = (uint8_t)(50 + 10 * x);
            sinew_image_row_u16(&f1, y)[x] = (uint16_t)(1000 * (x + 1));
        }
    uint8_t *p = sinew_image_row_u8(&f0, 0) + 3 * 1;
    p[0] = 252, p[1] = 255, p[2] = 250; /* saturated */
    p = sinew_image_row_u8(&f0, 0) + 3 * 2;
    p[0] = 255, p[1] = 255, p[2] = 240;     /* yellowish, not clipped white */
    sinew_image_row_u16(&f1, 1)[4] = 65000; /* 65000 >= 0.98 * 65535 = 64224.3 */
    flow_fill(ctx, &f, w, h, 1.0f, 0.0f);
    flow_fill(ctx, &b, w, h, -1.0f, 0.0f);
    outs r;
    outs_alloc(ctx, &r, w, h);
    assert_int_equal(run(ctx, &r, &f, &b, &f0, &f1, NULL, NULL), SINEW_OK);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            int sat = (y == 0 && x == 1) || (y == 1 && x == 3); /* (3,1) maps to (4,1) */
            assert_int_equal(mk(&r.mask, x, y) & SINEW_MASK_SATURATED,
                             sat ? SINEW_MASK_SATURATED : 0);
        }
    assert_int_equal(r.o.stats.reason[5], 2);
    outs_free(&r);
    free_imgs(&f0, &f1, &f, &b);
    sinew_ctx_free(ctx);
}

static void test_check_ignore_polarity(void **state)
{
    (void)state;
    sinew_ctx *ctx = ctx_new();
    const int w = 4, h = 3;
    sinew_image f, b, ign;
    flow_fill(ctx, &f, w, h, 0.0f, 0.0f);
    flow_fill(ctx, &b, w, h, 0.0f, 0.0f);
    assert_int_equal(sinew_image_alloc(ctx, &ign, w, h, 1, SINEW_U8), SINEW_OK);
    sinew_image_row_u8(&ign, 1)[2] = 255;
    sinew_image_row_u8(&ign, 0)[0] = 1;
    outs r;
    outs_alloc(ctx, &r, w, h);
    sinew_check_params p;
    sinew_check_params_default(&p);
    /* no polarity: refused, the message says why */
    assert_int_equal(run(ctx, &r, &f, &b, NULL, NULL, &ign, &p), SINEW_EINVAL);
    assert_non_null(strstr(sinew_ctx_message(ctx), "polarity"));
    for (int pol = 0; pol < 2; pol++) {
        p.ignore_polarity = pol ? SINEW_IGNORE_ZERO : SINEW_IGNORE_NONZERO;
        assert_int_equal(run(ctx, &r, &f, &b, NULL, NULL, &ign, &p), SINEW_OK);
        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++) {
                int nz = (x == 2 && y == 1) || (x == 0 && y == 0);
                int ig = pol ? !nz : nz;
                assert_int_equal(mk(&r.mask, x, y), ig ? SINEW_MASK_IGNORE : 0);
                const double none[SINEW_CHECK_NFEATURES] = {0};
                assert_float_equal(*fl(&r.conf, x, y), ig ? 0.0 : conf_of(&p, none), 1e-6);
            }
        assert_int_equal(r.o.stats.reason[4], pol ? 10 : 2);
    }
    outs_free(&r);
    free_imgs(&f, &b, &ign, NULL);
    sinew_ctx_free(ctx);
}

/* One bump u = 1 at (10, 10) of a zero field: the boundary pixels are its four
 * 4-neighbours (central difference 0.5, 0.25 > 0.125), not the bump itself. The
 * boundary term of the confidence must use the exact Euclidean distance to them,
 * checked against brute force. */
static void test_check_boundary_distance_exact(void **state)
{
    (void)state;
    sinew_ctx *ctx = ctx_new();
    const int w = 23, h = 17;
    sinew_image f, b;
    flow_fill(ctx, &f, w, h, 0.0f, 0.0f);
    flow_fill(ctx, &b, w, h, 0.0f, 0.0f);
    fl(&f, 10, 10)[0] = 1.0f;
    outs r;
    outs_alloc(ctx, &r, w, h);
    assert_int_equal(run(ctx, &r, &f, &b, NULL, NULL, NULL, NULL), SINEW_OK);
    const int bx[4] = {9, 11, 10, 10}, by[4] = {10, 10, 9, 11};
    assert_int_equal(r.o.stats.reason[2], 4);
    assert_int_equal(r.o.stats.reason[0] + r.o.stats.reason[7], 1);
    sinew_check_params p;
    sinew_check_params_default(&p);
    for (int k = 0; k < 4; k++)
        assert_int_equal(mk(&r.mask, bx[k], by[k]), SINEW_MASK_BOUNDARY);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            if (x == 10 && y == 10)
                continue;
            double d2 = 1e30;
            for (int k = 0; k < 4; k++) {
                double dx = x - bx[k], dy = y - by[k];
                if (dx * dx + dy * dy < d2)
                    d2 = dx * dx + dy * dy;
            }
            /* fb_share: the bump itself is inconsistent (e = 1), 1 of w h pixels;
             * fb_local: its fb cue over the 49 pixels of a window that holds it (such
             * windows lie inside the image) */
            int near = abs(x - 10) <= 3 && abs(y - 10) <= 3;
            double loc = near ? log1p(1 / sqrt(p.conf_fb_beta)) / 49 : 0;
            const double cue[SINEW_CHECK_NFEATURES] = {
                0, 0, 0, exp(-sqrt(d2) / p.conf_boundary_scale), 0, 0, 0, loc, 1.0 / (w * h)};
            double want = conf_of(&p, cue);
            assert_float_equal(*fl(&r.conf, x, y), want, 1e-6);
        }
    outs_free(&r);
    free_imgs(&f, &b, NULL, NULL);
    sinew_ctx_free(ctx);
}

/* NaN policy: unknown forward flow at x, or unknown backward flow at a used bilinear
 * neighbour of the target, gives fb_error NaN, bit UNKNOWN and confidence 0. A NaN
 * neighbour with zero bilinear weight is not read. */
static void test_check_nan_flow(void **state)
{
    (void)state;
    sinew_ctx *ctx = ctx_new();
    sinew_image f, b;
    flow_fill(ctx, &f, 6, 3, 1.0f, 0.0f);
    flow_fill(ctx, &b, 6, 3, -1.0f, 0.0f);
    fl(&f, 0, 0)[1] = NAN;
    fl(&f, 1, 0)[0] = INFINITY;
    fl(&b, 3, 1)[0] = NAN;  /* target of (2, 1) */
    fl(&f, 4, 2)[0] = 0.5f; /* target (4.5, 2): neighbours 4 and 5 */
    fl(&b, 5, 2)[1] = NAN;
    fl(&f, 0, 2)[0] = 0.0f; /* target (0, 2) exactly: the NaN at (1, 2) has weight 0 */
    fl(&b, 1, 2)[0] = NAN;
    outs r;
    outs_alloc(ctx, &r, 6, 3);
    assert_int_equal(run(ctx, &r, &f, &b, NULL, NULL, NULL, NULL), SINEW_OK);
    const int ux[4] = {0, 1, 2, 4}, uy[4] = {0, 0, 1, 2};
    for (int k = 0; k < 4; k++) {
        assert_true(mk(&r.mask, ux[k], uy[k]) & SINEW_MASK_UNKNOWN);
        assert_true(isnan(*fl(&r.fb, ux[k], uy[k])));
        assert_true(*fl(&r.conf, ux[k], uy[k]) == 0.0f);
    }
    assert_false(mk(&r.mask, 0, 2) & SINEW_MASK_UNKNOWN);
    assert_float_equal(*fl(&r.fb, 0, 2), 1.0, 1e-6); /* w = 0, ŵ = b(0,2) = -1 */
    assert_conf_range(&r.conf);
    outs_free(&r);
    free_imgs(&f, &b, NULL, NULL);
    sinew_ctx_free(ctx);
}

/* Smooth random-ish flows with frames: outputs are bit-identical for 1, 2 and 4
 * threads, and outputs may be omitted (NULL) without changing the others. */
static void test_check_deterministic_threads(void **state)
{
    (void)state;
    const int w = 97, h = 61;
    sinew_ctx *ctx = ctx_new();
    sinew_image f, b, f0, f1;
    flow_fill(ctx, &f, w, h, 0, 0);
    flow_fill(ctx, &b, w, h, 0, 0);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            fl(&f, x, y)[0] = (float)(3 * sin(0.11 * x + 0.07 * y) + (x > 50 ? 4 : 0));
            fl(&f, x, y)[1] = (float)(2 * cos(0.05 * x - 0.13 * y));
            fl(&b, x, y)[0] = (float)(-3 * sin(0.1 * x + 0.08 * y) - (x > 55 ? 4 : 0));
            fl(&b, x, y)[1] = (float)(-2 * cos(0.06 * x - 0.12 * y));
        }
    texture_u8(ctx, &f0, w, h, 3u, 0, 256);
    texture_u8(ctx, &f1, w, h, 5u, 0, 256);
    outs ref;
    outs_alloc(ctx, &ref, w, h);
    assert_int_equal(sinew_ctx_set_threads(ctx, 1), SINEW_OK);
    assert_int_equal(run(ctx, &ref, &f, &b, &f0, &f1, NULL, NULL), SINEW_OK);
    assert_conf_range(&ref.conf);
    const int counts[2] = {2, 4};
    for (int t = 0; t < 2; t++) {
        outs r;
        outs_alloc(ctx, &r, w, h);
        assert_int_equal(sinew_ctx_set_threads(ctx, counts[t]), SINEW_OK);
        assert_int_equal(run(ctx, &r, &f, &b, &f0, &f1, NULL, NULL), SINEW_OK);
        for (int y = 0; y < h; y++) {
            assert_memory_equal(sinew_image_row(&r.fb, y), sinew_image_row(&ref.fb, y),
                                (size_t)w * 4);
            assert_memory_equal(sinew_image_row(&r.conf, y), sinew_image_row(&ref.conf, y),
                                (size_t)w * 4);
            assert_memory_equal(sinew_image_row(&r.mask, y), sinew_image_row(&ref.mask, y),
                                (size_t)w);
        }
        assert_memory_equal(&r.o.stats, &ref.o.stats, sizeof r.o.stats);
        outs_free(&r);
    }
    /* mask only */
    outs r;
    outs_alloc(ctx, &r, w, h);
    r.o.fb_error = NULL;
    r.o.confidence = NULL;
    assert_int_equal(run(ctx, &r, &f, &b, &f0, &f1, NULL, NULL), SINEW_OK);
    for (int y = 0; y < h; y++)
        assert_memory_equal(sinew_image_row(&r.mask, y), sinew_image_row(&ref.mask, y), (size_t)w);
    outs_free(&r);
    outs_free(&ref);
    free_imgs(&f, &b, &f0, &f1);
    sinew_ctx_free(ctx);
}

static void test_check_size_and_argument_errors(void **state)
{
    (void)state;
    sinew_ctx *ctx = ctx_new();
    sinew_image f, b, b2, f0, f1;
    flow_fill(ctx, &f, 8, 6, 0, 0);
    flow_fill(ctx, &b, 8, 6, 0, 0);
    flow_fill(ctx, &b2, 8, 5, 0, 0);
    texture_u8(ctx, &f0, 8, 6, 1u, 0, 200);
    texture_u8(ctx, &f1, 7, 6, 1u, 0, 200);
    outs r;
    outs_alloc(ctx, &r, 8, 6);
    assert_int_equal(run(ctx, &r, &f, &b2, NULL, NULL, NULL, NULL), SINEW_ESIZE);
    assert_non_null(strstr(sinew_ctx_message(ctx), "backward flow is 8x5"));
    assert_non_null(strstr(sinew_ctx_message(ctx), "8x6"));
    assert_int_equal(run(ctx, &r, &f, &b, &f0, &f1, NULL, NULL), SINEW_ESIZE);
    assert_non_null(strstr(sinew_ctx_message(ctx), "frame 1 is 7x6"));
    assert_int_equal(run(ctx, &r, &f, &b, &f0, NULL, NULL, NULL), SINEW_EINVAL);
    assert_int_equal(run(ctx, &r, &f, NULL, NULL, NULL, NULL, NULL), SINEW_EINVAL);
    assert_int_equal(run(ctx, &r, &f, &f0, NULL, NULL, NULL, NULL), SINEW_EINVAL);
    outs small;
    outs_alloc(ctx, &small, 8, 5);
    assert_int_equal(run(ctx, &small, &f, &b, NULL, NULL, NULL, NULL), SINEW_ESIZE);
    assert_non_null(strstr(sinew_ctx_message(ctx), "fb_error output"));
    outs_free(&small);
    sinew_check_params p;
    sinew_check_params_default(&p);
    p.fb_alpha = NAN;
    assert_int_equal(run(ctx, &r, &f, &b, NULL, NULL, NULL, &p), SINEW_EINVAL);
    assert_non_null(strstr(sinew_ctx_message(ctx), "fb_alpha"));
    sinew_check_params_default(&p);
    p.texture_radius = -1;
    assert_int_equal(run(ctx, &r, &f, &b, NULL, NULL, NULL, &p), SINEW_EINVAL);
    assert_int_equal(sinew_check_run(ctx, NULL, NULL, NULL), SINEW_EINVAL);
    outs_free(&r);
    free_imgs(&f, &b, &b2, &f0);
    sinew_image_free(&f1);
    sinew_ctx_free(ctx);
}

/* Every allocation the check makes can fail cleanly: ENOMEM, nothing leaked. */
static void test_check_alloc_failure_is_clean(void **state)
{
    (void)state;
    sinew_ctx *ctx = ctx_new();
    sinew_image f, b, f0, f1;
    flow_fill(ctx, &f, 9, 7, 0.5f, 0.25f);
    flow_fill(ctx, &b, 9, 7, -0.5f, -0.25f);
    texture_u8(ctx, &f0, 9, 7, 1u, 0, 200);
    texture_u8(ctx, &f1, 9, 7, 2u, 0, 200);
    int failed = 0;
    for (long at = 2; at < 40; at++) {
        tu_failalloc fa = {at, 0, 0};
        sinew_ctx *fc = tu_ctx_failing(&fa);
        assert_non_null(fc);
        sinew_check_input in = {&f, &b, &f0, &f1, NULL, NULL};
        sinew_check_output o;
        memset(&o, 0, sizeof o); /* all outputs NULL: the confidence is scratch too */
        int st = sinew_check_run(fc, &o, &in, NULL);
        if (st != SINEW_OK) {
            assert_int_equal(st, SINEW_ENOMEM);
            failed++;
        }
        assert_int_equal(fa.live, 1); /* only the context itself */
        sinew_ctx_free(fc);
        assert_int_equal(fa.live, 0);
    }
    assert_true(failed >= 10);
    free_imgs(&f, &b, &f0, &f1);
    sinew_ctx_free(ctx);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_check_defaults_are_published_constants),
        cmocka_unit_test(test_check_constant_consistent),
        cmocka_unit_test(test_check_fb_hand_computed),
        cmocka_unit_test(test_check_motion_boundary_step),
        cmocka_unit_test(test_check_outside_rule),
        cmocka_unit_test(test_check_occlusion_rule),
        cmocka_unit_test(test_check_mismatch_is_not_occlusion),
        cmocka_unit_test(test_check_photometric_brightness_gain),
        cmocka_unit_test(test_check_saturated_pixels),
        cmocka_unit_test(test_check_ignore_polarity),
        cmocka_unit_test(test_check_boundary_distance_exact),
        cmocka_unit_test(test_check_nan_flow),
        cmocka_unit_test(test_check_deterministic_threads),
        cmocka_unit_test(test_check_size_and_argument_errors),
        cmocka_unit_test(test_check_alloc_failure_is_clean),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
