/* SPDX-License-Identifier: MIT */
/* Forward-backward check, occlusion/reliability mask and confidence.
 *
 * Passes, each parallel over rows (static schedule) and free of cross-thread float
 * reductions, so every output is bit-identical for any thread count:
 *   1. frames -> gray float in [0, 1];
 *   2. per pixel: target p = x + w(x), bilinear ŵ(p), FB error, FB/OUTSIDE/UNKNOWN,
 *      motion-boundary, ignore and saturation bits, warped frame-1 intensity;
 *   3. robust global gain/offset fit I1(x + w) ≈ g I0(x) + o over reliable pixels
 *      (per-row partial sums in double, serial total; trimmed refits with a median
 *      absolute residual from a serial histogram), then the PHOTO bit;
 *   4. smallest eigenvalue of the box-filtered structure tensor of frame 0;
 *   5. exact Euclidean distance to the nearest motion-boundary pixel (two 1-D passes
 *      of Felzenszwalb & Huttenlocher's lower-envelope transform);
 *   6. the neighbourhood FB cue (window sums, serial per row and column), then the
 *      confidence: a logistic calibration of the cues (see flow/check.h).
 * All scratch memory is allocated before the first parallel region. */
#include "flow/check.h"

#include <math.h>
#include <string.h>

#include "flow/internal/base.h"
#include "flow/internal/occlusion.h"
#include "flow/internal/parallel.h"

void sinew_check_params_default(sinew_check_params *p)
{
    if (!p)
        return;
    memset(p, 0, sizeof *p);
    /* Constants of Sundaram, Brox, Keutzer, ECCV 2010. */
    p->fb_alpha = 0.01;
    p->fb_beta = 0.5;
    p->boundary_alpha = 0.01;
    /* Our choice: fb_beta / 4 (docs/methods.md, "Motion boundaries"). */
    p->boundary_beta = 0.125;
    /* Occlusion rule (docs/methods.md, "Occlusion"): half a pixel of coverage; one and a
     * half competitors; 5 % depth separation (our choices). */
    p->occ_range = 0.5;
    p->occ_crowd = 1.5;
    p->occ_depth_tolerance = 0.05;
    /* Our choices (documented in docs/methods.md). */
    p->photo_threshold = 0.1;
    p->saturation_level = 0.98;
    p->texture_radius = 2;
    p->ignore_polarity = SINEW_IGNORE_UNSET;
    /* Confidence cue scales (docs/methods.md, "Confidence"). */
    p->conf_fb_alpha = 0.0;
    p->conf_fb_beta = 0.03;
    p->conf_photo_scale = 0.1;
    p->conf_texture_scale = 4e-5;
    p->conf_boundary_scale = 6.0;
    /* Logistic calibration, printed by tools/fit_confidence (docs/methods.md). */
    p->conf_bias = 5.2896;
    p->conf_k_fb = 0.4090;
    p->conf_k_photo = 1.0449;
    p->conf_k_texture = 0.2612;
    p->conf_k_boundary = 0.9185;
    p->conf_k_motion = 0.3288;
    p->conf_k_outside = 0.0000;
    p->conf_k_saturated = 0.0025;
    p->conf_k_fb_local = 0.7328;
    p->conf_k_fb_share = 5.7211;
}

static const char *const feature_names[SINEW_CHECK_NFEATURES] = {
    "fb", "photo", "texture", "boundary", "motion", "outside", "saturated", "fb_local", "fb_share",
};

const char *sinew_check_feature_name(int i)
{
    if (i < 0 || i >= SINEW_CHECK_NFEATURES)
        return NULL;
    return feature_names[i];
}

static const char *const bit_names[SINEW_MASK_NBITS] = {
    "occluded", "outside",   "motion_boundary", "photometric",
    "ignored",  "saturated", "unknown_flow",    "fb_mismatch",
};

const char *sinew_check_bit_name(int bit)
{
    if (bit < 0 || bit >= SINEW_MASK_NBITS)
        return NULL;
    return bit_names[bit];
}

/* ---- validation ---- */

static int check_param(sinew_ctx *ctx, const char *name, double v)
{
    if (!isfinite(v) || v < 0)
        return sinew__fail(ctx, SINEW_EINVAL, "check: parameter %s must be finite and >= 0", name);
    return SINEW_OK;
}

size_t sinew_check_params_list(const sinew_check_params *p, sinew_check_param *out, size_t max)
{
    const sinew_check_param list[SINEW_CHECK_NPARAMS] = {
        {"fb_alpha", p->fb_alpha},
        {"fb_beta", p->fb_beta},
        {"boundary_alpha", p->boundary_alpha},
        {"boundary_beta", p->boundary_beta},
        {"occ_range", p->occ_range},
        {"occ_crowd", p->occ_crowd},
        {"occ_depth_tolerance", p->occ_depth_tolerance},
        {"photo_threshold", p->photo_threshold},
        {"saturation_level", p->saturation_level},
        {"texture_radius", p->texture_radius},
        {"conf_fb_alpha", p->conf_fb_alpha},
        {"conf_fb_beta", p->conf_fb_beta},
        {"conf_photo_scale", p->conf_photo_scale},
        {"conf_texture_scale", p->conf_texture_scale},
        {"conf_boundary_scale", p->conf_boundary_scale},
        {"conf_k_fb", p->conf_k_fb},
        {"conf_k_photo", p->conf_k_photo},
        {"conf_k_texture", p->conf_k_texture},
        {"conf_k_boundary", p->conf_k_boundary},
        {"conf_k_motion", p->conf_k_motion},
        {"conf_k_outside", p->conf_k_outside},
        {"conf_k_saturated", p->conf_k_saturated},
        {"conf_k_fb_local", p->conf_k_fb_local},
        {"conf_k_fb_share", p->conf_k_fb_share},
        {"conf_bias", p->conf_bias}, /* last: the only one that may be negative */
    };
    size_t n = max < SINEW_CHECK_NPARAMS ? max : SINEW_CHECK_NPARAMS;
    for (size_t i = 0; out && i < n; i++)
        out[i] = list[i];
    return SINEW_CHECK_NPARAMS;
}

