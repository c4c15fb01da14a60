/* SPDX-License-Identifier: MIT */
/* The demo scene's geometry and motion, and exact ray casting against it.
 *
 * World frame: metres, z up, the tray is the plane z = 0. The camera sits on the -y side
 * looking towards +y and down. Surfaces, all analytic:
 *   tray   rectangle in z = 0, static;
 *   pad    box [-hx,hx] x [-hy,hy] x [0,h] whose side walls are static and whose top is
 *          the height field S_t(x,y) = h - d_t K(|xy - c_t|^2 / Rd^2), K(q) = (1-q)^3 for
 *          q < 1 else 0 (a C2 dent of depth d_t centred under the probe);
 *          the top's material is dragged sideways: material point u (rest xy) sits at
 *          X_t(u) = u + D_t K(|u - a|^2 / Rl^2), where a is the anchor (the material
 *          point under the probe) and D_t the drag; |D_t| * max|dK/dr| / Rl < 1 keeps X_t
 *          invertible, and X_t^-1 is found by a bracketed scalar Newton solve because the
 *          displacement has a single direction D_t;
 *   block  box sliding along the tray in front of the pad and turning about z (rigid);
 *   probe  capsule whose tip sphere rests in the dent, translating with it (rigid).
 * A ray is tested against every surface and the nearest hit wins. The dent is found by
 * sphere tracing with the exact Lipschitz bound of the height field (so the first
 * crossing is never skipped) and polished with Newton steps to ~1e-12 m.
 * Material coordinates: tray and pad walls use world points, the pad top uses rest xy,
 * the block its local box coordinates, the probe the offset from the tip centre. */
#include <math.h>
#include <string.h>

#include "flow/internal/synth.h"

#define DEG (3.14159265358979323846 / 180.0)
#define TINY 1e-9

/* ---- small vector helpers ---- */
static double dot3(const double a[3], const double b[3])
{
    return a[0] * b[0] + a[1] * b[1] + a[2] * b[2];
}

static void normalize3(double v[3])
{
    double l = sqrt(dot3(v, v));
    if (l > 0) {
        v[0] /= l;
        v[1] /= l;
        v[2] /= l;
    }
}

static double smoothstep(double e0, double e1, double x)
{
    double t = (x - e0) / (e1 - e0);
    t = t < 0 ? 0 : t > 1 ? 1 : t;
    return t * t * (3 - 2 * t);
}

/* ---- seeded randomness ---- */
uint64_t sinew__synth_mix(uint64_t x)
{
    x += 0x9E3779B97F4A7C15ull;
    x = (x ^ (x >> 30)) * 0xBF58476D1CE4E5B9ull;
    x = (x ^ (x >> 27)) * 0x94D049BB133111EBull;
    return x ^ (x >> 31);
}

double sinew__synth_unit(uint64_t seed, uint64_t a, uint64_t b, uint64_t c)
{
    /* one finaliser over an odd-multiplier combination of the coordinates */
    uint64_t h = seed ^ (a * 0x9E3779B97F4A7C15ull) ^ (b * 0xC2B2AE3D27D4EB4Full) ^
                 (c * 0x165667B19E3779F9ull);
    h = sinew__synth_mix(h ^ (h >> 29));
    return (double)(h >> 11) * (1.0 / 9007199254740992.0);
}

/* splitmix64 stream for the scene's seeded constants */
static double draw(uint64_t *state, double lo, double hi)
{
    uint64_t z = sinew__synth_mix(*state); /* mix adds the increment first */
    *state += 0x9E3779B97F4A7C15ull;
    return lo + (hi - lo) * ((double)(z >> 11) * (1.0 / 9007199254740992.0));
}

