/* Treatment plans and their fields. A plan is immutable once imported; a
 * plan change is a new plan that names the one it replaces. Each measured
 * point of a beam is one field row. Units: MU, cm, degrees, cGy.
 * File format of an import: docs/format-plan.md (parser in fxl/plan_json.h). */
#ifndef FXL_PLANS_H
#define FXL_PLANS_H

#include <stddef.h>
#include <stdint.h>

#include "fxl/core.h"
#include "fxl/fxl.h"

/* Accepted ranges, the same as the schema's checks (plus upper bounds the
 * schema leaves open). */
#define FXL_PLAN_FRACTIONS_MAX 100
#define FXL_PLAN_DOSE_CGY_MAX 3000.0    /* dose per fraction and expected dose, cGy */
#define FXL_FIELD_MU_MAX 10000.0
#define FXL_FIELD_SSD_CM_MIN 50.0
#define FXL_FIELD_SSD_CM_MAX 200.0
#define FXL_FIELD_JAW_CM_MAX 50.0
#define FXL_FIELD_WEDGE_DEG_MAX 60.0
#define FXL_FIELD_INCIDENCE_DEG_MAX 90.0
#define FXL_FIELD_THICKNESS_CM_MAX 60.0

/* ---- what an import writes ---------------------------------------------- */

/* One measured point of a beam. */
typedef struct fxl_point_spec {
    char point[9];                /* "entrance" or "exit" */
    double expected_dose_cgy;     /* > 0 and <= FXL_PLAN_DOSE_CGY_MAX; NaN with
                                     source "model" */
    char expected_source[7];      /* "tps" or "manual"; or "model": the expected
                                     dose is the independent model's value at
                                     import, and stays missing (results not
                                     evaluable) when the model gives none */
    double thickness_cm;          /* patient thickness along the beam; NaN if
                                     not given (required for exit) */
} fxl_point_spec;

/* One beam of the plan with its one or two measured points. */
typedef struct fxl_field_spec {
    char name[65];
    char machine[65];             /* machines.name */
    char beam[33];                /* beams.name of that machine */
    char setup[11];               /* "ssd" or "isocentric" */
    double mu;
    double ssd_cm;
    double x_cm, y_cm;            /* jaw sizes at the reference distance */
    double shaped_eqsq_cm;        /* equivalent square of the field shaped by an
                                     MLC or blocks at the SAD, for the model's
                                     S_p; 0 or NaN: the jaws (x_cm x y_cm) */
    double wedge_deg;             /* 0 = open */
    int tray;                     /* 0 or 1 */
    double gantry_deg;            /* 0 <= g < 360 */
    double incidence_deg;         /* beam angle on the detector, 0 = normal */
    char policy[7];               /* "first", "weekly", "every", "none" */
    size_t n_points;              /* 1 or 2 */
    fxl_point_spec points[2];
} fxl_field_spec;

typedef struct fxl_plan_spec {
    char mrn[65];                 /* patients.mrn, must exist */
    char label[65];
    char site[65];
    char technique[33];
    int fractions;
    double dose_per_fraction_cgy; /* NaN when not given */
    char replaces[65];            /* label of the plan replaced, "" if none */
    char origin[6];               /* plans.source: "json" or "dicom"; "" = json */
    char origin_note[256];        /* for the audit row (file, SOP Instance UID); "" */
    size_t n_fields;
    fxl_field_spec *fields;       /* malloc'ed; freed by fxl_plan_spec_release */
} fxl_plan_spec;

void fxl_plan_spec_release(fxl_plan_spec *spec);

/* Name and severity of the review item a cross-check disagreement opens. */
#define FXL_RULE_MODEL_CROSSCHECK "model_crosscheck"
#define FXL_RULE_MODEL_CROSSCHECK_SEVERITY 3      /* high: before any patient is measured */

