/* SPDX-License-Identifier: MIT */
/* Fuzz target: the sequence.json reader (parse from memory, then validate). */
#include "tests/fuzz/fuzz.h"
#include "flow/sequence.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    sinew_ctx *ctx = fuzz_ctx();
    if (!ctx)
        return 0;
    sinew_sequence *seq = NULL;
    if (sinew_sequence_parse(ctx, &seq, (const char *)data, size, "fuzz.json") == SINEW_OK) {
        (void)sinew_sequence_validate(seq, "fuzz.json");
        sinew_sequence_free(seq);
    }
    sinew_ctx_free(ctx);
    return 0;
}
