/* Passwords, lockout and sessions (fxl/auth.h). Decisions: docs/security.md.
 * Argon2id through libsodium; no password is ever written anywhere but as a
 * hash, nor put into a message or an audit row. */
#define _DEFAULT_SOURCE 1 /* timegm */
#include <sodium.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "fxl/number.h"
#include "fxl/audit.h"
#include "fxl/auth.h"
#include "fxl/text.h"
#include "store/audit.h"
#include "store/auth_int.h"
#include "store/stmt.h"
#include "store/users_int.h"

/* Argon2id costs of the program users run: libsodium's interactive limits
 * (t=2, m=64 MiB), above the OWASP Password Storage Cheat Sheet minimum
 * (m=19 MiB, t=2). Never lower these. */
#define PW_OPSLIMIT crypto_pwhash_OPSLIMIT_INTERACTIVE
#define PW_MEMLIMIT crypto_pwhash_MEMLIMIT_INTERACTIVE

/* A hash of a random password nobody knows, with the same parameters: an
 * unknown login is verified against it, so it costs the same time as a
 * wrong password (no user enumeration by timing). */
static const char DUMMY_HASH[] =
    "$argon2id$v=19$m=65536,t=2,p=1$3wvPz2mxA0XVqfnhewN4Dg$9kNr61auEXNkA2mW9EFob+qhCiHzQAgRKrbQ4SutK58";

static const char FAILED_MSG[] = "login failed: unknown login or wrong password";

/* ---- time ----------------------------------------------------------------- */

static time_t iso_to_time(const char *iso)
{
    struct tm tm;

    memset(&tm, 0, sizeof tm);
    if (!iso || sscanf(iso, "%4d-%2d-%2dT%2d:%2d:%2dZ", &tm.tm_year, &tm.tm_mon, &tm.tm_mday,
                       &tm.tm_hour, &tm.tm_min, &tm.tm_sec) != 6)
        return 0;
    tm.tm_year -= 1900;
    tm.tm_mon -= 1;
    return timegm(&tm);
}

static void time_to_iso(char out[FXL_TIME_LEN], time_t t)
{
    struct tm tm;

    gmtime_r(&t, &tm);
    strftime(out, FXL_TIME_LEN, "%Y-%m-%dT%H:%M:%SZ", &tm);
}

static long setting_long(fxl_ctx *ctx, const char *key, long fallback, long lo, long hi)
{
    char buf[64], saved[sizeof ctx->errmsg];
    char *end = NULL;
    long v;

    /* An unset key is the default; it must not replace a pending message. */
    memcpy(saved, ctx->errmsg, sizeof saved);
    if (fxl_setting_get(ctx, key, buf, sizeof buf) != 0) {
        memcpy(ctx->errmsg, saved, sizeof saved);
        return fallback;
    }
    {
        double d = 0;
        (void)end;
        if (fxl_number_in_range(&d, buf, FXL_NUM_WHOLE, (double)lo, (double)hi) != FXL_NUM_OK)
            return fallback;
        v = (long)d;
    }
    return v;
}

/* ---- policy ----------------------------------------------------------------- */

int fxl_password_policy_check(fxl_ctx *ctx, const char *login, const char *password)
{
    size_t len = password ? strlen(password) : 0, chars = 0, i;
    char lower_pw[FXL_PASSWORD_BUF], lower_login[65];
    int all_same = 1;

    if (!password || fxl_utf8_invalid_at(password, len) >= 0 || fxl_text_control_at(password) >= 0)
        return fxl_fail(ctx, FXL_EINVAL, "the password must be UTF-8 text without control characters");
    for (i = 0; i < len; i++)
        if (((unsigned char)password[i] & 0xc0) != 0x80)
            chars++;
    if (chars < FXL_PASSWORD_MIN || chars > FXL_PASSWORD_MAX)
        return fxl_fail(ctx, FXL_EINVAL, "the password must be %d to %d characters long (it has %zu)",
                        FXL_PASSWORD_MIN, FXL_PASSWORD_MAX, chars);
    for (i = 1; i < len; i++)
        if (password[i] != password[0])
            all_same = 0;
    if (all_same)
        return fxl_fail(ctx, FXL_EINVAL, "the password must not be one character repeated");
    if (login && *login && strlen(login) < sizeof lower_login) {
        for (i = 0; i <= len; i++)
            lower_pw[i] = (password[i] >= 'A' && password[i] <= 'Z') ? (char)(password[i] + 32) : password[i];
        for (i = 0; i <= strlen(login); i++)
            lower_login[i] = (login[i] >= 'A' && login[i] <= 'Z') ? (char)(login[i] + 32) : login[i];
        if (strstr(lower_pw, lower_login))
            return fxl_fail(ctx, FXL_EINVAL, "the password must not contain the login '%s'", login);
        sodium_memzero(lower_pw, sizeof lower_pw);
    }
    return 0;
}

/* ---- secrets made before a transaction --------------------------------------- */

/* Everything a password change writes, computed before the transaction (the
 * Argon2id runs take a noticeable fraction of a second). */
typedef struct pw_material {
    char hash[crypto_pwhash_STRBYTES];
    int new_key;                                    /* 1: a new key pair */
    char public_hex[crypto_sign_PUBLICKEYBYTES * 2 + 1];
    char salt_hex[crypto_pwhash_SALTBYTES * 2 + 1];
    char nonce_hex[crypto_secretbox_NONCEBYTES * 2 + 1];
    char sealed_hex[(crypto_secretbox_MACBYTES + crypto_sign_SECRETKEYBYTES) * 2 + 1];
    int must_change;
} pw_material;

static int derive_key(fxl_ctx *ctx, unsigned char key[crypto_secretbox_KEYBYTES],
                      const char *password, const unsigned char *salt,
                      unsigned long long ops, size_t mem)
{
    if (crypto_pwhash(key, crypto_secretbox_KEYBYTES, password, strlen(password), salt, ops, mem,
                      crypto_pwhash_ALG_ARGON2ID13) != 0)
        return fxl_fail(ctx, FXL_EIO, "out of memory deriving the signing key");
    return 0;
}

/* Seals sk under password into m (salt, nonce, sealed). */
static int seal_secret(fxl_ctx *ctx, pw_material *m, const unsigned char *sk, const char *password)
{
    unsigned char salt[crypto_pwhash_SALTBYTES], nonce[crypto_secretbox_NONCEBYTES];
    unsigned char sealed[crypto_secretbox_MACBYTES + crypto_sign_SECRETKEYBYTES];
    unsigned char *key = sodium_malloc(crypto_secretbox_KEYBYTES);
    int rc;

    if (!key)
        return fxl_fail(ctx, FXL_EIO, "out of memory sealing the signing key");
    randombytes_buf(salt, sizeof salt);
    randombytes_buf(nonce, sizeof nonce);
    if ((rc = derive_key(ctx, key, password, salt, PW_OPSLIMIT, PW_MEMLIMIT)) == 0) {
        crypto_secretbox_easy(sealed, sk, crypto_sign_SECRETKEYBYTES, nonce, key);
        sodium_bin2hex(m->salt_hex, sizeof m->salt_hex, salt, sizeof salt);
        sodium_bin2hex(m->nonce_hex, sizeof m->nonce_hex, nonce, sizeof nonce);
        sodium_bin2hex(m->sealed_hex, sizeof m->sealed_hex, sealed, sizeof sealed);
    }
    sodium_free(key);
    return rc;
}

