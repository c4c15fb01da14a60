/* SPDX-License-Identifier: MIT */
/* Fault injection across the library, in one place:
 *  - allocation failure: every reader (on every seed file of the fuzz corpus), every
 *    writer, check, matches, draw, metrics, depth and intrinsics, with the Nth
 *    allocation failing for N = 2, 3, ... until the call succeeds; each failing run
 *    must return SINEW_ENOMEM, free everything (the allocator counts live blocks) and
 *    leave no output file;
 *  - disk full: every writer under a file-size limit (RLIMIT_FSIZE with SIGXFSZ
 *    ignored, in a child process, so no root and no mount are needed) must fail with
 *    SINEW_EIO and a message naming the file, leave no partial or temporary file, and
 *    keep an earlier output of the same name byte for byte.
 * The module tests hold finer cases; this file guarantees nothing is left out. */
#define _POSIX_C_SOURCE 200809L
#include "tests/support/testutil.h"

#include <dirent.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

/* ---- allocation failures: readers ---- */

typedef enum reader {
    R_IMAGE,
    R_FLOW_AUTO,
    R_FLOW_KITTI,
    R_NPY_IMAGE,
    R_PFM_IMAGE,
    R_CAMERA,
} reader;

typedef struct read_job {
    reader r;
    const char *path;
} read_job;

static int read_op(sinew_ctx *ctx, void *ud)
{
    const read_job *j = ud;
    sinew_image img;
    memset(&img, 0xA5, sizeof img); /* readers must zero it on failure */
    int rc;
    switch (j->r) {
    case R_IMAGE:
        rc = sinew_image_read(ctx, &img, j->path);
        break;
    case R_FLOW_AUTO:
        rc = sinew_flow_read(ctx, &img, j->path, SINEW_FLOW_AUTO);
        break;
    case R_FLOW_KITTI:
        rc = sinew_flow_read(ctx, &img, j->path, SINEW_FLOW_KITTI);
        break;
    case R_NPY_IMAGE:
        rc = sinew_npy_read_image(ctx, &img, j->path);
        break;
    case R_PFM_IMAGE:
        rc = sinew_pfm_read_image(ctx, &img, j->path);
        break;
    case R_CAMERA: {
        sinew_camera cam;
        return sinew_camera_load(ctx, &cam, j->path);
    }
    default:
        return SINEW_EINTERNAL;
    }
    if (rc == SINEW_OK)
        sinew_image_free(&img);
    else
        assert_null(img.data);
    return rc;
}

/* Sweep every file of tests/fuzz/corpus/<sub> whose name ends in `suffix` that the
 * reader accepts. Returns the number swept. */
static int sweep_corpus(const char *sub, const char *suffix, reader r)
{
    char dir[256];
    snprintf(dir, sizeof dir, "tests/fuzz/corpus/%s", sub);
    DIR *d = opendir(dir);
    if (!d)
        return 0;
    int n = 0;
    struct dirent *e;
    sinew_ctx *probe = sinew_ctx_new();
    assert_non_null(probe);
    while ((e = readdir(d))) {
        size_t ln = strlen(e->d_name), ls = strlen(suffix);
        if (e->d_name[0] == '.' || ln < ls || strcmp(e->d_name + ln - ls, suffix))
            continue;
        char path[600];
        snprintf(path, sizeof path, "%s/%s", dir, e->d_name);
        read_job j = {r, path};
        if (read_op(probe, &j) != SINEW_OK) /* e.g. an 8-bit PNG as depth: not this reader's */
            continue;
        tu_fail_each_allocation(path, read_op, &j);
        n++;
    }
    closedir(d);
    sinew_ctx_free(probe);
    return n;
}

