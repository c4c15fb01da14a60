/* SPDX-License-Identifier: MIT */
/* sinew check: forward-backward consistency, reason mask and confidence for a pair of
 * flow fields, written to a folder (fb_error.npy, mask.png, confidence.npy,
 * confidence.png, check.json). Scoring against ground truth is `sinew score`
 * (--confidence, --mask). The writing half (cli_check_write) is shared with `sinew flow --check`.
 */
#define _POSIX_C_SOURCE 200809L
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cJSON.h>

#include "flow/sinew.h"
#include "tools/cli.h"
#include "tools/cli_check.h"

static const char *CMD = "check";

static void usage(FILE *out)
{
    fprintf(out,
            "usage: sinew check --forward FWD --backward BWD [--frames FRAME0 FRAME1]\n"
            "                   [--ignore MASK --ignore-polarity nonzero|zero] [--depth0 D0]\n"
            "                   -o DIR [options]\n"
            "\n"
            "Forward-backward consistency, occlusion/reliability mask and per-pixel\n"
            "confidence of a flow pair. FWD maps frame 0 to frame 1, BWD frame 1 to frame 0\n"
            "(.flo, KITTI .png, .pfm, .npy). Frames enable the photometric, saturation and\n"
            "texture terms. DIR (created if missing) receives:\n"
            "  fb_error.npy    float32 HxW, |w(x) + w_b(x + w(x))| in px (NaN: not checkable)\n"
            "  mask.png        8-bit, 0 = kept; reason bits: 1 occluded, 2 outside,\n"
            "                  4 motion_boundary, 8 photometric, 16 ignored, 32 saturated,\n"
            "                  64 unknown_flow, 128 fb_mismatch (occlusion estimate:\n"
            "                  mask & 3)\n"
            "  confidence.npy  float32 HxW in [0, 1]; confidence.png the same as 16-bit\n"
            "  check.json      parameters and pixel counts per reason\n"
            "\n"
            "options:\n"
            "  --forward FILE, --backward FILE   flow fields (required)\n"
            "  --frames F0 F1            frame 0 and frame 1 (PNG, JPEG, PGM/PPM)\n"
            "  --ignore FILE             user mask of pixels to reject (first channel)\n"
            "  --ignore-polarity P       nonzero: ignore pixels != 0; zero: ignore pixels == 0\n"
            "                            (required with --ignore)\n"
            "  --depth0 FILE             depth of frame 0 (16-bit PNG codes, or float .npy /\n"
            "                            .pfm; 0, 65535, NaN, <= 0 invalid): among the\n"
            "                            frame-0 pixels that reach one target, the farther\n"
            "                            ones lose it (occlusion z-buffer), as in sinew run\n"
            "  --depth-scale S           16-bit codes per metre (default 1000), as in run\n"
            "  -o, --output DIR          output folder (required)\n"
            "  --fb-alpha A --fb-beta B  inconsistent if |w+w_b|^2 > A(|w|^2+|w_b|^2) + B\n"
            "                            (default 0.01, 0.5: Sundaram et al. ECCV 2010);\n"
            "                            inconsistent pixels are occluded when nothing of\n"
            "                            frame 1 lands on them or they lose their target,\n"
            "                            else fb_mismatch (docs/methods.md, Occlusion)\n"
            "  --boundary-alpha A --boundary-beta B\n"
            "                            boundary if |grad u|^2+|grad v|^2 > A|w|^2 + B\n"
            "                            (default 0.01, 0.125)\n"
            "  --photo-threshold T       residual limit, intensity in [0,1] (default 0.1)\n"
            "  --saturation-level S      clipped if all channels >= S of full scale (0.98)\n"
            "  --features FILE           also write the confidence cues, a float32\n"
            "                            (H*W) x %d .npy table (columns fb photo texture\n"
            "                            boundary motion outside saturated fb_local\n"
            "                            fb_share), for tools/fit_confidence\n"
            "  -t, --threads N           worker threads (0 = all cores, default)\n"
            "  -h, --help                this help\n"
            "\n"
            "examples:\n"
            "  sinew check --forward f01.flo --backward f10.flo -o out/check\n"
            "  sinew check --forward f01.flo --backward f10.flo --frames a.png b.png \\\n"
            "      --ignore tools.png --ignore-polarity nonzero -o out/check\n"
            "  sinew score f01.flo gt.flo --confidence out/check/confidence.npy \\\n"
            "      --occ occ.png --mask out/check/mask.png     # rank and mask quality\n"
            "\n%s",
            SINEW_CHECK_NFEATURES, cli_notice);
}

