/* Reading correction-factor tables from our JSON file format
 * (docs/format-corrections.md): strict shape, every value checked, and the
 * line and column where malformed or truncated JSON stops. No database. */
#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/corrections.h"
#include "fxl/text.h"
#include "io/json_doc.h"

#define FORMAT_NAME "fxledger-corrections"
#define FORMAT_VERSION 1
#define REQ FXL_JSONDOC_REQUIRED

/* Parameter names and the x each accepts. Field size is the equivalent
 * square of the field (Sterling); wedge the nominal angle (0 = open); tray
 * 0 or 1; angle the beam incidence on the detector. */
static const struct {
    const char *name;
    double lo, hi;
    const char *unit;
} params[] = {
    {"field_size", 1, 50, "cm"},
    {"ssd", 50, 200, "cm"},
    {"wedge", 0, 60, "deg"},
    {"tray", 0, 1, "0/1"},
    {"angle", 0, 90, "deg"},
    {"thickness", 1, 60, "cm"},   /* exit: patient (phantom) thickness */
    {"sdd", 50, 260, "cm"},       /* exit: source-to-detector distance */
};

int fxl_corr_param_range(const char *parameter, double *lo, double *hi, const char **unit)
{
    size_t i;

    for (i = 0; parameter && i < sizeof params / sizeof params[0]; i++) {
        if (strcmp(params[i].name, parameter) == 0) {
            if (lo)
                *lo = params[i].lo;
            if (hi)
                *hi = params[i].hi;
            if (unit)
                *unit = params[i].unit;
            return 0;
        }
    }
    return FXL_EINVAL;
}

void fxl_corr_file_release(fxl_corr_file *file)
{
    size_t i;

    if (!file)
        return;
    for (i = 0; i < file->n_tables; i++)
        free(file->tables[i].points);
    free(file->tables);
    file->tables = NULL;
    file->n_tables = 0;
}

static int parse_points(fxl_ctx *ctx, const char *name, const char *where, const cJSON *arr,
                        fxl_corr_table_spec *t)
{
    static const char *const point_keys[] = {"x", "factor", NULL};
    const fxl_jsondoc d = {ctx, "file", name};
    double lo = 0, hi = 0;
    const char *unit = "";
    const cJSON *p;
    char pwhere[96];
    size_t i = 0, n;
    int rc;

    if (!cJSON_IsArray(arr))
        return fxl_fail(ctx, FXL_EINVAL, "file '%s': %s: 'points' must be an array of {\"x\", \"factor\"}",
                        name, where);
    n = (size_t)cJSON_GetArraySize(arr);
    if (n < 1 || n > FXL_CORR_POINTS_MAX)
        return fxl_fail(ctx, FXL_EINVAL, "file '%s': %s: 'points' must hold 1 to %d points, has %zu",
                        name, where, FXL_CORR_POINTS_MAX, n);
    fxl_corr_param_range(t->parameter, &lo, &hi, &unit);
    if (!(t->points = calloc(n, sizeof *t->points)))
        return fxl_fail(ctx, FXL_EIO, "out of memory reading '%s'", name);
    t->n_points = n;
    cJSON_ArrayForEach(p, arr) {
        const cJSON *x, *f;
        snprintf(pwhere, sizeof pwhere, "%s.points[%zu]", where, i);
        if (!cJSON_IsObject(p))
            return fxl_fail(ctx, FXL_EINVAL, "file '%s': %s: must be an object {\"x\": ..., \"factor\": ...}",
                            name, pwhere);
        if ((rc = fxl_jsondoc_check_keys(&d, pwhere, p, point_keys)) != 0)
            return rc;
        x = cJSON_GetObjectItemCaseSensitive(p, "x");
        f = cJSON_GetObjectItemCaseSensitive(p, "factor");
        if (!cJSON_IsNumber(x) || !isfinite(x->valuedouble))
            return fxl_fail(ctx, FXL_EINVAL, "file '%s': %s: 'x' must be a number (%g to %g %s)",
                            name, pwhere, lo, hi, unit);
        if (!cJSON_IsNumber(f) || !isfinite(f->valuedouble))
            return fxl_fail(ctx, FXL_EINVAL, "file '%s': %s: 'factor' must be a number (> %g and < %g)",
                            name, pwhere, FXL_CORR_FACTOR_MIN, FXL_CORR_FACTOR_MAX);
        if (x->valuedouble < lo || x->valuedouble > hi)
            return fxl_fail(ctx, FXL_EINVAL, "file '%s': %s: %s x '%g' is out of range: must be %g to %g %s",
                            name, pwhere, t->parameter, x->valuedouble, lo, hi, unit);
        if (strcmp(t->parameter, "tray") == 0 && x->valuedouble != 0 && x->valuedouble != 1)
            return fxl_fail(ctx, FXL_EINVAL, "file '%s': %s: tray x '%g' must be 0 (no tray) or 1 (tray)",
                            name, pwhere, x->valuedouble);
        if (!(f->valuedouble > FXL_CORR_FACTOR_MIN && f->valuedouble < FXL_CORR_FACTOR_MAX))
            return fxl_fail(ctx, FXL_EINVAL, "file '%s': %s: factor '%g' is out of range: must be > %g and < %g",
                            name, pwhere, f->valuedouble, FXL_CORR_FACTOR_MIN, FXL_CORR_FACTOR_MAX);
        if (i > 0 && !(x->valuedouble > t->points[i - 1].x))
            return fxl_fail(ctx, FXL_EINVAL,
                            "file '%s': %s: x '%g' is not greater than the previous x '%g' (x must increase strictly)",
                            name, pwhere, x->valuedouble, t->points[i - 1].x);
        t->points[i].x = x->valuedouble;
        t->points[i].factor = f->valuedouble;
        i++;
    }
    return 0;
}

