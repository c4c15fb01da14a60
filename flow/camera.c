/* SPDX-License-Identifier: MIT */
/* Camera intrinsics: loading from JSON or a plain 3x3 matrix text, validation,
 * rescaling, Brown–Conrady distortion and its iterative inversion, back-projection and
 * projection. cJSON stays inside this file (and the match writer); public headers only
 * see the sinew_camera value type. */
#include "flow/camera.h"

#include <cJSON.h>
#include <ctype.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "flow/internal/base.h"

#define CAMERA_MAX_FILE ((size_t)1 << 20)
#define CAMERA_MAX_COEF 1e3
#define CAMERA_MIN_FOCAL 0.1

void sinew_camera_init(sinew_camera *cam, double fx, double fy, double cx, double cy, int width,
                       int height)
{
    if (!cam)
        return;
    memset(cam, 0, sizeof *cam);
    cam->fx = fx;
    cam->fy = fy;
    cam->cx = cx;
    cam->cy = cy;
    cam->width = width;
    cam->height = height;
}

int sinew_camera_has_distortion(const sinew_camera *cam)
{
    return cam && (cam->k1 != 0 || cam->k2 != 0 || cam->k3 != 0 || cam->p1 != 0 || cam->p2 != 0);
}

int sinew_camera_check(sinew_ctx *ctx, const sinew_camera *cam, const char *what)
{
    if (!ctx || !cam)
        return SINEW_EINVAL;
    if (!what)
        what = "intrinsics";
    const struct {
        const char *name;
        double v;
    } f[] = {{"fx", cam->fx}, {"fy", cam->fy}, {"cx", cam->cx}, {"cy", cam->cy}, {"k1", cam->k1},
             {"k2", cam->k2}, {"k3", cam->k3}, {"p1", cam->p1}, {"p2", cam->p2}};
    for (size_t i = 0; i < sizeof f / sizeof f[0]; i++)
        if (!isfinite(f[i].v))
            return sinew__fail(ctx, SINEW_EVALUE, "%s: %s is not a finite number", what, f[i].name);
    /* Below CAMERA_MIN_FOCAL px the pinhole field of view exceeds 179.9 degrees even for a
     * 640-px-wide image: such values come from normalised or mis-scaled intrinsics, and
     * they blow unprojected coordinates out of float range. */
    if (!(cam->fx >= CAMERA_MIN_FOCAL))
        return sinew__fail(ctx, SINEW_EVALUE, "%s: fx must be >= %g pixels (got %g)", what,
                           CAMERA_MIN_FOCAL, cam->fx);
    if (!(cam->fy >= CAMERA_MIN_FOCAL))
        return sinew__fail(ctx, SINEW_EVALUE, "%s: fy must be >= %g pixels (got %g)", what,
                           CAMERA_MIN_FOCAL, cam->fy);
    if (fabs(cam->cx) > 1e7 || fabs(cam->cy) > 1e7 || cam->fx > 1e7 || cam->fy > 1e7)
        return sinew__fail(ctx, SINEW_EVALUE, "%s: implausible focal length or centre", what);
    for (size_t i = 4; i < sizeof f / sizeof f[0]; i++)
        if (fabs(f[i].v) > CAMERA_MAX_COEF)
            return sinew__fail(ctx, SINEW_EVALUE, "%s: distortion %s = %g is implausible", what,
                               f[i].name, f[i].v);
    if (cam->width < 0 || cam->height < 0 || (cam->width == 0) != (cam->height == 0))
        return sinew__fail(ctx, SINEW_EVALUE,
                           "%s: width and height must both be positive (or both absent), got "
                           "%dx%d",
                           what, cam->width, cam->height);
    return SINEW_OK;
}

/* ---- distortion ---- */

void sinew_camera_distort(const sinew_camera *cam, double x, double y, double *xd, double *yd)
{
    double r2 = x * x + y * y;
    double radial = 1 + r2 * (cam->k1 + r2 * (cam->k2 + r2 * cam->k3));
    *xd = x * radial + 2 * cam->p1 * x * y + cam->p2 * (r2 + 2 * x * x);
    *yd = y * radial + cam->p1 * (r2 + 2 * y * y) + 2 * cam->p2 * x * y;
}

