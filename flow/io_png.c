/* SPDX-License-Identifier: MIT */
/* PNG reading and writing with libpng's classic API.
 *
 * The classic API is used (not the simplified png_image_* one) because the simplified
 * API treats 16-bit data as linear light and premultiplies alpha, which would change
 * raw 16-bit codes such as depth. Samples are returned exactly as stored: palette
 * images expand to RGB (RGBA with a tRNS chunk), gray below 8 bits expands to 8 bits,
 * 16-bit samples stay 16-bit integers in host byte order. No gamma is applied.
 *
 * In-memory encoding of 8-bit pictures (sinew_png_encode, for the report's inline
 * thumbnails) uses the simplified API: 8-bit samples pass through it unchanged.
 *
 * libpng reports errors by longjmp. Each setjmp lives in exactly one function
 * (read_impl, write_impl) whose error branch only touches locals that are not modified
 * after setjmp. libpng's own allocations go through the context allocator, so failure
 * injection covers them too. */
#include <errno.h>
#include <png.h>
#include <setjmp.h>
#include <stdio.h>
#include <string.h>

#include "flow/internal/io.h"
#include "flow/io.h"

typedef struct png_io {
    sinew_ctx *ctx;
    const char *path;
    FILE *fp;
    int oom;       /* an allocation failed */
    int truncated; /* the file ended early */
    int ioerr;     /* the operating system refused a read or write */
    int err;       /* its errno (0 if unknown) */
    char msg[160]; /* libpng's error text */
} png_io;

static void on_error(png_structp png, png_const_charp msg)
{
    png_io *io = png_get_error_ptr(png);
    snprintf(io->msg, sizeof io->msg, "%s", msg ? msg : "error");
    png_longjmp(png, 1);
}

static void on_warning(png_structp png, png_const_charp msg)
{
    (void)png;
    (void)msg; /* the library never prints */
}

static png_voidp on_alloc(png_structp png, png_alloc_size_t n)
{
    png_io *io = png_get_mem_ptr(png);
    void *p = sinew__alloc(io->ctx, n);
    if (!p)
        io->oom = 1;
    return p;
}

static void on_free(png_structp png, png_voidp p)
{
    png_io *io = png_get_mem_ptr(png);
    sinew__free(io->ctx, p);
}

static void on_read(png_structp png, png_bytep data, size_t n)
{
    png_io *io = png_get_io_ptr(png);
    if (fread(data, 1, n, io->fp) != n) {
        if (ferror(io->fp))
            io->ioerr = 1, io->err = errno;
        else
            io->truncated = 1;
        png_error(png, "read failed");
    }
}

static void on_write(png_structp png, png_bytep data, size_t n)
{
    png_io *io = png_get_io_ptr(png);
    if (fwrite(data, 1, n, io->fp) != n) {
        io->ioerr = 1, io->err = errno;
        png_error(png, "write failed");
    }
}

static void on_flush(png_structp png)
{
    (void)png; /* the atomic outfile flushes on commit */
}

/* Status and message for a failure reported through on_error. */
static int png_status(const png_io *io, int writing)
{
    if (io->oom)
        return sinew__fail(io->ctx, SINEW_ENOMEM, "%s: out of memory %s PNG", io->path,
                           writing ? "writing" : "reading");
    if (io->ioerr)
        return sinew__fail(io->ctx, SINEW_EIO, "%s: cannot %s: %s", io->path,
                           writing ? "write" : "read", strerror(io->err ? io->err : EIO));
    if (io->truncated)
        return sinew__fail(io->ctx, SINEW_EFORMAT, "%s: truncated PNG data (file ends early)",
                           io->path);
    return sinew__fail(io->ctx, writing ? SINEW_EINTERNAL : SINEW_EFORMAT, "%s: bad PNG: %s",
                       io->path, io->msg);
}

static int read_impl(png_io *io, sinew_image *out)
{
    png_structp png = png_create_read_struct_2(PNG_LIBPNG_VER_STRING, io, on_error, on_warning, io,
                                               on_alloc, on_free);
    if (!png)
        return sinew__fail(io->ctx, SINEW_ENOMEM, "%s: out of memory reading PNG", io->path);
    png_infop info = png_create_info_struct(png);
    if (!info) {
        png_destroy_read_struct(&png, NULL, NULL);
        return sinew__fail(io->ctx, SINEW_ENOMEM, "%s: out of memory reading PNG", io->path);
    }
    if (setjmp(png_jmpbuf(png))) {
        sinew_image_free(out);
        png_destroy_read_struct(&png, &info, NULL);
        return png_status(io, 0);
    }
    png_set_read_fn(png, io, on_read);
    png_set_user_limits(png, 0x7fffffffu, 0x7fffffffu); /* our own pixel limit applies */
    png_read_info(png, info);
    png_uint_32 w = png_get_image_width(png, info);
    png_uint_32 h = png_get_image_height(png, info);
    int depth = png_get_bit_depth(png, info);
    int ctype = png_get_color_type(png, info);
    int rc = sinew__check_dims(io->ctx, io->path, (int64_t)w, (int64_t)h);
    if (rc) {
        png_destroy_read_struct(&png, &info, NULL);
        return rc;
    }
    if (ctype == PNG_COLOR_TYPE_PALETTE) {
        png_set_palette_to_rgb(png);
        if (png_get_valid(png, info, PNG_INFO_tRNS))
            png_set_tRNS_to_alpha(png);
    }
    if (ctype == PNG_COLOR_TYPE_GRAY && depth < 8)
        png_set_expand_gray_1_2_4_to_8(png);
    if (depth == 16 && sinew__host_little())
        png_set_swap(png);
    int passes = png_set_interlace_handling(png);
    png_read_update_info(png, info);
    int ch = png_get_channels(png, info);
    int bd = png_get_bit_depth(png, info);
    rc = sinew_image_alloc(io->ctx, out, (int)w, (int)h, ch, bd == 16 ? SINEW_U16 : SINEW_U8);
    if (rc) {
        png_destroy_read_struct(&png, &info, NULL);
        return rc;
    }
    for (int p = 0; p < passes; p++)
        for (png_uint_32 y = 0; y < h; y++)
            png_read_row(png, sinew_image_row(out, (int)y), NULL);
    png_read_end(png, NULL);
    png_destroy_read_struct(&png, &info, NULL);
    return SINEW_OK;
}

