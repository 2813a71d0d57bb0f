/* Correction-factor tables in the database: storing a whole file in one
 * transaction after checking every name it refers to, and reading tables
 * back with the version in force at a given moment. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/core.h"
#include "fxl/corrections.h"
#include "fxl/detectors.h"
#include "fxl/machines.h"
#include "store/audit.h"
#include "store/auth_int.h"
#include "store/grow.h"
#include "store/seal.h"
#include "store/stmt.h"

static int table_exists(fxl_ctx *ctx, int *exists, int64_t detector_id, int64_t beam_id,
                        const char *point, const char *parameter, const char *effective_from)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc = fxl_stmt_prepare(&s, ctx,
                              "SELECT 1 FROM correction_tables WHERE detector_id = :d AND beam_id = :b "
                              "AND point = :pt AND parameter = :p AND effective_from = :at");

    if (rc == 0) {
        fxl_stmt_bind_int(&s, ":d", detector_id);
        fxl_stmt_bind_int(&s, ":b", beam_id);
        fxl_stmt_bind_text(&s, ":pt", point);
        fxl_stmt_bind_text(&s, ":p", parameter);
        fxl_stmt_bind_text(&s, ":at", effective_from);
        rc = fxl_stmt_step(&s);
        if (rc >= 0) {
            *exists = rc;
            rc = 0;
        }
    }
    fxl_stmt_finalize(&s);
    return rc;
}

/* The reference condition x of `parameter` for the detector's latest
 * calibration of this beam and point: its field size and SSD, its exit
 * phantom thickness (and SSD + thickness as source-to-detector distance);
 * open field, no tray and normal incidence for every calibration. Without a
 * calibration yet, the reference set-up of docs/equipment.md (10 x 10 cm at
 * SSD 100 cm). *x is NaN when the reference is not known. */
static int reference_x(fxl_ctx *ctx, double *x, int64_t detector_id, int64_t beam_id,
                       const char *point, fxl_cf_param p)
{
    fxl_stmt s = FXL_STMT_INIT;
    double ssd = 100.0, fs = 10.0, thick = NAN;
    int rc;

    *x = NAN;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT ssd_cm, field_size_cm, ref_thickness_cm FROM calibrations "
                               "WHERE detector_id = :d AND beam_id = :b AND point = :pt "
                               "ORDER BY calibrated_at DESC, id DESC LIMIT 1")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":d", detector_id);
    fxl_stmt_bind_int(&s, ":b", beam_id);
    fxl_stmt_bind_text(&s, ":pt", point);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1) {
        ssd = fxl_stmt_double(&s, 0);
        fs = fxl_stmt_double(&s, 1);
        thick = fxl_stmt_double_opt(&s, 2);
    }
    switch (p) {
    case FXL_CF_FIELD_SIZE: *x = fs; break;
    case FXL_CF_SSD: *x = ssd; break;
    case FXL_CF_THICKNESS: *x = thick; break;
    case FXL_CF_SDD: *x = ssd + thick; break;
    default: *x = 0; break;  /* wedge, tray, angle */
    }
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* A table is normalised to the calibration's reference condition: CF = 1
 * there by definition (CF_x = (D/M)_x / (D/M)_ref, AAPM Report 87). A table
 * that is not 1 there was normalised elsewhere or mistyped; it would scale
 * every result. Checked where the table covers the reference. */
static int check_reference(fxl_ctx *ctx, const char *serial, int64_t detector_id, int64_t beam_id,
                           const fxl_corr_table_spec *t)
{
    double xs[FXL_CORR_POINTS_MAX], ys[FXL_CORR_POINTS_MAX], ref, f;
    fxl_cf_param p;
    size_t i;
    int rc;

    if (fxl_cf_parse(&p, t->parameter) != 0 || t->n_points > FXL_CORR_POINTS_MAX)
        return 0;
    if ((rc = reference_x(ctx, &ref, detector_id, beam_id, t->point, p)) != 0)
        return rc;
    if (!isfinite(ref))
        return 0;
    for (i = 0; i < t->n_points; i++) {
        xs[i] = t->points[i].x;
        ys[i] = t->points[i].factor;
    }
    if (fxl_cf_is_discrete(p))
        rc = fxl_lookup_exact(&f, xs, ys, t->n_points, ref);
    else
        rc = fxl_interp_linear(&f, xs, ys, t->n_points, ref);
    if (rc != 0)
        return 0;  /* the table does not cover the reference */
    if (fabs(f - 1.0) > FXL_CORR_REFERENCE_TOL + 1e-12)
        return fxl_fail(ctx, FXL_EINVAL,
                        "%s %s table of detector '%s' for %s %s gives %.4f at the calibration's "
                        "reference (%s %g): a correction table must be 1 there within %g %% "
                        "(normalise it to the reference condition)",
                        t->point, t->parameter, serial, t->machine, t->beam, f, t->parameter, ref,
                        FXL_CORR_REFERENCE_TOL * 100);
    return 0;
}