static int validate_params(sinew_ctx *ctx, const sinew_check_params *p)
{
    sinew_check_param list[SINEW_CHECK_NPARAMS];
    sinew_check_params_list(p, list, SINEW_CHECK_NPARAMS);
    for (size_t i = 0; i + 1 < SINEW_CHECK_NPARAMS; i++) {
        int st = check_param(ctx, list[i].name, list[i].value);
        if (st)
            return st;
    }
    if (p->conf_fb_alpha == 0 && p->conf_fb_beta == 0)
        return sinew__fail(ctx, SINEW_EINVAL,
                           "check: conf_fb_alpha and conf_fb_beta cannot both be 0");
    if (p->conf_photo_scale == 0 || p->conf_boundary_scale == 0 || p->conf_texture_scale == 0)
        return sinew__fail(ctx, SINEW_EINVAL,
                           "check: conf_photo_scale, conf_texture_scale and conf_boundary_scale "
                           "must be > 0");
    if (!isfinite(p->conf_bias))
        return sinew__fail(ctx, SINEW_EINVAL, "check: parameter conf_bias must be finite");
    if (p->texture_radius < 0 || p->texture_radius > 64)
        return sinew__fail(ctx, SINEW_EINVAL, "check: texture_radius must be in 0..64");
    if (p->ignore_polarity != SINEW_IGNORE_UNSET && p->ignore_polarity != SINEW_IGNORE_NONZERO &&
        p->ignore_polarity != SINEW_IGNORE_ZERO)
        return sinew__fail(ctx, SINEW_EINVAL, "check: unknown ignore polarity %d",
                           (int)p->ignore_polarity);
    return SINEW_OK;
}

static int check_image(sinew_ctx *ctx, const char *what, const sinew_image *img, int w, int h,
                       int channels, int want_f32)
{
    if (!img->data || img->width < 1 || img->height < 1)
        return sinew__fail(ctx, SINEW_EINVAL, "check: %s is empty", what);
    if (want_f32) {
        if (img->type != SINEW_F32 || img->channels != channels)
            return sinew__fail(ctx, SINEW_EINVAL,
                               "check: %s must be a float %d-channel image (got type %d, %d "
                               "channels)",
                               what, channels, (int)img->type, img->channels);
    } else if (channels > 0) {
        if (img->type != SINEW_U8 || img->channels != channels)
            return sinew__fail(ctx, SINEW_EINVAL, "check: %s must be an 8-bit %d-channel image",
                               what, channels);
    } else if ((img->type != SINEW_U8 && img->type != SINEW_U16) || img->channels < 1 ||
               img->channels > 4) {
        return sinew__fail(ctx, SINEW_EINVAL, "check: %s must be an 8- or 16-bit image", what);
    }
    if (img->width != w || img->height != h)
        return sinew__fail(ctx, SINEW_ESIZE, "check: %s is %dx%d but the forward flow is %dx%d",
                           what, img->width, img->height, w, h);
    return SINEW_OK;
}

/* ---- small kernels ---- */

static inline int finite2(float a, float b)
{
    return isfinite(a) && isfinite(b);
}

/* Bilinear position split. Requires 0 <= pos <= n - 1. Returns the left index, the
 * weight of the right neighbour and whether the right neighbour is used at all. */
static inline int split_pos(double pos, int n, double *frac, int *use_next)
{
    int i = (int)floor(pos);
    if (i >= n - 1) {
        i = n - 1;
        *frac = 0;
    } else {
        *frac = pos - i;
    }
    *use_next = *frac > 0;
    return i;
}

/* Bilinear sample of the 2-channel flow at (px, py) inside the pixel-centre hull.
 * Neighbours with zero weight are not read. Returns 0 if a used neighbour is unknown. */
static int sample_flow(const sinew_image *f, double px, double py, double *u, double *v)
{
    double fx, fy;
    int ux, uy;
    int x0 = split_pos(px, f->width, &fx, &ux);
    int y0 = split_pos(py, f->height, &fy, &uy);
    double su = 0, sv = 0;
    for (int j = 0; j <= uy; j++) {
        const float *row = sinew_image_row_f32(f, y0 + j);
        double wy = j ? fy : 1 - fy;
        for (int i = 0; i <= ux; i++) {
            double wx = i ? fx : 1 - fx;
            const float *c = row + 2 * (size_t)(x0 + i);
            if (!finite2(c[0], c[1]))
                return 0;
            su += wy * wx * c[0];
            sv += wy * wx * c[1];
        }
    }
    *u = su;
    *v = sv;
    return 1;
}

/* Bilinear sample of a gray plane (w x h floats, contiguous). */
static double sample_plane(const float *g, int w, int h, double px, double py)
{
    double fx, fy;
    int ux, uy;
    int x0 = split_pos(px, w, &fx, &ux);
    int y0 = split_pos(py, h, &fy, &uy);
    const float *r0 = g + (size_t)y0 * w + x0;
    double top = ux ? (1 - fx) * r0[0] + fx * r0[1] : r0[0];
    if (!uy)
        return top;
    const float *r1 = r0 + w;
    double bot = ux ? (1 - fx) * r1[0] + fx * r1[1] : r1[0];
    return (1 - fy) * top + fy * bot;
}

