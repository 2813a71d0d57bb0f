/* Row seals: the SHA-256 of the canonical content of every clinical row the
 * program writes, recorded in row_seals beside the audit row of the same
 * transaction, whose hash covers them (docs/audit.md). Private to
 * src/store. */
#ifndef FXL_STORE_SEAL_H
#define FXL_STORE_SEAL_H

#include <stdint.h>

#include "store/ctx.h"

/* The tables whose rows are sealed (NULL-terminated). users and settings
 * are not among them: they change only after the audit row that names the
 * change (sql/011), and verify matches them with that row's content. */
extern const char *const fxl_sealed_tables[];

/* On a connection open for writing, at schema version 11 or later: an
 * update hook that marks, in the context's memory, the rows written since
 * the last audit row, and a rollback hook that forgets them (nothing is
 * stored in the file). */
int fxl_seal_attach(fxl_ctx *ctx);

/* Marks a row as written, for writes the update hook cannot see (WITHOUT
 * ROWID tables: a correction table's points mark their table). */
int fxl_seal_mark(fxl_ctx *ctx, const char *tbl, int64_t row_id);

/* Forgets the marks (a rolled-back transaction; tests that write rows
 * they do not want sealed). */
void fxl_seal_discard(fxl_ctx *ctx);

/* Frees the marks (fxl_close). */
void fxl_seal_release(fxl_ctx *ctx);

/* Seals every row written since the last audit row under audit row
 * `audit_id`: inserts their row_seals and gives the SHA-256 of those seals
 * in seal_hex, or "" when there was none. Inside the write transaction. */
int fxl_seal_pending(fxl_ctx *ctx, int64_t audit_id, char seal_hex[65]);

/* 1 when rows written in this transaction are not sealed yet. */
int fxl_seal_has_pending(fxl_ctx *ctx);

/* Marks every existing row of every sealed table as written, for the
 * migration to version 11 to seal the rows written before it. */
int fxl_seal_mark_all(fxl_ctx *ctx, int64_t *n_marked);

/* The SHA-256 of one row's canonical content (docs/audit.md); FXL_ENOTFOUND
 * when the row does not exist. */
int fxl_seal_row(fxl_ctx *ctx, const char *tbl, int64_t row_id, char hex[65]);

/* The SHA-256 of the seals of one audit row: one line "tbl row_id sha256\n"
 * per seal in (tbl, row_id) order; "" with *n = 0 when there is none. */
int fxl_seal_digest(fxl_ctx *ctx, int64_t audit_id, char hex[65], int64_t *n);

#endif
