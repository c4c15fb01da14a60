/* SPDX-License-Identifier: MIT */
/* Stereo geometry and scoring around flow/stereo.c: the rectified calibration file,
 * disparity -> depth (Z = f B / (d + doffs), the Middlebury 2014 convention with doffs
 * the x-difference of the principal points), true disparity from stored codes, error
 * counts against it (bad-1px, bad-2px, mean absolute error: Scharstein & Szeliski, IJCV
 * 2002; D1: Menze & Geiger, CVPR 2015), and the rectification test (median vertical
 * offset of matched corners). cJSON stays inside this file. */
#include "flow/stereo.h"

#include <cJSON.h>
#include <ctype.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "flow/internal/base.h"
#include "flow/internal/io.h"
#include "flow/internal/parallel.h"
#include "flow/io.h"

/* ---- true disparity and scores ---- */

static double first_channel(const sinew_image *im, int y, int x)
{
    const size_t i = (size_t)x * im->channels;
    return im->type == SINEW_U8 ? sinew_image_row_u8(im, y)[i] : sinew_image_row_u16(im, y)[i];
}

static int is_codes(const sinew_image *im)
{
    return im && im->data && (im->type == SINEW_U8 || im->type == SINEW_U16);
}

static int is_map(const sinew_image *im)
{
    return im && im->data && im->type == SINEW_F32 && im->channels == 1;
}

int sinew_stereo_truth(sinew_ctx *ctx, sinew_image *out, const sinew_image *codes, double scale)
{
    if (!ctx || !out)
        return SINEW_EINVAL;
    memset(out, 0, sizeof *out);
    if (!is_codes(codes) || !isfinite(scale) || scale <= 0)
        return sinew__fail(ctx, SINEW_EINVAL, "stereo: truth needs 8/16-bit codes and a scale > 0");
    int st = sinew_image_alloc(ctx, out, codes->width, codes->height, 1, SINEW_F32);
    if (st)
        return st;
    for (int y = 0; y < codes->height; y++) {
        float *o = sinew_image_row_f32(out, y);
        for (int x = 0; x < codes->width; x++) {
            const double v = first_channel(codes, y, x);
            o[x] = v > 0 ? (float)(v / scale) : NAN;
        }
    }
    return SINEW_OK;
}

int sinew_stereo_score(sinew_ctx *ctx, sinew_stereo_scores *out, const sinew_image *est,
                       const sinew_image *truth, const sinew_image *region)
{
    if (!ctx || !out)
        return SINEW_EINVAL;
    memset(out, 0, sizeof *out);
    if (!is_map(est) || !is_map(truth) || (region && !is_codes(region)))
        return sinew__fail(ctx, SINEW_EINVAL,
                           "stereo: score needs F32 1-channel maps and an 8/16-bit region");
    const int w = est->width, h = est->height;
    if (truth->width != w || truth->height != h ||
        (region && (region->width != w || region->height != h)))
        return sinew__fail(ctx, SINEW_ESIZE, "stereo: estimate is %dx%d, truth %dx%d", w, h,
                           truth->width, truth->height);
    for (int y = 0; y < h; y++) {
        const float *e = sinew_image_row_f32(est, y), *t = sinew_image_row_f32(truth, y);
        double row_abs = 0;
        for (int x = 0; x < w; x++) {
            if (!isfinite(t[x]) || (region && first_channel(region, y, x) == 0))
                continue;
            const double err = isfinite(e[x]) ? fabs((double)e[x] - t[x]) : INFINITY;
            out->pixels++;
            out->bad1 += err > 1.0;
            out->bad2 += err > 2.0;
            out->d1 += err > 3.0 && err > 0.05 * fabs((double)t[x]);
            row_abs += isfinite(err) ? err : fabs((double)t[x]);
        }
        out->abs_sum += row_abs;
    }
    return SINEW_OK;
}

/* ---- depth ---- */