static int parse_table(fxl_ctx *ctx, const char *name, size_t index, const cJSON *obj,
                       const char *file_source, fxl_corr_table_spec *t)
{
    static const char *const table_keys[] = {"machine", "beam", "point", "parameter",
                                             "effective_from", "source", "points", NULL};
    const fxl_jsondoc d = {ctx, "file", name};
    char where[32], date[64];
    int rc;

    snprintf(where, sizeof where, "tables[%zu]", index);
    if (!cJSON_IsObject(obj))
        return fxl_fail(ctx, FXL_EINVAL, "file '%s': %s: must be an object", name, where);
    if ((rc = fxl_jsondoc_check_keys(&d, where, obj, table_keys)) != 0 ||
        (rc = fxl_jsondoc_get_string(&d, t->machine, sizeof t->machine, where, obj, "machine", REQ, 64)) != 0 ||
        (rc = fxl_jsondoc_get_string(&d, t->beam, sizeof t->beam, where, obj, "beam", REQ, 32)) != 0 ||
        (rc = fxl_jsondoc_get_string(&d, t->point, sizeof t->point, where, obj, "point", 0, 15)) != 0 ||
        (rc = fxl_jsondoc_get_string(&d, t->parameter, sizeof t->parameter, where, obj, "parameter", REQ,
                                     11)) != 0 ||
        (rc = fxl_jsondoc_get_string(&d, date, sizeof date, where, obj, "effective_from", REQ, 32)) != 0 ||
        (rc = fxl_jsondoc_get_string(&d, t->source, sizeof t->source, where, obj, "source", 0, 200)) != 0)
        return rc;
    if (!t->point[0])
        snprintf(t->point, sizeof t->point, "entrance");
    if (strcmp(t->point, "entrance") != 0 && strcmp(t->point, "exit") != 0)
        return fxl_fail(ctx, FXL_EINVAL, "file '%s': %s: point '%s' must be 'entrance' or 'exit'",
                        name, where, t->point);
    if (fxl_corr_param_range(t->parameter, NULL, NULL, NULL) != 0)
        return fxl_fail(ctx, FXL_EINVAL,
                        "file '%s': %s: parameter '%s' must be one of field_size, ssd, wedge, tray, "
                        "angle (entrance) or field_size, thickness, sdd, wedge, tray, angle (exit)",
                        name, where, t->parameter);
    /* An exit diode is corrected against the source-to-detector distance,
     * not the SSD; thickness and distance mean nothing at entrance. */
    if (strcmp(t->point, "exit") == 0 && strcmp(t->parameter, "ssd") == 0)
        return fxl_fail(ctx, FXL_EINVAL,
                        "file '%s': %s: an exit table has no 'ssd' parameter: use 'sdd' "
                        "(source-to-detector distance) and 'thickness'",
                        name, where);
    if (strcmp(t->point, "entrance") == 0 &&
        (strcmp(t->parameter, "thickness") == 0 || strcmp(t->parameter, "sdd") == 0))
        return fxl_fail(ctx, FXL_EINVAL,
                        "file '%s': %s: parameter '%s' is for exit tables: give \"point\": \"exit\"",
                        name, where, t->parameter);
    if (fxl_time_normalize(t->effective_from, date, 0) != 0)
        return fxl_fail(ctx, FXL_EINVAL,
                        "file '%s': %s: effective_from '%s' is not a valid date (YYYY-MM-DD or YYYY-MM-DDTHH:MM:SSZ)",
                        name, where, date);
    if (!t->source[0] && file_source)
        snprintf(t->source, sizeof t->source, "%s", file_source);
    return parse_points(ctx, name, where, cJSON_GetObjectItemCaseSensitive(obj, "points"), t);
}

