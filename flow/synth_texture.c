/* SPDX-License-Identifier: MIT */
/* Procedural, seeded textures and Lambertian shading for the demo scene.
 *
 * Every texture is a function of a surface's material coordinates only, so a material
 * point keeps its albedo in every frame (brightness constancy holds up to the change of
 * shading when a surface turns). Noise is value noise on a hashed integer lattice with
 * quintic (C2) interpolation, summed over octaves.
 *
 * Anti-aliasing by prefiltering: each pixel's footprint on the surface is found with ray
 * differentials (where the rays through the neighbouring pixel positions meet the hit's
 * tangent plane), and every texture feature is filtered to that footprint: noise octaves
 * finer than about three footprints fade out, lines, rings and dots are box-filtered
 * over the footprint, thresholded noise softens. One ray per pixel then gives an image
 * close to what an area-integrating sensor records, so a bilinear warp of one frame
 * by the exact flow reproduces the next (tests/unit/test_synth.c measures it). The
 * footprint changes slowly with the camera, so a material point's colour does too. */
#include <math.h>

#include "flow/internal/synth.h"

static double clamp01(double x)
{
    return x < 0 ? 0 : x > 1 ? 1 : x;
}

static double smoothstep(double e0, double e1, double x)
{
    double t = clamp01((x - e0) / (e1 - e0));
    return t * t * (3 - 2 * t);
}

static double fade(double t)
{
    return t * t * t * (t * (t * 6 - 15) + 10);
}

static double lattice(uint64_t key, int64_t ix, int64_t iy, int64_t iz)
{
    return sinew__synth_unit(key, (uint64_t)ix, (uint64_t)iy, (uint64_t)iz);
}

/* value noise in [0, 1) */
static double vnoise2(uint64_t key, double x, double y)
{
    double fx = floor(x), fy = floor(y);
    int64_t ix = (int64_t)fx, iy = (int64_t)fy;
    double tx = fade(x - fx), ty = fade(y - fy);
    double a = lattice(key, ix, iy, 0), b = lattice(key, ix + 1, iy, 0);
    double c = lattice(key, ix, iy + 1, 0), d = lattice(key, ix + 1, iy + 1, 0);
    return (a + (b - a) * tx) * (1 - ty) + (c + (d - c) * tx) * ty;
}

static double vnoise3(uint64_t key, double x, double y, double z)
{
    double fx = floor(x), fy = floor(y), fz = floor(z);
    int64_t ix = (int64_t)fx, iy = (int64_t)fy, iz = (int64_t)fz;
    double tx = fade(x - fx), ty = fade(y - fy), tz = fade(z - fz);
    double v[2];
    for (int k = 0; k < 2; k++) {
        double a = lattice(key, ix, iy, iz + k), b = lattice(key, ix + 1, iy, iz + k);
        double c = lattice(key, ix, iy + 1, iz + k), d = lattice(key, ix + 1, iy + 1, iz + k);
        v[k] = (a + (b - a) * tx) * (1 - ty) + (c + (d - c) * tx) * ty;
    }
    return v[0] + (v[1] - v[0]) * tz;
}

/* Octave weight for a feature of wavelength lambda seen with footprint w. */
static double band(double lambda, double w)
{
    return smoothstep(2.0, 4.0, lambda / (w > 1e-12 ? w : 1e-12));
}

/* fractal sum in about [-1, 1]; base wavelength lambda (metres), footprint w */
static double fbm2(uint64_t key, double x, double y, double lambda, int octaves, double w)
{
    double s = 0, amp = 0.5, norm = 0;
    x /= lambda;
    y /= lambda;
    for (int o = 0; o < octaves; o++) {
        double k = band(lambda, w);
        if (k > 0)
            s += k * amp * (2 * vnoise2(key + (uint64_t)o * 7919u, x, y) - 1);
        norm += amp;
        x = x * 2.03 + 17.1;
        y = y * 2.03 - 5.3;
        lambda /= 2.03;
        amp *= 0.5;
    }
    return s / norm;
}

