/* Rules over history as pure functions: required measurements per policy,
 * calibration expiry, accumulated dose against a limit, tabular CUSUM drift
 * and the individuals / moving-range chart. No I/O, no SQLite. Rules and
 * defaults: docs/rules.md. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "core/civil.h"
#include "fxl/rules.h"

const char *fxl_severity_name(int severity)
{
    switch (severity) {
    case FXL_SEVERITY_LOW: return "low";
    case FXL_SEVERITY_MEDIUM: return "medium";
    case FXL_SEVERITY_HIGH: return "high";
    case FXL_SEVERITY_CRITICAL: return "critical";
    }
    return "unknown";
}

static const char *const policy_names[] = {"none", "first", "weekly", "every"};

const char *fxl_policy_name(fxl_policy p)
{
    return (unsigned)p < 4 ? policy_names[p] : "unknown";
}

int fxl_policy_parse(fxl_policy *out, const char *name)
{
    int i;

    for (i = 0; i < 4; i++) {
        if (name && strcmp(name, policy_names[i]) == 0) {
            *out = (fxl_policy)i;
            return 0;
        }
    }
    return FXL_EINVAL;
}

/* ---- calendar days -------------------------------------------------------- */

/* Day number since 1970-01-01 of the date part of a stored timestamp (or a
 * bare 'YYYY-MM-DD'). */
static int day_number(long *out, const char *stamp)
{
    char norm[FXL_TIME_LEN];
    int y, m, d;

    if (!stamp || fxl_time_normalize(norm, stamp, 0) != 0)
        return FXL_EINVAL;
    if (fxl_time_fields(norm, &y, &m, &d, NULL, NULL, NULL) != 0)
        return FXL_EINVAL;
    *out = fxl_days_from_civil(y, m, d);
    return 0;
}

static void date_part(char out[11], const char *stamp)
{
    snprintf(out, 11, "%.10s", stamp);
}

/* ---- required measurements ------------------------------------------------ */

static const fxl_fraction_slot *find_slot(const fxl_required_input *in, int number)
{
    size_t i;

    for (i = 0; i < in->n_slots; i++)
        if (in->slots[i].number == number)
            return &in->slots[i];
    return NULL;
}

static void add_missing(fxl_required_result *out, int number)
{
    if (out->n_missing < FXL_FRACTION_NUMBER_MAX)
        out->missing[out->n_missing++] = number;
}

int fxl_rule_required(fxl_required_result *out, const fxl_required_input *in)
{
    const fxl_fraction_slot *cur, *first, *anchor = NULL;
    long cur_day, anchor_day;
    size_t i;
    int n;

    memset(out, 0, sizeof *out);
    if (!in || (unsigned)in->policy > FXL_POLICY_EVERY)
        return FXL_EINVAL;
    if (in->first_number < 1 || in->first_number > FXL_FRACTION_NUMBER_MAX)
        return FXL_EINVAL;
    if (in->policy == FXL_POLICY_WEEKLY && in->interval_days < 1)
        return FXL_EINVAL;
    if (in->n_slots > 0 && !in->slots)
        return FXL_EINVAL;
    cur = find_slot(in, in->current_number);
    if (!cur)
        return FXL_EINVAL;
    for (i = 0; i < in->n_slots; i++)
        if (day_number(&cur_day, in->slots[i].treated_at) != 0)
            return FXL_EINVAL;
    if (in->policy == FXL_POLICY_NONE || in->current_number <= in->first_number)
        return 0;

    if (in->policy == FXL_POLICY_EVERY) {
        for (n = in->first_number; n < in->current_number; n++) {
            const fxl_fraction_slot *s = find_slot(in, n);
            if (!s || !s->measured)
                add_missing(out, n);
        }
        return 0;
    }

    first = find_slot(in, in->first_number);
    if (!first || !first->measured)
        add_missing(out, in->first_number);
    if (in->policy == FXL_POLICY_FIRST)
        return 0;

    /* Weekly: count from the latest measured fraction before the current one,
     * or from the plan's earliest logged fraction when none was measured. */
    for (i = 0; i < in->n_slots; i++) {
        const fxl_fraction_slot *s = &in->slots[i];
        if (s->measured && s->number < in->current_number &&
            (!anchor || s->number > anchor->number))
            anchor = s;
    }
    if (!anchor) {
        for (i = 0; i < in->n_slots; i++) {
            const fxl_fraction_slot *s = &in->slots[i];
            if (s->number < in->current_number && (!anchor || s->number < anchor->number))
                anchor = s;
        }
    }
    if (!anchor)
        return 0;
    day_number(&cur_day, cur->treated_at);
    day_number(&anchor_day, anchor->treated_at);
    if (cur_day - anchor_day > in->interval_days) {
        char due[FXL_TIME_LEN];
        out->weekly_gap = 1;
        out->last_measured_number = anchor->measured ? anchor->number : 0;
        date_part(out->last_measured_date, anchor->treated_at);
        if (fxl_time_add_days(due, anchor->treated_at, in->interval_days) != 0)
            return FXL_EINVAL;
        date_part(out->due_date, due);
    }
    return 0;
}

