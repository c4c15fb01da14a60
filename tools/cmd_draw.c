/* SPDX-License-Identifier: MIT */
/* sinew draw KIND: write one PNG picture of a flow field, an error or confidence map,
 * a rejection mask or a match table (flow/draw.h does the drawing, flow/io.h the
 * files). Inputs are checked against each other here so messages name the files. */
#define _GNU_SOURCE
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "flow/io.h"
#include "tools/cli.h"

static const char *const CMD = "draw";

/* Which options each kind reads (bit flags). */
enum {
    O_FLOW = 1 << 0,
    O_TRUTH = 1 << 1,
    O_FRAME = 1 << 2,
    O_FRAME1 = 1 << 3,
    O_MAP = 1 << 4,
    O_MASK = 1 << 5,
    O_TABLE = 1 << 6,
    O_COLUMNS = 1 << 7,
    O_MAX = 1 << 8,
    O_STEP = 1 << 9,
    O_SCALE = 1 << 10,
    O_COUNT = 1 << 11,
    O_SIZE = 1 << 12,
    O_LEGEND = 1 << 13
};

typedef struct kind {
    const char *name;
    unsigned required, allowed;
    const char *what;
} kind;

static const kind kinds[] = {
    {"flow", O_FLOW, O_FLOW | O_MAX | O_LEGEND, "flow in the colour-wheel coding"},
    {"arrows", O_FLOW, O_FLOW | O_FRAME | O_STEP | O_SCALE | O_LEGEND, "arrow glyphs on a grid"},
    {"fb-error", O_MAP, O_MAP | O_MAX | O_LEGEND, "forward-backward error heatmap"},
    {"confidence", O_MAP, O_MAP | O_LEGEND, "confidence map (0..1)"},
    {"epe", O_FLOW | O_TRUTH, O_FLOW | O_TRUTH | O_MAX | O_LEGEND, "endpoint error vs truth"},
    {"reasons", O_MASK, O_MASK | O_FRAME | O_LEGEND, "rejection reasons over the frame"},
    {"matches", O_TABLE | O_FRAME | O_FRAME1,
     O_TABLE | O_COLUMNS | O_FRAME | O_FRAME1 | O_COUNT | O_LEGEND, "match segments side by side"},
    {"wheel", 0, O_SIZE, "the colour-wheel legend alone"},
};

static const char *const opt_names[] = {"--flow",  "--truth", "--frame",   "--frame1",   "--map",
                                        "--mask",  "--table", "--columns", "--max",      "--step",
                                        "--scale", "--count", "--size",    "--no-legend"};

static void usage(void)
{
    printf("usage: sinew draw KIND [OPTIONS] -o PICTURE.png\n"
           "\n"
           "Write one PNG picture (8-bit RGB). Kinds:\n");
    for (size_t i = 0; i < sizeof kinds / sizeof kinds[0]; i++)
        printf("  %-11s %s\n", kinds[i].name, kinds[i].what);
    printf(
        "\n"
        "inputs:\n"
        "  --flow FILE      flow field (.flo, KITTI .png, .pfm, .npy); kinds flow, arrows, epe\n"
        "  --truth FILE     ground-truth flow for epe (same size as --flow)\n"
        "  --frame IMAGE    frame shown under arrows/reasons; left frame of matches\n"
        "  --frame1 IMAGE   right frame of matches\n"
        "  --map FILE       1-channel float map (.npy or .pfm): fb error in pixels or\n"
        "                   confidence in 0..1; NaN = no value\n"
        "  --mask FILE      reason bits as sinew check writes them, 8-bit gray PNG/PGM\n"
        "                   or integer .npy: 1 occluded, 2 outside, 4 motion_boundary,\n"
        "                   8 photometric, 16 ignored, 32 saturated, 64 unknown_flow,\n"
        "                   128 fb_mismatch (a pixel shows its lowest set bit)\n"
        "  --table FILE     N x C float32 .npy match table\n"
        "  --columns FILE   JSON sidecar naming the table columns {\"columns\": [\"u0\", ...]};\n"
        "                   default: TABLE with .json for .npy, then TABLE.json\n"
        "\n"
        "drawing:\n"
        "  -o, --output FILE\n"
        "                   output PNG (written atomically)\n"
        "  --max VALUE      value at the top of the scale (pixels): wheel radius for flow,\n"
        "                   colour-bar end for fb-error/epe; default: the input's maximum.\n"
        "                   Give the same value for every frame of a sequence to compare.\n"
        "  --step PX        arrow grid spacing (default 16)\n"
        "  --scale K        arrow length per pixel of motion (default 1)\n"
        "  --count N        matches drawn, evenly spaced over the table (default 300)\n"
        "  --size PX        wheel size (default 256)\n"
        "  --no-legend      picture only, no legend strip below\n"
        "  -t, --threads N  worker threads (0 = all cores, default)\n"
        "\n"
        "examples:\n"
        "  sinew draw flow --flow pair/forward.flo --max 20 -o forward.png\n"
        "  sinew draw arrows --flow fwd.flo --frame frame10.png --step 12 -o arrows.png\n"
        "  sinew draw reasons --mask mask.png --frame frame10.png -o reasons.png\n"
        "  sinew draw epe --flow fwd.flo --truth flow10.flo --max 3 -o epe.png\n"
        "  sinew draw matches --table m.npy --frame a.png --frame1 b.png -o m.png\n"
        "  sinew draw wheel --size 128 -o wheel.png\n"
        "\n%s",
        cli_notice);
}

