/* Users and roles, and the department set-up done by 'fxledger init'.
 * Users are never deleted; deactivation keeps their signed records. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/settings.h"
#include "fxl/users.h"
#include "store/audit.h"
#include "store/auth_int.h"
#include "store/grow.h"
#include "store/stmt.h"
#include "store/users_int.h"

/* Defaults written at init; docs/settings.md explains each. */
static const char *const default_settings[][2] = {
    {"skin_temp_c", "32"},               /* used when no temperature is entered */
    {"implausible_pct", "50"},           /* |deviation| above this: probable entry error */
    {"calibration_due_days", "14"},      /* warn this many days before valid_until */
    {"alert_command", ""},               /* run on an outside-action result */
    {"alert_timeout_s", "10"},
};

static int insert_setting(fxl_ctx *ctx, const char *key, const char *value, cJSON *audit)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc = fxl_stmt_prepare(&s, ctx, "INSERT INTO settings (key, value) VALUES (:key, :value)");

    if (rc == 0) {
        fxl_stmt_bind_text(&s, ":key", key);
        fxl_stmt_bind_text(&s, ":value", value);
        rc = fxl_stmt_exec(&s);
    }
    fxl_stmt_finalize(&s);
    cJSON_AddStringToObject(audit, key, value);
    return rc;
}

static int login_valid(const char *login);

int fxl_init_department(fxl_ctx *ctx, const char *department, const char *timezone,
                        const char *admin_login, const char *admin_full_name)
{
    return fxl_init_department_hook(ctx, department, timezone, admin_login, admin_full_name,
                                    NULL, NULL);
}

int fxl_init_department_hook(fxl_ctx *ctx, const char *department, const char *timezone,
                             const char *admin_login, const char *admin_full_name,
                             fxl_user_hook hook, void *arg)
{
    fxl_stmt s = FXL_STMT_INIT;
    cJSON *settings = cJSON_CreateObject(), *user = cJSON_CreateObject();
    char now[FXL_TIME_LEN];
    size_t i, name_len = admin_full_name ? strlen(admin_full_name) : 0;
    int rc, began = 0;

    /* The same checks as 'user add' and 'setting set', before anything is
     * written: init is no back door for a value nobody else would accept. */
    if (!login_valid(admin_login))
        rc = fxl_fail(ctx, FXL_EINVAL, "login '%s' is not valid: 1 to 64 letters, digits, '.', '_' or '-'",
                      admin_login ? admin_login : "");
    else if (name_len < 1 || name_len > 200)
        rc = fxl_fail(ctx, FXL_EINVAL, "full name of '%s' must be 1 to 200 characters", admin_login);
    else if ((rc = fxl_setting_validate(ctx, "department", department)) == 0)
        rc = fxl_setting_validate(ctx, "timezone", timezone && *timezone ? timezone : "UTC");
    if (rc != 0)
        goto cleanup;
    fxl_now(ctx, now);
    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    began = 1;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "INSERT INTO users (login, full_name, role, created_at) "
                               "VALUES (:login, :full, 'admin', :now)")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":login", admin_login);
    fxl_stmt_bind_text(&s, ":full", admin_full_name);
    fxl_stmt_bind_text(&s, ":now", now);
    if ((rc = fxl_stmt_exec(&s)) != 0)
        goto cleanup;
    ctx->user_id = sqlite3_last_insert_rowid(ctx->db);
    snprintf(ctx->user_login, sizeof ctx->user_login, "%s", admin_login);
    ctx->user_role = FXL_ROLE_ADMIN;

    if ((rc = insert_setting(ctx, "department", department, settings)) != 0 ||
        (rc = insert_setting(ctx, "timezone", timezone && *timezone ? timezone : "UTC", settings)) != 0)
        goto cleanup;
    for (i = 0; i < sizeof default_settings / sizeof default_settings[0]; i++)
        if ((rc = insert_setting(ctx, default_settings[i][0], default_settings[i][1], settings)) != 0)
            goto cleanup;

    cJSON_AddStringToObject(user, "login", admin_login);
    cJSON_AddStringToObject(user, "full_name", admin_full_name);
    cJSON_AddStringToObject(user, "role", "admin");
    if ((rc = fxl_audit_append(ctx, "init", "settings", 0, settings)) != 0 ||
        (rc = fxl_audit_append(ctx, "create", "users", ctx->user_id, user)) != 0)
        goto cleanup;
    if (hook && (rc = hook(ctx, ctx->user_id, arg)) != 0)
        goto cleanup;
    rc = fxl_commit(ctx);
