/* SPDX-License-Identifier: MIT */
/* `sinew score`: accuracy of a flow field (and optionally its occlusion mask and
 * confidence) against ground truth, for one pair or for a whole dataset folder.
 *
 * The numbers come from flow/metrics.h; this file reads the inputs, applies each
 * dataset's validity rule, and prints the same numbers as a text table, CSV and JSON,
 * always naming the averaging (pooled over pixels, or mean of per-pair values) and the
 * density of the estimate (pixels with an unknown estimate are not scored). */
#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include <cJSON.h>

#include "flow/estimate.h"
#include "flow/io.h"
#include "flow/sinew.h"
#include "tools/cli.h"
#include "tools/score_layout.h"
#include "tools/score_out.h"
#include "tools/score_read.h"
#include "tools/score_save.h"

#define CMD "score"
#define SPARSE_STEPS 100
/* Predicted-occlusion bits of sinew's check masks (flow/check.h): forward-backward
 * failure and target outside the image. */
#define DEFAULT_MASK_BITS ((unsigned)SINEW_MASK_OCCLUSION)

static void usage(FILE *out)
{
    fprintf(out,
            "usage: sinew score EST GT [--occ OCC.png | --noc NOC.png] [--valid VALID.png]\n"
            "                   [--invalid INV.png] [--confidence C.npy] [--mask M.png]\n"
            "                   [--mask-bits N] [--csv F] [--json]\n"
            "       sinew score --layout %s --root DIR\n"
            "                   (--estimates DIR [--confidences DIR | --checks DIR] |\n"
            "                    --preset P [--save DIR] [--check])\n"
            "                   [--pass clean|final] [--csv F] [--json]\n"
            "\n"
            "Score optical flow against ground truth: endpoint error (EPE, px), angular\n"
            "error (AAE, degrees, the (u,v,1) angle), R0.5/R1/R3/R5 (%% of pixels with\n"
            "endpoint error above 0.5/1/3/5 px) and Fl-all (%% KITTI outliers: error > 3 px\n"
            "and > 5%% of the true length), over all scored pixels and split into\n"
            "non-occluded / occluded where an occlusion mask exists.\n"
            "\n"
            "Ground truth marked unknown (.flo > 1e9, KITTI valid bit 0, Sintel invalid\n"
            "masks) is skipped. Pixels where the estimate is unknown (NaN) are not scored;\n"
            "the density column gives the scored share of the known ground truth.\n"
            "\n"
            "one pair:\n"
            "  EST, GT            flow files (.flo, KITTI .png, .pfm, .npy)\n"
            "  --occ OCC.png      true occlusion (nonzero = occluded): adds noc/occ rows\n"
            "  --noc NOC.png      KITTI: the flow_noc file of GT (GT being flow_occ);\n"
            "                     occluded = known in GT but not in NOC\n"
            "  --valid VALID.png  score only where nonzero\n"
            "  --invalid INV.png  skip where nonzero (e.g. Sintel invalid/)\n"
            "  --confidence C     per-pixel confidence (.npy or .pfm, higher = more sure):\n"
            "                     sparsification curve and AUSE (100 steps, uncertainty =\n"
            "                     1 - confidence)\n"
            "  --mask M.png       our occlusion mask, scored against --occ (precision,\n"
            "                     recall, F1); a pixel is predicted occluded when\n"
            "                     (value & N) != 0, N = --mask-bits (default 3: the\n"
            "                     forward-backward and outside bits; 0 = any nonzero)\n",
            score_layout_names);
    fprintf(out,
            "dataset folder:\n"
            "  --layout L --root DIR   a training folder (list: a file of 'frame1 frame2 gt'\n"
            "                     lines, paths relative to the file)\n"
            "  --estimates DIR    estimates named DIR/ID.flo (or .png/.pfm/.npy), where ID\n"
            "                     is the pair id shown in the table (Middlebury: Venus;\n"
            "                     Sintel: alley_1/frame_0001; KITTI: 000000_10; chairs:\n"
            "                     00001; list: the gt path without extension)\n"
            "  --confidences DIR  per-pair confidence DIR/ID.npy (or .pfm): adds each pair's\n"
            "                     AUSE and their mean (AUSE is averaged per pair, not\n"
            "                     pooled)\n"
            "  --preset P         run sinew's own estimator instead (fast, balanced,\n"
            "                     accurate, baseline) on each pair's frames, forward flow\n"
            "                     only; adds time_s = wall-clock seconds of the estimator\n"
            "                     run (no file I/O)\n"
            "  --save DIR         with --preset: also write the estimates as DIR/ID.flo\n"
            "  --check            with --preset: also estimate the backward flow and run\n"
            "                     sinew check (defaults, with the frames); adds per pair\n"
            "                     our occlusion mask's precision, recall and F1 against\n"
            "                     the layout's occlusion truth (Sintel; occluded = mask &\n"
            "                     3: occluded or outside), AUSE and the ECE of the\n"
            "                     confidence read as P(EPE <= 1 px) (10 bins)\n"
            "  --checks DIR       with --estimates: the same from check folders\n"
            "                     DIR/ID/mask.png and DIR/ID/confidence.npy (as written\n"
            "                     by sinew check -o DIR/ID)\n"
            "  --pass P           Sintel pass for the frames (default clean)\n"
            "outputs:\n"
            "  (default)          a text table on stdout\n"
            "  --json             JSON on stdout instead (keys epe, aae_deg, r05_pct,\n"
            "                     r1_pct, r3_pct, r5_pct, fl_all_pct, n_valid, noc, occ)\n"
            "  --csv F            also write the table as CSV to F\n"
            "  -t, --threads N    worker threads (0 = all cores)\n"
            "\n"
            "Averaging is stated in every output: one pair is averaged over its scored\n"
            "pixels; a dataset gets one row per pair plus two summary rows,\n"
            "mean-of-pairs (unweighted mean of the per-pair values) and pooled-pixels\n"
            "(all scored pixels of all pairs together).\n"
            "\n"
            "examples:\n"
            "  sinew score out/flow.flo data/Venus/flow10.flo\n"
            "  sinew score est.flo gt.flo --occ occ.png --confidence conf.npy --json\n"
            "  sinew score --layout middlebury --root data/middlebury --estimates out/ \\\n"
            "      --csv scores.csv\n"
            "  sinew score --layout kitti --root kitti/training --preset balanced --threads 2\n"
            "\n%s",
            cli_notice);
}

