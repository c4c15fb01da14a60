/* SPDX-License-Identifier: MIT */
/* Flow error statistics, occlusion-mask scores and confidence sparsification.
 *
 * Invariants: every per-pixel quantity is computed in double from the float inputs;
 * each row accumulates into its own partial (one slot per row, written by exactly one
 * thread), and the partials are added serially in row order afterwards, so a result
 * is bit-identical for any thread count. The only allocation is the row-partial array
 * (or the sort buffer for sparsification), made before any parallel region. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "flow/internal/base.h"
#include "flow/internal/parallel.h"
#include "flow/metrics.h"

#define RAD2DEG (180.0 / 3.14159265358979323846)

/* Thresholds: R-x from Baker et al. (IJCV 2011) robustness statistics, Fl from the
 * KITTI 2015 devkit (ABS_THRESH 3.0, REL_THRESH 0.05). */
#define FL_ABS_PX 3.0
#define FL_REL 0.05

static int check_image(sinew_ctx *ctx, const sinew_image *img, const char *what, sinew_type type,
                       int channels)
{
    if (!img || !img->data || img->width < 1 || img->height < 1)
        return sinew__fail(ctx, SINEW_EINVAL, "%s: missing image", what);
    if (img->type != type || img->channels != channels)
        return sinew__fail(ctx, SINEW_EINVAL, "%s: expected %s with %d channel%s", what,
                           type == SINEW_F32 ? "float32" : "8-bit", channels,
                           channels == 1 ? "" : "s");
    return SINEW_OK;
}

static int check_same_size(sinew_ctx *ctx, const sinew_image *a, const char *wa,
                           const sinew_image *b, const char *wb)
{
    if (a->width != b->width || a->height != b->height)
        return sinew__fail(ctx, SINEW_ESIZE, "%s is %dx%d but %s is %dx%d", wa, a->width, a->height,
                           wb, b->width, b->height);
    return SINEW_OK;
}

static inline int flow_known(float u, float v)
{
    return isfinite(u) && isfinite(v);
}

/* Angle in degrees between a = (u, v, 1) and b = (ug, vg, 1) (Barron, Fleet, Beauchemin
 * 1994). The published form is acos(a.b / (|a| |b|)); atan2(|a x b|, a.b) is the same
 * angle, needs no clamp, and stays accurate for small angles, where acos of a value
 * rounded near 1 gives spurious errors of ~1e-6 degrees (identical vectors then score
 * exactly 0). The unit tests compare it with the published acos form. */
static inline double angular_error_deg(double u, double v, double ug, double vg)
{
    double cx = v - vg, cy = ug - u, cz = u * vg - v * ug; /* a x b */
    double dot = 1.0 + u * ug + v * vg;
    return atan2(sqrt(cx * cx + cy * cy + cz * cz), dot) * RAD2DEG;
}

static inline void stats_add_pixel(sinew_flow_stats *s, double ee, double ae, double gmag)
{
    s->n_valid++;
    s->sum_epe += ee;
    s->sum_ae += ae;
    s->n_r05 += ee > 0.5;
    s->n_r1 += ee > 1.0;
    s->n_r3 += ee > 3.0;
    s->n_r5 += ee > 5.0;
    s->n_fl += (ee > FL_ABS_PX) && (ee > FL_REL * gmag);
}

static void stats_add(sinew_flow_stats *a, const sinew_flow_stats *b)
{
    a->n_pairs += b->n_pairs;
    a->n_gt += b->n_gt;
    a->n_valid += b->n_valid;
    a->sum_epe += b->sum_epe;
    a->sum_ae += b->sum_ae;
    a->n_r05 += b->n_r05;
    a->n_r1 += b->n_r1;
    a->n_r3 += b->n_r3;
    a->n_r5 += b->n_r5;
    a->n_fl += b->n_fl;
}

void sinew_flow_errors_add(sinew_flow_errors *acc, const sinew_flow_errors *e)
{
    if (!acc || !e)
        return;
    for (int r = 0; r < SINEW_REGION_COUNT; r++)
        stats_add(&acc->region[r], &e->region[r]);
    acc->has_occ = acc->has_occ || e->has_occ;
}

