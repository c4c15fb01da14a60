/* SPDX-License-Identifier: MIT */
/* NumPy .npy arrays (format specification, NEP 1; versions 1.0, 2.0 and 3.0).
 *
 * File layout: the magic "\x93NUMPY", major and minor version bytes, the header length
 * (uint16 little-endian for 1.0, uint32 for 2.0/3.0), then an ASCII (3.0: UTF-8) Python
 * dict literal {'descr': ..., 'fortran_order': ..., 'shape': (...), } padded with
 * spaces and ended by '\n', then the raw array data.
 *
 * The reader parses that literal with a small strict parser (three keys, string,
 * True/False, a tuple of non-negative integers), accepts float16/32/64 in either byte
 * order, C order only, and shapes H x W (1 channel) or H x W x C (C <= 4). Dimensions
 * are checked against the pixel limit and the data size is overflow-checked before
 * anything is allocated. The writer emits version 1.0, little-endian float32 or
 * float16, with the header padded so the data starts at a multiple of 64 bytes. */
#include <stdio.h>
#include <string.h>

#include "flow/internal/io.h"
#include "flow/io.h"

#define NPY_MAX_HEADER 65536
#define NPY_MAX_DIMS 8

typedef struct npy_header {
    char descr[16];
    int fortran;
    int ndim;
    int64_t shape[NPY_MAX_DIMS];
    int have_descr, have_fortran, have_shape;
} npy_header;

typedef struct cursor {
    const char *s;
    size_t i, n;
} cursor;

static void skip_ws(cursor *c)
{
    while (c->i < c->n &&
           (c->s[c->i] == ' ' || c->s[c->i] == '\t' || c->s[c->i] == '\n' || c->s[c->i] == '\r'))
        c->i++;
}

static int peek(cursor *c)
{
    skip_ws(c);
    return c->i < c->n ? (unsigned char)c->s[c->i] : -1;
}

static int expect(cursor *c, char ch)
{
    if (peek(c) != (unsigned char)ch)
        return -1;
    c->i++;
    return 0;
}

/* A quoted string without escapes into buf (truncation is an error). */
static int parse_str(cursor *c, char *buf, size_t n)
{
    int q = peek(c);
    if (q != '\'' && q != '"')
        return -1;
    c->i++;
    size_t len = 0;
    while (c->i < c->n && c->s[c->i] != q) {
        if (c->s[c->i] == '\\' || len + 1 >= n)
            return -1;
        buf[len++] = c->s[c->i++];
    }
    if (c->i >= c->n)
        return -1;
    c->i++;
    buf[len] = '\0';
    return 0;
}

static int parse_word(cursor *c, const char *w)
{
    size_t n = strlen(w);
    skip_ws(c);
    if (c->n - c->i < n || memcmp(c->s + c->i, w, n) != 0)
        return -1;
    c->i += n;
    return 0;
}

static int parse_shape(cursor *c, npy_header *h)
{
    if (expect(c, '('))
        return -1;
    h->ndim = 0;
    for (;;) {
        int ch = peek(c);
        if (ch == ')') {
            c->i++;
            return 0;
        }
        if (ch < '0' || ch > '9' || h->ndim >= NPY_MAX_DIMS)
            return -1;
        int64_t v = 0;
        int digits = 0;
        while (c->i < c->n && c->s[c->i] >= '0' && c->s[c->i] <= '9') {
            if (++digits > 18)
                return -1;
            v = v * 10 + (c->s[c->i++] - '0');
        }
        if (c->i < c->n && c->s[c->i] == 'L') /* written by Python 2 */
            c->i++;
        h->shape[h->ndim++] = v;
        ch = peek(c);
        if (ch == ',')
            c->i++;
        else if (ch != ')')
            return -1;
    }
}

