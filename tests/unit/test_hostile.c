/* SPDX-License-Identifier: MIT */
/* Hostile values and shapes through every library stage, called directly: NaN, Inf,
 * huge and denormal numbers in flow, confidence, depth and parameters; 16-bit depth
 * codes 0 and 65535; zero, negative and non-finite intrinsics and depth scales; images
 * of 1x1, 1xN and Nx1 pixels; inputs of different sizes. Each case must end in a clear
 * status (with a message) or the documented behaviour; the sanitizer build (make test
 * SANITIZE=1) turns any undefined behaviour on these paths into a failure.
 * docs/robustness.md lists what each stage does with such input. */
#define _POSIX_C_SOURCE 200809L
#include "tests/support/testutil.h"

#include <float.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Values a flow, confidence or depth map may hold after a bad upstream step. */
static const float nasty[] = {
    NAN, INFINITY, -INFINITY, FLT_MAX, -FLT_MAX, 1e30f, -1e30f, 3e9f, -3e9f, 1e-40f, -0.0f, 0.5f,
};
#define NNASTY ((int)(sizeof nasty / sizeof nasty[0]))

/* Shapes: 1x1, one row, one column, 2x2 and a small ordinary one. */
static const int shapes[][2] = {{1, 1}, {9, 1}, {1, 9}, {2, 2}, {13, 6}};
#define NSHAPES ((int)(sizeof shapes / sizeof shapes[0]))

static void must_fail(sinew_ctx *ctx, int rc, const char *what)
{
    if (rc == SINEW_OK)
        fail_msg("%s: accepted", what);
    if (sinew_ctx_message(ctx)[0] == '\0')
        fail_msg("%s: status %d without a message", what, rc);
    if (strchr(sinew_ctx_message(ctx), '\n'))
        fail_msg("%s: message is not one line: %s", what, sinew_ctx_message(ctx));
    sinew_ctx_clear(ctx);
}

/* Same, and the message must name `name` (the file or source). */
static void must_fail_naming(sinew_ctx *ctx, int rc, const char *what, const char *name)
{
    if (rc != SINEW_OK && !strstr(sinew_ctx_message(ctx), name))
        fail_msg("%s: message does not name %s: %s", what, name, sinew_ctx_message(ctx));
    must_fail(ctx, rc, what);
}

static void must_ok(sinew_ctx *ctx, int rc, const char *what)
{
    if (rc != SINEW_OK)
        fail_msg("%s: status %d: %s", what, rc, sinew_ctx_message(ctx));
}

/* Flow of w x h with a smooth motion, then every nasty value sprinkled over it (pixel
 * i % (w*h) gets value i as u or v); with_nasty = 0 keeps it finite. */
static void make_flow(sinew_ctx *ctx, sinew_image *f, int w, int h, int with_nasty, int seed)
{
    assert_int_equal(sinew_image_alloc(ctx, f, w, h, 2, SINEW_F32), SINEW_OK);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            float *p = sinew_image_row_f32(f, y) + 2 * x;
            p[0] = 0.3f * (float)((x + seed) % 3) - 0.25f;
            p[1] = -0.2f * (float)((y + seed) % 2) + 0.1f;
        }
    if (!with_nasty)
        return;
    for (int i = 0; i < NNASTY; i++) {
        int k = (i * 7 + seed) % (w * h);
        float *p = sinew_image_row_f32(f, k / w) + 2 * (k % w);
        p[(i + seed) & 1] = nasty[i];
    }
}

static void make_frame(sinew_ctx *ctx, sinew_image *img, int w, int h, int ch, sinew_type t)
{
    assert_int_equal(sinew_image_alloc(ctx, img, w, h, ch, t), SINEW_OK);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w * ch; x++) {
            unsigned v = (unsigned)(x * 37 + y * 91) % 256;
            if (t == SINEW_U8)
                sinew_image_row_u8(img, y)[x] = (uint8_t)v;
            else
                sinew_image_row_u16(img, y)[x] = (uint16_t)(v * 257);
        }
}

static void fill_f32(sinew_image *img, float v)
{
    for (int y = 0; y < img->height; y++)
        for (int x = 0; x < img->width * img->channels; x++)
            sinew_image_row_f32(img, y)[x] = v;
}

/* ---- every stage on tiny shapes, with and without nasty values ---- */

typedef struct stage_set {
    sinew_image fwd, bwd, f0, f1, ign, fb, mask, conf, d0, d1, l0, l1;
} stage_set;

static void stage_set_free(stage_set *s)
{
    sinew_image *all[] = {&s->fwd,  &s->fb,   &s->bwd, &s->f0, &s->f1, &s->ign,
                          &s->mask, &s->conf, &s->d0,  &s->d1, &s->l0, &s->l1};
    for (size_t i = 0; i < sizeof all / sizeof all[0]; i++)
        sinew_image_free(all[i]);
}

static void draw_everything(sinew_ctx *ctx, stage_set *s, const sinew_matches *m, const char *tag)
{
    char what[160];
    sinew_image pic;
    for (int legend = 0; legend < 2; legend++) {
        snprintf(what, sizeof what, "%s draw flow legend %d", tag, legend);
        must_ok(ctx, sinew_draw_flow(ctx, &pic, &s->fwd, 0, legend), what);
        assert_true(pic.width >= s->fwd.width && pic.height >= s->fwd.height);
        sinew_image_free(&pic);
        must_ok(ctx, sinew_draw_flow(ctx, &pic, &s->fwd, 1e-30, legend), what);
        sinew_image_free(&pic);
        snprintf(what, sizeof what, "%s draw arrows legend %d", tag, legend);
        must_ok(ctx, sinew_draw_arrows(ctx, &pic, &s->f0, &s->fwd, 2, 1e20, legend), what);
        sinew_image_free(&pic);
        must_ok(ctx, sinew_draw_arrows(ctx, &pic, NULL, &s->fwd, 1000000, 1.0, legend), what);
        sinew_image_free(&pic);
        snprintf(what, sizeof what, "%s draw heatmaps legend %d", tag, legend);
        must_ok(ctx, sinew_draw_heatmap(ctx, &pic, &s->fb, 0, 0, "FB", legend), what);
        sinew_image_free(&pic);
        must_ok(ctx, sinew_draw_heatmap(ctx, &pic, &s->conf, -1e300, 1e300, NULL, legend), what);
        sinew_image_free(&pic);
        must_ok(ctx, sinew_draw_epe(ctx, &pic, &s->fwd, &s->bwd, 0, legend), what);
        sinew_image_free(&pic);
        snprintf(what, sizeof what, "%s draw reasons legend %d", tag, legend);
        must_ok(ctx, sinew_draw_reasons(ctx, &pic, &s->f1, &s->mask, legend), what);
        sinew_image_free(&pic);
        if (m->rows) {
            sinew_match_table t = {m->data, m->rows, (size_t)m->cols, 0, 1, 2, 3, 4};
            snprintf(what, sizeof what, "%s draw matches legend %d", tag, legend);
            must_ok(ctx, sinew_draw_matches(ctx, &pic, &s->f0, &s->f1, &t, 1000, legend), what);
            sinew_image_free(&pic);
        }
    }
}

