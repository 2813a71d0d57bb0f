/* A DICOM RT Plan in the DICOM JSON Model (PS3.18 Annex F) into a plain C
 * struct, all or nothing. Structure is checked first, then every attribute
 * fxledger needs, then what it cannot handle is refused by name. Tags, units
 * and refusals: docs/dicom-import.md. No database. */
#include <cjson/cJSON.h>
#include <ctype.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include "fxl/core.h"
#include "fxl/dicom_part10.h"
#include "fxl/dicom_plan.h"
#include "fxl/number.h"
#include "fxl/fxl.h"
#include "fxl/text.h"
#include "io/json_doc.h"

#define DEPTH_MAX 8
#define LEAF_PAIRS_MAX 200

#define RT_PLAN_SOP_CLASS "1.2.840.10008.5.1.4.1.1.481.5"
#define RT_ION_PLAN_SOP_CLASS "1.2.840.10008.5.1.4.1.1.481.8"

/* A leaf pair narrower than this (mm) is taken as closed: a closed pair is
 * written with a small gap, and a 1 mm slit adds no field size worth
 * counting. */
#define LEAF_OPEN_MM 1.0
/* Two collimator positions this close (mm) are the same position. */
#define SAME_MM 0.01

/* An attribute: its tag as the JSON Model writes it and its keyword. */
typedef struct tag {
    const char *hex;
    const char *keyword;
} tag;

static const tag T_SOP_CLASS = {"00080016", "SOP Class UID"};
static const tag T_SOP_INSTANCE = {"00080018", "SOP Instance UID"};
static const tag T_MODALITY = {"00080060", "Modality"};
static const tag T_PATIENT_NAME = {"00100010", "Patient's Name"};
static const tag T_PATIENT_ID = {"00100020", "Patient ID"};
static const tag T_PLAN_LABEL = {"300A0002", "RT Plan Label"};
static const tag T_PLAN_NAME = {"300A0003", "RT Plan Name"};
static const tag T_DOSE_REF_SEQ = {"300A0010", "Dose Reference Sequence"};
static const tag T_TARGET_DOSE = {"300A0026", "Target Prescription Dose"};
static const tag T_FRACTION_GROUP_SEQ = {"300A0070", "Fraction Group Sequence"};
static const tag T_FRACTIONS = {"300A0078", "Number of Fractions Planned"};
static const tag T_BEAM_DOSE = {"300A0084", "Beam Dose"};
static const tag T_BEAM_METERSET = {"300A0086", "Beam Meterset"};
static const tag T_BEAM_SEQ = {"300A00B0", "Beam Sequence"};
static const tag T_MACHINE = {"300A00B2", "Treatment Machine Name"};
static const tag T_DOSIMETER_UNIT = {"300A00B3", "Primary Dosimeter Unit"};
static const tag T_SAD = {"300A00B4", "Source-Axis Distance"};
static const tag T_BLD_SEQ = {"300A00B6", "Beam Limiting Device Sequence"};
static const tag T_BLD_TYPE = {"300A00B8", "RT Beam Limiting Device Type"};
static const tag T_LEAF_PAIRS = {"300A00BC", "Number of Leaf/Jaw Pairs"};
static const tag T_LEAF_BOUNDARIES = {"300A00BE", "Leaf Position Boundaries"};
static const tag T_BEAM_NUMBER = {"300A00C0", "Beam Number"};
static const tag T_BEAM_NAME = {"300A00C2", "Beam Name"};
static const tag T_BEAM_TYPE = {"300A00C4", "Beam Type"};
static const tag T_RADIATION = {"300A00C6", "Radiation Type"};
static const tag T_DELIVERY = {"300A00CE", "Treatment Delivery Type"};
static const tag T_N_WEDGES = {"300A00D0", "Number of Wedges"};
static const tag T_WEDGE_SEQ = {"300A00D1", "Wedge Sequence"};
static const tag T_WEDGE_NUMBER = {"300A00D2", "Wedge Number"};
static const tag T_WEDGE_TYPE = {"300A00D3", "Wedge Type"};
static const tag T_WEDGE_ID = {"300A00D4", "Wedge ID"};
static const tag T_WEDGE_ANGLE = {"300A00D5", "Wedge Angle"};
static const tag T_N_COMPENSATORS = {"300A00E0", "Number of Compensators"};
static const tag T_N_BOLI = {"300A00ED", "Number of Boli"};
static const tag T_N_BLOCKS = {"300A00F0", "Number of Blocks"};
static const tag T_BLOCK_SEQ = {"300A00F4", "Block Sequence"};
static const tag T_BLOCK_TRAY_ID = {"300A00F5", "Block Tray ID"};
static const tag T_APPLICATOR_SEQ = {"300A0107", "Applicator Sequence"};
static const tag T_APPLICATOR_ID = {"300A0108", "Applicator ID"};
static const tag T_CP_SEQ = {"300A0111", "Control Point Sequence"};
static const tag T_ENERGY = {"300A0114", "Nominal Beam Energy"};
static const tag T_WEDGE_POS_SEQ = {"300A0116", "Wedge Position Sequence"};
static const tag T_WEDGE_POSITION = {"300A0118", "Wedge Position"};
static const tag T_BLD_POS_SEQ = {"300A011A", "Beam Limiting Device Position Sequence"};
static const tag T_LEAF_JAW_POS = {"300A011C", "Leaf/Jaw Positions"};
static const tag T_GANTRY = {"300A011E", "Gantry Angle"};
static const tag T_GANTRY_DIR = {"300A011F", "Gantry Rotation Direction"};
static const tag T_COLLIMATOR = {"300A0120", "Beam Limiting Device Angle"};
static const tag T_COUCH = {"300A0122", "Patient Support Angle"};
static const tag T_SSD = {"300A0130", "Source to Surface Distance"};
static const tag T_ION_BEAM_SEQ = {"300A03A2", "Ion Beam Sequence"};
static const tag T_REF_BEAM_SEQ = {"300C0004", "Referenced Beam Sequence"};
static const tag T_REF_BEAM_NUMBER = {"300C0006", "Referenced Beam Number"};
static const tag T_REF_WEDGE_NUMBER = {"300C00C0", "Referenced Wedge Number"};

typedef struct parser {
    fxl_ctx *ctx;
    const char *name;
} parser;

/* ---- structure of the JSON Model -------------------------------------------- */

