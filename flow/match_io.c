/* SPDX-License-Identifier: MIT */
/* Match files: the npy table with its JSON sidecar, PLY (points + segments) and CSV
 * writers and the sidecar's column reader. Formats: docs/formats.md "Matches". */
#define _POSIX_C_SOURCE 200809L
#include <cJSON.h>
#include <math.h>
#include <stdio.h>
#include <string.h>
#include <strings.h>

#include "flow/check.h"
#include "flow/depth.h"
#include "flow/internal/base.h"
#include "flow/internal/io.h"
#include "flow/internal/json.h"
#include "flow/io.h"
#include "flow/json.h"
#include "flow/match.h"

/* ---- sidecar ---- */

int sinew_matches_sidecar_path(const char *npy_path, char *buf, size_t n)
{
    if (!npy_path || !buf)
        return SINEW_EINVAL;
    size_t len = strlen(npy_path);
    size_t stem = sinew__has_ext(npy_path, ".npy") ? len - 4 : len;
    if (stem + 6 > n)
        return SINEW_EINVAL;
    memcpy(buf, npy_path, stem);
    memcpy(buf + stem, ".json", 6);
    return SINEW_OK;
}

int sinew_matches_read_columns(sinew_ctx *ctx, int idx[5], size_t *ncols, const char *path)
{
    if (!ctx || !path || !ncols || !idx)
        return SINEW_EINVAL;
    static const char *const want[5] = {"u0", "v0", "u1", "v1", "weight"};
    for (int k = 0; k < 5; k++)
        idx[k] = -1;
    cJSON *root;
    int rc = sinew__json_read(ctx, path, (size_t)1 << 20, &root);
    if (rc)
        return rc;
    const cJSON *cols = cJSON_GetObjectItemCaseSensitive(root, "columns"), *c;
    if (!cJSON_IsArray(cols))
        rc = sinew__fail(ctx, SINEW_EFORMAT, "%s: no \"columns\" array", path);
    else if (cJSON_GetArraySize(cols) == 0)
        rc = sinew__fail(ctx, SINEW_EFORMAT, "%s: the \"columns\" array is empty", path);
    else if (*ncols && (size_t)cJSON_GetArraySize(cols) != *ncols)
        rc = sinew__fail(ctx, SINEW_EFORMAT, "%s: names %d columns but the table has %zu", path,
                         cJSON_GetArraySize(cols), *ncols);
    else
        *ncols = (size_t)cJSON_GetArraySize(cols);
    int i = 0;
    const cJSON *list = rc ? NULL : cols;
    cJSON_ArrayForEach(c, list)
    {
        if (!cJSON_IsString(c)) {
            rc = sinew__fail(ctx, SINEW_EFORMAT, "%s: column %d is not a string", path, i);
            break;
        }
        for (int k = 0; k < 5; k++)
            if (!strcmp(c->valuestring, want[k]))
                idx[k] = i;
        i++;
    }
    for (int k = 0; !rc && k < 4; k++)
        if (idx[k] < 0)
            rc = sinew__fail(ctx, SINEW_EFORMAT, "%s: no column named \"%s\"", path, want[k]);
    cJSON_Delete(root);
    return rc;
}

static cJSON *camera_json(const sinew_camera *c)
{
    cJSON *o = cJSON_CreateObject();
    sinew_json_add_number(o, "fx", c->fx);
    sinew_json_add_number(o, "fy", c->fy);
    sinew_json_add_number(o, "cx", c->cx);
    sinew_json_add_number(o, "cy", c->cy);
    sinew_json_add_number(o, "width", c->width);
    sinew_json_add_number(o, "height", c->height);
    sinew_json_add_number(o, "k1", c->k1);
    sinew_json_add_number(o, "k2", c->k2);
    sinew_json_add_number(o, "p1", c->p1);
    sinew_json_add_number(o, "p2", c->p2);
    sinew_json_add_number(o, "k3", c->k3);
    return o;
}

static const char *unit_of(const char *col)
{
    if (col[0] == 'u' || col[0] == 'v')
        return "px";
    if (col[0] == 'X' || col[0] == 'Y' || col[0] == 'Z')
        return "m";
    if (col[0] == 'n')
        return "unit vector";
    if (col[0] == 'l')
        return "id";
    return "1";
}

