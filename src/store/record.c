/* Logging a fraction and amending a reading: validation of every input
 * before anything is written, then ONE transaction with the fraction, the
 * measurements and their snapshots, review items, audit rows and the rules
 * over history. docs/record.md. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "store/audit.h"
#include "store/json_put.h"
#include "store/record_int.h"
#include "store/rules_hook.h"
#include "store/stmt.h"
#include "store/worklist_int.h"

void fxl_reading_entry_init(fxl_reading_entry *e)
{
    memset(e, 0, sizeof *e);
    e->reading = NAN;
    e->background = NAN;
    e->temp_c = NAN;
}

void fxl_amend_request_init(fxl_amend_request *r)
{
    memset(r, 0, sizeof *r);
    r->reading = NAN;
    r->background = NAN;
    r->temp_c = NAN;
}

void fxl_record_result_release(fxl_record_result *r)
{
    if (!r)
        return;
    free(r->items);
    free(r->missing);
    memset(r, 0, sizeof *r);
}

/* What validation settles for one reading before anything is loaded. */
typedef struct rec_entry {
    int64_t field_id;
    int64_t detector_id;
    char point[16];
    char unit[8];
    double temp_c;
    int temp_entered;
} rec_entry;

static const char *unit_or(const char *unit)
{
    return unit && *unit ? unit : "(detector units)";
}

/* The checks on the numbers of one reading, shared by record and amend. */
int rec_check_numbers(fxl_ctx *ctx, const char *field, double reading, double background,
                         double temp_c, const char *unit)
{
    if (!isfinite(reading))
        return fxl_fail(ctx, FXL_EINVAL, "reading for field '%s' is missing or not a number: must be > 0 %s",
                        field, unit_or(unit));
    if (!(reading > 0))
        return fxl_fail(ctx, FXL_EINVAL, "reading '%g' for field '%s' must be > 0 %s", reading, field,
                        unit_or(unit));
    if (!isnan(background) && (!isfinite(background) || background < 0 || background >= reading))
        return fxl_fail(ctx, FXL_EINVAL,
                        "background '%g' for field '%s' must be 0 or more and below the reading "
                        "(%g %s)",
                        background, field, reading, unit_or(unit));
    if (!isnan(temp_c) &&
        (!isfinite(temp_c) || temp_c < FXL_RECORD_TEMP_MIN_C || temp_c > FXL_RECORD_TEMP_MAX_C))
        return fxl_fail(ctx, FXL_EINVAL,
                        "temperature '%g' for field '%s' is out of range: must be %g to %g degC",
                        temp_c, field, FXL_RECORD_TEMP_MIN_C, FXL_RECORD_TEMP_MAX_C);
    return 0;
}

int rec_check_treated_at(fxl_ctx *ctx, char at[FXL_TIME_LEN], const char *given, const char *now)
{
    if (!given) {
        memcpy(at, now, FXL_TIME_LEN);
        return 0;
    }
    if (fxl_time_normalize(at, given, 0) != 0)
        return fxl_fail(ctx, FXL_EINVAL,
                        "treatment time '%s' is not valid: use YYYY-MM-DD or YYYY-MM-DDTHH:MM[:SS] (UTC)",
                        given);
    if (strcmp(at, now) > 0)
        return fxl_fail(ctx, FXL_EINVAL, "treatment time '%s' is in the future: must be %s or earlier",
                        given, now);
    return 0;
}

static int check_fraction_free(fxl_ctx *ctx, const rec_plan *plan, int number)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
                               "SELECT treated_at FROM fractions WHERE plan_id = :plan AND number = :n")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":plan", plan->plan_id);
    fxl_stmt_bind_int(&s, ":n", number);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1)
        rc = fxl_fail(ctx, FXL_ECONFLICT,
                      "fraction %d of plan '%s' is already logged (treated %s); correct a reading "
                      "with 'fxledger amend', or give the next fraction number (%d)",
                      number, plan->label, fxl_stmt_text(&s, 0), plan->highest_logged + 1);
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* The plan and the treatment time must fit what is already recorded: no
 * fraction on a plan that another plan had replaced by the treatment time (the
 * patient was then treated with the new plan, judged against its doses), and
 * fraction numbers in the order of their treatment times. Run before the
 * transaction and again inside it, where a plan imported meanwhile is seen
 * (docs/hazards.md). */
