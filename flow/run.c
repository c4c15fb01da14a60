/* SPDX-License-Identifier: MIT */
/* The run engine: resume, per-pair done records, error records, cancel.
 *
 * Invariants that make kills, shards and resumes safe:
 *  - a pair's files live only in OUTDIR/pairs/NAME and are written only by the shard
 *    that owns the pair (index % n == k);
 *  - every file is written under a temporary name, fsynced and renamed;
 *  - done.json is written last and names the pair key (SHA-256 of the sinew version,
 *    the options text, the pair and the digests of its input files) plus the size and
 *    digest of every output, so a resumed run trusts a pair only if all of it is
 *    there and was made from the same inputs and options;
 *  - before a pair is recomputed its folder is emptied, so stale files of older
 *    options never mix with new ones;
 *  - no output contains a time, host name or thread count, so a whole run, a sharded
 *    run and any resumed run produce the same bytes.
 * Input digests are cached per run (each input file is read once for hashing). */
#define _POSIX_C_SOURCE 200809L
#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <signal.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cJSON.h>

#include "flow/internal/base.h"
#include "flow/internal/run.h"
#include "flow/io.h"
#include "flow/run.h"

enum { ROLE_COLOR = 0, ROLE_DEPTH, ROLE_LABELS, ROLE_IGNORE, NROLES };
static const char *const role_name[NROLES] = {"color", "depth", "labels", "ignore"};

typedef struct {
    unsigned char digest[32];
    uint64_t bytes;
    unsigned char state; /* 0 unknown, 1 known */
} digest_entry;

struct sinew_run {
    sinew_ctx *ctx;
    char lock[SINEW__PATH_MAX]; /* our lock file, "" when none is held */
    sinew_run_spec spec;
    digest_entry *cache; /* nframes * NROLES */
    digest_entry intrinsics;
};

static cJSON *json_digest_entry(const char *key, const char *value, uint64_t bytes,
                                const unsigned char digest[32])
{
    char hex[65];
    sinew_sha256_hex(digest, hex);
    cJSON *o = cJSON_CreateObject();
    if (!o || !cJSON_AddStringToObject(o, key, value) ||
        !cJSON_AddNumberToObject(o, "bytes", (double)bytes) ||
        !cJSON_AddStringToObject(o, "sha256", hex)) {
        cJSON_Delete(o);
        return NULL;
    }
    return o;
}

/* ---- inputs and keys ---- */

static int digest_cached(sinew_run *run, digest_entry *e, const char *path)
{
    if (e->state)
        return SINEW_OK;
    int rc = sinew_sha256_file(run->ctx, e->digest, &e->bytes, path);
    if (rc)
        return rc;
    e->state = 1;
    return SINEW_OK;
}

int sinew__run_pair_inputs(sinew_run *run, size_t index, sinew__input *in, size_t *nin, char *fwd,
                           char *bwd, size_t pathn)
{
    const sinew_run_spec *s = &run->spec;
    sinew_pair p = s->pairs[index];
    size_t n = 0;
    int rc;
    static const char *const end_name[2] = {"0", "1"};
    for (int r = 0; r < NROLES; r++)
        for (int end = 0; end < 2; end++) {
            int32_t f = end ? p.j : p.i;
            const sinew_run_frame *fr = &s->frames[f];
            const char *path = r == ROLE_COLOR    ? fr->color
                               : r == ROLE_DEPTH  ? fr->depth
                               : r == ROLE_LABELS ? fr->labels
                                                  : fr->ignore;
            /* only the first frame's ignore mask shapes the pair (the forward check) */
            if (!path || (r == ROLE_IGNORE && end == 1))
                continue;
            digest_entry *e = &run->cache[(size_t)f * NROLES + (size_t)r];
            if ((rc = digest_cached(run, e, path)))
                return rc;
            in[n].path = path;
            snprintf(in[n].role, sizeof in[n].role, "%s%s", role_name[r], end_name[end]);
            memcpy(in[n].digest, e->digest, 32);
            in[n].bytes = e->bytes;
            n++;
        }
    if (s->intrinsics) {
        if ((rc = digest_cached(run, &run->intrinsics, s->intrinsics)))
            return rc;
        in[n].path = s->intrinsics;
        snprintf(in[n].role, sizeof in[n].role, "intrinsics");
        memcpy(in[n].digest, run->intrinsics.digest, 32);
        in[n].bytes = run->intrinsics.bytes;
        n++;
    }
    if (s->flow_from) {
        char name[SINEW_PAIR_NAME_MAX];
        sinew_pair_name(name, p);
        if ((rc = sinew_run_find_import(run->ctx, fwd, bwd, pathn, s->flow_from, name)))
            return rc;
        const char *paths[2] = {fwd, bwd};
        const char *roles[2] = {"flow_forward", "flow_backward"};
        for (int k = 0; k < 2; k++) {
            if ((rc = sinew_sha256_file(run->ctx, in[n].digest, &in[n].bytes, paths[k])))
                return rc;
            in[n].path = paths[k];
            snprintf(in[n].role, sizeof in[n].role, "%s", roles[k]);
            n++;
        }
    }
    *nin = n;
    return SINEW_OK;
}

void sinew__run_pair_key(const sinew_run *run, size_t index, const sinew__input *in, size_t nin,
                         char hex[65])
{
    char name[SINEW_PAIR_NAME_MAX], line[160];
    sinew_pair_name(name, run->spec.pairs[index]);
    sinew_sha256 s;
    sinew_sha256_init(&s);
    int w = snprintf(line, sizeof line, "sinew-pair-key 1\nversion %s\npair %s\noptions ",
                     SINEW_VERSION_STRING, name);
    sinew_sha256_update(&s, line, (size_t)w);
    const char *opt = run->spec.options ? run->spec.options : "";
    sinew_sha256_update(&s, opt, strlen(opt));
    sinew_sha256_update(&s, "\n", 1);
    for (int end = 0; run->spec.poses_in_key && end < 2; end++) {
        const sinew_run_frame *f =
            &run->spec.frames[end ? run->spec.pairs[index].j : run->spec.pairs[index].i];
        w = snprintf(line, sizeof line, "pose%d", end);
        sinew_sha256_update(&s, line, (size_t)w);
        for (int k = 0; k < 12 && f->has_pose; k++) {
            w = snprintf(line, sizeof line, " %.17g", f->pose[k]);
            sinew_sha256_update(&s, line, (size_t)w);
        }
        sinew_sha256_update(&s, f->has_pose ? "\n" : " none\n", f->has_pose ? 1 : 6);
    }
    for (size_t k = 0; k < nin; k++) {
        char h[65];
        sinew_sha256_hex(in[k].digest, h);
        w = snprintf(line, sizeof line, "input %s %s %llu\n", in[k].role, h,
                     (unsigned long long)in[k].bytes);
        sinew_sha256_update(&s, line, (size_t)w);
    }
    unsigned char d[32];
    sinew_sha256_final(&s, d);
    sinew_sha256_hex(d, hex);
}

