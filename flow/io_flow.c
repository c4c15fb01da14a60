/* SPDX-License-Identifier: MIT */
/* Flow-field files: Middlebury .flo, KITTI 16-bit PNG, PFM and .npy, chosen by
 * extension.
 *
 * In memory a flow field is a 2-channel float image (u, v) in pixels with NaN (in both
 * components) for unknown vectors. Each format stores "unknown" its own way:
 *   .flo    |u| or |v| > 1e9 reads as unknown; the writer stores 1e10 (Middlebury
 *           flow-code convention, UNKNOWN_FLOW = 1e10, UNKNOWN_FLOW_THRESH = 1e9).
 *   KITTI   third channel 0 = unknown; the writer stores (0, 0, 0) there. Known vectors
 *           are round(64 c + 2^15) per component, read back as (code - 2^15) / 64.
 *   PFM/npy NaN. Any other non-finite value read from these is treated as unknown.
 * Writers refuse infinite components (EVALUE): infinity is not a displacement. */
#define _POSIX_C_SOURCE 200809L
#include <math.h>
#include <stdio.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>

#include "flow/internal/io.h"
#include "flow/io.h"

#define FLO_TAG 202021.25f
#define FLO_UNKNOWN 1e10f
#define FLO_UNKNOWN_THRESH 1e9f

/* The one table of flow formats: name, extension, and lookup order (the order
 * sinew_flow_find tries; the first entry of an extension is the one a path maps to). */
static const struct {
    sinew_flow_format fmt;
    const char *name, *ext;
} formats[] = {
    {SINEW_FLOW_FLO, "flo", "flo"},     {SINEW_FLOW_NPY, "npy", "npy"},
    {SINEW_FLOW_NPY16, "npy16", "npy"}, {SINEW_FLOW_PFM, "pfm", "pfm"},
    {SINEW_FLOW_KITTI, "png", "png"},
};
#define NFORMATS (sizeof formats / sizeof formats[0])

const char *sinew_flow_format_ext(int fmt)
{
    for (size_t k = 0; k < NFORMATS; k++)
        if ((int)formats[k].fmt == fmt)
            return formats[k].ext;
    return NULL;
}

const char *sinew_flow_format_name(int fmt)
{
    for (size_t k = 0; k < NFORMATS; k++)
        if ((int)formats[k].fmt == fmt)
            return formats[k].name;
    return NULL;
}

int sinew_flow_format_parse(const char *name, int *fmt)
{
    if (!name || !fmt)
        return SINEW_EINVAL;
    for (size_t k = 0; k < NFORMATS; k++)
        if (!strcmp(name, formats[k].name)) {
            *fmt = (int)formats[k].fmt;
            return SINEW_OK;
        }
    return SINEW_EINVAL;
}

int sinew_flow_find(const char *stem, char *buf, size_t n)
{
    if (!stem || !buf || !n)
        return -1;
    for (size_t k = 0; k < NFORMATS; k++) {
        if (k && !strcmp(formats[k].ext, formats[k - 1].ext))
            continue;
        int w = snprintf(buf, n, "%s.%s", stem, formats[k].ext);
        if (w < 0 || (size_t)w >= n)
            return -1;
        struct stat st;
        if (stat(buf, &st) == 0 && S_ISREG(st.st_mode))
            return 1;
    }
    snprintf(buf, n, "%s.%s", stem, formats[0].ext);
    return 0;
}

int sinew_flow_format_from_path(sinew_ctx *ctx, sinew_flow_format *fmt, const char *path)
{
    if (!ctx || !path || !fmt)
        return ctx ? sinew__fail(ctx, SINEW_EINVAL, "flow format: missing argument") : SINEW_EINVAL;
    const char *slash = strrchr(path, '/');
    const char *dot = strrchr(slash ? slash + 1 : path, '.');
    for (size_t k = 0; dot && k < NFORMATS; k++)
        if (!strcasecmp(dot + 1, formats[k].ext)) {
            *fmt = formats[k].fmt;
            return SINEW_OK;
        }
    return sinew__fail(ctx, SINEW_EUNSUPPORTED,
                       "%s: unknown flow file extension (use .flo, .png, .pfm or .npy)", path);
}

/* Mark a vector unknown (both components NaN) if either component is non-finite or,
 * for .flo, beyond the unknown threshold. */
static void normalise_unknown(sinew_image *flow, float thresh)
{
    for (int y = 0; y < flow->height; y++) {
        float *r = sinew_image_row_f32(flow, y);
        for (int x = 0; x < flow->width; x++) {
            float u = r[2 * x], v = r[2 * x + 1];
            if (!isfinite(u) || !isfinite(v) || fabsf(u) > thresh || fabsf(v) > thresh)
                r[2 * x] = r[2 * x + 1] = NAN;
        }
    }
}

/* ---- Middlebury .flo ---- */

