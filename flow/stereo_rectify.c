/* SPDX-License-Identifier: MIT */
/* Rectification of a raw stereo rig (calibration form 2: two cameras with Brown-Conrady
 * distortion and the rotation R and translation T between them), in the manner of
 * Bouguet's method (Bradski & Kaehler, "Learning OpenCV", O'Reilly 2008, ch. 12):
 *
 *   X_right = R X_left + T.  With Q = R^(1/2) (half the rotation, through quaternions),
 *   the left camera turned by Q and the right one by Q^T share one orientation, and the
 *   right centre sits at -t with t = Q^T T in it.  W, the smallest rotation taking t to
 *   the -x axis, lays the baseline along x; the rectifying rotations are W Q (left) and
 *   W Q^T (right).  Both rectified views use one pinhole camera without distortion.
 *
 * Frames are resampled bilinearly through the inverse map (rectified pixel -> ray ->
 * original camera -> distortion -> pixel), which needs no iteration; depth goes back to
 * the left camera's original pixels through the forward map (original pixel ->
 * undistorted ray, Newton inversion in flow/camera.c -> rectified pixel). Accuracy and
 * constants: docs/methods.md "Rectifying a raw rig". */
#include "flow/stereo.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

#include "flow/internal/base.h"
#include "flow/internal/parallel.h"
#include "flow/internal/stereo.h"

#define RIG_ORTHO_TOL 1e-3    /* |R R^T - I| per element: 6-decimal printouts pass (ours) */
#define RIG_MIN_BASELINE 1e-6 /* m: below 1 um is a zero baseline (our bound) */
#define RIG_MAX_BASELINE 100  /* m: as the rectified form (flow/stereo_geom.c) */
#define RIG_MAX_TILT 45.0     /* degrees between the baseline and x: beyond, a vertical rig */
#define SAME_SURFACE 0.05     /* unrectified depth: 4 neighbours within 5 % = one surface */

/* ---- 3x3 row-major algebra ---- */

static void mat_mul(const double a[9], const double b[9], double o[9])
{
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++)
            o[3 * i + j] = a[3 * i] * b[j] + a[3 * i + 1] * b[3 + j] + a[3 * i + 2] * b[6 + j];
}

static void mat_t(const double a[9], double o[9])
{
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++)
            o[3 * j + i] = a[3 * i + j];
}

static void mat_vec(const double a[9], const double v[3], double o[3])
{
    for (int i = 0; i < 3; i++)
        o[i] = a[3 * i] * v[0] + a[3 * i + 1] * v[1] + a[3 * i + 2] * v[2];
}

/* Cofactor matrix (= det * inverse transpose); returns the determinant. */
static double cofactor(const double a[9], double c[9])
{
    c[0] = a[4] * a[8] - a[5] * a[7];
    c[1] = a[5] * a[6] - a[3] * a[8];
    c[2] = a[3] * a[7] - a[4] * a[6];
    c[3] = a[2] * a[7] - a[1] * a[8];
    c[4] = a[0] * a[8] - a[2] * a[6];
    c[5] = a[1] * a[6] - a[0] * a[7];
    c[6] = a[1] * a[5] - a[2] * a[4];
    c[7] = a[2] * a[3] - a[0] * a[5];
    c[8] = a[0] * a[4] - a[1] * a[3];
    return a[0] * c[0] + a[1] * c[1] + a[2] * c[2];
}

/* Nearest rotation (polar decomposition) by the Newton iteration R <- (R + R^-T) / 2,
 * quadratic near a rotation (Higham, "Computing the polar decomposition", 1986). */
static void orthonormalise(double r[9])
{
    for (int it = 0; it < 8; it++) {
        double c[9];
        const double det = cofactor(r, c);
        for (int k = 0; k < 9; k++)
            r[k] = 0.5 * (r[k] + c[k] / det);
    }
}

