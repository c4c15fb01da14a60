/* SPDX-License-Identifier: MIT */
/* sinew run: process a whole sequence pair by pair with resume, shards and progress.
 * The library does the work (flow/run.h). This file runs four steps: parse the command
 * line (run_args), plan (load the sequence or folder, apply its settings under the
 * command line's, expand the schedule: run_plan), execute (dry run, merge, or the run
 * with the signal flag and progress) and print (summary lines, the --report table, the
 * one-line error and the exit code).
 * Progress goes to stdout (a live line on a terminal, plain or JSON lines otherwise);
 * stderr carries the pairs' warnings as they finish (at most WARN_SHOWN, then a count)
 * and the final one-line error, if any. */
#define _GNU_SOURCE
#include <dirent.h>
#include <errno.h>
#include <ftw.h>
#include <getopt.h>
#include <math.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "flow/camera.h"
#include "flow/io.h"
#include "flow/report.h"
#include "flow/runstereo.h"
#include "flow/sequence.h"
#include "tools/cli.h"

static const char *const CMD = "run";

static void usage(FILE *out)
{
    fprintf(out,
            "usage: sinew run SEQUENCE.json|FOLDER -o OUTDIR [options]\n"
            "\n"
            "Process every frame pair of a sequence: forward and backward flow, the\n"
            "forward-backward check (reason mask, confidence) and per-pair stats, into\n"
            "OUTDIR/pairs/IIIIII-JJJJJJ/, plus OUTDIR/manifest.json. Killing the run at\n"
            "any moment loses no finished pair; --resume continues where it stopped and\n"
            "ends with the same bytes as an uninterrupted run.\n"
            "\n"
            "input:\n"
            "  SEQUENCE.json          a sequence description (docs/formats.md)\n"
            "  FOLDER                 rgb.txt + depth.txt (timestamp association), or\n"
            "                         color/ [depth/ labels/ ignore/] [intrinsics.json], matched\n"
            "                         by file stem (000007.png <-> 000007.npy) or the stem's\n"
            "                         number (frame-7.color <-> frame-7.depth), or the\n"
            "                         7-Scenes layout: NAME.color.png, NAME.depth.png,\n"
            "                         NAME.pose.txt and camera-intrinsics.txt in one folder\n"
            "  stereo FOLDER          left/ (or color/) + right/ matched by stem and a\n"
            "                         calibration stereo_calib.json (docs/formats.md):\n"
            "                         each frame's depth is computed by the stereo engine\n"
            "                         into OUTDIR/stereo/ (reused by --resume), then\n"
            "                         flow, check and lift run as for RGB-D; chosen when\n"
            "                         right/ and stereo_calib.json exist without depth/,\n"
            "                         or with --stereo\n"
            "options:\n"
            "  -o, --output DIR       output folder (created if missing)\n"
            "  --schedule S           consecutive (default) | gap:K | keyframe:K:M (every\n"
            "                         K-th frame to the next M frames) | list:FILE (lines\n"
            "                         'I J', frame numbers from 0)\n"
            "  --preset NAME          flow preset: fast | balanced (default) | accurate\n"
            "  --flow-format F        flo (default) | npy | npy16 (float16) | pfm | png\n"
            "  --flow-from DIR        import flows DIR/IIIIII-JJJJJJ/{forward,backward}.EXT\n"
            "                         instead of estimating them\n"
            "  --max-dt SECONDS       colour/depth association tolerance (default 0.02)\n"
            "  --ignore-polarity P    frames' ignore masks (sequence.json \"ignore\", folder\n"
            "                         ignore/): nonzero = pixels != 0 are ignored, zero =\n"
            "                         pixels == 0 are; their matches are rejected\n"
            "  --drop-unmatched       folder input: leave out colour images that have no\n"
            "                         depth map of the same stem (a warning each) instead\n"
            "                         of failing\n"
            "  --depth-scale S        16-bit depth codes per metre (default 1000; TUM: 5000)\n");
    fprintf(out,
            "  --stereo               the input is a stereo sequence (above; a sequence.json\n"
            "                         with \"right\" frames and \"stereo_calib\" is one\n"
            "                         without --stereo when its frames have no depth)\n"
            "  --stereo-calib FILE    its calibration (default FOLDER/stereo_calib.json or\n"
            "                         the sequence's \"stereo_calib\")\n"
            "  --stereo-preset P      stereo matching: fast | balanced (default)\n"
            "  --match-stride S       matches on a grid of step S pixels (default 4; 0 = all)\n"
            "  --intrinsics K         fx,fy,cx,cy[,width,height] or a file as for sinew lift;\n"
            "                         replaces a folder's intrinsics.json and a sequence's\n"
            "                         intrinsics\n"
            "check and lift settings (meaning and defaults as in sinew check / sinew lift):\n"
            "  --fb-alpha A  --fb-beta B  --boundary-alpha A  --boundary-beta B\n"
            "  --photo-threshold T  --saturation-level S\n"
            "  --near M  --far M  --edge R  --edge-radius N  --max-displacement M  --normals\n"
            "  --top-k K  --cell N  --per-cell N  --min-weight W   (--top-k replaces the\n"
            "                         stride sampling)\n"
            "  --world-frame          matches' 3-D points in world coordinates, by each\n"
            "                         frame's camera-to-world pose (sequence.json \"pose\")\n"
            "other:\n"
            "  --resume               skip pairs that are complete and up to date\n"
            "  --force-options        let options given here replace the ones stored in\n"
            "                         OUTDIR/options.json (finished pairs are then redone)\n"
            "  --shard K/N            process only pairs whose number %% N == K\n"
            "  --merge                compute nothing; rebuild manifest.json from all shards\n"

            "  --dry-run              list the pairs (with --resume: which are done), check\n"
            "                         every input file's header and size, estimate disk and\n"
            "                         time from one probe pair run in $TMPDIR (removed)\n"
            "  --on-error stop|skip   on a failing pair: stop (default) or record and go on\n"
            "  --progress auto|plain|json   live line on a terminal (auto), plain lines, or\n"
            "                         JSON lines\n"
            "  --report               print a per-pair summary table at the end and write\n"
            "                         OUTDIR/report.html (sinew report)\n"
            "  -t, --threads N        threads in all (0 = all cores); outputs identical\n"
            "  --jobs N               pairs at once, the threads split between them (0 =\n"
            "                         automatic: one per thread while memory allows);\n"
            "                         outputs identical for every N\n"
            "  -h, --help             this help\n"
            "\n");
    fprintf(
        out,
        "A run stores the options that shape its outputs (preset, flow format, match\n"
        "stride, depth scale, max-dt, schedule, flow-from, intrinsics, check and lift\n"
        "settings) in OUTDIR/options.json before its first pair. --resume, --merge and\n"
        "--shard runs in that folder take every option not given from there; a given\n"
        "option that differs is refused.\n"
        "\n"
        "A sequence.json with ground truth (\"pairs\", as sinew synth writes) has each\n"
        "pair scored: EPE, occlusion F1 and 3-D error of the lifted matches in its\n"
        "stats.json, the --report table and the report page.\n"
        "\n"
        "Frames with camera poses (sequence.json \"pose\") get a pose check: the rigid\n"
        "motion fitted to the pair's lifted matches (robustly, so moving parts count\n"
        "little) against the poses' relative motion, in stats.json and the --report\n"
        "table: a cheap sign of a wrong depth scale or wrong intrinsics.\n"
        "\n"
        "Warnings (a median depth outside 0.05-20 m, intrinsics whose principal point is\n"
        "far from the image centre, depth without intrinsics, a pair whose check keeps\n"
        "under 10%% of the pixels, unreadable ground truth) go to stderr as the pair\n"
        "finishes (the first 8, then one line) and stay in each pair's stats.json and\n"
        "the report.\n"
        ""
        "\n"
        "examples:\n"
        "  sinew run demo/out/scene -o runs/demo --report     (after make demo)\n"
        "  sinew run seq.json -o runs/a --shard 0/3 & sinew run seq.json -o runs/a --shard 1/3 &\n"
        "  sinew run seq.json -o runs/a --shard 2/3; wait; sinew run seq.json -o runs/a --merge\n"
        "  sinew run seq.json -o runs/a --resume --on-error skip\n"
        "  sinew run seq.json -o runs/b --flow-from runs/other-flows\n"
        "\n"
        "exit status: 0 all pairs done; 1 a pair failed, the run was interrupted or\n"
        "pairs are still pending (--merge); 2 usage error.\n"
        "\n%s",
        cli_notice);
}

