/* SPDX-License-Identifier: MIT */
/* sinew convert IN OUT: convert a flow field between .flo, KITTI PNG, PFM and .npy,
 * each chosen by its file extension. Unknown vectors carry over in each format's own
 * convention (see docs/formats.md). */
#define _POSIX_C_SOURCE 200809L
#include <getopt.h>
#include <stdio.h>
#include <string.h>
#include <strings.h>

#include "tools/cli.h"

static void usage(FILE *out)
{
    fprintf(out,
            "usage: sinew convert [--half] IN OUT\n"
            "\n"
            "Convert a flow field between file formats, chosen by extension:\n"
            "  .flo   Middlebury (unknown = 1e10)\n"
            "  .png   KITTI 16-bit flow PNG ((code - 2^15) / 64, third channel = valid;\n"
            "         vectors must lie in [-512, 512) px)\n"
            "  .pfm   3-channel PFM, little-endian, rows bottom to top (unknown = NaN)\n"
            "  .npy   NumPy float32 H x W x 2 (unknown = NaN)\n"
            "\n"
            "options:\n"
            "  --half      write .npy as float16 (about 3 significant digits)\n"
            "  -h, --help  show this help\n"
            "\n"
            "examples:\n"
            "  sinew convert flow10.flo flow10.npy\n"
            "  sinew convert --half flow10.flo flow10_f16.npy\n"
            "  sinew convert 000000_10.png 000000_10.flo\n"
            "\n"
            "The output is written to a temporary file and renamed when complete.\n"
            "\n%s",
            cli_notice);
}

int cmd_convert(int argc, char **argv)
{
    static const struct option opts[] = {
        {"half", no_argument, NULL, 'H'},
        {"help", no_argument, NULL, 'h'},
        {NULL, 0, NULL, 0},
    };
    int half = 0, c;
    opterr = 0;
    optind = 1;
    while ((c = getopt_long(argc, argv, "+h", opts, NULL)) != -1) {
        switch (c) {
        case 'H':
            half = 1;
            break;
        case 'h':
            usage(stdout);
            return CLI_OK;
        default:
            return cli_bad_option("convert", opts, argv[optind - 1]);
        }
    }
    if (argc - optind != 2)
        return cli_usage_error("convert", "expected IN and OUT file names");
    const char *in = argv[optind], *out = argv[optind + 1];
    sinew_ctx *ctx = cli_ctx("convert", 0);
    if (!ctx)
        return CLI_FAIL;
    sinew_flow_format ofmt;
    int rc = sinew_flow_format_from_path(ctx, &ofmt, out);
    if (!rc && half && ofmt != SINEW_FLOW_NPY) {
        sinew_ctx_free(ctx);
        return cli_usage_error("convert", "%s: --half needs a .npy output", out);
    }
    if (half)
        ofmt = SINEW_FLOW_NPY16;
    sinew_image flow = {0};
    if (!rc)
        rc = sinew_flow_read(ctx, &flow, in, SINEW_FLOW_AUTO);
    if (!rc)
        rc = sinew_flow_write(ctx, out, &flow, ofmt);
    int ret = rc ? cli_status("convert", ctx, rc) : CLI_OK;
    sinew_image_free(&flow);
    sinew_ctx_free(ctx);
    return ret;
}
