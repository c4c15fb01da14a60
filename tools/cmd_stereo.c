/* SPDX-License-Identifier: MIT */
/* sinew stereo: dense disparity of a rectified pair (flow/stereo.h), optionally the
 * right view's disparity, the left-right check folder (mask, confidence, pictures with
 * labelled colour bars, stereo.json) and depth from a calibration file. */
#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>

#include "flow/sinew.h"
#include "tools/cli.h"

static const char *CMD = "stereo";

static void usage(FILE *out)
{
    fprintf(out,
            "usage: sinew stereo LEFT RIGHT -o DISP [--right RDISP] [--check DIR]\n"
            "                    [--calib FILE --depth DEPTH] [--preset fast|balanced] [options]\n"
            "\n"
            "Dense disparity of a rectified stereo pair by semi-global matching on census\n"
            "costs, with a left-right consistency check. A left pixel (x, y) with disparity\n"
            "d matches the right pixel (x - d, y). Frames: PNG, JPEG, PGM/PPM, same size.\n"
            "Outputs by extension: .pfm or .npy (float32, px) or .png (16-bit, value =\n"
            "disparity x 256, 0 = none, the KITTI convention). DISP has a value at every\n"
            "pixel: pixels the check rejects are filled from the background side (the\n"
            "check folder's mask.png still marks them).\n"
            "\n"
            "options:\n"
            "  -o, --output DISP         left-view disparity (required)\n"
            "  --right RDISP             right-view disparity (NaN / 0 where rejected)\n"
            "  --check DIR               folder: mask.png (0 kept; 1 left-right inconsistent,\n"
            "                            2 match outside the right frame, 64 unknown),\n"
            "                            confidence.npy, disparity.png and reasons.png\n"
            "                            (pictures), depth.png with --calib, stereo.json\n"
            "  --calib FILE              calibration JSON (docs/formats.md): a rectified pair\n"
            "                            (fx fy cx cy per camera and baseline), or a raw rig\n"
            "                            (intrinsics + distortion per camera, R and T): then\n"
            "                            the frames are rectified first and DISP, RDISP and\n"
            "                            the check folder are in the rectified views\n"
            "  --depth DEPTH             depth z = fx B / (d + doffs): .npy/.pfm in metres\n"
            "                            (NaN invalid) or .png 16-bit millimetres (0 invalid);\n"
            "                            invalid where the check rejects or d <= 0; with a raw\n"
            "                            rig taken back to the left frame's own pixels (holes\n"
            "                            stay holes)\n"
            "  --depth-rectified         with a raw rig: write DEPTH in the rectified left view\n"
            "  --preset P                fast (4 paths) or balanced (8 paths, default)\n"
            "  --disparities N           number of disparities searched (default: width/6\n"
            "                            rounded up to a multiple of 16, at most 256)\n"
            "  --min-disparity N         smallest disparity searched (default 0)\n"
            "  --p1 N --p2 N             smoothness penalties in census bits (default 20, 100)\n"
            "  --lr-tolerance PX         left-right check tolerance (default 1)\n"
            "  --no-rectify-check        skip the rectification test (by default a pair whose\n"
            "                            matching features are more than 1 px apart\n"
            "                            vertically is refused)\n"
            "  --truth FILE              score DISP against true disparity: .pfm/.npy in px\n"
            "                            (NaN or <= 0 unknown) or 8/16-bit PNG/PGM codes\n"
            "                            divided by --truth-scale (default 256, KITTI; 0 =\n"
            "                            unknown); prints bad-1px, bad-2px, mean abs error, D1\n"
            "  --occ MASK                with --truth: skip pixels where MASK is nonzero\n"
            "  -t, --threads N           worker threads (0 = all cores, default)\n"
            "  -h, --help                this help\n"
            "\n"
            "examples:\n"
            "  sinew stereo left.png right.png -o disp.pfm --check out/stereo\n"
            "  sinew stereo l.png r.png -o disp.png --calib rig.json --depth depth.png\n"
            "  sinew stereo raw_l.png raw_r.png -o disp.pfm --calib raw_rig.json --depth z.npy\n"
            "\n%s",
            cli_notice);
}

