/* Our JSON format for one fraction's readings (docs/format-readings.md), read
 * into a record request, and the JSON form of a logged fraction's results
 * (record --json, the alert hook's standard input). No database. */
#ifndef FXL_READINGS_JSON_H
#define FXL_READINGS_JSON_H

#include <cjson/cJSON.h>
#include <stddef.h>

#include "fxl/fxl.h"
#include "fxl/record.h"

#define FXL_READINGS_FORMAT "fxledger-readings"
#define FXL_READINGS_VERSION 1
#define FXL_READINGS_FILE_MAX_BYTES (256 * 1024)

/* Names of one reading, owned by the file. */
typedef struct fxl_readings_names {
    char field[65];
    char point[16];               /* "" when not given */
    char detector[65];
} fxl_readings_names;

/* A parsed readings file. Strings are "" and numbers 0 / NaN when absent. */
typedef struct fxl_readings_file {
    char patient[65];
    char plan[65];                /* "" = the default plan */
    int fraction;                 /* 0 = the next number */
    char treated_at[32];          /* "" = now; checked by the record path */
    size_t n;
    fxl_readings_names *names;    /* heap, n entries */
    fxl_reading_entry *entries;   /* heap, n entries, pointing into names */
} fxl_readings_file;

#define FXL_READINGS_FILE_INIT {{0}, {0}, 0, {0}, 0, NULL, NULL}

/* Parses a readings document held in memory (len bytes, need not be
 * NUL-terminated); `name` (the file name) is used in messages. Checks the
 * shape: the format name and version, known keys only (a misspelt key is an
 * error, not ignored), the types of every value and 1..FXL_RECORD_READINGS_MAX
 * readings. Malformed or truncated JSON is FXL_EINVAL naming the line and
 * column where parsing stopped. Ranges (reading > 0, temperature) and names
 * are checked by fxl_record_fraction against the database. Release with
 * fxl_readings_file_release. */
int fxl_readings_parse(fxl_ctx *ctx, fxl_readings_file *out, const char *name, const char *text,
                       size_t len);

/* Reads the file at `path` ("-" = standard input) and parses it as above;
 * FXL_EIO when it cannot be read or is larger than FXL_READINGS_FILE_MAX_BYTES. */
int fxl_readings_read(fxl_ctx *ctx, fxl_readings_file *out, const char *path);

void fxl_readings_file_release(fxl_readings_file *f);

/* Points *req at the file's content (borrowed: keep the file alive). */
void fxl_readings_request(fxl_record_request *req, const fxl_readings_file *f);

/* Rank of a verdict for "the worst result": 3 outside action, 2 outside
 * tolerance, 1 not evaluable or implausible, 0 within tolerance. */
int fxl_verdict_rank(fxl_verdict v);

/* The full JSON description of a logged fraction: patient, plan, fraction,
 * times, the worst verdict and every result with every factor, the levels
 * used, reasons and guidance. Caller frees with cJSON_Delete. NULL on out of
 * memory. */
cJSON *fxl_record_result_json(const fxl_record_result *r);

#endif
