/* SPDX-License-Identifier: MIT */
/* Unit tests for flow/report.c: the in-memory PNG encoder (decoded back with libpng's
 * reader as the reference), the page for a small run folder, tolerance of missing
 * parts, manifest errors and clean failure under allocation faults. */
#include "tests/support/testutil.h"

#include <math.h>
#include <png.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

static void test_report_png_roundtrip(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    for (int ch = 1; ch <= 4; ch++) {
        sinew_image img;
        assert_int_equal(sinew_image_alloc(ctx, &img, 13, 7, ch, SINEW_U8), SINEW_OK);
        for (int y = 0; y < 7; y++)
            for (int x = 0; x < 13 * ch; x++)
                sinew_image_row_u8(&img, y)[x] = (uint8_t)(x * 17 + y * 31);
        unsigned char *png = NULL;
        size_t len = 0;
        assert_int_equal(sinew_png_encode(ctx, &png, &len, &img), SINEW_OK);
        assert_true(len > 8 && !memcmp(png, "\x89PNG\r\n\x1a\n", 8));
        /* Reference decoder: libpng's simplified reader. */
        png_image im;
        memset(&im, 0, sizeof im);
        im.version = PNG_IMAGE_VERSION;
        assert_true(png_image_begin_read_from_memory(&im, png, len));
        assert_int_equal(im.width, 13);
        assert_int_equal(im.height, 7);
        assert_int_equal(PNG_IMAGE_SAMPLE_CHANNELS(im.format), ch);
        unsigned char buf[13 * 7 * 4];
        assert_true(png_image_finish_read(&im, NULL, buf, 13 * ch, NULL));
        for (int y = 0; y < 7; y++)
            assert_memory_equal(buf + y * 13 * ch, sinew_image_row_u8(&img, y), 13 * (size_t)ch);
        sinew_ctx_dealloc(ctx, png);
        sinew_image_free(&img);
    }
    sinew_image f;
    unsigned char *png;
    size_t len;
    assert_int_equal(sinew_image_alloc(ctx, &f, 2, 2, 1, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_png_encode(ctx, &png, &len, &f), SINEW_EINVAL);
    sinew_image_free(&f);
    sinew_ctx_free(ctx);
}

/* A .npy file (format 1.0, '<f4', C order) written by hand (tu_write_npy). */
static void write_npy(const char *path, const float *data, int h, int w, int c)
{
    char dict[128];
    if (c > 1)
        snprintf(dict, sizeof dict,
                 "{'descr': '<f4', 'fortran_order': False, 'shape': (%d, %d, %d), }", h, w, c);
    else
        snprintf(dict, sizeof dict, "{'descr': '<f4', 'fortran_order': False, 'shape': (%d, %d), }",
                 h, w);
    tu_write_npy(path, 1, dict, data, (size_t)h * w * c * 4);
}

static char *read_text(const char *path)
{
    FILE *f = fopen(path, "rb");
    if (!f)
        return NULL;
    fseek(f, 0, SEEK_END);
    long n = ftell(f);
    fseek(f, 0, SEEK_SET);
    char *s = malloc((size_t)n + 1);
    size_t got = fread(s, 1, (size_t)n, f);
    s[got] = 0;
    fclose(f);
    return s;
}

/* Run folder: one pictured pair with flow, confidence and mask; a second failed pair. */
static void make_run(const char *dir)
{
    char p[512], frame[512];
    enum { W = 16, H = 12 };
    snprintf(frame, sizeof frame, "%s/f0.pgm", dir);
    unsigned char pgm[32 + W * H];
    int hl = snprintf((char *)pgm, 32, "P5\n%d %d\n255\n", W, H);
    for (int i = 0; i < W * H; i++)
        pgm[hl + i] = (unsigned char)(i * 7);
    tu_write_bytes(frame, pgm, (size_t)hl + W * H);
    snprintf(p, sizeof p, "%s/pairs", dir);
    assert_int_equal(mkdir(p, 0777), 0);
    snprintf(p, sizeof p, "%s/pairs/000000-000001", dir);
    assert_int_equal(mkdir(p, 0777), 0);
    float flow[H][W][2], conf[H][W];
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++) {
            flow[y][x][0] = (float)(x - 8) / 4;
            flow[y][x][1] = (float)(y - 6) / 4;
            conf[y][x] = (float)x / (W - 1);
        }
    snprintf(p, sizeof p, "%s/pairs/000000-000001/forward.npy", dir);
    write_npy(p, &flow[0][0][0], H, W, 2);
    snprintf(p, sizeof p, "%s/pairs/000000-000001/confidence.npy", dir);
    write_npy(p, &conf[0][0], H, W, 1);
    /* mask: the left quarter has bit 0 -> kept fraction 0.75 */
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image m;
    assert_int_equal(sinew_image_alloc(ctx, &m, W, H, 1, SINEW_U8), SINEW_OK);
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W / 4; x++)
            sinew_image_row_u8(&m, y)[x] = 1;
    unsigned char *png;
    size_t len;
    assert_int_equal(sinew_png_encode(ctx, &png, &len, &m), SINEW_OK);
    snprintf(p, sizeof p, "%s/pairs/000000-000001/mask.png", dir);
    tu_write_bytes(p, png, len);
    sinew_ctx_dealloc(ctx, png);
    sinew_image_free(&m);
    sinew_ctx_free(ctx);
    char man[2048];
    int n = snprintf(man, sizeof man,
                     "{\"format\": \"sinew run manifest 1\", \"frames\": 3,\n"
                     " \"inputs\": [{\"path\": \"%s\", \"role\": \"color\"}],\n"
                     " \"pairs\": [{\"pair\": \"000000-000001\", \"frames\": [0, 1], "
                     "\"status\": \"done\", \"stats\": {\"epe\": 0.25}},\n"
                     "  {\"pair\": \"000001-000002\", \"frames\": [1, 2], \"status\": "
                     "\"failed\", \"error\": \"x<y\"}]}\n",
                     frame);
    snprintf(p, sizeof p, "%s/manifest.json", dir);
    tu_write_bytes(p, man, (size_t)n);
}

