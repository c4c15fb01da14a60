/* SPDX-License-Identifier: MIT */
/* The run report page. Reads the run manifest (cJSON) and, per pictured pair, the pair
 * folder's flow, confidence and reason mask (flow/io.h); draws them with flow/draw.h,
 * shrinks them by area averaging, encodes PNG in memory (libpng simplified API) and
 * inlines them as base64 data URIs. Plots are inline SVG polylines over the pair
 * index. The page carries a Content-Security-Policy that forbids every fetch except
 * data: images, so even a mistake cannot make it reach the network.
 *
 * Everything is built in memory with a growable string buffer (allocation failures are
 * remembered and reported once) and written with sinew_write_file (atomic). A pair file
 * that is missing or unreadable gives a placeholder and a warning line, never a
 * failure: a report is most useful exactly when a run went partly wrong. */
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <string.h>

#include <cJSON.h>
#include <png.h>

#include "flow/draw.h"
#include "flow/internal/base.h"
#include "flow/io.h"
#include "flow/report.h"
#include "flow/run.h"

#define MANIFEST_MAX_BYTES ((size_t)256 << 20)

void sinew_report_options_default(sinew_report_options *o)
{
    if (!o)
        return;
    o->thumb_width = 240;
    o->max_thumb_pairs = 40;
    o->flow_max = 0;
    o->title = NULL;
}

/* ---- in-memory PNG ---------------------------------------------------------------- */

int sinew_png_encode(sinew_ctx *ctx, const sinew_image *img, unsigned char **png, size_t *len)
{
    if (!ctx || !img || !png || !len || !img->data || img->type != SINEW_U8 || img->channels < 1 ||
        img->channels > 4)
        return SINEW_EINVAL;
    *png = NULL;
    *len = 0;
    if (img->stride > INT32_MAX)
        return sinew__fail(ctx, SINEW_ELIMIT, "png: image rows too long to encode");
    static const png_uint_32 formats[4] = {PNG_FORMAT_GRAY, PNG_FORMAT_GA, PNG_FORMAT_RGB,
                                           PNG_FORMAT_RGBA};
    png_image im;
    memset(&im, 0, sizeof im);
    im.version = PNG_IMAGE_VERSION;
    im.width = (png_uint_32)img->width;
    im.height = (png_uint_32)img->height;
    im.format = formats[img->channels - 1];
    png_alloc_size_t size = 0;
    if (!png_image_write_to_memory(&im, NULL, &size, 0, img->data, (png_int_32)img->stride, NULL)) {
        int st = sinew__fail(ctx, SINEW_EFORMAT, "png: %s", im.message);
        png_image_free(&im);
        return st;
    }
    unsigned char *buf = sinew__alloc(ctx, size ? size : 1);
    if (!buf)
        return SINEW_ENOMEM;
    memset(&im, 0, sizeof im);
    im.version = PNG_IMAGE_VERSION;
    im.width = (png_uint_32)img->width;
    im.height = (png_uint_32)img->height;
    im.format = formats[img->channels - 1];
    if (!png_image_write_to_memory(&im, buf, &size, 0, img->data, (png_int_32)img->stride, NULL)) {
        sinew__free(ctx, buf);
        int st = sinew__fail(ctx, SINEW_EFORMAT, "png: %s", im.message);
        png_image_free(&im);
        return st;
    }
    *png = buf;
    *len = size;
    return SINEW_OK;
}

/* ---- string buffer ---------------------------------------------------------------- */

typedef struct sbuf {
    sinew_ctx *ctx;
    char *p;
    size_t n, cap;
    int err; /* first failure status; later writes are ignored */
} sbuf;

static void sb_init(sbuf *b, sinew_ctx *ctx)
{
    memset(b, 0, sizeof *b);
    b->ctx = ctx;
}

static void sb_free(sbuf *b)
{
    sinew__free(b->ctx, b->p);
    b->p = NULL;
    b->n = b->cap = 0;
}

static int sb_reserve(sbuf *b, size_t add)
{
    size_t need;
    if (b->err)
        return 0;
    if (sinew__add_size(b->n, add, &need) || sinew__add_size(need, 1, &need)) {
        b->err = sinew__fail(b->ctx, SINEW_EOVERFLOW, "report: page too large");
        return 0;
    }
    if (need <= b->cap)
        return 1;
    size_t cap = b->cap ? b->cap : 16384;
    while (cap < need) {
        if (cap > SIZE_MAX / 2) {
            cap = need;
            break;
        }
        cap *= 2;
    }
    char *q = sinew__alloc(b->ctx, cap);
    if (!q) {
        b->err = SINEW_ENOMEM;
        return 0;
    }
    if (b->n)
        memcpy(q, b->p, b->n);
    sinew__free(b->ctx, b->p);
    b->p = q;
    b->cap = cap;
    return 1;
}

static void sb_put(sbuf *b, const char *s, size_t len)
{
    if (!sb_reserve(b, len))
        return;
    memcpy(b->p + b->n, s, len);
    b->n += len;
    b->p[b->n] = 0;
}

static void sb_puts(sbuf *b, const char *s)
{
    sb_put(b, s, strlen(s));
}

static void sb_printf(sbuf *b, const char *fmt, ...) SINEW__PRINTF(2, 3);
static void sb_printf(sbuf *b, const char *fmt, ...)
{
    char small[512];
    va_list ap;
    va_start(ap, fmt);
    int k = vsnprintf(small, sizeof small, fmt, ap);
    va_end(ap);
    if (k < 0)
        return;
    if ((size_t)k < sizeof small) {
        sb_put(b, small, (size_t)k);
        return;
    }
    if (!sb_reserve(b, (size_t)k))
        return;
    va_start(ap, fmt);
    vsnprintf(b->p + b->n, (size_t)k + 1, fmt, ap);
    va_end(ap);
    b->n += (size_t)k;
}

