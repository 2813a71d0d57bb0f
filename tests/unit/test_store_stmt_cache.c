/* Unit tests of the statement cache (src/store/stmt.c,
 * fxl_stmt_prepare_cached): a statement is prepared once per connection,
 * lent reset and without bindings, and given back reset on every path, so
 * that it never holds a read transaction open (which would keep a
 * checkpoint from finishing and make a later BEGIN IMMEDIATE fail); a
 * nested use, a full cache and a reused buffer are safe. The SQLite
 * behaviour relied on is from sqlite.org/wal.html ("checkpoint starvation",
 * readers block a TRUNCATE checkpoint) and sqlite.org/rescode.html
 * (SQLITE_BUSY_SNAPSHOT). Invented data. */
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
#include "store/ctx.h"
#include "store/stmt.h"

typedef struct fixture {
    char dir[64];
    char path[96];
    fxl_ctx *ctx;
    sqlite3 *other;   /* a second connection: another process's view */
} fixture;

static int setup(void **state)
{
    fixture *f = calloc(1, sizeof *f);

    snprintf(f->dir, sizeof f->dir, "/tmp/fxlstcXXXXXX");
    assert_non_null(mkdtemp(f->dir));
    snprintf(f->path, sizeof f->path, "%s/t.db", f->dir);
    setenv("FXLEDGER_NOW", "2026-11-02T09:00:00Z", 1);
    assert_int_equal(fxl_open(&f->ctx, f->path, FXL_OPEN_CREATE), 0);
    assert_int_equal(fxl_exec(f->ctx, "CREATE TABLE scratch (x INTEGER PRIMARY KEY); "
                                      "INSERT INTO scratch VALUES (1), (2), (3)"), 0);
    assert_int_equal(sqlite3_open(f->path, &f->other), SQLITE_OK);
    sqlite3_busy_timeout(f->other, 50);
    *state = f;
    return 0;
}

static int teardown(void **state)
{
    fixture *f = *state;
    char cmd[128];

    sqlite3_close(f->other);
    fxl_close(f->ctx);
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", f->dir);
    if (system(cmd) != 0)
        return -1;
    free(f);
    return 0;
}

/* Another connection commits a row, then checkpoints the whole WAL and
 * truncates it: 1 when the checkpoint finished, 0 when a reader of an
 * older snapshot kept it from finishing. */
static int other_writes_and_checkpoints(fixture *f)
{
    sqlite3_stmt *st = NULL;
    int done = 0;

    assert_int_equal(sqlite3_exec(f->other, "INSERT INTO scratch (x) VALUES (NULL)", NULL, NULL, NULL),
                     SQLITE_OK);
    assert_int_equal(sqlite3_prepare_v2(f->other, "PRAGMA wal_checkpoint(TRUNCATE)", -1, &st, NULL),
                     SQLITE_OK);
    if (sqlite3_step(st) == SQLITE_ROW)
        done = sqlite3_column_int(st, 0) == 0;   /* column 0: 1 when it could not finish */
    sqlite3_finalize(st);
    return done;
}

static const char *const COUNT_SQL = "SELECT x FROM scratch ORDER BY x";

static void test_store_stmt_cache_prepares_once_and_lends_clean(void **state)
{
    fixture *f = *state;
    fxl_stmt a = FXL_STMT_INIT, b = FXL_STMT_INIT;
    sqlite3_stmt *first;
    int before = fxl_stmt_cache_size(f->ctx);

    assert_int_equal(fxl_stmt_prepare_cached(&a, f->ctx, "SELECT x FROM scratch WHERE x = :x"), 0);
    first = a.st;
    fxl_stmt_bind_int(&a, ":x", 2);
    assert_int_equal(fxl_stmt_step(&a), 1);
    assert_int_equal(fxl_stmt_int(&a, 0), 2);
    fxl_stmt_finalize(&a);
    assert_null(a.st);
    assert_int_equal(fxl_stmt_cache_size(f->ctx), before + 1);
    /* The same statement again, its binding cleared: :x is NULL, no row. */
    assert_int_equal(fxl_stmt_prepare_cached(&b, f->ctx, "SELECT x FROM scratch WHERE x = :x"), 0);
    assert_ptr_equal(b.st, first);
    assert_int_equal(fxl_stmt_step(&b), 0);
    fxl_stmt_finalize(&b);
    assert_int_equal(fxl_stmt_cache_size(f->ctx), before + 1);
    assert_int_equal(fxl_stmt_cache_busy(f->ctx), 0);
}