/* Rotation -> unit quaternion (w, x, y, z) with w >= 0 (Shepperd's branches). */
static void quat_from(const double m[9], double q[4])
{
    const double tr = m[0] + m[4] + m[8];
    if (tr > 0) {
        const double s = 2 * sqrt(tr + 1);
        q[0] = s / 4, q[1] = (m[7] - m[5]) / s, q[2] = (m[2] - m[6]) / s, q[3] = (m[3] - m[1]) / s;
    } else if (m[0] > m[4] && m[0] > m[8]) {
        const double s = 2 * sqrt(1 + m[0] - m[4] - m[8]);
        q[0] = (m[7] - m[5]) / s, q[1] = s / 4, q[2] = (m[1] + m[3]) / s, q[3] = (m[2] + m[6]) / s;
    } else if (m[4] > m[8]) {
        const double s = 2 * sqrt(1 + m[4] - m[0] - m[8]);
        q[0] = (m[2] - m[6]) / s, q[1] = (m[1] + m[3]) / s, q[2] = s / 4, q[3] = (m[5] + m[7]) / s;
    } else {
        const double s = 2 * sqrt(1 + m[8] - m[0] - m[4]);
        q[0] = (m[3] - m[1]) / s, q[1] = (m[2] + m[6]) / s, q[2] = (m[5] + m[7]) / s, q[3] = s / 4;
    }
    if (q[0] < 0)
        for (int k = 0; k < 4; k++)
            q[k] = -q[k];
}

static void quat_to(const double q[4], double m[9])
{
    const double w = q[0], x = q[1], y = q[2], z = q[3];
    m[0] = 1 - 2 * (y * y + z * z), m[1] = 2 * (x * y - z * w), m[2] = 2 * (x * z + y * w);
    m[3] = 2 * (x * y + z * w), m[4] = 1 - 2 * (x * x + z * z), m[5] = 2 * (y * z - x * w);
    m[6] = 2 * (x * z - y * w), m[7] = 2 * (y * z + x * w), m[8] = 1 - 2 * (x * x + y * y);
}

/* The rectifying rotations of a rig (R orthonormal); *tilt receives the angle in degrees
 * between the half-rotated baseline t and the -x axis (0 for a horizontal rig with the
 * right camera on the right, 180 for swapped cameras). */
static void rig_rotations(const sinew_stereo_rig *rig, double rot[2][9], double *tilt)
{
    double q[4], Q[9], Qt[9], t[3];
    quat_from(rig->R, q);
    q[0] += 1; /* sqrt of a unit quaternion with w >= 0: normalise (1 + w, v) */
    const double n = sqrt(q[0] * q[0] + q[1] * q[1] + q[2] * q[2] + q[3] * q[3]);
    for (int k = 0; k < 4; k++)
        q[k] /= n;
    quat_to(q, Q);
    mat_t(Q, Qt);
    mat_vec(Qt, rig->T, t);
    const double len = sqrt(t[0] * t[0] + t[1] * t[1] + t[2] * t[2]);
    const double a[3] = {t[0] / len, t[1] / len, t[2] / len};
    const double c = -a[0];               /* cos of the angle to (-1, 0, 0) */
    const double v[3] = {0, -a[2], a[1]}; /* a x (-1, 0, 0) */
    *tilt = acos(c < -1 ? -1 : c > 1 ? 1 : c) * 45 / atan(1.0);
    double W[9] = {1, 0, 0, 0, 1, 0, 0, 0, 1};
    if (c > -1 + 1e-12) { /* Rodrigues: W = I + [v]x + [v]x^2 / (1 + c) */
        const double K[9] = {0, -v[2], v[1], v[2], 0, -v[0], -v[1], v[0], 0};
        double K2[9];
        mat_mul(K, K, K2);
        for (int k = 0; k < 9; k++)
            W[k] += K[k] + K2[k] / (1 + c);
    }
    mat_mul(W, Q, rot[0]);
    mat_mul(W, Qt, rot[1]);
}

