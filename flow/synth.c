/* SPDX-License-Identifier: MIT */
/* Demo-scene images and exact ground truth (API in flow/synth.h).
 *
 * A frame is rendered by casting one ray per pixel centre (synth_scene.c) and shading
 * the hit (synth_texture.c); the hits (part, material coordinates, camera point) of the
 * last frame cast are cached. Ground truth from frame a to frame b, for every pixel of a:
 * move the material point it sees to its position at b with the known motion, project it
 * into b's camera (flow, scene flow), and cast b's ray through that projection: the point
 * is visible in b only if that ray's first hit is the same point (within OCC_TOL) and the
 * projection lies inside the image. Rows run in parallel; every pixel is computed
 * independently, so results do not depend on the thread count. */
#define _POSIX_C_SOURCE 200809L
#include <math.h>
#include <string.h>

#include "flow/internal/base.h"
#include "flow/internal/parallel.h"
#include "flow/internal/synth.h"
#include "flow/synth.h"

/* Two casts of the same material point agree to ~1e-12 m; anything farther apart than
 * this is a different surface point. */
#define OCC_TOL 1e-6

struct sinew_synth {
    sinew_ctx *ctx;
    sinew_synth_params p;
    sinew__synth_scene scene;
    /* hits of frame `cached` (-1: none) */
    int cached;
    unsigned char *part;
    double *mat; /* 3 per pixel */
    double *cam; /* 3 per pixel: camera coordinates of the hit */
};

void sinew_synth_params_default(sinew_synth_params *p)
{
    if (!p)
        return;
    memset(p, 0, sizeof *p);
    p->width = 640;
    p->height = 480;
    p->frames = 30;
    p->seed = 1;
    p->depth_noise = 0;
}

int sinew_synth_new(sinew_ctx *ctx, sinew_synth **out, const sinew_synth_params *p)
{
    if (!ctx || !out || !p)
        return SINEW_EINVAL;
    *out = NULL;
    if (p->width < 8 || p->height < 8)
        return sinew__fail(ctx, SINEW_EINVAL, "image size %dx%d is below the minimum 8x8", p->width,
                           p->height);
    if (p->frames < 2)
        return sinew__fail(ctx, SINEW_EINVAL, "frames must be at least 2 (got %d)", p->frames);
    if (p->frames > 1000000)
        return sinew__fail(ctx, SINEW_EINVAL, "frames must be at most 1000000");
    if (!(p->swing >= 0 && p->swing <= SINEW_SYNTH_MAX_SWING))
        return sinew__fail(ctx, SINEW_EINVAL, "swing %g px/frame outside [0, %g]", p->swing,
                           SINEW_SYNTH_MAX_SWING);
    if (p->depth_noise != 0 && p->depth_noise != 1)
        return sinew__fail(ctx, SINEW_EINVAL, "depth_noise must be 0 or 1");
    int st = sinew__check_dims(ctx, "image size", p->width, p->height);
    if (st)
        return st;
    if ((int64_t)p->width * p->height > SINEW_SYNTH_MAX_PIXELS)
        return sinew__fail(ctx, SINEW_ELIMIT,
                           "image size %dx%d exceeds the demo scene's limit of %lld pixels",
                           p->width, p->height, (long long)SINEW_SYNTH_MAX_PIXELS);
    size_t n = (size_t)p->width * (size_t)p->height, b3;
    if (sinew__mul_size(n, 3 * sizeof(double), &b3))
        return sinew__fail(ctx, SINEW_EOVERFLOW, "image size too large");
    sinew_synth *s = sinew__calloc(ctx, 1, sizeof *s);
    if (!s)
        return SINEW_ENOMEM;
    s->ctx = ctx;
    s->p = *p;
    s->cached = -1;
    s->part = sinew__alloc(ctx, n);
    s->mat = s->part ? sinew__alloc(ctx, b3) : NULL;
    s->cam = s->mat ? sinew__alloc(ctx, b3) : NULL;
    if (!s->cam) {
        sinew_synth_free(s);
        return SINEW_ENOMEM;
    }
    sinew__synth_scene_init(&s->scene, p->seed, p->width, p->height);
    sinew__synth_swing_init(&s->scene, p->swing, p->frames);
    *out = s;
    return SINEW_OK;
}

