/* Unit tests for src/core/stats.c: group summary, percentiles, I-MR limits
 * and the level suggestion. Reference values from Python's statistics module
 * (mean, stdev, median, quantiles(n=20, method='inclusive')) and the I-MR
 * check value of the SPC constants (Pawlicki et al., Med. Phys. 2005). */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "fxl/fxl.h"
#include "fxl/stats.h"

static void assert_near_at(double got, double want, double eps, const char *expr,
                           const char *file, int line)
{
    if (!(fabs(got - want) <= eps)) {
        print_error("%s = %.17g, expected %.17g (+/- %g)\n", expr, got, want, eps);
        _fail(file, line);
    }
}
#define assert_near(got, want, eps) assert_near_at((got), (want), (eps), #got, __FILE__, __LINE__)

/* I-MR check case: deviations 1.0, -0.5, 0.5, 2.0, -1.0 %. */
static const double imr_case[] = {1.0, -0.5, 0.5, 2.0, -1.0};

static void test_period_stats_imr_check_value(void **state)
{
    fxl_imr c;

    (void)state;
    assert_int_equal(fxl_imr_limits(&c, imr_case, 5), 0);
    /* SPC constants (E2 2.66, D4 3.267): mean 0.400, limits 5.055 / -4.255,
     * MR limit 5.717; average moving range (1.5 + 1 + 1.5 + 3) / 4 = 1.75. */
    assert_near(c.centre, 0.400, 5e-4);
    assert_near(c.mr_mean, 1.75, 1e-12);
    assert_near(c.ucl, 5.055, 5e-4);
    assert_near(c.lcl, -4.255, 5e-4);
    assert_near(c.mr_ucl, 5.717, 5e-4);
    assert_int_equal(c.beyond, 0);
    assert_int_equal(c.mr_beyond, 0);
}

static void test_period_stats_imr_flags_a_jump(void **state)
{
    /* invented: a steady series with one gross jump at the end */
    static const double v[] = {0.1, 0.2, 0.0, 0.1, 0.2, 0.1, 0.0, 8.0};
    fxl_imr c;

    (void)state;
    assert_int_equal(fxl_imr_limits(&c, v, 8), 0);
    assert_true(c.beyond >= 1);
    assert_true(c.mr_beyond >= 1);
}

static void test_period_stats_imr_single_point(void **state)
{
    static const double v[] = {1.5};
    fxl_imr c;

    (void)state;
    assert_int_equal(fxl_imr_limits(&c, v, 1), 0);
    assert_near(c.centre, 1.5, 0);
    assert_true(isnan(c.ucl) && isnan(c.lcl) && isnan(c.mr_ucl));
    assert_int_equal(fxl_imr_limits(&c, v, 0), FXL_EINVAL);
}

static void test_period_stats_summary_check_case(void **state)
{
    double scratch[5];
    fxl_stats_summary s;

    (void)state;
    assert_int_equal(fxl_stats_summarize(&s, imr_case, 5, scratch), 0);
    assert_int_equal(s.n, 5);
    assert_near(s.mean, 0.4, 1e-12);                  /* statistics.mean */
    assert_near(s.sd, 1.1937336386313322, 1e-12);     /* statistics.stdev */
    assert_near(s.median, 0.5, 1e-12);                /* statistics.median */
    assert_near(s.p05, -0.9, 1e-12);                  /* quantiles(n=20, 'inclusive')[0] */
    assert_near(s.p95, 1.8, 1e-12);                   /* quantiles(n=20, 'inclusive')[18] */
    assert_near(s.min, -1.0, 0);
    assert_near(s.max, 2.0, 0);
}

static void test_period_stats_summary_even_count(void **state)
{
    /* invented: twelve deviations, %, in no order */
    static const double v[] = {0.8, -1.2, 2.3, 0.1, -0.4, 1.7, -2.9, 0.6, 1.1, -0.2, 3.4, -1.5};
    double scratch[12];
    fxl_stats_summary s;

    (void)state;
    assert_int_equal(fxl_stats_summarize(&s, v, 12, scratch), 0);
    assert_near(s.mean, 0.31666666666666665, 1e-12);  /* statistics.mean */
    assert_near(s.sd, 1.7335372840384815, 1e-12);     /* statistics.stdev */
    assert_near(s.median, 0.35, 1e-12);               /* statistics.median */
    assert_near(s.p05, -2.13, 1e-12);                 /* quantiles(n=20, 'inclusive')[0] */
    assert_near(s.p95, 2.7949999999999995, 1e-12);    /* quantiles(n=20, 'inclusive')[18] */
    assert_near(v[0], 0.8, 0);                        /* input left in its order */
}

static void test_period_stats_summary_refuses(void **state)
{
    double bad[] = {1.0, NAN}, scratch[2];
    fxl_stats_summary s;

    (void)state;
    assert_int_equal(fxl_stats_summarize(&s, bad, 2, scratch), FXL_EINVAL);
    assert_int_equal(fxl_stats_summarize(&s, bad, 0, scratch), FXL_EINVAL);
    assert_int_equal(fxl_stats_summarize(&s, bad, 1, scratch), 0);
    assert_true(isnan(s.sd));
    assert_near(s.p05, 1.0, 0);
    assert_near(s.p95, 1.0, 0);
}

static void test_period_stats_quantile_edges(void **state)
{
    static const double v[] = {-2.0, 0.0, 1.0, 5.0};

    (void)state;
    assert_near(fxl_stats_quantile(v, 4, 0.0), -2.0, 0);
    assert_near(fxl_stats_quantile(v, 4, 1.0), 5.0, 0);
    assert_near(fxl_stats_quantile(v, 4, 0.5), 0.5, 1e-12);   /* statistics.median */
    assert_true(isnan(fxl_stats_quantile(v, 4, 1.5)));
    assert_true(isnan(fxl_stats_quantile(v, 0, 0.5)));
}

static void test_period_stats_suggestion(void **state)
{
    fxl_stats_summary s = {0};
    fxl_level_suggestion g;

    (void)state;
    s.n = 30;
    s.sd = 1.2;     /* 2 SD = 2.4 -> 2.5 %; 3 SD = 3.6 -> 4.0 % */
    fxl_stats_suggest_levels(&g, &s);
    assert_true(g.offered);
    assert_near(g.tolerance_pct, 2.5, 0);
    assert_near(g.action_pct, 4.0, 0);
    assert_non_null(g.basis);

    s.sd = 1.0;     /* exactly 2 and 3: not pushed up by rounding */
    fxl_stats_suggest_levels(&g, &s);
    assert_near(g.tolerance_pct, 2.0, 0);
    assert_near(g.action_pct, 3.0, 0);

    s.sd = 0.05;    /* tiny spread: tolerance at least 0.5 %, action above it */
    fxl_stats_suggest_levels(&g, &s);
    assert_near(g.tolerance_pct, 0.5, 0);
    assert_near(g.action_pct, 1.0, 0);

    s.n = FXL_STATS_SUGGEST_MIN_N - 1;
    fxl_stats_suggest_levels(&g, &s);
    assert_false(g.offered);
    assert_true(isnan(g.tolerance_pct));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_period_stats_imr_check_value),
        cmocka_unit_test(test_period_stats_imr_flags_a_jump),
        cmocka_unit_test(test_period_stats_imr_single_point),
        cmocka_unit_test(test_period_stats_summary_check_case),
        cmocka_unit_test(test_period_stats_summary_even_count),
        cmocka_unit_test(test_period_stats_summary_refuses),
        cmocka_unit_test(test_period_stats_quantile_edges),
        cmocka_unit_test(test_period_stats_suggestion),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
