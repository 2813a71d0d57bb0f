/* Unit tests for src/core/verdict.c: every verdict, both sides of the
 * tolerance and action boundaries, the floor, implausible entries, and every
 * reason a result is not evaluable (which is never a pass). */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include <cmocka.h>

#include "fxl/core.h"
#include "fxl/fxl.h"

static void assert_near_at(double got, double want, double eps, const char *expr,
                           const char *file, int line)
{
    if (!(fabs(got - want) <= eps)) {
        print_error("%s = %.9g, expected %.9g (+/- %g)\n", expr, got, want, eps);
        _fail(file, line);
    }
}
#define assert_near(got, want, eps) assert_near_at((got), (want), (eps), #got, __FILE__, __LINE__)

static void assert_reason_at(const fxl_reasons *r, const char *needle, const char *file, int line)
{
    int i;

    for (i = 0; i < r->n; i++)
        if (strstr(r->text[i], needle))
            return;
    print_error("no reason contains \"%s\"; reasons (%d):\n", needle, r->n);
    for (i = 0; i < r->n; i++)
        print_error("  %s\n", r->text[i]);
    _fail(file, line);
}
#define assert_reason(r, needle) assert_reason_at((r), (needle), __FILE__, __LINE__)

static void assert_verdict_at(const fxl_judgement *j, fxl_verdict want, const char *file, int line)
{
    int i;

    if (j->verdict != want) {
        print_error("verdict %s, expected %s (deviation %.2f %%)\n", fxl_verdict_name(j->verdict),
                    fxl_verdict_name(want), j->deviation_pct);
        for (i = 0; i < j->reasons.n; i++)
            print_error("  %s\n", j->reasons.text[i]);
        _fail(file, line);
    }
}
#define assert_verdict(j, want) assert_verdict_at((j), (want), __FILE__, __LINE__)

/* A clean measurement: 200 cGy expected, invented local levels 5 % / 7 %, no
 * floor. Tests set the measured dose. */
static fxl_judge_input clean_input(double dose_cgy)
{
    fxl_judge_input in;
    int i;

    memset(&in, 0, sizeof in);
    in.reading = 20.0;
    in.reading_unit = "nC";
    in.detector_in_service = 1;
    in.detector_status = "in_service";
    in.calibration_found = 1;
    in.calibration_valid = 1;
    in.calibration_valid_until = "2027-06-30T23:59:59Z";
    in.dose.evaluable = 1;
    in.dose.dose_cgy = dose_cgy;
    for (i = 0; i < FXL_CF_COUNT; i++)
        in.dose.cf[i] = 1.0;
    in.dose.cf_temp = 1.0;
    in.expected_dose_cgy = 200.0;
    in.levels.present = 1;
    in.levels.tolerance_pct = 5.0;
    in.levels.action_pct = 7.0;
    in.levels.floor_cgy = 0.0;
    in.implausible_pct = 50.0;
    return in;
}

static fxl_judgement judge(const fxl_judge_input *in)
{
    fxl_judgement j;

    fxl_judge(&j, in);
    return j;
}

static void test_verdict_deviation_formula(void **state)
{
    (void)state;
    /* physics: (210 - 200) / 200 x 100 = +5 % */
    assert_near(fxl_deviation_pct(210.0, 200.0), 5.0, 1e-12);
    /* physics: (190 - 200) / 200 x 100 = -5 % */
    assert_near(fxl_deviation_pct(190.0, 200.0), -5.0, 1e-12);
    /* physics: (51.5 - 50) / 50 x 100 = +3 % */
    assert_near(fxl_deviation_pct(51.5, 50.0), 3.0, 1e-12);
    assert_true(isnan(fxl_deviation_pct(200.0, 0.0)));
    assert_true(isnan(fxl_deviation_pct(200.0, -1.0)));
    assert_true(isnan(fxl_deviation_pct(NAN, 200.0)));
}