void sinew__synth_scene_init(sinew__synth_scene *sc, uint64_t seed, int width, int height)
{
    memset(sc, 0, sizeof *sc);
    uint64_t rs = seed ^ 0x5EED5EED12345678ull;
    sc->seed = seed;
    sc->width = width;
    sc->height = height;
    /* A 640x480 RGB-D camera with a ~63 degree horizontal field of view; other sizes
     * scale the focal length with the width. Pixel centres at integers. */
    sc->fx = sc->fy = 525.0 * width / 640.0;
    sc->cx = (width - 1) / 2.0;
    sc->cy = (height - 1) / 2.0;
    sc->fps = SINEW__SYNTH_FPS;

    sc->cam_az0 = draw(&rs, -9, -5) * DEG;
    sc->cam_daz = draw(&rs, 8, 12) * DEG;
    sc->cam_el0 = draw(&rs, 45, 48) * DEG;
    sc->cam_del = draw(&rs, 3, 6) * DEG;
    sc->cam_dist0 = 0.44;
    sc->cam_ddist = -draw(&rs, 0.02, 0.035);
    sc->cam_target0[0] = draw(&rs, -0.01, 0.01);
    sc->cam_target0[1] = 0.0;
    sc->cam_target0[2] = 0.0;
    sc->cam_dtarget[0] = draw(&rs, 0.005, 0.015);
    sc->cam_dtarget[1] = draw(&rs, -0.01, 0.01);

    sc->pad_hx = 0.11;
    sc->pad_hy = 0.085;
    sc->pad_h = 0.015;
    sc->dent_radius = 0.045;
    sc->dent_depth0 = 0.002;
    sc->dent_depth1 = draw(&rs, 0.007, 0.009);
    sc->drag_radius = 0.07;
    sc->drag_anchor[0] = -0.025;
    sc->drag_anchor[1] = draw(&rs, -0.005, 0.005);
    double ang = draw(&rs, -20, 20) * DEG;
    double len = draw(&rs, 0.020, 0.025); /* < 0.07 / 1.717 = 0.041: invertible */
    sc->drag_end[0] = len * cos(ang);
    sc->drag_end[1] = len * sin(ang);
    sc->drag_bend = draw(&rs, -0.006, 0.006);

    sc->probe_r = 0.009;
    sc->probe_axis[0] = draw(&rs, 0.15, 0.3);
    sc->probe_axis[1] = 0.3;
    sc->probe_axis[2] = 1.0;
    normalize3(sc->probe_axis);
    sc->probe_len = 0.22;

    sc->block_half[0] = 0.035;
    sc->block_half[1] = 0.025;
    sc->block_half[2] = 0.0375;
    sc->block_x0 = draw(&rs, -0.22, -0.18);
    sc->block_x1 = draw(&rs, 0.04, 0.08);
    /* front face stays >= 12 mm clear of the pad for any yaw in range */
    sc->block_y = -sc->pad_hy - 0.012 - 0.035 - draw(&rs, 0, 0.005);
    sc->block_yaw0 = draw(&rs, -12, -6) * DEG;
    sc->block_dyaw = draw(&rs, 15, 22) * DEG;

    sc->tray_x0 = -0.9;
    sc->tray_x1 = 0.9;
    sc->tray_y0 = -0.6;
    sc->tray_y1 = 1.4;

    sc->lowtex_c[0] = draw(&rs, 0.05, 0.07);
    sc->lowtex_c[1] = draw(&rs, 0.02, 0.04);
    sc->lowtex_r = 0.026;
    static const double base[5][3] = {
        {0.0, 0.0, 0.0},    /* unused */
        {0.30, 0.37, 0.45}, /* tray: slate blue */
        {0.88, 0.62, 0.57}, /* pad: pink silicone */
        {0.93, 0.76, 0.32}, /* block: yellow foam */
        {0.64, 0.66, 0.70}, /* probe: steel */
    };
    for (int i = 0; i < 5; i++)
        for (int c = 0; c < 3; c++)
            sc->tint[i][c] = base[i][c] * draw(&rs, 0.93, 1.05);
    sc->light[0] = -0.3;
    sc->light[1] = -0.6;
    sc->light[2] = 1.0;
    normalize3(sc->light);
}

