/* Placeholder until the amend command family lands. */
#include "cli/cli.h"

int cmd_amend(cli_env *env, int argc, char **argv)
{
    (void)env;
    (void)argc;
    (void)argv;
    cli_error("'amend' is not available in this build yet");
    return CLI_EXIT_USAGE;
}
