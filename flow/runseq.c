/* SPDX-License-Identifier: MIT */
/* Sequences from a plain folder: the default layout (color/, depth/, labels/,
 * intrinsics.json) or timestamped lists (rgb.txt, depth.txt) associated by nearest
 * time within a tolerance. Produces the frame list the run engine takes. */
#define _POSIX_C_SOURCE 200809L
#include <ctype.h>
#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>

#include "flow/internal/base.h"
#include "flow/internal/run.h"
#include "flow/rigid.h"
#include "flow/run.h"

static int is_file(const char *p)
{
    struct stat st;
    return stat(p, &st) == 0 && S_ISREG(st.st_mode);
}

static int is_dir(const char *p)
{
    struct stat st;
    return stat(p, &st) == 0 && S_ISDIR(st.st_mode);
}

/* dir/name is a folder (paths too long count as absent). */
static int is_dir_in(const char *dir, const char *name)
{
    char p[SINEW__PATH_MAX];
    return (size_t)snprintf(p, sizeof p, "%s/%s", dir, name) < sizeof p && is_dir(p);
}

void sinew_run_source_free(sinew_ctx *ctx, sinew_run_source *src)
{
    if (!ctx || !src)
        return;
    for (size_t f = 0; src->frames && f < src->nframes; f++) {
        sinew__free(ctx, (void *)src->frames[f].color);
        sinew__free(ctx, (void *)src->frames[f].depth);
        sinew__free(ctx, (void *)src->frames[f].labels);
        sinew__free(ctx, (void *)src->frames[f].ignore);
        sinew__free(ctx, (void *)src->frames[f].right);
    }
    sinew__free(ctx, src->frames);
    sinew__free(ctx, src->intrinsics);
    sinew__free_names(ctx, src->warnings, src->nwarnings);
    memset(src, 0, sizeof *src);
}

