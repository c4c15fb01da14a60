/* SPDX-License-Identifier: MIT */
/* Unit tests for image files (flow/io_png.c, io_jpeg.c, io_pnm.c): round trips of the
 * PNG writer for 8/16 bit and 1-4 channels, PNG variants written with libpng directly
 * (palette, tRNS, low bit depths, Adam7), JPEG via TurboJPEG, binary PGM/PPM, malformed
 * files, allocation-failure injection, and external checks on the published frames in
 * $SINEW_DATA (16-bit depth codes compared with an independent zlib-based decoder
 * in Python's standard library). */
#include "tests/support/testutil.h"

#include <png.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <turbojpeg.h>

static unsigned sample(int x, int y, int c, int bits)
{
    unsigned v = (unsigned)(x * 7919 + y * 104729 + c * 13 + 5);
    return bits == 16 ? v & 0xffffu : v & 0xffu;
}

static void test_io_image_png_roundtrip(void **state)
{
    tu_fixture *f = *state;
    for (int bits = 8; bits <= 16; bits += 8)
        for (int ch = 1; ch <= 4; ch++) {
            sinew_image a, b;
            sinew_type t = bits == 16 ? SINEW_U16 : SINEW_U8;
            assert_int_equal(sinew_image_alloc(f->ctx, &a, 37, 11, ch, t), SINEW_OK);
            for (int y = 0; y < 11; y++)
                for (int x = 0; x < 37; x++)
                    for (int c = 0; c < ch; c++) {
                        unsigned v = sample(x, y, c, bits);
                        if (x == 0 && y == 0)
                            v = bits == 16 ? 65535 : 255;
                        if (bits == 16)
                            sinew_image_row_u16(&a, y)[x * ch + c] = (uint16_t)v;
                        else
                            sinew_image_row_u8(&a, y)[x * ch + c] = (uint8_t)v;
                    }
            const char *p = tu_fixture_path(f, "r.png");
            assert_int_equal(sinew_image_write_png(f->ctx, p, &a), SINEW_OK);
            assert_int_equal(sinew_image_read(f->ctx, &b, p), SINEW_OK);
            assert_true(sinew_image_same_shape(&a, &b));
            for (int y = 0; y < 11; y++)
                assert_memory_equal(sinew_image_row(&a, y), sinew_image_row(&b, y),
                                    (size_t)37 * (size_t)ch * (size_t)(bits / 8));
            sinew_image_free(&a);
            sinew_image_free(&b);
        }
    sinew_image bad;
    assert_int_equal(sinew_image_alloc(f->ctx, &bad, 2, 2, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_write_png(f->ctx, tu_fixture_path(f, "f.png"), &bad),
                     SINEW_EINVAL);
    assert_false(tu_file_exists(f->p));
    sinew_image_free(&bad);
}

/* Write a PNG with libpng directly (rows packed as PNG stores them). */
static void write_png_raw(const char *path, int w, int h, int bits, int ctype, int interlace,
                          const unsigned char *rows, size_t rowbytes, const png_color *pal,
                          int npal, const unsigned char *trans, int ntrans)
{
    FILE *fp = fopen(path, "wb");
    assert_non_null(fp);
    png_structp png = png_create_write_struct(PNG_LIBPNG_VER_STRING, NULL, NULL, NULL);
    png_infop info = png_create_info_struct(png);
    assert_non_null(info);
    if (setjmp(png_jmpbuf(png)))
        fail_msg("libpng could not write the fixture");
    png_init_io(png, fp);
    png_set_IHDR(png, info, (png_uint_32)w, (png_uint_32)h, bits, ctype,
                 interlace ? PNG_INTERLACE_ADAM7 : PNG_INTERLACE_NONE, PNG_COMPRESSION_TYPE_DEFAULT,
                 PNG_FILTER_TYPE_DEFAULT);
    if (pal)
        png_set_PLTE(png, info, pal, npal);
    if (trans)
        png_set_tRNS(png, info, trans, ntrans, NULL);
    png_write_info(png, info);
    png_bytep ptrs[64];
    assert_true(h <= 64);
    for (int y = 0; y < h; y++)
        ptrs[y] = (png_bytep)(rows + (size_t)y * rowbytes);
    png_write_image(png, ptrs);
    png_write_end(png, NULL);
    png_destroy_write_struct(&png, &info);
    assert_int_equal(fclose(fp), 0);
}

static void test_io_image_png_variants(void **state)
{
    tu_fixture *f = *state;
    sinew_image b;
    const char *p = tu_fixture_path(f, "v.png");
    /* palette: expands to RGB; with tRNS to RGBA */
    const png_color pal[3] = {{10, 20, 30}, {200, 100, 0}, {1, 2, 3}};
    const unsigned char idx[6] = {0, 1, 2, 2, 1, 0};
    write_png_raw(p, 3, 2, 8, PNG_COLOR_TYPE_PALETTE, 0, idx, 3, pal, 3, NULL, 0);
    assert_int_equal(sinew_image_read(f->ctx, &b, p), SINEW_OK);
    assert_int_equal(b.channels, 3);
    assert_int_equal(b.type, SINEW_U8);
    assert_memory_equal(sinew_image_row_u8(&b, 1), "\x01\x02\x03\xc8\x64\x00\x0a\x14\x1e", 9);
    sinew_image_free(&b);
    const unsigned char tr[2] = {0, 128};
    write_png_raw(p, 3, 2, 8, PNG_COLOR_TYPE_PALETTE, 0, idx, 3, pal, 3, tr, 2);
    assert_int_equal(sinew_image_read(f->ctx, &b, p), SINEW_OK);
    assert_int_equal(b.channels, 4);
    assert_memory_equal(sinew_image_row_u8(&b, 0),
                        "\x0a\x14\x1e\x00\xc8\x64\x00\x80\x01\x02\x03\xff", 12);
    sinew_image_free(&b);
    /* 1-bit and 2-bit gray expand to 8 bits (scaled to 0..255 by the PNG rules) */
    const unsigned char g1[2] = {0xa5, 0x80}; /* 1010 0101 1 */
    write_png_raw(p, 9, 1, 1, PNG_COLOR_TYPE_GRAY, 0, g1, 2, NULL, 0, NULL, 0);
    assert_int_equal(sinew_image_read(f->ctx, &b, p), SINEW_OK);
    assert_int_equal(b.channels, 1);
    assert_memory_equal(sinew_image_row_u8(&b, 0), "\xff\x00\xff\x00\x00\xff\x00\xff\xff", 9);
    sinew_image_free(&b);
    const unsigned char g2[1] = {0x1b}; /* 00 01 10 11 */
    write_png_raw(p, 4, 1, 2, PNG_COLOR_TYPE_GRAY, 0, g2, 1, NULL, 0, NULL, 0);
    assert_int_equal(sinew_image_read(f->ctx, &b, p), SINEW_OK);
    assert_memory_equal(sinew_image_row_u8(&b, 0), "\x00\x55\xaa\xff", 4);
    sinew_image_free(&b);
    /* 16-bit gray, Adam7 interlaced: raw codes survive (e.g. depth in millimetres) */
    unsigned char d16[9 * 18];
    for (int y = 0; y < 9; y++)
        for (int x = 0; x < 9; x++) {
            unsigned v = sample(x, y, 0, 16);
            d16[y * 18 + 2 * x] = (unsigned char)(v >> 8);
            d16[y * 18 + 2 * x + 1] = (unsigned char)v;
        }
    write_png_raw(p, 9, 9, 16, PNG_COLOR_TYPE_GRAY, 1, d16, 18, NULL, 0, NULL, 0);
    assert_int_equal(sinew_image_read(f->ctx, &b, p), SINEW_OK);
    assert_int_equal(b.type, SINEW_U16);
    for (int y = 0; y < 9; y++)
        for (int x = 0; x < 9; x++)
            assert_int_equal(sinew_image_row_u16(&b, y)[x], sample(x, y, 0, 16));
    sinew_image_free(&b);
    /* gray+alpha 8-bit stays 2 channels, unpremultiplied */
    const unsigned char ga[4] = {100, 0, 50, 7};
    write_png_raw(p, 2, 1, 8, PNG_COLOR_TYPE_GRAY_ALPHA, 0, ga, 4, NULL, 0, NULL, 0);
    assert_int_equal(sinew_image_read(f->ctx, &b, p), SINEW_OK);
    assert_int_equal(b.channels, 2);
    assert_memory_equal(sinew_image_row_u8(&b, 0), ga, 4);
    sinew_image_free(&b);
}

/* Crafted PNG bytes: signature, IHDR for w x h 8-bit gray, empty IDAT, IEND. */
static uint32_t crc32_png(const unsigned char *p, size_t n)
{
    uint32_t c = 0xffffffffu;
    for (size_t i = 0; i < n; i++) {
        c ^= p[i];
        for (int k = 0; k < 8; k++)
            c = c & 1 ? 0xedb88320u ^ (c >> 1) : c >> 1;
    }
    return c ^ 0xffffffffu;
}

static size_t put_chunk(unsigned char *o, const char *type, const unsigned char *d, uint32_t n)
{
    o[0] = (unsigned char)(n >> 24);
    o[1] = (unsigned char)(n >> 16);
    o[2] = (unsigned char)(n >> 8);
    o[3] = (unsigned char)n;
    memcpy(o + 4, type, 4);
    if (n)
        memcpy(o + 8, d, n);
    uint32_t c = crc32_png(o + 4, n + 4);
    o[8 + n] = (unsigned char)(c >> 24);
    o[9 + n] = (unsigned char)(c >> 16);
    o[10 + n] = (unsigned char)(c >> 8);
    o[11 + n] = (unsigned char)c;
    return 12 + n;
}

static void expect_image_error(tu_fixture *f, const char *name, const void *bytes, size_t n,
                               int want, const char *msg_part)
{
    const char *p = tu_fixture_path(f, name);
    tu_write_bytes(p, bytes, n);
    sinew_image b;
    int rc = sinew_image_read(f->ctx, &b, p);
    const char *m = sinew_ctx_message(f->ctx);
    if (rc != want || !strstr(m, p) || (msg_part && !strstr(m, msg_part)))
        fail_msg("%s: got %d '%s', want %d '%s'", name, rc, m, want, msg_part);
    assert_null(b.data);
}

static void test_io_image_malformed_png(void **state)
{
    tu_fixture *f = *state;
    unsigned char o[128];
    memcpy(o, "\x89PNG\r\n\x1a\n", 8);
    size_t n = 8;
    const unsigned char ihdr[13] = {0, 3, 0x0d, 0x40, 0, 3, 0x0d, 0x40, 8, 0, 0, 0, 0};
    n += put_chunk(o + n, "IHDR", ihdr, 13);
    n += put_chunk(o + n, "IDAT", NULL, 0);
    n += put_chunk(o + n, "IEND", NULL, 0);
    expect_image_error(f, "huge.png", o, n, SINEW_ELIMIT, "200000x200000");
    expect_image_error(f, "empty.png", "", 0, SINEW_EFORMAT, "empty file");
    expect_image_error(f, "magic.png", "GIF89a....", 10, SINEW_EFORMAT, "not a PNG");
    expect_image_error(f, "sig.png", o, 8, SINEW_EFORMAT, "truncated");
    /* a real file cut in half, and one with a damaged IDAT CRC */
    sinew_image a;
    assert_int_equal(sinew_image_alloc(f->ctx, &a, 64, 64, 3, SINEW_U8), SINEW_OK);
    for (int y = 0; y < 64; y++)
        for (int x = 0; x < 192; x++)
            sinew_image_row_u8(&a, y)[x] = (uint8_t)sample(x, y, 0, 8);
    const char *p = tu_fixture_path(f, "ok.png");
    assert_int_equal(sinew_image_write_png(f->ctx, p, &a), SINEW_OK);
    sinew_image_free(&a);
    unsigned char *buf;
    size_t len;
    assert_int_equal(sinew_read_file(f->ctx, &buf, &len, p, 1 << 20), SINEW_OK);
    expect_image_error(f, "half.png", buf, len / 2, SINEW_EFORMAT, "truncated");
    expect_image_error(f, "noend.png", buf, len - 12, SINEW_EFORMAT, "truncated");
    buf[len - 20] ^= 0x55; /* inside the last IDAT (or its CRC) */
    expect_image_error(f, "crc.png", buf, len, SINEW_EFORMAT, "bad PNG");
    sinew_ctx_dealloc(f->ctx, buf);
    sinew_image b;
    assert_int_equal(sinew_image_read(f->ctx, &b, tu_fixture_path(f, "missing.png")), SINEW_EIO);
    assert_int_equal(sinew_image_read(f->ctx, &b, f->dir), SINEW_EIO);
    assert_int_equal(sinew_image_read(NULL, &b, "x.png"), SINEW_EINVAL);
}

/* ---- JPEG ---- */

static void write_jpeg(const char *path, const unsigned char *px, int w, int h, int pf, int ss)
{
    tjhandle tj = tjInitCompress();
    assert_non_null(tj);
    unsigned char *jbuf = NULL;
    unsigned long jlen = 0;
    assert_int_equal(tjCompress2(tj, px, w, 0, h, pf, &jbuf, &jlen, ss, 100, 0), 0);
    tu_write_bytes(path, jbuf, jlen);
    tjFree(jbuf);
    tjDestroy(tj);
}

static void test_io_image_jpeg(void **state)
{
    tu_fixture *f = *state;
    enum { W = 40, H = 24 };
    unsigned char rgb[W * H * 4];
    for (int i = 0; i < W * H; i++) {
        rgb[3 * i] = (unsigned char)(i % W * 5);
        rgb[3 * i + 1] = (unsigned char)(i / W * 9);
        rgb[3 * i + 2] = 128;
    }
    const char *p = tu_fixture_path(f, "c.jpg");
    write_jpeg(p, rgb, W, H, TJPF_RGB, TJSAMP_444);
    sinew_image b;
    assert_int_equal(sinew_image_read(f->ctx, &b, p), SINEW_OK);
    assert_int_equal(b.width, W);
    assert_int_equal(b.height, H);
    assert_int_equal(b.channels, 3);
    int maxd = 0;
    for (int y = 0; y < H; y++)
        for (int x = 0; x < 3 * W; x++) {
            int d = abs((int)sinew_image_row_u8(&b, y)[x] - rgb[y * 3 * W + x]);
            maxd = d > maxd ? d : maxd;
        }
    assert_true(maxd <= 4); /* quality 100, 4:4:4: near-lossless (common practice) */
    sinew_image_free(&b);
    write_jpeg(p, rgb, W, H, TJPF_GRAY, TJSAMP_GRAY);
    assert_int_equal(sinew_image_read(f->ctx, &b, p), SINEW_OK);
    assert_int_equal(b.channels, 1);
    assert_true(abs((int)sinew_image_row_u8(&b, 3)[7] - rgb[3 * W + 7]) <= 2);
    sinew_image_free(&b);
    /* truncated entropy data, truncated header, CMYK */
    write_jpeg(p, rgb, W, H, TJPF_RGB, TJSAMP_444);
    unsigned char *buf;
    size_t len;
    assert_int_equal(sinew_read_file(f->ctx, &buf, &len, p, 1 << 20), SINEW_OK);
    expect_image_error(f, "cut.jpg", buf, len * 2 / 3, SINEW_EFORMAT, "JPEG");
    expect_image_error(f, "head.jpg", buf, 40, SINEW_EFORMAT, "JPEG");
    sinew_ctx_dealloc(f->ctx, buf);
    write_jpeg(p, rgb, W / 2, H / 2, TJPF_CMYK, TJSAMP_444);
    assert_int_equal(sinew_image_read(f->ctx, &b, p), SINEW_EUNSUPPORTED);
    assert_non_null(strstr(sinew_ctx_message(f->ctx), "CMYK"));
}

/* ---- PGM/PPM ---- */

static void test_io_image_pnm(void **state)
{
    tu_fixture *f = *state;
    sinew_image b;
    const char *p = tu_fixture_path(f, "a.pgm");
    static const char p5[] =
        "P5\n# made by hand\n3 2 # width height\n255\n\x01\x02\x03\x04\x05\xff";
    tu_write_bytes(p, p5, sizeof p5 - 1);
    assert_int_equal(sinew_image_read(f->ctx, &b, p), SINEW_OK);
    assert_int_equal(b.channels, 1);
    assert_int_equal(b.type, SINEW_U8);
    assert_memory_equal(sinew_image_row_u8(&b, 1), "\x04\x05\xff", 3);
    sinew_image_free(&b);
    /* 16-bit: big-endian samples, kept as stored (maxval 4095 is not rescaled) */
    static const char p16[] = "P5 2 1 4095\n\x0f\xff\x01\x23";
    tu_write_bytes(p, p16, sizeof p16 - 1);
    assert_int_equal(sinew_image_read(f->ctx, &b, p), SINEW_OK);
    assert_int_equal(b.type, SINEW_U16);
    assert_int_equal(sinew_image_row_u16(&b, 0)[0], 4095);
    assert_int_equal(sinew_image_row_u16(&b, 0)[1], 0x123);
    sinew_image_free(&b);
    static const char p6[] = "P6\n1 2\n255\n\x0a\x0b\x0c\x0d\x0e\x0f";
    tu_write_bytes(p, p6, sizeof p6 - 1);
    assert_int_equal(sinew_image_read(f->ctx, &b, p), SINEW_OK);
    assert_int_equal(b.channels, 3);
    assert_memory_equal(sinew_image_row_u8(&b, 1), "\x0d\x0e\x0f", 3);
    sinew_image_free(&b);
    expect_image_error(f, "ascii.pgm", "P2\n1 1\n255\n7\n", 13, SINEW_EUNSUPPORTED, "P5/P6");
    expect_image_error(f, "max0.pgm", "P5\n1 1\n0\n\x00", 10, SINEW_EFORMAT, "maxval");
    expect_image_error(f, "max7.pgm", "P5\n1 1\n70000\n\x00\x00", 15, SINEW_EFORMAT, "maxval");
    expect_image_error(f, "neg.pgm", "P5\n-1 1\n255\n\x00", 12, SINEW_EFORMAT, "malformed");
    expect_image_error(f, "cut.pgm", "P5\n2 2\n255\n\x00\x00\x00", 14, SINEW_EFORMAT, "truncated");
    expect_image_error(f, "hdr.pgm", "P5\n2 2\n", 7, SINEW_EFORMAT, "truncated");
    expect_image_error(f, "more.pgm", "P5\n1 1\n255\n\x00\x00", 13, SINEW_EFORMAT, "unexpected");
    expect_image_error(f, "huge.ppm", "P6\n200000 200000\n255\n", 21, SINEW_ELIMIT,
                       "200000x200000");
    expect_image_error(f, "zero.ppm", "P6\n0 5\n255\n", 11, SINEW_EFORMAT, "invalid dimensions");
}

/* ---- allocation failures ---- */

typedef struct image_job {
    const char *path;
    const sinew_image *img; /* NULL: read */
} image_job;

/* Write a PNG (a failure must leave no file) or read an image and free it. */
static int image_op(sinew_ctx *ctx, void *ud)
{
    const image_job *j = ud;
    if (j->img) {
        remove(j->path);
        int rc = sinew_image_write_png(ctx, j->path, j->img);
        if (rc)
            assert_false(tu_file_exists(j->path));
        return rc;
    }
    sinew_image b;
    int rc = sinew_image_read(ctx, &b, j->path);
    assert_true(rc ? b.data == NULL : b.data != NULL);
    sinew_image_free(&b);
    return rc;
}

static void test_io_image_allocation_failures(void **state)
{
    tu_fixture *f = *state;
    for (int t = 0; t < 2; t++) {
        sinew_image a;
        assert_int_equal(sinew_image_alloc(f->ctx, &a, 20, 9, 4, t ? SINEW_U16 : SINEW_U8),
                         SINEW_OK);
        image_job w = {tu_fixture_path(f, "fa.png"), &a}, r = {w.path, NULL};
        tu_fail_each_allocation("PNG write", image_op, &w);
        tu_fail_each_allocation("PNG read", image_op, &r);
        sinew_image_free(&a);
    }
    unsigned char rgb[16 * 8 * 3] = {0};
    char p[700];
    tu_path(p, sizeof p, f->dir, "fa.jpg");
    write_jpeg(p, rgb, 16, 8, TJPF_RGB, TJSAMP_420);
    image_job r = {p, NULL};
    tu_fail_each_allocation("JPEG read", image_op, &r);
    tu_path(p, sizeof p, f->dir, "fa.pgm");
    tu_write_bytes(p, "P5 2 1 65535\n\x01\x02\x03\x04", 17);
    tu_fail_each_allocation("PGM read", image_op, &r);
}

/* ---- damaged files ---- */

/* A w x h PNG of c channels and `bits` bits per sample with the sample() pattern. */
static void write_sample_png(sinew_ctx *ctx, const char *path, int w, int h, int c, int bits)
{
    sinew_image a;
    assert_int_equal(sinew_image_alloc(ctx, &a, w, h, c, bits == 16 ? SINEW_U16 : SINEW_U8),
                     SINEW_OK);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w * c; x++)
            if (bits == 16)
                sinew_image_row_u16(&a, y)[x] = (uint16_t)sample(x, y, 0, 16);
            else
                sinew_image_row_u8(&a, y)[x] = (uint8_t)sample(x, y, 0, 8);
    assert_int_equal(sinew_image_write_png(ctx, path, &a), SINEW_OK);
    sinew_image_free(&a);
}

