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
            "                   (--estimates DIR [--confidences DIR] | --preset P [--save DIR])\n"
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
            "                     forward-backward and outside bits; 0 = any nonzero)\n"
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
            "  --pass P           Sintel pass for the frames (default clean)\n"
            "outputs:\n"
            "  (default)          a text table on stdout\n"
            "  --json             JSON on stdout instead (keys epe, aae_deg, r05_pct,\n"
            "                     r1_pct, r3_pct, r5_pct, fl_all_pct, n_valid, noc, occ)\n"
            "  --csv F            also write the table as CSV to F\n"
            "  --threads N        worker threads (0 = all cores)\n"
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
            score_layout_names, cli_notice);
}

/* ---- results ---- */

typedef struct {
    char *id;
    sinew_flow_errors err;
    sinew_flow_summary s[SINEW_REGION_COUNT];
    double time_s; /* estimator wall-clock seconds; NaN = not run */
    double ause;   /* AUSE of the pair's confidence; NaN = none */
} pair_row;

static const char *const region_key[SINEW_REGION_COUNT] = {"all", "noc", "occ"};
static const char *const region_text[SINEW_REGION_COUNT] = {
    "all scored pixels", "non-occluded pixels (noc)", "occluded pixels (occ)"};

static void summarize_row(pair_row *r)
{
    for (int k = 0; k < SINEW_REGION_COUNT; k++)
        sinew_flow_stats_summarize(&r->s[k], &r->err.region[k]);
}

/* ---- reading inputs ---- */

/* Read an image and reduce it to SINEW_U8 1 channel: raw = 0 gives 1 where any colour
 * channel (alpha ignored) is nonzero; raw = 1 keeps the value of the first channel
 * (8-bit images only, for bit masks). */
static int read_mask(sinew_ctx *ctx, const char *path, int raw, int invert, sinew_image *out)
{
    sinew_image img;
    int st = sinew_image_read(ctx, &img, path);
    if (st)
        return cli_status(CMD, ctx, st);
    int colour = img.channels == 2 ? 1 : img.channels == 4 ? 3 : img.channels;
    if (raw && img.type != SINEW_U8) {
        sinew_image_free(&img);
        return cli_error(CMD, "%s: a bit mask must be an 8-bit image", path);
    }
    st = sinew_image_alloc(ctx, out, img.width, img.height, 1, SINEW_U8);
    if (st) {
        sinew_image_free(&img);
        return cli_status(CMD, ctx, st);
    }
    for (int y = 0; y < img.height; y++) {
        uint8_t *o = sinew_image_row_u8(out, y);
        for (int x = 0; x < img.width; x++) {
            unsigned any = 0, first;
            if (img.type == SINEW_U8) {
                const uint8_t *p = sinew_image_row_u8(&img, y) + (size_t)x * img.channels;
                first = p[0];
                for (int c = 0; c < colour; c++)
                    any |= p[c];
            } else {
                const uint16_t *p = sinew_image_row_u16(&img, y) + (size_t)x * img.channels;
                first = p[0];
                for (int c = 0; c < colour; c++)
                    any |= p[c];
            }
            uint8_t v = raw ? (uint8_t)first : (uint8_t)(any != 0);
            o[x] = invert ? (uint8_t)!v : v;
        }
    }
    sinew_image_free(&img);
    return CLI_OK;
}

static int read_flow(sinew_ctx *ctx, const char *path, sinew_image *out)
{
    int st = sinew_flow_read(ctx, out, path, SINEW_FLOW_AUTO);
    return st ? cli_status(CMD, ctx, st) : CLI_OK;
}

static int same_size(const sinew_image *a, const char *pa, const sinew_image *b, const char *pb)
{
    if (a->width == b->width && a->height == b->height)
        return CLI_OK;
    return cli_error(CMD, "%s: size %dx%d does not match %s (%dx%d)", pa, a->width, a->height, pb,
                     b->width, b->height);
}

