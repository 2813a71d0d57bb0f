/* The monthly departmental summary: results per verdict overall and by
 * site/technique, energy and detector; a histogram of deviations with the
 * bands; action-level events; queue items still open; calibrations done, due
 * and overdue; detectors near their dose limit. A4 portrait. Every count is
 * streamed from SQL; the only state kept is one group's counts and the
 * histogram's bins. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/number.h"
#include "fxl/core.h"
#include "fxl/report.h"
#include "report/chart.h"
#include "fxl/period_stats.h"
#include "report/session.h"
#include "report/stats_table.h"
#include "report/table.h"
#include "store/report_query.h"

#define NVERDICT RPT_NVERDICT
/* Detectors at or above this share of their dose limit are listed. */
#define DOSE_WARN_FRACTION 0.80
#define DASH "\xE2\x80\x93"

typedef struct mreport {
    rpt_session *s;
    int year, month;
    char from[FXL_TIME_LEN], to[FXL_TIME_LEN], as_of[FXL_TIME_LEN];
    long verdict[NVERDICT];
    long total;
    /* group pivot */
    rpt_table table;
    fxl_rq_grouping by;
    int have;
    char key1[300], key2[300];
    double energy;
    long g[NVERDICT];
    long rows;
    /* histogram */
    rpt_hist hist;
    double tol, act;
    long levels_count, levels_n;
    char other_levels[400];
    double mean, m2;
    int section;                  /* number of the last section heading */
} mreport;

/* A numbered section heading, kept with `keep` points of what follows. */
static void section(mreport *r, const char *title, double keep)
{
    char buf[200];

    snprintf(buf, sizeof buf, "%d. %s", ++r->section, title);
    rpt_heading(&r->s->doc, buf, keep);
}

static void count_rate(char *out, size_t n, long count, long total)
{
    if (total > 0)
        snprintf(out, n, "%ld (%.1f %%)", count, 100.0 * (double)count / (double)total);
    else
        snprintf(out, n, "%ld", count);
}

static void days_between(char *out, size_t n, const char *a, const char *b)
{
    time_t ta, tb;

    if (rpt_epoch_from_stored(&ta, a) != 0 || rpt_epoch_from_stored(&tb, b) != 0)
        snprintf(out, n, DASH);
    else
        snprintf(out, n, "%.1f d", difftime(tb, ta) / 86400.0);
}

/* ---- overall counts ------------------------------------------------------------ */

static int on_total(void *arg, const fxl_rq_count *c)
{
    mreport *r = arg;
    int i = rpt_verdict_index(c->verdict);

    if (i >= 0)
        r->verdict[i] += (long)c->count;
    r->total += (long)c->count;
    return 0;
}

static const rpt_col overall_cols[] = {
    {"Verdict", 190, RPT_LEFT}, {"Results", 70, RPT_RIGHT}, {"Rate", 70, RPT_RIGHT}};

static void overall_table(mreport *r)
{
    rpt_doc *d = &r->s->doc;
    rpt_table t;
    char n[32], rate[32];
    const char *cells[3];
    rpt_row_style bold = {7u, 0, 0};
    int i;

    section(r, "Results by verdict", 110);
    rpt_table_begin(&t, d, overall_cols, 3, 8.5, 1, "");
    for (i = 0; i < NVERDICT; i++) {
        snprintf(n, sizeof n, "%ld", r->verdict[i]);
        rpt_fmt_pct(rate, sizeof rate, r->total ? 100.0 * (double)r->verdict[i] / (double)r->total : NAN,
                    1, 0);
        cells[0] = fxl_verdict_label((fxl_verdict)i);
        cells[1] = n;
        cells[2] = rate;
        rpt_table_row(&t, cells, NULL);
    }
    snprintf(n, sizeof n, "%ld", r->total);
    cells[0] = "all results counted";
    cells[1] = n;
    cells[2] = "100.0 %";
    rpt_table_row(&t, cells, &bold);
    rpt_table_end(&t);
}

/* ---- grouped counts --------------------------------------------------------------- */

