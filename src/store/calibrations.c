/* Cross-calibrations: N = D_chamber / mean reading (AAPM TG-62; ESTRO
 * Booklet 5), written once with its readings, mean, SD and validity, and
 * listed with whether each is current, expired or superseded. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/number.h"
#include "fxl/calibrations.h"
#include "fxl/core.h"
#include "fxl/detectors.h"
#include "fxl/machines.h"
#include "fxl/settings.h"
#include "store/audit.h"
#include "store/auth_int.h"
#include "store/grow.h"
#include "store/stmt.h"

/* Columns shared by listing and reading back one row. `superseded` asks for
 * a later calibration of the same detector, beam and point at or before :at;
 * `prev` is the N of the one just before. */
#define CALIB_SELECT                                                                             \
    "SELECT c.id, d.serial, d.reading_unit, m.name, b.name, c.point, c.calibrated_at, "          \
    "c.valid_until, c.chamber_dose_cgy, c.reading_n, c.reading_mean, c.reading_sd, "             \
    "c.factor_cgy_per_unit, c.temp_c, c.ssd_cm, c.field_size_cm, coalesce(c.chamber, ''), "      \
    "coalesce(c.notes, ''), u.login, c.readings, "                                               \
    "(SELECT p.factor_cgy_per_unit FROM calibrations p WHERE p.detector_id = c.detector_id "     \
    "  AND p.beam_id = c.beam_id AND p.point = c.point AND (p.calibrated_at < c.calibrated_at "  \
    "  OR (p.calibrated_at = c.calibrated_at AND p.id < c.id)) "                                 \
    "  ORDER BY p.calibrated_at DESC, p.id DESC LIMIT 1), "                                      \
    "EXISTS (SELECT 1 FROM calibrations l WHERE l.detector_id = c.detector_id "                  \
    "  AND l.beam_id = c.beam_id AND l.point = c.point AND l.calibrated_at <= :at "              \
    "  AND (l.calibrated_at > c.calibrated_at OR (l.calibrated_at = c.calibrated_at "            \
    "  AND l.id > c.id))), c.ref_thickness_cm, coalesce(c.confirmed_change, '') "                \
    "FROM calibrations c JOIN detectors d ON d.id = c.detector_id "                              \
    "JOIN beams b ON b.id = c.beam_id JOIN machines m ON m.id = b.machine_id "                   \
    "JOIN users u ON u.id = c.user_id "

static void read_row(fxl_stmt *s, fxl_calibration *c, const char *at)
{
    memset(c, 0, sizeof *c);
    c->id = fxl_stmt_int(s, 0);
    snprintf(c->serial, sizeof c->serial, "%s", fxl_stmt_text(s, 1));
    snprintf(c->reading_unit, sizeof c->reading_unit, "%s", fxl_stmt_text(s, 2));
    snprintf(c->machine, sizeof c->machine, "%s", fxl_stmt_text(s, 3));
    snprintf(c->beam, sizeof c->beam, "%s", fxl_stmt_text(s, 4));
    snprintf(c->point, sizeof c->point, "%s", fxl_stmt_text(s, 5));
    snprintf(c->calibrated_at, sizeof c->calibrated_at, "%s", fxl_stmt_text(s, 6));
    snprintf(c->valid_until, sizeof c->valid_until, "%s", fxl_stmt_text(s, 7));
    c->chamber_dose_cgy = fxl_stmt_double(s, 8);
    c->n = (int)fxl_stmt_int(s, 9);
    c->mean = fxl_stmt_double(s, 10);
    c->sd = fxl_stmt_double(s, 11);
    c->factor_cgy_per_unit = fxl_stmt_double(s, 12);
    c->temp_c = fxl_stmt_double(s, 13);
    c->ssd_cm = fxl_stmt_double(s, 14);
    c->field_size_cm = fxl_stmt_double(s, 15);
    snprintf(c->chamber, sizeof c->chamber, "%s", fxl_stmt_text(s, 16));
    snprintf(c->notes, sizeof c->notes, "%s", fxl_stmt_text(s, 17));
    snprintf(c->user, sizeof c->user, "%s", fxl_stmt_text(s, 18));
    snprintf(c->readings_json, sizeof c->readings_json, "%s", fxl_stmt_text(s, 19));
    c->previous_factor = fxl_stmt_double_opt(s, 20);
    c->ref_thickness_cm = fxl_stmt_double_opt(s, 22);
    snprintf(c->confirmed_change, sizeof c->confirmed_change, "%s", fxl_stmt_text(s, 23));
    if (fxl_stmt_int(s, 21))
        snprintf(c->state, sizeof c->state, "superseded");
    else if (strcmp(c->valid_until, at) < 0)
        snprintf(c->state, sizeof c->state, "expired");
    else
        snprintf(c->state, sizeof c->state, "current");
}

