/* SPDX-License-Identifier: MIT */
/* Pictures a person can read: flow in the colour-wheel coding of Baker et al.
 * (IJCV 2011), arrow glyphs, scalar heatmaps (forward-backward error, confidence,
 * endpoint error) with a colour bar, rejection-reason overlays, and match segments
 * across two frames side by side. Every picture is an owned SINEW_U8 3-channel (RGB)
 * image the caller frees with sinew_image_free. Drawing is deterministic: the same
 * inputs give the same bytes for any thread count. See docs/formats.md "Pictures". */
#ifndef SINEW_DRAW_H
#define SINEW_DRAW_H

#include <stddef.h>
#include <stdint.h>

#include "flow/core.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ---- colour wheel (Baker et al., IJCV 92(1), 2011; Middlebury colour code) ----
 * 55 hues in six segments of lengths RY 15, YG 6, GC 4, CB 11, BM 13, MR 6. */
#define SINEW_WHEEL_COLOURS 55

/* Entry k (0..54) of the wheel, RGB bytes. Returns SINEW_EINVAL for k out of range. */
int sinew_draw_wheel_entry(int k, uint8_t rgb[3]);

/* Colour of a flow vector already divided by the maximum magnitude (fx, fy; radius 1 =
 * the maximum). Hue from atan2(-fy, -fx)/pi interpolated between wheel entries;
 * radius <= 1 fades to white at zero motion, radius > 1 is darkened to 0.75. Non-finite
 * input gives black (unknown). Pure function, thread-safe. */
void sinew_draw_wheel_colour(double fx, double fy, uint8_t rgb[3]);

/* Largest |(u, v)| over known pixels (both components finite) of a SINEW_F32
 * 2-channel flow; 0 if no pixel is known. SINEW_EINVAL for a wrong image type. */
int sinew_draw_max_magnitude(sinew_ctx *ctx, double *max_mag, const sinew_image *flow);

/* ---- scalar colour map ("dusk", our own) ----
 * Perceptually ordered: CIE L* rises monotonically from a dark slate blue (t = 0)
 * through teal and muted ochre to a pale cream (t = 1). Control points are listed in
 * docs/formats.md. t is clamped to [0, 1]; NaN gives the "no value" colour. */
void sinew_draw_colourmap(double t, uint8_t rgb[3]);
/* Colour drawn for pixels with no value (NaN) in heatmaps: a dark checker of these two. */
#define SINEW_DRAW_NOVALUE_A 40
#define SINEW_DRAW_NOVALUE_B 56

/* ---- rejection reasons (mask bits, see flow/check.h) ---- */
#define SINEW_DRAW_REASONS 8
/* Overlay colour and legend name of mask bit `bit` (0..SINEW_DRAW_REASONS-1): the name
 * of sinew_check_bit_name in upper case, '_' shown as a space. SINEW_EINVAL otherwise.
 * name may be NULL; *name is static storage. */
int sinew_draw_reason_style(int bit, uint8_t rgb[3], const char **name);
/* Blend of a reason colour c over the dimmed frame value f, per channel (integer
 * division): (7 * c + 3 * f + 5) / 10, i.e. 70 % reason colour. */

/* ---- pictures ----
 * `out` receives a newly allocated RGB U8 image (zeroed struct on failure). `legend`
 * nonzero appends a legend strip below the picture (colour bar, wheel or swatches with
 * labels in the built-in font); the picture itself always occupies rows 0..h-1 and
 * columns 0..w-1 at the input's size. Frames (where taken) are SINEW_U8 or SINEW_U16
 * with 1..4 channels; they are shown as dimmed gray so the drawing stands out. */

/* Flow (SINEW_F32, 2 channels) in wheel colours, each vector divided by max_mag;
 * max_mag <= 0 uses the field's own maximum (1 if that is 0). Unknown = black.
 * Legend: a small wheel and the maximum magnitude in pixels. */
int sinew_draw_flow(sinew_ctx *ctx, sinew_image *out, const sinew_image *flow, double max_mag,
                    int legend);

/* The legend wheel alone: a size x size disc (size >= 16) of the colour coding from
 * radius 0 to 1, on the dark background; the outer pixels beyond radius 1 show the
 * darkened out-of-range colours in a thin ring. */
int sinew_draw_wheel(sinew_ctx *ctx, sinew_image *out, int size);

