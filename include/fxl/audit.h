/* The tamper-evident audit trail: SHA-256 and verification of the chain.
 * Chain rule and canonical form: docs/audit.md. */
#ifndef FXL_AUDIT_H
#define FXL_AUDIT_H

#include <stddef.h>
#include <stdint.h>

#include "fxl/fxl.h"

/* Lowercase hex SHA-256 (libsodium) of len bytes into hex (65 bytes). */
void fxl_sha256_hex(char hex[65], const void *data, size_t len);

typedef struct fxl_verify_report {
    int64_t rows_checked;
    int64_t first_bad_row;   /* audit_log.id of the first mismatch, 0 if none */
    int integrity_ok;        /* PRAGMA integrity_check said ok */
    int foreign_keys_ok;     /* PRAGMA foreign_key_check returned no rows */
} fxl_verify_report;

/* The external anchor: one line naming the chain head as it is now,
 *     fxledger-anchor rows=N at=YYYY-MM-DDTHH:MM:SSZ head=<64 hex>
 * (N audit rows, the time and hash of row N; rows=0 and 64 zeros for an
 * empty log). Printed by 'verify --anchor' and on every report; kept on
 * paper, in an e-mail or on another machine, it lets 'verify --anchor LINE'
 * prove later that rows 1..N are unchanged and none was removed. */
#define FXL_ANCHOR_LEN 160
int fxl_audit_anchor(fxl_ctx *ctx, char *buf, size_t size);

/* Walks the audit chain from the first row, recomputing every hash, then runs
 * SQLite's integrity and foreign-key checks. Returns 0 when all hold, else
 * FXL_ECONFLICT with a message naming the first failing row or check. */
int fxl_audit_verify(fxl_ctx *ctx, fxl_verify_report *out);

#endif
