/* SPDX-License-Identifier: MIT */
/* Unit tests for flow/stereo_rectify.c (calibration form 2: two distorted cameras and
 * R, T): a known synthetic rig checked point by point (3-D points projected through both
 * distorted cameras land on one rectified row, and the depth from their rectified
 * disparity is the true depth) and image by image (a textured plane rendered through
 * both distorted cameras, rectified, matched by the stereo module, depth taken back to
 * the left camera's original pixels and compared with the true depth); the identity rig
 * leaves frames unchanged; impossible calibrations are refused with one line; outputs
 * are identical for 1/2/3 threads; allocation failures leak nothing. */
#include "tests/support/testutil.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define W 640
#define H 480
#define DEG (atan(1.0) / 45) /* radians per degree */

/* The synthetic rig (our invention, typical of a small stereo head): two different
 * cameras with barrel distortion and tangential terms, the right one 60 mm to the right,
 * turned 1.8 degrees toward the left one, tilted 0.6 degrees and rolled 0.4 degrees. */
static void test_rig(sinew_stereo_rig *rig)
{
    memset(rig, 0, sizeof *rig);
    rig->raw = 1;
    sinew_camera_init(&rig->left, 520, 515, 318.4, 243.1, W, H);
    rig->left.k1 = -0.21, rig->left.k2 = 0.06, rig->left.p1 = 0.0012, rig->left.p2 = -0.0008;
    sinew_camera_init(&rig->right, 527, 522, 324.9, 236.2, W, H);
    rig->right.k1 = -0.19, rig->right.k2 = 0.05, rig->right.p1 = -0.0006, rig->right.p2 = 0.0009;
    const double ax = 0.6 * DEG, ay = -1.8 * DEG, az = 0.4 * DEG;
    const double rx[9] = {1, 0, 0, 0, cos(ax), -sin(ax), 0, sin(ax), cos(ax)};
    const double ry[9] = {cos(ay), 0, sin(ay), 0, 1, 0, -sin(ay), 0, cos(ay)};
    const double rz[9] = {cos(az), -sin(az), 0, sin(az), cos(az), 0, 0, 0, 1};
    double t[9];
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++) {
            t[3 * i + j] = 0;
            for (int k = 0; k < 3; k++)
                t[3 * i + j] += ry[3 * i + k] * rx[3 * k + j];
        }
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++) {
            rig->R[3 * i + j] = 0;
            for (int k = 0; k < 3; k++)
                rig->R[3 * i + j] += rz[3 * i + k] * t[3 * k + j];
        }
    rig->T[0] = -0.060, rig->T[1] = 0.0012, rig->T[2] = 0.0008;
}

/* A context, the test rig and its rectification for W x H frames. */
static sinew_ctx *rig_setup(sinew_stereo_rig *rig, sinew_stereo_rectification *rc)
{
    sinew_ctx *ctx = sinew_ctx_new();
    assert_non_null(ctx);
    test_rig(rig);
    assert_int_equal(sinew_stereo_rectify_init(ctx, rc, rig, W, H), SINEW_OK);
    return ctx;
}

static void to_right(const sinew_stereo_rig *rig, const double Xl[3], double Xr[3])
{
    for (int i = 0; i < 3; i++)
        Xr[i] = rig->R[3 * i] * Xl[0] + rig->R[3 * i + 1] * Xl[1] + rig->R[3 * i + 2] * Xl[2] +
                rig->T[i];
}

/* Depth in the original left camera from a rectified left pixel's ray and its rectified
 * depth: the ray (x, y, 1) turns into rot0 (x, y, 1), whose z divides the depth. */
static double original_z(const sinew_stereo_rectification *rc, double u, double v, double zrect)
{
    double ray[3];
    sinew_camera_pixel_to_ray(&rc->cam[0], u, v, ray);
    const double zr = rc->rot[0][6] * ray[0] + rc->rot[0][7] * ray[1] + rc->rot[0][8] * ray[2];
    return zrect / zr;
}

