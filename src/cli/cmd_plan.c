/* Placeholder until the plan command family lands. */
#include "cli/cli.h"

int cmd_plan(cli_env *env, int argc, char **argv)
{
    (void)env;
    (void)argc;
    (void)argv;
    cli_error("'plan' is not available in this build yet");
    return CLI_EXIT_USAGE;
}
