/* Per-user API tokens of the console's JSON API: issue, revoke, list, check.
 * Only the SHA-256 of a token is stored (docs/api.md). */
#include <sodium.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/api_tokens.h"
#include "fxl/audit.h"
#include "fxl/text.h"
#include "store/audit.h"
#include "store/grow.h"
#include "store/stmt.h"

static int is_hex64(const char *t)
{
    size_t i;

    if (!t || strlen(t) != FXL_API_TOKEN_HEX_LEN)
        return 0;
    for (i = 0; i < FXL_API_TOKEN_HEX_LEN; i++)
        if (!((t[i] >= '0' && t[i] <= '9') || (t[i] >= 'a' && t[i] <= 'f')))
            return 0;
    return 1;
}

int fxl_api_token_issue(fxl_ctx *ctx, int64_t *out_id, const char *login, const char *label,
                        char *token_out)
{
    fxl_stmt s = FXL_STMT_INIT, u = FXL_STMT_INIT;
    cJSON *audit = NULL;
    unsigned char raw[32];
    char token[FXL_API_TOKEN_HEX_LEN + 1], hash[65], now[FXL_TIME_LEN];
    size_t label_len = label ? strlen(label) : 0;
    int64_t user_id = 0, id = 0;
    int rc, began = 0;

    token_out[0] = '\0';
    if ((rc = fxl_require_role(ctx, FXL_ROLE_ADMIN, "issuing an api token")) != 0)
        return rc;
    if (label_len < 1 || label_len > FXL_API_TOKEN_LABEL_MAX || fxl_utf8_invalid_at(label, label_len) >= 0 ||
        fxl_text_control_at(label) >= 0)
        return fxl_fail(ctx, FXL_EINVAL, "token label must be 1 to %d printable characters",
                        FXL_API_TOKEN_LABEL_MAX);
    if ((rc = fxl_stmt_prepare(&u, ctx, "SELECT id, active FROM users WHERE login = :login")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&u, ":login", login);
    if ((rc = fxl_stmt_step(&u)) < 0)
        goto cleanup;
    if (rc == 0 || fxl_stmt_int(&u, 1) == 0) {
        rc = fxl_fail(ctx, rc == 0 ? FXL_ENOTFOUND : FXL_EINVAL, "user '%s' %s", login ? login : "",
                      rc == 0 ? "does not exist" : "is deactivated");
        goto cleanup;
    }
    user_id = fxl_stmt_int(&u, 0);
    if (sodium_init() < 0) {
        rc = fxl_fail(ctx, FXL_EIO, "cannot initialise libsodium");
        goto cleanup;
    }
    randombytes_buf(raw, sizeof raw);
    sodium_bin2hex(token, sizeof token, raw, sizeof raw);
    sodium_memzero(raw, sizeof raw);
    fxl_sha256_hex(hash, token, FXL_API_TOKEN_HEX_LEN);
    fxl_now(ctx, now);
    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    began = 1;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "INSERT INTO api_tokens (user_id, label, token_hash, created_at, created_by) "
                               "VALUES (:user, :label, :hash, :now, :by)")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":user", user_id);
    fxl_stmt_bind_text(&s, ":label", label);
    fxl_stmt_bind_text(&s, ":hash", hash);
    fxl_stmt_bind_text(&s, ":now", now);
    fxl_stmt_bind_text(&s, ":by", fxl_user_login(ctx));
    if ((rc = fxl_stmt_exec(&s)) != 0)
        goto cleanup;
    id = sqlite3_last_insert_rowid(ctx->db);
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "login", login);
    cJSON_AddStringToObject(audit, "label", label);
    if ((rc = fxl_audit_append(ctx, "api_token_issue", "api_tokens", id, audit)) != 0)
        goto cleanup;
    if ((rc = fxl_commit(ctx)) != 0)
        goto cleanup;
    began = 0;
    memcpy(token_out, token, sizeof token);
    if (out_id)
        *out_id = id;
cleanup:
    if (began)
        fxl_rollback(ctx);
    sodium_memzero(token, sizeof token);
    fxl_stmt_finalize(&s);
    fxl_stmt_finalize(&u);
    cJSON_Delete(audit);
    return rc < 0 ? rc : 0;
}