static void run_stages(sinew_ctx *ctx, const char *dir, int w, int h, int with_nasty, int seed)
{
    char tag[64], what[200], p[700];
    snprintf(tag, sizeof tag, "%dx%d nasty=%d seed=%d", w, h, with_nasty, seed);
    stage_set s;
    memset(&s, 0, sizeof s);
    make_flow(ctx, &s.fwd, w, h, with_nasty, seed);
    make_flow(ctx, &s.bwd, w, h, with_nasty, seed + 5);
    make_frame(ctx, &s.f0, w, h, 3, SINEW_U8);
    make_frame(ctx, &s.f1, w, h, 3, SINEW_U8);
    make_frame(ctx, &s.ign, w, h, 1, SINEW_U8);
    assert_int_equal(sinew_image_alloc(ctx, &s.fb, w, h, 1, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &s.mask, w, h, 1, SINEW_U8), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &s.conf, w, h, 1, SINEW_F32), SINEW_OK);

    /* check: confidence in [0, 1] and never NaN, mask uses only the defined bits */
    sinew_check_params cp;
    sinew_check_params_default(&cp);
    cp.ignore_polarity = SINEW_IGNORE_ZERO;
    sinew_check_input in = {&s.fwd, &s.bwd, &s.f0, &s.f1, &s.ign, NULL};
    sinew_check_output out = {&s.fb, &s.mask, &s.conf, {0}, NULL};
    snprintf(what, sizeof what, "%s check", tag);
    must_ok(ctx, sinew_check_run(ctx, &out, &in, &cp), what);
    int64_t kept = 0;
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            float c = sinew_image_row_f32(&s.conf, y)[x];
            uint8_t b = sinew_image_row_u8(&s.mask, y)[x];
            if (!(c >= 0 && c <= 1))
                fail_msg("%s: confidence %g at (%d, %d)", what, c, x, y);
            kept += b == 0;
            float fb = sinew_image_row_f32(&s.fb, y)[x];
            assert_true(isnan(fb) || fb >= 0);
        }
    assert_int_equal(kept, out.stats.kept);
    assert_int_equal(out.stats.pixels, (int64_t)w * h);

    /* confidence with nasty values itself (a caller's own map) */
    if (with_nasty)
        for (int i = 0; i < NNASTY && i < w * h; i++)
            sinew_image_row_f32(&s.conf, i / w)[i % w] = nasty[(i + seed) % NNASTY];

    /* depth: 16-bit codes including 0 and 65535, converted to metres */
    sinew_image raw;
    assert_int_equal(sinew_image_alloc(ctx, &raw, w, h, 1, SINEW_U16), SINEW_OK);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++)
            sinew_image_row_u16(&raw, y)[x] = (uint16_t)((x + y + seed) % 5 == 0   ? 0
                                                         : (x + y + seed) % 5 == 1 ? 65535
                                                                                   : 1000 + x);
    sinew_camera cam;
    sinew_camera_init(&cam, 5, 5, (w - 1) / 2.0, (h - 1) / 2.0, w, h);
    sinew_depth_params dp;
    sinew_depth_params_default(&dp);
    sinew_depth_stats ds;
    snprintf(what, sizeof what, "%s depth", tag);
    must_ok(ctx, sinew_depth_convert(ctx, &s.d0, &ds, &raw, &cam, &dp, "d0"), what);
    assert_int_equal(ds.total, (size_t)w * h);
    assert_int_equal(ds.valid + ds.invalid_code + ds.out_of_range, ds.total);
    dp.kind = SINEW_DEPTH_RAY;
    must_ok(ctx, sinew_depth_convert(ctx, &s.d1, &ds, &raw, &cam, &dp, "d1"), what);
    sinew_image_free(&raw);
    if (with_nasty) /* float depth with every nasty value */
        for (int i = 0; i < NNASTY && i < w * h; i++)
            sinew_image_row_f32(&s.d1, i / w)[i % w] = nasty[(i + seed + 3) % NNASTY];
    double med;
    must_ok(ctx, sinew_depth_median(ctx, &med, NULL, &s.d1), what);
    assert_true(isnan(med) || isfinite(med));
    make_frame(ctx, &s.l0, w, h, 1, SINEW_U16);
    make_frame(ctx, &s.l1, w, h, 1, SINEW_U16);

    /* matches with every optional input, in every sampling mode, then saved */
    sinew_match_inputs mi = {&s.fwd, &s.mask, &s.conf, &s.l0, &s.l1, &s.d0, &s.d1, &cam,
                             "fwd",  "mask",  "conf",  "l0",  "l1",  "d0",  "d1"};
    sinew_matches keep;
    memset(&keep, 0, sizeof keep);
    for (int mode = 0; mode < 3; mode++)
        for (int normals = 0; normals < 2; normals++) {
            sinew_match_params mp;
            sinew_match_params_default(&mp);
            mp.sampling = (sinew_sampling)mode;
            mp.normals = normals;
            mp.edge_radius = 3;
            mp.top_k = 3;
            mp.cell = 1;
            mp.stride = 1 + seed % 3;
            mp.max_displacement = 1e-300;
            sinew_matches m;
            snprintf(what, sizeof what, "%s matches mode %d normals %d", tag, mode, normals);
            mi.mask = mode == 0 ? NULL : &s.mask; /* also unmasked, so nasty flow gets in */
            must_ok(ctx, sinew_matches_build(ctx, &m, &mi, &mp), what);
            size_t sum = m.rows;
            for (int r = 0; r < SINEW_REJECT_COUNT; r++)
                sum += m.rejected[r];
            assert_int_equal(sum, m.pixels);
            for (size_t r = 0; r < m.rows * (size_t)m.cols; r++)
                if (!isfinite(m.data[r]))
                    fail_msg("%s: non-finite value %g in row %zu", what, m.data[r],
                             r / (size_t)m.cols);
            if (mode == 0 && normals == 1) {
                keep = m;
                continue;
            }
            sinew_matches_free(ctx, &m);
        }
    mi.mask = &s.mask;
    /* and without depth, so the flow's own values are the table's */
    mi.depth0 = mi.depth1 = NULL;
    mi.camera = NULL;
    sinew_matches m2;
    sinew_match_params mp2;
    sinew_match_params_default(&mp2);
    mi.mask = NULL;
    snprintf(what, sizeof what, "%s matches 2-D", tag);
    must_ok(ctx, sinew_matches_build(ctx, &m2, &mi, &mp2), what);
    for (size_t r = 0; r < m2.rows * (size_t)m2.cols; r++)
        assert_true(isfinite(m2.data[r]));
    sinew_matches_free(ctx, &m2);

    draw_everything(ctx, &s, &keep, tag);
    sinew_matches_free(ctx, &keep);

    /* metrics with nasty values on either side */
    sinew_flow_errors fe;
    snprintf(what, sizeof what, "%s metrics", tag);
    must_ok(ctx, sinew_flow_errors_compute(ctx, &fe, &s.fwd, &s.bwd, &s.mask, &s.ign), what);
    for (int r = 0; r < SINEW_REGION_COUNT; r++) {
        sinew_flow_summary sm;
        sinew_flow_stats_summarize(&sm, &fe.region[r]);
        assert_true(fe.region[r].n_valid <= fe.region[r].n_gt);
        if (fe.region[r].n_valid > 0 && !(sm.epe >= 0))
            fail_msg("%s: region %d EPE %g", what, r, sm.epe);
    }
    must_ok(ctx, sinew_flow_epe_map(ctx, &s.fb, &s.fwd, &s.bwd), what);
    sinew_mask_scores ms;
    must_ok(ctx, sinew_mask_scores_compute(ctx, &ms, &s.mask, &s.ign, NULL, 0), what);
    assert_int_equal(ms.tp + ms.fp + ms.fn + ms.tn, (int64_t)w * h);

    /* every writer round-trips the tiny shape */
    snprintf(what, sizeof what, "%s io", tag);
    const char *flows[] = {"f.flo", "f.pfm", "f.npy"};
    int has_inf = 0, has_huge = 0; /* .flo refuses finite components above 1e9 */
    for (int y = 0; y < h; y++)
        for (int x = 0; x < 2 * w; x++) {
            float c = sinew_image_row_f32(&s.fwd, y)[x];
            has_inf |= isinf(c);
            has_huge |= isfinite(c) && fabsf(c) > 1e9f;
        }
    for (int i = 0; i < 3; i++) {
        sinew_image back;
        tu_path(p, sizeof p, dir, flows[i]);
        int rc = sinew_flow_write(ctx, p, &s.fwd, SINEW_FLOW_AUTO);
        if (has_inf || (i == 0 && has_huge)) { /* documented refusals, before writing */
            must_fail_naming(ctx, rc, what, p);
            assert_false(tu_file_exists(p));
            continue;
        }
        must_ok(ctx, rc, what);
        must_ok(ctx, sinew_flow_read(ctx, &back, p, SINEW_FLOW_AUTO), what);
        assert_true(sinew_image_same_shape(&back, &s.fwd));
        sinew_image_free(&back);
        remove(p);
    }
    sinew_image back;
    must_ok(ctx, sinew_image_write_png(ctx, tu_path(p, sizeof p, dir, "f0.png"), &s.f0), what);
    must_ok(ctx, sinew_image_read(ctx, &back, p), what);
    assert_true(sinew_image_same_shape(&back, &s.f0));
    sinew_image_free(&back);
    must_ok(ctx, sinew_pfm_write_image(ctx, tu_path(p, sizeof p, dir, "d.pfm"), &s.d1), what);
    must_ok(ctx, sinew_pfm_read_image(ctx, &back, p), what);
    sinew_image_free(&back);
    must_ok(ctx, sinew_npy_write_image(ctx, tu_path(p, sizeof p, dir, "d.npy"), &s.d1, 0), what);
    must_ok(ctx, sinew_npy_read_image(ctx, &back, p), what);
    assert_int_equal(back.width, w);
    assert_int_equal(back.height, h);
    sinew_image_free(&back);
    stage_set_free(&s);
}

static void test_hostile_tiny_shapes_every_stage(void **state)
{
    tu_fixture *f = *state;
    for (int i = 0; i < NSHAPES; i++)
        for (int nasty_on = 0; nasty_on < 2; nasty_on++) {
            /* serial and parallel both (tiny images: spare a loaded machine the
             * thread start-ups on most runs) */
            sinew_ctx_set_threads(f->ctx, nasty_on ? 1 : 2);
            for (int seed = 0; seed < (nasty_on ? 4 : 1); seed++)
                run_stages(f->ctx, f->dir, shapes[i][0], shapes[i][1], nasty_on, seed);
        }
}

