/* Rules over history after a fraction is logged: loads what the pure rules
 * in src/core/rules.c need (the plan's fractions and fields, the detectors'
 * calibrations, accumulated doses and deviations) and opens review items
 * for their hits inside the caller's transaction. Rules: docs/rules.md. */
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/drift.h"
#include "fxl/number.h"
#include "fxl/rules.h"
#include "store/grow.h"
#include "store/review_store.h"
#include "store/rule_state.h"
#include "store/rules_hook.h"
#include "store/stmt.h"

/* ---- settings ------------------------------------------------------------------ */

static int setting_number(fxl_ctx *ctx, double *out, const char *key, double fallback, double lo,
                          double hi, int whole, const char *unit)
{
    char text[64], *end = NULL;
    double v;
    int rc = fxl_setting_get(ctx, key, text, sizeof text);

    if (rc == FXL_ENOTFOUND || (rc == 0 && text[0] == '\0')) {
        *out = fallback;
        return 0;
    }
    if (rc != 0)
        return rc;
    (void)end;
    if (fxl_number_parse(&v, text, 0) != FXL_NUM_OK || (whole && v != floor(v)) ||
        v < lo || v > hi)
        return fxl_fail(ctx, FXL_EINVAL,
                        "setting '%s' value '%s' must be a %s %g to %g %s (see docs/rules.md)", key,
                        text, whole ? "whole number" : "number", lo, hi, unit);
    *out = v;
    return 0;
}

int fxl_rule_settings_load(fxl_ctx *ctx, fxl_rule_settings *out)
{
    double due, weekly, startup;
    int rc;

    if ((rc = setting_number(ctx, &due, "calibration_due_days", FXL_CALIBRATION_DUE_DAYS_DEFAULT,
                             0, 365, 1, "days")) != 0 ||
        (rc = setting_number(ctx, &weekly, "weekly_interval_days", FXL_WEEKLY_INTERVAL_DAYS_DEFAULT,
                             1, 60, 1, "days")) != 0 ||
        (rc = setting_number(ctx, &out->cusum_target_pct, "cusum_target_pct",
                             FXL_CUSUM_TARGET_PCT_DEFAULT, -20, 20, 0, "%")) != 0 ||
        (rc = setting_number(ctx, &out->cusum_k_sd, "cusum_k_sd", FXL_DRIFT_K_SIGMA_DEFAULT, 0, 3,
                             0, "spreads")) != 0 ||
        (rc = setting_number(ctx, &out->cusum_h_sd, "cusum_h_sd", FXL_DRIFT_H_SIGMA_DEFAULT, 1,
                             20, 0, "spreads")) != 0 ||
        (rc = setting_number(ctx, &startup, "cusum_startup", FXL_DRIFT_STARTUP_DEFAULT,
                             FXL_DRIFT_STARTUP_MIN, 100, 1, "results")) != 0)
        return rc;
    out->cusum_startup = (int)startup;
    out->calibration_due_days = (int)due;
    out->weekly_interval_days = (int)weekly;
    return 0;
}

/* ---- the fraction just logged --------------------------------------------------- */

typedef struct hook_fraction {
    int64_t id;
    int64_t plan_id;
    int64_t patient_id;
    int number;
    char treated_at[FXL_TIME_LEN];
    char plan[65];
    char mrn[65];
    int first_number;           /* the plan's first fraction (docs/rules.md) */
} hook_fraction;

