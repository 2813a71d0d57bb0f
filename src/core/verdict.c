/* The verdict for one measurement: the order of checks, the boundary and
 * floor rules, implausible entries, and the words shown to the therapist.
 * Rules and sources: docs/physics.md. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "fxl/core.h"
#include "fxl/fxl.h"

/* Default plausibility bound on |deviation|: beyond it a result is a gross
 * deviation (outside the action level, with a re-read asked for first). */
#define IMPLAUSIBLE_DEFAULT_PCT 50.0
/* measured/expected outside this is gross whatever the bound is set to. */
#define RATIO_MIN 0.1
#define RATIO_MAX 10.0
/* A ratio within this fraction of 10, 100 or 1000 (or their inverses) is
 * named as a probable unit slip: pC for nC is 1000, Gy for cGy is 100,
 * a misplaced decimal point 10 (fxledger decision: +/- 25 %). */
#define SLIP_WIDTH 0.25

/* The power of ten (10, 100, 1000, or 0.1, 0.01, 0.001) that ratio is close
 * to, or 0. */
static double unit_slip_factor(double ratio)
{
    static const double f[] = {10, 100, 1000, 0.1, 0.01, 0.001};
    size_t i;

    if (!isfinite(ratio) || !(ratio > 0))
        return 0;
    for (i = 0; i < sizeof f / sizeof f[0]; i++)
        if (fabs(ratio / f[i] - 1.0) <= SLIP_WIDTH)
            return f[i];
    return 0;
}

static const struct {
    const char *name;
    const char *label;
    const char *guidance;
} verdicts[] = {
    [FXL_VERDICT_WITHIN] = {
        "within_tolerance", "within tolerance",
        "No action needed: continue treatment as planned."},
    [FXL_VERDICT_OUTSIDE_TOLERANCE] = {
        "outside_tolerance", "outside tolerance",
        "Check detector placement, cable, SSD, field size, wedge or tray, MU and energy "
        "against the plan now. If nothing is found, re-measure at the next fraction; a "
        "physicist will review this result."},
    [FXL_VERDICT_OUTSIDE_ACTION] = {
        "outside_action", "outside action level",
        "Do not continue this patient's treatment until a physicist has investigated. "
        "Call the physicist now."},
    [FXL_VERDICT_NOT_EVALUABLE] = {
        "not_evaluable", "not evaluable",
        "No dose result: this fraction is not verified. Tell the physicist."},
    [FXL_VERDICT_IMPLAUSIBLE] = {
        "implausible", "implausible entry",
        "Probable entry or unit error: re-read the electrometer and re-enter the reading, "
        "or re-measure. This is not a dose result."},
};
#define VERDICT_COUNT ((int)(sizeof verdicts / sizeof verdicts[0]))

static int verdict_known(fxl_verdict v)
{
    return (int)v >= 0 && (int)v < VERDICT_COUNT;
}

const char *fxl_verdict_name(fxl_verdict v)
{
    return verdict_known(v) ? verdicts[v].name : "unknown";
}

const char *fxl_verdict_label(fxl_verdict v)
{
    return verdict_known(v) ? verdicts[v].label : "unknown";
}

const char *fxl_verdict_guidance(fxl_verdict v)
{
    /* An unknown verdict is never a pass: send the therapist to the physicist. */
    return verdict_known(v) ? verdicts[v].guidance : verdicts[FXL_VERDICT_NOT_EVALUABLE].guidance;
}

const char *fxl_gross_guidance(void)
{
    return "Gross deviation: first re-read the electrometer and check the reading's unit, and "
           "amend the reading if it was mistyped. A confirmed reading stands: do not continue "
           "this patient's treatment until a physicist has investigated. Call the physicist now.";
}

int fxl_verdict_parse(fxl_verdict *out, const char *name)
{
    int i;

    if (!out || !name)
        return FXL_EINVAL;
    for (i = 0; i < VERDICT_COUNT; i++) {
        if (strcmp(name, verdicts[i].name) == 0) {
            *out = (fxl_verdict)i;
            return 0;
        }
    }
    return FXL_EINVAL;
}