/* Normalised sample value of channel c at pixel x of row y. */
static inline double pix(const sinew_image *img, int y, int x, int c)
{
    size_t k = (size_t)x * img->channels + c;
    if (img->type == SINEW_U8)
        return sinew_image_row_u8(img, y)[k] / 255.0;
    return sinew_image_row_u16(img, y)[k] / 65535.0;
}

static void to_gray(const sinew_image *img, float *g, int nthreads)
{
    (void)nthreads; /* unused without OpenMP */
    int w = img->width, h = img->height, ch = img->channels;
    SINEW_PARALLEL_FOR(nthreads)
    for (int y = 0; y < h; y++) {
        float *o = g + (size_t)y * w;
        for (int x = 0; x < w; x++) {
            if (ch >= 3)
                o[x] = (float)(0.299 * pix(img, y, x, 0) + 0.587 * pix(img, y, x, 1) +
                               0.114 * pix(img, y, x, 2));
            else
                o[x] = (float)pix(img, y, x, 0);
        }
    }
}

/* 1 if every colour channel (alpha excluded) is >= level. */
static int saturated(const sinew_image *img, int y, int x, double level)
{
    int nc = img->channels >= 3 ? 3 : 1;
    for (int c = 0; c < nc; c++)
        if (pix(img, y, x, c) < level)
            return 0;
    return 1;
}

static int ignored(const sinew_image *m, int y, int x, sinew_ignore_polarity pol)
{
    size_t k = (size_t)x * m->channels;
    int nz =
        m->type == SINEW_U8 ? sinew_image_row_u8(m, y)[k] != 0 : sinew_image_row_u16(m, y)[k] != 0;
    return pol == SINEW_IGNORE_NONZERO ? nz : !nz;
}

/* Squared flow gradient |∇u|² + |∇v|² at (x, y): central differences inside, one-sided
 * at the border; an unknown neighbour is replaced by the centre value. */
static double flow_grad2(const sinew_image *f, int x, int y)
{
    int w = f->width, h = f->height;
    const float *c = sinew_image_row_f32(f, y) + 2 * (size_t)x;
    double g = 0;
    for (int axis = 0; axis < 2; axis++) {
        int n = axis ? h : w, i = axis ? y : x;
        if (n < 2)
            continue;
        int lo = i > 0 ? i - 1 : i, hi = i < n - 1 ? i + 1 : i;
        const float *a = axis ? sinew_image_row_f32(f, lo) + 2 * (size_t)x
                              : sinew_image_row_f32(f, y) + 2 * (size_t)lo;
        const float *b = axis ? sinew_image_row_f32(f, hi) + 2 * (size_t)x
                              : sinew_image_row_f32(f, y) + 2 * (size_t)hi;
        for (int k = 0; k < 2; k++) {
            double va = isfinite(a[k]) ? a[k] : c[k];
            double vb = isfinite(b[k]) ? b[k] : c[k];
            double d = (vb - va) / (hi - lo);
            g += d * d;
        }
    }
    return g;
}

/* ---- scratch ---- */

typedef struct scratch {
    float *gray0, *gray1; /* frames as gray [0,1], or NULL */
    float *warp1;         /* I1(x + w), NaN where unavailable */
    float *fbratio;       /* e² / (conf_fb_alpha (|w|²+|ŵ|²) + conf_fb_beta) */
    float *resid;         /* photometric residual |I1w - (g I0 + o)|, NaN if none */
    float *lmin;          /* structure tensor smallest eigenvalue */
    float *t3a, *t3b;     /* 3 planes each for the structure tensor */
    double *dist2;        /* squared distance to nearest boundary pixel (exact) */
    double big;           /* "no boundary pixel": w² + h² + 1, above any real squared
                             distance; integer sums stay exact in double */
    double *rows;         /* per-row partial sums, 6 per row */
    double *dtbuf;        /* per-thread distance-transform buffers */
    int *dtv;             /* per-thread envelope indices */
    unsigned *hist;       /* residual histogram */
    float *range;         /* backward-flow splat density on frame 0 (range map) */
    float *crowd;         /* forward-flow splat density on frame 1, or z-buffer with depth */
    float *local;         /* cue fb_local (pass 6a) */
    float *lrow;          /* its horizontal window sums and counts, 2 per pixel */
    float *fb;            /* fb output if caller passed none */
    uint8_t *mask;        /* mask plane (contiguous) */
} scratch;

#define HIST_BINS 4096

static void scratch_free(sinew_ctx *ctx, scratch *s)
{
    void **all[] = {
        (void **)&s->gray0, (void **)&s->gray1, (void **)&s->warp1, (void **)&s->fbratio,
        (void **)&s->resid, (void **)&s->lmin,  (void **)&s->t3a,   (void **)&s->t3b,
        (void **)&s->dist2, (void **)&s->rows,  (void **)&s->dtbuf, (void **)&s->dtv,
        (void **)&s->hist,  (void **)&s->fb,    (void **)&s->mask,  (void **)&s->range,
        (void **)&s->crowd, (void **)&s->local, (void **)&s->lrow};
    for (size_t i = 0; i < sizeof all / sizeof all[0]; i++) {
        sinew__free(ctx, *all[i]);
        *all[i] = NULL;
    }
}

