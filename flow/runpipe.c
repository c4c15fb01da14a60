/* SPDX-License-Identifier: MIT */
/* The standard per-pair pipeline of `sinew run`: read (or reuse) the two frames,
 * estimate forward and backward flow (or import them), run the forward-backward
 * check, write flows, mask and confidence into the pair folder and report stats.
 *
 * Memory: two decoded frames (the previous pair's are kept so a consecutive schedule
 * decodes each frame once), two flow fields and the check outputs, reused from pair to
 * pair while the size stays the same. Nothing here depends on the thread count except
 * speed: every stage is bit-identical for any count, so outputs are too. */
#define _POSIX_C_SOURCE 200809L
#include <math.h>
#include <stdio.h>
#include <string.h>

#include <cJSON.h>

#include "flow/camera.h"
#include "flow/check.h"
#include "flow/depth.h"
#include "flow/estimate.h"
#include "flow/internal/base.h"
#include "flow/internal/run.h"
#include "flow/io.h"
#include "flow/json.h"
#include "flow/match.h"
#include "flow/run.h"

typedef struct {
    int32_t index;      /* frame number, -1 = empty */
    sinew_image img;    /* colour/gray as stored */
    sinew_image z;      /* depth in metres (NaN invalid), when the frame has depth */
    sinew_image labels; /* label ids, when the frame has labels */
    sinew_image ignore; /* the user's ignore mask, when the frame has one */
    double z_median;
} frame_slot;

struct sinew_run_pipeline {
    sinew_ctx *ctx;
    const sinew_run_spec *spec;
    sinew_run_pipeline_params params;
    sinew_estimator *est; /* NULL when flows are imported */
    frame_slot slot[2];
    int width, height; /* size of the first frame read; 0 before */
    int have_camera;
    sinew_camera cam_file, cam; /* as loaded; fitted to the frame size */
    sinew_depth_params depth;
    sinew_image fwd, bwd, mask, conf, fberr;
};

void sinew_run_pipeline_params_default(sinew_run_pipeline_params *p)
{
    if (!p)
        return;
    memset(p, 0, sizeof *p);
    p->preset = "balanced";
    p->flow_format = SINEW_FLOW_FLO;
    p->depth_scale = 1000;
    p->match_stride = 4;
    p->matches = 1;
}

int sinew_run_pipeline_params_apply_sequence(sinew_ctx *ctx, sinew_run_pipeline_params *p,
                                             sinew_camera *cam, const sinew_sequence *seq,
                                             const char *where, unsigned keep)
{
    if (!ctx || !p || !cam || !seq || !where)
        return SINEW_EINVAL;
    if (seq->has_intrinsics && !(keep & SINEW_RUN_KEEP_CAMERA)) {
        sinew_camera_init(cam, seq->fx, seq->fy, seq->cx, seq->cy, seq->width, seq->height);
        p->camera = cam;
    }
    if (!(keep & SINEW_RUN_KEEP_DEPTH_SCALE) && seq->depth_scale > 0)
        p->depth_scale = seq->depth_scale;
    p->depth_ray = seq->depth_ray;
    if (!(keep & SINEW_RUN_KEEP_IGNORE_POLARITY) && seq->ignore_polarity)
        p->ignore_polarity = seq->ignore_polarity;
    const sinew_seq_run *r = &seq->run;
    if (!(keep & SINEW_RUN_KEEP_PRESET) && r->preset)
        p->preset = r->preset;
    if (!(keep & SINEW_RUN_KEEP_FLOW_FORMAT) && r->flow_format &&
        sinew_flow_format_parse(r->flow_format, &p->flow_format))
        return sinew__fail(ctx, SINEW_ECONFIG, "%s: run.flow_format: unknown format", where);
    if (!(keep & SINEW_RUN_KEEP_MATCH_STRIDE) && r->has_match_stride)
        p->match_stride = r->match_stride;
    return SINEW_OK;
}

int sinew_run_schedule_from_sequence(sinew_ctx *ctx, sinew_schedule *out, sinew_pair **list,
                                     const sinew_sequence *seq)
{
    if (!ctx || !seq || !out || !list)
        return SINEW_EINVAL;
    *list = NULL;
    const sinew_seq_run *r = &seq->run;
    if (!r->has_schedule)
        return SINEW_OK;
    sinew_pair *p = NULL;
    if (r->n_pairs && !(p = sinew__calloc(ctx, r->n_pairs, sizeof *p)))
        return SINEW_ENOMEM;
    for (size_t q = 0; q < r->n_pairs; q++)
        p[q] = (sinew_pair){r->pairs[2 * q], r->pairs[2 * q + 1]};
    memset(out, 0, sizeof *out);
    out->kind = (sinew_schedule_kind)r->schedule_kind;
    out->gap = r->gap;
    out->every = r->every;
    out->window = r->window;
    out->list = p;
    out->list_len = r->n_pairs;
    *list = p;
    return SINEW_OK;
}

