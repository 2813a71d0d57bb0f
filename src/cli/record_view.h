/* Showing a logged fraction to the therapist: the verdict table, reasons and
 * guidance, the caveat or the full JSON; the exit code of the worst result;
 * and the alert hook run after the record is committed. Shared by record and
 * amend. */
#ifndef FXL_CLI_RECORD_VIEW_H
#define FXL_CLI_RECORD_VIEW_H

#include "cli/cli.h"
#include "fxl/record.h"

/* CLI_EXIT_ACTION / TOLERANCE / NOT_EVALUABLE for the worst result, else 0. */
int cli_record_exit_code(const fxl_record_result *r);

/* The verdict table, then per result not within tolerance its reasons and
 * guidance, then the caveat. */
void cli_record_print(const cli_env *env, const fxl_record_result *r);

/* Prints the result (table or --json), then runs the alert hook when a
 * result is outside the action level and setting alert_command is set, and
 * audits its outcome. Returns the exit code of the worst result. */
int cli_record_finish(cli_env *env, const fxl_record_result *r);

#endif
