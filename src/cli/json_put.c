/* Null-or-value members of the program's JSON output (see json_put.h). */
#include <math.h>

#include "cli/json_put.h"

void cli_json_put_number(cJSON *o, const char *key, double v)
{
    if (isfinite(v))
        cJSON_AddNumberToObject(o, key, v);
    else
        cJSON_AddNullToObject(o, key);
}

void cli_json_put_id(cJSON *o, const char *key, int64_t id)
{
    if (id)
        cJSON_AddNumberToObject(o, key, (double)id);
    else
        cJSON_AddNullToObject(o, key);
}

void cli_json_put_text(cJSON *o, const char *key, const char *v)
{
    if (v && *v)
        cJSON_AddStringToObject(o, key, v);
    else
        cJSON_AddNullToObject(o, key);
}
