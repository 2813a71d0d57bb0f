/* Opening an fxledger database: connection settings, identity and version
 * checks, migrations; plus the acting user, transactions, clock and settings. */
#include <errno.h>
#include <fcntl.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "fxl/auth.h"
#include "fxl/server.h"
#include "store/audit.h"
#include "store/ctx.h"
#include "store/migrations.h"
#include "store/seal.h"
#include "store/sqlite_mem.h"
#include "store/stmt.h"

/* How long a writer waits for another process's lock before "busy". */
#define BUSY_TIMEOUT_MS 5000
/* WAL pages after which a commit copies the WAL into the database file and
 * empties it (wal_hook): about five logged fractions. A longer WAL costs
 * every command that opens the file alone more to read than its rarer
 * checkpoints save (docs/performance.md, change 21). */
#ifndef WAL_CHECKPOINT_PAGES
#define WAL_CHECKPOINT_PAGES 200
#endif

int fxl_fail(fxl_ctx *ctx, int code, const char *fmt, ...)
{
    va_list ap;
    char *full = NULL;
    size_t len, head, tail;
    int n;

    if (!ctx)
        return code;
    va_start(ap, fmt);
    n = vsnprintf(NULL, 0, fmt, ap);
    va_end(ap);
    if (n >= 0 && (full = malloc((size_t)n + 1)) != NULL) {
        va_start(ap, fmt);
        vsnprintf(full, (size_t)n + 1, fmt, ap);
        va_end(ap);
    }
    if (!full) {
        snprintf(ctx->errmsg, sizeof ctx->errmsg, "%s", fmt);
        return code;
    }
    len = (size_t)n;
    if (len < sizeof ctx->errmsg) {
        memcpy(ctx->errmsg, full, len + 1);
    } else {
        /* A message quoting a huge input (a 100 kB name) keeps its start and
         * its end - what is wrong and what to do - cut on UTF-8 character
         * boundaries (docs/hazards.md). */
        head = sizeof ctx->errmsg / 2 - 16;
        tail = len - (sizeof ctx->errmsg / 2 - 16);
        while (head > 0 && ((unsigned char)full[head] & 0xc0) == 0x80)
            head--;
        while (tail < len && ((unsigned char)full[tail] & 0xc0) == 0x80)
            tail++;
        snprintf(ctx->errmsg, sizeof ctx->errmsg, "%.*s ... %s", (int)head, full, full + tail);
    }
    free(full);
    return code;
}

const char *fxl_errmsg(const fxl_ctx *ctx)
{
    return ctx ? ctx->errmsg : "out of memory";
}

int fxl_schema_latest(void)
{
    return fxl_migrations[fxl_migration_count - 1].version;
}

static int pragma_int(fxl_ctx *ctx, const char *sql, int *out)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc = fxl_stmt_prepare(&s, ctx, sql);

    if (rc == 0) {
        rc = fxl_stmt_step(&s);
        if (rc == 1) {
            *out = (int)fxl_stmt_int(&s, 0);
            rc = 0;
        } else if (rc == 0) {
            rc = fxl_fail(ctx, FXL_EDB, "internal: '%s' returned no row", sql);
        }
    }
    fxl_stmt_finalize(&s);
    return rc;
}

long long fxl_total_changes(fxl_ctx *ctx)
{
    return ctx && ctx->db ? (long long)sqlite3_total_changes64(ctx->db) : 0;
}

int fxl_schema_version(fxl_ctx *ctx)
{
    int v = -1;
    pragma_int(ctx, "PRAGMA user_version", &v);
    return v;
}

/* The schema version from which rows are sealed (sql/011). */
#define SEAL_VERSION 11

/* In the migration to version 11: seals every row written before it, under
 * one audit row of the migration (user "(migration)", which no login can
 * be), so that verify proves them like any later row. Nothing when the
 * database holds no sealed row yet (a new database). */