int sinew__png_read_fp(sinew_ctx *ctx, const char *path, FILE *fp, sinew_image *out)
{
    png_io io;
    memset(&io, 0, sizeof io);
    io.ctx = ctx;
    io.path = path;
    io.fp = fp;
    memset(out, 0, sizeof *out);
    return read_impl(&io, out);
}

static int write_impl(png_io *io, const sinew_image *img)
{
    png_structp png = png_create_write_struct_2(PNG_LIBPNG_VER_STRING, io, on_error, on_warning, io,
                                                on_alloc, on_free);
    if (!png)
        return sinew__fail(io->ctx, SINEW_ENOMEM, "%s: out of memory writing PNG", io->path);
    png_infop info = png_create_info_struct(png);
    if (!info) {
        png_destroy_write_struct(&png, NULL);
        return sinew__fail(io->ctx, SINEW_ENOMEM, "%s: out of memory writing PNG", io->path);
    }
    if (setjmp(png_jmpbuf(png))) {
        png_destroy_write_struct(&png, &info);
        return png_status(io, 1);
    }
    static const int types[5] = {0, PNG_COLOR_TYPE_GRAY, PNG_COLOR_TYPE_GRAY_ALPHA,
                                 PNG_COLOR_TYPE_RGB, PNG_COLOR_TYPE_RGB_ALPHA};
    int bd = img->type == SINEW_U16 ? 16 : 8;
    png_set_write_fn(png, io, on_write, on_flush);
    png_set_IHDR(png, info, (png_uint_32)img->width, (png_uint_32)img->height, bd,
                 types[img->channels], PNG_INTERLACE_NONE, PNG_COMPRESSION_TYPE_DEFAULT,
                 PNG_FILTER_TYPE_DEFAULT);
    png_write_info(png, info);
    if (bd == 16 && sinew__host_little())
        png_set_swap(png);
    for (int y = 0; y < img->height; y++)
        png_write_row(png, sinew_image_row(img, y));
    png_write_end(png, NULL);
    png_destroy_write_struct(&png, &info);
    return SINEW_OK;
}

int sinew_image_write_png(sinew_ctx *ctx, const char *path, const sinew_image *img)
{
    if (!ctx || !path || !img || !img->data)
        return ctx ? sinew__fail(ctx, SINEW_EINVAL, "write PNG: missing argument") : SINEW_EINVAL;
    if ((img->type != SINEW_U8 && img->type != SINEW_U16) || img->channels < 1 ||
        img->channels > 4 || img->width < 1 || img->height < 1)
        return sinew__fail(ctx, SINEW_EINVAL,
                           "%s: PNG needs an 8- or 16-bit image with 1 to 4 channels", path);
    sinew_outfile *f;
    int rc = sinew_outfile_open(ctx, &f, path);
    if (rc)
        return rc;
    png_io io;
    memset(&io, 0, sizeof io);
    io.ctx = ctx;
    io.path = path;
    io.fp = sinew_outfile_stream(f);
    rc = write_impl(&io, img);
    if (rc) {
        sinew_outfile_abort(f);
        return rc;
    }
    return sinew_outfile_commit(ctx, f);
}

/* ---- in-memory encoding (the report's thumbnails) ---- */

/* One pass of the simplified writer: buf NULL asks for the size into *size. */
static int encode_pass(sinew_ctx *ctx, const sinew_image *img, void *buf, png_alloc_size_t *size)
{
    static const png_uint_32 formats[4] = {PNG_FORMAT_GRAY, PNG_FORMAT_GA, PNG_FORMAT_RGB,
                                           PNG_FORMAT_RGBA};
    png_image im;
    memset(&im, 0, sizeof im);
    im.version = PNG_IMAGE_VERSION;
    im.width = (png_uint_32)img->width;
    im.height = (png_uint_32)img->height;
    im.format = formats[img->channels - 1];
    if (png_image_write_to_memory(&im, buf, size, 0, img->data, (png_int_32)img->stride, NULL))
        return SINEW_OK;
    int st = sinew__fail(ctx, SINEW_EFORMAT, "png: %s", im.message);
    png_image_free(&im);
    return st;
}

int sinew_png_encode(sinew_ctx *ctx, unsigned char **png, size_t *len, const sinew_image *img)
{
    if (!ctx || !img || !png || !len || !img->data || img->type != SINEW_U8 || img->channels < 1 ||
        img->channels > 4)
        return SINEW_EINVAL;
    *png = NULL;
    *len = 0;
    if (img->stride > INT32_MAX)
        return sinew__fail(ctx, SINEW_ELIMIT, "png: image rows too long to encode");
    png_alloc_size_t size = 0;
    int st = encode_pass(ctx, img, NULL, &size);
    if (st)
        return st;
    unsigned char *buf = sinew__alloc(ctx, size ? size : 1);
    if (!buf)
        return SINEW_ENOMEM;
    if ((st = encode_pass(ctx, img, buf, &size))) {
        sinew__free(ctx, buf);
        return st;
    }
    *png = buf;
    *len = size;
    return SINEW_OK;
}
