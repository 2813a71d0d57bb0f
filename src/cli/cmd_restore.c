/* fxledger restore: the restore drill. A backup copied into a new file,
 * checked as 'verify' checks a database, and described (docs/deployment.md). */
#include "cli/cli.h"
#include "fxl/audit.h"
#include "fxl/auth.h"
#include "fxl/restore.h"

int cmd_restore(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{"anchor", "LINE", "an anchor line kept elsewhere (verify --anchor): the copy must hold its rows unchanged", NULL},
                      {NULL, NULL, NULL, NULL}};
    fxl_ctx *copy = NULL;
    fxl_whole_verify v;
    const fxl_record_report *rr = &v.record;
    const char *given_anchor;
    fxl_holdings h;
    const char *pos[2];
    char anchor[FXL_ANCHOR_LEN] = "";
    int npos, rc, i, pages = 0, schema_backup = 0, code;

    rc = cli_parse(env, "restore BACKUP NEWFILE",
                   "The restore drill: copies the backup file BACKUP into NEWFILE (which must not\n"
                   "exist; never the database in use), upgrades the copy when its schema is older,\n"
                   "then checks it as 'verify' does: the SHA-256 audit chain from its first row,\n"
                   "SQLite's integrity and foreign-key checks, every electronic signature, and the\n"
                   "proof of the record (schema and triggers, every row against its seal); with\n"
                   "--anchor LINE also that the copy still holds the anchored rows unchanged. It\n"
                   "prints the copy's anchor line, to compare with the one the auditor keeps, and\n"
                   "what the copy holds (counts only, no patient data). The backup is opened\n"
                   "read-only and never changed. No login: it reads a file you can already read\n"
                   "and writes only NEWFILE. A copy that fails a check is removed. Exit 0 when\n"
                   "every check holds, 2 when one does not.",
                   opts, argc, argv, pos, 2, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 2) {
        cli_error("restore needs the backup file and the name of a new file (see 'fxledger restore --help')");
        return CLI_EXIT_USAGE;
    }
    if ((rc = fxl_restore_copy(&copy, pos[0], pos[1], &pages, &schema_backup)) != 0) {
        cli_error("%s", fxl_errmsg(copy));
        fxl_close(copy);
        return cli_exit_code(rc);
    }
    given_anchor = cli_get(opts, "anchor");
    if (given_anchor) {
        int64_t n;
        char at[32], head[65];
        if ((rc = fxl_anchor_parse(copy, given_anchor, &n, at, head)) != 0) {
            cli_error("%s", fxl_errmsg(copy));
            fxl_close(copy);
            fxl_restore_discard(pos[1]);
            return CLI_EXIT_USAGE;
        }
    }
    fxl_verify_whole(copy, given_anchor, &v);   /* v.ok and each check's code tell */
    if ((rc = fxl_audit_anchor(copy, anchor, sizeof anchor)) == 0)
        rc = fxl_holdings_get(copy, &h);
    if (rc != 0) {
        cli_error("cannot read the restored copy '%s': %s", pos[1], fxl_errmsg(copy));
        fxl_close(copy);
        fxl_restore_discard(pos[1]);
        return cli_exit_code(rc);
    }
    fxl_close(copy);
    code = v.ok ? CLI_EXIT_OK : CLI_EXIT_DATA;
    if (code != CLI_EXIT_OK)
        fxl_restore_discard(pos[1]);

    if (env->json) {
        cJSON *o = cJSON_CreateObject(), *hj = cJSON_CreateObject(), *probs = cJSON_CreateArray();
        cJSON_AddBoolToObject(o, "ok", code == CLI_EXIT_OK);
        cJSON_AddStringToObject(o, "backup", pos[0]);
        cJSON_AddStringToObject(o, "file", pos[1]);
        cJSON_AddBoolToObject(o, "kept", code == CLI_EXIT_OK);
        cJSON_AddNumberToObject(o, "pages", pages);
        cJSON_AddNumberToObject(o, "schema_backup", schema_backup);
        cJSON_AddNumberToObject(o, "schema", h.schema);
        cJSON_AddNumberToObject(o, "rows_checked", (double)v.chain.rows_checked);
        if (v.chain.first_bad_row)
            cJSON_AddNumberToObject(o, "first_bad_row", (double)v.chain.first_bad_row);
        cJSON_AddBoolToObject(o, "chain_ok", v.chain_rc == 0);
        cJSON_AddBoolToObject(o, "integrity_ok", v.chain.integrity_ok);
        cJSON_AddBoolToObject(o, "foreign_keys_ok", v.chain.foreign_keys_ok);
        cJSON_AddNumberToObject(o, "signatures_checked", (double)v.signatures_checked);
        cJSON_AddBoolToObject(o, "signatures_ok", v.sig_rc == 0);
        if (v.chain_rc != 0)
            cJSON_AddStringToObject(o, "chain_error", v.chain_msg);
        if (v.sig_rc != 0)
            cJSON_AddStringToObject(o, "signature_error", v.sig_first_bad);
        cJSON_AddNumberToObject(o, "record_rows_checked", (double)rr->rows_checked);
        cJSON_AddNumberToObject(o, "seals_checked", (double)rr->seals_checked);
        cJSON_AddNumberToObject(o, "schema_objects_checked", (double)rr->objects_checked);
        for (i = 0; i < rr->n_problems; i++)
            cJSON_AddItemToArray(probs, cJSON_CreateString(rr->problem[i]));
        cJSON_AddItemToObject(o, "record_problems", probs);
        cJSON_AddBoolToObject(o, "anchor_given", rr->anchor_given);
        if (rr->anchor_given)
            cJSON_AddNumberToObject(o, "anchor_rows", (double)rr->anchor_rows);
        cJSON_AddStringToObject(o, "anchor", anchor);
        cJSON_AddStringToObject(hj, "department", h.department);
        cJSON_AddStringToObject(hj, "first_audit_at", h.first_audit_at);
        cJSON_AddStringToObject(hj, "last_audit_at", h.last_audit_at);
        cJSON_AddNumberToObject(hj, "audit_rows", (double)h.audit_rows);
        cJSON_AddNumberToObject(hj, "users", (double)h.users);
        cJSON_AddNumberToObject(hj, "active_users", (double)h.active_users);
        cJSON_AddNumberToObject(hj, "machines", (double)h.machines);
        cJSON_AddNumberToObject(hj, "detectors", (double)h.detectors);
        cJSON_AddNumberToObject(hj, "patients", (double)h.patients);
        cJSON_AddNumberToObject(hj, "plans", (double)h.plans);
        cJSON_AddNumberToObject(hj, "fractions", (double)h.fractions);
        cJSON_AddNumberToObject(hj, "measurements", (double)h.measurements);
        cJSON_AddNumberToObject(hj, "review_items", (double)h.review_items);
        cJSON_AddNumberToObject(hj, "review_items_open", (double)h.review_items_open);
        cJSON_AddNumberToObject(hj, "signatures", (double)h.signatures);
        cJSON_AddItemToObject(o, "holds", hj);
        cli_print_json(o);
        return code;
    }
    if (code != CLI_EXIT_OK) {
        if (v.chain_rc != 0)
            cli_error("restored copy failed verification: %s", v.chain_msg);
        if (v.sig_rc != 0)
            cli_error("restored copy failed the signature check: %s", v.sig_first_bad);
        for (i = 0; i < rr->n_problems; i++)
            cli_error("restored copy failed verification: %s", rr->problem[i]);
        cli_error("the copy '%s' was removed; the backup '%s' is unchanged: %s", pos[1], pos[0],
                  given_anchor && v.chain_rc == 0 && v.sig_rc == 0
                      ? "check that the anchor was taken before this backup, else try an older backup"
                      : "try an older backup");
        return code;
    }
    printf("restored %s into %s: %d pages, schema %d%s\n", pos[0], pos[1], pages, h.schema,
           schema_backup < h.schema ? " (upgraded from the backup's older schema)" : "");
    cli_print_verified(&v);
    printf("%s\n", anchor);
    if (!rr->anchor_given)
        printf("  check it against the anchor line the auditor keeps: fxledger restore --anchor LINE ...\n");
    printf("holds: department '%s'; audit trail %s to %s (UTC)\n", h.department,
           h.first_audit_at[0] ? h.first_audit_at : "-", h.last_audit_at[0] ? h.last_audit_at : "-");
    printf("  users %lld (%lld active), machines %lld, detectors %lld\n", (long long)h.users,
           (long long)h.active_users, (long long)h.machines, (long long)h.detectors);
    printf("  patients %lld, plans %lld, fractions %lld, measurements %lld\n", (long long)h.patients,
           (long long)h.plans, (long long)h.fractions, (long long)h.measurements);
    printf("  review items %lld (%lld still open), signatures %lld\n", (long long)h.review_items,
           (long long)h.review_items_open, (long long)h.signatures);
    printf("the backup was not changed; putting a copy into service: docs/deployment.md, \"Restoring\"\n");
    return CLI_EXIT_OK;
}
