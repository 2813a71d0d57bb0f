/* Plans and fields in the database: import (names resolved, everything
 * re-checked, the independent model evaluated and cross-checked, one
 * transaction with audit rows and any review items), read back one plan with
 * its fields, list plans. Plans and fields are never edited (schema
 * triggers). */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/beam_json.h"
#include "fxl/beam_model.h"
#include "fxl/plans.h"
#include "store/audit.h"
#include "store/auth_int.h"
#include "store/grow.h"
#include "store/json_put.h"
#include "store/lookup.h"
#include "store/model_store.h"
#include "store/review_store.h"
#include "store/stmt.h"

static void copy(char *dst, size_t size, const char *src)
{
    snprintf(dst, size, "%s", src ? src : "");
}

static int in_range(double v, double lo, int lo_incl, double hi, int hi_incl)
{
    return isfinite(v) && (lo_incl ? v >= lo : v > lo) && (hi_incl ? v <= hi : v < hi);
}

static int one_of(const char *v, const char *a, const char *b, const char *c, const char *d)
{
    return (a && strcmp(v, a) == 0) || (b && strcmp(v, b) == 0) || (c && strcmp(v, c) == 0) ||
           (d && strcmp(v, d) == 0);
}

/* The same checks as the file parser, for callers of the library that build
 * a spec themselves; the parser's messages carry the JSON path. */
static int check_spec(fxl_ctx *ctx, const fxl_plan_spec *spec)
{
    size_t i, j;

    if (!spec->mrn[0] || !spec->label[0] || !spec->site[0] || !spec->technique[0])
        return fxl_fail(ctx, FXL_EINVAL, "plan needs a patient MRN, label, site and technique");
    if (spec->fractions < 1 || spec->fractions > FXL_PLAN_FRACTIONS_MAX)
        return fxl_fail(ctx, FXL_EINVAL, "plan '%s' fractions '%d' must be 1 to %d", spec->label,
                        spec->fractions, FXL_PLAN_FRACTIONS_MAX);
    if (!isnan(spec->dose_per_fraction_cgy) &&
        !in_range(spec->dose_per_fraction_cgy, 0, 0, FXL_PLAN_DOSE_CGY_MAX, 1))
        return fxl_fail(ctx, FXL_EINVAL, "plan '%s' dose_per_fraction_cgy '%g' must be > 0 and <= %g cGy",
                        spec->label, spec->dose_per_fraction_cgy, FXL_PLAN_DOSE_CGY_MAX);
    if (spec->n_fields < 1 || !spec->fields)
        return fxl_fail(ctx, FXL_EINVAL, "plan '%s' needs at least one field", spec->label);
    if (spec->origin[0] && !one_of(spec->origin, "json", "dicom", NULL, NULL))
        return fxl_fail(ctx, FXL_EINVAL, "plan '%s' origin '%s' must be json or dicom", spec->label,
                        spec->origin);
    for (i = 0; i < spec->n_fields; i++) {
        const fxl_field_spec *f = &spec->fields[i];
        if (!f->name[0] || !f->machine[0] || !f->beam[0])
            return fxl_fail(ctx, FXL_EINVAL, "plan field %zu needs a name, machine and beam", i + 1);
        for (j = 0; j < i; j++)
            if (strcmp(spec->fields[j].name, f->name) == 0)
                return fxl_fail(ctx, FXL_EINVAL, "plan field '%s' is listed twice", f->name);
        if (!one_of(f->setup, "ssd", "isocentric", NULL, NULL))
            return fxl_fail(ctx, FXL_EINVAL, "plan field '%s' setup '%s' must be ssd or isocentric",
                            f->name, f->setup);
        if (!one_of(f->policy, "first", "weekly", "every", "none"))
            return fxl_fail(ctx, FXL_EINVAL, "plan field '%s' policy '%s' must be first, weekly, every or none",
                            f->name, f->policy);
        if (!in_range(f->mu, 0, 0, FXL_FIELD_MU_MAX, 1))
            return fxl_fail(ctx, FXL_EINVAL, "plan field '%s' mu '%g' must be > 0 and <= %g MU", f->name,
                            f->mu, FXL_FIELD_MU_MAX);
        if (!in_range(f->ssd_cm, FXL_FIELD_SSD_CM_MIN, 1, FXL_FIELD_SSD_CM_MAX, 1))
            return fxl_fail(ctx, FXL_EINVAL, "plan field '%s' ssd_cm '%g' must be >= %g and <= %g cm",
                            f->name, f->ssd_cm, FXL_FIELD_SSD_CM_MIN, FXL_FIELD_SSD_CM_MAX);
        if (!in_range(f->x_cm, 0, 0, FXL_FIELD_JAW_CM_MAX, 1) || !in_range(f->y_cm, 0, 0, FXL_FIELD_JAW_CM_MAX, 1))
            return fxl_fail(ctx, FXL_EINVAL, "plan field '%s' jaw sizes '%g x %g' must be > 0 and <= %g cm",
                            f->name, f->x_cm, f->y_cm, FXL_FIELD_JAW_CM_MAX);
        if (!isnan(f->shaped_eqsq_cm) && f->shaped_eqsq_cm != 0 &&
            !in_range(f->shaped_eqsq_cm, 0, 0, FXL_FIELD_JAW_CM_MAX, 1))
            return fxl_fail(ctx, FXL_EINVAL,
                            "plan field '%s' shaped field equivalent square '%g' must be > 0 and <= %g cm",
                            f->name, f->shaped_eqsq_cm, FXL_FIELD_JAW_CM_MAX);
        if (!in_range(f->wedge_deg, 0, 1, FXL_FIELD_WEDGE_DEG_MAX, 1))
            return fxl_fail(ctx, FXL_EINVAL, "plan field '%s' wedge_deg '%g' must be >= 0 and <= %g degrees",
                            f->name, f->wedge_deg, FXL_FIELD_WEDGE_DEG_MAX);
        if (f->tray != 0 && f->tray != 1)
            return fxl_fail(ctx, FXL_EINVAL, "plan field '%s' tray must be 0 or 1", f->name);
        if (!in_range(f->gantry_deg, 0, 1, 360, 0))
            return fxl_fail(ctx, FXL_EINVAL, "plan field '%s' gantry_deg '%g' must be >= 0 and < 360 degrees",
                            f->name, f->gantry_deg);
        if (!in_range(f->incidence_deg, 0, 1, FXL_FIELD_INCIDENCE_DEG_MAX, 1))
            return fxl_fail(ctx, FXL_EINVAL, "plan field '%s' incidence_deg '%g' must be >= 0 and <= %g degrees",
                            f->name, f->incidence_deg, FXL_FIELD_INCIDENCE_DEG_MAX);
        if (f->n_points < 1 || f->n_points > 2 ||
            (f->n_points == 2 && strcmp(f->points[0].point, f->points[1].point) == 0))
            return fxl_fail(ctx, FXL_EINVAL, "plan field '%s' needs one entrance and/or one exit point",
                            f->name);
        for (j = 0; j < f->n_points; j++) {
            const fxl_point_spec *p = &f->points[j];
            if (!one_of(p->point, "entrance", "exit", NULL, NULL))
                return fxl_fail(ctx, FXL_EINVAL, "plan field '%s' point '%s' must be entrance or exit",
                                f->name, p->point);
            if (!one_of(p->expected_source, "tps", "manual", "model", NULL))
                return fxl_fail(ctx, FXL_EINVAL,
                                "plan field '%s' %s point expected_source '%s' must be tps, manual or model",
                                f->name, p->point, p->expected_source);
            /* "model": the value is the model's, computed at import. */
            if (strcmp(p->expected_source, "model") == 0 && !isnan(p->expected_dose_cgy))
                return fxl_fail(ctx, FXL_EINVAL,
                                "plan field '%s' %s point: an expected dose from the model is computed at "
                                "import and cannot be given",
                                f->name, p->point);
            if (strcmp(p->expected_source, "model") != 0 &&
                !in_range(p->expected_dose_cgy, 0, 0, FXL_PLAN_DOSE_CGY_MAX, 1))
                return fxl_fail(ctx, FXL_EINVAL,
                                "plan field '%s' %s point expected_dose_cgy '%g' must be > 0 and <= %g cGy",
                                f->name, p->point, p->expected_dose_cgy, FXL_PLAN_DOSE_CGY_MAX);
            if (strcmp(p->point, "exit") == 0 && isnan(p->thickness_cm))
                return fxl_fail(ctx, FXL_EINVAL,
                                "plan field '%s' exit point needs thickness_cm (> 0 and <= %g cm)", f->name,
                                FXL_FIELD_THICKNESS_CM_MAX);
            if (!isnan(p->thickness_cm) && !in_range(p->thickness_cm, 0, 0, FXL_FIELD_THICKNESS_CM_MAX, 1))
                return fxl_fail(ctx, FXL_EINVAL,
                                "plan field '%s' %s point thickness_cm '%g' must be > 0 and <= %g cm",
                                f->name, p->point, p->thickness_cm, FXL_FIELD_THICKNESS_CM_MAX);
        }
    }
    return 0;
}

