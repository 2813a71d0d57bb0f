/* Proving the record beyond the audit chain (docs/audit.md): schema and
 * triggers against the migrations, rows against their seals, seals against
 * the chain, users and settings against the audit rows that wrote them,
 * review items against their events, and the chain against an external
 * anchor. Read-only. */
#include <cjson/cJSON.h>
#include <inttypes.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/audit.h"
#include "fxl/auth.h"
#include "store/migrations.h"
#include "store/rule_state.h"
#include "store/seal.h"
#include "store/stmt.h"

int fxl_seal_table_sql(fxl_ctx *ctx, const char *tbl, char **sql_out);
void fxl_seal_row_digest(char hex[65], const char *tbl, int64_t row_id, const char *canon);

static void problem(fxl_record_report *out, const char *fmt, ...)
{
    va_list ap;

    if (out->n_problems >= FXL_RECORD_PROBLEMS_MAX)
        return;
    va_start(ap, fmt);
    vsnprintf(out->problem[out->n_problems++], FXL_RECORD_PROBLEM_LEN, fmt, ap);
    va_end(ap);
}

static char *dup(const char *s)
{
    size_t n = strlen(s) + 1;
    char *d = malloc(n);
    if (d)
        memcpy(d, s, n);
    return d;
}

/* ---- anchor ------------------------------------------------------------- */

int fxl_anchor_parse(fxl_ctx *ctx, const char *line, int64_t *rows, char at[32], char head[65])
{
    long long n = -1;
    char tail;
    size_t i;

    at[0] = head[0] = '\0';
    if (!line || sscanf(line, " fxledger-anchor rows=%lld at=%31s head=%64s %c", &n, at, head, &tail) != 3 ||
        n < 0 || strlen(head) != 64)
        return fxl_fail(ctx, FXL_EINVAL,
                        "anchor '%.120s' is not an anchor line: expected "
                        "'fxledger-anchor rows=N at=YYYY-MM-DDTHH:MM:SSZ head=<64 hex digits>'",
                        line ? line : "");
    for (i = 0; i < 64; i++)
        if (!((head[i] >= '0' && head[i] <= '9') || (head[i] >= 'a' && head[i] <= 'f')))
            return fxl_fail(ctx, FXL_EINVAL, "anchor head '%s' is not 64 lowercase hex digits", head);
    *rows = n;
    return 0;
}

static int check_anchor(fxl_ctx *ctx, const char *line, fxl_record_report *out)
{
    fxl_stmt s = FXL_STMT_INIT;
    char at[32], head[65];
    int64_t rows, last = 0;
    int rc;

    if ((rc = fxl_anchor_parse(ctx, line, &rows, at, head)) != 0)
        return rc;
    out->anchor_given = 1;
    out->anchor_rows = rows;
    if (rows == 0)
        return 0;
    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT coalesce(max(id), 0) FROM audit_log")) != 0 ||
        (rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    last = fxl_stmt_int(&s, 0);
    fxl_stmt_finalize(&s);
    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT at, hash FROM audit_log WHERE id = :id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":id", rows);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 0)
        problem(out, "anchor: the audit log ends at row %lld but the anchor of %s names row %lld: "
                     "rows were removed (the record was truncated)",
                (long long)last, at, (long long)rows);
    else if (strcmp(fxl_stmt_text(&s, 1), head) != 0 || strcmp(fxl_stmt_text(&s, 0), at) != 0)
        problem(out, "anchor: audit row %lld is not the row the anchor of %s names (hash %.16s..., "
                     "anchored %.16s...): the chain was rewritten at or before row %lld",
                (long long)rows, at, fxl_stmt_text(&s, 1), head, (long long)rows);
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* ---- schema ------------------------------------------------------------- */

typedef struct schema_obj {
    char *key;   /* "type name" */
    char *sql;   /* "tbl_name\nsql" */
} schema_obj;

typedef struct schema_list {
    schema_obj *v;
    size_t n, cap;
} schema_list;

