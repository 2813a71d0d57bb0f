/* The review queue in the database: opening items for rule hits, linking
 * amended readings, listing with filters, showing one item with its
 * measurement, trend and events, and the signed events with their role
 * checks. Workflow: docs/review.md. */
#include <ctype.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include <cjson/cJSON.h>

#include "fxl/drift.h"
#include "fxl/review.h"
#include "fxl/rules.h"
#include "store/audit.h"
#include "store/auth_int.h"
#include "store/grow.h"
#include "store/json_put.h"
#include "store/review_store.h"
#include "store/stmt.h"

/* ---- small helpers ---------------------------------------------------------- */

static void copy(char *dst, size_t size, const char *src)
{
    snprintf(dst, size, "%s", src ? src : "");
}

/* The review queue's arrays grow through fxl_grow with one message. */
static int grow(fxl_ctx *ctx, void **arr, size_t *cap, size_t count, size_t elem)
{
    return fxl_grow(ctx, arr, cap, count, elem, "reading the review queue");
}

static int is_blank(const char *s)
{
    for (; s && *s; s++)
        if (!isspace((unsigned char)*s))
            return 0;
    return 1;
}

/* ---- dispositions --------------------------------------------------------- */

int fxl_disposition_list_parse(fxl_disposition_list *out, const char *text)
{
    const char *p = text ? text : "";

    memset(out, 0, sizeof *out);
    while (*p) {
        const char *end = strchr(p, ','), *a = p, *b;
        if (!end)
            end = p + strlen(p);
        b = end;
        while (a < b && isspace((unsigned char)*a))
            a++;
        while (b > a && isspace((unsigned char)b[-1]))
            b--;
        if (b > a) {
            if (out->n >= FXL_DISPOSITIONS_MAX || (size_t)(b - a) > FXL_DISPOSITION_MAX)
                return FXL_EINVAL;
            memcpy(out->name[out->n], a, (size_t)(b - a));
            out->name[out->n][b - a] = '\0';
            out->n++;
        }
        p = *end ? end + 1 : end;
    }
    return 0;
}

int fxl_review_dispositions(fxl_ctx *ctx, fxl_disposition_list *out)
{
    char text[4096];
    int rc = fxl_setting_get(ctx, "dispositions", text, sizeof text);

    if (rc == FXL_ENOTFOUND)
        text[0] = '\0';
    else if (rc != 0)
        return rc;
    if (fxl_disposition_list_parse(out, text) != 0)
        return fxl_fail(ctx, FXL_EINVAL,
                        "setting 'dispositions' must be a comma-separated list of at most %d "
                        "entries of at most %d characters each",
                        FXL_DISPOSITIONS_MAX, FXL_DISPOSITION_MAX);
    if (out->n == 0)
        fxl_disposition_list_parse(out, FXL_DISPOSITIONS_DEFAULT);
    return 0;
}

/* ---- opening items (inside the caller's transaction) ----------------------- */

static int rule_key_taken(fxl_ctx *ctx, int *taken, const char *rule, const char *key)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc = fxl_stmt_prepare(&s, ctx,
                              "SELECT 1 FROM review_items WHERE rule = :rule AND rule_key = :key");

    if (rc == 0) {
        fxl_stmt_bind_text(&s, ":rule", rule);
        fxl_stmt_bind_text(&s, ":key", key);
        rc = fxl_stmt_step(&s);
        if (rc >= 0) {
            *taken = rc;
            rc = 0;
        }
    }
    fxl_stmt_finalize(&s);
    return rc;
}

static void bind_id_opt(fxl_stmt *s, const char *name, int64_t id)
{
    if (id)
        fxl_stmt_bind_int(s, name, id);
    else
        fxl_stmt_bind_null(s, name);
}