static int read_image(sinew_ctx *ctx, const char *path)
{
    sinew_image b;
    int rc = sinew_image_read(ctx, &b, path);
    sinew_image_free(&b);
    return rc;
}

static void test_io_image_damaged_files(void **state)
{
    tu_fixture *f = *state;
    char ok[700], bad[700];
    tu_path(bad, sizeof bad, f->dir, "bad.img");
    for (int bits = 8; bits <= 16; bits += 8) {
        tu_path(ok, sizeof ok, f->dir, "ok.png");
        write_sample_png(f->ctx, ok, 6, 5, 3, bits);
        tu_damage_sweep(ok, bad, read_image, 400);
    }
    unsigned char rgb[16 * 8 * 3];
    for (size_t i = 0; i < sizeof rgb; i++)
        rgb[i] = (unsigned char)(i * 37);
    tu_path(ok, sizeof ok, f->dir, "ok.jpg");
    write_jpeg(ok, rgb, 16, 8, TJPF_RGB, TJSAMP_420);
    tu_damage_sweep(ok, bad, read_image, 400);
    tu_path(ok, sizeof ok, f->dir, "ok.ppm");
    static const char ppm[] = "P6\n# c\n2 2\n65535\n0123456789abcdefghijklmn";
    tu_write_bytes(ok, ppm, sizeof ppm - 1);
    tu_damage_sweep(ok, bad, read_image, 400);
}