static void schema_free(schema_list *l)
{
    size_t i;
    for (i = 0; i < l->n; i++) {
        free(l->v[i].key);
        free(l->v[i].sql);
    }
    free(l->v);
    memset(l, 0, sizeof *l);
}

#define SCHEMA_SQL                                                                  \
    "SELECT type || ' ' || name, tbl_name || char(10) || coalesce(sql, '') "       \
    "FROM sqlite_master WHERE name NOT LIKE 'sqlite\\_%' ESCAPE '\\' ORDER BY 1"

static int schema_read(sqlite3 *db, schema_list *l)
{
    sqlite3_stmt *st = NULL;
    int rc = sqlite3_prepare_v2(db, SCHEMA_SQL, -1, &st, NULL);

    if (rc != SQLITE_OK)
        return -1;
    while ((rc = sqlite3_step(st)) == SQLITE_ROW) {
        if (l->n == l->cap) {
            size_t cap = l->cap ? l->cap * 2 : 64;
            schema_obj *nv = realloc(l->v, cap * sizeof *nv);
            if (!nv)
                break;
            l->v = nv;
            l->cap = cap;
        }
        l->v[l->n].key = dup((const char *)sqlite3_column_text(st, 0));
        l->v[l->n].sql = dup((const char *)sqlite3_column_text(st, 1));
        if (!l->v[l->n].key || !l->v[l->n].sql) {
            free(l->v[l->n].key);
            free(l->v[l->n].sql);
            break;
        }
        l->n++;
    }
    sqlite3_finalize(st);
    return rc == SQLITE_DONE ? 0 : -1;
}

static const char *obj_kind(const char *key)
{
    return strncmp(key, "trigger ", 8) == 0 ? "trigger" : strncmp(key, "index ", 6) == 0 ? "index"
         : strncmp(key, "view ", 5) == 0    ? "view"
                                            : "table";
}

static int check_schema(fxl_ctx *ctx, int version, fxl_record_report *out)
{
    schema_list want = {0}, have = {0};
    sqlite3 *mem = NULL;
    size_t i = 0, j = 0;
    int m, rc = 0;

    if (sqlite3_open_v2(":memory:", &mem, SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE, NULL) != SQLITE_OK) {
        rc = fxl_fail(ctx, FXL_EIO, "cannot open a database in memory to rebuild the schema");
        goto cleanup;
    }
    for (m = 0; m < fxl_migration_count; m++) {
        if (fxl_migrations[m].version > version)
            continue;
        if (sqlite3_exec(mem, fxl_migrations[m].sql, NULL, NULL, NULL) != SQLITE_OK) {
            rc = fxl_fail(ctx, FXL_EDB, "cannot rebuild the schema of migration '%s': %s",
                          fxl_migrations[m].name, sqlite3_errmsg(mem));
            goto cleanup;
        }
    }
    if (schema_read(mem, &want) != 0 || schema_read(ctx->db, &have) != 0) {
        rc = fxl_fail(ctx, FXL_EDB, "cannot read the schema: %s", sqlite3_errmsg(ctx->db));
        goto cleanup;
    }
    /* Both lists are sorted by key: a merge names the first difference. */
    while (i < want.n || j < have.n) {
        int c = i >= want.n ? 1 : j >= have.n ? -1 : strcmp(want.v[i].key, have.v[j].key);
        if (c < 0) {
            problem(out, "schema: %s '%s' of the migrations is missing (dropped)", obj_kind(want.v[i].key),
                    strchr(want.v[i].key, ' ') + 1);
            break;
        }
        if (c > 0) {
            problem(out, "schema: %s '%s' is not part of the fxledger schema (added outside fxledger)",
                    obj_kind(have.v[j].key), strchr(have.v[j].key, ' ') + 1);
            break;
        }
        if (strcmp(want.v[i].sql, have.v[j].sql) != 0) {
            problem(out, "schema: %s '%s' differs from the one the migrations create (changed outside fxledger)",
                    obj_kind(want.v[i].key), strchr(want.v[i].key, ' ') + 1);
            break;
        }
        out->objects_checked++;
        i++;
        j++;
    }
cleanup:
    schema_free(&want);
    schema_free(&have);
    sqlite3_close(mem);
    return rc;
}

