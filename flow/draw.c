/* SPDX-License-Identifier: MIT */
/* Drawing: the published flow colour wheel, our scalar colour map, reason colours,
 * line/arrow primitives and the pictures built from them.
 *
 * The wheel follows the Middlebury colour code cited in Baker et al. (IJCV 2011): 55
 * entries in six segments built with integer division, hue index from
 * atan2(-v, -u)/pi interpolated linearly between neighbouring entries, saturation
 * fading to white towards zero motion inside radius 1 and a 0.75 darkening beyond it.
 * Everything else (colour map "dusk", reason colours, legend layout, the dark
 * background) is our own design. Pixel loops run over rows in parallel; each output
 * pixel depends only on its inputs, so results are identical for any thread count.
 * Lines are drawn serially after the parallel fills. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "flow/draw.h"
#include "flow/check.h"
#include "flow/internal/base.h"
#include "flow/internal/parallel.h"

#define PI_D 3.14159265358979323846

/* Legend strip colours (our own palette, chosen for a dark room). */
static const uint8_t strip_bg[3] = {24, 27, 33};
static const uint8_t strip_text[3] = {214, 218, 224};
static const uint8_t strip_muted[3] = {150, 156, 166};
static const uint8_t dot_gray[3] = {200, 200, 200};

/* ---- colour wheel ---------------------------------------------------------------- */

/* Entry k of the wheel: segments RY 15, YG 6, GC 4, CB 11, BM 13, MR 6, integer
 * division as in the published construction. */
static void wheel_rgb(int k, int rgb[3])
{
    int i = k;
    if (i < 15) {
        rgb[0] = 255, rgb[1] = 255 * i / 15, rgb[2] = 0;
        return;
    }
    i -= 15;
    if (i < 6) {
        rgb[0] = 255 - 255 * i / 6, rgb[1] = 255, rgb[2] = 0;
        return;
    }
    i -= 6;
    if (i < 4) {
        rgb[0] = 0, rgb[1] = 255, rgb[2] = 255 * i / 4;
        return;
    }
    i -= 4;
    if (i < 11) {
        rgb[0] = 0, rgb[1] = 255 - 255 * i / 11, rgb[2] = 255;
        return;
    }
    i -= 11;
    if (i < 13) {
        rgb[0] = 255 * i / 13, rgb[1] = 0, rgb[2] = 255;
        return;
    }
    i -= 13;
    rgb[0] = 255, rgb[1] = 0, rgb[2] = 255 - 255 * i / 6;
}

int sinew_draw_wheel_entry(int k, uint8_t rgb[3])
{
    if (k < 0 || k >= SINEW_WHEEL_COLOURS || !rgb)
        return SINEW_EINVAL;
    int c[3];
    wheel_rgb(k, c);
    for (int b = 0; b < 3; b++)
        rgb[b] = (uint8_t)c[b];
    return SINEW_OK;
}

void sinew_draw_wheel_colour(double fx, double fy, uint8_t rgb[3])
{
    if (!isfinite(fx) || !isfinite(fy)) {
        rgb[0] = rgb[1] = rgb[2] = 0;
        return;
    }
    const int ncols = SINEW_WHEEL_COLOURS;
    double rad = sqrt(fx * fx + fy * fy);
    double a = atan2(-fy, -fx) / PI_D;
    double fk = (a + 1.0) / 2.0 * (ncols - 1);
    int k0 = (int)fk;
    if (k0 < 0)
        k0 = 0;
    if (k0 > ncols - 1)
        k0 = ncols - 1;
    int k1 = (k0 + 1) % ncols;
    double f = fk - k0;
    int c0[3], c1[3];
    wheel_rgb(k0, c0);
    wheel_rgb(k1, c1);
    for (int b = 0; b < 3; b++) {
        double col0 = c0[b] / 255.0;
        double col1 = c1[b] / 255.0;
        double col = (1 - f) * col0 + f * col1;
        if (rad <= 1)
            col = 1 - rad * (1 - col);
        else
            col *= 0.75;
        rgb[b] = (uint8_t)(int)(255.0 * col);
    }
}

