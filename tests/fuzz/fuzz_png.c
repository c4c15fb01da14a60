/* SPDX-License-Identifier: MIT */
/* Fuzz target: PNG images through sinew_image_read and the readers by role built on it
 * (flow/io_image.c: depth codes, labels, mask bits), each also by its header only
 * (flow/io_info.c), which must agree. */
#include "tests/fuzz/fuzz.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    sinew_ctx *ctx = fuzz_ctx();
    const char *path = ctx ? fuzz_file(data, size, ".png") : NULL;
    if (path) {
        fuzz_read_both(ctx, path, SINEW_ROLE_IMAGE);
        fuzz_read_both(ctx, path, SINEW_ROLE_DEPTH);
        fuzz_read_both(ctx, path, SINEW_ROLE_LABELS);
        fuzz_read_both(ctx, path, SINEW_ROLE_MASK);
    }
    sinew_ctx_free(ctx);
    return 0;
}
