/* Unit tests for src/core/rules.c: each rule over history firing and not
 * firing at its boundary (required measurement per policy, calibration due
 * and expired, accumulated dose limit, CUSUM drift), and the individuals /
 * moving-range chart against the check values of arithmetic of the published formula. Dates
 * and values are invented. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include <cmocka.h>

#include "fxl/fxl.h"
#include "fxl/rules.h"

static void assert_near_at(double got, double want, double eps, const char *expr,
                           const char *file, int line)
{
    if (!(fabs(got - want) <= eps)) {
        print_error("%s = %.9g, expected %.9g (+/- %g)\n", expr, got, want, eps);
        _fail(file, line);
    }
}
#define assert_near(got, want, eps) assert_near_at((got), (want), (eps), #got, __FILE__, __LINE__)

static fxl_required_input req(fxl_policy policy, const fxl_fraction_slot *slots, size_t n,
                              int current)
{
    fxl_required_input in;

    memset(&in, 0, sizeof in);
    in.policy = policy;
    in.first_number = 1;
    in.interval_days = 7;
    in.slots = slots;
    in.n_slots = n;
    in.current_number = current;
    return in;
}

/* ---- required measurement: first fraction -------------------------------- */

static void test_rules_first_measured_does_not_fire(void **state)
{
    fxl_fraction_slot s[] = {{1, "2026-11-02T09:00:00Z", 1}, {2, "2026-11-03T09:00:00Z", 0}};
    fxl_required_input in = req(FXL_POLICY_FIRST, s, 2, 2);
    fxl_required_result r;

    (void)state;
    assert_int_equal(fxl_rule_required(&r, &in), 0);
    assert_int_equal(r.n_missing, 0);
    assert_int_equal(r.weekly_gap, 0);
}

static void test_rules_first_unmeasured_fires_at_next_fraction(void **state)
{
    fxl_fraction_slot s[] = {{1, "2026-11-02T09:00:00Z", 0}, {2, "2026-11-03T09:00:00Z", 1}};
    fxl_required_input in = req(FXL_POLICY_FIRST, s, 2, 2);
    fxl_required_result r;

    (void)state;
    assert_int_equal(fxl_rule_required(&r, &in), 0);
    assert_int_equal(r.n_missing, 1);
    assert_int_equal(r.missing[0], 1);

    /* Boundary: while the first fraction is the one being logged, nothing
     * is missing yet - a later fraction decides. */
    in = req(FXL_POLICY_FIRST, s, 1, 1);
    assert_int_equal(fxl_rule_required(&r, &in), 0);
    assert_int_equal(r.n_missing, 0);
}

static void test_rules_first_never_logged_fires(void **state)
{
    /* Only fraction 6 was logged: fraction 1 was treated without any log. */
    fxl_fraction_slot s[] = {{6, "2026-11-09T09:00:00Z", 1}};
    fxl_required_input in = req(FXL_POLICY_FIRST, s, 1, 6);
    fxl_required_result r;

    (void)state;
    assert_int_equal(fxl_rule_required(&r, &in), 0);
    assert_int_equal(r.n_missing, 1);
    assert_int_equal(r.missing[0], 1);
}

static void test_rules_first_after_plan_change(void **state)
{
    /* A replacement plan continuing the numbering: its first fraction is 11. */
    fxl_fraction_slot s[] = {{11, "2026-11-16T09:00:00Z", 0}, {12, "2026-11-17T09:00:00Z", 0}};
    fxl_required_input in = req(FXL_POLICY_FIRST, s, 2, 12);
    fxl_required_result r;

    (void)state;
    in.first_number = 11;
    assert_int_equal(fxl_rule_required(&r, &in), 0);
    assert_int_equal(r.n_missing, 1);
    assert_int_equal(r.missing[0], 11);

    s[0].measured = 1;
    assert_int_equal(fxl_rule_required(&r, &in), 0);
    assert_int_equal(r.n_missing, 0);
}