static int check_flow(sinew_ctx *ctx, const sinew_image *flow, const char *what)
{
    if (!flow || !flow->data || flow->type != SINEW_F32 || flow->channels != 2)
        return sinew__fail(ctx, SINEW_EINVAL, "draw: %s must be a 2-channel float flow field",
                           what);
    return SINEW_OK;
}

/* Largest finite value per row (channels 1) or largest |(u, v)| (channels 2), then a
 * serial maximum: exact, so independent of the thread count. */
static int image_max(sinew_ctx *ctx, const sinew_image *img, double *out)
{
    double *rowmax = sinew__calloc(ctx, (size_t)img->height, sizeof *rowmax);
    if (!rowmax)
        return SINEW_ENOMEM;
    const int w = img->width, h = img->height, nc = img->channels;
    SINEW_PARALLEL_FOR(sinew_ctx_threads(ctx))
    for (int y = 0; y < h; y++) {
        const float *p = sinew_image_row_f32(img, y);
        double m = -INFINITY;
        for (int x = 0; x < w; x++) {
            double v;
            if (nc == 2) {
                double u = p[2 * x], vv = p[2 * x + 1];
                if (!isfinite(u) || !isfinite(vv))
                    continue;
                v = sqrt(u * u + vv * vv);
            } else {
                v = p[x];
                if (!isfinite(v))
                    continue;
            }
            if (v > m)
                m = v;
        }
        rowmax[y] = m;
    }
    double m = -INFINITY;
    for (int y = 0; y < h; y++)
        if (rowmax[y] > m)
            m = rowmax[y];
    sinew__free(ctx, rowmax);
    *out = m;
    return SINEW_OK;
}

int sinew_draw_max_magnitude(sinew_ctx *ctx, double *max_mag, const sinew_image *flow)
{
    if (!ctx || !max_mag)
        return SINEW_EINVAL;
    int st = check_flow(ctx, flow, "flow");
    if (st)
        return st;
    double m;
    st = image_max(ctx, flow, &m);
    if (st)
        return st;
    *max_mag = m > 0 ? m : 0;
    return SINEW_OK;
}

/* ---- colour map "dusk" ---------------------------------------------------------- */

/* Control points in sRGB bytes; L* rises 7.7 -> 24.6 -> 43.5 -> 65.2 -> 93.0
 * (checked in tests/unit/test_draw.c). Linear interpolation in sRGB between them. */
static const struct {
    double t;
    uint8_t c[3];
} dusk[5] = {
    {0.00, {18, 22, 40}},   /* dark slate blue */
    {0.25, {36, 58, 98}},   /* deep blue */
    {0.50, {42, 112, 122}}, /* teal */
    {0.75, {168, 160, 96}}, /* muted ochre */
    {1.00, {246, 234, 206}} /* pale cream */
};

void sinew_draw_colourmap(double t, uint8_t rgb[3])
{
    if (isnan(t)) {
        rgb[0] = rgb[1] = rgb[2] = SINEW_DRAW_NOVALUE_A;
        return;
    }
    if (t < 0)
        t = 0;
    if (t > 1)
        t = 1;
    int j = 0;
    while (j < 3 && t > dusk[j + 1].t)
        j++;
    double f = (t - dusk[j].t) / (dusk[j + 1].t - dusk[j].t);
    for (int b = 0; b < 3; b++) {
        double c0 = dusk[j].c[b], c1 = dusk[j + 1].c[b];
        rgb[b] = (uint8_t)(int)(c0 + (c1 - c0) * f + 0.5);
    }
}

/* ---- reasons --------------------------------------------------------------------- */

_Static_assert(SINEW_DRAW_REASONS == SINEW_MASK_NBITS, "one colour per mask bit");
_Static_assert(SINEW_MASK_OCCLUDED == 1u && SINEW_MASK_SATURATED == 1u << 5 &&
                   SINEW_MASK_UNKNOWN == 1u << 6 && SINEW_MASK_MISMATCH == 1u << 7,
               "reason colours follow the mask bit order of flow/check.h");

