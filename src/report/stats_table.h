/* The table of period statistics (one row per group), shared by the
 * statistics report and the monthly report. Private to src/report. */
#ifndef FXL_REPORT_STATS_TABLE_H
#define FXL_REPORT_STATS_TABLE_H

#include <stddef.h>

#include "fxl/period_stats.h"
#include "report/layout.h"

/* "Site / technique / 6 MV / entrance / detector (serial)" or "all results". */
void rpt_ps_group_name(char *out, size_t n, const fxl_ps_group *g);

/* Draws the table of every group of ps under `caption`, breaking pages
 * with repeated headers; "no results" when there is no group. On a page
 * too narrow for every column (portrait) the I-MR limits are left out. */
void rpt_ps_table(rpt_doc *d, const fxl_period_stats *ps, const char *caption);

/* The definitions under the table: percentile method, shares, I-MR
 * constants and their source, how levels are suggested (never applied). */
void rpt_ps_definitions(rpt_doc *d);

#endif
