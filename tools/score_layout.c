/* SPDX-License-Identifier: MIT */
/* Dataset folder readers for `sinew score --layout`.
 *
 * Each reader lists the ground-truth files of a training folder in sorted order (byte
 * order of the names, so the result does not depend on the locale or the file system)
 * and derives the frame and mask paths by the dataset's naming rule:
 *   middlebury  other-gt-flow/SEQ/flow10.flo + other-data[-gray]/SEQ/frame1{0,1}.png,
 *               or the flat SEQ/{frame10.png, frame11.png, flow10.flo}
 *   sintel      flow/SCENE/frame_NNNN.flo, PASS/SCENE/frame_NNNN.png and NNNN+1,
 *               occlusions/SCENE/frame_NNNN.png, invalid/SCENE/frame_NNNN.png
 *   kitti       flow_occ/NNNNNN_10.png (else flow_noc), image_2/ or colored_0/
 *               NNNNNN_10.png and _11.png; flow_noc gives the occluded split
 *   chairs      NNNNN_flow.flo + NNNNN_img1.ppm, NNNNN_img2.ppm, or
 *               NNNNNNN-gt.flo + NNNNNNN-img0.ppm, NNNNNNN-img1.ppm
 *   list        a text file of "frame1 frame2 gt" lines (# comments), paths relative to
 *               the list file's folder; the id is the gt path without its extension. */
#define _POSIX_C_SOURCE 200809L
#include "tools/score_layout.h"

#include <dirent.h>
#include <errno.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "tools/cli.h"

const char score_layout_names[] = "middlebury|sintel|kitti|chairs|list";

char *score_printf(const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    int n = vsnprintf(NULL, 0, fmt, ap);
    va_end(ap);
    if (n < 0)
        return NULL;
    char *s = malloc((size_t)n + 1);
    if (!s)
        return NULL;
    va_start(ap, fmt);
    vsnprintf(s, (size_t)n + 1, fmt, ap);
    va_end(ap);
    return s;
}

/* malloc'd "a/b"; NULL on allocation failure. */
static char *score_join(const char *a, const char *b)
{
    return score_printf("%s/%s", a, b);
}

static int is_dir(const char *p)
{
    struct stat st;
    return p && stat(p, &st) == 0 && S_ISDIR(st.st_mode);
}

static int is_file(const char *p)
{
    struct stat st;
    return p && stat(p, &st) == 0 && S_ISREG(st.st_mode);
}

/* ---- sorted directory listing ---- */

typedef struct {
    char **v;
    size_t n;
} names;

static void names_free(names *l)
{
    for (size_t i = 0; i < l->n; i++)
        free(l->v[i]);
    free(l->v);
    l->v = NULL;
    l->n = 0;
}

