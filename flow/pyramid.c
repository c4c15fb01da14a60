/* SPDX-License-Identifier: MIT */
/* Image pyramids and the small planar-float kernels the estimator is built from:
 * conversion of 8/16-bit frames to [0, 1] floats, Gaussian blur, 5-point derivatives,
 * 2x2 halving, bilinear flow upsampling, bilinear warping and median filtering.
 *
 * Layout: every plane is row-major float with stride == width. Borders are clamped
 * (replicate). Each kernel splits its work over rows with a static schedule and each
 * output element is written by one thread in a fixed order, so the result does not
 * depend on the thread count. */
#include <math.h>
#include <string.h>

#include "flow/internal/flowimpl.h"
#include "flow/internal/parallel.h"

/* Gaussian blur before each 2x2 box halving. Levels 1 and coarser are already band-limited
 * by the blur and box that made them, so 0.6 px more suffices there (common practice). The
 * frames themselves can hold detail up to the pixel pitch (Urban3's striped facades alias
 * into false patterns at the coarser levels), so the first halving blurs with 0.9 px.
 * Chosen on the Middlebury training pairs (docs/benchmarks.md: mean EPE of the accurate
 * preset 0.268 -> 0.255, balanced 0.342 -> 0.317, fast 0.582 -> 0.563; 0.8 and 1.0 were
 * within 0.001 of 0.9; 0.9 at every level gave 0.255 too but FlyingChairs 2.45). */
#define PYR_SIGMA0 0.9f
#define PYR_SIGMA 0.6f

void sinew__level_size(int w, int h, int level, int *lw, int *lh)
{
    for (int i = 0; i < level; i++) {
        w = (w + 1) / 2;
        h = (h + 1) / 2;
    }
    *lw = w;
    *lh = h;
}

/* Planes per level: channels (+1 luminance for colour). Gradients are not stored: the
 * estimator computes them for the level it works on (flow/estimate.c). */
static int planes_per_level(int channels)
{
    return channels + (channels > 1 ? 1 : 0);
}

size_t sinew__pyramid_floats(int w, int h, int channels, int levels)
{
    size_t n = 0;
    for (int l = 0; l < levels; l++) {
        int lw, lh;
        sinew__level_size(w, h, l, &lw, &lh);
        /* round each plane up to 16 floats so planes stay 64-byte aligned */
        size_t plane = ((size_t)lw * (size_t)lh + 15u) & ~(size_t)15u;
        n += plane * (size_t)planes_per_level(channels);
    }
    return n;
}

void sinew__pyramid_layout(sinew__pyramid *p, float *mem, int w, int h, int channels, int levels)
{
    memset(p, 0, sizeof *p);
    p->levels = levels;
    p->channels = channels;
    for (int l = 0; l < levels; l++) {
        sinew__level *lv = &p->lv[l];
        sinew__level_size(w, h, l, &lv->w, &lv->h);
        size_t plane = ((size_t)lv->w * (size_t)lv->h + 15u) & ~(size_t)15u;
        for (int c = 0; c < channels; c++) {
            lv->ch[c] = mem;
            mem += plane;
        }
        if (channels > 1) {
            lv->lum = mem;
            mem += plane;
        } else {
            lv->lum = lv->ch[0];
        }
    }
}

/* Convert the frame to planar [0, 1] floats: gray (1-2 channels) or RGB (3-4). */
static void convert_frame(sinew__level *l, int channels, const sinew_image *f, int nt)
{
    (void)nt; /* unused without OpenMP */
    int w = f->width, h = f->height, fc = f->channels;
    float scale = f->type == SINEW_U8 ? 1.0f / 255.0f : 1.0f / 65535.0f;
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++) {
        size_t o = (size_t)y * (size_t)w;
        float vals[4];
        for (int x = 0; x < w; x++) {
            for (int c = 0; c < fc; c++)
                vals[c] = f->type == SINEW_U8 ? (float)sinew_image_row_u8(f, y)[x * fc + c]
                                              : (float)sinew_image_row_u16(f, y)[x * fc + c];
            if (fc >= 3) {
                /* ITU-R BT.601 luma weights */
                l->lum[o + x] = (0.299f * vals[0] + 0.587f * vals[1] + 0.114f * vals[2]) * scale;
                if (channels > 1)
                    for (int c = 0; c < 3; c++)
                        l->ch[c][o + x] = vals[c] * scale;
            } else {
                l->lum[o + x] = vals[0] * scale;
            }
        }
    }
}

