/* What the worklist, the console holds and the field-by-field fraction
 * share: the fields of a plan for one fraction (due by policy, measured,
 * the detector to place and its check), the open items of a patient and
 * its detectors, the open fraction of a plan. Private to src/store. */
#ifndef FXL_STORE_WORKLIST_INT_H
#define FXL_STORE_WORKLIST_INT_H

#include <stddef.h>
#include <stdint.h>

#include "fxl/worklist.h"
#include "store/ctx.h"

/* The fields of plan_id as fraction `number` treated at `at` sees them: due
 * by policy (fxl_rule_due), measured in fraction_id (0 = none), detector to
 * place and its check at `at`. due_dates (may be NULL) receives, per field,
 * the weekly due date ("" otherwise); first_number_out (may be NULL) the
 * plan's first fraction number. *out heap (free()). */
int wl_fields(fxl_ctx *ctx, fxl_worklist_field **out, size_t *n, char (**due_dates)[11],
              int *first_number_out, int64_t plan_id, int64_t patient_id, int number,
              const char *at, int64_t fraction_id);

/* Open items of the patient and of the detectors (ids, may be NULL / 0),
 * holds first. *out heap (free()). */
int wl_items(fxl_ctx *ctx, fxl_worklist_item **out, size_t *n, int64_t patient_id,
             const int64_t *detector_ids, size_t n_detectors);

/* The latest open fraction (begun, not closed) of a plan: id 0 when none. */
int wl_open_fraction(fxl_ctx *ctx, int64_t *fraction_id, int *number, char at[FXL_TIME_LEN],
                     int64_t plan_id);

/* Detector ids of the serials in fields[] ("" skipped, duplicates once);
 * *ids heap (free()). */
int wl_field_detectors(fxl_ctx *ctx, int64_t **ids, size_t *n, const fxl_worklist_field *fields,
                       size_t n_fields);

#endif
