/* SPDX-License-Identifier: MIT */
/* Scores of a run's pair against the ground truth its sequence carries (sequence.json
 * "pairs": forward flow, forward occlusion mask, scene flow; e.g. scenes from `sinew
 * synth`): endpoint error of the forward flow (all / visible / occluded pixels, the
 * usual Middlebury split, Baker et al., IJCV 2011), precision, recall and F1 of the
 * check's occlusion bits against the true occlusion mask, and the 3-D error of the
 * lifted matches against the true scene flow. Written into the pair's stats.json; a
 * truth file that cannot be used becomes a warning, never a failure of the pair. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#include <cJSON.h>

#include "flow/check.h"
#include "flow/internal/base.h"
#include "flow/internal/run.h"
#include "flow/io.h"
#include "flow/match.h"
#include "flow/json.h"
#include "flow/metrics.h"
#include "flow/sequence.h"

static const sinew_seq_pair *truth_of(const sinew_sequence *seq, sinew_pair p)
{
    for (size_t k = 0; seq && k < seq->n_pairs; k++)
        if (seq->pairs[k].from == p.i && seq->pairs[k].to == p.j)
            return &seq->pairs[k];
    return NULL;
}

/* path resolved against the sequence's folder into buf. */
static int resolve(sinew_ctx *ctx, const sinew_sequence *seq, const char *rel, char *buf, size_t n)
{
    if (sinew_sequence_resolve(seq, rel, buf, n) != SINEW_OK)
        return sinew__fail(ctx, SINEW_ELIMIT, "%s: path too long", rel);
    return SINEW_OK;
}