/* ---- seals -------------------------------------------------------------- */

/* Every audit row's seals hash to the seal the chain holds for it, and no
 * seal names an audit row that is not there. */
static int check_audit_seals(fxl_ctx *ctx, fxl_record_report *out)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT s.tbl, s.row_id, s.audit_id FROM row_seals s "
                               "WHERE NOT EXISTS (SELECT 1 FROM audit_log a WHERE a.id = s.audit_id) "
                               "ORDER BY s.audit_id, s.tbl, s.row_id LIMIT 1")) != 0)
        goto cleanup;
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1)
        problem(out, "seals: the seal of %s row %lld names audit row %lld, which does not exist: "
                     "audit rows were removed",
                fxl_stmt_text(&s, 0), (long long)fxl_stmt_int(&s, 1), (long long)fxl_stmt_int(&s, 2));
    fxl_stmt_finalize(&s);

    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT id, coalesce(seal, '') FROM audit_log ORDER BY id")) != 0)
        goto cleanup;
    while ((rc = fxl_stmt_step(&s)) == 1) {
        int64_t id = fxl_stmt_int(&s, 0), n = 0;
        char hex[65];
        if ((rc = fxl_seal_digest(ctx, id, hex, &n)) != 0)
            goto cleanup;
        if (strcmp(hex, fxl_stmt_text(&s, 1)) != 0) {
            problem(out, "seals: the %lld row seal%s of audit row %lld do not match the seal its hash covers: "
                         "a seal was added, changed or removed outside fxledger",
                    (long long)n, n == 1 ? "" : "s", (long long)id);
            break;
        }
        out->seals_checked += n;
    }
    rc = rc < 0 ? rc : 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* Every row of every sealed table matches its latest seal; every sealed row
 * is still there; every audit row that names a row of a sealed table names
 * a row that is there. */