static char *sidecar_text(const sinew_matches *m, const sinew_match_params *p,
                          const sinew_match_inputs *in, const sinew_match_sources *src)
{
    static const char *const sampling[] = {"all", "stride", "top_k"};
    static const char *const kinds[] = {"z", "ray", "disparity"};
    cJSON *root = cJSON_CreateObject();
    cJSON_AddStringToObject(root, "format", "sinew-matches");
    cJSON_AddNumberToObject(root, "format_version", 1);
    cJSON_AddStringToObject(root, "sinew_version", SINEW_VERSION_STRING);
    sinew_json_add_string(root, "command", src ? src->command : NULL);
    cJSON_AddNumberToObject(root, "rows", (double)m->rows);
    cJSON *cols = cJSON_AddArrayToObject(root, "columns");
    cJSON *units = cJSON_AddObjectToObject(root, "units");
    for (int i = 0; i < m->cols; i++) {
        cJSON_AddItemToArray(cols, cJSON_CreateString(m->columns[i]));
        cJSON_AddStringToObject(units, m->columns[i], unit_of(m->columns[i]));
    }
    cJSON_AddStringToObject(root, "dtype", "float32");
    int world = src && src->world;
    cJSON_AddStringToObject(
        root, "conventions",
        world ? "(u0, v0) source pixel in frame 0, (u1, v1) = (u0, v0) + flow in frame 1; "
                "pixel centres at integers, x right, y down; observed (distorted) pixel "
                "coordinates. X0 and X1 (and normals) in world coordinates: camera-0 and "
                "camera-1 points mapped by each frame's camera-to-world pose (metres). Rows "
                "in raster order of the source pixel."
              : "(u0, v0) source pixel in frame 0, (u1, v1) = (u0, v0) + flow in frame 1; "
                "pixel centres at integers, x right, y down; observed (distorted) pixel "
                "coordinates. X0 in camera-0 coordinates, X1 in camera-1 coordinates (x "
                "right, y down, z forward, metres). Rows in raster order of the source "
                "pixel.");
    if (m->has_depth)
        cJSON_AddStringToObject(root, "points_frame", world ? "world" : "camera");
    cJSON_AddNumberToObject(root, "width", m->width);
    cJSON_AddNumberToObject(root, "height", m->height);
    if (m->has_depth && src && src->camera) {
        cJSON *k = camera_json(src->camera);
        sinew_json_add_string(k, "source", src->intrinsics);
        if (src->camera_file && src->camera_file->width > 0 &&
            (src->camera_file->width != src->camera->width ||
             src->camera_file->height != src->camera->height)) {
            cJSON_AddItemToObject(k, "rescaled_from", camera_json(src->camera_file));
        }
        cJSON_AddItemToObject(root, "intrinsics", k);
    }
    if (m->has_depth && src && src->depth) {
        const sinew_depth_params *d = src->depth;
        cJSON *o = cJSON_AddObjectToObject(root, "depth");
        cJSON_AddStringToObject(o, "kind", (unsigned)d->kind < 3 ? kinds[d->kind] : "?");
        sinew_json_add_number(o, "scale", d->scale);
        cJSON_AddStringToObject(o, "scale_meaning",
                                d->kind == SINEW_DEPTH_DISPARITY
                                    ? "16-bit codes per pixel of disparity"
                                    : "16-bit codes per metre (float files are metres)");
        sinew_json_add_number(o, "near_m", d->near);
        sinew_json_add_number(o, "far_m", d->far);
        if (d->kind == SINEW_DEPTH_DISPARITY)
            sinew_json_add_number(o, "baseline_m", d->baseline);
        cJSON_AddStringToObject(o, "invalid", "16-bit codes 0 and 65535; NaN, Inf, <= 0");
        cJSON *med = cJSON_AddArrayToObject(o, "median_valid_m");
        for (int i = 0; i < 2; i++)
            cJSON_AddItemToArray(med, sinew_json_number(round(src->depth_median[i] * 1e6) / 1e6));
    }
    cJSON *par = cJSON_AddObjectToObject(root, "params");
    cJSON_AddStringToObject(par, "sampling",
                            (unsigned)p->sampling < 3 ? sampling[p->sampling] : "?");
    if (p->sampling == SINEW_SAMPLE_STRIDE)
        cJSON_AddNumberToObject(par, "stride", p->stride);
    if (p->sampling == SINEW_SAMPLE_TOP_K) {
        cJSON_AddNumberToObject(par, "top_k", (double)p->top_k);
        cJSON_AddNumberToObject(par, "cell", p->cell);
        cJSON_AddNumberToObject(par, "per_cell", p->per_cell);
    }
    sinew_json_add_number(par, "min_weight", p->min_weight);
    cJSON_AddBoolToObject(par, "drop_label_change", p->drop_label_change != 0);
    if (m->has_depth) {
        sinew_json_add_number(par, "edge_rel", p->edge_rel);
        cJSON_AddNumberToObject(par, "edge_radius", p->edge_radius);
        sinew_json_add_number(par, "max_displacement_m", p->max_displacement);
        cJSON_AddBoolToObject(par, "normals", p->normals != 0);
    }
    cJSON *inp = cJSON_AddObjectToObject(root, "inputs");
    sinew_json_add_string(inp, "flow", in ? in->flow_name : NULL);
    sinew_json_add_string(inp, "check_dir", src ? src->check_dir : NULL);
    sinew_json_add_string(inp, "mask", in ? in->mask_name : NULL);
    sinew_json_add_string(inp, "confidence", in ? in->confidence_name : NULL);
    sinew_json_add_string(inp, "labels0", in ? in->labels0_name : NULL);
    sinew_json_add_string(inp, "labels1", in ? in->labels1_name : NULL);
    if (m->has_depth) {
        sinew_json_add_string(inp, "depth0", in ? in->depth0_name : NULL);
        sinew_json_add_string(inp, "depth1", in ? in->depth1_name : NULL);
        sinew_json_add_string(inp, "intrinsics", src ? src->intrinsics : NULL);
    }
    cJSON *cnt = cJSON_AddObjectToObject(root, "counts");
    cJSON_AddNumberToObject(cnt, "pixels", (double)m->pixels);
    cJSON_AddNumberToObject(cnt, "kept", (double)m->rows);
    for (int r = 0; r < SINEW_REJECT_COUNT; r++) {
        if (!m->has_depth && r >= SINEW_REJECT_DEPTH0_INVALID && r <= SINEW_REJECT_NORMAL)
            continue;
        cJSON_AddNumberToObject(cnt, sinew_reject_name(r), (double)m->rejected[r]);
    }
    if (m->has_mask) {
        cJSON *mb = cJSON_AddObjectToObject(root, "mask_bits");
        for (int b = 0; b < 8; b++) {
            const char *name = sinew_check_bit_name(b);
            char tmp[16];
            if (!name) {
                snprintf(tmp, sizeof tmp, "bit%d", b);
                name = tmp;
            }
            cJSON_AddNumberToObject(mb, name, (double)m->mask_bits[b]);
        }
    }
    if (m->has_labels) {
        cJSON *lb = cJSON_AddObjectToObject(root, "labels");
        cJSON_AddNumberToObject(lb, "changed", (double)m->label_changed);
        cJSON *per = cJSON_AddObjectToObject(lb, "kept_per_label0");
        for (size_t i = 0; i < m->label_count; i++) {
            char key[16];
            snprintf(key, sizeof key, "%u", (unsigned)m->label_ids[i]);
            cJSON_AddNumberToObject(per, key, (double)m->label_kept[i]);
        }
    }
    char *text = cJSON_Print(root);
    cJSON_Delete(root);
    return text;
}

