/* SPDX-License-Identifier: MIT */
/* Unit tests for flow/camera.c: back-projection against hand-computed values,
 * distortion round trip, rescaling, loading (JSON, 3x3 text, values) and hostile
 * values. */
#include "tests/support/testutil.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* 7-Scenes intrinsics (Shotton et al., CVPR 2013; the dataset's camera-intrinsics.txt): fx = fy =
 * 585, cx = 320, cy = 240, 640x480. */
static void seven_scenes(sinew_camera *c)
{
    sinew_camera_init(c, 585, 585, 320, 240, 640, 480);
}

/* TUM RGB-D "Freiburg 1 RGB" calibration (Sturm et al., IROS 2012; the benchmark's file-format
 * page): a real lens with strong radial distortion (d0..d4 = k1 k2 p1 p2 k3). */
static void freiburg1(sinew_camera *c)
{
    sinew_camera_init(c, 517.3, 516.5, 318.6, 255.3, 640, 480);
    c->k1 = 0.2624;
    c->k2 = -0.9531;
    c->p1 = -0.0054;
    c->p2 = 0.0026;
    c->k3 = 1.1633;
}

static void test_camera_backproject_hand_values(void **state)
{
    (void)state;
    sinew_camera c;
    seven_scenes(&c);
    double X[3];
    /* Pinhole back-projection X = (u - cx) z / fx, Y = (v - cy) z / fy (the TUM RGB-D
     * benchmark's file-format page, Sturm et al., IROS 2012); hand-computed: (400 - 320) * 2 / 585
     * = 160/585. */
    assert_true(sinew_camera_unproject(&c, 400, 100, 2.0, X));
    assert_near(X[0], 160.0 / 585.0, 1e-15);
    assert_near(X[1], -280.0 / 585.0, 1e-15);
    assert_near(X[2], 2.0, 0);
    /* The principal point looks straight ahead. */
    assert_true(sinew_camera_unproject(&c, 320, 240, 1.5, X));
    assert_near(X[0], 0, 0);
    assert_near(X[1], 0, 0);
    /* TUM ROS default intrinsics 525/319.5/239.5 (the same page): pixel (100, 400) at z = 2. */
    sinew_camera_init(&c, 525, 525, 319.5, 239.5, 640, 480);
    sinew_camera_unproject(&c, 100, 400, 2.0, X);
    assert_near(X[0], -439.0 / 525.0, 1e-15);
    assert_near(X[1], 321.0 / 525.0, 1e-15);
    /* Projection inverts it. */
    double u, v;
    assert_true(sinew_camera_project(&c, X, &u, &v));
    assert_near(u, 100, 1e-12);
    assert_near(v, 400, 1e-12);
    double behind[3] = {0.1, 0.1, -1};
    assert_false(sinew_camera_project(&c, behind, &u, &v));
}

static void test_camera_distortion_round_trip(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_camera c;
    freiburg1(&c);
    assert_true(sinew_camera_has_distortion(&c));
    /* Undistort then distort every pixel of the 640x480 image: the measured maximum
     * error is reported in docs/methods.md; the bound here is far below any flow
     * accuracy (1e-6 px). */
    double err = -1;
    long fails = -1;
    assert_int_equal(sinew_camera_roundtrip_error(ctx, &err, &fails, &c, 640, 480, 1), SINEW_OK);
    printf("# Freiburg 1 round trip over 640x480: max %.3g px, %ld failures\n", err, fails);
    assert_int_equal(fails, 0);
    assert_true(err < 1e-6);
    /* Distort then undistort normalised points across the field of view. */
    for (double y = -0.5; y <= 0.5; y += 0.05)
        for (double x = -0.65; x <= 0.65; x += 0.05) {
            double xd, yd, xu, yu;
            sinew_camera_distort(&c, x, y, &xd, &yd);
            assert_true(sinew_camera_undistort(&c, xd, yd, &xu, &yu));
            assert_near(xu, x, 1e-10);
            assert_near(yu, y, 1e-10);
        }
    /* Hand-computed distortion of one point: x = 0.1, y = -0.2, r^2 = 0.05,
     * radial = 1 + 0.2624*0.05 - 0.9531*0.0025 + 1.1633*0.000125 = 1.0108826625,
     * xd = 0.1*radial + 2*p1*x*y + p2*(r^2 + 2x^2) = 0.10108826625 + 0.000216 + 0.000182. */
    double xd, yd;
    sinew_camera_distort(&c, 0.1, -0.2, &xd, &yd);
    assert_near(xd, 0.10108826625 + 0.000216 + 0.000182, 1e-12);
    assert_near(yd, -0.2021765325 - 0.0054 * (0.05 + 0.08) + 2 * 0.0026 * 0.1 * -0.2, 1e-12);
    /* Without distortion only rounding remains. */
    seven_scenes(&c);
    assert_int_equal(sinew_camera_roundtrip_error(ctx, &err, NULL, &c, 0, 0, 7), SINEW_OK);
    assert_near(err, 0, 1e-9);
    sinew_ctx_free(ctx);
}

