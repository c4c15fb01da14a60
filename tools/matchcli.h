/* SPDX-License-Identifier: MIT */
/* Shared implementation of `sinew match` and `sinew lift` (tools/matchcli.c). */
#ifndef SINEW_MATCHCLI_H
#define SINEW_MATCHCLI_H

/* Run the command; lift = 0 for `sinew match`, 1 for `sinew lift`. argv[0] is the
 * command name. Returns the process exit code (0, 1 runtime, 2 usage). */
int matchcli_main(int argc, char **argv, int lift);

#endif
