/* SPDX-License-Identifier: MIT */
/* What the run report reads: the run manifest (parsed with cJSON through flow/json.c),
 * each pair's status, stats and metrics, the colour inputs, and the pair files
 * themselves (metrics the stats lack are derived from mask.png, confidence.npy and
 * fb_error.npy). Problems with a pair's files become warning lines, never failures. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include <cJSON.h>

#include "flow/internal/base.h"
#include "flow/internal/json.h"
#include "flow/internal/report.h"
#include "flow/io.h"
#include "flow/run.h"

#define MANIFEST_MAX_BYTES ((size_t)256 << 20)

const sinew__report_metric sinew__report_metrics[SINEW__M_COUNT] = {
    {"kept_fraction", "Kept-match fraction", "", 1},
    {"mean_confidence", "Mean confidence", "", 1},
    {"fb_error_mean", "Forward-backward error, mean", "px", 0},
    {"epe", "Endpoint error vs ground truth, mean", "px", 0},
    {"occlusion_f1", "Occlusion F1 vs ground truth", "", 1},
};

static int safe_name(const char *s)
{
    if (!s || !*s || s[0] == '.' || strlen(s) > 200)
        return 0;
    for (const char *p = s; *p; p++)
        if (*p == '/' || *p == '\\')
            return 0;
    return 1;
}

void sinew__report_warn(sinew__report *r, const char *pair, const char *what, const char *detail)
{
    r->nwarn++;
    sinew__sb_puts(&r->warn, "<li>");
    if (pair) {
        sinew__sb_puts(&r->warn, "<span class=\"tag\">");
        sinew__sb_esc(&r->warn, pair);
        sinew__sb_puts(&r->warn, "</span> ");
    }
    sinew__sb_esc(&r->warn, what);
    if (detail && *detail) {
        sinew__sb_puts(&r->warn, ": <span class=\"muted\">");
        sinew__sb_esc(&r->warn, detail);
        sinew__sb_puts(&r->warn, "</span>");
    }
    sinew__sb_puts(&r->warn, "</li>\n");
}

int sinew__report_load(sinew__report *r)
{
    sinew_ctx *ctx = r->ctx;
    char path[4096];
    if ((size_t)snprintf(path, sizeof path, "%s/" SINEW_RUN_MANIFEST_FILE, r->rundir) >=
        sizeof path)
        return sinew__fail(ctx, SINEW_EINVAL, "%s: path too long", r->rundir);
    unsigned char *buf = NULL;
    size_t len = 0;
    int st = sinew_read_file(ctx, &buf, &len, path, MANIFEST_MAX_BYTES);
    if (st)
        return st;
    if ((st = sinew__json_parse(ctx, path, (const char *)buf, len, &r->root))) {
        sinew_ctx_dealloc(ctx, buf);
        return st;
    }
    r->manifest_text = (const char *)buf;
    r->manifest_len = len;
    const cJSON *pairs = cJSON_GetObjectItemCaseSensitive(r->root, "pairs");
    if (!cJSON_IsObject(r->root) || !cJSON_IsArray(pairs))
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: no \"pairs\" array", path);
    size_t n = (size_t)cJSON_GetArraySize(pairs);
    if (n) {
        r->pairs = sinew__calloc(ctx, n, sizeof *r->pairs);
        if (!r->pairs)
            return SINEW_ENOMEM;
    }
    const cJSON *p;
    size_t i = 0;
    cJSON_ArrayForEach(p, pairs)
    {
        sinew__report_pair *q = &r->pairs[i++];
        q->name = sinew__json_str(p, "pair");
        q->safe = safe_name(q->name);
        q->fi = q->fj = -1;
        const cJSON *fr = cJSON_GetObjectItemCaseSensitive(p, "frames");
        if (cJSON_GetArraySize(fr) == 2) {
            const cJSON *a = cJSON_GetArrayItem(fr, 0), *b = cJSON_GetArrayItem(fr, 1);
            if (cJSON_IsNumber(a) && cJSON_IsNumber(b) && a->valuedouble >= 0 &&
                b->valuedouble >= 0 && a->valuedouble < 1e7 && b->valuedouble < 1e7)
                q->fi = (int)a->valuedouble, q->fj = (int)b->valuedouble;
        }
        q->status = sinew__json_str(p, "status");
        q->error = sinew__json_str(p, "error");
        q->stats = cJSON_GetObjectItemCaseSensitive(p, "stats");
        for (int k = 0; k < SINEW__M_COUNT; k++)
            q->m[k] = cJSON_IsObject(q->stats)
                          ? sinew__json_num(q->stats, sinew__report_metrics[k].key)
                          : NAN;
    }
    r->npairs = n;
    /* Colour inputs in order: entry k is frame k. */
    const cJSON *inputs = cJSON_GetObjectItemCaseSensitive(r->root, "inputs");
    size_t nin = cJSON_IsArray(inputs) ? (size_t)cJSON_GetArraySize(inputs) : 0;
    if (nin) {
        r->colour = sinew__calloc(ctx, nin, sizeof *r->colour);
        if (!r->colour)
            return SINEW_ENOMEM;
        const cJSON *e;
        cJSON_ArrayForEach(e, inputs)
        {
            const char *role = sinew__json_str(e, "role"), *path_ = sinew__json_str(e, "path");
            if (role && !strcmp(role, "color"))
                r->colour[r->ncolour++] = path_;
        }
    }
    return SINEW_OK;
}