int fxl_rule_due(fxl_rule_due_result *out, const fxl_required_input *in, const char *at)
{
    const fxl_fraction_slot *first = NULL, *anchor = NULL;
    long at_day, day;
    size_t i;

    memset(out, 0, sizeof *out);
    if (!in || (unsigned)in->policy > FXL_POLICY_EVERY || !at)
        return FXL_EINVAL;
    if (in->first_number < 1 || in->first_number > FXL_FRACTION_NUMBER_MAX)
        return FXL_EINVAL;
    if (in->policy == FXL_POLICY_WEEKLY && in->interval_days < 1)
        return FXL_EINVAL;
    if (in->n_slots > 0 && !in->slots)
        return FXL_EINVAL;
    if (day_number(&at_day, at) != 0)
        return FXL_EINVAL;
    for (i = 0; i < in->n_slots; i++)
        if (day_number(&day, in->slots[i].treated_at) != 0)
            return FXL_EINVAL;
    if (in->policy == FXL_POLICY_NONE)
        return 0;
    if (in->policy == FXL_POLICY_EVERY) {
        out->kind = FXL_RULE_DUE_EVERY;
        return 0;
    }
    if (in->current_number <= in->first_number) {
        out->kind = FXL_RULE_DUE_FIRST;
        return 0;
    }
    for (i = 0; i < in->n_slots; i++)
        if (in->slots[i].number == in->first_number)
            first = &in->slots[i];
    if (!first || !first->measured) {
        out->kind = FXL_RULE_DUE_FIRST;
        out->catch_up = 1;
        return 0;
    }
    if (in->policy == FXL_POLICY_FIRST)
        return 0;
    for (i = 0; i < in->n_slots; i++) {
        const fxl_fraction_slot *s = &in->slots[i];
        if (s->measured && s->number < in->current_number && (!anchor || s->number > anchor->number))
            anchor = s;
    }
    if (!anchor)
        return 0;  /* unreachable: the first fraction is measured */
    day_number(&day, anchor->treated_at);
    if (at_day - day >= in->interval_days) {
        char due[FXL_TIME_LEN];
        out->kind = FXL_RULE_DUE_WEEKLY;
        if (fxl_time_add_days(due, anchor->treated_at, in->interval_days) != 0)
            return FXL_EINVAL;
        date_part(out->due_date, due);
    }
    return 0;
}

/* ---- calibration expiry ----------------------------------------------------- */

int fxl_rule_calibration(fxl_calib_due_result *out, const char *valid_until, const char *now,
                         int due_days)
{
    char vu[FXL_TIME_LEN], nw[FXL_TIME_LEN];
    long vu_day, now_day;

    memset(out, 0, sizeof *out);
    if (due_days < 0 || !valid_until || !now || fxl_time_normalize(vu, valid_until, 0) != 0 ||
        fxl_time_normalize(nw, now, 0) != 0 || day_number(&vu_day, vu) != 0 ||
        day_number(&now_day, nw) != 0)
        return FXL_EINVAL;
    out->days_left = vu_day - now_day;
    /* Stored timestamps compare as strings. */
    if (strcmp(nw, vu) > 0) {
        out->state = FXL_CALIB_EXPIRED;
        snprintf(out->text, sizeof out->text, "expired on %.10s (%ld day%s ago)", vu,
                 -out->days_left, out->days_left == -1 ? "" : "s");
    } else if (out->days_left <= due_days) {
        out->state = FXL_CALIB_DUE;
        snprintf(out->text, sizeof out->text,
                 "valid until %.10s: due for recalibration within %d days (%ld day%s left)", vu,
                 due_days, out->days_left, out->days_left == 1 ? "" : "s");
    } else {
        out->state = FXL_CALIB_OK;
        snprintf(out->text, sizeof out->text, "valid until %.10s (%ld days left)", vu,
                 out->days_left);
    }
    return 0;
}

/* ---- accumulated dose ----------------------------------------------------- */