static double fbm3(uint64_t key, const double m[3], double lambda, int octaves, double w)
{
    double s = 0, amp = 0.5, norm = 0;
    double x = m[0] / lambda, y = m[1] / lambda, z = m[2] / lambda;
    for (int o = 0; o < octaves; o++) {
        double k = band(lambda, w);
        if (k > 0)
            s += k * amp * (2 * vnoise3(key + (uint64_t)o * 7919u, x, y, z) - 1);
        norm += amp;
        x = x * 2.03 + 17.1;
        y = y * 2.03 - 5.3;
        z = z * 2.03 + 3.7;
        lambda /= 2.03;
        amp *= 0.5;
    }
    return s / norm;
}

/* Thresholded noise ("spots" where value noise of wavelength lambda exceeds lo..hi),
 * softened and faded as the footprint w approaches lambda. */
static double spots(uint64_t key, double x, double y, double lambda, double lo, double hi, double w)
{
    double k = smoothstep(0.8, 2.5, lambda / (w > 1e-12 ? w : 1e-12));
    if (k <= 0)
        return 0;
    double widen = 0.3 * w / lambda;
    return k * smoothstep(lo - widen, hi + widen, vnoise2(key, x / lambda, y / lambda));
}

static void mix3(double c[3], const double d[3], double w)
{
    for (int i = 0; i < 3; i++)
        c[i] += (d[i] - c[i]) * w;
}

static void scale3(double c[3], double s)
{
    for (int i = 0; i < 3; i++)
        c[i] *= s;
}

/* Coverage of periodic lines (period p, half width hw) at coordinate x, box-filtered
 * over width w (plus a small intrinsic softness so near views are not hard-edged). */
static double lines(double x, double p, double hw, double w)
{
    w = hypot(w, 0.0009);
    double d = fabs(x / p - floor(x / p + 0.5)) * p; /* distance to nearest line centre */
    double cov = 0;
    for (int k = 0; k < 2; k++) { /* nearest line and the next one */
        double c = k == 0 ? d : p - d;
        double lo = fmax(c - w / 2, -hw), hi = fmin(c + w / 2, hw);
        if (hi > lo)
            cov += (hi - lo) / w;
    }
    double t = smoothstep(0.3 * p, 0.6 * p, w);
    return cov * (1 - t) + (2 * hw / p) * t;
}

/* Dots of radius r on a square lattice of period p, filtered over width w. */
static double dots(double x, double y, double p, double r, double w)
{
    w = hypot(w, 0.0009);
    double dx = fabs(x / p - floor(x / p + 0.5)) * p, dy = fabs(y / p - floor(y / p + 0.5)) * p;
    double d = hypot(dx, dy);
    double peak = (2 * r) * (2 * r) / ((2 * r) * (2 * r) + w * w);
    double edge = smoothstep(r + w / 2, r - w / 2, d);
    double t = smoothstep(0.3 * p, 0.6 * p, w);
    return peak * edge * (1 - t) + (3.14159265358979323846 * r * r / (p * p)) * t;
}

static uint64_t key_of(const sinew__synth_scene *sc, uint64_t salt)
{
    return sinew__synth_mix(sc->seed * 0x9E3779B97F4A7C15ull + salt);
}

/* Footprint of a pixel along material directions: wa, wb are the extents along the two
 * texture axes, wi a conservative isotropic size (the larger). */
typedef struct footprint {
    double wa, wb, wi;
} footprint;

static footprint fp_make(double wa, double wb)
{
    footprint f = {wa, wb, wa > wb ? wa : wb};
    return f;
}

static void tray_albedo(const sinew__synth_scene *sc, const double m[3], footprint fp, double c[3])
{
    for (int i = 0; i < 3; i++)
        c[i] = sc->tint[1][i];
    double x = m[0], y = m[1];
    scale3(c, 1 + 0.20 * fbm2(key_of(sc, 11), x, y, 0.010, 2, fp.wi));
    scale3(c, 1 + 0.12 * fbm2(key_of(sc, 12), x, y, 0.06, 2, fp.wi));
    /* cutting-mat grid: lines every 20 mm, wider every 100 mm */
    double minor = fmax(lines(x, 0.02, 0.0012, fp.wa), lines(y, 0.02, 0.0012, fp.wb));
    double major = fmax(lines(x, 0.1, 0.0024, fp.wa), lines(y, 0.1, 0.0024, fp.wb));
    static const double line[3] = {0.80, 0.84, 0.86};
    mix3(c, line, 0.55 * fmax(minor, major));
}