enum {
    OPT_RIGHT = 256,
    OPT_CHECK,
    OPT_CALIB,
    OPT_DEPTH,
    OPT_PRESET,
    OPT_NDISP,
    OPT_MINDISP,
    OPT_P1,
    OPT_P2,
    OPT_LRTOL,
    OPT_NORECT,
    OPT_TRUTH,
    OPT_TRUTH_SCALE,
    OPT_OCC,
    OPT_DEPTH_RECT
};

static int make_dir(const char *dir)
{
    if (mkdir(dir, 0777) != 0 && errno != EEXIST)
        return cli_error(CMD, "%s: cannot create folder: %s", dir, strerror(errno));
    struct stat st;
    if (stat(dir, &st) != 0 || !S_ISDIR(st.st_mode))
        return cli_error(CMD, "%s: not a folder", dir);
    return 0;
}

static int join(char *buf, size_t n, const char *dir, const char *name)
{
    if ((size_t)snprintf(buf, n, "%s/%s", dir, name) >= n)
        return cli_error(CMD, "%s: path too long", dir);
    return 0;
}

/* stereo.json: parameters and counts. */
static int write_json(sinew_ctx *ctx, const char *path, const sinew_stereo_params *p,
                      const sinew_stereo_stats *s, const char *preset,
                      const sinew_stereo_rectification *rect)
{
    sinew_outfile *f;
    int st = sinew_outfile_open(ctx, &f, path);
    if (st)
        return st;
    FILE *o = sinew_outfile_stream(f);
    fprintf(o,
            "{\n  \"preset\": \"%s\",\n  \"min_disparity\": %d,\n  \"num_disparities\": %d,\n"
            "  \"paths\": %d,\n  \"p1\": %d,\n  \"p2\": %d,\n  \"p2_edge\": %.17g,\n"
            "  \"lr_tolerance\": %.17g,\n  \"median\": %d,\n  \"bands\": %d,\n"
            "  \"pixels\": %lld,\n  \"kept\": %lld,\n  \"filled\": %lld,\n  \"reasons\": {",
            preset, s->min_disparity, s->num_disparities, p->paths, p->p1, p->p2, p->p2_edge,
            p->lr_tolerance, p->median, s->bands, (long long)s->pixels, (long long)s->kept,
            (long long)s->filled);
    for (int b = 0; b < SINEW_MASK_NBITS; b++)
        fprintf(o, "%s\"%s\": %lld", b ? ", " : "", sinew_check_bit_name(b),
                (long long)s->reason[b]);
    fprintf(o, "}");
    if (rect) { /* the rectified camera, for lifting the rectified views */
        const sinew_stereo_calib *c = &rect->calib;
        fprintf(o,
                ",\n  \"rectified\": {\"fx\": %.17g, \"fy\": %.17g, \"cx\": %.17g, \"cy\": "
                "%.17g, \"baseline\": %.17g, \"doffs\": %.17g}",
                c->fx, c->fy, c->cx, c->cy, c->baseline, c->doffs);
    }
    fprintf(o, "\n}\n");
    return sinew_outfile_commit(ctx, f);
}

/* Heatmap picture of a map with a labelled colour bar. */
static int picture(sinew_ctx *ctx, const char *path, const sinew_image *map, double lo, double hi,
                   const char *label)
{
    sinew_image pic;
    int st = sinew_draw_heatmap(ctx, &pic, map, lo, hi, label, 1);
    if (!st)
        st = sinew_image_write_png(ctx, path, &pic);
    sinew_image_free(&pic);
    return st;
}

typedef struct job {
    const char *left, *right, *out, *rout, *check, *calib, *depth, *preset;
    const char *truth, *occ; /* --truth, --occ */
    double truth_scale;
    int no_rectify_check, depth_rectified;
} job;

