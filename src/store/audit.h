/* The hash-chained audit log: every write appends one row inside the same
 * transaction. Canonical form and chain rule: docs/audit.md. Private to
 * src/store; verification is public in fxl/audit.h. */
#ifndef FXL_STORE_AUDIT_H
#define FXL_STORE_AUDIT_H

#include <cjson/cJSON.h>
#include <stdint.h>

#include "store/ctx.h"

/* Appends one audit row: `action` such as "create", "record", "retire";
 * `entity` the table name; `content` a JSON object describing the write
 * (printed unformatted in the order its keys were added; borrowed). Must be
 * called inside the caller's write transaction. */
int fxl_audit_append(fxl_ctx *ctx, const char *action, const char *entity,
                     int64_t entity_id, const cJSON *content);

#endif