static void test_rules_policy_none_never_fires(void **state)
{
    fxl_fraction_slot s[] = {{1, "2026-11-02T09:00:00Z", 0}, {9, "2026-12-02T09:00:00Z", 0}};
    fxl_required_input in = req(FXL_POLICY_NONE, s, 2, 9);
    fxl_required_result r;

    (void)state;
    assert_int_equal(fxl_rule_required(&r, &in), 0);
    assert_int_equal(r.n_missing, 0);
    assert_int_equal(r.weekly_gap, 0);
}

/* ---- required measurement: every fraction --------------------------------- */

static void test_rules_every_lists_each_missed_fraction(void **state)
{
    /* 2 logged without it, 3 never logged, 5 (current) without it. */
    fxl_fraction_slot s[] = {{1, "2026-11-02T09:00:00Z", 1},
                             {2, "2026-11-03T09:00:00Z", 0},
                             {4, "2026-11-05T09:00:00Z", 1},
                             {5, "2026-11-06T09:00:00Z", 0}};
    fxl_required_input in = req(FXL_POLICY_EVERY, s, 4, 5);
    fxl_required_result r;

    (void)state;
    assert_int_equal(fxl_rule_required(&r, &in), 0);
    assert_int_equal(r.n_missing, 2);
    assert_int_equal(r.missing[0], 2);
    assert_int_equal(r.missing[1], 3);

    /* All measured: nothing. */
    s[1].measured = 1;
    in = req(FXL_POLICY_EVERY, s, 3, 4);
    assert_int_equal(fxl_rule_required(&r, &in), 0);
    assert_int_equal(r.n_missing, 1);   /* 3 still never logged */
    assert_int_equal(r.missing[0], 3);
}

/* ---- required measurement: weekly ----------------------------------------- */

static void test_rules_weekly_boundary_seven_days_on_time(void **state)
{
    /* Measured on a Monday; the next Monday is exactly 7 calendar days later:
     * on time, whatever the hour. */
    fxl_fraction_slot s[] = {{1, "2026-11-02T08:00:00Z", 1}, {6, "2026-11-09T17:30:00Z", 0}};
    fxl_required_input in = req(FXL_POLICY_WEEKLY, s, 2, 6);
    fxl_required_result r;

    (void)state;
    assert_int_equal(fxl_rule_required(&r, &in), 0);
    assert_int_equal(r.weekly_gap, 0);
    assert_int_equal(r.n_missing, 0);
}

static void test_rules_weekly_eight_days_fires_with_due_date(void **state)
{
    fxl_fraction_slot s[] = {{1, "2026-11-02T08:00:00Z", 1},
                             {2, "2026-11-03T08:00:00Z", 0},
                             {7, "2026-11-10T08:00:00Z", 1}};
    fxl_required_input in = req(FXL_POLICY_WEEKLY, s, 3, 7);
    fxl_required_result r;

    (void)state;
    assert_int_equal(fxl_rule_required(&r, &in), 0);
    assert_int_equal(r.weekly_gap, 1);
    assert_int_equal(r.last_measured_number, 1);
    assert_string_equal(r.last_measured_date, "2026-11-02");
    assert_string_equal(r.due_date, "2026-11-09");
    assert_int_equal(r.n_missing, 0);

    /* The fraction after the late measurement counts from it: no gap. */
    {
        fxl_fraction_slot s2[] = {{1, "2026-11-02T08:00:00Z", 1},
                                  {7, "2026-11-10T08:00:00Z", 1},
                                  {8, "2026-11-11T08:00:00Z", 0}};
        in = req(FXL_POLICY_WEEKLY, s2, 3, 8);
        assert_int_equal(fxl_rule_required(&r, &in), 0);
        assert_int_equal(r.weekly_gap, 0);
    }
}

static void test_rules_weekly_interval_setting_and_first(void **state)
{
    /* First fraction not measured and a 5-day interval: both the first and
     * the gap counted from the first fraction's date are reported. */
    fxl_fraction_slot s[] = {{1, "2026-11-02T08:00:00Z", 0}, {5, "2026-11-08T08:00:00Z", 0}};
    fxl_required_input in = req(FXL_POLICY_WEEKLY, s, 2, 5);
    fxl_required_result r;

    (void)state;
    in.interval_days = 5;
    assert_int_equal(fxl_rule_required(&r, &in), 0);
    assert_int_equal(r.n_missing, 1);
    assert_int_equal(r.missing[0], 1);
    assert_int_equal(r.weekly_gap, 1);
    assert_int_equal(r.last_measured_number, 0);
    assert_string_equal(r.due_date, "2026-11-07");

    in.interval_days = 6;   /* 6 days: exactly on time */
    assert_int_equal(fxl_rule_required(&r, &in), 0);
    assert_int_equal(r.weekly_gap, 0);
}

