/* SPDX-License-Identifier: MIT */
/* Unit tests for flow/draw.c and flow/font.c: the colour wheel against an independent
 * re-implementation of its published construction, the colour map's lightness order,
 * and every picture on small known inputs. */
#include "tests/support/testutil.h"

#include <ctype.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define PI_T 3.14159265358979323846

/* ---- independent reference of the Middlebury colour code ----
 * Source: colorcode.cpp (D. Scharstein, 2007), the colour code published with the
 * Middlebury flow benchmark, Baker et al., IJCV 92(1):1-31, 2011. Written here in the published
 * loop style (a running column counter over six segments), separately from flow/draw.c's per-index
 * formula. */
enum { RY = 15, YG = 6, GC = 4, CB = 11, BM = 13, MR = 6, NCOLS = RY + YG + GC + CB + BM + MR };

static void ref_wheel(int wheel[NCOLS][3])
{
    int k = 0;
#define SETCOL(r, g, b) (wheel[k][0] = (r), wheel[k][1] = (g), wheel[k][2] = (b), k++)
    for (int i = 0; i < RY; i++)
        SETCOL(255, 255 * i / RY, 0);
    for (int i = 0; i < YG; i++)
        SETCOL(255 - 255 * i / YG, 255, 0);
    for (int i = 0; i < GC; i++)
        SETCOL(0, 255, 255 * i / GC);
    for (int i = 0; i < CB; i++)
        SETCOL(0, 255 - 255 * i / CB, 255);
    for (int i = 0; i < BM; i++)
        SETCOL(255 * i / BM, 0, 255);
    for (int i = 0; i < MR; i++)
        SETCOL(255, 0, 255 - 255 * i / MR);
#undef SETCOL
    assert_int_equal(k, 55);
}

/* computeColor of the same source, RGB order (the original writes BGR bytes). */
static void ref_colour(double fx, double fy, int rgb[3])
{
    int wheel[NCOLS][3];
    ref_wheel(wheel);
    double rad = sqrt(fx * fx + fy * fy);
    double a = atan2(-fy, -fx) / PI_T;
    double fk = (a + 1.0) / 2.0 * (NCOLS - 1);
    int k0 = (int)fk;
    int k1 = (k0 + 1) % NCOLS;
    double f = fk - k0;
    for (int b = 0; b < 3; b++) {
        double col0 = wheel[k0][b] / 255.0;
        double col1 = wheel[k1][b] / 255.0;
        double col = (1 - f) * col0 + f * col1;
        if (rad <= 1)
            col = 1 - rad * (1 - col);
        else
            col *= .75;
        rgb[b] = (int)(255.0 * col);
    }
}

static void expect_rgb(const uint8_t *p, int r, int g, int b)
{
    if (p[0] != r || p[1] != g || p[2] != b)
        fail_msg("pixel (%d,%d,%d), expected (%d,%d,%d)", p[0], p[1], p[2], r, g, b);
}

static const uint8_t *px(const sinew_image *img, int x, int y)
{
    return sinew_image_row_u8(img, y) + 3 * x;
}

