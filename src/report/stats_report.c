/* The statistics report of a period: the table of groups with the levels in
 * force beside the levels suggested from the spread, the definitions, and
 * an I-MR chart per group. A4 landscape. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "fxl/period_stats.h"
#include "fxl/report.h"
#include "report/imr_chart.h"
#include "report/session.h"
#include "report/stats_table.h"

static void title_block(rpt_doc *d, const fxl_report_period *per, const fxl_period_stats *ps)
{
    char v[400], by[96];
    double kw = 150, vw = d->right - d->left - 150;

    rpt_text(d, d->bold, 17, 0, d->left, d->y - 17, "Statistics of in vivo deviations");
    rpt_text(d, d->bold, 13, 0.25, d->left, d->y - 35, per->label);
    d->y -= 48;
    snprintf(v, sizeof v, "%s to %s (local days, %s)", per->first_day, per->last_day,
             per->timezone);
    rpt_keyval(d, d->left, kw, vw, "Period", v);
    snprintf(v, sizeof v, "%s to %s", ps->from, ps->to);
    rpt_keyval(d, d->left, kw, vw, "The same in UTC", v);
    fxl_ps_format_by(by, sizeof by, ps->by);
    rpt_keyval(d, d->left, kw, vw, "Grouped by", by);
    snprintf(v, sizeof v, "%zu judged against levels, %zu not judged (superseded readings "
             "excluded)", ps->total, ps->total_not_judged);
    rpt_keyval(d, d->left, kw, vw, "Results", v);
    d->y -= 6;
}

static void charts(rpt_doc *d, const fxl_period_stats *ps)
{
    const double gap = 24, h = 210;
    double w = (d->right - d->left - gap) / 2;
    char name[300], title[400];
    int col = 0, any = 0;
    size_t i;

    for (i = 0; i < ps->ngroups; i++) {
        const fxl_ps_group *g = &ps->groups[i];
        double x;

        if (g->n < 2)
            continue;
        if (!any) {
            rpt_heading(d, "3. Individuals and moving-range charts", h + 10);
            any = 1;
        }
        if (col == 0)
            rpt_need(d, h + 6);
        x = d->left + col * (w + gap);
        rpt_ps_group_name(name, sizeof name, g);
        snprintf(title, sizeof title, "n %zu \xC2\xB7 %s", g->n, name);
        rpt_imr_draw(d, x, d->y, w, h, title, g->series, g->n, &g->imr, g->tolerance_pct,
                     g->action_pct);
        if (++col == 2) {
            col = 0;
            d->y -= h + 8;
        }
    }
    if (col == 1)
        d->y -= h + 8;
    if (!any) {
        rpt_heading(d, "3. Individuals and moving-range charts", 40);
        rpt_paragraph(d, d->font, 8.5, d->left, d->right - d->left,
                      "No group has two or more results judged against levels, so no chart "
                      "can be drawn.");
    } else {
        rpt_paragraph(d, d->font, 7, d->left, d->right - d->left,
                      "Solid green line: centre (mean) or average moving range; dashed red: "
                      "control limits; thin grey lines: tolerance (lighter) and action levels "
                      "in force. A large red square marks a point beyond a control limit. A "
                      "point beyond a limit is a signal to look for a cause, not a verdict on "
                      "the patient.");
    }
}

int fxl_report_stats(fxl_ctx *ctx, fxl_report_result *out, const char *path,
                     const fxl_report_period *per, unsigned by, const fxl_report_options *opt)
{
    fxl_period_stats ps = FXL_PERIOD_STATS_INIT;
    rpt_session s;
    rpt_doc *d;
    char text[600];
    int rc;

    if (out)
        memset(out, 0, sizeof *out);
    if (!per || !path || !*path)
        return fxl_fail(ctx, FXL_EINVAL, "output file is required (a path ending in .pdf)");
    if ((rc = rpt_session_open(&s, ctx, opt, 1)) != 0)
        goto cleanup;
    d = &s.doc;
    if ((rc = fxl_period_stats_compute(ctx, &ps, per->from, per->to, by)) != 0)
        goto cleanup;
    snprintf(d->title, sizeof d->title, "In vivo dosimetry \xE2\x80\x94 statistics for review");
    snprintf(d->subtitle, sizeof d->subtitle, "%s \xC2\xB7 department time zone %s", per->label,
             per->timezone);
    snprintf(text, sizeof text, "Statistics of in vivo deviations, %s", per->label);
    rpt_doc_info(d, text, s.generated_utc);

    rpt_page_new(d);
    title_block(d, per, &ps);
    if (ps.total == 0) {
        snprintf(text, sizeof text,
                 "No result judged against levels was treated between %s and %s. There is "
                 "nothing to summarise; this page records that the absence of data was checked.",
                 per->first_day, per->last_day);
        rpt_notice(d, "No results in this period", text);
    }
    rpt_heading(d, "1. Deviation statistics by group", 80);
    rpt_ps_table(d, &ps, "");
    d->y -= 4;
    rpt_heading(d, "2. Definitions and the use of suggested levels", 60);
    rpt_ps_definitions(d);
    rpt_paragraph(d, d->font, 7, d->left, d->right - d->left,
                  "fxledger never changes a level by itself. A physicist who decides to change "
                  "levels does so with 'fxledger levels', which records the new set with its "
                  "effective date; earlier results keep the levels they were judged against.");
    d->y -= 4;
    charts(d, &ps);
    if (out) {
        out->pages = d->npages;
        out->measurements = (int64_t)(ps.total + ps.total_not_judged);
        out->empty = ps.total == 0;
        snprintf(out->from, sizeof out->from, "%s", per->from);
        snprintf(out->to, sizeof out->to, "%s", per->to);
        snprintf(out->timezone, sizeof out->timezone, "%s", s.tz_name);
    }
cleanup:
    fxl_period_stats_release(&ps);
    return rpt_session_close(&s, rc == 0 ? path : NULL, rc);
}
