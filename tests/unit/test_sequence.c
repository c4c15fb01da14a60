/* SPDX-License-Identifier: MIT */
/* Unit tests for flow/sequence.c: sequence.json round trip, strict schema errors that
 * name the key, path resolution, allocation failures. */
#include "tests/support/testutil.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static sinew_sequence *build_example(sinew_ctx *ctx)
{
    sinew_sequence *seq;
    assert_int_equal(sinew_sequence_new(ctx, &seq), SINEW_OK);
    assert_int_equal(sinew_sequence_set_name(seq, "example \"quoted\" name"), SINEW_OK);
    static const char *const names[] = {"background", "tray", "pad"};
    assert_int_equal(sinew_sequence_set_label_names(seq, names, 3), SINEW_OK);
    seq->has_intrinsics = 1;
    seq->fx = 525.0;
    seq->fy = 524.25;
    seq->cx = 319.5;
    seq->cy = 239.5;
    seq->width = 640;
    seq->height = 480;
    seq->depth_scale = 1000.0;
    assert_int_equal(sinew_sequence_set_stereo_calib(seq, "stereo_calib.json"), SINEW_OK);
    for (int t = 0; t < 3; t++) {
        char c[32], d[32], r[32];
        snprintf(c, sizeof c, "color/%06d.png", t);
        snprintf(d, sizeof d, "depth/%06d.png", t);
        snprintf(r, sizeof r, "right/%06d.png", t);
        sinew_seq_frame f;
        sinew_sequence_frame_init(&f);
        f.color = c;
        f.depth = t == 1 ? NULL : d;
        f.right = t == 0 ? r : NULL;
        f.timestamp = t / 30.0;
        if (t == 2) {
            f.has_pose = 1;
            for (int k = 0; k < 12; k++)
                f.pose[k] = 0.1 * k - 1.0 / 3.0;
        }
        assert_int_equal(sinew_sequence_add_frame(seq, &f), SINEW_OK);
    }
    sinew_seq_pair p = {0, 1, "f/0.flo", "b/0.flo", "of/0.png", NULL, "sf/0.npy"};
    assert_int_equal(sinew_sequence_add_pair(seq, &p), SINEW_OK);
    sinew_seq_pair q = {2, 0, NULL, NULL, NULL, NULL, NULL};
    assert_int_equal(sinew_sequence_add_pair(seq, &q), SINEW_OK);
    return seq;
}

