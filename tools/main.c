/* SPDX-License-Identifier: MIT */
/* sinew: the command-line front end. Dispatches to one function per subcommand
 * (tools/cmd_*.c), listed in tools/commands.def. */
#include <signal.h>
#include <stdio.h>
#include <string.h>

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

int main(int argc, char **argv)
{
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
    return cli_usage_error("", "unknown command '%s'", name);
}
