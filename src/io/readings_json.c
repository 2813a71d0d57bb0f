/* One fraction's readings in our JSON format (docs/format-readings.md):
 * strict parsing with the position of malformed or truncated JSON; and the
 * JSON description of a logged fraction (record --json, the alert hook).
 * No database. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/readings_json.h"
#include "io/json_doc.h"

void fxl_readings_file_release(fxl_readings_file *f)
{
    if (!f)
        return;
    free(f->names);
    free(f->entries);
    memset(f, 0, sizeof *f);
}

/* Names and texts of this format: 1 to n characters even when optional;
 * this parser has not refused control characters in them, and still does
 * not. */
#define NAME (FXL_JSONDOC_NONEMPTY | FXL_JSONDOC_CONTROL_OK)
#define REQ_NAME (FXL_JSONDOC_REQUIRED | NAME)

static int parse_reading(fxl_ctx *ctx, const char *name, size_t index, const cJSON *obj,
                         fxl_readings_names *nm, fxl_reading_entry *e)
{
    static const char *const keys[] = {"field", "point", "detector", "reading", "temp_c",
                                       "background", NULL};
    const fxl_jsondoc d = {ctx, "readings file", name};
    char where[32];
    int rc;

    snprintf(where, sizeof where, "readings[%zu]", index);
    fxl_reading_entry_init(e);
    if (!cJSON_IsObject(obj))
        return fxl_fail(ctx, FXL_EINVAL,
                        "readings file '%s': %s: must be an object {\"field\", \"detector\", \"reading\", ...}",
                        name, where);
    if ((rc = fxl_jsondoc_check_keys(&d, where, obj, keys)) != 0 ||
        (rc = fxl_jsondoc_get_string(&d, nm->field, sizeof nm->field, where, obj, "field", REQ_NAME,
                                     sizeof nm->field - 1)) != 0 ||
        (rc = fxl_jsondoc_get_string(&d, nm->point, sizeof nm->point, where, obj, "point", NAME,
                                     sizeof nm->point - 1)) != 0 ||
        (rc = fxl_jsondoc_get_string(&d, nm->detector, sizeof nm->detector, where, obj, "detector", REQ_NAME,
                                     sizeof nm->detector - 1)) != 0 ||
        (rc = fxl_jsondoc_get_number(&d, &e->reading, where, obj, "reading", FXL_JSONDOC_REQUIRED,
                                     "> 0, detector unit")) != 0 ||
        (rc = fxl_jsondoc_get_number(&d, &e->temp_c, where, obj, "temp_c", 0, "10 to 45 degC")) != 0 ||
        (rc = fxl_jsondoc_get_number(&d, &e->background, where, obj, "background", 0,
                                     ">= 0, below the reading")) != 0)
        return rc;
    if (nm->point[0] && strcmp(nm->point, "entrance") != 0 && strcmp(nm->point, "exit") != 0)
        return fxl_fail(ctx, FXL_EINVAL, "readings file '%s': %s: 'point' must be \"entrance\" or \"exit\"",
                        name, where);
    return 0;
}

