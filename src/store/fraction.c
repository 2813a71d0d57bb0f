/* A fraction logged field by field: begin or resume it, commit one reading
 * at a time (each in its own transaction, judged exactly as a whole
 * fraction is), close it with the unmeasured due fields named and their
 * missing-measurement items opened then. docs/record.md ("Field by
 * field"). */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/fraction.h"
#include "fxl/rules.h"
#include "store/audit.h"
#include "store/record_int.h"
#include "store/review_store.h"
#include "store/rules_hook.h"
#include "store/stmt.h"
#include "store/worklist_int.h"
#include "store/zone.h"

static void copy(char *dst, size_t size, const char *src)
{
    size_t len = src ? strlen(src) : 0;

    if (len >= size)
        len = size - 1;
    if (len)
        memcpy(dst, src, len);
    dst[len] = '\0';
}

void fxl_fraction_state_release(fxl_fraction_state *s)
{
    if (!s)
        return;
    free(s->fields);
    free(s->items);
    memset(s, 0, sizeof *s);
}

void fxl_fraction_close_release(fxl_fraction_close_result *r)
{
    if (!r)
        return;
    free(r->missing);
    memset(r, 0, sizeof *r);
}

/* ---- the fraction row ------------------------------------------------------------ */

typedef struct fr_row {
    int64_t id;
    int number;
    char treated_at[FXL_TIME_LEN];
    char mrn[65];
    char plan[65];
    int begun;
    int closed;
} fr_row;

static int load_row(fxl_ctx *ctx, fr_row *r, int64_t fraction_id)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    memset(r, 0, sizeof *r);
    if ((rc = fxl_stmt_prepare(&s, ctx,
            "SELECT fr.id, fr.number, fr.treated_at, p.mrn, pl.label, "
            "EXISTS (SELECT 1 FROM fraction_marks k WHERE k.fraction_id = fr.id AND k.kind = 'begun'), "
            "EXISTS (SELECT 1 FROM fraction_marks k WHERE k.fraction_id = fr.id AND k.kind = 'closed') "
            "FROM fractions fr JOIN plans pl ON pl.id = fr.plan_id JOIN patients p ON p.id = pl.patient_id "
            "WHERE fr.id = :id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":id", fraction_id);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 0) {
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "unknown fraction #%lld", (long long)fraction_id);
        goto cleanup;
    }
    r->id = fxl_stmt_int(&s, 0);
    r->number = (int)fxl_stmt_int(&s, 1);
    copy(r->treated_at, sizeof r->treated_at, fxl_stmt_text(&s, 2));
    copy(r->mrn, sizeof r->mrn, fxl_stmt_text(&s, 3));
    copy(r->plan, sizeof r->plan, fxl_stmt_text(&s, 4));
    r->begun = (int)fxl_stmt_int(&s, 5);
    r->closed = (int)fxl_stmt_int(&s, 6);
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_fraction_is_open(fxl_ctx *ctx, int64_t fraction_id)
{
    fr_row r;
    int rc = load_row(ctx, &r, fraction_id);

    if (rc != 0)
        return rc;
    return r.begun && !r.closed;
}

static int write_mark(fxl_ctx *ctx, int64_t fraction_id, const char *kind, const char *now)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    if ((rc = fxl_stmt_prepare(&s, ctx,
            "INSERT INTO fraction_marks (fraction_id, kind, user_id, created_at) "
            "VALUES (:fr, :kind, :user, :now)")) != 0)
        return rc;
    fxl_stmt_bind_int(&s, ":fr", fraction_id);
    fxl_stmt_bind_text(&s, ":kind", kind);
    fxl_stmt_bind_int(&s, ":user", fxl_user_id(ctx));
    fxl_stmt_bind_text(&s, ":now", now);
    rc = fxl_stmt_exec(&s);
    fxl_stmt_finalize(&s);
    return rc;
}

/* ---- state --------------------------------------------------------------------------- */

