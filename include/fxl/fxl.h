/* fxledger library: the context handle, error codes, users and roles,
 * transactions and the clock. Every other public header builds on this one. */
#ifndef FXL_FXL_H
#define FXL_FXL_H

#include <stddef.h>
#include <stdint.h>

/* Return codes. Library functions return 0 or one of these negatives; the
 * message for the last failure is in fxl_errmsg(ctx). */
enum {
    FXL_OK = 0,
    FXL_ENOTFOUND = -1,  /* a named record does not exist */
    FXL_EINVAL = -2,     /* invalid input: message names the field and range */
    FXL_EDB = -3,        /* SQLite failure */
    FXL_EIO = -4,        /* file could not be read or written */
    FXL_ECONFLICT = -5,  /* already exists (duplicate fraction, serial, ...) */
    FXL_EPERM = -6,      /* the user's role may not do this */
    FXL_EBUSY = -7,      /* database locked by another process past the timeout */
    FXL_EVERSION = -8,   /* not an fxledger database, or a newer schema */
    FXL_ERANGE = -9,     /* a value outside a commissioned table (no extrapolation) */
    FXL_EAUTH = -10,     /* not authenticated: no live session, wrong password, locked */
    FXL_EEXPIRED = -11   /* the password must be changed before logging in (fxl/auth.h) */
};

/* Roles, usable as a bit mask in fxl_require_role(). */
typedef enum {
    FXL_ROLE_THERAPIST = 1,
    FXL_ROLE_PHYSICIST = 2,
    FXL_ROLE_AUDITOR = 4,
    FXL_ROLE_ADMIN = 8
} fxl_role;

#define FXL_ROLES_PHYSICS (FXL_ROLE_PHYSICIST | FXL_ROLE_ADMIN)
#define FXL_ROLES_CLINICAL (FXL_ROLE_THERAPIST | FXL_ROLE_PHYSICIST | FXL_ROLE_ADMIN)
#define FXL_ROLES_ANY (FXL_ROLE_THERAPIST | FXL_ROLE_PHYSICIST | FXL_ROLE_AUDITOR | FXL_ROLE_ADMIN)

/* PRAGMA application_id of our files: 'FXLG'. */
#define FXL_APPLICATION_ID 0x46584C47

/* Length of an ISO 8601 UTC timestamp 'YYYY-MM-DDTHH:MM:SSZ' plus NUL. */
#define FXL_TIME_LEN 21

typedef struct fxl_ctx fxl_ctx;

/* Process-wide settings of the store, before the first fxl_open. With
 * one_thread set, the process opens and uses every connection from a single
 * thread (each command but 'serve'): the storage engine then takes no locks
 * of its own between threads. Always: it keeps no memory statistics (nothing
 * reads them). Called again, or after a database was opened, it changes
 * nothing. */
void fxl_store_configure(int one_thread);

/* fxl_open flags */
#define FXL_OPEN_CREATE 1     /* create the file if missing (fxledger init) */
#define FXL_OPEN_READONLY 2   /* reports and listings: never write */

/* Opens (and with FXL_OPEN_CREATE creates) the database at `path`, sets
 * foreign_keys, WAL, synchronous=FULL and the busy timeout, checks that the
 * file is ours and not of a newer schema, and applies pending migrations
 * (not in read-only mode). On failure *out is NULL unless a context could be
 * made to carry the message; always call fxl_close(*out). */
int fxl_open(fxl_ctx **out, const char *path, int flags);

/* Closes the database and frees the context; accepts NULL. */
void fxl_close(fxl_ctx *ctx);

/* Message of the last failure on this context (never NULL). */
const char *fxl_errmsg(const fxl_ctx *ctx);

/* Sets the message for a failure and returns `code`, for one-line returns:
 * `return fxl_fail(ctx, FXL_EINVAL, "reading '%s' must be > 0", s);` */
int fxl_fail(fxl_ctx *ctx, int code, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

/* Schema version of the open database (PRAGMA user_version). */
int fxl_schema_version(fxl_ctx *ctx);

/* Rows this connection has inserted, updated or deleted since it was opened
 * (sqlite3_total_changes64); 0 for NULL. The program compares it before and
 * after a command to know whether the command saved anything. */
long long fxl_total_changes(fxl_ctx *ctx);
/* Highest schema version this build knows. */
int fxl_schema_latest(void);

/* Acting user. fxl_set_user looks the login up in `users`; an unknown or
 * inactive login is FXL_ENOTFOUND. Writes need a user; the audit log records
 * the login. */
int fxl_set_user(fxl_ctx *ctx, const char *login);
const char *fxl_user_login(const fxl_ctx *ctx);  /* NULL if none set */
int64_t fxl_user_id(const fxl_ctx *ctx);         /* 0 if none set */
fxl_role fxl_user_role(const fxl_ctx *ctx);      /* 0 if none set */
const char *fxl_role_name(fxl_role role);        /* "therapist", ... */
int fxl_role_parse(fxl_role *out, const char *name);

/* FXL_EPERM with a message naming the action unless the acting user's role is
 * in `roles_mask`. */
int fxl_require_role(fxl_ctx *ctx, unsigned roles_mask, const char *action);

/* One write transaction per user action (BEGIN IMMEDIATE ... COMMIT). */
int fxl_begin(fxl_ctx *ctx);
int fxl_commit(fxl_ctx *ctx);
void fxl_rollback(fxl_ctx *ctx);  /* safe to call when no transaction is open */

/* BEGIN DEFERRED: reads until fxl_rollback() or fxl_commit() see one
 * snapshot of the database, and pay for one read transaction instead of one
 * per statement. Write functions must not be called inside. */
int fxl_begin_read(fxl_ctx *ctx);

/* The clock: current UTC time as 'YYYY-MM-DDTHH:MM:SSZ' into buf (size >=
 * FXL_TIME_LEN). Only in the test build (fxledger-testclock, the unit tests)
 * does the environment variable FXLEDGER_NOW, when set to such a timestamp,
 * fix the clock; the program users run ignores it. */
void fxl_now(const fxl_ctx *ctx, char *buf);

/* Provided by the executable, not by the library (src/clock/clock.c, built
 * once as the system clock and once with FXL_TEST_CLOCK): writes the fixed
 * test time into buf and returns 1, or returns 0 to use the system clock.
 * fxl_clock_is_test() is 1 only in a test build. */
int fxl_clock_fixed(char buf[FXL_TIME_LEN]);
int fxl_clock_is_test(void);

/* Validates a date or time typed by a person or found in a file and writes
 * it in the stored form 'YYYY-MM-DDTHH:MM:SSZ'. Accepts 'YYYY-MM-DD' (as
 * 00:00:00, or 23:59:59 when end_of_day is set, for "valid until" dates),
 * 'YYYY-MM-DDTHH:MM[:SS]' with an optional 'Z'. All times are UTC. Returns
 * FXL_EINVAL for anything else or an impossible date (2026-02-30). */
int fxl_time_normalize(char out[FXL_TIME_LEN], const char *in, int end_of_day);

/* Adds whole days to a stored timestamp (negative to subtract). FXL_EINVAL
 * for an unreadable timestamp or a result outside the years 1900 to 2999. */
int fxl_time_add_days(char out[FXL_TIME_LEN], const char *in, int days);

/* Settings (key/value). fxl_setting_get copies into buf; FXL_ENOTFOUND if
 * unset. fxl_setting_set writes and audits (admin or physicist). */
int fxl_setting_get(fxl_ctx *ctx, const char *key, char *buf, size_t bufsize);
int fxl_setting_set(fxl_ctx *ctx, const char *key, const char *value);

#endif