static int scratch_alloc(sinew_ctx *ctx, scratch *s, int w, int h, int frames, int nthreads)
{
    size_t n = (size_t)w * (size_t)h;
    size_t nmax = (size_t)(w > h ? w : h);
    memset(s, 0, sizeof *s);
    int bad = 0;
    /* Not zeroed: every pass writes each element of its planes before any reads it
     * (the splats and the histogram clear theirs first), and at 1280x1024 zeroing these
     * 17 blocks (about 90 MB) took a fifth of a whole `sinew run --preset fast`. */
#define GET(field, count, type)                                                                    \
    do {                                                                                           \
        if (!bad && !(s->field = sinew__alloc_array(ctx, (count), sizeof(type))))                  \
            bad = 1;                                                                               \
    } while (0)
    if (frames) {
        GET(gray0, n, float);
        GET(gray1, n, float);
        GET(resid, n, float);
        GET(lmin, n, float);
        GET(t3a, 3 * n, float);
        GET(t3b, 3 * n, float);
        GET(hist, HIST_BINS, unsigned);
    }
    GET(warp1, n, float);
    GET(fbratio, n, float);
    GET(dist2, n, double);
    GET(rows, 6 * (size_t)h, double);
    GET(dtbuf, (size_t)nthreads * (3 * nmax + 1), double);
    GET(dtv, (size_t)nthreads * nmax, int);
    GET(fb, n, float);
    GET(mask, n, uint8_t);
    GET(range, n, float);
    GET(crowd, n, float);
    GET(local, n, float);
    GET(lrow, 2 * n, float);
#undef GET
    s->big = (double)w * w + (double)h * h + 1;
    if (bad) {
        scratch_free(ctx, s);
        return SINEW_ENOMEM;
    }
    return SINEW_OK;
}

/* ---- pass 2: geometry ---- */

static void pass_geometry(const sinew_check_input *in, const sinew_check_params *p, scratch *s,
                          int nthreads)
{
    (void)nthreads; /* unused without OpenMP */
    const sinew_image *F = in->forward, *B = in->backward;
    int w = F->width, h = F->height;
    const int frames = s->gray0 != NULL;
    SINEW_PARALLEL_FOR(nthreads)
    for (int y = 0; y < h; y++) {
        const float *fr = sinew_image_row_f32(F, y);
        for (int x = 0; x < w; x++) {
            size_t k = (size_t)y * w + x;
            uint8_t m = 0;
            float e = NAN, ratio = NAN, wv = NAN;
            double u = fr[2 * x], v = fr[2 * x + 1];
            if (in->ignore && ignored(in->ignore, y, x, p->ignore_polarity))
                m |= SINEW_MASK_IGNORE;
            if (frames && saturated(in->frame0, y, x, p->saturation_level))
                m |= SINEW_MASK_SATURATED;
            if (!finite2(fr[2 * x], fr[2 * x + 1])) {
                m |= SINEW_MASK_UNKNOWN;
            } else {
                double w2 = u * u + v * v;
                if (flow_grad2(F, x, y) > p->boundary_alpha * w2 + p->boundary_beta)
                    m |= SINEW_MASK_BOUNDARY;
                double px = x + u, py = y + v;
                /* Inside the image area [-0.5, W - 0.5) x [-0.5, H - 0.5); samples are
                 * taken at the target clamped to the pixel-centre hull. */
                if (!(px >= -0.5 && px < w - 0.5 && py >= -0.5 && py < h - 0.5)) {
                    m |= SINEW_MASK_OUTSIDE;
                } else {
                    px = px < 0 ? 0 : px > w - 1 ? w - 1 : px;
                    py = py < 0 ? 0 : py > h - 1 ? h - 1 : py;
                    double bu, bv;
                    if (!sample_flow(B, px, py, &bu, &bv)) {
                        m |= SINEW_MASK_UNKNOWN;
                    } else {
                        double du = u + bu, dv = v + bv, b2 = bu * bu + bv * bv;
                        double e2 = du * du + dv * dv;
                        if (e2 > p->fb_alpha * (w2 + b2) + p->fb_beta)
                            m |= SINEW_MASK_OCCLUDED; /* decided in pass_occlusion */
                        e = (float)sqrt(e2);
                        ratio = (float)(e2 / (p->conf_fb_alpha * (w2 + b2) + p->conf_fb_beta));
                    }
                    if (frames) {
                        wv = (float)sample_plane(s->gray1, w, h, px, py);
                        int nx = (int)floor(px + 0.5), ny = (int)floor(py + 0.5);
                        if (nx > w - 1)
                            nx = w - 1;
                        if (ny > h - 1)
                            ny = h - 1;
                        if (saturated(in->frame1, ny, nx, p->saturation_level))
                            m |= SINEW_MASK_SATURATED;
                    }
                }
            }
            s->mask[k] = m;
            s->fb[k] = e;
            s->fbratio[k] = ratio;
            s->warp1[k] = wv;
        }
    }
}

/* ---- pass 2b: occlusion ---- */

/* Split the forward-backward inconsistent pixels (bit OCCLUDED after pass 2) into
 * OCCLUDED, when x is not seen in frame 1 (range map below occ_range) or loses its
 * target (crowded target without depth; a nearer surface lands there with depth), and
 * MISMATCH otherwise. The splats are serial (flow/occlusion.c); the decision is per
 * pixel. */