static int is_tag_key(const char *s)
{
    int i;

    if (!s || strlen(s) != 8)
        return 0;
    for (i = 0; i < 8; i++)
        if (!isxdigit((unsigned char)s[i]))
            return 0;
    return 1;
}

static int cmp_tag(const void *a, const void *b)
{
    unsigned long x = *(const unsigned long *)a, y = *(const unsigned long *)b;

    return x < y ? -1 : x > y;
}

/* A tag may appear once in a data set (PS3.5 7.1: the elements of a data
 * set have distinct tags; PS3.18 F.2 keys the JSON object by tag). cJSON
 * keeps every repeated key and the reader would silently take the first, so
 * a repeated tag is refused, as the other readers refuse a repeated key.
 * "300a00b0" and "300A00B0" are the same tag. Sorting keeps a data set of
 * many members linear-logarithmic (the reader is fuzzed). */
static int check_repeated_tags(const parser *p, const cJSON *ds, int n)
{
    unsigned long *tags, dup = 0;
    const cJSON *el;
    int i = 0, found = 0;

    if (n < 2)
        return 0;
    if (!(tags = malloc((size_t)n * sizeof *tags)))
        return fxl_fail(p->ctx, FXL_EIO, "out of memory reading '%s'", p->name);
    for (el = ds->child; el && i < n; el = el->next)
        tags[i++] = strtoul(el->string, NULL, 16);   /* 8 hex digits: checked by is_tag_key */
    qsort(tags, (size_t)i, sizeof *tags, cmp_tag);
    for (n = 1; n < i && !found; n++)
        if (tags[n] == tags[n - 1]) {
            dup = tags[n];
            found = 1;
        }
    free(tags);
    if (found)
        return fxl_fail(p->ctx, FXL_EINVAL,
                        "file '%s': malformed DICOM JSON: tag (%04lX,%04lX) appears twice in one data set",
                        p->name, (dup >> 16) & 0xFFFFUL, dup & 0xFFFFUL);
    return 0;
}

/* Every member of a data set is a tag holding {"vr", "Value" | "BulkDataURI" |
 * "InlineBinary"}, each key once; sequence items are data sets in turn
 * (PS3.18 F.2). No tag appears twice in a data set. */
static int check_dataset(const parser *p, const cJSON *ds, int depth)
{
    const cJSON *el, *m, *item;
    int n = 0, rc;

    if (depth > DEPTH_MAX)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': malformed DICOM JSON: sequences nested deeper than %d",
                        p->name, DEPTH_MAX);
    for (el = ds->child; el; el = el->next) {
        const cJSON *vr = NULL, *value = NULL, *other = NULL;
        if (!is_tag_key(el->string))
            return fxl_fail(p->ctx, FXL_EINVAL,
                            "file '%s': malformed DICOM JSON: key '%.20s' is not a tag of 8 hex digits",
                            p->name, el->string ? el->string : "");
        n++;
        if (!cJSON_IsObject(el))
            return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': malformed DICOM JSON: element %s is not an object",
                            p->name, el->string);
        for (m = el->child; m; m = m->next) {
            const cJSON **slot;
            if (strcmp(m->string, "vr") == 0)
                slot = &vr;
            else if (strcmp(m->string, "Value") == 0)
                slot = &value;
            else if (strcmp(m->string, "BulkDataURI") == 0 || strcmp(m->string, "InlineBinary") == 0)
                slot = &other;
            else
                return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': malformed DICOM JSON: element %s has unknown key '%.20s'",
                                p->name, el->string, m->string);
            if (*slot)
                return fxl_fail(p->ctx, FXL_EINVAL,
                                "file '%s': malformed DICOM JSON: element %s has key '%s' twice", p->name,
                                el->string, m->string);
            *slot = m;
        }
        if (!cJSON_IsString(vr) || strlen(vr->valuestring) != 2)
            return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': malformed DICOM JSON: element %s has no 'vr'",
                            p->name, el->string);
        if (value && !cJSON_IsArray(value))
            return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': malformed DICOM JSON: 'Value' of element %s is not an array",
                            p->name, el->string);
        if (value && strcmp(vr->valuestring, "SQ") == 0) {
            cJSON_ArrayForEach(item, value) {
                if (!cJSON_IsObject(item))
                    return fxl_fail(p->ctx, FXL_EINVAL,
                                    "file '%s': malformed DICOM JSON: an item of sequence %s is not an object",
                                    p->name, el->string);
                if ((rc = check_dataset(p, item, depth + 1)) != 0)
                    return rc;
            }
        }
    }
    return check_repeated_tags(p, ds, n);
}

/* ---- reading attributes -------------------------------------------------------- */

static const cJSON *element(const cJSON *ds, const tag *t)
{
    const cJSON *el;

    for (el = ds ? ds->child : NULL; el; el = el->next)
        if (strcasecmp(el->string, t->hex) == 0)
            return el;
    return NULL;
}

/* The Value array of an attribute; NULL when absent or empty. */
static const cJSON *values(const cJSON *ds, const tag *t)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(element(ds, t), "Value");

    return cJSON_IsArray(v) && cJSON_GetArraySize(v) > 0 ? v : NULL;
}

/* Items of a sequence and their count (0 when absent or empty). */
static const cJSON *seq(const cJSON *ds, const tag *t, int *n)
{
    const cJSON *v = values(ds, t);

    *n = v ? cJSON_GetArraySize(v) : 0;
    return v;
}

static int missing(const parser *p, const char *where, const tag *t)
{
    return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s (%.4s,%.4s) is missing", p->name, where,
                    t->keyword, t->hex, t->hex + 4);
}

/* The first value of a text attribute (or the Alphabetic group of a person
 * name) into buf. Returns 1 if read, 0 if absent (an error when required),
 * negative on a bad value. */
static int get_text(const parser *p, const char *where, const cJSON *ds, const tag *t, int required, char *buf,
                    size_t size)
{
    const cJSON *v = values(ds, t), *first;
    const char *s = NULL;
    size_t len;

    buf[0] = '\0';
    first = v ? v->child : NULL;
    if (cJSON_IsString(first))
        s = first->valuestring;
    else if (cJSON_IsObject(first))
        s = cJSON_GetStringValue(cJSON_GetObjectItemCaseSensitive(first, "Alphabetic"));
    else if (first && !cJSON_IsNull(first))
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s (%.4s,%.4s) must be text", p->name, where,
                        t->keyword, t->hex, t->hex + 4);
    if (!s || !*s) {
        if (required)
            return missing(p, where, t);
        return 0;
    }
    len = strlen(s);
    /* DICOM pads text values to even length with a space. */
    while (len > 0 && s[len - 1] == ' ')
        len--;
    if (len >= size)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s (%.4s,%.4s) is longer than %zu characters",
                        p->name, where, t->keyword, t->hex, t->hex + 4, size - 1);
    memcpy(buf, s, len);
    buf[len] = '\0';
    /* Short text values (LO, SH, CS, PN, UI) hold no control characters. */
    if (fxl_text_control_at(buf) >= 0)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s (%.4s,%.4s) must not contain control characters",
                        p->name, where, t->keyword, t->hex, t->hex + 4);
    if (len == 0 && required)
        return missing(p, where, t);
    return len > 0;
}

