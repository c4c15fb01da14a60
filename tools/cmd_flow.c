/* SPDX-License-Identifier: MIT */
/* sinew flow FRAME1 FRAME2 -o FWD: dense optical flow from FRAME1 to FRAME2 (and back with
 * --backward), written in any flow format io knows, chosen by extension. Presets and the
 * advanced parameters map one to one onto sinew_flow_params (flow/estimate.h). */
#define _POSIX_C_SOURCE 200809L
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "tools/cli.h"
#include "tools/cli_check.h"

static void usage(FILE *out)
{
    fprintf(out,
            "usage: sinew flow FRAME1 FRAME2 -o FWD [--backward BWD] [--preset NAME]\n"
            "                  [--threads N] [advanced options]\n"
            "\n"
            "Estimate dense optical flow from FRAME1 to FRAME2 (PNG, JPEG, PGM/PPM; 8/16-bit,\n"
            "gray or colour; both frames the same size): FRAME1(x) matches FRAME2(x + flow).\n"
            "The output format follows the extension: .flo, .png (KITTI), .pfm, .npy.\n"
            "\n"
            "options:\n"
            "  -o, --output FILE     forward flow FRAME1 -> FRAME2 (required)\n"
            "  -b, --backward FILE   also write the backward flow FRAME2 -> FRAME1\n"
            "  -c, --check DIR       also compute the backward flow (same run) and write the\n"
            "                        forward-backward check of the pair to DIR, as\n"
            "                        'sinew check' with default parameters does\n"
            "  -p, --preset NAME     fast | balanced (default) | accurate | baseline\n"
            "                        (baseline = plain coarse-to-fine Horn-Schunck)\n"
            "  -t, --threads N       worker threads (0 = all cores; output is identical\n"
            "                        for every N)\n"
            "  -h, --help            show this help\n"
            "\n"
            "advanced options (override the preset; see docs/methods.md):\n"
            "  --levels N            pyramid levels to use (0 = automatic)\n"
            "  --finest-level N      finest level computed (0 = full resolution)\n"
            "  --patch-finest N      finest level of dense inverse search (-1 = off)\n"
            "  --patch-size N        patch side in pixels (4..32)\n"
            "  --patch-stride N      distance between patches in pixels\n"
            "  --patch-iters N       Gauss-Newton iterations per patch\n"
            "  --warps N             variational warping steps per level (0 = none)\n"
            "  --warps-fine N        warping steps at the finest levels instead (0 = --warps)\n"
            "  --fine-levels N       how many finest levels use --warps-fine\n"
            "  --outer N             fixed-point iterations per warp\n"
            "  --inner N             red-black SOR sweeps per fixed-point iteration\n"
            "  --alpha X             smoothness weight\n"
            "  --gamma X             gradient-constancy weight (illumination robustness)\n"
            "  --delta X             brightness/colour-constancy weight\n"
            "  --edge X              edge-aware smoothness strength (0 = off)\n"
            "  --median N            median filter radius after each warp (0, 1, 2)\n"
            "  --wmedian N           occlusion-aware weighted median near motion boundaries\n"
            "                        after each warp: window radius 1..10 (0 = off)\n"
            "  --wmedian-levels N    ... at the finest N computed levels\n"
            "  --wmedian-band X      boundary test: flow differs by more than X px (L1)\n"
            "                        within 5x5 pixels\n"
            "  --fuse-levels N       candidate selection near motion boundaries at the\n"
            "                        finest N computed levels (0 = off)\n"
            "  --large-motion N      large-displacement stage: descriptor matching and\n"
            "                        edge-preserving interpolation at half size or less\n"
            "                        (1 = on: accurate; 0 = off: the others)\n"
            "  --gray                use luminance only, even for colour frames\n"
            "  --work-mib N          solver scratch budget in MiB (default 32); larger\n"
            "                        images are solved in overlapping bands of rows\n"
            "\n"
            "examples:\n"
            "  sinew flow frame10.png frame11.png -o fwd.flo\n"
            "  sinew flow a.png b.png -o fwd.npy --backward bwd.npy --preset accurate\n"
            "  sinew flow a.jpg b.jpg -o fwd.flo --preset fast --threads 2\n"
            "  sinew flow a.png b.png -o fwd.flo --check out/check\n"
            "\n"
            "Outputs are written to temporary files and renamed when complete; on any\n"
            "error no output file is left behind.\n"
            "\n%s",
            cli_notice);
}

enum {
    O_LEVELS = 256,
    O_FINEST,
    O_PFINEST,
    O_PSIZE,
    O_PSTRIDE,
    O_PITERS,
    O_WARPS,
    O_OUTER,
    O_INNER,
    O_ALPHA,
    O_GAMMA,
    O_DELTA,
    O_EDGE,
    O_MEDIAN,
    O_WMEDIAN,
    O_WMEDIAN_LEVELS,
    O_WARPS_FINE,
    O_FINE_LEVELS,
    O_WMEDIAN_BAND,
    O_FUSE_LEVELS,
    O_LARGE,
    O_GRAY,
    O_WORK_MIB
};

