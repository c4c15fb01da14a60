/* SPDX-License-Identifier: MIT */
/* Unit tests for flow/metrics.c on tiny arrays whose values are worked out by hand in
 * the comments. Formula sources: EE and AE (the (u,v,1) angle) from Baker et al.,
 * IJCV 92(1), 2011, following Barron, Fleet, Beauchemin, IJCV 12(1), 1994; the Fl
 * outlier rule from the KITTI 2015 devkit (EE > 3 px and EE/|gt| > 0.05; Menze &
 * Geiger, CVPR 2015); sparsification/AUSE from Ilg et al., ECCV 2018, with the
 * discretisation pinned in flow/metrics.h. */
#include "tests/support/testutil.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "flow/metrics.h"

#define EPS 1e-9

static void flow_set(sinew_image *f, int x, int y, float u, float v)
{
    float *r = sinew_image_row_f32(f, y);
    r[2 * x] = u;
    r[2 * x + 1] = v;
}

static void assert_close(double a, double b, double eps)
{
    if (!(fabs(a - b) <= eps))
        fail_msg("expected %.12g, got %.12g (tolerance %g)", b, a, eps);
}

/* A 2x2 pair used by several tests.
 *   px (0,0): gt (0,0),   est (0,0)  -> EE 0, AE 0
 *   px (1,0): gt (1,0),   est (1,1)  -> EE 1
 *             AE = acos((1 + 1*1 + 1*0) / (sqrt(1+1+1) sqrt(1+1+0))) = acos(2/sqrt 6)
 *                = 35.26438968275465 deg
 *   px (0,1): gt (3,4),   est (0,0)  -> EE 5, AE = acos(1/sqrt 26) = atan 5
 *                = 78.69006752597979 deg
 *   px (1,1): gt unknown (NaN)        -> not counted anywhere */
static void make_pair(sinew_ctx *ctx, sinew_image *est, sinew_image *gt)
{
    assert_int_equal(sinew_image_alloc(ctx, est, 2, 2, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, gt, 2, 2, 2, SINEW_F32), SINEW_OK);
    flow_set(gt, 0, 0, 0, 0);
    flow_set(est, 0, 0, 0, 0);
    flow_set(gt, 1, 0, 1, 0);
    flow_set(est, 1, 0, 1, 1);
    flow_set(gt, 0, 1, 3, 4);
    flow_set(est, 0, 1, 0, 0);
    flow_set(gt, 1, 1, NAN, NAN);
    flow_set(est, 1, 1, 7, 7);
}

static void test_metrics_hand_computed_pair(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image est, gt;
    make_pair(ctx, &est, &gt);
    sinew_flow_errors e;
    assert_int_equal(sinew_flow_errors_compute(ctx, &e, &est, &gt, NULL, NULL), SINEW_OK);
    assert_int_equal(e.has_occ, 0);
    const sinew_flow_stats *a = &e.region[SINEW_REGION_ALL];
    assert_int_equal(a->n_gt, 3);
    assert_int_equal(a->n_valid, 3);
    assert_int_equal(e.region[SINEW_REGION_NOC].n_gt, 0);
    sinew_flow_summary s;
    sinew_flow_stats_summarize(&s, a);
    assert_int_equal(s.averaging, SINEW_AVG_POOLED);
    assert_close(s.epe, (0.0 + 1.0 + 5.0) / 3.0, EPS); /* = 2 */
    assert_close(s.aae_deg, (0.0 + 35.26438968275465 + 78.69006752597979) / 3.0, 1e-9);
    assert_close(s.r05_pct, 100.0 * 2 / 3, EPS); /* EE 1 and 5 are > 0.5 */
    assert_close(s.r1_pct, 100.0 * 1 / 3, EPS);  /* only EE 5 (> is strict: 1 is not > 1) */
    assert_close(s.r3_pct, 100.0 * 1 / 3, EPS);
    assert_close(s.r5_pct, 0.0, EPS);           /* 5 is not > 5 */
    assert_close(s.fl_all_pct, 100.0 / 3, EPS); /* 5 > 3 and 5 > 0.05*5 */
    assert_close(s.density_pct, 100.0, EPS);
    sinew_image_free(&est);
    sinew_image_free(&gt);
    sinew_ctx_free(ctx);
}

