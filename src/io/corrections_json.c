/* Reading correction-factor tables from our JSON file format
 * (docs/format-corrections.md): strict shape, every value checked, and the
 * line and column where malformed or truncated JSON stops. No database. */
#include <cjson/cJSON.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/corrections.h"
#include "fxl/text.h"

#define FORMAT_NAME "fxledger-corrections"
#define FORMAT_VERSION 1
#define FILE_MAX_BYTES (1024 * 1024)

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

/* Line and column (from 1) of byte `pos` in text. */
static void line_col(const char *text, size_t pos, int *line, int *col)
{
    size_t i;

    *line = 1;
    *col = 1;
    for (i = 0; i < pos; i++) {
        if (text[i] == '\n') {
            (*line)++;
            *col = 1;
        } else {
            (*col)++;
        }
    }
}

/* Where malformed JSON stops. cJSON points at the last byte both when the
 * text ends too early and when that last byte is wrong; parsing again with a
 * sentinel appended tells the two apart: a truncated document now fails at or
 * after the sentinel. */
static int syntax_error(fxl_ctx *ctx, const char *name, const char *text, size_t len)
{
    char *padded = malloc(len + 3);
    const char *err = NULL;
    size_t pos = len;
    cJSON *again;
    int line, col;

    if (!padded)
        return fxl_fail(ctx, FXL_EIO, "out of memory reading '%s'", name);
    memcpy(padded, text, len);
    memcpy(padded + len, " @", 3);
    again = cJSON_ParseWithLengthOpts(padded, len + 2, &err, 0);
    cJSON_Delete(again);
    if (!err)
        err = cJSON_GetErrorPtr();
    if (err && err >= padded && err <= padded + len + 2)
        pos = (size_t)(err - padded);
    free(padded);
    /* A string opened just before the error and never closed: cut mid-string. */
    if (pos < len && pos > 0 && text[pos - 1] == '"' && !memchr(text + pos, '"', len - pos))
        pos = len;
    if (pos >= len) {
        line_col(text, len, &line, &col);
        return fxl_fail(ctx, FXL_EINVAL,
                        "file '%s': malformed JSON: the file ends too early at line %d, column %d (truncated?)",
                        name, line, col);
    }
    line_col(text, pos, &line, &col);
    return fxl_fail(ctx, FXL_EINVAL, "file '%s': malformed JSON at line %d, column %d near '%.*s'",
                    name, line, col, (int)(len - pos < 12 ? len - pos : 12), text + pos);
}

/* Refuses keys other than the allowed ones, and duplicated keys. */
static int check_keys(fxl_ctx *ctx, const char *name, const char *where, const cJSON *obj,
                      const char *const *allowed)
{
    const cJSON *a, *b;
    const char *const *k;

    for (a = obj->child; a; a = a->next) {
        int ok = 0;
        for (k = allowed; *k; k++)
            if (strcmp(a->string, *k) == 0)
                ok = 1;
        if (!ok)
            return fxl_fail(ctx, FXL_EINVAL, "file '%s': %s: unknown key '%s'", name, where, a->string);
        for (b = a->next; b; b = b->next)
            if (strcmp(a->string, b->string) == 0)
                return fxl_fail(ctx, FXL_EINVAL, "file '%s': %s: key '%s' appears twice", name, where,
                                a->string);
    }
    return 0;
}

/* A required (or, with `required` 0, optional) string member of bounded
 * length into buf; "" when optional and absent. */
static int get_string(fxl_ctx *ctx, const char *name, const char *where, const cJSON *obj,
                      const char *key, int required, char *buf, size_t bufsize, size_t max_len)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(obj, key);
    size_t len;

    buf[0] = '\0';
    if (!v) {
        if (required)
            return fxl_fail(ctx, FXL_EINVAL, "file '%s': %s: '%s' is missing", name, where, key);
        return 0;
    }
    if (!cJSON_IsString(v) || !v->valuestring)
        return fxl_fail(ctx, FXL_EINVAL, "file '%s': %s: '%s' must be a string", name, where, key);
    len = strlen(v->valuestring);
    if ((required && len == 0) || len > max_len || len >= bufsize)
        return fxl_fail(ctx, FXL_EINVAL, "file '%s': %s: '%s' must be %d to %zu characters", name,
                        where, key, required ? 1 : 0, max_len);
    if (fxl_text_control_at(v->valuestring) >= 0)
        return fxl_fail(ctx, FXL_EINVAL, "file '%s': %s: '%s' must not contain control characters", name,
                        where, key);
    memcpy(buf, v->valuestring, len + 1);
    return 0;
}