/* Apply one advanced option to p; returns 0 or -1 if the value does not parse. */
static int set_param(sinew_flow_params *p, int opt, const char *arg)
{
    long iv = 0;
    double dv = 0;
    int isint = opt != O_ALPHA && opt != O_GAMMA && opt != O_DELTA && opt != O_EDGE &&
                opt != O_WMEDIAN_BAND;
    if (isint ? cli_parse_int(arg, -1, 100000, &iv) : cli_parse_double(arg, &dv))
        return -1;
    switch (opt) {
    case O_LEVELS:
        p->levels = (int)iv;
        break;
    case O_FINEST:
        p->finest_level = (int)iv;
        break;
    case O_PFINEST:
        p->dis_finest = (int)iv;
        break;
    case O_PSIZE:
        p->dis_patch = (int)iv;
        break;
    case O_PSTRIDE:
        p->dis_stride = (int)iv;
        break;
    case O_PITERS:
        p->dis_iters = (int)iv;
        break;
    case O_WARPS:
        p->warps = (int)iv;
        break;
    case O_WARPS_FINE:
        p->warps_fine = (int)iv;
        break;
    case O_FINE_LEVELS:
        p->fine_levels = (int)iv;
        break;
    case O_OUTER:
        p->outer = (int)iv;
        break;
    case O_INNER:
        p->inner = (int)iv;
        break;
    case O_ALPHA:
        p->alpha = (float)dv;
        break;
    case O_GAMMA:
        p->gamma = (float)dv;
        break;
    case O_DELTA:
        p->delta = (float)dv;
        break;
    case O_EDGE:
        p->edge = (float)dv;
        break;
    case O_MEDIAN:
        p->median = (int)iv;
        break;
    case O_WMEDIAN:
        p->wmedian = (int)iv;
        break;
    case O_WMEDIAN_LEVELS:
        p->wmedian_levels = (int)iv;
        break;
    case O_WMEDIAN_BAND:
        p->wmedian_band = (float)dv;
        break;
    case O_FUSE_LEVELS:
        p->fuse_levels = (int)iv;
        break;
    case O_LARGE:
        p->large_motion = (int)iv;
        break;
    case O_WORK_MIB:
        p->work_mib = (int)iv;
        break;
    default:
        return -1;
    }
    return 0;
}

