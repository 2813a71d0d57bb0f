/* The kept state of the rules over history (store/rule_state.h).
 *
 * A kept row says what a rule had counted as the measurements stood at its
 * through_id: every row with an id up to through_id that the rule counts,
 * with amendments up to through_id applied. The next fraction continues it
 * with the rows written since (ids above through_id, found by the primary
 * key: the fraction's own rows and whatever else was logged since) when
 * that gives exactly what reading every row again would give:
 *   - the rule counts from the same point (calibration; drift: restart
 *     point and settings);
 *   - no row written since amends a row of the detector already counted;
 *   - the new rows come after the counted ones in the rule's order (dose:
 *     created_at then id; drift: treatment time then id), so the same
 *     numbers are added in the same order (doubles to the bit).
 * Otherwise the rule reads every row again (the bounded queries of
 * docs/performance.md) and the kept row starts afresh. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "store/dose_counted.h"
#include "store/grow.h"
#include "store/rule_state.h"
#include "store/stmt.h"

/* No limit on the ids read: the rules in service see every row. */
#define ALL_IDS INT64_MAX

static int max_measurement_id(fxl_ctx *ctx, int64_t *out)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    *out = 0;
    if ((rc = fxl_stmt_prepare_cached(&s, ctx, "SELECT coalesce(max(id), 0) FROM measurements")) == 0 &&
        (rc = fxl_stmt_step(&s)) == 1) {
        *out = fxl_stmt_int(&s, 0);
        rc = 0;
    }
    fxl_stmt_finalize(&s);
    return rc < 0 ? rc : 0;
}

/* Whether a row written after through_id amends a row of the detector
 * written up to it (then a counted row may no longer count). */
static int amended_since(fxl_ctx *ctx, int *out, int64_t detector_id, int64_t through_id)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    *out = 1;
    /* the rows since through_id by the primary key; NOT INDEXED keeps the
     * detector's indexes (its whole history) out */
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT EXISTS (SELECT 1 FROM measurements s NOT INDEXED "
            "JOIN measurements o NOT INDEXED ON o.id = s.supersedes_id "
            "WHERE s.id > :through AND o.id <= :through AND o.detector_id = :d)")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":through", through_id);
    fxl_stmt_bind_int(&s, ":d", detector_id);
    if ((rc = fxl_stmt_step(&s)) == 1) {
        *out = (int)fxl_stmt_int(&s, 0);
        rc = 0;
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc < 0 ? rc : 0;
}

/* ---- the dose since the calibration ------------------------------------------------ */

typedef struct {
    double total;
    char last_created_at[FXL_TIME_LEN];
    int started;                  /* a row was read: last_created_at is set */
    int in_order;                 /* every row read came at or after `after` */
    const char *after;            /* the kept row's last created_at ('' when none) */
} dose_sum;

/* Adds the counted dose of each row of s (created_at, dose) in order. */
static int add_dose_rows(fxl_stmt *s, dose_sum *sum)
{
    int rc;

    while ((rc = fxl_stmt_step(s)) == 1) {
        const char *at = fxl_stmt_text(s, 0);
        if (!sum->started && sum->after && strcmp(at, sum->after) < 0)
            sum->in_order = 0;
        sum->total += fxl_stmt_double(s, 1);
        snprintf(sum->last_created_at, sizeof sum->last_created_at, "%s", at);
        sum->started = 1;
    }
    return rc;
}

/* Every counted row of the detector since cal_at, with ids and amendments
 * up to upto_id, in the rule's order. */