typedef enum { PROG_AUTO, PROG_PLAIN, PROG_JSON } prog_mode;

/* Warnings go to stderr as they arise (the source's when it is scanned, each pair's
 * when it finishes): each distinct text once and at most WARN_SHOWN of them, then one
 * line saying that more are not shown (every pair's stats.json and the report keep
 * them all). */
#define WARN_SHOWN 8
#define WARN_TEXT 640

typedef struct {
    char shown[WARN_SHOWN][WARN_TEXT];
    size_t nshown, nmore;
} warn_sink;

/* 1 when warning w is to be printed now: not seen before and under the cap (the first
 * one over it prints the "not shown" line). */
static int warn_take(warn_sink *ws, const char *w)
{
    for (size_t k = 0; k < ws->nshown; k++)
        if (!strncmp(ws->shown[k], w, WARN_TEXT - 1))
            return 0;
    if (ws->nshown == WARN_SHOWN) {
        if (ws->nmore++ == 0)
            cli_warning(CMD, "further warnings not shown (each pair's " SINEW_RUN_STATS_FILE
                             " and the report list them)");
        return 0;
    }
    snprintf(ws->shown[ws->nshown++], WARN_TEXT, "%s", w);
    return 1;
}

typedef struct {
    prog_mode mode;
    int live; /* auto mode on a terminal */
    double t0;
    size_t last_len;
    sinew_ctx *ctx;
    const sinew_run_spec *spec;
    warn_sink *warn;
} progress_state;

static void on_pair_warning(void *ud, const char *w)
{
    progress_state *ps = ud;
    if (!warn_take(ps->warn, w))
        return;
    if (ps->live) { /* keep the progress line whole */
        printf("\n");
        fflush(stdout);
        ps->last_len = 0;
    }
    cli_warning(CMD, "%s", w);
}

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static void fmt_eta(char *buf, size_t n, double s)
{
    if (!isfinite(s) || s < 0) {
        snprintf(buf, n, "--:--");
        return;
    }
    long t = (long)(s + 0.5);
    if (t >= 3600)
        snprintf(buf, n, "%ld:%02ld:%02ld", t / 3600, t / 60 % 60, t % 60);
    else
        snprintf(buf, n, "%ld:%02ld", t / 60, t % 60);
}

static const char *status_word(sinew_pair_status s)
{
    switch (s) {
    case SINEW_PAIR_COMPUTED:
        return "computed";
    case SINEW_PAIR_SKIPPED:
        return "skipped";
    case SINEW_PAIR_FAILED:
        return "failed";
    default:
        return "pending";
    }
}

static void on_progress(void *ud, const sinew_run_progress *p)
{
    progress_state *ps = ud;
    if (p->status == SINEW_PAIR_COMPUTED)
        (void)sinew_run_pair_warnings_read(ps->ctx, ps->spec->outdir, ps->spec->pairs[p->index],
                                           on_pair_warning, ps);
    double el = now_s() - ps->t0;
    /* rate and ETA from computed pairs only: skipped pairs cost almost nothing */
    double rate = el > 0 ? (double)p->computed / el : 0;
    double eta = rate > 0 ? (double)(p->total - p->finished) / rate : NAN;
    char etab[32], msg[4096]; /* messages name files: control bytes escaped */
    fmt_eta(etab, sizeof etab, p->finished == p->total ? 0 : eta);
    if (ps->mode == PROG_JSON) {
        printf("{\"event\":\"pair\",\"pair\":\"%s\",\"status\":\"%s\",\"finished\":%zu,"
               "\"total\":%zu,\"computed\":%zu,\"skipped\":%zu,\"failed\":%zu,"
               "\"elapsed_s\":%.3f,\"rate_pairs_per_s\":%.4f",
               p->name, status_word(p->status), p->finished, p->total, p->computed, p->skipped,
               p->failed, el, rate);
        if (p->message && *p->message) {
            printf(",\"error\":");
            cli_json_string(stdout, p->message);
        }
        printf("}\n");
    } else if (ps->live) {
        char line[256];
        int n = snprintf(line, sizeof line,
                         "%zu/%zu pairs  %zu computed %zu skipped %zu failed  "
                         "%.2f pairs/s  ETA %s",
                         p->finished, p->total, p->computed, p->skipped, p->failed, rate, etab);
        if (n < 0)
            n = 0;
        printf("\r%s", line);
        for (size_t k = (size_t)n; k < ps->last_len; k++)
            putchar(' ');
        ps->last_len = (size_t)n;
        if (p->status == SINEW_PAIR_FAILED)
            printf("\n%s failed: %s\n", p->name, cli_term_text(p->message, msg, sizeof msg));
    } else {
        printf("%zu/%zu %s %s", p->finished, p->total, p->name, status_word(p->status));
        if (p->status == SINEW_PAIR_FAILED)
            printf(": %s", cli_term_text(p->message, msg, sizeof msg));
        printf("  (%.2f pairs/s, ETA %s)\n", rate, etab);
    }
    fflush(stdout);
}

/* ---- parse ---- */

typedef struct {
    const char *input, *outdir, *flow_from, *schedule, *intrinsics;
    int resume, dry, report, merge, shard_k, shard_n, force_options, drop_unmatched;
    int stereo;                               /* --stereo given */
    const char *stereo_calib, *stereo_preset; /* --stereo-calib, --stereo-preset */
    /* SINEW_RUN_OPT_* bits of the options given on the command line; once options.json
     * is applied, also every stored one (the sequence's settings must not override them;
     * the first four bits are SINEW_RUN_KEEP_*) */
    unsigned given;
    sinew_run_options stored; /* OUTDIR/options.json when it was applied (owns the strings) */
    long threads, jobs;
    double max_dt;
    sinew_run_on_error on_error;
    prog_mode progress;
    sinew_run_pipeline_params pp;
} run_args;

enum {
    O_RESUME = 256,
    O_SHARD,
    O_DRY,
    O_ONERR,
    O_PROGRESS,
    O_FMT,
    O_FROM,
    O_REPORT,
    O_SCHED,
    O_PRESET,
    O_MAXDT,
    O_MERGE,
    O_DSCALE,
    O_MSTRIDE,
    O_FORCE,
    O_JOBS,
    O_DROP,
    O_POLARITY,
    O_INTRINSICS,
    O_STEREO,
    O_STEREO_CALIB,
    O_STEREO_PRESET,
    O_TUNE /* O_TUNE + k: tuning key k (sinew_run_tune); last */
};

static int parse_shard(const char *arg, run_args *a)
{
    long k, n;
    char buf[64];
    snprintf(buf, sizeof buf, "%s", arg);
    char *sl = strchr(buf, '/');
    if (!sl)
        return cli_usage_error(CMD, "--shard: expected K/N, got '%s'", arg);
    *sl = 0;
    if (cli_parse_int(sl + 1, 1, 1000000, &n) || cli_parse_int(buf, 0, n - 1, &k))
        return cli_usage_error(CMD, "--shard: expected K/N with 0 <= K < N, got '%s'", arg);
    a->shard_k = (int)k;
    a->shard_n = (int)n;
    return CLI_OK;
}

