/* SPDX-License-Identifier: MIT */
/* Depth of stereo sequences for `sinew run` (flow/runstereo.h): per frame, left and right
 * frames -> (rectification of a raw rig) -> semi-global matching with the left-right
 * check -> depth z = f B / (d + doffs), invalid where the check rejects -> (back to the
 * left frame's pixels) -> OUTDIR/stereo/STEM.npy, then the record STEM.json last. The
 * record's key is SHA-256 over a version line, the stereo options and the digests of
 * the left frame, the right frame and the calibration file. */
#include "flow/runstereo.h"

#include <cJSON.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "flow/internal/base.h"
#include "flow/internal/fs.h"
#include "flow/internal/json.h"
#include "flow/io.h"

#define RECORD_VERSION "sinew stereo depth 1"
#define RECORD_MAX_BYTES (1 << 20)
/* a frame folder's outputs, in the record's order */
static const char *const OUTPUTS[] = {SINEW_RUN_STEREO_DEPTH, SINEW_RUN_STEREO_DISPARITY,
                                      SINEW_RUN_STEREO_MASK};
#define NOUTPUTS 3
/* The rectification test of `sinew stereo` (tools/cmd_stereo.c, docs/methods.md):
   +-16 rows, at least 10 features, median offset above 1 px = not rectified. */
#define RECT_SEARCH 16
#define RECT_MIN_MATCHES 10
#define RECT_MAX_DY 1.0

int sinew_run_stereo_camera(sinew_ctx *ctx, sinew_camera *cam, const char *calib)
{
    if (!ctx || !calib || !cam)
        return SINEW_EINVAL;
    sinew_stereo_rig rig;
    int st = sinew_stereo_rig_load(ctx, &rig, calib);
    if (st)
        return st;
    if (rig.raw)
        *cam = rig.left;
    else
        sinew_camera_init(cam, rig.calib.fx, rig.calib.fy, rig.calib.cx, rig.calib.cy,
                          rig.calib.width, rig.calib.height);
    return SINEW_OK;
}

typedef struct state {
    const sinew_run_stereo_params *p;
    sinew_stereo_rig rig;
    sinew_stereo_params params;
    char calib_hex[65];
    char dir[SINEW__PATH_MAX];
    const char *outdir;
    int checked; /* the rectification test ran (on the first frame computed) */
} state;

/* The left frame's file name without directory and extension. */
static int stem_of(sinew_ctx *ctx, const char *path, char *out, size_t n)
{
    const char *b = strrchr(path, '/');
    b = b ? b + 1 : path;
    const char *dot = strrchr(b, '.');
    const size_t len = dot && dot != b ? (size_t)(dot - b) : strlen(b);
    if (len + 1 > n)
        return sinew__fail(ctx, SINEW_ELIMIT, "%s: file name too long", path);
    memcpy(out, b, len);
    out[len] = 0;
    return SINEW_OK;
}

int sinew_run_stereo_frame_dir(sinew_ctx *ctx, char *buf, size_t n, const char *outdir,
                               const char *left)
{
    if (!ctx || !outdir || !left || !buf)
        return SINEW_EINVAL;
    char stem[256], sub[300];
    int st = stem_of(ctx, left, stem, sizeof stem);
    if (st)
        return st;
    snprintf(sub, sizeof sub, "%s/%s", SINEW_RUN_STEREO_DIR, stem);
    return sinew__path_join(ctx, buf, n, outdir, sub);
}

static int file_hex(sinew_ctx *ctx, const char *path, char hex[65], uint64_t *bytes)
{
    unsigned char d[32];
    uint64_t nb = 0;
    int st = sinew_sha256_file(ctx, d, &nb, path);
    if (st)
        return st;
    sinew_sha256_hex(d, hex);
    if (bytes)
        *bytes = nb;
    return SINEW_OK;
}

/* 1 when dir/done.json carries key and lists each of OUTPUTS with its current size and
 * digest. */
