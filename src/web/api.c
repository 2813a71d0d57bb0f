/* The JSON API under /api/v1 (docs/api.md): the same operations as the
 * pages, for other department systems, with a session cookie (and the CSRF
 * header for writes) or an API token ("Authorization: Bearer ..."). Numbers
 * that do not apply are null. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/audit.h"
#include "fxl/auth.h"
#include "fxl/server.h"
#include "fxl/core.h"
#include "fxl/detectors.h"
#include "fxl/fraction.h"
#include "fxl/record.h"
#include "fxl/review.h"
#include "fxl/thresholds.h"
#include "fxl/worklist.h"
#include "web/web.h"

static void put_num(cJSON *o, const char *k, double v)
{
    if (isfinite(v))
        cJSON_AddNumberToObject(o, k, v);
    else
        cJSON_AddNullToObject(o, k);
}

static void put_id(cJSON *o, const char *k, int64_t v)
{
    if (v)
        cJSON_AddNumberToObject(o, k, (double)v);
    else
        cJSON_AddNullToObject(o, k);
}

static void put_reasons(cJSON *o, const fxl_reasons *rs)
{
    cJSON *a = cJSON_AddArrayToObject(o, "reasons");
    int i;
    for (i = 0; a && i < rs->n; i++)
        cJSON_AddItemToArray(a, cJSON_CreateString(rs->text[i]));
}

static const char *jstr(const cJSON *o, const char *k)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, k);
    return cJSON_IsString(v) ? v->valuestring : NULL;
}

static int jnum(const cJSON *o, const char *k, double *out)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, k);
    if (!v || cJSON_IsNull(v))
        return 0;
    if (!cJSON_IsNumber(v))
        return -1;
    *out = v->valuedouble;
    return 1;
}

int web_api_me(web_req *r)
{
    cJSON *o = cJSON_CreateObject();
    cJSON_AddStringToObject(o, "login", r->login);
    cJSON_AddStringToObject(o, "full_name", r->full_name);
    cJSON_AddStringToObject(o, "role", fxl_role_name(r->role));
    cJSON_AddStringToObject(o, "auth", r->by_token ? "api_token" : "session");
    if (!r->by_token)
        cJSON_AddStringToObject(o, "csrf", r->csrf);
    return web_json(r, 200, o);
}

int web_api_worklist(web_req *r)
{
    fxl_worklist w = FXL_WORKLIST_INIT;
    int rc;
    if ((rc = fxl_worklist_build(r->ctx, &w, NULL)) != 0)
        return web_fail_store(r, rc);
    rc = web_json(r, 200, fxl_worklist_json(&w));
    fxl_worklist_release(&w);
    return rc;
}

static cJSON *item_json(const fxl_review_item *it)
{
    cJSON *o = cJSON_CreateObject();
    cJSON_AddNumberToObject(o, "id", (double)it->id);
    cJSON_AddStringToObject(o, "rule", it->rule);
    cJSON_AddNumberToObject(o, "severity", it->severity);
    cJSON_AddStringToObject(o, "status", it->status);
    put_id(o, "measurement_id", it->measurement_id);
    cJSON_AddStringToObject(o, "mrn", it->mrn);
    cJSON_AddStringToObject(o, "patient_name", it->patient_name);
    cJSON_AddStringToObject(o, "detector", it->detector);
    cJSON_AddStringToObject(o, "field", it->field);
    cJSON_AddStringToObject(o, "point", it->point);
    cJSON_AddStringToObject(o, "plan", it->plan);
    cJSON_AddNumberToObject(o, "fraction", it->fraction_number);
    cJSON_AddStringToObject(o, "summary", it->summary);
    cJSON_AddStringToObject(o, "opened_at", it->opened_at);
    cJSON_AddNumberToObject(o, "age_days", (double)it->age_days);
    cJSON_AddStringToObject(o, "last_event", it->last_event);
    cJSON_AddStringToObject(o, "last_event_by", it->last_event_by);
    cJSON_AddStringToObject(o, "disposition", it->disposition);
    return o;
}

int web_api_queue(web_req *r)
{
    fxl_queue_filter f;
    fxl_review_item *items = NULL;
    size_t n = 0, i;
    const char *st = web_arg(r, "status"), *sev = web_arg(r, "severity");
    cJSON *a;
    int rc;

    memset(&f, 0, sizeof f);
    f.mrn = web_arg(r, "mrn");
    f.detector = web_arg(r, "detector");
    f.status_mask = !st || strcmp(st, "active") == 0 ? FXL_QUEUE_ACTIVE
                    : strcmp(st, "open") == 0        ? FXL_QUEUE_OPEN
                    : strcmp(st, "acknowledged") == 0 ? FXL_QUEUE_ACKNOWLEDGED
                    : strcmp(st, "closed") == 0      ? FXL_QUEUE_CLOSED
                    : strcmp(st, "all") == 0         ? FXL_QUEUE_ALL
                                                     : 0;
    if (!f.status_mask)
        return web_fail(r, 400, "status must be active, open, acknowledged, closed or all");
    f.min_severity = sev && *sev >= '1' && *sev <= '4' && !sev[1] ? *sev - '0' : 0;
    if ((rc = fxl_queue_list(r->ctx, &items, &n, &f)) != 0)
        return web_fail_store(r, rc);
    a = cJSON_CreateArray();
    for (i = 0; i < n; i++)
        cJSON_AddItemToArray(a, item_json(&items[i]));
    free(items);
    return web_json(r, 200, a);
}

int web_api_item(web_req *r)
{
    fxl_review_detail d = FXL_REVIEW_DETAIL_INIT;
    int64_t id = web_arg_id(r, "id");
    cJSON *o, *m, *ev;
    size_t i;
    int rc, k;

    if (!id)
        return web_fail(r, 400, "id (a positive integer) is required");
    if ((rc = fxl_queue_show(r->ctx, &d, id)) != 0)
        return web_fail_store(r, rc);
    o = item_json(&d.item);
    if (d.has_measurement) {
        m = cJSON_AddObjectToObject(o, "measurement");
        cJSON_AddNumberToObject(m, "id", (double)d.m.id);
        cJSON_AddStringToObject(m, "treated_at", d.m.treated_at);
        cJSON_AddStringToObject(m, "detector", d.m.detector);
        put_num(m, "reading", d.m.reading);
        cJSON_AddStringToObject(m, "reading_unit", d.m.reading_unit);
        put_num(m, "temp_c", d.m.temp_c);
        put_num(m, "factor_n", d.m.factor_n);
        for (k = 0; k < FXL_CF_COUNT; k++) {
            char key[48];
            snprintf(key, sizeof key, "cf_%s", fxl_cf_name((fxl_cf_param)k));
            put_num(m, key, d.m.cf[k]);
        }
        put_num(m, "cf_temp", d.m.cf_temp);
        put_num(m, "corrected_dose_cgy", d.m.corrected_dose_cgy);
        put_num(m, "expected_dose_cgy", d.m.expected_dose_cgy);
        put_num(m, "deviation_pct", d.m.deviation_pct);
        put_num(m, "tolerance_pct", d.m.tolerance_pct);
        put_num(m, "action_pct", d.m.action_pct);
        cJSON_AddStringToObject(m, "verdict", d.m.verdict);
        put_reasons(m, &d.m.reasons);
    }
    ev = cJSON_AddArrayToObject(o, "events");
    for (i = 0; i < d.n_events; i++) {
        cJSON *e = cJSON_CreateObject();
        cJSON_AddNumberToObject(e, "id", (double)d.events[i].id);
        cJSON_AddStringToObject(e, "kind", d.events[i].kind);
        cJSON_AddStringToObject(e, "disposition", d.events[i].disposition);
        cJSON_AddStringToObject(e, "comment", d.events[i].comment);
        cJSON_AddStringToObject(e, "user", d.events[i].user);
        cJSON_AddStringToObject(e, "at", d.events[i].at);
        cJSON_AddItemToArray(ev, e);
    }
    fxl_review_detail_release(&d);
    return web_json(r, 200, o);
}

int web_api_item_event(web_req *r)
{
    const cJSON *j = r->json;
    const char *action, *comment, *pw;
    double idd = 0;
    int64_t id;
    fxl_client client;
    int rc, sign;

    if (!j)
        return web_fail(r, 400, "send a JSON object: {\"id\": N, \"action\": \"acknowledge\"|\"comment\"|\"close\"|\"reopen\", ...}");
    action = jstr(j, "action");
    comment = jstr(j, "comment");
    pw = jstr(j, "password");
    if (jnum(j, "id", &idd) != 1 || idd < 1 || idd > 1e15 || idd != floor(idd) || !action)
        return web_fail(r, 400, "id (a positive integer) and action are required");
    id = (int64_t)idd;
    sign = strcmp(action, "close") == 0 || strcmp(action, "reopen") == 0;
    if (sign) {
        if (!(r->role & FXL_ROLES_PHYSICS))
            return web_fail(r, 403, "closing and reopening are for a physicist or an admin");
        if (!pw || !*pw)
            return web_fail(r, 403, "close and reopen are electronic signatures: send \"password\"");
        web_client(r, &client);
        if ((rc = fxl_sign_begin(r->ctx, pw, &client)) != 0)
            return web_fail(r, 403, "signature refused: wrong password (counted like a failed login)");
    }
    if (strcmp(action, "acknowledge") == 0)
        rc = fxl_review_acknowledge(r->ctx, id, comment);
    else if (strcmp(action, "comment") == 0)
        rc = fxl_review_comment(r->ctx, id, comment ? comment : "");
    else if (strcmp(action, "close") == 0)
        rc = jstr(j, "disposition") ? fxl_review_close(r->ctx, id, jstr(j, "disposition"), comment)
                                    : fxl_fail(r->ctx, FXL_EINVAL, "disposition is required to close");
    else if (strcmp(action, "reopen") == 0)
        rc = fxl_review_reopen(r->ctx, id, comment);
    else
        return web_fail(r, 400, "action must be acknowledge, comment, close or reopen");
    fxl_sign_end(r->ctx);
    if (rc != 0)
        return web_fail_store(r, rc);
    {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddBoolToObject(o, "ok", 1);
        cJSON_AddNumberToObject(o, "id", (double)id);
        cJSON_AddStringToObject(o, "action", action);
        return web_json(r, 200, o);
    }
}

int web_api_patient_history(web_req *r)
{
    fxl_history_query q;
    fxl_history_row *h = NULL;
    size_t n = 0, i;
    cJSON *a;
    int rc;

    memset(&q, 0, sizeof q);
    q.mrn = web_arg(r, "mrn");
    q.plan = web_arg(r, "plan");
    q.field = web_arg(r, "field");
    if (!q.mrn)
        return web_fail(r, 400, "mrn is required");
    if ((rc = fxl_history_list(r->ctx, &h, &n, &q)) != 0)
        return web_fail_store(r, rc);
    a = cJSON_CreateArray();
    for (i = 0; i < n; i++) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddNumberToObject(o, "measurement_id", (double)h[i].measurement_id);
        cJSON_AddNumberToObject(o, "fraction", h[i].fraction_number);
        cJSON_AddStringToObject(o, "plan", h[i].plan);
        cJSON_AddStringToObject(o, "treated_at", h[i].treated_at);
        cJSON_AddStringToObject(o, "field", h[i].field);
        cJSON_AddStringToObject(o, "point", h[i].point);
        cJSON_AddStringToObject(o, "detector", h[i].detector);
        put_num(o, "reading", h[i].reading);
        put_num(o, "corrected_dose_cgy", h[i].corrected_dose_cgy);
        put_num(o, "expected_dose_cgy", h[i].expected_dose_cgy);
        put_num(o, "deviation_pct", h[i].deviation_pct);
        cJSON_AddStringToObject(o, "verdict", fxl_verdict_name(h[i].verdict));
        put_id(o, "superseded_by", h[i].superseded_by);
        put_reasons(o, &h[i].reasons);
        cJSON_AddItemToArray(a, o);
    }
    free(h);
    return web_json(r, 200, a);
}

int web_api_detectors(web_req *r)
{
    fxl_detector *d = NULL;
    size_t n = 0, i;
    cJSON *a;
    int rc;
    if ((rc = fxl_detector_list(r->ctx, &d, &n, NULL)) != 0)
        return web_fail_store(r, rc);
    a = cJSON_CreateArray();
    for (i = 0; i < n; i++) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "serial", d[i].serial);
        cJSON_AddStringToObject(o, "label", d[i].label);
        cJSON_AddStringToObject(o, "kind", d[i].kind);
        cJSON_AddStringToObject(o, "status", d[i].status);
        cJSON_AddStringToObject(o, "last_calibrated_at", d[i].last_calibrated_at);
        put_num(o, "accumulated_dose_cgy", d[i].accumulated_dose_cgy);
        put_num(o, "dose_limit_cgy", d[i].dose_limit_cgy);
        cJSON_AddItemToArray(a, o);
    }
    free(d);
    return web_json(r, 200, a);
}

int web_api_levels(web_req *r)
{
    fxl_threshold_set *t = NULL;
    size_t n = 0, i;
    cJSON *a;
    int rc;
    if ((rc = fxl_thresholds_list(r->ctx, &t, &n, NULL, 0)) != 0)
        return web_fail_store(r, rc);
    a = cJSON_CreateArray();
    for (i = 0; i < n; i++) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "name", t[i].name);
        cJSON_AddNumberToObject(o, "version", t[i].version);
        cJSON_AddStringToObject(o, "effective_from", t[i].effective_from);
        cJSON_AddStringToObject(o, "site", t[i].site);
        cJSON_AddStringToObject(o, "technique", t[i].technique);
        cJSON_AddStringToObject(o, "modality", t[i].modality);
        cJSON_AddStringToObject(o, "point", t[i].point);
        cJSON_AddStringToObject(o, "detector_kind", t[i].detector_kind);
        put_num(o, "tolerance_pct", t[i].tolerance_pct);
        put_num(o, "action_pct", t[i].action_pct);
        put_num(o, "floor_cgy", t[i].floor_cgy);
        cJSON_AddItemToArray(a, o);
    }
    free(t);
    return web_json(r, 200, a);
}

int web_api_record(web_req *r)
{
    const cJSON *j = r->json, *arr, *it;
    fxl_reading_entry e[FXL_RECORD_READINGS_MAX];
    fxl_record_request req;
    fxl_record_result res = FXL_RECORD_RESULT_INIT;
    size_t n = 0, i;
    double num;
    cJSON *o, *a;
    int rc;

    if (!j || !cJSON_IsObject(j))
        return web_fail(r, 400, "send a JSON object {\"mrn\": ..., \"readings\": [...]} (docs/api.md)");
    memset(&req, 0, sizeof req);
    req.mrn = jstr(j, "mrn");
    req.plan = jstr(j, "plan");
    req.treated_at = jstr(j, "treated_at");
    if (jnum(j, "fraction", &num) == 1) {
        if (num < 1 || num > 1000 || num != floor(num))
            return web_fail(r, 400, "fraction must be a whole number from 1 to 1000");
        req.fraction = (int)num;
    }
    arr = cJSON_GetObjectItemCaseSensitive(j, "readings");
    if (!req.mrn || !cJSON_IsArray(arr))
        return web_fail(r, 400, "mrn and readings are required");
    cJSON_ArrayForEach(it, arr)
    {
        if (n >= FXL_RECORD_READINGS_MAX)
            return web_fail(r, 400, "at most 64 readings in one fraction");
        fxl_reading_entry_init(&e[n]);
        e[n].field = jstr(it, "field");
        e[n].point = jstr(it, "point");
        e[n].detector = jstr(it, "detector");
        if (jnum(it, "reading", &e[n].reading) != 1 || jnum(it, "temp_c", &e[n].temp_c) < 0 ||
            jnum(it, "background", &e[n].background) < 0 || !e[n].field || !e[n].detector)
            return web_fail(r, 400, "each reading needs field, detector and a numeric reading (temp_c and "
                                    "background optional numbers)");
        n++;
    }
    req.readings = e;
    req.n_readings = n;
    if ((rc = fxl_record_fraction(r->ctx, &res, &req)) != 0)
        return web_fail_store(r, rc);
    o = cJSON_CreateObject();
    cJSON_AddNumberToObject(o, "fraction_id", (double)res.fraction_id);
    cJSON_AddNumberToObject(o, "fraction", res.fraction_number);
    cJSON_AddStringToObject(o, "mrn", res.mrn);
    cJSON_AddStringToObject(o, "plan", res.plan);
    cJSON_AddStringToObject(o, "treated_at", res.treated_at);
    a = cJSON_AddArrayToObject(o, "results");
    for (i = 0; i < res.n; i++) {
        const fxl_measurement_result *m = &res.items[i];
        cJSON *x = cJSON_CreateObject();
        cJSON_AddNumberToObject(x, "measurement_id", (double)m->measurement_id);
        cJSON_AddStringToObject(x, "field", m->field);
        cJSON_AddStringToObject(x, "point", m->point);
        cJSON_AddStringToObject(x, "detector", m->detector);
        put_num(x, "corrected_dose_cgy", m->corrected_dose_cgy);
        put_num(x, "expected_dose_cgy", m->expected_dose_cgy);
        put_num(x, "deviation_pct", m->deviation_pct);
        cJSON_AddStringToObject(x, "verdict", fxl_verdict_name(m->verdict));
        cJSON_AddStringToObject(x, "guidance", m->gross ? fxl_gross_guidance() : fxl_verdict_guidance(m->verdict));
        put_id(x, "review_item_id", m->review_item_id);
        put_reasons(x, &m->reasons);
        cJSON_AddItemToArray(a, x);
    }
    fxl_record_result_release(&res);
    return web_json(r, 201, o);
}

int web_api_verify(web_req *r)
{
    fxl_whole_verify v;
    const fxl_record_report *rr = &v.record;
    char anchor[FXL_ANCHOR_LEN] = "", at[32], head[65];
    const char *given = web_arg(r, "anchor");
    int64_t rows;
    cJSON *o, *probs;
    int rc, i;

    if (given && !*given)
        given = NULL;
    if (given && (rc = fxl_anchor_parse(r->ctx, given, &rows, at, head)) != 0)
        return web_fail_store(r, rc);
    if ((rc = fxl_begin_read(r->ctx)) != 0)
        return web_fail_store(r, rc);
    rc = fxl_verify_whole(r->ctx, given, &v);
    if (fxl_audit_anchor(r->ctx, anchor, sizeof anchor) != 0)
        anchor[0] = '\0';
    fxl_rollback(r->ctx);
    if (rc == FXL_EBUSY)
        return web_fail_store(r, FXL_EBUSY);
    o = cJSON_CreateObject();
    cJSON_AddBoolToObject(o, "ok", v.ok);
    cJSON_AddNumberToObject(o, "rows_checked", (double)v.chain.rows_checked);
    cJSON_AddNumberToObject(o, "record_rows_checked", (double)rr->rows_checked);
    cJSON_AddNumberToObject(o, "seals_checked", (double)rr->seals_checked);
    if (rr->anchor_given)
        cJSON_AddNumberToObject(o, "anchor_rows", (double)rr->anchor_rows);
    probs = cJSON_AddArrayToObject(o, "record_problems");
    for (i = 0; i < rr->n_problems; i++)
        cJSON_AddItemToArray(probs, cJSON_CreateString(rr->problem[i]));
    cJSON_AddBoolToObject(o, "integrity_ok", v.chain.integrity_ok);
    cJSON_AddBoolToObject(o, "foreign_keys_ok", v.chain.foreign_keys_ok);
    cJSON_AddNumberToObject(o, "signatures_checked", (double)v.signatures_checked);
    cJSON_AddBoolToObject(o, "signatures_ok", v.sig_rc == 0);
    cJSON_AddStringToObject(o, "anchor", anchor);
    return web_json(r, 200, o);
}
