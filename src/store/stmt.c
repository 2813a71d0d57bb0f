/* Prepared-statement helper for src/store: bind by :name, step, finalize,
 * with SQLite errors turned into fxledger codes and messages. */
#include "store/stmt.h"

#include "fxl/text.h"

#include <math.h>
#include <string.h>

int fxl_db_fail(fxl_ctx *ctx, const char *what)
{
    int rc = sqlite3_extended_errcode(ctx->db);
    const char *msg = sqlite3_errmsg(ctx->db);

    if ((rc & 0xff) == SQLITE_BUSY || (rc & 0xff) == SQLITE_LOCKED)
        return fxl_fail(ctx, FXL_EBUSY,
                        "database busy: another process held it past the timeout; try again (%s)",
                        what);
    if ((rc & 0xff) == SQLITE_CORRUPT || (rc & 0xff) == SQLITE_NOTADB)
        return fxl_db_explain_damage(ctx, sqlite3_db_filename(ctx->db, "main"), msg);
    if ((rc & 0xff) == SQLITE_READONLY)
        return fxl_fail(ctx, FXL_EIO, "database '%s' cannot be written (%s): nothing was changed",
                        sqlite3_db_filename(ctx->db, "main"), msg);
    if (rc == SQLITE_CONSTRAINT_UNIQUE || rc == SQLITE_CONSTRAINT_PRIMARYKEY)
        return fxl_fail(ctx, FXL_ECONFLICT, "%s: already exists (%s)", what, msg);
    if ((rc & 0xff) == SQLITE_CONSTRAINT)
        return fxl_fail(ctx, FXL_EINVAL, "%s: refused by the database (%s)", what, msg);
    return fxl_fail(ctx, FXL_EDB, "%s: %s", what, msg);
}

int fxl_stmt_prepare(fxl_stmt *s, fxl_ctx *ctx, const char *sql)
{
    s->ctx = ctx;
    s->st = NULL;
    s->err = 0;
    s->slot = NULL;
    if (sqlite3_prepare_v2(ctx->db, sql, -1, &s->st, NULL) != SQLITE_OK)
        return fxl_db_fail(ctx, "preparing a statement");
    return 0;
}

/* The key is the text's pointer, as a string literal gives the same one at
 * every call; the text itself is compared too, so that a buffer reused for
 * other SQL can never be handed the wrong statement. */
int fxl_stmt_prepare_cached(fxl_stmt *s, fxl_ctx *ctx, const char *sql)
{
    struct fxl_stmt_slot *e;
    int i, rc;

    for (i = 0; i < ctx->stmt_cache_used; i++) {
        e = &ctx->stmt_cache[i];
        if (e->sql != sql || strcmp(sqlite3_sql(e->st), sql) != 0)
            continue;
        if (e->lent)
            return fxl_stmt_prepare(s, ctx, sql);
        e->lent = 1;
        s->ctx = ctx;
        s->st = e->st;
        s->err = 0;
        s->slot = e;
        return 0;
    }
    if ((rc = fxl_stmt_prepare(s, ctx, sql)) != 0 || ctx->stmt_cache_used == FXL_STMT_CACHE_SLOTS)
        return rc;
    e = &ctx->stmt_cache[ctx->stmt_cache_used++];
    e->sql = sql;
    e->st = s->st;
    e->lent = 1;
    s->slot = e;
    return 0;
}

void fxl_stmt_cache_release(fxl_ctx *ctx)
{
    int i;

    /* A slot still lent belongs to a statement its caller never finalized:
     * left alone, the connection stays open and the leak shows (as it did
     * before the cache) instead of being hidden. */
    for (i = 0; i < ctx->stmt_cache_used; i++)
        if (!ctx->stmt_cache[i].lent)
            sqlite3_finalize(ctx->stmt_cache[i].st);
    ctx->stmt_cache_used = 0;
}

int fxl_stmt_cache_size(const fxl_ctx *ctx)
{
    return ctx->stmt_cache_used;
}

int fxl_stmt_cache_busy(const fxl_ctx *ctx)
{
    int i, n = 0;

    for (i = 0; i < ctx->stmt_cache_used; i++)
        n += sqlite3_stmt_busy(ctx->stmt_cache[i].st) != 0;
    return n;
}

static int param_index(fxl_stmt *s, const char *name)
{
    int i;

    if (s->err || !s->st)
        return 0;
    i = sqlite3_bind_parameter_index(s->st, name);
    if (i == 0)
        s->err = fxl_fail(s->ctx, FXL_EDB, "internal: no parameter '%s' in '%s'",
                          name, sqlite3_sql(s->st));
    return i;
}

static void check_bind(fxl_stmt *s, int rc)
{
    if (rc != SQLITE_OK && !s->err)
        s->err = fxl_db_fail(s->ctx, "binding a value");
}

/* Parameters that hold identifiers: they must be unambiguous on screen and
 * on paper (fxl_text_identifier_check). Every other text is a name or a note
 * (fxl_text_name_check), except stored documents and JSON. */
static const char *const identifier_params[] = {
    ":mrn", ":serial", ":login", ":label", ":name", ":machine", ":beam", NULL};
static const char *const document_params[] = {
    ":content", ":data", ":readings", ":reasons", ":model_factors", ":value", ":summary", NULL};

static int in_list(const char *const *list, const char *name)
{
    for (; *list; list++)
        if (strcmp(*list, name) == 0)
            return 1;
    return 0;
}