int sinew_stereo_depth(sinew_ctx *ctx, sinew_image *z, const sinew_image *disparity,
                       const sinew_image *mask, const sinew_stereo_calib *c, int64_t *valid)
{
    if (!ctx || !z)
        return SINEW_EINVAL;
    memset(z, 0, sizeof *z);
    if (!is_map(disparity) || !c)
        return sinew__fail(ctx, SINEW_EINVAL, "stereo: depth needs an F32 1-channel disparity");
    if (!(c->fx > 0) || !isfinite(c->fx) || !(c->baseline > 0) || !isfinite(c->baseline) ||
        !isfinite(c->doffs))
        return sinew__fail(ctx, SINEW_EVALUE,
                           "stereo: depth needs fx > 0, baseline > 0, finite doffs");
    const int w = disparity->width, h = disparity->height;
    if (mask && (mask->type != SINEW_U8 || mask->channels != 1))
        return sinew__fail(ctx, SINEW_EINVAL, "stereo: the mask must be 8-bit, 1 channel");
    if (mask && (mask->width != w || mask->height != h))
        return sinew__fail(ctx, SINEW_ESIZE, "stereo: mask is %dx%d, disparity %dx%d", mask->width,
                           mask->height, w, h);
    int st = sinew_image_alloc(ctx, z, w, h, 1, SINEW_F32);
    if (st)
        return st;
    const double fb = c->fx * c->baseline;
    int64_t n = 0;
    for (int y = 0; y < h; y++) {
        const float *d = sinew_image_row_f32(disparity, y);
        const uint8_t *m = mask ? sinew_image_row_u8(mask, y) : NULL;
        float *o = sinew_image_row_f32(z, y);
        for (int x = 0; x < w; x++) {
            const double den = (double)d[x] + c->doffs;
            const double v = fb / den;
            const int ok =
                (!m || !m[x]) && isfinite(d[x]) && d[x] > 0 && den > 0 && isfinite(v) && v < 3.0e38;
            o[x] = ok ? (float)v : NAN;
            n += ok;
        }
    }
    if (valid)
        *valid = n;
    return SINEW_OK;
}

/* ---- calibration file ---- */

#define CALIB_MAX_FILE ((size_t)1 << 20)
#define CALIB_MAX_FOCAL 1e6    /* px; larger is not a camera (our bound) */
#define CALIB_MAX_BASELINE 100 /* m; wider rigs are not what sinew serves (our bound) */

static int number(sinew_ctx *ctx, const cJSON *it, const char *path, const char *key, double *v)
{
    if (!cJSON_IsNumber(it) || !isfinite(it->valuedouble))
        return sinew__fail(ctx, SINEW_EVALUE, "%s: \"%s\" must be a finite number", path, key);
    *v = it->valuedouble;
    return SINEW_OK;
}

/* One camera object {"fx","fy","cx","cy"} into v[0..3]. */
static int camera_obj(sinew_ctx *ctx, const cJSON *o, const char *path, const char *name,
                      double v[4])
{
    static const char *const keys[4] = {"fx", "fy", "cx", "cy"};
    if (!cJSON_IsObject(o))
        return sinew__fail(ctx, SINEW_ECONFIG, "%s: \"%s\" must be an object with fx, fy, cx, cy",
                           path, name);
    int have = 0;
    for (const cJSON *it = o->child; it; it = it->next) {
        int k = 0;
        while (k < 4 && strcmp(it->string, keys[k]) != 0)
            k++;
        if (k == 4 || (have & (1 << k)))
            return sinew__fail(ctx, SINEW_ECONFIG, "%s: unknown or repeated key \"%s.%s\"", path,
                               name, it->string);
        int st = number(ctx, it, path, it->string, &v[k]);
        if (st)
            return st;
        have |= 1 << k;
    }
    if (have != 15)
        return sinew__fail(ctx, SINEW_ECONFIG, "%s: \"%s\" needs fx, fy, cx and cy", path, name);
    for (int k = 0; k < 2; k++)
        if (!(v[k] > 0) || v[k] >= CALIB_MAX_FOCAL)
            return sinew__fail(ctx, SINEW_EVALUE,
                               "%s: impossible focal length %s.%s = %g px (need 0 < f < 1e6)", path,
                               name, keys[k], v[k]);
    return SINEW_OK;
}