/* Every nasty value as a uniform flow: no crash, documented results. */
static void test_hostile_uniform_nasty_flow(void **state)
{
    tu_fixture *f = *state;
    sinew_ctx *ctx = f->ctx;
    for (int i = 0; i < NNASTY; i++) {
        char what[80];
        snprintf(what, sizeof what, "uniform flow %g", (double)nasty[i]);
        sinew_image fw, bw, fb, mask, conf, pic;
        assert_int_equal(sinew_image_alloc(ctx, &fw, 5, 4, 2, SINEW_F32), SINEW_OK);
        assert_int_equal(sinew_image_alloc(ctx, &bw, 5, 4, 2, SINEW_F32), SINEW_OK);
        assert_int_equal(sinew_image_alloc(ctx, &fb, 5, 4, 1, SINEW_F32), SINEW_OK);
        assert_int_equal(sinew_image_alloc(ctx, &mask, 5, 4, 1, SINEW_U8), SINEW_OK);
        assert_int_equal(sinew_image_alloc(ctx, &conf, 5, 4, 1, SINEW_F32), SINEW_OK);
        fill_f32(&fw, nasty[i]);
        fill_f32(&bw, -nasty[i]);
        sinew_check_input in = {&fw, &bw, NULL, NULL, NULL, NULL};
        sinew_check_output out = {&fb, &mask, &conf, {0}, NULL};
        must_ok(ctx, sinew_check_run(ctx, &out, &in, NULL), what);
        for (int y = 0; y < 4; y++)
            for (int x = 0; x < 5; x++) {
                float c = sinew_image_row_f32(&conf, y)[x];
                assert_true(c >= 0 && c <= 1);
                if (!isfinite(nasty[i])) /* documented: unknown flow -> UNKNOWN bit */
                    assert_true(sinew_image_row_u8(&mask, y)[x] & SINEW_MASK_UNKNOWN);
            }
        double mx;
        must_ok(ctx, sinew_draw_max_magnitude(ctx, &mx, &fw), what);
        assert_true(!isnan(mx));
        if (!isfinite(nasty[i])) /* documented: 0 when no pixel is known */
            assert_true(mx == 0);
        must_ok(ctx, sinew_draw_flow(ctx, &pic, &fw, 0, 1), what);
        sinew_image_free(&pic);
        must_ok(ctx, sinew_draw_arrows(ctx, &pic, NULL, &fw, 2, 1, 1), what);
        sinew_image_free(&pic);
        sinew_flow_errors fe;
        must_ok(ctx, sinew_flow_errors_compute(ctx, &fe, &fw, &bw, NULL, NULL), what);
        if (!isfinite(nasty[i])) /* documented: non-finite = unknown, not scored */
            assert_int_equal(fe.region[0].n_gt, 0);
        sinew_match_inputs mi = {.flow = &fw, .confidence = &conf};
        sinew_matches m;
        must_ok(ctx, sinew_matches_build(ctx, &m, &mi, NULL), what);
        for (size_t r = 0; r < m.rows * (size_t)m.cols; r++)
            assert_true(isfinite(m.data[r]));
        sinew_matches_free(ctx, &m);
        sinew_image *all[] = {&fw, &bw, &fb, &mask, &conf};
        for (int k = 0; k < 5; k++)
            sinew_image_free(all[k]);
    }
}

/* Colour and line primitives with non-finite and huge coordinates. */
static void test_hostile_draw_primitives(void **state)
{
    tu_fixture *f = *state;
    uint8_t rgb[3];
    for (int i = 0; i < NNASTY; i++)
        for (int j = 0; j < NNASTY; j++) {
            sinew_draw_wheel_colour(nasty[i], nasty[j], rgb);
            sinew_draw_colourmap(nasty[i], rgb);
        }
    sinew_image img;
    assert_int_equal(sinew_image_alloc(f->ctx, &img, 1, 1, 3, SINEW_U8), SINEW_OK);
    const uint8_t c[3] = {255, 0, 0};
    for (int i = 0; i < NNASTY; i++)
        for (int j = 0; j < NNASTY; j++) {
            sinew_draw_line(&img, nasty[i], 0, nasty[j], 0.2, c);
            sinew_draw_line_arrow(&img, 0, nasty[i], 0.3, nasty[j], c);
            sinew_draw_line(&img, -1e300, -1e300, 1e300, 1e300, c);
            sinew_draw_line(&img, -DBL_MAX, 0.5, DBL_MAX, 0.5, c);
            sinew_draw_line_arrow(&img, DBL_MAX, -DBL_MAX, -DBL_MAX, DBL_MAX, c);
        }
    sinew_draw_text(&img, -5, -5, 1, "A-Z", c);
    sinew_draw_text(&img, 2147483000, 2147483000, 3, "AB", c);
    sinew_draw_text(&img, -2147483000, 0, 1, "AB", c);
    sinew_image_free(&img);
    sinew_image pic;
    must_fail(f->ctx, sinew_draw_wheel(f->ctx, &pic, 0), "wheel size 0");
    must_fail(f->ctx, sinew_draw_wheel(f->ctx, &pic, -5), "wheel size -5");
    must_fail(f->ctx, sinew_draw_wheel(f->ctx, &pic, 1 << 30), "wheel size 2^30");
    must_ok(f->ctx, sinew_draw_wheel(f->ctx, &pic, 16), "wheel size 16");
    sinew_image_free(&pic);
}

/* ---- hostile parameters ---- */

static void test_hostile_check_parameters(void **state)
{
    tu_fixture *f = *state;
    sinew_ctx *ctx = f->ctx;
    sinew_image fw, bw, f0small;
    make_flow(ctx, &fw, 4, 3, 0, 0);
    make_flow(ctx, &bw, 4, 3, 0, 1);
    sinew_check_output out = {NULL, NULL, NULL, {0}, NULL};
    sinew_check_input in = {&fw, &bw, NULL, NULL, NULL, NULL};
    const double bad[] = {NAN, INFINITY, -INFINITY, -1, -1e-300};
    for (int b = 0; b < 5; b++)
        for (int field = 0; field < 24; field++) {
            sinew_check_params p;
            sinew_check_params_default(&p);
            /* every floating-point parameter of flow/check.h (conf_bias may be negative:
             * only its non-finite values are hostile) */
            double *fields[] = {&p.fb_alpha,
                                &p.fb_beta,
                                &p.boundary_alpha,
                                &p.boundary_beta,
                                &p.occ_range,
                                &p.occ_crowd,
                                &p.occ_depth_tolerance,
                                &p.photo_threshold,
                                &p.saturation_level,
                                &p.conf_fb_alpha,
                                &p.conf_fb_beta,
                                &p.conf_photo_scale,
                                &p.conf_texture_scale,
                                &p.conf_boundary_scale,
                                &p.conf_k_fb,
                                &p.conf_k_photo,
                                &p.conf_k_texture,
                                &p.conf_k_boundary,
                                &p.conf_k_motion,
                                &p.conf_k_outside,
                                &p.conf_k_saturated,
                                &p.conf_k_fb_local,
                                &p.conf_k_fb_share,
                                &p.conf_bias};
            assert_int_equal(sizeof fields / sizeof fields[0], 24);
            if (field == 23 && b >= 3)
                continue; /* a negative bias is valid */
            *fields[field] = bad[b];
            must_fail(ctx, sinew_check_run(ctx, &out, &in, &p), "hostile check parameter");
        }
    sinew_check_params p;
    sinew_check_params_default(&p);
    p.texture_radius = -1;
    must_fail(ctx, sinew_check_run(ctx, &out, &in, &p), "texture radius -1");
    p.texture_radius = 65; /* documented limit 0..64 */
    must_fail(ctx, sinew_check_run(ctx, &out, &in, &p), "texture radius 65");
    /* the largest radius on a 4x3 image is fine (the window is clipped) */
    p.texture_radius = 64;
    make_frame(ctx, &f0small, 4, 3, 1, SINEW_U8);
    in.frame0 = in.frame1 = &f0small;
    must_ok(ctx, sinew_check_run(ctx, &out, &in, &p), "texture radius 64");
    sinew_image_free(&f0small);
    sinew_image_free(&fw);
    sinew_image_free(&bw);
}

static void test_hostile_match_parameters(void **state)
{
    tu_fixture *f = *state;
    sinew_ctx *ctx = f->ctx;
    sinew_image fw;
    make_flow(ctx, &fw, 4, 3, 0, 0);
    sinew_match_inputs mi = {.flow = &fw};
    sinew_matches m;
    for (int k = 0; k < 10; k++) {
        sinew_match_params p;
        sinew_match_params_default(&p);
        switch (k) {
        case 0:
            p.sampling = SINEW_SAMPLE_STRIDE, p.stride = 0;
            break;
        case 1:
            p.sampling = SINEW_SAMPLE_STRIDE, p.stride = -3;
            break;
        case 2:
            p.sampling = SINEW_SAMPLE_TOP_K, p.top_k = 0;
            break;
        case 3:
            p.sampling = SINEW_SAMPLE_TOP_K, p.cell = 0;
            break;
        case 4:
            p.min_weight = NAN;
            break;
        case 5:
            p.edge_rel = -1;
            break;
        case 6:
            p.edge_radius = -1;
            break;
        case 9:
            p.edge_radius = 17;
            break;
        case 7:
            p.max_displacement = NAN;
            break;
        case 8:
            p.sampling = (sinew_sampling)77;
            break;
        }
        char what[40];
        snprintf(what, sizeof what, "match parameter case %d", k);
        must_fail(ctx, sinew_matches_build(ctx, &m, &mi, &p), what);
    }
    /* huge but valid ones are fine */
    sinew_match_params p;
    sinew_match_params_default(&p);
    p.sampling = SINEW_SAMPLE_TOP_K;
    p.top_k = SIZE_MAX;
    p.cell = 1 << 30;
    p.edge_radius = 16; /* documented limit 0..16 */
    sinew_matches all;
    must_ok(ctx, sinew_matches_build(ctx, &all, &mi, NULL), "defaults");
    must_ok(ctx, sinew_matches_build(ctx, &m, &mi, &p), "top_k SIZE_MAX");
    assert_int_equal(m.rows, all.rows);
    sinew_matches_free(ctx, &m);
    sinew_matches_free(ctx, &all);
    p.sampling = SINEW_SAMPLE_STRIDE;
    p.stride = 1 << 30;
    must_ok(ctx, sinew_matches_build(ctx, &m, &mi, &p), "stride 2^30");
    assert_true(m.rows <= 1); /* only pixel (0, 0) is on the grid */
    sinew_matches_free(ctx, &m);
    sinew_image_free(&fw);
}