/* The sealed secret of a user as stored. */
typedef struct sealed_row {
    int found;
    int64_t key_id;
    unsigned char salt[crypto_pwhash_SALTBYTES];
    unsigned char nonce[crypto_secretbox_NONCEBYTES];
    unsigned char sealed[crypto_secretbox_MACBYTES + crypto_sign_SECRETKEYBYTES];
    unsigned long long ops;
    size_t mem;
} sealed_row;

static int load_sealed(fxl_ctx *ctx, int64_t user_id, sealed_row *r)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    memset(r, 0, sizeof *r);
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT key_id, salt, nonce, sealed, opslimit, memlimit "
                               "FROM signing_secrets WHERE user_id = :u")) != 0)
        return rc;
    fxl_stmt_bind_int(&s, ":u", user_id);
    if ((rc = fxl_stmt_step(&s)) == 1) {
        size_t a = 0, b = 0, c = 0;
        r->key_id = fxl_stmt_int(&s, 0);
        r->ops = (unsigned long long)fxl_stmt_int(&s, 4);
        r->mem = (size_t)fxl_stmt_int(&s, 5);
        if (sodium_hex2bin(r->salt, sizeof r->salt, fxl_stmt_text(&s, 1), strlen(fxl_stmt_text(&s, 1)),
                           NULL, &a, NULL) == 0 && a == sizeof r->salt &&
            sodium_hex2bin(r->nonce, sizeof r->nonce, fxl_stmt_text(&s, 2), strlen(fxl_stmt_text(&s, 2)),
                           NULL, &b, NULL) == 0 && b == sizeof r->nonce &&
            sodium_hex2bin(r->sealed, sizeof r->sealed, fxl_stmt_text(&s, 3),
                           strlen(fxl_stmt_text(&s, 3)), NULL, &c, NULL) == 0 && c == sizeof r->sealed &&
            r->ops >= crypto_pwhash_OPSLIMIT_MIN && r->mem >= crypto_pwhash_MEMLIMIT_MIN)
            r->found = 1;
        rc = 0;
    }
    fxl_stmt_finalize(&s);
    return rc < 0 ? rc : 0;
}

/* Opens the sealed secret with password into sk (sodium_malloc'd by the
 * caller). 0, or FXL_EAUTH when the password does not open it. */
static int open_sealed(fxl_ctx *ctx, const sealed_row *r, const char *password, unsigned char *sk)
{
    unsigned char *key = sodium_malloc(crypto_secretbox_KEYBYTES);
    int rc;

    if (!key)
        return fxl_fail(ctx, FXL_EIO, "out of memory opening the signing key");
    rc = derive_key(ctx, key, password, r->salt, r->ops, r->mem);
    if (rc == 0 && crypto_secretbox_open_easy(sk, r->sealed, sizeof r->sealed, r->nonce, key) != 0)
        rc = FXL_EAUTH;
    sodium_free(key);
    return rc;
}

/* Hash and sealed key for a new password. old_sk: the current secret key
 * to re-seal, or NULL to make a new key pair. */
static int make_material(fxl_ctx *ctx, pw_material *m, const char *password,
                         const unsigned char *old_sk, int must_change)
{
    unsigned char pk[crypto_sign_PUBLICKEYBYTES];
    unsigned char *sk = NULL;
    int rc = 0;

    memset(m, 0, sizeof *m);
    m->must_change = must_change;
    if (crypto_pwhash_str(m->hash, password, strlen(password), PW_OPSLIMIT, PW_MEMLIMIT) != 0)
        return fxl_fail(ctx, FXL_EIO, "out of memory hashing the password");
    if (must_change)
        return 0;   /* a one-time password seals no key: the user's own password will */
    if (old_sk)
        return seal_secret(ctx, m, old_sk, password);
    if (!(sk = sodium_malloc(crypto_sign_SECRETKEYBYTES)))
        return fxl_fail(ctx, FXL_EIO, "out of memory making a signing key");
    crypto_sign_keypair(pk, sk);
    m->new_key = 1;
    sodium_bin2hex(m->public_hex, sizeof m->public_hex, pk, sizeof pk);
    rc = seal_secret(ctx, m, sk, password);
    sodium_free(sk);
    return rc;
}

static int exec_user(fxl_ctx *ctx, const char *sql, int64_t user_id, const char *now)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc = fxl_stmt_prepare(&s, ctx, sql);

    if (rc == 0) {
        fxl_stmt_bind_int(&s, ":u", user_id);
        if (now)
            fxl_stmt_bind_text(&s, ":now", now);
        rc = fxl_stmt_exec(&s);
    }
    fxl_stmt_finalize(&s);
    return rc;
}

/* Writes m for user_id inside the caller's transaction. */
static int store_material(fxl_ctx *ctx, int64_t user_id, const char *login, const pw_material *m)
{
    fxl_stmt s = FXL_STMT_INIT;
    char now[FXL_TIME_LEN];
    cJSON *audit = NULL;
    int64_t key_id = 0;
    int rc;

    fxl_now(ctx, now);
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "INSERT INTO auth_passwords (user_id, hash, must_change, changed_at) "
                               "VALUES (:u, :h, :m, :now) ON CONFLICT (user_id) DO UPDATE SET "
                               "hash = excluded.hash, must_change = excluded.must_change, "
                               "changed_at = excluded.changed_at")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":u", user_id);
    fxl_stmt_bind_text(&s, ":h", m->hash);
    fxl_stmt_bind_int(&s, ":m", m->must_change);
    fxl_stmt_bind_text(&s, ":now", now);
    if ((rc = fxl_stmt_exec(&s)) != 0)
        goto cleanup;
    fxl_stmt_finalize(&s);
    if (m->must_change || !m->salt_hex[0]) {
        rc = 0;
        goto cleanup;
    }
    if (m->new_key) {
        if ((rc = fxl_stmt_prepare(&s, ctx,
                                   "INSERT INTO signing_keys (user_id, public_key, created_at) "
                                   "VALUES (:u, :pk, :now)")) != 0)
            goto cleanup;
        fxl_stmt_bind_int(&s, ":u", user_id);
        fxl_stmt_bind_text(&s, ":pk", m->public_hex);
        fxl_stmt_bind_text(&s, ":now", now);
        if ((rc = fxl_stmt_exec(&s)) != 0)
            goto cleanup;
        fxl_stmt_finalize(&s);
        key_id = sqlite3_last_insert_rowid(ctx->db);
        audit = cJSON_CreateObject();
        cJSON_AddStringToObject(audit, "login", login);
        cJSON_AddNumberToObject(audit, "user_id", (double)user_id);
        cJSON_AddStringToObject(audit, "public_key", m->public_hex);
        cJSON_AddStringToObject(audit, "algorithm", "Ed25519");
        if ((rc = fxl_audit_append(ctx, "create", "signing_keys", key_id, audit)) != 0)
            goto cleanup;
        if ((rc = fxl_stmt_prepare(&s, ctx,
                                   "INSERT INTO signing_secrets (user_id, key_id, salt, nonce, sealed, "
                                   "opslimit, memlimit) VALUES (:u, :k, :salt, :nonce, :sealed, :ops, :mem) "
                                   "ON CONFLICT (user_id) DO UPDATE SET key_id = excluded.key_id, "
                                   "salt = excluded.salt, nonce = excluded.nonce, sealed = excluded.sealed, "
                                   "opslimit = excluded.opslimit, memlimit = excluded.memlimit")) != 0)
            goto cleanup;
        fxl_stmt_bind_int(&s, ":k", key_id);
    } else {
        if ((rc = fxl_stmt_prepare(&s, ctx,
                                   "UPDATE signing_secrets SET salt = :salt, nonce = :nonce, "
                                   "sealed = :sealed, opslimit = :ops, memlimit = :mem WHERE user_id = :u")) != 0)
            goto cleanup;
    }
    fxl_stmt_bind_int(&s, ":u", user_id);
    fxl_stmt_bind_text(&s, ":salt", m->salt_hex);
    fxl_stmt_bind_text(&s, ":nonce", m->nonce_hex);
    fxl_stmt_bind_text(&s, ":sealed", m->sealed_hex);
    fxl_stmt_bind_int(&s, ":ops", (int64_t)PW_OPSLIMIT);
    fxl_stmt_bind_int(&s, ":mem", (int64_t)PW_MEMLIMIT);
    rc = fxl_stmt_exec(&s);
