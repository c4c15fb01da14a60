/* SPDX-License-Identifier: MIT */
/* Unit tests for flow/check_io.c, the check folder on disk (docs/formats.md "Check
 * output"): a written folder reads back exactly, confidence.png holds
 * round(65535 * confidence) as the format defines, check.json is the given text with a
 * final newline, and bad folders are refused with a message naming the file. */
#include "tests/support/testutil.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define W 5
#define H 3

typedef struct folder {
    sinew_image fb, mask, conf;
} folder;

static void folder_make(sinew_ctx *ctx, folder *f)
{
    assert_int_equal(sinew_image_alloc(ctx, &f->fb, W, H, 1, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &f->mask, W, H, 1, SINEW_U8), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &f->conf, W, H, 1, SINEW_F32), SINEW_OK);
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++) {
            int i = y * W + x;
            sinew_image_row_f32(&f->fb, y)[x] = (float)i * 0.25f;
            sinew_image_row_u8(&f->mask, y)[x] = (uint8_t)(i % 3 ? 1u << (i % 8) : 0);
            sinew_image_row_f32(&f->conf, y)[x] = (float)i / (float)(W * H - 1);
        }
}

static void folder_free(folder *f)
{
    sinew_image_free(&f->fb);
    sinew_image_free(&f->mask);
    sinew_image_free(&f->conf);
}

static void test_check_io_roundtrip(void **state)
{
    tu_fixture *f = *state;
    folder a;
    folder_make(f->ctx, &a);
    char dir[700], p[800], mp[800], cp[800];
    tu_path(dir, sizeof dir, f->dir, "chk");
    const char *text = "{\"format\": \"sinew-check\"}";
    assert_int_equal(sinew_check_folder_write(f->ctx, dir, &a.fb, &a.mask, &a.conf, text),
                     SINEW_OK);
    /* a second write into the existing folder replaces the files */
    assert_int_equal(sinew_check_folder_write(f->ctx, dir, &a.fb, &a.mask, &a.conf, text),
                     SINEW_OK);

    sinew_image m, c, fb, c16;
    assert_int_equal(sinew_check_folder_read(f->ctx, &m, &c, mp, cp, sizeof mp, dir), SINEW_OK);
    assert_string_equal(mp, tu_path(p, sizeof p, dir, "mask.png"));
    assert_string_equal(cp, tu_path(p, sizeof p, dir, "confidence.npy"));
    assert_int_equal(sinew_map_read(f->ctx, &fb, tu_path(p, sizeof p, dir, "fb_error.npy")),
                     SINEW_OK);
    assert_int_equal(sinew_image_read(f->ctx, &c16, tu_path(p, sizeof p, dir, "confidence.png")),
                     SINEW_OK);
    assert_int_equal(c16.type, SINEW_U16);
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++) {
            float cv = sinew_image_row_f32(&a.conf, y)[x];
            assert_int_equal(sinew_image_row_u8(&m, y)[x], sinew_image_row_u8(&a.mask, y)[x]);
            assert_true(sinew_image_row_f32(&c, y)[x] == cv);
            assert_true(sinew_image_row_f32(&fb, y)[x] == sinew_image_row_f32(&a.fb, y)[x]);
            /* docs/formats.md: confidence.png = round(65535 * confidence), 16-bit gray */
            long want = (long)(65535.0 * (double)cv + 0.5);
            assert_int_equal(sinew_image_row_u16(&c16, y)[x], want);
        }
    /* check.json is the text as given plus the final newline */
    FILE *fp = fopen(tu_path(p, sizeof p, dir, "check.json"), "rb");
    assert_non_null(fp);
    char got[64] = {0};
    size_t n = fread(got, 1, sizeof got - 1, fp);
    fclose(fp);
    assert_int_equal(n, strlen(text) + 1);
    assert_memory_equal(got, text, strlen(text));
    assert_int_equal(got[n - 1], '\n');
    sinew_image_free(&m);
    sinew_image_free(&c);
    sinew_image_free(&fb);
    sinew_image_free(&c16);
    folder_free(&a);
}

static void expect_message(sinew_ctx *ctx, const char *part)
{
    const char *msg = sinew_ctx_message(ctx);
    if (!msg || !strstr(msg, part))
        fail_msg("message '%s' does not contain '%s'", msg ? msg : "(none)", part);
}