/* A number written as a JSON number or as decimal text (DS and IS may come
 * either way). 0 on success. */
static int as_number(const cJSON *v, double *out)
{
    const char *s;

    if (cJSON_IsNumber(v) && isfinite(v->valuedouble)) {
        *out = v->valuedouble;
        return 0;
    }
    if (!cJSON_IsString(v))
        return -1;
    s = v->valuestring;
    /* DS and IS: decimal text, leading and trailing spaces allowed (DICOM
     * PS3.5 section 6.2); never hexadecimal, inf or nan. */
    return fxl_number_parse(out, s, FXL_NUM_SPACES) == FXL_NUM_OK ? 0 : -1;
}

/* Value `index` of a numeric attribute. Returns 1 if read, 0 if absent (an
 * error when required), negative on a bad value. */
static int get_num(const parser *p, const char *where, const cJSON *ds, const tag *t, int index, int required,
                   double *out)
{
    const cJSON *v = values(ds, t);

    *out = NAN;
    if (!v || index >= cJSON_GetArraySize(v) || cJSON_IsNull(cJSON_GetArrayItem(v, index))) {
        if (required)
            return missing(p, where, t);
        return 0;
    }
    if (as_number(cJSON_GetArrayItem(v, index), out) != 0) {
        const cJSON *x = cJSON_GetArrayItem(v, index);
        char shown[40];
        /* the text as written, made printable: "0x1.7b8p3" is not decimal (PS3.5 6.2) */
        fxl_text_printable(shown, sizeof shown, cJSON_IsString(x) ? x->valuestring : "");
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s (%.4s,%.4s)%s%s%s must be a plain decimal number",
                        p->name, where, t->keyword, t->hex, t->hex + 4, cJSON_IsString(x) ? " '" : "",
                        shown, cJSON_IsString(x) ? "'" : "");
    }
    return 1;
}

static int get_int(const parser *p, const char *where, const cJSON *ds, const tag *t, int required, int *out)
{
    double d;
    int rc = get_num(p, where, ds, t, 0, required, &d);

    *out = 0;
    if (rc <= 0)
        return rc;
    if (d != floor(d) || fabs(d) > 1e9)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s (%.4s,%.4s) '%g' must be a whole number", p->name,
                        where, t->keyword, t->hex, t->hex + 4, d);
    *out = (int)d;
    return 1;
}

/* All values of a numeric attribute into out[max]; *n is the count. */
static int get_nums(const parser *p, const char *where, const cJSON *ds, const tag *t, double *out, size_t max,
                    size_t *n)
{
    const cJSON *v = values(ds, t), *x;

    *n = 0;
    if (!v)
        return 0;
    cJSON_ArrayForEach(x, v) {
        if (*n >= max)
            return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s (%.4s,%.4s) has more than %zu values", p->name,
                            where, t->keyword, t->hex, t->hex + 4, max);
        if (as_number(x, &out[*n]) != 0)
            return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s (%.4s,%.4s) must hold numbers", p->name,
                            where, t->keyword, t->hex, t->hex + 4);
        (*n)++;
    }
    return 1;
}

/* ---- collimators ----------------------------------------------------------------- */

typedef struct collimation {
    int has_x, has_y, has_mlc;
    double x1, x2, y1, y2;          /* mm */
    size_t pairs;
    double leaves[2 * LEAF_PAIRS_MAX];   /* bank A (X1 side) then bank B */
} collimation;

/* The positions of every device in one control point. */
static int read_positions(const parser *p, const char *where, const cJSON *cp, collimation *c)
{
    const cJSON *items, *it;
    double pos[2 * LEAF_PAIRS_MAX];
    char type[17];
    size_t n;
    int count, rc;

    memset(c, 0, sizeof *c);
    items = seq(cp, &T_BLD_POS_SEQ, &count);
    cJSON_ArrayForEach(it, items) {
        if ((rc = get_text(p, where, it, &T_BLD_TYPE, 1, type, sizeof type)) < 0 ||
            (rc = get_nums(p, where, it, &T_LEAF_JAW_POS, pos, 2 * LEAF_PAIRS_MAX, &n)) < 0)
            return rc;
        if (strcmp(type, "MLCY") == 0)
            return fxl_fail(p->ctx, FXL_EINVAL,
                            "file '%s': %s: an MLC with leaves moving along Y (MLCY) is not supported", p->name, where);
        if (strcmp(type, "MLCX") == 0) {
            if (n < 2 || n % 2 != 0)
                return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: MLCX %s must hold two banks of leaf positions",
                                p->name, where, T_LEAF_JAW_POS.keyword);
            c->has_mlc = 1;
            c->pairs = n / 2;
            memcpy(c->leaves, pos, n * sizeof *pos);
            continue;
        }
        if (strcmp(type, "X") != 0 && strcmp(type, "ASYMX") != 0 && strcmp(type, "Y") != 0 &&
            strcmp(type, "ASYMY") != 0)
            return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: beam limiting device type '%s' is not supported",
                            p->name, where, type);
        if (n != 2)
            return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s jaw positions must be two numbers", p->name,
                            where, type);
        if (!(pos[1] > pos[0]))
            return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s jaws closed or crossed (%g to %g mm)", p->name,
                            where, type, pos[0], pos[1]);
        if (type[strlen(type) - 1] == 'X') {
            c->has_x = 1;
            c->x1 = pos[0];
            c->x2 = pos[1];
        } else {
            c->has_y = 1;
            c->y1 = pos[0];
            c->y2 = pos[1];
        }
    }
    return 0;
}

/* 1 if the devices of control point b sit where a has them (the ones b
 * gives: later control points carry only what changes). */
