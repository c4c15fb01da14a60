/* SPDX-License-Identifier: MIT */
/* Stereo mode of the demo scene (API in flow/stereo.h): the right camera of a rectified
 * pair is the left (scene) camera moved by `baseline` metres along its own x axis, with
 * the same intrinsics and orientation. Its colour frame is rendered by the same ray
 * casting and shading as the left frames; the left view's disparity is exact,
 * d = fx * baseline / z with z the camera depth of the left hit (so doffs = 0), and a
 * left pixel is occluded in the right view when the right camera's ray through the
 * projected point hits a different surface point (same tolerance as the flow truth). */
#define _POSIX_C_SOURCE 200809L
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "flow/internal/base.h"
#include "flow/internal/parallel.h"
#include "flow/internal/fs.h"
#include "flow/internal/synth.h"
#include "flow/io.h"
#include "flow/sequence.h"
#include "flow/stereo.h"

#define STEREO_OCC_TOL 1e-6 /* m, as OCC_TOL in flow/synth.c */

/* The right camera's state: centre moved by b along the camera x axis (row 0 of R). */
static void right_state(const sinew__synth_state *l, double b, sinew__synth_state *r)
{
    *r = *l;
    for (int k = 0; k < 3; k++)
        r->o[k] = l->o[k] + b * l->R[k];
}

static int check_img(sinew_ctx *ctx, const sinew_image *im, int w, int h, int ch, sinew_type t,
                     const char *what)
{
    if (!im)
        return SINEW_OK;
    if (!im->data || im->width != w || im->height != h || im->channels != ch || im->type != t)
        return sinew__fail(ctx, SINEW_ESIZE, "synth stereo: %s must be %dx%d, %d channel(s)", what,
                           w, h, ch);
    return SINEW_OK;
}

int sinew_stereo_synth_render(sinew_synth *s, int frame, double baseline, sinew_image *right,
                              sinew_image *disparity, sinew_image *occluded)
{
    if (!s)
        return SINEW_EINVAL;
    sinew_ctx *ctx = sinew__synth_ctx(s);
    const sinew_synth_params *p = sinew__synth_params(s);
    const int w = p->width, h = p->height;
    int st;
    if (!isfinite(baseline) || baseline <= 0 || baseline > 1.0)
        return sinew__fail(ctx, SINEW_EINVAL, "synth stereo: baseline must be in (0, 1] m (got %g)",
                           baseline);
    if (frame < 0 || frame >= p->frames)
        return sinew__fail(ctx, SINEW_EINVAL, "synth stereo: frame %d out of range 0..%d", frame,
                           p->frames - 1);
    if ((st = check_img(ctx, right, w, h, 3, SINEW_U8, "the right frame")) ||
        (st = check_img(ctx, disparity, w, h, 1, SINEW_F32, "the disparity")) ||
        (st = check_img(ctx, occluded, w, h, 1, SINEW_U8, "the occlusion mask")))
        return st;
    sinew__synth_scene sc;
    sinew__synth_scene_init(&sc, p->seed, w, h); /* the same scene: it depends on these only */
    sinew__synth_state sl, sr;
    sinew__synth_state_at(&sc, frame, &sl);
    right_state(&sl, baseline, &sr);
    SINEW_PARALLEL_FOR(sinew_ctx_threads(ctx))
    for (int y = 0; y < h; y++) {
        for (int x = 0; x < w; x++) {
            sinew__synth_hit hr, hl;
            if (right) {
                double rgb[3];
                sinew__synth_cast(&sc, &sr, x, y, &hr);
                sinew__synth_shade(&sc, &sr, &hr, rgb);
                uint8_t *px = sinew_image_row_u8(right, y) + 3 * x;
                for (int k = 0; k < 3; k++)
                    px[k] = (uint8_t)floor(rgb[k] * 255.0 + 0.5);
            }
            if (!disparity && !occluded)
                continue;
            float d = NAN;
            uint8_t occ = 1;
            if (sinew__synth_cast(&sc, &sl, x, y, &hl)) {
                double Xc[3];
                sinew__synth_to_camera(&sl, hl.X, Xc);
                d = (float)(sc.fx * baseline / Xc[2]);
                const double qx = x - sc.fx * baseline / Xc[2];
                sinew__synth_hit hq;
                if (qx >= -0.5 && qx < w - 0.5 && sinew__synth_cast(&sc, &sr, qx, y, &hq)) {
                    const double d0 = hq.X[0] - hl.X[0], d1 = hq.X[1] - hl.X[1],
                                 d2 = hq.X[2] - hl.X[2];
                    occ = d0 * d0 + d1 * d1 + d2 * d2 > STEREO_OCC_TOL * STEREO_OCC_TOL;
                }
            }
            if (disparity)
                sinew_image_row_f32(disparity, y)[x] = d;
            if (occluded)
                sinew_image_row_u8(occluded, y)[x] = occ ? 255 : 0;
        }
    }
    return SINEW_OK;
}

