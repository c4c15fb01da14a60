/* SPDX-License-Identifier: MIT */
/* `sinew match` (2-D matches from a flow and the check stage's mask and confidence)
 * and `sinew lift` (the same lifted to 3-D with two depth maps and the intrinsics): one
 * front end for both: option parsing, reading the inputs, the depth scale warning,
 * writing the table, sidecar, PLY and CSV. */
#define _GNU_SOURCE

#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "flow/io.h"
#include "tools/cli.h"

static void usage(int lift)
{
    if (lift)
        printf("usage: sinew lift --flow FWD [--check DIR] --depth0 D0 --depth1 D1 --intrinsics K\n"
               "                  [--depth-scale S] [options] -o M.npy\n"
               "\n"
               "Lift dense correspondences to 3-D: for every kept pixel x of frame 0 the source\n"
               "point comes from D0 at x, the target point from D1 at x + w(x) (hole-aware\n"
               "bilinear). Pixels near depth edges or holes, or moving more than a bound, are\n"
               "rejected, and every rejection reason is counted in the sidecar M.json.\n");
    else
        printf("usage: sinew match --flow FWD [--check DIR] [--labels0 L0 --labels1 L1]\n"
               "                   [--stride S | --top-k K] [options] -o M.npy\n"
               "\n"
               "Export confidence-weighted 2-D matches (u0 v0 u1 v1 weight) from a flow field\n"
               "and the check stage's mask and confidence, with a JSON sidecar M.json.\n");
    printf("\n"
           "inputs:\n"
           "  --flow FILE            forward flow (.flo, KITTI .png, .pfm, .npy)\n"
           "  --check DIR            check folder: DIR/mask.png (0 = kept) and\n"
           "                         DIR/confidence.npy (the weight); without it weight = 1\n"
           "                         and only flow validity%s applies\n"
           "  --labels0 PNG          8/16-bit label ids of frame 0 (with --labels1): adds\n"
           "  --labels1 PNG          columns label0 label1 and per-label counts\n"
           "  --drop-label-changes   reject matches whose label changes\n",
           lift ? " and the depth rules" : "");
    if (lift)
        printf("  --depth0 FILE          depth of frame 0: 16-bit PNG codes, or float metres\n"
               "  --depth1 FILE          in .npy / .pfm (NaN, Inf, <= 0, 0 and 65535 invalid)\n"
               "  --intrinsics K         JSON file (fx fy cx cy [width height] [k1 k2 p1 p2 k3]),\n"
               "                         3x3 matrix text file, or fx,fy,cx,cy[,width,height];\n"
               "                         rescaled when the images have another size\n"
               "\n"
               "depth convention:\n"
               "  --depth-scale S        16-bit codes per metre (default 1000 = millimetres;\n"
               "                         5000 in the TUM RGB-D convention)\n"
               "  --depth-kind KIND      z (default: along the optical axis), ray (distance\n"
               "                         from the camera centre), disparity (pixels; needs\n"
               "                         --baseline; --depth-scale = codes per pixel)\n"
               "  --baseline M           stereo baseline in metres (z = fx * baseline / d)\n"
               "  --near M, --far M      valid depth range in metres (default 0, unlimited)\n"
               "\n"
               "lifting rules:\n"
               "  --edge R               relative depth jump counted as an edge (default 0.05)\n"
               "  --edge-radius N        window half-size checked for edges at both ends\n"
               "                         (default 1; 0 = only the bilinear neighbours)\n"
               "  --max-displacement M   reject |X1 - X0| above M metres (default: off)\n"
               "  --normals              add unit normals nx0 ny0 nz0 nx1 ny1 nz1\n");
    printf("\n"
           "sampling:\n"
           "  (default)              every kept pixel\n"
           "  --stride S             only pixels with x and y multiples of S\n"
           "  --top-k K              the K highest weights, spread over a grid: the best of\n"
           "                         every cell first, then the second best, ...\n"
           "  --cell N               top-K grid cell size in pixels (default 32)\n"
           "  --per-cell N           at most N matches per cell (default: no cap)\n"
           "  --min-weight W         keep only weight > W (default 0)\n"
           "\n"
           "outputs:\n"
           "  -o, --output M.npy     N x C float32 table; sidecar M.json names the columns\n"
           "%s"
           "  --csv FILE             the same table as CSV with a header line\n"
           "  -t, --threads N        worker threads (default: all cores)\n"
           "  -h, --help             this help\n"
           "\n"
           "examples:\n",
           lift ? "  --ply FILE             points and match segments for a 3-D viewer\n"
                  "  --ply-ascii            write the PLY as text (default binary)\n"
                : "");
    if (lift)
        printf(
            "  sinew lift --flow fwd.flo --check chk --depth0 d0.png --depth1 d1.png \\\n"
            "      --intrinsics 585,585,320,240 --depth-scale 1000 -o m.npy --ply m.ply\n"
            "  sinew lift --flow fwd.flo --depth0 d0.npy --depth1 d1.npy --intrinsics k.json \\\n"
            "      --top-k 5000 --normals --max-displacement 0.05 -o m.npy\n");
    else
        printf("  sinew match --flow fwd.flo --check chk -o m.npy\n"
               "  sinew match --flow fwd.flo --check chk --top-k 2000 --csv m.csv -o m.npy\n");
    printf("\n"
           "In Python: M = numpy.load('m.npy'); cols = json.load(open('m.json'))['columns']\n"
           "\n%s",
           cli_notice);
}