int sinew__run_pair_dir(sinew_run *run, size_t index, char *buf, size_t n)
{
    char name[SINEW_PAIR_NAME_MAX], rel[SINEW_PAIR_NAME_MAX + 8];
    sinew_pair_name(name, run->spec.pairs[index]);
    snprintf(rel, sizeof rel, SINEW_RUN_PAIRS_DIR "/%s", name);
    return sinew__path_join(run->ctx, buf, n, run->spec.outdir, rel);
}

/* ---- the output folder's lock ---- */

/* A lock file OUTDIR/run.lock (whole runs and merges) or OUTDIR/run.lock.K-of-N (shard
 * K of N) holds "pid PID\nhost HOST\n". Shards of one N may work side by side; every
 * other pair of holders excludes each other. A lock whose holder is a process of this
 * host that no longer exists is stale and removed. */
#define LOCK_PREFIX SINEW_RUN_LOCK_FILE

typedef struct {
    long pid;
    char host[256];
    int k, n; /* shard; n = 1 for a whole run */
} lock_info;

static int lock_name(char *buf, size_t n, int k, int shards)
{
    int w = shards == 1 ? snprintf(buf, n, LOCK_PREFIX)
                        : snprintf(buf, n, LOCK_PREFIX ".%d-of-%d", k, shards);
    return w < 0 || (size_t)w >= n;
}

/* Parse a lock file name and content; 0 when it is not a lock of ours. */
static int lock_read(sinew_ctx *ctx, const char *dir, const char *name, lock_info *li)
{
    memset(li, 0, sizeof *li);
    li->n = 1;
    if (strncmp(name, LOCK_PREFIX, sizeof LOCK_PREFIX - 1))
        return 0;
    const char *rest = name + sizeof LOCK_PREFIX - 1;
    char tail[8];
    if (*rest && (sscanf(rest, ".%d-of-%d%1s", &li->k, &li->n, tail) != 2 || li->n < 2))
        return 0;
    char p[SINEW__PATH_MAX];
    unsigned char *buf = NULL;
    size_t len;
    if (!sinew__path_join(ctx, p, sizeof p, dir, name) &&
        !sinew_read_file(ctx, &buf, &len, p, 4096) &&
        sscanf((const char *)buf, "pid %ld host %255s", &li->pid, li->host) != 2)
        li->pid = 0;
    sinew_ctx_dealloc(ctx, buf);
    sinew_ctx_clear(ctx);
    return 1;
}

static int lock_stale(const lock_info *li, const char *host)
{
    return li->pid > 0 && !strcmp(li->host, host) && kill((pid_t)li->pid, 0) != 0 && errno == ESRCH;
}

static int lock_conflict(sinew_ctx *ctx, const char *dir, const char *name, const lock_info *li)
{
    return sinew__fail(ctx, SINEW_ECONFIG,
                       "%s/%s: the output folder is in use by process %ld on host %s (%s); "
                       "wait for it, or remove the lock if that run is gone",
                       dir, name, li->pid, li->host[0] ? li->host : "unknown",
                       li->n > 1 ? "a shard" : "a whole run or merge");
}

/* Create the lock file p (named `name` in dir) holding text, so that it is never seen
 * half-written: the text goes into ".NAME.PID" beside it, which is then hard-linked
 * under the lock's name (link fails with EEXIST when the lock exists) and removed. A
 * process killed in between leaves only ".NAME.PID", which lock_acquire removes once
 * that process is gone. Returns 0 or an errno value. */
static int lock_create(const char *dir, const char *name, const char *p, const char *text,
                       size_t tlen)
{
    char tmp[SINEW__PATH_MAX];
    int w = snprintf(tmp, sizeof tmp, "%s/.%s.%ld", dir, name, (long)getpid());
    if (w < 0 || (size_t)w >= sizeof tmp)
        return ENAMETOOLONG;
    (void)unlink(tmp); /* our own pid: a leftover of an earlier process with it */
    int fd = open(tmp, O_WRONLY | O_CREAT | O_EXCL | O_NOFOLLOW | O_CLOEXEC, 0666);
    if (fd < 0)
        return errno;
    int ok = write(fd, text, tlen) == (ssize_t)tlen;
    ok = close(fd) == 0 && ok;
    int err = !ok ? EIO : link(tmp, p) != 0 ? errno : 0;
    (void)unlink(tmp);
    return err;
}

/* A lock's temporary ".NAMEPREFIX....PID" (see lock_create) whose process no longer
 * exists on this host. */
static int lock_temp_stale(const char *entry)
{
    if (entry[0] != '.' || strncmp(entry + 1, LOCK_PREFIX, sizeof LOCK_PREFIX - 1))
        return 0;
    const char *dot = strrchr(entry, '.');
    char *end;
    long pid = dot && dot > entry ? strtol(dot + 1, &end, 10) : 0;
    return pid > 0 && *end == '\0' && kill((pid_t)pid, 0) != 0 && errno == ESRCH;
}