static int parse_points(fxl_ctx *ctx, const char *name, const char *where, const cJSON *arr,
                        fxl_corr_table_spec *t)
{
    static const char *const point_keys[] = {"x", "factor", NULL};
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
        if ((rc = check_keys(ctx, name, pwhere, p, point_keys)) != 0)
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
    static const char *const table_keys[] = {"machine", "beam", "parameter", "effective_from",
                                             "source", "points", NULL};
    char where[32], date[64];
    int rc;

    snprintf(where, sizeof where, "tables[%zu]", index);
    if (!cJSON_IsObject(obj))
        return fxl_fail(ctx, FXL_EINVAL, "file '%s': %s: must be an object", name, where);
    if ((rc = check_keys(ctx, name, where, obj, table_keys)) != 0 ||
        (rc = get_string(ctx, name, where, obj, "machine", 1, t->machine, sizeof t->machine, 64)) != 0 ||
        (rc = get_string(ctx, name, where, obj, "beam", 1, t->beam, sizeof t->beam, 32)) != 0 ||
        (rc = get_string(ctx, name, where, obj, "parameter", 1, t->parameter, sizeof t->parameter, 11)) != 0 ||
        (rc = get_string(ctx, name, where, obj, "effective_from", 1, date, sizeof date, 32)) != 0 ||
        (rc = get_string(ctx, name, where, obj, "source", 0, t->source, sizeof t->source, 200)) != 0)
        return rc;
    if (fxl_corr_param_range(t->parameter, NULL, NULL, NULL) != 0)
        return fxl_fail(ctx, FXL_EINVAL,
                        "file '%s': %s: parameter '%s' must be one of field_size, ssd, wedge, tray, angle",
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
    const char *end = NULL;
    cJSON *root = NULL;
    const cJSON *v, *tables, *t;
    char format[64], source[201];
    size_t i = 0, n, pos;
    int rc, line, col;

    memset(out, 0, sizeof *out);
    /* Text must be UTF-8, and "\u0000" would silently cut a name short. */
    if ((pos = (size_t)fxl_utf8_invalid_at(text, len)) != (size_t)-1 ||
        (pos = (size_t)fxl_json_nul_escape_at(text, len)) != (size_t)-1) {
        line_col(text, pos, &line, &col);
        rc = fxl_fail(ctx, FXL_EINVAL, "file '%s' is not valid: %s at line %d, column %d", name,
                      text[pos] == '\\' ? "an escaped NUL character (\\u0000)" : "text that is not UTF-8",
                      line, col);
        goto cleanup;
    }
    root = cJSON_ParseWithLengthOpts(text, len, &end, 0);
    if (!root) {
        rc = syntax_error(ctx, name, text, len);
        goto cleanup;
    }
    /* Anything but white space after the document is an error too. */
    for (pos = end ? (size_t)(end - text) : len; pos < len; pos++) {
        if (!(text[pos] == ' ' || text[pos] == '\t' || text[pos] == '\r' || text[pos] == '\n' ||
              text[pos] == '\0')) {
            line_col(text, pos, &line, &col);
            rc = fxl_fail(ctx, FXL_EINVAL,
                          "file '%s': malformed JSON: unexpected text after the document at line %d, column %d",
                          name, line, col);
            goto cleanup;
        }
    }
    if (!cJSON_IsObject(root)) {
        rc = fxl_fail(ctx, FXL_EINVAL, "file '%s': the document must be a JSON object", name);
        goto cleanup;
    }
    if ((rc = check_keys(ctx, name, "top level", root, top_keys)) != 0 ||
        (rc = get_string(ctx, name, "top level", root, "format", 1, format, sizeof format, 63)) != 0)
        goto cleanup;
    if (strcmp(format, FORMAT_NAME) != 0) {
        rc = fxl_fail(ctx, FXL_EINVAL, "file '%s': 'format' is '%s', expected '%s'", name, format,
                      FORMAT_NAME);
        goto cleanup;
    }
    v = cJSON_GetObjectItemCaseSensitive(root, "version");
    if (!cJSON_IsNumber(v) || v->valuedouble != FORMAT_VERSION) {
        rc = fxl_fail(ctx, FXL_EINVAL, "file '%s': 'version' must be %d", name, FORMAT_VERSION);
        goto cleanup;
    }
    if ((rc = get_string(ctx, name, "top level", root, "detector", 1, out->detector,
                         sizeof out->detector, 64)) != 0 ||
        (rc = get_string(ctx, name, "top level", root, "source", 0, source, sizeof source, 200)) != 0)
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
                strcmp(a->parameter, b->parameter) == 0 &&
                strcmp(a->effective_from, b->effective_from) == 0) {
                rc = fxl_fail(ctx, FXL_EINVAL,
                              "file '%s': tables[%zu] repeats tables[%zu] (%s %s %s from %s)", name, i,
                              j, b->machine, b->beam, b->parameter, b->effective_from);
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
    FILE *f = NULL;
    char *buf = NULL;
    size_t len = 0;
    int rc;

    memset(out, 0, sizeof *out);
    if (!(f = fopen(path, "rb"))) {
        rc = fxl_fail(ctx, FXL_EIO, "cannot read file '%s': %s", path, strerror(errno));
        goto cleanup;
    }
    if (!(buf = malloc(FILE_MAX_BYTES + 1))) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory reading '%s'", path);
        goto cleanup;
    }
    len = fread(buf, 1, FILE_MAX_BYTES + 1, f);
    if (ferror(f)) {
        rc = fxl_fail(ctx, FXL_EIO, "cannot read file '%s'", path);
        goto cleanup;
    }
    if (len > FILE_MAX_BYTES) {
        rc = fxl_fail(ctx, FXL_EINVAL, "file '%s' is larger than %d bytes", path, FILE_MAX_BYTES);
        goto cleanup;
    }
    if (len == 0) {
        rc = fxl_fail(ctx, FXL_EINVAL, "file '%s' is empty", path);
        goto cleanup;
    }
    buf[len] = '\0';
    rc = fxl_corr_file_parse(ctx, out, path, buf, len);
cleanup:
    if (f)
        fclose(f);
    free(buf);
    return rc;
}
