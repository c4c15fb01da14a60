/* SPDX-License-Identifier: MIT */
/* JPEG reading with libjpeg-turbo's TurboJPEG API (per-handle error strings, no
 * setjmp in our code). Gray JPEGs give 1-channel, everything else 3-channel RGB, both
 * 8-bit. CMYK/YCCK files are refused as unsupported. Any decoder warning (such as a
 * truncated entropy-coded segment, which libjpeg would otherwise pad with gray) is an
 * error: a frame is either decoded completely or not at all.
 *
 * TurboJPEG allocates its own working memory with malloc; the compressed file and
 * the output image are allocated through the context. */
#define _POSIX_C_SOURCE 200809L
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <turbojpeg.h>

#include "flow/internal/io.h"

/* Largest JPEG file accepted: generous against the pixel limit (a JPEG is never
 * larger than ~8 bytes per pixel even at quality 100 with restart markers). */
static size_t max_jpeg_bytes(sinew_ctx *ctx)
{
    int64_t px = sinew_ctx_max_pixels(ctx);
    if (px > (int64_t)(SIZE_MAX / 16) - (1 << 20))
        return SIZE_MAX;
    return (size_t)px * 16 + ((size_t)1 << 20);
}

static int decode(sinew_ctx *ctx, const char *path, tjhandle tj, unsigned char *buf, size_t len,
                  sinew_image *out)
{
    int w = 0, h = 0, subsamp = -1, cs = -1;
    if (tjDecompressHeader3(tj, buf, (unsigned long)len, &w, &h, &subsamp, &cs) != 0)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: bad JPEG header: %s", path, tjGetErrorStr2(tj));
    if (w < 1 || h < 1 || cs < 0)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: truncated or bad JPEG header", path);
    int rc = sinew__check_dims(ctx, path, w, h);
    if (rc)
        return rc;
    if (cs == TJCS_CMYK || cs == TJCS_YCCK)
        return sinew__fail(ctx, SINEW_EUNSUPPORTED, "%s: CMYK JPEG is not supported", path);
    int gray = cs == TJCS_GRAY;
    rc = sinew_image_alloc(ctx, out, w, h, gray ? 1 : 3, SINEW_U8);
    if (rc)
        return rc;
    if (tjDecompress2(tj, buf, (unsigned long)len, out->data, w, (int)out->stride, h,
                      gray ? TJPF_GRAY : TJPF_RGB, 0) != 0) {
        const char *m = tjGetErrorStr2(tj);
        int truncated = m && strstr(m, "Premature end");
        sinew_image_free(out);
        if (truncated)
            return sinew__fail(ctx, SINEW_EFORMAT, "%s: truncated JPEG data (file ends early)",
                               path);
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: bad JPEG data: %s", path, m);
    }
    return SINEW_OK;
}

int sinew__jpeg_read_fp(sinew_ctx *ctx, const char *path, FILE *fp, sinew_image *out)
{
    memset(out, 0, sizeof *out);
    struct stat st;
    if (fstat(fileno(fp), &st) != 0)
        return sinew__fail(ctx, SINEW_EIO, "%s: cannot read", path);
    if (st.st_size < 0 || (uint64_t)st.st_size > (uint64_t)max_jpeg_bytes(ctx) ||
        (uint64_t)st.st_size > (uint64_t)(unsigned long)-1)
        return sinew__fail(ctx, SINEW_ELIMIT, "%s: JPEG file of %lld bytes is too large", path,
                           (long long)st.st_size);
    size_t len = (size_t)st.st_size;
    unsigned char *buf = sinew__alloc(ctx, len);
    if (!buf)
        return SINEW_ENOMEM;
    int rc = sinew__io_read(ctx, path, fp, buf, len, "JPEG data");
    if (rc) {
        sinew__free(ctx, buf);
        return rc;
    }
    tjhandle tj = tjInitDecompress();
    if (!tj) {
        sinew__free(ctx, buf);
        return sinew__fail(ctx, SINEW_ENOMEM, "%s: cannot start the JPEG decoder", path);
    }
    rc = decode(ctx, path, tj, buf, len, out);
    tjDestroy(tj);
    sinew__free(ctx, buf);
    return rc;
}