static void test_rules_required_refuses_bad_input(void **state)
{
    fxl_fraction_slot s[] = {{1, "2026-11-02T08:00:00Z", 1}, {2, "not a date", 0}};
    fxl_required_input in = req(FXL_POLICY_WEEKLY, s, 1, 2);
    fxl_required_result r;

    (void)state;
    assert_int_equal(fxl_rule_required(&r, &in), FXL_EINVAL);   /* current not in slots */
    in = req(FXL_POLICY_WEEKLY, s, 2, 2);
    assert_int_equal(fxl_rule_required(&r, &in), FXL_EINVAL);   /* bad timestamp */
    s[1].treated_at = "2026-11-03T08:00:00Z";
    in = req(FXL_POLICY_WEEKLY, s, 2, 2);
    in.interval_days = 0;
    assert_int_equal(fxl_rule_required(&r, &in), FXL_EINVAL);
    in = req(FXL_POLICY_FIRST, s, 2, 2);
    in.first_number = 0;
    assert_int_equal(fxl_rule_required(&r, &in), FXL_EINVAL);
    in = req((fxl_policy)9, s, 2, 2);
    assert_int_equal(fxl_rule_required(&r, &in), FXL_EINVAL);
}

static void test_rules_policy_names(void **state)
{
    fxl_policy p;

    (void)state;
    assert_int_equal(fxl_policy_parse(&p, "weekly"), 0);
    assert_int_equal(p, FXL_POLICY_WEEKLY);
    assert_string_equal(fxl_policy_name(FXL_POLICY_EVERY), "every");
    assert_int_equal(fxl_policy_parse(&p, "monthly"), FXL_EINVAL);
    assert_string_equal(fxl_severity_name(4), "critical");
    assert_string_equal(fxl_severity_name(0), "unknown");
}

/* ---- calibration due and expired ---------------------------------------- */

static void test_rules_calibration_due_boundary(void **state)
{
    fxl_calib_due_result r;

    (void)state;
    /* 14 calendar days left with due_days 14: due (boundary is due). */
    assert_int_equal(fxl_rule_calibration(&r, "2026-11-16T23:59:59Z", "2026-11-02T09:00:00Z", 14), 0);
    assert_int_equal(r.state, FXL_CALIB_DUE);
    assert_int_equal(r.days_left, 14);
    assert_non_null(strstr(r.text, "2026-11-16"));
    /* 15 days left: ok. */
    assert_int_equal(fxl_rule_calibration(&r, "2026-11-17T23:59:59Z", "2026-11-02T09:00:00Z", 14), 0);
    assert_int_equal(r.state, FXL_CALIB_OK);
    assert_int_equal(r.days_left, 15);
    /* due_days 0: due only on its last day. */
    assert_int_equal(fxl_rule_calibration(&r, "2026-11-02T23:59:59Z", "2026-11-02T09:00:00Z", 0), 0);
    assert_int_equal(r.state, FXL_CALIB_DUE);
    assert_int_equal(fxl_rule_calibration(&r, "2026-11-03T23:59:59Z", "2026-11-02T09:00:00Z", 0), 0);
    assert_int_equal(r.state, FXL_CALIB_OK);
}

