/* Writing the measurement export: RFC 4180 CSV and one JSON document, from
 * the rows that src/store/export_query.c streams. */
#include <cjson/cJSON.h>
#include <stdio.h>
#include <string.h>

#include "fxl/export.h"

typedef struct xw {
    fxl_ctx *ctx;
    FILE *out;
    fxl_export_format format;
    size_t rows;
    size_t ncols;
    const char *const *names;
    int failed;
} xw;

/* RFC 4180: a field holding a comma, a double quote, CR or LF is enclosed
 * in double quotes and its quotes doubled; records end with CRLF. */
static void csv_field(FILE *out, const char *v, int first)
{
    if (!first)
        fputc(',', out);
    if (strpbrk(v, ",\"\r\n") == NULL) {
        fputs(v, out);
        return;
    }
    fputc('"', out);
    for (; *v; v++) {
        if (*v == '"')
            fputc('"', out);
        fputc(*v, out);
    }
    fputc('"', out);
}

static int on_header(void *arg, size_t ncols, const char *const *names)
{
    xw *w = arg;
    size_t i;

    w->ncols = ncols;
    w->names = names;
    if (w->format == FXL_EXPORT_CSV) {
        for (i = 0; i < ncols; i++)
            csv_field(w->out, names[i], i == 0);
        fputs("\r\n", w->out);
    } else {
        fputs(",\n  \"columns\": [", w->out);
        for (i = 0; i < ncols; i++) {
            cJSON *s = cJSON_CreateString(names[i]);
            char *t = s ? cJSON_PrintUnformatted(s) : NULL;
            fprintf(w->out, "%s%s", i ? ", " : "", t ? t : "\"\"");
            cJSON_free(t);
            cJSON_Delete(s);
        }
        fputs("],\n  \"measurements\": [", w->out);
    }
    return ferror(w->out) ? FXL_EIO : 0;
}

static int on_row(void *arg, const fxl_export_row *r)
{
    xw *w = arg;
    cJSON *o = NULL;
    char *t = NULL;
    size_t i;
    int rc = 0;

    if (w->format == FXL_EXPORT_CSV) {
        for (i = 0; i < r->ncols; i++)
            csv_field(w->out, r->text[i], i == 0);
        fputs("\r\n", w->out);
        goto cleanup;
    }
    if (!(o = cJSON_CreateObject())) {
        rc = fxl_fail(w->ctx, FXL_EIO, "out of memory exporting measurements");
        goto cleanup;
    }
    for (i = 0; i < r->ncols; i++) {
        cJSON *v = NULL;
        switch (r->kind[i]) {
        case FXL_XV_NULL:
            v = cJSON_CreateNull();
            break;
        case FXL_XV_INTEGER:
        case FXL_XV_REAL:
            /* the text form is the shortest that reads back exactly; cJSON
             * prints a number the same way (%.15g, else %.17g) */
            v = cJSON_CreateRaw(r->text[i]);
            break;
        case FXL_XV_JSON:
            v = cJSON_Parse(r->text[i]);
            if (!v)
                v = cJSON_CreateString(r->text[i]);
            break;
        default:
            v = cJSON_CreateString(r->text[i]);
            break;
        }
        if (!v) {
            rc = fxl_fail(w->ctx, FXL_EIO, "out of memory exporting measurements");
            goto cleanup;
        }
        cJSON_AddItemToObject(o, w->names[i], v);
    }
    if (!(t = cJSON_PrintUnformatted(o))) {
        rc = fxl_fail(w->ctx, FXL_EIO, "out of memory exporting measurements");
        goto cleanup;
    }
    fprintf(w->out, "%s\n    %s", w->rows ? "," : "", t);
cleanup:
    w->rows++;
    cJSON_free(t);
    cJSON_Delete(o);
    if (rc == 0 && ferror(w->out))
        rc = fxl_fail(w->ctx, FXL_EIO, "could not write the export");
    return rc;
}

static void json_member(FILE *out, const char *key, const char *value)
{
    cJSON *s = value ? cJSON_CreateString(value) : cJSON_CreateNull();
    char *t = s ? cJSON_PrintUnformatted(s) : NULL;

    fprintf(out, ",\n  \"%s\": %s", key, t ? t : "null");
    cJSON_free(t);
    cJSON_Delete(s);
}

int fxl_export_write(fxl_ctx *ctx, FILE *out, fxl_export_format format,
                     const fxl_export_filter *f, const char *exported_at, size_t *rows_out)
{
    xw w;
    int rc;

    memset(&w, 0, sizeof w);
    w.ctx = ctx;
    w.out = out;
    w.format = format;
    if (format == FXL_EXPORT_JSON) {
        fputs("{\n  \"format\": \"fxledger-measurements\",\n  \"version\": 1", out);
        json_member(out, "exported_at", exported_at);
        json_member(out, "from_utc", f ? f->from : NULL);
        json_member(out, "to_utc", f ? f->to : NULL);
        json_member(out, "patient", f ? f->mrn : NULL);
        json_member(out, "detector", f ? f->detector : NULL);
    }
    rc = fxl_export_measurements(ctx, f, on_header, on_row, &w);
    if (rc == 0 && format == FXL_EXPORT_JSON)
        fprintf(out, "%s],\n  \"rows\": %zu\n}\n", w.rows ? "\n  " : "", w.rows);
    if (rc == 0 && (fflush(out) != 0 || ferror(out)))
        rc = fxl_fail(ctx, FXL_EIO, "could not write the export");
    if (rows_out)
        *rows_out = w.rows;
    return rc;
}
