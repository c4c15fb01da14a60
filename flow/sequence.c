/* SPDX-License-Identifier: MIT */
/* sequence.json reader and writer (schema in flow/sequence.h and docs/formats.md).
 *
 * The reader walks the cJSON tree with one small checker per value kind; each knows the
 * dotted key path ("frames[3].depth") so every message names the offending key. Every
 * object is checked for unknown and duplicate keys before its fields are read. The
 * same validation runs before writing, so whatever the writer emits the reader takes.
 * cJSON allocates with its own (malloc) hooks; we never change them because they are
 * process-wide. Everything the sequence keeps is allocated through the context. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "flow/internal/base.h"
#include "flow/internal/json.h"
#include "flow/io.h"
#include "flow/sequence.h"

#define MAX_JSON_BYTES ((size_t)256 << 20)
#define MAX_IMAGE_DIM (1 << 20)

/* ---- memory ---- */

/* Copy an optional string into *dst (freeing the old one). */
static int set_str(sinew_ctx *ctx, char **dst, const char *s)
{
    char *d = NULL;
    if (s && !(d = sinew__strdup(ctx, s)))
        return SINEW_ENOMEM;
    sinew__free(ctx, *dst);
    *dst = d;
    return SINEW_OK;
}

void sinew_sequence_frame_init(sinew_seq_frame *f)
{
    if (!f)
        return;
    memset(f, 0, sizeof *f);
    f->timestamp = NAN;
}

static void frame_release(sinew_ctx *ctx, sinew_seq_frame *f)
{
    sinew__free(ctx, f->color);
    sinew__free(ctx, f->depth);
    sinew__free(ctx, f->labels);
    sinew__free(ctx, f->ignore);
    sinew__free(ctx, f->right);
}

static void pair_release(sinew_ctx *ctx, sinew_seq_pair *p)
{
    sinew__free(ctx, p->flow_forward);
    sinew__free(ctx, p->flow_backward);
    sinew__free(ctx, p->occlusion_forward);
    sinew__free(ctx, p->occlusion_backward);
    sinew__free(ctx, p->scene_flow);
}

int sinew_sequence_new(sinew_ctx *ctx, sinew_sequence **out)
{
    if (!ctx || !out)
        return SINEW_EINVAL;
    *out = NULL;
    sinew_sequence *seq = sinew__calloc(ctx, 1, sizeof *seq);
    if (!seq)
        return SINEW_ENOMEM;
    seq->version = SINEW_SEQUENCE_VERSION;
    seq->ctx_ = ctx;
    *out = seq;
    return SINEW_OK;
}

void sinew_sequence_free(sinew_sequence *seq)
{
    if (!seq)
        return;
    sinew_ctx *ctx = seq->ctx_;
    for (size_t i = 0; i < seq->n_frames; i++)
        frame_release(ctx, &seq->frames[i]);
    for (size_t i = 0; i < seq->n_pairs; i++)
        pair_release(ctx, &seq->pairs[i]);
    for (size_t i = 0; i < seq->n_label_names; i++)
        sinew__free(ctx, seq->label_names[i]);
    sinew__free(ctx, seq->label_names);
    sinew__free(ctx, seq->run.pairs);
    sinew__free(ctx, seq->run.preset);
    sinew__free(ctx, seq->run.flow_format);
    sinew__free(ctx, seq->frames);
    sinew__free(ctx, seq->pairs);
    sinew__free(ctx, seq->name);
    sinew__free(ctx, seq->stereo_calib);
    sinew__free(ctx, seq->dir_);
    sinew__free(ctx, seq);
}

int sinew_sequence_set_name(sinew_sequence *seq, const char *name)
{
    if (!seq)
        return SINEW_EINVAL;
    return set_str(seq->ctx_, &seq->name, name);
}

int sinew_sequence_set_stereo_calib(sinew_sequence *seq, const char *path)
{
    if (!seq)
        return SINEW_EINVAL;
    return set_str(seq->ctx_, &seq->stereo_calib, path);
}

int sinew_sequence_set_label_names(sinew_sequence *seq, const char *const *names, size_t n)
{
    if (!seq || (n && !names))
        return SINEW_EINVAL;
    sinew_ctx *ctx = seq->ctx_;
    char **arr = NULL;
    if (n) {
        arr = sinew__calloc(ctx, n, sizeof *arr);
        if (!arr)
            return SINEW_ENOMEM;
        for (size_t i = 0; i < n; i++) {
            if (!names[i] || !(arr[i] = sinew__strdup(ctx, names[i]))) {
                for (size_t j = 0; j < i; j++)
                    sinew__free(ctx, arr[j]);
                sinew__free(ctx, arr);
                return names[i] ? SINEW_ENOMEM
                                : sinew__fail(ctx, SINEW_EINVAL, "label name %zu is NULL", i);
            }
        }
    }
    for (size_t i = 0; i < seq->n_label_names; i++)
        sinew__free(ctx, seq->label_names[i]);
    sinew__free(ctx, seq->label_names);
    seq->label_names = arr;
    seq->n_label_names = n;
    return SINEW_OK;
}

/* Grow an array of `size`-byte elements to hold at least n + 1. */
static int grow(sinew_ctx *ctx, void **arr, size_t *cap, size_t n, size_t size)
{
    if (n < *cap)
        return SINEW_OK;
    size_t nc = *cap ? *cap * 2 : 16, bytes;
    if (sinew__mul_size(nc, size, &bytes))
        return sinew__fail(ctx, SINEW_EOVERFLOW, "sequence too long");
    void *p = sinew__alloc(ctx, bytes);
    if (!p)
        return SINEW_ENOMEM;
    if (n)
        memcpy(p, *arr, n * size);
    sinew__free(ctx, *arr);
    *arr = p;
    *cap = nc;
    return SINEW_OK;
}