int rec_check_plan_and_time(fxl_ctx *ctx, const rec_plan *plan, int number, const char *at)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
                               "SELECT label, created_at FROM plans WHERE replaces_plan_id = :plan "
                               "AND created_at <= :at ORDER BY created_at LIMIT 1")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":plan", plan->plan_id);
    fxl_stmt_bind_text(&s, ":at", at);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1) {
        rc = fxl_fail(ctx, FXL_ECONFLICT,
                      "plan '%s' of patient '%s' was replaced by plan '%s' (imported %s) before the "
                      "treatment time %s; log the fraction against plan '%s'",
                      plan->label, plan->mrn, fxl_stmt_text(&s, 0), fxl_stmt_text(&s, 1), at,
                      fxl_stmt_text(&s, 0));
        goto cleanup;
    }
    fxl_stmt_finalize(&s);
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
                               "SELECT number, treated_at FROM fractions WHERE plan_id = :plan AND "
                               "((number < :n AND treated_at > :at) OR (number > :n AND treated_at < :at)) "
                               "ORDER BY number LIMIT 1")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":plan", plan->plan_id);
    fxl_stmt_bind_int(&s, ":n", number);
    fxl_stmt_bind_text(&s, ":at", at);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1)
        rc = fxl_fail(ctx, FXL_EINVAL,
                      "treatment time %s of fraction %d is out of order: fraction %d of plan '%s' was "
                      "treated %s; check the date, or the fraction number",
                      at, number, (int)fxl_stmt_int(&s, 0), plan->label, fxl_stmt_text(&s, 1));
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* ---- writing ------------------------------------------------------------------ */

/* The audit content of one measurement: the snapshot, as written. */
static cJSON *measurement_audit(const rec_inputs *in, int64_t fraction_id)
{
    const fxl_measurement_result *m = &in->m;
    cJSON *o = cJSON_CreateObject();
    int i;

    fxl_json_put_id(o, "fraction_id", fraction_id);
    cJSON_AddStringToObject(o, "field", m->field);
    cJSON_AddStringToObject(o, "point", m->point);
    cJSON_AddStringToObject(o, "detector", m->detector);
    fxl_json_put_number(o, "reading", m->reading);
    cJSON_AddStringToObject(o, "reading_unit", m->reading_unit);
    fxl_json_put_number(o, "background", m->background);
    fxl_json_put_number(o, "temp_c", m->temp_c);
    cJSON_AddBoolToObject(o, "temp_entered", m->temp_entered);
    fxl_json_put_id(o, "calibration_id", m->calibration_id);
    fxl_json_put_number(o, "factor_n", m->factor_n);
    for (i = 0; i < FXL_CF_COUNT; i++) {
        char key[32];
        snprintf(key, sizeof key, "cf_%s", fxl_cf_name((fxl_cf_param)i));
        fxl_json_put_number(o, key, m->cf[i]);
    }
    fxl_json_put_number(o, "cf_temp", m->cf_temp);
    fxl_json_put_number(o, "corrected_dose_cgy", m->corrected_dose_cgy);
    fxl_json_put_number(o, "expected_dose_cgy", m->expected_dose_cgy);
    fxl_json_put_number(o, "deviation_pct", m->deviation_pct);
    fxl_json_put_id(o, "threshold_set_id", m->threshold_set_id);
    cJSON_AddStringToObject(o, "verdict", fxl_verdict_name(m->verdict));
    cJSON_AddBoolToObject(o, "escalated", m->escalated);
    cJSON_AddBoolToObject(o, "gross", m->gross);
    cJSON_AddItemToObject(o, "reasons", rec_reasons_json(&m->reasons));
    if (m->supersedes_id) {
        fxl_json_put_id(o, "supersedes_id", m->supersedes_id);
        cJSON_AddStringToObject(o, "amend_reason", m->amend_reason);
    }
    return o;
}

