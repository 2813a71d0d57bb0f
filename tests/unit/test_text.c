/* Unit tests of src/core/text.c: UTF-8 validity after RFC 3629, control
 * characters, escaped NULs in JSON text and the printable copy used in
 * error messages. Byte sequences are from RFC 3629 sections 3 and 10 and
 * from the Unicode code charts (U+00E9, U+674E, U+1F600: "Unicode"). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include <cmocka.h>

#include "fxl/text.h"

static long bad(const char *s)
{
    return fxl_utf8_invalid_at(s, strlen(s));
}

static void test_text_utf8_valid_text(void **state)
{
    (void)state;
    assert_int_equal(bad(""), -1);
    assert_int_equal(bad("O'Brien; DROP TABLE x;--"), -1);
    assert_int_equal(bad("Zo\xc3\xab"), -1);                 /* U+00EB, Unicode */
    assert_int_equal(bad("\xe6\x9d\x8e"), -1);               /* U+674E, Unicode */
    assert_int_equal(bad("\xf0\x9f\x98\x80"), -1);           /* U+1F600, Unicode */
    assert_int_equal(bad("\xf4\x8f\xbf\xbf"), -1);           /* U+10FFFF, the last (RFC 3629) */
    assert_int_equal(fxl_utf8_invalid_at("a\0b", 3), -1);    /* U+0000 is valid UTF-8 */
}

static void test_text_utf8_invalid_bytes(void **state)
{
    (void)state;
    assert_int_equal(bad("ab\xff"), 2);                      /* 0xFF never appears (RFC 3629) */
    assert_int_equal(bad("\x80"), 0);                        /* lone continuation byte */
    assert_int_equal(bad("x\xc0\xaf"), 1);                   /* overlong '/' (RFC 3629 sec. 10) */
    assert_int_equal(bad("\xe0\x80\xaf"), 0);                /* overlong, three bytes */
    assert_int_equal(bad("\xed\xa0\x80"), 0);                /* surrogate U+D800 (RFC 3629 sec. 3) */
    assert_int_equal(bad("\xf4\x90\x80\x80"), 0);            /* U+110000, above the range */
    assert_int_equal(bad("ok\xe6\x9d"), 2);                  /* cut inside a character */
    assert_int_equal(bad("\xc3("), 0);                       /* second byte not a continuation */
}

static void test_text_control_characters(void **state)
{
    (void)state;
    assert_int_equal(fxl_text_control_at("plain text, Zo\xc3\xab"), -1);
    assert_int_equal(fxl_text_control_at("a\x1b[2J"), 1);    /* ESC, a terminal sequence */
    assert_int_equal(fxl_text_control_at("two\nlines"), 3);
    assert_int_equal(fxl_text_control_at("tab\there"), 3);
    assert_int_equal(fxl_text_control_at("del\x7f"), 3);
    assert_int_equal(fxl_text_control_at("c1\xc2\x9b"), 2);  /* U+009B, the C1 CSI */
    assert_int_equal(fxl_text_control_at("nbsp\xc2\xa0"), -1); /* U+00A0 is printable */
}

static void test_text_json_nul_escape(void **state)
{
    const char *a = "{\"name\": \"RE\\u0000F\"}";
    const char *b = "{\"name\": \"RE\\\\u0000F\"}";   /* an escaped backslash: plain text */
    const char *c = "{\"name\": \"RE\\\\\\u0000F\"}"; /* backslash, then a real \u0000 */

    (void)state;
    assert_int_equal(fxl_json_nul_escape_at(a, strlen(a)), 12);
    assert_int_equal(fxl_json_nul_escape_at(b, strlen(b)), -1);
    assert_int_equal(fxl_json_nul_escape_at(c, strlen(c)), 14);
    assert_int_equal(fxl_json_nul_escape_at("\\u0001", 6), -1);
}

static void test_text_printable_copy(void **state)
{
    char out[16];

    (void)state;
    fxl_text_printable(out, sizeof out, "Zo\xc3\xab O'Brien");
    assert_string_equal(out, "Zo\xc3\xab O'Brien");
    fxl_text_printable(out, sizeof out, "a\x1b[2Jb\xff\n");
    assert_string_equal(out, "a?[2Jb??");
    fxl_text_printable(out, sizeof out, "c1\xc2\x9bx");
    assert_string_equal(out, "c1?x");
    fxl_text_printable(out, sizeof out, NULL);
    assert_string_equal(out, "");
    /* 20 characters into 15 bytes: 12 kept and "..." */
    fxl_text_printable(out, sizeof out, "abcdefghijklmnopqrst");
    assert_string_equal(out, "abcdefghijkl...");
    /* never cut inside a character: 8 x U+674E (3 bytes each) */
    fxl_text_printable(out, sizeof out,
                       "\xe6\x9d\x8e\xe6\x9d\x8e\xe6\x9d\x8e\xe6\x9d\x8e\xe6\x9d\x8e\xe6\x9d\x8e");
    assert_string_equal(out, "\xe6\x9d\x8e\xe6\x9d\x8e\xe6\x9d\x8e\xe6\x9d\x8e...");
    assert_int_equal(fxl_utf8_invalid_at(out, strlen(out)), -1);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_text_utf8_valid_text),
        cmocka_unit_test(test_text_utf8_invalid_bytes),
        cmocka_unit_test(test_text_control_characters),
        cmocka_unit_test(test_text_json_nul_escape),
        cmocka_unit_test(test_text_printable_copy),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
