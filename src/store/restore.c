/* Restore drill (fxl/restore.h): the backup, opened read-only, copied page
 * by page into a new file that takes its name only once it is checked. */
#include <errno.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "fxl/outfile.h"
#include "fxl/restore.h"
#include "store/ctx.h"
#include "store/stmt.h"

void fxl_restore_discard(const char *path)
{
    static const char *const sides[] = {"", "-wal", "-shm", "-journal"};
    char p[FXL_OUTFILE_PATH_MAX + 16];
    size_t i;

    for (i = 0; i < sizeof sides / sizeof sides[0]; i++) {
        snprintf(p, sizeof p, "%s%s", path, sides[i]);
        unlink(p);
    }
}

static int pragma_int(sqlite3 *db, const char *sql, int *v)
{
    sqlite3_stmt *st = NULL;
    int ok = sqlite3_prepare_v2(db, sql, -1, &st, NULL) == SQLITE_OK && sqlite3_step(st) == SQLITE_ROW;

    if (ok)
        *v = sqlite3_column_int(st, 0);
    sqlite3_finalize(st);
    return ok ? 0 : -1;
}

/* The page copy into o->tmp; the message goes to ctx. */
static int copy_pages(fxl_ctx *ctx, sqlite3 *src, const char *tmp, const char *dest, int *pages)
{
    sqlite3 *dst = NULL;
    sqlite3_backup *b = NULL;
    sqlite3_stmt *st = NULL;
    int rc = 0, step;

    if (sqlite3_open_v2(tmp, &dst, SQLITE_OPEN_READWRITE, NULL) != SQLITE_OK) {
        rc = fxl_fail(ctx, FXL_EIO, "cannot open '%s': %s", dest, dst ? sqlite3_errmsg(dst) : "out of memory");
        goto cleanup;
    }
    if (!(b = sqlite3_backup_init(dst, "main", src, "main"))) {
        rc = fxl_fail(ctx, FXL_EIO, "cannot start copying into '%s': %s", dest, sqlite3_errmsg(dst));
        goto cleanup;
    }
    /* The backup is a file nobody else writes: one step copies it all. */
    step = sqlite3_backup_step(b, -1);
    *pages = sqlite3_backup_pagecount(b);
    if (sqlite3_backup_finish(b) != SQLITE_OK || step != SQLITE_DONE) {
        b = NULL;
        rc = fxl_fail(ctx, FXL_EIO, "copying into '%s' failed: %s", dest,
                      step != SQLITE_DONE ? sqlite3_errstr(step) : sqlite3_errmsg(dst));
        goto cleanup;
    }
    b = NULL;
    if (sqlite3_prepare_v2(dst, "PRAGMA quick_check", -1, &st, NULL) != SQLITE_OK ||
        sqlite3_step(st) != SQLITE_ROW || strcmp((const char *)sqlite3_column_text(st, 0), "ok") != 0)
        rc = fxl_fail(ctx, FXL_EIO, "the restored copy '%s' failed SQLite's quick_check: %s", dest,
                      st && sqlite3_column_text(st, 0) ? (const char *)sqlite3_column_text(st, 0)
                                                       : sqlite3_errmsg(dst));
cleanup:
    sqlite3_finalize(st);
    if (b)
        sqlite3_backup_finish(b);
    if (dst && sqlite3_close(dst) != SQLITE_OK && rc == 0)
        rc = fxl_fail(ctx, FXL_EIO, "cannot close '%s'", dest);
    return rc;
}

