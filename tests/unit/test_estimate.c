/* SPDX-License-Identifier: MIT */
/* Unit tests for the flow estimator (flow/estimate.h): exact zero flow on identical
 * frames, known sub-pixel translation and rotation of a synthetic smooth texture,
 * colour frames, the backward field, thread-count determinism, buffer and pyramid reuse,
 * argument checks, allocation failures, accuracy bounds on published data, and
 * regression bounds on the demo scene's exact flow. */
#include "tests/support/testutil.h"

#include <math.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "flow/estimate.h"
#include "flow/synth.h"

#define PI 3.14159265358979323846

/* Per-pair EPE bounds for the "fast" and "accurate" presets: measured value x 1.1 + 0.02,
 * rounded up (see check_pair). Measured 2026-12-02 with the sigma-0.9 first halving and,
 * for accurate, candidate selection at the two finest levels:
 *   fast:     Dimetrodon 0.3362, Grove2 0.2682, Grove3 0.8940, Hydrangea 0.4084,
 *             RubberWhale 0.3323, Urban2 0.6560, Urban3 1.0680, Venus 0.5389;
 *             chairs 5.0232, 1.7953
 *   accurate: Dimetrodon 0.1655, Grove2 0.1413, Grove3 0.5176, Hydrangea 0.2015,
 *             RubberWhale 0.1027, Urban2 0.2701, Urban3 0.3508, Venus 0.2249;
 *             chairs 3.5397, 0.9427
 *   accurate with the large-displacement stage (2026-12-05, issue 15): Dimetrodon 0.1655,
 *             Grove2 0.1412, Grove3 0.5184, Hydrangea 0.2015, RubberWhale 0.1027,
 *             Urban2 0.2897, Urban3 0.3411, Venus 0.2246; chairs 3.517, 0.942
 *   ... with its start chosen by descriptor cost before refining (2026-12-05): Dimetrodon
 *             0.1655, Grove2 0.1413, Grove3 0.5155, Hydrangea 0.2015, RubberWhale 0.1027,
 *             Urban2 0.2707, Urban3 0.3451, Venus 0.2244; chairs 3.4925, 0.9062 (bounds)
 *   ... with EpicFlow's affine fits in the interpolation (2026-12-05): Grove3 0.5164,
 *             Urban2 0.2703, Urban3 0.3513, Venus 0.2249, others unchanged; chairs
 *             3.5087, 0.9370 (within the bounds below)
 * Urban3 moves by up to 0.1 px with small parameter changes (a striped facade whose
 * vertical motion the data term barely sees), so its margin is not slack. */
#define MIDDLEBURY_BOUNDS                                                                          \
    {"Dimetrodon", 0.39, 0.21}, {"Grove2", 0.32, 0.18}, {"Grove3", 1.01, 0.59},                    \
        {"Hydrangea", 0.47, 0.25}, {"RubberWhale", 0.39, 0.14}, {"Urban2", 0.75, 0.32},            \
        {"Urban3", 1.20, 0.40},                                                                    \
    {                                                                                              \
        "Venus", 0.62, 0.27                                                                        \
    }
#define CHAIRS_BOUNDS                                                                              \
    {5.55, 2.00},                                                                                  \
    {                                                                                              \
        3.87, 1.02                                                                                 \
    } /* fast, accurate */
/* Banded solve vs whole-level solve, EPE difference against the exact rotation: measured
 * below 1e-7 on this smooth texture (2026-12-02); on real pairs with occlusions it is
 * larger (accurate preset, --work-mib 1: Urban3 +0.0004 px, Grove3 -0.0002 px; see
 * docs/benchmarks.md), so the bound allows 0.001. */
#define BANDS_EPE_DIFF 0.001

/* Smooth textured test pattern (invented for these tests), values in about [10, 245]. */
static double pattern(double x, double y, int c)
{
    double ph = 0.7 * c;
    return 128.0 + 45.0 * sin(0.31 * x + 0.17 * y + ph) + 35.0 * sin(0.13 * x - 0.29 * y) +
           25.0 * cos(0.07 * x * 0.9 + 0.05 * y * y / 40.0 + ph) +
           15.0 * sin(0.53 * x + 0.41 * y - ph);
}

/* Frame whose pixel (x, y) shows the pattern at map(x, y). */
typedef void (*mapfn)(double x, double y, double *sx, double *sy, const double *a);

