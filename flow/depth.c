/* SPDX-License-Identifier: MIT */
/* Depth conventions: raw codes, float metres, ray distance and disparity to one
 * canonical z map in metres (NaN = invalid), and the median used to warn about a
 * likely wrong scale. */
#include "flow/depth.h"

#include <float.h>
#include <math.h>
#include <stddef.h>
#include <string.h>

#include "flow/internal/base.h"
#include "flow/internal/parallel.h"

void sinew_depth_params_default(sinew_depth_params *p)
{
    if (!p)
        return;
    memset(p, 0, sizeof *p);
    p->kind = SINEW_DEPTH_Z;
    p->scale = 1000;
    p->near = 0;
    p->far = INFINITY;
    p->baseline = 0;
}

/* Classification of one pixel: 0 valid, 1 invalid code, 2 out of range. */
static int classify(const sinew_depth_params *p, double z)
{
    if (!isfinite(z) || !(z > 0) || z > FLT_MAX) /* not representable as float metres */
        return 1;
    if (z < p->near || z > p->far)
        return 2;
    return 0;
}

int sinew_depth_convert(sinew_ctx *ctx, sinew_image *z, sinew_depth_stats *stats,
                        const sinew_image *raw, const sinew_camera *cam,
                        const sinew_depth_params *p, const char *what)
{
    if (!ctx)
        return SINEW_EINVAL;
    if (!what)
        what = "depth";
    if (!p || !raw || !raw->data || !z) {
        if (z)
            memset(z, 0, sizeof *z);
        return sinew__fail(ctx, SINEW_EINVAL, "%s: depth map, parameters and output are required",
                           what);
    }
    memset(z, 0, sizeof *z);
    if (raw->channels != 1)
        return sinew__fail(ctx, SINEW_EUNSUPPORTED, "%s: depth must have 1 channel (got %d)", what,
                           raw->channels);
    if (raw->type == SINEW_U8)
        return sinew__fail(ctx, SINEW_EUNSUPPORTED,
                           "%s: 8-bit images cannot hold depth (expected 16-bit codes or float "
                           "metres)",
                           what);
    if (raw->type == SINEW_U16 && (!isfinite(p->scale) || !(p->scale > 0)))
        return sinew__fail(ctx, SINEW_EVALUE, "%s: depth scale must be > 0 (got %g)", what,
                           p->scale);
    if (isnan(p->near) || isnan(p->far) || p->near < 0 || !(p->far > p->near))
        return sinew__fail(ctx, SINEW_EVALUE, "%s: bad depth range [%g, %g]", what, p->near,
                           p->far);
    if (p->kind != SINEW_DEPTH_Z && p->kind != SINEW_DEPTH_RAY && p->kind != SINEW_DEPTH_DISPARITY)
        return sinew__fail(ctx, SINEW_EINVAL, "%s: unknown depth kind %d", what, (int)p->kind);
    if (p->kind != SINEW_DEPTH_Z) {
        if (!cam)
            return sinew__fail(ctx, SINEW_EINVAL, "%s: intrinsics needed for this depth kind",
                               what);
        int rc = sinew_camera_check(ctx, cam, what);
        if (rc)
            return rc;
    }
    if (p->kind == SINEW_DEPTH_DISPARITY && (!isfinite(p->baseline) || !(p->baseline > 0)))
        return sinew__fail(ctx, SINEW_EVALUE, "%s: disparity needs a baseline > 0 (got %g)", what,
                           p->baseline);
    int rc = sinew_image_alloc(ctx, z, raw->width, raw->height, 1, SINEW_F32);
    if (rc)
        return rc;
    const int w = raw->width, h = raw->height;
    size_t *cnt = sinew__calloc(ctx, (size_t)h * 3, sizeof *cnt);
    if (!cnt) {
        sinew_image_free(z);
        return SINEW_ENOMEM;
    }
    const double inv_scale = raw->type == SINEW_U16 ? 1.0 / p->scale : 1.0;
    const double fb = (p->kind == SINEW_DEPTH_DISPARITY) ? cam->fx * p->baseline : 0;
    SINEW_PARALLEL_FOR(sinew_ctx_threads(ctx))
    for (int y = 0; y < h; y++) {
        float *out = sinew_image_row_f32(z, y);
        size_t *c = cnt + (size_t)y * 3;
        for (int x = 0; x < w; x++) {
            double v;
            int bad_code = 0;
            if (raw->type == SINEW_U16) {
                uint16_t code = sinew_image_row_u16(raw, y)[x];
                bad_code = code == 0 || code == 65535;
                v = code * inv_scale;
            } else {
                v = sinew_image_row_f32(raw, y)[x];
                bad_code = !isfinite(v) || !(v > 0);
            }
            if (!bad_code) {
                if (p->kind == SINEW_DEPTH_DISPARITY) {
                    v = fb / v;
                } else if (p->kind == SINEW_DEPTH_RAY) {
                    double ray[3];
                    sinew_camera_pixel_to_ray(cam, x, y, ray);
                    v = v / sqrt(ray[0] * ray[0] + ray[1] * ray[1] + 1.0);
                }
            }
            int k = bad_code ? 1 : classify(p, v);
            c[k]++;
            out[x] = k == 0 ? (float)v : NAN;
        }
    }
    sinew_depth_stats st = {(size_t)w * (size_t)h, 0, 0, 0};
    for (int y = 0; y < h; y++) {
        st.valid += cnt[(size_t)y * 3];
        st.invalid_code += cnt[(size_t)y * 3 + 1];
        st.out_of_range += cnt[(size_t)y * 3 + 2];
    }
    sinew__free(ctx, cnt);
    if (stats)
        *stats = st;
    return SINEW_OK;
}

/* k-th smallest of a[0..n-1] (Wirth's selection; reorders a; values finite). */
static float select_kth(float *a, size_t n, size_t kk)
{
    ptrdiff_t l = 0, m = (ptrdiff_t)n - 1, k = (ptrdiff_t)kk;
    while (l < m) {
        float x = a[k];
        ptrdiff_t i = l, j = m;
        do {
            while (a[i] < x)
                i++;
            while (x < a[j])
                j--;
            if (i <= j) {
                float t = a[i];
                a[i] = a[j];
                a[j] = t;
                i++;
                j--;
            }
        } while (i <= j);
        if (j < k)
            l = i;
        if (k < i)
            m = j;
    }
    return a[k];
}

int sinew_depth_median(sinew_ctx *ctx, double *median, size_t *count, const sinew_image *z)
{
    if (!ctx || !z || !z->data || !median || z->type != SINEW_F32 || z->channels != 1)
        return SINEW_EINVAL;
    size_t n = 0;
    for (int y = 0; y < z->height; y++) {
        const float *r = sinew_image_row_f32(z, y);
        for (int x = 0; x < z->width; x++)
            n += isfinite(r[x]) != 0;
    }
    if (count)
        *count = n;
    if (n == 0) {
        *median = NAN;
        return SINEW_OK;
    }
    float *buf = sinew__alloc(ctx, n * sizeof *buf);
    if (!buf)
        return SINEW_ENOMEM;
    size_t k = 0;
    for (int y = 0; y < z->height; y++) {
        const float *r = sinew_image_row_f32(z, y);
        for (int x = 0; x < z->width; x++)
            if (isfinite(r[x]))
                buf[k++] = r[x];
    }
    *median = select_kth(buf, n, (n - 1) / 2);
    sinew__free(ctx, buf);
    return SINEW_OK;
}