/* One option into *a: CLI_OK, or the usage error's exit code. */
static int parse_option(int c, const char *arg, run_args *a)
{
    switch (c) {
    case 'o':
        a->outdir = arg;
        break;
    case O_RESUME:
        a->resume = 1;
        break;
    case O_DRY:
        a->dry = 1;
        break;
    case O_REPORT:
        a->report = 1;
        break;
    case O_MERGE:
        a->merge = 1;
        break;
    case O_FROM:
        a->flow_from = arg;
        a->given |= SINEW_RUN_OPT_FLOW_FROM;
        break;
    case O_SCHED:
        a->schedule = arg;
        a->given |= SINEW_RUN_OPT_SCHEDULE;
        break;
    case O_FORCE:
        a->force_options = 1;
        break;
    case O_DROP:
        a->drop_unmatched = 1;
        break;
    case O_STEREO:
        a->stereo = 1;
        break;
    case O_STEREO_CALIB:
        a->stereo_calib = arg;
        a->stereo = 1;
        break;
    case O_STEREO_PRESET:
        if (strcmp(arg, "fast") && strcmp(arg, "balanced"))
            return cli_usage_error(CMD, "--stereo-preset: expected fast or balanced, got '%s'",
                                   arg);
        a->stereo_preset = arg;
        break;
    case O_POLARITY:
        if (!strcmp(arg, "nonzero"))
            a->pp.ignore_polarity = SINEW_IGNORE_NONZERO;
        else if (!strcmp(arg, "zero"))
            a->pp.ignore_polarity = SINEW_IGNORE_ZERO;
        else
            return cli_usage_error(CMD, "--ignore-polarity: expected nonzero or zero, got '%s'",
                                   arg);
        a->given |= SINEW_RUN_OPT_IGNORE_POLARITY;
        break;
    case O_PRESET:
        a->pp.preset = arg;
        a->given |= SINEW_RUN_OPT_PRESET;
        break;
    case O_SHARD:
        return parse_shard(arg, a);
    case O_ONERR:
        if (!strcmp(arg, "stop"))
            a->on_error = SINEW_RUN_STOP;
        else if (!strcmp(arg, "skip"))
            a->on_error = SINEW_RUN_SKIP;
        else
            return cli_usage_error(CMD, "--on-error: expected stop or skip, got '%s'", arg);
        break;
    case O_PROGRESS:
        if (!strcmp(arg, "auto"))
            a->progress = PROG_AUTO;
        else if (!strcmp(arg, "plain"))
            a->progress = PROG_PLAIN;
        else if (!strcmp(arg, "json"))
            a->progress = PROG_JSON;
        else
            return cli_usage_error(CMD, "--progress: expected auto, plain or json, got '%s'", arg);
        break;
    case O_FMT:
        a->given |= SINEW_RUN_OPT_FLOW_FORMAT;
        if (sinew_flow_format_parse(arg, &a->pp.flow_format))
            return cli_usage_error(
                CMD, "--flow-format: expected flo, npy, npy16, pfm or png, got '%s'", arg);
        break;
    case 't':
        if (cli_parse_int(arg, 0, 4096, &a->threads))
            return cli_usage_error(CMD, "--threads: expected 0..4096, got '%s'", arg);
        break;
    case O_JOBS:
        if (cli_parse_int(arg, 0, SINEW_RUN_MAX_JOBS, &a->jobs))
            return cli_usage_error(CMD, "--jobs: expected 0..%d, got '%s'", SINEW_RUN_MAX_JOBS,
                                   arg);
        break;
    case O_MAXDT:
        if (cli_parse_double(arg, &a->max_dt) || !(a->max_dt > 0))
            return cli_usage_error(CMD, "--max-dt: expected seconds > 0, got '%s'", arg);
        a->given |= SINEW_RUN_OPT_MAX_DT;
        break;
    case O_DSCALE:
        if (cli_parse_double(arg, &a->pp.depth_scale) || !(a->pp.depth_scale > 0))
            return cli_usage_error(CMD, "--depth-scale: expected codes per metre > 0, got '%s'",
                                   arg);
        a->given |= SINEW_RUN_OPT_DEPTH_SCALE;
        break;
    case O_INTRINSICS:
        a->intrinsics = arg;
        a->given |= SINEW_RUN_OPT_INTRINSICS;
        break;
    case O_MSTRIDE: {
        long v;
        if (cli_parse_int(arg, 0, 1 << 20, &v))
            return cli_usage_error(CMD, "--match-stride: expected pixels >= 0, got '%s'", arg);
        a->pp.match_stride = (int)v;
        a->given |= SINEW_RUN_OPT_MATCH_STRIDE;
        break;
    }
    default:
        if (c >= O_TUNE && c < O_TUNE + SINEW_RUN_NTUNE) {
            int k = c - O_TUNE;
            double v = 1; /* --normals and --world-frame take no value */
            if (arg && (cli_parse_double(arg, &v) || sinew_run_tune_valid(k, v)))
                return cli_usage_error(CMD, "--%s: expected %s, got '%s'", sinew_run_tune_name(k),
                                       sinew_run_tune_range(k), arg);
            a->pp.tuning.set |= 1u << k;
            a->pp.tuning.value[k] = v;
            a->given |= SINEW_RUN_OPT_TUNE(k);
        }
        break;
    }
    return CLI_OK;
}

/* The command line into *a. Returns -1 to go on, otherwise the exit code (help shown,
 * or a usage error). */
static int parse_args(int argc, char **argv, run_args *a)
{
    static const struct option opts[] = {
        {"output", required_argument, NULL, 'o'},
        {"resume", no_argument, NULL, O_RESUME},
        {"shard", required_argument, NULL, O_SHARD},
        {"dry-run", no_argument, NULL, O_DRY},
        {"on-error", required_argument, NULL, O_ONERR},
        {"progress", required_argument, NULL, O_PROGRESS},
        {"flow-format", required_argument, NULL, O_FMT},
        {"flow-from", required_argument, NULL, O_FROM},
        {"threads", required_argument, NULL, 't'},
        {"jobs", required_argument, NULL, O_JOBS},
        {"report", no_argument, NULL, O_REPORT},
        {"schedule", required_argument, NULL, O_SCHED},
        {"preset", required_argument, NULL, O_PRESET},
        {"max-dt", required_argument, NULL, O_MAXDT},
        {"merge", no_argument, NULL, O_MERGE},
        {"depth-scale", required_argument, NULL, O_DSCALE},
        {"match-stride", required_argument, NULL, O_MSTRIDE},
        {"force-options", no_argument, NULL, O_FORCE},
        {"drop-unmatched", no_argument, NULL, O_DROP},
        {"ignore-polarity", required_argument, NULL, O_POLARITY},
        {"stereo", no_argument, NULL, O_STEREO},
        {"stereo-calib", required_argument, NULL, O_STEREO_CALIB},
        {"stereo-preset", required_argument, NULL, O_STEREO_PRESET},
        {"intrinsics", required_argument, NULL, O_INTRINSICS},
        /* the check's and the lift's options (sinew_run_tune) */
        {"fb-alpha", required_argument, NULL, O_TUNE + 0},
        {"fb-beta", required_argument, NULL, O_TUNE + 1},
        {"boundary-alpha", required_argument, NULL, O_TUNE + 2},
        {"boundary-beta", required_argument, NULL, O_TUNE + 3},
        {"photo-threshold", required_argument, NULL, O_TUNE + 4},
        {"saturation-level", required_argument, NULL, O_TUNE + 5},
        {"near", required_argument, NULL, O_TUNE + 6},
        {"far", required_argument, NULL, O_TUNE + 7},
        {"edge", required_argument, NULL, O_TUNE + 8},
        {"edge-radius", required_argument, NULL, O_TUNE + 9},
        {"max-displacement", required_argument, NULL, O_TUNE + 10},
        {"normals", no_argument, NULL, O_TUNE + 11},
        {"top-k", required_argument, NULL, O_TUNE + 12},
        {"cell", required_argument, NULL, O_TUNE + 13},
        {"per-cell", required_argument, NULL, O_TUNE + 14},
        {"min-weight", required_argument, NULL, O_TUNE + 15},
        {"world-frame", no_argument, NULL, O_TUNE + 16},
        {"help", no_argument, NULL, 'h'},
        {NULL, 0, NULL, 0}};
    memset(a, 0, sizeof *a);
    a->shard_n = 1;
    a->max_dt = 0.02;
    a->on_error = SINEW_RUN_STOP;
    a->progress = PROG_AUTO;
    sinew_run_pipeline_params_default(&a->pp);
    optind = 1;
    opterr = 0;
    int c, r;
    while ((c = getopt_long(argc, argv, ":o:ht:", opts, NULL)) != -1) {
        if (c == 'h') {
            usage(stdout);
            return CLI_OK;
        }
        if (c == ':' || c == '?')
            return cli_bad_option(CMD, opts, argv[optind - 1]);
        if ((r = parse_option(c, optarg, a)) != CLI_OK)
            return r;
    }
    if ((a->given & SINEW_RUN_OPT_MATCH_STRIDE) &&
        (a->given & SINEW_RUN_OPT_TUNE(SINEW_TUNE_TOP_K)))
        return cli_usage_error(CMD, "--match-stride and --top-k choose the sampling: give one");
    if (optind != argc - 1)
        return cli_usage_error(CMD, optind >= argc ? "missing SEQUENCE.json or FOLDER"
                                                   : "expected one SEQUENCE.json or FOLDER");
    if (!a->outdir)
        return cli_usage_error(CMD, "missing -o OUTDIR");
    if (a->merge && (a->dry || a->shard_n > 1))
        return cli_usage_error(CMD, "--merge cannot be combined with --dry-run or --shard");
    a->input = argv[optind];
    return -1;
}