int rec_insert_measurement(fxl_ctx *ctx, rec_inputs *in, int64_t fraction_id, const char *now)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_measurement_result *m = &in->m;
    cJSON *reasons = NULL;
    char *reasons_text = NULL;
    int rc;

    reasons = rec_reasons_json(&m->reasons);
    reasons_text = reasons ? cJSON_PrintUnformatted(reasons) : NULL;
    if (!reasons_text) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory writing a measurement");
        goto cleanup;
    }
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
                               "INSERT INTO measurements (fraction_id, field_id, detector_id, reading, "
                               "reading_unit, temp_c, temp_entered, calibration_id, factor_n, cf_field_size, "
                               "cf_ssd, cf_wedge, cf_tray, cf_angle, cf_temp, corrected_dose_cgy, "
                               "expected_dose_cgy, deviation_pct, threshold_set_id, tolerance_pct, action_pct, "
                               "floor_cgy, verdict, reasons, supersedes_id, amend_reason, user_id, created_at, "
                               "background, cf_thickness, cf_sdd, gross) "
                               "VALUES (:fraction, :field, :detector, :reading, :unit, :temp, :temp_entered, "
                               ":calibration, :n, :cf_fs, :cf_ssd, :cf_wedge, :cf_tray, :cf_angle, :cf_temp, "
                               ":dose, :expected, :deviation, :set, :tol, :action, :floor, :verdict, "
                               ":reasons, :supersedes, :amend_reason, :user, :now, :background, "
                               ":cf_thickness, :cf_sdd, :gross)")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":fraction", fraction_id);
    fxl_stmt_bind_int(&s, ":field", m->field_id);
    fxl_stmt_bind_int(&s, ":detector", in->detector_id);
    fxl_stmt_bind_double(&s, ":reading", m->reading);
    fxl_stmt_bind_text(&s, ":unit", m->reading_unit);
    fxl_stmt_bind_double(&s, ":temp", m->temp_c);
    fxl_stmt_bind_int(&s, ":temp_entered", m->temp_entered);
    if (m->calibration_id)
        fxl_stmt_bind_int(&s, ":calibration", m->calibration_id);
    else
        fxl_stmt_bind_null(&s, ":calibration");
    fxl_stmt_bind_double_opt(&s, ":n", m->factor_n);
    fxl_stmt_bind_double_opt(&s, ":cf_fs", m->cf[FXL_CF_FIELD_SIZE]);
    fxl_stmt_bind_double_opt(&s, ":cf_ssd", m->cf[FXL_CF_SSD]);
    fxl_stmt_bind_double_opt(&s, ":cf_wedge", m->cf[FXL_CF_WEDGE]);
    fxl_stmt_bind_double_opt(&s, ":cf_tray", m->cf[FXL_CF_TRAY]);
    fxl_stmt_bind_double_opt(&s, ":cf_angle", m->cf[FXL_CF_ANGLE]);
    fxl_stmt_bind_double_opt(&s, ":cf_thickness", m->cf[FXL_CF_THICKNESS]);
    fxl_stmt_bind_double_opt(&s, ":cf_sdd", m->cf[FXL_CF_SDD]);
    fxl_stmt_bind_double(&s, ":background", m->background);
    fxl_stmt_bind_int(&s, ":gross", m->gross ? 1 : 0);
    fxl_stmt_bind_double_opt(&s, ":cf_temp", m->cf_temp);
    fxl_stmt_bind_double_opt(&s, ":dose", m->corrected_dose_cgy);
    fxl_stmt_bind_double_opt(&s, ":expected", m->expected_dose_cgy);
    fxl_stmt_bind_double_opt(&s, ":deviation", m->deviation_pct);
    if (m->threshold_set_id) {
        fxl_stmt_bind_int(&s, ":set", m->threshold_set_id);
        fxl_stmt_bind_double_opt(&s, ":tol", m->levels.tolerance_pct);
        fxl_stmt_bind_double_opt(&s, ":action", m->levels.action_pct);
        fxl_stmt_bind_double_opt(&s, ":floor", m->levels.floor_cgy);
    } else {
        fxl_stmt_bind_null(&s, ":set");
        fxl_stmt_bind_null(&s, ":tol");
        fxl_stmt_bind_null(&s, ":action");
        fxl_stmt_bind_null(&s, ":floor");
    }
    fxl_stmt_bind_text(&s, ":verdict", fxl_verdict_name(m->verdict));
    fxl_stmt_bind_text(&s, ":reasons", reasons_text);
    if (m->supersedes_id) {
        fxl_stmt_bind_int(&s, ":supersedes", m->supersedes_id);
        fxl_stmt_bind_text(&s, ":amend_reason", m->amend_reason);
    } else {
        fxl_stmt_bind_null(&s, ":supersedes");
        fxl_stmt_bind_null(&s, ":amend_reason");
    }
    fxl_stmt_bind_int(&s, ":user", fxl_user_id(ctx));
    fxl_stmt_bind_text(&s, ":now", now);
    if ((rc = fxl_stmt_exec(&s)) != 0)
        goto cleanup;
    m->measurement_id = sqlite3_last_insert_rowid(ctx->db);
    cJSON_Delete(reasons);
    reasons = measurement_audit(in, fraction_id);
    rc = fxl_audit_append(ctx, m->supersedes_id ? "amend" : "record", "measurements",
                          m->measurement_id, reasons);