int sinew_sequence_add_frame(sinew_sequence *seq, const sinew_seq_frame *frame)
{
    if (!seq || !frame)
        return SINEW_EINVAL;
    sinew_ctx *ctx = seq->ctx_;
    if (seq->n_frames >= SINEW_SEQUENCE_MAX_FRAMES)
        return sinew__fail(ctx, SINEW_ELIMIT, "sequence: more than %d frames",
                           SINEW_SEQUENCE_MAX_FRAMES);
    int st = grow(ctx, (void **)&seq->frames, &seq->cap_frames_, seq->n_frames, sizeof *frame);
    if (st)
        return st;
    sinew_seq_frame f = *frame;
    f.color = f.depth = f.labels = f.ignore = f.right = NULL;
    if (set_str(ctx, &f.color, frame->color) || set_str(ctx, &f.depth, frame->depth) ||
        set_str(ctx, &f.labels, frame->labels) || set_str(ctx, &f.ignore, frame->ignore) ||
        set_str(ctx, &f.right, frame->right)) {
        frame_release(ctx, &f);
        return SINEW_ENOMEM;
    }
    seq->frames[seq->n_frames++] = f;
    return SINEW_OK;
}

int sinew_sequence_add_pair(sinew_sequence *seq, const sinew_seq_pair *pair)
{
    if (!seq || !pair)
        return SINEW_EINVAL;
    sinew_ctx *ctx = seq->ctx_;
    if (seq->n_pairs >= SINEW_SEQUENCE_MAX_PAIRS)
        return sinew__fail(ctx, SINEW_ELIMIT, "sequence: more than %d pairs",
                           SINEW_SEQUENCE_MAX_PAIRS);
    int st = grow(ctx, (void **)&seq->pairs, &seq->cap_pairs_, seq->n_pairs, sizeof *pair);
    if (st)
        return st;
    sinew_seq_pair p = {pair->from, pair->to, NULL, NULL, NULL, NULL, NULL};
    if (set_str(ctx, &p.flow_forward, pair->flow_forward) ||
        set_str(ctx, &p.flow_backward, pair->flow_backward) ||
        set_str(ctx, &p.occlusion_forward, pair->occlusion_forward) ||
        set_str(ctx, &p.occlusion_backward, pair->occlusion_backward) ||
        set_str(ctx, &p.scene_flow, pair->scene_flow)) {
        pair_release(ctx, &p);
        return SINEW_ENOMEM;
    }
    seq->pairs[seq->n_pairs++] = p;
    return SINEW_OK;
}

/* ---- validation (shared by reader and writer) ---- */

static int bad_key(sinew_ctx *ctx, const char *where, const char *key, const char *problem)
{
    return sinew__fail(ctx, SINEW_ECONFIG, "%s: %s: %s", where, key, problem);
}

static int check_path(sinew_ctx *ctx, const char *where, const char *key, const char *s)
{
    if (s && !*s)
        return bad_key(ctx, where, key, "empty path");
    return SINEW_OK;
}

static const char *const schedule_kinds[] = {"consecutive", "gap", "keyframe", "list", NULL};

static int in_list(const char *s, const char *const *list)
{
    for (int k = 0; list[k]; k++)
        if (!strcmp(s, list[k]))
            return k;
    return -1;
}

/* The "run" settings: schedule parameters in range, list pairs inside the sequence. */
static int validate_run(sinew_ctx *ctx, const sinew_sequence *seq, const char *where)
{
    const sinew_seq_run *r = &seq->run;
    char key[96];
    if (r->has_schedule) {
        if (r->schedule_kind < 0 || r->schedule_kind > 3)
            return bad_key(ctx, where, "run.schedule.kind", "unknown schedule");
        if (r->schedule_kind == 1 && r->gap < 1)
            return bad_key(ctx, where, "run.schedule.gap", "must be at least 1");
        if (r->schedule_kind == 2 && r->every < 1)
            return bad_key(ctx, where, "run.schedule.every", "must be at least 1");
        if (r->schedule_kind == 2 && r->window < 1)
            return bad_key(ctx, where, "run.schedule.window", "must be at least 1");
        for (size_t i = 0; r->schedule_kind == 3 && i < r->n_pairs; i++) {
            int a = r->pairs[2 * i], b = r->pairs[2 * i + 1];
            snprintf(key, sizeof key, "run.schedule.pairs[%zu]", i);
            if (a < 0 || b < 0 || (size_t)a >= seq->n_frames || (size_t)b >= seq->n_frames ||
                a == b)
                return bad_key(ctx, where, key, "expected two different frame numbers");
        }
    }
    if (r->preset && !*r->preset)
        return bad_key(ctx, where, "run.preset", "empty string");
    int fmt;
    if (r->flow_format && sinew_flow_format_parse(r->flow_format, &fmt) != SINEW_OK)
        return bad_key(ctx, where, "run.flow_format", "expected flo, npy, npy16, pfm or png");
    if (r->has_match_stride && (r->match_stride < 0 || r->match_stride > MAX_IMAGE_DIM))
        return bad_key(ctx, where, "run.match_stride", "must be 0..1048576");
    return SINEW_OK;
}

