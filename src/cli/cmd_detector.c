/* Placeholder until the detector command family lands. */
#include "cli/cli.h"

int cmd_detector(cli_env *env, int argc, char **argv)
{
    (void)env;
    (void)argc;
    (void)argv;
    cli_error("'detector' is not available in this build yet");
    return CLI_EXIT_USAGE;
}
