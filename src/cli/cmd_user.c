/* fxledger user: add, list and deactivate users. Users are never deleted. */
#include <stdlib.h>
#include <string.h>

#include <sodium.h>

#include "cli/cli.h"
#include "cli/session.h"
#include "fxl/auth.h"
#include "fxl/users.h"

static int user_add(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"name", "\"FULL NAME\"", "the user's full name (required)", NULL},
        {"role", "ROLE", "therapist, physicist, auditor or admin (required)", NULL},
        {NULL, NULL, NULL, NULL}};
    const char *pos[1], *name, *role_text;
    fxl_role role;
    char otp[FXL_OTP_LEN + 1];
    int64_t id = 0;
    int npos, rc;

    rc = cli_parse(env, "user add LOGIN --name \"FULL NAME\" --role therapist|physicist|auditor|admin",
                   "Adds a user with a one-time password, printed once: hand it over in person;\n"
                   "the user replaces it at the first 'fxledger login'. Admin only. Therapists\n"
                   "log fractions; physicists keep the physics data and work the review queue;\n"
                   "auditors only read; admins also manage users.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    name = cli_get(opts, "name");
    role_text = cli_get(opts, "role");
    if (npos != 1) {
        cli_error("user add needs a LOGIN (see 'fxledger user add --help')");
        return CLI_EXIT_USAGE;
    }
    if (!name || !*name) {
        cli_error("--name is required (1 to 200 characters)");
        return CLI_EXIT_USAGE;
    }
    if (!role_text || fxl_role_parse(&role, role_text) != 0) {
        cli_error("role '%s' must be therapist, physicist, auditor or admin",
                  role_text ? role_text : "");
        return CLI_EXIT_USAGE;
    }
    if ((rc = fxl_auth_user_add(env->ctx, &id, pos[0], name, role, otp)) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddNumberToObject(o, "id", (double)id);
        cJSON_AddStringToObject(o, "login", pos[0]);
        cJSON_AddStringToObject(o, "full_name", name);
        cJSON_AddStringToObject(o, "role", fxl_role_name(role));
        cJSON_AddBoolToObject(o, "active", 1);
        cJSON_AddStringToObject(o, "one_time_password", otp);
        sodium_memzero(otp, sizeof otp);
        return cli_print_json(o);
    }
    printf("added user '%s' (%s), role %s\n", pos[0], name, fxl_role_name(role));
    printf("one-time password for '%s': %s (to be changed at the first 'fxledger login')\n", pos[0], otp);
    sodium_memzero(otp, sizeof otp);
    return CLI_EXIT_OK;
}

static int user_list(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    fxl_user *users = NULL;
    size_t n = 0, i;
    int npos, rc;

    rc = cli_parse(env, "user list", "Lists every user, active or deactivated, with their role.",
                   opts, argc, argv, pos, 0, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if ((rc = fxl_user_list(env->ctx, &users, &n)) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *arr = cJSON_CreateArray();
        for (i = 0; i < n; i++) {
            cJSON *o = cJSON_CreateObject();
            cJSON_AddNumberToObject(o, "id", (double)users[i].id);
            cJSON_AddStringToObject(o, "login", users[i].login);
            cJSON_AddStringToObject(o, "full_name", users[i].full_name);
            cJSON_AddStringToObject(o, "role", fxl_role_name(users[i].role));
            cJSON_AddBoolToObject(o, "active", users[i].active);
            cJSON_AddStringToObject(o, "created_at", users[i].created_at);
            cJSON_AddItemToArray(arr, o);
        }
        free(users);
        return cli_print_json(arr);
    }
    printf("%-20s %-10s %-8s %s\n", "LOGIN", "ROLE", "ACTIVE", "NAME");
    for (i = 0; i < n; i++)
        printf("%-20s %-10s %-8s %s\n", users[i].login, fxl_role_name(users[i].role),
               users[i].active ? "yes" : "no", users[i].full_name);
    printf("%zu user%s\n", n, n == 1 ? "" : "s");
    free(users);
    return CLI_EXIT_OK;
}

static int user_deactivate(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    int npos, rc;

    rc = cli_parse(env, "user deactivate LOGIN",
                   "Deactivates a user: they can no longer act; every record they signed stays.\n"
                   "Admin only. Users are never deleted. You cannot deactivate yourself or the\n"
                   "last active admin.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("user deactivate needs a LOGIN (see 'fxledger user deactivate --help')");
        return CLI_EXIT_USAGE;
    }
    if ((rc = cli_sign_begin(env, "user deactivated")) != 0)
        return rc;
    if ((rc = fxl_user_deactivate(env->ctx, pos[0])) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "login", pos[0]);
        cJSON_AddBoolToObject(o, "active", 0);
        return cli_print_json(o);
    }
    printf("deactivated user '%s'\n", pos[0]);
    return CLI_EXIT_OK;
}

