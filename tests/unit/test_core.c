/* SPDX-License-Identifier: MIT */
/* Unit tests for flow/core.c: context, images, limits, atomic output files. */
#include "tests/support/testutil.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static void test_core_strerror_covers_all(void **state)
{
    (void)state;
    for (int s = SINEW_OK; s <= SINEW_EINTERNAL; s++)
        assert_string_not_equal(sinew_strerror(s), "unknown status");
    assert_string_equal(sinew_strerror(9999), "unknown status");
}

static void test_core_image_alloc_layout(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image img;
    assert_int_equal(sinew_image_alloc(ctx, &img, 5, 3, 3, SINEW_U16), SINEW_OK);
    assert_int_equal(img.stride % 64, 0);
    assert_true(img.stride >= 5 * 3 * 2);
    assert_int_equal(((uintptr_t)img.data) % 64, 0);
    assert_int_equal(sinew_image_row_u16(&img, 2)[14], 0);
    sinew_image cp;
    sinew_image_row_u16(&img, 1)[4] = 777;
    assert_int_equal(sinew_image_copy(ctx, &cp, &img), SINEW_OK);
    assert_true(sinew_image_same_shape(&cp, &img));
    assert_int_equal(sinew_image_row_u16(&cp, 1)[4], 777);
    sinew_image_free(&cp);
    sinew_image_free(&img);
    sinew_image_free(&img); /* double free of a zeroed struct is harmless */
    sinew_ctx_free(ctx);
}

static void test_core_pixel_limit_refuses_huge(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image img;
    assert_int_equal(sinew_image_alloc(ctx, &img, 200000, 200000, 1, SINEW_U8), SINEW_ELIMIT);
    assert_null(img.data);
    assert_non_null(strstr(sinew_ctx_message(ctx), "200000x200000"));
    assert_int_equal(sinew_ctx_set_max_pixels(ctx, 100), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &img, 11, 10, 1, SINEW_U8), SINEW_ELIMIT);
    assert_int_equal(sinew_image_alloc(ctx, &img, 10, 10, 1, SINEW_U8), SINEW_OK);
    sinew_image_free(&img);
    assert_int_equal(sinew_image_alloc(ctx, &img, 0, 10, 1, SINEW_U8), SINEW_EFORMAT);
    assert_int_equal(sinew_image_alloc(ctx, &img, 10, 10, 5, SINEW_U8), SINEW_EINVAL);
    assert_int_equal(sinew_ctx_set_max_pixels(ctx, 0), SINEW_EINVAL);
    sinew_ctx_free(ctx);
}

static void test_core_alloc_failure_is_clean(void **state)
{
    (void)state;
    tu_failalloc fa = {2, 0, 0}; /* call 1 = the context itself, call 2 = the image */
    sinew_ctx *ctx = tu_ctx_failing(&fa);
    assert_non_null(ctx);
    sinew_image img;
    assert_int_equal(sinew_image_alloc(ctx, &img, 4, 4, 1, SINEW_F32), SINEW_ENOMEM);
    assert_null(img.data);
    assert_int_equal(fa.live, 1);
    sinew_ctx_free(ctx);
    assert_int_equal(fa.live, 0);
}

static void test_core_outfile_atomic(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    char *dir = tu_tmpdir();
    char p[600];
    tu_path(p, sizeof p, dir, "a.bin");
    assert_int_equal(sinew_write_file(ctx, p, "hello", 5), SINEW_OK);
    unsigned char *buf;
    size_t len;
    assert_int_equal(sinew_read_file(ctx, &buf, &len, p, 100), SINEW_OK);
    assert_int_equal(len, 5);
    assert_memory_equal(buf, "hello", 5);
    sinew_ctx_dealloc(ctx, buf);
    assert_int_equal(sinew_read_file(ctx, &buf, &len, p, 4), SINEW_ELIMIT);
    /* abort leaves the old content */
    sinew_outfile *f;
    assert_int_equal(sinew_outfile_open(ctx, &f, p), SINEW_OK);
    fputs("partial", (FILE *)sinew_outfile_stream(f));
    sinew_outfile_abort(f);
    assert_int_equal(sinew_read_file(ctx, &buf, &len, p, 100), SINEW_OK);
    assert_int_equal(len, 5);
    sinew_ctx_dealloc(ctx, buf);
    /* a directory as output path is an error naming it */
    assert_int_equal(sinew_write_file(ctx, dir, "x", 1), SINEW_EIO);
    assert_non_null(strstr(sinew_ctx_message(ctx), "is a directory"));
    /* missing folder */
    tu_path(p, sizeof p, dir, "nope/a.bin");
    assert_int_equal(sinew_write_file(ctx, p, "x", 1), SINEW_EIO);
    assert_non_null(strstr(sinew_ctx_message(ctx), p));
    tu_rmtree(dir);
    free(dir);
    sinew_ctx_free(ctx);
}

/* The stop flag ends hashing with EINTERRUPTED naming the file; the temporaries of open
 * outputs are what a second signal removes before exiting. */
