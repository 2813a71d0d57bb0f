/* A thin prepared-statement helper: prepare, bind by :name (an unknown name is
 * an error), step, finalize. Errors land in the context's message together
 * with the SQL text. Private to src/store. */
#ifndef FXL_STORE_STMT_H
#define FXL_STORE_STMT_H

#include <sqlite3.h>
#include <stdint.h>

#include "store/ctx.h"

typedef struct fxl_stmt {
    fxl_ctx *ctx;
    sqlite3_stmt *st;
    int err;          /* first bind error, reported by the next step */
} fxl_stmt;

#define FXL_STMT_INIT {0}

int fxl_stmt_prepare(fxl_stmt *s, fxl_ctx *ctx, const char *sql);
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
void fxl_stmt_finalize(fxl_stmt *s);

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