/* OUTDIR/pairs/NAME/stats.json parsed into *j. */
static int stats_read(sinew_ctx *ctx, const char *outdir, sinew_pair pair, cJSON **j)
{
    char name[SINEW_PAIR_NAME_MAX], path[4200];
    sinew_pair_name(name, pair);
    int len = snprintf(path, sizeof path, "%s/" SINEW_RUN_PAIRS_DIR "/%s/" SINEW_RUN_STATS_FILE,
                       outdir, name);
    if (len < 0 || (size_t)len >= sizeof path)
        return sinew__fail(ctx, SINEW_ELIMIT, "%s: path too long", outdir);
    return sinew__json_read(ctx, path, (size_t)16 << 20, j);
}

int sinew_run_pair_warnings_read(sinew_ctx *ctx, const char *outdir, sinew_pair pair,
                                 void (*fn)(void *ud, const char *warning), void *ud)
{
    if (!ctx || !outdir || !fn)
        return SINEW_EINVAL;
    cJSON *j;
    int rc = stats_read(ctx, outdir, pair, &j);
    if (rc)
        return rc;
    const cJSON *w, *list = cJSON_GetObjectItemCaseSensitive(j, "warnings");
    if (!cJSON_IsArray(list))
        list = NULL;
    cJSON_ArrayForEach(w, list)
    {
        if (cJSON_IsString(w))
            fn(ud, w->valuestring);
    }
    cJSON_Delete(j);
    return SINEW_OK;
}

int sinew_run_pair_summary_read(sinew_ctx *ctx, sinew_run_pair_summary *out, const char *outdir,
                                sinew_pair pair)
{
    if (!ctx || !outdir || !out)
        return SINEW_EINVAL;
    cJSON *j;
    int rc = stats_read(ctx, outdir, pair, &j);
    if (rc)
        return rc;
    const cJSON *check = cJSON_GetObjectItemCaseSensitive(j, "check");
    const cJSON *fwd = cJSON_GetObjectItemCaseSensitive(j, "forward");
    const cJSON *m = cJSON_GetObjectItemCaseSensitive(j, "matches");
    out->kept_fraction = sinew__json_num(check, "kept_fraction");
    out->kept = sinew__json_num(check, "kept");
    out->pixels = sinew__json_num(check, "pixels");
    out->forward_mean_px = sinew__json_num(fwd, "mean_length_px");
    out->match_rows = sinew__json_num(m, "rows");
    out->lifted = cJSON_IsTrue(cJSON_GetObjectItemCaseSensitive(m, "lifted"));
    out->epe = sinew__json_num(j, "epe");
    out->occlusion_f1 = sinew__json_num(j, "occlusion_f1");
    out->match_3d_mm =
        sinew__json_num(cJSON_GetObjectItemCaseSensitive(j, "truth"), "match_3d_error_mm_median");
    const cJSON *pc = cJSON_GetObjectItemCaseSensitive(j, "pose_check");
    out->pose_dt_mm = 1000 * sinew__json_num(pc, "translation_error_m");
    out->pose_deg = sinew__json_num(pc, "rotation_error_deg");
    cJSON_Delete(j);
    return SINEW_OK;
}

int sinew_run_pipeline_options(sinew_ctx *ctx, char *buf, size_t n,
                               const sinew_run_pipeline_params *p)
{
    if (!ctx || !p || !buf || !p->preset)
        return SINEW_EINVAL;
    const char *fmt = sinew_flow_format_name(p->flow_format);
    if (!fmt)
        return sinew__fail(ctx, SINEW_ECONFIG, "unknown flow format %d", p->flow_format);
    sinew_flow_params fp;
    if (sinew_flow_params_preset(&fp, p->preset))
        return sinew__fail(ctx, SINEW_ECONFIG, "unknown flow preset '%s'", p->preset);
    /* %.17g round-trips a double, so equal text means equal options */
    int w = snprintf(buf, n,
                     "{\"flow_preset\":\"%s\",\"flow_format\":\"%s\",\"check\":\"default\","
                     "\"matches\":%s,\"match_stride\":%d,\"depth_scale\":%.17g,"
                     "\"depth_kind\":\"%s\"}",
                     p->preset, fmt, p->matches ? "true" : "false", p->match_stride, p->depth_scale,
                     p->depth_ray ? "ray" : "z");
    if (w > 0 && (size_t)w < n && p->ignore_polarity) {
        /* only when set, so the keys of runs without ignore masks stay as they were */
        int w2 = snprintf(buf + w - 1, n - (size_t)(w - 1), ",\"ignore_polarity\":\"%s\"}",
                          p->ignore_polarity == SINEW_IGNORE_ZERO ? "zero" : "nonzero");
        w = w2 < 0 ? w2 : w - 1 + w2;
    }
    if (w > 0 && (size_t)w < n && p->camera) {
        const sinew_camera *c = p->camera;
        /* replace the closing brace with the camera values */
        int w2 = snprintf(buf + w - 1, n - (size_t)(w - 1),
                          ",\"camera\":[%.17g,%.17g,%.17g,%.17g,%d,%d,%.17g,%.17g,%.17g,%.17g,"
                          "%.17g]}",
                          c->fx, c->fy, c->cx, c->cy, c->width, c->height, c->k1, c->k2, c->p1,
                          c->p2, c->k3);
        w = w2 < 0 ? w2 : w - 1 + w2;
    }
    if (w > 0 && (size_t)w < n && p->tuning.set) {
        /* only when set, so the keys of runs with default stages stay as they were */
        char t[1024];
        int rc = sinew_run_tuning_text(ctx, t, sizeof t, &p->tuning);
        if (rc)
            return rc;
        int w2 = snprintf(buf + w - 1, n - (size_t)(w - 1), ",\"tuning\":%s}", t);
        w = w2 < 0 ? w2 : w - 1 + w2;
    }
    if (w < 0 || (size_t)w >= n)
        return sinew__fail(ctx, SINEW_ELIMIT, "options text too long");
    return SINEW_OK;
}

