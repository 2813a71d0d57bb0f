/* Reading back what the record path wrote: a patient's measurement history
 * with supersession marks, the plan and defaults the interactive prompt
 * offers, and the audit row of the alert hook's outcome. docs/record.md. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "store/audit.h"
#include "store/grow.h"
#include "store/record_int.h"
#include "store/stmt.h"

static void copy(char *dst, size_t size, const char *src)
{
    snprintf(dst, size, "%s", src ? src : "");
}

/* ---- history -------------------------------------------------------------------- */

static int check_exists(fxl_ctx *ctx, const char *sql, const char *name1, const char *v1,
                        int64_t pid, int *found)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc = fxl_stmt_prepare(&s, ctx, sql);

    if (rc == 0) {
        fxl_stmt_bind_text(&s, name1, v1);
        if (pid)
            fxl_stmt_bind_int(&s, ":pid", pid);
        rc = fxl_stmt_step(&s);
        if (rc >= 0) {
            *found = rc;
            rc = 0;
        }
    }
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_history_list(fxl_ctx *ctx, fxl_history_row **out, size_t *n, const fxl_history_query *q)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_history_row *list = NULL;
    rec_plan plan;
    size_t cap = 0, count = 0;
    int rc, found = 0, i;

    *out = NULL;
    *n = 0;
    if ((rc = fxl_require_role(ctx, FXL_ROLES_ANY, "listing measurements")) != 0)
        return rc;
    if (!q || !q->mrn)
        return fxl_fail(ctx, FXL_EINVAL, "a patient is required (--patient MRN)");
    /* The patient (and plan) must exist: an empty list must mean "nothing
     * measured", never "mistyped". */
    rc = rec_load_plan(ctx, &plan, q->mrn, q->plan);
    if (rc == FXL_ENOTFOUND && !q->plan && plan.patient_id)
        rc = 0;  /* a patient without plans has an empty history */
    if (rc != 0)
        return rc;
    if (q->field) {
        if (q->plan)
            rc = check_exists(ctx,
                              "SELECT 1 FROM fields f JOIN plans p ON p.id = f.plan_id "
                              "WHERE p.patient_id = :pid AND p.label = :plan AND f.name = :name",
                              ":name", q->field, plan.patient_id, &found);
        else
            rc = check_exists(ctx,
                              "SELECT 1 FROM fields f JOIN plans p ON p.id = f.plan_id "
                              "WHERE p.patient_id = :pid AND f.name = :name",
                              ":name", q->field, plan.patient_id, &found);
        if (rc != 0)
            return rc;
        if (!found)
            return fxl_fail(ctx, FXL_ENOTFOUND, "unknown field '%s' for patient '%s'%s%s%s", q->field,
                            q->mrn, q->plan ? " in plan '" : "", q->plan ? q->plan : "",
                            q->plan ? "'" : "");
    }

    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT m.id, f.id, f.number, p.label, f.treated_at, m.created_at, u.login, "
                               "fl.name, fl.point, d.serial, m.reading_unit, m.reading, m.temp_c, "
                               "m.temp_entered, coalesce(m.calibration_id, 0), m.factor_n, m.cf_field_size, "
                               "m.cf_ssd, m.cf_wedge, m.cf_tray, m.cf_angle, m.cf_temp, m.corrected_dose_cgy, "
                               "m.expected_dose_cgy, m.deviation_pct, coalesce(m.threshold_set_id, 0), "
                               "m.tolerance_pct, m.action_pct, m.floor_cgy, m.verdict, m.reasons, "
                               "coalesce(m.supersedes_id, 0), coalesce(m.amend_reason, ''), "
                               "coalesce((SELECT s.id FROM measurements s WHERE s.supersedes_id = m.id), 0), "
                               "m.cf_thickness, m.cf_sdd, m.background, m.gross "
                               "FROM measurements m JOIN fractions f ON f.id = m.fraction_id "
                               "JOIN plans p ON p.id = f.plan_id JOIN fields fl ON fl.id = m.field_id "
                               "JOIN detectors d ON d.id = m.detector_id JOIN users u ON u.id = m.user_id "
                               "WHERE p.patient_id = :pid AND (:plan IS NULL OR p.label = :plan) "
                               "AND (:field IS NULL OR fl.name = :field) "
                               "ORDER BY f.treated_at, f.number, fl.id, m.id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":pid", plan.patient_id);
    fxl_stmt_bind_text(&s, ":plan", q->plan);
    fxl_stmt_bind_text(&s, ":field", q->field);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        fxl_history_row *r;

        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list, "listing measurements")) != 0)
            goto cleanup;
        r = &list[count++];
        memset(r, 0, sizeof *r);
        r->measurement_id = fxl_stmt_int(&s, 0);
        r->fraction_id = fxl_stmt_int(&s, 1);
        r->fraction_number = (int)fxl_stmt_int(&s, 2);
        copy(r->plan, sizeof r->plan, fxl_stmt_text(&s, 3));
        copy(r->treated_at, sizeof r->treated_at, fxl_stmt_text(&s, 4));
        copy(r->recorded_at, sizeof r->recorded_at, fxl_stmt_text(&s, 5));
        copy(r->recorded_by, sizeof r->recorded_by, fxl_stmt_text(&s, 6));
        copy(r->field, sizeof r->field, fxl_stmt_text(&s, 7));
        copy(r->point, sizeof r->point, fxl_stmt_text(&s, 8));
        copy(r->detector, sizeof r->detector, fxl_stmt_text(&s, 9));
        copy(r->reading_unit, sizeof r->reading_unit, fxl_stmt_text(&s, 10));
        r->reading = fxl_stmt_double(&s, 11);
        r->temp_c = fxl_stmt_double(&s, 12);
        r->temp_entered = (int)fxl_stmt_int(&s, 13);
        r->calibration_id = fxl_stmt_int(&s, 14);
        r->factor_n = fxl_stmt_double_opt(&s, 15);
        for (i = 0; i <= FXL_CF_ANGLE; i++)
            r->cf[i] = fxl_stmt_double_opt(&s, 16 + i);
        r->cf_temp = fxl_stmt_double_opt(&s, 21);
        r->corrected_dose_cgy = fxl_stmt_double_opt(&s, 22);
        r->expected_dose_cgy = fxl_stmt_double_opt(&s, 23);
        r->deviation_pct = fxl_stmt_double_opt(&s, 24);
        r->threshold_set_id = fxl_stmt_int(&s, 25);
        r->tolerance_pct = fxl_stmt_double_opt(&s, 26);
        r->action_pct = fxl_stmt_double_opt(&s, 27);
        r->floor_cgy = fxl_stmt_double_opt(&s, 28);
        if (fxl_verdict_parse(&r->verdict, fxl_stmt_text(&s, 29)) != 0)
            r->verdict = FXL_VERDICT_NOT_EVALUABLE;
        rec_reasons_parse(&r->reasons, fxl_stmt_text(&s, 30));
        r->supersedes_id = fxl_stmt_int(&s, 31);
        copy(r->amend_reason, sizeof r->amend_reason, fxl_stmt_text(&s, 32));
        r->superseded_by = fxl_stmt_int(&s, 33);
        r->cf[FXL_CF_THICKNESS] = fxl_stmt_double_opt(&s, 34);
        r->cf[FXL_CF_SDD] = fxl_stmt_double_opt(&s, 35);
        r->background = fxl_stmt_double_opt(&s, 36);  /* NaN: row older than schema 5 */
        r->gross = (int)fxl_stmt_int(&s, 37);
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

