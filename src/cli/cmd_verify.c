/* fxledger verify: walk the audit chain, run SQLite's integrity and
 * foreign-key checks, check every electronic signature, and prove the
 * record: schema and triggers, every row against its seal, users and
 * settings against their audit rows, and the chain against an anchor
 * (docs/audit.md). */
#include <stdio.h>

#include "cli/cli.h"
#include "fxl/audit.h"
#include "fxl/auth.h"

void cli_print_verified(const fxl_whole_verify *v)
{
    const fxl_record_report *rr = &v->record;

    printf("audit chain intact: %lld rows checked; integrity and foreign-key checks passed; "
           "%lld signature%s verified\n",
           (long long)v->chain.rows_checked, (long long)v->signatures_checked,
           v->signatures_checked == 1 ? "" : "s");
    printf("record proven: schema and %lld objects as the migrations create them; %lld rows match "
           "their seals or audit rows; %lld seals match the chain\n",
           (long long)rr->objects_checked, (long long)rr->rows_checked, (long long)rr->seals_checked);
    if (rr->anchor_given)
        printf("anchor holds: audit rows 1 to %lld are those the anchor names\n", (long long)rr->anchor_rows);
}

int cmd_verify(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{"anchor", NULL, "print the anchor line of the verified record (no LINE), or check the record against LINE", NULL},
                      {NULL, NULL, NULL, NULL}};
    fxl_whole_verify v;
    const fxl_record_report *rr = &v.record;
    const char *pos[1] = {NULL}, *anchor = NULL;
    char line[FXL_ANCHOR_LEN] = "";
    int npos, rc, i;

    rc = cli_parse(env, "verify",
                   "Recomputes the SHA-256 hash chain of the audit log from its first row, runs\n"
                   "SQLite's integrity and foreign-key checks, and checks every electronic\n"
                   "signature against its signer's public key (as the audit chain recorded it)\n"
                   "over the signed row as it is now; a row that must be signed but is not is a\n"
                   "failure too. Then proves the record: the schema and every guard trigger are\n"
                   "exactly those of the migrations, every clinical row matches the seal its audit\n"
                   "row holds and every seal its row, users and settings match the audit rows\n"
                   "that wrote them, and every review item's status is that of its latest event.\n"
                   "--anchor alone prints one line (row count, time and hash of the chain head) to\n"
                   "keep outside the database; --anchor LINE proves that the record since that\n"
                   "line is intact and nothing before it was rewritten or removed. Names the\n"
                   "first row or object that does not match. Exit 0 when everything holds, 2 when\n"
                   "something does not. Without an anchor, whoever can write the file can still\n"
                   "rewrite the whole record consistently (docs/audit.md).",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos > 0 && !cli_get(opts, "anchor")) {
        cli_error("unexpected argument '%s' (an anchor LINE follows --anchor)", pos[0]);
        return CLI_EXIT_USAGE;
    }
    anchor = npos > 0 ? pos[0] : NULL;
    if ((rc = fxl_require_role(env->ctx, FXL_ROLES_ANY, "verify")) != 0)
        return cli_fail(env, rc);
    if (anchor) {
        int64_t n;
        char at[32], head[65];
        if ((rc = fxl_anchor_parse(env->ctx, anchor, &n, at, head)) != 0) {
            cli_error("%s", fxl_errmsg(env->ctx));
            return CLI_EXIT_USAGE;
        }
    }
    fxl_verify_whole(env->ctx, anchor, &v);   /* v.ok and each check's code tell */
    if (v.ok && cli_get(opts, "anchor") && !anchor && fxl_audit_anchor(env->ctx, line, sizeof line) != 0)
        return cli_fail(env, FXL_EDB);
    if (env->json) {
        cJSON *o = cJSON_CreateObject();
        cJSON *probs = cJSON_CreateArray();
        cJSON_AddBoolToObject(o, "ok", v.ok);
        cJSON_AddNumberToObject(o, "rows_checked", (double)v.chain.rows_checked);
        if (v.chain.first_bad_row)
            cJSON_AddNumberToObject(o, "first_bad_row", (double)v.chain.first_bad_row);
        cJSON_AddBoolToObject(o, "integrity_ok", v.chain.integrity_ok);
        cJSON_AddBoolToObject(o, "foreign_keys_ok", v.chain.foreign_keys_ok);
        cJSON_AddNumberToObject(o, "signatures_checked", (double)v.signatures_checked);
        cJSON_AddBoolToObject(o, "signatures_ok", v.sig_rc == 0);
        cJSON_AddNumberToObject(o, "record_rows_checked", (double)rr->rows_checked);
        cJSON_AddNumberToObject(o, "seals_checked", (double)rr->seals_checked);
        cJSON_AddNumberToObject(o, "schema_objects_checked", (double)rr->objects_checked);
        if (rr->anchor_given)
            cJSON_AddNumberToObject(o, "anchor_rows", (double)rr->anchor_rows);
        if (line[0])
            cJSON_AddStringToObject(o, "anchor", line);
        for (i = 0; i < rr->n_problems; i++)
            cJSON_AddItemToArray(probs, cJSON_CreateString(rr->problem[i]));
        cJSON_AddItemToObject(o, "record_problems", probs);
        if (v.sig_rc != 0)
            cJSON_AddStringToObject(o, "signature_error", v.sig_first_bad);
        if (v.chain_rc != 0)
            cJSON_AddStringToObject(o, "error", v.chain_msg);
        else if (v.sig_rc != 0)
            cJSON_AddStringToObject(o, "error", v.sig_msg);
        else if (rr->n_problems)
            cJSON_AddStringToObject(o, "error", rr->problem[0]);
        cli_print_json(o);
        return v.ok ? CLI_EXIT_OK : CLI_EXIT_DATA;
    }
    if (!v.ok) {
        /* every kind of failure on its own line, each naming its first row */
        if (v.chain_rc != 0)
            cli_error("verification failed: %s", v.chain_msg);
        if (v.sig_rc != 0)
            cli_error("%s: %s", v.chain_rc != 0 ? "signature check failed" : "verification failed",
                      v.sig_msg);
        for (i = 0; i < rr->n_problems; i++)
            cli_error("verification failed: %s", rr->problem[i]);
        if (v.chain_rc != 0 && v.chain_rc != FXL_ECONFLICT)
            return cli_exit_code(v.chain_rc);
        if (v.sig_rc != 0 && v.sig_rc != FXL_ECONFLICT)
            return cli_exit_code(v.sig_rc);
        return CLI_EXIT_DATA;
    }
    if (line[0]) {
        printf("%s\n", line);
        return CLI_EXIT_OK;
    }
    cli_print_verified(&v);
    return CLI_EXIT_OK;
}
