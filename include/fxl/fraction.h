/* A fraction logged field by field: begin (or resume) the fraction, commit
 * each field's reading as soon as it is entered (its verdict comes back at
 * once, before the next field is delivered), and close the fraction, which
 * names the due fields left unmeasured and opens their missing-measurement
 * items then. Nothing entered is lost if the session ends in the middle:
 * every committed field stays, and the fraction stays open until it is
 * closed (or until the next fraction of the plan begins, which closes it).
 * Used by the interactive 'record', the worklist flow and the web console.
 * Decisions: docs/record.md ("Field by field"). Units as in fxl/record.h. */
#ifndef FXL_FRACTION_H
#define FXL_FRACTION_H

#include <stddef.h>
#include <stdint.h>

#include "fxl/fxl.h"
#include "fxl/record.h"
#include "fxl/worklist.h"

typedef struct fxl_fraction_begin_request {
    const char *mrn;          /* required */
    const char *plan;         /* label; NULL = the patient's latest plan not replaced */
    int fraction;             /* 0 = resume the plan's open fraction begun today, else
                                 the next number; N = that number (resumes it when it
                                 is open, FXL_ECONFLICT when it is closed) */
    const char *treated_at;   /* NULL = now; else stored UTC text, not in the future
                                 (parse user input with fxl_time_parse_local) */
} fxl_fraction_begin_request;

/* The fraction being logged. Release with fxl_fraction_state_release. */
typedef struct fxl_fraction_state {
    int64_t fraction_id;
    int fraction_number;
    int plan_fractions;
    int resumed;                    /* 1: an open fraction was resumed */
    int64_t patient_id;
    char mrn[65];
    char patient_name[402];
    int64_t plan_id;
    char plan[65];
    char site[65];
    char technique[33];
    char treated_at[FXL_TIME_LEN];
    double skin_temp_c;             /* default temperature offered */
    size_t n_fields;
    fxl_worklist_field *fields;     /* every field of the plan; due_reason for this
                                       fraction; measured = already in it; detector =
                                       the one to pre-fill */
    size_t n_items;
    fxl_worklist_item *items;       /* holds and open items (patient and the
                                       pre-filled detectors), holds first */
} fxl_fraction_state;

#define FXL_FRACTION_STATE_INIT {0}
void fxl_fraction_state_release(fxl_fraction_state *s);

/* Begins a fraction (therapist, physicist or admin): writes the fraction row
 * and a 'begun' mark in one transaction with an audit row, or resumes the
 * open one (nothing written). Another open fraction of the plan begun on an
 * earlier day is closed first (fxl_fraction_close semantics, its due fields
 * named as missing). Validates everything before writing (plan complete,
 * number out of range, time in the future or before the plan: FXL_EINVAL;
 * unknown patient or plan: FXL_ENOTFOUND). */
int fxl_fraction_begin(fxl_ctx *ctx, fxl_fraction_state *out, const fxl_fraction_begin_request *req);

/* Loads the state of an existing fraction (any role; after a resume, or for
 * the web console between requests). FXL_ENOTFOUND when it does not exist. */
int fxl_fraction_load(fxl_ctx *ctx, fxl_fraction_state *out, int64_t fraction_id);

/* Commits one reading into an open fraction (therapist, physicist or admin):
 * computed and written exactly as fxl_record_fraction writes a reading
 * (snapshot, review item when not within tolerance, history rule, rules over
 * history, audit), in its own transaction. A field already measured in this
 * fraction is FXL_ECONFLICT (correct a reading with fxl_record_amend); a
 * closed fraction is FXL_ECONFLICT. *out is overwritten and holds the
 * fraction with the one new item (n == 1). */
int fxl_fraction_log_field(fxl_ctx *ctx, fxl_record_result *out, int64_t fraction_id,
                           const fxl_reading_entry *entry);

/* What closing a fraction found. Release with fxl_fraction_close_release. */
typedef struct fxl_fraction_missing {
    int64_t field_id;
    char field[65];
    char point[16];
    fxl_due_reason due_reason;
    int64_t review_item_id;         /* missing-measurement item opened (or already open) */
} fxl_fraction_missing;

typedef struct fxl_fraction_close_result {
    int64_t fraction_id;
    int fraction_number;
    int already_closed;             /* 1: it was closed before; nothing written */
    size_t n_measured;              /* measurements in the fraction */
    size_t n_missing;
    fxl_fraction_missing *missing;  /* due fields not measured, plan order */
} fxl_fraction_close_result;

#define FXL_FRACTION_CLOSE_RESULT_INIT {0}
void fxl_fraction_close_release(fxl_fraction_close_result *r);

/* Closes a fraction (therapist, physicist or admin): one transaction writes
 * the 'closed' mark, a missing-measurement review item for each field due
 * this fraction and not measured in it (the same item the rule over history
 * would open at the next fraction, so it is never opened twice), and the
 * audit row. A fraction with no measurement at all is closed the same way
 * (every due field is missing). Closing a closed fraction writes nothing
 * and sets already_closed. */
int fxl_fraction_close(fxl_ctx *ctx, fxl_fraction_close_result *out, int64_t fraction_id);

/* 1 when the fraction is open (begun field by field and not closed), 0 when
 * closed or logged at once by fxl_record_fraction; negative FXL_E code on
 * error. */
int fxl_fraction_is_open(fxl_ctx *ctx, int64_t fraction_id);

/* ---- times entered by people ------------------------------------------------ */

/* Parses a treatment time typed by a user into stored UTC text: ISO 8601
 * with an offset ('2026-11-02T10:00+01:00', '...Z') is taken as given; a time
 * without an offset ('2026-11-02 10:00', '2026-11-02T10:00[:SS]', a date
 * alone meaning 00:00) is local time in the department's zone (setting
 * 'timezone'); a local time that does not exist (spring-forward gap) is
 * FXL_EINVAL, an ambiguous one (autumn) takes the earlier instant and the
 * offset is shown with it. FXL_EINVAL naming the text otherwise. */
int fxl_time_parse_local(fxl_ctx *ctx, char out[FXL_TIME_LEN], const char *text);

/* Stored UTC text to '2026-11-02 10:00 +01:00' in the department's zone. On
 * a malformed input the text is copied. */
void fxl_time_show_local(fxl_ctx *ctx, char *buf, size_t size, const char *stored);

#endif
