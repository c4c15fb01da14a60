/* SPDX-License-Identifier: MIT */
/* Whole-sequence runs: frame sources (sequence files, plain folders), the run engine
 * that gives resume, per-pair "done" records and the run manifest, and the standard
 * pair pipeline. Content hashes are in flow/sha256.h, pair schedules, sharding and
 * timestamp association in flow/schedule.h (both included here).
 *
 * The engine does not know how a pair is processed: the caller passes a pair function
 * (the `sinew run` command passes the flow/check/match/lift pipeline; tests pass a
 * cheap stand-in). The engine owns everything around it: which pairs this shard owns,
 * which pairs are already complete and up to date, cleaning a pair folder before it
 * is recomputed, the "done" record written last, error records, the cancel flag and
 * the manifest. Layout and file formats are documented in docs/formats.md. */
#ifndef SINEW_RUN_H
#define SINEW_RUN_H

#include <stddef.h>
#include <stdint.h>

#include "flow/core.h"
#include "flow/schedule.h"
#include "flow/sequence.h"
#include "flow/sha256.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ---- sequences from a plain folder ----------------------------------------------
 * Default layout of a folder given instead of a sequence.json (docs/formats.md):
 *   rgb.txt + depth.txt  "timestamp filename" lists (paths relative to the folder):
 *                        colour and depth associated with sinew_associate (max_dt,
 *                        offset 0); frames are the associated colour images in time
 *                        order; colour stamps without a depth partner are dropped
 *                        (counted in `dropped`);
 *   otherwise color/     images (.png .jpg .jpeg .ppm .pgm .npy .pfm), sorted by file
 *                        name (byte order); optional depth/, labels/ and ignore/
 *                        (ignore masks) matched to them by file stem (the name without its
 * extension), else by the stem's last number when that is unique (frame-000007.color and
 * frame-000007.depth are one frame); intrinsics.json      optional, used when present. Frame counts
 * are checked against SINEW_RUN_MAX_FRAMES before allocation. Everything a user should know about
 * the matching becomes a warning (a line naming the file): a depth map or label image with no
 * colour frame, a colour frame without labels, a jump in the frame numbers, numbered names that do
 * not sort in numeric order, a colour frame left out (no depth partner: a colour stamp with no
 * depth stamp within max_dt, or with SINEW_RUN_SOURCE_DROP_UNMATCHED a colour image with no depth
 * map). */
typedef struct sinew_run_source {
    size_t nframes;
    struct sinew_run_frame *frames; /* owned, strings too */
    char *intrinsics;               /* owned path or NULL */
    size_t dropped;                 /* colour frames left out for lack of depth */
    size_t nwarnings;
    char **warnings; /* owned */
} sinew_run_source;

/* Flags of sinew_run_source_from_folder. */
#define SINEW_RUN_SOURCE_DROP_UNMATCHED                                                            \
    1u /* leave out colour images without a depth map                                              \
          (a warning each) instead of failing */
/* Stereo layout: left/ (or color/) and right/ matched by stem like depth/ (right frames in
 * sinew_run_frame.right; depth/ is not read); depth comes from flow/runstereo.h. */
#define SINEW_RUN_SOURCE_STEREO 2u

/* Scan a folder (layout above). max_dt: association tolerance in seconds (the
 * published TUM default is 0.02). ECONFIG naming the folder when neither layout is
 * present, naming the files when two have the same stem, or the first colour image
 * without a depth map (unless flags has SINEW_RUN_SOURCE_DROP_UNMATCHED). Free with
 * sinew_run_source_free. */
int sinew_run_source_from_folder(sinew_ctx *ctx, sinew_run_source *out, const char *dir,
                                 double max_dt, unsigned flags);
/* The frames of a sequence file (flow/sequence.h), their paths resolved against the
 * file's folder. ELIMIT (message names `where` and the frame) for a path too long to
 * resolve. intrinsics stays NULL: a sequence carries its intrinsics as values. Free with
 * sinew_run_source_free. */
int sinew_run_source_from_sequence(sinew_ctx *ctx, sinew_run_source *out, const sinew_sequence *seq,
                                   const char *where);
void sinew_run_source_free(sinew_ctx *ctx, sinew_run_source *src);