static const rpt_col group_cols[] = {
    {"", 150, RPT_LEFT},                     {"Results", 43, RPT_RIGHT},
    {"Within tolerance", 66, RPT_RIGHT},     {"Outside tolerance", 66, RPT_RIGHT},
    {"Outside action level", 66, RPT_RIGHT}, {"Not evaluable", 66, RPT_RIGHT},
    {"Implausible entry", 66, RPT_RIGHT},
};
#define NGROUP_COLS 7

static void flush_group(mreport *r)
{
    char key[700], n[32], cell[NVERDICT][40];
    const char *cells[NGROUP_COLS];
    rpt_row_style st = {0, 0, 0};
    long total = 0;
    int i;

    if (!r->have)
        return;
    for (i = 0; i < NVERDICT; i++)
        total += r->g[i];
    switch (r->by) {
    case FXL_RQ_BY_SITE_TECHNIQUE:
        snprintf(key, sizeof key, "%s / %s", r->key1, r->key2);
        break;
    case FXL_RQ_BY_ENERGY:
        snprintf(key, sizeof key, "%s %g %s", r->key1, r->energy,
                 strcmp(r->key1, "electron") == 0 ? "MeV" : "MV");
        break;
    case FXL_RQ_BY_DETECTOR:
        snprintf(key, sizeof key, "%s (serial %s)", r->key1, r->key2);
        break;
    default:
        snprintf(key, sizeof key, "all");
    }
    snprintf(n, sizeof n, "%ld", total);
    cells[0] = key;
    cells[1] = n;
    for (i = 0; i < NVERDICT; i++) {
        count_rate(cell[i], sizeof cell[i], r->g[i], total);
        cells[2 + i] = cell[i];
    }
    if (r->g[2] > 0)
        st.alert_mask = 1u << 4;
    rpt_table_row(&r->table, cells, &st);
    r->rows++;
    r->have = 0;
    memset(r->g, 0, sizeof r->g);
}

static int on_group(void *arg, const fxl_rq_count *c)
{
    mreport *r = arg;
    int i = rpt_verdict_index(c->verdict);
    int same = r->have && strcmp(r->key1, c->key1) == 0 && strcmp(r->key2, c->key2) == 0 &&
               ((isnan(r->energy) && isnan(c->energy)) || r->energy == c->energy);

    if (!same) {
        flush_group(r);
        snprintf(r->key1, sizeof r->key1, "%s", c->key1);
        snprintf(r->key2, sizeof r->key2, "%s", c->key2);
        r->energy = c->energy;
        r->have = 1;
    }
    if (i >= 0)
        r->g[i] += (long)c->count;
    return 0;
}

static int group_table(mreport *r, fxl_rq_grouping by, const char *heading, const char *first)
{
    rpt_doc *d = &r->s->doc;
    rpt_col cols[NGROUP_COLS];
    int rc;

    memcpy(cols, group_cols, sizeof cols);
    cols[0].title = first;
    section(r, heading, 80);
    rpt_table_begin(&r->table, d, cols, NGROUP_COLS, 7.5, 2, "");
    r->by = by;
    r->have = 0;
    r->rows = 0;
    memset(r->g, 0, sizeof r->g);
    rc = fxl_rq_month_counts_each(r->s->ctx, by, on_group, r);
    if (rc == 0)
        flush_group(r);
    if (rc == 0 && r->rows == 0)
        rpt_table_note(&r->table, "No results this month.");
    rpt_table_end(&r->table);
    return rc;
}

/* ---- histogram ---------------------------------------------------------------------- */

static int on_levels(void *arg, const fxl_rq_levels_used *l)
{
    mreport *r = arg;
    size_t len = strlen(r->other_levels);

    r->levels_n += (long)l->count;
    if (!isfinite(r->tol)) {
        r->tol = l->tolerance_pct;
        r->act = l->action_pct;
        r->levels_count = (long)l->count;
    } else if (len + 60 < sizeof r->other_levels) {
        snprintf(r->other_levels + len, sizeof r->other_levels - len, "%s\xC2\xB1%g / \xC2\xB1%g %% (%lld)",
                 len ? ", " : "", l->tolerance_pct, l->action_pct, (long long)l->count);
    }
    return 0;
}

