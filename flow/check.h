/* SPDX-License-Identifier: MIT */
/* Forward-backward consistency, occlusion and reliability masks, and per-pixel
 * confidence for a pair of flow fields (frame 0 -> frame 1 and frame 1 -> frame 0).
 * Formulas, constants and citations: docs/methods.md, section "Consistency, occlusion
 * and confidence"; file layouts: docs/formats.md. */
#ifndef SINEW_CHECK_H
#define SINEW_CHECK_H

#include "flow/core.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Mask bits: a pixel is kept iff its mask value is 0; otherwise each set bit is one
 * reason to reject it (several may be set).
 *   OCCLUDED   forward-backward inconsistent and not visible in frame 1 (the occlusion
 *              rule: nothing of frame 1 lands on it, or it loses the competition for
 *              its target; docs/methods.md, "Occlusion")
 *   OUTSIDE    target x + w(x) outside frame 1's area [-0.5, W-0.5) x [-0.5, H-0.5)
 *   BOUNDARY   motion boundary (flow gradient too large)
 *   PHOTO      photometric residual too large
 *   IGNORE     inside the user's ignore mask
 *   SATURATED  clipped near-white source or target pixel
 *   UNKNOWN    forward flow at x, or backward flow at the target, unknown (NaN/Inf)
 *   MISMATCH   forward-backward inconsistent but visible in frame 1 (a flow error)
 * Every forward-backward inconsistent pixel has exactly one of OCCLUDED and MISMATCH. */
#define SINEW_MASK_OCCLUDED (1u << 0)
#define SINEW_MASK_OUTSIDE (1u << 1)
#define SINEW_MASK_BOUNDARY (1u << 2)
#define SINEW_MASK_PHOTO (1u << 3)
#define SINEW_MASK_IGNORE (1u << 4)
#define SINEW_MASK_SATURATED (1u << 5)
#define SINEW_MASK_UNKNOWN (1u << 6)
#define SINEW_MASK_MISMATCH (1u << 7)
#define SINEW_MASK_NBITS 8
/* Forward-backward inconsistent, occluded or not. */
#define SINEW_MASK_FB_ANY (SINEW_MASK_OCCLUDED | SINEW_MASK_MISMATCH)
/* Bits that mean "occluded or leaves the view": the occlusion estimate. */
#define SINEW_MASK_OCCLUSION (SINEW_MASK_OCCLUDED | SINEW_MASK_OUTSIDE)

/* Which pixels of the user's ignore mask are ignored. There is no default: a caller
 * that passes an ignore mask must say which polarity it uses. */
typedef enum sinew_ignore_polarity {
    SINEW_IGNORE_UNSET = 0,   /* invalid when an ignore mask is given */
    SINEW_IGNORE_NONZERO = 1, /* pixels whose first channel is nonzero are ignored */
    SINEW_IGNORE_ZERO = 2     /* pixels whose first channel is zero are ignored */
} sinew_ignore_polarity;

/* Parameters; sinew_check_params_default fills the documented defaults. All values
 * must be finite and >= 0 (EINVAL otherwise). Flow in px, intensities normalised to
 * [0, 1] (8-bit value / 255, 16-bit value / 65535). */
