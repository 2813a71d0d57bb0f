/* Reads fxledger's own plan file format (docs/format-plan.md) into an
 * fxl_plan_spec: JSON syntax with line and column, the set of keys (unknown
 * or repeated keys are refused: a misspelt "wedge_deg" must not become an
 * open field), types and ranges, each failure named by its JSON path. */
#include "fxl/plan_json.h"
#include "io/json_doc.h"

#include <cjson/cJSON.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct parser {
    fxl_ctx *ctx;
    const char *source;
    char subject[128];   /* "plan" or "plan field 'AP'" or "plan field 'AP' exit point" */
    char path[96];       /* "" or "fields[0]" or "fields[0].points[1]" */
} parser;

/* "<subject> <what> (at <path>.<key> in '<source>')" as the context's message. */
static int fail(parser *p, const char *key, const char *fmt, ...) __attribute__((format(printf, 3, 4)));
static int fail(parser *p, const char *key, const char *fmt, ...)
{
    char what[256];
    va_list ap;

    va_start(ap, fmt);
    vsnprintf(what, sizeof what, fmt, ap);
    va_end(ap);
    return fxl_fail(p->ctx, FXL_EINVAL, "%s %s (at %s%s%s in '%s')", p->subject, what, p->path,
                    p->path[0] && key && *key ? "." : "", key ? key : "", p->source);
}

void fxl_plan_spec_release(fxl_plan_spec *spec)
{
    if (!spec)
        return;
    free(spec->fields);
    spec->fields = NULL;
    spec->n_fields = 0;
}

/* ---- keys ------------------------------------------------------------------ */

static int check_keys(parser *p, const cJSON *obj, const char *const *allowed, const char *accepted)
{
    int twice;
    const cJSON *bad = fxl_jsondoc_bad_key(obj, allowed, &twice);

    if (!bad)
        return 0;
    if (twice)
        return fail(p, bad->string, "has the key '%s' twice", bad->string);
    return fail(p, bad->string, "has unknown key '%s' (accepted: %s)", bad->string, accepted);
}

/* ---- typed values ---------------------------------------------------------- */

static int get_text(parser *p, const cJSON *obj, const char *key, int required, size_t max_len,
                    char *out, size_t out_size)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(obj, key);
    const unsigned char *c;
    size_t len;

    out[0] = '\0';
    if (!v || cJSON_IsNull(v)) {
        if (required)
            return fail(p, key, "%s is required (text, 1 to %zu characters)", key, max_len);
        return 0;
    }
    if (!cJSON_IsString(v))
        return fail(p, key, "%s must be text (1 to %zu characters)", key, max_len);
    len = strlen(v->valuestring);
    if (len < 1 || len > max_len)
        return fail(p, key, "%s '%.80s' must be 1 to %zu characters", key, v->valuestring, max_len);
    for (c = (const unsigned char *)v->valuestring; *c; c++)
        if (*c < 0x20 || *c == 0x7f)
            return fail(p, key, "%s must not contain control characters", key);
    if (v->valuestring[0] == ' ' || v->valuestring[len - 1] == ' ')
        return fail(p, key, "%s '%s' must not start or end with a space", key, v->valuestring);
    snprintf(out, out_size, "%s", v->valuestring);
    return 0;
}

static int get_choice(parser *p, const cJSON *obj, const char *key, const char *dflt,
                      const char *const *choices, const char *accepted, char *out, size_t out_size)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(obj, key);
    const char *const *c;

    if (!v && dflt) {
        snprintf(out, out_size, "%s", dflt);
        return 0;
    }
    if (!v)
        return fail(p, key, "%s is required (%s)", key, accepted);
    if (!cJSON_IsString(v))
        return fail(p, key, "%s must be one of %s", key, accepted);
    for (c = choices; *c; c++) {
        if (strcmp(v->valuestring, *c) == 0) {
            snprintf(out, out_size, "%s", *c);
            return 0;
        }
    }
    return fail(p, key, "%s '%.40s' must be one of %s", key, v->valuestring, accepted);
}

