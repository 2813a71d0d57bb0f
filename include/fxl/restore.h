/* The restore drill (docs/deployment.md, "Restoring"): a backup copied into
 * a new file, which is then opened, upgraded when its schema is older, and
 * described. The backup itself is opened read-only and never written. */
#ifndef FXL_RESTORE_H
#define FXL_RESTORE_H

#include <stdint.h>

#include "fxl/fxl.h"

/* Copies the fxledger database `backup_path` into `dest_path` through
 * SQLite's backup API and opens the copy. The backup is opened read-only
 * (never written, no -wal left beside it by us) and must be an fxledger file
 * (application_id) of a schema this program knows. The copy goes to a
 * temporary file beside dest_path (created exclusively, mode 0600), is
 * checked with PRAGMA quick_check and only then renamed to dest_path, which
 * must not exist (FXL_ECONFLICT): a failed restore leaves no file under that
 * name. The copy is then opened read-write, which applies the migrations
 * above its schema (never to the backup); a copy that does not open or
 * upgrade is removed again. No acting user is needed: it reads
 * a file the caller can already read and writes only a new one.
 * *out is always set: on success the open copy, on failure a context holding
 * the message only (fxl_errmsg); fxl_close() it in both cases.
 * *pages and *schema_backup (the backup's PRAGMA user_version) may be NULL. */
int fxl_restore_copy(fxl_ctx **out, const char *backup_path, const char *dest_path, int *pages,
                     int *schema_backup);

/* What a database holds, for the report of the drill. */
typedef struct fxl_holdings {
    char department[201];
    int schema;                  /* PRAGMA user_version */
    int64_t audit_rows;
    char first_audit_at[FXL_TIME_LEN];   /* "" when the log is empty */
    char last_audit_at[FXL_TIME_LEN];
    int64_t users, active_users;
    int64_t machines, detectors;
    int64_t patients, plans, fractions, measurements;
    int64_t review_items, review_items_open;   /* open or acknowledged */
    int64_t signatures;
} fxl_holdings;

/* Counts what the database holds (any acting user or none; reads only). */
int fxl_holdings_get(fxl_ctx *ctx, fxl_holdings *out);

/* Removes a database file and its -wal, -shm and -journal companions
 * (a restored copy that failed its checks). */
void fxl_restore_discard(const char *path);

#endif