int sinew_matches_save(sinew_ctx *ctx, const char *npy_path, const sinew_matches *m,
                       const sinew_match_params *p, const sinew_match_inputs *in,
                       const sinew_match_sources *src)
{
    if (!ctx || !m || !p || !npy_path || (m->rows && !m->data) || m->cols < 1)
        return SINEW_EINVAL;
    char json_path[4096];
    if (sinew_matches_sidecar_path(npy_path, json_path, sizeof json_path))
        return sinew__fail(ctx, SINEW_EINVAL, "%s: path too long", npy_path);
    char *text = sidecar_text(m, p, in, src);
    if (!text)
        return sinew__fail(ctx, SINEW_ENOMEM, "%s: out of memory building the sidecar", json_path);
    sinew_outfile *f;
    int rc = sinew_outfile_open(ctx, &f, json_path);
    if (rc) {
        cJSON_free(text);
        return rc;
    }
    FILE *fp = sinew_outfile_stream(f);
    char *u = NULL;
    rc = sinew_json_utf8(ctx, &u, NULL, text, strlen(text)); /* source paths: any bytes */
    cJSON_free(text);
    if (rc) {
        sinew_outfile_abort(f);
        return rc;
    }
    fputs(u, fp);
    fputc('\n', fp);
    sinew_ctx_dealloc(ctx, u);
    rc = sinew_npy_write_table(ctx, npy_path, m->data, m->rows, (size_t)m->cols);
    if (rc) {
        sinew_outfile_abort(f);
        return rc;
    }
    rc = sinew_outfile_commit(ctx, f);
    if (rc)
        remove(npy_path); /* never leave a table without its sidecar */
    return rc;
}