enum {
    OPT_FORWARD = 256,
    OPT_BACKWARD,
    OPT_FRAMES,
    OPT_IGNORE,
    OPT_POLARITY,
    OPT_FB_ALPHA,
    OPT_FB_BETA,
    OPT_MB_ALPHA,
    OPT_MB_BETA,
    OPT_PHOTO,
    OPT_SAT,
    OPT_FEATURES,
    OPT_DEPTH0,
    OPT_DEPTH_SCALE
};

/* Read a flow field, naming the file in any error. */
static int read_flow(sinew_ctx *ctx, sinew_image *img, const char *path)
{
    int st = sinew_flow_read(ctx, img, path, SINEW_FLOW_AUTO);
    if (st)
        cli_status(CMD, ctx, st);
    return st;
}

static int read_image(sinew_ctx *ctx, sinew_image *img, const char *path)
{
    int st = sinew_image_read(ctx, img, path);
    if (st)
        cli_status(CMD, ctx, st);
    return st;
}

/* Read a depth map and convert it to z in metres (NaN = invalid), as `sinew run` does
 * for the check's z-buffer. */
static int read_depth(sinew_ctx *ctx, const sinew_depth_params *dp, sinew_image *raw,
                      sinew_image *z, const char *path)
{
    int st = sinew_depth_read(ctx, raw, path);
    if (!st)
        st = sinew_depth_convert(ctx, z, NULL, raw, NULL, dp, path);
    if (st)
        cli_status(CMD, ctx, st);
    return st;
}

static int parse_param(const char *opt, const char *arg, double *out)
{
    double v;
    if (cli_parse_double(arg, &v) || v < 0)
        return cli_usage_error(CMD, "%s needs a number >= 0, got '%s'", opt, arg);
    *out = v;
    return 0;
}