static void test_sequence_round_trip(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    char *dir = tu_tmpdir();
    char path[600], res[700];
    tu_path(path, sizeof path, dir, "sequence.json");
    sinew_sequence *a = build_example(ctx);
    assert_int_equal(sinew_sequence_write(a, path), SINEW_OK);
    sinew_sequence *b;
    assert_int_equal(sinew_sequence_read(ctx, &b, path), SINEW_OK);
    assert_int_equal(b->version, SINEW_SEQUENCE_VERSION);
    assert_string_equal(b->name, a->name);
    assert_true(b->has_intrinsics);
    assert_true(b->fx == a->fx && b->fy == a->fy && b->cx == a->cx && b->cy == a->cy);
    assert_int_equal(b->width, 640);
    assert_int_equal(b->height, 480);
    assert_true(b->depth_scale == 1000.0);
    assert_int_equal(b->n_label_names, 3);
    assert_string_equal(b->label_names[2], "pad");
    assert_int_equal(b->n_frames, 3);
    assert_string_equal(b->frames[0].color, "color/000000.png");
    assert_string_equal(b->frames[0].depth, "depth/000000.png");
    assert_null(b->frames[1].depth);
    assert_null(b->frames[1].labels);
    assert_string_equal(b->frames[0].right, "right/000000.png");
    assert_null(b->frames[1].right);
    assert_string_equal(b->stereo_calib, "stereo_calib.json");
    assert_true(b->frames[1].timestamp == 1 / 30.0); /* doubles survive exactly */
    assert_false(b->frames[0].has_pose);
    assert_true(b->frames[2].has_pose);
    for (int k = 0; k < 12; k++)
        assert_true(b->frames[2].pose[k] == a->frames[2].pose[k]);
    assert_int_equal(b->n_pairs, 2);
    assert_int_equal(b->pairs[0].from, 0);
    assert_int_equal(b->pairs[0].to, 1);
    assert_string_equal(b->pairs[0].scene_flow, "sf/0.npy");
    assert_null(b->pairs[0].occlusion_backward);
    assert_int_equal(b->pairs[1].from, 2);
    assert_null(b->pairs[1].flow_forward);
    /* paths resolve against the file's folder; absolute paths stay */
    assert_int_equal(sinew_sequence_resolve(b, b->frames[0].color, res, sizeof res), SINEW_OK);
    char want[700];
    snprintf(want, sizeof want, "%s/color/000000.png", dir);
    assert_string_equal(res, want);
    assert_int_equal(sinew_sequence_resolve(b, "/abs/x.png", res, sizeof res), SINEW_OK);
    assert_string_equal(res, "/abs/x.png");
    assert_int_equal(sinew_sequence_resolve(b, "x.png", res, 4), SINEW_ELIMIT);
    /* writing the read sequence again gives the same bytes */
    char path2[600];
    tu_path(path2, sizeof path2, dir, "again.json");
    assert_int_equal(sinew_sequence_write(b, path2), SINEW_OK);
    unsigned char *x, *y;
    size_t nx, ny;
    assert_int_equal(sinew_read_file(ctx, &x, &nx, path, 1 << 20), SINEW_OK);
    assert_int_equal(sinew_read_file(ctx, &y, &ny, path2, 1 << 20), SINEW_OK);
    assert_int_equal(nx, ny);
    assert_memory_equal(x, y, nx);
    sinew_ctx_dealloc(ctx, x);
    sinew_ctx_dealloc(ctx, y);
    sinew_sequence_free(a);
    sinew_sequence_free(b);
    tu_rmtree(dir);
    free(dir);
    sinew_ctx_free(ctx);
}

/* Parse `json`; expect status and a message containing `needle`. */
static void expect_error(sinew_ctx *ctx, const char *json, int status, const char *needle)
{
    sinew_sequence *seq = (sinew_sequence *)1;
    int st = sinew_sequence_parse(ctx, &seq, json, strlen(json), "dir/seq.json");
    if (st != status || !strstr(sinew_ctx_message(ctx), needle))
        fail_msg("json %s: got status %d message '%s', want %d with '%s'", json, st,
                 sinew_ctx_message(ctx), status, needle);
    assert_null(seq);
    assert_non_null(strstr(sinew_ctx_message(ctx), "dir/seq.json"));
}