static void test_draw_wheel_entries_match_construction(void **state)
{
    (void)state;
    int wheel[NCOLS][3];
    ref_wheel(wheel);
    for (int k = 0; k < NCOLS; k++) {
        uint8_t rgb[3];
        assert_int_equal(sinew_draw_wheel_entry(k, rgb), SINEW_OK);
        expect_rgb(rgb, wheel[k][0], wheel[k][1], wheel[k][2]);
        /* The direction that lands on entry k at radius 1 (fk = k). */
        double th = PI_T * (2.0 * k / (NCOLS - 1) - 1.0);
        double fx = -cos(th), fy = -sin(th);
        int ref[3];
        ref_colour(fx, fy, ref);
        sinew_draw_wheel_colour(fx, fy, rgb);
        expect_rgb(rgb, ref[0], ref[1], ref[2]);
        for (int b = 0; b < 3; b++) /* rounding of the angle may truncate one level */
            assert_true(abs(rgb[b] - wheel[k][b]) <= 1);
    }
    uint8_t rgb[3];
    assert_int_equal(sinew_draw_wheel_entry(-1, rgb), SINEW_EINVAL);
    assert_int_equal(sinew_draw_wheel_entry(55, rgb), SINEW_EINVAL);
    /* Segment starts worked by hand from the segment table of colorcode.cpp:
     * 0 red, 15 yellow, 21 green, 25 cyan, 36 blue, 49 magenta, 7 = 255*7/15 = 119 green,
     * 54 = 255 - 255*5/6 = 43 blue. */
    const int hand[][4] = {{0, 255, 0, 0},    {7, 255, 119, 0},  {15, 255, 255, 0},
                           {21, 0, 255, 0},   {25, 0, 255, 255}, {36, 0, 0, 255},
                           {49, 255, 0, 255}, {54, 255, 0, 43}};
    for (size_t i = 0; i < sizeof hand / sizeof hand[0]; i++) {
        sinew_draw_wheel_entry(hand[i][0], rgb);
        expect_rgb(rgb, hand[i][1], hand[i][2], hand[i][3]);
    }
}

static void test_draw_wheel_interpolated_directions(void **state)
{
    (void)state;
    const double dirs[][2] = {{0.3, 0.1},   {-0.2, 0.7},  {0.05, -0.9}, {-0.6, -0.6},
                              {0.71, 0.7},  {-1.0, 0.02}, {0.0, 1.0},   {0.0, -0.5},
                              {0.4, -0.35}, {-0.12, 0.2}, {0.9, 0.43},  {0.5, 0.0}};
    for (size_t i = 0; i < sizeof dirs / sizeof dirs[0]; i++) {
        for (double s = 0.25; s <= 2.0; s += 0.25) {
            uint8_t rgb[3];
            int ref[3];
            ref_colour(dirs[i][0] * s, dirs[i][1] * s, ref);
            sinew_draw_wheel_colour(dirs[i][0] * s, dirs[i][1] * s, rgb);
            expect_rgb(rgb, ref[0], ref[1], ref[2]);
        }
    }
}

static void test_draw_wheel_white_black_and_out_of_range(void **state)
{
    (void)state;
    uint8_t rgb[3];
    sinew_draw_wheel_colour(0, 0, rgb); /* zero motion: white (radius 0 -> col = 1) */
    expect_rgb(rgb, 255, 255, 255);
    sinew_draw_wheel_colour(NAN, 0, rgb); /* unknown: black */
    expect_rgb(rgb, 0, 0, 0);
    sinew_draw_wheel_colour(0, INFINITY, rgb);
    expect_rgb(rgb, 0, 0, 0);
    /* Rightward motion is entry 0 (red); radius 2 darkens by 0.75: 255*0.75 = 191.25. */
    sinew_draw_wheel_colour(1, 0, rgb);
    expect_rgb(rgb, 255, 0, 0);
    sinew_draw_wheel_colour(2, 0, rgb);
    expect_rgb(rgb, 191, 0, 0);
    /* Half radius: 1 - 0.5 * (1 - 0) = 0.5 -> 127 for the empty channels. */
    sinew_draw_wheel_colour(0.5, 0, rgb);
    expect_rgb(rgb, 255, 127, 127);
}

static sinew_image make_flow(sinew_ctx *ctx, int w, int h)
{
    sinew_image f;
    assert_int_equal(sinew_image_alloc(ctx, &f, w, h, 2, SINEW_F32), SINEW_OK);
    return f;
}

static void set_uv(sinew_image *f, int x, int y, float u, float v)
{
    sinew_image_row_f32(f, y)[2 * x] = u;
    sinew_image_row_f32(f, y)[2 * x + 1] = v;
}