typedef struct opts {
    const char *out, *flow, *truth, *frame, *frame1, *map, *mask, *table, *columns;
    double max;
    long step, count, size, threads;
    double scale;
    int legend;
    unsigned given;
} opts;

/* ---- input helpers (each names the file in its message) ---- */

/* The status of a library read: 0, or the error line naming the file. */
static int got(sinew_ctx *ctx, int st)
{
    return st ? cli_status(CMD, ctx, st) : 0;
}

static int same_size(const sinew_image *a, const char *pa, const sinew_image *b, const char *pb)
{
    if (a->width == b->width && a->height == b->height)
        return 0;
    return cli_error(CMD, "%s is %dx%d but %s is %dx%d", pb, b->width, b->height, pa, a->width,
                     a->height);
}

/* A drawing failure names the picture ("image: WxH exceeds the limit" alone would not). */
static int draw_failed(sinew_ctx *ctx, const opts *o, int st)
{
    const char *m = sinew_ctx_message(ctx);
    return cli_error(CMD, "%s: %s", o->out, *m ? m : sinew_strerror(st));
}

static int draw_matches(sinew_ctx *ctx, sinew_image *out, const opts *o)
{
    sinew_image f0 = {0}, f1 = {0};
    float *data = NULL;
    int rc = 0;
    char side[4096];
    const char *cols = o->columns;
    if (!cols) { /* TABLE with .json for .npy when that exists, else TABLE.json */
        struct stat sb;
        if (strlen(o->table) + 6 > sizeof side)
            return cli_error(CMD, "%s: path too long", o->table);
        sinew_matches_sidecar_path(o->table, side, sizeof side);
        if (stat(side, &sb) != 0)
            snprintf(side, sizeof side, "%s.json", o->table);
        cols = side;
    }
    /* the sidecar first: the table's shape is checked against it from the header, before
     * any data is read */
    sinew_match_table t = {0};
    size_t ncols = 0;
    int idx[5];
    if ((rc = got(ctx, sinew_matches_read_columns(ctx, idx, &ncols, cols))))
        return rc;
    int st = sinew_npy_read_table(ctx, &data, &t.rows, &t.cols, o->table, ncols);
    if (st)
        return cli_status(CMD, ctx, st);
    t.u0 = idx[0], t.v0 = idx[1], t.u1 = idx[2], t.v1 = idx[3], t.weight = idx[4];
    if ((rc = got(ctx, sinew_image_read(ctx, &f0, o->frame))) ||
        (rc = got(ctx, sinew_image_read(ctx, &f1, o->frame1))))
        goto done;
    t.data = data;
    st = sinew_draw_matches(ctx, out, &f0, &f1, &t, (size_t)o->count, o->legend);
    if (st)
        rc = draw_failed(ctx, o, st);
done:
    sinew_ctx_dealloc(ctx, data);
    sinew_image_free(&f0);
    sinew_image_free(&f1);
    return rc;
}

