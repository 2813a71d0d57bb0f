/* The escalation rule over two consecutive measured fractions of one field:
 * a pure decision on the current judgement and the prior result.
 * docs/record.md, "Rules over history". */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "fxl/escalation.h"

int fxl_escalation_outside(fxl_verdict v, double deviation_pct)
{
    if (v != FXL_VERDICT_OUTSIDE_TOLERANCE && v != FXL_VERDICT_OUTSIDE_ACTION)
        return 0;
    /* Without a sign there is no "same sign": never escalate on a guess. */
    return isfinite(deviation_pct) && deviation_pct != 0.0;
}

int fxl_escalation_applies(const fxl_judgement *current, const fxl_prior_result *prior)
{
    if (!current || !prior || !prior->present)
        return 0;
    if (current->verdict != FXL_VERDICT_OUTSIDE_TOLERANCE)
        return 0;
    if (!fxl_escalation_outside(current->verdict, current->deviation_pct) ||
        !fxl_escalation_outside(prior->verdict, prior->deviation_pct))
        return 0;
    return (current->deviation_pct > 0) == (prior->deviation_pct > 0);
}

int fxl_escalation_apply(fxl_judgement *j, const fxl_prior_result *prior)
{
    fxl_reasons r = FXL_REASONS_INIT;
    int i;

    if (!fxl_escalation_applies(j, prior))
        return 0;
    fxl_reasons_add(&r,
                    "outside tolerance with the same sign on two consecutive measured fractions "
                    "(%+.2f %% now, %+.2f %% at fraction %d): escalated to the action level",
                    j->deviation_pct, prior->deviation_pct, prior->fraction_number);
    for (i = 0; i < j->reasons.n && i < FXL_REASONS_MAX; i++)
        fxl_reasons_add(&r, "%s", j->reasons.text[i]);
    j->reasons = r;
    j->verdict = FXL_VERDICT_OUTSIDE_ACTION;
    return 1;
}