/* ---- the run folder (docs/formats.md) -------------------------------------------
 * OUTDIR/SINEW_RUN_MANIFEST_FILE and OUTDIR/SINEW_RUN_PAIRS_DIR/NAME/ per pair (NAME from
 * sinew_pair_name), holding the files below; forward and backward flow are
 * SINEW_RUN_FORWARD "." EXT and SINEW_RUN_BACKWARD "." EXT (sinew_flow_format_ext, flow/io.h). The
 * engine (run.c, manifest.c), the pipeline (runpipe.c), the report (report.c) and the
 * `sinew run` command use these names only. */
#define SINEW_RUN_PAIRS_DIR "pairs"
#define SINEW_RUN_MANIFEST_FILE "manifest.json"
#define SINEW_RUN_REPORT_FILE "report.html" /* written by `sinew run --report` */
#define SINEW_RUN_DONE_FILE "done.json"
#define SINEW_RUN_ERROR_FILE "error.json"
#define SINEW_RUN_STATS_FILE "stats.json"
#define SINEW_RUN_FORWARD "forward"
#define SINEW_RUN_BACKWARD "backward"
#define SINEW_RUN_MASK_FILE "mask.png"
#define SINEW_RUN_CONFIDENCE_FILE "confidence.npy"
#define SINEW_RUN_FB_ERROR_FILE "fb_error.npy"
#define SINEW_RUN_LOCK_FILE "run.lock" /* OUTDIR/run.lock or run.lock.K-of-N (shard K of N) */
#define SINEW_RUN_MATCHES_FILE "matches.npy"
#define SINEW_RUN_MATCHES_SIDECAR "matches.json" /* sinew_matches_sidecar_path of the above */
#define SINEW_RUN_OPTIONS_FILE "options.json"

/* ---- the run engine ------------------------------------------------------------ */
typedef struct sinew_run_frame {
    const char *color;  /* image path, required */
    const char *depth;  /* depth map path or NULL */
    const char *labels; /* label image path or NULL */
    const char *ignore; /* ignore mask path or NULL: the forward check of a pair that
                           starts at this frame rejects its pixels (reason "ignored") */
    const char *right;  /* stereo: the right frame of a stereo pair (SINEW_RUN_SOURCE_STEREO,
                           flow/runstereo.h) or NULL */
    int has_timestamp;  /* 1 when timestamp is known (lists, sequence.json) */
    double timestamp;   /* capture time in seconds */
    int has_pose;       /* 1 when pose is known (sequence.json frames[].pose) */
    double pose[12];    /* camera-to-world 3x4 row-major [R | t], metres */
} sinew_run_frame;

typedef enum sinew_run_on_error {
    SINEW_RUN_STOP = 0, /* the first failing pair ends the run */
    SINEW_RUN_SKIP      /* record the failure beside the pair and carry on */
} sinew_run_on_error;

/* Everything the engine needs; all pointers are borrowed for the life of the run. */
typedef struct sinew_run_spec {
    const sinew_run_frame *frames;
    size_t nframes;
    const char *intrinsics;  /* shared input file hashed into every key, or NULL */
    const sinew_pair *pairs; /* the expanded schedule */
    size_t npairs;
    const char *flow_from; /* folder of imported flows (see sinew_run_find_import) or NULL */
    const char *options;   /* canonical text of every option that changes outputs
                              (e.g. compact JSON); part of every pair key */
    const char *outdir;    /* output folder (created if missing) */
    int shard_k, shard_n;  /* this process owns pairs with index % n == k; n = 1: all */
    int resume;            /* skip pairs whose done record matches */
    sinew_run_on_error on_error;
    /* Names of the files the pair function writes into a pair folder (besides the
     * engine's stats.json), e.g. from sinew_run_pipeline_outputs; may be NULL (0).
     * A done record must list each of them (and stats.json) for the pair to count as
     * done; emptying a pair folder removes only these, the names of this header (flows
     * in every format), the outputs listed in its done record and their temporaries. */
    const char *const *outputs;
    size_t noutputs;
    /* 1: the outputs depend on the frames' poses (e.g. matches in world coordinates), so
     * each pair key also hashes its two frames' poses */
    int poses_in_key;
} sinew_run_spec;