static void test_draw_flow_pixels_and_max(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image f = make_flow(ctx, 4, 3);
    set_uv(&f, 0, 0, 3, 0);
    set_uv(&f, 1, 0, 6, 0);
    set_uv(&f, 2, 0, NAN, 1);
    set_uv(&f, 3, 2, 0, -4);
    double m;
    assert_int_equal(sinew_draw_max_magnitude(ctx, &m, &f), SINEW_OK);
    assert_true(m == 6.0);
    sinew_image out;
    /* Fixed maximum 3: (3,0) at radius 1 is pure red, (6,0) out of range 0.75 red. */
    assert_int_equal(sinew_draw_flow(ctx, &out, &f, 3.0, 0), SINEW_OK);
    assert_int_equal(out.width, 4);
    assert_int_equal(out.height, 3);
    assert_int_equal(out.channels, 3);
    expect_rgb(px(&out, 0, 0), 255, 0, 0);
    expect_rgb(px(&out, 1, 0), 191, 0, 0);
    expect_rgb(px(&out, 2, 0), 0, 0, 0);       /* unknown */
    expect_rgb(px(&out, 0, 1), 255, 255, 255); /* zero motion */
    int ref[3];
    ref_colour(0, -4.0 / 3.0, ref);
    expect_rgb(px(&out, 3, 2), ref[0], ref[1], ref[2]);
    sinew_image_free(&out);
    /* Automatic maximum (6): (3,0) is at radius 0.5. */
    assert_int_equal(sinew_draw_flow(ctx, &out, &f, 0, 1), SINEW_OK);
    expect_rgb(px(&out, 0, 0), 255, 127, 127);
    assert_true(out.height > 3); /* legend strip below */
    sinew_image_free(&out);
    sinew_image_free(&f);
    sinew_ctx_free(ctx);
}

static void test_draw_wheel_legend_picture(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image out;
    assert_int_equal(sinew_draw_wheel(ctx, &out, 64), SINEW_OK);
    assert_int_equal(out.width, 64);
    assert_int_equal(out.height, 64);
    /* Centre is (near) white; the pixel right of centre on the rim is (near) red. */
    const uint8_t *c = px(&out, 32, 32);
    assert_true(c[0] >= 240 && c[1] >= 200 && c[2] >= 200);
    const uint8_t *r = px(&out, 61, 32);
    assert_true(r[0] >= 200 && r[1] <= 40 && r[2] <= 40);
    sinew_image_free(&out);
    assert_int_equal(sinew_draw_wheel(ctx, &out, 8), SINEW_EINVAL);
    assert_true(strstr(sinew_ctx_message(ctx), "wheel size") != NULL);
    sinew_ctx_free(ctx);
}

/* CIE 1976 L* of an sRGB byte triple: IEC 61966-2-1 transfer function, Rec. 709
 * luminance weights, CIE L* = 116 f(Y) - 16 (published formulas). */
static double lstar(const uint8_t c[3])
{
    double lin[3];
    for (int b = 0; b < 3; b++) {
        double v = c[b] / 255.0;
        lin[b] = v <= 0.04045 ? v / 12.92 : pow((v + 0.055) / 1.055, 2.4);
    }
    double y = 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2];
    return y > 216.0 / 24389.0 ? 116.0 * cbrt(y) - 16.0 : 24389.0 / 27.0 * y;
}

static void test_draw_colourmap_lightness_monotonic(void **state)
{
    (void)state;
    uint8_t a[3], b[3];
    sinew_draw_colourmap(0, a);
    for (int i = 1; i <= 64; i++) {
        sinew_draw_colourmap(i / 64.0, b);
        assert_true(lstar(b) > lstar(a));
        memcpy(a, b, 3);
    }
    sinew_draw_colourmap(-5, a);
    sinew_draw_colourmap(0, b);
    assert_memory_equal(a, b, 3);
    sinew_draw_colourmap(7, a);
    sinew_draw_colourmap(1, b);
    assert_memory_equal(a, b, 3);
    /* Ends dark and light enough to read in a dark room (our design targets). */
    sinew_draw_colourmap(0, a);
    assert_true(lstar(a) < 12);
    sinew_draw_colourmap(1, a);
    assert_true(lstar(a) > 90);
    sinew_draw_colourmap(NAN, a);
    expect_rgb(a, SINEW_DRAW_NOVALUE_A, SINEW_DRAW_NOVALUE_A, SINEW_DRAW_NOVALUE_A);
}

