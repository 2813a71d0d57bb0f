/* In vivo detectors: adding them, their append-only status history, and the
 * listing with the status, latest calibration and dose accumulated since it,
 * all evaluated at a given moment. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/detectors.h"
#include "store/dose_counted.h"
#include "store/audit.h"
#include "store/grow.h"
#include "store/json_put.h"
#include "store/lookup.h"
#include "store/stmt.h"

static const char *const kinds[] = {"photon_diode", "electron_diode", "small_field_diode",
                                    "mosfet", "osl", "tld", "other", NULL};
static const char *const statuses[] = {"in_service", "out_for_service", "retired", NULL};
static const char *const units[] = {"nC", "pC", "mV", "count", "cGy", NULL};

static int in_list(const char *const *list, const char *v)
{
    for (; v && *list; list++)
        if (strcmp(*list, v) == 0)
            return 1;
    return 0;
}

int fxl_detector_kind_valid(const char *kind) { return in_list(kinds, kind); }

int fxl_detector_kind_is_diode(const char *kind)
{
    return kind && (strcmp(kind, "photon_diode") == 0 || strcmp(kind, "electron_diode") == 0 ||
                    strcmp(kind, "small_field_diode") == 0);
}
int fxl_detector_status_valid(const char *status) { return in_list(statuses, status); }
int fxl_detector_unit_valid(const char *unit) { return in_list(units, unit); }

int fxl_detector_find(fxl_ctx *ctx, int64_t *out_id, const char *serial)
{
    int rc = fxl_lookup_id(ctx, out_id, "SELECT id FROM detectors WHERE serial = :serial", ":serial", serial);

    if (rc == 0)
        return fxl_fail(ctx, FXL_ENOTFOUND, "unknown detector '%s' (see 'fxledger detector list')",
                        serial ? serial : "");
    return rc < 0 ? rc : 0;
}

static int text_len_ok(const char *s, size_t lo, size_t hi)
{
    size_t len = s ? strlen(s) : 0;
    return len >= lo && len <= hi;
}

static int insert_status(fxl_ctx *ctx, int64_t detector_id, const char *status,
                         const char *effective_at, const char *reason, const char *now,
                         int64_t *out_id)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc = fxl_stmt_prepare(&s, ctx,
                              "INSERT INTO detector_status (detector_id, status, effective_at, reason, "
                              "user_id, created_at) VALUES (:d, :status, :at, :reason, :user, :now)");

    if (rc == 0) {
        fxl_stmt_bind_int(&s, ":d", detector_id);
        fxl_stmt_bind_text(&s, ":status", status);
        fxl_stmt_bind_text(&s, ":at", effective_at);
        fxl_stmt_bind_text(&s, ":reason", reason);
        fxl_stmt_bind_int(&s, ":user", fxl_user_id(ctx));
        fxl_stmt_bind_text(&s, ":now", now);
        rc = fxl_stmt_exec(&s);
        if (rc == 0 && out_id)
            *out_id = sqlite3_last_insert_rowid(ctx->db);
    }
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_detector_add(fxl_ctx *ctx, int64_t *out_id, const fxl_detector_spec *d)
{
    fxl_stmt s = FXL_STMT_INIT;
    cJSON *audit = NULL;
    char now[FXL_TIME_LEN];
    const char *unit = d->reading_unit ? d->reading_unit : "nC";
    int64_t id = 0;
    int rc;

    if ((rc = fxl_require_role(ctx, FXL_ROLES_PHYSICS, "adding a detector")) != 0)
        return rc;
    if (!text_len_ok(d->serial, 1, 64))
        return fxl_fail(ctx, FXL_EINVAL, "detector serial '%s' must be 1 to 64 characters",
                        d->serial ? d->serial : "");
    if (!text_len_ok(d->label, 1, 64))
        return fxl_fail(ctx, FXL_EINVAL, "label '%s' for detector '%s' must be 1 to 64 characters",
                        d->label ? d->label : "", d->serial);
    if (!fxl_detector_kind_valid(d->kind))
        return fxl_fail(ctx, FXL_EINVAL,
                        "kind '%s' for detector '%s' must be one of photon_diode, electron_diode, "
                        "small_field_diode, mosfet, osl, tld, other",
                        d->kind ? d->kind : "", d->serial);
    if (!fxl_detector_unit_valid(unit))
        return fxl_fail(ctx, FXL_EINVAL,
                        "reading unit '%s' for detector '%s' must be one of nC, pC, mV, count, cGy",
                        unit, d->serial);
    if (!(isnan(d->sensitivity) || (d->sensitivity > 0 && isfinite(d->sensitivity))))
        return fxl_fail(ctx, FXL_EINVAL, "sensitivity '%g' for detector '%s' must be > 0 %s/cGy",
                        d->sensitivity, d->serial, unit);
    /* A diode's response changes with temperature (0.1 to 0.5 %/degC, AAPM
     * Report 87, from memory): a missing coefficient would silently apply no
     * correction. An explicit 0 is accepted for a detector that has none. */
    if (isnan(d->temp_coeff_per_c) && fxl_detector_kind_is_diode(d->kind))
        return fxl_fail(ctx, FXL_EINVAL,
                        "detector '%s' is a diode (%s): its temperature coefficient is required "
                        "(--temp-coeff, a fraction per degC such as 0.003; give 0 explicitly for a "
                        "diode that has none)",
                        d->serial, d->kind);
    if (!(isnan(d->temp_coeff_per_c) ||
          (d->temp_coeff_per_c >= -FXL_TEMP_COEFF_MAX && d->temp_coeff_per_c <= FXL_TEMP_COEFF_MAX)))
        return fxl_fail(ctx, FXL_EINVAL,
                        "temperature coefficient '%g' for detector '%s' must be %g to %g per degC "
                        "(a fraction: 0.003 means 0.3 %%/degC)",
                        d->temp_coeff_per_c, d->serial, -FXL_TEMP_COEFF_MAX, FXL_TEMP_COEFF_MAX);
    if (d->buildup && strlen(d->buildup) > 200)
        return fxl_fail(ctx, FXL_EINVAL, "build-up text for detector '%s' must be at most 200 characters",
                        d->serial);
    if (!(isnan(d->dose_limit_cgy) || (d->dose_limit_cgy > 0 && isfinite(d->dose_limit_cgy))))
        return fxl_fail(ctx, FXL_EINVAL, "dose limit '%g' for detector '%s' must be > 0 cGy",
                        d->dose_limit_cgy, d->serial);
    if (fxl_detector_find(ctx, &id, d->serial) == 0)
        return fxl_fail(ctx, FXL_ECONFLICT, "detector '%s' already exists", d->serial);

    fxl_now(ctx, now);
    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "INSERT INTO detectors (serial, label, kind, reading_unit, sensitivity, "
                               "temp_coeff_per_c, buildup, dose_limit_cgy, created_at) VALUES "
                               "(:serial, :label, :kind, :unit, :sens, :tc, :buildup, :limit, :now)")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":serial", d->serial);
    fxl_stmt_bind_text(&s, ":label", d->label);
    fxl_stmt_bind_text(&s, ":kind", d->kind);
    fxl_stmt_bind_text(&s, ":unit", unit);
    fxl_stmt_bind_double_opt(&s, ":sens", d->sensitivity);
    fxl_stmt_bind_double(&s, ":tc", isnan(d->temp_coeff_per_c) ? 0 : d->temp_coeff_per_c);
    fxl_stmt_bind_text(&s, ":buildup", d->buildup && *d->buildup ? d->buildup : NULL);
    fxl_stmt_bind_double_opt(&s, ":limit", d->dose_limit_cgy);
    fxl_stmt_bind_text(&s, ":now", now);
    if ((rc = fxl_stmt_exec(&s)) != 0)
        goto cleanup;
    id = sqlite3_last_insert_rowid(ctx->db);
    if ((rc = insert_status(ctx, id, "in_service", now, "added", now, NULL)) != 0)
        goto cleanup;
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "serial", d->serial);
    cJSON_AddStringToObject(audit, "label", d->label);
    cJSON_AddStringToObject(audit, "kind", d->kind);
    cJSON_AddStringToObject(audit, "reading_unit", unit);
    fxl_json_put_number(audit, "sensitivity", d->sensitivity);
    cJSON_AddNumberToObject(audit, "temp_coeff_per_c", isnan(d->temp_coeff_per_c) ? 0 : d->temp_coeff_per_c);
    fxl_json_put_text(audit, "buildup", d->buildup);
    fxl_json_put_number(audit, "dose_limit_cgy", d->dose_limit_cgy);
    cJSON_AddStringToObject(audit, "status", "in_service");
    if ((rc = fxl_audit_append(ctx, "create", "detectors", id, audit)) != 0)
        goto cleanup;
    rc = fxl_commit(ctx);
    if (rc == 0 && out_id)
        *out_id = id;
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    fxl_stmt_finalize(&s);
    cJSON_Delete(audit);
    return rc;
}

