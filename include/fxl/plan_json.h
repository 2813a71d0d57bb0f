/* Reading a plan file in fxledger's own JSON format (docs/format-plan.md)
 * into an fxl_plan_spec. Checks syntax, keys, types and every value's range;
 * names, patients and beams are resolved later by fxl_plan_import. */
#ifndef FXL_PLAN_JSON_H
#define FXL_PLAN_JSON_H

#include <stddef.h>

#include "fxl/plans.h"

/* The value of the "format" key every plan file carries. */
#define FXL_PLAN_FORMAT "fxledger-plan/1"

/* Parses `len` bytes of `text` (need not be NUL-terminated). `source` names
 * the file in messages. On failure returns FXL_EINVAL with a one-line message
 * in ctx (ctx may be NULL): the line and column of a syntax error, or the
 * JSON path of the bad value with its accepted range. On success *out is
 * filled; release it with fxl_plan_spec_release (also safe after failure). */
int fxl_plan_json_parse(fxl_ctx *ctx, fxl_plan_spec *out, const char *text, size_t len,
                        const char *source);

/* Reads and parses the file at `path` (FXL_EIO when it cannot be read). */
int fxl_plan_json_read(fxl_ctx *ctx, fxl_plan_spec *out, const char *path);

#endif
