/* SQLite's memory in a process that uses it from one thread: small blocks
 * from free lists by size class instead of the C library's malloc.
 *
 * Why: Debian's SQLite is built without its own small-block allocator
 * (OMIT_LOOKASIDE), so every parse-tree node, every prepared statement's
 * parts and every row buffer is one malloc and one free. In a 'record'
 * that was about a fifth of the process's instructions (callgrind,
 * docs/performance.md, change 23). A command lives for milliseconds and
 * uses one thread, so a plain per-class free list serves: no locks, no
 * coalescing, no return to the system before exit.
 *
 * How: a block carries its usable size in an 8-byte header before the
 * pointer handed out. Requests up to SMALL_MAX bytes (header included) are
 * rounded up to a multiple of GRAIN and served from that class's free list,
 * or carved from the current CHUNK-byte chunk; a freed small block goes back
 * on its class's list and is reused only for that class. Larger requests
 * (SQLite's page buffers, about 4.3 KiB) go to malloc with the same header.
 * Chunks are kept on a list and released only by xShutdown. The pointers are
 * 8-byte aligned (chunks and malloc give 16, blocks are multiples of 16, the
 * header is 8), which is what SQLite asks of an allocator.
 *
 * Not used: by 'serve' (its workers share SQLite), in the sanitizer build
 * (AddressSanitizer must see each block to find a use after free), and
 * when FXLEDGER_SQLITE_MALLOC=system is set (make valgrind sets it, for
 * the same reason). */
#include <sqlite3.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "store/sqlite_mem.h"

#define GRAIN 16
#define SMALL_MAX 1024              /* largest small block, header included */
#define N_CLASSES (SMALL_MAX / GRAIN + 1)
#define CHUNK (64 * 1024)
#define HEADER 8

typedef struct free_block {
    struct free_block *next;
} free_block;

typedef struct chunk {
    struct chunk *next;
    /* blocks follow, from offset GRAIN so that they stay 16-aligned */
} chunk;

static free_block *free_lists[N_CLASSES];
static chunk *chunks;
static char *carve, *carve_end;
static int installed;

/* Bytes of the block (header included) that serves a request of n > 0. */
static size_t block_bytes(size_t n)
{
    return (n + HEADER + GRAIN - 1) / GRAIN * GRAIN;
}

static void *with_header(char *block, size_t bytes)
{
    *(uint64_t *)(void *)block = (uint64_t)(bytes - HEADER);
    return block + HEADER;
}

static size_t usable(void *p)
{
    return (size_t)*(uint64_t *)(void *)((char *)p - HEADER);
}

static void *pool_malloc(int n)
{
    size_t bytes = block_bytes((size_t)(n > 0 ? n : 1));
    char *block;

    if (bytes > SMALL_MAX) {
        block = malloc(bytes);
        return block ? with_header(block, bytes) : NULL;
    }
    free_block **list = &free_lists[bytes / GRAIN];
    if (*list) {
        block = (char *)*list - HEADER;
        *list = (*list)->next;
        return block + HEADER;                 /* its header still holds the size */
    }
    if ((size_t)(carve_end - carve) < bytes) {
        chunk *c = malloc(CHUNK);
        if (!c)
            return NULL;
        c->next = chunks;
        chunks = c;
        carve = (char *)c + GRAIN;
        carve_end = (char *)c + CHUNK;
    }
    block = carve;
    carve += bytes;
    return with_header(block, bytes);
}

static void pool_free(void *p)
{
    if (!p)
        return;
    size_t bytes = usable(p) + HEADER;
    if (bytes > SMALL_MAX) {
        free((char *)p - HEADER);
        return;
    }
    free_block *b = p;
    b->next = free_lists[bytes / GRAIN];
    free_lists[bytes / GRAIN] = b;
}

static int pool_size(void *p)
{
    return p ? (int)usable(p) : 0;
}

static void *pool_realloc(void *p, int n)
{
    size_t old = usable(p);
    size_t bytes = block_bytes((size_t)(n > 0 ? n : 1));

    if (bytes == old + HEADER)
        return p;
    if (bytes > SMALL_MAX && old + HEADER > SMALL_MAX) {
        char *block = realloc((char *)p - HEADER, bytes);
        return block ? with_header(block, bytes) : NULL;
    }
    void *q = pool_malloc(n);
    if (!q)
        return NULL;                           /* p is left as it was */
    memcpy(q, p, old < (size_t)n ? old : (size_t)n);
    pool_free(p);
    return q;
}

static int pool_roundup(int n)
{
    return (int)(block_bytes((size_t)(n > 0 ? n : 1)) - HEADER);
}

static int pool_init(void *arg)
{
    (void)arg;
    return SQLITE_OK;
}

static void pool_shutdown(void *arg)
{
    (void)arg;
    while (chunks) {
        chunk *next = chunks->next;
        free(chunks);
        chunks = next;
    }
    memset(free_lists, 0, sizeof free_lists);
    carve = carve_end = NULL;
}

static const sqlite3_mem_methods pool_methods = {
    pool_malloc, pool_free, pool_realloc, pool_size, pool_roundup, pool_init, pool_shutdown, NULL
};

int fxl_sqlite_mem_install(void)
{
#if !FXL_SQLITE_MEM_BUILT
    return 0;
#else
    const char *choice = getenv("FXLEDGER_SQLITE_MALLOC");
    if (installed || (choice && strcmp(choice, "system") == 0))
        return installed;
    installed = sqlite3_config(SQLITE_CONFIG_MALLOC, &pool_methods) == SQLITE_OK;
    return installed;
#endif
}

int fxl_sqlite_mem_installed(void)
{
    return installed;
}
