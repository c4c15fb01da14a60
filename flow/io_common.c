/* SPDX-License-Identifier: MIT */
/* Helpers shared by every reader and writer: streams with one-line errors that name
 * the file, header tokens for the PNM/PFM text headers, and float conversions that do
 * not depend on the host byte order (every multi-byte value is assembled from bytes).
 *
 * The float16 conversion is done by hand on the bit patterns so that it is exact in
 * one direction and correctly rounded (to nearest, ties to even) in the other, with
 * subnormals, infinities and NaN handled as IEEE 754 says. */
#define _POSIX_C_SOURCE 200809L
#include <ctype.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>

#include "flow/internal/io.h"

int sinew__io_read(sinew_ctx *ctx, const char *path, FILE *fp, void *buf, size_t n,
                   const char *what)
{
    if (n == 0)
        return SINEW_OK;
    size_t got = fread(buf, 1, n, fp);
    if (got == n)
        return SINEW_OK;
    if (ferror(fp))
        return sinew__fail(ctx, SINEW_EIO, "%s: read error in the %s", path, what);
    if (got == 0 && ftell(fp) == 0)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: empty file", path);
    return sinew__fail(ctx, SINEW_EFORMAT, "%s: truncated %s (file ends early)", path, what);
}

int sinew__io_expect_end(sinew_ctx *ctx, const char *path, FILE *fp, const char *what)
{
    int c = getc(fp);
    if (c == EOF && ferror(fp))
        return sinew__fail(ctx, SINEW_EIO, "%s: read error after the %s", path, what);
    if (c != EOF)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: unexpected bytes after the %s", path, what);
    return SINEW_OK;
}

int sinew__io_check_remaining(sinew_ctx *ctx, const char *path, FILE *fp, size_t rows,
                              size_t rowbytes, const char *what)
{
    struct stat st;
    long pos = ftell(fp);
    if (fstat(fileno(fp), &st) != 0 || !S_ISREG(st.st_mode) || pos < 0 || st.st_size < pos)
        return SINEW_OK;
    uint64_t left = (uint64_t)st.st_size - (uint64_t)pos;
    uint64_t need;
    if (__builtin_mul_overflow((uint64_t)rows, (uint64_t)rowbytes, &need) || left < need)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: truncated %s (file ends early)", path, what);
    if (left > need)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: unexpected bytes after the %s", path, what);
    return SINEW_OK;
}

int sinew__io_token(sinew_ctx *ctx, const char *path, FILE *fp, char *buf, size_t n, int comments,
                    const char *what)
{
    int c;
    for (;;) {
        c = getc(fp);
        if (c == '#' && comments) {
            while ((c = getc(fp)) != EOF && c != '\n' && c != '\r')
                ;
            if (c == EOF)
                break;
            continue;
        }
        if (c == EOF || !isspace(c))
            break;
    }
    if (c == EOF) {
        if (ferror(fp))
            return sinew__fail(ctx, SINEW_EIO, "%s: read error in the %s", path, what);
        if (ftell(fp) == 0)
            return sinew__fail(ctx, SINEW_EFORMAT, "%s: empty file", path);
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: truncated %s (file ends early)", path, what);
    }
    size_t len = 0;
    while (c != EOF && !isspace(c)) {
        if (len + 1 >= n)
            return sinew__fail(ctx, SINEW_EFORMAT, "%s: malformed %s (over-long field)", path,
                               what);
        buf[len++] = (char)c;
        c = getc(fp);
    }
    buf[len] = '\0';
    if (c == EOF)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: truncated %s (file ends early)", path, what);
    return SINEW_OK;
}

int sinew__io_parse_uint(const char *s, int64_t *out)
{
    int64_t v = 0;
    size_t i = 0;
    for (; s[i]; i++) {
        if (s[i] < '0' || s[i] > '9' || i >= 18)
            return -1;
        v = v * 10 + (s[i] - '0');
    }
    if (i == 0)
        return -1;
    *out = v;
    return 0;
}

int sinew__io_bytes(sinew_ctx *ctx, const char *path, int64_t w, int64_t h, int64_t c, size_t elem,
                    size_t *out)
{
    size_t a, b;
    if (w < 0 || h < 0 || c < 0 || (uint64_t)w > SIZE_MAX || (uint64_t)h > SIZE_MAX ||
        (uint64_t)c > SIZE_MAX || sinew__mul_size((size_t)w, (size_t)h, &a) ||
        sinew__mul_size(a, (size_t)c, &b) || sinew__mul_size(b, elem, out))
        return sinew__fail(ctx, SINEW_EOVERFLOW, "%s: data size overflows", path);
    return SINEW_OK;
}

int sinew__io_write_rows(sinew_ctx *ctx, const char *path, const void *head, size_t headlen,
                         size_t nrows, size_t rowbytes, sinew__row_fn fill, void *ud)
{
    unsigned char *row = sinew__alloc(ctx, rowbytes);
    if (!row)
        return SINEW_ENOMEM;
    sinew_outfile *f;
    int rc = sinew_outfile_open(ctx, &f, path);
    if (rc) {
        sinew__free(ctx, row);
        return rc;
    }
    FILE *fp = sinew_outfile_stream(f);
    int bad = fwrite(head, 1, headlen, fp) != headlen;
    for (size_t r = 0; r < nrows && rowbytes && !bad; r++) {
        fill(ud, r, row);
        bad = fwrite(row, 1, rowbytes, fp) != rowbytes;
    }
    sinew__free(ctx, row);
    if (bad) {
        int e = errno;
        sinew_outfile_abort(f);
        return sinew__fail(ctx, SINEW_EIO, "%s: cannot write: %s", path, strerror(e ? e : EIO));
    }
    return sinew_outfile_commit(ctx, f);
}

