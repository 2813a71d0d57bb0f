/* fxledger setting: list the department settings and change one. */
#include <stdlib.h>
#include <string.h>

#include "cli/cli.h"
#include "cli/table.h"
#include "fxl/settings.h"

static int setting_list(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    fxl_setting *list = NULL;
    size_t n = 0, i;
    int npos, rc;

    rc = cli_parse(env, "setting list",
                   "Lists the department settings. A known setting that is not stored shows the\n"
                   "value used in its place, marked '(default)'.",
                   opts, argc, argv, pos, 0, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if ((rc = fxl_require_role(env->ctx, FXL_ROLES_ANY, "listing settings")) != 0)
        return cli_fail(env, rc);
    if ((rc = fxl_setting_list(env->ctx, &list, &n)) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *arr = cJSON_CreateArray();
        for (i = 0; i < n; i++) {
            cJSON *o = cJSON_CreateObject();
            cJSON_AddStringToObject(o, "key", list[i].key);
            cJSON_AddStringToObject(o, "value", list[i].value);
            cJSON_AddBoolToObject(o, "default", list[i].is_default);
            cJSON_AddBoolToObject(o, "known", list[i].known);
            cJSON_AddStringToObject(o, "about", list[i].about);
            cJSON_AddItemToArray(arr, o);
        }
        free(list);
        return cli_print_json(arr);
    }
    /* 80 columns: a long value (the dispositions) wraps under itself */
    for (i = 0; i < n; i++) {
        char lead[96], value[2200];
        snprintf(lead, sizeof lead, "%-29s ", list[i].key);
        snprintf(value, sizeof value, "%s%s%s", list[i].value[0] ? list[i].value : "(empty)",
                 list[i].is_default ? " (default)" : "", list[i].known ? "" : " (unknown key)");
        cli_wrap_hang(stdout, lead, 30, value, CLI_WIDTH);
    }
    free(list);
    return CLI_EXIT_OK;
}

static int setting_set(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const fxl_setting_def *d;
    const char *pos[2];
    char about[4096];
    size_t off;
    int npos, rc;

    off = (size_t)snprintf(about, sizeof about,
                           "Changes one department setting (physicist or admin), with an audit row.\n"
                           "Known keys:\n");
    for (d = fxl_setting_defs(); d->key && off < sizeof about; d++)
        off += (size_t)snprintf(about + off, sizeof about - off, "  %-26s %s (%s)\n", d->key,
                                d->about, d->accepts);
    if (off > 0 && off < sizeof about)
        about[off - 1] = '\0';
    rc = cli_parse(env, "setting set KEY VALUE", about, opts, argc, argv, pos, 2, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 2) {
        cli_error("setting set needs KEY and VALUE (see 'fxledger setting set --help')");
        return CLI_EXIT_USAGE;
    }
    if ((rc = fxl_setting_change(env->ctx, pos[0], pos[1])) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "key", pos[0]);
        cJSON_AddStringToObject(o, "value", pos[1]);
        return cli_print_json(o);
    }
    printf("setting %s = %s\n", pos[0], pos[1][0] ? pos[1] : "(empty)");
    return CLI_EXIT_OK;
}

static const cli_sub subs[] = {
    {"list", setting_list, "list the department settings"},
    {"set", setting_set, "change one setting (physicist or admin)"},
    {NULL, NULL, NULL}};

int cmd_setting(cli_env *env, int argc, char **argv)
{
    return cli_dispatch_sub(env, subs, "Department settings (docs/settings.md).", argc, argv);
}
