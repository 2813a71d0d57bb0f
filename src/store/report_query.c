/* Read-only SQL behind the PDF reports: each listing steps its statement and
 * hands one row at a time to a callback, so memory stays flat however large
 * the course or the month. Nothing here writes. */
#include "store/report_query.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

#include "store/stmt.h"

/* A measurement is current when no later row amends it. */
#define CURRENT_M "NOT EXISTS (SELECT 1 FROM measurements s WHERE s.supersedes_id = m.id)"
/* Verdicts that carry a deviation judged against levels. */
#define LEVEL_VERDICT "m.verdict IN ('within_tolerance', 'outside_tolerance', 'outside_action')"

int fxl_rq_snapshot_begin(fxl_ctx *ctx)
{
    /* BEGIN DEFERRED: the first SELECT starts a read transaction, no lock is
     * taken for writing. */
    return fxl_exec(ctx, "BEGIN");
}

void fxl_rq_snapshot_end(fxl_ctx *ctx)
{
    fxl_rollback(ctx);
}

/* ---- per patient ------------------------------------------------------- */

int fxl_rq_patient_get(fxl_ctx *ctx, const char *mrn, fxl_rq_patient_cb cb, void *arg)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_rq_patient p;
    int rc;

    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT id, mrn, family_name, given_name, coalesce(birth_date, '') "
                               "FROM patients WHERE mrn = :mrn")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":mrn", mrn);
    rc = fxl_stmt_step(&s);
    if (rc == 0) {
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "patient '%s' not found (see 'fxledger patient list')", mrn);
        goto cleanup;
    }
    if (rc < 0)
        goto cleanup;
    p.id = fxl_stmt_int(&s, 0);
    p.mrn = fxl_stmt_text(&s, 1);
    p.family_name = fxl_stmt_text(&s, 2);
    p.given_name = fxl_stmt_text(&s, 3);
    p.birth_date = fxl_stmt_text(&s, 4);
    rc = cb(arg, &p);
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_rq_patient_signatures_each(fxl_ctx *ctx, int64_t patient_id, fxl_rq_signature_cb cb,
                                   void *arg)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_rq_signature g;
    int rc;

    rc = fxl_stmt_prepare(&s, ctx,
        /* From the patient outwards (CROSS JOIN keeps that order): left
         * to itself SQLite starts from the signatures of one kind, all of
         * the database's (tests/cli/test_query_plans.py). */
        "SELECT 'review item #' || e.item_id, g.login, g.printed_name, g.signed_at, g.meaning, g.id "
        "FROM review_items i CROSS JOIN review_events e ON e.item_id = i.id "
        "CROSS JOIN signatures g ON g.entity = 'review_events' AND g.entity_id = e.id "
        "WHERE i.patient_id = :patient "
        "UNION ALL "
        "SELECT 'plan ' || p.label, g.login, g.printed_name, g.signed_at, g.meaning, g.id "
        "FROM plans p CROSS JOIN signatures g ON g.entity = 'plans' AND g.entity_id = p.id "
        "WHERE p.patient_id = :patient ORDER BY 4, 6");
    if (rc != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":patient", patient_id);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        g.subject = fxl_stmt_text(&s, 0);
        g.login = fxl_stmt_text(&s, 1);
        g.printed_name = fxl_stmt_text(&s, 2);
        g.signed_at = fxl_stmt_text(&s, 3);
        g.meaning = fxl_stmt_text(&s, 4);
        if ((rc = cb(arg, &g)) != 0)
            goto cleanup;
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc < 0 ? rc : 0;
}

