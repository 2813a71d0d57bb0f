/* Safe output files (include/fxl/outfile.h): checks on the target, a
 * temporary file created exclusively beside it, and a rename that never
 * replaces what it must not. No SQL here; the store only lends the name of
 * the open database. */
#define _XOPEN_SOURCE 700   /* realpath, kill */
#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <signal.h>
#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "fxl/outfile.h"
#include "store/ctx.h"

#ifndef O_NOFOLLOW
#error "O_NOFOLLOW is required"
#endif

static const unsigned char sqlite_magic[16] = "SQLite format 3";   /* with its NUL */

int fxl_outfile_is_sqlite(const char *path)
{
    unsigned char head[16];
    int fd = open(path, O_RDONLY | O_NOFOLLOW | O_NONBLOCK | O_CLOEXEC);
    struct stat st;
    ssize_t n;

    if (fd < 0)
        return 0;
    if (fstat(fd, &st) != 0 || !S_ISREG(st.st_mode)) {
        close(fd);
        return 0;
    }
    n = read(fd, head, sizeof head);
    close(fd);
    if (n == (ssize_t)sizeof head && memcmp(head, sqlite_magic, sizeof head) == 0)
        return 1;
    /* WAL header: magic 0x377f0682 or 0x377f0683, big-endian (SQLite file
     * format, "The WAL File Format"). */
    if (n >= 4 && head[0] == 0x37 && head[1] == 0x7f && head[2] == 0x06 &&
        (head[3] == 0x82 || head[3] == 0x83))
        return 1;
    return 0;
}

/* dirname and basename of `path` into the buffers; 0, or -1 if too long. */
static int split_path(const char *path, char *dir, size_t dsize, char *base, size_t bsize)
{
    const char *slash = strrchr(path, '/');

    if (!slash) {
        if (snprintf(dir, dsize, ".") >= (int)dsize || snprintf(base, bsize, "%s", path) >= (int)bsize)
            return -1;
        return 0;
    }
    if (snprintf(base, bsize, "%s", slash + 1) >= (int)bsize)
        return -1;
    if (slash == path)
        return snprintf(dir, dsize, "/") >= (int)dsize ? -1 : 0;
    if ((size_t)(slash - path) >= dsize)
        return -1;
    memcpy(dir, path, (size_t)(slash - path));
    dir[slash - path] = '\0';
    return 0;
}

/* The canonical "realdir/base" of a path whose last component may not
 * exist; 0, or -1 when the directory cannot be resolved. */
static int canonical_name(const char *path, char out[PATH_MAX * 2])
{
    char dir[PATH_MAX], base[PATH_MAX], real[PATH_MAX];

    if (split_path(path, dir, sizeof dir, base, sizeof base) != 0 || !realpath(dir, real))
        return -1;
    snprintf(out, PATH_MAX * 2, "%s/%s", real, base);
    return 0;
}

/* Is `path` the open database or one of its side files? */
static int is_open_database(fxl_ctx *ctx, const char *path, const struct stat *target, int exists)
{
    static const char *const sides[] = {"", "-wal", "-shm", "-journal"};
    const char *db;
    char want[PATH_MAX * 2], side[PATH_MAX * 2 + 16], dbname[PATH_MAX * 2];
    struct stat st;
    size_t i;

    if (!ctx || !ctx->db || !(db = sqlite3_db_filename(ctx->db, "main")) || !*db)
        return 0;
    if (canonical_name(path, want) != 0)
        return 0;
    if (canonical_name(db, dbname) != 0)
        snprintf(dbname, sizeof dbname, "%s", db);
    for (i = 0; i < sizeof sides / sizeof sides[0]; i++) {
        snprintf(side, sizeof side, "%s%s", dbname, sides[i]);
        if (strcmp(side, want) == 0)
            return 1;
        snprintf(side, sizeof side, "%s%s", db, sides[i]);
        /* The same file under another name (a hard link, another path). */
        if (exists && stat(side, &st) == 0 && st.st_dev == target->st_dev && st.st_ino == target->st_ino)
            return 1;
    }
    return 0;
}

static const char *kind_of(mode_t m)
{
    if (S_ISDIR(m)) return "a directory";
    if (S_ISLNK(m)) return "a symbolic link";
    if (S_ISCHR(m) || S_ISBLK(m)) return "a device";
    if (S_ISFIFO(m)) return "a FIFO";
    if (S_ISSOCK(m)) return "a socket";
    return "not a regular file";
}

