/* fxledger init: create a new database with its schema, department settings
 * and the first admin user. */
#include <stdio.h>
#include <string.h>

#include <sodium.h>

#include "cli/cli.h"
#include "cli/session.h"
#include "fxl/auth.h"
#include "fxl/users.h"

int cmd_init(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"department", "NAME", "department name printed on reports (required)", NULL},
        {"admin", "LOGIN", "login of the first admin user (default: the acting user)", NULL},
        {"admin-name", "NAME", "full name of the first admin user (required)", NULL},
        {"timezone", "TZ", "department time zone for monthly reports (default UTC)", NULL},
        {NULL, NULL, NULL, NULL}};
    const char *pos[1];
    const char *login, *dept, *full;
    char *pw = NULL;
    int npos, rc;

    rc = cli_parse(env, "init --department NAME --admin-name NAME [--admin LOGIN] [--timezone TZ]",
                   "Creates the database file given by --db (it must not exist yet), applies the\n"
                   "schema, stores the department settings and adds the first admin user, whose\n"
                   "password is asked at the terminal (twice) or read from --password-fd N\n"
                   "(12 to 128 characters, not containing the login).",
                   opts, argc, argv, pos, 0, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    dept = cli_get(opts, "department");
    full = cli_get(opts, "admin-name");
    login = cli_get(opts, "admin") ? cli_get(opts, "admin") : (env->user ? env->user : cli_os_login());
    if (!dept || !*dept) {
        cli_error("--department is required (1 to 200 characters)");
        return CLI_EXIT_USAGE;
    }
    if (!full || !*full) {
        cli_error("--admin-name is required (1 to 200 characters)");
        return CLI_EXIT_USAGE;
    }
    if (!env->interactive && env->password_fd < 0) {
        cli_error("init needs the first admin's password: at a terminal, or with --password-fd N");
        return CLI_EXIT_USAGE;
    }
    if (!(pw = sodium_malloc(FXL_PASSWORD_BUF)))
        return CLI_EXIT_DB;
    if (cli_read_new_password(env, login, pw) != 0) {
        sodium_free(pw);
        return CLI_EXIT_USAGE;
    }
    rc = fxl_open(&env->ctx, env->db_path, FXL_OPEN_CREATE);
    if (rc == 0 && (rc = fxl_auth_init(env->ctx, dept, cli_get(opts, "timezone"), login, full, pw)) != 0) {
        /* The file is ours (fxl_open refuses an existing one): a refused init
         * leaves nothing behind that could later pass for a department. */
        int code = cli_fail(env, rc);
        char side[4096];
        fxl_close(env->ctx);
        env->ctx = NULL;
        remove(env->db_path);
        snprintf(side, sizeof side, "%s-wal", env->db_path);
        remove(side);
        snprintf(side, sizeof side, "%s-shm", env->db_path);
        remove(side);
        sodium_free(pw);
        return code;
    }
    sodium_free(pw);
    if (rc != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "database", env->db_path);
        cJSON_AddStringToObject(o, "department", dept);
        cJSON_AddStringToObject(o, "admin", login);
        cJSON_AddNumberToObject(o, "schema_version", fxl_schema_version(env->ctx));
        return cli_print_json(o);
    }
    printf("created %s for %s (schema version %d); admin user '%s'\n", env->db_path, dept,
           fxl_schema_version(env->ctx), login);
    return CLI_EXIT_OK;
}
