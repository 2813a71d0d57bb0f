/* Identities: passwords, lockout, sessions and electronic signatures.
 *
 * Independent of any front end: the command line keeps its session token in
 * a 0600 file, the web console in a cookie; both hand the token to
 * fxl_session_check() on each request and describe the client with an
 * fxl_client (OS account and host, or the client's network address) for the
 * audit rows. Decisions and sources: docs/security.md.
 *
 * Passwords are hashed with Argon2id (libsodium crypto_pwhash_str, at least
 * libsodium's interactive limits); a password is never stored, logged or
 * audited, only its hash. Callers keep passwords in memory for as short a
 * time as they can and wipe them (sodium_memzero) afterwards.
 *
 * Mutable authentication state (password hashes, failure counters, lock
 * times, sessions, sealed signing keys) lives in tables of its own, not in
 * `users`; the public signing keys are append-only and their creation is an
 * audit row, so the audit chain covers them. */
#ifndef FXL_AUTH_H
#define FXL_AUTH_H

#include <stddef.h>
#include <stdint.h>

#include "fxl/fxl.h"

/* Password policy (NIST SP 800-63B section 5.1.1.2: at least 8 characters
 * when chosen by the user, at least 64 accepted; we ask 12 to 128, counted
 * in UTF-8 characters). The password must not contain the login
 * (case-insensitive) and must be valid UTF-8 without control characters. */
#define FXL_PASSWORD_MIN 12
#define FXL_PASSWORD_MAX 128
/* Bytes a password buffer needs: 128 characters of up to 4 bytes, plus NUL. */
#define FXL_PASSWORD_BUF (FXL_PASSWORD_MAX * 4 + 1)

/* A session token as text: 64 lowercase hex digits (256 random bits). The
 * database keeps only its SHA-256. */
#define FXL_TOKEN_HEX_LEN 64
/* A one-time password handed out by 'user add' and 'user reset': 20
 * characters from an unambiguous alphabet (about 100 random bits). */
#define FXL_OTP_LEN 20

/* Who is at the other end, for the audit rows of logins, failures, locks
 * and sessions. Any member may be NULL. */
typedef struct fxl_client {
    const char *kind;        /* "cli" or "web" */
    const char *os_account;  /* command line: the OS account running fxledger */
    const char *host;        /* command line: the host name */
    const char *address;     /* web: the client's network address */
} fxl_client;

/* The authenticated user. */
typedef struct fxl_identity {
    int64_t user_id;
    char login[65];
    char full_name[201];     /* the printed name on signatures */
    fxl_role role;
} fxl_identity;

/* A live session as fxl_session_check() found it. */
typedef struct fxl_session_info {
    fxl_identity user;
    int64_t session_id;
    char started_at[FXL_TIME_LEN];
    char last_seen_at[FXL_TIME_LEN];
    char idle_expires_at[FXL_TIME_LEN];   /* last_seen_at + auth_idle_minutes */
    char expires_at[FXL_TIME_LEN];        /* started_at + auth_session_hours */
} fxl_session_info;

/* Lockout and password state of one account (admin, or the user themself). */
typedef struct fxl_auth_state {
    char login[65];
    int has_password;                     /* 0: no password set (cannot log in) */
    int must_change;                      /* one-time password: change at next login */
    int recent_failures;                  /* failed attempts inside the window */
    int locked;                           /* locked now */
    char locked_until[FXL_TIME_LEN];      /* "" when not locked */
    char last_login_at[FXL_TIME_LEN];     /* "" when never */
    int has_signing_key;                  /* a key pair exists for signing */
} fxl_auth_state;

/* Settings (docs/settings.md), read at each call; defaults in brackets:
 *   auth_idle_minutes [15]         a session ends after this long unused (1 to 240)
 *   auth_session_hours [12]        and at the latest this long after login (1 to 24)
 *   auth_max_failures [5]          failed attempts inside the window that lock (3 to 20)
 *   auth_failure_window_minutes [15]
 *   auth_lock_minutes [30]         how long a lock lasts unless an admin unlocks (1 to 10080)
 */

/* Checks a candidate password against the policy above; FXL_EINVAL with a
 * message that names the rule (never the password). */