static int on_deviation(void *arg, double v)
{
    mreport *r = arg;
    double delta;

    rpt_hist_add(&r->hist, v);
    delta = v - r->mean;
    r->mean += delta / (double)r->hist.n;
    r->m2 += delta * (v - r->mean);
    return 0;
}

static int histogram(mreport *r)
{
    rpt_doc *d = &r->s->doc;
    double range = 10, h = 210;
    char line[800], mean[32], sd[32];
    int rc;

    r->tol = r->act = NAN;
    r->other_levels[0] = '\0';
    if ((rc = fxl_rq_month_levels_each(r->s->ctx, r->from, r->to, on_levels, r)) != 0)
        return rc;
    /* Twice the action level rounded up to 5 %, at least 10 %, at most the
     * usual bound of implausibility (50 %). */
    if (isfinite(r->act) && 2 * r->act > range)
        range = ceil(2 * r->act / 5) * 5;   /* round bins: range / 10 */
    if (range > 50)
        range = 50;
    if (rpt_hist_init_aligned(&r->hist, range, r->tol, r->act) != 0)
        rpt_hist_init(&r->hist, range);
    r->mean = r->m2 = 0;
    if ((rc = fxl_rq_month_deviations_each(r->s->ctx, r->from, r->to, on_deviation, r)) != 0)
        return rc;

    section(r, "Distribution of deviations", h + 40);
    if (r->hist.n == 0) {
        rpt_paragraph(d, d->font, 9, d->left, d->right - d->left,
                      "No result of this month could be judged against levels.");
        return 0;
    }
    rpt_hist_draw(d, &r->hist, d->left, d->y, d->right - d->left, h, r->tol, r->act);
    d->y -= h + 4;
    rpt_fmt_pct(mean, sizeof mean, r->mean, 2, 1);
    rpt_fmt_pct(sd, sizeof sd, r->hist.n > 1 ? sqrt(r->m2 / (double)(r->hist.n - 1)) : NAN, 2, 0);
    snprintf(line, sizeof line,
             "%ld results judged against levels; mean deviation %s, standard deviation %s. Bins "
             "of %g %%%s. Bands: tolerance \xC2\xB1%g %%, action level \xC2\xB1%g %%, the levels of "
             "%ld of these results%s%s.",
             r->hist.n, mean, sd, r->hist.bin,
             r->hist.aligned ? ", with bin edges at the tolerance and action levels" : "",
             r->tol, r->act, r->levels_count,
             r->other_levels[0] ? "; other levels in use: " : "", r->other_levels);
    rpt_paragraph(d, d->font, 8.5, d->left, d->right - d->left, line);
    return 0;
}

/* ---- statistics by site -------------------------------------------------------------- */

static int site_statistics(mreport *r)
{
    rpt_doc *d = &r->s->doc;
    fxl_period_stats ps = FXL_PERIOD_STATS_INIT;
    int rc;

    section(r, "Statistics of deviations by site", 100);
    if ((rc = fxl_period_stats_compute(r->s->ctx, &ps, r->from, r->to, FXL_PS_SITE)) == 0) {
        rpt_ps_table(d, &ps, "");
        rpt_paragraph(d, d->font, 7, d->left, d->right - d->left,
                      "Per site over the month: n, mean, SD (n \xE2\x88\x92 1), median, 5th and 95th "
                      "percentiles of the deviation (%), the shares outside the levels, the levels "
                      "in force and levels suggested from the spread (2 and 3 SD rounded up to 0.5 %, "
                      "from memory, never applied). Pooling a site over beams, points and detectors "
                      "widens the spread; 'fxledger stats' gives the finer groups.");
        d->y -= 4;
    }
    fxl_period_stats_release(&ps);
    return rc;
}

