/* Showing the worklist and the open items of a patient at the console, in
 * 80 columns: holds first and marked, then the other open items. Shared by
 * today and record. No SQL, no physics. */
#ifndef FXL_CLI_WORKLIST_VIEW_H
#define FXL_CLI_WORKLIST_VIEW_H

#include "cli/cli.h"
#include "fxl/worklist.h"

/* The whole worklist (header, one block per patient). */
void cli_worklist_print(const cli_env *env, const fxl_worklist *w);

/* The open items of one patient and its detectors, holds first, each as a
 * wrapped paragraph after `indent` spaces; nothing when n is 0. */
void cli_items_print(const cli_env *env, FILE *out, const fxl_worklist_item *items, size_t n,
                     int indent);

/* "HH:MM" of a stored time in the department's zone ("" for ""). */
void cli_local_hhmm(const cli_env *env, char out[16], const char *stored);

#endif
