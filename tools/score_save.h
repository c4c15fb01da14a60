/* SPDX-License-Identifier: MIT */
/* Where `sinew score --save DIR` may write (tools/score_save.c): every estimate goes to
 * DIR/ID.flo, strictly inside DIR, never onto or inside an input of the scoring. */
#ifndef SINEW_SCORE_SAVE_H
#define SINEW_SCORE_SAVE_H

#include "tools/score_layout.h"

/* Check every output path DIR/ID.flo of the set before anything is estimated or written:
 *  - it must stay inside DIR once symbolic links and ".." are resolved (an id from a
 *    list file such as "../x" or a link inside DIR pointing elsewhere is refused);
 *  - it must not be, by path or by inode, any input of any pair (frames, ground truth,
 *    masks);
 *  - for a dataset folder (root_is_dir), it must not lie inside ROOT.
 * Prints one line naming the offending path and returns CLI_FAIL, else CLI_OK. */
int score_save_check(const char *cmd, const score_set *set, const char *save, const char *root,
                     int root_is_dir);

#endif
