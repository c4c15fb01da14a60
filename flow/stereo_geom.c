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
#include "flow/internal/stereo.h"
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

/* One camera object {"fx","fy","cx","cy", optional "k1","k2","p1","p2","k3"} into
 * v[0..8] (fx fy cx cy k1 k2 p1 p2 k3; absent coefficients 0); *dist = 1 when a
 * distortion key was present. */
static int camera_obj(sinew_ctx *ctx, const cJSON *o, const char *path, const char *name,
                      double v[9], int *dist)
{
    static const char *const keys[9] = {"fx", "fy", "cx", "cy", "k1", "k2", "p1", "p2", "k3"};
    if (!cJSON_IsObject(o))
        return sinew__fail(ctx, SINEW_ECONFIG, "%s: \"%s\" must be an object with fx, fy, cx, cy",
                           path, name);
    int have = 0;
    for (int k = 0; k < 9; k++)
        v[k] = 0;
    for (const cJSON *it = o->child; it; it = it->next) {
        int k = 0;
        while (k < 9 && strcmp(it->string, keys[k]) != 0)
            k++;
        if (k == 9 || (have & (1 << k)))
            return sinew__fail(ctx, SINEW_ECONFIG, "%s: unknown or repeated key \"%s.%s\"", path,
                               name, it->string);
        int st = number(ctx, it, path, it->string, &v[k]);
        if (st)
            return st;
        have |= 1 << k;
    }
    if ((have & 15) != 15)
        return sinew__fail(ctx, SINEW_ECONFIG, "%s: \"%s\" needs fx, fy, cx and cy", path, name);
    for (int k = 0; k < 2; k++)
        if (!(v[k] > 0) || v[k] >= CALIB_MAX_FOCAL)
            return sinew__fail(ctx, SINEW_EVALUE,
                               "%s: impossible focal length %s.%s = %g px (need 0 < f < 1e6)", path,
                               name, keys[k], v[k]);
    *dist = have > 15;
    return SINEW_OK;
}

/* n numbers from a flat array of n, or (n = 9) from 3 rows of 3. */
static int numbers(sinew_ctx *ctx, const cJSON *it, const char *path, const char *key, double *v,
                   int n)
{
    int k = 0;
    for (const cJSON *a = cJSON_IsArray(it) ? it->child : NULL; a; a = a->next) {
        if (n == 9 && cJSON_IsArray(a) && cJSON_GetArraySize(a) == 3 && k % 3 == 0) {
            for (const cJSON *b = a->child; b; b = b->next)
                if (number(ctx, b, path, key, &v[k++]))
                    return SINEW_EVALUE;
        } else if (k >= n || number(ctx, a, path, key, &v[k++]))
            return sinew__fail(ctx, SINEW_EVALUE, "%s: \"%s\" must be %s", path, key,
                               n == 9 ? "9 numbers (row-major) or 3 rows of 3" : "3 numbers");
        if (k > n)
            break;
    }
    if (k != n)
        return sinew__fail(ctx, SINEW_EVALUE, "%s: \"%s\" must be %s", path, key,
                           n == 9 ? "9 numbers (row-major) or 3 rows of 3" : "3 numbers");
    return SINEW_OK;
}

enum {
    K_LEFT = 1,
    K_RIGHT = 2,
    K_BASE = 4,
    K_W = 8,
    K_H = 16,
    K_COMMENT = 32,
    K_R = 64,
    K_T = 128
};

/* Both forms: form 1 (baseline) fills rig->calib, form 2 (R, T) the cameras and R, T
 * (validated by sinew__stereo_rig_check in flow/stereo_rectify.c). */