static int seal_existing(fxl_ctx *ctx)
{
    char login[sizeof ctx->user_login];
    cJSON *content = NULL;
    int64_t n = 0;
    int rc;

    if ((rc = fxl_seal_attach(ctx)) != 0 || (rc = fxl_seal_mark_all(ctx, &n)) != 0 || n == 0)
        return rc;
    content = cJSON_CreateObject();
    cJSON_AddStringToObject(content, "reason", "rows written before schema version 11");
    cJSON_AddNumberToObject(content, "rows", (double)n);
    memcpy(login, ctx->user_login, sizeof login);
    snprintf(ctx->user_login, sizeof ctx->user_login, "(migration)");
    rc = fxl_audit_append(ctx, "seal", "row_seals", 0, content);
    memcpy(ctx->user_login, login, sizeof login);
    cJSON_Delete(content);
    return rc;
}

/* Applies every migration above the file's user_version, each in its own
 * transaction together with the version bump. */
static int migrate(fxl_ctx *ctx, int from_version)
{
    char sql[64];
    int i, rc;

    for (i = 0; i < fxl_migration_count; i++) {
        const struct fxl_migration *m = &fxl_migrations[i];
        if (m->version <= from_version)
            continue;
        if ((rc = fxl_exec(ctx, "BEGIN IMMEDIATE")) != 0)
            return rc;
        rc = fxl_exec(ctx, m->sql);
        if (rc == 0 && m->version == SEAL_VERSION)
            rc = seal_existing(ctx);
        if (rc == 0) {
            snprintf(sql, sizeof sql, "PRAGMA user_version = %d", m->version);
            rc = fxl_exec(ctx, sql);
        }
        if (rc == 0 && from_version == 0) {
            snprintf(sql, sizeof sql, "PRAGMA application_id = %d", FXL_APPLICATION_ID);
            rc = fxl_exec(ctx, sql);
        }
        if (rc != 0) {
            char why[sizeof ctx->errmsg];
            snprintf(why, sizeof why, "%s", ctx->errmsg);
            fxl_exec(ctx, "ROLLBACK");
            return fxl_fail(ctx, rc, "migration '%s' failed: %.400s", m->name, why);
        }
        if ((rc = fxl_exec(ctx, "COMMIT")) != 0)
            return rc;
    }
    return 0;
}

/* ---- what is wrong with a file that does not open ------------------------ */

/* The directory part of path into dir ("." when none). */
static void dir_of(const char *path, char *dir, size_t size)
{
    const char *slash = strrchr(path, '/');

    if (!slash)
        snprintf(dir, size, ".");
    else if (slash == path)
        snprintf(dir, size, "/");
    else
        snprintf(dir, size, "%.*s", (int)(slash - path), path);
}

int fxl_db_explain_damage(fxl_ctx *ctx, const char *path, const char *detail)
{
    return fxl_fail(ctx, FXL_EDB,
                    "database '%s' is damaged (integrity: %s); nothing was changed - restore it from "
                    "the last backup and check the copy with 'fxledger verify' (docs/robustness.md)",
                    path, detail);
}

/* The SQLite file header (SQLite file format, "The Database Header"):
 * 0 for a plausible header, else a message (FXL_EVERSION: not SQLite at
 * all; FXL_EDB: a damaged SQLite file). Reads the first 100 bytes and the
 * file's size: *want is the size the header's page count gives (0 when
 * the header does not vouch for it), *have the file's size. */