static void test_draw_heatmap_ramp_and_legend(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image map;
    const int w = 200, h = 6;
    assert_int_equal(sinew_image_alloc(ctx, &map, w, h, 1, SINEW_F32), SINEW_OK);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++)
            sinew_image_row_f32(&map, y)[x] = (float)(2.0 * x / (w - 1));
    sinew_image_row_f32(&map, 5)[3] = NAN;
    sinew_image out;
    assert_int_equal(sinew_draw_heatmap(ctx, &out, &map, 0, 2, "FB ERROR (PX)", 1), SINEW_OK);
    assert_int_equal(out.width, w);
    assert_true(out.height > h);
    double prev = -1;
    for (int x = 0; x < w; x++) { /* a ramp is drawn in non-decreasing lightness */
        double l = lstar(px(&out, x, 0));
        assert_true(l >= prev);
        prev = l;
    }
    uint8_t c[3];
    sinew_draw_colourmap(0, c);
    assert_memory_equal(px(&out, 0, 0), c, 3);
    sinew_draw_colourmap(1, c);
    assert_memory_equal(px(&out, w - 1, 0), c, 3);
    const uint8_t *nv = px(&out, 3, 5); /* checker: (3>>2)+(5>>2) = 1 -> B */
    expect_rgb(nv, SINEW_DRAW_NOVALUE_B, SINEW_DRAW_NOVALUE_B, SINEW_DRAW_NOVALUE_B);
    /* The colour bar in the strip spans the map from its first to its last colour:
     * find a strip row containing both ends. */
    int found = 0;
    uint8_t c0[3], c1[3];
    sinew_draw_colourmap(0, c0);
    sinew_draw_colourmap(1, c1);
    for (int y = h; y < out.height && !found; y++) {
        int has0 = 0, has1 = 0;
        for (int x = 0; x < w; x++) {
            has0 |= !memcmp(px(&out, x, y), c0, 3);
            has1 |= !memcmp(px(&out, x, y), c1, 3);
        }
        found = has0 && has1;
    }
    assert_true(found);
    sinew_image_free(&out);
    /* Automatic range: hi = largest finite value (2) -> last column is the top colour. */
    assert_int_equal(sinew_draw_heatmap(ctx, &out, &map, 0, 0, NULL, 0), SINEW_OK);
    assert_int_equal(out.height, h);
    assert_memory_equal(px(&out, w - 1, 0), c1, 3);
    sinew_image_free(&out);
    sinew_image_free(&map);
    sinew_ctx_free(ctx);
}

static void test_draw_epe_values(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image f = make_flow(ctx, 3, 1), g = make_flow(ctx, 3, 1);
    set_uv(&f, 0, 0, 3, 4); /* EPE 5 (3-4-5 triangle) */
    set_uv(&f, 1, 0, 1, 1); /* EPE 0 */
    set_uv(&g, 1, 0, 1, 1);
    set_uv(&g, 2, 0, NAN, NAN); /* unknown ground truth */
    sinew_image out;
    assert_int_equal(sinew_draw_epe(ctx, &out, &f, &g, 5.0, 0), SINEW_OK);
    uint8_t c[3];
    sinew_draw_colourmap(1, c);
    assert_memory_equal(px(&out, 0, 0), c, 3);
    sinew_draw_colourmap(0, c);
    assert_memory_equal(px(&out, 1, 0), c, 3);
    expect_rgb(px(&out, 2, 0), SINEW_DRAW_NOVALUE_A, SINEW_DRAW_NOVALUE_A, SINEW_DRAW_NOVALUE_A);
    sinew_image_free(&out);
    sinew_image h2 = make_flow(ctx, 2, 1);
    assert_int_equal(sinew_draw_epe(ctx, &out, &f, &h2, 0, 0), SINEW_ESIZE);
    assert_null(out.data);
    sinew_image_free(&h2);
    sinew_image_free(&f);
    sinew_image_free(&g);
    sinew_ctx_free(ctx);
}

