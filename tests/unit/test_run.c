/* SPDX-License-Identifier: MIT */
/* Unit tests for the run machinery: SHA-256, schedules and pair names, shards,
 * timestamp association, stamp lists, and the engine (resume, error policies,
 * cancel, manifest, shards giving the same bytes as a whole run). The engine tests
 * use a cheap stand-in pair function; tests/cli/test_run.sh covers the real
 * pipeline. */
#define _POSIX_C_SOURCE 200809L
#include "tests/support/testutil.h"

#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "flow/camera.h"

static void hex_of(const void *msg, size_t n, char hex[65])
{
    sinew_sha256 s;
    unsigned char d[32];
    sinew_sha256_init(&s);
    sinew_sha256_update(&s, msg, n);
    sinew_sha256_final(&s, d);
    sinew_sha256_hex(d, hex);
}

/* Vectors: FIPS 180-2 Appendix B.1-B.3 / NIST "SHA256.pdf" examples with
 * intermediate values (one-block "abc", two-block 448-bit message, one million 'a'),
 * the empty-string digest and the 896-bit message of the NIST example set (from
 * memory; cross-checked with Debian python3 hashlib before committing). */
static void test_run_sha256_nist_vectors(void **state)
{
    (void)state;
    char hex[65];
    hex_of("", 0, hex);
    assert_string_equal(hex, "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
    hex_of("abc", 3, hex);
    assert_string_equal(hex, "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
    const char *m448 = "abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq";
    hex_of(m448, strlen(m448), hex);
    assert_string_equal(hex, "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
    const char *m896 = "abcdefghbcdefghicdefghijdefghijkefghijklfghijklmghijklmnhijklmno"
                       "ijklmnopjklmnopqklmnopqrlmnopqrsmnopqrstnopqrstu";
    hex_of(m896, strlen(m896), hex);
    assert_string_equal(hex, "cf5b16a778af8380036ce59e7b0492370b249b11e8f07a51afac45037afee9d1");
    /* one million 'a', fed in uneven pieces to exercise the block buffer */
    char a[1000];
    memset(a, 'a', sizeof a);
    sinew_sha256 s;
    unsigned char d[32];
    sinew_sha256_init(&s);
    size_t left = 1000000, step = 1;
    while (left) {
        size_t n = step < left ? step : left;
        n = n < sizeof a ? n : sizeof a;
        sinew_sha256_update(&s, a, n);
        left -= n;
        step = step * 7 % 997 + 1;
    }
    sinew_sha256_final(&s, d);
    sinew_sha256_hex(d, hex);
    assert_string_equal(hex, "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
}

/* Whole-block paths (the SHA instructions where the processor has them, the portable
 * rounds elsewhere) against Debian coreutils' sha256sum, on pseudo-random messages of
 * lengths around the block and read-buffer edges, fed in one piece and in odd pieces. */
static void test_run_sha256_matches_coreutils(void **state)
{
    (void)state;
    if (system("command -v sha256sum >/dev/null 2>&1") != 0)
        skip();
    static const size_t lens[] = {1, 55, 56, 63, 64, 65, 127, 128, 129, 1000, 65537, 300001};
    size_t nmax = 300001;
    unsigned char *buf = malloc(nmax);
    assert_non_null(buf);
    uint32_t x = 2463534242u; /* xorshift32 (Marsaglia 2003) */
    for (size_t i = 0; i < nmax; i++) {
        x ^= x << 13;
        x ^= x >> 17;
        x ^= x << 5;
        buf[i] = (unsigned char)(x >> 24);
    }
    char *dir = tu_tmpdir(), p[600], cmd[1400], want[65], hex[65];
    for (size_t k = 0; k < sizeof lens / sizeof lens[0]; k++) {
        tu_path(p, sizeof p, dir, "m.bin");
        tu_write_bytes(p, buf, lens[k]);
        snprintf(cmd, sizeof cmd, "sha256sum '%s'", p);
        FILE *f = popen(cmd, "r");
        assert_non_null(f);
        assert_int_equal(fscanf(f, "%64s", want), 1);
        pclose(f);
        hex_of(buf, lens[k], hex);
        assert_string_equal(hex, want);
        for (int portable = 0; portable < 2; portable++) {
            sinew_sha256 s;
            unsigned char d[32];
            sinew_sha256_init(&s);
            if (portable)
                s.ni = 0; /* the portable rounds even where the CPU has SHA instructions */
            for (size_t off = 0, step = 3; off < lens[k]; off += step, step = step * 5 % 251 + 1)
                sinew_sha256_update(&s, buf + off, step < lens[k] - off ? step : lens[k] - off);
            sinew_sha256_final(&s, d);
            sinew_sha256_hex(d, hex);
            assert_string_equal(hex, want);
        }
    }
    tu_rmtree(dir);
    free(dir);
    free(buf);
}

static void test_run_sha256_file_matches_memory(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    char *dir = tu_tmpdir();
    char p[600];
    tu_path(p, sizeof p, dir, "f.bin");
    size_t n = 200003; /* more than three 64 KiB chunks, not a multiple of 64 */
    unsigned char *buf = malloc(n);
    for (size_t i = 0; i < n; i++)
        buf[i] = (unsigned char)(i * 2654435761u >> 13);
    tu_write_bytes(p, buf, n);
    char h1[65], h2[65];
    hex_of(buf, n, h1);
    unsigned char d[32];
    uint64_t bytes = 0;
    assert_int_equal(sinew_sha256_file(ctx, d, &bytes, p), SINEW_OK);
    sinew_sha256_hex(d, h2);
    assert_string_equal(h1, h2);
    assert_int_equal(bytes, n);
    tu_path(p, sizeof p, dir, "missing.bin");
    assert_int_equal(sinew_sha256_file(ctx, d, NULL, p), SINEW_EIO);
    assert_non_null(strstr(sinew_ctx_message(ctx), "missing.bin"));
    free(buf);
    tu_rmtree(dir);
    free(dir);
    sinew_ctx_free(ctx);
}

static size_t expand(sinew_ctx *ctx, sinew_schedule s, size_t n, sinew_pair **p)
{
    size_t np = 0;
    assert_int_equal(sinew_schedule_pairs(ctx, p, &np, &s, n), SINEW_OK);
    return np;
}

static void test_run_schedule_kinds_and_names(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_pair *p;
    sinew_schedule s = {SINEW_SCHEDULE_CONSECUTIVE, 0, 0, 0, NULL, 0};
    assert_int_equal(expand(ctx, s, 5, &p), 4);
    assert_int_equal(p[3].i, 3);
    assert_int_equal(p[3].j, 4);
    sinew_ctx_dealloc(ctx, p);
    assert_int_equal(expand(ctx, s, 1, &p), 0);
    assert_null(p);

    s.kind = SINEW_SCHEDULE_GAP;
    s.gap = 2;
    assert_int_equal(expand(ctx, s, 5, &p), 3);
    assert_int_equal(p[0].i, 0);
    assert_int_equal(p[0].j, 2);
    assert_int_equal(p[2].i, 2);
    assert_int_equal(p[2].j, 4);
    sinew_ctx_dealloc(ctx, p);

    /* keyframes every 3rd frame, each to the next 2: (0,1)(0,2)(3,4)(3,5)(6,7)? n=7 */
    s.kind = SINEW_SCHEDULE_KEYFRAME;
    s.every = 3;
    s.window = 2;
    assert_int_equal(expand(ctx, s, 7, &p), 4);
    const int want[4][2] = {{0, 1}, {0, 2}, {3, 4}, {3, 5}};
    for (int k = 0; k < 4; k++) {
        assert_int_equal(p[k].i, want[k][0]);
        assert_int_equal(p[k].j, want[k][1]);
    }
    sinew_ctx_dealloc(ctx, p);
    s.every = 0;
    size_t np;
    assert_int_equal(sinew_schedule_pairs(ctx, &p, &np, &s, 7), SINEW_ECONFIG);

    const sinew_pair list[] = {{4, 1}, {0, 2}};
    s = (sinew_schedule){SINEW_SCHEDULE_LIST, 0, 0, 0, list, 2};
    assert_int_equal(expand(ctx, s, 5, &p), 2);
    assert_int_equal(p[0].i, 4); /* list order is kept; backward pairs allowed */
    sinew_ctx_dealloc(ctx, p);
    const sinew_pair dup[] = {{0, 1}, {2, 3}, {0, 1}};
    s.list = dup;
    s.list_len = 3;
    assert_int_equal(sinew_schedule_pairs(ctx, &p, &np, &s, 5), SINEW_ECONFIG);
    assert_non_null(strstr(sinew_ctx_message(ctx), "listed twice"));
    const sinew_pair bad[] = {{0, 5}};
    s.list = bad;
    s.list_len = 1;
    assert_int_equal(sinew_schedule_pairs(ctx, &p, &np, &s, 5), SINEW_ECONFIG);
    s = (sinew_schedule){SINEW_SCHEDULE_CONSECUTIVE, 0, 0, 0, NULL, 0};
    assert_int_equal(sinew_schedule_pairs(ctx, &p, &np, &s, SINEW_RUN_MAX_FRAMES + 1),
                     SINEW_ELIMIT);
    /* keyframe windows can multiply pairs: refused before allocation */
    s = (sinew_schedule){SINEW_SCHEDULE_KEYFRAME, 0, 1, 100000, NULL, 0};
    assert_int_equal(sinew_schedule_pairs(ctx, &p, &np, &s, 500000), SINEW_ELIMIT);

    char name[SINEW_PAIR_NAME_MAX];
    assert_string_equal(sinew_pair_name(name, (sinew_pair){12, 13}), "000012-000013");
    assert_string_equal(sinew_pair_name(name, (sinew_pair){999999, 0}), "999999-000000");
    sinew_ctx_free(ctx);
}

static void test_run_shards_partition_pairs(void **state)
{
    (void)state;
    for (int n = 1; n <= 5; n++)
        for (size_t q = 0; q < 23; q++) {
            int owners = 0;
            for (int k = 0; k < n; k++)
                owners += sinew_shard_owns(q, k, n);
            assert_int_equal(owners, 1);
            assert_true(sinew_shard_owns(q, (int)(q % (size_t)n), n));
        }
}

/* Crafted example in the style of a TUM RGB-D rgb.txt/depth.txt pair (30 Hz colour,
 * depth stamps offset by a few milliseconds, one depth frame dropped, one colour
 * frame with two depth candidates). Rule: |ta - tb| < 0.02 s, greedy on the smallest
 * difference, each stamp used once (the TUM RGB-D association tool; Sturm et al., IROS 2012). */
static void test_run_associate_greedy_within_tolerance(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    const double ta[] = {100.000, 100.033, 100.066, 100.100, 100.133};
    const double tb[] = {100.004, 100.030, 100.045, 100.104, 100.160};
    int32_t m[5];
    size_t nm;
    assert_int_equal(sinew_associate(ctx, m, &nm, ta, 5, tb, 5, 0.02, 0.0), SINEW_OK);
    /* 100.000-100.004 (4 ms), 100.033-100.030 (3 ms); 100.066 -> 100.045 is 21 ms: none;
     * 100.100-100.104 (4 ms); 100.133 -> 100.160 is 27 ms: none. 100.045 is unused:
     * its nearest colour stamp 100.033 already took the closer 100.030. */
    assert_int_equal(nm, 3);
    assert_int_equal(m[0], 0);
    assert_int_equal(m[1], 1);
    assert_int_equal(m[2], -1);
    assert_int_equal(m[3], 3);
    assert_int_equal(m[4], -1);
    /* greedy on the smallest difference: b=0 goes to a=1 (1 ms) although it is also
     * a=0's nearest (10 ms); a=0 then takes b=1 (15 ms < 20 ms) */
    const double ta2[] = {10.000, 10.009};
    const double tb2[] = {10.010, 10.015};
    assert_int_equal(sinew_associate(ctx, m, &nm, ta2, 2, tb2, 2, 0.02, 0.0), SINEW_OK);
    assert_int_equal(nm, 2);
    assert_int_equal(m[1], 0);
    assert_int_equal(m[0], 1);
    sinew_ctx_free(ctx);
}

static void test_run_associate_offset_and_errors(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    const double ta[] = {1.0, 2.0};
    const double tb[] = {0.5, 1.5};
    int32_t m[2];
    size_t nm;
    assert_int_equal(sinew_associate(ctx, m, &nm, ta, 2, tb, 2, 0.02, 0.0), SINEW_OK);
    assert_int_equal(nm, 0);
    assert_int_equal(sinew_associate(ctx, m, &nm, ta, 2, tb, 2, 0.02, 0.5), SINEW_OK);
    assert_int_equal(nm, 2);
    assert_int_equal(m[0], 0);
    assert_int_equal(m[1], 1);
    assert_int_equal(sinew_associate(ctx, m, &nm, ta, 2, tb, 2, 0.0, 0.0), SINEW_ECONFIG);
    sinew_ctx_free(ctx);
}

static void test_run_stamp_list_read(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    char *dir = tu_tmpdir();
    char p[600];
    tu_path(p, sizeof p, dir, "rgb.txt");
    const char *txt = "# color images\n# file: 'x.bag'\n# timestamp filename\n"
                      "1305031102.175304 rgb/1305031102.175304.png\n\n"
                      "1305031102.211214 rgb/1305031102.211214.png\r\n";
    tu_write_bytes(p, txt, strlen(txt));
    sinew_stamp_list l;
    assert_int_equal(sinew_stamp_list_read(ctx, &l, p), SINEW_OK);
    assert_int_equal(l.n, 2);
    assert_true(l.t[1] > 1305031102.2112 && l.t[1] < 1305031102.2113);
    assert_string_equal(l.name[1], "rgb/1305031102.211214.png");
    sinew_stamp_list_free(ctx, &l);
    const char *bad = "1.0 a.png extra\n";
    tu_write_bytes(p, bad, strlen(bad));
    assert_int_equal(sinew_stamp_list_read(ctx, &l, p), SINEW_EFORMAT);
    assert_non_null(strstr(sinew_ctx_message(ctx), "line 1"));
    const char *bad2 = "x a.png\n";
    tu_write_bytes(p, bad2, strlen(bad2));
    assert_int_equal(sinew_stamp_list_read(ctx, &l, p), SINEW_EFORMAT);
    tu_rmtree(dir);
    free(dir);
    sinew_ctx_free(ctx);
}

/* DIR/color/ and DIR/depth/ with one-byte files of the given names. */
static void layout_make(const char *dir, const char *const *color, const char *const *depth, int n)
{
    char p[700];
    snprintf(p, sizeof p, "%s/color", dir);
    mkdir(p, 0777);
    snprintf(p, sizeof p, "%s/depth", dir);
    mkdir(p, 0777);
    for (int k = 0; k < n; k++) {
        snprintf(p, sizeof p, "%s/color/%s", dir, color[k]);
        tu_write_bytes(p, "x", 1);
        snprintf(p, sizeof p, "%s/depth/%s", dir, depth[k]);
        tu_write_bytes(p, "x", 1);
    }
}

/* DIR reads as 3 frames, frame f's depth path contains `depth`, and there is exactly one
 * warning, containing `warning`. */
static void expect_one_warning(sinew_ctx *ctx, const char *dir, size_t f, const char *depth,
                               const char *warning)
{
    sinew_run_source src;
    assert_int_equal(sinew_run_source_from_folder(ctx, &src, dir, 0.02, 0), SINEW_OK);
    assert_int_equal(src.nframes, 3);
    assert_non_null(strstr(src.frames[f].depth, depth));
    assert_int_equal(src.nwarnings, 1);
    assert_non_null(strstr(src.warnings[0], warning));
    sinew_run_source_free(ctx, &src);
}

static void test_run_source_folder_layouts(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    char *dir = tu_tmpdir();
    char p[700];
    sinew_run_source src;
    assert_int_equal(sinew_run_source_from_folder(ctx, &src, dir, 0.02, 0), SINEW_ECONFIG);
    assert_non_null(strstr(sinew_ctx_message(ctx), "color/"));
    /* plain layout: color/ sorted by name, depth/ matched by stem */
    const char *names[] = {"b.png", "a.png", "c.PNG"};
    layout_make(dir, names, names, 3);
    snprintf(p, sizeof p, "%s/color/notes.txt", dir);
    tu_write_bytes(p, "x", 1);
    assert_int_equal(sinew_run_source_from_folder(ctx, &src, dir, 0.02, 0), SINEW_OK);
    assert_int_equal(src.nframes, 3);
    assert_non_null(strstr(src.frames[0].color, "color/a.png"));
    assert_non_null(strstr(src.frames[2].depth, "depth/c.PNG"));
    assert_null(src.frames[0].labels);
    assert_null(src.intrinsics);
    sinew_run_source_free(ctx, &src);
    /* matched by stem, not by position: an extra depth map is named in a warning */
    snprintf(p, sizeof p, "%s/depth/0.png", dir);
    tu_write_bytes(p, "x", 1);
    expect_one_warning(ctx, dir, 0, "depth/a.png", "depth/0.png: not used");
    /* a colour image without a depth map fails, naming it; the flag leaves it out */
    snprintf(p, sizeof p, "%s/color/b2.png", dir);
    tu_write_bytes(p, "x", 1);
    assert_int_equal(sinew_run_source_from_folder(ctx, &src, dir, 0.02, 0), SINEW_ECONFIG);
    assert_non_null(strstr(sinew_ctx_message(ctx), "no depth map for "));
    assert_non_null(strstr(sinew_ctx_message(ctx), "color/b2.png"));
    assert_int_equal(
        sinew_run_source_from_folder(ctx, &src, dir, 0.02, SINEW_RUN_SOURCE_DROP_UNMATCHED),
        SINEW_OK);
    assert_int_equal(src.nframes, 3);
    assert_int_equal(src.dropped, 1);
    assert_non_null(strstr(src.warnings[0], "color/b2.png: frame left out"));
    assert_non_null(strstr(src.frames[2].color, "color/c.PNG"));
    sinew_run_source_free(ctx, &src);
    /* two files with one stem: nothing says which is the frame */
    snprintf(p, sizeof p, "%s/depth/b2.png", dir);
    tu_write_bytes(p, "x", 1);
    snprintf(p, sizeof p, "%s/depth/b2.npy", dir);
    tu_write_bytes(p, "x", 1);
    assert_int_equal(sinew_run_source_from_folder(ctx, &src, dir, 0.02, 0), SINEW_ECONFIG);
    assert_non_null(strstr(sinew_ctx_message(ctx), "b2.npy and b2.png are the same frame"));
    tu_rmtree(dir);
    free(dir);
    /* numbered names: matched by the stem's number when the stems differ (one folder
     * per role keeping the dataset's own names, frame-000007.color.png and
     * frame-000007.depth.png); a jump in the numbers is a warning */
    dir = tu_tmpdir();
    const char *cn[] = {"frame-000006.color.png", "frame-000007.color.png",
                        "frame-000009.color.png"};
    const char *dn[] = {"frame-000006.depth.png", "frame-000007.depth.png",
                        "frame-000009.depth.png"};
    layout_make(dir, cn, dn, 3);
    expect_one_warning(ctx, dir, 2, "depth/frame-000009.depth.png",
                       "frame numbers jump from 7 to 9");
    /* unpadded numbers sort 10 before 9: said, order kept (byte order of names) */
    snprintf(p, sizeof p, "%s/color/frame-000010.color.png", dir);
    tu_write_bytes(p, "x", 1);
    snprintf(p, sizeof p, "%s/depth/frame-10.depth.png", dir);
    tu_write_bytes(p, "x", 1);
    snprintf(p, sizeof p, "%s/color/frame-8.color.png", dir);
    tu_write_bytes(p, "x", 1);
    snprintf(p, sizeof p, "%s/depth/frame-8.depth.png", dir);
    tu_write_bytes(p, "x", 1);
    assert_int_equal(sinew_run_source_from_folder(ctx, &src, dir, 0.02, 0), SINEW_OK);
    assert_int_equal(src.nframes, 5);
    assert_non_null(strstr(src.warnings[src.nwarnings - 1], "has a smaller number"));
    sinew_run_source_free(ctx, &src);
    /* timestamped lists take precedence; frames are the associated colour stamps */
    snprintf(p, sizeof p, "%s/rgb.txt", dir);
    const char *rgb = "# rgb\n2.033 rgb/2.png\n1.000 rgb/1.png\n3.000 rgb/3.png\n";
    tu_write_bytes(p, rgb, strlen(rgb));
    snprintf(p, sizeof p, "%s/depth.txt", dir);
    const char *dep = "1.010 depth/1.png\n2.040 depth/2.png\n2.900 depth/3.png\n";
    tu_write_bytes(p, dep, strlen(dep));
    snprintf(p, sizeof p, "%s/intrinsics.json", dir);
    tu_write_bytes(p, "{}", 2);
    assert_int_equal(sinew_run_source_from_folder(ctx, &src, dir, 0.02, 0), SINEW_OK);
    assert_int_equal(src.nframes, 2);
    assert_int_equal(src.dropped, 1); /* 3.000 vs 2.900: 100 ms */
    assert_int_equal(src.nwarnings, 1);
    assert_non_null(strstr(src.warnings[0], "rgb/3.png (t = 3.000000 s) has no depth stamp"));
    assert_non_null(strstr(src.frames[0].color, "rgb/1.png"));
    assert_int_equal(src.frames[1].has_timestamp, 1);
    assert_true(src.frames[1].timestamp == 2.033);
    assert_non_null(strstr(src.frames[1].depth, "depth/2.png"));
    assert_non_null(src.intrinsics);
    sinew_run_source_free(ctx, &src);
    tu_rmtree(dir);
    free(dir);
    sinew_ctx_free(ctx);
}

static int source_from_sequence_op(sinew_ctx *ctx, void *ud)
{
    sinew_run_source src;
    int rc = sinew_run_source_from_sequence(ctx, &src, ud, "seq.json");
    if (!rc)
        sinew_run_source_free(ctx, &src);
    return rc;
}

static void test_run_sequence_run_settings_and_patterns(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    const char *txt = "{\"version\": 1, \"depth_scale\": 5000, \"depth_kind\": \"ray\","
                      " \"frames\": {\"color\": \"rgb/img_%04d.png\", \"depth\": \"d/%d.png\","
                      " \"first\": 8, \"count\": 3, \"step\": 2},"
                      " \"run\": {\"schedule\": {\"kind\": \"list\", \"pairs\": [[0, 2], [2, 1]]},"
                      " \"preset\": \"fast\", \"flow_format\": \"npy16\", \"match_stride\": 0}}";
    sinew_sequence *seq = NULL;
    assert_int_equal(sinew_sequence_parse(ctx, &seq, txt, strlen(txt), "dir/seq.json"), SINEW_OK);
    assert_int_equal(seq->n_frames, 3);
    assert_string_equal(seq->frames[0].color, "rgb/img_0008.png");
    assert_string_equal(seq->frames[2].color, "rgb/img_0012.png");
    assert_string_equal(seq->frames[1].depth, "d/10.png");
    assert_null(seq->frames[1].labels);
    assert_int_equal(seq->depth_ray, 1);
    assert_true(seq->run.has_schedule);
    assert_int_equal(seq->run.schedule_kind, SINEW_SCHEDULE_LIST);
    assert_int_equal(seq->run.n_pairs, 2);
    assert_int_equal(seq->run.pairs[3], 1);
    assert_string_equal(seq->run.flow_format, "npy16");
    assert_true(seq->run.has_match_stride);
    assert_int_equal(seq->run.match_stride, 0);
    /* the engine's frame list: paths resolved against the file's folder */
    sinew_run_source src;
    assert_int_equal(sinew_run_source_from_sequence(ctx, &src, seq, "dir/seq.json"), SINEW_OK);
    assert_int_equal(src.nframes, 3);
    assert_string_equal(src.frames[0].color, "dir/rgb/img_0008.png");
    assert_string_equal(src.frames[2].depth, "dir/d/12.png");
    assert_null(src.frames[1].labels);
    assert_null(src.intrinsics);
    sinew_run_source_free(ctx, &src);
    tu_fail_each_allocation("run source from a sequence", source_from_sequence_op, seq);
    /* write and read back: same settings (frames come back as a list) */
    char *dir = tu_tmpdir();
    char p[600];
    tu_path(p, sizeof p, dir, "again.json");
    assert_int_equal(sinew_sequence_write(seq, p), SINEW_OK);
    sinew_sequence *back = NULL;
    assert_int_equal(sinew_sequence_read(ctx, &back, p), SINEW_OK);
    assert_int_equal(back->n_frames, 3);
    assert_string_equal(back->frames[2].color, "rgb/img_0012.png");
    assert_int_equal(back->run.schedule_kind, SINEW_SCHEDULE_LIST);
    assert_int_equal(back->run.pairs[2], 2);
    assert_string_equal(back->run.preset, "fast");
    assert_int_equal(back->depth_ray, 1);
    sinew_sequence_free(back);
    sinew_sequence_free(seq);
    tu_rmtree(dir);
    free(dir);

    sinew_ctx_free(ctx);
}

static int parse_list_op(sinew_ctx *ctx, void *ud)
{
    sinew_schedule s;
    sinew_pair *list;
    int rc = sinew_schedule_parse(ctx, &s, &list, ud);
    sinew_ctx_dealloc(ctx, list);
    return rc;
}

static void test_run_schedule_parse(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_schedule s;
    sinew_pair *list = NULL;
    assert_int_equal(sinew_schedule_parse(ctx, &s, &list, "consecutive"), SINEW_OK);
    assert_int_equal(s.kind, SINEW_SCHEDULE_CONSECUTIVE);
    assert_null(list);
    assert_int_equal(sinew_schedule_parse(ctx, &s, &list, "gap:3"), SINEW_OK);
    assert_int_equal(s.kind, SINEW_SCHEDULE_GAP);
    assert_int_equal(s.gap, 3);
    assert_int_equal(sinew_schedule_parse(ctx, &s, &list, "keyframe:5:2"), SINEW_OK);
    assert_int_equal(s.kind, SINEW_SCHEDULE_KEYFRAME);
    assert_int_equal(s.every, 5);
    assert_int_equal(s.window, 2);
    /* usage errors: no message, no file touched */
    const char *bad[] = {
        "",           "gap",         "gap:",        "gap:0",        "gap:2x",         "gap:1000001",
        "keyframe:3", "keyframe::2", "keyframe:3:", "keyframe:3:0", "keyframe:1:2:3", "Consecutive",
        "list",       "every:2"};
    for (size_t k = 0; k < sizeof bad / sizeof bad[0]; k++)
        assert_int_equal(sinew_schedule_parse(ctx, &s, &list, bad[k]), SINEW_EINVAL);

    char *dir = tu_tmpdir();
    char p[600], arg[700];
    tu_path(p, sizeof p, dir, "pairs.txt");
    const char *txt = "# pairs\n0 2\n\n  3\t1\r\n# end\n5 4";
    tu_write_bytes(p, txt, strlen(txt));
    snprintf(arg, sizeof arg, "list:%s", p);
    assert_int_equal(sinew_schedule_parse(ctx, &s, &list, arg), SINEW_OK);
    assert_int_equal(s.kind, SINEW_SCHEDULE_LIST);
    assert_int_equal(s.list_len, 3);
    assert_ptr_equal(s.list, list);
    assert_int_equal(list[1].i, 3);
    assert_int_equal(list[1].j, 1);
    assert_int_equal(list[2].i, 5);
    assert_int_equal(list[2].j, 4);
    sinew_ctx_dealloc(ctx, list);
    tu_fail_each_allocation("schedule list", parse_list_op, arg);
    /* the line number counts blank lines too */
    const char *bad_txt = "0 1\n\n# x\n2 3 4\n";
    tu_write_bytes(p, bad_txt, strlen(bad_txt));
    assert_int_equal(sinew_schedule_parse(ctx, &s, &list, arg), SINEW_EFORMAT);
    assert_null(list);
    char want[800];
    snprintf(want, sizeof want, "%s: line 4: expected 'I J' (frame numbers)", p);
    assert_string_equal(sinew_ctx_message(ctx), want);
    tu_write_bytes(p, "1 -2\n", 5);
    assert_int_equal(sinew_schedule_parse(ctx, &s, &list, arg), SINEW_EFORMAT);
    tu_write_bytes(p, "1 1000000\n", 10);
    assert_int_equal(sinew_schedule_parse(ctx, &s, &list, arg), SINEW_EFORMAT);
    /* an empty list is refused: the run would succeed having done nothing (issue 21) */
    tu_write_bytes(p, "# none\n", 7);
    assert_int_equal(sinew_schedule_parse(ctx, &s, &list, arg), SINEW_ECONFIG);
    assert_non_null(strstr(sinew_ctx_message(ctx), "the schedule is empty"));
    assert_null(list);
    tu_path(p, sizeof p, dir, "missing.txt");
    snprintf(arg, sizeof arg, "list:%s", p);
    assert_int_not_equal(sinew_schedule_parse(ctx, &s, &list, arg), SINEW_OK);
    assert_non_null(strstr(sinew_ctx_message(ctx), "missing.txt"));
    tu_rmtree(dir);
    free(dir);
    sinew_ctx_free(ctx);
}

static void test_run_sequence_settings_apply_under_given_ones(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    const char *txt = "{\"version\": 1, \"depth_scale\": 5000, \"depth_kind\": \"ray\","
                      " \"intrinsics\": {\"fx\": 500, \"fy\": 501, \"cx\": 319.5, \"cy\": 239.5,"
                      " \"width\": 640, \"height\": 480},"
                      " \"frames\": {\"color\": \"c/%d.png\", \"count\": 4},"
                      " \"run\": {\"schedule\": {\"kind\": \"list\", \"pairs\": [[0, 2], [3, 1]]},"
                      " \"preset\": \"fast\", \"flow_format\": \"npy16\", \"match_stride\": 0}}";
    sinew_sequence *seq = NULL;
    assert_int_equal(sinew_sequence_parse(ctx, &seq, txt, strlen(txt), "seq.json"), SINEW_OK);
    sinew_run_pipeline_params pp;
    sinew_camera cam;
    sinew_run_pipeline_params_default(&pp);
    assert_int_equal(sinew_run_pipeline_params_apply_sequence(ctx, &pp, &cam, seq, "seq.json", 0),
                     SINEW_OK);
    assert_string_equal(pp.preset, "fast");
    assert_int_equal(pp.flow_format, SINEW_FLOW_NPY16);
    assert_int_equal(pp.match_stride, 0);
    assert_true(pp.depth_scale == 5000);
    assert_int_equal(pp.depth_ray, 1);
    assert_ptr_equal(pp.camera, &cam);
    assert_true(cam.fx == 500 && cam.cy == 239.5);
    /* settings the caller gave stay */
    sinew_run_pipeline_params_default(&pp);
    pp.preset = "accurate";
    pp.match_stride = 7;
    pp.depth_scale = 1000;
    unsigned keep = SINEW_RUN_KEEP_PRESET | SINEW_RUN_KEEP_FLOW_FORMAT |
                    SINEW_RUN_KEEP_MATCH_STRIDE | SINEW_RUN_KEEP_DEPTH_SCALE;
    assert_int_equal(
        sinew_run_pipeline_params_apply_sequence(ctx, &pp, &cam, seq, "seq.json", keep), SINEW_OK);
    assert_string_equal(pp.preset, "accurate");
    assert_int_equal(pp.flow_format, SINEW_FLOW_FLO);
    assert_int_equal(pp.match_stride, 7);
    assert_true(pp.depth_scale == 1000);
    /* the schedule, and a sequence without one leaves the caller's */
    sinew_schedule s = {SINEW_SCHEDULE_GAP, 2, 0, 0, NULL, 0};
    sinew_pair *list = NULL;
    assert_int_equal(sinew_run_schedule_from_sequence(ctx, &s, &list, seq), SINEW_OK);
    assert_int_equal(s.kind, SINEW_SCHEDULE_LIST);
    assert_int_equal(s.list_len, 2);
    assert_int_equal(list[1].i, 3);
    assert_int_equal(list[1].j, 1);
    sinew_ctx_dealloc(ctx, list);
    sinew_sequence_free(seq);
    const char *plain = "{\"version\": 1, \"frames\": {\"color\": \"c/%d.png\", \"count\": 2},"
                        " \"run\": {\"flow_format\": \"pfm\"}}";
    assert_int_equal(sinew_sequence_parse(ctx, &seq, plain, strlen(plain), "p.json"), SINEW_OK);
    /* the reader refuses unknown formats; a sequence built in code may still hold one */
    char *owned = seq->run.flow_format, tiff[] = "tiff";
    seq->run.flow_format = tiff;
    s = (sinew_schedule){SINEW_SCHEDULE_GAP, 2, 0, 0, NULL, 0};
    assert_int_equal(sinew_run_schedule_from_sequence(ctx, &s, &list, seq), SINEW_OK);
    assert_int_equal(s.kind, SINEW_SCHEDULE_GAP);
    assert_null(list);
    sinew_run_pipeline_params_default(&pp);
    assert_int_equal(sinew_run_pipeline_params_apply_sequence(ctx, &pp, &cam, seq, "p.json", 0),
                     SINEW_ECONFIG);
    assert_string_equal(sinew_ctx_message(ctx), "p.json: run.flow_format: unknown format");
    assert_null(pp.camera);
    assert_int_equal(sinew_run_pipeline_params_apply_sequence(ctx, &pp, &cam, seq, "p.json",
                                                              SINEW_RUN_KEEP_FLOW_FORMAT),
                     SINEW_OK);
    seq->run.flow_format = owned;
    sinew_sequence_free(seq);
    sinew_ctx_free(ctx);
}

static void test_run_pipeline_options_text(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    sinew_run_pipeline_params p;
    sinew_run_pipeline_params_default(&p);
    char buf[512];
    assert_int_equal(sinew_run_pipeline_options(ctx, buf, sizeof buf, &p), SINEW_OK);
    assert_string_equal(buf, "{\"flow_preset\":\"balanced\",\"flow_format\":\"flo\","
                             "\"check\":\"default\",\"matches\":true,\"match_stride\":4,"
                             "\"depth_scale\":1000,\"depth_kind\":\"z\"}");
    sinew_camera cam;
    sinew_camera_init(&cam, 525, 525, 319.5, 239.5, 640, 480);
    p.camera = &cam;
    p.flow_format = SINEW_FLOW_NPY16;
    assert_int_equal(sinew_run_pipeline_options(ctx, buf, sizeof buf, &p), SINEW_OK);
    assert_non_null(strstr(buf, "\"flow_format\":\"npy16\""));
    assert_non_null(strstr(buf, "\"camera\":[525,525,319.5,239.5,640,480,0,0,0,0,0]}"));
    assert_int_equal(sinew_run_pipeline_options(ctx, buf, 40, &p), SINEW_ELIMIT);
    p.preset = "fast\",\"x";
    assert_int_equal(sinew_run_pipeline_options(ctx, buf, sizeof buf, &p), SINEW_ECONFIG);
    assert_string_equal(sinew_flow_format_ext(SINEW_FLOW_NPY16), "npy");
    assert_string_equal(sinew_flow_format_ext(SINEW_FLOW_KITTI), "png");
    assert_null(sinew_flow_format_ext(99));
    sinew_ctx_free(ctx);
}

/* Stored options: a written record reads back equal; a given key that differs is
 * refused naming the key and both values; keys not given come from the record; force
 * lets the given ones win; a folder without the record reports found = 0. */
static void test_run_options_store_and_reconcile(void **state)
{
    (void)state;
    sinew_ctx *ctx = sinew_ctx_new();
    char *dir = tu_tmpdir();
    sinew_run_options w, r, g;
    memset(&w, 0, sizeof w);
    snprintf(w.preset, sizeof w.preset, "accurate");
    w.flow_format = SINEW_FLOW_NPY16;
    w.match_stride = 2;
    w.depth_scale = 5000;
    w.max_dt = 0.03;
    snprintf(w.schedule, sizeof w.schedule, "gap:2");
    int found = 1;
    assert_int_equal(sinew_run_options_read(ctx, &r, &found, dir), SINEW_OK);
    assert_int_equal(found, 0);
    assert_int_equal(sinew_run_options_write(ctx, dir, &w), SINEW_OK);
    memset(&r, 0, sizeof r);
    assert_int_equal(sinew_run_options_read(ctx, &r, &found, dir), SINEW_OK);
    assert_int_equal(found, 1);
    assert_memory_equal(&r, &w, sizeof w);

    memset(&g, 0, sizeof g);
    snprintf(g.preset, sizeof g.preset, "balanced");
    g.match_stride = 2;
    assert_int_equal(sinew_run_options_reconcile(ctx, &g, &r, SINEW_RUN_OPT_PRESET, 0, "X"),
                     SINEW_ECONFIG);
    assert_string_equal(sinew_ctx_message(ctx),
                        "X: preset is 'accurate' there but 'balanced' was given");
    assert_int_equal(sinew_run_options_reconcile(ctx, &g, &r, SINEW_RUN_OPT_MATCH_STRIDE, 0, "X"),
                     SINEW_OK);
    assert_memory_equal(&g, &w, sizeof w);
    snprintf(g.preset, sizeof g.preset, "fast");
    g.max_dt = 0.5;
    assert_int_equal(sinew_run_options_reconcile(ctx, &g, &r, SINEW_RUN_OPT_PRESET, 1, "X"),
                     SINEW_OK);
    assert_string_equal(g.preset, "fast");
    assert_true(g.max_dt == 0.03);
    assert_string_equal(g.schedule, "gap:2");

    char path[4200];
    FILE *f = fopen(tu_path(path, sizeof path, dir, "options.json"), "w");
    assert_non_null(f);
    fputs("{\"sinew_run_options\": 1, \"preset\": \"fast\", \"flow_format\": \"flo\", "
          "\"match_stride\": 4, \"depth_scale\": -1, \"max_dt\": 0.02, \"schedule\": null, "
          "\"flow_from\": null}\n",
          f);
    fclose(f);
    assert_int_equal(sinew_run_options_read(ctx, &r, &found, dir), SINEW_EFORMAT);
    assert_non_null(strstr(sinew_ctx_message(ctx), "options.json: depth_scale"));

    /* tuning: written and read back, reconciled per setting, bad keys refused */
    w.tuning.set = 1u << SINEW_TUNE_FB_ALPHA | 1u << SINEW_TUNE_TOP_K;
    w.tuning.value[SINEW_TUNE_FB_ALPHA] = 0.02;
    w.tuning.value[SINEW_TUNE_TOP_K] = 500;
    snprintf(w.intrinsics, sizeof w.intrinsics, "585,585,320,240");
    assert_int_equal(sinew_run_options_write(ctx, dir, &w), SINEW_OK);
    memset(&r, 0, sizeof r);
    assert_int_equal(sinew_run_options_read(ctx, &r, &found, dir), SINEW_OK);
    assert_memory_equal(&r, &w, sizeof w);
    char text[256];
    assert_int_equal(sinew_run_tuning_text(ctx, text, sizeof text, &r.tuning), SINEW_OK);
    assert_string_equal(text, "{\"fb-alpha\":0.02,\"top-k\":500}");
    assert_int_equal(sinew_run_tuning_text(ctx, text, 12, &r.tuning), SINEW_ELIMIT);
    g = r;
    g.tuning.value[SINEW_TUNE_TOP_K] = 600;
    assert_int_equal(
        sinew_run_options_reconcile(ctx, &g, &r, SINEW_RUN_OPT_TUNE(SINEW_TUNE_TOP_K), 0, "X"),
        SINEW_ECONFIG);
    assert_string_equal(sinew_ctx_message(ctx), "X: top-k is '500' there but '600' was given");
    g = r;
    g.tuning.set = 0; /* given nothing: the stored settings are taken */
    assert_int_equal(sinew_run_options_reconcile(ctx, &g, &r, 0, 0, "X"), SINEW_OK);
    assert_memory_equal(&g.tuning, &w.tuning, sizeof w.tuning);
    assert_int_equal(sinew_run_tune_find("per-cell"), SINEW_TUNE_PER_CELL);
    assert_int_equal(sinew_run_tune_find("perr-cell"), -1);
    assert_int_equal(sinew_run_tune_valid(SINEW_TUNE_EDGE_RADIUS, 17), -1);
    assert_int_equal(sinew_run_tune_valid(SINEW_TUNE_EDGE_RADIUS, 1.5), -1);
    assert_int_equal(sinew_run_tune_valid(SINEW_TUNE_FAR, 0), -1);
    assert_int_equal(sinew_run_tune_valid(SINEW_TUNE_NEAR, 0), 0);
    f = fopen(path, "w");
    assert_non_null(f);
    fputs("{\"sinew_run_options\": 1, \"preset\": \"fast\", \"flow_format\": \"flo\", "
          "\"match_stride\": 4, \"depth_scale\": 1000, \"max_dt\": 0.02, \"schedule\": null, "
          "\"flow_from\": null, \"tuning\": {\"fb-alfa\": 1}}\n",
          f);
    fclose(f);
    assert_int_equal(sinew_run_options_read(ctx, &r, &found, dir), SINEW_EFORMAT);
    assert_non_null(strstr(sinew_ctx_message(ctx), "options.json: tuning: unknown key 'fb-alfa'"));
    tu_rmtree(dir);
    free(dir);
    sinew_ctx_free(ctx);
}

/* ---- engine with a stand-in pair function ---- */

typedef struct {
    int calls;
    int fail_index; /* -1: never */
    sig_atomic_t *cancel_after;
    int cancel_at;
} fake;

/* Writes out.txt = the two colour files' contents, and stats {"pair": index}. */
static int fake_pair(void *ud, sinew_ctx *ctx, const sinew_run_job *job, char **stats)
{
    fake *f = ud;
    f->calls++;
    if (f->cancel_after && f->calls == f->cancel_at)
        *f->cancel_after = 1;
    if ((int)job->index == f->fail_index)
        return SINEW_EFORMAT; /* no message: the engine falls back to the status text */
    char p[700];
    snprintf(p, sizeof p, "%s/out.txt", job->dir);
    char body[64];
    int n = snprintf(body, sizeof body, "%d->%d\n", (int)job->pair.i, (int)job->pair.j);
    int rc = sinew_write_file(ctx, p, body, (size_t)n);
    if (rc)
        return rc;
    *stats = sinew_ctx_alloc(ctx, 64);
    if (!*stats)
        return SINEW_ENOMEM;
    snprintf(*stats, 64, "{\"index\": %zu}", job->index);
    return SINEW_OK;
}

typedef struct {
    char *dir;
    char in[8][600];
    sinew_run_frame frames[8];
    sinew_pair *pairs;
    size_t npairs;
    sinew_ctx *ctx;
} fixture;

static void fixture_make(fixture *fx)
{
    memset(fx, 0, sizeof *fx);
    fx->ctx = sinew_ctx_new();
    fx->dir = tu_tmpdir();
    for (int f = 0; f < 6; f++) {
        char nm[32], body[32];
        snprintf(nm, sizeof nm, "frame%d.png", f);
        tu_path(fx->in[f], sizeof fx->in[f], fx->dir, nm);
        int n = snprintf(body, sizeof body, "pixels of frame %d", f);
        tu_write_bytes(fx->in[f], body, (size_t)n);
        fx->frames[f].color = fx->in[f];
    }
    sinew_schedule s = {SINEW_SCHEDULE_CONSECUTIVE, 0, 0, 0, NULL, 0};
    assert_int_equal(sinew_schedule_pairs(fx->ctx, &fx->pairs, &fx->npairs, &s, 6), SINEW_OK);
}

static void fixture_free(fixture *fx)
{
    sinew_ctx_dealloc(fx->ctx, fx->pairs);
    tu_rmtree(fx->dir);
    free(fx->dir);
    sinew_ctx_free(fx->ctx);
}

static sinew_run_spec spec_for(fixture *fx, const char *outname, char *outdir, size_t n)
{
    tu_path(outdir, n, fx->dir, outname);
    sinew_run_spec s;
    memset(&s, 0, sizeof s);
    s.frames = fx->frames;
    s.nframes = 6;
    s.pairs = fx->pairs;
    s.npairs = fx->npairs;
    s.options = "{\"flow\":\"fake\"}";
    s.outdir = outdir;
    s.shard_n = 1;
    static const char *const outputs[] = {"out.txt"}; /* what fake_pair writes */
    s.outputs = outputs;
    s.noutputs = 1;
    return s;
}

static int run_once(sinew_ctx *ctx, const sinew_run_spec *s, fake *f, sinew_run_result *res,
                    int manifest)
{
    sinew_run *run;
    assert_int_equal(sinew_run_new(ctx, &run, s), SINEW_OK);
    int rc = sinew_run_execute(run, fake_pair, f, NULL, NULL, res);
    if (manifest)
        assert_int_equal(sinew_run_write_manifest(run, 1, NULL, NULL, NULL), SINEW_OK);
    sinew_run_free(run);
    return rc;
}

static int same_tree(const char *a, const char *b)
{
    char cmd[1400];
    snprintf(cmd, sizeof cmd, "diff -r '%s' '%s' >/dev/null", a, b);
    return system(cmd) == 0;
}

typedef struct {
    size_t order[16];
    int status[16];
    size_t n;
} progress_log;

static void log_progress(void *ud, const sinew_run_progress *p)
{
    progress_log *l = ud;
    if (l->n < 16) {
        l->order[l->n] = p->index;
        l->status[l->n++] = (int)p->status;
    }
}

/* --jobs: several pairs at once on worker threads give the bytes, the records, the
 * progress order and the counts of one job, also with a failing pair (skip policy). */
static void test_run_engine_jobs_match_one_job(void **state)
{
    (void)state;
    fixture fx;
    fixture_make(&fx);
    char out1[600], out3[600];
    sinew_run_spec s1 = spec_for(&fx, "one", out1, sizeof out1);
    sinew_run_spec s3 = spec_for(&fx, "three", out3, sizeof out3);
    s1.on_error = s3.on_error = SINEW_RUN_SKIP;
    fake f1 = {0, 2, NULL, 0};
    progress_log l1 = {{0}, {0}, 0}, l3 = {{0}, {0}, 0};
    sinew_run_result r1, r3;
    sinew_run *run;
    assert_int_equal(sinew_run_new(fx.ctx, &run, &s1), SINEW_OK);
    assert_int_equal(sinew_run_execute(run, fake_pair, &f1, log_progress, &l1, &r1), SINEW_EFORMAT);
    assert_int_equal(sinew_run_write_manifest(run, 0, NULL, NULL, NULL), SINEW_OK);
    sinew_run_free(run);
    fake f3[3] = {{0, 2, NULL, 0}, {0, 2, NULL, 0}, {0, 2, NULL, 0}};
    sinew_ctx *wc[3];
    void *uds[3];
    for (int k = 0; k < 3; k++) {
        wc[k] = sinew_ctx_new();
        assert_non_null(wc[k]);
        uds[k] = &f3[k];
    }
    assert_int_equal(sinew_run_new(fx.ctx, &run, &s3), SINEW_OK);
    assert_int_equal(sinew_run_execute_jobs(run, 3, wc, fake_pair, uds, log_progress, &l3, &r3),
                     SINEW_EFORMAT);
    assert_int_equal(sinew_run_write_manifest(run, 0, NULL, NULL, NULL), SINEW_OK);
    /* the run's own context may not be a worker's */
    sinew_ctx *bad[2] = {wc[0], fx.ctx};
    sinew_run_result rb;
    assert_int_equal(sinew_run_execute_jobs(run, 2, bad, fake_pair, uds, NULL, NULL, &rb),
                     SINEW_EINVAL);
    sinew_run_free(run);
    assert_int_equal(f3[0].calls + f3[1].calls + f3[2].calls, f1.calls);
    assert_int_equal(r3.computed, r1.computed);
    assert_int_equal(r3.failed, 1);
    assert_int_equal(r1.failed, 1);
    assert_int_equal(l3.n, l1.n);
    for (size_t k = 0; k < l1.n; k++) {
        assert_int_equal(l3.order[k], l1.order[k]);
        assert_int_equal(l3.status[k], l1.status[k]);
    }
    assert_true(same_tree(out1, out3));
    for (int k = 0; k < 3; k++)
        sinew_ctx_free(wc[k]);
    fixture_free(&fx);
}

static void test_run_engine_resume_skips_only_up_to_date(void **state)
{
    (void)state;
    fixture fx;
    fixture_make(&fx);
    char out[600], p[700];
    sinew_run_spec s = spec_for(&fx, "out", out, sizeof out);
    fake f = {0, -1, NULL, 0};
    sinew_run_result r;
    assert_int_equal(run_once(fx.ctx, &s, &f, &r, 1), SINEW_OK);
    assert_int_equal(r.computed, 5);
    assert_int_equal(f.calls, 5);
    snprintf(p, sizeof p, "%s/pairs/000002-000003/done.json", out);
    assert_true(tu_file_exists(p));

    s.resume = 1;
    f.calls = 0;
    assert_int_equal(run_once(fx.ctx, &s, &f, &r, 1), SINEW_OK);
    assert_int_equal(r.skipped, 5);
    assert_int_equal(f.calls, 0);

    /* a changed input frame invalidates exactly the two pairs that use it; peeking
     * (what --dry-run --resume shows) sees that before the run and changes nothing */
    tu_write_bytes(fx.in[3], "new pixels", 10);
    sinew_pair_status st[5];
    size_t ndone = 9;
    assert_int_equal(sinew_run_peek(fx.ctx, st, &ndone, &s), SINEW_OK);
    assert_int_equal(ndone, 3);
    for (int q = 0; q < 5; q++)
        assert_int_equal(st[q], q == 2 || q == 3 ? SINEW_PAIR_PENDING : SINEW_PAIR_SKIPPED);
    s.shard_k = 1;
    s.shard_n = 2; /* shard 1 of 2 owns pairs 1 and 3 */
    assert_int_equal(sinew_run_peek(fx.ctx, st, &ndone, &s), SINEW_OK);
    assert_int_equal(ndone, 1);
    assert_int_equal(st[0], SINEW_PAIR_PENDING);
    assert_int_equal(st[1], SINEW_PAIR_SKIPPED);
    s.shard_k = 0;
    s.shard_n = 1;
    char none[700];
    tu_path(none, sizeof none, fx.dir, "never-made");
    sinew_run_spec sn = s;
    sn.outdir = none;
    assert_int_equal(sinew_run_peek(fx.ctx, st, &ndone, &sn), SINEW_OK);
    assert_int_equal(ndone, 0);
    assert_false(tu_file_exists(none));
    assert_int_equal(run_once(fx.ctx, &s, &f, &r, 1), SINEW_OK);
    assert_int_equal(r.computed, 2);
    assert_int_equal(r.skipped, 3);
    /* a damaged output is redone */
    snprintf(p, sizeof p, "%s/pairs/000000-000001/out.txt", out);
    tu_write_bytes(p, "0->X\n", 5);
    f.calls = 0;
    assert_int_equal(run_once(fx.ctx, &s, &f, &r, 1), SINEW_OK);
    assert_int_equal(f.calls, 1);
    /* changed options redo everything; stale outputs of other settings (a flow in
     * another format) are removed */
    snprintf(p, sizeof p, "%s/pairs/000004-000005/backward.pfm", out);
    tu_write_bytes(p, "x", 1);
    s.options = "{\"flow\":\"other\"}";
    assert_int_equal(run_once(fx.ctx, &s, &f, &r, 1), SINEW_OK);
    assert_int_equal(r.computed, 5);
    assert_false(tu_file_exists(p));
    /* a file sinew did not make is never deleted: the pair fails naming it (issue 21) */
    snprintf(p, sizeof p, "%s/pairs/000004-000005/thesis.txt", out);
    tu_write_bytes(p, "mine", 4);
    s.options = "{\"flow\":\"third\"}";
    s.on_error = SINEW_RUN_SKIP;
    assert_int_equal(run_once(fx.ctx, &s, &f, &r, 0), SINEW_ECONFIG);
    assert_int_equal(r.failed, 1);
    assert_true(tu_file_exists(p));
    assert_non_null(strstr(sinew_ctx_message(fx.ctx), "thesis.txt: not made by sinew"));
    /* a done record that does not list every expected output is not trusted */
    s.options = "{\"flow\":\"fake\"}";
    s.on_error = SINEW_RUN_STOP;
    unlink(p);
    assert_int_equal(run_once(fx.ctx, &s, &f, &r, 0), SINEW_OK);
    static const char *const more[] = {"out.txt", "extra.bin"};
    s.outputs = more;
    s.noutputs = 2;
    f.calls = 0;
    assert_int_equal(run_once(fx.ctx, &s, &f, &r, 0), SINEW_OK);
    assert_int_equal(r.skipped, 0);
    assert_int_equal(f.calls, 5);
    fixture_free(&fx);
}

static void test_run_engine_shards_match_whole_run(void **state)
{
    (void)state;
    fixture fx;
    fixture_make(&fx);
    char whole[600], sh[600];
    sinew_run_spec s = spec_for(&fx, "whole", whole, sizeof whole);
    fake f = {0, -1, NULL, 0};
    sinew_run_result r;
    assert_int_equal(run_once(fx.ctx, &s, &f, &r, 1), SINEW_OK);
    sinew_run_spec t = spec_for(&fx, "sharded", sh, sizeof sh);
    t.shard_n = 3;
    size_t total = 0;
    for (int k = 0; k < 3; k++) {
        t.shard_k = k;
        assert_int_equal(run_once(fx.ctx, &t, &f, &r, 0), SINEW_OK);
        total += r.computed;
    }
    assert_int_equal(total, 5);
    /* merge: an unsharded resume computes nothing and writes the manifest */
    t.shard_n = 1;
    t.shard_k = 0;
    t.resume = 1;
    f.calls = 0;
    assert_int_equal(run_once(fx.ctx, &t, &f, &r, 1), SINEW_OK);
    assert_int_equal(f.calls, 0);
    assert_true(same_tree(whole, sh));
    fixture_free(&fx);
}

static void test_run_engine_error_policies(void **state)
{
    (void)state;
    fixture fx;
    fixture_make(&fx);
    char out[600], p[700];
    sinew_run_spec s = spec_for(&fx, "out", out, sizeof out);
    /* a missing frame: named in the error; skip policy carries on */
    unlink(fx.in[4]);
    s.on_error = SINEW_RUN_SKIP;
    fake f = {0, -1, NULL, 0};
    sinew_run_result r;
    sinew_run *run;
    assert_int_equal(sinew_run_new(fx.ctx, &run, &s), SINEW_OK);
    assert_int_equal(sinew_run_execute(run, fake_pair, &f, NULL, NULL, &r), SINEW_EIO);
    assert_non_null(strstr(sinew_ctx_message(fx.ctx), "frame4.png"));
    assert_int_equal(r.computed, 3);
    assert_int_equal(r.failed, 2);
    size_t nd, nf, np;
    assert_int_equal(sinew_run_write_manifest(run, 0, &nd, &nf, &np), SINEW_OK);
    assert_int_equal(nd, 3);
    assert_int_equal(nf, 2);
    assert_int_equal(np, 0);
    sinew_run_free(run);
    snprintf(p, sizeof p, "%s/pairs/000003-000004/error.json", out);
    assert_true(tu_file_exists(p));
    snprintf(p, sizeof p, "%s/manifest.json", out);
    unsigned char *buf;
    size_t len;
    assert_int_equal(sinew_read_file(fx.ctx, &buf, &len, p, 1 << 20), SINEW_OK);
    assert_non_null(strstr((char *)buf, "\"status\":\t\"failed\""));
    assert_non_null(strstr((char *)buf, "frame4.png: cannot open"));
    sinew_ctx_dealloc(fx.ctx, buf);

    /* stop policy: the first failure ends the run; earlier pairs are kept */
    char out2[600];
    s = spec_for(&fx, "out2", out2, sizeof out2);
    s.on_error = SINEW_RUN_STOP;
    assert_int_equal(sinew_run_new(fx.ctx, &run, &s), SINEW_OK);
    assert_int_equal(sinew_run_execute(run, fake_pair, &f, NULL, NULL, &r), SINEW_EIO);
    assert_int_equal(r.computed, 3);
    assert_int_equal(r.failed, 1);
    assert_int_equal(sinew_run_write_manifest(run, 0, &nd, &nf, &np), SINEW_OK);
    assert_int_equal(nd, 3);
    /* pair 4-5 was never tried (its input is missing too): pending, as the run's own
     * count says, not failed (issue 17 item 4) */
    assert_int_equal(nf, 1);
    assert_int_equal(np, 1);
    sinew_run_free(run);
    snprintf(p, sizeof p, "%s/pairs/000002-000003/done.json", out2);
    assert_true(tu_file_exists(p));

    /* a pair function failure without message still records a reason */
    tu_write_bytes(fx.in[4], "back", 4);
    f.fail_index = 1;
    s.on_error = SINEW_RUN_SKIP;
    assert_int_equal(sinew_run_new(fx.ctx, &run, &s), SINEW_OK);
    sinew_ctx_clear(fx.ctx);
    assert_int_equal(sinew_run_execute(run, fake_pair, &f, NULL, NULL, &r), SINEW_EFORMAT);
    assert_int_equal(r.failed, 1);
    sinew_run_free(run);
    fixture_free(&fx);
}

static void test_run_engine_cancel_stops_between_pairs(void **state)
{
    (void)state;
    fixture fx;
    fixture_make(&fx);
    char out[600];
    sinew_run_spec s = spec_for(&fx, "out", out, sizeof out);
    static volatile sig_atomic_t flag; /* stands in for the CLI's signal flag */
    flag = 0;
    sinew_ctx_set_cancel(fx.ctx, &flag);
    fake f = {0, -1, (sig_atomic_t *)&flag, 2};
    sinew_run_result r;
    /* no manifest: it too stops while the flag is set (the CLI detaches the flag to
     * write it after a first stop request) */
    assert_int_equal(run_once(fx.ctx, &s, &f, &r, 0), SINEW_EINTERRUPTED);
    /* the pair in progress gets no record: hashing its outputs stops at the flag */
    assert_int_equal(r.computed, 1);
    assert_true(r.interrupted);
    flag = 0;
    s.resume = 1;
    f.cancel_after = NULL;
    assert_int_equal(run_once(fx.ctx, &s, &f, &r, 1), SINEW_OK);
    assert_int_equal(r.skipped, 1);
    assert_int_equal(r.computed, 4);
    fixture_free(&fx);
}

/* The context's stop flag (what the CLI's first SIGINT/SIGTERM sets) cuts hashing short:
 * the pair in progress is neither failed nor given a record; a resumed run with --resume
 * trusts nothing it did not verify, and a stop during verification empties nothing. */
static void test_run_engine_stop_flag_in_context(void **state)
{
    (void)state;
    fixture fx;
    fixture_make(&fx);
    char out[600], p[700];
    sinew_run_spec s = spec_for(&fx, "out", out, sizeof out);
    static volatile sig_atomic_t flag;
    flag = 0;
    sinew_ctx_set_cancel(fx.ctx, &flag);
    fake f = {0, -1, (sig_atomic_t *)&flag, 2}; /* set inside the second pair */
    sinew_run_result r;
    assert_int_equal(run_once(fx.ctx, &s, &f, &r, 0), SINEW_EINTERRUPTED);
    assert_true(r.interrupted);
    assert_int_equal(r.computed, 1); /* the second pair's done record was never written */
    assert_int_equal(r.failed, 0);
    snprintf(p, sizeof p, "%s/pairs/000001-000002/done.json", out);
    assert_false(tu_file_exists(p));
    snprintf(p, sizeof p, "%s/pairs/000001-000002/error.json", out);
    assert_false(tu_file_exists(p));
    /* the manifest is not built while the flag is set */
    sinew_run *run;
    assert_int_equal(sinew_run_new(fx.ctx, &run, &s), SINEW_OK);
    assert_int_equal(sinew_run_write_manifest(run, 1, NULL, NULL, NULL), SINEW_EINTERRUPTED);
    sinew_run_free(run);
    snprintf(p, sizeof p, "%s/manifest.json", out);
    assert_false(tu_file_exists(p));
    /* a resumed run stopped at once leaves the done pair as it was */
    s.resume = 1;
    f.cancel_after = NULL;
    assert_int_equal(run_once(fx.ctx, &s, &f, &r, 0), SINEW_EINTERRUPTED);
    assert_int_equal(r.computed + r.skipped + r.failed, 0);
    snprintf(p, sizeof p, "%s/pairs/000000-000001/done.json", out);
    assert_true(tu_file_exists(p));
    flag = 0;
    f.calls = 0;
    assert_int_equal(run_once(fx.ctx, &s, &f, &r, 1), SINEW_OK);
    assert_int_equal(r.skipped, 1);
    assert_int_equal(r.computed, 4);
    sinew_ctx_set_cancel(fx.ctx, NULL);
    fixture_free(&fx);
}

static void test_run_engine_rejects_bad_spec(void **state)
{
    (void)state;
    fixture fx;
    fixture_make(&fx);
    char out[600];
    sinew_run_spec s = spec_for(&fx, "out", out, sizeof out);
    sinew_run *run;
    s.shard_k = 3;
    s.shard_n = 3;
    assert_int_equal(sinew_run_new(fx.ctx, &run, &s), SINEW_ECONFIG);
    s.shard_k = 0;
    s.shard_n = 1;
    sinew_pair bad = {0, 9};
    s.pairs = &bad;
    s.npairs = 1;
    assert_int_equal(sinew_run_new(fx.ctx, &run, &s), SINEW_ECONFIG);
    /* alloc failures: clean error, nothing leaked */
    s = spec_for(&fx, "out", out, sizeof out);
    for (long k = 2; k < 4; k++) {
        tu_failalloc fa = {k, 0, 0};
        sinew_ctx *c = tu_ctx_failing(&fa);
        int rc = sinew_run_new(c, &run, &s);
        if (rc == SINEW_OK)
            sinew_run_free(run);
        else
            assert_int_equal(rc, SINEW_ENOMEM);
        sinew_ctx_free(c);
        assert_int_equal(fa.live, 0);
    }
    fixture_free(&fx);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_run_sha256_nist_vectors),
        cmocka_unit_test(test_run_sha256_matches_coreutils),
        cmocka_unit_test(test_run_engine_jobs_match_one_job),
        cmocka_unit_test(test_run_sha256_file_matches_memory),
        cmocka_unit_test(test_run_schedule_kinds_and_names),
        cmocka_unit_test(test_run_shards_partition_pairs),
        cmocka_unit_test(test_run_schedule_parse),
        cmocka_unit_test(test_run_sequence_settings_apply_under_given_ones),
        cmocka_unit_test(test_run_associate_greedy_within_tolerance),
        cmocka_unit_test(test_run_associate_offset_and_errors),
        cmocka_unit_test(test_run_stamp_list_read),
        cmocka_unit_test(test_run_source_folder_layouts),
        cmocka_unit_test(test_run_pipeline_options_text),
        cmocka_unit_test(test_run_options_store_and_reconcile),
        cmocka_unit_test(test_run_sequence_run_settings_and_patterns),
        cmocka_unit_test(test_run_engine_resume_skips_only_up_to_date),
        cmocka_unit_test(test_run_engine_shards_match_whole_run),
        cmocka_unit_test(test_run_engine_error_policies),
        cmocka_unit_test(test_run_engine_cancel_stops_between_pairs),
        cmocka_unit_test(test_run_engine_stop_flag_in_context),
        cmocka_unit_test(test_run_engine_rejects_bad_spec),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
