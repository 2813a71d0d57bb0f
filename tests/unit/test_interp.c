/* Unit tests for src/core/interp.c: linear interpolation inside a correction
 * table, the no-extrapolation rule at and past both ends, exact lookup of
 * discrete parameters, and refusal of malformed tables. */
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
        print_error("%s = %.9g, expected %.9g (+/- %g)\n", expr, got, want, eps);
        _fail(file, line);
    }
}
#define assert_near(got, want, eps) assert_near_at((got), (want), (eps), #got, __FILE__, __LINE__)

/* Invented field-size table (equivalent square, cm) for a photon diode. */
static const double fs_x[] = {4.0, 10.0, 20.0, 30.0};
static const double fs_cf[] = {0.970, 1.000, 1.020, 1.030};
#define FS_N 4

/* Invented wedge table (nominal angle, deg), discrete. */
static const double wd_x[] = {0.0, 15.0, 30.0, 60.0};
static const double wd_cf[] = {1.000, 1.012, 1.025, 1.048};
#define WD_N 4

static void test_interp_inside_between_points(void **state)
{
    double y = 0;

    (void)state;
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, FS_N, 15.0), 0);
    /* physics (linear interpolation): 1.000 + (15-10)/(20-10) x (1.020-1.000) = 1.010 */
    assert_near(y, 1.010, 1e-12);
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, FS_N, 7.0), 0);
    /* physics: 0.970 + (7-4)/(10-4) x (1.000-0.970) = 0.970 + 0.5 x 0.030 = 0.985 */
    assert_near(y, 0.985, 1e-12);
}

static void test_interp_equivalent_square_of_rectangle(void **state)
{
    double y = 0;
    double side = fxl_equiv_square_cm(10.0, 20.0);

    (void)state;
    /* Sterling rule: 2 x 10 x 20 / (10 + 20) = 13.333 cm (Sterling, Perry and Katz 1964; arithmetic) */
    assert_near(side, 13.333, 5e-4);
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, FS_N, side), 0);
    /* physics: 1.000 + (13.3333-10)/10 x 0.020 = 1.0066667 */
    assert_near(y, 1.0066667, 1e-6);
}

static void test_interp_at_table_points(void **state)
{
    double y = 0;

    (void)state;
    /* At a table point the table's own value is returned, at both ends too. */
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, FS_N, 4.0), 0);
    assert_near(y, 0.970, 0);
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, FS_N, 30.0), 0);
    assert_near(y, 1.030, 0);
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, FS_N, 20.0), 0);
    assert_near(y, 1.020, 0);
}

static void test_interp_no_extrapolation_below(void **state)
{
    double y = -1;

    (void)state;
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, FS_N, 3.99), FXL_ERANGE);
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, FS_N, 3.9999), FXL_ERANGE);
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, FS_N, 0.0), FXL_ERANGE);
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, FS_N, -5.0), FXL_ERANGE);
    /* nothing is written on refusal */
    assert_near(y, -1, 0);
}

static void test_interp_no_extrapolation_above(void **state)
{
    double y = -1;

    (void)state;
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, FS_N, 30.01), FXL_ERANGE);
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, FS_N, 30.0001), FXL_ERANGE);
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, FS_N, 40.0), FXL_ERANGE);
    assert_near(y, -1, 0);
}

static void test_interp_rounding_at_end_is_the_end(void **state)
{
    double y = 0;

    (void)state;
    /* A floating-point rounding error (below 1e-6) at an end is that end;
     * anything larger is outside. */
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, FS_N, 30.0 + 1e-9), 0);
    assert_near(y, 1.030, 0);
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, FS_N, 4.0 - 1e-9), 0);
    assert_near(y, 0.970, 0);
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, FS_N, 30.0 + 1e-5), FXL_ERANGE);
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, FS_N, 4.0 - 1e-5), FXL_ERANGE);
}

static void test_interp_one_point_table(void **state)
{
    static const double x1[] = {10.0};
    static const double y1[] = {1.004};
    double y = 0;

    (void)state;
    assert_int_equal(fxl_interp_linear(&y, x1, y1, 1, 10.0), 0);
    assert_near(y, 1.004, 0);
    assert_int_equal(fxl_interp_linear(&y, x1, y1, 1, 10.1), FXL_ERANGE);
    assert_int_equal(fxl_interp_linear(&y, x1, y1, 1, 9.9), FXL_ERANGE);
}