static int read_header(fxl_ctx *ctx, const char *path, double *want, long long *have)
{
    static const unsigned char magic[16] = "SQLite format 3";
    unsigned char h[100];
    unsigned long page_size, pages, counter, valid_for;
    struct stat st;
    ssize_t n;
    int fd;

    *want = 0;
    *have = 0;
    if ((fd = open(path, O_RDONLY | O_CLOEXEC)) < 0)
        return 0;   /* SQLite reports what it finds */
    n = read(fd, h, sizeof h);
    if (fstat(fd, &st) != 0)
        st.st_size = 0;
    close(fd);
    if (n <= 0)
        return 0;   /* an empty file: the caller's message */
    if (n < (ssize_t)sizeof h || memcmp(h, magic, sizeof magic) != 0) {
        if (n >= 16 && memcmp(h, magic, 15) == 0)
            return fxl_db_explain_damage(ctx, path, "the file header is damaged");
        return fxl_fail(ctx, FXL_EVERSION,
                        "'%s' is not an fxledger database (no SQLite header: another kind of file, or a "
                        "database whose first bytes were overwritten)", path);
    }
    page_size = ((unsigned long)h[16] << 8) | h[17];
    if (page_size == 1)
        page_size = 65536;
    if (page_size < 512 || (page_size & (page_size - 1)) != 0)
        return fxl_db_explain_damage(ctx, path, "the page size in the file header is invalid");
    pages = ((unsigned long)h[28] << 24) | ((unsigned long)h[29] << 16) | ((unsigned long)h[30] << 8) | h[31];
    counter = ((unsigned long)h[24] << 24) | ((unsigned long)h[25] << 16) | ((unsigned long)h[26] << 8) | h[27];
    valid_for = ((unsigned long)h[92] << 24) | ((unsigned long)h[93] << 16) | ((unsigned long)h[94] << 8) | h[95];
    /* The in-header size counts only when the change counter matches the
     * version-valid-for number. */
    if (pages > 0 && counter == valid_for) {
        *want = (double)pages * (double)page_size;
        *have = (long long)st.st_size;
    }
    return 0;
}

/* Whether the database has a WAL with frames in it: pages the file does
 * not hold yet may be there (a checkpoint moves them into the file). */
static int wal_has_frames(const char *path)
{
    char wal[4096];
    struct stat st;

    if (snprintf(wal, sizeof wal, "%s-wal", path) >= (int)sizeof wal)
        return 1;   /* cannot tell: leave it to SQLite */
    return stat(wal, &st) == 0 && st.st_size > 0;
}

/* The header check at every open (cheap: 100 bytes and a stat or two). A
 * file shorter than its header's page count was cut short - unless its
 * WAL holds frames: a checkpoint writes page 1 (with the new page count)
 * before the pages that extend the file, and one killed half-way is
 * finished from the WAL at the next open. Then SQLite itself finds a page
 * that is really missing (SQLITE_CORRUPT, "damaged" below). A short file
 * without a WAL is read again a few times before it is called damaged: a
 * closing process may have finished its checkpoint and removed its WAL
 * between our two looks. */
#define HEADER_RECHECKS 4
#define HEADER_RECHECK_NS 25000000L   /* 25 ms */

static int check_header(fxl_ctx *ctx, const char *path)
{
    const struct timespec pause = {0, HEADER_RECHECK_NS};
    char detail[160];
    long long have = 0;
    double want = 0;
    int rc, tries;

    for (tries = 0;; tries++) {
        if ((rc = read_header(ctx, path, &want, &have)) != 0)
            return rc;
        if ((double)have >= want || wal_has_frames(path))
            return 0;
        if (tries == HEADER_RECHECKS)
            break;
        nanosleep(&pause, NULL);
    }
    snprintf(detail, sizeof detail, "the file is cut short: %lld of %.0f bytes", have, want);
    return fxl_db_explain_damage(ctx, path, detail);
}

/* After a failed first read or write of an opened file: the reason in the
 * user's terms - a read-only folder or file, a damaged file, another kind
 * of file - rather than SQLite's words. */
static int explain_open_failure(fxl_ctx *ctx, const char *path, int readonly)
{
    int xrc = ctx->db ? sqlite3_extended_errcode(ctx->db) : SQLITE_ERROR, rc;
    char dir[4096];

    if ((rc = check_header(ctx, path)) != 0)
        return rc;
    dir_of(path, dir, sizeof dir);
    if ((xrc & 0xff) == SQLITE_CORRUPT || (xrc & 0xff) == SQLITE_NOTADB)
        return fxl_db_explain_damage(ctx, path, sqlite3_errstr(xrc));
    if ((xrc & 0xff) == SQLITE_READONLY || (xrc & 0xff) == SQLITE_CANTOPEN ||
        (xrc & 0xff) == SQLITE_PERM || (xrc & 0xff) == SQLITE_IOERR) {
        if (access(dir, W_OK) != 0)
            return fxl_fail(ctx, FXL_EIO,
                            "database '%s' is in a read-only folder '%s': fxledger must create its -wal "
                            "and -shm files beside it%s; move it to a writable folder or ask for write "
                            "access (nothing was changed)", path, dir,
                            readonly ? " even to read it" : "");
        if (!readonly && access(path, W_OK) != 0)
            return fxl_fail(ctx, FXL_EIO, "database file '%s' is read-only (%s); nothing was changed",
                            path, strerror(errno));
    }
    return fxl_fail(ctx, FXL_EVERSION, "'%s' is not an fxledger database (%s)", path, sqlite3_errstr(xrc));
}

