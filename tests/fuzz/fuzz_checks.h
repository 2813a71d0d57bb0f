/* One input through one parser of outside input, with the parser's contract
 * checked on the way out. Shared by the libFuzzer harnesses (tests/fuzz/
 * fuzz_<parser>.c) and the replay of saved inputs in
 * tests/unit/test_fuzz_regressions.c, so that a saved crash is replayed
 * through exactly the code that found it.
 *
 * Each fuzz_check_<parser>() returns NULL when the parser kept its contract
 * (whatever it answered), or a short text naming the broken promise. Memory
 * errors, leaks and undefined behaviour are left to the sanitizers. */
#ifndef FXL_FUZZ_CHECKS_H
#define FXL_FUZZ_CHECKS_H

#include <math.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/beam_json.h"
#include "fxl/beam_model.h"
#include "fxl/corrections.h"
#include "fxl/dicom_part10.h"
#include "fxl/dicom_plan.h"
#include "fxl/fxl.h"
#include "fxl/plan_json.h"
#include "fxl/plans.h"
#include "fxl/readings_json.h"
#include "fxl/record.h"

#define FUZZ_UNUSED __attribute__((unused))

/* The parsers' names: the directory names under tests/fuzz/corpus/ and
 * tests/fuzz/regressions/. */
#define FUZZ_PLAN "plan_json"
#define FUZZ_READINGS "readings_json"
#define FUZZ_CORRECTIONS "corrections_json"
#define FUZZ_BEAM "beam_json"
#define FUZZ_DICOM "dicom_json"
#define FUZZ_DICOM_PART10 "dicom_part10"

/* A context for the parsers' messages: an in-memory database opened once
 * per process (the parsers themselves touch no database). NULL if it could
 * not be opened; the parsers accept a NULL context too. */
static FUZZ_UNUSED fxl_ctx *fuzz_ctx(void)
{
    static fxl_ctx *ctx;
    static int tried;

    if (!tried) {
        tried = 1;
        if (fxl_open(&ctx, ":memory:", FXL_OPEN_CREATE) != 0) {
            fxl_close(ctx);
            ctx = NULL;
        }
    }
    return ctx;
}

/* A fixed-size text field of a parsed struct is NUL-terminated. */
#define FUZZ_TERMINATED(buf) (memchr((buf), '\0', sizeof(buf)) != NULL)

/* Every failure is one of the documented codes with a message. */
static FUZZ_UNUSED const char *fuzz_check_failure(fxl_ctx *ctx, int rc)
{
    const char *msg;

    if (rc != FXL_EINVAL && rc != FXL_EIO)
        return "parser returned a code other than 0, FXL_EINVAL or FXL_EIO";
    if (!ctx)
        return NULL;
    msg = fxl_errmsg(ctx);
    if (!msg || !msg[0])
        return "parser failed without a message";
    if (!memchr(msg, '\0', 512))
        return "message not terminated";
    return NULL;
}

/* The parsers read `len` bytes and must not read past them: the input is
 * copied into a buffer of exactly that size so that ASan catches a read of
 * a terminating NUL that is not there. */
static FUZZ_UNUSED char *fuzz_copy(const uint8_t *data, size_t size)
{
    char *copy = malloc(size ? size : 1);
    if (copy && size)
        memcpy(copy, data, size);
    return copy;
}

/* ---- plan JSON (fxl/plan_json.h) ------------------------------------------- */