/* ---- one pair ---- */

typedef struct {
    const char *occ, *noc, *valid, *invalid, *confidence, *mask, *csv;
    unsigned mask_bits;
    int json;
} single_opts;

typedef struct {
    int have;
    size_t n;
    double ause;
    double curve[SPARSE_STEPS], oracle[SPARSE_STEPS];
    sinew_calibration cal; /* confidence as P(EPE <= 1 px), valid when have */
} sparse_result;

/* The reliability diagram of a confidence (docs/methods.md): 10 bins, EPE <= 1 px. */
#define CALIB_BINS 10
#define CALIB_THRESHOLD_PX 1.0

/* Sparsification and calibration of conf (F32, 1 channel, the size of gt) over pixels
 * where gt, estimate, confidence and the mask are known. */
static int score_confidence_image(sinew_ctx *ctx, const sinew_image *conf, const sinew_image *est,
                                  const sinew_image *gt, const sinew_image *eval,
                                  sparse_result *out)
{
    memset(out, 0, sizeof *out);
    sinew_image epe = {0};
    float *unc = NULL, *err = NULL, *cf = NULL;
    int st, rc = CLI_OK;
    if ((st = sinew_image_alloc(ctx, &epe, gt->width, gt->height, 1, SINEW_F32)) ||
        (st = sinew_flow_epe_map(ctx, &epe, est, gt))) {
        rc = cli_status(CMD, ctx, st);
        goto done;
    }
    size_t total = (size_t)gt->width * (size_t)gt->height;
    unc = malloc(total * sizeof *unc);
    err = malloc(total * sizeof *err);
    cf = malloc(total * sizeof *cf);
    if (!unc || !err || !cf) {
        rc = cli_error(CMD, "out of memory");
        goto done;
    }
    size_t n = 0;
    for (int y = 0; y < gt->height; y++) {
        const float *e = sinew_image_row_f32(&epe, y), *c = sinew_image_row_f32(conf, y);
        const uint8_t *m = eval && eval->data ? sinew_image_row_u8(eval, y) : NULL;
        for (int x = 0; x < gt->width; x++) {
            if (!isfinite(e[x]) || !isfinite(c[x]) || (m && !m[x]))
                continue;
            unc[n] = 1.0f - c[x];
            cf[n] = c[x] < 0 ? 0.0f : c[x] > 1 ? 1.0f : c[x];
            err[n] = e[x];
            n++;
        }
    }
    out->n = n;
    if (n > 0) {
        st = sinew_sparsification(ctx, out->curve, out->oracle, &out->ause, unc, err, n,
                                  SPARSE_STEPS);
        if (!st)
            st = sinew_calibration_compute(ctx, &out->cal, cf, err, n, CALIB_THRESHOLD_PX,
                                           CALIB_BINS);
        if (st) {
            rc = cli_status(CMD, ctx, st);
            goto done;
        }
        out->have = 1;
    }
done:
    free(unc);
    free(err);
    free(cf);
    sinew_image_free(&epe);
    return rc;
}

/* The same for a confidence file (.npy or .pfm). */
static int score_confidence(sinew_ctx *ctx, const char *path, const sinew_image *est,
                            const sinew_image *gt, const char *gt_path, const sinew_image *eval,
                            sparse_result *out)
{
    memset(out, 0, sizeof *out);
    sinew_image conf = {0};
    int rc = CLI_OK, st = sinew_map_read(ctx, &conf, path);
    if (st)
        rc = cli_status(CMD, ctx, st);
    else if (!(rc = score_same_size(&conf, path, gt, gt_path)))
        rc = score_confidence_image(ctx, &conf, est, gt, eval, out);
    sinew_image_free(&conf);
    return rc;
}