static void signoff(mreport *r)
{
    rpt_doc *d = &r->s->doc;
    static const char *const labels[3] = {"Name of the reviewing medical physicist", "Signature",
                                          "Date"};
    const double widths[3] = {220, 150, 90};
    double x = d->left, y;
    int i;

    section(r, "Review and sign-off by the medical physicist", 150);
    rpt_paragraph(d, d->font, 8.5, d->left, d->right - d->left,
                  "I have reviewed this month's results, every result outside the action level "
                  "and its disposition, the queue items still open, and the calibrations and "
                  "detectors listed above.");
    d->y -= 34;
    y = d->y;
    for (i = 0; i < 3; i++) {
        rpt_line(d, x, y, x + widths[i], y, 0.7, 0.2);
        rpt_text(d, d->font, 7.5, 0.3, x, y - 10, labels[i]);
        x += widths[i] + 22;
    }
    d->y = y - 30;
    rpt_text(d, d->font, 7.5, 0.3, d->left, d->y, "Comments and actions decided");
    rpt_line(d, d->left + 110, d->y, d->right, d->y, 0.5, 0.5);
    rpt_line(d, d->left, d->y - 20, d->right, d->y - 20, 0.5, 0.5);
    rpt_line(d, d->left, d->y - 40, d->right, d->y - 40, 0.5, 0.5);
    d->y -= 50;
}

/* ---- action-level events ------------------------------------------------------------ */

static const rpt_col action_cols[] = {
    {"Date", 50, RPT_LEFT},         {"Patient ID", 56, RPT_LEFT},
    {"Patient", 86, RPT_LEFT},      {"Plan, field", 78, RPT_LEFT},
    {"Deviation", 44, RPT_RIGHT},   {"Disposition", 88, RPT_LEFT},
    {"Reviewer", 66, RPT_LEFT},     {"Days to close", 55, RPT_RIGHT},
};
#define NACTION_COLS 8

static int on_action(void *arg, const fxl_rq_action_event *e)
{
    mreport *r = arg;
    char date[32], name[900], pf[300], dev[32], days[32], disp[120];
    const char *cells[NACTION_COLS];
    rpt_row_style st = {0, 1u << 4, 0};

    rpt_session_date(date, sizeof date, e->treated_at);
    rpt_fmt_name(name, sizeof name, e->family_name, e->given_name);
    snprintf(pf, sizeof pf, "%s, %s (%s)", e->plan, e->field, e->point);
    rpt_fmt_pct(dev, sizeof dev, e->deviation_pct, 2, 1);
    if (e->pending || (!e->closed_at[0] && e->opened_at[0]))
        snprintf(disp, sizeof disp, "open in the queue");
    else if (e->closed_at[0])
        snprintf(disp, sizeof disp, "%s", e->disposition);
    else
        snprintf(disp, sizeof disp, "not queued");
    if (e->superseded) {
        size_t len = strlen(disp);
        snprintf(disp + len, sizeof disp - len, " (reading superseded)");
        st.muted = 1;
    }
    if (e->closed_at[0] && !e->pending && e->opened_at[0])
        days_between(days, sizeof days, e->opened_at, e->closed_at);
    else if (e->opened_at[0])
        snprintf(days, sizeof days, "open");
    else
        snprintf(days, sizeof days, DASH);
    cells[0] = date;
    cells[1] = e->mrn;
    cells[2] = name;
    cells[3] = pf;
    cells[4] = dev;
    cells[5] = disp;
    cells[6] = e->closed_at[0] && !e->pending ? e->reviewer : DASH;
    cells[7] = days;
    rpt_table_row(&r->table, cells, &st);
    r->rows++;
    return 0;
}

static int actions(mreport *r)
{
    rpt_doc *d = &r->s->doc;
    int rc;

    section(r, "Results outside the action level", 100);
    rpt_table_begin(&r->table, d, action_cols, NACTION_COLS, 7, 2, "");
    r->rows = 0;
    rc = fxl_rq_month_actions_each(r->s->ctx, r->from, r->to, on_action, r);
    if (rc == 0 && r->rows == 0)
        rpt_table_note(&r->table, "None this month.");
    rpt_table_end(&r->table);
    rpt_paragraph(d, d->font, 7.5, d->left, d->right - d->left,
                  "Days to close: from the queue item's opening to the physicist's closing event. "
                  "Disposition and reviewer as recorded at the time of printing.");
    return rc;
}