/* Unknown estimate where the ground truth is known: counted in n_gt, not scored. */
static void test_metrics_missing_estimate_lowers_density(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image est, gt;
    make_pair(ctx, &est, &gt);
    flow_set(&est, 0, 1, NAN, 0); /* the EE-5 pixel becomes unknown */
    sinew_flow_errors e;
    assert_int_equal(sinew_flow_errors_compute(ctx, &e, &est, &gt, NULL, NULL), SINEW_OK);
    sinew_flow_summary s;
    sinew_flow_stats_summarize(&s, &e.region[SINEW_REGION_ALL]);
    assert_int_equal(s.n_gt, 3);
    assert_int_equal(s.n_valid, 2);
    assert_close(s.epe, 0.5, EPS);               /* (0 + 1) / 2 */
    assert_close(s.density_pct, 200.0 / 3, EPS); /* 2 of 3 */
    sinew_image_free(&est);
    sinew_image_free(&gt);
    sinew_ctx_free(ctx);
}

static void test_metrics_occlusion_split_and_mask(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image est, gt, occ, mask;
    make_pair(ctx, &est, &gt);
    assert_int_equal(sinew_image_alloc(ctx, &occ, 2, 2, 1, SINEW_U8), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &mask, 2, 2, 1, SINEW_U8), SINEW_OK);
    sinew_image_row_u8(&occ, 1)[0] = 255; /* the EE-5 pixel is occluded */
    sinew_flow_errors e;
    assert_int_equal(sinew_flow_errors_compute(ctx, &e, &est, &gt, &occ, NULL), SINEW_OK);
    assert_int_equal(e.has_occ, 1);
    sinew_flow_summary noc, oc;
    sinew_flow_stats_summarize(&noc, &e.region[SINEW_REGION_NOC]);
    sinew_flow_stats_summarize(&oc, &e.region[SINEW_REGION_OCC]);
    assert_int_equal(noc.n_valid, 2);
    assert_close(noc.epe, 0.5, EPS); /* (0 + 1) / 2 */
    assert_int_equal(oc.n_valid, 1);
    assert_close(oc.epe, 5.0, EPS);
    /* Evaluation mask: only the first row (EE 0 and 1). */
    sinew_image_row_u8(&mask, 0)[0] = 1;
    sinew_image_row_u8(&mask, 0)[1] = 1;
    assert_int_equal(sinew_flow_errors_compute(ctx, &e, &est, &gt, &occ, &mask), SINEW_OK);
    assert_int_equal(e.region[SINEW_REGION_ALL].n_valid, 2);
    assert_int_equal(e.region[SINEW_REGION_OCC].n_gt, 0);
    sinew_flow_summary occ_empty;
    sinew_flow_stats_summarize(&occ_empty, &e.region[SINEW_REGION_OCC]);
    assert_true(isnan(occ_empty.epe));
    sinew_image_free(&est);
    sinew_image_free(&gt);
    sinew_image_free(&occ);
    sinew_image_free(&mask);
    sinew_ctx_free(ctx);
}

/* KITTI 2015 devkit rule: outlier iff EE > 3 px AND EE / |gt| > 0.05. Crafted cases:
 *   gt (100,0) est (104,0): EE 4 > 3 but 4/100 = 0.04   -> inlier
 *   gt (10,0)  est (14,0):  EE 4 > 3 and 4/10 = 0.4     -> outlier
 *   gt (0,0)   est (3.5,0): EE 3.5, |gt| = 0            -> outlier (ratio infinite)
 *   gt (0,0)   est (3,0):   EE 3 is not > 3             -> inlier
 *   gt (200,0) est (209,0): EE 9, 9/200 = 0.045         -> inlier
 *   gt (200,0) est (211,0): EE 11, 11/200 = 0.055       -> outlier
 * -> 3 outliers of 6 = 50 %. */
