/* Loading what one reading is judged by, as in force at the treatment time:
 * plan and field, beam, detector and its status, calibration, correction
 * tables, threshold set, settings and the prior result of the field; then
 * the core computation on those inputs. docs/record.md. */
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/number.h"
#include "fxl/thresholds.h"
#include "store/grow.h"
#include "store/lookup_sql.h"
#include "store/record_int.h"
#include "store/stmt.h"

static void copy(char *dst, size_t size, const char *src)
{
    snprintf(dst, size, "%s", src ? src : "");
}

void rec_inputs_release(rec_inputs *in)
{
    int i;

    for (i = 0; i < FXL_CF_COUNT; i++) {
        free(in->tables[i].x);
        free(in->tables[i].factor);
        in->tables[i].x = in->tables[i].factor = NULL;
        in->tables[i].n = 0;
    }
}

/* ---- plan, field, detector ------------------------------------------------ */

const char fxl_sql_patient_by_mrn[] =
    "SELECT id, mrn, family_name, given_name FROM patients WHERE mrn = :mrn";
const char fxl_sql_detector_by_serial[] = "SELECT id, reading_unit FROM detectors WHERE serial = :serial";

int rec_load_plan(fxl_ctx *ctx, rec_plan *out, const char *mrn, const char *label)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    memset(out, 0, sizeof *out);
    if (!mrn || !*mrn)
        return fxl_fail(ctx, FXL_EINVAL, "a patient is required (--patient MRN)");
    if ((rc = fxl_stmt_prepare_cached(&s, ctx, fxl_sql_patient_by_mrn)) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":mrn", mrn);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 0) {
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "unknown patient '%s' (see 'fxledger patient list')", mrn);
        goto cleanup;
    }
    out->patient_id = fxl_stmt_int(&s, 0);
    copy(out->mrn, sizeof out->mrn, fxl_stmt_text(&s, 1));
    if (*fxl_stmt_text(&s, 3))
        snprintf(out->patient_name, sizeof out->patient_name, "%s, %s", fxl_stmt_text(&s, 2),
                 fxl_stmt_text(&s, 3));
    else
        copy(out->patient_name, sizeof out->patient_name, fxl_stmt_text(&s, 2));
    fxl_stmt_finalize(&s);

    if (label) {
        rc = fxl_stmt_prepare_cached(&s, ctx,
                              "SELECT id, label, site, technique, fractions FROM plans "
                              "WHERE patient_id = :pid AND label = :label");
        if (rc == 0)
            fxl_stmt_bind_text(&s, ":label", label);
    } else {
        /* The latest plan that no other plan replaces. */
        rc = fxl_stmt_prepare_cached(&s, ctx,
                              "SELECT p.id, p.label, p.site, p.technique, p.fractions FROM plans p "
                              "WHERE p.patient_id = :pid AND NOT EXISTS "
                              "(SELECT 1 FROM plans r WHERE r.replaces_plan_id = p.id) "
                              "ORDER BY p.created_at DESC, p.id DESC LIMIT 1");
    }
    if (rc != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":pid", out->patient_id);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 0) {
        if (label)
            rc = fxl_fail(ctx, FXL_ENOTFOUND,
                          "unknown plan '%s' for patient '%s' (see 'fxledger plan list')", label, mrn);
        else
            rc = fxl_fail(ctx, FXL_ENOTFOUND,
                          "patient '%s' has no plan (import one with 'fxledger plan import')", mrn);
        goto cleanup;
    }
    out->plan_id = fxl_stmt_int(&s, 0);
    copy(out->label, sizeof out->label, fxl_stmt_text(&s, 1));
    copy(out->site, sizeof out->site, fxl_stmt_text(&s, 2));
    copy(out->technique, sizeof out->technique, fxl_stmt_text(&s, 3));
    out->fractions = (int)fxl_stmt_int(&s, 4);
    fxl_stmt_finalize(&s);

    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
                               "SELECT coalesce(max(number), 0) FROM fractions WHERE plan_id = :plan")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":plan", out->plan_id);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    out->highest_logged = (int)fxl_stmt_int(&s, 0);
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* "AP, PA (entrance and exit), LAT": the plan's fields for messages. */
static void field_names(fxl_ctx *ctx, char *buf, size_t size, int64_t plan_id)
{
    fxl_stmt s = FXL_STMT_INIT;
    size_t used = 0;

    buf[0] = '\0';
    if (fxl_stmt_prepare_cached(&s, ctx,
                         "SELECT name || CASE WHEN count(*) > 1 THEN ' (entrance and exit)' "
                         "ELSE ':' || min(point) END FROM fields WHERE plan_id = :plan "
                         "GROUP BY name ORDER BY min(id)") != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":plan", plan_id);
    while (fxl_stmt_step(&s) == 1 && used + 8 < size) {
        int w = snprintf(buf + used, size - used, "%s%s", used ? ", " : "", fxl_stmt_text(&s, 0));
        if (w < 0 || (size_t)w >= size - used) {
            snprintf(buf + used, size - used, ", ...");
            break;
        }
        used += (size_t)w;
    }
cleanup:
    fxl_stmt_finalize(&s);
}