/* ---- plan ---- */

typedef struct {
    sinew_run_source src;
    sinew_sequence *seq;
    sinew_camera cam;
    sinew_camera given_cam;  /* --intrinsics */
    char stereo_calib[4200]; /* a stereo folder's calibration, "" otherwise */
    sinew_pair *list;        /* the schedule's explicit pairs (on ctx) or NULL */
    sinew_pair *pairs;       /* the expanded schedule (on ctx) */
    size_t npairs;
    char options[2048];
    const char *outputs[SINEW_RUN_PIPELINE_MAX_OUTPUTS]; /* what each pair folder holds */
    sinew_run_spec spec;
    warn_sink warn;
} run_plan;

/* The options of a run as sinew_run_options: from the command line (before planning)
 * or the effective ones (after the sequence's settings were applied). */
static int options_from_args(const run_args *a, sinew_run_options *o)
{
    memset(o, 0, sizeof *o);
    o->flow_format = a->pp.flow_format;
    o->match_stride = a->pp.match_stride;
    o->depth_scale = a->pp.depth_scale;
    o->max_dt = a->max_dt;
    o->ignore_polarity = a->pp.ignore_polarity;
    o->tuning = a->pp.tuning;
    const char *src[4] = {a->pp.preset, a->schedule ? a->schedule : "",
                          a->flow_from ? a->flow_from : "", a->intrinsics ? a->intrinsics : ""};
    char *dst[4] = {o->preset, o->schedule, o->flow_from, o->intrinsics};
    size_t cap[4] = {sizeof o->preset, sizeof o->schedule, sizeof o->flow_from,
                     sizeof o->intrinsics};
    for (int k = 0; k < 4; k++) {
        if (strlen(src[k]) >= cap[k])
            return cli_error(CMD, "%s: longer than %zu bytes", src[k], cap[k] - 1);
        memcpy(dst[k], src[k], strlen(src[k]) + 1);
    }
    return CLI_OK;
}

/* --resume, --merge and --shard runs in a folder that holds options.json take every
 * option not given on the command line from there (over the sequence's settings) and
 * refuse a given one that differs, unless --force-options. A fresh whole run replaces
 * the file. */
static int plan_stored_options(sinew_ctx *ctx, run_args *a)
{
    if (!a->resume && !a->merge && a->shard_n == 1)
        return CLI_OK;
    int found = 0, rc = sinew_run_options_read(ctx, &a->stored, &found, a->outdir);
    if (rc)
        return cli_status(CMD, ctx, rc);
    if (!found)
        return CLI_OK;
    sinew_run_options given;
    if ((rc = options_from_args(a, &given)) != CLI_OK)
        return rc;
    char where[4200];
    snprintf(where, sizeof where, "%s/" SINEW_RUN_OPTIONS_FILE, a->outdir);
    if ((rc = sinew_run_options_reconcile(ctx, &given, &a->stored, a->given, a->force_options,
                                          where)))
        return cli_error(CMD, "%s (--force-options lets the given value replace it)",
                         sinew_ctx_message(ctx));
    a->stored = given;
    a->pp.preset = a->stored.preset;
    a->pp.flow_format = a->stored.flow_format;
    a->pp.match_stride = a->stored.match_stride;
    a->pp.depth_scale = a->stored.depth_scale;
    a->max_dt = a->stored.max_dt;
    a->pp.ignore_polarity = a->stored.ignore_polarity;
    a->schedule = a->stored.schedule[0] ? a->stored.schedule : NULL;
    a->flow_from = a->stored.flow_from[0] ? a->stored.flow_from : NULL;
    a->intrinsics = a->stored.intrinsics[0] ? a->stored.intrinsics : NULL;
    a->pp.tuning = a->stored.tuning;
    if (a->intrinsics)
        a->given |= SINEW_RUN_OPT_INTRINSICS;
    /* the stored values are the effective ones of the first run: the sequence's
     * settings were already applied to them */
    a->given |= SINEW_RUN_OPT_PRESET | SINEW_RUN_OPT_FLOW_FORMAT | SINEW_RUN_OPT_MATCH_STRIDE |
                SINEW_RUN_OPT_DEPTH_SCALE | SINEW_RUN_OPT_IGNORE_POLARITY;
    return CLI_OK;
}

/* Write the effective options into OUTDIR before the first pair (not for --merge,
 * which computes nothing). */
static int store_options(sinew_ctx *ctx, const run_args *a)
{
    sinew_run_options o;
    int rc = options_from_args(a, &o);
    if (rc != CLI_OK)
        return rc;
    if ((rc = sinew_run_options_write(ctx, a->outdir, &o)))
        return cli_status(CMD, ctx, rc);
    return CLI_OK;
}

/* A stereo folder (--stereo, or right/ and stereo_calib.json without depth/): its
 * calibration path into p->stereo_calib ("" for an RGB-D folder). */
static void stereo_folder(const run_args *a, run_plan *p)
{
    char path[4200];
    struct stat st;
    p->stereo_calib[0] = 0;
    if (!a->stereo) {
        snprintf(path, sizeof path, "%s/depth", a->input);
        if (stat(path, &st) == 0)
            return;
        snprintf(path, sizeof path, "%s/right", a->input);
        if (stat(path, &st) != 0 || !S_ISDIR(st.st_mode))
            return;
        snprintf(path, sizeof path, "%s/" SINEW_RUN_STEREO_CALIB, a->input);
        if (stat(path, &st) != 0)
            return;
    }
    if (a->stereo_calib)
        snprintf(p->stereo_calib, sizeof p->stereo_calib, "%s", a->stereo_calib);
    else
        snprintf(p->stereo_calib, sizeof p->stereo_calib, "%s/" SINEW_RUN_STEREO_CALIB, a->input);
}

/* A stereo sequence (--stereo, or frames with "right", a "stereo_calib" and no depth):
 * the calibration into p->stereo_calib, its left camera for lifting, and no depth paths
 * (the stereo engine gives each frame's depth, as for a stereo folder). */
static int stereo_sequence(sinew_ctx *ctx, run_args *a, run_plan *p, const char *sp)
{
    int right = 0, depth = 0;
    for (size_t f = 0; f < p->src.nframes; f++) {
        right |= p->src.frames[f].right != NULL;
        depth |= p->src.frames[f].depth != NULL;
    }
    if (!a->stereo && !(right && p->seq->stereo_calib && !depth))
        return CLI_OK;
    if (!right)
        return cli_error(CMD, "%s: --stereo: no frame has a \"right\" frame", sp);
    if (a->intrinsics)
        return cli_usage_error(CMD, "--intrinsics does not apply to a stereo sequence (the "
                                    "calibration's left camera lifts its matches)");
    if (a->stereo_calib)
        snprintf(p->stereo_calib, sizeof p->stereo_calib, "%s", a->stereo_calib);
    else if (!p->seq->stereo_calib)
        return cli_error(CMD, "%s: --stereo: no calibration (\"stereo_calib\" or --stereo-calib)",
                         sp);
    else if (sinew_sequence_resolve(p->seq, p->seq->stereo_calib, p->stereo_calib,
                                    sizeof p->stereo_calib))
        return cli_error(CMD, "%s: stereo_calib: path too long", sp);
    for (size_t f = 0; f < p->src.nframes; f++) {
        sinew_ctx_dealloc(ctx, (void *)p->src.frames[f].depth);
        p->src.frames[f].depth = NULL;
    }
    int rc = sinew_run_stereo_camera(ctx, &p->cam, p->stereo_calib);
    if (rc)
        return cli_status(CMD, ctx, rc);
    a->pp.camera = &p->cam;
    return CLI_OK;
}

