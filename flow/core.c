/* SPDX-License-Identifier: MIT */
/* Context, status strings, images and atomic output files.
 *
 * The context replaces process-wide state: every allocation goes through its
 * allocator hooks (so tests can make the Nth allocation fail), every limit is read
 * from it, and the last error's detail message lives in it. Images own their pixel
 * buffer together with a copy of the allocator hooks that made it, so they can be
 * freed without the context. */
#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <fcntl.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "flow/core.h"
#include "flow/internal/base.h"

struct sinew_ctx {
    sinew_allocator alloc;
    int64_t max_pixels;
    int threads;
    const volatile sig_atomic_t *cancel;
    /* Temporary names of outputs being written, for sinew_ctx_remove_temporaries from a
     * signal handler: a slot's path is written while tmp_live is 0, then tmp_live set;
     * cleared before the name is renamed or freed. */
    volatile sig_atomic_t tmp_live[SINEW_CTX_TRACKED_TEMPORARIES];
    char tmp_path[SINEW_CTX_TRACKED_TEMPORARIES][SINEW__TMP_PATH_MAX];
    char message[SINEW_MESSAGE_MAX];
};

static void *default_alloc(void *ud, size_t n)
{
    (void)ud;
    void *p = NULL;
    if (n == 0)
        n = 1;
    if (posix_memalign(&p, 64, n) != 0)
        return NULL;
    return p;
}

static void default_free(void *ud, void *p)
{
    (void)ud;
    free(p);
}

const char *sinew_strerror(int status)
{
    switch (status) {
    case SINEW_OK:
        return "success";
    case SINEW_EINVAL:
        return "invalid argument";
    case SINEW_ENOMEM:
        return "out of memory";
    case SINEW_EOVERFLOW:
        return "size overflow";
    case SINEW_ELIMIT:
        return "limit exceeded";
    case SINEW_ESIZE:
        return "sizes do not match";
    case SINEW_EIO:
        return "input/output error";
    case SINEW_EFORMAT:
        return "malformed file";
    case SINEW_EUNSUPPORTED:
        return "unsupported";
    case SINEW_ECONFIG:
        return "bad configuration";
    case SINEW_EVALUE:
        return "invalid value";
    case SINEW_EINTERRUPTED:
        return "interrupted";
    case SINEW_EINTERNAL:
        return "internal error";
    default:
        return "unknown status";
    }
}

sinew_ctx *sinew_ctx_new_with(const sinew_allocator *a)
{
    sinew_allocator al = {default_alloc, default_free, NULL};
    if (a && a->alloc && a->free)
        al = *a;
    sinew_ctx *ctx = al.alloc(al.ud, sizeof *ctx);
    if (!ctx)
        return NULL;
    memset(ctx, 0, sizeof *ctx);
    ctx->alloc = al;
    ctx->max_pixels = SINEW_DEFAULT_MAX_PIXELS;
    ctx->threads = 0;
    return ctx;
}

sinew_ctx *sinew_ctx_new(void)
{
    return sinew_ctx_new_with(NULL);
}

void sinew_ctx_free(sinew_ctx *ctx)
{
    if (!ctx)
        return;
    sinew_allocator al = ctx->alloc;
    al.free(al.ud, ctx);
}

const char *sinew_ctx_message(const sinew_ctx *ctx)
{
    return ctx ? ctx->message : "";
}

void sinew_ctx_clear(sinew_ctx *ctx)
{
    if (ctx)
        ctx->message[0] = '\0';
}

int sinew_ctx_set_max_pixels(sinew_ctx *ctx, int64_t max_pixels)
{
    if (!ctx)
        return SINEW_EINVAL;
    if (max_pixels < 1)
        return sinew__fail(ctx, SINEW_EINVAL, "pixel limit must be at least 1");
    ctx->max_pixels = max_pixels;
    return SINEW_OK;
}

int64_t sinew_ctx_max_pixels(const sinew_ctx *ctx)
{
    return ctx ? ctx->max_pixels : SINEW_DEFAULT_MAX_PIXELS;
}

