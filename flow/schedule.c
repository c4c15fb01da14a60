/* SPDX-License-Identifier: MIT */
/* Pair schedules, pair names and timestamp association.
 *
 * Schedules expand to an explicit pair list once, with the pair count computed and
 * checked against SINEW_RUN_MAX_PAIRS before anything is allocated. Association
 * follows the published TUM RGB-D tool's rule: candidates within the tolerance, taken
 * greedily from the smallest time difference, each stamp used once. Candidates are
 * found with a sliding window over stamps sorted by time, so the cost is
 * O(n log n + candidates), not O(na * nb). */
#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "flow/internal/base.h"
#include "flow/internal/schedule.h"
#include "flow/schedule.h"

char *sinew_pair_name(char *buf, sinew_pair p)
{
    snprintf(buf, SINEW_PAIR_NAME_MAX, "%06d-%06d", (int)p.i, (int)p.j);
    return buf;
}

/* Number of pairs a generated schedule yields, or -1 on a bad parameter. */
static int64_t schedule_count(const sinew_schedule *s, int64_t n)
{
    switch (s->kind) {
    case SINEW_SCHEDULE_CONSECUTIVE:
        return n > 1 ? n - 1 : 0;
    case SINEW_SCHEDULE_GAP:
        if (s->gap < 1)
            return -1;
        return n > s->gap ? n - s->gap : 0;
    case SINEW_SCHEDULE_KEYFRAME: {
        if (s->every < 1 || s->window < 1)
            return -1;
        int64_t c = 0;
        for (int64_t i = 0; i < n; i += s->every) {
            int64_t m = n - 1 - i;
            c += m < s->window ? m : s->window;
        }
        return c;
    }
    case SINEW_SCHEDULE_LIST:
        return (int64_t)s->list_len;
    }
    return -1;
}

static int cmp_pair(const void *a, const void *b)
{
    const sinew_pair *x = a, *y = b;
    if (x->i != y->i)
        return x->i < y->i ? -1 : 1;
    if (x->j != y->j)
        return x->j < y->j ? -1 : 1;
    return 0;
}

int sinew_schedule_pairs(sinew_ctx *ctx, sinew_pair **pairs, size_t *npairs,
                         const sinew_schedule *s, size_t nframes)
{
    if (!ctx || !s || !pairs || !npairs)
        return SINEW_EINVAL;
    *pairs = NULL;
    *npairs = 0;
    if (nframes > SINEW_RUN_MAX_FRAMES)
        return sinew__fail(ctx, SINEW_ELIMIT, "sequence has %zu frames, limit %d", nframes,
                           SINEW_RUN_MAX_FRAMES);
    if (s->kind == SINEW_SCHEDULE_LIST && s->list_len && !s->list)
        return SINEW_EINVAL;
    if (s->kind == SINEW_SCHEDULE_LIST && !s->list_len) /* a run that would do nothing */
        return sinew__fail(ctx, SINEW_ECONFIG, "schedule: the pair list is empty");
    int64_t n = (int64_t)nframes;
    int64_t count = schedule_count(s, n);
    if (count < 0)
        return sinew__fail(ctx, SINEW_ECONFIG,
                           "schedule: gap, every and window must be at least 1");
    if (count > SINEW_RUN_MAX_PAIRS)
        return sinew__fail(ctx, SINEW_ELIMIT, "schedule: %lld pairs, limit %d", (long long)count,
                           SINEW_RUN_MAX_PAIRS);
    if (count == 0)
        return SINEW_OK;
    sinew_pair *p = sinew__calloc(ctx, (size_t)count, sizeof *p);
    if (!p)
        return SINEW_ENOMEM;
    size_t k = 0;
    switch (s->kind) {
    case SINEW_SCHEDULE_CONSECUTIVE:
    case SINEW_SCHEDULE_GAP: {
        int32_t g = s->kind == SINEW_SCHEDULE_GAP ? s->gap : 1;
        for (int64_t i = 0; i + g < n; i++)
            p[k++] = (sinew_pair){(int32_t)i, (int32_t)(i + g)};
        break;
    }
    case SINEW_SCHEDULE_KEYFRAME:
        for (int64_t i = 0; i < n; i += s->every)
            for (int64_t d = 1; d <= s->window && i + d < n; d++)
                p[k++] = (sinew_pair){(int32_t)i, (int32_t)(i + d)};
        break;
    case SINEW_SCHEDULE_LIST:
        for (size_t q = 0; q < s->list_len; q++) {
            sinew_pair a = s->list[q];
            if (a.i < 0 || a.j < 0 || a.i >= n || a.j >= n || a.i == a.j) {
                sinew__free(ctx, p);
                return sinew__fail(ctx, SINEW_ECONFIG,
                                   "schedule: pair %zu (%d, %d) is out of range 0..%lld or "
                                   "repeats a frame",
                                   q, (int)a.i, (int)a.j, (long long)n - 1);
            }
            p[k++] = a;
        }
        break;
    }
    if (s->kind == SINEW_SCHEDULE_LIST && k > 1) {
        /* duplicates would share an output folder: sort a copy and look for neighbours */
        sinew_pair *c = sinew__calloc(ctx, k, sizeof *c);
        if (!c) {
            sinew__free(ctx, p);
            return SINEW_ENOMEM;
        }
        memcpy(c, p, k * sizeof *c);
        qsort(c, k, sizeof *c, cmp_pair);
        for (size_t q = 1; q < k; q++)
            if (!cmp_pair(&c[q - 1], &c[q])) {
                int i = c[q].i, j = c[q].j;
                sinew__free(ctx, c);
                sinew__free(ctx, p);
                return sinew__fail(ctx, SINEW_ECONFIG, "schedule: pair (%d, %d) is listed twice", i,
                                   j);
            }
        sinew__free(ctx, c);
    }
    *pairs = p;
    *npairs = k;
    return SINEW_OK;
}