static FUZZ_UNUSED const char *fuzz_check_plan_json(const uint8_t *data, size_t size)
{
    fxl_ctx *ctx = fuzz_ctx();
    fxl_plan_spec spec;
    const char *why = NULL;
    char *text = fuzz_copy(data, size);
    size_t i, j;
    int rc;

    if (!text)
        return NULL;
    memset(&spec, 0, sizeof spec);
    rc = fxl_plan_json_parse(ctx, &spec, text, size, "fuzz.json");
    if (rc != 0) {
        why = fuzz_check_failure(ctx, rc);
        goto cleanup;
    }
    if (!FUZZ_TERMINATED(spec.mrn) || !FUZZ_TERMINATED(spec.label) ||
        !FUZZ_TERMINATED(spec.site) || !FUZZ_TERMINATED(spec.technique) ||
        !FUZZ_TERMINATED(spec.replaces)) {
        why = "plan text not terminated";
        goto cleanup;
    }
    if (!spec.mrn[0] || !spec.label[0]) {
        why = "plan accepted without patient or label";
        goto cleanup;
    }
    if (spec.fractions < 1) {
        why = "plan accepted with fractions < 1";
        goto cleanup;
    }
    if (spec.n_fields < 1 || !spec.fields) {
        why = "plan accepted without fields";
        goto cleanup;
    }
    for (i = 0; i < spec.n_fields; i++) {
        const fxl_field_spec *f = &spec.fields[i];
        if (!FUZZ_TERMINATED(f->name) || !FUZZ_TERMINATED(f->machine) ||
            !FUZZ_TERMINATED(f->beam) || !FUZZ_TERMINATED(f->setup) ||
            !FUZZ_TERMINATED(f->policy)) {
            why = "field text not terminated";
            goto cleanup;
        }
        if (!isfinite(f->mu) || f->mu <= 0 || !isfinite(f->x_cm) || !isfinite(f->y_cm) ||
            !isfinite(f->wedge_deg) || !isfinite(f->gantry_deg) || f->gantry_deg < 0 ||
            f->gantry_deg >= 360 || !isfinite(f->incidence_deg)) {
            why = "field accepted with a number out of its range";
            goto cleanup;
        }
        if (f->n_points < 1 || f->n_points > 2) {
            why = "field accepted with other than 1 or 2 points";
            goto cleanup;
        }
        for (j = 0; j < f->n_points; j++) {
            const fxl_point_spec *pt = &f->points[j];
            if (!FUZZ_TERMINATED(pt->point) || !FUZZ_TERMINATED(pt->expected_source)) {
                why = "point text not terminated";
                goto cleanup;
            }
            if (strcmp(pt->point, "entrance") != 0 && strcmp(pt->point, "exit") != 0) {
                why = "point accepted that is neither entrance nor exit";
                goto cleanup;
            }
            if (!isfinite(pt->expected_dose_cgy) || pt->expected_dose_cgy <= 0 ||
                pt->expected_dose_cgy > FXL_PLAN_DOSE_CGY_MAX) {
                why = "expected dose accepted out of (0, max]";
                goto cleanup;
            }
        }
    }

cleanup:
    fxl_plan_spec_release(&spec);
    free(text);
    return why;
}

/* ---- readings JSON (fxl/readings_json.h) ------------------------------------- */

static FUZZ_UNUSED const char *fuzz_check_readings_json(const uint8_t *data, size_t size)
{
    fxl_ctx *ctx = fuzz_ctx();
    fxl_readings_file f = FXL_READINGS_FILE_INIT;
    fxl_record_request req;
    const char *why = NULL;
    char *text = fuzz_copy(data, size);
    size_t i;
    int rc;

    if (!text)
        return NULL;
    rc = fxl_readings_parse(ctx, &f, "fuzz.json", text, size);
    if (rc != 0) {
        why = fuzz_check_failure(ctx, rc);
        goto cleanup;
    }
    if (!FUZZ_TERMINATED(f.patient) || !FUZZ_TERMINATED(f.plan) ||
        !FUZZ_TERMINATED(f.treated_at)) {
        why = "readings text not terminated";
        goto cleanup;
    }
    if (f.n < 1 || f.n > FXL_RECORD_READINGS_MAX || !f.names || !f.entries) {
        why = "readings accepted with a count outside 1..FXL_RECORD_READINGS_MAX";
        goto cleanup;
    }
    if (f.fraction < 0) {
        why = "readings accepted with a negative fraction";
        goto cleanup;
    }
    fxl_readings_request(&req, &f);
    if (req.n_readings != f.n || req.readings != f.entries) {
        why = "request does not point at the file's readings";
        goto cleanup;
    }
    for (i = 0; i < f.n; i++) {
        const fxl_reading_entry *e = &f.entries[i];
        if (!FUZZ_TERMINATED(f.names[i].field) || !FUZZ_TERMINATED(f.names[i].point) ||
            !FUZZ_TERMINATED(f.names[i].detector)) {
            why = "reading names not terminated";
            goto cleanup;
        }
        /* Borrowed strings point into the file's own names. */
        if (!e->field || !e->detector || strlen(e->field) > 64 || strlen(e->detector) > 64 ||
            (e->point && strlen(e->point) > 15)) {
            why = "reading entry strings missing or too long";
            goto cleanup;
        }
    }

cleanup:
    fxl_readings_file_release(&f);
    free(text);
    return why;
}

