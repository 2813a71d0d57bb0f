/* Placeholder until the backup command family lands. */
#include "cli/cli.h"

int cmd_backup(cli_env *env, int argc, char **argv)
{
    (void)env;
    (void)argc;
    (void)argv;
    cli_error("'backup' is not available in this build yet");
    return CLI_EXIT_USAGE;
}
