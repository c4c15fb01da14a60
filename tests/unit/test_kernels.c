/* SPDX-License-Identifier: MIT */
/* Unit tests for the estimator's private planar kernels (flow/internal/flowimpl.h):
 * the comparator-network median filters against a plain sort of each window, on
 * random planes of awkward sizes (narrower than one lane block, one column, one row,
 * widths just past a block), with ties, and for several thread counts. */
#include "tests/support/testutil.h"

#include <stdlib.h>
#include <string.h>

#include "flow/internal/flowimpl.h"

static int cmp_float(const void *a, const void *b)
{
    float x = *(const float *)a, y = *(const float *)b;
    return (x > y) - (x < y);
}

/* Reference: median of the clamped (2r+1)^2 window by qsort. */
static float ref_median(const float *src, int w, int h, int x, int y, int r)
{
    float buf[25];
    int n = 0;
    for (int dy = -r; dy <= r; dy++)
        for (int dx = -r; dx <= r; dx++) {
            int xx = x + dx < 0 ? 0 : (x + dx >= w ? w - 1 : x + dx);
            int yy = y + dy < 0 ? 0 : (y + dy >= h ? h - 1 : y + dy);
            buf[n++] = src[(size_t)yy * (size_t)w + (size_t)xx];
        }
    qsort(buf, (size_t)n, sizeof buf[0], cmp_float);
    return buf[n / 2];
}

static void check_median(int w, int h, int r, int levels_of_value, unsigned seed, int nt)
{
    size_t n = (size_t)w * (size_t)h;
    float *src = malloc(n * sizeof *src), *dst = malloc(n * sizeof *dst);
    assert_non_null(src);
    assert_non_null(dst);
    srand(seed);
    for (size_t i = 0; i < n; i++)
        src[i] = levels_of_value ? (float)(rand() % levels_of_value)
                                 : (float)rand() / (float)RAND_MAX * 20.f - 10.f;
    sinew__median(dst, src, w, h, r, nt);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            float want = ref_median(src, w, h, x, y, r);
            float got = dst[(size_t)y * (size_t)w + (size_t)x];
            if (got != want)
                fail_msg("median r=%d %dx%d at (%d,%d): %g, want %g", r, w, h, x, y,
                         (double)got, (double)want);
        }
    free(src);
    free(dst);
}

static void test_kernels_median_matches_sort(void **state)
{
    (void)state;
    static const int sizes[][2] = {{1, 1}, {1, 7}, {9, 1}, {5, 5},    {63, 4},
                                   {64, 3}, {65, 6}, {130, 5}, {200, 33}};
    for (int r = 1; r <= 2; r++)
        for (size_t s = 0; s < sizeof sizes / sizeof sizes[0]; s++) {
            check_median(sizes[s][0], sizes[s][1], r, 0, 17u + (unsigned)s, 1);
            check_median(sizes[s][0], sizes[s][1], r, 3, 99u + (unsigned)s, 2); /* ties */
        }
}

static void test_kernels_median_threads_identical(void **state)
{
    (void)state;
    int w = 157, h = 41;
    size_t n = (size_t)w * (size_t)h;
    float *src = malloc(n * sizeof *src), *a = malloc(n * sizeof *a), *b = malloc(n * sizeof *b);
    assert_non_null(src);
    assert_non_null(a);
    assert_non_null(b);
    srand(5);
    for (size_t i = 0; i < n; i++)
        src[i] = (float)rand() / (float)RAND_MAX;
    for (int r = 1; r <= 2; r++) {
        sinew__median(a, src, w, h, r, 1);
        sinew__median(b, src, w, h, r, 4);
        assert_memory_equal(a, b, n * sizeof *a);
    }
    free(src);
    free(a);
    free(b);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_kernels_median_matches_sort),
        cmocka_unit_test(test_kernels_median_threads_identical),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