static void test_store_stmt_cache_given_back_reset_on_every_path(void **state)
{
    fixture *f = *state;
    fxl_stmt s = FXL_STMT_INIT;
    sqlite3_stmt *raw = NULL;

    /* Control: a statement stepped and not reset is a reader that keeps
     * the other connection's checkpoint from finishing. */
    assert_int_equal(sqlite3_prepare_v2(f->ctx->db, COUNT_SQL, -1, &raw, NULL), SQLITE_OK);
    assert_int_equal(sqlite3_step(raw), SQLITE_ROW);
    assert_int_equal(other_writes_and_checkpoints(f), 0);
    sqlite3_finalize(raw);
    assert_int_equal(other_writes_and_checkpoints(f), 1);

    /* A cached statement left after its first row (a caller that found
     * what it wanted) is reset when given back. */
    assert_int_equal(fxl_stmt_prepare_cached(&s, f->ctx, COUNT_SQL), 0);
    assert_int_equal(fxl_stmt_step(&s), 1);
    assert_int_equal(fxl_stmt_cache_busy(f->ctx), 1);
    fxl_stmt_finalize(&s);
    assert_int_equal(fxl_stmt_cache_busy(f->ctx), 0);
    assert_int_equal(other_writes_and_checkpoints(f), 1);

    /* An error path: the step fails (a duplicate key) and the caller goes
     * to cleanup. */
    assert_int_equal(fxl_stmt_prepare_cached(&s, f->ctx, "INSERT INTO scratch (x) VALUES (:x)"), 0);
    fxl_stmt_bind_int(&s, ":x", 1);
    assert_true(fxl_stmt_exec(&s) < 0);
    fxl_stmt_finalize(&s);
    /* A bind error (unknown parameter) never reaches the step. */
    assert_int_equal(fxl_stmt_prepare_cached(&s, f->ctx, COUNT_SQL), 0);
    fxl_stmt_bind_int(&s, ":nope", 1);
    assert_true(fxl_stmt_step(&s) < 0);
    fxl_stmt_finalize(&s);
    assert_int_equal(fxl_stmt_cache_busy(f->ctx), 0);
    assert_int_equal(other_writes_and_checkpoints(f), 1);

    /* And this connection's next write transaction starts: no snapshot of
     * before the other connection's commits is held (SQLITE_BUSY_SNAPSHOT). */
    assert_int_equal(fxl_stmt_prepare_cached(&s, f->ctx, COUNT_SQL), 0);
    assert_int_equal(fxl_stmt_step(&s), 1);
    fxl_stmt_finalize(&s);
    assert_int_equal(sqlite3_exec(f->other, "INSERT INTO scratch (x) VALUES (NULL)", NULL, NULL, NULL),
                     SQLITE_OK);
    assert_int_equal(fxl_begin(f->ctx), 0);
    assert_int_equal(fxl_exec(f->ctx, "INSERT INTO scratch (x) VALUES (NULL)"), 0);
    assert_int_equal(fxl_exec(f->ctx, "COMMIT"), 0);
}

static void test_store_stmt_cache_nested_use_gets_its_own(void **state)
{
    fixture *f = *state;
    fxl_stmt outer = FXL_STMT_INIT, inner = FXL_STMT_INIT;
    int n = 0;

    assert_int_equal(fxl_stmt_prepare_cached(&outer, f->ctx, COUNT_SQL), 0);
    while (fxl_stmt_step(&outer) == 1) {
        /* The same SQL while the cached one is stepping: a statement of its
         * own, which does not disturb the outer iteration. */
        assert_int_equal(fxl_stmt_prepare_cached(&inner, f->ctx, COUNT_SQL), 0);
        assert_ptr_not_equal(inner.st, outer.st);
        assert_null(inner.slot);
        assert_int_equal(fxl_stmt_step(&inner), 1);
        assert_int_equal(fxl_stmt_int(&inner, 0), 1);
        fxl_stmt_finalize(&inner);
        n++;
    }
    fxl_stmt_finalize(&outer);
    assert_int_equal(n, 3);
    assert_int_equal(fxl_stmt_cache_busy(f->ctx), 0);
}

static void test_store_stmt_cache_key_is_the_text(void **state)
{
    fixture *f = *state;
    fxl_stmt s = FXL_STMT_INIT;
    char buf[64];

    /* A buffer reused for other SQL is never handed the old statement. */
    snprintf(buf, sizeof buf, "SELECT 41 + 1");
    assert_int_equal(fxl_stmt_prepare_cached(&s, f->ctx, buf), 0);
    assert_int_equal(fxl_stmt_step(&s), 1);
    assert_int_equal(fxl_stmt_int(&s, 0), 42);
    fxl_stmt_finalize(&s);
    snprintf(buf, sizeof buf, "SELECT 6 * 7 + 1");
    assert_int_equal(fxl_stmt_prepare_cached(&s, f->ctx, buf), 0);
    assert_int_equal(fxl_stmt_step(&s), 1);
    assert_int_equal(fxl_stmt_int(&s, 0), 43);
    fxl_stmt_finalize(&s);
}

static void test_store_stmt_cache_full_falls_back(void **state)
{
    static char sql[FXL_STMT_CACHE_SLOTS + 8][32];
    fixture *f = *state;
    fxl_stmt s = FXL_STMT_INIT;
    int i;

    for (i = 0; i < FXL_STMT_CACHE_SLOTS + 8; i++) {
        snprintf(sql[i], sizeof sql[i], "SELECT %d", i);
        assert_int_equal(fxl_stmt_prepare_cached(&s, f->ctx, sql[i]), 0);
        assert_int_equal(fxl_stmt_step(&s), 1);
        assert_int_equal(fxl_stmt_int(&s, 0), i);
        fxl_stmt_finalize(&s);
    }
    assert_int_equal(fxl_stmt_cache_size(f->ctx), FXL_STMT_CACHE_SLOTS);
    assert_int_equal(fxl_stmt_cache_busy(f->ctx), 0);
    /* fxl_close (teardown) finalizes them all: a leak would show under the
     * sanitizers. */
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_store_stmt_cache_prepares_once_and_lends_clean, setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_stmt_cache_given_back_reset_on_every_path, setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_stmt_cache_nested_use_gets_its_own, setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_stmt_cache_key_is_the_text, setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_stmt_cache_full_falls_back, setup, teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