static void test_report_small_run(void **state)
{
    (void)state;
    char *dir = tu_tmpdir();
    make_run(dir);
    char out[512];
    tu_path(out, sizeof out, dir, "report.html");
    sinew_ctx *ctx = sinew_ctx_new();
    assert_int_equal(sinew_report_write(ctx, out, dir, NULL), SINEW_OK);
    char *s = read_text(out);
    assert_non_null(s);
    assert_true(strstr(s, "<!DOCTYPE html>") == s);
    assert_non_null(strstr(s, "default-src 'none'"));
    assert_non_null(strstr(s, "000000-000001"));
    assert_non_null(strstr(s, "x&lt;y")); /* error text escaped */
    int imgs = 0;
    for (const char *q = s; (q = strstr(q, "src=\"data:image/png;base64,")); q++)
        imgs++;
    /* wheel legend + 4 thumbnails of pair 0; pair 1 has placeholders only (its frame,
     * colour input 1, is not listed) */
    assert_int_equal(imgs, 1 + 4);
    assert_non_null(strstr(s, "frame not listed"));
    int svgs = 0;
    for (const char *q = s; (q = strstr(q, "<svg")); q++)
        svgs++;
    assert_int_equal(svgs, 3); /* kept (from mask), confidence (from npy), epe (stats) */
    assert_non_null(strstr(s, ">0.750<")); /* derived kept fraction */
    assert_non_null(strstr(s, ">0.500<")); /* mean confidence of x/15, x = 0..15 */
    assert_null(strstr(s, "src=\"http"));
    /* Flow thumbnails share one wheel radius: the largest known magnitude of the pictured
     * flow, here |(-8, -6)| / 4 = 2.5 px at pixel (0, 0). */
    assert_non_null(strstr(s, "wheel radius 2.5 px"));
    free(s);
    /* With stats.flow_max on every done pair, that is the run's radius. */
    char man[512];
    tu_path(man, sizeof man, dir, "manifest.json");
    const char *m2 = "{\"pairs\": [{\"pair\": \"000000-000001\", \"status\": \"done\", "
                     "\"stats\": {\"flow_max\": 7.25}}]}";
    tu_write_bytes(man, m2, strlen(m2));
    assert_int_equal(sinew_report_write(ctx, out, dir, NULL), SINEW_OK);
    s = read_text(out);
    assert_non_null(strstr(s, "wheel radius 7.25 px"));
    free(s);
    sinew_ctx_free(ctx);
    tu_rmtree(dir);
    free(dir);
}