static void test_verdict_within_tolerance(void **state)
{
    fxl_judge_input in = clean_input(203.0);
    fxl_judgement j = judge(&in);

    (void)state;
    assert_verdict(&j, FXL_VERDICT_WITHIN);
    /* physics: (203 - 200) / 200 x 100 = +1.50 % */
    assert_near(j.deviation_pct, 1.50, 1e-9);
    assert_reason(&j.reasons, "deviation +1.50 % is within the tolerance level of 5.00 %");
}

static void test_verdict_tolerance_boundary_positive(void **state)
{
    fxl_judge_input in = clean_input(210.0);
    fxl_judgement j = judge(&in);

    (void)state;
    /* physics: (210.00 - 200) / 200 x 100 = 5.00 %: exactly at the tolerance is within */
    assert_verdict(&j, FXL_VERDICT_WITHIN);
    assert_near(j.deviation_pct, 5.00, 1e-9);
    /* physics: (210.02 - 200) / 200 x 100 = 5.01 %: outside tolerance */
    in = clean_input(210.02);
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_TOLERANCE);
    assert_near(j.deviation_pct, 5.01, 1e-9);
    assert_reason(&j.reasons, "deviation +5.01 % is beyond the tolerance level of 5.00 %");
}

static void test_verdict_tolerance_boundary_negative(void **state)
{
    fxl_judge_input in = clean_input(190.0);
    fxl_judgement j = judge(&in);

    (void)state;
    /* physics: (190.00 - 200) / 200 x 100 = -5.00 % */
    assert_verdict(&j, FXL_VERDICT_WITHIN);
    assert_near(j.deviation_pct, -5.00, 1e-9);
    /* physics: (189.98 - 200) / 200 x 100 = -5.01 % */
    in = clean_input(189.98);
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_TOLERANCE);
    assert_near(j.deviation_pct, -5.01, 1e-9);
}

static void test_verdict_boundary_uses_shown_precision(void **state)
{
    fxl_judge_input in = clean_input(210.008);
    fxl_judgement j = judge(&in);

    (void)state;
    /* physics: 10.008 / 200 x 100 = 5.004 %, shown as 5.00 %: within */
    assert_verdict(&j, FXL_VERDICT_WITHIN);
    assert_near(j.deviation_pct, 5.00, 1e-9);
    /* physics: 10.012 / 200 x 100 = 5.006 %, shown as 5.01 %: outside */
    in = clean_input(210.012);
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_TOLERANCE);
    assert_near(j.deviation_pct, 5.01, 1e-9);
}

static void test_verdict_action_boundary(void **state)
{
    fxl_judge_input in = clean_input(214.0);
    fxl_judgement j = judge(&in);

    (void)state;
    /* physics: 14.00 / 200 x 100 = 7.00 %: exactly at the action level is
     * outside tolerance, not outside action */
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_TOLERANCE);
    assert_near(j.deviation_pct, 7.00, 1e-9);
    /* physics: 14.02 / 200 x 100 = 7.01 % */
    in = clean_input(214.02);
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_ACTION);
    assert_near(j.deviation_pct, 7.01, 1e-9);
    assert_reason(&j.reasons, "deviation +7.01 % is beyond the action level of 7.00 %");
    /* physics: -14.00 / 200 x 100 = -7.00 % and -14.02 / 200 x 100 = -7.01 % */
    in = clean_input(186.0);
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_TOLERANCE);
    in = clean_input(185.98);
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_ACTION);
}

static void test_verdict_outside_action(void **state)
{
    fxl_judge_input in = clean_input(170.0);
    fxl_judgement j = judge(&in);

    (void)state;
    /* physics: (170 - 200) / 200 x 100 = -15.00 % */
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_ACTION);
    assert_near(j.deviation_pct, -15.0, 1e-9);
}

