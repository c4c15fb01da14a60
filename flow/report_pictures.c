/* SPDX-License-Identifier: MIT */
/* The run report's pictures: per pair the frame, the flow in wheel colours, the
 * confidence and the rejection reasons (drawn with flow/draw.h), for stereo runs the
 * first frame's disparity and depth with labelled colour bars, shrunk to the
 * thumbnail width by area averaging, encoded as PNG in memory (sinew_png_encode) and
 * inlined as base64 data URIs; and the legend above them. */
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>

#include "flow/draw.h"
#include "flow/internal/base.h"
#include "flow/internal/report.h"
#include "flow/io.h"
#include "flow/depth.h"
#include "flow/run.h"
#include "flow/runstereo.h"

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

/* A float map (1 channel) shrunk to width tw by averaging each block's finite values (NaN
 * where it has none); copied when not wider. */
static int shrink_map(sinew_ctx *ctx, sinew_image *out, const sinew_image *in, int tw)
{
    if (in->width <= tw)
        return sinew_image_copy(ctx, out, in);
    int th = (int)((int64_t)in->height * tw / in->width);
    th = th < 1 ? 1 : th;
    int st = sinew_image_alloc(ctx, out, tw, th, 1, SINEW_F32);
    for (int y = 0; !st && y < th; y++) {
        const int y0 = (int)((int64_t)y * in->height / th);
        const int y1 = (int)((int64_t)(y + 1) * in->height / th) > y0
                           ? (int)((int64_t)(y + 1) * in->height / th)
                           : y0 + 1;
        for (int x = 0; x < tw; x++) {
            const int x0 = (int)((int64_t)x * in->width / tw);
            const int x1 = (int)((int64_t)(x + 1) * in->width / tw) > x0
                               ? (int)((int64_t)(x + 1) * in->width / tw)
                               : x0 + 1;
            double sum = 0;
            long cnt = 0;
            for (int yy = y0; yy < y1; yy++)
                for (int xx = x0; xx < x1; xx++) {
                    const float v = sinew_image_row_f32(in, yy)[xx];
                    if (isfinite(v)) {
                        sum += v;
                        cnt++;
                    }
                }
            sinew_image_row_f32(out, y)[x] = cnt ? (float)(sum / (double)cnt) : NAN;
        }
    }
    return st;
}

/* Emit an <img> with the shrunk picture, or return the failing status. */
static int emit_picture(sinew__report *r, sinew__sbuf *b, const sinew_image *pic, const char *alt)
{
    sinew_image t;
    int st = shrink(r->ctx, &t, pic, r->o.thumb_width);
    if (st)
        return st;
    unsigned char *png = NULL;
    size_t len = 0;
    st = sinew_png_encode(r->ctx, &png, &len, &t);
    if (!st) {
        /* Shown at the thumbnail width; small pictures are enlarged with crisp pixels. */
        int tw = r->o.thumb_width;
        int th = (int)(((int64_t)t.height * tw + t.width / 2) / t.width);
        sinew__sb_printf(b, "<img width=\"%d\" height=\"%d\"%s alt=\"", tw, th > 0 ? th : 1,
                         t.width < tw ? " class=\"up\"" : "");
        sinew__sb_esc(b, alt);
        sinew__sb_puts(b, "\" src=\"data:image/png;base64,");
        sinew__sb_base64(b, png, len);
        sinew__sb_puts(b, "\">");
    }
    sinew_ctx_dealloc(r->ctx, png);
    sinew_image_free(&t);
    return st;
}

static void emit_placeholder(sinew__sbuf *b, int tw, const char *why)
{
    sinew__sb_printf(
        b, "<div class=\"ph\" style=\"width:%dpx;height:%dpx\"><span>no picture</span><small>", tw,
        tw * 3 / 4);
    sinew__sb_esc(b, why);
    sinew__sb_puts(b, "</small></div>");
}

