/* Midline dose estimates for the entrance-exit pairs of logged fractions:
 * when a field (one beam) has a current entrance and a current exit reading
 * in the same fraction, its midline dose is estimated from the two
 * corrected doses with fxl_midline_estimate (fxl/midline.h: geometric mean,
 * arithmetic mean beside it; ESTRO Booklet 1). Pure grouping over results
 * already read; no database. docs/expected-dose.md section 5. Units: cGy. */
#ifndef FXL_RECORD_MIDLINE_H
#define FXL_RECORD_MIDLINE_H

#include <stddef.h>
#include <stdint.h>

#include "fxl/midline.h"
#include "fxl/record.h"

typedef struct fxl_midline_pair {
    int64_t fraction_id;
    int fraction_number;
    char plan[65];
    char field[65];
    int64_t entrance_id;           /* measurement ids */
    int64_t exit_id;
    fxl_midline estimate;          /* computed 0, with the reason, when either
                                      reading gave no dose result (not
                                      evaluable, implausible) or the pair is
                                      not physical */
} fxl_midline_pair;

/* The pairs of one logged fraction (fxl_record_fraction's result), in the
 * order of their entrance readings. *out is malloc'ed (free(); NULL when *n
 * is 0). FXL_EIO when out of memory. */
int fxl_record_midlines(fxl_midline_pair **out, size_t *n, const fxl_record_result *r);

/* The pairs in a history listing: per fraction and field, the current
 * (not superseded) entrance and exit rows. Same ownership as above. */
int fxl_history_midlines(fxl_midline_pair **out, size_t *n, const fxl_history_row *rows, size_t n_rows);

#endif