static const struct {
    uint8_t c[3];
    const char *name;
} reasons[SINEW_DRAW_REASONS] = {
    {{232, 112, 92}, "OCCLUDED"},        /* bit 0: occluded in frame 1 (coral) */
    {{92, 164, 232}, "OUTSIDE"},         /* bit 1: target outside the frame (sky blue) */
    {{236, 192, 72}, "MOTION BOUNDARY"}, /* bit 2: motion boundary (amber) */
    {{172, 124, 224}, "PHOTOMETRIC"},    /* bit 3: photometric error (violet) */
    {{150, 160, 172}, "IGNORED"},        /* bit 4: user ignore mask (slate gray) */
    {{112, 204, 152}, "SATURATED"},      /* bit 5: saturated pixels (mint) */
    {{226, 128, 190}, "UNKNOWN FLOW"},   /* bit 6: flow unknown here or at the target (rose) */
    {{196, 150, 108}, "FB MISMATCH"},    /* bit 7: inconsistent but visible (tan) */
};

int sinew_draw_reason_style(int bit, uint8_t rgb[3], const char **name)
{
    if (bit < 0 || bit >= SINEW_DRAW_REASONS)
        return SINEW_EINVAL;
    if (rgb)
        memcpy(rgb, reasons[bit].c, 3);
    if (name)
        *name = reasons[bit].name;
    return SINEW_OK;
}

/* ---- primitives ------------------------------------------------------------------ */

static int is_canvas(const sinew_image *img)
{
    return img && img->data && img->type == SINEW_U8 && img->channels == 3;
}

static void put(sinew_image *img, long x, long y, const uint8_t rgb[3])
{
    if (x < 0 || y < 0 || x >= img->width || y >= img->height)
        return;
    uint8_t *p = sinew_image_row_u8(img, (int)y) + 3 * x;
    p[0] = rgb[0], p[1] = rgb[1], p[2] = rgb[2];
}

static void fill_rect(sinew_image *img, long x0, long y0, long w, long h, const uint8_t rgb[3])
{
    for (long y = y0; y < y0 + h; y++)
        for (long x = x0; x < x0 + w; x++)
            put(img, x, y, rgb);
}

/* Liang-Barsky clip of the segment to [lo_x, hi_x] x [lo_y, hi_y]; 0 if outside. */
static int clip_segment(double *x0, double *y0, double *x1, double *y1, double hi_x, double hi_y)
{
    const double lo = -1.0;
    double t0 = 0, t1 = 1, dx = *x1 - *x0, dy = *y1 - *y0;
    double p[4] = {-dx, dx, -dy, dy};
    double q[4] = {*x0 - lo, hi_x - *x0, *y0 - lo, hi_y - *y0};
    for (int i = 0; i < 4; i++) {
        if (p[i] == 0) {
            if (q[i] < 0)
                return 0;
            continue;
        }
        double r = q[i] / p[i];
        if (p[i] < 0) {
            if (r > t1)
                return 0;
            if (r > t0)
                t0 = r;
        } else {
            if (r < t0)
                return 0;
            if (r < t1)
                t1 = r;
        }
    }
    double ax = *x0 + t0 * dx, ay = *y0 + t0 * dy;
    double bx = *x0 + t1 * dx, by = *y0 + t1 * dy;
    *x0 = ax, *y0 = ay, *x1 = bx, *y1 = by;
    return 1;
}

void sinew_draw_line(sinew_image *img, double x0, double y0, double x1, double y1,
                     const uint8_t rgb[3])
{
    if (!is_canvas(img) || !rgb || !isfinite(x0) || !isfinite(y0) || !isfinite(x1) || !isfinite(y1))
        return;
    /* (a span beyond the double range makes the clipped ends NaN: nothing to draw) */
    if (!clip_segment(&x0, &y0, &x1, &y1, img->width, img->height) || !isfinite(x0) ||
        !isfinite(y0) || !isfinite(x1) || !isfinite(y1))
        return;
    long ax = lround(x0), ay = lround(y0), bx = lround(x1), by = lround(y1);
    long dx = labs(bx - ax), dy = -labs(by - ay);
    long sx = ax < bx ? 1 : -1, sy = ay < by ? 1 : -1;
    long err = dx + dy;
    for (;;) {
        put(img, ax, ay, rgb);
        if (ax == bx && ay == by)
            break;
        long e2 = 2 * err;
        if (e2 >= dy) {
            err += dy;
            ax += sx;
        }
        if (e2 <= dx) {
            err += dx;
            ay += sy;
        }
    }
}

