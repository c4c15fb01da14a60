/* SPDX-License-Identifier: MIT */
/* Writing a whole demo sequence to disk: per-frame images, per-pair ground truth and
 * sequence.json (layout in flow/synth.h and docs/formats.md). Each frame's rays are cast
 * once: its render serves the backward truth of the previous pair and the forward truth
 * of the next. */
#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>

#include "flow/internal/base.h"
#include "flow/internal/synth.h"
#include "flow/io.h"
#include "flow/sequence.h"
#include "flow/synth.h"

static int make_dir(sinew_ctx *ctx, const char *path)
{
    if (mkdir(path, 0777) == 0)
        return SINEW_OK;
    int e = errno;
    struct stat sb;
    if (e == EEXIST && stat(path, &sb) == 0 && S_ISDIR(sb.st_mode))
        return SINEW_OK;
    return sinew__fail(ctx, SINEW_EIO, "%s: cannot create folder: %s", path, strerror(e));
}

enum {
    IMG_COLOR,
    IMG_DEPTH,
    IMG_MM,
    IMG_LABELS,
    IMG_FWD,
    IMG_BWD,
    IMG_OFWD,
    IMG_OBWD,
    IMG_SF,
    IMG_N
};

static int write_frame(sinew_synth *s, const char *dir, int t, sinew_image *im)
{
    const sinew_synth_params *P = sinew__synth_params(s);
    sinew_ctx *ctx = sinew__synth_ctx(s);
    char rel[64], path[4200];
    int st;
    if ((st = sinew_synth_render(s, t, &im[IMG_COLOR], &im[IMG_DEPTH], &im[IMG_LABELS])) ||
        (st = sinew_synth_depth_mm(s, t, &im[IMG_DEPTH], &im[IMG_MM])))
        return st;
    snprintf(rel, sizeof rel, "color/%06d.png", t);
    if ((st = sinew__path_join(ctx, path, sizeof path, dir, rel)) ||
        (st = sinew_image_write_png(ctx, path, &im[IMG_COLOR])))
        return st;
    snprintf(rel, sizeof rel, "depth/%06d.png", t);
    if ((st = sinew__path_join(ctx, path, sizeof path, dir, rel)) ||
        (st = sinew_image_write_png(ctx, path, &im[IMG_MM])))
        return st;
    snprintf(rel, sizeof rel, "labels/%06d.png", t);
    if ((st = sinew__path_join(ctx, path, sizeof path, dir, rel)) ||
        (st = sinew_image_write_png(ctx, path, &im[IMG_LABELS])))
        return st;
    /* backward truth of pair (t-1, t) uses the hits of frame t cached by the render */
    if (t > 0) {
        if ((st = sinew_synth_truth(s, t, t - 1, &im[IMG_BWD], &im[IMG_OBWD], NULL)))
            return st;
        snprintf(rel, sizeof rel, "truth/flow_backward/%06d.flo", t - 1);
        if ((st = sinew__path_join(ctx, path, sizeof path, dir, rel)) ||
            (st = sinew_flow_write(ctx, path, &im[IMG_BWD], SINEW_FLOW_FLO)))
            return st;
        snprintf(rel, sizeof rel, "truth/occlusion_backward/%06d.png", t - 1);
        if ((st = sinew__path_join(ctx, path, sizeof path, dir, rel)) ||
            (st = sinew_image_write_png(ctx, path, &im[IMG_OBWD])))
            return st;
    }
    if (t + 1 < P->frames) {
        if ((st = sinew_synth_truth(s, t, t + 1, &im[IMG_FWD], &im[IMG_OFWD], &im[IMG_SF])))
            return st;
        snprintf(rel, sizeof rel, "truth/flow_forward/%06d.flo", t);
        if ((st = sinew__path_join(ctx, path, sizeof path, dir, rel)) ||
            (st = sinew_flow_write(ctx, path, &im[IMG_FWD], SINEW_FLOW_FLO)))
            return st;
        snprintf(rel, sizeof rel, "truth/occlusion_forward/%06d.png", t);
        if ((st = sinew__path_join(ctx, path, sizeof path, dir, rel)) ||
            (st = sinew_image_write_png(ctx, path, &im[IMG_OFWD])))
            return st;
        snprintf(rel, sizeof rel, "truth/scene_flow/%06d.npy", t);
        if ((st = sinew__path_join(ctx, path, sizeof path, dir, rel)) ||
            (st = sinew_npy_write_image(ctx, path, &im[IMG_SF], 0)))
            return st;
    }
    return SINEW_OK;
}