/* The beam of one field, with what the import checks against. */
typedef struct beam_ref {
    int64_t id;
    char modality[9];
    double energy;
    double dmax_cm;   /* NaN when the beam has none */
} beam_ref;

static int find_beam(fxl_ctx *ctx, beam_ref *out, const fxl_field_spec *f, size_t index)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT b.id, b.modality, b.energy, b.dmax_cm FROM beams b "
                               "JOIN machines m ON m.id = b.machine_id "
                               "WHERE m.name = :machine AND b.name = :beam")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":machine", f->machine);
    fxl_stmt_bind_text(&s, ":beam", f->beam);
    rc = fxl_stmt_step(&s);
    if (rc == 1) {
        out->id = fxl_stmt_int(&s, 0);
        copy(out->modality, sizeof out->modality, fxl_stmt_text(&s, 1));
        out->energy = fxl_stmt_double(&s, 2);
        out->dmax_cm = fxl_stmt_double_opt(&s, 3);
        rc = 0;
        goto cleanup;
    }
    if (rc < 0)
        goto cleanup;
    fxl_stmt_finalize(&s);
    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT 1 FROM machines WHERE name = :machine")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":machine", f->machine);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 0)
        rc = fxl_fail(ctx, FXL_ENOTFOUND,
                      "plan field '%s' machine '%s' is not known (at fields[%zu].machine; see "
                      "'fxledger machine list')",
                      f->name, f->machine, index);
    else
        rc = fxl_fail(ctx, FXL_ENOTFOUND,
                      "plan field '%s' beam '%s' is not a beam of machine '%s' (at fields[%zu].beam; "
                      "see 'fxledger machine list')",
                      f->name, f->beam, f->machine, index);
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* Physics checks that need the beam: no exit dosimetry with electrons (they
 * do not traverse the patient), and an exit point at d_max upstream of the
 * exit surface needs a patient thicker than d_max. */