static void test_rules_calibration_expired_boundary(void **state)
{
    fxl_calib_due_result r;

    (void)state;
    /* At valid_until exactly: still valid (due). One second later: expired. */
    assert_int_equal(fxl_rule_calibration(&r, "2026-11-02T23:59:59Z", "2026-11-02T23:59:59Z", 14), 0);
    assert_int_equal(r.state, FXL_CALIB_DUE);
    assert_int_equal(fxl_rule_calibration(&r, "2026-11-02T23:59:59Z", "2026-11-03T00:00:00Z", 14), 0);
    assert_int_equal(r.state, FXL_CALIB_EXPIRED);
    assert_int_equal(r.days_left, -1);
    assert_non_null(strstr(r.text, "expired on 2026-11-02"));
    assert_int_equal(fxl_rule_calibration(&r, "garbage", "2026-11-03T00:00:00Z", 14), FXL_EINVAL);
    assert_int_equal(fxl_rule_calibration(&r, "2026-11-02T23:59:59Z", "2026-11-03T00:00:00Z", -1),
                     FXL_EINVAL);
}

/* ---- accumulated dose --------------------------------------------------- */

static void test_rules_dose_limit_boundary(void **state)
{
    fxl_dose_limit_result r;

    (void)state;
    assert_int_equal(fxl_rule_dose_limit(&r, 5000.0, 5000.0), 0);
    assert_int_equal(r.over, 0);                     /* exactly at the limit: not over */
    assert_near(r.fraction_of_limit, 1.0, 1e-12);
    assert_int_equal(fxl_rule_dose_limit(&r, 5000.5, 5000.0), 0);
    assert_int_equal(r.over, 1);
    assert_non_null(strstr(r.text, "exceeds"));
    assert_int_equal(fxl_rule_dose_limit(&r, 1e6, NAN), 0);   /* no limit configured */
    assert_int_equal(r.over, 0);
    assert_true(isnan(r.fraction_of_limit));
    assert_int_equal(fxl_rule_dose_limit(&r, -1.0, 100.0), FXL_EINVAL);
    assert_int_equal(fxl_rule_dose_limit(&r, NAN, 100.0), FXL_EINVAL);
}

/* ---- CUSUM -------------------------------------------------------------- */

/* target 0, k = 1 %, h = 5 %: small numbers for hand computation. */
static const fxl_cusum_params default_cusum = {0.0, 1.0, 5.0};

static void test_rules_cusum_upward_boundary(void **state)
{
    /* Hand computation from the recursion C+_i = max(0, C+_(i-1) + x_i - k),
     * target 0, k = 1 %, h = 5 %: +2 % each time gives C+ = 1, 2, 3, 4, 5;
     * 5 equals h and does not signal; the sixth gives 6 > 5 and signals. */
    double x[] = {2.0, 2.0, 2.0, 2.0, 2.0, 2.0};
    double hi[6], lo[6];
    fxl_cusum_result r;

    (void)state;
    assert_int_equal(fxl_cusum(&r, hi, lo, x, 5, &default_cusum), 0);
    assert_int_equal(r.signal, 0);
    assert_near(r.s_high, 5.0, 1e-12);
    assert_near(r.s_low, 0.0, 1e-12);
    assert_int_equal(fxl_cusum(&r, hi, lo, x, 6, &default_cusum), 0);
    assert_int_equal(r.signal, 1);
    assert_int_equal(r.signal_index, 5);
    assert_near(hi[0], 1.0, 1e-12);
    assert_near(hi[5], 6.0, 1e-12);
    assert_near(lo[5], 0.0, 1e-12);
    assert_near(r.signal_value, 6.0, 1e-12);
    assert_non_null(strstr(r.text, "upward"));
}

static void test_rules_cusum_downward_and_reset(void **state)
{
    /* k = 1 %, h = 5 %, so deviations are limited to +/- 2.5 % first:
     * C- = max(0, C-_(i-1) - k - y_i): -2 gives 1, 2, 3, 4, 5 (at h, no
     * signal), 6 (signal at the sixth). A +2.5 between them resets the low
     * side: -2, +2.5, -2, -2 gives C- = 1, 0, 1, 2 and C+ = 0, 1.5, 0, 0. */
    double down[] = {-2.0, -2.0, -2.0, -2.0, -2.0, -2.0};
    double mixed[] = {-2.0, 2.5, -2.0, -2.0};
    double hi[6], lo[6];
    fxl_cusum_result r;

    (void)state;
    assert_int_equal(fxl_cusum(&r, NULL, lo, down, 5, &default_cusum), 0);
    assert_int_equal(r.signal, 0);
    assert_near(r.s_low, 5.0, 1e-12);
    assert_int_equal(fxl_cusum(&r, NULL, lo, down, 6, &default_cusum), 0);
    assert_int_equal(r.signal, -1);
    assert_int_equal(r.signal_index, 5);
    assert_near(r.s_low, 6.0, 1e-12);
    assert_non_null(strstr(r.text, "downward"));

    assert_int_equal(fxl_cusum(&r, hi, lo, mixed, 4, &default_cusum), 0);
    assert_int_equal(r.signal, 0);
    assert_near(lo[1], 0.0, 1e-12);
    assert_near(lo[3], 2.0, 1e-12);
    assert_near(hi[1], 1.5, 1e-12);
    assert_near(r.s_high, 0.0, 1e-12);
}