static int lock_acquire(sinew_run *run)
{
    sinew_ctx *ctx = run->ctx;
    const sinew_run_spec *s = &run->spec;
    char host[256] = "", mine[64], p[SINEW__PATH_MAX], text[400];
    if (gethostname(host, sizeof host - 1) != 0 || !host[0])
        snprintf(host, sizeof host, "unknown");
    for (char *c = host; *c; c++)
        if (*c == ' ' || *c == '\n')
            *c = '_';
    if (lock_name(mine, sizeof mine, s->shard_k, s->shard_n) ||
        sinew__path_join(ctx, p, sizeof p, s->outdir, mine))
        return sinew__fail(ctx, SINEW_ELIMIT, "%s: path too long", s->outdir);
    int tlen = snprintf(text, sizeof text, "pid %ld\nhost %s\n", (long)getpid(), host);
    for (int attempt = 0;; attempt++) {
        int err = lock_create(s->outdir, mine, p, text, (size_t)tlen);
        if (!err)
            break;
        if (err != EEXIST)
            return sinew__fail(ctx, SINEW_EIO, "%s: cannot create: %s", p, strerror(err));
        lock_info li;
        (void)lock_read(ctx, s->outdir, mine, &li);
        if (attempt > 0 || !lock_stale(&li, host))
            return lock_conflict(ctx, s->outdir, mine, &li);
        unlink(p); /* stale: its holder is gone */
    }
    snprintf(run->lock, sizeof run->lock, "%s", p);
    /* the other holders: shards of the same N may share the folder */
    DIR *d = opendir(s->outdir);
    struct dirent *e;
    int rc = SINEW_OK;
    while (d && !rc && (e = readdir(d)) != NULL) {
        lock_info li;
        char q[SINEW__PATH_MAX];
        if (lock_temp_stale(e->d_name)) { /* left by a process killed taking its lock */
            if (!sinew__path_join(ctx, q, sizeof q, s->outdir, e->d_name))
                unlink(q);
            continue;
        }
        if (!strcmp(e->d_name, mine) || !lock_read(ctx, s->outdir, e->d_name, &li))
            continue;
        if (lock_stale(&li, host)) {
            if (!sinew__path_join(ctx, q, sizeof q, s->outdir, e->d_name))
                unlink(q);
            continue;
        }
        if (!(li.n > 1 && li.n == s->shard_n && li.k != s->shard_k))
            rc = lock_conflict(ctx, s->outdir, e->d_name, &li);
    }
    if (d)
        closedir(d);
    if (rc) {
        unlink(run->lock);
        run->lock[0] = '\0';
    }
    return rc;
}

const char *sinew_run_lock_path(const sinew_run *run)
{
    return run && run->lock[0] ? run->lock : NULL;
}

/* ---- setup ---- */

/* The spec's own consistency (limits, shard numbers, pairs in range, colour frames). */
static int spec_check(sinew_ctx *ctx, const sinew_run_spec *spec)
{
    if (spec->nframes > SINEW_RUN_MAX_FRAMES)
        return sinew__fail(ctx, SINEW_ELIMIT, "sequence has %zu frames, limit %d", spec->nframes,
                           SINEW_RUN_MAX_FRAMES);
    if (spec->npairs > SINEW_RUN_MAX_PAIRS)
        return sinew__fail(ctx, SINEW_ELIMIT, "schedule has %zu pairs, limit %d", spec->npairs,
                           SINEW_RUN_MAX_PAIRS);
    if (spec->shard_n < 1 || spec->shard_k < 0 || spec->shard_k >= spec->shard_n)
        return sinew__fail(ctx, SINEW_ECONFIG, "shard %d/%d: need 0 <= K < N", spec->shard_k,
                           spec->shard_n);
    for (size_t f = 0; f < spec->nframes; f++)
        if (!spec->frames[f].color)
            return sinew__fail(ctx, SINEW_ECONFIG, "frame %zu has no colour image", f);
    for (size_t q = 0; q < spec->npairs; q++) {
        sinew_pair p = spec->pairs[q];
        if (p.i < 0 || p.j < 0 || (size_t)p.i >= spec->nframes || (size_t)p.j >= spec->nframes ||
            p.i == p.j)
            return sinew__fail(ctx, SINEW_ECONFIG, "pair %zu (%d, %d) is out of range", q, (int)p.i,
                               (int)p.j);
    }
    return SINEW_OK;
}

/* A run object without folder or lock: the spec copied, the digest cache allocated. */
static int run_alloc(sinew_ctx *ctx, sinew_run **out, const sinew_run_spec *spec)
{
    sinew_run *run = sinew__calloc(ctx, 1, sizeof *run);
    if (!run)
        return SINEW_ENOMEM;
    run->ctx = ctx;
    run->spec = *spec;
    if (spec->nframes) {
        run->cache = sinew__calloc(ctx, spec->nframes, NROLES * sizeof *run->cache);
        if (!run->cache) {
            sinew__free(ctx, run);
            return SINEW_ENOMEM;
        }
    }
    *out = run;
    return SINEW_OK;
}

int sinew_run_new(sinew_ctx *ctx, sinew_run **out, const sinew_run_spec *spec)
{
    if (!ctx || !out || !spec || !spec->outdir || !*spec->outdir ||
        (spec->nframes && !spec->frames) || (spec->npairs && !spec->pairs))
        return SINEW_EINVAL;
    *out = NULL;
    int rc = spec_check(ctx, spec);
    if (!rc)
        rc = sinew__mkdirs(ctx, spec->outdir);
    char pairs[SINEW__PATH_MAX];
    if (!rc)
        rc = sinew__path_join(ctx, pairs, sizeof pairs, spec->outdir, SINEW_RUN_PAIRS_DIR);
    if (!rc)
        rc = sinew__mkdirs(ctx, pairs);
    if (!rc)
        rc = sinew__refuse_link(ctx, pairs);
    /* imported flows are inputs: the run would empty pair folders before reading them */
    if (!rc && spec->flow_from &&
        (sinew__path_inside(spec->flow_from, spec->outdir) ||
         sinew__path_inside(spec->outdir, spec->flow_from)))
        rc = sinew__fail(ctx, SINEW_ECONFIG,
                         "%s: the imported flows and the output folder %s overlap (outputs never "
                         "go onto or into an input); import from another folder",
                         spec->flow_from, spec->outdir);
    sinew_run *run = NULL;
    if (rc || (rc = run_alloc(ctx, &run, spec)))
        return rc;
    if ((rc = lock_acquire(run))) {
        sinew_run_free(run);
        return rc;
    }
    *out = run;
    return SINEW_OK;
}