int sinew_ctx_set_threads(sinew_ctx *ctx, int threads)
{
    if (!ctx)
        return SINEW_EINVAL;
    if (threads < 0 || threads > 4096)
        return sinew__fail(ctx, SINEW_EINVAL, "thread count %d out of range 0..4096", threads);
    ctx->threads = threads;
    return SINEW_OK;
}

int sinew_ctx_threads(const sinew_ctx *ctx)
{
    return ctx ? ctx->threads : 0;
}

int sinew_ctx_set_cancel(sinew_ctx *ctx, const volatile sig_atomic_t *flag)
{
    if (!ctx)
        return SINEW_EINVAL;
    ctx->cancel = flag;
    return SINEW_OK;
}

int sinew_ctx_cancelled(const sinew_ctx *ctx)
{
    return ctx && ctx->cancel && *ctx->cancel;
}

int sinew__check_cancel(sinew_ctx *ctx, const char *what)
{
    if (!sinew_ctx_cancelled(ctx))
        return SINEW_OK;
    return sinew__fail(ctx, SINEW_EINTERRUPTED, "%s: interrupted", what);
}

int sinew_ctx_remove_temporaries(sinew_ctx *ctx)
{
    int n = 0;
    if (!ctx)
        return 0;
    for (int k = 0; k < SINEW_CTX_TRACKED_TEMPORARIES; k++)
        if (ctx->tmp_live[k] && unlink(ctx->tmp_path[k]) == 0)
            n++;
    return n;
}

/* Track / untrack an open temporary output (slot index or -1 when every slot is busy or
 * the name is too long: the file is then just not removed by a signal handler). */
static int tmp_track(sinew_ctx *ctx, const char *tmp)
{
    size_t len = strlen(tmp);
    if (len >= SINEW__TMP_PATH_MAX)
        return -1;
    for (int k = 0; k < SINEW_CTX_TRACKED_TEMPORARIES; k++)
        if (!ctx->tmp_live[k]) {
            memcpy(ctx->tmp_path[k], tmp, len + 1);
            ctx->tmp_live[k] = 1;
            return k;
        }
    return -1;
}

static void tmp_untrack(sinew_ctx *ctx, int slot)
{
    if (slot >= 0)
        ctx->tmp_live[slot] = 0;
}

char *sinew_text_fit(char *dst, size_t n, const char *src)
{
    static const char mid[] = " ... ";
    size_t len = strlen(src), m = sizeof mid - 1;
    if (len < n || n < 16) {
        if (n == 0)
            return dst;
        len = len < n ? len : n - 1;
        memmove(dst, src, len);
        dst[len] = '\0';
        return dst;
    }
    /* keep a third at the start (the file name) and the rest at the end (the cause) */
    size_t room = n - 1 - m, head = room / 3, tail = room - head;
    while (head > 0 && ((unsigned char)src[head] & 0xC0) == 0x80)
        head--; /* do not split a UTF-8 character */
    size_t t0 = len - tail;
    while (t0 < len && ((unsigned char)src[t0] & 0xC0) == 0x80)
        t0++;
    memmove(dst, src, head);
    memcpy(dst + head, mid, m);
    memmove(dst + head + m, src + t0, len - t0 + 1);
    return dst;
}

int sinew__fail(sinew_ctx *ctx, int status, const char *fmt, ...)
{
    if (ctx) {
        /* two paths of SINEW__PATH_MAX and a cause fit here; then fit into the message */
        char full[3 * SINEW_MESSAGE_MAX + 2 * 4096];
        va_list ap;
        va_start(ap, fmt);
        vsnprintf(full, sizeof full, fmt, ap);
        va_end(ap);
        sinew_text_fit(ctx->message, sizeof ctx->message, full);
    }
    return status;
}

void *sinew__alloc(sinew_ctx *ctx, size_t n)
{
    void *p = ctx->alloc.alloc(ctx->alloc.ud, n ? n : 1);
    if (!p)
        sinew__fail(ctx, SINEW_ENOMEM, "out of memory allocating %zu bytes", n);
    return p;
}