void sinew_draw_line_arrow(sinew_image *img, double x0, double y0, double x1, double y1,
                           const uint8_t rgb[3])
{
    if (!is_canvas(img) || !rgb)
        return;
    sinew_draw_line(img, x0, y0, x1, y1, rgb);
    double dx = x1 - x0, dy = y1 - y0, len = sqrt(dx * dx + dy * dy);
    if (!(len > 1e-9) || !isfinite(len))
        return;
    double hl = fmin(0.35 * len, 6.0);
    double bx = -dx / len, by = -dy / len;
    const double ang = 28.0 * PI_D / 180.0;
    for (int s = -1; s <= 1; s += 2) {
        double c = cos(ang), sn = s * sin(ang);
        double hx = c * bx - sn * by, hy = sn * bx + c * by;
        sinew_draw_line(img, x1, y1, x1 + hl * hx, y1 + hl * hy, rgb);
    }
}

/* ---- canvases, frames, legend strips ------------------------------------------- */

/* Font scale for a legend under a picture `w` pixels wide. */
static int legend_scale(int w)
{
    return w >= 900 ? 3 : w >= 480 ? 2 : 1;
}

/* Allocate a w x (h + strip) canvas; the strip rows are filled with the strip colour. */
static int canvas_new(sinew_ctx *ctx, sinew_image *out, int w, int h, int strip)
{
    int64_t total = (int64_t)h + strip;
    if (total > INT32_MAX)
        return sinew__fail(ctx, SINEW_ELIMIT, "draw: picture too tall");
    int st = sinew_image_alloc(ctx, out, w, (int)total, 3, SINEW_U8);
    if (st)
        return st;
    fill_rect(out, 0, h, w, strip, strip_bg);
    return SINEW_OK;
}

static int check_frame(sinew_ctx *ctx, const sinew_image *frame, int w, int h, const char *what)
{
    if (!frame)
        return SINEW_OK;
    if (!frame->data || (frame->type != SINEW_U8 && frame->type != SINEW_U16) ||
        frame->channels < 1 || frame->channels > 4)
        return sinew__fail(ctx, SINEW_EINVAL, "draw: %s must be an 8- or 16-bit image", what);
    if (w > 0 && (frame->width != w || frame->height != h))
        return sinew__fail(ctx, SINEW_ESIZE, "draw: %s is %dx%d, expected %dx%d", what,
                           frame->width, frame->height, w, h);
    return SINEW_OK;
}

/* Dimmed gray of frame pixel x in row y (see flow/draw.h). */
static uint8_t frame_dim(const sinew_image *f, int x, int y)
{
    int c[3];
    int nc = f->channels;
    for (int b = 0; b < (nc >= 3 ? 3 : 1); b++) {
        size_t i = (size_t)x * nc + b;
        c[b] =
            f->type == SINEW_U8 ? sinew_image_row_u8(f, y)[i] : sinew_image_row_u16(f, y)[i] / 257;
    }
    int g = nc >= 3 ? (77 * c[0] + 150 * c[1] + 29 * c[2] + 128) >> 8 : c[0];
    return (uint8_t)(20 + (140 * g + 127) / 255);
}

/* Paint the dimmed frame (or black) into rows 0..fh-1, columns x0.. of the canvas. */
static void paint_frame(sinew_ctx *ctx, sinew_image *out, const sinew_image *frame, int x0)
{
    (void)ctx; /* only the thread count is read, and not at all without OpenMP */
    if (!frame)
        return;
    const int w = frame->width, h = frame->height;
    SINEW_PARALLEL_FOR(sinew_ctx_threads(ctx))
    for (int y = 0; y < h; y++) {
        uint8_t *o = sinew_image_row_u8(out, y) + 3 * (size_t)x0;
        for (int x = 0; x < w; x++) {
            uint8_t g = frame_dim(frame, x, y);
            o[3 * x] = o[3 * x + 1] = o[3 * x + 2] = g;
        }
    }
}

/* Compact number for labels. */
static void fmt_num(char *buf, size_t n, double v)
{
    snprintf(buf, n, "%.3g", v);
}

