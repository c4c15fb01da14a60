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
#include "flow/internal/fs.h"
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

/* The files of the layout (docs/formats.md): one per frame t, or per pair (t, t + 1) named
 * by t. The backward truth of pair (t - 1, t) is written with frame t, from the rays of
 * frame t cached by its render; the forward truth of (t, t + 1) too. */
enum { OUT_FRAME, OUT_FORWARD, OUT_BACKWARD };
static const struct out_file {
    const char *folder, *ext;
    int img;  /* IMG_* */
    int when; /* OUT_* */
} outs[] = {
    {"color", "png", IMG_COLOR, OUT_FRAME},
    {"depth", "png", IMG_MM, OUT_FRAME},
    {"labels", "png", IMG_LABELS, OUT_FRAME},
    /* the pair entries in the order of sinew_seq_pair's file fields */
    {"truth/flow_forward", "flo", IMG_FWD, OUT_FORWARD},
    {"truth/flow_backward", "flo", IMG_BWD, OUT_BACKWARD},
    {"truth/occlusion_forward", "png", IMG_OFWD, OUT_FORWARD},
    {"truth/occlusion_backward", "png", IMG_OBWD, OUT_BACKWARD},
    {"truth/scene_flow", "npy", IMG_SF, OUT_FORWARD},
};
#define NOUT (int)(sizeof outs / sizeof outs[0])

/* Name of output k for frame or pair t, relative to the sequence folder. */
static void out_name(char *buf, size_t n, int k, int t)
{
    snprintf(buf, n, "%s/%06d.%s", outs[k].folder, t, outs[k].ext);
}

static int write_out(sinew_ctx *ctx, const char *dir, int k, int t, const sinew_image *im)
{
    char rel[64], path[4200];
    int st;
    out_name(rel, sizeof rel, k, t);
    if ((st = sinew__path_join(ctx, path, sizeof path, dir, rel)))
        return st;
    const sinew_image *img = &im[outs[k].img];
    if (!strcmp(outs[k].ext, "flo"))
        return sinew_flow_write(ctx, path, img, SINEW_FLOW_FLO);
    if (!strcmp(outs[k].ext, "npy"))
        return sinew_npy_write_image(ctx, path, img, 0);
    return sinew_image_write_png(ctx, path, img);
}

static int write_frame(sinew_synth *s, const char *dir, int t, sinew_image *im)
{
    const sinew_synth_params *P = sinew__synth_params(s);
    sinew_ctx *ctx = sinew__synth_ctx(s);
    int st, bwd = t > 0, fwd = t + 1 < P->frames;
    if ((st = sinew_synth_render(s, t, &im[IMG_COLOR], &im[IMG_DEPTH], &im[IMG_LABELS])) ||
        (st = sinew_synth_depth_mm(s, t, &im[IMG_DEPTH], &im[IMG_MM])) ||
        (bwd && (st = sinew_synth_truth(s, t, t - 1, &im[IMG_BWD], &im[IMG_OBWD], NULL))) ||
        (fwd && (st = sinew_synth_truth(s, t, t + 1, &im[IMG_FWD], &im[IMG_OFWD], &im[IMG_SF]))))
        return st;
    for (int k = 0; k < NOUT; k++) {
        int w = outs[k].when;
        if ((w == OUT_BACKWARD && !bwd) || (w == OUT_FORWARD && !fwd))
            continue;
        if ((st = write_out(ctx, dir, k, w == OUT_BACKWARD ? t - 1 : t, im)))
            return st;
    }
    return SINEW_OK;
}

static int build_sequence(sinew_synth *s, sinew_sequence *seq)
{
    const sinew_synth_params *P = sinew__synth_params(s);
    static const char *const labels[] = {"background", "tray", "pad", "block", "probe"};
    char names[NOUT][80];
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
        sinew_sequence_frame_init(&fr);
        for (int k = 0; k < 3; k++)
            out_name(names[k], sizeof names[k], k, t);
        fr.color = names[0];
        fr.depth = names[1];
        fr.labels = names[2];
        fr.timestamp = t / SINEW__SYNTH_FPS;
        fr.has_pose = 1;
        sinew_synth_pose(s, t, fr.pose);
        if ((st = sinew_sequence_add_frame(seq, &fr)))
            return st;
    }
    for (int t = 0; t + 1 < P->frames; t++) {
        for (int k = 3; k < NOUT; k++)
            out_name(names[k], sizeof names[k], k, t);
        sinew_seq_pair p = {t, t + 1, names[3], names[4], names[5], names[6], names[7]};
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
    char path[4200];
    int st = make_dir(ctx, dir);
    if (!st && !(st = sinew__path_join(ctx, path, sizeof path, dir, "truth")))
        st = make_dir(ctx, path); /* parent of the truth folders */
    for (int k = 0; !st && k < NOUT; k++)
        if (!(st = sinew__path_join(ctx, path, sizeof path, dir, outs[k].folder)))
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
