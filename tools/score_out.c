/* SPDX-License-Identifier: MIT */
/* Output of `sinew score`: per-pair rows, summaries over pairs, the text table, CSV and
 * JSON (declarations in tools/score_out.h). */
#define _POSIX_C_SOURCE 200809L
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cJSON.h>

#include "flow/sinew.h"
#include "tools/cli.h"
#include "tools/score_out.h"

#define CMD "score"

const char *const score_region_key[SINEW_REGION_COUNT] = {"all", "noc", "occ"};
const char *const score_region_text[SINEW_REGION_COUNT] = {
    "all scored pixels", "non-occluded pixels (noc)", "occluded pixels (occ)"};

void score_summarize_row(score_row *r)
{
    for (int k = 0; k < SINEW_REGION_COUNT; k++)
        sinew_flow_stats_summarize(&r->s[k], &r->err.region[k]);
}

static void json_summary_fields(cJSON *o, const sinew_flow_summary *s)
{
    sinew_json_add_number(o, "epe", s->epe);
    sinew_json_add_number(o, "aae_deg", s->aae_deg);
    sinew_json_add_number(o, "r05_pct", s->r05_pct);
    sinew_json_add_number(o, "r1_pct", s->r1_pct);
    sinew_json_add_number(o, "r3_pct", s->r3_pct);
    sinew_json_add_number(o, "r5_pct", s->r5_pct);
    sinew_json_add_number(o, "fl_all_pct", s->fl_all_pct);
    cJSON_AddNumberToObject(o, "n_valid", (double)s->n_valid);
    cJSON_AddNumberToObject(o, "n_gt", (double)s->n_gt);
    sinew_json_add_number(o, "density_pct", s->density_pct);
}

/* all-region fields at top level, noc/occ as sub-objects when present. */
cJSON *score_json_regions(const sinew_flow_summary s[SINEW_REGION_COUNT], int has_occ,
                          const char *averaging)
{
    cJSON *o = cJSON_CreateObject();
    if (!o)
        return NULL;
    cJSON_AddStringToObject(o, "averaging", averaging);
    json_summary_fields(o, &s[SINEW_REGION_ALL]);
    if (has_occ) {
        for (int k = SINEW_REGION_NOC; k <= SINEW_REGION_OCC; k++) {
            cJSON *sub = cJSON_AddObjectToObject(o, score_region_key[k]);
            if (sub)
                json_summary_fields(sub, &s[k]);
        }
    }
    return o;
}

const char *const score_density_note =
    "pixels with known ground truth but unknown estimate are not scored; density_pct = "
    "100 n_valid / n_gt";

int score_print_json(cJSON *root)
{
    char *txt = cJSON_Print(root), *u = NULL;
    if (!txt)
        return cli_error(CMD, "out of memory");
    sinew_ctx *ctx = sinew_ctx_new();
    int rc = ctx ? sinew_json_utf8(ctx, &u, NULL, txt, strlen(txt)) : SINEW_ENOMEM;
    cJSON_free(txt);
    if (rc) { /* ids and paths come from file names: valid UTF-8 only (flow/core.h) */
        sinew_ctx_free(ctx);
        return cli_error(CMD, "out of memory");
    }
    int ok = fputs(u, stdout) >= 0 && fputc('\n', stdout) != EOF && fflush(stdout) == 0;
    sinew_ctx_dealloc(ctx, u);
    sinew_ctx_free(ctx);
    return ok ? CLI_OK : cli_error(CMD, "stdout: write failed");
}

void score_fmt_val(char *buf, size_t n, double v, const char *fmt)
{
    if (isfinite(v))
        snprintf(buf, n, fmt, v);
    else
        snprintf(buf, n, "n/a");
}

void score_text_header(FILE *f, const char *first, score_cols c)
{
    fprintf(f, "%-24s %10s %8s %8s %8s %7s %7s %7s %7s %7s%s%s\n", first, "n_valid", "dens%", "EPE",
            "AAE", "R0.5%", "R1%", "R3%", "R5%", "Fl%", c.time ? "  time_s" : "",
            c.ause ? "     AUSE" : "");
}

