/* The hash-chained audit log: appending a row inside the caller's
 * transaction, and walking the chain to verify it. */
#include <sodium.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/audit.h"
#include "store/audit.h"
#include "store/seal.h"
#include "store/stmt.h"

static const char GENESIS[65] =
    "0000000000000000000000000000000000000000000000000000000000000000";

void fxl_sha256_hex(char hex[65], const void *data, size_t len)
{
    unsigned char digest[crypto_hash_sha256_BYTES];

    crypto_hash_sha256(digest, data, len);
    sodium_bin2hex(hex, 65, digest, sizeof digest);
}

/* The canonical text hashed for one row: the fields joined by '\n' in a
 * fixed order (docs/audit.md). entity_id is "" when NULL. A row that seals
 * rows (version 11) appends "\nseal:" and the SHA-256 of its seals; a row
 * without seals hashes exactly as before. */
static void row_hash(char out[65], const char *prev_hash, int64_t id, const char *at,
                     const char *user, const char *action, const char *entity,
                     const char *entity_id, const char *content, const char *seal)
{
    size_t len = strlen(prev_hash) + strlen(at) + strlen(user) + strlen(action) +
                 strlen(entity) + strlen(entity_id) + strlen(content) + strlen(seal) + 80;
    char *buf = malloc(len);
    int n;

    if (!buf) {
        memset(out, 'x', 64);  /* cannot match any real hash: verify fails loudly */
        out[64] = '\0';
        return;
    }
    n = snprintf(buf, len, "%s\n%lld\n%s\n%s\n%s\n%s\n%s\n%s%s%s", prev_hash, (long long)id, at,
                 user, action, entity, entity_id, content, seal[0] ? "\nseal:" : "", seal);
    fxl_sha256_hex(out, buf, (size_t)n);
    free(buf);
}

int fxl_audit_append(fxl_ctx *ctx, const char *action, const char *entity,
                     int64_t entity_id, const cJSON *content)
{
    fxl_stmt last = FXL_STMT_INIT, ins = FXL_STMT_INIT;
    char prev[65], hash[65], seal[65] = "", at[FXL_TIME_LEN], idtext[24] = "";
    char *text = NULL;
    int64_t id = 1;
    int rc;

    if (sodium_init() < 0)
        return fxl_fail(ctx, FXL_EIO, "cannot initialise libsodium");
    text = cJSON_PrintUnformatted(content);
    if (!text)
        return fxl_fail(ctx, FXL_EIO, "out of memory writing the audit log");
    if ((rc = fxl_stmt_prepare_cached(&last, ctx, "SELECT id, hash FROM audit_log ORDER BY id DESC LIMIT 1")) != 0)
        goto cleanup;
    rc = fxl_stmt_step(&last);
    if (rc < 0)
        goto cleanup;
    if (rc == 1) {
        id = fxl_stmt_int(&last, 0) + 1;
        snprintf(prev, sizeof prev, "%s", fxl_stmt_text(&last, 1));
    } else {
        memcpy(prev, GENESIS, sizeof prev);
    }
    fxl_stmt_finalize(&last);
    if ((rc = fxl_seal_pending(ctx, id, seal)) != 0)
        goto cleanup;
    fxl_now(ctx, at);
    if (entity_id)
        snprintf(idtext, sizeof idtext, "%lld", (long long)entity_id);
    row_hash(hash, prev, id, at, ctx->user_login, action, entity, idtext, text, seal);

    if ((rc = fxl_stmt_prepare_cached(&ins, ctx, ctx->sealing
            ? "INSERT INTO audit_log (id, at, user, action, entity, entity_id, content, prev_hash, hash, client, seal) "
              "VALUES (:id, :at, :user, :action, :entity, :entity_id, :content, :prev, :hash, :client, :seal)"
            : "INSERT INTO audit_log (id, at, user, action, entity, entity_id, content, prev_hash, hash, client) "
              "VALUES (:id, :at, :user, :action, :entity, :entity_id, :content, :prev, :hash, :client)")) != 0)
        goto cleanup;
    if (ctx->sealing)
        fxl_stmt_bind_text(&ins, ":seal", seal[0] ? seal : NULL);
    fxl_stmt_bind_int(&ins, ":id", id);
    fxl_stmt_bind_text(&ins, ":at", at);
    fxl_stmt_bind_text(&ins, ":user", ctx->user_login);
    fxl_stmt_bind_text(&ins, ":action", action);
    fxl_stmt_bind_text(&ins, ":entity", entity);
    if (entity_id)
        fxl_stmt_bind_int(&ins, ":entity_id", entity_id);
    else
        fxl_stmt_bind_null(&ins, ":entity_id");
    fxl_stmt_bind_text(&ins, ":content", text);
    fxl_stmt_bind_text(&ins, ":prev", prev);
    fxl_stmt_bind_text(&ins, ":hash", hash);
    if (ctx->origin[0])
        fxl_stmt_bind_text(&ins, ":client", ctx->origin);
    else
        fxl_stmt_bind_null(&ins, ":client");
    rc = fxl_stmt_exec(&ins);
cleanup:
    fxl_stmt_finalize(&last);
    fxl_stmt_finalize(&ins);
    free(text);
    return rc < 0 ? rc : 0;
}

