/* SPDX-License-Identifier: MIT */
/* The check stage's folder on disk (docs/formats.md "Check output"): the reader the
 * match/lift and score commands use, and the writer of `sinew check` and
 * `sinew flow --check`. Declarations in flow/check.h. */
#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>

#include "flow/check.h"
#include "flow/internal/base.h"
#include "flow/io.h"

int sinew_check_folder_read(sinew_ctx *ctx, sinew_image *mask, sinew_image *confidence,
                            char *mask_path, char *confidence_path, size_t path_size,
                            const char *dir)
{
    if (!ctx || !dir || !mask || !confidence || !mask_path || !confidence_path)
        return SINEW_EINVAL;
    memset(mask, 0, sizeof *mask);
    memset(confidence, 0, sizeof *confidence);
    int n1 = snprintf(mask_path, path_size, "%s/mask.png", dir);
    int n2 = snprintf(confidence_path, path_size, "%s/confidence.npy", dir);
    if (n1 < 0 || n2 < 0 || (size_t)n1 >= path_size || (size_t)n2 >= path_size)
        return sinew__fail(ctx, SINEW_EINVAL, "%s: path too long", dir);
    int rc = sinew_image_read(ctx, mask, mask_path);
    if (rc)
        return rc;
    if (mask->channels != 1 || mask->type != SINEW_U8) {
        sinew_image_free(mask);
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: a check mask is an 8-bit gray PNG", mask_path);
    }
    rc = sinew_npy_read_image(ctx, confidence, confidence_path);
    if (rc) {
        sinew_image_free(mask);
        return rc;
    }
    const char *bad = NULL;
    int code = SINEW_ESIZE; /* for the shape problems; values: SINEW_EVALUE */
    if (confidence->channels != 1)
        bad = "must be an H x W array";
    else if (confidence->width != mask->width || confidence->height != mask->height)
        bad = "size differs from mask.png";
    for (int y = 0; !bad && y < confidence->height; y++) {
        const float *r = sinew_image_row_f32(confidence, y);
        for (int x = 0; x < confidence->width; x++)
            if (!(r[x] >= 0 && r[x] <= 1)) {
                bad = "values must lie in [0, 1] (NaN or out of range found)";
                code = SINEW_EVALUE;
                break;
            }
    }
    if (bad) {
        sinew_image_free(mask);
        sinew_image_free(confidence);
        return sinew__fail(ctx, code, "%s: %s", confidence_path, bad);
    }
    return SINEW_OK;
}

/* Create dir (one level: a missing parent is an error) unless it is a folder already. */
static int make_dir(sinew_ctx *ctx, const char *dir)
{
    struct stat st;
    if (stat(dir, &st) == 0) {
        if (S_ISDIR(st.st_mode))
            return SINEW_OK;
        return sinew__fail(ctx, SINEW_EIO, "%s: exists and is not a folder", dir);
    }
    if (mkdir(dir, 0777) != 0 && errno != EEXIST)
        return sinew__fail(ctx, SINEW_EIO, "%s: cannot create folder: %s", dir, strerror(errno));
    return SINEW_OK;
}

int sinew_check_folder_write(sinew_ctx *ctx, const char *dir, const sinew_image *fb_error,
                             const sinew_image *mask, const sinew_image *confidence,
                             const char *json_text)
{
    if (!ctx || !dir || !fb_error || !mask || !confidence || !json_text ||
        confidence->type != SINEW_F32 || confidence->channels != 1)
        return SINEW_EINVAL;
    if (fb_error->width != mask->width || fb_error->height != mask->height ||
        confidence->width != mask->width || confidence->height != mask->height)
        return sinew__fail(ctx, SINEW_ESIZE, "%s: the check's images differ in size", dir);
    int st = make_dir(ctx, dir);
    if (st)
        return st;
    size_t n = strlen(dir) + 32;
    char *path = sinew_ctx_alloc(ctx, n);
    sinew_image c16 = {0};
    if (!path)
        return SINEW_ENOMEM;
    if ((st = sinew_image_alloc(ctx, &c16, confidence->width, confidence->height, 1, SINEW_U16)))
        goto done;
    for (int y = 0; y < c16.height; y++)
        for (int x = 0; x < c16.width; x++) {
            double c = sinew_image_row_f32(confidence, y)[x];
            sinew_image_row_u16(&c16, y)[x] = (uint16_t)lround(65535.0 * c);
        }
    /* check.json last: its presence marks a complete set */
    snprintf(path, n, "%s/fb_error.npy", dir);
    if ((st = sinew_npy_write_image(ctx, path, fb_error, 0)))
        goto done;
    snprintf(path, n, "%s/mask.png", dir);
    if ((st = sinew_image_write_png(ctx, path, mask)))
        goto done;
    snprintf(path, n, "%s/confidence.npy", dir);
    if ((st = sinew_npy_write_image(ctx, path, confidence, 0)))
        goto done;
    snprintf(path, n, "%s/confidence.png", dir);
    if ((st = sinew_image_write_png(ctx, path, &c16)))
        goto done;
    snprintf(path, n, "%s/check.json", dir);
    st = sinew_write_json_text(ctx, path, json_text); /* valid UTF-8, final newline */
done:
    sinew_ctx_dealloc(ctx, path);
    sinew_image_free(&c16);
    return st;
}