void sinew_run_free(sinew_run *run)
{
    if (!run)
        return;
    sinew_ctx *ctx = run->ctx;
    if (run->lock[0])
        unlink(run->lock);
    sinew__free(ctx, run->cache);
    sinew__free(ctx, run);
}

const sinew_run_spec *sinew__run_spec(const sinew_run *run)
{
    return &run->spec;
}

sinew_ctx *sinew__run_ctx(const sinew_run *run)
{
    return run->ctx;
}

/* ---- pair folders ---- */

/* Whether sinew writes a file of this name into a pair folder: the names of run.h, a
 * flow in any of its formats, an output the folder's done record lists, or the
 * temporary ".NAME.tmp-HHHHHH" of one of those. */
static int lists(const cJSON *outs, const char *nm);

static int made_by_sinew(const sinew_run_spec *s, const char *nm, const cJSON *listed)
{
    char base[256];
    const char *t = nm[0] == '.' ? strstr(nm, SINEW__TMP_TAG) : NULL;
    if (t) {
        size_t bl = (size_t)(t - nm - 1);
        if (strlen(t) != strlen(SINEW__TMP_TAG) + 6 || bl == 0 || bl >= sizeof base)
            return 0;
        memcpy(base, nm + 1, bl);
        base[bl] = '\0';
        nm = base;
    }
    static const char *const fixed[] = {SINEW_RUN_DONE_FILE,       SINEW_RUN_ERROR_FILE,
                                        SINEW_RUN_STATS_FILE,      SINEW_RUN_MASK_FILE,
                                        SINEW_RUN_CONFIDENCE_FILE, SINEW_RUN_FB_ERROR_FILE,
                                        SINEW_RUN_MATCHES_FILE,    SINEW_RUN_MATCHES_SIDECAR};
    for (size_t k = 0; k < sizeof fixed / sizeof fixed[0]; k++)
        if (!strcmp(nm, fixed[k]))
            return 1;
    /* forward.EXT or backward.EXT, EXT of any flow format (the pipeline's table) */
    const char *dot = strrchr(nm, '.');
    size_t stem = dot ? (size_t)(dot - nm) : 0;
    if (dot && ((stem == strlen(SINEW_RUN_FORWARD) && !strncmp(nm, SINEW_RUN_FORWARD, stem)) ||
                (stem == strlen(SINEW_RUN_BACKWARD) && !strncmp(nm, SINEW_RUN_BACKWARD, stem))))
        for (int f = SINEW_FLOW_AUTO + 1; sinew_flow_format_ext(f); f++)
            if (!strcmp(dot + 1, sinew_flow_format_ext(f)))
                return 1;
    for (size_t k = 0; k < s->noutputs; k++)
        if (!strcmp(nm, s->outputs[k]))
            return 1;
    return lists(listed, nm);
}

/* Empty a pair folder of what sinew made there (outputs, records, stale temporaries).
 * Never follows a link: the folder is opened with O_NOFOLLOW and its entries removed
 * relative to it (a link named like an output is removed itself, not its target). A
 * file sinew did not make stays, and is reported (after everything else is removed). */
static int empty_dir(sinew_run *run, sinew_ctx *ctx, const char *dir)
{
    int fd = open(dir, O_RDONLY | O_DIRECTORY | O_NOFOLLOW | O_CLOEXEC);
    if (fd < 0)
        return sinew__fail(ctx, SINEW_EIO, "%s: cannot open folder%s: %s", dir,
                           errno == ELOOP || errno == ENOTDIR ? " (a link is never followed)" : "",
                           strerror(errno));
    DIR *d = fdopendir(fd);
    if (!d) {
        close(fd);
        return sinew__fail(ctx, SINEW_EIO, "%s: cannot open folder: %s", dir, strerror(errno));
    }
    cJSON *done = NULL;
    char p[SINEW__PATH_MAX];
    if (!sinew__path_join(ctx, p, sizeof p, dir, SINEW_RUN_DONE_FILE))
        (void)sinew__json_read(ctx, p, (size_t)64 << 20, &done);
    sinew_ctx_clear(ctx);
    const cJSON *listed = cJSON_GetObjectItemCaseSensitive(done, "outputs");
    struct dirent *e;
    int rc = SINEW_OK, foreign = 0;
    char first[256] = "";
    while ((e = readdir(d)) != NULL) {
        if (!strcmp(e->d_name, ".") || !strcmp(e->d_name, ".."))
            continue;
        struct stat st;
        if (fstatat(fd, e->d_name, &st, AT_SYMLINK_NOFOLLOW) != 0 ||
            !(S_ISREG(st.st_mode) || S_ISLNK(st.st_mode)) ||
            !made_by_sinew(&run->spec, e->d_name, listed)) {
            if (!foreign++)
                snprintf(first, sizeof first, "%s", e->d_name);
            continue;
        }
        if (unlinkat(fd, e->d_name, 0) != 0 && errno != ENOENT) {
            rc = sinew__fail(ctx, SINEW_EIO, "%s/%s: cannot remove: %s", dir, e->d_name,
                             strerror(errno));
            break;
        }
    }
    closedir(d);
    cJSON_Delete(done);
    if (!rc && foreign)
        rc = sinew__fail(ctx, SINEW_ECONFIG,
                         "%s/%s: not made by sinew (%d such entr%s): sinew never deletes it; "
                         "move it away to recompute this pair",
                         dir, first, foreign, foreign == 1 ? "y" : "ies");
    return rc;
}

/* The pair's outputs: regular files other than the records and temporaries. */
static int is_output(const char *nm)
{
    return nm[0] != '.' && strcmp(nm, SINEW_RUN_DONE_FILE) && strcmp(nm, SINEW_RUN_ERROR_FILE);
}