#define RECTIFY_SEARCH 16      /* rows searched above and below (our choice) */
#define RECTIFY_MIN_MATCHES 10 /* fewer reliable features: no verdict (our choice) */
#define RECTIFY_MAX_DY 1.0     /* px; rectified Middlebury/KITTI pairs give < 0.06 */

static int write_check(sinew_ctx *ctx, const job *j, const sinew_stereo_output *o,
                       const sinew_image *frame, const sinew_image *z, const sinew_stereo_params *p,
                       const sinew_stereo_rectification *rect, const sinew_image *rframe)
{
    char path[4096];
    int st;
    if (make_dir(j->check))
        return CLI_FAIL;
    sinew_image pic = {0};
    const double lo = o->stats.min_disparity, hi = lo + o->stats.num_disparities - 1;
    if (join(path, sizeof path, j->check, "mask.png"))
        return CLI_FAIL;
    if ((st = sinew_image_write_png(ctx, path, o->mask)))
        return cli_status(CMD, ctx, st);
    if (join(path, sizeof path, j->check, "confidence.npy"))
        return CLI_FAIL;
    if ((st = sinew_npy_write_image(ctx, path, o->confidence, 0)))
        return cli_status(CMD, ctx, st);
    if (join(path, sizeof path, j->check, "disparity.png"))
        return CLI_FAIL;
    if ((st = picture(ctx, path, o->disparity, lo, hi, "DISPARITY (PX)")))
        return cli_status(CMD, ctx, st);
    if (join(path, sizeof path, j->check, "reasons.png"))
        return CLI_FAIL;
    st = sinew_draw_reasons(ctx, &pic, frame, o->mask, 1);
    if (!st)
        st = sinew_image_write_png(ctx, path, &pic);
    sinew_image_free(&pic);
    if (st)
        return cli_status(CMD, ctx, st);
    if (z) {
        if (join(path, sizeof path, j->check, "depth.png"))
            return CLI_FAIL;
        /* 0 to twice the median depth: a few far pixels (d near 0) would flatten the rest */
        double med = NAN;
        if ((st = sinew_depth_median(ctx, &med, NULL, z)))
            return cli_status(CMD, ctx, st);
        if ((st = picture(ctx, path, z, 0, isfinite(med) ? 2 * med : 0, "DEPTH (M)")))
            return cli_status(CMD, ctx, st);
    }
    if (join(path, sizeof path, j->check, "stereo.json"))
        return CLI_FAIL;
    if ((st = write_json(ctx, path, p, &o->stats, j->preset, rect)))
        return cli_status(CMD, ctx, st);
    if (rect) { /* the rectified frames the disparities refer to */
        if (join(path, sizeof path, j->check, "rectified_left.png"))
            return CLI_FAIL;
        if ((st = sinew_image_write_png(ctx, path, frame)))
            return cli_status(CMD, ctx, st);
        if (join(path, sizeof path, j->check, "rectified_right.png"))
            return CLI_FAIL;
        if ((st = sinew_image_write_png(ctx, path, rframe)))
            return cli_status(CMD, ctx, st);
    }
    return CLI_OK;
}

/* --truth: bad-1px, bad-2px, mean absolute error and D1 of the filled left disparity
 * over pixels with a true value that --occ (nonzero = occluded) does not exclude. */