static void pad_albedo(const sinew__synth_scene *sc, const double m[3], int top, const double n[3],
                       footprint fp, double c[3])
{
    for (int i = 0; i < 3; i++)
        c[i] = sc->tint[2][i];
    double x, y;
    if (top) {
        x = m[0];
        y = m[1];
    } else { /* walls: coordinate along the wall and height */
        x = fabs(n[0]) > 0.5 ? m[1] : m[0];
        y = m[2] + 0.3;
    }
    scale3(c, 1 + 0.22 * fbm2(key_of(sc, 21), x, y, 0.006, 2, fp.wi));
    scale3(c, 1 + 0.12 * fbm2(key_of(sc, 22), x, y, 0.025, 2, fp.wi));
    /* freckles */
    scale3(c, 1 - 0.35 * spots(key_of(sc, 23), x, y, 0.004, 0.62, 0.86, fp.wi));
    if (!top) {
        scale3(c, 0.9);
        return;
    }
    /* printed practice dots every 12 mm */
    static const double ink[3] = {0.45, 0.12, 0.16};
    mix3(c, ink, 0.8 * dots(x, y, 0.012, 0.0018, fp.wi));
    /* the deliberately low-texture patch: nearly flat colour with a very faint,
     * very smooth variation */
    double r = hypot(x - sc->lowtex_c[0], y - sc->lowtex_c[1]);
    double w = smoothstep(sc->lowtex_r, sc->lowtex_r - 0.004, r);
    if (w > 0) {
        double flat[3];
        double v = 1 + 0.015 * fbm2(key_of(sc, 24), x, y, 0.03, 1, fp.wi);
        for (int i = 0; i < 3; i++)
            flat[i] = sc->tint[2][i] * 0.97 * v;
        mix3(c, flat, w);
    }
}

/* The block face of a local point: the coordinate closest to its half extent. */
static int block_face(const sinew__synth_scene *sc, const double m[3])
{
    int k = 0;
    double best = -1;
    for (int i = 0; i < 3; i++) {
        double r = fabs(m[i]) / sc->block_half[i];
        if (r > best) {
            best = r;
            k = i;
        }
    }
    return k;
}

static void block_albedo(const sinew__synth_scene *sc, const double m[3], footprint fp, double c[3])
{
    for (int i = 0; i < 3; i++)
        c[i] = sc->tint[3][i];
    int k = block_face(sc, m);
    double a = m[(k + 1) % 3], b = m[(k + 2) % 3];
    uint64_t face = (uint64_t)(2 * k + (m[k] > 0));
    scale3(c, 1 + 0.2 * fbm2(key_of(sc, 31 + face), a, b, 0.005, 2, fp.wi));
    scale3(c, 1 - 0.4 * spots(key_of(sc, 41 + face), a, b, 0.0035, 0.72, 0.92, fp.wi));
    /* printed diagonal bands, wavelength 18 mm / |(1, 0.6)| */
    double s = sin(2 * 3.14159265358979323846 * (a + 0.6 * b) / 0.018);
    scale3(c, 1 - 0.18 * band(0.0154, fp.wi) * smoothstep(0.2, 0.8, s));
}

static void probe_albedo(const sinew__synth_scene *sc, const double m[3], footprint fp, double c[3])
{
    for (int i = 0; i < 3; i++)
        c[i] = sc->tint[4][i];
    double ax = m[0] * sc->probe_axis[0] + m[1] * sc->probe_axis[1] + m[2] * sc->probe_axis[2];
    scale3(c, 1 + 0.15 * fbm3(key_of(sc, 51), m, 0.005, 1, fp.wi));
    /* engraved rings every 10 mm */
    scale3(c, 1 - 0.45 * lines(ax + 0.005, 0.01, 0.0013, fp.wa));
    /* blue rubber tip */
    static const double rubber[3] = {0.18, 0.32, 0.68};
    mix3(c, rubber, smoothstep(0.004, 0.0, ax));
}

/* World offsets to the hit points of the rays through (px + 1, py) and (px, py + 1),
 * intersected with the tangent plane at the hit. */
