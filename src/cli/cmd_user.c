/* Placeholder until the user command family lands. */
#include "cli/cli.h"

int cmd_user(cli_env *env, int argc, char **argv)
{
    (void)env;
    (void)argc;
    (void)argv;
    cli_error("'user' is not available in this build yet");
    return CLI_EXIT_USAGE;
}