cleanup:
    fxl_stmt_finalize(&s);
    cJSON_Delete(audit);
    return rc;
}

static void client_json(cJSON *o, const fxl_client *c)
{
    if (!c)
        return;
    if (c->kind)
        cJSON_AddStringToObject(o, "client", c->kind);
    if (c->os_account)
        cJSON_AddStringToObject(o, "os_account", c->os_account);
    if (c->host)
        cJSON_AddStringToObject(o, "host", c->host);
    if (c->address)
        cJSON_AddStringToObject(o, "address", c->address);
}

/* ---- set-up and accounts ---------------------------------------------------- */

typedef struct init_arg {
    const pw_material *m;
    const char *login;
} init_arg;

static int material_hook(fxl_ctx *ctx, int64_t user_id, void *arg)
{
    const init_arg *a = arg;
    return store_material(ctx, user_id, a->login, a->m);
}

int fxl_auth_init(fxl_ctx *ctx, const char *department, const char *timezone,
                  const char *admin_login, const char *admin_full_name,
                  const char *admin_password)
{
    pw_material *m = NULL;
    init_arg a;
    int rc;

    if (sodium_init() < 0)
        return fxl_fail(ctx, FXL_EIO, "cannot initialise libsodium");
    if ((rc = fxl_password_policy_check(ctx, admin_login, admin_password)) != 0)
        return rc;
    if (!(m = sodium_malloc(sizeof *m)))
        return fxl_fail(ctx, FXL_EIO, "out of memory");
    if ((rc = make_material(ctx, m, admin_password, NULL, 0)) == 0) {
        a.m = m;
        a.login = admin_login;
        rc = fxl_init_department_hook(ctx, department, timezone, admin_login, admin_full_name,
                                      material_hook, &a);
    }
    sodium_free(m);
    return rc;
}

static void make_otp(char out[FXL_OTP_LEN + 1])
{
    /* No 0/o, 1/l/i: read aloud or copied by hand without confusion. */
    static const char alphabet[] = "abcdefghjkmnpqrstuvwxyz23456789";
    int i;

    for (i = 0; i < FXL_OTP_LEN; i++)
        out[i] = alphabet[randombytes_uniform((uint32_t)(sizeof alphabet - 1))];
    out[FXL_OTP_LEN] = '\0';
}

int fxl_auth_user_add(fxl_ctx *ctx, int64_t *out_id, const char *login, const char *full_name,
                      fxl_role role, char otp_out[FXL_OTP_LEN + 1])
{
    pw_material *m = NULL;
    char otp[FXL_OTP_LEN + 1];
    init_arg a;
    int rc;

    if (sodium_init() < 0)
        return fxl_fail(ctx, FXL_EIO, "cannot initialise libsodium");
    if ((rc = fxl_require_role(ctx, FXL_ROLE_ADMIN, "adding a user")) != 0)
        return rc;
    if (!(m = sodium_malloc(sizeof *m)))
        return fxl_fail(ctx, FXL_EIO, "out of memory");
    make_otp(otp);
    if ((rc = make_material(ctx, m, otp, NULL, 1)) == 0) {
        a.m = m;
        a.login = login;
        rc = fxl_user_add_hook(ctx, out_id, login, full_name, role, material_hook, &a);
    }
    if (rc == 0)
        memcpy(otp_out, otp, sizeof otp);
    sodium_memzero(otp, sizeof otp);
    sodium_free(m);
    return rc;
}

/* ---- the account behind a login ------------------------------------------------ */

typedef struct account {
    int found;
    int64_t id;
    char login[65];
    char full_name[201];
    fxl_role role;
    int active;
    char hash[crypto_pwhash_STRBYTES];
    int has_password;
    int must_change;
    int failures;
    char first_failure_at[FXL_TIME_LEN];
    char locked_until[FXL_TIME_LEN];
    char last_login_at[FXL_TIME_LEN];
} account;

static int load_account_where(fxl_ctx *ctx, const char *login, int64_t id, account *a)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    memset(a, 0, sizeof *a);
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
                               "SELECT u.id, u.login, u.full_name, u.role, u.active, p.hash, "
                               "p.must_change, coalesce(l.failures, 0), coalesce(l.first_failure_at, ''), "
                               "coalesce(l.locked_until, ''), coalesce(l.last_login_at, ''), "
                               "p.user_id IS NOT NULL "
                               "FROM users u LEFT JOIN auth_passwords p ON p.user_id = u.id "
                               "LEFT JOIN auth_lockout l ON l.user_id = u.id "
                               "WHERE (:login IS NOT NULL AND u.login = :login) OR u.id = :id")) != 0)
        return rc;
    if (login)
        fxl_stmt_bind_text(&s, ":login", login);
    else
        fxl_stmt_bind_null(&s, ":login");
    fxl_stmt_bind_int(&s, ":id", id);
    if ((rc = fxl_stmt_step(&s)) == 1) {
        a->found = 1;
        a->id = fxl_stmt_int(&s, 0);
        snprintf(a->login, sizeof a->login, "%s", fxl_stmt_text(&s, 1));
        snprintf(a->full_name, sizeof a->full_name, "%s", fxl_stmt_text(&s, 2));
        fxl_role_parse(&a->role, fxl_stmt_text(&s, 3));
        a->active = (int)fxl_stmt_int(&s, 4);
        snprintf(a->hash, sizeof a->hash, "%s", fxl_stmt_text(&s, 5));
        a->must_change = (int)fxl_stmt_int(&s, 6);
        a->failures = (int)fxl_stmt_int(&s, 7);
        snprintf(a->first_failure_at, sizeof a->first_failure_at, "%s", fxl_stmt_text(&s, 8));
        snprintf(a->locked_until, sizeof a->locked_until, "%s", fxl_stmt_text(&s, 9));
        snprintf(a->last_login_at, sizeof a->last_login_at, "%s", fxl_stmt_text(&s, 10));
        a->has_password = (int)fxl_stmt_int(&s, 11);
        rc = 0;
    }
    fxl_stmt_finalize(&s);
    return rc < 0 ? rc : 0;
}

