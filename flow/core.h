/* SPDX-License-Identifier: MIT */
/* sinew core: status codes, the per-caller context (allocator, limits, threads,
 * last error message) and the image type every other module uses. */
#ifndef SINEW_CORE_H
#define SINEW_CORE_H

#include <signal.h>
#include <stddef.h>
#include <stdint.h>

#ifdef __cplusplus
extern "C" {
#endif

#define SINEW_VERSION_MAJOR 0
#define SINEW_VERSION_MINOR 1
#define SINEW_VERSION_PATCH 0
#define SINEW_VERSION_STRING "0.1.0"

/* Status codes. Every fallible public function returns one of these; 0 is success.
 * sinew_strerror() gives the generic text, sinew_ctx_message() the detail of the
 * last failure on that context (file name, position, library message). */
enum {
    SINEW_OK = 0,
    SINEW_EINVAL,       /* invalid argument from the caller */
    SINEW_ENOMEM,       /* allocation failed */
    SINEW_EOVERFLOW,    /* a size computation would overflow */
    SINEW_ELIMIT,       /* input exceeds a configured limit (pixels, bytes, nesting) */
    SINEW_ESIZE,        /* sizes of inputs/outputs do not agree */
    SINEW_EIO,          /* the operating system refused a read or write */
    SINEW_EFORMAT,      /* malformed, truncated or inconsistent file content */
    SINEW_EUNSUPPORTED, /* valid input that sinew does not handle (format variant, extension) */
    SINEW_ECONFIG,      /* bad configuration (JSON schema, options) */
    SINEW_EVALUE,       /* hostile values: NaN/Inf where finite numbers are required */
    SINEW_EINTERRUPTED, /* stopped on request (signal) */
    SINEW_EINTERNAL     /* a bug in sinew */
};

/* Generic text for a status code; never NULL, static storage. */
const char *sinew_strerror(int status);

/* ---- context ---------------------------------------------------------------------
 * A context carries what would otherwise be process-wide settings: the allocator,
 * resource limits, the thread count and the message of the last error. One context
 * is used by one thread at a time; create one per thread that calls sinew.
 * There is no global mutable state in the library. */
typedef struct sinew_ctx sinew_ctx;

/* Allocator hooks. alloc(ud, n) returns n bytes aligned to 64 or NULL; free(ud, p)
 * accepts NULL. Used for every allocation the library makes on this context, so a
 * test can inject failures. */
typedef struct sinew_allocator {
    void *(*alloc)(void *ud, size_t n);
    void (*free)(void *ud, void *p);
    void *ud;
} sinew_allocator;

/* Create a context with default allocator (aligned malloc), default limits and
 * threads = 0 (OpenMP default). Returns NULL only if memory is exhausted. Caller
 * frees with sinew_ctx_free. */
sinew_ctx *sinew_ctx_new(void);
/* Same, with caller-supplied allocator hooks (copied). */
sinew_ctx *sinew_ctx_new_with(const sinew_allocator *a);
void sinew_ctx_free(sinew_ctx *ctx);

/* Longest detail message, NUL included. A longer one keeps its start and its end with
 * " ... " in the middle, so both the file name and the cause survive. Buffers of this
 * size hold any message copied from a context. */
#define SINEW_MESSAGE_MAX 2048
/* Copy src into dst (size n >= 16) the same way: whole if it fits, else its start and
 * end around " ... " (cut at UTF-8 character boundaries). Returns dst. */
char *sinew_text_fit(char *dst, size_t n, const char *src);

/* Detail of the last failure on this context ("" if none). Valid until the next call
 * that fails on the same context. Messages name the file involved where there is one. */
const char *sinew_ctx_message(const sinew_ctx *ctx);
/* Clear the message. */
void sinew_ctx_clear(sinew_ctx *ctx);

/* Maximum pixels (width*height) any image, flow field or array may have; checked from
 * headers before allocation. Default SINEW_DEFAULT_MAX_PIXELS. Values < 1 are EINVAL. */
#define SINEW_DEFAULT_MAX_PIXELS ((int64_t)1 << 28) /* 268 Mpx, e.g. 16384 x 16384 */
int sinew_ctx_set_max_pixels(sinew_ctx *ctx, int64_t max_pixels);
int64_t sinew_ctx_max_pixels(const sinew_ctx *ctx);

/* Threads used by parallel kernels; 0 = OpenMP default, 1 = serial. Results are
 * bit-identical for every value. */
int sinew_ctx_set_threads(sinew_ctx *ctx, int threads);
int sinew_ctx_threads(const sinew_ctx *ctx);

/* Stop requests. `flag` (borrowed, may be NULL to detach) is typically set by a signal
 * handler; while it is nonzero, long loops on this context stop early with
 * SINEW_EINTERRUPTED: hashing a file (per 64 KiB block), the run engine between pairs
 * and before it trusts or empties a pair folder, manifest and report building (per
 * pair). Per-row kernels of one image do not check it. sinew_ctx_cancelled() reads it. */
int sinew_ctx_set_cancel(sinew_ctx *ctx, const volatile sig_atomic_t *flag);
int sinew_ctx_cancelled(const sinew_ctx *ctx);
/* Remove the temporary files of the outputs this context is writing right now (atomic
 * outputs not yet committed; at most SINEW_CTX_TRACKED_TEMPORARIES at once are
 * tracked). Async-signal-safe (only unlink), so a signal handler may call it right
 * before _exit(); best effort: a file committed at the same instant is not touched.
 * Returns the number of files removed. */
#define SINEW_CTX_TRACKED_TEMPORARIES 4
int sinew_ctx_remove_temporaries(sinew_ctx *ctx);

/* Allocate/free through the context's allocator (64-byte aligned). For callers that
 * hand buffers to sinew or receive buffers from it. sinew_ctx_alloc sets the message
 * and returns NULL on failure; n == 0 returns NULL without error. */
void *sinew_ctx_alloc(sinew_ctx *ctx, size_t n);
void sinew_ctx_dealloc(sinew_ctx *ctx, void *p);

/* ---- image ------------------------------------------------------------------------
 * One image type for frames, depth maps, masks, flow fields and scalar maps.
 * Pixels are interleaved (channel fastest), rows top to bottom, `stride` bytes between
 * row starts (a multiple of 64 for owned images). Element type is raw: 16-bit depth
 * stays integer codes until the caller applies a scale.
 *   frame:  SINEW_U8 or SINEW_U16, 1 (gray), 2 (gray+alpha), 3 (RGB) or 4 (RGBA) channels
 *   depth:  SINEW_U16 1 channel (raw codes) or SINEW_F32 1 channel (metres)
 *   flow:   SINEW_F32 2 channels (u, v) in pixels, NaN = unknown
 *   mask:   SINEW_U8 1 channel
 * Coordinates: x right, y down, pixel centres at integers. */
typedef enum sinew_type { SINEW_U8 = 1, SINEW_U16 = 2, SINEW_F32 = 4 } sinew_type;

typedef struct sinew_image {
    int width;
    int height;
    int channels;
    sinew_type type;
    size_t stride;       /* bytes between row starts */
    unsigned char *data; /* first pixel of row 0 */
    /* private: how to release data (NULL for views) */
    sinew_allocator owner_;
} sinew_image;

/* Bytes per element of a type (1, 2 or 4). */
size_t sinew_type_size(sinew_type t);

/* Allocate a zero-filled image. Checks dimensions (>= 1), channels (1..4), the pixel
 * limit and size overflow before allocating. On failure *img is zeroed. Free with
 * sinew_image_free. */
int sinew_image_alloc(sinew_ctx *ctx, sinew_image *img, int width, int height, int channels,
                      sinew_type type);
/* Release an owned image and zero the struct; NULL and views are fine. */
void sinew_image_free(sinew_image *img);
/* Deep copy into a freshly allocated image. */
int sinew_image_copy(sinew_ctx *ctx, sinew_image *dst, const sinew_image *src);
/* True if both have equal width, height, channels and type. */
int sinew_image_same_shape(const sinew_image *a, const sinew_image *b);

/* Row access. */
static inline void *sinew_image_row(const sinew_image *img, int y)
{
    return img->data + (size_t)y * img->stride;
}
static inline float *sinew_image_row_f32(const sinew_image *img, int y)
{
    return (float *)(void *)(img->data + (size_t)y * img->stride);
}
static inline uint16_t *sinew_image_row_u16(const sinew_image *img, int y)
{
    return (uint16_t *)(void *)(img->data + (size_t)y * img->stride);
}
static inline uint8_t *sinew_image_row_u8(const sinew_image *img, int y)
{
    return img->data + (size_t)y * img->stride;
}

/* ---- atomic output files ----------------------------------------------------------
 * Every file sinew writes goes to a temporary name in the same folder and is renamed
 * over the final name only when complete (after fflush + fsync), so a crash or an
 * error never leaves a half-written output. */
typedef struct sinew_outfile sinew_outfile;
/* Open a temporary file beside `path`. *out receives a handle; write through
 * sinew_outfile_stream(). */
int sinew_outfile_open(sinew_ctx *ctx, sinew_outfile **out, const char *path);
/* The stdio stream to write to (binary mode). */
void *sinew_outfile_stream(sinew_outfile *f); /* returns FILE * */
/* Flush, fsync, close and rename to the final path; frees the handle. On any error the
 * temporary file is removed and the final path is untouched. */
int sinew_outfile_commit(sinew_ctx *ctx, sinew_outfile *f);
/* Discard: close and remove the temporary file; frees the handle. NULL is fine. */
void sinew_outfile_abort(sinew_outfile *f);
/* Write a whole buffer atomically. */
int sinew_write_file(sinew_ctx *ctx, const char *path, const void *buf, size_t len);
/* Read a whole file, refusing files larger than max_bytes (ELIMIT). *buf is allocated
 * with sinew_ctx_alloc (plus one NUL byte past the end); free with sinew_ctx_dealloc. */
int sinew_read_file(sinew_ctx *ctx, unsigned char **buf, size_t *len, const char *path,
                    size_t max_bytes);

/* ---- text from file names ---------------------------------------------------------
 * File names are bytes; JSON must be UTF-8 (RFC 8259). Rule used by every JSON file
 * sinew writes: a byte that is not part of valid UTF-8 is written as the escape \u00XX,
 * i.e. read as Latin-1 (ISO 8859-1), so the file is valid UTF-8 JSON; such a name reads
 * back as different bytes (it is for showing, not for reopening). */
/* Length (1..4) of the valid UTF-8 sequence starting at s (n bytes available, n >= 1),
 * or 0 if none starts there (RFC 3629: no overlong forms, no surrogates, at most
 * U+10FFFF). */
size_t sinew_utf8_len(const unsigned char *s, size_t n);
/* Copy JSON text (n bytes) into a new NUL-terminated buffer (sinew_ctx_alloc; free
 * with sinew_ctx_dealloc) with every byte outside valid UTF-8 replaced by \u00XX.
 * Such bytes can only occur inside JSON strings, so the result is valid JSON. *outn
 * (may be NULL) receives the length. ENOMEM / EOVERFLOW. */
int sinew_json_utf8(sinew_ctx *ctx, char **out, size_t *outn, const char *text, size_t n);
/* Write JSON text (NUL-terminated, e.g. from cJSON_Print) to path atomically, made valid
 * UTF-8 as above, with a final newline. */
int sinew_write_json_text(sinew_ctx *ctx, const char *path, const char *text);

#ifdef __cplusplus
}
#endif
#endif