static int user_passwd(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    char *old = NULL, *npw = NULL, prompt[160];
    int npos, rc, code = CLI_EXIT_OK;

    rc = cli_parse(env, "user passwd",
                   "Changes your own password: asks the current one, then the new one (twice at a\n"
                   "terminal; from --password-fd one line each). 12 to 128 characters, not\n"
                   "containing your login. Your signing key is sealed again under the new one.",
                   opts, argc, argv, pos, 0, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    old = sodium_malloc(FXL_PASSWORD_BUF);
    npw = sodium_malloc(FXL_PASSWORD_BUF);
    if (!old || !npw) {
        code = CLI_EXIT_DB;
        goto cleanup;
    }
    if (env->password && !env->password_used) {
        memcpy(old, env->password, FXL_PASSWORD_BUF);
    } else {
        snprintf(prompt, sizeof prompt, "fxledger: current password for '%s': ", fxl_user_login(env->ctx));
        if (cli_read_password(env, prompt, old, FXL_PASSWORD_BUF) != 0) {
            code = CLI_EXIT_PERM;
            goto cleanup;
        }
    }
    if (cli_read_new_password(env, fxl_user_login(env->ctx), npw) != 0) {
        code = CLI_EXIT_USAGE;
        goto cleanup;
    }
    if ((rc = fxl_auth_change_password(env->ctx, old, npw, cli_client())) != 0) {
        code = cli_fail(env, rc);
        goto cleanup;
    }
    if (env->json) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "login", fxl_user_login(env->ctx));
        cJSON_AddBoolToObject(o, "password_changed", 1);
        code = cli_print_json(o);
    } else {
        printf("password of '%s' changed\n", fxl_user_login(env->ctx));
    }
cleanup:
    if (old)
        sodium_free(old);
    if (npw)
        sodium_free(npw);
    return code;
}

static int user_reset(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    char otp[FXL_OTP_LEN + 1];
    int npos, rc;

    rc = cli_parse(env, "user reset LOGIN",
                   "Replaces a user's password with a one-time password (printed once), ends their\n"
                   "sessions and clears a lock; they choose a new password at the next login and\n"
                   "get a new signing key (older signatures keep verifying). Admin only.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("user reset needs a LOGIN (see 'fxledger user reset --help')");
        return CLI_EXIT_USAGE;
    }
    if ((rc = fxl_auth_reset_password(env->ctx, pos[0], otp, cli_client())) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "login", pos[0]);
        cJSON_AddStringToObject(o, "one_time_password", otp);
        sodium_memzero(otp, sizeof otp);
        return cli_print_json(o);
    }
    printf("one-time password for '%s': %s (to be changed at the next 'fxledger login')\n", pos[0], otp);
    sodium_memzero(otp, sizeof otp);
    return CLI_EXIT_OK;
}

static int user_unlock(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    int npos, rc;

    rc = cli_parse(env, "user unlock LOGIN",
                   "Unlocks an account locked by failed logins (admin only).", opts, argc, argv, pos,
                   1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("user unlock needs a LOGIN (see 'fxledger user unlock --help')");
        return CLI_EXIT_USAGE;
    }
    if ((rc = fxl_auth_unlock(env->ctx, pos[0], cli_client())) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "login", pos[0]);
        cJSON_AddBoolToObject(o, "locked", 0);
        return cli_print_json(o);
    }
    printf("unlocked user '%s'\n", pos[0]);
    return CLI_EXIT_OK;
}

static int user_status(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    fxl_auth_state st;
    int npos, rc;

    rc = cli_parse(env, "user status [LOGIN]",
                   "Password and lock state of an account (yours by default; admins: anyone's).",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if ((rc = fxl_auth_state_get(env->ctx, npos ? pos[0] : fxl_user_login(env->ctx), &st)) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "login", st.login);
        cJSON_AddBoolToObject(o, "has_password", st.has_password);
        cJSON_AddBoolToObject(o, "must_change", st.must_change);
        cJSON_AddNumberToObject(o, "recent_failures", st.recent_failures);
        cJSON_AddBoolToObject(o, "locked", st.locked);
        if (st.locked)
            cJSON_AddStringToObject(o, "locked_until", st.locked_until);
        else
            cJSON_AddNullToObject(o, "locked_until");
        if (st.last_login_at[0])
            cJSON_AddStringToObject(o, "last_login_at", st.last_login_at);
        else
            cJSON_AddNullToObject(o, "last_login_at");
        cJSON_AddBoolToObject(o, "has_signing_key", st.has_signing_key);
        return cli_print_json(o);
    }
    printf("user '%s': %s%s; %d recent failed login%s; %s%s; last login %s; %s\n", st.login,
           st.has_password ? "password set" : "no password",
           st.must_change ? " (one-time, to be changed)" : "", st.recent_failures,
           st.recent_failures == 1 ? "" : "s", st.locked ? "locked until " : "not locked",
           st.locked ? st.locked_until : "", st.last_login_at[0] ? st.last_login_at : "never",
           st.has_signing_key ? "signing key present" : "no signing key yet");
    return CLI_EXIT_OK;
}

static const cli_sub subs[] = {
    {"add", user_add, "add a user with a role and a one-time password (admin)"},
    {"list", user_list, "list users and their roles"},
    {"deactivate", user_deactivate, "deactivate a user; records stay (admin, signed)"},
    {"passwd", user_passwd, "change your own password"},
    {"reset", user_reset, "give a user a one-time password (admin)"},
    {"unlock", user_unlock, "unlock an account locked by failed logins (admin)"},
    {"status", user_status, "password and lock state of an account"},
    {NULL, NULL, NULL}};

int cmd_user(cli_env *env, int argc, char **argv)
{
    return cli_dispatch_sub(env, subs, "Users and their roles: therapist, physicist, auditor, admin.",
                            argc, argv);
}