static void pass_occlusion(const sinew_check_input *in, const sinew_check_params *p, scratch *s,
                           int nthreads)
{
    (void)nthreads; /* unused without OpenMP */
    const sinew_image *F = in->forward;
    int w = F->width, h = F->height;
    sinew__splat_density(in->backward, s->range);
    if (in->depth0)
        sinew__splat_zmin(F, in->depth0, s->crowd);
    else
        sinew__splat_density(F, s->crowd);
    SINEW_PARALLEL_FOR(nthreads)
    for (int y = 0; y < h; y++) {
        const float *fr = sinew_image_row_f32(F, y);
        const float *zr = in->depth0 ? sinew_image_row_f32(in->depth0, y) : NULL;
        for (int x = 0; x < w; x++) {
            size_t k = (size_t)y * w + x;
            if (!(s->mask[k] & SINEW_MASK_OCCLUDED))
                continue;
            int occluded = s->range[k] < p->occ_range;
            if (!occluded) {
                double px = x + (double)fr[2 * x], py = y + (double)fr[2 * x + 1];
                px = px < 0 ? 0 : px > w - 1 ? w - 1 : px;
                py = py < 0 ? 0 : py > h - 1 ? h - 1 : py;
                double z = zr ? zr[x] : NAN;
                if (zr && isfinite(z) && z > 0) {
                    int nx = (int)floor(px + 0.5), ny = (int)floor(py + 0.5);
                    nx = nx > w - 1 ? w - 1 : nx;
                    ny = ny > h - 1 ? h - 1 : ny;
                    occluded = z > s->crowd[(size_t)ny * w + nx] * (1 + p->occ_depth_tolerance);
                } else if (!zr) {
                    occluded = sample_plane(s->crowd, w, h, px, py) > p->occ_crowd;
                }
            }
            if (!occluded)
                s->mask[k] = (uint8_t)((s->mask[k] & ~SINEW_MASK_OCCLUDED) | SINEW_MASK_MISMATCH);
        }
    }
}

/* ---- pass 3: photometric fit ---- */

#define FIT_EXCLUDE                                                                                \
    (SINEW_MASK_FB_ANY | SINEW_MASK_OUTSIDE | SINEW_MASK_BOUNDARY | SINEW_MASK_SATURATED |         \
     SINEW_MASK_UNKNOWN | SINEW_MASK_IGNORE)

/* Least-squares fit of warp1 ≈ g gray0 + o over pixels not excluded by the mask and,
 * when limit >= 0, with |warp1 - (g0 gray0 + o0)| <= limit. Per-row partial sums in
 * double, serial total. Returns the pixel count used. */
static int64_t fit_gain(scratch *s, int w, int h, double g0, double o0, double limit, double *g,
                        double *o, int nthreads)
{
    (void)nthreads; /* unused without OpenMP */
    SINEW_PARALLEL_FOR(nthreads)
    for (int y = 0; y < h; y++) {
        double n = 0, sx = 0, sy = 0, sxx = 0, sxy = 0;
        for (int x = 0; x < w; x++) {
            size_t k = (size_t)y * w + x;
            if (s->mask[k] & FIT_EXCLUDE)
                continue;
            double a = s->gray0[k], b = s->warp1[k];
            if (limit >= 0 && fabs(b - (g0 * a + o0)) > limit)
                continue;
            n += 1;
            sx += a;
            sy += b;
            sxx += a * a;
            sxy += a * b;
        }
        double *r = s->rows + 6 * (size_t)y;
        r[0] = n;
        r[1] = sx;
        r[2] = sy;
        r[3] = sxx;
        r[4] = sxy;
    }
    double n = 0, sx = 0, sy = 0, sxx = 0, sxy = 0;
    for (int y = 0; y < h; y++) {
        const double *r = s->rows + 6 * (size_t)y;
        n += r[0];
        sx += r[1];
        sy += r[2];
        sxx += r[3];
        sxy += r[4];
    }
    *g = 1;
    *o = 0;
    if (n < 1)
        return 0;
    double mx = sx / n, my = sy / n;
    double vxx = sxx / n - mx * mx, vxy = sxy / n - mx * my;
    double gain = vxx > 1e-6 ? vxy / vxx : 1;
    /* Degenerate or implausible gain (flat frame, mostly wrong flow): offset only. */
    if (!(gain >= 0.25 && gain <= 4))
        gain = 1;
    *g = gain;
    *o = my - gain * mx;
    return (int64_t)n;
}

/* Median of |warp1 - (g gray0 + o)| over fit pixels, from a serial histogram on [0, 1]
 * (bin width 1/HIST_BINS; the bin centre is returned). */
static double median_abs_resid(scratch *s, size_t n, double g, double o)
{
    memset(s->hist, 0, HIST_BINS * sizeof *s->hist);
    size_t cnt = 0;
    for (size_t k = 0; k < n; k++) {
        if (s->mask[k] & FIT_EXCLUDE)
            continue;
        double r = fabs(s->warp1[k] - (g * s->gray0[k] + o));
        int b = r >= 1 ? HIST_BINS - 1 : (int)(r * HIST_BINS);
        s->hist[b]++;
        cnt++;
    }
    if (cnt == 0)
        return 0;
    size_t half = (cnt + 1) / 2, acc = 0;
    for (int b = 0; b < HIST_BINS; b++) {
        acc += s->hist[b];
        if (acc >= half)
            return (b + 0.5) / HIST_BINS;
    }
    return 1;
}

