/* SHA-256 of the audit chain (libsodium through fxl_sha256_hex) against the
 * published test vectors, and the chain's canonical form as docs/audit.md
 * describes it, recomputed independently from the stored rows. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <cmocka.h>

#include "fxl/audit.h"
#include "fxl/fxl.h"
#include "fxl/users.h"
#include "store/ctx.h"

/* FIPS 180-2 (Secure Hash Standard, 2002), Appendix B.1: one-block message
 * "abc". */
static void test_sha256_fips180_2_abc(void **state)
{
    char hex[65];

    (void)state;
    fxl_sha256_hex(hex, "abc", 3);
    assert_string_equal(hex, "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
}

/* FIPS 180-2 Appendix B.2: the 448-bit (56-byte) two-block message. */
static void test_sha256_fips180_2_two_blocks(void **state)
{
    const char *msg = "abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq";
    char hex[65];

    (void)state;
    assert_int_equal(strlen(msg), 56);
    fxl_sha256_hex(hex, msg, strlen(msg));
    assert_string_equal(hex, "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
}

/* FIPS 180-2 Appendix B.3: one million repetitions of 'a'. */
static void test_sha256_fips180_2_million_a(void **state)
{
    size_t n = 1000000;
    char *msg = malloc(n), hex[65];

    (void)state;
    assert_non_null(msg);
    memset(msg, 'a', n);
    fxl_sha256_hex(hex, msg, n);
    free(msg);
    assert_string_equal(hex, "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
}

/* The empty message (length 0). Not in FIPS 180-2 itself: the value of the
 * NIST CAVP SHA-256 short-message test (Len = 0), from memory. */
static void test_sha256_empty_message(void **state)
{
    char hex[65];

    (void)state;
    fxl_sha256_hex(hex, "", 0);
    assert_string_equal(hex, "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
}

/* docs/audit.md: hash = SHA-256 over prev_hash, id, at, user, action,
 * entity, entity_id ("" when NULL) and content joined by '\n', with
 * prev_hash of the first row 64 zeros. Recomputed here from the stored rows
 * of a fresh database, without the store's code. */
static void test_sha256_audit_chain_canonical_form(void **state)
{
    char dir[] = "/tmp/fxl-sha-XXXXXX", path[64], cmd[96], prev[65], want[65];
    fxl_ctx *ctx = NULL;
    sqlite3_stmt *st = NULL;
    int rows = 0;

    (void)state;
    assert_non_null(mkdtemp(dir));
    snprintf(path, sizeof path, "%s/t.db", dir);
    setenv("FXLEDGER_NOW", "2026-11-02T09:00:00Z", 1);
    assert_int_equal(fxl_open(&ctx, path, FXL_OPEN_CREATE), 0);
    assert_int_equal(fxl_init_department(ctx, "Invented Department", "UTC", "admin", "A. Admin"), 0);
    assert_int_equal(sqlite3_prepare_v2(ctx->db,
                                        "SELECT id, at, user, action, entity, entity_id, content, "
                                        "prev_hash, hash FROM audit_log ORDER BY id",
                                        -1, &st, NULL), SQLITE_OK);
    memset(prev, '0', 64);
    prev[64] = '\0';
    while (sqlite3_step(st) == SQLITE_ROW) {
        char text[4096], eid[24] = "";
        int n;
        if (sqlite3_column_type(st, 5) != SQLITE_NULL)
            snprintf(eid, sizeof eid, "%lld", (long long)sqlite3_column_int64(st, 5));
        n = snprintf(text, sizeof text, "%s\n%lld\n%s\n%s\n%s\n%s\n%s\n%s", prev,
                     (long long)sqlite3_column_int64(st, 0), sqlite3_column_text(st, 1),
                     sqlite3_column_text(st, 2), sqlite3_column_text(st, 3),
                     sqlite3_column_text(st, 4), eid, sqlite3_column_text(st, 6));
        assert_true(n > 0 && (size_t)n < sizeof text);
        assert_string_equal((const char *)sqlite3_column_text(st, 7), prev);
        fxl_sha256_hex(want, text, (size_t)n);
        assert_string_equal((const char *)sqlite3_column_text(st, 8), want);
        memcpy(prev, want, sizeof prev);
        rows++;
    }
    sqlite3_finalize(st);
    assert_true(rows >= 2);
    fxl_close(ctx);
    snprintf(cmd, sizeof cmd, "rm -rf %s", dir);
    assert_int_equal(system(cmd), 0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_sha256_fips180_2_abc),
        cmocka_unit_test(test_sha256_fips180_2_two_blocks),
        cmocka_unit_test(test_sha256_fips180_2_million_a),
        cmocka_unit_test(test_sha256_empty_message),
        cmocka_unit_test(test_sha256_audit_chain_canonical_form),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