/* ---- queue ------------------------------------------------------------------------------ */

static const rpt_col queue_cols[] = {
    {"Item", 32, RPT_RIGHT},       {"Opened", 52, RPT_LEFT},
    {"Age", 40, RPT_RIGHT},        {"Severity", 40, RPT_RIGHT},
    {"Patient ID", 60, RPT_LEFT},  {"Rule", 84, RPT_LEFT},
    {"State", 56, RPT_LEFT},       {"Summary", 159, RPT_LEFT},
};
#define NQUEUE_COLS 8

static int on_queue(void *arg, const fxl_rq_queue_item *q)
{
    mreport *r = arg;
    char id[24], opened[32], age[32], sev[16];
    const char *cells[NQUEUE_COLS];

    snprintf(id, sizeof id, "%lld", (long long)q->id);
    rpt_session_date(opened, sizeof opened, q->opened_at);
    if (isfinite(q->age_days))
        snprintf(age, sizeof age, "%.0f d", floor(q->age_days));
    else
        snprintf(age, sizeof age, DASH);
    snprintf(sev, sizeof sev, "%d of 4", q->severity);
    cells[0] = id;
    cells[1] = opened;
    cells[2] = age;
    cells[3] = sev;
    cells[4] = q->mrn[0] ? q->mrn : DASH;
    cells[5] = q->rule;
    cells[6] = strcmp(q->last_event, "acknowledge") == 0 ? "acknowledged"
               : strcmp(q->last_event, "reopen") == 0    ? "reopened"
                                                         : "open";
    cells[7] = q->summary;
    rpt_table_row(&r->table, cells, NULL);
    r->rows++;
    return 0;
}

static int queue(mreport *r)
{
    rpt_doc *d = &r->s->doc;
    char when[48], line[200];
    int rc;

    section(r, "Review queue items open", 100);
    rpt_session_datetime(when, sizeof when, r->as_of);
    snprintf(line, sizeof line, "Items opened and not closed as of %s; age in whole days at that time.",
             when);
    rpt_paragraph(d, d->font, 8.5, d->left, d->right - d->left, line);
    rpt_table_begin(&r->table, d, queue_cols, NQUEUE_COLS, 7, 2, "");
    r->rows = 0;
    rc = fxl_rq_queue_open_each(r->s->ctx, r->as_of, on_queue, r);
    if (rc == 0 && r->rows == 0)
        rpt_table_note(&r->table, "No queue item was open.");
    rpt_table_end(&r->table);
    return rc;
}

/* ---- calibrations ------------------------------------------------------------------------- */

static const rpt_col cal_done_cols[] = {
    {"Date", 52, RPT_LEFT},           {"Detector", 84, RPT_LEFT},
    {"Serial", 66, RPT_LEFT},         {"Machine and beam", 90, RPT_LEFT},
    {"Point", 44, RPT_LEFT},          {"Factor", 82, RPT_RIGHT},
    {"Valid until", 52, RPT_LEFT},    {"Recorded by", 53, RPT_LEFT},
};

static const rpt_col cal_due_cols[] = {
    {"Detector", 90, RPT_LEFT},       {"Serial", 70, RPT_LEFT},
    {"Machine and beam", 100, RPT_LEFT}, {"Point", 50, RPT_LEFT},
    {"Calibrated", 56, RPT_LEFT},     {"Valid until", 56, RPT_LEFT},
    {"State", 101, RPT_LEFT},
};

static int on_cal_done(void *arg, const fxl_rq_calibration *c)
{
    mreport *r = arg;
    char date[32], until[32], beam[200], factor[64];
    const char *cells[8];

    rpt_session_calendar_date(date, sizeof date, c->calibrated_at);
    rpt_session_calendar_date(until, sizeof until, c->valid_until);
    snprintf(beam, sizeof beam, "%s %s", c->machine, c->beam);
    snprintf(factor, sizeof factor, "%.4g cGy/%s", c->factor_cgy_per_unit, c->reading_unit);
    cells[0] = date;
    cells[1] = c->detector;
    cells[2] = c->detector_serial;
    cells[3] = beam;
    cells[4] = c->point;
    cells[5] = factor;
    cells[6] = until;
    cells[7] = c->by;
    rpt_table_row(&r->table, cells, NULL);
    r->rows++;
    return 0;
}