int fxl_audit_verify(fxl_ctx *ctx, fxl_verify_report *out)
{
    fxl_stmt s = FXL_STMT_INIT;
    char prev[65], hash[65];
    int64_t expect_id = 1;
    int rc;

    memset(out, 0, sizeof *out);
    memcpy(prev, GENESIS, sizeof prev);
    if (sodium_init() < 0)
        return fxl_fail(ctx, FXL_EIO, "cannot initialise libsodium");
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT id, at, user, action, entity, coalesce(entity_id, ''), content, "
                               "prev_hash, hash, coalesce(seal, '') FROM audit_log ORDER BY id")) != 0)
        goto cleanup;
    while ((rc = fxl_stmt_step(&s)) == 1) {
        int64_t id = fxl_stmt_int(&s, 0);
        row_hash(hash, prev, id, fxl_stmt_text(&s, 1), fxl_stmt_text(&s, 2), fxl_stmt_text(&s, 3),
                 fxl_stmt_text(&s, 4), fxl_stmt_text(&s, 5), fxl_stmt_text(&s, 6),
                 fxl_stmt_text(&s, 9));
        if (id != expect_id || strcmp(prev, fxl_stmt_text(&s, 7)) != 0 ||
            strcmp(hash, fxl_stmt_text(&s, 8)) != 0) {
            out->first_bad_row = id != expect_id ? expect_id : id;
            rc = fxl_fail(ctx, FXL_ECONFLICT,
                          "audit chain broken at row %lld: %s", (long long)out->first_bad_row,
                          id != expect_id ? "a row is missing" : "content does not match its hash");
            goto cleanup;
        }
        memcpy(prev, hash, sizeof prev);
        out->rows_checked++;
        expect_id = id + 1;
    }
    if (rc < 0)
        goto cleanup;
    fxl_stmt_finalize(&s);

    if ((rc = fxl_stmt_prepare(&s, ctx, "PRAGMA integrity_check")) != 0)
        goto cleanup;
    rc = fxl_stmt_step(&s);
    out->integrity_ok = (rc == 1 && strcmp(fxl_stmt_text(&s, 0), "ok") == 0);
    fxl_stmt_finalize(&s);
    if (!out->integrity_ok) {
        rc = fxl_fail(ctx, FXL_ECONFLICT, "SQLite integrity check failed");
        goto cleanup;
    }
    if ((rc = fxl_stmt_prepare(&s, ctx, "PRAGMA foreign_key_check")) != 0)
        goto cleanup;
    rc = fxl_stmt_step(&s);
    out->foreign_keys_ok = (rc == 0);
    if (rc == 1)
        rc = fxl_fail(ctx, FXL_ECONFLICT, "foreign-key check failed in table '%s' row %lld",
                      fxl_stmt_text(&s, 0), (long long)fxl_stmt_int(&s, 1));
cleanup:
    fxl_stmt_finalize(&s);
    return rc < 0 ? rc : 0;
}

int fxl_audit_anchor(fxl_ctx *ctx, char *buf, size_t size)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT id, at, hash FROM audit_log ORDER BY id DESC LIMIT 1")) != 0)
        goto cleanup;
    rc = fxl_stmt_step(&s);
    if (rc == 1)
        snprintf(buf, size, "fxledger-anchor rows=%lld at=%s head=%s", (long long)fxl_stmt_int(&s, 0),
                 fxl_stmt_text(&s, 1), fxl_stmt_text(&s, 2));
    else if (rc == 0)
        snprintf(buf, size, "fxledger-anchor rows=0 at=- head=%s", GENESIS);
cleanup:
    fxl_stmt_finalize(&s);
    return rc < 0 ? rc : 0;
}
