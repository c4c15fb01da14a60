/* SPDX-License-Identifier: MIT */
/* Confidence-weighted 2-D matches and their lift to 3-D.
 *
 * sinew_matches_build turns a forward flow field (plus, optionally, the check stage's
 * mask and confidence, label images, and two depth maps with intrinsics) into a table:
 * one row per kept source pixel x, with the target x + w(x), a weight, and — when depth
 * is given — the 3-D points X0 (camera 0) and X1 (camera 1). Every pixel that is not
 * kept is counted under exactly one rejection reason (the first rule it fails, in the
 * order of sinew_reject). Output files: npy table + JSON sidecar, PLY, CSV (writers
 * below; formats in docs/formats.md "Matches"). */
#ifndef SINEW_MATCH_H
#define SINEW_MATCH_H

#include "flow/camera.h"
#include "flow/core.h"
#include "flow/depth.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Rejection reasons, in the order the rules are applied. */
typedef enum sinew_reject {
    SINEW_REJECT_FLOW_UNKNOWN = 0, /* flow is NaN/Inf at x */
    SINEW_REJECT_MASKED,           /* the check mask is non-zero at x */
    SINEW_REJECT_OUTSIDE,          /* x + w(x) outside [0, W-1] x [0, H-1] */
    SINEW_REJECT_LOW_WEIGHT,       /* confidence not finite or <= min_weight */
    SINEW_REJECT_LABEL_CHANGE,     /* label0 != label1 and drop_label_change is set */
    SINEW_REJECT_DEPTH0_INVALID,   /* no valid depth (or no float-sized 3-D point) at x */
    SINEW_REJECT_DEPTH0_EDGE,      /* depth discontinuity (or hole) near x */
    SINEW_REJECT_DEPTH1_HOLE,      /* a bilinear neighbour of x + w(x) has no depth (or no
                                      float-sized 3-D point there) */
    SINEW_REJECT_DEPTH1_STRADDLE,  /* the bilinear neighbours straddle a depth edge */
    SINEW_REJECT_DEPTH1_EDGE,      /* depth discontinuity (or hole) near x + w(x) */
    SINEW_REJECT_DISPLACEMENT,     /* |X1 - X0| above max_displacement */
    SINEW_REJECT_NORMAL,           /* normals requested but not computable at either end */
    SINEW_REJECT_SAMPLING,         /* passed every rule but not selected (stride / top-K) */
    SINEW_REJECT_COUNT
} sinew_reject;

/* Short snake_case name of a reason ("flow_unknown", ...), used as a JSON key; "?" if
 * out of range. Static storage. */
const char *sinew_reject_name(int reason);

typedef enum sinew_sampling {
    SINEW_SAMPLE_ALL = 0, /* every kept pixel */
    SINEW_SAMPLE_STRIDE,  /* kept pixels with x % stride == 0 and y % stride == 0 */
    SINEW_SAMPLE_TOP_K    /* the top_k highest weights, spread over a grid (see below) */
} sinew_sampling;

/* Settings; initialise with sinew_match_params_default. */
typedef struct sinew_match_params {
    sinew_sampling sampling;
    int stride;   /* STRIDE: grid step in pixels, >= 1 (default 4) */
    size_t top_k; /* TOP_K: number of matches wanted, >= 1 (default 10000) */
    /* TOP_K spreads matches: the image is cut into cell x cell squares; candidates are
     * ranked inside their cell by weight (ties: smaller raster index first); then all
     * rank-0 candidates come first (by weight, then index), then all rank-1, and so on;
     * the first top_k are kept. per_cell > 0 also caps the matches per cell. */
    int cell;              /* default 32 */
    int per_cell;          /* default 0 = no cap */
    double min_weight;     /* keep only weight > min_weight (default 0) */
    int drop_label_change; /* reject when label0 != label1 (default 0) */
    /* Lifting (ignored without depth maps). */
    double edge_rel;         /* relative depth jump (max - min) / min counted as an edge;
                                default 0.05 (common practice for Kinect-class sensors) */
    int edge_radius;         /* half-size in pixels of the window checked for edges at both
                                ends (0 = only the bilinear neighbours); default 1 */
    double max_displacement; /* metres; rows with |X1 - X0| above are rejected;
                                default +inf (off) */
    int normals;             /* add unit normals n0, n1 from depth gradients (default 0) */
} sinew_match_params;

void sinew_match_params_default(sinew_match_params *p);

/* Inputs. All images must have the flow's width and height. Names (file paths) are
 * used in messages and recorded in the sidecar; they may be NULL. */
typedef struct sinew_match_inputs {
    const sinew_image *flow;       /* required: SINEW_F32 2 channels, pixels, NaN = unknown */
    const sinew_image *mask;       /* optional: SINEW_U8 1 channel, 0 = kept (check stage) */
    const sinew_image *confidence; /* optional: SINEW_F32 1 channel in [0, 1]; weight = 1 if
                                      absent */
    const sinew_image *labels0;    /* optional: SINEW_U8/U16 1 channel ids at the source */
    const sinew_image *labels1;    /* optional (with labels0): ids at the target frame */
    const sinew_image *depth0;     /* optional: SINEW_F32 z in metres, NaN = invalid
                                      (sinew_depth_convert); with depth1 and camera */
    const sinew_image *depth1;
    const sinew_camera *camera; /* intrinsics fitted to the image size */
    const char *flow_name, *mask_name, *confidence_name, *labels0_name, *labels1_name, *depth0_name,
        *depth1_name;
} sinew_match_inputs;