static int on_cal_due(void *arg, const fxl_rq_calibration *c)
{
    mreport *r = arg;
    char date[32], until[32], beam[200], state[64];
    const char *cells[7];
    rpt_row_style st = {0, 0, 0};

    rpt_session_calendar_date(date, sizeof date, c->calibrated_at);
    rpt_session_calendar_date(until, sizeof until, c->valid_until);
    snprintf(beam, sizeof beam, "%s %s", c->machine, c->beam);
    if (c->days_left < 0) {
        snprintf(state, sizeof state, "overdue by %.0f d", ceil(-c->days_left));
        st.alert_mask = 1u << 6;
        st.bold_mask = 1u << 6;
    } else {
        snprintf(state, sizeof state, "due within %.0f d", ceil(c->days_left));
    }
    cells[0] = c->detector;
    cells[1] = c->detector_serial;
    cells[2] = beam;
    cells[3] = c->point;
    cells[4] = date;
    cells[5] = until;
    cells[6] = state;
    rpt_table_row(&r->table, cells, &st);
    r->rows++;
    return 0;
}

static int calibrations(mreport *r)
{
    rpt_doc *d = &r->s->doc;
    char buf[64], line[300], when[48];
    long due_days = 14;
    int rc;

    if (fxl_setting_get(r->s->ctx, "calibration_due_days", buf, sizeof buf) == 0) {
        double v = 0;
        if (fxl_number_in_range(&v, buf, FXL_NUM_WHOLE, 0, 365) == FXL_NUM_OK)
            due_days = (long)v;
    }
    section(r, "Calibrations", 100);
    rpt_table_begin(&r->table, d, cal_done_cols, 8, 7, 2, "Cross-calibrations performed this month");
    r->rows = 0;
    rc = fxl_rq_calibrations_done_each(r->s->ctx, r->from, r->to, r->as_of, on_cal_done, r);
    if (rc == 0 && r->rows == 0)
        rpt_table_note(&r->table, "None.");
    rpt_table_end(&r->table);
    if (rc != 0)
        return rc;
    rpt_session_datetime(when, sizeof when, r->as_of);
    snprintf(line, sizeof line,
             "Latest calibrations expired, or expiring within %ld days (setting "
             "'calibration_due_days'), as of %s",
             due_days, when);
    rpt_table_begin(&r->table, d, cal_due_cols, 7, 7, 2, line);
    r->rows = 0;
    rc = fxl_rq_calibrations_due_each(r->s->ctx, r->as_of, (int)due_days, on_cal_due, r);
    if (rc == 0 && r->rows == 0)
        rpt_table_note(&r->table, "None due or overdue.");
    rpt_table_end(&r->table);
    return rc;
}

/* ---- detector doses ------------------------------------------------------------------------ */

static const rpt_col dose_cols[] = {
    {"Detector", 95, RPT_LEFT},       {"Serial", 75, RPT_LEFT},
    {"Kind", 72, RPT_LEFT},           {"Status", 62, RPT_LEFT},
    {"Calibrated", 54, RPT_LEFT},     {"Accumulated dose", 62, RPT_RIGHT},
    {"Limit", 56, RPT_RIGHT},         {"Share", 47, RPT_RIGHT},
};

static void words(char *out, size_t n, const char *schema_name)
{
    size_t i;

    snprintf(out, n, "%s", schema_name);
    for (i = 0; out[i]; i++)
        if (out[i] == '_')
            out[i] = ' ';
}