int sinew_run_pipeline_check(sinew_ctx *ctx, const sinew_run_spec *spec,
                             const sinew_run_pipeline_params *p)
{
    if (!ctx || !spec || !p || !p->preset)
        return SINEW_EINVAL;
    if (!sinew_flow_format_ext(p->flow_format))
        return sinew__fail(ctx, SINEW_ECONFIG, "unknown flow format %d", p->flow_format);
    if (!(p->depth_scale > 0) || !isfinite(p->depth_scale) || p->match_stride < 0)
        return sinew__fail(ctx, SINEW_ECONFIG, "depth scale must be > 0 and match stride >= 0");
    sinew_flow_params fp;
    int rc = sinew_flow_params_preset(&fp, p->preset);
    if (rc)
        return sinew__fail(ctx, SINEW_ECONFIG, "unknown flow preset '%s'", p->preset);
    if (p->ignore_polarity != SINEW_IGNORE_UNSET && p->ignore_polarity != SINEW_IGNORE_NONZERO &&
        p->ignore_polarity != SINEW_IGNORE_ZERO)
        return sinew__fail(ctx, SINEW_ECONFIG, "unknown ignore polarity %d", p->ignore_polarity);
    for (size_t f = 0; !p->ignore_polarity && f < spec->nframes; f++)
        if (spec->frames[f].ignore)
            return sinew__fail(ctx, SINEW_ECONFIG,
                               "%s: an ignore mask needs its polarity (--ignore-polarity "
                               "nonzero|zero, or \"ignore_polarity\" in sequence.json)",
                               spec->frames[f].ignore);
    for (int k = 0; k < SINEW_RUN_NTUNE; k++)
        if ((p->tuning.set & (1u << k)) && sinew_run_tune_valid(k, p->tuning.value[k]))
            return sinew__fail(ctx, SINEW_ECONFIG, "%s: expected %s, got %.17g",
                               sinew_run_tune_name(k), sinew_run_tune_range(k), p->tuning.value[k]);
    if (p->tuning.set & (1u << SINEW_TUNE_WORLD_FRAME)) {
        if (!p->camera && !spec->intrinsics)
            return sinew__fail(ctx, SINEW_ECONFIG,
                               "world-frame: the matches are not lifted (no intrinsics)");
        for (size_t f = 0; f < spec->nframes; f++)
            if (!spec->frames[f].has_pose || !spec->frames[f].depth)
                return sinew__fail(ctx, SINEW_ECONFIG,
                                   "world-frame: frame %zu (%s) has no %s; every frame needs a "
                                   "depth map and a pose (sequence.json frames[].pose)",
                                   f, spec->frames[f].color,
                                   spec->frames[f].has_pose ? "depth map" : "pose");
    }
    {
        sinew_depth_params dp;
        sinew_depth_params_default(&dp);
        sinew__run_tuning_depth(&p->tuning, &dp);
        if (!(dp.near < dp.far))
            return sinew__fail(ctx, SINEW_ECONFIG, "near (%g m) must be below far (%g m)", dp.near,
                               dp.far);
    }
    return SINEW_OK;
}

int sinew_run_pipeline_new(sinew_ctx *ctx, sinew_run_pipeline **out, const sinew_run_spec *spec,
                           const sinew_run_pipeline_params *p)
{
    if (!ctx || !out || !spec || !p || !p->preset)
        return SINEW_EINVAL;
    *out = NULL;
    int rc = sinew_run_pipeline_check(ctx, spec, p);
    if (rc)
        return rc;
    sinew_flow_params fp;
    sinew_flow_params_preset(&fp, p->preset);
    sinew_run_pipeline *pl = sinew__calloc(ctx, 1, sizeof *pl);
    if (!pl)
        return SINEW_ENOMEM;
    pl->ctx = ctx;
    pl->spec = spec;
    pl->params = *p;
    pl->slot[0].index = pl->slot[1].index = -1;
    sinew_depth_params_default(&pl->depth);
    pl->depth.scale = p->depth_scale;
    if (p->depth_ray)
        pl->depth.kind = SINEW_DEPTH_RAY;
    sinew__run_tuning_depth(&p->tuning, &pl->depth);
    if (p->camera) {
        if ((rc = sinew_camera_check(ctx, p->camera, "intrinsics"))) {
            sinew__free(ctx, pl);
            return rc;
        }
        pl->cam_file = *p->camera;
        pl->have_camera = 1;
    } else if (spec->intrinsics) {
        if ((rc = sinew_camera_load(ctx, &pl->cam_file, spec->intrinsics))) {
            sinew__free(ctx, pl);
            return rc;
        }
        pl->have_camera = 1;
    }
    if (!spec->flow_from && (rc = sinew_estimator_new(ctx, &pl->est, &fp))) {
        sinew__free(ctx, pl);
        return rc;
    }
    *out = pl;
    return SINEW_OK;
}

