/* Lookups in commissioned correction tables: linear interpolation for the
 * continuous parameters and exact match for the discrete ones. A table is
 * never extrapolated; rules and sources in docs/physics.md. */
#include <math.h>
#include <stddef.h>

#include "fxl/core.h"
#include "fxl/fxl.h"

/* Two x values this close are the same table point: far below any setting a
 * person can make (0.1 mm, 0.1 deg), far above double rounding. */
#define SAME_X 1e-6

static int table_valid(const double *xs, const double *ys, size_t n)
{
    size_t i;

    if (!xs || !ys || n == 0)
        return 0;
    for (i = 0; i < n; i++) {
        if (!isfinite(xs[i]) || !isfinite(ys[i]))
            return 0;
        if (i > 0 && !(xs[i] > xs[i - 1]))
            return 0;
    }
    return 1;
}

int fxl_interp_linear(double *out_y, const double *xs, const double *ys,
                      size_t n, double x)
{
    size_t i;

    if (!out_y || !table_valid(xs, ys, n) || !isfinite(x))
        return FXL_EINVAL;
    /* The ends are inclusive to within SAME_X so that a value computed in
     * floating point (an equivalent square, say) is not refused for being a
     * rounding error past the last point; beyond that nothing is answered. */
    if (x < xs[0] - SAME_X || x > xs[n - 1] + SAME_X)
        return FXL_ERANGE;
    for (i = 0; i < n; i++) {
        if (fabs(x - xs[i]) <= SAME_X) {
            *out_y = ys[i];
            return 0;
        }
    }
    for (i = 0; i + 1 < n; i++) {
        if (x > xs[i] && x < xs[i + 1]) {
            double t = (x - xs[i]) / (xs[i + 1] - xs[i]);
            *out_y = ys[i] + t * (ys[i + 1] - ys[i]);
            return 0;
        }
    }
    return FXL_ERANGE;  /* not reached for a valid table */
}

int fxl_lookup_exact(double *out_y, const double *xs, const double *ys,
                     size_t n, double x)
{
    size_t i;

    if (!out_y || !table_valid(xs, ys, n) || !isfinite(x))
        return FXL_EINVAL;
    for (i = 0; i < n; i++) {
        if (fabs(x - xs[i]) <= SAME_X) {
            *out_y = ys[i];
            return 0;
        }
    }
    return FXL_ERANGE;
}
