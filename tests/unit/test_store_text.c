/* Unit tests of the store's last line of defence against text that is not
 * UTF-8 (src/store/stmt.c) and of the checks 'init' shares with the other
 * commands (src/store/users.c): a library caller - the command line today, a
 * web console later - cannot put such text in the record by any path.
 * Invented data; byte 0xFF never appears in UTF-8 (RFC 3629). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <cmocka.h>

#include "fxl/fxl.h"
#include "fxl/patients.h"
#include "fxl/users.h"
#include "store/ctx.h"

typedef struct fixture {
    char dir[64];
    char path[96];
    fxl_ctx *ctx;
} fixture;

static int setup(void **state)
{
    fixture *f = calloc(1, sizeof *f);

    snprintf(f->dir, sizeof f->dir, "/tmp/fxltxtXXXXXX");
    assert_non_null(mkdtemp(f->dir));
    snprintf(f->path, sizeof f->path, "%s/t.db", f->dir);
    setenv("FXLEDGER_NOW", "2026-11-02T09:00:00Z", 1);
    assert_int_equal(fxl_open(&f->ctx, f->path, FXL_OPEN_CREATE), 0);
    *state = f;
    return 0;
}

static int teardown(void **state)
{
    fixture *f = *state;
    char cmd[128];

    fxl_close(f->ctx);
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", f->dir);
    if (system(cmd) != 0)
        return -1;
    free(f);
    return 0;
}

static int64_t count(fixture *f, const char *sql)
{
    sqlite3_stmt *st = NULL;
    int64_t n = -1;

    if (sqlite3_prepare_v2(f->ctx->db, sql, -1, &st, NULL) == SQLITE_OK && sqlite3_step(st) == SQLITE_ROW)
        n = sqlite3_column_int64(st, 0);
    sqlite3_finalize(st);
    return n;
}

static void test_store_text_invalid_utf8_never_written(void **state)
{
    fixture *f = *state;
    int64_t audit;

    assert_int_equal(fxl_init_department(f->ctx, "Invented", "UTC", "admin", "Test Admin"), 0);
    audit = count(f, "SELECT count(*) FROM audit_log");
    /* patients.c checks length and control characters only: the bytes
     * reach the statement helper, which refuses them. */
    assert_int_equal(fxl_patient_add(f->ctx, NULL, "P-1", "Bad\xff\xfeName", NULL, NULL), FXL_EINVAL);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "not valid UTF-8"));
    assert_non_null(strstr(fxl_errmsg(f->ctx), "nothing written"));
    assert_int_equal(fxl_patient_add(f->ctx, NULL, "P-\xc0\xaf", "Overlong", NULL, NULL), FXL_EINVAL);
    assert_int_equal(fxl_user_add(f->ctx, NULL, "ann", "Ann \xed\xa0\x80", FXL_ROLE_THERAPIST), FXL_EINVAL);
    assert_int_equal(count(f, "SELECT count(*) FROM patients"), 0);
    assert_int_equal(count(f, "SELECT count(*) FROM users"), 1);
    assert_int_equal(count(f, "SELECT count(*) FROM audit_log"), audit);
    /* Valid UTF-8 with quotes and SQL-like text is stored as given. */
    assert_int_equal(fxl_patient_add(f->ctx, NULL, "x'); DROP TABLE patients;--", "Zo\xc3\xab O'Brien",
                                     NULL, NULL), 0);
    assert_int_equal(count(f, "SELECT count(*) FROM patients WHERE family_name = 'Zo\xc3\xab O''Brien'"), 1);
}

static void test_store_text_init_checks_like_the_other_commands(void **state)
{
    fixture *f = *state;
    char long_name[300];

    memset(long_name, 'D', sizeof long_name - 1);
    long_name[sizeof long_name - 1] = '\0';
    assert_int_equal(fxl_init_department(f->ctx, long_name, "UTC", "admin", "Test Admin"), FXL_EINVAL);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "department"));
    assert_int_equal(fxl_init_department(f->ctx, "Invented", "Mars/Olympus_Mons", "admin", "Test Admin"),
                     FXL_EINVAL);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "Mars/Olympus_Mons"));
    assert_int_equal(fxl_init_department(f->ctx, "Invented", "UTC", "bad login!", "Test Admin"), FXL_EINVAL);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "login"));
    assert_int_equal(fxl_init_department(f->ctx, "Invented", "UTC", "admin", ""), FXL_EINVAL);
    assert_int_equal(count(f, "SELECT count(*) FROM users"), 0);
    assert_int_equal(count(f, "SELECT count(*) FROM settings"), 0);
    assert_int_equal(count(f, "SELECT count(*) FROM audit_log"), 0);
    assert_int_equal(fxl_init_department(f->ctx, "Invented", "UTC", "admin", "Test Admin"), 0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_store_text_invalid_utf8_never_written, setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_text_init_checks_like_the_other_commands, setup, teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
