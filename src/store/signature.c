/* Electronic signatures: the canonical content of a signed row, the
 * signature row a signing act adds, the listing and the check made by
 * 'fxledger verify'. Format: docs/security.md. */
#include <sodium.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/audit.h"
#include "fxl/auth.h"
#include "store/audit.h"
#include "store/auth_int.h"
#include "store/grow.h"
#include "store/stmt.h"

/* The tables whose rows are signed, with the child rows that belong to the
 * signed content, and which rows must be signed (SQL condition on the row,
 * NULL: every row written after the migration). Only these names ever reach
 * SQL text: a signature row's entity is looked up here first. */
typedef struct signed_table {
    const char *entity;
    const char *child;          /* child table or NULL */
    const char *child_fk;       /* its column naming the parent id */
    const char *child_order;    /* a total order of the child rows */
    const char *must_sign;      /* condition on the row, or NULL for all rows */
} signed_table;

static const signed_table TABLES[] = {
    {"review_events", NULL, NULL, NULL, "kind IN ('close', 'reopen')"},
    {"threshold_sets", NULL, NULL, NULL, NULL},
    {"calibrations", NULL, NULL, NULL, NULL},
    {"correction_tables", "correction_points", "table_id", "x", NULL},
    {"beam_data", NULL, NULL, NULL, NULL},
    {"plans", "fields", "plan_id", "id", NULL},
    {"users", NULL, NULL, NULL, "0"},   /* deactivation is signed; not required of older rows */
};
#define N_TABLES (sizeof TABLES / sizeof TABLES[0])

static const signed_table *find_table(const char *entity)
{
    size_t i;

    for (i = 0; entity && i < N_TABLES; i++)
        if (strcmp(TABLES[i].entity, entity) == 0)
            return &TABLES[i];
    return NULL;
}

/* ---- canonical content ------------------------------------------------------- */

typedef struct buf {
    char *p;
    size_t len, cap;
    int oom;
} buf;

static void put(buf *b, const void *data, size_t n)
{
    if (b->oom)
        return;
    if (b->len + n + 1 > b->cap) {
        size_t cap = b->cap ? b->cap : 1024;
        char *np;
        while (cap < b->len + n + 1)
            cap *= 2;
        if (!(np = realloc(b->p, cap))) {
            b->oom = 1;
            return;
        }
        b->p = np;
        b->cap = cap;
    }
    memcpy(b->p + b->len, data, n);
    b->len += n;
    b->p[b->len] = '\0';
}

static void puts_(buf *b, const char *s)
{
    put(b, s, strlen(s));
}

/* Appends every row the query returns: "name=type:value\n" per non-NULL
 * column, a blank line after each row. NULL columns are left out, so a
 * later migration adding a nullable column keeps older signatures valid. */
static int put_rows(fxl_ctx *ctx, buf *b, const char *sql, int64_t id)
{
    fxl_stmt s = FXL_STMT_INIT;
    char num[64];
    int rc, i;

    if ((rc = fxl_stmt_prepare(&s, ctx, sql)) != 0)
        return rc;
    fxl_stmt_bind_int(&s, ":id", id);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        int n = sqlite3_column_count(s.st);
        for (i = 0; i < n; i++) {
            int type = sqlite3_column_type(s.st, i);
            if (type == SQLITE_NULL)
                continue;
            puts_(b, sqlite3_column_name(s.st, i));
            if (type == SQLITE_INTEGER) {
                snprintf(num, sizeof num, "=i:%lld\n", (long long)sqlite3_column_int64(s.st, i));
                puts_(b, num);
            } else if (type == SQLITE_FLOAT) {
                snprintf(num, sizeof num, "=r:%.17g\n", sqlite3_column_double(s.st, i));
                puts_(b, num);
            } else {
                const void *v = type == SQLITE_BLOB ? sqlite3_column_blob(s.st, i)
                                                    : (const void *)sqlite3_column_text(s.st, i);
                int len = sqlite3_column_bytes(s.st, i);
                snprintf(num, sizeof num, "=%c%d:", type == SQLITE_BLOB ? 'b' : 't', len);
                puts_(b, num);
                put(b, v, (size_t)len);
                puts_(b, "\n");
            }
        }
        puts_(b, "\n");
    }
    fxl_stmt_finalize(&s);
    return rc < 0 ? rc : 0;
}

