/* Online backup through sqlite3_backup_* in steps, into a new file, under a
 * read transaction so the copy is one snapshot while other processes log. */
#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cjson/cJSON.h>

#include "fxl/audit.h"
#include "fxl/backup.h"
#include "fxl/outfile.h"
#include "fxl/server.h"
#include "store/audit.h"
#include "store/stmt.h"

/* How long to wait between steps that found the source locked, ms. */
#define BACKUP_BUSY_SLEEP_MS 25
/* Give up after this many consecutive busy steps (about 30 s). */
#define BACKUP_BUSY_MAX 1200

static void remove_copy(const char *path)
{
    char side[4096];

    unlink(path);
    snprintf(side, sizeof side, "%s-wal", path);
    unlink(side);
    snprintf(side, sizeof side, "%s-shm", path);
    unlink(side);
    snprintf(side, sizeof side, "%s-journal", path);
    unlink(side);
}

/* The whole of verify (chain, record, signatures) on the copy, in one read
 * transaction, under its temporary name before it takes the name asked for. */
static int verify_copy(fxl_ctx *ctx, const char *tmp, const char *dest)
{
    fxl_ctx *c = NULL;
    fxl_whole_verify v;
    char side[FXL_OUTFILE_PATH_MAX + 8];
    int rc = fxl_open(&c, tmp, FXL_OPEN_READONLY);

    memset(&v, 0, sizeof v);
    if (rc == 0 && (rc = fxl_begin_read(c)) == 0) {
        rc = fxl_verify_whole(c, NULL, &v);
        fxl_rollback(c);
    }
    if (rc != 0)
        rc = fxl_fail(ctx, FXL_EIO, "backup '%s' failed verification, not kept: %s", dest,
                      !c ? "out of memory"
                      : v.chain_rc != 0 ? v.chain_msg
                      : v.record.n_problems ? v.record.problem[0]
                      : v.sig_rc != 0 ? v.sig_msg : fxl_errmsg(c));
    fxl_close(c);
    /* A read-only WAL connection may leave an empty -shm/-wal beside it. */
    snprintf(side, sizeof side, "%s-wal", tmp);
    unlink(side);
    snprintf(side, sizeof side, "%s-shm", tmp);
    unlink(side);
    return rc;
}

/* quick_check and the audit-row count of the copy. */
static int check_copy(fxl_ctx *ctx, sqlite3 *dst, const char *path, int64_t *audit_rows)
{
    sqlite3_stmt *st = NULL;
    int rc = 0;

    if (sqlite3_prepare_v2(dst, "PRAGMA quick_check", -1, &st, NULL) != SQLITE_OK ||
        sqlite3_step(st) != SQLITE_ROW ||
        strcmp((const char *)sqlite3_column_text(st, 0), "ok") != 0)
        rc = fxl_fail(ctx, FXL_EIO, "backup '%s' failed its integrity check: %s", path,
                      sqlite3_errmsg(dst));
    sqlite3_finalize(st);
    st = NULL;
    if (rc == 0) {
        if (sqlite3_prepare_v2(dst, "SELECT count(*) FROM audit_log", -1, &st, NULL) != SQLITE_OK ||
            sqlite3_step(st) != SQLITE_ROW)
            rc = fxl_fail(ctx, FXL_EIO, "backup '%s' cannot be read back: %s", path,
                          sqlite3_errmsg(dst));
        else
            *audit_rows = sqlite3_column_int64(st, 0);
        sqlite3_finalize(st);
    }
    return rc;
}