int fxl_corr_store(fxl_ctx *ctx, int64_t **out_ids, const fxl_corr_file *file)
{
    fxl_stmt tab = FXL_STMT_INIT, pt = FXL_STMT_INIT;
    cJSON *audit = NULL;
    fxl_detector det;
    char now[FXL_TIME_LEN];
    int64_t *beam_ids = NULL, *ids = NULL;
    size_t i, j;
    int rc, exists = 0;

    if (out_ids)
        *out_ids = NULL;
    if ((rc = fxl_require_role(ctx, FXL_ROLES_PHYSICS, "loading correction tables")) != 0)
        return rc;
    if ((rc = fxl_sign_require(ctx, "loading correction tables")) != 0)
        return rc;
    if (file->n_tables == 0)
        return fxl_fail(ctx, FXL_EINVAL, "no correction tables to load");
    if ((rc = fxl_detector_get(ctx, &det, file->detector, NULL)) != 0)
        return rc;
    if (strcmp(det.status, "retired") == 0)
        return fxl_fail(ctx, FXL_EINVAL, "detector '%s' is retired (since %s); load no tables for it",
                        file->detector, det.status_since);
    beam_ids = calloc(file->n_tables, sizeof *beam_ids);
    ids = calloc(file->n_tables, sizeof *ids);
    if (!beam_ids || !ids) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory loading correction tables");
        goto cleanup;
    }
    /* Every name and every conflict is checked before anything is written. */
    for (i = 0; i < file->n_tables; i++) {
        const fxl_corr_table_spec *t = &file->tables[i];
        if (t->n_points < 1 || fxl_corr_param_range(t->parameter, NULL, NULL, NULL) != 0) {
            rc = fxl_fail(ctx, FXL_EINVAL, "table %zu: not a checked table", i);
            goto cleanup;
        }
        for (j = 1; j < t->n_points; j++) {
            if (!(t->points[j].x > t->points[j - 1].x)) {
                rc = fxl_fail(ctx, FXL_EINVAL, "table %zu: x must increase strictly", i);
                goto cleanup;
            }
        }
        for (j = 0; j < t->n_points; j++) {
            if (!(t->points[j].factor > FXL_CORR_FACTOR_MIN && t->points[j].factor < FXL_CORR_FACTOR_MAX)) {
                rc = fxl_fail(ctx, FXL_EINVAL, "table %zu: factor '%g' must be > %g and < %g", i,
                              t->points[j].factor, FXL_CORR_FACTOR_MIN, FXL_CORR_FACTOR_MAX);
                goto cleanup;
            }
        }
        if ((rc = fxl_beam_find(ctx, &beam_ids[i], t->machine, t->beam)) != 0)
            goto cleanup;
        if ((rc = table_exists(ctx, &exists, det.id, beam_ids[i], t->point, t->parameter,
                               t->effective_from)) != 0)
            goto cleanup;
        if (exists) {
            rc = fxl_fail(ctx, FXL_ECONFLICT,
                          "detector '%s' already has a %s %s table for %s %s effective from %s; "
                          "load a new version with a later effective date",
                          file->detector, t->point, t->parameter, t->machine, t->beam,
                          t->effective_from);
            goto cleanup;
        }
        if ((rc = check_reference(ctx, file->detector, det.id, beam_ids[i], t)) != 0)
            goto cleanup;
    }

    fxl_now(ctx, now);
    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    if ((rc = fxl_stmt_prepare(&tab, ctx,
                               "INSERT INTO correction_tables (detector_id, beam_id, point, parameter, "
                               "effective_from, source, user_id, created_at) VALUES (:d, :b, :pt, :p, "
                               ":from, :source, :user, :now)")) != 0 ||
        (rc = fxl_stmt_prepare(&pt, ctx,
                               "INSERT INTO correction_points (table_id, x, factor) "
                               "VALUES (:t, :x, :f)")) != 0)
        goto cleanup;
    for (i = 0; i < file->n_tables; i++) {
        const fxl_corr_table_spec *t = &file->tables[i];
        cJSON *points;
        fxl_stmt_reset(&tab);
        fxl_stmt_bind_int(&tab, ":d", det.id);
        fxl_stmt_bind_int(&tab, ":b", beam_ids[i]);
        fxl_stmt_bind_text(&tab, ":pt", t->point);
        fxl_stmt_bind_text(&tab, ":p", t->parameter);
        fxl_stmt_bind_text(&tab, ":from", t->effective_from);
        fxl_stmt_bind_text(&tab, ":source", t->source[0] ? t->source : NULL);
        fxl_stmt_bind_int(&tab, ":user", fxl_user_id(ctx));
        fxl_stmt_bind_text(&tab, ":now", now);
        if ((rc = fxl_stmt_exec(&tab)) != 0)
            goto cleanup;
        ids[i] = sqlite3_last_insert_rowid(ctx->db);
        audit = cJSON_CreateObject();
        cJSON_AddStringToObject(audit, "serial", file->detector);
        cJSON_AddStringToObject(audit, "machine", t->machine);
        cJSON_AddStringToObject(audit, "beam", t->beam);
        cJSON_AddStringToObject(audit, "point", t->point);
        cJSON_AddStringToObject(audit, "parameter", t->parameter);
        cJSON_AddStringToObject(audit, "effective_from", t->effective_from);
        if (t->source[0])
            cJSON_AddStringToObject(audit, "source", t->source);
        points = cJSON_AddArrayToObject(audit, "points");
        for (j = 0; j < t->n_points; j++) {
            cJSON *pair = cJSON_CreateArray();
            fxl_stmt_reset(&pt);
            fxl_stmt_bind_int(&pt, ":t", ids[i]);
            fxl_stmt_bind_double(&pt, ":x", t->points[j].x);
            fxl_stmt_bind_double(&pt, ":f", t->points[j].factor);
            if ((rc = fxl_stmt_exec(&pt)) != 0) {
                cJSON_Delete(pair);
                goto cleanup;
            }
            cJSON_AddItemToArray(pair, cJSON_CreateNumber(t->points[j].x));
            cJSON_AddItemToArray(pair, cJSON_CreateNumber(t->points[j].factor));
            cJSON_AddItemToArray(points, pair);
        }
        /* correction_points has no rowid, so the update hook does not see
         * it: the points are part of their table's seal. */
        if ((rc = fxl_seal_mark(ctx, "correction_tables", ids[i])) != 0)
            goto cleanup;
        if ((rc = fxl_audit_append(ctx, "load", "correction_tables", ids[i], audit)) != 0)
            goto cleanup;
        if ((rc = fxl_signature_add(ctx, "correction_tables", ids[i], "correction table loaded")) != 0)
            goto cleanup;
        cJSON_Delete(audit);
        audit = NULL;
    }
    if ((rc = fxl_commit(ctx)) != 0)
        goto cleanup;
    if (out_ids) {
        *out_ids = ids;
        ids = NULL;
    }
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    fxl_stmt_finalize(&tab);
    fxl_stmt_finalize(&pt);
    cJSON_Delete(audit);
    free(beam_ids);
    free(ids);
    return rc;
}