/* ---- the interactive prompt's defaults ---------------------------------------------- */

void fxl_record_plan_release(fxl_record_plan *info)
{
    if (!info)
        return;
    free(info->fields);
    memset(info, 0, sizeof *info);
}

int fxl_record_plan_load(fxl_ctx *ctx, fxl_record_plan *out, const char *mrn,
                         const char *plan_label)
{
    fxl_stmt s = FXL_STMT_INIT;
    rec_plan plan;
    rec_settings settings;
    size_t cap = 0;
    int rc;

    memset(out, 0, sizeof *out);
    if ((rc = rec_load_plan(ctx, &plan, mrn, plan_label)) != 0 ||
        (rc = rec_load_settings(ctx, &settings)) != 0)
        return rc;
    out->patient_id = plan.patient_id;
    copy(out->mrn, sizeof out->mrn, plan.mrn);
    copy(out->patient_name, sizeof out->patient_name, plan.patient_name);
    out->plan_id = plan.plan_id;
    copy(out->plan, sizeof out->plan, plan.label);
    copy(out->site, sizeof out->site, plan.site);
    copy(out->technique, sizeof out->technique, plan.technique);
    out->fractions = plan.fractions;
    out->next_fraction = plan.highest_logged + 1;
    out->skin_temp_c = settings.skin_temp_c;

    /* The detector used last on each field of this plan, else "". */
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT fl.id, fl.name, fl.point, b.name, fl.mu, fl.expected_dose_cgy, "
                               "coalesce((SELECT d.serial FROM measurements m JOIN detectors d "
                               "ON d.id = m.detector_id WHERE m.field_id = fl.id "
                               "ORDER BY m.created_at DESC, m.id DESC LIMIT 1), '') "
                               "FROM fields fl JOIN beams b ON b.id = fl.beam_id "
                               "WHERE fl.plan_id = :plan ORDER BY fl.id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":plan", plan.plan_id);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        fxl_record_field_info *f;

        if ((rc = fxl_grow(ctx, (void **)&out->fields, &cap, out->n_fields, sizeof *out->fields,
                           "reading the plan")) != 0)
            goto cleanup;
        f = &out->fields[out->n_fields++];
        memset(f, 0, sizeof *f);
        f->field_id = fxl_stmt_int(&s, 0);
        copy(f->name, sizeof f->name, fxl_stmt_text(&s, 1));
        copy(f->point, sizeof f->point, fxl_stmt_text(&s, 2));
        copy(f->beam, sizeof f->beam, fxl_stmt_text(&s, 3));
        f->mu = fxl_stmt_double(&s, 4);
        f->expected_dose_cgy = fxl_stmt_double_opt(&s, 5);
        copy(f->last_detector, sizeof f->last_detector, fxl_stmt_text(&s, 6));
    }
    if (rc < 0)
        goto cleanup;
    fxl_stmt_finalize(&s);

    /* The patient's last detector on any plan. */
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT d.serial FROM measurements m JOIN detectors d ON d.id = m.detector_id "
                               "JOIN fractions f ON f.id = m.fraction_id JOIN plans p ON p.id = f.plan_id "
                               "WHERE p.patient_id = :pid ORDER BY m.created_at DESC, m.id DESC LIMIT 1")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":pid", plan.patient_id);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1)
        copy(out->last_detector, sizeof out->last_detector, fxl_stmt_text(&s, 0));
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    if (rc != 0)
        fxl_record_plan_release(out);
    return rc;
}

