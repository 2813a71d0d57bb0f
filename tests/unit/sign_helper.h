/* Test fixture only: lets a unit test act as a user who can sign, without
 * passwords or Argon2id. It makes the user an Ed25519 key pair (recorded in
 * signing_keys and the audit chain as the program does) and puts the secret
 * key straight into the context, where fxl_sign_begin() would put it after
 * checking the password. The key is not recorded in the audit chain, so
 * fxl_signature_verify() would reject its signatures. The program itself never does this; the password
 * path is tested through the command line (tests/cli/test_identity.py). */
#ifndef FXL_TEST_SIGN_HELPER_H
#define FXL_TEST_SIGN_HELPER_H

#include <sodium.h>
#include <stdio.h>
#include <string.h>

#include "fxl/auth.h"
#include "store/ctx.h"
#include "store/seal.h"

typedef struct test_key {
    const fxl_ctx *ctx;
    int64_t user_id, key_id;
    unsigned char sk[crypto_sign_SECRETKEYBYTES];
} test_key;

static test_key test_keys[32];
static int test_nkeys;

static int test_make_key(fxl_ctx *ctx, test_key *k)
{
    unsigned char pk[crypto_sign_PUBLICKEYBYTES];
    char hex[crypto_sign_PUBLICKEYBYTES * 2 + 1], sql[256];
    int rc;

    crypto_sign_keypair(pk, k->sk);
    sodium_bin2hex(hex, sizeof hex, pk, sizeof pk);
    if ((rc = fxl_begin(ctx)) != 0)
        return rc;
    snprintf(sql, sizeof sql, "INSERT INTO signing_keys (user_id, public_key, created_at) "
             "VALUES (%lld, '%s', '2026-01-01T00:00:00Z')", (long long)k->user_id, hex);
    if (sqlite3_exec(ctx->db, sql, NULL, NULL, NULL) != SQLITE_OK) {
        fxl_rollback(ctx);
        return FXL_EDB;
    }
    k->key_id = sqlite3_last_insert_rowid(ctx->db);
    /* No audit row: unit tests count audit rows of the acts they test and
     * never run the signature check of verify. So no seal either (the
     * commit would add an audit row for the unsealed key, store/seal.c). */
    fxl_seal_discard(ctx);
    rc = 0;
    if (rc == 0)
        rc = fxl_commit(ctx);
    if (rc != 0)
        fxl_rollback(ctx);
    return rc;
}

/* fxl_set_user(login), then the user's signing key opened (made on first
 * use). Returns fxl_set_user's code when that fails. */
static inline int test_sign_as(fxl_ctx *ctx, const char *login)
{
    test_key *k = NULL;
    int i, rc;

    if (sodium_init() < 0)
        return FXL_EIO;
    fxl_sign_end(ctx);
    if ((rc = fxl_set_user(ctx, login)) != 0)
        return rc;
    for (i = 0; i < test_nkeys; i++)
        if (test_keys[i].ctx == ctx && test_keys[i].user_id == ctx->user_id)
            k = &test_keys[i];
    if (!k) {
        if (test_nkeys >= 32)
            return FXL_EIO;
        k = &test_keys[test_nkeys++];
        k->ctx = ctx;
        k->user_id = ctx->user_id;
        if ((rc = test_make_key(ctx, k)) != 0) {
            test_nkeys--;
            return rc;
        }
    }
    if (!(ctx->sign_sk = sodium_malloc(crypto_sign_SECRETKEYBYTES)))
        return FXL_EIO;
    memcpy(ctx->sign_sk, k->sk, crypto_sign_SECRETKEYBYTES);
    ctx->sign_key_id = k->key_id;
    ctx->sign_user_id = k->user_id;
    return 0;
}

/* Forget the keys of a closed context (a later context may reuse the
 * address). */
static inline void test_sign_forget(const fxl_ctx *ctx)
{
    int i, j = 0;

    for (i = 0; i < test_nkeys; i++)
        if (test_keys[i].ctx != ctx)
            test_keys[j++] = test_keys[i];
    test_nkeys = j;
}

#endif