static int dose_read_all(fxl_ctx *ctx, dose_sum *sum, int64_t detector_id, const char *cal_at,
                         int64_t upto_id)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            /* A gross or implausible result (a unit slip can be a factor
             * 1000) adds the planned dose, the best estimate of what the
             * detector received; one without a dose adds nothing
             * (docs/rules.md). */
            /* the covering index (sql/014), named: for the order by
             * created_at and id SQLite would otherwise take the narrower
             * measurements_by_detector and read each row's page */
            "SELECT m.created_at, " FXL_SQL_DOSE_COUNTED("m") " FROM measurements m "
            "INDEXED BY measurements_by_detector_history "
            "JOIN fractions fr ON fr.id = m.fraction_id "
            "WHERE m.detector_id = :d AND m.corrected_dose_cgy IS NOT NULL "
            "AND +m.id <= :upto "
            "AND NOT EXISTS (SELECT 1 FROM measurements n WHERE n.supersedes_id = m.id AND +n.id <= :upto) "
            /* treated_at is NOT NULL, so any time is after '' (never
             * calibrated: all time counts) */
            "AND fr.treated_at > :cal "
            /* Same rows, found through the detector's history index: a row
             * is written at or after its treatment time (record refuses a
             * treatment time in the future), so created_at >= treated_at. */
            "AND m.created_at > :cal "
            "ORDER BY m.created_at, m.id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":d", detector_id);
    fxl_stmt_bind_int(&s, ":upto", upto_id);
    fxl_stmt_bind_text(&s, ":cal", cal_at);
    rc = add_dose_rows(&s, sum);
cleanup:
    fxl_stmt_finalize(&s);
    return rc < 0 ? rc : 0;
}

/* The counted rows of the detector written after through_id, in order. */
static int dose_read_since(fxl_ctx *ctx, dose_sum *sum, int64_t detector_id, const char *cal_at,
                           int64_t through_id)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            /* by the primary key: NOT INDEXED keeps the detector's and
             * the time indexes out, which would read the detector's or
             * everyone's history (tests/cli/test_query_plans.py) */
            "SELECT m.created_at, " FXL_SQL_DOSE_COUNTED("m") " FROM measurements m NOT INDEXED "
            "JOIN fractions fr ON fr.id = m.fraction_id "
            "WHERE m.id > :through AND m.detector_id = :d AND m.corrected_dose_cgy IS NOT NULL "
            "AND NOT EXISTS (SELECT 1 FROM measurements n WHERE n.supersedes_id = m.id) "
            "AND fr.treated_at > :cal AND m.created_at > :cal "
            "ORDER BY m.created_at, m.id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":through", through_id);
    fxl_stmt_bind_int(&s, ":d", detector_id);
    fxl_stmt_bind_text(&s, ":cal", cal_at);
    rc = add_dose_rows(&s, sum);
cleanup:
    fxl_stmt_finalize(&s);
    return rc < 0 ? rc : 0;
}

static int latest_calibration(fxl_ctx *ctx, int64_t detector_id, int64_t *cal_id,
                              char cal_at[FXL_TIME_LEN])
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    *cal_id = 0;
    cal_at[0] = '\0';
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT id, calibrated_at FROM calibrations WHERE detector_id = :d "
            "ORDER BY calibrated_at DESC, id DESC LIMIT 1")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":d", detector_id);
    if ((rc = fxl_stmt_step(&s)) == 1) {
        *cal_id = fxl_stmt_int(&s, 0);
        snprintf(cal_at, FXL_TIME_LEN, "%s", fxl_stmt_text(&s, 1));
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc < 0 ? rc : 0;
}