int cmd_flow(int argc, char **argv)
{
    static const struct option opts[] = {
        {"output", required_argument, NULL, 'o'},
        {"backward", required_argument, NULL, 'b'},
        {"check", required_argument, NULL, 'c'},
        {"preset", required_argument, NULL, 'p'},
        {"threads", required_argument, NULL, 't'},
        {"help", no_argument, NULL, 'h'},
        {"levels", required_argument, NULL, O_LEVELS},
        {"finest-level", required_argument, NULL, O_FINEST},
        {"patch-finest", required_argument, NULL, O_PFINEST},
        {"patch-size", required_argument, NULL, O_PSIZE},
        {"patch-stride", required_argument, NULL, O_PSTRIDE},
        {"patch-iters", required_argument, NULL, O_PITERS},
        {"warps", required_argument, NULL, O_WARPS},
        {"warps-fine", required_argument, NULL, O_WARPS_FINE},
        {"fine-levels", required_argument, NULL, O_FINE_LEVELS},
        {"outer", required_argument, NULL, O_OUTER},
        {"inner", required_argument, NULL, O_INNER},
        {"alpha", required_argument, NULL, O_ALPHA},
        {"gamma", required_argument, NULL, O_GAMMA},
        {"delta", required_argument, NULL, O_DELTA},
        {"edge", required_argument, NULL, O_EDGE},
        {"median", required_argument, NULL, O_MEDIAN},
        {"wmedian", required_argument, NULL, O_WMEDIAN},
        {"wmedian-levels", required_argument, NULL, O_WMEDIAN_LEVELS},
        {"wmedian-band", required_argument, NULL, O_WMEDIAN_BAND},
        {"fuse-levels", required_argument, NULL, O_FUSE_LEVELS},
        {"large-motion", required_argument, NULL, O_LARGE},
        {"gray", no_argument, NULL, O_GRAY},
        {"work-mib", required_argument, NULL, O_WORK_MIB},
        {NULL, 0, NULL, 0},
    };
    const char *out = NULL, *bout = NULL, *preset = "balanced", *check_dir = NULL;
    long threads = 0;
    /* advanced options are applied after the preset, in order */
    struct {
        int opt;
        const char *name, *arg;
    } adv[64];
    int nadv = 0, gray = 0, c, li = -1;
    opterr = 0;
    optind = 1;
    while ((c = getopt_long(argc, argv, "o:b:c:p:t:h", opts, &li)) != -1) {
        switch (c) {
        case 'o':
            out = optarg;
            break;
        case 'b':
            bout = optarg;
            break;
        case 'p':
            preset = optarg;
            break;
        case 't':
            if (cli_parse_int(optarg, 0, 1024, &threads))
                return cli_usage_error("flow", "--threads: '%s' is not a count in 0..1024", optarg);
            break;
        case 'h':
            usage(stdout);
            return CLI_OK;
        case O_GRAY:
            gray = 1;
            break;
        case 'c':
            check_dir = optarg;
            break;
        case '?':
        case ':':
            return cli_bad_option("flow", opts, argv[optind - 1]);
        default:
            if (nadv == (int)(sizeof adv / sizeof adv[0]))
                return cli_usage_error("flow", "too many options");
            adv[nadv].opt = c;
            adv[nadv].name = li >= 0 ? opts[li].name : "?"; /* advanced options are long only */
            adv[nadv].arg = optarg;
            nadv++;
            break;
        }
    }
    if (argc - optind != 2)
        return cli_usage_error("flow", "expected FRAME1 and FRAME2");
    if (!out)
        return cli_usage_error("flow", "missing -o FWD");
    sinew_flow_params p;
    if (sinew_flow_params_preset(&p, preset))
        return cli_usage_error("flow", "unknown preset '%s' (fast, balanced, accurate, baseline)",
                               preset);
    for (int i = 0; i < nadv; i++)
        if (set_param(&p, adv[i].opt, adv[i].arg))
            return cli_usage_error("flow", "--%s: bad value '%s'", adv[i].name, adv[i].arg);
    if (gray)
        p.color = 0;
    const char *f0 = argv[optind], *f1 = argv[optind + 1];
    sinew_ctx *ctx = cli_ctx("flow", (int)threads);
    if (!ctx)
        return CLI_FAIL;
    int rc = sinew_flow_params_check(ctx, &p);
    if (rc) {
        int r = cli_usage_error("flow", "%s", sinew_ctx_message(ctx));
        sinew_ctx_free(ctx);
        return r;
    }
    sinew_flow_format ffmt, bfmt;
    sinew_image a = {0}, b = {0}, fwd = {0}, bwd = {0};
    sinew_estimator *est = NULL;
    rc = sinew_flow_format_from_path(ctx, &ffmt, out);
    if (!rc && bout)
        rc = sinew_flow_format_from_path(ctx, &bfmt, bout);
    if (!rc)
        rc = sinew_image_read(ctx, &a, f0); /* messages name the file */
    if (!rc)
        rc = sinew_image_read(ctx, &b, f1);
    int reported = 0; /* an error already printed on stderr */
    if (!rc && (a.width != b.width || a.height != b.height))
        reported = cli_error("flow", "%s: size %dx%d differs from %s (%dx%d)", f1, b.width,
                             b.height, f0, a.width, a.height);
    else if (!rc && (a.type != b.type || a.channels != b.channels))
        reported = cli_error("flow", "%s: %d-channel %d-bit frame, but %s is %d-channel %d-bit", f1,
                             b.channels, (int)sinew_type_size(b.type) * 8, f0, a.channels,
                             (int)sinew_type_size(a.type) * 8);
    if (!rc && !reported)
        rc = sinew_image_alloc(ctx, &fwd, a.width, a.height, 2, SINEW_F32);
    if (!rc && !reported && (bout || check_dir))
        rc = sinew_image_alloc(ctx, &bwd, a.width, a.height, 2, SINEW_F32);
    if (!rc && !reported)
        rc = sinew_estimator_new(ctx, &est, &p);
    if (!rc && !reported)
        rc = sinew_estimator_run(est, &fwd, bout || check_dir ? &bwd : NULL, &a, &b);
    /* --check: computed before any file is written, so a failure leaves nothing */
    cli_check_result chk;
    memset(&chk, 0, sizeof chk);
    cJSON *chk_json = NULL;
    cli_check_paths chk_paths = {out, bout, f0, f1, NULL, check_dir, NULL, NULL};
    if (!rc && !reported && check_dir) {
        sinew_check_params cp;
        sinew_check_params_default(&cp);
        sinew_check_input in = {&fwd, &bwd, &a, &b, NULL, NULL};
        reported = cli_check_compute("flow", ctx, &chk, &in, &cp, &chk_paths);
        if (!reported && !(chk_json = cli_check_json(&chk, &cp, &chk_paths)))
            reported = cli_error("flow", "out of memory");
    }
    if (!rc && !reported)
        rc = sinew_flow_write(ctx, out, &fwd, ffmt);
    if (!rc && !reported && bout) {
        rc = sinew_flow_write(ctx, bout, &bwd, bfmt);
        if (rc)
            remove(out); /* no partial result: both files or none */
    }
    int ret = reported ? CLI_FAIL : rc ? cli_status("flow", ctx, rc) : CLI_OK;
    if (ret == CLI_OK && check_dir && cli_check_write("flow", ctx, &chk, chk_json, check_dir)) {
        remove(out); /* no partial result: flows and check, or nothing new */
        if (bout)
            remove(bout);
        ret = CLI_FAIL;
    }
    cli_check_result_free(&chk);
    cJSON_Delete(chk_json);
    sinew_estimator_free(est);
    sinew_image_free(&a);
    sinew_image_free(&b);
    sinew_image_free(&fwd);
    sinew_image_free(&bwd);
    sinew_ctx_free(ctx);
    return ret;
}
