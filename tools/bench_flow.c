/* SPDX-License-Identifier: MIT */
/* Flow benchmark program behind `make bench` (not part of build/sinew): accuracy on the
 * Middlebury training pairs (Baker et al., IJCV 2011) and the FlyingChairs examples
 * (Dosovitskiy et al., ICCV 2015), median run times, ms per megapixel at four frame sizes,
 * thread scaling and peak memory, for every preset and for the Horn-Schunck baseline run
 * in the same process, so ratios compare across machines.
 *
 *   bench_flow DATA_DIR [--runs N] [--rss fast=B1/B2,balanced=B1/B2,...]   print the table
 *   bench_flow --rss-probe PRESET DATA_DIR W H [PAIR]   print the peak-RSS growth in bytes
 *                                                       (PAIR: index in pair_names, default
 *                                                       5 = Urban2, gray; 8 = chairs, colour)
 *   bench_flow --swing PRESET                           print the displacement sweep only
 *   bench_flow --inproc PRESET F0 F1 RUNS fwd|pair      median ms of the in-process work of
 *                                                       `sinew flow` (fwd: one forward
 *                                                       estimate) or of one `sinew run`
 *                                                       pair (pair: both estimates + check),
 *                                                       frames decoded once, one warm-up
 *                                                       (tools/bench_run compares the
 *                                                       whole commands against it)
 *
 * Displacement sweep: the demo scene's probe swung across the view at 640x480
 * (sinew_synth_params.swing, exact ground truth), mean EPE over the probe's pixels of
 * frame 0 (label 4), one frame pair per speed in swing_px.
 *
 * Memory is reported as bytes per pixel plus a fixed overhead: the line through the
 * growth of one forward estimate at RSS_SIZES (B1, B2; one process each, as ru_maxrss
 * only rises).
 */
#define _POSIX_C_SOURCE 200809L
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <time.h>

#include "flow/sinew.h"
#include "tools/bench_util.h"

#define NPRESET 4
static const char *presets[NPRESET] = {"fast", "balanced", "accurate", "baseline"};
#define NPAIR 10
static const char *pair_names[NPAIR] = {"Dimetrodon",  "Grove2",  "Grove3", "Hydrangea",
                                        "RubberWhale", "Urban2",  "Urban3", "Venus",
                                        "chairs-0",    "chairs-1"};
static const int sizes[4][2] = {{320, 240}, {640, 480}, {1280, 1024}, {1920, 1080}};
static const double rss_px[2] = {1920.0 * 1080.0, 3840.0 * 2160.0}; /* tools/bench */

#define die(ctx, what) bench_die("bench_flow", ctx, what)

#define NSWING 6
static const double swing_px[NSWING] = {8, 16, 32, 64, 128, 192};

/* Mean EPE of `preset` over the probe's pixels of the demo scene's swing pair at
 * `speed` px/frame, 640x480. */
static double swing_epe(sinew_ctx *ctx, sinew_estimator *e, double speed)
{
    sinew_synth_params sp;
    sinew_synth_params_default(&sp);
    sp.frames = 2;
    sp.swing = speed;
    sinew_synth *s;
    sinew_image a, b, gt, lab, f;
    int W = sp.width, H = sp.height;
    if (sinew_synth_new(ctx, &s, &sp) || sinew_image_alloc(ctx, &a, W, H, 3, SINEW_U8) ||
        sinew_image_alloc(ctx, &b, W, H, 3, SINEW_U8) ||
        sinew_image_alloc(ctx, &lab, W, H, 1, SINEW_U8) ||
        sinew_image_alloc(ctx, &gt, W, H, 2, SINEW_F32) ||
        sinew_image_alloc(ctx, &f, W, H, 2, SINEW_F32) ||
        sinew_synth_render(s, 0, &a, NULL, &lab) || sinew_synth_render(s, 1, &b, NULL, NULL) ||
        sinew_synth_truth(s, 0, 1, &gt, NULL, NULL) || sinew_estimator_run(e, &f, NULL, &a, &b))
        die(ctx, "swing");
    double sum = 0;
    long cnt = 0;
    for (int y = 0; y < H; y++) {
        const float *g = sinew_image_row_f32(&gt, y), *q = sinew_image_row_f32(&f, y);
        const uint8_t *l = sinew_image_row_u8(&lab, y);
        for (int x = 0; x < W; x++) {
            if (l[x] != 4 || !isfinite(g[2 * x]))
                continue;
            sum += hypot(q[2 * x] - g[2 * x], q[2 * x + 1] - g[2 * x + 1]);
            cnt++;
        }
    }
    sinew_image *imgs[] = {&a, &b, &gt, &lab, &f};
    for (int i = 0; i < 5; i++)
        sinew_image_free(imgs[i]);
    sinew_synth_free(s);
    return cnt ? sum / (double)cnt : NAN;
}

