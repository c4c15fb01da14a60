/* SPDX-License-Identifier: MIT */
/* A run's stored options: OUTDIR/options.json (format in docs/formats.md), written
 * before the first pair so that resuming, merging and later shards use the settings the
 * run was started with. Every key is required when reading: a record that lost a key is
 * refused rather than filled with a default that may differ from what produced the
 * finished pairs. */
#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "flow/internal/base.h"
#include "flow/io.h"
#include "flow/internal/fs.h"
#include "flow/internal/json.h"
#include "flow/json.h"
#include "flow/check.h"
#include "flow/depth.h"
#include "flow/match.h"
#include "flow/run.h"
#include "flow/internal/run.h"

/* Record marker and version: a later layout changes the number. */
static const char *const OPTIONS_KEY = "sinew_run_options";
static const int OPTIONS_VERSION = 1;

/* ---- tuning: check thresholds and lift rules by the single-pair commands' names ---- */

/* Accepted values: [lo, hi] (lo excluded when open), whole numbers when integer. The
 * ranges are those of `sinew check` and `sinew lift`. */
static const struct tune_def {
    const char *name, *range;
    double lo, hi;
    int open, integer;
} TUNE[SINEW_RUN_NTUNE] = {
    {"fb-alpha", "a number >= 0", 0, INFINITY, 0, 0},
    {"fb-beta", "a number >= 0", 0, INFINITY, 0, 0},
    {"boundary-alpha", "a number >= 0", 0, INFINITY, 0, 0},
    {"boundary-beta", "a number >= 0", 0, INFINITY, 0, 0},
    {"photo-threshold", "a number >= 0", 0, INFINITY, 0, 0},
    {"saturation-level", "a number >= 0", 0, INFINITY, 0, 0},
    {"near", "metres >= 0", 0, INFINITY, 0, 0},
    {"far", "metres > 0", 0, INFINITY, 1, 0},
    {"edge", "a number > 0", 0, INFINITY, 1, 0},
    {"edge-radius", "a whole number 0..16", 0, 16, 0, 1},
    {"max-displacement", "metres > 0", 0, INFINITY, 1, 0},
    {"normals", "1", 1, 1, 0, 1},
    {"top-k", "a whole number >= 1", 1, 1073741824.0, 0, 1},
    {"cell", "a whole number >= 1", 1, 1048576.0, 0, 1},
    {"per-cell", "a whole number >= 1", 1, 1073741824.0, 0, 1},
    {"min-weight", "a number", -INFINITY, INFINITY, 0, 0},
    {"world-frame", "1", 1, 1, 0, 1},
};

const char *sinew_run_tune_name(int key)
{
    return key >= 0 && key < SINEW_RUN_NTUNE ? TUNE[key].name : NULL;
}

int sinew_run_tune_find(const char *name)
{
    for (int k = 0; name && k < SINEW_RUN_NTUNE; k++)
        if (!strcmp(name, TUNE[k].name))
            return k;
    return -1;
}

const char *sinew_run_tune_range(int key)
{
    return key >= 0 && key < SINEW_RUN_NTUNE ? TUNE[key].range : NULL;
}

int sinew_run_tune_valid(int key, double v)
{
    if (key < 0 || key >= SINEW_RUN_NTUNE || !isfinite(v))
        return -1;
    const struct tune_def *d = &TUNE[key];
    if (v < d->lo || v > d->hi || (d->open && v == d->lo) || (d->integer && v != floor(v)))
        return -1;
    return 0;
}

int sinew_run_tuning_text(sinew_ctx *ctx, char *buf, size_t n, const sinew_run_tuning *t)
{
    if (!ctx || !buf || !t || n < 3)
        return SINEW_EINVAL;
    size_t w = 0;
    buf[w++] = '{';
    for (int k = 0; k < SINEW_RUN_NTUNE; k++) {
        if (!(t->set & (1u << k)))
            continue;
        /* %.17g round-trips a double, so equal text means equal settings */
        int m =
            snprintf(buf + w, n - w, "%s\"%s\":%.17g", w > 1 ? "," : "", TUNE[k].name, t->value[k]);
        if (m < 0 || (size_t)m >= n - w)
            return sinew__fail(ctx, SINEW_ELIMIT, "tuning text too long");
        w += (size_t)m;
    }
    if (w + 2 > n)
        return sinew__fail(ctx, SINEW_ELIMIT, "tuning text too long");
    buf[w++] = '}';
    buf[w] = 0;
    return SINEW_OK;
}