/* Inserts one event row; *out_id receives its id. */
static int insert_event(fxl_ctx *ctx, int64_t *out_id, int64_t item_id, const char *kind,
                        const char *disposition, const char *comment, const char *now)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc = fxl_stmt_prepare(&s, ctx,
                              "INSERT INTO review_events (item_id, kind, disposition, comment, "
                              "user_id, created_at) VALUES (:item, :kind, :disp, :comment, :user, :now)");

    if (rc == 0) {
        fxl_stmt_bind_int(&s, ":item", item_id);
        fxl_stmt_bind_text(&s, ":kind", kind);
        fxl_stmt_bind_text(&s, ":disp", disposition);
        fxl_stmt_bind_text(&s, ":comment", comment);
        fxl_stmt_bind_int(&s, ":user", fxl_user_id(ctx));
        fxl_stmt_bind_text(&s, ":now", now);
        rc = fxl_stmt_exec(&s);
        if (rc == 0)
            *out_id = sqlite3_last_insert_rowid(ctx->db);
    }
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_review_open_item(fxl_ctx *ctx, int64_t *out_id, const fxl_review_open_spec *spec)
{
    fxl_stmt s = FXL_STMT_INIT;
    cJSON *audit = NULL;
    char now[FXL_TIME_LEN];
    int64_t item_id = 0, event_id = 0;
    int rc, taken = 0;

    if (out_id)
        *out_id = 0;
    if (!fxl_user_id(ctx))
        return fxl_fail(ctx, FXL_EPERM, "opening a review item needs a user");
    if (!spec || !spec->rule || !*spec->rule || !spec->summary || !*spec->summary ||
        spec->severity < FXL_SEVERITY_LOW || spec->severity > FXL_SEVERITY_CRITICAL)
        return fxl_fail(ctx, FXL_EINVAL, "internal: incomplete review item (rule, summary, severity 1 to 4)");
    if (spec->rule_key) {
        if ((rc = rule_key_taken(ctx, &taken, spec->rule, spec->rule_key)) != 0)
            return rc;
        if (taken)
            return 0;
    }
    fxl_now(ctx, now);
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "INSERT INTO review_items (rule, rule_key, severity, status, "
                               "measurement_id, patient_id, detector_id, field_id, summary, opened_at) "
                               "VALUES (:rule, :key, :sev, 'open', :m, :p, :d, :f, :summary, :now)")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":rule", spec->rule);
    fxl_stmt_bind_text(&s, ":key", spec->rule_key);
    fxl_stmt_bind_int(&s, ":sev", spec->severity);
    bind_id_opt(&s, ":m", spec->measurement_id);
    bind_id_opt(&s, ":p", spec->patient_id);
    bind_id_opt(&s, ":d", spec->detector_id);
    bind_id_opt(&s, ":f", spec->field_id);
    fxl_stmt_bind_text(&s, ":summary", spec->summary);
    fxl_stmt_bind_text(&s, ":now", now);
    if ((rc = fxl_stmt_exec(&s)) != 0)
        goto cleanup;
    item_id = sqlite3_last_insert_rowid(ctx->db);
    if ((rc = insert_event(ctx, &event_id, item_id, "open", NULL, NULL, now)) != 0)
        goto cleanup;
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "rule", spec->rule);
    if (spec->rule_key)
        cJSON_AddStringToObject(audit, "rule_key", spec->rule_key);
    cJSON_AddNumberToObject(audit, "severity", spec->severity);
    fxl_json_put_id(audit, "measurement_id", spec->measurement_id);
    fxl_json_put_id(audit, "patient_id", spec->patient_id);
    fxl_json_put_id(audit, "detector_id", spec->detector_id);
    fxl_json_put_id(audit, "field_id", spec->field_id);
    cJSON_AddStringToObject(audit, "summary", spec->summary);
    cJSON_AddNumberToObject(audit, "event_id", (double)event_id);
    if ((rc = fxl_audit_append(ctx, "open", "review_items", item_id, audit)) != 0)
        goto cleanup;
    if (out_id)
        *out_id = item_id;
cleanup:
    fxl_stmt_finalize(&s);
    cJSON_Delete(audit);
    return rc;
}

/* ---- amendments --------------------------------------------------------------- */

/* Ids of the items whose measurement is `mid`, into a heap array. */
static int items_of_measurement(fxl_ctx *ctx, int64_t **out, size_t *n, int64_t mid)
{
    fxl_stmt s = FXL_STMT_INIT;
    size_t cap = 0;
    int rc;

    *out = NULL;
    *n = 0;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT id FROM review_items WHERE measurement_id = :m ORDER BY id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":m", mid);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        if ((rc = grow(ctx, (void **)out, &cap, *n, sizeof **out)) != 0)
            goto cleanup;
        (*out)[(*n)++] = fxl_stmt_int(&s, 0);
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* Adds a comment event with an audit row unless the item already has a
 * comment starting with `marker`. */
static int add_link_comment(fxl_ctx *ctx, int64_t item_id, const char *marker, const char *comment,
                            const char *now)
{
    fxl_stmt s = FXL_STMT_INIT;
    cJSON *audit = NULL;
    int64_t event_id = 0;
    int rc;

    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT 1 FROM review_events WHERE item_id = :item AND kind = 'comment' "
                               "AND substr(comment, 1, length(:marker)) = :marker")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":item", item_id);
    fxl_stmt_bind_text(&s, ":marker", marker);
    if ((rc = fxl_stmt_step(&s)) != 0) {
        if (rc == 1)
            rc = 0;   /* already linked */
        goto cleanup;
    }
    if ((rc = insert_event(ctx, &event_id, item_id, "comment", NULL, comment, now)) != 0)
        goto cleanup;
    audit = cJSON_CreateObject();
    cJSON_AddNumberToObject(audit, "item_id", (double)item_id);
    cJSON_AddStringToObject(audit, "kind", "comment");
    cJSON_AddStringToObject(audit, "comment", comment);
    rc = fxl_audit_append(ctx, "comment", "review_events", event_id, audit);
cleanup:
    fxl_stmt_finalize(&s);
    cJSON_Delete(audit);
    return rc;
}

