/* Today's worklist: every patient under treatment today (active courses:
 * plan not complete and not replaced), ordered by the day list imported from
 * the record-and-verify export when there is one; for each patient the next
 * fraction, the fields due for measurement by their policy with the detector
 * to place and where, warnings, open review items and holds. Also the holds
 * of one patient as the console shows them before the readings and beside
 * the verdicts, and the day-list import. Shown by the command line and the
 * web console alike. Decisions: docs/worklist.md. Times are stored UTC text
 * 'YYYY-MM-DDTHH:MM:SSZ'; "today" is the calendar day in the department's
 * time zone (setting 'timezone', default UTC). */
#ifndef FXL_WORKLIST_H
#define FXL_WORKLIST_H

#include <stddef.h>
#include <stdint.h>

#include <cjson/cJSON.h>

#include "fxl/fxl.h"

/* Lengths of the texts below (including the terminating NUL). */
#define FXL_WORKLIST_TEXT_LEN 256
#define FXL_WORKLIST_SUMMARY_LEN 1024

/* Why a field is due today (fxl_worklist_field.due_reason). */
typedef enum {
    FXL_DUE_NOT = 0,          /* not due today */
    FXL_DUE_FIRST,            /* the plan's first fraction */
    FXL_DUE_PLAN_CHANGE,      /* first fraction after a plan change (replacement plan) */
    FXL_DUE_WEEKLY,           /* weekly interval reached (setting weekly_interval_days) */
    FXL_DUE_EVERY             /* policy: every fraction */
} fxl_due_reason;

/* "not due", "first fraction", "first after plan change", "weekly interval
 * reached", "every fraction". Static storage. */
const char *fxl_due_reason_text(fxl_due_reason r);

/* One open review item (status open or acknowledged) as the worklist and the
 * console show it. */
typedef struct fxl_worklist_item {
    int64_t id;                     /* review item id */
    char rule[41];                  /* "result", "missing_measurement", ... */
    int severity;                   /* 1..4 */
    char status[16];                /* "open" or "acknowledged" */
    int is_hold;                    /* 1: unresolved action-level result of the patient */
    int on_detector;                /* 1: an item on a detector to place (not the patient's) */
    char field[65];                 /* "" when the item has no field */
    char point[16];
    char detector[65];              /* serial, "" when none */
    int fraction_number;            /* of its measurement, 0 when none */
    char opened_at[FXL_TIME_LEN];
    char summary[FXL_WORKLIST_SUMMARY_LEN];
} fxl_worklist_item;

/* One field of the plan for today. */
typedef struct fxl_worklist_field {
    int64_t field_id;
    char name[65];
    char point[16];                 /* where to place the detector: "entrance" / "exit" */
    char beam[33];
    double mu;
    double expected_dose_cgy;       /* NaN when the plan gives none */
    char policy[16];                /* "first", "weekly", "every", "none" */
    fxl_due_reason due_reason;      /* FXL_DUE_NOT when not due today */
    int measured;                   /* 1: already measured in the open fraction (resume) */
    char detector[65];              /* detector to place: the last used on this field
                                       (else the patient's last), "" when none known */
    int detector_ok;                /* 1: in service and a calibration for the field's
                                       beam and point valid today */
    char detector_warning[FXL_WORKLIST_TEXT_LEN];  /* why not ok, "" when ok */
} fxl_worklist_field;

/* One patient on today's list. */
typedef struct fxl_worklist_entry {
    int line;                       /* 1-based line number as listed */
    char scheduled_at[FXL_TIME_LEN];/* from the day list (stored UTC), "" if not listed */
    int in_day_list;                /* 1: the day list names this patient */
    int64_t patient_id;
    char mrn[65];
    char patient_name[402];         /* "Family, Given" */
    int64_t plan_id;
    char plan[65];
    char site[65];
    char technique[33];
    int fractions;                  /* planned */
    int next_fraction;              /* the fraction to log now (the open one when resuming) */
    int64_t open_fraction_id;       /* a fraction begun field by field and not closed
                                       today, else 0 (fxl/fraction.h) */
    int treated_today;              /* 1: a closed fraction of this plan is dated today */
    size_t n_fields;
    fxl_worklist_field *fields;     /* every field of the plan, plan order */
    size_t n_due;                   /* fields with due_reason != FXL_DUE_NOT */
    size_t n_holds;                 /* items below with is_hold */
    size_t n_items;
    fxl_worklist_item *items;       /* holds first, then by severity, then age */
    size_t n_warnings;
    char (*warnings)[FXL_WORKLIST_TEXT_LEN];  /* detector warnings, day-list mismatches */
} fxl_worklist_entry;