int rec_find_field(fxl_ctx *ctx, int64_t *field_id, char point_out[16], const rec_plan *plan,
                   const char *name, const char *point)
{
    fxl_stmt s = FXL_STMT_INIT;
    char names[300];
    int rc, count = 0;

    *field_id = 0;
    if (!name || !*name)
        return fxl_fail(ctx, FXL_EINVAL, "a field name is required for every reading");
    if (point && strcmp(point, "entrance") != 0 && strcmp(point, "exit") != 0)
        return fxl_fail(ctx, FXL_EINVAL,
                        "measured point '%s' for field '%s' must be 'entrance' or 'exit'", point, name);
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
                               "SELECT id, point FROM fields WHERE plan_id = :plan AND name = :name "
                               "ORDER BY point")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":plan", plan->plan_id);
    fxl_stmt_bind_text(&s, ":name", name);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        if (point && strcmp(point, fxl_stmt_text(&s, 1)) != 0)
            continue;
        count++;
        *field_id = fxl_stmt_int(&s, 0);
        copy(point_out, 16, fxl_stmt_text(&s, 1));
    }
    if (rc < 0)
        goto cleanup;
    if (count == 0) {
        field_names(ctx, names, sizeof names, plan->plan_id);
        if (point)
            rc = fxl_fail(ctx, FXL_ENOTFOUND,
                          "unknown field '%s:%s' in plan '%s' (fields: %s)", name, point, plan->label,
                          names);
        else
            rc = fxl_fail(ctx, FXL_ENOTFOUND, "unknown field '%s' in plan '%s' (fields: %s)", name,
                          plan->label, names);
        *field_id = 0;
        goto cleanup;
    }
    if (count > 1) {
        rc = fxl_fail(ctx, FXL_EINVAL,
                      "field '%s' is measured at entrance and at exit: give '%s:entrance' or "
                      "'%s:exit'",
                      name, name, name);
        *field_id = 0;
        goto cleanup;
    }
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int rec_find_detector(fxl_ctx *ctx, int64_t *id, char unit[8], const char *serial)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    *id = 0;
    if (!serial || !*serial)
        return fxl_fail(ctx, FXL_EINVAL, "a detector serial is required for every reading");
    if ((rc = fxl_stmt_prepare_cached(&s, ctx, fxl_sql_detector_by_serial)) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":serial", serial);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 0) {
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "unknown detector '%s' (see 'fxledger detector list')",
                      serial);
        goto cleanup;
    }
    *id = fxl_stmt_int(&s, 0);
    if (unit)
        copy(unit, 8, fxl_stmt_text(&s, 1));
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* ---- settings ---------------------------------------------------------------- */

static int setting_double(fxl_ctx *ctx, double *out, const char *key, double fallback, double lo,
                          double hi, const char *unit)
{
    char buf[64], *end = NULL;
    double v;
    int rc = fxl_setting_get(ctx, key, buf, sizeof buf);

    if (rc == FXL_ENOTFOUND) {
        *out = fallback;
        return 0;
    }
    if (rc != 0)
        return rc;
    (void)end;
    if (fxl_number_parse(&v, buf, 0) != FXL_NUM_OK || v < lo || v > hi)
        return fxl_fail(ctx, FXL_EINVAL,
                        "setting '%s' value '%s' is not usable: must be %g to %g %s (ask a physicist "
                        "to fix it with 'fxledger setting set')",
                        key, buf, lo, hi, unit);
    *out = v;
    return 0;
}

