/* SPDX-License-Identifier: MIT */
/* Stereo benchmark program behind `make bench` (not part of build/sinew): accuracy of
 * sinew_stereo_run on the published pairs in $SINEW_DATA/stereo (Middlebury 2003 Teddy
 * and Cones, quarter size, Scharstein & Szeliski CVPR 2003; Middlebury 2001 Tsukuba and
 * Venus, Scharstein & Szeliski IJCV 2002; KITTI 2015 frame 000146, Menze & Geiger CVPR
 * 2015): bad-1px and bad-2px on non-occluded pixels (every pixel of the filled estimate
 * counted), mean absolute error, KITTI D1, occlusion F1 of the left-right check against
 * the datasets' masks; median time per pair and at 640x480 beside the balanced flow
 * preset on the same frames.
 *
 *   bench_stereo DATA_DIR [--runs N] [--preset P] [--p1 N] [--p2 N] [--paths N]
 *                [--budget MIB] [--save DIR]
 * --save writes each pair's filled disparity as DIR/NAME.pfm for side-by-side scripts. */
#define _POSIX_C_SOURCE 200809L
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "flow/sinew.h"
#include "tools/bench_util.h"

typedef struct pair {
    const char *name, *dir, *left, *right, *truth, *nonocc, *all;
    double scale; /* true disparity = code / scale (SOURCES of the data, section 6) */
    int ndisp;    /* disparities searched: the smallest multiple of 16 above the true max */
} pair;

/* Conventions from the datasets' own documentation (Middlebury: disparity scale per set;
 * KITTI 2015 devkit: 16-bit value / 256). */
static const pair pairs[] = {
    {"teddy", "middlebury2003/teddy", "im2.png", "im6.png", "disp2.png", "nonocc.png", "all.png", 4,
     64},
    {"cones", "middlebury2003/cones", "im2.png", "im6.png", "disp2.png", "nonocc.png", "all.png", 4,
     64},
    {"tsukuba", "middlebury2001/tsukuba", "scene1.row3.col3.ppm", "scene1.row3.col4.ppm",
     "truedisp.row3.col3.pgm", "nonocc.png", "all.png", 16, 16},
    {"venus", "middlebury2001/venus", "im2.ppm", "im6.ppm", "disp2.pgm", "nonocc.png", "all.png", 8,
     32},
    {"kitti000146", "kitti2015/000146", "image_2/000146_10.png", "image_3/000146_10.png",
     "disp_noc_0/000146_10.png", NULL, NULL, 256, 128},
};
#define NPAIRS (sizeof pairs / sizeof pairs[0])

#define die(ctx, what) bench_die("bench_stereo", ctx, what)

static void load(sinew_ctx *ctx, sinew_image *im, const char *data, const char *dir,
                 const char *file)
{
    char path[4096];
    snprintf(path, sizeof path, "%s/stereo/%s/%s", data, dir, file);
    if (sinew_image_read(ctx, im, path))
        die(ctx, path);
}

/* Occluded-truth mask: known (all) but not non-occluded, as 0/1 U8. */
static void occlusion_truth(sinew_ctx *ctx, sinew_image *occ, sinew_image *valid,
                            const sinew_image *nonocc, const sinew_image *all)
{
    if (sinew_image_alloc(ctx, occ, all->width, all->height, 1, SINEW_U8) ||
        sinew_image_alloc(ctx, valid, all->width, all->height, 1, SINEW_U8))
        die(ctx, "mask");
    for (int y = 0; y < all->height; y++)
        for (int x = 0; x < all->width; x++) {
            const int a = sinew_image_row_u8(all, y)[(size_t)x * all->channels] != 0;
            const int n = sinew_image_row_u8(nonocc, y)[(size_t)x * nonocc->channels] != 0;
            sinew_image_row_u8(valid, y)[x] = (uint8_t)a;
            sinew_image_row_u8(occ, y)[x] = (uint8_t)(a && !n);
        }
}

/* The alternative: the flow estimator (balanced preset) on the pair, disparity = -u
 * (flow maps left x to right x + u = x - d). Returns bad-1px in % over region. */
static double flow_bad1(sinew_ctx *ctx, const sinew_image *l, const sinew_image *r,
                        const sinew_image *truth, const sinew_image *region)
{
    sinew_flow_params fp;
    sinew_estimator *e = NULL;
    sinew_image fl, d;
    if (sinew_flow_params_preset(&fp, "balanced") || sinew_estimator_new(ctx, &e, &fp) ||
        sinew_image_alloc(ctx, &fl, l->width, l->height, 2, SINEW_F32) ||
        sinew_image_alloc(ctx, &d, l->width, l->height, 1, SINEW_F32) ||
        sinew_estimator_run(e, &fl, NULL, l, r))
        die(ctx, "flow");
    for (int y = 0; y < l->height; y++)
        for (int x = 0; x < l->width; x++)
            sinew_image_row_f32(&d, y)[x] = -sinew_image_row_f32(&fl, y)[2 * x];
    sinew_stereo_scores s;
    if (sinew_stereo_score(ctx, &s, &d, truth, region))
        die(ctx, "score");
    sinew_estimator_free(e);
    sinew_image_free(&fl);
    sinew_image_free(&d);
    return 100.0 * (double)s.bad1 / (double)s.pixels;
}

