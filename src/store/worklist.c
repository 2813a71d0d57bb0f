/* Today's worklist and the holds at the console: the active courses of the
 * department-local day in day-list order, each with its next fraction, the
 * fields due by policy, the detector to place (checked against its status
 * and calibration on the day), warnings and open review items with holds on
 * top. docs/worklist.md. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "fxl/rules.h"
#include "fxl/worklist.h"
#include "store/grow.h"
#include "store/json_put.h"
#include "store/lookup_sql.h"
#include "store/review_store.h"
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

const char *fxl_due_reason_text(fxl_due_reason r)
{
    switch (r) {
    case FXL_DUE_NOT: return "not due";
    case FXL_DUE_FIRST: return "first fraction";
    case FXL_DUE_PLAN_CHANGE: return "first after plan change";
    case FXL_DUE_WEEKLY: return "weekly interval reached";
    case FXL_DUE_EVERY: return "every fraction";
    }
    return "not due";
}

/* ---- the open fraction of a plan ------------------------------------------------ */

int wl_open_fraction(fxl_ctx *ctx, int64_t *fraction_id, int *number, char at[FXL_TIME_LEN],
                     int64_t plan_id)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    *fraction_id = 0;
    *number = 0;
    at[0] = '\0';
    if ((rc = fxl_stmt_prepare(&s, ctx,
            "SELECT fr.id, fr.number, fr.treated_at FROM fractions fr "
            "JOIN fraction_marks b ON b.fraction_id = fr.id AND b.kind = 'begun' "
            "WHERE fr.plan_id = :plan AND NOT EXISTS (SELECT 1 FROM fraction_marks c "
            "WHERE c.fraction_id = fr.id AND c.kind = 'closed') "
            "ORDER BY fr.number DESC LIMIT 1")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":plan", plan_id);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1) {
        *fraction_id = fxl_stmt_int(&s, 0);
        *number = (int)fxl_stmt_int(&s, 1);
        copy(at, FXL_TIME_LEN, fxl_stmt_text(&s, 2));
    }
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* ---- fields for one fraction ------------------------------------------------------ */

typedef struct wl_slot {
    int number;
    char at[FXL_TIME_LEN];
    int measured;
} wl_slot;

static int load_slots(fxl_ctx *ctx, wl_slot **out, size_t *n, int64_t plan_id, int64_t field_id)
{
    fxl_stmt s = FXL_STMT_INIT;
    wl_slot *list = NULL;
    size_t cap = 0, count = 0;
    int rc;

    *out = NULL;
    *n = 0;
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT fr.number, fr.treated_at, EXISTS (SELECT 1 FROM measurements m "
            "WHERE m.fraction_id = fr.id AND m.field_id = :field) "
            "FROM fractions fr WHERE fr.plan_id = :plan ORDER BY fr.number")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":field", field_id);
    fxl_stmt_bind_int(&s, ":plan", plan_id);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list, "building the worklist")) != 0)
            goto cleanup;
        list[count].number = (int)fxl_stmt_int(&s, 0);
        copy(list[count].at, sizeof list[count].at, fxl_stmt_text(&s, 1));
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

/* The plan's first fraction number, as the rules over history count it: a
 * replacement plan whose numbering continues the replaced plan's starts
 * after the replaced plan's last fraction. `number` is the fraction about
 * to be logged (counted as one of the plan's own). */
static int first_number(fxl_ctx *ctx, int *out, int *replaces, int64_t plan_id, int number)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc, replaced_max, own_min;

    *out = 1;
    *replaces = 0;
    if ((rc = fxl_stmt_prepare(&s, ctx,
            "SELECT coalesce(pl.replaces_plan_id, 0), "
            "coalesce((SELECT max(o.number) FROM fractions o WHERE o.plan_id = pl.replaces_plan_id), 0), "
            "coalesce((SELECT min(o.number) FROM fractions o WHERE o.plan_id = pl.id), 0) "
            "FROM plans pl WHERE pl.id = :plan")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":plan", plan_id);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1) {
        *replaces = fxl_stmt_int(&s, 0) != 0;
        replaced_max = (int)fxl_stmt_int(&s, 1);
        own_min = (int)fxl_stmt_int(&s, 2);
        if (!own_min || (number > 0 && number < own_min))
            own_min = number;
        if (*replaces && replaced_max > 0 && own_min > replaced_max)
            *out = replaced_max + 1;
    }
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* The detector check on the day: status and a valid calibration for the
 * field's beam and point. */