static int check_against_beam(fxl_ctx *ctx, const fxl_field_spec *f, size_t index, const beam_ref *b)
{
    size_t j;

    for (j = 0; j < f->n_points; j++) {
        const fxl_point_spec *p = &f->points[j];
        if (strcmp(p->point, "exit") != 0)
            continue;
        if (strcmp(b->modality, "electron") == 0)
            return fxl_fail(ctx, FXL_EINVAL,
                            "plan field '%s' has an exit point on electron beam '%s': exit dose is "
                            "measured for photon beams only (at fields[%zu].points[%zu].point)",
                            f->name, f->beam, index, j);
        if (!isnan(b->dmax_cm) && p->thickness_cm <= b->dmax_cm)
            return fxl_fail(ctx, FXL_EINVAL,
                            "plan field '%s' exit point thickness_cm '%g' must be > the beam's d_max "
                            "%g cm and <= %g cm (at fields[%zu].points[%zu].thickness_cm)",
                            f->name, p->thickness_cm, b->dmax_cm, FXL_FIELD_THICKNESS_CM_MAX, index, j);
    }
    return 0;
}

/* Looks up a plan of a patient by label: 1 found (*id set), 0 not found. */
static int plan_id_by_label(fxl_ctx *ctx, int64_t *id, int64_t patient_id, const char *label)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    *id = 0;
    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT id FROM plans WHERE patient_id = :p AND label = :label")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":p", patient_id);
    fxl_stmt_bind_text(&s, ":label", label);
    rc = fxl_stmt_step(&s);
    if (rc == 1)
        *id = fxl_stmt_int(&s, 0);
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

static int lookup_patient(fxl_ctx *ctx, int64_t *id, const char *mrn)
{
    int rc = fxl_lookup_id(ctx, id, "SELECT id FROM patients WHERE mrn = :mrn", ":mrn", mrn);

    if (rc == 0)
        return fxl_fail(ctx, FXL_ENOTFOUND,
                        "unknown patient '%s' (at patient_mrn; add the patient first with 'fxledger "
                        "patient add %s --family NAME')",
                        mrn, mrn);
    return rc < 0 ? rc : 0;
}

static int check_replacement(fxl_ctx *ctx, int64_t *replaced_id, int64_t patient_id,
                             const fxl_plan_spec *spec)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    *replaced_id = 0;
    if (!spec->replaces[0])
        return 0;
    if ((rc = plan_id_by_label(ctx, replaced_id, patient_id, spec->replaces)) < 0)
        return rc;
    if (rc == 0)
        return fxl_fail(ctx, FXL_ENOTFOUND,
                        "plan '%s' to be replaced does not exist for patient '%s' (see 'fxledger plan "
                        "list %s')",
                        spec->replaces, spec->mrn, spec->mrn);
    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT label FROM plans WHERE replaces_plan_id = :id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":id", *replaced_id);
    rc = fxl_stmt_step(&s);
    if (rc == 1)
        rc = fxl_fail(ctx, FXL_ECONFLICT,
                      "plan '%s' of patient '%s' was already replaced by plan '%s'; replace '%s' instead",
                      spec->replaces, spec->mrn, fxl_stmt_text(&s, 0), fxl_stmt_text(&s, 0));
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* ---- the independent model at import -------------------------------------- */

/* What the import stores for one measured point besides the plan's values. */
typedef struct point_eval {
    fxl_model_result model;
    int64_t beam_data_id;         /* 0: none */
    fxl_crosscheck xcheck;
    double expected_cgy;          /* as stored; NaN = missing */
    const char *expected_source;  /* as stored; NULL = missing */
    char *factors;                /* model_factors JSON, malloc'ed */
} point_eval;

/* Evaluates the model for point p of field f (beam b) with the beam data in
 * force at `now`, cross-checks a planning-system value at level_pct, and
 * builds the JSON stored in fields.model_factors. */
