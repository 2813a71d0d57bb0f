/* Private plumbing of the record path shared by record.c (validation and the
 * write transaction), record_load.c (the inputs in force at the treatment
 * time) and record_history.c (listings). Private to src/store. */
#ifndef FXL_STORE_RECORD_INT_H
#define FXL_STORE_RECORD_INT_H

#include <cjson/cJSON.h>
#include <stdint.h>

#include "fxl/escalation.h"
#include "fxl/record.h"
#include "store/ctx.h"

/* The patient and plan a fraction belongs to. */
typedef struct rec_plan {
    int64_t patient_id;
    char mrn[65];
    char patient_name[402];
    int64_t plan_id;
    char label[65];
    char site[65];
    char technique[33];
    int fractions;
    int highest_logged;            /* 0 when no fraction is logged */
} rec_plan;

/* One correction table in force, points owned (heap). */
typedef struct rec_table {
    int64_t id;                    /* 0: none commissioned */
    size_t n;
    double *x;
    double *factor;
} rec_table;

/* Everything one reading is judged by; m holds the descriptive part and,
 * after rec_compute, the result. */
typedef struct rec_inputs {
    fxl_measurement_result m;
    int64_t detector_id;
    int64_t beam_id;
    int detector_in_service;
    rec_table tables[FXL_CF_COUNT];
    fxl_prior_result prior;
    char threshold_reason[200];    /* why no levels apply, "" otherwise */
} rec_inputs;

/* Department settings the verdict depends on. */
typedef struct rec_settings {
    double skin_temp_c;
    double implausible_pct;
} rec_settings;

void rec_inputs_release(rec_inputs *in);

/* Inside the caller's transaction, after the fraction's readings are
 * written: a missing-measurement item for every field due at fraction
 * `number` (treated at treated_at) with no measurement in fraction_id, keyed
 * as the rule over history keys it, so it is opened once. The fields are
 * named in *missing (heap, plan order) and, when names is not NULL, appended
 * to that JSON array. `when` ends the summary ("found when fraction N was
 * `when`"). fraction.c. */
struct fxl_fraction_missing;
int rec_open_missing(fxl_ctx *ctx, struct fxl_fraction_missing **missing, size_t *n_missing,
                     cJSON *names, const rec_plan *plan, int64_t fraction_id, int number,
                     const char *treated_at, const char *when);

/* The plan by label, or the patient's latest plan no other plan replaces. */
int rec_load_plan(fxl_ctx *ctx, rec_plan *out, const char *mrn, const char *label);

/* Field of the plan by name and optional point; the resolved point is
 * written to point_out. Messages name the plan's fields. */
int rec_find_field(fxl_ctx *ctx, int64_t *field_id, char point_out[16], const rec_plan *plan,
                   const char *name, const char *point);

/* Detector by serial: id and reading unit. */
int rec_find_detector(fxl_ctx *ctx, int64_t *id, char unit[8], const char *serial);

int rec_load_settings(fxl_ctx *ctx, rec_settings *out);

/* Loads field, beam, detector (status at `at`), calibration, tables,
 * threshold set and the prior result (fraction numbers below
 * fraction_number) into *in. */
int rec_load_inputs(fxl_ctx *ctx, rec_inputs *in, const rec_plan *plan, int64_t field_id,
                    int64_t detector_id, const char *at, int fraction_number);

/* Core computation on loaded inputs: dose, verdict, escalation. Pure. */
void rec_compute(rec_inputs *in, double reading, double background, double temp_c,
                 int temp_entered, const rec_settings *settings);

/* The reasons as a JSON array (caller frees with cJSON_Delete). */
cJSON *rec_reasons_json(const fxl_reasons *r);
/* Parses a stored reasons array into *r (unknown content is kept as text). */
void rec_reasons_parse(fxl_reasons *r, const char *json);


/* ---- shared by record.c and fraction.c (implemented in record.c) ---------- */

/* The checks on the numbers of one reading (reading > 0, background, temperature). */
int rec_check_numbers(fxl_ctx *ctx, const char *field, double reading, double background,
                      double temp_c, const char *unit);
/* A given treatment time normalised to the stored form, not after now; NULL = now. */
int rec_check_treated_at(fxl_ctx *ctx, char at[FXL_TIME_LEN], const char *given, const char *now);
/* No fraction on a replaced plan; fraction numbers in the order of their times. */
int rec_check_plan_and_time(fxl_ctx *ctx, const rec_plan *plan, int number, const char *at);
/* Inside the caller's transaction: one measurement row with its audit row. */
int rec_insert_measurement(fxl_ctx *ctx, rec_inputs *in, int64_t fraction_id, const char *now);
/* Inside the caller's transaction: the review item of a result not within tolerance. */
int rec_open_review_item(fxl_ctx *ctx, rec_inputs *in, const rec_plan *plan, int number,
                         const char *now);
void rec_fill_header(fxl_record_result *out, const rec_plan *plan, int64_t fraction_id,
                     int number, const char *at, const char *now, const char *login);

#endif
