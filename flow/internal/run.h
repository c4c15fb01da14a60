/* SPDX-License-Identifier: MIT */
/* Private helpers shared by the run engine files (run.c, manifest.c, runpipe.c). */
#ifndef SINEW_INTERNAL_RUN_H
#define SINEW_INTERNAL_RUN_H

#include <stddef.h>
#include <stdint.h>

#include <cJSON.h>

#include "flow/run.h"

#define SINEW__PATH_MAX 4096
#define SINEW__MAX_INPUTS 10
#define SINEW__DONE_FILE "done.json"
#define SINEW__ERROR_FILE "error.json"
#define SINEW__STATS_FILE "stats.json"
#define SINEW__MANIFEST_FILE "manifest.json"

/* One hashed input of a pair: role ("color0", "depth1", "intrinsics", ...), path
 * (borrowed), digest and size. */
typedef struct sinew__input {
    char role[16];
    const char *path;
    unsigned char digest[32];
    uint64_t bytes;
} sinew__input;

/* A time stamp and its position in its list; sinew__stamp_cmp orders by time, then
 * position (qsort comparator; flow/schedule.c). */
typedef struct sinew__stamp {
    double t;
    size_t idx;
} sinew__stamp;
int sinew__stamp_cmp(const void *x, const void *y);

/* mkdir -p; EIO naming the folder. */
int sinew__mkdirs(sinew_ctx *ctx, const char *path);
/* "a/b" in a new string (NULL when out of memory). */
char *sinew__dup_join(sinew_ctx *ctx, const char *a, const char *b);
/* Names in folder `dir` that keep() accepts, sorted by name (byte order): "dir/name" with
 * `join`, else the bare name. EIO names an unreadable folder; ELIMIT when more than `max`
 * names are accepted. *out (n strings) is freed with sinew__free_names. */
int sinew__list_dir(sinew_ctx *ctx, const char *dir, int (*keep)(const char *name), int join,
                    size_t max, char ***out, size_t *n);
void sinew__free_names(sinew_ctx *ctx, char **names, size_t n);
/* Write a cJSON value as formatted text plus a newline, atomically. */
int sinew__json_write(sinew_ctx *ctx, const char *path, const cJSON *obj);
/* Read and parse a JSON file of at most max_bytes; EFORMAT naming the file. */
int sinew__json_read(sinew_ctx *ctx, const char *path, size_t max_bytes, cJSON **out);

const sinew_run_spec *sinew__run_spec(const sinew_run *run);
sinew_ctx *sinew__run_ctx(const sinew_run *run);
/* OUTDIR/pairs/NAME of pair `index`. */
int sinew__run_pair_dir(sinew_run *run, size_t index, char *buf, size_t n);
/* Hash the inputs of pair `index` (cached per frame file); fwd/bwd receive imported
 * flow paths when the spec imports flows. */
int sinew__run_pair_inputs(sinew_run *run, size_t index, sinew__input *in, size_t *nin, char *fwd,
                           char *bwd, size_t pathn);
/* The pair key (hex) from the inputs. */
void sinew__run_pair_key(const sinew_run *run, size_t index, const sinew__input *in, size_t nin,
                         char hex[65]);
/* SINEW_PAIR_SKIPPED when dir/done.json carries `key` (and, with verify, every listed
 * output has its recorded size and digest), otherwise SINEW_PAIR_PENDING. When record
 * is non-NULL and the pair is complete, *record receives the parsed done record. */
int sinew__run_record_status(sinew_run *run, const char *dir, const char *key, int verify,
                             cJSON **record);

#endif
