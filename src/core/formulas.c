/* The small closed-form formulas of in vivo dosimetry: equivalent square,
 * temperature correction, deviation from the expected dose, and the mean and
 * sample standard deviation used for calibration readings and reviews. */
#include <math.h>
#include <stddef.h>

#include "fxl/core.h"
#include "fxl/fxl.h"

/* Area-to-perimeter rule: a rectangle scatters like the square of equal
 * 4A/P, side 2XY/(X+Y) (Sterling et al., 1964; Khan, The Physics of
 * Radiation Therapy; from memory). */
double fxl_equiv_square_cm(double x_cm, double y_cm)
{
    if (!isfinite(x_cm) || !isfinite(y_cm) || x_cm <= 0 || y_cm <= 0)
        return NAN;
    return 2.0 * x_cm * y_cm / (x_cm + y_cm);
}

/* A diode reads (1 + a (T - T_cal)) times its calibrated response at skin
 * temperature T, so the reading is divided by that (AAPM Report 87 / TG-62;
 * ESTRO Booklet 5). NaN if an input is not finite or the denominator is not
 * positive (an absurd coefficient), so the caller cannot use it as a factor. */
double fxl_temp_correction(double coeff_per_c, double temp_c, double temp_cal_c)
{
    double denom;

    if (!isfinite(coeff_per_c) || !isfinite(temp_c) || !isfinite(temp_cal_c))
        return NAN;
    denom = 1.0 + coeff_per_c * (temp_c - temp_cal_c);
    if (!(denom > 0))
        return NAN;
    return 1.0 / denom;
}

int fxl_mean_sd(double *out_mean, double *out_sd, const double *v, size_t n)
{
    double sum = 0, mean, ss = 0;
    size_t i;

    if (!v || n == 0)
        return FXL_EINVAL;
    for (i = 0; i < n; i++) {
        if (!isfinite(v[i]))
            return FXL_EINVAL;
        sum += v[i];
    }
    mean = sum / (double)n;
    /* Two passes: the sum of squared differences from the mean does not
     * suffer the cancellation of sum(x^2) - n mean^2. */
    for (i = 0; i < n; i++)
        ss += (v[i] - mean) * (v[i] - mean);
    if (out_mean)
        *out_mean = mean;
    if (out_sd)
        *out_sd = n > 1 ? sqrt(ss / (double)(n - 1)) : 0.0;
    return 0;
}

double fxl_deviation_pct(double measured_cgy, double expected_cgy)
{
    if (!isfinite(measured_cgy) || !isfinite(expected_cgy) || !(expected_cgy > 0))
        return NAN;
    return (measured_cgy - expected_cgy) / expected_cgy * 100.0;
}
