/* Unit tests for the report building blocks: cutting and wrapping UTF-8 text
 * in the embedded font (never past the width, never inside a character),
 * month boundaries in a department time zone, and histogram binning. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>

#include <cmocka.h>

#include "report/chart.h"
#include "report/layout.h"
#include "report/localtime.h"

static int setup_doc(void **state)
{
    static rpt_doc d;

    if (rpt_doc_init(&d, NULL, NULL, 0) != 0)
        return -1;
    *state = &d;
    return 0;
}

static int teardown_doc(void **state)
{
    rpt_doc_release(*state);
    return 0;
}

static int valid_utf8(const char *s)
{
    const unsigned char *p = (const unsigned char *)s;

    while (*p) {
        int n = *p < 0x80 ? 1 : (*p & 0xE0) == 0xC0 ? 2 : (*p & 0xF0) == 0xE0 ? 3
                : (*p & 0xF8) == 0xF0 ? 4 : 0;
        int i;
        if (n == 0)
            return 0;
        for (i = 1; i < n; i++)
            if ((p[i] & 0xC0) != 0x80)
                return 0;
        p += n;
    }
    return 1;
}

static void test_report_fit_keeps_short_text(void **state)
{
    rpt_doc *d = *state;
    char out[64];

    rpt_fit(d, d->font, 8, "AP", 100, out, sizeof out);
    assert_string_equal(out, "AP");
}

static void test_report_fit_cuts_with_mark(void **state)
{
    rpt_doc *d = *state;
    char out[256];
    const char *mark = RPT_CUT_MARK;

    rpt_fit(d, d->font, 8, "Ångström-Núñez Łukasz Żółć Δημήτρης Ольга and more words", 60, out,
            sizeof out);
    assert_true(strlen(out) > strlen(mark));
    assert_string_equal(out + strlen(out) - strlen(mark), mark);
    assert_true(rpt_width(d, d->font, 8, out) <= 60.0);
    assert_true(valid_utf8(out));
}

static void test_report_wrap_breaks_at_spaces(void **state)
{
    rpt_doc *d = *state;
    rpt_lines l;
    double w = rpt_width(d, d->font, 10, "alpha beta") + 0.5;

    rpt_wrap(d, d->font, 10, "alpha beta gamma", w, 4, &l);
    assert_int_equal(l.n, 2);
    assert_string_equal(l.line[0], "alpha beta");
    assert_string_equal(l.line[1], "gamma");
}

static void test_report_wrap_cuts_past_max_lines(void **state)
{
    rpt_doc *d = *state;
    rpt_lines l;
    int i;

    rpt_wrap(d, d->font, 8,
             "detector placement checked twice, cable replaced, diode re-taped on the "
             "central axis and the reading repeated at the next fraction",
             70, 2, &l);
    assert_int_equal(l.n, 2);
    for (i = 0; i < l.n; i++)
        assert_true(rpt_width(d, d->font, 8, l.line[i]) <= 70.0);
    assert_non_null(strstr(l.line[1], RPT_CUT_MARK));
}

static void test_report_wrap_splits_long_word_between_characters(void **state)
{
    rpt_doc *d = *state;
    rpt_lines l;
    int i;

    rpt_wrap(d, d->font, 9, "ЖЖЖЖЖЖЖЖЖЖЖЖЖЖЖЖЖЖЖЖЖЖЖЖЖЖЖЖЖЖ", 40, RPT_LINES_MAX, &l);
    assert_true(l.n >= 3);
    for (i = 0; i < l.n; i++) {
        assert_true(valid_utf8(l.line[i]));
        assert_true(rpt_width(d, d->font, 9, l.line[i]) <= 40.0);
    }
}

static void test_report_wrap_keeps_dates_whole(void **state)
{
    rpt_doc *d = *state;
    rpt_lines l;
    double w = rpt_width(d, d->font, 9, "from 2026-09-") + 1;

    rpt_wrap(d, d->font, 9, "from 2026-09-30", w, 3, &l);
    assert_int_equal(l.n, 2);
    assert_string_equal(l.line[0], "from");
    assert_string_equal(l.line[1], "2026-09-30");
}

static void test_report_month_bounds_follow_summer_time(void **state)
{
    rpt_tz tz;
    char from[FXL_TIME_LEN], to[FXL_TIME_LEN];

    (void)state;
    assert_int_equal(rpt_tz_enter(&tz, NULL, "Europe/Paris"), 0);
    /* EU rule: summer time (UTC+2) ends on the last Sunday of October
     * (2026-10-25), so October starts at 22:00 UTC and ends at 23:00 UTC. */
    assert_int_equal(rpt_month_bounds(NULL, from, to, 2026, 10), 0);
    assert_string_equal(from, "2026-09-30T22:00:00Z");
    assert_string_equal(to, "2026-10-31T23:00:00Z");
    rpt_tz_leave(&tz);

    assert_int_equal(rpt_tz_enter(&tz, NULL, "UTC"), 0);
    assert_int_equal(rpt_month_bounds(NULL, from, to, 2026, 12), 0);
    assert_string_equal(from, "2026-12-01T00:00:00Z");
    assert_string_equal(to, "2027-01-01T00:00:00Z");
    rpt_tz_leave(&tz);
}

static void test_report_unknown_zone_is_refused(void **state)
{
    rpt_tz tz;

    (void)state;
    assert_int_equal(rpt_tz_enter(&tz, NULL, "Mars/Olympus_Mons"), FXL_EINVAL);
    assert_int_equal(rpt_tz_enter(&tz, NULL, "../../etc/passwd"), FXL_EINVAL);
}