static int flo_read(sinew_ctx *ctx, const char *path, sinew_image *out)
{
    FILE *fp;
    int rc = sinew__open_regular(ctx, path, &fp);
    if (rc)
        return rc;
    unsigned char hdr[12];
    rc = sinew__io_read(ctx, path, fp, hdr, 4, ".flo header");
    if (!rc && sinew__ldf32(hdr, 0) != FLO_TAG)
        rc = sinew__fail(ctx, SINEW_EFORMAT, "%s: not a .flo file (bad tag, expected \"PIEH\")",
                         path);
    if (!rc)
        rc = sinew__io_read(ctx, path, fp, hdr + 4, 8, ".flo header");
    if (!rc)
        rc = sinew__check_dims(ctx, path, (int32_t)sinew__ld32(hdr + 4, 0),
                               (int32_t)sinew__ld32(hdr + 8, 0));
    if (!rc)
        rc = sinew__io_check_remaining(ctx, path, fp, sinew__ld32(hdr + 8, 0),
                                       (size_t)sinew__ld32(hdr + 4, 0) * 8, ".flo data");
    if (!rc)
        rc = sinew_image_alloc(ctx, out, (int)sinew__ld32(hdr + 4, 0), (int)sinew__ld32(hdr + 8, 0),
                               2, SINEW_F32);
    size_t rowbytes = rc ? 0 : (size_t)out->width * 8;
    unsigned char *raw = rc ? NULL : sinew__alloc(ctx, rowbytes);
    if (!rc && !raw)
        rc = SINEW_ENOMEM;
    for (int y = 0; !rc && y < out->height; y++) {
        rc = sinew__io_read(ctx, path, fp, raw, rowbytes, ".flo data");
        if (!rc)
            sinew__io_decode_floats(sinew_image_row_f32(out, y), raw, (size_t)out->width * 2, 4, 0);
    }
    if (!rc)
        rc = sinew__io_expect_end(ctx, path, fp, ".flo data");
    sinew__free(ctx, raw);
    fclose(fp);
    if (!rc)
        normalise_unknown(out, FLO_UNKNOWN_THRESH);
    return rc;
}

/* One .flo row: (u, v) little-endian float32 pairs, unknown as 1e10. */
static void flo_row(void *ud, size_t y, unsigned char *out)
{
    const sinew_image *flow = ud;
    const float *r = sinew_image_row_f32(flow, (int)y);
    for (int x = 0; x < flow->width; x++) {
        int unknown = isnan(r[2 * x]) || isnan(r[2 * x + 1]);
        sinew__stf32(out + 8 * (size_t)x, unknown ? FLO_UNKNOWN : r[2 * x], 0);
        sinew__stf32(out + 8 * (size_t)x + 4, unknown ? FLO_UNKNOWN : r[2 * x + 1], 0);
    }
}

static int flo_write(sinew_ctx *ctx, const char *path, const sinew_image *flow)
{
    /* A finite component above the threshold would read back as unknown. */
    for (int y = 0; y < flow->height; y++) {
        const float *r = sinew_image_row_f32(flow, y);
        for (int x = 0; x < 2 * flow->width; x++)
            if (fabsf(r[x]) > FLO_UNKNOWN_THRESH && !isnan(r[x]))
                return sinew__fail(ctx, SINEW_EVALUE,
                                   "%s: flow value %g at (%d, %d) is beyond the .flo unknown "
                                   "threshold 1e9",
                                   path, (double)r[x], x / 2, y);
    }
    unsigned char hdr[12];
    sinew__stf32(hdr, FLO_TAG, 0);
    sinew__st32(hdr + 4, (uint32_t)flow->width, 0);
    sinew__st32(hdr + 8, (uint32_t)flow->height, 0);
    return sinew__io_write_rows(ctx, path, hdr, 12, (size_t)flow->height, (size_t)flow->width * 8,
                                flo_row, (void *)flow);
}

/* ---- KITTI 16-bit PNG ---- */

static int kitti_read(sinew_ctx *ctx, const char *path, sinew_image *out)
{
    sinew_image png;
    int rc = sinew_image_read(ctx, &png, path);
    if (rc)
        return rc;
    if (png.type != SINEW_U16 || png.channels != 3) {
        sinew_image_free(&png);
        return sinew__fail(ctx, SINEW_EFORMAT,
                           "%s: not a KITTI flow PNG (need 16-bit RGB: u, v, valid)", path);
    }
    rc = sinew_image_alloc(ctx, out, png.width, png.height, 2, SINEW_F32);
    for (int y = 0; !rc && y < png.height; y++) {
        const uint16_t *s = sinew_image_row_u16(&png, y);
        float *d = sinew_image_row_f32(out, y);
        for (int x = 0; x < png.width; x++) {
            int valid = s[3 * x + 2] != 0;
            d[2 * x] = valid ? ((float)s[3 * x] - 32768.0f) / 64.0f : NAN;
            d[2 * x + 1] = valid ? ((float)s[3 * x + 1] - 32768.0f) / 64.0f : NAN;
        }
    }
    sinew_image_free(&png);
    return rc;
}

/* KITTI code of one component, or -1 if it does not fit in 16 bits. */
static long kitti_code(float c)
{
    double code = round((double)c * 64.0 + 32768.0);
    return code >= 0 && code <= 65535 ? (long)code : -1;
}