static void score_row(sinew_flow_errors *part, const sinew_image *est, const sinew_image *gt,
                      const sinew_image *occ, const sinew_image *mask, int y)
{
    const float *e = sinew_image_row_f32(est, y);
    const float *g = sinew_image_row_f32(gt, y);
    const uint8_t *o = occ ? sinew_image_row_u8(occ, y) : NULL;
    const uint8_t *m = mask ? sinew_image_row_u8(mask, y) : NULL;
    for (int x = 0; x < est->width; x++) {
        float ug = g[2 * x], vg = g[2 * x + 1];
        if (!flow_known(ug, vg) || (m && !m[x]))
            continue;
        sinew_flow_stats *region2 = NULL;
        if (o)
            region2 = &part->region[o[x] ? SINEW_REGION_OCC : SINEW_REGION_NOC];
        part->region[SINEW_REGION_ALL].n_gt++;
        if (region2)
            region2->n_gt++;
        float u = e[2 * x], v = e[2 * x + 1];
        if (!flow_known(u, v))
            continue;
        double du = (double)u - (double)ug, dv = (double)v - (double)vg;
        double ee = sqrt(du * du + dv * dv);
        double ae = angular_error_deg(u, v, ug, vg);
        double gmag = sqrt((double)ug * ug + (double)vg * vg);
        stats_add_pixel(&part->region[SINEW_REGION_ALL], ee, ae, gmag);
        if (region2)
            stats_add_pixel(region2, ee, ae, gmag);
    }
}

int sinew_flow_errors_compute(sinew_ctx *ctx, sinew_flow_errors *out, const sinew_image *est,
                              const sinew_image *gt, const sinew_image *occ,
                              const sinew_image *mask)
{
    if (!ctx || !out)
        return SINEW_EINVAL;
    memset(out, 0, sizeof *out);
    int st;
    if ((st = check_image(ctx, est, "estimate", SINEW_F32, 2)) ||
        (st = check_image(ctx, gt, "ground truth", SINEW_F32, 2)) ||
        (st = check_same_size(ctx, est, "the estimate", gt, "the ground truth")))
        return st;
    if (occ && ((st = check_image(ctx, occ, "occlusion mask", SINEW_U8, 1)) ||
                (st = check_same_size(ctx, occ, "the occlusion mask", gt, "the ground truth"))))
        return st;
    if (mask && ((st = check_image(ctx, mask, "evaluation mask", SINEW_U8, 1)) ||
                 (st = check_same_size(ctx, mask, "the evaluation mask", gt, "the ground truth"))))
        return st;

    int h = gt->height;
    sinew_flow_errors *part = sinew__calloc(ctx, (size_t)h, sizeof *part);
    if (!part)
        return SINEW_ENOMEM;
    SINEW_PARALLEL_FOR(sinew_ctx_threads(ctx))
    for (int y = 0; y < h; y++)
        score_row(&part[y], est, gt, occ, mask, y);
    for (int y = 0; y < h; y++)
        sinew_flow_errors_add(out, &part[y]);
    sinew__free(ctx, part);

    out->has_occ = occ != NULL;
    out->region[SINEW_REGION_ALL].n_pairs = 1;
    if (occ) {
        out->region[SINEW_REGION_NOC].n_pairs = 1;
        out->region[SINEW_REGION_OCC].n_pairs = 1;
    }
    return SINEW_OK;
}