int sinew_camera_undistort(const sinew_camera *cam, double xd, double yd, double *xo, double *yo)
{
    if (!sinew_camera_has_distortion(cam)) {
        *xo = xd;
        *yo = yd;
        return 1;
    }
    const double k1 = cam->k1, k2 = cam->k2, k3 = cam->k3, p1 = cam->p1, p2 = cam->p2;
    double x = xd, y = yd;
    for (int it = 0; it < 20; it++) {
        double r2 = x * x + y * y;
        double radial = 1 + r2 * (k1 + r2 * (k2 + r2 * k3));
        double dradial = k1 + r2 * (2 * k2 + 3 * k3 * r2); /* d radial / d r2 */
        double fx = x * radial + 2 * p1 * x * y + p2 * (r2 + 2 * x * x) - xd;
        double fy = y * radial + p1 * (r2 + 2 * y * y) + 2 * p2 * x * y - yd;
        if (fabs(fx) < 1e-12 && fabs(fy) < 1e-12) {
            *xo = x;
            *yo = y;
            return 1;
        }
        /* Jacobian of the distortion map. */
        double jxx = radial + 2 * x * x * dradial + 2 * p1 * y + 6 * p2 * x;
        double jxy = 2 * x * y * dradial + 2 * p1 * x + 2 * p2 * y;
        double jyx = 2 * x * y * dradial + 2 * p1 * x + 2 * p2 * y;
        double jyy = radial + 2 * y * y * dradial + 6 * p1 * y + 2 * p2 * x;
        double det = jxx * jyy - jxy * jyx;
        if (!isfinite(det) || fabs(det) < 1e-12)
            break;
        x -= (jyy * fx - jxy * fy) / det;
        y -= (-jyx * fx + jxx * fy) / det;
        if (!isfinite(x) || !isfinite(y))
            break;
    }
    *xo = x;
    *yo = y;
    double xc, yc;
    sinew_camera_distort(cam, x, y, &xc, &yc);
    return isfinite(xc) && fabs(xc - xd) < 1e-9 && fabs(yc - yd) < 1e-9;
}

int sinew_camera_pixel_to_ray(const sinew_camera *cam, double u, double v, double ray[3])
{
    double xd = (u - cam->cx) / cam->fx, yd = (v - cam->cy) / cam->fy;
    int ok = sinew_camera_undistort(cam, xd, yd, &ray[0], &ray[1]);
    ray[2] = 1;
    return ok;
}

int sinew_camera_unproject(const sinew_camera *cam, double u, double v, double z, double X[3])
{
    double ray[3];
    int ok = sinew_camera_pixel_to_ray(cam, u, v, ray);
    X[0] = ray[0] * z;
    X[1] = ray[1] * z;
    X[2] = z;
    return ok;
}

int sinew_camera_project(const sinew_camera *cam, const double X[3], double *u, double *v)
{
    if (!(X[2] > 0) || !isfinite(X[0]) || !isfinite(X[1]) || !isfinite(X[2]))
        return 0;
    double xd, yd;
    sinew_camera_distort(cam, X[0] / X[2], X[1] / X[2], &xd, &yd);
    *u = cam->fx * xd + cam->cx;
    *v = cam->fy * yd + cam->cy;
    return 1;
}

int sinew_camera_roundtrip_error(sinew_ctx *ctx, double *max_px, long *failures,
                                 const sinew_camera *cam, int width, int height, int step)
{
    if (!ctx || !cam || !max_px)
        return SINEW_EINVAL;
    if (step < 1)
        return sinew__fail(ctx, SINEW_EINVAL, "intrinsics: round-trip step must be >= 1");
    if (width <= 0 || height <= 0) {
        width = cam->width;
        height = cam->height;
    }
    if (width <= 0 || height <= 0)
        return sinew__fail(ctx, SINEW_EINVAL, "intrinsics: round trip needs an image size");
    double worst = 0;
    long bad = 0;
    for (int yi = 0;; yi += step) {
        int y = yi < height ? yi : height - 1;
        for (int xi = 0;; xi += step) {
            int x = xi < width ? xi : width - 1;
            double ray[3], u, v;
            if (!sinew_camera_pixel_to_ray(cam, x, y, ray))
                bad++;
            if (sinew_camera_project(cam, ray, &u, &v)) {
                double e = hypot(u - x, v - y);
                if (!(e <= worst))
                    worst = e; /* NaN propagates as a huge error */
            } else {
                bad++;
            }
            if (x == width - 1)
                break;
        }
        if (y == height - 1)
            break;
    }
    *max_px = worst;
    if (failures)
        *failures = bad;
    return SINEW_OK;
}

