/* SPDX-License-Identifier: MIT */
/* Command-line helpers: one-line errors, strict parsing, stop requests by signal. */
#define _POSIX_C_SOURCE 200809L
#include "tools/cli.h"

#include <errno.h>
#include <getopt.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

const char cli_notice[] =
    "sinew is a research tool, not a medical device: its output must not be used for\n"
    "diagnosis or treatment. Handle clinical or patient-derived data under your\n"
    "institution's rules (ethics approval, consent, de-identification).\n";

/* C0 controls, DEL, and C1 controls (U+0080..U+009F, UTF-8 C2 80..C2 9F): bytes at s
 * that a terminal could act on; returns their length (0: none). */
static size_t control_len(const unsigned char *s)
{
    if (s[0] < 0x20 || s[0] == 0x7f)
        return 1;
    if (s[0] == 0xc2 && s[1] >= 0x80 && s[1] <= 0x9f)
        return 2;
    return 0;
}

const char *cli_term_text(const char *s, char *buf, size_t n)
{
    size_t o = 0;
    if (!n)
        return buf;
    for (const unsigned char *p = (const unsigned char *)s; *p && o + 1 < n;) {
        size_t c = control_len(p);
        if (!c) {
            buf[o++] = (char)*p++;
            continue;
        }
        for (size_t k = 0; k < c; k++, p++) {
            if (o + 5 > n)
                break;
            o += (size_t)snprintf(buf + o, n - o, "\\x%02x", *p);
        }
        if (o + 5 > n)
            break;
    }
    buf[o] = '\0';
    return buf;
}

void cli_json_string(FILE *f, const char *s)
{
    fputc('"', f);
    size_t n = strlen(s);
    const unsigned char *u = (const unsigned char *)s;
    for (size_t i = 0; i < n;) {
        size_t l = sinew_utf8_len(u + i, n - i);
        if (l == 1 && (u[i] == '"' || u[i] == '\\'))
            fprintf(f, "\\%c", u[i]);
        else if (l == 1 && u[i] < 0x20)
            fprintf(f, "\\u%04x", u[i]);
        else if (l)
            fwrite(u + i, 1, l, f);
        else
            fprintf(f, "\\u00%02x", u[i]); /* not UTF-8: its Latin-1 reading */
        i += l ? l : 1;
    }
    fputc('"', f);
}

/* "sinew: CMD: PRE<message>POST" on stderr; pre and post are our own text. */
static void vprint_line(const char *cmd, const char *pre, const char *post, const char *fmt,
                        va_list ap)
{
    /* whole, never cut: the cause is at the end of the line */
    va_list aq;
    va_copy(aq, ap);
    int w = vsnprintf(NULL, 0, fmt, aq);
    va_end(aq);
    size_t n = w > 0 ? (size_t)w + 1 : 1;
    char *buf = malloc(n), *safe = malloc(4 * n); /* \xHH: at most 4 bytes per byte */
    if (!buf || !safe) {
        free(buf);
        free(safe);
        fprintf(stderr, "sinew: %s: out of memory printing an error\n", cmd ? cmd : "");
        return;
    }
    vsnprintf(buf, n, fmt, ap);
    for (char *p = buf; *p; p++)
        if (*p == '\n' || *p == '\r')
            *p = ' ';
    cli_term_text(buf, safe, 4 * n); /* file names may carry ESC and friends */
    if (cmd && *cmd)
        fprintf(stderr, "sinew: %s: %s%s%s\n", cmd, pre, safe, post);
    else
        fprintf(stderr, "sinew: %s%s%s\n", pre, safe, post);
    free(buf);
    free(safe);
}

int cli_error(const char *cmd, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vprint_line(cmd, "", "", fmt, ap);
    va_end(ap);
    return CLI_FAIL;
}

void cli_warning(const char *cmd, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vprint_line(cmd, "warning: ", "", fmt, ap);
    va_end(ap);
}

int cli_usage_error(const char *cmd, const char *fmt, ...)
{
    char hint[96];
    snprintf(hint, sizeof hint, " (see 'sinew %s%s--help')", cmd ? cmd : "",
             cmd && *cmd ? " " : "");
    va_list ap;
    va_start(ap, fmt);
    vprint_line(cmd, "", hint, fmt, ap);
    va_end(ap);
    return CLI_USAGE;
}

