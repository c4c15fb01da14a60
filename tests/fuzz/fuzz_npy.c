/* SPDX-License-Identifier: MIT */
/* Fuzz target: NumPy .npy arrays, as flow and as images. */
#include "tests/fuzz/fuzz.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    sinew_ctx *ctx = fuzz_ctx();
    const char *path = ctx ? fuzz_file(data, size, ".npy") : NULL;
    if (path) {
        sinew_image img;
        if (sinew_flow_read(ctx, &img, path, SINEW_FLOW_NPY) == SINEW_OK)
            sinew_image_free(&img);
        if (sinew_npy_read_image(ctx, &img, path) == SINEW_OK)
            sinew_image_free(&img);
    }
    sinew_ctx_free(ctx);
    return 0;
}
