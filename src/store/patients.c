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

/* ---- corrections ---------------------------------------------------------------- */

static int find_patient_id(fxl_ctx *ctx, int64_t *id, const char *mrn)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    *id = 0;
    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT id FROM patients WHERE mrn = :mrn")) != 0)
        return rc;
    fxl_stmt_bind_text(&s, ":mrn", mrn ? mrn : "");
    rc = fxl_stmt_step(&s);
    if (rc == 1)
        *id = fxl_stmt_int(&s, 0);
    fxl_stmt_finalize(&s);
    if (rc < 0)
        return rc;
    if (*id)
        return 0;
    /* an MRN the patient had before a correction */
    if ((rc = fxl_stmt_prepare(&s, ctx,
            "SELECT patient_id FROM patient_corrections WHERE item = 'mrn' AND old_value = :mrn "
            "ORDER BY id DESC LIMIT 1")) != 0)
        return rc;
    fxl_stmt_bind_text(&s, ":mrn", mrn ? mrn : "");
    rc = fxl_stmt_step(&s);
    if (rc == 1)
        *id = fxl_stmt_int(&s, 0);
    fxl_stmt_finalize(&s);
    if (rc < 0)
        return rc;
    return *id ? 0 : fxl_fail(ctx, FXL_ENOTFOUND, "unknown patient '%s' (see 'fxledger patient list')",
                              mrn ? mrn : "");
}

static int blank(const char *s)
{
    for (; s && *s; s++)
        if (*s != ' ' && *s != '\t')
            return 0;
    return 1;
}

static int insert_change(fxl_ctx *ctx, int64_t pid, const char *item, const char *old_v,
                         const char *new_v, const char *reason, const char *now)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    if ((rc = fxl_stmt_prepare(&s, ctx,
            "INSERT INTO patient_corrections (patient_id, item, old_value, new_value, reason, user_id, "
            "created_at) VALUES (:pid, :item, :old, :new, :reason, :user, :now)")) != 0)
        return rc;
    fxl_stmt_bind_int(&s, ":pid", pid);
    fxl_stmt_bind_text(&s, ":item", item);
    if (old_v)
        fxl_stmt_bind_text(&s, ":old", old_v);
    else
        fxl_stmt_bind_null(&s, ":old");
    if (new_v)
        fxl_stmt_bind_text(&s, ":new", new_v);
    else
        fxl_stmt_bind_null(&s, ":new");
    fxl_stmt_bind_text(&s, ":reason", reason);
    fxl_stmt_bind_int(&s, ":user", fxl_user_id(ctx));
    fxl_stmt_bind_text(&s, ":now", now);
    rc = fxl_stmt_exec(&s);
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_patient_correct(fxl_ctx *ctx, const char *mrn, const fxl_patient_correction *c)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_patient cur;
    cJSON *audit = NULL, *changes = NULL;
    char now[FXL_TIME_LEN], birth[FXL_TIME_LEN] = "";
    const char *new_mrn, *new_family, *new_given, *new_birth, *old_birth;
    int64_t pid = 0, other = 0;
    int rc, n_changed = 0, in_tx = 0;

    if ((rc = fxl_require_role(ctx, FXL_ROLES_PHYSICS, "correcting a patient")) != 0)
        return rc;
    if (!c || !c->reason || blank(c->reason) || strlen(c->reason) > FXL_PATIENT_REASON_MAX)
        return fxl_fail(ctx, FXL_EINVAL, "a reason for the correction is required (1 to %d characters)",
                        FXL_PATIENT_REASON_MAX);
    if ((rc = check_text(ctx, "reason", c->reason, 1, FXL_PATIENT_REASON_MAX)) != 0 ||
        (rc = fxl_patient_get(ctx, &cur, mrn)) != 0)
        return rc;
    fxl_now(ctx, now);
    if ((c->mrn && (rc = check_text(ctx, "MRN", c->mrn, 1, 64)) != 0) ||
        (c->family_name && (rc = check_text(ctx, "family name", c->family_name, 1, 200)) != 0) ||
        (c->given_name && (rc = check_text(ctx, "given name", c->given_name, 0, 200)) != 0))
        return rc;
    if (c->birth_date && c->birth_date[0]) {
        if (strlen(c->birth_date) != 10 || fxl_time_normalize(birth, c->birth_date, 0) != 0)
            return fxl_fail(ctx, FXL_EINVAL, "birth date '%s' must be a date YYYY-MM-DD", c->birth_date);
        birth[10] = '\0';
        if (strcmp(birth, "1900-01-01") < 0 || strncmp(birth, now, 10) > 0)
            return fxl_fail(ctx, FXL_EINVAL, "birth date '%s' must be from 1900-01-01 to today (%.10s)",
                            c->birth_date, now);
    }
    new_mrn = c->mrn && strcmp(c->mrn, cur.mrn) != 0 ? c->mrn : NULL;
    new_family = c->family_name && strcmp(c->family_name, cur.family_name) != 0 ? c->family_name : NULL;
    new_given = c->given_name && strcmp(c->given_name, cur.given_name) != 0 ? c->given_name : NULL;
    old_birth = cur.birth_date[0] ? cur.birth_date : NULL;
    new_birth = c->birth_date && strcmp(birth, cur.birth_date) != 0 ? birth : NULL;
    if (!new_mrn && !new_family && !new_given && !new_birth)
        return fxl_fail(ctx, FXL_EINVAL, "nothing to correct: give --mrn, --family, --given or "
                        "--birth-date with a value different from the current one");
    if ((rc = fxl_begin(ctx)) != 0)
        return rc;
    in_tx = 1;
    pid = cur.id;
    if (new_mrn) {
        if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT id FROM patients WHERE mrn = :mrn")) != 0)
            goto cleanup;
        fxl_stmt_bind_text(&s, ":mrn", new_mrn);
        if ((rc = fxl_stmt_step(&s)) < 0)
            goto cleanup;
        other = rc == 1 ? fxl_stmt_int(&s, 0) : 0;
        fxl_stmt_finalize(&s);
        if (other) {
            rc = fxl_fail(ctx, FXL_ECONFLICT, "MRN '%s' belongs to another patient; nothing changed",
                          new_mrn);
            goto cleanup;
        }
    }
    changes = cJSON_CreateArray();