static void slot_clear(frame_slot *s)
{
    sinew_image_free(&s->img);
    sinew_image_free(&s->z);
    sinew_image_free(&s->labels);
    sinew_image_free(&s->ignore);
    s->index = -1;
    s->z_median = NAN;
}

void sinew_run_pipeline_free(sinew_run_pipeline *pl)
{
    if (!pl)
        return;
    sinew_estimator_free(pl->est);
    for (int k = 0; k < 2; k++)
        slot_clear(&pl->slot[k]);
    sinew_image_free(&pl->fwd);
    sinew_image_free(&pl->bwd);
    sinew_image_free(&pl->mask);
    sinew_image_free(&pl->conf);
    sinew_image_free(&pl->fberr);
    sinew__free(pl->ctx, pl);
}

/* SINEW_OK when img has the frames' size, else ESIZE naming path and both sizes. */
static int frame_sized(const sinew_run_pipeline *pl, const sinew_image *img, const char *path,
                       const char *what)
{
    if (img->width == pl->width && img->height == pl->height)
        return SINEW_OK;
    return sinew__fail(pl->ctx, SINEW_ESIZE, "%s: %s %dx%d but the frames are %dx%d", path, what,
                       img->width, img->height, pl->width, pl->height);
}

/* Depth (metres), labels and ignore mask of frame f into slot s; sizes must match the
 * frames. */
static int load_extras(sinew_run_pipeline *pl, frame_slot *s, int32_t f)
{
    const sinew_run_frame *fr = &pl->spec->frames[f];
    int rc;
    if (fr->depth) {
        sinew_image raw;
        if ((rc = sinew_depth_read(pl->ctx, &raw, fr->depth)))
            return rc;
        if (raw.width != pl->width || raw.height != pl->height) {
            int w = raw.width, h = raw.height;
            sinew_image_free(&raw);
            return sinew__fail(pl->ctx, SINEW_ESIZE, "%s: depth is %dx%d but the frames are %dx%d",
                               fr->depth, w, h, pl->width, pl->height);
        }
        rc = sinew_depth_convert(pl->ctx, &s->z, NULL, &raw, pl->have_camera ? &pl->cam : NULL,
                                 &pl->depth, fr->depth);
        sinew_image_free(&raw);
        if (rc || (rc = sinew_depth_median(pl->ctx, &s->z_median, NULL, &s->z)))
            return rc;
    }
    if (fr->labels && ((rc = sinew_labels_read(pl->ctx, &s->labels, fr->labels)) ||
                       (rc = frame_sized(pl, &s->labels, fr->labels, "labels are"))))
        return rc;
    if (fr->ignore && ((rc = sinew_image_read(pl->ctx, &s->ignore, fr->ignore)) ||
                       (rc = frame_sized(pl, &s->ignore, fr->ignore, "ignore mask is"))))
        return rc;
    return SINEW_OK;
}

/* Frame f decoded, reusing a slot; `keep` is a frame that must not be evicted. */
static int get_frame(sinew_run_pipeline *pl, int32_t f, int32_t keep, const frame_slot **out)
{
    for (int k = 0; k < 2; k++)
        if (pl->slot[k].index == f) {
            *out = &pl->slot[k];
            return SINEW_OK;
        }
    int k = pl->slot[0].index == keep ? 1 : 0;
    frame_slot *s = &pl->slot[k];
    slot_clear(s);
    const char *path = pl->spec->frames[f].color;
    int rc = sinew_image_read(pl->ctx, &s->img, path);
    if (rc)
        return rc;
    if (pl->width == 0) {
        if (pl->have_camera &&
            (rc = sinew_camera_fit(pl->ctx, &pl->cam, &pl->cam_file, s->img.width, s->img.height,
                                   pl->spec->intrinsics ? pl->spec->intrinsics : "intrinsics"))) {
            slot_clear(s);
            return rc;
        }
        pl->width = s->img.width;
        pl->height = s->img.height;
    } else if (s->img.width != pl->width || s->img.height != pl->height) {
        int w = s->img.width, h = s->img.height;
        slot_clear(s);
        return sinew__fail(pl->ctx, SINEW_ESIZE, "%s: %dx%d differs from the sequence's %dx%d",
                           path, w, h, pl->width, pl->height);
    }
    if ((rc = load_extras(pl, s, f))) {
        slot_clear(s);
        return rc;
    }
    s->index = f;
    *out = s;
    return SINEW_OK;
}