static int load_fraction(fxl_ctx *ctx, hook_fraction *fr, int64_t fraction_id)
{
    fxl_stmt s = FXL_STMT_INIT;
    int64_t replaces;
    int rc, replaced_max, own_min;

    memset(fr, 0, sizeof *fr);
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT fr.id, fr.plan_id, pl.patient_id, fr.number, fr.treated_at, pl.label, p.mrn, "
            "       coalesce(pl.replaces_plan_id, 0), "
            "       coalesce((SELECT max(o.number) FROM fractions o "
            "                 WHERE o.plan_id = pl.replaces_plan_id), 0), "
            "       (SELECT min(o.number) FROM fractions o WHERE o.plan_id = pl.id) "
            "FROM fractions fr JOIN plans pl ON pl.id = fr.plan_id "
            "JOIN patients p ON p.id = pl.patient_id WHERE fr.id = :id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":id", fraction_id);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 0) {
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "internal: fraction #%lld does not exist",
                      (long long)fraction_id);
        goto cleanup;
    }
    fr->id = fxl_stmt_int(&s, 0);
    fr->plan_id = fxl_stmt_int(&s, 1);
    fr->patient_id = fxl_stmt_int(&s, 2);
    fr->number = (int)fxl_stmt_int(&s, 3);
    snprintf(fr->treated_at, sizeof fr->treated_at, "%s", fxl_stmt_text(&s, 4));
    snprintf(fr->plan, sizeof fr->plan, "%s", fxl_stmt_text(&s, 5));
    snprintf(fr->mrn, sizeof fr->mrn, "%s", fxl_stmt_text(&s, 6));
    replaces = fxl_stmt_int(&s, 7);
    replaced_max = (int)fxl_stmt_int(&s, 8);
    own_min = (int)fxl_stmt_int(&s, 9);
    /* A replacement plan whose numbering continues the replaced plan's starts
     * after its last fraction; one that restarts numbering starts at 1. */
    fr->first_number = (replaces && replaced_max > 0 && own_min > replaced_max) ? replaced_max + 1 : 1;
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* ---- required measurements ------------------------------------------------------ */

typedef struct slot_store {
    int number;
    char at[FXL_TIME_LEN];
    int measured;
} slot_store;

static int load_slots(fxl_ctx *ctx, slot_store **out, size_t *n, int64_t plan_id, int64_t field_id)
{
    fxl_stmt s = FXL_STMT_INIT;
    slot_store *list = NULL;
    size_t cap = 0, count = 0;
    int rc;

    *out = NULL;
    *n = 0;
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT fr.number, fr.treated_at, "
            "       EXISTS (SELECT 1 FROM measurements m WHERE m.fraction_id = fr.id "
            "               AND m.field_id = :field) "
            "FROM fractions fr WHERE fr.plan_id = :plan ORDER BY fr.number")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":field", field_id);
    fxl_stmt_bind_int(&s, ":plan", plan_id);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list,
                           "evaluating the rules over history")) != 0)
            goto cleanup;
        list[count].number = (int)fxl_stmt_int(&s, 0);
        snprintf(list[count].at, sizeof list[count].at, "%s", fxl_stmt_text(&s, 1));
        list[count].measured = (int)fxl_stmt_int(&s, 2);
        count++;
    }
    if (rc == 0) {
        *out = list;
        *n = count;
        list = NULL;
    }
cleanup:
    fxl_stmt_finalize(&s);
    free(list);
    return rc;
}

