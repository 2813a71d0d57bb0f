/* Finding the id of a row by one text key (a detector serial, a machine
 * name, a patient MRN). Private to src/store. */
#ifndef FXL_STORE_LOOKUP_H
#define FXL_STORE_LOOKUP_H

#include <stdint.h>

#include "fxl/fxl.h"

/* Runs `sql`, which selects an id and has the one parameter `param` (such as
 * ":serial"), bound to `value`; the first row's id goes to *out_id. Returns
 * 1 when found, 0 when there is no such row (no message set: the caller
 * names what is unknown), or a negative FXL_E* code. `sql` is a string
 * literal: the connection keeps the statement (fxl_stmt_prepare_cached). */
int fxl_lookup_id(fxl_ctx *ctx, int64_t *out_id, const char *sql, const char *param, const char *value);

#endif