/* mask &= other (both U8 1 channel, same size). */
static void mask_and(sinew_image *mask, const sinew_image *other)
{
    for (int y = 0; y < mask->height; y++) {
        uint8_t *m = sinew_image_row_u8(mask, y);
        const uint8_t *o = sinew_image_row_u8(other, y);
        for (int x = 0; x < mask->width; x++)
            m[x] = (uint8_t)(m[x] && o[x]);
    }
}

/* Add a validity mask read from `path` (invert: nonzero = excluded) into *eval. */
static int add_eval_mask(sinew_ctx *ctx, const char *path, int invert, const sinew_image *gt,
                         const char *gt_path, sinew_image *eval)
{
    sinew_image m;
    int rc = read_mask(ctx, path, 0, invert, &m);
    if (rc)
        return rc;
    if ((rc = same_size(&m, path, gt, gt_path))) {
        sinew_image_free(&m);
        return rc;
    }
    if (!eval->data) {
        *eval = m;
        return CLI_OK;
    }
    mask_and(eval, &m);
    sinew_image_free(&m);
    return CLI_OK;
}

/* KITTI occluded split: occ = 1 where flow_noc has no ground truth. */
static int kitti_occ_from_noc(sinew_ctx *ctx, const char *noc_path, const sinew_image *gt,
                              const char *gt_path, sinew_image *occ)
{
    sinew_image noc;
    int rc = read_flow(ctx, noc_path, &noc);
    if (rc)
        return rc;
    if ((rc = same_size(&noc, noc_path, gt, gt_path))) {
        sinew_image_free(&noc);
        return rc;
    }
    int st = sinew_image_alloc(ctx, occ, gt->width, gt->height, 1, SINEW_U8);
    if (st) {
        sinew_image_free(&noc);
        return cli_status(CMD, ctx, st);
    }
    for (int y = 0; y < gt->height; y++) {
        const float *n = sinew_image_row_f32(&noc, y);
        uint8_t *o = sinew_image_row_u8(occ, y);
        for (int x = 0; x < gt->width; x++)
            o[x] = (uint8_t) !(isfinite(n[2 * x]) && isfinite(n[2 * x + 1]));
    }
    sinew_image_free(&noc);
    return CLI_OK;
}

/* ---- output helpers ---- */

static void json_num(cJSON *o, const char *k, double v)
{
    if (isfinite(v))
        cJSON_AddNumberToObject(o, k, v);
    else
        cJSON_AddNullToObject(o, k);
}

static void json_summary_fields(cJSON *o, const sinew_flow_summary *s)
{
    json_num(o, "epe", s->epe);
    json_num(o, "aae_deg", s->aae_deg);
    json_num(o, "r05_pct", s->r05_pct);
    json_num(o, "r1_pct", s->r1_pct);
    json_num(o, "r3_pct", s->r3_pct);
    json_num(o, "r5_pct", s->r5_pct);
    json_num(o, "fl_all_pct", s->fl_all_pct);
    cJSON_AddNumberToObject(o, "n_valid", (double)s->n_valid);
    cJSON_AddNumberToObject(o, "n_gt", (double)s->n_gt);
    json_num(o, "density_pct", s->density_pct);
}

/* all-region fields at top level, noc/occ as sub-objects when present. */
static cJSON *json_regions(const sinew_flow_summary s[SINEW_REGION_COUNT], int has_occ,
                           const char *averaging)
{
    cJSON *o = cJSON_CreateObject();
    if (!o)
        return NULL;
    cJSON_AddStringToObject(o, "averaging", averaging);
    json_summary_fields(o, &s[SINEW_REGION_ALL]);
    if (has_occ) {
        for (int k = SINEW_REGION_NOC; k <= SINEW_REGION_OCC; k++) {
            cJSON *sub = cJSON_AddObjectToObject(o, region_key[k]);
            if (sub)
                json_summary_fields(sub, &s[k]);
        }
    }
    return o;
}

static const char *const density_note =
    "pixels with known ground truth but unknown estimate are not scored; density_pct = "
    "100 n_valid / n_gt";

static int print_json(cJSON *root)
{
    char *txt = cJSON_Print(root);
    if (!txt)
        return cli_error(CMD, "out of memory");
    int ok = fputs(txt, stdout) >= 0 && fputc('\n', stdout) != EOF && fflush(stdout) == 0;
    cJSON_free(txt);
    return ok ? CLI_OK : cli_error(CMD, "stdout: write failed");
}

