/* SPDX-License-Identifier: MIT */
/* The run report's plots: one metric over the pair index as an inline SVG figure
 * (grid, axis labels, polylines through runs of known values, points with the pair
 * name as a tooltip while there are at most 120). */
#include <math.h>
#include <stdio.h>

#include "flow/internal/report.h"

void sinew__report_plot(sinew__sbuf *b, const sinew__report *r, int k)
{
    const double W = 640, H = 190, ml = 52, mr = 14, mt = 14, mb = 30;
    const double pw = W - ml - mr, ph = H - mt - mb;
    size_t n = r->npairs, nf = 0;
    double hi = 0;
    for (size_t i = 0; i < n; i++)
        if (isfinite(r->pairs[i].m[k])) {
            nf++;
            if (r->pairs[i].m[k] > hi)
                hi = r->pairs[i].m[k];
        }
    if (!nf)
        return;
    double top = sinew__report_metrics[k].unit_range ? 1.0 : (hi > 0 ? hi * 1.1 : 1.0);
    sinew__sb_printf(b, "<figure class=\"plot\"><figcaption>%s%s%s</figcaption>\n",
                     sinew__report_metrics[k].title, *sinew__report_metrics[k].unit ? ", " : "",
                     sinew__report_metrics[k].unit);
    sinew__sb_printf(b,
                     "<svg viewBox=\"0 0 %.0f %.0f\" role=\"img\" aria-label=\"%s per pair\" "
                     "xmlns=\"http://www.w3.org/2000/svg\">\n",
                     W, H, sinew__report_metrics[k].title);
    for (int g = 0; g <= 2; g++) {
        double v = top * g / 2.0, y = mt + ph * (1 - g / 2.0);
        sinew__sb_printf(
            b,
            "<line class=\"grid\" x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\"/>"
            "<text class=\"ax\" x=\"%.1f\" y=\"%.1f\" text-anchor=\"end\">%.3g</text>\n",
            ml, y, W - mr, y, ml - 6, y + 4, v);
    }
    sinew__sb_printf(
        b,
        "<text class=\"ax\" x=\"%.1f\" y=\"%.1f\">0</text>"
        "<text class=\"ax\" x=\"%.1f\" y=\"%.1f\" text-anchor=\"end\">%zu</text>"
        "<text class=\"ax\" x=\"%.1f\" y=\"%.1f\" text-anchor=\"middle\">pair index</text>\n",
        ml, H - 10, W - mr, H - 10, n ? n - 1 : 0, ml + pw / 2, H - 10);
    /* polylines through runs of known values */
    int open = 0;
    for (size_t i = 0; i < n; i++) {
        double v = r->pairs[i].m[k];
        if (!isfinite(v)) {
            if (open)
                sinew__sb_puts(b, "\"/>\n");
            open = 0;
            continue;
        }
        double x = ml + (n > 1 ? pw * (double)i / (double)(n - 1) : pw / 2);
        double y = mt + ph * (1 - fmin(fmax(v / top, 0), 1));
        if (!open)
            sinew__sb_puts(b, "<polyline class=\"line\" points=\"");
        sinew__sb_printf(b, "%s%.1f,%.1f", open ? " " : "", x, y);
        open = 1;
    }
    if (open)
        sinew__sb_puts(b, "\"/>\n");
    if (nf <= 120)
        for (size_t i = 0; i < n; i++) {
            double v = r->pairs[i].m[k];
            if (!isfinite(v))
                continue;
            double x = ml + (n > 1 ? pw * (double)i / (double)(n - 1) : pw / 2);
            double y = mt + ph * (1 - fmin(fmax(v / top, 0), 1));
            sinew__sb_printf(b, "<circle class=\"pt\" cx=\"%.1f\" cy=\"%.1f\" r=\"2.6\"><title>", x,
                             y);
            sinew__sb_esc(b, r->pairs[i].name ? r->pairs[i].name : "?");
            sinew__sb_printf(b, ": %.4g</title></circle>\n", v);
        }
    sinew__sb_puts(b, "</svg></figure>\n");
}
