/* SPDX-License-Identifier: MIT */
/* sequence.json: the description of an RGB-D sequence (frames, depth maps, labels,
 * intrinsics, depth scale, ground-truth files). This module is the one place where its
 * schema is parsed and written; docs/formats.md documents it.
 *
 * Reading is strict: unknown keys, wrong types, missing required keys, non-finite or
 * out-of-range numbers are SINEW_ECONFIG (malformed JSON: SINEW_EFORMAT) with a message
 * "PATH: KEY: problem" naming the key, e.g. "seq.json: frames[3].depth: expected a
 * string". New keys are added here, together with a "version" bump when old readers
 * must refuse them. Paths inside the file are relative to the file's folder unless
 * absolute; sinew_sequence_resolve joins them. */
#ifndef SINEW_SEQUENCE_H
#define SINEW_SEQUENCE_H

#include "flow/core.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Highest schema version this build reads and the version it writes. */
#define SINEW_SEQUENCE_VERSION 1

/* Limits, checked before the entries are built (ELIMIT): frames and ground-truth pairs
 * in one sequence (the same frame limit as runs, SINEW_RUN_MAX_FRAMES). */
#define SINEW_SEQUENCE_MAX_FRAMES 1000000
#define SINEW_SEQUENCE_MAX_PAIRS 10000000

/* Settings for `sinew run` (key "run", all optional; docs/formats.md). The command line
 * overrides them. Strings are owned by the sequence; NULL means unset. */
typedef struct sinew_seq_run {
    int has_schedule;  /* "run.schedule" given */
    int schedule_kind; /* 0 consecutive, 1 gap, 2 keyframe, 3 list (sinew_schedule_kind) */
    int gap;           /* gap: the k of (i, i+k), >= 1 */
    int every, window; /* keyframe: every `every`-th frame to the next `window` frames */
    int *pairs;        /* list: n_pairs (from, to) frame numbers, 2 * n_pairs ints */
    size_t n_pairs;
    char *preset;      /* flow preset name */
    char *flow_format; /* "flo", "npy", "npy16", "pfm" or "png" */
    int has_match_stride;
    int match_stride; /* matches on a grid of this step; 0 = every kept pixel */
} sinew_seq_run;

/* One frame. Strings are owned by the sequence; NULL means absent. */
typedef struct sinew_seq_frame {
    char *color;      /* colour image (required) */
    char *depth;      /* depth image, integer codes (see depth_scale) */
    char *labels;     /* 8-bit label image */
    char *ignore;     /* ignore mask (8- or 16-bit image): pixels whose matches the user
                         rejects, e.g. instruments; polarity in ignore_polarity */
    double timestamp; /* seconds; NaN if absent */
    int has_pose;     /* nonzero if pose is given */
    double pose[12];  /* camera-to-world 3x4 row-major [R | t], metres */
    char *right;      /* stereo: the right camera's frame (colour is the left one) */
} sinew_seq_frame;

/* Ground truth for an ordered pair of frames (indices into frames[]). */
typedef struct sinew_seq_pair {
    int from, to;
    char *flow_forward;       /* flow from -> to on the grid of `from` (.flo) */
    char *flow_backward;      /* flow to -> from on the grid of `to` */
    char *occlusion_forward;  /* 8-bit PNG on the grid of `from`: nonzero = occluded */
    char *occlusion_backward; /* same on the grid of `to` */
    char *scene_flow;         /* .npy H x W x 3 float32, metres, from -> to */
} sinew_seq_pair;

/* A sequence description. Fields are public for reading; build one with the functions
 * below (which copy strings) or by setting the scalar fields directly. */
typedef struct sinew_sequence {
    int version;           /* SINEW_SEQUENCE_VERSION */
    char *name;            /* free text or NULL */
    int has_intrinsics;    /* nonzero if the next six fields are set */
    double fx, fy, cx, cy; /* pinhole intrinsics in pixels, pixel centres at integers */
    int width, height;     /* image size the intrinsics refer to */
    double depth_scale;    /* depth codes per metre (1000 = millimetres); 0 if unset */
    int depth_ray;         /* "depth_kind": 0 "z" (along the optical axis, default),
                              1 "ray" (distance from the camera centre) */
    int ignore_polarity;   /* "ignore_polarity": 0 absent, 1 "nonzero" (pixels != 0 are
                              ignored), 2 "zero" (the values of sinew_ignore_polarity,
                              flow/check.h); required when a frame has an ignore mask */
    sinew_seq_run run;     /* "run" settings */
    char *stereo_calib;    /* "stereo_calib": the left/right calibration (flow/stereo.h,
                              either form) of frames with "right"; NULL if absent */
    char **label_names;    /* label_names[v] names label value v; NULL if absent */
    size_t n_label_names;
    sinew_seq_frame *frames;
    size_t n_frames;
    sinew_seq_pair *pairs;
    size_t n_pairs;
    /* private */
    sinew_ctx *ctx_;
    char *dir_;
    size_t cap_frames_, cap_pairs_;
} sinew_sequence;

/* An empty sequence (version set, nothing else). The context must outlive it. Free
 * with sinew_sequence_free. */
int sinew_sequence_new(sinew_ctx *ctx, sinew_sequence **out);
void sinew_sequence_free(sinew_sequence *seq);

/* Setters and appenders deep-copy the strings they are given. */
int sinew_sequence_set_name(sinew_sequence *seq, const char *name);
int sinew_sequence_set_stereo_calib(sinew_sequence *seq, const char *path);
int sinew_sequence_set_label_names(sinew_sequence *seq, const char *const *names, size_t n);
int sinew_sequence_add_frame(sinew_sequence *seq, const sinew_seq_frame *frame);
int sinew_sequence_add_pair(sinew_sequence *seq, const sinew_seq_pair *pair);
/* A frame with every field absent (timestamp NaN), for filling in before add_frame. */
void sinew_sequence_frame_init(sinew_seq_frame *frame);

/* Parse JSON text (len bytes). `where` names the source in messages (a path). Relative
 * paths in the result resolve against the folder of `where`. */
int sinew_sequence_parse(sinew_ctx *ctx, sinew_sequence **out, const char *text, size_t len,
                         const char *where);
/* Read and parse a file (at most 256 MiB). */
int sinew_sequence_read(sinew_ctx *ctx, sinew_sequence **out, const char *path);
/* Check the same rules the reader enforces, then write atomically (pretty-printed JSON). */
int sinew_sequence_write(sinew_sequence *seq, const char *path);
/* Check the schema rules (ECONFIG with the key named in the message). */
int sinew_sequence_validate(sinew_sequence *seq, const char *where);

/* Resolve a path from the sequence against the folder of the file it was read from (or
 * "." for a built sequence). ELIMIT if buf (n bytes) is too small. */
int sinew_sequence_resolve(const sinew_sequence *seq, const char *rel, char *buf, size_t n);

#ifdef __cplusplus
}
#endif
#endif