static void test_rules_cusum_single_outliers_are_limited(void **state)
{
    /* Winsorized at h/2 = 2.5 %: a -30 % entry error adds only 2.5 - 1 = 1.5
     * to C-; even three in a row (4.5) stay below h = 5; a fourth signals. */
    double x[] = {-30.0, -30.0, -30.0, -30.0};
    double lo[4];
    fxl_cusum_result r;

    (void)state;
    assert_int_equal(fxl_cusum(&r, NULL, lo, x, 3, &default_cusum), 0);
    assert_int_equal(r.signal, 0);
    assert_near(lo[0], 1.5, 1e-12);
    assert_near(r.s_low, 4.5, 1e-12);
    assert_int_equal(fxl_cusum(&r, NULL, lo, x, 4, &default_cusum), 0);
    assert_int_equal(r.signal, -1);
    assert_int_equal(r.signal_index, 3);
}

static void test_rules_cusum_noise_within_k_never_signals(void **state)
{
    /* Deviations inside +/- k never accumulate. */
    double x[40];
    fxl_cusum_result r;
    size_t i;

    (void)state;
    for (i = 0; i < 40; i++)
        x[i] = (i % 2) ? 0.9 : -0.9;
    assert_int_equal(fxl_cusum(&r, NULL, NULL, x, 40, &default_cusum), 0);
    assert_int_equal(r.signal, 0);
    assert_near(r.s_high, 0.0, 1e-12);
    assert_near(r.s_low, 0.0, 1e-12);
}

static void test_rules_cusum_target_shifts_reference(void **state)
{
    /* With target +1 % (a known offset of the detector), +2 % deviations
     * only add 2 - (1 + 1) = 0 each time. */
    fxl_cusum_params p = {1.0, 1.0, 5.0};
    double x[] = {2.0, 2.0, 2.0, 2.0, 2.0, 2.0, 2.0};
    fxl_cusum_result r;

    (void)state;
    assert_int_equal(fxl_cusum(&r, NULL, NULL, x, 7, &p), 0);
    assert_int_equal(r.signal, 0);
    assert_near(r.s_high, 0.0, 1e-12);
}

static void test_rules_cusum_defaults_slow_drift(void **state)
{
    /* Shipped defaults (target 0, k = 1 %, h = 10 %, deviations limited to
     * +/- 5 %): a detector reading 3 % high every time - each result within a
     * 5 % tolerance - adds 2 % per measurement: C+ = 2, 4, 6, 8, 10 (exactly
     * h: no signal), 12 (signal at the sixth). One outlier of +8 % alone
     * (limited to 5: C+ = 4) does not signal. */
    fxl_cusum_params p = {FXL_CUSUM_TARGET_PCT_DEFAULT, FXL_CUSUM_K_PCT_DEFAULT,
                          FXL_CUSUM_H_PCT_DEFAULT};
    double x[] = {3.0, 3.0, 3.0, 3.0, 3.0, 3.0, -9.0};
    double one[] = {8.0};
    fxl_cusum_result r;

    (void)state;
    assert_int_equal(fxl_cusum(&r, NULL, NULL, x, 5, &p), 0);
    assert_int_equal(r.signal, 0);
    assert_near(r.s_high, 10.0, 1e-12);
    /* The signal keeps the value at the moment it fired, even when a later
     * deviation brings the sum back down (-9 limited to -5: 12 - 5 - 1 = 6). */
    assert_int_equal(fxl_cusum(&r, NULL, NULL, x, 7, &p), 0);
    assert_int_equal(r.signal, 1);
    assert_int_equal(r.signal_index, 5);
    assert_near(r.signal_value, 12.0, 1e-12);
    assert_near(r.s_high, 6.0, 1e-12);
    assert_non_null(strstr(r.text, "12.00"));
    assert_int_equal(fxl_cusum(&r, NULL, NULL, one, 1, &p), 0);
    assert_int_equal(r.signal, 0);
    assert_near(r.s_high, 4.0, 1e-12);
}

