/* SPDX-License-Identifier: MIT */
/* Headers and structure of PNG and JPEG files without decoding pixels, for
 * sinew_image_info_read (io_image.c): what `sinew run --dry-run` checks of every input.
 *
 * PNG (ISO/IEC 15948, W3C PNG 2nd edition §5): the chunk chain is walked from the
 * signature to IEND by the chunk lengths alone; IHDR must come first with 13 bytes, its
 * colour type and bit depth must be a pair the standard allows (Table 11.1), a palette
 * image needs PLTE, and there must be at least one IDAT. CRCs and the compressed data
 * are not checked (the full reader does). The channel count is what sinew_image_read
 * returns: palette expands to RGB, or RGBA when a tRNS chunk is present.
 *
 * JPEG (ITU-T T.81 Annex B): the marker segments are walked from SOI by their lengths;
 * after each start-of-scan the entropy-coded data is skipped to the next marker (0xFF
 * followed by anything but 0x00 stuffing or a restart marker), until EOI. A file that
 * ends before EOI is truncated, as the decoder would say. The frame header (SOFn) gives
 * the size and the component count: 1 gray, 3 RGB, 4 CMYK (refused, as by the reader). */
#define _POSIX_C_SOURCE 200809L
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/types.h>

#include "flow/internal/io.h"
#include "flow/io.h"

static int file_size(sinew_ctx *ctx, const char *path, FILE *fp, uint64_t *size)
{
    struct stat st;
    if (fstat(fileno(fp), &st) != 0 || st.st_size < 0)
        return sinew__fail(ctx, SINEW_EIO, "%s: cannot read", path);
    *size = (uint64_t)st.st_size;
    return SINEW_OK;
}

static int png_truncated(sinew_ctx *ctx, const char *path)
{
    return sinew__fail(ctx, SINEW_EFORMAT, "%s: truncated PNG data (file ends early)", path);
}

/* Channels sinew_image_read gives for this colour type and bit depth; 0 when the pair
 * is not allowed (PNG Table 11.1). */
static int png_channels(int ctype, int depth, int trns)
{
    switch (ctype) {
    case 0:
        return depth == 1 || depth == 2 || depth == 4 || depth == 8 || depth == 16;
    case 2:
        return depth == 8 || depth == 16 ? 3 : 0;
    case 3:
        return depth == 1 || depth == 2 || depth == 4 || depth == 8 ? (trns ? 4 : 3) : 0;
    case 4:
        return depth == 8 || depth == 16 ? 2 : 0;
    case 6:
        return depth == 8 || depth == 16 ? 4 : 0;
    default:
        return 0;
    }
}

int sinew__png_info_fp(sinew_ctx *ctx, const char *path, FILE *fp, sinew_image *out)
{
    memset(out, 0, sizeof *out);
    uint64_t size = 0, pos = 8;
    int rc = file_size(ctx, path, fp, &size);
    if (rc)
        return rc;
    unsigned char head[8], ihdr[13];
    int64_t w = 0, h = 0;
    int depth = 0, ctype = 0, plte = 0, idat = 0, trns = 0, iend = 0;
    for (int first = 1; !iend; first = 0) {
        if (size - pos < 12 || fseeko(fp, (off_t)pos, SEEK_SET) != 0 || fread(head, 1, 8, fp) != 8)
            return png_truncated(ctx, path);
        uint32_t len = sinew__ld32(head, 1);
        if (len > 0x7fffffffu)
            return sinew__fail(ctx, SINEW_EFORMAT, "%s: bad PNG: chunk length %lu too large", path,
                               (unsigned long)len);
        if (size - pos - 12 < len)
            return png_truncated(ctx, path);
        const char *type = (const char *)head + 4;
        if (first != !memcmp(type, "IHDR", 4))
            return sinew__fail(ctx, SINEW_EFORMAT, "%s: bad PNG: IHDR %s", path,
                               first ? "missing" : "repeated");
        if (first) {
            if (len != 13 || fread(ihdr, 1, 13, fp) != 13)
                return sinew__fail(ctx, SINEW_EFORMAT, "%s: bad PNG: IHDR of %lu bytes", path,
                                   (unsigned long)len);
            w = sinew__ld32(ihdr, 1);
            h = sinew__ld32(ihdr + 4, 1);
            depth = ihdr[8];
            ctype = ihdr[9];
            if (ihdr[10] != 0 || ihdr[11] != 0 || ihdr[12] > 1)
                return sinew__fail(ctx, SINEW_EFORMAT,
                                   "%s: bad PNG: unknown compression, filter or interlace method",
                                   path);
        }
        plte |= !memcmp(type, "PLTE", 4);
        idat |= !memcmp(type, "IDAT", 4);
        trns |= !memcmp(type, "tRNS", 4);
        iend = !memcmp(type, "IEND", 4);
        pos += 12 + (uint64_t)len;
    }
    int ch = png_channels(ctype, depth, trns);
    if (!ch)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: bad PNG: colour type %d with bit depth %d",
                           path, ctype, depth);
    if ((rc = sinew__check_dims(ctx, path, w, h)))
        return rc;
    if (ctype == 3 && !plte)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: bad PNG: palette image without PLTE", path);
    if (!idat)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: bad PNG: no image data (IDAT)", path);
    out->width = (int)w;
    out->height = (int)h;
    out->channels = ch;
    out->type = depth == 16 ? SINEW_U16 : SINEW_U8;
    return SINEW_OK;
}

