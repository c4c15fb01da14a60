/* SPDX-License-Identifier: MIT */
/* Building the match table: per-pixel rules (flow validity, check mask, bounds,
 * weight, labels, and the lifting rules of flow/lift.c), sampling (all, stride grid,
 * spread top-K) and the rejection statistics.
 *
 * Three passes keep it deterministic for any thread count: (1) rows in parallel decide
 * each pixel's fate (a reason code per pixel, no allocation); (2) serially count and
 * sample; (3) the selected rows are filled in parallel by re-evaluating the same pure
 * per-pixel function. */
#include "flow/match.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "flow/internal/base.h"
#include "flow/internal/lift.h"
#include "flow/internal/parallel.h"

#define KEPT ((unsigned char)SINEW_REJECT_COUNT)

static const char *const reject_names[SINEW_REJECT_COUNT] = {
    "flow_unknown",   "masked",      "outside",     "low_weight",      "label_change",
    "depth0_invalid", "depth0_edge", "depth1_hole", "depth1_straddle", "depth1_edge",
    "displacement",   "normal",      "not_sampled",
};

const char *sinew_reject_name(int reason)
{
    return reason >= 0 && reason < SINEW_REJECT_COUNT ? reject_names[reason] : "?";
}

void sinew_match_params_default(sinew_match_params *p)
{
    if (!p)
        return;
    memset(p, 0, sizeof *p);
    p->sampling = SINEW_SAMPLE_ALL;
    p->stride = 4;
    p->top_k = 10000;
    p->cell = 32;
    p->per_cell = 0;
    p->min_weight = 0;
    p->drop_label_change = 0;
    p->edge_rel = 0.05;
    p->edge_radius = 1;
    p->max_displacement = INFINITY;
    p->normals = 0;
}

int sinew_matches_column(const sinew_matches *m, const char *name)
{
    if (!m || !name)
        return -1;
    for (int i = 0; i < m->cols; i++)
        if (m->columns[i] && !strcmp(m->columns[i], name))
            return i;
    return -1;
}

void sinew_matches_free(sinew_ctx *ctx, sinew_matches *m)
{
    if (!m)
        return;
    if (ctx) {
        sinew__free(ctx, m->data);
        sinew__free(ctx, m->label_ids);
        sinew__free(ctx, m->label_kept);
    }
    memset(m, 0, sizeof *m);
}

/* Everything the per-pixel evaluation reads. */
typedef struct job {
    const sinew_match_inputs *in;
    const sinew_match_params *p;
    int w, h;
    int col_xyz, col_normals, col_labels;
} job;

static inline unsigned label_at(const sinew_image *img, int x, int y)
{
    return img->type == SINEW_U8 ? sinew_image_row_u8(img, y)[x] : sinew_image_row_u16(img, y)[x];
}

/* Decide the fate of pixel (x, y); when row != NULL and the pixel is kept, also fill
 * the output row. Pure function of the inputs. */
static unsigned char eval_pixel(const job *j, int x, int y, float *row)
{
    const sinew_match_inputs *in = j->in;
    const sinew_match_params *p = j->p;
    const float *f = sinew_image_row_f32(in->flow, y) + 2 * (size_t)x;
    float fu = f[0], fv = f[1];
    if (!isfinite(fu) || !isfinite(fv))
        return SINEW_REJECT_FLOW_UNKNOWN;
    if (in->mask && sinew_image_row_u8(in->mask, y)[x] != 0)
        return SINEW_REJECT_MASKED;
    double u1 = x + (double)fu, v1 = y + (double)fv;
    if (!(u1 >= 0 && u1 <= j->w - 1 && v1 >= 0 && v1 <= j->h - 1))
        return SINEW_REJECT_OUTSIDE;
    float weight = in->confidence ? sinew_image_row_f32(in->confidence, y)[x] : 1.0f;
    if (!isfinite(weight) || !(weight > p->min_weight))
        return SINEW_REJECT_LOW_WEIGHT;
    int tx = (int)floor(u1 + 0.5), ty = (int)floor(v1 + 0.5); /* nearest target pixel */
    if (tx > j->w - 1)
        tx = j->w - 1;
    if (ty > j->h - 1)
        ty = j->h - 1;
    unsigned l0 = 0, l1 = 0;
    if (in->labels0) {
        l0 = label_at(in->labels0, x, y);
        l1 = label_at(in->labels1, tx, ty);
        if (p->drop_label_change && l0 != l1)
            return SINEW_REJECT_LABEL_CHANGE;
    }
    sinew__lift_point lp;
    if (in->depth0) {
        int r = sinew__lift_eval(in->depth0, in->depth1, in->camera, p, x, y, u1, v1, &lp);
        if (r != SINEW_REJECT_COUNT)
            return (unsigned char)r;
    }
    if (row) {
        row[0] = (float)x;
        row[1] = (float)y;
        row[2] = (float)u1;
        row[3] = (float)v1;
        row[4] = weight;
        if (j->col_xyz >= 0)
            for (int k = 0; k < 3; k++) {
                row[j->col_xyz + k] = (float)lp.X0[k];
                row[j->col_xyz + 3 + k] = (float)lp.X1[k];
            }
        if (j->col_normals >= 0)
            for (int k = 0; k < 3; k++) {
                row[j->col_normals + k] = (float)lp.n0[k];
                row[j->col_normals + 3 + k] = (float)lp.n1[k];
            }
        if (j->col_labels >= 0) {
            row[j->col_labels] = (float)l0;
            row[j->col_labels + 1] = (float)l1;
        }
    }
    return KEPT;
}