static int missing_for_field(fxl_ctx *ctx, const hook_fraction *fr, const fxl_rule_settings *rs,
                             int64_t field_id, const char *name, const char *point,
                             fxl_policy policy)
{
    slot_store *store = NULL;
    fxl_fraction_slot *slots = NULL;
    fxl_required_input in;
    fxl_required_result r;
    fxl_review_open_spec spec;
    char key[128], summary[720], subject[300];
    size_t n = 0, i;
    int rc;

    if ((rc = load_slots(ctx, &store, &n, fr->plan_id, field_id)) != 0)
        goto cleanup;
    slots = calloc(n ? n : 1, sizeof *slots);
    if (!slots) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory evaluating the rules over history");
        goto cleanup;
    }
    for (i = 0; i < n; i++) {
        slots[i].number = store[i].number;
        slots[i].treated_at = store[i].at;
        slots[i].measured = store[i].measured;
    }
    memset(&in, 0, sizeof in);
    in.policy = policy;
    in.first_number = fr->first_number;
    in.interval_days = rs->weekly_interval_days;
    in.slots = slots;
    in.n_slots = n;
    in.current_number = fr->number;
    if (fxl_rule_required(&r, &in) != 0) {
        rc = fxl_fail(ctx, FXL_EINVAL, "internal: the required-measurement rule refused fraction %d "
                      "of plan '%s'", fr->number, fr->plan);
        goto cleanup;
    }
    snprintf(subject, sizeof subject, "%s plan '%s', field %s %s", fr->mrn, fr->plan, name, point);
    memset(&spec, 0, sizeof spec);
    spec.rule = FXL_RULE_MISSING;
    spec.severity = FXL_RULE_MISSING_SEVERITY;
    spec.patient_id = fr->patient_id;
    spec.field_id = field_id;
    spec.rule_key = key;
    spec.summary = summary;
    for (i = 0; i < (size_t)r.n_missing; i++) {
        int num = r.missing[i];
        const char *why = policy == FXL_POLICY_EVERY ? "policy: every fraction"
                          : num == fr->first_number && fr->first_number > 1
                              ? "the first fraction after a plan change"
                              : "the plan's first fraction";
        snprintf(key, sizeof key, "field:%lld:fraction:%d", (long long)field_id, num);
        snprintf(summary, sizeof summary,
                 "%s: required measurement missing at fraction %d (%s); found when fraction %d "
                 "was logged", subject, num, why, fr->number);
        if ((rc = fxl_review_open_item(ctx, NULL, &spec)) != 0)
            goto cleanup;
    }
    if (r.weekly_gap) {
        snprintf(key, sizeof key, "field:%lld:due:%s", (long long)field_id, r.due_date);
        if (r.last_measured_number)
            snprintf(summary, sizeof summary,
                     "%s: weekly measurement missing: last measured at fraction %d on %s, due by "
                     "%s (every %d days); fraction %d treated on %.10s",
                     subject, r.last_measured_number, r.last_measured_date, r.due_date,
                     rs->weekly_interval_days, fr->number, fr->treated_at);
        else
            snprintf(summary, sizeof summary,
                     "%s: weekly measurement missing: not measured since treatment began on %s, "
                     "due by %s (every %d days); fraction %d treated on %.10s",
                     subject, r.last_measured_date, r.due_date, rs->weekly_interval_days,
                     fr->number, fr->treated_at);
        if ((rc = fxl_review_open_item(ctx, NULL, &spec)) != 0)
            goto cleanup;
    }
cleanup:
    free(store);
    free(slots);
    return rc;
}

static int rule_missing(fxl_ctx *ctx, const hook_fraction *fr, const fxl_rule_settings *rs)
{
    fxl_stmt s = FXL_STMT_INIT;
    struct { int64_t id; char name[65]; char point[16]; fxl_policy policy; } *fields = NULL;
    size_t cap = 0, n = 0, i;
    int rc;

    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT id, name, point, policy FROM fields WHERE plan_id = :plan "
            "AND policy <> 'none' ORDER BY id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":plan", fr->plan_id);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        if ((rc = fxl_grow(ctx, (void **)&fields, &cap, n, sizeof *fields,
                           "evaluating the rules over history")) != 0)
            goto cleanup;
        fields[n].id = fxl_stmt_int(&s, 0);
        snprintf(fields[n].name, sizeof fields[n].name, "%s", fxl_stmt_text(&s, 1));
        snprintf(fields[n].point, sizeof fields[n].point, "%s", fxl_stmt_text(&s, 2));
        if (fxl_policy_parse(&fields[n].policy, fxl_stmt_text(&s, 3)) != 0) {
            rc = fxl_fail(ctx, FXL_EINVAL, "field '%s' has an unknown measurement policy '%s'",
                          fields[n].name, fxl_stmt_text(&s, 3));
            goto cleanup;
        }
        n++;
    }
    if (rc < 0)
        goto cleanup;
    fxl_stmt_finalize(&s);
    for (i = 0; i < n; i++)
        if ((rc = missing_for_field(ctx, fr, rs, fields[i].id, fields[i].name, fields[i].point,
                                    fields[i].policy)) != 0)
            goto cleanup;
cleanup:
    fxl_stmt_finalize(&s);
    free(fields);
    return rc;
}

/* ---- detectors -------------------------------------------------------------------- */

typedef struct hook_detector {
    int64_t id;
    char serial[65];
    double dose_limit_cgy;      /* NaN: no limit */
} hook_detector;

/* Calibration due / expired for each beam and point this detector measured
 * in the fraction: the latest calibration for that beam and point. */
