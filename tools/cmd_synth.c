/* SPDX-License-Identifier: MIT */
/* sinew synth: write the invented demo scene (a probe deforming a silicone pad, a
 * sliding foam block, a drifting camera) with exact ground truth into a folder. */
#define _GNU_SOURCE
#include <errno.h>
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "tools/cli.h"

static const char *const CMD = "synth";

static void usage(FILE *out)
{
    fprintf(out,
            "usage: sinew synth -o DIR [--frames N] [--size WxH] [--seed S] [--noise]\n"
            "                   [--stereo BASELINE] [--swing PX] [--threads N]\n"
            "\n"
            "Write the demo scene: an invented RGB-D sequence of a rounded probe pressing\n"
            "into a textured silicone pad and dragging it sideways, a foam block sliding in\n"
            "front of it, and a slowly drifting camera. Colour, depth and labels per frame;\n"
            "exact forward/backward flow (.flo), occlusion masks and scene flow (.npy) per\n"
            "consecutive pair, all computed by ray casting the analytic surfaces with their\n"
            "known motion; and sequence.json describing it all (docs/formats.md).\n"
            "\n"
            "options:\n"
            "  -o, --output DIR   output folder (created if missing; its parent must exist)\n"
            "  -n, --frames N     number of frames, >= 2 (default 30; 30 frames per second)\n"
            "  -s, --size WxH     image size, at least 8x8 (default 640x480)\n"
            "      --seed S       seed for textures and small motion variations (default 1)\n"
            "      --noise        sensor-like noise and holes at depth edges in the depth PNGs\n"
            "      --stereo B     also a right camera B metres to the right (0 < B <= 1):\n"
            "                     right/NNNNNN.png, exact left disparity\n"
            "                     truth/disparity/NNNNNN.pfm, truth/occlusion_stereo/,\n"
            "                     stereo_calib.json (for sinew stereo --calib)\n"
            "      --swing PX     fast-motion sweep: the pad stays at rest and the probe is\n"
            "                     swung across the view above it at constant speed, PX\n"
            "                     px/frame in the image where it crosses the pad centre\n"
            "                     (between the middle frames); 0 < PX <= 1000\n"
            "  -t, --threads N    threads (default: all); output is identical for any count\n"
            "  -h, --help         show this help\n"
            "\n"
            "examples:\n"
            "  sinew synth -o demo/out/scene\n"
            "  sinew synth -o /tmp/small --frames 5 --size 160x120 --seed 7 --noise\n"
            "  sinew synth -o /tmp/fast --frames 2 --swing 128\n"
            "\n%s",
            cli_notice);
}

static int parse_seed(const char *s, uint64_t *out)
{
    if (!s || !*s || *s == '-' || *s == '+')
        return -1;
    char *end;
    errno = 0;
    unsigned long long v = strtoull(s, &end, 10);
    if (errno || *end)
        return -1;
    *out = (uint64_t)v;
    return 0;
}

int cmd_synth(int argc, char **argv)
{
    static const struct option opts[] = {
        {"output", required_argument, NULL, 'o'}, {"frames", required_argument, NULL, 'n'},
        {"size", required_argument, NULL, 's'},   {"seed", required_argument, NULL, 'S'},
        {"noise", no_argument, NULL, 'N'},        {"threads", required_argument, NULL, 't'},
        {"help", no_argument, NULL, 'h'},         {"stereo", required_argument, NULL, 'B'},
        {"swing", required_argument, NULL, 'W'},  {NULL, 0, NULL, 0},
    };
    double baseline = 0; /* --stereo: right frames and exact disparity (flow/stereo.h) */
    sinew_synth_params p;
    sinew_synth_params_default(&p);
    const char *dir = NULL;
    long threads = 0, v;
    int c;
    opterr = 0;
    optind = 1;
    while ((c = getopt_long(argc, argv, ":o:n:s:j:t:h", opts, NULL)) != -1) {
        switch (c) {
        case 'o':
            dir = optarg;
            break;
        case 'n':
            if (cli_parse_int(optarg, 2, 1000000, &v))
                return cli_usage_error(CMD, "--frames: '%s' is not an integer in 2..1000000",
                                       optarg);
            p.frames = (int)v;
            break;
        case 's':
            if (cli_parse_size(optarg, &p.width, &p.height) || p.width < 8 || p.height < 8)
                return cli_usage_error(CMD, "--size: '%s' is not WxH with W, H >= 8", optarg);
            break;
        case 'S':
            if (parse_seed(optarg, &p.seed))
                return cli_usage_error(CMD, "--seed: '%s' is not an unsigned 64-bit integer",
                                       optarg);
            break;
        case 'N':
            p.depth_noise = 1;
            break;
        case 'j': /* the option's old short name */
        case 't':
            if (cli_parse_int(optarg, 0, 4096, &threads))
                return cli_usage_error(CMD, "--threads: '%s' is not an integer in 0..4096", optarg);
            break;
        case 'B':
            if (cli_parse_double(optarg, &baseline) || !(baseline > 0) || baseline > 1.0)
                return cli_usage_error(CMD, "--stereo: '%s' is not a baseline in (0, 1] metres",
                                       optarg);
            break;
        case 'W':
            if (cli_parse_double(optarg, &p.swing) || !(p.swing > 0) ||
                p.swing > SINEW_SYNTH_MAX_SWING)
                return cli_usage_error(CMD, "--swing: '%s' is not a speed in (0, 1000] px/frame",
                                       optarg);
            break;
        case 'h':
            usage(stdout);
            return CLI_OK;
        default:
            return cli_bad_option(CMD, opts, argv[optind - 1]);
        }
    }
    if (optind < argc)
        return cli_usage_error(CMD, "unexpected argument '%s'", argv[optind]);
    if (!dir || !*dir)
        return cli_usage_error(CMD, "missing -o DIR");
    sinew_ctx *ctx = cli_ctx(CMD, (int)threads);
    if (!ctx)
        return CLI_FAIL;
    sinew_synth *s = NULL;
    int st = sinew_synth_new(ctx, &s, &p);
    if (!st)
        st = sinew_synth_write(s, dir);
    if (!st && baseline > 0)
        st = sinew_stereo_synth_write(s, dir, baseline);
    sinew_synth_free(s);
    int rc = CLI_OK;
    if (st)
        rc = cli_status(CMD, ctx, st);
    else
        printf("wrote %d frames (%dx%d, seed %llu%s%s) and their exact ground truth to %s\n",
               p.frames, p.width, p.height, (unsigned long long)p.seed,
               p.depth_noise ? ", depth noise" : "", p.swing > 0 ? ", probe swing" : "", dir);
    if (!st && baseline > 0)
        printf("stereo: right frames %.3f m to the right, exact disparity, %s/stereo_calib.json\n",
               baseline, dir);
    sinew_ctx_free(ctx);
    return rc;
}
