/* Placeholder until the setting command family lands. */
#include "cli/cli.h"

int cmd_setting(cli_env *env, int argc, char **argv)
{
    (void)env;
    (void)argc;
    (void)argv;
    cli_error("'setting' is not available in this build yet");
    return CLI_EXIT_USAGE;
}
