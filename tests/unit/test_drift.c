/* Unit tests for src/core/drift.c: the standardised two-sided CUSUM of one
 * drift series. The average run lengths of the documented chart (k = 0.5,
 * h = 5.5 spreads, spread from the moving ranges after a start-up of 10
 * results) are checked by a seeded simulation: in control at least 370
 * results between false alarms, and a sustained shift of 1.5 spreads found
 * within 10 results on average. Published figures compared in docs/rules.md
 * (one-sided k = 0.5, h = 5 with a known sigma: in-control ARL about 465,
 * from memory, Montgomery's table of CUSUM ARLs). Deviations are invented. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "fxl/drift.h"
#include "fxl/fxl.h"

/* The seed of every simulation below, printed with the figures. */
#define SEED 20261202u
#define REPS 2000
#define SERIES_MAX 8000   /* a run longer than this counts as this (conservative) */
#define TRUE_SD_PCT 2.5   /* the simulated spread of deviations, percent (invented) */

static fxl_drift_params defaults(void)
{
    fxl_drift_params p;

    p.target_pct = 0.0;
    p.k_sigma = FXL_DRIFT_K_SIGMA_DEFAULT;
    p.h_sigma = FXL_DRIFT_H_SIGMA_DEFAULT;
    p.startup = FXL_DRIFT_STARTUP_DEFAULT;
    return p;
}

/* xorshift64* (Vigna 2016) and the Box-Muller transform: a reproducible
 * normal generator independent of the C library. */
static uint64_t rng_state;

static double uniform01(void)
{
    rng_state ^= rng_state >> 12;
    rng_state ^= rng_state << 25;
    rng_state ^= rng_state >> 27;
    return ((double)((rng_state * 2685821657736338717ull) >> 11) + 0.5) / 9007199254740992.0;
}

static double gauss(void)
{
    double u1 = uniform01(), u2 = uniform01();
    return sqrt(-2.0 * log(u1)) * cos(6.283185307179586 * u2);
}

/* Average run length, counted from the first result after the start-up, of
 * series whose mean moves by shift_sd spreads at that first result. */
static double average_run_length(double shift_sd, const fxl_drift_params *p)
{
    static double x[SERIES_MAX + FXL_DRIFT_STARTUP_DEFAULT];
    size_t n = SERIES_MAX + p->startup, i;
    double total = 0;
    int r;

    for (r = 0; r < REPS; r++) {
        fxl_drift_result res;

        for (i = 0; i < n; i++)
            x[i] = TRUE_SD_PCT * (gauss() + (i >= p->startup ? shift_sd : 0.0));
        assert_int_equal(fxl_drift_cusum(&res, NULL, NULL, NULL, x, n, p), 0);
        total += res.signal ? (double)(res.signal_index + 1 - p->startup) : (double)SERIES_MAX;
    }
    return total / REPS;
}

static void test_drift_in_control_arl_at_least_370(void **state)
{
    fxl_drift_params p = defaults();
    double arl;

    (void)state;
    rng_state = SEED;
    arl = average_run_length(0.0, &p);
    print_message("in-control ARL %.0f results (k %.2f, h %.2f, start-up %zu, seed %u, %d runs)\n",
                  arl, p.k_sigma, p.h_sigma, p.startup, SEED, REPS);
    assert_true(arl >= 370.0);
}

static void test_drift_shift_of_1_5_spreads_found_within_10(void **state)
{
    fxl_drift_params p = defaults();
    double arl15, arl10;

    (void)state;
    rng_state = SEED + 1;
    arl15 = average_run_length(1.5, &p);
    arl10 = average_run_length(1.0, &p);
    print_message("ARL for a 1.5-spread shift %.2f, for a 1-spread shift %.2f results (seed %u)\n",
                  arl15, arl10, SEED + 1);
    assert_true(arl15 <= 10.0);
    /* a bigger shift is found sooner (physics of the chart, not a target) */
    assert_true(arl15 < arl10);
}