void *sinew__alloc_array(sinew_ctx *ctx, size_t count, size_t size)
{
    size_t n;
    if (sinew__mul_size(count, size, &n)) {
        sinew__fail(ctx, SINEW_EOVERFLOW, "allocation size overflow (%zu x %zu)", count, size);
        return NULL;
    }
    return sinew__alloc(ctx, n);
}

void *sinew__calloc(sinew_ctx *ctx, size_t count, size_t size)
{
    void *p = sinew__alloc_array(ctx, count, size);
    size_t n = count * size; /* no overflow: checked above */
    if (p)
        memset(p, 0, n > 0 ? n : 1);
    return p;
}

char *sinew__strdup(sinew_ctx *ctx, const char *s)
{
    if (!s)
        return NULL;
    size_t n = strlen(s) + 1;
    char *d = sinew__alloc(ctx, n);
    if (d)
        memcpy(d, s, n);
    return d;
}

void sinew__free(sinew_ctx *ctx, void *p)
{
    if (p)
        ctx->alloc.free(ctx->alloc.ud, p);
}

void *sinew_ctx_alloc(sinew_ctx *ctx, size_t n)
{
    if (!ctx || n == 0)
        return NULL;
    return sinew__alloc(ctx, n);
}

void sinew_ctx_dealloc(sinew_ctx *ctx, void *p)
{
    if (ctx)
        sinew__free(ctx, p);
}

int sinew__check_dims(sinew_ctx *ctx, const char *what, int64_t width, int64_t height)
{
    if (width < 1 || height < 1)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: invalid dimensions %lldx%lld", what,
                           (long long)width, (long long)height);
    if (width > ctx->max_pixels || height > ctx->max_pixels || width > ctx->max_pixels / height)
        return sinew__fail(ctx, SINEW_ELIMIT, "%s: %lldx%lld exceeds the limit of %lld pixels",
                           what, (long long)width, (long long)height, (long long)ctx->max_pixels);
    return SINEW_OK;
}

/* ---- images ---- */

size_t sinew_type_size(sinew_type t)
{
    switch (t) {
    case SINEW_U8:
        return 1;
    case SINEW_U16:
        return 2;
    case SINEW_F32:
        return 4;
    }
    return 0;
}

int sinew_image_alloc(sinew_ctx *ctx, sinew_image *img, int width, int height, int channels,
                      sinew_type type)
{
    if (!ctx || !img)
        return SINEW_EINVAL;
    memset(img, 0, sizeof *img);
    size_t es = sinew_type_size(type);
    if (es == 0 || channels < 1 || channels > 4)
        return sinew__fail(ctx, SINEW_EINVAL, "image: bad type or channel count %d", channels);
    int rc = sinew__check_dims(ctx, "image", width, height);
    if (rc)
        return rc;
    size_t row, stride, total;
    if (sinew__mul_size((size_t)width, (size_t)channels * es, &row) ||
        sinew__add_size(row, 63, &stride))
        return sinew__fail(ctx, SINEW_EOVERFLOW, "image: %dx%d row size overflows", width, height);
    stride &= ~(size_t)63;
    if (sinew__mul_size(stride, (size_t)height, &total))
        return sinew__fail(ctx, SINEW_EOVERFLOW, "image: %dx%d size overflows", width, height);
    unsigned char *p = sinew__alloc(ctx, total);
    if (!p)
        return SINEW_ENOMEM;
    memset(p, 0, total);
    img->width = width;
    img->height = height;
    img->channels = channels;
    img->type = type;
    img->stride = stride;
    img->data = p;
    img->owner_ = ctx->alloc;
    return SINEW_OK;
}

void sinew_image_free(sinew_image *img)
{
    if (!img)
        return;
    if (img->data && img->owner_.free)
        img->owner_.free(img->owner_.ud, img->data);
    memset(img, 0, sizeof *img);
}

int sinew_image_copy(sinew_ctx *ctx, sinew_image *dst, const sinew_image *src)
{
    if (!ctx || !dst || !src || !src->data)
        return SINEW_EINVAL;
    int rc = sinew_image_alloc(ctx, dst, src->width, src->height, src->channels, src->type);
    if (rc)
        return rc;
    size_t row = (size_t)src->width * (size_t)src->channels * sinew_type_size(src->type);
    for (int y = 0; y < src->height; y++)
        memcpy(sinew_image_row(dst, y), sinew_image_row(src, y), row);
    return SINEW_OK;
}

