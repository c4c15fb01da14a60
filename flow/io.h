/* SPDX-License-Identifier: MIT */
/* Reading and writing images, flow fields and plain arrays.
 *
 * Every reader checks header dimensions against the context's pixel limit before
 * allocating, refuses truncated or inconsistent files with SINEW_EFORMAT and a message
 * naming the file, and never guesses a value scale. Every writer is atomic (temporary
 * file in the same folder, then rename): on failure the final path is untouched. */
#ifndef SINEW_IO_H
#define SINEW_IO_H

#include "flow/core.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ---- images ----
 * sinew_image_read detects the format from the content (PNG signature, JPEG SOI,
 * "P5"/"P6" binary PGM/PPM), not from the extension.
 *   PNG:  8/16-bit gray, gray+alpha, RGB, RGBA; palette expands to RGB(A); bit depths
 *         below 8 expand to 8. 16-bit stays SINEW_U16 raw codes.
 *   JPEG: 8-bit gray or RGB (TurboJPEG API); CMYK is EUNSUPPORTED.
 *   PGM/PPM: maxval <= 255 -> SINEW_U8, 256..65535 -> SINEW_U16 (big-endian on disk),
 *         values kept as stored (not rescaled to full range).
 * The result is an owned image; free with sinew_image_free. */
int sinew_image_read(sinew_ctx *ctx, sinew_image *out, const char *path);

/* Read a depth file by extension: .png (16-bit gray, raw codes -> SINEW_U16; 8-bit is
 * refused), .npy (H x W, float -> SINEW_F32) or .pfm ("Pf" -> SINEW_F32). */
int sinew_depth_read(sinew_ctx *ctx, sinew_image *raw, const char *path);
/* Read a label image: one-channel 8- or 16-bit PNG (or PGM) of ids. Colour or float
 * images are SINEW_EUNSUPPORTED naming the file. */
int sinew_labels_read(sinew_ctx *ctx, sinew_image *labels, const char *path);
/* Read a mask of bits (e.g. the check's reasons): an 8-bit one-channel PNG/PGM, or an
 * integer-valued .npy (values 0..255). EFORMAT for other images, EVALUE naming the
 * first pixel that is not an integer 0..255. */
int sinew_mask_read(sinew_ctx *ctx, sinew_image *mask, const char *path);
/* Read a one-channel float map (.npy or .pfm by extension; e.g. fb error, confidence):
 * EUNSUPPORTED for other extensions, EFORMAT for other shapes. */
int sinew_map_read(sinew_ctx *ctx, sinew_image *map, const char *path);

/* ---- headers only ----
 * What the reader of a role would give, without decoding any pixel: width, height,
 * channels and sample type, and the role's checks on them (e.g. one channel and not
 * 8-bit for depth). Beyond the header the file's structure is checked cheaply: raw
 * formats (PGM/PPM, .npy, PFM) must have exactly the raster's size; a PNG's chunks are
 * walked to IEND (IHDR first, PLTE for palette images, at least one IDAT, every chunk
 * inside the file); a JPEG's markers are walked to the end-of-image marker. Compressed
 * data is not decoded, so a PNG or JPEG whose compressed data is corrupt passes here
 * and fails when read. Errors name the file, as the readers' do. */
typedef enum sinew_read_role {
    SINEW_ROLE_IMAGE = 0, /* sinew_image_read */
    SINEW_ROLE_DEPTH,     /* sinew_depth_read */
    SINEW_ROLE_LABELS,    /* sinew_labels_read */
    SINEW_ROLE_MASK,      /* sinew_mask_read (values of a float .npy are not checked) */
    SINEW_ROLE_MAP        /* sinew_map_read */
} sinew_read_role;

typedef struct sinew_image_info {
    int width, height, channels;
    sinew_type type;
} sinew_image_info;

int sinew_image_info_read(sinew_ctx *ctx, sinew_image_info *info, const char *path, int role);

/* Write a PNG: SINEW_U8 or SINEW_U16, 1..4 channels (gray, gray+alpha, RGB, RGBA). */
int sinew_image_write_png(sinew_ctx *ctx, const char *path, const sinew_image *img);
/* Encode an 8-bit image (SINEW_U8, 1..4 channels: gray, gray+alpha, RGB, RGBA) as PNG
 * in memory. *png is allocated on ctx (sinew_ctx_dealloc), *len its size. EINVAL for
 * other images, EFORMAT with libpng's message if encoding fails. */
int sinew_png_encode(sinew_ctx *ctx, unsigned char **png, size_t *len, const sinew_image *img);

/* ---- flow fields ----
 * In memory a flow field is a SINEW_F32 image with 2 channels (u, v) in pixels;
 * NaN in either component means unknown. On disk: */