/* Normalised Gaussian taps k[0 .. 2r] for sigma; returns r (1..7). */
static int blur_taps(float k[16], float sigma)
{
    int r = (int)ceilf(3.0f * sigma);
    if (r < 1)
        r = 1;
    if (r > 7)
        r = 7;
    float sum = 0.f;
    for (int i = -r; i <= r; i++) {
        k[i + r] = expf(-(float)(i * i) / (2.f * sigma * sigma));
        sum += k[i + r];
    }
    for (int i = 0; i <= 2 * r; i++)
        k[i] /= sum;
    return r;
}

/* Vertical pass of row y (clamped rows): unit-stride inner loop over x. */
static inline void blur_vrow(float *restrict out, const float *src, int w, int h, int y,
                             const float *k, int r)
{
    for (int x = 0; x < w; x++)
        out[x] = 0.f;
    for (int i = -r; i <= r; i++) {
        int yy = y + i < 0 ? 0 : (y + i >= h ? h - 1 : y + i);
        const float *restrict in = src + (size_t)yy * (size_t)w;
        float kk = k[i + r];
        for (int x = 0; x < w; x++)
            out[x] += kk * in[x];
    }
}

/* Horizontal pass of one row (clamped columns). */
static inline void blur_hrow(float *restrict out, const float *restrict in, int w, const float *k,
                             int r)
{
    for (int x = 0; x < w; x++) {
        float s = 0.f;
        if (x >= r && x < w - r) {
            for (int i = -r; i <= r; i++)
                s += k[i + r] * in[x + i];
        } else {
            for (int i = -r; i <= r; i++) {
                int xx = x + i < 0 ? 0 : (x + i >= w ? w - 1 : x + i);
                s += k[i + r] * in[xx];
            }
        }
        out[x] = s;
    }
}

/* Row of the 2x2 box halving from source rows a and b (b = a on an odd height's last
 * row), clamped at an odd width's last column. */
static inline void halve_row(float *restrict o, const float *a, const float *b, int sw, int dw)
{
    for (int x = 0; x < dw; x++) {
        int x0 = 2 * x, x1 = 2 * x + 1 < sw ? 2 * x + 1 : sw - 1;
        o[x] = 0.25f * ((a[x0] + a[x1]) + (b[x0] + b[x1]));
    }
}

/* Each level in one parallel loop over its rows, all planes at once: output row y blurs
 * (vertical, then horizontal) exactly the two source rows it averages, which no other
 * output row uses, so the temporaries are rows 2y and 2y + 1 of two whole-level planes
 * in tmp, and the bits are those of sinew__blur then sinew__halve per plane. A busy
 * machine then sees one join per level instead of three per plane and level. */
void sinew__pyramid_build(sinew__pyramid *p, const sinew_image *frame, float *tmp, int nt)
{
    sinew__level *l0 = &p->lv[0];
    convert_frame(l0, p->channels, frame, nt);
    int nplanes = p->channels > 1 ? p->channels + 1 : 1;
    for (int l = 1; l < p->levels; l++) {
        sinew__level *lv = &p->lv[l], *up = &p->lv[l - 1];
        int sw = up->w, sh = up->h, dw = lv->w, dh = lv->h;
        size_t n = (size_t)sw * (size_t)sh;
        float *ht = tmp, *vt = tmp + n;
        float k[16];
        /* anti-alias before the 2x2 box (see PYR_SIGMA0) */
        int r = blur_taps(k, l == 1 ? PYR_SIGMA0 : PYR_SIGMA);
        const float *src[SINEW__MAX_CH + 1];
        float *dst[SINEW__MAX_CH + 1];
        for (int c = 0; c < nplanes; c++) {
            int colour = c < p->channels && p->channels > 1;
            src[c] = colour ? up->ch[c] : up->lum;
            dst[c] = colour ? lv->ch[c] : lv->lum;
        }
        SINEW_PARALLEL_FOR(nt)
        for (int y = 0; y < dh; y++) {
            int y0 = 2 * y, y1 = 2 * y + 1 < sh ? 2 * y + 1 : sh - 1;
            float *h0 = ht + (size_t)y0 * (size_t)sw, *h1 = ht + (size_t)y1 * (size_t)sw;
            for (int c = 0; c < nplanes; c++) {
                for (int yy = y0; yy <= y1; yy++) {
                    float *v = vt + (size_t)yy * (size_t)sw;
                    blur_vrow(v, src[c], sw, sh, yy, k, r);
                    blur_hrow(ht + (size_t)yy * (size_t)sw, v, sw, k, r);
                }
                halve_row(dst[c] + (size_t)y * (size_t)dw, h0, h1, sw, dw);
            }
        }
    }
}

