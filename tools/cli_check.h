/* SPDX-License-Identifier: MIT */
/* CLI helpers shared by `sinew check` and `sinew flow --check`: run the check into
 * owned images, build check.json, write the output folder atomically file by file. */
#ifndef SINEW_CLI_CHECK_H
#define SINEW_CLI_CHECK_H

#include <stdio.h>

#include <cJSON.h>

#include "flow/io.h"
#include "flow/sinew.h"

/* Input and output paths as given on the command line (NULL = not given). */
typedef struct cli_check_paths {
    const char *forward, *backward, *frame0, *frame1, *ignore, *dir;
    const char *depth0;   /* frame 0's depth for the occlusion z-buffer, or NULL */
    const char *features; /* confidence cues table (.npy), or NULL */
} cli_check_paths;

/* Owned outputs of one check. */
typedef struct cli_check_result {
    sinew_image fb_error, mask, confidence;
    float *features; /* w * h * SINEW_CHECK_NFEATURES when paths->features, else NULL */
    sinew_check_stats stats;
} cli_check_result;

/* Allocate the outputs and run sinew_check_run. Prints one error line (naming the
 * input file for size mismatches) and returns nonzero on failure. */
int cli_check_compute(const char *cmd, sinew_ctx *ctx, cli_check_result *r,
                      const sinew_check_input *in, const sinew_check_params *p,
                      const cli_check_paths *paths);
void cli_check_result_free(cli_check_result *r);

/* check.json content (docs/formats.md); NULL when out of memory. Caller deletes. */
cJSON *cli_check_json(const cli_check_result *r, const sinew_check_params *p,
                      const cli_check_paths *paths);

/* Write the check folder DIR with sinew_check_folder_write (flow/check.h) and root as
 * check.json. Prints one error line and returns nonzero on failure. */
int cli_check_write(const char *cmd, sinew_ctx *ctx, const cli_check_result *r, cJSON *root,
                    const char *dir);

/* One summary line: kept fraction and counts per reason. */
void cli_check_print_summary(FILE *out, const cli_check_result *r);

#endif