static int evaluate_point(fxl_ctx *ctx, point_eval *ev, const fxl_field_spec *f, const fxl_point_spec *p,
                          int64_t beam_id, const char *modality, double level_pct, const char *now)
{
    fxl_model_input in;
    cJSON *o = NULL, *xc;
    char *text = NULL;
    int rc;

    memset(ev, 0, sizeof *ev);
    fxl_model_input_init(&in);
    in.point = strcmp(p->point, "exit") == 0 ? FXL_MODEL_EXIT : FXL_MODEL_ENTRANCE;
    in.setup = strcmp(f->setup, "isocentric") == 0 ? FXL_MODEL_SETUP_ISO : FXL_MODEL_SETUP_SSD;
    in.mu = f->mu;
    in.ssd_cm = f->ssd_cm;
    in.x_cm = f->x_cm;
    in.y_cm = f->y_cm;
    in.field_eqsq_cm = f->shaped_eqsq_cm > 0 ? f->shaped_eqsq_cm : NAN;
    in.wedge_deg = f->wedge_deg;
    in.tray = f->tray;
    in.thickness_cm = p->thickness_cm;
    if ((rc = fxl_model_eval_field(ctx, &ev->model, &ev->beam_data_id, beam_id, f->machine, f->beam,
                                   modality, &in, now)) != 0)
        return rc;

    /* A planning-system value and a hand-entered one are both checked
     * against the independent model: a hand calculation is as likely to
     * carry a transcription or MU error (docs/expected-dose.md). */
    if (strcmp(p->expected_source, "tps") == 0 || strcmp(p->expected_source, "manual") == 0) {
        if (fxl_model_crosscheck(&ev->xcheck, p->expected_dose_cgy, &ev->model, level_pct) != 0)
            return fxl_fail(ctx, FXL_EINVAL, "internal: cross-check level %g %%", level_pct);
        if (strcmp(p->expected_source, "manual") == 0 &&
            (ev->xcheck.outcome == FXL_XCHECK_AGREES || ev->xcheck.outcome == FXL_XCHECK_DISAGREES))
            snprintf(ev->xcheck.summary, sizeof ev->xcheck.summary,
                     "hand-entered expected dose %.1f cGy %s the model's %.1f cGy %s%+.2f %% "
                     "(level %.2f %%)",
                     p->expected_dose_cgy,
                     ev->xcheck.outcome == FXL_XCHECK_DISAGREES ? "differs from" : "agrees with",
                     ev->xcheck.model_cgy,
                     ev->xcheck.outcome == FXL_XCHECK_DISAGREES ? "by " : "", ev->xcheck.deviation_pct,
                     level_pct);
    } else {
        /* A model value is not checked against itself; "not checked" is
         * never agreement. */
        memset(&ev->xcheck, 0, sizeof ev->xcheck);
        ev->xcheck.outcome = FXL_XCHECK_NOT_CHECKED;
        ev->xcheck.tps_cgy = NAN;
        ev->xcheck.model_cgy = ev->model.computed ? ev->model.dose_cgy : NAN;
        ev->xcheck.deviation_pct = NAN;
        ev->xcheck.level_pct = level_pct;
        if (ev->model.computed)
            snprintf(ev->xcheck.summary, sizeof ev->xcheck.summary,
                     "not cross-checked: the expected dose is the model's own value");
        else
            snprintf(ev->xcheck.summary, sizeof ev->xcheck.summary,
                     "no expected dose: %.150s; results will be not evaluable",
                     ev->model.reasons.n ? ev->model.reasons.text[0] : "the model gave no value");
    }
    if (strcmp(p->expected_source, "model") == 0) {
        ev->expected_cgy = ev->model.computed ? ev->model.dose_cgy : NAN;
        ev->expected_source = ev->model.computed ? "model" : NULL;
        if (ev->model.computed && !(ev->expected_cgy > 0 && ev->expected_cgy <= FXL_PLAN_DOSE_CGY_MAX))
            return fxl_fail(ctx, FXL_EINVAL,
                            "plan field '%s' %s point: the model's expected dose %.1f cGy is outside > 0 "
                            "and <= %g cGy",
                            f->name, p->point, ev->expected_cgy, FXL_PLAN_DOSE_CGY_MAX);
    } else {
        ev->expected_cgy = p->expected_dose_cgy;
        ev->expected_source = p->expected_source;
    }

    if (fxl_model_result_json(&text, &ev->model) != 0 || !(o = cJSON_Parse(text))) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory storing the model result");
        goto cleanup;
    }
    fxl_json_put_id(o, "beam_data_id", ev->beam_data_id);
    xc = cJSON_AddObjectToObject(o, "crosscheck");
    cJSON_AddStringToObject(xc, "outcome", fxl_xcheck_name(ev->xcheck.outcome));
    fxl_json_put_number(xc, "tps_cgy", ev->xcheck.tps_cgy);
    fxl_json_put_number(xc, "model_cgy", ev->xcheck.model_cgy);
    fxl_json_put_number(xc, "deviation_pct", ev->xcheck.deviation_pct);
    fxl_json_put_number(xc, "level_pct", ev->xcheck.level_pct);
    cJSON_AddStringToObject(xc, "summary", ev->xcheck.summary);
    if (!(ev->factors = cJSON_PrintUnformatted(o)))
        rc = fxl_fail(ctx, FXL_EIO, "out of memory storing the model result");
    else
        rc = 0;
cleanup:
    cJSON_Delete(o);
    free(text);
    return rc;
}

static cJSON *field_audit(const fxl_field_spec *f, const fxl_point_spec *p, int64_t plan_id,
                          const point_eval *ev)
{
    cJSON *o = cJSON_CreateObject();

    cJSON_AddNumberToObject(o, "plan_id", (double)plan_id);
    cJSON_AddStringToObject(o, "name", f->name);
    cJSON_AddStringToObject(o, "machine", f->machine);
    cJSON_AddStringToObject(o, "beam", f->beam);
    cJSON_AddStringToObject(o, "point", p->point);
    cJSON_AddStringToObject(o, "setup", f->setup);
    cJSON_AddNumberToObject(o, "mu", f->mu);
    cJSON_AddNumberToObject(o, "ssd_cm", f->ssd_cm);
    cJSON_AddNumberToObject(o, "x_cm", f->x_cm);
    cJSON_AddNumberToObject(o, "y_cm", f->y_cm);
    cJSON_AddNumberToObject(o, "wedge_deg", f->wedge_deg);
    cJSON_AddBoolToObject(o, "tray", f->tray);
    cJSON_AddNumberToObject(o, "gantry_deg", f->gantry_deg);
    cJSON_AddNumberToObject(o, "incidence_deg", f->incidence_deg);
    fxl_json_put_number(o, "thickness_cm", p->thickness_cm);
    fxl_json_put_number(o, "expected_dose_cgy", ev->expected_cgy);
    if (ev->expected_source)
        cJSON_AddStringToObject(o, "expected_source", ev->expected_source);
    else
        cJSON_AddNullToObject(o, "expected_source");
    cJSON_AddStringToObject(o, "policy", f->policy);
    if (f->shaped_eqsq_cm > 0)
        cJSON_AddNumberToObject(o, "shaped_eqsq_cm", f->shaped_eqsq_cm);
    fxl_json_put_number(o, "model_dose_cgy", ev->model.computed ? ev->model.dose_cgy : NAN);
    fxl_json_put_id(o, "model_beam_data_id", ev->beam_data_id);
    cJSON_AddStringToObject(o, "crosscheck", fxl_xcheck_name(ev->xcheck.outcome));
    fxl_json_put_number(o, "crosscheck_deviation_pct", ev->xcheck.deviation_pct);
    return o;
}