static void test_hostile_draw_parameters(void **state)
{
    tu_fixture *f = *state;
    sinew_ctx *ctx = f->ctx;
    sinew_image fw, map, pic;
    make_flow(ctx, &fw, 4, 3, 1, 2);
    assert_int_equal(sinew_image_alloc(ctx, &map, 4, 3, 1, SINEW_F32), SINEW_OK);
    const double vals[] = {NAN, INFINITY, -INFINITY, 0, -1, 1e-320, 1e300};
    for (int i = 0; i < 7; i++) {
        /* max_mag and heatmap ranges: either refused or drawn, never UB */
        int rc = sinew_draw_flow(ctx, &pic, &fw, vals[i], 1);
        if (rc)
            must_fail(ctx, rc, "draw flow max_mag");
        sinew_image_free(&pic);
        for (int j = 0; j < 7; j++) {
            rc = sinew_draw_heatmap(ctx, &pic, &map, vals[i], vals[j], "X", 1);
            if (rc)
                must_fail(ctx, rc, "heatmap range");
            sinew_image_free(&pic);
        }
        rc = sinew_draw_arrows(ctx, &pic, NULL, &fw, 4, vals[i], 1);
        if (rc)
            must_fail(ctx, rc, "arrow scale");
        else
            assert_true(vals[i] > 0 && isfinite(vals[i]));
        sinew_image_free(&pic);
        rc = sinew_draw_epe(ctx, &pic, &fw, &fw, vals[i], 0);
        if (rc)
            must_fail(ctx, rc, "epe max");
        sinew_image_free(&pic);
    }
    must_fail(ctx, sinew_draw_arrows(ctx, &pic, NULL, &fw, 1, 1, 0), "arrow step 1");
    must_fail(ctx, sinew_draw_arrows(ctx, &pic, NULL, &fw, -2, 1, 0), "arrow step -2");
    /* a match table with nasty coordinates and weights, and out-of-range columns */
    float rows[NNASTY][5];
    for (int i = 0; i < NNASTY; i++)
        for (int k = 0; k < 5; k++)
            rows[i][k] = nasty[(i + k) % NNASTY];
    sinew_image f0, f1;
    make_frame(ctx, &f0, 1, 1, 1, SINEW_U8);
    make_frame(ctx, &f1, 7, 2, 3, SINEW_U16);
    sinew_match_table t = {&rows[0][0], NNASTY, 5, 0, 1, 2, 3, 4};
    must_ok(ctx, sinew_draw_matches(ctx, &pic, &f0, &f1, &t, 1000, 1), "nasty match table");
    sinew_image_free(&pic);
    t.weight = -1;
    must_ok(ctx, sinew_draw_matches(ctx, &pic, &f1, &f0, &t, 1, 1), "no weight column");
    sinew_image_free(&pic);
    t.u1 = 5;
    must_fail(ctx, sinew_draw_matches(ctx, &pic, &f0, &f1, &t, 3, 0), "column beyond cols");
    t.u1 = -2;
    must_fail(ctx, sinew_draw_matches(ctx, &pic, &f0, &f1, &t, 3, 0), "negative column");
    t.u1 = 2;
    must_fail(ctx, sinew_draw_matches(ctx, &pic, &f0, &f1, &t, 0, 0), "count 0");
    sinew_image_free(&f0);
    sinew_image_free(&f1);
    sinew_image_free(&fw);
    sinew_image_free(&map);
}

static void test_hostile_sparsification(void **state)
{
    tu_fixture *f = *state;
    float u[3] = {0.1f, 0.2f, 0.3f}, e[3] = {1, 2, 3};
    double curve[4], oracle[4], ause;
    for (int i = 0; i < NNASTY; i++) {
        u[1] = nasty[i];
        int rc = sinew_sparsification(f->ctx, curve, oracle, &ause, u, e, 3, 4);
        if (isfinite(nasty[i])) {
            must_ok(f->ctx, rc, "finite uncertainty");
            assert_true(isfinite(ause));
        } else {
            assert_int_equal(rc, SINEW_EVALUE);
            must_fail(f->ctx, rc, "non-finite uncertainty");
        }
        u[1] = 0.2f;
        e[2] = nasty[i];
        rc = sinew_sparsification(f->ctx, curve, oracle, &ause, u, e, 3, 4);
        if (!isfinite(nasty[i]))
            must_fail(f->ctx, rc, "non-finite error");
        else if (rc)
            must_fail(f->ctx, rc, "finite error");
        e[2] = 3;
    }
    must_ok(f->ctx, sinew_sparsification(f->ctx, curve, oracle, &ause, u, e, 1, 1), "n = 1");
    must_fail(f->ctx, sinew_sparsification(f->ctx, curve, oracle, &ause, u, e, 0, 4), "n = 0");
    must_fail(f->ctx, sinew_sparsification(f->ctx, curve, oracle, &ause, u, e, 3, 0), "steps 0");
    must_fail(f->ctx, sinew_sparsification(f->ctx, curve, oracle, &ause, u, e, 3, -1), "steps -1");
    must_ok(f->ctx, sinew_sparsification(f->ctx, NULL, NULL, &ause, u, e, 3, 1000), "steps > n");
}

/* ---- depth and intrinsics ---- */

static void test_hostile_depth_scale_and_range(void **state)
{
    tu_fixture *f = *state;
    sinew_ctx *ctx = f->ctx;
    sinew_image raw, z;
    assert_int_equal(sinew_image_alloc(ctx, &raw, 3, 2, 1, SINEW_U16), SINEW_OK);
    uint16_t codes[6] = {0, 65535, 1, 1000, 65534, 5000};
    for (int i = 0; i < 6; i++)
        sinew_image_row_u16(&raw, i / 3)[i % 3] = codes[i];
    sinew_camera cam;
    sinew_camera_init(&cam, 500, 500, 1, 0.5, 3, 2);
    const double bad[] = {0, -1, NAN, INFINITY, -INFINITY, -0.0};
    for (int i = 0; i < 6; i++) {
        sinew_depth_params p;
        sinew_depth_params_default(&p);
        p.scale = bad[i];
        char what[60];
        snprintf(what, sizeof what, "depth scale %g", bad[i]);
        int rc = sinew_depth_convert(ctx, &z, NULL, &raw, &cam, &p, "d.png");
        must_fail_naming(ctx, rc, what, "d.png");
        assert_null(z.data);
    }
    for (int k = 0; k < 5; k++) {
        sinew_depth_params p;
        sinew_depth_params_default(&p);
        switch (k) {
        case 0:
            p.near = NAN;
            break;
        case 1:
            p.far = NAN;
            break;
        case 2:
            p.near = 2, p.far = 1;
            break;
        case 3:
            p.near = -INFINITY;
            break;
        case 4:
            p.kind = SINEW_DEPTH_DISPARITY, p.baseline = 0;
            break;
        }
        char what[60];
        snprintf(what, sizeof what, "depth params case %d", k);
        must_fail(ctx, sinew_depth_convert(ctx, &z, NULL, &raw, &cam, &p, "d.png"), what);
    }
    /* documented: codes 0 and 65535 are invalid (NaN), the rest scale by 1/1000 */
    sinew_depth_params p;
    sinew_depth_params_default(&p);
    sinew_depth_stats st;
    must_ok(ctx, sinew_depth_convert(ctx, &z, &st, &raw, NULL, &p, "d.png"), "depth codes");
    assert_true(isnan(sinew_image_row_f32(&z, 0)[0]));
    assert_true(isnan(sinew_image_row_f32(&z, 0)[1]));
    assert_near(sinew_image_row_f32(&z, 1)[1], 65.534, 1e-5);
    assert_int_equal(st.invalid_code, 2);
    sinew_image_free(&z);
    /* the ray and disparity kinds need a camera; a hostile camera is refused */
    sinew_camera badcam = cam;
    badcam.fx = 0;
    p.kind = SINEW_DEPTH_RAY;
    must_fail(ctx, sinew_depth_convert(ctx, &z, NULL, &raw, NULL, &p, "d.png"), "ray, no camera");
    must_fail(ctx, sinew_depth_convert(ctx, &z, NULL, &raw, &badcam, &p, "d.png"), "ray, fx 0");
    badcam.fx = NAN;
    must_fail(ctx, sinew_depth_convert(ctx, &z, NULL, &raw, &badcam, &p, "d.png"), "ray, fx NaN");
    sinew_image_free(&raw);
    /* float depth: NaN, Inf, negative, zero, denormal -> invalid or documented */
    sinew_image fz;
    assert_int_equal(sinew_image_alloc(ctx, &fz, NNASTY, 1, 1, SINEW_F32), SINEW_OK);
    for (int i = 0; i < NNASTY; i++)
        sinew_image_row_f32(&fz, 0)[i] = nasty[i];
    p.kind = SINEW_DEPTH_Z;
    must_ok(ctx, sinew_depth_convert(ctx, &z, &st, &fz, NULL, &p, "d.pfm"), "float depth");
    for (int i = 0; i < NNASTY; i++) {
        float v = sinew_image_row_f32(&z, 0)[i];
        if (!(nasty[i] > 0) || !isfinite(nasty[i]))
            assert_true(isnan(v));
        else
            assert_true(v == nasty[i]);
    }
    sinew_image_free(&z);
    p.kind = SINEW_DEPTH_DISPARITY;
    p.baseline = 0.1;
    sinew_camera_init(&cam, 500, 500, 6, 0, NNASTY, 1);
    must_ok(ctx, sinew_depth_convert(ctx, &z, &st, &fz, &cam, &p, "d.pfm"), "float disparity");
    for (int i = 0; i < NNASTY; i++) {
        float v = sinew_image_row_f32(&z, 0)[i];
        assert_true(isnan(v) || (v > 0 && isfinite(v)));
    }
    sinew_image_free(&z);
    sinew_image_free(&fz);
    /* 8-bit depth is refused */
    sinew_image u8;
    make_frame(ctx, &u8, 2, 2, 1, SINEW_U8);
    sinew_depth_params_default(&p);
    must_fail(ctx, sinew_depth_convert(ctx, &z, NULL, &u8, NULL, &p, "d8.png"), "8-bit depth");
    sinew_image_free(&u8);
}