int fxl_rq_plans_each(fxl_ctx *ctx, int64_t patient_id, const char *label,
                      fxl_rq_plan_cb cb, void *arg)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_rq_plan p;
    int rc, n = 0;

    rc = fxl_stmt_prepare(&s, ctx,
        "SELECT p.id, p.label, p.site, p.technique, p.fractions, p.dose_per_fraction_cgy, "
        "       p.created_at, coalesce(r.label, ''), "
        "       (SELECT count(*) FROM measurements m JOIN fractions f ON f.id = m.fraction_id "
        "         WHERE f.plan_id = p.id), "
        "       coalesce((SELECT min(f.treated_at) FROM fractions f "
        "         WHERE f.plan_id = p.id AND EXISTS (SELECT 1 FROM measurements m WHERE m.fraction_id = f.id)), ''), "
        "       coalesce((SELECT max(f.treated_at) FROM fractions f "
        "         WHERE f.plan_id = p.id AND EXISTS (SELECT 1 FROM measurements m WHERE m.fraction_id = f.id)), '') "
        "FROM plans p LEFT JOIN plans r ON r.id = p.replaces_plan_id "
        "WHERE p.patient_id = :patient AND (:label IS NULL OR p.label = :label) "
        "ORDER BY p.created_at, p.id");
    if (rc != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":patient", patient_id);
    fxl_stmt_bind_text(&s, ":label", label);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        p.id = fxl_stmt_int(&s, 0);
        p.label = fxl_stmt_text(&s, 1);
        p.site = fxl_stmt_text(&s, 2);
        p.technique = fxl_stmt_text(&s, 3);
        p.fractions = (int)fxl_stmt_int(&s, 4);
        p.dose_per_fraction_cgy = fxl_stmt_double_opt(&s, 5);
        p.created_at = fxl_stmt_text(&s, 6);
        p.replaces_label = fxl_stmt_text(&s, 7);
        p.measurement_count = fxl_stmt_int(&s, 8);
        p.first_treated_at = fxl_stmt_text(&s, 9);
        p.last_treated_at = fxl_stmt_text(&s, 10);
        n++;
        if ((rc = cb(arg, &p)) != 0)
            goto cleanup;
    }
    if (rc == 0 && n == 0 && label)
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "plan '%s' not found for this patient (see 'fxledger plan list')",
                      label);
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_rq_measurements_each(fxl_ctx *ctx, int64_t plan_id, fxl_rq_measurement_cb cb, void *arg)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_rq_measurement m;
    int rc;

    rc = fxl_stmt_prepare(&s, ctx,
        "SELECT m.id, f.treated_at, f.number, fl.id, fl.name, fl.point, d.label, d.serial, "
        "       m.reading, m.reading_unit, m.corrected_dose_cgy, m.expected_dose_cgy, "
        "       m.deviation_pct, m.tolerance_pct, m.action_pct, m.verdict, "
        "       (SELECT count(*) FROM review_items i WHERE i.measurement_id = m.id), "
        "       (SELECT count(*) FROM review_items i WHERE i.measurement_id = m.id "
        "         AND i.status <> 'closed'), "
        "       coalesce((SELECT e.disposition FROM review_events e "
        "         JOIN review_items i ON i.id = e.item_id "
        "         WHERE i.measurement_id = m.id AND e.kind = 'close' "
        "         ORDER BY e.created_at DESC, e.id DESC LIMIT 1), ''), "
        "       coalesce(m.supersedes_id, 0), "
        "       coalesce((SELECT s.id FROM measurements s WHERE s.supersedes_id = m.id), 0), "
        "       coalesce(m.amend_reason, ''), m.temp_c, m.temp_entered, m.reasons "
        "FROM measurements m "
        "JOIN fractions f ON f.id = m.fraction_id "
        "JOIN fields fl ON fl.id = m.field_id "
        "JOIN detectors d ON d.id = m.detector_id "
        "WHERE f.plan_id = :plan "
        "ORDER BY f.number, f.treated_at, fl.name, fl.point, m.id");
    if (rc != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":plan", plan_id);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        int64_t items = fxl_stmt_int(&s, 16), open = fxl_stmt_int(&s, 17);
        m.id = fxl_stmt_int(&s, 0);
        m.treated_at = fxl_stmt_text(&s, 1);
        m.fraction = (int)fxl_stmt_int(&s, 2);
        m.field_id = fxl_stmt_int(&s, 3);
        m.field = fxl_stmt_text(&s, 4);
        m.point = fxl_stmt_text(&s, 5);
        m.detector = fxl_stmt_text(&s, 6);
        m.detector_serial = fxl_stmt_text(&s, 7);
        m.reading = fxl_stmt_double_opt(&s, 8);
        m.reading_unit = fxl_stmt_text(&s, 9);
        m.corrected_dose_cgy = fxl_stmt_double_opt(&s, 10);
        m.expected_dose_cgy = fxl_stmt_double_opt(&s, 11);
        m.deviation_pct = fxl_stmt_double_opt(&s, 12);
        m.tolerance_pct = fxl_stmt_double_opt(&s, 13);
        m.action_pct = fxl_stmt_double_opt(&s, 14);
        m.verdict = fxl_stmt_text(&s, 15);
        m.review = items == 0 ? FXL_RQ_REVIEW_NONE
                   : open > 0 ? FXL_RQ_REVIEW_PENDING : FXL_RQ_REVIEW_CLOSED;
        m.disposition = fxl_stmt_text(&s, 18);
        m.supersedes_id = fxl_stmt_int(&s, 19);
        m.superseded_by = fxl_stmt_int(&s, 20);
        m.amend_reason = fxl_stmt_text(&s, 21);
        m.temp_c = fxl_stmt_double_opt(&s, 22);
        m.temp_assumed = fxl_stmt_int(&s, 23) == 0;
        m.reasons_json = fxl_stmt_text(&s, 24);
        if ((rc = cb(arg, &m)) != 0)
            goto cleanup;
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_rq_fields_each(fxl_ctx *ctx, int64_t plan_id, fxl_rq_field_cb cb, void *arg)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_rq_field f;
    int rc;

    rc = fxl_stmt_prepare(&s, ctx,
        "SELECT fl.id, fl.name, fl.point, mc.name, b.name, b.modality, b.energy, "
        "       (SELECT count(*) FROM measurements m WHERE m.field_id = fl.id AND " CURRENT_M "), "
        "       (SELECT count(*) FROM measurements m WHERE m.field_id = fl.id AND " CURRENT_M
        "         AND " LEVEL_VERDICT " AND m.deviation_pct IS NOT NULL), "
        "       (SELECT max(abs(m.deviation_pct)) FROM measurements m WHERE m.field_id = fl.id "
        "         AND " CURRENT_M " AND " LEVEL_VERDICT "), "
        "       coalesce((SELECT max(f.number) FROM measurements m "
        "         JOIN fractions f ON f.id = m.fraction_id "
        "         WHERE m.field_id = fl.id AND " CURRENT_M "), 0), "
        "       (SELECT m.tolerance_pct FROM measurements m WHERE m.field_id = fl.id AND " CURRENT_M
        "         AND " LEVEL_VERDICT " AND m.tolerance_pct IS NOT NULL "
        "         GROUP BY m.tolerance_pct, m.action_pct ORDER BY count(*) DESC, max(m.id) DESC LIMIT 1), "
        "       (SELECT m.action_pct FROM measurements m WHERE m.field_id = fl.id AND " CURRENT_M
        "         AND " LEVEL_VERDICT " AND m.tolerance_pct IS NOT NULL "
        "         GROUP BY m.tolerance_pct, m.action_pct ORDER BY count(*) DESC, max(m.id) DESC LIMIT 1), "
        "       (SELECT count(DISTINCT printf('%.6f/%.6f', m.tolerance_pct, m.action_pct)) "
        "         FROM measurements m WHERE m.field_id = fl.id AND " CURRENT_M
        "         AND " LEVEL_VERDICT " AND m.tolerance_pct IS NOT NULL) "
        "FROM fields fl JOIN beams b ON b.id = fl.beam_id JOIN machines mc ON mc.id = b.machine_id "
        "WHERE fl.plan_id = :plan ORDER BY fl.name, fl.point, fl.id");
    if (rc != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":plan", plan_id);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        f.id = fxl_stmt_int(&s, 0);
        f.name = fxl_stmt_text(&s, 1);
        f.point = fxl_stmt_text(&s, 2);
        f.machine = fxl_stmt_text(&s, 3);
        f.beam = fxl_stmt_text(&s, 4);
        f.modality = fxl_stmt_text(&s, 5);
        f.energy = fxl_stmt_double(&s, 6);
        f.measured = fxl_stmt_int(&s, 7);
        f.evaluable = fxl_stmt_int(&s, 8);
        f.max_abs_dev_pct = fxl_stmt_double_opt(&s, 9);
        f.max_fraction = (int)fxl_stmt_int(&s, 10);
        f.tolerance_pct = fxl_stmt_double_opt(&s, 11);
        f.action_pct = fxl_stmt_double_opt(&s, 12);
        f.level_variants = fxl_stmt_int(&s, 13);
        if ((rc = cb(arg, &f)) != 0)
            goto cleanup;
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_rq_field_points_each(fxl_ctx *ctx, int64_t field_id, fxl_rq_point_cb cb, void *arg)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_rq_point p;
    int rc;

    rc = fxl_stmt_prepare(&s, ctx,
        "SELECT f.number, m.deviation_pct, m.verdict "
        "FROM measurements m JOIN fractions f ON f.id = m.fraction_id "
        "WHERE m.field_id = :field AND " CURRENT_M " AND " LEVEL_VERDICT
        "  AND m.deviation_pct IS NOT NULL "
        "ORDER BY f.number, f.treated_at, m.id");
    if (rc != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":field", field_id);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        p.fraction = (int)fxl_stmt_int(&s, 0);
        p.deviation_pct = fxl_stmt_double(&s, 1);
        p.verdict = fxl_stmt_text(&s, 2);
        if ((rc = cb(arg, &p)) != 0)
            goto cleanup;
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* ---- corrections in force for a report's scope --------------------------- */

