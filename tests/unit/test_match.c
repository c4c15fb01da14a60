/* SPDX-License-Identifier: MIT */
/* Unit tests for flow/depth.c, flow/match.c and flow/lift.c: depth conventions, every
 * rejection rule on a synthetic plane with known motion, sampling, labels, thread
 * determinism, allocation failures, and 7-Scenes pairs lifted with their published
 * poses. The rigid transforms themselves are tested in test_rigid.c. */
#include "tests/support/testutil.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* ---- depth conventions ---- */

static void test_match_depth_codes_and_scale(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_image raw, z;
    assert_int_equal(sinew_image_alloc(ctx, &raw, 4, 2, 1, SINEW_U16), SINEW_OK);
    uint16_t *r0 = sinew_image_row_u16(&raw, 0), *r1 = sinew_image_row_u16(&raw, 1);
    /* TUM RGB-D convention (Sturm et al., IROS 2012; file-format page): 5000 = 1 m, 10000 = 2 m,
     * 0 = missing; 65535 is the saturated/invalid code of many sensors (common practice). */
    r0[0] = 5000;
    r0[1] = 10000;
    r0[2] = 0;
    r0[3] = 65535;
    r1[0] = 100;   /* 0.02 m: below near */
    r1[1] = 60000; /* 12 m: beyond far */
    r1[2] = 2500;
    r1[3] = 1;
    sinew_depth_params p;
    sinew_depth_params_default(&p);
    p.scale = 5000;
    p.near = 0.1;
    p.far = 10;
    sinew_depth_stats st;
    assert_int_equal(sinew_depth_convert(ctx, &z, &st, &raw, NULL, &p, "d.png"), SINEW_OK);
    const float *z0 = sinew_image_row_f32(&z, 0), *z1 = sinew_image_row_f32(&z, 1);
    assert_near(z0[0], 1.0, 0);
    assert_near(z0[1], 2.0, 0);
    assert_true(isnan(z0[2]) && isnan(z0[3]) && isnan(z1[0]) && isnan(z1[1]) && isnan(z1[3]));
    assert_near(z1[2], 0.5, 0);
    assert_int_equal(st.total, 8);
    assert_int_equal(st.valid, 3);
    assert_int_equal(st.invalid_code, 2);
    assert_int_equal(st.out_of_range, 3);
    double med;
    size_t n;
    assert_int_equal(sinew_depth_median(ctx, &med, &n, &z), SINEW_OK);
    assert_int_equal(n, 3);
    assert_near(med, 1.0, 0);
    sinew_image_free(&z);
    /* Millimetre sensors: scale 1000 (7-Scenes, Shotton et al., CVPR 2013). */
    p.scale = 1000;
    p.near = 0;
    p.far = INFINITY;
    assert_int_equal(sinew_depth_convert(ctx, &z, NULL, &raw, NULL, &p, "d.png"), SINEW_OK);
    assert_near(sinew_image_row_f32(&z, 0)[1], 10.0, 0);
    assert_near(sinew_image_row_f32(&z, 1)[3], 0.001, 1e-9);
    sinew_image_free(&z);
    /* Bad settings name the file. */
    p.scale = 0;
    assert_int_equal(sinew_depth_convert(ctx, &z, NULL, &raw, NULL, &p, "d.png"), SINEW_EVALUE);
    assert_non_null(strstr(sinew_ctx_message(ctx), "d.png"));
    p.scale = NAN;
    assert_int_equal(sinew_depth_convert(ctx, &z, NULL, &raw, NULL, &p, "d.png"), SINEW_EVALUE);
    sinew_depth_params_default(&p);
    p.near = 3;
    p.far = 2;
    assert_int_equal(sinew_depth_convert(ctx, &z, NULL, &raw, NULL, &p, "d.png"), SINEW_EVALUE);
    sinew_image_free(&raw);
    /* 8-bit depth is refused. */
    assert_int_equal(sinew_image_alloc(ctx, &raw, 4, 2, 1, SINEW_U8), SINEW_OK);
    sinew_depth_params_default(&p);
    assert_int_equal(sinew_depth_convert(ctx, &z, NULL, &raw, NULL, &p, "d8.png"),
                     SINEW_EUNSUPPORTED);
    assert_non_null(strstr(sinew_ctx_message(ctx), "d8.png"));
    sinew_image_free(&raw);
    sinew_ctx_free(ctx);
}

static void test_match_depth_float_ray_disparity(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_camera cam;
    sinew_camera_init(&cam, 10, 10, 0, 0, 0, 0);
    sinew_image raw, z;
    assert_int_equal(sinew_image_alloc(ctx, &raw, 11, 1, 1, SINEW_F32), SINEW_OK);
    float *r = sinew_image_row_f32(&raw, 0);
    for (int x = 0; x < 11; x++)
        r[x] = 2.0f;
    r[1] = NAN;
    r[2] = INFINITY;
    r[3] = -1;
    r[4] = 0;
    sinew_depth_params p;
    sinew_depth_params_default(&p);
    sinew_depth_stats st;
    assert_int_equal(sinew_depth_convert(ctx, &z, &st, &raw, NULL, &p, "d.npy"), SINEW_OK);
    assert_int_equal(st.invalid_code, 4);
    assert_near(sinew_image_row_f32(&z, 0)[0], 2.0, 0);
    sinew_image_free(&z);
    /* Ray distance: pixel (10, 0) with fx = 10, cx = 0 has ray (1, 0, 1), length sqrt 2:
     * a ray distance of 2 is z = 2 / sqrt(2). */
    p.kind = SINEW_DEPTH_RAY;
    assert_int_equal(sinew_depth_convert(ctx, &z, NULL, &raw, NULL, &p, "d.npy"), SINEW_EINVAL);
    assert_int_equal(sinew_depth_convert(ctx, &z, NULL, &raw, &cam, &p, "d.npy"), SINEW_OK);
    assert_near(sinew_image_row_f32(&z, 0)[10], 2.0 / sqrt(2.0), 1e-6);
    assert_near(sinew_image_row_f32(&z, 0)[0], 2.0, 0);
    sinew_image_free(&z);
    /* Disparity: z = fx * baseline / d; fx = 10, b = 0.1 m, d = 2 px -> 0.5 m. */
    p.kind = SINEW_DEPTH_DISPARITY;
    assert_int_equal(sinew_depth_convert(ctx, &z, NULL, &raw, &cam, &p, "disp.pfm"),
                     SINEW_EVALUE); /* no baseline */
    assert_non_null(strstr(sinew_ctx_message(ctx), "disp.pfm"));
    p.baseline = 0.1;
    assert_int_equal(sinew_depth_convert(ctx, &z, NULL, &raw, &cam, &p, "disp.pfm"), SINEW_OK);
    assert_near(sinew_image_row_f32(&z, 0)[5], 0.5, 1e-7);
    assert_true(isnan(sinew_image_row_f32(&z, 0)[4])); /* zero disparity: invalid */
    sinew_image_free(&z);
    sinew_image_free(&raw);
    sinew_ctx_free(ctx);
}