static int fill_state(fxl_ctx *ctx, fxl_fraction_state *out, const rec_plan *plan, const fr_row *row)
{
    rec_settings settings;
    int64_t *ids = NULL;
    size_t n_ids = 0;
    int rc;

    out->fraction_id = row->id;
    out->fraction_number = row->number;
    out->plan_fractions = plan->fractions;
    out->patient_id = plan->patient_id;
    copy(out->mrn, sizeof out->mrn, plan->mrn);
    copy(out->patient_name, sizeof out->patient_name, plan->patient_name);
    out->plan_id = plan->plan_id;
    copy(out->plan, sizeof out->plan, plan->label);
    copy(out->site, sizeof out->site, plan->site);
    copy(out->technique, sizeof out->technique, plan->technique);
    copy(out->treated_at, sizeof out->treated_at, row->treated_at);
    if ((rc = rec_load_settings(ctx, &settings)) != 0)
        goto cleanup;
    out->skin_temp_c = settings.skin_temp_c;
    if ((rc = wl_fields(ctx, &out->fields, &out->n_fields, NULL, NULL, plan->plan_id,
                        plan->patient_id, row->number, row->treated_at, row->id)) != 0 ||
        (rc = wl_field_detectors(ctx, &ids, &n_ids, out->fields, out->n_fields)) != 0 ||
        (rc = wl_items(ctx, &out->items, &out->n_items, plan->patient_id, ids, n_ids)) != 0)
        goto cleanup;
cleanup:
    free(ids);
    return rc;
}

int fxl_fraction_load(fxl_ctx *ctx, fxl_fraction_state *out, int64_t fraction_id)
{
    rec_plan plan;
    fr_row row;
    int rc;

    memset(out, 0, sizeof *out);
    if ((rc = load_row(ctx, &row, fraction_id)) != 0 ||
        (rc = rec_load_plan(ctx, &plan, row.mrn, row.plan)) != 0 ||
        (rc = fill_state(ctx, out, &plan, &row)) != 0)
        fxl_fraction_state_release(out);
    return rc;
}

/* ---- closing ----------------------------------------------------------------------------- */