static void test_faults_every_reader(void **state)
{
    (void)state;
    if (!tu_file_exists("tests/fuzz/corpus/png/rgb8.png"))
        skip(); /* run from the repository root (tests/run does) */
    static const struct {
        const char *sub, *suffix;
        reader r;
        int min; /* seed files the reader must accept */
    } sweeps[] = {
        {"png", ".png", R_IMAGE, 6},          {"jpeg", ".jpg", R_IMAGE, 2},
        {"pnm", ".pgm", R_IMAGE, 2},          {"pnm", ".ppm", R_IMAGE, 2},
        {"flo", ".flo", R_FLOW_AUTO, 1},      {"kitti", ".png", R_FLOW_KITTI, 1},
        {"pfm", ".pfm", R_FLOW_AUTO, 2},      {"pfm", ".pfm", R_PFM_IMAGE, 3},
        {"npy", ".npy", R_FLOW_AUTO, 3},      {"npy", ".npy", R_NPY_IMAGE, 3},
        {"intrinsics", ".json", R_CAMERA, 1}, {"intrinsics", ".txt", R_CAMERA, 2},
    };
    for (size_t i = 0; i < sizeof sweeps / sizeof sweeps[0]; i++) {
        int n = sweep_corpus(sweeps[i].sub, sweeps[i].suffix, sweeps[i].r);
        if (n < sweeps[i].min)
            fail_msg("corpus %s/*%s: %d files swept, expected >= %d", sweeps[i].sub,
                     sweeps[i].suffix, n, sweeps[i].min);
    }
}

/* ---- allocation failures: writers leave no file ---- */

typedef enum writer {
    W_PNG,
    W_FLO,
    W_KITTI,
    W_PFM_FLOW,
    W_NPY_FLOW,
    W_NPY16_FLOW,
    W_NPY_IMAGE,
    W_NPY_TABLE,
    W_PFM_IMAGE,
    W_CAMERA,
    W_BYTES,
    W_COUNT
} writer;

static const char *const writer_file[W_COUNT] = {
    "w.png",   "w.flo",     "w_kitti.png", "w.pfm",  "w.npy",   "w16.npy",
    "img.npy", "table.npy", "d.pfm",       "K.json", "raw.bin",
};

typedef struct write_job {
    writer w;
    const char *path;
    const sinew_image *frame, *flow, *depth;
} write_job;

static int write_now(sinew_ctx *ctx, const write_job *j)
{
    switch (j->w) {
    case W_PNG:
        return sinew_image_write_png(ctx, j->path, j->frame);
    case W_FLO:
        return sinew_flow_write(ctx, j->path, j->flow, SINEW_FLOW_FLO);
    case W_KITTI:
        return sinew_flow_write(ctx, j->path, j->flow, SINEW_FLOW_KITTI);
    case W_PFM_FLOW:
        return sinew_flow_write(ctx, j->path, j->flow, SINEW_FLOW_PFM);
    case W_NPY_FLOW:
        return sinew_flow_write(ctx, j->path, j->flow, SINEW_FLOW_NPY);
    case W_NPY16_FLOW:
        return sinew_flow_write(ctx, j->path, j->flow, SINEW_FLOW_NPY16);
    case W_NPY_IMAGE:
        return sinew_npy_write_image(ctx, j->path, j->depth, 0);
    case W_NPY_TABLE:
        return sinew_npy_write_table(ctx, j->path, (const float *)(const void *)j->flow->data,
                                     (size_t)j->flow->height, j->flow->stride / sizeof(float));
    case W_PFM_IMAGE:
        return sinew_pfm_write_image(ctx, j->path, j->depth);
    case W_CAMERA: {
        sinew_camera cam;
        sinew_camera_init(&cam, 525, 525, 319.5, 239.5, 640, 480);
        cam.k1 = 0.1;
        return sinew_camera_save(ctx, j->path, &cam);
    }
    case W_BYTES:
        return sinew_write_file(ctx, j->path, j->flow->data,
                                j->flow->stride * (size_t)j->flow->height);
    default:
        return SINEW_EINTERNAL;
    }
}

/* No "name.tmp-XXXXXX" left in the folder of `path`. */
static void assert_no_temporaries(const char *path)
{
    char dir[700];
    snprintf(dir, sizeof dir, "%s", path);
    char *slash = strrchr(dir, '/');
    if (slash)
        *slash = '\0';
    DIR *d = opendir(slash ? dir : ".");
    assert_non_null(d);
    struct dirent *e;
    while ((e = readdir(d)))
        if (strstr(e->d_name, ".tmp-"))
            fail_msg("temporary file %s left in %s", e->d_name, dir);
    closedir(d);
}

static int write_op(sinew_ctx *ctx, void *ud)
{
    const write_job *j = ud;
    remove(j->path);
    int rc = write_now(ctx, j);
    if (rc != SINEW_OK)
        assert_false(tu_file_exists(j->path));
    assert_no_temporaries(j->path);
    return rc;
}

/* Test inputs: an RGB frame, a finite flow field and a float depth map of w x h. */
typedef struct inputs {
    sinew_image frame, flow, depth;
} inputs;