/* ---- external: published frames ---- */

static void test_io_image_published_frames(void **state)
{
    tu_fixture *f = *state;
    if (!tu_data_dir())
        skip();
    char p[700];
    sinew_image b;
    /* Middlebury (Baker et al., IJCV 2011): gray frames are 8-bit grayscale; Dimetrodon 584x388,
     * Venus 420x380; colour frames exist for Dimetrodon, RubberWhale, Venus. */
    if (!tu_data_file(p, sizeof p, "middlebury/Dimetrodon/frame10.png"))
        skip();
    assert_int_equal(sinew_image_read(f->ctx, &b, p), SINEW_OK);
    assert_true(b.width == 584 && b.height == 388 && b.channels == 1 && b.type == SINEW_U8);
    sinew_image_free(&b);
    if (tu_data_file(p, sizeof p, "middlebury/Venus/color/frame11.png")) {
        assert_int_equal(sinew_image_read(f->ctx, &b, p), SINEW_OK);
        assert_true(b.width == 420 && b.height == 380 && b.channels >= 3);
        sinew_image_free(&b);
    }
    /* The FlyingChairs dataset: frames are 512x384 binary PPM (P6). The raster is the
     * last 512*384*3 bytes of the file. */
    if (tu_data_file(p, sizeof p, "flyingchairs/examples/0000000-img0.ppm")) {
        assert_int_equal(sinew_image_read(f->ctx, &b, p), SINEW_OK);
        assert_true(b.width == 512 && b.height == 384 && b.channels == 3 && b.type == SINEW_U8);
        unsigned char *buf;
        size_t len;
        assert_int_equal(sinew_read_file(f->ctx, &buf, &len, p, 1 << 21), SINEW_OK);
        size_t off = len - (size_t)512 * 384 * 3;
        for (int y = 0; y < 384; y++)
            assert_memory_equal(sinew_image_row(&b, y), buf + off + (size_t)y * 512 * 3, 512 * 3);
        sinew_ctx_dealloc(f->ctx, buf);
        sinew_image_free(&b);
    }
}

