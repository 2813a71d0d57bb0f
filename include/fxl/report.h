/* PDF reports: the per-patient record of in vivo results and the monthly
 * departmental summary (docs/reports.md). Reports only read the database
 * (inside one read transaction, so they see one consistent state) and stream
 * its rows: memory stays flat however long the course or busy the month.
 * Text is UTF-8 in embedded DejaVu Sans; pages are A4. */
#ifndef FXL_REPORT_H
#define FXL_REPORT_H

#include <stdint.h>

#include "fxl/fxl.h"

typedef struct fxl_report_options {
    /* Generation time printed on every page and stored as the PDF creation
     * date, in the stored UTC form 'YYYY-MM-DDTHH:MM:SSZ'. NULL: fxl_now()
     * (which honours FXLEDGER_NOW in the test build only). The same database and the same time give
     * a byte-identical file. */
    const char *generated_at;
    /* Directory holding DejaVuSans.ttf and DejaVuSans-Bold.ttf; NULL: the
     * directory fixed at build time (FXL_FONT_DIR). */
    const char *font_dir;
    /* 1: an existing regular, non-SQLite file at the output path may be
     * replaced (--force); never the database or a non-regular file
     * (fxl/outfile.h). 0: an existing path is refused. */
    int force;
} fxl_report_options;

#define FXL_REPORT_OPTIONS_INIT {NULL, NULL, 0}

/* What a written report holds, for the caller's message. */
typedef struct fxl_report_result {
    int pages;
    int64_t measurements;   /* measurement rows listed (patient) or counted (month) */
    int empty;              /* 1: no data, the report says so on its first page */
    char from[FXL_TIME_LEN];   /* month: UTC bounds [from, to) of the local month */
    char to[FXL_TIME_LEN];
    char timezone[64];      /* the department time zone used */
} fxl_report_result;

/* Writes the report of the patient with ID `mrn` to `path` through
 * fxl/outfile.h (an existing path is refused unless opt->force, and never
 * the database; written under a temporary name and renamed, so a failure
 * leaves no partial file; mode 0600). Every page's footer carries the audit
 * anchor line of the database as read (fxl_audit_anchor). plan_label NULL covers every plan of the patient, else only
 * that plan. An unknown patient or plan is FXL_ENOTFOUND and writes nothing;
 * a patient without measurements gets a report that says so. Any role may
 * run it. out may be NULL. */
int fxl_report_patient(fxl_ctx *ctx, fxl_report_result *out, const char *path, const char *mrn,
                       const char *plan_label, const fxl_report_options *opt);

/* Writes the summary of calendar month `month` ('YYYY-MM') in the
 * department's time zone (setting 'timezone', an IANA name; UTC when unset)
 * to `path`. Measurements count in the month of their fraction's treatment
 * time. Queue, calibration and detector sections are evaluated as of the end
 * of the month or the generation time, whichever is earlier. A month without
 * measurements gets a report that says so. out may be NULL. */
int fxl_report_month(fxl_ctx *ctx, fxl_report_result *out, const char *path, const char *month,
                     const fxl_report_options *opt);

/* A period of the periodic review, in the department's time zone. */
typedef struct fxl_report_period {
    char from[FXL_TIME_LEN];   /* UTC bounds [from, to) of treatment times */
    char to[FXL_TIME_LEN];
    char first_day[11];        /* local calendar days covered, inclusive */
    char last_day[11];
    char timezone[64];
    char label[40];            /* "2026-11" or "2026-10-01 to 2026-12-31" */
} fxl_report_period;

/* Resolves either a month 'YYYY-MM' or local days first_day..last_day
 * ('YYYY-MM-DD', inclusive) in the department's time zone (setting
 * 'timezone', UTC when unset) to UTC bounds. Exactly one of month and the
 * pair must be given; FXL_EINVAL with a message otherwise. */
int fxl_report_period_resolve(fxl_ctx *ctx, fxl_report_period *out, const char *month,
                              const char *first_day, const char *last_day);

/* Writes the statistics of a period (fxl/period_stats.h, grouped by `by`)
 * to `path`: per group n, mean, SD, median, 5th and 95th percentiles, shares
 * outside the levels, the levels in force beside a suggestion from the
 * spread, and an individuals and moving-range chart with its limits. A4
 * landscape. A period without results gets a report that says so. */
int fxl_report_stats(fxl_ctx *ctx, fxl_report_result *out, const char *path,
                     const fxl_report_period *period, unsigned by,
                     const fxl_report_options *opt);

#endif
