/* The alert hook: a department's shell command run when a logged fraction has
 * a result outside the action level, with the results as JSON on its standard
 * input and a time limit. The record is committed before the hook runs; the
 * hook's outcome is audited afterwards. docs/record.md, "Alert hook". */
#ifndef FXL_CLI_ALERT_H
#define FXL_CLI_ALERT_H

#include "fxl/record.h"

#include <stddef.h>

/* Runs `command` through /bin/sh -c in its own process group with `input`
 * on its standard input. Its standard output and standard error never reach
 * the terminal directly: they are captured into said[said_size] (NUL
 * terminated, raw bytes; *said_more set when more was written and dropped),
 * for the caller to show made printable. After timeout_s seconds the whole
 * group is stopped (SIGTERM, then SIGKILL). Never blocks longer than about
 * timeout_s + 1 s, whatever the command does. *exit_code is the exit status,
 * or minus the signal number when the command died by a signal. said may be
 * NULL (output dropped); said_more may be NULL. */
void cli_alert_run(fxl_alert_outcome *outcome, int *exit_code, const char *command,
                   const char *input, int timeout_s, char *said, size_t said_size, int *said_more);

#endif
