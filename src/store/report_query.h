/* Read-only queries behind the PDF reports. Every listing STREAMS its rows to
 * a callback, one row at a time, straight from the SQLite statement: nothing
 * here loads a patient's course or a month into memory. Private to src/.
 *
 * Strings in the row structs are borrowed from the statement and valid only
 * during the callback; copy what must outlive it. Numbers that are NULL in
 * the database are NaN (doses, deviations) or 0 (ids). A callback returns 0 to
 * go on or a negative FXL_E code to stop; that code is returned. Times are the
 * stored UTC form 'YYYY-MM-DDTHH:MM:SSZ'. */
#ifndef FXL_STORE_REPORT_QUERY_H
#define FXL_STORE_REPORT_QUERY_H

#include <stdint.h>

#include "fxl/fxl.h"

/* A consistent snapshot: every query between begin and end sees the same
 * database state even while other processes write (a WAL read transaction).
 * Never writes. end is safe to call when begin failed. */
int fxl_rq_snapshot_begin(fxl_ctx *ctx);
void fxl_rq_snapshot_end(fxl_ctx *ctx);

/* ---- per patient ------------------------------------------------------- */

typedef struct fxl_rq_patient {
    int64_t id;
    const char *mrn;
    const char *family_name;
    const char *given_name;
    const char *birth_date;          /* "" when unknown */
} fxl_rq_patient;

typedef int (*fxl_rq_patient_cb)(void *arg, const fxl_rq_patient *p);

/* Calls cb once with the patient whose ID is `mrn`; FXL_ENOTFOUND (with a
 * message) when there is none. */
int fxl_rq_patient_get(fxl_ctx *ctx, const char *mrn, fxl_rq_patient_cb cb, void *arg);

/* One electronic signature on something of the patient: a close or reopen
 * of one of their review items, or the import of one of their plans. */
typedef struct fxl_rq_signature {
    const char *subject;             /* "review item #12" or "plan PL-1" */
    const char *login;
    const char *printed_name;
    const char *signed_at;           /* UTC */
    const char *meaning;
} fxl_rq_signature;

typedef int (*fxl_rq_signature_cb)(void *arg, const fxl_rq_signature *g);

/* Calls cb for every such signature of the patient, oldest first. */
int fxl_rq_patient_signatures_each(fxl_ctx *ctx, int64_t patient_id, fxl_rq_signature_cb cb,
                                   void *arg);

typedef struct fxl_rq_plan {
    int64_t id;
    const char *label;
    const char *site;
    const char *technique;
    int fractions;                   /* prescribed number of fractions */
    double dose_per_fraction_cgy;    /* NaN when not given */
    const char *created_at;
    const char *replaces_label;      /* "" unless it replaces another plan */
    int64_t measurement_count;       /* every row, superseded included */
    const char *first_treated_at;    /* "" when no measurement */
    const char *last_treated_at;
} fxl_rq_plan;

typedef int (*fxl_rq_plan_cb)(void *arg, const fxl_rq_plan *p);

/* The patient's plans in order of import; only `label` when it is not NULL
 * (FXL_ENOTFOUND naming the label when the patient has no such plan). */
int fxl_rq_plans_each(fxl_ctx *ctx, int64_t patient_id, const char *label,
                      fxl_rq_plan_cb cb, void *arg);

/* Review state of a measurement, for the disposition column. */
typedef enum {
    FXL_RQ_REVIEW_NONE = 0,          /* nothing was queued for it */
    FXL_RQ_REVIEW_PENDING,           /* a queue item is open or acknowledged */
    FXL_RQ_REVIEW_CLOSED             /* every item closed; disposition holds the latest */
} fxl_rq_review_state;

typedef struct fxl_rq_measurement {
    int64_t id;
    const char *treated_at;
    int fraction;
    int64_t field_id;
    const char *field;
    const char *point;               /* entrance / exit */
    const char *detector;            /* label */
    const char *detector_serial;
    double reading;
    const char *reading_unit;
    double corrected_dose_cgy;       /* NaN when not evaluable */
    double expected_dose_cgy;        /* NaN when missing */
    double deviation_pct;            /* NaN when not computed */
    double tolerance_pct;            /* levels in force for it, NaN if none */
    double action_pct;
    const char *verdict;             /* schema name, e.g. "outside_tolerance" */
    fxl_rq_review_state review;
    const char *disposition;         /* latest 'close' event's disposition, "" if none */
    int64_t supersedes_id;           /* 0 unless it amends an earlier row */
    int64_t superseded_by;           /* 0 unless a later row amends it */
    const char *amend_reason;        /* "" unless it amends */
    double temp_c;                   /* temperature used for the correction */
    int temp_assumed;                /* 1: not entered, the default skin temperature used */
    const char *reasons_json;        /* JSON array of the verdict's reasons */
} fxl_rq_measurement;

typedef int (*fxl_rq_measurement_cb)(void *arg, const fxl_rq_measurement *m);

