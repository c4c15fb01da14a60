/* SPDX-License-Identifier: MIT */
/* sinew run: process a whole sequence pair by pair with resume, shards and progress.
 * The library does the work (flow/run.h); this file parses options, loads the
 * sequence, installs the signal flag, prints progress and maps results to exit codes.
 * Progress goes to stdout (a live line on a terminal, plain or JSON lines otherwise);
 * stderr carries only the final one-line error, if any. */
#define _GNU_SOURCE
#include <getopt.h>
#include <math.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include <cJSON.h>

#include "flow/camera.h"
#include "flow/io.h"
#include "flow/report.h"
#include "flow/sequence.h"
#include "tools/cli.h"

static const char *const CMD = "run";

/* Set by SIGINT/SIGTERM; the library reads it between pairs. */
static volatile sig_atomic_t stop_flag;
static volatile sig_atomic_t stop_signal;

static void on_signal(int sig)
{
    stop_flag = 1;
    stop_signal = sig;
}

static void usage(FILE *out)
{
    fprintf(
        out,
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
        "                         color/ [depth/ labels/] [intrinsics.json]\n"
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
        "  --depth-scale S        16-bit depth codes per metre (default 1000; TUM: 5000)\n"
        "  --match-stride S       matches on a grid of step S pixels (default 4; 0 = all)\n"
        "  --resume               skip pairs that are complete and up to date\n"
        "  --shard K/N            process only pairs whose number %% N == K\n"
        "  --merge                compute nothing; rebuild manifest.json from all shards\n"
        "  --dry-run              list the pairs, estimate disk use and time, write nothing\n"
        "  --on-error stop|skip   on a failing pair: stop (default) or record and go on\n"
        "  --progress auto|plain|json   live line on a terminal (auto), plain lines, or\n"
        "                         JSON lines\n"
        "  --report               print a per-pair summary table at the end and write\n"
        "                         OUTDIR/report.html (sinew report)\n"
        "  --threads N            threads per pair (0 = all cores); outputs identical\n"
        "  -h, --help             this help\n"
        "\n"
        "examples:\n"
        "  sinew run demo/out/seq -o runs/demo\n"
        "  sinew run seq.json -o runs/a --shard 0/3 & sinew run seq.json -o runs/a --shard 1/3 &\n"
        "  sinew run seq.json -o runs/a --shard 2/3; wait; sinew run seq.json -o runs/a --merge\n"
        "  sinew run seq.json -o runs/a --resume --on-error skip\n"
        "  sinew run seq.json -o runs/b --flow-from runs/gpu-flows\n"
        "\n"
        "exit status: 0 all pairs done; 1 a pair failed, the run was interrupted or\n"
        "pairs are still pending (--merge); 2 usage error.\n"
        "\n%s",
        cli_notice);
}

typedef enum { PROG_AUTO, PROG_PLAIN, PROG_JSON } prog_mode;

typedef struct {
    prog_mode mode;
    int live; /* auto mode on a terminal */
    double t0;
    size_t last_len;
} progress_state;

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

static void json_string(FILE *f, const char *s)
{
    fputc('"', f);
    for (; *s; s++) {
        unsigned char c = (unsigned char)*s;
        if (c == '"' || c == '\\')
            fprintf(f, "\\%c", c);
        else if (c < 0x20)
            fprintf(f, "\\u%04x", c);
        else
            fputc(c, f);
    }
    fputc('"', f);
}