static int is_locked(const account *a, const char *now)
{
    return a->locked_until[0] && strcmp(a->locked_until, now) > 0;
}

static void set_acting(fxl_ctx *ctx, const account *a)
{
    if (ctx->sign_user_id && ctx->sign_user_id != a->id)
        fxl_sign_end(ctx);
    ctx->user_id = a->id;
    snprintf(ctx->user_login, sizeof ctx->user_login, "%s", a->login);
    ctx->user_role = a->role;
}

static void fill_identity(fxl_identity *out, const account *a)
{
    if (!out)
        return;
    memset(out, 0, sizeof *out);
    out->user_id = a->id;
    snprintf(out->login, sizeof out->login, "%s", a->login);
    snprintf(out->full_name, sizeof out->full_name, "%s", a->full_name);
    out->role = a->role;
}

/* Audits one failed attempt and counts it against a known account; locks
 * at the limit. Own transaction (the caller's act fails anyway). Returns the
 * code the caller should return, with its message. */
static int record_failure(fxl_ctx *ctx, const account *a, const char *attempted,
                          const char *purpose, const char *reason, const fxl_client *client)
{
    char saved_login[65], now[FXL_TIME_LEN], until[FXL_TIME_LEN] = "", first[FXL_TIME_LEN];
    int64_t saved_id = ctx->user_id;
    fxl_role saved_role = ctx->user_role;
    fxl_stmt s = FXL_STMT_INIT;
    cJSON *audit = cJSON_CreateObject(), *lock = NULL;
    long window = setting_long(ctx, "auth_failure_window_minutes", 15, 1, 1440);
    long max = setting_long(ctx, "auth_max_failures", 5, 3, 20);
    long lock_min = setting_long(ctx, "auth_lock_minutes", 30, 1, 10080);
    int failures = 0, locks = 0, rc;
    char msg[sizeof ctx->errmsg];

    snprintf(msg, sizeof msg, "%s", ctx->errmsg);
    snprintf(saved_login, sizeof saved_login, "%s", ctx->user_login);
    fxl_now(ctx, now);
    if (ctx->readonly) {
        rc = 0;
        goto cleanup;
    }
    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    /* The audit row names the account tried, never the password. */
    ctx->user_id = a && a->found ? a->id : 0;
    snprintf(ctx->user_login, sizeof ctx->user_login, "%s", a && a->found ? a->login : "");
    cJSON_AddStringToObject(audit, "login", a && a->found ? a->login
                                            : (attempted ? attempted : ""));
    cJSON_AddBoolToObject(audit, "known", a && a->found);
    cJSON_AddStringToObject(audit, "purpose", purpose);
    cJSON_AddStringToObject(audit, "reason", reason);
    client_json(audit, client);
    if (a && a->found && strcmp(reason, "locked") != 0 && strcmp(reason, "deactivated") != 0) {
        time_t t = iso_to_time(now);
        failures = a->failures;
        snprintf(first, sizeof first, "%s", a->first_failure_at);
        if (!first[0] || iso_to_time(first) + window * 60 <= t) {
            failures = 0;
            snprintf(first, sizeof first, "%s", now);
        }
        failures++;
        if (failures >= max) {
            time_to_iso(until, t + lock_min * 60);
            locks = 1;
        }
        cJSON_AddNumberToObject(audit, "failures_in_window", failures);
        if ((rc = fxl_stmt_prepare(&s, ctx,
                                   "INSERT INTO auth_lockout (user_id, failures, first_failure_at, locked_until) "
                                   "VALUES (:u, :f, :first, :until) ON CONFLICT (user_id) DO UPDATE SET "
                                   "failures = excluded.failures, first_failure_at = excluded.first_failure_at, "
                                   "locked_until = coalesce(excluded.locked_until, locked_until)")) != 0)
            goto cleanup;
        fxl_stmt_bind_int(&s, ":u", a->id);
        fxl_stmt_bind_int(&s, ":f", failures);
        fxl_stmt_bind_text(&s, ":first", first);
        fxl_stmt_bind_text(&s, ":until", locks ? until : NULL);
        if ((rc = fxl_stmt_exec(&s)) != 0)
            goto cleanup;
    }
    if ((rc = fxl_audit_append(ctx, "login_failed", "users", a && a->found ? a->id : 0, audit)) != 0)
        goto cleanup;
    if (locks) {
        lock = cJSON_CreateObject();
        cJSON_AddStringToObject(lock, "login", a->login);
        cJSON_AddStringToObject(lock, "locked_until", until);
        cJSON_AddNumberToObject(lock, "failures", failures);
        cJSON_AddNumberToObject(lock, "window_minutes", (double)window);
        client_json(lock, client);
        if ((rc = fxl_audit_append(ctx, "lock", "users", a->id, lock)) != 0)
            goto cleanup;
    }
    rc = fxl_commit(ctx);
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    fxl_stmt_finalize(&s);
    cJSON_Delete(audit);
    cJSON_Delete(lock);
    ctx->user_id = saved_id;
    ctx->user_role = saved_role;
    snprintf(ctx->user_login, sizeof ctx->user_login, "%s", saved_login);
    if (rc != 0)
        return rc;
    if (locks)
        return fxl_fail(ctx, FXL_EAUTH, "%s; account '%s' is now locked until %s after %d failed "
                        "attempts (an admin can unlock it)", msg, a->login, until, failures);
    return fxl_fail(ctx, FXL_EAUTH, "%s", msg);
}

/* Checks login and password; on success *a is the account. */
static int check_password(fxl_ctx *ctx, const char *login, const char *password, account *a,
                          const char *purpose, const fxl_client *client)
{
    char now[FXL_TIME_LEN];
    int ok, rc;

    if (sodium_init() < 0)
        return fxl_fail(ctx, FXL_EIO, "cannot initialise libsodium");
    if ((rc = load_account_where(ctx, login && *login ? login : "", -1, a)) != 0)
        return rc;
    fxl_now(ctx, now);
    /* Always one Argon2id verification, whatever the account: the time does
     * not tell whether the login exists. crypto_pwhash_str_verify compares
     * in constant time. */
    ok = crypto_pwhash_str_verify(a->found && a->has_password ? a->hash : DUMMY_HASH,
                                  password ? password : "", password ? strlen(password) : 0) == 0;
    ok = ok && a->found && a->has_password;
    if (a->found && is_locked(a, now)) {
        fxl_fail(ctx, FXL_EAUTH, "account '%s' is locked until %s; an admin can unlock it",
                 a->login, a->locked_until);
        return record_failure(ctx, a, login, purpose, "locked", client);
    }
    if (a->found && !a->active) {
        /* Said whatever the password: a deactivated account may not act. */
        fxl_fail(ctx, FXL_EAUTH, "user '%s' is deactivated", a->login);
        return record_failure(ctx, a, login, purpose, "deactivated", client);
    }
    if (!ok) {
        fxl_fail(ctx, FXL_EAUTH, "%s", FAILED_MSG);
        return record_failure(ctx, a->found ? a : NULL,
                              login && fxl_utf8_invalid_at(login, strlen(login)) < 0 &&
                                      fxl_text_control_at(login) < 0 && strlen(login) <= 64 ? login : "",
                              purpose, a->found ? "wrong password" : "unknown login", client);
    }
    return 0;
}