int sinew__stereo_rig_check(sinew_ctx *ctx, sinew_stereo_rig *rig, const char *what)
{
    char name[160];
    const sinew_camera *cam[2] = {&rig->left, &rig->right};
    for (int c = 0; c < 2; c++) {
        snprintf(name, sizeof name, "%.120s (%s camera)", what, c ? "right" : "left");
        int st = sinew_camera_check(ctx, cam[c], name);
        if (st)
            return st;
    }
    double rt[9], rrt[9], err = 0, c9[9];
    mat_t(rig->R, rt);
    mat_mul(rig->R, rt, rrt);
    for (int k = 0; k < 9; k++)
        err = fmax(err, fabs(rrt[k] - (k % 4 == 0)));
    const double det = cofactor(rig->R, c9);
    if (!(err <= RIG_ORTHO_TOL) || !(det > 0))
        return sinew__fail(ctx, SINEW_EVALUE,
                           "%s: R is not a rotation (R R^T differs from I by %.3g, det %.3g)", what,
                           err, det);
    orthonormalise(rig->R);
    const double b = sqrt(rig->T[0] * rig->T[0] + rig->T[1] * rig->T[1] + rig->T[2] * rig->T[2]);
    if (!(b >= RIG_MIN_BASELINE) || b > RIG_MAX_BASELINE)
        return sinew__fail(ctx, SINEW_EVALUE,
                           "%s: impossible baseline |T| = %g m (need 1e-6 <= |T| <= %d m; "
                           "metres, not mm?)",
                           what, b, RIG_MAX_BASELINE);
    double rot[2][9], tilt;
    rig_rotations(rig, rot, &tilt);
    if (tilt > 180 - RIG_MAX_TILT)
        return sinew__fail(ctx, SINEW_EVALUE,
                           "%s: the right camera is left of the left one (swap the frames, or "
                           "R, T go the other way: X_right = R X_left + T)",
                           what);
    if (tilt > RIG_MAX_TILT)
        return sinew__fail(ctx, SINEW_EVALUE,
                           "%s: the baseline is %.0f degrees from horizontal (a vertical rig; "
                           "at most %.0f)",
                           what, tilt, RIG_MAX_TILT);
    return SINEW_OK;
}

/* ---- rectification ---- */

int sinew_stereo_rectify_init(sinew_ctx *ctx, sinew_stereo_rectification *rect,
                              const sinew_stereo_rig *rig, int width, int height)
{
    if (!ctx || !rect || !rig)
        return SINEW_EINVAL;
    if (!rig->raw || width < 1 || height < 1)
        return sinew__fail(ctx, SINEW_EINVAL, "stereo: rectification needs a raw rig (R, T)");
    if (rig->left.width && (rig->left.width != width || rig->left.height != height))
        return sinew__fail(ctx, SINEW_ESIZE,
                           "stereo: the rig is calibrated for %dx%d, frames are %dx%d",
                           rig->left.width, rig->left.height, width, height);
    memset(rect, 0, sizeof *rect);
    double tilt;
    rig_rotations(rig, rect->rot, &tilt);
    rect->cam[0] = rig->left;
    rect->cam[1] = rig->right;
    const double f = fmin(fmin(rig->left.fx, rig->left.fy), fmin(rig->right.fx, rig->right.fy));
    /* where each original image centre lands, relative to the rectified principal point */
    double off[2][2];
    for (int v = 0; v < 2; v++) {
        rect->cam[v].width = width;
        rect->cam[v].height = height;
        double ray[3], rr[3];
        if (!sinew_camera_pixel_to_ray(&rect->cam[v], 0.5 * (width - 1), 0.5 * (height - 1), ray))
            sinew_camera_pixel_to_ray(&rect->cam[v], rect->cam[v].cx, rect->cam[v].cy, ray);
        mat_vec(rect->rot[v], ray, rr);
        if (!(rr[2] > 0))
            return sinew__fail(ctx, SINEW_EVALUE, "stereo: the rig's %s camera turns away",
                               v ? "right" : "left");
        off[v][0] = f * rr[0] / rr[2];
        off[v][1] = f * rr[1] / rr[2];
    }
    sinew_stereo_calib *c = &rect->calib;
    c->fx = c->fy = f;
    c->cx = 0.5 * (width - 1) - 0.5 * (off[0][0] + off[1][0]);
    c->cy = 0.5 * (height - 1) - 0.5 * (off[0][1] + off[1][1]);
    c->doffs = 0;
    c->baseline = sqrt(rig->T[0] * rig->T[0] + rig->T[1] * rig->T[1] + rig->T[2] * rig->T[2]);
    c->width = width;
    c->height = height;
    return SINEW_OK;
}

