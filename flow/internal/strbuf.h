/* SPDX-License-Identifier: MIT */
/* A growable string buffer for pages built in memory (flow/strbuf.c), with HTML
 * escaping and base64. Allocation goes through the context; the first failure is
 * remembered in `err` and every later write is ignored, so a page is built without
 * checking each call and the status is read once at the end. */
#ifndef SINEW_INTERNAL_STRBUF_H
#define SINEW_INTERNAL_STRBUF_H

#include <stddef.h>

#include "flow/internal/base.h"

typedef struct sinew__sbuf {
    sinew_ctx *ctx;
    char *p; /* NUL-terminated text (NULL while empty) */
    size_t n, cap;
    int err; /* first failure status; later writes are ignored */
} sinew__sbuf;

void sinew__sb_init(sinew__sbuf *b, sinew_ctx *ctx);
void sinew__sb_free(sinew__sbuf *b);
/* Room for `add` more bytes plus the terminator: 1, or 0 after a failure. */
int sinew__sb_reserve(sinew__sbuf *b, size_t add);
void sinew__sb_put(sinew__sbuf *b, const char *s, size_t len);
void sinew__sb_puts(sinew__sbuf *b, const char *s);
void sinew__sb_printf(sinew__sbuf *b, const char *fmt, ...) SINEW__PRINTF(2, 3);
/* Append the other buffer's text (and take over its failure). */
void sinew__sb_append(sinew__sbuf *b, const sinew__sbuf *o);
/* s with & < > " ' escaped for HTML text and attribute values; NULL writes nothing. */
void sinew__sb_esc(sinew__sbuf *b, const char *s);
/* Standard base64 (RFC 4648, with padding) of n bytes. */
void sinew__sb_base64(sinew__sbuf *b, const unsigned char *d, size_t n);
/* printf of one finite number, "&mdash;" for NaN and infinities. */
void sinew__sb_num(sinew__sbuf *b, double v, const char *fmt);

#endif