int sinew_flow_epe_map(sinew_ctx *ctx, sinew_image *out, const sinew_image *est,
                       const sinew_image *gt)
{
    if (!ctx)
        return SINEW_EINVAL;
    int st;
    if ((st = check_image(ctx, est, "estimate", SINEW_F32, 2)) ||
        (st = check_image(ctx, gt, "ground truth", SINEW_F32, 2)) ||
        (st = check_image(ctx, out, "error map", SINEW_F32, 1)) ||
        (st = check_same_size(ctx, est, "the estimate", gt, "the ground truth")) ||
        (st = check_same_size(ctx, out, "the error map", gt, "the ground truth")))
        return st;
    int h = gt->height, w = gt->width;
    SINEW_PARALLEL_FOR(sinew_ctx_threads(ctx))
    for (int y = 0; y < h; y++) {
        const float *e = sinew_image_row_f32(est, y);
        const float *g = sinew_image_row_f32(gt, y);
        float *o = sinew_image_row_f32(out, y);
        for (int x = 0; x < w; x++) {
            if (!flow_known(e[2 * x], e[2 * x + 1]) || !flow_known(g[2 * x], g[2 * x + 1])) {
                o[x] = NAN;
                continue;
            }
            double du = (double)e[2 * x] - (double)g[2 * x];
            double dv = (double)e[2 * x + 1] - (double)g[2 * x + 1];
            o[x] = (float)sqrt(du * du + dv * dv);
        }
    }
    return SINEW_OK;
}

const char *sinew_averaging_name(sinew_averaging a)
{
    return a == SINEW_AVG_PAIR_MEAN ? "mean-of-pairs" : "pooled-pixels";
}

const char *sinew_averaging_text(sinew_averaging a)
{
    return a == SINEW_AVG_PAIR_MEAN ? "unweighted mean of per-pair values"
                                    : "pooled over all scored pixels";
}

static double pct(int64_t k, int64_t n)
{
    return n > 0 ? 100.0 * (double)k / (double)n : NAN;
}

void sinew_flow_stats_summarize(sinew_flow_summary *out, const sinew_flow_stats *s)
{
    if (!out || !s)
        return;
    int64_t n = s->n_valid;
    double dn = (double)n;
    out->averaging = SINEW_AVG_POOLED;
    out->n_pairs = s->n_pairs;
    out->n_gt = s->n_gt;
    out->n_valid = n;
    out->epe = n > 0 ? s->sum_epe / dn : NAN;
    out->aae_deg = n > 0 ? s->sum_ae / dn : NAN;
    out->r05_pct = pct(s->n_r05, n);
    out->r1_pct = pct(s->n_r1, n);
    out->r3_pct = pct(s->n_r3, n);
    out->r5_pct = pct(s->n_r5, n);
    out->fl_all_pct = pct(s->n_fl, n);
    out->density_pct = pct(s->n_valid, s->n_gt);
}

void sinew_flow_summary_mean(sinew_flow_summary *out, const sinew_flow_summary *pairs, size_t n)
{
    if (!out)
        return;
    memset(out, 0, sizeof *out);
    out->averaging = SINEW_AVG_PAIR_MEAN;
    double acc[8] = {0};
    int64_t used = 0;
    for (size_t i = 0; pairs && i < n; i++) {
        const sinew_flow_summary *p = &pairs[i];
        out->n_gt += p->n_gt;
        out->n_valid += p->n_valid;
        if (p->n_valid <= 0)
            continue;
        const double v[8] = {p->epe,    p->aae_deg, p->r05_pct,    p->r1_pct,
                             p->r3_pct, p->r5_pct,  p->fl_all_pct, p->density_pct};
        for (int k = 0; k < 8; k++)
            acc[k] += v[k];
        used++;
    }
    double *dst[8] = {&out->epe,    &out->aae_deg, &out->r05_pct,    &out->r1_pct,
                      &out->r3_pct, &out->r5_pct,  &out->fl_all_pct, &out->density_pct};
    for (int k = 0; k < 8; k++)
        *dst[k] = used > 0 ? acc[k] / (double)used : NAN;
    out->n_pairs = used;
}

/* ---- occlusion masks ---- */

