/* Rules over history: pure functions (src/core, no I/O, no SQLite) that look
 * beyond one measurement. A measurement required by a field's policy that was
 * not made, a calibration expired or due, the dose a detector has accumulated
 * since its calibration, a plain tabular CUSUM helper (the drift rule's
 * standardised per-series chart is fxl/drift.h), plus an individuals /
 * moving-range chart helper.
 * Every rule, its configuration and its default: docs/rules.md.
 * Units: deviations and CUSUM parameters in percent, doses in cGy, times in
 * the stored form 'YYYY-MM-DDTHH:MM:SSZ' (UTC). */
#ifndef FXL_RULES_H
#define FXL_RULES_H

#include <stddef.h>

#include "fxl/fxl.h"

/* Severity of a review item, 4 the most severe (review_items.severity). */
enum {
    FXL_SEVERITY_LOW = 1,
    FXL_SEVERITY_MEDIUM = 2,
    FXL_SEVERITY_HIGH = 3,
    FXL_SEVERITY_CRITICAL = 4
};
/* "low", "medium", "high", "critical"; "unknown" outside 1..4. */
const char *fxl_severity_name(int severity);

/* Names of the rules in review_items.rule that this module decides. */
#define FXL_RULE_MISSING "missing_measurement"
#define FXL_RULE_CALIB_EXPIRED "calibration_expired"
#define FXL_RULE_CALIB_DUE "calibration_due"
#define FXL_RULE_DOSE_LIMIT "dose_limit"
#define FXL_RULE_DRIFT "detector_drift"

/* Severity each rule opens its item with (docs/rules.md). */
#define FXL_RULE_MISSING_SEVERITY FXL_SEVERITY_MEDIUM
#define FXL_RULE_CALIB_EXPIRED_SEVERITY FXL_SEVERITY_HIGH
#define FXL_RULE_CALIB_DUE_SEVERITY FXL_SEVERITY_LOW
#define FXL_RULE_DOSE_LIMIT_SEVERITY FXL_SEVERITY_MEDIUM
#define FXL_RULE_DRIFT_SEVERITY FXL_SEVERITY_HIGH

/* Defaults used when the setting is not stored. The two CUSUM percentages
 * are only the defaults of the plain fxl_cusum helper below; the drift rule
 * runs the standardised chart of fxl/drift.h, whose k and h are in units of
 * each series' own spread (docs/rules.md). */
#define FXL_WEEKLY_INTERVAL_DAYS_DEFAULT 7
#define FXL_CALIBRATION_DUE_DAYS_DEFAULT 14
#define FXL_CUSUM_TARGET_PCT_DEFAULT 0.0
#define FXL_CUSUM_K_PCT_DEFAULT 1.0
#define FXL_CUSUM_H_PCT_DEFAULT 10.0

/* A text explaining a rule hit, for the review item's summary. */
#define FXL_RULE_TEXT_LEN 240

/* ---- required measurements ---------------------------------------------- */

typedef enum {
    FXL_POLICY_NONE = 0,    /* never required */
    FXL_POLICY_FIRST,       /* the plan's first fraction */
    FXL_POLICY_WEEKLY,      /* the first fraction, then at least every interval */
    FXL_POLICY_EVERY        /* every fraction */
} fxl_policy;

/* Schema names of fields.policy: "none", "first", "weekly", "every". */
const char *fxl_policy_name(fxl_policy p);
int fxl_policy_parse(fxl_policy *out, const char *name);

/* One logged fraction of a plan as the required-measurement rule sees it. */
typedef struct fxl_fraction_slot {
    int number;                     /* fractions.number */
    const char *treated_at;         /* stored form; borrowed */
    int measured;                   /* 1 if the field has a measurement in it */
} fxl_fraction_slot;

typedef struct fxl_required_input {
    fxl_policy policy;
    int first_number;               /* number of the plan's first fraction (>= 1) */
    int interval_days;              /* weekly policy: calendar days, >= 1 */
    const fxl_fraction_slot *slots; /* every logged fraction of the plan, any order */
    size_t n_slots;
    int current_number;             /* the fraction just logged; must be in slots */
} fxl_required_input;