/* Bilinear resize of an 8/16-bit frame (for the size sweep). */
static void resize(sinew_ctx *ctx, sinew_image *dst, const sinew_image *src, int w, int h)
{
    if (sinew_image_alloc(ctx, dst, w, h, src->channels, src->type))
        die(ctx, "resize");
    for (int y = 0; y < h; y++) {
        double sy = ((double)y + 0.5) * src->height / h - 0.5;
        sy = sy < 0 ? 0 : (sy > src->height - 1 ? src->height - 1 : sy);
        int y0 = (int)sy, y1 = y0 + 1 < src->height ? y0 + 1 : y0;
        double fy = sy - y0;
        for (int x = 0; x < w; x++) {
            double sx = ((double)x + 0.5) * src->width / w - 0.5;
            sx = sx < 0 ? 0 : (sx > src->width - 1 ? src->width - 1 : sx);
            int x0 = (int)sx, x1 = x0 + 1 < src->width ? x0 + 1 : x0;
            double fx = sx - x0;
            for (int c = 0; c < src->channels; c++) {
                int C = src->channels;
                double a, b, cc, d;
                if (src->type == SINEW_U8) {
                    a = sinew_image_row_u8(src, y0)[x0 * C + c];
                    b = sinew_image_row_u8(src, y0)[x1 * C + c];
                    cc = sinew_image_row_u8(src, y1)[x0 * C + c];
                    d = sinew_image_row_u8(src, y1)[x1 * C + c];
                } else {
                    a = sinew_image_row_u16(src, y0)[x0 * C + c];
                    b = sinew_image_row_u16(src, y0)[x1 * C + c];
                    cc = sinew_image_row_u16(src, y1)[x0 * C + c];
                    d = sinew_image_row_u16(src, y1)[x1 * C + c];
                }
                double v = (1 - fy) * ((1 - fx) * a + fx * b) + fy * ((1 - fx) * cc + fx * d);
                if (src->type == SINEW_U8)
                    sinew_image_row_u8(dst, y)[x * C + c] = (uint8_t)lround(v);
                else
                    sinew_image_row_u16(dst, y)[x * C + c] = (uint16_t)lround(v);
            }
        }
    }
}

typedef struct pair {
    sinew_image f0, f1, gt;
} pair;

static void load_pair(sinew_ctx *ctx, pair *p, const char *data, int i)
{
    char a[1024], b[1024], g[1024];
    if (i < 8) {
        snprintf(a, sizeof a, "%s/middlebury/%s/frame10.png", data, pair_names[i]);
        snprintf(b, sizeof b, "%s/middlebury/%s/frame11.png", data, pair_names[i]);
        snprintf(g, sizeof g, "%s/middlebury/%s/flow10.flo", data, pair_names[i]);
    } else {
        snprintf(a, sizeof a, "%s/flyingchairs/examples/%07d-img0.ppm", data, i - 8);
        snprintf(b, sizeof b, "%s/flyingchairs/examples/%07d-img1.ppm", data, i - 8);
        snprintf(g, sizeof g, "%s/flyingchairs/examples/%07d-gt.flo", data, i - 8);
    }
    if (sinew_image_read(ctx, &p->f0, a) || sinew_image_read(ctx, &p->f1, b) ||
        sinew_flow_read(ctx, &p->gt, g, SINEW_FLOW_AUTO))
        die(ctx, "load");
}

/* Median wall time of `runs` estimates; the flow of the last run stays in fl. */
static double time_runs(sinew_estimator *e, sinew_image *fl, const sinew_image *a,
                        const sinew_image *b, int runs, sinew_ctx *ctx)
{
    double t[64];
    if (runs > 64)
        runs = 64;
    for (int r = 0; r < runs; r++) {
        double t0 = bench_now();
        if (sinew_estimator_run(e, fl, NULL, a, b))
            die(ctx, "run");
        t[r] = bench_now() - t0;
    }
    qsort(t, (size_t)runs, sizeof t[0], bench_cmp_double);
    return runs % 2 ? t[runs / 2] : 0.5 * (t[runs / 2 - 1] + t[runs / 2]);
}

