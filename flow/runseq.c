/* SPDX-License-Identifier: MIT */
/* Sequences from a plain folder: the default layout (color/, depth/, labels/,
 * intrinsics.json) or timestamped lists (rgb.txt, depth.txt) associated by nearest
 * time within a tolerance. Produces the frame list the run engine takes. */
#define _POSIX_C_SOURCE 200809L
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>

#include "flow/internal/base.h"
#include "flow/internal/run.h"
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

void sinew_run_source_free(sinew_ctx *ctx, sinew_run_source *src)
{
    if (!ctx || !src)
        return;
    for (size_t f = 0; src->frames && f < src->nframes; f++) {
        sinew__free(ctx, (void *)src->frames[f].color);
        sinew__free(ctx, (void *)src->frames[f].depth);
        sinew__free(ctx, (void *)src->frames[f].labels);
    }
    sinew__free(ctx, src->frames);
    sinew__free(ctx, src->intrinsics);
    memset(src, 0, sizeof *src);
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

int sinew_run_source_from_sequence(sinew_ctx *ctx, const sinew_sequence *seq, const char *where,
                                   sinew_run_source *out)
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
            (rc = resolve_dup(ctx, seq, fr->labels, where, f, &o->labels))) {
            sinew_run_source_free(ctx, out);
            return rc;
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
        (rc = sinew_stamp_list_read(ctx, pa, &a)) || (rc = sinew_stamp_list_read(ctx, pb, &b)))
        goto done;
    m = a.n ? sinew__calloc(ctx, a.n, sizeof *m) : NULL;
    if (a.n && !m) {
        rc = SINEW_ENOMEM;
        goto done;
    }
    size_t nm = 0;
    if ((rc = sinew_associate(ctx, a.t, a.n, b.t, b.n, max_dt, 0.0, m, &nm)))
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
    for (size_t q = 0; q < a.n; q++) {
        size_t i = ord[q].idx;
        if (m[i] < 0)
            continue;
        sinew_run_frame *fr = &out->frames[out->nframes++];
        fr->color = sinew__dup_join(ctx, dir, a.name[i]);
        fr->depth = sinew__dup_join(ctx, dir, b.name[m[i]]);
        if (!fr->color || !fr->depth) {
            rc = SINEW_ENOMEM;
            break;
        }
    }
    sinew__free(ctx, ord);
    out->dropped = a.n - nm;
done:
    sinew__free(ctx, m);
    sinew_stamp_list_free(ctx, &a);
    sinew_stamp_list_free(ctx, &b);
    return rc;
}

static int from_layout(sinew_ctx *ctx, const char *dir, sinew_run_source *out)
{
    static const char *const sub[3] = {"color", "depth", "labels"};
    char **l[3] = {NULL, NULL, NULL};
    size_t n[3] = {0, 0, 0};
    char p[SINEW__PATH_MAX];
    int rc = SINEW_OK;
    for (int k = 0; k < 3 && !rc; k++) {
        if ((rc = sinew__path_join(ctx, p, sizeof p, dir, sub[k])))
            break;
        if (!is_dir(p)) {
            if (k == 0)
                rc = sinew__fail(ctx, SINEW_ECONFIG,
                                 "%s: no sequence.json, rgb.txt+depth.txt or color/ folder", dir);
            continue;
        }
        if ((rc = sinew__list_dir(ctx, p, image_ext, 1, SINEW_RUN_MAX_FRAMES, &l[k], &n[k])))
            break;
        if (k == 0 && n[0] == 0)
            rc = sinew__fail(ctx, SINEW_ECONFIG, "%s: no images", p);
        else if (k > 0 && n[k] != n[0])
            rc =
                sinew__fail(ctx, SINEW_ECONFIG, "%s: %zu images but color/ has %zu", p, n[k], n[0]);
    }
    if (!rc) {
        out->frames = sinew__calloc(ctx, n[0], sizeof *out->frames);
        if (!out->frames)
            rc = SINEW_ENOMEM;
    }
    if (!rc) {
        /* hand the strings over to the frames */
        for (size_t f = 0; f < n[0]; f++) {
            out->frames[f].color = l[0][f];
            out->frames[f].depth = l[1] ? l[1][f] : NULL;
            out->frames[f].labels = l[2] ? l[2][f] : NULL;
        }
        out->nframes = n[0];
        for (int k = 0; k < 3; k++) {
            sinew__free(ctx, l[k]);
            l[k] = NULL;
            n[k] = 0;
        }
    }
    for (int k = 0; k < 3; k++)
        sinew__free_names(ctx, l[k], n[k]);
    return rc;
}

int sinew_run_source_from_folder(sinew_ctx *ctx, const char *dir, double max_dt,
                                 sinew_run_source *out)
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
    if (is_file(pa) && is_file(pb))
        rc = from_lists(ctx, dir, max_dt, out);
    else
        rc = from_layout(ctx, dir, out);
    if (!rc && (rc = sinew__path_join(ctx, pa, sizeof pa, dir, "intrinsics.json")) == 0 &&
        is_file(pa) && !(out->intrinsics = sinew__dup_join(ctx, dir, "intrinsics.json")))
        rc = SINEW_ENOMEM;
    if (rc)
        sinew_run_source_free(ctx, out);
    return rc;
}