static void test_verdict_floor_for_small_doses(void **state)
{
    fxl_judge_input in = clean_input(21.2);
    fxl_judgement j;

    (void)state;
    in.expected_dose_cgy = 20.0;
    in.levels.floor_cgy = 2.0;
    /* physics: |21.2 - 20.0| = 1.20 cGy <= floor 2.0 cGy, although the
     * deviation 1.2 / 20 x 100 = +6 % is beyond the 5 % tolerance (inside
     * the 7 % action level) */
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_WITHIN);
    assert_near(j.deviation_pct, 6.0, 1e-9);
    assert_reason(&j.reasons, "within the 2.00 cGy floor");
    in.dose.dose_cgy = 18.8;  /* physics: |18.8 - 20| = 1.20 cGy, -6 % */
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_WITHIN);
    /* the floor never turns a result beyond the action level into a pass:
     * physics: |22.0 - 20.0| = 2.00 cGy <= floor, but +10 % > 7 % action */
    in.dose.dose_cgy = 22.0;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_ACTION);
    /* no floor: 1.2 cGy on 20 cGy is judged on the percentage, +6 % */
    in.dose.dose_cgy = 21.2;
    in.levels.floor_cgy = NAN;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_TOLERANCE);
}

static void test_verdict_floor_capped(void **state)
{
    fxl_judge_input in = clean_input(200.0);
    fxl_judgement j;

    (void)state;
    /* a stored floor above FXL_FLOOR_MAX_CGY (5 cGy) acts as 5 cGy:
     * physics: 106 against 100 cGy is +6 %, a difference of 6.00 cGy > 5 */
    in.expected_dose_cgy = 100.0;
    in.dose.dose_cgy = 106.0;
    in.levels.floor_cgy = 30.0;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_TOLERANCE);
    /* physics: 105.5 -> +5.5 %, 5.50 cGy > 5: still outside tolerance */
    in.dose.dose_cgy = 105.5;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_TOLERANCE);
    /* physics: 5 cGy of 60 cGy is +8.33 %, beyond the 7 % action level but
     * <= the (capped) floor: the floor never passes it */
    in.expected_dose_cgy = 60.0;
    in.dose.dose_cgy = 65.0;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_ACTION);
    /* physics: 4 cGy of 70 cGy is +5.71 %: inside action, <= floor: within */
    in.expected_dose_cgy = 70.0;
    in.dose.dose_cgy = 74.0;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_WITHIN);
}

static void test_verdict_reading_not_positive(void **state)
{
    fxl_judge_input in = clean_input(200.0);
    fxl_judgement j;

    (void)state;
    in.reading = -3.2;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_IMPLAUSIBLE);
    assert_true(isnan(j.deviation_pct));
    assert_reason(&j.reasons, "reading -3.2 nC is not greater than 0");
    in.reading = 0.0;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_IMPLAUSIBLE);
    in.reading = NAN;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_IMPLAUSIBLE);
    in.reading = INFINITY;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_IMPLAUSIBLE);
}

static void test_verdict_reading_checked_first(void **state)
{
    fxl_judge_input in = clean_input(200.0);
    fxl_judgement j;

    (void)state;
    /* a typing error is reported as such even on a retired detector */
    in.reading = 0.0;
    in.detector_in_service = 0;
    in.detector_status = "retired";
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_IMPLAUSIBLE);
}