static int check_text(fxl_stmt *s, const char *name, const char *value)
{
    const char *why = NULL;
    long at = 0;
    const char *field = name[0] == ':' ? name + 1 : name;

    if (in_list(document_params, name))
        return 0;
    if (!in_list(identifier_params, name) && (at = fxl_text_bidi_at(value)) >= 0)
        why = "contains a bidirectional control character";
    if (why || (in_list(identifier_params, name) && fxl_text_identifier_check(value, &why, &at) != 0)) {
        s->err = fxl_fail(s->ctx, FXL_EINVAL, "%s %s (at byte %ld); text must show as it is stored: "
                          "no invisible, bidirectional or edge-space characters in identifiers; nothing written",
                          field, why, at + 1);
        return -1;
    }
    return 0;
}

void fxl_stmt_bind_text(fxl_stmt *s, const char *name, const char *value)
{
    int i = param_index(s, name);
    long bad;

    /* Last line of defence: no text that is not UTF-8 enters the record,
     * whichever path it came by (docs/hazards.md). */
    if (i && value && (bad = fxl_utf8_invalid_at(value, strlen(value))) >= 0) {
        s->err = fxl_fail(s->ctx, FXL_EINVAL, "text for '%s' is not valid UTF-8 (at byte %ld); "
                          "nothing written", name[0] == ':' ? name + 1 : name, bad + 1);
        return;
    }
    if (i && value && !s->err && check_text(s, name, value) != 0)
        return;
    if (i)
        check_bind(s, value ? sqlite3_bind_text(s->st, i, value, -1, SQLITE_TRANSIENT)
                            : sqlite3_bind_null(s->st, i));
}

void fxl_stmt_bind_int(fxl_stmt *s, const char *name, int64_t value)
{
    int i = param_index(s, name);
    if (i)
        check_bind(s, sqlite3_bind_int64(s->st, i, value));
}

void fxl_stmt_bind_double(fxl_stmt *s, const char *name, double value)
{
    int i = param_index(s, name);
    if (i)
        check_bind(s, sqlite3_bind_double(s->st, i, value));
}

void fxl_stmt_bind_double_opt(fxl_stmt *s, const char *name, double value)
{
    int i = param_index(s, name);
    if (i)
        check_bind(s, isfinite(value) ? sqlite3_bind_double(s->st, i, value)
                                      : sqlite3_bind_null(s->st, i));
}

void fxl_stmt_bind_null(fxl_stmt *s, const char *name)
{
    int i = param_index(s, name);
    if (i)
        check_bind(s, sqlite3_bind_null(s->st, i));
}

int fxl_stmt_step(fxl_stmt *s)
{
    int rc;

    if (s->err)
        return s->err;
    if (!s->st)
        return fxl_fail(s->ctx, FXL_EDB, "internal: step on an unprepared statement");
    rc = sqlite3_step(s->st);
    if (rc == SQLITE_ROW)
        return 1;
    if (rc == SQLITE_DONE)
        return 0;
    return fxl_db_fail(s->ctx, "writing to the database");
}

int fxl_stmt_exec(fxl_stmt *s)
{
    int rc;

    while ((rc = fxl_stmt_step(s)) == 1)
        ;
    return rc;
}

void fxl_stmt_reset(fxl_stmt *s)
{
    if (s->st) {
        sqlite3_reset(s->st);
        sqlite3_clear_bindings(s->st);
    }
    s->err = 0;
}

void fxl_stmt_finalize(fxl_stmt *s)
{
    if (s->slot) {
        sqlite3_reset(s->st);
        sqlite3_clear_bindings(s->st);
        s->slot->lent = 0;
        s->slot = NULL;
    } else {
        sqlite3_finalize(s->st);
    }
    s->st = NULL;
}

const char *fxl_stmt_text(fxl_stmt *s, int col)
{
    const unsigned char *t = sqlite3_column_text(s->st, col);
    return t ? (const char *)t : "";
}

int64_t fxl_stmt_int(fxl_stmt *s, int col)
{
    return sqlite3_column_int64(s->st, col);
}

double fxl_stmt_double(fxl_stmt *s, int col)
{
    return sqlite3_column_double(s->st, col);
}

double fxl_stmt_double_opt(fxl_stmt *s, int col)
{
    if (sqlite3_column_type(s->st, col) == SQLITE_NULL)
        return NAN;
    return sqlite3_column_double(s->st, col);
}

int fxl_stmt_is_null(fxl_stmt *s, int col)
{
    return sqlite3_column_type(s->st, col) == SQLITE_NULL;
}

int fxl_exec(fxl_ctx *ctx, const char *sql)
{
    char *err = NULL;
    int rc = sqlite3_exec(ctx->db, sql, NULL, NULL, &err);

    if (rc != SQLITE_OK && ((rc & 0xff) == SQLITE_CORRUPT || (rc & 0xff) == SQLITE_NOTADB)) {
        rc = fxl_db_explain_damage(ctx, sqlite3_db_filename(ctx->db, "main"), err ? err : sqlite3_errstr(rc));
        sqlite3_free(err);
        return rc;
    }
    if (rc != SQLITE_OK) {
        int code = ((rc & 0xff) == SQLITE_BUSY || (rc & 0xff) == SQLITE_LOCKED) ? FXL_EBUSY : FXL_EDB;
        fxl_fail(ctx, code, "%s%s", code == FXL_EBUSY ? "database busy: " : "database error: ",
                 err ? err : sqlite3_errstr(rc));
        sqlite3_free(err);
        return code;
    }
    return 0;
}