/* Point by point: left pixels on a 20-px grid at depths 0.3, 1.2, 2.1, 3.0 m, kept when
 * the right camera sees them (2661 points). Measured (this rig): largest vertical offset
 * between the two rectified points 5.3e-10 px, largest relative error of the depth from
 * their rectified disparity 4.9e-11 (both set by the undistortion's Newton tolerance,
 * 1e-12 in normalised units); the rectified camera has f = 515 px (the smallest focal
 * length) and doffs 0. */
static void test_rectify_rig_points(void **state)
{
    (void)state;
    sinew_stereo_rig rig;
    sinew_stereo_rectification rc;
    sinew_ctx *ctx = rig_setup(&rig, &rc);
    assert_near(rc.calib.fx, 515, 0);
    assert_near(rc.calib.baseline, sqrt(0.06 * 0.06 + 0.0012 * 0.0012 + 0.0008 * 0.0008), 1e-15);
    assert_near(rc.calib.doffs, 0, 0);
    double worst_dy = 0, worst_rel = 0;
    int n = 0;
    for (int v = 0; v < H; v += 20)
        for (int u = 0; u < W; u += 20)
            for (double z = 0.3; z < 3.01; z += 0.9) {
                double Xl[3], Xr[3], ur, vr, lu, lv, ru, rv;
                sinew_camera_unproject(&rig.left, u, v, z, Xl);
                to_right(&rig, Xl, Xr);
                if (!sinew_camera_project(&rig.right, Xr, &ur, &vr) || ur < 0 || ur > W - 1 ||
                    vr < 0 || vr > H - 1)
                    continue;
                assert_true(sinew_stereo_rectify_point(&rc, 0, u, v, &lu, &lv));
                assert_true(sinew_stereo_rectify_point(&rc, 1, ur, vr, &ru, &rv));
                worst_dy = fmax(worst_dy, fabs(lv - rv));
                const double d = lu - ru;
                assert_true(d > 0);
                const double zhat = original_z(&rc, u, v, rc.calib.fx * rc.calib.baseline / d);
                worst_rel = fmax(worst_rel, fabs(zhat - z) / z);
                n++;
            }
    printf("# rig points: %d, worst vertical offset %.3g px, worst relative depth error %.3g\n", n,
           worst_dy, worst_rel);
    assert_true(n > 1500);
    assert_true(worst_dy < 1e-8);
    assert_true(worst_rel < 1e-9);
    sinew_ctx_free(ctx);
}

/* ---- rendering the rig ---- */

static double lattice(int i, int j, unsigned seed)
{
    unsigned h = (unsigned)i * 73856093u ^ (unsigned)j * 19349663u ^ seed * 83492791u;
    h ^= h >> 13;
    h *= 0x5bd1e995u;
    h ^= h >> 15;
    return (h & 0xffff) / 65535.0;
}

/* Smooth random texture on the plane (value noise, smoothstep weights), two octaves of
 * 6 and 2 mm cells: about 3 and 1 px at 1 m with f = 515 px. */
static double texture(double X, double Y)
{
    double v = 0, amp = 0.65, cell = 0.006;
    for (int o = 0; o < 2; o++, amp = 0.35, cell = 0.002) {
        const double gx = X / cell + 1000, gy = Y / cell + 1000;
        const int i = (int)floor(gx), j = (int)floor(gy);
        double fx = gx - i, fy = gy - j;
        fx = fx * fx * (3 - 2 * fx);
        fy = fy * fy * (3 - 2 * fy);
        const double a = lattice(i, j, o), b = lattice(i + 1, j, o), c = lattice(i, j + 1, o),
                     d = lattice(i + 1, j + 1, o);
        v += amp * ((1 - fy) * ((1 - fx) * a + fx * b) + fy * ((1 - fx) * c + fx * d));
    }
    return 255 * v;
}

/* The plane z = 1 + 0.25 x + 0.1 y (left camera coordinates, metres): ray from origin o in
 * direction r (left coordinates) -> hit point; 0 if it misses. */