/* A fresh row for pair `id` (no time, no AUSE yet). */
static void row_init(score_row *row, const char *id)
{
    memset(row, 0, sizeof *row);
    row->id = (char *)id;
    row->time_s = NAN;
    row->ause = NAN;
    row->ece = NAN;
}

/* Score est against gt into row: the occlusion split from occ_path (nonzero = occluded)
 * or from a KITTI noc file, the evaluation mask from valid/invalid masks (any may be
 * NULL). occ and eval receive the masks used (for the caller's later steps). */
static int score_vs_truth(sinew_ctx *ctx, const sinew_image *est, const sinew_image *gt,
                          const char *gt_path, const char *occ_path, const char *noc_path,
                          const char *valid_path, const char *invalid_path, sinew_image *occ,
                          sinew_image *eval, score_row *row)
{
    int rc;
    if (occ_path) {
        if ((rc = score_read_binary(ctx, occ_path, 0, occ)) ||
            (rc = score_same_size(occ, occ_path, gt, gt_path)))
            return rc;
    } else if (noc_path && (rc = score_kitti_occ_from_noc(ctx, noc_path, gt, gt_path, occ))) {
        return rc;
    }
    if (valid_path && (rc = score_add_eval_mask(ctx, valid_path, 0, gt, gt_path, eval)))
        return rc;
    if (invalid_path && (rc = score_add_eval_mask(ctx, invalid_path, 1, gt, gt_path, eval)))
        return rc;
    int st = sinew_flow_errors_compute(ctx, &row->err, est, gt, occ->data ? occ : NULL,
                                       eval->data ? eval : NULL);
    if (st)
        return cli_status(CMD, ctx, st);
    score_summarize_row(row);
    return CLI_OK;
}

static int run_single(sinew_ctx *ctx, const char *est_path, const char *gt_path,
                      const single_opts *o)
{
    sinew_image est = {0}, gt = {0}, occ = {0}, eval = {0}, pred = {0};
    score_row row;
    row_init(&row, est_path);
    sinew_mask_scores ms;
    int have_ms = 0;
    sparse_result sp = {0};
    int rc;
    if ((rc = score_read_flow(ctx, est_path, &est)) || (rc = score_read_flow(ctx, gt_path, &gt)) ||
        (rc = score_same_size(&est, est_path, &gt, gt_path)))
        goto done;
    if ((rc = score_vs_truth(ctx, &est, &gt, gt_path, o->occ, o->noc, o->valid, o->invalid, &occ,
                             &eval, &row)))
        goto done;
    if (o->mask) {
        int st = sinew_mask_read(ctx, &pred, o->mask);
        if (st) {
            rc = cli_status(CMD, ctx, st);
            goto done;
        }
        if ((rc = score_same_size(&pred, o->mask, &gt, gt_path)))
            goto done;
        /* Score the mask where the truth is defined: inside the evaluation mask. */
        st = sinew_mask_scores_compute(ctx, &ms, &pred, &occ, eval.data ? &eval : NULL,
                                       o->mask_bits);
        if (st) {
            rc = cli_status(CMD, ctx, st);
            goto done;
        }
        have_ms = 1;
        row.have_mask = 1;
        row.ms = ms;
    }
    if (o->confidence &&
        (rc = score_confidence(ctx, o->confidence, &est, &gt, gt_path, &eval, &sp)))
        goto done;
    if (sp.have) {
        row.ause = sp.ause;
        row.ece = sp.cal.ece;
    }

    if (o->csv && (rc = score_write_csv(ctx, o->csv, "pair", &row, 1, NULL)))
        goto done;
    const char *avg = sinew_averaging_name(SINEW_AVG_POOLED);
    if (o->json) {
        cJSON *root = score_json_regions(row.s, row.err.has_occ, avg);
        if (!root) {
            rc = cli_error(CMD, "out of memory");
            goto done;
        }
        cJSON_AddStringToObject(root, "averaging_text", "one pair: mean over its scored pixels");
        cJSON_AddStringToObject(root, "missing_estimate", score_density_note);
        cJSON_AddStringToObject(root, "estimate", est_path);
        cJSON_AddStringToObject(root, "ground_truth", gt_path);
        if (have_ms)
            score_json_mask(root, &ms, o->mask_bits);
        if (o->confidence) {
            cJSON *s = cJSON_AddObjectToObject(root, "sparsification");
            if (s) {
                cJSON_AddNumberToObject(s, "n", (double)sp.n);
                cJSON_AddNumberToObject(s, "steps", SPARSE_STEPS);
                if (sp.have) {
                    sinew_json_add_number(s, "ause", sp.ause);
                    cJSON_AddItemToObject(s, "curve",
                                          cJSON_CreateDoubleArray(sp.curve, SPARSE_STEPS));
                    cJSON_AddItemToObject(s, "oracle",
                                          cJSON_CreateDoubleArray(sp.oracle, SPARSE_STEPS));
                    score_json_calibration(root, &sp.cal);
                } else {
                    cJSON_AddNullToObject(s, "ause");
                }
            }
        }
        rc = score_print_json(root);
        cJSON_Delete(root);
        goto done;
    }
    char te[1024], tg[1024];
    printf("sinew score: %s against %s\n", cli_term_text(est_path, te, sizeof te),
           cli_term_text(gt_path, tg, sizeof tg));
    printf("averaging: %s (one pair: mean over its scored pixels)\n", avg);
    printf("dens%% = scored share of the known ground truth (unknown estimates are not "
           "scored)\n\n");
    score_cols none = {0, 0};
    score_text_header(stdout, "region", none);
    for (int k = 0; k < SINEW_REGION_COUNT; k++)
        if (k == SINEW_REGION_ALL || row.err.has_occ)
            score_text_row(stdout, score_region_key[k], &row.s[k], NAN, NAN, none);
    if (have_ms) {
        double p, r, f1;
        char a[3][32];
        sinew_mask_scores_rates(&ms, &p, &r, &f1);
        score_fmt_val(a[0], sizeof a[0], p, "%.4f");
        score_fmt_val(a[1], sizeof a[1], r, "%.4f");
        score_fmt_val(a[2], sizeof a[2], f1, "%.4f");
        printf("\nocclusion mask (bits %u): precision %s  recall %s  F1 %s  (tp %lld fp %lld fn "
               "%lld tn %lld)\n",
               o->mask_bits, a[0], a[1], a[2], (long long)ms.tp, (long long)ms.fp, (long long)ms.fn,
               (long long)ms.tn);
    }
    if (o->confidence) {
        char a[32];
        score_fmt_val(a, sizeof a, sp.have ? sp.ause : NAN, "%.5f");
        printf("\nconfidence: AUSE %s (sparsification, %d steps, %zu pixels)\n", a, SPARSE_STEPS,
               sp.n);
        if (sp.have)
            score_text_calibration(stdout, &sp.cal);
    }
    rc = fflush(stdout) == 0 ? CLI_OK : cli_error(CMD, "stdout: write failed");
done:
    sinew_image_free(&est);
    sinew_image_free(&gt);
    sinew_image_free(&occ);
    sinew_image_free(&eval);
    sinew_image_free(&pred);
    return rc;
}