/* ---- a synthetic scene with known motion ----
 * 40x30 camera, fx = fy = 50, cx = 19.5, cy = 14.5; both frames see a plane at z = 2 m;
 * the scene moves by t = (0.02, 0.01, 0) m, so the flow is (50*0.02/2, 50*0.01/2) =
 * (0.5, 0.25) px everywhere and X1 = X0 + t exactly. */
enum { W = 40, H = 30 };
static const double TX = 0.02, TY = 0.01;

typedef struct scene {
    sinew_ctx *ctx;
    sinew_camera cam;
    sinew_image flow, d0, d1, mask, conf, l0, l1;
    sinew_match_inputs in;
    sinew_match_params p;
} scene;

static void scene_init(scene *s, int threads)
{
    memset(s, 0, sizeof *s);
    s->ctx = sinew_ctx_new();
    assert_int_equal(sinew_ctx_set_threads(s->ctx, threads), SINEW_OK);
    sinew_camera_init(&s->cam, 50, 50, 19.5, 14.5, W, H);
    assert_int_equal(sinew_image_alloc(s->ctx, &s->flow, W, H, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(s->ctx, &s->d0, W, H, 1, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(s->ctx, &s->d1, W, H, 1, SINEW_F32), SINEW_OK);
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++) {
            sinew_image_row_f32(&s->flow, y)[2 * x] = (float)(50 * TX / 2);
            sinew_image_row_f32(&s->flow, y)[2 * x + 1] = (float)(50 * TY / 2);
            sinew_image_row_f32(&s->d0, y)[x] = 2.0f;
            sinew_image_row_f32(&s->d1, y)[x] = 2.0f;
        }
    s->in.flow = &s->flow;
    s->in.depth0 = &s->d0;
    s->in.depth1 = &s->d1;
    s->in.camera = &s->cam;
    sinew_match_params_default(&s->p);
}

static void scene_free(scene *s)
{
    sinew_image *imgs[] = {&s->flow, &s->d0, &s->d1, &s->mask, &s->conf, &s->l0, &s->l1};
    for (size_t i = 0; i < sizeof imgs / sizeof imgs[0]; i++)
        sinew_image_free(imgs[i]);
    sinew_ctx_free(s->ctx);
}

static void build(scene *s, sinew_matches *m)
{
    int rc = sinew_matches_build(s->ctx, m, &s->in, &s->p);
    if (rc)
        fail_msg("build: %s", sinew_ctx_message(s->ctx));
    /* Every pixel is either kept or counted under exactly one reason. */
    size_t total = m->rows;
    for (int r = 0; r < SINEW_REJECT_COUNT; r++)
        total += m->rejected[r];
    assert_int_equal(total, m->pixels);
}

/* Row index of the match from source pixel (x, y), or -1. */
static long find_row(const sinew_matches *m, int x, int y)
{
    for (size_t i = 0; i < m->rows; i++) {
        const float *r = m->data + i * (size_t)m->cols;
        if (r[0] == x && r[1] == y)
            return (long)i;
    }
    return -1;
}

static void test_match_plane_exact(void **state)
{
    (void)state;
    scene s;
    scene_init(&s, 0);
    sinew_matches m;
    build(&s, &m);
    assert_int_equal(m.cols, 11);
    const char *want[] = {"u0", "v0", "u1", "v1", "weight", "X0", "Y0", "Z0", "X1", "Y1", "Z1"};
    for (int i = 0; i < 11; i++)
        assert_string_equal(m.columns[i], want[i]);
    /* The target leaves [0, W-1] x [0, H-1] in the last column and row only. */
    assert_int_equal(m.rejected[SINEW_REJECT_OUTSIDE], W + H - 1);
    assert_int_equal(m.rows, (size_t)(W - 1) * (H - 1));
    for (size_t i = 0; i < m.rows; i++) {
        const float *r = m.data + i * (size_t)m.cols;
        double x = r[0], y = r[1];
        /* Hand formula: X0 = ((u - cx) z / fx, (v - cy) z / fy, z). */
        double X0 = (x - 19.5) * 2 / 50, Y0 = (y - 14.5) * 2 / 50;
        assert_near(r[2], x + 0.5, 1e-6);
        assert_near(r[3], y + 0.25, 1e-6);
        assert_near(r[4], 1.0, 0);
        assert_near(r[5], X0, 1e-6);
        assert_near(r[6], Y0, 1e-6);
        assert_near(r[7], 2.0, 0);
        assert_near(r[8], X0 + TX, 1e-6);
        assert_near(r[9], Y0 + TY, 1e-6);
        assert_near(r[10], 2.0, 1e-6);
    }
    /* Rows are in raster order of the source pixel. */
    assert_int_equal(find_row(&m, 0, 0), 0);
    assert_int_equal(find_row(&m, 1, 0), 1);
    assert_int_equal(find_row(&m, 0, 1), W - 1);
    sinew_matches_free(s.ctx, &m);
    scene_free(&s);
}

static void test_match_reject_flow_mask_weight_labels(void **state)
{
    (void)state;
    scene s;
    scene_init(&s, 0);
    sinew_image_row_f32(&s.flow, 5)[2 * 5] = NAN;
    assert_int_equal(sinew_image_alloc(s.ctx, &s.mask, W, H, 1, SINEW_U8), SINEW_OK);
    sinew_image_row_u8(&s.mask, 5)[6] = 1 << 0;
    sinew_image_row_u8(&s.mask, 5)[7] = 1 << 2;
    sinew_image_row_u8(&s.mask, 5)[5] = 1 << 2; /* also flow-unknown: counted there */
    assert_int_equal(sinew_image_alloc(s.ctx, &s.conf, W, H, 1, SINEW_F32), SINEW_OK);
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++)
            sinew_image_row_f32(&s.conf, y)[x] = 0.5f;
    sinew_image_row_f32(&s.conf, 5)[8] = 0;
    sinew_image_row_f32(&s.conf, 6)[8] = NAN;
    assert_int_equal(sinew_image_alloc(s.ctx, &s.l0, W, H, 1, SINEW_U8), SINEW_OK);
    assert_int_equal(sinew_image_alloc(s.ctx, &s.l1, W, H, 1, SINEW_U16), SINEW_OK);
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++) {
            sinew_image_row_u8(&s.l0, y)[x] = x < 20 ? 1 : 7;
            sinew_image_row_u16(&s.l1, y)[x] = x < 20 ? 1 : 7;
        }
    /* (9, 5) lands at (9.5, 5.25): nearest target pixel (10, 5). */
    sinew_image_row_u16(&s.l1, 5)[10] = 300;
    s.in.mask = &s.mask;
    s.in.confidence = &s.conf;
    s.in.labels0 = &s.l0;
    s.in.labels1 = &s.l1;
    sinew_matches m;
    build(&s, &m);
    assert_int_equal(m.rejected[SINEW_REJECT_FLOW_UNKNOWN], 1);
    assert_int_equal(m.rejected[SINEW_REJECT_MASKED], 2);
    assert_int_equal(m.mask_bits[0], 1);
    assert_int_equal(m.mask_bits[2], 2);
    assert_int_equal(m.rejected[SINEW_REJECT_LOW_WEIGHT], 2);
    assert_int_equal(m.rejected[SINEW_REJECT_LABEL_CHANGE], 0);
    assert_int_equal(m.cols, 13);
    assert_string_equal(m.columns[11], "label0");
    assert_string_equal(m.columns[12], "label1");
    long i = find_row(&m, 9, 5);
    assert_true(i >= 0);
    assert_near(m.data[i * m.cols + 11], 1, 0);
    assert_near(m.data[i * m.cols + 12], 300, 0);
    assert_near(m.data[i * m.cols + 4], 0.5, 0);
    /* (19, y) lands at nearest x = 20: label 1 -> 7 for every kept row y. */
    assert_int_equal(m.label_changed, 1 + (H - 1));
    assert_int_equal(m.label_count, 2);
    assert_int_equal(m.label_ids[0], 1);
    assert_int_equal(m.label_ids[1], 7);
    assert_int_equal(m.label_kept[0] + m.label_kept[1], m.rows);
    assert_true(find_row(&m, 5, 5) < 0 && find_row(&m, 6, 5) < 0 && find_row(&m, 8, 5) < 0);
    size_t rows = m.rows;
    sinew_matches_free(s.ctx, &m);
    /* Dropping label changes. */
    s.p.drop_label_change = 1;
    build(&s, &m);
    assert_int_equal(m.rejected[SINEW_REJECT_LABEL_CHANGE], 1 + (H - 1));
    assert_int_equal(m.rows, rows - (1 + (H - 1)));
    assert_int_equal(m.label_changed, 0);
    sinew_matches_free(s.ctx, &m);
    /* min_weight */
    s.p.drop_label_change = 0;
    s.p.min_weight = 0.5;
    build(&s, &m);
    assert_int_equal(m.rows, 0);
    sinew_matches_free(s.ctx, &m);
    scene_free(&s);
}