static int rule_calibration(fxl_ctx *ctx, const hook_fraction *fr, const hook_detector *d,
                            const fxl_rule_settings *rs, const char *now)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_review_open_spec spec;
    char key[64], summary[720];
    int rc;

    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT c.id, c.valid_until, b.name, c.point "
            "FROM (SELECT DISTINCT f.beam_id AS beam_id, f.point AS point FROM measurements m "
            "      JOIN fields f ON f.id = m.field_id "
            /* "+" keeps the detector's indexes out: the fraction's rows are
             * found through measurements_by_fraction, whatever the
             * detector's age (docs/performance.md; tests/cli/test_query_plans.py). */
            "      WHERE m.fraction_id = :fr AND +m.detector_id = :d) u "
            "JOIN calibrations c ON c.id = (SELECT c2.id FROM calibrations c2 "
            "     WHERE c2.detector_id = :d AND c2.beam_id = u.beam_id AND c2.point = u.point "
            "     ORDER BY c2.calibrated_at DESC, c2.id DESC LIMIT 1) "
            "JOIN beams b ON b.id = c.beam_id ORDER BY c.id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":fr", fr->id);
    fxl_stmt_bind_int(&s, ":d", d->id);
    memset(&spec, 0, sizeof spec);
    spec.detector_id = d->id;
    spec.rule_key = key;
    spec.summary = summary;
    while ((rc = fxl_stmt_step(&s)) == 1) {
        fxl_calib_due_result r;
        int64_t cid = fxl_stmt_int(&s, 0);
        if (fxl_rule_calibration(&r, fxl_stmt_text(&s, 1), now, rs->calibration_due_days) != 0) {
            rc = fxl_fail(ctx, FXL_EINVAL, "calibration #%lld has an unreadable valid-until '%s'",
                          (long long)cid, fxl_stmt_text(&s, 1));
            goto cleanup;
        }
        if (r.state == FXL_CALIB_OK)
            continue;
        snprintf(key, sizeof key, "calibration:%lld", (long long)cid);
        if (r.state == FXL_CALIB_EXPIRED) {
            spec.rule = FXL_RULE_CALIB_EXPIRED;
            spec.severity = FXL_RULE_CALIB_EXPIRED_SEVERITY;
            snprintf(summary, sizeof summary,
                     "detector %s: calibration #%lld (%s %s) %s; its readings are not evaluable "
                     "until it is recalibrated",
                     d->serial, (long long)cid, fxl_stmt_text(&s, 2), fxl_stmt_text(&s, 3), r.text);
        } else {
            spec.rule = FXL_RULE_CALIB_DUE;
            spec.severity = FXL_RULE_CALIB_DUE_SEVERITY;
            snprintf(summary, sizeof summary, "detector %s: calibration #%lld (%s %s) %s", d->serial,
                     (long long)cid, fxl_stmt_text(&s, 2), fxl_stmt_text(&s, 3), r.text);
        }
        if ((rc = fxl_review_open_item(ctx, NULL, &spec)) != 0)
            goto cleanup;
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc < 0 ? rc : 0;
}

/* Accumulated dose since the detector's latest calibration (any beam and
 * point; all time if never calibrated) against detectors.dose_limit_cgy. */
static int rule_dose_limit(fxl_ctx *ctx, const hook_detector *d)
{
    fxl_dose_limit_result r;
    fxl_review_open_spec spec;
    char key[96], summary[720], since[FXL_TIME_LEN] = "";
    int64_t cid = 0;
    double total;
    int rc;

    if (!isfinite(d->dose_limit_cgy))
        return 0;
    /* the sum kept and continued fraction by fraction (store/rule_state.h) */
    if ((rc = fxl_dose_since_calibration(ctx, d->id, &cid, since, &total)) != 0)
        return rc;
    if (fxl_rule_dose_limit(&r, total, d->dose_limit_cgy) != 0) {
        rc = fxl_fail(ctx, FXL_EINVAL, "internal: accumulated dose %g cGy of detector %s is not valid",
                      total, d->serial);
        goto cleanup;
    }
    if (!r.over)
        goto cleanup;
    snprintf(key, sizeof key, "detector:%lld:calibration:%lld", (long long)d->id, (long long)cid);
    if (cid)
        snprintf(summary, sizeof summary,
                 "detector %s: %s (calibration #%lld of %.10s); recalibrate: sensitivity changes "
                 "with accumulated dose", d->serial, r.text, (long long)cid, since);
    else
        snprintf(summary, sizeof summary,
                 "detector %s: %s (never calibrated); recalibrate: sensitivity changes with "
                 "accumulated dose", d->serial, r.text);
    memset(&spec, 0, sizeof spec);
    spec.rule = FXL_RULE_DOSE_LIMIT;
    spec.severity = FXL_RULE_DOSE_LIMIT_SEVERITY;
    spec.detector_id = d->id;
    spec.rule_key = key;
    spec.summary = summary;
    rc = fxl_review_open_item(ctx, NULL, &spec);
cleanup:
    return rc;
}