static void fmt_val(char *buf, size_t n, double v, const char *fmt)
{
    if (isfinite(v))
        snprintf(buf, n, fmt, v);
    else
        snprintf(buf, n, "n/a");
}

/* Optional columns of the text table. */
typedef struct {
    int time, ause;
} text_cols;

static void text_header(FILE *f, const char *first, text_cols c)
{
    fprintf(f, "%-24s %10s %8s %8s %8s %7s %7s %7s %7s %7s%s%s\n", first, "n_valid", "dens%", "EPE",
            "AAE", "R0.5%", "R1%", "R3%", "R5%", "Fl%", c.time ? "  time_s" : "",
            c.ause ? "     AUSE" : "");
}

static void text_row(FILE *f, const char *label, const sinew_flow_summary *s, double t, double ause,
                     text_cols c)
{
    char v[10][32];
    fmt_val(v[0], sizeof v[0], s->density_pct, "%.2f");
    fmt_val(v[1], sizeof v[1], s->epe, "%.4f");
    fmt_val(v[2], sizeof v[2], s->aae_deg, "%.3f");
    fmt_val(v[3], sizeof v[3], s->r05_pct, "%.2f");
    fmt_val(v[4], sizeof v[4], s->r1_pct, "%.2f");
    fmt_val(v[5], sizeof v[5], s->r3_pct, "%.2f");
    fmt_val(v[6], sizeof v[6], s->r5_pct, "%.2f");
    fmt_val(v[7], sizeof v[7], s->fl_all_pct, "%.2f");
    fmt_val(v[8], sizeof v[8], t, "%.3f");
    fmt_val(v[9], sizeof v[9], ause, "%.5f");
    fprintf(f, "%-24s %10lld %8s %8s %8s %7s %7s %7s %7s %7s", label, (long long)s->n_valid, v[0],
            v[1], v[2], v[3], v[4], v[5], v[6], v[7]);
    if (c.time)
        fprintf(f, " %7s", v[8]);
    if (c.ause)
        fprintf(f, " %8s", v[9]);
    fputc('\n', f);
}

static void csv_val(FILE *f, double v)
{
    if (isfinite(v))
        fprintf(f, ",%.10g", v);
    else
        fputc(',', f);
}

/* The per-region CSV columns, in the order csv_row writes them. */
static const char *const csv_fields[] = {"epe",    "aae_deg",    "r05_pct", "r1_pct",
                                         "r3_pct", "r5_pct",     "fl_all_pct", "n_valid",
                                         "n_gt",   "density_pct"};
#define CSV_NFIELDS (sizeof csv_fields / sizeof csv_fields[0])

static void csv_header(FILE *f)
{
    fputs("layout,pair,averaging", f);
    for (int k = 0; k < SINEW_REGION_COUNT; k++)
        for (size_t j = 0; j < CSV_NFIELDS; j++)
            fprintf(f, ",%s%s%s", k == 0 ? "" : region_key[k], k == 0 ? "" : "_",
                    csv_fields[j]);
    fputs(",runtime_s,ause\n", f);
}

static void csv_row(FILE *f, const char *layout, const char *label, const char *averaging,
                    const sinew_flow_summary s[SINEW_REGION_COUNT], int has_occ, double t,
                    double ause)
{
    /* ids come from file names; quote them if they could break the CSV */
    if (strpbrk(label, ",\"\n")) {
        fprintf(f, "%s,\"", layout);
        for (const char *c = label; *c; c++)
            fputs(*c == '"' ? "\"\"" : (char[2]){*c, 0}, f);
        fprintf(f, "\",%s", averaging);
    } else {
        fprintf(f, "%s,%s,%s", layout, label, averaging);
    }
    for (int k = 0; k < SINEW_REGION_COUNT; k++) {
        if (k > 0 && !has_occ) { /* no occlusion split: empty fields */
            for (size_t j = 0; j < CSV_NFIELDS; j++)
                fputc(',', f);
            continue;
        }
        const sinew_flow_summary *r = &s[k];
        csv_val(f, r->epe);
        csv_val(f, r->aae_deg);
        csv_val(f, r->r05_pct);
        csv_val(f, r->r1_pct);
        csv_val(f, r->r3_pct);
        csv_val(f, r->r5_pct);
        csv_val(f, r->fl_all_pct);
        fprintf(f, ",%lld,%lld", (long long)r->n_valid, (long long)r->n_gt);
        csv_val(f, r->density_pct);
    }
    csv_val(f, t); /* empty when not measured */
    csv_val(f, ause);
    fputc('\n', f);
}

