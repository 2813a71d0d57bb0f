/* Safe output files: every file fxledger writes (reports, exports, backups,
 * any file named by --out) goes through this helper, so that no command can
 * replace the database, its -wal/-shm, another SQLite file, a device, a
 * directory or a symlink's target with its output (docs/audit.md).
 *
 * Use:
 *     fxl_outfile o = FXL_OUTFILE_INIT;
 *     if ((rc = fxl_outfile_open(&o, ctx, path, force ? FXL_OUT_FORCE : 0)) != 0)
 *         goto cleanup;                      // message in ctx, nothing created
 *     ... write to o.fp (or o.fd; or o.tmp by name, see below) ...
 *     rc = fxl_outfile_commit(&o, ctx);      // flush, fsync, rename onto path
 * cleanup:
 *     fxl_outfile_abort(&o);                 // removes the temporary file if still there
 */
#ifndef FXL_OUTFILE_H
#define FXL_OUTFILE_H

#include <stdio.h>

#include "fxl/fxl.h"

/* Flags. */
#define FXL_OUT_FORCE 1      /* --force: an existing regular, non-SQLite file may be replaced */
#define FXL_OUT_NO_STDIO 2   /* open only the descriptor and close it: the caller reopens o.tmp
                              * by name (SQLite's backup); the temporary file exists, empty, 0600 */

#define FXL_OUTFILE_PATH_MAX 4096

typedef struct fxl_outfile {
    char path[FXL_OUTFILE_PATH_MAX];  /* the target as given */
    char tmp[FXL_OUTFILE_PATH_MAX];   /* the temporary file beside it */
    int fd;                           /* -1 when closed */
    FILE *fp;                         /* stdio stream on fd (NULL with FXL_OUT_NO_STDIO) */
    int flags;
    int created;                      /* the temporary file exists and is ours */
} fxl_outfile;

#define FXL_OUTFILE_INIT {{0}, {0}, -1, NULL, 0, 0}

/* Checks that `path` may be written, without creating anything. Refused
 * (FXL_ECONFLICT, message naming the path and the reason):
 *   - an existing path of any kind unless FXL_OUT_FORCE ("already exists;
 *     give --force to replace it");
 * and even with FXL_OUT_FORCE (also FXL_ECONFLICT):
 *   - the database open in ctx (same file by device and inode, or the same
 *     name), and its -wal, -shm and -journal files, existing or not;
 *   - any file that starts with the SQLite header or the WAL magic;
 *   - a directory, a device, a FIFO, a socket, a symlink (even to a regular
 *     file: lstat, never followed), or any other non-regular file;
 *   - a path whose directory does not exist (FXL_EIO).
 * ctx may be NULL for a check that knows no open database (then only the
 * file checks apply); the message goes to ctx when it is not NULL. */
int fxl_outfile_check(fxl_ctx *ctx, const char *path, int flags);

/* fxl_outfile_check, then removes the temporary files of this target that
 * a killed writer left (".BASE.part-PID-N*" of a process that no longer
 * exists, regular and ours), then creates the temporary file beside the
 * target ("DIR/.BASE.part-PID-N") with O_CREAT|O_EXCL|O_NOFOLLOW, mode 0600
 * (reports and databases hold patient data; docs/security.md says how to share
 * them with a group), and opens o->fp on it for writing unless
 * FXL_OUT_NO_STDIO. On failure nothing is left behind. */
int fxl_outfile_open(fxl_outfile *o, fxl_ctx *ctx, const char *path, int flags);

/* Flushes and fsyncs the temporary file, checks the target again (it may
 * have appeared meanwhile: without FXL_OUT_FORCE the rename never replaces
 * anything, it is done with link()+unlink() so an existing file stays), and
 * renames the temporary file onto the target, then fsyncs the directory. A
 * write error seen on o->fp (a full disk) fails here with FXL_EIO. On
 * failure the temporary file is removed and the target is as it was. */
int fxl_outfile_commit(fxl_outfile *o, fxl_ctx *ctx);

/* Closes and removes the temporary file if it is still there; safe to call
 * always (after commit it does nothing). */
void fxl_outfile_abort(fxl_outfile *o);

/* 1 when the file at `path` (not followed if a symlink) starts with the
 * SQLite database header or a WAL header, 0 otherwise (also when it cannot
 * be read). */
int fxl_outfile_is_sqlite(const char *path);

#endif