cleanup:
    fxl_stmt_finalize(&s);
    cJSON_Delete(reasons);
    free(reasons_text);
    return rc;
}

/* Review severity per verdict (docs/record.md); 0 = no item. */
static int severity_of(fxl_verdict v)
{
    switch (v) {
    case FXL_VERDICT_OUTSIDE_ACTION: return 4;
    case FXL_VERDICT_IMPLAUSIBLE: return 3;
    case FXL_VERDICT_NOT_EVALUABLE: return 3;
    case FXL_VERDICT_OUTSIDE_TOLERANCE: return 2;
    case FXL_VERDICT_WITHIN: return 0;
    }
    return 3;  /* an unknown verdict is never a pass */
}

int rec_open_review_item(fxl_ctx *ctx, rec_inputs *in, const rec_plan *plan, int number,
                            const char *now)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_measurement_result *m = &in->m;
    cJSON *audit = NULL;
    char summary[720], what[240];
    int severity = severity_of(m->verdict), rc;

    if (!severity)
        return 0;
    if (isfinite(m->deviation_pct) && (m->verdict == FXL_VERDICT_OUTSIDE_ACTION ||
                                       m->verdict == FXL_VERDICT_OUTSIDE_TOLERANCE ||
                                       m->verdict == FXL_VERDICT_IMPLAUSIBLE))
        snprintf(what, sizeof what, "%s, deviation %+.2f %%%s", fxl_verdict_label(m->verdict),
                 m->deviation_pct,
                 m->gross ? " (gross deviation: re-read, unit check, hold treatment)"
                 : m->escalated ? " (second in a row, escalated)" : "");
    else
        snprintf(what, sizeof what, "%s: %.180s", fxl_verdict_label(m->verdict),
                 m->reasons.n ? m->reasons.text[0] : "no reason given");
    snprintf(summary, sizeof summary, "%s%s plan '%s' fraction %d, field %s %s, detector %s: %s",
             m->supersedes_id ? "amended reading: " : "", plan->mrn, plan->label, number, m->field,
             m->point, m->detector, what);

    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
                               "INSERT INTO review_items (rule, severity, status, measurement_id, "
                               "patient_id, detector_id, field_id, summary, opened_at) VALUES ('result', "
                               ":severity, 'open', :m, :patient, :detector, :field, :summary, :now)")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":severity", severity);
    fxl_stmt_bind_int(&s, ":m", m->measurement_id);
    fxl_stmt_bind_int(&s, ":patient", plan->patient_id);
    fxl_stmt_bind_int(&s, ":detector", in->detector_id);
    fxl_stmt_bind_int(&s, ":field", m->field_id);
    fxl_stmt_bind_text(&s, ":summary", summary);
    fxl_stmt_bind_text(&s, ":now", now);
    if ((rc = fxl_stmt_exec(&s)) != 0)
        goto cleanup;
    m->review_item_id = sqlite3_last_insert_rowid(ctx->db);
    fxl_stmt_finalize(&s);
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
                               "INSERT INTO review_events (item_id, kind, user_id, created_at) "
                               "VALUES (:item, 'open', :user, :now)")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":item", m->review_item_id);
    fxl_stmt_bind_int(&s, ":user", fxl_user_id(ctx));
    fxl_stmt_bind_text(&s, ":now", now);
    if ((rc = fxl_stmt_exec(&s)) != 0)
        goto cleanup;
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "rule", "result");
    cJSON_AddNumberToObject(audit, "severity", severity);
    cJSON_AddNumberToObject(audit, "measurement_id", (double)m->measurement_id);
    cJSON_AddStringToObject(audit, "summary", summary);
    rc = fxl_audit_append(ctx, "open", "review_items", m->review_item_id, audit);