/* ---- PLY and CSV ---- */

int sinew_matches_save_ply(sinew_ctx *ctx, const char *path, const sinew_matches *m, int binary)
{
    if (!ctx || !m || !path)
        return SINEW_EINVAL;
    int cx = sinew_matches_column(m, "X0");
    if (cx < 0)
        return sinew__fail(ctx, SINEW_EINVAL, "%s: PLY needs 3-D matches (give depth maps)", path);
    if (m->rows > (size_t)INT32_MAX / 2)
        return sinew__fail(ctx, SINEW_ELIMIT, "%s: too many matches for PLY indices", path);
    sinew_outfile *f;
    int rc = sinew_outfile_open(ctx, &f, path);
    if (rc)
        return rc;
    FILE *fp = sinew_outfile_stream(f);
    fprintf(fp,
            "ply\nformat %s 1.0\n"
            "comment sinew %s matches: vertex 2i = X0 (camera-0 frame, orange), vertex 2i+1 = "
            "X1 (camera-1 frame, blue), metres, x right y down z forward\n"
            "element vertex %zu\nproperty float x\nproperty float y\nproperty float z\n"
            "property uchar red\nproperty uchar green\nproperty uchar blue\n"
            "element edge %zu\nproperty int vertex1\nproperty int vertex2\nend_header\n",
            binary ? "binary_little_endian" : "ascii", SINEW_VERSION_STRING, 2 * m->rows, m->rows);
    static const unsigned char col[2][3] = {{255, 140, 0}, {30, 120, 255}};
    for (size_t i = 0; i < m->rows; i++) {
        const float *r = m->data + i * (size_t)m->cols + cx;
        for (int e = 0; e < 2; e++) {
            const float *X = r + 3 * e;
            if (binary) { /* one 15-byte vertex record: x, y, z float LE, r, g, b */
                unsigned char rec[15];
                for (int k = 0; k < 3; k++)
                    sinew__stf32(rec + 4 * k, X[k], 0);
                memcpy(rec + 12, col[e], 3);
                fwrite(rec, 1, sizeof rec, fp);
            } else {
                fprintf(fp, "%.9g %.9g %.9g %u %u %u\n", X[0], X[1], X[2], col[e][0], col[e][1],
                        col[e][2]);
            }
        }
    }
    for (size_t i = 0; i < m->rows; i++) {
        if (binary) { /* one edge record: two int32 LE vertex indices */
            unsigned char rec[8];
            sinew__st32(rec, (uint32_t)(2 * i), 0);
            sinew__st32(rec + 4, (uint32_t)(2 * i + 1), 0);
            fwrite(rec, 1, sizeof rec, fp);
        } else {
            fprintf(fp, "%zu %zu\n", 2 * i, 2 * i + 1);
        }
    }
    return sinew_outfile_commit(ctx, f);
}

int sinew_matches_save_csv(sinew_ctx *ctx, const char *path, const sinew_matches *m)
{
    if (!ctx || !m || !path)
        return SINEW_EINVAL;
    sinew_outfile *f;
    int rc = sinew_outfile_open(ctx, &f, path);
    if (rc)
        return rc;
    FILE *fp = sinew_outfile_stream(f);
    for (int c = 0; c < m->cols; c++)
        fprintf(fp, "%s%s", c ? "," : "", m->columns[c]);
    fputc('\n', fp);
    for (size_t i = 0; i < m->rows; i++) {
        const float *r = m->data + i * (size_t)m->cols;
        for (int c = 0; c < m->cols; c++)
            fprintf(fp, c ? ",%.9g" : "%.9g", r[c]);
        fputc('\n', fp);
    }
    return sinew_outfile_commit(ctx, f);
}