static void test_check_io_bad_folders(void **state)
{
    tu_fixture *f = *state;
    folder a;
    folder_make(f->ctx, &a);
    char dir[700], p[800], mp[800], cp[800];
    sinew_image m, c;

    /* the output is a file, or its parent is missing */
    tu_path(p, sizeof p, f->dir, "afile");
    tu_write_bytes(p, "x", 1);
    assert_int_equal(sinew_check_folder_write(f->ctx, p, &a.fb, &a.mask, &a.conf, "{}"), SINEW_EIO);
    expect_message(f->ctx, "afile: exists and is not a folder");
    tu_path(p, sizeof p, f->dir, "no/such");
    assert_int_equal(sinew_check_folder_write(f->ctx, p, &a.fb, &a.mask, &a.conf, "{}"), SINEW_EIO);
    expect_message(f->ctx, "no/such: cannot create folder");

    /* an empty folder: the missing mask is named */
    tu_path(dir, sizeof dir, f->dir, "chk");
    assert_int_equal(sinew_check_folder_write(f->ctx, dir, &a.fb, &a.mask, &a.conf, "{}"),
                     SINEW_OK);
    tu_path(p, sizeof p, f->dir, "empty");
    assert_int_equal(sinew_check_folder_write(f->ctx, p, &a.fb, &a.mask, &a.conf, "{}"), SINEW_OK);
    remove(tu_path(mp, sizeof mp, p, "mask.png"));
    assert_int_not_equal(sinew_check_folder_read(f->ctx, &m, &c, mp, cp, sizeof mp, p), SINEW_OK);
    expect_message(f->ctx, "mask.png");
    assert_null(m.data);
    assert_null(c.data);

    /* confidence outside [0, 1] (NaN included) and of another size */
    sinew_image_row_f32(&a.conf, 1)[2] = NAN;
    assert_int_equal(sinew_check_folder_write(f->ctx, dir, &a.fb, &a.mask, &a.conf, "{}"),
                     SINEW_OK);
    assert_int_equal(sinew_check_folder_read(f->ctx, &m, &c, mp, cp, sizeof mp, dir), SINEW_EVALUE);
    expect_message(f->ctx, "confidence.npy: values must lie in [0, 1]");
    sinew_image big;
    assert_int_equal(sinew_image_alloc(f->ctx, &big, W + 1, H, 1, SINEW_F32), SINEW_OK);
    memset(big.data, 0, (size_t)big.stride * H);
    assert_int_equal(sinew_npy_write_image(f->ctx, cp, &big, 0), SINEW_OK);
    assert_int_equal(sinew_check_folder_read(f->ctx, &m, &c, mp, cp, sizeof mp, dir), SINEW_ESIZE);
    expect_message(f->ctx, "confidence.npy: size differs from mask.png");

    /* images of different sizes; a path that does not fit the caller's buffers */
    assert_int_equal(sinew_check_folder_write(f->ctx, dir, &a.fb, &a.mask, &big, "{}"),
                     SINEW_ESIZE);
    expect_message(f->ctx, "chk: the check's images differ in size");
    assert_int_equal(sinew_check_folder_read(f->ctx, &m, &c, mp, cp, 8, dir), SINEW_EINVAL);
    sinew_image_free(&big);
    folder_free(&a);
}

typedef struct alloc_case {
    const char *dir;
} alloc_case;

static int write_and_read(sinew_ctx *ctx, void *ud)
{
    const alloc_case *ac = ud;
    folder a = {0};
    char mp[800], cp[800];
    sinew_image m, c;
    int st = sinew_image_alloc(ctx, &a.fb, W, H, 1, SINEW_F32);
    if (!st)
        st = sinew_image_alloc(ctx, &a.mask, W, H, 1, SINEW_U8);
    if (!st)
        st = sinew_image_alloc(ctx, &a.conf, W, H, 1, SINEW_F32);
    if (!st) {
        memset(a.fb.data, 0, (size_t)a.fb.stride * H);
        memset(a.mask.data, 0, (size_t)a.mask.stride * H);
        memset(a.conf.data, 0, (size_t)a.conf.stride * H);
        st = sinew_check_folder_write(ctx, ac->dir, &a.fb, &a.mask, &a.conf, "{}");
    }
    if (!st)
        st = sinew_check_folder_read(ctx, &m, &c, mp, cp, sizeof mp, ac->dir);
    if (!st) {
        sinew_image_free(&m);
        sinew_image_free(&c);
    }
    sinew_image_free(&a.fb);
    sinew_image_free(&a.mask);
    sinew_image_free(&a.conf);
    return st;
}

static void test_check_io_allocation_failures(void **state)
{
    tu_fixture *f = *state;
    char dir[700];
    alloc_case ac = {tu_path(dir, sizeof dir, f->dir, "chk")};
    tu_fail_each_allocation("check folder write+read", write_and_read, &ac);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_check_io_roundtrip, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_check_io_bad_folders, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_check_io_allocation_failures, tu_fixture_setup,
                                        tu_fixture_teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