static int check_detector(fxl_ctx *ctx, fxl_worklist_field *f, int64_t beam_id, const char *at)
{
    fxl_stmt s = FXL_STMT_INIT;
    char status[24] = "in_service";
    int64_t det = 0;
    int rc;

    f->detector_ok = 0;
    if (!f->detector[0]) {
        snprintf(f->detector_warning, sizeof f->detector_warning,
                 "no detector used on %s %s yet: choose one in service and calibrated", f->name,
                 f->point);
        return 0;
    }
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT d.id, coalesce((SELECT st.status FROM detector_status st WHERE st.detector_id = d.id "
            "AND st.effective_at <= :at ORDER BY st.effective_at DESC, st.id DESC LIMIT 1), 'in_service') "
            "FROM detectors d WHERE d.serial = :serial")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":at", at);
    fxl_stmt_bind_text(&s, ":serial", f->detector);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1) {
        det = fxl_stmt_int(&s, 0);
        copy(status, sizeof status, fxl_stmt_text(&s, 1));
    }
    fxl_stmt_finalize(&s);
    rc = 0;
    if (!det) {
        snprintf(f->detector_warning, sizeof f->detector_warning, "detector %s is not known",
                 f->detector);
        goto cleanup;
    }
    if (strcmp(status, "in_service") != 0) {
        snprintf(f->detector_warning, sizeof f->detector_warning,
                 "detector %s is %s: its readings are not evaluable; choose another", f->detector,
                 strcmp(status, "retired") == 0 ? "retired" : "out for service");
        goto cleanup;
    }
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT id, valid_until FROM calibrations WHERE detector_id = :det AND beam_id = :beam "
            "AND point = :point AND calibrated_at <= :at ORDER BY calibrated_at DESC, id DESC LIMIT 1")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":det", det);
    fxl_stmt_bind_int(&s, ":beam", beam_id);
    fxl_stmt_bind_text(&s, ":point", f->point);
    fxl_stmt_bind_text(&s, ":at", at);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 0)
        snprintf(f->detector_warning, sizeof f->detector_warning,
                 "detector %s has no calibration for beam %s %s: its readings are not evaluable",
                 f->detector, f->beam, f->point);
    else if (strcmp(at, fxl_stmt_text(&s, 1)) > 0)
        snprintf(f->detector_warning, sizeof f->detector_warning,
                 "detector %s: calibration #%lld for beam %s %s expired %.10s; recalibrate",
                 f->detector, (long long)fxl_stmt_int(&s, 0), f->beam, f->point, fxl_stmt_text(&s, 1));
    else
        f->detector_ok = 1;
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int wl_fields(fxl_ctx *ctx, fxl_worklist_field **out, size_t *n, char (**due_dates)[11],
              int *first_number_out, int64_t plan_id, int64_t patient_id, int number,
              const char *at, int64_t fraction_id)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_worklist_field *list = NULL;
    int64_t *beams = NULL;
    char (*dates)[11] = NULL, patient_last[65] = "";
    fxl_rule_settings rs;
    wl_slot *slots = NULL;
    fxl_fraction_slot *fs = NULL;
    size_t cap = 0, count = 0, i, k, n_slots = 0;
    int rc, first = 1, replaces = 0;

    *out = NULL;
    *n = 0;
    if (due_dates)
        *due_dates = NULL;
    if ((rc = fxl_rule_settings_load(ctx, &rs)) != 0 ||
        (rc = first_number(ctx, &first, &replaces, plan_id, number)) != 0)
        goto cleanup;
    if (first_number_out)
        *first_number_out = first;
    if ((rc = fxl_stmt_prepare(&s, ctx,
            "SELECT fl.id, fl.name, fl.point, b.name, fl.mu, fl.expected_dose_cgy, fl.policy, b.id, "
            "coalesce((SELECT d.serial FROM measurements m JOIN detectors d ON d.id = m.detector_id "
            "  WHERE m.field_id = fl.id ORDER BY m.created_at DESC, m.id DESC LIMIT 1), ''), "
            "EXISTS (SELECT 1 FROM measurements m WHERE m.fraction_id = :fr AND m.field_id = fl.id) "
            "FROM fields fl JOIN beams b ON b.id = fl.beam_id WHERE fl.plan_id = :plan ORDER BY fl.id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":fr", fraction_id);
    fxl_stmt_bind_int(&s, ":plan", plan_id);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        fxl_worklist_field *f;
        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list, "building the worklist")) != 0)
            goto cleanup;
        f = &list[count++];
        f->field_id = fxl_stmt_int(&s, 0);
        copy(f->name, sizeof f->name, fxl_stmt_text(&s, 1));
        copy(f->point, sizeof f->point, fxl_stmt_text(&s, 2));
        copy(f->beam, sizeof f->beam, fxl_stmt_text(&s, 3));
        f->mu = fxl_stmt_double(&s, 4);
        f->expected_dose_cgy = fxl_stmt_double_opt(&s, 5);
        copy(f->policy, sizeof f->policy, fxl_stmt_text(&s, 6));
        copy(f->detector, sizeof f->detector, fxl_stmt_text(&s, 8));
        f->measured = (int)fxl_stmt_int(&s, 9);
        /* the beam id rides in detector_ok until the check below */
        f->detector_ok = (int)fxl_stmt_int(&s, 7);
    }
    if (rc < 0)
        goto cleanup;
    fxl_stmt_finalize(&s);

    /* The patient's last detector, offered where a field has none yet. */
    if ((rc = fxl_stmt_prepare(&s, ctx,
            "SELECT d.serial FROM measurements m JOIN detectors d ON d.id = m.detector_id "
            "JOIN fractions f ON f.id = m.fraction_id JOIN plans p ON p.id = f.plan_id "
            "WHERE p.patient_id = :pid ORDER BY m.created_at DESC, m.id DESC LIMIT 1")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":pid", patient_id);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1)
        copy(patient_last, sizeof patient_last, fxl_stmt_text(&s, 0));
    fxl_stmt_finalize(&s);
    rc = 0;

    beams = calloc(count ? count : 1, sizeof *beams);
    dates = calloc(count ? count : 1, sizeof *dates);
    if (!beams || !dates) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory building the worklist");
        goto cleanup;
    }
    for (i = 0; i < count; i++) {
        fxl_worklist_field *f = &list[i];
        fxl_required_input in;
        fxl_rule_due_result due;
        fxl_policy policy;

        beams[i] = f->detector_ok;
        f->detector_ok = 0;
        if (!f->detector[0])
            copy(f->detector, sizeof f->detector, patient_last);
        if (fxl_policy_parse(&policy, f->policy) != 0) {
            rc = fxl_fail(ctx, FXL_EINVAL, "field '%s' has an unknown measurement policy '%s'",
                          f->name, f->policy);
            goto cleanup;
        }
        free(slots);
        slots = NULL;
        free(fs);
        fs = NULL;
        if ((rc = load_slots(ctx, &slots, &n_slots, plan_id, f->field_id)) != 0)
            goto cleanup;
        if (!(fs = calloc(n_slots ? n_slots : 1, sizeof *fs))) {
            rc = fxl_fail(ctx, FXL_EIO, "out of memory building the worklist");
            goto cleanup;
        }
        for (k = 0; k < n_slots; k++) {
            fs[k].number = slots[k].number;
            fs[k].treated_at = slots[k].at;
            fs[k].measured = slots[k].measured;
        }
        memset(&in, 0, sizeof in);
        in.policy = policy;
        in.first_number = first;
        in.interval_days = rs.weekly_interval_days;
        in.slots = fs;
        in.n_slots = n_slots;
        in.current_number = number;
        if (fxl_rule_due(&due, &in, at) != 0) {
            rc = fxl_fail(ctx, FXL_EINVAL, "internal: the due rule refused field '%s'", f->name);
            goto cleanup;
        }
        switch (due.kind) {
        case FXL_RULE_DUE_FIRST:
            f->due_reason = replaces ? FXL_DUE_PLAN_CHANGE : FXL_DUE_FIRST;
            break;
        case FXL_RULE_DUE_WEEKLY: f->due_reason = FXL_DUE_WEEKLY; break;
        case FXL_RULE_DUE_EVERY: f->due_reason = FXL_DUE_EVERY; break;
        default: f->due_reason = FXL_DUE_NOT; break;
        }
        copy(dates[i], sizeof dates[i], due.due_date);
        if ((rc = check_detector(ctx, f, beams[i], at)) != 0)
            goto cleanup;
    }
    *out = list;
    *n = count;
    list = NULL;
    if (due_dates) {
        *due_dates = dates;
        dates = NULL;
    }