static void test_match_reject_depth_holes_and_edges(void **state)
{
    (void)state;
    scene s;
    scene_init(&s, 0);
    sinew_image_row_f32(&s.d0, 10)[20] = NAN;
    sinew_image_row_f32(&s.d1, 20)[30] = NAN;
    sinew_matches m;
    build(&s, &m);
    assert_int_equal(m.rejected[SINEW_REJECT_DEPTH0_INVALID], 1);
    /* The 8 neighbours of the hole see it in their 3x3 window. */
    assert_int_equal(m.rejected[SINEW_REJECT_DEPTH0_EDGE], 8);
    /* Target (x + 0.5, y + 0.25) needs depth1 at x..x+1, y..y+1: the hole at (30, 20)
     * is needed by x in {29, 30}, y in {19, 20}. */
    assert_int_equal(m.rejected[SINEW_REJECT_DEPTH1_HOLE], 4);
    /* The 3x3 window around the nearest target pixel (x + 1, y) holds (30, 20) for
     * x in 28..30, y in 19..21: 9 sources, 4 of them already holes. */
    assert_int_equal(m.rejected[SINEW_REJECT_DEPTH1_EDGE], 5);
    sinew_matches_free(s.ctx, &m);
    /* edge_radius 0: only the bilinear neighbours matter. */
    s.p.edge_radius = 0;
    build(&s, &m);
    assert_int_equal(m.rejected[SINEW_REJECT_DEPTH0_EDGE], 0);
    assert_int_equal(m.rejected[SINEW_REJECT_DEPTH1_EDGE], 0);
    assert_int_equal(m.rejected[SINEW_REJECT_DEPTH1_HOLE], 4);
    sinew_matches_free(s.ctx, &m);
    scene_free(&s);
}

static void test_match_reject_straddle_displacement(void **state)
{
    (void)state;
    scene s;
    scene_init(&s, 0);
    /* A step in frame 1: x >= 30 is at 3 m (50 % jump). */
    for (int y = 0; y < H; y++)
        for (int x = 30; x < W; x++)
            sinew_image_row_f32(&s.d1, y)[x] = 3.0f;
    s.p.max_displacement = 0.5;
    sinew_matches m;
    build(&s, &m);
    /* x = 29 interpolates between 2 m and 3 m: straddle, in all H - 1 inside rows. */
    assert_int_equal(m.rejected[SINEW_REJECT_DEPTH1_STRADDLE], H - 1);
    /* x = 28: nearest target 29, its window 28..30 crosses the step. */
    assert_int_equal(m.rejected[SINEW_REJECT_DEPTH1_EDGE], H - 1);
    /* x = 30..38 move from 2 m to 3 m: |X1 - X0| >= 1 m > 0.5 m. */
    assert_int_equal(m.rejected[SINEW_REJECT_DISPLACEMENT], 9 * (H - 1));
    sinew_matches_free(s.ctx, &m);
    /* A 4 % step is below the default 5 % edge threshold: everything interpolates. */
    for (int y = 0; y < H; y++)
        for (int x = 30; x < W; x++)
            sinew_image_row_f32(&s.d1, y)[x] = 2.08f;
    s.p.max_displacement = INFINITY;
    build(&s, &m);
    assert_int_equal(m.rejected[SINEW_REJECT_DEPTH1_STRADDLE], 0);
    assert_int_equal(m.rejected[SINEW_REJECT_DEPTH1_EDGE], 0);
    long i = find_row(&m, 29, 3);
    assert_true(i >= 0);
    assert_near(m.data[i * m.cols + 10], 2.04, 1e-6); /* bilinear: halfway */
    sinew_matches_free(s.ctx, &m);
    scene_free(&s);
}