int fxl_record_detector_unit(fxl_ctx *ctx, char unit[8], const char *serial)
{
    int64_t id;
    return rec_find_detector(ctx, &id, unit, serial);
}

/* ---- the alert hook's outcome ----------------------------------------------------- */

const char *fxl_alert_outcome_name(fxl_alert_outcome o)
{
    switch (o) {
    case FXL_ALERT_OK: return "ok";
    case FXL_ALERT_FAILED: return "failed";
    case FXL_ALERT_TIMED_OUT: return "timed_out";
    case FXL_ALERT_NOT_STARTED: return "not_started";
    }
    return "unknown";
}

int fxl_record_alert_outcome(fxl_ctx *ctx, int64_t fraction_id, const char *command,
                             fxl_alert_outcome outcome, int exit_code, int n_action)
{
    cJSON *audit = NULL;
    int rc;

    if ((rc = fxl_require_role(ctx, FXL_ROLES_CLINICAL, "recording an alert")) != 0)
        return rc;
    audit = cJSON_CreateObject();
    if (!audit)
        return fxl_fail(ctx, FXL_EIO, "out of memory recording an alert");
    cJSON_AddStringToObject(audit, "command", command ? command : "");
    cJSON_AddStringToObject(audit, "outcome", fxl_alert_outcome_name(outcome));
    if (outcome == FXL_ALERT_FAILED) {
        if (exit_code < 0)
            cJSON_AddNumberToObject(audit, "signal", -exit_code);
        else
            cJSON_AddNumberToObject(audit, "exit_code", exit_code);
    }
    cJSON_AddNumberToObject(audit, "action_results", n_action);
    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    if ((rc = fxl_audit_append(ctx, "alert", "fractions", fraction_id, audit)) != 0)
        goto cleanup;
    rc = fxl_commit(ctx);
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    cJSON_Delete(audit);
    return rc;
}