static void test_sequence_schema_errors_name_the_key(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    const int C = SINEW_ECONFIG;
    expect_error(ctx, "{\"version\":1,\"frames\":[{\"color\":\"a.png\",\"dpeth\":\"d.png\"}]}", C,
                 "frames[0]: unknown key 'dpeth'");
    expect_error(ctx, "{\"version\":1,\"frames\":[{\"color\":\"a.png\"}],\"extra\":1}", C,
                 "unknown key 'extra'");
    expect_error(ctx, "{\"version\":1,\"frames\":[{\"color\":\"a.png\",\"depth\":5}]}", C,
                 "frames[0].depth: expected a string");
    expect_error(ctx, "{\"version\":1,\"frames\":[{\"color\":\"a.png\"}],\"depth_scale\":\"mm\"}",
                 C, "depth_scale: expected a number");
    expect_error(ctx, "{\"version\":1,\"frames\":[{\"depth\":\"d.png\"}]}", C,
                 "frames[0].color: missing");
    expect_error(ctx, "{\"frames\":[{\"color\":\"a.png\"}]}", C, "version: missing");
    expect_error(ctx, "{\"version\":1.5,\"frames\":[{\"color\":\"a.png\"}]}", C, "version");
    expect_error(ctx, "{\"version\":2,\"frames\":[{\"color\":\"a.png\"}]}", SINEW_EUNSUPPORTED,
                 "version: 2 is newer");
    expect_error(ctx, "{\"version\":1,\"frames\":[]}", C, "frames: must list at least one");
    /* an object is a numbered frame pattern (sinew run): its keys are checked */
    expect_error(ctx, "{\"version\":1,\"frames\":{}}", C, "frames.color: missing");
    expect_error(ctx, "{\"version\":1,\"frames\":3}", C, "frames: expected an array");
    expect_error(ctx, "{\"version\":1,\"frames\":[3]}", C, "frames[0]: expected an object");
    expect_error(ctx,
                 "{\"version\":1,\"frames\":[{\"color\":\"a\"}],\"intrinsics\":{\"fx\":1,\"fy\":1,"
                 "\"cx\":0,\"cy\":0,\"width\":10}}",
                 C, "intrinsics.height: missing");
    expect_error(ctx,
                 "{\"version\":1,\"frames\":[{\"color\":\"a\"}],\"intrinsics\":{\"fx\":-1,\"fy\":1,"
                 "\"cx\":0,\"cy\":0,\"width\":10,\"height\":10}}",
                 C, "intrinsics.fx: must be a positive number");
    expect_error(ctx,
                 "{\"version\":1,\"frames\":[{\"color\":\"a\"}],\"intrinsics\":{\"fx\":1,\"fy\":1,"
                 "\"cx\":0,\"cy\":0,\"width\":10.5,\"height\":10}}",
                 C, "intrinsics.width: expected an integer");
    expect_error(ctx, "{\"version\":1,\"frames\":[{\"color\":\"a\",\"depth\":\"d\"}]}", C,
                 "depth_scale: required");
    expect_error(ctx,
                 "{\"version\":1,\"frames\":[{\"color\":\"a\"},{\"color\":\"b\"}],"
                 "\"pairs\":[{\"from\":0,\"to\":2}]}",
                 C, "pairs[0].to: not a frame index");
    expect_error(ctx,
                 "{\"version\":1,\"frames\":[{\"color\":\"a\"}],\"pairs\":[{\"from\":0,\"to\":0,"
                 "\"flow_forward\":7}]}",
                 C, "pairs[0].flow_forward: expected a string");
    expect_error(ctx, "{\"version\":1,\"frames\":[{\"color\":\"a\",\"pose\":[1,2,3]}]}", C,
                 "frames[0].pose: expected an array of 12 numbers");
    expect_error(ctx, "{\"version\":1,\"frames\":[{\"color\":\"\"}]}", C,
                 "frames[0].color: empty string");
    expect_error(ctx, "{\"version\":1,\"version\":1,\"frames\":[{\"color\":\"a\"}]}", C,
                 "version: duplicate key");
    expect_error(ctx, "{\"version\":1,\"label_names\":[\"bg\",2],\"frames\":[{\"color\":\"a\"}]}",
                 C, "label_names[1]: expected a string");
    expect_error(ctx, "[1,2]", C, "expected a JSON object at the top level");
    /* malformed JSON: EFORMAT with line and column */
    expect_error(ctx, "{\"version\":1,\n\"frames\":[{\"color\" \"a\"}]}", SINEW_EFORMAT,
                 "invalid JSON at line 2");
    expect_error(ctx, "{\"version\":1,\"frames\":[{\"color\":\"a\"}]} x", SINEW_EFORMAT,
                 "unexpected content after the JSON value");
    expect_error(ctx, "", SINEW_EFORMAT, "invalid JSON");
    /* the minimal valid document */
    sinew_sequence *seq;
    const char *ok = " {\"version\":1,\"frames\":[{\"color\":\"a.png\"}]}\n";
    assert_int_equal(sinew_sequence_parse(ctx, &seq, ok, strlen(ok), "seq.json"), SINEW_OK);
    assert_int_equal(seq->n_frames, 1);
    assert_false(seq->has_intrinsics);
    assert_true(isnan(seq->frames[0].timestamp));
    char res[64];
    assert_int_equal(sinew_sequence_resolve(seq, "a.png", res, sizeof res), SINEW_OK);
    assert_string_equal(res, "./a.png");
    sinew_sequence_free(seq);
    /* ignore masks: the polarity is required with them, and written back */
    expect_error(ctx, "{\"version\":1,\"frames\":[{\"color\":\"a.png\",\"ignore\":\"m.png\"}]}", C,
                 "ignore_polarity: required");
    expect_error(ctx,
                 "{\"version\":1,\"ignore_polarity\":\"odd\",\"frames\":[{\"color\":\"a.png\"}]}",
                 C, "ignore_polarity: expected");
    const char *ign = "{\"version\":1,\"ignore_polarity\":\"zero\",\"frames\":{\"color\":"
                      "\"c/%03d.png\",\"ignore\":\"m/%03d.png\",\"count\":2}}";
    assert_int_equal(sinew_sequence_parse(ctx, &seq, ign, strlen(ign), "seq.json"), SINEW_OK);
    assert_int_equal(seq->ignore_polarity, 2);
    assert_string_equal(seq->frames[1].ignore, "m/001.png");
    char *dir = tu_tmpdir(), wp[600];
    tu_path(wp, sizeof wp, dir, "w.json");
    assert_int_equal(sinew_sequence_write(seq, wp), SINEW_OK);
    sinew_sequence_free(seq);
    assert_int_equal(sinew_sequence_read(ctx, &seq, wp), SINEW_OK);
    assert_int_equal(seq->ignore_polarity, 2);
    assert_string_equal(seq->frames[0].ignore, "m/000.png");
    sinew_sequence_free(seq);
    tu_rmtree(dir);
    free(dir);
    /* pattern frame lists and run settings; the frame-count limit comes before any
     * allocation */
    expect_error(ctx, "{\"version\":1,\"frames\":{\"color\":\"%d%d.png\",\"count\":2}}", C,
                 "frames.color");
    expect_error(ctx, "{\"version\":1,\"frames\":{\"color\":\"a.png\",\"count\":2}}", C,
                 "frames.color");
    expect_error(ctx, "{\"version\":1,\"frames\":{\"color\":\"%5d.png\",\"count\":2}}", C,
                 "frames.color");
    expect_error(ctx, "{\"version\":1,\"frames\":{\"color\":\"%d.png\",\"count\":1000001}}", C,
                 "frames.count");
    expect_error(ctx, "{\"version\":1,\"frames\":{\"color\":\"%d.png\"}}", C,
                 "frames.count: missing");
    expect_error(ctx, "{\"version\":1,\"frames\":{\"color\":\"%d.png\",\"count\":2,\"skip\":1}}", C,
                 "unknown key 'skip'");
    expect_error(ctx, "{\"version\":1,\"frames\":[{\"color\":\"a\"}],\"depth_kind\":\"disparity\"}",
                 C, "depth_kind");
    expect_error(ctx,
                 "{\"version\":1,\"frames\":[{\"color\":\"a\"}],\"run\":{\"schedule\":{\"kind\":"
                 "\"gap\"}}}",
                 C, "run.schedule.gap: missing");
    expect_error(ctx,
                 "{\"version\":1,\"frames\":[{\"color\":\"a\"}],\"run\":{\"schedule\":{\"kind\":"
                 "\"keyframe\",\"every\":2,\"window\":1,\"gap\":3}}}",
                 C, "unknown key 'gap'");
    expect_error(ctx,
                 "{\"version\":1,\"frames\":[{\"color\":\"a\"}],\"run\":{\"schedule\":{\"kind\":"
                 "\"spiral\"}}}",
                 C, "run.schedule.kind");
    expect_error(ctx,
                 "{\"version\":1,\"frames\":[{\"color\":\"a\"},{\"color\":\"b\"}],\"run\":{"
                 "\"schedule\":{\"kind\":\"list\",\"pairs\":[[0,1],[1,1]]}}}",
                 C, "run.schedule.pairs[1]");
    expect_error(ctx,
                 "{\"version\":1,\"frames\":[{\"color\":\"a\"}],\"run\":{\"match_stride\":-1}}", C,
                 "run.match_stride");
    expect_error(ctx, "{\"version\":1,\"frames\":[{\"color\":\"a\"}],\"run\":{\"preset\":7}}", C,
                 "run.preset: expected a string");
    sinew_ctx_free(ctx);
}