int sinew_sequence_validate(sinew_sequence *seq, const char *where)
{
    if (!seq)
        return SINEW_EINVAL;
    sinew_ctx *ctx = seq->ctx_;
    char key[96];
    if (!where)
        where = "sequence";
    if (seq->version < 1 || seq->version > SINEW_SEQUENCE_VERSION)
        return bad_key(ctx, where, "version", "unsupported version");
    if (seq->has_intrinsics) {
        if (!(isfinite(seq->fx) && seq->fx > 0))
            return bad_key(ctx, where, "intrinsics.fx", "must be a positive number");
        if (!(isfinite(seq->fy) && seq->fy > 0))
            return bad_key(ctx, where, "intrinsics.fy", "must be a positive number");
        if (!isfinite(seq->cx))
            return bad_key(ctx, where, "intrinsics.cx", "must be a finite number");
        if (!isfinite(seq->cy))
            return bad_key(ctx, where, "intrinsics.cy", "must be a finite number");
        if (seq->width < 1 || seq->width > MAX_IMAGE_DIM)
            return bad_key(ctx, where, "intrinsics.width", "must be 1..1048576");
        if (seq->height < 1 || seq->height > MAX_IMAGE_DIM)
            return bad_key(ctx, where, "intrinsics.height", "must be 1..1048576");
    }
    if (!(isfinite(seq->depth_scale) && seq->depth_scale >= 0))
        return bad_key(ctx, where, "depth_scale", "must be a positive number");
    for (size_t i = 0; i < seq->n_label_names; i++)
        if (!seq->label_names[i]) {
            snprintf(key, sizeof key, "label_names[%zu]", i);
            return bad_key(ctx, where, key, "missing");
        }
    int pst = check_path(ctx, where, "stereo_calib", seq->stereo_calib);
    if (pst)
        return pst;
    if (seq->n_frames < 1)
        return bad_key(ctx, where, "frames", "must list at least one frame");
    if (seq->n_frames > SINEW_SEQUENCE_MAX_FRAMES)
        return bad_key(ctx, where, "frames", "more than 1000000 frames");
    int rst = validate_run(ctx, seq, where);
    if (rst)
        return rst;
    for (size_t i = 0; i < seq->n_frames; i++) {
        const sinew_seq_frame *f = &seq->frames[i];
        int st;
        snprintf(key, sizeof key, "frames[%zu].color", i);
        if (!f->color)
            return bad_key(ctx, where, key, "missing");
        if ((st = check_path(ctx, where, key, f->color)))
            return st;
        snprintf(key, sizeof key, "frames[%zu].depth", i);
        if ((st = check_path(ctx, where, key, f->depth)))
            return st;
        if (f->depth && seq->depth_scale <= 0)
            return bad_key(ctx, where, "depth_scale", "required (> 0) when frames have depth");
        snprintf(key, sizeof key, "frames[%zu].labels", i);
        if ((st = check_path(ctx, where, key, f->labels)))
            return st;
        snprintf(key, sizeof key, "frames[%zu].ignore", i);
        if ((st = check_path(ctx, where, key, f->ignore)))
            return st;
        snprintf(key, sizeof key, "frames[%zu].right", i);
        if ((st = check_path(ctx, where, key, f->right)))
            return st;
        if (f->ignore && seq->ignore_polarity != 1 && seq->ignore_polarity != 2)
            return bad_key(ctx, where, "ignore_polarity",
                           "required (\"nonzero\" or \"zero\") when frames have ignore masks");
        if (!isnan(f->timestamp) && !isfinite(f->timestamp)) {
            snprintf(key, sizeof key, "frames[%zu].timestamp", i);
            return bad_key(ctx, where, key, "must be a finite number");
        }
        if (f->has_pose)
            for (int k = 0; k < 12; k++)
                if (!isfinite(f->pose[k])) {
                    snprintf(key, sizeof key, "frames[%zu].pose", i);
                    return bad_key(ctx, where, key, "must hold 12 finite numbers");
                }
    }
    for (size_t i = 0; i < seq->n_pairs; i++) {
        const sinew_seq_pair *p = &seq->pairs[i];
        if (p->from < 0 || (size_t)p->from >= seq->n_frames) {
            snprintf(key, sizeof key, "pairs[%zu].from", i);
            return bad_key(ctx, where, key, "not a frame index");
        }
        if (p->to < 0 || (size_t)p->to >= seq->n_frames || p->to == p->from) {
            snprintf(key, sizeof key, "pairs[%zu].to", i);
            return bad_key(ctx, where, key, "not a frame index other than 'from'");
        }
        const char *names[5] = {"flow_forward", "flow_backward", "occlusion_forward",
                                "occlusion_backward", "scene_flow"};
        const char *vals[5] = {p->flow_forward, p->flow_backward, p->occlusion_forward,
                               p->occlusion_backward, p->scene_flow};
        for (int k = 0; k < 5; k++) {
            snprintf(key, sizeof key, "pairs[%zu].%s", i, names[k]);
            int st = check_path(ctx, where, key, vals[k]);
            if (st)
                return st;
        }
    }
    return SINEW_OK;
}

/* ---- reading ---- */

typedef struct reader {
    sinew_ctx *ctx;
    const char *where;
} reader;

/* Refuse keys not in `allowed` (NULL-terminated) and duplicate keys. */
static int check_keys(reader *r, const cJSON *obj, const char *path, const char *const *allowed)
{
    char key[160];
    for (const cJSON *c = obj->child; c; c = c->next) {
        const char *name = c->string ? c->string : "";
        int ok = 0;
        for (const char *const *a = allowed; *a; a++)
            if (!strcmp(*a, name))
                ok = 1;
        snprintf(key, sizeof key, "%s%s%s", path, *path ? "." : "", name);
        if (!ok) {
            snprintf(key, sizeof key, "%s", *path ? path : "(top level)");
            char msg[160];
            snprintf(msg, sizeof msg, "unknown key '%.100s'", name);
            return bad_key(r->ctx, r->where, key, msg);
        }
        for (const cJSON *d = obj->child; d != c; d = d->next)
            if (d->string && !strcmp(d->string, name))
                return bad_key(r->ctx, r->where, key, "duplicate key");
    }
    return SINEW_OK;
}

static void join_key(char *buf, size_t n, const char *path, const char *name)
{
    snprintf(buf, n, "%s%s%s", path, *path ? "." : "", name);
}

/* Optional string member: *out stays NULL if absent. */
static int get_string(reader *r, const cJSON *obj, const char *path, const char *name, int required,
                      char **out)
{
    char key[160];
    join_key(key, sizeof key, path, name);
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(obj, name);
    if (!v)
        return required ? bad_key(r->ctx, r->where, key, "missing") : SINEW_OK;
    if (!cJSON_IsString(v) || !v->valuestring)
        return bad_key(r->ctx, r->where, key, "expected a string");
    if (!*v->valuestring)
        return bad_key(r->ctx, r->where, key, "empty string");
    return set_str(r->ctx, out, v->valuestring);
}