/* Opens the review item of a disagreement, in the import transaction. */
static int open_crosscheck_item(fxl_ctx *ctx, int64_t patient_id, int64_t field_id, const char *label,
                                const fxl_field_spec *f, const fxl_point_spec *p, const point_eval *ev)
{
    fxl_review_open_spec item;
    char summary[512], key[48];

    snprintf(summary, sizeof summary,
             "plan '%s' field '%s' %s, at import: %s; check the plan transfer (MU, wedge, SSD, energy, "
             "field size) before the first fraction",
             label, f->name, p->point, ev->xcheck.summary);
    snprintf(key, sizeof key, "field:%lld", (long long)field_id);
    memset(&item, 0, sizeof item);
    item.rule = FXL_RULE_MODEL_CROSSCHECK;
    item.rule_key = key;
    item.severity = FXL_RULE_MODEL_CROSSCHECK_SEVERITY;
    item.patient_id = patient_id;
    item.field_id = field_id;
    item.summary = summary;
    return fxl_review_open_item(ctx, NULL, &item);
}

int fxl_plan_import(fxl_ctx *ctx, int64_t *out_id, const fxl_plan_spec *spec)
{
    fxl_stmt ins = FXL_STMT_INIT;
    beam_ref *beams = NULL;
    cJSON *audit = NULL;
    point_eval ev;
    char now[FXL_TIME_LEN];
    int64_t patient_id = 0, replaced_id = 0, existing = 0, plan_id = 0, field_id;
    double level_pct = FXL_MODEL_CROSSCHECK_PCT_DEFAULT;
    size_t i, j;
    int rc;

    memset(&ev, 0, sizeof ev);
    if ((rc = fxl_require_role(ctx, FXL_ROLES_PHYSICS, "importing a plan")) != 0)
        return rc;
    if ((rc = fxl_sign_require(ctx, "importing a plan")) != 0)
        return rc;
    if ((rc = check_spec(ctx, spec)) != 0)
        return rc;
    if ((rc = fxl_model_crosscheck_level(ctx, &level_pct)) != 0)
        return rc;
    if (!(beams = calloc(spec->n_fields, sizeof *beams)))
        return fxl_fail(ctx, FXL_EIO, "out of memory importing a plan");
    fxl_now(ctx, now);
    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    if ((rc = lookup_patient(ctx, &patient_id, spec->mrn)) != 0)
        goto cleanup;
    if ((rc = plan_id_by_label(ctx, &existing, patient_id, spec->label)) < 0)
        goto cleanup;
    if (rc == 1) {
        rc = fxl_fail(ctx, FXL_ECONFLICT,
                      "plan '%s' already exists for patient '%s'; plans are never changed: import the "
                      "change under a new label with --replaces %s",
                      spec->label, spec->mrn, spec->label);
        goto cleanup;
    }
    if ((rc = check_replacement(ctx, &replaced_id, patient_id, spec)) != 0)
        goto cleanup;
    for (i = 0; i < spec->n_fields; i++)
        if ((rc = find_beam(ctx, &beams[i], &spec->fields[i], i)) != 0 ||
            (rc = check_against_beam(ctx, &spec->fields[i], i, &beams[i])) != 0)
            goto cleanup;

    if ((rc = fxl_stmt_prepare(&ins, ctx,
                               "INSERT INTO plans (patient_id, label, site, technique, fractions, "
                               "dose_per_fraction_cgy, replaces_plan_id, source, user_id, created_at) "
                               "VALUES (:patient, :label, :site, :technique, :fractions, :dose, "
                               ":replaces, :origin, :user, :now)")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&ins, ":patient", patient_id);
    fxl_stmt_bind_text(&ins, ":label", spec->label);
    fxl_stmt_bind_text(&ins, ":site", spec->site);
    fxl_stmt_bind_text(&ins, ":technique", spec->technique);
    fxl_stmt_bind_int(&ins, ":fractions", spec->fractions);
    fxl_stmt_bind_double_opt(&ins, ":dose", spec->dose_per_fraction_cgy);
    if (replaced_id)
        fxl_stmt_bind_int(&ins, ":replaces", replaced_id);
    else
        fxl_stmt_bind_null(&ins, ":replaces");
    fxl_stmt_bind_text(&ins, ":origin", spec->origin[0] ? spec->origin : "json");
    fxl_stmt_bind_int(&ins, ":user", fxl_user_id(ctx));
    fxl_stmt_bind_text(&ins, ":now", now);
    if ((rc = fxl_stmt_exec(&ins)) != 0)
        goto cleanup;
    plan_id = sqlite3_last_insert_rowid(ctx->db);
    fxl_stmt_finalize(&ins);

    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "patient_mrn", spec->mrn);
    cJSON_AddStringToObject(audit, "label", spec->label);
    cJSON_AddStringToObject(audit, "site", spec->site);
    cJSON_AddStringToObject(audit, "technique", spec->technique);
    cJSON_AddNumberToObject(audit, "fractions", spec->fractions);
    fxl_json_put_number(audit, "dose_per_fraction_cgy", spec->dose_per_fraction_cgy);
    if (replaced_id) {
        cJSON_AddStringToObject(audit, "replaces", spec->replaces);
        cJSON_AddNumberToObject(audit, "replaces_plan_id", (double)replaced_id);
    }
    for (i = 0, j = 0; i < spec->n_fields; i++)
        j += spec->fields[i].n_points;
    cJSON_AddNumberToObject(audit, "field_rows", (double)j);
    cJSON_AddStringToObject(audit, "source", spec->origin[0] ? spec->origin : "json");
    if (spec->origin_note[0])
        cJSON_AddStringToObject(audit, "source_note", spec->origin_note);
    cJSON_AddNumberToObject(audit, "model_crosscheck_pct", level_pct);
    if ((rc = fxl_audit_append(ctx, replaced_id ? "replace" : "import", "plans", plan_id, audit)) != 0)
        goto cleanup;

    if ((rc = fxl_stmt_prepare(&ins, ctx,
                               "INSERT INTO fields (plan_id, name, beam_id, point, setup, mu, ssd_cm, x_cm, "
                               "y_cm, wedge_deg, tray, gantry_deg, incidence_deg, thickness_cm, "
                               "expected_dose_cgy, expected_source, policy, model_dose_cgy, model_factors, "
                               "model_beam_data_id) VALUES (:plan, :name, :beam, "
                               ":point, :setup, :mu, :ssd, :x, :y, :wedge, :tray, :gantry, :incidence, "
                               ":thickness, :expected, :source, :policy, :model, :factors, :bdata)")) != 0)
        goto cleanup;
    for (i = 0; i < spec->n_fields; i++) {
        const fxl_field_spec *f = &spec->fields[i];
        for (j = 0; j < f->n_points; j++) {
            const fxl_point_spec *p = &f->points[j];
            cJSON *row;
            free(ev.factors);
            ev.factors = NULL;
            if ((rc = evaluate_point(ctx, &ev, f, p, beams[i].id, beams[i].modality, level_pct, now)) != 0)
                goto cleanup;
            fxl_stmt_reset(&ins);
            fxl_stmt_bind_int(&ins, ":plan", plan_id);
            fxl_stmt_bind_text(&ins, ":name", f->name);
            fxl_stmt_bind_int(&ins, ":beam", beams[i].id);
            fxl_stmt_bind_text(&ins, ":point", p->point);
            fxl_stmt_bind_text(&ins, ":setup", f->setup);
            fxl_stmt_bind_double(&ins, ":mu", f->mu);
            fxl_stmt_bind_double(&ins, ":ssd", f->ssd_cm);
            fxl_stmt_bind_double(&ins, ":x", f->x_cm);
            fxl_stmt_bind_double(&ins, ":y", f->y_cm);
            fxl_stmt_bind_double(&ins, ":wedge", f->wedge_deg);
            fxl_stmt_bind_int(&ins, ":tray", f->tray);
            fxl_stmt_bind_double(&ins, ":gantry", f->gantry_deg);
            fxl_stmt_bind_double(&ins, ":incidence", f->incidence_deg);
            fxl_stmt_bind_double_opt(&ins, ":thickness", p->thickness_cm);
            fxl_stmt_bind_double_opt(&ins, ":expected", ev.expected_cgy);
            fxl_stmt_bind_text(&ins, ":source", ev.expected_source);
            fxl_stmt_bind_text(&ins, ":policy", f->policy);
            fxl_stmt_bind_double_opt(&ins, ":model", ev.model.computed ? ev.model.dose_cgy : NAN);
            fxl_stmt_bind_text(&ins, ":factors", ev.factors);
            if (ev.beam_data_id)
                fxl_stmt_bind_int(&ins, ":bdata", ev.beam_data_id);
            else
                fxl_stmt_bind_null(&ins, ":bdata");
            if ((rc = fxl_stmt_exec(&ins)) != 0)
                goto cleanup;
            field_id = sqlite3_last_insert_rowid(ctx->db);
            row = field_audit(f, p, plan_id, &ev);
            rc = fxl_audit_append(ctx, "create", "fields", field_id, row);
            cJSON_Delete(row);
            if (rc != 0)
                goto cleanup;
            if (ev.xcheck.outcome == FXL_XCHECK_DISAGREES &&
                (rc = open_crosscheck_item(ctx, patient_id, field_id, spec->label, f, p, &ev)) != 0)
                goto cleanup;
        }
    }
    if ((rc = fxl_signature_add(ctx, "plans", plan_id, replaced_id ? "plan replaced" : "plan imported")) != 0)
        goto cleanup;
    if ((rc = fxl_commit(ctx)) != 0)
        goto cleanup;
    if (out_id)
        *out_id = plan_id;
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    fxl_stmt_finalize(&ins);
    cJSON_Delete(audit);
    free(ev.factors);
    free(beams);
    return rc;
}