/* ---- correction tables JSON (fxl/corrections.h) ------------------------------ */

static FUZZ_UNUSED const char *fuzz_check_corrections_json(const uint8_t *data, size_t size)
{
    fxl_ctx *ctx = fuzz_ctx();
    fxl_corr_file file = FXL_CORR_FILE_INIT;
    const char *why = NULL;
    char *text = fuzz_copy(data, size);
    size_t i, j;
    int rc;

    if (!text)
        return NULL;
    rc = fxl_corr_file_parse(ctx, &file, "fuzz.json", text, size);
    if (rc != 0) {
        why = fuzz_check_failure(ctx, rc);
        goto cleanup;
    }
    if (!FUZZ_TERMINATED(file.detector) || !file.detector[0]) {
        why = "detector missing or not terminated";
        goto cleanup;
    }
    if (file.n_tables < 1 || file.n_tables > FXL_CORR_TABLES_MAX || !file.tables) {
        why = "corrections accepted with a table count outside 1..FXL_CORR_TABLES_MAX";
        goto cleanup;
    }
    for (i = 0; i < file.n_tables; i++) {
        const fxl_corr_table_spec *t = &file.tables[i];
        double lo, hi;
        const char *unit;

        if (!FUZZ_TERMINATED(t->machine) || !FUZZ_TERMINATED(t->beam) ||
            !FUZZ_TERMINATED(t->parameter) || !FUZZ_TERMINATED(t->effective_from) ||
            !FUZZ_TERMINATED(t->source)) {
            why = "table text not terminated";
            goto cleanup;
        }
        if (fxl_corr_param_range(t->parameter, &lo, &hi, &unit) != 0) {
            why = "table accepted with an unknown parameter";
            goto cleanup;
        }
        if (t->n_points < 1 || t->n_points > FXL_CORR_POINTS_MAX || !t->points) {
            why = "table accepted with a point count outside 1..FXL_CORR_POINTS_MAX";
            goto cleanup;
        }
        for (j = 0; j < t->n_points; j++) {
            const fxl_corr_point *pt = &t->points[j];
            /* The header's promise: strictly increasing x inside the
             * parameter's range, factors inside (0.5, 2.0). */
            if (!isfinite(pt->x) || pt->x < lo || pt->x > hi) {
                why = "point accepted with x outside the parameter's range";
                goto cleanup;
            }
            if (!isfinite(pt->factor) || pt->factor <= FXL_CORR_FACTOR_MIN ||
                pt->factor >= FXL_CORR_FACTOR_MAX) {
                why = "point accepted with a factor outside (0.5, 2.0)";
                goto cleanup;
            }
            if (j > 0 && !(pt->x > t->points[j - 1].x)) {
                why = "table accepted with x not strictly increasing";
                goto cleanup;
            }
        }
    }

cleanup:
    fxl_corr_file_release(&file);
    free(text);
    return why;
}

/* ---- beam-data JSON (fxl/beam_json.h) ----------------------------------------- */

static FUZZ_UNUSED int fuzz_table_ok(const fxl_table1 *t)
{
    return t->n == 0 || fxl_table1_check(t) == 0;
}