static void test_match_normals(void **state)
{
    (void)state;
    scene s;
    scene_init(&s, 0);
    s.p.normals = 1;
    sinew_matches m;
    build(&s, &m);
    assert_int_equal(m.cols, 17);
    assert_int_equal(sinew_matches_column(&m, "nx0"), 11);
    assert_int_equal(sinew_matches_column(&m, "nz1"), 16);
    /* Normals need all four neighbours: sources on x = 0 or y = 0, and those whose
     * nearest target (x + 1, y) is on the last column (x = W - 2). */
    assert_int_equal(m.rejected[SINEW_REJECT_NORMAL], (H - 1) + (W - 1) + (H - 1) - 2);
    for (size_t i = 0; i < m.rows; i++) {
        const float *r = m.data + i * (size_t)m.cols;
        /* A fronto-parallel plane faces the camera: n = (0, 0, -1). */
        assert_near(r[11], 0, 1e-6);
        assert_near(r[12], 0, 1e-6);
        assert_near(r[13], -1, 1e-6);
        assert_near(r[16], -1, 1e-6);
    }
    sinew_matches_free(s.ctx, &m);
    /* A tilted plane z = 2 + 0.01 x (pixels): normal ~ (-a, 0, -...) normalised, with
     * X = (u - cx) z / fx; checked against the plane's own normal direction. */
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++) {
            double X0 = (x - 19.5) / 50, ray = 1; /* plane n.X = d with n = (0.2, 0, -1) */
            (void)ray;
            /* z such that 0.2 * X + (-1) * z = -2 with X = X0 * z */
            double z = 2 / (1 - 0.2 * X0);
            sinew_image_row_f32(&s.d0, y)[x] = (float)z;
            sinew_image_row_f32(&s.d1, y)[x] = (float)z;
        }
    build(&s, &m);
    double len = sqrt(0.04 + 1);
    for (size_t i = 0; i < m.rows; i++) {
        const float *r = m.data + i * (size_t)m.cols;
        assert_near(r[11], 0.2 / len, 1e-4);
        assert_near(r[12], 0, 1e-4);
        assert_near(r[13], -1 / len, 1e-4);
    }
    sinew_matches_free(s.ctx, &m);
    scene_free(&s);
}

static void test_match_sampling_stride_topk(void **state)
{
    (void)state;
    scene s;
    scene_init(&s, 0);
    s.in.depth0 = s.in.depth1 = NULL; /* 2-D matches */
    s.in.camera = NULL;
    assert_int_equal(sinew_image_alloc(s.ctx, &s.conf, W, H, 1, SINEW_F32), SINEW_OK);
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++) /* a deterministic pattern with many ties */
            sinew_image_row_f32(&s.conf, y)[x] = (float)((x * 7 + y * 13) % 10) / 10.0f;
    s.in.confidence = &s.conf;
    sinew_matches m;
    s.p.sampling = SINEW_SAMPLE_STRIDE;
    s.p.stride = 4;
    build(&s, &m);
    assert_int_equal(m.cols, 5);
    for (size_t i = 0; i < m.rows; i++) {
        const float *r = m.data + i * (size_t)m.cols;
        assert_true((int)r[0] % 4 == 0 && (int)r[1] % 4 == 0);
        assert_true(r[4] > 0);
    }
    /* grid x in 0..36 (10), y in 0..28 (8); minus zero-confidence ones */
    size_t zero = 0;
    for (int y = 0; y < H - 1; y += 4)
        for (int x = 0; x < W - 1; x += 4)
            zero += (x * 7 + y * 13) % 10 == 0;
    assert_int_equal(m.rows, 80 - zero);
    sinew_matches_free(s.ctx, &m);

    /* Top-K with 10x10 cells: 4 x 3 = 12 cells. K = 12 gives each cell its best. */
    s.p.sampling = SINEW_SAMPLE_TOP_K;
    s.p.cell = 10;
    s.p.top_k = 12;
    build(&s, &m);
    assert_int_equal(m.rows, 12);
    int per_cell[12] = {0};
    for (size_t i = 0; i < m.rows; i++) {
        const float *r = m.data + i * (size_t)m.cols;
        per_cell[((int)r[1] / 10) * 4 + (int)r[0] / 10]++;
        assert_near(r[4], 0.9, 1e-6); /* every cell holds a 0.9 */
    }
    for (int c = 0; c < 12; c++)
        assert_int_equal(per_cell[c], 1);
    /* Ties broken by raster index: the first 0.9 of cell 0 is the smallest index. */
    long first = -1;
    for (int y = 0; y < 10 && first < 0; y++)
        for (int x = 0; x < 10; x++)
            if ((x * 7 + y * 13) % 10 == 9) {
                first = (long)y * W + x;
                break;
            }
    assert_near(m.data[0] + m.data[1] * W, (double)first, 0);
    assert_int_equal(m.rejected[SINEW_REJECT_SAMPLING], m.pixels - 12 -
                                                            m.rejected[SINEW_REJECT_OUTSIDE] -
                                                            m.rejected[SINEW_REJECT_LOW_WEIGHT]);
    sinew_matches_free(s.ctx, &m);
    /* K larger than the cells: each cell gets two before any gets three. */
    s.p.top_k = 30;
    build(&s, &m);
    assert_int_equal(m.rows, 30);
    memset(per_cell, 0, sizeof per_cell);
    for (size_t i = 0; i < m.rows; i++) {
        const float *r = m.data + i * (size_t)m.cols;
        per_cell[((int)r[1] / 10) * 4 + (int)r[0] / 10]++;
    }
    for (int c = 0; c < 12; c++)
        assert_true(per_cell[c] >= 2 && per_cell[c] <= 3);
    sinew_matches_free(s.ctx, &m);
    /* A per-cell cap. */
    s.p.top_k = 1000;
    s.p.per_cell = 2;
    build(&s, &m);
    assert_int_equal(m.rows, 24);
    sinew_matches_free(s.ctx, &m);
    scene_free(&s);
}

static void test_match_threads_bit_identical(void **state)
{
    (void)state;
    scene s[2];
    sinew_matches m[2];
    for (int t = 0; t < 2; t++) {
        scene_init(&s[t], t + 1);
        for (int y = 0; y < H; y++)
            for (int x = 0; x < W; x++) {
                sinew_image_row_f32(&s[t].d0, y)[x] = (float)(1.5 + 0.3 * sin(x * 0.7 + y * 0.3));
                sinew_image_row_f32(&s[t].d1, y)[x] = (float)(1.5 + 0.3 * cos(x * 0.2 - y * 0.5));
                sinew_image_row_f32(&s[t].flow, y)[2 * x] = (float)(0.8 * sin(y * 0.9));
            }
        s[t].p.normals = 1;
        s[t].p.edge_rel = 0.2;
        build(&s[t], &m[t]);
    }
    assert_int_equal(m[0].rows, m[1].rows);
    assert_true(m[0].rows > 100);
    assert_memory_equal(m[0].data, m[1].data, m[0].rows * (size_t)m[0].cols * sizeof(float));
    assert_memory_equal(m[0].rejected, m[1].rejected, sizeof m[0].rejected);
    for (int t = 0; t < 2; t++) {
        sinew_matches_free(s[t].ctx, &m[t]);
        scene_free(&s[t]);
    }
}