/* Fraction numbers run 1..FXL_FRACTION_NUMBER_MAX (schema). */
#define FXL_FRACTION_NUMBER_MAX 100

typedef struct fxl_required_result {
    int n_missing;                  /* required fractions that lack the measurement */
    int missing[FXL_FRACTION_NUMBER_MAX];   /* their numbers, ascending */
    int weekly_gap;                 /* 1: the weekly measurement was not made in time */
    int last_measured_number;       /* weekly gap: the latest measured fraction before
                                       the current one, 0 if none was measured */
    char last_measured_date[11];    /* date 'YYYY-MM-DD' the gap is counted from */
    char due_date[11];              /* weekly gap: the date it was due by */
} fxl_required_result;

/* Decides, when fraction `current_number` is logged, which measurements the
 * policy required at an EARLIER point of the plan were not made:
 * - first: fraction first_number, when current_number > first_number and it
 *   was logged without the measurement or never logged;
 * - every: each fraction from first_number to current_number - 1 (a number
 *   never logged counts as unmeasured);
 * - weekly: the first_number requirement as for 'first'; then, with P the
 *   latest measured fraction numbered below the current one (or, when none
 *   was measured, the plan's earliest logged fraction), a gap when the
 *   current fraction's date is more than interval_days calendar days after
 *   P's date (UTC dates; a gap of exactly interval_days is on time);
 * - none: never.
 * The current fraction itself is never reported missing: a later fraction
 * decides. FXL_EINVAL for bad input (unknown policy, first_number outside
 * 1..FXL_FRACTION_NUMBER_MAX, interval_days < 1 for weekly, the current
 * fraction not among the slots, a timestamp not in stored form). */
int fxl_rule_required(fxl_required_result *out, const fxl_required_input *in);

/* What the policy asks of the fraction about to be logged (the worklist's
 * "due today"), the forward-looking twin of fxl_rule_required. */
typedef enum {
    FXL_RULE_DUE_NOT = 0,
    FXL_RULE_DUE_FIRST,             /* the plan's first fraction, or not measured there */
    FXL_RULE_DUE_WEEKLY,            /* the interval since the last measurement is reached */
    FXL_RULE_DUE_EVERY              /* every fraction */
} fxl_rule_due_kind;

typedef struct fxl_rule_due_result {
    fxl_rule_due_kind kind;
    int catch_up;                   /* first: the first fraction went unmeasured */
    char due_date[11];              /* weekly: 'YYYY-MM-DD' the measurement is due by
                                       (the key of the weekly-gap item), else "" */
} fxl_rule_due_result;

/* Decides whether the field is due at fraction in->current_number treated at
 * `at` (stored form). in->slots are the plan's logged fractions; a slot
 * numbered current_number, if any, is ignored (it is the fraction being
 * logged). first / weekly: due at first_number, and at any later fraction
 * while fraction first_number has no measurement (catch up); weekly also
 * when the calendar days (UTC dates, as fxl_rule_required counts them) from
 * the latest measured fraction before the current one (or the plan's
 * earliest logged fraction when none was measured) to `at` are interval_days
 * or more; every: always; none: never. FXL_EINVAL for bad input as
 * fxl_rule_required (the current fraction need not be among the slots). */
int fxl_rule_due(fxl_rule_due_result *out, const fxl_required_input *in, const char *at);

/* ---- calibration expiry ------------------------------------------------- */

typedef enum {
    FXL_CALIB_OK = 0,
    FXL_CALIB_DUE,                  /* valid_until within due_days of now */
    FXL_CALIB_EXPIRED               /* now is after valid_until */
} fxl_calib_state;

typedef struct fxl_calib_due_result {
    fxl_calib_state state;
    long days_left;                 /* calendar days (UTC dates) from now to valid_until */
    char text[FXL_RULE_TEXT_LEN];
} fxl_calib_due_result;

