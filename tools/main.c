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

/* Settings that the OpenMP runtime and the C library read only when the process
 * starts (before main), so the process re-executes itself once with them set in its
 * environment (same pid; about 5 ms on the project's 2-core benchmark VM); if that
 * fails it simply goes on. Each is left alone when the user chose it.
 *
 * - Threads that wait at a barrier sleep instead of spinning (OMP_WAIT_POLICY=passive,
 *   unless OMP_WAIT_POLICY or GOMP_SPINCOUNT is set). With the OpenMP runtime's default
 *   spinning, a thread waiting for a descheduled peer burns the core that peer needs:
 *   with 2 competing busy processes on 2 cores, `sinew flow --preset fast` took
 *   0.4-2.5 s spinning against 0.04-0.05 s passive (docs/benchmarks.md, wait policy).
 * - The heap is backed by 2 MiB pages where the kernel offers them on request
 *   (transparent huge pages in "madvise" mode; glibc's glibc.malloc.hugetlb=1 tunable,
 *   unless GLIBC_TUNABLES already names it). A fresh process touches every plane for
 *   the first time, and each 4 KiB page fault costs about 6 us on that VM: `sinew flow
 *   --preset fast` on a 640x480 pair took 4050 faults, 700 with the tunable, and 25 ms
 *   less (docs/benchmarks.md, start-up). Older C libraries ignore the name. */
static void start_settings(char **argv)
{
    int again = 0;
#ifdef _OPENMP
    if (!getenv("OMP_WAIT_POLICY") && !getenv("GOMP_SPINCOUNT")) {
        if (setenv("OMP_WAIT_POLICY", "passive", 1) != 0)
            return;
        again = 1;
    }
#endif
#if defined(__GLIBC__)
    const char *tun = getenv("GLIBC_TUNABLES");
    if (!tun || !strstr(tun, "glibc.malloc.hugetlb")) {
        static const char thp[] = "glibc.malloc.hugetlb=1";
        char buf[1024];
        int n = tun && *tun ? snprintf(buf, sizeof buf, "%s:%s", tun, thp)
                            : snprintf(buf, sizeof buf, "%s", thp);
        if (n > 0 && (size_t)n < sizeof buf && setenv("GLIBC_TUNABLES", buf, 1) == 0)
            again = 1;
    }
#endif
    if (again)
        execv("/proc/self/exe", argv);
}

/* Freed planes stay with the process for the next pair instead of going back to the
 * system and coming back as fresh zero pages: glibc serves blocks of 32 MiB and less
 * from its heap (not one mmap each) and keeps up to 512 MiB of freed heap (the default
 * trims above 128 KiB). Peak memory is unchanged (freed blocks are reused, not added);
 * `sinew run --preset fast` on the 640x480 demo scene, one thread: 71k -> 15k page
 * faults, 2.75 -> 2.1 s CPU for 12 pairs (docs/benchmarks.md). All threads share that
 * one heap (M_ARENA_MAX 1): `run --jobs` workers otherwise get per-thread arenas, which
 * hand whole freed sub-heaps back to the system after every pair (and get no huge
 * pages): `sinew run --preset fast` at 1280x1024, 2 jobs, 4 pairs: 117k -> 1k page
 * faults. The workers allocate a few large blocks per pair, so sharing costs nothing
 * measurable. */
static void malloc_policy(void)
{
#if defined(__GLIBC__)
    mallopt(M_MMAP_THRESHOLD, 32 << 20);
    mallopt(M_TRIM_THRESHOLD, 512 << 20);
    mallopt(M_ARENA_MAX, 1);
#endif
}

int main(int argc, char **argv)
{
    start_settings(argv);
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