/* One figure cell: status st from building pic; warn on failure (except ENOMEM, which
 * is returned and ends the report). */
static int figure(sinew__report *r, sinew__sbuf *b, const sinew__report_pair *q,
                  const char *caption, int st, const sinew_image *pic, const char *missing)
{
    sinew__sb_puts(b, "<figure>");
    if (!st && pic && pic->data)
        st = emit_picture(r, b, pic, caption);
    if (st == SINEW_ENOMEM)
        return st;
    if (st) {
        const char *m = sinew_ctx_message(r->ctx);
        emit_placeholder(b, r->o.thumb_width, "unreadable");
        sinew__report_warn(r, q->name, caption, m && *m ? m : sinew_strerror(st));
        sinew_ctx_clear(r->ctx);
    } else if (!pic || !pic->data) {
        emit_placeholder(b, r->o.thumb_width, missing);
    }
    sinew__sb_puts(b, "<figcaption>");
    sinew__sb_esc(b, caption);
    sinew__sb_puts(b, "</figcaption></figure>");
    return SINEW_OK;
}

static const char *frame_path(const sinew__report *r, int k)
{
    return k >= 0 && (size_t)k < r->ncolour ? r->colour[k] : NULL;
}

/* Stereo runs (flow/runstereo.h): the disparity and depth of the pair's first frame,
 * each with a labelled colour bar (disparity 0 to its largest value, depth 0 to twice its
 * median, as `sinew stereo --check` draws them); nothing for other runs. */
static int stereo_figures(sinew__report *r, sinew__sbuf *b, const sinew__report_pair *q)
{
    static const char *const file[2] = {SINEW_RUN_STEREO_DISPARITY, SINEW_RUN_STEREO_DEPTH};
    static const char *const caption[2] = {"disparity", "depth"};
    static const char *const label[2] = {"DISPARITY (PX)", "DEPTH (M)"};
    sinew_ctx *ctx = r->ctx;
    const char *fp = frame_path(r, q->fi);
    char dir[4096], path[4200];
    if (!fp || sinew_run_stereo_frame_dir(ctx, dir, sizeof dir, r->rundir, fp)) {
        sinew_ctx_clear(ctx);
        return SINEW_OK;
    }
    snprintf(path, sizeof path, "%s/%s", dir, file[0]);
    if (!sinew__report_exists(path))
        return SINEW_OK;
    int rc = SINEW_OK;
    for (int k = 0; k < 2 && !rc; k++) {
        sinew_image img = {0}, small = {0}, pic = {0};
        snprintf(path, sizeof path, "%s/%s", dir, file[k]);
        int st = sinew__report_read_checked(ctx, &img, path, 1, 1, SINEW_F32);
        if (!st)
            st = shrink_map(ctx, &small, &img, r->o.thumb_width);
        double hi = 0, med = NAN;
        for (int y = 0; !st && k == 0 && y < small.height; y++)
            for (int x = 0; x < small.width; x++)
                hi = fmax(hi, sinew_image_row_f32(&small, y)[x]); /* fmax skips NaN */
        if (!st && k == 1 && !(st = sinew_depth_median(ctx, &med, NULL, &small)))
            hi = isfinite(med) ? 2 * med : 0;
        if (!st)
            st = sinew_draw_heatmap(ctx, &pic, &small, 0, hi, label[k], 1);
        rc = figure(r, b, q, caption[k], st, &pic, "no stereo map");
        sinew_image_free(&img);
        sinew_image_free(&small);
        sinew_image_free(&pic);
    }
    return rc;
}

