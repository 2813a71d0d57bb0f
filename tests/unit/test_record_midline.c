/* Unit tests for the entrance-exit pairing of logged results
 * (src/store/record_midline.c): which readings pair up (same fraction, same
 * field, current rows only, dose results only) and the estimate against the
 * check values of arithmetic of the published formula (D_E 120, D_X 60 cGy: arithmetic
 * 90.000, geometric 84.853 cGy; geometric mean sqrt(D_E x D_X), ESTRO
 * Booklet 1). Invented data. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "fxl/record_midline.h"

static void assert_near_at(double got, double want, double eps, const char *expr,
                           const char *file, int line)
{
    if (!(fabs(got - want) <= eps)) {
        print_error("%s = %.9g, expected %.9g (+/- %g)\n", expr, got, want, eps);
        _fail(file, line);
    }
}
#define assert_near(got, want, eps) assert_near_at((got), (want), (eps), #got, __FILE__, __LINE__)

static void item(fxl_measurement_result *m, int64_t id, const char *field, const char *point,
                 double dose, fxl_verdict v)
{
    memset(m, 0, sizeof *m);
    m->measurement_id = id;
    snprintf(m->field, sizeof m->field, "%s", field);
    snprintf(m->point, sizeof m->point, "%s", point);
    m->corrected_dose_cgy = dose;
    m->verdict = v;
}

static void test_record_midline_pairs_of_a_fraction(void **state)
{
    fxl_measurement_result items[5];
    fxl_record_result r = FXL_RECORD_RESULT_INIT;
    fxl_midline_pair *pairs = NULL;
    size_t n = 0;

    (void)state;
    item(&items[0], 11, "LAT", "entrance", 120.0, FXL_VERDICT_WITHIN);
    item(&items[1], 12, "AP", "entrance", 200.0, FXL_VERDICT_WITHIN);       /* no exit: no pair */
    item(&items[2], 13, "LAT", "exit", 60.0, FXL_VERDICT_OUTSIDE_TOLERANCE);
    item(&items[3], 14, "PA", "entrance", 150.0, FXL_VERDICT_WITHIN);
    item(&items[4], 15, "PA", "exit", NAN, FXL_VERDICT_NOT_EVALUABLE);
    r.fraction_id = 7;
    r.fraction_number = 3;
    snprintf(r.plan, sizeof r.plan, "P1");
    r.n = 5;
    r.items = items;
    assert_int_equal(fxl_record_midlines(&pairs, &n, &r), 0);
    assert_int_equal(n, 2);
    assert_string_equal(pairs[0].field, "LAT");
    assert_int_equal(pairs[0].entrance_id, 11);
    assert_int_equal(pairs[0].exit_id, 13);
    assert_int_equal(pairs[0].fraction_number, 3);
    assert_true(pairs[0].estimate.computed);
    assert_near(pairs[0].estimate.geometric_cgy, 84.853, 0.0005);    /* arithmetic of the published formula */
    assert_near(pairs[0].estimate.arithmetic_cgy, 90.000, 0.0005);   /* arithmetic of the published formula */
    assert_string_equal(pairs[1].field, "PA");
    assert_false(pairs[1].estimate.computed);
    assert_non_null(strstr(pairs[1].estimate.reasons.text[0], "exit reading gave no dose result"));
    free(pairs);

    /* an implausible entry is never combined into a dose */
    items[2].verdict = FXL_VERDICT_IMPLAUSIBLE;
    assert_int_equal(fxl_record_midlines(&pairs, &n, &r), 0);
    assert_int_equal(n, 2);
    assert_false(pairs[0].estimate.computed);
    assert_true(isnan(pairs[0].estimate.geometric_cgy));
    free(pairs);

    r.n = 2;   /* entrance readings only */
    assert_int_equal(fxl_record_midlines(&pairs, &n, &r), 0);
    assert_int_equal(n, 0);
    assert_null(pairs);
}

static void row(fxl_history_row *h, int64_t id, int64_t fraction_id, const char *field, const char *point,
                double dose, int64_t superseded_by)
{
    memset(h, 0, sizeof *h);
    h->measurement_id = id;
    h->fraction_id = fraction_id;
    h->fraction_number = (int)fraction_id;
    snprintf(h->plan, sizeof h->plan, "P1");
    snprintf(h->field, sizeof h->field, "%s", field);
    snprintf(h->point, sizeof h->point, "%s", point);
    h->corrected_dose_cgy = dose;
    h->verdict = FXL_VERDICT_WITHIN;
    h->superseded_by = superseded_by;
}

static void test_record_midline_history_current_rows_per_fraction(void **state)
{
    fxl_history_row rows[6];
    fxl_midline_pair *pairs = NULL;
    size_t n = 0;

    (void)state;
    row(&rows[0], 1, 1, "LAT", "entrance", 120.0, 0);
    row(&rows[1], 2, 1, "LAT", "exit", 6.0, 3);        /* mistyped, superseded by #3 */
    row(&rows[2], 3, 1, "LAT", "exit", 60.0, 0);
    row(&rows[3], 4, 2, "LAT", "entrance", 100.0, 0);
    row(&rows[4], 5, 3, "LAT", "exit", 50.0, 0);       /* another fraction: no pair with #4 */
    row(&rows[5], 6, 2, "AP", "exit", 50.0, 0);        /* another field */
    assert_int_equal(fxl_history_midlines(&pairs, &n, rows, 6), 0);
    assert_int_equal(n, 1);
    assert_int_equal(pairs[0].entrance_id, 1);
    assert_int_equal(pairs[0].exit_id, 3);
    /* sqrt(120 x 60) (formula above, arithmetic check value) */
    assert_near(pairs[0].estimate.geometric_cgy, 84.853, 0.0005);
    assert_near(pairs[0].estimate.transmission, 0.5, 1e-12);
    free(pairs);
    assert_int_equal(fxl_history_midlines(&pairs, &n, rows, 0), 0);
    assert_int_equal(n, 0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_record_midline_pairs_of_a_fraction),
        cmocka_unit_test(test_record_midline_history_current_rows_per_fraction),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
