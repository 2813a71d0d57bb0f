/* Online backup: a consistent copy of the open database into a new file
 * through SQLite's backup API, safe while other processes keep logging. */
#ifndef FXL_BACKUP_H
#define FXL_BACKUP_H

#include <stdint.h>

#include "fxl/fxl.h"

/* Pages copied per backup step. */
#define FXL_BACKUP_STEP_PAGES 64

typedef struct fxl_backup_report {
    int pages;            /* pages in the copy */
    int steps;            /* backup steps taken */
    int busy_waits;       /* steps that had to wait for a lock */
    int64_t audit_rows;   /* audit rows in the copy (its chain is whole) */
} fxl_backup_report;

/* Copies the database to `dest_path`, which must not exist yet (FXL_ECONFLICT
 * otherwise; it is created exclusively, mode 0600). Physicist, admin or auditor
 * (the unattended backup logs in as an auditor: docs/deployment.md). The
 * copy is one consistent snapshot taken under a read transaction (WAL lets
 * writers go on meanwhile), made in steps of FXL_BACKUP_STEP_PAGES pages,
 * then checked with PRAGMA quick_check. After the copy an audit row
 * (action "backup", entity "database") records who copied to which file; the
 * copy itself ends just before that row. On any failure the partial file is
 * removed and nothing is written to the source. */
int fxl_backup(fxl_ctx *ctx, fxl_backup_report *out, const char *dest_path);

#endif