static void test_metrics_kitti_outlier_rule(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image est, gt;
    assert_int_equal(sinew_image_alloc(ctx, &est, 6, 1, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &gt, 6, 1, 2, SINEW_F32), SINEW_OK);
    const float g[6] = {100, 10, 0, 0, 200, 200}, e[6] = {104, 14, 3.5f, 3, 209, 211};
    for (int x = 0; x < 6; x++) {
        flow_set(&gt, x, 0, g[x], 0);
        flow_set(&est, x, 0, e[x], 0);
    }
    sinew_flow_errors r;
    assert_int_equal(sinew_flow_errors_compute(ctx, &r, &est, &gt, NULL, NULL), SINEW_OK);
    assert_int_equal(r.region[SINEW_REGION_ALL].n_fl, 3);
    assert_int_equal(r.region[SINEW_REGION_ALL].n_r3, 5); /* all but EE == 3 */
    sinew_flow_summary s;
    sinew_flow_stats_summarize(&s, &r.region[SINEW_REGION_ALL]);
    assert_close(s.fl_all_pct, 50.0, EPS);
    sinew_image_free(&est);
    sinew_image_free(&gt);
    sinew_ctx_free(ctx);
}

/* AE against the published formula evaluated directly (Barron et al. 1994 eq. for the
 * angle between (u,v,1) and (ug,vg,1)), on a spread of vectors, plus the clamp: equal
 * large vectors must give exactly 0, not NaN from acos(1 + rounding). */
static void test_metrics_angular_error_formula(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image est, gt;
    assert_int_equal(sinew_image_alloc(ctx, &est, 1, 1, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &gt, 1, 1, 2, SINEW_F32), SINEW_OK);
    const float cases[][4] = {
        {0.5f, -0.25f, 0.4f, -0.2f}, {-3, 2, 1, 1}, {10, 0, 0, 10}, {0, 0, -2, 0}, {1e-3f, 0, 0, 0},
        {-7.5f, 3, 7.5f, -3}};
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        double u = cases[i][0], v = cases[i][1], ug = cases[i][2], vg = cases[i][3];
        flow_set(&est, 0, 0, (float)u, (float)v);
        flow_set(&gt, 0, 0, (float)ug, (float)vg);
        sinew_flow_errors r;
        assert_int_equal(sinew_flow_errors_compute(ctx, &r, &est, &gt, NULL, NULL), SINEW_OK);
        double ref =
            acos((1 + u * ug + v * vg) / (sqrt(1 + u * u + v * v) * sqrt(1 + ug * ug + vg * vg))) *
            180.0 / 3.14159265358979323846;
        assert_close(r.region[SINEW_REGION_ALL].sum_ae, ref, 1e-9);
    }
    /* Second case worked by hand: est (-3,2), gt (1,1): dot = 1 - 3 + 2 = 0 -> 90 deg. */
    flow_set(&est, 0, 0, -3, 2);
    flow_set(&gt, 0, 0, 1, 1);
    sinew_flow_errors r;
    assert_int_equal(sinew_flow_errors_compute(ctx, &r, &est, &gt, NULL, NULL), SINEW_OK);
    assert_close(r.region[SINEW_REGION_ALL].sum_ae, 90.0, 1e-12);
    flow_set(&est, 0, 0, 123.456f, -654.321f);
    flow_set(&gt, 0, 0, 123.456f, -654.321f);
    assert_int_equal(sinew_flow_errors_compute(ctx, &r, &est, &gt, NULL, NULL), SINEW_OK);
    assert_false(isnan(r.region[SINEW_REGION_ALL].sum_ae));
    assert_true(r.region[SINEW_REGION_ALL].sum_ae == 0.0); /* exact: atan2(0, dot) */
    sinew_image_free(&est);
    sinew_image_free(&gt);
    sinew_ctx_free(ctx);
}

