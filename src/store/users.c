/* Users and roles, and the department set-up done by 'fxledger init'. */
#include <stdio.h>
#include <string.h>

#include "fxl/users.h"
#include "store/audit.h"
#include "store/stmt.h"

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

int fxl_init_department(fxl_ctx *ctx, const char *department, const char *timezone,
                        const char *admin_login, const char *admin_full_name)
{
    fxl_stmt s = FXL_STMT_INIT;
    cJSON *settings = cJSON_CreateObject(), *user = cJSON_CreateObject();
    char now[FXL_TIME_LEN];
    size_t i;
    int rc;

    fxl_now(ctx, now);
    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
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
    rc = fxl_commit(ctx);
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    fxl_stmt_finalize(&s);
    cJSON_Delete(settings);
    cJSON_Delete(user);
    return rc;
}
