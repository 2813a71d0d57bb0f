/* A thin prepared-statement helper: prepare, bind by :name (an unknown name is
 * an error), step, finalize. Errors land in the context's message together
 * with the SQL text. Hot statements are prepared once per connection
 * (fxl_stmt_prepare_cached). Private to src/store. */
#ifndef FXL_STORE_STMT_H
#define FXL_STORE_STMT_H

#include <sqlite3.h>
#include <stdint.h>

#include "store/ctx.h"

typedef struct fxl_stmt {
    fxl_ctx *ctx;
    sqlite3_stmt *st;
    int err;          /* first bind error, reported by the next step */
    struct fxl_stmt_slot *slot;   /* the cache slot lent, or NULL */
} fxl_stmt;

#define FXL_STMT_INIT {0}

int fxl_stmt_prepare(fxl_stmt *s, fxl_ctx *ctx, const char *sql);
/* As fxl_stmt_prepare, for SQL text that never changes (a string literal):
 * the connection keeps the statement and lends it, reset with no bindings;
 * fxl_stmt_finalize resets it, clears its bindings and gives it back, so
 * it holds no read transaction open between uses (every caller finalizes
 * under cleanup:, on error paths too). A statement already lent (a nested
 * use of the same SQL) or a full cache gives an uncached statement.
 * Statements whose SQL is built at run time use fxl_stmt_prepare. */
int fxl_stmt_prepare_cached(fxl_stmt *s, fxl_ctx *ctx, const char *sql);
/* Binders: a NULL text, or a NaN for the _opt double binder, binds SQL NULL. */
void fxl_stmt_bind_text(fxl_stmt *s, const char *name, const char *value);
void fxl_stmt_bind_int(fxl_stmt *s, const char *name, int64_t value);
void fxl_stmt_bind_double(fxl_stmt *s, const char *name, double value);
void fxl_stmt_bind_double_opt(fxl_stmt *s, const char *name, double value);
void fxl_stmt_bind_null(fxl_stmt *s, const char *name);
/* Returns 1 when a row is ready, 0 when done, or a negative FXL_E code. */
int fxl_stmt_step(fxl_stmt *s);
/* Steps to the end (for INSERT/UPDATE); 0 or a negative FXL_E code. */
int fxl_stmt_exec(fxl_stmt *s);
/* Resets for another run with new bindings. */
void fxl_stmt_reset(fxl_stmt *s);
/* Frees the statement, or gives a cached one back; safe on FXL_STMT_INIT. */
void fxl_stmt_finalize(fxl_stmt *s);
/* Finalizes every cached statement of the connection (fxl_close). */
void fxl_stmt_cache_release(fxl_ctx *ctx);
/* How many cached statements the connection holds, and how many of them
 * are busy (stepped and not reset: they would hold a read transaction);
 * for the tests. */
int fxl_stmt_cache_size(const fxl_ctx *ctx);
int fxl_stmt_cache_busy(const fxl_ctx *ctx);

/* Column readers for the current row (index from 0). text returns "" for
 * NULL; double_opt returns NaN for NULL. */
const char *fxl_stmt_text(fxl_stmt *s, int col);
int64_t fxl_stmt_int(fxl_stmt *s, int col);
double fxl_stmt_double(fxl_stmt *s, int col);
double fxl_stmt_double_opt(fxl_stmt *s, int col);
int fxl_stmt_is_null(fxl_stmt *s, int col);

/* Runs SQL text with no parameters and no rows (schema, pragmas). */
int fxl_exec(fxl_ctx *ctx, const char *sql);

#endif
