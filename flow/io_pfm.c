/* SPDX-License-Identifier: MIT */
/* PFM (portable float map) reading and writing.
 *
 * Layout: a text header of three whitespace-separated fields -- "PF" (3 channels) or
 * "Pf" (1 channel); "width height"; a scale whose sign gives the byte order (negative:
 * little-endian, positive: big-endian) -- with exactly one whitespace byte after the
 * scale, then width*height*channels float32 values, rows stored bottom to top. The
 * magnitude of the scale is not applied (values are returned as stored). The writer
 * emits little-endian (scale -1) files. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "flow/internal/io.h"
#include "flow/io.h"

int sinew__pfm_read(sinew_ctx *ctx, const char *path, sinew_image *out, int flags)
{
    memset(out, 0, sizeof *out);
    int flow = flags & SINEW__READ_FLOW;
    FILE *fp;
    int rc = sinew__open_regular(ctx, path, &fp);
    if (rc)
        return rc;
    char tok[64];
    int64_t w = 0, h = 0;
    int fc = 0, big = 0;
    rc = sinew__io_token(ctx, path, fp, tok, sizeof tok, 0, "PFM header");
    if (!rc) {
        fc = !strcmp(tok, "PF") ? 3 : !strcmp(tok, "Pf") ? 1 : 0;
        if (!fc)
            rc = sinew__fail(ctx, SINEW_EFORMAT, "%s: not a PFM file (bad magic)", path);
        else if (flow && fc != 3)
            rc = sinew__fail(ctx, SINEW_EFORMAT,
                             "%s: 1-channel PFM (\"Pf\") is not a flow field (need \"PF\")", path);
    }
    if (!rc)
        rc = sinew__io_token(ctx, path, fp, tok, sizeof tok, 0, "PFM header");
    if (!rc && sinew__io_parse_uint(tok, &w))
        rc = sinew__fail(ctx, SINEW_EFORMAT, "%s: malformed PFM width '%s'", path, tok);
    if (!rc)
        rc = sinew__io_token(ctx, path, fp, tok, sizeof tok, 0, "PFM header");
    if (!rc && sinew__io_parse_uint(tok, &h))
        rc = sinew__fail(ctx, SINEW_EFORMAT, "%s: malformed PFM height '%s'", path, tok);
    if (!rc)
        rc = sinew__io_token(ctx, path, fp, tok, sizeof tok, 0, "PFM header");
    if (!rc) {
        char *end;
        double scale = strtod(tok, &end);
        if (*end || !isfinite(scale) || scale == 0)
            rc = sinew__fail(ctx, SINEW_EFORMAT, "%s: malformed PFM scale '%s'", path, tok);
        big = scale > 0;
    }
    if (!rc)
        rc = sinew__check_dims(ctx, path, w, h);
    int oc = flow ? 2 : fc;
    size_t rowbytes = 0;
    if (!rc)
        rc = sinew__io_bytes(ctx, path, w, 1, fc, 4, &rowbytes);
    if (!rc)
        rc = sinew__io_check_remaining(ctx, path, fp, (size_t)h, rowbytes, "PFM data");
    if (!rc && (flags & SINEW__READ_HEADER)) {
        fclose(fp);
        out->width = (int)w;
        out->height = (int)h;
        out->channels = oc;
        out->type = SINEW_F32;
        return SINEW_OK;
    }
    if (!rc)
        rc = sinew_image_alloc(ctx, out, (int)w, (int)h, oc, SINEW_F32);
    unsigned char *raw = rc ? NULL : sinew__alloc(ctx, rowbytes);
    float *vals = rc || !raw ? NULL : sinew__alloc(ctx, rowbytes);
    if (!rc && (!raw || !vals))
        rc = SINEW_ENOMEM;
    for (int r = 0; !rc && r < out->height; r++) {
        rc = sinew__io_read(ctx, path, fp, raw, rowbytes, "PFM data");
        if (rc)
            break;
        sinew__io_decode_floats(vals, raw, (size_t)out->width * (size_t)fc, 4, big);
        float *dst = sinew_image_row_f32(out, out->height - 1 - r);
        for (int x = 0; x < out->width; x++)
            for (int k = 0; k < oc; k++)
                dst[(size_t)x * (size_t)oc + (size_t)k] = vals[(size_t)x * (size_t)fc + (size_t)k];
    }
    if (!rc)
        rc = sinew__io_expect_end(ctx, path, fp, "PFM data");
    sinew__free(ctx, raw);
    sinew__free(ctx, vals);
    fclose(fp);
    if (rc)
        sinew_image_free(out);
    return rc;
}

typedef struct pfm_rows {
    const sinew_image *img;
    int fc; /* channels in the file */
} pfm_rows;

/* File row r is image row height-1-r (bottom to top), little-endian, missing channels 0. */
static void pfm_row(void *ud, size_t r, unsigned char *out)
{
    const pfm_rows *pr = ud;
    const sinew_image *img = pr->img;
    const float *src = sinew_image_row_f32(img, img->height - 1 - (int)r);
    size_t ic = (size_t)img->channels, fc = (size_t)pr->fc;
    for (size_t x = 0; x < (size_t)img->width; x++)
        for (size_t k = 0; k < fc; k++)
            sinew__stf32(out + (x * fc + k) * 4, k < ic ? src[x * ic + k] : 0.0f, 0);
}

int sinew__pfm_write(sinew_ctx *ctx, const char *path, const sinew_image *img, int flow)
{
    pfm_rows pr = {img, flow ? 3 : img->channels};
    size_t rowbytes;
    if (sinew__mul_size((size_t)img->width, (size_t)pr.fc * 4, &rowbytes))
        return sinew__fail(ctx, SINEW_EOVERFLOW, "%s: data size overflows", path);
    char head[64];
    int n = snprintf(head, sizeof head, "%s\n%d %d\n-1\n", pr.fc == 3 ? "PF" : "Pf", img->width,
                     img->height);
    return sinew__io_write_rows(ctx, path, head, (size_t)n, (size_t)img->height, rowbytes, pfm_row,
                                &pr);
}

int sinew_pfm_read_image(sinew_ctx *ctx, sinew_image *out, const char *path)
{
    if (out)
        memset(out, 0, sizeof *out);
    if (!ctx || !out || !path)
        return ctx ? sinew__fail(ctx, SINEW_EINVAL, "read PFM: missing argument") : SINEW_EINVAL;
    return sinew__pfm_read(ctx, path, out, 0);
}

int sinew_pfm_write_image(sinew_ctx *ctx, const char *path, const sinew_image *img)
{
    if (!ctx || !path || !img || !img->data)
        return ctx ? sinew__fail(ctx, SINEW_EINVAL, "write PFM: missing argument") : SINEW_EINVAL;
    if (img->type != SINEW_F32 || (img->channels != 1 && img->channels != 3) || img->width < 1 ||
        img->height < 1)
        return sinew__fail(ctx, SINEW_EINVAL, "%s: PFM needs a float image with 1 or 3 channels",
                           path);
    return sinew__pfm_write(ctx, path, img, 0);
}