/* Number member; returns 1 in *present if found. */
static int get_number(reader *r, const cJSON *obj, const char *path, const char *name, int required,
                      double *out, int *present)
{
    char key[160];
    join_key(key, sizeof key, path, name);
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(obj, name);
    if (present)
        *present = v != NULL;
    if (!v)
        return required ? bad_key(r->ctx, r->where, key, "missing") : SINEW_OK;
    if (!cJSON_IsNumber(v))
        return bad_key(r->ctx, r->where, key, "expected a number");
    if (!isfinite(v->valuedouble))
        return bad_key(r->ctx, r->where, key, "must be finite");
    *out = v->valuedouble;
    return SINEW_OK;
}

static int get_int(reader *r, const cJSON *obj, const char *path, const char *name, long lo,
                   long hi, int *out)
{
    char key[160];
    double d = 0;
    int st = get_number(r, obj, path, name, 1, &d, NULL);
    if (st)
        return st;
    join_key(key, sizeof key, path, name);
    if (d != floor(d) || d < (double)lo || d > (double)hi) {
        char msg[96];
        snprintf(msg, sizeof msg, "expected an integer in %ld..%ld", lo, hi);
        return bad_key(r->ctx, r->where, key, msg);
    }
    *out = (int)d;
    return SINEW_OK;
}

/* Refuse arrays longer than `max` before building anything from them. */
static int check_count(reader *r, const cJSON *arr, const char *name, size_t max)
{
    size_t n = 0;
    for (const cJSON *c = arr->child; c; c = c->next)
        if (++n > max)
            return sinew__fail(r->ctx, SINEW_ELIMIT, "%s: %s: more than %zu entries", r->where,
                               name, max);
    return SINEW_OK;
}

static const cJSON *get_typed(reader *r, const cJSON *obj, const char *path, const char *name,
                              int required, int want_array, int *st)
{
    char key[160];
    join_key(key, sizeof key, path, name);
    *st = SINEW_OK;
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(obj, name);
    if (!v) {
        if (required)
            *st = bad_key(r->ctx, r->where, key, "missing");
        return NULL;
    }
    if (want_array ? !cJSON_IsArray(v) : !cJSON_IsObject(v)) {
        *st =
            bad_key(r->ctx, r->where, key, want_array ? "expected an array" : "expected an object");
        return NULL;
    }
    return v;
}

static int read_frame(reader *r, sinew_sequence *seq, const cJSON *o, size_t i)
{
    static const char *const keys[] = {"color",     "depth", "labels", "ignore",
                                       "timestamp", "pose",  "right",  NULL};
    char path[64];
    snprintf(path, sizeof path, "frames[%zu]", i);
    if (!cJSON_IsObject(o))
        return bad_key(r->ctx, r->where, path, "expected an object");
    int st = check_keys(r, o, path, keys);
    if (st)
        return st;
    sinew_seq_frame f;
    sinew_sequence_frame_init(&f);
    double ts = NAN;
    int has_ts = 0;
    if ((st = get_string(r, o, path, "color", 1, &f.color)) ||
        (st = get_string(r, o, path, "depth", 0, &f.depth)) ||
        (st = get_string(r, o, path, "labels", 0, &f.labels)) ||
        (st = get_string(r, o, path, "ignore", 0, &f.ignore)) ||
        (st = get_string(r, o, path, "right", 0, &f.right)) ||
        (st = get_number(r, o, path, "timestamp", 0, &ts, &has_ts)))
        goto done;
    f.timestamp = has_ts ? ts : NAN;
    const cJSON *pose = cJSON_GetObjectItemCaseSensitive(o, "pose");
    if (pose) {
        char key[96];
        snprintf(key, sizeof key, "%s.pose", path);
        if (!cJSON_IsArray(pose) || cJSON_GetArraySize(pose) != 12) {
            st = bad_key(r->ctx, r->where, key, "expected an array of 12 numbers");
            goto done;
        }
        int k = 0;
        for (const cJSON *c = pose->child; c; c = c->next, k++) {
            if (!cJSON_IsNumber(c) || !isfinite(c->valuedouble)) {
                st = bad_key(r->ctx, r->where, key, "expected an array of 12 numbers");
                goto done;
            }
            f.pose[k] = c->valuedouble;
        }
        f.has_pose = 1;
    }
    st = sinew_sequence_add_frame(seq, &f);
done:
    frame_release(r->ctx, &f);
    return st;
}

static int read_pair(reader *r, sinew_sequence *seq, const cJSON *o, size_t i)
{
    static const char *const keys[] = {"from",
                                       "to",
                                       "flow_forward",
                                       "flow_backward",
                                       "occlusion_forward",
                                       "occlusion_backward",
                                       "scene_flow",
                                       NULL};
    char path[64];
    snprintf(path, sizeof path, "pairs[%zu]", i);
    if (!cJSON_IsObject(o))
        return bad_key(r->ctx, r->where, path, "expected an object");
    int st = check_keys(r, o, path, keys);
    if (st)
        return st;
    sinew_seq_pair p = {0, 0, NULL, NULL, NULL, NULL, NULL};
    if ((st = get_int(r, o, path, "from", 0, 2147483647L, &p.from)) ||
        (st = get_int(r, o, path, "to", 0, 2147483647L, &p.to)) ||
        (st = get_string(r, o, path, "flow_forward", 0, &p.flow_forward)) ||
        (st = get_string(r, o, path, "flow_backward", 0, &p.flow_backward)) ||
        (st = get_string(r, o, path, "occlusion_forward", 0, &p.occlusion_forward)) ||
        (st = get_string(r, o, path, "occlusion_backward", 0, &p.occlusion_backward)) ||
        (st = get_string(r, o, path, "scene_flow", 0, &p.scene_flow)))
        goto done;
    st = sinew_sequence_add_pair(seq, &p);
done:
    pair_release(r->ctx, &p);
    return st;
}