int sinew_image_same_shape(const sinew_image *a, const sinew_image *b)
{
    return a && b && a->width == b->width && a->height == b->height && a->channels == b->channels &&
           a->type == b->type;
}

/* ---- atomic output ---- */

/* The stream's buffer follows the handle in the same block (it must outlive fclose):
 * whole-plane outputs are megabytes, and the default 4 KiB buffer made 600 write calls
 * for one 640x480 .flo file. */
#define OUTFILE_BUFFER ((size_t)128 << 10)

struct sinew_outfile {
    FILE *fp;
    sinew_ctx *ctx;
    int slot; /* tmp_track slot or -1 */
    char *path;
    char *tmp;
};

int sinew_outfile_open(sinew_ctx *ctx, sinew_outfile **out, const char *path)
{
    if (!ctx || !out || !path || !*path)
        return SINEW_EINVAL;
    *out = NULL;
    struct stat st;
    int exists = stat(path, &st) == 0;
    if (exists && S_ISDIR(st.st_mode))
        return sinew__fail(ctx, SINEW_EIO, "%s: is a directory", path);
    /* The rename would replace a device, FIFO or socket node (e.g. /dev/stdout as root)
     * with a regular file: refuse instead. */
    if (exists && !S_ISREG(st.st_mode))
        return sinew__fail(ctx, SINEW_EIO,
                           "%s: not a regular file (outputs are replaced atomically; write to "
                           "a file)",
                           path);
    size_t n = strlen(path);
    sinew_outfile *f = sinew__alloc(ctx, sizeof *f + OUTFILE_BUFFER);
    if (!f)
        return SINEW_ENOMEM;
    memset(f, 0, sizeof *f);
    f->ctx = ctx;
    f->path = sinew__alloc(ctx, n + 1);
    f->tmp = sinew__alloc(ctx, n + 32);
    if (!f->path || !f->tmp) {
        sinew__free(ctx, f->path);
        sinew__free(ctx, f->tmp);
        sinew__free(ctx, f);
        return SINEW_ENOMEM;
    }
    memcpy(f->path, path, n + 1);
    /* Temporary name in the same folder: dir/.name.tmp-HHHHHH (6 hex digits) */
    const char *slash = strrchr(path, '/');
    size_t dirlen = slash ? (size_t)(slash - path + 1) : 0;
    /* Created with O_EXCL and mode 0666, so the process umask applies as for any new file
     * (mkstemp would force 0600, and changing the umask to undo that is not thread-safe).
     * The suffix mixes the time, the process id and this handle's address; a clash just
     * tries the next one. */
    int fd = -1, e = EEXIST;
    struct timespec ts;
    clock_gettime(CLOCK_REALTIME, &ts);
    uint64_t seed = (uint64_t)ts.tv_nsec * 0x9E3779B97F4A7C15u ^ (uint64_t)ts.tv_sec ^
                    ((uint64_t)getpid() << 32) ^ (uint64_t)(uintptr_t)f;
    for (int attempt = 0; attempt < 100 && fd < 0 && e == EEXIST; attempt++) {
        seed = seed * 6364136223846793005u + 1442695040888963407u;
        snprintf(f->tmp, n + 32, "%.*s.%s" SINEW__TMP_TAG "%06llx", (int)dirlen, path,
                 path + dirlen, (unsigned long long)(seed >> 40));
        fd = open(f->tmp, O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0666);
        e = fd < 0 ? errno : 0;
    }
    if (fd < 0) {
        sinew__free(ctx, f->path);
        sinew__free(ctx, f->tmp);
        sinew__free(ctx, f);
        return sinew__fail(ctx, SINEW_EIO, "%s: cannot create: %s", path, strerror(e));
    }
    f->fp = fdopen(fd, "wb");
    if (!f->fp) {
        e = errno;
        close(fd);
        unlink(f->tmp);
        sinew__free(ctx, f->path);
        sinew__free(ctx, f->tmp);
        sinew__free(ctx, f);
        return sinew__fail(ctx, SINEW_EIO, "%s: cannot open: %s", path, strerror(e));
    }
    setvbuf(f->fp, (char *)(f + 1), _IOFBF, OUTFILE_BUFFER);
    f->slot = tmp_track(ctx, f->tmp);
    *out = f;
    return SINEW_OK;
}