cleanup:
    fxl_stmt_finalize(&s);
    cJSON_Delete(audit);
    return rc;
}

void rec_fill_header(fxl_record_result *out, const rec_plan *plan, int64_t fraction_id,
                        int number, const char *at, const char *now, const char *login)
{
    out->fraction_id = fraction_id;
    out->fraction_number = number;
    out->plan_fractions = plan->fractions;
    out->patient_id = plan->patient_id;
    snprintf(out->mrn, sizeof out->mrn, "%s", plan->mrn);
    snprintf(out->patient_name, sizeof out->patient_name, "%s", plan->patient_name);
    out->plan_id = plan->plan_id;
    snprintf(out->plan, sizeof out->plan, "%s", plan->label);
    snprintf(out->site, sizeof out->site, "%s", plan->site);
    snprintf(out->technique, sizeof out->technique, "%s", plan->technique);
    snprintf(out->treated_at, sizeof out->treated_at, "%s", at);
    snprintf(out->recorded_at, sizeof out->recorded_at, "%s", now);
    snprintf(out->recorded_by, sizeof out->recorded_by, "%s", login ? login : "");
}

/* ---- logging a fraction ----------------------------------------------------------- */

static int validate_entries(fxl_ctx *ctx, rec_entry *ent, const rec_plan *plan,
                            const fxl_record_request *req, const rec_settings *settings)
{
    size_t i, k;
    int rc;

    for (i = 0; i < req->n_readings; i++) {
        const fxl_reading_entry *e = &req->readings[i];

        if ((rc = rec_find_field(ctx, &ent[i].field_id, ent[i].point, plan, e->field, e->point)) != 0)
            return rc;
        for (k = 0; k < i; k++)
            if (ent[k].field_id == ent[i].field_id)
                return fxl_fail(ctx, FXL_EINVAL,
                                "field '%s' (%s) is given twice: one reading per field and fraction",
                                e->field, ent[i].point);
        if ((rc = rec_find_detector(ctx, &ent[i].detector_id, ent[i].unit, e->detector)) != 0)
            return rc;
        if ((rc = rec_check_numbers(ctx, e->field, e->reading, e->background, e->temp_c, ent[i].unit)) != 0)
            return rc;
        ent[i].temp_entered = !isnan(e->temp_c);
        ent[i].temp_c = ent[i].temp_entered ? e->temp_c : settings->skin_temp_c;
    }
    return 0;
}

static int write_fraction(fxl_ctx *ctx, int64_t *fraction_id, fxl_record_result *out,
                          rec_inputs *in, size_t n, const rec_plan *plan, int number,
                          const char *at, const char *now)
{
    fxl_stmt s = FXL_STMT_INIT;
    cJSON *audit = NULL;
    size_t i;
    int rc;

    if ((rc = fxl_begin(ctx)) != 0)
        return rc;
    if ((rc = rec_check_plan_and_time(ctx, plan, number, at)) != 0)
        goto cleanup;
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
                               "INSERT INTO fractions (plan_id, number, treated_at, user_id, created_at) "
                               "VALUES (:plan, :number, :at, :user, :now)")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":plan", plan->plan_id);
    fxl_stmt_bind_int(&s, ":number", number);
    fxl_stmt_bind_text(&s, ":at", at);
    fxl_stmt_bind_int(&s, ":user", fxl_user_id(ctx));
    fxl_stmt_bind_text(&s, ":now", now);
    if ((rc = fxl_stmt_exec(&s)) != 0) {
        if (rc == FXL_ECONFLICT)  /* another console logged it since validation */
            rc = fxl_fail(ctx, FXL_ECONFLICT, "fraction %d of plan '%s' was logged meanwhile; nothing written",
                          number, plan->label);
        goto cleanup;
    }
    *fraction_id = sqlite3_last_insert_rowid(ctx->db);
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "patient", plan->mrn);
    cJSON_AddStringToObject(audit, "plan", plan->label);
    cJSON_AddNumberToObject(audit, "number", number);
    cJSON_AddStringToObject(audit, "treated_at", at);
    cJSON_AddNumberToObject(audit, "measurements", (double)n);
    if ((rc = fxl_audit_append(ctx, "record", "fractions", *fraction_id, audit)) != 0)
        goto cleanup;
    for (i = 0; i < n; i++) {
        if ((rc = rec_insert_measurement(ctx, &in[i], *fraction_id, now)) != 0 ||
            (rc = rec_open_review_item(ctx, &in[i], plan, number, now)) != 0)
            goto cleanup;
    }
    /* A due field given no reading is named now, with its item, not at the
     * next fraction (docs/record.md). */
    if ((rc = rec_open_missing(ctx, &out->missing, &out->n_missing, NULL, plan, *fraction_id,
                               number, at, "logged")) != 0)
        goto cleanup;
    if ((rc = fxl_rules_after_record(ctx, *fraction_id)) != 0)
        goto cleanup;
    rc = fxl_commit(ctx);
