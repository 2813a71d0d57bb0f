/* Entrance-exit pairs of logged fractions and their midline estimates: the
 * grouping of results already read (one fraction, or a history listing) and
 * the estimate by src/core/midline.c. No SQL. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/record_midline.h"

/* One reading as the pairing sees it. */
typedef struct reading_ref {
    int64_t fraction_id;
    int fraction_number;
    const char *plan;
    const char *field;
    const char *point;
    int64_t id;
    double dose_cgy;
    fxl_verdict verdict;
    int current;
} reading_ref;

/* A dose result exists for these verdicts only: an implausible entry or a
 * result that could not be judged gives no dose to combine. */
static int has_dose(const reading_ref *r)
{
    return (r->verdict == FXL_VERDICT_WITHIN || r->verdict == FXL_VERDICT_OUTSIDE_TOLERANCE ||
            r->verdict == FXL_VERDICT_OUTSIDE_ACTION) &&
           isfinite(r->dose_cgy);
}

static int pair_up(fxl_midline_pair **out, size_t *n, const reading_ref *refs, size_t count)
{
    fxl_midline_pair *list = NULL;
    size_t i, j, k = 0;

    *out = NULL;
    *n = 0;
    for (i = 0; i < count; i++)
        if (refs[i].current && strcmp(refs[i].point, "entrance") == 0)
            k++;
    if (k == 0)
        return 0;
    if (!(list = calloc(k, sizeof *list)))
        return FXL_EIO;
    k = 0;
    for (i = 0; i < count; i++) {
        const reading_ref *e = &refs[i], *x = NULL;
        fxl_midline_pair *p;

        if (!e->current || strcmp(e->point, "entrance") != 0)
            continue;
        /* The latest current exit reading of the same field in the fraction. */
        for (j = 0; j < count; j++)
            if (refs[j].current && refs[j].fraction_id == e->fraction_id &&
                strcmp(refs[j].point, "exit") == 0 && strcmp(refs[j].field, e->field) == 0 &&
                (!x || refs[j].id > x->id))
                x = &refs[j];
        if (!x)
            continue;
        p = &list[k++];
        p->fraction_id = e->fraction_id;
        p->fraction_number = e->fraction_number;
        snprintf(p->plan, sizeof p->plan, "%s", e->plan ? e->plan : "");
        snprintf(p->field, sizeof p->field, "%s", e->field);
        p->entrance_id = e->id;
        p->exit_id = x->id;
        if (has_dose(e) && has_dose(x)) {
            fxl_midline_estimate(&p->estimate, e->dose_cgy, x->dose_cgy);
        } else {
            memset(&p->estimate, 0, sizeof p->estimate);
            p->estimate.entrance_cgy = has_dose(e) ? e->dose_cgy : NAN;
            p->estimate.exit_cgy = has_dose(x) ? x->dose_cgy : NAN;
            p->estimate.transmission = p->estimate.arithmetic_cgy = p->estimate.geometric_cgy = NAN;
            fxl_reasons_add(&p->estimate.reasons, "no midline estimate: the %s reading gave no dose result (%s)",
                            has_dose(e) ? "exit" : "entrance",
                            fxl_verdict_label(has_dose(e) ? x->verdict : e->verdict));
        }
    }
    if (k == 0) {
        free(list);
        return 0;
    }
    *out = list;
    *n = k;
    return 0;
}

int fxl_record_midlines(fxl_midline_pair **out, size_t *n, const fxl_record_result *r)
{
    reading_ref *refs = NULL;
    size_t i;
    int rc;

    *out = NULL;
    *n = 0;
    if (!r || r->n == 0)
        return 0;
    if (!(refs = calloc(r->n, sizeof *refs)))
        return FXL_EIO;
    for (i = 0; i < r->n; i++) {
        const fxl_measurement_result *m = &r->items[i];
        refs[i].fraction_id = r->fraction_id;
        refs[i].fraction_number = r->fraction_number;
        refs[i].plan = r->plan;
        refs[i].field = m->field;
        refs[i].point = m->point;
        refs[i].id = m->measurement_id;
        refs[i].dose_cgy = m->corrected_dose_cgy;
        refs[i].verdict = m->verdict;
        refs[i].current = 1;
    }
    rc = pair_up(out, n, refs, r->n);
    free(refs);
    return rc;
}

int fxl_history_midlines(fxl_midline_pair **out, size_t *n, const fxl_history_row *rows, size_t n_rows)
{
    reading_ref *refs = NULL;
    size_t i;
    int rc;

    *out = NULL;
    *n = 0;
    if (!rows || n_rows == 0)
        return 0;
    if (!(refs = calloc(n_rows, sizeof *refs)))
        return FXL_EIO;
    for (i = 0; i < n_rows; i++) {
        const fxl_history_row *h = &rows[i];
        refs[i].fraction_id = h->fraction_id;
        refs[i].fraction_number = h->fraction_number;
        refs[i].plan = h->plan;
        refs[i].field = h->field;
        refs[i].point = h->point;
        refs[i].id = h->measurement_id;
        refs[i].dose_cgy = h->corrected_dose_cgy;
        refs[i].verdict = h->verdict;
        refs[i].current = h->superseded_by == 0;
    }
    rc = pair_up(out, n, refs, n_rows);
    free(refs);
    return rc;
}