static int same_positions(const collimation *a, const collimation *b)
{
    size_t i;

    if (b->has_x && (!a->has_x || fabs(a->x1 - b->x1) > SAME_MM || fabs(a->x2 - b->x2) > SAME_MM))
        return 0;
    if (b->has_y && (!a->has_y || fabs(a->y1 - b->y1) > SAME_MM || fabs(a->y2 - b->y2) > SAME_MM))
        return 0;
    if (b->has_mlc) {
        if (!a->has_mlc || a->pairs != b->pairs)
            return 0;
        for (i = 0; i < 2 * a->pairs; i++)
            if (fabs(a->leaves[i] - b->leaves[i]) > SAME_MM)
                return 0;
    }
    return 1;
}

/* Jaw openings and the field after the MLC (docs/dicom-import.md): the
 * rectangle that bounds the open leaf pairs, clipped to the jaws. */
static int field_size(const parser *p, const char *where, const cJSON *beam, const collimation *c,
                      fxl_dicom_beam *b)
{
    double fx = 0, fy = 0, jx = 0, jy = 0;

    if (c->has_mlc) {
        const cJSON *devs, *it;
        double bounds[LEAF_PAIRS_MAX + 1], ylo = INFINITY, yhi = -INFINITY, amin = INFINITY, bmax = -INFINITY;
        double yl = c->has_y ? c->y1 : -INFINITY, yh = c->has_y ? c->y2 : INFINITY;
        size_t nb = 0, i;
        int count, rc, found = 0, np = 0;
        char type[17];

        devs = seq(beam, &T_BLD_SEQ, &count);
        cJSON_ArrayForEach(it, devs) {
            if ((rc = get_text(p, where, it, &T_BLD_TYPE, 1, type, sizeof type)) < 0)
                return rc;
            if (strcmp(type, "MLCX") != 0)
                continue;
            found = 1;
            if ((rc = get_nums(p, where, it, &T_LEAF_BOUNDARIES, bounds, LEAF_PAIRS_MAX + 1, &nb)) < 0 ||
                (rc = get_int(p, where, it, &T_LEAF_PAIRS, 0, &np)) < 0)
                return rc;
            if (rc > 0 && (size_t)np != c->pairs)
                return fxl_fail(p->ctx, FXL_EINVAL,
                                "file '%s': %s: %s (%.4s,%.4s) says %d but the first control point has %zu leaf pairs",
                                p->name, where, T_LEAF_PAIRS.keyword, T_LEAF_PAIRS.hex, T_LEAF_PAIRS.hex + 4, np,
                                c->pairs);
        }
        if (!found || nb == 0)
            return fxl_fail(p->ctx, FXL_EINVAL,
                            "file '%s': %s: the MLCX in %s (%.4s,%.4s) has no %s (%.4s,%.4s)", p->name, where,
                            T_BLD_SEQ.keyword, T_BLD_SEQ.hex, T_BLD_SEQ.hex + 4, T_LEAF_BOUNDARIES.keyword,
                            T_LEAF_BOUNDARIES.hex, T_LEAF_BOUNDARIES.hex + 4);
        if (nb != c->pairs + 1)
            return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %zu leaf boundaries for %zu leaf pairs (must be %zu)",
                            p->name, where, nb, c->pairs, c->pairs + 1);
        for (i = 1; i < nb; i++)
            if (!(bounds[i] > bounds[i - 1]))
                return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s must increase", p->name, where,
                                T_LEAF_BOUNDARIES.keyword);
        for (i = 0; i < c->pairs; i++) {
            double a = c->leaves[i], bb = c->leaves[c->pairs + i];
            double lo = bounds[i], hi = bounds[i + 1];
            if (bb - a <= LEAF_OPEN_MM || hi <= yl || lo >= yh)
                continue;  /* closed, or hidden behind a Y jaw */
            amin = fmin(amin, a);
            bmax = fmax(bmax, bb);
            ylo = fmin(ylo, fmax(lo, yl));
            yhi = fmax(yhi, fmin(hi, yh));
        }
        if (!(bmax > amin))
            return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: the MLC closes the field (no leaf pair open inside the jaws)",
                            p->name, where);
        if (c->has_x) {
            double x1 = fmax(c->x1, amin), x2 = fmin(c->x2, bmax);
            if (!(x2 > x1))
                return fxl_fail(p->ctx, FXL_EINVAL,
                                "file '%s': %s: the MLC opening lies outside the X jaws (no field)", p->name, where);
            jx = c->x2 - c->x1;
            fx = x2 - x1;
        } else {
            jx = fx = bmax - amin;   /* the MLC is the X collimator */
        }
        jy = c->has_y ? c->y2 - c->y1 : yhi - ylo;
        fy = yhi - ylo;
        b->mlc = 1;
    } else {
        if (!c->has_x)
            return fxl_fail(p->ctx, FXL_EINVAL,
                            "file '%s': %s: no X jaw positions (X or ASYMX) in the first control point", p->name, where);
        if (!c->has_y)
            return fxl_fail(p->ctx, FXL_EINVAL,
                            "file '%s': %s: no Y jaw positions (Y or ASYMY) in the first control point", p->name, where);
        jx = fx = c->x2 - c->x1;
        jy = fy = c->y2 - c->y1;
    }
    /* Positions are in mm in the isocentre plane (PS3.3 C.8.8.14.6). */
    b->jaw_x_cm = jx / 10.0;
    b->jaw_y_cm = jy / 10.0;
    b->field_x_cm = fx / 10.0;
    b->field_y_cm = fy / 10.0;
    b->coll_eqsq_cm = fxl_equiv_square_cm(b->jaw_x_cm, b->jaw_y_cm);
    b->field_eqsq_cm = fxl_equiv_square_cm(b->field_x_cm, b->field_y_cm);
    return 0;
}

/* ---- one beam -------------------------------------------------------------------- */

/* Wedges of the beam that are in the field at the first control point; a
 * motorised wedge that moves during the beam is refused. */