#define CHANGE(item, oldv, newv)                                                                  \
    do {                                                                                          \
        cJSON *o = cJSON_CreateObject();                                                          \
        if ((rc = insert_change(ctx, pid, item, oldv, newv, c->reason, now)) != 0)                \
            goto cleanup;                                                                         \
        cJSON_AddStringToObject(o, "item", item);                                                 \
        fxl_json_put_text(o, "old", oldv);                                                        \
        fxl_json_put_text(o, "new", newv);                                                        \
        cJSON_AddItemToArray(changes, o);                                                         \
        n_changed++;                                                                              \
    } while (0)
    if (new_mrn)
        CHANGE("mrn", cur.mrn, new_mrn);
    if (new_family)
        CHANGE("family_name", cur.family_name, new_family);
    if (new_given)
        CHANGE("given_name", cur.given_name, new_given);
    if (new_birth)
        CHANGE("birth_date", old_birth, new_birth[0] ? new_birth : NULL);
#undef CHANGE
    if ((rc = fxl_stmt_prepare(&s, ctx,
            "UPDATE patients SET mrn = :mrn, family_name = :family, given_name = :given, "
            "birth_date = :birth WHERE id = :id")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":mrn", new_mrn ? new_mrn : cur.mrn);
    fxl_stmt_bind_text(&s, ":family", new_family ? new_family : cur.family_name);
    fxl_stmt_bind_text(&s, ":given", new_given ? new_given : cur.given_name);
    if (new_birth ? new_birth[0] != '\0' : old_birth != NULL)
        fxl_stmt_bind_text(&s, ":birth", new_birth ? new_birth : old_birth);
    else
        fxl_stmt_bind_null(&s, ":birth");
    fxl_stmt_bind_int(&s, ":id", pid);
    if ((rc = fxl_stmt_exec(&s)) != 0)
        goto cleanup;
    fxl_stmt_finalize(&s);
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "mrn", new_mrn ? new_mrn : cur.mrn);
    cJSON_AddStringToObject(audit, "reason", c->reason);
    cJSON_AddItemToObject(audit, "changes", changes);
    changes = NULL;
    if ((rc = fxl_audit_append(ctx, "correct", "patients", pid, audit)) != 0 ||
        (rc = fxl_commit(ctx)) != 0)
        goto cleanup;
    in_tx = 0;
cleanup:
    if (in_tx)
        fxl_rollback(ctx);
    fxl_stmt_finalize(&s);
    cJSON_Delete(audit);
    cJSON_Delete(changes);
    return rc;
}

int fxl_patient_history(fxl_ctx *ctx, fxl_patient_change **out, size_t *n, const char *mrn)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_patient_change *list = NULL;
    size_t cap = 0, count = 0;
    int64_t pid;
    int rc;

    *out = NULL;
    *n = 0;
    if ((rc = find_patient_id(ctx, &pid, mrn)) != 0)
        return rc;
    if ((rc = fxl_stmt_prepare(&s, ctx,
            "SELECT c.id, c.item, coalesce(c.old_value, ''), coalesce(c.new_value, ''), c.reason, "
            "u.login, c.created_at FROM patient_corrections c JOIN users u ON u.id = c.user_id "
            "WHERE c.patient_id = :pid ORDER BY c.id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":pid", pid);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        fxl_patient_change *ch;
        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list,
                           "listing patient corrections")) != 0)
            goto cleanup;
        ch = &list[count++];
        ch->id = fxl_stmt_int(&s, 0);
        snprintf(ch->item, sizeof ch->item, "%s", fxl_stmt_text(&s, 1));
        snprintf(ch->old_value, sizeof ch->old_value, "%s", fxl_stmt_text(&s, 2));
        snprintf(ch->new_value, sizeof ch->new_value, "%s", fxl_stmt_text(&s, 3));
        snprintf(ch->reason, sizeof ch->reason, "%s", fxl_stmt_text(&s, 4));
        snprintf(ch->user, sizeof ch->user, "%s", fxl_stmt_text(&s, 5));
        snprintf(ch->at, sizeof ch->at, "%s", fxl_stmt_text(&s, 6));
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