static int cmp_str(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

/* Entries of `dir` (no dot files), sorted. want_dirs: 1 = folders only, 0 = files only. */
static int list_dir(const char *cmd, const char *dir, int want_dirs, names *out)
{
    out->v = NULL;
    out->n = 0;
    DIR *d = opendir(dir);
    if (!d)
        return cli_error(cmd, "%s: cannot open folder: %s", dir, strerror(errno));
    size_t cap = 0;
    struct dirent *e;
    int rc = CLI_OK;
    while ((e = readdir(d)) != NULL) {
        if (e->d_name[0] == '.')
            continue;
        char *full = score_join(dir, e->d_name);
        if (!full) {
            rc = cli_error(cmd, "out of memory");
            break;
        }
        int ok = want_dirs ? is_dir(full) : is_file(full);
        free(full);
        if (!ok)
            continue;
        if (out->n == cap) {
            cap = cap ? 2 * cap : 64;
            char **nv = realloc(out->v, cap * sizeof *nv);
            if (!nv) {
                rc = cli_error(cmd, "out of memory");
                break;
            }
            out->v = nv;
        }
        if (!(out->v[out->n] = strdup(e->d_name))) {
            rc = cli_error(cmd, "out of memory");
            break;
        }
        out->n++;
    }
    closedir(d);
    if (rc != CLI_OK) {
        names_free(out);
        return rc;
    }
    if (out->n)
        qsort(out->v, out->n, sizeof *out->v, cmp_str);
    return CLI_OK;
}

/* ---- pair set ---- */

static void pair_free(score_pair *p)
{
    free(p->id);
    free(p->frame0);
    free(p->frame1);
    free(p->gt);
    free(p->gt_noc);
    free(p->occ);
    free(p->invalid);
    memset(p, 0, sizeof *p);
}

void score_set_free(score_set *s)
{
    if (!s)
        return;
    for (size_t i = 0; i < s->n; i++)
        pair_free(&s->pairs[i]);
    free(s->pairs);
    memset(s, 0, sizeof *s);
}

/* Take ownership of p's strings (all freed on failure). */
static int set_push(const char *cmd, score_set *s, score_pair *p)
{
    if (!p->id || !p->gt || !p->frame0 || !p->frame1) {
        pair_free(p);
        return cli_error(cmd, "out of memory");
    }
    if (s->n >= (size_t)SINEW_RUN_MAX_PAIRS) { /* the same limit as a run's pairs */
        pair_free(p);
        return cli_error(cmd, "more than %d pairs to score", SINEW_RUN_MAX_PAIRS);
    }
    if (s->n == s->cap) {
        size_t cap = s->cap ? 2 * s->cap : 32;
        score_pair *np = realloc(s->pairs, cap * sizeof *np);
        if (!np) {
            pair_free(p);
            return cli_error(cmd, "out of memory");
        }
        s->pairs = np;
        s->cap = cap;
    }
    s->pairs[s->n++] = *p;
    return CLI_OK;
}

/* ---- Middlebury ---- */

static int list_middlebury(const char *cmd, const char *root, score_set *out)
{
    char *gtdir = score_join(root, "other-gt-flow");
    if (!gtdir)
        return cli_error(cmd, "out of memory");
    int official = is_dir(gtdir);
    char *datadir = NULL;
    if (official) {
        const char *cands[] = {"other-data", "other-data-gray"};
        for (int i = 0; i < 2 && !datadir; i++) {
            char *d = score_join(root, cands[i]);
            if (is_dir(d))
                datadir = d;
            else
                free(d);
        }
        if (!datadir) {
            free(gtdir);
            return cli_error(cmd,
                             "%s: has other-gt-flow/ but neither other-data/ nor "
                             "other-data-gray/",
                             root);
        }
    } else {
        free(gtdir);
        gtdir = strdup(root);
        datadir = strdup(root);
        if (!gtdir || !datadir) {
            free(gtdir);
            free(datadir);
            return cli_error(cmd, "out of memory");
        }
    }
    names seqs;
    int rc = list_dir(cmd, gtdir, 1, &seqs);
    for (size_t i = 0; rc == CLI_OK && i < seqs.n; i++) {
        char *sg = score_join(gtdir, seqs.v[i]);
        char *gt = sg ? score_join(sg, "flow10.flo") : NULL;
        free(sg);
        if (!is_file(gt)) { /* a folder without ground truth (e.g. color/) is not a pair */
            free(gt);
            continue;
        }
        char *sd = score_join(datadir, seqs.v[i]);
        score_pair p = {0};
        p.id = strdup(seqs.v[i]);
        p.gt = gt;
        p.frame0 = sd ? score_join(sd, "frame10.png") : NULL;
        p.frame1 = sd ? score_join(sd, "frame11.png") : NULL;
        free(sd);
        rc = set_push(cmd, out, &p);
    }
    names_free(&seqs);
    if (rc == CLI_OK && out->n == 0)
        rc = cli_error(cmd, "%s: no Middlebury sequence with flow10.flo found", gtdir);
    free(gtdir);
    free(datadir);
    return rc;
}

/* ---- MPI-Sintel ---- */

/* "frame_0001.flo" -> 1; -1 if the name does not follow the pattern. */
static int sintel_frame_number(const char *name)
{
    int num = -1, len = 0;
    if (sscanf(name, "frame_%4d.flo%n", &num, &len) != 1 || len != (int)strlen(name) ||
        strlen(name) != 14)
        return -1;
    return num;
}

static char *optional_file(const char *root, const char *sub, const char *scene, int num)
{
    char *dir = score_printf("%s/%s", root, sub);
    if (!is_dir(dir)) {
        free(dir);
        return NULL;
    }
    char *p = score_printf("%s/%s/frame_%04d.png", dir, scene, num);
    free(dir);
    return p;
}

static int list_sintel(const char *cmd, const char *root, const char *pass, score_set *out)
{
    char *flowdir = score_join(root, "flow");
    char *passdir = score_join(root, pass);
    int rc = CLI_OK;
    if (!flowdir || !passdir)
        rc = cli_error(cmd, "out of memory");
    else if (!is_dir(flowdir))
        rc = cli_error(cmd, "%s: no flow/ folder (expected the MPI-Sintel training folder)", root);
    names scenes = {0};
    if (rc == CLI_OK)
        rc = list_dir(cmd, flowdir, 1, &scenes);
    for (size_t i = 0; rc == CLI_OK && i < scenes.n; i++) {
        char *sdir = score_join(flowdir, scenes.v[i]);
        names files = {0};
        rc = sdir ? list_dir(cmd, sdir, 0, &files) : cli_error(cmd, "out of memory");
        for (size_t j = 0; rc == CLI_OK && j < files.n; j++) {
            int num = sintel_frame_number(files.v[j]);
            if (num < 0)
                continue;
            const char *sc = scenes.v[i];
            score_pair p = {0};
            p.id = score_printf("%s/frame_%04d", sc, num);
            p.gt = score_join(sdir, files.v[j]);
            p.frame0 = score_printf("%s/%s/frame_%04d.png", passdir, sc, num);
            p.frame1 = score_printf("%s/%s/frame_%04d.png", passdir, sc, num + 1);
            p.occ = optional_file(root, "occlusions", sc, num);
            p.invalid = optional_file(root, "invalid", sc, num);
            rc = set_push(cmd, out, &p);
        }
        names_free(&files);
        free(sdir);
    }
    names_free(&scenes);
    if (rc == CLI_OK && out->n == 0)
        rc = cli_error(cmd, "%s: no frame_NNNN.flo files found", flowdir);
    free(flowdir);
    free(passdir);
    return rc;
}

/* ---- KITTI 2012 / 2015 ---- */

/* "000000_10.png" -> 1 with the 6-digit stem in stem[]. */
static int kitti_name(const char *name, char stem[7])
{
    if (strlen(name) != 13 || strcmp(name + 6, "_10.png") != 0)
        return 0;
    for (int i = 0; i < 6; i++)
        if (name[i] < '0' || name[i] > '9')
            return 0;
    memcpy(stem, name, 6);
    stem[6] = 0;
    return 1;
}

static int list_kitti(const char *cmd, const char *root, score_set *out)
{
    char *occdir = score_join(root, "flow_occ"), *nocdir = score_join(root, "flow_noc");
    char *imgdir = NULL;
    int rc = CLI_OK;
    if (!occdir || !nocdir)
        rc = cli_error(cmd, "out of memory");
    int has_occ = is_dir(occdir), has_noc = is_dir(nocdir);
    if (rc == CLI_OK && !has_occ && !has_noc)
        rc = cli_error(cmd,
                       "%s: neither flow_occ/ nor flow_noc/ (expected a KITTI training "
                       "folder)",
                       root);
    if (rc == CLI_OK) {
        const char *cands[] = {"image_2", "colored_0"};
        for (int i = 0; i < 2 && !imgdir; i++) {
            char *d = score_join(root, cands[i]);
            if (is_dir(d))
                imgdir = d;
            else
                free(d);
        }
        if (!imgdir)
            imgdir = score_join(root, "image_2"); /* reported when frames are needed */
    }
    const char *gtdir = has_occ ? occdir : nocdir;
    names files = {0};
    if (rc == CLI_OK)
        rc = list_dir(cmd, gtdir, 0, &files);
    for (size_t i = 0; rc == CLI_OK && i < files.n; i++) {
        char stem[7];
        if (!kitti_name(files.v[i], stem))
            continue;
        score_pair p = {0};
        p.id = score_printf("%s_10", stem);
        p.gt = score_join(gtdir, files.v[i]);
        if (has_occ && has_noc)
            p.gt_noc = score_join(nocdir, files.v[i]);
        p.frame0 = score_printf("%s/%s_10.png", imgdir, stem);
        p.frame1 = score_printf("%s/%s_11.png", imgdir, stem);
        rc = set_push(cmd, out, &p);
    }
    names_free(&files);
    if (rc == CLI_OK && out->n == 0)
        rc = cli_error(cmd, "%s: no NNNNNN_10.png ground truth found", gtdir);
    free(occdir);
    free(nocdir);
    free(imgdir);
    return rc;
}

/* ---- FlyingChairs ---- */

static int all_digits(const char *s, size_t n)
{
    if (n == 0)
        return 0;
    for (size_t i = 0; i < n; i++)
        if (s[i] < '0' || s[i] > '9')
            return 0;
    return 1;
}

static int list_chairs(const char *cmd, const char *root, score_set *out)
{
    names files;
    int rc = list_dir(cmd, root, 0, &files);
    for (size_t i = 0; rc == CLI_OK && i < files.n; i++) {
        const char *f = files.v[i];
        size_t len = strlen(f);
        const char *img0, *img1;
        size_t stem;
        if (len > 9 && !strcmp(f + len - 9, "_flow.flo")) { /* 00001_flow.flo */
            stem = len - 9;
            img0 = "_img1.ppm";
            img1 = "_img2.ppm";
        } else if (len > 7 && !strcmp(f + len - 7, "-gt.flo")) { /* 0000000-gt.flo */
            stem = len - 7;
            img0 = "-img0.ppm";
            img1 = "-img1.ppm";
        } else {
            continue;
        }
        if (!all_digits(f, stem))
            continue;
        score_pair p = {0};
        p.id = score_printf("%.*s", (int)stem, f);
        p.gt = score_join(root, f);
        p.frame0 = score_printf("%s/%.*s%s", root, (int)stem, f, img0);
        p.frame1 = score_printf("%s/%.*s%s", root, (int)stem, f, img1);
        rc = set_push(cmd, out, &p);
    }
    names_free(&files);
    if (rc == CLI_OK && out->n == 0)
        rc = cli_error(cmd, "%s: no NNNNN_flow.flo or NNNNNNN-gt.flo files found", root);
    return rc;
}

/* ---- list file ---- */

static char *resolve(const char *base, const char *p)
{
    return p[0] == '/' ? strdup(p) : score_join(base, p);
}

static int list_file(const char *cmd, const char *path, score_set *out)
{
    FILE *f = fopen(path, "r");
    if (!f)
        return cli_error(cmd, "%s: cannot open list file: %s", path, strerror(errno));
    char *base = strdup(path);
    if (!base) {
        fclose(f);
        return cli_error(cmd, "out of memory");
    }
    char *slash = strrchr(base, '/');
    if (slash)
        *slash = 0;
    else
        strcpy(base, ".");
    char line[8192];
    int rc = CLI_OK;
    long lineno = 0;
    while (rc == CLI_OK && fgets(line, sizeof line, f)) {
        lineno++;
        size_t len = strlen(line);
        if (len == sizeof line - 1 && line[len - 1] != '\n') {
            rc = cli_error(cmd, "%s:%ld: line too long", path, lineno);
            break;
        }
        char *hash = strchr(line, '#');
        if (hash)
            *hash = 0;
        char *save = NULL, *tok[4] = {NULL, NULL, NULL, NULL};
        int nt = 0;
        for (char *t = strtok_r(line, " \t\r\n", &save); t; t = strtok_r(NULL, " \t\r\n", &save)) {
            if (nt < 4)
                tok[nt] = t;
            nt++;
        }
        if (nt == 0)
            continue;
        if (nt != 3) {
            rc = cli_error(cmd, "%s:%ld: expected 3 fields 'frame1 frame2 gt', found %d", path,
                           lineno, nt);
            break;
        }
        score_pair p = {0};
        const char *gt = tok[2];
        const char *dot = strrchr(gt, '.');
        const char *sl = strrchr(gt, '/');
        size_t idlen = (dot && (!sl || dot > sl)) ? (size_t)(dot - gt) : strlen(gt);
        while (idlen > 0 && gt[0] == '.' && gt[1] == '/') { /* "./a/b.flo" -> "a/b" */
            gt += 2;
            idlen -= 2;
        }
        p.id = score_printf("%.*s", (int)idlen, gt[0] == '/' ? gt + 1 : gt);
        p.frame0 = resolve(base, tok[0]);
        p.frame1 = resolve(base, tok[1]);
        p.gt = resolve(base, tok[2]);
        rc = set_push(cmd, out, &p);
    }
    if (rc == CLI_OK && ferror(f))
        rc = cli_error(cmd, "%s: read error", path);
    fclose(f);
    free(base);
    if (rc == CLI_OK && out->n == 0)
        rc = cli_error(cmd, "%s: no 'frame1 frame2 gt' lines", path);
    if (rc == CLI_OK) { /* ids must be unique: estimates are looked up by id */
        const char **ids = malloc(out->n * sizeof *ids); /* sorted copy: n log n */
        if (!ids)
            return cli_error(cmd, "%s: out of memory", path);
        for (size_t i = 0; i < out->n; i++)
            ids[i] = out->pairs[i].id;
        qsort(ids, out->n, sizeof *ids, cmp_str);
        for (size_t i = 1; rc == CLI_OK && i < out->n; i++)
            if (!strcmp(ids[i - 1], ids[i]))
                rc = cli_error(cmd, "%s: ground truth '%s' is listed twice", path, ids[i]);
        free(ids);
    }
    return rc;
}

int score_layout_list(const char *cmd, const char *layout, const char *root, const char *pass,
                      score_set *out)
{
    memset(out, 0, sizeof *out);
    static const char *const known[] = {"middlebury", "sintel", "kitti", "chairs", "list"};
    int found = 0;
    for (size_t i = 0; i < sizeof known / sizeof known[0]; i++)
        found |= !strcmp(layout, known[i]);
    if (!found)
        return cli_usage_error(cmd, "unknown layout '%s' (expected %s)", layout,
                               score_layout_names);
    int rc;
    if (!strcmp(layout, "list")) {
        rc = list_file(cmd, root, out);
    } else if (!is_dir(root)) {
        return cli_error(cmd, "%s: not a folder", root);
    } else if (!strcmp(layout, "middlebury")) {
        rc = list_middlebury(cmd, root, out);
    } else if (!strcmp(layout, "sintel")) {
        rc = list_sintel(cmd, root, pass, out);
    } else if (!strcmp(layout, "kitti")) {
        rc = list_kitti(cmd, root, out);
    } else {
        rc = list_chairs(cmd, root, out);
    }
    if (rc != CLI_OK)
        score_set_free(out);
    return rc;
}

int score_make_parents(const char *path)
{
    char *p = strdup(path);
    if (!p)
        return -1;
    for (char *s = p + 1; *s; s++) {
        if (*s != '/')
            continue;
        *s = 0;
        if (mkdir(p, 0777) != 0 && errno != EEXIST) {
            int e = errno;
            free(p);
            errno = e;
            return -1;
        }
        *s = '/';
    }
    free(p);
    return 0;
}

char *score_find_file(const char *dir, const char *id, const char *exts, char **tried)
{
    if (tried)
        *tried = NULL;
    const char *e = exts;
    while (*e) {
        size_t len = strcspn(e, "|");
        char *p = score_printf("%s/%s.%.*s", dir, id, (int)len, e);
        if (!p)
            return NULL;
        if (is_file(p))
            return p;
        free(p);
        e += len;
        if (*e == '|')
            e++;
    }
    if (tried) {
        char *list = strdup(exts);
        if (list) {
            for (char *c = list; *c; c++)
                if (*c == '|')
                    *c = ',';
            *tried = score_printf("%s/%s.{%s}", dir, id, list);
            free(list);
        }
    }
    return NULL;
}
