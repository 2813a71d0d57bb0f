/* The seam between logging a fraction and the rules over history: the record
 * path calls this inside its write transaction, after the fraction and all
 * its measurement rows are written. Private to src/store. */
#ifndef FXL_STORE_RULES_HOOK_H
#define FXL_STORE_RULES_HOOK_H

#include <stdint.h>

#include "store/ctx.h"

/* Evaluates the rules over history that look beyond one measurement (missing
 * required measurements, calibration expiry, accumulated dose, detector
 * drift) for the fraction just written, and opens review items for their
 * hits, in the caller's transaction. Returns 0 or a negative FXL_E code (the
 * caller then rolls the whole fraction back). */
int fxl_rules_after_record(fxl_ctx *ctx, int64_t fraction_id);

#endif
