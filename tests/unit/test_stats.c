/* Unit tests for fxl_mean_sd (src/core/formulas.c): mean and sample standard
 * deviation, as used for calibration readings and the periodic review of
 * deviations. Reference values from Python's statistics module. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "fxl/core.h"
#include "fxl/fxl.h"

static void assert_near_at(double got, double want, double eps, const char *expr,
                           const char *file, int line)
{
    if (!(fabs(got - want) <= eps)) {
        print_error("%s = %.17g, expected %.17g (+/- %g)\n", expr, got, want, eps);
        _fail(file, line);
    }
}
#define assert_near(got, want, eps) assert_near_at((got), (want), (eps), #got, __FILE__, __LINE__)

static void test_stats_calibration_readings(void **state)
{
    /* invented: five electrometer readings, nC, of one calibration */
    static const double v[] = {20.11, 20.05, 20.14, 20.08, 20.12};
    double mean = 0, sd = 0;

    (void)state;
    assert_int_equal(fxl_mean_sd(&mean, &sd, v, 5), 0);
    assert_near(mean, 20.1, 1e-12);                 /* Python statistics module: mean 20.1 */
    assert_near(sd, 0.035355339059327626, 1e-12);   /* Python statistics module: stdev */
}

static void test_stats_deviations(void **state)
{
    /* an invented deviation series (I-MR chart case), % */
    static const double v[] = {1.0, -0.5, 0.5, 2.0, -1.0};
    double mean = 0, sd = 0;

    (void)state;
    assert_int_equal(fxl_mean_sd(&mean, &sd, v, 5), 0);
    assert_near(mean, 0.400, 1e-12);                /* Python statistics module: mean; arithmetic 2.0/5 */
    assert_near(sd, 1.1937336386313322, 1e-12);     /* Python statistics module: stdev */
}

static void test_stats_sample_not_population(void **state)
{
    static const double v[] = {-2.5, 3.5};
    double mean = 0, sd = 0;

    (void)state;
    assert_int_equal(fxl_mean_sd(&mean, &sd, v, 2), 0);
    assert_near(mean, 0.5, 1e-12);                  /* Python statistics module: mean 0.5 */
    /* Python statistics module: stdev 4.242640687119285 (n - 1); the
     * population SD would be 3.0 (arithmetic: sqrt((9 + 9) / 2)) */
    assert_near(sd, 4.242640687119285, 1e-12);
}

static void test_stats_single_value(void **state)
{
    static const double v[] = {7.5};
    double mean = 0, sd = -1;

    (void)state;
    assert_int_equal(fxl_mean_sd(&mean, &sd, v, 1), 0);
    assert_near(mean, 7.5, 0);
    assert_near(sd, 0.0, 0);                        /* contract: sd is 0 for n == 1 */
}

static void test_stats_identical_values(void **state)
{
    static const double v[] = {4.2, 4.2, 4.2};
    double mean = 0, sd = -1;

    (void)state;
    assert_int_equal(fxl_mean_sd(&mean, &sd, v, 3), 0);
    assert_near(mean, 4.2, 1e-12);                  /* Python statistics module: mean 4.2 */
    assert_near(sd, 0.0, 1e-12);                    /* Python statistics module: stdev 0.0 */
}

static void test_stats_large_offset_stable(void **state)
{
    static const double v[] = {1e9 + 1, 1e9 + 2, 1e9 + 3};
    double mean = 0, sd = 0;

    (void)state;
    /* a one-pass sum of squares loses these digits */
    assert_int_equal(fxl_mean_sd(&mean, &sd, v, 3), 0);
    assert_near(mean, 1000000002.0, 1e-6);          /* Python statistics module */
    assert_near(sd, 1.0, 1e-9);                     /* Python statistics module: stdev 1.0 */
}

static void test_stats_rejects_bad_input(void **state)
{
    static const double with_nan[] = {1.0, NAN, 2.0};
    static const double with_inf[] = {1.0, INFINITY};
    static const double ok[] = {1.0, 2.0};
    double mean = -1, sd = -1;

    (void)state;
    assert_int_equal(fxl_mean_sd(&mean, &sd, ok, 0), FXL_EINVAL);
    assert_int_equal(fxl_mean_sd(&mean, &sd, with_nan, 3), FXL_EINVAL);
    assert_int_equal(fxl_mean_sd(&mean, &sd, with_inf, 2), FXL_EINVAL);
    assert_int_equal(fxl_mean_sd(&mean, &sd, NULL, 2), FXL_EINVAL);
    /* nothing is written on refusal */
    assert_near(mean, -1, 0);
    assert_near(sd, -1, 0);
}

static void test_stats_outputs_optional(void **state)
{
    static const double v[] = {1.0, 2.0, 3.0};
    double mean = 0, sd = 0;

    (void)state;
    assert_int_equal(fxl_mean_sd(&mean, NULL, v, 3), 0);
    assert_near(mean, 2.0, 1e-12);                  /* arithmetic: (1 + 2 + 3) / 3 */
    assert_int_equal(fxl_mean_sd(NULL, &sd, v, 3), 0);
    assert_near(sd, 1.0, 1e-12);                    /* arithmetic: sqrt((1 + 0 + 1) / 2) */
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_stats_calibration_readings),
        cmocka_unit_test(test_stats_deviations),
        cmocka_unit_test(test_stats_sample_not_population),
        cmocka_unit_test(test_stats_single_value),
        cmocka_unit_test(test_stats_identical_values),
        cmocka_unit_test(test_stats_large_offset_stable),
        cmocka_unit_test(test_stats_rejects_bad_input),
        cmocka_unit_test(test_stats_outputs_optional),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
