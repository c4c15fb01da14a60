/* SPDX-License-Identifier: MIT */
/* Fuzz target: binary PGM/PPM images through sinew_image_read. */
#include "tests/fuzz/fuzz.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    sinew_ctx *ctx = fuzz_ctx();
    const char *path = ctx ? fuzz_file(data, size, ".pgm") : NULL;
    if (path) {
        sinew_image img;
        if (sinew_image_read(ctx, &img, path) == SINEW_OK)
            sinew_image_free(&img);
    }
    sinew_ctx_free(ctx);
    return 0;
}