int fxl_corr_file_parse(fxl_ctx *ctx, fxl_corr_file *out, const char *name, const char *text,
                        size_t len)
{
    static const char *const top_keys[] = {"format", "version", "detector", "source", "tables", NULL};
    const fxl_jsondoc d = {ctx, "file", name};
    cJSON *root = NULL;
    const cJSON *tables, *t;
    char source[201];
    size_t i = 0, n;
    int rc;

    memset(out, 0, sizeof *out);
    if ((rc = fxl_jsondoc_parse(&d, &root, text, len, FXL_JSONDOC_NO_TRAILING | FXL_JSONDOC_CUT_AT_QUOTE)) != 0)
        goto cleanup;
    if (!cJSON_IsObject(root)) {
        rc = fxl_fail(ctx, FXL_EINVAL, "file '%s': the document must be a JSON object", name);
        goto cleanup;
    }
    if ((rc = fxl_jsondoc_check_keys(&d, "top level", root, top_keys)) != 0 ||
        (rc = fxl_jsondoc_check_format(&d, "top level", root, REQ, FORMAT_NAME, FORMAT_VERSION)) != 0 ||
        (rc = fxl_jsondoc_get_string(&d, out->detector, sizeof out->detector, "top level", root, "detector",
                                     REQ, 64)) != 0 ||
        (rc = fxl_jsondoc_get_string(&d, source, sizeof source, "top level", root, "source", 0, 200)) != 0)
        goto cleanup;
    tables = cJSON_GetObjectItemCaseSensitive(root, "tables");
    if (!cJSON_IsArray(tables)) {
        rc = fxl_fail(ctx, FXL_EINVAL, "file '%s': 'tables' must be an array of tables", name);
        goto cleanup;
    }
    n = (size_t)cJSON_GetArraySize(tables);
    if (n < 1 || n > FXL_CORR_TABLES_MAX) {
        rc = fxl_fail(ctx, FXL_EINVAL, "file '%s': 'tables' must hold 1 to %d tables, has %zu", name,
                      FXL_CORR_TABLES_MAX, n);
        goto cleanup;
    }
    if (!(out->tables = calloc(n, sizeof *out->tables))) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory reading '%s'", name);
        goto cleanup;
    }
    out->n_tables = n;
    cJSON_ArrayForEach(t, tables) {
        size_t j;
        if ((rc = parse_table(ctx, name, i, t, source[0] ? source : NULL, &out->tables[i])) != 0)
            goto cleanup;
        /* Two versions of one table with the same date would be ambiguous. */
        for (j = 0; j < i; j++) {
            const fxl_corr_table_spec *a = &out->tables[j], *b = &out->tables[i];
            if (strcmp(a->machine, b->machine) == 0 && strcmp(a->beam, b->beam) == 0 &&
                strcmp(a->point, b->point) == 0 && strcmp(a->parameter, b->parameter) == 0 &&
                strcmp(a->effective_from, b->effective_from) == 0) {
                rc = fxl_fail(ctx, FXL_EINVAL,
                              "file '%s': tables[%zu] repeats tables[%zu] (%s %s %s %s from %s)", name,
                              i, j, b->machine, b->beam, b->point, b->parameter, b->effective_from);
                goto cleanup;
            }
        }
        i++;
    }
    rc = 0;
cleanup:
    cJSON_Delete(root);
    if (rc != 0)
        fxl_corr_file_release(out);
    return rc;
}

int fxl_corr_file_read(fxl_ctx *ctx, fxl_corr_file *out, const char *path)
{
    static const fxl_jsondoc_file spec = {
        .max_bytes = 1024 * 1024,
        .too_large_code = FXL_EINVAL,
        .open_fail = "cannot read file '%s': %s",
        .read_fail = "cannot read file '%s': %s",
        .too_large = "file '%s' is larger than %d bytes",
        .no_memory = "out of memory reading '%s'",
        .empty = "file '%s' is empty",
    };
    char *buf = NULL;
    size_t len = 0;
    int rc;

    memset(out, 0, sizeof *out);
    if ((rc = fxl_jsondoc_read_file(ctx, &buf, &len, path, &spec)) == 0)
        rc = fxl_corr_file_parse(ctx, out, path, buf, len);
    free(buf);
    return rc;
}