void fxl_drift_series_key(char *buf, size_t size, int64_t detector_id, int64_t beam_id,
                          const char *point)
{
    snprintf(buf, size, "detector:%lld:beam:%lld:point:%s", (long long)detector_id,
             (long long)beam_id, point ? point : "");
}

/* The restart point of a drift series: its latest calibration or the
 * latest close of a drift item on it, '' when neither. For one series
 * (all == 0) both halves are searches on an index (calibrations_by_detector
 * to its last column, review_items_by_rule_key on the key's prefix), so the
 * cost does not grow with the detector's history (docs/performance.md). */
static int drift_since(fxl_ctx *ctx, char since[FXL_TIME_LEN], int64_t detector_id,
                       int64_t beam_id, const char *point, int all)
{
    fxl_stmt s = FXL_STMT_INIT;
    char key[128];
    int rc;

    since[0] = '\0';
    fxl_drift_series_key(key, sizeof key, detector_id, beam_id, point);
    if (all)
        rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT coalesce(max(t), '') FROM ("
            "  SELECT max(calibrated_at) AS t FROM calibrations WHERE detector_id = :d "
            "  UNION ALL "
            "  SELECT max(e.created_at) FROM review_events e JOIN review_items i ON i.id = e.item_id "
            "  WHERE i.detector_id = :d AND i.rule = '" FXL_RULE_DRIFT "' AND e.kind = 'close')");
    else
        /* rule_key starts with key ':' exactly when key ':' <= rule_key <
         * key ';' (';' follows ':' in ASCII; text compares bytewise); the
         * substr test is kept, the range only lets the index find them. */
        rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT coalesce(max(t), '') FROM ("
            "  SELECT max(calibrated_at) AS t FROM calibrations WHERE detector_id = :d "
            "  AND beam_id = :b AND point = :p "
            "  UNION ALL "
            "  SELECT max(e.created_at) FROM review_events e JOIN review_items i ON i.id = e.item_id "
            "  WHERE i.detector_id = :d AND i.rule = '" FXL_RULE_DRIFT "' AND e.kind = 'close' "
            "  AND i.rule_key >= :key || ':' AND i.rule_key < :key || ';' "
            "  AND substr(i.rule_key, 1, length(:key) + 1) = :key || ':')");
    if (rc != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":d", detector_id);
    if (!all) {
        fxl_stmt_bind_int(&s, ":b", beam_id);
        fxl_stmt_bind_text(&s, ":p", point);
        fxl_stmt_bind_text(&s, ":key", key);
    }
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    snprintf(since, FXL_TIME_LEN, "%s", rc == 1 ? fxl_stmt_text(&s, 0) : "");
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_drift_series(fxl_ctx *ctx, fxl_drift_point **out, size_t *n, char since[FXL_TIME_LEN],
                     int64_t detector_id, int64_t beam_id, const char *point)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_drift_point *list = NULL;
    size_t cap = 0, count = 0;
    int rc, all = beam_id == 0 || !point;

    *out = NULL;
    *n = 0;
    if ((rc = drift_since(ctx, since, detector_id, beam_id, point, all)) != 0)
        goto cleanup;

    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT m.id, fr.number, fr.treated_at, p.mrn, f.name, m.verdict, m.deviation_pct "
            "FROM measurements m "
            "JOIN fractions fr ON fr.id = m.fraction_id "
            "JOIN fields f ON f.id = m.field_id "
            "JOIN plans pl ON pl.id = fr.plan_id "
            "JOIN patients p ON p.id = pl.patient_id "
            "WHERE m.detector_id = :d AND m.deviation_pct IS NOT NULL "
            "  AND m.verdict IN ('within_tolerance', 'outside_tolerance', 'outside_action') "
            "  AND m.gross = 0 "   /* a gross result has its own item; not a drift */
            "  AND (:all OR (f.beam_id = :b AND f.point = :p)) "
            "  AND NOT EXISTS (SELECT 1 FROM measurements n WHERE n.supersedes_id = m.id) "
            "  AND (:since = '' OR fr.treated_at > :since) "
            "  AND m.created_at > :since "  /* created_at >= treated_at: the index finds the rows */
            "ORDER BY fr.treated_at, m.id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":d", detector_id);
    fxl_stmt_bind_int(&s, ":all", all);
    fxl_stmt_bind_int(&s, ":b", beam_id);
    fxl_stmt_bind_text(&s, ":p", point ? point : "");
    fxl_stmt_bind_text(&s, ":since", since);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        fxl_drift_point *p;
        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list,
                           "reading a detector's deviations")) != 0)
            goto cleanup;
        p = &list[count++];
        memset(p, 0, sizeof *p);
        p->measurement_id = fxl_stmt_int(&s, 0);
        p->fraction_number = (int)fxl_stmt_int(&s, 1);
        snprintf(p->treated_at, sizeof p->treated_at, "%s", fxl_stmt_text(&s, 2));
        snprintf(p->mrn, sizeof p->mrn, "%s", fxl_stmt_text(&s, 3));
        snprintf(p->field, sizeof p->field, "%s", fxl_stmt_text(&s, 4));
        snprintf(p->verdict, sizeof p->verdict, "%s", fxl_stmt_text(&s, 5));
        p->deviation_pct = fxl_stmt_double(&s, 6);
    }
    if (rc == 0) {
        *out = list;
        *n = count;
        list = NULL;
    }
