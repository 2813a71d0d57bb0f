/* fxledger today: the worklist of the day - every patient under treatment,
 * in the day list's order, with the next fraction, the fields due and the
 * detector to place on each, warnings, open items and holds on top; and the
 * import of the day list. Shown in 80 columns. docs/worklist.md. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli/cli.h"
#include "cli/table.h"
#include "cli/worklist_view.h"
#include "fxl/fraction.h"
#include "fxl/worklist.h"

#define SYNOPSIS "today [--at TIME] [--day-list FILE]"
#define ABOUT                                                                                 \
    "Today's worklist: every patient under treatment today (latest plan not replaced,\n"      \
    "fractions still to give), in the order of the day list when one is imported, with\n"    \
    "the next fraction, the fields due for measurement by their policy, the detector to\n"    \
    "place on each and where, warnings, and open review items with holds on top.\n"          \
    "--day-list imports the record-and-verify export first (docs/format-daylist.md).\n"      \
    "--at shows another day: a local time in the department's zone or ISO 8601 with\n"       \
    "an offset. 'fxledger record' without --patient logs from this list."

static cli_opt opts_template[] = {
    {"at", "TIME", "the day to show (default: now), local or with an offset", NULL},
    {"day-list", "FILE", "import this day list (CSV or JSON) first", NULL},
    {NULL, NULL, NULL, NULL}};

int cmd_today(cli_env *env, int argc, char **argv)
{
    cli_opt opts[sizeof opts_template / sizeof opts_template[0]];
    fxl_worklist w = FXL_WORKLIST_INIT;
    fxl_daylist_result dl;
    const char *pos[1], *at_text, *file;
    char at[FXL_TIME_LEN];
    int npos, rc, code = CLI_EXIT_OK;

    memcpy(opts, opts_template, sizeof opts);
    rc = cli_parse(env, SYNOPSIS, ABOUT, opts, argc, argv, pos, 0, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    at_text = cli_get(opts, "at");
    file = cli_get(opts, "day-list");
    if (at_text && (rc = fxl_time_parse_local(env->ctx, at, at_text)) != 0)
        return cli_fail(env, rc);
    if (file) {
        if ((rc = fxl_daylist_import_file(env->ctx, &dl, file, at_text ? at : NULL)) != 0)
            return cli_fail(env, rc);
        if (!env->json)
            printf("Day list for %s imported: %zu patient%s%s.\n\n", dl.date, dl.n_lines,
                   dl.n_lines == 1 ? "" : "s",
                   dl.n_unmatched ? " (some have no active course: see below)" : "");
    }
    if ((rc = fxl_worklist_build(env->ctx, &w, at_text ? at : NULL)) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *j = fxl_worklist_json(&w);
        code = j ? cli_print_json(j) : CLI_EXIT_DB;
    } else {
        cli_worklist_print(env, &w);
    }
    fxl_worklist_release(&w);
    return code;
}
