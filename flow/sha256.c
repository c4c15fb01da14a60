/* SPDX-License-Identifier: MIT */
/* SHA-256 as specified in FIPS 180-4 (NIST, 2015), sections 4.1.2 (functions),
 * 4.2.2 (constants), 5.1.1 (padding), 5.3.3 (initial value) and 6.2 (computation).
 * Used for content hashes of run inputs and outputs; not for security. Streaming:
 * files are read in 64 KiB blocks, so memory does not depend on the file size.
 *
 * On x86-64 processors with the SHA extensions (checked at run time), whole blocks go
 * through the SHA-256 instructions instead (Intel, "Intel SHA Extensions", 2013: message
 * schedule with SHA256MSG1/MSG2, two rounds per SHA256RNDS2, the state held as ABEF and
 * CDGH); the digest is the same, about 5-8 times faster, which matters because a run
 * hashes every output it writes (tests/unit/test_run.c compares both with sha256sum). */
#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <stdio.h>
#include <string.h>

#include "flow/internal/base.h"
#include "flow/sha256.h"

static const uint32_t K[64] = {
    0x428a2f98, 0x71374491, 0xb5c0fbcf, 0xe9b5dba5, 0x3956c25b, 0x59f111f1, 0x923f82a4, 0xab1c5ed5,
    0xd807aa98, 0x12835b01, 0x243185be, 0x550c7dc3, 0x72be5d74, 0x80deb1fe, 0x9bdc06a7, 0xc19bf174,
    0xe49b69c1, 0xefbe4786, 0x0fc19dc6, 0x240ca1cc, 0x2de92c6f, 0x4a7484aa, 0x5cb0a9dc, 0x76f988da,
    0x983e5152, 0xa831c66d, 0xb00327c8, 0xbf597fc7, 0xc6e00bf3, 0xd5a79147, 0x06ca6351, 0x14292967,
    0x27b70a85, 0x2e1b2138, 0x4d2c6dfc, 0x53380d13, 0x650a7354, 0x766a0abb, 0x81c2c92e, 0x92722c85,
    0xa2bfe8a1, 0xa81a664b, 0xc24b8b70, 0xc76c51a3, 0xd192e819, 0xd6990624, 0xf40e3585, 0x106aa070,
    0x19a4c116, 0x1e376c08, 0x2748774c, 0x34b0bcb5, 0x391c0cb3, 0x4ed8aa4a, 0x5b9cca4f, 0x682e6ff3,
    0x748f82ee, 0x78a5636f, 0x84c87814, 0x8cc70208, 0x90befffa, 0xa4506ceb, 0xbef9a3f7, 0xc67178f2};

static inline uint32_t rotr(uint32_t x, int n)
{
    return (x >> n) | (x << (32 - n));
}

static void compress(uint32_t h[8], const unsigned char *p)
{
    uint32_t w[64];
    for (int t = 0; t < 16; t++)
        w[t] = (uint32_t)p[4 * t] << 24 | (uint32_t)p[4 * t + 1] << 16 |
               (uint32_t)p[4 * t + 2] << 8 | (uint32_t)p[4 * t + 3];
    for (int t = 16; t < 64; t++) {
        uint32_t s0 = rotr(w[t - 15], 7) ^ rotr(w[t - 15], 18) ^ (w[t - 15] >> 3);
        uint32_t s1 = rotr(w[t - 2], 17) ^ rotr(w[t - 2], 19) ^ (w[t - 2] >> 10);
        w[t] = w[t - 16] + s0 + w[t - 7] + s1;
    }
    uint32_t a = h[0], b = h[1], c = h[2], d = h[3], e = h[4], f = h[5], g = h[6], k = h[7];
    for (int t = 0; t < 64; t++) {
        uint32_t t1 =
            k + (rotr(e, 6) ^ rotr(e, 11) ^ rotr(e, 25)) + ((e & f) ^ (~e & g)) + K[t] + w[t];
        uint32_t t2 = (rotr(a, 2) ^ rotr(a, 13) ^ rotr(a, 22)) + ((a & b) ^ (a & c) ^ (b & c));
        k = g;
        g = f;
        f = e;
        e = d + t1;
        d = c;
        c = b;
        b = a;
        a = t1 + t2;
    }
    h[0] += a;
    h[1] += b;
    h[2] += c;
    h[3] += d;
    h[4] += e;
    h[5] += f;
    h[6] += g;
    h[7] += k;
}