typedef struct sinew_check_params {
    /* Forward-backward test (Sundaram, Brox, Keutzer, ECCV 2010): inconsistent if
     * |w + ŵ|² > fb_alpha (|w|² + |ŵ|²) + fb_beta.  Defaults 0.01 and 0.5 px². */
    double fb_alpha, fb_beta;
    /* Motion boundary (form of the same paper): |∇u|² + |∇v|² > boundary_alpha |w|² +
     * boundary_beta. Defaults 0.01 and 0.125 = fb_beta / 4: a step the forward-backward
     * test can see (0.71 px across the two-pixel span of the central difference), so the
     * test does not depend on the image size (docs/methods.md). */
    double boundary_alpha, boundary_beta;
    /* Occlusion rule for forward-backward inconsistent pixels (docs/methods.md): occluded
     * if the range map (backward-flow splat density) at x is below occ_range (default
     * 0.5), or x loses its target: without depth, the forward-splat density at x + w(x)
     * exceeds occ_crowd (default 1.5); with depth, a surface nearer than
     * z(x) / (1 + occ_depth_tolerance) lands there (default 0.05). */
    double occ_range, occ_crowd, occ_depth_tolerance;
    /* Photometric residual after a robust global gain/offset fit: rejected if
     * |I1(x + w) - (g I0(x) + o)| > photo_threshold. Default 0.1. */
    double photo_threshold;
    /* Saturated: every colour channel >= saturation_level (fraction of full scale), at
     * x in frame 0 or at the nearest pixel to x + w in frame 1. Default 0.98
     * (8-bit values 250..255). Values > 1 disable the test. */
    double saturation_level;
    /* Half-width of the square window of the structure tensor (px). Default 2 (5x5). */
    int texture_radius;
    /* Polarity of the ignore mask; must be set when an ignore mask is given. */
    sinew_ignore_polarity ignore_polarity;
    /* Confidence: an estimate of P(EPE <= 1 px), the chance that the forward vector at x
     * is within 1 px of the truth, from a logistic calibration of the cues below
     * (docs/methods.md, "Confidence"; constants fitted by tools/fit_confidence):
     *   c = 1 / (1 + exp(-z)),  z = conf_bias - sum_i conf_k_<cue> f_<cue>,
     * with the cues (features), each >= 0 and larger = less reliable:
     *   fb       log(1 + e / sqrt(conf_fb_alpha (|w|² + |ŵ|²) + conf_fb_beta))  (0 if OUTSIDE)
     *   photo    r / conf_photo_scale, r the photometric residual (0 w/o frames or OUTSIDE)
     *   texture  τ / (λmin + τ), τ = conf_texture_scale, λmin the smallest structure-tensor
     *            eigenvalue of frame 0 ((intensity/px)²; 0 without frames)
     *   boundary exp(-d / conf_boundary_scale), d the distance (px) to the nearest
     *            motion-boundary pixel (0 without any)
     *   motion   log(1 + |w|) (|w| in px)
     *   outside  1 if the target leaves frame 1, else 0
     *   saturated 1 if SATURATED, else 0
     *   fb_local the mean of the fb cue over the 7x7 window around x (clipped at the
     *            border), a pixel whose target leaves frame 1 counting as the largest
     *            possible FB error log(1 + D / sqrt(conf_fb_beta)), D the image diagonal
     *            (px); IGNORE and UNKNOWN pixels left out; 0 if none is left
     *   fb_share the share of the image's pixels that are forward-backward inconsistent
     *            (OCCLUDED or MISMATCH), the same for every pixel of the pair: how well
     *            the flow held on this pair as a whole
     * Every conf_k_* must be >= 0, so the confidence never rises with a cue (monotone);
     * conf_bias may have any sign. c = 0 for IGNORE and UNKNOWN pixels (no vector to
     * trust). */
    double conf_fb_alpha, conf_fb_beta;
    double conf_photo_scale, conf_texture_scale, conf_boundary_scale;
    double conf_bias;
    double conf_k_fb, conf_k_photo, conf_k_texture, conf_k_boundary, conf_k_motion, conf_k_outside,
        conf_k_saturated, conf_k_fb_local, conf_k_fb_share;
} sinew_check_params;

/* Fill *p with the defaults listed above. */
void sinew_check_params_default(sinew_check_params *p);

/* Every numeric parameter as a (name, value) pair, e.g. for logs and JSON: the field
 * names above, texture_radius as a double, ignore_polarity left out. */
typedef struct sinew_check_param {
    const char *name; /* static storage */
    double value;
} sinew_check_param;
#define SINEW_CHECK_NPARAMS 25
/* Copy min(max, SINEW_CHECK_NPARAMS) pairs into out (may be NULL when max is 0); returns
 * SINEW_CHECK_NPARAMS. */
size_t sinew_check_params_list(const sinew_check_params *p, sinew_check_param *out, size_t max);

/* Inputs. forward and backward: SINEW_F32 2-channel flow fields of equal size, NaN =
 * unknown. frame0/frame1: optional (both or neither), SINEW_U8 or SINEW_U16 with 1..4
 * channels (alpha ignored; colour converted to luma 0.299 R + 0.587 G + 0.114 B), same
 * width and height as the flow. ignore: optional SINEW_U8 or SINEW_U16 image of the
 * same width and height; only its first channel is read. All borrowed. */