/* Pair A: one pixel with EE 1. Pair B: three pixels with EE 3.
 * pooled EPE = (1 + 3*3) / 4 = 2.5; mean of pairs = (1 + 3) / 2 = 2. */
static void test_metrics_pooled_vs_mean_of_pairs(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image ea, ga, eb, gb;
    assert_int_equal(sinew_image_alloc(ctx, &ea, 1, 1, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &ga, 1, 1, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &eb, 3, 1, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &gb, 3, 1, 2, SINEW_F32), SINEW_OK);
    flow_set(&ea, 0, 0, 1, 0);
    for (int x = 0; x < 3; x++)
        flow_set(&eb, x, 0, 0, 3);
    sinew_flow_errors a, b, pool;
    memset(&pool, 0, sizeof pool);
    assert_int_equal(sinew_flow_errors_compute(ctx, &a, &ea, &ga, NULL, NULL), SINEW_OK);
    assert_int_equal(sinew_flow_errors_compute(ctx, &b, &eb, &gb, NULL, NULL), SINEW_OK);
    sinew_flow_errors_add(&pool, &a);
    sinew_flow_errors_add(&pool, &b);
    sinew_flow_summary per[2], pooled, mean;
    sinew_flow_stats_summarize(&per[0], &a.region[SINEW_REGION_ALL]);
    sinew_flow_stats_summarize(&per[1], &b.region[SINEW_REGION_ALL]);
    sinew_flow_stats_summarize(&pooled, &pool.region[SINEW_REGION_ALL]);
    sinew_flow_summary_mean(&mean, per, 2);
    assert_int_equal(pooled.n_pairs, 2);
    assert_int_equal(pooled.n_valid, 4);
    assert_close(pooled.epe, 2.5, EPS);
    assert_close(pooled.r1_pct, 75.0, EPS); /* 3 of 4 pixels have EE 3 > 1 */
    assert_int_equal(mean.averaging, SINEW_AVG_PAIR_MEAN);
    assert_int_equal(mean.n_pairs, 2);
    assert_close(mean.epe, 2.0, EPS);
    assert_close(mean.r1_pct, 50.0, EPS); /* (0 % + 100 %) / 2 */
    assert_string_equal(sinew_averaging_name(SINEW_AVG_POOLED), "pooled-pixels");
    assert_string_equal(sinew_averaging_name(SINEW_AVG_PAIR_MEAN), "mean-of-pairs");
    sinew_flow_summary_mean(&mean, NULL, 0);
    assert_true(isnan(mean.epe));
    sinew_image_free(&ea);
    sinew_image_free(&ga);
    sinew_image_free(&eb);
    sinew_image_free(&gb);
    sinew_ctx_free(ctx);
}

static void test_metrics_rejects_bad_arguments(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image est, gt, small, u8;
    make_pair(ctx, &est, &gt);
    assert_int_equal(sinew_image_alloc(ctx, &small, 1, 2, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &u8, 2, 2, 2, SINEW_U8), SINEW_OK);
    sinew_flow_errors e;
    assert_int_equal(sinew_flow_errors_compute(ctx, &e, &small, &gt, NULL, NULL), SINEW_ESIZE);
    assert_non_null(strstr(sinew_ctx_message(ctx), "1x2"));
    assert_non_null(strstr(sinew_ctx_message(ctx), "2x2"));
    assert_int_equal(sinew_flow_errors_compute(ctx, &e, &u8, &gt, NULL, NULL), SINEW_EINVAL);
    assert_int_equal(sinew_flow_errors_compute(ctx, &e, &est, NULL, NULL, NULL), SINEW_EINVAL);
    assert_int_equal(sinew_flow_errors_compute(ctx, &e, &est, &gt, &gt, NULL), SINEW_EINVAL);
    float unc[2] = {0, 1}, err[2] = {1, NAN};
    double c[4];
    assert_int_equal(sinew_sparsification(ctx, c, NULL, NULL, unc, err, 2, 4), SINEW_EVALUE);
    assert_int_equal(sinew_sparsification(ctx, c, NULL, NULL, unc, err, 0, 4), SINEW_EINVAL);
    assert_int_equal(sinew_sparsification(ctx, c, NULL, NULL, unc, err, 1, 0), SINEW_EINVAL);
    sinew_image_free(&est);
    sinew_image_free(&gt);
    sinew_image_free(&small);
    sinew_image_free(&u8);
    sinew_ctx_free(ctx);
}

