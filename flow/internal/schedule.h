/* SPDX-License-Identifier: MIT */
/* Private declarations of flow/schedule.c shared with the folder scan (runseq.c). */
#ifndef SINEW_INTERNAL_SCHEDULE_H
#define SINEW_INTERNAL_SCHEDULE_H

#include <stddef.h>

/* A time stamp and its position in its list; sinew__stamp_cmp orders by time, then
 * position (qsort comparator; flow/schedule.c). */
typedef struct sinew__stamp {
    double t;
    size_t idx;
} sinew__stamp;
int sinew__stamp_cmp(const void *x, const void *y);

#endif