/* (Re)allocate a work image when the size changed. */
static int ensure(sinew_ctx *ctx, sinew_image *img, int w, int h, int c, sinew_type t)
{
    if (img->data && img->width == w && img->height == h && img->channels == c && img->type == t)
        return SINEW_OK;
    sinew_image_free(img);
    return sinew_image_alloc(ctx, img, w, h, c, t);
}

static int import_flow(sinew_run_pipeline *pl, sinew_image *dst, const char *path)
{
    sinew_image tmp;
    int rc = sinew_flow_read(pl->ctx, &tmp, path, SINEW_FLOW_AUTO);
    if (rc)
        return rc;
    if (tmp.width != pl->width || tmp.height != pl->height) {
        int w = tmp.width, h = tmp.height;
        sinew_image_free(&tmp);
        return sinew__fail(pl->ctx, SINEW_ESIZE, "%s: flow is %dx%d but the frames are %dx%d", path,
                           w, h, pl->width, pl->height);
    }
    sinew_image_free(dst);
    *dst = tmp;
    return SINEW_OK;
}

/* Unknown count, mean and largest length of the known vectors (serial double sum). */
static void flow_stats(const sinew_image *f, int64_t *unknown, double *mean, double *max)
{
    double sum = 0, mx = 0;
    int64_t known = 0, unk = 0;
    for (int y = 0; y < f->height; y++) {
        const float *r = sinew_image_row_f32(f, y);
        for (int x = 0; x < f->width; x++) {
            float u = r[2 * x], v = r[2 * x + 1];
            if (isfinite(u) && isfinite(v)) {
                double len = sqrt((double)u * u + (double)v * v);
                sum += len;
                mx = len > mx ? len : mx;
                known++;
            } else {
                unk++;
            }
        }
    }
    *unknown = unk;
    *mean = known ? sum / (double)known : NAN; /* no known vector: no mean (JSON null) */
    *max = mx;
}

/* Mean of the finite values of a 1-channel float map (serial double sum). */
static double finite_mean(const sinew_image *img)
{
    double sum = 0;
    int64_t n = 0;
    for (int y = 0; y < img->height; y++) {
        const float *r = sinew_image_row_f32(img, y);
        for (int x = 0; x < img->width; x++)
            if (isfinite(r[x])) {
                sum += r[x];
                n++;
            }
    }
    return n ? sum / (double)n : NAN;
}

/* "sources": the two frames' input files and capture times as the run found them
 * ({"color": [A, B], "depth": [A, B] | null, "labels": ..., "timestamps": [tA, tB] |
 * null}), so a pair folder says which frames it is made of. */
static void add_sources(cJSON *o, const sinew_run_frame *a, const sinew_run_frame *b)
{
    cJSON *src = cJSON_AddObjectToObject(o, "sources");
    if (!src)
        return;
    const char *const key[3] = {"color", "depth", "labels"};
    const char *const pa[3] = {a->color, a->depth, a->labels};
    const char *const pb[3] = {b->color, b->depth, b->labels};
    for (int k = 0; k < 3; k++) {
        if (!pa[k] || !pb[k]) {
            cJSON_AddNullToObject(src, key[k]);
            continue;
        }
        cJSON *l = cJSON_AddArrayToObject(src, key[k]);
        cJSON_AddItemToArray(l, cJSON_CreateString(pa[k]));
        cJSON_AddItemToArray(l, cJSON_CreateString(pb[k]));
    }
    if (a->has_timestamp && b->has_timestamp) {
        cJSON *t = cJSON_AddArrayToObject(src, "timestamps");
        cJSON_AddItemToArray(t, cJSON_CreateNumber(a->timestamp));
        cJSON_AddItemToArray(t, cJSON_CreateNumber(b->timestamp));
    } else {
        cJSON_AddNullToObject(src, "timestamps");
    }
}

/* A pair kept by the check on fewer than this share of its pixels gets a warning: the
 * flow is then mostly unreliable (our choice; the demo scene keeps over 90 %). */
#define FEW_KEPT_FRACTION 0.10

/* Warnings about the pair's intrinsics and its check result (docs/formats.md stats.json),
 * appended to warn; `sinew run` prints them as they arise. */
static void pair_warnings(const sinew_run_pipeline *pl, cJSON *warn, const sinew_check_stats *cs,
                          const sinew_matches *m, const frame_slot *s0, const frame_slot *s1)
{
    char msg[800], why[600];
    const char *k = pl->spec->intrinsics ? pl->spec->intrinsics : "intrinsics";
    if (!warn)
        return;
    if (pl->have_camera &&
        sinew_camera_centre_check(&pl->cam, pl->width, pl->height, why, sizeof why)) {
        snprintf(msg, sizeof msg, "%s: %s", k, why);
        cJSON_AddItemToArray(warn, cJSON_CreateString(msg));
    }
    if (!pl->have_camera && s0->z.data && s1->z.data)
        cJSON_AddItemToArray(warn, cJSON_CreateString("the frames have depth maps but there are "
                                                      "no intrinsics: matches are not lifted to "
                                                      "3-D (docs/formats.md, sequence inputs)"));
    double kept = cs->pixels ? (double)cs->kept / (double)cs->pixels : 0.0;
    if (cs->pixels && kept < FEW_KEPT_FRACTION) {
        snprintf(msg, sizeof msg,
                 "the check kept %.1f%% of the pixels (under %.0f%%): this pair's flow is "
                 "mostly unreliable",
                 100 * kept, 100 * FEW_KEPT_FRACTION);
        cJSON_AddItemToArray(warn, cJSON_CreateString(msg));
    } else if (m && m->rows == 0) {
        cJSON_AddItemToArray(warn, cJSON_CreateString("no matches were kept"));
    }
}