/* pred  = [1, 0, 2, 4, 0, 1], bits 1|2 -> predicted occluded [1, 0, 1, 0, 0, 1]
 * truth = [9, 9, 9, 0, 0, 0]           -> occluded           [1, 1, 1, 0, 0, 0]
 * tp = 2 (0, 2), fn = 1 (1), fp = 1 (5), tn = 2 (3, 4):
 * precision = 2/3, recall = 2/3, F1 = 2/3. */
static void test_metrics_mask_scores(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image p, t, v;
    assert_int_equal(sinew_image_alloc(ctx, &p, 3, 2, 1, SINEW_U8), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &t, 3, 2, 1, SINEW_U8), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &v, 3, 2, 1, SINEW_U8), SINEW_OK);
    const uint8_t pv[6] = {1, 0, 2, 4, 0, 1}, tv[6] = {9, 9, 9, 0, 0, 0};
    for (int i = 0; i < 6; i++) {
        sinew_image_row_u8(&p, i / 3)[i % 3] = pv[i];
        sinew_image_row_u8(&t, i / 3)[i % 3] = tv[i];
    }
    sinew_mask_scores s;
    assert_int_equal(sinew_mask_scores_compute(ctx, &s, &p, &t, NULL, 3u), SINEW_OK);
    assert_int_equal(s.tp, 2);
    assert_int_equal(s.fp, 1);
    assert_int_equal(s.fn, 1);
    assert_int_equal(s.tn, 2);
    double pr, re, f1;
    sinew_mask_scores_rates(&s, &pr, &re, &f1);
    assert_close(pr, 2.0 / 3, EPS);
    assert_close(re, 2.0 / 3, EPS);
    assert_close(f1, 2.0 / 3, EPS);
    /* bits 0: any nonzero -> [1,0,1,1,0,1]: tp 2, fp 2 (3, 5), fn 1, tn 1. */
    assert_int_equal(sinew_mask_scores_compute(ctx, &s, &p, &t, NULL, 0u), SINEW_OK);
    assert_int_equal(s.fp, 2);
    assert_int_equal(s.tn, 1);
    /* validity: only the first row counts -> tp 2, fn 1, fp 0: precision 1. */
    for (int x = 0; x < 3; x++)
        sinew_image_row_u8(&v, 0)[x] = 1;
    assert_int_equal(sinew_mask_scores_compute(ctx, &s, &p, &t, &v, 3u), SINEW_OK);
    sinew_mask_scores_rates(&s, &pr, &re, NULL);
    assert_close(pr, 1.0, EPS);
    assert_close(re, 2.0 / 3, EPS);
    /* Nothing predicted, nothing true: rates undefined (NaN). */
    sinew_mask_scores empty = {0, 0, 0, 5};
    sinew_mask_scores_rates(&empty, &pr, &re, &f1);
    assert_true(isnan(pr) && isnan(re) && isnan(f1));
    sinew_image_free(&p);
    sinew_image_free(&t);
    sinew_image_free(&v);
    sinew_ctx_free(ctx);
}