/* Append the other buffer's text (and record its failure). */
static void sb_append(sbuf *b, const sbuf *o)
{
    if (o->err && !b->err)
        b->err = o->err;
    if (o->n)
        sb_put(b, o->p, o->n);
}

static void sb_esc(sbuf *b, const char *s)
{
    if (!s)
        return;
    for (const char *p = s; *p; p++) {
        switch (*p) {
        case '&':
            sb_puts(b, "&amp;");
            break;
        case '<':
            sb_puts(b, "&lt;");
            break;
        case '>':
            sb_puts(b, "&gt;");
            break;
        case '"':
            sb_puts(b, "&quot;");
            break;
        case '\'':
            sb_puts(b, "&#39;");
            break;
        default:
            sb_put(b, p, 1);
        }
    }
}

static void sb_base64(sbuf *b, const unsigned char *d, size_t n)
{
    static const char tab[] = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    if (!sb_reserve(b, (n + 2) / 3 * 4))
        return;
    char *o = b->p + b->n;
    size_t i = 0;
    for (; i + 2 < n; i += 3) {
        unsigned v = (unsigned)d[i] << 16 | (unsigned)d[i + 1] << 8 | d[i + 2];
        *o++ = tab[v >> 18 & 63], *o++ = tab[v >> 12 & 63], *o++ = tab[v >> 6 & 63],
        *o++ = tab[v & 63];
    }
    if (i < n) {
        unsigned v = (unsigned)d[i] << 16 | (i + 1 < n ? (unsigned)d[i + 1] << 8 : 0u);
        *o++ = tab[v >> 18 & 63];
        *o++ = tab[v >> 12 & 63];
        *o++ = i + 1 < n ? tab[v >> 6 & 63] : '=';
        *o++ = '=';
    }
    b->n = (size_t)(o - b->p);
    b->p[b->n] = 0;
}

/* A number for the page: "—" for NaN. */
static void sb_num(sbuf *b, double v, const char *fmt)
{
    if (isfinite(v))
        sb_printf(b, fmt, v);
    else
        sb_puts(b, "&mdash;");
}

/* ---- manifest ---------------------------------------------------------------------- */

enum { M_KEPT, M_CONF, M_FB, M_EPE, M_F1, M_COUNT };

static const struct {
    const char *key, *title, *unit;
    int unit_range; /* values in [0, 1] */
} metrics[M_COUNT] = {
    {"kept_fraction", "Kept-match fraction", "", 1},
    {"mean_confidence", "Mean confidence", "", 1},
    {"fb_error_mean", "Forward-backward error, mean", "px", 0},
    {"epe", "Endpoint error vs ground truth, mean", "px", 0},
    {"occlusion_f1", "Occlusion F1 vs ground truth", "", 1},
};

typedef struct pair_info {
    const char *name; /* borrowed from the cJSON tree */
    int fi, fj;       /* frame numbers or -1 */
    const char *status, *error;
    const cJSON *stats;
    double m[M_COUNT];
    int safe; /* name usable as a folder name */
} pair_info;

typedef struct report {
    sinew_ctx *ctx;
    const char *rundir;
    sinew_report_options o;
    cJSON *root;
    const char *manifest_text;
    size_t manifest_len;
    pair_info *pairs;
    size_t npairs;
    const char **colour; /* frame number -> colour input path (borrowed), may be NULL */
    size_t ncolour;
    sbuf warn;
    size_t nwarn;
} report;

static const char *json_str(const cJSON *o, const char *key)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, key);
    return cJSON_IsString(v) && v->valuestring ? v->valuestring : NULL;
}

static double json_num(const cJSON *o, const char *key)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, key);
    return cJSON_IsNumber(v) && isfinite(v->valuedouble) ? v->valuedouble : NAN;
}

static int safe_name(const char *s)
{
    if (!s || !*s || s[0] == '.' || strlen(s) > 200)
        return 0;
    for (const char *p = s; *p; p++)
        if (*p == '/' || *p == '\\')
            return 0;
    return 1;
}

static void warn(report *r, const char *pair, const char *what, const char *detail)
{
    r->nwarn++;
    sb_puts(&r->warn, "<li>");
    if (pair) {
        sb_puts(&r->warn, "<span class=\"tag\">");
        sb_esc(&r->warn, pair);
        sb_puts(&r->warn, "</span> ");
    }
    sb_esc(&r->warn, what);
    if (detail && *detail) {
        sb_puts(&r->warn, ": <span class=\"muted\">");
        sb_esc(&r->warn, detail);
        sb_puts(&r->warn, "</span>");
    }
    sb_puts(&r->warn, "</li>\n");
}