int fxl_password_policy_check(fxl_ctx *ctx, const char *login, const char *password);

/* ---- department set-up and accounts ------------------------------------- */

/* fxl_init_department() (fxl/users.h) plus the first admin's password and
 * signing key pair, in the same transaction. The password must meet the
 * policy (checked before anything is written). */
int fxl_auth_init(fxl_ctx *ctx, const char *department, const char *timezone,
                  const char *admin_login, const char *admin_full_name,
                  const char *admin_password);

/* fxl_user_add() (admin only) plus a one-time password written to otp_out,
 * which the new user must change at first login. One transaction. */
int fxl_auth_user_add(fxl_ctx *ctx, int64_t *out_id, const char *login, const char *full_name,
                      fxl_role role, char otp_out[FXL_OTP_LEN + 1]);

/* ---- logging in ----------------------------------------------------------- */

/* Verifies login and password and opens a session. Unknown logins cost the
 * same Argon2id verification as a wrong password and get the same message
 * ("login failed: unknown login or wrong password"); comparisons are
 * constant-time. Every attempt is an audit row with the client (never the
 * password): 'login' on success, 'login_failed' on failure, 'lock' when the
 * failure locks the account. Returns:
 *   0             session opened: token_out (FXL_TOKEN_HEX_LEN + 1 bytes) and
 *                 *out (may be NULL) filled; the acting user is set on ctx
 *   FXL_EAUTH     unknown login, wrong password, deactivated, or locked
 *   FXL_EEXPIRED  the password is a one-time password (or was reset) and
 *                 new_password was NULL: call again with new_password, which
 *                 then replaces it (policy checked) before the session opens;
 *                 a new signing key pair is made if none could be kept
 * A password hashed with weaker parameters than the current ones is rehashed
 * (crypto_pwhash_str_needs_rehash). */
int fxl_auth_login(fxl_ctx *ctx, const char *login, const char *password,
                   const char *new_password, const fxl_client *client,
                   char *token_out, fxl_session_info *out);

/* Authenticates for a single action without opening a session (a command
 * run without 'fxledger login'): the same checks, counting and audit rows as
 * fxl_auth_login, then sets the acting user on ctx. */
int fxl_auth_password(fxl_ctx *ctx, const char *login, const char *password,
                      const fxl_client *client, fxl_identity *out);

/* ---- sessions ------------------------------------------------------------- */

/* Looks the token up (by its SHA-256), checks that the session was not
 * ended, is inside its idle and absolute limits and that its user is active
 * and unlocked, then sets the acting user on ctx and fills *out (may be
 * NULL). Writes nothing, so it works on a read-only context. FXL_EAUTH when
 * the token is unknown, ended or expired (message says which). */
int fxl_session_check(fxl_ctx *ctx, const char *token, fxl_session_info *out);

/* Records activity on a live session: sets last_seen_at to now. Writes only
 * when the stored time is at least a minute old (so a read-only command and
 * a command run at the same second leave the file unchanged); needs a
 * read-write context. FXL_EAUTH when the session is no longer live. */
int fxl_session_touch(fxl_ctx *ctx, const char *token);

/* For a one-shot command that may write: after fxl_session_check() on this
 * read-write context, the activity is recorded by the command's own next
 * fxl_commit(), in its transaction (one commit, one disk flush, instead of a
 * second transaction after it); fxl_session_touch() then writes nothing
 * more. A command that commits nothing is touched by fxl_session_touch() as
 * before. fxl_clear_user() disarms it. */
void fxl_session_touch_at_commit(fxl_ctx *ctx);

/* Ends the session (logout); audited as 'logout'. Ending an unknown or
 * already ended token is FXL_EAUTH. */
int fxl_session_end(fxl_ctx *ctx, const char *token, const fxl_client *client);

/* ---- passwords and locks -------------------------------------------------- */

/* Changes the acting user's own password: old_password must verify (counted
 * like a login attempt), new_password must meet the policy. The signing key
 * is re-sealed under the new password (same key pair). Ends none of the
 * user's sessions. Audited as 'password_change'. */