static void make_frame(sinew_ctx *ctx, sinew_image *img, int w, int h, int ch, mapfn map,
                       const double *a)
{
    assert_int_equal(sinew_image_alloc(ctx, img, w, h, ch, SINEW_U16), SINEW_OK);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            double sx = x, sy = y;
            if (map)
                map(x, y, &sx, &sy, a);
            for (int c = 0; c < ch; c++) {
                double val = pattern(sx, sy, c) * 257.0;
                sinew_image_row_u16(img, y)[x * ch + c] = (uint16_t)lround(val);
            }
        }
}

/* frame1(x) = pattern(x - d): frame0(x) matches frame1(x + d), flow = d. */
static void map_shift(double x, double y, double *sx, double *sy, const double *a)
{
    *sx = x - a[0];
    *sy = y - a[1];
}

/* frame1(x) = pattern(R^-1 (x - c) + c): flow(x) = R (x - c) + c - x. a = {angle, cx, cy}. */
static void map_rot(double x, double y, double *sx, double *sy, const double *a)
{
    double c = cos(-a[0]), s = sin(-a[0]);
    double dx = x - a[1], dy = y - a[2];
    *sx = c * dx - s * dy + a[1];
    *sy = s * dx + c * dy + a[2];
}

/* Mean endpoint error against a flow function over pixels at least `m` from the border. */
static double epe_interior(const sinew_image *f, int m, mapfn truth, const double *a)
{
    double sum = 0;
    long n = 0;
    for (int y = m; y < f->height - m; y++)
        for (int x = m; x < f->width - m; x++) {
            double gu, gv;
            truth(x, y, &gu, &gv, a);
            const float *p = sinew_image_row_f32(f, y) + 2 * x;
            sum += hypot(p[0] - gu, p[1] - gv);
            n++;
        }
    return sum / (double)n;
}

static void truth_shift(double x, double y, double *u, double *v, const double *a)
{
    (void)x;
    (void)y;
    *u = a[0];
    *v = a[1];
}

static void truth_rot(double x, double y, double *u, double *v, const double *a)
{
    double c = cos(a[0]), s = sin(a[0]);
    double dx = x - a[1], dy = y - a[2];
    *u = c * dx - s * dy + a[1] - x;
    *v = s * dx + c * dy + a[2] - y;
}

static void truth_neg_shift(double x, double y, double *u, double *v, const double *a)
{
    truth_shift(x, y, u, v, a);
    *u = -*u;
    *v = -*v;
}

static sinew_estimator *new_est(sinew_ctx *ctx, const char *preset)
{
    sinew_flow_params p;
    assert_int_equal(sinew_flow_params_preset(&p, preset), SINEW_OK);
    sinew_estimator *e = NULL;
    assert_int_equal(sinew_estimator_new(ctx, &e, &p), SINEW_OK);
    return e;
}

static void test_estimate_identical_frames_zero_flow(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image f0, fl;
    make_frame(ctx, &f0, 90, 70, 1, NULL, NULL);
    assert_int_equal(sinew_image_alloc(ctx, &fl, 90, 70, 2, SINEW_F32), SINEW_OK);
    const char *presets[] = {"fast", "balanced", "accurate", "baseline"};
    for (int k = 0; k < 4; k++) {
        sinew_estimator *e = new_est(ctx, presets[k]);
        assert_int_equal(sinew_estimator_run(e, &fl, NULL, &f0, &f0), SINEW_OK);
        for (int y = 0; y < fl.height; y++)
            for (int x = 0; x < 2 * fl.width; x++)
                assert_true(sinew_image_row_f32(&fl, y)[x] == 0.0f);
        sinew_estimator_free(e);
    }
    sinew_image_free(&f0);
    sinew_image_free(&fl);
    sinew_ctx_free(ctx);
}

static void check_shift(const char *preset, int ch, double du, double dv, double bound)
{
    sinew_ctx *ctx = sinew_ctx_new();
    double a[2] = {du, dv};
    sinew_image f0, f1, fl, bl;
    make_frame(ctx, &f0, 128, 96, ch, NULL, NULL);
    make_frame(ctx, &f1, 128, 96, ch, map_shift, a);
    assert_int_equal(sinew_image_alloc(ctx, &fl, 128, 96, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &bl, 128, 96, 2, SINEW_F32), SINEW_OK);
    sinew_estimator *e = new_est(ctx, preset);
    assert_int_equal(sinew_estimator_run(e, &fl, &bl, &f0, &f1), SINEW_OK);
    double ef = epe_interior(&fl, 8, truth_shift, a);
    double eb = epe_interior(&bl, 8, truth_neg_shift, a);
    printf("# %s ch=%d shift (%.2f, %.2f): EPE fwd %.4f bwd %.4f\n", preset, ch, du, dv, ef, eb);
    assert_true(ef < bound);
    assert_true(eb < bound);
    sinew_estimator_free(e);
    sinew_image_free(&f0);
    sinew_image_free(&f1);
    sinew_image_free(&fl);
    sinew_image_free(&bl);
    sinew_ctx_free(ctx);
}