static void test_draw_arrow_endpoints(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image img;
    assert_int_equal(sinew_image_alloc(ctx, &img, 20, 16, 3, SINEW_U8), SINEW_OK);
    const uint8_t white[3] = {255, 255, 255};
    sinew_draw_line_arrow(&img, 2, 3, 12, 8, white);
    expect_rgb(px(&img, 2, 3), 255, 255, 255);
    expect_rgb(px(&img, 12, 8), 255, 255, 255);
    expect_rgb(px(&img, 4, 4), 255, 255, 255); /* (4, 4) lies exactly on the line */
    expect_rgb(px(&img, 19, 15), 0, 0, 0);
    expect_rgb(px(&img, 2, 10), 0, 0, 0);
    /* Head strokes sit behind the tip only: nothing beyond the tip along the line. */
    expect_rgb(px(&img, 14, 9), 0, 0, 0);
    /* Huge and non-finite coordinates are clipped or ignored, never hang. */
    sinew_draw_line(&img, -1e12, 5, 1e12, 5, white);
    expect_rgb(px(&img, 0, 5), 255, 255, 255);
    expect_rgb(px(&img, 19, 5), 255, 255, 255);
    sinew_draw_line(&img, NAN, 0, 3, 3, white);
    sinew_image_free(&img);

    /* Grid arrows: 8x8 flow, step 4 -> arrows at (2,2), (6,2), (2,6), (6,6). */
    sinew_image f = make_flow(ctx, 8, 8), out;
    for (int y = 0; y < 8; y++)
        for (int x = 0; x < 8; x++)
            set_uv(&f, x, y, 1, 0);
    assert_int_equal(sinew_draw_arrows(ctx, &out, NULL, &f, 4, 1.0, 0), SINEW_OK);
    uint8_t red[3];
    sinew_draw_wheel_colour(1, 0, red);
    assert_memory_equal(px(&out, 2, 2), red, 3);
    assert_memory_equal(px(&out, 3, 2), red, 3);
    assert_memory_equal(px(&out, 7, 6), red, 3);
    assert_memory_not_equal(px(&out, 4, 4), red, 3);
    sinew_image_free(&out);
    assert_int_equal(sinew_draw_arrows(ctx, &out, NULL, &f, 1, 1.0, 0), SINEW_EINVAL);
    assert_int_equal(sinew_draw_arrows(ctx, &out, NULL, &f, 4, -1.0, 0), SINEW_EINVAL);
    sinew_image frame;
    assert_int_equal(sinew_image_alloc(ctx, &frame, 9, 8, 1, SINEW_U8), SINEW_OK);
    assert_int_equal(sinew_draw_arrows(ctx, &out, &frame, &f, 4, 1.0, 0), SINEW_ESIZE);
    assert_true(strstr(sinew_ctx_message(ctx), "9x8") != NULL);
    sinew_image_free(&frame);
    sinew_image_free(&f);
    sinew_ctx_free(ctx);
}