#if defined(__x86_64__) && defined(__GNUC__)
#include <cpuid.h>
#include <immintrin.h>
#define SHA_NI 1

/* The CPU has the SHA extensions and the SSSE3/SSE4.1 the rounds use: CPUID leaf 1 ECX
 * bits 9 and 19, leaf 7 sub-leaf 0 EBX bit 29 (Intel 64 and IA-32 Architectures
 * Software Developer's Manual, vol. 2A, CPUID). Asked once per digest (sinew_sha256_init)
 * and kept in the digest's state, so the library has no global state; CPUID works the
 * same under GCC and clang, unlike __builtin_cpu_supports("sha"). */
static int have_sha_ni(void)
{
    unsigned a, b, c, d;
    if (!__get_cpuid(1, &a, &b, &c, &d) || !(c & (1u << 9)) || !(c & (1u << 19)))
        return 0;
    if (!__get_cpuid_count(7, 0, &a, &b, &c, &d))
        return 0;
    return (int)((b >> 29) & 1u);
}

__attribute__((target("sha,sse4.1,ssse3"))) static void
compress_ni(uint32_t h[8], const unsigned char *p, size_t nblocks)
{
    const __m128i bswap = _mm_set_epi64x(0x0c0d0e0f08090a0bLL, 0x0405060700010203LL);
    __m128i t = _mm_shuffle_epi32(_mm_loadu_si128((const __m128i *)(const void *)h), 0xB1);
    __m128i s1 = _mm_shuffle_epi32(_mm_loadu_si128((const __m128i *)(const void *)(h + 4)), 0x1B);
    __m128i s0 = _mm_alignr_epi8(t, s1, 8); /* ABEF */
    s1 = _mm_blend_epi16(s1, t, 0xF0);      /* CDGH */
    for (; nblocks; nblocks--, p += 64) {
        __m128i abef = s0, cdgh = s1, w[4];
        for (int i = 0; i < 16; i++) {
            __m128i m;
            if (i < 4) {
                m = _mm_shuffle_epi8(_mm_loadu_si128((const __m128i *)(const void *)(p + 16 * i)),
                                     bswap);
            } else { /* w[t] = s1(w[t-2]) + w[t-7] + s0(w[t-15]) + w[t-16], 4 words at once */
                m = _mm_sha256msg1_epu32(w[i & 3], w[(i + 1) & 3]);
                m = _mm_add_epi32(m, _mm_alignr_epi8(w[(i + 3) & 3], w[(i + 2) & 3], 4));
                m = _mm_sha256msg2_epu32(m, w[(i + 3) & 3]);
            }
            w[i & 3] = m;
            __m128i k =
                _mm_add_epi32(m, _mm_loadu_si128((const __m128i *)(const void *)(K + 4 * i)));
            s1 = _mm_sha256rnds2_epu32(s1, s0, k);
            s0 = _mm_sha256rnds2_epu32(s0, s1, _mm_shuffle_epi32(k, 0x0E));
        }
        s0 = _mm_add_epi32(s0, abef);
        s1 = _mm_add_epi32(s1, cdgh);
    }
    t = _mm_shuffle_epi32(s0, 0x1B);  /* FEBA */
    s1 = _mm_shuffle_epi32(s1, 0xB1); /* DCHG */
    _mm_storeu_si128((__m128i *)(void *)h, _mm_blend_epi16(t, s1, 0xF0));
    _mm_storeu_si128((__m128i *)(void *)(h + 4), _mm_alignr_epi8(s1, t, 8));
}
#endif