/* Sub-pixel translation: ground truth is exact by construction (the pattern is sampled
 * analytically at shifted positions). Bounds: measured value (printed) times ~3. */
static void test_estimate_subpixel_translation(void **state)
{
    (void)state;
    check_shift("balanced", 1, 1.3, -0.7, 0.01);   /* measured 0.0025 */
    check_shift("accurate", 1, -0.45, 0.25, 0.01); /* measured 0.0014 */
    check_shift("fast", 1, 2.6, 1.2, 0.06);        /* measured 0.022 */
}

static void test_estimate_large_translation(void **state)
{
    (void)state;
    check_shift("balanced", 1, 9.4, -6.2, 0.02); /* measured 0.005 */
}

static void test_estimate_colour_translation(void **state)
{
    (void)state;
    check_shift("balanced", 3, -1.6, 0.8, 0.01); /* measured 0.0014 */
}

static void test_estimate_rotation(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    double a[3] = {3.0 * PI / 180.0, 63.5, 47.5};
    sinew_image f0, f1, fl;
    make_frame(ctx, &f0, 128, 96, 1, NULL, NULL);
    make_frame(ctx, &f1, 128, 96, 1, map_rot, a);
    assert_int_equal(sinew_image_alloc(ctx, &fl, 128, 96, 2, SINEW_F32), SINEW_OK);
    sinew_estimator *e = new_est(ctx, "balanced");
    assert_int_equal(sinew_estimator_run(e, &fl, NULL, &f0, &f1), SINEW_OK);
    double ef = epe_interior(&fl, 10, truth_rot, a);
    printf("# rotation 3 deg: EPE %.4f\n", ef);
    assert_true(ef < 0.08); /* measured 0.030 */
    sinew_estimator_free(e);
    sinew_image_free(&f0);
    sinew_image_free(&f1);
    sinew_image_free(&fl);
    sinew_ctx_free(ctx);
}

static int flows_equal(const sinew_image *a, const sinew_image *b)
{
    for (int y = 0; y < a->height; y++)
        if (memcmp(sinew_image_row(a, y), sinew_image_row(b, y), (size_t)a->width * 8))
            return 0;
    return 1;
}

/* Flow of a w x h pair rotated by 4 degrees about (0.38 w, 0.4 h) with parameters p.
 * bwd may be NULL. */
static void run_rotation(const sinew_flow_params *p, int threads, int w, int h, int ch,
                         sinew_image *out, sinew_image *bwd)
{
    sinew_ctx *ctx = sinew_ctx_new();
    assert_int_equal(sinew_ctx_set_threads(ctx, threads), SINEW_OK);
    double a[3] = {4.0 * PI / 180.0, 0.38 * w, 0.4 * h};
    sinew_image f0, f1;
    make_frame(ctx, &f0, w, h, ch, NULL, NULL);
    make_frame(ctx, &f1, w, h, ch, map_rot, a);
    sinew_estimator *e = NULL;
    assert_int_equal(sinew_estimator_new(ctx, &e, p), SINEW_OK);
    assert_int_equal(sinew_estimator_run(e, out, bwd, &f0, &f1), SINEW_OK);
    sinew_estimator_free(e);
    sinew_image_free(&f0);
    sinew_image_free(&f1);
    sinew_ctx_free(ctx);
}

static void run_sized(const char *preset, int threads, int w, int h, int ch, sinew_image *out,
                      sinew_image *bwd)
{
    sinew_flow_params p;
    assert_int_equal(sinew_flow_params_preset(&p, preset), SINEW_OK);
    run_rotation(&p, threads, w, h, ch, out, bwd);
}

static void run_threads(const char *preset, int threads, int ch, sinew_image *out, sinew_image *bwd)
{
    run_sized(preset, threads, 133, 101, ch, out, bwd);
}

