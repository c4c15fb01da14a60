/* SPDX-License-Identifier: MIT */
/* Reading images by role: colour/gray frames (content-sniffing dispatch to the PNG,
 * JPEG and PGM/PPM readers), depth maps (16-bit codes or float metres), label ids,
 * mask bits and one-channel float maps. Each reader checks what its role allows and
 * names the file when it refuses. */
#define _POSIX_C_SOURCE 200809L
#include <math.h>
#include <stdio.h>
#include <string.h>
#include <strings.h>

#include "flow/internal/base.h"
#include "flow/internal/io.h"
#include "flow/io.h"

int sinew_image_read(sinew_ctx *ctx, sinew_image *out, const char *path)
{
    if (out)
        memset(out, 0, sizeof *out);
    if (!ctx || !out || !path)
        return ctx ? sinew__fail(ctx, SINEW_EINVAL, "read image: missing argument") : SINEW_EINVAL;
    FILE *fp;
    int rc = sinew__open_regular(ctx, path, &fp);
    if (rc)
        return rc;
    unsigned char sig[8];
    size_t got = fread(sig, 1, sizeof sig, fp);
    if (ferror(fp)) {
        fclose(fp);
        return sinew__fail(ctx, SINEW_EIO, "%s: cannot read", path);
    }
    rewind(fp);
    static const unsigned char png_sig[8] = {0x89, 'P', 'N', 'G', '\r', '\n', 0x1a, '\n'};
    if (got == 0)
        rc = sinew__fail(ctx, SINEW_EFORMAT, "%s: empty file", path);
    else if (got == 8 && !memcmp(sig, png_sig, 8))
        rc = sinew__png_read_fp(ctx, path, fp, out);
    else if (got >= 3 && sig[0] == 0xff && sig[1] == 0xd8 && sig[2] == 0xff)
        rc = sinew__jpeg_read_fp(ctx, path, fp, out);
    else if (got >= 2 && sig[0] == 'P' && sig[1] >= '1' && sig[1] <= '7')
        rc = sinew__pnm_read_fp(ctx, path, fp, out);
    else
        rc =
            sinew__fail(ctx, SINEW_EFORMAT,
                        "%s: not a PNG, JPEG or binary PGM/PPM image (unrecognised content)", path);
    fclose(fp);
    return rc;
}

int sinew_depth_read(sinew_ctx *ctx, sinew_image *raw, const char *path)
{
    if (!ctx || !raw || !path)
        return SINEW_EINVAL;
    memset(raw, 0, sizeof *raw);
    int rc;
    if (sinew__has_ext(path, ".npy"))
        rc = sinew_npy_read_image(ctx, raw, path);
    else if (sinew__has_ext(path, ".pfm"))
        rc = sinew_pfm_read_image(ctx, raw, path);
    else
        rc = sinew_image_read(ctx, raw, path);
    if (rc)
        return rc;
    if (raw->channels != 1) {
        int ch = raw->channels;
        sinew_image_free(raw);
        return sinew__fail(ctx, SINEW_EUNSUPPORTED,
                           "%s: depth must have one channel (got %d; colour-coded depth is "
                           "not depth)",
                           path, ch);
    }
    if (raw->type == SINEW_U8) {
        sinew_image_free(raw);
        return sinew__fail(ctx, SINEW_EUNSUPPORTED,
                           "%s: 8-bit images cannot hold depth (expected 16-bit PNG codes or "
                           "float metres in .npy/.pfm)",
                           path);
    }
    return SINEW_OK;
}

int sinew_labels_read(sinew_ctx *ctx, sinew_image *labels, const char *path)
{
    if (!ctx || !labels || !path)
        return SINEW_EINVAL;
    int rc = sinew_image_read(ctx, labels, path);
    if (rc)
        return rc;
    if (labels->channels != 1 || labels->type == SINEW_F32) {
        int ch = labels->channels;
        sinew_image_free(labels);
        return sinew__fail(ctx, SINEW_EUNSUPPORTED,
                           "%s: labels must be a one-channel 8- or 16-bit image (got %d "
                           "channels)",
                           path, ch);
    }
    return SINEW_OK;
}

int sinew_mask_read(sinew_ctx *ctx, sinew_image *mask, const char *path)
{
    if (!ctx || !mask || !path)
        return SINEW_EINVAL;
    memset(mask, 0, sizeof *mask);
    sinew_image raw;
    int st = sinew__has_ext(path, ".npy") ? sinew_npy_read_image(ctx, &raw, path)
                                          : sinew_image_read(ctx, &raw, path);
    if (st)
        return st;
    if (raw.channels != 1 || raw.type == SINEW_U16) {
        sinew_image_free(&raw);
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: a mask must be 8-bit with one channel", path);
    }
    if (raw.type == SINEW_U8) {
        *mask = raw;
        return SINEW_OK;
    }
    st = sinew_image_alloc(ctx, mask, raw.width, raw.height, 1, SINEW_U8);
    for (int y = 0; !st && y < raw.height; y++) {
        const float *r = sinew_image_row_f32(&raw, y);
        uint8_t *o = sinew_image_row_u8(mask, y);
        for (int x = 0; x < raw.width; x++) {
            if (!(r[x] >= 0 && r[x] <= 255) || r[x] != floorf(r[x])) {
                sinew_image_free(mask);
                st = sinew__fail(ctx, SINEW_EVALUE,
                                 "%s: mask value at (%d, %d) is not an integer 0..255", path, x, y);
                break;
            }
            o[x] = (uint8_t)r[x];
        }
    }
    sinew_image_free(&raw);
    return st;
}

int sinew_map_read(sinew_ctx *ctx, sinew_image *map, const char *path)
{
    if (!ctx || !map || !path)
        return SINEW_EINVAL;
    memset(map, 0, sizeof *map);
    int st;
    if (sinew__has_ext(path, ".npy"))
        st = sinew_npy_read_image(ctx, map, path);
    else if (sinew__has_ext(path, ".pfm"))
        st = sinew_pfm_read_image(ctx, map, path);
    else
        return sinew__fail(ctx, SINEW_EUNSUPPORTED, "%s: maps are read from .npy or .pfm", path);
    if (st)
        return st;
    if (map->type != SINEW_F32 || map->channels != 1) {
        int ch = map->channels;
        sinew_image_free(map);
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: expected a 1-channel map, got %d channels",
                           path, ch);
    }
    return SINEW_OK;
}