int fxl_restore_copy(fxl_ctx **out, const char *backup_path, const char *dest_path, int *pages,
                     int *schema_backup)
{
    fxl_ctx *ctx;
    sqlite3 *src = NULL;
    fxl_outfile o = FXL_OUTFILE_INIT;
    int rc = 0, app_id = 0, version = 0, npages = 0, has_wal = 0;
    char uri[FXL_OUTFILE_PATH_MAX * 3 + 32];
    const char *p;
    size_t n;

    if (!(*out = ctx = calloc(1, sizeof *ctx)))
        return FXL_EIO;
    if (pages)
        *pages = 0;
    if (schema_backup)
        *schema_backup = 0;
    if (!backup_path || !*backup_path || !dest_path || !*dest_path)
        return fxl_fail(ctx, FXL_EINVAL, "a backup file and the name of a new file are required");
    if (access(backup_path, R_OK) != 0)   /* a missing input file is a data error (exit 2) */
        return fxl_fail(ctx, errno == ENOENT || errno == ENOTDIR ? FXL_ENOTFOUND : FXL_EINVAL,
                        "cannot read backup '%s': %s", backup_path, strerror(errno));
    /* Read-only, and immutable unless a -wal lies beside it: SQLite then
     * neither writes nor creates a -wal or -shm beside the backup
     * (sqlite.org/uri.html, "immutable"). A backup that was opened for
     * writing since (its -wal is there) is read with its WAL. */
    {
        char wal[FXL_OUTFILE_PATH_MAX + 8];
        struct stat st;
        snprintf(wal, sizeof wal, "%s-wal", backup_path);
        has_wal = stat(wal, &st) == 0;
    }
    n = (size_t)snprintf(uri, sizeof uri, "file:");
    for (p = backup_path; *p && n + 4 < sizeof uri; p++)
        n += (size_t)(strchr("?#%", *p) ? snprintf(uri + n, sizeof uri - n, "%%%02X", (unsigned char)*p)
                                        : snprintf(uri + n, sizeof uri - n, "%c", *p));
    snprintf(uri + n, sizeof uri - n, has_wal ? "?mode=ro" : "?mode=ro&immutable=1");
    if (sqlite3_open_v2(uri, &src, SQLITE_OPEN_READONLY | SQLITE_OPEN_URI, NULL) != SQLITE_OK) {
        rc = fxl_fail(ctx, FXL_EIO, "cannot open backup '%s': %s", backup_path,
                      src ? sqlite3_errmsg(src) : "out of memory");
        goto cleanup;
    }
    if (pragma_int(src, "PRAGMA application_id", &app_id) != 0 || app_id != FXL_APPLICATION_ID) {
        rc = fxl_fail(ctx, FXL_EVERSION, "'%s' is not an fxledger database", backup_path);
        goto cleanup;
    }
    if (pragma_int(src, "PRAGMA user_version", &version) != 0) {
        rc = fxl_fail(ctx, FXL_EIO, "cannot read backup '%s': %s", backup_path, sqlite3_errmsg(src));
        goto cleanup;
    }
    if (schema_backup)
        *schema_backup = version;
    if (version > fxl_schema_latest()) {
        rc = fxl_fail(ctx, FXL_EVERSION,
                      "backup '%s' has schema version %d, newer than this fxledger (%d); restore it "
                      "with the fxledger that wrote it", backup_path, version, fxl_schema_latest());
        goto cleanup;
    }
    /* A -wal (or -journal) left under the new name belongs to the database
     * that had it: fxledger leaves committed rows in the -wal when it
     * closes, and SQLite would replay them into the restored copy. */
    {
        static const char *const sides[] = {"-wal", "-journal"};
        char side[FXL_OUTFILE_PATH_MAX + 16];
        struct stat st;
        size_t i;
        for (i = 0; i < sizeof sides / sizeof sides[0]; i++) {
            snprintf(side, sizeof side, "%s%s", dest_path, sides[i]);
            if (lstat(side, &st) == 0) {
                rc = fxl_fail(ctx, FXL_ECONFLICT,
                              "'%s' lies beside '%s': it holds rows of the database that had that name; "
                              "move it away together with that database's file, or name another file "
                              "(nothing was written)", side, dest_path);
                goto cleanup;
            }
        }
    }
    if ((rc = fxl_outfile_open(&o, ctx, dest_path, FXL_OUT_NO_STDIO)) != 0)
        goto cleanup;
    if ((rc = copy_pages(ctx, src, o.tmp, dest_path, &npages)) != 0)
        goto cleanup;
    if ((rc = fxl_outfile_commit(&o, ctx)) != 0)
        goto cleanup;
    sqlite3_close(src);
    src = NULL;
    if (pages)
        *pages = npages;
    /* The copy, read-write: migrations above its schema apply here. */
    free(ctx);
    *out = NULL;
    if ((rc = fxl_open(out, dest_path, 0)) != 0)
        fxl_restore_discard(dest_path);   /* ours: a copy that does not open is no restore */
    return rc;
cleanup:
    if (src)
        sqlite3_close(src);
    if (o.created)
        fxl_restore_discard(o.tmp);
    fxl_outfile_abort(&o);
    return rc;
}