static int draw_kind(sinew_ctx *ctx, const char *k, const opts *o, sinew_image *out)
{
    sinew_image a = {0}, b = {0}, fr = {0};
    int rc = 0, st = 0;
    double max = (o->given & O_MAX) ? o->max : 0;
    if (!strcmp(k, "wheel")) {
        st = sinew_draw_wheel(ctx, out, (int)o->size);
    } else if (!strcmp(k, "flow")) {
        if (!(rc = got(ctx, sinew_flow_read(ctx, &a, o->flow, SINEW_FLOW_AUTO))))
            st = sinew_draw_flow(ctx, out, &a, max, o->legend);
    } else if (!strcmp(k, "arrows")) {
        if (!(rc = got(ctx, sinew_flow_read(ctx, &a, o->flow, SINEW_FLOW_AUTO))) && o->frame &&
            !(rc = got(ctx, sinew_image_read(ctx, &fr, o->frame))))
            rc = same_size(&a, o->flow, &fr, o->frame);
        if (!rc)
            st = sinew_draw_arrows(ctx, out, o->frame ? &fr : NULL, &a, (int)o->step, o->scale,
                                   o->legend);
    } else if (!strcmp(k, "fb-error") || !strcmp(k, "confidence")) {
        int conf = !strcmp(k, "confidence");
        if (!(rc = got(ctx, sinew_map_read(ctx, &a, o->map))))
            st = sinew_draw_heatmap(ctx, out, &a, 0, conf ? 1 : max,
                                    conf ? "CONFIDENCE" : "FORWARD-BACKWARD ERROR (PX)", o->legend);
    } else if (!strcmp(k, "epe")) {
        if (!(rc = got(ctx, sinew_flow_read(ctx, &a, o->flow, SINEW_FLOW_AUTO))) &&
            !(rc = got(ctx, sinew_flow_read(ctx, &b, o->truth, SINEW_FLOW_AUTO))) &&
            !(rc = same_size(&a, o->flow, &b, o->truth)))
            st = sinew_draw_epe(ctx, out, &a, &b, max, o->legend);
    } else if (!strcmp(k, "reasons")) {
        if (!(rc = got(ctx, sinew_mask_read(ctx, &a, o->mask))) && o->frame &&
            !(rc = got(ctx, sinew_image_read(ctx, &fr, o->frame))))
            rc = same_size(&a, o->mask, &fr, o->frame);
        if (!rc)
            st = sinew_draw_reasons(ctx, out, o->frame ? &fr : NULL, &a, o->legend);
    } else {
        rc = draw_matches(ctx, out, o);
    }
    if (!rc && st)
        rc = draw_failed(ctx, o, st);
    sinew_image_free(&a);
    sinew_image_free(&b);
    sinew_image_free(&fr);
    return rc;
}