/* SHA-256 (hex) of the canonical content of entity row id; *exists 0 when
 * the row is gone. */
static int content_sha(fxl_ctx *ctx, const signed_table *t, int64_t id, char sha[65], int *exists)
{
    buf b = {0};
    char sql[256];
    size_t before;
    int rc;

    puts_(&b, "fxledger row v1\n");
    puts_(&b, t->entity);
    puts_(&b, "\n");
    before = b.len;
    snprintf(sql, sizeof sql, "SELECT * FROM %s WHERE id = :id", t->entity);
    if ((rc = put_rows(ctx, &b, sql, id)) != 0)
        goto cleanup;
    *exists = b.len > before;
    if (t->child) {
        puts_(&b, t->child);
        puts_(&b, "\n");
        snprintf(sql, sizeof sql, "SELECT * FROM %s WHERE %s = :id ORDER BY %s", t->child,
                 t->child_fk, t->child_order);
        if ((rc = put_rows(ctx, &b, sql, id)) != 0)
            goto cleanup;
    }
    if (b.oom) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory reading a signed row");
        goto cleanup;
    }
    fxl_sha256_hex(sha, b.p, b.len);
cleanup:
    free(b.p);
    return rc;
}

/* The bytes an Ed25519 signature covers. */
static char *signed_message(const char *entity, int64_t id, const char *login, const char *name,
                            const char *at, const char *meaning, const char *sha, size_t *len)
{
    size_t cap = strlen(entity) + strlen(login) + strlen(name) + strlen(at) + strlen(meaning) +
                 strlen(sha) + 96;
    char *m = malloc(cap);
    int n;

    if (!m)
        return NULL;
    n = snprintf(m, cap, "fxledger signature v1\n%s\n%lld\n%s\n%s\n%s\n%s\n%s", entity,
                 (long long)id, login, name, at, meaning, sha);
    *len = (size_t)n;
    return m;
}

/* ---- signing ----------------------------------------------------------------- */

int fxl_sign_require(fxl_ctx *ctx, const char *act)
{
    if (fxl_sign_ready(ctx))
        return 0;
    return fxl_fail(ctx, FXL_EPERM,
                    "%s is a signing act: re-enter the password of '%s' to sign it "
                    "(at the prompt, or with --password-fd)", act,
                    ctx->user_id ? ctx->user_login : "the acting user");
}

