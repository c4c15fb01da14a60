/* SPDX-License-Identifier: MIT */
/* Command-line helpers: one-line errors, strict parsing. */
#include "tools/cli.h"

#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

const char cli_notice[] =
    "sinew is a research tool, not a medical device: its output must not be used for\n"
    "diagnosis or treatment. Handle clinical or patient-derived data under your\n"
    "institution's rules (ethics approval, consent, de-identification).\n";

static void vprint_line(const char *cmd, const char *fmt, va_list ap)
{
    char buf[2048];
    vsnprintf(buf, sizeof buf, fmt, ap);
    for (char *p = buf; *p; p++)
        if (*p == '\n' || *p == '\r')
            *p = ' ';
    if (cmd && *cmd)
        fprintf(stderr, "sinew: %s: %s\n", cmd, buf);
    else
        fprintf(stderr, "sinew: %s\n", buf);
}

int cli_error(const char *cmd, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vprint_line(cmd, fmt, ap);
    va_end(ap);
    return CLI_FAIL;
}

int cli_usage_error(const char *cmd, const char *fmt, ...)
{
    char buf[1800];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(buf, sizeof buf, fmt, ap);
    va_end(ap);
    cli_error(cmd, "%s (see 'sinew %s --help')", buf, cmd ? cmd : "");
    return CLI_USAGE;
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
