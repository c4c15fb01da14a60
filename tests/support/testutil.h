/* SPDX-License-Identifier: MIT */
/* Shared test helpers: cmocka includes, temporary folders, data-folder lookup,
 * a failing allocator for fault injection. */
#ifndef SINEW_TESTUTIL_H
#define SINEW_TESTUTIL_H

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include "flow/sinew.h"

/* Make a fresh temporary folder (removed by tu_rmtree); returns a static-lifetime copy
 * owned by the caller (free()). */
char *tu_tmpdir(void);
void tu_rmtree(const char *dir);
/* Join into a caller buffer: dir + "/" + name. Returns buf. */
char *tu_path(char *buf, size_t n, const char *dir, const char *name);
/* Published-data folder: $SINEW_DATA or ../shared/data; NULL if absent (test must skip()). */
const char *tu_data_dir(void);
/* Path of a file in the data folder; NULL if the data folder or the file is missing. */
const char *tu_data_file(char *buf, size_t n, const char *rel);
/* Write raw bytes to a file (test fixtures). */
void tu_write_bytes(const char *path, const void *data, size_t n);
int tu_file_exists(const char *path);
/* Python with numpy (Debian python3-numpy): $PYTHON or /usr/bin/python3. */
const char *tu_python(void);

/* Double-precision closeness check (cmocka's float assertion rounds to float): fails
 * the test with both values and the expression text when |a - b| > eps or either is
 * NaN. */
#define assert_near(a, b, eps) tu_near_check((a), (b), (eps), #a, __FILE__, __LINE__)
void tu_near_check(double a, double b, double eps, const char *what, const char *file, int line);

/* A context whose allocator fails the Nth allocation (1-based; 0 = never) and counts
 * live blocks so tests can check for leaks after a failure. */
typedef struct tu_failalloc {
    long fail_at;
    long calls;
    long live;
} tu_failalloc;
sinew_ctx *tu_ctx_failing(tu_failalloc *fa);

#endif
