/* Placeholder until the table command family lands. */
#include "cli/cli.h"

int cmd_table(cli_env *env, int argc, char **argv)
{
    (void)env;
    (void)argc;
    (void)argv;
    cli_error("'table' is not available in this build yet");
    return CLI_EXIT_USAGE;
}