static void test_match_bad_inputs(void **state)
{
    (void)state;
    scene s;
    scene_init(&s, 0);
    sinew_matches m;
    sinew_image small;
    assert_int_equal(sinew_image_alloc(s.ctx, &small, W - 1, H, 1, SINEW_F32), SINEW_OK);
    s.in.depth1 = &small;
    s.in.depth1_name = "d1.png";
    assert_int_equal(sinew_matches_build(s.ctx, &m, &s.in, &s.p), SINEW_ESIZE);
    assert_non_null(strstr(sinew_ctx_message(s.ctx), "d1.png"));
    assert_null(m.data);
    s.in.depth1 = NULL;
    assert_int_equal(sinew_matches_build(s.ctx, &m, &s.in, &s.p), SINEW_EINVAL);
    s.in.depth1 = &s.d1;
    s.in.confidence = &s.flow; /* 2 channels */
    assert_int_equal(sinew_matches_build(s.ctx, &m, &s.in, &s.p), SINEW_EUNSUPPORTED);
    s.in.confidence = NULL;
    s.p.edge_rel = NAN;
    assert_int_equal(sinew_matches_build(s.ctx, &m, &s.in, &s.p), SINEW_EINVAL);
    sinew_match_params_default(&s.p);
    s.p.sampling = SINEW_SAMPLE_STRIDE;
    s.p.stride = 0;
    assert_int_equal(sinew_matches_build(s.ctx, &m, &s.in, &s.p), SINEW_EINVAL);
    sinew_image_free(&small);
    scene_free(&s);
}

static void test_match_build_alloc_failures(void **state)
{
    (void)state;
    scene s;
    scene_init(&s, 1);
    s.p.sampling = SINEW_SAMPLE_TOP_K;
    s.p.top_k = 50;
    assert_int_equal(sinew_image_alloc(s.ctx, &s.l0, W, H, 1, SINEW_U8), SINEW_OK);
    assert_int_equal(sinew_image_alloc(s.ctx, &s.l1, W, H, 1, SINEW_U8), SINEW_OK);
    s.in.labels0 = &s.l0;
    s.in.labels1 = &s.l1;
    int ok = 0;
    for (long n = 2; n < 20; n++) {
        tu_failalloc fa = {n, 0, 0};
        sinew_ctx *ctx = tu_ctx_failing(&fa);
        sinew_matches m;
        int rc = sinew_matches_build(ctx, &m, &s.in, &s.p);
        assert_true(rc == SINEW_OK || rc == SINEW_ENOMEM);
        if (rc == SINEW_OK) {
            ok = 1;
            assert_int_equal(m.rows, 50);
            sinew_matches_free(ctx, &m);
        }
        assert_int_equal(fa.live, 1);
        sinew_ctx_free(ctx);
    }
    assert_true(ok);
    scene_free(&s);
}

/* ---- files ---- */

static void test_match_save_loads_in_numpy(void **state)
{
    (void)state;
    scene s;
    scene_init(&s, 0);
    s.p.normals = 1;
    assert_int_equal(sinew_image_alloc(s.ctx, &s.l0, W, H, 1, SINEW_U16), SINEW_OK);
    assert_int_equal(sinew_image_alloc(s.ctx, &s.l1, W, H, 1, SINEW_U16), SINEW_OK);
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++)
            sinew_image_row_u16(&s.l0, y)[x] = sinew_image_row_u16(&s.l1, y)[x] =
                (uint16_t)(x < 10 ? 40000 : 3);
    s.in.labels0 = &s.l0;
    s.in.labels1 = &s.l1;
    s.in.flow_name = "fwd.flo";
    sinew_matches m;
    build(&s, &m);
    assert_int_equal(m.cols, 19);
    char *dir = tu_tmpdir();
    char npy[600], json[600], ply[600], plya[600], csv[600], cmd[4096];
    tu_path(npy, sizeof npy, dir, "M.npy");
    tu_path(ply, sizeof ply, dir, "M.ply");
    tu_path(plya, sizeof plya, dir, "Ma.ply");
    tu_path(csv, sizeof csv, dir, "M.csv");
    assert_int_equal(sinew_matches_sidecar_path(npy, json, sizeof json), SINEW_OK);
    assert_string_equal(json + strlen(json) - 7, "/M.json");
    sinew_depth_params dp;
    sinew_depth_params_default(&dp);
    sinew_match_sources src = {"test", NULL, "k.json", &s.cam, &s.cam, &dp, {2.0, 2.0}, 0};
    assert_int_equal(sinew_matches_save(s.ctx, npy, &m, &s.p, &s.in, &src), SINEW_OK);
    assert_int_equal(sinew_matches_save_ply(s.ctx, ply, &m, 1), SINEW_OK);
    assert_int_equal(sinew_matches_save_ply(s.ctx, plya, &m, 0), SINEW_OK);
    assert_int_equal(sinew_matches_save_csv(s.ctx, csv, &m), SINEW_OK);
    /* Plain numpy + json, no custom code: the sidecar's columns name the array's columns;
     * the CSV and both PLY encodings hold the same numbers. */
    snprintf(cmd, sizeof cmd,
             "'%s' - '%s' '%s' '%s' '%s' '%s' %zu <<'EOF'\n"
             "import json, sys, numpy as np\n"
             "npy, js, csv, ply, plya, rows = sys.argv[1:7]\n"
             "M = np.load(npy); meta = json.load(open(js))\n"
             "c = {n: i for i, n in enumerate(meta['columns'])}\n"
             "assert M.dtype == np.float32 and M.shape == (int(rows), len(c)), M.shape\n"
             "assert meta['rows'] == M.shape[0]\n"
             "assert list(c)[:11] == 'u0 v0 u1 v1 weight X0 Y0 Z0 X1 Y1 Z1'.split()\n"
             "assert {'nx0', 'nz1', 'label0', 'label1'} <= set(c)\n"
             "assert meta['units']['X0'] == 'm' and meta['units']['u1'] == 'px'\n"
             "assert meta['counts']['kept'] == M.shape[0]\n"
             "assert meta['intrinsics']['fx'] == 50 and meta['depth']['scale'] == 1000\n"
             "assert meta['inputs']['flow'] == 'fwd.flo'\n"
             "assert meta['labels']['kept_per_label0']['40000'] > 0\n"
             "assert np.allclose(M[:, c['X1']] - M[:, c['X0']], 0.02, atol=1e-6)\n"
             "assert np.all(M[:, c['label0']] == np.where(M[:, c['u0']] < 10, 40000, 3))\n"
             "C = np.genfromtxt(csv, delimiter=',', names=True)\n"
             "assert C.dtype.names == tuple(meta['columns'])\n"
             "assert np.array_equal(C['Z1'].astype(np.float32), M[:, c['Z1']])\n"
             "raw = open(ply, 'rb').read(); h = raw.index(b'end_header\\n') + 11\n"
             "n = M.shape[0]\n"
             "vt = np.dtype([('p', '<f4', 3), ('rgb', 'u1', 3)])\n"
             "V = np.frombuffer(raw, vt, 2 * n, h)\n"
             "E = np.frombuffer(raw, '<i4', 2 * n, h + 2 * n * vt.itemsize).reshape(n, 2)\n"
             "assert len(raw) == h + 2 * n * vt.itemsize + 8 * n\n"
             "assert np.array_equal(V['p'][E[:, 0]], M[:, c['X0']:c['X0'] + 3])\n"
             "assert np.array_equal(V['p'][E[:, 1]], M[:, c['X1']:c['X1'] + 3])\n"
             "t = open(plya).read().split('end_header\\n')[1].split('\\n')\n"
             "A = np.array([l.split() for l in t[:2 * n]], float)\n"
             "assert np.array_equal(A[:, :3].astype(np.float32), V['p'])\n"
             "print('numpy ok', M.shape)\n"
             "EOF\n",
             tu_python(), npy, json, csv, ply, plya, m.rows);
    assert_int_equal(system(cmd), 0);
    /* A 2-D table cannot become a PLY; a failed write leaves nothing behind. */
    sinew_matches m2;
    s.in.depth0 = s.in.depth1 = NULL;
    build(&s, &m2);
    char nope[600];
    tu_path(nope, sizeof nope, dir, "x.ply");
    assert_int_equal(sinew_matches_save_ply(s.ctx, nope, &m2, 1), SINEW_EINVAL);
    assert_false(tu_file_exists(nope));
    tu_path(nope, sizeof nope, dir, "missing/x.npy");
    assert_int_equal(sinew_matches_save(s.ctx, nope, &m2, &s.p, &s.in, NULL), SINEW_EIO);
    assert_non_null(strstr(sinew_ctx_message(s.ctx), "missing/x.json"));
    sinew_matches_free(s.ctx, &m2);
    sinew_matches_free(s.ctx, &m);
    tu_rmtree(dir);
    free(dir);
    scene_free(&s);
}