static void inputs_make(sinew_ctx *ctx, inputs *in, int w, int h)
{
    assert_int_equal(sinew_image_alloc(ctx, &in->frame, w, h, 3, SINEW_U8), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &in->flow, w, h, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &in->depth, w, h, 1, SINEW_F32), SINEW_OK);
    uint32_t s = 12345;
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            s = s * 1103515245u + 12345u; /* noisy content so PNG cannot compress it away */
            uint8_t *p = sinew_image_row_u8(&in->frame, y) + 3 * x;
            p[0] = (uint8_t)(s >> 24), p[1] = (uint8_t)(s >> 16), p[2] = (uint8_t)(s >> 8);
            float *f = sinew_image_row_f32(&in->flow, y) + 2 * x;
            f[0] = (float)((s >> 8) & 1023) / 64.0f - 8.0f;
            f[1] = (float)((s >> 18) & 1023) / 64.0f - 8.0f;
            sinew_image_row_f32(&in->depth, y)[x] = 0.5f + (float)(s & 4095) / 1024.0f;
        }
}

static void inputs_free(inputs *in)
{
    sinew_image_free(&in->frame);
    sinew_image_free(&in->flow);
    sinew_image_free(&in->depth);
}

static void test_faults_every_writer(void **state)
{
    tu_fixture *f = *state;
    inputs in;
    inputs_make(f->ctx, &in, 7, 5);
    for (int w = 0; w < W_COUNT; w++) {
        write_job j = {(writer)w, tu_fixture_path(f, writer_file[w]), &in.frame, &in.flow,
                       &in.depth};
        char what[64];
        snprintf(what, sizeof what, "writer %s", writer_file[w]);
        tu_fail_each_allocation(what, write_op, &j);
    }
    inputs_free(&in);
}

/* ---- allocation failures: processing stages ---- */

typedef struct stage_job {
    inputs in;
    sinew_image bwd, ignore, mask, conf, labels;
    sinew_camera cam;
    int which;
} stage_job;