/* ---- schedule text (sinew run --schedule) ---- */

/* The decimal integer from s to end, in lo..hi (strtol rules: leading blanks and a
 * sign allowed). */
static int parse_count(const char *s, const char *end, long lo, long hi, long *out)
{
    char *e;
    errno = 0;
    long v = strtol(s, &e, 10);
    if (errno || e != end || e == s || v < lo || v > hi)
        return -1;
    *out = v;
    return 0;
}

/* One line of a list file: 1 if it holds a pair (into *p, when p is not NULL), 0 if
 * it is blank or a comment, -1 if malformed. line is NUL-terminated. */
static int list_line(const char *line, sinew_pair *p)
{
    const char *h = line + strspn(line, " \t\r");
    if (!*h || *h == '#')
        return 0;
    long i, j;
    char extra[2];
    if (sscanf(h, "%ld %ld %1s", &i, &j, extra) != 2 || i < 0 || j < 0 ||
        i >= SINEW_RUN_MAX_FRAMES || j >= SINEW_RUN_MAX_FRAMES)
        return -1;
    if (p)
        *p = (sinew_pair){(int32_t)i, (int32_t)j};
    return 1;
}

/* Walk the lines of buf (NUL-terminated, modified in place and restored): count the
 * pairs, or store them when pairs is not NULL. -1 with *bad_line on a malformed line. */
static int64_t list_scan(char *buf, size_t len, sinew_pair *pairs, size_t *bad_line)
{
    int64_t n = 0;
    size_t line = 0;
    for (char *q = buf; q < buf + len;) {
        char *nl = memchr(q, '\n', (size_t)(buf + len - q));
        char *end = nl ? nl : buf + len;
        char saved = *end;
        *end = 0;
        line++;
        int r = list_line(q, pairs ? &pairs[n] : NULL);
        *end = saved;
        if (r < 0) {
            *bad_line = line;
            return -1;
        }
        n += r;
        q = end + 1;
    }
    return n;
}

static int parse_list(sinew_ctx *ctx, const char *path, sinew_schedule *out, sinew_pair **list)
{
    unsigned char *buf;
    size_t len, bad = 0;
    int rc = sinew_read_file(ctx, &buf, &len, path, (size_t)64 << 20);
    if (rc)
        return rc;
    int64_t n = list_scan((char *)buf, len, NULL, &bad);
    sinew_pair *p = NULL;
    if (n < 0)
        rc = sinew__fail(ctx, SINEW_EFORMAT, "%s: line %zu: expected 'I J' (frame numbers)", path,
                         bad);
    else if (n == 0) /* a run that would end with success having done nothing */
        rc = sinew__fail(ctx, SINEW_ECONFIG, "%s: no 'I J' lines: the schedule is empty", path);
    else if (n > SINEW_RUN_MAX_PAIRS)
        rc = sinew__fail(ctx, SINEW_ELIMIT, "%s: %lld pairs, limit %d", path, (long long)n,
                         SINEW_RUN_MAX_PAIRS);
    else if (n > 0 && !(p = sinew__calloc(ctx, (size_t)n, sizeof *p)))
        rc = SINEW_ENOMEM;
    else if (n > 0)
        list_scan((char *)buf, len, p, &bad);
    sinew_ctx_dealloc(ctx, buf);
    if (rc)
        return rc;
    out->kind = SINEW_SCHEDULE_LIST;
    out->list = p;
    out->list_len = (size_t)n;
    *list = p;
    return SINEW_OK;
}

