/* Statistics of deviations for the periodic review: group summary,
 * percentiles, I-MR chart limits and a level suggestion from the spread.
 * Definitions and sources in docs/statistics.md. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/fxl.h"
#include "fxl/stats.h"

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;

    return (x > y) - (x < y);
}

double fxl_stats_quantile(const double *sorted, size_t n, double p)
{
    double pos, frac;
    size_t j;

    if (!sorted || n == 0 || !(p >= 0.0 && p <= 1.0))
        return NAN;
    if (n == 1)
        return sorted[0];
    /* Position p (n - 1) between order statistics, as Python's
     * statistics.quantiles(method='inclusive') (Hyndman and Fan type 7). */
    pos = p * (double)(n - 1);
    j = (size_t)floor(pos);
    if (j >= n - 1)
        return sorted[n - 1];
    frac = pos - (double)j;
    return sorted[j] + (sorted[j + 1] - sorted[j]) * frac;
}

int fxl_stats_summarize(fxl_stats_summary *out, const double *v, size_t n, double *scratch)
{
    double sum = 0, mean, ss = 0;
    size_t i;

    if (!out || !v || !scratch || n == 0)
        return FXL_EINVAL;
    for (i = 0; i < n; i++) {
        if (!isfinite(v[i]))
            return FXL_EINVAL;
        sum += v[i];
    }
    mean = sum / (double)n;
    /* Two passes: no cancellation of sum(x^2) - n mean^2. */
    for (i = 0; i < n; i++)
        ss += (v[i] - mean) * (v[i] - mean);
    memcpy(scratch, v, n * sizeof *v);
    qsort(scratch, n, sizeof *scratch, cmp_double);

    out->n = n;
    out->mean = mean;
    out->sd = n > 1 ? sqrt(ss / (double)(n - 1)) : NAN;
    out->median = n % 2 ? scratch[n / 2] : (scratch[n / 2 - 1] + scratch[n / 2]) / 2.0;
    out->p05 = fxl_stats_quantile(scratch, n, 0.05);
    out->p95 = fxl_stats_quantile(scratch, n, 0.95);
    out->min = scratch[0];
    out->max = scratch[n - 1];
    return 0;
}

int fxl_imr_limits(fxl_imr *out, const double *v, size_t n)
{
    double sum = 0, mr_sum = 0;
    size_t i;

    if (!out || !v || n == 0)
        return FXL_EINVAL;
    for (i = 0; i < n; i++) {
        if (!isfinite(v[i]))
            return FXL_EINVAL;
        sum += v[i];
        if (i > 0)
            mr_sum += fabs(v[i] - v[i - 1]);
    }
    memset(out, 0, sizeof *out);
    out->n = n;
    out->centre = sum / (double)n;
    if (n < 2) {
        out->mr_mean = out->ucl = out->lcl = out->mr_ucl = NAN;
        return 0;
    }
    /* Individuals chart with moving ranges of two (Pawlicki et al., Med.
     * Phys. 2005; standard SPC constants E2 = 2.66, D4 = 3.267). */
    out->mr_mean = mr_sum / (double)(n - 1);
    out->ucl = out->centre + FXL_IMR_E2 * out->mr_mean;
    out->lcl = out->centre - FXL_IMR_E2 * out->mr_mean;
    out->mr_ucl = FXL_IMR_D4 * out->mr_mean;
    for (i = 0; i < n; i++) {
        if (v[i] > out->ucl || v[i] < out->lcl)
            out->beyond++;
        if (i > 0 && fabs(v[i] - v[i - 1]) > out->mr_ucl)
            out->mr_beyond++;
    }
    return 0;
}

/* Up to the next multiple of 0.5 %; the small allowance keeps 2.0000000001
 * (a rounding artefact of an SD of exactly 1) at 2.0. */
static double round_up_half(double x)
{
    return ceil(x * 2.0 - 1e-9) / 2.0;
}

void fxl_stats_suggest_levels(fxl_level_suggestion *out, const fxl_stats_summary *s)
{
    static const char basis[] =
        "tolerance near 2 SD and action near 3 SD of these results, rounded up to 0.5 % "
        "(from memory: a common rule for levels from a department's own spread); "
        "a mean offset is to be investigated, not absorbed into the levels";

    memset(out, 0, sizeof *out);
    out->tolerance_pct = out->action_pct = NAN;
    out->basis = basis;
    if (!s || s->n < FXL_STATS_SUGGEST_MIN_N || !isfinite(s->sd))
        return;
    out->offered = 1;
    out->tolerance_pct = round_up_half(2.0 * s->sd);
    if (out->tolerance_pct < 0.5)
        out->tolerance_pct = 0.5;
    out->action_pct = round_up_half(3.0 * s->sd);
    if (out->action_pct <= out->tolerance_pct)
        out->action_pct = out->tolerance_pct + 0.5;
}
