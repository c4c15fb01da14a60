/* SPDX-License-Identifier: MIT */
/* Inputs of `sinew score`: flow files, masks reduced to 0/1 or kept as bits, dataset
 * validity masks and the KITTI occluded split (tools/score_read.c). Each function prints
 * one error line naming the file and returns a CLI status. */
#ifndef SINEW_SCORE_READ_H
#define SINEW_SCORE_READ_H

#include "flow/sinew.h"

/* Read a dataset's yes/no mask into SINEW_U8 1 channel: 1 where any colour channel
 * (alpha ignored) is nonzero (0 there with invert). Gray, RGB, palette, 8 or 16 bits.
 * Our own bit masks are read with sinew_mask_read (flow/io.h). */
int score_read_binary(sinew_ctx *ctx, const char *path, int invert, sinew_image *out);
int score_read_flow(sinew_ctx *ctx, const char *path, sinew_image *out);
int score_same_size(const sinew_image *a, const char *pa, const sinew_image *b, const char *pb);
/* Add a validity mask read from `path` (invert: nonzero = excluded) into *eval. */
int score_add_eval_mask(sinew_ctx *ctx, const char *path, int invert, const sinew_image *gt,
                        const char *gt_path, sinew_image *eval);
/* KITTI occluded split: occ = 1 where flow_noc has no ground truth. */
int score_kitti_occ_from_noc(sinew_ctx *ctx, const char *noc_path, const sinew_image *gt,
                             const char *gt_path, sinew_image *occ);

#endif