cleanup:
    fxl_stmt_finalize(&s);
    free(list);
    free(beams);
    free(dates);
    free(slots);
    free(fs);
    return rc;
}

int wl_field_detectors(fxl_ctx *ctx, int64_t **ids, size_t *n, const fxl_worklist_field *fields,
                       size_t n_fields)
{
    fxl_stmt s = FXL_STMT_INIT;
    int64_t *list = NULL;
    size_t count = 0, i, k;
    int rc = 0;

    *ids = NULL;
    *n = 0;
    if (!(list = calloc(n_fields ? n_fields : 1, sizeof *list)))
        return fxl_fail(ctx, FXL_EIO, "out of memory building the worklist");
    if ((rc = fxl_stmt_prepare_cached(&s, ctx, fxl_sql_detector_by_serial)) != 0)
        goto cleanup;
    for (i = 0; i < n_fields; i++) {
        int64_t id = 0;
        if (!fields[i].detector[0])
            continue;
        fxl_stmt_reset(&s);
        fxl_stmt_bind_text(&s, ":serial", fields[i].detector);
        if ((rc = fxl_stmt_step(&s)) < 0)
            goto cleanup;
        if (rc == 1)
            id = fxl_stmt_int(&s, 0);
        for (k = 0; k < count && id; k++)
            if (list[k] == id)
                id = 0;
        if (id)
            list[count++] = id;
    }
    rc = 0;
    *ids = list;
    *n = count;
    list = NULL;
cleanup:
    fxl_stmt_finalize(&s);
    free(list);
    return rc;
}