/* A numbered file pattern: exactly one %d or %0Nd (N = 1..9); "%%" is a literal '%'.
 * Writes the file name of `number` into buf; returns 0, or -1 if the pattern is bad or
 * the name does not fit. */
static int pattern_name(const char *pat, long number, char *buf, size_t n)
{
    size_t o = 0;
    int conv = 0;
    for (const char *p = pat; *p; p++) {
        if (*p != '%') {
            if (o + 1 >= n)
                return -1;
            buf[o++] = *p;
            continue;
        }
        p++;
        if (*p == '%') {
            if (o + 1 >= n)
                return -1;
            buf[o++] = '%';
            continue;
        }
        int width = 0;
        if (*p == '0' && p[1] >= '1' && p[1] <= '9' && p[2] == 'd') {
            width = p[1] - '0';
            p += 2;
        } else if (*p != 'd') {
            return -1;
        }
        if (conv++)
            return -1;
        int w = snprintf(buf + o, n - o, "%0*ld", width, number);
        if (w < 0 || (size_t)w >= n - o)
            return -1;
        o += (size_t)w;
    }
    if (!conv || o >= n)
        return -1;
    buf[o] = '\0';
    return 0;
}

/* "frames": {"color": PATTERN, "depth": PATTERN, "labels": PATTERN, "first": N,
 * "count": N, "step": N}: frames first, first + step, ... (count of them). */
static int read_frame_pattern(reader *r, sinew_sequence *seq, const cJSON *o)
{
    static const char *const keys[] = {"color", "depth", "labels", "ignore", "right",
                                       "first", "count", "step",   NULL};
    int st = check_keys(r, o, "frames", keys);
    if (st)
        return st;
    const char *pat[5] = {NULL, NULL, NULL, NULL, NULL};
    static const char *const names[5] = {"color", "depth", "labels", "ignore", "right"};
    char key[64], probe[4096];
    for (int k = 0; k < 5; k++) {
        const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, names[k]);
        snprintf(key, sizeof key, "frames.%s", names[k]);
        if (!v) {
            if (k == 0)
                return bad_key(r->ctx, r->where, key, "missing");
            continue;
        }
        if (!cJSON_IsString(v) || !v->valuestring)
            return bad_key(r->ctx, r->where, key, "expected a string");
        if (pattern_name(v->valuestring, 0, probe, sizeof probe) != 0)
            return bad_key(r->ctx, r->where, key,
                           "expected a file pattern with one %d or %0Nd (N = 1..9)");
        pat[k] = v->valuestring;
    }
    int first = 0, count = 0, step = 1;
    if (cJSON_GetObjectItemCaseSensitive(o, "first") &&
        (st = get_int(r, o, "frames", "first", 0, 999999999L, &first)))
        return st;
    if ((st = get_int(r, o, "frames", "count", 1, SINEW_SEQUENCE_MAX_FRAMES, &count)))
        return st;
    if (cJSON_GetObjectItemCaseSensitive(o, "step") &&
        (st = get_int(r, o, "frames", "step", 1, 1000000L, &step)))
        return st;
    if ((double)first + (double)step * (count - 1) > 999999999.0)
        return bad_key(r->ctx, r->where, "frames.count", "frame numbers beyond 999999999");
    char buf[5][4096];
    for (long i = 0; i < count; i++) {
        long num = first + (long)step * i;
        sinew_seq_frame f;
        sinew_sequence_frame_init(&f);
        for (int k = 0; k < 5; k++) {
            if (!pat[k])
                continue;
            if (pattern_name(pat[k], num, buf[k], sizeof buf[k]) != 0) {
                snprintf(key, sizeof key, "frames.%s", names[k]);
                return bad_key(r->ctx, r->where, key, "file name too long");
            }
        }
        f.color = buf[0];
        f.depth = pat[1] ? buf[1] : NULL;
        f.labels = pat[2] ? buf[2] : NULL;
        f.ignore = pat[3] ? buf[3] : NULL;
        f.right = pat[4] ? buf[4] : NULL;
        if ((st = sinew_sequence_add_frame(seq, &f))) /* copies the strings */
            return st;
    }
    return SINEW_OK;
}