/* errors e = [1, 2, 3, 4], uncertainty [0.9, 0.1, 0.5, 0.3], steps 4 -> r_k = k.
 * Order by uncertainty: idx 0, 2, 3, 1 -> errors 1, 3, 4, 2; full mean 10/4 = 2.5.
 *   curve  = [1, mean(3,4,2)/2.5, mean(4,2)/2.5, 2/2.5] = [1, 1.2, 1.2, 0.8]
 *   oracle (errors 4,3,2,1) = [1, 2/2.5, 1.5/2.5, 1/2.5] = [1, 0.8, 0.6, 0.4]
 *   d = [0, 0.4, 0.6, 0.4]; AUSE = 0.25 * ((0+0.4)/2 + (0.4+0.6)/2 + (0.6+0.4)/2) = 0.3 */
static void test_metrics_sparsification_hand_case(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    const float err[4] = {1, 2, 3, 4}, unc[4] = {0.9f, 0.1f, 0.5f, 0.3f};
    double c[4], o[4], ause;
    assert_int_equal(sinew_sparsification(ctx, c, o, &ause, unc, err, 4, 4), SINEW_OK);
    const double ce[4] = {1, 1.2, 1.2, 0.8}, oe[4] = {1, 0.8, 0.6, 0.4};
    for (int k = 0; k < 4; k++) {
        assert_close(c[k], ce[k], 1e-12);
        assert_close(o[k], oe[k], 1e-12);
    }
    assert_close(ause, 0.3, 1e-12);
    /* Ties: all uncertainties equal -> index order, errors removed 1, 2, 3:
     * curve = [1, 3/2.5, 3.5/2.5, 4/2.5] = [1, 1.2, 1.4, 1.6]; d = [0, .4, .8, 1.2];
     * AUSE = 0.25 * (0.2 + 0.6 + 1.0) = 0.45. */
    const float flat[4] = {0.5f, 0.5f, 0.5f, 0.5f};
    assert_int_equal(sinew_sparsification(ctx, c, NULL, &ause, flat, err, 4, 4), SINEW_OK);
    assert_close(c[3], 1.6, 1e-12);
    assert_close(ause, 0.45, 1e-12);
    /* steps not dividing n: n = 3, steps = 2 -> r = [0, floor(3/2) = 1];
     * errors [3, 0, 0] by uncertainty order idx 1, 2, 0: remove idx 1 -> mean(0,3)=1.5,
     * full mean 1 -> curve [1, 1.5]; oracle removes idx 0 -> 0 -> [1, 0];
     * AUSE = 0.5 * (0 + 1.5) / 2 = 0.375. */
    const float e3[3] = {3, 0, 0}, u3[3] = {0, 2, 1};
    assert_int_equal(sinew_sparsification(ctx, c, o, &ause, u3, e3, 3, 2), SINEW_OK);
    assert_close(c[1], 1.5, 1e-12);
    assert_close(o[1], 0.0, 1e-12);
    assert_close(ause, 0.375, 1e-12);
    /* All errors zero: defined as 0 everywhere. */
    const float z[3] = {0, 0, 0};
    assert_int_equal(sinew_sparsification(ctx, c, o, &ause, u3, z, 3, 2), SINEW_OK);
    assert_close(c[0], 0.0, 0);
    assert_close(ause, 0.0, 0);
    sinew_ctx_free(ctx);
}

static uint32_t lcg(uint32_t *s)
{
    *s = *s * 1664525u + 1013904223u; /* Numerical Recipes LCG constants */
    return *s >> 8;
}

/* Properties: uncertainty == error (oracle) -> AUSE exactly 0; a random ordering of
 * distinct errors -> AUSE > 0; the curve of the oracle never rises. */
static void test_metrics_sparsification_properties(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    enum { N = 1000, STEPS = 100 };
    float *err = malloc(N * sizeof *err), *unc = malloc(N * sizeof *unc);
    uint32_t seed = 12345;
    for (int i = 0; i < N; i++) {
        err[i] = (float)(lcg(&seed) % 100000) / 1000.0f;
        unc[i] = (float)(lcg(&seed) % 100000);
    }
    double c[STEPS], o[STEPS], ause;
    assert_int_equal(sinew_sparsification(ctx, c, o, &ause, err, err, N, STEPS), SINEW_OK);
    assert_true(ause == 0.0);
    for (int k = 1; k < STEPS; k++)
        assert_true(o[k] <= o[k - 1]);
    assert_int_equal(sinew_sparsification(ctx, c, o, &ause, unc, err, N, STEPS), SINEW_OK);
    assert_true(ause > 0.05);
    assert_close(c[0], 1.0, 0);
    free(err);
    free(unc);
    sinew_ctx_free(ctx);
}