/* Frames: a folder without sequence.json is scanned (flow/run.h), anything else is read
 * as a sequence whose settings apply under the command line's. */
static int plan_source(sinew_ctx *ctx, run_args *a, run_plan *p)
{
    struct stat st;
    if (stat(a->input, &st) != 0)
        return cli_error(CMD, "%s: not found", a->input);
    char seqpath[4200];
    snprintf(seqpath, sizeof seqpath, "%s/sequence.json", a->input);
    int is_dir = S_ISDIR(st.st_mode), rc;
    if (a->intrinsics) { /* a file, or values fx,fy,cx,cy[,width,height] */
        if ((rc = cli_intrinsics_read(ctx, &p->given_cam, a->intrinsics)))
            return cli_status(CMD, ctx, rc);
        a->pp.camera = &p->given_cam;
    }
    if (is_dir && stat(seqpath, &st) != 0) {
        unsigned flags = a->drop_unmatched ? SINEW_RUN_SOURCE_DROP_UNMATCHED : 0;
        stereo_folder(a, p);
        if (p->stereo_calib[0] && a->intrinsics)
            return cli_usage_error(CMD, "--intrinsics does not apply to a stereo folder (the "
                                        "calibration's left camera lifts its matches)");
        if (p->stereo_calib[0]) {
            flags |= SINEW_RUN_SOURCE_STEREO;
            /* the depth maps are in the left camera: its intrinsics lift the matches */
            if ((rc = sinew_run_stereo_camera(ctx, &p->cam, p->stereo_calib)))
                return cli_status(CMD, ctx, rc);
            a->pp.camera = &p->cam;
        }
        if ((rc = sinew_run_source_from_folder(ctx, &p->src, a->input, a->max_dt, flags)))
            return cli_status(CMD, ctx, rc);
        for (size_t k = 0; k < p->src.nwarnings; k++)
            if (warn_take(&p->warn, p->src.warnings[k]))
                cli_warning(CMD, "%s", p->src.warnings[k]);
        return CLI_OK;
    }
    const char *sp = is_dir ? seqpath : a->input;
    if ((rc = sinew_sequence_read(ctx, &p->seq, sp)) ||
        (rc = sinew_run_source_from_sequence(ctx, &p->src, p->seq, sp)) ||
        (rc = sinew_run_pipeline_params_apply_sequence(ctx, &a->pp, &p->cam, p->seq, a->input,
                                                       a->given)))
        return cli_status(CMD, ctx, rc);
    if (p->seq->n_pairs)
        a->pp.truth = p->seq; /* pairs with ground truth are scored */
    return stereo_sequence(ctx, a, p, sp);
}

/* The pairs: --schedule, else the sequence's schedule, else consecutive. */
static int plan_pairs(sinew_ctx *ctx, const run_args *a, run_plan *p)
{
    sinew_schedule sched = {SINEW_SCHEDULE_CONSECUTIVE, 0, 0, 0, NULL, 0};
    int rc = a->schedule ? sinew_schedule_parse(ctx, &sched, &p->list, a->schedule)
             : p->seq    ? sinew_run_schedule_from_sequence(ctx, &sched, &p->list, p->seq)
                         : SINEW_OK;
    if (rc == SINEW_EINVAL && a->schedule)
        return cli_usage_error(CMD,
                               "--schedule: expected consecutive, gap:K, keyframe:K:M or "
                               "list:FILE, got '%s'",
                               a->schedule);
    if (rc || (rc = sinew_schedule_pairs(ctx, &p->pairs, &p->npairs, &sched, p->src.nframes)) ||
        (rc = sinew_run_pipeline_options(ctx, p->options, sizeof p->options, &a->pp)))
        return cli_status(CMD, ctx, rc);
    return CLI_OK;
}

static int plan(sinew_ctx *ctx, run_args *a, run_plan *p)
{
    int r = plan_stored_options(ctx, a);
    if (r == CLI_OK)
        r = plan_source(ctx, a, p);
    if (r == CLI_OK)
        r = plan_pairs(ctx, a, p);
    if (r != CLI_OK)
        return r;
    sinew_run_spec *s = &p->spec;
    s->frames = p->src.frames;
    s->nframes = p->src.nframes;
    s->intrinsics = p->src.intrinsics;
    s->pairs = p->pairs;
    s->npairs = p->npairs;
    s->flow_from = a->flow_from;
    s->options = p->options;
    s->outdir = a->outdir;
    s->shard_k = a->shard_k;
    s->shard_n = a->shard_n;
    s->resume = a->resume;
    s->on_error = a->on_error;
    s->noutputs = sinew_run_pipeline_outputs(&a->pp, p->outputs);
    s->outputs = p->outputs;
    s->poses_in_key = (a->pp.tuning.set & (1u << SINEW_TUNE_WORLD_FRAME)) != 0;
    return CLI_OK;
}

static void plan_free(sinew_ctx *ctx, run_plan *p)
{
    sinew_ctx_dealloc(ctx, p->pairs);
    sinew_ctx_dealloc(ctx, p->list);
    sinew_run_source_free(ctx, &p->src);
    sinew_sequence_free(p->seq);
}

/* ---- execute and print ---- */

/* A JSON number, or null when not finite. */
static void json_num(const char *key, double v)
{
    if (isfinite(v))
        printf(",\"%s\":%.17g", key, v);
    else
        printf(",\"%s\":null", key);
}

/* --report: one line per owned pair from its stats.json, then the totals (JSON lines
 * with --progress json, so stdout stays pure JSON). */
static void print_report(sinew_ctx *ctx, const sinew_run_spec *spec, int json)
{
    /* each owned pair's stats.json read once; the ground-truth columns only when some
     * pair has them */
    sinew_run_pair_summary *sum = calloc(spec->npairs ? spec->npairs : 1, sizeof *sum);
    unsigned char *have = calloc(spec->npairs ? spec->npairs : 1, 1);
    if (!sum || !have) {
        free(sum);
        free(have);
        cli_error(CMD, "out of memory for the report table");
        return;
    }
    int truth = 0, pose = 0;
    for (size_t q = 0; q < spec->npairs; q++) {
        have[q] =
            sinew_shard_owns(q, spec->shard_k, spec->shard_n) &&
            sinew_run_pair_summary_read(ctx, &sum[q], spec->outdir, spec->pairs[q]) == SINEW_OK;
        truth |= have[q] && (isfinite(sum[q].epe) || isfinite(sum[q].occlusion_f1));
        pose |= have[q] && isfinite(sum[q].pose_dt_mm);
    }
    if (!json)
        printf("%-13s %8s %10s %10s %9s%s%s\n", "pair", "kept", "|fwd| px", "matches", "lifted",
               truth ? "   EPE px  occ F1  3-D err mm" : "", pose ? "  pose dt mm  pose deg" : "");
    double kept = 0, pixels = 0, rows = 0;
    size_t n = 0;
    for (size_t q = 0; q < spec->npairs; q++) {
        if (!sinew_shard_owns(q, spec->shard_k, spec->shard_n))
            continue;
        char name[SINEW_PAIR_NAME_MAX];
        sinew_pair_name(name, spec->pairs[q]);
        const sinew_run_pair_summary s = sum[q];
        if (json) {
            printf("{\"event\":\"summary\",\"pair\":\"%s\"", name);
            if (have[q]) {
                json_num("kept_fraction", s.kept_fraction);
                json_num("mean_length_px", s.forward_mean_px);
                json_num("matches", s.match_rows);
                printf(",\"lifted\":%s", s.lifted ? "true" : "false");
                if (truth) {
                    json_num("epe", s.epe);
                    json_num("occlusion_f1", s.occlusion_f1);
                    json_num("match_3d_error_mm_median", s.match_3d_mm);
                }
                if (pose) {
                    json_num("pose_translation_error_mm", s.pose_dt_mm);
                    json_num("pose_rotation_error_deg", s.pose_deg);
                }
            }
            printf("}\n");
        }
        if (!have[q]) {
            if (!json)
                printf("%-13s %8s\n", name, "-");
            continue;
        }
        if (!json) {
            printf("%-13s %7.1f%% %10.3f %10.0f %9s", name, 100 * s.kept_fraction,
                   s.forward_mean_px, s.match_rows, s.lifted ? "yes" : "no");
            if (truth)
                printf(" %9.3f %7.3f %11.1f", s.epe, s.occlusion_f1, s.match_3d_mm);
            if (pose)
                printf(" %11.1f %9.2f", s.pose_dt_mm, s.pose_deg);
            printf("\n");
        }
        kept += s.kept;
        pixels += s.pixels;
        rows += isfinite(s.match_rows) ? s.match_rows : 0;
        n++;
    }
    if (n && !json)
        printf("%-13s %7.1f%% %10s %10.0f\n", "all", pixels > 0 ? 100 * kept / pixels : 0.0, "",
               rows);
    free(sum);
    free(have);
}