/* 7-Scenes depth (Shotton et al., CVPR 2013: 640x480 uint16, millimetres, 0 = invalid, valid range
 * about 0.94-2.9 m): our 16-bit codes must equal those of an independent decoder (zlib
 * and the PNG filter rules in Python's standard library, written to .npy by numpy). */
static void test_io_image_depth_png_matches_reference_decoder(void **state)
{
    tu_fixture *f = *state;
    char p[700], script[700], ref[700];
    if (!tu_data_file(p, sizeof p, "7scenes/tsdf-fusion-frames-150-154/frame-000150.depth.png"))
        skip();
    char cmd[3000];
    snprintf(cmd, sizeof cmd, "'%s' -c 'import numpy' 2>/dev/null", tu_python());
    if (system(cmd) != 0)
        skip();
    static const char py[] =
        "import sys, zlib, struct, numpy as np\n"
        "d = open(sys.argv[1], 'rb').read(); pos = 8; idat = b''\n"
        "while pos < len(d):\n"
        "    n, = struct.unpack('>I', d[pos:pos + 4]); t = d[pos + 4:pos + 8]\n"
        "    c = d[pos + 8:pos + 8 + n]; pos += 12 + n\n"
        "    if t == b'IHDR': w, h, bd, ct, _, _, il = struct.unpack('>IIBBBBB', c)\n"
        "    elif t == b'IDAT': idat += c\n"
        "assert bd == 16 and ct == 0 and il == 0\n"
        "raw = np.frombuffer(zlib.decompress(idat), np.uint8).reshape(h, 1 + 2 * "
        "w).astype(np.int32)\n"
        "out = np.zeros((h, 2 * w), np.int32); prev = np.zeros(2 * w, np.int32); bpp = 2\n"
        "for y in range(h):\n"
        "    ft = raw[y, 0]; line = raw[y, 1:].copy()\n"
        "    if ft == 2: line = (line + prev) & 255\n"
        "    elif ft in (1, 3, 4):\n"
        "        for x in range(2 * w):\n"
        "            a = line[x - bpp] if x >= bpp else 0; b = prev[x]\n"
        "            c = prev[x - bpp] if x >= bpp else 0\n"
        "            if ft == 1: pr = a\n"
        "            elif ft == 3: pr = (a + b) // 2\n"
        "            else:\n"
        "                q = a + b - c; pa, pb, pc = abs(q - a), abs(q - b), abs(q - c)\n"
        "                pr = a if pa <= pb and pa <= pc else (b if pb <= pc else c)\n"
        "            line[x] = (line[x] + pr) & 255\n"
        "    out[y] = line; prev = line\n"
        "v = (out[:, 0::2] * 256 + out[:, 1::2]).astype(np.float32)\n"
        "np.save(sys.argv[2], v)\n";
    tu_path(script, sizeof script, f->dir, "dec.py");
    tu_path(ref, sizeof ref, f->dir, "ref.npy");
    tu_write_bytes(script, py, sizeof py - 1);
    snprintf(cmd, sizeof cmd, "'%s' '%s' '%s' '%s'", tu_python(), script, p, ref);
    assert_int_equal(system(cmd), 0);
    sinew_image d, r;
    assert_int_equal(sinew_image_read(f->ctx, &d, p), SINEW_OK);
    assert_true(d.width == 640 && d.height == 480 && d.channels == 1 && d.type == SINEW_U16);
    assert_int_equal(sinew_npy_read_image(f->ctx, &r, ref), SINEW_OK);
    long valid = 0;
    unsigned lo = 65535, hi = 0;
    for (int y = 0; y < 480; y++)
        for (int x = 0; x < 640; x++) {
            unsigned v = sinew_image_row_u16(&d, y)[x];
            assert_true((float)v == sinew_image_row_f32(&r, y)[x]);
            if (v) {
                valid++;
                lo = v < lo ? v : lo;
                hi = v > hi ? v : hi;
            }
        }
    /* measured on these files: valid range about 0.94-2.9 m (so in millimetres, loosely bracketed)
     */
    assert_true(valid > 0 && lo >= 800 && hi <= 3500);
    sinew_image_free(&d);
    sinew_image_free(&r);
}

