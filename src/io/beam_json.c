/* Beam data of the expected-dose model from our JSON format
 * (docs/format-beam-data.md): strict shape, every value checked, tables
 * ordered, output factors normalised; and a model result as JSON for storage
 * with the field. No database. */
#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/beam_json.h"
#include "fxl/beam_model.h"
#include "fxl/fxl.h"
#include "io/json_doc.h"

/* Output factors must be 1 at the reference field to within this: a table
 * normalised elsewhere would scale every expected dose. */
#define NORM_TOLERANCE 0.01

typedef struct parser {
    fxl_ctx *ctx;
    const char *name;    /* file name for messages */
    fxl_jsondoc doc;     /* the same, for the shared helpers */
} parser;

/* ---- JSON helpers ------------------------------------------------------- */

static int check_keys(const parser *p, const char *where, const cJSON *obj, const char *const *allowed)
{
    return fxl_jsondoc_check_keys(&p->doc, where, obj, allowed);
}

/* A string member of up to bufsize - 1 characters (JSON null: absent). */
static int get_string(const parser *p, const char *where, const cJSON *obj, const char *key, int required,
                      char *buf, size_t bufsize)
{
    return fxl_jsondoc_get_string(&p->doc, buf, bufsize, where, obj, key,
                                  FXL_JSONDOC_NULL_ABSENT | (required ? FXL_JSONDOC_REQUIRED : 0), bufsize - 1);
}

/* A number member within [lo, hi]; optional ones absent or null give NaN. */
static int get_number(const parser *p, const char *where, const cJSON *obj, const char *key, int required,
                      double lo, double hi, const char *unit, double *out)
{
    char accepted[80];
    int rc;

    snprintf(accepted, sizeof accepted, "%g to %g%s%s", lo, hi, *unit ? " " : "", unit);
    if ((rc = fxl_jsondoc_get_number(&p->doc, out, where, obj, key,
                                     FXL_JSONDOC_NULL_ABSENT | (required ? FXL_JSONDOC_REQUIRED : 0),
                                     accepted)) != 0 || isnan(*out))
        return rc;
    if (*out < lo || *out > hi) {
        rc = fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s '%g' is out of range: must be %s", p->name, where,
                      key, *out, accepted);
        *out = NAN;
    }
    return rc;
}

/* An array of n numbers within [lo, hi] (lo_open: strictly above lo) into a
 * fresh malloc'ed array; n_expected 0 means any length 1..FXL_BEAM_AXIS_MAX.
 * `increasing` demands strictly increasing values (a table axis). */
static int get_numbers(const parser *p, const char *where, const cJSON *arr, const char *key,
                       size_t n_expected, double lo, int lo_open, double hi, const char *unit,
                       int increasing, double **out, size_t *n_out)
{
    const cJSON *v;
    size_t n, i = 0;
    double *a;

    *out = NULL;
    *n_out = 0;
    if (!arr)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: '%s' is missing", p->name, where, key);
    if (!cJSON_IsArray(arr))
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: '%s' must be an array of numbers", p->name,
                        where, key);
    n = (size_t)cJSON_GetArraySize(arr);
    if (n_expected && n != n_expected)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: '%s' must hold %zu numbers (one per field size), has %zu",
                        p->name, where, key, n_expected, n);
    if (n < 1 || n > FXL_BEAM_AXIS_MAX)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: '%s' must hold 1 to %d numbers, has %zu", p->name,
                        where, key, FXL_BEAM_AXIS_MAX, n);
    if (!(a = calloc(n, sizeof *a)))
        return fxl_fail(p->ctx, FXL_EIO, "out of memory reading '%s'", p->name);
    cJSON_ArrayForEach(v, arr) {
        double x;
        if (!cJSON_IsNumber(v) || !isfinite(v->valuedouble)) {
            free(a);
            return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s[%zu] must be a number", p->name, where,
                            key, i);
        }
        x = v->valuedouble;
        if ((lo_open ? !(x > lo) : x < lo) || x > hi) {
            free(a);
            return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s[%zu] '%g' is out of range: must be %s %g and <= %g%s%s",
                            p->name, where, key, i, x, lo_open ? ">" : ">=", lo, hi, *unit ? " " : "", unit);
        }
        if (increasing && i > 0 && !(x > a[i - 1])) {
            double prev = a[i - 1];
            free(a);
            return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s must increase strictly: %s[%zu] '%g' follows '%g'",
                            p->name, where, key, key, i, x, prev);
        }
        a[i++] = x;
    }
    *out = a;
    *n_out = n;
    return 0;
}

