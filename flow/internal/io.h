/* SPDX-License-Identifier: MIT */
/* Private helpers shared by the file readers and writers (flow/io_*.c): opening a file
 * for reading with one-line errors, exact reads that report truncation, header tokens,
 * byte-order independent loads/stores and float16 conversion. */
#ifndef SINEW_INTERNAL_IO_H
#define SINEW_INTERNAL_IO_H

#include <stdint.h>
#include <stdio.h>
#include <string.h>

#include "flow/core.h"
#include "flow/internal/base.h"

/* Read exactly n bytes. A short read is EFORMAT "PATH: truncated WHAT" (or "PATH: empty
 * file" if nothing at all could be read from the start), a stream error is EIO. */
int sinew__io_read(sinew_ctx *ctx, const char *path, FILE *fp, void *buf, size_t n,
                   const char *what);

/* Succeeds if the stream is at its end; otherwise EFORMAT "PATH: unexpected bytes after
 * the WHAT". */
int sinew__io_expect_end(sinew_ctx *ctx, const char *path, FILE *fp, const char *what);

/* Before allocating for a raw raster of `rows` x `rowbytes` bytes that should run from
 * the current position to the end of a regular file: compare with the file size and
 * fail early with the same messages as the streaming reads ("truncated WHAT", "unexpected
 * bytes after the WHAT"), so a tiny file with a large (but permitted) header never
 * causes a large allocation. Streams that are not regular files are not checked. */
int sinew__io_check_remaining(sinew_ctx *ctx, const char *path, FILE *fp, size_t rows,
                              size_t rowbytes, const char *what);

/* Read one whitespace-delimited header token into buf (NUL-terminated, at most n-1
 * characters) and consume exactly one whitespace character after it, as the PNM and
 * PFM headers require. With comments != 0, '#' starts a comment up to the end of line
 * (allowed between tokens only). EFORMAT on end of file or an over-long token. */
int sinew__io_token(sinew_ctx *ctx, const char *path, FILE *fp, char *buf, size_t n, int comments,
                    const char *what);

/* Parse a non-negative decimal integer of at most 18 digits (no sign, no spaces). */
int sinew__io_parse_uint(const char *s, int64_t *out);

/* Bytes of a w x h x c element image of `elem` bytes per element, overflow-checked. */
int sinew__io_bytes(sinew_ctx *ctx, const char *path, int64_t w, int64_t h, int64_t c, size_t elem,
                    size_t *out);

/* Fill one output row (rowbytes bytes) for sinew__io_write_rows. */
typedef void (*sinew__row_fn)(void *ud, size_t row, unsigned char *out);
/* Write a file atomically: `head` (headlen bytes), then nrows rows of rowbytes bytes
 * produced by fill into a scratch row. On any failure the target is untouched. */
int sinew__io_write_rows(sinew_ctx *ctx, const char *path, const void *head, size_t headlen,
                         size_t nrows, size_t rowbytes, sinew__row_fn fill, void *ud);

/* float16 (IEEE 754 binary16) conversions. half -> float is exact; float -> half
 * rounds to nearest, ties to even, handles subnormals, overflows to infinity and keeps
 * NaN a (quiet) NaN with the sign. */
float sinew__half_to_float(uint16_t h);
uint16_t sinew__float_to_half(float f);

/* Convert n stored floats of `elem` bytes (2, 4 or 8) and the given byte order to
 * float32 (doubles are rounded to the nearest float). dst and src must not overlap. */
void sinew__io_decode_floats(float *dst, const unsigned char *src, size_t n, size_t elem,
                             int big_endian);
/* Store n floats as `elem` (2 or 4) bytes each in the given byte order. */
void sinew__io_encode_floats(unsigned char *dst, const float *src, size_t n, size_t elem,
                             int big_endian);

/* 1 if path ends with ext (e.g. ".npy"), compared without case. */
int sinew__has_ext(const char *path, const char *ext);

/* Flags of the raw readers below. SINEW__READ_FLOW: the result must be (and is
 * returned as) a 2-channel flow field. SINEW__READ_HEADER: stop after the header and
 * the file-size check; *out gets width, height, channels and type but no pixels
 * (data NULL), as sinew_image_info_read wants. */
#define SINEW__READ_FLOW 1
#define SINEW__READ_HEADER 2

/* Image decoders behind sinew_image_read; fp is open at the start of the file, which
 * the caller closes. On failure *out is left zeroed. */
int sinew__png_read_fp(sinew_ctx *ctx, const char *path, FILE *fp, sinew_image *out);
int sinew__jpeg_read_fp(sinew_ctx *ctx, const char *path, FILE *fp, sinew_image *out);
int sinew__pnm_read_fp(sinew_ctx *ctx, const char *path, FILE *fp, sinew_image *out, int flags);
/* Structure walks of PNG and JPEG files for sinew_image_info_read (io_info.c): no
 * pixel is decoded. */
int sinew__png_info_fp(sinew_ctx *ctx, const char *path, FILE *fp, sinew_image *out);
int sinew__jpeg_info_fp(sinew_ctx *ctx, const char *path, FILE *fp, sinew_image *out);

/* Array and float-map readers/writers shared by the image and flow entry points;
 * flags as above. */
int sinew__npy_read(sinew_ctx *ctx, const char *path, sinew_image *out, int flags);
int sinew__pfm_read(sinew_ctx *ctx, const char *path, sinew_image *out, int flags);
int sinew__pfm_write(sinew_ctx *ctx, const char *path, const sinew_image *img, int flow);

/* True on a little-endian host (used to ask libpng for native 16-bit samples). */
static inline int sinew__host_little(void)
{
    const uint16_t one = 1;
    unsigned char b;
    memcpy(&b, &one, 1);
    return b == 1;
}

/* Byte-order independent loads and stores. */
static inline uint32_t sinew__ld32(const unsigned char *p, int big)
{
    return big ? (uint32_t)p[0] << 24 | (uint32_t)p[1] << 16 | (uint32_t)p[2] << 8 | p[3]
               : (uint32_t)p[3] << 24 | (uint32_t)p[2] << 16 | (uint32_t)p[1] << 8 | p[0];
}
static inline void sinew__st32(unsigned char *p, uint32_t v, int big)
{
    for (int i = 0; i < 4; i++)
        p[big ? 3 - i : i] = (unsigned char)(v >> (8 * i));
}
static inline float sinew__ldf32(const unsigned char *p, int big)
{
    uint32_t u = sinew__ld32(p, big);
    float f;
    memcpy(&f, &u, 4);
    return f;
}
static inline void sinew__stf32(unsigned char *p, float f, int big)
{
    uint32_t u;
    memcpy(&u, &f, 4);
    sinew__st32(p, u, big);
}

#endif