/* Masks of bits and one-channel maps: 8-bit PNG or integer .npy masks; float maps
 * from .npy/.pfm only. */
static void test_io_image_mask_and_map_readers(void **state)
{
    tu_fixture *fx = *state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image img, out;
    assert_int_equal(sinew_image_alloc(ctx, &img, 3, 2, 1, SINEW_U8), SINEW_OK);
    for (int y = 0; y < 2; y++)
        for (int x = 0; x < 3; x++)
            sinew_image_row_u8(&img, y)[x] = (uint8_t)(y * 3 + x) * 10;
    const char *png = tu_fixture_path(fx, "m.png");
    char pngp[700];
    snprintf(pngp, sizeof pngp, "%s", png);
    assert_int_equal(sinew_image_write_png(ctx, pngp, &img), SINEW_OK);
    assert_int_equal(sinew_mask_read(ctx, &out, pngp), SINEW_OK);
    assert_int_equal(sinew_image_row_u8(&out, 1)[2], 50);
    sinew_image_free(&out);
    /* a float map read as a mask: integers pass, 2.5 is refused naming the pixel */
    const float vals[6] = {0, 1, 2, 3, 255, 4};
    char npy[700];
    snprintf(npy, sizeof npy, "%s", tu_fixture_path(fx, "m.npy"));
    tu_write_npy(npy, 1, "{'descr': '<f4', 'fortran_order': False, 'shape': (2, 3), }", vals,
                 sizeof vals);
    assert_int_equal(sinew_mask_read(ctx, &out, npy), SINEW_OK);
    assert_int_equal(out.type, SINEW_U8);
    assert_int_equal(sinew_image_row_u8(&out, 1)[1], 255);
    sinew_image_free(&out);
    assert_int_equal(sinew_map_read(ctx, &out, npy), SINEW_OK);
    assert_true(sinew_image_row_f32(&out, 1)[2] == 4.0f);
    sinew_image_free(&out);
    const float bad[6] = {0, 1, 2.5f, 3, 4, 5};
    tu_write_npy(npy, 1, "{'descr': '<f4', 'fortran_order': False, 'shape': (2, 3), }", bad,
                 sizeof bad);
    assert_int_equal(sinew_mask_read(ctx, &out, npy), SINEW_EVALUE);
    assert_non_null(strstr(sinew_ctx_message(ctx), "(2, 0) is not an integer 0..255"));
    assert_null(out.data);
    /* a 16-bit PNG is not a mask; a PNG is not a map */
    sinew_image w;
    assert_int_equal(sinew_image_alloc(ctx, &w, 3, 2, 1, SINEW_U16), SINEW_OK);
    memset(w.data, 0, w.stride * 2);
    assert_int_equal(sinew_image_write_png(ctx, pngp, &w), SINEW_OK);
    assert_int_equal(sinew_mask_read(ctx, &out, pngp), SINEW_EFORMAT);
    assert_int_equal(sinew_map_read(ctx, &out, pngp), SINEW_EUNSUPPORTED);
    sinew_image_free(&w);
    sinew_image_free(&img);
    sinew_ctx_free(ctx);
}