static int score(sinew_ctx *ctx, const job *j, const sinew_image *d)
{
    sinew_image raw = {0}, t = {0}, occ = {0}, region = {0};
    int st, rc = CLI_FAIL;
    const size_t n = strlen(j->truth);
    const char *ext = n >= 4 ? j->truth + n - 4 : "";
    if (!strcmp(ext, ".pfm") || !strcmp(ext, ".PFM"))
        st = sinew_pfm_read_image(ctx, &raw, j->truth);
    else if (!strcmp(ext, ".npy") || !strcmp(ext, ".NPY"))
        st = sinew_npy_read_image(ctx, &raw, j->truth);
    else
        st = sinew_image_read(ctx, &raw, j->truth);
    if (st) {
        cli_status(CMD, ctx, st);
        goto done;
    }
    if (raw.type == SINEW_F32) {
        if (raw.channels != 1) {
            cli_error(CMD, "%s: a disparity map has one channel", j->truth);
            goto done;
        }
        t = raw;
        memset(&raw, 0, sizeof raw);
        for (int y = 0; y < t.height; y++)
            for (int x = 0; x < t.width; x++)
                if (!(sinew_image_row_f32(&t, y)[x] > 0))
                    sinew_image_row_f32(&t, y)[x] = NAN;
    } else if ((st = sinew_stereo_truth(ctx, &t, &raw, j->truth_scale))) {
        cli_status(CMD, ctx, st);
        goto done;
    }
    if (t.width != d->width || t.height != d->height) {
        cli_error(CMD, "%s: %dx%d, but the frames are %dx%d", j->truth, t.width, t.height, d->width,
                  d->height);
        goto done;
    }
    if (j->occ) {
        if ((st = sinew_image_read(ctx, &occ, j->occ))) {
            cli_status(CMD, ctx, st);
            goto done;
        }
        if (occ.width != d->width || occ.height != d->height) {
            cli_error(CMD, "%s: %dx%d, but the frames are %dx%d", j->occ, occ.width, occ.height,
                      d->width, d->height);
            goto done;
        }
        if ((st = sinew_image_alloc(ctx, &region, d->width, d->height, 1, SINEW_U8))) {
            cli_status(CMD, ctx, st);
            goto done;
        }
        for (int y = 0; y < d->height; y++)
            for (int x = 0; x < d->width; x++) {
                const size_t i = (size_t)x * occ.channels;
                const unsigned v = occ.type == SINEW_U8 ? sinew_image_row_u8(&occ, y)[i]
                                                        : sinew_image_row_u16(&occ, y)[i];
                sinew_image_row_u8(&region, y)[x] = v == 0;
            }
    }
    sinew_stereo_scores sc;
    if ((st = sinew_stereo_score(ctx, &sc, d, &t, j->occ ? &region : NULL))) {
        cli_status(CMD, ctx, st);
        goto done;
    }
    const double np = sc.pixels > 0 ? (double)sc.pixels : NAN;
    printf("truth: bad-1px %.2f%%, bad-2px %.2f%%, mean abs error %.3f px, D1 %.2f%% over %lld "
           "px%s\n",
           100 * (double)sc.bad1 / np, 100 * (double)sc.bad2 / np, sc.abs_sum / np,
           100 * (double)sc.d1 / np, (long long)sc.pixels, j->occ ? " (non-occluded)" : "");
    rc = CLI_OK;
done:
    sinew_image_free(&raw);
    sinew_image_free(&t);
    sinew_image_free(&occ);
    sinew_image_free(&region);
    return rc;
}

/* The frames' size against a calibration's (0 = unknown); 1 when they agree. */
static int size_ok(const job *j, int cw, int ch, const sinew_image *l)
{
    if (!cw || (cw == l->width && ch == l->height))
        return 1;
    cli_error(CMD, "%s: calibrated for %dx%d, frames are %dx%d", j->calib, cw, ch, l->width,
              l->height);
    return 0;
}

/* A pair off by more than a pixel vertically is not rectified (our threshold; SGM
 * searches rows only). After rectifying a raw rig the same test checks the calibration. */
static int rectified_ok(sinew_ctx *ctx, const job *j, const sinew_stereo_params *p,
                        const sinew_image *l, const sinew_image *r, int raw)
{
    double dy;
    int matched, st;
    if ((st = sinew_stereo_vertical_offset(ctx, &dy, &matched, l, r, p->min_disparity,
                                           sinew_stereo_num_disparities(p, l->width),
                                           RECTIFY_SEARCH))) {
        cli_status(CMD, ctx, st);
        return 0;
    }
    if (matched < RECTIFY_MIN_MATCHES || fabs(dy) <= RECTIFY_MAX_DY)
        return 1;
    if (raw)
        cli_error(CMD,
                  "%s: does not fit %s and %s: after rectification matching features are %.1f "
                  "px apart vertically (median of %d); check the calibration or pass "
                  "--no-rectify-check",
                  j->calib, j->left, j->right, dy, matched);
    else
        cli_error(CMD,
                  "%s: not rectified with %s: matching features are %.1f px apart "
                  "vertically (median of %d); rectify the pair or pass --no-rectify-check",
                  j->right, j->left, dy, matched);
    return 0;
}