static void pass_photo(const sinew_check_params *p, scratch *s, int w, int h, sinew_check_stats *st,
                       int nthreads)
{
    double g, o;
    int64_t used = fit_gain(s, w, h, 1, 0, -1, &g, &o, nthreads);
    /* Two trimmed refits: keep residuals within 3 robust standard deviations
     * (1.4826 * median absolute residual, floored at one 8-bit level). */
    for (int it = 0; it < 2 && used > 0; it++) {
        double sigma = 1.4826 * median_abs_resid(s, (size_t)w * h, g, o);
        if (sigma < 1.0 / 255)
            sigma = 1.0 / 255;
        double g2, o2;
        int64_t u2 = fit_gain(s, w, h, g, o, 3 * sigma, &g2, &o2, nthreads);
        if (u2 < 1)
            break;
        g = g2;
        o = o2;
        used = u2;
    }
    st->gain = g;
    st->offset = o;
    st->fit_pixels = used;
    SINEW_PARALLEL_FOR(nthreads)
    for (int y = 0; y < h; y++) {
        for (int x = 0; x < w; x++) {
            size_t k = (size_t)y * w + x;
            float r = NAN;
            if (isfinite(s->warp1[k])) {
                r = (float)fabs(s->warp1[k] - (g * s->gray0[k] + o));
                if (r > p->photo_threshold)
                    s->mask[k] |= SINEW_MASK_PHOTO;
            }
            s->resid[k] = r;
        }
    }
}

/* ---- pass 4: texture ---- */

/* Smallest eigenvalue of the structure tensor J = mean over a (2r+1)² window (clipped
 * at the border) of [gx² gxgy; gxgy gy²], gradients of gray0 by central differences
 * (one-sided at the border), units (intensity/px)². */
static void pass_texture(scratch *s, int w, int h, int r, int nthreads)
{
    (void)nthreads; /* unused without OpenMP */
    const float *g = s->gray0;
    size_t n = (size_t)w * h;
    float *P = s->t3a, *T = s->t3b;
    SINEW_PARALLEL_FOR(nthreads)
    for (int y = 0; y < h; y++) {
        int y0 = y > 0 ? y - 1 : y, y1 = y < h - 1 ? y + 1 : y;
        for (int x = 0; x < w; x++) {
            int x0 = x > 0 ? x - 1 : x, x1 = x < w - 1 ? x + 1 : x;
            size_t k = (size_t)y * w + x;
            double gx = x1 > x0 ? (g[(size_t)y * w + x1] - g[(size_t)y * w + x0]) / (x1 - x0) : 0;
            double gy = y1 > y0 ? (g[(size_t)y1 * w + x] - g[(size_t)y0 * w + x]) / (y1 - y0) : 0;
            P[k] = (float)(gx * gx);
            P[n + k] = (float)(gx * gy);
            P[2 * n + k] = (float)(gy * gy);
        }
    }
    /* horizontal window sums */
    SINEW_PARALLEL_FOR(nthreads)
    for (int y = 0; y < h; y++) {
        for (int c = 0; c < 3; c++) {
            const float *src = P + c * n + (size_t)y * w;
            float *dst = T + c * n + (size_t)y * w;
            for (int x = 0; x < w; x++) {
                int a = x - r < 0 ? 0 : x - r, b = x + r > w - 1 ? w - 1 : x + r;
                double sum = 0;
                for (int i = a; i <= b; i++)
                    sum += src[i];
                dst[x] = (float)sum;
            }
        }
    }
    /* vertical window sums, mean, eigenvalue */
    SINEW_PARALLEL_FOR(nthreads)
    for (int y = 0; y < h; y++) {
        int a = y - r < 0 ? 0 : y - r, b = y + r > h - 1 ? h - 1 : y + r;
        for (int x = 0; x < w; x++) {
            int xa = x - r < 0 ? 0 : x - r, xb = x + r > w - 1 ? w - 1 : x + r;
            double cnt = (double)(b - a + 1) * (xb - xa + 1);
            double j[3];
            for (int c = 0; c < 3; c++) {
                double sum = 0;
                for (int i = a; i <= b; i++)
                    sum += T[c * n + (size_t)i * w + x];
                j[c] = sum / cnt;
            }
            double tr = 0.5 * (j[0] + j[2]), df = 0.5 * (j[0] - j[2]);
            double l = tr - sqrt(df * df + j[1] * j[1]);
            s->lmin[(size_t)y * w + x] = (float)(l > 0 ? l : 0);
        }
    }
}

/* ---- pass 5: distance transform ---- */

/* 1-D squared Euclidean distance transform of f (n samples, spacing 1) into d:
 * d[q] = min_p (q - p)² + f[p]  (Felzenszwalb & Huttenlocher, Theory of Computing 8,
 * 2012, lower envelope of parabolas). v (n ints) and z (n + 1 doubles) are scratch. */
static void dt1d(const double *f, double *d, int n, int *v, double *z)
{
    int k = 0;
    v[0] = 0;
    z[0] = -HUGE_VAL;
    z[1] = HUGE_VAL;
    for (int q = 1; q < n; q++) {
        double s;
        for (;;) {
            int p = v[k];
            s = ((f[q] + (double)q * q) - (f[p] + (double)p * p)) / (2.0 * q - 2.0 * p);
            if (s > z[k])
                break;
            k--; /* z[0] = -inf, so k never drops below 0 */
        }
        k++;
        v[k] = q;
        z[k] = s;
        z[k + 1] = HUGE_VAL;
    }
    k = 0;
    for (int q = 0; q < n; q++) {
        while (z[k + 1] < q)
            k++;
        double dq = (double)q - v[k];
        d[q] = dq * dq + f[v[k]];
    }
}

/* Transform one line of dist2 in place: n samples starting at `first`, `step` apart,
 * with the calling thread's scratch. */
static void dt_line(scratch *s, size_t first, size_t step, int n, size_t nmax)
{
    int t = sinew__thread_id();
    double *f = s->dtbuf + (size_t)t * (3 * nmax + 1), *d = f + nmax, *z = d + nmax;
    int *v = s->dtv + (size_t)t * nmax;
    for (int i = 0; i < n; i++)
        f[i] = s->dist2[first + (size_t)i * step];
    dt1d(f, d, n, v, z);
    for (int i = 0; i < n; i++)
        s->dist2[first + (size_t)i * step] = d[i] < s->big ? d[i] : s->big;
}

