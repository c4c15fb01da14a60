/* SPDX-License-Identifier: MIT */
/* Shared helpers for the sinew command-line front end: error printing, strict number
 * parsing, the research-use notice. Built only on the public flow/ headers. */
#ifndef SINEW_CLI_H
#define SINEW_CLI_H

#include <signal.h>
#include <stdio.h>

#include "flow/sinew.h"

/* Exit codes: 0 success, 1 runtime failure, 2 usage error. */
enum { CLI_OK = 0, CLI_FAIL = 1, CLI_USAGE = 2 };

/* The notice shown in every --help. */
extern const char cli_notice[];

/* Print "sinew: CMD: message" as one line on stderr (newlines in the message are
 * replaced by spaces). Returns CLI_FAIL. */
int cli_error(const char *cmd, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
/* "sinew: CMD: warning: message", one line on stderr, the same way. */
void cli_warning(const char *cmd, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
/* Same as cli_error with exit code CLI_USAGE and a hint to run --help. */
int cli_usage_error(const char *cmd, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
/* Intrinsics as --intrinsics gives them: the file `arg`, or values "fx,fy,cx,cy[,w,h]"
 * when no such file exists and arg has a comma (sinew_camera_load / sinew_camera_parse);
 * a sinew status. */
int cli_intrinsics_read(sinew_ctx *ctx, sinew_camera *cam, const char *arg);
/* Print the context's message for a failed status (or the generic text). Returns CLI_FAIL. */
int cli_status(const char *cmd, sinew_ctx *ctx, int status);

/* Text from file names on a terminal or in JSON (names are bytes):
 * cli_term_text copies s into buf (size n, truncated) with control bytes (C0, DEL and
 * the C1 range U+0080..U+009F) written as \xHH, so a name cannot drive the terminal;
 * cli_json_string prints s as a JSON string, bytes outside valid UTF-8 as \u00XX
 * (their Latin-1 reading, as every JSON file sinew writes). */
const char *cli_term_text(const char *s, char *buf, size_t n);
void cli_json_string(FILE *f, const char *s);

/* The closest of names (a NULL-terminated list) to `word` by edit distance (insertions,
 * deletions, substitutions and neighbour swaps cost 1), when it is close enough to be a
 * typo: distance <= 2 and under half the word's length; NULL otherwise. */
const char *cli_closest(const char *word, const char *const *names);
/* A getopt_long '?' (opterr = 0) as one usage line: a known option missing its value
 * ("option '--preset' needs a value") or an unknown one with the closest long option
 * ("unknown option '--presett' (did you mean --preset?)"). arg is argv[optind - 1];
 * opts the command's table. Returns CLI_USAGE. */
struct option;
int cli_bad_option(const char *cmd, const struct option *opts, const char *arg);

/* Strict parsers: the whole string must be a number in range; 0 on success. */
int cli_parse_int(const char *s, long min, long max, long *out);
int cli_parse_double(const char *s, double *out);
/* Parse "WxH". */
int cli_parse_size(const char *s, int *w, int *h);

/* Stop requests for long commands. cli_stop_install(cmd, ctx) makes the first SIGINT or
 * SIGTERM set a flag that ctx's long loops read (sinew_ctx_set_cancel), so the command
 * stops at the next safe point; a second one removes the temporary files ctx is
 * writing and the file named by cli_stop_also_remove (e.g. a lock), prints one line
 * "sinew: CMD: stopped at once ..." and exits at once with 128 + the signal number
 * (130 for SIGINT, 143 for SIGTERM).
 * cli_stop_signal() is the first signal received, 0 if none. */
void cli_stop_install(const char *cmd, sinew_ctx *ctx);
/* Another context (a worker's) that reads the same flag and whose temporaries the
 * second signal also removes; NULL forgets them all. At most CLI_STOP_MAX_CTX. */
#define CLI_STOP_MAX_CTX 256
void cli_stop_also_ctx(sinew_ctx *ctx);
/* A path (copied; NULL to forget it) the second signal also unlinks. */
void cli_stop_also_remove(const char *path);
int cli_stop_signal(void);
/* The flag itself (for APIs that take a flag pointer, e.g. sinew_run_spec.cancel). */
const volatile sig_atomic_t *cli_stop_flag(void);

/* Create a context with the thread count from --threads (0 = default); prints on failure. */
sinew_ctx *cli_ctx(const char *cmd, int threads);

#define SINEW_CMD(name, summary) int cmd_##name(int argc, char **argv);
#include "tools/commands.def"
#undef SINEW_CMD

#endif