static int load_manifest(report *r)
{
    sinew_ctx *ctx = r->ctx;
    char path[4096];
    if ((size_t)snprintf(path, sizeof path, "%s/" SINEW_RUN_MANIFEST_FILE, r->rundir) >=
        sizeof path)
        return sinew__fail(ctx, SINEW_EINVAL, "%s: path too long", r->rundir);
    unsigned char *buf = NULL;
    size_t len = 0;
    int st = sinew_read_file(ctx, path, MANIFEST_MAX_BYTES, &buf, &len);
    if (st)
        return st;
    const char *end = NULL;
    r->root = cJSON_ParseWithLengthOpts((const char *)buf, len, &end, 0);
    if (!r->root) {
        size_t off = end ? (size_t)(end - (const char *)buf) : 0;
        sinew_ctx_dealloc(ctx, buf);
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: not valid JSON (near byte %zu)", path, off);
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
        pair_info *q = &r->pairs[i++];
        q->name = json_str(p, "pair");
        q->safe = safe_name(q->name);
        q->fi = q->fj = -1;
        const cJSON *fr = cJSON_GetObjectItemCaseSensitive(p, "frames");
        if (cJSON_GetArraySize(fr) == 2) {
            const cJSON *a = cJSON_GetArrayItem(fr, 0), *b = cJSON_GetArrayItem(fr, 1);
            if (cJSON_IsNumber(a) && cJSON_IsNumber(b) && a->valuedouble >= 0 &&
                b->valuedouble >= 0 && a->valuedouble < 1e7 && b->valuedouble < 1e7)
                q->fi = (int)a->valuedouble, q->fj = (int)b->valuedouble;
        }
        q->status = json_str(p, "status");
        q->error = json_str(p, "error");
        q->stats = cJSON_GetObjectItemCaseSensitive(p, "stats");
        for (int k = 0; k < M_COUNT; k++)
            q->m[k] = cJSON_IsObject(q->stats) ? json_num(q->stats, metrics[k].key) : NAN;
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
            const char *role = json_str(e, "role"), *path_ = json_str(e, "path");
            if (role && !strcmp(role, "color"))
                r->colour[r->ncolour++] = path_;
        }
    }
    return SINEW_OK;
}

/* ---- pictures ---------------------------------------------------------------------- */

static int pair_path(const report *r, const pair_info *q, const char *file, char *buf, size_t n)
{
    return q->safe && (size_t)snprintf(buf, n, "%s/" SINEW_RUN_PAIRS_DIR "/%s/%s", r->rundir,
                                       q->name, file) < n;
}

static int exists(const char *path)
{
    FILE *f = fopen(path, "rb");
    if (f)
        fclose(f);
    return f != NULL;
}

static int find_flow(const report *r, const pair_info *q, char *buf, size_t n)
{
    static const char *const names[] = {SINEW_RUN_FORWARD ".flo", SINEW_RUN_FORWARD ".npy",
                                        SINEW_RUN_FORWARD ".pfm", SINEW_RUN_FORWARD ".png"};
    for (size_t k = 0; k < sizeof names / sizeof names[0]; k++)
        if (pair_path(r, q, names[k], buf, n) && exists(buf))
            return 1;
    return 0;
}

/* Frame as RGB U8 at full brightness. */
static int frame_rgb(sinew_ctx *ctx, sinew_image *out, const sinew_image *f)
{
    int st = sinew_image_alloc(ctx, out, f->width, f->height, 3, SINEW_U8);
    if (st)
        return st;
    const int nc = f->channels;
    for (int y = 0; y < f->height; y++) {
        uint8_t *o = sinew_image_row_u8(out, y);
        for (int x = 0; x < f->width; x++)
            for (int b = 0; b < 3; b++) {
                int c = nc >= 3 ? b : 0;
                size_t i = (size_t)x * nc + c;
                o[3 * x + b] = f->type == SINEW_U8 ? sinew_image_row_u8(f, y)[i]
                                                   : (uint8_t)(sinew_image_row_u16(f, y)[i] >> 8);
            }
    }
    return SINEW_OK;
}

/* Area-average an RGB U8 picture down to width tw (kept as is when not wider). */
static int shrink(sinew_ctx *ctx, sinew_image *out, const sinew_image *in, int tw)
{
    if (in->width <= tw)
        return sinew_image_copy(ctx, out, in);
    int th = (int)((int64_t)in->height * tw / in->width);
    if (th < 1)
        th = 1;
    int st = sinew_image_alloc(ctx, out, tw, th, 3, SINEW_U8);
    if (st)
        return st;
    for (int y = 0; y < th; y++) {
        int y0 = (int)((int64_t)y * in->height / th),
            y1 = (int)((int64_t)(y + 1) * in->height / th);
        if (y1 <= y0)
            y1 = y0 + 1;
        uint8_t *o = sinew_image_row_u8(out, y);
        for (int x = 0; x < tw; x++) {
            int x0 = (int)((int64_t)x * in->width / tw),
                x1 = (int)((int64_t)(x + 1) * in->width / tw);
            if (x1 <= x0)
                x1 = x0 + 1;
            unsigned long sum[3] = {0, 0, 0}, cnt = 0;
            for (int yy = y0; yy < y1; yy++) {
                const uint8_t *p = sinew_image_row_u8(in, yy);
                for (int xx = x0; xx < x1; xx++, cnt++)
                    for (int b = 0; b < 3; b++)
                        sum[b] += p[3 * xx + b];
            }
            for (int b = 0; b < 3; b++)
                o[3 * x + b] = (uint8_t)((sum[b] + cnt / 2) / cnt);
        }
    }
    return SINEW_OK;
}

/* Emit an <img> with the shrunk picture, or return the failing status. */
static int emit_picture(report *r, sbuf *b, const sinew_image *pic, const char *alt)
{
    sinew_image t;
    int st = shrink(r->ctx, &t, pic, r->o.thumb_width);
    if (st)
        return st;
    unsigned char *png = NULL;
    size_t len = 0;
    st = sinew_png_encode(r->ctx, &t, &png, &len);
    if (!st) {
        /* Shown at the thumbnail width; small pictures are enlarged with crisp pixels. */
        int tw = r->o.thumb_width;
        int th = (int)(((int64_t)t.height * tw + t.width / 2) / t.width);
        sb_printf(b, "<img width=\"%d\" height=\"%d\"%s alt=\"", tw, th > 0 ? th : 1,
                  t.width < tw ? " class=\"up\"" : "");
        sb_esc(b, alt);
        sb_puts(b, "\" src=\"data:image/png;base64,");
        sb_base64(b, png, len);
        sb_puts(b, "\">");
    }
    sinew_ctx_dealloc(r->ctx, png);
    sinew_image_free(&t);
    return st;
}