/* ---- open items and holds ---------------------------------------------------------- */

int wl_items(fxl_ctx *ctx, fxl_worklist_item **out, size_t *n, int64_t patient_id,
             const int64_t *detector_ids, size_t n_detectors)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_worklist_item *list = NULL;
    char *ids_text = NULL;
    size_t cap = 0, count = 0, i, used = 1;
    int rc;

    *out = NULL;
    *n = 0;
    /* the detectors as ",id,id," for instr(): evaluated on the few open
     * items only, and much cheaper to prepare than json_each */
    if (!(ids_text = malloc(n_detectors * 22 + 2))) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory listing open items");
        goto cleanup;
    }
    ids_text[0] = ',';
    ids_text[1] = '\0';
    for (i = 0; i < n_detectors; i++)
        used += (size_t)snprintf(ids_text + used, 22, "%lld,", (long long)detector_ids[i]);
    /* A hold: the patient's unresolved result outside the action level
     * (escalated results are stored as outside the action level too). */
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
            "SELECT i.id, i.rule, i.severity, i.status, coalesce(f.name, ''), coalesce(f.point, ''), "
            "coalesce(d.serial, ''), coalesce(fr.number, 0), i.opened_at, i.summary, "
            "(i.patient_id IS :pid AND i.rule = 'result' AND m.verdict = 'outside_action') AS hold, "
            "(i.patient_id IS NOT :pid) AS on_detector "
            "FROM review_items i LEFT JOIN measurements m ON m.id = i.measurement_id "
            "LEFT JOIN fractions fr ON fr.id = m.fraction_id "
            "LEFT JOIN fields f ON f.id = i.field_id LEFT JOIN detectors d ON d.id = i.detector_id "
            "WHERE i.status IN ('open', 'acknowledged') AND (i.patient_id = :pid OR "
            "(i.patient_id IS NULL AND instr(:dets, ',' || i.detector_id || ',') > 0)) "
            "ORDER BY hold DESC, i.severity DESC, i.opened_at, i.id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":pid", patient_id);
    fxl_stmt_bind_text(&s, ":dets", ids_text);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        fxl_worklist_item *it;
        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list, "listing open items")) != 0)
            goto cleanup;
        it = &list[count++];
        it->id = fxl_stmt_int(&s, 0);
        copy(it->rule, sizeof it->rule, fxl_stmt_text(&s, 1));
        it->severity = (int)fxl_stmt_int(&s, 2);
        copy(it->status, sizeof it->status, fxl_stmt_text(&s, 3));
        copy(it->field, sizeof it->field, fxl_stmt_text(&s, 4));
        copy(it->point, sizeof it->point, fxl_stmt_text(&s, 5));
        copy(it->detector, sizeof it->detector, fxl_stmt_text(&s, 6));
        it->fraction_number = (int)fxl_stmt_int(&s, 7);
        copy(it->opened_at, sizeof it->opened_at, fxl_stmt_text(&s, 8));
        copy(it->summary, sizeof it->summary, fxl_stmt_text(&s, 9));
        it->is_hold = (int)fxl_stmt_int(&s, 10);
        it->on_detector = (int)fxl_stmt_int(&s, 11);
    }
    if (rc == 0) {
        *out = list;
        *n = count;
        list = NULL;
    }
cleanup:
    fxl_stmt_finalize(&s);
    free(list);
    free(ids_text);
    return rc;
}

int fxl_holds_for_patient(fxl_ctx *ctx, fxl_worklist_item **out, size_t *n, const char *mrn,
                          const char *const *detectors, size_t n_detectors)
{
    fxl_stmt s = FXL_STMT_INIT;
    int64_t pid = 0, *ids = NULL;
    size_t n_ids = 0, i;
    int rc;

    *out = NULL;
    *n = 0;
    if ((rc = fxl_stmt_prepare_cached(&s, ctx, fxl_sql_patient_by_mrn)) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":mrn", mrn ? mrn : "");
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 0) {
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "unknown patient '%s' (see 'fxledger patient list')",
                      mrn ? mrn : "");
        goto cleanup;
    }
    pid = fxl_stmt_int(&s, 0);
    fxl_stmt_finalize(&s);
    if (!(ids = calloc(n_detectors ? n_detectors : 1, sizeof *ids))) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory listing open items");
        goto cleanup;
    }
    if ((rc = fxl_stmt_prepare_cached(&s, ctx, fxl_sql_detector_by_serial)) != 0)
        goto cleanup;
    for (i = 0; i < n_detectors; i++) {
        if (!detectors[i] || !*detectors[i])
            continue;
        fxl_stmt_reset(&s);
        fxl_stmt_bind_text(&s, ":serial", detectors[i]);
        if ((rc = fxl_stmt_step(&s)) < 0)
            goto cleanup;
        if (rc == 1)
            ids[n_ids++] = fxl_stmt_int(&s, 0);
    }
    fxl_stmt_finalize(&s);
    rc = wl_items(ctx, out, n, pid, ids, n_ids);
