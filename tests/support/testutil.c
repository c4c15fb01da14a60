/* SPDX-License-Identifier: MIT */
#define _POSIX_C_SOURCE 200809L
#include "tests/support/testutil.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

char *tu_tmpdir(void)
{
    const char *base = getenv("TMPDIR");
    char tmpl[512];
    snprintf(tmpl, sizeof tmpl, "%s/sinew-test.XXXXXX", base && *base ? base : "/tmp");
    char *d = mkdtemp(tmpl);
    assert_non_null(d);
    return strdup(d);
}

void tu_rmtree(const char *dir)
{
    if (!dir)
        return;
    char cmd[1200];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
    if (system(cmd) != 0)
        fprintf(stderr, "warning: could not remove %s\n", dir);
}

char *tu_path(char *buf, size_t n, const char *dir, const char *name)
{
    snprintf(buf, n, "%s/%s", dir, name);
    return buf;
}

const char *tu_data_dir(void)
{
    const char *d = getenv("SINEW_DATA");
    if (!d || !*d)
        d = "../shared/data";
    struct stat st;
    if (stat(d, &st) != 0 || !S_ISDIR(st.st_mode))
        return NULL;
    return d;
}

const char *tu_data_file(char *buf, size_t n, const char *rel)
{
    const char *d = tu_data_dir();
    if (!d)
        return NULL;
    snprintf(buf, n, "%s/%s", d, rel);
    struct stat st;
    return stat(buf, &st) == 0 ? buf : NULL;
}

void tu_write_bytes(const char *path, const void *data, size_t n)
{
    FILE *f = fopen(path, "wb");
    assert_non_null(f);
    if (n)
        assert_int_equal(fwrite(data, 1, n, f), n);
    assert_int_equal(fclose(f), 0);
}

void tu_write_npy(const char *path, int major, const char *dict, const void *data, size_t n)
{
    size_t dl = strlen(dict), pre = major == 1 ? 10 : 12;
    size_t hl = dl + 1;
    hl += (64 - (pre + hl) % 64) % 64;
    assert_true(hl < 65536);
    unsigned char *out = malloc(pre + hl + n);
    assert_non_null(out);
    memcpy(out, "\x93NUMPY", 6);
    out[6] = (unsigned char)major;
    out[7] = 0;
    out[8] = (unsigned char)(hl & 0xff);
    out[9] = (unsigned char)(hl >> 8);
    if (major != 1)
        out[10] = out[11] = 0;
    memset(out + pre, ' ', hl);
    memcpy(out + pre, dict, dl);
    out[pre + hl - 1] = '\n';
    if (n)
        memcpy(out + pre + hl, data, n);
    tu_write_bytes(path, out, pre + hl + n);
    free(out);
}

int tu_file_exists(const char *path)
{
    struct stat st;
    return stat(path, &st) == 0;
}

const char *tu_python(void)
{
    const char *p = getenv("PYTHON");
    return p && *p ? p : "/usr/bin/python3";
}

void tu_near_check(double a, double b, double eps, const char *what, const char *file, int line)
{
    if (!(fabs(a - b) <= eps))
        fail_msg("%s:%d: %s = %.17g, expected %.17g (tolerance %g)", file, line, what, a, b, eps);
}

static void *fa_alloc(void *ud, size_t n)
{
    tu_failalloc *fa = ud;
    fa->calls++;
    if (fa->fail_at > 0 && fa->calls == fa->fail_at)
        return NULL;
    void *p = NULL;
    if (posix_memalign(&p, 64, n ? n : 1) != 0)
        return NULL;
    fa->live++;
    return p;
}

static void fa_free(void *ud, void *p)
{
    tu_failalloc *fa = ud;
    if (p) {
        fa->live--;
        free(p);
    }
}

sinew_ctx *tu_ctx_failing(tu_failalloc *fa)
{
    sinew_allocator a = {fa_alloc, fa_free, fa};
    return sinew_ctx_new_with(&a);
}

