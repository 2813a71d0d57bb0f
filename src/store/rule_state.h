/* The kept state of the rules over history (sql/015_rule_state.sql): the
 * dose a detector has counted since its calibration and its drift charts,
 * continued with the rows logged since instead of read again, and worked
 * out again from the measurements whenever a row cannot simply be
 * continued. docs/rules.md ("Kept state"). Private to src/store. */
#ifndef FXL_STORE_RULE_STATE_H
#define FXL_STORE_RULE_STATE_H

#include <stddef.h>
#include <stdint.h>

#include "fxl/drift.h"
#include "store/ctx.h"

/* The counted dose of detector_id since its latest calibration (all time if
 * never calibrated), as the dose-limit rule defines it (docs/rules.md), and
 * that calibration (*cal_id 0 and cal_at '' when none). Updates the kept
 * row; inside the caller's write transaction. */
int fxl_dose_since_calibration(fxl_ctx *ctx, int64_t detector_id, int64_t *cal_id,
                               char cal_at[FXL_TIME_LEN], double *total);

/* The drift chart of one series (detector, beam, point) since `since`, its
 * restart point: *r as fxl_drift_cusum gives it for every result of the
 * series (r->n == 0: no result yet). Updates the kept row; inside the
 * caller's write transaction. FXL_EINVAL for settings the chart refuses. */
int fxl_drift_chart(fxl_ctx *ctx, fxl_drift_result *r, int64_t detector_id, int64_t beam_id,
                    const char *point, const char *since, const fxl_drift_params *p);

/* `fxledger verify`: works out every kept row again from the measurements
 * as they stood at its through_id and compares. *checked counts the rows;
 * bad receives the first row that differs, '' when none. */
int fxl_rule_state_verify(fxl_ctx *ctx, long long *checked, char *bad, size_t size);

#endif