/* Inside the caller's transaction (record_int.h). */
int rec_open_missing(fxl_ctx *ctx, fxl_fraction_missing **missing, size_t *n_missing,
                     cJSON *names, const rec_plan *plan, int64_t fraction_id, int number,
                     const char *treated_at, const char *when)
{
    fxl_worklist_field *fields = NULL;
    char (*dates)[11] = NULL;
    fxl_stmt s = FXL_STMT_INIT;
    size_t n = 0, i, n_due = 0;
    int rc, first = 1;

    *missing = NULL;
    *n_missing = 0;
    /* A field is missing only when due and not read in this fraction: when
     * every field of the plan was read, none is, and the worklist's due
     * dates need not be worked out (the usual fraction). */
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT EXISTS (SELECT 1 FROM fields fl WHERE fl.plan_id = :plan AND NOT EXISTS "
            "(SELECT 1 FROM measurements m WHERE m.fraction_id = :fr AND m.field_id = fl.id))")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":plan", plan->plan_id);
    fxl_stmt_bind_int(&s, ":fr", fraction_id);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1 && fxl_stmt_int(&s, 0) == 0) {
        rc = 0;
        if (!(*missing = calloc(1, sizeof **missing)))
            rc = fxl_fail(ctx, FXL_EIO, "out of memory closing a fraction");
        goto cleanup;
    }
    fxl_stmt_finalize(&s);
    if ((rc = wl_fields(ctx, &fields, &n, &dates, &first, plan->plan_id, plan->patient_id,
                        number, treated_at, fraction_id)) != 0)
        goto cleanup;
    for (i = 0; i < n; i++)
        if (fields[i].due_reason != FXL_DUE_NOT && !fields[i].measured)
            n_due++;
    *missing = calloc(n_due ? n_due : 1, sizeof **missing);
    if (!*missing) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory closing a fraction");
        goto cleanup;
    }
    for (i = 0; i < n; i++) {
        const fxl_worklist_field *f = &fields[i];
        fxl_fraction_missing *m;
        fxl_review_open_spec spec;
        char key[128], summary[720];
        int64_t item = 0;

        if (f->due_reason == FXL_DUE_NOT || f->measured)
            continue;
        m = &(*missing)[(*n_missing)++];
        m->field_id = f->field_id;
        copy(m->field, sizeof m->field, f->name);
        copy(m->point, sizeof m->point, f->point);
        m->due_reason = f->due_reason;
        /* The keys of the rule over history (store/rules_hook.c): the item is
         * the one that rule would open at the next fraction, opened now. */
        if (f->due_reason == FXL_DUE_WEEKLY)
            snprintf(key, sizeof key, "field:%lld:due:%s", (long long)f->field_id, dates[i]);
        else if (f->due_reason == FXL_DUE_EVERY)
            snprintf(key, sizeof key, "field:%lld:fraction:%d", (long long)f->field_id, number);
        else
            snprintf(key, sizeof key, "field:%lld:fraction:%d", (long long)f->field_id,
                     number > first ? first : number);
        snprintf(summary, sizeof summary,
                 "%s plan '%s', field %s %s: required measurement missing at fraction %d (%s); "
                 "found when fraction %d was %s",
                 plan->mrn, plan->label, f->name, f->point, number,
                 fxl_due_reason_text(f->due_reason), number, when);
        memset(&spec, 0, sizeof spec);
        spec.rule = FXL_RULE_MISSING;
        spec.severity = FXL_RULE_MISSING_SEVERITY;
        spec.patient_id = plan->patient_id;
        spec.field_id = f->field_id;
        spec.rule_key = key;
        spec.summary = summary;
        if ((rc = fxl_review_open_item(ctx, &item, &spec)) != 0)
            goto cleanup;
        if (!item) {  /* already open: name it */
            if ((rc = fxl_stmt_prepare(&s, ctx,
                    "SELECT id FROM review_items WHERE rule = :rule AND rule_key = :key "
                    "ORDER BY id LIMIT 1")) != 0)
                goto cleanup;
            fxl_stmt_bind_text(&s, ":rule", FXL_RULE_MISSING);
            fxl_stmt_bind_text(&s, ":key", key);
            if ((rc = fxl_stmt_step(&s)) < 0)
                goto cleanup;
            if (rc == 1)
                item = fxl_stmt_int(&s, 0);
            fxl_stmt_finalize(&s);
        }
        m->review_item_id = item;
        if (names)
            cJSON_AddItemToArray(names, cJSON_CreateString(f->name));
    }
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    free(fields);
    free(dates);
    if (rc != 0) {
        free(*missing);
        *missing = NULL;
        *n_missing = 0;
    }
    return rc;
}

/* Inside the caller's transaction: opens the missing-measurement items of the
 * fraction's unmeasured due fields and writes the closed mark. */
static int close_in_tx(fxl_ctx *ctx, fxl_fraction_close_result *out, const rec_plan *plan,
                       const fr_row *row, const char *now)
{
    fxl_stmt s = FXL_STMT_INIT;
    cJSON *audit = NULL, *names = NULL;
    int rc;

    names = cJSON_CreateArray();
    if (!names)
        return fxl_fail(ctx, FXL_EIO, "out of memory closing a fraction");
    if ((rc = rec_open_missing(ctx, &out->missing, &out->n_missing, names, plan, row->id,
                               row->number, row->treated_at, "closed")) != 0)
        goto cleanup;
    if ((rc = fxl_stmt_prepare(&s, ctx,
            "SELECT count(*) FROM measurements WHERE fraction_id = :fr")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":fr", row->id);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    out->n_measured = (size_t)fxl_stmt_int(&s, 0);
    fxl_stmt_finalize(&s);
    if ((rc = write_mark(ctx, row->id, "closed", now)) != 0)
        goto cleanup;
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "patient", plan->mrn);
    cJSON_AddStringToObject(audit, "plan", plan->label);
    cJSON_AddNumberToObject(audit, "number", row->number);
    cJSON_AddNumberToObject(audit, "measurements", (double)out->n_measured);
    cJSON_AddItemToObject(audit, "missing", names);
    names = NULL;
    rc = fxl_audit_append(ctx, "close", "fractions", row->id, audit);
cleanup:
    fxl_stmt_finalize(&s);
    cJSON_Delete(audit);
    cJSON_Delete(names);
    return rc;
}