/* A range: lo and hi with whether each bound is included. */
typedef struct range {
    double lo;
    int lo_incl;
    double hi;
    int hi_incl;
    const char *unit;
} range;

static void range_text(char *buf, size_t size, const range *r)
{
    snprintf(buf, size, "%s %g and %s %g%s%s", r->lo_incl ? ">=" : ">", r->lo, r->hi_incl ? "<=" : "<",
             r->hi, r->unit[0] ? " " : "", r->unit);
}

/* A number in range. Absent: required -> error, else *out = dflt. */
static int get_number(parser *p, const cJSON *obj, const char *key, int required, double dflt,
                      const range *r, double *out)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(obj, key);
    char rt[80];
    double x;

    range_text(rt, sizeof rt, r);
    if (!v) {
        if (required)
            return fail(p, key, "%s is required: a number %s", key, rt);
        *out = dflt;
        return 0;
    }
    if (!cJSON_IsNumber(v))
        return fail(p, key, "%s must be a number %s", key, rt);
    x = v->valuedouble;
    if (!isfinite(x) || (r->lo_incl ? x < r->lo : x <= r->lo) || (r->hi_incl ? x > r->hi : x >= r->hi))
        return fail(p, key, "%s '%g' must be %s", key, x, rt);
    *out = x;
    return 0;
}

/* ---- the parts of a plan --------------------------------------------------- */

static const char *const point_keys[] = {"point", "expected_dose_cgy", "expected_source",
                                         "thickness_cm", NULL};
static const char *const field_keys[] = {"name", "machine", "beam", "setup", "mu", "ssd_cm",
                                         "x_cm", "y_cm", "wedge_deg", "tray", "gantry_deg",
                                         "incidence_deg", "policy", "points", NULL};
static const char *const plan_keys[] = {"format", "comment", "patient_mrn", "label", "site",
                                        "technique", "fractions", "dose_per_fraction_cgy",
                                        "replaces", "fields", NULL};

static int parse_point(parser *p, const cJSON *obj, fxl_point_spec *pt)
{
    static const char *const points[] = {"entrance", "exit", NULL};
    static const char *const sources[] = {"tps", "manual", NULL};
    static const range dose = {0, 0, FXL_PLAN_DOSE_CGY_MAX, 1, "cGy"};
    static const range thick = {0, 0, FXL_FIELD_THICKNESS_CM_MAX, 1, "cm"};
    char rt[80];
    int rc;

    if (!cJSON_IsObject(obj))
        return fail(p, NULL, "must be an object with point, expected_dose_cgy, expected_source");
    if ((rc = check_keys(p, obj, point_keys,
                         "point, expected_dose_cgy, expected_source, thickness_cm")) != 0 ||
        (rc = get_choice(p, obj, "point", NULL, points, "entrance or exit", pt->point,
                         sizeof pt->point)) != 0)
        return rc;
    /* From here the subject names the point. */
    snprintf(p->subject + strlen(p->subject), sizeof p->subject - strlen(p->subject), " %s point",
             pt->point);
    if ((rc = get_number(p, obj, "expected_dose_cgy", 1, 0, &dose, &pt->expected_dose_cgy)) != 0 ||
        (rc = get_choice(p, obj, "expected_source", NULL, sources, "tps or manual",
                         pt->expected_source, sizeof pt->expected_source)) != 0 ||
        (rc = get_number(p, obj, "thickness_cm", 0, NAN, &thick, &pt->thickness_cm)) != 0)
        return rc;
    range_text(rt, sizeof rt, &thick);
    if (strcmp(pt->point, "exit") == 0 && isnan(pt->thickness_cm))
        return fail(p, "thickness_cm",
                    "thickness_cm is required for an exit point: the patient thickness along the beam, %s",
                    rt);
    return 0;
}

