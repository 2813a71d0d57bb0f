/* Drift detection on one series of deviations (one detector, beam and
 * measured point): a two-sided tabular CUSUM of the deviations standardised
 * by the spread estimated from the series' own moving ranges. Pure
 * function, no I/O. Design, figures and the simulation that chose k and h:
 * docs/rules.md ("Detector drift"). Units: deviations percent, k and h in
 * units of the estimated spread. */
#ifndef FXL_DRIFT_H
#define FXL_DRIFT_H

#include <math.h>
#include <stddef.h>

#include "fxl/rules.h"

/* Defaults (docs/rules.md): k = 0.5 and h = 5.5 spreads give a two-sided
 * in-control average run length above 370 results and detect a sustained
 * shift of 1.5 spreads in about 7 results (tests/unit/test_drift.c). */
#define FXL_DRIFT_K_SIGMA_DEFAULT 0.5
#define FXL_DRIFT_H_SIGMA_DEFAULT 5.5
/* Results before the chart starts: the spread needs moving ranges. */
#define FXL_DRIFT_STARTUP_DEFAULT 10
#define FXL_DRIFT_STARTUP_MIN 10
/* d2 for ranges of two consecutive results (standard SPC constant,
 * sigma = average moving range / 1.128; Montgomery). */
#define FXL_DRIFT_D2 1.128
/* Smallest spread used, percent: a series of identical deviations has no
 * moving range, and a detector is never more repeatable than its reading
 * resolution (fxledger decision: 0.2 %). */
#define FXL_DRIFT_SIGMA_FLOOR_PCT 0.2

typedef struct fxl_drift_params {
    double target_pct;      /* mu_0, the in-control mean deviation */
    double k_sigma;         /* allowance, >= 0, in spreads */
    double h_sigma;         /* decision interval, > 0, in spreads */
    size_t startup;         /* results before the chart runs, >= FXL_DRIFT_STARTUP_MIN */
} fxl_drift_params;

typedef struct fxl_drift_result {
    size_t n;               /* deviations given */
    int started;            /* 1 when n > startup */
    double sigma_pct;       /* spread used at the last result (NaN before the start) */
    double s_high, s_low;   /* C+ and C- after the last result, in spreads */
    int signal;             /* 0 none, +1 reads high, -1 reads low */
    size_t signal_index;    /* index of the first result that signalled */
    double signal_value;    /* C+ or C- there, in spreads */
    char text[FXL_RULE_TEXT_LEN];
} fxl_drift_result;

/* For result i (0-based) beyond the start-up (i >= startup) the spread is
 * sigma_i = max(mean of |x_j - x_(j-1)| for 1 <= j <= i / d2, floor), the
 * standardised deviation z_i = (x_i - mu_0) / sigma_i limited to +/- h/2
 * (so no single result, a gross set-up error, can signal alone), and
 *   C+_i = max(0, C+_(i-1) + z_i - k),  C-_i = max(0, C-_(i-1) - z_i - k),
 * both 0 through the start-up. Signals at the first i where C+ or C- > h
 * (exactly h does not). s_high / s_low / sigma (may be NULL) receive, for each
 * i, C+_i, C-_i (0 in the start-up) and sigma_i (NaN in the start-up).
 * FXL_EINVAL for a non-finite deviation or parameter, k < 0, h <= 0 or a
 * start-up below FXL_DRIFT_STARTUP_MIN. */
int fxl_drift_cusum(fxl_drift_result *out, double *s_high, double *s_low, double *sigma,
                    const double *dev_pct, size_t n, const fxl_drift_params *p);

/* The chart after the results seen so far: everything the next result
 * needs, so that a series can be continued instead of read again. A state
 * continued with the results x_n, x_(n+1), ... gives exactly (the same
 * operations in the same order) what fxl_drift_cusum gives for the whole
 * series. FXL_DRIFT_STATE_INIT is the state before any result. */
typedef struct fxl_drift_state {
    size_t n;               /* results seen */
    double mr_sum;          /* sum of |x_j - x_(j-1)|, 1 <= j < n */
    double last_pct;        /* x_(n-1) (when n > 0) */
    double sigma_pct;       /* spread at the last result (NaN in the start-up) */
    double s_high, s_low;   /* C+ and C- after the last result */
    int signal;             /* as in fxl_drift_result */
    size_t signal_index;
    double signal_value;
} fxl_drift_state;

#define FXL_DRIFT_STATE_INIT {0, 0.0, 0.0, NAN, 0.0, 0.0, 0, 0, 0.0}

/* Continues `state` with n more results and fills `out` as fxl_drift_cusum
 * would for the whole series. FXL_EINVAL as fxl_drift_cusum (state then
 * unchanged). */
int fxl_drift_cusum_continue(fxl_drift_result *out, fxl_drift_state *state, const double *dev_pct,
                             size_t n, const fxl_drift_params *p);

#endif