static void test_estimate_threads_bit_identical(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    const char *presets[] = {"fast", "balanced", "accurate", "baseline"};
    for (int k = 0; k < 4; k++) {
        sinew_image ref, refb, o, ob;
        assert_int_equal(sinew_image_alloc(ctx, &ref, 133, 101, 2, SINEW_F32), SINEW_OK);
        assert_int_equal(sinew_image_alloc(ctx, &refb, 133, 101, 2, SINEW_F32), SINEW_OK);
        assert_int_equal(sinew_image_alloc(ctx, &o, 133, 101, 2, SINEW_F32), SINEW_OK);
        assert_int_equal(sinew_image_alloc(ctx, &ob, 133, 101, 2, SINEW_F32), SINEW_OK);
        int ch = k == 1 ? 3 : 1;
        run_threads(presets[k], 1, ch, &ref, &refb);
        for (int t = 2; t <= 4; t += 2) {
            run_threads(presets[k], t, ch, &o, &ob);
            for (int y = 0; y < ref.height; y++) {
                assert_memory_equal(sinew_image_row(&ref, y), sinew_image_row(&o, y),
                                    (size_t)ref.width * 8);
                assert_memory_equal(sinew_image_row(&refb, y), sinew_image_row(&ob, y),
                                    (size_t)ref.width * 8);
            }
        }
        sinew_image_free(&ref);
        sinew_image_free(&refb);
        sinew_image_free(&o);
        sinew_image_free(&ob);
    }
    sinew_ctx_free(ctx);
}

/* Frames down to one pixel wide or tall reach every border case of the red/black solver
 * (first and last row, first and last column, rows with no pixel of one colour, thread
 * blocks of odd width): the flow is finite and the same for 1 and 2 threads. */
static void test_estimate_thin_frames_thread_identical(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    const int sizes[][2] = {{1, 9}, {9, 1}, {2, 3}, {3, 2}, {7, 40}, {41, 50}};
    const char *presets[] = {"fast", "balanced", "accurate"};
    for (size_t i = 0; i < sizeof sizes / sizeof sizes[0]; i++)
        for (int k = 0; k < 3; k++) {
            int w = sizes[i][0], h = sizes[i][1];
            sinew_image ref, o;
            assert_int_equal(sinew_image_alloc(ctx, &ref, w, h, 2, SINEW_F32), SINEW_OK);
            assert_int_equal(sinew_image_alloc(ctx, &o, w, h, 2, SINEW_F32), SINEW_OK);
            run_sized(presets[k], 1, w, h, k == 1 ? 3 : 1, &ref, NULL);
            run_sized(presets[k], 2, w, h, k == 1 ? 3 : 1, &o, NULL);
            assert_true(flows_equal(&ref, &o));
            for (int y = 0; y < h; y++)
                for (int x = 0; x < 2 * w; x++)
                    assert_true(isfinite(sinew_image_row_f32(&ref, y)[x]));
            sinew_image_free(&ref);
            sinew_image_free(&o);
        }
    sinew_ctx_free(ctx);
}

/* A work budget too small for a level's solver planes (work_mib 1 against 4.6 MB for the
 * finest level of 320 x 200) makes the solver run in bands of rows with overlapping
 * context: the flow is the same for 1, 2 and 3 threads, and as accurate as the whole-
 * level solve against the exact rotation (BANDS_EPE_DIFF). */
static void test_estimate_bands_match_whole(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    int w = 320, h = 200;
    double a[3] = {4.0 * PI / 180.0, 0.38 * w, 0.4 * h};
    const char *presets[] = {"balanced", "accurate"};
    for (int k = 0; k < 2; k++) {
        sinew_flow_params p;
        assert_int_equal(sinew_flow_params_preset(&p, presets[k]), SINEW_OK);
        sinew_image whole, band, o;
        assert_int_equal(sinew_image_alloc(ctx, &whole, w, h, 2, SINEW_F32), SINEW_OK);
        assert_int_equal(sinew_image_alloc(ctx, &band, w, h, 2, SINEW_F32), SINEW_OK);
        assert_int_equal(sinew_image_alloc(ctx, &o, w, h, 2, SINEW_F32), SINEW_OK);
        run_rotation(&p, 2, w, h, 1, &whole, NULL);
        p.work_mib = 1;
        run_rotation(&p, 1, w, h, 1, &band, NULL);
        assert_false(flows_equal(&whole, &band)); /* the bands did run */
        for (int t = 2; t <= 3; t++) {
            run_rotation(&p, t, w, h, 1, &o, NULL);
            assert_true(flows_equal(&band, &o));
        }
        double ew = epe_interior(&whole, 10, truth_rot, a);
        double eb = epe_interior(&band, 10, truth_rot, a);
        printf("# %s rotation 320x200: EPE whole %.7f, bands %.7f\n", presets[k], ew, eb);
        assert_true(fabs(eb - ew) < BANDS_EPE_DIFF);
        sinew_image_free(&whole);
        sinew_image_free(&band);
        sinew_image_free(&o);
    }
    sinew_ctx_free(ctx);
}