static void test_core_stop_flag_and_temporaries(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    char *dir = tu_tmpdir();
    char p[600], q[600];
    tu_path(p, sizeof p, dir, "in.bin");
    tu_write_bytes(p, "abc", 3);
    static volatile sig_atomic_t flag;
    flag = 1;
    assert_int_equal(sinew_ctx_set_cancel(ctx, &flag), SINEW_OK);
    assert_true(sinew_ctx_cancelled(ctx));
    unsigned char d[32];
    assert_int_equal(sinew_sha256_file(ctx, d, NULL, p), SINEW_EINTERRUPTED);
    assert_non_null(strstr(sinew_ctx_message(ctx), "in.bin: interrupted"));
    flag = 0;
    assert_int_equal(sinew_sha256_file(ctx, d, NULL, p), SINEW_OK);
    /* two outputs being written: both temporaries go, the finished file stays */
    sinew_outfile *f1, *f2;
    tu_path(q, sizeof q, dir, "out1.bin");
    assert_int_equal(sinew_outfile_open(ctx, &f1, q), SINEW_OK);
    tu_path(q, sizeof q, dir, "out2.bin");
    assert_int_equal(sinew_outfile_open(ctx, &f2, q), SINEW_OK);
    assert_int_equal(sinew_ctx_remove_temporaries(ctx), 2);
    char cmd[700];
    snprintf(cmd, sizeof cmd, "ls -A '%s' | grep -q tmp-", dir);
    assert_int_not_equal(system(cmd), 0);
    sinew_outfile_abort(f1);
    sinew_outfile_abort(f2);
    /* committed outputs are no longer tracked */
    assert_int_equal(sinew_write_file(ctx, q, "x", 1), SINEW_OK);
    assert_int_equal(sinew_ctx_remove_temporaries(ctx), 0);
    assert_true(tu_file_exists(q) && tu_file_exists(p));
    sinew_ctx_set_cancel(ctx, NULL);
    assert_false(sinew_ctx_cancelled(ctx));
    tu_rmtree(dir);
    free(dir);
    sinew_ctx_free(ctx);
}

/* UTF-8 validity per RFC 3629 section 4 (the byte-sequence grammar) and its section 10
 * examples of what must be refused: overlong forms (C0 AF for '/'), surrogates
 * (ED A0 80 = U+D800), code points above U+10FFFF (F4 90 80 80). */
static void test_core_utf8_rules(void **state)
{
    (void)state;
    static const struct {
        const char *s;
        size_t len;
    } cases[] = {
        {"A", 1},
        {"\xC3\xA9", 2},         /* U+00E9 */
        {"\xE2\x82\xAC", 3},     /* U+20AC */
        {"\xF0\x9F\x98\x80", 4}, /* U+1F600 */
        {"\xF4\x8F\xBF\xBF", 4}, /* U+10FFFF, the last code point */
        {"\xC0\xAF", 0},         /* overlong '/' */
        {"\xE0\x80\xAF", 0},     /* overlong '/' */
        {"\xED\xA0\x80", 0},     /* surrogate U+D800 */
        {"\xF4\x90\x80\x80", 0}, /* above U+10FFFF */
        {"\xE9", 0},             /* Latin-1 e-acute alone */
        {"\xC3", 0},             /* truncated */
        {"\x80", 0},             /* lone continuation byte */
    };
    for (size_t k = 0; k < sizeof cases / sizeof cases[0]; k++)
        assert_int_equal(sinew_utf8_len((const unsigned char *)cases[k].s, strlen(cases[k].s)),
                         cases[k].len);
    sinew_ctx *ctx = sinew_ctx_new();
    char *out;
    size_t n;
    const char in[] = "{\"p\": \"caf\xE9 \xC3\xA9\x1B\"}";
    assert_int_equal(sinew_json_utf8(ctx, &out, &n, in, strlen(in)), SINEW_OK);
    /* the Latin-1 byte E9 becomes the escape; valid UTF-8 and other bytes stay */
    assert_string_equal(out, "{\"p\": \"caf\\u00e9 \xC3\xA9\x1B\"}");
    assert_int_equal(n, strlen(out));
    sinew_ctx_dealloc(ctx, out);
    sinew_ctx_free(ctx);
}

/* Long messages keep their start and their end (the cause). */
static void test_core_text_fit(void **state)
{
    (void)state;
    char big[3000], out[64];
    memset(big, 'p', sizeof big);
    memcpy(big + sizeof big - 12, ": the cause", 12);
    sinew_text_fit(out, sizeof out, big);
    assert_int_equal(strlen(out), sizeof out - 1);
    assert_non_null(strstr(out, " ... "));
    assert_non_null(strstr(out, ": the cause"));
    assert_int_equal(out[0], 'p');
    assert_string_equal(sinew_text_fit(out, sizeof out, "short"), "short");
    /* the context keeps the cause of a message longer than SINEW_MESSAGE_MAX */
    sinew_ctx *ctx = sinew_ctx_new();
    char path[3000];
    memset(path, 'd', sizeof path - 1);
    path[sizeof path - 1] = '\0';
    unsigned char *buf;
    size_t len;
    assert_int_equal(sinew_read_file(ctx, &buf, &len, path, 10), SINEW_EIO);
    const char *m = sinew_ctx_message(ctx);
    assert_true(strlen(m) < SINEW_MESSAGE_MAX);
    assert_non_null(strstr(m, "cannot open: File name too long"));
    sinew_ctx_free(ctx);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_core_strerror_covers_all),
        cmocka_unit_test(test_core_image_alloc_layout),
        cmocka_unit_test(test_core_pixel_limit_refuses_huge),
        cmocka_unit_test(test_core_alloc_failure_is_clean),
        cmocka_unit_test(test_core_outfile_atomic),
        cmocka_unit_test(test_core_stop_flag_and_temporaries),
        cmocka_unit_test(test_core_utf8_rules),
        cmocka_unit_test(test_core_text_fit),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
