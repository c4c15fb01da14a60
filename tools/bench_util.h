/* SPDX-License-Identifier: MIT */
/* Helpers shared by the benchmark programs (tools/bench_*.c): a monotonic clock, a
 * comparison for qsort of doubles (medians), and a fatal error that prints the
 * context's message. Header-only: each benchmark is one translation unit. */
#ifndef SINEW_BENCH_UTIL_H
#define SINEW_BENCH_UTIL_H

#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#include "flow/sinew.h"

static inline double bench_now(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

static inline int bench_cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Print "PROG: WHAT: message" and exit 1. */
static inline void bench_die(const char *prog, sinew_ctx *ctx, const char *what)
{
    fprintf(stderr, "%s: %s: %s\n", prog, what, ctx ? sinew_ctx_message(ctx) : "");
    exit(1);
}

#endif
