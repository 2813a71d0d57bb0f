/* Members of the JSON the program prints (--json) where a value that is not
 * there is printed as null. */
#ifndef FXL_CLI_JSON_PUT_H
#define FXL_CLI_JSON_PUT_H

#include <cjson/cJSON.h>
#include <stdint.h>

/* key: v, or null when v is not finite (NaN is "not given"). */
void cli_json_put_number(cJSON *o, const char *key, double v);

/* key: id, or null when id is 0 (no row). */
void cli_json_put_id(cJSON *o, const char *key, int64_t id);

/* key: v, or null when v is NULL or "". */
void cli_json_put_text(cJSON *o, const char *key, const char *v);

#endif
