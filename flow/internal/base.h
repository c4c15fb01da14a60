/* SPDX-License-Identifier: MIT */
/* Private helpers shared by library modules: error reporting, checked size
 * arithmetic, allocation through the context. Never included by tools/ or users. */
#ifndef SINEW_INTERNAL_BASE_H
#define SINEW_INTERNAL_BASE_H

#include <stddef.h>
#include <stdio.h>
#include <stdint.h>

#include "flow/core.h"

#if defined(__GNUC__)
#define SINEW__PRINTF(a, b) __attribute__((format(printf, a, b)))
#else
#define SINEW__PRINTF(a, b)
#endif

/* Record `status` with a formatted detail message on ctx and return status.
 * Convention: messages that concern a file start with the path: "PATH: problem". */
int sinew__fail(sinew_ctx *ctx, int status, const char *fmt, ...) SINEW__PRINTF(3, 4);

/* Allocation through the context's allocator; sets ENOMEM message on failure. */
void *sinew__alloc(sinew_ctx *ctx, size_t n);
void *sinew__calloc(sinew_ctx *ctx, size_t count, size_t size); /* zeroed, overflow-checked */
/* count * size bytes, overflow-checked, NOT zeroed: for planes every pixel of which is
 * written before it is read (a zeroed plane costs a full extra pass) */
void *sinew__alloc_array(sinew_ctx *ctx, size_t count, size_t size);
/* A copy of string s from the context's allocator; NULL for NULL or out of memory. */
char *sinew__strdup(sinew_ctx *ctx, const char *s);
void sinew__free(sinew_ctx *ctx, void *p);

/* Checked arithmetic: return 0 and store the result, or return nonzero on overflow. */
static inline int sinew__mul_size(size_t a, size_t b, size_t *out)
{
    return __builtin_mul_overflow(a, b, out);
}
static inline int sinew__add_size(size_t a, size_t b, size_t *out)
{
    return __builtin_add_overflow(a, b, out);
}

/* Open an input file for reading. It must be a regular file, checked with fstat on the
 * open descriptor (a FIFO is opened without blocking, so a FIFO or device is refused
 * instead of hanging or reading forever). Errors name the path: SINEW_EIO. */
int sinew__open_regular(sinew_ctx *ctx, const char *path, FILE **fp);

/* Validate image dimensions from a header before allocating anything: dims >= 1,
 * width*height within the context's pixel limit. `what` names the file or object
 * for the message. Returns SINEW_OK, EFORMAT (non-positive) or ELIMIT. */
int sinew__check_dims(sinew_ctx *ctx, const char *what, int64_t width, int64_t height);

/* Atomic output files are written as DIR/.NAME + SINEW__TMP_TAG + 6 hex digits, then
 * renamed to DIR/NAME (sinew_outfile_open in flow/core.c). */
#define SINEW__TMP_TAG ".tmp-"
/* Longest temporary name a context tracks for sinew_ctx_remove_temporaries. */
#define SINEW__TMP_PATH_MAX 4200

/* SINEW_OK, or SINEW_EINTERRUPTED with the message "WHAT: interrupted" when the
 * context's stop flag is set (sinew_ctx_set_cancel). For long loops. */
int sinew__check_cancel(sinew_ctx *ctx, const char *what);

#endif