static int get_by_id(fxl_ctx *ctx, fxl_calibration *out, int64_t id, const char *at)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    if ((rc = fxl_stmt_prepare(&s, ctx, CALIB_SELECT "WHERE c.id = :id")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":id", id);
    fxl_stmt_bind_text(&s, ":at", at);
    rc = fxl_stmt_step(&s);
    if (rc == 0)
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "calibration %lld not found", (long long)id);
    if (rc == 1) {
        read_row(&s, out, at);
        rc = 0;
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

static int text_max(const char *s, size_t max)
{
    return !s || strlen(s) <= max;
}

/* Everything that can be checked before the transaction. Fills the resolved
 * ids, the times and the statistics. */
typedef struct calib_plan {
    int64_t detector_id, beam_id;
    char calibrated_at[FXL_TIME_LEN], valid_until[FXL_TIME_LEN];
    double temp_c, ssd_cm, field_size_cm, ref_thickness_cm;
    double mean, sd, factor;
    double sensitivity;            /* the detector's nominal, unit per cGy, NaN if none */
    char unit[8];
    char confirmed[400];           /* acceptance checks confirmed, "" if none */
} calib_plan;

int fxl_calib_confirm_parse(int *out, const char *names)
{
    char buf[128], *tok, *save = NULL;

    *out = 0;
    if (!names || strlen(names) >= sizeof buf)
        return FXL_EINVAL;
    snprintf(buf, sizeof buf, "%s", names);
    for (tok = strtok_r(buf, ",", &save); tok; tok = strtok_r(NULL, ",", &save)) {
        if (strcmp(tok, "sd") == 0)
            *out |= FXL_CALIB_CONFIRM_SD;
        else if (strcmp(tok, "n-change") == 0)
            *out |= FXL_CALIB_CONFIRM_N_CHANGE;
        else if (strcmp(tok, "nominal") == 0)
            *out |= FXL_CALIB_CONFIRM_NOMINAL;
        else
            return FXL_EINVAL;
    }
    return *out ? 0 : FXL_EINVAL;
}

static int setting_pct(fxl_ctx *ctx, double *out, const char *key, double fallback)
{
    char buf[64], *end = NULL;
    int rc = fxl_setting_get(ctx, key, buf, sizeof buf);

    *out = fallback;
    if (rc == FXL_ENOTFOUND || (rc == 0 && !buf[0]))
        return 0;
    if (rc != 0)
        return rc;
    (void)end;
    /* the one strict parser, as for every number read as text */
    if (fxl_number_parse(out, buf, 0) != FXL_NUM_OK || !(*out > 0))
        return fxl_fail(ctx, FXL_EINVAL, "setting '%s' value '%s' must be a number above 0 %%",
                        key, buf);
    return 0;
}

/* One failed acceptance check: refused unless confirmed by a physicist;
 * when confirmed, its words are kept with the calibration. */
static int accept_or_confirm(fxl_ctx *ctx, calib_plan *p, const fxl_calib_spec *c, int bit,
                             const char *name, const char *what)
{
    size_t used = strlen(p->confirmed);

    if (!(c->confirm & bit))
        return fxl_fail(ctx, FXL_EINVAL,
                        "calibration of detector '%s' for %s %s %s not put in force: %s; a "
                        "physicist who has checked it may confirm it with --confirm-change %s",
                        c->serial, c->machine, c->beam, c->point, what, name);
    if (!(fxl_user_role(ctx) & FXL_ROLE_PHYSICIST))
        return fxl_fail(ctx, FXL_EPERM,
                        "permission denied: only a physicist may confirm a calibration that fails "
                        "its acceptance check (%s)", what);
    snprintf(p->confirmed + used, sizeof p->confirmed - used, "%s%s (confirmed)",
             used ? "; " : "", what);
    return 0;
}

/* The acceptance checks of a new calibration (docs/equipment.md): the
 * spread of its readings, the change of N against the previous calibration
 * of the same detector, beam and point, and for the detector's very first
 * calibration the agreement with its nominal sensitivity. */
static int acceptance_checks(fxl_ctx *ctx, calib_plan *p, const fxl_calib_spec *c)
{
    fxl_stmt s = FXL_STMT_INIT;
    double sd_lim, change_lim, nominal_lim, sd_pct, change;
    char what[240];
    int rc, any = 0;

    if ((rc = setting_pct(ctx, &sd_lim, "calibration_sd_limit_pct", FXL_CALIB_SD_LIMIT_PCT_DEFAULT)) != 0 ||
        (rc = setting_pct(ctx, &change_lim, "calibration_change_limit_pct",
                          FXL_CALIB_CHANGE_LIMIT_PCT_DEFAULT)) != 0 ||
        (rc = setting_pct(ctx, &nominal_lim, "calibration_nominal_limit_pct",
                          FXL_CALIB_NOMINAL_LIMIT_PCT_DEFAULT)) != 0)
        return rc;
    sd_pct = p->sd / p->mean * 100.0;
    if (sd_pct > sd_lim) {
        snprintf(what, sizeof what, "the SD of its readings is %.2f %% of their mean, above the "
                 "limit of %g %%", sd_pct, sd_lim);
        if ((rc = accept_or_confirm(ctx, p, c, FXL_CALIB_CONFIRM_SD, "sd", what)) != 0)
            return rc;
    }
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT id, factor_cgy_per_unit FROM calibrations WHERE detector_id = :d "
                               "AND beam_id = :b AND point = :point AND calibrated_at < :at "
                               "ORDER BY calibrated_at DESC, id DESC LIMIT 1")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":d", p->detector_id);
    fxl_stmt_bind_int(&s, ":b", p->beam_id);
    fxl_stmt_bind_text(&s, ":point", c->point);
    fxl_stmt_bind_text(&s, ":at", p->calibrated_at);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1) {
        change = (p->factor - fxl_stmt_double(&s, 1)) / fxl_stmt_double(&s, 1) * 100.0;
        if (fabs(change) > change_lim) {
            snprintf(what, sizeof what, "N %.5f changes by %+.2f %% against calibration #%lld "
                     "(N %.5f), beyond the limit of %g %%", p->factor, change,
                     (long long)fxl_stmt_int(&s, 0), fxl_stmt_double(&s, 1), change_lim);
            if ((rc = accept_or_confirm(ctx, p, c, FXL_CALIB_CONFIRM_N_CHANGE, "n-change", what)) != 0)
                goto cleanup;
        }
    }
    fxl_stmt_finalize(&s);
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT count(*) FROM calibrations WHERE detector_id = :d")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":d", p->detector_id);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    any = rc == 1 && fxl_stmt_int(&s, 0) > 0;
    rc = 0;
    /* N nominal = 1 / sensitivity (cGy per unit from unit per cGy). */
    if (!any && isfinite(p->sensitivity) && p->sensitivity > 0) {
        double nominal = 1.0 / p->sensitivity;
        change = (p->factor - nominal) / nominal * 100.0;
        if (fabs(change) > nominal_lim) {
            snprintf(what, sizeof what, "N %.5f differs by %+.2f %% from the nominal %.5f (1 / "
                     "sensitivity %g %s/cGy), beyond the limit of %g %%", p->factor, change,
                     nominal, p->sensitivity, p->unit, nominal_lim);
            rc = accept_or_confirm(ctx, p, c, FXL_CALIB_CONFIRM_NOMINAL, "nominal", what);
        }
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

static int plan_calibration(fxl_ctx *ctx, calib_plan *p, const fxl_calib_spec *c)
{
    fxl_detector det;
    fxl_stmt s = FXL_STMT_INIT;
    char now[FXL_TIME_LEN];
    long interval = FXL_CALIBRATION_INTERVAL_DAYS_DEFAULT;
    size_t i;
    int rc;

    memset(p, 0, sizeof *p);
    if (!c->point || (strcmp(c->point, "entrance") != 0 && strcmp(c->point, "exit") != 0))
        return fxl_fail(ctx, FXL_EINVAL, "point '%s' must be entrance or exit",
                        c->point ? c->point : "");
    if (!(c->chamber_dose_cgy > 0 && c->chamber_dose_cgy <= FXL_CALIB_CHAMBER_DOSE_MAX_CGY))
        return fxl_fail(ctx, FXL_EINVAL, "chamber dose '%g' must be > 0 and at most %g cGy",
                        c->chamber_dose_cgy, FXL_CALIB_CHAMBER_DOSE_MAX_CGY);
    if (c->n_readings < 1 || c->n_readings > FXL_CALIB_READINGS_MAX || !c->readings)
        return fxl_fail(ctx, FXL_EINVAL, "calibration needs 1 to %d readings, got %zu",
                        FXL_CALIB_READINGS_MAX, c->n_readings);
    p->temp_c = isnan(c->temp_c) ? FXL_CALIB_TEMP_DEFAULT_C : c->temp_c;
    p->ssd_cm = isnan(c->ssd_cm) ? FXL_CALIB_SSD_DEFAULT_CM : c->ssd_cm;
    p->field_size_cm = isnan(c->field_size_cm) ? FXL_CALIB_FIELD_DEFAULT_CM : c->field_size_cm;
    /* 0 (a zeroed spec) counts as not given, like NaN. */
    p->ref_thickness_cm = c->ref_thickness_cm == 0 ? NAN : c->ref_thickness_cm;
    if (!isnan(p->ref_thickness_cm) && strcmp(c->point, "exit") != 0)
        return fxl_fail(ctx, FXL_EINVAL, "a phantom thickness is given only for an exit calibration");
    if (!isnan(p->ref_thickness_cm) && !(p->ref_thickness_cm > 0 && p->ref_thickness_cm <= 60))
        return fxl_fail(ctx, FXL_EINVAL, "phantom thickness '%g' must be > 0 and at most 60 cm",
                        c->ref_thickness_cm);
    if (!(p->temp_c >= 10 && p->temp_c <= 45))
        return fxl_fail(ctx, FXL_EINVAL, "calibration temperature '%g' must be 10 to 45 degC",
                        p->temp_c);
    if (!(p->ssd_cm >= 50 && p->ssd_cm <= 200))
        return fxl_fail(ctx, FXL_EINVAL, "calibration SSD '%g' must be 50 to 200 cm", p->ssd_cm);
    if (!(p->field_size_cm >= 1 && p->field_size_cm <= 50))
        return fxl_fail(ctx, FXL_EINVAL, "calibration field size '%g' must be 1 to 50 cm",
                        p->field_size_cm);
    if (c->valid_days && c->valid_until)
        return fxl_fail(ctx, FXL_EINVAL, "give the validity as days or as a date, not both");
    if (c->valid_days && (c->valid_days < 1 || c->valid_days > FXL_CALIB_VALID_DAYS_MAX))
        return fxl_fail(ctx, FXL_EINVAL, "validity '%d' days must be 1 to %d days", c->valid_days,
                        FXL_CALIB_VALID_DAYS_MAX);
    if (!text_max(c->chamber, 200))
        return fxl_fail(ctx, FXL_EINVAL, "chamber text must be at most 200 characters");
    if (!text_max(c->notes, 500))
        return fxl_fail(ctx, FXL_EINVAL, "notes must be at most 500 characters");

    if ((rc = fxl_detector_get(ctx, &det, c->serial, NULL)) != 0)
        return rc;
    p->detector_id = det.id;
    p->sensitivity = det.sensitivity;
    snprintf(p->unit, sizeof p->unit, "%s", det.reading_unit);
    if (strcmp(det.status, "retired") == 0)
        return fxl_fail(ctx, FXL_EINVAL, "detector '%s' is retired (since %s) and cannot be calibrated",
                        c->serial, det.status_since);
    for (i = 0; i < c->n_readings; i++)
        if (!(isfinite(c->readings[i]) && c->readings[i] > 0))
            return fxl_fail(ctx, FXL_EINVAL, "reading %zu '%g' for detector '%s' must be > 0 %s",
                            i + 1, c->readings[i], c->serial, p->unit);
    if ((rc = fxl_beam_find(ctx, &p->beam_id, c->machine ? c->machine : "", c->beam ? c->beam : "")) != 0)
        return rc;

    fxl_now(ctx, now);
    snprintf(p->calibrated_at, sizeof p->calibrated_at, "%s", c->calibrated_at ? c->calibrated_at : now);
    if (strcmp(p->calibrated_at, now) > 0)
        return fxl_fail(ctx, FXL_EINVAL, "calibration date '%s' is in the future (now %s)",
                        p->calibrated_at, now);
    if (c->valid_until) {
        snprintf(p->valid_until, sizeof p->valid_until, "%s", c->valid_until);
    } else {
        if (c->valid_days)
            interval = c->valid_days;
        else if ((rc = fxl_setting_get_int(ctx, &interval, "calibration_interval_days",
                                           FXL_CALIBRATION_INTERVAL_DAYS_DEFAULT)) != 0)
            return rc;
        if (interval < 1 || interval > FXL_CALIB_VALID_DAYS_MAX)
            return fxl_fail(ctx, FXL_EINVAL,
                            "setting 'calibration_interval_days' value '%ld' must be 1 to %d days",
                            interval, FXL_CALIB_VALID_DAYS_MAX);
        if ((rc = fxl_time_add_days(p->valid_until, p->calibrated_at, (int)interval)) != 0)
            return fxl_fail(ctx, FXL_EINVAL, "cannot add %ld days to '%s'", interval,
                            p->calibrated_at);
    }
    if (strcmp(p->valid_until, p->calibrated_at) <= 0)
        return fxl_fail(ctx, FXL_EINVAL, "valid-until '%s' must be after the calibration date '%s'",
                        p->valid_until, p->calibrated_at);

    /* Two calibrations of one detector, beam and point at the same instant
     * would leave "the latest" ambiguous. */
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT 1 FROM calibrations WHERE detector_id = :d AND beam_id = :b "
                               "AND point = :point AND calibrated_at = :at")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":d", p->detector_id);
    fxl_stmt_bind_int(&s, ":b", p->beam_id);
    fxl_stmt_bind_text(&s, ":point", c->point);
    fxl_stmt_bind_text(&s, ":at", p->calibrated_at);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1) {
        rc = fxl_fail(ctx, FXL_ECONFLICT,
                      "detector '%s' already has an %s calibration for %s %s at %s", c->serial,
                      c->point, c->machine, c->beam, p->calibrated_at);
        goto cleanup;
    }

    /* N = D_chamber / mean reading (TG-62 cross-calibration). */
    if ((rc = fxl_mean_sd(&p->mean, &p->sd, c->readings, c->n_readings)) != 0) {
        rc = fxl_fail(ctx, FXL_EINVAL, "the readings for detector '%s' are not valid numbers",
                      c->serial);
        goto cleanup;
    }
    p->factor = c->chamber_dose_cgy / p->mean;
    if (!(isfinite(p->factor) && p->factor > 0)) {
        rc = fxl_fail(ctx, FXL_EINVAL, "calibration factor for detector '%s' is not a positive number",
                      c->serial);
        goto cleanup;
    }
    rc = acceptance_checks(ctx, p, c);
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_calib_add(fxl_ctx *ctx, fxl_calibration *out, const fxl_calib_spec *c)
{
    fxl_stmt s = FXL_STMT_INIT;
    cJSON *audit = NULL, *readings = NULL;
    calib_plan p;
    char now[FXL_TIME_LEN], *readings_text = NULL;
    int64_t id = 0;
    size_t i;
    int rc;

    if ((rc = fxl_require_role(ctx, FXL_ROLES_PHYSICS, "recording a calibration")) != 0)
        return rc;
    if ((rc = fxl_sign_require(ctx, "confirming a calibration")) != 0)
        return rc;
    if ((rc = plan_calibration(ctx, &p, c)) != 0)
        return rc;
    readings = cJSON_CreateArray();
    for (i = 0; i < c->n_readings; i++)
        cJSON_AddItemToArray(readings, cJSON_CreateNumber(c->readings[i]));
    if (!(readings_text = cJSON_PrintUnformatted(readings))) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory storing readings");
        goto cleanup;
    }

    fxl_now(ctx, now);
    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "INSERT INTO calibrations (detector_id, beam_id, point, calibrated_at, "
                               "valid_until, chamber_dose_cgy, readings, reading_n, reading_mean, "
                               "reading_sd, factor_cgy_per_unit, temp_c, ssd_cm, field_size_cm, chamber, "
                               "notes, user_id, created_at, ref_thickness_cm, confirmed_change) VALUES "
                               "(:d, :b, :point, :at, :until, :dose, :readings, :n, :mean, :sd, :factor, "
                               ":temp, :ssd, :fs, :chamber, :notes, :user, :now, :thick, :confirmed)")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":d", p.detector_id);
    fxl_stmt_bind_int(&s, ":b", p.beam_id);
    fxl_stmt_bind_text(&s, ":point", c->point);
    fxl_stmt_bind_text(&s, ":at", p.calibrated_at);
    fxl_stmt_bind_text(&s, ":until", p.valid_until);
    fxl_stmt_bind_double(&s, ":dose", c->chamber_dose_cgy);
    fxl_stmt_bind_text(&s, ":readings", readings_text);
    fxl_stmt_bind_int(&s, ":n", (int64_t)c->n_readings);
    fxl_stmt_bind_double(&s, ":mean", p.mean);
    fxl_stmt_bind_double(&s, ":sd", p.sd);
    fxl_stmt_bind_double(&s, ":factor", p.factor);
    fxl_stmt_bind_double(&s, ":temp", p.temp_c);
    fxl_stmt_bind_double(&s, ":ssd", p.ssd_cm);
    fxl_stmt_bind_double(&s, ":fs", p.field_size_cm);
    fxl_stmt_bind_double_opt(&s, ":thick", p.ref_thickness_cm);
    fxl_stmt_bind_text(&s, ":confirmed", p.confirmed[0] ? p.confirmed : NULL);
    fxl_stmt_bind_text(&s, ":chamber", c->chamber && *c->chamber ? c->chamber : NULL);
    fxl_stmt_bind_text(&s, ":notes", c->notes && *c->notes ? c->notes : NULL);
    fxl_stmt_bind_int(&s, ":user", fxl_user_id(ctx));
    fxl_stmt_bind_text(&s, ":now", now);
    if ((rc = fxl_stmt_exec(&s)) != 0)
        goto cleanup;
    id = sqlite3_last_insert_rowid(ctx->db);

    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "serial", c->serial);
    cJSON_AddStringToObject(audit, "machine", c->machine);
    cJSON_AddStringToObject(audit, "beam", c->beam);
    cJSON_AddStringToObject(audit, "point", c->point);
    cJSON_AddStringToObject(audit, "calibrated_at", p.calibrated_at);
    cJSON_AddStringToObject(audit, "valid_until", p.valid_until);
    cJSON_AddNumberToObject(audit, "chamber_dose_cgy", c->chamber_dose_cgy);
    cJSON_AddItemToObject(audit, "readings", readings);
    readings = NULL;
    cJSON_AddNumberToObject(audit, "reading_mean", p.mean);
    cJSON_AddNumberToObject(audit, "reading_sd", p.sd);
    cJSON_AddNumberToObject(audit, "factor_cgy_per_unit", p.factor);
    cJSON_AddNumberToObject(audit, "temp_c", p.temp_c);
    cJSON_AddNumberToObject(audit, "ssd_cm", p.ssd_cm);
    cJSON_AddNumberToObject(audit, "field_size_cm", p.field_size_cm);
    if (isfinite(p.ref_thickness_cm))
        cJSON_AddNumberToObject(audit, "ref_thickness_cm", p.ref_thickness_cm);
    if (p.confirmed[0])
        cJSON_AddStringToObject(audit, "confirmed_change", p.confirmed);
    if (c->chamber && *c->chamber)
        cJSON_AddStringToObject(audit, "chamber", c->chamber);
    if (c->notes && *c->notes)
        cJSON_AddStringToObject(audit, "notes", c->notes);
    if ((rc = fxl_audit_append(ctx, "create", "calibrations", id, audit)) != 0)
        goto cleanup;
    if ((rc = fxl_signature_add(ctx, "calibrations", id, "calibration confirmed")) != 0)
        goto cleanup;
    if ((rc = fxl_commit(ctx)) != 0)
        goto cleanup;
    if (out)
        rc = get_by_id(ctx, out, id, now);
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    fxl_stmt_finalize(&s);
    cJSON_Delete(audit);
    cJSON_Delete(readings);
    free(readings_text);
    return rc;
}

int fxl_calib_list(fxl_ctx *ctx, fxl_calibration **out, size_t *n, const char *serial,
                   const char *at)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_calibration *list = NULL;
    char nowbuf[FXL_TIME_LEN];
    size_t count = 0, cap = 0;
    int64_t id = 0;
    int rc;

    *out = NULL;
    *n = 0;
    if (!at || !*at) {
        fxl_now(ctx, nowbuf);
        at = nowbuf;
    }
    if (serial && (rc = fxl_detector_find(ctx, &id, serial)) != 0)
        return rc;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               CALIB_SELECT "WHERE (:serial IS NULL OR d.serial = :serial) "
                               "ORDER BY c.calibrated_at DESC, c.id DESC")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":serial", serial);
    fxl_stmt_bind_text(&s, ":at", at);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list, "listing calibrations")) != 0)
            goto cleanup;
        read_row(&s, &list[count++], at);
    }
    if (rc == 0) {
        *out = list;
        *n = count;
        list = NULL;
    }
cleanup:
    fxl_stmt_finalize(&s);
    free(list);
    return rc;
}