cleanup:
    fxl_stmt_finalize(&s);
    free(ids);
    return rc;
}

size_t fxl_holds_count(const fxl_worklist_item *items, size_t n)
{
    size_t i, k = 0;

    for (i = 0; i < n; i++)
        if (items[i].is_hold)
            k++;
    return k;
}

void fxl_holds_guidance(char *buf, size_t size, const fxl_worklist_item *items, size_t n)
{
    size_t i, k = 0, used;
    size_t holds = fxl_holds_count(items, n);

    if (size == 0)
        return;
    buf[0] = '\0';
    if (holds == 0)
        return;
    snprintf(buf, size, "Treatment is on hold: review item%s ", holds == 1 ? "" : "s");
    for (i = 0; i < n; i++) {
        if (!items[i].is_hold)
            continue;
        used = strlen(buf);
        snprintf(buf + used, size - used, "%s#%lld", k == 0 ? "" : k + 1 == holds ? " and " : ", ",
                 (long long)items[i].id);
        k++;
    }
    used = strlen(buf);
    snprintf(buf + used, size - used,
             " (outside the action level) %s open. Do not continue until a physicist has "
             "investigated and closed %s.",
             holds == 1 ? "is" : "are", holds == 1 ? "it" : "them");
}

/* ---- the worklist --------------------------------------------------------------------- */

void fxl_worklist_release(fxl_worklist *w)
{
    size_t i;

    if (!w)
        return;
    for (i = 0; i < w->n; i++) {
        free(w->entries[i].fields);
        free(w->entries[i].items);
        free(w->entries[i].warnings);
    }
    free(w->entries);
    free(w->unmatched);
    memset(w, 0, sizeof *w);
}

static int add_warning(fxl_ctx *ctx, fxl_worklist_entry *e, size_t *cap, const char *text)
{
    int rc = fxl_grow(ctx, (void **)&e->warnings, cap, e->n_warnings, sizeof *e->warnings,
                      "building the worklist");
    if (rc == 0)
        copy(e->warnings[e->n_warnings++], sizeof *e->warnings, text);
    return rc;
}