enum {
    OPT_FLOW = 256,
    OPT_CHECK,
    OPT_LABELS0,
    OPT_LABELS1,
    OPT_DROP_LABELS,
    OPT_DEPTH0,
    OPT_DEPTH1,
    OPT_INTRINSICS,
    OPT_DEPTH_SCALE,
    OPT_DEPTH_KIND,
    OPT_BASELINE,
    OPT_NEAR,
    OPT_FAR,
    OPT_EDGE,
    OPT_EDGE_RADIUS,
    OPT_MAX_DISP,
    OPT_NORMALS,
    OPT_STRIDE,
    OPT_TOPK,
    OPT_CELL,
    OPT_PER_CELL,
    OPT_MIN_WEIGHT,
    OPT_PLY,
    OPT_PLY_ASCII,
    OPT_CSV
};

typedef struct opts {
    const char *flow, *check, *labels0, *labels1, *depth0, *depth1, *intrinsics;
    const char *out, *ply, *csv;
    int ply_ascii, threads, have_stride, have_topk;
    sinew_match_params mp;
    sinew_depth_params dp;
} opts;

static int parse_double_opt(const char *cmd, const char *name, const char *s, double lo,
                            double *out)
{
    double v;
    if (cli_parse_double(s, &v) || !(v >= lo))
        return cli_usage_error(cmd, "%s: '%s' is not a number >= %g", name, s, lo);
    *out = v;
    return CLI_OK;
}