/* What the pair function receives. */
typedef struct sinew_run_job {
    size_t index; /* position in the schedule */
    sinew_pair pair;
    const char *name;     /* sinew_pair_name of the pair */
    const char *dir;      /* OUTDIR/pairs/NAME, exists and holds no outputs */
    const char *flow_fwd; /* imported forward flow path (flow_from set) or NULL */
    const char *flow_bwd; /* imported backward flow path or NULL */
} sinew_run_job;

/* Process one pair: write every output into job->dir (atomically, e.g. through
 * sinew_outfile_* or the io.h writers) and return the pair's statistics as a JSON
 * object text in *stats (allocated with sinew_ctx_alloc on ctx; the engine frees it
 * and writes it to stats.json). Return a status; on failure set the ctx message
 * naming the file. */
typedef int (*sinew_run_pair_fn)(void *ud, sinew_ctx *ctx, const sinew_run_job *job, char **stats);

typedef enum sinew_pair_status {
    SINEW_PAIR_PENDING = 0,
    SINEW_PAIR_COMPUTED, /* processed in this run */
    SINEW_PAIR_SKIPPED,  /* already complete and up to date (resume) */
    SINEW_PAIR_FAILED
} sinew_pair_status;

/* Reported after every owned pair. */
typedef struct sinew_run_progress {
    size_t total;    /* pairs owned by this shard */
    size_t finished; /* computed + skipped + failed so far */
    size_t computed, skipped, failed;
    size_t index; /* the pair just finished */
    const char *name;
    sinew_pair_status status;
    const char *message; /* failure detail or "" */
} sinew_run_progress;
typedef void (*sinew_run_progress_fn)(void *ud, const sinew_run_progress *p);

typedef struct sinew_run_result {
    size_t total, computed, skipped, failed;
    int interrupted; /* stopped by the cancel flag */
    int status;      /* first failure's status (SINEW_OK if none) */
} sinew_run_result;

typedef struct sinew_run sinew_run;

/* Prepare a run: validates the spec (ECONFIG for bad shard numbers, pairs out of
 * range, limits, a linked OUTDIR/pairs, imported flows overlapping OUTDIR), creates
 * OUTDIR and OUTDIR/pairs and locks OUTDIR: SINEW_RUN_LOCK_FILE (shard K of N:
 * SINEW_RUN_LOCK_FILE ".K-of-N") holding "pid PID\nhost HOST\n". Shards of the same
 * N share the folder; any other live holder gives ECONFIG naming the lock file, its
 * process and host. A lock of a process of this host that no longer exists is stale
 * and removed. sinew_run_free releases the lock. */
int sinew_run_new(sinew_ctx *ctx, sinew_run **out, const sinew_run_spec *spec);
void sinew_run_free(sinew_run *run);
/* The lock file this run holds (for a signal handler to remove), or NULL. */
const char *sinew_run_lock_path(const sinew_run *run);

/* Process every owned pair in schedule order. For each: stop if the context's stop
 * flag (sinew_ctx_set_cancel) is set;
 * hash the inputs (each file once per run) and form the pair key
 * SHA-256(version, options, pair, input digests); with resume, skip the pair when
 * its done record carries that key and every listed output has the recorded size
 * and digest; otherwise empty the pair folder, call fn, write stats.json, then write
 * done.json last (atomically). A failure writes error.json beside the pair; with
 * SINEW_RUN_STOP the run ends there. The context's stop flag also cuts hashing short;
 * the pair it happens in is then neither failed nor emptied and gets no record (without
 * done.json it is recomputed next time), and the run ends interrupted. Returns SINEW_OK when every
 * owned pair ended computed or skipped, SINEW_EINTERRUPTED when cancelled, otherwise the first
 * failure's status (its message stays on ctx). *result is always filled. */
int sinew_run_execute(sinew_run *run, sinew_run_pair_fn fn, void *fn_ud,
                      sinew_run_progress_fn progress, void *progress_ud, sinew_run_result *result);

/* Most pairs at once in sinew_run_execute_jobs. */
#define SINEW_RUN_MAX_JOBS 256