/* Reads the stream in blocks; byte(k) is the k-th byte of the file or -1 past its end. */
typedef struct jpeg_walk {
    FILE *fp;
    unsigned char buf[1 << 16];
    uint64_t base; /* file offset of buf[0] */
    size_t n;
} jpeg_walk;

static int jbyte(jpeg_walk *j, uint64_t k)
{
    if (k < j->base || k >= j->base + j->n) {
        if (fseeko(j->fp, (off_t)k, SEEK_SET) != 0)
            return -1;
        j->base = k;
        j->n = fread(j->buf, 1, sizeof j->buf, j->fp);
        if (!j->n)
            return -1;
    }
    return j->buf[k - j->base];
}

int sinew__jpeg_info_fp(sinew_ctx *ctx, const char *path, FILE *fp, sinew_image *out)
{
    memset(out, 0, sizeof *out);
    jpeg_walk *j = sinew__alloc(ctx, sizeof *j);
    if (!j)
        return SINEW_ENOMEM;
    j->fp = fp;
    j->base = 0;
    j->n = 0;
    uint64_t k = 2; /* after SOI (checked by the caller) */
    int64_t w = -1, h = -1;
    int comps = 0, eoi = 0, rc = SINEW_OK;
    while (!rc && !eoi) {
        int c = jbyte(j, k);
        if (c < 0)
            break;
        if (c != 0xff) {
            rc = sinew__fail(ctx, SINEW_EFORMAT, "%s: bad JPEG data: no marker at byte %llu", path,
                             (unsigned long long)k);
            break;
        }
        int m;
        while ((m = jbyte(j, ++k)) == 0xff) /* fill bytes */
            ;
        if (m < 0)
            break;
        k++;
        if (m == 0xd9) {
            eoi = 1;
            break;
        }
        if (m == 0x01 || (m >= 0xd0 && m <= 0xd7))
            continue;
        int hi = jbyte(j, k), lo = jbyte(j, k + 1);
        if (hi < 0 || lo < 0)
            break;
        unsigned len = (unsigned)hi << 8 | (unsigned)lo;
        if (len < 2) {
            rc = sinew__fail(ctx, SINEW_EFORMAT, "%s: bad JPEG data: segment of length %u", path,
                             len);
            break;
        }
        if (m >= 0xc0 && m <= 0xcf && m != 0xc4 && m != 0xc8 && m != 0xcc && len >= 8) {
            int b[6];
            for (int t = 0; t < 6; t++)
                b[t] = jbyte(j, k + 3 + (uint64_t)t);
            if (b[5] < 0)
                break;
            h = b[0] << 8 | b[1];
            w = b[2] << 8 | b[3];
            comps = b[4];
        }
        k += len;
        if (m != 0xda)
            continue;
        /* entropy-coded data: to the next marker that is not stuffing or a restart */
        for (;; k++) {
            int a = jbyte(j, k), b = a == 0xff ? jbyte(j, k + 1) : 0;
            if (a < 0 || b < 0) {
                k = UINT64_MAX;
                break;
            }
            if (a == 0xff && b != 0 && !(b >= 0xd0 && b <= 0xd7) && b != 0xff)
                break;
        }
        if (k == UINT64_MAX)
            break;
    }
    sinew__free(ctx, j);
    if (rc)
        return rc;
    if (!eoi)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: truncated JPEG data (file ends early)", path);
    if (w < 1 || h < 1 || !comps)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: truncated or bad JPEG header", path);
    if ((rc = sinew__check_dims(ctx, path, w, h)))
        return rc;
    if (comps == 4)
        return sinew__fail(ctx, SINEW_EUNSUPPORTED, "%s: CMYK JPEG is not supported", path);
    if (comps != 1 && comps != 3)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: bad JPEG header: %d components", path, comps);
    out->width = (int)w;
    out->height = (int)h;
    out->channels = comps;
    out->type = SINEW_U8;
    return SINEW_OK;
}