static int hit_plane(const double o[3], const double r[3], double X[3])
{
    const double n[3] = {-0.25, -0.1, 1};
    const double den = n[0] * r[0] + n[1] * r[1] + n[2] * r[2];
    if (fabs(den) < 1e-12)
        return 0;
    const double s = (1 - (n[0] * o[0] + n[1] * o[1] + n[2] * o[2])) / den;
    if (!(s > 0))
        return 0;
    for (int k = 0; k < 3; k++)
        X[k] = o[k] + s * r[k];
    return 1;
}

/* Render view v of the rig: each pixel's undistorted ray, into left coordinates
 * (X_left = R^T (X_right - T)), onto the plane, textured. Also the true left depth. */
static void render(sinew_ctx *ctx, const sinew_stereo_rig *rig, int view, sinew_image *im,
                   sinew_image *z)
{
    assert_int_equal(sinew_image_alloc(ctx, im, W, H, 1, SINEW_U8), SINEW_OK);
    if (z)
        assert_int_equal(sinew_image_alloc(ctx, z, W, H, 1, SINEW_F32), SINEW_OK);
    const sinew_camera *cam = view ? &rig->right : &rig->left;
    double o[3] = {0, 0, 0};
    if (view) /* right centre in left coordinates: -R^T T */
        for (int k = 0; k < 3; k++)
            o[k] = -(rig->R[k] * rig->T[0] + rig->R[3 + k] * rig->T[1] + rig->R[6 + k] * rig->T[2]);
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++) {
            double ray[3], r[3], X[3];
            sinew_camera_pixel_to_ray(cam, x, y, ray);
            for (int k = 0; k < 3; k++)
                r[k] = view ? rig->R[k] * ray[0] + rig->R[3 + k] * ray[1] + rig->R[6 + k] * ray[2]
                            : ray[k];
            const int ok = hit_plane(o, r, X);
            sinew_image_row_u8(im, y)[x] = ok ? (uint8_t)floor(texture(X[0], X[1]) + 0.5) : 0;
            if (z)
                sinew_image_row_f32(z, y)[x] = ok ? (float)X[2] : NAN;
        }
}