static int parse_dict(const char *s, size_t n, npy_header *h)
{
    cursor c = {s, 0, n};
    memset(h, 0, sizeof *h);
    if (expect(&c, '{'))
        return -1;
    for (;;) {
        if (peek(&c) == '}') {
            c.i++;
            break;
        }
        char key[32];
        if (parse_str(&c, key, sizeof key) || expect(&c, ':'))
            return -1;
        if (!strcmp(key, "descr") && !h->have_descr) {
            if (parse_str(&c, h->descr, sizeof h->descr))
                return -1;
            h->have_descr = 1;
        } else if (!strcmp(key, "fortran_order") && !h->have_fortran) {
            if (!parse_word(&c, "True"))
                h->fortran = 1;
            else if (parse_word(&c, "False"))
                return -1;
            h->have_fortran = 1;
        } else if (!strcmp(key, "shape") && !h->have_shape) {
            if (parse_shape(&c, h))
                return -1;
            h->have_shape = 1;
        } else {
            return -1;
        }
        int ch = peek(&c);
        if (ch == ',')
            c.i++;
        else if (ch != '}')
            return -1;
    }
    if (peek(&c) != -1 || !h->have_descr || !h->have_fortran || !h->have_shape)
        return -1;
    return 0;
}

/* Read and validate the header; leaves fp at the first data byte. */
static int read_header(sinew_ctx *ctx, const char *path, FILE *fp, npy_header *h)
{
    unsigned char pre[12];
    int rc = sinew__io_read(ctx, path, fp, pre, 8, "NPY header");
    if (rc)
        return rc;
    if (memcmp(pre, "\x93NUMPY", 6) != 0)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: not a .npy file (bad magic)", path);
    int major = pre[6];
    size_t hlen;
    if (major == 1) {
        rc = sinew__io_read(ctx, path, fp, pre + 8, 2, "NPY header");
        hlen = (size_t)pre[8] | (size_t)pre[9] << 8;
    } else if (major == 2 || major == 3) {
        rc = sinew__io_read(ctx, path, fp, pre + 8, 4, "NPY header");
        hlen = sinew__ld32(pre + 8, 0);
    } else {
        return sinew__fail(ctx, SINEW_EUNSUPPORTED, "%s: .npy format version %d.%d not supported",
                           path, major, pre[7]);
    }
    if (rc)
        return rc;
    if (hlen > NPY_MAX_HEADER)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: .npy header of %zu bytes is too long", path,
                           hlen);
    char *text = sinew__alloc(ctx, hlen + 1);
    if (!text)
        return SINEW_ENOMEM;
    rc = sinew__io_read(ctx, path, fp, text, hlen, "NPY header");
    if (!rc && parse_dict(text, hlen, h))
        rc = sinew__fail(ctx, SINEW_EFORMAT, "%s: malformed .npy header", path);
    sinew__free(ctx, text);
    return rc;
}

/* Element size and byte order of a float descr; 0 if unsupported. */
static size_t float_descr(const char *d, int *big)
{
    if ((d[0] != '<' && d[0] != '>') || d[1] != 'f' || d[3] != '\0')
        return 0;
    *big = d[0] == '>';
    return d[2] == '2' ? 2 : d[2] == '4' ? 4 : d[2] == '8' ? 8 : 0;
}

/* Open a float array in C order and read its header: *fp at the first data byte, the
 * element size and byte order; on failure nothing stays open. */
static int open_float_npy(sinew_ctx *ctx, const char *path, FILE **fp, npy_header *h, size_t *elem,
                          int *big)
{
    memset(h, 0, sizeof *h);
    int rc = sinew__open_regular(ctx, path, fp);
    if (rc)
        return rc;
    rc = read_header(ctx, path, *fp, h);
    if (!rc && !(*elem = float_descr(h->descr, big)))
        rc = sinew__fail(ctx, SINEW_EUNSUPPORTED,
                         "%s: .npy dtype '%s' not supported (need float16, float32 or float64)",
                         path, h->descr);
    if (!rc && h->fortran)
        rc = sinew__fail(ctx, SINEW_EUNSUPPORTED, "%s: Fortran-order .npy not supported", path);
    if (rc) {
        fclose(*fp);
        *fp = NULL;
    }
    return rc;
}

