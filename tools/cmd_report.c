/* SPDX-License-Identifier: MIT */
/* sinew report RUNDIR: write RUNDIR/report.html, one self-contained static page for a
 * run (flow/report.h builds it). */
#define _GNU_SOURCE
#include <getopt.h>
#include <stdio.h>
#include <string.h>

#include "tools/cli.h"

static const char *const CMD = "report";

static void usage(void)
{
    printf("usage: sinew report [OPTIONS] RUNDIR\n"
           "\n"
           "Write RUNDIR/report.html: one static page with the run's summary and warnings,\n"
           "per-pair plots (kept-match fraction, mean confidence, forward-backward error,\n"
           "and endpoint error and occlusion F1 when ground truth was scored), thumbnails\n"
           "(frame, flow, confidence, rejection reasons), inputs, options and the manifest.\n"
           "Pictures are inlined; the page loads nothing from the network or from disk, so\n"
           "it can be mailed or archived. Input: RUNDIR/manifest.json and the pair folders\n"
           "RUNDIR/pairs/NAME/ (see docs/formats.md, \"Report input\").\n"
           "\n"
           "options:\n"
           "  -o, --output FILE  page to write (default RUNDIR/report.html)\n"
           "  --pictures N       pairs shown with pictures, evenly spaced (default 40; 0 = none)\n"
           "  --thumb-width PX   thumbnail width, 32..1024 (default 240)\n"
           "  --max PX           wheel radius of the flow thumbnails (default: the run's\n"
           "                     largest flow_max stat, else the largest magnitude over\n"
           "                     the pictured pairs)\n"
           "  --title TEXT       page title (default \"sinew run report\")\n"
           "  -t, --threads N    worker threads (0 = all cores, default)\n"
           "\n"
           "examples:\n"
           "  sinew report out/run1\n"
           "  sinew report --pictures 10 --max 20 -o run1.html out/run1\n"
           "\n%s",
           cli_notice);
}

int cmd_report(int argc, char **argv)
{
    enum { OPT_PICTURES = 256, OPT_THUMB, OPT_MAX, OPT_TITLE };
    static const struct option longopts[] = {
        {"output", required_argument, NULL, 'o'},
        {"pictures", required_argument, NULL, OPT_PICTURES},
        {"thumb-width", required_argument, NULL, OPT_THUMB},
        {"max", required_argument, NULL, OPT_MAX},
        {"title", required_argument, NULL, OPT_TITLE},
        {"threads", required_argument, NULL, 't'},
        {"help", no_argument, NULL, 'h'},
        {NULL, 0, NULL, 0},
    };
    sinew_report_options o;
    sinew_report_options_default(&o);
    const char *out = NULL;
    long v, threads = 0;
    optind = 1;
    opterr = 0;
    int c;
    while ((c = getopt_long(argc, argv, "o:ht:", longopts, NULL)) != -1) {
        switch (c) {
        case 'h':
            usage();
            return CLI_OK;
        case 'o':
            out = optarg;
            break;
        case OPT_PICTURES:
            if (cli_parse_int(optarg, 0, 100000, &v))
                return cli_usage_error(CMD, "--pictures wants an integer 0..100000, got '%s'",
                                       optarg);
            o.max_thumb_pairs = (int)v;
            break;
        case OPT_THUMB:
            if (cli_parse_int(optarg, 32, 1024, &v))
                return cli_usage_error(CMD, "--thumb-width wants an integer 32..1024, got '%s'",
                                       optarg);
            o.thumb_width = (int)v;
            break;
        case OPT_MAX:
            if (cli_parse_double(optarg, &o.flow_max) || o.flow_max <= 0)
                return cli_usage_error(CMD, "--max wants a positive number, got '%s'", optarg);
            break;
        case OPT_TITLE:
            o.title = optarg;
            break;
        case 't':
            if (cli_parse_int(optarg, 0, 1024, &threads))
                return cli_usage_error(CMD, "--threads wants an integer 0..1024, got '%s'", optarg);
            break;
        default:
            return cli_bad_option(CMD, longopts, argv[optind - 1]);
        }
    }
    if (optind >= argc)
        return cli_usage_error(CMD, "missing RUNDIR");
    if (optind + 1 < argc)
        return cli_usage_error(CMD, "unexpected argument '%s'", argv[optind + 1]);
    const char *dir = argv[optind];
    char path[4096];
    if (!out) {
        if ((size_t)snprintf(path, sizeof path, "%s/report.html", dir) >= sizeof path)
            return cli_error(CMD, "%s: path too long", dir);
        out = path;
    }
    sinew_ctx *ctx = cli_ctx(CMD, (int)threads);
    if (!ctx)
        return CLI_FAIL;
    int st = sinew_report_write(ctx, out, dir, &o);
    int rc = st ? cli_status(CMD, ctx, st) : CLI_OK;
    char safe[4200];
    if (!rc)
        printf("%s\n", cli_term_text(out, safe, sizeof safe));
    sinew_ctx_free(ctx);
    return rc;
}