/* sinew_run_execute with `jobs` pairs at once (1..SINEW_RUN_MAX_JOBS): worker k runs
 * fn(fn_uds[k], ctxs[k], ...) on its own thread; ctxs[k] are distinct contexts, none the
 * run's (each is used by its worker only; give each its share of the threads and the
 * same stop flag). The calling thread hashes inputs, checks resume and commits pairs in
 * schedule order, so progress calls, counts, records and outputs are those of one job
 * (outputs do not depend on which worker made them); with SINEW_RUN_STOP, pairs
 * already running when an earlier pair fails still finish and are counted. jobs = 1
 * runs on the calling thread with run's context and fn_uds[0] (ctxs may be NULL).
 * Memory: `jobs` copies of what fn holds, plus about 20 KB per job. Returns as
 * sinew_run_execute; EINVAL for bad arguments, ENOMEM when a thread cannot start. */
int sinew_run_execute_jobs(sinew_run *run, int jobs, sinew_ctx *const *ctxs, sinew_run_pair_fn fn,
                           void *const *fn_uds, sinew_run_progress_fn progress, void *progress_ud,
                           sinew_run_result *result);

/* What a resumed run would skip, without touching OUTDIR (no folder made, no lock,
 * nothing written): status[q] (spec->npairs entries) is SINEW_PAIR_SKIPPED for each
 * owned pair whose done record carries its current key and whose listed outputs have
 * their recorded sizes and SHA-256, as sinew_run_execute checks with resume; every
 * other pair, of this shard or not, and any pair whose inputs cannot be hashed, is
 * SINEW_PAIR_PENDING. *ndone (optional) counts the skipped ones. Reads every input of
 * the owned pairs once and the outputs of done pairs. EINTERRUPTED when the context's
 * stop flag is set; ECONFIG for a spec sinew_run_new would refuse. */
int sinew_run_peek(sinew_ctx *ctx, sinew_pair_status *status, size_t *ndone,
                   const sinew_run_spec *spec);

/* Rebuild OUTDIR/manifest.json from the per-pair records of every pair in the
 * schedule (all shards): inputs with sizes and SHA-256, options, version, and per
 * pair its status ("done" when the done record matches the current key, "failed"
 * with the message, otherwise "pending") and stats. Written atomically (temporary
 * name, fsync, rename), so shards or a merge step never leave a torn manifest.
 * verify = 1 also checks the size and SHA-256 of every output listed in each done
 * record (as --resume does; a merge step should), 0 trusts the records (right after
 * this process wrote them). Counts are returned through the optional pointers.
 * EINTERRUPTED (nothing written) when the context's stop flag is set. */
int sinew_run_write_manifest(sinew_run *run, int verify, size_t *ndone, size_t *nfailed,
                             size_t *npending);

/* ---- the standard pair pipeline ------------------------------------------------
 * What `sinew run` does for each pair (files per pair, docs/formats.md):
 *   forward.EXT, backward.EXT  flow i->j and j->i (estimated, or imported with
 *                              flow_from and rewritten in the chosen format)
 *   mask.png                   8-bit reason bits of the forward check (flow/check.h)
 *   confidence.npy             float32 H x W forward confidence in [0, 1]
 *   matches.npy, matches.json  weighted matches (flow/match.h); with depth maps and
 *                              intrinsics the rows carry the lifted 3-D points
 *   stats.json                 counts and flow statistics (written by the engine)
 * Frames are read as they are needed; the decoded frames (colour, depth in metres,
 * labels) of the previous pair are kept, so consecutive schedules decode each frame
 * once and memory stays at a few frames whatever the sequence length. */
/* ---- stage settings a run may change from their defaults ----------------------
 * The check's thresholds and the lift's rules, named as the options of `sinew check`
 * and `sinew lift` (docs/formats.md, options.json): */
typedef enum sinew_run_tune {
    SINEW_TUNE_FB_ALPHA,         /* "fb-alpha": sinew_check_params.fb_alpha */
    SINEW_TUNE_FB_BETA,          /* "fb-beta" */
    SINEW_TUNE_BOUNDARY_ALPHA,   /* "boundary-alpha" */
    SINEW_TUNE_BOUNDARY_BETA,    /* "boundary-beta" */
    SINEW_TUNE_PHOTO_THRESHOLD,  /* "photo-threshold" */
    SINEW_TUNE_SATURATION_LEVEL, /* "saturation-level" */
    SINEW_TUNE_NEAR,             /* "near": sinew_depth_params.near, metres */
    SINEW_TUNE_FAR,              /* "far" */
    SINEW_TUNE_EDGE,             /* "edge": sinew_match_params.edge_rel */
    SINEW_TUNE_EDGE_RADIUS,      /* "edge-radius" */
    SINEW_TUNE_MAX_DISPLACEMENT, /* "max-displacement", metres */
    SINEW_TUNE_NORMALS,          /* "normals": 1 adds normals */
    SINEW_TUNE_TOP_K,            /* "top-k": sampling by weight instead of the stride */
    SINEW_TUNE_CELL,             /* "cell" */
    SINEW_TUNE_PER_CELL,         /* "per-cell" */
    SINEW_TUNE_MIN_WEIGHT,       /* "min-weight" */
    SINEW_TUNE_WORLD_FRAME,      /* "world-frame": 1 writes the matches' points in world
                                    coordinates (every frame needs a pose) */
    SINEW_RUN_NTUNE
} sinew_run_tune;

