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

/* Walks the audit chain from the first row, recomputing every hash, then runs
 * SQLite's integrity and foreign-key checks. Returns 0 when all hold, else
 * FXL_ECONFLICT with a message naming the first failing row or check. */
int fxl_audit_verify(fxl_ctx *ctx, fxl_verify_report *out);

/* The head of the chain: number of rows, id, time and hash of the last row
 * ("" and 0 for an empty log). Any role may read. */
typedef struct fxl_audit_head {
    int64_t rows;
    int64_t last_id;
    char last_at[FXL_TIME_LEN];
    char last_hash[65];
} fxl_audit_head;

int fxl_audit_head_get(fxl_ctx *ctx, fxl_audit_head *out);

#endif
