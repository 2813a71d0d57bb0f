/* Row seals (docs/audit.md): every clinical row the program writes or
 * changes is marked by the connection's SQLite update hook in the context's
 * memory; the next audit row of the transaction seals the marked rows (the
 * SHA-256 of each row's canonical content, kept in row_seals) and carries
 * the SHA-256 of its seals in its own hash. Nothing here is stored in the
 * file except the seals. A rollback forgets the marks. */
#include <sodium.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/audit.h"
#include "store/seal.h"
#include "store/stmt.h"

const char *const fxl_sealed_tables[] = {
    "machines", "beams", "beam_data", "detectors", "detector_status", "calibrations",
    "correction_tables", "patients", "patient_corrections", "plans", "fields",
    "threshold_sets", "fractions", "fraction_marks", "measurements", "review_items",
    "review_events", "daylist_imports", "daylist_lines", "signing_keys", "api_tokens",
    NULL};

/* The canonical content of a row of `tbl` (aliased t) as an SQL expression:
 * a JSON object of its columns in declared order, NULL columns left out
 * (so a column added later as NULL leaves older rows' content unchanged);
 * a correction table carries its points as [[x, factor], ...] by x. SQLite
 * prints a REAL with 15 significant digits, the same every time. */
static int canon_expr(fxl_ctx *ctx, const char *tbl, char **out)
{
    fxl_stmt s = FXL_STMT_INIT;
    size_t cap = 256, len = 0;
    char *buf = malloc(cap);
    int rc, n = 0;

    *out = NULL;
    if (!buf)
        return fxl_fail(ctx, FXL_EIO, "out of memory sealing rows");
    len = (size_t)snprintf(buf, cap, "json_patch('{}', json_object(");
    if ((rc = fxl_stmt_prepare_cached(&s, ctx, "SELECT name FROM pragma_table_info(:t) ORDER BY cid")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":t", tbl);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        const char *col = fxl_stmt_text(&s, 0);
        size_t need = len + 2 * strlen(col) + 32;
        if (strchr(col, '"') || strchr(col, '\'')) {
            rc = fxl_fail(ctx, FXL_EDB, "column '%s' of table '%s' has an unexpected name", col, tbl);
            goto cleanup;
        }
        if (need > cap) {
            char *nb;
            cap = need * 2;
            if (!(nb = realloc(buf, cap))) {
                rc = fxl_fail(ctx, FXL_EIO, "out of memory sealing rows");
                goto cleanup;
            }
            buf = nb;
        }
        len += (size_t)snprintf(buf + len, cap - len, "%s'%s', t.\"%s\"", n++ ? ", " : "", col, col);
    }
    if (rc < 0)
        goto cleanup;
    if (n == 0) {
        rc = fxl_fail(ctx, FXL_EDB, "table '%s' is missing", tbl);
        goto cleanup;
    }
    {
        const char *tail = strcmp(tbl, "correction_tables") == 0
            ? ", 'points', (SELECT json_group_array(json_array(p.x, p.factor)) FROM "
              "(SELECT x, factor FROM main.correction_points WHERE table_id = t.id ORDER BY x) p)))"
            : "))";
        size_t need = len + strlen(tail) + 1;
        if (need > cap) {
            char *nb = realloc(buf, need);
            if (!nb) {
                rc = fxl_fail(ctx, FXL_EIO, "out of memory sealing rows");
                goto cleanup;
            }
            buf = nb;
            cap = need;
        }
        memcpy(buf + len, tail, strlen(tail) + 1);
    }
    *out = buf;
    buf = NULL;
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    free(buf);
    return rc;
}

/* SHA-256 of "tbl\nrow_id\ncanonical" (docs/audit.md). */
static void row_digest(char hex[65], const char *tbl, int64_t row_id, const char *canon)
{
    crypto_hash_sha256_state st;
    unsigned char d[crypto_hash_sha256_BYTES];
    char head[96];
    int n = snprintf(head, sizeof head, "%s\n%lld\n", tbl, (long long)row_id);

    crypto_hash_sha256_init(&st);
    crypto_hash_sha256_update(&st, (const unsigned char *)head, (unsigned long long)n);
    crypto_hash_sha256_update(&st, (const unsigned char *)canon, strlen(canon));
    crypto_hash_sha256_final(&st, d);
    sodium_bin2hex(hex, 65, d, sizeof d);
}

