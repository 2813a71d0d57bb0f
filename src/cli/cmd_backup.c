/* fxledger backup: an online copy of the database into a new file. */
#include "cli/cli.h"
#include "fxl/backup.h"

int cmd_backup(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    fxl_backup_report r;
    const char *pos[1];
    int npos, rc;

    rc = cli_parse(env, "backup FILE",
                   "Copies the database, while it stays in use, into FILE (which must not exist)\n"
                   "through SQLite's online backup API: one consistent snapshot, copied in steps,\n"
                   "checked with SQLite's quick_check and verified (fxledger verify) under a\n"
                   "temporary name before it takes the name FILE: a failed or killed backup leaves\n"
                   "no file under that name. Other users may keep logging meanwhile.\n"
                   "The backup is recorded in the audit log. Physicist, admin or auditor\n"
                   "(the scheduled backup logs in as an auditor account: docs/deployment.md).",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("backup needs the name of a new file (see 'fxledger backup --help')");
        return CLI_EXIT_USAGE;
    }
    if ((rc = fxl_backup(env->ctx, &r, pos[0])) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "file", pos[0]);
        cJSON_AddNumberToObject(o, "pages", r.pages);
        cJSON_AddNumberToObject(o, "steps", r.steps);
        cJSON_AddNumberToObject(o, "busy_waits", r.busy_waits);
        cJSON_AddNumberToObject(o, "audit_rows", (double)r.audit_rows);
        cJSON_AddBoolToObject(o, "quick_check_ok", 1);
        cJSON_AddBoolToObject(o, "verified", 1);
        return cli_print_json(o);
    }
    printf("backup written to %s: %d pages in %d steps, %lld audit rows; quick_check ok, verified\n"
           "check it any time with: fxledger --db %s verify\n",
           pos[0], r.pages, r.steps, (long long)r.audit_rows, pos[0]);
    return CLI_EXIT_OK;
}