/* The settings that differ from the stages' defaults: bit k of `set` for key k, with
 * its value. All zero = every default. */
typedef struct sinew_run_tuning {
    unsigned set;
    double value[SINEW_RUN_NTUNE];
} sinew_run_tuning;

/* Option name of key k (e.g. "fb-alpha"), NULL outside 0..SINEW_RUN_NTUNE-1. */
const char *sinew_run_tune_name(int key);
/* The key named `name`, or -1. */
int sinew_run_tune_find(const char *name);
/* What key k accepts, for messages (e.g. "a number >= 0", "a whole number 0..16"). */
const char *sinew_run_tune_range(int key);
/* Check value v for key k: 0 when accepted (finite, in range, whole where it must be),
 * -1 otherwise. */
int sinew_run_tune_valid(int key, double v);
/* Compact JSON object of the set keys in key order, %.17g values, e.g.
 * {"fb-alpha":0.02,"near":0.3}; "{}" when none. ELIMIT when buf (size n) is too small. */
int sinew_run_tuning_text(sinew_ctx *ctx, char *buf, size_t n, const sinew_run_tuning *t);

typedef struct sinew_run_pipeline_params {
    const char *preset; /* flow preset (flow/estimate.h), e.g. "balanced" */
    int flow_format;    /* sinew_flow_format of the flow outputs (io.h) */
    double depth_scale; /* 16-bit depth codes per metre (1000 = millimetres) */
    int match_stride;   /* matches on a grid of this step in pixels; 0 = every kept pixel */
    int matches;        /* 1: write matches.npy/json (default), 0: flows and check only */
    /* Intrinsics given as values (e.g. from a sequence.json) instead of the spec's
     * intrinsics file; borrowed; NULL = use the file if any. The values are part of the
     * options text, so changing them invalidates done pairs. */
    const struct sinew_camera *camera;
    int depth_ray; /* 1: depth maps store the distance from the camera centre, not z */
    /* sinew_ignore_polarity (flow/check.h) of the frames' ignore masks: 0 when no frame
     * has one (a frame with one then makes sinew_run_pipeline_new fail with ECONFIG). */
    int ignore_polarity;
    /* A sequence whose ground-truth pairs ("pairs" of sequence.json) score each pair
     * that has them (stats.json "truth", "epe", "occlusion_f1"); borrowed; NULL = none.
     * Scores are diagnostics: they are not part of the options text or pair keys. */
    const sinew_sequence *truth;
    /* Check thresholds and lift rules that differ from their defaults; part of the
     * options text (key "tuning", only when something is set). */
    sinew_run_tuning tuning;
} sinew_run_pipeline_params;

typedef struct sinew_run_pipeline sinew_run_pipeline;

/* Defaults: preset "balanced", .flo flows, depth scale 1000, match stride 4, matches on. */
void sinew_run_pipeline_params_default(sinew_run_pipeline_params *p);
/* The canonical options text of these parameters (compact JSON, fixed key order), to
 * be used as sinew_run_spec.options. ELIMIT if buf (size n) is too small. */
int sinew_run_pipeline_options(sinew_ctx *ctx, char *buf, size_t n,
                               const sinew_run_pipeline_params *p);
/* What sinew_run_pipeline_new refuses, checked without creating anything (a front
 * end calls it before making the output folder): ECONFIG naming the problem for an
 * unknown preset or format, a tuning value out of range, near >= far, ignore masks
 * without a polarity, or world-frame without intrinsics or with a frame lacking a
 * pose or depth map. */
