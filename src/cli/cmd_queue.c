/* Placeholder until the queue command family lands. */
#include "cli/cli.h"

int cmd_queue(cli_env *env, int argc, char **argv)
{
    (void)env;
    (void)argc;
    (void)argv;
    cli_error("'queue' is not available in this build yet");
    return CLI_EXIT_USAGE;
}