/* ---- dataset folders ---- */

typedef struct {
    const char *layout, *root, *estimates, *preset, *save, *confidences, *pass, *csv;
    const char *checks; /* --checks DIR: DIR/ID/mask.png and DIR/ID/confidence.npy */
    int check;          /* --check with --preset: backward flow and sinew's check too */
    int json, threads;
    sinew_estimator *est; /* --preset: one estimator reused for every pair */
} layout_opts;

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* --preset: read the pair's frames and run sinew's estimator (forward only) into *flow;
 * *seconds = wall-clock time of the estimator run alone (no file I/O). */
static int estimate_pair(sinew_ctx *ctx, const score_pair *p, const layout_opts *o,
                         const sinew_image *gt, sinew_image *flow, double *seconds,
                         sinew_image *mask, sinew_image *conf)
{
    sinew_image f0 = {0}, f1 = {0}, bwd = {0};
    int rc = CLI_OK, st;
    if ((st = sinew_image_read(ctx, &f0, p->frame0)) ||
        (st = sinew_image_read(ctx, &f1, p->frame1))) {
        rc = cli_status(CMD, ctx, st);
        goto done;
    }
    if ((rc = score_same_size(&f0, p->frame0, gt, p->gt)) ||
        (rc = score_same_size(&f1, p->frame1, gt, p->gt)))
        goto done;
    if (f0.type != f1.type || f0.channels != f1.channels) {
        rc = cli_error(CMD, "%s: pixel format differs from %s", p->frame1, p->frame0);
        goto done;
    }
    if ((st = sinew_image_alloc(ctx, flow, gt->width, gt->height, 2, SINEW_F32))) {
        rc = cli_status(CMD, ctx, st);
        goto done;
    }
    if (o->check && ((st = sinew_image_alloc(ctx, &bwd, gt->width, gt->height, 2, SINEW_F32)) ||
                     (st = sinew_image_alloc(ctx, mask, gt->width, gt->height, 1, SINEW_U8)) ||
                     (st = sinew_image_alloc(ctx, conf, gt->width, gt->height, 1, SINEW_F32)))) {
        rc = cli_status(CMD, ctx, st);
        goto done;
    }
    double t0 = now_s();
    st = sinew_estimator_run(o->est, flow, o->check ? &bwd : NULL, &f0, &f1);
    *seconds = now_s() - t0;
    if (st) {
        rc = cli_error(CMD, "%s: estimator failed: %s", p->frame0,
                       *sinew_ctx_message(ctx) ? sinew_ctx_message(ctx) : sinew_strerror(st));
        goto done;
    }
    if (o->check) { /* sinew check with its defaults, frames given */
        sinew_check_input in = {flow, &bwd, &f0, &f1, NULL, NULL};
        sinew_check_output out = {NULL, mask, conf, {0}, NULL};
        if ((st = sinew_check_run(ctx, &out, &in, NULL))) {
            rc = cli_error(CMD, "%s: check failed: %s", p->frame0,
                           *sinew_ctx_message(ctx) ? sinew_ctx_message(ctx) : sinew_strerror(st));
            goto done;
        }
    }
    if (o->save) {
        char *out = score_printf("%s/%s.flo", o->save, p->id);
        if (!out) {
            rc = cli_error(CMD, "out of memory");
            goto done;
        }
        if (score_make_parents(out) != 0) {
            rc = cli_error(CMD, "%s: cannot create its folder: %s", out, strerror(errno));
            free(out);
            goto done;
        }
        st = sinew_flow_write(ctx, out, flow, SINEW_FLOW_FLO);
        free(out);
        if (st)
            rc = cli_status(CMD, ctx, st);
    }
done:
    sinew_image_free(&f0);
    sinew_image_free(&f1);
    sinew_image_free(&bwd);
    return rc;
}