/* One active course: its fields, items and warnings for the day. */
static int fill_entry(fxl_ctx *ctx, fxl_worklist_entry *e, int highest, const char *from,
                      const char *to, const char *at)
{
    int64_t open_id = 0, *ids = NULL;
    size_t n_ids = 0, cap = 0, i;
    char open_at[FXL_TIME_LEN], text[FXL_WORKLIST_TEXT_LEN], day[11];
    int open_number = 0, rc, number;
    fxl_stmt s = FXL_STMT_INIT;

    if ((rc = wl_open_fraction(ctx, &open_id, &open_number, open_at, e->plan_id)) != 0)
        goto cleanup;
    if ((rc = fxl_stmt_prepare(&s, ctx,
            "SELECT EXISTS (SELECT 1 FROM fractions fr WHERE fr.plan_id = :plan "
            "AND fr.treated_at >= :from AND fr.treated_at < :to AND NOT EXISTS ("
            "  SELECT 1 FROM fraction_marks b WHERE b.fraction_id = fr.id AND b.kind = 'begun' "
            "  AND NOT EXISTS (SELECT 1 FROM fraction_marks c WHERE c.fraction_id = fr.id "
            "  AND c.kind = 'closed')))")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":plan", e->plan_id);
    fxl_stmt_bind_text(&s, ":from", from);
    fxl_stmt_bind_text(&s, ":to", to);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    e->treated_today = (int)fxl_stmt_int(&s, 0);
    fxl_stmt_finalize(&s);
    rc = 0;

    number = highest + 1;
    if (open_id && strcmp(open_at, from) >= 0 && strcmp(open_at, to) < 0) {
        e->open_fraction_id = open_id;
        number = open_number;
    } else if (open_id) {
        fxl_zone_local_date(day, open_at);
        snprintf(text, sizeof text,
                 "fraction %d (begun %s) was not finished; it is closed, its unmeasured due fields "
                 "named, when the next fraction begins", open_number, day);
        if ((rc = add_warning(ctx, e, &cap, text)) != 0)
            goto cleanup;
    }
    e->next_fraction = number;
    if ((rc = wl_fields(ctx, &e->fields, &e->n_fields, NULL, NULL, e->plan_id, e->patient_id,
                        number, e->open_fraction_id ? open_at : at, e->open_fraction_id)) != 0)
        goto cleanup;
    for (i = 0; i < e->n_fields; i++) {
        fxl_worklist_field *f = &e->fields[i];
        if (e->treated_today && !e->open_fraction_id)
            f->due_reason = FXL_DUE_NOT;  /* today's fraction is done */
        if (f->due_reason != FXL_DUE_NOT)
            e->n_due++;
        if (f->due_reason != FXL_DUE_NOT && !f->measured && !f->detector_ok) {
            snprintf(text, sizeof text, "%.64s %s: %.170s", f->name, f->point, f->detector_warning);
            if ((rc = add_warning(ctx, e, &cap, text)) != 0)
                goto cleanup;
        }
    }
    if ((rc = wl_field_detectors(ctx, &ids, &n_ids, e->fields, e->n_fields)) != 0 ||
        (rc = wl_items(ctx, &e->items, &e->n_items, e->patient_id, ids, n_ids)) != 0)
        goto cleanup;
    e->n_holds = fxl_holds_count(e->items, e->n_items);
cleanup:
    fxl_stmt_finalize(&s);
    free(ids);
    return rc;
}

typedef struct wl_line {
    int position;
    char at[FXL_TIME_LEN];
    char mrn[65];
    char plan[65];
    int used;
} wl_line;

static int load_daylist(fxl_ctx *ctx, wl_line **out, size_t *n, char imported[FXL_TIME_LEN],
                        const char *day)
{
    fxl_stmt s = FXL_STMT_INIT;
    wl_line *list = NULL;
    size_t cap = 0, count = 0;
    int64_t import_id = 0;
    int rc;

    *out = NULL;
    *n = 0;
    imported[0] = '\0';
    if ((rc = fxl_stmt_prepare(&s, ctx,
            "SELECT id, created_at FROM daylist_imports WHERE day = :day ORDER BY id DESC LIMIT 1")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":day", day);
    if ((rc = fxl_stmt_step(&s)) <= 0)
        goto cleanup;
    import_id = fxl_stmt_int(&s, 0);
    copy(imported, FXL_TIME_LEN, fxl_stmt_text(&s, 1));
    fxl_stmt_finalize(&s);
    if ((rc = fxl_stmt_prepare(&s, ctx,
            "SELECT position, coalesce(scheduled_at, ''), mrn, coalesce(plan_label, '') "
            "FROM daylist_lines WHERE import_id = :id "
            "ORDER BY scheduled_at IS NULL, scheduled_at, position")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":id", import_id);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        wl_line *l;
        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list, "reading the day list")) != 0)
            goto cleanup;
        l = &list[count++];
        l->position = (int)fxl_stmt_int(&s, 0);
        copy(l->at, sizeof l->at, fxl_stmt_text(&s, 1));
        copy(l->mrn, sizeof l->mrn, fxl_stmt_text(&s, 2));
        copy(l->plan, sizeof l->plan, fxl_stmt_text(&s, 3));
    }
    if (rc == 0) {
        *out = list;
        *n = count;
        list = NULL;
    }
cleanup:
    fxl_stmt_finalize(&s);
    free(list);
    return rc < 0 ? rc : 0;
}

static void swap_entries(fxl_worklist_entry *a, fxl_worklist_entry *b)
{
    fxl_worklist_entry t = *a;
    *a = *b;
    *b = t;
}