cleanup:
    fxl_stmt_finalize(&s);
    free(list);
    return rc;
}

/* The standardised CUSUM of one series (detector, beam, point); a signal
 * opens one item on the detector per series and restart point. */
static int drift_series_rule(fxl_ctx *ctx, const hook_detector *d, const fxl_rule_settings *rs,
                             int64_t beam_id, const char *beam, const char *point)
{
    fxl_drift_params p;
    fxl_drift_result r;
    fxl_review_open_spec spec;
    char since[FXL_TIME_LEN], series[128], key[200], summary[720];
    int rc;

    if ((rc = drift_since(ctx, since, d->id, beam_id, point, 0)) != 0)
        return rc;
    p.target_pct = rs->cusum_target_pct;
    p.k_sigma = rs->cusum_k_sd;
    p.h_sigma = rs->cusum_h_sd;
    p.startup = (size_t)rs->cusum_startup;
    /* the chart kept and continued fraction by fraction (store/rule_state.h) */
    rc = fxl_drift_chart(ctx, &r, d->id, beam_id, point, since, &p);
    if (rc == FXL_EINVAL)
        return fxl_fail(ctx, FXL_EINVAL, "setting 'cusum_h_sd' must be above 0 (see docs/rules.md)");
    if (rc != 0 || r.n == 0 || !r.signal)
        return rc;
    fxl_drift_series_key(series, sizeof series, d->id, beam_id, point);
    snprintf(key, sizeof key, "%s:since:%s", series, since[0] ? since : "start");
    snprintf(summary, sizeof summary, "detector %s, beam %s %s: %s, all patients since %s",
             d->serial, beam, point, r.text, since[0] ? since : "its first measurement");
    memset(&spec, 0, sizeof spec);
    spec.rule = FXL_RULE_DRIFT;
    spec.severity = FXL_RULE_DRIFT_SEVERITY;
    spec.detector_id = d->id;
    spec.rule_key = key;
    spec.summary = summary;
    return fxl_review_open_item(ctx, NULL, &spec);
}

/* Drift per detector, beam and measured point: one chart for each series
 * the detector measured in this fraction. Entrance and exit, or two beams,
 * do not share a spread (docs/rules.md). */
