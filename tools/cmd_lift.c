/* SPDX-License-Identifier: MIT */
/* `sinew lift`: matches lifted to 3-D with two depth maps and the intrinsics (shared
 * front end in tools/matchcli.c). */
#include "tools/cli.h"
#include "tools/matchcli.h"

int cmd_lift(int argc, char **argv)
{
    return matchcli_main(argc, argv, 1);
}
