/* SPDX-License-Identifier: MIT */
/* Fuzz target: PFM files, as flow and as scalar maps (depth, maps: also by the header only, which
 * must agree). */
#include "tests/fuzz/fuzz.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    sinew_ctx *ctx = fuzz_ctx();
    const char *path = ctx ? fuzz_file(data, size, ".pfm") : NULL;
    if (path) {
        sinew_image img;
        if (sinew_flow_read(ctx, &img, path, SINEW_FLOW_PFM) == SINEW_OK)
            sinew_image_free(&img);
        if (sinew_pfm_read_image(ctx, &img, path) == SINEW_OK)
            sinew_image_free(&img);
        fuzz_read_both(ctx, path, SINEW_ROLE_DEPTH);
        fuzz_read_both(ctx, path, SINEW_ROLE_MAP);
    }
    sinew_ctx_free(ctx);
    return 0;
}