static void test_hostile_intrinsics(void **state)
{
    tu_fixture *f = *state;
    sinew_ctx *ctx = f->ctx;
    const double bad[] = {0, -1, NAN, INFINITY, -INFINITY, -0.0};
    for (int i = 0; i < 6; i++)
        for (int field = 0; field < 4; field++) {
            sinew_camera cam;
            sinew_camera_init(&cam, 500, 500, 320, 240, 640, 480);
            double *fields[] = {&cam.fx, &cam.fy, &cam.cx, &cam.cy};
            *fields[field] = bad[i];
            int rc = sinew_camera_check(ctx, &cam, "K.json");
            if (field >= 2 && isfinite(bad[i])) { /* a principal point at 0 or -1 is legal */
                must_ok(ctx, rc, "principal point");
                continue;
            }
            must_fail_naming(ctx, rc, "hostile intrinsics", "K.json");
        }
    sinew_camera cam;
    sinew_camera_init(&cam, 500, 500, 320, 240, -640, 480);
    must_fail(ctx, sinew_camera_check(ctx, &cam, "K"), "negative width");
    sinew_camera_init(&cam, 500, 500, 320, 240, 640, 0);
    must_fail(ctx, sinew_camera_check(ctx, &cam, "K"), "width without height");
    sinew_camera_init(&cam, 500, 500, 320, 240, 640, 480);
    cam.k1 = NAN;
    must_fail(ctx, sinew_camera_check(ctx, &cam, "K"), "NaN distortion");
    cam.k1 = 1e9;
    must_fail(ctx, sinew_camera_check(ctx, &cam, "K"), "huge distortion");

    /* text forms */
    const char *texts[] = {"0,0,0,0",
                           "-500,500,320,240",
                           "nan,500,320,240",
                           "inf,500,1,1",
                           "1e400,500,1,1",
                           "500,500,320,240,-640,480",
                           "500,500,320",
                           "500,500,320,240,1",
                           "500 500 320 240 640 480 1",
                           ""};
    for (size_t i = 0; i < sizeof texts / sizeof texts[0]; i++) {
        char what[80];
        snprintf(what, sizeof what, "intrinsics text '%s'", texts[i]);
        must_fail(ctx, sinew_camera_parse(ctx, &cam, texts[i], "--intrinsics"), what);
    }
    /* files */
    const char *files[] = {
        "{\"fx\": 0, \"fy\": 500, \"cx\": 1, \"cy\": 1}",
        "{\"fx\": -5, \"fy\": 500, \"cx\": 1, \"cy\": 1}",
        "{\"fx\": 1e400, \"fy\": 500, \"cx\": 1, \"cy\": 1}",
        "{\"fx\": \"NaN\", \"fy\": 500, \"cx\": 1, \"cy\": 1}",
        "{\"fx\": 500, \"fy\": 500, \"cx\": 1, \"cy\": 1, \"width\": 1e12, \"height\": 5}",
        "{\"fx\": 500, \"fy\": 500, \"cx\": 1, \"cy\": 1, \"width\": 2.5, \"height\": 5}",
        "{\"fx\": 500, \"fy\": 500, \"cx\": 1, \"cy\": 1, \"width\": -640, \"height\": -480}",
        "{\"fx\": 500, \"fy\": 500, \"cx\": 1}",
        "{\"fx\": 500, \"fx\": 500, \"fy\": 500, \"cx\": 1, \"cy\": 1, \"cy\": 2}",
        "0 0 0\n0 0 0\n0 0 1\n",
        "nan 0 1\n0 1 1\n0 0 1\n",
        "500 0 1\n0 -500 1\n0 0 1\n",
        "500 0 1\n0 500 1\n0 0 0\n",
        "500 0 1\n0 500 1\n0 0\n",
        "[",
        "{}",
        "",
    };
    for (size_t i = 0; i < sizeof files / sizeof files[0]; i++) {
        const char *p = tu_fixture_path(f, "K.txt");
        tu_write_bytes(p, files[i], strlen(files[i]));
        char what[120];
        snprintf(what, sizeof what, "intrinsics file '%s'", files[i]);
        must_fail_naming(ctx, sinew_camera_load(ctx, &cam, p), what, "K.txt");
    }
    /* rescaling: a zero or negative target size, and an unknown calibration size */
    sinew_camera out;
    sinew_camera_init(&cam, 500, 500, 320, 240, 640, 480);
    must_fail(ctx, sinew_camera_fit(ctx, &out, &cam, 0, 0, "K"), "fit to 0x0");
    must_fail(ctx, sinew_camera_fit(ctx, &out, &cam, -640, -480, "K"), "fit to negative");
    must_fail(ctx, sinew_camera_fit(ctx, &out, &cam, 1, 1, "K"), "fit 4:3 to 1:1");
    must_ok(ctx, sinew_camera_fit(ctx, &out, &cam, 4, 3, "K"), "fit to 4x3");
    sinew_camera_init(&cam, 500, 500, 320, 240, 0, 0);
    must_ok(ctx, sinew_camera_fit(ctx, &out, &cam, 1, 1, "K"), "unknown size fits anything");
    double px;
    long fails;
    must_ok(ctx, sinew_camera_roundtrip_error(ctx, &px, &fails, &out, 1, 1, 1), "roundtrip 1x1");
    must_fail(ctx, sinew_camera_roundtrip_error(ctx, &px, &fails, &out, 1, 1, 0), "step 0");
    /* projection and unprojection of hostile points */
    double X[3], u = 7, v = 7;
    for (int i = 0; i < NNASTY; i++) {
        X[0] = nasty[i];
        X[1] = 1;
        X[2] = nasty[(i + 3) % NNASTY];
        int ok = sinew_camera_project(&out, X, &u, &v);
        if (ok)
            assert_true(isfinite(u) && isfinite(v));
        sinew_camera_unproject(&out, nasty[i], 0, 1, X);
    }
    /* matches with a hostile camera are refused, not computed */
    sinew_image fw, d;
    make_flow(ctx, &fw, 3, 3, 0, 0);
    assert_int_equal(sinew_image_alloc(ctx, &d, 3, 3, 1, SINEW_F32), SINEW_OK);
    fill_f32(&d, 1);
    sinew_camera_init(&cam, 0, 500, 1, 1, 3, 3);
    sinew_match_inputs mi = {.flow = &fw, .depth0 = &d, .depth1 = &d, .camera = &cam};
    sinew_matches m;
    must_fail(ctx, sinew_matches_build(ctx, &m, &mi, NULL), "matches with fx 0");
    cam.fx = NAN;
    must_fail(ctx, sinew_matches_build(ctx, &m, &mi, NULL), "matches with fx NaN");
    mi.camera = NULL;
    must_fail(ctx, sinew_matches_build(ctx, &m, &mi, NULL), "depth without camera");
    sinew_image_free(&fw);
    sinew_image_free(&d);
}

/* ---- sizes that disagree ---- */