static void test_draw_reasons_bit_colours(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image mask, frame, out;
    assert_int_equal(sinew_image_alloc(ctx, &mask, 10, 2, 1, SINEW_U8), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &frame, 10, 2, 3, SINEW_U8), SINEW_OK);
    memset(frame.data, 100, frame.stride * 2);
    uint8_t *m = sinew_image_row_u8(&mask, 0);
    for (int b = 0; b < 8; b++)
        m[b] = (uint8_t)(1u << b);
    m[8] = 0x0C; /* bits 2 and 3: the lowest (2) wins */
    assert_int_equal(sinew_draw_reasons(ctx, &out, &frame, &mask, 0), SINEW_OK);
    /* Gray 100 -> g = (77+150+29)*100+128 >> 8 = 100; dimmed 20 + (14000+127)/255 = 75. */
    const int dim = 75;
    expect_rgb(px(&out, 9, 1), dim, dim, dim);
    expect_rgb(px(&out, 9, 0), dim, dim, dim);
    uint8_t seen[8][3];
    for (int b = 0; b < 8; b++) {
        uint8_t c[3];
        const char *name = NULL;
        assert_int_equal(sinew_draw_reason_style(b, c, &name), SINEW_OK);
        assert_non_null(name);
        /* one vocabulary: the legend is the check's bit name, upper case, '_' -> ' ' */
        const char *bn = sinew_check_bit_name(b);
        assert_int_equal(strlen(name), strlen(bn));
        for (size_t i = 0; bn[i]; i++)
            assert_int_equal(name[i], bn[i] == '_' ? ' ' : toupper((unsigned char)bn[i]));
        int e[3];
        for (int k = 0; k < 3; k++)
            e[k] = (7 * c[k] + 3 * dim + 5) / 10;
        expect_rgb(px(&out, b, 0), e[0], e[1], e[2]);
        memcpy(seen[b], px(&out, b, 0), 3);
        for (int o = 0; o < b; o++) /* one distinct colour per bit */
            assert_memory_not_equal(seen[o], seen[b], 3);
    }
    assert_memory_equal(px(&out, 8, 0), seen[2], 3);
    assert_int_equal(sinew_draw_reason_style(8, NULL, NULL), SINEW_EINVAL);
    sinew_image_free(&out);
    /* Legend adds a strip; without a frame the background is black. */
    assert_int_equal(sinew_draw_reasons(ctx, &out, NULL, &mask, 1), SINEW_OK);
    assert_true(out.height > 2);
    expect_rgb(px(&out, 9, 1), 0, 0, 0);
    sinew_image_free(&out);
    sinew_image bad;
    assert_int_equal(sinew_image_alloc(ctx, &bad, 10, 2, 1, SINEW_U16), SINEW_OK);
    assert_int_equal(sinew_draw_reasons(ctx, &out, NULL, &bad, 0), SINEW_EINVAL);
    sinew_image_free(&bad);
    sinew_image_free(&mask);
    sinew_image_free(&frame);
    sinew_ctx_free(ctx);
}

static void test_draw_matches_layout(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image f0, f1, out;
    assert_int_equal(sinew_image_alloc(ctx, &f0, 10, 8, 1, SINEW_U8), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &f1, 12, 9, 3, SINEW_U16), SINEW_OK);
    /* columns: weight, u0, v0, u1, v1 */
    const float rows[3][5] = {{1, 2, 2, 5, 2}, {0, 1, 7, 1, 7}, {1, NAN, 0, 0, 0}};
    sinew_match_table t = {&rows[0][0], 3, 5, 1, 2, 3, 4, 0};
    assert_int_equal(sinew_draw_matches(ctx, &out, &f0, &f1, &t, 100, 0), SINEW_OK);
    assert_int_equal(out.width, 10 + SINEW_DRAW_GUTTER + 12);
    assert_int_equal(out.height, 9);
    uint8_t c[3];
    sinew_draw_wheel_colour(1, 0, c); /* displacement (3, 0): rightward */
    assert_memory_equal(px(&out, 2, 2), c, 3);
    assert_memory_equal(px(&out, 10 + SINEW_DRAW_GUTTER + 5, 2), c, 3);
    assert_memory_equal(px(&out, 12, 2), c, 3); /* segment crosses the gutter */
    /* Row 1 has weight 0: not drawn, so (1, 7) keeps the dimmed frame (black -> 20). */
    expect_rgb(px(&out, 1, 7), 20, 20, 20);
    sinew_image_free(&out);
    assert_int_equal(sinew_draw_matches(ctx, &out, &f0, &f1, &t, 2, 1), SINEW_OK);
    assert_true(out.height > 9);
    sinew_image_free(&out);
    t.u1 = 5;
    assert_int_equal(sinew_draw_matches(ctx, &out, &f0, &f1, &t, 2, 0), SINEW_EINVAL);
    assert_true(strstr(sinew_ctx_message(ctx), "column") != NULL);
    sinew_image_free(&f0);
    sinew_image_free(&f1);
    sinew_ctx_free(ctx);
}