/* "run": {"schedule": {...}, "preset": S, "flow_format": S, "match_stride": N} */
static int read_run(reader *r, sinew_sequence *seq, const cJSON *o)
{
    static const char *const keys[] = {"schedule", "preset", "flow_format", "match_stride", NULL};
    sinew_seq_run *run = &seq->run;
    int st = check_keys(r, o, "run", keys);
    if (st || (st = get_string(r, o, "run", "preset", 0, &run->preset)) ||
        (st = get_string(r, o, "run", "flow_format", 0, &run->flow_format)))
        return st;
    if (cJSON_GetObjectItemCaseSensitive(o, "match_stride")) {
        if ((st = get_int(r, o, "run", "match_stride", 0, MAX_IMAGE_DIM, &run->match_stride)))
            return st;
        run->has_match_stride = 1;
    }
    const cJSON *s = get_typed(r, o, "run", "schedule", 0, 0, &st);
    if (st || !s)
        return st;
    const cJSON *kind = cJSON_GetObjectItemCaseSensitive(s, "kind");
    if (!kind)
        return bad_key(r->ctx, r->where, "run.schedule.kind", "missing");
    if (!cJSON_IsString(kind) || in_list(kind->valuestring, schedule_kinds) < 0)
        return bad_key(r->ctx, r->where, "run.schedule.kind",
                       "expected \"consecutive\", \"gap\", \"keyframe\" or \"list\"");
    run->schedule_kind = in_list(kind->valuestring, schedule_kinds);
    run->has_schedule = 1;
    static const char *const k0[] = {"kind", NULL};
    static const char *const k1[] = {"kind", "gap", NULL};
    static const char *const k2[] = {"kind", "every", "window", NULL};
    static const char *const k3[] = {"kind", "pairs", NULL};
    static const char *const *const allowed[4] = {k0, k1, k2, k3};
    if ((st = check_keys(r, s, "run.schedule", allowed[run->schedule_kind])))
        return st;
    if (run->schedule_kind == 1)
        return get_int(r, s, "run.schedule", "gap", 1, SINEW_SEQUENCE_MAX_FRAMES, &run->gap);
    if (run->schedule_kind == 2) {
        if ((st =
                 get_int(r, s, "run.schedule", "every", 1, SINEW_SEQUENCE_MAX_FRAMES, &run->every)))
            return st;
        return get_int(r, s, "run.schedule", "window", 1, SINEW_SEQUENCE_MAX_FRAMES, &run->window);
    }
    if (run->schedule_kind != 3)
        return SINEW_OK;
    const cJSON *pairs = get_typed(r, s, "run.schedule", "pairs", 1, 1, &st);
    if (st)
        return st;
    size_t n = (size_t)cJSON_GetArraySize(pairs), i = 0;
    if (n > 10000000)
        return bad_key(r->ctx, r->where, "run.schedule.pairs", "more than 10000000 pairs");
    if (n && !(run->pairs = sinew__calloc(r->ctx, n, 2 * sizeof *run->pairs)))
        return SINEW_ENOMEM;
    for (const cJSON *c = pairs->child; c; c = c->next, i++) {
        char key[64];
        snprintf(key, sizeof key, "run.schedule.pairs[%zu]", i);
        if (!cJSON_IsArray(c) || cJSON_GetArraySize(c) != 2 || !cJSON_IsNumber(c->child) ||
            !cJSON_IsNumber(c->child->next))
            return bad_key(r->ctx, r->where, key, "expected [from, to]");
        double a = c->child->valuedouble, b = c->child->next->valuedouble;
        if (a != floor(a) || b != floor(b) || a < 0 || b < 0 || a > 2147483647.0 ||
            b > 2147483647.0)
            return bad_key(r->ctx, r->where, key, "expected two frame numbers");
        run->pairs[2 * i] = (int)a;
        run->pairs[2 * i + 1] = (int)b;
        run->n_pairs = i + 1;
    }
    return SINEW_OK;
}

static int read_root(reader *r, sinew_sequence *seq, const cJSON *root)
{
    static const char *const keys[] = {
        "version", "name",       "intrinsics", "depth_scale",     "label_names",  "frames",
        "pairs",   "depth_kind", "run",        "ignore_polarity", "stereo_calib", NULL};
    if (!cJSON_IsObject(root))
        return sinew__fail(r->ctx, SINEW_ECONFIG, "%s: expected a JSON object at the top level",
                           r->where);
    int st = check_keys(r, root, "", keys);
    if (st)
        return st;
    /* version first: a newer file gets a clear message rather than "unknown key" later */
    double v = 0;
    if ((st = get_number(r, root, "", "version", 1, &v, NULL)))
        return st;
    if (v != floor(v) || v < 1)
        return bad_key(r->ctx, r->where, "version", "expected a positive integer");
    if (v > SINEW_SEQUENCE_VERSION)
        return sinew__fail(r->ctx, SINEW_EUNSUPPORTED,
                           "%s: version: %.0f is newer than this build reads (%d)", r->where, v,
                           SINEW_SEQUENCE_VERSION);
    seq->version = (int)v;
    if ((st = get_string(r, root, "", "name", 0, &seq->name)) ||
        (st = get_string(r, root, "", "stereo_calib", 0, &seq->stereo_calib)))
        return st;
    const cJSON *in = get_typed(r, root, "", "intrinsics", 0, 0, &st);
    if (st)
        return st;
    if (in) {
        static const char *const ik[] = {"fx", "fy", "cx", "cy", "width", "height", NULL};
        if ((st = check_keys(r, in, "intrinsics", ik)) ||
            (st = get_number(r, in, "intrinsics", "fx", 1, &seq->fx, NULL)) ||
            (st = get_number(r, in, "intrinsics", "fy", 1, &seq->fy, NULL)) ||
            (st = get_number(r, in, "intrinsics", "cx", 1, &seq->cx, NULL)) ||
            (st = get_number(r, in, "intrinsics", "cy", 1, &seq->cy, NULL)) ||
            (st = get_int(r, in, "intrinsics", "width", 1, MAX_IMAGE_DIM, &seq->width)) ||
            (st = get_int(r, in, "intrinsics", "height", 1, MAX_IMAGE_DIM, &seq->height)))
            return st;
        seq->has_intrinsics = 1;
    }
    if ((st = get_number(r, root, "", "depth_scale", 0, &seq->depth_scale, NULL)))
        return st;
    if (cJSON_GetObjectItemCaseSensitive(root, "depth_scale") && !(seq->depth_scale > 0))
        return bad_key(r->ctx, r->where, "depth_scale", "must be a positive number");
    const cJSON *ln = get_typed(r, root, "", "label_names", 0, 1, &st);
    if (st)
        return st;
    if (ln) {
        size_t n = (size_t)cJSON_GetArraySize(ln), i = 0;
        const char **names = n ? sinew__calloc(r->ctx, n, sizeof *names) : NULL;
        if (n && !names)
            return SINEW_ENOMEM;
        for (const cJSON *c = ln->child; c; c = c->next, i++) {
            if (!cJSON_IsString(c) || !c->valuestring) {
                char key[64];
                snprintf(key, sizeof key, "label_names[%zu]", i);
                sinew__free(r->ctx, (void *)names);
                return bad_key(r->ctx, r->where, key, "expected a string");
            }
            names[i] = c->valuestring;
        }
        st = sinew_sequence_set_label_names(seq, names, n);
        sinew__free(r->ctx, (void *)names);
        if (st)
            return st;
    }
    const cJSON *dk = cJSON_GetObjectItemCaseSensitive(root, "depth_kind");
    if (dk) {
        if (!cJSON_IsString(dk) || (strcmp(dk->valuestring, "z") && strcmp(dk->valuestring, "ray")))
            return bad_key(r->ctx, r->where, "depth_kind", "expected \"z\" or \"ray\"");
        seq->depth_ray = !strcmp(dk->valuestring, "ray");
    }
    const cJSON *ip = cJSON_GetObjectItemCaseSensitive(root, "ignore_polarity");
    if (ip) {
        if (!cJSON_IsString(ip) ||
            (strcmp(ip->valuestring, "nonzero") && strcmp(ip->valuestring, "zero")))
            return bad_key(r->ctx, r->where, "ignore_polarity", "expected \"nonzero\" or \"zero\"");
        seq->ignore_polarity = strcmp(ip->valuestring, "nonzero") ? 2 : 1;
    }
    const cJSON *run = get_typed(r, root, "", "run", 0, 0, &st);
    if (st || (run && (st = read_run(r, seq, run))))
        return st;
    const cJSON *frames = cJSON_GetObjectItemCaseSensitive(root, "frames");
    size_t i = 0;
    if (cJSON_IsObject(frames)) {
        if ((st = read_frame_pattern(r, seq, frames)))
            return st;
    } else {
        frames = get_typed(r, root, "", "frames", 1, 1, &st);
        if (st)
            return st;
        if ((size_t)cJSON_GetArraySize(frames) > SINEW_SEQUENCE_MAX_FRAMES)
            return sinew__fail(r->ctx, SINEW_ELIMIT, "%s: frames: more than %d frames", r->where,
                               SINEW_SEQUENCE_MAX_FRAMES);
        for (const cJSON *c = frames->child; c; c = c->next, i++)
            if ((st = read_frame(r, seq, c, i)))
                return st;
    }
    const cJSON *pairs = get_typed(r, root, "", "pairs", 0, 1, &st);
    if (st)
        return st;
    if (pairs && (st = check_count(r, pairs, "pairs", SINEW_SEQUENCE_MAX_PAIRS)))
        return st;
    i = 0;
    if (pairs)
        for (const cJSON *c = pairs->child; c; c = c->next, i++)
            if ((st = read_pair(r, seq, c, i)))
                return st;
    return sinew_sequence_validate(seq, r->where);
}