static int calib_parse(sinew_ctx *ctx, sinew_stereo_rig *rig, const cJSON *root, const char *path)
{
    static const char *const names[8] = {"left",   "right",   "baseline", "width",
                                         "height", "comment", "R",        "T"};
    if (!cJSON_IsObject(root))
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: expected a JSON object", path);
    double l[9] = {0}, r[9] = {0}, base = NAN, size[2] = {0, 0}, R[9] = {0}, T[3] = {0};
    int have = 0, st, dl = 0, dr = 0;
    for (const cJSON *it = root->child; it; it = it->next) {
        const char *k = it->string;
        int i = 0;
        while (i < 8 && strcmp(k, names[i]) != 0)
            i++;
        if (i == 8)
            return sinew__fail(ctx, SINEW_ECONFIG, "%s: unknown key \"%s\"", path, k);
        const int bit = 1 << i;
        if (have & bit)
            return sinew__fail(ctx, SINEW_ECONFIG, "%s: key \"%s\" appears twice", path, k);
        if (bit == K_LEFT || bit == K_RIGHT)
            st = camera_obj(ctx, it, path, k, bit == K_LEFT ? l : r, bit == K_LEFT ? &dl : &dr);
        else if (bit == K_BASE)
            st = number(ctx, it, path, k, &base);
        else if (bit == K_R || bit == K_T)
            st = numbers(ctx, it, path, k, bit == K_R ? R : T, bit == K_R ? 9 : 3);
        else if (bit == K_W || bit == K_H) {
            double *v = &size[bit == K_H];
            st = number(ctx, it, path, k, v);
            if (!st && (*v < 1 || *v > 1e6 || *v != floor(*v)))
                st = sinew__fail(ctx, SINEW_EVALUE, "%s: \"%s\" must be a positive integer", path,
                                 k);
        } else
            st = SINEW_OK;
        if (st)
            return st;
        have |= bit;
    }
    if (!!(have & K_W) != !!(have & K_H))
        return sinew__fail(ctx, SINEW_ECONFIG, "%s: give both width and height, or neither", path);
    if ((have & (K_LEFT | K_RIGHT)) != (K_LEFT | K_RIGHT))
        return sinew__fail(ctx, SINEW_ECONFIG, "%s: \"left\" and \"right\" are required", path);
    memset(rig, 0, sizeof *rig);
    if (have & (K_R | K_T)) {
        if ((have & (K_R | K_T)) != (K_R | K_T) || (have & K_BASE))
            return sinew__fail(ctx, SINEW_ECONFIG,
                               "%s: a raw rig needs both \"R\" and \"T\" (and no \"baseline\": "
                               "it is |T|)",
                               path);
        rig->raw = 1;
        sinew_camera *cam[2] = {&rig->left, &rig->right};
        const double *v[2] = {l, r};
        for (int c = 0; c < 2; c++) {
            sinew_camera_init(cam[c], v[c][0], v[c][1], v[c][2], v[c][3], (int)size[0],
                              (int)size[1]);
            cam[c]->k1 = v[c][4];
            cam[c]->k2 = v[c][5];
            cam[c]->p1 = v[c][6];
            cam[c]->p2 = v[c][7];
            cam[c]->k3 = v[c][8];
        }
        memcpy(rig->R, R, sizeof R);
        memcpy(rig->T, T, sizeof T);
        return sinew__stereo_rig_check(ctx, rig, path);
    }
    if (!(have & K_BASE))
        return sinew__fail(
            ctx, SINEW_ECONFIG,
            "%s: give \"baseline\" (a rectified pair) or \"R\" and \"T\" (a raw rig)", path);
    if (dl || dr)
        return sinew__fail(ctx, SINEW_ECONFIG,
                           "%s: distortion coefficients need \"R\" and \"T\" (a rectified pair "
                           "has none)",
                           path);
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
    sinew_stereo_calib *out = &rig->calib;
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

int sinew_stereo_rig_load(sinew_ctx *ctx, sinew_stereo_rig *rig, const char *path)
{
    if (!ctx || !rig || !path)
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
    st = calib_parse(ctx, rig, root, path);
    cJSON_Delete(root);
    return st;
}

int sinew_stereo_calib_load(sinew_ctx *ctx, sinew_stereo_calib *calib, const char *path)
{
    if (!ctx || !calib || !path)
        return SINEW_EINVAL;
    sinew_stereo_rig rig;
    int st = sinew_stereo_rig_load(ctx, &rig, path);
    if (st)
        return st;
    if (rig.raw)
        return sinew__fail(ctx, SINEW_ECONFIG,
                           "%s: a raw rig (R, T) must be rectified first (sinew_stereo_rig_load)",
                           path);
    *calib = rig.calib;
    return SINEW_OK;
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