/* The wheel disc of diameter `size` with top-left (x0, y0); pixels outside the disc and
 * its out-of-range ring are left as they are. */
static void paint_wheel(sinew_image *img, int x0, int y0, int size)
{
    double c = (size - 1) / 2.0;
    double r = size / 2.0 - 2.0;
    if (r < 1)
        r = 1;
    double ring = 1.0 + 2.0 / r;
    for (int y = 0; y < size; y++)
        for (int x = 0; x < size; x++) {
            double dx = (x - c) / r, dy = (y - c) / r;
            if (dx * dx + dy * dy > ring * ring)
                continue;
            uint8_t rgb[3];
            sinew_draw_wheel_colour(dx, dy, rgb);
            put(img, x0 + x, y0 + y, rgb);
        }
}

/* ---- pictures -------------------------------------------------------------------- */

static int flow_strip_height(int s)
{
    return 32 * s + 12 * s;
}

int sinew_draw_flow(sinew_ctx *ctx, sinew_image *out, const sinew_image *flow, double max_mag,
                    int legend)
{
    if (!ctx || !out)
        return SINEW_EINVAL;
    memset(out, 0, sizeof *out);
    int st = check_flow(ctx, flow, "flow");
    if (st)
        return st;
    if (!isfinite(max_mag) || max_mag <= 0) {
        st = sinew_draw_max_magnitude(ctx, &max_mag, flow);
        if (st)
            return st;
        if (max_mag <= 0)
            max_mag = 1;
    }
    const int w = flow->width, h = flow->height, s = legend_scale(w);
    st = canvas_new(ctx, out, w, h, legend ? flow_strip_height(s) : 0);
    if (st)
        return st;
    const double m = max_mag;
    SINEW_PARALLEL_FOR(sinew_ctx_threads(ctx))
    for (int y = 0; y < h; y++) {
        const float *p = sinew_image_row_f32(flow, y);
        uint8_t *o = sinew_image_row_u8(out, y);
        for (int x = 0; x < w; x++)
            sinew_draw_wheel_colour(p[2 * x] / m, p[2 * x + 1] / m, o + 3 * x);
    }
    if (legend) {
        int pad = 6 * s, d = 32 * s;
        paint_wheel(out, pad, h + pad, d);
        char num[32], text[64];
        fmt_num(num, sizeof num, max_mag);
        snprintf(text, sizeof text, "WHEEL RADIUS %s PX", num);
        sinew_draw_text(out, 2 * pad + d, h + pad + (d - 8 * s) / 2, s, text, strip_text);
    }
    return SINEW_OK;
}

int sinew_draw_wheel(sinew_ctx *ctx, sinew_image *out, int size)
{
    if (!ctx || !out)
        return SINEW_EINVAL;
    memset(out, 0, sizeof *out);
    if (size < 16 || size > 16384)
        return sinew__fail(ctx, SINEW_EINVAL, "draw: wheel size %d outside 16..16384", size);
    int st = canvas_new(ctx, out, size, 0 + size, 0);
    if (st)
        return st;
    fill_rect(out, 0, 0, size, size, strip_bg);
    paint_wheel(out, 0, 0, size);
    return SINEW_OK;
}

