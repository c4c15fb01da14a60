/* SPDX-License-Identifier: MIT */
/* Unit tests for flow/rigid.c: the weighted rigid fit (Umeyama, PAMI 1991) recovers a
 * known motion, composition / inverse / relative pose, and the pose-file reader on the
 * 7-Scenes layout (Shotton et al., CVPR 2013), including the published files in
 * $SINEW_DATA when present. */
#include "tests/support/testutil.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static void rot_from_axis_angle(double ax, double ay, double az, double deg, double R[9])
{
    double n = sqrt(ax * ax + ay * ay + az * az), a = deg * 3.14159265358979323846 / 180;
    ax /= n;
    ay /= n;
    az /= n;
    double c = cos(a), s = sin(a), C = 1 - c;
    double M[9] = {c + ax * ax * C,      ax * ay * C - az * s, ax * az * C + ay * s,
                   ay * ax * C + az * s, c + ay * ay * C,      ay * az * C - ax * s,
                   az * ax * C - ay * s, az * ay * C + ax * s, c + az * az * C};
    memcpy(R, M, sizeof M);
}

static void test_rigid_fit_recovers_motion(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_rigid T;
    rot_from_axis_angle(0.3, -1, 0.5, 3.3, T.R);
    T.t[0] = 0.012;
    T.t[1] = -0.004;
    T.t[2] = 0.0071;
    enum { N = 500 };
    float *rows = calloc(N * 7, sizeof(float));
    unsigned seed = 12345;
    for (int i = 0; i < N; i++) {
        float *r = rows + i * 7;
        double p[3], q[3];
        for (int k = 0; k < 3; k++) {
            seed = seed * 1103515245u + 12345u;
            p[k] = ((seed >> 8) & 0xffff) / 65535.0 * 2 - 1 + (k == 2 ? 3 : 0);
        }
        sinew_rigid_apply(&T, p, q);
        r[0] = 1;
        for (int k = 0; k < 3; k++) {
            r[1 + k] = (float)p[k];
            r[4 + k] = (float)q[k];
        }
    }
    /* Outliers with weight 0 must not matter. */
    rows[7 * 10 + 0] = 0;
    rows[7 * 10 + 4] += 5;
    sinew_rigid F;
    double rms, dt, deg;
    assert_int_equal(sinew_rigid_fit(ctx, &F, &rms, rows + 1, rows + 4, rows, N, 7), SINEW_OK);
    sinew_rigid_distance(&F, &T, &dt, &deg);
    assert_true(dt < 1e-6);
    assert_true(deg < 1e-4);
    assert_true(rms < 1e-6);
    /* A mirror image is not a rotation: the fit stays proper (det R = +1). */
    for (int i = 0; i < N; i++)
        rows[i * 7 + 4] = -rows[i * 7 + 1];
    assert_int_equal(sinew_rigid_fit(ctx, &F, NULL, rows + 1, rows + 4, rows, N, 7), SINEW_OK);
    double det = F.R[0] * (F.R[4] * F.R[8] - F.R[5] * F.R[7]) -
                 F.R[1] * (F.R[3] * F.R[8] - F.R[5] * F.R[6]) +
                 F.R[2] * (F.R[3] * F.R[7] - F.R[4] * F.R[6]);
    assert_near(det, 1, 1e-9);
    /* Collinear points are refused. */
    for (int i = 0; i < N; i++)
        for (int k = 0; k < 3; k++)
            rows[i * 7 + 1 + k] = rows[i * 7 + 4 + k] = (float)(i * 0.01);
    assert_int_equal(sinew_rigid_fit(ctx, &F, NULL, rows + 1, rows + 4, NULL, N, 7), SINEW_EVALUE);
    assert_int_equal(sinew_rigid_fit(ctx, &F, NULL, rows + 1, rows + 4, NULL, 2, 7), SINEW_EVALUE);
    rows[0] = -1;
    assert_int_equal(sinew_rigid_fit(ctx, &F, NULL, rows + 1, rows + 4, rows, N, 7), SINEW_EVALUE);
    free(rows);
    /* Composition, inverse and relative pose. */
    sinew_rigid I, Ti, P0, P1, rel;
    sinew_rigid_invert(&T, &Ti);
    sinew_rigid_compose(&T, &Ti, &I);
    sinew_rigid_identity(&P0);
    sinew_rigid_distance(&I, &P0, &dt, &deg);
    assert_true(dt < 1e-12 && deg < 1e-6);
    /* Camera 1 = camera 0 moved by T in the world: a world point seen by camera 0 at X
     * is seen by camera 1 at inv(P1) P0 X. */
    P1 = T;
    sinew_rigid_relative(&P0, &P1, &rel);
    sinew_rigid_distance(&rel, &Ti, &dt, &deg);
    assert_true(dt < 1e-12 && deg < 1e-6);
    sinew_ctx_free(ctx);
}

static void test_rigid_pose_file(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    char *dir = tu_tmpdir();
    char p[600];
    tu_path(p, sizeof p, dir, "pose.txt");
    /* 7-Scenes layout: tab separated, CRLF (the dataset's pose files). */
    const char *t = "  1.0e+000\t0\t0\t0.5\t\r\n0 1 0 -0.25\r\n0 0 1 2\r\n0 0 0 1\r\n";
    tu_write_bytes(p, t, strlen(t));
    sinew_rigid T;
    assert_int_equal(sinew_rigid_load(ctx, &T, p), SINEW_OK);
    assert_near(T.t[0], 0.5, 0);
    assert_near(T.t[2], 2, 0);
    /* the 3x4 [R | t] rows of a sequence.json pose, and back */
    double pose[12], x[3] = {1, 2, 3}, y[3], z[3];
    sinew_rigid_to_pose(pose, &T);
    assert_true(pose[3] == 0.5 && pose[7] == -0.25 && pose[11] == 2 && pose[0] == 1);
    sinew_rigid U;
    sinew_rigid_from_pose(&U, pose);
    assert_memory_equal(&U, &T, sizeof U);
    /* rotation alone: the point moved minus the translation */
    sinew_rigid_apply(&T, x, y);
    sinew_rigid_rotate(&T, x, z);
    for (int k = 0; k < 3; k++)
        assert_true(z[k] == y[k] - T.t[k]);
    const char *bad = "2 0 0 0  0 1 0 0  0 0 1 0  0 0 0 1";
    tu_write_bytes(p, bad, strlen(bad));
    assert_int_equal(sinew_rigid_load(ctx, &T, p), SINEW_EVALUE);
    assert_non_null(strstr(sinew_ctx_message(ctx), "pose.txt"));
    const char *shortm = "1 0 0 0  0 1 0 0  0 0 1 0";
    tu_write_bytes(p, shortm, strlen(shortm));
    assert_int_equal(sinew_rigid_load(ctx, &T, p), SINEW_EFORMAT);
    char buf[600];
    if (tu_data_file(buf, sizeof buf, "7scenes/tsdf-fusion-frames-150-154/frame-000150.pose.txt")) {
        assert_int_equal(sinew_rigid_load(ctx, &T, buf), SINEW_OK);
        assert_near(T.t[0], -9.1287065e-001, 1e-12); /* first row, last column of the file */
    }
    tu_rmtree(dir);
    free(dir);
    sinew_ctx_free(ctx);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_rigid_fit_recovers_motion),
        cmocka_unit_test(test_rigid_pose_file),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