int sinew_run_pipeline_check(sinew_ctx *ctx, const sinew_run_spec *spec,
                             const sinew_run_pipeline_params *p);
/* Create the pipeline for a spec (borrowed for the pipeline's life). ECONFIG as
 * sinew_run_pipeline_check. */
int sinew_run_pipeline_new(sinew_ctx *ctx, sinew_run_pipeline **out, const sinew_run_spec *spec,
                           const sinew_run_pipeline_params *p);
void sinew_run_pipeline_free(sinew_run_pipeline *pl);
/* A sinew_run_pair_fn: pass the pipeline as ud. */
int sinew_run_pipeline_pair(void *pipeline, sinew_ctx *ctx, const sinew_run_job *job, char **stats);
/* The files the pipeline writes into each pair folder with these parameters (static
 * strings), for sinew_run_spec.outputs: up to SINEW_RUN_PIPELINE_MAX_OUTPUTS names into
 * names; returns their number. */
#define SINEW_RUN_PIPELINE_MAX_OUTPUTS 6
size_t sinew_run_pipeline_outputs(const sinew_run_pipeline_params *p,
                                  const char *names[SINEW_RUN_PIPELINE_MAX_OUTPUTS]);

/* Settings a caller has chosen itself (e.g. on the command line): a sequence must not
 * override them (bits for `keep` below). */
#define SINEW_RUN_KEEP_PRESET 1u
#define SINEW_RUN_KEEP_FLOW_FORMAT 2u
#define SINEW_RUN_KEEP_MATCH_STRIDE 4u
#define SINEW_RUN_KEEP_DEPTH_SCALE 8u
#define SINEW_RUN_KEEP_IGNORE_POLARITY 128u
#define SINEW_RUN_KEEP_CAMERA 256u
/* Apply a sequence's settings to pipeline parameters: its intrinsics (copied into *cam,
 * and p->camera = cam; not with SINEW_RUN_KEEP_CAMERA), depth scale (when > 0), depth kind, and the
 * "run" keys preset, flow_format and match_stride, and its ignore_polarity (flow/sequence.h),
 * except the fields whose bit is set in keep. p->preset may then borrow the sequence's string.
 * ECONFIG "WHERE: run.flow_format: unknown format" for a format sinew_flow_format_parse refuses. */
int sinew_run_pipeline_params_apply_sequence(sinew_ctx *ctx, sinew_run_pipeline_params *p,
                                             struct sinew_camera *cam, const sinew_sequence *seq,
                                             const char *where, unsigned keep);
/* The sequence's "run.schedule" as a schedule: when the sequence has one, *out is set and
 * a list schedule's pairs are allocated on ctx into *list (free with sinew_ctx_dealloc);
 * otherwise *out is left as it is. *list is NULL unless pairs were allocated. */
int sinew_run_schedule_from_sequence(sinew_ctx *ctx, sinew_schedule *out, sinew_pair **list,
                                     const sinew_sequence *seq);

/* ---- stored options (OUTDIR/SINEW_RUN_OPTIONS_FILE, docs/formats.md) -------------
 * The settings that shape a run's outputs, written before its first pair, so that
 * --resume, --merge and later shards reuse them instead of silently recomputing
 * finished pairs with other settings. A key a caller gives again must agree with the
 * stored value; a key it leaves out is taken from the file. */
typedef struct sinew_run_options {
    char preset[32];         /* flow preset name */
    int flow_format;         /* sinew_flow_format */
    int match_stride;        /* pixels; 0 = every kept pixel */
    double depth_scale;      /* 16-bit depth codes per metre */
    double max_dt;           /* colour/depth association tolerance, seconds */
    char schedule[1024];     /* schedule text as given; "" = the sequence's or consecutive */
    char flow_from[4096];    /* folder of imported flows; "" = flows are estimated */
    int ignore_polarity;     /* sinew_ignore_polarity of the ignore masks; 0 = none */
    char intrinsics[4096];   /* --intrinsics as given (a file or fx,fy,cx,cy); "" = none */
    sinew_run_tuning tuning; /* check thresholds and lift rules set away from defaults */
} sinew_run_options;

/* Bits naming the keys of sinew_run_options (the first four and ignore_polarity equal
 * SINEW_RUN_KEEP_*). */
