/* Charts in the PDF reports: deviation against fraction number with the
 * tolerance and action bands, and a histogram of deviations with the same
 * bands. Points stream in one at a time; nothing is kept but the previous
 * point (charts) or the bin counts (histogram). Private to src/report. */
#ifndef FXL_REPORT_CHART_H
#define FXL_REPORT_CHART_H

#include "report/layout.h"

typedef struct rpt_axes {
    double x, y, w, h;           /* plot area, bottom-left corner and size, points */
    double xmin, xmax, ymin, ymax;
} rpt_axes;

/* A round step (1, 2 or 5 times a power of ten) giving at most max_ticks
 * ticks over `range`. */
double rpt_nice_step(double range, int max_ticks);

/* ---- deviation against fraction number ------------------------------------ */

typedef struct rpt_devchart {
    rpt_doc *d;
    rpt_axes ax;
    int have_prev;
    double prev_x, prev_y;
    int prev_kind;
    long n;
} rpt_devchart;

/* Draws frame, bands (when tol and act are finite), axes and the caption
 * lines inside the box whose top-left corner is (x, top), w x h points.
 * The x axis runs over fractions 1..max_fraction; the y axis symmetric
 * around 0, wide enough for max_abs_dev and the action level. */
void rpt_devchart_begin(rpt_devchart *c, rpt_doc *d, double x, double top, double w, double h,
                        const char *title, const char *subtitle, int max_fraction,
                        double max_abs_dev, double tol, double act);
void rpt_devchart_point(rpt_devchart *c, int fraction, double dev_pct, const char *verdict);
void rpt_devchart_end(rpt_devchart *c);

/* The legend of verdict markers and bands, one line at baseline y. */
void rpt_chart_legend(rpt_doc *d, double x, double y);

/* ---- histogram ------------------------------------------------------------- */

#define RPT_HIST_BINS 40

typedef struct rpt_hist {
    double lo, bin;              /* first edge and bin width, percent */
    int nbins;
    long count[RPT_HIST_BINS];
    long under, over;            /* below lo, at or above lo + nbins * bin */
    long n;
    int aligned;                 /* 1: tolerance and action levels fall on bin edges */
} rpt_hist;

/* Bins of width range/10 over [-range, +range). */
void rpt_hist_init(rpt_hist *h, double range);
/* Bins over [-range, +range) whose edges include +-tol and +-act: the
 * widest of 5, 2.5, 2, 1, 0.5, 0.25, 0.2 and 0.1 % that divides both levels
 * with at least three bins inside the action level and at most
 * RPT_HIST_BINS bins (range is widened to a multiple of the bin, or
 * narrowed to RPT_HIST_BINS bins when still beyond the action level).
 * Returns -1 (h untouched) when no such width exists or a level is missing. */
int rpt_hist_init_aligned(rpt_hist *h, double range, double tol, double act);
void rpt_hist_add(rpt_hist *h, double v);
/* Draws it in the box with top-left (x, top); bands when tol/act finite. */
void rpt_hist_draw(rpt_doc *d, const rpt_hist *h, double x, double top, double w, double ht,
                   double tol, double act);

#endif