static int same_size(sinew_ctx *ctx, const sinew_image *a, const sinew_image *flow,
                     const char *path)
{
    if (a->width == flow->width && a->height == flow->height)
        return SINEW_OK;
    return sinew__fail(ctx, SINEW_ESIZE, "%s: %dx%d but the frames are %dx%d", path, a->width,
                       a->height, flow->width, flow->height);
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* |(X1 - X0) - scene_flow(u0, v0)| of every lifted match, in millimetres: median and
 * mean into o ("match_3d_error_mm_median", "match_3d_error_mm_mean", "match_3d_rows"). */
static int match_3d_error(sinew_ctx *ctx, const sinew_matches *m, const sinew_image *sf, cJSON *o)
{
    int c[8];
    static const char *const name[8] = {"u0", "v0", "X0", "Y0", "Z0", "X1", "Y1", "Z1"};
    for (int k = 0; k < 8; k++)
        if ((c[k] = sinew_matches_column(m, name[k])) < 0)
            return SINEW_OK;
    if (!m->rows)
        return SINEW_OK;
    double *err = sinew__calloc(ctx, m->rows, sizeof *err);
    if (!err)
        return SINEW_ENOMEM;
    size_t n = 0;
    double sum = 0;
    for (size_t r = 0; r < m->rows; r++) {
        const float *row = m->data + r * (size_t)m->cols;
        int u = (int)lrintf(row[c[0]]), v = (int)lrintf(row[c[1]]);
        if (u < 0 || v < 0 || u >= sf->width || v >= sf->height)
            continue;
        const float *s = sinew_image_row_f32(sf, v) + 3 * (size_t)u;
        double d2 = 0;
        for (int k = 0; k < 3; k++) {
            double d = ((double)row[c[5 + k]] - row[c[2 + k]]) - s[k];
            d2 += d * d;
        }
        if (!isfinite(d2))
            continue;
        err[n] = 1000.0 * sqrt(d2);
        sum += err[n++];
    }
    if (n) {
        qsort(err, n, sizeof *err, cmp_double);
        double med = n % 2 ? err[n / 2] : 0.5 * (err[n / 2 - 1] + err[n / 2]);
        cJSON_AddNumberToObject(o, "match_3d_error_mm_median", med);
        cJSON_AddNumberToObject(o, "match_3d_error_mm_mean", sum / (double)n);
    }
    cJSON_AddNumberToObject(o, "match_3d_rows", (double)n);
    sinew__free(ctx, err);
    return SINEW_OK;
}

/* The scores, or the first problem (a status with the ctx message naming the file). */
static int score(sinew_ctx *ctx, const sinew_sequence *seq, const sinew_seq_pair *t,
                 const sinew_image *fwd, const sinew_image *mask, const sinew_matches *m,
                 cJSON *stats, cJSON *o)
{
    char p[4200];
    sinew_image gt = {0}, occ = {0}, sf = {0};
    int rc = SINEW_OK, have_occ = 0;
    if (t->flow_forward && !(rc = resolve(ctx, seq, t->flow_forward, p, sizeof p)) &&
        !(rc = sinew_flow_read(ctx, &gt, p, SINEW_FLOW_AUTO)))
        rc = same_size(ctx, &gt, fwd, p);
    if (!rc && t->occlusion_forward &&
        !(rc = resolve(ctx, seq, t->occlusion_forward, p, sizeof p)) &&
        !(rc = sinew_mask_read(ctx, &occ, p)) && !(rc = same_size(ctx, &occ, fwd, p)))
        have_occ = 1;
    if (!rc && gt.data) {
        sinew_flow_errors e;
        rc = sinew_flow_errors_compute(ctx, &e, fwd, &gt, have_occ ? &occ : NULL, NULL);
        static const char *const key[SINEW_REGION_COUNT] = {"epe_all", "epe_noc", "epe_occ"};
        for (int r = 0; !rc && r < SINEW_REGION_COUNT; r++) {
            if (r && !e.has_occ)
                break;
            sinew_flow_summary s;
            sinew_flow_stats_summarize(&s, &e.region[r]);
            sinew_json_add_number(o, key[r], s.epe);
            if (r == 0) {
                sinew_json_add_number(stats, "epe", s.epe); /* read by the run report */
                sinew_json_add_number(o, "flow_density_pct", s.density_pct);
            }
        }
    }
    if (!rc && have_occ) {
        sinew_mask_scores ms;
        double pr, re, f1;
        rc = sinew_mask_scores_compute(ctx, &ms, mask, &occ, NULL,
                                       SINEW_MASK_OCCLUDED | SINEW_MASK_OUTSIDE);
        if (!rc) {
            sinew_mask_scores_rates(&ms, &pr, &re, &f1);
            sinew_json_add_number(o, "occlusion_precision", pr);
            sinew_json_add_number(o, "occlusion_recall", re);
            sinew_json_add_number(o, "occlusion_f1", f1);
            sinew_json_add_number(stats, "occlusion_f1", f1); /* read by the run report */
        }
    }
    if (!rc && m && m->has_depth && t->scene_flow &&
        !(rc = resolve(ctx, seq, t->scene_flow, p, sizeof p)) &&
        !(rc = sinew_npy_read_image(ctx, &sf, p)) && !(rc = same_size(ctx, &sf, fwd, p))) {
        if (sf.channels != 3 || sf.type != SINEW_F32)
            rc = sinew__fail(ctx, SINEW_EFORMAT, "%s: scene flow must be H x W x 3", p);
        else
            rc = match_3d_error(ctx, m, &sf, o);
    }
    sinew_image_free(&gt);
    sinew_image_free(&occ);
    sinew_image_free(&sf);
    return rc;
}

int sinew__run_truth_scores(sinew_ctx *ctx, const sinew_sequence *seq, sinew_pair pair,
                            const sinew_image *fwd, const sinew_image *mask, const sinew_matches *m,
                            cJSON *stats, cJSON *warnings)
{
    const sinew_seq_pair *t = truth_of(seq, pair);
    if (!t)
        return SINEW_OK;
    cJSON *o = cJSON_AddObjectToObject(stats, "truth");
    if (!o)
        return SINEW_ENOMEM;
    int rc = score(ctx, seq, t, fwd, mask, m, stats, o);
    if (rc == SINEW_ENOMEM)
        return rc;
    if (rc) { /* a truth file sinew cannot use: the pair itself is fine */
        char msg[SINEW_MESSAGE_MAX + 64];
        snprintf(msg, sizeof msg, "ground truth not used: %s", sinew_ctx_message(ctx));
        cJSON_AddItemToArray(warnings, cJSON_CreateString(msg));
    }
    return SINEW_OK;
}
