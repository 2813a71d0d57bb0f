/* The individuals and moving-range (I-MR) chart of a series of deviations,
 * for the statistics report. Private to src/report. */
#ifndef FXL_REPORT_IMR_CHART_H
#define FXL_REPORT_IMR_CHART_H

#include <stddef.h>

#include "fxl/stats.h"
#include "report/layout.h"

/* Draws, in the box with top-left (x, top) and size w x h points, a title
 * line, the individuals chart of v[0..n) (centre line solid, limits dashed,
 * tolerance and action levels in force as thin grey lines when finite) and
 * under it the moving-range chart (average moving range solid, upper limit
 * dashed). Points beyond a limit are drawn as filled squares. */
void rpt_imr_draw(rpt_doc *d, double x, double top, double w, double h, const char *title,
                  const double *v, size_t n, const fxl_imr *c, double tol, double act);

#endif