#define SINEW_RUN_OPT_PRESET SINEW_RUN_KEEP_PRESET
#define SINEW_RUN_OPT_FLOW_FORMAT SINEW_RUN_KEEP_FLOW_FORMAT
#define SINEW_RUN_OPT_MATCH_STRIDE SINEW_RUN_KEEP_MATCH_STRIDE
#define SINEW_RUN_OPT_DEPTH_SCALE SINEW_RUN_KEEP_DEPTH_SCALE
#define SINEW_RUN_OPT_SCHEDULE 16u
#define SINEW_RUN_OPT_MAX_DT 32u
#define SINEW_RUN_OPT_FLOW_FROM 64u
#define SINEW_RUN_OPT_IGNORE_POLARITY SINEW_RUN_KEEP_IGNORE_POLARITY
#define SINEW_RUN_OPT_INTRINSICS SINEW_RUN_KEEP_CAMERA
/* Tuning key k (sinew_run_tune) */
#define SINEW_RUN_OPT_TUNE(k) (512u << (k))
#define SINEW_RUN_OPT_ALL 0x3ffffffu

/* Write *o to OUTDIR/SINEW_RUN_OPTIONS_FILE atomically (OUTDIR must exist). ELIMIT for
 * a string that does not fit its field. */
int sinew_run_options_write(sinew_ctx *ctx, const char *outdir, const sinew_run_options *o);
/* Read OUTDIR/SINEW_RUN_OPTIONS_FILE into *o. *found = 0 and SINEW_OK when the file does
 * not exist (a folder from an older sinew, or a new run); EFORMAT naming the file and
 * the key for a file that is not a complete options record. */
int sinew_run_options_read(sinew_ctx *ctx, sinew_run_options *o, int *found, const char *outdir);
/* Unless force is set, compare the keys in `given` of *o with *stored: the first that
 * differs gives ECONFIG "WHERE: KEY is 'STORED' there but 'GIVEN' was given". Then every
 * key not in `given` is copied from *stored into *o, so *o holds the run's options (with
 * force, the given keys replace the stored ones). */
int sinew_run_options_reconcile(sinew_ctx *ctx, sinew_run_options *o,
                                const sinew_run_options *stored, unsigned given, int force,
                                const char *where);

/* The summary numbers of a computed pair, from OUTDIR/pairs/NAME/stats.json as the
 * pipeline writes it; NaN for a number that is missing. */
typedef struct sinew_run_pair_summary {
    double kept_fraction;   /* check.kept_fraction */
    double kept, pixels;    /* check.kept, check.pixels */
    double forward_mean_px; /* forward.mean_length_px */
    double match_rows;      /* matches.rows */
    int lifted;             /* matches.lifted is true */
    double epe;             /* epe (ground truth), NaN without truth */
    double occlusion_f1;    /* occlusion_f1 (ground truth), NaN without truth */
    double match_3d_mm;     /* truth.match_3d_error_mm_median, NaN without */
    double pose_dt_mm;      /* pose_check.translation_error_m in mm, NaN without poses */
    double pose_deg;        /* pose_check.rotation_error_deg, NaN without poses */
} sinew_run_pair_summary;
/* Read a pair's summary; the read or parse error naming the file when stats.json is
 * missing or not JSON (e.g. the pair is pending). */
int sinew_run_pair_summary_read(sinew_ctx *ctx, sinew_run_pair_summary *out, const char *outdir,
                                sinew_pair pair);
/* The warnings of a computed pair (stats.json "warnings": implausible depth, off-centre
 * intrinsics, no intrinsics for depth, few pixels kept), each passed to fn in order; the
 * read error naming the file when stats.json is missing or not JSON. */
int sinew_run_pair_warnings_read(sinew_ctx *ctx, const char *outdir, sinew_pair pair,
                                 void (*fn)(void *ud, const char *warning), void *ud);

/* Imported flows: DIR/NAME/forward.EXT and DIR/NAME/backward.EXT, EXT the first of
 * flo, npy, pfm, png that exists (so a previous run's pairs/ folder can be imported).
 * Paths are written into fwd/bwd (size n); EIO naming the missing file. */
int sinew_run_find_import(sinew_ctx *ctx, char *fwd, char *bwd, size_t n, const char *dir,
                          const char *name);

#ifdef __cplusplus
}
#endif
#endif
