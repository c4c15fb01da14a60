/* SPDX-License-Identifier: MIT */
/* The run report: one self-contained static HTML page for a run folder (summary,
 * warnings, per-pair plots as inline SVG, per-pair thumbnails inlined as base64 PNG
 * data URIs, inputs, options and the manifest itself). No scripts, no network, no
 * external files: the page can be mailed or archived. The input a report reads is
 * documented in docs/formats.md ("Report input"); every field except the pair list is
 * optional, and missing pair files give a placeholder and a warning, not a failure. */
#ifndef SINEW_REPORT_H
#define SINEW_REPORT_H

#include <stddef.h>

#include "flow/core.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct sinew_report_options {
    int thumb_width;     /* thumbnail width in pixels, 32..1024 (default 240) */
    int max_thumb_pairs; /* pairs shown with pictures, evenly spaced over the run, 0..100000
                            (default 40); the others appear in the table and plots only */
    double flow_max;     /* wheel radius (px) for the flow thumbnails; <= 0: the largest
                            stats.flow_max of the run when every done pair has one, else
                            the largest known magnitude over the pictured pairs (default 0) */
    const char *title;   /* page title; NULL: "sinew run report" */
} sinew_report_options;

/* Fill *o with the defaults above. */
void sinew_report_options_default(sinew_report_options *o);

/* Read RUNDIR/manifest.json and the pair folders RUNDIR/pairs/NAME/ and write the page
 * to html_path atomically (o may be NULL for defaults). Output is deterministic (no
 * clock, no host names). Errors: EIO/EFORMAT naming manifest.json when it is missing,
 * not JSON or has no "pairs" array; EINVAL for bad options; EIO for the output;
 * EINTERRUPTED when the context's stop flag is set (checked per pair). */
int sinew_report_write(sinew_ctx *ctx, const char *html_path, const char *rundir,
                       const sinew_report_options *o);

#ifdef __cplusplus
}
#endif
#endif