void sinew__gradient_row(float *gx, float *gy, const float *src, int w, int h, int y)
{
    const float c1 = 8.0f / 12.0f, c2 = 1.0f / 12.0f;
    const float *restrict r = src + (size_t)y * (size_t)w;
    if (gx) {
        float *restrict o = gx + (size_t)y * (size_t)w;
        for (int x = 0; x < w; x++) {
            if (x >= 2 && x < w - 2) {
                o[x] = c1 * (r[x + 1] - r[x - 1]) - c2 * (r[x + 2] - r[x - 2]);
            } else {
                int xm1 = x - 1 < 0 ? 0 : x - 1, xm2 = x - 2 < 0 ? 0 : x - 2;
                int xp1 = x + 1 >= w ? w - 1 : x + 1, xp2 = x + 2 >= w ? w - 1 : x + 2;
                o[x] = c1 * (r[xp1] - r[xm1]) - c2 * (r[xp2] - r[xm2]);
            }
        }
    }
    if (gy) {
        int ym1 = y - 1 < 0 ? 0 : y - 1, ym2 = y - 2 < 0 ? 0 : y - 2;
        int yp1 = y + 1 >= h ? h - 1 : y + 1, yp2 = y + 2 >= h ? h - 1 : y + 2;
        const float *restrict a1 = src + (size_t)yp1 * (size_t)w;
        const float *restrict b1 = src + (size_t)ym1 * (size_t)w;
        const float *restrict a2 = src + (size_t)yp2 * (size_t)w;
        const float *restrict b2 = src + (size_t)ym2 * (size_t)w;
        float *restrict o = gy + (size_t)y * (size_t)w;
        for (int x = 0; x < w; x++)
            o[x] = c1 * (a1[x] - b1[x]) - c2 * (a2[x] - b2[x]);
    }
}

void sinew__gradient(float *gx, float *gy, const float *src, int w, int h, int nt)
{
    (void)nt; /* unused without OpenMP */
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++)
        sinew__gradient_row(gx, gy, src, w, h, y);
}

void sinew__flow_resize(sinew_image *out, const float *su, const float *sv, int sw, int sh, int nt)
{
    (void)nt; /* unused without OpenMP */
    int dw = out->width, dh = out->height;
    float fx = (float)sw / (float)dw, fy = (float)sh / (float)dh;
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < dh; y++) {
        float ys = ((float)y + 0.5f) * fy - 0.5f;
        float *row = sinew_image_row_f32(out, y);
        for (int x = 0; x < dw; x++) {
            float xs = ((float)x + 0.5f) * fx - 0.5f;
            row[2 * x] = sinew__sample(su, sw, sh, xs, ys) / fx;
            row[2 * x + 1] = sinew__sample(sv, sw, sh, xs, ys) / fy;
        }
    }
}

void sinew__flow_up(float *du, float *dv, int dw, int dh, const float *su, const float *sv, int sw,
                    int sh, int nt)
{
    (void)nt; /* unused without OpenMP */
    /* level l+1 pixel X covers level-l pixels 2X, 2X+1: centre 2X + 0.5 */
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < dh; y++) {
        float ys = ((float)y - 0.5f) * 0.5f;
        for (int x = 0; x < dw; x++) {
            float xs = ((float)x - 0.5f) * 0.5f;
            size_t o = (size_t)y * (size_t)dw + (size_t)x;
            du[o] = 2.0f * sinew__sample(su, sw, sh, xs, ys);
            dv[o] = 2.0f * sinew__sample(sv, sw, sh, xs, ys);
        }
    }
}

/* Keys cubic convolution weights (a = -0.5) for fractional offset t in [0, 1). */
static inline void cubic_weights(float t, float *k)
{
    float t2 = t * t, t3 = t2 * t;
    k[0] = -0.5f * t3 + t2 - 0.5f * t;
    k[1] = 1.5f * t3 - 2.5f * t2 + 1.0f;
    k[2] = -1.5f * t3 + 2.0f * t2 + 0.5f * t;
    k[3] = 0.5f * t3 - 0.5f * t2;
}

static inline int clampi(int v, int lo, int hi)
{
    return v < lo ? lo : (v > hi ? hi : v);
}

