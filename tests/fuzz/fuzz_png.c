/* SPDX-License-Identifier: MIT */
/* Fuzz target: PNG images through sinew_image_read and the readers by role built on it
 * (flow/io_image.c: depth codes, labels, mask bits). */
#include "tests/fuzz/fuzz.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    sinew_ctx *ctx = fuzz_ctx();
    const char *path = ctx ? fuzz_file(data, size, ".png") : NULL;
    if (path) {
        sinew_image img;
        if (sinew_image_read(ctx, &img, path) == SINEW_OK)
            sinew_image_free(&img);
        if (sinew_depth_read(ctx, &img, path) == SINEW_OK)
            sinew_image_free(&img);
        if (sinew_labels_read(ctx, &img, path) == SINEW_OK)
            sinew_image_free(&img);
        if (sinew_mask_read(ctx, &img, path) == SINEW_OK)
            sinew_image_free(&img);
    }
    sinew_ctx_free(ctx);
    return 0;
}
