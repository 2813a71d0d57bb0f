/* Unit tests for src/core/scope.c: matching of a threshold set's scope to a
 * measurement, specificity, compatibility, the tie rule and the choice among
 * candidates. The rules are fxledger's own (docs/levels.md); scopes here are
 * invented. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include <cmocka.h>

#include "fxl/scope.h"

/* A scope with every column open. */
static fxl_scope open_scope(void)
{
    fxl_scope s = {NULL, NULL, NULL, NAN, NULL, NULL};
    return s;
}

/* A fully known measurement: 6 MV photon entrance on a breast tangent with a
 * photon diode. */
static fxl_scope breast_measurement(void)
{
    fxl_scope m = {"Breast", "3D tangents", "photon", 6.0, "entrance", "photon_diode"};
    return m;
}

static void test_scope_specificity_counts_restricted_columns(void **state)
{
    fxl_scope s = open_scope();
    fxl_scope full = breast_measurement();

    (void)state;
    assert_int_equal(fxl_scope_specificity(&s), 0);
    s.site = "Breast";
    assert_int_equal(fxl_scope_specificity(&s), 1);
    s.energy = 6;
    assert_int_equal(fxl_scope_specificity(&s), 2);
    s.technique = "";   /* empty text is open, not a restriction */
    assert_int_equal(fxl_scope_specificity(&s), 2);
    assert_int_equal(fxl_scope_specificity(&full), 6);
}

static void test_scope_open_set_matches_everything(void **state)
{
    fxl_scope set = open_scope(), m = breast_measurement(), unknown = open_scope();

    (void)state;
    assert_true(fxl_scope_matches(&set, &m));
    assert_true(fxl_scope_matches(&set, &unknown));
}

static void test_scope_restricted_column_must_equal(void **state)
{
    fxl_scope set = open_scope(), m = breast_measurement();

    (void)state;
    set.site = "Breast";
    set.point = "entrance";
    assert_true(fxl_scope_matches(&set, &m));
    m.point = "exit";
    assert_false(fxl_scope_matches(&set, &m));
    m.point = "entrance";
    m.site = "Pelvis";
    assert_false(fxl_scope_matches(&set, &m));
}

static void test_scope_unknown_value_matches_only_open_column(void **state)
{
    fxl_scope set = open_scope(), m = breast_measurement();

    (void)state;
    set.detector_kind = "photon_diode";
    m.detector_kind = NULL;
    assert_false(fxl_scope_matches(&set, &m));
    set.detector_kind = NULL;
    set.energy = 6;
    m.energy = NAN;
    assert_false(fxl_scope_matches(&set, &m));
}

static void test_scope_site_and_technique_ignore_case(void **state)
{
    fxl_scope set = open_scope(), m = breast_measurement();

    (void)state;
    set.site = "BREAST";
    set.technique = "3d TANGENTS";
    assert_true(fxl_scope_matches(&set, &m));
    /* ... but the enumerated columns compare exactly */
    set = open_scope();
    set.modality = "Photon";
    assert_false(fxl_scope_matches(&set, &m));
    /* and a prefix is not equal */
    set = open_scope();
    set.site = "Breas";
    assert_false(fxl_scope_matches(&set, &m));
}

static void test_scope_energy_within_1e6(void **state)
{
    fxl_scope set = open_scope(), m = breast_measurement();

    (void)state;
    set.energy = 6.0000005;   /* 5e-7 away: equal within the 1e-6 tolerance */
    assert_true(fxl_scope_matches(&set, &m));
    set.energy = 6.00001;     /* 1e-5 away: another energy */
    assert_false(fxl_scope_matches(&set, &m));
    set.energy = 18;
    assert_false(fxl_scope_matches(&set, &m));
}

static void test_scope_compatible_and_identical(void **state)
{
    fxl_scope a = open_scope(), b = open_scope();

    (void)state;
    a.site = "Breast";
    b.energy = 6;
    assert_true(fxl_scope_compatible(&a, &b));   /* different columns: Breast at 6 MV matches both */
    assert_false(fxl_scope_identical(&a, &b));
    b.site = "Pelvis";
    assert_false(fxl_scope_compatible(&a, &b));  /* site differs: no measurement matches both */
    b = a;
    assert_true(fxl_scope_identical(&a, &b));
    b.site = "breast";
    assert_true(fxl_scope_identical(&a, &b));    /* case alone does not make another scope */
}