void sinew__warp_n(float *const *dst, const float *const *src, int count, unsigned char *outside,
                   const float *u, const float *v, int w, int h, int y0, int sh, int nt)
{
    (void)nt; /* unused without OpenMP */
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++) {
        for (int x = 0; x < w; x++) {
            size_t o = (size_t)y * (size_t)w + (size_t)x;
            float xs = (float)x + u[o], ys = (float)(y0 + y) + v[o];
            int out = xs < 0.f || ys < 0.f || xs > (float)(w - 1) || ys > (float)(sh - 1);
            if (outside)
                outside[o] = (unsigned char)out;
            /* bicubic (Keys 1981) inside, as recommended for warping by Sun, Roth and
             * Black 2010; clamped coordinates. Weights and taps are shared by the
             * `count` planes. */
            xs = xs < 0.f ? 0.f : (xs > (float)(w - 1) ? (float)(w - 1) : xs);
            ys = ys < 0.f ? 0.f : (ys > (float)(sh - 1) ? (float)(sh - 1) : ys);
            int ix = (int)xs, iy = (int)ys;
            float kx[4], ky[4];
            cubic_weights(xs - (float)ix, kx);
            cubic_weights(ys - (float)iy, ky);
            size_t xi[4], yo[4];
            if (ix >= 1 && ix + 2 < w && iy >= 1 && iy + 2 < sh) {
                for (int i = 0; i < 4; i++) {
                    xi[i] = (size_t)(ix - 1 + i);
                    yo[i] = (size_t)(iy - 1 + i) * (size_t)w;
                }
            } else {
                for (int i = 0; i < 4; i++) {
                    xi[i] = (size_t)clampi(ix - 1 + i, 0, w - 1);
                    yo[i] = (size_t)clampi(iy - 1 + i, 0, sh - 1) * (size_t)w;
                }
            }
            for (int c = 0; c < count; c++) {
                const float *sp = src[c];
                float acc = 0.f;
                for (int j = 0; j < 4; j++) {
                    const float *row = sp + yo[j];
                    float r = kx[0] * row[xi[0]] + kx[1] * row[xi[1]] + kx[2] * row[xi[2]] +
                              kx[3] * row[xi[3]];
                    acc += ky[j] * r;
                }
                dst[c][o] = acc;
            }
        }
    }
}

void sinew__warp(float *dst, unsigned char *outside, const float *src, const float *u,
                 const float *v, int w, int h, int nt)
{
    sinew__warp_n(&dst, &src, 1, outside, u, v, w, h, 0, h, nt);
}

/* Median filtering with comparator networks. The networks below are Batcher's odd-even
 * merge sort (Batcher 1968) on 16 / 32 wires, restricted to the 9 / 25 real inputs and
 * pruned to the comparators that the middle output depends on (generated offline; the
 * unit test compares the result with a sort). Each entry {i, j, k}: k = 0 exchange
 * (min to i, max to j), 1 only the minimum to i is needed, 2 only the maximum to j.
 * A block of MED_LANES neighbouring pixels runs through the network together, one array
 * per input wire, so each comparator is a short vectorisable loop. */
static const unsigned char med9_net[][3] = {
    {0, 1, 0}, {2, 3, 0}, {0, 2, 0}, {1, 3, 0}, {1, 2, 0}, {4, 5, 0}, {6, 7, 0}, {4, 6, 0},
    {5, 7, 0}, {5, 6, 0}, {0, 4, 0}, {2, 6, 0}, {2, 4, 0}, {1, 5, 0}, {3, 7, 1}, {3, 5, 0},
    {1, 2, 2}, {3, 4, 0}, {5, 6, 1}, {0, 8, 2}, {4, 8, 1}, {2, 4, 2}, {3, 5, 1}, {3, 4, 2}};