static int cmp_double(const void *a, const void *b)
{
    const double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Mean signed and absolute error of the kept rectified disparities against the exact
 * ones: rectified left pixel -> left ray -> plane -> right camera (distorted) ->
 * rectified right pixel; every third pixel away from the borders. */
static void disparity_error(const sinew_stereo_rig *rig, const sinew_stereo_rectification *rc,
                            const sinew_image *d, const sinew_image *m, double *bias, double *mae)
{
    double sb = 0, sa = 0, o[3] = {0, 0, 0};
    long n = 0;
    for (int y = 40; y < H - 40; y += 3)
        for (int x = 60; x < W - 40; x += 3) {
            if (sinew_image_row_u8(m, y)[x])
                continue;
            const double ray[3] = {(x - rc->calib.cx) / rc->calib.fx,
                                   (y - rc->calib.cy) / rc->calib.fy, 1};
            double rl[3], X[3], Xr[3], ur, vr, ru, rv;
            for (int i = 0; i < 3; i++) /* rot[0]^T ray */
                rl[i] = rc->rot[0][i] * ray[0] + rc->rot[0][3 + i] * ray[1] +
                        rc->rot[0][6 + i] * ray[2];
            if (!hit_plane(o, rl, X))
                continue;
            to_right(rig, X, Xr);
            if (!sinew_camera_project(&rig->right, Xr, &ur, &vr) ||
                !sinew_stereo_rectify_point(rc, 1, ur, vr, &ru, &rv))
                continue;
            const double e = sinew_image_row_f32(d, y)[x] - (x - ru);
            sb += e;
            sa += fabs(e);
            n++;
        }
    assert_true(n > 10000);
    *bias = sb / (double)n;
    *mae = sa / (double)n;
}

/* Image by image: the plane (0.7 .. 1.4 m, disparities about 22 .. 44 px) rendered
 * through both distorted cameras, rectified (bilinear), matched (balanced preset, 64
 * disparities), depth computed in the rectified view and taken back to the left
 * camera's original pixels. Measured (this rig): vertical offset of the rectified pair
 * below 0.0001 px (sinew_stereo_vertical_offset, 431 features); kept rectified
 * disparities against the exact ones: mean -0.008 px, mean absolute 0.116 px (the
 * matcher's sub-pixel error: rectification adds none measurable); depth valid at 82.6 %
 * of the original left pixels (86.5 % land inside the rectified frame, barrel distortion
 * pushes the corners out; the left band the right camera does not see and rejected
 * pixels are holes); median relative depth error 0.36 % (0.116 px of ~30 px), 98.9 % of
 * the valid pixels within 1 % of the true depth. Bounds: measured x 1.1 plus slack. */
static void test_rectify_rig_images(void **state)
{
    (void)state;
    sinew_stereo_rig rig;
    sinew_stereo_rectification rc;
    sinew_ctx *ctx = rig_setup(&rig, &rc);
    sinew_image l, r, zt, lr, rr, inl;
    render(ctx, &rig, 0, &l, &zt);
    render(ctx, &rig, 1, &r, NULL);
    assert_int_equal(sinew_stereo_rectify_image(ctx, &lr, &inl, &l, &rc, 0), SINEW_OK);
    assert_int_equal(sinew_stereo_rectify_image(ctx, &rr, NULL, &r, &rc, 1), SINEW_OK);
    double dy = 99;
    int nm = 0;
    assert_int_equal(sinew_stereo_vertical_offset(ctx, &dy, &nm, &lr, &rr, 0, 64, 8), SINEW_OK);
    printf("# rig images: vertical offset %.4f px over %d features\n", dy, nm);
    assert_true(nm >= 100);
    assert_true(fabs(dy) < 0.05);

    sinew_image d, m, zr, zo;
    assert_int_equal(sinew_image_alloc(ctx, &d, W, H, 1, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &m, W, H, 1, SINEW_U8), SINEW_OK);
    sinew_stereo_params p;
    sinew_stereo_params_default(&p);
    p.num_disparities = 64;
    sinew_stereo_output out = {.disparity = &d, .mask = &m};
    assert_int_equal(sinew_stereo_run(ctx, &out, &lr, &rr, &p), SINEW_OK);
    assert_int_equal(sinew_stereo_depth(ctx, &zr, &d, &m, &rc.calib, NULL), SINEW_OK);
    double bias, mae;
    disparity_error(&rig, &rc, &d, &m, &bias, &mae);
    printf("# rig images: rectified disparity - exact: mean %.4f px, mean abs %.4f px\n", bias,
           mae);
    assert_true(fabs(bias) < 0.02);
    assert_true(mae < 0.13);
    int64_t valid = 0;
    assert_int_equal(sinew_stereo_unrectify_depth(ctx, &zo, &zr, &rc, &valid), SINEW_OK);
    int64_t n = 0, within = 0;
    double *rel = malloc(sizeof(double) * W * H);
    assert_non_null(rel);
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++) {
            const double e = sinew_image_row_f32(&zo, y)[x], t = sinew_image_row_f32(&zt, y)[x];
            if (!isfinite(e) || !isfinite(t))
                continue;
            rel[n] = fabs(e - t) / t;
            within += rel[n] <= 0.01;
            n++;
        }
    assert_int_equal(n, valid);
    qsort(rel, (size_t)n, sizeof *rel, cmp_double);
    const double med = n ? rel[n / 2] : NAN;
    int64_t kept = 0, inside = 0, mapped = 0;
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++) {
            kept += sinew_image_row_u8(&m, y)[x] == 0;
            inside += sinew_image_row_u8(&inl, y)[x] != 0;
            double u, v;
            mapped += sinew_stereo_rectify_point(&rc, 0, x, y, &u, &v) && u >= -0.5 &&
                      u <= W - 0.5 && v >= -0.5 && v <= H - 0.5;
        }
    printf("# rig images: rectified left pixels inside the original %.1f %%, kept by the check "
           "%.1f %%; original left pixels inside the rectified frame %.1f %%; median relative "
           "depth error %.3g %%\n",
           100.0 * (double)inside / (W * H), 100.0 * (double)kept / (W * H),
           100.0 * (double)mapped / (W * H), 100 * med);
    free(rel);
    printf("# rig images: depth valid %.1f %%, within 1 %% of the truth: %.1f %%\n",
           100.0 * (double)valid / (W * H), 100.0 * (double)within / (double)n);
    assert_true((double)valid > 0.75 * W * H);
    assert_true((double)within > 0.97 * (double)n);
    assert_true(med < 0.004);
    sinew_image *all[] = {&l, &r, &zt, &lr, &rr, &inl, &d, &m, &zr, &zo};
    for (size_t i = 0; i < sizeof all / sizeof all[0]; i++)
        sinew_image_free(all[i]);
    sinew_ctx_free(ctx);
}

