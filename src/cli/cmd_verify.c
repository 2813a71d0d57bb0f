/* fxledger verify: walk the audit chain, run SQLite's integrity and
 * foreign-key checks, and check every electronic signature. */
#include "cli/cli.h"
#include "fxl/audit.h"
#include "fxl/auth.h"

int cmd_verify(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    fxl_verify_report r;
    fxl_signature_report sr;
    const char *pos[1];
    char chain_msg[512] = "";
    int npos, rc, src;

    rc = cli_parse(env, "verify",
                   "Recomputes the SHA-256 hash chain of the audit log from its first row, runs\n"
                   "SQLite's integrity and foreign-key checks, and checks every electronic\n"
                   "signature against its signer's public key (as the audit chain recorded it)\n"
                   "over the signed row as it is now; a row that must be signed but is not is a\n"
                   "failure too. Names the first row that does not match. Exit 0 when everything\n"
                   "holds, 2 when something does not.",
                   opts, argc, argv, pos, 0, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if ((rc = fxl_require_role(env->ctx, FXL_ROLES_ANY, "verify")) != 0)
        return cli_fail(env, rc);
    rc = fxl_audit_verify(env->ctx, &r);
    if (rc != 0)
        snprintf(chain_msg, sizeof chain_msg, "%s", fxl_errmsg(env->ctx));
    src = fxl_signature_verify(env->ctx, &sr);
    if (env->json) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddBoolToObject(o, "ok", rc == 0 && src == 0);
        cJSON_AddNumberToObject(o, "rows_checked", (double)r.rows_checked);
        if (r.first_bad_row)
            cJSON_AddNumberToObject(o, "first_bad_row", (double)r.first_bad_row);
        cJSON_AddBoolToObject(o, "integrity_ok", r.integrity_ok);
        cJSON_AddBoolToObject(o, "foreign_keys_ok", r.foreign_keys_ok);
        cJSON_AddNumberToObject(o, "signatures_checked", (double)sr.checked);
        cJSON_AddBoolToObject(o, "signatures_ok", src == 0);
        if (src != 0)
            cJSON_AddStringToObject(o, "signature_error", src == FXL_ECONFLICT ? sr.first_bad : fxl_errmsg(env->ctx));
        if (rc != 0)
            cJSON_AddStringToObject(o, "error", chain_msg);
        else if (src != 0)
            cJSON_AddStringToObject(o, "error", fxl_errmsg(env->ctx));
        cli_print_json(o);
        return rc == 0 && src == 0 ? CLI_EXIT_OK : CLI_EXIT_DATA;
    }
    if (rc != 0) {
        cli_error("verification failed: %s", chain_msg);
        if (src != 0)
            cli_error("signature check failed: %s", fxl_errmsg(env->ctx));
        return rc == FXL_ECONFLICT ? CLI_EXIT_DATA : cli_exit_code(rc);
    }
    if (src != 0) {
        cli_error("verification failed: %s", fxl_errmsg(env->ctx));
        return src == FXL_ECONFLICT ? CLI_EXIT_DATA : cli_exit_code(src);
    }
    printf("audit chain intact: %lld rows checked; integrity and foreign-key checks passed; "
           "%lld signature%s verified\n",
           (long long)r.rows_checked, (long long)sr.checked, sr.checked == 1 ? "" : "s");
    return CLI_EXIT_OK;
}
