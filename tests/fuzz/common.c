/* SPDX-License-Identifier: MIT */
/* Temporary-file plumbing for the fuzz targets (test code: a per-process static path
 * is fine here, it never reaches the library). */
#define _POSIX_C_SOURCE 200809L
#include "tests/fuzz/fuzz.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

static char fuzz_dir[256];

const char *fuzz_file(const uint8_t *data, size_t size, const char *suffix)
{
    static char path[512];
    if (!fuzz_dir[0]) {
        const char *base = getenv("TMPDIR");
        snprintf(fuzz_dir, sizeof fuzz_dir, "%s/sinew-fuzz.XXXXXX", base && *base ? base : "/tmp");
        if (!mkdtemp(fuzz_dir)) {
            fuzz_dir[0] = 0;
            return NULL;
        }
    }
    snprintf(path, sizeof path, "%s/input%s", fuzz_dir, suffix);
    FILE *f = fopen(path, "wb");
    if (!f)
        return NULL;
    if (size && fwrite(data, 1, size, f) != size) {
        fclose(f);
        return NULL;
    }
    fclose(f);
    return path;
}

/* Called by replay.c at exit and harmless under libFuzzer (never called there). */
void fuzz_cleanup(void);
void fuzz_cleanup(void)
{
    char path[600];
    if (!fuzz_dir[0])
        return;
    static const char *const sfx[] = {".png", ".jpg",  ".pgm", ".flo", ".pfm",
                                      ".npy", ".json", ".txt", ".bin", ""};
    for (size_t i = 0; i < sizeof sfx / sizeof sfx[0]; i++) {
        snprintf(path, sizeof path, "%s/input%s", fuzz_dir, sfx[i]);
        unlink(path);
    }
    rmdir(fuzz_dir);
}

sinew_ctx *fuzz_ctx(void)
{
    sinew_ctx *ctx = sinew_ctx_new();
    if (ctx)
        sinew_ctx_set_max_pixels(ctx, (int64_t)1 << 22);
    return ctx;
}

void fuzz_read_both(sinew_ctx *ctx, const char *path, int role)
{
    sinew_image img;
    int fr = role == SINEW_ROLE_DEPTH    ? sinew_depth_read(ctx, &img, path)
             : role == SINEW_ROLE_LABELS ? sinew_labels_read(ctx, &img, path)
             : role == SINEW_ROLE_MASK   ? sinew_mask_read(ctx, &img, path)
             : role == SINEW_ROLE_MAP    ? sinew_map_read(ctx, &img, path)
                                         : sinew_image_read(ctx, &img, path);
    sinew_image_info in;
    int hr = sinew_image_info_read(ctx, &in, path, role);
    if (fr != SINEW_OK)
        return;
    /* a float mask's values become 8-bit bits: the header reports the stored type */
    int type_ok = in.type == img.type || (role == SINEW_ROLE_MASK && in.type == SINEW_F32);
    if (hr != SINEW_OK || in.width != img.width || in.height != img.height ||
        in.channels != img.channels || !type_ok)
        abort();
    sinew_image_free(&img);
}
