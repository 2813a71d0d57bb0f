/* The SQL migrations from sql/, embedded at build time by
 * cmake/embed_sql.cmake into generated/sql_migrations.c. */
#ifndef FXL_STORE_MIGRATIONS_H
#define FXL_STORE_MIGRATIONS_H

struct fxl_migration {
    int version;       /* the file's number: 001_schema.sql is version 1 */
    const char *name;  /* file name, for error messages */
    const char *sql;
};

extern const struct fxl_migration fxl_migrations[];
extern const int fxl_migration_count;

#endif