/* Successful authentication: clears the failure count, optionally opens a
 * session, audits. One transaction, with an optional password change. */
static int authenticated(fxl_ctx *ctx, const account *a, const pw_material *m, int open_session,
                         const fxl_client *client, char *token_out, fxl_session_info *out)
{
    unsigned char token[32];
    char token_hex[FXL_TOKEN_HEX_LEN + 1], token_sha[65], now[FXL_TIME_LEN];
    fxl_stmt s = FXL_STMT_INIT;
    cJSON *audit = cJSON_CreateObject(), *cl = cJSON_CreateObject();
    char *client_text = NULL;
    int64_t session_id = 0;
    int rc;

    fxl_now(ctx, now);
    set_acting(ctx, a);
    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    if (m && (rc = store_material(ctx, a->id, a->login, m)) != 0)
        goto cleanup;
    if (m) {
        cJSON *pc = cJSON_CreateObject();
        cJSON_AddStringToObject(pc, "login", a->login);
        cJSON_AddBoolToObject(pc, "new_signing_key", m->new_key);
        client_json(pc, client);
        rc = fxl_audit_append(ctx, "password_change", "users", a->id, pc);
        cJSON_Delete(pc);
        if (rc != 0)
            goto cleanup;
    }
    if ((rc = exec_user(ctx,
                        "INSERT INTO auth_lockout (user_id, failures, last_login_at) VALUES (:u, 0, :now) "
                        "ON CONFLICT (user_id) DO UPDATE SET failures = 0, first_failure_at = NULL, "
                        "locked_until = NULL, last_login_at = :now",
                        a->id, now)) != 0)
        goto cleanup;
    cJSON_AddStringToObject(audit, "login", a->login);
    client_json(audit, client);
    if (open_session) {
        client_json(cl, client);
        client_text = cJSON_PrintUnformatted(cl);
        randombytes_buf(token, sizeof token);
        sodium_bin2hex(token_hex, sizeof token_hex, token, sizeof token);
        sodium_memzero(token, sizeof token);
        fxl_sha256_hex(token_sha, token_hex, FXL_TOKEN_HEX_LEN);
        if ((rc = fxl_stmt_prepare(&s, ctx,
                                   "INSERT INTO auth_sessions (token_sha256, user_id, client, started_at, "
                                   "last_seen_at) VALUES (:t, :u, :c, :now, :now)")) != 0)
            goto cleanup;
        fxl_stmt_bind_text(&s, ":t", token_sha);
        fxl_stmt_bind_int(&s, ":u", a->id);
        fxl_stmt_bind_text(&s, ":c", client_text ? client_text : "{}");
        fxl_stmt_bind_text(&s, ":now", now);
        if ((rc = fxl_stmt_exec(&s)) != 0)
            goto cleanup;
        session_id = sqlite3_last_insert_rowid(ctx->db);
        cJSON_AddNumberToObject(audit, "session", (double)session_id);
    } else {
        cJSON_AddStringToObject(audit, "session", "none (one command)");
    }
    if ((rc = fxl_audit_append(ctx, "login", "users", a->id, audit)) != 0)
        goto cleanup;
    rc = fxl_commit(ctx);
    if (rc == 0 && open_session) {
        memcpy(token_out, token_hex, sizeof token_hex);
        if (out) {
            long idle = setting_long(ctx, "auth_idle_minutes", 15, 1, 240);
            long hours = setting_long(ctx, "auth_session_hours", 12, 1, 24);
            memset(out, 0, sizeof *out);
            fill_identity(&out->user, a);
            out->session_id = session_id;
            snprintf(out->started_at, sizeof out->started_at, "%s", now);
            snprintf(out->last_seen_at, sizeof out->last_seen_at, "%s", now);
            time_to_iso(out->idle_expires_at, iso_to_time(now) + idle * 60);
            time_to_iso(out->expires_at, iso_to_time(now) + hours * 3600);
        }
    }
cleanup:
    if (rc != 0) {
        fxl_rollback(ctx);
        ctx->user_id = 0;
        ctx->user_login[0] = '\0';
        ctx->user_role = 0;
    }
    sodium_memzero(token_hex, sizeof token_hex);
    fxl_stmt_finalize(&s);
    cJSON_Delete(audit);
    cJSON_Delete(cl);
    free(client_text);
    return rc;
}

/* The password material for replacing a one-time password or an own
 * password: re-seals the existing key when old_password opens it, else
 * makes a new key pair. */
static int material_for_change(fxl_ctx *ctx, pw_material *m, const account *a,
                               const char *old_password, const char *new_password)
{
    unsigned char *sk = NULL;
    sealed_row r;
    int rc;

    if ((rc = fxl_password_policy_check(ctx, a->login, new_password)) != 0)
        return rc;
    if (old_password && strcmp(old_password, new_password) == 0)
        return fxl_fail(ctx, FXL_EINVAL, "the new password must differ from the current one");
    if ((rc = load_sealed(ctx, a->id, &r)) != 0)
        return rc;
    if (r.found && old_password) {
        if (!(sk = sodium_malloc(crypto_sign_SECRETKEYBYTES)))
            return fxl_fail(ctx, FXL_EIO, "out of memory");
        rc = open_sealed(ctx, &r, old_password, sk);
        if (rc == FXL_EAUTH) {
            /* The password verified but does not open the key: the key was
             * sealed under another password. Start a new key pair. */
            rc = make_material(ctx, m, new_password, NULL, 0);
        } else if (rc == 0) {
            rc = make_material(ctx, m, new_password, sk, 0);
        }
        sodium_free(sk);
        return rc;
    }
    return make_material(ctx, m, new_password, NULL, 0);
}

/* A database made before identities has users but no password at all:
 * nobody could log in. Its first admin to log in chooses a password then
 * (new_password), which makes their key pair. Whoever can run this can
 * write the file anyway (docs/security.md, the honest limit). Returns 1
 * when this does not apply, else 0 or an error code. */