/* --check / --checks: our occlusion mask against the true occlusion (where the layout
 * has one) and the confidence (AUSE, ECE) into row. mask and conf: the check's outputs
 * of --preset --check, or empty; --checks reads them from DIR/ID/. */
static int score_pair_check(sinew_ctx *ctx, const score_pair *p, const layout_opts *o,
                            const sinew_image *est, const sinew_image *gt, const sinew_image *occ,
                            const sinew_image *eval, sinew_image *mask, sinew_image *conf,
                            score_row *row)
{
    int rc = CLI_OK, st;
    if (!o->check && !o->checks)
        return CLI_OK;
    if (o->checks) {
        char *dir = score_printf("%s/%s", o->checks, p->id);
        char mp[4096], cp[4096];
        sparse_result sp;
        if (!dir)
            return cli_error(CMD, "out of memory");
        st = sinew_check_folder_read(ctx, mask, conf, mp, cp, sizeof mp, dir);
        free(dir);
        if (st)
            return cli_status(CMD, ctx, st);
        if ((rc = score_same_size(mask, mp, gt, p->gt)) ||
            (rc = score_confidence_image(ctx, conf, est, gt, eval, &sp)))
            return rc;
        row->ause = sp.have ? sp.ause : NAN;
        row->ece = sp.have ? sp.cal.ece : NAN;
    } else {
        sparse_result sp;
        if ((rc = score_confidence_image(ctx, conf, est, gt, eval, &sp)))
            return rc;
        row->ause = sp.have ? sp.ause : NAN;
        row->ece = sp.have ? sp.cal.ece : NAN;
    }
    if (!occ->data)
        return CLI_OK; /* no occlusion truth in this layout */
    if ((st = sinew_mask_scores_compute(ctx, &row->ms, mask, occ, eval->data ? eval : NULL,
                                        DEFAULT_MASK_BITS)))
        return cli_status(CMD, ctx, st);
    row->have_mask = 1;
    return CLI_OK;
}

/* Score one dataset pair into *row (row->id borrowed from the pair). */
static int score_one_pair(sinew_ctx *ctx, const score_pair *p, const layout_opts *o, score_row *row)
{
    sinew_image est = {0}, gt = {0}, occ = {0}, eval = {0}, mask = {0}, conf = {0};
    char *est_path = NULL, *conf_path = NULL, *tried = NULL;
    int rc;
    row_init(row, p->id);
    if (o->preset) {
        if ((rc = score_read_flow(ctx, p->gt, &gt)) ||
            (rc = estimate_pair(ctx, p, o, &gt, &est, &row->time_s, &mask, &conf)))
            goto done;
    } else {
        est_path = score_find_file(o->estimates, p->id, "flo|png|pfm|npy", &tried);
        if (!est_path) {
            rc = tried ? cli_error(CMD, "%s: no estimate for pair %s", tried, p->id)
                       : cli_error(CMD, "out of memory");
            goto done;
        }
        if ((rc = score_read_flow(ctx, p->gt, &gt)) ||
            (rc = score_read_flow(ctx, est_path, &est)) ||
            (rc = score_same_size(&est, est_path, &gt, p->gt)))
            goto done;
    }
    if ((rc = score_vs_truth(ctx, &est, &gt, p->gt, p->occ, p->gt_noc, NULL, p->invalid, &occ,
                             &eval, row)))
        goto done;
    if (o->confidences) {
        free(tried);
        conf_path = score_find_file(o->confidences, p->id, "npy|pfm", &tried);
        if (!conf_path) {
            rc = tried ? cli_error(CMD, "%s: no confidence for pair %s", tried, p->id)
                       : cli_error(CMD, "out of memory");
            goto done;
        }
        sparse_result sp;
        if ((rc = score_confidence(ctx, conf_path, &est, &gt, p->gt, &eval, &sp)))
            goto done;
        row->ause = sp.have ? sp.ause : NAN;
    }
    if ((rc = score_pair_check(ctx, p, o, &est, &gt, &occ, &eval, &mask, &conf, row)))
        goto done;
done:
    sinew_image_free(&mask);
    sinew_image_free(&conf);
    free(conf_path);
    free(est_path);
    free(tried);
    sinew_image_free(&est);
    sinew_image_free(&gt);
    sinew_image_free(&occ);
    sinew_image_free(&eval);
    return rc;
}

