/* SPDX-License-Identifier: MIT */
/* Flow accuracy against ground truth: endpoint and angular error, robustness
 * percentages, the KITTI outlier rate, split into non-occluded / occluded pixels;
 * occlusion-mask precision/recall/F1; confidence sparsification and AUSE.
 *
 * Per-pixel definitions (docs/methods.md, section "Metrics", gives sources):
 *   EE  = sqrt((u - ug)^2 + (v - vg)^2)                              [px]
 *   AE  = acos((1 + u*ug + v*vg) / (sqrt(1 + u^2 + v^2) * sqrt(1 + ug^2 + vg^2)))  [deg]
 *         the angle between (u, v, 1) and (ug, vg, 1), evaluated as the equal but
 *         numerically stable atan2(|a x b|, a . b) (no clamp needed; exact 0 for equal
 *         vectors)
 *   Rx  = EE > x for x in {0.5, 1, 3, 5}
 *   Fl  = EE > 3 px AND EE > 0.05 * |(ug, vg)|   (KITTI 2015 devkit)
 *
 * Which pixels count: a pixel enters the statistics of a region when the ground truth
 * is known there (both components finite; the readers map each format's unknown code
 * to NaN), the optional evaluation mask is nonzero, AND the estimate is known (both
 * components finite). Pixels with known ground truth but an unknown estimate are not
 * scored; they are counted in n_gt but not n_valid, so density = n_valid / n_gt
 * reports how much of the ground truth the estimate covers. Every output states this
 * density beside the errors. (The KITTI benchmark instead fills holes before scoring;
 * sinew keeps masked flow masked and reports the density.)
 *
 * All sums are double; per-row partial sums are added serially in row order, so the
 * numbers are bit-identical for any thread count. */
#ifndef SINEW_METRICS_H
#define SINEW_METRICS_H

#include "flow/core.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Raw sums of one region over one or more pairs. Adding two of these (field by field,
 * sinew_flow_errors_add) pools pixels; the ratios are taken only when summarising. */
typedef struct sinew_flow_stats {
    int64_t n_pairs; /* pairs that contributed (for pooled sums) */
    int64_t n_gt;    /* pixels with known ground truth inside the evaluation mask */
    int64_t n_valid; /* of those, pixels where the estimate is known too (scored) */
    double sum_epe;  /* sum of EE over scored pixels, px */
    double sum_ae;   /* sum of AE over scored pixels, degrees */
    int64_t n_r05;   /* scored pixels with EE > 0.5 px */
    int64_t n_r1;    /* EE > 1 px */
    int64_t n_r3;    /* EE > 3 px */
    int64_t n_r5;    /* EE > 5 px */
    int64_t n_fl;    /* KITTI outliers: EE > 3 px and EE > 0.05 |gt| */
} sinew_flow_stats;

/* Regions: all scored pixels, non-occluded, occluded. */
typedef enum sinew_region {
    SINEW_REGION_ALL = 0,
    SINEW_REGION_NOC = 1,
    SINEW_REGION_OCC = 2,
    SINEW_REGION_COUNT = 3
} sinew_region;

/* Per-pair (or pooled) sums for every region. has_occ is 1 when an occlusion mask was
 * given (then all = noc + occ exactly), 0 otherwise (noc/occ are zero). */
typedef struct sinew_flow_errors {
    sinew_flow_stats region[SINEW_REGION_COUNT];
    int has_occ;
} sinew_flow_errors;

/* Score one pair.
 *   est, gt: SINEW_F32, 2 channels (u, v) in pixels, equal size; NaN/Inf = unknown.
 *   occ:     NULL, or SINEW_U8 1 channel of the same size, nonzero = occluded in truth.
 *   mask:    NULL, or SINEW_U8 1 channel of the same size, nonzero = evaluate here
 *            (use it for dataset validity masks and user regions).
 * *out is overwritten. Returns SINEW_OK, EINVAL (NULL/wrong type or channels) or ESIZE
 * (sizes differ; the message gives both sizes) or ENOMEM. Rows run in parallel on
 * sinew_ctx_threads(ctx) threads; the result does not depend on the thread count. */
int sinew_flow_errors_compute(sinew_ctx *ctx, sinew_flow_errors *out, const sinew_image *est,
                              const sinew_image *gt, const sinew_image *occ,
                              const sinew_image *mask);

/* Pool: acc += e (every sum and count, per region; has_occ becomes the OR). */
void sinew_flow_errors_add(sinew_flow_errors *acc, const sinew_flow_errors *e);

/* Per-pixel endpoint error map: out is a caller-allocated SINEW_F32 1-channel image of
 * the flow's size; receives EE where both flows are known, NaN elsewhere. EINVAL/ESIZE. */
int sinew_flow_epe_map(sinew_ctx *ctx, sinew_image *out, const sinew_image *est,
                       const sinew_image *gt);

/* How a summary was averaged. Always report it with the numbers. */
typedef enum sinew_averaging {
    SINEW_AVG_POOLED = 0,   /* ratios of sums over all scored pixels of all pairs (one
                               pair: the usual per-image mean) */
    SINEW_AVG_PAIR_MEAN = 1 /* unweighted mean over pairs of each pair's own value */
} sinew_averaging;

/* Stable name of an averaging for outputs: "pooled-pixels" or "mean-of-pairs". */
const char *sinew_averaging_name(sinew_averaging a);
/* A one-line description for readers, e.g. "pooled over all scored pixels". */
const char *sinew_averaging_text(sinew_averaging a);