static int is_empty_database(fxl_ctx *ctx, int *empty)
{
    int n = 0;
    int rc = pragma_int(ctx, "SELECT count(*) FROM sqlite_schema", &n);
    *empty = (n == 0);
    return rc;
}

/* After every commit (sqlite3_wal_hook, in place of SQLite's own
 * auto-checkpoint): once the WAL holds WAL_CHECKPOINT_PAGES pages, copy them
 * into the database file and empty the WAL (SQLITE_CHECKPOINT_TRUNCATE).
 * SQLite's own passive checkpoint leaves the copied pages in the WAL; a
 * process that opens the file next rebuilds the WAL's index from the whole
 * -wal file and cannot know they were copied, so without an empty WAL it
 * grew with every command and each one read and copied all of it again
 * (docs/performance.md, change 21). The commit is already durable in the
 * WAL; the checkpoint does not wait for readers (busy timeout 0 while it
 * runs): with a reader in the way it copies what it can and the next
 * commit tries again. A failure here changes nothing committed. */
static int wal_hook(void *arg, sqlite3 *db, const char *name, int pages)
{
    (void)arg;
    if (pages >= WAL_CHECKPOINT_PAGES) {
        sqlite3_busy_timeout(db, 0);
        (void)sqlite3_wal_checkpoint_v2(db, name, SQLITE_CHECKPOINT_TRUNCATE, NULL, NULL);
        sqlite3_busy_timeout(db, BUSY_TIMEOUT_MS);
    }
    return SQLITE_OK;
}

void fxl_store_configure(int one_thread)
{
    /* Debian's SQLite is built thread-safe with memory statistics on: a
     * mutex and a counter on every allocation, about 12 % of the
     * instructions of 'record' (docs/performance.md, change 19). Every call
     * is refused harmlessly (SQLITE_MISUSE) once SQLite has started. From
     * one thread, SQLite's small blocks also come from free lists by size
     * class rather than malloc (sqlite_mem.c, change 23). */
    if (one_thread && sqlite3_config(SQLITE_CONFIG_SINGLETHREAD) == SQLITE_OK)
        fxl_sqlite_mem_install();
    sqlite3_config(SQLITE_CONFIG_MEMSTATUS, 0);
}