/* The value of key k when set, else def. */
static double tuned(const sinew_run_tuning *t, int k, double def)
{
    return t->set & (1u << k) ? t->value[k] : def;
}

void sinew__run_tuning_check(const sinew_run_tuning *t, sinew_check_params *p)
{
    p->fb_alpha = tuned(t, SINEW_TUNE_FB_ALPHA, p->fb_alpha);
    p->fb_beta = tuned(t, SINEW_TUNE_FB_BETA, p->fb_beta);
    p->boundary_alpha = tuned(t, SINEW_TUNE_BOUNDARY_ALPHA, p->boundary_alpha);
    p->boundary_beta = tuned(t, SINEW_TUNE_BOUNDARY_BETA, p->boundary_beta);
    p->photo_threshold = tuned(t, SINEW_TUNE_PHOTO_THRESHOLD, p->photo_threshold);
    p->saturation_level = tuned(t, SINEW_TUNE_SATURATION_LEVEL, p->saturation_level);
}

void sinew__run_tuning_depth(const sinew_run_tuning *t, sinew_depth_params *p)
{
    p->near = tuned(t, SINEW_TUNE_NEAR, p->near);
    p->far = tuned(t, SINEW_TUNE_FAR, p->far);
}

void sinew__run_tuning_match(const sinew_run_tuning *t, sinew_match_params *p)
{
    p->edge_rel = tuned(t, SINEW_TUNE_EDGE, p->edge_rel);
    p->edge_radius = (int)tuned(t, SINEW_TUNE_EDGE_RADIUS, p->edge_radius);
    p->max_displacement = tuned(t, SINEW_TUNE_MAX_DISPLACEMENT, p->max_displacement);
    p->normals = (int)tuned(t, SINEW_TUNE_NORMALS, p->normals);
    if (t->set & (1u << SINEW_TUNE_TOP_K)) {
        p->sampling = SINEW_SAMPLE_TOP_K;
        p->top_k = (size_t)t->value[SINEW_TUNE_TOP_K];
    }
    p->cell = (int)tuned(t, SINEW_TUNE_CELL, p->cell);
    p->per_cell = (int)tuned(t, SINEW_TUNE_PER_CELL, p->per_cell);
    p->min_weight = tuned(t, SINEW_TUNE_MIN_WEIGHT, p->min_weight);
}

/* ---- options.json ---- */

static int options_path(sinew_ctx *ctx, const char *outdir, char *buf, size_t n)
{
    return sinew__path_join(ctx, buf, n, outdir, SINEW_RUN_OPTIONS_FILE);
}

/* A copy into a fixed field; ELIMIT naming the key when it does not fit. */
static int copy_field(sinew_ctx *ctx, const char *where, const char *key, char *dst, size_t n,
                      const char *src)
{
    size_t len = strlen(src);
    if (len >= n)
        return sinew__fail(ctx, SINEW_ELIMIT, "%s: %s: longer than %zu bytes", where, key, n - 1);
    memcpy(dst, src, len + 1);
    return SINEW_OK;
}

/* "nonzero" / "zero" for an ignore polarity, NULL for none. */
static const char *polarity_name(int p)
{
    return p == SINEW_IGNORE_NONZERO ? "nonzero" : p == SINEW_IGNORE_ZERO ? "zero" : NULL;
}