static int first_admin_password(fxl_ctx *ctx, const char *login, const char *new_password,
                                const fxl_client *client, int open_session, char *token_out,
                                fxl_session_info *out, fxl_identity *ident)
{
    fxl_stmt s = FXL_STMT_INIT;
    pw_material *m = NULL;
    account a;
    int64_t passwords = -1;
    int rc;

    if ((rc = load_account_where(ctx, login && *login ? login : "", -1, &a)) != 0)
        return rc;
    if (!a.found || a.has_password || !a.active || !(a.role & FXL_ROLE_ADMIN))
        return 1;
    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT count(*) FROM auth_passwords")) != 0)
        return rc;
    if ((rc = fxl_stmt_step(&s)) == 1)
        passwords = fxl_stmt_int(&s, 0);
    fxl_stmt_finalize(&s);
    if (rc < 0)
        return rc;
    if (passwords != 0)
        return 1;
    if (!new_password)
        return fxl_fail(ctx, FXL_EEXPIRED,
                        "this database was made before logins and has no password yet: admin '%s' "
                        "chooses the first one now ('fxledger login --new-password')", a.login);
    if ((rc = fxl_password_policy_check(ctx, a.login, new_password)) != 0)
        return rc;
    if (!(m = sodium_malloc(sizeof *m)))
        return fxl_fail(ctx, FXL_EIO, "out of memory");
    if ((rc = make_material(ctx, m, new_password, NULL, 0)) == 0 &&
        (rc = authenticated(ctx, &a, m, open_session, client, token_out, out)) == 0)
        fill_identity(ident, &a);
    sodium_free(m);
    return rc;
}

static int do_login(fxl_ctx *ctx, const char *login, const char *password, const char *new_password,
                    const fxl_client *client, int open_session, char *token_out,
                    fxl_session_info *out, fxl_identity *ident)
{
    account a;
    pw_material *m = NULL;
    int rc;

    if (ctx->readonly)
        return fxl_fail(ctx, FXL_EDB, "internal: logging in needs a read-write database");
    if ((rc = first_admin_password(ctx, login, new_password, client, open_session, token_out, out,
                                   ident)) != 1)
        return rc;
    if ((rc = check_password(ctx, login, password, &a, open_session ? "login" : "command", client)) != 0)
        return rc;
    if (a.must_change && !new_password)
        return fxl_fail(ctx, FXL_EEXPIRED,
                        "the password of '%s' is a one-time password: choose a new one to log in "
                        "(fxledger login)", a.login);
    if (!(m = sodium_malloc(sizeof *m)))
        return fxl_fail(ctx, FXL_EIO, "out of memory");
    if (a.must_change) {
        rc = material_for_change(ctx, m, &a, NULL, new_password);
    } else if (new_password) {
        /* A change of one's own password at login: the key is sealed again. */
        rc = material_for_change(ctx, m, &a, password, new_password);
    } else if (crypto_pwhash_str_needs_rehash(a.hash, PW_OPSLIMIT, PW_MEMLIMIT) != 0) {
        /* Stored with other parameters: hash again; the sealed key keeps its
         * own parameters and is re-sealed at the next password change. */
        memset(m, 0, sizeof *m);
        if (crypto_pwhash_str(m->hash, password, strlen(password), PW_OPSLIMIT, PW_MEMLIMIT) != 0)
            rc = fxl_fail(ctx, FXL_EIO, "out of memory hashing the password");
    } else {
        sodium_free(m);
        m = NULL;
    }
    if (rc == 0)
        rc = authenticated(ctx, &a, m, open_session, client, token_out, out);
    if (rc == 0)
        fill_identity(ident, &a);
    if (m)
        sodium_free(m);
    return rc;
}

int fxl_auth_login(fxl_ctx *ctx, const char *login, const char *password,
                   const char *new_password, const fxl_client *client,
                   char *token_out, fxl_session_info *out)
{
    return do_login(ctx, login, password, new_password, client, 1, token_out, out, NULL);
}

int fxl_auth_password(fxl_ctx *ctx, const char *login, const char *password,
                      const fxl_client *client, fxl_identity *out)
{
    return do_login(ctx, login, password, NULL, client, 0, NULL, NULL, out);
}

/* ---- sessions ------------------------------------------------------------------- */

typedef struct session_row {
    int found;
    int64_t id, user_id;
    char started_at[FXL_TIME_LEN], last_seen_at[FXL_TIME_LEN];
    int ended;
} session_row;

static int load_session(fxl_ctx *ctx, const char *token, session_row *r)
{
    fxl_stmt s = FXL_STMT_INIT;
    char sha[65];
    int rc;

    memset(r, 0, sizeof *r);
    if (!token || strlen(token) != FXL_TOKEN_HEX_LEN)
        return 0;
    fxl_sha256_hex(sha, token, FXL_TOKEN_HEX_LEN);
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
                               "SELECT id, user_id, started_at, last_seen_at, ended_at IS NOT NULL "
                               "FROM auth_sessions WHERE token_sha256 = :t")) != 0)
        return rc;
    fxl_stmt_bind_text(&s, ":t", sha);
    if ((rc = fxl_stmt_step(&s)) == 1) {
        r->found = 1;
        r->id = fxl_stmt_int(&s, 0);
        r->user_id = fxl_stmt_int(&s, 1);
        snprintf(r->started_at, sizeof r->started_at, "%s", fxl_stmt_text(&s, 2));
        snprintf(r->last_seen_at, sizeof r->last_seen_at, "%s", fxl_stmt_text(&s, 3));
        r->ended = (int)fxl_stmt_int(&s, 4);
        rc = 0;
    }
    fxl_stmt_finalize(&s);
    return rc < 0 ? rc : 0;
}

static int session_live(fxl_ctx *ctx, const char *token, session_row *r, account *a,
                        fxl_session_info *out)
{
    char now[FXL_TIME_LEN];
    long idle = setting_long(ctx, "auth_idle_minutes", 15, 1, 240);
    long hours = setting_long(ctx, "auth_session_hours", 12, 1, 24);
    time_t t, seen, start;
    int rc;

    if (sodium_init() < 0)
        return fxl_fail(ctx, FXL_EIO, "cannot initialise libsodium");
    if ((rc = load_session(ctx, token, r)) != 0)
        return rc;
    if (!r->found)
        return fxl_fail(ctx, FXL_EAUTH, "no session: log in first with 'fxledger login'");
    if (r->ended)
        return fxl_fail(ctx, FXL_EAUTH, "the session has ended (logged out): log in again");
    fxl_now(ctx, now);
    t = iso_to_time(now);
    seen = iso_to_time(r->last_seen_at);
    start = iso_to_time(r->started_at);
    if (t >= seen + idle * 60)
        return fxl_fail(ctx, FXL_EAUTH, "the session ended after %ld minutes without use: log in again",
                        idle);
    if (t >= start + hours * 3600)
        return fxl_fail(ctx, FXL_EAUTH, "the session ended %ld hours after its login: log in again",
                        hours);
    if ((rc = load_account_where(ctx, NULL, r->user_id, a)) != 0)
        return rc;
    /* FXL_EPERM: the account may not act at all, a password would not help. */
    if (!a->found || !a->active)
        return fxl_fail(ctx, FXL_EPERM, "user '%s' is deactivated", a->found ? a->login : "?");
    if (is_locked(a, now))
        return fxl_fail(ctx, FXL_EPERM, "account '%s' is locked until %s; an admin can unlock it",
                        a->login, a->locked_until);
    if (a->must_change)
        return fxl_fail(ctx, FXL_EEXPIRED, "the password of '%s' was reset: log in again", a->login);
    if (out) {
        memset(out, 0, sizeof *out);
        fill_identity(&out->user, a);
        out->session_id = r->id;
        snprintf(out->started_at, sizeof out->started_at, "%s", r->started_at);
        snprintf(out->last_seen_at, sizeof out->last_seen_at, "%s", r->last_seen_at);
        time_to_iso(out->idle_expires_at, seen + idle * 60);
        time_to_iso(out->expires_at, start + hours * 3600);
    }
    return 0;
}

