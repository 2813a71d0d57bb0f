/* The web console's one escaping formatter, on hostile strings. Expected
 * forms: the OWASP Cross Site Scripting Prevention Cheat Sheet (rule 1:
 * & < > " ' as entities in element content and quoted attributes), RFC 3986
 * section 2.3 (unreserved characters) for URL components, RFC 3629 for what
 * valid UTF-8 is, and Unicode UAX #9 for the bidirectional controls
 * ("Trojan Source", CVE-2021-42574). Strings here are invented. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include <cmocka.h>

#include "web/web.h"

static char *fmt(const char *f, ...)
{
    static web_buf b = WEB_BUF_INIT;
    va_list ap;

    web_buf_release(&b);
    va_start(ap, f);
    web_vprintf(&b, f, ap);
    va_end(ap);
    return b.data ? b.data : (char *)"";
}

static void test_web_escape_script_in_text(void **state)
{
    (void)state;
    assert_string_equal(fmt("<td>%h</td>", "<script>alert(1)</script>"),
                        "<td>&lt;script&gt;alert(1)&lt;/script&gt;</td>");
    assert_string_equal(fmt("%h", "O'Brien & \"Sons\""), "O&#39;Brien &amp; &quot;Sons&quot;");
    /* An entity typed by a person is shown as typed, not interpreted. */
    assert_string_equal(fmt("%h", "&lt;"), "&amp;lt;");
}

static void test_web_escape_attribute_breakout(void **state)
{
    (void)state;
    assert_string_equal(fmt("<input value=\"%a\">", "\" autofocus onfocus=\"alert(1)"),
                        "<input value=\"&quot; autofocus onfocus=&quot;alert(1)\">");
    assert_string_equal(fmt("<a title=\"%a\">", "x' onmouseover='y"),
                        "<a title=\"x&#39; onmouseover=&#39;y\">");
    /* newlines and tabs in an attribute become spaces; backticks entities */
    assert_string_equal(fmt("%a", "a\nb\tc`"), "a b c&#96;");
}

static void test_web_escape_url_component(void **state)
{
    (void)state;
    assert_string_equal(fmt("/patient?mrn=%u", "A 1&b=2#x"), "/patient?mrn=A%201%26b%3D2%23x");
    assert_string_equal(fmt("%u", "javascript:alert(1)"), "javascript%3Aalert%281%29");
    assert_string_equal(fmt("%u", "AZaz09-._~"), "AZaz09-._~");
    /* UTF-8 bytes are encoded one by one: U+00E9 is C3 A9 */
    assert_string_equal(fmt("%u", "\xC3\xA9"), "%C3%A9");
}

static void test_web_escape_bidi_and_invisible(void **state)
{
    (void)state;
    /* U+202E RIGHT-TO-LEFT OVERRIDE (E2 80 AE) and U+2066 LEFT-TO-RIGHT
     * ISOLATE (E2 81 A6) are shown as codes, not obeyed. */
    assert_string_equal(fmt("%h", "Doe\xE2\x80\xAE" "cba"), "Doe[U+202E]cba");
    assert_string_equal(fmt("%a", "\xE2\x81\xA6x"), "[U+2066]x");
    /* zero-width space U+200B (E2 80 8B) */
    assert_string_equal(fmt("%h", "a\xE2\x80\x8B" "b"), "a[U+200B]b");
    /* ordinary accented letters pass unchanged: U+00E9, U+0144 */
    assert_string_equal(fmt("%h", "Ren\xC3\xA9 Mazi\xC5\x84ski"), "Ren\xC3\xA9 Mazi\xC5\x84ski");
}

static void test_web_escape_invalid_utf8_and_controls(void **state)
{
    (void)state;
    /* a lone continuation byte, an overlong '<' (C0 BC) and a surrogate
     * (ED A0 80) are each replaced, never passed to the browser */
    assert_string_equal(fmt("%h", "a\x80z"), "a\xEF\xBF\xBDz");
    assert_string_equal(fmt("%h", "\xC0\xBCscript"), "\xEF\xBF\xBD\xEF\xBF\xBDscript");
    assert_string_equal(fmt("%h", "\xED\xA0\x80"), "\xEF\xBF\xBD\xEF\xBF\xBD\xEF\xBF\xBD");
    /* C0 controls (escape, bell) and the C1 control U+0085 (C2 85) dropped */
    assert_string_equal(fmt("%h", "a\x1b[31mb\x07" "c\xC2\x85" "d"), "a[31mbcd");
    /* a truncated sequence at the end */
    assert_string_equal(fmt("%h", "x\xE2\x80"), "x\xEF\xBF\xBD\xEF\xBF\xBD");
}

static void test_web_escape_numbers_and_null(void **state)
{
    (void)state;
    assert_string_equal(fmt("%d|%ld|%L", -3, 40L, (int64_t)9007199254740993LL),
                        "-3|40|9007199254740993");
    assert_string_equal(fmt("%.1f %.3f %f", 2.25, -0.0005, 1.0), "2.2 -0.001 1.00");
    assert_string_equal(fmt("[%.1f]", NAN), "[\xE2\x80\x94]");
    assert_string_equal(fmt("[%h][%a][%u]", NULL, NULL, NULL), "[][][]");
    assert_string_equal(fmt("100%% <b>%s</b>", "trusted"), "100% <b>trusted</b>");
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_web_escape_script_in_text),
        cmocka_unit_test(test_web_escape_attribute_breakout),
        cmocka_unit_test(test_web_escape_url_component),
        cmocka_unit_test(test_web_escape_bidi_and_invisible),
        cmocka_unit_test(test_web_escape_invalid_utf8_and_controls),
        cmocka_unit_test(test_web_escape_numbers_and_null),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