static int check_rows(fxl_ctx *ctx, fxl_record_report *out)
{
    fxl_stmt rows = FXL_STMT_INIT, seal = FXL_STMT_INIT, s = FXL_STMT_INIT;
    char *sql = NULL, q[512];
    int bad_row = 0, bad_missing = 0, bad_ref = 0;
    size_t t;
    int rc = 0;

    if ((rc = fxl_stmt_prepare(&seal, ctx,
                               "SELECT audit_id, sha256 FROM row_seals WHERE tbl = :t AND row_id = :r "
                               "ORDER BY audit_id DESC LIMIT 1")) != 0)
        goto cleanup;
    for (t = 0; fxl_sealed_tables[t]; t++) {
        const char *tbl = fxl_sealed_tables[t];
        if ((rc = fxl_seal_table_sql(ctx, tbl, &sql)) != 0 || (rc = fxl_stmt_prepare(&rows, ctx, sql)) != 0)
            goto cleanup;
        while (!bad_row && (rc = fxl_stmt_step(&rows)) == 1) {
            int64_t id = fxl_stmt_int(&rows, 0);
            char hex[65];
            fxl_seal_row_digest(hex, tbl, id, fxl_stmt_text(&rows, 1));
            fxl_stmt_reset(&seal);
            fxl_stmt_bind_text(&seal, ":t", tbl);
            fxl_stmt_bind_int(&seal, ":r", id);
            if ((rc = fxl_stmt_step(&seal)) < 0)
                goto cleanup;
            if (rc == 0) {
                problem(out, "rows: %s row %lld has no seal in the audit chain: written outside fxledger",
                        tbl, (long long)id);
                bad_row = 1;
            } else if (strcmp(hex, fxl_stmt_text(&seal, 1)) != 0) {
                problem(out, "rows: %s row %lld does not match its seal in audit row %lld: "
                             "changed outside fxledger",
                        tbl, (long long)id, (long long)fxl_stmt_int(&seal, 0));
                bad_row = 1;
            } else {
                out->rows_checked++;
            }
        }
        if (rc < 0)
            goto cleanup;
        fxl_stmt_finalize(&rows);
        free(sql);
        sql = NULL;

        if (!bad_missing) {
            snprintf(q, sizeof q,
                     "SELECT s.row_id, max(s.audit_id) FROM row_seals s WHERE s.tbl = '%s' AND NOT EXISTS "
                     "(SELECT 1 FROM main.\"%s\" t WHERE t.rowid = s.row_id) GROUP BY s.row_id "
                     "ORDER BY s.row_id LIMIT 1", tbl, tbl);
            if ((rc = fxl_stmt_prepare(&s, ctx, q)) != 0 || (rc = fxl_stmt_step(&s)) < 0)
                goto cleanup;
            if (rc == 1) {
                problem(out, "rows: %s row %lld, sealed by audit row %lld, is missing: deleted outside fxledger",
                        tbl, (long long)fxl_stmt_int(&s, 0), (long long)fxl_stmt_int(&s, 1));
                bad_missing = 1;
            }
            fxl_stmt_finalize(&s);
        }
        if (!bad_ref) {
            snprintf(q, sizeof q,
                     "SELECT a.id, a.entity_id FROM audit_log a WHERE a.entity = '%s' AND a.entity_id IS NOT NULL "
                     "AND NOT EXISTS (SELECT 1 FROM main.\"%s\" t WHERE t.rowid = a.entity_id) "
                     "ORDER BY a.id LIMIT 1", tbl, tbl);
            if ((rc = fxl_stmt_prepare(&s, ctx, q)) != 0 || (rc = fxl_stmt_step(&s)) < 0)
                goto cleanup;
            if (rc == 1) {
                problem(out, "rows: audit row %lld describes %s row %lld, which does not exist: deleted outside fxledger",
                        (long long)fxl_stmt_int(&s, 0), tbl, (long long)fxl_stmt_int(&s, 1));
                bad_ref = 1;
            }
            fxl_stmt_finalize(&s);
        }
    }
    rc = 0;
cleanup:
    fxl_stmt_finalize(&rows);
    fxl_stmt_finalize(&seal);
    fxl_stmt_finalize(&s);
    free(sql);
    return rc;
}

/* ---- users and settings: matched with the audit rows that wrote them ---- */

typedef struct expect_user {
    int64_t id, audit_id;
    char *login, *full_name, *role;
    int deactivated;
} expect_user;

static const char *jstr(const cJSON *o, const char *key)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, key);
    return cJSON_IsString(v) ? v->valuestring : NULL;
}