/* Original pixel -> rectified pixel; *zr (may be NULL) the rectified z of the unit-z ray. */
static int to_rectified(const sinew_stereo_rectification *rect, int view, double u, double v,
                        double *ur, double *vr, double *zr)
{
    double ray[3], rr[3];
    if (!sinew_camera_pixel_to_ray(&rect->cam[view], u, v, ray))
        return 0;
    mat_vec(rect->rot[view], ray, rr);
    if (!(rr[2] > 0))
        return 0;
    const sinew_stereo_calib *c = &rect->calib;
    *ur = c->fx * rr[0] / rr[2] + c->cx;
    *vr = c->fy * rr[1] / rr[2] + c->cy;
    if (zr)
        *zr = rr[2];
    return 1;
}

int sinew_stereo_rectify_point(const sinew_stereo_rectification *rect, int view, double u, double v,
                               double *ur, double *vr)
{
    if (!rect || view < 0 || view > 1 || !ur || !vr)
        return 0;
    return to_rectified(rect, view, u, v, ur, vr, NULL);
}

/* Rectified pixel -> original pixel. Rays beyond the radius where the distortion
 * polynomial stops growing (it folds back there) and rays behind the camera fail. */
static int to_original(const sinew_stereo_rectification *rect, int view, double ur, double vr,
                       double *u, double *v)
{
    const sinew_stereo_calib *c = &rect->calib;
    const sinew_camera *cam = &rect->cam[view];
    const double ray[3] = {(ur - c->cx) / c->fx, (vr - c->cy) / c->fy, 1};
    double X[3];
    /* the transpose of rot: X_camera = rot^T X_rect */
    const double *m = rect->rot[view];
    for (int i = 0; i < 3; i++)
        X[i] = m[i] * ray[0] + m[3 + i] * ray[1] + m[6 + i] * ray[2];
    if (!(X[2] > 0))
        return 0;
    const double x = X[0] / X[2], y = X[1] / X[2], r2 = x * x + y * y;
    if (!(1 + r2 * (3 * cam->k1 + r2 * (5 * cam->k2 + 7 * cam->k3 * r2)) > 0))
        return 0;
    return sinew_camera_project(cam, X, u, v);
}

static double sample_at(const sinew_image *im, int x, int y, int ch)
{
    const size_t i = (size_t)x * im->channels + ch;
    switch (im->type) {
    case SINEW_U8:
        return sinew_image_row_u8(im, y)[i];
    case SINEW_U16:
        return sinew_image_row_u16(im, y)[i];
    default:
        return sinew_image_row_f32(im, y)[i];
    }
}

static void store_at(sinew_image *im, int x, int y, int ch, double v)
{
    const size_t i = (size_t)x * im->channels + ch;
    if (im->type == SINEW_F32) {
        sinew_image_row_f32(im, y)[i] = (float)v;
        return;
    }
    const double hi = im->type == SINEW_U8 ? 255 : 65535;
    v = floor(v + 0.5);
    v = v < 0 ? 0 : v > hi ? hi : v;
    if (im->type == SINEW_U8)
        sinew_image_row_u8(im, y)[i] = (uint8_t)v;
    else
        sinew_image_row_u16(im, y)[i] = (uint16_t)v;
}

