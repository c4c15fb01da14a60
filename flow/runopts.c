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
#include <string.h>
#include <sys/stat.h>

#include "flow/internal/base.h"
#include "flow/io.h"
#include "flow/internal/fs.h"
#include "flow/internal/json.h"
#include "flow/json.h"
#include "flow/check.h"
#include "flow/run.h"

/* Record marker and version: a later layout changes the number. */
static const char *const OPTIONS_KEY = "sinew_run_options";
static const int OPTIONS_VERSION = 1;

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
             sinew_json_add_string(j, "ignore_polarity", polarity_name(o->ignore_polarity));
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
        snprintf(a, sizeof a, "%.17g", (double)stored->field);                                     \
        snprintf(b, sizeof b, "%.17g", (double)o->field);                                          \
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
    return SINEW_OK;
}