int sinew__report_pair_path(const sinew__report *r, const sinew__report_pair *q, const char *file,
                            char *buf, size_t n)
{
    return q->safe && (size_t)snprintf(buf, n, "%s/" SINEW_RUN_PAIRS_DIR "/%s/%s", r->rundir,
                                       q->name, file) < n;
}

int sinew__report_exists(const char *path)
{
    FILE *f = fopen(path, "rb");
    if (f)
        fclose(f);
    return f != NULL;
}

int sinew__report_find_flow(const sinew__report *r, const sinew__report_pair *q, char *buf,
                            size_t n)
{
    char stem[4096];
    return sinew__report_pair_path(r, q, SINEW_RUN_FORWARD, stem, sizeof stem) &&
           sinew_flow_find(stem, buf, n) == 1;
}

int sinew__report_read_checked(sinew_ctx *ctx, sinew_image *img, const char *path, int npy,
                               int channels, sinew_type type)
{
    int st = npy ? sinew_npy_read_image(ctx, img, path) : sinew_image_read(ctx, img, path);
    if (st)
        return st;
    if (img->channels != channels || img->type != type) {
        sinew_image_free(img);
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: expected a %d-channel %s image", path, channels,
                           type == SINEW_U8 ? "8-bit" : "float");
    }
    return SINEW_OK;
}

/* Fill metrics the stats did not give from the pair's files (kept fraction from
 * mask.png, mean confidence from confidence.npy, mean fb error from fb_error.npy). */
int sinew__report_derive_metrics(sinew__report *r, sinew__report_pair *q)
{
    sinew_ctx *ctx = r->ctx;
    char path[4096];
    sinew_image img;
    if (isnan(q->m[SINEW__M_KEPT]) &&
        sinew__report_pair_path(r, q, SINEW_RUN_MASK_FILE, path, sizeof path) &&
        sinew__report_exists(path)) {
        int st = sinew__report_read_checked(ctx, &img, path, 0, 1, SINEW_U8);
        if (st == SINEW_ENOMEM)
            return st;
        if (!st) {
            double kept = 0;
            for (int y = 0; y < img.height; y++) {
                const uint8_t *m = sinew_image_row_u8(&img, y);
                long k = 0;
                for (int x = 0; x < img.width; x++)
                    k += m[x] == 0;
                kept += (double)k;
            }
            q->m[SINEW__M_KEPT] = kept / ((double)img.width * img.height);
            sinew_image_free(&img);
        }
        sinew_ctx_clear(ctx);
    }
    static const struct {
        int metric;
        const char *file;
    } maps[2] = {{SINEW__M_CONF, SINEW_RUN_CONFIDENCE_FILE},
                 {SINEW__M_FB, SINEW_RUN_FB_ERROR_FILE}};
    for (int k = 0; k < 2; k++) {
        if (!isnan(q->m[maps[k].metric]) ||
            !sinew__report_pair_path(r, q, maps[k].file, path, sizeof path) ||
            !sinew__report_exists(path))
            continue;
        int st = sinew__report_read_checked(ctx, &img, path, 1, 1, SINEW_F32);
        if (st == SINEW_ENOMEM)
            return st;
        if (!st) {
            double sum = 0, cnt = 0;
            for (int y = 0; y < img.height; y++) {
                const float *p = sinew_image_row_f32(&img, y);
                double rs = 0;
                long rc = 0;
                for (int x = 0; x < img.width; x++)
                    if (isfinite(p[x]))
                        rs += p[x], rc++;
                sum += rs;
                cnt += (double)rc;
            }
            q->m[maps[k].metric] = cnt > 0 ? sum / cnt : NAN;
            sinew_image_free(&img);
        }
        sinew_ctx_clear(ctx);
    }
    return SINEW_OK;
}