/* ---- reading back ---------------------------------------------------------- */

#define PLAN_COLUMNS                                                                             \
    "p.id, p.patient_id, pt.mrn, p.label, p.site, p.technique, p.fractions, "                    \
    "p.dose_per_fraction_cgy, coalesce(p.replaces_plan_id, 0), coalesce(rp.label, ''), "          \
    "coalesce(nx.id, 0), coalesce(nx.label, ''), p.source, coalesce(u.login, ''), p.created_at, " \
    "(SELECT count(*) FROM fractions WHERE plan_id = p.id), "                                     \
    "(SELECT count(*) FROM fields WHERE plan_id = p.id) "                                         \
    "FROM plans p JOIN patients pt ON pt.id = p.patient_id "                                      \
    "LEFT JOIN plans rp ON rp.id = p.replaces_plan_id "                                           \
    "LEFT JOIN plans nx ON nx.id = (SELECT min(id) FROM plans WHERE replaces_plan_id = p.id) "    \
    "LEFT JOIN users u ON u.id = p.user_id "

static void read_plan(fxl_stmt *s, fxl_plan *p)
{
    memset(p, 0, sizeof *p);
    p->id = fxl_stmt_int(s, 0);
    p->patient_id = fxl_stmt_int(s, 1);
    copy(p->mrn, sizeof p->mrn, fxl_stmt_text(s, 2));
    copy(p->label, sizeof p->label, fxl_stmt_text(s, 3));
    copy(p->site, sizeof p->site, fxl_stmt_text(s, 4));
    copy(p->technique, sizeof p->technique, fxl_stmt_text(s, 5));
    p->fractions = (int)fxl_stmt_int(s, 6);
    p->dose_per_fraction_cgy = fxl_stmt_double_opt(s, 7);
    p->replaces_plan_id = fxl_stmt_int(s, 8);
    copy(p->replaces_label, sizeof p->replaces_label, fxl_stmt_text(s, 9));
    p->replaced_by_id = fxl_stmt_int(s, 10);
    copy(p->replaced_by_label, sizeof p->replaced_by_label, fxl_stmt_text(s, 11));
    copy(p->source, sizeof p->source, fxl_stmt_text(s, 12));
    copy(p->created_by, sizeof p->created_by, fxl_stmt_text(s, 13));
    copy(p->created_at, sizeof p->created_at, fxl_stmt_text(s, 14));
    p->fractions_logged = (int)fxl_stmt_int(s, 15);
    p->n_fields = (size_t)fxl_stmt_int(s, 16);
}