/* stats.json of a pair; the keys of `extra` (made while writing the matches) move
 * into it. */
static char *stats_text(sinew_run_pipeline *pl, const sinew_run_job *job,
                        const sinew_check_stats *cs, const sinew_matches *m, const frame_slot *s0,
                        const frame_slot *s1, cJSON *extra)
{
    cJSON *o = cJSON_CreateObject();
    if (!o)
        return NULL;
    for (cJSON *e; extra && (e = extra->child);)
        cJSON_AddItemToObject(o, e->string, cJSON_DetachItemViaPointer(extra, e));
    /* summary numbers at the top level (read by the run report, docs/formats.md) */
    cJSON_AddNumberToObject(o, "kept_fraction",
                            cs->pixels ? (double)cs->kept / (double)cs->pixels : 0.0);
    sinew_json_add_number(o, "mean_confidence", finite_mean(&pl->conf));
    sinew_json_add_number(o, "fb_error_mean", finite_mean(&pl->fberr));
    cJSON *warn = cJSON_AddArrayToObject(o, "warnings");
    const frame_slot *sl[2] = {s0, s1};
    const int32_t fi[2] = {job->pair.i, job->pair.j};
    for (int k = 0; warn && k < 2; k++) {
        double med = sl[k]->z_median;
        if (sl[k]->z.data && isfinite(med) &&
            (med < SINEW_DEPTH_PLAUSIBLE_MIN || med > SINEW_DEPTH_PLAUSIBLE_MAX)) {
            char msg[600];
            snprintf(msg, sizeof msg,
                     "%s: median depth %.3g m is outside %.2g-%.0f m; is the depth scale (%g "
                     "codes per metre) right?",
                     pl->spec->frames[fi[k]].depth, med, SINEW_DEPTH_PLAUSIBLE_MIN,
                     SINEW_DEPTH_PLAUSIBLE_MAX, pl->depth.scale);
            cJSON_AddItemToArray(warn, cJSON_CreateString(msg));
        }
    }
    pair_warnings(pl, warn, cs, m, s0, s1);
    if (warn && sinew__run_truth_scores(pl->ctx, pl->params.truth, job->pair, &pl->fwd, &pl->mask,
                                        m, o, warn) != SINEW_OK) {
        cJSON_Delete(o);
        return NULL;
    }
    cJSON_AddStringToObject(o, "pair", job->name);
    cJSON *fr = cJSON_AddArrayToObject(o, "frames");
    if (fr) {
        cJSON_AddItemToArray(fr, cJSON_CreateNumber(job->pair.i));
        cJSON_AddItemToArray(fr, cJSON_CreateNumber(job->pair.j));
    }
    add_sources(o, &pl->spec->frames[job->pair.i], &pl->spec->frames[job->pair.j]);
    cJSON_AddNumberToObject(o, "width", pl->width);
    cJSON_AddNumberToObject(o, "height", pl->height);
    cJSON_AddStringToObject(o, "flow_source", pl->est ? "estimated" : "imported");
    const sinew_image *fl[2] = {&pl->fwd, &pl->bwd};
    const char *nm[2] = {"forward", "backward"};
    for (int k = 0; k < 2; k++) {
        int64_t unk;
        double mean, mx;
        flow_stats(fl[k], &unk, &mean, &mx);
        if (k == 0)
            cJSON_AddNumberToObject(o, "flow_max", mx); /* read by the run report */
        cJSON *d = cJSON_AddObjectToObject(o, nm[k]);
        if (d) {
            cJSON_AddNumberToObject(d, "unknown", (double)unk);
            if (isfinite(mean))
                cJSON_AddNumberToObject(d, "mean_length_px", mean);
            else
                cJSON_AddNullToObject(d, "mean_length_px");
        }
    }
    cJSON *c = cJSON_AddObjectToObject(o, "check");
    if (c) {
        cJSON_AddNumberToObject(c, "pixels", (double)cs->pixels);
        cJSON_AddNumberToObject(c, "kept", (double)cs->kept);
        cJSON_AddNumberToObject(c, "kept_fraction",
                                cs->pixels ? (double)cs->kept / (double)cs->pixels : 0.0);
        cJSON *r = cJSON_AddObjectToObject(c, "reasons");
        for (int b = 0; r && b < SINEW_MASK_NBITS; b++)
            cJSON_AddNumberToObject(r, sinew_check_bit_name(b), (double)cs->reason[b]);
        cJSON_AddNumberToObject(c, "gain", cs->gain);
        cJSON_AddNumberToObject(c, "offset", cs->offset);
    }
    if (m) {
        cJSON *mo = cJSON_AddObjectToObject(o, "matches");
        if (mo) {
            cJSON_AddNumberToObject(mo, "rows", (double)m->rows);
            cJSON_AddNumberToObject(mo, "columns", m->cols);
            cJSON_AddBoolToObject(mo, "lifted", m->has_depth);
            cJSON *r = cJSON_AddObjectToObject(mo, "rejected");
            for (int k = 0; r && k < SINEW_REJECT_COUNT; k++)
                cJSON_AddNumberToObject(r, sinew_reject_name(k), (double)m->rejected[k]);
        }
    }
    char *t = cJSON_PrintUnformatted(o);
    cJSON_Delete(o);
    if (!t)
        return NULL;
    size_t n = strlen(t);
    char *out = sinew_ctx_alloc(pl->ctx, n + 1);
    if (out)
        memcpy(out, t, n + 1);
    cJSON_free(t);
    return out;
}