typedef struct sinew_check_input {
    const sinew_image *forward;
    const sinew_image *backward;
    const sinew_image *frame0;
    const sinew_image *frame1;
    const sinew_image *ignore;
    /* optional: SINEW_F32 1 channel depth z of frame 0 (any unit, larger = farther, NaN
     * or <= 0 = invalid), same size; decides who loses a target (z-buffer). Borrowed. */
    const sinew_image *depth0;
} sinew_check_input;

/* Counts and fitted values of one run. */
typedef struct sinew_check_stats {
    int64_t pixels;                   /* width * height */
    int64_t kept;                     /* mask == 0 */
    int64_t reason[SINEW_MASK_NBITS]; /* pixels with bit i set */
    double gain, offset;              /* photometric fit I1 ≈ gain I0 + offset (1, 0
                                         without frames) */
    int64_t fit_pixels;               /* pixels used by the final fit (0 w/o frames) */
} sinew_check_stats;

/* Number of confidence cues (features), in the order listed above. */
#define SINEW_CHECK_NFEATURES 9

/* Outputs, allocated by the caller with the flow's width and height; each may be NULL
 * (then it is computed in scratch memory and dropped):
 *   fb_error:   SINEW_F32 1 channel, |w(x) + ŵ(x + w(x))| in px; NaN when the target
 *               is outside frame 1 or a flow value involved is unknown.
 *   mask:       SINEW_U8 1 channel, bits SINEW_MASK_*.
 *   confidence: SINEW_F32 1 channel in [0, 1] (never NaN).
 *   features:   w * h * SINEW_CHECK_NFEATURES floats, pixel-major (row y, column x,
 *               then cue): the confidence cues f_<cue> above; NaN for IGNORE and UNKNOWN
 *               pixels. For refitting the calibration (tools/fit_confidence). */
typedef struct sinew_check_output {
    sinew_image *fb_error;
    sinew_image *mask;
    sinew_image *confidence;
    sinew_check_stats stats; /* filled on success */
    float *features;
} sinew_check_output;

/* Run the check. p = NULL uses the defaults. Returns SINEW_OK; EINVAL (NULL flow, bad
 * types or parameters, ignore mask without polarity), ESIZE (sizes disagree; the
 * message names both sizes), ENOMEM. Deterministic: bit-identical outputs for every
 * thread count of ctx. Outputs are undefined on failure. */
int sinew_check_run(sinew_ctx *ctx, sinew_check_output *out, const sinew_check_input *in,
                    const sinew_check_params *p);

/* Name of confidence cue i (0..SINEW_CHECK_NFEATURES-1), e.g. "fb"; NULL otherwise. */
const char *sinew_check_feature_name(int i);

/* Short name of mask bit i (0..SINEW_MASK_NBITS-1), e.g. "occluded"; NULL
 * otherwise. Static storage. */
const char *sinew_check_bit_name(int bit);

/* ---- the check folder on disk (docs/formats.md "Check output"; flow/check_io.c) ---- */

/* Read DIR/mask.png (8-bit gray, 0 = kept) into *mask and DIR/confidence.npy (H x W
 * float in [0, 1]) into *confidence. The two paths are written to mask_path /
 * confidence_path (buffers of path_size bytes) for messages and provenance. Errors name
 * the file: EIO (missing), EFORMAT, ESIZE (sizes differ), EVALUE (confidence NaN or
 * outside [0, 1]). On failure both images are freed. */
int sinew_check_folder_read(sinew_ctx *ctx, sinew_image *mask, sinew_image *confidence,
                            char *mask_path, char *confidence_path, size_t path_size,
                            const char *dir);

/* Write the folder DIR (created if missing; its parent must exist): fb_error.npy,
 * mask.png, confidence.npy, confidence.png (16-bit, 65535 = 1), then check.json from
 * json_text (last, so its presence marks a complete set). Each file is atomic. ESIZE
 * when the images differ in size, EIO naming DIR when it cannot be created or is not a
 * folder; the writers' errors otherwise. */
int sinew_check_folder_write(sinew_ctx *ctx, const char *dir, const sinew_image *fb_error,
                             const sinew_image *mask, const sinew_image *confidence,
                             const char *json_text);

#ifdef __cplusplus
}
#endif
#endif