static void pass_distance(scratch *s, int w, int h, int nthreads)
{
    (void)nthreads; /* unused without OpenMP */
    size_t nmax = (size_t)(w > h ? w : h);
    SINEW_PARALLEL_FOR(nthreads)
    for (int y = 0; y < h; y++) {
        for (int x = 0; x < w; x++) {
            size_t k = (size_t)y * w + x;
            s->dist2[k] = (s->mask[k] & SINEW_MASK_BOUNDARY) ? 0 : s->big;
        }
        dt_line(s, (size_t)y * w, 1, w, nmax); /* rows */
    }
    SINEW_PARALLEL_FOR(nthreads)
    for (int x = 0; x < w; x++)
        dt_line(s, (size_t)x, (size_t)w, h, nmax); /* columns */
}

/* ---- pass 6a: neighbourhood FB cue ---- */

#define LOCAL_RADIUS 3 /* 7x7 window (docs/methods.md, "Confidence") */

/* The fb cue of pixel i for the window mean: the cue itself, `top` for a target outside
 * frame 1, NaN (left out) for IGNORE and UNKNOWN pixels. */
static inline float fb_cue_of(const scratch *s, size_t i, float top)
{
    uint8_t m = s->mask[i];
    if (m & (SINEW_MASK_IGNORE | SINEW_MASK_UNKNOWN))
        return NAN;
    if (m & SINEW_MASK_OUTSIDE)
        return top;
    return isfinite(s->fbratio[i]) ? (float)log1p(sqrt(s->fbratio[i])) : NAN;
}

/* fb_local: the mean of fb_cue_of over the (2 LOCAL_RADIUS + 1)² window clipped at the
 * border, 0 where no pixel of the window has a value. Horizontal sums and counts per
 * row into lrow, then vertical sums; each sum is serial, so the result is the same for
 * any thread count. */
static void pass_local(const sinew_check_params *p, scratch *s, int w, int h, int nthreads)
{
    (void)nthreads; /* unused without OpenMP */
    const int r = LOCAL_RADIUS;
    double diag = sqrt((double)w * w + (double)h * h);
    float top = (float)(p->conf_fb_beta > 0 ? log1p(diag / sqrt(p->conf_fb_beta))
                                            : log1p(1 / sqrt(p->conf_fb_alpha)));
    SINEW_PARALLEL_FOR(nthreads)
    for (int y = 0; y < h; y++) {
        float *o = s->lrow + 2 * (size_t)y * w;
        for (int x = 0; x < w; x++) {
            int a = x - r < 0 ? 0 : x - r, b = x + r > w - 1 ? w - 1 : x + r;
            double sum = 0, cnt = 0;
            for (int i = a; i <= b; i++) {
                float v = fb_cue_of(s, (size_t)y * w + i, top);
                if (!isnan(v)) {
                    sum += v;
                    cnt += 1;
                }
            }
            o[2 * x] = (float)sum;
            o[2 * x + 1] = (float)cnt;
        }
    }
    SINEW_PARALLEL_FOR(nthreads)
    for (int y = 0; y < h; y++) {
        int a = y - r < 0 ? 0 : y - r, b = y + r > h - 1 ? h - 1 : y + r;
        for (int x = 0; x < w; x++) {
            double sum = 0, cnt = 0;
            for (int i = a; i <= b; i++) {
                const float *c = s->lrow + 2 * ((size_t)i * w + x);
                sum += c[0];
                cnt += c[1];
            }
            s->local[(size_t)y * w + x] = cnt > 0 ? (float)(sum / cnt) : 0.0f;
        }
    }
}

/* ---- pass 6: confidence ---- */

static void pass_confidence(const sinew_check_input *in, const sinew_check_params *p, scratch *s,
                            sinew_image *conf, float *features, int nthreads)
{
    (void)nthreads; /* unused without OpenMP */
    const sinew_image *F = in->forward;
    int w = F->width, h = F->height;
    /* cue fb_share: an integer count, so the same for any thread count */
    size_t n = (size_t)w * h, incons = 0;
    for (size_t i = 0; i < n; i++)
        incons += (s->mask[i] & SINEW_MASK_FB_ANY) != 0;
    const double share = (double)incons / (double)n;
    const double k[SINEW_CHECK_NFEATURES] = {
        p->conf_k_fb,        p->conf_k_photo,    p->conf_k_texture,
        p->conf_k_boundary,  p->conf_k_motion,   p->conf_k_outside,
        p->conf_k_saturated, p->conf_k_fb_local, p->conf_k_fb_share};
    SINEW_PARALLEL_FOR(nthreads)
    for (int y = 0; y < h; y++) {
        float *out = sinew_image_row_f32(conf, y);
        const float *fr = sinew_image_row_f32(F, y);
        for (int x = 0; x < w; x++) {
            size_t i = (size_t)y * w + x;
            uint8_t m = s->mask[i];
            float *fo = features ? features + i * SINEW_CHECK_NFEATURES : NULL;
            if (m & (SINEW_MASK_IGNORE | SINEW_MASK_UNKNOWN)) {
                out[x] = 0;
                for (int c = 0; fo && c < SINEW_CHECK_NFEATURES; c++)
                    fo[c] = NAN;
                continue;
            }
            double f[SINEW_CHECK_NFEATURES] = {0};
            int outside = (m & SINEW_MASK_OUTSIDE) != 0;
            if (!outside && isfinite(s->fbratio[i]))
                f[0] = log1p(sqrt(s->fbratio[i]));
            if (!outside && s->resid && isfinite(s->resid[i]))
                f[1] = s->resid[i] / p->conf_photo_scale;
            if (s->lmin)
                f[2] = p->conf_texture_scale / (s->lmin[i] + p->conf_texture_scale);
            if (s->dist2[i] < s->big)
                f[3] = exp(-sqrt(s->dist2[i]) / p->conf_boundary_scale);
            f[4] = log1p(hypot(fr[2 * x], fr[2 * x + 1]));
            f[5] = outside;
            f[6] = (m & SINEW_MASK_SATURATED) != 0;
            f[7] = s->local[i];
            f[8] = share;
            double z = p->conf_bias;
            for (int c = 0; c < SINEW_CHECK_NFEATURES; c++) {
                z -= k[c] * f[c];
                if (fo)
                    fo[c] = (float)f[c];
            }
            out[x] = (float)(1 / (1 + exp(-z))); /* in [0, 1]; exp overflow gives 0 */
        }
    }
}