#define SINEW_MATCH_MAX_COLUMNS 19

/* A match table. data is rows x cols float32, row-major, contiguous, rows in raster
 * order of the source pixel. Columns, in this order when present:
 *   u0 v0 u1 v1 weight                  always (pixels; weight in [0, 1])
 *   X0 Y0 Z0 X1 Y1 Z1                   with depth (metres; X0 in camera 0's frame, X1 in
 *                                       camera 1's frame; x right, y down, z forward)
 *   nx0 ny0 nz0 nx1 ny1 nz1             with normals (unit, facing the camera)
 *   label0 label1                       with label images
 * Owned by the caller: free with sinew_matches_free. */
typedef struct sinew_matches {
    size_t rows;
    int cols;
    float *data;
    const char *columns[SINEW_MATCH_MAX_COLUMNS]; /* static strings */
    int width, height;                            /* size of the flow field */
    int has_depth, has_normals, has_labels, has_mask, has_confidence;
    size_t pixels; /* width * height */
    size_t rejected[SINEW_REJECT_COUNT];
    size_t mask_bits[8]; /* pixels with each mask bit set (all pixels) */
    /* Label statistics (has_labels): for every label id seen at a kept source pixel,
     * the number of kept matches; sorted by id. */
    size_t label_count;
    uint32_t *label_ids;
    size_t *label_kept;
    size_t label_changed; /* kept matches with label0 != label1 */
} sinew_matches;

/* Build the match table. p = NULL uses the defaults. Returns SINEW_EINVAL (bad
 * arguments or parameters), SINEW_ESIZE (an input's size differs from the flow's; the
 * message names it), SINEW_EUNSUPPORTED (wrong image type/channels), SINEW_ENOMEM.
 * Threads: rows in parallel; the result is bit-identical for any thread count. */
int sinew_matches_build(sinew_ctx *ctx, sinew_matches *out, const sinew_match_inputs *in,
                        const sinew_match_params *p);

/* Release the table's buffers and zero the struct (NULL is fine). */
void sinew_matches_free(sinew_ctx *ctx, sinew_matches *m);

/* Column index of `name`, or -1. */
int sinew_matches_column(const sinew_matches *m, const char *name);

/* Provenance recorded in the sidecar. Every field may be NULL/NaN. */
typedef struct sinew_match_sources {
    const char *command; /* e.g. "sinew lift" */
    const char *check_dir;
    const char *intrinsics;          /* intrinsics file, or the value string */
    const sinew_camera *camera;      /* as used (fitted to the images) */
    const sinew_camera *camera_file; /* as loaded, before rescaling */
    const sinew_depth_params *depth;
    double depth_median[2]; /* median valid z of depth0/depth1, metres */
    int world; /* 1: X0, X1 (and normals) were mapped to world coordinates by the frames'
                  camera-to-world poses (sinew run --world-frame) */
} sinew_match_sources;

/* Write the table to `npy_path` (.npy, float32, rows x cols) and the JSON sidecar beside
 * it (the path with ".npy" replaced by ".json", or ".json" appended): columns, units,
 * intrinsics, depth convention, thresholds, input files, counts per rejection reason,
 * sinew version. Both files are written atomically; if the second cannot be written,
 * the first is not left behind. `in` supplies the input names (may be NULL). */
int sinew_matches_save(sinew_ctx *ctx, const char *npy_path, const sinew_matches *m,
                       const sinew_match_params *p, const sinew_match_inputs *in,
                       const sinew_match_sources *src);

/* The sidecar path for an npy path, into buf (returns SINEW_EINVAL if it does not fit). */
int sinew_matches_sidecar_path(const char *npy_path, char *buf, size_t n);
/* Read a sidecar's "columns" and give the column positions of u0, v0, u1, v1 and weight in
 * idx[0..4]; weight is -1 when absent, the other four are required. *ncols: when non-zero
 * the sidecar must name exactly that many columns; when zero it receives the sidecar's count
 * (so a table can be checked against it from its header before any data is read). EFORMAT
 * naming the file for a sidecar that does not fit. */
int sinew_matches_read_columns(sinew_ctx *ctx, int idx[5], size_t *ncols, const char *path);

/* PLY for a 3-D viewer (needs depth): 2 * rows vertices (x y z float, red green blue
 * uchar; source points X0 orange, target points X1 blue) and rows edges joining X0 to X1
 * (vertex1 vertex2 int). binary = 1 writes binary_little_endian, 0 ascii. Atomic. */
int sinew_matches_save_ply(sinew_ctx *ctx, const char *path, const sinew_matches *m, int binary);

/* CSV: a header line with the column names, then one line per row (%.9g, enough to
 * round-trip float32). Atomic. */
int sinew_matches_save_csv(sinew_ctx *ctx, const char *path, const sinew_matches *m);

/* ---- the check folder, as match and lift read it (needs flow/io.h) ---- */

#ifdef __cplusplus
}
#endif
#endif