int rec_load_settings(fxl_ctx *ctx, rec_settings *out)
{
    int rc = setting_double(ctx, &out->skin_temp_c, "skin_temp_c", FXL_RECORD_SKIN_TEMP_DEFAULT_C,
                            FXL_RECORD_TEMP_MIN_C, FXL_RECORD_TEMP_MAX_C, "degC");
    if (rc == 0)
        rc = setting_double(ctx, &out->implausible_pct, "implausible_pct",
                            FXL_RECORD_IMPLAUSIBLE_DEFAULT_PCT, 1, 1000, "%");
    return rc;
}

/* ---- the inputs of one reading ------------------------------------------------ */

static int load_field(fxl_ctx *ctx, rec_inputs *in, int64_t field_id)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_measurement_result *m = &in->m;
    int rc;

    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
                               "SELECT f.name, f.point, f.beam_id, f.ssd_cm, f.x_cm, f.y_cm, f.wedge_deg, "
                               "f.tray, f.incidence_deg, f.expected_dose_cgy, coalesce(f.expected_source, ''), "
                               "b.name, b.modality, b.energy, mc.name, f.thickness_cm "
                               "FROM fields f JOIN beams b ON b.id = f.beam_id "
                               "JOIN machines mc ON mc.id = b.machine_id WHERE f.id = :id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":id", field_id);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 0) {
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "internal: field #%lld vanished", (long long)field_id);
        goto cleanup;
    }
    m->field_id = field_id;
    copy(m->field, sizeof m->field, fxl_stmt_text(&s, 0));
    copy(m->point, sizeof m->point, fxl_stmt_text(&s, 1));
    in->beam_id = fxl_stmt_int(&s, 2);
    /* The field's parameters; the equivalent square of its jaws (Sterling). */
    m->param[FXL_CF_SSD] = fxl_stmt_double(&s, 3);
    m->param[FXL_CF_FIELD_SIZE] = fxl_equiv_square_cm(fxl_stmt_double(&s, 4), fxl_stmt_double(&s, 5));
    m->param[FXL_CF_WEDGE] = fxl_stmt_double(&s, 6);
    m->param[FXL_CF_TRAY] = (double)fxl_stmt_int(&s, 7);
    m->param[FXL_CF_ANGLE] = fxl_stmt_double(&s, 8);
    m->expected_dose_cgy = fxl_stmt_double_opt(&s, 9);
    copy(m->expected_source, sizeof m->expected_source, fxl_stmt_text(&s, 10));
    copy(m->beam, sizeof m->beam, fxl_stmt_text(&s, 11));
    copy(m->modality, sizeof m->modality, fxl_stmt_text(&s, 12));
    m->energy = fxl_stmt_double(&s, 13);
    copy(m->machine, sizeof m->machine, fxl_stmt_text(&s, 14));
    /* Exit parameters: the patient thickness along the beam and the
     * source-to-detector distance SSD + thickness (the detector sits on the
     * exit surface); NaN when the plan gives no thickness. */
    m->param[FXL_CF_THICKNESS] = fxl_stmt_double_opt(&s, 15);
    m->param[FXL_CF_SDD] = m->param[FXL_CF_SSD] + m->param[FXL_CF_THICKNESS];
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

static int load_detector(fxl_ctx *ctx, rec_inputs *in, int64_t detector_id, const char *at)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_measurement_result *m = &in->m;
    int rc;

    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
                               "SELECT serial, kind, reading_unit, temp_coeff_per_c FROM detectors "
                               "WHERE id = :id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":id", detector_id);
    if ((rc = fxl_stmt_step(&s)) <= 0) {
        if (rc == 0)
            rc = fxl_fail(ctx, FXL_ENOTFOUND, "internal: detector #%lld vanished", (long long)detector_id);
        goto cleanup;
    }
    in->detector_id = detector_id;
    copy(m->detector, sizeof m->detector, fxl_stmt_text(&s, 0));
    copy(m->detector_kind, sizeof m->detector_kind, fxl_stmt_text(&s, 1));
    copy(m->reading_unit, sizeof m->reading_unit, fxl_stmt_text(&s, 2));
    m->temp_coeff_per_c = fxl_stmt_double(&s, 3);
    fxl_stmt_finalize(&s);

    /* Status at the treatment time: the latest row at or before it; a
     * detector without rows is in service (schema comment). */
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
                               "SELECT status FROM detector_status WHERE detector_id = :id "
                               "AND effective_at <= :at ORDER BY effective_at DESC, id DESC LIMIT 1")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":id", detector_id);
    fxl_stmt_bind_text(&s, ":at", at);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    copy(m->detector_status, sizeof m->detector_status, rc == 1 ? fxl_stmt_text(&s, 0) : "in_service");
    in->detector_in_service = strcmp(m->detector_status, "in_service") == 0;
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