/* matches.npy + matches.json: 2-D rows, lifted when both frames have depth and
 * intrinsics are known, labels when both frames have them. */
static int write_matches(sinew_run_pipeline *pl, const sinew_run_job *job, const frame_slot *s0,
                         const frame_slot *s1, sinew_matches *m, cJSON *extra)
{
    sinew_ctx *ctx = pl->ctx;
    sinew_match_params mp;
    sinew_match_params_default(&mp);
    if (pl->params.match_stride > 0) {
        mp.sampling = SINEW_SAMPLE_STRIDE;
        mp.stride = pl->params.match_stride;
    }
    sinew__run_tuning_match(&pl->params.tuning, &mp);
    const sinew_run_frame *fr0 = &pl->spec->frames[job->pair.i];
    const sinew_run_frame *fr1 = &pl->spec->frames[job->pair.j];
    int lift = pl->have_camera && s0->z.data && s1->z.data;
    int labels = s0->labels.data && s1->labels.data;
    char fwd_name[32];
    snprintf(fwd_name, sizeof fwd_name, SINEW_RUN_FORWARD ".%s",
             sinew_flow_format_ext(pl->params.flow_format));
    sinew_match_inputs in = {&pl->fwd,
                             &pl->mask,
                             &pl->conf,
                             labels ? &s0->labels : NULL,
                             labels ? &s1->labels : NULL,
                             lift ? &s0->z : NULL,
                             lift ? &s1->z : NULL,
                             lift ? &pl->cam : NULL,
                             fwd_name,
                             SINEW_RUN_MASK_FILE,
                             SINEW_RUN_CONFIDENCE_FILE,
                             labels ? fr0->labels : NULL,
                             labels ? fr1->labels : NULL,
                             lift ? fr0->depth : NULL,
                             lift ? fr1->depth : NULL};
    int rc = sinew_matches_build(ctx, m, &in, &mp);
    if (rc)
        return rc;
    /* the pose check sees the points in their cameras, before any change of frame */
    int world = (pl->params.tuning.set & (1u << SINEW_TUNE_WORLD_FRAME)) && m->has_depth;
    if (fr0->has_pose && fr1->has_pose &&
        (rc = sinew__run_pose_check(ctx, extra, m, fr0->pose, fr1->pose)))
        return rc;
    if (world)
        sinew__run_to_world(m, fr0->pose, fr1->pose);
    sinew_match_sources src = {"sinew run",
                               ".",
                               pl->have_camera ? pl->spec->intrinsics : NULL,
                               pl->have_camera ? &pl->cam : NULL,
                               pl->have_camera ? &pl->cam_file : NULL,
                               lift ? &pl->depth : NULL,
                               {lift ? s0->z_median : NAN, lift ? s1->z_median : NAN},
                               world};
    char p[SINEW__PATH_MAX];
    if ((rc = sinew__path_join(ctx, p, sizeof p, job->dir, SINEW_RUN_MATCHES_FILE)) ||
        (rc = sinew_matches_save(ctx, p, m, &mp, &in, &src)))
        return rc;
    return SINEW_OK;
}