int cmd_draw(int argc, char **argv)
{
    enum {
        OPT_FLOW = 256,
        OPT_TRUTH,
        OPT_FRAME,
        OPT_FRAME1,
        OPT_MAP,
        OPT_MASK,
        OPT_TABLE,
        OPT_COLUMNS,
        OPT_MAX,
        OPT_STEP,
        OPT_SCALE,
        OPT_COUNT,
        OPT_SIZE,
        OPT_NOLEGEND
    };
    static const struct option longopts[] = {
        {"flow", required_argument, NULL, OPT_FLOW},
        {"truth", required_argument, NULL, OPT_TRUTH},
        {"frame", required_argument, NULL, OPT_FRAME},
        {"frame1", required_argument, NULL, OPT_FRAME1},
        {"map", required_argument, NULL, OPT_MAP},
        {"mask", required_argument, NULL, OPT_MASK},
        {"table", required_argument, NULL, OPT_TABLE},
        {"columns", required_argument, NULL, OPT_COLUMNS},
        {"max", required_argument, NULL, OPT_MAX},
        {"step", required_argument, NULL, OPT_STEP},
        {"scale", required_argument, NULL, OPT_SCALE},
        {"count", required_argument, NULL, OPT_COUNT},
        {"size", required_argument, NULL, OPT_SIZE},
        {"no-legend", no_argument, NULL, OPT_NOLEGEND},
        {"threads", required_argument, NULL, 't'},
        {"output", required_argument, NULL, 'o'},
        {"help", no_argument, NULL, 'h'},
        {NULL, 0, NULL, 0},
    };
    opts o = {0};
    o.step = 16;
    o.scale = 1.0;
    o.count = 300;
    o.size = 256;
    o.legend = 1;
    optind = 1;
    opterr = 0;
    int c;
    while ((c = getopt_long(argc, argv, "o:ht:", longopts, NULL)) != -1) {
        const char *arg = optarg;
        switch (c) {
        case 'h':
            usage();
            return CLI_OK;
        case 'o':
            o.out = arg;
            break;
        case OPT_FLOW:
            o.flow = arg, o.given |= O_FLOW;
            break;
        case OPT_TRUTH:
            o.truth = arg, o.given |= O_TRUTH;
            break;
        case OPT_FRAME:
            o.frame = arg, o.given |= O_FRAME;
            break;
        case OPT_FRAME1:
            o.frame1 = arg, o.given |= O_FRAME1;
            break;
        case OPT_MAP:
            o.map = arg, o.given |= O_MAP;
            break;
        case OPT_MASK:
            o.mask = arg, o.given |= O_MASK;
            break;
        case OPT_TABLE:
            o.table = arg, o.given |= O_TABLE;
            break;
        case OPT_COLUMNS:
            o.columns = arg, o.given |= O_COLUMNS;
            break;
        case OPT_MAX:
            if (cli_parse_double(arg, &o.max) || o.max <= 0)
                return cli_usage_error(CMD, "--max wants a positive number, got '%s'", arg);
            o.given |= O_MAX;
            break;
        case OPT_STEP:
            if (cli_parse_int(arg, 2, 4096, &o.step))
                return cli_usage_error(CMD, "--step wants an integer 2..4096, got '%s'", arg);
            o.given |= O_STEP;
            break;
        case OPT_SCALE:
            if (cli_parse_double(arg, &o.scale) || o.scale <= 0)
                return cli_usage_error(CMD, "--scale wants a positive number, got '%s'", arg);
            o.given |= O_SCALE;
            break;
        case OPT_COUNT:
            if (cli_parse_int(arg, 1, 1000000, &o.count))
                return cli_usage_error(CMD, "--count wants an integer 1..1000000, got '%s'", arg);
            o.given |= O_COUNT;
            break;
        case OPT_SIZE:
            if (cli_parse_int(arg, 16, 4096, &o.size))
                return cli_usage_error(CMD, "--size wants an integer 16..4096, got '%s'", arg);
            o.given |= O_SIZE;
            break;
        case OPT_NOLEGEND:
            o.legend = 0, o.given |= O_LEGEND;
            break;
        case 't':
            if (cli_parse_int(arg, 0, 1024, &o.threads))
                return cli_usage_error(CMD, "--threads wants an integer 0..1024, got '%s'", arg);
            break;
        default:
            return cli_bad_option(CMD, longopts, argv[optind - 1]);
        }
    }
    if (optind >= argc)
        return cli_usage_error(CMD, "missing KIND (flow, arrows, fb-error, confidence, epe, "
                                    "reasons, matches, wheel)");
    if (optind + 1 < argc)
        return cli_usage_error(CMD, "unexpected argument '%s'", argv[optind + 1]);
    const char *name = argv[optind];
    const kind *k = NULL;
    for (size_t i = 0; i < sizeof kinds / sizeof kinds[0]; i++)
        if (!strcmp(name, kinds[i].name))
            k = &kinds[i];
    if (!k)
        return cli_usage_error(CMD, "unknown kind '%s'", name);
    for (int b = 0; b < 14; b++) {
        if ((k->required >> b & 1) && !(o.given >> b & 1))
            return cli_usage_error(CMD, "'%s' needs %s", name, opt_names[b]);
        if ((o.given >> b & 1) && !(k->allowed >> b & 1))
            return cli_usage_error(CMD, "%s does not apply to '%s'", opt_names[b], name);
    }
    if (!o.out)
        return cli_usage_error(CMD, "missing -o PICTURE.png");
    sinew_ctx *ctx = cli_ctx(CMD, (int)o.threads);
    if (!ctx)
        return CLI_FAIL;
    sinew_image pic = {0};
    int rc = draw_kind(ctx, name, &o, &pic);
    if (!rc) {
        int st = sinew_image_write_png(ctx, o.out, &pic);
        if (st)
            rc = cli_status(CMD, ctx, st);
    }
    sinew_image_free(&pic);
    sinew_ctx_free(ctx);
    return rc;
}