static double json_num(const cJSON *o, const char *key)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, key);
    return cJSON_IsNumber(v) ? v->valuedouble : NAN;
}

/* The cross-check as stored with the field (model_factors.crosscheck). */
static void read_crosscheck(fxl_field *f)
{
    cJSON *o, *xc, *v;

    f->crosscheck[0] = '\0';
    f->model_note[0] = '\0';
    f->crosscheck_dev_pct = f->crosscheck_level_pct = NAN;
    if (!f->model_factors[0] || !(o = cJSON_Parse(f->model_factors)))
        return;
    xc = cJSON_GetObjectItemCaseSensitive(o, "crosscheck");
    if (cJSON_IsObject(xc)) {
        v = cJSON_GetObjectItemCaseSensitive(xc, "outcome");
        if (cJSON_IsString(v))
            copy(f->crosscheck, sizeof f->crosscheck, v->valuestring);
        v = cJSON_GetObjectItemCaseSensitive(xc, "summary");
        if (cJSON_IsString(v))
            copy(f->model_note, sizeof f->model_note, v->valuestring);
        f->crosscheck_dev_pct = json_num(xc, "deviation_pct");
        f->crosscheck_level_pct = json_num(xc, "level_pct");
    }
    cJSON_Delete(o);
}

static int load_fields(fxl_ctx *ctx, fxl_plan *plan)
{
    fxl_stmt s = FXL_STMT_INIT;
    size_t i = 0;
    int rc;

    plan->fields = NULL;
    if (plan->n_fields == 0)
        return 0;
    if (!(plan->fields = calloc(plan->n_fields, sizeof *plan->fields)))
        return fxl_fail(ctx, FXL_EIO, "out of memory reading plan fields");
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT f.id, f.name, f.beam_id, m.name, b.name, b.modality, b.energy, "
                               "f.point, f.setup, f.mu, f.ssd_cm, f.x_cm, f.y_cm, f.wedge_deg, f.tray, "
                               "f.gantry_deg, f.incidence_deg, f.thickness_cm, f.expected_dose_cgy, "
                               "coalesce(f.expected_source, ''), f.policy, f.model_dose_cgy, "
                               "coalesce(f.model_beam_data_id, 0), coalesce(f.model_factors, ''), "
                               "coalesce((SELECT max(r.id) FROM review_items r WHERE r.field_id = f.id "
                               "          AND r.rule = :rule), 0) FROM fields f "
                               "JOIN beams b ON b.id = f.beam_id JOIN machines m ON m.id = b.machine_id "
                               "WHERE f.plan_id = :plan ORDER BY f.id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":plan", plan->id);
    fxl_stmt_bind_text(&s, ":rule", FXL_RULE_MODEL_CROSSCHECK);
    while (i < plan->n_fields && (rc = fxl_stmt_step(&s)) == 1) {
        fxl_field *f = &plan->fields[i++];
        f->id = fxl_stmt_int(&s, 0);
        copy(f->name, sizeof f->name, fxl_stmt_text(&s, 1));
        f->beam_id = fxl_stmt_int(&s, 2);
        copy(f->machine, sizeof f->machine, fxl_stmt_text(&s, 3));
        copy(f->beam, sizeof f->beam, fxl_stmt_text(&s, 4));
        copy(f->modality, sizeof f->modality, fxl_stmt_text(&s, 5));
        f->energy = fxl_stmt_double(&s, 6);
        copy(f->point, sizeof f->point, fxl_stmt_text(&s, 7));
        copy(f->setup, sizeof f->setup, fxl_stmt_text(&s, 8));
        f->mu = fxl_stmt_double(&s, 9);
        f->ssd_cm = fxl_stmt_double(&s, 10);
        f->x_cm = fxl_stmt_double(&s, 11);
        f->y_cm = fxl_stmt_double(&s, 12);
        f->wedge_deg = fxl_stmt_double(&s, 13);
        f->tray = (int)fxl_stmt_int(&s, 14);
        f->gantry_deg = fxl_stmt_double(&s, 15);
        f->incidence_deg = fxl_stmt_double(&s, 16);
        f->thickness_cm = fxl_stmt_double_opt(&s, 17);
        f->expected_dose_cgy = fxl_stmt_double_opt(&s, 18);
        copy(f->expected_source, sizeof f->expected_source, fxl_stmt_text(&s, 19));
        copy(f->policy, sizeof f->policy, fxl_stmt_text(&s, 20));
        f->model_dose_cgy = fxl_stmt_double_opt(&s, 21);
        f->model_beam_data_id = fxl_stmt_int(&s, 22);
        copy(f->model_factors, sizeof f->model_factors, fxl_stmt_text(&s, 23));
        f->crosscheck_item_id = fxl_stmt_int(&s, 24);
        read_crosscheck(f);
    }
    plan->n_fields = i;
    rc = rc < 0 ? rc : 0;
cleanup:
    fxl_stmt_finalize(&s);
    if (rc != 0) {
        free(plan->fields);
        plan->fields = NULL;
        plan->n_fields = 0;
    }
    return rc;
}