/* ---- float16 ---- */

float sinew__half_to_float(uint16_t h)
{
    uint32_t sign = (uint32_t)(h & 0x8000u) << 16;
    uint32_t exp = (h >> 10) & 0x1fu;
    uint32_t mant = h & 0x3ffu;
    uint32_t bits;
    if (exp == 0) {
        if (mant == 0) {
            bits = sign;
        } else { /* subnormal: mant * 2^-24, renormalise */
            int e = -14;
            while (!(mant & 0x400u)) {
                mant <<= 1;
                e--;
            }
            mant &= 0x3ffu;
            bits = sign | (uint32_t)(e + 127) << 23 | mant << 13;
        }
    } else if (exp == 31) {
        bits = sign | 0x7f800000u | mant << 13; /* infinity or NaN (payload kept) */
    } else {
        bits = sign | (exp - 15 + 127) << 23 | mant << 13;
    }
    float f;
    memcpy(&f, &bits, 4);
    return f;
}

uint16_t sinew__float_to_half(float f)
{
    uint32_t bits;
    memcpy(&bits, &f, 4);
    uint16_t sign = (uint16_t)((bits >> 16) & 0x8000u);
    uint32_t exp = (bits >> 23) & 0xffu;
    uint32_t mant = bits & 0x7fffffu;
    if (exp == 255) {
        if (mant == 0)
            return sign | 0x7c00u;
        return (uint16_t)(sign | 0x7e00u | (mant >> 13)); /* quiet NaN, payload top bits */
    }
    int e = (int)exp - 127;
    if (e > 15)
        return sign | 0x7c00u; /* overflow to infinity */
    if (e >= -14) {            /* normal half; rounding may carry up to infinity */
        uint32_t hb = (uint32_t)(e + 15) << 10 | (mant >> 13);
        uint32_t rem = mant & 0x1fffu;
        if (rem > 0x1000u || (rem == 0x1000u && (hb & 1u)))
            hb++;
        return (uint16_t)(sign | hb);
    }
    if (e < -25 || exp == 0)
        return sign; /* below half the smallest subnormal (or a float zero/subnormal) */
    /* half subnormal: value / 2^-24 = m * 2^(e + 1) with the implicit bit restored */
    uint32_t m = mant | 0x800000u;
    int shift = -(e + 1); /* 14 .. 24 */
    uint32_t hb = m >> shift;
    uint32_t rem = m & ((1u << shift) - 1u);
    uint32_t half = 1u << (shift - 1);
    if (rem > half || (rem == half && (hb & 1u)))
        hb++;
    return (uint16_t)(sign | hb);
}

void sinew__io_decode_floats(float *dst, const unsigned char *src, size_t n, size_t elem, int big)
{
    if (elem == 4) {
        for (size_t i = 0; i < n; i++)
            dst[i] = sinew__ldf32(src + 4 * i, big);
    } else if (elem == 2) {
        for (size_t i = 0; i < n; i++) {
            const unsigned char *p = src + 2 * i;
            uint16_t h = big ? (uint16_t)(p[0] << 8 | p[1]) : (uint16_t)(p[1] << 8 | p[0]);
            dst[i] = sinew__half_to_float(h);
        }
    } else {
        for (size_t i = 0; i < n; i++) {
            const unsigned char *p = src + 8 * i;
            uint64_t hi = sinew__ld32(p + (big ? 0 : 4), big);
            uint64_t lo = sinew__ld32(p + (big ? 4 : 0), big);
            uint64_t u = hi << 32 | lo;
            double d;
            memcpy(&d, &u, 8);
            /* Out-of-range conversion is undefined in C: saturate to infinity from the
             * rounding midpoint between FLT_MAX and 2^128 (ties go to the even 2^128). */
            if (isfinite(d) && fabs(d) >= 0x1p128 - 0x1p103)
                d = d > 0 ? (double)INFINITY : -(double)INFINITY;
            dst[i] = (float)d;
        }
    }
}

void sinew__io_encode_floats(unsigned char *dst, const float *src, size_t n, size_t elem, int big)
{
    if (elem == 4) {
        for (size_t i = 0; i < n; i++)
            sinew__stf32(dst + 4 * i, src[i], big);
    } else {
        for (size_t i = 0; i < n; i++) {
            uint16_t h = sinew__float_to_half(src[i]);
            dst[2 * i + (big ? 1 : 0)] = (unsigned char)(h & 0xffu);
            dst[2 * i + (big ? 0 : 1)] = (unsigned char)(h >> 8);
        }
    }
}

int sinew__has_ext(const char *path, const char *ext)
{
    size_t n = strlen(path), e = strlen(ext);
    return n >= e && !strcasecmp(path + n - e, ext);
}