static int sealed_index(const char *tbl)
{
    int i;

    for (i = 0; fxl_sealed_tables[i]; i++)
        if (strcmp(fxl_sealed_tables[i], tbl) == 0)
            return i;
    return -1;
}

/* The SELECT of one row's canonical content of sealed table i, built once
 * per connection and table (its columns do not change while the connection
 * is open: migrations run when it opens) and kept in the context, so that
 * its statement is prepared once too (fxl_stmt_prepare_cached keys on the
 * text's pointer). */
static int row_select_sql(fxl_ctx *ctx, int i, const char **sql_out)
{
    const char *tbl = i >= 0 ? fxl_sealed_tables[i] : "?";
    char *expr = NULL, *sql;
    size_t len;
    int rc;

    if (i < 0 || i >= FXL_SEALED_TABLES_MAX)
        return fxl_fail(ctx, FXL_EINVAL, "internal: table '%s' is not sealed", tbl);
    if (ctx->seal_sql[i]) {
        *sql_out = ctx->seal_sql[i];
        return 0;
    }
    if ((rc = canon_expr(ctx, tbl, &expr)) != 0)
        return rc;
    len = strlen(expr) + strlen(tbl) + 64;
    if (!(sql = malloc(len))) {
        free(expr);
        return fxl_fail(ctx, FXL_EIO, "out of memory sealing rows");
    }
    snprintf(sql, len, "SELECT %s FROM main.\"%s\" t WHERE t.rowid = :id", expr, tbl);
    free(expr);
    *sql_out = ctx->seal_sql[i] = sql;
    return 0;
}