/* The identity rig (same pinhole cameras, principal point at the image centre, R = I,
 * T along -x) rectifies every frame to itself, byte for byte; unrectified depth is the
 * rectified one. */
static void test_rectify_identity(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_stereo_rig rig;
    memset(&rig, 0, sizeof rig);
    rig.raw = 1;
    sinew_camera_init(&rig.left, 400, 400, (W - 1) / 2.0, (H - 1) / 2.0, 0, 0);
    rig.right = rig.left;
    rig.R[0] = rig.R[4] = rig.R[8] = 1;
    rig.T[0] = -0.1;
    sinew_stereo_rectification rc;
    assert_int_equal(sinew_stereo_rectify_init(ctx, &rc, &rig, W, H), SINEW_OK);
    sinew_image im, out, z, zo;
    assert_int_equal(sinew_image_alloc(ctx, &im, W, H, 3, SINEW_U16), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &z, W, H, 1, SINEW_F32), SINEW_OK);
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++) {
            for (int k = 0; k < 3; k++)
                sinew_image_row_u16(&im, y)[3 * x + k] = (uint16_t)(lattice(x, y, k) * 65535);
            sinew_image_row_f32(&z, y)[x] = (x + y) % 7 ? (float)(1 + lattice(x, y, 9)) : NAN;
        }
    for (int v = 0; v < 2; v++) {
        assert_int_equal(sinew_stereo_rectify_image(ctx, &out, NULL, &im, &rc, v), SINEW_OK);
        for (int y = 0; y < H; y++)
            assert_memory_equal(sinew_image_row(&out, y), sinew_image_row(&im, y), 6 * W);
        sinew_image_free(&out);
    }
    assert_int_equal(sinew_stereo_unrectify_depth(ctx, &zo, &z, &rc, NULL), SINEW_OK);
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++) {
            const float a = sinew_image_row_f32(&z, y)[x], b = sinew_image_row_f32(&zo, y)[x];
            assert_true(isnan(a) ? isnan(b) : a == b);
        }
    sinew_image_free(&im);
    sinew_image_free(&z);
    sinew_image_free(&zo);
    sinew_ctx_free(ctx);
}

static int same_bytes(const sinew_image *a, const sinew_image *b)
{
    const size_t row = (size_t)a->width * a->channels * sinew_type_size(a->type);
    for (int y = 0; y < a->height; y++)
        if (memcmp(sinew_image_row(a, y), sinew_image_row(b, y), row))
            return 0;
    return 1;
}

