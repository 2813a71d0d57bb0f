/* Placeholder until the report command family lands. */
#include "cli/cli.h"

int cmd_report(cli_env *env, int argc, char **argv)
{
    (void)env;
    (void)argc;
    (void)argv;
    cli_error("'report' is not available in this build yet");
    return CLI_EXIT_USAGE;
}