static void test_camera_rescale(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_camera c, h;
    seven_scenes(&c);
    /* Half size: fx' = 292.5; cx' = 0.5 * (320 + 0.5) - 0.5 = 159.75 (pixel edges kept). */
    assert_int_equal(sinew_camera_fit(ctx, &h, &c, 320, 240, "k.json"), SINEW_OK);
    assert_near(h.fx, 292.5, 1e-12);
    assert_near(h.fy, 292.5, 1e-12);
    assert_near(h.cx, 159.75, 1e-12);
    assert_near(h.cy, 119.75, 1e-12);
    assert_int_equal(h.width, 320);
    /* A 3-D point projects to (u + 0.5) / 2 - 0.5 in the half-size image. */
    double X[3] = {0.3, -0.2, 1.7}, u, v, uh, vh;
    sinew_camera_project(&c, X, &u, &v);
    sinew_camera_project(&h, X, &uh, &vh);
    assert_near(uh, (u + 0.5) / 2 - 0.5, 1e-12);
    assert_near(vh, (v + 0.5) / 2 - 0.5, 1e-12);
    /* Same size or unknown calibration size: unchanged. */
    assert_int_equal(sinew_camera_fit(ctx, &h, &c, 640, 480, NULL), SINEW_OK);
    assert_memory_equal(&h, &c, sizeof h);
    sinew_camera k = c;
    k.width = k.height = 0;
    assert_int_equal(sinew_camera_fit(ctx, &h, &k, 1280, 720, NULL), SINEW_OK);
    assert_near(h.cx, 320, 0);
    assert_int_equal(h.width, 1280);
    /* A crop (different aspect ratio) is refused, naming the source. */
    assert_int_equal(sinew_camera_fit(ctx, &h, &c, 640, 360, "k.json"), SINEW_ESIZE);
    assert_non_null(strstr(sinew_ctx_message(ctx), "k.json"));
    sinew_ctx_free(ctx);
}

static int load_text(sinew_ctx *ctx, const char *dir, const char *text, sinew_camera *c)
{
    char p[600];
    tu_path(p, sizeof p, dir, "k.txt");
    tu_write_bytes(p, text, strlen(text));
    return sinew_camera_load(ctx, c, p);
}

