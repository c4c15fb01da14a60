/* SPDX-License-Identifier: MIT */
/* SHA-256 content hashes (FIPS 180-4): of memory and of whole files, read in blocks.
 * Runs use them for pair keys and output digests (flow/run.h). */
#ifndef SINEW_SHA256_H
#define SINEW_SHA256_H

#include <stddef.h>
#include <stdint.h>

#include "flow/core.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ---- SHA-256 (FIPS 180-4) ------------------------------------------------------ */
typedef struct sinew_sha256 {
    uint32_t h[8];
    uint64_t bytes;          /* message length so far */
    unsigned char block[64]; /* pending partial block */
    size_t fill;             /* bytes pending in block */
    int ni;                  /* 1: the CPU's SHA instructions do the rounds (set by init;
                                0 forces the portable rounds, same digests) */
} sinew_sha256;

/* Start a digest. Never fails. */
void sinew_sha256_init(sinew_sha256 *s);
/* Add n bytes (data may be NULL when n == 0). */
void sinew_sha256_update(sinew_sha256 *s, const void *data, size_t n);
/* Finish: write the 32-byte digest. The state must be re-initialised before reuse. */
void sinew_sha256_final(sinew_sha256 *s, unsigned char digest[32]);
/* Lower-case hex of a digest into hex[65] (NUL-terminated). */
void sinew_sha256_hex(const unsigned char digest[32], char hex[65]);
/* Digest of a whole file, read in blocks (memory does not grow with file size).
 * bytes (may be NULL) receives the file size. EIO naming the path if it cannot be
 * opened or read; EINTERRUPTED when the context's stop flag is set (checked per 64 KiB
 * block, sinew_ctx_set_cancel). */
int sinew_sha256_file(sinew_ctx *ctx, unsigned char digest[32], uint64_t *bytes, const char *path);

#ifdef __cplusplus
}
#endif

#endif
