/* Placeholder until the calib command family lands. */
#include "cli/cli.h"

int cmd_calib(cli_env *env, int argc, char **argv)
{
    (void)env;
    (void)argc;
    (void)argv;
    cli_error("'calib' is not available in this build yet");
    return CLI_EXIT_USAGE;
}