/* Sweep phase: 0 -> 1 over the first second, then back (triangle wave, period 2 s), so
 * every sequence length shows the same motion at the same speed. */
static double phase(const sinew__synth_scene *sc, double frame)
{
    double t = frame / sc->fps;
    double m = fmod(t, 2.0);
    if (m < 0)
        m += 2.0;
    return m <= 1.0 ? m : 2.0 - m;
}

/* The probe's ordinary motion at phase ph: presses in over the first third, drags the
 * pad along a bent path. */
static void probe_state(const sinew__synth_scene *sc, double ph, sinew__synth_state *st)
{
    st->dent_depth =
        sc->dent_depth0 + (sc->dent_depth1 - sc->dent_depth0) * smoothstep(0, 0.35, ph);
    double a = smoothstep(0.1, 1.0, ph);
    double dl = sqrt(sc->drag_end[0] * sc->drag_end[0] + sc->drag_end[1] * sc->drag_end[1]);
    double bend = sc->drag_bend * 4 * a * (1 - a) / (dl > 0 ? dl : 1);
    st->drag[0] = sc->drag_end[0] * a - sc->drag_end[1] * bend;
    st->drag[1] = sc->drag_end[1] * a + sc->drag_end[0] * bend;
    st->dent_c[0] = sc->drag_anchor[0] + st->drag[0];
    st->dent_c[1] = sc->drag_anchor[1] + st->drag[1];
    st->tip[0] = st->dent_c[0];
    st->tip[1] = st->dent_c[1];
    st->tip[2] = sc->pad_h - st->dent_depth + sc->probe_r;
}

void sinew__synth_state_at(const sinew__synth_scene *sc, double frame, sinew__synth_state *st)
{
    memset(st, 0, sizeof *st);
    double ph = phase(sc, frame);

    /* camera: orbit point around a drifting target, looking at it, no roll */
    double az = sc->cam_az0 + sc->cam_daz * ph;
    double el = sc->cam_el0 + sc->cam_del * ph;
    double dist = sc->cam_dist0 + sc->cam_ddist * ph;
    double tg[3];
    for (int i = 0; i < 3; i++)
        tg[i] = sc->cam_target0[i] + sc->cam_dtarget[i] * ph;
    st->o[0] = tg[0] + dist * sin(az) * cos(el);
    st->o[1] = tg[1] - dist * cos(az) * cos(el);
    st->o[2] = tg[2] + dist * sin(el);
    double f[3] = {tg[0] - st->o[0], tg[1] - st->o[1], tg[2] - st->o[2]};
    normalize3(f);
    double r[3] = {f[1], -f[0], 0.0};
    normalize3(r);
    double d[3] = {f[1] * r[2] - f[2] * r[1], f[2] * r[0] - f[0] * r[2], f[0] * r[1] - f[1] * r[0]};
    for (int i = 0; i < 3; i++) {
        st->R[i] = r[i];
        st->R[3 + i] = d[i];
        st->R[6 + i] = f[i];
    }

    if (sc->swing_v > 0) {
        /* fast-motion sweep: pad at rest, probe moving at constant speed above it */
        for (int i = 0; i < 3; i++)
            st->tip[i] = sc->swing_p0[i] + sc->swing_dir[i] * sc->swing_v * (frame - sc->swing_c);
    } else {
        probe_state(sc, ph, st);
    }

    /* block */
    st->block_c[0] = sc->block_x0 + (sc->block_x1 - sc->block_x0) * ph;
    st->block_c[1] = sc->block_y;
    st->block_c[2] = sc->block_half[2];
    double yaw = sc->block_yaw0 + sc->block_dyaw * ph;
    st->block_cos = cos(yaw);
    st->block_sin = sin(yaw);
}