int sinew__report_pictures(sinew__report *r, sinew__sbuf *b, const sinew__report_pair *q,
                           double fmax)
{
    sinew_ctx *ctx = r->ctx;
    char path[4096];
    sinew_image frame = {0}, rgb = {0}, pic = {0}, img = {0};
    int st, rc = SINEW_OK;

    sinew__sb_puts(b, "<article class=\"pair\"><h3>");
    sinew__sb_esc(b, q->name);
    if (q->fi >= 0)
        sinew__sb_printf(b, " <span class=\"muted\">frames %d &rarr; %d</span>", q->fi, q->fj);
    sinew__sb_puts(b, "</h3><div class=\"strip\">");

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
    if (sinew__report_find_flow(r, q, path, sizeof path)) {
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
    if (sinew__report_pair_path(r, q, SINEW_RUN_CONFIDENCE_FILE, path, sizeof path) &&
        sinew__report_exists(path)) {
        st = sinew__report_read_checked(ctx, &img, path, 1, 1, SINEW_F32);
        if (!st)
            st = sinew_draw_heatmap(ctx, &pic, &img, 0, 1, NULL, 0);
    }
    if ((rc = figure(r, b, q, "confidence", st, &pic, "no " SINEW_RUN_CONFIDENCE_FILE)))
        goto done;
    sinew_image_free(&pic);
    sinew_image_free(&img);

    /* reasons */
    st = SINEW_OK;
    if (sinew__report_pair_path(r, q, SINEW_RUN_MASK_FILE, path, sizeof path) &&
        sinew__report_exists(path)) {
        st = sinew__report_read_checked(ctx, &img, path, 0, 1, SINEW_U8);
        if (!st) {
            int same = frame.data && frame.width == img.width && frame.height == img.height;
            st = sinew_draw_reasons(ctx, &pic, same ? &frame : NULL, &img, 0);
        }
    }
    rc = figure(r, b, q, "rejection reasons", st, &pic, "no " SINEW_RUN_MASK_FILE);
    if (!rc)
        rc = stereo_figures(r, b, q);
done:
    sinew__sb_puts(b, "</div></article>\n");
    sinew_image_free(&frame);
    sinew_image_free(&rgb);
    sinew_image_free(&pic);
    sinew_image_free(&img);
    return rc;
}

void sinew__report_legend(sinew__sbuf *b, const sinew__report *r, double fmax)
{
    sinew_image wheel;
    sinew__sb_puts(b, "<div class=\"legend\">");
    if (!sinew_draw_wheel(r->ctx, &wheel, 48)) {
        unsigned char *png = NULL;
        size_t len = 0;
        if (!sinew_png_encode(r->ctx, &png, &len, &wheel)) {
            sinew__sb_puts(b, "<span><img width=\"24\" height=\"24\" alt=\"colour wheel\" "
                              "style=\"vertical-align:middle;margin-right:6px\" "
                              "src=\"data:image/png;base64,");
            sinew__sb_base64(b, png, len);
            sinew__sb_puts(b, "\">");
            sinew__sb_num(b, fmax, "flow: wheel radius %.3g px");
            sinew__sb_puts(b, "</span>");
        }
        sinew_ctx_dealloc(r->ctx, png);
        sinew_image_free(&wheel);
    }
    sinew_ctx_clear(r->ctx);
    sinew__sb_puts(
        b, "<span>confidence 0<span class=\"bar\" style=\"background:linear-gradient(90deg");
    for (int i = 0; i <= 8; i++) {
        uint8_t c[3];
        sinew_draw_colourmap(i / 8.0, c);
        sinew__sb_printf(b, ",rgb(%d,%d,%d)", c[0], c[1], c[2]);
    }
    sinew__sb_puts(b, ")\"></span>1</span>");
    for (int bit = 0; bit < SINEW_DRAW_REASONS; bit++) {
        uint8_t c[3];
        const char *name;
        sinew_draw_reason_style(bit, c, &name);
        sinew__sb_printf(b, "<span><span class=\"sw\" style=\"background:rgb(%d,%d,%d)\"></span>",
                         c[0], c[1], c[2]);
        sinew__sb_esc(b, name);
        sinew__sb_puts(b, "</span>");
    }
    sinew__sb_puts(b, "</div>\n");
}