static int parse_args(const char *cmd, int lift, int argc, char **argv, opts *o)
{
    static const struct option common[] = {
        {"flow", required_argument, 0, OPT_FLOW},
        {"check", required_argument, 0, OPT_CHECK},
        {"labels0", required_argument, 0, OPT_LABELS0},
        {"labels1", required_argument, 0, OPT_LABELS1},
        {"drop-label-changes", no_argument, 0, OPT_DROP_LABELS},
        {"depth0", required_argument, 0, OPT_DEPTH0},
        {"depth1", required_argument, 0, OPT_DEPTH1},
        {"intrinsics", required_argument, 0, OPT_INTRINSICS},
        {"depth-scale", required_argument, 0, OPT_DEPTH_SCALE},
        {"depth-kind", required_argument, 0, OPT_DEPTH_KIND},
        {"baseline", required_argument, 0, OPT_BASELINE},
        {"near", required_argument, 0, OPT_NEAR},
        {"far", required_argument, 0, OPT_FAR},
        {"edge", required_argument, 0, OPT_EDGE},
        {"edge-radius", required_argument, 0, OPT_EDGE_RADIUS},
        {"max-displacement", required_argument, 0, OPT_MAX_DISP},
        {"normals", no_argument, 0, OPT_NORMALS},
        {"stride", required_argument, 0, OPT_STRIDE},
        {"top-k", required_argument, 0, OPT_TOPK},
        {"cell", required_argument, 0, OPT_CELL},
        {"per-cell", required_argument, 0, OPT_PER_CELL},
        {"min-weight", required_argument, 0, OPT_MIN_WEIGHT},
        {"ply", required_argument, 0, OPT_PLY},
        {"ply-ascii", no_argument, 0, OPT_PLY_ASCII},
        {"csv", required_argument, 0, OPT_CSV},
        {"threads", required_argument, 0, 't'},
        {"output", required_argument, 0, 'o'},
        {"help", no_argument, 0, 'h'},
        {0, 0, 0, 0},
    };
    memset(o, 0, sizeof *o);
    sinew_match_params_default(&o->mp);
    sinew_depth_params_default(&o->dp);
    optind = 1;
    opterr = 0;
    int c;
    long l;
    while ((c = getopt_long(argc, argv, ":ho:t:", common, NULL)) != -1) {
        int rc = CLI_OK;
        if (!lift && c >= OPT_DEPTH0 && c <= OPT_NORMALS)
            return cli_usage_error(cmd, "%s is a 'sinew lift' option", argv[optind - 1]);
        if (!lift && (c == OPT_PLY || c == OPT_PLY_ASCII))
            return cli_usage_error(cmd, "--ply needs 3-D matches (use 'sinew lift')");
        switch (c) {
        case 'h':
            usage(lift);
            return -1;
        case 'o':
            o->out = optarg;
            break;
        case OPT_FLOW:
            o->flow = optarg;
            break;
        case OPT_CHECK:
            o->check = optarg;
            break;
        case OPT_LABELS0:
            o->labels0 = optarg;
            break;
        case OPT_LABELS1:
            o->labels1 = optarg;
            break;
        case OPT_DROP_LABELS:
            o->mp.drop_label_change = 1;
            break;
        case OPT_DEPTH0:
            o->depth0 = optarg;
            break;
        case OPT_DEPTH1:
            o->depth1 = optarg;
            break;
        case OPT_INTRINSICS:
            o->intrinsics = optarg;
            break;
        case OPT_DEPTH_SCALE:
            rc = parse_double_opt(cmd, "--depth-scale", optarg, 1e-300, &o->dp.scale);
            break;
        case OPT_DEPTH_KIND:
            if (!strcmp(optarg, "z"))
                o->dp.kind = SINEW_DEPTH_Z;
            else if (!strcmp(optarg, "ray"))
                o->dp.kind = SINEW_DEPTH_RAY;
            else if (!strcmp(optarg, "disparity"))
                o->dp.kind = SINEW_DEPTH_DISPARITY;
            else
                return cli_usage_error(cmd, "--depth-kind must be z, ray or disparity");
            break;
        case OPT_BASELINE:
            rc = parse_double_opt(cmd, "--baseline", optarg, 1e-300, &o->dp.baseline);
            break;
        case OPT_NEAR:
            rc = parse_double_opt(cmd, "--near", optarg, 0, &o->dp.near);
            break;
        case OPT_FAR:
            rc = parse_double_opt(cmd, "--far", optarg, 1e-300, &o->dp.far);
            break;
        case OPT_EDGE:
            rc = parse_double_opt(cmd, "--edge", optarg, 1e-300, &o->mp.edge_rel);
            break;
        case OPT_EDGE_RADIUS:
            if (cli_parse_int(optarg, 0, 16, &l))
                return cli_usage_error(cmd, "--edge-radius must be 0..16");
            o->mp.edge_radius = (int)l;
            break;
        case OPT_MAX_DISP:
            rc = parse_double_opt(cmd, "--max-displacement", optarg, 1e-300,
                                  &o->mp.max_displacement);
            break;
        case OPT_NORMALS:
            o->mp.normals = 1;
            break;
        case OPT_STRIDE:
            if (cli_parse_int(optarg, 1, 1 << 20, &l))
                return cli_usage_error(cmd, "--stride must be a positive integer");
            o->mp.stride = (int)l;
            o->have_stride = 1;
            break;
        case OPT_TOPK:
            if (cli_parse_int(optarg, 1, 1L << 30, &l))
                return cli_usage_error(cmd, "--top-k must be a positive integer");
            o->mp.top_k = (size_t)l;
            o->have_topk = 1;
            break;
        case OPT_CELL:
            if (cli_parse_int(optarg, 1, 1 << 20, &l))
                return cli_usage_error(cmd, "--cell must be a positive integer");
            o->mp.cell = (int)l;
            break;
        case OPT_PER_CELL:
            if (cli_parse_int(optarg, 1, 1 << 30, &l))
                return cli_usage_error(cmd, "--per-cell must be a positive integer");
            o->mp.per_cell = (int)l;
            break;
        case OPT_MIN_WEIGHT:
            if (cli_parse_double(optarg, &o->mp.min_weight))
                return cli_usage_error(cmd, "--min-weight: '%s' is not a number", optarg);
            break;
        case OPT_PLY:
            o->ply = optarg;
            break;
        case OPT_PLY_ASCII:
            o->ply_ascii = 1;
            break;
        case OPT_CSV:
            o->csv = optarg;
            break;
        case 't':
            if (cli_parse_int(optarg, 0, 4096, &l))
                return cli_usage_error(cmd, "--threads must be 0..4096");
            o->threads = (int)l;
            break;
        default:
            return cli_bad_option(cmd, common, argv[optind - 1]);
        }
        if (rc)
            return rc;
    }
    if (optind < argc)
        return cli_usage_error(cmd, "unexpected argument '%s'", argv[optind]);
    if (!o->flow)
        return cli_usage_error(cmd, "--flow is required");
    if (!o->out)
        return cli_usage_error(cmd, "-o M.npy is required");
    if (o->have_stride && o->have_topk)
        return cli_usage_error(cmd, "--stride and --top-k exclude each other");
    if (!o->labels0 != !o->labels1)
        return cli_usage_error(cmd, "--labels0 and --labels1 go together");
    if (o->mp.drop_label_change && !o->labels0)
        return cli_usage_error(cmd, "--drop-label-changes needs --labels0 and --labels1");
    if (lift && (!o->depth0 || !o->depth1 || !o->intrinsics))
        return cli_usage_error(cmd, "--depth0, --depth1 and --intrinsics are required");
    if (o->ply_ascii && !o->ply)
        return cli_usage_error(cmd, "--ply-ascii needs --ply FILE");
    if (o->dp.kind == SINEW_DEPTH_DISPARITY && !(o->dp.baseline > 0))
        return cli_usage_error(cmd, "--depth-kind disparity needs --baseline");
    if (!(o->dp.far > o->dp.near))
        return cli_usage_error(cmd, "--far must exceed --near");
    o->mp.sampling = o->have_stride ? SINEW_SAMPLE_STRIDE
                     : o->have_topk ? SINEW_SAMPLE_TOP_K
                                    : SINEW_SAMPLE_ALL;
    return CLI_OK;
}