/* nblocks whole 64-byte blocks at p. */
static void compress_blocks(sinew_sha256 *s, const unsigned char *p, size_t nblocks)
{
#ifdef SHA_NI
    if (s->ni) {
        compress_ni(s->h, p, nblocks);
        return;
    }
#endif
    for (; nblocks; nblocks--, p += 64)
        compress(s->h, p);
}

void sinew_sha256_init(sinew_sha256 *s)
{
    static const uint32_t h0[8] = {0x6a09e667, 0xbb67ae85, 0x3c6ef372, 0xa54ff53a,
                                   0x510e527f, 0x9b05688c, 0x1f83d9ab, 0x5be0cd19};
    memcpy(s->h, h0, sizeof h0);
    s->bytes = 0;
    s->fill = 0;
#ifdef SHA_NI
    s->ni = have_sha_ni();
#else
    s->ni = 0;
#endif
}

void sinew_sha256_update(sinew_sha256 *s, const void *data, size_t n)
{
    const unsigned char *p = data;
    s->bytes += n;
    if (s->fill) {
        size_t take = 64 - s->fill < n ? 64 - s->fill : n;
        memcpy(s->block + s->fill, p, take);
        s->fill += take;
        p += take;
        n -= take;
        if (s->fill < 64)
            return;
        compress_blocks(s, s->block, 1);
        s->fill = 0;
    }
    if (n >= 64)
        compress_blocks(s, p, n / 64);
    p += n / 64 * 64;
    n %= 64;
    if (n) {
        memcpy(s->block, p, n);
        s->fill = n;
    }
}

void sinew_sha256_final(sinew_sha256 *s, unsigned char digest[32])
{
    uint64_t bits = s->bytes * 8;
    s->block[s->fill++] = 0x80;
    if (s->fill > 56) {
        memset(s->block + s->fill, 0, 64 - s->fill);
        compress(s->h, s->block);
        s->fill = 0;
    }
    memset(s->block + s->fill, 0, 56 - s->fill);
    for (int i = 0; i < 8; i++)
        s->block[56 + i] = (unsigned char)(bits >> (56 - 8 * i));
    compress(s->h, s->block);
    for (int i = 0; i < 8; i++) {
        digest[4 * i] = (unsigned char)(s->h[i] >> 24);
        digest[4 * i + 1] = (unsigned char)(s->h[i] >> 16);
        digest[4 * i + 2] = (unsigned char)(s->h[i] >> 8);
        digest[4 * i + 3] = (unsigned char)s->h[i];
    }
    s->fill = 0;
}

void sinew_sha256_hex(const unsigned char digest[32], char hex[65])
{
    static const char d[] = "0123456789abcdef";
    for (int i = 0; i < 32; i++) {
        hex[2 * i] = d[digest[i] >> 4];
        hex[2 * i + 1] = d[digest[i] & 15];
    }
    hex[64] = '\0';
}

int sinew_sha256_file(sinew_ctx *ctx, unsigned char digest[32], uint64_t *bytes, const char *path)
{
    if (!ctx || !path || !digest)
        return SINEW_EINVAL;
    FILE *f;
    int rc = sinew__open_regular(ctx, path, &f);
    if (rc)
        return rc;
    enum { CHUNK = 1 << 16 };
    unsigned char *buf = sinew__alloc(ctx, CHUNK);
    if (!buf) {
        fclose(f);
        return SINEW_ENOMEM;
    }
    sinew_sha256 s;
    sinew_sha256_init(&s);
    size_t got;
    int stop = 0;
    while (!(stop = sinew_ctx_cancelled(ctx)) && (got = fread(buf, 1, CHUNK, f)) > 0)
        sinew_sha256_update(&s, buf, got);
    int bad = ferror(f);
    int e = errno;
    fclose(f);
    sinew__free(ctx, buf);
    if (stop)
        return sinew__check_cancel(ctx, path);
    if (bad)
        return sinew__fail(ctx, SINEW_EIO, "%s: cannot read: %s", path, strerror(e ? e : EIO));
    sinew_sha256_final(&s, digest);
    if (bytes)
        *bytes = s.bytes;
    return SINEW_OK;
}