static int parse_field(parser *p, const cJSON *obj, size_t index, fxl_field_spec *f)
{
    static const char *const setups[] = {"ssd", "isocentric", NULL};
    static const char *const policies[] = {"first", "weekly", "every", "none", NULL};
    static const range mu = {0, 0, FXL_FIELD_MU_MAX, 1, "MU"};
    static const range ssd = {FXL_FIELD_SSD_CM_MIN, 1, FXL_FIELD_SSD_CM_MAX, 1, "cm"};
    static const range jaw = {0, 0, FXL_FIELD_JAW_CM_MAX, 1, "cm"};
    static const range wedge = {0, 1, FXL_FIELD_WEDGE_DEG_MAX, 1, "degrees"};
    static const range gantry = {0, 1, 360, 0, "degrees"};
    static const range incidence = {0, 1, FXL_FIELD_INCIDENCE_DEG_MAX, 1, "degrees"};
    const cJSON *tray, *points, *pt;
    char field_subject[sizeof p->subject], field_path[32];
    size_t i;
    int rc;

    snprintf(p->subject, sizeof p->subject, "plan fields[%zu]", index);
    snprintf(p->path, sizeof p->path, "fields[%zu]", index);
    if (!cJSON_IsObject(obj))
        return fail(p, NULL, "must be an object describing one beam");
    if ((rc = get_text(p, obj, "name", 1, 64, f->name, sizeof f->name)) != 0)
        return rc;
    snprintf(p->subject, sizeof p->subject, "plan field '%s'", f->name);
    if ((rc = check_keys(p, obj, field_keys,
                         "name, machine, beam, setup, mu, ssd_cm, x_cm, y_cm, wedge_deg, tray, "
                         "gantry_deg, incidence_deg, policy, points")) != 0 ||
        (rc = get_text(p, obj, "machine", 1, 64, f->machine, sizeof f->machine)) != 0 ||
        (rc = get_text(p, obj, "beam", 1, 32, f->beam, sizeof f->beam)) != 0 ||
        (rc = get_choice(p, obj, "setup", NULL, setups, "ssd or isocentric", f->setup,
                         sizeof f->setup)) != 0 ||
        (rc = get_number(p, obj, "mu", 1, 0, &mu, &f->mu)) != 0 ||
        (rc = get_number(p, obj, "ssd_cm", 1, 0, &ssd, &f->ssd_cm)) != 0 ||
        (rc = get_number(p, obj, "x_cm", 1, 0, &jaw, &f->x_cm)) != 0 ||
        (rc = get_number(p, obj, "y_cm", 1, 0, &jaw, &f->y_cm)) != 0 ||
        (rc = get_number(p, obj, "wedge_deg", 1, 0, &wedge, &f->wedge_deg)) != 0 ||
        (rc = get_number(p, obj, "gantry_deg", 0, 0, &gantry, &f->gantry_deg)) != 0 ||
        (rc = get_number(p, obj, "incidence_deg", 1, 0, &incidence, &f->incidence_deg)) != 0 ||
        (rc = get_choice(p, obj, "policy", "first", policies, "first, weekly, every or none",
                         f->policy, sizeof f->policy)) != 0)
        return rc;
    tray = cJSON_GetObjectItemCaseSensitive(obj, "tray");
    if (!tray)
        return fail(p, "tray", "tray is required: true or false");
    if (!cJSON_IsBool(tray))
        return fail(p, "tray", "tray must be true or false");
    f->tray = cJSON_IsTrue(tray) ? 1 : 0;

    points = cJSON_GetObjectItemCaseSensitive(obj, "points");
    if (!points)
        return fail(p, "points", "points is required: a list of 1 or 2 measured points (entrance, exit)");
    if (!cJSON_IsArray(points) || cJSON_GetArraySize(points) < 1 || cJSON_GetArraySize(points) > 2)
        return fail(p, "points", "points must be a list of 1 or 2 measured points (entrance, exit)");
    snprintf(field_subject, sizeof field_subject, "%s", p->subject);
    snprintf(field_path, sizeof field_path, "fields[%zu]", index);
    i = 0;
    cJSON_ArrayForEach(pt, points) {
        snprintf(p->subject, sizeof p->subject, "%s", field_subject);
        snprintf(p->path, sizeof p->path, "%s.points[%zu]", field_path, i);
        if ((rc = parse_point(p, pt, &f->points[i])) != 0)
            return rc;
        i++;
    }
    f->n_points = i;
    snprintf(p->subject, sizeof p->subject, "%s", field_subject);
    snprintf(p->path, sizeof p->path, "%s", field_path);
    if (f->n_points == 2 && strcmp(f->points[0].point, f->points[1].point) == 0)
        return fail(p, "points", "lists the %s point twice (one entrance and one exit at most)",
                    f->points[0].point);
    return 0;
}