/* ---- headers only (sinew_image_info_read) ---- */

/* The header reader and the full reader agree: whatever the full reader accepts, the
 * header reader accepts with the same size, channels and type. Returns the header
 * reader's status, so tu_damage_sweep also requires every prefix to be refused by it. */
static int info_agrees(sinew_ctx *ctx, const char *path)
{
    sinew_image b;
    int fr = sinew_image_read(ctx, &b, path);
    sinew_image_info in;
    int hr = sinew_image_info_read(ctx, &in, path, SINEW_ROLE_IMAGE);
    if (fr == SINEW_OK) {
        if (hr != SINEW_OK)
            fail_msg("%s: read in full, but the header reader said '%s'", path,
                     sinew_ctx_message(ctx));
        assert_true(in.width == b.width && in.height == b.height && in.channels == b.channels &&
                    in.type == b.type);
    }
    sinew_image_free(&b);
    return hr;
}

static void test_io_image_info_matches_reader(void **state)
{
    tu_fixture *f = *state;
    char ok[700], bad[700];
    tu_path(bad, sizeof bad, f->dir, "bad.img");
    /* PNG: every channel count, both depths; prefixes are all refused (chunk walk) */
    for (int c = 1; c <= 4; c++)
        for (int bits = 8; bits <= 16; bits += 8) {
            tu_path(ok, sizeof ok, f->dir, "ok.png");
            write_sample_png(f->ctx, ok, 7, 5, c, bits);
            sinew_image_info in;
            assert_int_equal(sinew_image_info_read(f->ctx, &in, ok, SINEW_ROLE_IMAGE), SINEW_OK);
            assert_true(in.width == 7 && in.height == 5 && in.channels == c &&
                        in.type == (bits == 16 ? SINEW_U16 : SINEW_U8));
            if (c == 1 || bits == 16)
                tu_damage_sweep(ok, bad, info_agrees, 200);
        }
    /* JPEG (TurboJPEG writes it): gray and colour, marker walk to EOI */
    unsigned char rgb[16 * 8 * 3];
    for (size_t i = 0; i < sizeof rgb; i++)
        rgb[i] = (unsigned char)(i * 37);
    tu_path(ok, sizeof ok, f->dir, "ok.jpg");
    write_jpeg(ok, rgb, 16, 8, TJPF_RGB, TJSAMP_420);
    tu_damage_sweep(ok, bad, info_agrees, 300);
    write_jpeg(ok, rgb, 16, 8, TJPF_GRAY, TJSAMP_GRAY);
    sinew_image_info in;
    assert_int_equal(sinew_image_info_read(f->ctx, &in, ok, SINEW_ROLE_IMAGE), SINEW_OK);
    assert_true(in.width == 16 && in.height == 8 && in.channels == 1 && in.type == SINEW_U8);
    /* PGM/PPM */
    tu_path(ok, sizeof ok, f->dir, "ok.ppm");
    static const char ppm[] = "P6\n# c\n2 2\n65535\n0123456789abcdefghijklmn";
    tu_write_bytes(ok, ppm, sizeof ppm - 1);
    tu_damage_sweep(ok, bad, info_agrees, 200);
    assert_int_equal(sinew_image_info_read(f->ctx, &in, ok, SINEW_ROLE_IMAGE), SINEW_OK);
    assert_true(in.width == 2 && in.height == 2 && in.channels == 3 && in.type == SINEW_U16);
}