/* Append a warning line to the source. */
static int warn(sinew_ctx *ctx, sinew_run_source *src, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
static int warn(sinew_ctx *ctx, sinew_run_source *src, const char *fmt, ...)
{
    char buf[2 * SINEW__PATH_MAX];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(buf, sizeof buf, fmt, ap);
    va_end(ap);
    if ((src->nwarnings & (src->nwarnings - 1)) == 0) { /* 0, 1, 2, 4, ...: grow */
        char **g = sinew__calloc(ctx, src->nwarnings ? 2 * src->nwarnings : 1, sizeof *g);
        if (!g)
            return SINEW_ENOMEM;
        if (src->warnings)
            memcpy(g, src->warnings, src->nwarnings * sizeof *g);
        sinew__free(ctx, src->warnings);
        src->warnings = g;
    }
    if (!(src->warnings[src->nwarnings] = sinew__strdup(ctx, buf)))
        return SINEW_ENOMEM;
    src->nwarnings++;
    return SINEW_OK;
}

/* A copy of sequence path `rel` resolved against the sequence's folder; NULL for NULL. */
static int resolve_dup(sinew_ctx *ctx, const sinew_sequence *seq, const char *rel,
                       const char *where, size_t f, const char **out)
{
    char buf[SINEW__PATH_MAX];
    *out = NULL;
    if (!rel)
        return SINEW_OK;
    if (sinew_sequence_resolve(seq, rel, buf, sizeof buf) != SINEW_OK)
        return sinew__fail(ctx, SINEW_ELIMIT, "%s: frames[%zu]: path too long", where, f);
    *out = sinew__strdup(ctx, buf);
    return *out ? SINEW_OK : SINEW_ENOMEM;
}

int sinew_run_source_from_sequence(sinew_ctx *ctx, sinew_run_source *out, const sinew_sequence *seq,
                                   const char *where)
{
    if (!ctx || !seq || !out)
        return SINEW_EINVAL;
    memset(out, 0, sizeof *out);
    if (!where)
        where = "sequence";
    size_t n = seq->n_frames;
    out->frames = n ? sinew__calloc(ctx, n, sizeof *out->frames) : NULL;
    if (n && !out->frames)
        return SINEW_ENOMEM;
    out->nframes = n;
    for (size_t f = 0; f < n; f++) {
        const sinew_seq_frame *fr = &seq->frames[f];
        sinew_run_frame *o = &out->frames[f];
        int rc;
        if ((rc = resolve_dup(ctx, seq, fr->color, where, f, &o->color)) ||
            (rc = resolve_dup(ctx, seq, fr->depth, where, f, &o->depth)) ||
            (rc = resolve_dup(ctx, seq, fr->labels, where, f, &o->labels)) ||
            (rc = resolve_dup(ctx, seq, fr->ignore, where, f, &o->ignore)) ||
            (rc = resolve_dup(ctx, seq, fr->right, where, f, &o->right))) {
            sinew_run_source_free(ctx, out);
            return rc;
        }
        if (isfinite(fr->timestamp)) {
            o->has_timestamp = 1;
            o->timestamp = fr->timestamp;
        }
        if (fr->has_pose) {
            o->has_pose = 1;
            memcpy(o->pose, fr->pose, sizeof o->pose);
        }
    }
    return SINEW_OK;
}

/* Image files (by extension, not hidden): the frames of a default-layout folder. */
static int image_ext(const char *name)
{
    static const char *const ext[] = {".png", ".jpg", ".jpeg", ".ppm", ".pgm", ".npy", ".pfm"};
    size_t n = strlen(name);
    if (name[0] == '.')
        return 0;
    for (size_t k = 0; k < sizeof ext / sizeof ext[0]; k++) {
        size_t e = strlen(ext[k]);
        if (n > e && !strcasecmp(name + n - e, ext[k]))
            return 1;
    }
    return 0;
}

static int from_lists(sinew_ctx *ctx, const char *dir, double max_dt, sinew_run_source *out)
{
    char pa[SINEW__PATH_MAX], pb[SINEW__PATH_MAX];
    sinew_stamp_list a = {0, NULL, NULL}, b = {0, NULL, NULL};
    int32_t *m = NULL;
    int rc;
    if ((rc = sinew__path_join(ctx, pa, sizeof pa, dir, "rgb.txt")) ||
        (rc = sinew__path_join(ctx, pb, sizeof pb, dir, "depth.txt")) ||
        (rc = sinew_stamp_list_read(ctx, &a, pa)) || (rc = sinew_stamp_list_read(ctx, &b, pb)))
        goto done;
    m = a.n ? sinew__calloc(ctx, a.n, sizeof *m) : NULL;
    if (a.n && !m) {
        rc = SINEW_ENOMEM;
        goto done;
    }
    size_t nm = 0;
    if ((rc = sinew_associate(ctx, m, &nm, a.t, a.n, b.t, b.n, max_dt, 0.0)))
        goto done;
    if (nm == 0) {
        rc = sinew__fail(ctx, SINEW_ECONFIG, "%s: no colour stamp has a depth stamp within %g s",
                         pa, max_dt);
        goto done;
    }
    out->frames = sinew__calloc(ctx, nm, sizeof *out->frames);
    if (!out->frames) {
        rc = SINEW_ENOMEM;
        goto done;
    }
    /* frames in colour time order (ties by list order); qsort, as a list may be long and
     * in any order */
    sinew__stamp *ord = sinew__calloc(ctx, a.n, sizeof *ord);
    if (!ord) {
        rc = SINEW_ENOMEM;
        goto done;
    }
    for (size_t i = 0; i < a.n; i++)
        ord[i] = (sinew__stamp){a.t[i], i};
    qsort(ord, a.n, sizeof *ord, sinew__stamp_cmp);
    for (size_t q = 0; !rc && q < a.n; q++) {
        size_t i = ord[q].idx;
        if (m[i] < 0) {
            rc = warn(ctx, out,
                      "%s: colour frame %s (t = %.6f s) has no depth stamp within %g s: left "
                      "out",
                      pa, a.name[i], a.t[i], max_dt);
            continue;
        }
        sinew_run_frame *fr = &out->frames[out->nframes++];
        fr->color = sinew__dup_join(ctx, dir, a.name[i]);
        fr->depth = sinew__dup_join(ctx, dir, b.name[m[i]]);
        fr->has_timestamp = 1;
        fr->timestamp = a.t[i];
        if (!fr->color || !fr->depth)
            rc = SINEW_ENOMEM;
    }
    sinew__free(ctx, ord);
    out->dropped = a.n - nm;
done:
    sinew__free(ctx, m);
    sinew_stamp_list_free(ctx, &a);
    sinew_stamp_list_free(ctx, &b);
    return rc;
}

/* A file of a layout folder and its match keys. */
typedef struct {
    const char *path; /* as listed (DIR/sub/name) */
    const char *name; /* base name */
    size_t stem;      /* length of the stem: the name without its extension */
    int64_t num;      /* the stem's last run of digits; -1 when none (or over 18 digits) */
    size_t idx;       /* position in the sorted list */
} frame_key;

static void key_of(const char *path, size_t idx, frame_key *k)
{
    const char *b = strrchr(path, '/'), *dot;
    b = b ? b + 1 : path;
    dot = strrchr(b, '.');
    *k = (frame_key){path, b, dot && dot > b ? (size_t)(dot - b) : strlen(b), -1, idx};
    size_t e = k->stem, st;
    while (e && !isdigit((unsigned char)b[e - 1]))
        e--;
    for (st = e; st && isdigit((unsigned char)b[st - 1]); st--)
        ;
    if (e > st && e - st <= 18) {
        k->num = 0;
        for (size_t i = st; i < e; i++)
            k->num = 10 * k->num + (b[i] - '0');
    }
}

static int stem_cmp(const frame_key *a, const frame_key *b)
{
    size_t n = a->stem < b->stem ? a->stem : b->stem;
    int c = memcmp(a->name, b->name, n);
    return c ? c : (a->stem > b->stem) - (a->stem < b->stem);
}

static int by_stem(const void *pa, const void *pb)
{
    const frame_key *a = pa, *b = pb;
    int c = stem_cmp(a, b);
    return c ? c : (a->idx > b->idx) - (a->idx < b->idx);
}

static int by_num(const void *pa, const void *pb)
{
    const frame_key *a = pa, *b = pb;
    if (a->num != b->num)
        return (a->num > b->num) - (a->num < b->num);
    return (a->idx > b->idx) - (a->idx < b->idx);
}

/* A listed folder's files as keys: sorted by stem (k) and by number (num); ECONFIG
 * naming both files when two share a stem (nothing says which one is the frame). */
typedef struct {
    frame_key *k, *num;
    size_t n;
    unsigned char *used; /* by list position: matched to a colour frame */
} key_set;

static void keys_free(sinew_ctx *ctx, key_set *ks)
{
    sinew__free(ctx, ks->k);
    sinew__free(ctx, ks->num);
    sinew__free(ctx, ks->used);
}

static int keys_make(sinew_ctx *ctx, const char *sub, char **l, size_t n, key_set *ks)
{
    ks->n = n;
    if (!n)
        return SINEW_OK;
    ks->k = sinew__calloc(ctx, n, sizeof *ks->k);
    ks->num = sinew__calloc(ctx, n, sizeof *ks->num);
    ks->used = sinew__calloc(ctx, n, 1);
    if (!ks->k || !ks->num || !ks->used)
        return SINEW_ENOMEM;
    for (size_t i = 0; i < n; i++)
        key_of(l[i], i, &ks->k[i]);
    memcpy(ks->num, ks->k, n * sizeof *ks->k);
    qsort(ks->k, n, sizeof *ks->k, by_stem);
    qsort(ks->num, n, sizeof *ks->num, by_num);
    for (size_t i = 1; i < n; i++)
        if (!stem_cmp(&ks->k[i - 1], &ks->k[i]))
            return sinew__fail(ctx, SINEW_ECONFIG, "%s: %s and %s are the same frame (same stem)",
                               sub, ks->k[i - 1].name, ks->k[i].name);
    return SINEW_OK;
}

/* The file of ks that belongs to colour frame c: the same stem, else the only file
 * whose stem's last number equals c's; NULL if none. Binary searches. */
static const frame_key *key_find(const key_set *ks, const frame_key *c)
{
    size_t lo = 0, hi = ks->n;
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        int r = stem_cmp(&ks->k[mid], c);
        if (!r)
            return &ks->k[mid];
        if (r < 0)
            lo = mid + 1;
        else
            hi = mid;
    }
    if (c->num < 0)
        return NULL;
    for (lo = 0, hi = ks->n; lo < hi;) { /* first with num >= c->num */
        size_t mid = lo + (hi - lo) / 2;
        if (ks->num[mid].num < c->num)
            lo = mid + 1;
        else
            hi = mid;
    }
    if (lo == ks->n || ks->num[lo].num != c->num ||
        (lo + 1 < ks->n && ks->num[lo + 1].num == c->num))
        return NULL; /* none, or ambiguous */
    return &ks->num[lo];
}

