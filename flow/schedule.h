/* SPDX-License-Identifier: MIT */
/* Pair schedules with stable output names, deterministic sharding, and colour/depth
 * association by timestamp with "timestamp filename" lists (flow/schedule.c). */
#ifndef SINEW_SCHEDULE_H
#define SINEW_SCHEDULE_H

#include <stddef.h>
#include <stdint.h>

#include "flow/core.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ---- pair schedules ------------------------------------------------------------
 * Frames are numbered 0..nframes-1 in sequence order. A pair (i, j) means flow from
 * frame i to frame j (forward) and from j to i (backward). */
typedef struct sinew_pair {
    int32_t i;
    int32_t j;
} sinew_pair;

typedef enum sinew_schedule_kind {
    SINEW_SCHEDULE_CONSECUTIVE = 0, /* (0,1) (1,2) ... (n-2,n-1) */
    SINEW_SCHEDULE_GAP,             /* (0,k) (1,k+1) ... : every frame to the k-th next */
    SINEW_SCHEDULE_KEYFRAME,        /* every `every`-th frame i to each of i+1..i+window */
    SINEW_SCHEDULE_LIST             /* explicit pairs, kept in the given order */
} sinew_schedule_kind;

typedef struct sinew_schedule {
    sinew_schedule_kind kind;
    int gap;                /* GAP: k >= 1 */
    int every;              /* KEYFRAME: keyframe spacing >= 1 (keyframes 0, every, 2*every...) */
    int window;             /* KEYFRAME: partners per keyframe >= 1 */
    const sinew_pair *list; /* LIST: borrowed */
    size_t list_len;
} sinew_schedule;

/* Limits checked before any allocation. Frame numbers in pair names have 6 digits. */
#define SINEW_RUN_MAX_FRAMES 1000000
#define SINEW_RUN_MAX_PAIRS 10000000

/* Expand a schedule for nframes frames into *pairs (allocated on ctx; free with
 * sinew_ctx_dealloc; NULL when *npairs is 0). Pairs whose partner falls past the
 * last frame are dropped. ECONFIG for a bad parameter, an empty LIST, a LIST pair out of range,
 * i == j, or a pair listed twice (it would share an output folder); ELIMIT beyond the
 * limits above. Order: increasing i then j, except LIST which keeps its order. */
int sinew_schedule_pairs(sinew_ctx *ctx, sinew_pair **pairs, size_t *npairs,
                         const sinew_schedule *s, size_t nframes);

/* Parse a schedule as `sinew run --schedule` takes it: "consecutive", "gap:K",
 * "keyframe:K:M" (every K-th frame to the next M frames) or "list:FILE". K and M are
 * decimal integers in 1..SINEW_RUN_MAX_FRAMES. FILE holds one pair "I J" per line
 * (frame numbers from 0, below SINEW_RUN_MAX_FRAMES; blank lines and lines starting
 * with '#' skipped). For a list the pairs are allocated on ctx into *list (free with
 * sinew_ctx_dealloc) and out->list points to them; otherwise *list is NULL. Returns
 * SINEW_EINVAL without a message for text of none of these forms (a usage error: no
 * file is read), the read error naming FILE, EFORMAT "FILE: line N: expected 'I J'
 * (frame numbers)", ECONFIG for a list of no pairs, or ELIMIT beyond
 * SINEW_RUN_MAX_PAIRS pairs. Ranges against the frame count are checked later by
 * sinew_schedule_pairs. */
int sinew_schedule_parse(sinew_ctx *ctx, sinew_schedule *out, sinew_pair **list, const char *text);

/* Stable output name of a pair: "%06d-%06d" of (i, j), e.g. "000012-000013". buf needs
 * at least SINEW_PAIR_NAME_MAX bytes. Returns buf. */
#define SINEW_PAIR_NAME_MAX 16
char *sinew_pair_name(char *buf, sinew_pair p);

/* Shard ownership: pair number `index` (position in the schedule, 0-based) belongs to
 * shard k of n exactly when index % n == k. Deterministic and independent of which
 * pairs are already done, so shards never write the same pair. */
static inline int sinew_shard_owns(size_t index, int k, int n)
{
    return n <= 1 || (int)(index % (size_t)n) == k;
}

/* ---- timestamp association -----------------------------------------------------
 * Match two stamp lists (seconds): a candidate is (a, b) with
 * |ta[a] - (tb[b] + offset)| < max_diff; candidates are taken greedily from the
 * smallest difference (ties: smaller a, then smaller b), each stamp used at most once.
 * This is the procedure of the association script published with the TUM RGB-D
 * benchmark (Sturm et al., IROS 2012): its defaults are max difference 0.02 s and
 * offset 0; the greedy smallest-difference-first rule is from memory of that script.
 * match[a] receives the index into tb, or -1 if a has no partner. Returns the number
 * of matches through *nmatched. ECONFIG if max_diff <= 0 or any stamp is not finite. */
int sinew_associate(sinew_ctx *ctx, int32_t *match, size_t *nmatched, const double *ta, size_t na,
                    const double *tb, size_t nb, double max_diff, double offset);

/* A "timestamp filename" list (rgb.txt / depth.txt style): one entry per line, '#'
 * lines and blank lines ignored, extra columns refused. Strings and arrays are
 * allocated on ctx; free with sinew_stamp_list_free. */
typedef struct sinew_stamp_list {
    size_t n;
    double *t;
    char **name;
} sinew_stamp_list;
int sinew_stamp_list_read(sinew_ctx *ctx, sinew_stamp_list *out, const char *path);
void sinew_stamp_list_free(sinew_ctx *ctx, sinew_stamp_list *l);

#ifdef __cplusplus
}
#endif

#endif