typedef struct fxl_worklist {
    char date[11];                  /* 'YYYY-MM-DD' in the department's zone */
    char timezone[64];              /* the zone name used */
    char daylist_imported_at[FXL_TIME_LEN];  /* "" when no day list for the date */
    size_t n;
    fxl_worklist_entry *entries;    /* day-list order (scheduled time, then file order),
                                       then patients not in the list by MRN */
    size_t n_unmatched;             /* day-list lines whose MRN/plan is not an active course */
    char (*unmatched)[FXL_WORKLIST_TEXT_LEN];
} fxl_worklist;

#define FXL_WORKLIST_INIT {0}

/* Builds the worklist for the department-local day that contains `at`
 * (stored UTC text; NULL = now). Any role may read. An active course is the
 * latest plan of a patient that no other plan replaces and whose logged
 * fractions (closed or open) are fewer than planned; a patient whose
 * fraction was already closed today stays listed with treated_today = 1.
 * Fields due follow docs/rules.md (the same policy the missing-measurement
 * rule applies), computed for the fraction next_fraction on that day. The
 * detector to place is checked against its status and its calibrations on
 * that day; a missing, retired, out-of-service or uncalibrated detector is a
 * warning (never a silent pass). Release with fxl_worklist_release; *out is
 * overwritten. */
int fxl_worklist_build(fxl_ctx *ctx, fxl_worklist *out, const char *at);
void fxl_worklist_release(fxl_worklist *w);

/* The worklist as JSON (the shape of 'fxledger today --json', documented in
 * docs/worklist.md). Caller frees with cJSON_Delete; NULL when out of memory. */
cJSON *fxl_worklist_json(const fxl_worklist *w);

/* Open items as a JSON array (the "items" member of a worklist entry). */
cJSON *fxl_worklist_items_json(const fxl_worklist_item *items, size_t n);

/* ---- holds at the console ---------------------------------------------------- */

/* The open items a console shows for one patient before the readings and
 * beside the verdicts: the patient's unresolved action-level results (holds,
 * is_hold = 1), the patient's other open items, and the open items on the
 * given detectors (serials; may be NULL / 0). Sorted holds first. Any role
 * may read. *out is a heap array owned by the caller (free()), NULL when n
 * is 0. An unknown MRN is FXL_ENOTFOUND. */
int fxl_holds_for_patient(fxl_ctx *ctx, fxl_worklist_item **out, size_t *n, const char *mrn,
                          const char *const *detectors, size_t n_detectors);

/* Number of holds (is_hold) among items. */
size_t fxl_holds_count(const fxl_worklist_item *items, size_t n);

/* The plain-language line to show instead of "continue treatment as
 * planned" while holds are open: what is open (item numbers) and who must
 * clear it (a physicist closes the item). Writes "" when n_holds is 0. */
void fxl_holds_guidance(char *buf, size_t size, const fxl_worklist_item *items, size_t n);

/* ---- the day list -------------------------------------------------------------- */

/* One line of a day list: a patient expected today. */
typedef struct fxl_daylist_line {
    char time[FXL_TIME_LEN];        /* stored UTC (converted from the file's local
                                       time or offset), "" when the file gives none */
    char mrn[65];
    char plan[65];                  /* plan label, "" = the patient's active plan */
} fxl_daylist_line;

typedef struct fxl_daylist_result {
    char date[11];                  /* department-local date the list is for */
    size_t n_lines;                 /* lines stored */
    size_t n_unmatched;             /* of which naming no active course today */
    int64_t import_id;
} fxl_daylist_result;

/* Parses a day list (CSV with header 'time,mrn,plan' or JSON, format in
 * docs/format-daylist.md; the format is chosen by the first non-blank byte:
 * '[' or '{' is JSON) from memory, validates every line (time as
 * 'HH:MM' local, 'YYYY-MM-DDTHH:MM' local or ISO 8601 with offset; MRN 1..64
 * printable; at most 500 lines), and stores it for the department-local date
 * of the times (or of `at` when the lines give only HH:MM; NULL = today) as
 * one import (therapist, physicist or admin), one transaction with an audit
 * row. A later import for the same date replaces the earlier one in the
 * worklist; the earlier stays stored. Invalid input is FXL_EINVAL naming the
 * line, and nothing is written. */
int fxl_daylist_import_text(fxl_ctx *ctx, fxl_daylist_result *out, const char *text, size_t len,
                            const char *at);

/* The same from a file ('-' = standard input); a missing file is
 * FXL_ENOTFOUND. */
int fxl_daylist_import_file(fxl_ctx *ctx, fxl_daylist_result *out, const char *path,
                            const char *at);

#endif