void sinew_synth_free(sinew_synth *s)
{
    if (!s)
        return;
    sinew_ctx *ctx = s->ctx;
    sinew__free(ctx, s->part);
    sinew__free(ctx, s->mat);
    sinew__free(ctx, s->cam);
    sinew__free(ctx, s);
}

void sinew_synth_intrinsics(const sinew_synth *s, double *fx, double *fy, double *cx, double *cy)
{
    if (!s)
        return;
    if (fx)
        *fx = s->scene.fx;
    if (fy)
        *fy = s->scene.fy;
    if (cx)
        *cx = s->scene.cx;
    if (cy)
        *cy = s->scene.cy;
}

static int check_frame(const sinew_synth *s, int frame, const char *what)
{
    if (frame < 0 || frame >= s->p.frames)
        return sinew__fail(s->ctx, SINEW_EINVAL, "%s frame %d out of range 0..%d", what, frame,
                           s->p.frames - 1);
    return SINEW_OK;
}

int sinew_synth_pose(const sinew_synth *s, int frame, double pose[12])
{
    if (!s || !pose)
        return SINEW_EINVAL;
    int st = check_frame(s, frame, "pose");
    if (st)
        return st;
    sinew__synth_state state;
    sinew__synth_state_at(&s->scene, frame, &state);
    for (int r = 0; r < 3; r++) {
        for (int c = 0; c < 3; c++)
            pose[4 * r + c] = state.R[3 * c + r]; /* transpose: camera -> world */
        pose[4 * r + 3] = state.o[r];
    }
    return SINEW_OK;
}

static int check_out(sinew_synth *s, const sinew_image *img, int channels, sinew_type type,
                     const char *what)
{
    if (!img)
        return SINEW_OK;
    if (!img->data || img->width != s->p.width || img->height != s->p.height ||
        img->channels != channels || img->type != type)
        return sinew__fail(s->ctx, SINEW_ESIZE,
                           "%s must be a %dx%d image with %d channel(s) of type %d", what,
                           s->p.width, s->p.height, channels, (int)type);
    return SINEW_OK;
}

/* Cast the pixel grid of `frame` into the cache; colour/depth/labels optional. */
static void cast_grid(sinew_synth *s, int frame, sinew_image *color, sinew_image *depth,
                      sinew_image *labels)
{
    const sinew__synth_scene *sc = &s->scene;
    sinew__synth_state st;
    sinew__synth_state_at(sc, frame, &st);
    int W = s->p.width, H = s->p.height;
    unsigned char *part = s->part;
    double *mat = s->mat, *cam = s->cam;
    SINEW_PARALLEL_FOR(sinew_ctx_threads(s->ctx))
    for (int y = 0; y < H; y++) {
        for (int x = 0; x < W; x++) {
            size_t i = (size_t)y * (size_t)W + (size_t)x;
            sinew__synth_hit h;
            sinew__synth_cast(sc, &st, x, y, &h);
            part[i] = (unsigned char)h.part;
            double Xc[3] = {NAN, NAN, NAN};
            if (h.part)
                sinew__synth_to_camera(&st, h.X, Xc);
            for (int k = 0; k < 3; k++) {
                mat[3 * i + k] = h.m[k];
                cam[3 * i + k] = Xc[k];
            }
            if (color) {
                double rgb[3];
                sinew__synth_shade(sc, &st, &h, rgb);
                uint8_t *px = sinew_image_row_u8(color, y) + 3 * x;
                for (int k = 0; k < 3; k++)
                    px[k] = (uint8_t)floor(rgb[k] * 255.0 + 0.5);
            }
            if (depth)
                sinew_image_row_f32(depth, y)[x] = (float)Xc[2];
            if (labels)
                sinew_image_row_u8(labels, y)[x] = (uint8_t)sinew__synth_label(h.part);
        }
    }
    s->cached = frame;
}