static void test_hostile_mismatched_sizes(void **state)
{
    tu_fixture *f = *state;
    sinew_ctx *ctx = f->ctx;
    sinew_image a, b, t, fr, fr2, m1, pic;
    make_flow(ctx, &a, 5, 4, 0, 0);
    make_flow(ctx, &b, 4, 5, 0, 0);
    make_flow(ctx, &t, 5, 4, 0, 1);
    make_frame(ctx, &fr, 5, 4, 3, SINEW_U8);
    make_frame(ctx, &fr2, 5, 3, 3, SINEW_U8);
    assert_int_equal(sinew_image_alloc(ctx, &m1, 4, 5, 1, SINEW_U8), SINEW_OK);
    /* check: forward/backward sizes, frames of different sizes, frame vs flow */
    sinew_check_output out = {NULL, NULL, NULL, {0}, NULL};
    sinew_check_input in = {&a, &b, NULL, NULL, NULL, NULL};
    must_fail(ctx, sinew_check_run(ctx, &out, &in, NULL), "fwd 5x4 bwd 4x5");
    in = (sinew_check_input){&a, &t, &fr, &fr2, NULL, NULL};
    int rc = sinew_check_run(ctx, &out, &in, NULL);
    assert_int_equal(rc, SINEW_ESIZE);
    must_fail(ctx, rc, "frames 5x4 and 5x3");
    in = (sinew_check_input){&a, &t, &fr, NULL, NULL, NULL};
    must_fail(ctx, sinew_check_run(ctx, &out, &in, NULL), "one frame only");
    sinew_image wrong_out;
    assert_int_equal(sinew_image_alloc(ctx, &wrong_out, 4, 5, 1, SINEW_F32), SINEW_OK);
    out.confidence = &wrong_out;
    in = (sinew_check_input){&a, &t, NULL, NULL, NULL, NULL};
    must_fail(ctx, sinew_check_run(ctx, &out, &in, NULL), "output of the wrong size");
    out.confidence = NULL;
    /* a 2-channel image where a frame belongs, a flow that is not F32 */
    in = (sinew_check_input){&a, &t, &a, &t, NULL, NULL};
    must_fail(ctx, sinew_check_run(ctx, &out, &in, NULL), "flow as frame");
    in = (sinew_check_input){&fr, &fr, NULL, NULL, NULL, NULL};
    must_fail(ctx, sinew_check_run(ctx, &out, &in, NULL), "frame as flow");
    /* matches */
    sinew_match_inputs mi = {.flow = &a, .mask = &m1};
    sinew_matches m;
    must_fail(ctx, sinew_matches_build(ctx, &m, &mi, NULL), "mask of another size");
    /* metrics */
    sinew_flow_errors fe;
    must_fail(ctx, sinew_flow_errors_compute(ctx, &fe, &a, &b, NULL, NULL), "est 5x4 gt 4x5");
    must_fail(ctx, sinew_flow_errors_compute(ctx, &fe, &a, &t, &m1, NULL), "occ of another size");
    must_fail(ctx, sinew_flow_epe_map(ctx, &wrong_out, &a, &t), "epe map of another size");
    /* draw */
    must_fail(ctx, sinew_draw_arrows(ctx, &pic, &fr2, &a, 2, 1, 0), "arrows frame size");
    must_fail(ctx, sinew_draw_epe(ctx, &pic, &a, &b, 0, 0), "epe sizes");
    must_fail(ctx, sinew_draw_reasons(ctx, &pic, &fr, &m1, 0), "reasons frame size");
    must_fail(ctx, sinew_draw_flow(ctx, &pic, &fr, 0, 0), "frame as flow (draw)");
    /* documented: frames of different sizes side by side are fine for matches */
    float row[5] = {0, 0, 4, 2, 1};
    sinew_match_table tab = {row, 1, 5, 0, 1, 2, 3, 4};
    must_ok(ctx, sinew_draw_matches(ctx, &pic, &fr, &fr2, &tab, 1, 1), "matches, frames differ");
    assert_int_equal(pic.height >= 4, 1);
    sinew_image_free(&pic);
    sinew_image *all[] = {&a, &b, &t, &fr, &fr2, &m1, &wrong_out};
    for (int i = 0; i < 7; i++)
        sinew_image_free(all[i]);
}

/* ---- image shapes refused before allocation ---- */

static void test_hostile_image_dimensions(void **state)
{
    tu_fixture *f = *state;
    sinew_ctx *ctx = f->ctx;
    sinew_image img;
    const int dims[][2] = {{0, 1},
                           {1, 0},
                           {-1, 5},
                           {5, -1},
                           {INT32_MIN, 1},
                           {65536, 65536},
                           {INT32_MAX, INT32_MAX},
                           {INT32_MAX, 1}};
    for (size_t i = 0; i < sizeof dims / sizeof dims[0]; i++) {
        char what[60];
        snprintf(what, sizeof what, "image %d x %d", dims[i][0], dims[i][1]);
        must_fail(ctx, sinew_image_alloc(ctx, &img, dims[i][0], dims[i][1], 4, SINEW_F32), what);
        assert_null(img.data);
    }
    must_fail(ctx, sinew_image_alloc(ctx, &img, 2, 2, 0, SINEW_U8), "0 channels");
    must_fail(ctx, sinew_image_alloc(ctx, &img, 2, 2, 5, SINEW_U8), "5 channels");
    must_fail(ctx, sinew_image_alloc(ctx, &img, 2, 2, 1, (sinew_type)3), "type 3");
    /* the pixel limit is configurable and applies to every allocation */
    assert_int_equal(sinew_ctx_set_max_pixels(ctx, 100), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &img, 10, 10, 1, SINEW_U8), SINEW_OK);
    sinew_image_free(&img);
    assert_int_equal(sinew_image_alloc(ctx, &img, 101, 1, 1, SINEW_U8), SINEW_ELIMIT);
    must_fail(ctx, SINEW_ELIMIT, "pixel limit");
    assert_int_equal(sinew_image_alloc(ctx, &img, 1, 101, 1, SINEW_U8), SINEW_ELIMIT);
    assert_int_equal(sinew_ctx_set_max_pixels(ctx, 0), SINEW_EINVAL);
    assert_int_equal(sinew_ctx_set_max_pixels(ctx, -5), SINEW_EINVAL);
}

/* A missing required pointer is a programming error: EINVAL (a message is optional
 * here, the command line never passes NULL), never a crash. */
static void null_fails(sinew_ctx *ctx, int rc, const char *what)
{
    if (rc != SINEW_EINVAL)
        fail_msg("%s: status %d, expected EINVAL", what, rc);
    sinew_ctx_clear(ctx);
}

/* NULL everywhere a pointer is required: EINVAL, no crash. */
static void test_hostile_null_arguments(void **state)
{
    tu_fixture *f = *state;
    sinew_ctx *ctx = f->ctx;
    sinew_image img, pic;
    make_flow(ctx, &img, 2, 2, 0, 0);
    sinew_check_output out = {NULL, NULL, NULL, {0}, NULL};
    sinew_check_input in = {&img, NULL, NULL, NULL, NULL, NULL};
    null_fails(ctx, sinew_check_run(ctx, &out, &in, NULL), "check without backward");
    null_fails(ctx, sinew_check_run(ctx, &out, NULL, NULL), "check NULL input");
    null_fails(ctx, sinew_check_run(ctx, NULL, &in, NULL), "check NULL output");
    sinew_matches m;
    sinew_match_inputs mi = {0};
    null_fails(ctx, sinew_matches_build(ctx, &m, &mi, NULL), "matches without flow");
    null_fails(ctx, sinew_matches_build(ctx, &m, NULL, NULL), "matches NULL inputs");
    null_fails(ctx, sinew_draw_flow(ctx, &pic, NULL, 0, 0), "draw NULL flow");
    null_fails(ctx, sinew_draw_heatmap(ctx, &pic, NULL, 0, 0, NULL, 0), "heatmap NULL");
    sinew_flow_errors fe;
    null_fails(ctx, sinew_flow_errors_compute(ctx, &fe, &img, NULL, NULL, NULL), "metrics NULL gt");
    null_fails(ctx, sinew_sparsification(ctx, NULL, NULL, NULL, NULL, NULL, 3, 2), "spars NULL");
    sinew_camera cam;
    null_fails(ctx, sinew_camera_parse(ctx, &cam, NULL, "K"), "camera parse NULL");
    null_fails(ctx, sinew_camera_load(ctx, &cam, NULL), "camera load NULL");
    null_fails(ctx, sinew_image_read(ctx, &pic, NULL), "image read NULL");
    null_fails(ctx, sinew_flow_read(ctx, &pic, NULL, SINEW_FLOW_AUTO), "flow read NULL");
    null_fails(ctx, sinew_flow_write(ctx, NULL, &img, SINEW_FLOW_AUTO), "flow write NULL");
    null_fails(ctx, sinew_flow_write(ctx, tu_fixture_path(f, "x.flo"), NULL, SINEW_FLOW_AUTO),
               "flow write NULL image");
    sinew_image_free(&img);
}

/* ---- limits checked before allocation ---- */

/* An allocator that records the largest single request, so a test can prove a reader
 * refused a hostile header without first allocating what it claims. */
typedef struct peak_alloc {
    size_t peak;
} peak_alloc;

static void *peak_alloc_fn(void *ud, size_t n)
{
    peak_alloc *pa = ud;
    if (n > pa->peak)
        pa->peak = n;
    void *p = NULL;
    return posix_memalign(&p, 64, n ? n : 1) ? NULL : p;
}

static void peak_free_fn(void *ud, void *p)
{
    (void)ud;
    free(p);
}

static uint32_t crc32_of(const unsigned char *b, size_t n) /* PNG chunk CRC (ISO 3309) */
{
    uint32_t c = 0xFFFFFFFFu;
    for (size_t i = 0; i < n; i++) {
        c ^= b[i];
        for (int k = 0; k < 8; k++)
            c = (c >> 1) ^ (0xEDB88320u & (0u - (c & 1u)));
    }
    return c ^ 0xFFFFFFFFu;
}

static void put_be32(unsigned char *p, uint32_t v)
{
    p[0] = (unsigned char)(v >> 24), p[1] = (unsigned char)(v >> 16);
    p[2] = (unsigned char)(v >> 8), p[3] = (unsigned char)v;
}

/* A PNG whose IHDR claims w x h (colour type ct, bit depth bd) followed by a few bytes
 * of IDAT and IEND: the reader must refuse it from the header. */
static void write_png_header(const char *path, uint32_t w, uint32_t h, int bd, int ct)
{
    unsigned char b[8 + 25 + 12 + 12 + 4] = {0x89, 'P', 'N', 'G', '\r', '\n', 0x1A, '\n'};
    unsigned char *c = b + 8;
    put_be32(c, 13);
    memcpy(c + 4, "IHDR", 4);
    put_be32(c + 8, w);
    put_be32(c + 12, h);
    c[16] = (unsigned char)bd, c[17] = (unsigned char)ct, c[18] = c[19] = c[20] = 0;
    put_be32(c + 21, crc32_of(c + 4, 17));
    c += 25;
    put_be32(c, 4);
    memcpy(c + 4, "IDAT\x78\x9c\x03\x00", 8);
    put_be32(c + 12, crc32_of(c + 4, 8));
    c += 16;
    put_be32(c, 0);
    memcpy(c + 4, "IEND", 4);
    put_be32(c + 8, crc32_of(c + 4, 4));
    tu_write_bytes(path, b, (size_t)(c + 12 - b));
}

