/* fxledger report: write the per-patient and the monthly PDF summaries. The
 * command table opens the database read-only for this family. */
#include <string.h>

#include "cli/cli.h"
#include "fxl/outfile.h"
#include "fxl/report.h"

static const char *const generated_help =
    "fix the generation time printed on every page (UTC, YYYY-MM-DD or "
    "YYYY-MM-DDTHH:MM[:SS]Z); the same database and time give a byte-identical file";

/* --generated-at, else fxl_now() (the clock; FXLEDGER_NOW in the test build). */
static int generation_time(char out[FXL_TIME_LEN], const char *given)
{
    if (!given)
        return 0;
    if (fxl_time_normalize(out, given, 0) != 0) {
        cli_error("generation time '%s' must be YYYY-MM-DD or YYYY-MM-DDTHH:MM[:SS]Z (UTC)", given);
        return -1;
    }
    return 1;
}

static int check_out(const char *out)
{
    if (!out || !*out) {
        cli_error("--out FILE is required (the PDF to write)");
        return -1;
    }
    return 0;
}

static int print_result(cli_env *env, const char *kind, const char *subject, const char *path,
                        const fxl_report_result *r)
{
    if (env->json) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "report", kind);
        cJSON_AddStringToObject(o, "subject", subject);
        cJSON_AddStringToObject(o, "file", path);
        cJSON_AddNumberToObject(o, "pages", r->pages);
        cJSON_AddNumberToObject(o, "measurements", (double)r->measurements);
        cJSON_AddBoolToObject(o, "empty", r->empty);
        cJSON_AddStringToObject(o, "timezone", r->timezone);
        if (r->from[0]) {
            cJSON_AddStringToObject(o, "from_utc", r->from);
            cJSON_AddStringToObject(o, "to_utc", r->to);
        }
        return cli_print_json(o);
    }
    printf("wrote %s: %s report for %s, %d page%s, %lld measurement%s%s\n", path, kind, subject,
           r->pages, r->pages == 1 ? "" : "s", (long long)r->measurements,
           r->measurements == 1 ? "" : "s", r->empty ? " (no data: the report says so)" : "");
    return CLI_EXIT_OK;
}

static int sub_patient(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"out", "FILE", "PDF file to write (must not exist; see --force)", NULL},
        {"force", NULL, "replace an existing regular file (never a database, directory or device)", NULL},
        {"plan", "LABEL", "report only this plan of the patient (default: every plan)", NULL},
        {"generated-at", "DATETIME", generated_help, NULL},
        {NULL, NULL, NULL, NULL}};
    fxl_report_options opt = FXL_REPORT_OPTIONS_INIT;
    fxl_report_result res;
    char when[FXL_TIME_LEN];
    const char *pos[1];
    int npos, rc;

    rc = cli_parse(env, "report patient MRN --out FILE.pdf [--force] [--plan LABEL] [--generated-at DATETIME]",
                   "Writes the in vivo dosimetry record of one patient: plans, every measurement\n"
                   "(superseded readings struck through), summary statistics, a chart of\n"
                   "deviation against fraction per field with the tolerance and action bands,\n"
                   "and signature lines for the reviewing physicist. A4 landscape. A patient\n"
                   "without measurements gets a page that says so. Reads the database only.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1 || !*pos[0]) {
        cli_error("patient ID is required: fxledger report patient MRN --out FILE.pdf");
        return CLI_EXIT_USAGE;
    }
    if (check_out(cli_get(opts, "out")) != 0)
        return CLI_EXIT_USAGE;
    if ((rc = generation_time(when, cli_get(opts, "generated-at"))) < 0)
        return CLI_EXIT_USAGE;
    if (rc > 0)
        opt.generated_at = when;
    if ((rc = fxl_require_role(env->ctx, FXL_ROLES_ANY, "writing a report")) != 0)
        return cli_fail(env, rc);
    opt.force = cli_get(opts, "force") != NULL;
    if ((rc = fxl_outfile_check(env->ctx, cli_get(opts, "out"), opt.force ? FXL_OUT_FORCE : 0)) != 0)
        return cli_fail(env, rc);
    rc = fxl_report_patient(env->ctx, &res, cli_get(opts, "out"), pos[0], cli_get(opts, "plan"), &opt);
    if (rc != 0)
        return cli_fail(env, rc);
    return print_result(env, "patient", pos[0], cli_get(opts, "out"), &res);
}

static int sub_month(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"out", "FILE", "PDF file to write (must not exist; see --force)", NULL},
        {"force", NULL, "replace an existing regular file (never a database, directory or device)", NULL},
        {"generated-at", "DATETIME", generated_help, NULL},
        {NULL, NULL, NULL, NULL}};
    fxl_report_options opt = FXL_REPORT_OPTIONS_INIT;
    fxl_report_result res;
    char when[FXL_TIME_LEN];
    const char *pos[1];
    int npos, rc;

    rc = cli_parse(env, "report month YYYY-MM --out FILE.pdf [--force] [--generated-at DATETIME]",
                   "Writes the departmental summary of one calendar month in the department's\n"
                   "time zone (setting 'timezone'): counts and rates per verdict overall, by\n"
                   "site and technique, by energy and by detector; a histogram of deviations\n"
                   "with the bands; every action-level event with its disposition; queue items\n"
                   "still open; calibrations done, due and overdue; detectors near their\n"
                   "accumulated-dose limit. A4 portrait. Reads the database only.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("month is required: fxledger report month YYYY-MM --out FILE.pdf");
        return CLI_EXIT_USAGE;
    }
    if (check_out(cli_get(opts, "out")) != 0)
        return CLI_EXIT_USAGE;
    if ((rc = generation_time(when, cli_get(opts, "generated-at"))) < 0)
        return CLI_EXIT_USAGE;
    if (rc > 0)
        opt.generated_at = when;
    if ((rc = fxl_require_role(env->ctx, FXL_ROLES_ANY, "writing a report")) != 0)
        return cli_fail(env, rc);
    opt.force = cli_get(opts, "force") != NULL;
    if ((rc = fxl_outfile_check(env->ctx, cli_get(opts, "out"), opt.force ? FXL_OUT_FORCE : 0)) != 0)
        return cli_fail(env, rc);
    rc = fxl_report_month(env->ctx, &res, cli_get(opts, "out"), pos[0], &opt);
    if (rc != 0)
        return cli_fail(env, rc);
    return print_result(env, "monthly", pos[0], cli_get(opts, "out"), &res);
}

int cmd_report(cli_env *env, int argc, char **argv)
{
    static const cli_sub subs[] = {
        {"patient", sub_patient, "write the PDF record of one patient's in vivo results"},
        {"month", sub_month, "write the PDF summary of one calendar month"},
        {NULL, NULL, NULL}};

    return cli_dispatch_sub(env, subs,
                            "Writes PDF reports. Any role may run them; they never change the database.",
                            argc, argv);
}