int sinew_stereo_rectify_image(sinew_ctx *ctx, sinew_image *out, sinew_image *inside,
                               const sinew_image *in, const sinew_stereo_rectification *rect,
                               int view)
{
    if (!ctx || !out || !in || !in->data || !rect || view < 0 || view > 1)
        return SINEW_EINVAL;
    memset(out, 0, sizeof *out);
    if (inside)
        memset(inside, 0, sizeof *inside);
    const int w = rect->calib.width, h = rect->calib.height;
    if (in->channels < 1 || in->channels > 4 ||
        (in->type != SINEW_U8 && in->type != SINEW_U16 && in->type != SINEW_F32))
        return sinew__fail(ctx, SINEW_EINVAL, "stereo: rectify needs a 1-4 channel frame");
    if (in->width != w || in->height != h)
        return sinew__fail(ctx, SINEW_ESIZE, "stereo: frame is %dx%d, the rectification %dx%d",
                           in->width, in->height, w, h);
    int st = sinew_image_alloc(ctx, out, w, h, in->channels, in->type);
    if (!st && inside)
        st = sinew_image_alloc(ctx, inside, w, h, 1, SINEW_U8);
    if (st) {
        sinew_image_free(out);
        return st;
    }
    const int nt = sinew_ctx_threads(ctx), nc = in->channels;
    (void)nt;
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++) {
        for (int x = 0; x < w; x++) {
            double u, v;
            const int ok = to_original(rect, view, x, y, &u, &v) && u >= -0.5 && u <= w - 0.5 &&
                           v >= -0.5 && v <= h - 0.5;
            if (inside)
                sinew_image_row_u8(inside, y)[x] = ok ? 255 : 0;
            if (!ok) {
                for (int k = 0; k < nc; k++)
                    store_at(out, x, y, k, 0);
                continue;
            }
            u = u < 0 ? 0 : u > w - 1 ? w - 1 : u;
            v = v < 0 ? 0 : v > h - 1 ? h - 1 : v;
            const int x0 = (int)u, y0 = (int)v;
            const int x1 = x0 + 1 < w ? x0 + 1 : x0, y1 = y0 + 1 < h ? y0 + 1 : y0;
            const double ax = u - x0, ay = v - y0;
            for (int k = 0; k < nc; k++) {
                const double top =
                    (1 - ax) * sample_at(in, x0, y0, k) + ax * sample_at(in, x1, y0, k);
                const double bot =
                    (1 - ax) * sample_at(in, x0, y1, k) + ax * sample_at(in, x1, y1, k);
                store_at(out, x, y, k, (1 - ay) * top + ay * bot);
            }
        }
    }
    return SINEW_OK;
}

static int is_inside_map(const sinew_image *m, int w, int h)
{
    return !m ||
           (m->data && m->type == SINEW_U8 && m->channels == 1 && m->width == w && m->height == h);
}

int sinew_stereo_mark_outside(sinew_ctx *ctx, sinew_stereo_output *out,
                              const sinew_image *inside_left, const sinew_image *inside_right)
{
    if (!ctx || !out || !out->disparity || !out->mask || !out->disparity->data || !out->mask->data)
        return SINEW_EINVAL;
    const int w = out->disparity->width, h = out->disparity->height;
    if (out->mask->width != w || out->mask->height != h ||
        (out->confidence && (out->confidence->width != w || out->confidence->height != h)) ||
        !is_inside_map(inside_left, w, h) || !is_inside_map(inside_right, w, h))
        return sinew__fail(ctx, SINEW_ESIZE, "stereo: inside maps and outputs differ in size");
    const int bit = 1; /* SINEW_MASK_OUTSIDE is bit 1 */
    for (int y = 0; y < h; y++) {
        const float *d = sinew_image_row_f32(out->disparity, y);
        uint8_t *m = sinew_image_row_u8(out->mask, y);
        for (int x = 0; x < w; x++) {
            int off = inside_left && !sinew_image_row_u8(inside_left, y)[x];
            if (!off && inside_right && isfinite(d[x])) {
                const double xr = floor(x - (double)d[x] + 0.5);
                off = xr >= 0 && xr < w && !sinew_image_row_u8(inside_right, y)[(int)xr];
            }
            if (!off || (m[x] & SINEW_MASK_OUTSIDE))
                continue;
            out->stats.kept -= m[x] == 0;
            out->stats.reason[bit]++;
            m[x] |= SINEW_MASK_OUTSIDE;
            if (out->confidence)
                sinew_image_row_f32(out->confidence, y)[x] = 0;
        }
    }
    return SINEW_OK;
}

