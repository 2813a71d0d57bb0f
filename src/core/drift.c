/* The standardised two-sided CUSUM of one drift series: spread from the
 * series' own moving ranges, then the tabular CUSUM in units of that
 * spread (Page 1954; Montgomery, Introduction to Statistical Quality
 * Control). docs/rules.md. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "fxl/drift.h"
#include "fxl/fxl.h"

int fxl_drift_cusum(fxl_drift_result *out, double *s_high, double *s_low, double *sigma,
                    const double *dev_pct, size_t n, const fxl_drift_params *p)
{
    double hi = 0.0, lo = 0.0, mr_sum = 0.0, sig = NAN;
    size_t i;

    memset(out, 0, sizeof *out);
    out->sigma_pct = NAN;
    if (!p || !isfinite(p->target_pct) || !isfinite(p->k_sigma) || !isfinite(p->h_sigma) ||
        p->k_sigma < 0 || p->h_sigma <= 0 || p->startup < FXL_DRIFT_STARTUP_MIN ||
        (n > 0 && !dev_pct))
        return FXL_EINVAL;
    for (i = 0; i < n; i++)
        if (!isfinite(dev_pct[i]))
            return FXL_EINVAL;
    out->n = n;
    for (i = 0; i < n; i++) {
        double z;

        if (i > 0)
            mr_sum += fabs(dev_pct[i] - dev_pct[i - 1]);
        if (i < p->startup) {
            if (s_high)
                s_high[i] = 0;
            if (s_low)
                s_low[i] = 0;
            if (sigma)
                sigma[i] = NAN;
            continue;
        }
        /* sigma from the average moving range (d2 = 1.128 for ranges of 2) */
        sig = fmax(mr_sum / (double)i / FXL_DRIFT_D2, FXL_DRIFT_SIGMA_FLOOR_PCT);
        z = (dev_pct[i] - p->target_pct) / sig;
        z = fmin(fmax(z, -p->h_sigma / 2.0), p->h_sigma / 2.0);
        hi = fmax(0.0, hi + z - p->k_sigma);
        lo = fmax(0.0, lo - z - p->k_sigma);
        if (s_high)
            s_high[i] = hi;
        if (s_low)
            s_low[i] = lo;
        if (sigma)
            sigma[i] = sig;
        if (!out->signal && (hi > p->h_sigma || lo > p->h_sigma)) {
            out->signal = hi > p->h_sigma ? 1 : -1;
            out->signal_index = i;
            out->signal_value = hi > p->h_sigma ? hi : lo;
        }
    }
    out->started = n > p->startup;
    out->sigma_pct = sig;
    out->s_high = hi;
    out->s_low = lo;
    if (out->signal)
        snprintf(out->text, sizeof out->text,
                 "standardised CUSUM drifted %s (detector reads %s): C%c = %.2f > h = %.2f spreads "
                 "after %zu results (spread %.2f %% from the moving ranges, target %.2f %%, "
                 "k = %.2f)",
                 out->signal > 0 ? "upward" : "downward", out->signal > 0 ? "high" : "low",
                 out->signal > 0 ? '+' : '-', out->signal_value, p->h_sigma,
                 out->signal_index + 1, sig, p->target_pct, p->k_sigma);
    else if (!out->started)
        snprintf(out->text, sizeof out->text,
                 "%zu of the %zu start-up results: the chart starts once the spread can be "
                 "estimated", n, p->startup);
    else
        snprintf(out->text, sizeof out->text,
                 "no drift: C+ = %.2f, C- = %.2f spreads (h = %.2f) after %zu results", hi, lo,
                 p->h_sigma, n);
    return 0;
}