static int on_dose(void *arg, const fxl_rq_detector_dose *x)
{
    mreport *r = arg;
    char kind[40], status[40], cal[32], acc[40], lim[40], share[32];
    const char *cells[8];
    rpt_row_style st = {0, 0, 0};

    words(kind, sizeof kind, x->kind);
    words(status, sizeof status, x->status);
    rpt_session_calendar_date(cal, sizeof cal, x->last_calibrated_at);
    snprintf(acc, sizeof acc, "%.0f cGy", x->accumulated_cgy);
    snprintf(lim, sizeof lim, "%.0f cGy", x->limit_cgy);
    rpt_fmt_pct(share, sizeof share, 100.0 * x->accumulated_cgy / x->limit_cgy, 0, 0);
    if (x->accumulated_cgy >= x->limit_cgy)
        st.alert_mask = st.bold_mask = 1u << 7;
    cells[0] = x->detector;
    cells[1] = x->detector_serial;
    cells[2] = kind;
    cells[3] = status;
    cells[4] = cal[0] ? cal : "never";
    cells[5] = acc;
    cells[6] = lim;
    cells[7] = share;
    rpt_table_row(&r->table, cells, &st);
    r->rows++;
    return 0;
}

static int detector_doses(mreport *r)
{
    rpt_doc *d = &r->s->doc;
    char line[400], when[48];
    int rc;

    section(r, "Detectors near their accumulated-dose limit", 100);
    rpt_session_datetime(when, sizeof when, r->as_of);
    snprintf(line, sizeof line,
             "Detectors with a dose limit whose dose accumulated since their latest calibration "
             "(corrected doses of current measurements) reached %.0f %% of it as of %s.",
             DOSE_WARN_FRACTION * 100, when);
    rpt_paragraph(d, d->font, 8.5, d->left, d->right - d->left, line);
    rpt_table_begin(&r->table, d, dose_cols, 8, 7, 2, "");
    r->rows = 0;
    rc = fxl_rq_detectors_near_limit_each(r->s->ctx, r->as_of, DOSE_WARN_FRACTION, on_dose, r);
    if (rc == 0 && r->rows == 0)
        rpt_table_note(&r->table, "None.");
    rpt_table_end(&r->table);
    return rc;
}

/* ---- the report ------------------------------------------------------------------------------ */

static int parse_month(fxl_ctx *ctx, const char *s, int *year, int *month)
{
    int n = 0;

    if (!s || strlen(s) != 7 || sscanf(s, "%4d-%2d%n", year, month, &n) != 2 || n != 7 ||
        s[4] != '-' || *month < 1 || *month > 12 || *year < 1900 || *year > 2999)
        return fxl_fail(ctx, FXL_EINVAL, "month '%s' must be YYYY-MM with month 01 to 12",
                        s ? s : "");
    return 0;
}

static void title_block(mreport *r)
{
    rpt_doc *d = &r->s->doc;
    char big[64], a[48], b[48], v[300], n[96];

    snprintf(big, sizeof big, "%s %d", rpt_month_name(r->month), r->year);
    rpt_text(d, d->bold, 17, 0, d->left, d->y - 17, "Monthly in vivo dosimetry summary");
    rpt_text(d, d->bold, 13, 0.25, d->left, d->y - 35, big);
    d->y -= 48;
    rpt_session_datetime(a, sizeof a, r->from);
    rpt_session_datetime(b, sizeof b, r->to);
    snprintf(v, sizeof v, "%s to %s, %s time", a, b, r->s->tz_name);
    rpt_keyval(d, d->left, 140, d->right - d->left - 140, "Period (start to end)", v);
    snprintf(v, sizeof v, "%s to %s", r->from, r->to);
    rpt_keyval(d, d->left, 140, d->right - d->left - 140, "The same in UTC", v);
    rpt_session_datetime(a, sizeof a, r->as_of);
    rpt_keyval(d, d->left, 140, d->right - d->left - 140, "Queue and equipment as of", a);
    snprintf(n, sizeof n, "%ld (superseded readings excluded)", r->total);
    rpt_keyval(d, d->left, 140, d->right - d->left - 140, "Results counted", n);
    d->y -= 6;
}