int fxl_outfile_check(fxl_ctx *ctx, const char *path, int flags)
{
    char dir[PATH_MAX], base[PATH_MAX];
    struct stat st, dst;
    int exists;

    if (!path || !*path)
        return fxl_fail(ctx, FXL_EINVAL, "an output file name is required");
    if (strlen(path) >= FXL_OUTFILE_PATH_MAX - 64 ||
        split_path(path, dir, sizeof dir, base, sizeof base) != 0)
        return fxl_fail(ctx, FXL_EINVAL, "output path '%.200s...' is too long", path);
    if (!*base || strcmp(base, ".") == 0 || strcmp(base, "..") == 0)
        return fxl_fail(ctx, FXL_ECONFLICT, "output '%s' exists and is a directory; name a new file", path);
    exists = lstat(path, &st) == 0;
    if (!exists && errno != ENOENT)
        return fxl_fail(ctx, FXL_EIO, "cannot check output file '%s': %s", path, strerror(errno));
    if (is_open_database(ctx, path, &st, exists))
        return fxl_fail(ctx, FXL_ECONFLICT, "refusing to write '%s': it is the open fxledger database "
                        "or one of its -wal/-shm/-journal files", path);
    if (exists) {
        if (!S_ISREG(st.st_mode))
            return fxl_fail(ctx, FXL_ECONFLICT, "refusing to write '%s': it exists and is %s%s", path,
                            kind_of(st.st_mode),
                            (flags & FXL_OUT_FORCE) ? " (--force replaces only a regular file)" : "");
        if (fxl_outfile_is_sqlite(path))
            return fxl_fail(ctx, FXL_ECONFLICT, "refusing to write '%s': it is an SQLite database file "
                            "(--force never replaces one)", path);
        if (!(flags & FXL_OUT_FORCE))
            return fxl_fail(ctx, FXL_ECONFLICT, "output file '%s' already exists; give --force to "
                            "replace it", path);
    }
    if (stat(dir, &dst) != 0 || !S_ISDIR(dst.st_mode))
        return fxl_fail(ctx, FXL_EIO, "cannot write '%s': directory '%s' does not exist", path, dir);
    if (access(dir, W_OK) != 0)
        return fxl_fail(ctx, FXL_EIO, "cannot write '%s': directory '%s' is not writable (%s)", path,
                        dir, strerror(errno));
    return 0;
}

/* Removes the temporary files ".BASE.part-PID-N" (and their -wal, -shm,
 * -journal) that a writer of the same target left when it was killed: only
 * regular files of ours whose process no longer exists. A killed backup or
 * report thus leaves nothing under the name asked for, and its temporary
 * file goes at the next write of that name. */
static void remove_stale_parts(const char *dir, const char *base)
{
    char prefix[PATH_MAX], full[PATH_MAX * 2];
    size_t plen;
    struct dirent *e;
    DIR *d;

    if (snprintf(prefix, sizeof prefix, ".%s.part-", base) >= (int)sizeof prefix || !(d = opendir(dir)))
        return;
    plen = strlen(prefix);
    while ((e = readdir(d)) != NULL) {
        const char *p = e->d_name + plen;
        char *end = NULL;
        long pid;
        struct stat st;

        if (strncmp(e->d_name, prefix, plen) != 0 || *p < '1' || *p > '9')
            continue;
        pid = strtol(p, &end, 10);
        if (!end || *end != '-' || pid <= 0 || pid == (long)getpid())
            continue;
        if (kill((pid_t)pid, 0) == 0 || errno != ESRCH)
            continue;   /* still running (or not ours to ask): leave it */
        if (snprintf(full, sizeof full, "%s/%s", dir, e->d_name) >= (int)sizeof full)
            continue;
        if (lstat(full, &st) == 0 && S_ISREG(st.st_mode) && st.st_uid == geteuid())
            unlink(full);
    }
    closedir(d);
}