static void test_verdict_gross_deviation(void **state)
{
    fxl_judge_input in = clean_input(300.0);
    fxl_judgement j = judge(&in);

    (void)state;
    /* physics: 100 / 200 x 100 = 50.00 %: at the bound, an ordinary result */
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_ACTION);
    assert_int_equal(j.gross, 0);
    /* physics: 100.02 / 200 x 100 = 50.01 %: beyond the bound, a gross
     * deviation: outside the action level, re-read first, then hold */
    in = clean_input(300.02);
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_ACTION);
    assert_int_equal(j.gross, 1);
    assert_near(j.deviation_pct, 50.01, 1e-9);
    assert_reason(&j.reasons, "gross deviation, outside the action level");
    assert_reason(&j.reasons, "re-read the electrometer and check the unit");
    assert_reason(&j.reasons, "hold treatment and call the physicist");
    /* physics: -100.02 / 200 x 100 = -50.01 % */
    in = clean_input(99.98);
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_ACTION);
    assert_int_equal(j.gross, 1);
    /* a 60 degree wedge left out: WF 0.62 (a typical value, from memory:
     * 0.42 to 0.62) -> 200 / 0.62 = 322.58 cGy, +61.29 % (physics) */
    in = clean_input(200.0 / 0.62);
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_ACTION);
    assert_int_equal(j.gross, 1);
    assert_near(j.deviation_pct, 61.29, 1e-9);
    /* even without levels a gross deviation is outside the action level */
    in.levels.present = 0;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_ACTION);
    assert_non_null(strstr(fxl_gross_guidance(), "re-read the electrometer"));
    assert_non_null(strstr(fxl_gross_guidance(), "Call the physicist"));
}

static void test_verdict_gross_bound_configurable(void **state)
{
    fxl_judge_input in = clean_input(262.0);
    fxl_judgement j;

    (void)state;
    /* physics: 62 / 200 x 100 = 31 % > 30 % */
    in.implausible_pct = 30.0;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_ACTION);
    assert_int_equal(j.gross, 1);
    /* unset (0 or NaN) bound means the default 50 %: 31 % is not gross */
    in.implausible_pct = 0.0;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_ACTION);
    assert_int_equal(j.gross, 0);
    in.implausible_pct = NAN;
    j = judge(&in);
    assert_int_equal(j.gross, 0);
    in = clean_input(300.02);
    in.implausible_pct = -5.0;
    j = judge(&in);
    assert_int_equal(j.gross, 1);
}

static void test_verdict_gross_unit_slip(void **state)
{
    fxl_judge_input in = clean_input(2100.0);
    fxl_judgement j;

    (void)state;
    /* a bound set very wide still leaves the 0.1..10 ratio check:
     * physics: 2100 / 200 = 10.5 > 10, close to a factor 10 */
    in.implausible_pct = 5000.0;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_ACTION);
    assert_int_equal(j.gross, 1);
    assert_reason(&j.reasons, "close to a factor 10");
    /* physics: 0.2 / 200 = 0.001: a factor 1000 (pC entered as nC) */
    in.implausible_pct = 0;
    in.dose.dose_cgy = 0.2;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_ACTION);
    assert_reason(&j.reasons, "close to a factor 0.001");
    /* physics: 200000 / 200 = 1000 */
    in.dose.dose_cgy = 200000.0;
    j = judge(&in);
    assert_reason(&j.reasons, "close to a factor 1000");
    /* physics: 2000 / 200 = 10 exactly with a very wide bound: not gross */
    in.implausible_pct = 5000.0;
    in.dose.dose_cgy = 2000.0;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_OUTSIDE_ACTION);
    assert_int_equal(j.gross, 0);
    /* physics: 320 / 200 = 1.6: gross but no unit slip named */
    in.implausible_pct = 0;
    in.dose.dose_cgy = 320.0;
    j = judge(&in);
    assert_int_equal(j.gross, 1);
    assert_int_equal(j.reasons.n, 2);
}

static void test_verdict_missing_levels_not_evaluable(void **state)
{
    fxl_judge_input in = clean_input(200.0);
    fxl_judgement j;

    (void)state;
    /* a perfect 0.00 % deviation is still no pass without levels */
    in.levels.present = 0;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_NOT_EVALUABLE);
    assert_reason(&j.reasons,
                  "no tolerance or action levels are set for this field; result cannot be judged");
}

