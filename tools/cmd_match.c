/* SPDX-License-Identifier: MIT */
/* `sinew match`: confidence-weighted 2-D matches from a flow field and the check
 * stage's mask and confidence (shared front end in tools/matchcli.c). */
#include "tools/cli.h"
#include "tools/matchcli.h"

int cmd_match(int argc, char **argv)
{
    return matchcli_main(argc, argv, 0);
}