static void test_draw_text_glyphs(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image img;
    assert_int_equal(sinew_image_alloc(ctx, &img, 30, 10, 3, SINEW_U8), SINEW_OK);
    const uint8_t w[3] = {255, 255, 255};
    assert_int_equal(sinew_draw_text_width("L1", 1), 12);
    assert_int_equal(sinew_draw_text_width("L1", 2), 24);
    assert_int_equal(sinew_draw_text(&img, 0, 0, 1, "l1", w), 12);
    /* 'L': left column rows 0-6 and the bottom row; '1': stem at column 2 of cell 2. */
    for (int y = 0; y < 7; y++)
        expect_rgb(px(&img, 0, y), 255, 255, 255);
    expect_rgb(px(&img, 4, 6), 255, 255, 255);
    expect_rgb(px(&img, 4, 0), 0, 0, 0);
    expect_rgb(px(&img, 8, 3), 255, 255, 255);
    expect_rgb(px(&img, 5, 3), 0, 0, 0); /* gap column between cells */
    sinew_image_free(&img);
    sinew_ctx_free(ctx);
}

static void test_draw_thread_count_invariant(void **state)
{
    (void)state;
    sinew_ctx *c1 = sinew_ctx_new(), *c4 = sinew_ctx_new();
    sinew_ctx_set_threads(c1, 1);
    sinew_ctx_set_threads(c4, 4);
    sinew_image f = make_flow(c1, 97, 61);
    for (int y = 0; y < 61; y++)
        for (int x = 0; x < 97; x++)
            set_uv(&f, x, y, (float)sin(0.1 * x * y), (float)cos(0.07 * x - 0.3 * y) * 3);
    sinew_image a, b;
    assert_int_equal(sinew_draw_flow(c1, &a, &f, 0, 1), SINEW_OK);
    assert_int_equal(sinew_draw_flow(c4, &b, &f, 0, 1), SINEW_OK);
    for (int y = 0; y < a.height; y++)
        assert_memory_equal(sinew_image_row_u8(&a, y), sinew_image_row_u8(&b, y), 3 * 97);
    sinew_image_free(&a);
    sinew_image_free(&b);
    sinew_image_free(&f);
    sinew_ctx_free(c1);
    sinew_ctx_free(c4);
}

static void test_draw_alloc_failure_is_clean(void **state)
{
    (void)state;
    for (long n = 1; n <= 4; n++) {
        tu_failalloc fa = {0, 0, 0};
        sinew_ctx *ctx = tu_ctx_failing(&fa);
        sinew_image f = make_flow(ctx, 5, 5), g = make_flow(ctx, 5, 5), out;
        long base = fa.live;
        fa.fail_at = fa.calls + n;
        int st = sinew_draw_epe(ctx, &out, &f, &g, 0, 1);
        if (st == SINEW_OK)
            sinew_image_free(&out);
        else
            assert_int_equal(st, SINEW_ENOMEM);
        assert_int_equal(fa.live, base);
        sinew_image_free(&f);
        sinew_image_free(&g);
        sinew_ctx_free(ctx);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_draw_wheel_entries_match_construction),
        cmocka_unit_test(test_draw_wheel_interpolated_directions),
        cmocka_unit_test(test_draw_wheel_white_black_and_out_of_range),
        cmocka_unit_test(test_draw_flow_pixels_and_max),
        cmocka_unit_test(test_draw_wheel_legend_picture),
        cmocka_unit_test(test_draw_colourmap_lightness_monotonic),
        cmocka_unit_test(test_draw_heatmap_ramp_and_legend),
        cmocka_unit_test(test_draw_epe_values),
        cmocka_unit_test(test_draw_arrow_endpoints),
        cmocka_unit_test(test_draw_reasons_bit_colours),
        cmocka_unit_test(test_draw_matches_layout),
        cmocka_unit_test(test_draw_text_glyphs),
        cmocka_unit_test(test_draw_thread_count_invariant),
        cmocka_unit_test(test_draw_alloc_failure_is_clean),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
