/* fxledger login / logout: open and end a session of the command line. The
 * token lives in a 0600 file in the OS user's state directory; the
 * database keeps only its hash. */
#include <sodium.h>
#include <stdio.h>
#include <string.h>

#include "cli/cli.h"
#include "cli/session.h"

/* Reads a new password; at a terminal twice, to catch a typing error. */
static int read_new_password(cli_env *env, const char *login, char *out)
{
    char *again = NULL, prompt[160];
    int rc;

    snprintf(prompt, sizeof prompt, "fxledger: new password for '%s' (%d to %d characters): ", login,
             FXL_PASSWORD_MIN, FXL_PASSWORD_MAX);
    if ((rc = cli_read_password(env, prompt, out, FXL_PASSWORD_BUF)) != 0)
        return rc;
    if (env->password_fd >= 0)
        return 0;
    if (!(again = sodium_malloc(FXL_PASSWORD_BUF)))
        return -1;
    rc = cli_read_password(env, "fxledger: the new password again: ", again, FXL_PASSWORD_BUF);
    if (rc == 0 && strcmp(again, out) != 0) {
        cli_error("the two new passwords differ; nothing changed");
        rc = -1;
    }
    sodium_free(again);
    return rc;
}

int cli_read_new_password(cli_env *env, const char *login, char *out)
{
    return read_new_password(env, login, out);
}

int cmd_login(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"new-password", NULL, "choose a new password now (read after the current one)", NULL},
        {NULL, NULL, NULL, NULL}};
    const char *pos[1], *login;
    char token[FXL_TOKEN_HEX_LEN + 1] = "", prompt[160];
    char *pw = NULL, *npw = NULL;
    fxl_session_info si;
    int npos, rc, code = CLI_EXIT_OK;

    rc = cli_parse(env, "login [--new-password]",
                   "Asks the password of the user given by --user (default: the OS login name)\n"
                   "and opens a session for this database: later commands act as that user\n"
                   "without asking again, except signing acts, which always re-ask. The session\n"
                   "ends after 'auth_idle_minutes' (15) without use, 'auth_session_hours' (12)\n"
                   "after login, or with 'fxledger logout'. A one-time password (from 'user add'\n"
                   "or 'user reset') must be replaced here by a password of your own.",
                   opts, argc, argv, pos, 0, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    login = env->user ? env->user : cli_os_login();
    if (!env->interactive && env->password_fd < 0) {
        cli_error("login needs a password: at a terminal, or with --password-fd N");
        return CLI_EXIT_PERM;
    }
    pw = sodium_malloc(FXL_PASSWORD_BUF);
    npw = sodium_malloc(FXL_PASSWORD_BUF);
    if (!pw || !npw) {
        code = CLI_EXIT_DB;
        goto cleanup;
    }
    memset(pw, 0, FXL_PASSWORD_BUF);
    memset(npw, 0, FXL_PASSWORD_BUF);
    snprintf(prompt, sizeof prompt, "fxledger: password for '%s': ", login);
    if (cli_read_password(env, prompt, pw, FXL_PASSWORD_BUF) != 0) {
        code = CLI_EXIT_PERM;
        goto cleanup;
    }
    if (cli_get(opts, "new-password") && read_new_password(env, login, npw) != 0) {
        code = CLI_EXIT_USAGE;
        goto cleanup;
    }
    rc = fxl_auth_login(env->ctx, login, pw, npw[0] ? npw : NULL, cli_client(), token, &si);
    if (rc == FXL_EEXPIRED && !npw[0]) {
        fprintf(stderr, "fxledger: %s\n", fxl_errmsg(env->ctx));
        if (read_new_password(env, login, npw) != 0 || !npw[0]) {
            if (!npw[0])
                cli_error("no new password given: not logged in");
            code = CLI_EXIT_PERM;
            goto cleanup;
        }
        rc = fxl_auth_login(env->ctx, login, pw, npw, cli_client(), token, &si);
    }
    if (rc != 0) {
        code = cli_fail(env, rc);
        goto cleanup;
    }
    if (cli_session_save(env->db_path, token, si.user.login) != 0) {
        fxl_session_end(env->ctx, token, cli_client());
        cli_error("could not write the session file in the state directory ($XDG_STATE_HOME "
                  "or ~/.local/state); the session was ended");
        code = CLI_EXIT_DB;
        goto cleanup;
    }
    if (env->json) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "login", si.user.login);
        cJSON_AddStringToObject(o, "full_name", si.user.full_name);
        cJSON_AddStringToObject(o, "role", fxl_role_name(si.user.role));
        cJSON_AddStringToObject(o, "started_at", si.started_at);
        cJSON_AddStringToObject(o, "idle_expires_at", si.idle_expires_at);
        cJSON_AddStringToObject(o, "expires_at", si.expires_at);
        code = cli_print_json(o);
    } else {
        printf("logged in as '%s' (%s, %s); unused, the session ends at %s; at the latest at %s\n",
               si.user.login, si.user.full_name, fxl_role_name(si.user.role), si.idle_expires_at,
               si.expires_at);
    }
cleanup:
    sodium_memzero(token, sizeof token);
    if (pw)
        sodium_free(pw);
    if (npw)
        sodium_free(npw);
    return code;
}

int cmd_logout(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    char token[FXL_TOKEN_HEX_LEN + 1], login[65];
    int npos, rc;

    rc = cli_parse(env, "logout", "Ends the session of this database and removes its file.", opts,
                   argc, argv, pos, 0, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (cli_session_load(env->db_path, token, login) != 0) {
        cli_error("no session for '%s' to end", env->db_path);
        return CLI_EXIT_PERM;
    }
    rc = fxl_session_end(env->ctx, token, cli_client());
    sodium_memzero(token, sizeof token);
    cli_session_remove(env->db_path);
    if (rc != 0 && rc != FXL_EAUTH)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "login", login);
        cJSON_AddBoolToObject(o, "logged_out", 1);
        return cli_print_json(o);
    }
    printf("logged out '%s'\n", login);
    return CLI_EXIT_OK;
}