int fxl_outfile_open(fxl_outfile *o, fxl_ctx *ctx, const char *path, int flags)
{
    static unsigned serial;
    char dir[PATH_MAX], base[PATH_MAX];
    int rc, tries;

    o->fd = -1;
    o->fp = NULL;
    o->created = 0;
    o->flags = flags;
    if ((rc = fxl_outfile_check(ctx, path, flags)) != 0)
        return rc;
    snprintf(o->path, sizeof o->path, "%s", path);
    split_path(path, dir, sizeof dir, base, sizeof base);
    remove_stale_parts(dir, base);
    for (tries = 0; tries < 100; tries++) {
        snprintf(o->tmp, sizeof o->tmp, "%.3800s/.%.200s.part-%ld-%u", dir, base, (long)getpid(), serial++);
        o->fd = open(o->tmp, O_WRONLY | O_CREAT | O_EXCL | O_NOFOLLOW | O_CLOEXEC, 0600);
        if (o->fd >= 0 || errno != EEXIST)
            break;
    }
    if (o->fd < 0)
        return fxl_fail(ctx, FXL_EIO, "cannot create a temporary file beside '%s': %s", path,
                        strerror(errno));
    o->created = 1;
    /* The mode is 0600 whatever the umask (open applies the umask only to
     * remove bits, so this is already so; fchmod makes it explicit). */
    fchmod(o->fd, 0600);
    if (flags & FXL_OUT_NO_STDIO) {
        close(o->fd);
        o->fd = -1;
        return 0;
    }
    if (!(o->fp = fdopen(o->fd, "wb"))) {
        rc = fxl_fail(ctx, FXL_EIO, "cannot write '%s': %s", path, strerror(errno));
        fxl_outfile_abort(o);
        return rc;
    }
    return 0;
}

static void sync_dir(const char *path)
{
    char dir[PATH_MAX], base[PATH_MAX];
    int fd;

    if (split_path(path, dir, sizeof dir, base, sizeof base) != 0)
        return;
    if ((fd = open(dir, O_RDONLY | O_DIRECTORY | O_CLOEXEC)) >= 0) {
        fsync(fd);
        close(fd);
    }
}

int fxl_outfile_commit(fxl_outfile *o, fxl_ctx *ctx)
{
    int rc = 0, err = 0, fd;

    if (!o->created)
        return fxl_fail(ctx, FXL_EIO, "internal: output file '%s' was not opened", o->path);
    if (o->fp) {
        if (fflush(o->fp) != 0 || ferror(o->fp))
            err = errno ? errno : EIO;
        if (!err && fsync(fileno(o->fp)) != 0)
            err = errno;
        if (fclose(o->fp) != 0 && !err)
            err = errno ? errno : EIO;
        o->fp = NULL;
        o->fd = -1;
    } else {
        if (o->fd >= 0) {
            if (fsync(o->fd) != 0)
                err = errno;
            if (close(o->fd) != 0 && !err)
                err = errno;
            o->fd = -1;
        } else if ((fd = open(o->tmp, O_RDONLY | O_NOFOLLOW | O_CLOEXEC)) >= 0) {
            if (fsync(fd) != 0)
                err = errno;
            close(fd);
        } else {
            err = errno;
        }
    }
    if (err) {
        rc = fxl_fail(ctx, FXL_EIO, "cannot write '%s': %s", o->path, strerror(err));
        goto cleanup;
    }
    /* Again: the target may have appeared or changed since the first check. */
    if ((rc = fxl_outfile_check(ctx, o->path, o->flags)) != 0)
        goto cleanup;
    if (o->flags & FXL_OUT_FORCE) {
        if (rename(o->tmp, o->path) != 0) {
            rc = fxl_fail(ctx, FXL_EIO, "cannot write '%s': %s", o->path, strerror(errno));
            goto cleanup;
        }
    } else {
        /* link() fails with EEXIST instead of replacing a file that
         * appeared between the check and now. */
        if (link(o->tmp, o->path) != 0) {
            rc = fxl_fail(ctx, errno == EEXIST ? FXL_ECONFLICT : FXL_EIO,
                          "cannot write '%s': %s", o->path, strerror(errno));
            goto cleanup;
        }
        unlink(o->tmp);
    }
    o->created = 0;
    sync_dir(o->path);
cleanup:
    if (rc != 0)
        fxl_outfile_abort(o);
    return rc;
}

void fxl_outfile_abort(fxl_outfile *o)
{
    if (o->fp) {
        fclose(o->fp);
        o->fp = NULL;
        o->fd = -1;
    } else if (o->fd >= 0) {
        close(o->fd);
        o->fd = -1;
    }
    if (o->created) {
        unlink(o->tmp);
        o->created = 0;
    }
}