static int load_calibration(fxl_ctx *ctx, rec_inputs *in, const char *at)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_measurement_result *m = &in->m;
    int rc;

    m->factor_n = m->temp_cal_c = NAN;
    m->ref[FXL_CF_FIELD_SIZE] = m->ref[FXL_CF_SSD] = NAN;
    /* Reference conditions of every calibration: open field, no tray,
     * normal incidence (docs/record.md). */
    m->ref[FXL_CF_WEDGE] = 0;
    m->ref[FXL_CF_TRAY] = 0;
    m->ref[FXL_CF_ANGLE] = 0;
    m->ref[FXL_CF_THICKNESS] = m->ref[FXL_CF_SDD] = NAN;
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
                               "SELECT id, factor_cgy_per_unit, temp_c, ssd_cm, field_size_cm, valid_until, "
                               "ref_thickness_cm "
                               "FROM calibrations WHERE detector_id = :det AND beam_id = :beam "
                               "AND point = :point AND calibrated_at <= :at "
                               "ORDER BY calibrated_at DESC, id DESC LIMIT 1")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":det", in->detector_id);
    fxl_stmt_bind_int(&s, ":beam", in->beam_id);
    fxl_stmt_bind_text(&s, ":point", m->point);
    fxl_stmt_bind_text(&s, ":at", at);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1) {
        m->calibration_id = fxl_stmt_int(&s, 0);
        m->factor_n = fxl_stmt_double(&s, 1);
        m->temp_cal_c = fxl_stmt_double(&s, 2);
        m->ref[FXL_CF_SSD] = fxl_stmt_double(&s, 3);
        m->ref[FXL_CF_FIELD_SIZE] = fxl_stmt_double(&s, 4);
        copy(m->calibration_valid_until, sizeof m->calibration_valid_until, fxl_stmt_text(&s, 5));
        m->calibration_valid = strcmp(at, m->calibration_valid_until) <= 0;
        /* Exit reference: the phantom thickness of the exit calibration and
         * its source-to-detector distance SSD + thickness. */
        m->ref[FXL_CF_THICKNESS] = fxl_stmt_double_opt(&s, 6);
        m->ref[FXL_CF_SDD] = m->ref[FXL_CF_SSD] + m->ref[FXL_CF_THICKNESS];
    }
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

static int load_tables(fxl_ctx *ctx, rec_inputs *in, const char *at)
{
    fxl_stmt t = FXL_STMT_INIT, p = FXL_STMT_INIT;
    int rc, i;

    if ((rc = fxl_stmt_prepare_cached(&t, ctx,
                               "SELECT id FROM correction_tables WHERE detector_id = :det "
                               "AND beam_id = :beam AND point = :point AND parameter = :param "
                               "AND effective_from <= :at "
                               "ORDER BY effective_from DESC, id DESC LIMIT 1")) != 0 ||
        (rc = fxl_stmt_prepare_cached(&p, ctx,
                               "SELECT x, factor FROM correction_points WHERE table_id = :table "
                               "ORDER BY x")) != 0)
        goto cleanup;
    for (i = 0; i < FXL_CF_COUNT; i++) {
        rec_table *tb = &in->tables[i];
        size_t cap_x = 0, cap_f = 0;

        /* Only the tables of this measured point: an exit reading never
         * takes an entrance factor. */
        if (!fxl_cf_applies((fxl_cf_param)i, strcmp(in->m.point, "exit") == 0))
            continue;
        fxl_stmt_reset(&t);
        fxl_stmt_bind_int(&t, ":det", in->detector_id);
        fxl_stmt_bind_int(&t, ":beam", in->beam_id);
        fxl_stmt_bind_text(&t, ":param", fxl_cf_name((fxl_cf_param)i));
        fxl_stmt_bind_text(&t, ":point", in->m.point);
        fxl_stmt_bind_text(&t, ":at", at);
        if ((rc = fxl_stmt_step(&t)) < 0)
            goto cleanup;
        if (rc == 0)
            continue;
        tb->id = fxl_stmt_int(&t, 0);
        in->m.cf_table_id[i] = tb->id;
        fxl_stmt_reset(&p);
        fxl_stmt_bind_int(&p, ":table", tb->id);
        while ((rc = fxl_stmt_step(&p)) == 1) {
            if ((rc = fxl_grow(ctx, (void **)&tb->x, &cap_x, tb->n, sizeof *tb->x,
                               "loading correction tables")) != 0 ||
                (rc = fxl_grow(ctx, (void **)&tb->factor, &cap_f, tb->n, sizeof *tb->factor,
                               "loading correction tables")) != 0)
                goto cleanup;
            tb->x[tb->n] = fxl_stmt_double(&p, 0);
            tb->factor[tb->n] = fxl_stmt_double(&p, 1);
            tb->n++;
        }
        if (rc < 0)
            goto cleanup;
    }
    rc = 0;
cleanup:
    fxl_stmt_finalize(&t);
    fxl_stmt_finalize(&p);
    return rc;
}