/* Fills the derived fields of one detector at `at`. */
static int load_derived(fxl_ctx *ctx, fxl_detector *d, const char *at)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    snprintf(d->status, sizeof d->status, "in_service");
    d->status_since[0] = d->status_reason[0] = d->last_calibrated_at[0] = '\0';
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT status, effective_at, coalesce(reason, '') FROM detector_status "
                               "WHERE detector_id = :d AND effective_at <= :at "
                               "ORDER BY effective_at DESC, id DESC LIMIT 1")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":d", d->id);
    fxl_stmt_bind_text(&s, ":at", at);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1) {
        snprintf(d->status, sizeof d->status, "%s", fxl_stmt_text(&s, 0));
        snprintf(d->status_since, sizeof d->status_since, "%s", fxl_stmt_text(&s, 1));
        snprintf(d->status_reason, sizeof d->status_reason, "%s", fxl_stmt_text(&s, 2));
    }
    fxl_stmt_finalize(&s);

    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT max(calibrated_at) FROM calibrations "
                               "WHERE detector_id = :d AND calibrated_at <= :at")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":d", d->id);
    fxl_stmt_bind_text(&s, ":at", at);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1)
        snprintf(d->last_calibrated_at, sizeof d->last_calibrated_at, "%s", fxl_stmt_text(&s, 0));
    fxl_stmt_finalize(&s);

    /* A measurement superseded by an amendment is counted once, through the
     * row that replaced it. Not-evaluable rows carry no dose and add nothing.
     * `m.created_at > :since` selects no other rows than the treatment-time
     * test (a row is written at or after its treatment time: record refuses
     * a future one, an amendment comes later still), but lets SQLite read
     * only the rows since the calibration from measurements_by_detector
     * instead of the detector's whole history (docs/performance.md). */
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT coalesce(sum(" FXL_SQL_DOSE_COUNTED("m") "), 0), count(m.corrected_dose_cgy) "
                               "FROM measurements m JOIN fractions f ON f.id = m.fraction_id "
                               "WHERE m.detector_id = :d AND f.treated_at <= :at "
                               "AND m.created_at > :since "
                               "AND (:since = '' OR f.treated_at > :since) "
                               "AND NOT EXISTS (SELECT 1 FROM measurements n WHERE n.supersedes_id = m.id)")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":d", d->id);
    fxl_stmt_bind_text(&s, ":at", at);
    fxl_stmt_bind_text(&s, ":since", d->last_calibrated_at);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    d->accumulated_dose_cgy = fxl_stmt_double(&s, 0);
    d->measurement_count = fxl_stmt_int(&s, 1);
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

