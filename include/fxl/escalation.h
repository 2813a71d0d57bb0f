/* The rule over history that changes a verdict: the same field outside
 * tolerance with the same sign of deviation on its last two evaluated
 * results escalates to the action level (docs/physics.md; the
 * re-measure-then-escalate practice of ESTRO Booklet 5 and AAPM TG-62, from
 * memory). Pure functions, no I/O. docs/record.md. */
#ifndef FXL_ESCALATION_H
#define FXL_ESCALATION_H

#include "fxl/core.h"

/* The field's last evaluated result before the one being judged: the
 * current (not superseded) result of the same field of the same plan at the
 * highest fraction number below it whose verdict is within tolerance,
 * outside tolerance or outside the action level with a deviation; a
 * not-evaluable or implausible result between is skipped (docs/rules.md). */
typedef struct fxl_prior_result {
    int present;              /* 0: no earlier fraction measured this field */
    int fraction_number;
    fxl_verdict verdict;
    double deviation_pct;     /* NaN when not computed */
} fxl_prior_result;

#define FXL_PRIOR_RESULT_INIT {0, 0, FXL_VERDICT_NOT_EVALUABLE, 0.0}

/* 1 when a result with verdict `v` counts as "outside tolerance" for the
 * rule: outside tolerance or outside the action level, with a finite
 * non-zero deviation giving its sign. */
int fxl_escalation_outside(fxl_verdict v, double deviation_pct);

/* 1 when the rule applies: the current verdict is outside tolerance (not
 * already outside action), the prior is present and outside (as above), and
 * both deviations have the same sign. */
int fxl_escalation_applies(const fxl_judgement *current, const fxl_prior_result *prior);

/* Applies the rule to *j: when it applies, the verdict becomes outside the
 * action level and a reason naming both deviations and the earlier fraction
 * is put first. Returns 1 when *j changed, else 0 (*j untouched). */
int fxl_escalation_apply(fxl_judgement *j, const fxl_prior_result *prior);

#endif