/* ---- 7-Scenes (Shotton et al., CVPR 2013) ----
 * Static scene, camera-to-world poses in metres, fx = fy = 585, cx = 320, cy = 240,
 * depth in millimetres, 0 = invalid. With a static scene every correct lifted match
 * satisfies X1 = T X0 with T = inv(P1) P0. */
#define SEVEN "7scenes/tsdf-fusion-frames-150-154/"

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return x < y ? -1 : x > y;
}

typedef struct pair_result {
    size_t rows;
    double median_residual; /* median |T X0 - X1|, metres */
    double fit_dt, fit_deg; /* rigid fit vs ground truth */
} pair_result;

/* Lift frame i -> i + 1 with the given flow (NULL: flow from the ground-truth pose and
 * depth 0, i.e. each valid pixel projected into frame 1). */
static void seven_pair_ex(sinew_ctx *ctx, int i, const sinew_image *flow_in,
                          const sinew_image *mask, const sinew_image *conf, pair_result *res)
{
    char p[1024], rel[128];
    sinew_image raw[2], z[2];
    sinew_rigid pose[2], T;
    sinew_depth_params dp;
    sinew_depth_params_default(&dp); /* scale 1000: millimetres */
    for (int k = 0; k < 2; k++) {
        snprintf(rel, sizeof rel, SEVEN "frame-%06d.depth.png", 150 + i + k);
        assert_non_null(tu_data_file(p, sizeof p, rel));
        assert_int_equal(sinew_depth_read(ctx, &raw[k], p), SINEW_OK);
        assert_int_equal(sinew_depth_convert(ctx, &z[k], NULL, &raw[k], NULL, &dp, p), SINEW_OK);
        snprintf(rel, sizeof rel, SEVEN "frame-%06d.pose.txt", 150 + i + k);
        assert_non_null(tu_data_file(p, sizeof p, rel));
        assert_int_equal(sinew_rigid_load(ctx, &pose[k], p), SINEW_OK);
    }
    sinew_rigid_relative(&pose[0], &pose[1], &T);
    sinew_camera cam;
    assert_non_null(tu_data_file(p, sizeof p, SEVEN "camera-intrinsics.txt"));
    assert_int_equal(sinew_camera_load(ctx, &cam, p), SINEW_OK);
    assert_int_equal(sinew_camera_fit(ctx, &cam, &cam, 640, 480, p), SINEW_OK);
    sinew_image gt;
    memset(&gt, 0, sizeof gt);
    if (!flow_in) {
        assert_int_equal(sinew_image_alloc(ctx, &gt, 640, 480, 2, SINEW_F32), SINEW_OK);
        for (int y = 0; y < 480; y++)
            for (int x = 0; x < 640; x++) {
                float *f = sinew_image_row_f32(&gt, y) + 2 * x;
                double X[3], u, v;
                float d = sinew_image_row_f32(&z[0], y)[x];
                f[0] = f[1] = NAN;
                if (!isfinite(d))
                    continue;
                sinew_camera_unproject(&cam, x, y, d, X);
                sinew_rigid_apply(&T, X, X);
                if (sinew_camera_project(&cam, X, &u, &v)) {
                    f[0] = (float)(u - x);
                    f[1] = (float)(v - y);
                }
            }
        flow_in = &gt;
    }
    sinew_match_inputs in;
    memset(&in, 0, sizeof in);
    in.flow = flow_in;
    in.mask = mask;
    in.confidence = conf;
    in.depth0 = &z[0];
    in.depth1 = &z[1];
    in.camera = &cam;
    sinew_match_params mp;
    sinew_match_params_default(&mp);
    sinew_matches m;
    assert_int_equal(sinew_matches_build(ctx, &m, &in, &mp), SINEW_OK);
    assert_true(m.rows > 10000);
    double *r = malloc(m.rows * sizeof *r);
    for (size_t k = 0; k < m.rows; k++) {
        const float *row = m.data + k * (size_t)m.cols;
        double X0[3] = {row[5], row[6], row[7]}, Y[3];
        sinew_rigid_apply(&T, X0, Y);
        r[k] = sqrt((Y[0] - row[8]) * (Y[0] - row[8]) + (Y[1] - row[9]) * (Y[1] - row[9]) +
                    (Y[2] - row[10]) * (Y[2] - row[10]));
    }
    qsort(r, m.rows, sizeof *r, cmp_double);
    res->rows = m.rows;
    res->median_residual = r[(m.rows - 1) / 2];
    free(r);
    sinew_rigid F;
    assert_int_equal(
        sinew_rigid_fit(ctx, &F, NULL, m.data + 5, m.data + 8, m.data + 4, m.rows, (size_t)m.cols),
        SINEW_OK);
    sinew_rigid_distance(&F, &T, &res->fit_dt, &res->fit_deg);
    sinew_matches_free(ctx, &m);
    sinew_image_free(&gt);
    for (int k = 0; k < 2; k++) {
        sinew_image_free(&raw[k]);
        sinew_image_free(&z[k]);
    }
}