static int output_layout(sinew_ctx *ctx, const layout_opts *o, const score_row *rows, size_t n)
{
    score_summary sum;
    int rc = score_summarize_all(rows, n, &sum);
    if (rc)
        return rc;
    if (o->csv && (rc = score_write_csv(ctx, o->csv, o->layout, rows, n, &sum)))
        return rc;
    score_cols cols = {isfinite(sum.mean_time_s) ? 1 : 0,
                       o->confidences != NULL || o->check || o->checks};
    if (o->json) {
        cJSON *root = cJSON_CreateObject(), *pairs = NULL, *s = NULL;
        if (root) {
            cJSON_AddStringToObject(root, "layout", o->layout);
            cJSON_AddStringToObject(root, "root", o->root);
            if (o->preset) {
                cJSON_AddStringToObject(root, "preset", o->preset);
                cJSON_AddStringToObject(root, "runtime",
                                        "runtime_s: wall-clock seconds of the estimator run "
                                        "(forward flow only, no file I/O)");
                cJSON_AddNumberToObject(root, "threads", o->threads);
            } else {
                cJSON_AddStringToObject(root, "estimates", o->estimates);
            }
            cJSON_AddStringToObject(root, "missing_estimate", score_density_note);
            pairs = cJSON_AddArrayToObject(root, "pairs");
            s = cJSON_AddObjectToObject(root, "summary");
        }
        if (!root || !pairs || !s) {
            cJSON_Delete(root);
            return cli_error(CMD, "out of memory");
        }
        for (size_t i = 0; i < n; i++) {
            cJSON *r = score_json_regions(rows[i].s, rows[i].err.has_occ,
                                          "one pair: mean over its scored pixels");
            if (!r)
                continue;
            cJSON_AddStringToObject(r, "id", rows[i].id);
            if (cols.time)
                sinew_json_add_number(r, "runtime_s", rows[i].time_s);
            if (cols.ause)
                sinew_json_add_number(r, "ause", rows[i].ause);
            if (o->check || o->checks)
                sinew_json_add_number(r, "ece", rows[i].ece);
            if (rows[i].have_mask)
                score_json_mask(r, &rows[i].ms, DEFAULT_MASK_BITS);
            cJSON_AddItemToArray(pairs, r);
        }
        cJSON *m =
            score_json_regions(sum.mean, sum.has_occ, sinew_averaging_name(SINEW_AVG_PAIR_MEAN));
        cJSON *p =
            score_json_regions(sum.pooled, sum.has_occ, sinew_averaging_name(SINEW_AVG_POOLED));
        if (m) {
            cJSON_AddStringToObject(m, "averaging_text", sinew_averaging_text(SINEW_AVG_PAIR_MEAN));
            cJSON_AddNumberToObject(m, "n_pairs", (double)sum.mean[0].n_pairs);
            cJSON_AddItemToObject(s, sinew_averaging_name(SINEW_AVG_PAIR_MEAN), m);
        }
        if (p) {
            cJSON_AddStringToObject(p, "averaging_text", sinew_averaging_text(SINEW_AVG_POOLED));
            cJSON_AddNumberToObject(p, "n_pairs", (double)sum.pooled[0].n_pairs);
            cJSON_AddItemToObject(s, sinew_averaging_name(SINEW_AVG_POOLED), p);
        }
        if (cols.time)
            sinew_json_add_number(s, "mean_runtime_s", sum.mean_time_s);
        if (cols.ause && m)
            sinew_json_add_number(m, "ause", sum.mean_ause);
        if ((o->check || o->checks) && m)
            sinew_json_add_number(m, "ece", sum.mean_ece);
        if (sum.n_mask && m && p) {
            cJSON *mm = cJSON_AddObjectToObject(m, "occlusion_mask");
            if (mm) {
                sinew_json_add_number(mm, "precision", sum.mean_mask[0]);
                sinew_json_add_number(mm, "recall", sum.mean_mask[1]);
                sinew_json_add_number(mm, "f1", sum.mean_mask[2]);
                cJSON_AddNumberToObject(mm, "n_pairs", (double)sum.n_mask);
            }
            score_json_mask(p, &sum.pooled_mask, DEFAULT_MASK_BITS);
        }
        rc = score_print_json(root);
        cJSON_Delete(root);
        return rc;
    }
    if (o->preset)
        printf("sinew score: layout %s, root %s, sinew estimator preset %s, %zu pairs\n"
               "time_s = wall-clock seconds of the estimator run (forward flow, no file I/O), "
               "threads %d%s\n",
               o->layout, o->root, o->preset, n, o->threads, o->threads ? "" : " (= all cores)");
    else
        printf("sinew score: layout %s, root %s, estimates %s, %zu pairs\n", o->layout, o->root,
               o->estimates, n);
    printf("averaging: each pair row = mean over that pair's scored pixels; summary rows:\n"
           "  %-14s %s\n  %-14s %s\n",
           sinew_averaging_name(SINEW_AVG_PAIR_MEAN), sinew_averaging_text(SINEW_AVG_PAIR_MEAN),
           sinew_averaging_name(SINEW_AVG_POOLED), sinew_averaging_text(SINEW_AVG_POOLED));
    printf("dens%% = scored share of the known ground truth (unknown estimates are not "
           "scored)\n");
    for (int k = 0; k < SINEW_REGION_COUNT; k++) {
        if (k != SINEW_REGION_ALL && !sum.has_occ)
            continue;
        printf("\n[%s] %s\n", score_region_key[k], score_region_text[k]);
        score_text_header(stdout, "pair", cols);
        for (size_t i = 0; i < n; i++)
            if (k == SINEW_REGION_ALL || rows[i].err.has_occ)
                score_text_row(stdout, rows[i].id, &rows[i].s[k], rows[i].time_s,
                               k == SINEW_REGION_ALL ? rows[i].ause : NAN, cols);
        score_text_row(stdout, sinew_averaging_name(SINEW_AVG_PAIR_MEAN), &sum.mean[k],
                       sum.mean_time_s, k == SINEW_REGION_ALL ? sum.mean_ause : NAN, cols);
        score_text_row(stdout, sinew_averaging_name(SINEW_AVG_POOLED), &sum.pooled[k],
                       sum.mean_time_s, NAN, cols);
    }
    if (o->check || o->checks)
        score_text_check(stdout, rows, n, &sum, DEFAULT_MASK_BITS);
    return fflush(stdout) == 0 ? CLI_OK : cli_error(CMD, "stdout: write failed");
}

