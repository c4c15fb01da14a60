/* SPDX-License-Identifier: MIT */
/* Fuzz target: intrinsics files (JSON or 3x3 matrix) through sinew_camera_load. */
#include "tests/fuzz/fuzz.h"
#include "flow/camera.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    sinew_ctx *ctx = fuzz_ctx();
    const char *path = ctx ? fuzz_file(data, size, ".txt") : NULL;
    if (path) {
        sinew_camera cam;
        (void)sinew_camera_load(ctx, &cam, path);
    }
    sinew_ctx_free(ctx);
    return 0;
}