static void test_rectify_threads(void **state)
{
    (void)state;
    sinew_stereo_rig rig;
    test_rig(&rig);
    sinew_image ref[3] = {{0}}, got[3] = {{0}}, l, z, *cur;
    for (int t = 1; t <= 3; t++) {
        sinew_ctx *ctx = sinew_ctx_new();
        sinew_ctx_set_threads(ctx, t);
        sinew_stereo_rectification rc;
        assert_int_equal(sinew_stereo_rectify_init(ctx, &rc, &rig, W, H), SINEW_OK);
        if (t == 1)
            render(ctx, &rig, 0, &l, &z);
        cur = t == 1 ? ref : got;
        assert_int_equal(sinew_stereo_rectify_image(ctx, &cur[0], &cur[1], &l, &rc, 0), SINEW_OK);
        assert_int_equal(sinew_stereo_unrectify_depth(ctx, &cur[2], &z, &rc, NULL), SINEW_OK);
        if (t > 1)
            for (int k = 0; k < 3; k++) {
                assert_true(same_bytes(&ref[k], &got[k]));
                sinew_image_free(&got[k]);
            }
        sinew_ctx_free(ctx);
    }
    for (int k = 0; k < 3; k++)
        sinew_image_free(&ref[k]);
    sinew_image_free(&l);
    sinew_image_free(&z);
}

static void write_text(const char *path, const char *text)
{
    tu_write_bytes(path, text, strlen(text));
}

#define CAM "{\"fx\": 520, \"fy\": 515, \"cx\": 318, \"cy\": 243, \"k1\": -0.2, \"p2\": 0.001}"
#define CAMS "\"left\": " CAM ", \"right\": " CAM

/* Calibration form 2 files: a good one (R as 3 rows, then flat) and one-line refusals. */
static void test_rectify_calibration_files(void **state)
{
    tu_fixture *f = *state;
    const char *path = tu_fixture_path(f, "rig.json");
    sinew_stereo_rig rig;
    write_text(path, "{" CAMS ", \"R\": [[1, 0, 0], [0, 1, 0], [0, 0, 1]], \"T\": [-0.06, 0, 0],"
                     " \"width\": 640, \"height\": 480}");
    assert_int_equal(sinew_stereo_rig_load(f->ctx, &rig, path), SINEW_OK);
    assert_int_equal(rig.raw, 1);
    assert_near(rig.left.k1, -0.2, 0);
    assert_near(rig.right.p2, 0.001, 0);
    assert_int_equal(rig.left.width, 640);
    /* 0.9999995 rounds a rotation by 0.06 degrees about z to 7 digits: accepted, and
       orthonormalised */
    write_text(path, "{" CAMS ", \"R\": [0.9999995, -0.001047, 0, 0.001047, 0.9999995, 0, 0, 0, "
                     "1], \"T\": [-0.06, 0.001, 0]}");
    assert_int_equal(sinew_stereo_rig_load(f->ctx, &rig, path), SINEW_OK);
    assert_near(rig.R[0] * rig.R[0] + rig.R[1] * rig.R[1], 1, 1e-15);
    sinew_stereo_calib c;
    assert_int_equal(sinew_stereo_calib_load(f->ctx, &c, path), SINEW_ECONFIG);
    static const struct {
        const char *text;
        int status;
        const char *needle;
    } bad[] = {
        {"{" CAMS ", \"R\": [1.1, 0, 0, 0, 1.1, 0, 0, 0, 1.1], \"T\": [-0.06, 0, 0]}", SINEW_EVALUE,
         "R is not a rotation"},
        {"{" CAMS ", \"R\": [-1, 0, 0, 0, 1, 0, 0, 0, 1], \"T\": [-0.06, 0, 0]}", SINEW_EVALUE,
         "R is not a rotation"},
        {"{" CAMS ", \"R\": [1, 0, 0, 0, 1, 0, 0, 0, 1], \"T\": [0, 0, 0]}", SINEW_EVALUE,
         "impossible baseline"},
        {"{" CAMS ", \"R\": [1, 0, 0, 0, 1, 0, 0, 0, 1], \"T\": [-60, 0, -120]}", SINEW_EVALUE,
         "impossible baseline"},
        {"{" CAMS ", \"R\": [1, 0, 0, 0, 1, 0, 0, 0, 1], \"T\": [0.06, 0, 0]}", SINEW_EVALUE,
         "right camera is left of the left one"},
        {"{" CAMS ", \"R\": [1, 0, 0, 0, 1, 0, 0, 0, 1], \"T\": [0, -0.06, 0]}", SINEW_EVALUE,
         "degrees from horizontal"},
        {"{\"left\": {\"fx\": 0, \"fy\": 515, \"cx\": 318, \"cy\": 243}, \"right\": " CAM
         ", \"R\": [1, 0, 0, 0, 1, 0, 0, 0, 1], \"T\": [-0.06, 0, 0]}",
         SINEW_EVALUE, "impossible focal length"},
        {"{" CAMS ", \"R\": [1, 0, 0, 0, 1, 0, 0, 0], \"T\": [-0.06, 0, 0]}", SINEW_EVALUE,
         "9 numbers"},
        {"{" CAMS ", \"R\": [1, 0, 0, 0, 1, 0, 0, 0, 1]}", SINEW_ECONFIG, "both \"R\" and \"T\""},
        {"{" CAMS ", \"R\": [1, 0, 0, 0, 1, 0, 0, 0, 1], \"T\": [-0.06, 0, 0], \"baseline\": 0.06}",
         SINEW_ECONFIG, "no \"baseline\""},
        {"{" CAMS ", \"baseline\": 0.06}", SINEW_ECONFIG, "distortion coefficients need"},
        {"{\"left\": {\"fx\": 520, \"fy\": 515, \"cx\": 318, \"cy\": 243, \"k4\": 1}, "
         "\"right\": " CAM ", \"R\": [1, 0, 0, 0, 1, 0, 0, 0, 1], \"T\": [-0.06, 0, 0]}",
         SINEW_ECONFIG, "unknown or repeated key"},
    };
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        write_text(path, bad[i].text);
        assert_int_equal(sinew_stereo_rig_load(f->ctx, &rig, path), bad[i].status);
        const char *msg = sinew_ctx_message(f->ctx);
        if (!strstr(msg, bad[i].needle))
            fail_msg("case %zu: %s", i, msg);
        assert_non_null(strstr(msg, path));
        assert_null(strchr(msg, '\n'));
    }
    /* frames of another size than the rig's */
    write_text(path, "{" CAMS ", \"R\": [1, 0, 0, 0, 1, 0, 0, 0, 1], \"T\": [-0.06, 0, 0],"
                     " \"width\": 640, \"height\": 480}");
    assert_int_equal(sinew_stereo_rig_load(f->ctx, &rig, path), SINEW_OK);
    sinew_stereo_rectification rc;
    assert_int_equal(sinew_stereo_rectify_init(f->ctx, &rc, &rig, 320, 240), SINEW_ESIZE);
}