int sinew_stereo_synth_write(sinew_synth *s, const char *dir, double baseline)
{
    if (!s || !dir)
        return SINEW_EINVAL;
    sinew_ctx *ctx = sinew__synth_ctx(s);
    const sinew_synth_params *p = sinew__synth_params(s);
    sinew_image r = {0}, d = {0}, o = {0};
    char path[4096];
    int st;
    if ((st = sinew_image_alloc(ctx, &r, p->width, p->height, 3, SINEW_U8)) ||
        (st = sinew_image_alloc(ctx, &d, p->width, p->height, 1, SINEW_F32)) ||
        (st = sinew_image_alloc(ctx, &o, p->width, p->height, 1, SINEW_U8)))
        goto done;
    static const char *const sub[] = {"right", "truth/disparity", "truth/occlusion_stereo"};
    for (int k = 0; k < 3; k++) {
        if ((st = sinew__path_join(ctx, path, sizeof path, dir, sub[k])))
            goto done;
        if ((st = sinew__mkdirs(ctx, path)))
            goto done;
    }
    for (int t = 0; t < p->frames; t++) {
        if ((st = sinew_stereo_synth_render(s, t, baseline, &r, &d, &o)))
            goto done;
        const sinew_image *im[3] = {&r, &d, &o};
        static const char *const ext[3] = {"png", "pfm", "png"};
        for (int k = 0; k < 3; k++) {
            char name[64];
            snprintf(name, sizeof name, "%s/%06d.%s", sub[k], t, ext[k]);
            if ((st = sinew__path_join(ctx, path, sizeof path, dir, name)))
                goto done;
            st = k == 1 ? sinew_pfm_write_image(ctx, path, im[k])
                        : sinew_image_write_png(ctx, path, im[k]);
            if (st)
                goto done;
        }
    }
    /* the rectified calibration for `sinew stereo --calib` (docs/formats.md) */
    double fx, fy, cx, cy;
    sinew_synth_intrinsics(s, &fx, &fy, &cx, &cy);
    if ((st = sinew__path_join(ctx, path, sizeof path, dir, "stereo_calib.json")))
        goto done;
    sinew_outfile *f;
    if ((st = sinew_outfile_open(ctx, &f, path)))
        goto done;
    fprintf(sinew_outfile_stream(f),
            "{\n  \"left\": {\"fx\": %.17g, \"fy\": %.17g, \"cx\": %.17g, \"cy\": %.17g},\n"
            "  \"right\": {\"fx\": %.17g, \"fy\": %.17g, \"cx\": %.17g, \"cy\": %.17g},\n"
            "  \"baseline\": %.17g,\n  \"width\": %d, \"height\": %d,\n"
            "  \"comment\": \"sinew synth --stereo: invented demo scene\"\n}\n",
            fx, fy, cx, cy, fx, fy, cx, cy, baseline, p->width, p->height);
    if ((st = sinew_outfile_commit(ctx, f)))
        goto done;
    /* sequence.json (written before) names each frame's right frame and the calibration,
     * so `sinew run --stereo` takes the sequence as a stereo one */
    sinew_sequence *seq = NULL;
    if ((st = sinew__path_join(ctx, path, sizeof path, dir, "sequence.json")) ||
        (st = sinew_sequence_read(ctx, &seq, path)))
        goto done;
    st = sinew_sequence_set_stereo_calib(seq, "stereo_calib.json");
    for (size_t t = 0; !st && t < seq->n_frames; t++) {
        char name[64];
        snprintf(name, sizeof name, "right/%06zu.png", t);
        sinew__free(ctx, seq->frames[t].right);
        if (!(seq->frames[t].right = sinew__strdup(ctx, name)))
            st = SINEW_ENOMEM;
    }
    if (!st)
        st = sinew_sequence_write(seq, path);
    sinew_sequence_free(seq);
done:
    sinew_image_free(&r);
    sinew_image_free(&d);
    sinew_image_free(&o);
    return st;
}
