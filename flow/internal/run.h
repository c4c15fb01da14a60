/* SPDX-License-Identifier: MIT */
/* Private declarations shared by the run engine files (run.c, manifest.c, runpipe.c,
 * runseq.c): pair inputs, keys and records. Paths and folders are in fs.h, JSON files in
 * json.h. */
#ifndef SINEW_INTERNAL_RUN_H
#define SINEW_INTERNAL_RUN_H

#include <stddef.h>
#include <stdint.h>

#include <cJSON.h>

#include "flow/internal/fs.h"
#include "flow/internal/json.h"
#include "flow/internal/schedule.h"
#include "flow/run.h"

#define SINEW__MAX_INPUTS 10

/* Apply a run's tuning over stage parameters (flow/runopts.c): only the set keys
 * change; top-k switches the sampling to SINEW_SAMPLE_TOP_K. */
struct sinew_check_params;
struct sinew_match_params;
struct sinew_depth_params;
void sinew__run_tuning_check(const sinew_run_tuning *t, struct sinew_check_params *p);
void sinew__run_tuning_match(const sinew_run_tuning *t, struct sinew_match_params *p);
void sinew__run_tuning_depth(const sinew_run_tuning *t, struct sinew_depth_params *p);

/* One hashed input of a pair: role ("color0", "depth1", "intrinsics", ...), path
 * (borrowed), digest and size. */
typedef struct sinew__input {
    char role[16];
    const char *path;
    unsigned char digest[32];
    uint64_t bytes;
} sinew__input;

const sinew_run_spec *sinew__run_spec(const sinew_run *run);
sinew_ctx *sinew__run_ctx(const sinew_run *run);
/* OUTDIR/pairs/NAME of pair `index`. */
int sinew__run_pair_dir(sinew_run *run, size_t index, char *buf, size_t n);
/* Hash the inputs of pair `index` (cached per frame file); fwd/bwd receive imported
 * flow paths when the spec imports flows. */
int sinew__run_pair_inputs(sinew_run *run, size_t index, sinew__input *in, size_t *nin, char *fwd,
                           char *bwd, size_t pathn);
/* The pair key (hex) from the inputs. */
void sinew__run_pair_key(const sinew_run *run, size_t index, const sinew__input *in, size_t nin,
                         char hex[65]);
/* SINEW_PAIR_SKIPPED when dir/done.json carries `key` (and, with verify, every listed
 * output has its recorded size and digest), otherwise SINEW_PAIR_PENDING. When record
 * is non-NULL and the pair is complete, *record receives the parsed done record. */
int sinew__run_record_status(sinew_run *run, const char *dir, const char *key, int verify,
                             cJSON **record);

/* runtruth.c: when seq (may be NULL) has ground truth for the pair, add "truth" (EPE
 * all/noc/occ, occlusion precision/recall/F1 of the mask's occluded and outside bits,
 * 3-D error of m's lifted matches against the scene flow) and the top-level "epe" and
 * "occlusion_f1" to stats; a truth file that cannot be read becomes a line in warnings.
 * Only ENOMEM fails. */
struct sinew_matches;
/* Camera poses in a run (flow/runpose.c). The pose check of a lifted match table
 * against the frames' camera-to-world poses into stats "pose_check" (nothing when the
 * table is not lifted or too small); ENOMEM is the only failure. */
int sinew__run_pose_check(sinew_ctx *ctx, cJSON *stats, const struct sinew_matches *m,
                          const double pose0[12], const double pose1[12]);
/* Map a lifted table's points and normals to world coordinates (X0 by pose0, X1 by
 * pose1). */
void sinew__run_to_world(struct sinew_matches *m, const double pose0[12], const double pose1[12]);

int sinew__run_truth_scores(sinew_ctx *ctx, const sinew_sequence *seq, sinew_pair pair,
                            const sinew_image *fwd, const sinew_image *mask,
                            const struct sinew_matches *m, cJSON *stats, cJSON *warnings);

#endif