static int count(fxl_ctx *ctx, const char *sql, int64_t *out)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc = fxl_stmt_prepare(&s, ctx, sql);

    if (rc == 0 && (rc = fxl_stmt_step(&s)) == 1) {
        *out = fxl_stmt_int(&s, 0);
        rc = 0;
    } else if (rc == 0) {
        rc = fxl_fail(ctx, FXL_EDB, "cannot count: %s", sql);
    }
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_holdings_get(fxl_ctx *ctx, fxl_holdings *h)
{
    static const struct {
        const char *sql;
        size_t off;
    } counts[] = {
        {"SELECT count(*) FROM audit_log", offsetof(fxl_holdings, audit_rows)},
        {"SELECT count(*) FROM users", offsetof(fxl_holdings, users)},
        {"SELECT count(*) FROM users WHERE active = 1", offsetof(fxl_holdings, active_users)},
        {"SELECT count(*) FROM machines", offsetof(fxl_holdings, machines)},
        {"SELECT count(*) FROM detectors", offsetof(fxl_holdings, detectors)},
        {"SELECT count(*) FROM patients", offsetof(fxl_holdings, patients)},
        {"SELECT count(*) FROM plans", offsetof(fxl_holdings, plans)},
        {"SELECT count(*) FROM fractions", offsetof(fxl_holdings, fractions)},
        {"SELECT count(*) FROM measurements", offsetof(fxl_holdings, measurements)},
        {"SELECT count(*) FROM review_items", offsetof(fxl_holdings, review_items)},
        {"SELECT count(*) FROM review_items WHERE status <> 'closed'",
         offsetof(fxl_holdings, review_items_open)},
        {"SELECT count(*) FROM signatures", offsetof(fxl_holdings, signatures)},
    };
    fxl_stmt s = FXL_STMT_INIT;
    int64_t schema = 0;
    size_t i;
    int rc = 0;

    memset(h, 0, sizeof *h);
    for (i = 0; i < sizeof counts / sizeof counts[0] && rc == 0; i++)
        rc = count(ctx, counts[i].sql, (int64_t *)(void *)((char *)h + counts[i].off));
    if (rc == 0 && (rc = count(ctx, "PRAGMA user_version", &schema)) == 0)
        h->schema = (int)schema;
    if (rc == 0 && (rc = fxl_stmt_prepare(&s, ctx, "SELECT (SELECT at FROM audit_log ORDER BY id LIMIT 1), "
                                                   "(SELECT at FROM audit_log ORDER BY id DESC LIMIT 1), "
                                                   "(SELECT value FROM settings WHERE key = 'department')")) == 0 &&
        (rc = fxl_stmt_step(&s)) == 1) {
        snprintf(h->first_audit_at, sizeof h->first_audit_at, "%s", fxl_stmt_is_null(&s, 0) ? "" : fxl_stmt_text(&s, 0));
        snprintf(h->last_audit_at, sizeof h->last_audit_at, "%s", fxl_stmt_is_null(&s, 1) ? "" : fxl_stmt_text(&s, 1));
        snprintf(h->department, sizeof h->department, "%s", fxl_stmt_is_null(&s, 2) ? "" : fxl_stmt_text(&s, 2));
        rc = 0;
    }
    fxl_stmt_finalize(&s);
    return rc < 0 ? rc : 0;
}
