/* The measurement record for export: every column of the measurements
 * table, the context a reader needs (patient, plan, fraction, field,
 * detector, who recorded), the amendment links and every review event on the
 * row with who made it. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/export.h"
#include "store/lookup.h"
#include "store/stmt.h"

#define MAX_COLS 96

/* The shortest of %.15g, %.16g, %.17g that reads back to the same double,
 * so a reading typed as 12.774 is exported as 12.774. */
static void real_text(char *out, size_t n, double v)
{
    int p;

    for (p = 15; p <= 17; p++) {
        snprintf(out, n, "%.*g", p, v);
        if (strtod(out, NULL) == v)
            return;
    }
}

static int is_json_column(const char *name)
{
    return strcmp(name, "reasons") == 0 || strcmp(name, "review_events") == 0;
}

int fxl_export_measurements(fxl_ctx *ctx, const fxl_export_filter *f, fxl_export_header_cb hcb,
                            fxl_export_row_cb rcb, void *arg)
{
    fxl_stmt s = FXL_STMT_INIT;
    int64_t patient_id = 0, detector_id = 0;
    const char *names[MAX_COLS], *text[MAX_COLS];
    fxl_export_kind kind[MAX_COLS];
    double real[MAX_COLS];
    char (*buf)[32] = NULL;
    fxl_export_row row;
    int rc, ncols, i;

    if (f && f->mrn) {
        rc = fxl_lookup_id(ctx, &patient_id, "SELECT id FROM patients WHERE mrn = :mrn", ":mrn",
                           f->mrn);
        if (rc == 0)
            return fxl_fail(ctx, FXL_ENOTFOUND, "unknown patient '%s'", f->mrn);
        if (rc < 0)
            return rc;
    }
    if (f && f->detector) {
        rc = fxl_lookup_id(ctx, &detector_id, "SELECT id FROM detectors WHERE serial = :serial",
                           ":serial", f->detector);
        if (rc == 0)
            return fxl_fail(ctx, FXL_ENOTFOUND, "unknown detector '%s'", f->detector);
        if (rc < 0)
            return rc;
    }
    rc = fxl_stmt_prepare(&s, ctx,
        "SELECT m.*, "
        "  pt.mrn AS patient_mrn, pt.family_name AS patient_family_name, "
        "  pt.given_name AS patient_given_name, p.label AS plan_label, p.site AS plan_site, "
        "  p.technique AS plan_technique, fr.number AS fraction_number, "
        "  fr.treated_at AS treated_at, fl.name AS field_name, fl.point AS field_point, "
        "  d.serial AS detector_serial, d.label AS detector_label, "
        "  u.login AS recorded_by_login, u.full_name AS recorded_by_name, "
        "  (SELECT s.id FROM measurements s WHERE s.supersedes_id = m.id) AS superseded_by, "
        "  NOT EXISTS (SELECT 1 FROM measurements s WHERE s.supersedes_id = m.id) AS current, "
        "  (SELECT json_group_array(json_object('item_id', x.item_id, 'rule', x.rule, "
        "       'event_id', x.id, 'kind', x.kind, 'at', x.created_at, 'login', x.login, "
        "       'printed_name', x.full_name, 'disposition', x.disposition, "
        "       'comment', x.comment)) "
        "   FROM (SELECT e.id, e.item_id, ri.rule, e.kind, e.created_at, eu.login, "
        "                eu.full_name, e.disposition, e.comment "
        "         FROM review_items ri JOIN review_events e ON e.item_id = ri.id "
        "         JOIN users eu ON eu.id = e.user_id "
        "         WHERE ri.measurement_id = m.id ORDER BY e.id) x) AS review_events "
        "FROM measurements m JOIN fractions fr ON fr.id = m.fraction_id "
        "JOIN plans p ON p.id = fr.plan_id JOIN patients pt ON pt.id = p.patient_id "
        "JOIN fields fl ON fl.id = m.field_id JOIN detectors d ON d.id = m.detector_id "
        "JOIN users u ON u.id = m.user_id "
        "WHERE (:from IS NULL OR fr.treated_at >= :from) AND (:to IS NULL OR fr.treated_at < :to) "
        "  AND (:pid = 0 OR pt.id = :pid) AND (:did = 0 OR m.detector_id = :did) "
        "ORDER BY fr.treated_at, fr.number, m.id");
    if (rc != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":from", f ? f->from : NULL);
    fxl_stmt_bind_text(&s, ":to", f ? f->to : NULL);
    fxl_stmt_bind_int(&s, ":pid", patient_id);
    fxl_stmt_bind_int(&s, ":did", detector_id);
    ncols = sqlite3_column_count(s.st);
    if (ncols > MAX_COLS) {
        rc = fxl_fail(ctx, FXL_EINVAL, "internal: export has %d columns, at most %d", ncols,
                      MAX_COLS);
        goto cleanup;
    }
    if (!(buf = calloc((size_t)ncols, sizeof *buf))) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory exporting measurements");
        goto cleanup;
    }
    for (i = 0; i < ncols; i++)
        names[i] = sqlite3_column_name(s.st, i);
    if (hcb && (rc = hcb(arg, (size_t)ncols, names)) != 0)
        goto cleanup;
    row.ncols = (size_t)ncols;
    row.text = text;
    row.kind = kind;
    row.real = real;
    while ((rc = fxl_stmt_step(&s)) == 1) {
        for (i = 0; i < ncols; i++) {
            real[i] = NAN;
            switch (sqlite3_column_type(s.st, i)) {
            case SQLITE_NULL:
                kind[i] = FXL_XV_NULL;
                text[i] = "";
                break;
            case SQLITE_INTEGER:
                kind[i] = FXL_XV_INTEGER;
                snprintf(buf[i], sizeof buf[i], "%lld", (long long)sqlite3_column_int64(s.st, i));
                text[i] = buf[i];
                break;
            case SQLITE_FLOAT:
                kind[i] = FXL_XV_REAL;
                real[i] = sqlite3_column_double(s.st, i);
                real_text(buf[i], sizeof buf[i], real[i]);
                text[i] = buf[i];
                break;
            default:
                kind[i] = is_json_column(names[i]) ? FXL_XV_JSON : FXL_XV_TEXT;
                text[i] = fxl_stmt_text(&s, i);
                break;
            }
        }
        if ((rc = rcb(arg, &row)) != 0)
            goto cleanup;
    }
cleanup:
    free(buf);
    fxl_stmt_finalize(&s);
    return rc;
}