/* Imports a plan (physicist or admin): resolves the patient, every machine
 * and beam and the plan it replaces, re-checks every value, then writes the
 * plan and one fields row per measured point in ONE transaction with audit
 * rows. Refuses (nothing written): unknown patient, machine or beam; a label
 * already used for the patient; a replaced plan that does not exist or was
 * already replaced; an exit point on an electron beam or with a thickness not
 * beyond the beam's d_max.
 * In the same transaction, for every measured point, the independent model
 * (docs/expected-dose.md) is evaluated with the beam data in force now and
 * stored with the field (model_dose_cgy, model_factors with every factor and
 * the cross-check, model_beam_data_id): a point whose expected dose comes
 * from the planning system ("tps") is cross-checked at setting
 * model_crosscheck_pct (default FXL_MODEL_CROSSCHECK_PCT_DEFAULT) and a
 * disagreement opens a review item (rule "model_crosscheck", severity 3) on
 * the patient and field; a point with source "model" takes the model's value
 * as its expected dose. A point the model cannot compute (electron beam, no
 * beam data, a value outside a table) is stored as not checked with the
 * reason, never as agreement. *out_id (may be NULL) is the new plans.id. */
int fxl_plan_import(fxl_ctx *ctx, int64_t *out_id, const fxl_plan_spec *spec);

/* ---- reading plans back ---------------------------------------------------- */

typedef struct fxl_field {
    int64_t id;
    char name[65];
    int64_t beam_id;
    char machine[65];
    char beam[33];
    char modality[9];
    double energy;                /* MV or MeV */
    char point[9];
    char setup[11];
    double mu, ssd_cm, x_cm, y_cm, wedge_deg;
    int tray;
    double gantry_deg, incidence_deg;
    double thickness_cm;          /* NaN when not given */
    double expected_dose_cgy;     /* NaN when not given */
    char expected_source[7];      /* "" when not given */
    char policy[7];
    /* The independent model at import (docs/expected-dose.md). */
    double model_dose_cgy;        /* NaN when the model gave no value */
    int64_t model_beam_data_id;   /* beam data version used, 0 if none */
    char model_factors[6144];     /* the stored JSON (every factor, reasons and the
                                     cross-check); "" for a field imported before
                                     the model existed */
    char crosscheck[12];          /* "agrees", "disagrees", "not_checked"; "" as above */
    double crosscheck_dev_pct;    /* (TPS - model)/model x 100; NaN unless compared */
    double crosscheck_level_pct;  /* NaN unless compared */
    char model_note[FXL_REASON_LEN]; /* the cross-check summary or why not checked */
    int64_t crosscheck_item_id;   /* review item opened by a disagreement, 0 if none */
} fxl_field;

typedef struct fxl_plan {
    int64_t id;
    int64_t patient_id;
    char mrn[65];
    char label[65];
    char site[65];
    char technique[33];
    int fractions;
    double dose_per_fraction_cgy; /* NaN when not given */
    int64_t replaces_plan_id;     /* 0 if none */
    char replaces_label[65];
    int64_t replaced_by_id;       /* 0 if none */
    char replaced_by_label[65];
    char source[6];               /* "json" or "dicom" */
    char created_by[65];
    char created_at[FXL_TIME_LEN];
    int fractions_logged;
    size_t n_fields;              /* field rows (one per measured point) */
    fxl_field *fields;            /* filled by fxl_plan_get only; else NULL */
} fxl_plan;

/* The plan `label` of patient `mrn` with its fields (in the order of the
 * imported file, each beam's points in their listed order). FXL_ENOTFOUND naming what is missing. Release with
 * fxl_plan_release. */
int fxl_plan_get(fxl_ctx *ctx, fxl_plan *out, const char *mrn, const char *label);
void fxl_plan_release(fxl_plan *plan);

/* Plans of patient `mrn` (NULL: every patient), ordered by MRN and creation,
 * without their fields (n_fields counted). FXL_ENOTFOUND for an unknown MRN.
 * *out is malloc'ed (free with free(); NULL when *n is 0). */
int fxl_plan_list(fxl_ctx *ctx, fxl_plan **out, size_t *n, const char *mrn);

/* Number of plans (replaced ones included) whose site equals `site` and, when
 * technique is not NULL, whose technique equals `technique`, both ignoring
 * ASCII case as level-set matching does. Lets `levels set` warn about a
 * scope that no plan uses (a likely misspelling). */
int fxl_plan_count_matching(fxl_ctx *ctx, int *out_n, const char *site, const char *technique);

#endif