int fxl_dose_since_calibration(fxl_ctx *ctx, int64_t detector_id, int64_t *cal_id,
                               char cal_at[FXL_TIME_LEN], double *total)
{
    fxl_stmt s = FXL_STMT_INIT;
    dose_sum sum;
    char kept_at[FXL_TIME_LEN] = "";
    int64_t kept_cal = -1, through = 0, now_max = 0;
    int rc, amended = 1, kept = 0;

    *total = 0;
    memset(&sum, 0, sizeof sum);
    if ((rc = latest_calibration(ctx, detector_id, cal_id, cal_at)) != 0 ||
        (rc = max_measurement_id(ctx, &now_max)) != 0)
        return rc;
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT calibration_id, through_id, last_created_at, dose_cgy FROM dose_since_calibration "
            "WHERE detector_id = :d")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":d", detector_id);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1) {
        kept = 1;
        kept_cal = fxl_stmt_int(&s, 0);
        through = fxl_stmt_int(&s, 1);
        snprintf(kept_at, sizeof kept_at, "%s", fxl_stmt_text(&s, 2));
        sum.total = fxl_stmt_double(&s, 3);
    }
    fxl_stmt_finalize(&s);

    if (kept && kept_cal == *cal_id && (rc = amended_since(ctx, &amended, detector_id, through)) != 0)
        goto cleanup;
    if (kept && kept_cal == *cal_id && !amended) {
        /* continue the kept sum with the rows since */
        snprintf(sum.last_created_at, sizeof sum.last_created_at, "%s", kept_at);
        sum.after = kept_at;
        sum.in_order = 1;
        if ((rc = dose_read_since(ctx, &sum, detector_id, cal_at, through)) != 0)
            goto cleanup;
        kept = sum.in_order;
    } else {
        kept = 0;
    }
    if (!kept) {
        memset(&sum, 0, sizeof sum);
        if ((rc = dose_read_all(ctx, &sum, detector_id, cal_at, ALL_IDS)) != 0)
            goto cleanup;
    }
    *total = sum.total;

    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "INSERT INTO dose_since_calibration (detector_id, calibration_id, through_id, "
            "last_created_at, dose_cgy) VALUES (:d, :cal, :through, :last, :dose) "
            "ON CONFLICT (detector_id) DO UPDATE SET calibration_id = excluded.calibration_id, "
            "through_id = excluded.through_id, last_created_at = excluded.last_created_at, "
            "dose_cgy = excluded.dose_cgy")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":d", detector_id);
    fxl_stmt_bind_int(&s, ":cal", *cal_id);
    fxl_stmt_bind_int(&s, ":through", now_max);
    fxl_stmt_bind_text(&s, ":last", sum.last_created_at);
    fxl_stmt_bind_double(&s, ":dose", sum.total);
    rc = fxl_stmt_exec(&s);
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* ---- drift charts ------------------------------------------------------------------ */

typedef struct {
    double *dev;
    size_t n, cap;
    char last_treated_at[FXL_TIME_LEN];
    int in_order;                 /* every row read came at or after `after` */
    const char *after;
} drift_rows;

/* Collects the deviations of s (treated_at, deviation) in order. */
static int collect_drift_rows(fxl_ctx *ctx, fxl_stmt *s, drift_rows *rows)
{
    int rc;

    while ((rc = fxl_stmt_step(s)) == 1) {
        const char *at = fxl_stmt_text(s, 0);
        if (rows->n == 0 && rows->after && strcmp(at, rows->after) < 0)
            rows->in_order = 0;
        if ((rc = fxl_grow(ctx, (void **)&rows->dev, &rows->cap, rows->n, sizeof *rows->dev,
                           "reading a detector's deviations")) != 0)
            return rc;
        rows->dev[rows->n++] = fxl_stmt_double(s, 1);
        snprintf(rows->last_treated_at, sizeof rows->last_treated_at, "%s", at);
    }
    return rc < 0 ? rc : 0;
}

/* The deviations of one series since its restart point, with ids and
 * amendments up to upto_id, in the chart's order: the detector's rows
 * after `since` by its history index, then fractions and fields by key;
 * the deviation only (docs/performance.md, changes 7 and 18). */
