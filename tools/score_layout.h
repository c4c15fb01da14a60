/* SPDX-License-Identifier: MIT */
/* Dataset folder readers for `sinew score --layout`: turn a published dataset's
 * training folder (or a plain list file) into a sorted list of pairs with their ground
 * truth and the dataset's own validity / occlusion files. */
#ifndef SINEW_SCORE_LAYOUT_H
#define SINEW_SCORE_LAYOUT_H

#include <stddef.h>

/* One image pair. Strings are malloc'd; optional ones are NULL when absent. */
typedef struct score_pair {
    char *id;      /* e.g. "Dimetrodon", "alley_1/frame_0001", "000000_10", "00001" */
    char *frame0;  /* first frame */
    char *frame1;  /* second frame */
    char *gt;      /* ground-truth flow (unknown pixels per the format's rule) */
    char *gt_noc;  /* KITTI: flow_noc file; occluded = known in gt but not here */
    char *occ;     /* Sintel: occlusion mask (nonzero = occluded) */
    char *invalid; /* Sintel: invalid mask (nonzero = not evaluated) */
} score_pair;

typedef struct score_set {
    score_pair *pairs;
    size_t n, cap;
} score_set;

/* Names accepted by --layout, "|"-separated, for help and errors. */
extern const char score_layout_names[];

/* Fill *out with the pairs of `root` in layout `layout` ("middlebury", "sintel",
 * "kitti", "chairs", "list"), sorted by id (list: in file order). `pass` is the Sintel pass
 * ("clean" or "final"). On failure prints one line (naming the folder or file) and returns
 * CLI_FAIL, or CLI_USAGE for an unknown layout; *out is then empty. */
int score_layout_list(const char *cmd, const char *layout, const char *root, const char *pass,
                      score_set *out);
void score_set_free(score_set *s);

/* Find DIR/ID.EXT for the "|"-separated extensions `exts` in order (e.g.
 * "flo|png|pfm|npy"), first that exists. Returns a malloc'd path or NULL (then *tried, if
 * not NULL, receives "DIR/ID.{flo,png,...}", malloc'd). */
char *score_find_file(const char *dir, const char *id, const char *exts, char **tried);

/* Create the folders leading to `path` (not the last component), like mkdir -p of its
 * parent. Returns 0 or -1 with errno set. */
int score_make_parents(const char *path);

/* malloc'd printf; NULL on allocation failure. */
char *score_printf(const char *fmt, ...) __attribute__((format(printf, 1, 2)));

#endif