int sinew_schedule_parse(sinew_ctx *ctx, sinew_schedule *out, sinew_pair **list, const char *text)
{
    if (!ctx || !text || !out || !list)
        return SINEW_EINVAL;
    memset(out, 0, sizeof *out);
    *list = NULL;
    const char *end = text + strlen(text);
    long a, b;
    if (!strcmp(text, "consecutive")) {
        out->kind = SINEW_SCHEDULE_CONSECUTIVE;
        return SINEW_OK;
    }
    if (!strncmp(text, "gap:", 4)) {
        if (parse_count(text + 4, end, 1, SINEW_RUN_MAX_FRAMES, &a))
            return SINEW_EINVAL;
        out->kind = SINEW_SCHEDULE_GAP;
        out->gap = (int)a;
        return SINEW_OK;
    }
    if (!strncmp(text, "keyframe:", 9)) {
        const char *c = strchr(text + 9, ':');
        if (!c || parse_count(text + 9, c, 1, SINEW_RUN_MAX_FRAMES, &a) ||
            parse_count(c + 1, end, 1, SINEW_RUN_MAX_FRAMES, &b))
            return SINEW_EINVAL;
        out->kind = SINEW_SCHEDULE_KEYFRAME;
        out->every = (int)a;
        out->window = (int)b;
        return SINEW_OK;
    }
    if (!strncmp(text, "list:", 5))
        return parse_list(ctx, text + 5, out, list);
    return SINEW_EINVAL;
}

/* ---- association ---- */

typedef struct {
    double d;
    size_t a, b;
} cand;

int sinew__stamp_cmp(const void *x, const void *y)
{
    const sinew__stamp *a = x, *b = y;
    if (a->t != b->t)
        return a->t < b->t ? -1 : 1;
    return a->idx < b->idx ? -1 : a->idx > b->idx;
}

static int cmp_cand(const void *x, const void *y)
{
    const cand *a = x, *b = y;
    if (a->d != b->d)
        return a->d < b->d ? -1 : 1;
    if (a->a != b->a)
        return a->a < b->a ? -1 : 1;
    return a->b < b->b ? -1 : a->b > b->b;
}

/* Walk the window of b stamps within max_diff of each a stamp; store candidates when
 * out is non-NULL, otherwise only count them. */
static size_t scan_candidates(const sinew__stamp *sa, size_t na, const sinew__stamp *sb, size_t nb,
                              double max_diff, double offset, cand *out)
{
    size_t count = 0, lo = 0;
    for (size_t a = 0; a < na; a++) {
        while (lo < nb && sb[lo].t + offset <= sa[a].t - max_diff)
            lo++;
        for (size_t b = lo; b < nb && sb[b].t + offset < sa[a].t + max_diff; b++) {
            double d = fabs(sa[a].t - (sb[b].t + offset));
            if (d < max_diff) {
                if (out)
                    out[count] = (cand){d, sa[a].idx, sb[b].idx};
                count++;
            }
        }
    }
    return count;
}

int sinew_associate(sinew_ctx *ctx, int32_t *match, size_t *nmatched, const double *ta, size_t na,
                    const double *tb, size_t nb, double max_diff, double offset)
{
    if (!ctx || (na && (!ta || !match)) || (nb && !tb) || !nmatched)
        return SINEW_EINVAL;
    *nmatched = 0;
    if (!(max_diff > 0) || !isfinite(max_diff) || !isfinite(offset))
        return sinew__fail(ctx, SINEW_ECONFIG,
                           "association: max difference must be positive and finite");
    if (na > SINEW_RUN_MAX_FRAMES || nb > SINEW_RUN_MAX_FRAMES)
        return sinew__fail(ctx, SINEW_ELIMIT, "association: more than %d stamps",
                           SINEW_RUN_MAX_FRAMES);
    for (size_t a = 0; a < na; a++) {
        if (!isfinite(ta[a]))
            return sinew__fail(ctx, SINEW_ECONFIG, "association: stamp %zu is not finite", a);
        match[a] = -1;
    }
    for (size_t b = 0; b < nb; b++)
        if (!isfinite(tb[b]))
            return sinew__fail(ctx, SINEW_ECONFIG, "association: stamp %zu is not finite", b);
    if (!na || !nb)
        return SINEW_OK;
    sinew__stamp *sa = sinew__calloc(ctx, na, sizeof *sa);
    sinew__stamp *sb = sinew__calloc(ctx, nb, sizeof *sb);
    unsigned char *used = sinew__calloc(ctx, nb, 1);
    cand *c = NULL;
    int rc = SINEW_OK;
    if (!sa || !sb || !used) {
        rc = SINEW_ENOMEM;
        goto done;
    }
    for (size_t a = 0; a < na; a++)
        sa[a] = (sinew__stamp){ta[a], a};
    for (size_t b = 0; b < nb; b++)
        sb[b] = (sinew__stamp){tb[b], b};
    qsort(sa, na, sizeof *sa, sinew__stamp_cmp);
    qsort(sb, nb, sizeof *sb, sinew__stamp_cmp);
    size_t nc = scan_candidates(sa, na, sb, nb, max_diff, offset, NULL);
    if (nc > (size_t)SINEW_RUN_MAX_PAIRS) {
        rc = sinew__fail(ctx, SINEW_ELIMIT,
                         "association: %zu candidate matches; the tolerance is too large", nc);
        goto done;
    }
    if (nc) {
        c = sinew__calloc(ctx, nc, sizeof *c);
        if (!c) {
            rc = SINEW_ENOMEM;
            goto done;
        }
        scan_candidates(sa, na, sb, nb, max_diff, offset, c);
        qsort(c, nc, sizeof *c, cmp_cand);
    }
    size_t m = 0;
    for (size_t q = 0; q < nc; q++)
        if (match[c[q].a] < 0 && !used[c[q].b]) {
            match[c[q].a] = (int32_t)c[q].b;
            used[c[q].b] = 1;
            m++;
        }
    *nmatched = m;
done:
    sinew__free(ctx, c);
    sinew__free(ctx, used);
    sinew__free(ctx, sb);
    sinew__free(ctx, sa);
    return rc;
}