static int drift_read_all(fxl_ctx *ctx, drift_rows *rows, int64_t detector_id, int64_t beam_id,
                          const char *point, const char *since, int64_t upto_id)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT fr.treated_at, m.deviation_pct "
            "FROM measurements m "
            "JOIN fractions fr ON fr.id = m.fraction_id "
            "JOIN fields f ON f.id = m.field_id "
            "WHERE m.detector_id = :d AND m.deviation_pct IS NOT NULL "
            "  AND m.verdict IN ('within_tolerance', 'outside_tolerance', 'outside_action') "
            "  AND m.gross = 0 "   /* a gross result has its own item; not a drift */
            "  AND f.beam_id = :b AND f.point = :p "
            "  AND +m.id <= :upto "
            "  AND NOT EXISTS (SELECT 1 FROM measurements n WHERE n.supersedes_id = m.id "
            "                  AND +n.id <= :upto) "
            "  AND (:since = '' OR fr.treated_at > :since) "
            "  AND m.created_at > :since "  /* created_at >= treated_at: the index finds the rows */
            "ORDER BY fr.treated_at, m.id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":d", detector_id);
    fxl_stmt_bind_int(&s, ":b", beam_id);
    fxl_stmt_bind_text(&s, ":p", point);
    fxl_stmt_bind_int(&s, ":upto", upto_id);
    fxl_stmt_bind_text(&s, ":since", since);
    rc = collect_drift_rows(ctx, &s, rows);
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* The series' deviations written after through_id, in the chart's order. */
static int drift_read_since(fxl_ctx *ctx, drift_rows *rows, int64_t detector_id, int64_t beam_id,
                            const char *point, const char *since, int64_t through_id)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT fr.treated_at, m.deviation_pct "
            /* by the primary key, as in dose_read_since */
            "FROM measurements m NOT INDEXED "
            "JOIN fractions fr ON fr.id = m.fraction_id "
            "JOIN fields f ON f.id = m.field_id "
            "WHERE m.id > :through AND m.detector_id = :d AND m.deviation_pct IS NOT NULL "
            "  AND m.verdict IN ('within_tolerance', 'outside_tolerance', 'outside_action') "
            "  AND m.gross = 0 "
            "  AND f.beam_id = :b AND f.point = :p "
            "  AND NOT EXISTS (SELECT 1 FROM measurements n WHERE n.supersedes_id = m.id) "
            "  AND (:since = '' OR fr.treated_at > :since) "
            "  AND m.created_at > :since "
            "ORDER BY fr.treated_at, m.id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":through", through_id);
    fxl_stmt_bind_int(&s, ":d", detector_id);
    fxl_stmt_bind_int(&s, ":b", beam_id);
    fxl_stmt_bind_text(&s, ":p", point);
    fxl_stmt_bind_text(&s, ":since", since);
    rc = collect_drift_rows(ctx, &s, rows);
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

static void drift_settings_text(char *buf, size_t size, const fxl_drift_params *p)
{
    /* %.17g: a double written and read back is the same double */
    snprintf(buf, size, "target %.17g k %.17g h %.17g startup %zu", p->target_pct, p->k_sigma,
             p->h_sigma, p->startup);
}

static void read_drift_state(fxl_stmt *s, int col, fxl_drift_state *st)
{
    st->n = (size_t)fxl_stmt_int(s, col);
    st->mr_sum = fxl_stmt_double(s, col + 1);
    st->last_pct = fxl_stmt_double(s, col + 2);
    st->sigma_pct = fxl_stmt_double_opt(s, col + 3);
    st->s_high = fxl_stmt_double(s, col + 4);
    st->s_low = fxl_stmt_double(s, col + 5);
    st->signal = (int)fxl_stmt_int(s, col + 6);
    st->signal_index = (size_t)fxl_stmt_int(s, col + 7);
    st->signal_value = fxl_stmt_double(s, col + 8);
}