static sinew_estimator *make_est(sinew_ctx *ctx, const char *preset)
{
    sinew_flow_params p;
    sinew_estimator *e;
    if (sinew_flow_params_preset(&p, preset) || sinew_estimator_new(ctx, &e, &p))
        die(ctx, preset);
    return e;
}

static long max_rss_kb(void)
{
    struct rusage ru;
    getrusage(RUSAGE_SELF, &ru);
    return ru.ru_maxrss;
}

/* Peak-RSS growth of one w x h forward estimate (pair `which` resized), in bytes. */
static int rss_probe(const char *preset, const char *data, int w, int h, int which)
{
    sinew_ctx *ctx = sinew_ctx_new();
    pair p;
    load_pair(ctx, &p, data, which >= 0 && which < NPAIR ? which : 5);
    sinew_image a, b, fl;
    resize(ctx, &a, &p.f0, w, h);
    resize(ctx, &b, &p.f1, w, h);
    if (sinew_image_alloc(ctx, &fl, w, h, 2, SINEW_F32))
        die(ctx, "alloc");
    memset(fl.data, 0, fl.stride * (size_t)h); /* touch the output so it is counted before */
    sinew_estimator *e = make_est(ctx, preset);
    long before = max_rss_kb();
    if (sinew_estimator_run(e, &fl, NULL, &a, &b))
        die(ctx, "run");
    long after = max_rss_kb();
    printf("%.0f\n", (double)(after - before) * 1024.0);
    return 0;
}

/* --inproc: median ms of RUNS repeats of the estimator (and check) work alone. */
static int inproc(const char *preset, const char *a, const char *b, int runs, int pair_mode)
{
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image f0, f1, fw, bw, err, mask, conf;
    if (!ctx || sinew_image_read(ctx, &f0, a) || sinew_image_read(ctx, &f1, b))
        die(ctx, "load");
    int w = f0.width, h = f0.height;
    if (sinew_image_alloc(ctx, &fw, w, h, 2, SINEW_F32) ||
        sinew_image_alloc(ctx, &bw, w, h, 2, SINEW_F32) ||
        sinew_image_alloc(ctx, &err, w, h, 1, SINEW_F32) ||
        sinew_image_alloc(ctx, &mask, w, h, 1, SINEW_U8) ||
        sinew_image_alloc(ctx, &conf, w, h, 1, SINEW_F32))
        die(ctx, "alloc");
    sinew_estimator *e = make_est(ctx, preset);
    double t[64];
    runs = runs < 1 ? 1 : runs > 63 ? 63 : runs;
    for (int r = -1; r < runs; r++) { /* r = -1: warm-up */
        double t0 = bench_now();
        if (sinew_estimator_run(e, &fw, pair_mode ? &bw : NULL, &f0, &f1))
            die(ctx, "run");
        if (pair_mode) {
            sinew_check_input in = {&fw, &bw, &f0, &f1, NULL, NULL};
            sinew_check_output out = {&err, &mask, &conf, {0}, NULL};
            if (sinew_check_run(ctx, &out, &in, NULL))
                die(ctx, "check");
        }
        if (r >= 0)
            t[r] = bench_now() - t0;
    }
    qsort(t, (size_t)runs, sizeof t[0], bench_cmp_double);
    printf("%.1f\n", 1e3 * (runs % 2 ? t[runs / 2] : 0.5 * (t[runs / 2 - 1] + t[runs / 2])));
    sinew_image *imgs[] = {&f0, &f1, &fw, &bw, &err, &mask, &conf};
    for (int i = 0; i < 7; i++)
        sinew_image_free(imgs[i]);
    sinew_estimator_free(e);
    sinew_ctx_free(ctx);
    return 0;
}