static void test_verdict_invalid_levels_not_evaluable(void **state)
{
    fxl_judge_input in = clean_input(200.0);
    fxl_judgement j;

    (void)state;
    in.levels.tolerance_pct = 7.0;
    in.levels.action_pct = 5.0;  /* action below tolerance */
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_NOT_EVALUABLE);
    in = clean_input(200.0);
    in.levels.tolerance_pct = NAN;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_NOT_EVALUABLE);
    in = clean_input(200.0);
    in.levels.tolerance_pct = 0.0;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_NOT_EVALUABLE);
}

static void test_verdict_retired_detector(void **state)
{
    fxl_judge_input in = clean_input(200.0);
    fxl_judgement j;

    (void)state;
    in.detector_in_service = 0;
    in.detector_status = "retired";
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_NOT_EVALUABLE);
    assert_true(isnan(j.deviation_pct));
    assert_reason(&j.reasons, "detector is retired");
    in.detector_status = "out_for_service";
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_NOT_EVALUABLE);
    assert_reason(&j.reasons, "detector is out for service");
    in.detector_status = NULL;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_NOT_EVALUABLE);
    assert_reason(&j.reasons, "detector is not in service");
}

static void test_verdict_expired_calibration(void **state)
{
    fxl_judge_input in = clean_input(200.0);
    fxl_judgement j;

    (void)state;
    in.calibration_valid = 0;
    in.calibration_valid_until = "2026-10-01T23:59:59Z";
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_NOT_EVALUABLE);
    assert_reason(&j.reasons, "calibration expired on 2026-10-01");
    in.calibration_valid_until = NULL;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_NOT_EVALUABLE);
    assert_reason(&j.reasons, "no calibration of this detector is valid on the treatment date");
}

static void test_verdict_no_calibration(void **state)
{
    fxl_judge_input in = clean_input(200.0);
    fxl_judgement j;

    (void)state;
    in.calibration_found = 0;
    in.calibration_valid = 0;
    in.dose.evaluable = 0;
    in.dose.dose_cgy = NAN;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_NOT_EVALUABLE);
    assert_reason(&j.reasons, "detector has no calibration for this beam and measured point");
}

static void test_verdict_dose_not_evaluable(void **state)
{
    fxl_judge_input in = clean_input(200.0);
    fxl_judgement j;

    (void)state;
    in.dose.evaluable = 0;
    in.dose.dose_cgy = NAN;
    fxl_reasons_add(&in.dose.reasons,
                    "field size 32.0 cm is outside the commissioned table 4.0-30.0 cm; no "
                    "extrapolation");
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_NOT_EVALUABLE);
    assert_reason(&j.reasons, "field size 32.0 cm is outside the commissioned table");
    /* evaluable claimed but no number: still not a result */
    in = clean_input(NAN);
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_NOT_EVALUABLE);
}

static void test_verdict_missing_expected_dose(void **state)
{
    fxl_judge_input in = clean_input(200.0);
    fxl_judgement j;

    (void)state;
    in.expected_dose_cgy = NAN;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_NOT_EVALUABLE);
    assert_reason(&j.reasons, "no expected dose");
    in.expected_dose_cgy = 0.0;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_NOT_EVALUABLE);
    in.expected_dose_cgy = -200.0;
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_NOT_EVALUABLE);
}

static void test_verdict_not_evaluable_before_implausible(void **state)
{
    fxl_judge_input in = clean_input(320.0);  /* +60 % */
    fxl_judgement j;

    (void)state;
    in.detector_in_service = 0;
    in.detector_status = "retired";
    in.calibration_valid = 0;
    in.calibration_valid_until = "2026-10-01T23:59:59Z";
    j = judge(&in);
    assert_verdict(&j, FXL_VERDICT_NOT_EVALUABLE);
    /* every reason is listed, most important first */
    assert_int_equal(j.reasons.n, 2);
    assert_reason(&j.reasons, "detector is retired");
    assert_reason(&j.reasons, "calibration expired on 2026-10-01");
}