/* A sequence run (pyramid of frame 1 reused as frame 0) gives the same bits as a fresh
 * estimator; repeated runs on the same estimator are reproducible. */
static void test_estimate_sequence_reuse(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    double a1[2] = {0.8, 0.3}, a2[2] = {1.9, -0.4};
    sinew_image f0, f1, f2, x, y, z;
    make_frame(ctx, &f0, 100, 80, 3, NULL, NULL);
    make_frame(ctx, &f1, 100, 80, 3, map_shift, a1);
    make_frame(ctx, &f2, 100, 80, 3, map_shift, a2);
    assert_int_equal(sinew_image_alloc(ctx, &x, 100, 80, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &y, 100, 80, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &z, 100, 80, 2, SINEW_F32), SINEW_OK);
    sinew_estimator *e = new_est(ctx, "balanced");
    assert_int_equal(sinew_estimator_run(e, &x, NULL, &f0, &f1), SINEW_OK);
    assert_int_equal(sinew_estimator_run(e, &y, NULL, &f1, &f2), SINEW_OK);
    sinew_estimator *fresh = new_est(ctx, "balanced");
    assert_int_equal(sinew_estimator_run(fresh, &z, NULL, &f1, &f2), SINEW_OK);
    assert_true(flows_equal(&y, &z));
    assert_int_equal(sinew_estimator_run(e, &z, NULL, &f0, &f1), SINEW_OK);
    assert_true(flows_equal(&x, &z));
    /* a different size on the same estimator re-sizes its buffers */
    sinew_image g0, g1, gf;
    make_frame(ctx, &g0, 70, 50, 1, NULL, NULL);
    make_frame(ctx, &g1, 70, 50, 1, map_shift, a1);
    assert_int_equal(sinew_image_alloc(ctx, &gf, 70, 50, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_estimator_run(e, &gf, NULL, &g0, &g1), SINEW_OK);
    assert_true(epe_interior(&gf, 8, truth_shift, a1) < 0.1);
    sinew_estimator_free(e);
    sinew_estimator_free(fresh);
    sinew_image *imgs[] = {&f0, &f1, &f2, &x, &y, &z, &g0, &g1, &gf};
    for (size_t i = 0; i < sizeof imgs / sizeof imgs[0]; i++)
        sinew_image_free(imgs[i]);
    sinew_ctx_free(ctx);
}

static void test_estimate_bad_arguments(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_flow_params p;
    assert_int_equal(sinew_flow_params_preset(&p, "nonsense"), SINEW_EINVAL);
    assert_int_equal(sinew_flow_params_preset(NULL, "fast"), SINEW_EINVAL);
    sinew_estimator *e = NULL;
    /* one out-of-range field at a time, from the fast preset: EINVAL naming the field */
    static const struct {
        const char *field;
        size_t off;
        int is_float;
        double bad;
    } bad[] = {
        {"omega", offsetof(sinew_flow_params, omega), 1, 2.5},
        {"dis_stride", offsetof(sinew_flow_params, dis_stride), 0, 99},
        {"alpha", offsetof(sinew_flow_params, alpha), 1, NAN},
        {"wmedian", offsetof(sinew_flow_params, wmedian), 0, 11},
        {"wmedian_band", offsetof(sinew_flow_params, wmedian_band), 1, NAN},
        {"warps_fine", offsetof(sinew_flow_params, warps_fine), 0, 51},
        {"fine_levels", offsetof(sinew_flow_params, fine_levels), 0, 0},
        {"fuse_levels", offsetof(sinew_flow_params, fuse_levels), 0, 13},
        {"work_mib", offsetof(sinew_flow_params, work_mib), 0, 0},
    };
    for (size_t k = 0; k < sizeof bad / sizeof bad[0]; k++) {
        assert_int_equal(sinew_flow_params_preset(&p, "fast"), SINEW_OK);
        char *field = (char *)&p + bad[k].off;
        if (bad[k].is_float)
            *(float *)(void *)field = (float)bad[k].bad;
        else
            *(int *)(void *)field = (int)bad[k].bad;
        assert_int_equal(sinew_estimator_new(ctx, &e, &p), SINEW_EINVAL);
        assert_null(e);
        if (!strstr(sinew_ctx_message(ctx), bad[k].field))
            fail_msg("%s: message '%s'", bad[k].field, sinew_ctx_message(ctx));
    }
    assert_int_equal(sinew_flow_params_preset(&p, "fast"), SINEW_OK);
    assert_int_equal(sinew_estimator_new(ctx, &e, &p), SINEW_OK);
    sinew_image a, b, fl, small, f32;
    make_frame(ctx, &a, 40, 30, 1, NULL, NULL);
    make_frame(ctx, &b, 41, 30, 1, NULL, NULL);
    assert_int_equal(sinew_image_alloc(ctx, &fl, 40, 30, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &small, 20, 30, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &f32, 40, 30, 1, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_estimator_run(e, &fl, NULL, &a, &b), SINEW_ESIZE);
    assert_int_equal(sinew_estimator_run(e, &small, NULL, &a, &a), SINEW_ESIZE);
    assert_int_equal(sinew_estimator_run(e, &fl, &small, &a, &a), SINEW_ESIZE);
    assert_int_equal(sinew_estimator_run(e, &f32, NULL, &a, &a), SINEW_EINVAL);
    assert_int_equal(sinew_estimator_run(e, &fl, NULL, &f32, &f32), SINEW_EINVAL);
    assert_int_equal(sinew_estimator_run(e, NULL, NULL, &a, &a), SINEW_EINVAL);
    assert_int_equal(sinew_estimator_run(NULL, &fl, NULL, &a, &a), SINEW_EINVAL);
    /* tiny frames still work (single level, no patch search) */
    sinew_image t0, tf;
    make_frame(ctx, &t0, 3, 2, 1, NULL, NULL);
    assert_int_equal(sinew_image_alloc(ctx, &tf, 3, 2, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_estimator_run(e, &tf, NULL, &t0, &t0), SINEW_OK);
    sinew_estimator_free(e);
    sinew_estimator_free(NULL);
    sinew_image *imgs[] = {&a, &b, &fl, &small, &f32, &t0, &tf};
    for (size_t i = 0; i < sizeof imgs / sizeof imgs[0]; i++)
        sinew_image_free(imgs[i]);
    sinew_ctx_free(ctx);
}

/* Every allocation failure is reported as ENOMEM without leaks. */
/* tu_fail_each_allocation: a balanced estimate of a frame against itself */
typedef struct alloc_job {
    const sinew_image *frame;
    sinew_image *flow;
} alloc_job;

static int estimate_op(sinew_ctx *ctx, void *ud)
{
    alloc_job *j = ud;
    sinew_flow_params p;
    sinew_flow_params_preset(&p, "balanced");
    sinew_estimator *e = NULL;
    int st = sinew_estimator_new(ctx, &e, &p);
    if (st == SINEW_OK)
        st = sinew_estimator_run(e, j->flow, NULL, j->frame, j->frame);
    sinew_estimator_free(e);
    return st;
}

static void test_estimate_alloc_failure_is_clean(void **state)
{
    (void)state;
    sinew_ctx *plain = sinew_ctx_new();
    sinew_image f0, fl;
    make_frame(plain, &f0, 48, 40, 1, NULL, NULL);
    assert_int_equal(sinew_image_alloc(plain, &fl, 48, 40, 2, SINEW_F32), SINEW_OK);
    alloc_job job = {&f0, &fl};
    tu_fail_each_allocation("estimator 48x40 gray", estimate_op, &job);
    sinew_image_free(&f0);
    sinew_image_free(&fl);
    sinew_ctx_free(plain);
}

/* Mean EPE over pixels with known ground truth. */
static double epe_gt(const sinew_image *f, const sinew_image *gt)
{
    double sum = 0;
    long n = 0;
    for (int y = 0; y < f->height; y++)
        for (int x = 0; x < f->width; x++) {
            const float *p = sinew_image_row_f32(f, y) + 2 * x;
            const float *g = sinew_image_row_f32(gt, y) + 2 * x;
            if (isnan(g[0]) || isnan(g[1]))
                continue;
            sum += hypot((double)p[0] - g[0], (double)p[1] - g[1]);
            n++;
        }
    return sum / (double)n;
}

/* Per-pair EPE with a preset against published ground truth. Bounds are the values
 * measured with this code plus a margin of about 10%. */
static void check_pair(const char *preset, const char *f0, const char *f1, const char *gtp,
                       double bound)
{
    char b0[1024], b1[1024], bg[1024];
    if (!tu_data_file(b0, sizeof b0, f0) || !tu_data_file(b1, sizeof b1, f1) ||
        !tu_data_file(bg, sizeof bg, gtp))
        skip();
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image a, b, gt, fl;
    assert_int_equal(sinew_image_read(ctx, &a, b0), SINEW_OK);
    assert_int_equal(sinew_image_read(ctx, &b, b1), SINEW_OK);
    assert_int_equal(sinew_flow_read(ctx, &gt, bg, SINEW_FLOW_AUTO), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &fl, a.width, a.height, 2, SINEW_F32), SINEW_OK);
    sinew_estimator *e = new_est(ctx, preset);
    assert_int_equal(sinew_estimator_run(e, &fl, NULL, &a, &b), SINEW_OK);
    double epe = epe_gt(&fl, &gt);
    printf("# %s, %s: EPE %.4f (bound %.3f)\n", f0, preset, epe, bound);
    assert_true(epe < bound);
    sinew_estimator_free(e);
    sinew_image_free(&a);
    sinew_image_free(&b);
    sinew_image_free(&gt);
    sinew_image_free(&fl);
    sinew_ctx_free(ctx);
}

/* The demo scene (flow/synth.h, seed 1, 640x480, frames 0 -> 1): exact ray-cast flow
 * from our own invented scene, so these are regression bounds (measured x 1.1 + 0.02),
 * not an external check; the published-data bounds are the tests above and below.
 * Measured 2026-12-02 with the sigma-0.9 first halving: fast 0.2281, balanced 0.1379
 * (before it 0.2979 and 0.2082; mean EPE over the pixels that see a surface, occluded
 * ones included). */
#define DEMO_FAST_BOUND 0.28
#define DEMO_BAL_BOUND 0.18
static void test_estimate_demo_scene_epe(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_synth_params sp;
    sinew_synth_params_default(&sp);
    sp.frames = 2;
    sinew_synth *s = NULL;
    assert_int_equal(sinew_synth_new(ctx, &s, &sp), SINEW_OK);
    sinew_image a, b, gt, fl;
    assert_int_equal(sinew_image_alloc(ctx, &a, sp.width, sp.height, 3, SINEW_U8), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &b, sp.width, sp.height, 3, SINEW_U8), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &gt, sp.width, sp.height, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &fl, sp.width, sp.height, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_synth_render(s, 0, &a, NULL, NULL), SINEW_OK);
    assert_int_equal(sinew_synth_render(s, 1, &b, NULL, NULL), SINEW_OK);
    assert_int_equal(sinew_synth_truth(s, 0, 1, &gt, NULL, NULL), SINEW_OK);
    static const struct {
        const char *preset;
        double bound;
    } runs[] = {{"fast", DEMO_FAST_BOUND}, {"balanced", DEMO_BAL_BOUND}};
    for (size_t i = 0; i < sizeof runs / sizeof runs[0]; i++) {
        sinew_estimator *e = new_est(ctx, runs[i].preset);
        assert_int_equal(sinew_estimator_run(e, &fl, NULL, &a, &b), SINEW_OK);
        double epe = epe_gt(&fl, &gt);
        printf("# demo scene 0->1, %s: EPE %.4f (bound %.3f)\n", runs[i].preset, epe,
               runs[i].bound);
        assert_true(epe < runs[i].bound);
        sinew_estimator_free(e);
    }
    sinew_image *imgs[] = {&a, &b, &gt, &fl};
    for (size_t i = 0; i < sizeof imgs / sizeof imgs[0]; i++)
        sinew_image_free(imgs[i]);
    sinew_synth_free(s);
    sinew_ctx_free(ctx);
}

/* Middlebury "other" training pairs with ground truth: Baker, Scharstein, Lewis, Roth,
 * Black, Szeliski, "A Database and Evaluation Methodology for Optical Flow", IJCV 2011. */
static void test_estimate_middlebury_epe(void **state)
{
    (void)state;
    static const struct {
        const char *seq;
        double fast, accurate;
    } pairs[] = {MIDDLEBURY_BOUNDS};
    for (size_t i = 0; i < sizeof pairs / sizeof pairs[0]; i++) {
        char a[256], b[256], g[256];
        snprintf(a, sizeof a, "middlebury/%s/frame10.png", pairs[i].seq);
        snprintf(b, sizeof b, "middlebury/%s/frame11.png", pairs[i].seq);
        snprintf(g, sizeof g, "middlebury/%s/flow10.flo", pairs[i].seq);
        check_pair("fast", a, b, g, pairs[i].fast);
        check_pair("accurate", a, b, g, pairs[i].accurate);
    }
}

/* FlyingChairs example pairs: Dosovitskiy et al., "FlowNet: Learning Optical Flow with
 * Convolutional Networks", ICCV 2015. */
static void test_estimate_flyingchairs_epe(void **state)
{
    (void)state;
    static const double bounds[2][2] = {CHAIRS_BOUNDS};
    static const char *presets[2] = {"fast", "accurate"};
    for (int k = 0; k < 2; k++)
        for (int i = 0; i < 2; i++) {
            char a[256], b[256], g[256];
            snprintf(a, sizeof a, "flyingchairs/examples/%07d-img0.ppm", i);
            snprintf(b, sizeof b, "flyingchairs/examples/%07d-img1.ppm", i);
            snprintf(g, sizeof g, "flyingchairs/examples/%07d-gt.flo", i);
            check_pair(presets[k], a, b, g, bounds[k][i]);
        }
}

/* MPI-Sintel training pairs of the development set (Butler, Wulff, Stanley, Black, "A
 * Naturalistic Open Source Movie for Optical Flow Evaluation", ECCV 2012; one render pass
 * per scene: clean for alley_2 and scene_a, final for the others), accurate preset,
 * mean EPE over all pixels. Regression bounds (measured x 1.1 + 0.02, rounded up), not
 * targets: issue 15 asks for a mean of at most 24 over the five large-motion pairs and
 * each below zero flow (ambush_4 0004 is above its zero-flow EPE of 66.2).
 * Measured 2026-12-05 (large-displacement stage with affine fits): alley_2 0.1001,
 * ambush_2 66.34, ambush_4 0004 97.92, ambush_4 0006 45.69, temple_3 32.20, scene_a
 * 18.07. */
#define SINTEL_BOUNDS                                                                              \
    {"clean/alley_2", 2, 0.13}, {"final/ambush_2", 20, 73.0}, {"final/ambush_4", 4, 107.8},        \
        {"final/ambush_4", 6, 50.3}, {"final/temple_3", 22, 35.5},                                 \
    {                                                                                              \
        "clean/scene_a", 3, 19.9                                                                   \
    }
static void test_estimate_sintel_epe(void **state)
{
    (void)state;
    static const struct {
        const char *seq;
        int frame;
        double accurate;
    } pairs[] = {SINTEL_BOUNDS};
    for (size_t i = 0; i < sizeof pairs / sizeof pairs[0]; i++) {
        char a[256], b[256], g[256];
        const char *scene = strchr(pairs[i].seq, '/') + 1;
        snprintf(a, sizeof a, "sintel-dev/%s/frame_%04d.png", pairs[i].seq, pairs[i].frame);
        snprintf(b, sizeof b, "sintel-dev/%s/frame_%04d.png", pairs[i].seq, pairs[i].frame + 1);
        snprintf(g, sizeof g, "sintel-dev/flow/%s/frame_%04d.flo", scene, pairs[i].frame);
        check_pair("accurate", a, b, g, pairs[i].accurate);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_estimate_identical_frames_zero_flow),
        cmocka_unit_test(test_estimate_subpixel_translation),
        cmocka_unit_test(test_estimate_large_translation),
        cmocka_unit_test(test_estimate_colour_translation),
        cmocka_unit_test(test_estimate_rotation),
        cmocka_unit_test(test_estimate_threads_bit_identical),
        cmocka_unit_test(test_estimate_thin_frames_thread_identical),
        cmocka_unit_test(test_estimate_sequence_reuse),
        cmocka_unit_test(test_estimate_bands_match_whole),
        cmocka_unit_test(test_estimate_bad_arguments),
        cmocka_unit_test(test_estimate_alloc_failure_is_clean),
        cmocka_unit_test(test_estimate_demo_scene_epe),
        cmocka_unit_test(test_estimate_middlebury_epe),
        cmocka_unit_test(test_estimate_flyingchairs_epe),
        cmocka_unit_test(test_estimate_sintel_epe),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