static const cJSON *get_object(const parser *p, const char *where, const cJSON *obj, const char *key,
                               int *rc)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(obj, key);

    *rc = 0;
    if (!v || cJSON_IsNull(v))
        return NULL;
    if (!cJSON_IsObject(v)) {
        *rc = fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: '%s' must be an object", p->name, where, key);
        return NULL;
    }
    return v;
}

/* ---- sections ------------------------------------------------------------- */

static int parse_reference(const parser *p, const cJSON *root, fxl_beam_model *m)
{
    static const char *const keys[] = {"dose_cgy_per_mu", "distance_cm", "field_size_cm", NULL};
    const cJSON *ref;
    int rc;

    ref = get_object(p, "beam data", root, "reference", &rc);
    if (rc)
        return rc;
    if (!ref)
        return fxl_fail(p->ctx, FXL_EINVAL,
                        "file '%s': 'reference' is missing ({\"dose_cgy_per_mu\", \"distance_cm\", \"field_size_cm\"})",
                        p->name);
    if ((rc = check_keys(p, "reference", ref, keys)) != 0 ||
        (rc = get_number(p, "reference", ref, "dose_cgy_per_mu", 1, 0.01, 10, "cGy/MU",
                         &m->ref_dose_cgy_per_mu)) != 0 ||
        (rc = get_number(p, "reference", ref, "distance_cm", 1, 50, 200, "cm", &m->ref_distance_cm)) != 0 ||
        (rc = get_number(p, "reference", ref, "field_size_cm", 1, 1, 40, "cm", &m->ref_field_cm)) != 0)
        return rc;
    return 0;
}

/* Output factors must be 1 at the reference field when the table reaches it. */
static int check_norm(const parser *p, const char *key, const fxl_table1 *t, double ref_field)
{
    double v;

    if (fxl_table1_interp(&v, t, ref_field) != 0)
        return fxl_fail(p->ctx, FXL_EINVAL,
                        "file '%s': output_factors: the table must include the reference field %g cm (has %g to %g cm)",
                        p->name, ref_field, t->x[0], t->x[t->n - 1]);
    if (fabs(v - 1.0) > NORM_TOLERANCE)
        return fxl_fail(p->ctx, FXL_EINVAL,
                        "file '%s': output_factors: %s is %g at the reference field %g cm: must be 1 (within %g)",
                        p->name, key, v, ref_field, NORM_TOLERANCE);
    return 0;
}

static int copy_axis(const parser *p, double **dst, const double *src, size_t n)
{
    if (!(*dst = malloc(n * sizeof **dst)))
        return fxl_fail(p->ctx, FXL_EIO, "out of memory reading '%s'", p->name);
    memcpy(*dst, src, n * sizeof **dst);
    return 0;
}