cleanup:
    if (rc != 0 && began)
        fxl_rollback(ctx);
    fxl_stmt_finalize(&s);
    cJSON_Delete(settings);
    cJSON_Delete(user);
    return rc;
}

/* ---- adding, listing and deactivating users ------------------------------- */

static int login_valid(const char *login)
{
    size_t i, len = login ? strlen(login) : 0;

    if (len < 1 || len > 64)
        return 0;
    for (i = 0; i < len; i++) {
        char c = login[i];
        if (!((c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') ||
              c == '.' || c == '_' || c == '-'))
            return 0;
    }
    return 1;
}

static int user_exists(fxl_ctx *ctx, const char *login, int *exists)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc = fxl_stmt_prepare(&s, ctx, "SELECT 1 FROM users WHERE login = :login");

    if (rc == 0) {
        fxl_stmt_bind_text(&s, ":login", login);
        rc = fxl_stmt_step(&s);
        if (rc >= 0) {
            *exists = rc;
            rc = 0;
        }
    }
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_user_add(fxl_ctx *ctx, int64_t *out_id, const char *login, const char *full_name,
                 fxl_role role)
{
    return fxl_user_add_hook(ctx, out_id, login, full_name, role, NULL, NULL);
}

int fxl_user_add_hook(fxl_ctx *ctx, int64_t *out_id, const char *login, const char *full_name,
                      fxl_role role, fxl_user_hook hook, void *arg)
{
    fxl_stmt s = FXL_STMT_INIT;
    cJSON *audit = NULL;
    char now[FXL_TIME_LEN];
    size_t name_len = full_name ? strlen(full_name) : 0;
    int64_t id = 0;
    int rc, exists = 0;

    if ((rc = fxl_require_role(ctx, FXL_ROLE_ADMIN, "adding a user")) != 0)
        return rc;
    if (!login_valid(login))
        return fxl_fail(ctx, FXL_EINVAL,
                        "login '%s' is not valid: 1 to 64 letters, digits, '.', '_' or '-'",
                        login ? login : "");
    if (name_len < 1 || name_len > 200)
        return fxl_fail(ctx, FXL_EINVAL, "full name of '%s' must be 1 to 200 characters", login);
    if (strcmp(fxl_role_name(role), "none") == 0)
        return fxl_fail(ctx, FXL_EINVAL,
                        "role for '%s' must be therapist, physicist, auditor or admin", login);
    if ((rc = user_exists(ctx, login, &exists)) != 0)
        return rc;
    if (exists)
        return fxl_fail(ctx, FXL_ECONFLICT, "user '%s' already exists", login);

    fxl_now(ctx, now);
    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "INSERT INTO users (login, full_name, role, created_at) "
                               "VALUES (:login, :full, :role, :now)")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":login", login);
    fxl_stmt_bind_text(&s, ":full", full_name);
    fxl_stmt_bind_text(&s, ":role", fxl_role_name(role));
    fxl_stmt_bind_text(&s, ":now", now);
    if ((rc = fxl_stmt_exec(&s)) != 0)
        goto cleanup;
    id = sqlite3_last_insert_rowid(ctx->db);
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "login", login);
    cJSON_AddStringToObject(audit, "full_name", full_name);
    cJSON_AddStringToObject(audit, "role", fxl_role_name(role));
    if ((rc = fxl_audit_append(ctx, "create", "users", id, audit)) != 0)
        goto cleanup;
    if (hook && (rc = hook(ctx, id, arg)) != 0)
        goto cleanup;
    rc = fxl_commit(ctx);
    if (rc == 0 && out_id)
        *out_id = id;
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    fxl_stmt_finalize(&s);
    cJSON_Delete(audit);
    return rc;
}