/* in_force: no later version of the same detector, beam and parameter is
 * effective at :at, and this one is. */
#define CORR_SELECT                                                                             \
    "SELECT t.id, d.serial, m.name, b.name, t.parameter, t.effective_from, "                    \
    "coalesce(t.source, ''), u.login, t.created_at, "                                           \
    "(t.effective_from <= :at AND NOT EXISTS (SELECT 1 FROM correction_tables l "               \
    "  WHERE l.detector_id = t.detector_id AND l.beam_id = t.beam_id "                          \
    "  AND l.point = t.point AND l.parameter = t.parameter AND l.effective_from <= :at "        \
    "  AND (l.effective_from > t.effective_from OR (l.effective_from = t.effective_from "       \
    "  AND l.id > t.id)))), "                                                                   \
    "(SELECT count(*) FROM correction_points p WHERE p.table_id = t.id), "                      \
    "(SELECT min(x) FROM correction_points p WHERE p.table_id = t.id), "                        \
    "(SELECT max(x) FROM correction_points p WHERE p.table_id = t.id), t.point "                \
    "FROM correction_tables t JOIN detectors d ON d.id = t.detector_id "                        \
    "JOIN beams b ON b.id = t.beam_id JOIN machines m ON m.id = b.machine_id "                  \
    "JOIN users u ON u.id = t.user_id "