int fxl_drift_chart(fxl_ctx *ctx, fxl_drift_result *r, int64_t detector_id, int64_t beam_id,
                    const char *point, const char *since, const fxl_drift_params *p)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_drift_state st = FXL_DRIFT_STATE_INIT;
    drift_rows rows;
    char settings[160], kept_last[FXL_TIME_LEN] = "";
    int64_t through = 0, now_max = 0;
    int rc, kept = 0, amended = 1;

    memset(r, 0, sizeof *r);
    r->sigma_pct = NAN;
    memset(&rows, 0, sizeof rows);
    drift_settings_text(settings, sizeof settings, p);
    if ((rc = max_measurement_id(ctx, &now_max)) != 0)
        return rc;
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT through_id, last_treated_at, n, mr_sum, last_pct, sigma_pct, s_high, s_low, "
            "signal, signal_index, signal_value FROM drift_charts "
            "WHERE detector_id = :d AND beam_id = :b AND point = :p AND since = :since "
            "AND settings = :settings")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":d", detector_id);
    fxl_stmt_bind_int(&s, ":b", beam_id);
    fxl_stmt_bind_text(&s, ":p", point);
    fxl_stmt_bind_text(&s, ":since", since);
    fxl_stmt_bind_text(&s, ":settings", settings);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1) {
        kept = 1;
        through = fxl_stmt_int(&s, 0);
        snprintf(kept_last, sizeof kept_last, "%s", fxl_stmt_text(&s, 1));
        read_drift_state(&s, 2, &st);
    }
    fxl_stmt_finalize(&s);

    if (kept && (rc = amended_since(ctx, &amended, detector_id, through)) != 0)
        goto cleanup;
    if (kept && !amended) {
        rows.after = kept_last;
        rows.in_order = 1;
        snprintf(rows.last_treated_at, sizeof rows.last_treated_at, "%s", kept_last);
        if ((rc = drift_read_since(ctx, &rows, detector_id, beam_id, point, since, through)) != 0)
            goto cleanup;
        kept = rows.in_order;
    } else {
        kept = 0;
    }
    if (!kept) {
        fxl_drift_state fresh = FXL_DRIFT_STATE_INIT;
        free(rows.dev);
        memset(&rows, 0, sizeof rows);
        st = fresh;
        if ((rc = drift_read_all(ctx, &rows, detector_id, beam_id, point, since, ALL_IDS)) != 0)
            goto cleanup;
    }
    /* as before the kept state: no result, no chart (and no check of the
     * settings, which only a chart uses) */
    if (st.n + rows.n > 0 && fxl_drift_cusum_continue(r, &st, rows.dev, rows.n, p) != 0) {
        rc = FXL_EINVAL;
        goto cleanup;
    }

    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "INSERT INTO drift_charts (detector_id, beam_id, point, since, settings, through_id, "
            "last_treated_at, n, mr_sum, last_pct, sigma_pct, s_high, s_low, signal, signal_index, "
            "signal_value) VALUES (:d, :b, :p, :since, :settings, :through, :last, :n, :mr, :x, "
            ":sigma, :hi, :lo, :signal, :si, :sv) "
            "ON CONFLICT (detector_id, beam_id, point) DO UPDATE SET since = excluded.since, "
            "settings = excluded.settings, through_id = excluded.through_id, "
            "last_treated_at = excluded.last_treated_at, n = excluded.n, mr_sum = excluded.mr_sum, "
            "last_pct = excluded.last_pct, sigma_pct = excluded.sigma_pct, s_high = excluded.s_high, "
            "s_low = excluded.s_low, signal = excluded.signal, signal_index = excluded.signal_index, "
            "signal_value = excluded.signal_value")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":d", detector_id);
    fxl_stmt_bind_int(&s, ":b", beam_id);
    fxl_stmt_bind_text(&s, ":p", point);
    fxl_stmt_bind_text(&s, ":since", since);
    fxl_stmt_bind_text(&s, ":settings", settings);
    fxl_stmt_bind_int(&s, ":through", now_max);
    fxl_stmt_bind_text(&s, ":last", rows.last_treated_at);
    fxl_stmt_bind_int(&s, ":n", (int64_t)st.n);
    fxl_stmt_bind_double(&s, ":mr", st.mr_sum);
    fxl_stmt_bind_double(&s, ":x", st.last_pct);
    fxl_stmt_bind_double_opt(&s, ":sigma", st.sigma_pct);
    fxl_stmt_bind_double(&s, ":hi", st.s_high);
    fxl_stmt_bind_double(&s, ":lo", st.s_low);
    fxl_stmt_bind_int(&s, ":signal", st.signal);
    fxl_stmt_bind_int(&s, ":si", (int64_t)st.signal_index);
    fxl_stmt_bind_double(&s, ":sv", st.signal_value);
    rc = fxl_stmt_exec(&s);
cleanup:
    fxl_stmt_finalize(&s);
    free(rows.dev);
    return rc;
}

/* ---- verify ------------------------------------------------------------------------- */

static int same_double(double a, double b)
{
    return (isnan(a) && isnan(b)) || memcmp(&a, &b, sizeof a) == 0;
}