void *sinew_outfile_stream(sinew_outfile *f)
{
    return f ? f->fp : NULL;
}

static void outfile_release(sinew_outfile *f)
{
    sinew_ctx *ctx = f->ctx;
    tmp_untrack(ctx, f->slot);
    sinew__free(ctx, f->path);
    sinew__free(ctx, f->tmp);
    sinew__free(ctx, f);
}

void sinew_outfile_abort(sinew_outfile *f)
{
    if (!f)
        return;
    if (f->fp)
        fclose(f->fp);
    unlink(f->tmp);
    outfile_release(f);
}

int sinew_outfile_commit(sinew_ctx *ctx, sinew_outfile *f)
{
    if (!f)
        return SINEW_EINVAL;
    int err = 0;
    if (ferror(f->fp) || fflush(f->fp) != 0)
        err = errno ? errno : EIO;
    if (!err && fsync(fileno(f->fp)) != 0 && errno != EINVAL)
        err = errno;
    if (fclose(f->fp) != 0 && !err)
        err = errno ? errno : EIO;
    f->fp = NULL;
    tmp_untrack(f->ctx, f->slot);
    f->slot = -1;
    if (!err && rename(f->tmp, f->path) != 0)
        err = errno;
    if (err) {
        unlink(f->tmp);
        int rc = sinew__fail(ctx, SINEW_EIO, "%s: cannot write: %s", f->path, strerror(err));
        outfile_release(f);
        return rc;
    }
    outfile_release(f);
    return SINEW_OK;
}

int sinew_write_file(sinew_ctx *ctx, const char *path, const void *buf, size_t len)
{
    sinew_outfile *f;
    int rc = sinew_outfile_open(ctx, &f, path);
    if (rc)
        return rc;
    if (len && fwrite(buf, 1, len, f->fp) != len) {
        int e = errno;
        sinew_outfile_abort(f);
        return sinew__fail(ctx, SINEW_EIO, "%s: cannot write: %s", path, strerror(e ? e : EIO));
    }
    return sinew_outfile_commit(ctx, f);
}

int sinew__open_regular(sinew_ctx *ctx, const char *path, FILE **fp)
{
    *fp = NULL;
    if (!path || !*path)
        return sinew__fail(ctx, SINEW_EINVAL, "empty file name");
    /* O_NONBLOCK: opening a FIFO for reading would otherwise wait for a writer. */
    int fd = open(path, O_RDONLY | O_NONBLOCK | O_CLOEXEC);
    if (fd < 0)
        return sinew__fail(ctx, SINEW_EIO, "%s: cannot open: %s", path, strerror(errno));
    struct stat st;
    const char *why = NULL;
    if (fstat(fd, &st) != 0)
        why = "cannot stat";
    else if (S_ISDIR(st.st_mode))
        why = "is a directory";
    else if (!S_ISREG(st.st_mode))
        why = "not a regular file (a device, FIFO or socket)";
    else {
        int fl = fcntl(fd, F_GETFL);
        if (fl == -1 || fcntl(fd, F_SETFL, fl & ~O_NONBLOCK) == -1)
            why = "cannot open";
    }
    FILE *f = why ? NULL : fdopen(fd, "rb");
    if (!f) {
        close(fd);
        return sinew__fail(ctx, SINEW_EIO, "%s: %s", path, why ? why : "cannot open");
    }
    *fp = f;
    return SINEW_OK;
}