static int calib_parse(sinew_ctx *ctx, sinew_stereo_calib *out, const cJSON *root, const char *path)
{
    if (!cJSON_IsObject(root))
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: expected a JSON object", path);
    double l[4], r[4], base = NAN, size[2] = {0, 0};
    int have = 0, st;
    for (const cJSON *it = root->child; it; it = it->next) {
        const char *k = it->string;
        int bit;
        if (!strcmp(k, "left"))
            bit = 1, st = camera_obj(ctx, it, path, k, l);
        else if (!strcmp(k, "right"))
            bit = 2, st = camera_obj(ctx, it, path, k, r);
        else if (!strcmp(k, "baseline"))
            bit = 4, st = number(ctx, it, path, k, &base);
        else if (!strcmp(k, "width") || !strcmp(k, "height")) {
            bit = k[0] == 'w' ? 8 : 16;
            st = number(ctx, it, path, k, &size[bit == 16]);
            if (!st && (size[bit == 16] < 1 || size[bit == 16] > 1e6 ||
                        size[bit == 16] != floor(size[bit == 16])))
                st = sinew__fail(ctx, SINEW_EVALUE, "%s: \"%s\" must be a positive integer", path,
                                 k);
        } else if (!strcmp(k, "comment"))
            bit = 32, st = SINEW_OK;
        else
            return sinew__fail(ctx, SINEW_ECONFIG, "%s: unknown key \"%s\"", path, k);
        if (st)
            return st;
        if (have & bit)
            return sinew__fail(ctx, SINEW_ECONFIG, "%s: key \"%s\" appears twice", path, k);
        have |= bit;
    }
    if ((have & 7) != 7)
        return sinew__fail(ctx, SINEW_ECONFIG,
                           "%s: \"left\", \"right\" and \"baseline\" are required", path);
    if (!!(have & 8) != !!(have & 16))
        return sinew__fail(ctx, SINEW_ECONFIG, "%s: give both width and height, or neither", path);
    if (!(base > 0) || base > CALIB_MAX_BASELINE)
        return sinew__fail(
            ctx, SINEW_EVALUE,
            "%s: impossible baseline %g m (need 0 < baseline <= %d m; metres, not mm?)", path, base,
            CALIB_MAX_BASELINE);
    if (fabs(l[0] - r[0]) > 0.01 * l[0] || fabs(l[1] - r[1]) > 0.01 * l[1])
        return sinew__fail(ctx, SINEW_EVALUE,
                           "%s: focal lengths of the two cameras differ by more than 1 %% (not a "
                           "rectified pair)",
                           path);
    if (fabs(l[3] - r[3]) > 1.0)
        return sinew__fail(ctx, SINEW_EVALUE,
                           "%s: cy differs by %g px between the cameras (not a rectified pair)",
                           path, fabs(l[3] - r[3]));
    memset(out, 0, sizeof *out);
    out->fx = l[0];
    out->fy = l[1];
    out->cx = l[2];
    out->cy = l[3];
    out->doffs = r[2] - l[2];
    out->baseline = base;
    out->width = (int)size[0];
    out->height = (int)size[1];
    return SINEW_OK;
}

int sinew_stereo_calib_load(sinew_ctx *ctx, sinew_stereo_calib *calib, const char *path)
{
    if (!ctx || !calib || !path)
        return SINEW_EINVAL;
    unsigned char *buf;
    size_t len;
    int st = sinew_read_file(ctx, &buf, &len, path, CALIB_MAX_FILE);
    if (st)
        return st;
    if (memchr(buf, 0, len)) {
        sinew_ctx_dealloc(ctx, buf);
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: binary data in a calibration file", path);
    }
    cJSON *root = cJSON_ParseWithLength((const char *)buf, len);
    sinew_ctx_dealloc(ctx, buf);
    if (!root)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: malformed JSON (NaN/Infinity are not JSON)",
                           path);
    st = calib_parse(ctx, calib, root, path);
    cJSON_Delete(root);
    return st;
}

/* ---- writing maps ---- */

int sinew_stereo_write_map(sinew_ctx *ctx, const char *path, const sinew_image *map,
                           double png_scale)
{
    if (!ctx || !path || !is_map(map))
        return ctx ? sinew__fail(ctx, SINEW_EINVAL, "stereo: a map is F32 with 1 channel")
                   : SINEW_EINVAL;
    if (sinew__has_ext(path, ".npy"))
        return sinew_npy_write_image(ctx, path, map, 0);
    if (sinew__has_ext(path, ".pfm"))
        return sinew_pfm_write_image(ctx, path, map);
    if (!sinew__has_ext(path, ".png"))
        return sinew__fail(ctx, SINEW_EUNSUPPORTED, "%s: write .npy, .pfm or .png (16-bit)", path);
    if (!isfinite(png_scale) || png_scale <= 0)
        return sinew__fail(ctx, SINEW_EINVAL, "%s: the PNG scale must be > 0", path);
    sinew_image codes;
    int st = sinew_image_alloc(ctx, &codes, map->width, map->height, 1, SINEW_U16);
    if (st)
        return st;
    for (int y = 0; y < map->height; y++) {
        const float *v = sinew_image_row_f32(map, y);
        uint16_t *o = sinew_image_row_u16(&codes, y);
        for (int x = 0; x < map->width; x++) {
            const double c = isfinite(v[x]) && v[x] > 0 ? floor((double)v[x] * png_scale + 0.5) : 0;
            o[x] = c >= 1 && c <= 65535 ? (uint16_t)c : 0;
        }
    }
    st = sinew_image_write_png(ctx, path, &codes);
    sinew_image_free(&codes);
    return st;
}