void score_text_row(FILE *f, const char *label, const sinew_flow_summary *s, double t, double ause,
                    score_cols c)
{
    char v[10][32];
    score_fmt_val(v[0], sizeof v[0], s->density_pct, "%.2f");
    score_fmt_val(v[1], sizeof v[1], s->epe, "%.4f");
    score_fmt_val(v[2], sizeof v[2], s->aae_deg, "%.3f");
    score_fmt_val(v[3], sizeof v[3], s->r05_pct, "%.2f");
    score_fmt_val(v[4], sizeof v[4], s->r1_pct, "%.2f");
    score_fmt_val(v[5], sizeof v[5], s->r3_pct, "%.2f");
    score_fmt_val(v[6], sizeof v[6], s->r5_pct, "%.2f");
    score_fmt_val(v[7], sizeof v[7], s->fl_all_pct, "%.2f");
    score_fmt_val(v[8], sizeof v[8], t, "%.3f");
    score_fmt_val(v[9], sizeof v[9], ause, "%.5f");
    char lab[1024]; /* pair ids come from file names */
    fprintf(f, "%-24s %10lld %8s %8s %8s %7s %7s %7s %7s %7s",
            cli_term_text(label, lab, sizeof lab), (long long)s->n_valid, v[0], v[1], v[2], v[3],
            v[4], v[5], v[6], v[7]);
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
static const char *const csv_fields[] = {"epe",    "aae_deg",    "r05_pct",    "r1_pct",
                                         "r3_pct", "r5_pct",     "fl_all_pct", "n_valid",
                                         "n_gt",   "density_pct"};
#define CSV_NFIELDS (sizeof csv_fields / sizeof csv_fields[0])

static void csv_header(FILE *f)
{
    fputs("layout,pair,averaging", f);
    for (int k = 0; k < SINEW_REGION_COUNT; k++)
        for (size_t j = 0; j < CSV_NFIELDS; j++)
            fprintf(f, ",%s%s%s", k == 0 ? "" : score_region_key[k], k == 0 ? "" : "_",
                    csv_fields[j]);
    fputs(",runtime_s,ause,ece,occ_precision,occ_recall,occ_f1,occ_tp,occ_fp,occ_fn,occ_tn\n", f);
}

/* Our mask and confidence columns of a CSV line: ause, ece, then precision, recall, F1
 * (prf, NULL = empty) and the counts (ms, NULL = empty). */
typedef struct {
    double ause, ece;
    const double *prf;
    const sinew_mask_scores *ms;
} csv_check;

static void csv_row(FILE *f, const char *layout, const char *label, const char *averaging,
                    const sinew_flow_summary s[SINEW_REGION_COUNT], int has_occ, double t,
                    const csv_check *ck)
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
    csv_val(f, ck->ause);
    csv_val(f, ck->ece);
    for (int j = 0; j < 3; j++)
        csv_val(f, ck->prf ? ck->prf[j] : NAN);
    if (ck->ms)
        fprintf(f, ",%lld,%lld,%lld,%lld", (long long)ck->ms->tp, (long long)ck->ms->fp,
                (long long)ck->ms->fn, (long long)ck->ms->tn);
    else
        fputs(",,,,", f);
    fputc('\n', f);
}

