/* Statistics of deviations for the periodic review of in vivo results: the
 * summary of a group (n, mean, SD, median, percentiles, shares outside the
 * levels), the individuals and moving-range (I-MR) chart limits, and a
 * suggestion of levels from the observed spread. Pure computation (src/core),
 * no I/O; docs/statistics.md gives the definitions and their sources. */
#ifndef FXL_STATS_H
#define FXL_STATS_H

#include <stddef.h>

/* SPC constants for individuals charts with moving ranges of two (standard
 * SPC constants, as used by Pawlicki et al., Med. Phys. 2005): limits of the
 * individuals chart at mean +/- 2.66 x average moving range (3 / d2, d2 =
 * 1.128), upper limit of the moving-range chart at 3.267 x average moving
 * range (D4). */
#define FXL_IMR_E2 2.66
#define FXL_IMR_D4 3.267

/* Fewest results for which a level suggestion is offered (common practice:
 * a spread estimated from fewer results is too uncertain to set levels). */
#define FXL_STATS_SUGGEST_MIN_N 10

/* Quantile of sorted (ascending) values, 0 <= p <= 1, by linear
 * interpolation between order statistics at position p x (n - 1) (the
 * "inclusive" method of Python's statistics.quantiles, Hyndman and Fan type
 * 7). n == 1 gives the value itself. NaN for n == 0 or p outside [0, 1]. */
double fxl_stats_quantile(const double *sorted, size_t n, double p);

/* Summary of one group's deviations (percent). */
typedef struct fxl_stats_summary {
    size_t n;
    double mean;
    double sd;            /* sample SD (n - 1 denominator); NaN when n < 2 */
    double median;        /* middle value, or mean of the two middle ones */
    double p05, p95;      /* fxl_stats_quantile at 0.05 and 0.95 */
    double min, max;
} fxl_stats_summary;

/* Summarises v[0..n) (any order; not modified). scratch must hold n doubles
 * (it receives the sorted values). FXL_EINVAL when n == 0 or a value is not
 * finite. */
int fxl_stats_summarize(fxl_stats_summary *out, const double *v, size_t n, double *scratch);

/* I-MR chart of a series in time order. */
typedef struct fxl_imr {
    size_t n;             /* points */
    double centre;        /* mean of the series */
    double mr_mean;       /* average moving range |x_i - x_(i-1)|, NaN when n < 2 */
    double ucl, lcl;      /* individuals limits: centre +/- FXL_IMR_E2 x mr_mean */
    double mr_ucl;        /* moving-range upper limit: FXL_IMR_D4 x mr_mean */
    size_t beyond;        /* points outside [lcl, ucl] */
    size_t mr_beyond;     /* moving ranges above mr_ucl */
} fxl_imr;

/* Limits of the series v[0..n) in time order. n == 1 gives the centre with
 * NaN limits. FXL_EINVAL when n == 0 or a value is not finite. */
int fxl_imr_limits(fxl_imr *out, const double *v, size_t n);

/* A suggestion of levels from the observed spread, for a physicist to weigh;
 * never applied by the program. */
typedef struct fxl_level_suggestion {
    int offered;          /* 0: too few results (reason says so) */
    double tolerance_pct; /* 2 SD, rounded up to 0.5 % */
    double action_pct;    /* 3 SD, rounded up to 0.5 %, and above tolerance */
    const char *basis;    /* how it was derived, static text */
} fxl_level_suggestion;

/* From a summary: tolerance near 2 SD and action near 3 SD of the local
 * spread (from memory: a common rule for setting in vivo levels from a
 * department's own results), each rounded up to the next 0.5 %. A mean far
 * from zero is not folded in: a systematic offset is a thing to find, not to
 * widen the levels for (the basis text says so). Offered only for n >=
 * FXL_STATS_SUGGEST_MIN_N and a finite SD. */
void fxl_stats_suggest_levels(fxl_level_suggestion *out, const fxl_stats_summary *s);

#endif
