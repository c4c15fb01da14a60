/* SPDX-License-Identifier: MIT */
/* Plain replay driver for a fuzz target: runs LLVMFuzzerTestOneInput on every file
 * named on the command line (folders are walked one level). Used by `make test` to
 * replay the checked-in corpus and every past crasher; prints one PASS: line per
 * folder so tests/run counts it. A crash or sanitizer report fails the run. */
#define _POSIX_C_SOURCE 200809L
#include <dirent.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "tests/fuzz/fuzz.h"

void fuzz_cleanup(void);

static int replay_file(const char *path)
{
    FILE *f = fopen(path, "rb");
    if (!f) {
        fprintf(stderr, "replay: %s: cannot open\n", path);
        return 1;
    }
    size_t cap = 1 << 16, n = 0;
    unsigned char *buf = malloc(cap);
    size_t got;
    while (buf && (got = fread(buf + n, 1, cap - n, f)) > 0) {
        n += got;
        if (n == cap) {
            unsigned char *nb = realloc(buf, cap * 2);
            if (!nb) {
                free(buf);
                buf = NULL;
                break;
            }
            buf = nb;
            cap *= 2;
        }
    }
    fclose(f);
    if (!buf)
        return 1;
    LLVMFuzzerTestOneInput(buf, n);
    free(buf);
    return 0;
}

static int cmp_str(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

int main(int argc, char **argv)
{
    int bad = 0;
    for (int i = 1; i < argc; i++) {
        struct stat st;
        if (stat(argv[i], &st) != 0)
            continue; /* absent folder (e.g. no crashers yet) */
        if (!S_ISDIR(st.st_mode)) {
            bad |= replay_file(argv[i]);
            continue;
        }
        DIR *d = opendir(argv[i]);
        if (!d)
            continue;
        char *names[4096];
        size_t count = 0;
        struct dirent *e;
        while ((e = readdir(d)) && count < 4096)
            if (e->d_name[0] != '.')
                names[count++] = strdup(e->d_name);
        closedir(d);
        qsort(names, count, sizeof names[0], cmp_str);
        for (size_t k = 0; k < count; k++) {
            char p[1024];
            snprintf(p, sizeof p, "%s/%s", argv[i], names[k]);
            bad |= replay_file(p);
            free(names[k]);
        }
        printf("%s: %s (%zu inputs)\n", bad ? "FAIL" : "PASS", argv[i], count);
    }
    fuzz_cleanup();
    return bad;
}
