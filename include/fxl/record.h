/* Logging one fraction: the readings of a patient's fields turned into
 * corrected doses, deviations and verdicts, written with a snapshot of every
 * factor in one transaction; amendments that supersede a mistyped reading;
 * the history of a patient's measurements; the outcome of the alert hook.
 * Flow and rules: docs/record.md. Units: doses cGy, readings in the
 * detector's unit, temperatures degC, deviations percent. */
#ifndef FXL_RECORD_H
#define FXL_RECORD_H

#include <stddef.h>
#include <stdint.h>

#include "fxl/core.h"
#include "fxl/fxl.h"

/* At most this many readings in one fraction. */
#define FXL_RECORD_READINGS_MAX 64
/* Accepted temperature at the detector, degC (the schema's range). */
#define FXL_RECORD_TEMP_MIN_C 10.0
#define FXL_RECORD_TEMP_MAX_C 45.0
/* Defaults used when the settings are not stored (docs/settings.md). */
#define FXL_RECORD_SKIN_TEMP_DEFAULT_C 32.0
#define FXL_RECORD_IMPLAUSIBLE_DEFAULT_PCT 50.0
/* Longest amendment reason, characters. */
#define FXL_AMEND_REASON_MAX 500

/* ---- logging a fraction ------------------------------------------------- */

/* One reading as entered. Strings are borrowed for the duration of the call. */
typedef struct fxl_reading_entry {
    const char *field;        /* field name as in the plan (required) */
    const char *point;        /* "entrance", "exit", or NULL when the field has
                                 only one measured point */
    const char *detector;     /* detector serial (required) */
    double reading;           /* detector unit; must be finite and > 0 */
    double background;        /* M_0, same unit; NaN = none (0); 0 <= M_0 < reading */
    double temp_c;            /* NaN = not entered: setting skin_temp_c is used
                                 and the row records temp_entered = 0; else 10..45 */
} fxl_reading_entry;

/* Fills *e with "nothing entered": NULL strings, NaN numbers. */
void fxl_reading_entry_init(fxl_reading_entry *e);

typedef struct fxl_record_request {
    const char *mrn;          /* patient (required) */
    const char *plan;         /* plan label; NULL = the patient's latest plan
                                 that no other plan replaces */
    int fraction;             /* 0 = the next number after the highest logged */
    const char *treated_at;   /* NULL = now; else 'YYYY-MM-DD[THH:MM[:SS]][Z]',
                                 UTC, not later than now */
    const fxl_reading_entry *readings;
    size_t n_readings;        /* 1..FXL_RECORD_READINGS_MAX */
} fxl_record_request;

/* One stored measurement with everything it was judged by. Numbers that do
 * not apply are NaN; ids that do not apply are 0. */
typedef struct fxl_measurement_result {
    int64_t measurement_id;
    int64_t supersedes_id;          /* the row an amendment supersedes, else 0 */
    int64_t review_item_id;         /* queue item opened for it, else 0 */
    int64_t field_id;
    char field[65];
    char point[16];                 /* "entrance" / "exit" */
    char machine[65];
    char beam[33];
    char modality[16];
    double energy;                  /* MV or MeV */
    char detector[65];              /* serial */
    char detector_kind[24];
    char detector_status[24];       /* at the treatment time */
    char reading_unit[8];
    double reading;
    double background;              /* 0 when none */
    double temp_c;                  /* used for CF_T */
    int temp_entered;               /* 0: the skin-temperature setting was used */
    int64_t calibration_id;         /* 0: no calibration found */
    char calibration_valid_until[FXL_TIME_LEN];
    int calibration_valid;
    double factor_n;                /* cGy per reading unit */
    double temp_cal_c;
    double temp_coeff_per_c;
    double param[FXL_CF_COUNT];     /* the field's value of each parameter */
    double ref[FXL_CF_COUNT];       /* the calibration's reference condition */
    int64_t cf_table_id[FXL_CF_COUNT];  /* correction table used, 0 = none */
    double cf[FXL_CF_COUNT];        /* each factor (NaN when it failed) */
    double cf_temp;
    double corrected_dose_cgy;      /* NaN unless the dose could be judged */
    double expected_dose_cgy;
    char expected_source[16];
    double deviation_pct;           /* rounded to 0.01 %; NaN when not computed */
    int64_t threshold_set_id;       /* 0: no levels apply */
    char threshold_name[65];
    int threshold_version;
    fxl_levels levels;
    fxl_verdict verdict;
    int escalated;                  /* 1: raised to action by the history rule */
    int gross;                      /* 1: beyond the plausibility bound (gross
                                       deviation, outside the action level) */
    fxl_reasons reasons;
    char amend_reason[FXL_AMEND_REASON_MAX + 1];
} fxl_measurement_result;

