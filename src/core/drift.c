/* The standardised two-sided CUSUM of one drift series: spread from the
 * series' own moving ranges, then the tabular CUSUM in units of that
 * spread (Page 1954; Montgomery, Introduction to Statistical Quality
 * Control). docs/rules.md. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "fxl/drift.h"
#include "fxl/fxl.h"

static int params_valid(const fxl_drift_params *p)
{
    return p && isfinite(p->target_pct) && isfinite(p->k_sigma) && isfinite(p->h_sigma) &&
           p->k_sigma >= 0 && p->h_sigma > 0 && p->startup >= FXL_DRIFT_STARTUP_MIN;
}

/* One more result x: the chart's recurrence (fxl/drift.h). The per-result
 * outputs (may be NULL) receive C+, C- and the spread at this result. */
static void step(fxl_drift_state *st, double x, const fxl_drift_params *p, double *s_high,
                 double *s_low, double *sigma)
{
    size_t i = st->n;
    double z, sig;

    if (i > 0)
        st->mr_sum += fabs(x - st->last_pct);
    st->last_pct = x;
    st->n = i + 1;
    if (i < p->startup) {
        if (s_high)
            *s_high = 0;
        if (s_low)
            *s_low = 0;
        if (sigma)
            *sigma = NAN;
        return;
    }
    /* sigma from the average moving range (d2 = 1.128 for ranges of 2) */
    sig = fmax(st->mr_sum / (double)i / FXL_DRIFT_D2, FXL_DRIFT_SIGMA_FLOOR_PCT);
    z = (x - p->target_pct) / sig;
    z = fmin(fmax(z, -p->h_sigma / 2.0), p->h_sigma / 2.0);
    st->s_high = fmax(0.0, st->s_high + z - p->k_sigma);
    st->s_low = fmax(0.0, st->s_low - z - p->k_sigma);
    st->sigma_pct = sig;
    if (s_high)
        *s_high = st->s_high;
    if (s_low)
        *s_low = st->s_low;
    if (sigma)
        *sigma = sig;
    if (!st->signal && (st->s_high > p->h_sigma || st->s_low > p->h_sigma)) {
        st->signal = st->s_high > p->h_sigma ? 1 : -1;
        st->signal_index = i;
        st->signal_value = st->s_high > p->h_sigma ? st->s_high : st->s_low;
    }
}

/* The result and its text for the chart's state. */
static void finish(fxl_drift_result *out, const fxl_drift_state *st, const fxl_drift_params *p)
{
    memset(out, 0, sizeof *out);
    out->n = st->n;
    out->started = st->n > p->startup;
    out->sigma_pct = st->sigma_pct;
    out->s_high = st->s_high;
    out->s_low = st->s_low;
    out->signal = st->signal;
    out->signal_index = st->signal_index;
    out->signal_value = st->signal_value;
    if (out->signal)
        snprintf(out->text, sizeof out->text,
                 "standardised CUSUM drifted %s (detector reads %s): C%c = %.2f > h = %.2f spreads "
                 "after %zu results (spread %.2f %% from the moving ranges, target %.2f %%, "
                 "k = %.2f)",
                 out->signal > 0 ? "upward" : "downward", out->signal > 0 ? "high" : "low",
                 out->signal > 0 ? '+' : '-', out->signal_value, p->h_sigma,
                 out->signal_index + 1, st->sigma_pct, p->target_pct, p->k_sigma);
    else if (!out->started)
        snprintf(out->text, sizeof out->text,
                 "%zu of the %zu start-up results: the chart starts once the spread can be "
                 "estimated", st->n, p->startup);
    else
        snprintf(out->text, sizeof out->text,
                 "no drift: C+ = %.2f, C- = %.2f spreads (h = %.2f) after %zu results", st->s_high,
                 st->s_low, p->h_sigma, st->n);
}

int fxl_drift_cusum_continue(fxl_drift_result *out, fxl_drift_state *state, const double *dev_pct,
                             size_t n, const fxl_drift_params *p)
{
    size_t i;

    memset(out, 0, sizeof *out);
    out->sigma_pct = NAN;
    if (!state || !params_valid(p) || (n > 0 && !dev_pct))
        return FXL_EINVAL;
    for (i = 0; i < n; i++)
        if (!isfinite(dev_pct[i]))
            return FXL_EINVAL;
    for (i = 0; i < n; i++)
        step(state, dev_pct[i], p, NULL, NULL, NULL);
    finish(out, state, p);
    return 0;
}

int fxl_drift_cusum(fxl_drift_result *out, double *s_high, double *s_low, double *sigma,
                    const double *dev_pct, size_t n, const fxl_drift_params *p)
{
    fxl_drift_state st = FXL_DRIFT_STATE_INIT;
    size_t i;

    memset(out, 0, sizeof *out);
    out->sigma_pct = NAN;
    if (!params_valid(p) || (n > 0 && !dev_pct))
        return FXL_EINVAL;
    for (i = 0; i < n; i++)
        if (!isfinite(dev_pct[i]))
            return FXL_EINVAL;
    for (i = 0; i < n; i++)
        step(&st, dev_pct[i], p, s_high ? &s_high[i] : NULL, s_low ? &s_low[i] : NULL,
             sigma ? &sigma[i] : NULL);
    finish(out, &st, p);
    return 0;
}
