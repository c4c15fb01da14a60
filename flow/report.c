/* SPDX-License-Identifier: MIT */
/* The run report page: summary cards, warnings, the per-pair plots, the pictures, the
 * pair table, inputs and options, and the manifest itself, built in memory with the
 * string buffer (flow/internal/strbuf.h; allocation failures are remembered and
 * reported once) and written with sinew_write_file (atomic). The data comes from
 * report_data.c, pictures from report_pictures.c, plots from report_plot.c. The page
 * carries a Content-Security-Policy that forbids every fetch except data: images, so
 * even a mistake cannot make it reach the network. A pair file that is missing or
 * unreadable gives a placeholder and a warning line, never a failure: a report is most
 * useful exactly when a run went partly wrong. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include <cJSON.h>

#include "flow/draw.h"
#include "flow/internal/base.h"
#include "flow/internal/json.h"
#include "flow/internal/report.h"
#include "flow/io.h"
#include "flow/report.h"
#include "flow/run.h"

void sinew_report_options_default(sinew_report_options *o)
{
    if (!o)
        return;
    o->thumb_width = 240;
    o->max_thumb_pairs = 40;
    o->flow_max = 0;
    o->title = NULL;
}

static const char css[] =
    ":root{color-scheme:dark;--bg:#14171c;--panel:#1c2027;--line:#2c323b;--text:#d5d9df;"
    "--muted:#8f97a3;--accent:#7fb8b0;--warn:#e0a868;--bad:#e07a6a}\n"
    "*{box-sizing:border-box}\n"
    "body{margin:0;background:var(--bg);color:var(--text);font:15px/1.5 system-ui,"
    "-apple-system,'Segoe UI','Noto Sans','Liberation Sans',sans-serif}\n"
    "main{max-width:1180px;margin:0 auto;padding:28px 24px 48px}\n"
    "h1{font-size:26px;font-weight:600;margin:0 0 4px;letter-spacing:.01em}\n"
    "h2{font-size:18px;font-weight:600;margin:36px 0 12px;color:var(--accent)}\n"
    "h3{font-size:15px;font-weight:600;margin:0 0 8px}\n"
    ".muted{color:var(--muted);font-weight:400}\n"
    ".num,td.n{font-family:ui-monospace,'DejaVu Sans Mono','Liberation Mono',monospace;"
    "font-variant-numeric:tabular-nums}\n"
    ".cards{display:grid;grid-template-columns:repeat(auto-fill,minmax(170px,1fr));gap:12px}\n"
    ".card{background:var(--panel);border:1px solid var(--line);border-radius:8px;padding:12px "
    "14px}\n"
    ".card .v{font-size:22px;font-family:ui-monospace,'DejaVu Sans Mono',monospace}\n"
    ".card .k{color:var(--muted);font-size:13px}\n"
    ".warn{background:#2a2219;border:1px solid #4a3a26;border-radius:8px;padding:10px 14px}\n"
    ".warn li{margin:3px 0}.warn .tag{color:var(--warn)}\n"
    ".plots{display:grid;grid-template-columns:repeat(auto-fill,minmax(460px,1fr));gap:14px}\n"
    ".plot{margin:0;background:var(--panel);border:1px solid var(--line);border-radius:8px;"
    "padding:10px 12px}\n"
    ".plot figcaption{color:var(--muted);font-size:13px;margin-bottom:4px}\n"
    "svg{width:100%;height:auto;display:block}\n"
    ".grid{stroke:var(--line);stroke-width:1}.ax{fill:var(--muted);font-size:11px;"
    "font-family:system-ui,sans-serif}\n"
    ".line{fill:none;stroke:var(--accent);stroke-width:1.8}.pt{fill:var(--accent)}\n"
    ".pair{background:var(--panel);border:1px solid var(--line);border-radius:8px;"
    "padding:12px 14px;margin:0 0 14px}\n"
    ".strip{display:flex;flex-wrap:wrap;gap:10px}\n"
    ".strip figure{margin:0}.strip img{display:block;border-radius:4px;"
    "max-width:100%;height:auto}.strip img.up{image-rendering:pixelated}\n"
    ".strip figcaption{color:var(--muted);font-size:12px;margin-top:3px}\n"
    ".ph{display:flex;flex-direction:column;align-items:center;justify-content:center;"
    "border:1px dashed var(--line);border-radius:4px;color:var(--muted)}\n"
    ".legend{display:flex;flex-wrap:wrap;gap:18px;align-items:center;margin:0 0 14px;"
    "color:var(--muted);font-size:13px}\n"
    ".sw{display:inline-block;width:12px;height:12px;border-radius:2px;margin-right:5px;"
    "vertical-align:-1px}\n"
    ".bar{display:inline-block;width:160px;height:12px;border-radius:2px;vertical-align:-1px;"
    "margin:0 6px}\n"
    "table{border-collapse:collapse;width:100%;font-size:14px}\n"
    "th,td{text-align:left;padding:5px 8px;border-bottom:1px solid var(--line);"
    "vertical-align:top}\n"
    "th{color:var(--muted);font-weight:500}td.n{text-align:right}\n"
    ".st-done{color:var(--accent)}.st-failed{color:var(--bad)}.st-pending{color:var(--warn)}\n"
    "pre{background:var(--panel);border:1px solid var(--line);border-radius:8px;padding:12px;"
    "overflow:auto;font-size:12.5px;max-height:480px}\n"
    "details summary{cursor:pointer;color:var(--muted)}\n"
    "footer{margin-top:40px;color:var(--muted);font-size:13px;border-top:1px solid var(--line);"
    "padding-top:12px}\n";

static double mean_of(const sinew__report *r, int k, size_t *count)
{
    double s = 0;
    size_t c = 0;
    for (size_t i = 0; i < r->npairs; i++)
        if (isfinite(r->pairs[i].m[k]))
            s += r->pairs[i].m[k], c++;
    if (count)
        *count = c;
    return c ? s / (double)c : NAN;
}

static void card(sinew__sbuf *b, const char *key, const char *value_html)
{
    sinew__sb_printf(
        b, "<div class=\"card\"><div class=\"v\">%s</div><div class=\"k\">%s</div></div>\n",
        value_html, key);
}

static void summary(sinew__sbuf *b, const sinew__report *r)
{
    const cJSON *sum = cJSON_GetObjectItemCaseSensitive(r->root, "summary");
    size_t cnt[3] = {0, 0, 0};
    for (size_t i = 0; i < r->npairs; i++) {
        const char *s = r->pairs[i].status;
        cnt[s && !strcmp(s, "done") ? 0 : s && !strcmp(s, "failed") ? 1 : 2]++;
    }
    char v[64];
    snprintf(v, sizeof v, "%zu", r->npairs);
    sinew__sb_puts(b, "<section class=\"cards\">\n");
    card(b, "pairs", v);
    static const char *const names[3] = {"done", "failed", "pending"};
    for (int k = 0; k < 3; k++) {
        double d = cJSON_IsObject(sum) ? sinew__json_num(sum, names[k]) : NAN;
        snprintf(v, sizeof v, "%.0f", isfinite(d) ? d : (double)cnt[k]);
        card(b, names[k], v);
    }
    double fr = sinew__json_num(r->root, "frames");
    if (isfinite(fr)) {
        snprintf(v, sizeof v, "%.0f", fr);
        card(b, "frames", v);
    }
    for (int k = 0; k < SINEW__M_COUNT; k++) {
        size_t c;
        double m = mean_of(r, k, &c);
        if (!c)
            continue;
        char key[96];
        snprintf(key, sizeof key, "%s%s%s (mean of %zu)", sinew__report_metrics[k].title,
                 *sinew__report_metrics[k].unit ? ", " : "", sinew__report_metrics[k].unit, c);
        snprintf(v, sizeof v, "%.3f", m);
        card(b, key, v);
    }
    sinew__sb_puts(b, "</section>\n");
}

static void pair_table(sinew__sbuf *b, const sinew__report *r)
{
    sinew__sb_puts(b, "<table><thead><tr><th>pair</th><th>frames</th><th>status</th>");
    for (int k = 0; k < SINEW__M_COUNT; k++)
        sinew__sb_printf(b, "<th>%s</th>", sinew__report_metrics[k].key);
    sinew__sb_puts(b, "<th>note</th></tr></thead><tbody>\n");
    for (size_t i = 0; i < r->npairs; i++) {
        const sinew__report_pair *q = &r->pairs[i];
        const char *s = q->status ? q->status : "unknown";
        sinew__sb_puts(b, "<tr><td class=\"num\">");
        sinew__sb_esc(b, q->name ? q->name : "?");
        sinew__sb_puts(b, "</td><td class=\"n\">");
        if (q->fi >= 0)
            sinew__sb_printf(b, "%d&ndash;%d", q->fi, q->fj);
        sinew__sb_puts(b, "</td><td class=\"st-");
        sinew__sb_esc(b, s);
        sinew__sb_puts(b, "\">");
        sinew__sb_esc(b, s);
        sinew__sb_puts(b, "</td>");
        for (int k = 0; k < SINEW__M_COUNT; k++) {
            sinew__sb_puts(b, "<td class=\"n\">");
            sinew__sb_num(b, q->m[k], "%.3f");
            sinew__sb_puts(b, "</td>");
        }
        sinew__sb_puts(b, "<td>");
        sinew__sb_esc(b, q->error);
        sinew__sb_puts(b, "</td></tr>\n");
    }
    sinew__sb_puts(b, "</tbody></table>\n");
}

static void inputs_section(sinew__sbuf *b, const sinew__report *r)
{
    const cJSON *inputs = cJSON_GetObjectItemCaseSensitive(r->root, "inputs");
    const cJSON *opt = cJSON_GetObjectItemCaseSensitive(r->root, "options");
    sinew__sb_puts(b, "<h2>Inputs and options</h2>\n");
    if (cJSON_IsArray(inputs) && cJSON_GetArraySize(inputs) > 0) {
        sinew__sb_puts(b,
                       "<table><thead><tr><th>role</th><th>path</th><th>bytes</th><th>SHA-256</th>"
                       "</tr></thead><tbody>\n");
        int shown = 0, total = cJSON_GetArraySize(inputs);
        const cJSON *e;
        cJSON_ArrayForEach(e, inputs)
        {
            if (shown++ >= 200)
                break;
            const char *sha = sinew__json_str(e, "sha256");
            sinew__sb_puts(b, "<tr><td>");
            sinew__sb_esc(b, sinew__json_str(e, "role"));
            sinew__sb_puts(b, "</td><td class=\"num\">");
            sinew__sb_esc(b, sinew__json_str(e, "path"));
            sinew__sb_puts(b, "</td><td class=\"n\">");
            sinew__sb_num(b, sinew__json_num(e, "bytes"), "%.0f");
            sinew__sb_puts(b, "</td><td class=\"num\">");
            if (sha) {
                char s12[13];
                snprintf(s12, sizeof s12, "%s", sha);
                sinew__sb_puts(b, "<span title=\"");
                sinew__sb_esc(b, sha);
                sinew__sb_puts(b, "\">");
                sinew__sb_esc(b, s12);
                sinew__sb_puts(b, "&hellip;</span>");
            } else {
                sinew__sb_esc(b, sinew__json_str(e, "error"));
            }
            sinew__sb_puts(b, "</td></tr>\n");
        }
        sinew__sb_puts(b, "</tbody></table>\n");
        if (total > 200)
            sinew__sb_printf(b,
                             "<p class=\"muted\">%d more inputs are listed in the manifest.</p>\n",
                             total - 200);
    } else {
        sinew__sb_puts(b, "<p class=\"muted\">The manifest lists no inputs.</p>\n");
    }
    if (opt) {
        char *txt = cJSON_IsString(opt) ? NULL : cJSON_Print(opt);
        sinew__sb_puts(b, "<h3 style=\"margin-top:16px\">Options</h3><pre>");
        sinew__sb_esc(b, txt ? txt : opt->valuestring);
        sinew__sb_puts(b, "</pre>\n");
        cJSON_free(txt);
    }
}

static int build(sinew__report *r, sinew__sbuf *page)
{
    sinew_ctx *ctx = r->ctx;
    int st;
    for (size_t i = 0; i < r->npairs; i++)
        if ((st = sinew__check_cancel(ctx, r->rundir)) ||
            (st = sinew__report_derive_metrics(r, &r->pairs[i])))
            return st;

    /* Pictured pairs: evenly spaced, safe names only. */
    size_t want = (size_t)r->o.max_thumb_pairs, n = r->npairs;
    size_t npic = n < want ? n : want;
    size_t *pick = NULL;
    if (npic) {
        pick = sinew__calloc(ctx, npic, sizeof *pick);
        if (!pick)
            return SINEW_ENOMEM;
        for (size_t j = 0; j < npic; j++)
            pick[j] = n <= want ? j : (size_t)((double)j * (double)n / (double)want);
    }
    double fmax = r->o.flow_max;
    if (!(fmax > 0)) { /* the run's maximum from the stats, if every pair reports one */
        fmax = 0;
        size_t with = 0;
        for (size_t i = 0; i < n; i++) {
            const sinew__report_pair *q = &r->pairs[i];
            double m = cJSON_IsObject(q->stats) ? sinew__json_num(q->stats, "flow_max") : NAN;
            if (isfinite(m) && m >= 0) {
                with++;
                fmax = m > fmax ? m : fmax;
            } else if (q->status && !strcmp(q->status, "done")) {
                with = 0; /* a done pair without it: fall back to reading the flows */
                break;
            }
        }
        if (!with)
            fmax = 0;
    }
    if (!(fmax > 0)) {
        fmax = 0;
        char path[4096];
        for (size_t j = 0; j < npic; j++) {
            const sinew__report_pair *q = &r->pairs[pick[j]];
            sinew_image f;
            double m;
            if (!sinew__report_find_flow(r, q, path, sizeof path))
                continue;
            if (!sinew_flow_read(ctx, &f, path, SINEW_FLOW_AUTO)) {
                if (!sinew_draw_max_magnitude(ctx, &m, &f) && m > fmax)
                    fmax = m;
                sinew_image_free(&f);
            }
            sinew_ctx_clear(ctx);
        }
        if (fmax <= 0)
            fmax = 1;
    }
    sinew__sbuf pics;
    sinew__sb_init(&pics, ctx);
    st = SINEW_OK;
    for (size_t j = 0; j < npic && !st; j++) {
        const sinew__report_pair *q = &r->pairs[pick[j]];
        if ((st = sinew__check_cancel(ctx, r->rundir)))
            break;
        if (!q->safe) {
            sinew__report_warn(r, q->name, "pair name is not a plain folder name; no pictures",
                               NULL);
            continue;
        }
        st = sinew__report_pictures(r, &pics, q, fmax);
    }
    sinew__free(ctx, pick);
    if (st) {
        sinew__sb_free(&pics);
        return st;
    }
    for (size_t i = 0; i < r->npairs; i++) {
        const sinew__report_pair *q = &r->pairs[i];
        if (q->status && !strcmp(q->status, "failed"))
            sinew__report_warn(r, q->name, "pair failed", q->error);
        if (cJSON_IsObject(q->stats)) {
            const cJSON *w = cJSON_GetObjectItemCaseSensitive(q->stats, "warnings"), *e;
            cJSON_ArrayForEach(e, w) if (cJSON_IsString(e))
                sinew__report_warn(r, q->name, e->valuestring, NULL);
        }
    }
    const cJSON *gw = cJSON_GetObjectItemCaseSensitive(r->root, "warnings"), *e;
    sinew__sbuf top;
    sinew__sb_init(&top, ctx);
    size_t ntop = 0;
    cJSON_ArrayForEach(e, gw) if (cJSON_IsString(e))
    {
        sinew__sb_puts(&top, "<li>");
        sinew__sb_esc(&top, e->valuestring);
        sinew__sb_puts(&top, "</li>\n");
        ntop++;
    }

    const char *title = r->o.title ? r->o.title : "sinew run report";
    const char *ver = sinew__json_str(r->root, "sinew_version");
    sinew__sb_puts(page,
                   "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
                   "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
                   "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; "
                   "img-src data:; style-src 'unsafe-inline'\">\n"
                   "<meta name=\"generator\" content=\"sinew ");
    sinew__sb_puts(page, SINEW_VERSION_STRING);
    sinew__sb_puts(page, "\">\n<title>");
    sinew__sb_esc(page, title);
    sinew__sb_puts(page, "</title>\n<style>\n");
    sinew__sb_puts(page, css);
    sinew__sb_puts(page, "</style>\n</head>\n<body>\n<main>\n<header><h1>");
    sinew__sb_esc(page, title);
    sinew__sb_puts(page, "</h1><div class=\"muted\">run folder <span class=\"num\">");
    sinew__sb_esc(page, r->rundir);
    sinew__sb_puts(page, "</span>");
    if (ver) {
        sinew__sb_puts(page, " &middot; made by sinew ");
        sinew__sb_esc(page, ver);
    }
    const char *fmt = sinew__json_str(r->root, "format");
    if (fmt) {
        sinew__sb_puts(page, " &middot; ");
        sinew__sb_esc(page, fmt);
    }
    sinew__sb_puts(page, "</div></header>\n<h2>Summary</h2>\n");
    summary(page, r);
    if (ntop + r->nwarn) {
        sinew__sb_printf(page, "<h2>Warnings (%zu)</h2>\n<ul class=\"warn\">\n", ntop + r->nwarn);
        sinew__sb_append(page, &top);
        sinew__sb_append(page, &r->warn);
        sinew__sb_puts(page, "</ul>\n");
    }
    sinew__sb_free(&top);
    sinew__sb_puts(page, "<h2>Per pair</h2>\n<div class=\"plots\">\n");
    for (int k = 0; k < SINEW__M_COUNT; k++)
        sinew__report_plot(page, r, k);
    sinew__sb_puts(page, "</div>\n");
    if (npic) {
        sinew__sb_printf(
            page, "<h2>Pictures <span class=\"muted\">(%zu of %zu pairs)</span></h2>\n", npic, n);
        sinew__report_legend(page, r, fmax);
        sinew__sb_append(page, &pics);
    }
    sinew__sb_free(&pics);
    sinew__sb_puts(page, "<h2>All pairs</h2>\n");
    pair_table(page, r);
    inputs_section(page, r);
    sinew__sb_printf(page,
                     "<h2>Manifest</h2>\n<details><summary>" SINEW_RUN_MANIFEST_FILE
                     " (%zu bytes)</summary><pre>",
                     r->manifest_len);
    sinew__sb_esc(page, r->manifest_text);
    sinew__sb_puts(page,
                   "</pre></details>\n<footer>sinew is a research tool, not a medical device: "
                   "its output must not be used for diagnosis or treatment.</footer>\n"
                   "</main>\n</body>\n</html>\n");
    return page->err;
}