/* Warnings about the colour frames' numbering: names that do not sort in numeric
 * order (1.png, 10.png, 2.png) and jumps larger than the usual step. */
static int numbering_warnings(sinew_ctx *ctx, sinew_run_source *out, const char *sub,
                              const frame_key *c, size_t n)
{
    int64_t step = 0;
    for (size_t i = 1; i < n; i++) {
        if (c[i - 1].num < 0 || c[i].num < 0)
            return SINEW_OK;
        int64_t d = c[i].num - c[i - 1].num;
        if (d <= 0)
            return warn(ctx, out,
                        "%s: %s sorts after %s but has a smaller number; frames are taken in "
                        "file-name order (pad the numbers with zeros)",
                        sub, c[i].name, c[i - 1].name);
        if (!step || d < step)
            step = d;
    }
    int rc = SINEW_OK;
    for (size_t i = 1; !rc && i < n; i++)
        if (c[i].num - c[i - 1].num != step)
            rc =
                warn(ctx, out, "%s: frame numbers jump from %lld to %lld (%s, %s): frames missing?",
                     sub, (long long)c[i - 1].num, (long long)c[i].num, c[i - 1].name, c[i].name);
    return rc;
}

static int from_layout(sinew_ctx *ctx, const char *dir, unsigned flags, sinew_run_source *out)
{
    enum { COLOR, DEPTH, LABELS, IGNORE, NSUB };
    /* stereo: DEPTH is the right frame's slot, COLOR the left frame's */
    const int stereo = (flags & SINEW_RUN_SOURCE_STEREO) != 0;
    const char *const sub[NSUB] = {stereo && is_dir_in(dir, "left") ? "left" : "color",
                                   stereo ? "right" : "depth", "labels", "ignore"};
    const char *const what = stereo ? "right frame" : "depth map";
    char **l[NSUB] = {NULL, NULL, NULL, NULL};
    size_t n[NSUB] = {0, 0, 0, 0};
    key_set ks[NSUB] = {{0}, {0}, {0}, {0}};
    frame_key *ck = NULL;
    char p[NSUB][SINEW__PATH_MAX];
    int have[NSUB] = {0, 0, 0, 0};
    int rc = SINEW_OK;
    for (int k = 0; k < NSUB && !rc; k++) {
        if ((rc = sinew__path_join(ctx, p[k], sizeof p[k], dir, sub[k])))
            break;
        if (!is_dir(p[k])) {
            if (k == 0)
                rc = sinew__fail(ctx, SINEW_ECONFIG,
                                 "%s: no sequence.json, rgb.txt+depth.txt or color/ folder", dir);
            continue;
        }
        have[k] = 1;
        if ((rc = sinew__list_dir(ctx, p[k], image_ext, 1, SINEW_RUN_MAX_FRAMES, &l[k], &n[k])))
            break;
        if (k == 0 && n[0] == 0)
            rc = sinew__fail(ctx, SINEW_ECONFIG, "%s: no images", p[0]);
        if (!rc)
            rc = keys_make(ctx, p[k], l[k], n[k], &ks[k]);
    }
    /* colour frames in file-name order */
    if (!rc && !(ck = sinew__calloc(ctx, n[0], sizeof *ck)))
        rc = SINEW_ENOMEM;
    for (size_t f = 0; !rc && f < n[0]; f++)
        key_of(l[0][f], f, &ck[f]);
    if (!rc && !(out->frames = sinew__calloc(ctx, n[0], sizeof *out->frames)))
        rc = SINEW_ENOMEM;
    size_t kept = 0;
    for (size_t f = 0; !rc && f < n[0]; f++) {
        const frame_key *d = have[DEPTH] ? key_find(&ks[DEPTH], &ck[f]) : NULL;
        const frame_key *lb = have[LABELS] ? key_find(&ks[LABELS], &ck[f]) : NULL;
        const frame_key *ig = have[IGNORE] ? key_find(&ks[IGNORE], &ck[f]) : NULL;
        if (have[DEPTH] && !d) {
            if (!(flags & SINEW_RUN_SOURCE_DROP_UNMATCHED))
                rc = sinew__fail(ctx, SINEW_ECONFIG,
                                 "%s: no %s for %s (none named %.*s.*; "
                                 "--drop-unmatched leaves such frames out)",
                                 p[1], what, l[0][f], (int)ck[f].stem, ck[f].name);
            else
                rc = warn(ctx, out, "%s: no %s for %s: frame left out", p[1], what, l[0][f]);
            out->dropped++;
            continue;
        }
        if (have[LABELS] && !lb &&
            (rc = warn(ctx, out, "%s: no label image for %s: no labels there", p[LABELS], l[0][f])))
            break;
        if (have[IGNORE] && !ig &&
            (rc = warn(ctx, out, "%s: no ignore mask for %s: nothing ignored there", p[IGNORE],
                       l[0][f])))
            break;
        sinew_run_frame *fr = &out->frames[out->nframes++];
        fr->color = sinew__strdup(ctx, l[0][f]);
        const char **slot = stereo ? &fr->right : &fr->depth;
        *slot = d ? sinew__strdup(ctx, d->path) : NULL;
        fr->labels = lb ? sinew__strdup(ctx, lb->path) : NULL;
        fr->ignore = ig ? sinew__strdup(ctx, ig->path) : NULL;
        if (!fr->color || (d && !*slot) || (lb && !fr->labels) || (ig && !fr->ignore))
            rc = SINEW_ENOMEM;
        if (d)
            ks[DEPTH].used[d->idx] = 1;
        if (lb)
            ks[LABELS].used[lb->idx] = 1;
        if (ig)
            ks[IGNORE].used[ig->idx] = 1;
        ck[kept++] = ck[f]; /* the kept frames' keys, for the numbering check */
    }
    for (int k = DEPTH; k < NSUB; k++) /* unused files, in name order */
        for (size_t i = 0; !rc && i < n[k]; i++)
            if (!ks[k].used[i])
                rc = warn(ctx, out, "%s: no colour frame for %s: not used", p[k], l[k][i]);
    if (!rc && !out->nframes)
        rc = sinew__fail(ctx, SINEW_ECONFIG, "%s: no colour image has a %s", p[0], what);
    if (!rc)
        rc = numbering_warnings(ctx, out, p[0], ck, kept);
    sinew__free(ctx, ck);
    for (int k = 0; k < NSUB; k++) {
        keys_free(ctx, &ks[k]);
        sinew__free_names(ctx, l[k], n[k]);
    }
    return rc;
}

