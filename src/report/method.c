/* The limits of the method, stated on the first page of every report, and
 * the correction tables in force with the ranges they were commissioned
 * over. */
#include <stdio.h>
#include <string.h>

#include "report/session.h"
#include "report/table.h"

void rpt_method_limits(rpt_doc *d)
{
    static const char *const text =
        "In vivo detectors are relative instruments. Each one is cross-calibrated against a "
        "calibrated ion chamber under reference conditions, per beam and per measured point "
        "(entrance or exit), and its reading is turned into dose with that calibration factor "
        "and with correction factors for field size, SSD, wedge, tray, beam incidence and "
        "temperature. A correction is applied only inside the range over which it was "
        "commissioned: outside it, and without a valid calibration or an expected dose, the "
        "result is reported as not evaluable, never extrapolated. A deviation is therefore "
        "only as good as the calibration, the correction tables and the expected dose behind "
        "it. Superseded readings (corrected entries) are shown for the record and left out of "
        "every count and statistic.";
    double x = d->left + 10, w = d->right - d->left - 20, top;

    rpt_need(d, 80);
    top = d->y;
    rpt_text(d, d->bold, 9.5, 0.0, x, d->y - 12, "Limits of the method");
    d->y -= 17;
    rpt_paragraph(d, d->font, 8.5, x, w, text);
    /* A bar at the left marks the statement (redrawn only on its first page). */
    if (d->y < top)
        rpt_fill_rect(d, d->left, d->y + 2, 2.5, top - d->y - 4, 0.35, 0.35, 0.35);
    d->y -= 4;
}

static const rpt_col corr_cols[] = {
    {"Detector", 130, RPT_LEFT},        {"Serial", 100, RPT_LEFT},
    {"Machine and beam", 150, RPT_LEFT}, {"Correction", 90, RPT_LEFT},
    {"Commissioned range", 140, RPT_LEFT}, {"Points", 50, RPT_RIGHT},
    {"In force since", 110, RPT_LEFT},
};
#define NCORR_COLS ((int)(sizeof corr_cols / sizeof corr_cols[0]))

/* Units of a correction table's parameter (schema: field_size, ssd, wedge,
 * tray, angle). */
static void correction_words(const char *param, double lo, double hi, char *name, size_t nn,
                             char *range, size_t nr)
{
    if (strcmp(param, "field_size") == 0) {
        snprintf(name, nn, "field size");
        snprintf(range, nr, "%.1f to %.1f cm (equivalent square)", lo, hi);
    } else if (strcmp(param, "ssd") == 0) {
        snprintf(name, nn, "SSD");
        snprintf(range, nr, "%.1f to %.1f cm", lo, hi);
    } else if (strcmp(param, "wedge") == 0) {
        snprintf(name, nn, "wedge");
        snprintf(range, nr, "%g to %g deg (listed angles only)", lo, hi);
    } else if (strcmp(param, "tray") == 0) {
        snprintf(name, nn, "tray");
        snprintf(range, nr, lo == hi ? (lo > 0 ? "with tray only" : "without tray only")
                                     : "without and with tray");
    } else if (strcmp(param, "angle") == 0) {
        snprintf(name, nn, "beam incidence");
        snprintf(range, nr, "%g to %g deg", lo, hi);
    } else {
        snprintf(name, nn, "%s", param);
        snprintf(range, nr, "%g to %g", lo, hi);
    }
}

typedef struct corr_ctx {
    rpt_table *t;
    rpt_session *s;
    long n;
} corr_ctx;

static int on_correction(void *arg, const fxl_rq_correction *c)
{
    corr_ctx *k = arg;
    char name[40], range[80], beam[160], pts[24], since[32];
    const char *cells[7];

    correction_words(c->parameter, c->x_min, c->x_max, name, sizeof name, range, sizeof range);
    snprintf(beam, sizeof beam, "%s %s", c->machine, c->beam);
    snprintf(pts, sizeof pts, "%lld", (long long)c->points);
    rpt_session_calendar_date(since, sizeof since, c->effective_from);
    cells[0] = c->detector;
    cells[1] = c->detector_serial;
    cells[2] = beam;
    cells[3] = name;
    cells[4] = range;
    cells[5] = pts;
    cells[6] = since;
    rpt_table_row(k->t, cells, NULL);
    k->n++;
    return 0;
}

int rpt_method_corrections(rpt_session *s, const fxl_rq_scope *scope)
{
    rpt_table t;
    corr_ctx k = {&t, s, 0};
    int rc;

    rpt_table_begin(&t, &s->doc, corr_cols, NCORR_COLS, 7.5, 2,
                    "Correction tables in force and their commissioned ranges");
    rc = fxl_rq_corrections_each(s->ctx, scope, on_correction, &k);
    if (rc == 0 && k.n == 0)
        rpt_table_note(&t, "No correction table is in force for these detectors and beams: only "
                           "results at the calibration's reference conditions are evaluable.");
    rpt_table_end(&t);
    return rc;
}