static FUZZ_UNUSED const char *fuzz_check_beam_json(const uint8_t *data, size_t size)
{
    fxl_ctx *ctx = fuzz_ctx();
    fxl_beam_model m;
    fxl_model_input in;
    fxl_model_result res;
    const char *why = NULL;
    char *text = fuzz_copy(data, size);
    char *json = NULL;
    int rc, k;

    if (!text)
        return NULL;
    fxl_beam_model_init(&m);
    rc = fxl_beam_json_parse(ctx, &m, text, size, "fuzz.json");
    if (rc != 0) {
        why = fuzz_check_failure(ctx, rc);
        goto cleanup;
    }
    if (!FUZZ_TERMINATED(m.machine) || !FUZZ_TERMINATED(m.beam) ||
        !FUZZ_TERMINATED(m.modality) || !FUZZ_TERMINATED(m.source)) {
        why = "beam text not terminated";
        goto cleanup;
    }
    if (!isfinite(m.sad_cm) || m.sad_cm <= 0 || !isfinite(m.dmax_cm) || m.dmax_cm <= 0 ||
        !isfinite(m.ref_dose_cgy_per_mu) || m.ref_dose_cgy_per_mu <= 0 ||
        !isfinite(m.ref_distance_cm) || m.ref_distance_cm <= 0) {
        why = "beam accepted with a reference number not finite and > 0";
        goto cleanup;
    }
    if (!fuzz_table_ok(&m.sc) || !fuzz_table_ok(&m.sp) || !fuzz_table_ok(&m.scp) ||
        !fuzz_table_ok(&m.wedge)) {
        why = "beam accepted with an unusable output or wedge table";
        goto cleanup;
    }
    if (m.output_combined ? m.scp.n == 0 : (m.sc.n == 0 || m.sp.n == 0)) {
        why = "beam accepted without its output factors";
        goto cleanup;
    }
    if (m.depth_kind == FXL_DEPTH_TMR ? fxl_grid_check(&m.tmr) != 0
                                      : fxl_grid_check(&m.pdd) != 0) {
        why = "beam accepted with an unusable depth-dose table";
        goto cleanup;
    }

    /* The model over the accepted data: a few set-ups at and around the
     * tables' edges must give a result or a reason, never a NaN dose. */
    for (k = 0; k < 6; k++) {
        fxl_model_input_init(&in);
        in.point = (k & 1) ? FXL_MODEL_EXIT : FXL_MODEL_ENTRANCE;
        in.setup = (k & 2) ? FXL_MODEL_SETUP_ISO : FXL_MODEL_SETUP_SSD;
        in.mu = 100.0 + 50.0 * k;
        in.ssd_cm = (k & 2) ? NAN : 100.0 - 5.0 * k;
        in.iso_depth_cm = (k & 2) ? 10.0 : NAN;
        in.x_cm = 4.0 + 3.0 * k;
        in.y_cm = 5.0 + 4.0 * k;
        in.wedge_deg = m.wedge.n ? m.wedge.x[k % m.wedge.n] : 0.0;
        in.tray = k >= 4;
        in.thickness_cm = 20.0;
        rc = fxl_model_expected(&res, &m, &in);
        if (rc != 0) {
            why = "model refused valid arguments";
            goto cleanup;
        }
        if (res.computed && (!isfinite(res.dose_cgy) || res.dose_cgy < 0)) {
            why = "model computed a dose that is not finite and >= 0";
            goto cleanup;
        }
        if (!res.computed && res.reasons.n < 1) {
            why = "model gave no dose and no reason";
            goto cleanup;
        }
        if (fxl_model_result_json(&json, &res) == 0) {
            free(json);
            json = NULL;
        }
    }

cleanup:
    fxl_beam_model_release(&m);
    free(text);
    return why;
}

/* ---- DICOM RT Plan in the DICOM JSON Model (fxl/dicom_plan.h) ----------------- */

