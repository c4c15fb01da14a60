/* SPDX-License-Identifier: MIT */
/* Results of `sinew score` and their text table, CSV and JSON forms (tools/score_out.c). */
#ifndef SINEW_SCORE_OUT_H
#define SINEW_SCORE_OUT_H

#include <stdio.h>

#include <cJSON.h>

#include "flow/sinew.h"

/* One scored pair: error sums, their per-region summaries, time and AUSE. */
typedef struct {
    char *id;
    sinew_flow_errors err;
    sinew_flow_summary s[SINEW_REGION_COUNT];
    double time_s; /* estimator wall-clock seconds; NaN = not run */
    double ause;   /* AUSE of the pair's confidence; NaN = none */
    double ece;    /* ECE of the confidence read as P(EPE <= 1 px); NaN = none */
    int have_mask; /* our occlusion mask scored against the truth: ms valid */
    sinew_mask_scores ms;
} score_row;

/* Optional columns of the text table. */
typedef struct {
    int time, ause;
} score_cols;

/* Summary rows over several pairs: [0] mean-of-pairs, [1] pooled-pixels, per region. */
typedef struct {
    sinew_flow_summary mean[SINEW_REGION_COUNT];
    sinew_flow_summary pooled[SINEW_REGION_COUNT];
    int has_occ;
    double mean_time_s;  /* mean over pairs with a time; NaN if none */
    double mean_ause;    /* mean of per-pair AUSE (AUSE is not pooled); NaN if none */
    double mean_ece;     /* mean of per-pair ECE; NaN if none */
    int n_mask;          /* pairs with a scored occlusion mask */
    double mean_mask[3]; /* mean over those pairs of precision, recall, F1 (NaN skipped) */
    sinew_mask_scores pooled_mask; /* their counts summed */
} score_summary;

/* Region names for JSON/CSV keys and for the text table; the density footnote. */
extern const char *const score_region_key[SINEW_REGION_COUNT];
extern const char *const score_region_text[SINEW_REGION_COUNT];
extern const char *const score_density_note;

/* Per-region summaries of a row from its error sums. */
void score_summarize_row(score_row *r);
/* all-region fields at top level, noc/occ as sub-objects when present. */
cJSON *score_json_regions(const sinew_flow_summary s[SINEW_REGION_COUNT], int has_occ,
                          const char *averaging);
/* Print formatted JSON and a newline on stdout. */
int score_print_json(cJSON *root);
/* v with fmt, or "n/a" when not finite. */
void score_fmt_val(char *buf, size_t n, double v, const char *fmt);
/* The text table: header and one row per region or pair. */
void score_text_header(FILE *f, const char *first, score_cols c);
void score_text_row(FILE *f, const char *label, const sinew_flow_summary *s, double t, double ause,
                    score_cols c);
/* Confidence calibration: "calibration" object (threshold_px, bins, n, ece, reliability
 * rows {lo, hi, n, confidence, observed}) added to parent. */
void score_json_calibration(cJSON *parent, const sinew_calibration *c);
/* The reliability table and ECE as text. */
void score_text_calibration(FILE *f, const sinew_calibration *c);
/* Mean-of-pairs and pooled-pixels summaries of n rows. */
int score_summarize_all(const score_row *rows, size_t n, score_summary *out);
/* "occlusion_mask" object {precision, recall, f1, tp, fp, fn, tn, bits} added to parent. */
void score_json_mask(cJSON *parent, const sinew_mask_scores *ms, unsigned bits);
/* The occlusion-mask and confidence table of a dataset (pairs with a mask or an AUSE):
 * precision, recall, F1, AUSE, ECE per pair, then mean-of-pairs and pooled rows. */
void score_text_check(FILE *f, const score_row *rows, size_t n, const score_summary *sum,
                      unsigned bits);
/* The CSV file (atomically): one line per row, then the summary lines when sum. */
int score_write_csv(sinew_ctx *ctx, const char *path, const char *layout, const score_row *rows,
                    size_t n, const score_summary *sum);

#endif