/* Each role's rule is applied to the header as the role's reader applies it. */
static void test_io_image_info_roles(void **state)
{
    tu_fixture *f = *state;
    sinew_ctx *ctx = f->ctx;
    char p8[700], p16[700], npy[700], npy3[700];
    tu_path(p8, sizeof p8, f->dir, "g8.png");
    tu_path(p16, sizeof p16, f->dir, "g16.png");
    tu_path(npy, sizeof npy, f->dir, "d.npy");
    tu_path(npy3, sizeof npy3, f->dir, "c.npy");
    sinew_image a;
    assert_int_equal(sinew_image_alloc(ctx, &a, 4, 3, 1, SINEW_U8), SINEW_OK);
    memset(a.data, 7, a.stride * 3);
    assert_int_equal(sinew_image_write_png(ctx, p8, &a), SINEW_OK);
    sinew_image_free(&a);
    assert_int_equal(sinew_image_alloc(ctx, &a, 4, 3, 1, SINEW_U16), SINEW_OK);
    memset(a.data, 1, a.stride * 3);
    assert_int_equal(sinew_image_write_png(ctx, p16, &a), SINEW_OK);
    sinew_image_free(&a);
    const float v[12] = {0};
    tu_write_npy(npy, 1, "{'descr': '<f4', 'fortran_order': False, 'shape': (3, 4), }", v,
                 sizeof v);
    tu_write_npy(npy3, 1, "{'descr': '<f4', 'fortran_order': False, 'shape': (1, 4, 3), }", v,
                 sizeof v);
    const char *paths[4] = {p8, p16, npy, npy3};
    for (int role = SINEW_ROLE_IMAGE; role <= SINEW_ROLE_MAP; role++)
        for (int k = 0; k < 4; k++) {
            sinew_image full;
            int fr = role == SINEW_ROLE_IMAGE    ? sinew_image_read(ctx, &full, paths[k])
                     : role == SINEW_ROLE_DEPTH  ? sinew_depth_read(ctx, &full, paths[k])
                     : role == SINEW_ROLE_LABELS ? sinew_labels_read(ctx, &full, paths[k])
                     : role == SINEW_ROLE_MASK   ? sinew_mask_read(ctx, &full, paths[k])
                                                 : sinew_map_read(ctx, &full, paths[k]);
            sinew_image_free(&full);
            sinew_image_info in;
            int hr = sinew_image_info_read(ctx, &in, paths[k], role);
            if (fr != hr)
                fail_msg("role %d, %s: reader %d, header reader %d", role, paths[k], fr, hr);
        }
    sinew_image_info in;
    assert_int_equal(sinew_image_info_read(ctx, &in, p8, SINEW_ROLE_DEPTH), SINEW_EUNSUPPORTED);
    assert_non_null(strstr(sinew_ctx_message(ctx), "g8.png: 8-bit images cannot hold depth"));
    assert_int_equal(sinew_image_info_read(ctx, &in, npy, SINEW_ROLE_DEPTH), SINEW_OK);
    assert_true(in.width == 4 && in.height == 3 && in.type == SINEW_F32);
    assert_int_equal(sinew_image_info_read(ctx, &in, p8, 99), SINEW_EINVAL);
}

