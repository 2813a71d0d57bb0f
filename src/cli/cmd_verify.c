/* fxledger verify: walk the audit chain and run SQLite's integrity and
 * foreign-key checks. */
#include "cli/cli.h"
#include "fxl/audit.h"

int cmd_verify(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    fxl_verify_report r;
    const char *pos[1];
    int npos, rc;

    rc = cli_parse(env, "verify",
                   "Recomputes the SHA-256 hash chain of the audit log from its first row and runs\n"
                   "SQLite's integrity and foreign-key checks. Names the first row that does not\n"
                   "match. Exit 0 when everything holds, 2 when something does not.",
                   opts, argc, argv, pos, 0, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if ((rc = fxl_require_role(env->ctx, FXL_ROLES_ANY, "verify")) != 0)
        return cli_fail(env, rc);
    rc = fxl_audit_verify(env->ctx, &r);
    if (env->json) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddBoolToObject(o, "ok", rc == 0);
        cJSON_AddNumberToObject(o, "rows_checked", (double)r.rows_checked);
        if (r.first_bad_row)
            cJSON_AddNumberToObject(o, "first_bad_row", (double)r.first_bad_row);
        cJSON_AddBoolToObject(o, "integrity_ok", r.integrity_ok);
        cJSON_AddBoolToObject(o, "foreign_keys_ok", r.foreign_keys_ok);
        if (rc != 0)
            cJSON_AddStringToObject(o, "error", fxl_errmsg(env->ctx));
        cli_print_json(o);
        return rc == 0 ? CLI_EXIT_OK : CLI_EXIT_DATA;
    }
    if (rc != 0) {
        cli_error("verification failed: %s", fxl_errmsg(env->ctx));
        return rc == FXL_ECONFLICT ? CLI_EXIT_DATA : cli_exit_code(rc);
    }
    printf("audit chain intact: %lld rows checked; integrity and foreign-key checks passed\n",
           (long long)r.rows_checked);
    return CLI_EXIT_OK;
}