/* ---- rescaling ---- */

int sinew_camera_centre_check(const sinew_camera *cam, int width, int height, char *msg, size_t n)
{
    if (!cam || width < 1 || height < 1)
        return 0;
    double dx = cam->cx - 0.5 * (width - 1), dy = cam->cy - 0.5 * (height - 1);
    if (fabs(dx) <= 0.25 * width && fabs(dy) <= 0.25 * height)
        return 0;
    if (msg && n)
        snprintf(msg, n,
                 "principal point (%.1f, %.1f) is more than 25%% of the size from the centre "
                 "of the %dx%d images; are the intrinsics for %.0fx%.0f frames?",
                 cam->cx, cam->cy, width, height, 2 * (cam->cx + 0.5), 2 * (cam->cy + 0.5));
    return 1;
}

int sinew_camera_fit(sinew_ctx *ctx, sinew_camera *out, const sinew_camera *in, int width,
                     int height, const char *what)
{
    if (!ctx || !in || !out)
        return SINEW_EINVAL;
    if (!what)
        what = "intrinsics";
    if (width < 1 || height < 1)
        return sinew__fail(ctx, SINEW_EINVAL, "%s: cannot fit to an image of %dx%d pixels", what,
                           width, height);
    sinew_camera c = *in;
    if (in->width > 0 && in->height > 0 && (in->width != width || in->height != height)) {
        double sx = (double)width / in->width, sy = (double)height / in->height;
        if (fabs(sx - sy) > 0.01 * (sx > sy ? sx : sy))
            return sinew__fail(ctx, SINEW_ESIZE,
                               "%s: calibrated for %dx%d, images are %dx%d (different aspect "
                               "ratio: cropped images need their own intrinsics)",
                               what, in->width, in->height, width, height);
        c.fx = sx * in->fx;
        c.fy = sy * in->fy;
        c.cx = sx * (in->cx + 0.5) - 0.5;
        c.cy = sy * (in->cy + 0.5) - 0.5;
    }
    c.width = width;
    c.height = height;
    *out = c;
    return SINEW_OK;
}

/* ---- loading ---- */