/* ---- the 7-Scenes layout ---- */

#define FLAT_COLOR ".color.png"

static int flat_color(const char *name)
{
    size_t n = strlen(name), s = strlen(FLAT_COLOR);
    return name[0] != '.' && n > s && !strcmp(name + n - s, FLAT_COLOR);
}

/* DIR/STEM.SUFFIX into buf; 1 when it is a regular file, 0 when not, -1 when too long. */
static int flat_file(char *buf, size_t n, const char *color, const char *suffix)
{
    size_t stem = strlen(color) - strlen(FLAT_COLOR);
    int w = snprintf(buf, n, "%.*s%s", (int)stem, color, suffix);
    if (w < 0 || (size_t)w >= n)
        return -1;
    return is_file(buf);
}

/* One folder of NAME.color.png, NAME.depth.png and NAME.pose.txt (camera-to-world 4x4,
 * metres), the layout of the Microsoft 7-Scenes dataset (Shotton et al., CVPR 2013),
 * with camera-intrinsics.txt (3x3 K) beside them. */
static int from_flat(sinew_ctx *ctx, const char *dir, unsigned flags, sinew_run_source *out)
{
    char **l = NULL;
    size_t n = 0, kept = 0, posed = 0;
    int rc = sinew__list_dir(ctx, dir, flat_color, 1, SINEW_RUN_MAX_FRAMES, &l, &n);
    frame_key *ck = rc ? NULL : sinew__calloc(ctx, n ? n : 1, sizeof *ck);
    if (!rc && (!ck || !(out->frames = sinew__calloc(ctx, n ? n : 1, sizeof *out->frames))))
        rc = SINEW_ENOMEM;
    char dp[SINEW__PATH_MAX], pp[SINEW__PATH_MAX];
    for (size_t f = 0; !rc && f < n; f++) {
        int hd = flat_file(dp, sizeof dp, l[f], ".depth.png");
        int hp = flat_file(pp, sizeof pp, l[f], ".pose.txt");
        if (hd < 0 || hp < 0) {
            rc = sinew__fail(ctx, SINEW_ELIMIT, "%s: path too long", l[f]);
            break;
        }
        if (!hd) {
            if (!(flags & SINEW_RUN_SOURCE_DROP_UNMATCHED))
                rc = sinew__fail(ctx, SINEW_ECONFIG,
                                 "%s: no depth map %s (--drop-unmatched leaves such frames out)",
                                 l[f], dp);
            else
                rc = warn(ctx, out, "%s: no depth map %s: frame left out", l[f], dp);
            out->dropped++;
            continue;
        }
        sinew_run_frame *fr = &out->frames[out->nframes++];
        if (!(fr->color = sinew__strdup(ctx, l[f])) || !(fr->depth = sinew__strdup(ctx, dp))) {
            rc = SINEW_ENOMEM;
            break;
        }
        if (hp) {
            sinew_rigid T;
            if ((rc = sinew_rigid_load(ctx, &T, pp)))
                break;
            sinew_rigid_to_pose(fr->pose, &T);
            fr->has_pose = 1;
            posed++;
        }
        key_of(l[f], f, &ck[kept++]);
    }
    if (!rc && posed && posed < out->nframes)
        rc = warn(ctx, out,
                  "%s: %zu of %zu frames have no pose file (NAME.pose.txt): no pose check "
                  "for their pairs",
                  dir, out->nframes - posed, out->nframes);
    if (!rc && !out->nframes)
        rc = sinew__fail(ctx, SINEW_ECONFIG, "%s: no colour image has a depth map", dir);
    if (!rc)
        rc = numbering_warnings(ctx, out, dir, ck, kept);
    if (!rc && (rc = sinew__path_join(ctx, dp, sizeof dp, dir, "camera-intrinsics.txt")) == 0 &&
        is_file(dp) && !(out->intrinsics = sinew__strdup(ctx, dp)))
        rc = SINEW_ENOMEM;
    sinew__free(ctx, ck);
    sinew__free_names(ctx, l, n);
    return rc;
}