/* Optimal-string-alignment distance: insertions, deletions, substitutions and swaps of
 * two neighbouring characters cost 1 each (Damerau 1964), so "flwo" is 1 from "flow". */
static size_t edit_distance(const char *a, const char *b)
{
    size_t na = strlen(a), nb = strlen(b);
    if (na > 64 || nb > 64)
        return (size_t)-1;
    size_t d[65][65];
    for (size_t i = 0; i <= na; i++)
        d[i][0] = i;
    for (size_t j = 0; j <= nb; j++)
        d[0][j] = j;
    for (size_t i = 1; i <= na; i++)
        for (size_t j = 1; j <= nb; j++) {
            size_t best = d[i - 1][j - 1] + (a[i - 1] != b[j - 1]);
            if (d[i - 1][j] + 1 < best)
                best = d[i - 1][j] + 1;
            if (d[i][j - 1] + 1 < best)
                best = d[i][j - 1] + 1;
            if (i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1] &&
                d[i - 2][j - 2] + 1 < best)
                best = d[i - 2][j - 2] + 1;
            d[i][j] = best;
        }
    return d[na][nb];
}

const char *cli_closest(const char *word, const char *const *names)
{
    const char *best = NULL;
    size_t bd = (size_t)-1, len = strlen(word);
    for (size_t k = 0; names && names[k]; k++) {
        size_t d = edit_distance(word, names[k]);
        if (d < bd) {
            bd = d;
            best = names[k];
        }
    }
    return best && bd <= 2 && 2 * bd < len ? best : NULL;
}

int cli_bad_option(const char *cmd, const struct option *opts, const char *arg)
{
    const char *names[128];
    size_t n = 0;
    for (size_t k = 0; opts[k].name && n + 1 < sizeof names / sizeof names[0]; k++)
        names[n++] = opts[k].name;
    names[n] = NULL;
    if (!arg)
        return cli_usage_error(cmd, "bad option");
    if (!strncmp(arg, "--", 2)) {
        char word[128];
        snprintf(word, sizeof word, "%s", arg + 2);
        char *eq = strchr(word, '=');
        if (eq)
            *eq = 0;
        size_t nprefix = 0, len = strlen(word);
        char which[256] = "";
        for (size_t k = 0; opts[k].name; k++) {
            if (!strcmp(word, opts[k].name))
                return cli_usage_error(cmd,
                                       opts[k].has_arg == required_argument
                                           ? "option '--%s' needs a value"
                                           : "option '--%s' takes no value",
                                       word);
            if (len && !strncmp(word, opts[k].name, len) && nprefix++ < 3) {
                size_t w = strlen(which);
                snprintf(which + w, sizeof which - w, "%s--%s", w ? ", " : "", opts[k].name);
            }
        }
        if (nprefix > 1)
            return cli_usage_error(cmd, "option '--%s' is ambiguous (%s%s)", word, which,
                                   nprefix > 3 ? ", ..." : "");
        const char *c = cli_closest(word, names);
        if (c)
            return cli_usage_error(cmd, "unknown option '--%s' (did you mean --%s?)", word, c);
        return cli_usage_error(cmd, "unknown option '--%s'", word);
    }
    if (arg[0] == '-' && arg[1] && optopt)
        for (size_t k = 0; opts[k].name; k++)
            if (opts[k].val == optopt && opts[k].has_arg == required_argument)
                return cli_usage_error(cmd, "option '-%c' (--%s) needs a value", optopt,
                                       opts[k].name);
    return cli_usage_error(cmd, "unknown option '%s'", arg);
}

int cli_intrinsics_read(sinew_ctx *ctx, sinew_camera *cam, const char *arg)
{
    struct stat st;
    if (stat(arg, &st) != 0 && strchr(arg, ','))
        return sinew_camera_parse(ctx, cam, arg, "--intrinsics");
    return sinew_camera_load(ctx, cam, arg);
}

int cli_status(const char *cmd, sinew_ctx *ctx, int status)
{
    const char *m = sinew_ctx_message(ctx);
    if (m && *m)
        return cli_error(cmd, "%s", m);
    return cli_error(cmd, "%s", sinew_strerror(status));
}