static int stage_op(sinew_ctx *ctx, void *ud)
{
    stage_job *s = ud;
    int rc = SINEW_OK;
    sinew_image pic, tmp;
    memset(&pic, 0, sizeof pic);
    memset(&tmp, 0, sizeof tmp);
    switch (s->which) {
    case 0: { /* check with frames, ignore mask, every output */
        sinew_image fb, mask, conf;
        memset(&fb, 0, sizeof fb);
        memset(&mask, 0, sizeof mask);
        memset(&conf, 0, sizeof conf);
        if ((rc = sinew_image_alloc(ctx, &fb, s->in.flow.width, s->in.flow.height, 1, SINEW_F32)) ||
            (rc =
                 sinew_image_alloc(ctx, &mask, s->in.flow.width, s->in.flow.height, 1, SINEW_U8)) ||
            (rc = sinew_image_alloc(ctx, &conf, s->in.flow.width, s->in.flow.height, 1,
                                    SINEW_F32))) {
        } else {
            sinew_check_params p;
            sinew_check_params_default(&p);
            p.ignore_polarity = SINEW_IGNORE_NONZERO;
            sinew_check_input ci = {&s->in.flow,  &s->bwd,    &s->in.frame,
                                    &s->in.frame, &s->ignore, NULL};
            sinew_check_output co = {&fb, &mask, &conf, {0}, NULL};
            rc = sinew_check_run(ctx, &co, &ci, &p);
        }
        sinew_image_free(&fb);
        sinew_image_free(&mask);
        sinew_image_free(&conf);
        break;
    }
    case 1: { /* check with scratch-only outputs */
        sinew_check_input ci = {&s->in.flow, &s->bwd, NULL, NULL, NULL, NULL};
        sinew_check_output co = {NULL, NULL, NULL, {0}, NULL};
        rc = sinew_check_run(ctx, &co, &ci, NULL);
        break;
    }
    case 2:
    case 3: { /* matches: depth, normals, labels, top-K / all */
        sinew_match_params p;
        sinew_match_params_default(&p);
        p.normals = 1;
        p.sampling = s->which == 2 ? SINEW_SAMPLE_TOP_K : SINEW_SAMPLE_STRIDE;
        p.top_k = 9;
        p.cell = 3;
        p.stride = 2;
        sinew_match_inputs mi = {&s->in.flow,  &s->mask,     &s->conf, &s->labels, &s->labels,
                                 &s->in.depth, &s->in.depth, &s->cam,  "flow",     "mask",
                                 "conf",       "l0",         "l1",     "d0",       "d1"};
        sinew_matches m;
        rc = sinew_matches_build(ctx, &m, &mi, &p);
        if (rc == SINEW_OK)
            sinew_matches_free(ctx, &m);
        break;
    }
    case 4:
        rc = sinew_draw_flow(ctx, &pic, &s->in.flow, 0, 1);
        break;
    case 5:
        rc = sinew_draw_arrows(ctx, &pic, &s->in.frame, &s->in.flow, 3, 1, 1);
        break;
    case 6:
        rc = sinew_draw_heatmap(ctx, &pic, &s->in.depth, 0, 0, "Z (M)", 1);
        break;
    case 7:
        rc = sinew_draw_epe(ctx, &pic, &s->in.flow, &s->bwd, 0, 1);
        break;
    case 8:
        rc = sinew_draw_reasons(ctx, &pic, &s->in.frame, &s->mask, 1);
        break;
    case 9: {
        float rows[3][5] = {{0, 0, 1, 1, 1}, {2, 2, 3, 1, 0.5f}, {4, 1, 4, 4, 0.2f}};
        sinew_match_table t = {&rows[0][0], 3, 5, 0, 1, 2, 3, 4};
        rc = sinew_draw_matches(ctx, &pic, &s->in.frame, &s->in.frame, &t, 3, 1);
        break;
    }
    case 10:
        rc = sinew_draw_wheel(ctx, &pic, 40);
        break;
    case 11: {
        sinew_flow_errors e;
        rc = sinew_flow_errors_compute(ctx, &e, &s->in.flow, &s->bwd, &s->mask, &s->ignore);
        break;
    }
    case 12: {
        sinew_mask_scores ms;
        rc = sinew_mask_scores_compute(ctx, &ms, &s->mask, &s->ignore, &s->mask, 0);
        break;
    }
    case 13: {
        float u[6] = {0.1f, 0.5f, 0.2f, 0.9f, 0.3f, 0.3f}, e[6] = {1, 5, 2, 9, 3, 2};
        double curve[4], oracle[4], ause;
        rc = sinew_sparsification(ctx, curve, oracle, &ause, u, e, 6, 4);
        break;
    }
    case 14: {
        sinew_depth_params p;
        sinew_depth_params_default(&p);
        p.kind = SINEW_DEPTH_RAY;
        rc = sinew_depth_convert(ctx, &tmp, NULL, &s->in.depth, &s->cam, &p, "d");
        break;
    }
    case 15: {
        double med;
        rc = sinew_depth_median(ctx, &med, NULL, &s->in.depth);
        break;
    }
    case 16:
        rc = sinew_image_copy(ctx, &tmp, &s->in.frame);
        break;
    default:
        return SINEW_EINTERNAL;
    }
    if (rc != SINEW_OK)
        assert_null(pic.data);
    sinew_image_free(&pic);
    sinew_image_free(&tmp);
    return rc;
}

#define NSTAGES 17

static void test_faults_every_stage(void **state)
{
    tu_fixture *f = *state;
    sinew_ctx *ctx = f->ctx;
    stage_job s;
    memset(&s, 0, sizeof s);
    const int w = 11, h = 8;
    inputs_make(ctx, &s.in, w, h);
    assert_int_equal(sinew_image_alloc(ctx, &s.bwd, w, h, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &s.ignore, w, h, 1, SINEW_U8), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &s.mask, w, h, 1, SINEW_U8), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &s.conf, w, h, 1, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &s.labels, w, h, 1, SINEW_U16), SINEW_OK);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            float *b = sinew_image_row_f32(&s.bwd, y) + 2 * x;
            const float *fw = sinew_image_row_f32(&s.in.flow, y) + 2 * x;
            b[0] = -fw[0] * 0.1f, b[1] = -fw[1] * 0.1f;
            /* small flow so most pixels stay inside and reach every later rule */
            ((float *)sinew_image_row_f32(&s.in.flow, y))[2 * x] *= 0.1f;
            ((float *)sinew_image_row_f32(&s.in.flow, y))[2 * x + 1] *= 0.1f;
            sinew_image_row_u8(&s.ignore, y)[x] = (uint8_t)(x == 3);
            sinew_image_row_u8(&s.mask, y)[x] = (uint8_t)(y == 2 ? SINEW_MASK_OCCLUDED : 0);
            sinew_image_row_f32(&s.conf, y)[x] = (float)((x + y) % 7) / 7.0f + 0.01f;
            sinew_image_row_u16(&s.labels, y)[x] = (uint16_t)(x / 4);
        }
    sinew_camera_init(&s.cam, 9, 9, 5, 3.5, w, h);
    s.cam.k1 = -0.2;
    s.cam.p1 = 0.01;
    for (s.which = 0; s.which < NSTAGES; s.which++) {
        char what[32];
        snprintf(what, sizeof what, "stage %d", s.which);
        tu_fail_each_allocation(what, stage_op, &s);
    }
    sinew_image *all[] = {&s.bwd, &s.ignore, &s.mask, &s.conf, &s.labels};
    for (int i = 0; i < 5; i++)
        sinew_image_free(all[i]);
    inputs_free(&s.in);
}