/* ---- driver ---- */

static int validate(sinew_ctx *ctx, const sinew_check_output *out, const sinew_check_input *in,
                    const sinew_check_params *p)
{
    if (!out || !in || !in->forward || !in->backward)
        return sinew__fail(ctx, SINEW_EINVAL, "check: forward and backward flow are required");
    int st = check_image(ctx, "forward flow", in->forward, in->forward->width, in->forward->height,
                         2, 1);
    if (st)
        return st;
    int w = in->forward->width, h = in->forward->height;
    if ((st = check_image(ctx, "backward flow", in->backward, w, h, 2, 1)))
        return st;
    if (!in->frame0 != !in->frame1)
        return sinew__fail(ctx, SINEW_EINVAL, "check: give both frames or neither");
    if (in->frame0 && ((st = check_image(ctx, "frame 0", in->frame0, w, h, 0, 0)) ||
                       (st = check_image(ctx, "frame 1", in->frame1, w, h, 0, 0))))
        return st;
    if (in->depth0 && (st = check_image(ctx, "depth 0", in->depth0, w, h, 1, 1)))
        return st;
    if (in->ignore) {
        if ((st = check_image(ctx, "ignore mask", in->ignore, w, h, 0, 0)))
            return st;
        if (p->ignore_polarity == SINEW_IGNORE_UNSET)
            return sinew__fail(ctx, SINEW_EINVAL,
                               "check: an ignore mask needs an explicit polarity "
                               "(nonzero or zero)");
    }
    if (out->fb_error && (st = check_image(ctx, "fb_error output", out->fb_error, w, h, 1, 1)))
        return st;
    if (out->confidence &&
        (st = check_image(ctx, "confidence output", out->confidence, w, h, 1, 1)))
        return st;
    if (out->mask && (st = check_image(ctx, "mask output", out->mask, w, h, 1, 0)))
        return st;
    return validate_params(ctx, p);
}

int sinew_check_run(sinew_ctx *ctx, sinew_check_output *out, const sinew_check_input *in,
                    const sinew_check_params *params)
{
    sinew_check_params defaults;
    if (!params) {
        sinew_check_params_default(&defaults);
        params = &defaults;
    }
    if (!ctx)
        return SINEW_EINVAL;
    int st = validate(ctx, out, in, params);
    if (st)
        return st;
    int w = in->forward->width, h = in->forward->height;
    int nthreads = sinew__nthreads(sinew_ctx_threads(ctx));
    int frames = in->frame0 != NULL;
    scratch s;
    if ((st = scratch_alloc(ctx, &s, w, h, frames, nthreads)))
        return st;
    sinew_image conf_tmp;
    memset(&conf_tmp, 0, sizeof conf_tmp);
    sinew_image *conf = out->confidence;
    if (!conf) {
        if ((st = sinew_image_alloc(ctx, &conf_tmp, w, h, 1, SINEW_F32))) {
            scratch_free(ctx, &s);
            return st;
        }
        conf = &conf_tmp;
    }
    sinew_check_stats stats;
    memset(&stats, 0, sizeof stats);
    stats.gain = 1;
    stats.offset = 0;
    if (frames) {
        to_gray(in->frame0, s.gray0, nthreads);
        to_gray(in->frame1, s.gray1, nthreads);
    }
    pass_geometry(in, params, &s, nthreads);
    pass_occlusion(in, params, &s, nthreads);
    if (frames) {
        pass_photo(params, &s, w, h, &stats, nthreads);
        pass_texture(&s, w, h, params->texture_radius, nthreads);
    }
    pass_distance(&s, w, h, nthreads);
    pass_local(params, &s, w, h, nthreads);
    pass_confidence(in, params, &s, conf, out->features, nthreads);

    stats.pixels = (int64_t)w * h;
    for (int y = 0; y < h; y++) {
        const uint8_t *m = s.mask + (size_t)y * w;
        for (int x = 0; x < w; x++) {
            if (!m[x])
                stats.kept++;
            for (int b = 0; b < SINEW_MASK_NBITS; b++)
                stats.reason[b] += (m[x] >> b) & 1;
        }
        if (out->mask)
            memcpy(sinew_image_row_u8(out->mask, y), m, (size_t)w);
        if (out->fb_error)
            memcpy(sinew_image_row_f32(out->fb_error, y), s.fb + (size_t)y * w,
                   (size_t)w * sizeof(float));
    }
    out->stats = stats;
    sinew_image_free(&conf_tmp);
    scratch_free(ctx, &s);
    return SINEW_OK;
}
