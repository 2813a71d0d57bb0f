/* Showing a logged fraction to the therapist: the verdict table, reasons and
 * guidance, the caveat or the full JSON; the exit code of the worst result;
 * and the alert hook run after the record is committed. Shared by record and
 * amend. */
#ifndef FXL_CLI_RECORD_VIEW_H
#define FXL_CLI_RECORD_VIEW_H

#include "cli/cli.h"
#include "fxl/record.h"
#include "fxl/worklist.h"

/* The verdict in at most 13 characters for tables ("within tol.", "ACTION LEVEL"). */
const char *cli_verdict_short(fxl_verdict v);

/* CLI_EXIT_ACTION / TOLERANCE / NOT_EVALUABLE for the worst result, else 0. */
int cli_record_exit_code(const fxl_record_result *r);

/* The verdict table (80 columns), then per result not within tolerance its
 * reasons and guidance, the patient's open items and holds beside them, the
 * overall guidance (never "continue as planned" while a hold is open), then
 * the caveat. cli_record_print loads the open items itself. */
void cli_record_print(const cli_env *env, const fxl_record_result *r);
void cli_record_print_with(const cli_env *env, const fxl_record_result *r,
                           const fxl_worklist_item *items, size_t n_items);

/* "Not measured: AP entrance was due (...) ... review item #N" for every due
 * field the fraction was logged without (options form), and the same as a
 * JSON array of {field, point, due_reason, review_item_id}. */
void cli_record_print_missing(FILE *out, const fxl_record_result *r);
cJSON *cli_record_missing_json(const fxl_record_result *r);

/* The verdict of one field as soon as it is logged: deviation, label,
 * reasons, what to do (or the hold that stays open), review item. */
void cli_record_field_verdict(const cli_env *env, const fxl_measurement_result *m,
                              const fxl_worklist_item *items, size_t n_items);

/* Runs the alert hook when a result is outside the action level and
 * setting alert_command is set; audits its outcome. */
void cli_record_alert(cli_env *env, const fxl_record_result *r);

/* Prints the result (table or --json), then runs the alert hook when a
 * result is outside the action level and setting alert_command is set, and
 * audits its outcome. Returns the exit code of the worst result. */
int cli_record_finish(cli_env *env, const fxl_record_result *r);

/* Names the committed fraction and its measurement ids in env->saved, so
 * that an output failure afterwards (stdout on a full disk) says it was
 * saved instead of leaving it to be logged twice. */
void cli_record_note_saved(cli_env *env, const fxl_record_result *r);

#endif