void sinew__synth_to_camera(const sinew__synth_state *st, const double Xw[3], double Xc[3])
{
    double v[3] = {Xw[0] - st->o[0], Xw[1] - st->o[1], Xw[2] - st->o[2]};
    for (int i = 0; i < 3; i++)
        Xc[i] = st->R[3 * i] * v[0] + st->R[3 * i + 1] * v[1] + st->R[3 * i + 2] * v[2];
}

int sinew__synth_label(int part)
{
    switch (part) {
    case SINEW__PART_TRAY:
        return 1;
    case SINEW__PART_PAD_TOP:
    case SINEW__PART_PAD_SIDE:
        return 2;
    case SINEW__PART_BLOCK:
        return 3;
    case SINEW__PART_PROBE:
        return 4;
    default:
        return 0;
    }
}

/* ---- pad top: dent height field and lateral drag ---- */

/* Height S and gradient of the dented top at world (x, y). */
static double pad_height(const sinew__synth_scene *sc, const sinew__synth_state *st, double x,
                         double y, double grad[2])
{
    double R2 = sc->dent_radius * sc->dent_radius;
    double dx = x - st->dent_c[0], dy = y - st->dent_c[1];
    double q = (dx * dx + dy * dy) / R2;
    if (q >= 1.0 || st->dent_depth <= 0) {
        grad[0] = grad[1] = 0;
        return sc->pad_h;
    }
    double w = 1.0 - q;
    double g = 6.0 * st->dent_depth * w * w / R2;
    grad[0] = g * dx;
    grad[1] = g * dy;
    return sc->pad_h - st->dent_depth * w * w * w;
}

/* Material (rest) point u -> current lateral position X_t(u). */
static void drag_forward(const sinew__synth_scene *sc, const sinew__synth_state *st,
                         const double u[2], double x[2])
{
    double dx = u[0] - sc->drag_anchor[0], dy = u[1] - sc->drag_anchor[1];
    double q = (dx * dx + dy * dy) / (sc->drag_radius * sc->drag_radius);
    double k = q < 1.0 ? (1 - q) * (1 - q) * (1 - q) : 0.0;
    x[0] = u[0] + st->drag[0] * k;
    x[1] = u[1] + st->drag[1] * k;
}

/* Inverse of drag_forward: u = x - lambda D with lambda = K(|x - a - lambda D|^2 / Rl^2),
 * the unique root of g(lambda) = lambda - K(...) in [0, 1] (g is increasing because
 * |D| max|dK/dr| / Rl < 1). Bracketed Newton to double precision. */
static void drag_inverse(const sinew__synth_scene *sc, const sinew__synth_state *st,
                         const double x[2], double u[2])
{
    const double *D = st->drag;
    double Rl2 = sc->drag_radius * sc->drag_radius;
    double wx = x[0] - sc->drag_anchor[0], wy = x[1] - sc->drag_anchor[1];
    double lam = 0, lo = 0, hi = 1;
    if (D[0] != 0 || D[1] != 0) {
        for (int it = 0; it < 100; it++) {
            double ex = wx - lam * D[0], ey = wy - lam * D[1];
            double q = (ex * ex + ey * ey) / Rl2;
            double k = 0, gp = 1;
            if (q < 1) {
                double w = 1 - q;
                k = w * w * w;
                gp = 1 - 6 * w * w * (ex * D[0] + ey * D[1]) / Rl2;
            }
            double g = lam - k;
            if (g == 0)
                break;
            if (g < 0)
                lo = lam;
            else
                hi = lam;
            double next = lam - g / gp;
            if (!(next > lo && next < hi))
                next = 0.5 * (lo + hi);
            double step = next - lam;
            lam = next;
            if (fabs(step) < 1e-15)
                break;
        }
    }
    u[0] = x[0] - lam * D[0];
    u[1] = x[1] - lam * D[1];
}

/* ---- ray / primitive intersections (unit direction u, origin o) ---- */

/* Slab test against an axis-aligned box; returns the entry distance (or INFINITY) and
 * the entry axis (0, 1, 2) and sign of the outward normal. */