static int run(sinew_ctx *ctx, const job *j, const sinew_stereo_params *p)
{
    int rc = CLI_FAIL, st;
    sinew_image l = {0}, r = {0}, d = {0}, rd = {0}, m = {0}, c = {0}, z = {0}, zl = {0};
    sinew_image lr = {0}, rr = {0}, il = {0}, ir = {0};
    sinew_stereo_rig rig;
    sinew_stereo_rectification rect;
    memset(&rig, 0, sizeof rig);
    if (j->calib && (st = sinew_stereo_rig_load(ctx, &rig, j->calib))) {
        cli_status(CMD, ctx, st);
        goto done;
    }
    if ((st = sinew_image_read(ctx, &l, j->left)) || (st = sinew_image_read(ctx, &r, j->right))) {
        cli_status(CMD, ctx, st);
        goto done;
    }
    if (l.width != r.width || l.height != r.height) {
        cli_error(CMD, "%s: %dx%d, but %s is %dx%d", j->right, r.width, r.height, j->left, l.width,
                  l.height);
        goto done;
    }
    sinew_stereo_calib calib = rig.calib;
    if (j->calib && !size_ok(j, rig.raw ? rig.left.width : calib.width,
                             rig.raw ? rig.left.height : calib.height, &l))
        goto done;
    if (rig.raw) {
        if ((st = sinew_stereo_rectify_init(ctx, &rect, &rig, l.width, l.height)) ||
            (st = sinew_stereo_rectify_image(ctx, &lr, &il, &l, &rect, 0)) ||
            (st = sinew_stereo_rectify_image(ctx, &rr, &ir, &r, &rect, 1))) {
            cli_status(CMD, ctx, st);
            goto done;
        }
        calib = rect.calib;
    }
    const sinew_image *L = rig.raw ? &lr : &l, *R = rig.raw ? &rr : &r;
    if (!j->no_rectify_check && !rectified_ok(ctx, j, p, L, R, rig.raw))
        goto done;
    if ((st = sinew_image_alloc(ctx, &d, l.width, l.height, 1, SINEW_F32)) ||
        (st = sinew_image_alloc(ctx, &rd, l.width, l.height, 1, SINEW_F32)) ||
        (st = sinew_image_alloc(ctx, &m, l.width, l.height, 1, SINEW_U8)) ||
        (st = sinew_image_alloc(ctx, &c, l.width, l.height, 1, SINEW_F32))) {
        cli_status(CMD, ctx, st);
        goto done;
    }
    sinew_stereo_output o = {.disparity = &d, .right = &rd, .mask = &m, .confidence = &c};
    if ((st = sinew_stereo_run(ctx, &o, L, R, p)) ||
        (rig.raw && (st = sinew_stereo_mark_outside(ctx, &o, &il, &ir)))) {
        cli_status(CMD, ctx, st);
        goto done;
    }
    int64_t valid = 0;
    if (j->calib && (st = sinew_stereo_depth(ctx, &z, &d, &m, &calib, &valid))) {
        cli_status(CMD, ctx, st);
        goto done;
    }
    const int back = rig.raw && !j->depth_rectified; /* depth in the left frame's pixels */
    if (back && (st = sinew_stereo_unrectify_depth(ctx, &zl, &z, &rect, &valid))) {
        cli_status(CMD, ctx, st);
        goto done;
    }
    const sinew_image *zout = back ? &zl : &z;
    if ((st = sinew_stereo_write_map(ctx, j->out, &d, 256.0)) ||
        (j->rout && (st = sinew_stereo_write_map(ctx, j->rout, &rd, 256.0))) ||
        (j->depth && (st = sinew_stereo_write_map(ctx, j->depth, zout, 1000.0)))) {
        cli_status(CMD, ctx, st);
        goto done;
    }
    if (j->check &&
        write_check(ctx, j, &o, L, j->calib ? zout : NULL, p, rig.raw ? &rect : NULL, R))
        goto done;
    printf("%s: %dx%d%s, disparities %d..%d, kept %.1f%% (left-right inconsistent %.1f%%, "
           "outside %.1f%%)%s",
           j->out, l.width, l.height, rig.raw ? " rectified" : "", o.stats.min_disparity,
           o.stats.min_disparity + o.stats.num_disparities - 1,
           100.0 * (double)o.stats.kept / (double)o.stats.pixels,
           100.0 * (double)o.stats.reason[0] / (double)o.stats.pixels,
           100.0 * (double)o.stats.reason[1] / (double)o.stats.pixels, j->calib ? "" : "\n");
    if (j->calib)
        printf(", depth valid %.1f%%%s\n", 100.0 * (double)valid / (double)o.stats.pixels,
               back ? " (left frame pixels)" : "");
    if (j->truth && score(ctx, j, &d))
        goto done;
    rc = CLI_OK;
done:;
    sinew_image *all[] = {&l, &r, &d, &rd, &m, &c, &z, &zl, &lr, &rr, &il, &ir};
    for (size_t i = 0; i < sizeof all / sizeof all[0]; i++)
        sinew_image_free(all[i]);
    return rc;
}