static void test_drift_startup_never_signals(void **state)
{
    static const double x[10] = {9, 9, 9, 9, 9, 9, 9, 9, 9, 9};
    fxl_drift_params p = defaults();
    fxl_drift_result r;
    double hi[10], sig[10];

    (void)state;
    assert_int_equal(fxl_drift_cusum(&r, hi, NULL, sig, x, 10, &p), 0);
    assert_int_equal(r.signal, 0);
    assert_int_equal(r.started, 0);
    assert_true(isnan(sig[9]));
    assert_true(hi[9] == 0);
}

static void test_drift_spread_from_moving_ranges(void **state)
{
    /* deviations alternating +1/-1 %: every moving range 2 %, sigma = 2 /
     * 1.128 = 1.773 % (d2 for ranges of two, SPC constant) */
    double x[12];
    double sig[12];
    fxl_drift_params p = defaults();
    fxl_drift_result r;
    size_t i;

    (void)state;
    for (i = 0; i < 12; i++)
        x[i] = i % 2 ? -1.0 : 1.0;
    assert_int_equal(fxl_drift_cusum(&r, NULL, NULL, sig, x, 12, &p), 0);
    assert_true(fabs(sig[10] - 2.0 / 1.128) < 1e-12);
    assert_int_equal(r.signal, 0);
    /* identical deviations: no moving range, the floor of 0.2 % is used */
    for (i = 0; i < 12; i++)
        x[i] = 0.5;
    assert_int_equal(fxl_drift_cusum(&r, NULL, NULL, sig, x, 12, &p), 0);
    assert_true(fabs(sig[11] - FXL_DRIFT_SIGMA_FLOOR_PCT) < 1e-12);
}

static void test_drift_one_gross_result_cannot_signal(void **state)
{
    /* ten quiet results, then one of +40 %: z limited to h/2 = 2.75 spreads,
     * C+ = 2.75 - 0.5 = 2.25 < 5.5 (arithmetic) */
    double x[11] = {0.5, -0.5, 0.5, -0.5, 0.5, -0.5, 0.5, -0.5, 0.5, -0.5, 40.0};
    fxl_drift_params p = defaults();
    fxl_drift_result r;

    (void)state;
    assert_int_equal(fxl_drift_cusum(&r, NULL, NULL, NULL, x, 11, &p), 0);
    assert_int_equal(r.signal, 0);
    assert_true(fabs(r.s_high - 2.25) < 1e-12);
}

static void test_drift_boundary_and_direction(void **state)
{
    /* alternating +/-1 % start-up (sigma 1.773 %), then results of -4 %:
     * moving ranges grow, so compute the expected sums in the test's own loop */
    double x[30];
    fxl_drift_params p = defaults();
    fxl_drift_result r;
    double mr = 0, lo = 0;
    size_t i, first = 0;

    (void)state;
    for (i = 0; i < 30; i++)
        x[i] = i < 10 ? (i % 2 ? -1.0 : 1.0) : -4.0;
    for (i = 1; i < 30; i++) {
        double sig, z;
        mr += fabs(x[i] - x[i - 1]);
        if (i < 10)
            continue;
        sig = fmax(mr / (double)i / 1.128, 0.2);
        z = fmax(-2.75, fmin(2.75, x[i] / sig));
        lo = fmax(0, lo - z - 0.5);
        if (!first && lo > 5.5)
            first = i;
    }
    assert_int_equal(fxl_drift_cusum(&r, NULL, NULL, NULL, x, 30, &p), 0);
    assert_int_equal(r.signal, -1);
    assert_int_equal(r.signal_index, first);
    assert_non_null(strstr(r.text, "reads low"));
}

static void test_drift_refuses_bad_parameters(void **state)
{
    double x[1] = {NAN};
    fxl_drift_params p = defaults();
    fxl_drift_result r;

    (void)state;
    assert_int_equal(fxl_drift_cusum(&r, NULL, NULL, NULL, x, 1, &p), FXL_EINVAL);
    x[0] = 1;
    p.startup = 9;
    assert_int_equal(fxl_drift_cusum(&r, NULL, NULL, NULL, x, 1, &p), FXL_EINVAL);
    p = defaults();
    p.h_sigma = 0;
    assert_int_equal(fxl_drift_cusum(&r, NULL, NULL, NULL, x, 1, &p), FXL_EINVAL);
}