static void test_camera_load_formats(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    char *dir = tu_tmpdir();
    sinew_camera c;
    /* The 7-Scenes text layout: tab separated, scientific notation (the dataset's files). */
    assert_int_equal(load_text(ctx, dir,
                               "5.850000000e+02\t0.000000000e+00\t3.200000000e+02\t\n"
                               "0.000000000e+00\t5.850000000e+02\t2.400000000e+02\t\n"
                               "0.000000000e+00\t0.000000000e+00\t1.000000000e+00\t\n",
                               &c),
                     SINEW_OK);
    assert_near(c.fx, 585, 0);
    assert_near(c.cy, 240, 0);
    assert_int_equal(c.width, 0);
    assert_int_equal(load_text(ctx, dir, "# K\n[[500, 0, 300], [0, 510, 200], [0, 0, 1]]\n", &c),
                     SINEW_OK);
    assert_near(c.fy, 510, 0);
    assert_int_equal(load_text(ctx, dir,
                               "{\"fx\": 517.3, \"fy\": 516.5, \"cx\": 318.6, \"cy\": 255.3,"
                               " \"width\": 640, \"height\": 480, \"k1\": 0.2624, \"k2\": -0.9531,"
                               " \"p1\": -0.0054, \"p2\": 0.0026, \"k3\": 1.1633,"
                               " \"comment\": \"fr1\"}",
                               &c),
                     SINEW_OK);
    sinew_camera f;
    freiburg1(&f);
    assert_memory_equal(&c, &f, sizeof c);
    /* Save and load again. */
    char p[600];
    tu_path(p, sizeof p, dir, "out.json");
    assert_int_equal(sinew_camera_save(ctx, p, &f), SINEW_OK);
    memset(&c, 0, sizeof c);
    assert_int_equal(sinew_camera_load(ctx, &c, p), SINEW_OK);
    assert_memory_equal(&c, &f, sizeof c);
    /* The real file, when the data folder is present. */
    char buf[600];
    if (tu_data_file(buf, sizeof buf, "7scenes/tsdf-fusion-frames-150-154/camera-intrinsics.txt")) {
        assert_int_equal(sinew_camera_load(ctx, &c, buf), SINEW_OK);
        assert_near(c.fx, 585, 0);
        assert_near(c.cx, 320, 0);
    }
    /* Values from a command line. */
    assert_int_equal(sinew_camera_parse(ctx, &c, "585,585,320,240", "--intrinsics"), SINEW_OK);
    assert_near(c.cx, 320, 0);
    assert_int_equal(sinew_camera_parse(ctx, &c, "585 585 320 240 640 480", NULL), SINEW_OK);
    assert_int_equal(c.height, 480);
    assert_int_equal(sinew_camera_parse(ctx, &c, "585,585,320", "--intrinsics"), SINEW_EFORMAT);
    assert_int_equal(sinew_camera_parse(ctx, &c, "0,585,320,240", "--intrinsics"), SINEW_EVALUE);
    assert_non_null(strstr(sinew_ctx_message(ctx), "--intrinsics"));
    tu_rmtree(dir);
    free(dir);
    sinew_ctx_free(ctx);
}

static void expect_bad(sinew_ctx *ctx, const char *dir, const char *text, int status,
                       const char *needle)
{
    sinew_camera c;
    sinew_camera_init(&c, 1, 2, 3, 4, 5, 6);
    sinew_camera keep = c;
    int rc = load_text(ctx, dir, text, &c);
    if (rc != status)
        fail_msg("'%s': got %d (%s), expected %d", text, rc, sinew_ctx_message(ctx), status);
    assert_non_null(strstr(sinew_ctx_message(ctx), "k.txt"));
    if (needle)
        assert_non_null(strstr(sinew_ctx_message(ctx), needle));
    assert_memory_equal(&c, &keep, sizeof c); /* untouched on failure */
}

static void test_camera_hostile_values(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    char *dir = tu_tmpdir();
    expect_bad(ctx, dir, "0 0 320  0 585 240  0 0 1", SINEW_EVALUE, "fx");
    expect_bad(ctx, dir, "-585 0 320  0 585 240  0 0 1", SINEW_EVALUE, "fx");
    expect_bad(ctx, dir, "585 0 320  0 -1 240  0 0 1", SINEW_EVALUE, "fy");
    expect_bad(ctx, dir, "nan 0 320  0 585 240  0 0 1", SINEW_EVALUE, NULL);
    expect_bad(ctx, dir, "585 0 inf  0 585 240  0 0 1", SINEW_EVALUE, NULL);
    expect_bad(ctx, dir, "585 0 320  0 585 240  0 0 2", SINEW_EVALUE, NULL);
    expect_bad(ctx, dir, "585 1 320  0 585 240  0 0 1", SINEW_EUNSUPPORTED, "skew");
    expect_bad(ctx, dir, "585 0 320  0 585 240", SINEW_EFORMAT, "9 numbers");
    expect_bad(ctx, dir, "585 0 320  0 585 x 0 0 1", SINEW_EFORMAT, NULL);
    expect_bad(ctx, dir, "{\"fx\": 0, \"fy\": 585, \"cx\": 320, \"cy\": 240}", SINEW_EVALUE, "fx");
    expect_bad(ctx, dir, "{\"fx\": NaN, \"fy\": 585, \"cx\": 320, \"cy\": 240}", SINEW_EVALUE,
               "NaN");
    expect_bad(ctx, dir, "{\"fx\": 585, \"fy\": -Infinity, \"cx\": 320, \"cy\": 240}", SINEW_EVALUE,
               NULL);
    expect_bad(ctx, dir, "{\"fx\": \"585\", \"fy\": 585, \"cx\": 320, \"cy\": 240}", SINEW_EVALUE,
               "fx");
    expect_bad(ctx, dir, "{\"fx\": 585, \"fy\": 585, \"cx\": 320, \"cy\": 240, \"k4\": 0}",
               SINEW_ECONFIG, "k4");
    expect_bad(ctx, dir, "{\"fx\": 585, \"fy\": 585, \"cx\": 320}", SINEW_ECONFIG, NULL);
    expect_bad(ctx, dir, "{\"fx\": 585, \"fy\": 585, \"cx\": 320, \"cy\": 240, \"width\": 640}",
               SINEW_ECONFIG, "height");
    expect_bad(ctx, dir,
               "{\"fx\": 585, \"fy\": 585, \"cx\": 320, \"cy\": 240, \"width\": 640.5, "
               "\"height\": 480}",
               SINEW_EVALUE, "width");
    expect_bad(ctx, dir, "{\"fx\": 585, \"fy\": 585, \"cx\": 320, \"cy\": 240, \"k1\": 1e9}",
               SINEW_EVALUE, "k1");
    expect_bad(ctx, dir, "{\"fx\": 585, ", SINEW_EFORMAT, "JSON");
    expect_bad(ctx, dir, "[1, 2]", SINEW_EFORMAT, NULL);
    sinew_camera c;
    assert_int_equal(sinew_camera_load(ctx, &c, "/nonexistent/k.json"), SINEW_EIO);
    assert_non_null(strstr(sinew_ctx_message(ctx), "/nonexistent/k.json"));
    assert_int_equal(sinew_camera_load(ctx, &c, dir), SINEW_EIO);
    tu_rmtree(dir);
    free(dir);
    sinew_ctx_free(ctx);
}