int fxl_fraction_close(fxl_ctx *ctx, fxl_fraction_close_result *out, int64_t fraction_id)
{
    rec_plan plan;
    fr_row row;
    char now[FXL_TIME_LEN];
    int rc;

    memset(out, 0, sizeof *out);
    if ((rc = fxl_require_role(ctx, FXL_ROLES_CLINICAL, "closing a fraction")) != 0 ||
        (rc = load_row(ctx, &row, fraction_id)) != 0)
        return rc;
    out->fraction_id = row.id;
    out->fraction_number = row.number;
    if (!row.begun || row.closed) {
        out->already_closed = 1;
        return 0;
    }
    if ((rc = rec_load_plan(ctx, &plan, row.mrn, row.plan)) != 0)
        return rc;
    fxl_now(ctx, now);
    if ((rc = fxl_begin(ctx)) != 0)
        return rc;
    if ((rc = close_in_tx(ctx, out, &plan, &row, now)) != 0 ||
        (rc = fxl_rules_after_record(ctx, row.id)) != 0 || (rc = fxl_commit(ctx)) != 0) {
        if (rc == FXL_ECONFLICT)
            rc = fxl_fail(ctx, FXL_ECONFLICT, "fraction %d was closed meanwhile; nothing written",
                          row.number);
        fxl_rollback(ctx);
        fxl_fraction_close_release(out);
        out->fraction_id = row.id;
        out->fraction_number = row.number;
    }
    return rc;
}

/* ---- beginning ---------------------------------------------------------------------------- */