int cli_parse_int(const char *s, long min, long max, long *out)
{
    if (!s || !*s)
        return -1;
    char *end;
    errno = 0;
    long v = strtol(s, &end, 10);
    if (errno || *end || v < min || v > max)
        return -1;
    *out = v;
    return 0;
}

int cli_parse_double(const char *s, double *out)
{
    if (!s || !*s)
        return -1;
    char *end;
    errno = 0;
    double v = strtod(s, &end);
    if (errno || *end || !isfinite(v))
        return -1;
    *out = v;
    return 0;
}

int cli_parse_size(const char *s, int *w, int *h)
{
    if (!s)
        return -1;
    const char *x = strchr(s, 'x');
    if (!x)
        return -1;
    char a[32];
    size_t n = (size_t)(x - s);
    if (n == 0 || n >= sizeof a)
        return -1;
    memcpy(a, s, n);
    a[n] = 0;
    long lw, lh;
    if (cli_parse_int(a, 1, 1 << 20, &lw) || cli_parse_int(x + 1, 1, 1 << 20, &lh))
        return -1;
    *w = (int)lw;
    *h = (int)lh;
    return 0;
}

sinew_ctx *cli_ctx(const char *cmd, int threads)
{
    sinew_ctx *ctx = sinew_ctx_new();
    if (!ctx) {
        cli_error(cmd, "out of memory");
        return NULL;
    }
    if (sinew_ctx_set_threads(ctx, threads) != SINEW_OK) {
        cli_status(cmd, ctx, SINEW_EINVAL);
        sinew_ctx_free(ctx);
        return NULL;
    }
    return ctx;
}

/* ---- stop requests: the only process-wide state, owned by the command line ---- */

static volatile sig_atomic_t stop_flag;
static volatile sig_atomic_t stop_signal;
static sinew_ctx *stop_ctx;
static sinew_ctx *stop_more[CLI_STOP_MAX_CTX];
static volatile sig_atomic_t stop_nmore;
static char stop_extra[4200];
static volatile sig_atomic_t stop_extra_set;
static char stop_line[200];
static size_t stop_line_len;

static void on_stop_signal(int sig)
{
    if (stop_flag) {
        /* second request: only async-signal-safe calls from here on */
        if (stop_ctx)
            (void)sinew_ctx_remove_temporaries(stop_ctx);
        for (int k = 0; k < stop_nmore; k++)
            (void)sinew_ctx_remove_temporaries(stop_more[k]);
        if (stop_extra_set)
            (void)unlink(stop_extra);
        ssize_t w = write(STDERR_FILENO, stop_line, stop_line_len);
        (void)w;
        _exit(128 + sig);
    }
    stop_signal = sig;
    stop_flag = 1;
}

void cli_stop_install(const char *cmd, sinew_ctx *ctx)
{
    int n = snprintf(stop_line, sizeof stop_line,
                     "sinew: %s: stopped at once by a second signal; rerun with --resume\n", cmd);
    stop_line_len = n > 0 && (size_t)n < sizeof stop_line ? (size_t)n : 0;
    stop_ctx = ctx;
    sinew_ctx_set_cancel(ctx, &stop_flag);
    struct sigaction sa;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = on_stop_signal;
    sa.sa_flags = SA_RESTART;
    sigemptyset(&sa.sa_mask);
    sigaddset(&sa.sa_mask, SIGINT);
    sigaddset(&sa.sa_mask, SIGTERM);
    sigaction(SIGINT, &sa, NULL);
    sigaction(SIGTERM, &sa, NULL);
}

void cli_stop_also_ctx(sinew_ctx *ctx)
{
    if (!ctx) {
        stop_nmore = 0;
        return;
    }
    sinew_ctx_set_cancel(ctx, &stop_flag);
    if (stop_nmore < CLI_STOP_MAX_CTX) {
        stop_more[stop_nmore] = ctx;
        stop_nmore = stop_nmore + 1;
    }
}

void cli_stop_also_remove(const char *path)
{
    stop_extra_set = 0;
    if (path && strlen(path) < sizeof stop_extra) {
        memcpy(stop_extra, path, strlen(path) + 1);
        stop_extra_set = 1;
    }
}

int cli_stop_signal(void)
{
    return (int)stop_signal;
}

const volatile sig_atomic_t *cli_stop_flag(void)
{
    return &stop_flag;
}