int fxl_session_check(fxl_ctx *ctx, const char *token, fxl_session_info *out)
{
    session_row r;
    account a;
    int rc = session_live(ctx, token, &r, &a, out);

    if (rc == 0) {
        set_acting(ctx, &a);
        ctx->session_id = r.id;
        snprintf(ctx->session_seen, sizeof ctx->session_seen, "%s", r.last_seen_at);
    }
    return rc;
}

/* The activity is written at most once a minute (fxl_session_touch). */
static int touch_due(const char *last_seen, const char *now)
{
    return iso_to_time(now) >= iso_to_time(last_seen) + 60;
}

void fxl_session_touch_at_commit(fxl_ctx *ctx)
{
    char now[FXL_TIME_LEN];

    if (!ctx || !ctx->session_id || ctx->readonly)
        return;
    fxl_now(ctx, now);
    ctx->touch_armed = touch_due(ctx->session_seen, now);
}

int fxl_session_touch_pending(fxl_ctx *ctx)
{
    if (!ctx->touch_armed || !ctx->session_id)
        return 0;
    fxl_now(ctx, ctx->touch_at);
    return exec_user(ctx, "UPDATE auth_sessions SET last_seen_at = :now WHERE id = :u",
                     ctx->session_id, ctx->touch_at);
}

int fxl_session_touch(fxl_ctx *ctx, const char *token)
{
    session_row r;
    account a;
    char now[FXL_TIME_LEN];
    int rc;

    /* The command's own commit recorded it less than a minute ago
     * (fxl_session_touch_at_commit); otherwise the write is made here, in a
     * transaction of its own. */
    fxl_now(ctx, now);
    if (ctx->touch_written && !touch_due(ctx->session_seen, now))
        return 0;
    ctx->touch_armed = 0;
    if ((rc = session_live(ctx, token, &r, &a, NULL)) != 0)
        return rc;
    /* At most one write a minute: a command run at the same second as the
     * last leaves the file byte-for-byte unchanged. Not audited: activity is
     * not a change of the record (docs/security.md). */
    if (!touch_due(r.last_seen_at, now))
        return 0;
    if ((rc = fxl_begin(ctx)) != 0)
        return rc;
    if ((rc = exec_user(ctx, "UPDATE auth_sessions SET last_seen_at = :now WHERE id = :u", r.id, now)) == 0)
        rc = fxl_commit(ctx);
    if (rc != 0)
        fxl_rollback(ctx);
    return rc;
}

int fxl_session_end(fxl_ctx *ctx, const char *token, const fxl_client *client)
{
    session_row r;
    account a;
    char now[FXL_TIME_LEN];
    cJSON *audit = NULL;
    int rc;

    if (sodium_init() < 0)
        return fxl_fail(ctx, FXL_EIO, "cannot initialise libsodium");
    if ((rc = load_session(ctx, token, &r)) != 0)
        return rc;
    if (!r.found || r.ended)
        return fxl_fail(ctx, FXL_EAUTH, "no open session to end");
    if ((rc = load_account_where(ctx, NULL, r.user_id, &a)) != 0)
        return rc;
    set_acting(ctx, &a);
    fxl_now(ctx, now);
    if ((rc = fxl_begin(ctx)) != 0)
        return rc;
    if ((rc = exec_user(ctx, "UPDATE auth_sessions SET ended_at = :now WHERE id = :u", r.id, now)) != 0)
        goto cleanup;
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "login", a.login);
    cJSON_AddNumberToObject(audit, "session", (double)r.id);
    client_json(audit, client);
    if ((rc = fxl_audit_append(ctx, "logout", "users", a.id, audit)) != 0)
        goto cleanup;
    rc = fxl_commit(ctx);
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    cJSON_Delete(audit);
    return rc;
}

/* ---- passwords and locks ---------------------------------------------------------- */

int fxl_auth_change_password(fxl_ctx *ctx, const char *old_password, const char *new_password,
                             const fxl_client *client)
{
    account a;
    pw_material *m = NULL;
    char login[65];
    cJSON *audit = NULL;
    int rc;

    if (!ctx->user_id)
        return fxl_fail(ctx, FXL_EAUTH, "changing a password needs a logged-in user");
    snprintf(login, sizeof login, "%s", ctx->user_login);
    if ((rc = check_password(ctx, login, old_password, &a, "password change", client)) != 0)
        return rc;
    if (!(m = sodium_malloc(sizeof *m)))
        return fxl_fail(ctx, FXL_EIO, "out of memory");
    if ((rc = material_for_change(ctx, m, &a, old_password, new_password)) != 0)
        goto cleanup;
    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    if ((rc = store_material(ctx, a.id, a.login, m)) != 0)
        goto cleanup;
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "login", a.login);
    cJSON_AddBoolToObject(audit, "new_signing_key", m->new_key);
    client_json(audit, client);
    if ((rc = fxl_audit_append(ctx, "password_change", "users", a.id, audit)) != 0)
        goto cleanup;
    rc = fxl_commit(ctx);
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    cJSON_Delete(audit);
    sodium_free(m);
    return rc;
}