int fxl_fraction_begin(fxl_ctx *ctx, fxl_fraction_state *out, const fxl_fraction_begin_request *req)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_zone z;
    rec_plan plan;
    fr_row row, old;
    fxl_fraction_close_result closed = FXL_FRACTION_CLOSE_RESULT_INIT;
    char now[FXL_TIME_LEN], at[FXL_TIME_LEN], open_at[FXL_TIME_LEN], day_at[11] = "", day_open[11] = "";
    cJSON *audit = NULL;
    int64_t open_id = 0;
    int rc, open_number = 0, number, in_tx = 0;

    memset(out, 0, sizeof *out);
    memset(&old, 0, sizeof old);
    if ((rc = fxl_require_role(ctx, FXL_ROLES_CLINICAL, "logging a fraction")) != 0)
        return rc;
    if (!req)
        return fxl_fail(ctx, FXL_EINVAL, "no fraction given");
    fxl_now(ctx, now);
    if ((rc = rec_check_treated_at(ctx, at, req->treated_at, now)) != 0 ||
        (rc = rec_load_plan(ctx, &plan, req->mrn, req->plan)) != 0 ||
        (rc = wl_open_fraction(ctx, &open_id, &open_number, open_at, plan.plan_id)) != 0)
        return rc;
    if (open_id) {
        if ((rc = fxl_zone_enter(ctx, &z)) != 0)
            return rc;
        fxl_zone_local_date(day_at, at);
        fxl_zone_local_date(day_open, open_at);
        fxl_zone_leave(&z);
        if ((rc = load_row(ctx, &old, open_id)) != 0)
            return rc;
    }
    number = req->fraction;
    if ((number == 0 && open_id && strcmp(day_at, day_open) == 0) ||
        (number != 0 && open_id && number == open_number)) {
        out->resumed = 1;
        rc = fill_state(ctx, out, &plan, &old);
        if (rc != 0)
            fxl_fraction_state_release(out);
        return rc;
    }
    if (number == 0) {
        number = plan.highest_logged + 1;
        if (number > plan.fractions)
            return fxl_fail(ctx, FXL_EINVAL,
                            "plan '%s' of patient '%s' has all %d fractions logged; give --plan for a "
                            "newer plan", plan.label, plan.mrn, plan.fractions);
    } else if (number < 1 || number > plan.fractions) {
        return fxl_fail(ctx, FXL_EINVAL, "fraction %d is out of range for plan '%s': must be 1 to %d",
                        number, plan.label, plan.fractions);
    } else {
        if ((rc = fxl_stmt_prepare(&s, ctx,
                "SELECT treated_at FROM fractions WHERE plan_id = :plan AND number = :n")) != 0)
            return rc;
        fxl_stmt_bind_int(&s, ":plan", plan.plan_id);
        fxl_stmt_bind_int(&s, ":n", number);
        rc = fxl_stmt_step(&s);
        if (rc == 1)
            rc = fxl_fail(ctx, FXL_ECONFLICT,
                          "fraction %d of plan '%s' is already logged (treated %s); correct a reading "
                          "with 'fxledger amend', or give the next fraction number (%d)",
                          number, plan.label, fxl_stmt_text(&s, 0), plan.highest_logged + 1);
        fxl_stmt_finalize(&s);
        if (rc != 0)
            return rc < 0 ? rc : rc;
    }
    if ((rc = rec_check_plan_and_time(ctx, &plan, number, at)) != 0)
        return rc;

    if ((rc = fxl_begin(ctx)) != 0)
        return rc;
    in_tx = 1;
    /* An unfinished fraction of an earlier day is closed first: its
     * unmeasured due fields are named now. */
    if (open_id && (rc = close_in_tx(ctx, &closed, &plan, &old, now)) != 0)
        goto cleanup;
    if ((rc = rec_check_plan_and_time(ctx, &plan, number, at)) != 0)
        goto cleanup;
    if ((rc = fxl_stmt_prepare(&s, ctx,
            "INSERT INTO fractions (plan_id, number, treated_at, user_id, created_at) "
            "VALUES (:plan, :number, :at, :user, :now)")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":plan", plan.plan_id);
    fxl_stmt_bind_int(&s, ":number", number);
    fxl_stmt_bind_text(&s, ":at", at);
    fxl_stmt_bind_int(&s, ":user", fxl_user_id(ctx));
    fxl_stmt_bind_text(&s, ":now", now);
    if ((rc = fxl_stmt_exec(&s)) != 0) {
        if (rc == FXL_ECONFLICT)
            rc = fxl_fail(ctx, FXL_ECONFLICT, "fraction %d of plan '%s' was logged meanwhile; nothing "
                          "written", number, plan.label);
        goto cleanup;
    }
    memset(&row, 0, sizeof row);
    row.id = sqlite3_last_insert_rowid(ctx->db);
    row.number = number;
    copy(row.treated_at, sizeof row.treated_at, at);
    row.begun = 1;
    fxl_stmt_finalize(&s);
    if ((rc = write_mark(ctx, row.id, "begun", now)) != 0)
        goto cleanup;
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "patient", plan.mrn);
    cJSON_AddStringToObject(audit, "plan", plan.label);
    cJSON_AddNumberToObject(audit, "number", number);
    cJSON_AddStringToObject(audit, "treated_at", at);
    cJSON_AddStringToObject(audit, "mode", "field by field");
    if ((rc = fxl_audit_append(ctx, "begin", "fractions", row.id, audit)) != 0)
        goto cleanup;
    if ((rc = fxl_rules_after_record(ctx, row.id)) != 0 || (rc = fxl_commit(ctx)) != 0)
        goto cleanup;
    in_tx = 0;
    plan.highest_logged = number > plan.highest_logged ? number : plan.highest_logged;
    if ((rc = fill_state(ctx, out, &plan, &row)) != 0)
        fxl_fraction_state_release(out);