static void test_verdict_names_and_parse(void **state)
{
    static const char *names[] = {"within_tolerance", "outside_tolerance", "outside_action",
                                  "not_evaluable", "implausible"};
    fxl_verdict v;
    int i;

    (void)state;
    /* the schema's names (sql/001_schema.sql, measurements.verdict) */
    for (i = 0; i < 5; i++) {
        assert_string_equal(fxl_verdict_name((fxl_verdict)i), names[i]);
        assert_int_equal(fxl_verdict_parse(&v, names[i]), 0);
        assert_int_equal(v, i);
    }
    assert_int_equal(fxl_verdict_parse(&v, "pass"), FXL_EINVAL);
    assert_int_equal(fxl_verdict_parse(&v, NULL), FXL_EINVAL);
    assert_string_equal(fxl_verdict_label(FXL_VERDICT_WITHIN), "within tolerance");
    assert_string_equal(fxl_verdict_label(FXL_VERDICT_OUTSIDE_ACTION), "outside action level");
    assert_string_equal(fxl_verdict_name((fxl_verdict)99), "unknown");
}

static void test_verdict_guidance(void **state)
{
    (void)state;
    assert_non_null(strstr(fxl_verdict_guidance(FXL_VERDICT_WITHIN), "continue"));
    assert_non_null(strstr(fxl_verdict_guidance(FXL_VERDICT_OUTSIDE_TOLERANCE), "re-measure"));
    assert_non_null(strstr(fxl_verdict_guidance(FXL_VERDICT_OUTSIDE_TOLERANCE), "SSD"));
    assert_non_null(strstr(fxl_verdict_guidance(FXL_VERDICT_OUTSIDE_ACTION),
                           "Do not continue this patient's treatment"));
    assert_non_null(strstr(fxl_verdict_guidance(FXL_VERDICT_OUTSIDE_ACTION), "physicist"));
    assert_non_null(strstr(fxl_verdict_guidance(FXL_VERDICT_NOT_EVALUABLE), "not verified"));
    assert_non_null(strstr(fxl_verdict_guidance(FXL_VERDICT_IMPLAUSIBLE), "not a dose result"));
    /* an unknown verdict is never told to carry on */
    assert_null(strstr(fxl_verdict_guidance((fxl_verdict)99), "continue"));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_verdict_deviation_formula),
        cmocka_unit_test(test_verdict_within_tolerance),
        cmocka_unit_test(test_verdict_tolerance_boundary_positive),
        cmocka_unit_test(test_verdict_tolerance_boundary_negative),
        cmocka_unit_test(test_verdict_boundary_uses_shown_precision),
        cmocka_unit_test(test_verdict_action_boundary),
        cmocka_unit_test(test_verdict_outside_action),
        cmocka_unit_test(test_verdict_floor_for_small_doses),
        cmocka_unit_test(test_verdict_floor_capped),
        cmocka_unit_test(test_verdict_reading_not_positive),
        cmocka_unit_test(test_verdict_reading_checked_first),
        cmocka_unit_test(test_verdict_gross_deviation),
        cmocka_unit_test(test_verdict_gross_bound_configurable),
        cmocka_unit_test(test_verdict_gross_unit_slip),
        cmocka_unit_test(test_verdict_missing_levels_not_evaluable),
        cmocka_unit_test(test_verdict_invalid_levels_not_evaluable),
        cmocka_unit_test(test_verdict_retired_detector),
        cmocka_unit_test(test_verdict_expired_calibration),
        cmocka_unit_test(test_verdict_no_calibration),
        cmocka_unit_test(test_verdict_dose_not_evaluable),
        cmocka_unit_test(test_verdict_missing_expected_dose),
        cmocka_unit_test(test_verdict_not_evaluable_before_implausible),
        cmocka_unit_test(test_verdict_names_and_parse),
        cmocka_unit_test(test_verdict_guidance),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