/* ---- estimator ---- */

typedef struct est_job {
    const sinew_image *f0, *f1;
    int with_bwd;
} est_job;

static int est_op(sinew_ctx *ctx, void *ud)
{
    const est_job *j = ud;
    sinew_flow_params p;
    int rc = sinew_flow_params_preset(&p, "fast");
    if (rc)
        return rc;
    sinew_estimator *est = NULL;
    sinew_image fwd, bwd;
    memset(&fwd, 0, sizeof fwd);
    memset(&bwd, 0, sizeof bwd);
    if ((rc = sinew_estimator_new(ctx, &est, &p)) ||
        (rc = sinew_image_alloc(ctx, &fwd, j->f0->width, j->f0->height, 2, SINEW_F32)) ||
        (j->with_bwd &&
         (rc = sinew_image_alloc(ctx, &bwd, j->f0->width, j->f0->height, 2, SINEW_F32)))) {
    } else {
        rc = sinew_estimator_run(est, &fwd, j->with_bwd ? &bwd : NULL, j->f0, j->f1);
    }
    sinew_image_free(&fwd);
    sinew_image_free(&bwd);
    sinew_estimator_free(est);
    return rc;
}

static void test_faults_estimator(void **state)
{
    tu_fixture *f = *state;
    inputs in;
    inputs_make(f->ctx, &in, 24, 18);
    sinew_image gray;
    assert_int_equal(sinew_image_alloc(f->ctx, &gray, 1, 1, 1, SINEW_U16), SINEW_OK);
    est_job jobs[] = {{&in.frame, &in.frame, 1}, {&in.frame, &in.frame, 0}, {&gray, &gray, 1}};
    for (size_t i = 0; i < sizeof jobs / sizeof jobs[0]; i++) {
        char what[40];
        snprintf(what, sizeof what, "estimator case %zu", i);
        tu_fail_each_allocation(what, est_op, &jobs[i]);
    }
    sinew_image_free(&gray);
    inputs_free(&in);
}

/* ---- disk full: a file-size limit ---- */

/* Run the write in a child whose file-size limit is `limit` bytes (SIGXFSZ ignored, so
 * the write fails with EFBIG instead of killing the process). Exit code: the status,
 * or 100 if the message does not name the path or has a newline. */
static int write_limited(const write_job *j, rlim_t limit)
{
    fflush(NULL);
    pid_t pid = fork();
    assert_true(pid >= 0);
    if (pid == 0) {
        signal(SIGXFSZ, SIG_IGN);
        struct rlimit rl;
        getrlimit(RLIMIT_FSIZE, &rl);
        rl.rlim_cur = limit;
        if (setrlimit(RLIMIT_FSIZE, &rl))
            _exit(101);
        sinew_ctx *ctx = sinew_ctx_new();
        if (!ctx)
            _exit(102);
        int rc = write_now(ctx, j);
        const char *msg = sinew_ctx_message(ctx);
        if (rc != SINEW_OK && (!strstr(msg, writer_file[j->w]) || strchr(msg, '\n')))
            _exit(100);
        _exit(rc); /* no cleanup: _exit skips the leak checker, the child dies here */
    }
    int st;
    assert_int_equal(waitpid(pid, &st, 0), pid);
    if (!WIFEXITED(st))
        fail_msg("%s: writer child died (signal %d)", j->path, WTERMSIG(st));
    return WEXITSTATUS(st);
}

