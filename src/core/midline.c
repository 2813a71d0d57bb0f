/* Midline dose from the entrance and exit doses of one beam. The geometric
 * mean assumes the dose falls exponentially between the two points; the
 * arithmetic mean is shown beside it (ESTRO Booklet 1, Van Dam and Marinello,
 * 2nd ed. 2006, from memory; docs/expected-dose.md section 5). */
#include <math.h>
#include <string.h>

#include "fxl/fxl.h"
#include "fxl/midline.h"

const char *fxl_midline_method(void)
{
    return "geometric mean of entrance and exit dose, sqrt(D_E x D_X) (ESTRO Booklet 1)";
}

int fxl_midline_estimate(fxl_midline *out, double entrance_cgy, double exit_cgy)
{
    if (!out)
        return FXL_EINVAL;
    memset(out, 0, sizeof *out);
    out->entrance_cgy = entrance_cgy;
    out->exit_cgy = exit_cgy;
    out->transmission = out->arithmetic_cgy = out->geometric_cgy = NAN;
    if (!isfinite(entrance_cgy) || !(entrance_cgy > 0))
        fxl_reasons_add(&out->reasons, "entrance dose '%g' cGy must be > 0", entrance_cgy);
    if (!isfinite(exit_cgy) || !(exit_cgy > 0))
        fxl_reasons_add(&out->reasons, "exit dose '%g' cGy must be > 0", exit_cgy);
    if (out->reasons.n > 0)
        return 0;
    if (exit_cgy > entrance_cgy) {
        fxl_reasons_add(&out->reasons,
                        "exit dose %.1f cGy exceeds entrance dose %.1f cGy: a transmission above 1 is "
                        "not physical (check the readings and which is entrance and exit)",
                        exit_cgy, entrance_cgy);
        return 0;
    }
    out->transmission = exit_cgy / entrance_cgy;
    out->arithmetic_cgy = (entrance_cgy + exit_cgy) / 2.0;
    /* Exponential fall-off between two points: the value halfway is the
     * geometric mean of the two ends. */
    out->geometric_cgy = sqrt(entrance_cgy * exit_cgy);
    out->computed = 1;
    return 0;
}
