/* SPDX-License-Identifier: MIT */
/* Shared pieces of the reader fuzz targets. Each target defines
 * LLVMFuzzerTestOneInput; built with clang -fsanitize=fuzzer it is a libFuzzer
 * binary (`make fuzz`), built with replay.c it replays a corpus (`make test`). The
 * readers take paths, so the input is written to a per-process temporary file. */
#ifndef SINEW_FUZZ_H
#define SINEW_FUZZ_H

#include <stddef.h>
#include <stdint.h>

#include "flow/sinew.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

/* Write data to a temporary file whose name ends with `suffix`; returns its path
 * (static storage, reused on every call of the process). NULL on failure. */
const char *fuzz_file(const uint8_t *data, size_t size, const char *suffix);

/* A context with a small pixel limit, so a fuzzed header cannot make the target
 * allocate gigabytes (the limit itself is what is being tested). */
sinew_ctx *fuzz_ctx(void);

/* Read PATH in full with the reader of `role` and by its header only
 * (sinew_image_info_read); abort when the full reader accepts what the header reader
 * refuses, or when they disagree on size, channels or type. */
void fuzz_read_both(sinew_ctx *ctx, const char *path, int role);

#endif