static int parse_output(const parser *p, const cJSON *root, fxl_beam_model *m)
{
    static const char *const keys[] = {"field_size_cm", "sc", "sp", "scp", NULL};
    const cJSON *of, *sc, *sp, *scp;
    double *fs = NULL;
    size_t n = 0, k;
    int rc;

    of = get_object(p, "beam data", root, "output_factors", &rc);
    if (rc)
        return rc;
    if (!of)
        return fxl_fail(p->ctx, FXL_EINVAL,
                        "file '%s': 'output_factors' is missing ({\"field_size_cm\", \"sc\", \"sp\"} or "
                        "{\"field_size_cm\", \"scp\"})", p->name);
    if ((rc = check_keys(p, "output_factors", of, keys)) != 0)
        return rc;
    sc = cJSON_GetObjectItemCaseSensitive(of, "sc");
    sp = cJSON_GetObjectItemCaseSensitive(of, "sp");
    scp = cJSON_GetObjectItemCaseSensitive(of, "scp");
    if (scp && (sc || sp))
        return fxl_fail(p->ctx, FXL_EINVAL,
                        "file '%s': output_factors: give either 'sc' and 'sp', or the combined 'scp', not both",
                        p->name);
    if (!scp && !(sc && sp))
        return fxl_fail(p->ctx, FXL_EINVAL,
                        "file '%s': output_factors: give 'sc' and 'sp' (or the combined 'scp')", p->name);
    if ((rc = get_numbers(p, "output_factors", cJSON_GetObjectItemCaseSensitive(of, "field_size_cm"),
                          "field_size_cm", 0, 0.5, 0, 100, "cm", 1, &fs, &n)) != 0)
        goto cleanup;
    if (scp) {
        m->output_combined = 1;
        if ((rc = get_numbers(p, "output_factors", scp, "scp", n, 0.5, 0, 1.5, "", 0, &m->scp.y, &k)) != 0 ||
            (rc = copy_axis(p, &m->scp.x, fs, n)) != 0)
            goto cleanup;
        m->scp.n = n;
        rc = check_norm(p, "scp", &m->scp, m->ref_field_cm);
        goto cleanup;
    }
    if ((rc = get_numbers(p, "output_factors", sc, "sc", n, 0.5, 0, 1.5, "", 0, &m->sc.y, &k)) != 0 ||
        (rc = copy_axis(p, &m->sc.x, fs, n)) != 0)
        goto cleanup;
    m->sc.n = n;
    if ((rc = get_numbers(p, "output_factors", sp, "sp", n, 0.5, 0, 1.5, "", 0, &m->sp.y, &k)) != 0 ||
        (rc = copy_axis(p, &m->sp.x, fs, n)) != 0)
        goto cleanup;
    m->sp.n = n;
    if ((rc = check_norm(p, "sc", &m->sc, m->ref_field_cm)) != 0)
        goto cleanup;
    rc = check_norm(p, "sp", &m->sp, m->ref_field_cm);
cleanup:
    free(fs);
    return rc;
}

static int parse_wedges(const parser *p, const cJSON *root, fxl_beam_model *m)
{
    static const char *const keys[] = {"angle_deg", "factor", NULL};
    const cJSON *arr = cJSON_GetObjectItemCaseSensitive(root, "wedges"), *w;
    char where[40];
    size_t n, i = 0, a, b;
    int rc;

    if (!arr || cJSON_IsNull(arr))
        return 0;
    if (!cJSON_IsArray(arr))
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': 'wedges' must be an array of {\"angle_deg\", \"factor\"}",
                        p->name);
    n = (size_t)cJSON_GetArraySize(arr);
    if (n > 16)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': 'wedges' must hold 0 to 16 wedges, has %zu", p->name, n);
    if (n == 0)
        return 0;
    if (!(m->wedge.x = calloc(n, sizeof *m->wedge.x)) || !(m->wedge.y = calloc(n, sizeof *m->wedge.y)))
        return fxl_fail(p->ctx, FXL_EIO, "out of memory reading '%s'", p->name);
    cJSON_ArrayForEach(w, arr) {
        snprintf(where, sizeof where, "wedges[%zu]", i);
        if (!cJSON_IsObject(w))
            return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: must be an object {\"angle_deg\", \"factor\"}",
                            p->name, where);
        if ((rc = check_keys(p, where, w, keys)) != 0 ||
            (rc = get_number(p, where, w, "angle_deg", 1, 1, 60, "deg", &m->wedge.x[i])) != 0 ||
            (rc = get_number(p, where, w, "factor", 1, 0.1, 1.0, "", &m->wedge.y[i])) != 0)
            return rc;
        i++;
    }
    m->wedge.n = n;
    /* Sorted by angle (insertion sort, n <= 16) so the exact lookup sees an
     * increasing axis; an angle given twice is refused. */
    for (a = 1; a < n; a++) {
        for (b = a; b > 0 && m->wedge.x[b - 1] > m->wedge.x[b]; b--) {
            double tx = m->wedge.x[b], ty = m->wedge.y[b];
            m->wedge.x[b] = m->wedge.x[b - 1];
            m->wedge.y[b] = m->wedge.y[b - 1];
            m->wedge.x[b - 1] = tx;
            m->wedge.y[b - 1] = ty;
        }
    }
    for (a = 1; a < n; a++)
        if (!(m->wedge.x[a] > m->wedge.x[a - 1]))
            return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': wedges: angle %g deg is given twice", p->name,
                            m->wedge.x[a]);
    return 0;
}

