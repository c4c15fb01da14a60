/* SPDX-License-Identifier: MIT */
/* Fuzz target: JPEG images through sinew_image_read, and by their header only (which must
 * agree). */
#include "tests/fuzz/fuzz.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    sinew_ctx *ctx = fuzz_ctx();
    const char *path = ctx ? fuzz_file(data, size, ".jpg") : NULL;
    if (path) {
        fuzz_read_both(ctx, path, SINEW_ROLE_IMAGE);
    }
    sinew_ctx_free(ctx);
    return 0;
}
