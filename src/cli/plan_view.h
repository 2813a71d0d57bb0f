/* Showing plans: the JSON objects of a plan and its fields, and the lines
 * that report each field's independent-model value and cross-check after an
 * import and in 'plan show'. Shared by the plan sub-commands. */
#ifndef FXL_CLI_PLAN_VIEW_H
#define FXL_CLI_PLAN_VIEW_H

#include "cli/cli.h"
#include "fxl/plans.h"

cJSON *cli_plan_json(const fxl_plan *p);
/* Every parameter of a field row, with "model" (the stored factors) and
 * "crosscheck" (outcome, deviation, level, summary, review item). */
cJSON *cli_field_json(const fxl_field *f);
/* The plan object with its "fields" array. */
cJSON *cli_plan_with_fields_json(const fxl_plan *p);

/* After an import: one line per field row with its expected dose and the
 * model's value and cross-check, then a count by outcome. */
void cli_plan_print_import(const fxl_plan *p);

/* For 'plan show': the model and factor lines of one field row. */
void cli_plan_print_model(const fxl_field *f);

/* Runs 'plan import-dicom' (cmd_plan_dicom.c). */
int cli_plan_import_dicom(cli_env *env, int argc, char **argv);

#endif