static int check_users(fxl_ctx *ctx, fxl_record_report *out)
{
    fxl_stmt s = FXL_STMT_INIT;
    expect_user *u = NULL;
    size_t n = 0, cap = 0, i;
    int rc, bad = 0;

    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT id, action, coalesce(entity_id, 0), content FROM audit_log "
                               "WHERE entity = 'users' AND action IN ('create', 'deactivate') ORDER BY id")) != 0)
        goto cleanup;
    while ((rc = fxl_stmt_step(&s)) == 1) {
        int64_t aid = fxl_stmt_int(&s, 0), uid = fxl_stmt_int(&s, 2);
        int create = strcmp(fxl_stmt_text(&s, 1), "create") == 0;
        cJSON *c = cJSON_Parse(fxl_stmt_text(&s, 3));
        for (i = 0; i < n && u[i].id != uid; i++)
            ;
        if (create && i == n) {
            if (n == cap) {
                size_t nc = cap ? cap * 2 : 16;
                expect_user *nu = realloc(u, nc * sizeof *nu);
                if (!nu) {
                    cJSON_Delete(c);
                    rc = fxl_fail(ctx, FXL_EIO, "out of memory verifying users");
                    goto cleanup;
                }
                u = nu;
                cap = nc;
            }
            memset(&u[n], 0, sizeof u[n]);
            u[n].id = uid;
            u[n].audit_id = aid;
            u[n].login = dup(jstr(c, "login") ? jstr(c, "login") : "");
            u[n].full_name = dup(jstr(c, "full_name") ? jstr(c, "full_name") : "");
            u[n].role = dup(jstr(c, "role") ? jstr(c, "role") : "");
            n++;
        } else if (!create && i < n) {
            u[i].deactivated = 1;
        }
        cJSON_Delete(c);
    }
    if (rc < 0)
        goto cleanup;
    fxl_stmt_finalize(&s);

    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT id, login, full_name, role, active FROM users ORDER BY id")) != 0)
        goto cleanup;
    while (!bad && (rc = fxl_stmt_step(&s)) == 1) {
        int64_t id = fxl_stmt_int(&s, 0);
        const char *login = fxl_stmt_text(&s, 1);
        for (i = 0; i < n && u[i].id != id; i++)
            ;
        bad = 1;
        if (i == n)
            problem(out, "users: users row %lld ('%s') was not created by any audit row: written outside fxledger",
                    (long long)id, login);
        else if (!u[i].login || strcmp(u[i].login, login) != 0)
            problem(out, "users: users row %lld has login '%s' but audit row %lld created '%s'",
                    (long long)id, login, (long long)u[i].audit_id, u[i].login ? u[i].login : "");
        else if (!u[i].full_name || strcmp(u[i].full_name, fxl_stmt_text(&s, 2)) != 0)
            problem(out, "users: users row %lld ('%s') has a full name other than audit row %lld gave it",
                    (long long)id, login, (long long)u[i].audit_id);
        else if (!u[i].role || strcmp(u[i].role, fxl_stmt_text(&s, 3)) != 0)
            problem(out, "users: users row %lld ('%s') has the role '%s' but audit row %lld gave it '%s': "
                         "changed outside fxledger",
                    (long long)id, login, fxl_stmt_text(&s, 3), (long long)u[i].audit_id,
                    u[i].role ? u[i].role : "");
        else if (fxl_stmt_int(&s, 4) != (u[i].deactivated ? 0 : 1))
            problem(out, "users: users row %lld ('%s') is %s but the audit log says %s",
                    (long long)id, login, fxl_stmt_int(&s, 4) ? "active" : "inactive",
                    u[i].deactivated ? "it was deactivated" : "it was never deactivated");
        else {
            bad = 0;
            out->rows_checked++;
            u[i].id = -u[i].id - 1;   /* seen */
        }
    }
    if (rc < 0)
        goto cleanup;
    for (i = 0; !bad && i < n; i++)
        if (u[i].id >= 0) {
            problem(out, "users: users row %lld ('%s'), created by audit row %lld, is missing: deleted outside fxledger",
                    (long long)u[i].id, u[i].login ? u[i].login : "", (long long)u[i].audit_id);
            bad = 1;
        }
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    for (i = 0; i < n; i++) {
        free(u[i].login);
        free(u[i].full_name);
        free(u[i].role);
    }
    free(u);
    return rc;
}

typedef struct expect_setting {
    char *key, *value;
    int64_t audit_id;
    int seen;
} expect_setting;

static int put_setting(expect_setting **v, size_t *n, size_t *cap, const char *key, const char *value,
                       int64_t aid)
{
    size_t i;

    for (i = 0; i < *n && strcmp((*v)[i].key, key) != 0; i++)
        ;
    if (i == *n) {
        if (*n == *cap) {
            size_t nc = *cap ? *cap * 2 : 32;
            expect_setting *nv = realloc(*v, nc * sizeof *nv);
            if (!nv)
                return -1;
            *v = nv;
            *cap = nc;
        }
        memset(&(*v)[i], 0, sizeof (*v)[i]);
        if (!((*v)[i].key = dup(key)))
            return -1;
        (*n)++;
    }
    free((*v)[i].value);
    (*v)[i].value = dup(value);
    (*v)[i].audit_id = aid;
    return (*v)[i].value ? 0 : -1;
}

