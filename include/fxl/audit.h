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

/* ---- proving the record (docs/audit.md) -------------------------------- */

#define FXL_RECORD_PROBLEMS_MAX 12
#define FXL_RECORD_PROBLEM_LEN 400

typedef struct fxl_record_report {
    int64_t rows_checked;       /* clinical rows matched with their seals or audit rows */
    int64_t seals_checked;      /* row seals matched with their audit rows */
    int64_t objects_checked;    /* schema objects compared with the migrations' */
    int anchor_given;           /* an anchor line was checked */
    int64_t anchor_rows;        /* its row count */
    int n_problems;             /* 0: the record holds */
    char problem[FXL_RECORD_PROBLEMS_MAX][FXL_RECORD_PROBLEM_LEN];  /* first of each kind */
} fxl_record_report;

/* Proves the record beyond the chain: the schema and every trigger are
 * exactly those of the migrations; every sealed row matches its latest
 * seal and every seal its row; every audit row's seals match the hash the
 * chain holds for them; users and settings match the audit rows that wrote
 * them; every review item's status is that of its latest event; and, with
 * `anchor` (a line of fxl_audit_anchor, or NULL), the chain still holds
 * the anchored row with the anchored hash. Each kind of failure names its
 * first row or object in out->problem. Returns 0 (also when problems were
 * found: see n_problems) or a negative FXL_E code when it could not check. */
int fxl_record_verify(fxl_ctx *ctx, const char *anchor, fxl_record_report *out);

/* ---- the whole of verify, in one place ---------------------------------- */

#define FXL_VERIFY_MSG_LEN 512

/* What every caller of verify shows (the verify and restore commands, the
 * backup's check of its copy, the console's page and the API). */
typedef struct fxl_whole_verify {
    fxl_verify_report chain;          /* the audit chain, integrity, foreign keys */
    int chain_rc;                     /* 0, FXL_ECONFLICT (found a mismatch) or why it could not check */
    char chain_msg[FXL_VERIFY_MSG_LEN];
    int64_t signatures_checked;
    int sig_rc;                       /* as chain_rc, for the electronic signatures */
    char sig_msg[FXL_VERIFY_MSG_LEN];        /* the message naming the first failure */
    char sig_first_bad[FXL_VERIFY_MSG_LEN];  /* the failing table and row alone */
    fxl_record_report record;         /* the record proven (a failed check is problem[0]) */
    int ok;                           /* everything holds */
} fxl_whole_verify;

/* Runs the three checks of 'fxledger verify' in order - the audit chain
 * (fxl_audit_verify), the record (fxl_record_verify, with `anchor` or
 * NULL) and the signatures (fxl_signature_verify) - each whatever the
 * others found, and collects their findings in *out. Returns 0 when
 * everything holds, FXL_ECONFLICT when something does not, or the code of
 * a check that could not run (FXL_EBUSY, FXL_EDB...). Run it inside one
 * read transaction to check one consistent state. */
int fxl_verify_whole(fxl_ctx *ctx, const char *anchor, fxl_whole_verify *out);

/* Parses an anchor line; 0 or FXL_EINVAL naming what is wrong. */
int fxl_anchor_parse(fxl_ctx *ctx, const char *line, int64_t *rows, char at[32], char head[65]);

/* ---- reading the trail (fxledger audit) ------------------------------- */

/* Which rows to read; NULL / 0 members do not filter. */
typedef struct fxl_audit_filter {
    const char *user;        /* login recorded in the row */
    const char *action;      /* e.g. "record", "close", "set" */
    const char *entity;      /* table name, e.g. "measurements" */
    int64_t entity_id;       /* with or without entity */
    const char *from;        /* UTC [from, to) of the row's time */
    const char *to;
    int64_t limit;           /* > 0: only the last `limit` rows that match */
} fxl_audit_filter;

#define FXL_AUDIT_FILTER_INIT {NULL, NULL, NULL, 0, NULL, NULL, 0}

/* One audit row; strings borrowed for the duration of the callback. */
typedef struct fxl_audit_row {
    int64_t id;
    const char *at;          /* stored UTC time */
    const char *user;        /* login */
    const char *user_name;   /* the user's full name, "" if no such user */
    const char *action;
    const char *entity;
    int64_t entity_id;       /* 0 when the row names none */
    const char *content;     /* the canonical JSON content that was hashed */
    const char *prev_hash;
    const char *hash;
} fxl_audit_row;

typedef int (*fxl_audit_row_cb)(void *arg, const fxl_audit_row *r);

/* The rows matching f in id order (the order of the chain). */
int fxl_audit_list(fxl_ctx *ctx, const fxl_audit_filter *f, fxl_audit_row_cb cb, void *arg);
/* The row with this id; FXL_ENOTFOUND naming it when there is none. */
int fxl_audit_get(fxl_ctx *ctx, int64_t id, fxl_audit_row_cb cb, void *arg);

#endif