int sinew_report_write(sinew_ctx *ctx, const char *html_path, const char *rundir,
                       const sinew_report_options *o)
{
    if (!ctx || !rundir || !html_path)
        return SINEW_EINVAL;
    sinew__report r;
    memset(&r, 0, sizeof r);
    r.ctx = ctx;
    r.rundir = rundir;
    if (o)
        r.o = *o;
    else
        sinew_report_options_default(&r.o);
    if (r.o.thumb_width < 32 || r.o.thumb_width > 1024 || r.o.max_thumb_pairs < 0 ||
        r.o.max_thumb_pairs > 100000 || isnan(r.o.flow_max) || isinf(r.o.flow_max))
        return sinew__fail(ctx, SINEW_EINVAL, "report: options out of range");
    sinew__sb_init(&r.warn, ctx);
    sinew__sbuf page;
    sinew__sb_init(&page, ctx);
    int st = sinew__report_load(&r);
    if (!st)
        st = build(&r, &page);
    if (!st && r.warn.err)
        st = r.warn.err;
    if (!st)
        st = sinew_write_file(ctx, html_path, page.p, page.n);
    sinew__sb_free(&page);
    sinew__sb_free(&r.warn);
    cJSON_Delete(r.root);
    sinew_ctx_dealloc(ctx, (void *)r.manifest_text);
    sinew__free(ctx, r.pairs);
    sinew__free(ctx, r.colour);
    return st;
}