static int check_settings(fxl_ctx *ctx, fxl_record_report *out)
{
    fxl_stmt s = FXL_STMT_INIT;
    expect_setting *v = NULL;
    size_t n = 0, cap = 0, i;
    int rc, bad = 0;

    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT id, action, content FROM audit_log WHERE entity = 'settings' "
                               "AND action IN ('init', 'set') ORDER BY id")) != 0)
        goto cleanup;
    while ((rc = fxl_stmt_step(&s)) == 1) {
        int64_t aid = fxl_stmt_int(&s, 0);
        cJSON *c = cJSON_Parse(fxl_stmt_text(&s, 2)), *it;
        int err = 0;
        if (strcmp(fxl_stmt_text(&s, 1), "set") == 0) {
            if (jstr(c, "key") && jstr(c, "value"))
                err = put_setting(&v, &n, &cap, jstr(c, "key"), jstr(c, "value"), aid);
        } else {
            cJSON_ArrayForEach(it, c)
                if (cJSON_IsString(it) && it->string)
                    err |= put_setting(&v, &n, &cap, it->string, it->valuestring, aid);
        }
        cJSON_Delete(c);
        if (err) {
            rc = fxl_fail(ctx, FXL_EIO, "out of memory verifying settings");
            goto cleanup;
        }
    }
    if (rc < 0)
        goto cleanup;
    fxl_stmt_finalize(&s);
    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT key, value FROM settings ORDER BY key")) != 0)
        goto cleanup;
    while (!bad && (rc = fxl_stmt_step(&s)) == 1) {
        const char *key = fxl_stmt_text(&s, 0);
        for (i = 0; i < n && strcmp(v[i].key, key) != 0; i++)
            ;
        bad = 1;
        if (i == n)
            problem(out, "settings: setting '%s' was never set by an audited command: written outside fxledger", key);
        else if (strcmp(v[i].value, fxl_stmt_text(&s, 1)) != 0)
            problem(out, "settings: setting '%s' is '%.60s' but audit row %lld set it to '%.60s': "
                         "changed outside fxledger",
                    key, fxl_stmt_text(&s, 1), (long long)v[i].audit_id, v[i].value);
        else {
            bad = 0;
            v[i].seen = 1;
            out->rows_checked++;
        }
    }
    if (rc < 0)
        goto cleanup;
    for (i = 0; !bad && i < n; i++)
        if (!v[i].seen) {
            problem(out, "settings: setting '%s', set by audit row %lld, is missing: deleted outside fxledger",
                    v[i].key, (long long)v[i].audit_id);
            bad = 1;
        }
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    for (i = 0; i < n; i++) {
        free(v[i].key);
        free(v[i].value);
    }
    free(v);
    return rc;
}

/* ---- review items: the status is that of the latest event ---------------- */

static int check_review_status(fxl_ctx *ctx, fxl_record_report *out)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    if ((rc = fxl_stmt_prepare(&s, ctx,
            "SELECT i.id, i.status, e.id, e.kind FROM review_items i LEFT JOIN review_events e ON e.id = "
            "(SELECT max(id) FROM review_events WHERE item_id = i.id AND kind <> 'comment') "
            "WHERE e.id IS NULL OR i.status IS NOT (CASE e.kind WHEN 'acknowledge' THEN 'acknowledged' "
            "WHEN 'close' THEN 'closed' ELSE 'open' END) ORDER BY i.id LIMIT 1")) != 0)
        goto cleanup;
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1) {
        if (fxl_stmt_is_null(&s, 2))
            problem(out, "review: review item #%lld has no event that opened it", (long long)fxl_stmt_int(&s, 0));
        else
            problem(out, "review: review item #%lld is '%s' but its latest event #%lld is '%s': "
                         "changed outside fxledger",
                    (long long)fxl_stmt_int(&s, 0), fxl_stmt_text(&s, 1), (long long)fxl_stmt_int(&s, 2),
                    fxl_stmt_text(&s, 3));
    }
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* The kept state of the rules over history (sql/015) against the
 * measurements: derived rows, so a difference is a row changed outside
 * fxledger (or a fault), and the next rules would continue from it. */