/* Read a whole (small) file into a malloc'd buffer. */
static unsigned char *slurp(const char *path, size_t *n)
{
    FILE *fp = fopen(path, "rb");
    assert_non_null(fp);
    assert_int_equal(fseek(fp, 0, SEEK_END), 0);
    long len = ftell(fp);
    assert_true(len >= 0);
    rewind(fp);
    unsigned char *b = malloc((size_t)len + 1);
    assert_non_null(b);
    assert_int_equal(fread(b, 1, (size_t)len, fp), (size_t)len);
    fclose(fp);
    *n = (size_t)len;
    return b;
}

static void test_faults_disk_full_every_writer(void **state)
{
    tu_fixture *f = *state;
    inputs small, big;
    inputs_make(f->ctx, &small, 3, 2);
    inputs_make(f->ctx, &big, 300, 200); /* every format of it is far above 16 KiB */
    const rlim_t limit = 16384;
    for (int w = 0; w < W_COUNT; w++) {
        if (w == W_CAMERA) /* a camera file is always tiny: covered by limit 0 below */
            continue;
        const char *path = tu_fixture_path(f, writer_file[w]);
        char name[700];
        snprintf(name, sizeof name, "%s", path);
        write_job first = {(writer)w, name, &small.frame, &small.flow, &small.depth};
        write_job second = {(writer)w, name, &big.frame, &big.flow, &big.depth};
        /* a new file that does not fit: refused, nothing left */
        remove(name);
        int rc = write_limited(&second, limit);
        if (rc != SINEW_EIO)
            fail_msg("%s: disk full gave status %d (100: bad message)", name, rc);
        assert_false(tu_file_exists(name));
        assert_no_temporaries(name);
        /* an earlier output of the same name survives a failed overwrite */
        assert_int_equal(write_limited(&first, limit), SINEW_OK);
        size_t n0, n1;
        unsigned char *before = slurp(name, &n0);
        rc = write_limited(&second, limit);
        if (rc != SINEW_EIO)
            fail_msg("%s: overwrite on a full disk gave status %d", name, rc);
        unsigned char *after = slurp(name, &n1);
        assert_int_equal(n0, n1);
        assert_memory_equal(before, after, n0);
        assert_no_temporaries(name);
        free(before);
        free(after);
    }
    /* limit 0: not even a small file can be created */
    for (int w = 0; w < W_COUNT; w++) {
        const char *path = tu_fixture_path(f, writer_file[w]);
        char name[700];
        snprintf(name, sizeof name, "%s", path);
        remove(name);
        write_job j = {(writer)w, name, &small.frame, &small.flow, &small.depth};
        int rc = write_limited(&j, 0);
        if (rc != SINEW_EIO)
            fail_msg("%s: zero file-size limit gave status %d", name, rc);
        assert_false(tu_file_exists(name));
        assert_no_temporaries(name);
    }
    inputs_free(&small);
    inputs_free(&big);
}

/* Output paths that are not regular files: a FIFO (or a device, e.g. /dev/stdout as root)
 * must be refused, not replaced by the rename; new outputs get 0666 minus the umask. */
static void test_faults_output_not_a_regular_file(void **state)
{
    tu_fixture *f = *state;
    char fifo[700];
    tu_path(fifo, sizeof fifo, f->dir, "pipe.flo");
    assert_int_equal(mkfifo(fifo, 0600), 0);
    int rc = sinew_write_file(f->ctx, fifo, "x", 1);
    assert_int_equal(rc, SINEW_EIO);
    assert_non_null(strstr(sinew_ctx_message(f->ctx), "pipe.flo"));
    struct stat st;
    assert_int_equal(stat(fifo, &st), 0);
    assert_true(S_ISFIFO(st.st_mode));
    assert_no_temporaries(fifo);
    mode_t old = umask(027);
    const char *p = tu_fixture_path(f, "mode.bin");
    rc = sinew_write_file(f->ctx, p, "x", 1);
    umask(old);
    assert_int_equal(rc, SINEW_OK);
    assert_int_equal(stat(p, &st), 0);
    assert_int_equal(st.st_mode & 0777, 0640);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_faults_every_reader),
        cmocka_unit_test_setup_teardown(test_faults_every_writer, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_faults_every_stage, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_faults_disk_full_every_writer, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_faults_output_not_a_regular_file, tu_fixture_setup,
                                        tu_fixture_teardown),
        cmocka_unit_test_setup_teardown(test_faults_estimator, tu_fixture_setup,
                                        tu_fixture_teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