int fxl_open(fxl_ctx **out, const char *path, int flags)
{
    fxl_ctx *ctx;
    struct stat st;
    int sqlflags, rc, fd, app_id = 0, version = 0, empty = 0;

    *out = ctx = calloc(1, sizeof *ctx);
    if (!ctx)
        return FXL_EIO;
    ctx->readonly = (flags & FXL_OPEN_READONLY) != 0;

    if ((flags & FXL_OPEN_CREATE) && strcmp(path, ":memory:") != 0 && path[0]) {
        /* lstat: a dangling symlink is a path that exists, never followed to
         * create a file elsewhere. The new file is ours and 0600 before
         * SQLite opens it (its -wal and -shm take the same mode). */
        if (lstat(path, &st) == 0)
            return fxl_fail(ctx, FXL_ECONFLICT, "database '%s' already exists%s", path,
                            S_ISLNK(st.st_mode) ? " (as a symbolic link; name a new file)" : "");
        fd = open(path, O_RDWR | O_CREAT | O_EXCL | O_NOFOLLOW | O_CLOEXEC, 0600);
        if (fd < 0)
            return fxl_fail(ctx, errno == EEXIST ? FXL_ECONFLICT : FXL_EIO,
                            "cannot create database '%s': %s", path, strerror(errno));
        fchmod(fd, 0600);
        close(fd);
    } else if (!(flags & FXL_OPEN_CREATE) && stat(path, &st) != 0) {
        return fxl_fail(ctx, FXL_EIO,
                        "database '%s' does not exist (create it with 'fxledger init')", path);
    }

    /* A write-protected file would be opened read-only without a word (and
     * its -wal and -shm left beside it): refused before SQLite opens it. */
    if (!ctx->readonly && !(flags & FXL_OPEN_CREATE) && access(path, W_OK) != 0 && errno == EACCES)
        return fxl_fail(ctx, FXL_EIO, "database file '%s' is read-only; nothing was changed", path);
    sqlflags = ctx->readonly ? SQLITE_OPEN_READONLY
                             : SQLITE_OPEN_READWRITE | ((flags & FXL_OPEN_CREATE) ? SQLITE_OPEN_CREATE : 0);
    if (sqlite3_open_v2(path, &ctx->db, sqlflags, NULL) != SQLITE_OK)
        return fxl_fail(ctx, FXL_EIO, "cannot open database '%s': %s", path,
                        ctx->db ? sqlite3_errmsg(ctx->db) : "out of memory");
    sqlite3_busy_timeout(ctx->db, BUSY_TIMEOUT_MS);
    sqlite3_extended_result_codes(ctx->db, 1);

    /* A file cut short reads well until a missing page is needed: its
     * header tells (a cheap check at every open). */
    if (!(flags & FXL_OPEN_CREATE) && (rc = check_header(ctx, path)) != 0)
        return rc;
    /* A file that is not SQLite at all fails on its first read. */
    if (pragma_int(ctx, "PRAGMA application_id", &app_id) != 0 ||
        is_empty_database(ctx, &empty) != 0)
        return explain_open_failure(ctx, path, ctx->readonly);
    if (!empty && app_id != FXL_APPLICATION_ID)
        return fxl_fail(ctx, FXL_EVERSION, "'%s' is not an fxledger database", path);
    if (empty && !(flags & FXL_OPEN_CREATE))
        return fxl_fail(ctx, FXL_EVERSION, "'%s' is not an fxledger database (empty file)", path);
    if ((rc = pragma_int(ctx, "PRAGMA user_version", &version)) != 0)
        return rc;
    if (version > fxl_schema_latest())
        return fxl_fail(ctx, FXL_EVERSION,
                        "database '%s' has schema version %d, newer than this fxledger (%d); upgrade fxledger",
                        path, version, fxl_schema_latest());

    if ((rc = fxl_exec(ctx, "PRAGMA foreign_keys = ON")) != 0)
        return rc;
    if (!ctx->readonly) {
        if ((rc = fxl_exec(ctx, "PRAGMA journal_mode = WAL")) != 0 ||
            (rc = fxl_exec(ctx, "PRAGMA synchronous = FULL")) != 0)
            return explain_open_failure(ctx, path, 0);
        /* No checkpoint when the last connection closes: committed rows stay
         * in the -wal file (already synced there: synchronous FULL) until
         * the commit after which the WAL holds WAL_CHECKPOINT_PAGES pages
         * moves them into the file and empties the WAL (wal_hook), so a
         * command does not pay for copying the WAL at every exit.
         * The database is the .db file together with its -wal: a copy is
         * made with 'fxledger backup' (docs/robustness.md). */
        sqlite3_db_config(ctx->db, SQLITE_DBCONFIG_NO_CKPT_ON_CLOSE, 1, (int *)NULL);
        sqlite3_wal_hook(ctx->db, wal_hook, NULL);
        /* SQLite opens a write-protected file read-only without a word;
         * say so now rather than at the first write. */
        if (sqlite3_db_readonly(ctx->db, "main") == 1) {
            char dir[4096];
            dir_of(path, dir, sizeof dir);
            if (access(dir, W_OK) != 0)
                return fxl_fail(ctx, FXL_EIO,
                                "database '%s' is in a read-only folder '%s': fxledger must create its -wal "
                                "and -shm files beside it; move it to a writable folder or ask for write "
                                "access (nothing was changed)", path, dir);
            return fxl_fail(ctx, FXL_EIO, "database file '%s' is read-only; nothing was changed", path);
        }
        if (version < fxl_schema_latest() && (rc = migrate(ctx, version)) != 0)
            return rc;
        if (fxl_schema_latest() >= SEAL_VERSION && (rc = fxl_seal_attach(ctx)) != 0)
            return rc;
    } else if (version < fxl_schema_latest()) {
        return fxl_fail(ctx, FXL_EVERSION,
                        "database '%s' has schema version %d; open it once for writing to upgrade",
                        path, version);
    }
    return 0;
}

