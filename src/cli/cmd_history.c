/* Placeholder until the history command family lands. */
#include "cli/cli.h"

int cmd_history(cli_env *env, int argc, char **argv)
{
    (void)env;
    (void)argc;
    (void)argv;
    cli_error("'history' is not available in this build yet");
    return CLI_EXIT_USAGE;
}
