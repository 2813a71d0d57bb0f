/* Unit tests for the midline dose of an entrance-exit pair
 * (src/core/midline.c): arithmetic and geometric mean against the check
 * values of arithmetic of the published formula, and the refusals. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include <cmocka.h>

#include "fxl/midline.h"

static void assert_near_at(double got, double want, double eps, const char *expr,
                           const char *file, int line)
{
    if (!(fabs(got - want) <= eps)) {
        print_error("%s = %.9g, expected %.9g (+/- %g)\n", expr, got, want, eps);
        _fail(file, line);
    }
}
#define assert_near(got, want, eps) assert_near_at((got), (want), (eps), #got, __FILE__, __LINE__)

static void test_midline_check_values(void **state)
{
    fxl_midline m;

    (void)state;
    assert_int_equal(fxl_midline_estimate(&m, 120.0, 60.0), 0);
    assert_true(m.computed);
    /* D_E 120, D_X 60: arithmetic 90.000, geometric sqrt(7200) = 84.853
     * (arithmetic of the published formula, "formulas above"; ESTRO Booklet 1, from memory). */
    assert_near(m.arithmetic_cgy, 90.000, 0.0005);
    assert_near(m.geometric_cgy, 84.853, 0.0005);
    assert_near(m.transmission, 0.5, 1e-12);
    assert_near(m.entrance_cgy, 120.0, 0);
    assert_near(m.exit_cgy, 60.0, 0);
}

static void test_midline_geometric_below_arithmetic(void **state)
{
    fxl_midline m;

    (void)state;
    /* AM-GM inequality (arithmetic): equal only when the two doses are equal. */
    assert_int_equal(fxl_midline_estimate(&m, 100.0, 100.0), 0);
    assert_true(m.computed);
    assert_near(m.geometric_cgy, 100.0, 1e-12);
    assert_near(m.arithmetic_cgy, 100.0, 1e-12);
    assert_int_equal(fxl_midline_estimate(&m, 180.0, 45.0), 0);
    assert_near(m.geometric_cgy, 90.0, 1e-12);  /* sqrt(8100) */
    assert_near(m.arithmetic_cgy, 112.5, 1e-12);
}

static void test_midline_refusals(void **state)
{
    fxl_midline m;

    (void)state;
    assert_int_equal(fxl_midline_estimate(&m, 60.0, 120.0), 0);
    assert_false(m.computed);
    assert_true(isnan(m.geometric_cgy) && isnan(m.arithmetic_cgy));
    assert_non_null(strstr(m.reasons.text[0], "transmission above 1"));
    assert_int_equal(fxl_midline_estimate(&m, 0.0, 50.0), 0);
    assert_false(m.computed);
    assert_non_null(strstr(m.reasons.text[0], "entrance dose '0' cGy must be > 0"));
    assert_int_equal(fxl_midline_estimate(&m, 100.0, NAN), 0);
    assert_false(m.computed);
    assert_non_null(strstr(m.reasons.text[0], "exit dose"));
    assert_int_equal(fxl_midline_estimate(NULL, 1, 1), -2);
    assert_non_null(strstr(fxl_midline_method(), "geometric mean"));
    assert_non_null(strstr(fxl_midline_method(), "ESTRO Booklet 1"));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_midline_check_values),
        cmocka_unit_test(test_midline_geometric_below_arithmetic),
        cmocka_unit_test(test_midline_refusals),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