static int check_rule_state(fxl_ctx *ctx, fxl_record_report *out)
{
    char bad[FXL_RECORD_PROBLEM_LEN - 64];
    long long checked = 0;
    int rc = fxl_rule_state_verify(ctx, &checked, bad, sizeof bad);

    if (rc == 0 && bad[0])
        problem(out, "rule state: %s: changed outside fxledger", bad);
    return rc;
}

int fxl_record_verify(fxl_ctx *ctx, const char *anchor, fxl_record_report *out)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc, version = 0;

    memset(out, 0, sizeof *out);
    if (anchor && (rc = check_anchor(ctx, anchor, out)) != 0)
        return rc;
    if ((rc = fxl_stmt_prepare(&s, ctx, "PRAGMA user_version")) != 0 || (rc = fxl_stmt_step(&s)) < 0) {
        fxl_stmt_finalize(&s);
        return rc < 0 ? rc : FXL_EDB;
    }
    version = (int)fxl_stmt_int(&s, 0);
    fxl_stmt_finalize(&s);
    if ((rc = check_schema(ctx, version, out)) != 0)
        return rc;
    /* The rest reads the tables by name: with the schema changed, a failed
     * read is one more sign of it, reported rather than raised. */
    if ((rc = check_audit_seals(ctx, out)) != 0 || (rc = check_rows(ctx, out)) != 0 ||
        (rc = check_users(ctx, out)) != 0 || (rc = check_settings(ctx, out)) != 0 ||
        (rc = check_review_status(ctx, out)) != 0 || (rc = check_rule_state(ctx, out)) != 0) {
        problem(out, "could not finish: %s", fxl_errmsg(ctx));
        rc = 0;
    }
    return 0;
}

int fxl_verify_whole(fxl_ctx *ctx, const char *anchor, fxl_whole_verify *out)
{
    fxl_signature_report sr;
    int rrc, failed = 0;

    memset(out, 0, sizeof *out);
    memset(&sr, 0, sizeof sr);
    if ((out->chain_rc = fxl_audit_verify(ctx, &out->chain)) != 0)
        snprintf(out->chain_msg, sizeof out->chain_msg, "%s", fxl_errmsg(ctx));
    if ((rrc = fxl_record_verify(ctx, anchor, &out->record)) != 0) {
        snprintf(out->record.problem[0], sizeof out->record.problem[0], "record check failed: %s",
                 fxl_errmsg(ctx));
        out->record.n_problems = 1;
    }
    if ((out->sig_rc = fxl_signature_verify(ctx, &sr)) != 0) {
        snprintf(out->sig_msg, sizeof out->sig_msg, "%s", fxl_errmsg(ctx));
        snprintf(out->sig_first_bad, sizeof out->sig_first_bad, "%s",
                 out->sig_rc == FXL_ECONFLICT ? sr.first_bad : out->sig_msg);
    }
    out->signatures_checked = sr.checked;
    out->ok = out->chain_rc == 0 && out->sig_rc == 0 && out->record.n_problems == 0;
    if (out->ok)
        return 0;
    /* a check that could not run tells more than a mismatch found */
    if (out->chain_rc != 0 && out->chain_rc != FXL_ECONFLICT)
        failed = out->chain_rc;
    else if (rrc != 0)
        failed = rrc;
    else if (out->sig_rc != 0 && out->sig_rc != FXL_ECONFLICT)
        failed = out->sig_rc;
    return failed ? failed : FXL_ECONFLICT;
}