static cJSON *record_head(const sinew_run *run, size_t index, const char *name)
{
    sinew_pair p = run->spec.pairs[index];
    cJSON *o = cJSON_CreateObject();
    cJSON *fr = cJSON_CreateArray();
    if (!o || !fr || !cJSON_AddStringToObject(o, "pair", name)) {
        cJSON_Delete(o);
        cJSON_Delete(fr);
        return NULL;
    }
    cJSON_AddItemToObject(o, "frames", fr);
    cJSON_AddItemToArray(fr, cJSON_CreateNumber(p.i));
    cJSON_AddItemToArray(fr, cJSON_CreateNumber(p.j));
    return o;
}

static int write_error_record(sinew_run *run, sinew_ctx *ctx, size_t index, const char *name,
                              const char *dir, const char *message)
{
    cJSON *o = record_head(run, index, name);
    if (!o || !cJSON_AddStringToObject(o, "status", "failed") ||
        !cJSON_AddStringToObject(o, "error", message)) {
        cJSON_Delete(o);
        return sinew__fail(ctx, SINEW_ENOMEM, "out of memory");
    }
    char p[SINEW__PATH_MAX];
    int rc = sinew__path_join(ctx, p, sizeof p, dir, SINEW_RUN_ERROR_FILE);
    if (!rc)
        rc = sinew__json_write(ctx, p, o);
    cJSON_Delete(o);
    return rc;
}

static int write_done_record(sinew_run *run, sinew_ctx *ctx, size_t index, const char *name,
                             const char *dir, const char *key, const sinew__input *in, size_t nin)
{
    char **names = NULL;
    size_t nn = 0;
    /* sorted by name (byte order) so the done record is deterministic */
    int rc = sinew__list_dir(ctx, dir, is_output, 0, SIZE_MAX, &names, &nn);
    cJSON *o = NULL;
    if (rc)
        goto done;
    o = record_head(run, index, name);
    cJSON *ins = cJSON_CreateArray(), *outs = cJSON_CreateArray();
    if (!o || !ins || !outs) {
        cJSON_Delete(ins);
        cJSON_Delete(outs);
        rc = sinew__fail(ctx, SINEW_ENOMEM, "out of memory");
        goto done;
    }
    cJSON_AddStringToObject(o, "key", key);
    cJSON_AddStringToObject(o, "sinew_version", SINEW_VERSION_STRING);
    cJSON_AddItemToObject(o, "inputs", ins);
    cJSON_AddItemToObject(o, "outputs", outs);
    for (size_t k = 0; k < nin; k++) {
        cJSON *e = json_digest_entry("role", in[k].role, in[k].bytes, in[k].digest);
        if (!e || !cJSON_AddStringToObject(e, "path", in[k].path)) {
            cJSON_Delete(e);
            rc = sinew__fail(ctx, SINEW_ENOMEM, "out of memory");
            goto done;
        }
        cJSON_AddItemToArray(ins, e);
    }
    for (size_t k = 0; k < nn; k++) {
        char p[SINEW__PATH_MAX];
        unsigned char d[32];
        uint64_t bytes;
        if ((rc = sinew__path_join(ctx, p, sizeof p, dir, names[k])) ||
            (rc = sinew_sha256_file(ctx, d, &bytes, p)))
            goto done;
        cJSON *e = json_digest_entry("file", names[k], bytes, d);
        if (!e) {
            rc = sinew__fail(ctx, SINEW_ENOMEM, "out of memory");
            goto done;
        }
        cJSON_AddItemToArray(outs, e);
    }
    char p[SINEW__PATH_MAX];
    if (!(rc = sinew__path_join(ctx, p, sizeof p, dir, SINEW_RUN_DONE_FILE)))
        rc = sinew__json_write(ctx, p, o);
done:
    cJSON_Delete(o);
    sinew__free_names(ctx, names, nn);
    return rc;
}

/* Whether a done record's "outputs" array names file nm. */
static int lists(const cJSON *outs, const char *nm)
{
    const cJSON *e;
    cJSON_ArrayForEach(e, outs)
    {
        const cJSON *f = cJSON_GetObjectItemCaseSensitive(e, "file");
        if (cJSON_IsString(f) && !strcmp(f->valuestring, nm))
            return 1;
    }
    return 0;
}

int sinew__run_record_status(sinew_run *run, const char *dir, const char *key, int verify,
                             cJSON **record)
{
    sinew_ctx *ctx = run->ctx;
    if (record)
        *record = NULL;
    char p[SINEW__PATH_MAX];
    if (sinew__path_join(ctx, p, sizeof p, dir, SINEW_RUN_DONE_FILE))
        return SINEW_PAIR_PENDING;
    struct stat st;
    if (stat(p, &st) != 0)
        return SINEW_PAIR_PENDING;
    cJSON *j = NULL;
    if (sinew__json_read(ctx, p, (size_t)64 << 20, &j))
        return SINEW_PAIR_PENDING;
    const cJSON *k = cJSON_GetObjectItemCaseSensitive(j, "key");
    const cJSON *outs = cJSON_GetObjectItemCaseSensitive(j, "outputs");
    int ok = cJSON_IsString(k) && !strcmp(k->valuestring, key) && cJSON_IsArray(outs);
    /* every expected output must be listed (a record written beside a partial folder,
     * e.g. by an interleaved second run, lists fewer) */
    ok = ok && lists(outs, SINEW_RUN_STATS_FILE);
    for (size_t x = 0; ok && x < run->spec.noutputs; x++)
        ok = lists(outs, run->spec.outputs[x]);
    const cJSON *e;
    cJSON_ArrayForEach(e, outs)
    {
        if (!ok || !verify)
            break;
        const cJSON *f = cJSON_GetObjectItemCaseSensitive(e, "file");
        const cJSON *b = cJSON_GetObjectItemCaseSensitive(e, "bytes");
        const cJSON *h = cJSON_GetObjectItemCaseSensitive(e, "sha256");
        char fp[SINEW__PATH_MAX], hex[65];
        unsigned char d[32];
        uint64_t bytes;
        ok = cJSON_IsString(f) && cJSON_IsNumber(b) && cJSON_IsString(h) &&
             !strchr(f->valuestring, '/') &&
             !sinew__path_join(ctx, fp, sizeof fp, dir, f->valuestring) && stat(fp, &st) == 0 &&
             (double)st.st_size == b->valuedouble && !sinew_sha256_file(ctx, d, &bytes, fp);
        if (ok) {
            sinew_sha256_hex(d, hex);
            ok = !strcmp(hex, h->valuestring);
        }
    }
    sinew_ctx_clear(ctx);
    if (ok && record)
        *record = j;
    else
        cJSON_Delete(j);
    return ok ? SINEW_PAIR_SKIPPED : SINEW_PAIR_PENDING;
}