int fxl_review_follow_amendment(fxl_ctx *ctx, int64_t old_id, int64_t new_id)
{
    fxl_stmt s = FXL_STMT_INIT;
    int64_t *old_items = NULL, *new_items = NULL;
    size_t n_old = 0, n_new = 0, i;
    char now[FXL_TIME_LEN], reason[501] = "", verdict_text[80] = "", marker[80], comment[1400];
    char list[200] = "";
    fxl_verdict v;
    double dev = NAN;
    int rc;

    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT coalesce(amend_reason, ''), verdict, deviation_pct FROM measurements "
                               "WHERE id = :new AND supersedes_id = :old")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":new", new_id);
    fxl_stmt_bind_int(&s, ":old", old_id);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 0) {
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "measurement #%lld does not supersede #%lld",
                      (long long)new_id, (long long)old_id);
        goto cleanup;
    }
    copy(reason, sizeof reason, fxl_stmt_text(&s, 0));
    if (fxl_verdict_parse(&v, fxl_stmt_text(&s, 1)) == 0)
        copy(verdict_text, sizeof verdict_text, fxl_verdict_label(v));
    else
        copy(verdict_text, sizeof verdict_text, fxl_stmt_text(&s, 1));
    dev = fxl_stmt_double_opt(&s, 2);
    fxl_stmt_finalize(&s);

    if ((rc = items_of_measurement(ctx, &old_items, &n_old, old_id)) != 0 ||
        (rc = items_of_measurement(ctx, &new_items, &n_new, new_id)) != 0)
        goto cleanup;
    fxl_now(ctx, now);

    snprintf(marker, sizeof marker, "superseded by measurement #%lld", (long long)new_id);
    if (isfinite(dev))
        snprintf(comment, sizeof comment, "%s: %s; new result: %s, deviation %+.2f %%", marker,
                 reason, verdict_text, dev);
    else
        snprintf(comment, sizeof comment, "%s: %s; new result: %s", marker, reason, verdict_text);
    for (i = 0; i < n_old; i++)
        if ((rc = add_link_comment(ctx, old_items[i], marker, comment, now)) != 0)
            goto cleanup;

    for (i = 0; i < n_old; i++) {
        char one[32];
        snprintf(one, sizeof one, "%s#%lld", i ? ", " : "", (long long)old_items[i]);
        strncat(list, one, sizeof list - strlen(list) - 1);
    }
    snprintf(marker, sizeof marker, "supersedes measurement #%lld", (long long)old_id);
    if (n_old)
        snprintf(comment, sizeof comment, "%s (%s): %s; its item %s stays for review", marker,
                 n_old == 1 ? "one item" : "items", reason, list);
    else
        snprintf(comment, sizeof comment, "%s: %s", marker, reason);
    for (i = 0; i < n_new; i++)
        if ((rc = add_link_comment(ctx, new_items[i], marker, comment, now)) != 0)
            goto cleanup;
cleanup:
    fxl_stmt_finalize(&s);
    free(old_items);
    free(new_items);
    return rc;
}

/* ---- listing ---------------------------------------------------------------- */

static const char LIST_SQL[] =
    "SELECT i.id, i.rule, coalesce(i.rule_key, ''), i.severity, i.status, "
    "       coalesce(i.measurement_id, 0), "
    "       coalesce((SELECT n.id FROM measurements n WHERE n.supersedes_id = i.measurement_id), 0), "
    "       coalesce(p.id, 0), coalesce(p.mrn, ''), coalesce(p.family_name, ''), "
    "       coalesce(p.given_name, ''), coalesce(d.id, 0), coalesce(d.serial, ''), "
    "       coalesce(f.id, 0), coalesce(f.name, ''), coalesce(f.point, ''), coalesce(pl.label, ''), "
    "       coalesce(fr.number, 0), i.summary, i.opened_at, "
    "       CAST(julianday(:now) - julianday(i.opened_at) AS INTEGER), "
    "       coalesce(e.kind, ''), coalesce(u.login, ''), coalesce(e.created_at, ''), "
    "       coalesce((SELECT c.disposition FROM review_events c WHERE c.item_id = i.id "
    "                 AND c.kind = 'close' ORDER BY c.id DESC LIMIT 1), '') "
    "FROM review_items i "
    "LEFT JOIN measurements m ON m.id = i.measurement_id "
    "LEFT JOIN fractions fr ON fr.id = m.fraction_id "
    "LEFT JOIN fields f ON f.id = coalesce(i.field_id, m.field_id) "
    "LEFT JOIN plans pl ON pl.id = coalesce(fr.plan_id, f.plan_id) "
    "LEFT JOIN patients p ON p.id = coalesce(i.patient_id, pl.patient_id) "
    "LEFT JOIN detectors d ON d.id = coalesce(i.detector_id, m.detector_id) "
    "LEFT JOIN review_events e ON e.id = (SELECT max(x.id) FROM review_events x WHERE x.item_id = i.id) "
    "LEFT JOIN users u ON u.id = e.user_id "
    "WHERE (:id = 0 OR i.id = :id) "
    "  AND (:mrn IS NULL OR p.mrn = :mrn) "
    "  AND (:serial IS NULL OR d.serial = :serial) "
    "  AND ((:open AND i.status = 'open') OR (:ack AND i.status = 'acknowledged') "
    "       OR (:closed AND i.status = 'closed')) "
    "  AND i.severity >= :minsev "
    "  AND (:since IS NULL OR i.opened_at >= :since) "
    "ORDER BY i.severity DESC, i.opened_at ASC, i.id ASC";