/* The extensions sinew_stereo_write_map accepts (case-insensitive). */
static int map_ext_ok(const char *path)
{
    const size_t n = strlen(path);
    if (n < 4)
        return 0;
    const char *e = path + n - 4;
    return !strcasecmp(e, ".npy") || !strcasecmp(e, ".pfm") || !strcasecmp(e, ".png");
}

static int parse_int(const char *opt, const char *arg, long lo, long hi, int *out)
{
    long v;
    if (cli_parse_int(arg, lo, hi, &v))
        return cli_usage_error(CMD, "%s needs an integer %ld..%ld, got '%s'", opt, lo, hi, arg);
    *out = (int)v;
    return 0;
}

int cmd_stereo(int argc, char **argv)
{
    static const struct option opts[] = {
        {"output", required_argument, NULL, 'o'},
        {"right", required_argument, NULL, OPT_RIGHT},
        {"check", required_argument, NULL, OPT_CHECK},
        {"calib", required_argument, NULL, OPT_CALIB},
        {"depth", required_argument, NULL, OPT_DEPTH},
        {"preset", required_argument, NULL, OPT_PRESET},
        {"disparities", required_argument, NULL, OPT_NDISP},
        {"min-disparity", required_argument, NULL, OPT_MINDISP},
        {"p1", required_argument, NULL, OPT_P1},
        {"p2", required_argument, NULL, OPT_P2},
        {"lr-tolerance", required_argument, NULL, OPT_LRTOL},
        {"threads", required_argument, NULL, 't'},
        {"no-rectify-check", no_argument, NULL, OPT_NORECT},
        {"truth", required_argument, NULL, OPT_TRUTH},
        {"truth-scale", required_argument, NULL, OPT_TRUTH_SCALE},
        {"occ", required_argument, NULL, OPT_OCC},
        {"depth-rectified", no_argument, NULL, OPT_DEPTH_RECT},
        {"help", no_argument, NULL, 'h'},
        {NULL, 0, NULL, 0},
    };
    job j = {.preset = "balanced", .truth_scale = 256.0};
    sinew_stereo_params p;
    sinew_stereo_params_default(&p);
    int ndisp = -1, mindisp = 0, p1 = -1, p2 = -1, threads = 0, c, bad;
    double lrtol = -1;
    optind = 0;
    opterr = 0;
    while ((c = getopt_long(argc, argv, ":ho:t:", opts, NULL)) != -1) {
        bad = 0;
        switch (c) {
        case 'h':
            usage(stdout);
            return CLI_OK;
        case 'o':
            j.out = optarg;
            break;
        case OPT_RIGHT:
            j.rout = optarg;
            break;
        case OPT_CHECK:
            j.check = optarg;
            break;
        case OPT_CALIB:
            j.calib = optarg;
            break;
        case OPT_DEPTH:
            j.depth = optarg;
            break;
        case OPT_PRESET:
            if (sinew_stereo_preset(&p, optarg))
                return cli_usage_error(CMD, "--preset must be fast or balanced, got '%s'", optarg);
            j.preset = optarg;
            break;
        case OPT_NDISP:
            bad = parse_int("--disparities", optarg, 1, 1024, &ndisp);
            break;
        case OPT_MINDISP:
            bad = parse_int("--min-disparity", optarg, -1024, 1024, &mindisp);
            break;
        case OPT_P1:
            bad = parse_int("--p1", optarg, 0, 1000, &p1);
            break;
        case OPT_P2:
            bad = parse_int("--p2", optarg, 0, 1000, &p2);
            break;
        case OPT_LRTOL:
            if (cli_parse_double(optarg, &lrtol) || !(lrtol >= 0) || !isfinite(lrtol))
                return cli_usage_error(CMD, "--lr-tolerance needs a number >= 0, got '%s'", optarg);
            break;
        case 't':
            bad = parse_int("--threads", optarg, 0, 4096, &threads);
            break;
        case OPT_NORECT:
            j.no_rectify_check = 1;
            break;
        case OPT_TRUTH:
            j.truth = optarg;
            break;
        case OPT_TRUTH_SCALE:
            if (cli_parse_double(optarg, &j.truth_scale) || !(j.truth_scale > 0) ||
                !isfinite(j.truth_scale))
                return cli_usage_error(CMD, "--truth-scale needs a number > 0, got '%s'", optarg);
            break;
        case OPT_OCC:
            j.occ = optarg;
            break;
        case OPT_DEPTH_RECT:
            j.depth_rectified = 1;
            break;
        default:
            return cli_bad_option(CMD, opts, argv[optind - 1]);
        }
        if (bad)
            return bad;
    }
    if (argc - optind != 2)
        return cli_usage_error(CMD, "needs two frames: LEFT RIGHT");
    j.left = argv[optind];
    j.right = argv[optind + 1];
    if (!j.out)
        return cli_usage_error(CMD, "-o DISP is required");
    if (j.depth && !j.calib)
        return cli_usage_error(CMD, "--depth needs --calib FILE");
    if (j.depth_rectified && !j.depth)
        return cli_usage_error(CMD, "--depth-rectified needs --depth DEPTH");
    /* refuse an output format before spending the matching time on it */
    const char *outs[3] = {j.out, j.rout, j.depth};
    for (int i = 0; i < 3; i++)
        if (outs[i] && !map_ext_ok(outs[i]))
            return cli_usage_error(CMD, "%s: write .npy, .pfm or .png (16-bit)", outs[i]);
    if (j.occ && !j.truth)
        return cli_usage_error(CMD, "--occ needs --truth FILE");
    /* explicit options override the preset, whichever order they came in */
    if (ndisp > 0)
        p.num_disparities = ndisp;
    p.min_disparity = mindisp;
    if (p1 >= 0)
        p.p1 = p1;
    if (p2 >= 0)
        p.p2 = p2;
    if (lrtol >= 0)
        p.lr_tolerance = lrtol;
    if (p.p2 < p.p1)
        return cli_usage_error(CMD, "--p2 must be >= --p1 (got %d < %d)", p.p2, p.p1);
    sinew_ctx *ctx = cli_ctx(CMD, threads);
    if (!ctx)
        return CLI_FAIL;
    const int rc = run(ctx, &j, &p);
    sinew_ctx_free(ctx);
    return rc;
}
