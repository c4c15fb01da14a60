/* SPDX-License-Identifier: MIT */
/* The --save guard of `sinew score` (tools/score_save.h). Paths are compared in
 * canonical form: the longest existing prefix resolved with realpath() (symbolic links,
 * "." and ".."), the rest (not yet created, so free of links) normalised by hand. Files
 * that exist are also compared by device and inode, which catches hard links. */
#define _XOPEN_SOURCE 700 /* realpath */
#include "tools/score_save.h"

#include <errno.h>
#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "tools/cli.h"

/* Canonical absolute form of p (malloc'd), or NULL when out of memory or too long. */
static char *canon_path(const char *p)
{
    size_t n = strlen(p);
    char *buf = malloc(n + 1), *res = malloc(PATH_MAX + n + 2);
    if (!buf || !res) {
        free(buf);
        free(res);
        return NULL;
    }
    memcpy(buf, p, n + 1);
    /* find the longest prefix that exists; `rest` is what follows it */
    const char *rest = p + n;
    for (;;) {
        if (*buf && realpath(buf, res))
            break;
        char *sl = strrchr(buf, '/');
        if (!sl || sl == buf) {
            if (sl == buf && realpath("/", res)) { /* "/nonexistent...": from the root */
                rest = p + 1;
                break;
            }
            if (!getcwd(res, PATH_MAX)) { /* relative and nothing exists: from here */
                free(buf);
                free(res);
                return NULL;
            }
            rest = p;
            break;
        }
        *sl = '\0';
        rest = p + (sl - buf) + 1;
    }
    free(buf);
    /* append the remaining components lexically */
    size_t len = strlen(res);
    while (*rest) {
        size_t c = strcspn(rest, "/");
        if (c == 2 && rest[0] == '.' && rest[1] == '.') {
            while (len > 1 && res[len - 1] != '/')
                len--;
            if (len > 1)
                len--; /* drop the slash too, but keep "/" itself */
            res[len] = '\0';
        } else if (c > 0 && !(c == 1 && rest[0] == '.')) {
            if (len > 1)
                res[len++] = '/';
            memcpy(res + len, rest, c);
            len += c;
            res[len] = '\0';
        }
        rest += c;
        while (*rest == '/')
            rest++;
    }
    return res;
}

/* a == b or a lies below b (both canonical). */
static int within(const char *a, const char *b)
{
    size_t nb = strlen(b);
    if (nb == 1 && b[0] == '/')
        return 1;
    return !strncmp(a, b, nb) && (a[nb] == '\0' || a[nb] == '/');
}

typedef struct {
    dev_t dev;
    ino_t ino;
} file_id;

static int cmp_id(const void *a, const void *b)
{
    const file_id *x = a, *y = b;
    if (x->dev != y->dev)
        return x->dev < y->dev ? -1 : 1;
    return x->ino < y->ino ? -1 : x->ino > y->ino;
}

static int cmp_str(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

#define INPUTS_PER_PAIR 6

int score_save_check(const char *cmd, const score_set *set, const char *save, const char *root,
                     int root_is_dir)
{
    int rc = CLI_OK;
    size_t cap = set->n * INPUTS_PER_PAIR, ns = 0, ni = 0;
    char **names = calloc(cap ? cap : 1, sizeof *names);
    file_id *ids = calloc(cap ? cap : 1, sizeof *ids);
    char *csave = canon_path(save), *croot = root_is_dir ? canon_path(root) : NULL;
    if (!names || !ids || !csave || (root_is_dir && !croot)) {
        rc = cli_error(cmd, "%s: out of memory or path too long", save);
        goto done;
    }
    if (root_is_dir && within(csave, croot)) {
        rc = cli_error(cmd,
                       "%s: the --save folder is inside the dataset folder %s (outputs never "
                       "go into an input)",
                       save, root);
        goto done;
    }
    for (size_t i = 0; i < set->n; i++) {
        const score_pair *p = &set->pairs[i];
        const char *in[INPUTS_PER_PAIR] = {p->frame0, p->frame1, p->gt,
                                           p->gt_noc, p->occ,    p->invalid};
        for (int k = 0; k < INPUTS_PER_PAIR; k++) {
            if (!in[k])
                continue;
            if (!(names[ns] = canon_path(in[k]))) {
                rc = cli_error(cmd, "%s: out of memory or path too long", in[k]);
                goto done;
            }
            ns++;
            struct stat st;
            if (stat(in[k], &st) == 0)
                ids[ni++] = (file_id){st.st_dev, st.st_ino};
        }
    }
    qsort(names, ns, sizeof *names, cmp_str);
    qsort(ids, ni, sizeof *ids, cmp_id);
    for (size_t i = 0; i < set->n && rc == CLI_OK; i++) {
        const score_pair *p = &set->pairs[i];
        size_t n = strlen(save) + strlen(p->id) + 6;
        char *out = malloc(n), *cout = NULL;
        if (out)
            snprintf(out, n, "%s/%s.flo", save, p->id);
        if (!out || !(cout = canon_path(out))) {
            rc = cli_error(cmd, "%s: out of memory or path too long", out ? out : save);
        } else if (!within(cout, csave) || !strcmp(cout, csave)) {
            rc = cli_error(cmd, "%s: outside the --save folder %s (pair '%s'); refused", out, save,
                           p->id);
        } else if (root_is_dir && within(cout, croot)) {
            rc = cli_error(cmd, "%s: inside the dataset folder %s; refused", out, root);
        } else {
            struct stat st;
            file_id key;
            int same = bsearch(&cout, names, ns, sizeof *names, cmp_str) != NULL;
            if (!same && stat(out, &st) == 0) {
                key = (file_id){st.st_dev, st.st_ino};
                same = bsearch(&key, ids, ni, sizeof *ids, cmp_id) != NULL;
            }
            if (same)
                rc = cli_error(cmd,
                               "%s: is an input of this scoring; --save never overwrites an "
                               "input",
                               out);
        }
        free(out);
        free(cout);
    }
done:
    for (size_t k = 0; k < ns; k++)
        free(names[k]);
    free(names);
    free(ids);
    free(csave);
    free(croot);
    return rc;
}
