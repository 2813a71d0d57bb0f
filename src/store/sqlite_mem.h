/* SQLite's small blocks from free lists by size class, for a process that
 * uses SQLite from one thread (sqlite_mem.c; docs/performance.md, change 23). */
#ifndef FXL_STORE_SQLITE_MEM_H
#define FXL_STORE_SQLITE_MEM_H

/* 0 in a build with AddressSanitizer, which must see every block SQLite
 * uses (gcc says __SANITIZE_ADDRESS__, clang __has_feature). */
#if defined(__SANITIZE_ADDRESS__)
#define FXL_SQLITE_MEM_BUILT 0
#elif defined(__has_feature)
#if __has_feature(address_sanitizer)
#define FXL_SQLITE_MEM_BUILT 0
#endif
#endif
#ifndef FXL_SQLITE_MEM_BUILT
#define FXL_SQLITE_MEM_BUILT 1
#endif

/* Hands SQLite the allocator; only before SQLite starts, and only in a
 * process that uses it from one thread. Returns 1 when it is in use, 0 when
 * SQLite keeps the C library's malloc: SQLite had started already, the
 * build has AddressSanitizer, or FXLEDGER_SQLITE_MALLOC=system is set. */
int fxl_sqlite_mem_install(void);

/* 1 when fxl_sqlite_mem_install put the allocator in place. */
int fxl_sqlite_mem_installed(void);

#endif