static void test_interp_rejects_bad_tables(void **state)
{
    static const double flat_x[] = {4.0, 10.0, 10.0, 30.0};
    static const double down_x[] = {30.0, 20.0, 10.0, 4.0};
    static const double nan_y[] = {0.97, NAN, 1.02, 1.03};
    double y = -1;

    (void)state;
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, 0, 10.0), FXL_EINVAL);
    assert_int_equal(fxl_interp_linear(&y, flat_x, fs_cf, 4, 15.0), FXL_EINVAL);
    assert_int_equal(fxl_interp_linear(&y, down_x, fs_cf, 4, 15.0), FXL_EINVAL);
    assert_int_equal(fxl_interp_linear(&y, fs_x, nan_y, 4, 15.0), FXL_EINVAL);
    assert_int_equal(fxl_interp_linear(&y, NULL, fs_cf, 4, 15.0), FXL_EINVAL);
    assert_int_equal(fxl_lookup_exact(&y, fs_x, fs_cf, 0, 10.0), FXL_EINVAL);
    assert_int_equal(fxl_lookup_exact(&y, down_x, fs_cf, 4, 10.0), FXL_EINVAL);
    assert_near(y, -1, 0);
}

static void test_interp_rejects_non_finite_x(void **state)
{
    double y = -1;

    (void)state;
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, FS_N, NAN), FXL_EINVAL);
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, FS_N, INFINITY), FXL_EINVAL);
    assert_int_equal(fxl_interp_linear(&y, fs_x, fs_cf, FS_N, -INFINITY), FXL_EINVAL);
    assert_int_equal(fxl_lookup_exact(&y, wd_x, wd_cf, WD_N, NAN), FXL_EINVAL);
    assert_near(y, -1, 0);
}

static void test_interp_exact_lookup_matches(void **state)
{
    double y = 0;

    (void)state;
    assert_int_equal(fxl_lookup_exact(&y, wd_x, wd_cf, WD_N, 0.0), 0);
    assert_near(y, 1.000, 0);
    assert_int_equal(fxl_lookup_exact(&y, wd_x, wd_cf, WD_N, 30.0), 0);
    assert_near(y, 1.025, 0);
    assert_int_equal(fxl_lookup_exact(&y, wd_x, wd_cf, WD_N, 60.0), 0);
    assert_near(y, 1.048, 0);
    /* within 1e-6 of a point is that point */
    assert_int_equal(fxl_lookup_exact(&y, wd_x, wd_cf, WD_N, 15.0 + 5e-7), 0);
    assert_near(y, 1.012, 0);
}

static void test_interp_exact_lookup_never_interpolates(void **state)
{
    double y = -1;

    (void)state;
    /* 45 deg lies between 30 and 60 but a wedge is a different filter, not
     * a point on a curve: refused. */
    assert_int_equal(fxl_lookup_exact(&y, wd_x, wd_cf, WD_N, 45.0), FXL_ERANGE);
    assert_int_equal(fxl_lookup_exact(&y, wd_x, wd_cf, WD_N, 15.01), FXL_ERANGE);
    assert_int_equal(fxl_lookup_exact(&y, wd_x, wd_cf, WD_N, 90.0), FXL_ERANGE);
    assert_int_equal(fxl_lookup_exact(&y, wd_x, wd_cf, WD_N, -15.0), FXL_ERANGE);
    assert_near(y, -1, 0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_interp_inside_between_points),
        cmocka_unit_test(test_interp_equivalent_square_of_rectangle),
        cmocka_unit_test(test_interp_at_table_points),
        cmocka_unit_test(test_interp_no_extrapolation_below),
        cmocka_unit_test(test_interp_no_extrapolation_above),
        cmocka_unit_test(test_interp_rounding_at_end_is_the_end),
        cmocka_unit_test(test_interp_one_point_table),
        cmocka_unit_test(test_interp_rejects_bad_tables),
        cmocka_unit_test(test_interp_rejects_non_finite_x),
        cmocka_unit_test(test_interp_exact_lookup_matches),
        cmocka_unit_test(test_interp_exact_lookup_never_interpolates),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