int fxl_worklist_build(fxl_ctx *ctx, fxl_worklist *out, const char *at_in)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_zone z;
    wl_line *lines = NULL;
    int *highest = NULL;
    size_t cap = 0, hcap = 0, ucap = 0, n_lines = 0, i, k, placed = 0;
    char at[FXL_TIME_LEN], from[FXL_TIME_LEN], to[FXL_TIME_LEN], text[FXL_WORKLIST_TEXT_LEN];
    int rc, zoned = 0;

    memset(out, 0, sizeof *out);
    if (at_in) {
        if (fxl_time_normalize(at, at_in, 0) != 0)
            return fxl_fail(ctx, FXL_EINVAL, "time '%s' is not in the stored form", at_in);
    } else {
        fxl_now(ctx, at);
    }
    if ((rc = fxl_zone_enter(ctx, &z)) != 0)
        return rc;
    zoned = 1;
    copy(out->timezone, sizeof out->timezone, z.name);
    fxl_zone_local_date(out->date, at);
    if (fxl_zone_day_bounds(from, to, out->date) != 0) {
        rc = fxl_fail(ctx, FXL_EINVAL, "cannot place the day %s in time zone %s", out->date, z.name);
        goto cleanup;
    }

    /* Active courses: a plan no other plan replaces, imported before the
     * day ends, with fractions still to give or one given today. */
    if ((rc = fxl_stmt_prepare(&s, ctx,
            "SELECT p.id, p.mrn, p.family_name, p.given_name, pl.id, pl.label, pl.site, pl.technique, "
            "pl.fractions, coalesce((SELECT max(number) FROM fractions WHERE plan_id = pl.id), 0) AS hi, "
            "EXISTS (SELECT 1 FROM fractions f WHERE f.plan_id = pl.id AND f.treated_at >= :from "
            "        AND f.treated_at < :to) AS today "
            "FROM plans pl JOIN patients p ON p.id = pl.patient_id "
            "WHERE pl.created_at < :to AND NOT EXISTS (SELECT 1 FROM plans r WHERE r.replaces_plan_id = pl.id "
            "      AND r.created_at < :to) "
            "AND (hi < pl.fractions OR today) ORDER BY p.mrn, pl.created_at, pl.id")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":from", from);
    fxl_stmt_bind_text(&s, ":to", to);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        fxl_worklist_entry *e;
        if ((rc = fxl_grow(ctx, (void **)&out->entries, &cap, out->n, sizeof *out->entries,
                           "building the worklist")) != 0 ||
            (rc = fxl_grow(ctx, (void **)&highest, &hcap, out->n, sizeof *highest,
                           "building the worklist")) != 0)
            goto cleanup;
        e = &out->entries[out->n];
        highest[out->n] = (int)fxl_stmt_int(&s, 9);
        out->n++;
        e->patient_id = fxl_stmt_int(&s, 0);
        copy(e->mrn, sizeof e->mrn, fxl_stmt_text(&s, 1));
        if (*fxl_stmt_text(&s, 3))
            snprintf(e->patient_name, sizeof e->patient_name, "%s, %s", fxl_stmt_text(&s, 2),
                     fxl_stmt_text(&s, 3));
        else
            copy(e->patient_name, sizeof e->patient_name, fxl_stmt_text(&s, 2));
        e->plan_id = fxl_stmt_int(&s, 4);
        copy(e->plan, sizeof e->plan, fxl_stmt_text(&s, 5));
        copy(e->site, sizeof e->site, fxl_stmt_text(&s, 6));
        copy(e->technique, sizeof e->technique, fxl_stmt_text(&s, 7));
        e->fractions = (int)fxl_stmt_int(&s, 8);
    }
    if (rc < 0)
        goto cleanup;
    fxl_stmt_finalize(&s);
    for (i = 0; i < out->n; i++)
        if ((rc = fill_entry(ctx, &out->entries[i], highest[i], from, to, at)) != 0)
            goto cleanup;

    /* Day-list order first; the rest keep MRN order. */
    if ((rc = load_daylist(ctx, &lines, &n_lines, out->daylist_imported_at, out->date)) != 0)
        goto cleanup;
    for (k = 0; k < n_lines; k++) {
        size_t match = out->n;
        for (i = placed; i < out->n; i++) {
            fxl_worklist_entry *e = &out->entries[i];
            if (strcmp(e->mrn, lines[k].mrn) == 0 && (!lines[k].plan[0] || strcmp(e->plan, lines[k].plan) == 0)) {
                match = i;
                break;
            }
        }
        if (match == out->n) {
            snprintf(text, sizeof text, "day list: %s%s%s%s has no active course today",
                     lines[k].mrn, lines[k].plan[0] ? " plan '" : "", lines[k].plan,
                     lines[k].plan[0] ? "'" : "");
            if ((rc = fxl_grow(ctx, (void **)&out->unmatched, &ucap, out->n_unmatched,
                               sizeof *out->unmatched, "building the worklist")) != 0)
                goto cleanup;
            copy(out->unmatched[out->n_unmatched++], sizeof *out->unmatched, text);
            continue;
        }
        /* keep the MRN order of the rest: rotate the match into place */
        for (i = match; i > placed; i--)
            swap_entries(&out->entries[i], &out->entries[i - 1]);
        out->entries[placed].in_day_list = 1;
        copy(out->entries[placed].scheduled_at, sizeof out->entries[placed].scheduled_at, lines[k].at);
        placed++;
    }
    for (i = 0; i < out->n; i++)
        out->entries[i].line = (int)i + 1;
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    if (zoned)
        fxl_zone_leave(&z);
    free(lines);
    free(highest);
    if (rc != 0)
        fxl_worklist_release(out);
    return rc;
}

/* ---- JSON ----------------------------------------------------------------------------- */