int sinew_draw_arrows(sinew_ctx *ctx, sinew_image *out, const sinew_image *frame,
                      const sinew_image *flow, int step, double scale, int legend)
{
    if (!ctx || !out)
        return SINEW_EINVAL;
    memset(out, 0, sizeof *out);
    int st = check_flow(ctx, flow, "flow");
    if (!st)
        st = check_frame(ctx, frame, flow->width, flow->height, "frame");
    if (st)
        return st;
    if (step < 2)
        return sinew__fail(ctx, SINEW_EINVAL, "draw: arrow grid step %d is below 2", step);
    if (!isfinite(scale) || scale <= 0)
        return sinew__fail(ctx, SINEW_EINVAL, "draw: arrow scale must be positive");
    const int w = flow->width, h = flow->height, s = legend_scale(w);
    st = canvas_new(ctx, out, w, h, legend ? 20 * s : 0);
    if (st)
        return st;
    if (frame)
        paint_frame(ctx, out, frame, 0);
    else
        fill_rect(out, 0, 0, w, h, strip_bg);
    for (int y = step / 2; y < h; y += step) {
        const float *p = sinew_image_row_f32(flow, y);
        for (int x = step / 2; x < w; x += step) {
            double u = p[2 * x], v = p[2 * x + 1];
            if (!isfinite(u) || !isfinite(v))
                continue;
            double len = sqrt(u * u + v * v) * scale;
            if (!(len >= 0.5)) {
                put(out, x, y, dot_gray);
                continue;
            }
            uint8_t rgb[3];
            double r = sqrt(u * u + v * v);
            sinew_draw_wheel_colour(u / r, v / r, rgb);
            sinew_draw_line_arrow(out, x, y, x + scale * u, y + scale * v, rgb);
        }
    }
    if (legend) {
        char num[32], text[96];
        fmt_num(num, sizeof num, scale);
        snprintf(text, sizeof text, "ONE ARROW PER %d PX, LENGTH X %s", step, num);
        sinew_draw_text(out, 6 * s, h + 6 * s, s, text, strip_text);
    }
    return SINEW_OK;
}

/* Height of the heatmap legend: pad, label, gap, bar, gap, ticks, pad. */
static int heat_strip_height(int s)
{
    return 6 * s + 8 * s + 4 * s + 10 * s + 4 * s + 8 * s + 6 * s;
}

static void paint_heat_legend(sinew_image *out, int y0, int s, double lo, double hi,
                              const char *label)
{
    const int w = out->width, pad = 6 * s;
    int y = y0 + pad;
    if (label)
        sinew_draw_text(out, pad, y, s, label, strip_text);
    y += 8 * s + 4 * s;
    int x0 = pad, x1 = w - 1 - pad;
    if (x1 <= x0)
        x0 = 0, x1 = w - 1;
    for (int x = x0; x <= x1; x++) {
        uint8_t rgb[3];
        sinew_draw_colourmap(x1 > x0 ? (double)(x - x0) / (x1 - x0) : 0.0, rgb);
        fill_rect(out, x, y, 1, 10 * s, rgb);
    }
    y += 10 * s + 4 * s;
    char a[32], m[32], b[32];
    fmt_num(a, sizeof a, lo);
    fmt_num(m, sizeof m, 0.5 * (lo + hi));
    fmt_num(b, sizeof b, hi);
    sinew_draw_text(out, x0, y, s, a, strip_muted);
    sinew_draw_text(out, (x0 + x1) / 2 - sinew_draw_text_width(m, s) / 2, y, s, m, strip_muted);
    sinew_draw_text(out, x1 + 1 - sinew_draw_text_width(b, s) + s, y, s, b, strip_muted);
}

int sinew_draw_heatmap(sinew_ctx *ctx, sinew_image *out, const sinew_image *map, double lo,
                       double hi, const char *label, int legend)
{
    if (!ctx || !out)
        return SINEW_EINVAL;
    memset(out, 0, sizeof *out);
    if (!map || !map->data || map->type != SINEW_F32 || map->channels != 1)
        return sinew__fail(ctx, SINEW_EINVAL, "draw: map must be a 1-channel float image");
    if (!isfinite(lo) || !isfinite(hi) || hi <= lo) {
        double m;
        int st = image_max(ctx, map, &m);
        if (st)
            return st;
        lo = 0;
        hi = m > 0 ? m : 1;
    }
    const int w = map->width, h = map->height, s = legend_scale(w);
    int st = canvas_new(ctx, out, w, h, legend ? heat_strip_height(s) : 0);
    if (st)
        return st;
    const double l = lo, span = hi - lo;
    SINEW_PARALLEL_FOR(sinew_ctx_threads(ctx))
    for (int y = 0; y < h; y++) {
        const float *p = sinew_image_row_f32(map, y);
        uint8_t *o = sinew_image_row_u8(out, y);
        for (int x = 0; x < w; x++) {
            if (isnan(p[x])) {
                uint8_t g = ((x >> 2) + (y >> 2)) & 1 ? SINEW_DRAW_NOVALUE_B : SINEW_DRAW_NOVALUE_A;
                o[3 * x] = o[3 * x + 1] = o[3 * x + 2] = g;
            } else {
                sinew_draw_colourmap((p[x] - l) / span, o + 3 * x);
            }
        }
    }
    if (legend)
        paint_heat_legend(out, h, s, lo, hi, label);
    return SINEW_OK;
}