static int check_image(sinew_ctx *ctx, const sinew_image *img, const char *name, const char *role,
                       int w, int h, int channels, int types)
{
    if (!name)
        name = role;
    if (!img->data)
        return sinew__fail(ctx, SINEW_EINVAL, "%s: empty image", name);
    if (img->width != w || img->height != h)
        return sinew__fail(ctx, SINEW_ESIZE, "%s: %s is %dx%d but the flow is %dx%d", name, role,
                           img->width, img->height, w, h);
    if (img->channels != channels || !(types & (int)img->type))
        return sinew__fail(ctx, SINEW_EUNSUPPORTED, "%s: %s must be a %d-channel %s image", name,
                           role, channels,
                           types == SINEW_F32  ? "float"
                           : types == SINEW_U8 ? "8-bit"
                                               : "8/16-bit");
    return SINEW_OK;
}

static int check_inputs(sinew_ctx *ctx, const sinew_match_inputs *in, const sinew_match_params *p)
{
    if (!in->flow || !in->flow->data)
        return sinew__fail(ctx, SINEW_EINVAL, "matches: a flow field is required");
    const char *fname = in->flow_name ? in->flow_name : "flow";
    if (in->flow->type != SINEW_F32 || in->flow->channels != 2)
        return sinew__fail(ctx, SINEW_EUNSUPPORTED, "%s: flow must be a 2-channel float field",
                           fname);
    int w = in->flow->width, h = in->flow->height, rc;
    if (in->mask && (rc = check_image(ctx, in->mask, in->mask_name, "mask", w, h, 1, SINEW_U8)))
        return rc;
    if (in->confidence && (rc = check_image(ctx, in->confidence, in->confidence_name, "confidence",
                                            w, h, 1, SINEW_F32)))
        return rc;
    if (!in->labels0 != !in->labels1)
        return sinew__fail(ctx, SINEW_EINVAL, "matches: give label images for both frames");
    if (in->labels0 && ((rc = check_image(ctx, in->labels0, in->labels0_name, "labels0", w, h, 1,
                                          SINEW_U8 | SINEW_U16)) ||
                        (rc = check_image(ctx, in->labels1, in->labels1_name, "labels1", w, h, 1,
                                          SINEW_U8 | SINEW_U16))))
        return rc;
    if (!in->depth0 != !in->depth1)
        return sinew__fail(ctx, SINEW_EINVAL, "matches: give depth maps for both frames");
    if (in->depth0) {
        if (!in->camera)
            return sinew__fail(ctx, SINEW_EINVAL, "matches: depth needs intrinsics");
        if ((rc = check_image(ctx, in->depth0, in->depth0_name, "depth0", w, h, 1, SINEW_F32)) ||
            (rc = check_image(ctx, in->depth1, in->depth1_name, "depth1", w, h, 1, SINEW_F32)) ||
            (rc = sinew_camera_check(ctx, in->camera, "intrinsics")))
            return rc;
    }
    if (p->sampling == SINEW_SAMPLE_STRIDE && p->stride < 1)
        return sinew__fail(ctx, SINEW_EINVAL, "matches: stride must be >= 1");
    if (p->sampling == SINEW_SAMPLE_TOP_K && (p->top_k < 1 || p->cell < 1 || p->per_cell < 0))
        return sinew__fail(ctx, SINEW_EINVAL, "matches: top-K needs K >= 1 and cell >= 1");
    if (p->sampling != SINEW_SAMPLE_ALL && p->sampling != SINEW_SAMPLE_STRIDE &&
        p->sampling != SINEW_SAMPLE_TOP_K)
        return sinew__fail(ctx, SINEW_EINVAL, "matches: unknown sampling mode");
    if (isnan(p->min_weight) || !(p->edge_rel > 0) || p->edge_radius < 0 || p->edge_radius > 16 ||
        isnan(p->max_displacement) || !(p->max_displacement > 0))
        return sinew__fail(ctx, SINEW_EINVAL,
                           "matches: bad thresholds (edge_rel > 0, edge_radius 0..16, "
                           "max_displacement > 0)");
    return SINEW_OK;
}