/* --merge: rebuild the manifest from every shard's records. */
static int merge(sinew_ctx *ctx, sinew_run *run, const run_args *a, size_t npairs)
{
    size_t nd = 0, nf = 0, np = 0;
    int rc = sinew_run_write_manifest(run, 1, &nd, &nf, &np);
    if (rc)
        return cli_status(CMD, ctx, rc);
    if (a->progress == PROG_JSON)
        printf("{\"event\":\"merge\",\"pairs\":%zu,\"done\":%zu,\"failed\":%zu,\"pending\":%zu}\n",
               npairs, nd, nf, np);
    else
        printf("manifest: %zu pairs: %zu done, %zu failed, %zu pending\n", npairs, nd, nf, np);
    if (nf || np)
        return cli_error(CMD,
                         "%s/" SINEW_RUN_MANIFEST_FILE ": %zu pairs failed and %zu are pending",
                         a->outdir, nf, np);
    return CLI_OK;
}

/* A stereo folder: each needed frame's depth into OUTDIR/stereo (reused with --resume)
 * and into the frames, before the pairs are hashed; one line (or JSON event) of counts. */
static int stereo_depths(sinew_ctx *ctx, const run_args *a, run_plan *p)
{
    sinew_run_stereo_params sp = {
        .calib = p->stereo_calib, .preset = a->stereo_preset, .resume = a->resume};
    sinew_run_stereo_result res;
    double t0 = now_s();
    int rc = sinew_run_stereo_depths(ctx, p->src.frames, &res, &p->spec, &sp);
    if (rc)
        return cli_status(CMD, ctx, rc);
    if (a->progress == PROG_JSON)
        printf("{\"event\":\"stereo\",\"computed\":%zu,\"reused\":%zu,\"elapsed_s\":%.3f}\n",
               res.computed, res.reused, now_s() - t0);
    else
        printf("stereo: %zu depth maps computed, %zu reused in %.1f s (%s/" SINEW_RUN_STEREO_DIR
               ")\n",
               res.computed, res.reused, now_s() - t0, a->outdir);
    fflush(stdout);
    return CLI_OK;
}

/* --merge of a stereo run: the frames' cached depth paths, so the pairs' keys match. */
static int stereo_paths(sinew_ctx *ctx, const run_args *a, run_plan *p)
{
    sinew_run_stereo_params sp = {
        .calib = p->stereo_calib, .preset = a->stereo_preset, .paths_only = 1};
    sinew_run_stereo_result res;
    int rc = sinew_run_stereo_depths(ctx, p->src.frames, &res, &p->spec, &sp);
    return rc ? cli_status(CMD, ctx, rc) : CLI_OK;
}

/* ---- pairs at once (--jobs) ---- */

/* Bytes per pixel one job holds at most while it computes a pair: peak RSS of a whole
 * `sinew run` on the 640x480 demo scene is 64.8 MB, 211 B/px (docs/benchmarks.md,
 * whole-sequence runs), rounded up. */
#define JOB_BYTES_PER_PIXEL 256.0

/* --jobs 0: one job per thread, no more than the owned pairs, and no more than half the
 * physical memory holds (JOB_BYTES_PER_PIXEL times the first owned pair's frame size). */
static int auto_jobs(sinew_ctx *ctx, const sinew_run_spec *s, int threads)
{
    size_t owned = 0, first = SIZE_MAX;
    for (size_t q = 0; q < s->npairs; q++)
        if (sinew_shard_owns(q, s->shard_k, s->shard_n)) {
            owned++;
            first = first == SIZE_MAX ? q : first;
        }
    int jobs = threads;
    if ((size_t)jobs > owned)
        jobs = owned ? (int)owned : 1;
    if (jobs < 2)
        return 1;
    sinew_image img;
    if (sinew_image_read(ctx, &img, s->frames[s->pairs[first].i].color)) {
        sinew_ctx_clear(ctx); /* the run itself reports the file */
        return 1;
    }
    double px = (double)img.width * img.height;
    sinew_image_free(&img);
    double mem = (double)sysconf(_SC_PHYS_PAGES) * (double)sysconf(_SC_PAGESIZE);
    double fit = mem > 0 ? 0.5 * mem / (JOB_BYTES_PER_PIXEL * px) : 1;
    if (fit < jobs)
        jobs = fit < 1 ? 1 : (int)fit;
    return jobs;
}

typedef struct {
    int n;
    sinew_ctx *ctx[SINEW_RUN_MAX_JOBS];
    sinew_run_pipeline *pl[SINEW_RUN_MAX_JOBS];
} job_set;

static void jobs_free(job_set *js)
{
    cli_stop_also_ctx(NULL);
    for (int k = 0; k < js->n; k++) {
        sinew_run_pipeline_free(js->pl[k]);
        sinew_ctx_free(js->ctx[k]);
    }
    js->n = 0;
}

/* One pipeline for one job on ctx itself; for more, a context per job with its share of
 * the threads (the first ones get one more when they do not divide evenly). Returns
 * CLI_OK or the exit status after printing the error. */
static int jobs_new(sinew_ctx *ctx, const run_args *a, const run_plan *p, job_set *js)
{
    memset(js, 0, sizeof *js);
    long cores = sysconf(_SC_NPROCESSORS_ONLN);
    int threads = a->threads > 0 ? (int)a->threads : cores > 0 ? (int)cores : 1;
    int jobs = a->jobs > 0 ? (int)a->jobs : auto_jobs(ctx, &p->spec, threads);
    if (jobs == 1) {
        js->n = 1;
        js->ctx[0] = NULL;
        int rc = sinew_run_pipeline_new(ctx, &js->pl[0], &p->spec, &a->pp);
        return rc ? cli_status(CMD, ctx, rc) : CLI_OK;
    }
    for (int k = 0; k < jobs; k++) {
        int t = threads / jobs + (k < threads % jobs);
        js->ctx[k] = sinew_ctx_new();
        js->n = k + 1;
        int rc = js->ctx[k] ? sinew_ctx_set_threads(js->ctx[k], t < 1 ? 1 : t) : SINEW_ENOMEM;
        if (!rc)
            rc = sinew_run_pipeline_new(js->ctx[k], &js->pl[k], &p->spec, &a->pp);
        if (rc) {
            int ret = cli_status(CMD, js->ctx[k] ? js->ctx[k] : ctx, rc);
            jobs_free(js);
            return ret;
        }
        cli_stop_also_ctx(js->ctx[k]);
    }
    return CLI_OK;
}

/* ---- dry run ---- */

/* 0 when PATH is a readable regular file; otherwise prints it with the reason. */
static int check_input(const char *role, const char *path)
{
    struct stat st;
    FILE *f = NULL;
    const char *why = NULL;
    if (stat(path, &st) != 0)
        why = errno == ENOENT ? "missing" : strerror(errno);
    else if (!S_ISREG(st.st_mode))
        why = "not a regular file";
    else if (!(f = fopen(path, "rb")))
        why = strerror(errno);
    if (f)
        fclose(f);
    if (!why)
        return 0;
    printf("input %s: %s: %s\n", role, path, why);
    return 1;
}

