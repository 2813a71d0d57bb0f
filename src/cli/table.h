/* Text that fits the console: tables whose columns are sized to their
 * content and that turn into one block per row when they would pass the
 * width, and paragraphs wrapped at word boundaries. Widths count characters
 * (UTF-8 code points), not bytes. No SQL, no physics. */
#ifndef FXL_CLI_TABLE_H
#define FXL_CLI_TABLE_H

#include <stddef.h>
#include <stdio.h>

/* Screen width every table and paragraph fits. */
#define CLI_WIDTH 80
#define CLI_TABLE_COLS 12

typedef struct cli_table {
    size_t ncol;
    const char *head[CLI_TABLE_COLS];
    int right[CLI_TABLE_COLS];      /* 1: right-aligned (numbers) */
    int wrap[CLI_TABLE_COLS];       /* 1: may be narrowed and wrapped at words
                                       (a label, a scope, a reason) when the
                                       table would pass the width */
    int below[CLI_TABLE_COLS];      /* 1: printed under its row as
                                       "  heading: value", wrapped to the
                                       width (a long scope or note) */
    int gap;                        /* spaces between columns (init: 2) */
    size_t nrow, cap;
    char **cells;                   /* nrow * ncol strings, heap */
} cli_table;

/* Starts a table with the headings given (NULL-terminated list). */
void cli_table_init(cli_table *t, const char *const *head);
/* Appends a row of ncol strings (copied). Returns -1 when out of memory. */
int cli_table_add(cli_table *t, const char *const *cells);
/* Prints the table: columns as wide as their widest cell, two spaces apart;
 * a column empty in every row is left out; when that is wider than
 * `width`, the columns marked `wrap` are narrowed (never below their
 * longest word) and their cells wrapped at words on the lines below; when
 * that is not enough, each row becomes a block of
 * "heading: value" lines instead (values wrapped at words). Every line
 * starts with `indent` spaces. */
void cli_table_print(FILE *out, const cli_table *t, int width, int indent);
void cli_table_release(cli_table *t);

/* Characters (code points) in a UTF-8 string. */
size_t cli_text_width(const char *s);

/* Prints `text` wrapped at word boundaries to `width`: the first line after
 * `first` (e.g. "  - "), the others after as many spaces. A word longer
 * than a line is broken only then (a path, a serial). */
void cli_wrap(FILE *out, const char *first, const char *text, int width);
/* The same with the continuation lines indented by `hang` spaces. */
void cli_wrap_hang(FILE *out, const char *first, int hang, const char *text, int width);

#endif