static void test_scope_ties_need_equal_specificity_and_compatibility(void **state)
{
    fxl_scope a = open_scope(), b = open_scope();

    (void)state;
    assert_true(fxl_scope_ties(&a, &b));         /* two catch-all sets */
    a.site = "Breast";
    assert_false(fxl_scope_ties(&a, &b));        /* the site set is more specific */
    b.energy = 6;
    assert_true(fxl_scope_ties(&a, &b));         /* site vs energy, both 1 column, compatible */
    b.site = "Pelvis";
    a.point = "exit";
    assert_false(fxl_scope_ties(&a, &b));        /* 2 vs 2 columns but sites differ */
    b.site = "Breast";
    b.point = "entrance";
    b.energy = NAN;
    assert_false(fxl_scope_ties(&a, &b));        /* same columns, points differ */
    b.point = "exit";
    assert_true(fxl_scope_ties(&a, &b));         /* identical */
}

static void test_scope_choose_most_specific_wins(void **state)
{
    fxl_scope sets[3] = {open_scope(), open_scope(), open_scope()};
    fxl_scope m = breast_measurement();
    size_t idx = 99, other = 99;

    (void)state;
    sets[1].site = "Breast";
    sets[2].site = "Breast";
    sets[2].point = "exit";
    assert_int_equal(fxl_scope_choose(&idx, &other, sets, 3, &m), 0);
    assert_int_equal(idx, 1);                    /* the exit set does not match an entrance reading */
    m.point = "exit";
    assert_int_equal(fxl_scope_choose(&idx, &other, sets, 3, &m), 0);
    assert_int_equal(idx, 2);
    m.site = "Pelvis";
    assert_int_equal(fxl_scope_choose(&idx, &other, sets, 3, &m), 0);
    assert_int_equal(idx, 0);                    /* only the catch-all is left */
}

static void test_scope_choose_none_matches(void **state)
{
    fxl_scope sets[1] = {open_scope()};
    fxl_scope m = breast_measurement();
    size_t idx = 99;

    (void)state;
    sets[0].modality = "electron";
    assert_int_equal(fxl_scope_choose(&idx, NULL, sets, 1, &m), FXL_ENOTFOUND);
    assert_int_equal(fxl_scope_choose(&idx, NULL, sets, 0, &m), FXL_ENOTFOUND);
}

static void test_scope_choose_reports_tie(void **state)
{
    fxl_scope sets[3] = {open_scope(), open_scope(), open_scope()};
    fxl_scope m = breast_measurement();
    size_t idx = 99, other = 99;

    (void)state;
    sets[1].site = "Breast";
    sets[2].energy = 6;
    assert_int_equal(fxl_scope_choose(&idx, &other, sets, 3, &m), FXL_ECONFLICT);
    assert_int_equal(idx, 1);
    assert_int_equal(other, 2);
    /* A more specific set covering the intersection resolves the tie. */
    {
        fxl_scope more[4] = {sets[0], sets[1], sets[2], open_scope()};
        more[3].site = "Breast";
        more[3].energy = 6;
        assert_int_equal(fxl_scope_choose(&idx, &other, more, 4, &m), 0);
        assert_int_equal(idx, 3);
    }
    /* Outside the intersection there is no tie: a 10 MV breast measurement. */
    m.energy = 10;
    assert_int_equal(fxl_scope_choose(&idx, &other, sets, 3, &m), 0);
    assert_int_equal(idx, 1);
}

static void test_scope_intersection_and_describe(void **state)
{
    fxl_scope a = open_scope(), b = open_scope(), both;
    char buf[200];

    (void)state;
    fxl_scope_describe(buf, sizeof buf, &a);
    assert_string_equal(buf, "any measurement");
    a.site = "Breast";
    b.energy = 6;
    b.point = "exit";
    fxl_scope_intersection(&both, &a, &b);
    assert_int_equal(fxl_scope_specificity(&both), 3);
    fxl_scope_describe(buf, sizeof buf, &both);
    assert_string_equal(buf, "site 'Breast', energy 6, point 'exit'");
    /* a tiny buffer stays terminated */
    fxl_scope_describe(buf, 8, &both);
    assert_true(strlen(buf) < 8);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_scope_specificity_counts_restricted_columns),
        cmocka_unit_test(test_scope_open_set_matches_everything),
        cmocka_unit_test(test_scope_restricted_column_must_equal),
        cmocka_unit_test(test_scope_unknown_value_matches_only_open_column),
        cmocka_unit_test(test_scope_site_and_technique_ignore_case),
        cmocka_unit_test(test_scope_energy_within_1e6),
        cmocka_unit_test(test_scope_compatible_and_identical),
        cmocka_unit_test(test_scope_ties_need_equal_specificity_and_compatibility),
        cmocka_unit_test(test_scope_choose_most_specific_wins),
        cmocka_unit_test(test_scope_choose_none_matches),
        cmocka_unit_test(test_scope_choose_reports_tie),
        cmocka_unit_test(test_scope_intersection_and_describe),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
