/* Export of the measurement record, every column, current and superseded
 * rows, with who recorded each row and every review event on it (the signed
 * decisions), as RFC 4180 CSV or JSON (docs/export.md). Reads the database
 * only. */
#ifndef FXL_EXPORT_H
#define FXL_EXPORT_H

#include <stddef.h>
#include <stdio.h>

#include "fxl/fxl.h"

typedef struct fxl_export_filter {
    const char *from;        /* UTC [from, to) of the fraction's treatment time; NULL: no bound */
    const char *to;
    const char *mrn;         /* only this patient (FXL_ENOTFOUND if unknown); NULL: all */
    const char *detector;    /* only this detector serial (FXL_ENOTFOUND if unknown) */
} fxl_export_filter;

/* Kinds of an exported value. */
typedef enum {
    FXL_XV_NULL = 0,
    FXL_XV_INTEGER,
    FXL_XV_REAL,
    FXL_XV_TEXT,
    FXL_XV_JSON              /* text that is a JSON document (reasons, review events) */
} fxl_export_kind;

/* One exported row: ncols values in the order of the column names given to
 * the header callback. text is the value as text ("" for NULL; a REAL in
 * the shortest form that reads back to the same double); borrowed for the
 * duration of the callback. */
typedef struct fxl_export_row {
    size_t ncols;
    const char *const *text;
    const fxl_export_kind *kind;
    const double *real;      /* the REAL values (kind FXL_XV_REAL) */
} fxl_export_row;

typedef int (*fxl_export_header_cb)(void *arg, size_t ncols, const char *const *names);
typedef int (*fxl_export_row_cb)(void *arg, const fxl_export_row *row);

/* Streams the measurements selected by f, ordered by treatment time, fraction
 * and id: first the header (column names: every column of the measurements
 * table under its own name, then context columns such as patient_mrn,
 * treated_at, recorded_by_name, superseded_by, current and review_events),
 * then one call per row. A callback's non-zero return stops and is returned. */
int fxl_export_measurements(fxl_ctx *ctx, const fxl_export_filter *f, fxl_export_header_cb hcb,
                            fxl_export_row_cb rcb, void *arg);

typedef enum { FXL_EXPORT_CSV = 0, FXL_EXPORT_JSON } fxl_export_format;

/* Writes the export to out: CSV per RFC 4180 (UTF-8, CRLF line ends, a header
 * row, fields quoted when they hold a comma, quote, CR or LF; NULL as an
 * empty field) or one JSON document {"format": "fxledger-measurements", ...}
 * with typed values (numbers, strings, null; reasons and review events as
 * arrays). exported_at is printed in the JSON. *rows_out (may be NULL)
 * receives the number of rows. FXL_EIO when writing fails. */
int fxl_export_write(fxl_ctx *ctx, FILE *out, fxl_export_format format,
                     const fxl_export_filter *f, const char *exported_at, size_t *rows_out);

#endif