#define DETECTOR_COLUMNS                                                                   \
    "SELECT id, serial, label, kind, reading_unit, sensitivity, temp_coeff_per_c, "      \
    "coalesce(buildup, ''), dose_limit_cgy, created_at FROM detectors "

static void read_detector(fxl_stmt *s, fxl_detector *d)
{
    memset(d, 0, sizeof *d);
    d->id = fxl_stmt_int(s, 0);
    snprintf(d->serial, sizeof d->serial, "%s", fxl_stmt_text(s, 1));
    snprintf(d->label, sizeof d->label, "%s", fxl_stmt_text(s, 2));
    snprintf(d->kind, sizeof d->kind, "%s", fxl_stmt_text(s, 3));
    snprintf(d->reading_unit, sizeof d->reading_unit, "%s", fxl_stmt_text(s, 4));
    d->sensitivity = fxl_stmt_double_opt(s, 5);
    d->temp_coeff_per_c = fxl_stmt_double(s, 6);
    snprintf(d->buildup, sizeof d->buildup, "%s", fxl_stmt_text(s, 7));
    d->dose_limit_cgy = fxl_stmt_double_opt(s, 8);
    snprintf(d->created_at, sizeof d->created_at, "%s", fxl_stmt_text(s, 9));
}

static const char *moment(fxl_ctx *ctx, const char *at, char buf[FXL_TIME_LEN])
{
    if (at && *at)
        return at;
    fxl_now(ctx, buf);
    return buf;
}