/* Print one 7-Scenes pair's result and assert the targets of the issue: median
 * residual <= 1 cm; rigid fit within 1 cm and 0.3 deg. */
static void seven_check(const char *how, int i, const pair_result *res)
{
    printf("# 7-Scenes %d->%d (%s): %zu matches, median |T X0 - X1| = %.2f mm, "
           "rigid fit %.2f mm / %.3f deg\n",
           150 + i, 151 + i, how, res->rows, res->median_residual * 1e3, res->fit_dt * 1e3,
           res->fit_deg);
    assert_true(res->median_residual <= 0.01);
    assert_true(res->fit_dt <= 0.01);
    assert_true(res->fit_deg <= 0.3);
}

/* The whole pipeline on 7-Scenes: flow both ways from the colour frames ("balanced"
 * preset), the forward-backward check's mask and confidence, then lifting. */
static void test_match_7scenes_estimated_flow_agrees_with_ground_truth(void **state)
{
    (void)state;
    char p[1024], rel[128];
    if (!tu_data_file(p, sizeof p, SEVEN "frame-000150.color.png"))
        skip();
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_flow_params fp;
    assert_int_equal(sinew_flow_params_preset(&fp, "balanced"), SINEW_OK);
    sinew_estimator *est;
    assert_int_equal(sinew_estimator_new(ctx, &est, &fp), SINEW_OK);
    for (int i = 0; i < 4; i++) {
        sinew_image f[2], fwd, bwd, mask, conf;
        for (int k = 0; k < 2; k++) {
            snprintf(rel, sizeof rel, SEVEN "frame-%06d.color.png", 150 + i + k);
            assert_non_null(tu_data_file(p, sizeof p, rel));
            assert_int_equal(sinew_image_read(ctx, &f[k], p), SINEW_OK);
        }
        assert_int_equal(sinew_image_alloc(ctx, &fwd, 640, 480, 2, SINEW_F32), SINEW_OK);
        assert_int_equal(sinew_image_alloc(ctx, &bwd, 640, 480, 2, SINEW_F32), SINEW_OK);
        assert_int_equal(sinew_image_alloc(ctx, &mask, 640, 480, 1, SINEW_U8), SINEW_OK);
        assert_int_equal(sinew_image_alloc(ctx, &conf, 640, 480, 1, SINEW_F32), SINEW_OK);
        assert_int_equal(sinew_estimator_run(est, &fwd, &bwd, &f[0], &f[1]), SINEW_OK);
        sinew_check_input ci = {&fwd, &bwd, &f[0], &f[1], NULL, NULL};
        sinew_check_output co;
        memset(&co, 0, sizeof co);
        co.mask = &mask;
        co.confidence = &conf;
        assert_int_equal(sinew_check_run(ctx, &co, &ci, NULL), SINEW_OK);
        pair_result res;
        seven_pair_ex(ctx, i, &fwd, &mask, &conf, &res);
        seven_check("estimated flow + check", i, &res);
        sinew_image *all[] = {&f[0], &f[1], &fwd, &bwd, &mask, &conf};
        for (int k = 0; k < 6; k++)
            sinew_image_free(all[k]);
    }
    sinew_estimator_free(est);
    sinew_ctx_free(ctx);
}

static void test_match_7scenes_pose_flow_agrees_with_ground_truth(void **state)
{
    (void)state;
    char p[1024];
    if (!tu_data_file(p, sizeof p, SEVEN "frame-000150.depth.png"))
        skip();
    sinew_ctx *ctx = sinew_ctx_new();
    for (int i = 0; i < 4; i++) {
        pair_result res;
        seven_pair_ex(ctx, i, NULL, NULL, NULL, &res);
        seven_check("pose flow", i, &res);
    }
    sinew_ctx_free(ctx);
}

/* ---- demo scene (invented, flow/synth.h): exact scene flow ----
 * Lift frame 0 -> 1 with the exact optical flow, the depth as written to disk
 * (millimetre codes, optionally with sensor-like noise), a perfect check mask (the
 * exact occlusion) and the labels; compare X1 - X0 with the exact scene flow at the
 * source pixel. */
