/* Showing the electronic signatures of a row: who (login and printed name),
 * when and what it means. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli/signature_view.h"
#include "cli/table.h"

cJSON *signatures_json(cli_env *env, const char *entity, int64_t id)
{
    cJSON *arr = cJSON_CreateArray();
    fxl_signature *g = NULL;
    size_t n = 0, i;

    if (fxl_signature_list(env->ctx, entity, id, &g, &n) != 0)
        return arr;
    for (i = 0; i < n; i++) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "signer", g[i].login);
        cJSON_AddStringToObject(o, "printed_name", g[i].printed_name);
        cJSON_AddStringToObject(o, "signed_at", g[i].signed_at);
        cJSON_AddStringToObject(o, "meaning", g[i].meaning);
        cJSON_AddItemToArray(arr, o);
    }
    free(g);
    return arr;
}

void print_signatures(cli_env *env, const char *entity, int64_t id, const char *indent)
{
    fxl_signature *g = NULL;
    size_t n = 0, i;

    if (fxl_signature_list(env->ctx, entity, id, &g, &n) != 0)
        return;
    for (i = 0; i < n; i++) {
        char when[48], line[900];
        cli_local_time(env, when, sizeof when, g[i].signed_at);
        snprintf(line, sizeof line, "signed by %s (%s) at %s: %s", g[i].printed_name, g[i].login,
                 when, g[i].meaning);
        cli_wrap_hang(stdout, indent, (int)strlen(indent) + 2, line, CLI_WIDTH);
    }
    free(g);
}