/* Top-K candidate record. */
typedef struct cand {
    uint32_t idx, cell, rank;
    float w;
} cand;

static int cmp_cell(const void *a, const void *b)
{
    const cand *x = a, *y = b;
    if (x->cell != y->cell)
        return x->cell < y->cell ? -1 : 1;
    if (x->w != y->w)
        return x->w > y->w ? -1 : 1;
    return x->idx < y->idx ? -1 : x->idx > y->idx;
}

static int cmp_rank(const void *a, const void *b)
{
    const cand *x = a, *y = b;
    if (x->rank != y->rank)
        return x->rank < y->rank ? -1 : 1;
    if (x->w != y->w)
        return x->w > y->w ? -1 : 1;
    return x->idx < y->idx ? -1 : x->idx > y->idx;
}

/* Mark kept pixels beyond the spread top-K as SAMPLING. */
static int sample_top_k(sinew_ctx *ctx, const sinew_match_inputs *in, const sinew_match_params *p,
                        unsigned char *fate, size_t kept)
{
    int w = in->flow->width, h = in->flow->height;
    if (kept == 0)
        return SINEW_OK;
    cand *c = sinew__calloc(ctx, kept, sizeof *c);
    if (!c)
        return SINEW_ENOMEM;
    uint32_t ncx = (uint32_t)((w + p->cell - 1) / p->cell);
    size_t n = 0;
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            size_t i = (size_t)y * (size_t)w + (size_t)x;
            if (fate[i] != KEPT)
                continue;
            c[n].idx = (uint32_t)i;
            c[n].cell = (uint32_t)(y / p->cell) * ncx + (uint32_t)(x / p->cell);
            c[n].w = in->confidence ? sinew_image_row_f32(in->confidence, y)[x] : 1.0f;
            n++;
        }
    qsort(c, n, sizeof *c, cmp_cell);
    for (size_t i = 0; i < n; i++)
        c[i].rank = (i > 0 && c[i - 1].cell == c[i].cell) ? c[i - 1].rank + 1 : 0;
    qsort(c, n, sizeof *c, cmp_rank);
    for (size_t i = 0; i < n; i++)
        if (i >= p->top_k || (p->per_cell > 0 && c[i].rank >= (uint32_t)p->per_cell))
            fate[c[i].idx] = SINEW_REJECT_SAMPLING;
    sinew__free(ctx, c);
    return SINEW_OK;
}

static int cmp_u32(const void *a, const void *b)
{
    uint32_t x = *(const uint32_t *)a, y = *(const uint32_t *)b;
    return x < y ? -1 : x > y;
}

/* Per-label counts of kept matches (sorted by id) and the number of label changes. */
static int label_stats(sinew_ctx *ctx, sinew_matches *m)
{
    int c0 = sinew_matches_column(m, "label0");
    if (c0 < 0 || m->rows == 0)
        return SINEW_OK;
    uint32_t *ids = sinew__calloc(ctx, m->rows, sizeof *ids);
    if (!ids)
        return SINEW_ENOMEM;
    for (size_t i = 0; i < m->rows; i++) {
        const float *r = m->data + i * (size_t)m->cols;
        ids[i] = (uint32_t)r[c0];
        m->label_changed += r[c0] != r[c0 + 1];
    }
    qsort(ids, m->rows, sizeof *ids, cmp_u32);
    size_t distinct = 0;
    for (size_t i = 0; i < m->rows; i++)
        distinct += i == 0 || ids[i] != ids[i - 1];
    m->label_ids = sinew__calloc(ctx, distinct, sizeof *m->label_ids);
    m->label_kept = sinew__calloc(ctx, distinct, sizeof *m->label_kept);
    if (!m->label_ids || !m->label_kept) {
        sinew__free(ctx, ids);
        return SINEW_ENOMEM;
    }
    size_t k = 0;
    for (size_t i = 0; i < m->rows; i++) {
        if (i == 0 || ids[i] != ids[i - 1])
            m->label_ids[k++] = ids[i];
        m->label_kept[k - 1]++;
    }
    m->label_count = distinct;
    sinew__free(ctx, ids);
    return SINEW_OK;
}