/* The promises of a parsed (or refused) RT Plan, from either reader. */
static FUZZ_UNUSED const char *fuzz_check_dicom_plan(fxl_ctx *ctx, int rc, const fxl_dicom_plan *p)
{
    const fxl_dicom_plan plan = *p;
    size_t i;

    if (rc != 0) {
        const char *why = fuzz_check_failure(ctx, rc);
        if (!why && (plan.n_beams != 0 || plan.beams))
            why = "refused plan still holds beams";
        return why;
    }
    if (!FUZZ_TERMINATED(plan.sop_instance_uid) || !FUZZ_TERMINATED(plan.patient_id) ||
        !FUZZ_TERMINATED(plan.patient_name) || !FUZZ_TERMINATED(plan.family_name) ||
        !FUZZ_TERMINATED(plan.given_name) || !FUZZ_TERMINATED(plan.label) ||
        !FUZZ_TERMINATED(plan.plan_name))
        return "plan text not terminated";
    if (!plan.patient_id[0] || !plan.label[0] || plan.fractions < 1)
        return "plan accepted without patient, label or fractions";
    if (plan.n_beams < 1 || plan.n_beams > FXL_DICOM_BEAMS_MAX || !plan.beams)
        return "plan accepted with a beam count outside 1..FXL_DICOM_BEAMS_MAX";
    if (plan.notes.n < 0 || plan.notes.n > FXL_REASONS_MAX)
        return "notes count out of range";
    for (i = 0; i < plan.n_beams; i++) {
        const fxl_dicom_beam *b = &plan.beams[i];
        if (!FUZZ_TERMINATED(b->name) || !FUZZ_TERMINATED(b->machine) ||
            !FUZZ_TERMINATED(b->radiation) || !FUZZ_TERMINATED(b->modality) ||
            !FUZZ_TERMINATED(b->delivery) || !FUZZ_TERMINATED(b->wedge_id) ||
            !FUZZ_TERMINATED(b->wedge_type) || !FUZZ_TERMINATED(b->tray_id) ||
            !FUZZ_TERMINATED(b->applicator_id))
            return "beam text not terminated";
        if (strcmp(b->modality, "photon") != 0 && strcmp(b->modality, "electron") != 0)
            return "beam accepted with a modality other than photon or electron";
        if (!isfinite(b->gantry_deg) || b->gantry_deg < 0 || b->gantry_deg >= 360)
            return "beam accepted with a gantry angle outside [0, 360)";
        if (b->wedge_count < 0 || b->wedge_count > 1)
            return "beam accepted with more than one wedge";
        if (!isfinite(b->energy) || b->energy <= 0 || !isfinite(b->mu) || b->mu <= 0 ||
            !isfinite(b->ssd_cm) || b->ssd_cm <= 0)
            return "beam accepted with energy, meterset or SSD not finite and > 0";
        if (!isfinite(b->jaw_x_cm) || !isfinite(b->jaw_y_cm) || !isfinite(b->field_x_cm) ||
            !isfinite(b->field_y_cm) || !isfinite(b->coll_eqsq_cm) ||
            !isfinite(b->field_eqsq_cm))
            return "beam accepted with a collimator size that is not finite";
    }
    return NULL;
}

static FUZZ_UNUSED const char *fuzz_check_dicom_json(const uint8_t *data, size_t size)
{
    fxl_ctx *ctx = fuzz_ctx();
    fxl_dicom_plan plan;
    const char *why;
    char *text = fuzz_copy(data, size);
    int rc;

    if (!text)
        return NULL;
    memset(&plan, 0, sizeof plan);
    rc = fxl_dicom_plan_parse(ctx, &plan, text, size, "fuzz.json");
    why = fuzz_check_dicom_plan(ctx, rc, &plan);
    fxl_dicom_plan_release(&plan);
    free(text);
    return why;
}

/* ---- DICOM RT Plan as a Part 10 file (fxl/dicom_part10.h) ------------------- */

/* The Part 10 reader: DCMTK reads the bytes, the JSON Model reader judges
 * the data set. Whatever the bytes, the result keeps the same promises as
 * the JSON reader's, and every refusal has its message. */
static FUZZ_UNUSED const char *fuzz_check_dicom_part10(const uint8_t *data, size_t size)
{
    fxl_ctx *ctx = fuzz_ctx();
    fxl_dicom_plan plan;
    const char *why;
    char *bytes = fuzz_copy(data, size);
    int rc;

    if (!bytes)
        return NULL;
    memset(&plan, 0, sizeof plan);
    rc = fxl_dicom_plan_parse_part10(ctx, &plan, (const unsigned char *)bytes, size, "fuzz.dcm");
    why = fuzz_check_dicom_plan(ctx, rc, &plan);
    if (!why && rc == 0 && !fxl_dicom_part10_detect((const unsigned char *)bytes, size))
        why = "a file without the Part 10 preamble and 'DICM' was accepted";
    fxl_dicom_plan_release(&plan);
    free(bytes);
    return why;
}

#endif