/* One frame file's header read for its role: 0 when it reads and (size != NULL) has
 * the size *size, or sets *size when that is still 0x0; otherwise prints the problem. */
static int check_header(sinew_ctx *ctx, const char *role, const char *path, int rrole,
                        sinew_image_info *size, const char *sized_by)
{
    if (check_input(role, path))
        return 1;
    sinew_image_info in;
    if (sinew_image_info_read(ctx, &in, path, rrole) != SINEW_OK) {
        printf("input %s: %s\n", role, sinew_ctx_message(ctx));
        return 1;
    }
    if (!size->width) {
        *size = in;
        return 0;
    }
    if (in.width == size->width && in.height == size->height)
        return 0;
    printf("input %s: %s: %dx%d but %s is %dx%d\n", role, path, in.width, in.height, sized_by,
           size->width, size->height);
    return 1;
}

/* Every input file of the owned pairs (frames once each, imported flows per pair): the
 * header of each image read for its role (not the pixels) and its size compared with
 * the first colour frame's, as the run would; the number of bad files, each listed. */
static size_t check_inputs(sinew_ctx *ctx, const sinew_run_spec *spec)
{
    unsigned char *seen = calloc(spec->nframes ? spec->nframes : 1, 1);
    size_t bad = 0;
    sinew_image_info size = {0, 0, 0, SINEW_U8};
    char first[4200] = "the first frame";
    if (spec->intrinsics)
        bad += (size_t)check_input("intrinsics", spec->intrinsics);
    for (size_t q = 0; q < spec->npairs; q++) {
        if (!sinew_shard_owns(q, spec->shard_k, spec->shard_n))
            continue;
        size_t ij[2] = {spec->pairs[q].i, spec->pairs[q].j};
        for (int e = 0; e < 2; e++) {
            const sinew_run_frame *fr = &spec->frames[ij[e]];
            /* seen: bit 1 the frame's files, bit 2 its ignore mask (read only as the
             * first frame of a pair) */
            unsigned char want = e == 0 && fr->ignore ? 3 : 1, had = seen ? seen[ij[e]] : 0;
            if (seen)
                seen[ij[e]] |= want;
            if (!(had & 1)) {
                int was = size.width != 0;
                bad +=
                    (size_t)check_header(ctx, "color", fr->color, SINEW_ROLE_IMAGE, &size, first);
                if (!was && size.width)
                    snprintf(first, sizeof first, "%s", fr->color);
                if (fr->depth)
                    bad += (size_t)check_header(ctx, "depth", fr->depth, SINEW_ROLE_DEPTH, &size,
                                                first);
                if (fr->labels)
                    bad += (size_t)check_header(ctx, "labels", fr->labels, SINEW_ROLE_LABELS, &size,
                                                first);
                if (fr->right)
                    bad += (size_t)check_header(ctx, "right", fr->right, SINEW_ROLE_IMAGE, &size,
                                                first);
            }
            if ((want & 2) && !(had & 2))
                bad +=
                    (size_t)check_header(ctx, "ignore", fr->ignore, SINEW_ROLE_IMAGE, &size, first);
        }
        char name[SINEW_PAIR_NAME_MAX], fwd[4200], bwd[4200];
        if (spec->flow_from &&
            sinew_run_find_import(ctx, fwd, bwd, sizeof fwd, spec->flow_from,
                                  sinew_pair_name(name, spec->pairs[q])) != SINEW_OK) {
            printf("input flow: %s\n", sinew_ctx_message(ctx));
            bad++;
        }
    }
    free(seen);
    return bad;
}

static int remove_entry(const char *path, const struct stat *st, int flag, struct FTW *ftw)
{
    (void)st;
    (void)flag;
    (void)ftw;
    return remove(path);
}

/* The probe: the first pairs still to compute, as many as the run would do at once,
 * run for real with the run's jobs and threads in a fresh temporary folder (removed
 * afterwards); *secs = its whole time (pipelines made, pairs computed and written),
 * *bytes = the output bytes of its pair folders, *nprobe = how many pairs it ran. */
static int probe_pairs(sinew_ctx *ctx, const run_args *a, const run_plan *p,
                       const sinew_pair_status *st, size_t *nprobe, double *secs, double *bytes)
{
    const sinew_run_spec *spec = &p->spec;
    run_plan *pp = malloc(sizeof *pp);
    sinew_pair *todo = malloc((spec->npairs ? spec->npairs : 1) * sizeof *todo);
    if (!pp || !todo) {
        free(pp);
        free(todo);
        return cli_error(CMD, "out of memory for the probe");
    }
    size_t n = 0;
    for (size_t q = 0; q < spec->npairs; q++)
        if (sinew_shard_owns(q, spec->shard_k, spec->shard_n) && st[q] != SINEW_PAIR_SKIPPED)
            todo[n++] = spec->pairs[q];
    const char *tmp = getenv("TMPDIR");
    char dir[4200];
    snprintf(dir, sizeof dir, "%s/sinew-probe.XXXXXX", tmp && *tmp ? tmp : "/tmp");
    if (!mkdtemp(dir)) {
        free(pp);
        free(todo);
        return cli_error(CMD, "%s: cannot create the probe folder: %s", dir, strerror(errno));
    }
    *pp = *p;
    pp->spec.pairs = todo;
    pp->spec.npairs = n;
    pp->spec.shard_k = 0;
    pp->spec.shard_n = 1;
    pp->spec.resume = 0;
    pp->spec.on_error = SINEW_RUN_STOP;
    pp->spec.outdir = dir;
    job_set js;
    sinew_run *run = NULL;
    sinew_run_result res;
    double t0 = now_s();
    int ret = jobs_new(ctx, a, pp, &js), rc = SINEW_OK;
    if (ret == CLI_OK) {
        pp->spec.npairs = (size_t)js.n < n ? (size_t)js.n : n; /* one round of jobs */
        rc = sinew_run_new(ctx, &run, &pp->spec);
        if (!rc)
            rc = sinew_run_execute_jobs(run, js.n, js.ctx, sinew_run_pipeline_pair,
                                        (void *const *)js.pl, NULL, NULL, &res);
        jobs_free(&js);
        if (rc)
            ret = cli_status(CMD, ctx, rc);
    }
    *secs = now_s() - t0;
    *nprobe = pp->spec.npairs;
    sinew_run_free(run);
    *bytes = 0;
    for (size_t k = 0; ret == CLI_OK && k < *nprobe; k++) {
        char name[SINEW_PAIR_NAME_MAX], pdir[4300];
        snprintf(pdir, sizeof pdir, "%s/" SINEW_RUN_PAIRS_DIR "/%s", dir,
                 sinew_pair_name(name, todo[k]));
        DIR *d = opendir(pdir);
        for (struct dirent *e; d && (e = readdir(d));) {
            char f[4600];
            struct stat fst;
            snprintf(f, sizeof f, "%s/%s", pdir, e->d_name);
            if (lstat(f, &fst) == 0 && S_ISREG(fst.st_mode))
                *bytes += (double)fst.st_size;
        }
        if (d)
            closedir(d);
    }
    nftw(dir, remove_entry, 8, FTW_DEPTH | FTW_PHYS);
    free(pp);
    free(todo);
    return ret;
}

/* --dry-run: the owned pairs, every input file's header checked (missing, unreadable,
 * damaged or wrongly sized ones listed by name, then exit 1); with --resume the pairs a
 * resumed run would skip (their inputs and outputs hashed, as the run does); disk and
 * time of the rest from a probe: the first pair to compute, run for real in a temporary
 * folder. The run folder itself is not touched. */
