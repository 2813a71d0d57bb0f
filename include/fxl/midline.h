/* Midline dose from an entrance-exit pair of one beam: the arithmetic and the
 * geometric mean of the entrance and exit doses (ESTRO Booklet 1, Van Dam and
 * Marinello; docs/expected-dose.md section 5). Pure computation. Units: cGy. */
#ifndef FXL_MIDLINE_H
#define FXL_MIDLINE_H

#include "fxl/core.h"

typedef struct fxl_midline {
    int computed;              /* 1 if the estimates hold values */
    double entrance_cgy;       /* D_E, as given */
    double exit_cgy;           /* D_X, as given */
    double transmission;       /* D_X / D_E; NaN when not computed */
    double arithmetic_cgy;     /* (D_E + D_X) / 2 */
    double geometric_cgy;      /* sqrt(D_E x D_X): the estimate shown */
    fxl_reasons reasons;       /* why not computed */
} fxl_midline;

/* Estimates the midline dose of one beam from its entrance dose (d_max below
 * the entrance surface) and exit dose (d_max before the exit surface). Both
 * must be finite and > 0, and the exit dose must not exceed the entrance dose
 * (a transmission above 1 is not physical for a photon beam through a
 * patient: probably an entry or set-up error). Otherwise computed is 0 with a
 * reason. Returns 0, or FXL_EINVAL for a NULL out. */
int fxl_midline_estimate(fxl_midline *out, double entrance_cgy, double exit_cgy);

/* Name of the method, for listings and reports (one line, no full stop). */
const char *fxl_midline_method(void);

#endif