cleanup:
    if (rc != 0) {
        fxl_rollback(ctx);
        *fraction_id = 0;
        free(out->missing);
        out->missing = NULL;
        out->n_missing = 0;
        for (i = 0; i < n; i++)
            in[i].m.measurement_id = in[i].m.review_item_id = 0;
    }
    fxl_stmt_finalize(&s);
    cJSON_Delete(audit);
    return rc;
}

int fxl_record_fraction(fxl_ctx *ctx, fxl_record_result *out, const fxl_record_request *req)
{
    rec_plan plan;
    rec_settings settings;
    rec_entry *ent = NULL;
    rec_inputs *in = NULL;
    char now[FXL_TIME_LEN], at[FXL_TIME_LEN];
    int64_t fraction_id = 0;
    size_t i, loaded = 0;
    int rc, number;

    memset(out, 0, sizeof *out);
    if ((rc = fxl_require_role(ctx, FXL_ROLES_CLINICAL, "logging a fraction")) != 0)
        return rc;
    if (!req || !req->readings || req->n_readings == 0)
        return fxl_fail(ctx, FXL_EINVAL, "no readings given: at least one reading (field, detector, "
                                         "reading) is needed");
    if (req->n_readings > FXL_RECORD_READINGS_MAX)
        return fxl_fail(ctx, FXL_EINVAL, "%zu readings given: at most %d per fraction",
                        req->n_readings, FXL_RECORD_READINGS_MAX);
    fxl_now(ctx, now);
    if ((rc = rec_check_treated_at(ctx, at, req->treated_at, now)) != 0)
        return rc;
    /* The checks below read in one snapshot (one read transaction, not one
     * per statement); write_fraction checks again, in its write transaction,
     * what another console may have changed since. */
    if ((rc = fxl_begin_read(ctx)) != 0)
        return rc;
    if ((rc = rec_load_plan(ctx, &plan, req->mrn, req->plan)) != 0)
        goto cleanup;

    /* A fraction begun field by field is finished field by field (fxl/fraction.h):
     * never a second fraction beside it, never readings written around it. */
    {
        int64_t open_id = 0;
        int open_number = 0;
        char open_at[FXL_TIME_LEN];
        if ((rc = wl_open_fraction(ctx, &open_id, &open_number, open_at, plan.plan_id)) != 0)
            goto cleanup;
        if (open_id && (req->fraction == 0 || req->fraction == open_number)) {
            rc = fxl_fail(ctx, FXL_ECONFLICT,
                          "fraction %d of plan '%s' was begun field by field (treated %s) and is "
                          "still open: go on with 'fxledger record --patient %s --interactive'",
                          open_number, plan.label, open_at, plan.mrn);
            goto cleanup;
        }
    }
    number = req->fraction;
    if (number == 0) {
        number = plan.highest_logged + 1;
        if (number > plan.fractions) {
            rc = fxl_fail(ctx, FXL_EINVAL,
                          "plan '%s' of patient '%s' has all %d fractions logged; give --plan for a "
                          "newer plan",
                          plan.label, plan.mrn, plan.fractions);
            goto cleanup;
        }
    } else if (number < 1 || number > plan.fractions) {
        rc = fxl_fail(ctx, FXL_EINVAL, "fraction %d is out of range for plan '%s': must be 1 to %d",
                      number, plan.label, plan.fractions);
        goto cleanup;
    }
    if ((rc = check_fraction_free(ctx, &plan, number)) != 0 ||
        (rc = rec_check_plan_and_time(ctx, &plan, number, at)) != 0 ||
        (rc = rec_load_settings(ctx, &settings)) != 0)
        goto cleanup;

    ent = calloc(req->n_readings, sizeof *ent);
    in = calloc(req->n_readings, sizeof *in);
    if (!ent || !in) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory logging a fraction");
        goto cleanup;
    }
    if ((rc = validate_entries(ctx, ent, &plan, req, &settings)) != 0)
        goto cleanup;

    for (i = 0; i < req->n_readings; i++, loaded++) {
        const fxl_reading_entry *e = &req->readings[i];
        if ((rc = rec_load_inputs(ctx, &in[i], &plan, ent[i].field_id, ent[i].detector_id, at,
                                  number)) != 0)
            goto cleanup;
        rec_compute(&in[i], e->reading, e->background, ent[i].temp_c, ent[i].temp_entered, &settings);
    }
    fxl_rollback(ctx);   /* ends the read transaction: nothing was written */

    if ((rc = write_fraction(ctx, &fraction_id, out, in, req->n_readings, &plan, number, at, now)) != 0)
        goto cleanup;

    out->items = calloc(req->n_readings, sizeof *out->items);
    rec_fill_header(out, &plan, fraction_id, number, at, now, fxl_user_login(ctx));
    if (out->items) {
        out->n = req->n_readings;
        for (i = 0; i < req->n_readings; i++)
            out->items[i] = in[i].m;
    }