cleanup:
    fxl_stmt_finalize(&s);
    if (in_tx)
        fxl_rollback(ctx);
    cJSON_Delete(audit);
    fxl_fraction_close_release(&closed);
    return rc;
}

/* ---- one field ------------------------------------------------------------------------------ */

int fxl_fraction_log_field(fxl_ctx *ctx, fxl_record_result *out, int64_t fraction_id,
                           const fxl_reading_entry *e)
{
    fxl_stmt s = FXL_STMT_INIT;
    rec_plan plan;
    rec_settings settings;
    rec_inputs in;
    fr_row row;
    char now[FXL_TIME_LEN], point[16] = "", unit[8] = "";
    int64_t field_id = 0, detector_id = 0;
    double temp_c;
    int rc, loaded = 0, temp_entered;

    memset(out, 0, sizeof *out);
    memset(&in, 0, sizeof in);
    if ((rc = fxl_require_role(ctx, FXL_ROLES_CLINICAL, "logging a fraction")) != 0)
        return rc;
    if (!e || !e->field || !e->detector)
        return fxl_fail(ctx, FXL_EINVAL, "a reading needs a field and a detector");
    if ((rc = load_row(ctx, &row, fraction_id)) != 0)
        return rc;
    if (!row.begun || row.closed)
        return fxl_fail(ctx, FXL_ECONFLICT,
                        "fraction %d of plan '%s' is closed: correct a reading with 'fxledger amend'",
                        row.number, row.plan);
    if ((rc = rec_load_plan(ctx, &plan, row.mrn, row.plan)) != 0 ||
        (rc = rec_load_settings(ctx, &settings)) != 0 ||
        (rc = rec_find_field(ctx, &field_id, point, &plan, e->field, e->point)) != 0 ||
        (rc = rec_find_detector(ctx, &detector_id, unit, e->detector)) != 0 ||
        (rc = rec_check_numbers(ctx, e->field, e->reading, e->background, e->temp_c, unit)) != 0)
        return rc;
    if ((rc = fxl_stmt_prepare(&s, ctx,
            "SELECT id FROM measurements WHERE fraction_id = :fr AND field_id = :field "
            "ORDER BY id LIMIT 1")) != 0)
        return rc;
    fxl_stmt_bind_int(&s, ":fr", row.id);
    fxl_stmt_bind_int(&s, ":field", field_id);
    rc = fxl_stmt_step(&s);
    if (rc == 1)
        rc = fxl_fail(ctx, FXL_ECONFLICT,
                      "field '%s' (%s) is already measured in fraction %d (measurement #%lld): "
                      "correct it with 'fxledger amend'",
                      e->field, point, row.number, (long long)fxl_stmt_int(&s, 0));
    fxl_stmt_finalize(&s);
    if (rc != 0)
        return rc;

    /* A plan change imported while the reading was typed is seen here. */
    if ((rc = rec_check_plan_and_time(ctx, &plan, row.number, row.treated_at)) != 0)
        return rc;
    temp_entered = !isnan(e->temp_c);
    temp_c = temp_entered ? e->temp_c : settings.skin_temp_c;
    if ((rc = rec_load_inputs(ctx, &in, &plan, field_id, detector_id, row.treated_at, row.number)) != 0)
        return rc;
    loaded = 1;
    rec_compute(&in, e->reading, e->background, temp_c, temp_entered, &settings);

    fxl_now(ctx, now);
    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    if ((rc = rec_check_plan_and_time(ctx, &plan, row.number, row.treated_at)) != 0 ||
        (rc = rec_insert_measurement(ctx, &in, row.id, now)) != 0 ||
        (rc = rec_open_review_item(ctx, &in, &plan, row.number, now)) != 0 ||
        (rc = fxl_rules_after_record(ctx, row.id)) != 0 || (rc = fxl_commit(ctx)) != 0) {
        fxl_rollback(ctx);
        goto cleanup;
    }
    rec_fill_header(out, &plan, row.id, row.number, row.treated_at, now, fxl_user_login(ctx));
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
