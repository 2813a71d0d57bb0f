/* Reading the beam data of the independent expected-dose model from
 * fxledger's own JSON format (docs/format-beam-data.md) into an
 * fxl_beam_model, and writing a model result (every factor used) as JSON for
 * storage with a field. Checks syntax, keys, types, every value's range, the
 * ordering of every table axis and the normalisation of the output factors.
 * No database: machines and beams are resolved by the caller. */
#ifndef FXL_BEAM_JSON_H
#define FXL_BEAM_JSON_H

#include <stddef.h>

#include "fxl/beam_model.h"
#include "fxl/fxl.h"

/* The value of the "format" key every beam-data file carries. */
#define FXL_BEAM_DATA_FORMAT "fxledger-beam-data/1"

/* Most points on one table axis. */
#define FXL_BEAM_AXIS_MAX 64

/* Parses `len` bytes of `text` (need not be NUL-terminated); `source` names
 * the file in messages. On failure returns FXL_EINVAL with a one-line message
 * in ctx (ctx may be NULL): the line and column of a syntax error, or the
 * JSON path of the bad value with its accepted range; *out is then empty. On
 * success *out is filled; release it with fxl_beam_model_release (also safe
 * after failure). */
int fxl_beam_json_parse(fxl_ctx *ctx, fxl_beam_model *out, const char *text, size_t len,
                        const char *source);

/* Reads and parses the file at `path` (FXL_EIO when it cannot be read). */
int fxl_beam_json_read(fxl_ctx *ctx, fxl_beam_model *out, const char *path);

/* The result of fxl_model_expected as one JSON object (compact, one line):
 * every factor by name, NaN as null, and the reasons as an array of strings;
 * the keys are listed in docs/expected-dose.md. *out is malloc'ed (free with
 * free()). FXL_EINVAL for NULL arguments, FXL_EIO when out of memory. */
int fxl_model_result_json(char **out, const fxl_model_result *r);

#endif