static int parse_syntax(parser *p, cJSON **out, const char *buf, size_t len)
{
    const fxl_jsondoc doc = {p->ctx, "plan file", p->source};
    const char *end = NULL;
    size_t pos, i;
    int rc, line, col, at_end = 1;

    *out = NULL;
    if (strlen(buf) != len)
        return fxl_fail(p->ctx, FXL_EINVAL, "plan file '%s' is not valid JSON: it contains a NUL byte at byte %zu",
                        p->source, strlen(buf) + 1);
    /* Text must be UTF-8, and "\u0000" would silently cut a name short. */
    if ((rc = fxl_jsondoc_check_text(&doc, buf, len, 0)) != 0)
        return rc;
    *out = cJSON_ParseWithOpts(buf, &end, 1);
    if (*out)
        return 0;
    pos = end && end >= buf && end <= buf + len ? (size_t)(end - buf) : len;
    for (i = pos; i < len; i++)
        if (buf[i] != ' ' && buf[i] != '\t' && buf[i] != '\r' && buf[i] != '\n')
            at_end = 0;
    /* A file cut inside a string: cJSON points at the string's start. */
    if (fxl_jsondoc_ends_inside_string(buf, len)) {
        fxl_jsondoc_line_col(buf, len, &line, &col);
        return fxl_fail(p->ctx, FXL_EINVAL,
                        "plan file '%s' is not valid JSON: it ends too early at line %d, column %d, inside a "
                        "string (truncated file)", p->source, line, col);
    }
    fxl_jsondoc_line_col(buf, pos, &line, &col);
    if (len == 0 || at_end)
        return fxl_fail(p->ctx, FXL_EINVAL,
                        "plan file '%s' is not valid JSON: it ends too early at line %d, column %d "
                        "(truncated file?)",
                        p->source, line, col);
    return fxl_fail(p->ctx, FXL_EINVAL,
                    "plan file '%s' is not valid JSON: syntax error at line %d, column %d (byte %zu)",
                    p->source, line, col, pos + 1);
}