int fxl_rule_dose_limit(fxl_dose_limit_result *out, double accumulated_cgy, double limit_cgy)
{
    memset(out, 0, sizeof *out);
    out->fraction_of_limit = NAN;
    if (!isfinite(accumulated_cgy) || accumulated_cgy < 0)
        return FXL_EINVAL;
    if (!isfinite(limit_cgy) || limit_cgy <= 0) {
        snprintf(out->text, sizeof out->text, "%.1f cGy accumulated; no limit set",
                 accumulated_cgy);
        return 0;
    }
    out->fraction_of_limit = accumulated_cgy / limit_cgy;
    out->over = accumulated_cgy > limit_cgy;
    snprintf(out->text, sizeof out->text,
             "%.1f cGy accumulated since calibration %s the limit of %.1f cGy (%.0f %%)",
             accumulated_cgy, out->over ? "exceeds" : "is within", limit_cgy,
             out->fraction_of_limit * 100.0);
    return 0;
}

/* ---- tabular CUSUM ---------------------------------------------------------- */

int fxl_cusum(fxl_cusum_result *out, double *s_high, double *s_low, const double *dev_pct,
              size_t n, const fxl_cusum_params *p)
{
    double hi = 0.0, lo = 0.0;
    size_t i;

    memset(out, 0, sizeof *out);
    if (!p || !isfinite(p->target_pct) || !isfinite(p->k_pct) || !isfinite(p->h_pct) ||
        p->k_pct < 0 || p->h_pct <= 0 || (n > 0 && !dev_pct))
        return FXL_EINVAL;
    for (i = 0; i < n; i++)
        if (!isfinite(dev_pct[i]))
            return FXL_EINVAL;
    for (i = 0; i < n; i++) {
        /* Winsorized at mu_0 +/- h/2: one outlier alone never signals. */
        double y = fmin(fmax(dev_pct[i], p->target_pct - p->h_pct / 2.0),
                        p->target_pct + p->h_pct / 2.0);
        hi = fmax(0.0, hi + y - (p->target_pct + p->k_pct));
        lo = fmax(0.0, lo + (p->target_pct - p->k_pct) - y);
        if (s_high)
            s_high[i] = hi;
        if (s_low)
            s_low[i] = lo;
        if (!out->signal && (hi > p->h_pct || lo > p->h_pct)) {
            out->signal = hi > p->h_pct ? 1 : -1;
            out->signal_index = i;
            out->signal_value = hi > p->h_pct ? hi : lo;
        }
    }
    out->n = n;
    out->s_high = hi;
    out->s_low = lo;
    if (out->signal)
        snprintf(out->text, sizeof out->text,
                 "CUSUM of deviations drifted %s: C%c = %.2f %% > h = %.2f %% after %zu "
                 "measurement%s (target %.2f %%, k = %.2f %%)",
                 out->signal > 0 ? "upward (detector reads high)" : "downward (detector reads low)",
                 out->signal > 0 ? '+' : '-', out->signal_value, p->h_pct,
                 out->signal_index + 1, out->signal_index == 0 ? "" : "s", p->target_pct,
                 p->k_pct);
    else
        snprintf(out->text, sizeof out->text,
                 "CUSUM within h = %.2f %%: C+ = %.2f %%, C- = %.2f %% over %zu measurement%s",
                 p->h_pct, hi, lo, n, n == 1 ? "" : "s");
    return 0;
}

/* ---- individuals / moving range -------------------------------------------- */

/* SPC constants for moving ranges of two: 3 / d2 = 3 / 1.128 = 2.66 and
 * D4 = 3.267 (standard tables; Pawlicki et al., Med. Phys. 2005). */
#define IMR_E2 2.66
#define IMR_D4 3.267

int fxl_imr(fxl_imr_chart *out, const double *x, size_t n)
{
    double sum = 0.0, mr = 0.0;
    size_t i;

    memset(out, 0, sizeof *out);
    if (!x || n < 2)
        return FXL_EINVAL;
    for (i = 0; i < n; i++) {
        if (!isfinite(x[i]))
            return FXL_EINVAL;
        sum += x[i];
        if (i > 0)
            mr += fabs(x[i] - x[i - 1]);
    }
    out->n = n;
    out->mean = sum / (double)n;
    out->mr_mean = mr / (double)(n - 1);
    out->ucl = out->mean + IMR_E2 * out->mr_mean;
    out->lcl = out->mean - IMR_E2 * out->mr_mean;
    out->mr_ucl = IMR_D4 * out->mr_mean;
    for (i = 0; i < n; i++)
        if (x[i] > out->ucl || x[i] < out->lcl)
            out->n_beyond++;
    return 0;
}
