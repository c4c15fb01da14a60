/* SPDX-License-Identifier: MIT */
/* Private: forward-warp visibility maps used by the occlusion rule of flow/check.c
 * (formulas and citations: docs/methods.md, "Occlusion"). */
#ifndef SINEW_INTERNAL_OCCLUSION_H
#define SINEW_INTERNAL_OCCLUSION_H

#include "flow/core.h"

/* Density of the forward splat of a flow field: every pixel x with a known vector f(x)
 * adds the four bilinear weights of its target x + f(x) to the grid cells around it
 * (cells outside the grid are dropped). out: w*h floats, row-major, overwritten. For
 * the backward flow this is the range map of frame 0: ~1 where a frame-0 pixel is seen
 * in frame 1, ~0 where no frame-1 pixel lands (occluded in frame 1). Serial: the sum
 * order is fixed, so the result is bit-identical for any thread count. */
void sinew__splat_density(const sinew_image *flow, float *out);

/* Z-buffer of the forward splat: every pixel x with known f(x) and finite z(x) > 0
 * writes z(x) into the (up to four) grid cells touched by the bilinear footprint of
 * x + f(x), keeping the minimum. out: w*h floats, +inf where nothing lands. depth:
 * SINEW_F32 1 channel of the flow's size. Serial (min is order-independent anyway). */
void sinew__splat_zmin(const sinew_image *flow, const sinew_image *depth, float *out);

#endif