int sinew_run_pipeline_pair(void *pipeline, sinew_ctx *ctx, const sinew_run_job *job, char **stats)
{
    sinew_run_pipeline *pl = pipeline;
    if (!pl || !job || !stats || ctx != pl->ctx)
        return SINEW_EINVAL;
    *stats = NULL;
    const frame_slot *s0, *s1;
    int rc;
    if ((rc = get_frame(pl, job->pair.i, job->pair.j, &s0)) ||
        (rc = get_frame(pl, job->pair.j, job->pair.i, &s1)))
        return rc;
    const sinew_image *f0 = &s0->img, *f1 = &s1->img;
    int w = pl->width, h = pl->height;
    if (pl->est && (f0->type != f1->type || f0->channels != f1->channels))
        return sinew__fail(
            ctx, SINEW_EINVAL, "%s: %d-channel %d-bit frame, but %s is %d-channel %d-bit",
            pl->spec->frames[job->pair.j].color, f1->channels, (int)sinew_type_size(f1->type) * 8,
            pl->spec->frames[job->pair.i].color, f0->channels, (int)sinew_type_size(f0->type) * 8);
    if (pl->est) {
        if ((rc = ensure(ctx, &pl->fwd, w, h, 2, SINEW_F32)) ||
            (rc = ensure(ctx, &pl->bwd, w, h, 2, SINEW_F32)) ||
            (rc = sinew_estimator_run(pl->est, &pl->fwd, &pl->bwd, f0, f1)))
            return rc;
    } else if ((rc = import_flow(pl, &pl->fwd, job->flow_fwd)) ||
               (rc = import_flow(pl, &pl->bwd, job->flow_bwd))) {
        return rc;
    }
    if ((rc = ensure(ctx, &pl->mask, w, h, 1, SINEW_U8)) ||
        (rc = ensure(ctx, &pl->conf, w, h, 1, SINEW_F32)) ||
        (rc = ensure(ctx, &pl->fberr, w, h, 1, SINEW_F32)))
        return rc;
    /* frame 0's depth, when it has one, decides who loses a target (z-buffer) */
    sinew_check_input in = {&pl->fwd, &pl->bwd, f0, f1, NULL, s0->z.data ? &s0->z : NULL};
    sinew_check_output out = {&pl->fberr, &pl->mask, &pl->conf, {0}, NULL};
    sinew_check_params cp;
    sinew_check_params_default(&cp);
    sinew__run_tuning_check(&pl->params.tuning, &cp);
    if (s0->ignore.data) { /* the forward check rejects frame i's ignored pixels */
        in.ignore = &s0->ignore;
        cp.ignore_polarity = (sinew_ignore_polarity)pl->params.ignore_polarity;
    }
    if ((rc = sinew_check_run(ctx, &out, &in, &cp)))
        return rc;
    const char *ext = sinew_flow_format_ext(pl->params.flow_format);
    char p[SINEW__PATH_MAX], name[32];
    snprintf(name, sizeof name, SINEW_RUN_FORWARD ".%s", ext);
    if ((rc = sinew__path_join(ctx, p, sizeof p, job->dir, name)) ||
        (rc = sinew_flow_write(ctx, p, &pl->fwd, (sinew_flow_format)pl->params.flow_format)))
        return rc;
    snprintf(name, sizeof name, SINEW_RUN_BACKWARD ".%s", ext);
    if ((rc = sinew__path_join(ctx, p, sizeof p, job->dir, name)) ||
        (rc = sinew_flow_write(ctx, p, &pl->bwd, (sinew_flow_format)pl->params.flow_format)))
        return rc;
    if ((rc = sinew__path_join(ctx, p, sizeof p, job->dir, SINEW_RUN_MASK_FILE)) ||
        (rc = sinew_image_write_png(ctx, p, &pl->mask)))
        return rc;
    if ((rc = sinew__path_join(ctx, p, sizeof p, job->dir, SINEW_RUN_CONFIDENCE_FILE)) ||
        (rc = sinew_npy_write_image(ctx, p, &pl->conf, 0)))
        return rc;
    sinew_matches m;
    memset(&m, 0, sizeof m);
    cJSON *extra = cJSON_CreateObject();
    if (!extra)
        return sinew__fail(ctx, SINEW_ENOMEM, "%s: out of memory writing stats", job->name);
    if (pl->params.matches && (rc = write_matches(pl, job, s0, s1, &m, extra))) {
        cJSON_Delete(extra);
        sinew_matches_free(ctx, &m);
        return rc;
    }
    *stats = stats_text(pl, job, &out.stats, pl->params.matches ? &m : NULL, s0, s1, extra);
    cJSON_Delete(extra);
    sinew_matches_free(ctx, &m);
    if (!*stats)
        return sinew__fail(ctx, SINEW_ENOMEM, "%s: out of memory writing stats", job->name);
    return SINEW_OK;
}

size_t sinew_run_pipeline_outputs(const sinew_run_pipeline_params *p,
                                  const char *names[SINEW_RUN_PIPELINE_MAX_OUTPUTS])
{
    static const char *const fwd[] = {SINEW_RUN_FORWARD ".flo", SINEW_RUN_FORWARD ".npy",
                                      SINEW_RUN_FORWARD ".pfm", SINEW_RUN_FORWARD ".png"};
    static const char *const bwd[] = {SINEW_RUN_BACKWARD ".flo", SINEW_RUN_BACKWARD ".npy",
                                      SINEW_RUN_BACKWARD ".pfm", SINEW_RUN_BACKWARD ".png"};
    static const char *const ext[] = {"flo", "npy", "pfm", "png"};
    const char *e = p ? sinew_flow_format_ext(p->flow_format) : NULL;
    size_t n = 0;
    for (size_t k = 0; e && k < 4; k++)
        if (!strcmp(e, ext[k])) {
            names[n++] = fwd[k];
            names[n++] = bwd[k];
        }
    names[n++] = SINEW_RUN_MASK_FILE;
    names[n++] = SINEW_RUN_CONFIDENCE_FILE;
    if (p && p->matches) {
        names[n++] = SINEW_RUN_MATCHES_FILE;
        names[n++] = SINEW_RUN_MATCHES_SIDECAR;
    }
    return n;
}