static int set_dir(sinew_sequence *seq, const char *where)
{
    const char *slash = where ? strrchr(where, '/') : NULL;
    size_t n = slash ? (size_t)(slash - where) : 1;
    if (slash && n == 0)
        n = 1; /* "/file.json" -> "/" */
    char *d = sinew__alloc(seq->ctx_, n + 1);
    if (!d)
        return SINEW_ENOMEM;
    memcpy(d, slash ? where : ".", n);
    d[n] = 0;
    sinew__free(seq->ctx_, seq->dir_);
    seq->dir_ = d;
    return SINEW_OK;
}

int sinew_sequence_parse(sinew_ctx *ctx, sinew_sequence **out, const char *text, size_t len,
                         const char *where)
{
    if (!ctx || !out || (!text && len))
        return SINEW_EINVAL;
    *out = NULL;
    if (!where)
        where = "sequence";
    const char *end = NULL;
    cJSON *root = cJSON_ParseWithLengthOpts(text ? text : "", len, &end, 0);
    size_t off = end && end >= text ? (size_t)(end - text) : 0;
    if (root) { /* only whitespace may follow the value */
        while (off < len && strchr(" \t\r\n", text[off]) && text[off])
            off++;
    }
    if (!root || off < len) {
        size_t line = 1, col = 1;
        for (size_t k = 0; k < off && k < len; k++) {
            if (text[k] == '\n') {
                line++;
                col = 1;
            } else {
                col++;
            }
        }
        cJSON_Delete(root);
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: %s at line %zu column %zu", where,
                           root ? "unexpected content after the JSON value" : "invalid JSON", line,
                           col);
    }
    sinew_sequence *seq;
    int st = sinew_sequence_new(ctx, &seq);
    if (st) {
        cJSON_Delete(root);
        return st;
    }
    reader r = {ctx, where};
    st = read_root(&r, seq, root);
    cJSON_Delete(root);
    if (!st)
        st = set_dir(seq, where);
    if (st) {
        sinew_sequence_free(seq);
        return st;
    }
    *out = seq;
    return SINEW_OK;
}

int sinew_sequence_read(sinew_ctx *ctx, sinew_sequence **out, const char *path)
{
    if (!ctx || !out || !path)
        return SINEW_EINVAL;
    *out = NULL;
    unsigned char *buf = NULL;
    size_t len = 0;
    int st = sinew_read_file(ctx, &buf, &len, path, MAX_JSON_BYTES);
    if (st)
        return st;
    st = sinew_sequence_parse(ctx, out, (const char *)buf, len, path);
    sinew_ctx_dealloc(ctx, buf);
    return st;
}

/* ---- writing ---- */

/* Numbers are written with the fewest digits (15..17) that read back to the same double:
 * cJSON's own printer compares with a tolerance and can lose the last bit. */
static cJSON *make_num(double v)
{
    char buf[40];
    for (int prec = 15; prec <= 17; prec++) {
        snprintf(buf, sizeof buf, "%.*g", prec, v);
        if (strtod(buf, NULL) == v)
            break;
    }
    return cJSON_CreateRaw(buf);
}

static int add_num(cJSON *o, const char *name, double v)
{
    cJSON *n = make_num(v);
    return n && cJSON_AddItemToObject(o, name, n) ? 1 : (cJSON_Delete(n), 0);
}

static int add_str(cJSON *o, const char *name, const char *s)
{
    return !s || cJSON_AddStringToObject(o, name, s) ? 0 : -1;
}