static int cached(sinew_ctx *ctx, const char *dir, const char *key)
{
    char path[SINEW__PATH_MAX], hex[65];
    cJSON *r = NULL;
    if (sinew__path_join(ctx, path, sizeof path, dir, SINEW_RUN_STEREO_DONE) ||
        sinew__json_read(ctx, path, RECORD_MAX_BYTES, &r))
        return 0;
    const char *k = sinew__json_str(r, "key");
    const cJSON *outs = cJSON_GetObjectItemCaseSensitive(r, "outputs");
    int same = k && !strcmp(k, key) && cJSON_GetArraySize(outs) == NOUTPUTS;
    for (int i = 0; same && i < NOUTPUTS; i++) {
        const cJSON *o = cJSON_GetArrayItem(outs, i);
        const char *name = sinew__json_str(o, "name"), *h = sinew__json_str(o, "sha256");
        uint64_t bytes = 0;
        same = name && h && !strcmp(name, OUTPUTS[i]) &&
               !sinew__path_join(ctx, path, sizeof path, dir, name) &&
               !file_hex(ctx, path, hex, &bytes) && !strcmp(h, hex) &&
               sinew__json_num(o, "bytes") == (double)bytes;
    }
    cJSON_Delete(r);
    sinew_ctx_clear(ctx);
    return same;
}

/* Median vertical offset of matched features: refuse above 1 px (see RECT_*). */
static int rectified_check(sinew_ctx *ctx, const state *s, const sinew_run_frame *fr,
                           const sinew_image *l, const sinew_image *r)
{
    double dy = 0;
    int matched = 0;
    int st = sinew_stereo_vertical_offset(ctx, &dy, &matched, l, r, s->params.min_disparity,
                                          sinew_stereo_num_disparities(&s->params, l->width),
                                          RECT_SEARCH);
    if (st)
        return st;
    if (matched >= RECT_MIN_MATCHES && fabs(dy) > RECT_MAX_DY)
        return sinew__fail(ctx, SINEW_ECONFIG,
                           "%s: not rectified with %s%s%s: matching features are %.1f px apart "
                           "vertically (median of %d)",
                           fr->right, fr->color, s->rig.raw ? " after rectification with " : "",
                           s->rig.raw ? s->p->calib : "", dy, matched);
    return SINEW_OK;
}

/* One frame's outputs into dir: depth in the left frame's pixels, disparity and mask in
 * the (rectified) left view. */
static int frame_depth(sinew_ctx *ctx, state *s, const sinew_run_frame *fr, const char *dir,
                       int64_t *kept)
{
    char npy[SINEW__PATH_MAX], dsp[SINEW__PATH_MAX], msk[SINEW__PATH_MAX];
    sinew_image l = {0}, r = {0}, lr = {0}, rr = {0}, il = {0}, ir = {0}, d = {0}, m = {0}, z = {0},
                zl = {0};
    sinew_stereo_rectification rect;
    int st = sinew__path_join(ctx, npy, sizeof npy, dir, SINEW_RUN_STEREO_DEPTH);
    if (!st)
        st = sinew__path_join(ctx, dsp, sizeof dsp, dir, SINEW_RUN_STEREO_DISPARITY);
    if (!st)
        st = sinew__path_join(ctx, msk, sizeof msk, dir, SINEW_RUN_STEREO_MASK);
    if (!st)
        st = sinew_image_read(ctx, &l, fr->color);
    if (!st)
        st = sinew_image_read(ctx, &r, fr->right);
    if (!st && (l.width != r.width || l.height != r.height))
        st = sinew__fail(ctx, SINEW_ESIZE, "%s: %dx%d, but %s is %dx%d", fr->right, r.width,
                         r.height, fr->color, l.width, l.height);
    const int cw = s->rig.raw ? s->rig.left.width : s->rig.calib.width;
    const int ch = s->rig.raw ? s->rig.left.height : s->rig.calib.height;
    if (!st && cw && (cw != l.width || ch != l.height))
        st = sinew__fail(ctx, SINEW_ESIZE, "%s: calibrated for %dx%d, but %s is %dx%d", s->p->calib,
                         cw, ch, fr->color, l.width, l.height);
    if (!st && s->rig.raw &&
        !(st = sinew_stereo_rectify_init(ctx, &rect, &s->rig, l.width, l.height)) &&
        !(st = sinew_stereo_rectify_image(ctx, &lr, &il, &l, &rect, 0)))
        st = sinew_stereo_rectify_image(ctx, &rr, &ir, &r, &rect, 1);
    const sinew_image *L = s->rig.raw ? &lr : &l, *R = s->rig.raw ? &rr : &r;
    if (!st && !s->checked) {
        st = rectified_check(ctx, s, fr, L, R);
        s->checked = 1;
    }
    if (!st && !(st = sinew_image_alloc(ctx, &d, l.width, l.height, 1, SINEW_F32)))
        st = sinew_image_alloc(ctx, &m, l.width, l.height, 1, SINEW_U8);
    sinew_stereo_output o = {.disparity = &d, .mask = &m};
    if (!st && !(st = sinew_stereo_run(ctx, &o, L, R, &s->params)) && s->rig.raw)
        st = sinew_stereo_mark_outside(ctx, &o, &il, &ir);
    if (!st)
        st = sinew_stereo_depth(ctx, &z, &d, &m, s->rig.raw ? &rect.calib : &s->rig.calib, NULL);
    if (!st && s->rig.raw)
        st = sinew_stereo_unrectify_depth(ctx, &zl, &z, &rect, NULL);
    if (!st)
        st = sinew_stereo_write_map(ctx, npy, s->rig.raw ? &zl : &z, 1000);
    if (!st)
        st = sinew_stereo_write_map(ctx, dsp, &d, 256);
    if (!st)
        st = sinew_image_write_png(ctx, msk, &m);
    *kept = o.stats.kept;
    sinew_image *all[] = {&l, &r, &lr, &rr, &il, &ir, &d, &m, &z, &zl};
    for (size_t i = 0; i < sizeof all / sizeof all[0]; i++)
        sinew_image_free(all[i]);
    return st;
}