static void test_report_manifest_errors(void **state)
{
    (void)state;
    char *dir = tu_tmpdir();
    char out[512], man[512];
    tu_path(out, sizeof out, dir, "report.html");
    tu_path(man, sizeof man, dir, "manifest.json");
    sinew_ctx *ctx = sinew_ctx_new();
    assert_int_not_equal(sinew_report_write(ctx, out, dir, NULL), SINEW_OK);
    assert_non_null(strstr(sinew_ctx_message(ctx), "manifest.json"));
    tu_write_bytes(man, "{\"pairs\": [", 11);
    assert_int_equal(sinew_report_write(ctx, out, dir, NULL), SINEW_EFORMAT);
    assert_non_null(strstr(sinew_ctx_message(ctx), "manifest.json"));
    tu_write_bytes(man, "[1, 2]", 6);
    assert_int_equal(sinew_report_write(ctx, out, dir, NULL), SINEW_EFORMAT);
    assert_false(tu_file_exists(out));
    /* Tolerated: pairs without names, hostile names, no folders at all. */
    const char *odd = "{\"pairs\": [{}, {\"pair\": \"../../etc\"}, {\"pair\": 5, \"stats\": 3}]}";
    tu_write_bytes(man, odd, strlen(odd));
    assert_int_equal(sinew_report_write(ctx, out, dir, NULL), SINEW_OK);
    assert_true(tu_file_exists(out));
    sinew_report_options o;
    sinew_report_options_default(&o);
    o.thumb_width = 8;
    assert_int_equal(sinew_report_write(ctx, out, dir, &o), SINEW_EINVAL);
    sinew_ctx_free(ctx);
    tu_rmtree(dir);
    free(dir);
}

static void test_report_alloc_failure_is_clean(void **state)
{
    (void)state;
    char *dir = tu_tmpdir();
    make_run(dir);
    char out[512];
    tu_path(out, sizeof out, dir, "r.html");
    /* Fail the n-th allocation of the report for n = 1, 2, ... until a run makes fewer
     * allocations than n (every allocation point has then failed once). */
    long n = 1;
    for (;; n++) {
        tu_failalloc fa = {0, 0, 0};
        sinew_ctx *ctx = tu_ctx_failing(&fa);
        assert_non_null(ctx);
        long base = fa.calls;
        fa.fail_at = base + n;
        int st = sinew_report_write(ctx, out, dir, NULL);
        int reached = fa.calls >= base + n;
        if (st != SINEW_OK)
            assert_false(tu_file_exists(out));
        else
            remove(out);
        assert_int_equal(fa.live, 1); /* only the context itself is left */
        sinew_ctx_free(ctx);
        if (!reached) {
            assert_int_equal(st, SINEW_OK);
            break;
        }
        assert_true(n < 5000);
    }
    assert_true(n > 10);
    tu_rmtree(dir);
    free(dir);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_report_png_roundtrip),
        cmocka_unit_test(test_report_small_run),
        cmocka_unit_test(test_report_manifest_errors),
        cmocka_unit_test(test_report_alloc_failure_is_clean),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
