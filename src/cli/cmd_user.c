/* fxledger user: add, list and deactivate users. Users are never deleted. */
#include <stdlib.h>
#include <string.h>

#include "cli/cli.h"
#include "fxl/users.h"

static int user_add(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"name", "\"FULL NAME\"", "the user's full name (required)", NULL},
        {"role", "ROLE", "therapist, physicist, auditor or admin (required)", NULL},
        {NULL, NULL, NULL, NULL}};
    const char *pos[1], *name, *role_text;
    fxl_role role;
    int64_t id = 0;
    int npos, rc;

    rc = cli_parse(env, "user add LOGIN --name \"FULL NAME\" --role therapist|physicist|auditor|admin",
                   "Adds a user who can then act with --user LOGIN. Admin only. Therapists log\n"
                   "fractions; physicists keep the physics data and work the review queue;\n"
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
    if ((rc = fxl_user_add(env->ctx, &id, pos[0], name, role)) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddNumberToObject(o, "id", (double)id);
        cJSON_AddStringToObject(o, "login", pos[0]);
        cJSON_AddStringToObject(o, "full_name", name);
        cJSON_AddStringToObject(o, "role", fxl_role_name(role));
        cJSON_AddBoolToObject(o, "active", 1);
        return cli_print_json(o);
    }
    printf("added user '%s' (%s), role %s\n", pos[0], name, fxl_role_name(role));
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

static const cli_sub subs[] = {
    {"add", user_add, "add a user with a role (admin)"},
    {"list", user_list, "list users and their roles"},
    {"deactivate", user_deactivate, "deactivate a user; records stay (admin)"},
    {NULL, NULL, NULL}};

int cmd_user(cli_env *env, int argc, char **argv)
{
    return cli_dispatch_sub(env, subs, "Users and their roles: therapist, physicist, auditor, admin.",
                            argc, argv);
}