int fxl_auth_change_password(fxl_ctx *ctx, const char *old_password, const char *new_password,
                             const fxl_client *client);

/* Admin only: replaces login's password with a one-time password (otp_out),
 * forces a change at next login, ends that user's sessions and clears a
 * lock. The old sealed signing key cannot be opened without the old
 * password, so a new key pair is made at the next password change (the old
 * public key stays, so older signatures still verify). Audited as
 * 'password_reset'. An admin cannot reset their own password. */
int fxl_auth_reset_password(fxl_ctx *ctx, const char *login, char otp_out[FXL_OTP_LEN + 1],
                            const fxl_client *client);

/* Admin only: clears login's lock and failure count. Audited as 'unlock'.
 * FXL_ECONFLICT when the account is not locked. */
int fxl_auth_unlock(fxl_ctx *ctx, const char *login, const fxl_client *client);

/* Lockout and password state of login: admins for anyone, others only for
 * themselves (FXL_EPERM). */
int fxl_auth_state_get(fxl_ctx *ctx, const char *login, fxl_auth_state *out);

/* ---- electronic signatures ------------------------------------------------ */

/* Signing acts: closing and reopening a review item, putting levels in
 * force, confirming a calibration, loading a correction table or beam data,
 * importing or replacing a plan, deactivating a user. The store functions
 * doing these refuse (FXL_EPERM, nothing written) unless the acting user has
 * re-entered their password for this act with fxl_sign_begin(); each then
 * writes one signature row per signed row, in the same transaction:
 * signer's login and printed name (full name), time, meaning (e.g. "review
 * closed: set-up error", "levels in force", "calibration confirmed") and an
 * Ed25519 signature (crypto_sign_detached) over the signed row's canonical
 * content (docs/security.md) made with the signer's own key. The secret key
 * is stored only sealed (crypto_secretbox) by a key derived from the
 * password (crypto_pwhash Argon2id); one Argon2id run opens it and so proves
 * the password. Two components, login and password, at each signing (21 CFR
 * Part 11 sections 11.200(a)(1), 11.300). */

/* Re-authenticates the acting user (set by a session or fxl_auth_password)
 * for a signing act: derives the key from password and opens the sealed
 * signing key into memory held by ctx (sodium_malloc, locked). A wrong
 * password is FXL_EAUTH, counted and audited like a failed login (and can
 * lock the account). */
int fxl_sign_begin(fxl_ctx *ctx, const char *password, const fxl_client *client);

/* Wipes and frees the opened signing key; call right after the signing act
 * (also after a failure). fxl_close() calls it too. Accepts a ctx with no
 * key open. */
void fxl_sign_end(fxl_ctx *ctx);

/* 1 when fxl_sign_begin() succeeded and fxl_sign_end() was not called yet. */
int fxl_sign_ready(const fxl_ctx *ctx);

/* One signature as stored. */
typedef struct fxl_signature {
    int64_t id;
    char entity[32];                 /* table of the signed row, e.g. "review_events" */
    int64_t entity_id;               /* its id */
    char login[65];                  /* signer */
    char printed_name[201];          /* signer's full name at signing */
    char signed_at[FXL_TIME_LEN];
    char meaning[256];
} fxl_signature;

/* Signatures of one row (entity_id > 0) or of every row of an entity
 * (entity_id == 0), oldest first. *out is a heap array (free()). */
int fxl_signature_list(fxl_ctx *ctx, const char *entity, int64_t entity_id,
                       fxl_signature **out, size_t *n);

/* Result of checking every signature (one check of 'fxledger verify'). */
typedef struct fxl_signature_report {
    int64_t checked;                 /* signatures checked */
    int64_t bad;                     /* failures found */
    char first_bad[300];             /* "" or what failed, naming table and row */
} fxl_signature_report;

/* Checks every signature against its signer's public key over the signed
 * row's current canonical content, that each public key was recorded by the
 * audit chain, and that every row that must be signed (e.g. each close and
 * reopen event of the review queue) carries a valid signature. 0 when all
 * hold, else FXL_ECONFLICT with the first failure in the message and *out. */
int fxl_signature_verify(fxl_ctx *ctx, fxl_signature_report *out);

#endif
