/* Patients in the database: add (one transaction with its audit row), look up
 * by MRN, list with counts of plans and logged fractions. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/patients.h"
#include "store/audit.h"
#include "store/grow.h"
#include "store/json_put.h"
#include "store/stmt.h"

#define PATIENT_COLUMNS                                                                         \
    "p.id, p.mrn, p.family_name, p.given_name, coalesce(p.birth_date, ''), p.created_at, "      \
    "(SELECT count(*) FROM plans WHERE patient_id = p.id), "                                   \
    "(SELECT count(*) FROM fractions f JOIN plans pl ON pl.id = f.plan_id WHERE pl.patient_id = p.id) " \
    "FROM patients p "

static void read_patient(fxl_stmt *s, fxl_patient *p)
{
    memset(p, 0, sizeof *p);
    p->id = fxl_stmt_int(s, 0);
    snprintf(p->mrn, sizeof p->mrn, "%s", fxl_stmt_text(s, 1));
    snprintf(p->family_name, sizeof p->family_name, "%s", fxl_stmt_text(s, 2));
    snprintf(p->given_name, sizeof p->given_name, "%s", fxl_stmt_text(s, 3));
    snprintf(p->birth_date, sizeof p->birth_date, "%s", fxl_stmt_text(s, 4));
    snprintf(p->created_at, sizeof p->created_at, "%s", fxl_stmt_text(s, 5));
    p->plans = (int)fxl_stmt_int(s, 6);
    p->fractions_logged = (int)fxl_stmt_int(s, 7);
}

/* Printable text of 1..max bytes (UTF-8 passes), no control characters, no
 * space at either end. */
static int check_text(fxl_ctx *ctx, const char *what, const char *v, size_t min, size_t max)
{
    const unsigned char *c;
    size_t len = v ? strlen(v) : 0;

    if (len < min || len > max)
        return fxl_fail(ctx, FXL_EINVAL, "%s '%s' must be %zu to %zu characters", what, v ? v : "",
                        min, max);
    for (c = (const unsigned char *)v; c && *c; c++)
        if (*c < 0x20 || *c == 0x7f)
            return fxl_fail(ctx, FXL_EINVAL, "%s must not contain control characters", what);
    if (len > 0 && (v[0] == ' ' || v[len - 1] == ' '))
        return fxl_fail(ctx, FXL_EINVAL, "%s '%s' must not start or end with a space", what, v);
    return 0;
}

int fxl_patient_add(fxl_ctx *ctx, int64_t *out_id, const char *mrn, const char *family_name,
                    const char *given_name, const char *birth_date)
{
    fxl_stmt s = FXL_STMT_INIT;
    cJSON *audit = NULL;
    char now[FXL_TIME_LEN], birth[FXL_TIME_LEN] = "";
    int64_t id = 0;
    int rc;

    if ((rc = fxl_require_role(ctx, FXL_ROLES_CLINICAL, "adding a patient")) != 0)
        return rc;
    fxl_now(ctx, now);
    if ((rc = check_text(ctx, "MRN", mrn, 1, 64)) != 0 ||
        (rc = check_text(ctx, "family name", family_name, 1, 200)) != 0 ||
        (rc = check_text(ctx, "given name", given_name ? given_name : "", 0, 200)) != 0)
        return rc;
    if (birth_date) {
        if (strlen(birth_date) != 10 || fxl_time_normalize(birth, birth_date, 0) != 0)
            return fxl_fail(ctx, FXL_EINVAL, "birth date '%s' must be a date YYYY-MM-DD", birth_date);
        birth[10] = '\0';
        if (strcmp(birth, "1900-01-01") < 0 || strncmp(birth, now, 10) > 0)
            return fxl_fail(ctx, FXL_EINVAL, "birth date '%s' must be from 1900-01-01 to today (%.10s)",
                            birth_date, now);
    }

    if ((rc = fxl_begin(ctx)) != 0)
        return rc;
    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT 1 FROM patients WHERE mrn = :mrn")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":mrn", mrn);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1) {
        rc = fxl_fail(ctx, FXL_ECONFLICT, "patient '%s' already exists (see 'fxledger patient show %s')",
                      mrn, mrn);
        goto cleanup;
    }
    fxl_stmt_finalize(&s);
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "INSERT INTO patients (mrn, family_name, given_name, birth_date, created_at) "
                               "VALUES (:mrn, :family, :given, :birth, :now)")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":mrn", mrn);
    fxl_stmt_bind_text(&s, ":family", family_name);
    fxl_stmt_bind_text(&s, ":given", given_name ? given_name : "");
    fxl_stmt_bind_text(&s, ":birth", birth[0] ? birth : NULL);
    fxl_stmt_bind_text(&s, ":now", now);
    if ((rc = fxl_stmt_exec(&s)) != 0)
        goto cleanup;
    id = sqlite3_last_insert_rowid(ctx->db);
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "mrn", mrn);
    cJSON_AddStringToObject(audit, "family_name", family_name);
    cJSON_AddStringToObject(audit, "given_name", given_name ? given_name : "");
    fxl_json_put_text(audit, "birth_date", birth);
    if ((rc = fxl_audit_append(ctx, "create", "patients", id, audit)) != 0)
        goto cleanup;
    if ((rc = fxl_commit(ctx)) != 0)
        goto cleanup;
    if (out_id)
        *out_id = id;
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    fxl_stmt_finalize(&s);
    cJSON_Delete(audit);
    return rc;
}

int fxl_patient_get(fxl_ctx *ctx, fxl_patient *out, const char *mrn)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT " PATIENT_COLUMNS "WHERE p.mrn = :mrn")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":mrn", mrn);
    rc = fxl_stmt_step(&s);
    if (rc == 1) {
        read_patient(&s, out);
        rc = 0;
    } else if (rc == 0) {
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "unknown patient '%s' (see 'fxledger patient list')", mrn);
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_patient_list(fxl_ctx *ctx, fxl_patient **out, size_t *n)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_patient *list = NULL;
    size_t cap = 0, count = 0;
    int rc;

    *out = NULL;
    *n = 0;
    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT " PATIENT_COLUMNS
                                        "ORDER BY p.family_name, p.given_name, p.mrn")) != 0)
        goto cleanup;
    while ((rc = fxl_stmt_step(&s)) == 1) {
        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list, "listing patients")) != 0)
            goto cleanup;
        read_patient(&s, &list[count++]);
    }
cleanup:
    fxl_stmt_finalize(&s);
    if (rc < 0) {
        free(list);
        return rc;
    }
    *out = list;
    *n = count;
    return 0;
}