int sinew_run_options_write(sinew_ctx *ctx, const char *outdir, const sinew_run_options *o)
{
    if (!ctx || !outdir || !o)
        return SINEW_EINVAL;
    const char *fmt = sinew_flow_format_name(o->flow_format);
    if (!fmt)
        return sinew__fail(ctx, SINEW_ECONFIG, "unknown flow format %d", o->flow_format);
    char path[4200];
    int rc = options_path(ctx, outdir, path, sizeof path);
    if (rc)
        return rc;
    cJSON *j = cJSON_CreateObject();
    int ok = j && cJSON_AddNumberToObject(j, OPTIONS_KEY, OPTIONS_VERSION) &&
             cJSON_AddStringToObject(j, "preset", o->preset) &&
             cJSON_AddStringToObject(j, "flow_format", fmt) &&
             cJSON_AddNumberToObject(j, "match_stride", o->match_stride) &&
             sinew_json_add_number(j, "depth_scale", o->depth_scale) &&
             sinew_json_add_number(j, "max_dt", o->max_dt) &&
             sinew_json_add_string(j, "schedule", o->schedule[0] ? o->schedule : NULL) &&
             sinew_json_add_string(j, "flow_from", o->flow_from[0] ? o->flow_from : NULL) &&
             sinew_json_add_string(j, "ignore_polarity", polarity_name(o->ignore_polarity)) &&
             sinew_json_add_string(j, "intrinsics", o->intrinsics[0] ? o->intrinsics : NULL);
    cJSON *tj = ok ? cJSON_AddObjectToObject(j, "tuning") : NULL;
    ok = ok && tj;
    for (int k = 0; ok && k < SINEW_RUN_NTUNE; k++)
        if (o->tuning.set & (1u << k))
            ok = sinew_json_add_number(tj, TUNE[k].name, o->tuning.value[k]) != NULL;
    rc = ok ? sinew__json_write(ctx, path, j) : sinew__fail(ctx, SINEW_ENOMEM, "out of memory");
    cJSON_Delete(j);
    return rc;
}

/* obj[key] as a string ("" for null) copied into dst; EFORMAT when missing. */
static int read_text(sinew_ctx *ctx, const char *path, const cJSON *j, const char *key, char *dst,
                     size_t n)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(j, key);
    if (cJSON_IsNull(v)) {
        dst[0] = 0;
        return SINEW_OK;
    }
    if (!cJSON_IsString(v))
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: %s: expected a string or null", path, key);
    return copy_field(ctx, path, key, dst, n, v->valuestring);
}

/* obj[key] as a finite number > lo (or >= lo when closed); EFORMAT otherwise. */
static int read_number(sinew_ctx *ctx, const char *path, const cJSON *j, const char *key, double lo,
                       int closed, double *out)
{
    double v = sinew__json_num(j, key);
    if (!isfinite(v) || (closed ? v < lo : v <= lo))
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: %s: expected a number %s %g", path, key,
                           closed ? ">=" : ">", lo);
    *out = v;
    return SINEW_OK;
}