int fxl_user_list(fxl_ctx *ctx, fxl_user **out, size_t *n)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_user *list = NULL;
    size_t cap = 0, count = 0;
    int rc;

    *out = NULL;
    *n = 0;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT id, login, full_name, role, active, created_at "
                               "FROM users ORDER BY login")) != 0)
        goto cleanup;
    while ((rc = fxl_stmt_step(&s)) == 1) {
        fxl_user *u;
        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list, "listing users")) != 0)
            goto cleanup;
        u = &list[count++];
        memset(u, 0, sizeof *u);
        u->id = fxl_stmt_int(&s, 0);
        snprintf(u->login, sizeof u->login, "%s", fxl_stmt_text(&s, 1));
        snprintf(u->full_name, sizeof u->full_name, "%s", fxl_stmt_text(&s, 2));
        fxl_role_parse(&u->role, fxl_stmt_text(&s, 3));
        u->active = (int)fxl_stmt_int(&s, 4);
        snprintf(u->created_at, sizeof u->created_at, "%s", fxl_stmt_text(&s, 5));
    }
    if (rc == 0) {
        *out = list;
        *n = count;
        list = NULL;
    }
cleanup:
    fxl_stmt_finalize(&s);
    free(list);
    return rc;
}

int fxl_user_deactivate(fxl_ctx *ctx, const char *login)
{
    fxl_stmt s = FXL_STMT_INIT;
    cJSON *audit = NULL;
    char role[16] = "";
    int64_t id = 0, other_admins = 0;
    int rc, active = 0;

    if ((rc = fxl_require_role(ctx, FXL_ROLE_ADMIN, "deactivating a user")) != 0)
        return rc;
    if ((rc = fxl_sign_require(ctx, "deactivating a user")) != 0)
        return rc;
    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT id, role, active FROM users WHERE login = :login")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":login", login);
    rc = fxl_stmt_step(&s);
    if (rc < 0)
        goto cleanup;
    if (rc == 0) {
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "unknown user '%s' (see 'fxledger user list')", login);
        goto cleanup;
    }
    id = fxl_stmt_int(&s, 0);
    snprintf(role, sizeof role, "%s", fxl_stmt_text(&s, 1));
    active = (int)fxl_stmt_int(&s, 2);
    fxl_stmt_finalize(&s);
    if (!active) {
        rc = fxl_fail(ctx, FXL_ECONFLICT, "user '%s' is already deactivated", login);
        goto cleanup;
    }
    if (id == fxl_user_id(ctx)) {
        rc = fxl_fail(ctx, FXL_EINVAL, "user '%s' cannot deactivate themselves; ask another admin",
                      login);
        goto cleanup;
    }
    if (strcmp(role, "admin") == 0) {
        if ((rc = fxl_stmt_prepare(&s, ctx,
                                   "SELECT count(*) FROM users WHERE role = 'admin' AND active = 1 "
                                   "AND id <> :id")) != 0)
            goto cleanup;
        fxl_stmt_bind_int(&s, ":id", id);
        if ((rc = fxl_stmt_step(&s)) < 0)
            goto cleanup;
        other_admins = fxl_stmt_int(&s, 0);
        fxl_stmt_finalize(&s);
        if (other_admins == 0) {
            rc = fxl_fail(ctx, FXL_EINVAL, "user '%s' is the last active admin and stays active",
                          login);
            goto cleanup;
        }
    }

    /* The audit row first: the users guard (sql/011) lets the one change
     * through only right after the audit row that names it. */
    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "login", login);
    cJSON_AddBoolToObject(audit, "active", 0);
    if ((rc = fxl_audit_append(ctx, "deactivate", "users", id, audit)) != 0)
        goto cleanup;
    if ((rc = fxl_stmt_prepare(&s, ctx, "UPDATE users SET active = 0 WHERE id = :id AND active = 1")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":id", id);
    if ((rc = fxl_stmt_exec(&s)) != 0)
        goto cleanup;
    if ((rc = fxl_signature_add(ctx, "users", id, "user deactivated")) != 0)
        goto cleanup;
    rc = fxl_commit(ctx);
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    fxl_stmt_finalize(&s);
    cJSON_Delete(audit);
    return rc;
}