int main(int argc, char **argv)
{
    if (argc == 7 && !strcmp(argv[1], "--inproc"))
        return inproc(argv[2], argv[3], argv[4], atoi(argv[5]), !strcmp(argv[6], "pair"));
    if ((argc == 6 || argc == 7) && !strcmp(argv[1], "--rss-probe"))
        return rss_probe(argv[2], argv[3], atoi(argv[4]), atoi(argv[5]),
                         argc == 7 ? atoi(argv[6]) : 5);
    if (argc == 3 && !strcmp(argv[1], "--swing")) {
        sinew_ctx *ctx = sinew_ctx_new();
        sinew_estimator *e = make_est(ctx, argv[2]);
        for (int z = 0; z < NSWING; z++)
            printf("swing %3.0f px/frame: probe EPE %.3f\n", swing_px[z],
                   swing_epe(ctx, e, swing_px[z]));
        sinew_estimator_free(e);
        sinew_ctx_free(ctx);
        return 0;
    }
    if (argc < 2) {
        fprintf(stderr, "usage: bench_flow DATA_DIR [--runs N] [--rss LIST]\n");
        return 2;
    }
    const char *data = argv[1], *rss = "";
    int runs = 5;
    for (int i = 2; i + 1 < argc; i += 2) {
        if (!strcmp(argv[i], "--runs"))
            runs = atoi(argv[i + 1]) > 0 ? atoi(argv[i + 1]) : 5;
        else if (!strcmp(argv[i], "--rss"))
            rss = argv[i + 1];
    }
    sinew_ctx *ctx = sinew_ctx_new();
    if (!ctx)
        return 1;
    pair pairs[NPAIR];
    for (int i = 0; i < NPAIR; i++)
        load_pair(ctx, &pairs[i], data, i);

    double epe[NPRESET][NPAIR], fl[NPRESET][NPAIR], ms[NPRESET][NPAIR];
    double mspx[NPRESET][4], scale[NPRESET], swing[NPRESET][NSWING];
    for (int k = 0; k < NPRESET; k++) {
        sinew_estimator *e = make_est(ctx, presets[k]);
        for (int i = 0; i < NPAIR; i++) {
            pair *p = &pairs[i];
            sinew_image f;
            if (sinew_image_alloc(ctx, &f, p->f0.width, p->f0.height, 2, SINEW_F32))
                die(ctx, "alloc");
            double t = time_runs(e, &f, &p->f0, &p->f1, runs, ctx);
            sinew_flow_errors er;
            if (sinew_flow_errors_compute(ctx, &er, &f, &p->gt, NULL, NULL))
                die(ctx, "metrics");
            sinew_flow_summary sm;
            sinew_flow_stats_summarize(&sm, &er.region[SINEW_REGION_ALL]);
            epe[k][i] = sm.epe;
            fl[k][i] = sm.fl_all_pct;
            ms[k][i] = 1e3 * t;
            sinew_image_free(&f);
        }
        for (int z = 0; z < NSWING; z++)
            swing[k][z] = swing_epe(ctx, e, swing_px[z]);
        /* size sweep on the Urban2 pair, resized */
        for (int z = 0; z < 4; z++) {
            int w = sizes[z][0], h = sizes[z][1];
            sinew_image a, b, f;
            resize(ctx, &a, &pairs[5].f0, w, h);
            resize(ctx, &b, &pairs[5].f1, w, h);
            if (sinew_image_alloc(ctx, &f, w, h, 2, SINEW_F32))
                die(ctx, "alloc");
            int zr = z >= 2 && k >= 2 ? (runs < 3 ? runs : 3) : runs;
            double t = time_runs(e, &f, &a, &b, zr, ctx);
            mspx[k][z] = 1e3 * t / ((double)w * h / 1e6);
            if (z == 1) {
                /* thread scaling at 640x480: 1 thread vs 2 threads */
                int old = sinew_ctx_threads(ctx);
                sinew_ctx_set_threads(ctx, 1);
                double t1 = time_runs(e, &f, &a, &b, runs, ctx);
                sinew_ctx_set_threads(ctx, 2);
                double t2 = time_runs(e, &f, &a, &b, runs, ctx);
                sinew_ctx_set_threads(ctx, old);
                scale[k] = t1 / t2;
            }
            sinew_image_free(&a);
            sinew_image_free(&b);
            sinew_image_free(&f);
        }
        sinew_estimator_free(e);
    }

    /* one table: rows = pairs and summary lines, column groups = presets */
    printf("| %-22s |", "pair / measure");
    for (int k = 0; k < NPRESET; k++)
        printf(" %-27s |", presets[k]);
    printf("\n|%s|", "------------------------");
    for (int k = 0; k < NPRESET; k++)
        printf("%s|", "-----------------------------");
    printf("\n");
    for (int i = 0; i < NPAIR; i++) {
        printf("| %-22s |", pair_names[i]);
        for (int k = 0; k < NPRESET; k++)
            printf(" EPE %6.3f Fl %5.2f%% %6.1fms |", epe[k][i], fl[k][i], ms[k][i]);
        printf("\n");
    }
    double mb[NPRESET], ch[NPRESET], mbt[NPRESET];
    for (int k = 0; k < NPRESET; k++) {
        mb[k] = ch[k] = mbt[k] = 0;
        for (int i = 0; i < 8; i++) {
            mb[k] += epe[k][i] / 8;
            mbt[k] += ms[k][i] / 8;
        }
        ch[k] = 0.5 * (epe[k][8] + epe[k][9]);
    }
    printf("| %-22s |", "Middlebury mean EPE");
    for (int k = 0; k < NPRESET; k++)
        printf(" %-27.3f |", mb[k]);
    printf("\n| %-22s |", "Middlebury mean Fl-all");
    for (int k = 0; k < NPRESET; k++) {
        double s = 0;
        for (int i = 0; i < 8; i++)
            s += fl[k][i] / 8;
        printf(" %-26.2f%% |", s);
    }
    printf("\n| %-22s |", "Chairs mean EPE");
    for (int k = 0; k < NPRESET; k++)
        printf(" %-27.3f |", ch[k]);
    printf("\n| %-22s |", "Chairs mean Fl-all");
    for (int k = 0; k < NPRESET; k++)
        printf(" %-26.2f%% |", 0.5 * (fl[k][8] + fl[k][9]));
    for (int z = 0; z < NSWING; z++) {
        char lab[64];
        snprintf(lab, sizeof lab, "swing %3.0f px/f, probe", swing_px[z]);
        printf("\n| %-22s |", lab);
        for (int k = 0; k < NPRESET; k++)
            printf(" EPE %-23.3f |", swing[k][z]);
    }
    for (int z = 0; z < 4; z++) {
        char lab[64];
        snprintf(lab, sizeof lab, "ms/Mpx %dx%d", sizes[z][0], sizes[z][1]);
        printf("\n| %-22s |", lab);
        for (int k = 0; k < NPRESET; k++)
            printf(" %-27.1f |", mspx[k][z]);
    }
    printf("\n| %-22s |", "ms at 640x480");
    for (int k = 0; k < NPRESET; k++)
        printf(" %-27.1f |", mspx[k][1] * 0.3072);
    printf("\n| %-22s |", "speed-up 1 -> 2 threads");
    for (int k = 0; k < NPRESET; k++)
        printf(" %-27.2f |", scale[k]);
    double slope[NPRESET], fixed[NPRESET];
    for (int k = 0; k < NPRESET; k++) {
        const char *q = strstr(rss, presets[k]);
        double b1 = NAN, b2 = NAN;
        if (q && sscanf(q + strlen(presets[k]), "=%lf/%lf", &b1, &b2) != 2)
            b1 = b2 = NAN;
        slope[k] = (b2 - b1) / (rss_px[1] - rss_px[0]);
        fixed[k] = b1 - slope[k] * rss_px[0];
    }
    printf("\n| %-22s |", "peak RSS B/px");
    for (int k = 0; k < NPRESET; k++)
        printf(" %-27.1f |", slope[k]);
    printf("\n| %-22s |", "... + fixed MiB");
    for (int k = 0; k < NPRESET; k++)
        printf(" %-27.1f |", fixed[k] / 1048576.0);
    printf("\n| %-22s |", "time / baseline (MB)");
    for (int k = 0; k < NPRESET; k++)
        printf(" %-27.3f |", mbt[k] / mbt[NPRESET - 1]);
    printf("\n| %-22s |", "EPE / baseline (MB)");
    for (int k = 0; k < NPRESET; k++)
        printf(" %-27.3f |", mb[k] / mb[NPRESET - 1]);
    printf("\n");
    for (int i = 0; i < NPAIR; i++) {
        sinew_image_free(&pairs[i].f0);
        sinew_image_free(&pairs[i].f1);
        sinew_image_free(&pairs[i].gt);
    }
    sinew_ctx_free(ctx);
    return 0;
}