typedef struct alloc_ud {
    sinew_stereo_rectification rc;
    sinew_image l, z;
} alloc_ud;

static int alloc_op(sinew_ctx *ctx, void *ud)
{
    alloc_ud *u = ud;
    sinew_image a, b, c;
    int st = sinew_stereo_rectify_image(ctx, &a, &b, &u->l, &u->rc, 1);
    if (st)
        return st;
    st = sinew_stereo_unrectify_depth(ctx, &c, &u->z, &u->rc, NULL);
    sinew_image_free(&a);
    sinew_image_free(&b);
    sinew_image_free(&c);
    return st;
}

static void test_rectify_alloc_failure(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    alloc_ud u;
    sinew_stereo_rig rig;
    test_rig(&rig);
    assert_int_equal(sinew_stereo_rectify_init(ctx, &u.rc, &rig, W, H), SINEW_OK);
    render(ctx, &rig, 1, &u.l, &u.z);
    tu_fail_each_allocation("rectify", alloc_op, &u);
    sinew_image_free(&u.l);
    sinew_image_free(&u.z);
    sinew_ctx_free(ctx);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_rectify_rig_points),
        cmocka_unit_test(test_rectify_rig_images),
        cmocka_unit_test(test_rectify_identity),
        cmocka_unit_test(test_rectify_threads),
        cmocka_unit_test_setup_teardown(test_rectify_calibration_files, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test(test_rectify_alloc_failure),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