int sinew__npy_read(sinew_ctx *ctx, const char *path, sinew_image *out, int flags)
{
    memset(out, 0, sizeof *out);
    int flow = flags & SINEW__READ_FLOW;
    FILE *fp;
    npy_header h;
    int big = 0;
    size_t elem = 0;
    int rc = open_float_npy(ctx, path, &fp, &h, &elem, &big);
    if (rc)
        return rc;
    int64_t c = h.ndim == 3 ? h.shape[2] : 1;
    if (!rc && (h.ndim < 2 || h.ndim > 3 || c < 1 || c > 4 || (flow && (h.ndim != 3 || c != 2))))
        rc = sinew__fail(ctx, flow ? SINEW_EFORMAT : SINEW_EUNSUPPORTED,
                         "%s: .npy array with %d dimensions%s is not %s", path, h.ndim,
                         h.ndim == 3 ? " of that channel count" : "",
                         flow ? "a flow field (need H x W x 2)" : "an image (need H x W [x C<=4])");
    if (!rc)
        rc = sinew__check_dims(ctx, path, h.shape[1], h.shape[0]);
    size_t rowbytes = 0;
    if (!rc)
        rc = sinew__io_bytes(ctx, path, h.shape[1], 1, c, elem, &rowbytes);
    if (!rc)
        rc = sinew__io_check_remaining(ctx, path, fp, (size_t)h.shape[0], rowbytes, "NPY data");
    if (!rc && (flags & SINEW__READ_HEADER)) {
        fclose(fp);
        out->width = (int)h.shape[1];
        out->height = (int)h.shape[0];
        out->channels = (int)c;
        out->type = SINEW_F32;
        return SINEW_OK;
    }
    if (!rc)
        rc = sinew_image_alloc(ctx, out, (int)h.shape[1], (int)h.shape[0], (int)c, SINEW_F32);
    unsigned char *scratch = rc ? NULL : sinew__alloc(ctx, rowbytes);
    if (!rc && !scratch)
        rc = SINEW_ENOMEM;
    for (int y = 0; !rc && y < out->height; y++) {
        rc = sinew__io_read(ctx, path, fp, scratch, rowbytes, "NPY data");
        if (!rc)
            sinew__io_decode_floats(sinew_image_row_f32(out, y), scratch,
                                    (size_t)out->width * (size_t)c, elem, big);
    }
    if (!rc)
        rc = sinew__io_expect_end(ctx, path, fp, "NPY data");
    sinew__free(ctx, scratch);
    fclose(fp);
    if (rc)
        sinew_image_free(out);
    return rc;
}

int sinew_npy_read_image(sinew_ctx *ctx, sinew_image *out, const char *path)
{
    if (out)
        memset(out, 0, sizeof *out);
    if (!ctx || !out || !path)
        return ctx ? sinew__fail(ctx, SINEW_EINVAL, "read .npy: missing argument") : SINEW_EINVAL;
    return sinew__npy_read(ctx, path, out, 0);
}

int sinew_npy_read_table(sinew_ctx *ctx, float **data, size_t *rows, size_t *cols, const char *path,
                         size_t expect_cols)
{
    if (!ctx || !path || !data || !rows || !cols)
        return ctx ? sinew__fail(ctx, SINEW_EINVAL, "read .npy table: missing argument")
                   : SINEW_EINVAL;
    *data = NULL;
    *rows = *cols = 0;
    FILE *fp;
    npy_header h;
    int big = 0;
    size_t elem = 0, rowbytes = 0, n = 0;
    int rc = open_float_npy(ctx, path, &fp, &h, &elem, &big);
    if (rc)
        return rc;
    if (!rc && (h.ndim != 2 || h.shape[1] < 1))
        rc = sinew__fail(ctx, SINEW_EFORMAT, "%s: not a table (need a 2-D N x C array, C >= 1)",
                         path);
    if (!rc && expect_cols && (uint64_t)h.shape[1] != expect_cols)
        rc = sinew__fail(ctx, SINEW_EFORMAT, "%s: table has %lld columns, expected %zu", path,
                         (long long)h.shape[1], expect_cols);
    if (!rc && h.shape[0] > 0)
        rc = sinew__check_dims(ctx, path, h.shape[1], h.shape[0]);
    if (!rc)
        rc = sinew__io_bytes(ctx, path, h.shape[1], 1, 1, elem, &rowbytes);
    if (!rc)
        rc = sinew__io_check_remaining(ctx, path, fp, (size_t)h.shape[0], rowbytes, "NPY data");
    if (!rc && h.shape[0] > 0) {
        n = (size_t)h.shape[0] * (size_t)h.shape[1]; /* within the pixel limit: no overflow */
        *data = sinew__alloc(ctx, n * sizeof **data);
        unsigned char *scratch = *data ? sinew__alloc(ctx, rowbytes) : NULL;
        if (!scratch)
            rc = SINEW_ENOMEM;
        for (int64_t r = 0; !rc && r < h.shape[0]; r++) {
            rc = sinew__io_read(ctx, path, fp, scratch, rowbytes, "NPY data");
            if (!rc)
                sinew__io_decode_floats(*data + (size_t)r * (size_t)h.shape[1], scratch,
                                        (size_t)h.shape[1], elem, big);
        }
        sinew__free(ctx, scratch);
    }
    if (!rc)
        rc = sinew__io_expect_end(ctx, path, fp, "NPY data");
    fclose(fp);
    if (rc) {
        sinew__free(ctx, *data);
        *data = NULL;
        return rc;
    }
    *rows = (size_t)h.shape[0];
    *cols = (size_t)h.shape[1];
    return SINEW_OK;
}