/* What was written. Release with fxl_record_result_release. */
typedef struct fxl_record_result {
    int64_t fraction_id;
    int fraction_number;
    int plan_fractions;             /* fractions planned */
    int64_t patient_id;
    char mrn[65];
    char patient_name[402];         /* "Family, Given" */
    int64_t plan_id;
    char plan[65];
    char site[65];
    char technique[33];
    char treated_at[FXL_TIME_LEN];
    char recorded_at[FXL_TIME_LEN];
    char recorded_by[65];
    size_t n;
    fxl_measurement_result *items;  /* heap, n entries, in entry order */
    /* Due fields of this fraction left without a reading (fxl_record_fraction
     * only): each named with its missing-measurement item, opened in the same
     * transaction (fxl/fraction.h has the type). Heap, n_missing entries. */
    size_t n_missing;
    struct fxl_fraction_missing *missing;
} fxl_record_result;

#define FXL_RECORD_RESULT_INIT {0}
void fxl_record_result_release(fxl_record_result *r);

/* Logs one fraction (therapist, physicist or admin).
 * Every input is validated before anything is written; the first problem is
 * returned (FXL_ENOTFOUND for an unknown patient, plan, field or detector;
 * FXL_EINVAL for a value out of range; FXL_ECONFLICT for a fraction number
 * already logged) with a one-line message naming the field and the accepted
 * range, and the database is untouched. Then, for each reading, the inputs in
 * force at the treatment time are loaded (field, beam, detector status,
 * calibration, correction tables, threshold set, settings), the dose and
 * verdict computed by core (fxl_dose_from_reading, fxl_judge) and the
 * history rule applied (fxl/escalation.h). ONE transaction then writes the
 * fraction, one measurement row per reading with its snapshot, a review item
 * with an 'open' event for every result not within tolerance,
 * a missing-measurement item for every field due this fraction and given no
 * reading (out->missing; the item the rule over history would open at the
 * next fraction, so never twice), the audit rows,
 * and runs the rules over history (store/rules_hook.h); any failure rolls
 * everything back. A retired detector, an expired calibration or a parameter
 * outside its table is not an input error: the reading is logged as not
 * evaluable with the reason. *out is overwritten (release an earlier result
 * first). On success it holds what was written; on failure it is empty. */
int fxl_record_fraction(fxl_ctx *ctx, fxl_record_result *out, const fxl_record_request *req);

/* ---- amendments ----------------------------------------------------------- */

/* A corrected reading that supersedes an earlier, mistyped one. */
typedef struct fxl_amend_request {
    int64_t measurement_id;   /* the row to supersede; must not be superseded yet */
    const char *reason;       /* why, 1..FXL_AMEND_REASON_MAX characters (required) */
    double reading;           /* the corrected reading, > 0, detector unit */
    const char *detector;     /* serial; NULL keeps the original row's detector */
    double background;        /* NaN keeps the original row's M_0 (0 if it had none) */
    double temp_c;            /* NaN keeps the original row's temperature and
                                 its entered flag; else 10..45 degC */
} fxl_amend_request;

void fxl_amend_request_init(fxl_amend_request *r);

/* Writes a new measurement in the SAME fraction and for the SAME field as
 * measurement_id, naming it in supersedes_id with amend_reason (therapist,
 * physicist or admin). The new row is computed exactly as in
 * fxl_record_fraction, at the fraction's treatment time (calibration, tables
 * and levels in force then), including the history rule. The earlier row is
 * never changed: listings mark it "superseded by #new". One transaction: the
 * new row, its review item when not within tolerance, audit rows, and the
 * rules over history for the fraction (which link the superseded row's queue
 * items to the new row). The review item of the superseded row, if any,
 * stays open for the physicist to close.
 * *out holds the fraction with the one new item (n == 1). */
int fxl_record_amend(fxl_ctx *ctx, fxl_record_result *out, const fxl_amend_request *req);

/* ---- what the interactive prompt needs ------------------------------------- */