static const unsigned char med25_net[][3] = {
    {0, 1, 0},   {2, 3, 0},   {0, 2, 0},   {1, 3, 0},   {1, 2, 0},   {4, 5, 0},   {6, 7, 0},
    {4, 6, 0},   {5, 7, 0},   {5, 6, 0},   {0, 4, 0},   {2, 6, 0},   {2, 4, 0},   {1, 5, 0},
    {3, 7, 0},   {3, 5, 0},   {1, 2, 0},   {3, 4, 0},   {5, 6, 0},   {8, 9, 0},   {10, 11, 0},
    {8, 10, 0},  {9, 11, 0},  {9, 10, 0},  {12, 13, 0}, {14, 15, 0}, {12, 14, 0}, {13, 15, 0},
    {13, 14, 0}, {8, 12, 0},  {10, 14, 0}, {10, 12, 0}, {9, 13, 0},  {11, 15, 0}, {11, 13, 0},
    {9, 10, 0},  {11, 12, 0}, {13, 14, 0}, {0, 8, 0},   {4, 12, 0},  {4, 8, 0},   {2, 10, 0},
    {6, 14, 0},  {6, 10, 0},  {2, 4, 0},   {6, 8, 0},   {10, 12, 0}, {1, 9, 0},   {5, 13, 0},
    {5, 9, 0},   {3, 11, 0},  {7, 15, 1},  {7, 11, 0},  {3, 5, 0},   {7, 9, 0},   {11, 13, 0},
    {1, 2, 0},   {3, 4, 0},   {5, 6, 0},   {7, 8, 0},   {9, 10, 0},  {11, 12, 0}, {13, 14, 1},
    {16, 17, 0}, {18, 19, 0}, {16, 18, 0}, {17, 19, 0}, {17, 18, 0}, {20, 21, 0}, {22, 23, 0},
    {20, 22, 0}, {21, 23, 0}, {21, 22, 0}, {16, 20, 0}, {18, 22, 0}, {18, 20, 0}, {17, 21, 0},
    {19, 23, 0}, {19, 21, 0}, {17, 18, 0}, {19, 20, 0}, {21, 22, 0}, {16, 24, 0}, {20, 24, 0},
    {18, 20, 0}, {22, 24, 0}, {19, 21, 0}, {17, 18, 0}, {19, 20, 0}, {21, 22, 0}, {23, 24, 0},
    {0, 16, 2},  {8, 24, 1},  {8, 16, 2},  {4, 20, 2},  {12, 20, 1}, {12, 16, 1}, {2, 18, 2},
    {10, 18, 1}, {6, 22, 1},  {6, 10, 2},  {10, 12, 2}, {1, 17, 2},  {9, 17, 2},  {5, 21, 2},
    {13, 21, 1}, {13, 17, 1}, {3, 19, 2},  {11, 19, 1}, {7, 23, 1},  {7, 11, 2},  {11, 13, 1},
    {11, 12, 2}};

#define MED_LANES 64

static inline void med_compare(float *restrict a, float *restrict b, int kind)
{
    if (kind == 0) {
        float hi[MED_LANES];
        for (int i = 0; i < MED_LANES; i++)
            hi[i] = a[i] < b[i] ? b[i] : a[i];
        for (int i = 0; i < MED_LANES; i++)
            a[i] = a[i] < b[i] ? a[i] : b[i];
        memcpy(b, hi, sizeof hi);
    } else if (kind == 1) {
        for (int i = 0; i < MED_LANES; i++)
            a[i] = a[i] < b[i] ? a[i] : b[i];
    } else {
        for (int i = 0; i < MED_LANES; i++)
            b[i] = a[i] < b[i] ? b[i] : a[i];
    }
}

/* One output row of the median filter (radius r, its comparator network). */
SINEW__CLONES static void median_row(float *restrict dst, const float *restrict src, int w, int h,
                                     int r, int y, const unsigned char (*net)[3], int ncmp)
{
    int side = 2 * r + 1, mid = side * side / 2;
    float buf[25][MED_LANES];
    for (int x0 = 0; x0 < w; x0 += MED_LANES) {
        int q = 0;
        for (int dy = -r; dy <= r; dy++) {
            int yy = y + dy < 0 ? 0 : (y + dy >= h ? h - 1 : y + dy);
            const float *row = src + (size_t)yy * (size_t)w;
            for (int dx = -r; dx <= r; dx++, q++) {
                int first = x0 + dx, last = x0 + MED_LANES - 1 + dx;
                if (first >= 0 && last < w) {
                    memcpy(buf[q], row + first, sizeof buf[q]);
                } else {
                    /* clamped borders; lanes past the row end repeat the last pixel */
                    for (int i = 0; i < MED_LANES; i++) {
                        int xx = first + i < 0 ? 0 : (first + i >= w ? w - 1 : first + i);
                        buf[q][i] = row[xx];
                    }
                }
            }
        }
        for (int c = 0; c < ncmp; c++)
            med_compare(buf[net[c][0]], buf[net[c][1]], net[c][2]);
        int nb = w - x0 < MED_LANES ? w - x0 : MED_LANES;
        memcpy(dst + (size_t)y * (size_t)w + (size_t)x0, buf[mid], (size_t)nb * sizeof(float));
    }
}

void sinew__median(float *dst, const float *src, int w, int h, int r, int nt)
{
    (void)nt; /* unused without OpenMP */
    const unsigned char(*net)[3] = r == 1 ? med9_net : med25_net;
    int ncmp = r == 1 ? (int)(sizeof med9_net / sizeof med9_net[0])
                      : (int)(sizeof med25_net / sizeof med25_net[0]);
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++)
        median_row(dst, src, w, h, r, y, net, ncmp);
}
