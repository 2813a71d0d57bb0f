/* Correction-factor tables: per detector and beam, a factor versus one
 * parameter (field_size, ssd, wedge, tray, angle), versioned by effective
 * date, never edited. Reading them from our JSON file format
 * (docs/format-corrections.md, src/io) and storing them (src/store). */
#ifndef FXL_CORRECTIONS_H
#define FXL_CORRECTIONS_H

#include <stddef.h>
#include <stdint.h>

#include "fxl/fxl.h"

#define FXL_CORR_POINTS_MAX 200
#define FXL_CORR_TABLES_MAX 100
#define FXL_CORR_FACTOR_MIN 0.5        /* exclusive */
#define FXL_CORR_FACTOR_MAX 2.0        /* exclusive */

typedef struct fxl_corr_point {
    double x;                      /* parameter value, unit of the parameter */
    double factor;
} fxl_corr_point;

/* One table as read from a file. */
typedef struct fxl_corr_table_spec {
    char machine[65];
    char beam[33];
    char point[16];                /* "entrance" (default) or "exit" */
    char parameter[12];            /* entrance: field_size, ssd, wedge, tray, angle;
                                      exit: field_size, thickness, sdd, wedge, tray, angle */
    char effective_from[FXL_TIME_LEN];  /* stored form */
    char source[201];              /* "" when not given */
    fxl_corr_point *points;        /* strictly increasing x */
    size_t n_points;
} fxl_corr_table_spec;

/* A whole corrections file: tables for one detector. */
typedef struct fxl_corr_file {
    char detector[65];             /* serial */
    fxl_corr_table_spec *tables;
    size_t n_tables;
} fxl_corr_file;

#define FXL_CORR_FILE_INIT {{0}, NULL, 0}

/* Parses and checks a corrections file held in memory (len bytes; need not
 * be NUL-terminated). `name` is used in messages (the file name). Checks the
 * shape and every value (parameter names, dates, strictly increasing x inside
 * the parameter's range, factors inside (0.5, 2.0)); malformed or truncated
 * JSON is FXL_EINVAL with the line and column where parsing stopped. Nothing
 * about the database is checked here. Release with fxl_corr_file_release. */
int fxl_corr_file_parse(fxl_ctx *ctx, fxl_corr_file *out, const char *name, const char *text,
                        size_t len);

/* Reads the file at `path` and parses it as above; FXL_EIO if unreadable. */
int fxl_corr_file_read(fxl_ctx *ctx, fxl_corr_file *out, const char *path);

void fxl_corr_file_release(fxl_corr_file *file);

/* Range of x a parameter accepts and its unit ("cm", "deg", "0/1"). */
int fxl_corr_param_range(const char *parameter, double *lo, double *hi, const char **unit);

/* Largest departure from 1 a table may have at the reference condition of
 * the detector's calibration (docs/format-corrections.md): 0.5 %. */
#define FXL_CORR_REFERENCE_TOL 0.005

/* Stores every table of the file in ONE transaction with one audit row per
 * table (physicist or admin). Checks first that the detector and every
 * machine/beam exist, that no table with the same detector, beam, point,
 * parameter and effective date exists already (FXL_ECONFLICT), and that each
 * table is 1 within FXL_CORR_REFERENCE_TOL at the reference condition of the
 * detector's latest calibration for that beam and point (when the table
 * covers that condition; FXL_EINVAL naming the value found). *out_ids (may
 * be NULL) receives a heap array of the new correction_tables ids in file
 * order (free()). */
int fxl_corr_store(fxl_ctx *ctx, int64_t **out_ids, const fxl_corr_file *file);

/* A stored table. */
typedef struct fxl_corr_table {
    int64_t id;
    char serial[65];
    char machine[65];
    char beam[33];
    char point[16];
    char parameter[12];
    char effective_from[FXL_TIME_LEN];
    char source[201];
    char user[65];
    char created_at[FXL_TIME_LEN];
    int in_force;                  /* latest effective_from <= the moment listed */
    size_t n_points;
    double x_min, x_max;
    fxl_corr_point *points;        /* only filled by fxl_corr_get; else NULL */
} fxl_corr_table;

/* Tables of one detector (serial) or of all (NULL), ordered by detector,
 * machine, beam, parameter, effective date; in_force evaluated at `at` (NULL
 * = now). Free with fxl_corr_list_free. */
int fxl_corr_list(fxl_ctx *ctx, fxl_corr_table **out, size_t *n, const char *serial,
                  const char *at);
void fxl_corr_list_free(fxl_corr_table *list, size_t n);

/* One table with its points; release with fxl_corr_table_release. */
int fxl_corr_get(fxl_ctx *ctx, fxl_corr_table *out, int64_t id, const char *at);
void fxl_corr_table_release(fxl_corr_table *t);

#endif