static void demo_errors(int noise, double *median, double *p90, size_t *rows)
{
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_synth_params sp;
    sinew_synth_params_default(&sp);
    sp.width = 320;
    sp.height = 240;
    sp.frames = 2;
    sp.depth_noise = noise;
    sinew_synth *syn;
    assert_int_equal(sinew_synth_new(ctx, &syn, &sp), SINEW_OK);
    const int w = sp.width, h = sp.height;
    sinew_image depth[2], mm[2], z[2], lab[2], flow, occ, sf, mask;
    sinew_depth_params dp;
    sinew_depth_params_default(&dp);
    for (int k = 0; k < 2; k++) {
        assert_int_equal(sinew_image_alloc(ctx, &depth[k], w, h, 1, SINEW_F32), SINEW_OK);
        assert_int_equal(sinew_image_alloc(ctx, &mm[k], w, h, 1, SINEW_U16), SINEW_OK);
        assert_int_equal(sinew_image_alloc(ctx, &lab[k], w, h, 1, SINEW_U8), SINEW_OK);
        assert_int_equal(sinew_synth_render(syn, k, NULL, &depth[k], &lab[k]), SINEW_OK);
        assert_int_equal(sinew_synth_depth_mm(syn, k, &depth[k], &mm[k]), SINEW_OK);
        assert_int_equal(sinew_depth_convert(ctx, &z[k], NULL, &mm[k], NULL, &dp, "demo"),
                         SINEW_OK);
    }
    assert_int_equal(sinew_image_alloc(ctx, &flow, w, h, 2, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &occ, w, h, 1, SINEW_U8), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &sf, w, h, 3, SINEW_F32), SINEW_OK);
    assert_int_equal(sinew_image_alloc(ctx, &mask, w, h, 1, SINEW_U8), SINEW_OK);
    assert_int_equal(sinew_synth_truth(syn, 0, 1, &flow, &occ, &sf), SINEW_OK);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++)
            sinew_image_row_u8(&mask, y)[x] = sinew_image_row_u8(&occ, y)[x] ? 1 : 0;
    double fx, fy, cx, cy;
    sinew_synth_intrinsics(syn, &fx, &fy, &cx, &cy);
    sinew_camera cam;
    sinew_camera_init(&cam, fx, fy, cx, cy, w, h);
    sinew_match_inputs in;
    memset(&in, 0, sizeof in);
    in.flow = &flow;
    in.mask = &mask;
    in.depth0 = &z[0];
    in.depth1 = &z[1];
    in.labels0 = &lab[0];
    in.labels1 = &lab[1];
    in.camera = &cam;
    sinew_match_params mp;
    sinew_match_params_default(&mp);
    sinew_matches m;
    assert_int_equal(sinew_matches_build(ctx, &m, &in, &mp), SINEW_OK);
    assert_true(m.rows > (size_t)(w * h / 2));
    double *e = malloc(m.rows * sizeof *e);
    for (size_t i = 0; i < m.rows; i++) {
        const float *r = m.data + i * (size_t)m.cols;
        const float *g = sinew_image_row_f32(&sf, (int)r[1]) + 3 * (int)r[0];
        double d[3] = {r[8] - r[5] - g[0], r[9] - r[6] - g[1], r[10] - r[7] - g[2]};
        e[i] = sqrt(d[0] * d[0] + d[1] * d[1] + d[2] * d[2]);
    }
    qsort(e, m.rows, sizeof *e, cmp_double);
    *median = e[(m.rows - 1) / 2];
    *p90 = e[(size_t)(0.9 * (double)(m.rows - 1))];
    *rows = m.rows;
    free(e);
    sinew_matches_free(ctx, &m);
    sinew_image *all[] = {&depth[0], &depth[1], &mm[0], &mm[1], &z[0], &z[1],
                          &lab[0],   &lab[1],   &flow,  &occ,   &sf,   &mask};
    for (size_t i = 0; i < sizeof all / sizeof all[0]; i++)
        sinew_image_free(all[i]);
    sinew_synth_free(syn);
    sinew_ctx_free(ctx);
}

static void test_match_demo_scene_flow_error(void **state)
{
    (void)state;
    for (int noise = 0; noise < 2; noise++) {
        double med, p90;
        size_t rows;
        demo_errors(noise, &med, &p90, &rows);
        printf("# demo scene 0->1, exact flow, depth %s: %zu matches, 3-D error median %.3f mm, "
               "90th percentile %.3f mm\n",
               noise ? "with sensor noise" : "in whole mm", rows, med * 1e3, p90 * 1e3);
        /* Bounds: a few times the measured values (see docs/methods.md). */
        assert_true(med <= (noise ? 0.004 : 0.001));
    }
}

/* The sidecar's column reader: positions by name, weight optional, one error line
 * naming the file for sidecars that do not fit the table. */
static void test_match_sidecar_columns(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    char *dir = tu_tmpdir();
    char p[600];
    tu_path(p, sizeof p, dir, "m.json");
    const char *ok = "{\"columns\": [\"weight\", \"u1\", \"v1\", \"u0\", \"v0\", \"label0\"]}";
    tu_write_bytes(p, ok, strlen(ok));
    int idx[5];
    size_t n = 6;
    assert_int_equal(sinew_matches_read_columns(ctx, idx, &n, p), SINEW_OK);
    assert_int_equal(idx[0], 3);
    assert_int_equal(idx[1], 4);
    assert_int_equal(idx[2], 1);
    assert_int_equal(idx[3], 2);
    assert_int_equal(idx[4], 0);
    n = 5;
    assert_int_equal(sinew_matches_read_columns(ctx, idx, &n, p), SINEW_EFORMAT);
    assert_non_null(strstr(sinew_ctx_message(ctx), "names 6 columns but the table has 5"));
    n = 0; /* 0: take the sidecar's count */
    assert_int_equal(sinew_matches_read_columns(ctx, idx, &n, p), SINEW_OK);
    assert_int_equal(n, 6);
    const char *no_w = "{\"columns\": [\"u0\", \"v0\", \"u1\", \"v1\"]}";
    tu_write_bytes(p, no_w, strlen(no_w));
    n = 4;
    assert_int_equal(sinew_matches_read_columns(ctx, idx, &n, p), SINEW_OK);
    assert_int_equal(idx[4], -1);
    const char *bad[] = {"{\"columns\": [\"u0\", \"v0\", \"u1\", 3]}", "{\"cols\": []}",
                         "{\"columns\": [\"u0\", \"v0\", \"u1\", \"w\"]}", "[1,",
                         "{\"columns\": []}"};
    for (int k = 0; k < 5; k++) {
        tu_write_bytes(p, bad[k], strlen(bad[k]));
        n = k < 4 ? 4 : 0;
        assert_int_equal(sinew_matches_read_columns(ctx, idx, &n, p), SINEW_EFORMAT);
        assert_non_null(strstr(sinew_ctx_message(ctx), "m.json: "));
    }
    tu_rmtree(dir);
    free(dir);
    sinew_ctx_free(ctx);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_match_sidecar_columns),
        cmocka_unit_test(test_match_depth_codes_and_scale),
        cmocka_unit_test(test_match_depth_float_ray_disparity),
        cmocka_unit_test(test_match_plane_exact),
        cmocka_unit_test(test_match_reject_flow_mask_weight_labels),
        cmocka_unit_test(test_match_reject_depth_holes_and_edges),
        cmocka_unit_test(test_match_reject_straddle_displacement),
        cmocka_unit_test(test_match_normals),
        cmocka_unit_test(test_match_sampling_stride_topk),
        cmocka_unit_test(test_match_threads_bit_identical),
        cmocka_unit_test(test_match_bad_inputs),
        cmocka_unit_test(test_match_build_alloc_failures),
        cmocka_unit_test(test_match_save_loads_in_numpy),
        cmocka_unit_test(test_match_7scenes_pose_flow_agrees_with_ground_truth),
        cmocka_unit_test(test_match_7scenes_estimated_flow_agrees_with_ground_truth),
        cmocka_unit_test(test_match_demo_scene_flow_error),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