int fxl_plan_json_parse(fxl_ctx *ctx, fxl_plan_spec *out, const char *text, size_t len,
                        const char *source)
{
    static const range fractions = {1, 1, FXL_PLAN_FRACTIONS_MAX, 1, ""};
    static const range dose = {0, 0, FXL_PLAN_DOSE_CGY_MAX, 1, "cGy"};
    parser p = {ctx, source ? source : "plan", "plan", ""};
    cJSON *root = NULL;
    const cJSON *v, *fields, *f;
    char *buf = NULL, comment[1001];
    double nfr = 0;
    size_t i, j;
    int rc;

    memset(out, 0, sizeof *out);
    out->dose_per_fraction_cgy = NAN;
    /* A UTF-8 byte order mark, as some editors write, is not part of the JSON. */
    if (len >= 3 && memcmp(text, "\xEF\xBB\xBF", 3) == 0) {
        text += 3;
        len -= 3;
    }
    if (!(buf = malloc(len + 1))) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory reading plan file '%s'", p.source);
        goto cleanup;
    }
    memcpy(buf, text, len);
    buf[len] = '\0';
    if ((rc = parse_syntax(&p, &root, buf, len)) != 0)
        goto cleanup;
    if (!cJSON_IsObject(root)) {
        rc = fxl_fail(ctx, FXL_EINVAL, "plan file '%s' must hold one JSON object (one plan)", p.source);
        goto cleanup;
    }
    v = cJSON_GetObjectItemCaseSensitive(root, "format");
    if (!cJSON_IsString(v) || strcmp(v->valuestring, FXL_PLAN_FORMAT) != 0) {
        rc = fail(&p, "format", "format must be \"%s\" (this file is %s)", FXL_PLAN_FORMAT,
                  v ? "of another format or version" : "missing the format key");
        goto cleanup;
    }
    if ((rc = check_keys(&p, root, plan_keys,
                         "format, comment, patient_mrn, label, site, technique, fractions, "
                         "dose_per_fraction_cgy, replaces, fields")) != 0 ||
        (rc = get_text(&p, root, "comment", 0, 1000, comment, sizeof comment)) != 0 ||
        (rc = get_text(&p, root, "patient_mrn", 1, 64, out->mrn, sizeof out->mrn)) != 0 ||
        (rc = get_text(&p, root, "label", 1, 64, out->label, sizeof out->label)) != 0)
        goto cleanup;
    snprintf(p.subject, sizeof p.subject, "plan '%s'", out->label);
    if ((rc = get_text(&p, root, "site", 1, 64, out->site, sizeof out->site)) != 0 ||
        (rc = get_text(&p, root, "technique", 1, 32, out->technique, sizeof out->technique)) != 0 ||
        (rc = get_number(&p, root, "fractions", 1, 0, &fractions, &nfr)) != 0 ||
        (rc = get_number(&p, root, "dose_per_fraction_cgy", 0, NAN, &dose,
                         &out->dose_per_fraction_cgy)) != 0 ||
        (rc = get_text(&p, root, "replaces", 0, 64, out->replaces, sizeof out->replaces)) != 0)
        goto cleanup;
    if (nfr != floor(nfr)) {
        rc = fail(&p, "fractions", "fractions '%g' must be a whole number from 1 to %d", nfr,
                  FXL_PLAN_FRACTIONS_MAX);
        goto cleanup;
    }
    out->fractions = (int)nfr;

    fields = cJSON_GetObjectItemCaseSensitive(root, "fields");
    if (!cJSON_IsArray(fields) || cJSON_GetArraySize(fields) < 1 || cJSON_GetArraySize(fields) > 64) {
        rc = fail(&p, "fields", "fields %s: a list of 1 to 64 beams", fields ? "is not valid" : "is required");
        goto cleanup;
    }
    out->n_fields = (size_t)cJSON_GetArraySize(fields);
    if (!(out->fields = calloc(out->n_fields, sizeof *out->fields))) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory reading plan file '%s'", p.source);
        goto cleanup;
    }
    i = 0;
    cJSON_ArrayForEach(f, fields) {
        if ((rc = parse_field(&p, f, i, &out->fields[i])) != 0)
            goto cleanup;
        for (j = 0; j < i; j++) {
            if (strcmp(out->fields[j].name, out->fields[i].name) == 0) {
                rc = fail(&p, "name", "name is used twice in this plan (also fields[%zu]); give each "
                          "beam one entry and list its entrance and exit points under it", j);
                goto cleanup;
            }
        }
        i++;
    }
cleanup:
    if (rc != 0)
        fxl_plan_spec_release(out);
    cJSON_Delete(root);
    free(buf);
    return rc;
}

int fxl_plan_json_read(fxl_ctx *ctx, fxl_plan_spec *out, const char *path)
{
    /* A file of 16 MB or more is refused. */
    static const fxl_jsondoc_file spec = {
        .max_bytes = ((size_t)16 << 20) - 1,
        .too_large_code = FXL_EINVAL,
        .open_fail = "cannot read plan file '%s': %s",
        .read_fail = "cannot read plan file '%s': %s",
        .too_large = "plan file '%s' is larger than 16 MB",
        .no_memory = "out of memory reading plan file '%s'",
    };
    char *text = NULL;
    size_t len = 0;
    int rc;

    memset(out, 0, sizeof *out);
    if ((rc = fxl_jsondoc_read_file(ctx, &text, &len, path, &spec)) == 0)
        rc = fxl_plan_json_parse(ctx, out, text, len, path);
    free(text);
    return rc;
}