static int parse_options(sinew_ctx *ctx, const char *path, const cJSON *j, sinew_run_options *o)
{
    if (sinew__json_num(j, OPTIONS_KEY) != OPTIONS_VERSION)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: not a sinew run options record (version %d)",
                           path, OPTIONS_VERSION);
    const char *fmt = sinew__json_str(j, "flow_format");
    if (!fmt || sinew_flow_format_parse(fmt, &o->flow_format))
        return sinew__fail(ctx, SINEW_EFORMAT,
                           "%s: flow_format: expected flo, npy, npy16, pfm or png", path);
    const char *preset = sinew__json_str(j, "preset");
    if (!preset)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: preset: expected a string", path);
    double stride = 0;
    int rc;
    if ((rc = copy_field(ctx, path, "preset", o->preset, sizeof o->preset, preset)) ||
        (rc = read_number(ctx, path, j, "match_stride", 0, 1, &stride)) ||
        (rc = read_number(ctx, path, j, "depth_scale", 0, 0, &o->depth_scale)) ||
        (rc = read_number(ctx, path, j, "max_dt", 0, 0, &o->max_dt)) ||
        (rc = read_text(ctx, path, j, "schedule", o->schedule, sizeof o->schedule)) ||
        (rc = read_text(ctx, path, j, "flow_from", o->flow_from, sizeof o->flow_from)))
        return rc;
    /* absent in records of older versions: no ignore masks */
    const cJSON *ip = cJSON_GetObjectItemCaseSensitive(j, "ignore_polarity");
    if (ip && !cJSON_IsNull(ip)) {
        if (!cJSON_IsString(ip) ||
            (strcmp(ip->valuestring, "nonzero") && strcmp(ip->valuestring, "zero")))
            return sinew__fail(ctx, SINEW_EFORMAT,
                               "%s: ignore_polarity: expected \"nonzero\", \"zero\" or null", path);
        o->ignore_polarity =
            strcmp(ip->valuestring, "zero") ? SINEW_IGNORE_NONZERO : SINEW_IGNORE_ZERO;
    }
    /* absent in records of older versions: no --intrinsics, no tuning */
    if (cJSON_GetObjectItemCaseSensitive(j, "intrinsics") &&
        (rc = read_text(ctx, path, j, "intrinsics", o->intrinsics, sizeof o->intrinsics)))
        return rc;
    const cJSON *tj = cJSON_GetObjectItemCaseSensitive(j, "tuning"), *e;
    if (tj && !cJSON_IsObject(tj))
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: tuning: expected an object", path);
    cJSON_ArrayForEach(e, tj)
    {
        int k = sinew_run_tune_find(e->string);
        if (k < 0)
            return sinew__fail(ctx, SINEW_EFORMAT, "%s: tuning: unknown key '%s'", path,
                               e->string ? e->string : "");
        if (!cJSON_IsNumber(e) || sinew_run_tune_valid(k, e->valuedouble))
            return sinew__fail(ctx, SINEW_EFORMAT, "%s: tuning: %s: expected %s", path,
                               TUNE[k].name, TUNE[k].range);
        o->tuning.set |= 1u << k;
        o->tuning.value[k] = e->valuedouble;
    }
    if (stride != floor(stride) || stride > (double)(1 << 20))
        return sinew__fail(ctx, SINEW_EFORMAT,
                           "%s: match_stride: expected a whole number of pixels", path);
    o->match_stride = (int)stride;
    return SINEW_OK;
}

int sinew_run_options_read(sinew_ctx *ctx, sinew_run_options *o, int *found, const char *outdir)
{
    if (!ctx || !outdir || !o || !found)
        return SINEW_EINVAL;
    *found = 0;
    char path[4200];
    int rc = options_path(ctx, outdir, path, sizeof path);
    if (rc)
        return rc;
    struct stat st;
    if (lstat(path, &st) != 0 && errno == ENOENT)
        return SINEW_OK;
    cJSON *j;
    if ((rc = sinew__json_read(ctx, path, (size_t)1 << 20, &j)))
        return rc;
    sinew_run_options tmp;
    memset(&tmp, 0, sizeof tmp);
    rc = parse_options(ctx, path, j, &tmp);
    cJSON_Delete(j);
    if (rc)
        return rc;
    *o = tmp;
    *found = 1;
    return SINEW_OK;
}

/* v as short as it reads back exactly (0.03, not 0.029999999999999999). */
static void number_text(char *buf, size_t n, double v)
{
    snprintf(buf, n, "%.15g", v);
    if (strtod(buf, NULL) != v)
        snprintf(buf, n, "%.17g", v);
}

/* Key `key` differs: the one-line refusal. */
static int conflict(sinew_ctx *ctx, const char *where, const char *key, const char *stored,
                    const char *given)
{
    return sinew__fail(ctx, SINEW_ECONFIG, "%s: %s is '%s' there but '%s' was given", where, key,
                       stored, given);
}