typedef enum sinew_flow_format {
    SINEW_FLOW_AUTO = 0, /* from the path's extension */
    SINEW_FLOW_FLO,      /* .flo  Middlebury: unknown written as 1e10, read as |c| > 1e9 */
    SINEW_FLOW_KITTI,    /* .png  KITTI 16-bit: (value - 2^15) / 64, B channel = valid */
    SINEW_FLOW_PFM,      /* .pfm  3-channel "PF", third channel 0, rows bottom to top;
                            unknown written as NaN */
    SINEW_FLOW_NPY,      /* .npy  float32 H x W x 2, C order; unknown as NaN */
    SINEW_FLOW_NPY16     /* .npy  float16 H x W x 2 (writer choice; the reader accepts both) */
} sinew_flow_format;

/* Flow formats by name, as run folders and sequence files spell them: "flo", "npy",
 * "npy16" (float16 .npy), "pfm", "png" (KITTI). _ext gives the file extension without
 * the dot ("npy" for both .npy formats), _name the name; NULL for an unknown format.
 * _parse: SINEW_OK and *fmt set, or SINEW_EINVAL for an unknown name. */
const char *sinew_flow_format_ext(int fmt);
const char *sinew_flow_format_name(int fmt);
int sinew_flow_format_parse(const char *name, int *fmt);
/* Find a flow file by stem: the first regular file STEM.EXT for EXT = flo, npy, pfm,
 * png. 1 with its path in buf (size n); 0 when there is none (buf then holds STEM.flo,
 * for messages); -1 when the path does not fit. */
int sinew_flow_find(const char *stem, char *buf, size_t n);

/* Format from the extension (.flo .png .pfm .npy, case-insensitive); EUNSUPPORTED with a
 * message naming the path if unknown. .npy maps to SINEW_FLOW_NPY (float32). */
int sinew_flow_format_from_path(sinew_ctx *ctx, sinew_flow_format *fmt, const char *path);

/* Read a flow field; fmt = SINEW_FLOW_AUTO picks by extension. PFM accepts "PF" (the
 * third channel is ignored) and both byte orders; .npy accepts float32/float16/float64
 * (little or big endian), shape H x W x 2, C order, header versions 1.0, 2.0 and 3.0.
 * Non-finite values other than the format's unknown code are read as unknown (NaN). */
int sinew_flow_read(sinew_ctx *ctx, sinew_image *flow, const char *path, sinew_flow_format fmt);

/* Write a flow field (SINEW_F32, 2 channels) in the given format (AUTO: by extension).
 * NaN in either component is written as the format's unknown code. Refused with
 * SINEW_EVALUE naming the file, before anything is written: infinite components; for
 * KITTI PNG, components whose code round(64 c + 2^15) leaves 0..65535 (c outside about
 * [-512, 512)); for .flo, finite components above 1e9 (they would read back as unknown);
 * for SINEW_FLOW_NPY16, |c| >= 65520 (float16 would round it to infinity). */
int sinew_flow_write(sinew_ctx *ctx, const char *path, const sinew_image *flow,
                     sinew_flow_format fmt);

/* ---- plain arrays ----
 * .npy arrays of 2 or 3 dimensions map to SINEW_F32 images: H x W -> 1 channel,
 * H x W x C -> C channels (C <= 4). Readers accept float16/32/64 and convert to float32.
 * Writers emit format version 1.0 with '<f4' (or '<f2' when half = 1). */
int sinew_npy_read_image(sinew_ctx *ctx, sinew_image *out, const char *path);
int sinew_npy_write_image(sinew_ctx *ctx, const char *path, const sinew_image *img, int half);
/* Write a 2-D float32 table (rows x cols, row-major, `data` contiguous) as .npy.
 * rows may be 0 (an empty table, shape (0, cols)); data may then be NULL. */
int sinew_npy_write_table(sinew_ctx *ctx, const char *path, const float *data, size_t rows,
                          size_t cols);
/* Read a 2-D .npy table (rows x cols, rows may be 0) into *data (contiguous float32,
 * sinew_ctx_alloc; NULL when rows = 0; free with sinew_ctx_dealloc). Everything is
 * checked from the header before the data is read: 2 dimensions, a float dtype,
 * cols >= 1 and, when expect_cols > 0, cols == expect_cols; rows x cols within the
 * pixel limit and within the file. EFORMAT / EUNSUPPORTED / ELIMIT naming the file. */
int sinew_npy_read_table(sinew_ctx *ctx, float **data, size_t *rows, size_t *cols, const char *path,
                         size_t expect_cols);
/* PFM scalar ("Pf") or 3-channel ("PF") maps, e.g. float depth in metres. */
int sinew_pfm_read_image(sinew_ctx *ctx, sinew_image *out, const char *path);
int sinew_pfm_write_image(sinew_ctx *ctx, const char *path, const sinew_image *img);

#ifdef __cplusplus
}
#endif
#endif