int fxl_report_month(fxl_ctx *ctx, fxl_report_result *out, const char *path, const char *month,
                     const fxl_report_options *opt)
{
    rpt_session s;
    mreport *r = NULL;
    rpt_doc *d;
    fxl_rq_scope scope;
    char text[600];
    int rc, year, mon;

    if (out)
        memset(out, 0, sizeof *out);
    if ((rc = parse_month(ctx, month, &year, &mon)) != 0)
        return rc;
    if (!path || !*path)
        return fxl_fail(ctx, FXL_EINVAL, "output file is required (a path ending in .pdf)");
    r = calloc(1, sizeof *r);
    if (!r)
        return fxl_fail(ctx, FXL_EIO, "out of memory");
    r->s = &s;
    r->year = year;
    r->month = mon;
    if ((rc = rpt_session_open(&s, ctx, opt, 0)) != 0)
        goto cleanup;
    d = &s.doc;
    if ((rc = rpt_month_bounds(ctx, r->from, r->to, year, mon)) != 0)
        goto cleanup;
    /* The state of the queue and the equipment at the end of the month, or
     * now for the month in progress. */
    snprintf(r->as_of, sizeof r->as_of, "%s",
             strcmp(s.generated_utc, r->to) < 0 ? s.generated_utc : r->to);
    if ((rc = fxl_rq_month_cells(ctx, r->from, r->to)) != 0 ||
        (rc = fxl_rq_month_counts_each(ctx, FXL_RQ_BY_NONE, on_total, r)) != 0)
        goto cleanup;

    snprintf(d->title, sizeof d->title, "In vivo dosimetry \xE2\x80\x94 monthly summary");
    snprintf(d->subtitle, sizeof d->subtitle, "%s %d \xC2\xB7 department time zone %s",
             rpt_month_name(mon), year, s.tz_name);
    snprintf(text, sizeof text, "Monthly in vivo dosimetry summary, %s", month);
    rpt_doc_info(d, text, s.generated_utc);

    rpt_page_new(d);
    title_block(r);
    if (r->total == 0) {
        snprintf(text, sizeof text,
                 "No in vivo measurement was recorded with a treatment date in %s %d (%s time). "
                 "There are no results to count, group or chart; the review queue, calibration "
                 "and detector sections below still show the state of the department.",
                 rpt_month_name(mon), year, s.tz_name);
        rpt_notice(d, "No measurements this month", text);
    }
    /* Results first, the inventory of tables last; every section is drawn
     * in every month (saying "none" when empty), so its number is stable. */
    overall_table(r);
    if ((rc = group_table(r, FXL_RQ_BY_SITE_TECHNIQUE, "By treatment site and technique",
                          "Site / technique")) != 0 ||
        (rc = group_table(r, FXL_RQ_BY_ENERGY, "By beam modality and energy", "Beam")) != 0 ||
        (rc = group_table(r, FXL_RQ_BY_DETECTOR, "By detector", "Detector")) != 0 ||
        (rc = site_statistics(r)) != 0 || (rc = histogram(r)) != 0 || (rc = actions(r)) != 0)
        goto cleanup;
    if ((rc = queue(r)) != 0 || (rc = calibrations(r)) != 0 || (rc = detector_doses(r)) != 0)
        goto cleanup;
    signoff(r);
    section(r, "Limits of the method and correction tables in force", 120);
    rpt_method_limits(d);
    memset(&scope, 0, sizeof scope);
    scope.from = r->from;
    scope.to = r->to;
    scope.as_of = r->as_of;
    if (r->total > 0) {
        if ((rc = rpt_method_corrections(&s, &scope)) != 0)
            goto cleanup;
    } else {
        rpt_paragraph(d, d->font, 8.5, d->left, d->right - d->left,
                      "No detector measured this month, so no correction table was in use.");
    }
    if (out) {
        out->pages = d->npages;
        out->measurements = r->total;
        out->empty = r->total == 0;
        snprintf(out->from, sizeof out->from, "%s", r->from);
        snprintf(out->to, sizeof out->to, "%s", r->to);
        snprintf(out->timezone, sizeof out->timezone, "%s", s.tz_name);
    }
cleanup:
    rc = rpt_session_close(&s, rc == 0 ? path : NULL, rc);
    free(r);
    return rc;
}
