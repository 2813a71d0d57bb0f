/* Unit tests for src/core/escalation.c: the same field outside tolerance with
 * the same sign on two consecutive measured fractions escalates to the action
 * level (docs/physics.md). Boundaries: a prior exactly at the tolerance
 * level (within, so no escalation), opposite signs, a prior outside action,
 * a current already outside action, no prior, a prior without a deviation. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include <cmocka.h>

#include "fxl/core.h"
#include "fxl/escalation.h"

static fxl_judgement judged(fxl_verdict v, double dev)
{
    fxl_judgement j;

    memset(&j, 0, sizeof j);
    j.verdict = v;
    j.deviation_pct = dev;
    fxl_reasons_add(&j.reasons, "original reason");
    return j;
}

static fxl_prior_result prior(int number, fxl_verdict v, double dev)
{
    fxl_prior_result p = FXL_PRIOR_RESULT_INIT;

    p.present = 1;
    p.fraction_number = number;
    p.verdict = v;
    p.deviation_pct = dev;
    return p;
}

static void test_escalation_same_sign_positive_escalates(void **state)
{
    fxl_judgement j = judged(FXL_VERDICT_OUTSIDE_TOLERANCE, 6.2);
    fxl_prior_result p = prior(3, FXL_VERDICT_OUTSIDE_TOLERANCE, 5.8);

    (void)state;
    assert_int_equal(fxl_escalation_apply(&j, &p), 1);
    assert_int_equal(j.verdict, FXL_VERDICT_OUTSIDE_ACTION);
    assert_int_equal(j.reasons.n, 2);
    assert_non_null(strstr(j.reasons.text[0], "two consecutive measured fractions"));
    assert_non_null(strstr(j.reasons.text[0], "+6.20 %"));
    assert_non_null(strstr(j.reasons.text[0], "+5.80 %"));
    assert_non_null(strstr(j.reasons.text[0], "fraction 3"));
    assert_string_equal(j.reasons.text[1], "original reason");
    /* The deviation itself is never changed by the rule. */
    assert_true(j.deviation_pct == 6.2);
}

static void test_escalation_same_sign_negative_escalates(void **state)
{
    fxl_judgement j = judged(FXL_VERDICT_OUTSIDE_TOLERANCE, -5.5);
    fxl_prior_result p = prior(7, FXL_VERDICT_OUTSIDE_TOLERANCE, -7.9);

    (void)state;
    assert_int_equal(fxl_escalation_apply(&j, &p), 1);
    assert_int_equal(j.verdict, FXL_VERDICT_OUTSIDE_ACTION);
}

static void test_escalation_opposite_signs_do_not(void **state)
{
    fxl_judgement j = judged(FXL_VERDICT_OUTSIDE_TOLERANCE, 6.0);
    fxl_prior_result p = prior(2, FXL_VERDICT_OUTSIDE_TOLERANCE, -6.0);

    (void)state;
    assert_int_equal(fxl_escalation_apply(&j, &p), 0);
    assert_int_equal(j.verdict, FXL_VERDICT_OUTSIDE_TOLERANCE);
    assert_int_equal(j.reasons.n, 1);
}

static void test_escalation_prior_within_at_boundary_does_not(void **state)
{
    /* Prior exactly at a 5 % tolerance level is within tolerance (a deviation
     * at a level counts as inside it, core.h): no escalation. */
    fxl_judgement j = judged(FXL_VERDICT_OUTSIDE_TOLERANCE, 5.01);
    fxl_prior_result p = prior(1, FXL_VERDICT_WITHIN, 5.00);

    (void)state;
    assert_int_equal(fxl_escalation_apply(&j, &p), 0);
    assert_int_equal(j.verdict, FXL_VERDICT_OUTSIDE_TOLERANCE);
}

static void test_escalation_prior_outside_action_counts(void **state)
{
    fxl_judgement j = judged(FXL_VERDICT_OUTSIDE_TOLERANCE, 5.01);
    fxl_prior_result p = prior(4, FXL_VERDICT_OUTSIDE_ACTION, 9.0);

    (void)state;
    assert_int_equal(fxl_escalation_apply(&j, &p), 1);
    assert_int_equal(j.verdict, FXL_VERDICT_OUTSIDE_ACTION);
}

static void test_escalation_current_within_or_action_unchanged(void **state)
{
    fxl_prior_result p = prior(4, FXL_VERDICT_OUTSIDE_TOLERANCE, 6.0);
    fxl_judgement within = judged(FXL_VERDICT_WITHIN, 5.0);
    fxl_judgement action = judged(FXL_VERDICT_OUTSIDE_ACTION, 9.0);

    (void)state;
    assert_int_equal(fxl_escalation_apply(&within, &p), 0);
    assert_int_equal(within.verdict, FXL_VERDICT_WITHIN);
    /* Already at the action level: nothing to add. */
    assert_int_equal(fxl_escalation_apply(&action, &p), 0);
    assert_int_equal(action.reasons.n, 1);
}

static void test_escalation_no_prior_or_no_sign(void **state)
{
    fxl_judgement j = judged(FXL_VERDICT_OUTSIDE_TOLERANCE, 6.0);
    fxl_prior_result none = FXL_PRIOR_RESULT_INIT;
    fxl_prior_result ne = prior(2, FXL_VERDICT_NOT_EVALUABLE, NAN);
    fxl_prior_result imp = prior(2, FXL_VERDICT_IMPLAUSIBLE, 80.0);
    fxl_prior_result nan_dev = prior(2, FXL_VERDICT_OUTSIDE_TOLERANCE, NAN);

    (void)state;
    assert_int_equal(fxl_escalation_apply(&j, &none), 0);
    assert_int_equal(fxl_escalation_apply(&j, &ne), 0);
    /* An implausible entry is not a dose result: it never feeds the rule. */
    assert_int_equal(fxl_escalation_apply(&j, &imp), 0);
    assert_int_equal(fxl_escalation_apply(&j, &nan_dev), 0);
    assert_int_equal(fxl_escalation_apply(&j, NULL), 0);
    assert_int_equal(j.verdict, FXL_VERDICT_OUTSIDE_TOLERANCE);
}

static void test_escalation_outside_predicate(void **state)
{
    (void)state;
    assert_true(fxl_escalation_outside(FXL_VERDICT_OUTSIDE_TOLERANCE, -0.01));
    assert_true(fxl_escalation_outside(FXL_VERDICT_OUTSIDE_ACTION, 12.0));
    assert_false(fxl_escalation_outside(FXL_VERDICT_OUTSIDE_TOLERANCE, 0.0));
    assert_false(fxl_escalation_outside(FXL_VERDICT_WITHIN, 4.0));
    assert_false(fxl_escalation_outside(FXL_VERDICT_NOT_EVALUABLE, 6.0));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_escalation_same_sign_positive_escalates),
        cmocka_unit_test(test_escalation_same_sign_negative_escalates),
        cmocka_unit_test(test_escalation_opposite_signs_do_not),
        cmocka_unit_test(test_escalation_prior_within_at_boundary_does_not),
        cmocka_unit_test(test_escalation_prior_outside_action_counts),
        cmocka_unit_test(test_escalation_current_within_or_action_unchanged),
        cmocka_unit_test(test_escalation_no_prior_or_no_sign),
        cmocka_unit_test(test_escalation_outside_predicate),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