static void emit_placeholder(sbuf *b, int tw, const char *why)
{
    sb_printf(b,
              "<div class=\"ph\" style=\"width:%dpx;height:%dpx\"><span>no picture</span><small>",
              tw, tw * 3 / 4);
    sb_esc(b, why);
    sb_puts(b, "</small></div>");
}

/* One figure cell: status st from building pic; warn on failure (except ENOMEM, which
 * is returned and ends the report). */
static int figure(report *r, sbuf *b, const pair_info *q, const char *caption, int st,
                  const sinew_image *pic, const char *missing)
{
    sb_puts(b, "<figure>");
    if (!st && pic && pic->data)
        st = emit_picture(r, b, pic, caption);
    if (st == SINEW_ENOMEM)
        return st;
    if (st) {
        const char *m = sinew_ctx_message(r->ctx);
        emit_placeholder(b, r->o.thumb_width, "unreadable");
        warn(r, q->name, caption, m && *m ? m : sinew_strerror(st));
        sinew_ctx_clear(r->ctx);
    } else if (!pic || !pic->data) {
        emit_placeholder(b, r->o.thumb_width, missing);
    }
    sb_puts(b, "<figcaption>");
    sb_esc(b, caption);
    sb_puts(b, "</figcaption></figure>");
    return SINEW_OK;
}

static int read_checked(sinew_ctx *ctx, sinew_image *img, const char *path, int npy, int channels,
                        sinew_type type)
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

static const char *frame_path(const report *r, int k)
{
    return k >= 0 && (size_t)k < r->ncolour ? r->colour[k] : NULL;
}

static int pair_pictures(report *r, sbuf *b, const pair_info *q, double fmax)
{
    sinew_ctx *ctx = r->ctx;
    char path[4096];
    sinew_image frame = {0}, rgb = {0}, pic = {0}, img = {0};
    int st, rc = SINEW_OK;

    sb_puts(b, "<article class=\"pair\"><h3>");
    sb_esc(b, q->name);
    if (q->fi >= 0)
        sb_printf(b, " <span class=\"muted\">frames %d &rarr; %d</span>", q->fi, q->fj);
    sb_puts(b, "</h3><div class=\"strip\">");

    /* frame */
    const char *fp = frame_path(r, q->fi);
    st = SINEW_OK;
    if (fp) {
        st = sinew_image_read(ctx, &frame, fp);
        if (!st)
            st = frame_rgb(ctx, &rgb, &frame);
    }
    if ((rc = figure(r, b, q, "frame", st, &rgb, "frame not listed")))
        goto done;
    sinew_image_free(&rgb);

    /* flow */
    st = SINEW_OK;
    if (find_flow(r, q, path, sizeof path)) {
        st = sinew_flow_read(ctx, &img, path, SINEW_FLOW_AUTO);
        if (!st)
            st = sinew_draw_flow(ctx, &pic, &img, fmax, 0);
    }
    if ((rc = figure(r, b, q, "flow", st, &pic, "no forward flow")))
        goto done;
    sinew_image_free(&pic);
    sinew_image_free(&img);

    /* confidence */
    st = SINEW_OK;
    if (pair_path(r, q, SINEW_RUN_CONFIDENCE_FILE, path, sizeof path) && exists(path)) {
        st = read_checked(ctx, &img, path, 1, 1, SINEW_F32);
        if (!st)
            st = sinew_draw_heatmap(ctx, &pic, &img, 0, 1, NULL, 0);
    }
    if ((rc = figure(r, b, q, "confidence", st, &pic, "no " SINEW_RUN_CONFIDENCE_FILE)))
        goto done;
    sinew_image_free(&pic);
    sinew_image_free(&img);

    /* reasons */
    st = SINEW_OK;
    if (pair_path(r, q, SINEW_RUN_MASK_FILE, path, sizeof path) && exists(path)) {
        st = read_checked(ctx, &img, path, 0, 1, SINEW_U8);
        if (!st) {
            int same = frame.data && frame.width == img.width && frame.height == img.height;
            st = sinew_draw_reasons(ctx, &pic, same ? &frame : NULL, &img, 0);
        }
    }
    rc = figure(r, b, q, "rejection reasons", st, &pic, "no " SINEW_RUN_MASK_FILE);
done:
    sb_puts(b, "</div></article>\n");
    sinew_image_free(&frame);
    sinew_image_free(&rgb);
    sinew_image_free(&pic);
    sinew_image_free(&img);
    return rc;
}

/* Fill metrics the stats did not give from the pair's files (kept fraction from
 * mask.png, mean confidence from confidence.npy, mean fb error from fb_error.npy). */
