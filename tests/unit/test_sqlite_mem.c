/* Unit tests of SQLite's allocator for one-thread processes
 * (src/store/sqlite_mem.c). The contract checked is the one SQLite's
 * documentation asks of an application allocator (sqlite.org/c3ref/
 * mem_methods.html: xMalloc, xFree, xRealloc like the C library's, xSize
 * the usable size of a block, xRoundup what xMalloc would give; 8-byte
 * alignment, sqlite.org/malloc.html): every block is aligned, at least as
 * large as asked, never overlaps another live block (each is filled with a
 * pattern of its own and checked at the end), and keeps its contents
 * through a realloc across the small and large sizes. Then SQLite itself
 * runs on it: 20,000 rows of text and blobs of random lengths inserted,
 * read back and compared byte for byte with the C-side copy, and
 * integrity_check. In the sanitizer build the allocator is left out on
 * purpose (AddressSanitizer must see every block) and the same checks run
 * on the C library's malloc. Random data from a fixed seed. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>
#include <sqlite3.h>

#include "fxl/fxl.h"
#include "store/sqlite_mem.h"

#define LIVE 4000
#define STEPS 60000

static uint64_t rng = 0x9e3779b97f4a7c15u;

static uint32_t next_random(void)   /* xorshift64* */
{
    rng ^= rng >> 12;
    rng ^= rng << 25;
    rng ^= rng >> 27;
    return (uint32_t)((rng * 2685821657736338717u) >> 32);
}

/* Mostly the small sizes SQLite asks for, some page buffers, a few large. */
static int random_size(void)
{
    uint32_t r = next_random() % 100;
    if (r < 80)
        return 1 + (int)(next_random() % 1100);
    if (r < 97)
        return 3000 + (int)(next_random() % 2000);
    return 60000 + (int)(next_random() % 100000);
}

static unsigned char pattern(size_t slot, size_t i)
{
    return (unsigned char)(slot * 31u + i * 7u + 1u);
}

static void fill(unsigned char *p, size_t n, size_t slot)
{
    for (size_t i = 0; i < n; i++)
        p[i] = pattern(slot, i);
}

static void assert_filled(const unsigned char *p, size_t n, size_t slot)
{
    for (size_t i = 0; i < n; i++)
        if (p[i] != pattern(slot, i))
            fail_msg("block %zu: byte %zu of %zu changed", slot, i, n);
}

static void assert_block(void *p, int asked)
{
    assert_non_null(p);
    assert_int_equal((uintptr_t)p % 8, 0);
    sqlite3_uint64 usable = sqlite3_msize(p);
    assert_true(usable >= (sqlite3_uint64)asked);
    if (fxl_sqlite_mem_installed()) {
        /* the header (8) and the request rounded up to 16 bytes */
        assert_int_equal(usable, ((sqlite3_uint64)asked + 8 + 15) / 16 * 16 - 8);
    }
}

static void test_installed_in_a_one_thread_process(void **state)
{
    (void)state;
    const char *choice = getenv("FXLEDGER_SQLITE_MALLOC");
    int wanted = FXL_SQLITE_MEM_BUILT && !(choice && strcmp(choice, "system") == 0);
    assert_int_equal(fxl_sqlite_mem_installed(), wanted);
    /* Once SQLite has started, nothing changes. */
    int before = fxl_sqlite_mem_installed();
    assert_int_equal(sqlite3_initialize(), SQLITE_OK);
    fxl_store_configure(1);
    assert_int_equal(fxl_sqlite_mem_installed(), before);
}

static void test_blocks_aligned_sized_and_apart(void **state)
{
    static unsigned char *block[LIVE];
    static int size[LIVE];
    (void)state;

    for (int step = 0; step < STEPS; step++) {
        size_t slot = next_random() % LIVE;
        uint32_t op = next_random() % 3;
        if (!block[slot]) {
            size[slot] = random_size();
            block[slot] = sqlite3_malloc(size[slot]);
            assert_block(block[slot], size[slot]);
            fill(block[slot], (size_t)size[slot], slot);
        } else if (op == 0) {
            assert_filled(block[slot], (size_t)size[slot], slot);
            sqlite3_free(block[slot]);
            block[slot] = NULL;
        } else {
            /* grow or shrink, across the small/large boundary too */
            int n = random_size();
            assert_filled(block[slot], (size_t)size[slot], slot);
            unsigned char *q = sqlite3_realloc(block[slot], n);
            assert_block(q, n);
            assert_filled(q, (size_t)(n < size[slot] ? n : size[slot]), slot);
            block[slot] = q;
            size[slot] = n;
            fill(q, (size_t)n, slot);
        }
    }
    for (size_t slot = 0; slot < LIVE; slot++) {
        if (block[slot]) {
            assert_filled(block[slot], (size_t)size[slot], slot);
            sqlite3_free(block[slot]);
        }
    }
}

