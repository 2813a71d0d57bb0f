/* Unit tests for src/core/timefmt.c: the stored timestamp form
 * 'YYYY-MM-DDTHH:MM:SSZ' (UTC), validation of dates people type, the end of
 * a "valid until" day, and adding days across months, years and leap days. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include <cmocka.h>

#include "fxl/fxl.h"

static void assert_normalizes_at(const char *in, int end_of_day, const char *want, const char *file,
                                 int line)
{
    char out[FXL_TIME_LEN];
    int rc;

    memset(out, 'x', sizeof out);
    rc = fxl_time_normalize(out, in, end_of_day);
    if (rc != 0 || strcmp(out, want) != 0) {
        print_error("'%s' (end_of_day %d): rc %d, got '%.*s', expected '%s'\n", in, end_of_day, rc,
                    FXL_TIME_LEN - 1, out, want);
        _fail(file, line);
    }
}
#define assert_normalizes(in, eod, want) assert_normalizes_at((in), (eod), (want), __FILE__, __LINE__)

static void assert_refused_at(const char *in, const char *file, int line)
{
    char out[FXL_TIME_LEN] = "";
    int rc = fxl_time_normalize(out, in, 0);

    if (rc != FXL_EINVAL) {
        print_error("'%s' was accepted (rc %d, '%s'); expected FXL_EINVAL\n", in ? in : "(null)", rc,
                    out);
        _fail(file, line);
    }
}
#define assert_refused(in) assert_refused_at((in), __FILE__, __LINE__)

static void assert_adds_at(const char *in, int days, const char *want, const char *file, int line)
{
    char out[FXL_TIME_LEN] = "";
    int rc = fxl_time_add_days(out, in, days);

    if (rc != 0 || strcmp(out, want) != 0) {
        print_error("'%s' %+d days: rc %d, got '%s', expected '%s'\n", in, days, rc, out, want);
        _fail(file, line);
    }
}
#define assert_adds(in, days, want) assert_adds_at((in), (days), (want), __FILE__, __LINE__)

static void test_timefmt_date_only(void **state)
{
    (void)state;
    assert_normalizes("2026-03-15", 0, "2026-03-15T00:00:00Z");
    assert_normalizes("2026-12-31", 0, "2026-12-31T00:00:00Z");
    assert_normalizes("2026-01-01", 0, "2026-01-01T00:00:00Z");
}

static void test_timefmt_end_of_day(void **state)
{
    (void)state;
    /* a "valid until" date covers the whole of that day */
    assert_normalizes("2026-10-01", 1, "2026-10-01T23:59:59Z");
    /* a time given in full is kept as given */
    assert_normalizes("2026-10-01T12:00:00Z", 1, "2026-10-01T12:00:00Z");
}

static void test_timefmt_full_timestamps(void **state)
{
    (void)state;
    assert_normalizes("2026-03-15T08:30", 0, "2026-03-15T08:30:00Z");
    assert_normalizes("2026-03-15T08:30Z", 0, "2026-03-15T08:30:00Z");
    assert_normalizes("2026-03-15T08:30:45", 0, "2026-03-15T08:30:45Z");
    assert_normalizes("2026-03-15T08:30:45Z", 0, "2026-03-15T08:30:45Z");
    assert_normalizes("2026-03-15T00:00:00Z", 0, "2026-03-15T00:00:00Z");
    assert_normalizes("2026-03-15T23:59:59Z", 0, "2026-03-15T23:59:59Z");
}

static void test_timefmt_impossible_dates(void **state)
{
    (void)state;
    /* Gregorian calendar: February has 28 days, 29 in a leap year */
    assert_refused("2026-02-30");
    assert_refused("2026-02-29");   /* 2026 is not a leap year (Gregorian calendar) */
    assert_refused("2026-04-31");   /* April has 30 days (Gregorian calendar) */
    assert_refused("2026-13-01");
    assert_refused("2026-00-10");
    assert_refused("2026-01-00");
    assert_refused("2026-01-32");
}

static void test_timefmt_leap_days(void **state)
{
    (void)state;
    /* Gregorian calendar: years divisible by 4 are leap years ... */
    assert_normalizes("2028-02-29", 0, "2028-02-29T00:00:00Z");
    /* ... except centuries, unless divisible by 400 */
    assert_normalizes("2000-02-29", 0, "2000-02-29T00:00:00Z");
    assert_refused("2100-02-29");
}

static void test_timefmt_impossible_times(void **state)
{
    (void)state;
    assert_refused("2026-03-15T24:00");
    assert_refused("2026-03-15T12:60");
    assert_refused("2026-03-15T12:00:60");
    assert_refused("2026-03-15T-1:00");
}

static void test_timefmt_malformed_text(void **state)
{
    (void)state;
    assert_refused(NULL);
    assert_refused("");
    assert_refused("today");
    assert_refused("15/03/2026");
    assert_refused("2026/03/15");
    assert_refused("2026-3-15");
    assert_refused("26-03-15");
    assert_refused("2026-03-15 08:30");
    assert_refused("2026-03-15T08:30:45+01:00");
    assert_refused("2026-03-15T08:30:45ZZ");
    assert_refused("2026-03-15T08");
    assert_refused("2026-03-15x");
    assert_refused(" 2026-03-15");
    /* spaces and signs inside a field are not digits */
    assert_refused("2026-01- 5");
    assert_refused("2026-+1-05");
    assert_refused("2026-01-05T 8:30");
}