cleanup:
    fxl_rollback(ctx);   /* a read transaction left by a failed check; no-op otherwise */
    for (i = 0; i < loaded && in; i++)
        rec_inputs_release(&in[i]);
    free(ent);
    free(in);
    return rc;
}

/* ---- amending a reading ------------------------------------------------------------ */

typedef struct rec_original {
    int64_t fraction_id;
    int64_t field_id;
    int64_t detector_id;
    int number;
    char treated_at[FXL_TIME_LEN];
    char mrn[65];
    char plan[65];
    double temp_c;
    int temp_entered;
    double background;        /* M_0 of the original; NaN in rows before schema 5 */
    int64_t superseded_by;
} rec_original;

static int load_original(fxl_ctx *ctx, rec_original *o, int64_t id)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    memset(o, 0, sizeof *o);
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
                               "SELECT m.fraction_id, m.field_id, m.detector_id, f.number, f.treated_at, "
                               "pt.mrn, p.label, m.temp_c, m.temp_entered, "
                               "(SELECT s.id FROM measurements s WHERE s.supersedes_id = m.id), m.background "
                               "FROM measurements m JOIN fractions f ON f.id = m.fraction_id "
                               "JOIN plans p ON p.id = f.plan_id JOIN patients pt ON pt.id = p.patient_id "
                               "WHERE m.id = :id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":id", id);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 0) {
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "unknown measurement #%lld (see 'fxledger history')",
                      (long long)id);
        goto cleanup;
    }
    o->fraction_id = fxl_stmt_int(&s, 0);
    o->field_id = fxl_stmt_int(&s, 1);
    o->detector_id = fxl_stmt_int(&s, 2);
    o->number = (int)fxl_stmt_int(&s, 3);
    snprintf(o->treated_at, sizeof o->treated_at, "%s", fxl_stmt_text(&s, 4));
    snprintf(o->mrn, sizeof o->mrn, "%s", fxl_stmt_text(&s, 5));
    snprintf(o->plan, sizeof o->plan, "%s", fxl_stmt_text(&s, 6));
    o->temp_c = fxl_stmt_double(&s, 7);
    o->temp_entered = (int)fxl_stmt_int(&s, 8);
    o->superseded_by = fxl_stmt_int(&s, 9);
    o->background = fxl_stmt_double_opt(&s, 10);
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

