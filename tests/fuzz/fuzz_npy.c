/* SPDX-License-Identifier: MIT */
/* Fuzz target: NumPy .npy arrays as flow, as images, as tables (match tables: any
 * column count, and exactly 12), and through the readers by role (depth, mask bits,
 * float maps; each also by its header only, which must agree). */
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
        fuzz_read_both(ctx, path, SINEW_ROLE_DEPTH);
        fuzz_read_both(ctx, path, SINEW_ROLE_MASK);
        fuzz_read_both(ctx, path, SINEW_ROLE_MAP);
        for (size_t expect = 0; expect <= 12; expect += 12) {
            float *table = NULL;
            size_t rows = 0, cols = 0;
            if (sinew_npy_read_table(ctx, &table, &rows, &cols, path, expect) == SINEW_OK)
                sinew_ctx_dealloc(ctx, table);
        }
    }
    sinew_ctx_free(ctx);
    return 0;
}