static cJSON *item_json(const fxl_worklist_item *it)
{
    cJSON *o = cJSON_CreateObject();

    fxl_json_put_id(o, "id", it->id);
    cJSON_AddStringToObject(o, "rule", it->rule);
    cJSON_AddNumberToObject(o, "severity", it->severity);
    cJSON_AddStringToObject(o, "status", it->status);
    cJSON_AddBoolToObject(o, "hold", it->is_hold);
    cJSON_AddBoolToObject(o, "on_detector", it->on_detector);
    fxl_json_put_text(o, "field", it->field);
    fxl_json_put_text(o, "point", it->point);
    fxl_json_put_text(o, "detector", it->detector);
    if (it->fraction_number)
        cJSON_AddNumberToObject(o, "fraction", it->fraction_number);
    else
        cJSON_AddNullToObject(o, "fraction");
    cJSON_AddStringToObject(o, "opened_at", it->opened_at);
    cJSON_AddStringToObject(o, "summary", it->summary);
    return o;
}

cJSON *fxl_worklist_items_json(const fxl_worklist_item *items, size_t n)
{
    cJSON *a = cJSON_CreateArray();
    size_t i;

    for (i = 0; a && i < n; i++)
        cJSON_AddItemToArray(a, item_json(&items[i]));
    return a;
}

cJSON *fxl_worklist_json(const fxl_worklist *w)
{
    cJSON *root = cJSON_CreateObject(), *list, *un;
    size_t i, k;

    if (!root)
        return NULL;
    cJSON_AddStringToObject(root, "date", w->date);
    cJSON_AddStringToObject(root, "timezone", w->timezone);
    fxl_json_put_text(root, "day_list_imported_at", w->daylist_imported_at);
    list = cJSON_AddArrayToObject(root, "patients");
    for (i = 0; i < w->n; i++) {
        const fxl_worklist_entry *e = &w->entries[i];
        cJSON *o = cJSON_CreateObject(), *fields, *warn;

        cJSON_AddNumberToObject(o, "line", e->line);
        fxl_json_put_text(o, "scheduled_at", e->scheduled_at);
        cJSON_AddBoolToObject(o, "in_day_list", e->in_day_list);
        cJSON_AddStringToObject(o, "mrn", e->mrn);
        cJSON_AddStringToObject(o, "patient_name", e->patient_name);
        cJSON_AddStringToObject(o, "plan", e->plan);
        cJSON_AddStringToObject(o, "site", e->site);
        cJSON_AddStringToObject(o, "technique", e->technique);
        cJSON_AddNumberToObject(o, "fractions", e->fractions);
        cJSON_AddNumberToObject(o, "next_fraction", e->next_fraction);
        cJSON_AddBoolToObject(o, "resuming", e->open_fraction_id != 0);
        cJSON_AddBoolToObject(o, "treated_today", e->treated_today);
        cJSON_AddNumberToObject(o, "holds", (double)e->n_holds);
        fields = cJSON_AddArrayToObject(o, "fields");
        for (k = 0; k < e->n_fields; k++) {
            const fxl_worklist_field *f = &e->fields[k];
            cJSON *fo = cJSON_CreateObject();
            cJSON_AddStringToObject(fo, "field", f->name);
            cJSON_AddStringToObject(fo, "point", f->point);
            cJSON_AddStringToObject(fo, "beam", f->beam);
            cJSON_AddNumberToObject(fo, "mu", f->mu);
            fxl_json_put_number(fo, "expected_dose_cgy", f->expected_dose_cgy);
            cJSON_AddStringToObject(fo, "policy", f->policy);
            cJSON_AddBoolToObject(fo, "due", f->due_reason != FXL_DUE_NOT);
            if (f->due_reason != FXL_DUE_NOT)
                cJSON_AddStringToObject(fo, "due_reason", fxl_due_reason_text(f->due_reason));
            else
                cJSON_AddNullToObject(fo, "due_reason");
            cJSON_AddBoolToObject(fo, "measured", f->measured);
            fxl_json_put_text(fo, "detector", f->detector);
            cJSON_AddBoolToObject(fo, "detector_ok", f->detector_ok);
            fxl_json_put_text(fo, "detector_warning", f->detector_warning);
            cJSON_AddItemToArray(fields, fo);
        }
        cJSON_AddItemToObject(o, "items", fxl_worklist_items_json(e->items, e->n_items));
        warn = cJSON_AddArrayToObject(o, "warnings");
        for (k = 0; k < e->n_warnings; k++)
            cJSON_AddItemToArray(warn, cJSON_CreateString(e->warnings[k]));
        cJSON_AddItemToArray(list, o);
    }
    un = cJSON_AddArrayToObject(root, "day_list_unmatched");
    for (i = 0; i < w->n_unmatched; i++)
        cJSON_AddItemToArray(un, cJSON_CreateString(w->unmatched[i]));
    return root;
}
