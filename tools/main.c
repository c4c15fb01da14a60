/* SPDX-License-Identifier: MIT */
/* sinew: the command-line front end. Dispatches to one function per subcommand
 * (tools/cmd_*.c), listed in tools/commands.def. */
#define _POSIX_C_SOURCE 200809L
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#if defined(__GLIBC__)
#include <malloc.h>
#endif

#include "tools/cli.h"

typedef struct {
    const char *name;
    int (*fn)(int, char **);
    const char *summary;
} command;

static const command commands[] = {
#define SINEW_CMD(name, summary) {#name, cmd_##name, summary},
#include "tools/commands.def"
#undef SINEW_CMD
    {NULL, NULL, NULL},
};

static void usage(FILE *out)
{
    fprintf(out, "usage: sinew COMMAND [OPTIONS]\n"
                 "\n"
                 "Dense frame-to-frame correspondences for non-rigid RGB-D tracking, on the CPU:\n"
                 "optical flow both ways, consistency and occlusion checks, confidence, 2-D and\n"
                 "lifted 3-D matches, scores against ground truth, pictures.\n"
                 "\n"
                 "commands:\n");
    for (size_t i = 0; commands[i].name; i++)
        fprintf(out, "  %-10s %s\n", commands[i].name, commands[i].summary);
    fprintf(out,
            "\n"
            "Run 'sinew COMMAND --help' for a command's options and examples.\n"
            "  sinew --version   print the version\n"
            "\n%s",
            cli_notice);
}

/* Threads that wait at a barrier sleep instead of spinning (OMP_WAIT_POLICY=passive),
 * unless the user chose a policy (OMP_WAIT_POLICY or GOMP_SPINCOUNT). With the OpenMP
 * runtime's default spinning, a thread waiting for a descheduled peer burns the core
 * that peer needs: on this project's 2-core benchmark machine with 2 competing busy
 * processes, `sinew flow --preset fast` took 0.4-2.5 s spinning against 0.04-0.05 s
 * passive (docs/benchmarks.md, whole commands). The runtime reads the variable once
 * when it is loaded, before main, so the process re-executes itself once with it set
 * (same pid, about a millisecond); if that fails it simply goes on. Only the
 * OpenMP build has a runtime to tell. */
static void wait_policy(char **argv)
{
#ifdef _OPENMP
    if (getenv("OMP_WAIT_POLICY") || getenv("GOMP_SPINCOUNT"))
        return;
    if (setenv("OMP_WAIT_POLICY", "passive", 1) == 0)
        execv("/proc/self/exe", argv);
#else
    (void)argv;
#endif
}

/* Freed planes stay with the process for the next pair instead of going back to the
 * system and coming back as fresh zero pages: glibc serves blocks of 32 MiB and less
 * from its heap (not one mmap each) and keeps up to 512 MiB of freed heap (the default
 * trims above 128 KiB). Peak memory is unchanged (freed blocks are reused, not added);
 * `sinew run --preset fast` on the 640x480 demo scene, one thread: 71k -> 15k page
 * faults, 2.75 -> 2.1 s CPU for 12 pairs (docs/benchmarks.md). */
static void malloc_policy(void)
{
#if defined(__GLIBC__)
    mallopt(M_MMAP_THRESHOLD, 32 << 20);
    mallopt(M_TRIM_THRESHOLD, 512 << 20);
#endif
}

int main(int argc, char **argv)
{
    wait_policy(argv);
    malloc_policy();
    /* A file-size limit (ulimit -f) must surface as a write error with a message, not
     * kill the process with SIGXFSZ halfway through an output. */
    signal(SIGXFSZ, SIG_IGN);
    if (argc < 2) {
        usage(stderr);
        return CLI_USAGE;
    }
    const char *name = argv[1];
    if (!strcmp(name, "--help") || !strcmp(name, "-h") || !strcmp(name, "help")) {
        usage(stdout);
        return CLI_OK;
    }
    if (!strcmp(name, "--version") || !strcmp(name, "version")) {
        printf("sinew %s\n", SINEW_VERSION_STRING);
        return CLI_OK;
    }
    for (size_t i = 0; commands[i].name; i++)
        if (!strcmp(name, commands[i].name))
            return commands[i].fn(argc - 1, argv + 1);
    const char *names[sizeof commands / sizeof commands[0]];
    for (size_t i = 0; i < sizeof commands / sizeof commands[0]; i++)
        names[i] = commands[i].name;
    const char *c = cli_closest(name, names);
    if (c)
        return cli_usage_error("", "unknown command '%s' (did you mean '%s'?)", name, c);
    return cli_usage_error("", "unknown command '%s'", name);
}
