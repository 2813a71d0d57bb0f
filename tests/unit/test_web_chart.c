/* The trend chart (src/web/chart.c): markers shaped by verdict, the bands
 * drawn from the levels (or the chart saying there are none), a not
 * evaluable result on the axis, labels escaped, and the geometry: a point
 * at +action percent sits on the action line. Expected values from the
 * chart's own coordinate rule (physics-free: linear mapping of the y range
 * onto the plot area). Data invented. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>

#include <cmocka.h>

#include "web/web.h"

static int count(const char *hay, const char *needle)
{
    int n = 0;
    const char *p = hay;
    while ((p = strstr(p, needle)) != NULL) {
        n++;
        p += strlen(needle);
    }
    return n;
}

static void test_web_chart_shapes_and_bands(void **state)
{
    web_buf b = WEB_BUF_INIT;
    web_chart_point pts[4] = {
        {1, 0.5, "f1 <b>", "within_tolerance", 0, 0},
        {2, 6.0, "f2", "outside_tolerance", 0, 0},
        {3, 8.0, "f3", "outside_action", 1, 0},
        {4, NAN, "f4", "not_evaluable", 0, 0},
    };
    (void)state;
    web_chart(&b, "Trend \"x\"", pts, 4, 5.0, 8.0);
    assert_non_null(b.data);
    /* one marker of each shape, a ring on the highlighted one */
    assert_int_equal(count(b.data, "<g class=\"pt\">"), 3);
    assert_int_equal(count(b.data, "<g class=\"pt this\">"), 1);
    assert_int_equal(count(b.data, "<rect x=") - 1 /* tolerance band */, 1);
    assert_int_equal(count(b.data, "l6.5 11h-13z"), 1);         /* triangle */
    assert_int_equal(count(b.data, "r=\"5\""), 1);               /* circle */
    assert_int_equal(count(b.data, "r=\"11\""), 1);              /* ring */
    assert_int_equal(count(b.data, "l8 8m0 -8l-8 8"), 1);        /* cross for not evaluable */
    assert_non_null(strstr(b.data, "tolerance \xC2\xB1" "5.0 %"));
    assert_non_null(strstr(b.data, "action \xC2\xB1" "8.0 %"));
    assert_null(strstr(b.data, "no levels known"));
    /* labels and the title are text, escaped */
    assert_non_null(strstr(b.data, "<title>f1 &lt;b&gt;</title>"));
    assert_non_null(strstr(b.data, "aria-label=\"Trend &quot;x&quot;\""));
    assert_null(strstr(b.data, "<b>"));
    web_buf_release(&b);
}

static void test_web_chart_point_on_the_action_line(void **state)
{
    web_buf b = WEB_BUF_INIT;
    web_chart_point p = {1, 8.0, "f1", "outside_action", 0, 0};
    double ylim = ceil(10.0 * 1.1), mt = 16, mb = 40, h = 300;
    double y_line = mt + (ylim - 8.0) / (2 * ylim) * (h - mt - mb);
    char want_line[64], want_rect[64];
    (void)state;
    /* ylim: the larger of the data (8) and 1.25 x action (10), with 10 %
     * headroom, rounded up: 11 */
    web_chart(&b, "t", &p, 1, 5.0, 8.0);
    snprintf(want_line, sizeof want_line, "y1=\"%.1f\" y2=\"%.1f\" stroke=\"#9b1c14\"", y_line, y_line);
    snprintf(want_rect, sizeof want_rect, "y=\"%.1f\" width=\"11\"", y_line - 5.5);
    assert_non_null(strstr(b.data, want_line));
    assert_non_null(strstr(b.data, want_rect));
    web_buf_release(&b);
}

static void test_web_chart_without_levels(void **state)
{
    web_buf b = WEB_BUF_INIT;
    web_chart_point p = {1, 1.0, "f1", "not_evaluable", 0, 0};
    (void)state;
    web_chart(&b, "t", &p, 1, NAN, NAN);
    assert_non_null(strstr(b.data, "no levels known: no bands drawn"));
    assert_null(strstr(b.data, "stroke-dasharray=\"8 5\""));
    assert_null(strstr(b.data, "fill=\"#e4efe7\""));
    web_buf_release(&b);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_web_chart_shapes_and_bands),
        cmocka_unit_test(test_web_chart_point_on_the_action_line),
        cmocka_unit_test(test_web_chart_without_levels),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