/* Expired when now > valid_until (to the second: valid_until itself is still
 * valid); due when the calendar days (UTC dates) from now to valid_until are
 * at most due_days (due_days >= 0; exactly due_days left is due); else ok. FXL_EINVAL for a timestamp not in stored form or
 * due_days < 0. */
int fxl_rule_calibration(fxl_calib_due_result *out, const char *valid_until, const char *now,
                         int due_days);

/* ---- accumulated dose --------------------------------------------------- */

typedef struct fxl_dose_limit_result {
    int over;                       /* 1 when accumulated > limit */
    double fraction_of_limit;       /* accumulated / limit; NaN without a limit */
    char text[FXL_RULE_TEXT_LEN];
} fxl_dose_limit_result;

/* Over when accumulated_cgy > limit_cgy (exactly at the limit is not over).
 * A limit that is NaN or <= 0 means "no limit": never over. FXL_EINVAL for an
 * accumulated dose that is negative or not finite. */
int fxl_rule_dose_limit(fxl_dose_limit_result *out, double accumulated_cgy, double limit_cgy);

/* ---- detector drift: tabular CUSUM -------------------------------------- */

typedef struct fxl_cusum_params {
    double target_pct;              /* mu_0, the in-control mean deviation */
    double k_pct;                   /* reference value (allowance), >= 0 */
    double h_pct;                   /* decision interval, > 0 */
} fxl_cusum_params;

typedef struct fxl_cusum_result {
    size_t n;                       /* deviations used */
    double s_high;                  /* C+ after the last deviation */
    double s_low;                   /* C- after the last deviation (>= 0) */
    int signal;                     /* 0 none, +1 drift upward, -1 drift downward */
    size_t signal_index;            /* index of the first deviation that signalled */
    double signal_value;            /* C+ or C- at that deviation */
    char text[FXL_RULE_TEXT_LEN];
} fxl_cusum_result;

/* Tabular CUSUM (Page 1954; Montgomery, Introduction to Statistical Quality
 * Control, chapter on cumulative sum charts) over deviations x_i in the
 * order given, each first limited to mu_0 +/- h/2 (winsorized, so that no
 * single result - a gross set-up error - can carry a sum past h: at least
 * three results pointing the same way are needed):
 *   y_i = min(max(x_i, mu_0 - h/2), mu_0 + h/2)
 *   C+_i = max(0, C+_(i-1) + y_i - (mu_0 + k)),
 *   C-_i = max(0, C-_(i-1) + (mu_0 - k) - y_i),  C+_0 = C-_0 = 0;
 * signals at the first i where C+_i > h (upward) or C-_i > h (downward);
 * exactly h does not signal. The sums run to the end; the result keeps the
 * first signal. s_high / s_low (may be NULL) receive C+_i and C-_i for each
 * i (n values). FXL_EINVAL for non-finite deviations or parameters, k < 0 or
 * h <= 0. */
int fxl_cusum(fxl_cusum_result *out, double *s_high, double *s_low, const double *dev_pct,
              size_t n, const fxl_cusum_params *p);

/* ---- individuals and moving-range chart --------------------------------- */

typedef struct fxl_imr_chart {
    size_t n;
    double mean;                    /* centre line of the individuals chart */
    double mr_mean;                 /* average moving range |x_i - x_(i-1)| */
    double ucl, lcl;                /* mean +/- 2.66 x mr_mean */
    double mr_ucl;                  /* 3.267 x mr_mean */
    size_t n_beyond;                /* points outside [lcl, ucl] */
} fxl_imr_chart;

/* Individuals / moving-range limits (standard SPC constants 2.66 = 3/d2 and
 * 3.267 = D4 for subgroups of 2; Pawlicki et al., Med. Phys. 2005). Needs
 * n >= 2 finite values, else FXL_EINVAL. */
int fxl_imr(fxl_imr_chart *out, const double *x, size_t n);

#endif