int sinew_draw_epe(sinew_ctx *ctx, sinew_image *out, const sinew_image *flow, const sinew_image *gt,
                   double max_epe, int legend)
{
    if (!ctx || !out)
        return SINEW_EINVAL;
    memset(out, 0, sizeof *out);
    int st = check_flow(ctx, flow, "flow");
    if (!st)
        st = check_flow(ctx, gt, "ground truth");
    if (st)
        return st;
    if (flow->width != gt->width || flow->height != gt->height)
        return sinew__fail(ctx, SINEW_ESIZE, "draw: flow is %dx%d but ground truth is %dx%d",
                           flow->width, flow->height, gt->width, gt->height);
    sinew_image epe;
    st = sinew_image_alloc(ctx, &epe, flow->width, flow->height, 1, SINEW_F32);
    if (st)
        return st;
    const int w = flow->width, h = flow->height;
    SINEW_PARALLEL_FOR(sinew_ctx_threads(ctx))
    for (int y = 0; y < h; y++) {
        const float *a = sinew_image_row_f32(flow, y), *b = sinew_image_row_f32(gt, y);
        float *e = sinew_image_row_f32(&epe, y);
        for (int x = 0; x < w; x++) {
            double du = (double)a[2 * x] - b[2 * x], dv = (double)a[2 * x + 1] - b[2 * x + 1];
            e[x] = isfinite(du) && isfinite(dv) ? (float)sqrt(du * du + dv * dv) : NAN;
        }
    }
    double lo = 0, hi = max_epe > 0 && isfinite(max_epe) ? max_epe : 0;
    st = sinew_draw_heatmap(ctx, out, &epe, lo, hi, "ENDPOINT ERROR (PX)", legend);
    sinew_image_free(&epe);
    return st;
}

/* Lay out the reason swatches in rows; draws when img is non-NULL. Returns the height. */
static int reason_legend(sinew_image *img, int w, int y0, int s)
{
    int pad = 6 * s, x = pad, y = y0 + pad, line = 10 * s;
    for (int b = 0; b < SINEW_DRAW_REASONS; b++) {
        char text[32];
        snprintf(text, sizeof text, "%u %s", 1u << b, reasons[b].name); /* mask value, name */
        int item = 8 * s + 4 * s + sinew_draw_text_width(text, s) + 10 * s;
        if (x > pad && x + item > w) {
            x = pad;
            y += line;
        }
        if (img) {
            fill_rect(img, x, y, 8 * s, 7 * s, reasons[b].c);
            sinew_draw_text(img, x + 12 * s, y, s, text, strip_text);
        }
        x += item;
    }
    return y + line - y0 + pad - 2 * s;
}

int sinew_draw_reasons(sinew_ctx *ctx, sinew_image *out, const sinew_image *frame,
                       const sinew_image *mask, int legend)
{
    if (!ctx || !out)
        return SINEW_EINVAL;
    memset(out, 0, sizeof *out);
    if (!mask || !mask->data || mask->type != SINEW_U8 || mask->channels != 1)
        return sinew__fail(ctx, SINEW_EINVAL, "draw: mask must be an 8-bit 1-channel image");
    int st = check_frame(ctx, frame, mask->width, mask->height, "frame");
    if (st)
        return st;
    const int w = mask->width, h = mask->height, s = legend_scale(w);
    st = canvas_new(ctx, out, w, h, legend ? reason_legend(NULL, w, 0, s) : 0);
    if (st)
        return st;
    paint_frame(ctx, out, frame, 0);
    SINEW_PARALLEL_FOR(sinew_ctx_threads(ctx))
    for (int y = 0; y < h; y++) {
        const uint8_t *m = sinew_image_row_u8(mask, y);
        uint8_t *o = sinew_image_row_u8(out, y);
        for (int x = 0; x < w; x++) {
            unsigned bits = m[x];
            if (!bits)
                continue;
            const uint8_t *c = reasons[__builtin_ctz(bits)].c;
            for (int b = 0; b < 3; b++)
                o[3 * x + b] = (uint8_t)((7 * c[b] + 3 * o[3 * x + b] + 5) / 10);
        }
    }
    if (legend)
        reason_legend(out, w, h, s);
    return SINEW_OK;
}