static int load_json(sinew_ctx *ctx, sinew_camera *cam, const char *text, const char *path)
{
    const char *end = NULL;
    cJSON *root = cJSON_ParseWithOpts(text, &end, 1);
    if (!root) {
        /* Python's json module writes NaN/Infinity, which is not JSON: name it as a
         * hostile value rather than a syntax error. */
        const char *e = end ? end : text;
        while (*e == '-' || isspace((unsigned char)*e))
            e++;
        if (!strncmp(e, "NaN", 3) || !strncmp(e, "nan", 3) || !strncmp(e, "Infinity", 8) ||
            !strncmp(e, "inf", 3))
            return sinew__fail(ctx, SINEW_EVALUE, "%s: NaN/Infinity is not a valid value", path);
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: malformed JSON near byte %ld", path,
                           (long)(e - text));
    }
    int rc = SINEW_OK;
    if (!cJSON_IsObject(root)) {
        rc = sinew__fail(ctx, SINEW_EFORMAT, "%s: expected a JSON object", path);
        goto done;
    }
    sinew_camera c;
    memset(&c, 0, sizeof c);
    int have = 0; /* bits: fx fy cx cy width height */
    int seen = 0; /* bits: every key in `keys` */
    for (cJSON *it = root->child; it; it = it->next) {
        const char *k = it->string ? it->string : "";
        if (!strcmp(k, "comment"))
            continue;
        static const char *const keys[] = {"fx", "fy", "cx", "cy", "width", "height",
                                           "k1", "k2", "k3", "p1", "p2"};
        int idx = -1;
        for (int i = 0; i < (int)(sizeof keys / sizeof keys[0]); i++)
            if (!strcmp(k, keys[i]))
                idx = i;
        if (idx < 0) {
            rc = sinew__fail(ctx, SINEW_ECONFIG,
                             "%s: unknown key \"%s\" (expected fx fy cx cy width height k1 k2 "
                             "p1 p2 k3)",
                             path, k);
            goto done;
        }
        if (seen & (1 << idx)) { /* cJSON keeps both; which one wins would be a guess */
            rc = sinew__fail(ctx, SINEW_ECONFIG, "%s: key \"%s\" appears twice", path, k);
            goto done;
        }
        seen |= 1 << idx;
        if (!cJSON_IsNumber(it)) {
            rc = sinew__fail(ctx, SINEW_EVALUE, "%s: \"%s\" must be a number", path, k);
            goto done;
        }
        double v = it->valuedouble;
        if (!isfinite(v)) {
            rc = sinew__fail(ctx, SINEW_EVALUE, "%s: \"%s\" is not finite", path, k);
            goto done;
        }
        if (idx < 6)
            have |= 1 << idx;
        switch (idx) {
        case 0:
            c.fx = v;
            break;
        case 1:
            c.fy = v;
            break;
        case 2:
            c.cx = v;
            break;
        case 3:
            c.cy = v;
            break;
        case 4:
        case 5:
            if (v != floor(v) || v < 1 || v > (1 << 20)) {
                rc = sinew__fail(ctx, SINEW_EVALUE, "%s: \"%s\" must be a positive integer", path,
                                 k);
                goto done;
            }
            if (idx == 4)
                c.width = (int)v;
            else
                c.height = (int)v;
            break;
        case 6:
            c.k1 = v;
            break;
        case 7:
            c.k2 = v;
            break;
        case 8:
            c.k3 = v;
            break;
        case 9:
            c.p1 = v;
            break;
        default:
            c.p2 = v;
            break;
        }
    }
    if ((have & 15) != 15) {
        rc = sinew__fail(ctx, SINEW_ECONFIG, "%s: fx, fy, cx and cy are required", path);
        goto done;
    }
    if (((have >> 4) & 3) == 1 || ((have >> 4) & 3) == 2) {
        rc = sinew__fail(ctx, SINEW_ECONFIG, "%s: give both width and height, or neither", path);
        goto done;
    }
    rc = sinew_camera_check(ctx, &c, path);
    if (rc == SINEW_OK)
        *cam = c;
done:
    cJSON_Delete(root);
    return rc;
}

/* Read up to `max` numbers from text: separators are blanks, commas, semicolons and
 * brackets; '#' starts a comment to the end of the line. Returns the count, or -1 on a
 * token that is not a number. */
static int scan_numbers(const char *s, double *out, int max, const char **bad)
{
    int n = 0;
    while (*s) {
        if (*s == '#') {
            while (*s && *s != '\n')
                s++;
            continue;
        }
        if (isspace((unsigned char)*s) || *s == ',' || *s == ';' || *s == '[' || *s == ']') {
            s++;
            continue;
        }
        char *end;
        double v = strtod(s, &end);
        if (end == s) {
            *bad = s;
            return -1;
        }
        if (n < max)
            out[n] = v;
        n++;
        s = end;
    }
    return n;
}

