/* SPDX-License-Identifier: MIT */
/* Paths and folders for the library's file-writing modules: joining paths, mkdir -p,
 * sorted folder listings. Every failure is recorded in the context naming the path. */
#define _XOPEN_SOURCE 700 /* realpath */
#include <dirent.h>
#include <limits.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "flow/internal/base.h"
#include "flow/internal/fs.h"

int sinew__path_join(sinew_ctx *ctx, char *buf, size_t n, const char *a, const char *b)
{
    int w = snprintf(buf, n, "%s/%s", a, b);
    if (w < 0 || (size_t)w >= n)
        return sinew__fail(ctx, SINEW_ELIMIT, "%s/%s: path too long", a, b);
    return SINEW_OK;
}

int sinew__mkdirs(sinew_ctx *ctx, const char *path)
{
    char buf[SINEW__PATH_MAX];
    size_t n = strlen(path);
    if (n == 0 || n >= sizeof buf)
        return sinew__fail(ctx, SINEW_ELIMIT, "%s: path too long", path);
    memcpy(buf, path, n + 1);
    for (size_t i = 1; i <= n; i++) {
        if (buf[i] != '/' && buf[i] != '\0')
            continue;
        char c = buf[i];
        buf[i] = '\0';
        if (mkdir(buf, 0777) != 0 && errno != EEXIST)
            return sinew__fail(ctx, SINEW_EIO, "%s: cannot create folder: %s", buf,
                               strerror(errno));
        buf[i] = c;
    }
    struct stat st;
    if (stat(path, &st) != 0 || !S_ISDIR(st.st_mode))
        return sinew__fail(ctx, SINEW_EIO, "%s: not a folder", path);
    return SINEW_OK;
}

static int cmp_str(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

char *sinew__dup_join(sinew_ctx *ctx, const char *a, const char *b)
{
    size_t na = strlen(a), nb = strlen(b);
    char *s = sinew__alloc(ctx, na + nb + 2);
    if (!s)
        return NULL;
    memcpy(s, a, na);
    s[na] = '/';
    memcpy(s + na + 1, b, nb + 1);
    return s;
}

void sinew__free_names(sinew_ctx *ctx, char **names, size_t n)
{
    for (size_t i = 0; names && i < n; i++)
        sinew__free(ctx, names[i]);
    sinew__free(ctx, names);
}

int sinew__list_dir(sinew_ctx *ctx, const char *dir, int (*keep)(const char *name), int join,
                    size_t max, char ***out, size_t *n)
{
    *out = NULL;
    *n = 0;
    DIR *d = opendir(dir);
    if (!d)
        return sinew__fail(ctx, SINEW_EIO, "%s: cannot open folder: %s", dir, strerror(errno));
    char **names = NULL;
    size_t cap = 0, k = 0;
    struct dirent *e;
    int rc = SINEW_OK;
    while (!rc && (e = readdir(d)) != NULL) {
        if (!keep(e->d_name))
            continue;
        if (k == max) {
            rc = sinew__fail(ctx, SINEW_ELIMIT, "%s: more than %zu files", dir, max);
            break;
        }
        if (k == cap) {
            size_t nc = cap ? cap * 2 : 16;
            char **g = sinew__calloc(ctx, nc, sizeof *g);
            if (!g) {
                rc = SINEW_ENOMEM;
                break;
            }
            if (names)
                memcpy(g, names, k * sizeof *g);
            sinew__free(ctx, names);
            names = g;
            cap = nc;
        }
        names[k] = join ? sinew__dup_join(ctx, dir, e->d_name) : sinew__strdup(ctx, e->d_name);
        if (!names[k])
            rc = SINEW_ENOMEM;
        else
            k++;
    }
    closedir(d);
    if (rc) {
        sinew__free_names(ctx, names, k);
        return rc;
    }
    if (k > 1)
        qsort(names, k, sizeof *names, cmp_str);
    *out = names;
    *n = k;
    return SINEW_OK;
}

int sinew__refuse_link(sinew_ctx *ctx, const char *path)
{
    struct stat st;
    if (lstat(path, &st) == 0 && S_ISLNK(st.st_mode))
        return sinew__fail(ctx, SINEW_ECONFIG,
                           "%s: is a symbolic link; sinew never writes or deletes through links",
                           path);
    return SINEW_OK;
}

int sinew__path_inside(const char *path, const char *dir)
{
    char a[PATH_MAX], b[PATH_MAX];
    if (!realpath(path, a) || !realpath(dir, b))
        return 0;
    size_t nb = strlen(b);
    return !strncmp(a, b, nb) && (a[nb] == '\0' || a[nb] == '/' || (nb == 1 && b[0] == '/'));
}