int sinew_synth_render(sinew_synth *s, int frame, sinew_image *color, sinew_image *depth,
                       sinew_image *labels)
{
    if (!s)
        return SINEW_EINVAL;
    int st;
    if ((st = check_frame(s, frame, "render")) ||
        (st = check_out(s, color, 3, SINEW_U8, "color")) ||
        (st = check_out(s, depth, 1, SINEW_F32, "depth")) ||
        (st = check_out(s, labels, 1, SINEW_U8, "labels")))
        return st;
    cast_grid(s, frame, color, depth, labels);
    return SINEW_OK;
}

/* Ground truth for one point of frame a seen at pixel position (x, y): `part` and
 * material coordinates m of its hit, Xa its camera-a coordinates; sb is the state of
 * frame b. */
static void truth_point(const sinew__synth_scene *sc, const sinew__synth_state *sb, int part,
                        const double m[3], const double Xa[3], double x, double y,
                        sinew_synth_point *pt)
{
    pt->label = sinew__synth_label(part);
    pt->depth = part ? Xa[2] : NAN;
    pt->occluded = 1;
    for (int k = 0; k < 3; k++)
        pt->scene_flow[k] = NAN;
    pt->flow[0] = pt->flow[1] = NAN;
    if (!part)
        return;
    double Y[3], Yc[3];
    sinew__synth_position(sc, sb, part, m, Y);
    sinew__synth_to_camera(sb, Y, Yc);
    for (int k = 0; k < 3; k++)
        pt->scene_flow[k] = Yc[k] - Xa[k];
    if (!(Yc[2] > 1e-6))
        return; /* behind camera b: no projection */
    double qx = sc->fx * Yc[0] / Yc[2] + sc->cx;
    double qy = sc->fy * Yc[1] / Yc[2] + sc->cy;
    pt->flow[0] = qx - x;
    pt->flow[1] = qy - y;
    if (!(qx >= -0.5 && qx < sc->width - 0.5 && qy >= -0.5 && qy < sc->height - 0.5))
        return; /* outside the image */
    sinew__synth_hit h;
    if (sinew__synth_cast(sc, sb, qx, qy, &h)) {
        double d0 = h.X[0] - Y[0], d1 = h.X[1] - Y[1], d2 = h.X[2] - Y[2];
        if (d0 * d0 + d1 * d1 + d2 * d2 <= OCC_TOL * OCC_TOL)
            pt->occluded = 0;
    }
}

int sinew_synth_query(sinew_synth *s, int from, int to, double x, double y, sinew_synth_point *out)
{
    if (!s || !out || !isfinite(x) || !isfinite(y))
        return SINEW_EINVAL;
    int st;
    if ((st = check_frame(s, from, "query 'from'")) || (st = check_frame(s, to, "query 'to'")))
        return st;
    const sinew__synth_scene *sc = &s->scene;
    sinew__synth_state sa, sb;
    sinew__synth_state_at(sc, from, &sa);
    sinew__synth_state_at(sc, to, &sb);
    sinew__synth_hit h;
    double Xa[3] = {NAN, NAN, NAN};
    if (sinew__synth_cast(sc, &sa, x, y, &h))
        sinew__synth_to_camera(&sa, h.X, Xa);
    truth_point(sc, &sb, h.part, h.m, Xa, x, y, out);
    return SINEW_OK;
}

int sinew_synth_truth(sinew_synth *s, int from, int to, sinew_image *flow, sinew_image *occlusion,
                      sinew_image *scene_flow)
{
    if (!s)
        return SINEW_EINVAL;
    int st;
    if ((st = check_frame(s, from, "truth 'from'")) || (st = check_frame(s, to, "truth 'to'")) ||
        (st = check_out(s, flow, 2, SINEW_F32, "flow")) ||
        (st = check_out(s, occlusion, 1, SINEW_U8, "occlusion")) ||
        (st = check_out(s, scene_flow, 3, SINEW_F32, "scene flow")))
        return st;
    if (from == to)
        return sinew__fail(s->ctx, SINEW_EINVAL, "truth needs two different frames");
    if (s->cached != from)
        cast_grid(s, from, NULL, NULL, NULL);
    const sinew__synth_scene *sc = &s->scene;
    sinew__synth_state sb;
    sinew__synth_state_at(sc, to, &sb);
    int W = s->p.width, H = s->p.height;
    const unsigned char *part = s->part;
    const double *mat = s->mat, *cam = s->cam;
    SINEW_PARALLEL_FOR(sinew_ctx_threads(s->ctx))
    for (int y = 0; y < H; y++) {
        for (int x = 0; x < W; x++) {
            size_t i = (size_t)y * (size_t)W + (size_t)x;
            sinew_synth_point pt;
            truth_point(sc, &sb, part[i], mat + 3 * i, cam + 3 * i, x, y, &pt);
            if (flow) {
                float *fr = sinew_image_row_f32(flow, y);
                fr[2 * x] = (float)pt.flow[0];
                fr[2 * x + 1] = (float)pt.flow[1];
            }
            if (occlusion)
                sinew_image_row_u8(occlusion, y)[x] = pt.occluded ? 255 : 0;
            if (scene_flow) {
                float *sr = sinew_image_row_f32(scene_flow, y);
                for (int k = 0; k < 3; k++)
                    sr[3 * x + k] = (float)pt.scene_flow[k];
            }
        }
    }
    return SINEW_OK;
}