/* Bitwise-equal sums for 1, 2 and 4 threads on a random 97x53 pair. */
static void test_metrics_thread_count_invariant(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image est, gt, occ;
    assert_int_equal(sinew_image_alloc(ctx, &est, 97, 53, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &gt, 97, 53, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &occ, 97, 53, 1, SINEW_U8), SINEW_OK);
    uint32_t seed = 7;
    for (int y = 0; y < 53; y++)
        for (int x = 0; x < 97; x++) {
            flow_set(&gt, x, y, (float)(lcg(&seed) % 2000) / 100.0f - 10.0f,
                     (float)(lcg(&seed) % 2000) / 100.0f - 10.0f);
            flow_set(&est, x, y, (float)(lcg(&seed) % 2000) / 100.0f - 10.0f,
                     (lcg(&seed) % 10) ? (float)(lcg(&seed) % 2000) / 100.0f - 10.0f : NAN);
            sinew_image_row_u8(&occ, y)[x] = (uint8_t)(lcg(&seed) % 4 == 0);
        }
    sinew_flow_errors ref, e;
    assert_int_equal(sinew_ctx_set_threads(ctx, 1), SINEW_OK);
    assert_int_equal(sinew_flow_errors_compute(ctx, &ref, &est, &gt, &occ, NULL), SINEW_OK);
    for (int t = 2; t <= 4; t += 2) {
        assert_int_equal(sinew_ctx_set_threads(ctx, t), SINEW_OK);
        assert_int_equal(sinew_flow_errors_compute(ctx, &e, &est, &gt, &occ, NULL), SINEW_OK);
        assert_memory_equal(&e, &ref, sizeof e);
    }
    /* all = noc + occ exactly for counts */
    assert_int_equal(ref.region[0].n_valid, ref.region[1].n_valid + ref.region[2].n_valid);
    assert_int_equal(ref.region[0].n_gt, 97 * 53);
    sinew_image_free(&est);
    sinew_image_free(&gt);
    sinew_image_free(&occ);
    sinew_ctx_free(ctx);
}