int cmd_check(int argc, char **argv)
{
    static const struct option opts[] = {
        {"forward", required_argument, NULL, OPT_FORWARD},
        {"backward", required_argument, NULL, OPT_BACKWARD},
        {"frames", required_argument, NULL, OPT_FRAMES},
        {"ignore", required_argument, NULL, OPT_IGNORE},
        {"ignore-polarity", required_argument, NULL, OPT_POLARITY},
        {"output", required_argument, NULL, 'o'},
        {"fb-alpha", required_argument, NULL, OPT_FB_ALPHA},
        {"fb-beta", required_argument, NULL, OPT_FB_BETA},
        {"boundary-alpha", required_argument, NULL, OPT_MB_ALPHA},
        {"boundary-beta", required_argument, NULL, OPT_MB_BETA},
        {"photo-threshold", required_argument, NULL, OPT_PHOTO},
        {"saturation-level", required_argument, NULL, OPT_SAT},
        {"threads", required_argument, NULL, 't'},
        {"features", required_argument, NULL, OPT_FEATURES},
        {"depth0", required_argument, NULL, OPT_DEPTH0},
        {"depth-scale", required_argument, NULL, OPT_DEPTH_SCALE},
        {"help", no_argument, NULL, 'h'},
        {NULL, 0, NULL, 0},
    };
    cli_check_paths paths = {0};
    long threads = 0;
    sinew_check_params p;
    sinew_check_params_default(&p);
    sinew_depth_params dp;
    sinew_depth_params_default(&dp);
    int c, bad;
    optind = 0;
    opterr = 0;
    while ((c = getopt_long(argc, argv, ":ho:t:", opts, NULL)) != -1) {
        bad = 0;
        switch (c) {
        case 'h':
            usage(stdout);
            return CLI_OK;
        case 'o':
            paths.dir = optarg;
            break;
        case OPT_FORWARD:
            paths.forward = optarg;
            break;
        case OPT_BACKWARD:
            paths.backward = optarg;
            break;
        case OPT_FRAMES:
            if (optind >= argc || argv[optind][0] == '-')
                return cli_usage_error(CMD, "--frames needs two files: FRAME0 FRAME1");
            paths.frame0 = optarg;
            paths.frame1 = argv[optind++];
            break;
        case OPT_IGNORE:
            paths.ignore = optarg;
            break;
        case OPT_POLARITY:
            if (!strcmp(optarg, "nonzero"))
                p.ignore_polarity = SINEW_IGNORE_NONZERO;
            else if (!strcmp(optarg, "zero"))
                p.ignore_polarity = SINEW_IGNORE_ZERO;
            else
                return cli_usage_error(CMD, "--ignore-polarity must be nonzero or zero, got '%s'",
                                       optarg);
            break;
        case OPT_FB_ALPHA:
            bad = parse_param("--fb-alpha", optarg, &p.fb_alpha);
            break;
        case OPT_FB_BETA:
            bad = parse_param("--fb-beta", optarg, &p.fb_beta);
            break;
        case OPT_MB_ALPHA:
            bad = parse_param("--boundary-alpha", optarg, &p.boundary_alpha);
            break;
        case OPT_MB_BETA:
            bad = parse_param("--boundary-beta", optarg, &p.boundary_beta);
            break;
        case OPT_PHOTO:
            bad = parse_param("--photo-threshold", optarg, &p.photo_threshold);
            break;
        case OPT_SAT:
            bad = parse_param("--saturation-level", optarg, &p.saturation_level);
            break;
        case OPT_FEATURES:
            paths.features = optarg;
            break;
        case OPT_DEPTH0:
            paths.depth0 = optarg;
            break;
        case OPT_DEPTH_SCALE:
            bad = parse_param("--depth-scale", optarg, &dp.scale);
            if (!bad && !(dp.scale > 0))
                bad = cli_usage_error(CMD, "--depth-scale needs a number > 0, got '%s'", optarg);
            break;
        case 't':
            if (cli_parse_int(optarg, 0, 4096, &threads))
                return cli_usage_error(CMD, "--threads needs an integer 0..4096, got '%s'", optarg);
            break;
        default:
            return cli_bad_option(CMD, opts, argv[optind - 1]);
        }
        if (bad)
            return bad;
    }
    if (optind < argc)
        return cli_usage_error(CMD, "unexpected argument '%s'", argv[optind]);
    if (!paths.forward || !paths.backward)
        return cli_usage_error(CMD, "--forward and --backward are required");
    if (!paths.dir)
        return cli_usage_error(CMD, "-o DIR is required");
    if (paths.ignore && p.ignore_polarity == SINEW_IGNORE_UNSET)
        return cli_usage_error(CMD, "--ignore needs --ignore-polarity nonzero|zero");
    if (!paths.ignore && p.ignore_polarity != SINEW_IGNORE_UNSET)
        return cli_usage_error(CMD, "--ignore-polarity given without --ignore");

    sinew_ctx *ctx = cli_ctx(CMD, (int)threads);
    if (!ctx)
        return CLI_FAIL;
    int rc = CLI_FAIL;
    sinew_image fwd = {0}, bwd = {0}, f0 = {0}, f1 = {0}, ign = {0}, draw = {0}, z0 = {0};
    cli_check_result r;
    memset(&r, 0, sizeof r);
    cJSON *root = NULL;
    if (read_flow(ctx, &fwd, paths.forward) || read_flow(ctx, &bwd, paths.backward))
        goto done;
    if (paths.frame0 && (read_image(ctx, &f0, paths.frame0) || read_image(ctx, &f1, paths.frame1)))
        goto done;
    if (paths.ignore && read_image(ctx, &ign, paths.ignore))
        goto done;
    if (paths.depth0 && read_depth(ctx, &dp, &draw, &z0, paths.depth0))
        goto done;
    sinew_check_input in = {&fwd,
                            &bwd,
                            paths.frame0 ? &f0 : NULL,
                            paths.frame1 ? &f1 : NULL,
                            paths.ignore ? &ign : NULL,
                            paths.depth0 ? &z0 : NULL};
    if (cli_check_compute(CMD, ctx, &r, &in, &p, &paths))
        goto done;
    if (!(root = cli_check_json(&r, &p, &paths))) {
        cli_error(CMD, "out of memory");
        goto done;
    }
    if (cli_check_write(CMD, ctx, &r, root, paths.dir))
        goto done;
    if (paths.features) {
        int st =
            sinew_npy_write_table(ctx, paths.features, r.features,
                                  (size_t)fwd.width * (size_t)fwd.height, SINEW_CHECK_NFEATURES);
        if (st) {
            cli_status(CMD, ctx, st);
            goto done;
        }
    }
    cli_check_print_summary(stdout, &r);
    rc = CLI_OK;
done:
    cJSON_Delete(root);
    cli_check_result_free(&r);
    sinew_image_free(&fwd);
    sinew_image_free(&bwd);
    sinew_image_free(&f0);
    sinew_image_free(&f1);
    sinew_image_free(&ign);
    sinew_image_free(&draw);
    sinew_image_free(&z0);
    sinew_ctx_free(ctx);
    return rc;
}