/* A depth-dose grid: {"field_size_cm": [...], "depth_cm": [...], <vkey>:
 * [[one row per depth]]}. */
static int parse_grid(const parser *p, const char *where, const cJSON *obj, const char *vkey, double vmax,
                      const char *vunit, fxl_grid *g)
{
    const cJSON *rows, *row;
    char rwhere[48];
    double *vals = NULL;
    size_t j = 0, k;
    int rc;

    if ((rc = get_numbers(p, where, cJSON_GetObjectItemCaseSensitive(obj, "field_size_cm"), "field_size_cm", 0,
                          0.5, 0, 100, "cm", 1, &g->x, &g->nx)) != 0 ||
        (rc = get_numbers(p, where, cJSON_GetObjectItemCaseSensitive(obj, "depth_cm"), "depth_cm", 0, 0, 0, 50,
                          "cm", 1, &g->y, &g->ny)) != 0)
        return rc;
    rows = cJSON_GetObjectItemCaseSensitive(obj, vkey);
    if (!rows)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: '%s' is missing", p->name, where, vkey);
    if (!cJSON_IsArray(rows) || (size_t)cJSON_GetArraySize(rows) != g->ny)
        return fxl_fail(p->ctx, FXL_EINVAL,
                        "file '%s': %s: '%s' must be an array of %zu rows (one per depth), each of %zu numbers (one per field size)",
                        p->name, where, vkey, g->ny, g->nx);
    if (!(g->v = calloc(g->nx * g->ny, sizeof *g->v)))
        return fxl_fail(p->ctx, FXL_EIO, "out of memory reading '%s'", p->name);
    cJSON_ArrayForEach(row, rows) {
        snprintf(rwhere, sizeof rwhere, "%s.%s[%zu]", where, vkey, j);
        if ((rc = get_numbers(p, rwhere, row, "row", g->nx, 0, 1, vmax, vunit, 0, &vals, &k)) != 0)
            return rc;
        memcpy(g->v + j * g->nx, vals, g->nx * sizeof *vals);
        free(vals);
        vals = NULL;
        j++;
    }
    return 0;
}

static int parse_depth(const parser *p, const cJSON *root, fxl_beam_model *m)
{
    static const char *const tmr_keys[] = {"field_size_cm", "depth_cm", "values", NULL};
    static const char *const pdd_keys[] = {"ssd_cm", "field_size_cm", "depth_cm", "values_pct", NULL};
    const cJSON *tmr, *pdd;
    int rc;

    tmr = get_object(p, "beam data", root, "tmr", &rc);
    if (rc)
        return rc;
    pdd = get_object(p, "beam data", root, "pdd", &rc);
    if (rc)
        return rc;
    if ((tmr && pdd) || (!tmr && !pdd))
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': give exactly one depth-dose table: 'tmr' or 'pdd'",
                        p->name);
    if (tmr) {
        m->depth_kind = FXL_DEPTH_TMR;
        if ((rc = check_keys(p, "tmr", tmr, tmr_keys)) != 0)
            return rc;
        return parse_grid(p, "tmr", tmr, "values", 1.5, "", &m->tmr);
    }
    m->depth_kind = FXL_DEPTH_PDD;
    if ((rc = check_keys(p, "pdd", pdd, pdd_keys)) != 0 ||
        (rc = get_number(p, "pdd", pdd, "ssd_cm", 1, 50, 200, "cm", &m->pdd_ssd_cm)) != 0 ||
        (rc = parse_grid(p, "pdd", pdd, "values_pct", 100, "%", &m->pdd)) != 0)
        return rc;
    if (m->output_combined)
        return fxl_fail(p->ctx, FXL_EINVAL,
                        "file '%s': a 'pdd' table needs separate 'sc' and 'sp' output factors (the PDD to TMR "
                        "conversion uses S_p); give them, or a 'tmr' table", p->name);
    return 0;
}