static int derive_metrics(report *r, pair_info *q)
{
    sinew_ctx *ctx = r->ctx;
    char path[4096];
    sinew_image img;
    if (isnan(q->m[M_KEPT]) && pair_path(r, q, SINEW_RUN_MASK_FILE, path, sizeof path) &&
        exists(path)) {
        int st = read_checked(ctx, &img, path, 0, 1, SINEW_U8);
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
            q->m[M_KEPT] = kept / ((double)img.width * img.height);
            sinew_image_free(&img);
        }
        sinew_ctx_clear(ctx);
    }
    static const struct {
        int metric;
        const char *file;
    } maps[2] = {{M_CONF, SINEW_RUN_CONFIDENCE_FILE}, {M_FB, SINEW_RUN_FB_ERROR_FILE}};
    for (int k = 0; k < 2; k++) {
        if (!isnan(q->m[maps[k].metric]) || !pair_path(r, q, maps[k].file, path, sizeof path) ||
            !exists(path))
            continue;
        int st = read_checked(ctx, &img, path, 1, 1, SINEW_F32);
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

/* ---- plots ------------------------------------------------------------------------- */

static void plot(sbuf *b, const report *r, int k)
{
    const double W = 640, H = 190, ml = 52, mr = 14, mt = 14, mb = 30;
    const double pw = W - ml - mr, ph = H - mt - mb;
    size_t n = r->npairs, nf = 0;
    double hi = 0;
    for (size_t i = 0; i < n; i++)
        if (isfinite(r->pairs[i].m[k])) {
            nf++;
            if (r->pairs[i].m[k] > hi)
                hi = r->pairs[i].m[k];
        }
    if (!nf)
        return;
    double top = metrics[k].unit_range ? 1.0 : (hi > 0 ? hi * 1.1 : 1.0);
    sb_printf(b, "<figure class=\"plot\"><figcaption>%s%s%s</figcaption>\n", metrics[k].title,
              *metrics[k].unit ? ", " : "", metrics[k].unit);
    sb_printf(b,
              "<svg viewBox=\"0 0 %.0f %.0f\" role=\"img\" aria-label=\"%s per pair\" "
              "xmlns=\"http://www.w3.org/2000/svg\">\n",
              W, H, metrics[k].title);
    for (int g = 0; g <= 2; g++) {
        double v = top * g / 2.0, y = mt + ph * (1 - g / 2.0);
        sb_printf(b,
                  "<line class=\"grid\" x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\"/>"
                  "<text class=\"ax\" x=\"%.1f\" y=\"%.1f\" text-anchor=\"end\">%.3g</text>\n",
                  ml, y, W - mr, y, ml - 6, y + 4, v);
    }
    sb_printf(b,
              "<text class=\"ax\" x=\"%.1f\" y=\"%.1f\">0</text>"
              "<text class=\"ax\" x=\"%.1f\" y=\"%.1f\" text-anchor=\"end\">%zu</text>"
              "<text class=\"ax\" x=\"%.1f\" y=\"%.1f\" text-anchor=\"middle\">pair index</text>\n",
              ml, H - 10, W - mr, H - 10, n ? n - 1 : 0, ml + pw / 2, H - 10);
    /* polylines through runs of known values */
    int open = 0;
    for (size_t i = 0; i < n; i++) {
        double v = r->pairs[i].m[k];
        if (!isfinite(v)) {
            if (open)
                sb_puts(b, "\"/>\n");
            open = 0;
            continue;
        }
        double x = ml + (n > 1 ? pw * (double)i / (double)(n - 1) : pw / 2);
        double y = mt + ph * (1 - fmin(fmax(v / top, 0), 1));
        if (!open)
            sb_puts(b, "<polyline class=\"line\" points=\"");
        sb_printf(b, "%s%.1f,%.1f", open ? " " : "", x, y);
        open = 1;
    }
    if (open)
        sb_puts(b, "\"/>\n");
    if (nf <= 120)
        for (size_t i = 0; i < n; i++) {
            double v = r->pairs[i].m[k];
            if (!isfinite(v))
                continue;
            double x = ml + (n > 1 ? pw * (double)i / (double)(n - 1) : pw / 2);
            double y = mt + ph * (1 - fmin(fmax(v / top, 0), 1));
            sb_printf(b, "<circle class=\"pt\" cx=\"%.1f\" cy=\"%.1f\" r=\"2.6\"><title>", x, y);
            sb_esc(b, r->pairs[i].name ? r->pairs[i].name : "?");
            sb_printf(b, ": %.4g</title></circle>\n", v);
        }
    sb_puts(b, "</svg></figure>\n");
}

/* ---- page -------------------------------------------------------------------------- */

static const char css[] =
    ":root{color-scheme:dark;--bg:#14171c;--panel:#1c2027;--line:#2c323b;--text:#d5d9df;"
    "--muted:#8f97a3;--accent:#7fb8b0;--warn:#e0a868;--bad:#e07a6a}\n"
    "*{box-sizing:border-box}\n"
    "body{margin:0;background:var(--bg);color:var(--text);font:15px/1.5 system-ui,"
    "-apple-system,'Segoe UI','Noto Sans','Liberation Sans',sans-serif}\n"
    "main{max-width:1180px;margin:0 auto;padding:28px 24px 48px}\n"
    "h1{font-size:26px;font-weight:600;margin:0 0 4px;letter-spacing:.01em}\n"
    "h2{font-size:18px;font-weight:600;margin:36px 0 12px;color:var(--accent)}\n"
    "h3{font-size:15px;font-weight:600;margin:0 0 8px}\n"
    ".muted{color:var(--muted);font-weight:400}\n"
    ".num,td.n{font-family:ui-monospace,'DejaVu Sans Mono','Liberation Mono',monospace;"
    "font-variant-numeric:tabular-nums}\n"
    ".cards{display:grid;grid-template-columns:repeat(auto-fill,minmax(170px,1fr));gap:12px}\n"
    ".card{background:var(--panel);border:1px solid var(--line);border-radius:8px;padding:12px "
    "14px}\n"
    ".card .v{font-size:22px;font-family:ui-monospace,'DejaVu Sans Mono',monospace}\n"
    ".card .k{color:var(--muted);font-size:13px}\n"
    ".warn{background:#2a2219;border:1px solid #4a3a26;border-radius:8px;padding:10px 14px}\n"
    ".warn li{margin:3px 0}.warn .tag{color:var(--warn)}\n"
    ".plots{display:grid;grid-template-columns:repeat(auto-fill,minmax(460px,1fr));gap:14px}\n"
    ".plot{margin:0;background:var(--panel);border:1px solid var(--line);border-radius:8px;"
    "padding:10px 12px}\n"
    ".plot figcaption{color:var(--muted);font-size:13px;margin-bottom:4px}\n"
    "svg{width:100%;height:auto;display:block}\n"
    ".grid{stroke:var(--line);stroke-width:1}.ax{fill:var(--muted);font-size:11px;"
    "font-family:system-ui,sans-serif}\n"
    ".line{fill:none;stroke:var(--accent);stroke-width:1.8}.pt{fill:var(--accent)}\n"
    ".pair{background:var(--panel);border:1px solid var(--line);border-radius:8px;"
    "padding:12px 14px;margin:0 0 14px}\n"
    ".strip{display:flex;flex-wrap:wrap;gap:10px}\n"
    ".strip figure{margin:0}.strip img{display:block;border-radius:4px;"
    "max-width:100%;height:auto}.strip img.up{image-rendering:pixelated}\n"
    ".strip figcaption{color:var(--muted);font-size:12px;margin-top:3px}\n"
    ".ph{display:flex;flex-direction:column;align-items:center;justify-content:center;"
    "border:1px dashed var(--line);border-radius:4px;color:var(--muted)}\n"
    ".legend{display:flex;flex-wrap:wrap;gap:18px;align-items:center;margin:0 0 14px;"
    "color:var(--muted);font-size:13px}\n"
    ".sw{display:inline-block;width:12px;height:12px;border-radius:2px;margin-right:5px;"
    "vertical-align:-1px}\n"
    ".bar{display:inline-block;width:160px;height:12px;border-radius:2px;vertical-align:-1px;"
    "margin:0 6px}\n"
    "table{border-collapse:collapse;width:100%;font-size:14px}\n"
    "th,td{text-align:left;padding:5px 8px;border-bottom:1px solid var(--line);"
    "vertical-align:top}\n"
    "th{color:var(--muted);font-weight:500}td.n{text-align:right}\n"
    ".st-done{color:var(--accent)}.st-failed{color:var(--bad)}.st-pending{color:var(--warn)}\n"
    "pre{background:var(--panel);border:1px solid var(--line);border-radius:8px;padding:12px;"
    "overflow:auto;font-size:12.5px;max-height:480px}\n"
    "details summary{cursor:pointer;color:var(--muted)}\n"
    "footer{margin-top:40px;color:var(--muted);font-size:13px;border-top:1px solid var(--line);"
    "padding-top:12px}\n";

static double mean_of(const report *r, int k, size_t *count)
{
    double s = 0;
    size_t c = 0;
    for (size_t i = 0; i < r->npairs; i++)
        if (isfinite(r->pairs[i].m[k]))
            s += r->pairs[i].m[k], c++;
    if (count)
        *count = c;
    return c ? s / (double)c : NAN;
}

static void card(sbuf *b, const char *key, const char *value_html)
{
    sb_printf(b, "<div class=\"card\"><div class=\"v\">%s</div><div class=\"k\">%s</div></div>\n",
              value_html, key);
}

static void summary(sbuf *b, const report *r)
{
    const cJSON *sum = cJSON_GetObjectItemCaseSensitive(r->root, "summary");
    size_t cnt[3] = {0, 0, 0};
    for (size_t i = 0; i < r->npairs; i++) {
        const char *s = r->pairs[i].status;
        cnt[s && !strcmp(s, "done") ? 0 : s && !strcmp(s, "failed") ? 1 : 2]++;
    }
    char v[64];
    snprintf(v, sizeof v, "%zu", r->npairs);
    sb_puts(b, "<section class=\"cards\">\n");
    card(b, "pairs", v);
    static const char *const names[3] = {"done", "failed", "pending"};
    for (int k = 0; k < 3; k++) {
        double d = cJSON_IsObject(sum) ? json_num(sum, names[k]) : NAN;
        snprintf(v, sizeof v, "%.0f", isfinite(d) ? d : (double)cnt[k]);
        card(b, names[k], v);
    }
    double fr = json_num(r->root, "frames");
    if (isfinite(fr)) {
        snprintf(v, sizeof v, "%.0f", fr);
        card(b, "frames", v);
    }
    for (int k = 0; k < M_COUNT; k++) {
        size_t c;
        double m = mean_of(r, k, &c);
        if (!c)
            continue;
        char key[96];
        snprintf(key, sizeof key, "%s%s%s (mean of %zu)", metrics[k].title,
                 *metrics[k].unit ? ", " : "", metrics[k].unit, c);
        snprintf(v, sizeof v, "%.3f", m);
        card(b, key, v);
    }
    sb_puts(b, "</section>\n");
}

static void pair_table(sbuf *b, const report *r)
{
    sb_puts(b, "<table><thead><tr><th>pair</th><th>frames</th><th>status</th>");
    for (int k = 0; k < M_COUNT; k++)
        sb_printf(b, "<th>%s</th>", metrics[k].key);
    sb_puts(b, "<th>note</th></tr></thead><tbody>\n");
    for (size_t i = 0; i < r->npairs; i++) {
        const pair_info *q = &r->pairs[i];
        const char *s = q->status ? q->status : "unknown";
        sb_puts(b, "<tr><td class=\"num\">");
        sb_esc(b, q->name ? q->name : "?");
        sb_puts(b, "</td><td class=\"n\">");
        if (q->fi >= 0)
            sb_printf(b, "%d&ndash;%d", q->fi, q->fj);
        sb_puts(b, "</td><td class=\"st-");
        sb_esc(b, s);
        sb_puts(b, "\">");
        sb_esc(b, s);
        sb_puts(b, "</td>");
        for (int k = 0; k < M_COUNT; k++) {
            sb_puts(b, "<td class=\"n\">");
            sb_num(b, q->m[k], "%.3f");
            sb_puts(b, "</td>");
        }
        sb_puts(b, "<td>");
        sb_esc(b, q->error);
        sb_puts(b, "</td></tr>\n");
    }
    sb_puts(b, "</tbody></table>\n");
}

static void inputs_section(sbuf *b, const report *r)
{
    const cJSON *inputs = cJSON_GetObjectItemCaseSensitive(r->root, "inputs");
    const cJSON *opt = cJSON_GetObjectItemCaseSensitive(r->root, "options");
    sb_puts(b, "<h2>Inputs and options</h2>\n");
    if (cJSON_IsArray(inputs) && cJSON_GetArraySize(inputs) > 0) {
        sb_puts(b, "<table><thead><tr><th>role</th><th>path</th><th>bytes</th><th>SHA-256</th>"
                   "</tr></thead><tbody>\n");
        int shown = 0, total = cJSON_GetArraySize(inputs);
        const cJSON *e;
        cJSON_ArrayForEach(e, inputs)
        {
            if (shown++ >= 200)
                break;
            const char *sha = json_str(e, "sha256");
            sb_puts(b, "<tr><td>");
            sb_esc(b, json_str(e, "role"));
            sb_puts(b, "</td><td class=\"num\">");
            sb_esc(b, json_str(e, "path"));
            sb_puts(b, "</td><td class=\"n\">");
            sb_num(b, json_num(e, "bytes"), "%.0f");
            sb_puts(b, "</td><td class=\"num\">");
            if (sha) {
                char s12[13];
                snprintf(s12, sizeof s12, "%s", sha);
                sb_puts(b, "<span title=\"");
                sb_esc(b, sha);
                sb_puts(b, "\">");
                sb_esc(b, s12);
                sb_puts(b, "&hellip;</span>");
            } else {
                sb_esc(b, json_str(e, "error"));
            }
            sb_puts(b, "</td></tr>\n");
        }
        sb_puts(b, "</tbody></table>\n");
        if (total > 200)
            sb_printf(b, "<p class=\"muted\">%d more inputs are listed in the manifest.</p>\n",
                      total - 200);
    } else {
        sb_puts(b, "<p class=\"muted\">The manifest lists no inputs.</p>\n");
    }
    if (opt) {
        char *txt = cJSON_IsString(opt) ? NULL : cJSON_Print(opt);
        sb_puts(b, "<h3 style=\"margin-top:16px\">Options</h3><pre>");
        sb_esc(b, txt ? txt : opt->valuestring);
        sb_puts(b, "</pre>\n");
        cJSON_free(txt);
    }
}

static void legend(sbuf *b, const report *r, double fmax)
{
    sinew_image wheel;
    sb_puts(b, "<div class=\"legend\">");
    if (!sinew_draw_wheel(r->ctx, &wheel, 48)) {
        unsigned char *png = NULL;
        size_t len = 0;
        if (!sinew_png_encode(r->ctx, &wheel, &png, &len)) {
            sb_puts(b, "<span><img width=\"24\" height=\"24\" alt=\"colour wheel\" "
                       "style=\"vertical-align:middle;margin-right:6px\" "
                       "src=\"data:image/png;base64,");
            sb_base64(b, png, len);
            sb_puts(b, "\">");
            sb_num(b, fmax, "flow: wheel radius %.3g px");
            sb_puts(b, "</span>");
        }
        sinew_ctx_dealloc(r->ctx, png);
        sinew_image_free(&wheel);
    }
    sinew_ctx_clear(r->ctx);
    sb_puts(b, "<span>confidence 0<span class=\"bar\" style=\"background:linear-gradient(90deg");
    for (int i = 0; i <= 8; i++) {
        uint8_t c[3];
        sinew_colourmap(i / 8.0, c);
        sb_printf(b, ",rgb(%d,%d,%d)", c[0], c[1], c[2]);
    }
    sb_puts(b, ")\"></span>1</span>");
    for (int bit = 0; bit < SINEW_DRAW_REASONS; bit++) {
        uint8_t c[3];
        const char *name;
        sinew_reason_style(bit, c, &name);
        sb_printf(b, "<span><span class=\"sw\" style=\"background:rgb(%d,%d,%d)\"></span>", c[0],
                  c[1], c[2]);
        sb_esc(b, name);
        sb_puts(b, "</span>");
    }
    sb_puts(b, "</div>\n");
}

static int build(report *r, sbuf *page)
{
    sinew_ctx *ctx = r->ctx;
    int st;
    for (size_t i = 0; i < r->npairs; i++)
        if ((st = derive_metrics(r, &r->pairs[i])))
            return st;

    /* Pictured pairs: evenly spaced, safe names only. */
    size_t want = (size_t)r->o.max_thumb_pairs, n = r->npairs;
    size_t npic = n < want ? n : want;
    size_t *pick = NULL;
    if (npic) {
        pick = sinew__calloc(ctx, npic, sizeof *pick);
        if (!pick)
            return SINEW_ENOMEM;
        for (size_t j = 0; j < npic; j++)
            pick[j] = n <= want ? j : (size_t)((double)j * (double)n / (double)want);
    }
    double fmax = r->o.flow_max;
    if (!(fmax > 0)) { /* the run's maximum from the stats, if every pair reports one */
        fmax = 0;
        size_t with = 0;
        for (size_t i = 0; i < n; i++) {
            const pair_info *q = &r->pairs[i];
            double m = cJSON_IsObject(q->stats) ? json_num(q->stats, "flow_max") : NAN;
            if (isfinite(m) && m >= 0) {
                with++;
                fmax = m > fmax ? m : fmax;
            } else if (q->status && !strcmp(q->status, "done")) {
                with = 0; /* a done pair without it: fall back to reading the flows */
                break;
            }
        }
        if (!with)
            fmax = 0;
    }
    if (!(fmax > 0)) {
        fmax = 0;
        char path[4096];
        for (size_t j = 0; j < npic; j++) {
            const pair_info *q = &r->pairs[pick[j]];
            sinew_image f;
            double m;
            if (!find_flow(r, q, path, sizeof path))
                continue;
            if (!sinew_flow_read(ctx, &f, path, SINEW_FLOW_AUTO)) {
                if (!sinew_flow_max_magnitude(ctx, &f, &m) && m > fmax)
                    fmax = m;
                sinew_image_free(&f);
            }
            sinew_ctx_clear(ctx);
        }
        if (fmax <= 0)
            fmax = 1;
    }
    sbuf pics;
    sb_init(&pics, ctx);
    st = SINEW_OK;
    for (size_t j = 0; j < npic && !st; j++) {
        const pair_info *q = &r->pairs[pick[j]];
        if (!q->safe) {
            warn(r, q->name, "pair name is not a plain folder name; no pictures", NULL);
            continue;
        }
        st = pair_pictures(r, &pics, q, fmax);
    }
    sinew__free(ctx, pick);
    if (st) {
        sb_free(&pics);
        return st;
    }
    for (size_t i = 0; i < r->npairs; i++) {
        const pair_info *q = &r->pairs[i];
        if (q->status && !strcmp(q->status, "failed"))
            warn(r, q->name, "pair failed", q->error);
        if (cJSON_IsObject(q->stats)) {
            const cJSON *w = cJSON_GetObjectItemCaseSensitive(q->stats, "warnings"), *e;
            cJSON_ArrayForEach(e, w) if (cJSON_IsString(e)) warn(r, q->name, e->valuestring, NULL);
        }
    }
    const cJSON *gw = cJSON_GetObjectItemCaseSensitive(r->root, "warnings"), *e;
    sbuf top;
    sb_init(&top, ctx);
    size_t ntop = 0;
    cJSON_ArrayForEach(e, gw) if (cJSON_IsString(e))
    {
        sb_puts(&top, "<li>");
        sb_esc(&top, e->valuestring);
        sb_puts(&top, "</li>\n");
        ntop++;
    }

    const char *title = r->o.title ? r->o.title : "sinew run report";
    const char *ver = json_str(r->root, "sinew_version");
    sb_puts(page, "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
                  "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
                  "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; "
                  "img-src data:; style-src 'unsafe-inline'\">\n"
                  "<meta name=\"generator\" content=\"sinew ");
    sb_puts(page, SINEW_VERSION_STRING);
    sb_puts(page, "\">\n<title>");
    sb_esc(page, title);
    sb_puts(page, "</title>\n<style>\n");
    sb_puts(page, css);
    sb_puts(page, "</style>\n</head>\n<body>\n<main>\n<header><h1>");
    sb_esc(page, title);
    sb_puts(page, "</h1><div class=\"muted\">run folder <span class=\"num\">");
    sb_esc(page, r->rundir);
    sb_puts(page, "</span>");
    if (ver) {
        sb_puts(page, " &middot; made by sinew ");
        sb_esc(page, ver);
    }
    const char *fmt = json_str(r->root, "format");
    if (fmt) {
        sb_puts(page, " &middot; ");
        sb_esc(page, fmt);
    }
    sb_puts(page, "</div></header>\n<h2>Summary</h2>\n");
    summary(page, r);
    if (ntop + r->nwarn) {
        sb_printf(page, "<h2>Warnings (%zu)</h2>\n<ul class=\"warn\">\n", ntop + r->nwarn);
        sb_append(page, &top);
        sb_append(page, &r->warn);
        sb_puts(page, "</ul>\n");
    }
    sb_free(&top);
    sb_puts(page, "<h2>Per pair</h2>\n<div class=\"plots\">\n");
    for (int k = 0; k < M_COUNT; k++)
        plot(page, r, k);
    sb_puts(page, "</div>\n");
    if (npic) {
        sb_printf(page, "<h2>Pictures <span class=\"muted\">(%zu of %zu pairs)</span></h2>\n", npic,
                  n);
        legend(page, r, fmax);
        sb_append(page, &pics);
    }
    sb_free(&pics);
    sb_puts(page, "<h2>All pairs</h2>\n");
    pair_table(page, r);
    inputs_section(page, r);
    sb_printf(page,
              "<h2>Manifest</h2>\n<details><summary>" SINEW_RUN_MANIFEST_FILE
              " (%zu bytes)</summary><pre>",
              r->manifest_len);
    sb_esc(page, r->manifest_text);
    sb_puts(page, "</pre></details>\n<footer>sinew is a research tool, not a medical device: "
                  "its output must not be used for diagnosis or treatment.</footer>\n"
                  "</main>\n</body>\n</html>\n");
    return page->err;
}

int sinew_report_write(sinew_ctx *ctx, const char *rundir, const char *html_path,
                       const sinew_report_options *o)
{
    if (!ctx || !rundir || !html_path)
        return SINEW_EINVAL;
    report r;
    memset(&r, 0, sizeof r);
    r.ctx = ctx;
    r.rundir = rundir;
    if (o)
        r.o = *o;
    else
        sinew_report_options_default(&r.o);
    if (r.o.thumb_width < 32 || r.o.thumb_width > 1024 || r.o.max_thumb_pairs < 0 ||
        r.o.max_thumb_pairs > 100000 || isnan(r.o.flow_max) || isinf(r.o.flow_max))
        return sinew__fail(ctx, SINEW_EINVAL, "report: options out of range");
    sb_init(&r.warn, ctx);
    sbuf page;
    sb_init(&page, ctx);
    int st = load_manifest(&r);
    if (!st)
        st = build(&r, &page);
    if (!st && r.warn.err)
        st = r.warn.err;
    if (!st)
        st = sinew_write_file(ctx, html_path, page.p, page.n);
    sb_free(&page);
    sb_free(&r.warn);
    cJSON_Delete(r.root);
    sinew_ctx_dealloc(ctx, (void *)r.manifest_text);
    sinew__free(ctx, r.pairs);
    sinew__free(ctx, r.colour);
    return st;
}