/* Final numbers of one region. Values are NaN when n_valid is 0 (nothing scored). */
typedef struct sinew_flow_summary {
    sinew_averaging averaging;
    int64_t n_pairs; /* pairs pooled or averaged (mean: pairs with n_valid > 0) */
    int64_t n_gt;    /* total pixels with known ground truth */
    int64_t n_valid; /* total scored pixels */
    double epe;      /* px */
    double aae_deg;  /* degrees */
    double r05_pct;  /* % of scored pixels with EE > 0.5 px */
    double r1_pct;
    double r3_pct;
    double r5_pct;
    double fl_all_pct;  /* % KITTI outliers */
    double density_pct; /* 100 n_valid / n_gt (mean: mean of per-pair densities) */
} sinew_flow_summary;

/* Pooled summary of one region's sums (averaging = SINEW_AVG_POOLED). */
void sinew_flow_stats_summarize(sinew_flow_summary *out, const sinew_flow_stats *s);

/* Mean of per-pair summaries (averaging = SINEW_AVG_PAIR_MEAN): each field is the
 * unweighted mean over the pairs with n_valid > 0; n_gt/n_valid are totals. pairs may
 * be NULL when n == 0 (result: NaN values, zero counts). */
void sinew_flow_summary_mean(sinew_flow_summary *out, const sinew_flow_summary *pairs, size_t n);

/* ---- occlusion masks ---------------------------------------------------------------
 * Confusion counts of a predicted occlusion mask against the ground truth. */
typedef struct sinew_mask_scores {
    int64_t tp, fp, fn, tn;
} sinew_mask_scores;

/* pred: SINEW_U8 1 channel; a pixel is predicted occluded when (pred & bits) != 0, or
 * when pred != 0 if bits == 0 (e.g. bits = SINEW_MASK_OCCLUDED | SINEW_MASK_OUTSIDE for
 * sinew's check masks). truth: SINEW_U8 1 channel, nonzero = occluded. valid: NULL or
 * SINEW_U8 1 channel, nonzero = count this pixel. Same sizes. *out is overwritten.
 * EINVAL / ESIZE / ENOMEM. Deterministic for any thread count. */
int sinew_mask_scores_compute(sinew_ctx *ctx, sinew_mask_scores *out, const sinew_image *pred,
                              const sinew_image *truth, const sinew_image *valid, unsigned bits);
/* precision = tp/(tp+fp), recall = tp/(tp+fn), F1 = 2PR/(P+R); each NaN when its
 * denominator is 0. Any output pointer may be NULL. */
void sinew_mask_scores_rates(const sinew_mask_scores *s, double *precision, double *recall,
                             double *f1);

/* ---- confidence: sparsification ----------------------------------------------------
 * Sparsification curve, oracle curve and AUSE (Ilg et al., ECCV 2018), pinned:
 *   order      pixels by uncertainty, most uncertain first; equal uncertainties in
 *              increasing index order (deterministic);
 *   curve[k]   for k = 0..steps-1: remove the first r_k = floor(k * n / steps) pixels
 *              of that order; curve[k] = mean error of the remaining n - r_k pixels
 *              divided by the mean error of all n pixels (curve[0] = 1);
 *   oracle[k]  the same with the order by true error, largest first (ties by index);
 *   ause       trapezoid area of (curve - oracle) sampled at f_k = k / steps,
 *              k = 0..steps-1, step 1/steps:
 *              sum_{k=0}^{steps-2} ((curve-oracle)[k] + (curve-oracle)[k+1]) / (2 steps).
 *   If the mean error of all pixels is 0, curve = oracle = 0 and ause = 0.
 * uncertainty, error: n >= 1 finite values (higher uncertainty = less confident; pass
 * 1 - confidence or the forward-backward error). curve and oracle: NULL or arrays of
 * `steps` doubles (steps >= 1); ause: NULL or one double. Returns EINVAL (bad sizes),
 * EVALUE (a non-finite input, message gives its index) or ENOMEM. */
int sinew_sparsification(sinew_ctx *ctx, double *curve, double *oracle, double *ause,
                         const float *uncertainty, const float *error, size_t n, int steps);

/* ---- confidence: calibration ------------------------------------------------------
 * A confidence read as the probability that a pixel is correct, i.e. its error is at
 * most `threshold` (sinew: P(EPE <= 1 px)). Reliability diagram and expected calibration
 * error (Naeini, Cooper, Hauskrecht, AAAI 2015), pinned:
 *   bin b (0..nbins-1) holds the pixels with b/nbins <= c < (b+1)/nbins (c = 1 in the
 *   last bin); count[b] pixels, mean_confidence[b] their mean c, observed[b] their share
 *   with error <= threshold (NaN for an empty bin);
 *   ece = sum over non-empty bins of count[b]/n * |observed[b] - mean_confidence[b]|.
 * Sums in double in index order (deterministic). */
#define SINEW_CALIBRATION_MAX_BINS 100
typedef struct sinew_calibration {
    int nbins;
    double threshold;
    int64_t n;
    int64_t count[SINEW_CALIBRATION_MAX_BINS];
    double mean_confidence[SINEW_CALIBRATION_MAX_BINS];
    double observed[SINEW_CALIBRATION_MAX_BINS];
    double ece;
} sinew_calibration;

/* confidence: n values in [0, 1]; error: n finite values >= 0 (e.g. EPE in px);
 * threshold >= 0; 1 <= nbins <= SINEW_CALIBRATION_MAX_BINS; n >= 1. *out overwritten.
 * EINVAL (bad sizes or arguments), EVALUE (a value out of range; the message gives its
 * index). */
int sinew_calibration_compute(sinew_ctx *ctx, sinew_calibration *out, const float *confidence,
                              const float *error, size_t n, double threshold, int nbins);

#ifdef __cplusplus
}
#endif
#endif
