/* Placeholder until the levels command family lands. */
#include "cli/cli.h"

int cmd_levels(cli_env *env, int argc, char **argv)
{
    (void)env;
    (void)argc;
    (void)argv;
    cli_error("'levels' is not available in this build yet");
    return CLI_EXIT_USAGE;
}