int fxl_api_token_revoke(fxl_ctx *ctx, int64_t id)
{
    fxl_stmt s = FXL_STMT_INIT, q = FXL_STMT_INIT;
    cJSON *audit = NULL;
    char now[FXL_TIME_LEN];
    int rc, began = 0;

    if ((rc = fxl_require_role(ctx, FXL_ROLE_ADMIN, "revoking an api token")) != 0)
        return rc;
    if ((rc = fxl_stmt_prepare(&q, ctx, "SELECT revoked_at IS NOT NULL FROM api_tokens WHERE id = :id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&q, ":id", id);
    if ((rc = fxl_stmt_step(&q)) < 0)
        goto cleanup;
    if (rc == 0) {
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "api token %lld does not exist", (long long)id);
        goto cleanup;
    }
    if (fxl_stmt_int(&q, 0)) {
        rc = fxl_fail(ctx, FXL_ECONFLICT, "api token %lld is already revoked", (long long)id);
        goto cleanup;
    }
    fxl_now(ctx, now);
    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    began = 1;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "UPDATE api_tokens SET revoked_at = :now, revoked_by = :by "
                               "WHERE id = :id AND revoked_at IS NULL")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":now", now);
    fxl_stmt_bind_text(&s, ":by", fxl_user_login(ctx));
    fxl_stmt_bind_int(&s, ":id", id);
    if ((rc = fxl_stmt_exec(&s)) != 0)
        goto cleanup;
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "revoked_at", now);
    if ((rc = fxl_audit_append(ctx, "api_token_revoke", "api_tokens", id, audit)) != 0)
        goto cleanup;
    rc = fxl_commit(ctx);
    began = 0;
cleanup:
    if (began)
        fxl_rollback(ctx);
    fxl_stmt_finalize(&s);
    fxl_stmt_finalize(&q);
    cJSON_Delete(audit);
    return rc < 0 ? rc : 0;
}

int fxl_api_token_list(fxl_ctx *ctx, fxl_api_token **out, size_t *n)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_api_token *list = NULL;
    size_t cap = 0, count = 0;
    int rc;

    *out = NULL;
    *n = 0;
    if ((rc = fxl_require_role(ctx, FXL_ROLE_ADMIN, "listing api tokens")) != 0)
        return rc;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT t.id, u.login, t.label, t.created_at, t.created_by, "
                               "coalesce(t.revoked_at, ''), coalesce(t.revoked_by, '') "
                               "FROM api_tokens t JOIN users u ON u.id = t.user_id ORDER BY t.id DESC")) != 0)
        return rc;
    while ((rc = fxl_stmt_step(&s)) == 1) {
        fxl_api_token *t;
        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list, "listing api tokens")) != 0)
            break;
        t = &list[count++];
        t->id = fxl_stmt_int(&s, 0);
        snprintf(t->login, sizeof t->login, "%s", fxl_stmt_text(&s, 1));
        snprintf(t->label, sizeof t->label, "%s", fxl_stmt_text(&s, 2));
        snprintf(t->created_at, sizeof t->created_at, "%s", fxl_stmt_text(&s, 3));
        snprintf(t->created_by, sizeof t->created_by, "%s", fxl_stmt_text(&s, 4));
        snprintf(t->revoked_at, sizeof t->revoked_at, "%s", fxl_stmt_text(&s, 5));
        snprintf(t->revoked_by, sizeof t->revoked_by, "%s", fxl_stmt_text(&s, 6));
    }
    fxl_stmt_finalize(&s);
    if (rc < 0) {
        free(list);
        return rc;
    }
    *out = list;
    *n = count;
    return 0;
}

int fxl_api_token_check(fxl_ctx *ctx, const char *token)
{
    fxl_stmt s = FXL_STMT_INIT;
    char hash[65], login[65] = "";
    int rc;

    ctx->user_id = 0;
    ctx->user_login[0] = '\0';
    ctx->user_role = 0;
    if (!is_hex64(token))
        return fxl_fail(ctx, FXL_EPERM, "api token not valid");
    fxl_sha256_hex(hash, token, FXL_API_TOKEN_HEX_LEN);
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT u.login FROM api_tokens t JOIN users u ON u.id = t.user_id "
                               "WHERE t.token_hash = :hash AND t.revoked_at IS NULL AND u.active = 1")) != 0)
        return rc;
    fxl_stmt_bind_text(&s, ":hash", hash);
    rc = fxl_stmt_step(&s);
    if (rc == 1)
        snprintf(login, sizeof login, "%s", fxl_stmt_text(&s, 0));
    fxl_stmt_finalize(&s);
    if (rc < 0)
        return rc;
    if (rc == 0)
        return fxl_fail(ctx, FXL_EPERM, "api token not valid");
    return fxl_set_user(ctx, login);
}