int fxl_signature_add(fxl_ctx *ctx, const char *entity, int64_t id, const char *meaning)
{
    const signed_table *t = find_table(entity);
    fxl_stmt s = FXL_STMT_INIT;
    unsigned char sig[crypto_sign_BYTES];
    char sig_hex[crypto_sign_BYTES * 2 + 1], sha[65], at[FXL_TIME_LEN], name[201] = "";
    char *msg = NULL;
    size_t len = 0;
    cJSON *audit = NULL;
    int64_t sig_id;
    int rc, exists = 0;

    if (!t)
        return fxl_fail(ctx, FXL_EINVAL, "internal: '%s' is not a signed table", entity);
    if ((rc = fxl_sign_require(ctx, meaning)) != 0)
        return rc;
    if (!meaning || strlen(meaning) < 1 || strlen(meaning) > 255)
        return fxl_fail(ctx, FXL_EINVAL, "internal: a signature's meaning must be 1 to 255 bytes");
    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT full_name FROM users WHERE id = :id")) != 0)
        return rc;
    fxl_stmt_bind_int(&s, ":id", ctx->user_id);
    if ((rc = fxl_stmt_step(&s)) == 1)
        snprintf(name, sizeof name, "%s", fxl_stmt_text(&s, 0));
    fxl_stmt_finalize(&s);
    if (rc < 0)
        return rc;
    if ((rc = content_sha(ctx, t, id, sha, &exists)) != 0)
        return rc;
    if (!exists)
        return fxl_fail(ctx, FXL_ENOTFOUND, "internal: %s row %lld to sign does not exist", entity,
                        (long long)id);
    fxl_now(ctx, at);
    if (!(msg = signed_message(entity, id, ctx->user_login, name, at, meaning, sha, &len)))
        return fxl_fail(ctx, FXL_EIO, "out of memory signing");
    crypto_sign_detached(sig, NULL, (const unsigned char *)msg, len, ctx->sign_sk);
    sodium_bin2hex(sig_hex, sizeof sig_hex, sig, sizeof sig);
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "INSERT INTO signatures (entity, entity_id, user_id, key_id, login, "
                               "printed_name, signed_at, meaning, content_sha256, signature) VALUES "
                               "(:e, :id, :u, :k, :login, :name, :at, :meaning, :sha, :sig)")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":e", entity);
    fxl_stmt_bind_int(&s, ":id", id);
    fxl_stmt_bind_int(&s, ":u", ctx->user_id);
    fxl_stmt_bind_int(&s, ":k", ctx->sign_key_id);
    fxl_stmt_bind_text(&s, ":login", ctx->user_login);
    fxl_stmt_bind_text(&s, ":name", name);
    fxl_stmt_bind_text(&s, ":at", at);
    fxl_stmt_bind_text(&s, ":meaning", meaning);
    fxl_stmt_bind_text(&s, ":sha", sha);
    fxl_stmt_bind_text(&s, ":sig", sig_hex);
    if ((rc = fxl_stmt_exec(&s)) != 0)
        goto cleanup;
    sig_id = sqlite3_last_insert_rowid(ctx->db);
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "entity", entity);
    cJSON_AddNumberToObject(audit, "entity_id", (double)id);
    cJSON_AddStringToObject(audit, "login", ctx->user_login);
    cJSON_AddStringToObject(audit, "printed_name", name);
    cJSON_AddStringToObject(audit, "meaning", meaning);
    cJSON_AddStringToObject(audit, "content_sha256", sha);
    cJSON_AddNumberToObject(audit, "key", (double)ctx->sign_key_id);
    rc = fxl_audit_append(ctx, "sign", "signatures", sig_id, audit);
cleanup:
    fxl_stmt_finalize(&s);
    cJSON_Delete(audit);
    free(msg);
    return rc;
}

/* ---- listing ------------------------------------------------------------------ */

int fxl_signature_list(fxl_ctx *ctx, const char *entity, int64_t entity_id,
                       fxl_signature **out, size_t *n)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_signature *list = NULL;
    size_t cap = 0, count = 0;
    int rc;

    *out = NULL;
    *n = 0;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT id, entity, entity_id, login, printed_name, signed_at, meaning "
                               "FROM signatures WHERE entity = :e AND (:id = 0 OR entity_id = :id) "
                               "ORDER BY id")) != 0)
        return rc;
    fxl_stmt_bind_text(&s, ":e", entity);
    fxl_stmt_bind_int(&s, ":id", entity_id);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        fxl_signature *g;
        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list, "listing signatures")) != 0)
            goto cleanup;
        g = &list[count++];
        g->id = fxl_stmt_int(&s, 0);
        snprintf(g->entity, sizeof g->entity, "%s", fxl_stmt_text(&s, 1));
        g->entity_id = fxl_stmt_int(&s, 2);
        snprintf(g->login, sizeof g->login, "%s", fxl_stmt_text(&s, 3));
        snprintf(g->printed_name, sizeof g->printed_name, "%s", fxl_stmt_text(&s, 4));
        snprintf(g->signed_at, sizeof g->signed_at, "%s", fxl_stmt_text(&s, 5));
        snprintf(g->meaning, sizeof g->meaning, "%s", fxl_stmt_text(&s, 6));
    }
    if (rc == 0) {
        *out = list;
        *n = count;
        list = NULL;
    }
