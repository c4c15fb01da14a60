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

/* Open PATH and read the image in it, detected from the content; with
 * SINEW__READ_HEADER only its header and structure (no pixels). */
static int image_read(sinew_ctx *ctx, sinew_image *out, const char *path, int flags)
{
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
    int header = flags & SINEW__READ_HEADER;
    if (got == 0)
        rc = sinew__fail(ctx, SINEW_EFORMAT, "%s: empty file", path);
    else if (got == 8 && !memcmp(sig, png_sig, 8))
        rc = header ? sinew__png_info_fp(ctx, path, fp, out)
                    : sinew__png_read_fp(ctx, path, fp, out);
    else if (got >= 3 && sig[0] == 0xff && sig[1] == 0xd8 && sig[2] == 0xff)
        rc = header ? sinew__jpeg_info_fp(ctx, path, fp, out)
                    : sinew__jpeg_read_fp(ctx, path, fp, out);
    else if (got >= 2 && sig[0] == 'P' && sig[1] >= '1' && sig[1] <= '7')
        rc = sinew__pnm_read_fp(ctx, path, fp, out, flags);
    else
        rc =
            sinew__fail(ctx, SINEW_EFORMAT,
                        "%s: not a PNG, JPEG or binary PGM/PPM image (unrecognised content)", path);
    fclose(fp);
    return rc;
}

int sinew_image_read(sinew_ctx *ctx, sinew_image *out, const char *path)
{
    if (out)
        memset(out, 0, sizeof *out);
    if (!ctx || !out || !path)
        return ctx ? sinew__fail(ctx, SINEW_EINVAL, "read image: missing argument") : SINEW_EINVAL;
    return image_read(ctx, out, path, 0);
}

/* What a role accepts, checked on the image just read (pixels or header only). */
static int role_check(sinew_ctx *ctx, const sinew_image *im, const char *path, int role)
{
    switch (role) {
    case SINEW_ROLE_DEPTH:
        if (im->channels != 1)
            return sinew__fail(ctx, SINEW_EUNSUPPORTED,
                               "%s: depth must have one channel (got %d; colour-coded depth is "
                               "not depth)",
                               path, im->channels);
        if (im->type == SINEW_U8)
            return sinew__fail(ctx, SINEW_EUNSUPPORTED,
                               "%s: 8-bit images cannot hold depth (expected 16-bit PNG codes or "
                               "float metres in .npy/.pfm)",
                               path);
        return SINEW_OK;
    case SINEW_ROLE_LABELS:
        if (im->channels != 1 || im->type == SINEW_F32)
            return sinew__fail(ctx, SINEW_EUNSUPPORTED,
                               "%s: labels must be a one-channel 8- or 16-bit image (got %d "
                               "channels)",
                               path, im->channels);
        return SINEW_OK;
    case SINEW_ROLE_MASK:
        if (im->channels != 1 || im->type == SINEW_U16)
            return sinew__fail(ctx, SINEW_EFORMAT, "%s: a mask must be 8-bit with one channel",
                               path);
        return SINEW_OK;
    case SINEW_ROLE_MAP:
        if (im->type != SINEW_F32 || im->channels != 1)
            return sinew__fail(ctx, SINEW_EFORMAT, "%s: expected a 1-channel map, got %d channels",
                               path, im->channels);
        return SINEW_OK;
    default:
        return SINEW_OK;
    }
}

/* Read PATH as ROLE (flags as image_read): the file kind by extension where the role
 * allows arrays, then the role's check. On failure *out is zeroed. */
static int role_read(sinew_ctx *ctx, sinew_image *out, const char *path, int role, int flags)
{
    memset(out, 0, sizeof *out);
    int npy = sinew__has_ext(path, ".npy"), pfm = sinew__has_ext(path, ".pfm");
    int rc;
    if (npy && (role == SINEW_ROLE_DEPTH || role == SINEW_ROLE_MASK || role == SINEW_ROLE_MAP))
        rc = sinew__npy_read(ctx, path, out, flags);
    else if (pfm && (role == SINEW_ROLE_DEPTH || role == SINEW_ROLE_MAP))
        rc = sinew__pfm_read(ctx, path, out, flags);
    else if (role == SINEW_ROLE_MAP)
        return sinew__fail(ctx, SINEW_EUNSUPPORTED, "%s: maps are read from .npy or .pfm", path);
    else
        rc = image_read(ctx, out, path, flags);
    if (!rc && (rc = role_check(ctx, out, path, role)))
        sinew_image_free(out);
    return rc;
}

int sinew_image_info_read(sinew_ctx *ctx, sinew_image_info *info, const char *path, int role)
{
    if (info)
        memset(info, 0, sizeof *info);
    if (!ctx || !info || !path || role < SINEW_ROLE_IMAGE || role > SINEW_ROLE_MAP)
        return ctx ? sinew__fail(ctx, SINEW_EINVAL, "read image header: bad argument")
                   : SINEW_EINVAL;
    sinew_image h;
    int rc = role_read(ctx, &h, path, role, SINEW__READ_HEADER);
    if (rc)
        return rc;
    info->width = h.width;
    info->height = h.height;
    info->channels = h.channels;
    info->type = h.type;
    return SINEW_OK;
}

int sinew_depth_read(sinew_ctx *ctx, sinew_image *raw, const char *path)
{
    if (!ctx || !raw || !path)
        return SINEW_EINVAL;
    return role_read(ctx, raw, path, SINEW_ROLE_DEPTH, 0);
}

int sinew_labels_read(sinew_ctx *ctx, sinew_image *labels, const char *path)
{
    if (!ctx || !labels || !path)
        return SINEW_EINVAL;
    return role_read(ctx, labels, path, SINEW_ROLE_LABELS, 0);
}

int sinew_mask_read(sinew_ctx *ctx, sinew_image *mask, const char *path)
{
    if (!ctx || !mask || !path)
        return SINEW_EINVAL;
    memset(mask, 0, sizeof *mask);
    sinew_image raw;
    int st = role_read(ctx, &raw, path, SINEW_ROLE_MASK, 0);
    if (st)
        return st;
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
    return role_read(ctx, map, path, SINEW_ROLE_MAP, 0);
}