int fxl_detector_get(fxl_ctx *ctx, fxl_detector *out, const char *serial, const char *at)
{
    fxl_stmt s = FXL_STMT_INIT;
    char nowbuf[FXL_TIME_LEN];
    int rc;

    at = moment(ctx, at, nowbuf);
    if ((rc = fxl_stmt_prepare(&s, ctx, DETECTOR_COLUMNS "WHERE serial = :serial")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":serial", serial);
    rc = fxl_stmt_step(&s);
    if (rc == 0)
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "unknown detector '%s' (see 'fxledger detector list')",
                      serial ? serial : "");
    if (rc != 1)
        goto cleanup;
    read_detector(&s, out);
    fxl_stmt_finalize(&s);
    rc = load_derived(ctx, out, at);
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_detector_list(fxl_ctx *ctx, fxl_detector **out, size_t *n, const char *at)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_detector *list = NULL;
    char nowbuf[FXL_TIME_LEN];
    size_t count = 0, cap = 0, i;
    int rc;

    *out = NULL;
    *n = 0;
    at = moment(ctx, at, nowbuf);
    if ((rc = fxl_stmt_prepare(&s, ctx, DETECTOR_COLUMNS "ORDER BY serial")) != 0)
        goto cleanup;
    while ((rc = fxl_stmt_step(&s)) == 1) {
        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list, "listing detectors")) != 0)
            goto cleanup;
        read_detector(&s, &list[count++]);
    }
    if (rc < 0)
        goto cleanup;
    fxl_stmt_finalize(&s);
    for (i = 0; i < count; i++)
        if ((rc = load_derived(ctx, &list[i], at)) != 0)
            goto cleanup;
    *out = list;
    *n = count;
    list = NULL;
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    free(list);
    return rc;
}

int fxl_detector_status_history(fxl_ctx *ctx, fxl_detector_status_row **out, size_t *n,
                                const char *serial)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_detector_status_row *list = NULL;
    size_t count = 0, cap = 0;
    int64_t id = 0;
    int rc;

    *out = NULL;
    *n = 0;
    if ((rc = fxl_detector_find(ctx, &id, serial)) != 0)
        return rc;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT s.id, s.status, s.effective_at, coalesce(s.reason, ''), u.login, "
                               "s.created_at FROM detector_status s JOIN users u ON u.id = s.user_id "
                               "WHERE s.detector_id = :d ORDER BY s.effective_at, s.id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":d", id);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        fxl_detector_status_row *r;
        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list, "listing status history")) != 0)
            goto cleanup;
        r = &list[count++];
        memset(r, 0, sizeof *r);
        r->id = fxl_stmt_int(&s, 0);
        snprintf(r->status, sizeof r->status, "%s", fxl_stmt_text(&s, 1));
        snprintf(r->effective_at, sizeof r->effective_at, "%s", fxl_stmt_text(&s, 2));
        snprintf(r->reason, sizeof r->reason, "%s", fxl_stmt_text(&s, 3));
        snprintf(r->user, sizeof r->user, "%s", fxl_stmt_text(&s, 4));
        snprintf(r->created_at, sizeof r->created_at, "%s", fxl_stmt_text(&s, 5));
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

