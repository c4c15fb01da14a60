/* SPDX-License-Identifier: MIT */
/* Reading the inputs of `sinew score` (declarations and rules in tools/score_read.h). */
#define _POSIX_C_SOURCE 200809L
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "flow/sinew.h"
#include "tools/cli.h"
#include "tools/score_read.h"

#define CMD "score"

/* Read an image as a yes/no mask (SINEW_U8, 1 channel): 1 where any colour channel
 * (alpha ignored) is nonzero, the other way round with invert. Dataset masks come as
 * gray, RGB or palette PNGs of either depth. Bit masks of our own use sinew_mask_read. */
int score_read_binary(sinew_ctx *ctx, const char *path, int invert, sinew_image *out)
{
    sinew_image img;
    int st = sinew_image_read(ctx, &img, path);
    if (st)
        return cli_status(CMD, ctx, st);
    int colour = img.channels == 2 ? 1 : img.channels == 4 ? 3 : img.channels;
    st = sinew_image_alloc(ctx, out, img.width, img.height, 1, SINEW_U8);
    if (st) {
        sinew_image_free(&img);
        return cli_status(CMD, ctx, st);
    }
    for (int y = 0; y < img.height; y++) {
        uint8_t *o = sinew_image_row_u8(out, y);
        for (int x = 0; x < img.width; x++) {
            unsigned any = 0;
            if (img.type == SINEW_U8) {
                const uint8_t *p = sinew_image_row_u8(&img, y) + (size_t)x * img.channels;
                for (int c = 0; c < colour; c++)
                    any |= p[c];
            } else {
                const uint16_t *p = sinew_image_row_u16(&img, y) + (size_t)x * img.channels;
                for (int c = 0; c < colour; c++)
                    any |= p[c];
            }
            o[x] = (uint8_t)((any != 0) != (invert != 0));
        }
    }
    sinew_image_free(&img);
    return CLI_OK;
}

int score_read_flow(sinew_ctx *ctx, const char *path, sinew_image *out)
{
    int st = sinew_flow_read(ctx, out, path, SINEW_FLOW_AUTO);
    return st ? cli_status(CMD, ctx, st) : CLI_OK;
}

int score_same_size(const sinew_image *a, const char *pa, const sinew_image *b, const char *pb)
{
    if (a->width == b->width && a->height == b->height)
        return CLI_OK;
    return cli_error(CMD, "%s: size %dx%d does not match %s (%dx%d)", pa, a->width, a->height, pb,
                     b->width, b->height);
}

/* mask &= other (both U8 1 channel, same size). */
static void mask_and(sinew_image *mask, const sinew_image *other)
{
    for (int y = 0; y < mask->height; y++) {
        uint8_t *m = sinew_image_row_u8(mask, y);
        const uint8_t *o = sinew_image_row_u8(other, y);
        for (int x = 0; x < mask->width; x++)
            m[x] = (uint8_t)(m[x] && o[x]);
    }
}

/* Add a validity mask read from `path` (invert: nonzero = excluded) into *eval. */
int score_add_eval_mask(sinew_ctx *ctx, const char *path, int invert, const sinew_image *gt,
                        const char *gt_path, sinew_image *eval)
{
    sinew_image m;
    int rc = score_read_binary(ctx, path, invert, &m);
    if (rc)
        return rc;
    if ((rc = score_same_size(&m, path, gt, gt_path))) {
        sinew_image_free(&m);
        return rc;
    }
    if (!eval->data) {
        *eval = m;
        return CLI_OK;
    }
    mask_and(eval, &m);
    sinew_image_free(&m);
    return CLI_OK;
}

/* KITTI occluded split: occ = 1 where flow_noc has no ground truth. */
int score_kitti_occ_from_noc(sinew_ctx *ctx, const char *noc_path, const sinew_image *gt,
                             const char *gt_path, sinew_image *occ)
{
    sinew_image noc;
    int rc = score_read_flow(ctx, noc_path, &noc);
    if (rc)
        return rc;
    if ((rc = score_same_size(&noc, noc_path, gt, gt_path))) {
        sinew_image_free(&noc);
        return rc;
    }
    int st = sinew_image_alloc(ctx, occ, gt->width, gt->height, 1, SINEW_U8);
    if (st) {
        sinew_image_free(&noc);
        return cli_status(CMD, ctx, st);
    }
    for (int y = 0; y < gt->height; y++) {
        const float *n = sinew_image_row_f32(&noc, y);
        uint8_t *o = sinew_image_row_u8(occ, y);
        for (int x = 0; x < gt->width; x++)
            o[x] = (uint8_t) !(isfinite(n[2 * x]) && isfinite(n[2 * x + 1]));
    }
    sinew_image_free(&noc);
    return CLI_OK;
}