static int kitti_write(sinew_ctx *ctx, const char *path, const sinew_image *flow)
{
    sinew_image png;
    int rc = sinew_image_alloc(ctx, &png, flow->width, flow->height, 3, SINEW_U16);
    if (rc)
        return rc;
    for (int y = 0; y < flow->height && !rc; y++) {
        const float *s = sinew_image_row_f32(flow, y);
        uint16_t *d = sinew_image_row_u16(&png, y);
        for (int x = 0; x < flow->width; x++) {
            if (isnan(s[2 * x]) || isnan(s[2 * x + 1]))
                continue; /* unknown: (0, 0, 0), already zero */
            long cu = kitti_code(s[2 * x]), cv = kitti_code(s[2 * x + 1]);
            if (cu < 0 || cv < 0) {
                rc = sinew__fail(ctx, SINEW_EVALUE,
                                 "%s: flow (%g, %g) at (%d, %d) is outside the KITTI PNG range "
                                 "[-512, 512)",
                                 path, (double)s[2 * x], (double)s[2 * x + 1], x, y);
                break;
            }
            d[3 * x] = (uint16_t)cu;
            d[3 * x + 1] = (uint16_t)cv;
            d[3 * x + 2] = 1;
        }
    }
    if (!rc)
        rc = sinew_image_write_png(ctx, path, &png);
    sinew_image_free(&png);
    return rc;
}

/* ---- dispatch ---- */

int sinew_flow_read(sinew_ctx *ctx, sinew_image *flow, const char *path, sinew_flow_format fmt)
{
    if (flow)
        memset(flow, 0, sizeof *flow);
    if (!ctx || !flow || !path)
        return ctx ? sinew__fail(ctx, SINEW_EINVAL, "read flow: missing argument") : SINEW_EINVAL;
    int rc = SINEW_OK;
    if (fmt == SINEW_FLOW_AUTO)
        rc = sinew_flow_format_from_path(ctx, &fmt, path);
    if (rc)
        return rc;
    switch (fmt) {
    case SINEW_FLOW_FLO:
        rc = flo_read(ctx, path, flow);
        break;
    case SINEW_FLOW_KITTI:
        rc = kitti_read(ctx, path, flow);
        break;
    case SINEW_FLOW_PFM:
        rc = sinew__pfm_read(ctx, path, flow, SINEW__READ_FLOW);
        break;
    case SINEW_FLOW_NPY:
    case SINEW_FLOW_NPY16:
        rc = sinew__npy_read(ctx, path, flow, SINEW__READ_FLOW);
        break;
    default:
        return sinew__fail(ctx, SINEW_EINVAL, "%s: unknown flow format %d", path, (int)fmt);
    }
    if (rc) {
        sinew_image_free(flow);
        return rc;
    }
    if (fmt == SINEW_FLOW_PFM || fmt == SINEW_FLOW_NPY || fmt == SINEW_FLOW_NPY16)
        normalise_unknown(flow, INFINITY);
    return SINEW_OK;
}

int sinew_flow_write(sinew_ctx *ctx, const char *path, const sinew_image *flow,
                     sinew_flow_format fmt)
{
    if (!ctx || !path || !flow || !flow->data)
        return ctx ? sinew__fail(ctx, SINEW_EINVAL, "write flow: missing argument") : SINEW_EINVAL;
    if (flow->type != SINEW_F32 || flow->channels != 2 || flow->width < 1 || flow->height < 1)
        return sinew__fail(ctx, SINEW_EINVAL, "%s: a flow field is a 2-channel float image", path);
    int rc = SINEW_OK;
    if (fmt == SINEW_FLOW_AUTO)
        rc = sinew_flow_format_from_path(ctx, &fmt, path);
    if (rc)
        return rc;
    /* NaN is unknown; infinity (or, for float16, beyond its range) is refused. */
    /* float16: values from 65520 up would round to infinity */
    float lim = fmt == SINEW_FLOW_NPY16 ? 65520.0f : INFINITY;
    for (int y = 0; y < flow->height; y++) {
        const float *r = sinew_image_row_f32(flow, y);
        for (int x = 0; x < 2 * flow->width; x++)
            if (isinf(r[x]) || fabsf(r[x]) >= lim)
                return sinew__fail(
                    ctx, SINEW_EVALUE, "%s: flow value %g at (%d, %d) cannot be stored%s", path,
                    (double)r[x], x / 2, y, fmt == SINEW_FLOW_NPY16 ? " as float16" : "");
    }
    switch (fmt) {
    case SINEW_FLOW_FLO:
        return flo_write(ctx, path, flow);
    case SINEW_FLOW_KITTI:
        return kitti_write(ctx, path, flow);
    case SINEW_FLOW_PFM:
        return sinew__pfm_write(ctx, path, flow, 1);
    case SINEW_FLOW_NPY:
        return sinew_npy_write_image(ctx, path, flow, 0);
    case SINEW_FLOW_NPY16:
        return sinew_npy_write_image(ctx, path, flow, 1);
    default:
        return sinew__fail(ctx, SINEW_EINVAL, "%s: unknown flow format %d", path, (int)fmt);
    }
}