static void test_rules_cusum_refuses_bad_input(void **state)
{
    double x[] = {1.0, NAN};
    fxl_cusum_params p = {0.0, -1.0, 5.0};
    fxl_cusum_result r;

    (void)state;
    assert_int_equal(fxl_cusum(&r, NULL, NULL, x, 2, &default_cusum), FXL_EINVAL);
    assert_int_equal(fxl_cusum(&r, NULL, NULL, x, 1, &p), FXL_EINVAL);
    p.k_pct = 1.0;
    p.h_pct = 0.0;
    assert_int_equal(fxl_cusum(&r, NULL, NULL, x, 1, &p), FXL_EINVAL);
    /* No data: no signal, not an error. */
    assert_int_equal(fxl_cusum(&r, NULL, NULL, NULL, 0, &default_cusum), 0);
    assert_int_equal(r.signal, 0);
}

/* ---- individuals / moving range ---------------------------------------- */

static void test_rules_imr_domain_check_values(void **state)
{
    /* arithmetic of the published formula (SPC constants; Pawlicki et al.): deviations 1.0,
     * -0.5, 0.5, 2.0, -1.0 % -> mean 0.400, limits 5.055 / -4.255, moving-
     * range limit 5.717. */
    double x[] = {1.0, -0.5, 0.5, 2.0, -1.0};
    fxl_imr_chart c;

    (void)state;
    assert_int_equal(fxl_imr(&c, x, 5), 0);
    assert_near(c.mean, 0.400, 5e-4);
    assert_near(c.mr_mean, 1.75, 1e-12);   /* (1.5 + 1.0 + 1.5 + 3.0) / 4, arithmetic */
    assert_near(c.ucl, 5.055, 5e-4);
    assert_near(c.lcl, -4.255, 5e-4);
    assert_near(c.mr_ucl, 5.717, 5e-4);
    assert_int_equal(c.n_beyond, 0);
    assert_int_equal(fxl_imr(&c, x, 1), FXL_EINVAL);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_rules_first_measured_does_not_fire),
        cmocka_unit_test(test_rules_first_unmeasured_fires_at_next_fraction),
        cmocka_unit_test(test_rules_first_never_logged_fires),
        cmocka_unit_test(test_rules_first_after_plan_change),
        cmocka_unit_test(test_rules_policy_none_never_fires),
        cmocka_unit_test(test_rules_every_lists_each_missed_fraction),
        cmocka_unit_test(test_rules_weekly_boundary_seven_days_on_time),
        cmocka_unit_test(test_rules_weekly_eight_days_fires_with_due_date),
        cmocka_unit_test(test_rules_weekly_interval_setting_and_first),
        cmocka_unit_test(test_rules_required_refuses_bad_input),
        cmocka_unit_test(test_rules_policy_names),
        cmocka_unit_test(test_rules_calibration_due_boundary),
        cmocka_unit_test(test_rules_calibration_expired_boundary),
        cmocka_unit_test(test_rules_dose_limit_boundary),
        cmocka_unit_test(test_rules_cusum_upward_boundary),
        cmocka_unit_test(test_rules_cusum_downward_and_reset),
        cmocka_unit_test(test_rules_cusum_single_outliers_are_limited),
        cmocka_unit_test(test_rules_cusum_noise_within_k_never_signals),
        cmocka_unit_test(test_rules_cusum_target_shifts_reference),
        cmocka_unit_test(test_rules_cusum_defaults_slow_drift),
        cmocka_unit_test(test_rules_cusum_refuses_bad_input),
        cmocka_unit_test(test_rules_imr_domain_check_values),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