static double run_median(sinew_ctx *ctx, sinew_stereo_output *o, const sinew_image *l,
                         const sinew_image *r, const sinew_stereo_params *p, int runs)
{
    double t[32];
    for (int i = 0; i < runs; i++) {
        const double t0 = bench_now();
        if (sinew_stereo_run(ctx, o, l, r, p))
            die(ctx, "stereo");
        t[i] = bench_now() - t0;
    }
    qsort(t, (size_t)runs, sizeof t[0], bench_cmp_double);
    return t[runs / 2];
}

/* Crop or tile a frame to w x h (for the 640x480 timing). */
static void fit_frame(sinew_ctx *ctx, sinew_image *dst, const sinew_image *src, int w, int h)
{
    if (sinew_image_alloc(ctx, dst, w, h, src->channels, src->type))
        die(ctx, "resize");
    const size_t px = sinew_type_size(src->type) * (size_t)src->channels;
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++)
            memcpy((unsigned char *)sinew_image_row(dst, y) + (size_t)x * px,
                   (const unsigned char *)sinew_image_row(src, y % src->height) +
                       (size_t)(x % src->width) * px,
                   px);
}

int main(int argc, char **argv)
{
    if (argc < 2) {
        fprintf(stderr, "usage: bench_stereo DATA_DIR [--runs N] [--preset P] [--p1 N] [--p2 N] "
                        "[--paths N] [--p2-edge G] [--budget MIB] [--save DIR]\n");
        return 2;
    }
    const char *data = argv[1], *save = NULL;
    int runs = 3;
    sinew_stereo_params p;
    sinew_stereo_params_default(&p);
    const char *preset = "balanced";
    for (int i = 2; i + 1 < argc; i += 2) {
        const char *k = argv[i], *v = argv[i + 1];
        if (!strcmp(k, "--runs"))
            runs = atoi(v) < 1 ? 1 : (atoi(v) > 31 ? 31 : atoi(v));
        else if (!strcmp(k, "--preset")) {
            preset = v;
            if (sinew_stereo_preset(&p, v))
                return fprintf(stderr, "bench_stereo: unknown preset %s\n", v), 2;
        } else if (!strcmp(k, "--p1"))
            p.p1 = atoi(v);
        else if (!strcmp(k, "--p2"))
            p.p2 = atoi(v);
        else if (!strcmp(k, "--p2-edge"))
            p.p2_edge = atof(v);
        else if (!strcmp(k, "--paths"))
            p.paths = atoi(v);
        else if (!strcmp(k, "--budget"))
            p.memory_budget = (size_t)atol(v) << 20;
        else if (!strcmp(k, "--save"))
            save = v;
        else
            return fprintf(stderr, "bench_stereo: unknown option %s\n", k), 2;
    }
    sinew_ctx *ctx = sinew_ctx_new();
    if (!ctx)
        return 1;
    printf("stereo preset %s (paths %d, P1 %d, P2 %d), median of %d runs, default threads\n",
           preset, p.paths, p.p1, p.p2, runs);
    printf("%-12s %5s %8s %8s %7s %8s %8s %7s %8s %9s %9s\n", "pair", "D", "bad1-noc", "bad2-noc",
           "mae-noc", "bad1-all", "d1-noc", "occ-F1", "kept%", "time ms", "flow-bad1");
    double sum_bad1 = 0;
    int n_mb = 0;
    for (size_t k = 0; k < NPAIRS; k++) {
        const pair *pp = &pairs[k];
        sinew_image l, r, codes, truth, nonocc = {0}, all = {0}, disp, mask;
        load(ctx, &l, data, pp->dir, pp->left);
        load(ctx, &r, data, pp->dir, pp->right);
        load(ctx, &codes, data, pp->dir, pp->truth);
        if (pp->nonocc) {
            load(ctx, &nonocc, data, pp->dir, pp->nonocc);
            load(ctx, &all, data, pp->dir, pp->all);
        }
        if (sinew_stereo_truth(ctx, &truth, &codes, pp->scale) ||
            sinew_image_alloc(ctx, &disp, l.width, l.height, 1, SINEW_F32) ||
            sinew_image_alloc(ctx, &mask, l.width, l.height, 1, SINEW_U8))
            die(ctx, pp->name);
        sinew_stereo_params q = p;
        q.num_disparities = pp->ndisp;
        sinew_stereo_output o = {.disparity = &disp, .mask = &mask};
        const double t = run_median(ctx, &o, &l, &r, &q, runs);
        sinew_stereo_scores noc, al;
        if (sinew_stereo_score(ctx, &noc, &disp, &truth, pp->nonocc ? &nonocc : NULL) ||
            sinew_stereo_score(ctx, &al, &disp, &truth, pp->all ? &all : NULL))
            die(ctx, "score");
        double f1 = NAN;
        if (pp->nonocc) {
            sinew_image occ, valid;
            sinew_mask_scores ms;
            occlusion_truth(ctx, &occ, &valid, &nonocc, &all);
            if (sinew_mask_scores_compute(ctx, &ms, &mask, &occ, &valid, SINEW_MASK_OCCLUSION))
                die(ctx, "F1");
            sinew_mask_scores_rates(&ms, NULL, NULL, &f1);
            sinew_image_free(&occ);
            sinew_image_free(&valid);
        }
        const double np = (double)noc.pixels, na = (double)al.pixels;
        const double fbad = flow_bad1(ctx, &l, &r, &truth, pp->nonocc ? &nonocc : NULL);
        printf("%-12s %5d %7.2f%% %7.2f%% %7.3f %7.2f%% %7.2f%% %7.3f %7.1f%% %9.1f %8.2f%%\n",
               pp->name, o.stats.num_disparities, 100 * noc.bad1 / np, 100 * noc.bad2 / np,
               noc.abs_sum / np, 100 * al.bad1 / na, 100 * noc.d1 / np, f1,
               100.0 * (double)o.stats.kept / (double)o.stats.pixels, 1e3 * t, fbad);
        if (pp->nonocc) {
            sum_bad1 += 100 * noc.bad1 / np;
            n_mb++;
        }
        if (save) {
            char path[4096];
            snprintf(path, sizeof path, "%s/%s.pfm", save, pp->name);
            if (sinew_pfm_write_image(ctx, path, &disp))
                die(ctx, path);
        }
        sinew_image *all_im[] = {&l, &r, &codes, &truth, &nonocc, &all, &disp, &mask};
        for (size_t i = 0; i < sizeof all_im / sizeof all_im[0]; i++)
            sinew_image_free(all_im[i]);
    }
    printf("mean bad1-noc over the four Middlebury pairs: %.2f%%\n", sum_bad1 / n_mb);

    /* Speed at 640x480 (Teddy tiled), stereo with 64 disparities vs balanced flow. */
    sinew_image l0, r0, l, r, disp, fl, fb;
    load(ctx, &l0, data, pairs[0].dir, pairs[0].left);
    load(ctx, &r0, data, pairs[0].dir, pairs[0].right);
    fit_frame(ctx, &l, &l0, 640, 480);
    fit_frame(ctx, &r, &r0, 640, 480);
    if (sinew_image_alloc(ctx, &disp, 640, 480, 1, SINEW_F32) ||
        sinew_image_alloc(ctx, &fl, 640, 480, 2, SINEW_F32) ||
        sinew_image_alloc(ctx, &fb, 640, 480, 2, SINEW_F32))
        die(ctx, "alloc");
    sinew_stereo_params q = p;
    q.num_disparities = 64;
    sinew_stereo_output o = {.disparity = &disp};
    sinew_flow_params fp;
    if (sinew_flow_params_preset(&fp, "balanced"))
        die(ctx, "preset");
    sinew_estimator *e = NULL;
    if (sinew_estimator_new(ctx, &e, &fp))
        die(ctx, "estimator");
    /* one thread first (least disturbed by other load), then the default; stereo and
       flow runs alternate so both see the same machine */
    for (int th = 1; th >= 0; th--) {
        if (sinew_ctx_set_threads(ctx, th))
            die(ctx, "threads");
        double ts[32], tf[32];
        for (int i = 0; i < runs; i++) {
            ts[i] = run_median(ctx, &o, &l, &r, &q, 1);
            const double t0 = bench_now();
            if (sinew_estimator_run(e, &fl, &fb, &l, &r))
                die(ctx, "flow");
            tf[i] = bench_now() - t0;
        }
        qsort(ts, (size_t)runs, sizeof ts[0], bench_cmp_double);
        qsort(tf, (size_t)runs, sizeof tf[0], bench_cmp_double);
        printf("640x480, 64 disparities, %s: stereo %.1f ms, balanced flow %.1f ms (both "
               "directions), ratio %.2f\n",
               th ? "1 thread" : "default threads", 1e3 * ts[runs / 2], 1e3 * tf[runs / 2],
               ts[runs / 2] / tf[runs / 2]);
    }
    sinew_estimator_free(e);
    sinew_image *im[] = {&l0, &r0, &l, &r, &disp, &fl, &fb};
    for (size_t i = 0; i < sizeof im / sizeof im[0]; i++)
        sinew_image_free(im[i]);
    sinew_ctx_free(ctx);
    return 0;
}