/* standard normal from two hashed uniforms (Box-Muller) */
static double hashed_normal(uint64_t seed, uint64_t a, uint64_t b)
{
    double u1 = sinew__synth_unit(seed, a, b, 101), u2 = sinew__synth_unit(seed, a, b, 202);
    if (u1 < 1e-300)
        u1 = 1e-300;
    return sqrt(-2.0 * log(u1)) * cos(2 * 3.14159265358979323846 * u2);
}

int sinew_synth_depth_mm(sinew_synth *s, int frame, const sinew_image *depth, sinew_image *depth_mm)
{
    if (!s || !depth || !depth_mm)
        return SINEW_EINVAL;
    int st;
    if ((st = check_frame(s, frame, "depth")) ||
        (st = check_out(s, (sinew_image *)depth, 1, SINEW_F32, "depth")) ||
        (st = check_out(s, depth_mm, 1, SINEW_U16, "depth_mm")))
        return st;
    int W = s->p.width, H = s->p.height, noise = s->p.depth_noise;
    uint64_t key = sinew__synth_mix(s->p.seed ^ 0xD3E7D3E7ull) + (uint64_t)frame;
    SINEW_PARALLEL_FOR(sinew_ctx_threads(s->ctx))
    for (int y = 0; y < H; y++) {
        const float *dr = sinew_image_row_f32(depth, y);
        uint16_t *out = sinew_image_row_u16(depth_mm, y);
        for (int x = 0; x < W; x++) {
            double z = dr[x];
            if (!isfinite(z) || z <= 0) {
                out[x] = 0;
                continue;
            }
            if (noise) {
                /* holes: pixels next to a depth step of more than 1 cm (or next to
                 * nothing) drop out with probability 0.6 */
                int edge = 0;
                for (int dy = -1; dy <= 1 && !edge; dy++)
                    for (int dx = -1; dx <= 1; dx++) {
                        int xx = x + dx, yy = y + dy;
                        if (xx < 0 || yy < 0 || xx >= W || yy >= H)
                            continue;
                        double zn = sinew_image_row_f32(depth, yy)[xx];
                        if (!isfinite(zn) || fabs(zn - z) > 0.01) {
                            edge = 1;
                            break;
                        }
                    }
                if (edge && sinew__synth_unit(key, (uint64_t)x, (uint64_t)y, 7) < 0.6) {
                    out[x] = 0;
                    continue;
                }
                /* axial noise growing with range, sigma(z) = 0.0012 + 0.0019 (z - 0.4)^2
                 * metres: the structured-light model of Nguyen, Izadi & Lovell (3DIMPVT
                 * 2012), from memory */
                double sigma = 0.0012 + 0.0019 * (z - 0.4) * (z - 0.4);
                z += sigma * hashed_normal(key, (uint64_t)x, (uint64_t)y);
            }
            double mm = floor(z * 1000.0 + 0.5);
            out[x] = (uint16_t)(mm < 1 ? 1 : mm > 65535 ? 65535 : mm);
        }
    }
    return SINEW_OK;
}

sinew_ctx *sinew__synth_ctx(const sinew_synth *s)
{
    return s->ctx;
}

const sinew_synth_params *sinew__synth_params(const sinew_synth *s)
{
    return &s->p;
}