static int rule_drift(fxl_ctx *ctx, const hook_detector *d, const fxl_rule_settings *rs,
                      int64_t fraction_id)
{
    fxl_stmt s = FXL_STMT_INIT;
    struct { int64_t beam_id; char beam[98]; char point[16]; } series[64];
    size_t n = 0, i;
    int rc;

    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT DISTINCT f.beam_id, mc.name || ' ' || b.name, f.point FROM measurements m "
            "JOIN fields f ON f.id = m.field_id JOIN beams b ON b.id = f.beam_id "
            "JOIN machines mc ON mc.id = b.machine_id "
            /* the fraction's index, as in rule_calibration */
            "WHERE m.fraction_id = :fr AND +m.detector_id = :d ORDER BY f.beam_id, f.point")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":fr", fraction_id);
    fxl_stmt_bind_int(&s, ":d", d->id);
    while ((rc = fxl_stmt_step(&s)) == 1 && n < sizeof series / sizeof series[0]) {
        series[n].beam_id = fxl_stmt_int(&s, 0);
        snprintf(series[n].beam, sizeof series[n].beam, "%s", fxl_stmt_text(&s, 1));
        snprintf(series[n].point, sizeof series[n].point, "%s", fxl_stmt_text(&s, 2));
        n++;
    }
    if (rc < 0)
        goto cleanup;
    fxl_stmt_finalize(&s);
    for (i = 0; i < n; i++)
        if ((rc = drift_series_rule(ctx, d, rs, series[i].beam_id, series[i].beam,
                                    series[i].point)) != 0)
            goto cleanup;
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

static int load_detectors(fxl_ctx *ctx, hook_detector **out, size_t *n, int64_t fraction_id)
{
    fxl_stmt s = FXL_STMT_INIT;
    hook_detector *list = NULL;
    size_t cap = 0, count = 0;
    int rc;

    *out = NULL;
    *n = 0;
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT d.id, d.serial, d.dose_limit_cgy FROM detectors d WHERE d.id IN "
            "(SELECT detector_id FROM measurements WHERE fraction_id = :fr) ORDER BY d.id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":fr", fraction_id);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list,
                           "evaluating the rules over history")) != 0)
            goto cleanup;
        list[count].id = fxl_stmt_int(&s, 0);
        snprintf(list[count].serial, sizeof list[count].serial, "%s", fxl_stmt_text(&s, 1));
        list[count].dose_limit_cgy = fxl_stmt_double_opt(&s, 2);
        count++;
    }
    if (rc == 0) {
        *out = list;
        *n = count;
        list = NULL;
    }
cleanup:
    fxl_stmt_finalize(&s);
    free(list);
    return rc;
}

/* Amendments written into this fraction get their queue links. */
static int follow_amendments(fxl_ctx *ctx, int64_t fraction_id)
{
    fxl_stmt s = FXL_STMT_INIT;
    int64_t pairs[2 * 64];
    size_t n = 0, i;
    int rc;

    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT id, supersedes_id FROM measurements WHERE fraction_id = :fr "
            "AND supersedes_id IS NOT NULL ORDER BY id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":fr", fraction_id);
    while ((rc = fxl_stmt_step(&s)) == 1 && n < 64) {
        pairs[2 * n] = fxl_stmt_int(&s, 1);
        pairs[2 * n + 1] = fxl_stmt_int(&s, 0);
        n++;
    }
    if (rc < 0)
        goto cleanup;
    fxl_stmt_finalize(&s);
    for (i = 0; i < n; i++)
        if ((rc = fxl_review_follow_amendment(ctx, pairs[2 * i], pairs[2 * i + 1])) != 0)
            goto cleanup;
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_rules_after_record(fxl_ctx *ctx, int64_t fraction_id)
{
    fxl_rule_settings rs;
    hook_fraction fr;
    hook_detector *dets = NULL;
    char now[FXL_TIME_LEN];
    size_t n = 0, i;
    int rc;

    if ((rc = fxl_rule_settings_load(ctx, &rs)) != 0 ||
        (rc = load_fraction(ctx, &fr, fraction_id)) != 0 ||
        (rc = rule_missing(ctx, &fr, &rs)) != 0 ||
        (rc = load_detectors(ctx, &dets, &n, fraction_id)) != 0)
        goto cleanup;
    fxl_now(ctx, now);
    for (i = 0; i < n; i++) {
        if ((rc = rule_calibration(ctx, &fr, &dets[i], &rs, now)) != 0 ||
            (rc = rule_dose_limit(ctx, &dets[i])) != 0 ||
            (rc = rule_drift(ctx, &dets[i], &rs, fraction_id)) != 0)
            goto cleanup;
    }
    rc = follow_amendments(ctx, fraction_id);
cleanup:
    free(dets);
    return rc;
}
