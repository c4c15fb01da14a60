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
/* Write an .npy file by hand from the published layout (NumPy format documentation,
 * NEP 1): magic, version `major` (1: 2-byte header length, 2: 4-byte), the header text
 * `dict` padded with spaces and '\n' so the data starts at a multiple of 64, then n bytes
 * of data. Malformed dicts are allowed on purpose (reader tests). */
void tu_write_npy(const char *path, int major, const char *dict, const void *data, size_t n);
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

/* Per-test fixture: a fresh temporary folder and a default context. Use
 * tu_fixture_setup/tu_fixture_teardown as cmocka setup/teardown; *state is a tu_fixture. */
typedef struct tu_fixture {
    char *dir;
    sinew_ctx *ctx;
    char p[700];
} tu_fixture;
int tu_fixture_setup(void **state);
int tu_fixture_teardown(void **state);
/* dir + "/" + name in the fixture's own buffer (valid until the next call). */
const char *tu_fixture_path(tu_fixture *f, const char *name);

/* Allocation-failure sweep: run op on a fresh failing context with the Nth allocation
 * failing, for N = 2, 3, ... (1 is the context itself) until op succeeds. Each failing
 * run must return SINEW_ENOMEM and leave only the context allocated (no leak); op must
 * free whatever it produced. Fails the test otherwise. */
typedef int (*tu_alloc_op)(sinew_ctx *ctx, void *ud);
void tu_fail_each_allocation(const char *what, tu_alloc_op op, void *ud);

/* Damage sweep for a reader: given a valid file, write every strict prefix of it to
 * `scratch` and check the reader refuses each one (non-zero status, a one-line message
 * naming `scratch`), then `mutations` copies with 1-4 bytes overwritten (fixed seed) and
 * check the reader either succeeds or fails with such a message. Under the sanitizer
 * build this catches out-of-bounds reads and leaks on malformed input. read must free
 * what it produced. */
typedef int (*tu_read_op)(sinew_ctx *ctx, const char *path);
void tu_damage_sweep(const char *valid, const char *scratch, tu_read_op read, int mutations);

#endif