int fxl_readings_parse(fxl_ctx *ctx, fxl_readings_file *out, const char *name, const char *text,
                       size_t len)
{
    static const char *const top_keys[] = {"format", "version", "patient", "plan", "fraction",
                                           "treated_at", "readings", NULL};
    const fxl_jsondoc d = {ctx, "readings file", name};
    cJSON *root = NULL;
    const cJSON *v, *arr, *r;
    size_t i, n;
    int rc;

    memset(out, 0, sizeof *out);
    if ((rc = fxl_jsondoc_parse(&d, &root, text, len, FXL_JSONDOC_NO_TRAILING | FXL_JSONDOC_CUT_IN_STRING)) != 0)
        goto cleanup;
    if (!cJSON_IsObject(root)) {
        rc = fxl_fail(ctx, FXL_EINVAL, "readings file '%s': the document must be a JSON object", name);
        goto cleanup;
    }
    if ((rc = fxl_jsondoc_check_keys(&d, "top level", root, top_keys)) != 0 ||
        (rc = fxl_jsondoc_check_format(&d, "top level", root, REQ_NAME, FXL_READINGS_FORMAT,
                                       FXL_READINGS_VERSION)) != 0 ||
        (rc = fxl_jsondoc_get_string(&d, out->patient, sizeof out->patient, "top level", root, "patient",
                                     REQ_NAME, sizeof out->patient - 1)) != 0 ||
        (rc = fxl_jsondoc_get_string(&d, out->plan, sizeof out->plan, "top level", root, "plan", NAME,
                                     sizeof out->plan - 1)) != 0 ||
        (rc = fxl_jsondoc_get_string(&d, out->treated_at, sizeof out->treated_at, "top level", root,
                                     "treated_at", NAME, sizeof out->treated_at - 1)) != 0)
        goto cleanup;
    v = cJSON_GetObjectItemCaseSensitive(root, "fraction");
    if (v) {
        if (!cJSON_IsNumber(v) || v->valuedouble != floor(v->valuedouble) || v->valuedouble < 1 ||
            v->valuedouble > 100) {
            rc = fxl_fail(ctx, FXL_EINVAL,
                          "readings file '%s': top level: 'fraction' must be a whole number 1 to 100",
                          name);
            goto cleanup;
        }
        out->fraction = (int)v->valuedouble;
    }
    arr = cJSON_GetObjectItemCaseSensitive(root, "readings");
    if (!cJSON_IsArray(arr)) {
        rc = fxl_fail(ctx, FXL_EINVAL, "readings file '%s': 'readings' must be an array of readings", name);
        goto cleanup;
    }
    n = (size_t)cJSON_GetArraySize(arr);
    if (n < 1 || n > FXL_RECORD_READINGS_MAX) {
        rc = fxl_fail(ctx, FXL_EINVAL, "readings file '%s': 'readings' must hold 1 to %d readings, has %zu",
                      name, FXL_RECORD_READINGS_MAX, n);
        goto cleanup;
    }
    out->names = calloc(n, sizeof *out->names);
    out->entries = calloc(n, sizeof *out->entries);
    if (!out->names || !out->entries) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory reading '%s'", name);
        goto cleanup;
    }
    out->n = n;
    i = 0;
    cJSON_ArrayForEach(r, arr) {
        if ((rc = parse_reading(ctx, name, i, r, &out->names[i], &out->entries[i])) != 0)
            goto cleanup;
        i++;
    }
    for (i = 0; i < n; i++) {
        out->entries[i].field = out->names[i].field;
        out->entries[i].point = out->names[i].point[0] ? out->names[i].point : NULL;
        out->entries[i].detector = out->names[i].detector;
    }
    rc = 0;
cleanup:
    cJSON_Delete(root);
    if (rc != 0)
        fxl_readings_file_release(out);
    return rc;
}

int fxl_readings_read(fxl_ctx *ctx, fxl_readings_file *out, const char *path)
{
    static const fxl_jsondoc_file spec = {
        .max_bytes = FXL_READINGS_FILE_MAX_BYTES,
        .allow_stdin = 1,
        .too_large_code = FXL_EIO,
        .open_fail = "cannot read readings file '%s': %s",
        .read_fail = "cannot read readings file '%s': %s",
        .too_large = "readings file '%s' is larger than %d bytes",
        .no_memory = "out of memory reading '%s'",
    };
    char *buf = NULL;
    size_t len = 0;
    int rc;

    memset(out, 0, sizeof *out);
    if ((rc = fxl_jsondoc_read_file(ctx, &buf, &len, path, &spec)) == 0)
        rc = fxl_readings_parse(ctx, out, path, buf, len);
    free(buf);
    return rc;
}

void fxl_readings_request(fxl_record_request *req, const fxl_readings_file *f)
{
    memset(req, 0, sizeof *req);
    req->mrn = f->patient;
    req->plan = f->plan[0] ? f->plan : NULL;
    req->fraction = f->fraction;
    req->treated_at = f->treated_at[0] ? f->treated_at : NULL;
    req->readings = f->entries;
    req->n_readings = f->n;
}