static int load_matrix(sinew_ctx *ctx, sinew_camera *cam, const char *text, const char *path)
{
    double m[9];
    const char *bad = NULL;
    int n = scan_numbers(text, m, 9, &bad);
    if (n < 0)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: not a number near \"%.12s\"", path, bad);
    if (n != 9)
        return sinew__fail(ctx, SINEW_EFORMAT,
                           "%s: expected a 3x3 matrix (9 numbers) or a JSON object, found %d "
                           "numbers",
                           path, n);
    for (int i = 0; i < 9; i++)
        if (!isfinite(m[i]))
            return sinew__fail(ctx, SINEW_EVALUE, "%s: matrix entry %d is not finite", path, i + 1);
    if (m[3] != 0 || m[6] != 0 || m[7] != 0 || m[8] != 1)
        return sinew__fail(ctx, SINEW_EVALUE,
                           "%s: not an intrinsic matrix (expected [fx 0 cx; 0 fy cy; 0 0 1])",
                           path);
    if (m[1] != 0)
        return sinew__fail(ctx, SINEW_EUNSUPPORTED, "%s: non-zero skew %g is not supported", path,
                           m[1]);
    sinew_camera c;
    sinew_camera_init(&c, m[0], m[4], m[2], m[5], 0, 0);
    int rc = sinew_camera_check(ctx, &c, path);
    if (rc == SINEW_OK)
        *cam = c;
    return rc;
}

int sinew_camera_load(sinew_ctx *ctx, sinew_camera *cam, const char *path)
{
    if (!ctx || !cam || !path)
        return SINEW_EINVAL;
    unsigned char *buf;
    size_t len;
    int rc = sinew_read_file(ctx, &buf, &len, path, CAMERA_MAX_FILE);
    if (rc)
        return rc;
    if (memchr(buf, 0, len)) {
        sinew_ctx_dealloc(ctx, buf);
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: binary data in an intrinsics file", path);
    }
    const char *t = (const char *)buf;
    while (isspace((unsigned char)*t))
        t++;
    if (*t == '{')
        rc = load_json(ctx, cam, t, path);
    else
        rc = load_matrix(ctx, cam, t, path);
    sinew_ctx_dealloc(ctx, buf);
    return rc;
}

int sinew_camera_parse(sinew_ctx *ctx, sinew_camera *cam, const char *text, const char *what)
{
    if (!ctx || !cam || !text)
        return SINEW_EINVAL;
    if (!what)
        what = "intrinsics";
    double v[6];
    const char *bad = NULL;
    int n = scan_numbers(text, v, 6, &bad);
    if (n < 0)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: not a number near \"%.12s\"", what, bad);
    if (n != 4 && n != 6)
        return sinew__fail(ctx, SINEW_EFORMAT,
                           "%s: expected fx,fy,cx,cy or fx,fy,cx,cy,width,height", what);
    sinew_camera c;
    sinew_camera_init(&c, v[0], v[1], v[2], v[3], 0, 0);
    if (n == 6) {
        if (!(v[4] >= 1 && v[4] <= (1 << 20) && v[4] == floor(v[4]) && v[5] >= 1 &&
              v[5] <= (1 << 20) && v[5] == floor(v[5])))
            return sinew__fail(ctx, SINEW_EVALUE, "%s: width and height must be positive integers",
                               what);
        c.width = (int)v[4];
        c.height = (int)v[5];
    }
    int rc = sinew_camera_check(ctx, &c, what);
    if (rc == SINEW_OK)
        *cam = c;
    return rc;
}

int sinew_camera_save(sinew_ctx *ctx, const char *path, const sinew_camera *cam)
{
    if (!ctx || !cam || !path)
        return SINEW_EINVAL;
    int rc = sinew_camera_check(ctx, cam, path);
    if (rc)
        return rc;
    char buf[1024];
    int n = snprintf(buf, sizeof buf,
                     "{\n  \"fx\": %.17g,\n  \"fy\": %.17g,\n  \"cx\": %.17g,\n  \"cy\": %.17g",
                     cam->fx, cam->fy, cam->cx, cam->cy);
    if (cam->width > 0)
        n += snprintf(buf + n, sizeof buf - (size_t)n, ",\n  \"width\": %d,\n  \"height\": %d",
                      cam->width, cam->height);
    n += snprintf(buf + n, sizeof buf - (size_t)n,
                  ",\n  \"k1\": %.17g,\n  \"k2\": %.17g,\n  \"p1\": %.17g,\n  \"p2\": %.17g,\n"
                  "  \"k3\": %.17g\n}\n",
                  cam->k1, cam->k2, cam->p1, cam->p2, cam->k3);
    return sinew_write_file(ctx, path, buf, (size_t)n);
}
