/* The independent model at plan import, from inside the import transaction:
 * the beam data in force for a beam, the model's expected dose for one field
 * point, and the cross-check level. Private to src/store. */
#ifndef FXL_STORE_MODEL_STORE_H
#define FXL_STORE_MODEL_STORE_H

#include <stdint.h>

#include "fxl/beam_model.h"
#include "store/ctx.h"

/* The model's expected dose for a field point of beam `beam_id` (names for
 * messages in machine/beam, modality "photon" or "electron"), with the beam
 * data in force at `at`. Never fails for a missing model: an electron beam,
 * a beam without beam data, stored data that cannot be read or a value
 * outside a table leave out->computed 0 with the reason, and
 * *out_beam_data_id the version used (0 when none). Returns 0, or a negative
 * FXL_E code for a database failure. */
int fxl_model_eval_field(fxl_ctx *ctx, fxl_model_result *out, int64_t *out_beam_data_id,
                         int64_t beam_id, const char *machine, const char *beam,
                         const char *modality, const fxl_model_input *in, const char *at);

/* Setting model_crosscheck_pct, or FXL_MODEL_CROSSCHECK_PCT_DEFAULT when it
 * is not stored. A stored value that is not a number in (0, 50] is
 * FXL_EINVAL naming the key. */
int fxl_model_crosscheck_level(fxl_ctx *ctx, double *out_pct);

#endif