static void read_table(fxl_stmt *s, fxl_corr_table *t)
{
    memset(t, 0, sizeof *t);
    t->id = fxl_stmt_int(s, 0);
    snprintf(t->serial, sizeof t->serial, "%s", fxl_stmt_text(s, 1));
    snprintf(t->machine, sizeof t->machine, "%s", fxl_stmt_text(s, 2));
    snprintf(t->beam, sizeof t->beam, "%s", fxl_stmt_text(s, 3));
    snprintf(t->parameter, sizeof t->parameter, "%s", fxl_stmt_text(s, 4));
    snprintf(t->effective_from, sizeof t->effective_from, "%s", fxl_stmt_text(s, 5));
    snprintf(t->source, sizeof t->source, "%s", fxl_stmt_text(s, 6));
    snprintf(t->user, sizeof t->user, "%s", fxl_stmt_text(s, 7));
    snprintf(t->created_at, sizeof t->created_at, "%s", fxl_stmt_text(s, 8));
    t->in_force = (int)fxl_stmt_int(s, 9);
    t->n_points = (size_t)fxl_stmt_int(s, 10);
    t->x_min = fxl_stmt_double_opt(s, 11);
    t->x_max = fxl_stmt_double_opt(s, 12);
    snprintf(t->point, sizeof t->point, "%s", fxl_stmt_text(s, 13));
}

void fxl_corr_table_release(fxl_corr_table *t)
{
    if (t) {
        free(t->points);
        t->points = NULL;
    }
}

void fxl_corr_list_free(fxl_corr_table *list, size_t n)
{
    size_t i;

    if (!list)
        return;
    for (i = 0; i < n; i++)
        fxl_corr_table_release(&list[i]);
    free(list);
}

int fxl_corr_list(fxl_ctx *ctx, fxl_corr_table **out, size_t *n, const char *serial,
                  const char *at)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_corr_table *list = NULL;
    char nowbuf[FXL_TIME_LEN];
    size_t count = 0, cap = 0;
    int64_t id = 0;
    int rc;

    *out = NULL;
    *n = 0;
    if (!at || !*at) {
        fxl_now(ctx, nowbuf);
        at = nowbuf;
    }
    if (serial && (rc = fxl_detector_find(ctx, &id, serial)) != 0)
        return rc;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               CORR_SELECT "WHERE (:serial IS NULL OR d.serial = :serial) "
                               "ORDER BY d.serial, m.name, b.name, t.point, t.parameter, t.effective_from, t.id")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":serial", serial);
    fxl_stmt_bind_text(&s, ":at", at);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list, "listing correction tables")) != 0)
            goto cleanup;
        read_table(&s, &list[count++]);
    }
    if (rc == 0) {
        *out = list;
        *n = count;
        list = NULL;
    }
cleanup:
    fxl_stmt_finalize(&s);
    fxl_corr_list_free(list, count);
    return rc;
}

int fxl_corr_get(fxl_ctx *ctx, fxl_corr_table *out, int64_t id, const char *at)
{
    fxl_stmt s = FXL_STMT_INIT;
    char nowbuf[FXL_TIME_LEN];
    size_t i = 0;
    int rc;

    memset(out, 0, sizeof *out);
    if (!at || !*at) {
        fxl_now(ctx, nowbuf);
        at = nowbuf;
    }
    if ((rc = fxl_stmt_prepare(&s, ctx, CORR_SELECT "WHERE t.id = :id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":id", id);
    fxl_stmt_bind_text(&s, ":at", at);
    rc = fxl_stmt_step(&s);
    if (rc == 0)
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "unknown correction table %lld (see 'fxledger table list')",
                      (long long)id);
    if (rc != 1)
        goto cleanup;
    read_table(&s, out);
    fxl_stmt_finalize(&s);
    if (out->n_points && !(out->points = calloc(out->n_points, sizeof *out->points))) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory reading correction table");
        goto cleanup;
    }
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT x, factor FROM correction_points WHERE table_id = :id ORDER BY x")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":id", id);
    while ((rc = fxl_stmt_step(&s)) == 1 && i < out->n_points) {
        out->points[i].x = fxl_stmt_double(&s, 0);
        out->points[i].factor = fxl_stmt_double(&s, 1);
        i++;
    }
    if (rc == 1)
        rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    if (rc != 0)
        fxl_corr_table_release(out);
    return rc;
}