cleanup:
    fxl_stmt_finalize(&s);
    free(list);
    return rc;
}

/* ---- verification --------------------------------------------------------------- */

static void note_bad(fxl_signature_report *r, const char *fmt, ...) __attribute__((format(printf, 2, 3)));

static void note_bad(fxl_signature_report *r, const char *fmt, ...)
{
    va_list ap;

    if (r->bad++ == 0) {
        va_start(ap, fmt);
        vsnprintf(r->first_bad, sizeof r->first_bad, fmt, ap);
        va_end(ap);
    }
}

/* Is this public key the one an audit row recorded when key_id was made? */
static int key_in_chain(fxl_ctx *ctx, int64_t key_id, int64_t user_id, const char *pk, int *ok)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc = fxl_stmt_prepare(&s, ctx,
                              "SELECT 1 FROM audit_log WHERE entity = 'signing_keys' AND entity_id = :k "
                              "AND action = 'create' AND json_valid(content) "
                              "AND json_extract(content, '$.public_key') = :pk "
                              "AND json_extract(content, '$.user_id') = :u");

    *ok = 0;
    if (rc != 0)
        return rc;
    fxl_stmt_bind_int(&s, ":k", key_id);
    fxl_stmt_bind_text(&s, ":pk", pk);
    fxl_stmt_bind_int(&s, ":u", user_id);
    rc = fxl_stmt_step(&s);
    if (rc >= 0) {
        *ok = rc;
        rc = 0;
    }
    fxl_stmt_finalize(&s);
    return rc;
}

static int check_signatures(fxl_ctx *ctx, fxl_signature_report *r)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT g.id, g.entity, g.entity_id, g.user_id, g.key_id, g.login, "
                               "g.printed_name, g.signed_at, g.meaning, g.content_sha256, g.signature, "
                               "k.public_key, k.user_id, u.login "
                               "FROM signatures g LEFT JOIN signing_keys k ON k.id = g.key_id "
                               "LEFT JOIN users u ON u.id = g.user_id ORDER BY g.id")) != 0)
        return rc;
    while ((rc = fxl_stmt_step(&s)) == 1) {
        int64_t sid = fxl_stmt_int(&s, 0), eid = fxl_stmt_int(&s, 2), uid = fxl_stmt_int(&s, 3);
        const char *entity = fxl_stmt_text(&s, 1), *pk_hex = fxl_stmt_text(&s, 11);
        const signed_table *t = find_table(entity);
        unsigned char pk[crypto_sign_PUBLICKEYBYTES], sig[crypto_sign_BYTES];
        char sha[65], *msg = NULL;
        size_t len = 0, pkl = 0, sgl = 0;
        int exists = 0, in_chain = 0, valid;

        r->checked++;
        if (!t) {
            note_bad(r, "signature %lld names '%s', which is not a signed table", (long long)sid, entity);
            continue;
        }
        if (fxl_stmt_is_null(&s, 11) || fxl_stmt_int(&s, 12) != uid ||
            strcmp(fxl_stmt_text(&s, 13), fxl_stmt_text(&s, 5)) != 0) {
            note_bad(r, "signature %lld on %s row %lld: its key or signer does not belong to user '%s'",
                     (long long)sid, entity, (long long)eid, fxl_stmt_text(&s, 5));
            continue;
        }
        if ((rc = key_in_chain(ctx, fxl_stmt_int(&s, 4), uid, pk_hex, &in_chain)) != 0)
            goto cleanup;
        if (!in_chain) {
            note_bad(r, "signature %lld on %s row %lld: the public key of '%s' is not the one the "
                     "audit chain recorded", (long long)sid, entity, (long long)eid, fxl_stmt_text(&s, 5));
            continue;
        }
        if ((rc = content_sha(ctx, t, eid, sha, &exists)) != 0)
            goto cleanup;
        if (!exists) {
            note_bad(r, "signature %lld: the signed %s row %lld is missing", (long long)sid, entity,
                     (long long)eid);
            continue;
        }
        if (sodium_hex2bin(pk, sizeof pk, pk_hex, strlen(pk_hex), NULL, &pkl, NULL) != 0 ||
            pkl != sizeof pk ||
            sodium_hex2bin(sig, sizeof sig, fxl_stmt_text(&s, 10), strlen(fxl_stmt_text(&s, 10)), NULL,
                           &sgl, NULL) != 0 || sgl != sizeof sig) {
            note_bad(r, "signature %lld on %s row %lld is malformed", (long long)sid, entity, (long long)eid);
            continue;
        }
        msg = signed_message(entity, eid, fxl_stmt_text(&s, 5), fxl_stmt_text(&s, 6),
                             fxl_stmt_text(&s, 7), fxl_stmt_text(&s, 8), sha, &len);
        if (!msg) {
            rc = fxl_fail(ctx, FXL_EIO, "out of memory verifying signatures");
            goto cleanup;
        }
        valid = crypto_sign_verify_detached(sig, (const unsigned char *)msg, len, pk) == 0;
        free(msg);
        if (!valid && strcmp(sha, fxl_stmt_text(&s, 9)) != 0)
            note_bad(r, "signature %lld of '%s' does not match %s row %lld: the row was altered after "
                     "it was signed", (long long)sid, fxl_stmt_text(&s, 5), entity, (long long)eid);
        else if (!valid)
            note_bad(r, "signature %lld of '%s' on %s row %lld does not verify: not made with the "
                     "signer's key", (long long)sid, fxl_stmt_text(&s, 5), entity, (long long)eid);
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc < 0 ? rc : 0;
}