/* Summary rows over several pairs: [0] mean-of-pairs, [1] pooled-pixels, per region. */
typedef struct {
    sinew_flow_summary mean[SINEW_REGION_COUNT];
    sinew_flow_summary pooled[SINEW_REGION_COUNT];
    int has_occ;
    double mean_time_s; /* mean over pairs with a time; NaN if none */
    double mean_ause;   /* mean of per-pair AUSE (AUSE is not pooled); NaN if none */
} summary_rows;

static int summarize_all(const pair_row *rows, size_t n, summary_rows *out)
{
    memset(out, 0, sizeof *out);
    sinew_flow_errors pool;
    memset(&pool, 0, sizeof pool);
    sinew_flow_summary *tmp = malloc((n ? n : 1) * sizeof *tmp);
    if (!tmp)
        return cli_error(CMD, "out of memory");
    double tsum = 0, asum = 0;
    size_t tn = 0, an = 0;
    for (size_t i = 0; i < n; i++) {
        sinew_flow_errors_add(&pool, &rows[i].err);
        if (isfinite(rows[i].time_s)) {
            tsum += rows[i].time_s;
            tn++;
        }
        if (isfinite(rows[i].ause)) {
            asum += rows[i].ause;
            an++;
        }
    }
    out->has_occ = pool.has_occ;
    for (int k = 0; k < SINEW_REGION_COUNT; k++) {
        size_t m = 0;
        for (size_t i = 0; i < n; i++)
            if (k == SINEW_REGION_ALL || rows[i].err.has_occ)
                tmp[m++] = rows[i].s[k];
        sinew_flow_summary_mean(&out->mean[k], tmp, m);
        sinew_flow_stats_summarize(&out->pooled[k], &pool.region[k]);
    }
    out->mean_time_s = tn ? tsum / (double)tn : NAN;
    out->mean_ause = an ? asum / (double)an : NAN;
    free(tmp);
    return CLI_OK;
}

static int write_csv(sinew_ctx *ctx, const char *path, const char *layout, const pair_row *rows,
                     size_t n, const summary_rows *sum)
{
    sinew_outfile *of;
    int st = sinew_outfile_open(ctx, &of, path);
    if (st)
        return cli_status(CMD, ctx, st);
    FILE *f = sinew_outfile_stream(of);
    csv_header(f);
    const char *single = n == 1 && !sum ? sinew_averaging_name(SINEW_AVG_POOLED) : "per-pair";
    for (size_t i = 0; i < n; i++)
        csv_row(f, layout, rows[i].id, single, rows[i].s, rows[i].err.has_occ, rows[i].time_s,
                rows[i].ause);
    if (sum) {
        csv_row(f, layout, "summary", sinew_averaging_name(SINEW_AVG_PAIR_MEAN), sum->mean,
                sum->has_occ, sum->mean_time_s, sum->mean_ause);
        csv_row(f, layout, "summary", sinew_averaging_name(SINEW_AVG_POOLED), sum->pooled,
                sum->has_occ, sum->mean_time_s, NAN);
    }
    st = sinew_outfile_commit(ctx, of);
    return st ? cli_status(CMD, ctx, st) : CLI_OK;
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
} sparse_result;