/* To 0.01, the precision shown to users: the verdict is decided on the
 * number the therapist sees, so 5.004 % shown as 5.00 % is within 5 %. */
static double round_2dp(double v)
{
    return round(v * 100.0) / 100.0;
}

/* "retired", "out for service": the schema status in words. */
static void status_words(char *buf, size_t size, const char *status)
{
    size_t i;

    if (!status || !*status) {
        snprintf(buf, size, "not in service");
        return;
    }
    snprintf(buf, size, "%s", status);
    for (i = 0; buf[i]; i++)
        if (buf[i] == '_')
            buf[i] = ' ';
}

/* Step 2: everything that stops a dose from being judged. Returns the
 * number of reasons added. */
static int not_evaluable_reasons(fxl_reasons *r, const fxl_judge_input *in)
{
    int before = r->n, calibrated = 0;

    if (!in->detector_in_service) {
        char st[64];

        status_words(st, sizeof st, in->detector_status);
        fxl_reasons_add(r, "detector is %s; it may not be used for patient measurements", st);
    }
    if (!in->calibration_found) {
        fxl_reasons_add(r, "detector has no calibration for this beam and measured point");
    } else if (!in->calibration_valid) {
        if (in->calibration_valid_until && strlen(in->calibration_valid_until) >= 10)
            fxl_reasons_add(r, "calibration expired on %.10s; the detector must be recalibrated",
                            in->calibration_valid_until);
        else
            fxl_reasons_add(r, "no calibration of this detector is valid on the treatment date");
    } else {
        calibrated = 1;
    }
    if (calibrated && !(in->dose.evaluable && isfinite(in->dose.dose_cgy))) {
        int i;

        for (i = 0; i < in->dose.reasons.n && i < FXL_REASONS_MAX; i++)
            fxl_reasons_add(r, "%s", in->dose.reasons.text[i]);
        if (in->dose.reasons.n <= 0)
            fxl_reasons_add(r, "corrected dose could not be computed");
    }
    if (!isfinite(in->expected_dose_cgy) || !(in->expected_dose_cgy > 0))
        fxl_reasons_add(r, "no expected dose is known for this field; result cannot be judged");
    return r->n - before;
}

