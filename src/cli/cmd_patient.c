/* Placeholder until the patient command family lands. */
#include "cli/cli.h"

int cmd_patient(cli_env *env, int argc, char **argv)
{
    (void)env;
    (void)argc;
    (void)argv;
    cli_error("'patient' is not available in this build yet");
    return CLI_EXIT_USAGE;
}