static void test_sequence_writer_validates(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    char *dir = tu_tmpdir();
    char path[600];
    tu_path(path, sizeof path, dir, "s.json");
    sinew_sequence *seq;
    assert_int_equal(sinew_sequence_new(ctx, &seq), SINEW_OK);
    /* no frames */
    assert_int_equal(sinew_sequence_write(seq, path), SINEW_ECONFIG);
    assert_non_null(strstr(sinew_ctx_message(ctx), "frames"));
    assert_false(tu_file_exists(path));
    sinew_seq_frame f;
    sinew_sequence_frame_init(&f);
    f.color = "a.png";
    f.depth = "a_depth.png";
    assert_int_equal(sinew_sequence_add_frame(seq, &f), SINEW_OK);
    assert_int_equal(sinew_sequence_write(seq, path), SINEW_ECONFIG); /* no depth scale */
    assert_non_null(strstr(sinew_ctx_message(ctx), "depth_scale"));
    seq->depth_scale = 5000;
    seq->has_intrinsics = 1;
    seq->fx = NAN;
    assert_int_equal(sinew_sequence_write(seq, path), SINEW_ECONFIG);
    assert_non_null(strstr(sinew_ctx_message(ctx), "intrinsics.fx"));
    seq->has_intrinsics = 0;
    assert_int_equal(sinew_sequence_write(seq, path), SINEW_OK);
    /* unwritable destination: EIO naming the path */
    char bad[700];
    snprintf(bad, sizeof bad, "%s/missing/s.json", dir);
    assert_int_equal(sinew_sequence_write(seq, bad), SINEW_EIO);
    assert_non_null(strstr(sinew_ctx_message(ctx), bad));
    sinew_sequence_free(seq);
    /* reading a missing file names it */
    assert_int_equal(sinew_sequence_read(ctx, &seq, bad), SINEW_EIO);
    assert_non_null(strstr(sinew_ctx_message(ctx), bad));
    tu_rmtree(dir);
    free(dir);
    sinew_ctx_free(ctx);
}

/* tu_fail_each_allocation: parse a small sequence; on failure nothing is returned */
static int parse_op(sinew_ctx *ctx, void *ud)
{
    const char *json = ud;
    sinew_sequence *seq;
    int st = sinew_sequence_parse(ctx, &seq, json, strlen(json), "s.json");
    if (st == SINEW_OK)
        sinew_sequence_free(seq);
    else
        assert_null(seq);
    return st;
}

static void test_sequence_alloc_failure_is_clean(void **state)
{
    (void)state;
    char json[] = "{\"version\":1,\"name\":\"n\",\"label_names\":[\"a\",\"b\"],"
                  "\"frames\":[{\"color\":\"a\",\"depth\":\"d\"},{\"color\":\"b\"}],"
                  "\"depth_scale\":1000,\"pairs\":[{\"from\":0,\"to\":1,"
                  "\"flow_forward\":\"f\"}]}";
    tu_fail_each_allocation("sequence parse", parse_op, json);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_sequence_round_trip),
        cmocka_unit_test(test_sequence_schema_errors_name_the_key),
        cmocka_unit_test(test_sequence_writer_validates),
        cmocka_unit_test(test_sequence_alloc_failure_is_clean),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