static void test_timefmt_add_days_within_month(void **state)
{
    (void)state;
    assert_adds("2026-03-15T08:30:00Z", 1, "2026-03-16T08:30:00Z");
    assert_adds("2026-03-15T08:30:00Z", 0, "2026-03-15T08:30:00Z");
    assert_adds("2026-03-15T08:30:00Z", -14, "2026-03-01T08:30:00Z");
}

static void test_timefmt_add_days_across_month(void **state)
{
    (void)state;
    /* Gregorian calendar: January 31 days, February 28 in 2026, April 30 */
    assert_adds("2026-01-31T10:00:00Z", 1, "2026-02-01T10:00:00Z");
    assert_adds("2026-02-28T10:00:00Z", 1, "2026-03-01T10:00:00Z");
    assert_adds("2026-04-30T10:00:00Z", 1, "2026-05-01T10:00:00Z");
    assert_adds("2026-03-01T10:00:00Z", -1, "2026-02-28T10:00:00Z");
    /* arithmetic: 2026-01-15 + 30 days = 2026-02-14 (16 days to Jan 31, 14 into Feb) */
    assert_adds("2026-01-15T00:00:00Z", 30, "2026-02-14T00:00:00Z");
}

static void test_timefmt_add_days_across_year(void **state)
{
    (void)state;
    assert_adds("2026-12-31T23:59:59Z", 1, "2027-01-01T23:59:59Z");
    assert_adds("2026-01-01T00:00:00Z", -1, "2025-12-31T00:00:00Z");
    /* Gregorian calendar: 2026 has 365 days */
    assert_adds("2026-01-01T00:00:00Z", 365, "2027-01-01T00:00:00Z");
    /* Gregorian calendar: 2028 has 366 days, so 365 days on is December 31 */
    assert_adds("2028-01-01T00:00:00Z", 365, "2028-12-31T00:00:00Z");
}

static void test_timefmt_add_days_leap_day(void **state)
{
    (void)state;
    /* Gregorian calendar: 2028 is a leap year */
    assert_adds("2028-02-28T12:00:00Z", 1, "2028-02-29T12:00:00Z");
    assert_adds("2028-02-29T12:00:00Z", 1, "2028-03-01T12:00:00Z");
    assert_adds("2028-03-01T12:00:00Z", -1, "2028-02-29T12:00:00Z");
}

static void test_timefmt_add_days_accepts_typed_date(void **state)
{
    char out[FXL_TIME_LEN] = "";

    (void)state;
    assert_adds("2026-10-01", 30, "2026-10-31T00:00:00Z");
    assert_int_equal(fxl_time_add_days(out, "2026-02-30", 1), FXL_EINVAL);
    assert_int_equal(fxl_time_add_days(out, "not a date", 1), FXL_EINVAL);
    assert_int_equal(fxl_time_add_days(out, NULL, 1), FXL_EINVAL);
    /* a result outside the years a timestamp may have (1900 to 2999) is
     * refused, not written in a form fxl_time_normalize would not read */
    assert_adds("2999-12-30T10:00:00Z", 1, "2999-12-31T10:00:00Z");
    assert_int_equal(fxl_time_add_days(out, "2999-12-31T10:00:00Z", 1), FXL_EINVAL);
    assert_int_equal(fxl_time_add_days(out, "1900-01-01", -1), FXL_EINVAL);
}

static void test_timefmt_sorts_as_text(void **state)
{
    char a[FXL_TIME_LEN], b[FXL_TIME_LEN], c[FXL_TIME_LEN];

    (void)state;
    /* the stored form compares as a string in time order (ISO 8601) */
    assert_int_equal(fxl_time_normalize(a, "2026-09-30", 1), 0);
    assert_int_equal(fxl_time_normalize(b, "2026-10-01T00:00", 0), 0);
    assert_int_equal(fxl_time_normalize(c, "2026-10-01", 1), 0);
    assert_true(strcmp(a, b) < 0);
    assert_true(strcmp(b, c) < 0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_timefmt_date_only),
        cmocka_unit_test(test_timefmt_end_of_day),
        cmocka_unit_test(test_timefmt_full_timestamps),
        cmocka_unit_test(test_timefmt_impossible_dates),
        cmocka_unit_test(test_timefmt_leap_days),
        cmocka_unit_test(test_timefmt_impossible_times),
        cmocka_unit_test(test_timefmt_malformed_text),
        cmocka_unit_test(test_timefmt_add_days_within_month),
        cmocka_unit_test(test_timefmt_add_days_across_month),
        cmocka_unit_test(test_timefmt_add_days_across_year),
        cmocka_unit_test(test_timefmt_add_days_leap_day),
        cmocka_unit_test(test_timefmt_add_days_accepts_typed_date),
        cmocka_unit_test(test_timefmt_sorts_as_text),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