/* Whether dir holds NAME.color.png files and no color/ folder (the 7-Scenes layout). */
static int is_flat(sinew_ctx *ctx, const char *dir)
{
    char p[SINEW__PATH_MAX];
    char **l = NULL;
    size_t n = 0;
    if (sinew__path_join(ctx, p, sizeof p, dir, "color") || is_dir(p) ||
        sinew__list_dir(ctx, dir, flat_color, 0, SINEW_RUN_MAX_FRAMES, &l, &n)) {
        sinew_ctx_clear(ctx);
        return 0;
    }
    sinew__free_names(ctx, l, n);
    return n > 0;
}

int sinew_run_source_from_folder(sinew_ctx *ctx, sinew_run_source *out, const char *dir,
                                 double max_dt, unsigned flags)
{
    if (!ctx || !dir || !out)
        return SINEW_EINVAL;
    memset(out, 0, sizeof *out);
    if (!is_dir(dir))
        return sinew__fail(ctx, SINEW_EIO, "%s: not a folder", dir);
    char pa[SINEW__PATH_MAX], pb[SINEW__PATH_MAX];
    int rc;
    if ((rc = sinew__path_join(ctx, pa, sizeof pa, dir, "rgb.txt")) ||
        (rc = sinew__path_join(ctx, pb, sizeof pb, dir, "depth.txt")))
        return rc;
    if (is_file(pa) && is_file(pb) && !(flags & SINEW_RUN_SOURCE_STEREO))
        rc = from_lists(ctx, dir, max_dt, out);
    else if (!(flags & SINEW_RUN_SOURCE_STEREO) && is_flat(ctx, dir))
        rc = from_flat(ctx, dir, flags, out);
    else
        rc = from_layout(ctx, dir, flags, out);
    if (!rc && (rc = sinew__path_join(ctx, pa, sizeof pa, dir, "intrinsics.json")) == 0 &&
        is_file(pa) && !(out->intrinsics = sinew__dup_join(ctx, dir, "intrinsics.json")))
        rc = SINEW_ENOMEM;
    if (rc)
        sinew_run_source_free(ctx, out);
    return rc;
}