/* ---- execution ---- */

/* One pair on its way through the engine: prepared on the calling thread (folder,
 * input digests from the run's cache, key, resume check), computed on the calling
 * thread or a worker (folder emptied, fn, stats.json, done.json; on failure the error
 * record), committed in schedule order on the calling thread (counts, progress). */
typedef struct pair_work {
    size_t q;
    sinew_pair_status st;
    int rc;
    char name[SINEW_PAIR_NAME_MAX], key[65];
    char dir[SINEW__PATH_MAX], fwd[SINEW__PATH_MAX], bwd[SINEW__PATH_MAX];
    sinew__input in[SINEW__MAX_INPUTS];
    size_t nin;
    char msg[SINEW_MESSAGE_MAX];
} pair_work;

/* Folder, inputs, key and resume status of pair q (run->ctx: the digest cache is not
 * shared with workers). st = SKIPPED when it is done and up to date. */
static int pair_prepare(sinew_run *run, size_t q, pair_work *w)
{
    sinew_ctx *ctx = run->ctx;
    const sinew_run_spec *s = &run->spec;
    w->q = q;
    w->st = SINEW_PAIR_COMPUTED;
    w->nin = 0;
    w->msg[0] = '\0';
    sinew_pair_name(w->name, s->pairs[q]);
    int rc = sinew__run_pair_dir(run, q, w->dir, sizeof w->dir);
    if (!rc)
        rc = sinew__mkdirs(ctx, w->dir);
    if (!rc)
        rc = sinew__refuse_link(ctx, w->dir);
    if (!rc)
        rc = sinew__run_pair_inputs(run, q, w->in, &w->nin, w->fwd, w->bwd, sizeof w->fwd);
    if (!rc) {
        sinew__run_pair_key(run, q, w->in, w->nin, w->key);
        if (s->resume &&
            sinew__run_record_status(run, w->dir, w->key, 1, NULL) == SINEW_PAIR_SKIPPED)
            w->st = SINEW_PAIR_SKIPPED;
        /* a verification cut short by a stop request proves nothing: keep the folder */
        rc = sinew__check_cancel(ctx, w->dir);
    }
    return rc;
}

/* Empty the folder, run fn, write stats.json and done.json last, on ctx. */
static int pair_compute(sinew_run *run, sinew_ctx *ctx, sinew_run_pair_fn fn, void *ud,
                        pair_work *w)
{
    const sinew_run_spec *s = &run->spec;
    int rc = empty_dir(run, ctx, w->dir);
    if (rc)
        return rc;
    sinew_run_job job = {w->q,
                         s->pairs[w->q],
                         w->name,
                         w->dir,
                         s->flow_from ? w->fwd : NULL,
                         s->flow_from ? w->bwd : NULL};
    char *stats = NULL;
    rc = fn(ud, ctx, &job, &stats);
    if (!rc && !stats)
        rc = sinew__fail(ctx, SINEW_EINTERNAL, "%s: pair function gave no stats", w->name);
    char sp[SINEW__PATH_MAX];
    if (!rc && !(rc = sinew__path_join(ctx, sp, sizeof sp, w->dir, SINEW_RUN_STATS_FILE)))
        rc = sinew_write_json_text(ctx, sp, stats); /* valid UTF-8, final newline */
    sinew_ctx_dealloc(ctx, stats);
    if (!rc)
        rc = write_done_record(run, ctx, w->q, w->name, w->dir, w->key, w->in, w->nin);
    return rc;
}

/* After pair_prepare or pair_compute returned rc on ctx: a failure (not a stop request)
 * keeps its message and leaves only the error record in the folder. */
static void pair_settle(sinew_run *run, sinew_ctx *ctx, pair_work *w, int rc)
{
    w->rc = rc;
    if (!rc || rc == SINEW_EINTERRUPTED)
        return;
    w->st = SINEW_PAIR_FAILED;
    snprintf(w->msg, sizeof w->msg, "%s",
             sinew_ctx_message(ctx)[0] ? sinew_ctx_message(ctx) : sinew_strerror(rc));
    /* outputs of a failed pair are not results; never in a linked folder (lstat: a
     * link is not a folder) */
    struct stat dst;
    if (lstat(w->dir, &dst) == 0 && S_ISDIR(dst.st_mode)) {
        (void)empty_dir(run, ctx, w->dir);
        (void)write_error_record(run, ctx, w->q, w->name, w->dir, w->msg);
    }
}

/* Count a settled pair and report it; 1 when the run must stop after it. */
static int pair_commit(sinew_run *run, const pair_work *w, sinew_run_progress_fn progress,
                       void *progress_ud, sinew_run_result *result, char *first_msg)
{
    if (w->rc == SINEW_EINTERRUPTED) {
        /* stopped inside the pair (hashing, estimating): not a failure of the pair;
         * whatever it left has no done record and is emptied when the pair is next
         * computed */
        result->interrupted = 1;
        return 1;
    }
    if (w->st == SINEW_PAIR_FAILED) {
        if (!result->status) {
            result->status = w->rc;
            snprintf(first_msg, SINEW_MESSAGE_MAX, "%s", w->msg);
        }
        result->failed++;
    } else if (w->st == SINEW_PAIR_SKIPPED) {
        result->skipped++;
    } else {
        result->computed++;
    }
    if (progress) {
        sinew_run_progress pr = {result->total,
                                 result->computed + result->skipped + result->failed,
                                 result->computed,
                                 result->skipped,
                                 result->failed,
                                 w->q,
                                 w->name,
                                 w->st,
                                 w->msg};
        progress(progress_ud, &pr);
    }
    return w->st == SINEW_PAIR_FAILED && run->spec.on_error == SINEW_RUN_STOP;
}