static int parse_root(const parser *p, const cJSON *root, fxl_beam_model *m)
{
    static const char *const keys[] = {"format", "machine", "beam", "modality", "energy", "sad_cm", "dmax_cm",
                                       "reference", "output_factors", "wedges", "tray_factor", "tmr", "pdd",
                                       "source", NULL};
    char format[40];
    int rc;

    if (!cJSON_IsObject(root))
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': the beam data must be one JSON object", p->name);
    if ((rc = check_keys(p, "beam data", root, keys)) != 0 ||
        (rc = get_string(p, "beam data", root, "format", 1, format, sizeof format)) != 0)
        return rc;
    if (strcmp(format, FXL_BEAM_DATA_FORMAT) != 0)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': format '%s' is not '%s'", p->name, format,
                        FXL_BEAM_DATA_FORMAT);
    if ((rc = get_string(p, "beam data", root, "machine", 1, m->machine, sizeof m->machine)) != 0 ||
        (rc = get_string(p, "beam data", root, "beam", 1, m->beam, sizeof m->beam)) != 0 ||
        (rc = get_string(p, "beam data", root, "modality", 1, m->modality, sizeof m->modality)) != 0)
        return rc;
    if (strcmp(m->modality, "photon") != 0)
        return fxl_fail(p->ctx, FXL_EINVAL,
                        "file '%s': modality '%s' is not supported: the independent model covers photon beams only",
                        p->name, m->modality);
    if ((rc = get_number(p, "beam data", root, "energy", 1, 0.1, 50, "MV", &m->energy)) != 0 ||
        (rc = get_number(p, "beam data", root, "sad_cm", 1, 50, 200, "cm", &m->sad_cm)) != 0 ||
        (rc = get_number(p, "beam data", root, "dmax_cm", 1, 0.1, 9.9, "cm", &m->dmax_cm)) != 0 ||
        (rc = get_number(p, "beam data", root, "tray_factor", 0, 0.5, 1.0, "", &m->tray_factor)) != 0 ||
        (rc = get_string(p, "beam data", root, "source", 0, m->source, sizeof m->source)) != 0 ||
        (rc = parse_reference(p, root, m)) != 0 || (rc = parse_output(p, root, m)) != 0 ||
        (rc = parse_wedges(p, root, m)) != 0 || (rc = parse_depth(p, root, m)) != 0)
        return rc;
    return 0;
}

int fxl_beam_json_parse(fxl_ctx *ctx, fxl_beam_model *out, const char *text, size_t len, const char *source)
{
    parser p = {ctx, source ? source : "beam data", {ctx, "file", source ? source : "beam data"}};
    cJSON *root = NULL;
    int rc;

    if (!out)
        return fxl_fail(ctx, FXL_EINVAL, "internal: no output for beam data");
    fxl_beam_model_init(out);
    if (!text)
        return fxl_fail(ctx, FXL_EINVAL, "file '%s' is empty", p.name);
    /* Text must be UTF-8, and "\u0000" would silently cut a name short. */
    if ((rc = fxl_jsondoc_parse(&p.doc, &root, text, len, FXL_JSONDOC_AT_BYTE)) == 0)
        rc = parse_root(&p, root, out);
    cJSON_Delete(root);
    if (rc != 0)
        fxl_beam_model_release(out);
    return rc;
}

