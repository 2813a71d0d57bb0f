/* Unit tests for the compared form of person names (src/core/names.c).
 * Check values: the Unicode Character Database, CaseFolding.txt (status C
 * and F mappings, the full case folding) and UnicodeData.txt (canonical
 * decompositions that NFC recomposes, UAX #15); the UTF-8 bytes by RFC 3629. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include <cmocka.h>

#include "fxl/fxl.h"
#include "fxl/names.h"

static void assert_key(const char *name, const char *want)
{
    char key[FXL_NAME_KEY_MAX];

    assert_int_equal(fxl_name_key(key, sizeof key, name), 0);
    assert_string_equal(key, want);
}

static void test_names_case_folding(void **state)
{
    (void)state;
    /* CaseFolding.txt: 00DC; C; 00FC (U with diaeresis) */
    assert_key("M\xc3\x9c" "LLER", "m\xc3\xbc" "ller");
    /* 00DF; F; 0073 0073 (sharp s folds to "ss") */
    assert_key("Stra\xc3\x9f" "e", "strasse");
    assert_true(fxl_name_same("Stra\xc3\x9f" "e", "STRASSE"));
    /* 03A3; C; 03C3 and 03C2; C; 03C3 (capital and final sigma) */
    assert_true(fxl_name_same("\xce\xa3\xce\x9f\xce\xa6\xce\x99\xce\x91", "\xcf\x83\xce\xbf\xcf\x86\xce\xb9\xce\xb1"));
    /* 0130; F; 0069 0307 (capital I with dot above keeps its dot) */
    assert_key("\xc4\xb0stanbul", "i\xcc\x87stanbul");
    assert_false(fxl_name_same("\xc4\xb0stanbul", "istanbul"));
}

static void test_names_normalisation(void **state)
{
    (void)state;
    /* UnicodeData.txt: 00E9 = 0065 0301; NFC composes e + combining acute */
    assert_key("Rene\xcc\x81" "e", "ren\xc3\xa9" "e");
    assert_true(fxl_name_same("Rene\xcc\x81" "e", "REN\xc3\x89" "E"));
    /* 00C5 = 0041 030A, and U+212B ANGSTROM SIGN = 00C5 (a singleton) */
    assert_true(fxl_name_same("\xe2\x84\xab" "ngstr\xc3\xb6m", "\xc3\xa5ngstr\xc3\xb6m"));
}

static void test_names_spaces(void **state)
{
    (void)state;
    assert_key("  Zo\xc3\xab   Ren\xc3\xa9" "e ", "zo\xc3\xab ren\xc3\xa9" "e");
    /* U+00A0 NO-BREAK SPACE and tab count as one space */
    assert_true(fxl_name_same("Van\xc2\xa0\tDer Berg", "van der berg"));
    assert_key("", "");
    assert_key(NULL, "");
}

/* Nothing beyond that is forgiven. */
static void test_names_differences_stay(void **state)
{
    char key[8];

    (void)state;
    assert_false(fxl_name_same("M\xc3\xbc" "ller", "Mueller"));
    assert_false(fxl_name_same("M\xc3\xbc" "ller", "Muller"));
    assert_false(fxl_name_same("VanDer Berg", "van der berg"));
    assert_false(fxl_name_same("Ada", "Ida"));
    /* invalid UTF-8 (RFC 3629: 0xC3 must be followed by a continuation byte) */
    assert_int_equal(fxl_name_key(key, sizeof key, "M\xc3(ller"), FXL_EINVAL);
    assert_string_equal(key, "");
    assert_false(fxl_name_same("M\xc3(ller", "M\xc3(ller"));
    /* a form that does not fit is refused, not cut */
    assert_int_equal(fxl_name_key(key, sizeof key, "Testperson"), FXL_EINVAL);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_names_case_folding),
        cmocka_unit_test(test_names_normalisation),
        cmocka_unit_test(test_names_spaces),
        cmocka_unit_test(test_names_differences_stay),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