static int read_wedges(const parser *p, const char *where, const cJSON *beam, const cJSON *cps, fxl_dicom_beam *b)
{
    const cJSON *wedges, *w, *cp;
    int n_wedges = 0, n_seq, rc, in_count = 0;
    int numbers[8], state0[8];
    double angles[8];
    char ids[8][65], types[8][17];
    int i;

    if ((rc = get_int(p, where, beam, &T_N_WEDGES, 0, &n_wedges)) < 0)
        return rc;
    wedges = seq(beam, &T_WEDGE_SEQ, &n_seq);
    if (rc == 0)
        n_wedges = n_seq;
    if (n_wedges != n_seq)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s (%.4s,%.4s) says %d but the %s holds %d", p->name,
                        where, T_N_WEDGES.keyword, T_N_WEDGES.hex, T_N_WEDGES.hex + 4, n_wedges, T_WEDGE_SEQ.keyword,
                        n_seq);
    if (n_seq > 8)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %d wedges: one wedge per beam is supported", p->name,
                        where, n_seq);
    i = 0;
    cJSON_ArrayForEach(w, wedges) {
        if ((rc = get_int(p, where, w, &T_WEDGE_NUMBER, 0, &numbers[i])) < 0 ||
            (rc = get_num(p, where, w, &T_WEDGE_ANGLE, 0, 1, &angles[i])) < 0 ||
            (rc = get_text(p, where, w, &T_WEDGE_ID, 0, ids[i], sizeof ids[i])) < 0 ||
            (rc = get_text(p, where, w, &T_WEDGE_TYPE, 0, types[i], sizeof types[i])) < 0)
            return rc;
        if (!(angles[i] >= 0 && angles[i] <= 90))
            return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s '%g' must be 0 to 90 deg", p->name, where,
                            T_WEDGE_ANGLE.keyword, angles[i]);
        state0[i] = 1;  /* in, unless a wedge position says otherwise */
        i++;
    }
    /* Wedge Position Sequence (300A,0116): IN/OUT per control point. */
    i = 0;
    cJSON_ArrayForEach(cp, cps) {
        const cJSON *wp, *it;
        int nwp, k;
        wp = seq(cp, &T_WEDGE_POS_SEQ, &nwp);
        cJSON_ArrayForEach(it, wp) {
            char pos[8];
            int ref = 0;
            if ((rc = get_int(p, where, it, &T_REF_WEDGE_NUMBER, 1, &ref)) < 0 ||
                (rc = get_text(p, where, it, &T_WEDGE_POSITION, 1, pos, sizeof pos)) < 0)
                return rc;
            for (k = 0; k < n_seq; k++) {
                int inside = strcmp(pos, "IN") == 0;
                if (numbers[k] != ref)
                    continue;
                if (i == 0)
                    state0[k] = inside;
                else if (inside != state0[k])
                    return fxl_fail(p->ctx, FXL_EINVAL,
                                    "file '%s': %s: the motorised wedge moves %s during the beam (partial wedging): not supported",
                                    p->name, where, inside ? "in" : "out");
            }
        }
        i++;
    }
    for (i = 0; i < n_seq; i++) {
        if (!state0[i])
            continue;
        if (in_count++ == 0) {
            b->wedge_deg = angles[i];
            snprintf(b->wedge_id, sizeof b->wedge_id, "%.*s", (int)sizeof b->wedge_id - 1, ids[i]);
            snprintf(b->wedge_type, sizeof b->wedge_type, "%s", types[i]);
        }
    }
    if (in_count > 1)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %d wedges in the field: one wedge per beam is supported",
                        p->name, where, in_count);
    b->wedge_count = in_count;
    return 0;
}

/* Meterset and beam dose of beam `number` in the fraction group. */
static int read_meterset(const parser *p, const char *where, const cJSON *fg, int number, fxl_dicom_beam *b)
{
    const cJSON *refs, *r;
    int n, rc, ref;

    refs = seq(fg, &T_REF_BEAM_SEQ, &n);
    cJSON_ArrayForEach(r, refs) {
        if ((rc = get_int(p, "fraction group", r, &T_REF_BEAM_NUMBER, 1, &ref)) < 0)
            return rc;
        if (ref != number)
            continue;
        if ((rc = get_num(p, where, r, &T_BEAM_METERSET, 0, 0, &b->mu)) < 0)
            return rc;
        if (rc == 0)
            return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s (%.4s,%.4s) missing in the fraction group",
                            p->name, where, T_BEAM_METERSET.keyword, T_BEAM_METERSET.hex, T_BEAM_METERSET.hex + 4);
        if (!(b->mu > 0))
            return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s '%g' MU must be > 0", p->name, where,
                            T_BEAM_METERSET.keyword, b->mu);
        if ((rc = get_num(p, where, r, &T_BEAM_DOSE, 0, 0, &b->beam_dose_cgy)) < 0)
            return rc;
        if (rc > 0)
            b->beam_dose_cgy *= 100.0;  /* Gy to cGy */
        return 0;
    }
    return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s is not in the fraction group's %s (%.4s,%.4s): no meterset",
                    p->name, where, T_REF_BEAM_SEQ.keyword, T_REF_BEAM_SEQ.hex, T_REF_BEAM_SEQ.hex + 4);
}

/* Gantry and collimator motion over the control points: arcs and modulated
 * beams are refused. */
static int check_static(const parser *p, const char *where, const cJSON *cps, const collimation *c0, double g0)
{
    const cJSON *cp;
    collimation c;
    char dir[8];
    double g;
    int i = 0, rc;

    cJSON_ArrayForEach(cp, cps) {
        if ((rc = get_text(p, where, cp, &T_GANTRY_DIR, 0, dir, sizeof dir)) < 0)
            return rc;
        if (rc > 0 && strcmp(dir, "NONE") != 0)
            return fxl_fail(p->ctx, FXL_EINVAL,
                            "file '%s': %s is an arc (gantry rotation %s from %g deg): arcs are not supported",
                            p->name, where, dir, g0);
        if ((rc = get_num(p, where, cp, &T_GANTRY, 0, 0, &g)) < 0)
            return rc;
        if (rc > 0 && fabs(g - g0) > 0.01)
            return fxl_fail(p->ctx, FXL_EINVAL,
                            "file '%s': %s is an arc (gantry moves from %g to %g deg): arcs are not supported",
                            p->name, where, g0, g);
        if (i > 0) {
            if ((rc = read_positions(p, where, cp, &c)) != 0)
                return rc;
            if (!same_positions(c0, &c))
                return fxl_fail(p->ctx, FXL_EINVAL,
                                "file '%s': %s is modulated (jaws or MLC move during the beam: IMRT, VMAT or a "
                                "dynamic wedge): not supported", p->name, where);
        }
        i++;
    }
    return 0;
}

/* One item of the Beam Sequence. *skip is set for a beam that is not a
 * treatment beam (set-up, open port film), which is noted and left out. */
