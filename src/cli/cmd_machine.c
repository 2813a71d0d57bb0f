/* Placeholder until the machine command family lands. */
#include "cli/cli.h"

int cmd_machine(cli_env *env, int argc, char **argv)
{
    (void)env;
    (void)argc;
    (void)argv;
    cli_error("'machine' is not available in this build yet");
    return CLI_EXIT_USAGE;
}