typedef struct limit_case {
    const char *name; /* file name (the extension picks the flow format) */
    int reader;       /* 0 image, 1 flow (auto), 2 npy image, 3 pfm image, 4 camera */
} limit_case;

static int read_any(sinew_ctx *ctx, const char *path, int reader)
{
    sinew_image img;
    sinew_camera cam;
    int rc;
    switch (reader) {
    case 0:
        rc = sinew_image_read(ctx, &img, path);
        break;
    case 1:
        rc = sinew_flow_read(ctx, &img, path, SINEW_FLOW_AUTO);
        break;
    case 2:
        rc = sinew_npy_read_image(ctx, &img, path);
        break;
    case 3:
        rc = sinew_pfm_read_image(ctx, &img, path);
        break;
    default:
        return sinew_camera_load(ctx, &cam, path);
    }
    if (rc == SINEW_OK)
        sinew_image_free(&img);
    return rc;
}

static void npy_with_shape(const char *path, const char *shape)
{
    char h[256];
    snprintf(h, sizeof h, "{'descr': '<f4', 'fortran_order': False, 'shape': %s, }", shape);
    static const unsigned char zeros[64]; /* a few bytes of "data" */
    tu_write_npy(path, 1, h, zeros, sizeof zeros);
}

static void test_hostile_limits_before_allocation(void **state)
{
    tu_fixture *f = *state;
    char p[700];
    if (!tu_file_exists("tests/fuzz/corpus/jpeg/rgb.jpg"))
        skip(); /* the seed files: run from the repository root (tests/run does) */
    /* headers claiming 100000 x 100000 (10^10 pixels) or more */
    write_png_header(tu_path(p, sizeof p, f->dir, "huge.png"), 100000, 100000, 8, 2);
    write_png_header(tu_path(p, sizeof p, f->dir, "huge_kitti.png"), 100000, 100000, 16, 2);
    write_png_header(tu_path(p, sizeof p, f->dir, "wide.png"), 0x7FFFFFFF, 1, 8, 0);
    tu_write_bytes(tu_path(p, sizeof p, f->dir, "huge.pgm"), "P5\n100000 100000\n255\n", 21);
    tu_write_bytes(tu_path(p, sizeof p, f->dir, "huge.ppm"), "P6 4294967297 3 65535\n", 22);
    tu_write_bytes(tu_path(p, sizeof p, f->dir, "huge.pfm"), "PF\n100000 100000\n-1.0\n", 22);
    tu_write_bytes(tu_path(p, sizeof p, f->dir, "hugep.pfm"), "Pf\n99999999999999999999 1\n-1\n",
                   29);
    unsigned char flo[12 + 64] = {'P', 'I', 'E', 'H', 0xA0, 0x86, 0x01, 0, 0xA0, 0x86, 0x01, 0};
    tu_write_bytes(tu_path(p, sizeof p, f->dir, "huge.flo"), flo, sizeof flo);
    npy_with_shape(tu_path(p, sizeof p, f->dir, "huge.npy"), "(100000, 100000, 2)");
    npy_with_shape(tu_path(p, sizeof p, f->dir, "wrap.npy"), "(4294967296, 4294967296, 2)");
    npy_with_shape(tu_path(p, sizeof p, f->dir, "wrap64.npy"), "(18446744073709551615, 2)");
    npy_with_shape(tu_path(p, sizeof p, f->dir, "dims.npy"), "(1, 1, 1, 1, 1, 1, 1, 1, 1, 1)");
    npy_with_shape(tu_path(p, sizeof p, f->dir, "digits.npy"),
                   "(1000000000000000000000000000000000000000, 2)");
    /* an .npy header length field of 65535 (the format's maximum), all spaces */
    {
        size_t n = 10 + 65535;
        unsigned char *b = malloc(n);
        assert_non_null(b);
        memcpy(b, "\x93NUMPY\x01\x00\xff\xff", 10);
        memset(b + 10, ' ', 65535);
        tu_write_bytes(tu_path(p, sizeof p, f->dir, "longhdr.npy"), b, n);
        free(b);
    }
    /* a JPEG whose frame header claims 65535 x 65535 */
    if (tu_file_exists("tests/fuzz/corpus/jpeg/rgb.jpg")) {
        FILE *fp = fopen("tests/fuzz/corpus/jpeg/rgb.jpg", "rb");
        unsigned char b[65536];
        size_t n = fread(b, 1, sizeof b, fp);
        fclose(fp);
        for (size_t i = 0; i + 9 < n; i++)
            if (b[i] == 0xFF && b[i + 1] >= 0xC0 && b[i + 1] <= 0xC2) {
                b[i + 5] = b[i + 6] = b[i + 7] = b[i + 8] = 0xFF;
                break;
            }
        tu_write_bytes(tu_path(p, sizeof p, f->dir, "huge.jpg"), b, n);
    }
    const limit_case cases[] = {
        {"huge.png", 0},    {"huge_kitti.png", 1}, {"wide.png", 0}, {"huge.pgm", 0},
        {"huge.ppm", 0},    {"huge.pfm", 1},       {"huge.pfm", 3}, {"hugep.pfm", 3},
        {"huge.flo", 1},    {"huge.npy", 1},       {"huge.npy", 2}, {"wrap.npy", 1},
        {"wrap.npy", 2},    {"wrap64.npy", 2},     {"dims.npy", 2}, {"digits.npy", 2},
        {"longhdr.npy", 2}, {"huge.jpg", 0},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        tu_path(p, sizeof p, f->dir, cases[i].name);
        assert_true(tu_file_exists(p));
        peak_alloc pa = {0};
        sinew_allocator a = {peak_alloc_fn, peak_free_fn, &pa};
        sinew_ctx *ctx = sinew_ctx_new_with(&a);
        assert_non_null(ctx);
        pa.peak = 0;
        int rc = read_any(ctx, p, cases[i].reader);
        char what[160];
        snprintf(what, sizeof what, "%s (reader %d)", cases[i].name, cases[i].reader);
        must_fail_naming(ctx, rc, what, cases[i].name);
        if (pa.peak > ((size_t)1 << 20))
            fail_msg("%s: allocated %zu bytes before refusing", what, pa.peak);
        sinew_ctx_free(ctx);
    }

    /* the pixel limit of the context applies to every reader */
    sinew_ctx *ctx = f->ctx;
    assert_int_equal(sinew_ctx_set_max_pixels(ctx, 8), SINEW_OK);
    const char *seeds[][2] = {
        {"tests/fuzz/corpus/png/rgb8.png", "0"},   {"tests/fuzz/corpus/jpeg/rgb.jpg", "0"},
        {"tests/fuzz/corpus/pnm/rgb8.ppm", "0"},   {"tests/fuzz/corpus/flo/flow.flo", "1"},
        {"tests/fuzz/corpus/kitti/flow.png", "1"}, {"tests/fuzz/corpus/pfm/flow_le.pfm", "1"},
        {"tests/fuzz/corpus/npy/f4.npy", "1"}};
    for (size_t i = 0; i < sizeof seeds / sizeof seeds[0]; i++) {
        assert_true(tu_file_exists(seeds[i][0]));
        int rc = read_any(ctx, seeds[i][0], seeds[i][1][0] - '0');
        if (rc != SINEW_ELIMIT)
            fail_msg("%s: pixel limit 8 gave status %d: %s", seeds[i][0], rc,
                     sinew_ctx_message(ctx));
        must_fail_naming(ctx, rc, seeds[i][0], seeds[i][0]);
    }
    assert_int_equal(sinew_ctx_set_max_pixels(ctx, SINEW_DEFAULT_MAX_PIXELS), SINEW_OK);
}

/* Text and JSON readers: file-size caps (checked from the file's size, before reading)
 * and JSON nesting (cJSON refuses more than CJSON_NESTING_LIMIT = 1000 levels). */