int tu_fixture_setup(void **state)
{
    tu_fixture *f = calloc(1, sizeof *f);
    if (!f)
        return -1;
    f->dir = tu_tmpdir();
    f->ctx = sinew_ctx_new();
    *state = f;
    return f->ctx ? 0 : -1;
}

int tu_fixture_teardown(void **state)
{
    tu_fixture *f = *state;
    tu_rmtree(f->dir);
    free(f->dir);
    sinew_ctx_free(f->ctx);
    free(f);
    return 0;
}

const char *tu_fixture_path(tu_fixture *f, const char *name)
{
    return tu_path(f->p, sizeof f->p, f->dir, name);
}

void tu_fail_each_allocation(const char *what, tu_alloc_op op, void *ud)
{
    for (long n = 2; n < 100000; n++) {
        tu_failalloc fa = {n, 0, 0};
        sinew_ctx *ctx = tu_ctx_failing(&fa);
        assert_non_null(ctx);
        int rc = op(ctx, ud);
        if (fa.live != 1)
            fail_msg("%s: allocation %ld failing left %ld blocks live", what, n, fa.live - 1);
        if (rc != SINEW_OK && rc != SINEW_ENOMEM)
            fail_msg("%s: allocation %ld failing gave status %d: %s", what, n, rc,
                     sinew_ctx_message(ctx));
        long calls = fa.calls;
        sinew_ctx_free(ctx);
        if (rc == SINEW_OK) {
            /* succeeding with no allocation after the context's own would make this a
             * check that cannot fail */
            if (n == 2 && calls < 2)
                fail_msg("%s: allocates nothing, so no failure was injected", what);
            return;
        }
    }
    fail_msg("%s: never succeeded", what);
}

static void damage_check(sinew_ctx *ctx, const char *scratch, int rc, const char *what, size_t at)
{
    if (rc == SINEW_OK)
        return;
    const char *m = sinew_ctx_message(ctx);
    if (!strstr(m, scratch) || strchr(m, '\n'))
        fail_msg("%s at %zu: status %d with message '%s'", what, at, rc, m);
}

void tu_damage_sweep(const char *valid, const char *scratch, tu_read_op read, int mutations)
{
    FILE *fp = fopen(valid, "rb");
    assert_non_null(fp);
    unsigned char *buf = malloc(1 << 20), *cp = malloc(1 << 20);
    assert_non_null(buf);
    assert_non_null(cp);
    size_t len = fread(buf, 1, 1 << 20, fp);
    fclose(fp);
    assert_true(len > 0 && len < (1 << 20));
    sinew_ctx *ctx = sinew_ctx_new();
    for (size_t cut = 0; cut < len; cut++) {
        remove(scratch); /* a fresh file: rewriting one in place can force a flush */
        tu_write_bytes(scratch, buf, cut);
        int rc = read(ctx, scratch);
        if (rc == SINEW_OK)
            fail_msg("%s: prefix of %zu of %zu bytes was accepted", valid, cut, len);
        damage_check(ctx, scratch, rc, "prefix", cut);
    }
    uint32_t seed = 12345u;
    for (int i = 0; i < mutations; i++) {
        memcpy(cp, buf, len);
        seed = seed * 1664525u + 1013904223u;
        int nbytes = 1 + (int)(seed >> 30);
        for (int k = 0; k < nbytes; k++) {
            seed = seed * 1664525u + 1013904223u;
            size_t at = (size_t)(seed >> 8) % len;
            seed = seed * 1664525u + 1013904223u;
            cp[at] = (unsigned char)(seed >> 24);
        }
        remove(scratch);
        tu_write_bytes(scratch, cp, len);
        damage_check(ctx, scratch, read(ctx, scratch), "mutation", (size_t)i);
    }
    sinew_ctx_free(ctx);
    free(buf);
    free(cp);
}