/* Sparsification over pixels where gt, estimate, confidence and the mask are known. */
static int score_confidence(sinew_ctx *ctx, const char *path, const sinew_image *est,
                            const sinew_image *gt, const char *gt_path, const sinew_image *eval,
                            sparse_result *out)
{
    memset(out, 0, sizeof *out);
    sinew_image conf = {0}, epe = {0};
    float *unc = NULL, *err = NULL;
    const char *ext = strrchr(path, '.');
    int st = ext && !strcmp(ext, ".pfm") ? sinew_pfm_read_image(ctx, &conf, path)
                                         : sinew_npy_read_image(ctx, &conf, path);
    int rc = CLI_OK;
    if (st) {
        rc = cli_status(CMD, ctx, st);
        goto done;
    }
    if (conf.type != SINEW_F32 || conf.channels != 1) {
        rc = cli_error(CMD, "%s: confidence must be one channel per pixel (found %d)", path,
                       conf.channels);
        goto done;
    }
    if ((rc = same_size(&conf, path, gt, gt_path)))
        goto done;
    if ((st = sinew_image_alloc(ctx, &epe, gt->width, gt->height, 1, SINEW_F32)) ||
        (st = sinew_flow_epe_map(ctx, &epe, est, gt))) {
        rc = cli_status(CMD, ctx, st);
        goto done;
    }
    size_t total = (size_t)gt->width * (size_t)gt->height;
    unc = malloc(total * sizeof *unc);
    err = malloc(total * sizeof *err);
    if (!unc || !err) {
        rc = cli_error(CMD, "out of memory");
        goto done;
    }
    size_t n = 0;
    for (int y = 0; y < gt->height; y++) {
        const float *e = sinew_image_row_f32(&epe, y), *c = sinew_image_row_f32(&conf, y);
        const uint8_t *m = eval && eval->data ? sinew_image_row_u8(eval, y) : NULL;
        for (int x = 0; x < gt->width; x++) {
            if (!isfinite(e[x]) || !isfinite(c[x]) || (m && !m[x]))
                continue;
            unc[n] = 1.0f - c[x];
            err[n] = e[x];
            n++;
        }
    }
    out->n = n;
    if (n > 0) {
        st = sinew_sparsification(ctx, unc, err, n, SPARSE_STEPS, out->curve, out->oracle,
                                  &out->ause);
        if (st) {
            rc = cli_status(CMD, ctx, st);
            goto done;
        }
        out->have = 1;
    }
done:
    free(unc);
    free(err);
    sinew_image_free(&conf);
    sinew_image_free(&epe);
    return rc;
}

/* A fresh row for pair `id` (no time, no AUSE yet). */
static void row_init(pair_row *row, const char *id)
{
    memset(row, 0, sizeof *row);
    row->id = (char *)id;
    row->time_s = NAN;
    row->ause = NAN;
}

/* Score est against gt into row: the occlusion split from occ_path (nonzero = occluded)
 * or from a KITTI noc file, the evaluation mask from valid/invalid masks (any may be
 * NULL). occ and eval receive the masks used (for the caller's later steps). */
static int score_vs_truth(sinew_ctx *ctx, const sinew_image *est, const sinew_image *gt,
                          const char *gt_path, const char *occ_path, const char *noc_path,
                          const char *valid_path, const char *invalid_path, sinew_image *occ,
                          sinew_image *eval, pair_row *row)
{
    int rc;
    if (occ_path) {
        if ((rc = read_mask(ctx, occ_path, 0, 0, occ)) ||
            (rc = same_size(occ, occ_path, gt, gt_path)))
            return rc;
    } else if (noc_path && (rc = kitti_occ_from_noc(ctx, noc_path, gt, gt_path, occ))) {
        return rc;
    }
    if (valid_path && (rc = add_eval_mask(ctx, valid_path, 0, gt, gt_path, eval)))
        return rc;
    if (invalid_path && (rc = add_eval_mask(ctx, invalid_path, 1, gt, gt_path, eval)))
        return rc;
    int st = sinew_flow_errors_compute(ctx, &row->err, est, gt, occ->data ? occ : NULL,
                                       eval->data ? eval : NULL);
    if (st)
        return cli_status(CMD, ctx, st);
    summarize_row(row);
    return CLI_OK;
}