static void read_item(fxl_stmt *s, fxl_review_item *it)
{
    memset(it, 0, sizeof *it);
    it->id = fxl_stmt_int(s, 0);
    copy(it->rule, sizeof it->rule, fxl_stmt_text(s, 1));
    copy(it->rule_key, sizeof it->rule_key, fxl_stmt_text(s, 2));
    it->severity = (int)fxl_stmt_int(s, 3);
    copy(it->status, sizeof it->status, fxl_stmt_text(s, 4));
    it->measurement_id = fxl_stmt_int(s, 5);
    it->superseded_by = fxl_stmt_int(s, 6);
    it->patient_id = fxl_stmt_int(s, 7);
    copy(it->mrn, sizeof it->mrn, fxl_stmt_text(s, 8));
    if (*fxl_stmt_text(s, 9)) {
        if (*fxl_stmt_text(s, 10))
            snprintf(it->patient_name, sizeof it->patient_name, "%s, %s", fxl_stmt_text(s, 9),
                     fxl_stmt_text(s, 10));
        else
            copy(it->patient_name, sizeof it->patient_name, fxl_stmt_text(s, 9));
    }
    it->detector_id = fxl_stmt_int(s, 11);
    copy(it->detector, sizeof it->detector, fxl_stmt_text(s, 12));
    it->field_id = fxl_stmt_int(s, 13);
    copy(it->field, sizeof it->field, fxl_stmt_text(s, 14));
    copy(it->point, sizeof it->point, fxl_stmt_text(s, 15));
    copy(it->plan, sizeof it->plan, fxl_stmt_text(s, 16));
    it->fraction_number = (int)fxl_stmt_int(s, 17);
    copy(it->summary, sizeof it->summary, fxl_stmt_text(s, 18));
    copy(it->opened_at, sizeof it->opened_at, fxl_stmt_text(s, 19));
    it->age_days = (long)fxl_stmt_int(s, 20);
    if (it->age_days < 0)
        it->age_days = 0;
    copy(it->last_event, sizeof it->last_event, fxl_stmt_text(s, 21));
    copy(it->last_event_by, sizeof it->last_event_by, fxl_stmt_text(s, 22));
    copy(it->last_event_at, sizeof it->last_event_at, fxl_stmt_text(s, 23));
    copy(it->disposition, sizeof it->disposition, fxl_stmt_text(s, 24));
}

static int exists(fxl_ctx *ctx, const char *sql, const char *value, int *found)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc = fxl_stmt_prepare(&s, ctx, sql);

    if (rc == 0) {
        fxl_stmt_bind_text(&s, ":v", value);
        rc = fxl_stmt_step(&s);
        if (rc >= 0) {
            *found = rc;
            rc = 0;
        }
    }
    fxl_stmt_finalize(&s);
    return rc;
}

static int query_items(fxl_ctx *ctx, fxl_review_item **out, size_t *n, const fxl_queue_filter *f,
                       int64_t id)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_review_item *list = NULL;
    char now[FXL_TIME_LEN];
    size_t cap = 0, count = 0;
    unsigned mask = f->status_mask ? f->status_mask : FXL_QUEUE_ACTIVE;
    int rc;

    fxl_now(ctx, now);
    if ((rc = fxl_stmt_prepare(&s, ctx, LIST_SQL)) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":now", now);
    fxl_stmt_bind_int(&s, ":id", id);
    fxl_stmt_bind_text(&s, ":mrn", f->mrn);
    fxl_stmt_bind_text(&s, ":serial", f->detector);
    fxl_stmt_bind_int(&s, ":open", (mask & FXL_QUEUE_OPEN) != 0);
    fxl_stmt_bind_int(&s, ":ack", (mask & FXL_QUEUE_ACKNOWLEDGED) != 0);
    fxl_stmt_bind_int(&s, ":closed", (mask & FXL_QUEUE_CLOSED) != 0);
    fxl_stmt_bind_int(&s, ":minsev", f->min_severity);
    fxl_stmt_bind_text(&s, ":since", f->since);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        if ((rc = grow(ctx, (void **)&list, &cap, count, sizeof *list)) != 0)
            goto cleanup;
        read_item(&s, &list[count++]);
    }
    if (rc == 0) {
        *out = count ? list : NULL;
        *n = count;
        if (count)
            list = NULL;
    }
cleanup:
    fxl_stmt_finalize(&s);
    free(list);
    return rc;
}

int fxl_queue_list(fxl_ctx *ctx, fxl_review_item **out, size_t *n, const fxl_queue_filter *f)
{
    fxl_queue_filter none;
    char since[FXL_TIME_LEN];
    int rc, found = 0;

    *out = NULL;
    *n = 0;
    if ((rc = fxl_require_role(ctx, FXL_ROLES_ANY, "reading the review queue")) != 0)
        return rc;
    if (!f) {
        memset(&none, 0, sizeof none);
        f = &none;
    }
    if (f->min_severity < 0 || f->min_severity > FXL_SEVERITY_CRITICAL)
        return fxl_fail(ctx, FXL_EINVAL, "severity '%d' must be 1 to 4", f->min_severity);
    if (f->status_mask & ~FXL_QUEUE_ALL)
        return fxl_fail(ctx, FXL_EINVAL, "internal: unknown status filter bits");
    if (f->since) {
        if (fxl_time_normalize(since, f->since, 0) != 0)
            return fxl_fail(ctx, FXL_EINVAL, "date '%s' must be YYYY-MM-DD or YYYY-MM-DDTHH:MM[:SS]",
                            f->since);
        none = *f;
        none.since = since;
        f = &none;
    }
    if (f->mrn) {
        if ((rc = exists(ctx, "SELECT 1 FROM patients WHERE mrn = :v", f->mrn, &found)) != 0)
            return rc;
        if (!found)
            return fxl_fail(ctx, FXL_ENOTFOUND, "unknown patient '%s' (see 'fxledger patient list')",
                            f->mrn);
    }
    if (f->detector) {
        if ((rc = exists(ctx, "SELECT 1 FROM detectors WHERE serial = :v", f->detector, &found)) != 0)
            return rc;
        if (!found)
            return fxl_fail(ctx, FXL_ENOTFOUND,
                            "unknown detector '%s' (see 'fxledger detector list')", f->detector);
    }
    return query_items(ctx, out, n, f, 0);
}

/* ---- showing one item ------------------------------------------------------- */