/* Published files: header and full read agree (sizes as documented by each dataset, see
 * test_io_image_published_frames and the 7-Scenes test). */
static void test_io_image_info_published(void **state)
{
    tu_fixture *f = *state;
    if (!tu_data_dir())
        skip();
    static const char *const files[] = {"middlebury/Dimetrodon/frame10.png",
                                        "middlebury/Venus/color/frame11.png",
                                        "flyingchairs/examples/0000000-img0.ppm"};
    int seen = 0;
    char p[700];
    for (size_t k = 0; k < sizeof files / sizeof files[0]; k++) {
        if (!tu_data_file(p, sizeof p, files[k]))
            continue;
        assert_int_equal(info_agrees(f->ctx, p), SINEW_OK);
        seen++;
    }
    if (!seen)
        skip();
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_io_image_png_roundtrip, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_io_image_png_variants, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_io_image_malformed_png, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_io_image_jpeg, tu_fixture_setup, tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_io_image_pnm, tu_fixture_setup, tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_io_image_allocation_failures, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_io_image_mask_and_map_readers, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_io_image_damaged_files, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_io_image_info_matches_reader, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_io_image_info_roles, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_io_image_info_published, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_io_image_published_frames, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_io_image_depth_png_matches_reference_decoder,
                                        tu_fixture_setup, tu_fixture_teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