/* A chart continued from its state, in pieces of every size, is the chart
 * of the whole series, to the bit (the store keeps the state instead of
 * reading the series again: docs/rules.md). Seeded series with a shift
 * that signals after the start-up (invented deviations). */
static void test_drift_continued_equals_whole(void **state)
{
    enum { N = 60 };
    double x[N];
    fxl_drift_params p = defaults();
    fxl_drift_result whole, part;
    size_t i, piece, done;

    (void)state;
    rng_state = SEED;
    for (i = 0; i < N; i++)
        x[i] = TRUE_SD_PCT * gauss() + (i >= 30 ? 1.5 * TRUE_SD_PCT : 0.0);
    p.target_pct = 0.25;
    for (size_t n = 0; n <= N; n++) {
        assert_int_equal(fxl_drift_cusum(&whole, NULL, NULL, NULL, x, n, &p), 0);
        for (piece = 1; piece <= 7; piece++) {
            fxl_drift_state st = FXL_DRIFT_STATE_INIT;
            for (done = 0; done < n; done += piece) {
                size_t k = n - done < piece ? n - done : piece;
                assert_int_equal(fxl_drift_cusum_continue(&part, &st, x + done, k, &p), 0);
            }
            if (n == 0)
                assert_int_equal(fxl_drift_cusum_continue(&part, &st, NULL, 0, &p), 0);
            assert_int_equal(part.n, whole.n);
            assert_int_equal(part.started, whole.started);
            assert_int_equal(part.signal, whole.signal);
            assert_int_equal(part.signal_index, whole.signal_index);
            assert_memory_equal(&part.s_high, &whole.s_high, sizeof whole.s_high);
            assert_memory_equal(&part.s_low, &whole.s_low, sizeof whole.s_low);
            assert_memory_equal(&part.signal_value, &whole.signal_value, sizeof whole.signal_value);
            assert_true(isnan(whole.sigma_pct) ? isnan(part.sigma_pct)
                                               : memcmp(&part.sigma_pct, &whole.sigma_pct,
                                                        sizeof whole.sigma_pct) == 0);
            assert_string_equal(part.text, whole.text);
        }
    }
    /* the series signals: the test covers the signal's fields */
    assert_int_equal(fxl_drift_cusum(&whole, NULL, NULL, NULL, x, N, &p), 0);
    assert_int_not_equal(whole.signal, 0);
}

static void test_drift_continue_refuses_and_keeps_state(void **state)
{
    double x[2] = {1.0, NAN};
    fxl_drift_params p = defaults();
    fxl_drift_state st = FXL_DRIFT_STATE_INIT;
    fxl_drift_result r;

    (void)state;
    assert_int_equal(fxl_drift_cusum_continue(&r, &st, x, 1, &p), 0);
    assert_int_equal(fxl_drift_cusum_continue(&r, &st, x, 2, &p), FXL_EINVAL);
    assert_int_equal(st.n, 1);
    p.startup = 9;
    assert_int_equal(fxl_drift_cusum_continue(&r, &st, x, 1, &p), FXL_EINVAL);
    assert_int_equal(st.n, 1);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_drift_in_control_arl_at_least_370),
        cmocka_unit_test(test_drift_shift_of_1_5_spreads_found_within_10),
        cmocka_unit_test(test_drift_startup_never_signals),
        cmocka_unit_test(test_drift_spread_from_moving_ranges),
        cmocka_unit_test(test_drift_one_gross_result_cannot_signal),
        cmocka_unit_test(test_drift_boundary_and_direction),
        cmocka_unit_test(test_drift_refuses_bad_parameters),
        cmocka_unit_test(test_drift_continued_equals_whole),
        cmocka_unit_test(test_drift_continue_refuses_and_keeps_state),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