int score_summarize_all(const score_row *rows, size_t n, score_summary *out)
{
    memset(out, 0, sizeof *out);
    sinew_flow_errors pool;
    memset(&pool, 0, sizeof pool);
    sinew_flow_summary *tmp = malloc((n ? n : 1) * sizeof *tmp);
    if (!tmp)
        return cli_error(CMD, "out of memory");
    double tsum = 0, asum = 0, esum = 0, msum[3] = {0, 0, 0};
    size_t tn = 0, an = 0, en = 0, mn[3] = {0, 0, 0};
    memset(&out->pooled_mask, 0, sizeof out->pooled_mask);
    out->n_mask = 0;
    for (size_t i = 0; i < n; i++) {
        sinew_flow_errors_add(&pool, &rows[i].err);
        if (isfinite(rows[i].ece)) {
            esum += rows[i].ece;
            en++;
        }
        if (rows[i].have_mask) {
            double r[3];
            sinew_mask_scores_rates(&rows[i].ms, &r[0], &r[1], &r[2]);
            for (int j = 0; j < 3; j++)
                if (isfinite(r[j])) {
                    msum[j] += r[j];
                    mn[j]++;
                }
            out->pooled_mask.tp += rows[i].ms.tp;
            out->pooled_mask.fp += rows[i].ms.fp;
            out->pooled_mask.fn += rows[i].ms.fn;
            out->pooled_mask.tn += rows[i].ms.tn;
            out->n_mask++;
        }
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
    out->mean_ece = en ? esum / (double)en : NAN;
    for (int j = 0; j < 3; j++)
        out->mean_mask[j] = mn[j] ? msum[j] / (double)mn[j] : NAN;
    free(tmp);
    return CLI_OK;
}

void score_json_mask(cJSON *parent, const sinew_mask_scores *ms, unsigned bits)
{
    double p, r, f1;
    sinew_mask_scores_rates(ms, &p, &r, &f1);
    cJSON *m = cJSON_AddObjectToObject(parent, "occlusion_mask");
    if (!m)
        return;
    sinew_json_add_number(m, "precision", p);
    sinew_json_add_number(m, "recall", r);
    sinew_json_add_number(m, "f1", f1);
    cJSON_AddNumberToObject(m, "tp", (double)ms->tp);
    cJSON_AddNumberToObject(m, "fp", (double)ms->fp);
    cJSON_AddNumberToObject(m, "fn", (double)ms->fn);
    cJSON_AddNumberToObject(m, "tn", (double)ms->tn);
    cJSON_AddNumberToObject(m, "bits", (double)bits);
}

static void check_line(FILE *f, const char *label, const double v[5])
{
    char a[5][32];
    for (int j = 0; j < 5; j++)
        score_fmt_val(a[j], sizeof a[j], v[j], j < 3 ? "%.4f" : "%.5f");
    fprintf(f, "  %-28s %9s %9s %9s %9s %9s\n", label, a[0], a[1], a[2], a[3], a[4]);
}

void score_text_check(FILE *f, const score_row *rows, size_t n, const score_summary *sum,
                      unsigned bits)
{
    fprintf(f,
            "\nour occlusion mask (occluded when mask & %u) against the true occlusion, and\n"
            "the confidence: AUSE (sparsification, 100 steps) and ECE (P(EPE <= 1 px), 10 bins)\n",
            bits);
    fprintf(f, "  %-28s %9s %9s %9s %9s %9s\n", "pair", "occ P", "occ R", "occ F1", "AUSE", "ECE");
    for (size_t i = 0; i < n; i++) {
        double v[5] = {NAN, NAN, NAN, rows[i].ause, rows[i].ece};
        if (rows[i].have_mask)
            sinew_mask_scores_rates(&rows[i].ms, &v[0], &v[1], &v[2]);
        check_line(f, rows[i].id, v);
    }
    double m[5] = {sum->mean_mask[0], sum->mean_mask[1], sum->mean_mask[2], sum->mean_ause,
                   sum->mean_ece};
    check_line(f, sinew_averaging_name(SINEW_AVG_PAIR_MEAN), m);
    double p[5] = {NAN, NAN, NAN, NAN, NAN};
    if (sum->n_mask)
        sinew_mask_scores_rates(&sum->pooled_mask, &p[0], &p[1], &p[2]);
    check_line(f, sinew_averaging_name(SINEW_AVG_POOLED), p);
}

int score_write_csv(sinew_ctx *ctx, const char *path, const char *layout, const score_row *rows,
                    size_t n, const score_summary *sum)
{
    sinew_outfile *of;
    int st = sinew_outfile_open(ctx, &of, path);
    if (st)
        return cli_status(CMD, ctx, st);
    FILE *f = sinew_outfile_stream(of);
    csv_header(f);
    const char *single = n == 1 && !sum ? sinew_averaging_name(SINEW_AVG_POOLED) : "per-pair";
    for (size_t i = 0; i < n; i++) {
        double prf[3];
        const sinew_mask_scores *ms = rows[i].have_mask ? &rows[i].ms : NULL;
        if (ms)
            sinew_mask_scores_rates(ms, &prf[0], &prf[1], &prf[2]);
        csv_check c = {rows[i].ause, rows[i].ece, ms ? prf : NULL, ms};
        csv_row(f, layout, rows[i].id, single, rows[i].s, rows[i].err.has_occ, rows[i].time_s, &c);
    }
    if (sum) {
        csv_check m = {sum->mean_ause, sum->mean_ece, sum->n_mask ? sum->mean_mask : NULL, NULL};
        csv_row(f, layout, "summary", sinew_averaging_name(SINEW_AVG_PAIR_MEAN), sum->mean,
                sum->has_occ, sum->mean_time_s, &m);
        double prf[3];
        if (sum->n_mask)
            sinew_mask_scores_rates(&sum->pooled_mask, &prf[0], &prf[1], &prf[2]);
        csv_check p = {NAN, NAN, sum->n_mask ? prf : NULL, sum->n_mask ? &sum->pooled_mask : NULL};
        csv_row(f, layout, "summary", sinew_averaging_name(SINEW_AVG_POOLED), sum->pooled,
                sum->has_occ, sum->mean_time_s, &p);
    }
    st = sinew_outfile_commit(ctx, of);
    return st ? cli_status(CMD, ctx, st) : CLI_OK;
}

void score_json_calibration(cJSON *parent, const sinew_calibration *c)
{
    cJSON *o = cJSON_AddObjectToObject(parent, "calibration");
    if (!o)
        return;
    cJSON_AddNumberToObject(o, "threshold_px", c->threshold);
    cJSON_AddNumberToObject(o, "bins", c->nbins);
    cJSON_AddNumberToObject(o, "n", (double)c->n);
    sinew_json_add_number(o, "ece", c->ece);
    cJSON *rel = cJSON_AddArrayToObject(o, "reliability");
    for (int b = 0; rel && b < c->nbins; b++) {
        cJSON *r = cJSON_CreateObject();
        if (!r)
            return;
        cJSON_AddNumberToObject(r, "lo", (double)b / c->nbins);
        cJSON_AddNumberToObject(r, "hi", (double)(b + 1) / c->nbins);
        cJSON_AddNumberToObject(r, "n", (double)c->count[b]);
        sinew_json_add_number(r, "confidence", c->mean_confidence[b]);
        sinew_json_add_number(r, "observed", c->observed[b]);
        cJSON_AddItemToArray(rel, r);
    }
}

void score_text_calibration(FILE *f, const sinew_calibration *c)
{
    fprintf(f, "calibration: ECE %.4f (confidence as P(EPE <= %g px), %d bins, %lld pixels)\n",
            c->ece, c->threshold, c->nbins, (long long)c->n);
    fprintf(f, "  %-11s %9s %11s %9s\n", "bin", "pixels", "confidence", "observed");
    for (int b = 0; b < c->nbins; b++) {
        char m[32], ob[32];
        score_fmt_val(m, sizeof m, c->mean_confidence[b], "%.4f");
        score_fmt_val(ob, sizeof ob, c->observed[b], "%.4f");
        fprintf(f, "  [%.2f, %.2f%c %9lld %11s %9s\n", (double)b / c->nbins,
                (double)(b + 1) / c->nbins, b + 1 == c->nbins ? ']' : ')', (long long)c->count[b],
                m, ob);
    }
}
