/* SPDX-License-Identifier: MIT */
/* Private to the run report: what report_data.c reads from a run folder (the manifest,
 * per-pair metrics and files) and what report_pictures.c, report_plot.c and report.c
 * draw from it. */
#ifndef SINEW_INTERNAL_REPORT_H
#define SINEW_INTERNAL_REPORT_H

#include <stddef.h>

#include <cJSON.h>

#include "flow/internal/strbuf.h"
#include "flow/report.h"

/* Per-pair metrics shown in plots, cards and the table (report_data.c). */
enum { SINEW__M_KEPT, SINEW__M_CONF, SINEW__M_FB, SINEW__M_EPE, SINEW__M_F1, SINEW__M_COUNT };
typedef struct sinew__report_metric {
    const char *key, *title, *unit;
    int unit_range; /* values in [0, 1] */
} sinew__report_metric;
extern const sinew__report_metric sinew__report_metrics[SINEW__M_COUNT];

typedef struct sinew__report_pair {
    const char *name; /* borrowed from the cJSON tree */
    int fi, fj;       /* frame numbers or -1 */
    const char *status, *error;
    const cJSON *stats;
    double m[SINEW__M_COUNT];
    int safe; /* name usable as a folder name */
} sinew__report_pair;

typedef struct sinew__report {
    sinew_ctx *ctx;
    const char *rundir;
    sinew_report_options o;
    cJSON *root;
    const char *manifest_text;
    size_t manifest_len;
    sinew__report_pair *pairs;
    size_t npairs;
    const char **colour; /* frame number -> colour input path (borrowed), may be NULL */
    size_t ncolour;
    sinew__sbuf warn;
    size_t nwarn;
} sinew__report;

/* ---- report_data.c ---- */
/* Read RUNDIR/manifest.json into r (pairs, their stats metrics, colour inputs). */
int sinew__report_load(sinew__report *r);
/* Fill metrics the stats did not give from the pair's files. ENOMEM only. */
int sinew__report_derive_metrics(sinew__report *r, sinew__report_pair *q);
/* One warning line (pair may be NULL; detail may be NULL or empty). */
void sinew__report_warn(sinew__report *r, const char *pair, const char *what, const char *detail);
/* RUNDIR/pairs/NAME/file into buf: 1, or 0 for an unsafe name or a path too long. */
int sinew__report_pair_path(const sinew__report *r, const sinew__report_pair *q, const char *file,
                            char *buf, size_t n);
int sinew__report_exists(const char *path);
/* The pair's forward flow file (any flow extension) into buf: 1 if found. */
int sinew__report_find_flow(const sinew__report *r, const sinew__report_pair *q, char *buf,
                            size_t n);
/* Read an image (npy: a .npy file) and check its channels and type (EFORMAT). */
int sinew__report_read_checked(sinew_ctx *ctx, sinew_image *img, const char *path, int npy,
                               int channels, sinew_type type);

/* ---- report_pictures.c ---- */
/* One pair's strip of thumbnails (frame, flow, confidence, reasons) into b. */
int sinew__report_pictures(sinew__report *r, sinew__sbuf *b, const sinew__report_pair *q,
                           double fmax);
/* The legend above the pictures: wheel, confidence bar, reason colours. */
void sinew__report_legend(sinew__sbuf *b, const sinew__report *r, double fmax);

/* ---- report_plot.c ---- */
/* Metric k over the pair index as an inline SVG figure (nothing if no pair has it). */
void sinew__report_plot(sinew__sbuf *b, const sinew__report *r, int k);

#endif
