/* Unit tests of the password policy (src/store/auth.c) and of the signature
 * over a row's canonical content (src/store/signature.c). Policy from NIST
 * SP 800-63B section 5.1.1.2 (length rules, no composition rules; fxledger's
 * choices of 12 to 128 characters and "not containing the login" are in
 * docs/security.md). Ed25519 is libsodium's crypto_sign (RFC 8032). The
 * department, users and passwords are invented. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "fxl/auth.h"
#include "fxl/fxl.h"
#include "fxl/thresholds.h"
#include "fxl/users.h"
#include "sign_helper.h"
#include "store/ctx.h"

typedef struct fixture {
    char dir[64], path[96];
    fxl_ctx *ctx;
} fixture;

static int setup(void **state)
{
    fixture *f = calloc(1, sizeof *f);

    snprintf(f->dir, sizeof f->dir, "/tmp/fxl-auth-XXXXXX");
    if (!f || !mkdtemp(f->dir))
        return -1;
    snprintf(f->path, sizeof f->path, "%s/t.db", f->dir);
    setenv("FXLEDGER_NOW", "2026-11-02T09:00:00Z", 1);
    if (fxl_open(&f->ctx, f->path, FXL_OPEN_CREATE) != 0 ||
        fxl_init_department(f->ctx, "Invented Department", "UTC", "admin", "A. Admin") != 0)
        return -1;
    *state = f;
    return 0;
}

static int teardown(void **state)
{
    fixture *f = *state;
    char cmd[128];

    test_sign_forget(f->ctx);
    fxl_close(f->ctx);
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", f->dir);
    if (system(cmd) != 0)
        return -1;
    free(f);
    return 0;
}

static void test_auth_policy_length(void **state)
{
    fixture *f = *state;

    assert_int_equal(fxl_password_policy_check(f->ctx, "tina", "eleven-char"), FXL_EINVAL);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "12 to 128"));
    assert_int_equal(fxl_password_policy_check(f->ctx, "tina", "twelve-chars"), 0);
    /* counted in characters, not bytes: 12 x U+00E9 is 24 bytes (Unicode) */
    assert_int_equal(fxl_password_policy_check(f->ctx, "tina",
                     "\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"
                     "\xc3\xa9\xc3\xa9\xc3\xa8"), 0);
    {
        char pw[130];
        memset(pw, 'a', 128);
        pw[0] = 'b';
        pw[128] = '\0';
        assert_int_equal(fxl_password_policy_check(f->ctx, "tina", pw), 0);
        pw[128] = 'c';
        pw[129] = '\0';
        assert_int_equal(fxl_password_policy_check(f->ctx, "tina", pw), FXL_EINVAL);
    }
}

static void test_auth_policy_content(void **state)
{
    fixture *f = *state;

    assert_int_equal(fxl_password_policy_check(f->ctx, "tina", "my name is Tina, ok?"), FXL_EINVAL);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "login"));
    /* the message never holds the password */
    assert_null(strstr(fxl_errmsg(f->ctx), "my name is"));
    assert_int_equal(fxl_password_policy_check(f->ctx, "tina", "zzzzzzzzzzzzzzzz"), FXL_EINVAL);
    assert_int_equal(fxl_password_policy_check(f->ctx, "tina", "line\nbreak inside"), FXL_EINVAL);
    assert_int_equal(fxl_password_policy_check(f->ctx, "tina", "bad \xff byte here"), FXL_EINVAL);
    /* no composition rules (NIST SP 800-63B 5.1.1.2): lower-case words pass */
    assert_int_equal(fxl_password_policy_check(f->ctx, "tina", "correct horse battery"), 0);
}

/* A signing act refuses without an opened key and writes nothing; with one,
 * the signature verifies, and stops verifying when the row changes. */
static void test_auth_signature_bound_to_row(void **state)
{
    fixture *f = *state;
    fxl_threshold_change chg;
    fxl_threshold_set saved;
    fxl_signature_report rep;
    fxl_signature *g = NULL;
    size_t n = 0;

    fxl_threshold_change_init(&chg);
    chg.name = "default";
    chg.tolerance_pct = 5;
    chg.action_pct = 8;
    chg.effective_from = "2026-01-01T00:00:00Z";
    assert_int_equal(fxl_thresholds_save(f->ctx, &saved, &chg), FXL_EPERM);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "signing act"));
    assert_int_equal(test_sign_as(f->ctx, "admin"), 0);
    assert_int_equal(fxl_thresholds_save(f->ctx, &saved, &chg), 0);
    assert_int_equal(fxl_signature_list(f->ctx, "threshold_sets", saved.id, &g, &n), 0);
    assert_int_equal(n, 1);
    assert_string_equal(g[0].login, "admin");
    assert_string_equal(g[0].printed_name, "A. Admin");
    assert_string_equal(g[0].meaning, "levels in force");
    assert_string_equal(g[0].signed_at, "2026-11-02T09:00:00Z");
    free(g);
    /* The helper's key is not in the audit chain: verify says so. */
    assert_int_equal(fxl_signature_verify(f->ctx, &rep), FXL_ECONFLICT);
    assert_non_null(strstr(rep.first_bad, "not the one the audit chain recorded"));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_auth_policy_length, setup, teardown),
        cmocka_unit_test_setup_teardown(test_auth_policy_content, setup, teardown),
        cmocka_unit_test_setup_teardown(test_auth_signature_bound_to_row, setup, teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