int fxl_seal_row(fxl_ctx *ctx, const char *tbl, int64_t row_id, char hex[65])
{
    fxl_stmt s = FXL_STMT_INIT;
    const char *sql = NULL;
    int rc;

    if ((rc = row_select_sql(ctx, sealed_index(tbl), &sql)) != 0)
        return rc;
    if ((rc = fxl_stmt_prepare_cached(&s, ctx, sql)) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":id", row_id);
    rc = fxl_stmt_step(&s);
    if (rc == 1) {
        row_digest(hex, tbl, row_id, fxl_stmt_text(&s, 0));
        rc = 0;
    } else if (rc == 0) {
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "%s row %lld does not exist", tbl, (long long)row_id);
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* Public to the verifier in this module: the canonical select of a whole table. */
int fxl_seal_table_sql(fxl_ctx *ctx, const char *tbl, char **sql_out);
int fxl_seal_table_sql(fxl_ctx *ctx, const char *tbl, char **sql_out)
{
    char *expr = NULL, *sql;
    size_t len;
    int rc;

    *sql_out = NULL;
    if ((rc = canon_expr(ctx, tbl, &expr)) != 0)
        return rc;
    len = strlen(expr) + strlen(tbl) + 64;
    sql = malloc(len);
    if (!sql) {
        free(expr);
        return fxl_fail(ctx, FXL_EIO, "out of memory verifying rows");
    }
    snprintf(sql, len, "SELECT t.rowid, %s FROM main.\"%s\" t ORDER BY t.rowid", expr, tbl);
    free(expr);
    *sql_out = sql;
    return 0;
}

void fxl_seal_row_digest(char hex[65], const char *tbl, int64_t row_id, const char *canon);
void fxl_seal_row_digest(char hex[65], const char *tbl, int64_t row_id, const char *canon)
{
    row_digest(hex, tbl, row_id, canon);
}

/* Stores one mark. Called from the update hook, so no SQL here; on an
 * allocation failure the mark is lost and marks_lost makes the next seal
 * fail, never leaving a written row unsealed without a word. Repeated
 * marks are folded at seal time. */
static int add_mark(fxl_ctx *ctx, int tbl, int64_t row_id)
{
    if (ctx->n_marks == ctx->cap_marks) {
        size_t cap = ctx->cap_marks ? ctx->cap_marks * 2 : 64;
        struct fxl_seal_mark *m = realloc(ctx->marks, cap * sizeof *m);
        if (!m) {
            ctx->marks_lost = 1;
            return -1;
        }
        ctx->marks = m;
        ctx->cap_marks = cap;
    }
    ctx->marks[ctx->n_marks].tbl = tbl;
    ctx->marks[ctx->n_marks].row_id = row_id;
    ctx->n_marks++;
    return 0;
}


/* Inserts and updates of main's sealed tables, as the AFTER INSERT / AFTER
 * UPDATE triggers of earlier versions did; deletes are not marked (they
 * were not then either). */
static void on_update(void *arg, int op, const char *db, const char *tbl, sqlite3_int64 row_id)
{
    fxl_ctx *ctx = arg;
    int i;

    if ((op != SQLITE_INSERT && op != SQLITE_UPDATE) || strcmp(db, "main") != 0)
        return;
    if ((i = sealed_index(tbl)) >= 0)
        add_mark(ctx, i, (int64_t)row_id);
}

static void on_rollback(void *arg)
{
    fxl_seal_discard(arg);
}

void fxl_seal_discard(fxl_ctx *ctx)
{
    ctx->n_marks = 0;
    ctx->marks_lost = 0;
}

void fxl_seal_release(fxl_ctx *ctx)
{
    int i;

    for (i = 0; i < FXL_SEALED_TABLES_MAX; i++) {
        free(ctx->seal_sql[i]);
        ctx->seal_sql[i] = NULL;
    }
    free(ctx->marks);
    ctx->marks = NULL;
    ctx->n_marks = ctx->cap_marks = 0;
}

int fxl_seal_mark(fxl_ctx *ctx, const char *tbl, int64_t row_id)
{
    int i = sealed_index(tbl);

    if (!ctx->sealing)
        return 0;
    if (i < 0)
        return fxl_fail(ctx, FXL_EDB, "internal: table '%s' is not sealed", tbl);
    if (add_mark(ctx, i, row_id) != 0)
        return fxl_fail(ctx, FXL_EIO, "out of memory marking rows to seal");
    return 0;
}

int fxl_seal_attach(fxl_ctx *ctx)
{
    /* Every sealed table has a rowid (the update hook does not see WITHOUT
     * ROWID tables); correction_points is WITHOUT ROWID and its writer
     * marks its table with fxl_seal_mark. The marks of a migration that
     * attached already are kept. */
    sqlite3_update_hook(ctx->db, on_update, ctx);
    sqlite3_rollback_hook(ctx->db, on_rollback, ctx);
    ctx->sealing = 1;
    return 0;
}

int fxl_seal_has_pending(fxl_ctx *ctx)
{
    return ctx->sealing && (ctx->n_marks > 0 || ctx->marks_lost);
}

/* The order of the temporary table of earlier versions, kept so that the
 * same rows get the same seals in the same order: table name by strcmp
 * (SQLite's BINARY collation), then rowid. */
static int mark_cmp(const void *a, const void *b)
{
    const struct fxl_seal_mark *x = a, *y = b;
    int c = x->tbl == y->tbl ? 0 : strcmp(fxl_sealed_tables[x->tbl], fxl_sealed_tables[y->tbl]);

    if (c)
        return c;
    return x->row_id < y->row_id ? -1 : x->row_id > y->row_id;
}

/* Sorts the marks and folds repeats. */
static void sort_marks(fxl_ctx *ctx)
{
    size_t i, n = 0;

    if (ctx->n_marks == 0)
        return;
    qsort(ctx->marks, ctx->n_marks, sizeof *ctx->marks, mark_cmp);
    for (i = 1; i < ctx->n_marks; i++)
        if (mark_cmp(&ctx->marks[n], &ctx->marks[i]) != 0)
            ctx->marks[++n] = ctx->marks[i];
    ctx->n_marks = n + 1;
}

static void seal_line(crypto_hash_sha256_state *st, const char *tbl, int64_t row_id, const char *sha)
{
    char line[160];
    int n = snprintf(line, sizeof line, "%s %lld %s\n", tbl, (long long)row_id, sha);

    crypto_hash_sha256_update(st, (const unsigned char *)line, (unsigned long long)n);
}

int fxl_seal_pending(fxl_ctx *ctx, int64_t audit_id, char seal_hex[65])
{
    fxl_stmt ins = FXL_STMT_INIT, row = FXL_STMT_INIT;
    int cur_tbl = -1;
    size_t i;
    crypto_hash_sha256_state st;
    unsigned char d[crypto_hash_sha256_BYTES];
    int64_t n = 0;
    int rc;

    seal_hex[0] = '\0';
    if (!ctx->sealing)
        return 0;
    if (ctx->marks_lost)
        return fxl_fail(ctx, FXL_EIO, "out of memory marking rows to seal: the transaction cannot be sealed");
    crypto_hash_sha256_init(&st);
    sort_marks(ctx);
    if ((rc = fxl_stmt_prepare_cached(&ins, ctx,
                               "INSERT INTO main.row_seals (tbl, row_id, audit_id, sha256) "
                               "VALUES (:t, :r, :a, :h)")) != 0)
        goto cleanup;
    /* The marks come in table order: one row query per table, prepared
     * once per connection. */
    for (i = 0; i < ctx->n_marks; i++) {
        const char *tbl = fxl_sealed_tables[ctx->marks[i].tbl];
        int64_t row_id = ctx->marks[i].row_id;
        char hex[65];
        if (ctx->marks[i].tbl != cur_tbl) {
            const char *sql = NULL;
            fxl_stmt_finalize(&row);
            cur_tbl = ctx->marks[i].tbl;
            if ((rc = row_select_sql(ctx, cur_tbl, &sql)) != 0 ||
                (rc = fxl_stmt_prepare_cached(&row, ctx, sql)) != 0)
                goto cleanup;
        }
        fxl_stmt_reset(&row);
        fxl_stmt_bind_int(&row, ":id", row_id);
        if ((rc = fxl_stmt_step(&row)) < 0)
            goto cleanup;
        /* A row marked but gone: SQLite undid the statement that wrote it
         * (a foreign key or a later row of the same statement failed after
         * the hook ran; the hook cannot see statement rollbacks, the
         * temporary table of earlier versions was undone with them). The
         * program deletes no row of a sealed table, so nothing else leaves
         * a mark without a row, and there is nothing to seal. */
        if (rc == 0)
            continue;
        row_digest(hex, tbl, row_id, fxl_stmt_text(&row, 0));
        fxl_stmt_reset(&ins);
        fxl_stmt_bind_text(&ins, ":t", tbl);
        fxl_stmt_bind_int(&ins, ":r", row_id);
        fxl_stmt_bind_int(&ins, ":a", audit_id);
        fxl_stmt_bind_text(&ins, ":h", hex);
        if ((rc = fxl_stmt_exec(&ins)) != 0)
            goto cleanup;
        seal_line(&st, tbl, row_id, hex);
        n++;
    }
    rc = 0;
    ctx->n_marks = 0;
    if (n > 0) {
        crypto_hash_sha256_final(&st, d);
        sodium_bin2hex(seal_hex, 65, d, sizeof d);
    }
cleanup:
    fxl_stmt_finalize(&ins);
    fxl_stmt_finalize(&row);
    return rc;
}

int fxl_seal_digest(fxl_ctx *ctx, int64_t audit_id, char hex[65], int64_t *n)
{
    fxl_stmt s = FXL_STMT_INIT;
    crypto_hash_sha256_state st;
    unsigned char d[crypto_hash_sha256_BYTES];
    int rc;

    hex[0] = '\0';
    *n = 0;
    crypto_hash_sha256_init(&st);
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT tbl, row_id, sha256 FROM main.row_seals WHERE audit_id = :a "
                               "ORDER BY tbl, row_id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":a", audit_id);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        seal_line(&st, fxl_stmt_text(&s, 0), fxl_stmt_int(&s, 1), fxl_stmt_text(&s, 2));
        (*n)++;
    }
    if (rc == 0 && *n > 0) {
        crypto_hash_sha256_final(&st, d);
        sodium_bin2hex(hex, 65, d, sizeof d);
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_seal_mark_all(fxl_ctx *ctx, int64_t *n_marked)
{
    fxl_stmt s = FXL_STMT_INIT;
    char sql[256];
    int i, rc = 0;

    *n_marked = 0;
    for (i = 0; fxl_sealed_tables[i]; i++) {
        snprintf(sql, sizeof sql, "SELECT rowid FROM main.\"%s\"", fxl_sealed_tables[i]);
        if ((rc = fxl_stmt_prepare(&s, ctx, sql)) != 0)
            goto cleanup;
        while ((rc = fxl_stmt_step(&s)) == 1) {
            if (add_mark(ctx, i, fxl_stmt_int(&s, 0)) != 0) {
                rc = fxl_fail(ctx, FXL_EIO, "out of memory marking rows to seal");
                goto cleanup;
            }
            (*n_marked)++;
        }
        if (rc < 0)
            goto cleanup;
        fxl_stmt_finalize(&s);
    }
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}