static int read_beam(const parser *p, fxl_dicom_plan *plan, const cJSON *item, const cJSON *fg,
                     fxl_dicom_beam *b, int *skip)
{
    const cJSON *cps, *cp0, *blocks, *apps;
    collimation c0;
    char where[128], type[17], unit[17];
    int rc, n_cps, n, n_comp = 0;

    *skip = 0;
    memset(b, 0, sizeof *b);
    b->collimator_deg = b->couch_deg = b->sad_cm = b->beam_dose_cgy = NAN;
    if ((rc = get_int(p, "Beam Sequence item", item, &T_BEAM_NUMBER, 1, &b->number)) < 0 ||
        (rc = get_text(p, "Beam Sequence item", item, &T_BEAM_NAME, 0, b->name, sizeof b->name)) < 0)
        return rc;
    if (!b->name[0])
        snprintf(b->name, sizeof b->name, "beam %d", b->number);
    snprintf(where, sizeof where, "beam '%s' (number %d)", b->name, b->number);

    if ((rc = get_text(p, where, item, &T_DELIVERY, 0, b->delivery, sizeof b->delivery)) < 0)
        return rc;
    if (rc == 0)
        strcpy(b->delivery, "TREATMENT");
    if (strcmp(b->delivery, "SETUP") == 0 || strcmp(b->delivery, "OPEN_PORTFILM") == 0 ||
        strcmp(b->delivery, "VERIFICATION") == 0) {
        fxl_reasons_add(&plan->notes, "%s: %s beam left out (not a treatment beam)", where, b->delivery);
        *skip = 1;
        return 0;
    }
    if (strcmp(b->delivery, "TREATMENT") != 0 && strcmp(b->delivery, "TRMT_PORTFILM") != 0)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s '%s' is not supported", p->name, where,
                        T_DELIVERY.keyword, b->delivery);

    if ((rc = get_text(p, where, item, &T_RADIATION, 1, b->radiation, sizeof b->radiation)) < 0)
        return rc;
    if (strcmp(b->radiation, "PHOTON") == 0) {
        strcpy(b->modality, "photon");
    } else if (strcmp(b->radiation, "ELECTRON") == 0) {
        strcpy(b->modality, "electron");
    } else {
        return fxl_fail(p->ctx, FXL_EINVAL,
                        "file '%s': %s: radiation type '%s' is not supported (photon and electron beams only)",
                        p->name, where, b->radiation);
    }
    if ((rc = get_text(p, where, item, &T_MACHINE, 0, b->machine, sizeof b->machine)) < 0 ||
        (rc = get_text(p, where, item, &T_DOSIMETER_UNIT, 0, unit, sizeof unit)) < 0)
        return rc;
    if (rc > 0 && strcmp(unit, "MU") != 0)
        return fxl_fail(p->ctx, FXL_EINVAL,
                        "file '%s': %s: primary dosimeter unit '%s' is not supported (MU only; timer-set beams are not)",
                        p->name, where, unit);
    if ((rc = get_num(p, where, item, &T_SAD, 0, 0, &b->sad_cm)) < 0)
        return rc;
    if (rc > 0) {
        if (!(b->sad_cm > 0))
            return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s '%g' mm must be > 0", p->name, where,
                            T_SAD.keyword, b->sad_cm);
        b->sad_cm /= 10.0;
    }
    if ((rc = get_text(p, where, item, &T_BEAM_TYPE, 0, type, sizeof type)) < 0)
        return rc;
    if (rc > 0 && strcmp(type, "STATIC") != 0 && strcmp(type, "DYNAMIC") != 0)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s '%s' is not supported", p->name, where,
                        T_BEAM_TYPE.keyword, type);
    if ((rc = get_int(p, where, item, &T_N_COMPENSATORS, 0, &n_comp)) < 0)
        return rc;
    if (n_comp > 0)
        return fxl_fail(p->ctx, FXL_EINVAL,
                        "file '%s': %s carries %d compensator(s): compensators are not supported", p->name, where,
                        n_comp);
    if ((rc = get_int(p, where, item, &T_N_BOLI, 0, &b->bolus_count)) < 0)
        return rc;
    if (b->bolus_count > 0)
        fxl_reasons_add(&plan->notes, "%s: %d bolus(es) on the beam: place the detector as the department's "
                        "procedure for bolus says", where, b->bolus_count);
    if ((rc = get_int(p, where, item, &T_N_BLOCKS, 0, &b->block_count)) < 0)
        return rc;
    blocks = seq(item, &T_BLOCK_SEQ, &n);
    if (blocks && (rc = get_text(p, where, blocks->child, &T_BLOCK_TRAY_ID, 0, b->tray_id, sizeof b->tray_id)) < 0)
        return rc;
    if (b->block_count < n)
        b->block_count = n;
    /* Photon blocks sit on a tray; an electron block is the cut-out in the
     * applicator, which carries no tray factor. */
    b->tray = strcmp(b->modality, "photon") == 0 && (b->block_count > 0 || b->tray_id[0]);
    apps = seq(item, &T_APPLICATOR_SEQ, &n);
    if (apps && (rc = get_text(p, where, apps->child, &T_APPLICATOR_ID, 0, b->applicator_id,
                               sizeof b->applicator_id)) < 0)
        return rc;

    cps = seq(item, &T_CP_SEQ, &n_cps);
    if (!cps)
        return missing(p, where, &T_CP_SEQ);
    cp0 = cps->child;
    if ((rc = get_num(p, where, cp0, &T_ENERGY, 0, 1, &b->energy)) < 0 ||
        (rc = get_num(p, where, cp0, &T_GANTRY, 0, 1, &b->gantry_deg)) < 0 ||
        (rc = get_num(p, where, cp0, &T_COLLIMATOR, 0, 0, &b->collimator_deg)) < 0 ||
        (rc = get_num(p, where, cp0, &T_COUCH, 0, 0, &b->couch_deg)) < 0)
        return rc;
    if ((rc = get_num(p, where, cp0, &T_SSD, 0, 0, &b->ssd_cm)) < 0)
        return rc;
    if (rc == 0)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s (%.4s,%.4s) is missing in the first control point",
                        p->name, where, T_SSD.keyword, T_SSD.hex, T_SSD.hex + 4);
    if (!(b->energy > 0))
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s '%g' must be > 0", p->name, where,
                        T_ENERGY.keyword, b->energy);
    if (!(b->gantry_deg >= 0 && b->gantry_deg < 360))
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s '%g' must be 0 to < 360 deg", p->name, where,
                        T_GANTRY.keyword, b->gantry_deg);
    if (!(b->ssd_cm > 0))
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s: %s '%g' mm must be > 0", p->name, where,
                        T_SSD.keyword, b->ssd_cm);
    b->ssd_cm /= 10.0;  /* mm to cm */
    if ((rc = read_positions(p, where, cp0, &c0)) != 0 || (rc = check_static(p, where, cps, &c0, b->gantry_deg)) != 0 ||
        (rc = field_size(p, where, item, &c0, b)) != 0 || (rc = read_wedges(p, where, item, cps, b)) != 0 ||
        (rc = read_meterset(p, where, fg, b->number, b)) != 0)
        return rc;
    if (b->wedge_count && strcmp(b->wedge_type, "DYNAMIC") == 0)
        fxl_reasons_add(&plan->notes, "%s: dynamic wedge %g deg: its wedge factor and the detector's wedge "
                        "correction must be those of the dynamic wedge", where, b->wedge_deg);
    return 0;
}