static int run_layout(sinew_ctx *ctx, const layout_opts *o)
{
    score_set set;
    int rc = score_layout_list(CMD, o->layout, o->root, o->pass, &set);
    if (rc)
        return rc;
    /* every --save path is checked before anything is estimated or written */
    if (o->save &&
        (rc = score_save_check(CMD, &set, o->save, o->root, strcmp(o->layout, "list")))) {
        score_set_free(&set);
        return rc;
    }
    score_row *rows = calloc(set.n, sizeof *rows);
    if (!rows) {
        score_set_free(&set);
        return cli_error(CMD, "out of memory");
    }
    layout_opts run = *o;
    if (o->preset) {
        sinew_flow_params fp;
        if (sinew_flow_params_preset(&fp, o->preset) != SINEW_OK) {
            free(rows);
            score_set_free(&set);
            return cli_usage_error(CMD, "--preset: unknown preset '%s'", o->preset);
        }
        int st = sinew_estimator_new(ctx, &run.est, &fp);
        if (st) {
            free(rows);
            score_set_free(&set);
            return cli_status(CMD, ctx, st);
        }
    }
    o = &run;
    for (size_t i = 0; i < set.n && rc == CLI_OK; i++)
        rc = score_one_pair(ctx, &set.pairs[i], o, &rows[i]);
    if (rc == CLI_OK)
        rc = output_layout(ctx, o, rows, set.n);
    sinew_estimator_free(run.est);
    free(rows);
    score_set_free(&set);
    return rc;
}

/* ---- entry ---- */