/* ---- the results as JSON --------------------------------------------------------- */

int fxl_verdict_rank(fxl_verdict v)
{
    switch (v) {
    case FXL_VERDICT_WITHIN: return 0;
    case FXL_VERDICT_NOT_EVALUABLE:
    case FXL_VERDICT_IMPLAUSIBLE: return 1;
    case FXL_VERDICT_OUTSIDE_TOLERANCE: return 2;
    case FXL_VERDICT_OUTSIDE_ACTION: return 3;
    }
    return 1;  /* unknown: never a pass */
}

static void add_num(cJSON *o, const char *key, double v)
{
    if (isfinite(v))
        cJSON_AddNumberToObject(o, key, v);
    else
        cJSON_AddNullToObject(o, key);
}

static void add_id(cJSON *o, const char *key, int64_t id)
{
    if (id)
        cJSON_AddNumberToObject(o, key, (double)id);
    else
        cJSON_AddNullToObject(o, key);
}

static const char *const param_keys[FXL_CF_COUNT] = {
    [FXL_CF_FIELD_SIZE] = "field_size_cm", [FXL_CF_SSD] = "ssd_cm", [FXL_CF_WEDGE] = "wedge_deg",
    [FXL_CF_TRAY] = "tray", [FXL_CF_ANGLE] = "angle_deg", [FXL_CF_THICKNESS] = "thickness_cm",
    [FXL_CF_SDD] = "sdd_cm"};

static cJSON *item_json(const fxl_measurement_result *m)
{
    cJSON *o = cJSON_CreateObject(), *cal, *par, *ref, *cf, *tab, *lv, *reasons;
    int i;

    if (!o)
        return NULL;
    add_id(o, "measurement_id", m->measurement_id);
    cJSON_AddStringToObject(o, "field", m->field);
    cJSON_AddStringToObject(o, "point", m->point);
    cJSON_AddStringToObject(o, "machine", m->machine);
    cJSON_AddStringToObject(o, "beam", m->beam);
    cJSON_AddStringToObject(o, "modality", m->modality);
    add_num(o, "energy", m->energy);
    cJSON_AddStringToObject(o, "detector", m->detector);
    cJSON_AddStringToObject(o, "detector_kind", m->detector_kind);
    cJSON_AddStringToObject(o, "detector_status", m->detector_status);
    add_num(o, "reading", m->reading);
    cJSON_AddStringToObject(o, "reading_unit", m->reading_unit);
    add_num(o, "background", m->background);
    add_num(o, "temp_c", m->temp_c);
    cJSON_AddBoolToObject(o, "temp_entered", m->temp_entered);
    cJSON_AddBoolToObject(o, "temperature_assumed", !m->temp_entered);

    cal = cJSON_AddObjectToObject(o, "calibration");
    add_id(cal, "id", m->calibration_id);
    add_num(cal, "factor_n_cgy_per_unit", m->factor_n);
    add_num(cal, "temp_c", m->temp_cal_c);
    if (m->calibration_valid_until[0])
        cJSON_AddStringToObject(cal, "valid_until", m->calibration_valid_until);
    else
        cJSON_AddNullToObject(cal, "valid_until");
    cJSON_AddBoolToObject(cal, "valid", m->calibration_id && m->calibration_valid);
    add_num(o, "temp_coeff_per_c", m->temp_coeff_per_c);

    par = cJSON_AddObjectToObject(o, "parameters");
    ref = cJSON_AddObjectToObject(o, "reference");
    cf = cJSON_AddObjectToObject(o, "factors");
    tab = cJSON_AddObjectToObject(o, "correction_tables");
    for (i = 0; i < FXL_CF_COUNT; i++) {
        add_num(par, param_keys[i], m->param[i]);
        add_num(ref, param_keys[i], m->ref[i]);
        add_num(cf, fxl_cf_name((fxl_cf_param)i), m->cf[i]);
        add_id(tab, fxl_cf_name((fxl_cf_param)i), m->cf_table_id[i]);
    }
    add_num(cf, "temp", m->cf_temp);

    add_num(o, "corrected_dose_cgy", m->corrected_dose_cgy);
    add_num(o, "expected_dose_cgy", m->expected_dose_cgy);
    cJSON_AddStringToObject(o, "expected_source", m->expected_source);
    add_num(o, "deviation_pct", m->deviation_pct);
    if (m->levels.present && m->threshold_set_id) {
        lv = cJSON_AddObjectToObject(o, "levels");
        add_id(lv, "threshold_set_id", m->threshold_set_id);
        cJSON_AddStringToObject(lv, "name", m->threshold_name);
        cJSON_AddNumberToObject(lv, "version", m->threshold_version);
        add_num(lv, "tolerance_pct", m->levels.tolerance_pct);
        add_num(lv, "action_pct", m->levels.action_pct);
        add_num(lv, "floor_cgy", m->levels.floor_cgy);
    } else {
        cJSON_AddNullToObject(o, "levels");
    }
    cJSON_AddStringToObject(o, "verdict", fxl_verdict_name(m->verdict));
    cJSON_AddStringToObject(o, "verdict_label", fxl_verdict_label(m->verdict));
    cJSON_AddBoolToObject(o, "escalated", m->escalated);
    cJSON_AddBoolToObject(o, "gross", m->gross);
    reasons = cJSON_AddArrayToObject(o, "reasons");
    for (i = 0; reasons && i < m->reasons.n && i < FXL_REASONS_MAX; i++)
        cJSON_AddItemToArray(reasons, cJSON_CreateString(m->reasons.text[i]));
    cJSON_AddStringToObject(o, "guidance", m->gross ? fxl_gross_guidance() : fxl_verdict_guidance(m->verdict));
    add_id(o, "review_item_id", m->review_item_id);
    if (m->supersedes_id) {
        add_id(o, "supersedes_id", m->supersedes_id);
        cJSON_AddStringToObject(o, "amend_reason", m->amend_reason);
    }
    return o;
}