/* ---- the plan ---------------------------------------------------------------------- */

static void split_name(fxl_dicom_plan *plan)
{
    const char *caret = strchr(plan->patient_name, '^');
    size_t n;

    if (!caret) {
        snprintf(plan->family_name, sizeof plan->family_name, "%s", plan->patient_name);
        return;
    }
    n = (size_t)(caret - plan->patient_name);
    snprintf(plan->family_name, sizeof plan->family_name, "%.*s", (int)n, plan->patient_name);
    n = strcspn(caret + 1, "^");
    snprintf(plan->given_name, sizeof plan->given_name, "%.*s", (int)n, caret + 1);
}

static int read_header(const parser *p, const cJSON *ds, fxl_dicom_plan *plan)
{
    char sop[65], modality[17];
    int has_sop, has_mod;

    if ((has_sop = get_text(p, "plan", ds, &T_SOP_CLASS, 0, sop, sizeof sop)) < 0 ||
        (has_mod = get_text(p, "plan", ds, &T_MODALITY, 0, modality, sizeof modality)) < 0)
        return FXL_EINVAL;
    if ((has_sop && strcmp(sop, RT_ION_PLAN_SOP_CLASS) == 0) || element(ds, &T_ION_BEAM_SEQ))
        return fxl_fail(p->ctx, FXL_EINVAL,
                        "file '%s': an RT Ion Plan (protons or ions) is not supported: photon and electron RT Plans only",
                        p->name);
    if (has_sop && strcmp(sop, RT_PLAN_SOP_CLASS) != 0)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': SOP class '%s' is not an RT Plan (%s)", p->name, sop,
                        RT_PLAN_SOP_CLASS);
    if (has_mod && strcmp(modality, "RTPLAN") != 0)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': modality '%s' is not RTPLAN", p->name, modality);
    if (!has_sop && !has_mod)
        return fxl_fail(p->ctx, FXL_EINVAL,
                        "file '%s': not an RT Plan: neither SOP Class UID (0008,0016) nor Modality (0008,0060) is given",
                        p->name);
    if (get_text(p, "plan", ds, &T_SOP_INSTANCE, 0, plan->sop_instance_uid, sizeof plan->sop_instance_uid) < 0 ||
        get_text(p, "plan", ds, &T_PATIENT_ID, 1, plan->patient_id, sizeof plan->patient_id) < 0 ||
        get_text(p, "plan", ds, &T_PATIENT_NAME, 0, plan->patient_name, sizeof plan->patient_name) < 0 ||
        get_text(p, "plan", ds, &T_PLAN_LABEL, 1, plan->label, sizeof plan->label) < 0 ||
        get_text(p, "plan", ds, &T_PLAN_NAME, 0, plan->plan_name, sizeof plan->plan_name) < 0)
        return FXL_EINVAL;
    split_name(plan);
    return 0;
}

/* Dose per fraction from the one Target Prescription Dose of the plan. */
static int read_prescription(const parser *p, const cJSON *ds, fxl_dicom_plan *plan)
{
    const cJSON *refs, *r;
    double dose, first = NAN;
    int n, found = 0, differ = 0, rc;

    refs = seq(ds, &T_DOSE_REF_SEQ, &n);
    cJSON_ArrayForEach(r, refs) {
        if ((rc = get_num(p, "dose reference", r, &T_TARGET_DOSE, 0, 0, &dose)) < 0)
            return rc;
        if (rc == 0)
            continue;
        if (!(dose > 0))
            return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s '%g' Gy must be > 0", p->name,
                            T_TARGET_DOSE.keyword, dose);
        if (found++ == 0)
            first = dose;
        else if (fabs(dose - first) > 1e-9)
            differ = 1;
    }
    if (found && !differ)
        plan->dose_per_fraction_cgy = first * 100.0 / plan->fractions;
    else if (differ)
        fxl_reasons_add(&plan->notes, "%d different target prescription doses: dose per fraction left empty", found);
    return 0;
}