static double ray_box(const double o[3], const double u[3], const double lo[3], const double hi[3],
                      int *axis, int *sign)
{
    double tn = -INFINITY, tf = INFINITY;
    int ax = -1, sg = 0;
    for (int i = 0; i < 3; i++) {
        if (fabs(u[i]) < 1e-300) {
            if (o[i] < lo[i] || o[i] > hi[i])
                return INFINITY;
            continue;
        }
        double t0 = (lo[i] - o[i]) / u[i], t1 = (hi[i] - o[i]) / u[i];
        int s = -1; /* entering through the lo face: outward normal -e_i */
        if (t0 > t1) {
            double tmp = t0;
            t0 = t1;
            t1 = tmp;
            s = 1;
        }
        if (t0 > tn) {
            tn = t0;
            ax = i;
            sg = s;
        }
        if (t1 < tf)
            tf = t1;
    }
    if (ax < 0 || tn > tf || tn <= TINY)
        return INFINITY;
    *axis = ax;
    *sign = sg;
    return tn;
}

/* Capsule (segment pa-pb, radius r); returns the first positive distance or INFINITY. */
static double ray_capsule(const double o[3], const double u[3], const double pa[3],
                          const double pb[3], double r)
{
    double ba[3] = {pb[0] - pa[0], pb[1] - pa[1], pb[2] - pa[2]};
    double oa[3] = {o[0] - pa[0], o[1] - pa[1], o[2] - pa[2]};
    double baba = dot3(ba, ba), bard = dot3(ba, u), baoa = dot3(ba, oa);
    double rdoa = dot3(u, oa), oaoa = dot3(oa, oa);
    double a = baba - bard * bard;
    double b = baba * rdoa - baoa * bard;
    double c = baba * oaoa - baoa * baoa - r * r * baba;
    double h = b * b - a * c;
    if (h >= 0 && a > 0) {
        double t = (-b - sqrt(h)) / a;
        double y = baoa + t * bard;
        if (y > 0 && y < baba)
            return t > TINY ? t : INFINITY;
        /* caps */
        double oc[3];
        for (int i = 0; i < 3; i++)
            oc[i] = y <= 0 ? oa[i] : o[i] - pb[i];
        double bb = dot3(u, oc), cc = dot3(oc, oc) - r * r, hh = bb * bb - cc;
        if (hh > 0) {
            double tt = -bb - sqrt(hh);
            return tt > TINY ? tt : INFINITY;
        }
    }
    return INFINITY;
}

/* ---- per-surface casts; each updates *best if nearer ---- */

static void cast_tray(const sinew__synth_scene *sc, const double o[3], const double u[3],
                      sinew__synth_hit *best, double *tbest)
{
    if (u[2] >= 0)
        return;
    double t = -o[2] / u[2];
    if (!(t > TINY && t < *tbest))
        return;
    double x = o[0] + t * u[0], y = o[1] + t * u[1];
    if (x < sc->tray_x0 || x > sc->tray_x1 || y < sc->tray_y0 || y > sc->tray_y1)
        return;
    *tbest = t;
    best->part = SINEW__PART_TRAY;
    best->X[0] = best->m[0] = x;
    best->X[1] = best->m[1] = y;
    best->X[2] = best->m[2] = 0;
    best->n[0] = best->n[1] = 0;
    best->n[2] = 1;
}

