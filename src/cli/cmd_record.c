/* Placeholder until the record command family lands. */
#include "cli/cli.h"

int cmd_record(cli_env *env, int argc, char **argv)
{
    (void)env;
    (void)argc;
    (void)argv;
    cli_error("'record' is not available in this build yet");
    return CLI_EXIT_USAGE;
}