static void ray_differentials(const sinew__synth_scene *sc, const sinew__synth_state *st,
                              const sinew__synth_hit *hit, double dx[3], double dy[3])
{
    double D[3], v[3];
    for (int i = 0; i < 3; i++)
        D[i] = (hit->X[i] - st->o[i]) / hit->depth; /* camera z of D is 1 */
    double nX = 0;
    for (int i = 0; i < 3; i++) {
        v[i] = hit->X[i] - st->o[i];
        nX += hit->n[i] * v[i];
    }
    for (int k = 0; k < 2; k++) {
        double Dk[3], nD = 0;
        double f = k == 0 ? sc->fx : sc->fy;
        for (int i = 0; i < 3; i++) {
            Dk[i] = D[i] + st->R[3 * k + i] / f;
            nD += hit->n[i] * Dk[i];
        }
        /* grazing: limit the stretch to 20x the perpendicular footprint */
        double lim = 0.05 * sqrt(Dk[0] * Dk[0] + Dk[1] * Dk[1] + Dk[2] * Dk[2]);
        if (fabs(nD) < lim)
            nD = nD < 0 ? -lim : lim;
        double s = nX / nD;
        double *out = k == 0 ? dx : dy;
        for (int i = 0; i < 3; i++)
            out[i] = st->o[i] + s * Dk[i] - hit->X[i];
    }
}

void sinew__synth_shade(const sinew__synth_scene *sc, const sinew__synth_state *st,
                        const sinew__synth_hit *hit, double rgb[3])
{
    if (hit->part == SINEW__PART_NONE) {
        rgb[0] = rgb[1] = rgb[2] = 0.08; /* nothing: dark background */
        return;
    }
    double dx[3], dy[3];
    ray_differentials(sc, st, hit, dx, dy);
    /* footprint along texture axes: |d(coord)/dpx| + |d(coord)/dpy| */
    double ea[3] = {1, 0, 0}, eb[3] = {0, 1, 0};
    if (hit->part == SINEW__PART_PAD_SIDE) {
        if (fabs(hit->n[0]) > 0.5)
            ea[0] = 0, ea[1] = 1;
        eb[0] = eb[1] = 0, eb[2] = 1;
    } else if (hit->part == SINEW__PART_BLOCK) {
        int k = block_face(sc, hit->m);
        double la[3] = {0, 0, 0}, lb[3] = {0, 0, 0};
        la[(k + 1) % 3] = 1;
        lb[(k + 2) % 3] = 1;
        double c = st->block_cos, s = st->block_sin;
        ea[0] = c * la[0] - s * la[1], ea[1] = s * la[0] + c * la[1], ea[2] = la[2];
        eb[0] = c * lb[0] - s * lb[1], eb[1] = s * lb[0] + c * lb[1], eb[2] = lb[2];
    } else if (hit->part == SINEW__PART_PROBE) {
        for (int i = 0; i < 3; i++)
            ea[i] = sc->probe_axis[i];
        eb[0] = eb[1] = eb[2] = 0;
    }
    double wa = fabs(dx[0] * ea[0] + dx[1] * ea[1] + dx[2] * ea[2]) +
                fabs(dy[0] * ea[0] + dy[1] * ea[1] + dy[2] * ea[2]);
    double wb = fabs(dx[0] * eb[0] + dx[1] * eb[1] + dx[2] * eb[2]) +
                fabs(dy[0] * eb[0] + dy[1] * eb[1] + dy[2] * eb[2]);
    if (hit->part == SINEW__PART_PROBE) /* 3-D texture: the larger pixel step */
        wb = fmax(sqrt(dx[0] * dx[0] + dx[1] * dx[1] + dx[2] * dx[2]),
                  sqrt(dy[0] * dy[0] + dy[1] * dy[1] + dy[2] * dy[2]));
    footprint fp = fp_make(wa, wb);
    switch (hit->part) {
    case SINEW__PART_TRAY:
        tray_albedo(sc, hit->m, fp, rgb);
        break;
    case SINEW__PART_PAD_TOP:
        pad_albedo(sc, hit->m, 1, hit->n, fp, rgb);
        break;
    case SINEW__PART_PAD_SIDE:
        pad_albedo(sc, hit->m, 0, hit->n, fp, rgb);
        break;
    case SINEW__PART_BLOCK:
        block_albedo(sc, hit->m, fp, rgb);
        break;
    default:
        probe_albedo(sc, hit->m, fp, rgb);
        break;
    }
    double nl = hit->n[0] * sc->light[0] + hit->n[1] * sc->light[1] + hit->n[2] * sc->light[2];
    double shade = 0.32 + 0.68 * (nl > 0 ? nl : 0);
    for (int i = 0; i < 3; i++)
        rgb[i] = clamp01(rgb[i] * shade);
}