/* Depth of the rectified map at (u, v): bilinear on one surface, else nearest, else NaN. */
static double depth_at(const sinew_image *z, double u, double v)
{
    const int w = z->width, h = z->height;
    if (!(u >= -0.5 && u <= w - 0.5 && v >= -0.5 && v <= h - 0.5))
        return NAN;
    const int x0 = (int)floor(u), y0 = (int)floor(v);
    double q[4], lo = INFINITY, hi = -INFINITY;
    int all = 1;
    for (int k = 0; k < 4; k++) {
        const int x = x0 + (k & 1), y = y0 + (k >> 1);
        q[k] = x >= 0 && x < w && y >= 0 && y < h ? sinew_image_row_f32(z, y)[x] : NAN;
        all &= isfinite(q[k]) && q[k] > 0;
        lo = fmin(lo, q[k]);
        hi = fmax(hi, q[k]);
    }
    if (all && hi <= lo * (1 + SAME_SURFACE)) {
        const double ax = u - x0, ay = v - y0;
        return (1 - ay) * ((1 - ax) * q[0] + ax * q[1]) + ay * ((1 - ax) * q[2] + ax * q[3]);
    }
    int xn = (int)floor(u + 0.5), yn = (int)floor(v + 0.5);
    xn = xn < 0 ? 0 : xn >= w ? w - 1 : xn;
    yn = yn < 0 ? 0 : yn >= h ? h - 1 : yn;
    const double d = sinew_image_row_f32(z, yn)[xn];
    return isfinite(d) && d > 0 ? d : NAN;
}

int sinew_stereo_unrectify_depth(sinew_ctx *ctx, sinew_image *out, const sinew_image *z,
                                 const sinew_stereo_rectification *rect, int64_t *valid)
{
    if (!ctx || !out || !rect)
        return SINEW_EINVAL;
    memset(out, 0, sizeof *out);
    const int w = rect->calib.width, h = rect->calib.height;
    if (!z || !z->data || z->type != SINEW_F32 || z->channels != 1)
        return sinew__fail(ctx, SINEW_EINVAL, "stereo: unrectify needs an F32 1-channel depth");
    if (z->width != w || z->height != h)
        return sinew__fail(ctx, SINEW_ESIZE, "stereo: depth is %dx%d, the rectification %dx%d",
                           z->width, z->height, w, h);
    int st = sinew_image_alloc(ctx, out, w, h, 1, SINEW_F32);
    if (st)
        return st;
    const int nt = sinew_ctx_threads(ctx);
    (void)nt;
    SINEW_PARALLEL_FOR(nt)
    for (int y = 0; y < h; y++) {
        float *o = sinew_image_row_f32(out, y);
        for (int x = 0; x < w; x++) {
            double ur, vr, zr;
            /* the original ray (x, y, 1) has rectified z = zr, so the original z is
               the rectified depth divided by zr */
            const double d =
                to_rectified(rect, 0, x, y, &ur, &vr, &zr) ? depth_at(z, ur, vr) / zr : NAN;
            o[x] = isfinite(d) ? (float)d : NAN;
        }
    }
    int64_t n = 0;
    for (int y = 0; y < h; y++) {
        const float *o = sinew_image_row_f32(out, y);
        for (int x = 0; x < w; x++)
            n += isfinite(o[x]);
    }
    if (valid)
        *valid = n;
    return SINEW_OK;
}
