/* The interactive 'record', field by field from the worklist. Private to
 * src/cli. */
#ifndef FXL_CLI_RECORD_FLOW_H
#define FXL_CLI_RECORD_FLOW_H

#include "cli/cli.h"

typedef struct cli_flow_args {
    const char *patient;        /* NULL: chosen from today's worklist */
    const char *plan;           /* NULL: the patient's active plan */
    int fraction;               /* 0: next (or the open one) */
    const char *treated_at;     /* stored UTC, NULL = now */
    const char *def_detector;   /* offered where a field has no detector yet */
} cli_flow_args;

/* Runs the session; returns the exit code (the worst verdict logged, as
 * 'record' does). */
int cli_record_flow(cli_env *env, const cli_flow_args *a);

#endif