/* Every measurement of a plan, superseded ones included, ordered by fraction
 * number, treatment time, field name, point and id. */
int fxl_rq_measurements_each(fxl_ctx *ctx, int64_t plan_id, fxl_rq_measurement_cb cb, void *arg);

/* One review event on a queue item about a plan's measurements or fields:
 * who made it (login, printed name, role), when, what it means, the comment. */
typedef struct fxl_rq_event {
    int64_t event_id;
    int64_t item_id;
    int64_t measurement_id;          /* 0 for items about a field, not one result */
    const char *rule;
    const char *summary;             /* the item's summary */
    const char *kind;                /* open, acknowledge, comment, close, reopen */
    const char *disposition;         /* "" unless close */
    const char *comment;             /* "" when none */
    const char *at;
    const char *login;
    const char *full_name;
    const char *role;
} fxl_rq_event;

typedef int (*fxl_rq_event_cb)(void *arg, const fxl_rq_event *e);

/* Every event of the queue items about the plan's measurements or fields,
 * by item and then in time order. */
int fxl_rq_review_events_each(fxl_ctx *ctx, int64_t plan_id, fxl_rq_event_cb cb, void *arg);

typedef struct fxl_rq_field {
    int64_t id;
    const char *name;
    const char *point;
    const char *machine;
    const char *beam;
    const char *modality;
    double energy;                   /* MV or MeV by modality */
    int64_t measured;                /* current (not superseded) measurements */
    int64_t evaluable;               /* ... with a deviation that has a verdict of level */
    double max_abs_dev_pct;          /* over the evaluable ones, NaN if none */
    int max_fraction;                /* highest fraction number measured, 0 if none */
    double tolerance_pct;            /* levels most used on this field, NaN if none */
    double action_pct;
    int64_t level_variants;          /* distinct (tolerance, action) pairs used */
} fxl_rq_field;

typedef int (*fxl_rq_field_cb)(void *arg, const fxl_rq_field *f);

/* The fields of a plan ordered by name and point, with what their chart needs. */
int fxl_rq_fields_each(fxl_ctx *ctx, int64_t plan_id, fxl_rq_field_cb cb, void *arg);

typedef struct fxl_rq_point {
    int fraction;
    double deviation_pct;
    const char *verdict;
} fxl_rq_point;

typedef int (*fxl_rq_point_cb)(void *arg, const fxl_rq_point *p);

/* Deviation against fraction number for one field: current measurements
 * whose verdict is one of the three level verdicts, in fraction order. */
int fxl_rq_field_points_each(fxl_ctx *ctx, int64_t field_id, fxl_rq_point_cb cb, void *arg);

/* ---- scope of a report: the detector/beam pairs and their corrections --- */

/* What a report covers: one patient's plan(s), or a time window. */
typedef struct fxl_rq_scope {
    int64_t patient_id;              /* > 0: the patient's plans */
    int64_t plan_id;                 /* > 0: only this plan */
    const char *from;                /* else treated_at in [from, to) */
    const char *to;
    const char *as_of;               /* tables in force at this time */
} fxl_rq_scope;

typedef struct fxl_rq_correction {
    const char *detector;
    const char *detector_serial;
    const char *machine;
    const char *beam;
    const char *parameter;           /* field_size, ssd, wedge, tray, angle */
    double x_min;
    double x_max;
    int64_t points;
    const char *effective_from;
} fxl_rq_correction;

typedef int (*fxl_rq_correction_cb)(void *arg, const fxl_rq_correction *c);

/* The correction tables in force at scope->as_of for every detector and beam
 * that measured within the scope, with their commissioned range. */
int fxl_rq_corrections_each(fxl_ctx *ctx, const fxl_rq_scope *scope, fxl_rq_correction_cb cb,
                            void *arg);

/* ---- per month ------------------------------------------------------------ */

/* How monthly counts are grouped. */
typedef enum {
    FXL_RQ_BY_NONE = 0,              /* one group: the whole month */
    FXL_RQ_BY_SITE_TECHNIQUE,
    FXL_RQ_BY_ENERGY,                /* modality and nominal energy */
    FXL_RQ_BY_DETECTOR
} fxl_rq_grouping;

typedef struct fxl_rq_count {
    const char *key1;                /* site / modality / detector label; "" for NONE */
    const char *key2;                /* technique / "" / detector serial */
    double energy;                   /* FXL_RQ_BY_ENERGY only, else NaN */
    const char *verdict;
    int64_t count;
} fxl_rq_count;

typedef int (*fxl_rq_count_cb)(void *arg, const fxl_rq_count *c);

/* Counts the current (not superseded) measurements treated in [from, to)
 * once, by site, technique, modality, energy, detector and verdict, into a
 * temporary table of the connection (inside the report's snapshot; the
 * snapshot's end removes it). Replaces the cells of an earlier call. */
int fxl_rq_month_cells(fxl_ctx *ctx, const char *from, const char *to);

