/* SPDX-License-Identifier: MIT */
/* Fuzz target: the run manifest as read by the report (flow/report.h). Pictures are
 * off, so only the manifest and files under the run folder are read; the page goes to
 * a file in the same temporary folder and is removed after each input. */
#define _POSIX_C_SOURCE 200809L
#include "tests/fuzz/fuzz.h"

#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    sinew_ctx *ctx = fuzz_ctx();
    const char *path = ctx ? fuzz_file(data, size, ".json") : NULL;
    if (path) {
        char dir[600], man[700], html[700];
        snprintf(dir, sizeof dir, "%s", path);
        char *slash = strrchr(dir, '/');
        if (slash) {
            strcpy(slash, "/run");
            mkdir(dir, 0700);
            snprintf(man, sizeof man, "%s/manifest.json", dir);
            snprintf(html, sizeof html, "%s/report.html", dir);
            if (rename(path, man) == 0) {
                sinew_report_options o;
                sinew_report_options_default(&o);
                o.max_thumb_pairs = 0;
                sinew_report_write(ctx, html, dir, &o);
                unlink(man);
                unlink(html);
            }
            rmdir(dir);
        }
    }
    sinew_ctx_free(ctx);
    return 0;
}