void fxl_judge(fxl_judgement *out, const fxl_judge_input *in)
{
    const char *unit;
    double dose, expected, dev, adev, ratio, bound, diff, floor_cgy, slip;
    const fxl_levels *lv;

    memset(out, 0, sizeof *out);
    out->deviation_pct = NAN;
    out->verdict = FXL_VERDICT_NOT_EVALUABLE;
    if (!in) {
        fxl_reasons_add(&out->reasons, "nothing was measured");
        return;
    }
    unit = in->reading_unit && *in->reading_unit ? in->reading_unit : "(detector units)";

    /* 1. The reading itself: a non-positive or non-numeric entry is a typing
     * error, whatever else is wrong. */
    if (!isfinite(in->reading)) {
        out->verdict = FXL_VERDICT_IMPLAUSIBLE;
        fxl_reasons_add(&out->reasons, "reading is not a number; probable entry error");
        return;
    }
    if (!(in->reading > 0)) {
        out->verdict = FXL_VERDICT_IMPLAUSIBLE;
        fxl_reasons_add(&out->reasons,
                        "reading %g %s is not greater than 0; probable entry error", in->reading,
                        unit);
        return;
    }

    /* 2. Anything that stops the dose from being judged. */
    if (not_evaluable_reasons(&out->reasons, in) > 0) {
        out->verdict = FXL_VERDICT_NOT_EVALUABLE;
        return;
    }

    dose = in->dose.dose_cgy;
    expected = in->expected_dose_cgy;
    dev = round_2dp(fxl_deviation_pct(dose, expected));
    out->deviation_pct = dev;
    adev = fabs(dev);

    /* 3. A gross deviation: far beyond what a set-up wobble gives, but just
     * what the errors in vivo dosimetry is there to catch give (a 60 degree
     * wedge left out, doubled MU, the wrong plan; docs/physics.md). It is an
     * action-level result; the only doubt is a mistyped reading, so the
     * guidance asks for a re-read first, and a confirmed reading stands. */
    bound = in->implausible_pct;
    if (!isfinite(bound) || !(bound > 0))
        bound = IMPLAUSIBLE_DEFAULT_PCT;
    ratio = dose / expected;
    slip = unit_slip_factor(ratio);
    if (ratio < RATIO_MIN || ratio > RATIO_MAX || adev > bound) {
        out->gross = 1;
        out->verdict = FXL_VERDICT_OUTSIDE_ACTION;
        fxl_reasons_add(&out->reasons,
                        "measured %.2f cGy against expected %.2f cGy is a deviation of %+.2f %%, "
                        "beyond the plausibility bound of %g %%: a gross deviation, outside the "
                        "action level",
                        dose, expected, dev, bound);
        if (slip > 0)
            fxl_reasons_add(&out->reasons,
                            "measured/expected is %.4g, close to a factor %g: typical of a unit "
                            "slip (pC for nC, Gy for cGy); check the reading's unit",
                            ratio, slip);
        fxl_reasons_add(&out->reasons,
                        "re-read the electrometer and check the unit; if the reading is "
                        "confirmed it stands: hold treatment and call the physicist");
        return;
    }

    /* 4. Without levels there is no verdict, and never a pass. */
    lv = &in->levels;
    if (!lv->present) {
        out->verdict = FXL_VERDICT_NOT_EVALUABLE;
        fxl_reasons_add(&out->reasons,
                        "no tolerance or action levels are set for this field; result cannot be "
                        "judged");
        return;
    }
    if (!isfinite(lv->tolerance_pct) || !(lv->tolerance_pct > 0) || !isfinite(lv->action_pct) ||
        lv->action_pct < lv->tolerance_pct) {
        out->verdict = FXL_VERDICT_NOT_EVALUABLE;
        fxl_reasons_add(&out->reasons,
                        "the levels set for this field are not valid (tolerance %g %%, action %g "
                        "%%); result cannot be judged",
                        lv->tolerance_pct, lv->action_pct);
        return;
    }

    /* 5. The floor: for small doses a percentage is too strict, so an
     * absolute difference at or below the floor passes. Compared at 0.01 cGy,
     * like the deviation, so that 2.00 cGy counts as 2.00 cGy. */
    floor_cgy = isfinite(lv->floor_cgy) && lv->floor_cgy > 0 ? lv->floor_cgy : 0;
    if (floor_cgy > FXL_FLOOR_MAX_CGY)
        floor_cgy = FXL_FLOOR_MAX_CGY;
    diff = round_2dp(fabs(dose - expected));
    /* The floor never turns a result beyond the action level into a pass. */
    if (floor_cgy > 0 && diff <= floor_cgy && adev <= lv->action_pct) {
        out->verdict = FXL_VERDICT_WITHIN;
        fxl_reasons_add(&out->reasons,
                        "difference of %.2f cGy from the expected %.2f cGy is within the %.2f cGy "
                        "floor for small doses",
                        diff, expected, floor_cgy);
        return;
    }

    /* 6. The levels; a deviation exactly at a level counts as inside it. */
    if (adev <= lv->tolerance_pct) {
        out->verdict = FXL_VERDICT_WITHIN;
        fxl_reasons_add(&out->reasons, "deviation %+.2f %% is within the tolerance level of %.2f %%",
                        dev, lv->tolerance_pct);
    } else if (adev <= lv->action_pct) {
        out->verdict = FXL_VERDICT_OUTSIDE_TOLERANCE;
        fxl_reasons_add(&out->reasons,
                        "deviation %+.2f %% is beyond the tolerance level of %.2f %% (action level "
                        "%.2f %%)",
                        dev, lv->tolerance_pct, lv->action_pct);
    } else {
        out->verdict = FXL_VERDICT_OUTSIDE_ACTION;
        fxl_reasons_add(&out->reasons, "deviation %+.2f %% is beyond the action level of %.2f %%",
                        dev, lv->action_pct);
    }
}
