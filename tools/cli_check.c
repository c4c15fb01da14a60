/* SPDX-License-Identifier: MIT */
/* CLI helpers shared by `sinew check` and `sinew flow --check` (see cli_check.h). */
#define _POSIX_C_SOURCE 200809L
#include "tools/cli_check.h"

#include <stdlib.h>
#include <string.h>

#include "tools/cli.h"

int cli_check_compute(const char *cmd, sinew_ctx *ctx, cli_check_result *r,
                      const sinew_check_input *in, const sinew_check_params *p,
                      const cli_check_paths *paths)
{
    memset(r, 0, sizeof *r);
    int w = in->forward->width, h = in->forward->height;
    /* Size mismatches are reported with the file that disagrees. */
    const struct {
        const sinew_image *img;
        const char *path;
    } chk[5] = {{in->backward, paths->backward},
                {in->frame0, paths->frame0},
                {in->frame1, paths->frame1},
                {in->ignore, paths->ignore},
                {in->depth0, paths->depth0}};
    for (int i = 0; i < 5; i++)
        if (chk[i].img && (chk[i].img->width != w || chk[i].img->height != h))
            return cli_error(cmd, "%s: size %dx%d differs from the forward flow %s (%dx%d)",
                             chk[i].path ? chk[i].path : "input", chk[i].img->width,
                             chk[i].img->height, paths->forward ? paths->forward : "", w, h);
    int st;
    if ((st = sinew_image_alloc(ctx, &r->fb_error, w, h, 1, SINEW_F32)) ||
        (st = sinew_image_alloc(ctx, &r->mask, w, h, 1, SINEW_U8)) ||
        (st = sinew_image_alloc(ctx, &r->confidence, w, h, 1, SINEW_F32)))
        return cli_status(cmd, ctx, st);
    if (paths->features &&
        !(r->features = calloc((size_t)w * h * SINEW_CHECK_NFEATURES, sizeof *r->features)))
        return cli_error(cmd, "out of memory");
    sinew_check_output out = {&r->fb_error, &r->mask, &r->confidence, {0}, r->features};
    if ((st = sinew_check_run(ctx, &out, in, p)))
        return cli_status(cmd, ctx, st);
    r->stats = out.stats;
    return 0;
}

void cli_check_result_free(cli_check_result *r)
{
    sinew_image_free(&r->fb_error);
    sinew_image_free(&r->mask);
    sinew_image_free(&r->confidence);
    free(r->features);
    r->features = NULL;
}

cJSON *cli_check_json(const cli_check_result *r, const sinew_check_params *p,
                      const cli_check_paths *paths)
{
    cJSON *root = cJSON_CreateObject();
    if (!root)
        return NULL;
    cJSON_AddStringToObject(root, "format", "sinew-check");
    cJSON_AddNumberToObject(root, "version", 1);
    cJSON_AddNumberToObject(root, "width", r->mask.width);
    cJSON_AddNumberToObject(root, "height", r->mask.height);
    cJSON *in = cJSON_AddObjectToObject(root, "inputs");
    sinew_json_add_string(in, "forward", paths->forward);
    sinew_json_add_string(in, "backward", paths->backward);
    sinew_json_add_string(in, "frame0", paths->frame0);
    sinew_json_add_string(in, "frame1", paths->frame1);
    sinew_json_add_string(in, "ignore", paths->ignore);
    sinew_json_add_string(in, "ignore_polarity",
                          !paths->ignore                            ? NULL
                          : p->ignore_polarity == SINEW_IGNORE_ZERO ? "zero"
                                                                    : "nonzero");
    sinew_json_add_string(in, "depth0", paths->depth0);
    cJSON *pj = cJSON_AddObjectToObject(root, "params");
    sinew_check_param list[SINEW_CHECK_NPARAMS];
    sinew_check_params_list(p, list, SINEW_CHECK_NPARAMS);
    for (size_t i = 0; i < SINEW_CHECK_NPARAMS; i++)
        cJSON_AddNumberToObject(pj, list[i].name, list[i].value);
    if (paths->frame0) {
        cJSON *fit = cJSON_AddObjectToObject(root, "photometric_fit");
        cJSON_AddNumberToObject(fit, "gain", r->stats.gain);
        cJSON_AddNumberToObject(fit, "offset", r->stats.offset);
        cJSON_AddNumberToObject(fit, "pixels", (double)r->stats.fit_pixels);
    }
    cJSON *cnt = cJSON_AddObjectToObject(root, "counts");
    cJSON_AddNumberToObject(cnt, "pixels", (double)r->stats.pixels);
    cJSON_AddNumberToObject(cnt, "kept", (double)r->stats.kept);
    for (int b = 0; b < SINEW_MASK_NBITS; b++)
        cJSON_AddNumberToObject(cnt, sinew_check_bit_name(b), (double)r->stats.reason[b]);
    double sum = 0;
    for (int y = 0; y < r->confidence.height; y++) {
        double row = 0;
        for (int x = 0; x < r->confidence.width; x++)
            row += sinew_image_row_f32(&r->confidence, y)[x];
        sum += row;
    }
    cJSON_AddNumberToObject(root, "mean_confidence", sum / (double)r->stats.pixels);
    if (!cJSON_GetObjectItem(root, "mean_confidence")) {
        cJSON_Delete(root);
        return NULL;
    }
    return root;
}

int cli_check_write(const char *cmd, sinew_ctx *ctx, const cli_check_result *r, cJSON *root,
                    const char *dir)
{
    char *text = cJSON_Print(root);
    if (!text)
        return cli_error(cmd, "out of memory");
    int st = sinew_check_folder_write(ctx, dir, &r->fb_error, &r->mask, &r->confidence, text);
    free(text);
    return st ? cli_status(cmd, ctx, st) : 0;
}

void cli_check_print_summary(FILE *out, const cli_check_result *r)
{
    const sinew_check_stats *s = &r->stats;
    double np = s->pixels > 0 ? (double)s->pixels : 1;
    fprintf(out, "kept %.1f%% of %lld px", 100.0 * (double)s->kept / np, (long long)s->pixels);
    for (int b = 0; b < SINEW_MASK_NBITS; b++)
        if (s->reason[b])
            fprintf(out, ", %s %.1f%%", sinew_check_bit_name(b), 100.0 * (double)s->reason[b] / np);
    fputc('\n', out);
}
