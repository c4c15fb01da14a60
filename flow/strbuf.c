/* SPDX-License-Identifier: MIT */
/* The string buffer of flow/internal/strbuf.h: growth by doubling through the context
 * allocator, printf, HTML escaping and base64. */
#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>

#include "flow/internal/strbuf.h"

void sinew__sb_init(sinew__sbuf *b, sinew_ctx *ctx)
{
    memset(b, 0, sizeof *b);
    b->ctx = ctx;
}

void sinew__sb_free(sinew__sbuf *b)
{
    sinew__free(b->ctx, b->p);
    b->p = NULL;
    b->n = b->cap = 0;
}

int sinew__sb_reserve(sinew__sbuf *b, size_t add)
{
    size_t need;
    if (b->err)
        return 0;
    if (sinew__add_size(b->n, add, &need) || sinew__add_size(need, 1, &need)) {
        b->err = sinew__fail(b->ctx, SINEW_EOVERFLOW, "text buffer: size overflow");
        return 0;
    }
    if (need <= b->cap)
        return 1;
    size_t cap = b->cap ? b->cap : 16384;
    while (cap < need) {
        if (cap > SIZE_MAX / 2) {
            cap = need;
            break;
        }
        cap *= 2;
    }
    char *q = sinew__alloc(b->ctx, cap);
    if (!q) {
        b->err = SINEW_ENOMEM;
        return 0;
    }
    if (b->n)
        memcpy(q, b->p, b->n);
    sinew__free(b->ctx, b->p);
    b->p = q;
    b->cap = cap;
    return 1;
}

void sinew__sb_put(sinew__sbuf *b, const char *s, size_t len)
{
    if (!sinew__sb_reserve(b, len))
        return;
    memcpy(b->p + b->n, s, len);
    b->n += len;
    b->p[b->n] = 0;
}

void sinew__sb_puts(sinew__sbuf *b, const char *s)
{
    sinew__sb_put(b, s, strlen(s));
}

void sinew__sb_printf(sinew__sbuf *b, const char *fmt, ...)
{
    char small[512];
    va_list ap;
    va_start(ap, fmt);
    int k = vsnprintf(small, sizeof small, fmt, ap);
    va_end(ap);
    if (k < 0)
        return;
    if ((size_t)k < sizeof small) {
        sinew__sb_put(b, small, (size_t)k);
        return;
    }
    if (!sinew__sb_reserve(b, (size_t)k))
        return;
    va_start(ap, fmt);
    vsnprintf(b->p + b->n, (size_t)k + 1, fmt, ap);
    va_end(ap);
    b->n += (size_t)k;
}

/* Append the other buffer's text (and record its failure). */
void sinew__sb_append(sinew__sbuf *b, const sinew__sbuf *o)
{
    if (o->err && !b->err)
        b->err = o->err;
    if (o->n)
        sinew__sb_put(b, o->p, o->n);
}

/* HTML text: markup characters as entities; file names are bytes, so a byte outside
 * valid UTF-8 is written as the character of its Latin-1 reading (&#xXX;, as in the JSON
 * files) and a control byte other than tab and newline as U+FFFD: no raw bytes. */
void sinew__sb_esc(sinew__sbuf *b, const char *s)
{
    if (!s)
        return;
    size_t n = strlen(s);
    for (const char *p = s; *p; p++) {
        unsigned char c = (unsigned char)*p;
        size_t l = sinew_utf8_len((const unsigned char *)p, n - (size_t)(p - s));
        if (l == 0) {
            sinew__sb_printf(b, "&#x%02X;", c);
            continue;
        }
        if (l > 1) {
            sinew__sb_put(b, p, l);
            p += l - 1;
            continue;
        }
        if ((c < 0x20 && c != '\t' && c != '\n') || c == 0x7f) {
            sinew__sb_puts(b, "&#xFFFD;");
            continue;
        }
        switch (*p) {
        case '&':
            sinew__sb_puts(b, "&amp;");
            break;
        case '<':
            sinew__sb_puts(b, "&lt;");
            break;
        case '>':
            sinew__sb_puts(b, "&gt;");
            break;
        case '"':
            sinew__sb_puts(b, "&quot;");
            break;
        case '\'':
            sinew__sb_puts(b, "&#39;");
            break;
        default:
            sinew__sb_put(b, p, 1);
        }
    }
}

void sinew__sb_base64(sinew__sbuf *b, const unsigned char *d, size_t n)
{
    static const char tab[] = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    if (!sinew__sb_reserve(b, (n + 2) / 3 * 4))
        return;
    char *o = b->p + b->n;
    size_t i = 0;
    for (; i + 2 < n; i += 3) {
        unsigned v = (unsigned)d[i] << 16 | (unsigned)d[i + 1] << 8 | d[i + 2];
        *o++ = tab[v >> 18 & 63], *o++ = tab[v >> 12 & 63], *o++ = tab[v >> 6 & 63],
        *o++ = tab[v & 63];
    }
    if (i < n) {
        unsigned v = (unsigned)d[i] << 16 | (i + 1 < n ? (unsigned)d[i + 1] << 8 : 0u);
        *o++ = tab[v >> 18 & 63];
        *o++ = tab[v >> 12 & 63];
        *o++ = i + 1 < n ? tab[v >> 6 & 63] : '=';
        *o++ = '=';
    }
    b->n = (size_t)(o - b->p);
    b->p[b->n] = 0;
}

/* A number for the page: "—" for NaN. */
void sinew__sb_num(sinew__sbuf *b, double v, const char *fmt)
{
    if (isfinite(v))
        sinew__sb_printf(b, fmt, v);
    else
        sinew__sb_puts(b, "&mdash;");
}
