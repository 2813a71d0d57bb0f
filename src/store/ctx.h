/* The context handle behind fxl_ctx: the SQLite connection, the acting user
 * and the last error message. Private to src/store. */
#ifndef FXL_STORE_CTX_H
#define FXL_STORE_CTX_H

#include <sqlite3.h>
#include <stdint.h>

#include "fxl/fxl.h"

/* Statements prepared once per connection (store/stmt.c,
 * fxl_stmt_prepare_cached): enough slots for the hot statements of one
 * command; past them a statement is prepared as usual. */
#define FXL_STMT_CACHE_SLOTS 96

/* Room for the sealed tables' canonical-row statements (store/seal.c). */
#define FXL_SEALED_TABLES_MAX 32

struct fxl_stmt_slot {
    const char *sql;   /* the key: the SQL text's pointer (its text is compared too) */
    sqlite3_stmt *st;
    int lent;          /* 1 while an fxl_stmt holds it */
};

/* A row written since the last seal (store/seal.c): an index into
 * fxl_sealed_tables and the row's rowid. */
struct fxl_seal_mark {
    int64_t row_id;
    int tbl;
};

struct fxl_ctx {
    sqlite3 *db;
    int readonly;
    char errmsg[512];
    int64_t user_id;
    char user_login[65];
    fxl_role user_role;
    /* An opened signing key, only between fxl_sign_begin and fxl_sign_end
     * (sodium_malloc'd crypto_sign_SECRETKEYBYTES, NULL otherwise). */
    unsigned char *sign_sk;
    int64_t sign_key_id;
    int64_t sign_user_id;
    char origin[64];       /* client address of a served request, "" if none */
    int sealing;           /* 1: rows written are sealed by the next audit row (store/seal.c) */
    struct fxl_seal_mark *marks; /* filled by the update hook, unsorted, may repeat */
    size_t n_marks, cap_marks;
    int marks_lost;        /* 1: the hook could not store a mark: the next seal fails */
    /* Per sealed table, the SELECT of one row's canonical content, built
     * once per connection from the table's columns (NULL until needed). */
    char *seal_sql[FXL_SEALED_TABLES_MAX];
    struct fxl_stmt_slot stmt_cache[FXL_STMT_CACHE_SLOTS];
    int stmt_cache_used;
    /* The session fxl_session_check() found live (0: none) and the activity
     * time stored in it; with touch_armed, the next fxl_commit() records the
     * activity in its own transaction (fxl_session_touch_at_commit). */
    int64_t session_id;
    char session_seen[FXL_TIME_LEN];
    int touch_armed;
    char touch_at[FXL_TIME_LEN];   /* the time the armed write stores */
    int touch_written;     /* 1: a commit has recorded the activity at session_seen */
};

/* Called by fxl_commit() inside its transaction: writes the armed session
 * activity (store/auth.c); fxl_commit() disarms it once COMMIT succeeded. */
int fxl_session_touch_pending(fxl_ctx *ctx);

/* Maps the connection's last SQLite error to FXL_EBUSY, FXL_ECONFLICT (a
 * UNIQUE constraint) or FXL_EDB, with a message that starts with `what`. */
int fxl_db_fail(fxl_ctx *ctx, const char *what);

/* FXL_EDB with "database 'PATH' is damaged (integrity: detail); ..." - for
 * SQLITE_CORRUPT and a file cut short, never "not an fxledger database". */
int fxl_db_explain_damage(fxl_ctx *ctx, const char *path, const char *detail);

#endif