static int stop_requested(const sinew_run *run)
{
    return sinew_ctx_cancelled(run->ctx);
}

/* ---- workers: `jobs` pairs at once ---- */

enum { SLOT_FREE = 0, SLOT_GIVEN, SLOT_DONE, SLOT_QUIT };

typedef struct worker worker;
typedef struct pool {
    sinew_run *run;
    sinew_run_pair_fn fn;
    pthread_mutex_t mu;
    pthread_cond_t work, done;
    worker *w;
    int n;
} pool;

struct worker {
    pool *pl;
    sinew_ctx *ctx;
    void *ud;
    pthread_t tid;
    int started;
    int state;      /* SLOT_*, under pl->mu */
    pair_work *job; /* the pair given to this worker */
};

static void *worker_main(void *arg)
{
    worker *w = arg;
    pool *pl = w->pl;
    for (;;) {
        pthread_mutex_lock(&pl->mu);
        while (w->state != SLOT_GIVEN && w->state != SLOT_QUIT)
            pthread_cond_wait(&pl->work, &pl->mu);
        int quit = w->state == SLOT_QUIT;
        pthread_mutex_unlock(&pl->mu);
        if (quit)
            return NULL;
        sinew_ctx_clear(w->ctx);
        int rc = pair_compute(pl->run, w->ctx, pl->fn, w->ud, w->job);
        pair_settle(pl->run, w->ctx, w->job, rc);
        pthread_mutex_lock(&pl->mu);
        w->state = SLOT_DONE;
        pthread_cond_signal(&pl->done);
        pthread_mutex_unlock(&pl->mu);
    }
}

/* The dispatcher: prepares owned pairs in schedule order on this thread, hands each to
 * a free worker, and commits settled pairs in schedule order, so progress, counts and
 * the first failure are those of a one-job run (with stop-on-error, pairs already
 * running when an earlier one fails still finish and are counted). */
static int execute_jobs(sinew_run *run, int jobs, sinew_ctx *const *ctxs, sinew_run_pair_fn fn,
                        void *const *uds, sinew_run_progress_fn progress, void *progress_ud,
                        sinew_run_result *result, char *first_msg)
{
    sinew_ctx *ctx = run->ctx;
    const sinew_run_spec *s = &run->spec;
    /* ring of prepared, not yet committed pairs in schedule order: at most one per worker
     * plus the ones that need no worker (skipped, failed while preparing) */
    size_t cap = (size_t)jobs * 4 + 4;
    pair_work *ring = sinew__calloc(ctx, cap, sizeof *ring);
    worker *ws = sinew__calloc(ctx, (size_t)jobs, sizeof *ws);
    unsigned char *ready = sinew__calloc(ctx, cap, 1);
    if (!ring || !ws || !ready) {
        sinew__free(ctx, ring);
        sinew__free(ctx, ws);
        sinew__free(ctx, ready);
        return SINEW_ENOMEM;
    }
    pool pl = {
        run, fn,  PTHREAD_MUTEX_INITIALIZER, PTHREAD_COND_INITIALIZER, PTHREAD_COND_INITIALIZER,
        ws,  jobs};
    int rc = SINEW_OK;
    for (int k = 0; k < jobs; k++) {
        ws[k] = (worker){&pl, ctxs[k], uds[k], 0, 0, SLOT_FREE, NULL};
        if (pthread_create(&ws[k].tid, NULL, worker_main, &ws[k]) != 0) {
            rc = sinew__fail(ctx, SINEW_ENOMEM, "cannot start worker thread %d of %d", k + 1, jobs);
            break;
        }
        ws[k].started = 1;
    }
    size_t head = 0, tail = 0; /* ring[head % cap .. tail % cap): uncommitted, in order */
    size_t next = 0;
    int stop = rc != SINEW_OK, busy = 0;
    for (;;) {
        /* collect settled pairs; find a free worker */
        int idle = -1;
        pthread_mutex_lock(&pl.mu);
        for (int k = 0; k < jobs; k++) {
            if (ws[k].state == SLOT_DONE) {
                ready[(size_t)(ws[k].job - ring)] = 1;
                ws[k].state = SLOT_FREE;
                busy--;
            }
            if (ws[k].state == SLOT_FREE && idle < 0)
                idle = k;
        }
        pthread_mutex_unlock(&pl.mu);
        /* commit in schedule order (pairs already running when the run stopped are
         * counted too: their folders are complete) */
        for (; head < tail && ready[head % cap]; head++)
            if (pair_commit(run, &ring[head % cap], progress, progress_ud, result, first_msg))
                stop = 1;
        while (!stop && next < s->npairs && !sinew_shard_owns(next, s->shard_k, s->shard_n))
            next++;
        if (!stop && next < s->npairs && stop_requested(run)) {
            result->interrupted = 1;
            stop = 1;
        }
        int more = !stop && next < s->npairs;
        if (!more && busy == 0 && head == tail)
            break;
        if (more && idle >= 0 && tail - head < cap) {
            pair_work *w = &ring[tail % cap];
            ready[tail % cap] = 0;
            int prc = pair_prepare(run, next++, w);
            if (prc || w->st == SINEW_PAIR_SKIPPED) {
                pair_settle(run, ctx, w, prc);
                ready[tail % cap] = 1;
            } else {
                pthread_mutex_lock(&pl.mu);
                ws[idle].job = w;
                ws[idle].state = SLOT_GIVEN;
                busy++;
                pthread_cond_broadcast(&pl.work);
                pthread_mutex_unlock(&pl.mu);
            }
            tail++;
            continue;
        }
        /* wait for a worker to finish */
        pthread_mutex_lock(&pl.mu);
        int any = 0;
        for (int k = 0; k < jobs; k++)
            any |= ws[k].state == SLOT_DONE;
        if (!any && busy > 0)
            pthread_cond_wait(&pl.done, &pl.mu);
        pthread_mutex_unlock(&pl.mu);
    }
    pthread_mutex_lock(&pl.mu);
    for (int k = 0; k < jobs; k++)
        ws[k].state = SLOT_QUIT;
    pthread_cond_broadcast(&pl.work);
    pthread_mutex_unlock(&pl.mu);
    for (int k = 0; k < jobs; k++)
        if (ws[k].started)
            pthread_join(ws[k].tid, NULL);
    pthread_mutex_destroy(&pl.mu);
    pthread_cond_destroy(&pl.work);
    pthread_cond_destroy(&pl.done);
    sinew__free(ctx, ring);
    sinew__free(ctx, ws);
    sinew__free(ctx, ready);
    return rc;
}