/* dir/done.json, last: the key, the inputs and each output's size and digest. */
static int write_record(sinew_ctx *ctx, const state *s, const sinew_run_frame *fr, const char *dir,
                        const char *key, int64_t kept)
{
    char path[SINEW__PATH_MAX], hex[65];
    cJSON *o = cJSON_CreateObject(), *outs = cJSON_CreateArray();
    int st = o && outs ? SINEW_OK : SINEW_ENOMEM;
    if (!st && (!cJSON_AddStringToObject(o, "key", key) ||
                !cJSON_AddStringToObject(o, "left", fr->color) ||
                !cJSON_AddStringToObject(o, "right", fr->right) ||
                !cJSON_AddStringToObject(o, "calibration", s->p->calib) ||
                !cJSON_AddStringToObject(o, "preset", s->p->preset ? s->p->preset : "balanced") ||
                !cJSON_AddNumberToObject(o, "kept", (double)kept)))
        st = SINEW_ENOMEM;
    for (int i = 0; !st && i < NOUTPUTS; i++) {
        uint64_t bytes = 0;
        cJSON *e = cJSON_CreateObject();
        if (!e || !cJSON_AddItemToArray(outs, e))
            st = SINEW_ENOMEM;
        else if (!(st = sinew__path_join(ctx, path, sizeof path, dir, OUTPUTS[i])) &&
                 !(st = file_hex(ctx, path, hex, &bytes)) &&
                 (!cJSON_AddStringToObject(e, "name", OUTPUTS[i]) ||
                  !cJSON_AddNumberToObject(e, "bytes", (double)bytes) ||
                  !cJSON_AddStringToObject(e, "sha256", hex)))
            st = SINEW_ENOMEM;
    }
    if (!st && cJSON_AddItemToObject(o, "outputs", outs))
        outs = NULL;
    else if (!st)
        st = SINEW_ENOMEM;
    if (!st)
        st = sinew__path_join(ctx, path, sizeof path, dir, SINEW_RUN_STEREO_DONE);
    if (!st)
        st = sinew__json_write(ctx, path, o);
    cJSON_Delete(outs);
    cJSON_Delete(o);
    return st;
}