int fxl_plan_get(fxl_ctx *ctx, fxl_plan *out, const char *mrn, const char *label)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    memset(out, 0, sizeof *out);
    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT " PLAN_COLUMNS "WHERE pt.mrn = :mrn AND p.label = :label")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":mrn", mrn);
    fxl_stmt_bind_text(&s, ":label", label);
    rc = fxl_stmt_step(&s);
    if (rc == 1) {
        read_plan(&s, out);
        rc = 0;
    } else if (rc == 0) {
        fxl_stmt_finalize(&s);
        if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT 1 FROM patients WHERE mrn = :mrn")) != 0)
            goto cleanup;
        fxl_stmt_bind_text(&s, ":mrn", mrn);
        rc = fxl_stmt_step(&s);
        if (rc == 0)
            rc = fxl_fail(ctx, FXL_ENOTFOUND, "unknown patient '%s' (see 'fxledger patient list')", mrn);
        else if (rc == 1)
            rc = fxl_fail(ctx, FXL_ENOTFOUND, "patient '%s' has no plan '%s' (see 'fxledger plan list %s')",
                          mrn, label, mrn);
        goto cleanup;
    }
    if (rc == 0)
        rc = load_fields(ctx, out);
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

void fxl_plan_release(fxl_plan *plan)
{
    if (!plan)
        return;
    free(plan->fields);
    plan->fields = NULL;
    plan->n_fields = 0;
}

int fxl_plan_list(fxl_ctx *ctx, fxl_plan **out, size_t *n, const char *mrn)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_plan *list = NULL;
    size_t cap = 0, count = 0;
    int rc;

    *out = NULL;
    *n = 0;
    if (mrn) {
        if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT 1 FROM patients WHERE mrn = :mrn")) != 0)
            goto cleanup;
        fxl_stmt_bind_text(&s, ":mrn", mrn);
        if ((rc = fxl_stmt_step(&s)) == 0)
            rc = fxl_fail(ctx, FXL_ENOTFOUND, "unknown patient '%s' (see 'fxledger patient list')", mrn);
        if (rc < 0)
            goto cleanup;
        fxl_stmt_finalize(&s);
    }
    rc = fxl_stmt_prepare(&s, ctx, mrn ? "SELECT " PLAN_COLUMNS "WHERE pt.mrn = :mrn ORDER BY p.id"
                                       : "SELECT " PLAN_COLUMNS "ORDER BY pt.mrn, p.id");
    if (rc != 0)
        goto cleanup;
    if (mrn)
        fxl_stmt_bind_text(&s, ":mrn", mrn);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list, "listing plans")) != 0)
            goto cleanup;
        read_plan(&s, &list[count++]);
    }
cleanup:
    fxl_stmt_finalize(&s);
    if (rc < 0) {
        free(list);
        return rc;
    }
    *out = list;
    *n = count;
    return 0;
}

int fxl_plan_count_matching(fxl_ctx *ctx, int *out_n, const char *site, const char *technique)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    *out_n = 0;
    /* SQLite's lower() folds ASCII only, the same folding as scope matching. */
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT count(*) FROM plans WHERE (:site IS NULL OR lower(site) = lower(:site)) "
                               "AND (:technique IS NULL OR lower(technique) = lower(:technique))")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":site", site && *site ? site : NULL);
    fxl_stmt_bind_text(&s, ":technique", technique && *technique ? technique : NULL);
    rc = fxl_stmt_step(&s);
    if (rc == 1) {
        *out_n = (int)fxl_stmt_int(&s, 0);
        rc = 0;
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}