int cmd_score(int argc, char **argv)
{
    enum {
        O_OCC = 256,
        O_NOC,
        O_VALID,
        O_INVALID,
        O_CONF,
        O_MASK,
        O_BITS,
        O_JSON,
        O_CSV,
        O_LAYOUT,
        O_ROOT,
        O_EST,
        O_CONFS,
        O_PRESET,
        O_SAVE,
        O_PASS,
        O_CHECK,
        O_CHECKS
    };
    static const struct option opts[] = {
        {"occ", required_argument, NULL, O_OCC},
        {"noc", required_argument, NULL, O_NOC},
        {"valid", required_argument, NULL, O_VALID},
        {"invalid", required_argument, NULL, O_INVALID},
        {"confidence", required_argument, NULL, O_CONF},
        {"mask", required_argument, NULL, O_MASK},
        {"mask-bits", required_argument, NULL, O_BITS},
        {"json", no_argument, NULL, O_JSON},
        {"csv", required_argument, NULL, O_CSV},
        {"layout", required_argument, NULL, O_LAYOUT},
        {"root", required_argument, NULL, O_ROOT},
        {"estimates", required_argument, NULL, O_EST},
        {"confidences", required_argument, NULL, O_CONFS},
        {"preset", required_argument, NULL, O_PRESET},
        {"save", required_argument, NULL, O_SAVE},
        {"pass", required_argument, NULL, O_PASS},
        {"threads", required_argument, NULL, 't'},
        {"check", no_argument, NULL, O_CHECK},
        {"checks", required_argument, NULL, O_CHECKS},
        {"help", no_argument, NULL, 'h'},
        {NULL, 0, NULL, 0},
    };
    single_opts so = {NULL, NULL, NULL, NULL, NULL, NULL, NULL, DEFAULT_MASK_BITS, 0};
    layout_opts lo = {NULL, NULL, NULL, NULL, NULL, NULL, "clean", NULL, NULL, 0, 0, 0, NULL};
    long threads = 0, bits;
    optind = 1;
    opterr = 0;
    int c;
    while ((c = getopt_long(argc, argv, "ht:", opts, NULL)) != -1) {
        switch (c) {
        case 'h':
            usage(stdout);
            return CLI_OK;
        case O_OCC:
            so.occ = optarg;
            break;
        case O_NOC:
            so.noc = optarg;
            break;
        case O_VALID:
            so.valid = optarg;
            break;
        case O_INVALID:
            so.invalid = optarg;
            break;
        case O_CONF:
            so.confidence = optarg;
            break;
        case O_MASK:
            so.mask = optarg;
            break;
        case O_BITS:
            if (cli_parse_int(optarg, 0, 255, &bits))
                return cli_usage_error(CMD, "--mask-bits: expected 0..255, got '%s'", optarg);
            so.mask_bits = (unsigned)bits;
            break;
        case O_JSON:
            so.json = lo.json = 1;
            break;
        case O_CSV:
            so.csv = lo.csv = optarg;
            break;
        case O_LAYOUT:
            lo.layout = optarg;
            break;
        case O_ROOT:
            lo.root = optarg;
            break;
        case O_EST:
            lo.estimates = optarg;
            break;
        case O_CONFS:
            lo.confidences = optarg;
            break;
        case O_PRESET:
            lo.preset = optarg;
            break;
        case O_SAVE:
            lo.save = optarg;
            break;
        case O_PASS:
            if (strcmp(optarg, "clean") && strcmp(optarg, "final"))
                return cli_usage_error(CMD, "--pass: expected clean or final, got '%s'", optarg);
            lo.pass = optarg;
            break;
        case O_CHECK:
            lo.check = 1;
            break;
        case O_CHECKS:
            lo.checks = optarg;
            break;
        case 't':
            if (cli_parse_int(optarg, 0, 1024, &threads))
                return cli_usage_error(CMD, "--threads: expected 0..1024, got '%s'", optarg);
            break;
        default:
            return cli_bad_option(CMD, opts, argv[optind - 1]);
        }
    }
    int npos = argc - optind;
    lo.threads = (int)threads;
    if (lo.layout || lo.root || lo.estimates || lo.confidences || lo.preset || lo.save ||
        lo.check || lo.checks) {
        if (npos != 0)
            return cli_usage_error(CMD, "--layout takes no EST GT arguments");
        if (!lo.layout || !lo.root)
            return cli_usage_error(CMD, "--layout and --root go together");
        if (!lo.estimates == !lo.preset)
            return cli_usage_error(CMD, "--layout needs exactly one of --estimates DIR and "
                                        "--preset P");
        if (lo.save && !lo.preset)
            return cli_usage_error(CMD, "--save writes the estimates of --preset");
        if (lo.check && !lo.preset)
            return cli_usage_error(CMD, "--check runs sinew's check on the flows of --preset; "
                                        "with --estimates use --checks DIR");
        if (lo.checks && !lo.estimates)
            return cli_usage_error(CMD, "--checks DIR goes with --estimates (with --preset use "
                                        "--check)");
        if (lo.checks && lo.confidences)
            return cli_usage_error(CMD, "give --confidences or --checks, not both");
        if (so.occ || so.noc || so.valid || so.invalid || so.confidence || so.mask)
            return cli_usage_error(CMD, "--occ/--noc/--valid/--invalid/--confidence/--mask are "
                                        "for one pair; a layout brings its own masks");
        sinew_ctx *ctx = cli_ctx(CMD, (int)threads);
        if (!ctx)
            return CLI_FAIL;
        int rc = run_layout(ctx, &lo);
        sinew_ctx_free(ctx);
        return rc;
    }
    if (npos != 2)
        return cli_usage_error(CMD, "expected EST GT (or --layout ... --root ...)");
    if (so.occ && so.noc)
        return cli_usage_error(CMD, "give --occ or --noc, not both");
    if (so.mask && !so.occ && !so.noc)
        return cli_usage_error(CMD, "--mask is scored against the true occlusion: give --occ "
                                    "or --noc too");
    sinew_ctx *ctx = cli_ctx(CMD, (int)threads);
    if (!ctx)
        return CLI_FAIL;
    int rc = run_single(ctx, argv[optind], argv[optind + 1], &so);
    sinew_ctx_free(ctx);
    return rc;
}