/* ---- stamp lists ---- */

void sinew_stamp_list_free(sinew_ctx *ctx, sinew_stamp_list *l)
{
    if (!ctx || !l)
        return;
    for (size_t i = 0; l->name && i < l->n; i++)
        sinew__free(ctx, l->name[i]);
    sinew__free(ctx, l->name);
    sinew__free(ctx, l->t);
    memset(l, 0, sizeof *l);
}

#define STAMP_LIST_MAX_BYTES ((size_t)256 << 20)

int sinew_stamp_list_read(sinew_ctx *ctx, sinew_stamp_list *out, const char *path)
{
    if (!ctx || !path || !out)
        return SINEW_EINVAL;
    memset(out, 0, sizeof *out);
    unsigned char *buf;
    size_t len;
    int rc = sinew_read_file(ctx, &buf, &len, path, STAMP_LIST_MAX_BYTES);
    if (rc)
        return rc;
    /* first pass: count entry lines (limit before allocation) */
    size_t lines = 0;
    for (char *p = (char *)buf; *p;) {
        char *e = strchr(p, '\n');
        size_t n = e ? (size_t)(e - p) : strlen(p);
        size_t s = strspn(p, " \t\r");
        if (s < n && p[s] != '#')
            lines++;
        p += n + (e != NULL);
    }
    if (lines > SINEW_RUN_MAX_FRAMES) {
        sinew_ctx_dealloc(ctx, buf);
        return sinew__fail(ctx, SINEW_ELIMIT, "%s: %zu entries, limit %d", path, lines,
                           SINEW_RUN_MAX_FRAMES);
    }
    if (memchr(buf, 0, len)) {
        sinew_ctx_dealloc(ctx, buf);
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: contains a NUL byte", path);
    }
    if (lines) {
        out->t = sinew__calloc(ctx, lines, sizeof *out->t);
        out->name = sinew__calloc(ctx, lines, sizeof *out->name);
        if (!out->t || !out->name) {
            sinew_stamp_list_free(ctx, out);
            sinew_ctx_dealloc(ctx, buf);
            return SINEW_ENOMEM;
        }
    }
    size_t lineno = 0;
    for (char *p = (char *)buf; *p;) {
        char *e = strchr(p, '\n');
        if (e)
            *e = '\0';
        lineno++;
        char *next = e ? e + 1 : p + strlen(p);
        char *tok[3] = {NULL, NULL, NULL};
        int nt = 0;
        for (char *q = p; *q && nt < 3;) {
            q += strspn(q, " \t\r");
            if (!*q)
                break;
            tok[nt++] = q;
            q += strcspn(q, " \t\r");
            if (*q)
                *q++ = '\0';
            else
                break;
        }
        if (nt == 0 || tok[0][0] == '#') {
            p = next;
            continue;
        }
        char *end;
        errno = 0;
        double t = strtod(tok[0], &end);
        if (nt != 2 || *end || errno || !isfinite(t)) {
            sinew_stamp_list_free(ctx, out);
            sinew_ctx_dealloc(ctx, buf);
            return sinew__fail(ctx, SINEW_EFORMAT, "%s: line %zu: expected 'timestamp filename'",
                               path, lineno);
        }
        char *name = sinew__strdup(ctx, tok[1]);
        if (!name) {
            sinew_stamp_list_free(ctx, out);
            sinew_ctx_dealloc(ctx, buf);
            return SINEW_ENOMEM;
        }
        out->t[out->n] = t;
        out->name[out->n] = name;
        out->n++;
        p = next;
    }
    sinew_ctx_dealloc(ctx, buf);
    return SINEW_OK;
}