int fxl_rq_corrections_each(fxl_ctx *ctx, const fxl_rq_scope *scope, fxl_rq_correction_cb cb,
                            void *arg)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_rq_correction c;
    int rc;

    rc = fxl_stmt_prepare(&s, ctx,
        /* Two branches, not one OR across two tables: each finds its rows
         * through an index (plans by patient, fractions_by_time) instead of
         * reading every measurement of the database. */
        "WITH used AS (SELECT m.detector_id, fl.beam_id "
        "    FROM measurements m JOIN fractions f ON f.id = m.fraction_id "
        "    JOIN fields fl ON fl.id = m.field_id JOIN plans p ON p.id = f.plan_id "
        "    WHERE :patient > 0 AND p.patient_id = :patient AND (:plan <= 0 OR p.id = :plan) "
        "  UNION "
        "  SELECT m.detector_id, fl.beam_id "
        "    FROM measurements m JOIN fractions f ON f.id = m.fraction_id "
        "    JOIN fields fl ON fl.id = m.field_id "
        "    WHERE :patient <= 0 AND f.treated_at >= :from AND f.treated_at < :to), "
        "latest AS (SELECT ct.id FROM correction_tables ct JOIN used u "
        "    ON u.detector_id = ct.detector_id AND u.beam_id = ct.beam_id "
        "    WHERE ct.effective_from <= :asof AND NOT EXISTS (SELECT 1 FROM correction_tables c2 "
        "      WHERE c2.detector_id = ct.detector_id AND c2.beam_id = ct.beam_id "
        "        AND c2.parameter = ct.parameter AND c2.effective_from <= :asof "
        "        AND (c2.effective_from > ct.effective_from "
        "             OR (c2.effective_from = ct.effective_from AND c2.id > ct.id)))) "
        "SELECT d.label, d.serial, mc.name, b.name, ct.parameter, min(cp.x), max(cp.x), count(*), "
        "       ct.effective_from "
        "FROM latest l JOIN correction_tables ct ON ct.id = l.id "
        "JOIN correction_points cp ON cp.table_id = ct.id "
        "JOIN detectors d ON d.id = ct.detector_id JOIN beams b ON b.id = ct.beam_id "
        "JOIN machines mc ON mc.id = b.machine_id "
        "GROUP BY ct.id ORDER BY d.label, d.serial, mc.name, b.name, ct.parameter");
    if (rc != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":patient", scope->patient_id);
    fxl_stmt_bind_int(&s, ":plan", scope->plan_id);
    fxl_stmt_bind_text(&s, ":from", scope->from ? scope->from : "");
    fxl_stmt_bind_text(&s, ":to", scope->to ? scope->to : "");
    fxl_stmt_bind_text(&s, ":asof", scope->as_of);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        c.detector = fxl_stmt_text(&s, 0);
        c.detector_serial = fxl_stmt_text(&s, 1);
        c.machine = fxl_stmt_text(&s, 2);
        c.beam = fxl_stmt_text(&s, 3);
        c.parameter = fxl_stmt_text(&s, 4);
        c.x_min = fxl_stmt_double(&s, 5);
        c.x_max = fxl_stmt_double(&s, 6);
        c.points = fxl_stmt_int(&s, 7);
        c.effective_from = fxl_stmt_text(&s, 8);
        if ((rc = cb(arg, &c)) != 0)
            goto cleanup;
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* ---- per month ------------------------------------------------------------ */