static int verify_dose_rows(fxl_ctx *ctx, long long *checked, char *bad, size_t size)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    if ((rc = fxl_stmt_prepare(&s, ctx,
            "SELECT k.detector_id, k.calibration_id, coalesce(c.calibrated_at, ''), "
            "(k.calibration_id = 0 OR c.detector_id IS k.detector_id), k.through_id, "
            "k.last_created_at, k.dose_cgy FROM dose_since_calibration k "
            "LEFT JOIN calibrations c ON c.id = k.calibration_id ORDER BY k.detector_id")) != 0)
        goto cleanup;
    while ((rc = fxl_stmt_step(&s)) == 1) {
        dose_sum sum;
        int64_t det = fxl_stmt_int(&s, 0);
        memset(&sum, 0, sizeof sum);
        (*checked)++;
        if (!fxl_stmt_int(&s, 3)) {
            snprintf(bad, size, "dose since calibration of detector #%lld: calibration #%lld is not one "
                     "of the detector's", (long long)det, (long long)fxl_stmt_int(&s, 1));
            break;
        }
        if ((rc = dose_read_all(ctx, &sum, det, fxl_stmt_text(&s, 2), fxl_stmt_int(&s, 4))) != 0)
            goto cleanup;
        if (!same_double(sum.total, fxl_stmt_double(&s, 6)) ||
            strcmp(sum.last_created_at, fxl_stmt_text(&s, 5)) != 0) {
            snprintf(bad, size, "dose since calibration of detector #%lld: kept %.17g cGy, the "
                     "measurements give %.17g cGy", (long long)det, fxl_stmt_double(&s, 6), sum.total);
            break;
        }
    }
    if (rc >= 0)
        rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

static int verify_drift_rows(fxl_ctx *ctx, long long *checked, char *bad, size_t size)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    if ((rc = fxl_stmt_prepare(&s, ctx,
            "SELECT detector_id, beam_id, point, since, settings, through_id, last_treated_at, n, "
            "mr_sum, last_pct, sigma_pct, s_high, s_low, signal, signal_index, signal_value "
            "FROM drift_charts ORDER BY detector_id, beam_id, point")) != 0)
        goto cleanup;
    while ((rc = fxl_stmt_step(&s)) == 1) {
        fxl_drift_state kept, st = FXL_DRIFT_STATE_INIT;
        fxl_drift_params p;
        fxl_drift_result r;
        drift_rows rows;
        char check[160];
        int64_t det = fxl_stmt_int(&s, 0), beam = fxl_stmt_int(&s, 1);
        memset(&rows, 0, sizeof rows);
        (*checked)++;
        read_drift_state(&s, 7, &kept);
        if (sscanf(fxl_stmt_text(&s, 4), "target %lf k %lf h %lf startup %zu", &p.target_pct,
                   &p.k_sigma, &p.h_sigma, &p.startup) != 4) {
            snprintf(bad, size, "drift chart of detector #%lld, beam #%lld, %s: unreadable settings",
                     (long long)det, (long long)beam, fxl_stmt_text(&s, 2));
            break;
        }
        drift_settings_text(check, sizeof check, &p);
        if ((rc = drift_read_all(ctx, &rows, det, beam, fxl_stmt_text(&s, 2), fxl_stmt_text(&s, 3),
                                 fxl_stmt_int(&s, 5))) != 0)
            goto cleanup;
        if (rows.n > 0 && fxl_drift_cusum_continue(&r, &st, rows.dev, rows.n, &p) != 0)
            st.n = (size_t)-1;
        free(rows.dev);
        if (strcmp(check, fxl_stmt_text(&s, 4)) != 0 || st.n != kept.n ||
            !same_double(st.mr_sum, kept.mr_sum) || !same_double(st.last_pct, kept.last_pct) ||
            !same_double(st.sigma_pct, kept.sigma_pct) || !same_double(st.s_high, kept.s_high) ||
            !same_double(st.s_low, kept.s_low) || st.signal != kept.signal ||
            st.signal_index != kept.signal_index || !same_double(st.signal_value, kept.signal_value) ||
            strcmp(rows.last_treated_at, fxl_stmt_text(&s, 6)) != 0) {
            snprintf(bad, size, "drift chart of detector #%lld, beam #%lld, %s: the kept chart (%zu "
                     "results, C+ %.17g, C- %.17g) is not what the measurements give (%zu, %.17g, "
                     "%.17g)", (long long)det, (long long)beam, fxl_stmt_text(&s, 2), kept.n,
                     kept.s_high, kept.s_low, st.n, st.s_high, st.s_low);
            break;
        }
    }
    if (rc >= 0)
        rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_rule_state_verify(fxl_ctx *ctx, long long *checked, char *bad, size_t size)
{
    int rc;

    *checked = 0;
    bad[0] = '\0';
    if ((rc = verify_dose_rows(ctx, checked, bad, size)) != 0 || bad[0])
        return rc;
    return verify_drift_rows(ctx, checked, bad, size);
}