int sinew_matches_build(sinew_ctx *ctx, sinew_matches *out, const sinew_match_inputs *in,
                        const sinew_match_params *p)
{
    if (!ctx)
        return SINEW_EINVAL;
    if (!in || !out)
        return sinew__fail(ctx, SINEW_EINVAL, "matches: inputs and output are required");
    sinew_match_params defaults;
    if (!p) {
        sinew_match_params_default(&defaults);
        p = &defaults;
    }
    memset(out, 0, sizeof *out);
    int rc = check_inputs(ctx, in, p);
    if (rc)
        return rc;
    const int w = in->flow->width, h = in->flow->height;
    job j = {in, p, w, h, -1, -1, -1};
    sinew_matches m;
    memset(&m, 0, sizeof m);
    static const char *const base[] = {"u0", "v0", "u1", "v1", "weight"};
    static const char *const xyz[] = {"X0", "Y0", "Z0", "X1", "Y1", "Z1"};
    static const char *const nrm[] = {"nx0", "ny0", "nz0", "nx1", "ny1", "nz1"};
    for (int i = 0; i < 5; i++)
        m.columns[m.cols++] = base[i];
    if (in->depth0) {
        j.col_xyz = m.cols;
        for (int i = 0; i < 6; i++)
            m.columns[m.cols++] = xyz[i];
        if (p->normals) {
            j.col_normals = m.cols;
            for (int i = 0; i < 6; i++)
                m.columns[m.cols++] = nrm[i];
        }
    }
    if (in->labels0) {
        j.col_labels = m.cols;
        m.columns[m.cols++] = "label0";
        m.columns[m.cols++] = "label1";
    }
    m.width = w;
    m.height = h;
    m.has_depth = in->depth0 != NULL;
    m.has_normals = j.col_normals >= 0;
    m.has_labels = in->labels0 != NULL;
    m.has_mask = in->mask != NULL;
    m.has_confidence = in->confidence != NULL;
    m.pixels = (size_t)w * (size_t)h;

    unsigned char *fate = sinew__alloc(ctx, m.pixels);
    if (!fate)
        return SINEW_ENOMEM;
    /* Pass 1: fate of every pixel. */
    const int stride = p->sampling == SINEW_SAMPLE_STRIDE ? p->stride : 1;
    SINEW_PARALLEL_FOR(sinew_ctx_threads(ctx))
    for (int y = 0; y < h; y++) {
        unsigned char *fr = fate + (size_t)y * (size_t)w;
        for (int x = 0; x < w; x++)
            fr[x] = (x % stride || y % stride) ? SINEW_REJECT_SAMPLING : eval_pixel(&j, x, y, NULL);
    }
    /* Pass 2: sampling and counts. */
    size_t kept = 0;
    for (size_t i = 0; i < m.pixels; i++)
        kept += fate[i] == KEPT;
    if (p->sampling == SINEW_SAMPLE_TOP_K && (rc = sample_top_k(ctx, in, p, fate, kept))) {
        sinew__free(ctx, fate);
        return rc;
    }
    kept = 0;
    for (size_t i = 0; i < m.pixels; i++) {
        if (fate[i] == KEPT)
            kept++;
        else
            m.rejected[fate[i]]++;
    }
    if (in->mask)
        for (int y = 0; y < h; y++) {
            const uint8_t *mr = sinew_image_row_u8(in->mask, y);
            for (int x = 0; x < w; x++)
                for (int b = 0; b < 8; b++)
                    m.mask_bits[b] += (mr[x] >> b) & 1;
        }
    uint32_t *sel = sinew__calloc(ctx, kept ? kept : 1, sizeof *sel);
    m.data = sinew__calloc(ctx, kept ? kept : 1, (size_t)m.cols * sizeof(float));
    if (!sel || !m.data) {
        sinew__free(ctx, sel);
        sinew__free(ctx, fate);
        sinew__free(ctx, m.data);
        return SINEW_ENOMEM;
    }
    size_t k = 0;
    for (size_t i = 0; i < m.pixels; i++)
        if (fate[i] == KEPT)
            sel[k++] = (uint32_t)i;
    sinew__free(ctx, fate);
    m.rows = kept;
    /* Pass 3: fill the rows. */
    const long nsel = (long)kept;
    SINEW_PARALLEL_FOR(sinew_ctx_threads(ctx))
    for (long i = 0; i < nsel; i++) {
        int x = (int)(sel[i] % (uint32_t)w), y = (int)(sel[i] / (uint32_t)w);
        (void)eval_pixel(&j, x, y, m.data + (size_t)i * (size_t)m.cols);
    }
    sinew__free(ctx, sel);
    if ((rc = label_stats(ctx, &m))) {
        sinew_matches_free(ctx, &m);
        return rc;
    }
    *out = m;
    return SINEW_OK;
}