typedef struct fxl_record_field_info {
    int64_t field_id;
    char name[65];
    char point[16];
    char beam[33];
    double mu;
    double expected_dose_cgy;       /* NaN when missing */
    char last_detector[65];         /* last used on this field of this plan, "" if none */
} fxl_record_field_info;

typedef struct fxl_record_plan {
    int64_t patient_id;
    char mrn[65];
    char patient_name[402];
    int64_t plan_id;
    char plan[65];
    char site[65];
    char technique[33];
    int fractions;                  /* planned */
    int next_fraction;              /* highest logged + 1 (may exceed fractions) */
    char last_detector[65];         /* the patient's last detector, "" if none */
    double skin_temp_c;             /* setting skin_temp_c or its default */
    size_t n_fields;
    fxl_record_field_info *fields;  /* heap, in plan order (id) */
} fxl_record_plan;

/* The plan a request would use (plan NULL = as in fxl_record_fraction), its
 * fields and the defaults to offer. Any role may read. Release with
 * fxl_record_plan_release. */
int fxl_record_plan_load(fxl_ctx *ctx, fxl_record_plan *out, const char *mrn,
                         const char *plan);
void fxl_record_plan_release(fxl_record_plan *info);

/* The reading unit of a detector (e.g. "nC"); FXL_ENOTFOUND if unknown. */
int fxl_record_detector_unit(fxl_ctx *ctx, char unit[8], const char *serial);

/* ---- history ----------------------------------------------------------------- */

typedef struct fxl_history_query {
    const char *mrn;          /* required */
    const char *plan;         /* label, NULL = every plan of the patient */
    const char *field;        /* field name, NULL = every field */
} fxl_history_query;

typedef struct fxl_history_row {
    int64_t measurement_id;
    int64_t fraction_id;
    int fraction_number;
    char plan[65];
    char treated_at[FXL_TIME_LEN];
    char recorded_at[FXL_TIME_LEN];
    char recorded_by[65];
    char field[65];
    char point[16];
    char detector[65];
    char reading_unit[8];
    double reading;
    double temp_c;
    int temp_entered;               /* 0: temperature assumed (skin setting) */
    double background;              /* M_0; NaN in rows older than schema 5 */
    int gross;                      /* 1: beyond the plausibility bound */
    int64_t calibration_id;         /* 0 = none */
    double factor_n;
    double cf[FXL_CF_COUNT];
    double cf_temp;
    double corrected_dose_cgy;
    double expected_dose_cgy;
    double deviation_pct;
    int64_t threshold_set_id;
    double tolerance_pct, action_pct, floor_cgy;
    fxl_verdict verdict;
    fxl_reasons reasons;
    int64_t supersedes_id;          /* 0 unless an amendment */
    int64_t superseded_by;          /* id of the row that supersedes it, else 0 */
    char amend_reason[FXL_AMEND_REASON_MAX + 1];
} fxl_history_row;

/* Every measurement of a patient (optionally one plan, one field), superseded
 * rows included and marked, ordered by treatment time, fraction, field, id.
 * An unknown patient, plan or field is FXL_ENOTFOUND. *out is a heap array
 * owned by the caller (free()); NULL when n is 0. Any role may read. */
int fxl_history_list(fxl_ctx *ctx, fxl_history_row **out, size_t *n,
                     const fxl_history_query *q);

/* ---- the alert hook's outcome ---------------------------------------------- */

typedef enum {
    FXL_ALERT_OK = 0,          /* the command exited 0 */
    FXL_ALERT_FAILED,          /* it exited non-zero or was killed by a signal */
    FXL_ALERT_TIMED_OUT,       /* it ran past alert_timeout_s and was killed */
    FXL_ALERT_NOT_STARTED      /* it could not be started at all */
} fxl_alert_outcome;

const char *fxl_alert_outcome_name(fxl_alert_outcome o);  /* "ok", "failed", ... */

/* Records in its own small transaction an audit row (action "alert", entity
 * "fractions") saying how the alert command ran for a fraction already
 * committed: the command text, the outcome, exit_code (or the signal for
 * FXL_ALERT_FAILED by a signal, given as a negative number; ignored
 * otherwise) and the number of results that triggered it. Needs an acting
 * user of any clinical role. */
int fxl_record_alert_outcome(fxl_ctx *ctx, int64_t fraction_id, const char *command,
                             fxl_alert_outcome outcome, int exit_code, int n_action);

#endif