int sinew_read_file(sinew_ctx *ctx, unsigned char **buf, size_t *len, const char *path,
                    size_t max_bytes)
{
    if (!ctx || !path || !buf || !len)
        return SINEW_EINVAL;
    *buf = NULL;
    *len = 0;
    FILE *fp;
    int rc = sinew__open_regular(ctx, path, &fp);
    if (rc)
        return rc;
    struct stat st;
    if (fstat(fileno(fp), &st) != 0) {
        fclose(fp);
        return sinew__fail(ctx, SINEW_EIO, "%s: cannot stat: %s", path, strerror(errno));
    }
    if ((uint64_t)st.st_size > (uint64_t)max_bytes) {
        fclose(fp);
        return sinew__fail(ctx, SINEW_ELIMIT, "%s: file of %lld bytes exceeds the limit of %zu",
                           path, (long long)st.st_size, max_bytes);
    }
    size_t cap = (size_t)st.st_size;
    unsigned char *p = sinew__alloc(ctx, cap + 1);
    if (!p) {
        fclose(fp);
        return SINEW_ENOMEM;
    }
    size_t got = fread(p, 1, cap, fp);
    int bad = ferror(fp);
    fclose(fp);
    if (bad) {
        sinew__free(ctx, p);
        return sinew__fail(ctx, SINEW_EIO, "%s: read error", path);
    }
    p[got] = 0;
    *buf = p;
    *len = got;
    return SINEW_OK;
}

/* ---- text ---- */

size_t sinew_utf8_len(const unsigned char *s, size_t n)
{
    if (!s || n == 0)
        return 0;
    unsigned c = s[0];
    if (c < 0x80)
        return 1;
    size_t len;
    unsigned lo = 0x80, hi = 0xBF; /* allowed range of the second byte */
    if (c >= 0xC2 && c <= 0xDF)
        len = 2;
    else if (c >= 0xE0 && c <= 0xEF) {
        len = 3;
        if (c == 0xE0)
            lo = 0xA0; /* no overlong forms */
        else if (c == 0xED)
            hi = 0x9F; /* no surrogates */
    } else if (c >= 0xF0 && c <= 0xF4) {
        len = 4;
        if (c == 0xF0)
            lo = 0x90;
        else if (c == 0xF4)
            hi = 0x8F; /* at most U+10FFFF */
    } else
        return 0;
    if (n < len || s[1] < lo || s[1] > hi)
        return 0;
    for (size_t k = 2; k < len; k++)
        if ((s[k] & 0xC0) != 0x80)
            return 0;
    return len;
}

int sinew_json_utf8(sinew_ctx *ctx, char **out, size_t *outn, const char *text, size_t n)
{
    if (!ctx || (!text && n) || !out)
        return SINEW_EINVAL;
    *out = NULL;
    const unsigned char *s = (const unsigned char *)text;
    size_t bad = 0;
    for (size_t i = 0; i < n;) {
        size_t l = sinew_utf8_len(s + i, n - i);
        bad += l == 0;
        i += l ? l : 1;
    }
    size_t cap;
    if (sinew__mul_size(bad, 5, &cap) || sinew__add_size(cap, n + 1, &cap))
        return sinew__fail(ctx, SINEW_EOVERFLOW, "JSON text too long");
    char *d = sinew__alloc(ctx, cap);
    if (!d)
        return SINEW_ENOMEM;
    size_t o = 0;
    static const char hex[] = "0123456789abcdef";
    for (size_t i = 0; i < n;) {
        size_t l = sinew_utf8_len(s + i, n - i);
        if (l) {
            memcpy(d + o, s + i, l);
            o += l;
            i += l;
        } else {
            memcpy(d + o, "\\u00", 4);
            d[o + 4] = hex[s[i] >> 4];
            d[o + 5] = hex[s[i] & 15];
            o += 6;
            i++;
        }
    }
    d[o] = '\0';
    *out = d;
    if (outn)
        *outn = o;
    return SINEW_OK;
}

int sinew_write_json_text(sinew_ctx *ctx, const char *path, const char *text)
{
    if (!ctx || !path || !text)
        return SINEW_EINVAL;
    char *u;
    size_t n;
    int rc = sinew_json_utf8(ctx, &u, &n, text, strlen(text));
    if (rc)
        return rc;
    u[n] = '\n'; /* the terminator becomes the final newline */
    rc = sinew_write_file(ctx, path, u, n + 1);
    sinew_ctx_dealloc(ctx, u);
    return rc;
}