static int run_single(sinew_ctx *ctx, const char *est_path, const char *gt_path,
                      const single_opts *o)
{
    sinew_image est = {0}, gt = {0}, occ = {0}, eval = {0}, pred = {0};
    pair_row row;
    row_init(&row, est_path);
    sinew_mask_scores ms;
    int have_ms = 0;
    sparse_result sp = {0};
    int rc;
    if ((rc = read_flow(ctx, est_path, &est)) || (rc = read_flow(ctx, gt_path, &gt)) ||
        (rc = same_size(&est, est_path, &gt, gt_path)))
        goto done;
    if ((rc = score_vs_truth(ctx, &est, &gt, gt_path, o->occ, o->noc, o->valid, o->invalid,
                             &occ, &eval, &row)))
        goto done;
    if (o->mask) {
        if ((rc = read_mask(ctx, o->mask, 1, 0, &pred)) ||
            (rc = same_size(&pred, o->mask, &gt, gt_path)))
            goto done;
        /* Score the mask where the truth is defined: inside the evaluation mask. */
        int st = sinew_mask_scores_compute(ctx, &ms, &pred, &occ, eval.data ? &eval : NULL,
                                           o->mask_bits);
        if (st) {
            rc = cli_status(CMD, ctx, st);
            goto done;
        }
        have_ms = 1;
    }
    if (o->confidence &&
        (rc = score_confidence(ctx, o->confidence, &est, &gt, gt_path, &eval, &sp)))
        goto done;

    if (o->csv && (rc = write_csv(ctx, o->csv, "pair", &row, 1, NULL)))
        goto done;
    const char *avg = sinew_averaging_name(SINEW_AVG_POOLED);
    if (o->json) {
        cJSON *root = json_regions(row.s, row.err.has_occ, avg);
        if (!root) {
            rc = cli_error(CMD, "out of memory");
            goto done;
        }
        cJSON_AddStringToObject(root, "averaging_text", "one pair: mean over its scored pixels");
        cJSON_AddStringToObject(root, "missing_estimate", density_note);
        cJSON_AddStringToObject(root, "estimate", est_path);
        cJSON_AddStringToObject(root, "ground_truth", gt_path);
        if (have_ms) {
            double p, r, f1;
            sinew_mask_scores_rates(&ms, &p, &r, &f1);
            cJSON *m = cJSON_AddObjectToObject(root, "occlusion_mask");
            if (m) {
                json_num(m, "precision", p);
                json_num(m, "recall", r);
                json_num(m, "f1", f1);
                cJSON_AddNumberToObject(m, "tp", (double)ms.tp);
                cJSON_AddNumberToObject(m, "fp", (double)ms.fp);
                cJSON_AddNumberToObject(m, "fn", (double)ms.fn);
                cJSON_AddNumberToObject(m, "tn", (double)ms.tn);
                cJSON_AddNumberToObject(m, "bits", (double)o->mask_bits);
            }
        }
        if (o->confidence) {
            cJSON *s = cJSON_AddObjectToObject(root, "sparsification");
            if (s) {
                cJSON_AddNumberToObject(s, "n", (double)sp.n);
                cJSON_AddNumberToObject(s, "steps", SPARSE_STEPS);
                if (sp.have) {
                    json_num(s, "ause", sp.ause);
                    cJSON_AddItemToObject(s, "curve",
                                          cJSON_CreateDoubleArray(sp.curve, SPARSE_STEPS));
                    cJSON_AddItemToObject(s, "oracle",
                                          cJSON_CreateDoubleArray(sp.oracle, SPARSE_STEPS));
                } else {
                    cJSON_AddNullToObject(s, "ause");
                }
            }
        }
        rc = print_json(root);
        cJSON_Delete(root);
        goto done;
    }
    printf("sinew score: %s against %s\n", est_path, gt_path);
    printf("averaging: %s (one pair: mean over its scored pixels)\n", avg);
    printf("dens%% = scored share of the known ground truth (unknown estimates are not "
           "scored)\n\n");
    text_cols none = {0, 0};
    text_header(stdout, "region", none);
    for (int k = 0; k < SINEW_REGION_COUNT; k++)
        if (k == SINEW_REGION_ALL || row.err.has_occ)
            text_row(stdout, region_key[k], &row.s[k], NAN, NAN, none);
    if (have_ms) {
        double p, r, f1;
        char a[3][32];
        sinew_mask_scores_rates(&ms, &p, &r, &f1);
        fmt_val(a[0], sizeof a[0], p, "%.4f");
        fmt_val(a[1], sizeof a[1], r, "%.4f");
        fmt_val(a[2], sizeof a[2], f1, "%.4f");
        printf("\nocclusion mask (bits %u): precision %s  recall %s  F1 %s  (tp %lld fp %lld fn "
               "%lld tn %lld)\n",
               o->mask_bits, a[0], a[1], a[2], (long long)ms.tp, (long long)ms.fp, (long long)ms.fn,
               (long long)ms.tn);
    }
    if (o->confidence) {
        char a[32];
        fmt_val(a, sizeof a, sp.have ? sp.ause : NAN, "%.5f");
        printf("\nconfidence: AUSE %s (sparsification, %d steps, %zu pixels)\n", a, SPARSE_STEPS,
               sp.n);
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
                         const sinew_image *gt, sinew_image *flow, double *seconds)
{
    sinew_image f0 = {0}, f1 = {0};
    int rc = CLI_OK, st;
    if ((st = sinew_image_read(ctx, &f0, p->frame0)) ||
        (st = sinew_image_read(ctx, &f1, p->frame1))) {
        rc = cli_status(CMD, ctx, st);
        goto done;
    }
    if ((rc = same_size(&f0, p->frame0, gt, p->gt)) || (rc = same_size(&f1, p->frame1, gt, p->gt)))
        goto done;
    if (f0.type != f1.type || f0.channels != f1.channels) {
        rc = cli_error(CMD, "%s: pixel format differs from %s", p->frame1, p->frame0);
        goto done;
    }
    if ((st = sinew_image_alloc(ctx, flow, gt->width, gt->height, 2, SINEW_F32))) {
        rc = cli_status(CMD, ctx, st);
        goto done;
    }
    double t0 = now_s();
    st = sinew_estimator_run(o->est, flow, NULL, &f0, &f1);
    *seconds = now_s() - t0;
    if (st) {
        rc = cli_error(CMD, "%s: estimator failed: %s", p->frame0,
                       *sinew_ctx_message(ctx) ? sinew_ctx_message(ctx) : sinew_strerror(st));
        goto done;
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
    return rc;
}

/* Score one dataset pair into *row (row->id borrowed from the pair). */
static int score_one_pair(sinew_ctx *ctx, const score_pair *p, const layout_opts *o, pair_row *row)
{
    sinew_image est = {0}, gt = {0}, occ = {0}, eval = {0};
    char *est_path = NULL, *conf_path = NULL, *tried = NULL;
    int rc;
    row_init(row, p->id);
    if (o->preset) {
        if ((rc = read_flow(ctx, p->gt, &gt)) ||
            (rc = estimate_pair(ctx, p, o, &gt, &est, &row->time_s)))
            goto done;
    } else {
        est_path = score_find_file(o->estimates, p->id, "flo|png|pfm|npy", &tried);
        if (!est_path) {
            rc = tried ? cli_error(CMD, "%s: no estimate for pair %s", tried, p->id)
                       : cli_error(CMD, "out of memory");
            goto done;
        }
        if ((rc = read_flow(ctx, p->gt, &gt)) || (rc = read_flow(ctx, est_path, &est)) ||
            (rc = same_size(&est, est_path, &gt, p->gt)))
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
done:
    free(conf_path);
    free(est_path);
    free(tried);
    sinew_image_free(&est);
    sinew_image_free(&gt);
    sinew_image_free(&occ);
    sinew_image_free(&eval);
    return rc;
}

static int output_layout(sinew_ctx *ctx, const layout_opts *o, const pair_row *rows, size_t n)
{
    summary_rows sum;
    int rc = summarize_all(rows, n, &sum);
    if (rc)
        return rc;
    if (o->csv && (rc = write_csv(ctx, o->csv, o->layout, rows, n, &sum)))
        return rc;
    text_cols cols = {isfinite(sum.mean_time_s) ? 1 : 0, o->confidences != NULL};
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
            cJSON_AddStringToObject(root, "missing_estimate", density_note);
            pairs = cJSON_AddArrayToObject(root, "pairs");
            s = cJSON_AddObjectToObject(root, "summary");
        }
        if (!root || !pairs || !s) {
            cJSON_Delete(root);
            return cli_error(CMD, "out of memory");
        }
        for (size_t i = 0; i < n; i++) {
            cJSON *r = json_regions(rows[i].s, rows[i].err.has_occ,
                                    "one pair: mean over its scored pixels");
            if (!r)
                continue;
            cJSON_AddStringToObject(r, "id", rows[i].id);
            if (cols.time)
                json_num(r, "runtime_s", rows[i].time_s);
            if (cols.ause)
                json_num(r, "ause", rows[i].ause);
            cJSON_AddItemToArray(pairs, r);
        }
        cJSON *m = json_regions(sum.mean, sum.has_occ, sinew_averaging_name(SINEW_AVG_PAIR_MEAN));
        cJSON *p = json_regions(sum.pooled, sum.has_occ, sinew_averaging_name(SINEW_AVG_POOLED));
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
            json_num(s, "mean_runtime_s", sum.mean_time_s);
        if (cols.ause && m)
            json_num(m, "ause", sum.mean_ause);
        rc = print_json(root);
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
        printf("\n[%s] %s\n", region_key[k], region_text[k]);
        text_header(stdout, "pair", cols);
        for (size_t i = 0; i < n; i++)
            if (k == SINEW_REGION_ALL || rows[i].err.has_occ)
                text_row(stdout, rows[i].id, &rows[i].s[k], rows[i].time_s,
                         k == SINEW_REGION_ALL ? rows[i].ause : NAN, cols);
        text_row(stdout, sinew_averaging_name(SINEW_AVG_PAIR_MEAN), &sum.mean[k], sum.mean_time_s,
                 k == SINEW_REGION_ALL ? sum.mean_ause : NAN, cols);
        text_row(stdout, sinew_averaging_name(SINEW_AVG_POOLED), &sum.pooled[k], sum.mean_time_s,
                 NAN, cols);
    }
    return fflush(stdout) == 0 ? CLI_OK : cli_error(CMD, "stdout: write failed");
}

static int run_layout(sinew_ctx *ctx, const layout_opts *o)
{
    score_set set;
    int rc = score_layout_list(CMD, o->layout, o->root, o->pass, &set);
    if (rc)
        return rc;
    pair_row *rows = calloc(set.n, sizeof *rows);
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
        O_THREADS
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
        {"threads", required_argument, NULL, O_THREADS},
        {"help", no_argument, NULL, 'h'},
        {NULL, 0, NULL, 0},
    };
    single_opts so = {NULL, NULL, NULL, NULL, NULL, NULL, NULL, DEFAULT_MASK_BITS, 0};
    layout_opts lo = {NULL, NULL, NULL, NULL, NULL, NULL, "clean", NULL, 0, 0, NULL};
    long threads = 0, bits;
    optind = 1;
    opterr = 0;
    int c;
    while ((c = getopt_long(argc, argv, "h", opts, NULL)) != -1) {
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
        case O_THREADS:
            if (cli_parse_int(optarg, 0, 1024, &threads))
                return cli_usage_error(CMD, "--threads: expected 0..1024, got '%s'", optarg);
            break;
        default:
            return cli_usage_error(CMD, "unknown or incomplete option '%s'", argv[optind - 1]);
        }
    }
    int npos = argc - optind;
    lo.threads = (int)threads;
    if (lo.layout || lo.root || lo.estimates || lo.confidences || lo.preset || lo.save) {
        if (npos != 0)
            return cli_usage_error(CMD, "--layout takes no EST GT arguments");
        if (!lo.layout || !lo.root)
            return cli_usage_error(CMD, "--layout and --root go together");
        if (!lo.estimates == !lo.preset)
            return cli_usage_error(CMD, "--layout needs exactly one of --estimates DIR and "
                                        "--preset P");
        if (lo.save && !lo.preset)
            return cli_usage_error(CMD, "--save writes the estimates of --preset");
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