int fxl_detector_set_status(fxl_ctx *ctx, const char *serial, const char *status,
                            const char *reason, const char *effective_at)
{
    fxl_stmt s = FXL_STMT_INIT;
    cJSON *audit = NULL;
    char now[FXL_TIME_LEN], last_status[16] = "", last_at[FXL_TIME_LEN] = "";
    int64_t id = 0, row_id = 0;
    int rc;

    if ((rc = fxl_require_role(ctx, FXL_ROLES_PHYSICS, "changing a detector's status")) != 0)
        return rc;
    if (!fxl_detector_status_valid(status))
        return fxl_fail(ctx, FXL_EINVAL,
                        "status '%s' must be one of in_service, out_for_service, retired",
                        status ? status : "");
    if (!text_len_ok(reason, 1, 200))
        return fxl_fail(ctx, FXL_EINVAL, "a reason (1 to 200 characters) is required to set '%s' %s",
                        serial ? serial : "", status);
    fxl_now(ctx, now);
    if (!effective_at)
        effective_at = now;
    if (strcmp(effective_at, now) > 0)
        return fxl_fail(ctx, FXL_EINVAL, "status date '%s' is in the future (now %s)", effective_at,
                        now);
    if ((rc = fxl_detector_find(ctx, &id, serial)) != 0)
        return rc;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT status, effective_at FROM detector_status WHERE detector_id = :d "
                               "ORDER BY effective_at DESC, id DESC LIMIT 1")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":d", id);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1) {
        snprintf(last_status, sizeof last_status, "%s", fxl_stmt_text(&s, 0));
        snprintf(last_at, sizeof last_at, "%s", fxl_stmt_text(&s, 1));
    }
    fxl_stmt_finalize(&s);
    if (!last_status[0])
        snprintf(last_status, sizeof last_status, "in_service");
    if (strcmp(last_status, "retired") == 0) {
        rc = fxl_fail(ctx, FXL_EINVAL, "detector '%s' is retired since %s; retirement is final",
                      serial, last_at);
        goto cleanup;
    }
    if (strcmp(last_status, status) == 0) {
        rc = fxl_fail(ctx, FXL_ECONFLICT, "detector '%s' is already %s", serial, status);
        goto cleanup;
    }
    if (last_at[0] && strcmp(effective_at, last_at) < 0) {
        rc = fxl_fail(ctx, FXL_EINVAL,
                      "status date '%s' for detector '%s' is before its latest status change (%s)",
                      effective_at, serial, last_at);
        goto cleanup;
    }

    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    if ((rc = insert_status(ctx, id, status, effective_at, reason, now, &row_id)) != 0)
        goto cleanup;
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "serial", serial);
    cJSON_AddStringToObject(audit, "status", status);
    cJSON_AddStringToObject(audit, "previous_status", last_status);
    cJSON_AddStringToObject(audit, "effective_at", effective_at);
    cJSON_AddStringToObject(audit, "reason", reason);
    if ((rc = fxl_audit_append(ctx, strcmp(status, "retired") == 0 ? "retire" : "status",
                               "detector_status", row_id, audit)) != 0)
        goto cleanup;
    rc = fxl_commit(ctx);
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    fxl_stmt_finalize(&s);
    cJSON_Delete(audit);
    return rc;
}