int sinew_mask_scores_compute(sinew_ctx *ctx, sinew_mask_scores *out, const sinew_image *pred,
                              const sinew_image *truth, const sinew_image *valid, unsigned bits)
{
    if (!ctx || !out)
        return SINEW_EINVAL;
    memset(out, 0, sizeof *out);
    int st;
    if ((st = check_image(ctx, pred, "predicted mask", SINEW_U8, 1)) ||
        (st = check_image(ctx, truth, "ground-truth occlusion", SINEW_U8, 1)) ||
        (st =
             check_same_size(ctx, pred, "the predicted mask", truth, "the ground-truth occlusion")))
        return st;
    if (valid && ((st = check_image(ctx, valid, "validity mask", SINEW_U8, 1)) ||
                  (st = check_same_size(ctx, valid, "the validity mask", truth,
                                        "the ground-truth occlusion"))))
        return st;
    int h = truth->height, w = truth->width;
    sinew_mask_scores *part = sinew__calloc(ctx, (size_t)h, sizeof *part);
    if (!part)
        return SINEW_ENOMEM;
    SINEW_PARALLEL_FOR(sinew_ctx_threads(ctx))
    for (int y = 0; y < h; y++) {
        const uint8_t *p = sinew_image_row_u8(pred, y);
        const uint8_t *t = sinew_image_row_u8(truth, y);
        const uint8_t *v = valid ? sinew_image_row_u8(valid, y) : NULL;
        sinew_mask_scores s = {0, 0, 0, 0};
        for (int x = 0; x < w; x++) {
            if (v && !v[x])
                continue;
            int pp = bits ? (p[x] & bits) != 0 : p[x] != 0;
            int tt = t[x] != 0;
            s.tp += pp && tt;
            s.fp += pp && !tt;
            s.fn += !pp && tt;
            s.tn += !pp && !tt;
        }
        part[y] = s;
    }
    for (int y = 0; y < h; y++) {
        out->tp += part[y].tp;
        out->fp += part[y].fp;
        out->fn += part[y].fn;
        out->tn += part[y].tn;
    }
    sinew__free(ctx, part);
    return SINEW_OK;
}

void sinew_mask_scores_rates(const sinew_mask_scores *s, double *precision, double *recall,
                             double *f1)
{
    if (!s)
        return;
    double p = s->tp + s->fp > 0 ? (double)s->tp / (double)(s->tp + s->fp) : NAN;
    double r = s->tp + s->fn > 0 ? (double)s->tp / (double)(s->tp + s->fn) : NAN;
    double f = NAN;
    if (isfinite(p) && isfinite(r))
        f = p + r > 0 ? 2.0 * p * r / (p + r) : 0.0;
    if (precision)
        *precision = p;
    if (recall)
        *recall = r;
    if (f1)
        *f1 = f;
}

/* ---- sparsification ---- */

typedef struct {
    float key;
    size_t idx;
} keyed;

/* Descending key, ascending index among equal keys: a total order, so qsort's lack of
 * stability does not matter and the result is deterministic. */
static int cmp_keyed_desc(const void *a, const void *b)
{
    const keyed *x = a, *y = b;
    if (x->key > y->key)
        return -1;
    if (x->key < y->key)
        return 1;
    return (x->idx > y->idx) - (x->idx < y->idx);
}

/* r_k = floor(k n / steps) without overflow. */
static size_t removed_count(size_t k, size_t n, size_t steps)
{
    return k * (n / steps) + (k * (n % steps)) / steps;
}

/* Fill curve[0..steps-1] for the order in `buf` (sorted). */
static void remainder_curve(const keyed *buf, const float *error, size_t n, int steps,
                            double *curve)
{
    double sum = 0.0;
    size_t j = n; /* sum holds error of buf[j..n-1] */
    for (int k = steps - 1; k >= 0; k--) {
        size_t r = removed_count((size_t)k, n, (size_t)steps);
        while (j > r) {
            j--;
            sum += (double)error[buf[j].idx];
        }
        curve[k] = sum / (double)(n - r); /* mean of the remainder; normalised below */
    }
    double full = curve[0];
    for (int k = 0; k < steps; k++)
        curve[k] = full > 0.0 ? curve[k] / full : 0.0;
}