/* Arrows on a grid over the frame: one arrow every `step` pixels (>= 2) starting at
 * step/2, from the pixel centre to centre + scale * flow (scale > 0), coloured by the
 * direction on the wheel. Unknown vectors are skipped; vectors shorter than 0.5 px after
 * scaling are drawn as a single dot. frame may be NULL (dark background), otherwise it
 * must have the flow's width and height (SINEW_ESIZE). */
int sinew_draw_arrows(sinew_ctx *ctx, sinew_image *out, const sinew_image *frame,
                      const sinew_image *flow, int step, double scale, int legend);

/* Heatmap of a SINEW_F32 1-channel map: value lo -> colour map 0, hi -> 1, clamped;
 * NaN -> the "no value" checker. hi <= lo picks lo = 0 and hi = the largest finite
 * value (1 if none is positive). `label` (may be NULL) titles the colour bar; the
 * built-in font has upper-case letters, digits and . , - + / % ( ) : = < > _ #. */
int sinew_draw_heatmap(sinew_ctx *ctx, sinew_image *out, const sinew_image *map, double lo,
                       double hi, const char *label, int legend);

/* Endpoint-error heatmap of flow against ground truth gt (both SINEW_F32 2-channel,
 * same size, else SINEW_ESIZE): |flow - gt| per pixel, NaN where either is unknown,
 * drawn from 0 to max_epe (<= 0: automatic as in sinew_draw_heatmap). */
int sinew_draw_epe(sinew_ctx *ctx, sinew_image *out, const sinew_image *flow, const sinew_image *gt,
                   double max_epe, int legend);

/* Rejection reasons over the frame: mask is SINEW_U8 1-channel (bits as in
 * flow/check.h). A pixel with reasons takes the colour of its
 * lowest set bit blended over the dimmed frame as described above.
 * frame may be NULL (black); otherwise its size must match the mask. */
int sinew_draw_reasons(sinew_ctx *ctx, sinew_image *out, const sinew_image *frame,
                       const sinew_image *mask, int legend);

/* A match table: `rows` x `cols` float32, row-major, with the column index of each
 * coordinate (pixels, frame 0 and frame 1). weight < 0 when there is no weight column. */
typedef struct sinew_match_table {
    const float *data;
    size_t rows;
    size_t cols;
    int u0, v0, u1, v1;
    int weight;
} sinew_match_table;

/* Frames side by side (frame0 at x = 0, frame1 at x = w0 + SINEW_DRAW_GUTTER; height
 * max(h0, h1)), with up to `count` matches (>= 1) drawn as segments from (u0, v0) on
 * the left to (u1, v1) on the right, coloured by their displacement direction on the
 * wheel, ends marked with dots. The sample is evenly spaced over the rows:
 * row floor(j * rows / count) for j = 0..count-1 (all rows when rows <= count).
 * Rows with a non-finite coordinate or weight <= 0 are skipped. The legend names the
 * count drawn. */
#define SINEW_DRAW_GUTTER 6
int sinew_draw_matches(sinew_ctx *ctx, sinew_image *out, const sinew_image *frame0,
                       const sinew_image *frame1, const sinew_match_table *table, size_t count,
                       int legend);

/* The dimmed gray a frame pixel is shown as: g = (77 R + 150 G + 29 B + 128) >> 8 on
 * 8-bit values (gray frames: g = value; 16-bit frames use value / 257 rounded down),
 * then 20 + (140 g + 127) / 255. */

/* ---- primitives on RGB U8 images (clipped to the image; no allocation) ----
 * Images of any other type or channel count are left untouched. */
/* A 1-pixel line between pixel centres (x0, y0) and (x1, y1) (Bresenham on rounded
 * ends). Non-finite coordinates draw nothing. */
void sinew_draw_line(sinew_image *img, double x0, double y0, double x1, double y1,
                     const uint8_t rgb[3]);
/* A line with an open head at (x1, y1): two strokes of length min(0.35 * length, 6)
 * at +-28 degrees from the reversed direction. */
void sinew_draw_line_arrow(sinew_image *img, double x0, double y0, double x1, double y1,
                           const uint8_t rgb[3]);
/* Text in the built-in 5x7 font scaled by `scale` (>= 1), top-left at (x, y); each
 * character cell is 6*scale wide and 8*scale tall. Lower-case letters draw as
 * upper-case; characters without a glyph draw as a small box. Returns the width drawn. */
int sinew_draw_text(sinew_image *img, int x, int y, int scale, const char *text,
                    const uint8_t rgb[3]);
/* Width in pixels that sinew_draw_text would use. */
int sinew_draw_text_width(const char *text, int scale);

#ifdef __cplusplus
}
#endif
#endif