/* EE map: known where both flows are known, NaN elsewhere. */
static void test_metrics_epe_map(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image est, gt, map;
    make_pair(ctx, &est, &gt);
    assert_int_equal(sinew_image_alloc(ctx, &map, 2, 2, 1, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_flow_epe_map(ctx, &map, &est, &gt), SINEW_OK);
    assert_close(sinew_image_row_f32(&map, 0)[0], 0.0, 0);
    assert_close(sinew_image_row_f32(&map, 0)[1], 1.0, 0);
    assert_close(sinew_image_row_f32(&map, 1)[0], 5.0, 0);
    assert_true(isnan(sinew_image_row_f32(&map, 1)[1]));
    sinew_image_free(&est);
    sinew_image_free(&gt);
    sinew_image_free(&map);
    sinew_ctx_free(ctx);
}

/* Every allocation failure is reported as ENOMEM without leaking. */
static void test_metrics_allocation_failure(void **state)
{
    (void)state;
    sinew_ctx *plain = sinew_ctx_new();
    sinew_image est, gt;
    make_pair(plain, &est, &gt);
    for (long k = 2; k <= 3; k++) {
        tu_failalloc fa = {k, 0, 0};
        sinew_ctx *ctx = tu_ctx_failing(&fa);
        sinew_flow_errors e;
        assert_int_equal(sinew_flow_errors_compute(ctx, &e, &est, &gt, NULL, NULL),
                         k == 2 ? SINEW_ENOMEM : SINEW_OK);
        const float u[2] = {0, 1}, r[2] = {1, 2};
        double ause;
        fa.calls = 0;
        fa.fail_at = k - 1; /* first or second allocation of the sparsification */
        assert_int_equal(sinew_sparsification(ctx, NULL, NULL, &ause, u, r, 2, 10), SINEW_ENOMEM);
        assert_int_equal(fa.live, 1); /* only the context */
        sinew_ctx_free(ctx);
        assert_int_equal(fa.live, 0);
    }
    sinew_image_free(&est);
    sinew_image_free(&gt);
    sinew_ctx_free(plain);
}

/* Reliability bins and ECE by hand (Naeini, Cooper, Hauskrecht, AAAI 2015, equal-width
 * bins): 4 bins, threshold 1 px.
 *   bin 0 [0, .25): c 0.1, 0.2 (errors 0.5, 3)   -> mean 0.15, observed 0.5
 *   bin 2 [.5, .75): c 0.5 (error 2)             -> mean 0.5, observed 0
 *   bin 3 [.75, 1]: c 0.8, 1.0 (errors 1, 0)     -> mean 0.9, observed 1 (error 1 <= 1)
 *   ECE = 2/5 |0.5 - 0.15| + 1/5 |0 - 0.5| + 2/5 |1 - 0.9| = 0.14 + 0.1 + 0.04 = 0.28 */
static void test_metrics_calibration_hand_case(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    const float c[5] = {0.1f, 0.2f, 0.5f, 0.8f, 1.0f}, e[5] = {0.5f, 3.0f, 2.0f, 1.0f, 0.0f};
    sinew_calibration cal;
    assert_int_equal(sinew_calibration_compute(ctx, &cal, c, e, 5, 1.0, 4), SINEW_OK);
    assert_int_equal(cal.n, 5);
    assert_int_equal(cal.count[0], 2);
    assert_int_equal(cal.count[1], 0);
    assert_true(isnan(cal.observed[1]) && isnan(cal.mean_confidence[1]));
    assert_float_equal(cal.mean_confidence[0], 0.15, 1e-7);
    assert_float_equal(cal.observed[0], 0.5, 1e-12);
    assert_float_equal(cal.observed[3], 1.0, 1e-12);
    assert_float_equal(cal.ece, 0.28, 1e-7);
    /* bad input: confidence out of [0, 1], negative error, no bins */
    const float cb[1] = {1.5f}, eb[1] = {-1.0f};
    assert_int_equal(sinew_calibration_compute(ctx, &cal, cb, e, 1, 1.0, 4), SINEW_EVALUE);
    assert_int_equal(sinew_calibration_compute(ctx, &cal, c, eb, 1, 1.0, 4), SINEW_EVALUE);
    assert_int_equal(sinew_calibration_compute(ctx, &cal, c, e, 5, 1.0, 0), SINEW_EINVAL);
    sinew_ctx_free(ctx);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_metrics_hand_computed_pair),
        cmocka_unit_test(test_metrics_missing_estimate_lowers_density),
        cmocka_unit_test(test_metrics_occlusion_split_and_mask),
        cmocka_unit_test(test_metrics_kitti_outlier_rule),
        cmocka_unit_test(test_metrics_angular_error_formula),
        cmocka_unit_test(test_metrics_pooled_vs_mean_of_pairs),
        cmocka_unit_test(test_metrics_rejects_bad_arguments),
        cmocka_unit_test(test_metrics_mask_scores),
        cmocka_unit_test(test_metrics_sparsification_hand_case),
        cmocka_unit_test(test_metrics_sparsification_properties),
        cmocka_unit_test(test_metrics_thread_count_invariant),
        cmocka_unit_test(test_metrics_epe_map),
        cmocka_unit_test(test_metrics_calibration_hand_case),
        cmocka_unit_test(test_metrics_allocation_failure),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