static int load_prior(fxl_ctx *ctx, rec_inputs *in, const rec_plan *plan, int fraction_number)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    in->prior.present = 0;
    if ((rc = fxl_stmt_prepare_cached(&s, ctx,
                               "SELECT f.number, m.verdict, m.deviation_pct FROM measurements m "
                               "JOIN fractions f ON f.id = m.fraction_id "
                               "WHERE m.field_id = :field AND f.plan_id = :plan AND f.number < :number "
                               "AND NOT EXISTS (SELECT 1 FROM measurements s WHERE s.supersedes_id = m.id) "
                               /* the last EVALUATED result: a not-evaluable or
                                * implausible one between two results outside
                                * tolerance does not hide the pair */
                               "AND m.verdict IN ('within_tolerance', 'outside_tolerance', 'outside_action') "
                               "AND m.deviation_pct IS NOT NULL "
                               "ORDER BY f.number DESC, m.id DESC LIMIT 1")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":field", in->m.field_id);
    fxl_stmt_bind_int(&s, ":plan", plan->plan_id);
    fxl_stmt_bind_int(&s, ":number", fraction_number);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1) {
        in->prior.present = 1;
        in->prior.fraction_number = (int)fxl_stmt_int(&s, 0);
        if (fxl_verdict_parse(&in->prior.verdict, fxl_stmt_text(&s, 1)) != 0)
            in->prior.verdict = FXL_VERDICT_NOT_EVALUABLE;
        in->prior.deviation_pct = fxl_stmt_double_opt(&s, 2);
    }
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

static int load_levels(fxl_ctx *ctx, rec_inputs *in, const rec_plan *plan, const char *at)
{
    fxl_threshold_choice choice;
    fxl_scope scope;
    fxl_measurement_result *m = &in->m;
    int rc;

    memset(&choice, 0, sizeof choice);
    scope.site = plan->site;
    scope.technique = plan->technique;
    scope.modality = m->modality;
    scope.energy = m->energy;
    scope.point = m->point;
    scope.detector_kind = m->detector_kind;
    if ((rc = fxl_thresholds_choose(ctx, &choice, &scope, at)) != 0)
        return rc;
    m->threshold_set_id = choice.levels.present ? choice.set_id : 0;
    copy(m->threshold_name, sizeof m->threshold_name, choice.levels.present ? choice.name : "");
    m->threshold_version = choice.levels.present ? choice.version : 0;
    m->levels = choice.levels;
    if (!choice.levels.present) {
        m->levels.tolerance_pct = m->levels.action_pct = m->levels.floor_cgy = NAN;
        copy(in->threshold_reason, sizeof in->threshold_reason, choice.reason);
    }
    return 0;
}

int rec_load_inputs(fxl_ctx *ctx, rec_inputs *in, const rec_plan *plan, int64_t field_id,
                    int64_t detector_id, const char *at, int fraction_number)
{
    int rc, i;

    memset(in, 0, sizeof *in);
    for (i = 0; i < FXL_CF_COUNT; i++)
        in->m.cf[i] = NAN;
    in->m.cf_temp = in->m.corrected_dose_cgy = in->m.deviation_pct = NAN;
    if ((rc = load_field(ctx, in, field_id)) != 0 ||
        (rc = load_detector(ctx, in, detector_id, at)) != 0 ||
        (rc = load_calibration(ctx, in, at)) != 0 ||
        (rc = load_tables(ctx, in, at)) != 0 ||
        (rc = load_levels(ctx, in, plan, at)) != 0 ||
        (rc = load_prior(ctx, in, plan, fraction_number)) != 0)
        rec_inputs_release(in);
    return rc;
}