/* The counts of those cells per group and verdict, ordered by group so that
 * one group's rows are adjacent. fxl_rq_month_cells first. */
int fxl_rq_month_counts_each(fxl_ctx *ctx, fxl_rq_grouping by, fxl_rq_count_cb cb, void *arg);

typedef struct fxl_rq_levels_used {
    double tolerance_pct;
    double action_pct;
    int64_t count;
} fxl_rq_levels_used;

typedef int (*fxl_rq_levels_cb)(void *arg, const fxl_rq_levels_used *l);

/* The (tolerance, action) pairs used by current measurements treated in
 * [from, to), most used first. */
int fxl_rq_month_levels_each(fxl_ctx *ctx, const char *from, const char *to,
                             fxl_rq_levels_cb cb, void *arg);

typedef int (*fxl_rq_value_cb)(void *arg, double value);

/* Deviation of every current measurement treated in [from, to) whose verdict
 * is one of the three level verdicts, unordered. */
int fxl_rq_month_deviations_each(fxl_ctx *ctx, const char *from, const char *to,
                                 fxl_rq_value_cb cb, void *arg);

typedef struct fxl_rq_action_event {
    int64_t measurement_id;
    const char *treated_at;
    const char *mrn;
    const char *family_name;
    const char *given_name;
    const char *plan;
    const char *field;
    const char *point;
    double deviation_pct;
    double action_pct;
    int superseded;                  /* 1 if a later row amends it */
    const char *opened_at;           /* earliest queue item for it, "" if none */
    const char *closed_at;           /* latest close event, "" if not closed */
    const char *disposition;         /* "" if not closed */
    const char *reviewer;            /* full name of who closed it, "" if not closed */
    int pending;                     /* 1 if a queue item is still open */
} fxl_rq_action_event;

typedef int (*fxl_rq_action_cb)(void *arg, const fxl_rq_action_event *e);

/* Every measurement outside the action level treated in [from, to), the
 * superseded ones too, in order of treatment. Review state as of now. */
int fxl_rq_month_actions_each(fxl_ctx *ctx, const char *from, const char *to,
                              fxl_rq_action_cb cb, void *arg);

typedef struct fxl_rq_queue_item {
    int64_t id;
    const char *rule;
    int severity;                    /* 1..4, 4 most severe */
    const char *summary;
    const char *opened_at;
    const char *mrn;                 /* "" when not about a patient */
    const char *last_event;          /* kind of the latest event before as_of, "" if none */
    double age_days;                 /* as_of - opened_at */
} fxl_rq_queue_item;

typedef int (*fxl_rq_queue_cb)(void *arg, const fxl_rq_queue_item *q);

/* Queue items opened before `as_of` and not closed as of then (judged from
 * the append-only events, so a later report gives the same list), oldest
 * first. */
int fxl_rq_queue_open_each(fxl_ctx *ctx, const char *as_of, fxl_rq_queue_cb cb, void *arg);

typedef struct fxl_rq_calibration {
    const char *detector;
    const char *detector_serial;
    const char *machine;
    const char *beam;
    const char *point;
    const char *calibrated_at;
    const char *valid_until;
    double factor_cgy_per_unit;
    const char *reading_unit;
    const char *by;                  /* full name of who recorded it */
    double days_left;                /* valid_until - as_of (negative: overdue) */
} fxl_rq_calibration;

typedef int (*fxl_rq_calibration_cb)(void *arg, const fxl_rq_calibration *c);

/* Calibrations performed in [from, to), in order. */
int fxl_rq_calibrations_done_each(fxl_ctx *ctx, const char *from, const char *to,
                                  const char *as_of, fxl_rq_calibration_cb cb, void *arg);

/* The latest calibration (at or before as_of) of every detector, beam and
 * point whose detector is not retired as of then and whose validity ends
 * before as_of + due_days; overdue (already expired) first. */
int fxl_rq_calibrations_due_each(fxl_ctx *ctx, const char *as_of, int due_days,
                                 fxl_rq_calibration_cb cb, void *arg);

typedef struct fxl_rq_detector_dose {
    const char *detector;
    const char *detector_serial;
    const char *kind;
    const char *status;              /* as of as_of */
    const char *last_calibrated_at;  /* "" if never */
    double accumulated_cgy;
    double limit_cgy;
} fxl_rq_detector_dose;

typedef int (*fxl_rq_detector_dose_cb)(void *arg, const fxl_rq_detector_dose *d);

/* Detectors with a dose limit whose accumulated dose as of `as_of` reaches
 * warn_fraction of it (0.8 = 80 %), highest fraction first. Accumulated dose
 * as in fxl/detectors.h: corrected doses of the detector's current
 * measurements treated after its latest calibration. */
int fxl_rq_detectors_near_limit_each(fxl_ctx *ctx, const char *as_of, double warn_fraction,
                                     fxl_rq_detector_dose_cb cb, void *arg);

#endif