static void on_progress(void *ud, const sinew_run_progress *p)
{
    progress_state *ps = ud;
    double el = now_s() - ps->t0;
    /* rate and ETA from computed pairs only: skipped pairs cost almost nothing */
    double rate = el > 0 ? (double)p->computed / el : 0;
    double eta = rate > 0 ? (double)(p->total - p->finished) / rate : NAN;
    char etab[32];
    fmt_eta(etab, sizeof etab, p->finished == p->total ? 0 : eta);
    if (ps->mode == PROG_JSON) {
        printf("{\"event\":\"pair\",\"pair\":\"%s\",\"status\":\"%s\",\"finished\":%zu,"
               "\"total\":%zu,\"computed\":%zu,\"skipped\":%zu,\"failed\":%zu,"
               "\"elapsed_s\":%.3f,\"rate_pairs_per_s\":%.4f",
               p->name, status_word(p->status), p->finished, p->total, p->computed, p->skipped,
               p->failed, el, rate);
        if (p->message && *p->message) {
            printf(",\"error\":");
            json_string(stdout, p->message);
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
            printf("\n%s failed: %s\n", p->name, p->message);
    } else {
        printf("%zu/%zu %s %s", p->finished, p->total, p->name, status_word(p->status));
        if (p->status == SINEW_PAIR_FAILED)
            printf(": %s", p->message);
        printf("  (%.2f pairs/s, ETA %s)\n", rate, etab);
    }
    fflush(stdout);
}

static int parse_schedule(sinew_ctx *ctx, const char *s, sinew_schedule *out, sinew_pair **list,
                          size_t *nlist)
{
    memset(out, 0, sizeof *out);
    *list = NULL;
    *nlist = 0;
    long a, b;
    if (!strcmp(s, "consecutive")) {
        out->kind = SINEW_SCHEDULE_CONSECUTIVE;
        return 0;
    }
    if (!strncmp(s, "gap:", 4)) {
        if (cli_parse_int(s + 4, 1, SINEW_RUN_MAX_FRAMES, &a))
            return -1;
        out->kind = SINEW_SCHEDULE_GAP;
        out->gap = (int)a;
        return 0;
    }
    if (!strncmp(s, "keyframe:", 9)) {
        char buf[64];
        snprintf(buf, sizeof buf, "%s", s + 9);
        char *c = strchr(buf, ':');
        if (!c)
            return -1;
        *c = 0;
        if (cli_parse_int(buf, 1, SINEW_RUN_MAX_FRAMES, &a) ||
            cli_parse_int(c + 1, 1, SINEW_RUN_MAX_FRAMES, &b))
            return -1;
        out->kind = SINEW_SCHEDULE_KEYFRAME;
        out->every = (int)a;
        out->window = (int)b;
        return 0;
    }
    if (!strncmp(s, "list:", 5)) {
        const char *path = s + 5;
        unsigned char *buf;
        size_t len;
        if (sinew_read_file(ctx, path, (size_t)64 << 20, &buf, &len))
            return -2;
        size_t cap = 0, n = 0, line = 0;
        sinew_pair *p = NULL;
        int bad = 0;
        for (char *q = strtok((char *)buf, "\n"); q && !bad; q = strtok(NULL, "\n")) {
            line++;
            char *h = q + strspn(q, " \t\r");
            if (!*h || *h == '#')
                continue;
            long i, j;
            char extra[2];
            if (sscanf(h, "%ld %ld %1s", &i, &j, extra) != 2 || i < 0 || j < 0 ||
                i >= SINEW_RUN_MAX_FRAMES || j >= SINEW_RUN_MAX_FRAMES) {
                bad = 1;
                break;
            }
            if (n == cap) {
                if (cap >= SINEW_RUN_MAX_PAIRS) {
                    bad = 1;
                    break;
                }
                cap = cap ? cap * 2 : 64;
                sinew_pair *g = realloc(p, cap * sizeof *p);
                if (!g) {
                    bad = 1;
                    break;
                }
                p = g;
            }
            p[n++] = (sinew_pair){(int32_t)i, (int32_t)j};
        }
        sinew_ctx_dealloc(ctx, buf);
        if (bad) {
            free(p);
            cli_error(CMD, "%s: line %zu: expected 'I J' (frame numbers)", path, line);
            return -2;
        }
        out->kind = SINEW_SCHEDULE_LIST;
        out->list = p;
        out->list_len = n;
        *list = p;
        *nlist = n;
        return 0;
    }
    return -1;
}

static double num_at(const cJSON *o, const char *a, const char *b)
{
    const cJSON *x = cJSON_GetObjectItemCaseSensitive(o, a);
    if (b)
        x = cJSON_GetObjectItemCaseSensitive(x, b);
    return cJSON_IsNumber(x) ? x->valuedouble : NAN;
}

/* --report: one line per owned pair from its stats.json, then the totals. */
static void print_report(sinew_ctx *ctx, const sinew_run_spec *spec)
{
    printf("%-13s %8s %10s %10s %9s\n", "pair", "kept", "|fwd| px", "matches", "lifted");
    double kept = 0, pixels = 0, rows = 0;
    size_t n = 0;
    for (size_t q = 0; q < spec->npairs; q++) {
        if (!sinew_shard_owns(q, spec->shard_k, spec->shard_n))
            continue;
        char name[SINEW_PAIR_NAME_MAX], path[4200];
        sinew_pair_name(name, spec->pairs[q]);
        snprintf(path, sizeof path, "%s/" SINEW_RUN_PAIRS_DIR "/%s/" SINEW_RUN_STATS_FILE,
                 spec->outdir, name);
        unsigned char *buf;
        size_t len;
        cJSON *j = NULL;
        if (sinew_read_file(ctx, path, (size_t)16 << 20, &buf, &len) == SINEW_OK) {
            j = cJSON_ParseWithLength((const char *)buf, len);
            sinew_ctx_dealloc(ctx, buf);
        }
        if (!j) {
            printf("%-13s %8s\n", name, "-");
            continue;
        }
        const cJSON *m = cJSON_GetObjectItemCaseSensitive(j, "matches");
        double k = num_at(j, "check", "kept_fraction");
        double r = num_at(j, "matches", "rows");
        printf("%-13s %7.1f%% %10.3f %10.0f %9s\n", name, 100 * k,
               num_at(j, "forward", "mean_length_px"), r,
               cJSON_IsTrue(cJSON_GetObjectItemCaseSensitive(m, "lifted")) ? "yes" : "no");
        kept += num_at(j, "check", "kept");
        pixels += num_at(j, "check", "pixels");
        rows += isfinite(r) ? r : 0;
        n++;
        cJSON_Delete(j);
    }
    if (n)
        printf("%-13s %7.1f%% %10s %10.0f\n", "all", pixels > 0 ? 100 * kept / pixels : 0.0, "",
               rows);
}

/* Rough disk and time estimate for --dry-run (documented in docs/formats.md). */
static void dry_run(sinew_ctx *ctx, const sinew_run_spec *spec, const sinew_run_pipeline_params *pp)
{
    size_t owned = 0;
    for (size_t q = 0; q < spec->npairs; q++) {
        if (!sinew_shard_owns(q, spec->shard_k, spec->shard_n))
            continue;
        char name[SINEW_PAIR_NAME_MAX];
        printf("%s\n", sinew_pair_name(name, spec->pairs[q]));
        owned++;
    }
    int w = 0, h = 0;
    sinew_image img;
    if (spec->nframes && sinew_image_read(ctx, &img, spec->frames[0].color) == SINEW_OK) {
        w = img.width;
        h = img.height;
        sinew_image_free(&img);
    }
    if (!w) {
        printf("%zu pairs; frame size unknown (%s), no estimate\n", owned, sinew_ctx_message(ctx));
        return;
    }
    double px = (double)w * h;
    double flow = 8 * px + 128; /* flo / npy float32 */
    switch (pp->flow_format) {
    case SINEW_FLOW_NPY16:
        flow = 4 * px + 128;
        break;
    case SINEW_FLOW_PFM:
        flow = 12 * px + 32;
        break;
    case SINEW_FLOW_KITTI:
        flow = 6 * px;
        break; /* 16-bit RGB before compression: bound */
    default:
        break;
    }
    double per_pair = 2 * flow + px /* mask bound */ + 4 * px + 128 /* confidence */ + 4096;
    /* Seconds per megapixel for one pair (both directions, check, matches), measured
     * with sinew 0.1.0 on the shared 2-core build machine (160x120 and 640x480 demo
     * frames): fast 22, balanced 59, accurate 198; imported flows 4.5. Rough: machines
     * and load differ. */
    double spm = !strcmp(pp->preset, "fast")       ? 22.0
                 : !strcmp(pp->preset, "accurate") ? 198.0
                                                   : 59.0;
    if (spec->flow_from)
        spm = 4.5; /* import, check and matches only: measured likewise */
    double secs = spm * px / 1e6 * (double)owned;
    char eta[32];
    fmt_eta(eta, sizeof eta, secs);
    printf("%zu pairs of %dx%d; disk about %.1f MB; time roughly %s on 2 cores\n", owned, w, h,
           per_pair * (double)owned / 1e6, eta);
}

int cmd_run(int argc, char **argv)
{
    enum {
        O_RESUME = 256,
        O_SHARD,
        O_DRY,
        O_ONERR,
        O_PROGRESS,
        O_FMT,
        O_FROM,
        O_THREADS,
        O_REPORT,
        O_SCHED,
        O_PRESET,
        O_MAXDT,
        O_MERGE,
        O_DSCALE,
        O_MSTRIDE
    };
    static const struct option opts[] = {{"output", required_argument, NULL, 'o'},
                                         {"resume", no_argument, NULL, O_RESUME},
                                         {"shard", required_argument, NULL, O_SHARD},
                                         {"dry-run", no_argument, NULL, O_DRY},
                                         {"on-error", required_argument, NULL, O_ONERR},
                                         {"progress", required_argument, NULL, O_PROGRESS},
                                         {"flow-format", required_argument, NULL, O_FMT},
                                         {"flow-from", required_argument, NULL, O_FROM},
                                         {"threads", required_argument, NULL, O_THREADS},
                                         {"report", no_argument, NULL, O_REPORT},
                                         {"schedule", required_argument, NULL, O_SCHED},
                                         {"preset", required_argument, NULL, O_PRESET},
                                         {"max-dt", required_argument, NULL, O_MAXDT},
                                         {"merge", no_argument, NULL, O_MERGE},
                                         {"depth-scale", required_argument, NULL, O_DSCALE},
                                         {"match-stride", required_argument, NULL, O_MSTRIDE},
                                         {"help", no_argument, NULL, 'h'},
                                         {NULL, 0, NULL, 0}};
    const char *outdir = NULL, *flow_from = NULL, *sched_arg = "consecutive";
    int resume = 0, dry = 0, report = 0, merge = 0, shard_k = 0, shard_n = 1;
    int depth_scale_set = 0, preset_set = 0, format_set = 0, stride_set = 0, sched_set = 0;
    long threads = 0;
    double max_dt = 0.02;
    sinew_run_on_error on_error = SINEW_RUN_STOP;
    prog_mode pmode = PROG_AUTO;
    sinew_run_pipeline_params pp;
    sinew_run_pipeline_params_default(&pp);
    optind = 1;
    opterr = 0;
    int c;
    while ((c = getopt_long(argc, argv, ":o:h", opts, NULL)) != -1) {
        switch (c) {
        case 'o':
            outdir = optarg;
            break;
        case O_RESUME:
            resume = 1;
            break;
        case O_DRY:
            dry = 1;
            break;
        case O_REPORT:
            report = 1;
            break;
        case O_MERGE:
            merge = 1;
            break;
        case O_FROM:
            flow_from = optarg;
            break;
        case O_SCHED:
            sched_arg = optarg;
            sched_set = 1;
            break;
        case O_PRESET:
            pp.preset = optarg;
            preset_set = 1;
            break;
        case O_SHARD: {
            long k, n;
            char buf[64];
            snprintf(buf, sizeof buf, "%s", optarg);
            char *sl = strchr(buf, '/');
            if (!sl)
                return cli_usage_error(CMD, "--shard: expected K/N, got '%s'", optarg);
            *sl = 0;
            if (cli_parse_int(sl + 1, 1, 1000000, &n) || cli_parse_int(buf, 0, n - 1, &k))
                return cli_usage_error(CMD, "--shard: expected K/N with 0 <= K < N, got '%s'",
                                       optarg);
            shard_k = (int)k;
            shard_n = (int)n;
            break;
        }
        case O_ONERR:
            if (!strcmp(optarg, "stop"))
                on_error = SINEW_RUN_STOP;
            else if (!strcmp(optarg, "skip"))
                on_error = SINEW_RUN_SKIP;
            else
                return cli_usage_error(CMD, "--on-error: expected stop or skip, got '%s'", optarg);
            break;
        case O_PROGRESS:
            if (!strcmp(optarg, "auto"))
                pmode = PROG_AUTO;
            else if (!strcmp(optarg, "plain"))
                pmode = PROG_PLAIN;
            else if (!strcmp(optarg, "json"))
                pmode = PROG_JSON;
            else
                return cli_usage_error(CMD, "--progress: expected auto, plain or json, got '%s'",
                                       optarg);
            break;
        case O_FMT:
            format_set = 1;
            if (sinew_run_flow_format_parse(optarg, &pp.flow_format))
                return cli_usage_error(CMD,
                                       "--flow-format: expected flo, npy, npy16, pfm or png, "
                                       "got '%s'",
                                       optarg);
            break;
        case O_THREADS:
            if (cli_parse_int(optarg, 0, 4096, &threads))
                return cli_usage_error(CMD, "--threads: expected 0..4096, got '%s'", optarg);
            break;
        case O_MAXDT:
            if (cli_parse_double(optarg, &max_dt) || !(max_dt > 0))
                return cli_usage_error(CMD, "--max-dt: expected seconds > 0, got '%s'", optarg);
            break;
        case O_DSCALE:
            if (cli_parse_double(optarg, &pp.depth_scale) || !(pp.depth_scale > 0))
                return cli_usage_error(CMD, "--depth-scale: expected codes per metre > 0, got '%s'",
                                       optarg);
            depth_scale_set = 1;
            break;
        case O_MSTRIDE: {
            long v;
            if (cli_parse_int(optarg, 0, 1 << 20, &v))
                return cli_usage_error(CMD, "--match-stride: expected pixels >= 0, got '%s'",
                                       optarg);
            pp.match_stride = (int)v;
            stride_set = 1;
            break;
        }
        case 'h':
            usage(stdout);
            return CLI_OK;
        case ':':
            return cli_usage_error(CMD, "option %s needs a value", argv[optind - 1]);
        default:
            return cli_usage_error(CMD, "unknown option %s", argv[optind - 1]);
        }
    }
    if (optind != argc - 1)
        return cli_usage_error(CMD, optind >= argc ? "missing SEQUENCE.json or FOLDER"
                                                   : "expected one SEQUENCE.json or FOLDER");
    if (!outdir)
        return cli_usage_error(CMD, "missing -o OUTDIR");
    if (merge && (dry || shard_n > 1))
        return cli_usage_error(CMD, "--merge cannot be combined with --dry-run or --shard");
    const char *input = argv[optind];

    sinew_ctx *ctx = cli_ctx(CMD, (int)threads);
    if (!ctx)
        return CLI_FAIL;
    int ret = CLI_FAIL, rc;
    sinew_run_source src;
    memset(&src, 0, sizeof src);
    sinew_sequence *seq = NULL;
    sinew_camera cam;
    sinew_schedule seq_sched;
    memset(&seq_sched, 0, sizeof seq_sched);
    sinew_pair *seq_pairs = NULL;
    int use_seq_sched = 0;
    sinew_pair *pairs = NULL, *list = NULL;
    size_t npairs = 0, nlist = 0;
    sinew_run *run = NULL;
    sinew_run_pipeline *pl = NULL;
    struct stat st;
    if (stat(input, &st) != 0) {
        cli_error(CMD, "%s: not found", input);
        goto done;
    }
    char seqpath[4200];
    snprintf(seqpath, sizeof seqpath, "%s/sequence.json", input);
    int is_dir = S_ISDIR(st.st_mode);
    if (is_dir && stat(seqpath, &st) != 0) {
        if ((rc = sinew_run_source_from_folder(ctx, input, max_dt, &src))) {
            cli_status(CMD, ctx, rc);
            goto done;
        }
    } else {
        const char *sp = is_dir ? seqpath : input;
        if ((rc = sinew_sequence_read(ctx, &seq, sp)) ||
            (rc = sinew_run_source_from_sequence(ctx, seq, sp, &src))) {
            cli_status(CMD, ctx, rc);
            goto done;
        }
        if (seq->has_intrinsics) {
            sinew_camera_init(&cam, seq->fx, seq->fy, seq->cx, seq->cy, seq->width, seq->height);
            pp.camera = &cam;
        }
        if (!depth_scale_set && seq->depth_scale > 0)
            pp.depth_scale = seq->depth_scale;
        pp.depth_ray = seq->depth_ray;
        /* the sequence's "run" settings, unless the command line gave them */
        const sinew_seq_run *sr = &seq->run;
        if (!preset_set && sr->preset)
            pp.preset = sr->preset;
        if (!format_set && sr->flow_format &&
            sinew_run_flow_format_parse(sr->flow_format, &pp.flow_format)) {
            cli_error(CMD, "%s: run.flow_format: unknown format", input);
            goto done;
        }
        if (!stride_set && sr->has_match_stride)
            pp.match_stride = sr->match_stride;
        if (!sched_set && sr->has_schedule) {
            seq_sched.kind = (sinew_schedule_kind)sr->schedule_kind;
            seq_sched.gap = sr->gap;
            seq_sched.every = sr->every;
            seq_sched.window = sr->window;
            if (sr->n_pairs) {
                seq_pairs = calloc(sr->n_pairs, sizeof *seq_pairs);
                if (!seq_pairs) {
                    cli_error(CMD, "out of memory");
                    goto done;
                }
                for (size_t q = 0; q < sr->n_pairs; q++)
                    seq_pairs[q] = (sinew_pair){sr->pairs[2 * q], sr->pairs[2 * q + 1]};
            }
            seq_sched.list = seq_pairs;
            seq_sched.list_len = sr->n_pairs;
            use_seq_sched = 1;
        }
    }
    sinew_schedule sched;
    int pr = 0;
    if (use_seq_sched)
        sched = seq_sched;
    else
        pr = parse_schedule(ctx, sched_arg, &sched, &list, &nlist);
    if (pr == -1) {
        ret = cli_usage_error(CMD,
                              "--schedule: expected consecutive, gap:K, keyframe:K:M or "
                              "list:FILE, got '%s'",
                              sched_arg);
        goto done;
    }
    if (pr == -2) {
        if (sinew_ctx_message(ctx)[0])
            cli_status(CMD, ctx, SINEW_EIO);
        goto done;
    }
    if ((rc = sinew_schedule_pairs(ctx, &sched, src.nframes, &pairs, &npairs))) {
        cli_status(CMD, ctx, rc);
        goto done;
    }
    char options[512];
    if ((rc = sinew_run_pipeline_options(ctx, &pp, options, sizeof options))) {
        cli_status(CMD, ctx, rc);
        goto done;
    }
    sinew_run_spec spec;
    memset(&spec, 0, sizeof spec);
    spec.frames = src.frames;
    spec.nframes = src.nframes;
    spec.intrinsics = src.intrinsics;
    spec.pairs = pairs;
    spec.npairs = npairs;
    spec.flow_from = flow_from;
    spec.options = options;
    spec.outdir = outdir;
    spec.shard_k = shard_k;
    spec.shard_n = shard_n;
    spec.resume = resume;
    spec.on_error = on_error;
    spec.cancel = &stop_flag;
    if (dry) {
        dry_run(ctx, &spec, &pp);
        ret = CLI_OK;
        goto done;
    }
    if ((rc = sinew_run_new(ctx, &run, &spec))) {
        cli_status(CMD, ctx, rc);
        goto done;
    }
    size_t nd = 0, nf = 0, np = 0;
    if (merge) {
        if ((rc = sinew_run_write_manifest(run, 1, &nd, &nf, &np))) {
            cli_status(CMD, ctx, rc);
            goto done;
        }
        printf("manifest: %zu pairs: %zu done, %zu failed, %zu pending\n", npairs, nd, nf, np);
        if (nf || np)
            cli_error(CMD, "%s/" SINEW_RUN_MANIFEST_FILE ": %zu pairs failed and %zu are pending",
                      outdir, nf, np);
        else
            ret = CLI_OK;
        goto done;
    }
    if ((rc = sinew_run_pipeline_new(ctx, &pl, &spec, &pp))) {
        cli_status(CMD, ctx, rc);
        goto done;
    }
    struct sigaction sa;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = on_signal;
    sa.sa_flags = SA_RESTART;
    sigemptyset(&sa.sa_mask);
    sigaction(SIGINT, &sa, NULL);
    sigaction(SIGTERM, &sa, NULL);
    progress_state ps = {pmode, pmode == PROG_AUTO && isatty(STDOUT_FILENO), now_s(), 0};
    sinew_run_result res;
    rc = sinew_run_execute(run, sinew_run_pipeline_pair, pl, on_progress, &ps, &res);
    char first[1024];
    snprintf(first, sizeof first, "%s", sinew_ctx_message(ctx));
    if (ps.live)
        printf("\n");
    int mrc = SINEW_OK;
    if (shard_n == 1)
        mrc = sinew_run_write_manifest(run, 0, &nd, &nf, &np);
    double el = now_s() - ps.t0;
    if (pmode == PROG_JSON)
        printf("{\"event\":\"end\",\"total\":%zu,\"computed\":%zu,\"skipped\":%zu,\"failed\":%zu,"
               "\"interrupted\":%s,\"elapsed_s\":%.3f}\n",
               res.total, res.computed, res.skipped, res.failed, res.interrupted ? "true" : "false",
               el);
    else
        printf("%zu pairs%s: %zu computed, %zu skipped, %zu failed in %.1f s\n", res.total,
               shard_n > 1 ? " in this shard" : "", res.computed, res.skipped, res.failed, el);
    int hrc = SINEW_OK;
    char hmsg[1024] = "";
    if (report) {
        print_report(ctx, &spec);
        char html[4200];
        snprintf(html, sizeof html, "%s/report.html", outdir);
        if (shard_n == 1 && mrc == SINEW_OK && !res.interrupted) {
            hrc = sinew_report_write(ctx, outdir, html, NULL);
            if (hrc)
                snprintf(hmsg, sizeof hmsg, "%s", sinew_ctx_message(ctx));
            else
                printf("report: %s\n", html);
        }
    }
    if (shard_n == 1 && mrc == SINEW_OK && pmode != PROG_JSON)
        printf("manifest: %s/" SINEW_RUN_MANIFEST_FILE " (%zu done, %zu failed, %zu pending)\n",
               outdir, nd, nf, np);
    fflush(stdout);
    if (res.interrupted) {
        cli_error(CMD, "interrupted by signal %d after %zu of %zu pairs; rerun with --resume",
                  (int)stop_signal, res.computed + res.skipped, res.total);
    } else if (rc) {
        if (res.failed > 1 || on_error == SINEW_RUN_SKIP)
            cli_error(CMD, "%zu of %zu pairs failed; first: %s", res.failed, res.total, first);
        else
            cli_error(CMD, "%s", first);
    } else if (mrc) {
        cli_status(CMD, ctx, mrc);
    } else if (hrc) {
        cli_error(CMD, "%s", hmsg);
    } else {
        ret = CLI_OK;
        if (shard_n > 1)
            printf("shard %d/%d done; when every shard is done run: sinew run %s -o %s --merge\n",
                   shard_k, shard_n, input, outdir);
    }
done:
    sinew_run_pipeline_free(pl);
    sinew_run_free(run);
    sinew_ctx_dealloc(ctx, pairs);
    free(list);
    free(seq_pairs);
    sinew_run_source_free(ctx, &src);
    sinew_sequence_free(seq);
    sinew_ctx_free(ctx);
    return ret;
}