int sinew_run_options_reconcile(sinew_ctx *ctx, sinew_run_options *o,
                                const sinew_run_options *stored, unsigned given, int force,
                                const char *where)
{
    if (!ctx || !where || !stored || !o)
        return SINEW_EINVAL;
    char a[64], b[64];
    unsigned check = force ? 0u : given;
#define DIFF_TEXT(bit, key, fa, fb)                                                                \
    if ((check & (bit)) && strcmp(fa, fb))                                                         \
    return conflict(ctx, where, key, fa, fb)
#define DIFF_NUM(bit, key, field)                                                                  \
    if ((check & (bit)) && stored->field != o->field) {                                            \
        number_text(a, sizeof a, (double)stored->field);                                           \
        number_text(b, sizeof b, (double)o->field);                                                \
        return conflict(ctx, where, key, a, b);                                                    \
    }
    DIFF_TEXT(SINEW_RUN_OPT_PRESET, "preset", stored->preset, o->preset);
    if ((check & SINEW_RUN_OPT_FLOW_FORMAT) && stored->flow_format != o->flow_format) {
        const char *sa = sinew_flow_format_name(stored->flow_format);
        const char *sb = sinew_flow_format_name(o->flow_format);
        return conflict(ctx, where, "flow_format", sa ? sa : "?", sb ? sb : "?");
    }
    DIFF_NUM(SINEW_RUN_OPT_MATCH_STRIDE, "match_stride", match_stride)
    DIFF_NUM(SINEW_RUN_OPT_DEPTH_SCALE, "depth_scale", depth_scale)
    DIFF_NUM(SINEW_RUN_OPT_MAX_DT, "max_dt", max_dt)
    DIFF_TEXT(SINEW_RUN_OPT_SCHEDULE, "schedule", stored->schedule, o->schedule);
    DIFF_TEXT(SINEW_RUN_OPT_FLOW_FROM, "flow_from", stored->flow_from, o->flow_from);
    if ((check & SINEW_RUN_OPT_IGNORE_POLARITY) && stored->ignore_polarity != o->ignore_polarity) {
        const char *sa = polarity_name(stored->ignore_polarity);
        const char *sb = polarity_name(o->ignore_polarity);
        return conflict(ctx, where, "ignore_polarity", sa ? sa : "none", sb ? sb : "none");
    }
    DIFF_TEXT(SINEW_RUN_OPT_INTRINSICS, "intrinsics", stored->intrinsics, o->intrinsics);
    for (int k = 0; k < SINEW_RUN_NTUNE; k++) {
        unsigned bit = 1u << k;
        int ss = (stored->tuning.set & bit) != 0, os = (o->tuning.set & bit) != 0;
        if (!(check & SINEW_RUN_OPT_TUNE(k)) ||
            (ss == os && (!ss || stored->tuning.value[k] == o->tuning.value[k])))
            continue;
        if (ss)
            number_text(a, sizeof a, stored->tuning.value[k]);
        else
            snprintf(a, sizeof a, "default");
        if (os)
            number_text(b, sizeof b, o->tuning.value[k]);
        else
            snprintf(b, sizeof b, "default");
        return conflict(ctx, where, TUNE[k].name, a, b);
    }
#undef DIFF_TEXT
#undef DIFF_NUM
    sinew_run_options mine = *o;
    *o = *stored;
    if (given & SINEW_RUN_OPT_PRESET)
        memcpy(o->preset, mine.preset, sizeof o->preset);
    if (given & SINEW_RUN_OPT_FLOW_FORMAT)
        o->flow_format = mine.flow_format;
    if (given & SINEW_RUN_OPT_MATCH_STRIDE)
        o->match_stride = mine.match_stride;
    if (given & SINEW_RUN_OPT_DEPTH_SCALE)
        o->depth_scale = mine.depth_scale;
    if (given & SINEW_RUN_OPT_MAX_DT)
        o->max_dt = mine.max_dt;
    if (given & SINEW_RUN_OPT_SCHEDULE)
        memcpy(o->schedule, mine.schedule, sizeof o->schedule);
    if (given & SINEW_RUN_OPT_FLOW_FROM)
        memcpy(o->flow_from, mine.flow_from, sizeof o->flow_from);
    if (given & SINEW_RUN_OPT_IGNORE_POLARITY)
        o->ignore_polarity = mine.ignore_polarity;
    if (given & SINEW_RUN_OPT_INTRINSICS)
        memcpy(o->intrinsics, mine.intrinsics, sizeof o->intrinsics);
    for (int k = 0; k < SINEW_RUN_NTUNE; k++) {
        unsigned bit = 1u << k;
        if (!(given & SINEW_RUN_OPT_TUNE(k)))
            continue;
        o->tuning.set = (o->tuning.set & ~bit) | (mine.tuning.set & bit);
        o->tuning.value[k] = mine.tuning.value[k];
    }
    return SINEW_OK;
}