static void dot(sinew_image *img, double x, double y, const uint8_t rgb[3])
{
    /* far outside (or not finite): nothing shows, and lround would be out of range */
    if (!(x > -2 && y > -2 && x < img->width + 2.0 && y < img->height + 2.0))
        return;
    long cx = lround(x), cy = lround(y);
    fill_rect(img, cx - 1, cy - 1, 3, 3, rgb);
}

int sinew_draw_matches(sinew_ctx *ctx, sinew_image *out, const sinew_image *frame0,
                       const sinew_image *frame1, const sinew_match_table *t, size_t count,
                       int legend)
{
    if (!ctx || !out)
        return SINEW_EINVAL;
    memset(out, 0, sizeof *out);
    if (!frame0 || !frame1)
        return sinew__fail(ctx, SINEW_EINVAL, "draw: matches need both frames");
    int st = check_frame(ctx, frame0, 0, 0, "frame 0");
    if (!st)
        st = check_frame(ctx, frame1, 0, 0, "frame 1");
    if (st)
        return st;
    if (!t || (t->rows > 0 && !t->data) || t->cols < 1 || count < 1)
        return sinew__fail(ctx, SINEW_EINVAL, "draw: empty match table or count");
    const int col[5] = {t->u0, t->v0, t->u1, t->v1, t->weight};
    for (int i = 0; i < 5; i++)
        if ((i < 4 || col[i] >= 0) && (col[i] < 0 || (size_t)col[i] >= t->cols))
            return sinew__fail(ctx, SINEW_EINVAL, "draw: match column %d outside the %zu columns",
                               col[i], t->cols);
    const int w0 = frame0->width, w1 = frame1->width;
    const int h = frame0->height > frame1->height ? frame0->height : frame1->height;
    int64_t wt = (int64_t)w0 + SINEW_DRAW_GUTTER + w1;
    if (wt > INT32_MAX)
        return sinew__fail(ctx, SINEW_ELIMIT, "draw: side-by-side picture too wide");
    const int w = (int)wt, s = legend_scale(w);
    st = canvas_new(ctx, out, w, h, legend ? 20 * s : 0);
    if (st)
        return st;
    fill_rect(out, 0, 0, w, h, strip_bg);
    paint_frame(ctx, out, frame0, 0);
    paint_frame(ctx, out, frame1, w0 + SINEW_DRAW_GUTTER);
    const double off = w0 + SINEW_DRAW_GUTTER;
    size_t n = t->rows < count ? t->rows : count, drawn = 0;
    for (size_t j = 0; j < n; j++) {
        size_t r;
        if (t->rows <= count)
            r = j;
        else {
            size_t prod;
            r = sinew__mul_size(j, t->rows, &prod) ? (size_t)((double)j * t->rows / count)
                                                   : prod / count;
        }
        const float *row = t->data + r * t->cols;
        double u0 = row[t->u0], v0 = row[t->v0], u1 = row[t->u1], v1 = row[t->v1];
        if (!isfinite(u0) || !isfinite(v0) || !isfinite(u1) || !isfinite(v1))
            continue;
        if (t->weight >= 0 && !(row[t->weight] > 0))
            continue;
        double du = u1 - u0, dv = v1 - v0, len = sqrt(du * du + dv * dv);
        uint8_t rgb[3];
        if (len > 1e-9)
            sinew_draw_wheel_colour(du / len, dv / len, rgb);
        else
            memcpy(rgb, dot_gray, 3);
        sinew_draw_line(out, u0, v0, off + u1, v1, rgb);
        dot(out, u0, v0, rgb);
        dot(out, off + u1, v1, rgb);
        drawn++;
    }
    if (legend) {
        char text[96];
        snprintf(text, sizeof text, "%zu OF %zu MATCHES SHOWN", drawn, t->rows);
        sinew_draw_text(out, 6 * s, h + 6 * s, s, text, strip_text);
    }
    return SINEW_OK;
}