static cJSON *build(const sinew_sequence *seq)
{
    cJSON *root = cJSON_CreateObject();
    if (!root)
        return NULL;
    int bad = !add_num(root, "version", seq->version);
    bad |= add_str(root, "name", seq->name);
    bad |= add_str(root, "stereo_calib", seq->stereo_calib);
    if (seq->has_intrinsics) {
        cJSON *in = cJSON_AddObjectToObject(root, "intrinsics");
        bad |= !in || !add_num(in, "fx", seq->fx) || !add_num(in, "fy", seq->fy) ||
               !add_num(in, "cx", seq->cx) || !add_num(in, "cy", seq->cy) ||
               !add_num(in, "width", seq->width) || !add_num(in, "height", seq->height);
    }
    if (seq->depth_scale > 0)
        bad |= !add_num(root, "depth_scale", seq->depth_scale);
    if (seq->n_label_names) {
        cJSON *ln = cJSON_AddArrayToObject(root, "label_names");
        bad |= !ln;
        for (size_t i = 0; ln && i < seq->n_label_names; i++) {
            cJSON *s = cJSON_CreateString(seq->label_names[i]);
            bad |= !s || !cJSON_AddItemToArray(ln, s);
        }
    }
    if (seq->depth_ray)
        bad |= add_str(root, "depth_kind", "ray");
    if (seq->ignore_polarity)
        bad |= add_str(root, "ignore_polarity", seq->ignore_polarity == 1 ? "nonzero" : "zero");
    const sinew_seq_run *rs = &seq->run;
    if (rs->has_schedule || rs->preset || rs->flow_format || rs->has_match_stride) {
        cJSON *ro = cJSON_AddObjectToObject(root, "run");
        bad |= !ro;
        if (ro && rs->has_schedule) {
            cJSON *so = cJSON_AddObjectToObject(ro, "schedule");
            bad |= !so || add_str(so, "kind", schedule_kinds[rs->schedule_kind]);
            if (so && rs->schedule_kind == 1)
                bad |= !add_num(so, "gap", rs->gap);
            if (so && rs->schedule_kind == 2)
                bad |= !add_num(so, "every", rs->every) || !add_num(so, "window", rs->window);
            if (so && rs->schedule_kind == 3) {
                cJSON *pa = cJSON_AddArrayToObject(so, "pairs");
                bad |= !pa;
                for (size_t i = 0; pa && i < rs->n_pairs; i++) {
                    cJSON *e = cJSON_CreateArray();
                    bad |= !e || !cJSON_AddItemToArray(pa, e);
                    if (e)
                        bad |= !cJSON_AddItemToArray(e, make_num(rs->pairs[2 * i])) ||
                               !cJSON_AddItemToArray(e, make_num(rs->pairs[2 * i + 1]));
                }
            }
        }
        if (ro) {
            bad |= add_str(ro, "preset", rs->preset) | add_str(ro, "flow_format", rs->flow_format);
            if (rs->has_match_stride)
                bad |= !add_num(ro, "match_stride", rs->match_stride);
        }
    }
    cJSON *frames = cJSON_AddArrayToObject(root, "frames");
    bad |= !frames;
    for (size_t i = 0; frames && !bad && i < seq->n_frames; i++) {
        const sinew_seq_frame *f = &seq->frames[i];
        cJSON *o = cJSON_CreateObject();
        bad |= !o || !cJSON_AddItemToArray(frames, o);
        if (bad)
            break;
        bad |= add_str(o, "color", f->color) | add_str(o, "depth", f->depth) |
               add_str(o, "labels", f->labels) | add_str(o, "ignore", f->ignore) |
               add_str(o, "right", f->right);
        if (!isnan(f->timestamp))
            bad |= !add_num(o, "timestamp", f->timestamp);
        if (f->has_pose) {
            cJSON *p = cJSON_AddArrayToObject(o, "pose");
            bad |= !p;
            for (int k = 0; p && k < 12; k++) {
                cJSON *n = make_num(f->pose[k]);
                bad |= !n || !cJSON_AddItemToArray(p, n);
            }
        }
    }
    if (seq->n_pairs) {
        cJSON *pairs = cJSON_AddArrayToObject(root, "pairs");
        bad |= !pairs;
        for (size_t i = 0; pairs && !bad && i < seq->n_pairs; i++) {
            const sinew_seq_pair *p = &seq->pairs[i];
            cJSON *o = cJSON_CreateObject();
            bad |= !o || !cJSON_AddItemToArray(pairs, o);
            if (bad)
                break;
            bad |= !add_num(o, "from", p->from) || !add_num(o, "to", p->to);
            bad |= add_str(o, "flow_forward", p->flow_forward) |
                   add_str(o, "flow_backward", p->flow_backward) |
                   add_str(o, "occlusion_forward", p->occlusion_forward) |
                   add_str(o, "occlusion_backward", p->occlusion_backward) |
                   add_str(o, "scene_flow", p->scene_flow);
        }
    }
    if (bad) {
        cJSON_Delete(root);
        return NULL;
    }
    return root;
}

int sinew_sequence_write(sinew_sequence *seq, const char *path)
{
    if (!seq || !path)
        return SINEW_EINVAL;
    sinew_ctx *ctx = seq->ctx_;
    int st = sinew_sequence_validate(seq, path);
    if (st)
        return st;
    cJSON *root = build(seq);
    if (!root)
        return sinew__fail(ctx, SINEW_ENOMEM, "%s: out of memory building JSON", path);
    st = sinew__json_write(ctx, path, root); /* valid UTF-8, final newline */
    cJSON_Delete(root);
    return st;
}

int sinew_sequence_resolve(const sinew_sequence *seq, const char *rel, char *buf, size_t n)
{
    if (!seq || !rel || !buf || !n)
        return SINEW_EINVAL;
    int w;
    if (rel[0] == '/' || !seq->dir_)
        w = snprintf(buf, n, "%s", rel);
    else
        w = snprintf(buf, n, "%s/%s", seq->dir_, rel);
    if (w < 0 || (size_t)w >= n)
        return sinew__fail(seq->ctx_, SINEW_ELIMIT, "%s: path too long", rel);
    return SINEW_OK;
}