static void cast_pad(const sinew__synth_scene *sc, const sinew__synth_state *st, const double o[3],
                     const double u[3], sinew__synth_hit *best, double *tbest)
{
    double lo[3] = {-sc->pad_hx, -sc->pad_hy, 0}, hi[3] = {sc->pad_hx, sc->pad_hy, sc->pad_h};
    int axis, sign;
    double t = ray_box(o, u, lo, hi, &axis, &sign);
    if (!(t < *tbest))
        return;
    if (axis != 2 || sign < 0) { /* a static side wall (or the hidden bottom) */
        *tbest = t;
        best->part = SINEW__PART_PAD_SIDE;
        for (int i = 0; i < 3; i++) {
            best->X[i] = best->m[i] = o[i] + t * u[i];
            best->n[i] = i == axis ? sign : 0;
        }
        return;
    }
    double grad[2];
    double x = o[0] + t * u[0], y = o[1] + t * u[1];
    double S = pad_height(sc, st, x, y, grad);
    if (o[2] + t * u[2] > S) {
        /* inside the dent's disc: sphere-trace f(t) = z(t) - S(x(t), y(t)), whose slope is
         * bounded by sqrt(1 + G^2) with G = max |grad S| = 1.7173 d / Rd (the maximum of
         * 6 r (1 - r^2)^2 is 1.7173 at r = 1/sqrt(5)), so a step of f / L never passes the
         * first root; then Newton polish. */
        double G = 1.7174 * st->dent_depth / sc->dent_radius;
        double L = sqrt(1 + G * G);
        for (int it = 0; it < 400; it++) {
            x = o[0] + t * u[0];
            y = o[1] + t * u[1];
            double f = o[2] + t * u[2] - pad_height(sc, st, x, y, grad);
            if (f < 1e-7)
                break;
            t += f / L;
        }
        for (int it = 0; it < 8; it++) {
            x = o[0] + t * u[0];
            y = o[1] + t * u[1];
            double f = o[2] + t * u[2] - pad_height(sc, st, x, y, grad);
            double fp = u[2] - grad[0] * u[0] - grad[1] * u[1];
            if (fp > -1e-9)
                break;
            double dt = -f / fp;
            t += dt;
            if (fabs(dt) < 1e-15)
                break;
        }
        if (!(t < *tbest))
            return;
        x = o[0] + t * u[0];
        y = o[1] + t * u[1];
        S = pad_height(sc, st, x, y, grad);
    }
    *tbest = t;
    best->part = SINEW__PART_PAD_TOP;
    best->X[0] = x;
    best->X[1] = y;
    best->X[2] = S;
    double xy[2] = {x, y}, m[2];
    drag_inverse(sc, st, xy, m);
    best->m[0] = m[0];
    best->m[1] = m[1];
    best->m[2] = 0;
    best->n[0] = -grad[0];
    best->n[1] = -grad[1];
    best->n[2] = 1;
    normalize3(best->n);
}

static void cast_block(const sinew__synth_scene *sc, const sinew__synth_state *st,
                       const double o[3], const double u[3], sinew__synth_hit *best, double *tbest)
{
    double c = st->block_cos, s = st->block_sin;
    double dx = o[0] - st->block_c[0], dy = o[1] - st->block_c[1];
    double lo_[3] = {c * dx + s * dy, -s * dx + c * dy, o[2] - st->block_c[2]};
    double lu[3] = {c * u[0] + s * u[1], -s * u[0] + c * u[1], u[2]};
    double lo[3], hi[3];
    for (int i = 0; i < 3; i++) {
        lo[i] = -sc->block_half[i];
        hi[i] = sc->block_half[i];
    }
    int axis, sign;
    double t = ray_box(lo_, lu, lo, hi, &axis, &sign);
    if (!(t < *tbest))
        return;
    *tbest = t;
    best->part = SINEW__PART_BLOCK;
    double nl[3] = {0, 0, 0};
    nl[axis] = sign;
    for (int i = 0; i < 3; i++) {
        best->m[i] = lo_[i] + t * lu[i];
        best->X[i] = o[i] + t * u[i];
    }
    best->m[axis] = sign * sc->block_half[axis]; /* exactly on the face */
    best->n[0] = c * nl[0] - s * nl[1];
    best->n[1] = s * nl[0] + c * nl[1];
    best->n[2] = nl[2];
}