static int read_plan(const parser *p, const cJSON *ds, fxl_dicom_plan *plan)
{
    const cJSON *fgs, *fg, *beams, *item, *refs, *r;
    int n_fg, n_beams, rc, skip;
    size_t i, j;

    if ((rc = check_dataset(p, ds, 0)) != 0 || (rc = read_header(p, ds, plan)) != 0)
        return rc;
    fgs = seq(ds, &T_FRACTION_GROUP_SEQ, &n_fg);
    if (n_fg == 0)
        return missing(p, "plan", &T_FRACTION_GROUP_SEQ);
    if (n_fg > 1)
        return fxl_fail(p->ctx, FXL_EINVAL,
                        "file '%s': the plan has %d fraction groups: one fraction group is supported", p->name, n_fg);
    fg = fgs->child;
    if ((rc = get_int(p, "fraction group", fg, &T_FRACTIONS, 1, &plan->fractions)) < 0)
        return rc;
    if (plan->fractions < 1)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %s '%d' must be >= 1", p->name, T_FRACTIONS.keyword,
                        plan->fractions);
    if ((rc = read_prescription(p, ds, plan)) != 0)
        return rc;
    beams = seq(ds, &T_BEAM_SEQ, &n_beams);
    if (n_beams == 0)
        return missing(p, "plan", &T_BEAM_SEQ);
    if (n_beams > FXL_DICOM_BEAMS_MAX)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': %d beams: at most %d are supported", p->name, n_beams,
                        FXL_DICOM_BEAMS_MAX);
    if (!(plan->beams = calloc((size_t)n_beams, sizeof *plan->beams)))
        return fxl_fail(p->ctx, FXL_EIO, "out of memory reading '%s'", p->name);
    cJSON_ArrayForEach(item, beams) {
        if ((rc = read_beam(p, plan, item, fg, &plan->beams[plan->n_beams], &skip)) != 0)
            return rc;
        if (!skip)
            plan->n_beams++;
    }
    if (plan->n_beams == 0)
        return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': the plan has no treatment beam", p->name);
    for (i = 0; i < plan->n_beams; i++) {
        for (j = i + 1; j < plan->n_beams; j++) {
            if (plan->beams[i].number == plan->beams[j].number)
                return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': beam number %d is used twice", p->name,
                                plan->beams[i].number);
            if (strcmp(plan->beams[i].name, plan->beams[j].name) == 0)
                return fxl_fail(p->ctx, FXL_EINVAL, "file '%s': two beams are named '%s'", p->name,
                                plan->beams[i].name);
        }
    }
    /* Every beam the fraction group delivers must be one we read (or a
     * set-up beam we left out on purpose). */
    refs = seq(fg, &T_REF_BEAM_SEQ, &n_beams);
    cJSON_ArrayForEach(r, refs) {
        const cJSON *it;
        int ref = 0, known = 0, num;
        if ((rc = get_int(p, "fraction group", r, &T_REF_BEAM_NUMBER, 1, &ref)) < 0)
            return rc;
        cJSON_ArrayForEach(it, beams) {
            if (get_int(p, "fraction group", it, &T_BEAM_NUMBER, 1, &num) > 0 && num == ref)
                known = 1;
        }
        if (!known)
            return fxl_fail(p->ctx, FXL_EINVAL,
                            "file '%s': the fraction group delivers beam number %d, which is not in the %s", p->name,
                            ref, T_BEAM_SEQ.keyword);
    }
    return 0;
}

void fxl_dicom_plan_release(fxl_dicom_plan *plan)
{
    if (!plan)
        return;
    free(plan->beams);
    memset(plan, 0, sizeof *plan);
    plan->dose_per_fraction_cgy = NAN;
}

int fxl_dicom_plan_parse(fxl_ctx *ctx, fxl_dicom_plan *out, const char *text, size_t len, const char *source)
{
    parser p = {ctx, source ? source : "RT Plan"};
    const fxl_jsondoc doc = {ctx, "file", p.name};
    cJSON *root = NULL;
    const cJSON *ds;
    int rc;

    if (!out)
        return fxl_fail(ctx, FXL_EINVAL, "internal: no output for the RT Plan");
    memset(out, 0, sizeof *out);
    out->dose_per_fraction_cgy = NAN;
    if (!text || len == 0)
        return fxl_fail(ctx, FXL_EINVAL, "file '%s' is empty", p.name);
    /* The DICOM JSON Model is UTF-8 (PS3.18 Annex F); "\u0000" would cut a value short. */
    if ((rc = fxl_jsondoc_parse(&doc, &root, text, len, FXL_JSONDOC_AT_BYTE)) != 0)
        goto cleanup;
    ds = root;
    if (cJSON_IsArray(root)) {
        /* A DICOMweb metadata response: an array of data sets. */
        if (cJSON_GetArraySize(root) != 1) {
            rc = fxl_fail(ctx, FXL_EINVAL, "file '%s' holds %d data sets: one RT Plan per file", p.name,
                          cJSON_GetArraySize(root));
            goto cleanup;
        }
        ds = root->child;
    }
    if (!cJSON_IsObject(ds)) {
        rc = fxl_fail(ctx, FXL_EINVAL, "file '%s': not a DICOM JSON data set (an object of tags)", p.name);
        goto cleanup;
    }
    rc = read_plan(&p, ds, out);
cleanup:
    cJSON_Delete(root);
    if (rc != 0)
        fxl_dicom_plan_release(out);
    return rc;
}

int fxl_dicom_plan_parse_part10(fxl_ctx *ctx, fxl_dicom_plan *out, const unsigned char *data, size_t len,
                                const char *source)
{
    char *json = NULL;
    size_t json_len = 0;
    int rc;

    if (out) {
        memset(out, 0, sizeof *out);
        out->dose_per_fraction_cgy = NAN;
    }
    if (!out)
        return fxl_fail(ctx, FXL_EINVAL, "internal: no output for the RT Plan");
    if ((rc = fxl_dicom_part10_to_json(ctx, data, len, source ? source : "RT Plan", &json, &json_len)) == 0)
        rc = fxl_dicom_plan_parse(ctx, out, json, json_len, source);
    free(json);
    return rc;
}

int fxl_dicom_plan_read(fxl_ctx *ctx, fxl_dicom_plan *out, const char *path)
{
    static const fxl_jsondoc_file spec = {
        .max_bytes = 16 * 1024 * 1024,
        .too_large_code = FXL_EINVAL,
        .open_fail = "cannot open RT Plan file '%s': %s",
        .read_fail = "cannot read RT Plan file '%s': %s",
        .too_large = "file '%s' is larger than %d bytes",
        .no_memory = "out of memory reading '%s'",
    };
    char *buf = NULL;
    size_t len, lead = 0;
    int rc;

    if (out) {
        memset(out, 0, sizeof *out);
        out->dose_per_fraction_cgy = NAN;
    }
    if (!path)
        return fxl_fail(ctx, FXL_EINVAL, "internal: no RT Plan path");
    if ((rc = fxl_jsondoc_read_file(ctx, &buf, &len, path, &spec)) != 0)
        goto cleanup;
    /* PS3.10 7.1: a Part 10 file is told by "DICM" after its preamble; JSON
     * by its first character. */
    if (fxl_dicom_part10_detect((const unsigned char *)buf, len)) {
        rc = fxl_dicom_plan_parse_part10(ctx, out, (const unsigned char *)buf, len, path);
        goto cleanup;
    }
    while (lead < len && (buf[lead] == ' ' || buf[lead] == '\t' || buf[lead] == '\r' || buf[lead] == '\n'))
        lead++;
    if (lead < len && buf[lead] != '{' && buf[lead] != '[') {
        rc = fxl_fail(ctx, FXL_EINVAL,
                      "file '%s' is malformed: neither a DICOM Part 10 file ('DICM' after a %d-byte preamble) "
                      "nor DICOM JSON (an object or an array)",
                      path, FXL_DICOM_PREAMBLE_LEN);
        goto cleanup;
    }
    rc = fxl_dicom_plan_parse(ctx, out, buf, len, path);
cleanup:
    free(buf);
    return rc;
}