int fxl_auth_reset_password(fxl_ctx *ctx, const char *login, char otp_out[FXL_OTP_LEN + 1],
                            const fxl_client *client)
{
    account a;
    pw_material *m = NULL;
    char otp[FXL_OTP_LEN + 1], now[FXL_TIME_LEN];
    cJSON *audit = NULL;
    int rc;

    if (sodium_init() < 0)
        return fxl_fail(ctx, FXL_EIO, "cannot initialise libsodium");
    if ((rc = fxl_require_role(ctx, FXL_ROLE_ADMIN, "resetting a password")) != 0)
        return rc;
    if ((rc = load_account_where(ctx, login, -1, &a)) != 0)
        return rc;
    if (!a.found)
        return fxl_fail(ctx, FXL_ENOTFOUND, "unknown user '%s' (see 'fxledger user list')", login);
    if (a.id == ctx->user_id)
        return fxl_fail(ctx, FXL_EINVAL, "admins change their own password with 'fxledger user passwd'");
    if (!a.active)
        return fxl_fail(ctx, FXL_ECONFLICT, "user '%s' is deactivated", login);
    if (!(m = sodium_malloc(sizeof *m)))
        return fxl_fail(ctx, FXL_EIO, "out of memory");
    make_otp(otp);
    fxl_now(ctx, now);
    if ((rc = make_material(ctx, m, otp, NULL, 1)) != 0)
        goto cleanup;
    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    if ((rc = store_material(ctx, a.id, a.login, m)) != 0 ||
        (rc = exec_user(ctx, "DELETE FROM signing_secrets WHERE user_id = :u", a.id, NULL)) != 0 ||
        (rc = exec_user(ctx, "UPDATE auth_sessions SET ended_at = :now WHERE user_id = :u AND ended_at IS NULL",
                        a.id, now)) != 0 ||
        (rc = exec_user(ctx, "UPDATE auth_lockout SET failures = 0, first_failure_at = NULL, "
                             "locked_until = NULL WHERE user_id = :u", a.id, NULL)) != 0)
        goto cleanup;
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "login", a.login);
    cJSON_AddBoolToObject(audit, "must_change", 1);
    client_json(audit, client);
    if ((rc = fxl_audit_append(ctx, "password_reset", "users", a.id, audit)) != 0)
        goto cleanup;
    rc = fxl_commit(ctx);
    if (rc == 0)
        memcpy(otp_out, otp, sizeof otp);
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    sodium_memzero(otp, sizeof otp);
    cJSON_Delete(audit);
    sodium_free(m);
    return rc;
}

int fxl_auth_unlock(fxl_ctx *ctx, const char *login, const fxl_client *client)
{
    account a;
    char now[FXL_TIME_LEN];
    cJSON *audit = NULL;
    int rc;

    if ((rc = fxl_require_role(ctx, FXL_ROLE_ADMIN, "unlocking an account")) != 0)
        return rc;
    if ((rc = load_account_where(ctx, login, -1, &a)) != 0)
        return rc;
    if (!a.found)
        return fxl_fail(ctx, FXL_ENOTFOUND, "unknown user '%s' (see 'fxledger user list')", login);
    fxl_now(ctx, now);
    if (!is_locked(&a, now))
        return fxl_fail(ctx, FXL_ECONFLICT, "user '%s' is not locked", login);
    if ((rc = fxl_begin(ctx)) != 0)
        return rc;
    if ((rc = exec_user(ctx, "UPDATE auth_lockout SET failures = 0, first_failure_at = NULL, "
                             "locked_until = NULL WHERE user_id = :u", a.id, NULL)) != 0)
        goto cleanup;
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "login", a.login);
    cJSON_AddStringToObject(audit, "was_locked_until", a.locked_until);
    client_json(audit, client);
    if ((rc = fxl_audit_append(ctx, "unlock", "users", a.id, audit)) != 0)
        goto cleanup;
    rc = fxl_commit(ctx);
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    cJSON_Delete(audit);
    return rc;
}

int fxl_auth_state_get(fxl_ctx *ctx, const char *login, fxl_auth_state *out)
{
    account a;
    sealed_row r;
    char now[FXL_TIME_LEN];
    long window = setting_long(ctx, "auth_failure_window_minutes", 15, 1, 1440);
    int rc;

    memset(out, 0, sizeof *out);
    if (!ctx->user_id)
        return fxl_fail(ctx, FXL_EAUTH, "reading an account's state needs a logged-in user");
    if (!(ctx->user_role & FXL_ROLE_ADMIN) && strcmp(login, ctx->user_login) != 0)
        return fxl_fail(ctx, FXL_EPERM, "permission denied: only admins see another user's lock state");
    if ((rc = load_account_where(ctx, login, -1, &a)) != 0)
        return rc;
    if (!a.found)
        return fxl_fail(ctx, FXL_ENOTFOUND, "unknown user '%s' (see 'fxledger user list')", login);
    if ((rc = load_sealed(ctx, a.id, &r)) != 0)
        return rc;
    fxl_now(ctx, now);
    snprintf(out->login, sizeof out->login, "%s", a.login);
    out->has_password = a.has_password;
    out->must_change = a.must_change;
    if (a.first_failure_at[0] && iso_to_time(a.first_failure_at) + window * 60 > iso_to_time(now))
        out->recent_failures = a.failures;
    out->locked = is_locked(&a, now);
    if (out->locked)
        snprintf(out->locked_until, sizeof out->locked_until, "%s", a.locked_until);
    snprintf(out->last_login_at, sizeof out->last_login_at, "%s", a.last_login_at);
    out->has_signing_key = r.found;
    return 0;
}

/* ---- opening the signing key ------------------------------------------------------- */

int fxl_sign_begin(fxl_ctx *ctx, const char *password, const fxl_client *client)
{
    account a;
    sealed_row r;
    char now[FXL_TIME_LEN];
    unsigned char *sk = NULL;
    int rc;

    fxl_sign_end(ctx);
    if (sodium_init() < 0)
        return fxl_fail(ctx, FXL_EIO, "cannot initialise libsodium");
    if (!ctx->user_id)
        return fxl_fail(ctx, FXL_EAUTH, "signing needs a logged-in user");
    if ((rc = load_account_where(ctx, NULL, ctx->user_id, &a)) != 0)
        return rc;
    fxl_now(ctx, now);
    if (!a.found || !a.active)
        return fxl_fail(ctx, FXL_EAUTH, "user '%s' may not sign (deactivated)", ctx->user_login);
    if (is_locked(&a, now))
        return fxl_fail(ctx, FXL_EAUTH, "account '%s' is locked until %s; an admin can unlock it",
                        a.login, a.locked_until);
    if ((rc = load_sealed(ctx, a.id, &r)) != 0)
        return rc;
    if (!r.found)
        return fxl_fail(ctx, FXL_EAUTH, "user '%s' has no signing key yet: change the password "
                        "('fxledger user passwd') to make one", a.login);
    if (!(sk = sodium_malloc(crypto_sign_SECRETKEYBYTES)))
        return fxl_fail(ctx, FXL_EIO, "out of memory opening the signing key");
    /* One Argon2id run: the derived key opens the sealed secret only for the
     * right password, which proves it (crypto_secretbox authenticates). */
    rc = open_sealed(ctx, &r, password ? password : "", sk);
    if (rc == FXL_EAUTH) {
        sodium_free(sk);
        fxl_fail(ctx, FXL_EAUTH, "wrong password for '%s': not signed", a.login);
        return record_failure(ctx, &a, a.login, "signature", "wrong password", client);
    }
    if (rc != 0) {
        sodium_free(sk);
        return rc;
    }
    sodium_mprotect_readonly(sk);
    ctx->sign_sk = sk;
    ctx->sign_key_id = r.key_id;
    ctx->sign_user_id = a.id;
    return 0;
}

void fxl_sign_end(fxl_ctx *ctx)
{
    if (!ctx || !ctx->sign_sk)
        return;
    sodium_free(ctx->sign_sk);   /* sodium_free wipes before freeing */
    ctx->sign_sk = NULL;
    ctx->sign_key_id = 0;
    ctx->sign_user_id = 0;
}

int fxl_sign_ready(const fxl_ctx *ctx)
{
    return ctx && ctx->sign_sk && ctx->sign_user_id == ctx->user_id;
}
