/* SPDX-License-Identifier: MIT */
/* The run manifest: OUTDIR/manifest.json rebuilt from the per-pair records.
 *
 * The manifest is never updated in place. It is rebuilt from what is on disk: every
 * input (size, SHA-256), the options, the sinew version, and for every pair of the
 * schedule its status from its own folder (done record with the current key ->
 * "done", error record -> "failed", otherwise "pending") plus the pair's stats. It is
 * written with a temporary name and a rename, so several shards finishing at once,
 * a kill, or a later merge can only ever leave a whole manifest. It contains no
 * times, so it is byte-identical for a whole, sharded or resumed run. */
#define _POSIX_C_SOURCE 200809L
#include <dirent.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "flow/internal/base.h"
#include "flow/internal/run.h"
#include "flow/run.h"

/* Append one input entry (path, role, bytes, sha256; or the error if unreadable).
 * Every path is distinct by construction (frames, the shared intrinsics file, one
 * imported flow pair per pair folder), so no search is needed. */
static int add_entry(sinew_ctx *ctx, cJSON *arr, const char *role, const char *path)
{
    cJSON *o = cJSON_CreateObject();
    if (!o)
        return SINEW_ENOMEM;
    cJSON_AddItemToArray(arr, o);
    if (!cJSON_AddStringToObject(o, "path", path) || !cJSON_AddStringToObject(o, "role", role))
        return SINEW_ENOMEM;
    unsigned char d[32];
    uint64_t bytes;
    int rc = sinew_sha256_file(ctx, d, &bytes, path);
    if (rc == SINEW_EINTERRUPTED)
        return rc;
    if (rc) {
        if (!cJSON_AddStringToObject(o, "error", sinew_ctx_message(ctx)))
            return SINEW_ENOMEM;
        sinew_ctx_clear(ctx);
        return SINEW_OK;
    }
    char hex[65];
    sinew_sha256_hex(d, hex);
    if (!cJSON_AddNumberToObject(o, "bytes", (double)bytes) ||
        !cJSON_AddStringToObject(o, "sha256", hex))
        return SINEW_ENOMEM;
    return SINEW_OK;
}

static cJSON *read_stats(sinew_ctx *ctx, const char *dir)
{
    char p[SINEW__PATH_MAX];
    cJSON *j = NULL;
    if (sinew__path_join(ctx, p, sizeof p, dir, SINEW_RUN_STATS_FILE) ||
        sinew__json_read(ctx, p, (size_t)16 << 20, &j)) {
        sinew_ctx_clear(ctx);
        return NULL;
    }
    return j;
}

static cJSON *read_error(sinew_ctx *ctx, const char *dir)
{
    char p[SINEW__PATH_MAX];
    struct stat st;
    cJSON *j = NULL;
    if (sinew__path_join(ctx, p, sizeof p, dir, SINEW_RUN_ERROR_FILE) || stat(p, &st) != 0 ||
        sinew__json_read(ctx, p, (size_t)1 << 20, &j)) {
        sinew_ctx_clear(ctx);
        return NULL;
    }
    return j;
}

static int build_pairs(sinew_run *run, int verify, cJSON *pairs, cJSON *inputs, size_t cnt[3])
{
    sinew_ctx *ctx = sinew__run_ctx(run);
    const sinew_run_spec *s = sinew__run_spec(run);
    sinew__input in[SINEW__MAX_INPUTS];
    char fwd[SINEW__PATH_MAX], bwd[SINEW__PATH_MAX], dir[SINEW__PATH_MAX];
    for (size_t q = 0; q < s->npairs; q++) {
        char name[SINEW_PAIR_NAME_MAX], key[65];
        sinew_pair_name(name, s->pairs[q]);
        cJSON *o = cJSON_CreateObject();
        cJSON *fr = cJSON_CreateArray();
        if (!o || !fr) {
            cJSON_Delete(o);
            cJSON_Delete(fr);
            return SINEW_ENOMEM;
        }
        cJSON_AddItemToArray(pairs, o);
        cJSON_AddStringToObject(o, "pair", name);
        cJSON_AddItemToObject(o, "frames", fr);
        cJSON_AddItemToArray(fr, cJSON_CreateNumber(s->pairs[q].i));
        cJSON_AddItemToArray(fr, cJSON_CreateNumber(s->pairs[q].j));
        int rc = sinew__run_pair_dir(run, q, dir, sizeof dir);
        if (rc)
            return rc;
        size_t nin = 0;
        const char *status = "pending";
        const char *error = NULL;
        char msg[SINEW_MESSAGE_MAX];
        cJSON *stats = NULL, *err = NULL;
        if ((rc = sinew__check_cancel(ctx, s->outdir)))
            return rc;
        if ((rc = sinew__run_pair_inputs(run, q, in, &nin, fwd, bwd, sizeof fwd))) {
            if (rc == SINEW_EINTERRUPTED)
                return rc;
            snprintf(msg, sizeof msg, "%s", sinew_ctx_message(ctx));
            sinew_ctx_clear(ctx);
            /* failed only if a run tried it (its error record); a pair the run never
             * reached stays pending, with the reason it cannot be done yet, so the
             * manifest counts agree with the run's own line */
            const cJSON *m = (err = read_error(ctx, dir)) != NULL
                                 ? cJSON_GetObjectItemCaseSensitive(err, "error")
                                 : NULL;
            status = err ? "failed" : "pending";
            error = cJSON_IsString(m) ? m->valuestring : msg;
        } else {
            sinew__run_pair_key(run, q, in, nin, key);
            if (s->flow_from) {
                if ((rc = add_entry(ctx, inputs, "flow_forward", fwd)) ||
                    (rc = add_entry(ctx, inputs, "flow_backward", bwd)))
                    return rc;
            }
            int rs = sinew__run_record_status(run, dir, key, verify, NULL);
            if ((rc = sinew__check_cancel(ctx, s->outdir)))
                return rc; /* a verification cut short proves nothing */
            if (rs == SINEW_PAIR_SKIPPED) {
                status = "done";
                stats = read_stats(ctx, dir);
            } else if ((err = read_error(ctx, dir)) != NULL) {
                const cJSON *m = cJSON_GetObjectItemCaseSensitive(err, "error");
                status = "failed";
                error = cJSON_IsString(m) ? m->valuestring : "unknown error";
            }
        }
        cnt[status[0] == 'd' ? 0 : status[0] == 'f' ? 1 : 2]++;
        cJSON_AddStringToObject(o, "status", status);
        if (!strcmp(status, "done"))
            cJSON_AddStringToObject(o, "key", key);
        if (error)
            cJSON_AddStringToObject(o, "error", error);
        if (stats)
            cJSON_AddItemToObject(o, "stats", stats);
        cJSON_Delete(err);
    }
    return SINEW_OK;
}