int fxl_rq_month_cells(fxl_ctx *ctx, const char *from, const char *to)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    /* The month's rows are read once here rather than once per grouping
     * (four of them): on ten departments' database that was a third of the
     * monthly report (docs/performance.md, change 24). The cells are few
     * (sites x techniques x beams x detectors x verdicts that occur). */
    if ((rc = fxl_exec(ctx, "DROP TABLE IF EXISTS temp.rq_month_cells")) != 0 ||
        (rc = fxl_exec(ctx, "CREATE TEMP TABLE rq_month_cells (site TEXT, technique TEXT, "
                            "modality TEXT, energy REAL, label TEXT, serial TEXT, verdict TEXT, "
                            "n INTEGER NOT NULL)")) != 0)
        return rc;
    rc = fxl_stmt_prepare(&s, ctx,
        "INSERT INTO temp.rq_month_cells "
        "SELECT p.site, p.technique, b.modality, b.energy, d.label, d.serial, m.verdict, count(*) "
        "FROM measurements m JOIN fractions f ON f.id = m.fraction_id "
        "JOIN plans p ON p.id = f.plan_id JOIN fields fl ON fl.id = m.field_id "
        "JOIN beams b ON b.id = fl.beam_id JOIN detectors d ON d.id = m.detector_id "
        "WHERE f.treated_at >= :from AND f.treated_at < :to AND " CURRENT_M " "
        "GROUP BY 1, 2, 3, 4, 5, 6, 7");
    if (rc == 0) {
        fxl_stmt_bind_text(&s, ":from", from);
        fxl_stmt_bind_text(&s, ":to", to);
        rc = fxl_stmt_exec(&s);
    }
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_rq_month_counts_each(fxl_ctx *ctx, fxl_rq_grouping by, fxl_rq_count_cb cb, void *arg)
{
    static const char *const keys[] = {
        /* NONE */ "'', '', NULL",
        /* SITE_TECHNIQUE */ "site, technique, NULL",
        /* ENERGY */ "modality, '', energy",
        /* DETECTOR */ "label, serial, NULL"};
    char sql[400];
    fxl_stmt s = FXL_STMT_INIT;
    fxl_rq_count c;
    int rc;

    if ((int)by < 0 || (int)by > 3)
        return fxl_fail(ctx, FXL_EINVAL, "internal: unknown report grouping %d", (int)by);
    snprintf(sql, sizeof sql,
             "SELECT %s, verdict, sum(n) FROM temp.rq_month_cells "
             "GROUP BY 1, 2, 3, 4 ORDER BY 1, 3, 2, 4", keys[by]);
    if ((rc = fxl_stmt_prepare(&s, ctx, sql)) != 0)
        goto cleanup;
    while ((rc = fxl_stmt_step(&s)) == 1) {
        c.key1 = fxl_stmt_text(&s, 0);
        c.key2 = fxl_stmt_text(&s, 1);
        c.energy = fxl_stmt_double_opt(&s, 2);
        c.verdict = fxl_stmt_text(&s, 3);
        c.count = fxl_stmt_int(&s, 4);
        if ((rc = cb(arg, &c)) != 0)
            goto cleanup;
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_rq_month_levels_each(fxl_ctx *ctx, const char *from, const char *to,
                             fxl_rq_levels_cb cb, void *arg)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_rq_levels_used l;
    int rc;

    rc = fxl_stmt_prepare(&s, ctx,
        "SELECT m.tolerance_pct, m.action_pct, count(*) "
        "FROM measurements m JOIN fractions f ON f.id = m.fraction_id "
        "WHERE f.treated_at >= :from AND f.treated_at < :to AND " CURRENT_M " AND " LEVEL_VERDICT
        "  AND m.tolerance_pct IS NOT NULL AND m.action_pct IS NOT NULL "
        "GROUP BY 1, 2 ORDER BY 3 DESC, 1, 2");
    if (rc != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":from", from);
    fxl_stmt_bind_text(&s, ":to", to);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        l.tolerance_pct = fxl_stmt_double(&s, 0);
        l.action_pct = fxl_stmt_double(&s, 1);
        l.count = fxl_stmt_int(&s, 2);
        if ((rc = cb(arg, &l)) != 0)
            goto cleanup;
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_rq_month_deviations_each(fxl_ctx *ctx, const char *from, const char *to,
                                 fxl_rq_value_cb cb, void *arg)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    rc = fxl_stmt_prepare(&s, ctx,
        "SELECT m.deviation_pct FROM measurements m JOIN fractions f ON f.id = m.fraction_id "
        "WHERE f.treated_at >= :from AND f.treated_at < :to AND " CURRENT_M " AND " LEVEL_VERDICT
        "  AND m.deviation_pct IS NOT NULL");
    if (rc != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":from", from);
    fxl_stmt_bind_text(&s, ":to", to);
    while ((rc = fxl_stmt_step(&s)) == 1)
        if ((rc = cb(arg, fxl_stmt_double(&s, 0))) != 0)
            goto cleanup;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_rq_month_actions_each(fxl_ctx *ctx, const char *from, const char *to,
                              fxl_rq_action_cb cb, void *arg)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_rq_action_event e;
    int rc;

    rc = fxl_stmt_prepare(&s, ctx,
        "SELECT m.id, f.treated_at, pt.mrn, pt.family_name, pt.given_name, p.label, fl.name, "
        "       fl.point, m.deviation_pct, m.action_pct, "
        "       EXISTS (SELECT 1 FROM measurements s WHERE s.supersedes_id = m.id), "
        "       coalesce((SELECT min(i.opened_at) FROM review_items i WHERE i.measurement_id = m.id), ''), "
        "       coalesce(c.created_at, ''), coalesce(c.disposition, ''), coalesce(u.full_name, ''), "
        "       EXISTS (SELECT 1 FROM review_items i WHERE i.measurement_id = m.id "
        "               AND i.status <> 'closed') "
        "FROM measurements m JOIN fractions f ON f.id = m.fraction_id "
        "JOIN plans p ON p.id = f.plan_id JOIN patients pt ON pt.id = p.patient_id "
        "JOIN fields fl ON fl.id = m.field_id "
        "LEFT JOIN review_events c ON c.id = (SELECT e.id FROM review_events e "
        "    JOIN review_items i ON i.id = e.item_id WHERE i.measurement_id = m.id "
        "    AND e.kind = 'close' ORDER BY e.created_at DESC, e.id DESC LIMIT 1) "
        "LEFT JOIN users u ON u.id = c.user_id "
        "WHERE f.treated_at >= :from AND f.treated_at < :to AND m.verdict = 'outside_action' "
        "ORDER BY f.treated_at, m.id");
    if (rc != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":from", from);
    fxl_stmt_bind_text(&s, ":to", to);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        e.measurement_id = fxl_stmt_int(&s, 0);
        e.treated_at = fxl_stmt_text(&s, 1);
        e.mrn = fxl_stmt_text(&s, 2);
        e.family_name = fxl_stmt_text(&s, 3);
        e.given_name = fxl_stmt_text(&s, 4);
        e.plan = fxl_stmt_text(&s, 5);
        e.field = fxl_stmt_text(&s, 6);
        e.point = fxl_stmt_text(&s, 7);
        e.deviation_pct = fxl_stmt_double_opt(&s, 8);
        e.action_pct = fxl_stmt_double_opt(&s, 9);
        e.superseded = (int)fxl_stmt_int(&s, 10);
        e.opened_at = fxl_stmt_text(&s, 11);
        e.closed_at = fxl_stmt_text(&s, 12);
        e.disposition = fxl_stmt_text(&s, 13);
        e.reviewer = fxl_stmt_text(&s, 14);
        e.pending = (int)fxl_stmt_int(&s, 15);
        if ((rc = cb(arg, &e)) != 0)
            goto cleanup;
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_rq_queue_open_each(fxl_ctx *ctx, const char *as_of, fxl_rq_queue_cb cb, void *arg)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_rq_queue_item q;
    int rc;

    /* An item's state at :asof is its last event written (by id, the order
     * of the review actions, whatever the clock said) at or before :asof.
     * Its status column is its last event of all (sql/011), so an item
     * closed now with no event after :asof was closed then too: only the
     * items open now and those with a later event are looked at
     * (review_events_by_time, sql/013), not every item ever opened. */
    rc = fxl_stmt_prepare(&s, ctx,
        "SELECT id, rule, severity, summary, opened_at, mrn, last_kind, age FROM ("
        "  SELECT i.id, i.rule, i.severity, i.summary, i.opened_at, coalesce(pt.mrn, '') AS mrn, "
        "         coalesce((SELECT e.kind FROM review_events e WHERE e.item_id = i.id "
        "           AND e.created_at <= :asof ORDER BY e.id DESC LIMIT 1), '') "
        "           AS last_kind, "
        "         julianday(:asof) - julianday(i.opened_at) AS age "
        "  FROM review_items i LEFT JOIN patients pt ON pt.id = i.patient_id "
        "  WHERE i.opened_at <= :asof AND i.id IN ("
        "    SELECT c.id FROM review_items c WHERE c.status IN ('open', 'acknowledged') "
        "    UNION SELECT l.item_id FROM review_events l WHERE l.created_at > :asof)) "
        "WHERE last_kind <> 'close' ORDER BY opened_at, id");
    if (rc != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":asof", as_of);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        q.id = fxl_stmt_int(&s, 0);
        q.rule = fxl_stmt_text(&s, 1);
        q.severity = (int)fxl_stmt_int(&s, 2);
        q.summary = fxl_stmt_text(&s, 3);
        q.opened_at = fxl_stmt_text(&s, 4);
        q.mrn = fxl_stmt_text(&s, 5);
        q.last_event = fxl_stmt_text(&s, 6);
        q.age_days = fxl_stmt_double_opt(&s, 7);
        if ((rc = cb(arg, &q)) != 0)
            goto cleanup;
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

static void read_calibration(fxl_stmt *s, fxl_rq_calibration *c)
{
    c->detector = fxl_stmt_text(s, 0);
    c->detector_serial = fxl_stmt_text(s, 1);
    c->machine = fxl_stmt_text(s, 2);
    c->beam = fxl_stmt_text(s, 3);
    c->point = fxl_stmt_text(s, 4);
    c->calibrated_at = fxl_stmt_text(s, 5);
    c->valid_until = fxl_stmt_text(s, 6);
    c->factor_cgy_per_unit = fxl_stmt_double(s, 7);
    c->reading_unit = fxl_stmt_text(s, 8);
    c->by = fxl_stmt_text(s, 9);
    c->days_left = fxl_stmt_double_opt(s, 10);
}

#define CALIBRATION_COLUMNS                                                                  \
    "d.label, d.serial, mc.name, b.name, c.point, c.calibrated_at, c.valid_until, "        \
    "c.factor_cgy_per_unit, d.reading_unit, u.full_name, "                                  \
    "julianday(c.valid_until) - julianday(:asof) "
#define CALIBRATION_JOINS                                                                    \
    "JOIN detectors d ON d.id = c.detector_id JOIN beams b ON b.id = c.beam_id "            \
    "JOIN machines mc ON mc.id = b.machine_id JOIN users u ON u.id = c.user_id "

int fxl_rq_calibrations_done_each(fxl_ctx *ctx, const char *from, const char *to,
                                  const char *as_of, fxl_rq_calibration_cb cb, void *arg)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_rq_calibration c;
    int rc;

    rc = fxl_stmt_prepare(&s, ctx,
        "SELECT " CALIBRATION_COLUMNS "FROM calibrations c " CALIBRATION_JOINS
        "WHERE c.calibrated_at >= :from AND c.calibrated_at < :to "
        "ORDER BY c.calibrated_at, c.id");
    if (rc != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":from", from);
    fxl_stmt_bind_text(&s, ":to", to);
    fxl_stmt_bind_text(&s, ":asof", as_of);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        read_calibration(&s, &c);
        if ((rc = cb(arg, &c)) != 0)
            goto cleanup;
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* Status of a detector at :asof; no row means in service. */
#define STATUS_AT(det)                                                                      \
    "coalesce((SELECT ds.status FROM detector_status ds WHERE ds.detector_id = " det       \
    " AND ds.effective_at <= :asof ORDER BY ds.effective_at DESC, ds.id DESC LIMIT 1), "    \
    "'in_service')"

int fxl_rq_calibrations_due_each(fxl_ctx *ctx, const char *as_of, int due_days,
                                 fxl_rq_calibration_cb cb, void *arg)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_rq_calibration c;
    int rc;

    rc = fxl_stmt_prepare(&s, ctx,
        "SELECT " CALIBRATION_COLUMNS "FROM calibrations c " CALIBRATION_JOINS
        /* c is its series' latest calibration at :asof (the latest time,
         * then the highest id): one descending seek in
         * calibrations_by_detector per calibration. A NOT EXISTS of a later
         * one walked the series' earlier rows for each of them, quadratic
         * in a series' length (docs/performance.md, change 25). */
        "WHERE c.calibrated_at <= :asof "
        "  AND c.id = (SELECT c2.id FROM calibrations c2 WHERE c2.detector_id = c.detector_id "
        "    AND c2.beam_id = c.beam_id AND c2.point = c.point AND c2.calibrated_at <= :asof "
        "    ORDER BY c2.calibrated_at DESC, c2.id DESC LIMIT 1) "
        "  AND " STATUS_AT("c.detector_id") " <> 'retired' "
        "  AND julianday(c.valid_until) < julianday(:asof) + :days "
        "ORDER BY c.valid_until, d.label, mc.name, b.name, c.point");
    if (rc != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":asof", as_of);
    fxl_stmt_bind_int(&s, ":days", due_days);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        read_calibration(&s, &c);
        if ((rc = cb(arg, &c)) != 0)
            goto cleanup;
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_rq_detectors_near_limit_each(fxl_ctx *ctx, const char *as_of, double warn_fraction,
                                     fxl_rq_detector_dose_cb cb, void *arg)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_rq_detector_dose d;
    int rc;

    /* The accumulated dose is a correlated subquery (SQLite has no LATERAL).
     * Each detector's status and last calibration are found once, in d
     * (MATERIALIZED), and the sum then reads only the detector's rows since
     * that calibration: m.created_at > it bounds the index range, since a
     * row is written at or after its treatment time (created_at >=
     * treated_at). t is MATERIALIZED too: a flattened subquery would repeat
     * the sum in WHERE and ORDER BY. */
    rc = fxl_stmt_prepare(&s, ctx,
        "WITH d AS MATERIALIZED ("
        "  SELECT d.id, d.label, d.serial, d.kind, d.dose_limit_cgy AS lim, "
        "         " STATUS_AT("d.id") " AS status, "
        "         coalesce((SELECT max(c.calibrated_at) FROM calibrations c "
        "           WHERE c.detector_id = d.id AND c.calibrated_at <= :asof), '') AS last_cal "
        "  FROM detectors d WHERE d.dose_limit_cgy IS NOT NULL), "
        "t AS MATERIALIZED ("
        "  SELECT d.label, d.serial, d.kind, d.lim, d.status, d.last_cal, "
        "         coalesce((SELECT sum(m.corrected_dose_cgy) FROM measurements m "
        "           JOIN fractions f ON f.id = m.fraction_id "
        "           WHERE m.detector_id = d.id AND " CURRENT_M
        "             AND m.created_at > d.last_cal "
        "             AND f.treated_at <= :asof AND f.treated_at > d.last_cal), 0) AS acc "
        /* Retired detectors are left out (as for calibrations due): they
         * pile up over the years and their dose no longer matters. */
        "  FROM d WHERE d.status <> 'retired') "
        "SELECT label, serial, kind, status, last_cal, acc, lim FROM t "
        "WHERE acc >= lim * :warn ORDER BY acc / lim DESC, serial");
    if (rc != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":asof", as_of);
    fxl_stmt_bind_double(&s, ":warn", warn_fraction);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        d.detector = fxl_stmt_text(&s, 0);
        d.detector_serial = fxl_stmt_text(&s, 1);
        d.kind = fxl_stmt_text(&s, 2);
        d.status = fxl_stmt_text(&s, 3);
        d.last_calibrated_at = fxl_stmt_text(&s, 4);
        d.accumulated_cgy = fxl_stmt_double(&s, 5);
        d.limit_cgy = fxl_stmt_double(&s, 6);
        if ((rc = cb(arg, &d)) != 0)
            goto cleanup;
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_rq_review_events_each(fxl_ctx *ctx, int64_t plan_id, fxl_rq_event_cb cb, void *arg)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_rq_event e;
    int rc;

    /* Items about a measurement of the plan, or about one of its fields
     * (rules over history such as a missed measurement). */
    rc = fxl_stmt_prepare(&s, ctx,
        "SELECT e.id, i.id, coalesce(i.measurement_id, 0), i.rule, i.summary, e.kind, "
        "       coalesce(e.disposition, ''), coalesce(e.comment, ''), e.created_at, u.login, "
        "       u.full_name, u.role "
        "FROM review_events e JOIN review_items i ON i.id = e.item_id "
        "JOIN users u ON u.id = e.user_id "
        "WHERE i.measurement_id IN (SELECT m.id FROM measurements m "
        "                           JOIN fractions f ON f.id = m.fraction_id "
        "                           WHERE f.plan_id = :plan) "
        "   OR i.field_id IN (SELECT id FROM fields WHERE plan_id = :plan) "
        "ORDER BY i.id, e.id");
    if (rc != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":plan", plan_id);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        e.event_id = fxl_stmt_int(&s, 0);
        e.item_id = fxl_stmt_int(&s, 1);
        e.measurement_id = fxl_stmt_int(&s, 2);
        e.rule = fxl_stmt_text(&s, 3);
        e.summary = fxl_stmt_text(&s, 4);
        e.kind = fxl_stmt_text(&s, 5);
        e.disposition = fxl_stmt_text(&s, 6);
        e.comment = fxl_stmt_text(&s, 7);
        e.at = fxl_stmt_text(&s, 8);
        e.login = fxl_stmt_text(&s, 9);
        e.full_name = fxl_stmt_text(&s, 10);
        e.role = fxl_stmt_text(&s, 11);
        if ((rc = cb(arg, &e)) != 0)
            goto cleanup;
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}