/* Frame f: key, reuse or compute, then its depth path into frames[f].depth. */
static int one_frame(sinew_ctx *ctx, state *s, sinew_run_frame *fr, sinew_run_stereo_result *res)
{
    if (!fr->right && !s->p->paths_only)
        return sinew__fail(ctx, SINEW_ECONFIG, "%s: no right frame for this left frame", fr->color);
    char dir[SINEW__PATH_MAX], npy[SINEW__PATH_MAX];
    char lhex[65], rhex[65], key[65];
    int st = sinew_run_stereo_frame_dir(ctx, dir, sizeof dir, s->outdir, fr->color);
    if (!st)
        st = sinew__path_join(ctx, npy, sizeof npy, dir, SINEW_RUN_STEREO_DEPTH);
    if (st)
        return st;
    if (s->p->paths_only)
        goto path;
    if ((st = file_hex(ctx, fr->color, lhex, NULL)) || (st = file_hex(ctx, fr->right, rhex, NULL)))
        return st;
    sinew_sha256 h;
    unsigned char digest[32];
    sinew_sha256_init(&h);
    const char *parts[] = {
        RECORD_VERSION "\n", s->p->preset ? s->p->preset : "balanced", "\n", lhex, rhex,
        s->calib_hex};
    for (size_t i = 0; i < sizeof parts / sizeof parts[0]; i++)
        sinew_sha256_update(&h, parts[i], strlen(parts[i]));
    sinew_sha256_final(&h, digest);
    sinew_sha256_hex(digest, key);
    if (s->p->resume && cached(ctx, dir, key)) {
        res->reused++;
    } else {
        int64_t kept = 0;
        char done[SINEW__PATH_MAX];
        /* the old record goes first, so a frame cut short is never taken for done */
        if ((st = sinew__refuse_link(ctx, dir)) || (st = sinew__mkdirs(ctx, dir)) ||
            (st = sinew__path_join(ctx, done, sizeof done, dir, SINEW_RUN_STEREO_DONE)))
            return st;
        if (remove(done) != 0 && errno != ENOENT)
            return sinew__fail(ctx, SINEW_EIO, "%s: cannot remove: %s", done, strerror(errno));
        if ((st = frame_depth(ctx, s, fr, dir, &kept)) ||
            (st = write_record(ctx, s, fr, dir, key, kept)))
            return st;
        res->computed++;
    }
path:
    sinew__free(ctx, (void *)fr->depth);
    fr->depth = sinew__strdup(ctx, npy);
    return fr->depth ? SINEW_OK : SINEW_ENOMEM;
}

int sinew_run_stereo_depths(sinew_ctx *ctx, sinew_run_frame *frames, sinew_run_stereo_result *res,
                            const sinew_run_spec *spec, const sinew_run_stereo_params *p)
{
    if (!ctx || !frames || !spec || !p || !p->calib || !res || !spec->outdir)
        return SINEW_EINVAL;
    memset(res, 0, sizeof *res);
    state s;
    memset(&s, 0, sizeof s);
    s.p = p;
    s.outdir = spec->outdir;
    sinew_stereo_params_default(&s.params);
    int st = p->preset ? sinew_stereo_preset(&s.params, p->preset) : SINEW_OK;
    if (st)
        return sinew__fail(ctx, SINEW_ECONFIG, "stereo preset must be fast or balanced, got '%s'",
                           p->preset);
    if ((st = sinew_stereo_rig_load(ctx, &s.rig, p->calib)) ||
        (st = file_hex(ctx, p->calib, s.calib_hex, NULL)) ||
        (st = sinew__path_join(ctx, s.dir, sizeof s.dir, spec->outdir, SINEW_RUN_STEREO_DIR)) ||
        (st = sinew__refuse_link(ctx, s.dir)) || (st = sinew__mkdirs(ctx, s.dir)))
        return st;
    /* the frames of the owned pairs, each once, in frame order */
    unsigned char *need = sinew__calloc(ctx, spec->nframes ? spec->nframes : 1, 1);
    if (!need)
        return SINEW_ENOMEM;
    for (size_t q = 0; q < spec->npairs; q++)
        if (p->paths_only || sinew_shard_owns(q, spec->shard_k, spec->shard_n))
            need[spec->pairs[q].i] = need[spec->pairs[q].j] = 1;
    for (size_t f = 0; !st && f < spec->nframes; f++) {
        if (!need[f])
            continue;
        if (sinew_ctx_cancelled(ctx))
            st = sinew__fail(ctx, SINEW_EINTERRUPTED, "stereo: interrupted");
        else
            st = one_frame(ctx, &s, &frames[f], res);
    }
    sinew__free(ctx, need);
    return st;
}