/* ---- the computation ---------------------------------------------------------- */

void rec_compute(rec_inputs *in, double reading, double background, double temp_c,
                 int temp_entered, const rec_settings *settings)
{
    fxl_measurement_result *m = &in->m;
    fxl_dose_input di;
    fxl_dose_result dr;
    fxl_judge_input ji;
    fxl_judgement j;
    int i;

    memset(&di, 0, sizeof di);
    m->reading = reading;
    m->background = isfinite(background) ? background : 0;
    di.exit = strcmp(m->point, "exit") == 0;
    m->temp_c = temp_c;
    m->temp_entered = temp_entered;

    di.reading = reading;
    di.background = m->background;
    di.factor_n = m->calibration_id ? m->factor_n : NAN;
    for (i = 0; i < FXL_CF_COUNT; i++) {
        di.param[i] = m->param[i];
        di.ref[i] = m->ref[i];
        di.table[i].x = in->tables[i].x;
        di.table[i].factor = in->tables[i].factor;
        di.table[i].n = in->tables[i].n;
    }
    di.temp_coeff_per_c = m->temp_coeff_per_c;
    di.temp_c = temp_c;
    di.temp_cal_c = m->temp_cal_c;
    di.reading_unit = m->reading_unit;
    fxl_dose_from_reading(&dr, &di);

    memset(&ji, 0, sizeof ji);
    ji.reading = reading;
    ji.detector_in_service = in->detector_in_service;
    ji.detector_status = m->detector_status;
    ji.calibration_found = m->calibration_id != 0;
    ji.calibration_valid = m->calibration_valid;
    ji.calibration_valid_until = m->calibration_valid_until;
    ji.dose = dr;
    ji.expected_dose_cgy = m->expected_dose_cgy;
    ji.levels = m->levels;
    ji.implausible_pct = settings->implausible_pct;
    ji.reading_unit = m->reading_unit;
    fxl_judge(&j, &ji);
    m->escalated = fxl_escalation_apply(&j, &in->prior);

    if (!m->levels.present && in->threshold_reason[0] && j.verdict == FXL_VERDICT_NOT_EVALUABLE &&
        strstr(in->threshold_reason, "ambiguous"))
        fxl_reasons_add(&j.reasons, "%s", in->threshold_reason);
    if (m->background > 0)
        fxl_reasons_add(&j.reasons, "background %g %s subtracted from the reading %g %s",
                        m->background, m->reading_unit, reading, m->reading_unit);

    for (i = 0; i < FXL_CF_COUNT; i++)
        m->cf[i] = dr.cf[i];
    m->cf_temp = dr.cf_temp;
    /* A dose is kept only where it is a result: from an in-service detector
     * with a calibration valid at the treatment time. */
    m->corrected_dose_cgy = (dr.evaluable && in->detector_in_service && m->calibration_id &&
                             m->calibration_valid)
                                ? dr.dose_cgy
                                : NAN;
    m->deviation_pct = j.deviation_pct;
    m->verdict = j.verdict;
    m->gross = j.gross;
    m->reasons = j.reasons;
}

/* ---- reasons as JSON ------------------------------------------------------------ */

cJSON *rec_reasons_json(const fxl_reasons *r)
{
    cJSON *a = cJSON_CreateArray();
    int i;

    for (i = 0; a && i < r->n && i < FXL_REASONS_MAX; i++)
        cJSON_AddItemToArray(a, cJSON_CreateString(r->text[i]));
    return a;
}

void rec_reasons_parse(fxl_reasons *r, const char *json)
{
    cJSON *a = cJSON_Parse(json ? json : "[]"), *it;

    memset(r, 0, sizeof *r);
    if (!cJSON_IsArray(a)) {
        if (json && *json && strcmp(json, "[]") != 0)
            fxl_reasons_add(r, "%s", json);
        cJSON_Delete(a);
        return;
    }
    cJSON_ArrayForEach(it, a) {
        if (cJSON_IsString(it))
            fxl_reasons_add(r, "%s", it->valuestring);
    }
    cJSON_Delete(a);
}