cJSON *fxl_record_result_json(const fxl_record_result *r)
{
    cJSON *o = cJSON_CreateObject(), *pt, *pl, *arr;
    fxl_verdict worst = FXL_VERDICT_WITHIN;
    size_t i;

    if (!o)
        return NULL;
    add_id(o, "fraction_id", r->fraction_id);
    cJSON_AddNumberToObject(o, "fraction", r->fraction_number);
    cJSON_AddNumberToObject(o, "plan_fractions", r->plan_fractions);
    pt = cJSON_AddObjectToObject(o, "patient");
    cJSON_AddStringToObject(pt, "mrn", r->mrn);
    cJSON_AddStringToObject(pt, "name", r->patient_name);
    pl = cJSON_AddObjectToObject(o, "plan");
    cJSON_AddStringToObject(pl, "label", r->plan);
    cJSON_AddStringToObject(pl, "site", r->site);
    cJSON_AddStringToObject(pl, "technique", r->technique);
    cJSON_AddStringToObject(o, "treated_at", r->treated_at);
    cJSON_AddStringToObject(o, "recorded_at", r->recorded_at);
    cJSON_AddStringToObject(o, "recorded_by", r->recorded_by);
    arr = cJSON_CreateArray();
    for (i = 0; i < r->n; i++) {
        if (fxl_verdict_rank(r->items[i].verdict) > fxl_verdict_rank(worst) ||
            (r->items[i].verdict == FXL_VERDICT_IMPLAUSIBLE && worst == FXL_VERDICT_NOT_EVALUABLE))
            worst = r->items[i].verdict;
        cJSON_AddItemToArray(arr, item_json(&r->items[i]));
    }
    cJSON_AddStringToObject(o, "worst_verdict", fxl_verdict_name(worst));
    cJSON_AddItemToObject(o, "results", arr);
    return o;
}