static int reason_blank(const char *s)
{
    for (; s && *s; s++)
        if (*s != ' ' && *s != '\t')
            return 0;
    return 1;
}

int fxl_record_amend(fxl_ctx *ctx, fxl_record_result *out, const fxl_amend_request *req)
{
    rec_original orig;
    rec_plan plan;
    rec_settings settings;
    rec_inputs in;
    char now[FXL_TIME_LEN], unit[8] = "", field[65] = "";
    int64_t detector_id;
    double temp_c, background;
    int rc, temp_entered, loaded = 0;

    memset(out, 0, sizeof *out);
    memset(&in, 0, sizeof in);
    if ((rc = fxl_require_role(ctx, FXL_ROLES_CLINICAL, "amending a reading")) != 0)
        return rc;
    if (!req)
        return fxl_fail(ctx, FXL_EINVAL, "no amendment given");
    if (!req->reason || reason_blank(req->reason) || strlen(req->reason) > FXL_AMEND_REASON_MAX)
        return fxl_fail(ctx, FXL_EINVAL, "a reason for the amendment is required (1 to %d characters)",
                        FXL_AMEND_REASON_MAX);
    if ((rc = load_original(ctx, &orig, req->measurement_id)) != 0)
        return rc;
    if (orig.superseded_by)
        return fxl_fail(ctx, FXL_ECONFLICT,
                        "measurement #%lld is already superseded by #%lld; amend #%lld instead",
                        (long long)req->measurement_id, (long long)orig.superseded_by,
                        (long long)orig.superseded_by);
    if ((rc = rec_load_plan(ctx, &plan, orig.mrn, orig.plan)) != 0 ||
        (rc = rec_load_settings(ctx, &settings)) != 0)
        return rc;
    detector_id = orig.detector_id;
    if (req->detector && (rc = rec_find_detector(ctx, &detector_id, unit, req->detector)) != 0)
        return rc;
    if ((rc = rec_load_inputs(ctx, &in, &plan, orig.field_id, detector_id, orig.treated_at,
                              orig.number)) != 0)
        return rc;
    loaded = 1;
    snprintf(field, sizeof field, "%s", in.m.field);
    /* The background is an input of the dose like the reading: an amendment
     * keeps the original's M_0 unless a new one is given. */
    background = isnan(req->background) ? orig.background : req->background;
    if ((rc = rec_check_numbers(ctx, field, req->reading, background, req->temp_c,
                            in.m.reading_unit)) != 0)
        goto cleanup;
    temp_entered = isnan(req->temp_c) ? orig.temp_entered : 1;
    temp_c = isnan(req->temp_c) ? orig.temp_c : req->temp_c;
    rec_compute(&in, req->reading, background, temp_c, temp_entered, &settings);
    in.m.supersedes_id = req->measurement_id;
    snprintf(in.m.amend_reason, sizeof in.m.amend_reason, "%s", req->reason);

    fxl_now(ctx, now);
    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    /* The rules over history run again for the fraction: they link the
     * superseded row's queue items to the new row and open items only for
     * hits not yet open (store/rules_hook.h). */
    if ((rc = rec_insert_measurement(ctx, &in, orig.fraction_id, now)) != 0 ||
        (rc = rec_open_review_item(ctx, &in, &plan, orig.number, now)) != 0 ||
        (rc = fxl_rules_after_record(ctx, orig.fraction_id)) != 0) {
        if (rc == FXL_ECONFLICT)
            rc = fxl_fail(ctx, FXL_ECONFLICT, "measurement #%lld was amended meanwhile; nothing written",
                          (long long)req->measurement_id);
        fxl_rollback(ctx);
        goto cleanup;
    }
    if ((rc = fxl_commit(ctx)) != 0)
        goto cleanup;
    rec_fill_header(out, &plan, orig.fraction_id, orig.number, orig.treated_at, now, fxl_user_login(ctx));
    out->items = calloc(1, sizeof *out->items);
    if (out->items) {
        out->items[0] = in.m;
        out->n = 1;
    }
cleanup:
    if (loaded)
        rec_inputs_release(&in);
    return rc;
}