static void cast_probe(const sinew__synth_scene *sc, const sinew__synth_state *st,
                       const double o[3], const double u[3], sinew__synth_hit *best, double *tbest)
{
    double pb[3];
    for (int i = 0; i < 3; i++)
        pb[i] = st->tip[i] + sc->probe_len * sc->probe_axis[i];
    double t = ray_capsule(o, u, st->tip, pb, sc->probe_r);
    if (!(t < *tbest))
        return;
    *tbest = t;
    best->part = SINEW__PART_PROBE;
    double X[3], m[3];
    for (int i = 0; i < 3; i++) {
        X[i] = o[i] + t * u[i];
        m[i] = X[i] - st->tip[i];
    }
    double a = dot3(m, sc->probe_axis);
    a = a < 0 ? 0 : a > sc->probe_len ? sc->probe_len : a;
    for (int i = 0; i < 3; i++) {
        best->X[i] = X[i];
        best->m[i] = m[i];
        best->n[i] = m[i] - a * sc->probe_axis[i];
    }
    normalize3(best->n);
}

int sinew__synth_cast(const sinew__synth_scene *sc, const sinew__synth_state *st, double px,
                      double py, sinew__synth_hit *hit)
{
    double dc[3] = {(px - sc->cx) / sc->fx, (py - sc->cy) / sc->fy, 1.0};
    double u[3];
    for (int i = 0; i < 3; i++)
        u[i] = st->R[i] * dc[0] + st->R[3 + i] * dc[1] + st->R[6 + i] * dc[2];
    normalize3(u);
    memset(hit, 0, sizeof *hit);
    double tbest = INFINITY;
    cast_tray(sc, st->o, u, hit, &tbest);
    cast_pad(sc, st, st->o, u, hit, &tbest);
    cast_block(sc, st, st->o, u, hit, &tbest);
    cast_probe(sc, st, st->o, u, hit, &tbest);
    if (hit->part == SINEW__PART_NONE) {
        hit->depth = NAN;
        return SINEW__PART_NONE;
    }
    double Xc[3];
    sinew__synth_to_camera(st, hit->X, Xc);
    hit->depth = Xc[2];
    return hit->part;
}

void sinew__synth_position(const sinew__synth_scene *sc, const sinew__synth_state *st, int part,
                           const double m[3], double Y[3])
{
    switch (part) {
    case SINEW__PART_PAD_TOP: {
        double xy[2], grad[2];
        drag_forward(sc, st, m, xy);
        Y[0] = xy[0];
        Y[1] = xy[1];
        Y[2] = pad_height(sc, st, xy[0], xy[1], grad);
        return;
    }
    case SINEW__PART_BLOCK: {
        double c = st->block_cos, s = st->block_sin;
        Y[0] = st->block_c[0] + c * m[0] - s * m[1];
        Y[1] = st->block_c[1] + s * m[0] + c * m[1];
        Y[2] = st->block_c[2] + m[2];
        return;
    }
    case SINEW__PART_PROBE:
        for (int i = 0; i < 3; i++)
            Y[i] = st->tip[i] + m[i];
        return;
    default: /* tray, pad walls: static */
        for (int i = 0; i < 3; i++)
            Y[i] = m[i];
        return;
    }
}

void sinew__synth_swing_init(sinew__synth_scene *sc, double px, int frames)
{
    sc->swing_v = 0;
    if (!(px > 0))
        return;
    /* crossing point: 20 mm above the pad centre, between the middle frames */
    sc->swing_c = 0.5 * (frames - 1);
    sc->swing_p0[0] = 0.0;
    sc->swing_p0[1] = 0.0;
    sc->swing_p0[2] = sc->pad_h + sc->probe_r + 0.02;
    sinew__synth_state st;
    sinew__synth_state_at(sc, sc->swing_c, &st);
    /* along the camera's x axis there (horizontal: the camera has no roll), so the tip's
     * own image motion at the crossing is px / frame: v = px * z / fx */
    for (int i = 0; i < 3; i++)
        sc->swing_dir[i] = st.R[i];
    double Xc[3];
    sinew__synth_to_camera(&st, sc->swing_p0, Xc);
    sc->swing_v = px * Xc[2] / sc->fx;
}