static void test_small_block_reused_for_its_class(void **state)
{
    (void)state;
    if (!fxl_sqlite_mem_installed())
        skip();
    void *a = sqlite3_malloc(100);
    sqlite3_free(a);
    void *b = sqlite3_malloc(97);     /* same 16-byte class as 100 */
    assert_ptr_equal(a, b);
    void *c = sqlite3_realloc(b, 104); /* still the same block */
    assert_ptr_equal(b, c);
    sqlite3_free(c);
}

static void test_sqlite_runs_on_it(void **state)
{
    enum { ROWS = 20000 };
    static char *text[ROWS];
    static int text_len[ROWS], blob_len[ROWS];
    sqlite3 *db;
    sqlite3_stmt *st;
    (void)state;

    assert_int_equal(sqlite3_open(":memory:", &db), SQLITE_OK);
    assert_int_equal(sqlite3_exec(db, "CREATE TABLE t (id INTEGER PRIMARY KEY, s TEXT, b BLOB);"
                                      "CREATE INDEX t_by_s ON t (s);"
                                      "BEGIN", NULL, NULL, NULL), SQLITE_OK);
    assert_int_equal(sqlite3_prepare_v2(db, "INSERT INTO t (id, s, b) VALUES (?, ?, ?)", -1, &st,
                                        NULL), SQLITE_OK);
    for (int i = 0; i < ROWS; i++) {
        text_len[i] = 1 + (int)(next_random() % 300);
        blob_len[i] = (int)(next_random() % 6000);
        text[i] = malloc((size_t)text_len[i] + (size_t)blob_len[i] + 1);
        for (int k = 0; k < text_len[i]; k++)
            text[i][k] = (char)('a' + next_random() % 26);
        for (int k = 0; k < blob_len[i]; k++)
            text[i][text_len[i] + k] = (char)(next_random() & 0xff);
        sqlite3_bind_int(st, 1, i);
        sqlite3_bind_text(st, 2, text[i], text_len[i], SQLITE_TRANSIENT);
        sqlite3_bind_blob(st, 3, text[i] + text_len[i], blob_len[i], SQLITE_TRANSIENT);
        assert_int_equal(sqlite3_step(st), SQLITE_DONE);
        sqlite3_reset(st);
    }
    sqlite3_finalize(st);
    assert_int_equal(sqlite3_exec(db, "COMMIT", NULL, NULL, NULL), SQLITE_OK);

    /* read back through the index (ORDER BY s) and by id */
    assert_int_equal(sqlite3_prepare_v2(db, "SELECT id, s, b FROM t ORDER BY s, id", -1, &st, NULL),
                     SQLITE_OK);
    int rows = 0;
    while (sqlite3_step(st) == SQLITE_ROW) {
        int i = sqlite3_column_int(st, 0);
        assert_int_equal(sqlite3_column_bytes(st, 1), text_len[i]);
        assert_memory_equal(sqlite3_column_text(st, 1), text[i], (size_t)text_len[i]);
        assert_int_equal(sqlite3_column_bytes(st, 2), blob_len[i]);
        if (blob_len[i])
            assert_memory_equal(sqlite3_column_blob(st, 2), text[i] + text_len[i],
                                (size_t)blob_len[i]);
        rows++;
    }
    sqlite3_finalize(st);
    assert_int_equal(rows, ROWS);
    assert_int_equal(sqlite3_prepare_v2(db, "PRAGMA integrity_check", -1, &st, NULL), SQLITE_OK);
    assert_int_equal(sqlite3_step(st), SQLITE_ROW);
    assert_string_equal((const char *)sqlite3_column_text(st, 0), "ok");
    sqlite3_finalize(st);
    assert_int_equal(sqlite3_close(db), SQLITE_OK);
    for (int i = 0; i < ROWS; i++)
        free(text[i]);
}

int main(void)
{
    /* As src/cli/main.c does for every command but 'serve', before SQLite
     * starts. */
    fxl_store_configure(1);
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_installed_in_a_one_thread_process),
        cmocka_unit_test(test_blocks_aligned_sized_and_apart),
        cmocka_unit_test(test_small_block_reused_for_its_class),
        cmocka_unit_test(test_sqlite_runs_on_it),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
