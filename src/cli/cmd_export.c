/* fxledger export: the measurement record (every column, current and
 * superseded rows, who recorded them, every review event with who made it)
 * as RFC 4180 CSV or JSON, filtered by period, patient and detector.
 * docs/export.md. Reads the database only. */
#include <stdio.h>
#include <string.h>

#include "cli/cli.h"
#include "fxl/export.h"
#include "fxl/outfile.h"
#include "fxl/report.h"

static int stop_at_header(void *arg, size_t ncols, const char *const *names)
{
    (void)arg;
    (void)ncols;
    (void)names;
    return 1;
}

static int sub_measurements(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"format", "csv|json", "output format (default csv; --json selects json)", NULL},
        {"out", "FILE", "write to FILE (created 0600; must not exist, see --force) instead of stdout", NULL},
        {"force", NULL, "replace an existing regular file (never a database, directory or device)", NULL},
        {"month", "YYYY-MM", "only fractions treated in this month (department time zone)", NULL},
        {"from", "YYYY-MM-DD", "only fractions treated from this local day (with --to)", NULL},
        {"to", "YYYY-MM-DD", "... to this local day, inclusive", NULL},
        {"patient", "MRN", "only this patient", NULL},
        {"detector", "SERIAL", "only this detector", NULL},
        {NULL, NULL, NULL, NULL}};
    fxl_export_filter f = {NULL, NULL, NULL, NULL};
    fxl_export_format format = env->json ? FXL_EXPORT_JSON : FXL_EXPORT_CSV;
    fxl_report_period per;
    fxl_outfile of = FXL_OUTFILE_INIT;
    int oflags = 0;
    char now[FXL_TIME_LEN];
    const char *fmt, *out;
    size_t rows = 0;
    int npos, rc;

    rc = cli_parse(env, "export measurements [--format csv|json] [--out FILE [--force]] [--month YYYY-MM | "
                        "--from DAY --to DAY] [--patient MRN] [--detector SERIAL]",
                   "Exports the measurement record: every column of every measurement, current\n"
                   "and superseded (with the row that supersedes it and the reason), the patient,\n"
                   "plan, fraction, field and detector, who recorded it, and every review event on\n"
                   "it with who made it, when, the disposition and the comment. CSV follows RFC\n"
                   "4180 (UTF-8, CRLF, header row); JSON is one document with typed values.\n"
                   "Any role may run it; it reads the database only.",
                   opts, argc, argv, NULL, 0, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    fmt = cli_get(opts, "format");
    if (fmt) {
        if (strcmp(fmt, "csv") == 0 && !env->json)
            format = FXL_EXPORT_CSV;
        else if (strcmp(fmt, "json") == 0)
            format = FXL_EXPORT_JSON;
        else {
            cli_error("format '%s' must be csv or json%s", fmt,
                      env->json ? " (--json asks for json)" : "");
            return CLI_EXIT_USAGE;
        }
    }
    if ((rc = fxl_require_role(env->ctx, FXL_ROLES_ANY, "exporting measurements")) != 0)
        return cli_fail(env, rc);
    oflags = cli_get(opts, "force") ? FXL_OUT_FORCE : 0;
    if (cli_get(opts, "out") && (rc = fxl_outfile_check(env->ctx, cli_get(opts, "out"), oflags)) != 0)
        return cli_fail(env, rc);
    if (cli_get(opts, "month") || cli_get(opts, "from") || cli_get(opts, "to")) {
        if ((rc = fxl_report_period_resolve(env->ctx, &per, cli_get(opts, "month"),
                                            cli_get(opts, "from"), cli_get(opts, "to"))) != 0)
            return cli_fail(env, rc);
        f.from = per.from;
        f.to = per.to;
    }
    f.mrn = cli_get(opts, "patient");
    f.detector = cli_get(opts, "detector");
    fxl_now(env->ctx, now);
    out = cli_get(opts, "out");
    if (!out) {
        rc = fxl_export_write(env->ctx, stdout, format, &f, now, &rows);
        return rc ? cli_fail(env, rc) : CLI_EXIT_OK;
    }
    /* an unknown patient or detector is refused before anything is created */
    if ((rc = fxl_export_measurements(env->ctx, &f, stop_at_header, NULL, NULL)) < 0)
        return cli_fail(env, rc);
    if ((rc = fxl_outfile_open(&of, env->ctx, out, oflags)) == 0 &&
        (rc = fxl_export_write(env->ctx, of.fp, format, &f, now, &rows)) == 0)
        rc = fxl_outfile_commit(&of, env->ctx);
    fxl_outfile_abort(&of);
    if (rc != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "file", out);
        cJSON_AddStringToObject(o, "format", format == FXL_EXPORT_CSV ? "csv" : "json");
        cJSON_AddNumberToObject(o, "rows", (double)rows);
        return cli_print_json(o);
    }
    printf("wrote %s: %zu measurement%s (%s)\n", out, rows, rows == 1 ? "" : "s",
           format == FXL_EXPORT_CSV ? "CSV" : "JSON");
    return CLI_EXIT_OK;
}

int cmd_export(cli_env *env, int argc, char **argv)
{
    static const cli_sub subs[] = {
        {"measurements", sub_measurements, "export the measurement record as CSV or JSON"},
        {NULL, NULL, NULL}};

    return cli_dispatch_sub(env, subs, "Exports the record. Any role may run it; it never "
                            "changes the database.", argc, argv);
}