/* Every row that must be signed has at least one signature (whose validity
 * check_signatures judged). */
static int check_required(fxl_ctx *ctx, fxl_signature_report *r)
{
    fxl_stmt s = FXL_STMT_INIT;
    char sql[512];
    size_t i;
    int rc = 0;

    for (i = 0; i < N_TABLES; i++) {
        const signed_table *t = &TABLES[i];
        if (t->must_sign && strcmp(t->must_sign, "0") == 0)
            continue;
        snprintf(sql, sizeof sql,
                 "SELECT x.id FROM %s x WHERE x.id > coalesce((SELECT after_id FROM "
                 "signature_watermarks WHERE entity = '%s'), 0) AND (%s) AND NOT EXISTS (SELECT 1 "
                 "FROM signatures g WHERE g.entity = '%s' AND g.entity_id = x.id) ORDER BY x.id",
                 t->entity, t->entity, t->must_sign ? t->must_sign : "1", t->entity);
        if ((rc = fxl_stmt_prepare(&s, ctx, sql)) != 0)
            return rc;
        while ((rc = fxl_stmt_step(&s)) == 1)
            note_bad(r, "%s row %lld carries no signature: it was not written by a signing act "
                     "(forged?)", t->entity, (long long)fxl_stmt_int(&s, 0));
        fxl_stmt_finalize(&s);
        if (rc < 0)
            return rc;
    }
    return 0;
}

int fxl_signature_verify(fxl_ctx *ctx, fxl_signature_report *out)
{
    int rc;

    memset(out, 0, sizeof *out);
    if (sodium_init() < 0)
        return fxl_fail(ctx, FXL_EIO, "cannot initialise libsodium");
    if ((rc = check_signatures(ctx, out)) != 0 || (rc = check_required(ctx, out)) != 0)
        return rc;
    if (out->bad)
        return fxl_fail(ctx, FXL_ECONFLICT, "%s%s", out->first_bad,
                        out->bad > 1 ? " (and more signature failures)" : "");
    return 0;
}