/* A process killed while writing the manifest or the report page leaves its temporary
 * file behind; the next manifest writer (every whole run, --resume, --merge) removes
 * such leftovers (the output folder's lock lets only one whole run or merge step work
 * on it at a time). */
static void remove_stale_temporaries(sinew_ctx *ctx, const char *outdir)
{
    static const char *const prefix[] = {"." SINEW_RUN_MANIFEST_FILE SINEW__TMP_TAG,
                                         "." SINEW_RUN_REPORT_FILE SINEW__TMP_TAG,
                                         "." SINEW_RUN_OPTIONS_FILE SINEW__TMP_TAG};
    DIR *d = opendir(outdir);
    if (!d)
        return;
    struct dirent *e;
    char p[SINEW__PATH_MAX];
    while ((e = readdir(d)) != NULL)
        for (size_t k = 0; k < sizeof prefix / sizeof prefix[0]; k++)
            if (!strncmp(e->d_name, prefix[k], strlen(prefix[k])) &&
                !sinew__path_join(ctx, p, sizeof p, outdir, e->d_name))
                (void)unlink(p); /* unlink never follows a link */
    closedir(d);
    sinew_ctx_clear(ctx);
}

int sinew_run_write_manifest(sinew_run *run, int verify, size_t *ndone, size_t *nfailed,
                             size_t *npending)
{
    if (!run)
        return SINEW_EINVAL;
    sinew_ctx *ctx = sinew__run_ctx(run);
    const sinew_run_spec *s = sinew__run_spec(run);
    cJSON *root = cJSON_CreateObject();
    cJSON *inputs = cJSON_CreateArray(), *pairs = cJSON_CreateArray(), *sum = NULL;
    int rc = SINEW_ENOMEM;
    size_t cnt[3] = {0, 0, 0};
    if (!root || !inputs || !pairs) {
        cJSON_Delete(inputs);
        goto done;
    }
    cJSON_AddStringToObject(root, "format", "sinew run manifest 1");
    cJSON_AddStringToObject(root, "sinew_version", SINEW_VERSION_STRING);
    const char *opt = s->options ? s->options : "{}";
    cJSON *oj = cJSON_Parse(opt);
    if (oj)
        cJSON_AddItemToObject(root, "options", oj);
    else
        cJSON_AddStringToObject(root, "options", opt);
    cJSON_AddNumberToObject(root, "frames", (double)s->nframes);
    cJSON_AddItemToObject(root, "inputs", inputs);
    if (s->intrinsics && (rc = add_entry(ctx, inputs, "intrinsics", s->intrinsics)))
        goto done;
    for (size_t f = 0; f < s->nframes; f++) {
        const sinew_run_frame *fr = &s->frames[f];
        if ((rc = add_entry(ctx, inputs, "color", fr->color)) ||
            (fr->depth && (rc = add_entry(ctx, inputs, "depth", fr->depth))) ||
            (fr->labels && (rc = add_entry(ctx, inputs, "labels", fr->labels))) ||
            (fr->ignore && (rc = add_entry(ctx, inputs, "ignore", fr->ignore))))
            goto done;
    }
    rc = build_pairs(run, verify, pairs, inputs, cnt);
    sum = cJSON_CreateObject();
    if (rc || !sum) {
        rc = rc ? rc : SINEW_ENOMEM;
        goto done;
    }
    cJSON_AddNumberToObject(sum, "pairs", (double)s->npairs);
    cJSON_AddNumberToObject(sum, "done", (double)cnt[0]);
    cJSON_AddNumberToObject(sum, "failed", (double)cnt[1]);
    cJSON_AddNumberToObject(sum, "pending", (double)cnt[2]);
    cJSON_AddItemToObject(root, "summary", sum);
    sum = NULL;
    cJSON_AddItemToObject(root, "pairs", pairs);
    pairs = NULL;
    char p[SINEW__PATH_MAX];
    remove_stale_temporaries(ctx, s->outdir);
    rc = sinew__path_join(ctx, p, sizeof p, s->outdir, SINEW_RUN_MANIFEST_FILE);
    if (!rc)
        rc = sinew__json_write(ctx, p, root);
done:
    if (rc == SINEW_ENOMEM)
        sinew__fail(ctx, rc, "out of memory building the manifest");
    cJSON_Delete(pairs);
    cJSON_Delete(sum);
    cJSON_Delete(root);
    if (ndone)
        *ndone = cnt[0];
    if (nfailed)
        *nfailed = cnt[1];
    if (npending)
        *npending = cnt[2];
    return rc;
}