typedef struct state {
    sinew_image flow, mask, conf, l0, l1, raw0, raw1, d0, d1;
    char mask_path[4096], conf_path[4096];
} state;

static void state_free(state *s)
{
    sinew_image *all[] = {&s->flow, &s->mask, &s->conf, &s->l0, &s->l1,
                          &s->raw0, &s->raw1, &s->d0,   &s->d1};
    for (size_t i = 0; i < sizeof all / sizeof all[0]; i++)
        sinew_image_free(all[i]);
}

/* Read and convert one depth map; the median goes to *median. */
static int load_depth(sinew_ctx *ctx, const opts *o, const sinew_camera *cam, const char *path,
                      sinew_image *raw, sinew_image *z, double *median)
{
    int rc = sinew_depth_read(ctx, raw, path);
    if (rc)
        return rc;
    rc = sinew_depth_convert(ctx, z, NULL, raw, cam, &o->dp, path);
    if (rc)
        return rc;
    return sinew_depth_median(ctx, median, NULL, z);
}

static int match_main(int argc, char **argv, int lift)
{
    const char *cmd = lift ? "lift" : "match";
    opts o;
    int rc = parse_args(cmd, lift, argc, argv, &o);
    if (rc < 0)
        return CLI_OK; /* --help */
    if (rc)
        return rc;
    sinew_ctx *ctx = cli_ctx(cmd, o.threads);
    if (!ctx)
        return CLI_FAIL;
    state s;
    memset(&s, 0, sizeof s);
    sinew_camera cam_file, cam;
    char why[600];
    double median[2] = {NAN, NAN};
    sinew_match_inputs in;
    memset(&in, 0, sizeof in);
    sinew_matches m;
    memset(&m, 0, sizeof m);
    if ((rc = sinew_flow_read(ctx, &s.flow, o.flow, SINEW_FLOW_AUTO)))
        goto fail;
    in.flow = &s.flow;
    in.flow_name = o.flow;
    const int w = s.flow.width, h = s.flow.height;
    if (o.check) {
        if ((rc = sinew_check_folder_read(ctx, &s.mask, &s.conf, s.mask_path, s.conf_path,
                                          sizeof s.mask_path, o.check)))
            goto fail;
        in.mask = &s.mask;
        in.confidence = &s.conf;
        in.mask_name = s.mask_path;
        in.confidence_name = s.conf_path;
    }
    if (o.labels0) {
        if ((rc = sinew_labels_read(ctx, &s.l0, o.labels0)) ||
            (rc = sinew_labels_read(ctx, &s.l1, o.labels1)))
            goto fail;
        in.labels0 = &s.l0;
        in.labels1 = &s.l1;
        in.labels0_name = o.labels0;
        in.labels1_name = o.labels1;
    }
    if (lift) {
        if ((rc = cli_intrinsics_read(ctx, &cam_file, o.intrinsics)) ||
            (rc = sinew_camera_fit(ctx, &cam, &cam_file, w, h, o.intrinsics)))
            goto fail;
        if ((rc = load_depth(ctx, &o, &cam, o.depth0, &s.raw0, &s.d0, &median[0])) ||
            (rc = load_depth(ctx, &o, &cam, o.depth1, &s.raw1, &s.d1, &median[1])))
            goto fail;
        in.depth0 = &s.d0;
        in.depth1 = &s.d1;
        in.depth0_name = o.depth0;
        in.depth1_name = o.depth1;
        in.camera = &cam;
    }
    if ((rc = sinew_matches_build(ctx, &m, &in, &o.mp)))
        goto fail;
    char command[16];
    snprintf(command, sizeof command, "sinew %s", cmd);
    sinew_match_sources src = {command,
                               o.check,
                               o.intrinsics,
                               lift ? &cam : NULL,
                               lift ? &cam_file : NULL,
                               lift ? &o.dp : NULL,
                               {median[0], median[1]},
                               0};
    if ((rc = sinew_matches_save(ctx, o.out, &m, &o.mp, &in, &src)))
        goto fail;
    if (o.ply && (rc = sinew_matches_save_ply(ctx, o.ply, &m, !o.ply_ascii)))
        goto fail;
    if (o.csv && (rc = sinew_matches_save_csv(ctx, o.csv, &m)))
        goto fail;
    char sidecar[4096];
    sinew_matches_sidecar_path(o.out, sidecar, sizeof sidecar);
    printf("%s: %zu matches of %zu pixels (%d columns; see %s)\n", o.out, m.rows, m.pixels, m.cols,
           sidecar);
    for (int r = 0; r < SINEW_REJECT_COUNT; r++)
        if (m.rejected[r])
            printf("  %-16s %zu\n", sinew_reject_name(r), m.rejected[r]);
    /* Warnings after success, so a failure stays a single line. */
    for (int i = 0; lift && i < 2; i++) {
        const char *p = i ? o.depth1 : o.depth0;
        if (isnan(median[i]))
            cli_warning(cmd, "%s: no valid depth", p);
        else if (median[i] < SINEW_DEPTH_PLAUSIBLE_MIN || median[i] > SINEW_DEPTH_PLAUSIBLE_MAX)
            cli_warning(cmd,
                        "%s: median valid depth %.4g m is outside %g-%g m; check --depth-scale "
                        "(now %g)%s",
                        p, median[i], SINEW_DEPTH_PLAUSIBLE_MIN, SINEW_DEPTH_PLAUSIBLE_MAX,
                        o.dp.scale, o.dp.kind == SINEW_DEPTH_Z ? "" : " and --depth-kind");
    }
    if (lift && sinew_camera_centre_check(&cam, cam.width, cam.height, why, sizeof why))
        cli_warning(cmd, "%s: %s", o.intrinsics, why);
    sinew_matches_free(ctx, &m);
    state_free(&s);
    sinew_ctx_free(ctx);
    return CLI_OK;
fail:
    cli_status(cmd, ctx, rc);
    sinew_matches_free(ctx, &m);
    state_free(&s);
    sinew_ctx_free(ctx);
    return CLI_FAIL;
}

int cmd_match(int argc, char **argv)
{
    return match_main(argc, argv, 0);
}

int cmd_lift(int argc, char **argv)
{
    return match_main(argc, argv, 1);
}