static int dry_run(sinew_ctx *ctx, const run_args *a, const run_plan *p)
{
    const sinew_run_spec *spec = &p->spec;
    size_t bad = check_inputs(ctx, spec), done = 0;
    if (bad)
        return cli_error(CMD,
                         "%zu input file%s missing, unreadable or wrongly sized (listed above)",
                         bad, bad == 1 ? "" : "s");
    sinew_pair_status *st = calloc(spec->npairs ? spec->npairs : 1, sizeof *st);
    if (!st)
        return cli_error(CMD, "out of memory for the pair list");
    int rc = spec->resume ? sinew_run_peek(ctx, st, &done, spec) : SINEW_OK;
    if (rc) {
        free(st);
        return cli_status(CMD, ctx, rc);
    }
    size_t owned = 0, todo = 0;
    for (size_t q = 0; q < spec->npairs; q++) {
        if (!sinew_shard_owns(q, spec->shard_k, spec->shard_n))
            continue;
        char name[SINEW_PAIR_NAME_MAX];
        int skip = st[q] == SINEW_PAIR_SKIPPED;
        printf("%s%s\n", sinew_pair_name(name, spec->pairs[q]), skip ? " done" : "");
        owned++;
        todo += !skip;
    }
    if (!todo) {
        free(st);
        printf("%zu pairs, %zu done, 0 to compute\n", owned, done);
        return CLI_OK;
    }
    double secs = 0, bytes = 0;
    size_t nprobe = 0;
    int r = probe_pairs(ctx, a, p, st, &nprobe, &secs, &bytes);
    free(st);
    if (r != CLI_OK)
        return r;
    char eta[32], head[64] = "";
    double per = secs / (double)(nprobe ? nprobe : 1);
    fmt_eta(eta, sizeof eta, per * (double)todo);
    if (spec->resume)
        snprintf(head, sizeof head, " (%zu done, %zu to compute)", done, todo);
    printf("%zu pairs%s; disk about %.1f MB; time about %s (probe: %zu pair%s at once took "
           "%.2f s, %.2f MB)%s\n",
           owned, head, bytes / (double)(nprobe ? nprobe : 1) * (double)todo / 1e6, eta, nprobe,
           nprobe == 1 ? "" : "s", secs, bytes / 1e6,
           p->stereo_calib[0] ? "; stereo depth maps not included" : "");
    return CLI_OK;
}

/* The run itself, then the manifest (whole runs only), the summary lines, the --report
 * table and page, and the final one-line error. */
static int execute(sinew_ctx *ctx, const run_args *a, run_plan *p, sinew_run *run)
{
    job_set js;
    int rc = jobs_new(ctx, a, p, &js);
    if (rc != CLI_OK)
        return rc;
    /* first SIGINT/SIGTERM: stop at the next safe point; second: at once, releasing the
     * output folder's lock (tools/cli.h) */
    cli_stop_install(CMD, ctx);
    cli_stop_also_remove(sinew_run_lock_path(run));
    if (p->stereo_calib[0] && (rc = stereo_depths(ctx, a, p)) != CLI_OK) {
        jobs_free(&js);
        return rc;
    }
    progress_state ps = {.mode = a->progress,
                         .live = a->progress == PROG_AUTO && isatty(STDOUT_FILENO),
                         .t0 = now_s(),
                         .ctx = ctx,
                         .spec = &p->spec,
                         .warn = &p->warn};
    sinew_run_result res;
    rc = sinew_run_execute_jobs(run, js.n, js.ctx, sinew_run_pipeline_pair, (void *const *)js.pl,
                                on_progress, &ps, &res);
    jobs_free(&js);
    char first[SINEW_MESSAGE_MAX];
    snprintf(first, sizeof first, "%s", sinew_ctx_message(ctx));
    if (ps.live)
        printf("\n");
    int whole = a->shard_n == 1, mrc = SINEW_OK;
    size_t nd = 0, nf = 0, np = 0;
    /* the manifest is written even after a stop request (a second one ends it at once) */
    sinew_ctx_set_cancel(ctx, NULL);
    if (whole)
        mrc = sinew_run_write_manifest(run, 0, &nd, &nf, &np);
    sinew_ctx_set_cancel(ctx, cli_stop_flag());
    double el = now_s() - ps.t0;
    if (a->progress == PROG_JSON)
        printf("{\"event\":\"end\",\"total\":%zu,\"computed\":%zu,\"skipped\":%zu,\"failed\":%zu,"
               "\"interrupted\":%s,\"elapsed_s\":%.3f}\n",
               res.total, res.computed, res.skipped, res.failed, res.interrupted ? "true" : "false",
               el);
    else
        printf("%zu pairs%s: %zu computed, %zu skipped, %zu failed in %.1f s\n", res.total,
               whole ? "" : " in this shard", res.computed, res.skipped, res.failed, el);
    int hrc = SINEW_OK;
    char hmsg[SINEW_MESSAGE_MAX] = "";
    int json = a->progress == PROG_JSON;
    if (a->report) {
        print_report(ctx, &p->spec, json);
        char html[4200];
        snprintf(html, sizeof html, "%s/" SINEW_RUN_REPORT_FILE, a->outdir);
        if (whole && mrc == SINEW_OK && !res.interrupted) {
            hrc = sinew_report_write(ctx, html, a->outdir, NULL);
            if (hrc) {
                snprintf(hmsg, sizeof hmsg, "%s", sinew_ctx_message(ctx));
            } else if (json) {
                printf("{\"event\":\"report\",\"path\":");
                cli_json_string(stdout, html);
                printf("}\n");
            } else {
                printf("report: %s\n", html);
            }
        }
    }
    if (whole && mrc == SINEW_OK && a->progress != PROG_JSON)
        printf("manifest: %s/" SINEW_RUN_MANIFEST_FILE " (%zu done, %zu failed, %zu pending)\n",
               a->outdir, nd, nf, np);
    fflush(stdout);
    if (res.interrupted)
        return cli_error(CMD,
                         "interrupted by signal %d after %zu of %zu pairs; rerun with --resume",
                         cli_stop_signal(), res.computed + res.skipped, res.total);
    if (rc && (res.failed > 1 || a->on_error == SINEW_RUN_SKIP))
        return cli_error(CMD, "%zu of %zu pairs failed; first: %s", res.failed, res.total, first);
    if (rc)
        return cli_error(CMD, "%s", first);
    if (mrc)
        return cli_status(CMD, ctx, mrc);
    if (hrc)
        return cli_error(CMD, "%s", hmsg);
    if (!whole && json)
        printf("{\"event\":\"shard_done\",\"shard\":%d,\"shards\":%d}\n", a->shard_k, a->shard_n);
    else if (!whole)
        printf("shard %d/%d done; when every shard is done run: sinew run %s -o %s --merge\n",
               a->shard_k, a->shard_n, a->input, a->outdir);
    return CLI_OK;
}

int cmd_run(int argc, char **argv)
{
    run_args a;
    int ret = parse_args(argc, argv, &a);
    if (ret >= 0)
        return ret;
    sinew_ctx *ctx = cli_ctx(CMD, (int)a.threads);
    if (!ctx)
        return CLI_FAIL;
    run_plan p;
    memset(&p, 0, sizeof p);
    sinew_run *run = NULL;
    int rc;
    ret = plan(ctx, &a, &p);
    /* settings the pipeline refuses are refused before the output folder is made */
    if (ret == CLI_OK && !a.merge && (rc = sinew_run_pipeline_check(ctx, &p.spec, &a.pp)))
        ret = cli_status(CMD, ctx, rc);
    else if (ret == CLI_OK && a.dry)
        ret = dry_run(ctx, &a, &p);
    else if (ret == CLI_OK && (rc = sinew_run_new(ctx, &run, &p.spec)))
        ret = cli_status(CMD, ctx, rc);
    else if (ret == CLI_OK && a.merge && p.stereo_calib[0] &&
             (rc = stereo_paths(ctx, &a, &p)) != CLI_OK)
        ret = rc;
    else if (ret == CLI_OK && a.merge)
        ret = merge(ctx, run, &a, p.npairs);
    else if (ret == CLI_OK && (ret = store_options(ctx, &a)) == CLI_OK)
        ret = execute(ctx, &a, &p, run);
    cli_stop_also_remove(NULL);
    sinew_run_free(run);
    plan_free(ctx, &p);
    sinew_ctx_free(ctx);
    return ret;
}