int sinew_sparsification(sinew_ctx *ctx, double *curve, double *oracle, double *ause,
                         const float *uncertainty, const float *error, size_t n, int steps)
{
    if (!ctx)
        return SINEW_EINVAL;
    if (!uncertainty || !error || n < 1 || steps < 1)
        return sinew__fail(ctx, SINEW_EINVAL,
                           "sparsification: need n >= 1 values and steps >= 1 (n=%zu, steps=%d)", n,
                           steps);
    for (size_t i = 0; i < n; i++) {
        if (!isfinite(uncertainty[i]))
            return sinew__fail(ctx, SINEW_EVALUE, "sparsification: uncertainty %zu is not finite",
                               i);
        if (!isfinite(error[i]) || error[i] < 0.0f)
            return sinew__fail(ctx, SINEW_EVALUE,
                               "sparsification: error %zu is not a finite value >= 0", i);
    }
    keyed *buf = sinew__calloc(ctx, n, sizeof *buf);
    double *tmp = sinew__calloc(ctx, (size_t)steps * 2, sizeof *tmp);
    if (!buf || !tmp) {
        sinew__free(ctx, buf);
        sinew__free(ctx, tmp);
        return SINEW_ENOMEM;
    }
    double *c = tmp, *o = tmp + steps;
    for (size_t i = 0; i < n; i++)
        buf[i] = (keyed){uncertainty[i], i};
    qsort(buf, n, sizeof *buf, cmp_keyed_desc);
    remainder_curve(buf, error, n, steps, c);
    for (size_t i = 0; i < n; i++)
        buf[i] = (keyed){error[i], i};
    qsort(buf, n, sizeof *buf, cmp_keyed_desc);
    remainder_curve(buf, error, n, steps, o);

    double area = 0.0;
    for (int k = 0; k + 1 < steps; k++)
        area += ((c[k] - o[k]) + (c[k + 1] - o[k + 1])) * 0.5 / (double)steps;
    if (curve)
        memcpy(curve, c, (size_t)steps * sizeof *c);
    if (oracle)
        memcpy(oracle, o, (size_t)steps * sizeof *o);
    if (ause)
        *ause = area;
    sinew__free(ctx, buf);
    sinew__free(ctx, tmp);
    return SINEW_OK;
}

int sinew_calibration_compute(sinew_ctx *ctx, sinew_calibration *out, const float *confidence,
                              const float *error, size_t n, double threshold, int nbins)
{
    if (!ctx)
        return SINEW_EINVAL;
    if (!out || !confidence || !error || n < 1 || nbins < 1 || nbins > SINEW_CALIBRATION_MAX_BINS ||
        !(threshold >= 0))
        return sinew__fail(ctx, SINEW_EINVAL,
                           "calibration: need n >= 1 values, 1..%d bins and a threshold >= 0",
                           SINEW_CALIBRATION_MAX_BINS);
    for (size_t i = 0; i < n; i++) {
        if (!(confidence[i] >= 0.0f && confidence[i] <= 1.0f))
            return sinew__fail(ctx, SINEW_EVALUE, "calibration: confidence %zu is not in [0, 1]",
                               i);
        if (!isfinite(error[i]) || error[i] < 0.0f)
            return sinew__fail(ctx, SINEW_EVALUE,
                               "calibration: error %zu is not a finite value >= 0", i);
    }
    memset(out, 0, sizeof *out);
    out->nbins = nbins;
    out->threshold = threshold;
    out->n = (int64_t)n;
    double csum[SINEW_CALIBRATION_MAX_BINS] = {0}, hits[SINEW_CALIBRATION_MAX_BINS] = {0};
    for (size_t i = 0; i < n; i++) {
        int b = (int)(confidence[i] * nbins);
        if (b >= nbins)
            b = nbins - 1;
        out->count[b]++;
        csum[b] += confidence[i];
        hits[b] += error[i] <= threshold;
    }
    double ece = 0;
    for (int b = 0; b < nbins; b++) {
        if (!out->count[b]) {
            out->mean_confidence[b] = out->observed[b] = NAN;
            continue;
        }
        double c = (double)out->count[b];
        out->mean_confidence[b] = csum[b] / c;
        out->observed[b] = hits[b] / c;
        ece += c / (double)n * fabs(out->observed[b] - out->mean_confidence[b]);
    }
    out->ece = ece;
    return SINEW_OK;
}