int sinew_run_execute_jobs(sinew_run *run, int jobs, sinew_ctx *const *ctxs, sinew_run_pair_fn fn,
                           void *const *fn_uds, sinew_run_progress_fn progress, void *progress_ud,
                           sinew_run_result *result)
{
    if (result)
        memset(result, 0, sizeof *result);
    if (!run || !fn || !result || jobs < 1 || jobs > SINEW_RUN_MAX_JOBS ||
        (jobs > 1 && (!ctxs || !fn_uds)))
        return SINEW_EINVAL;
    for (int k = 0; jobs > 1 && k < jobs; k++)
        if (!ctxs[k] || ctxs[k] == run->ctx)
            return SINEW_EINVAL;
    sinew_ctx *ctx = run->ctx;
    const sinew_run_spec *s = &run->spec;
    for (size_t q = 0; q < s->npairs; q++)
        if (sinew_shard_owns(q, s->shard_k, s->shard_n))
            result->total++;
    char first_msg[SINEW_MESSAGE_MAX] = "";
    if (jobs > 1) {
        int rc =
            execute_jobs(run, jobs, ctxs, fn, fn_uds, progress, progress_ud, result, first_msg);
        if (rc)
            return rc;
    } else {
        pair_work *w = sinew__alloc(ctx, sizeof *w);
        if (!w)
            return SINEW_ENOMEM;
        for (size_t q = 0; q < s->npairs; q++) {
            if (!sinew_shard_owns(q, s->shard_k, s->shard_n))
                continue;
            if (stop_requested(run)) {
                result->interrupted = 1;
                break;
            }
            int rc = pair_prepare(run, q, w);
            if (!rc && w->st == SINEW_PAIR_COMPUTED)
                rc = pair_compute(run, ctx, fn, fn_uds ? fn_uds[0] : NULL, w);
            pair_settle(run, ctx, w, rc);
            if (pair_commit(run, w, progress, progress_ud, result, first_msg))
                break;
        }
        sinew__free(ctx, w);
    }
    if (result->status) {
        sinew__fail(ctx, result->status, "%s", first_msg);
        return result->status;
    }
    if (result->interrupted)
        return sinew__fail(ctx, SINEW_EINTERRUPTED, "interrupted: %zu of %zu pairs finished",
                           result->computed + result->skipped, result->total);
    return SINEW_OK;
}

int sinew_run_execute(sinew_run *run, sinew_run_pair_fn fn, void *fn_ud,
                      sinew_run_progress_fn progress, void *progress_ud, sinew_run_result *result)
{
    return sinew_run_execute_jobs(run, 1, NULL, fn, &fn_ud, progress, progress_ud, result);
}

int sinew_run_peek(sinew_ctx *ctx, sinew_pair_status *status, size_t *ndone,
                   const sinew_run_spec *spec)
{
    if (!ctx || !status || !spec || !spec->outdir || !*spec->outdir ||
        (spec->nframes && !spec->frames) || (spec->npairs && !spec->pairs))
        return SINEW_EINVAL;
    if (ndone)
        *ndone = 0;
    for (size_t q = 0; q < spec->npairs; q++)
        status[q] = SINEW_PAIR_PENDING;
    sinew_run *run = NULL;
    int rc = spec_check(ctx, spec);
    if (rc || (rc = run_alloc(ctx, &run, spec)))
        return rc;
    for (size_t q = 0; !rc && q < spec->npairs; q++) {
        if (!sinew_shard_owns(q, spec->shard_k, spec->shard_n))
            continue;
        char dir[SINEW__PATH_MAX], fwd[SINEW__PATH_MAX], bwd[SINEW__PATH_MAX], key[65];
        sinew__input in[SINEW__MAX_INPUTS];
        size_t nin = 0;
        /* an input that cannot be hashed leaves the pair pending (the run fails there) */
        if (!sinew__run_pair_dir(run, q, dir, sizeof dir) &&
            !sinew__run_pair_inputs(run, q, in, &nin, fwd, bwd, sizeof fwd)) {
            sinew__run_pair_key(run, q, in, nin, key);
            status[q] = (sinew_pair_status)sinew__run_record_status(run, dir, key, 1, NULL);
        }
        rc = sinew__check_cancel(ctx, spec->outdir);
        if (!rc)
            sinew_ctx_clear(ctx);
        if (!rc && ndone && status[q] == SINEW_PAIR_SKIPPED)
            (*ndone)++;
    }
    sinew_run_free(run);
    return rc;
}

int sinew_run_find_import(sinew_ctx *ctx, char *fwd, char *bwd, size_t n, const char *dir,
                          const char *name)
{
    if (!ctx || !dir || !name || !fwd || !bwd)
        return SINEW_EINVAL;
    char *out[2] = {fwd, bwd};
    static const char *const base[2] = {SINEW_RUN_FORWARD, SINEW_RUN_BACKWARD};
    for (int k = 0; k < 2; k++) {
        char stem[4200];
        int w = snprintf(stem, sizeof stem, "%s/%s/%s", dir, name, base[k]);
        int found = w < 0 || (size_t)w >= sizeof stem ? -1 : sinew_flow_find(stem, out[k], n);
        if (found < 0)
            return sinew__fail(ctx, SINEW_ELIMIT, "%s/%s: path too long", dir, name);
        if (!found)
            return sinew__fail(ctx, SINEW_EIO,
                               "%s: imported flow not found (also tried .npy, .pfm, .png)", out[k]);
    }
    return SINEW_OK;
}