static void test_hostile_text_and_json_limits(void **state)
{
    tu_fixture *f = *state;
    sinew_ctx *ctx = f->ctx;
    char p[700];
    /* sparse files just above each cap */
    const struct {
        const char *name;
        long long size;
        int which; /* 0 camera, 1 pose, 2 sequence */
    } caps[] = {
        {"big_K.json", (1LL << 20) + 1, 0},
        {"big_pose.txt", (1LL << 16) + 1, 1},
        {"big_seq.json", (256LL << 20) + 1, 2},
    };
    for (size_t i = 0; i < sizeof caps / sizeof caps[0]; i++) {
        tu_path(p, sizeof p, f->dir, caps[i].name);
        FILE *fp = fopen(p, "wb");
        assert_non_null(fp);
        fputc('{', fp);
        assert_int_equal(fseek(fp, (long)caps[i].size - 1, SEEK_SET), 0);
        fputc('}', fp);
        fclose(fp);
        peak_alloc pa = {0};
        sinew_allocator a = {peak_alloc_fn, peak_free_fn, &pa};
        sinew_ctx *pc = sinew_ctx_new_with(&a);
        pa.peak = 0;
        int rc;
        sinew_camera cam;
        sinew_rigid T;
        sinew_sequence *seq = NULL;
        switch (caps[i].which) {
        case 0:
            rc = sinew_camera_load(pc, &cam, p);
            break;
        case 1:
            rc = sinew_rigid_load(pc, &T, p);
            break;
        default:
            rc = sinew_sequence_read(pc, &seq, p);
            break;
        }
        assert_int_equal(rc, SINEW_ELIMIT);
        must_fail_naming(pc, rc, caps[i].name, caps[i].name);
        assert_true(pa.peak < 4096);
        sinew_ctx_free(pc);
        remove(p);
    }
    /* nesting far beyond cJSON's limit: refused, no stack exhaustion */
    size_t depth = 200000;
    char *deep = malloc(2 * depth + 64);
    assert_non_null(deep);
    for (int form = 0; form < 2; form++) {
        size_t n = 0;
        n += (size_t)sprintf(deep, form ? "{\"frames\": " : "{\"fx\": ");
        for (size_t i = 0; i < depth; i++)
            deep[n++] = '[';
        for (size_t i = 0; i < depth; i++)
            deep[n++] = ']';
        deep[n++] = '}';
        tu_write_bytes(tu_path(p, sizeof p, f->dir, "deep.json"), deep, n);
        if (form == 0) {
            sinew_camera cam;
            must_fail_naming(ctx, sinew_camera_load(ctx, &cam, p), "deep intrinsics", "deep.json");
        } else {
            sinew_sequence *seq = NULL;
            must_fail_naming(ctx, sinew_sequence_read(ctx, &seq, p), "deep sequence", "deep.json");
            assert_null(seq);
        }
    }
    free(deep);
    /* a frame count above the limit is refused before the frames are built */
    {
        size_t nf = (size_t)SINEW_SEQUENCE_MAX_FRAMES + 1;
        const char *head = "{\"version\": 1, \"frames\": [";
        char *txt = malloc(strlen(head) + 3 * nf + 8);
        assert_non_null(txt);
        size_t n = (size_t)sprintf(txt, "%s", head);
        for (size_t i = 0; i < nf; i++) {
            memcpy(txt + n, i ? ",{}" : "{}", i ? 3 : 2);
            n += i ? 3 : 2;
        }
        memcpy(txt + n, "]}", 3);
        n += 2;
        sinew_sequence *seq = NULL;
        int rc = sinew_sequence_parse(ctx, &seq, txt, n, "many.json");
        free(txt);
        assert_int_equal(rc, SINEW_ELIMIT);
        must_fail_naming(ctx, rc, "1000001 frames", "many.json");
        assert_null(seq);
    }
}

/* ---- the flow estimator ---- */

static int estimate(sinew_ctx *ctx, const char *preset, const sinew_image *f0,
                    const sinew_image *f1, sinew_image *fwd, sinew_image *bwd)
{
    sinew_flow_params p;
    int rc = sinew_flow_params_preset(&p, preset);
    sinew_estimator *est = NULL;
    if (!rc)
        rc = sinew_estimator_new(ctx, &est, &p);
    if (!rc)
        rc = sinew_estimator_run(est, fwd, bwd, f0, f1);
    sinew_estimator_free(est);
    return rc;
}

static void assert_flow_finite(const sinew_image *f, const char *what)
{
    for (int y = 0; y < f->height; y++)
        for (int x = 0; x < 2 * f->width; x++)
            if (!isfinite(sinew_image_row_f32(f, y)[x]))
                fail_msg("%s: non-finite flow at (%d, %d)", what, x / 2, y);
}

/* Every preset on every tiny shape, gray/RGB/RGBA, 8 and 16 bits, textured, flat and
 * saturated frames: documented result is a finite vector everywhere. */
static void test_hostile_estimator_tiny_and_flat(void **state)
{
    tu_fixture *f = *state;
    sinew_ctx *ctx = f->ctx;
    sinew_ctx_set_threads(ctx, 1);
    const char *presets[] = {"fast", "balanced", "accurate", "baseline"};
    const int kinds[][2] = {{1, SINEW_U8}, {3, SINEW_U16}, {4, SINEW_U8}, {2, SINEW_U16}};
    for (int i = 0; i < NSHAPES; i++)
        for (int k = 0; k < 4; k++)
            for (int content = 0; content < 3; content++) {
                int w = shapes[i][0], h = shapes[i][1];
                sinew_image f0, f1, fwd, bwd;
                make_frame(ctx, &f0, w, h, kinds[k][0], (sinew_type)kinds[k][1]);
                make_frame(ctx, &f1, w, h, kinds[k][0], (sinew_type)kinds[k][1]);
                if (content > 0) { /* flat black, or flat full scale */
                    for (int y = 0; y < h; y++) {
                        memset(sinew_image_row(&f0, y), content == 1 ? 0 : 0xFF,
                               (size_t)w * (size_t)kinds[k][0] * sinew_type_size(f0.type));
                        memset(sinew_image_row(&f1, y), content == 1 ? 0 : 0xFF,
                               (size_t)w * (size_t)kinds[k][0] * sinew_type_size(f1.type));
                    }
                }
                assert_int_equal(sinew_image_alloc(ctx, &fwd, w, h, 2, SINEW_F32), SINEW_OK);
                assert_int_equal(sinew_image_alloc(ctx, &bwd, w, h, 2, SINEW_F32), SINEW_OK);
                char what[96];
                snprintf(what, sizeof what, "estimator %s %dx%d kind %d content %d",
                         presets[(i + k + content) % 4], w, h, k, content);
                must_ok(ctx, estimate(ctx, presets[(i + k + content) % 4], &f0, &f1, &fwd, &bwd),
                        what);
                assert_flow_finite(&fwd, what);
                assert_flow_finite(&bwd, what);
                sinew_image *all[] = {&f0, &f1, &fwd, &bwd};
                for (int a = 0; a < 4; a++)
                    sinew_image_free(all[a]);
            }
}

static void test_hostile_estimator_mismatch_and_params(void **state)
{
    tu_fixture *f = *state;
    sinew_ctx *ctx = f->ctx;
    sinew_image a, b, c16, fl, fwd, small;
    make_frame(ctx, &a, 6, 5, 3, SINEW_U8);
    make_frame(ctx, &b, 5, 6, 3, SINEW_U8);
    make_frame(ctx, &c16, 6, 5, 3, SINEW_U16);
    make_flow(ctx, &fl, 6, 5, 0, 0);
    assert_int_equal(sinew_image_alloc(ctx, &fwd, 6, 5, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &small, 5, 5, 2, SINEW_F32), SINEW_OK);
    must_fail(ctx, estimate(ctx, "fast", &a, &b, &fwd, NULL), "frames 6x5 and 5x6");
    must_fail(ctx, estimate(ctx, "fast", &a, &c16, &fwd, NULL), "8-bit and 16-bit frames");
    must_fail(ctx, estimate(ctx, "fast", &fl, &fl, &fwd, NULL), "flow as frames");
    must_fail(ctx, estimate(ctx, "fast", &a, &a, &small, NULL), "output of the wrong size");
    must_fail(ctx, estimate(ctx, "fast", &a, &a, &fwd, &small), "backward of the wrong size");
    sinew_flow_params p;
    assert_int_equal(sinew_flow_params_preset(&p, "nope"), SINEW_EINVAL);
    assert_int_equal(sinew_flow_params_preset(&p, NULL), SINEW_EINVAL);
    /* every field out of its documented range */
    for (int k = 0; k < 16; k++) {
        assert_int_equal(sinew_flow_params_preset(&p, "balanced"), SINEW_OK);
        switch (k) {
        case 0:
            p.levels = -1;
            break;
        case 1:
            p.levels = 13;
            break;
        case 2:
            p.dis_patch = 3;
            break;
        case 3:
            p.dis_patch = 33;
            break;
        case 4:
            p.dis_stride = 0;
            break;
        case 5:
            p.dis_iters = 0;
            break;
        case 6:
            p.warps = 51;
            break;
        case 7:
            p.outer = 0;
            break;
        case 8:
            p.inner = 201;
            break;
        case 9:
            p.alpha = NAN;
            break;
        case 10:
            p.alpha = 0;
            break;
        case 11:
            p.gamma = -INFINITY;
            break;
        case 12:
            p.eps = 0;
            break;
        case 13:
            p.omega = 2;
            break;
        case 14:
            p.median = 3;
            break;
        case 15:
            p.method = (sinew_flow_method)7;
            break;
        }
        char what[40];
        snprintf(what, sizeof what, "flow parameter case %d", k);
        sinew_estimator *est = NULL;
        must_fail(ctx, sinew_estimator_new(ctx, &est, &p), what);
        assert_null(est);
    }
    sinew_image *all[] = {&a, &b, &c16, &fl, &fwd, &small};
    for (int i = 0; i < 6; i++)
        sinew_image_free(all[i]);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_hostile_tiny_shapes_every_stage, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_hostile_uniform_nasty_flow, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_hostile_draw_primitives, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_hostile_check_parameters, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_hostile_match_parameters, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_hostile_draw_parameters, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_hostile_sparsification, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_hostile_depth_scale_and_range, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_hostile_intrinsics, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_hostile_mismatched_sizes, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_hostile_image_dimensions, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_hostile_null_arguments, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_hostile_limits_before_allocation, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_hostile_text_and_json_limits, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_hostile_estimator_tiny_and_flat, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_hostile_estimator_mismatch_and_params,
                                        tu_fixture_setup, tu_fixture_teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
