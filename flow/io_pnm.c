/* SPDX-License-Identifier: MIT */
/* Binary PGM (P5) and PPM (P6) reading (sinew_image_read in io_image.c dispatches
 * here).
 *
 * Netpbm header: magic, width, height, maxval as decimal tokens separated by
 * whitespace, '#' comments allowed between them, then exactly one whitespace byte and
 * the raster, rows top to bottom. maxval <= 255 gives 1 byte per sample, otherwise 2
 * bytes, most significant first. Samples are kept as stored (no rescaling to the full
 * range); the caller knows what maxval meant. Bytes after the raster are refused. */
#include <stdio.h>
#include <string.h>

#include "flow/internal/io.h"
#include "flow/io.h"

int sinew__pnm_read_fp(sinew_ctx *ctx, const char *path, FILE *fp, sinew_image *out, int flags)
{
    memset(out, 0, sizeof *out);
    char tok[32];
    int rc = sinew__io_token(ctx, path, fp, tok, sizeof tok, 1, "PNM header");
    if (rc)
        return rc;
    int channels = !strcmp(tok, "P5") ? 1 : !strcmp(tok, "P6") ? 3 : 0;
    if (!channels)
        return sinew__fail(ctx, SINEW_EUNSUPPORTED, "%s: only binary PGM/PPM (P5/P6) are supported",
                           path);
    int64_t v[3];
    for (int i = 0; i < 3; i++) {
        rc = sinew__io_token(ctx, path, fp, tok, sizeof tok, 1, "PNM header");
        if (rc)
            return rc;
        if (sinew__io_parse_uint(tok, &v[i]))
            return sinew__fail(ctx, SINEW_EFORMAT, "%s: malformed PNM header field '%s'", path,
                               tok);
    }
    rc = sinew__check_dims(ctx, path, v[0], v[1]);
    if (rc)
        return rc;
    if (v[2] < 1 || v[2] > 65535)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: PNM maxval %lld outside 1..65535", path,
                           (long long)v[2]);
    int wide = v[2] > 255;
    size_t rowbytes = (size_t)v[0] * (size_t)channels * (wide ? 2u : 1u);
    rc = sinew__io_check_remaining(ctx, path, fp, (size_t)v[1], rowbytes, "PNM raster");
    if (rc)
        return rc;
    if (flags & SINEW__READ_HEADER) {
        out->width = (int)v[0];
        out->height = (int)v[1];
        out->channels = channels;
        out->type = wide ? SINEW_U16 : SINEW_U8;
        return SINEW_OK;
    }
    rc = sinew_image_alloc(ctx, out, (int)v[0], (int)v[1], channels, wide ? SINEW_U16 : SINEW_U8);
    if (rc)
        return rc;
    size_t n = (size_t)out->width * (size_t)channels;
    for (int y = 0; y < out->height && !rc; y++) {
        unsigned char *row = sinew_image_row(out, y);
        rc = sinew__io_read(ctx, path, fp, row, rowbytes, "PNM raster");
        if (!rc && wide) {
            uint16_t *r16 = (uint16_t *)(void *)row;
            for (size_t i = 0; i < n; i++) {
                uint16_t s = (uint16_t)(row[2 * i] << 8 | row[2 * i + 1]);
                r16[i] = s;
            }
        }
    }
    if (!rc)
        rc = sinew__io_expect_end(ctx, path, fp, "PNM raster");
    if (rc)
        sinew_image_free(out);
    return rc;
}