int fxl_beam_json_read(fxl_ctx *ctx, fxl_beam_model *out, const char *path)
{
    static const fxl_jsondoc_file spec = {
        .max_bytes = 1024 * 1024,
        .too_large_code = FXL_EINVAL,
        .open_fail = "cannot open beam data file '%s': %s",
        .read_fail = "cannot read beam data file '%s': %s",
        .too_large = "file '%s' is larger than %d bytes",
        .no_memory = "out of memory reading '%s'",
    };
    char *buf = NULL;
    size_t len;
    int rc;

    if (out)
        fxl_beam_model_init(out);
    if (!path)
        return fxl_fail(ctx, FXL_EINVAL, "internal: no beam data path");
    if ((rc = fxl_jsondoc_read_file(ctx, &buf, &len, path, &spec)) == 0)
        rc = fxl_beam_json_parse(ctx, out, buf, len, path);
    free(buf);
    return rc;
}

/* ---- a result as JSON --------------------------------------------------------- */

static int add_num(cJSON *o, const char *key, double v)
{
    cJSON *item = isfinite(v) ? cJSON_CreateNumber(v) : cJSON_CreateNull();

    if (!item)
        return -1;
    cJSON_AddItemToObject(o, key, item);
    return 0;
}

int fxl_model_result_json(char **out, const fxl_model_result *r)
{
    cJSON *o = NULL, *reasons;
    int i, rc = FXL_EIO;

    if (!out || !r)
        return FXL_EINVAL;
    *out = NULL;
    if (!(o = cJSON_CreateObject()))
        goto cleanup;
    if (!cJSON_AddStringToObject(o, "point", r->point == FXL_MODEL_EXIT ? "exit" : "entrance") ||
        !cJSON_AddStringToObject(o, "setup", r->setup == FXL_MODEL_SETUP_ISO ? "isocentric" : "ssd") ||
        !cJSON_AddBoolToObject(o, "computed", r->computed) ||
        !cJSON_AddBoolToObject(o, "output_combined", r->output_combined))
        goto cleanup;
    if (add_num(o, "dose_cgy", r->dose_cgy) || add_num(o, "mu", r->mu) ||
        add_num(o, "ref_dose_cgy_per_mu", r->ref_dose_cgy_per_mu) ||
        add_num(o, "ref_distance_cm", r->ref_distance_cm) || add_num(o, "sad_cm", r->sad_cm) ||
        add_num(o, "dmax_cm", r->dmax_cm) || add_num(o, "ssd_cm", r->ssd_cm) ||
        add_num(o, "depth_cm", r->depth_cm) || add_num(o, "spd_cm", r->spd_cm) ||
        add_num(o, "rc_cm", r->rc_cm) || add_num(o, "rd_cm", r->rd_cm) || add_num(o, "sc", r->sc) ||
        add_num(o, "sp", r->sp) || add_num(o, "scp", r->scp) || add_num(o, "tmr", r->tmr) ||
        add_num(o, "pdd_pct", r->pdd_pct) || add_num(o, "inverse_square", r->inverse_square) ||
        add_num(o, "wedge_factor", r->wedge_factor) || add_num(o, "tray_factor", r->tray_factor))
        goto cleanup;
    if (!(reasons = cJSON_AddArrayToObject(o, "reasons")))
        goto cleanup;
    for (i = 0; i < r->reasons.n && i < FXL_REASONS_MAX; i++) {
        cJSON *s = cJSON_CreateString(r->reasons.text[i]);
        if (!s)
            goto cleanup;
        cJSON_AddItemToArray(reasons, s);
    }
    if (!(*out = cJSON_PrintUnformatted(o)))
        goto cleanup;
    rc = 0;
cleanup:
    cJSON_Delete(o);
    return rc;
}