static void test_report_local_display(void **state)
{
    rpt_tz tz;
    char out[32];

    (void)state;
    assert_int_equal(rpt_tz_enter(&tz, NULL, "Europe/Paris"), 0);
    /* 22:30 UTC on 30 September is 00:30 on 1 October in Paris (UTC+2). */
    rpt_local(out, sizeof out, "2026-09-30T22:30:00Z", "%Y-%m-%d %H:%M");
    assert_string_equal(out, "2026-10-01 00:30");
    rpt_local(out, sizeof out, "not a time", "%Y");
    assert_string_equal(out, "");
    rpt_tz_leave(&tz);
}

static void test_report_histogram_bins_edges(void **state)
{
    rpt_hist h;

    (void)state;
    rpt_hist_init(&h, 10);      /* 20 bins of 1 % over [-10, +10] */
    assert_int_equal(h.nbins, 20);
    /* bins are closed towards zero: [-1, 0) and [0, 1) below zero, (0, 1]
     * above, so a deviation exactly at a level lands inside it */
    rpt_hist_add(&h, 0.0);      /* [0, 1] is bin 10 */
    rpt_hist_add(&h, 0.999);
    rpt_hist_add(&h, 1.0);      /* the edge at +1 belongs to (0, 1] */
    rpt_hist_add(&h, -0.001);   /* [-1, 0) is bin 9 */
    rpt_hist_add(&h, -1.0);     /* the edge at -1 belongs to [-1, 0) */
    rpt_hist_add(&h, 10.0);     /* both outer edges are inside */
    rpt_hist_add(&h, -10.0);
    rpt_hist_add(&h, 10.5);     /* off scale */
    rpt_hist_add(&h, -12.0);
    rpt_hist_add(&h, NAN);      /* ignored */
    assert_int_equal(h.count[10], 3);
    assert_int_equal(h.count[9], 2);
    assert_int_equal(h.count[19], 1);
    assert_int_equal(h.count[0], 1);
    assert_int_equal(h.over, 1);
    assert_int_equal(h.under, 1);
    assert_int_equal(h.n, 9);
}

static void test_report_histogram_aligned_with_levels(void **state)
{
    rpt_hist h;

    (void)state;
    /* tolerance 5 %, action 8 %: 1 % bins, edges at +-5 and +-8 */
    assert_int_equal(rpt_hist_init_aligned(&h, 20, 5, 8), 0);
    assert_true(h.aligned);
    assert_true(fabs(h.bin - 1.0) < 1e-12);
    assert_true(fabs(fmod(5 - h.lo, h.bin)) < 1e-9 && fabs(fmod(8 - h.lo, h.bin)) < 1e-9);
    assert_true(h.nbins <= RPT_HIST_BINS);
    /* tolerance 2.5 %, action 4 %: 0.5 % bins */
    assert_int_equal(rpt_hist_init_aligned(&h, 10, 2.5, 4), 0);
    assert_true(fabs(h.bin - 0.5) < 1e-12);
    assert_true(h.lo + h.nbins * h.bin > 4);
    /* tolerance 6 %, action 9 %: 1 % bins (3 % would leave too few inside) */
    assert_int_equal(rpt_hist_init_aligned(&h, 20, 6, 9), 0);
    assert_true(fabs(h.bin - 1.0) < 1e-12);
    /* a deviation exactly at the tolerance level counts inside it */
    rpt_hist_add(&h, 6.0);
    {
        int k = (int)floor((6.0 - h.lo) / h.bin) - 1;   /* the bin (5, 6] */
        assert_int_equal(h.count[k], 1);
    }
    /* no levels: refused, the caller falls back to plain bins */
    assert_int_equal(rpt_hist_init_aligned(&h, 10, NAN, NAN), -1);
}

static void test_report_wrap_keeps_identifier_whole(void **state)
{
    rpt_doc *d = *state;
    rpt_lines l;
    double w = rpt_width(d, d->font, 9, "plan 'BR-") + 1;

    /* a space is there to break at: the identifier is not cut at a hyphen */
    rpt_wrap(d, d->font, 9, "plan 'BR-R-1' fraction", w, 4, &l);
    assert_string_equal(l.line[0], "plan");
    assert_string_equal(l.line[1], "'BR-R-1'");
}

static void test_report_nice_step(void **state)
{
    (void)state;
    assert_true(fabs(rpt_nice_step(100, 12) - 10) < 1e-9);
    assert_true(fabs(rpt_nice_step(25, 12) - 5) < 1e-9);
    assert_true(fabs(rpt_nice_step(16, 8) - 2) < 1e-9);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_report_fit_keeps_short_text),
        cmocka_unit_test(test_report_fit_cuts_with_mark),
        cmocka_unit_test(test_report_wrap_breaks_at_spaces),
        cmocka_unit_test(test_report_wrap_cuts_past_max_lines),
        cmocka_unit_test(test_report_wrap_splits_long_word_between_characters),
        cmocka_unit_test(test_report_wrap_keeps_dates_whole),
        cmocka_unit_test(test_report_wrap_keeps_identifier_whole),
        cmocka_unit_test(test_report_histogram_aligned_with_levels),
    };
    const struct CMUnitTest plain[] = {
        cmocka_unit_test(test_report_month_bounds_follow_summer_time),
        cmocka_unit_test(test_report_unknown_zone_is_refused),
        cmocka_unit_test(test_report_local_display),
        cmocka_unit_test(test_report_histogram_bins_edges),
        cmocka_unit_test(test_report_nice_step),
    };
    int failed = cmocka_run_group_tests_name("report text", tests, setup_doc, teardown_doc);

    return failed + cmocka_run_group_tests_name("report time and charts", plain, NULL, NULL);
}