static int build_sequence(sinew_synth *s, sinew_sequence *seq)
{
    const sinew_synth_params *P = sinew__synth_params(s);
    static const char *const labels[] = {"background", "tray", "pad", "block", "probe"};
    char c[64], d[64], l[64], a[80], b[80], e[80], f[80], g[80];
    int st;
    if ((st = sinew_sequence_set_name(seq,
                                      "sinew demo scene (invented): probe on a silicone pad")) ||
        (st = sinew_sequence_set_label_names(seq, labels, 5)))
        return st;
    seq->has_intrinsics = 1;
    sinew_synth_intrinsics(s, &seq->fx, &seq->fy, &seq->cx, &seq->cy);
    seq->width = P->width;
    seq->height = P->height;
    seq->depth_scale = 1000.0;
    for (int t = 0; t < P->frames; t++) {
        sinew_seq_frame fr;
        sinew_seq_frame_init(&fr);
        snprintf(c, sizeof c, "color/%06d.png", t);
        snprintf(d, sizeof d, "depth/%06d.png", t);
        snprintf(l, sizeof l, "labels/%06d.png", t);
        fr.color = c;
        fr.depth = d;
        fr.labels = l;
        fr.timestamp = t / SINEW__SYNTH_FPS;
        fr.has_pose = 1;
        sinew_synth_pose(s, t, fr.pose);
        if ((st = sinew_sequence_add_frame(seq, &fr)))
            return st;
    }
    for (int t = 0; t + 1 < P->frames; t++) {
        snprintf(a, sizeof a, "truth/flow_forward/%06d.flo", t);
        snprintf(b, sizeof b, "truth/flow_backward/%06d.flo", t);
        snprintf(e, sizeof e, "truth/occlusion_forward/%06d.png", t);
        snprintf(f, sizeof f, "truth/occlusion_backward/%06d.png", t);
        snprintf(g, sizeof g, "truth/scene_flow/%06d.npy", t);
        sinew_seq_pair p = {t, t + 1, a, b, e, f, g};
        if ((st = sinew_sequence_add_pair(seq, &p)))
            return st;
    }
    return SINEW_OK;
}

int sinew_synth_write(sinew_synth *s, const char *dir)
{
    if (!s || !dir || !*dir)
        return SINEW_EINVAL;
    sinew_ctx *ctx = sinew__synth_ctx(s);
    const sinew_synth_params *P = sinew__synth_params(s);
    static const char *const sub[] = {"color",
                                      "depth",
                                      "labels",
                                      "truth",
                                      "truth/flow_forward",
                                      "truth/flow_backward",
                                      "truth/occlusion_forward",
                                      "truth/occlusion_backward",
                                      "truth/scene_flow"};
    char path[4200];
    int st = make_dir(ctx, dir);
    for (size_t i = 0; !st && i < sizeof sub / sizeof *sub; i++)
        if (!(st = sinew__path_join(ctx, path, sizeof path, dir, sub[i])))
            st = make_dir(ctx, path);
    if (st)
        return st;
    static const struct {
        int ch;
        sinew_type type;
    } shape[IMG_N] = {{3, SINEW_U8},  {1, SINEW_F32}, {1, SINEW_U16}, {1, SINEW_U8}, {2, SINEW_F32},
                      {2, SINEW_F32}, {1, SINEW_U8},  {1, SINEW_U8},  {3, SINEW_F32}};
    sinew_image im[IMG_N];
    memset(im, 0, sizeof im);
    for (int i = 0; !st && i < IMG_N; i++)
        st = sinew_image_alloc(ctx, &im[i], P->width, P->height, shape[i].ch, shape[i].type);
    for (int t = 0; !st && t < P->frames; t++)
        st = write_frame(s, dir, t, im);
    for (int i = 0; i < IMG_N; i++)
        sinew_image_free(&im[i]);
    if (st)
        return st;
    sinew_sequence *seq = NULL;
    if (!(st = sinew_sequence_new(ctx, &seq)) && !(st = build_sequence(s, seq)) &&
        !(st = sinew__path_join(ctx, path, sizeof path, dir, "sequence.json")))
        st = sinew_sequence_write(seq, path);
    sinew_sequence_free(seq);
    return st;
}