void fxl_close(fxl_ctx *ctx)
{
    if (!ctx)
        return;
    fxl_sign_end(ctx);
    fxl_stmt_cache_release(ctx);
    sqlite3_close_v2(ctx->db);
    fxl_seal_release(ctx);
    free(ctx);
}

/* ---- users and roles ---------------------------------------------------- */

static const char *const role_names[] = {"therapist", "physicist", "auditor", "admin"};

const char *fxl_role_name(fxl_role role)
{
    switch (role) {
    case FXL_ROLE_THERAPIST: return role_names[0];
    case FXL_ROLE_PHYSICIST: return role_names[1];
    case FXL_ROLE_AUDITOR: return role_names[2];
    case FXL_ROLE_ADMIN: return role_names[3];
    }
    return "none";
}

int fxl_role_parse(fxl_role *out, const char *name)
{
    int i;

    for (i = 0; i < 4; i++) {
        if (name && strcmp(name, role_names[i]) == 0) {
            *out = (fxl_role)(1 << i);
            return 0;
        }
    }
    return FXL_EINVAL;
}

int fxl_set_user(fxl_ctx *ctx, const char *login)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    ctx->user_id = 0;
    ctx->user_login[0] = '\0';
    ctx->user_role = 0;
    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT id, role, active FROM users WHERE login = :login")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":login", login);
    rc = fxl_stmt_step(&s);
    if (rc == 0) {
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "unknown user '%s' (see 'fxledger user list')", login);
    } else if (rc == 1) {
        if (fxl_stmt_int(&s, 2) == 0) {
            rc = fxl_fail(ctx, FXL_EPERM, "user '%s' is deactivated", login);
            goto cleanup;
        }
        ctx->user_id = fxl_stmt_int(&s, 0);
        snprintf(ctx->user_login, sizeof ctx->user_login, "%s", login);
        fxl_role_parse(&ctx->user_role, fxl_stmt_text(&s, 1));
        rc = 0;
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

const char *fxl_user_login(const fxl_ctx *ctx)
{
    return ctx->user_id ? ctx->user_login : NULL;
}

int64_t fxl_user_id(const fxl_ctx *ctx)
{
    return ctx->user_id;
}

fxl_role fxl_user_role(const fxl_ctx *ctx)
{
    return ctx->user_role;
}

int fxl_require_role(fxl_ctx *ctx, unsigned roles_mask, const char *action)
{
    char allowed[64] = "";
    int i;

    if (!ctx->user_id)
        return fxl_fail(ctx, FXL_EPERM, "%s needs a logged-in user (fxledger login)", action);
    if (ctx->user_role & roles_mask)
        return 0;
    for (i = 0; i < 4; i++) {
        if (roles_mask & (1u << i)) {
            if (allowed[0])
                strcat(allowed, " or ");
            strcat(allowed, role_names[i]);
        }
    }
    return fxl_fail(ctx, FXL_EPERM, "permission denied: %s needs the role %s; user '%s' is %s",
                    action, allowed, ctx->user_login, fxl_role_name(ctx->user_role));
}

/* ---- transactions and clock -------------------------------------------- */

int fxl_begin(fxl_ctx *ctx)
{
    return fxl_exec(ctx, "BEGIN IMMEDIATE");
}

int fxl_commit(fxl_ctx *ctx)
{
    int rc = 0;

    /* The session's activity rides in this transaction when armed: one
     * commit instead of two (fxl_session_touch_at_commit). */
    if ((rc = fxl_session_touch_pending(ctx)) != 0) {
        fxl_rollback(ctx);
        return rc;
    }
    /* Rows written after the last audit row of the transaction are sealed
     * by one more audit row, so that no row is ever left unsealed. */
    if (fxl_seal_has_pending(ctx)) {
        cJSON *content = cJSON_CreateObject();
        cJSON_AddStringToObject(content, "reason", "rows written after the last audit row of their transaction");
        rc = fxl_audit_append(ctx, "seal", "row_seals", 0, content);
        cJSON_Delete(content);
        if (rc != 0) {
            fxl_rollback(ctx);
            return rc;
        }
    }
    rc = fxl_exec(ctx, "COMMIT");
    if (rc != 0) {
        fxl_rollback(ctx);
    } else if (ctx->touch_armed && ctx->session_id) {
        ctx->touch_armed = 0;
        ctx->touch_written = 1;
        memcpy(ctx->session_seen, ctx->touch_at, sizeof ctx->session_seen);
    }
    return rc;
}

void fxl_rollback(fxl_ctx *ctx)
{
    if (ctx && ctx->db && !sqlite3_get_autocommit(ctx->db)) {
        sqlite3_exec(ctx->db, "ROLLBACK", NULL, NULL, NULL);
        /* The rollback hook forgot the marks already; this says so here. */
        fxl_seal_discard(ctx);
    }
}

void fxl_now(const fxl_ctx *ctx, char *buf)
{
    time_t t;
    struct tm tm;

    (void)ctx;
    /* A fixed clock exists only in the test build (src/clock/clock.c). */
    if (fxl_clock_fixed(buf))
        return;
    t = time(NULL);
    gmtime_r(&t, &tm);
    strftime(buf, FXL_TIME_LEN, "%Y-%m-%dT%H:%M:%SZ", &tm);
}

/* ---- settings ------------------------------------------------------------ */

int fxl_setting_get(fxl_ctx *ctx, const char *key, char *buf, size_t bufsize)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    if ((rc = fxl_stmt_prepare_cached(&s, ctx, "SELECT value FROM settings WHERE key = :key")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":key", key);
    rc = fxl_stmt_step(&s);
    if (rc == 1) {
        snprintf(buf, bufsize, "%s", fxl_stmt_text(&s, 0));
        rc = 0;
    } else if (rc == 0) {
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "setting '%s' is not set", key);
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_setting_set(fxl_ctx *ctx, const char *key, const char *value)
{
    fxl_stmt s = FXL_STMT_INIT;
    cJSON *content = NULL;
    int rc;

    if ((rc = fxl_require_role(ctx, FXL_ROLES_PHYSICS, "changing settings")) != 0)
        return rc;
    /* The audit row first: the settings guard (sql/011) accepts a new value
     * only when the newest audit row names it. */
    if ((rc = fxl_begin(ctx)) != 0)
        return rc;
    content = cJSON_CreateObject();
    cJSON_AddStringToObject(content, "key", key);
    cJSON_AddStringToObject(content, "value", value);
    if ((rc = fxl_audit_append(ctx, "set", "settings", 0, content)) != 0)
        goto cleanup;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "INSERT INTO settings (key, value) VALUES (:key, :value) "
                               "ON CONFLICT (key) DO UPDATE SET value = excluded.value")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":key", key);
    fxl_stmt_bind_text(&s, ":value", value);
    if ((rc = fxl_stmt_exec(&s)) != 0)
        goto cleanup;
    rc = fxl_commit(ctx);
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    cJSON_Delete(content);
    fxl_stmt_finalize(&s);
    return rc;
}

void fxl_clear_user(fxl_ctx *ctx)
{
    if (!ctx)
        return;
    ctx->user_id = 0;
    ctx->user_login[0] = '\0';
    ctx->user_role = 0;
    ctx->session_id = 0;
    ctx->session_seen[0] = '\0';
    ctx->touch_armed = ctx->touch_written = 0;
}

void fxl_set_origin(fxl_ctx *ctx, const char *address)
{
    if (ctx)
        snprintf(ctx->origin, sizeof ctx->origin, "%s", address ? address : "");
}

const char *fxl_origin(const fxl_ctx *ctx)
{
    return ctx ? ctx->origin : "";
}

int fxl_begin_read(fxl_ctx *ctx)
{
    return fxl_exec(ctx, "BEGIN DEFERRED");
}