static void parse_reasons(fxl_reasons *r, const char *json)
{
    cJSON *arr = cJSON_Parse(json), *e;

    memset(r, 0, sizeof *r);
    if (!cJSON_IsArray(arr)) {
        if (json && *json && strcmp(json, "[]") != 0)
            fxl_reasons_add(r, "%.190s", json);
        cJSON_Delete(arr);
        return;
    }
    cJSON_ArrayForEach(e, arr) {
        if (cJSON_IsString(e))
            fxl_reasons_add(r, "%.190s", e->valuestring);
    }
    cJSON_Delete(arr);
}

static int load_measurement(fxl_ctx *ctx, fxl_review_measurement *m, int64_t id)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc, i;

    memset(m, 0, sizeof *m);
    if ((rc = fxl_stmt_prepare(&s, ctx,
            "SELECT m.id, fr.number, fr.treated_at, m.created_at, u.login, f.name, f.point, b.name, "
            "       d.serial, m.reading_unit, m.reading, m.temp_c, m.temp_entered, "
            "       coalesce(m.calibration_id, 0), m.factor_n, m.cf_field_size, m.cf_ssd, m.cf_wedge, "
            "       m.cf_tray, m.cf_angle, m.cf_temp, m.corrected_dose_cgy, m.expected_dose_cgy, "
            "       m.deviation_pct, coalesce(m.threshold_set_id, 0), coalesce(t.name, ''), "
            "       coalesce(t.version, 0), m.tolerance_pct, m.action_pct, m.floor_cgy, m.verdict, "
            "       m.reasons, coalesce(m.supersedes_id, 0), coalesce(m.amend_reason, ''), "
            "       coalesce(n.id, 0), coalesce(n.amend_reason, ''), coalesce(n.verdict, ''), "
            "       n.deviation_pct, m.cf_thickness, m.cf_sdd, m.background, m.gross "
            "FROM measurements m "
            "JOIN fractions fr ON fr.id = m.fraction_id "
            "JOIN fields f ON f.id = m.field_id "
            "JOIN beams b ON b.id = f.beam_id "
            "JOIN detectors d ON d.id = m.detector_id "
            "JOIN users u ON u.id = m.user_id "
            "LEFT JOIN threshold_sets t ON t.id = m.threshold_set_id "
            "LEFT JOIN measurements n ON n.supersedes_id = m.id "
            "WHERE m.id = :id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":id", id);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 0) {
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "measurement #%lld does not exist", (long long)id);
        goto cleanup;
    }
    m->id = fxl_stmt_int(&s, 0);
    m->fraction_number = (int)fxl_stmt_int(&s, 1);
    copy(m->treated_at, sizeof m->treated_at, fxl_stmt_text(&s, 2));
    copy(m->recorded_at, sizeof m->recorded_at, fxl_stmt_text(&s, 3));
    copy(m->recorded_by, sizeof m->recorded_by, fxl_stmt_text(&s, 4));
    copy(m->field, sizeof m->field, fxl_stmt_text(&s, 5));
    copy(m->point, sizeof m->point, fxl_stmt_text(&s, 6));
    copy(m->beam, sizeof m->beam, fxl_stmt_text(&s, 7));
    copy(m->detector, sizeof m->detector, fxl_stmt_text(&s, 8));
    copy(m->reading_unit, sizeof m->reading_unit, fxl_stmt_text(&s, 9));
    m->reading = fxl_stmt_double_opt(&s, 10);
    m->temp_c = fxl_stmt_double_opt(&s, 11);
    m->temp_entered = (int)fxl_stmt_int(&s, 12);
    m->calibration_id = fxl_stmt_int(&s, 13);
    m->factor_n = fxl_stmt_double_opt(&s, 14);
    for (i = 0; i <= FXL_CF_ANGLE; i++)
        m->cf[i] = fxl_stmt_double_opt(&s, 15 + i);
    m->cf_temp = fxl_stmt_double_opt(&s, 20);
    m->corrected_dose_cgy = fxl_stmt_double_opt(&s, 21);
    m->expected_dose_cgy = fxl_stmt_double_opt(&s, 22);
    m->deviation_pct = fxl_stmt_double_opt(&s, 23);
    m->threshold_set_id = fxl_stmt_int(&s, 24);
    copy(m->threshold_name, sizeof m->threshold_name, fxl_stmt_text(&s, 25));
    m->threshold_version = (int)fxl_stmt_int(&s, 26);
    m->tolerance_pct = fxl_stmt_double_opt(&s, 27);
    m->action_pct = fxl_stmt_double_opt(&s, 28);
    m->floor_cgy = fxl_stmt_double_opt(&s, 29);
    copy(m->verdict, sizeof m->verdict, fxl_stmt_text(&s, 30));
    parse_reasons(&m->reasons, fxl_stmt_text(&s, 31));
    m->supersedes_id = fxl_stmt_int(&s, 32);
    copy(m->amend_reason, sizeof m->amend_reason, fxl_stmt_text(&s, 33));
    m->superseded_by = fxl_stmt_int(&s, 34);
    copy(m->superseded_reason, sizeof m->superseded_reason, fxl_stmt_text(&s, 35));
    copy(m->superseded_verdict, sizeof m->superseded_verdict, fxl_stmt_text(&s, 36));
    m->superseded_deviation_pct = fxl_stmt_double_opt(&s, 37);
    m->cf[FXL_CF_THICKNESS] = fxl_stmt_double_opt(&s, 38);
    m->cf[FXL_CF_SDD] = fxl_stmt_double_opt(&s, 39);
    m->background = fxl_stmt_double_opt(&s, 40);
    m->gross = (int)fxl_stmt_int(&s, 41);
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

static int load_field_trend(fxl_ctx *ctx, fxl_review_detail *d)
{
    fxl_stmt s = FXL_STMT_INIT;
    size_t cap = 0;
    int rc;

    if ((rc = fxl_stmt_prepare(&s, ctx,
            "SELECT m.id, fr.number, fr.treated_at, p.mrn, f.name, m.deviation_pct, m.verdict, "
            "       EXISTS (SELECT 1 FROM measurements n WHERE n.supersedes_id = m.id), "
            "       m.tolerance_pct, m.action_pct "
            "FROM measurements m "
            "JOIN fractions fr ON fr.id = m.fraction_id "
            "JOIN fields f ON f.id = m.field_id "
            "JOIN plans pl ON pl.id = fr.plan_id "
            "JOIN patients p ON p.id = pl.patient_id "
            "WHERE m.field_id = :field "
            "ORDER BY fr.number, fr.treated_at, m.id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":field", d->item.field_id);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        fxl_review_trend_point *t;
        double tol = fxl_stmt_double_opt(&s, 8), act = fxl_stmt_double_opt(&s, 9);
        if ((rc = grow(ctx, (void **)&d->trend, &cap, d->n_trend, sizeof *d->trend)) != 0)
            goto cleanup;
        t = &d->trend[d->n_trend++];
        t->measurement_id = fxl_stmt_int(&s, 0);
        t->fraction_number = (int)fxl_stmt_int(&s, 1);
        copy(t->treated_at, sizeof t->treated_at, fxl_stmt_text(&s, 2));
        copy(t->mrn, sizeof t->mrn, fxl_stmt_text(&s, 3));
        copy(t->field, sizeof t->field, fxl_stmt_text(&s, 4));
        t->deviation_pct = fxl_stmt_double_opt(&s, 5);
        copy(t->verdict, sizeof t->verdict, fxl_stmt_text(&s, 6));
        t->superseded = (int)fxl_stmt_int(&s, 7);
        t->is_item = t->measurement_id == d->item.measurement_id;
        t->cusum_high = t->cusum_low = NAN;
        /* Levels to draw: the item's own, else the latest known. */
        if (!d->has_measurement && isfinite(tol) && isfinite(act)) {
            d->trend_tolerance_pct = tol;
            d->trend_action_pct = act;
        }
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* The beam and point of a drift item, from its key
 * "detector:<d>:beam:<b>:point:<p>:since:..."; beam 0 and point "" for an
 * item opened before schema version 5 (one series per detector). */
static void drift_item_series(const char *key, int64_t *beam_id, char point[16])
{
    long long d = 0, b = 0;
    char p[16] = "";

    *beam_id = 0;
    point[0] = '\0';
    if (sscanf(key, "detector:%lld:beam:%lld:point:%15[a-z]", &d, &b, p) == 3) {
        *beam_id = (int64_t)b;
        snprintf(point, 16, "%s", p);
    }
}

static int load_detector_trend(fxl_ctx *ctx, fxl_review_detail *d)
{
    fxl_rule_settings rs;
    fxl_drift_point *pts = NULL;
    fxl_drift_params p;
    fxl_drift_result cr;
    fxl_stmt s = FXL_STMT_INIT;
    double *dev = NULL, *hi = NULL, *lo = NULL, *sig = NULL;
    char since[FXL_TIME_LEN] = "", point[16];
    int64_t beam_id;
    size_t n = 0, i;
    int rc;

    drift_item_series(d->item.rule_key, &beam_id, point);
    if ((rc = fxl_rule_settings_load(ctx, &rs)) != 0 ||
        (rc = fxl_drift_series(ctx, &pts, &n, since, d->item.detector_id, beam_id,
                               point[0] ? point : NULL)) != 0)
        goto cleanup;
    d->trend_is_detector = 1;
    d->cusum_target_pct = rs.cusum_target_pct;
    d->cusum_k_sd = rs.cusum_k_sd;
    d->cusum_h_sd = rs.cusum_h_sd;
    d->cusum_startup = rs.cusum_startup;
    if (beam_id && point[0]) {
        if ((rc = fxl_stmt_prepare(&s, ctx,
                                   "SELECT mc.name || ' ' || b.name FROM beams b "
                                   "JOIN machines mc ON mc.id = b.machine_id WHERE b.id = :b")) != 0)
            goto cleanup;
        fxl_stmt_bind_int(&s, ":b", beam_id);
        if ((rc = fxl_stmt_step(&s)) < 0)
            goto cleanup;
        snprintf(d->trend_series, sizeof d->trend_series, "%s %s",
                 rc == 1 ? fxl_stmt_text(&s, 0) : "?", point);
        rc = 0;
    }
    if (n == 0)
        goto cleanup;
    dev = calloc(n, sizeof *dev);
    hi = calloc(n, sizeof *hi);
    lo = calloc(n, sizeof *lo);
    sig = calloc(n, sizeof *sig);
    d->trend = calloc(n, sizeof *d->trend);
    if (!dev || !hi || !lo || !sig || !d->trend) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory reading a detector trend");
        goto cleanup;
    }
    for (i = 0; i < n; i++)
        dev[i] = pts[i].deviation_pct;
    p.target_pct = rs.cusum_target_pct;
    p.k_sigma = rs.cusum_k_sd;
    p.h_sigma = rs.cusum_h_sd;
    p.startup = (size_t)rs.cusum_startup;
    if (fxl_drift_cusum(&cr, hi, lo, sig, dev, n, &p) != 0) {
        rc = fxl_fail(ctx, FXL_EINVAL, "internal: CUSUM refused the detector's deviations");
        goto cleanup;
    }
    for (i = 0; i < n; i++) {
        fxl_review_trend_point *t = &d->trend[i];
        t->measurement_id = pts[i].measurement_id;
        t->fraction_number = pts[i].fraction_number;
        copy(t->treated_at, sizeof t->treated_at, pts[i].treated_at);
        copy(t->mrn, sizeof t->mrn, pts[i].mrn);
        copy(t->field, sizeof t->field, pts[i].field);
        t->deviation_pct = pts[i].deviation_pct;
        copy(t->verdict, sizeof t->verdict, pts[i].verdict);
        t->cusum_high = hi[i];
        t->cusum_low = lo[i];
        t->sigma_pct = sig[i];
    }
    d->n_trend = n;
cleanup:
    fxl_stmt_finalize(&s);
    free(pts);
    free(dev);
    free(hi);
    free(lo);
    free(sig);
    return rc;
}

static int load_events(fxl_ctx *ctx, fxl_review_detail *d)
{
    fxl_stmt s = FXL_STMT_INIT;
    size_t cap = 0;
    int rc;

    if ((rc = fxl_stmt_prepare(&s, ctx,
            "SELECT e.id, e.kind, coalesce(e.disposition, ''), coalesce(e.comment, ''), u.login, "
            "       u.full_name, u.role, e.created_at "
            "FROM review_events e JOIN users u ON u.id = e.user_id "
            "WHERE e.item_id = :id ORDER BY e.id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":id", d->item.id);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        fxl_review_event *e;
        if ((rc = grow(ctx, (void **)&d->events, &cap, d->n_events, sizeof *d->events)) != 0)
            goto cleanup;
        e = &d->events[d->n_events++];
        e->id = fxl_stmt_int(&s, 0);
        copy(e->kind, sizeof e->kind, fxl_stmt_text(&s, 1));
        copy(e->disposition, sizeof e->disposition, fxl_stmt_text(&s, 2));
        copy(e->comment, sizeof e->comment, fxl_stmt_text(&s, 3));
        copy(e->user, sizeof e->user, fxl_stmt_text(&s, 4));
        copy(e->user_name, sizeof e->user_name, fxl_stmt_text(&s, 5));
        copy(e->user_role, sizeof e->user_role, fxl_stmt_text(&s, 6));
        copy(e->at, sizeof e->at, fxl_stmt_text(&s, 7));
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

void fxl_review_detail_release(fxl_review_detail *d)
{
    if (!d)
        return;
    free(d->trend);
    free(d->events);
    d->trend = NULL;
    d->events = NULL;
    d->n_trend = d->n_events = 0;
}

int fxl_queue_show(fxl_ctx *ctx, fxl_review_detail *out, int64_t id)
{
    fxl_queue_filter all;
    fxl_review_item *items = NULL;
    size_t n = 0;
    int rc;

    memset(out, 0, sizeof *out);
    out->trend_tolerance_pct = out->trend_action_pct = NAN;
    out->cusum_target_pct = out->cusum_k_sd = out->cusum_h_sd = NAN;
    if ((rc = fxl_require_role(ctx, FXL_ROLES_ANY, "reading the review queue")) != 0)
        return rc;
    memset(&all, 0, sizeof all);
    all.status_mask = FXL_QUEUE_ALL;
    if ((rc = query_items(ctx, &items, &n, &all, id)) != 0)
        goto cleanup;
    if (n == 0) {
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "review item #%lld does not exist (see 'fxledger queue list')",
                      (long long)id);
        goto cleanup;
    }
    out->item = items[0];
    if (out->item.measurement_id) {
        if ((rc = load_measurement(ctx, &out->m, out->item.measurement_id)) != 0)
            goto cleanup;
        out->has_measurement = 1;
        out->trend_tolerance_pct = out->m.tolerance_pct;
        out->trend_action_pct = out->m.action_pct;
    }
    if (out->item.field_id)
        rc = load_field_trend(ctx, out);
    else if (out->item.detector_id)
        rc = load_detector_trend(ctx, out);
    if (rc == 0)
        rc = load_events(ctx, out);
cleanup:
    free(items);
    if (rc != 0)
        fxl_review_detail_release(out);
    return rc;
}

/* ---- events ------------------------------------------------------------------- */

typedef struct event_rule {
    const char *kind;
    unsigned roles;
    const char *action;         /* for the permission message */
    int comment_required;
    const char *to_status;      /* NULL: unchanged */
    int signed_act;             /* an electronic signature is required */
} event_rule;

static const event_rule EV_ACK = {"acknowledge", FXL_ROLES_CLINICAL, "acknowledging a review item",
                                  0, "acknowledged", 0};
static const event_rule EV_COMMENT = {"comment", FXL_ROLES_CLINICAL, "commenting on a review item",
                                      1, NULL, 0};
static const event_rule EV_CLOSE = {"close", FXL_ROLES_PHYSICS, "closing a review item", 0,
                                    "closed", 1};
static const event_rule EV_REOPEN = {"reopen", FXL_ROLES_PHYSICS, "reopening a review item", 1,
                                     "open", 1};

/* Refuses a transition that makes no sense from `status`. */
static int check_transition(fxl_ctx *ctx, const event_rule *r, int64_t id, const char *status)
{
    if (strcmp(r->kind, "acknowledge") == 0 && strcmp(status, "open") != 0)
        return fxl_fail(ctx, FXL_ECONFLICT, "review item #%lld is %s; only an open item can be "
                        "acknowledged", (long long)id, status);
    if (strcmp(r->kind, "close") == 0 && strcmp(status, "closed") == 0)
        return fxl_fail(ctx, FXL_ECONFLICT, "review item #%lld is already closed", (long long)id);
    if (strcmp(r->kind, "reopen") == 0 && strcmp(status, "closed") != 0)
        return fxl_fail(ctx, FXL_ECONFLICT, "review item #%lld is %s; only a closed item can be "
                        "reopened", (long long)id, status);
    return 0;
}

static int add_event(fxl_ctx *ctx, const event_rule *r, int64_t id, const char *disposition,
                     const char *comment)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_disposition_list list;
    cJSON *audit = NULL;
    char status[16] = "", now[FXL_TIME_LEN];
    const char *disp = NULL;
    int64_t event_id = 0;
    size_t i;
    int rc;

    if ((rc = fxl_require_role(ctx, r->roles, r->action)) != 0)
        return rc;
    if (comment && is_blank(comment))
        comment = NULL;
    if (r->comment_required && !comment)
        return fxl_fail(ctx, FXL_EINVAL, "a comment is required for %s (1 to %d characters)",
                        r->action, FXL_REVIEW_COMMENT_MAX);
    if (comment && strlen(comment) > FXL_REVIEW_COMMENT_MAX)
        return fxl_fail(ctx, FXL_EINVAL, "comment of %zu characters is too long: at most %d",
                        strlen(comment), FXL_REVIEW_COMMENT_MAX);
    if (strcmp(r->kind, "close") == 0) {
        char accepted[FXL_DISPOSITIONS_MAX * (FXL_DISPOSITION_MAX + 2)] = "";
        if ((rc = fxl_review_dispositions(ctx, &list)) != 0)
            return rc;
        for (i = 0; i < list.n; i++) {
            if (disposition && strcasecmp(disposition, list.name[i]) == 0)
                disp = list.name[i];
            if (i)
                strcat(accepted, ", ");
            strcat(accepted, list.name[i]);
        }
        if (!disp)
            return fxl_fail(ctx, FXL_EINVAL, "disposition '%s' is not in the list: %s",
                            disposition ? disposition : "", accepted);
    }
    /* Closing and reopening are decisions: signed by the one who makes them. */
    if (r->signed_act && (rc = fxl_sign_require(ctx, r->action)) != 0)
        return rc;

    if ((rc = fxl_begin(ctx)) != 0)
        return rc;
    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT status FROM review_items WHERE id = :id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":id", id);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 0) {
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "review item #%lld does not exist (see 'fxledger queue list')",
                      (long long)id);
        goto cleanup;
    }
    copy(status, sizeof status, fxl_stmt_text(&s, 0));
    fxl_stmt_finalize(&s);
    if ((rc = check_transition(ctx, r, id, status)) != 0)
        goto cleanup;

    fxl_now(ctx, now);
    if ((rc = insert_event(ctx, &event_id, id, r->kind, disp, comment, now)) != 0)
        goto cleanup;
    if (r->to_status) {
        if ((rc = fxl_stmt_prepare(&s, ctx, "UPDATE review_items SET status = :st WHERE id = :id")) != 0)
            goto cleanup;
        fxl_stmt_bind_text(&s, ":st", r->to_status);
        fxl_stmt_bind_int(&s, ":id", id);
        if ((rc = fxl_stmt_exec(&s)) != 0)
            goto cleanup;
    }
    audit = cJSON_CreateObject();
    cJSON_AddNumberToObject(audit, "item_id", (double)id);
    cJSON_AddStringToObject(audit, "kind", r->kind);
    if (disp)
        cJSON_AddStringToObject(audit, "disposition", disp);
    if (comment)
        cJSON_AddStringToObject(audit, "comment", comment);
    cJSON_AddStringToObject(audit, "status_before", status);
    cJSON_AddStringToObject(audit, "status_after", r->to_status ? r->to_status : status);
    if ((rc = fxl_audit_append(ctx, r->kind, "review_events", event_id, audit)) != 0)
        goto cleanup;
    if (r->signed_act) {
        char meaning[FXL_DISPOSITION_MAX + 32];
        if (disp)
            snprintf(meaning, sizeof meaning, "review closed: %s", disp);
        else
            snprintf(meaning, sizeof meaning, "review reopened");
        if ((rc = fxl_signature_add(ctx, "review_events", event_id, meaning)) != 0)
            goto cleanup;
    }
    rc = fxl_commit(ctx);
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    fxl_stmt_finalize(&s);
    cJSON_Delete(audit);
    return rc;
}

int fxl_review_acknowledge(fxl_ctx *ctx, int64_t id, const char *comment)
{
    return add_event(ctx, &EV_ACK, id, NULL, comment);
}

int fxl_review_comment(fxl_ctx *ctx, int64_t id, const char *comment)
{
    return add_event(ctx, &EV_COMMENT, id, NULL, comment);
}

int fxl_review_close(fxl_ctx *ctx, int64_t id, const char *disposition, const char *comment)
{
    return add_event(ctx, &EV_CLOSE, id, disposition, comment);
}

int fxl_review_reopen(fxl_ctx *ctx, int64_t id, const char *comment)
{
    return add_event(ctx, &EV_REOPEN, id, NULL, comment);
}