int fxl_backup(fxl_ctx *ctx, fxl_backup_report *out, const char *dest_path)
{
    sqlite3 *dst = NULL;
    sqlite3_backup *b = NULL;
    cJSON *audit = NULL;
    fxl_outfile o = FXL_OUTFILE_INIT;
    int rc, src_rc, reading = 0, busy_run = 0, committed = 0;

    memset(out, 0, sizeof *out);
    if ((rc = fxl_require_role(ctx, FXL_ROLES_PHYSICS | FXL_ROLE_AUDITOR, "backing up the database")) != 0)
        return rc;
    if (!dest_path || !*dest_path)
        return fxl_fail(ctx, FXL_EINVAL, "a file name for the backup is required");
    /* Into a temporary file beside the target (O_EXCL|O_NOFOLLOW, 0600),
     * renamed onto the name only once the copy has been checked: a killed
     * or failed backup leaves no file under the name asked for. */
    if ((rc = fxl_outfile_open(&o, ctx, dest_path, FXL_OUT_NO_STDIO)) != 0)
        return rc;

    if (sqlite3_open_v2(o.tmp, &dst, SQLITE_OPEN_READWRITE, NULL) != SQLITE_OK) {
        rc = fxl_fail(ctx, FXL_EIO, "cannot open backup file '%s': %s", dest_path,
                      dst ? sqlite3_errmsg(dst) : "out of memory");
        goto cleanup;
    }
    /* One snapshot for every step: a read transaction on the source. */
    if ((rc = fxl_exec(ctx, "BEGIN")) != 0 ||
        (rc = fxl_exec(ctx, "SELECT count(*) FROM sqlite_schema")) != 0)
        goto cleanup;
    reading = 1;
    b = sqlite3_backup_init(dst, "main", ctx->db, "main");
    if (!b) {
        rc = fxl_fail(ctx, FXL_EIO, "cannot start the backup to '%s': %s", dest_path,
                      sqlite3_errmsg(dst));
        goto cleanup;
    }
    for (;;) {
        src_rc = sqlite3_backup_step(b, FXL_BACKUP_STEP_PAGES);
        out->steps++;
        if (src_rc == SQLITE_DONE)
            break;
        if (src_rc == SQLITE_OK) {
            busy_run = 0;
            continue;
        }
        if (src_rc == SQLITE_BUSY || src_rc == SQLITE_LOCKED) {
            out->busy_waits++;
            if (++busy_run > BACKUP_BUSY_MAX) {
                rc = fxl_fail(ctx, FXL_EBUSY, "backup to '%s' gave up: the database stayed locked",
                              dest_path);
                goto cleanup;
            }
            sqlite3_sleep(BACKUP_BUSY_SLEEP_MS);
            continue;
        }
        rc = fxl_fail(ctx, FXL_EIO, "backup to '%s' failed: %s", dest_path, sqlite3_errstr(src_rc));
        goto cleanup;
    }
    out->pages = sqlite3_backup_pagecount(b);
    if (sqlite3_backup_finish(b) != SQLITE_OK) {
        b = NULL;
        rc = fxl_fail(ctx, FXL_EIO, "backup to '%s' failed: %s", dest_path, sqlite3_errmsg(dst));
        goto cleanup;
    }
    b = NULL;
    fxl_exec(ctx, "COMMIT");
    reading = 0;
    if ((rc = check_copy(ctx, dst, dest_path, &out->audit_rows)) != 0)
        goto cleanup;
    if (sqlite3_close(dst) != SQLITE_OK) {
        rc = fxl_fail(ctx, FXL_EIO, "cannot close backup file '%s'", dest_path);
        goto cleanup;
    }
    dst = NULL;
    if ((rc = verify_copy(ctx, o.tmp, dest_path)) != 0)
        goto cleanup;
    if ((rc = fxl_outfile_commit(&o, ctx)) != 0)
        goto cleanup;
    committed = 1;

    /* Who copied the record where: audited in the source. */
    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "file", dest_path);
    cJSON_AddNumberToObject(audit, "pages", out->pages);
    cJSON_AddNumberToObject(audit, "audit_rows_copied", (double)out->audit_rows);
    if ((rc = fxl_audit_append(ctx, "backup", "database", 0, audit)) != 0 ||
        (rc = fxl_commit(ctx)) != 0)
        fxl_rollback(ctx);
cleanup:
    if (b)
        sqlite3_backup_finish(b);
    if (reading)
        fxl_exec(ctx, "ROLLBACK");
    if (dst)
        sqlite3_close(dst);
    if (o.created)
        remove_copy(o.tmp);
    if (rc != 0 && committed)
        remove_copy(dest_path);   /* no copy without its audit row in the source */
    fxl_outfile_abort(&o);
    cJSON_Delete(audit);
    return rc;
}