typedef struct npy_rows {
    const unsigned char *base;
    size_t stride, elems, elem;
} npy_rows;

static void npy_row(void *ud, size_t r, unsigned char *out)
{
    const npy_rows *nr = ud;
    const float *row = (const float *)(const void *)(nr->base + r * nr->stride);
    sinew__io_encode_floats(out, row, nr->elems, nr->elem, 0);
}

/* Write a version 1.0 header and nrows rows of row_elems floats each (row r starts at
 * base + r * stride) as '<f4' or '<f2'. */
static int npy_write(sinew_ctx *ctx, const char *path, const size_t *shape, int ndim,
                     const unsigned char *base, size_t stride, size_t nrows, size_t row_elems,
                     int half)
{
    char head[256 + 64];
    memcpy(head, "\x93NUMPY\x01\x00", 8); /* magic, version 1.0; bytes 8-9: length */
    int n = 10 + snprintf(head + 10, 246, "{'descr': '<f%c', 'fortran_order': False, 'shape': (",
                          half ? '2' : '4');
    for (int i = 0; i < ndim; i++)
        n += snprintf(head + n, 256 - (size_t)n, "%s%zu", i ? ", " : "", shape[i]);
    if (ndim == 1)
        n += snprintf(head + n, 256 - (size_t)n, ",");
    n += snprintf(head + n, 256 - (size_t)n, "), }");
    /* pad with spaces and end with '\n' so the data starts at a multiple of 64 */
    size_t total = (size_t)n + 1;
    total += (64 - total % 64) % 64;
    memset(head + n, ' ', total - (size_t)n);
    head[total - 1] = '\n';
    head[8] = (char)((total - 10) & 0xff);
    head[9] = (char)((total - 10) >> 8);
    npy_rows nr = {base, stride, row_elems, half ? 2 : 4};
    size_t rowbytes;
    if (sinew__mul_size(row_elems, nr.elem, &rowbytes))
        return sinew__fail(ctx, SINEW_EOVERFLOW, "%s: data size overflows", path);
    return sinew__io_write_rows(ctx, path, head, total, nrows, rowbytes, npy_row, &nr);
}

int sinew_npy_write_image(sinew_ctx *ctx, const char *path, const sinew_image *img, int half)
{
    if (!ctx || !path || !img || !img->data)
        return ctx ? sinew__fail(ctx, SINEW_EINVAL, "write .npy: missing argument") : SINEW_EINVAL;
    if (img->type != SINEW_F32 || img->channels < 1 || img->channels > 4 || img->width < 1 ||
        img->height < 1)
        return sinew__fail(ctx, SINEW_EINVAL, "%s: .npy writer needs a float image", path);
    size_t shape[3] = {(size_t)img->height, (size_t)img->width, (size_t)img->channels};
    return npy_write(ctx, path, shape, img->channels == 1 ? 2 : 3, img->data, img->stride,
                     (size_t)img->height, (size_t)img->width * (size_t)img->channels, half);
}

int sinew_npy_write_table(sinew_ctx *ctx, const char *path, const float *data, size_t rows,
                          size_t cols)
{
    if (!ctx || !path || (!data && rows && cols))
        return ctx ? sinew__fail(ctx, SINEW_EINVAL, "write .npy: missing argument") : SINEW_EINVAL;
    size_t stride;
    if (sinew__mul_size(cols, sizeof(float), &stride) || (rows && stride > SIZE_MAX / rows))
        return sinew__fail(ctx, SINEW_EOVERFLOW, "%s: table size overflows", path);
    size_t shape[2] = {rows, cols};
    return npy_write(ctx, path, shape, 2, (const unsigned char *)data, stride, rows, cols, 0);
}