static void test_camera_load_alloc_failures(void **state)
{
    (void)state;
    char *dir = tu_tmpdir();
    char p[600];
    tu_path(p, sizeof p, dir, "k.json");
    const char *t = "{\"fx\": 585, \"fy\": 585, \"cx\": 320, \"cy\": 240}";
    tu_write_bytes(p, t, strlen(t));
    for (long n = 2; n < 6; n++) {
        tu_failalloc fa = {n, 0, 0};
        sinew_ctx *ctx = tu_ctx_failing(&fa);
        sinew_camera c;
        int rc = sinew_camera_load(ctx, &c, p);
        assert_true(rc == SINEW_OK || rc == SINEW_ENOMEM);
        assert_int_equal(fa.live, 1);
        sinew_ctx_free(ctx);
    }
    tu_rmtree(dir);
    free(dir);
}

/* Worked examples: the TUM RGB-D / 7-Scenes style K (fx 525, cx 319.5, cy 239.5 for
 * 640x480, from memory) is centred; the same K scaled for 1280x960 (cx 639.5, cy 479.5)
 * but used on 640x480 frames puts the principal point on the image corner. */
static void test_camera_centre_check(void **state)
{
    (void)state;
    sinew_camera c;
    char msg[300] = "";
    sinew_camera_init(&c, 525, 525, 319.5, 239.5, 0, 0);
    assert_int_equal(sinew_camera_centre_check(&c, 640, 480, msg, sizeof msg), 0);
    sinew_camera_init(&c, 1050, 1050, 639.5, 479.5, 0, 0);
    assert_int_equal(sinew_camera_centre_check(&c, 640, 480, msg, sizeof msg), 1);
    assert_non_null(strstr(msg, "640x480 images"));
    assert_non_null(strstr(msg, "1280x960 frames"));
    /* the limit is a quarter of the size in each direction: 160 px of 640, 120 of 480 */
    sinew_camera_init(&c, 525, 525, 319.5 + 160, 239.5, 0, 0);
    assert_int_equal(sinew_camera_centre_check(&c, 640, 480, NULL, 0), 0);
    sinew_camera_init(&c, 525, 525, 319.5, 239.5 - 121, 0, 0);
    assert_int_equal(sinew_camera_centre_check(&c, 640, 480, NULL, 0), 1);
    assert_int_equal(sinew_camera_centre_check(NULL, 640, 480, NULL, 0), 0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_camera_backproject_hand_values),
        cmocka_unit_test(test_camera_distortion_round_trip),
        cmocka_unit_test(test_camera_rescale),
        cmocka_unit_test(test_camera_load_formats),
        cmocka_unit_test(test_camera_hostile_values),
        cmocka_unit_test(test_camera_load_alloc_failures),
        cmocka_unit_test(test_camera_centre_check),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
