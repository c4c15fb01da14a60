/* SPDX-License-Identifier: MIT */
/* OpenMP shims: the only place that tests _OPENMP. Kernels write
 *   SINEW_PARALLEL_FOR(nthreads)
 *   for (int y = 0; y < h; y++) ...
 * and stay correct (and bit-identical) when built without OpenMP. */
#ifndef SINEW_INTERNAL_PARALLEL_H
#define SINEW_INTERNAL_PARALLEL_H

#ifdef _OPENMP
#include <omp.h>
#define SINEW__PRAGMA(x) _Pragma(#x)
/* Static schedule over the following for loop; n = 0 means OpenMP default. */
#define SINEW_PARALLEL_FOR(n) SINEW__PRAGMA(omp parallel for schedule(static) num_threads(sinew__nthreads(n)))
/* Dynamic schedule in chunks of 4 iterations, for loops whose iterations cost very
 * different amounts (e.g. work only near motion boundaries). Only for loops whose
 * iterations are independent and write disjoint outputs, so results do not depend on
 * which thread ran which iteration. */
#define SINEW_PARALLEL_FOR_DYNAMIC(n) SINEW__PRAGMA(omp parallel for schedule(dynamic, 4) num_threads(sinew__nthreads(n)))
static inline int sinew__nthreads(int n)
{
    return n > 0 ? n : omp_get_max_threads();
}
static inline int sinew__thread_id(void)
{
    return omp_get_thread_num();
}
#else
#define SINEW_PARALLEL_FOR(n)
#define SINEW_PARALLEL_FOR_DYNAMIC(n)
static inline int sinew__nthreads(int n)
{
    (void)n;
    return 1;
}
static inline int sinew__thread_id(void)
{
    return 0;
}
#endif

#endif
