/* PLACEHOLDER until the command lands: refuses with a clear message. */
#include "cli/commands.h"

#include <stdio.h>

int cmd_report(int argc, char **argv)
{
    (void)argc;
    (void)argv;
    fputs("spume: this command is not part of this build yet\n", stderr);
    return 2;
}
