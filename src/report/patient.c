/* The per-patient report: who and which plan, every measurement in a table
 * that runs over as many pages as it needs, summary statistics, a chart of
 * deviation against fraction per field, and the physicist's signature lines.
 * A4 landscape throughout, for the width of the table. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "fxl/core.h"
#include "fxl/report.h"
#include "report/chart.h"
#include "report/record_sections.h"
#include "report/session.h"
#include "report/table.h"
#include "store/report_query.h"

#define NVERDICT RPT_NVERDICT

typedef struct pstats {
    long listed, superseded, counted;
    long verdict[NVERDICT];
    long n;                       /* deviations judged against levels */
    double mean, m2, min, max;    /* Welford's running mean and sum of squares */
} pstats;

typedef struct preport {
    rpt_session *s;
    const char *plan_label;
    int64_t patient_id;
    char mrn[256];
    char name[1024];
    char birth[32];
    int nplans;
    int64_t single_plan_id;       /* the plan, when one is asked for */
    int64_t total;
    char first[FXL_TIME_LEN], last[FXL_TIME_LEN];
    /* per plan */
    int64_t plan_id;
    int plan_fractions;
    char plan[80];
    pstats st;
    rpt_table table;
    int chart_col;
    double chart_top;
    char unmeasured[1024];
    long temp_assumed;            /* rows of the plan whose temperature was not entered */
} preport;

static int is_level_verdict(int i)
{
    return i >= 0 && i <= 2;
}

/* ---- first page ------------------------------------------------------------- */

static int on_patient(void *arg, const fxl_rq_patient *p)
{
    preport *r = arg;

    r->patient_id = p->id;
    snprintf(r->mrn, sizeof r->mrn, "%s", p->mrn);
    rpt_fmt_name(r->name, sizeof r->name, p->family_name, p->given_name);
    snprintf(r->birth, sizeof r->birth, "%s", p->birth_date);
    return 0;
}

static int on_plan_totals(void *arg, const fxl_rq_plan *p)
{
    preport *r = arg;

    r->nplans++;
    r->single_plan_id = p->id;
    r->total += p->measurement_count;
    if (p->first_treated_at[0] && (!r->first[0] || strcmp(p->first_treated_at, r->first) < 0))
        snprintf(r->first, sizeof r->first, "%s", p->first_treated_at);
    if (p->last_treated_at[0] && strcmp(p->last_treated_at, r->last) > 0)
        snprintf(r->last, sizeof r->last, "%s", p->last_treated_at);
    return 0;
}

static const rpt_col plan_cols[] = {
    {"Plan", 110, RPT_LEFT},          {"Site", 110, RPT_LEFT},
    {"Technique", 80, RPT_LEFT},      {"Fractions prescribed", 62, RPT_RIGHT},
    {"Dose per fraction", 66, RPT_RIGHT}, {"Imported", 62, RPT_LEFT},
    {"Replaces plan", 90, RPT_LEFT},  {"Results listed", 66, RPT_RIGHT},
    {"Period measured", 124, RPT_LEFT},
};
#define NPLAN_COLS ((int)(sizeof plan_cols / sizeof plan_cols[0]))

static int on_plan_row(void *arg, const fxl_rq_plan *p)
{
    preport *r = arg;
    char fx[32], dose[32], imported[32], n[32], a[32], b[32], period[80];
    const char *cells[NPLAN_COLS];

    snprintf(fx, sizeof fx, "%d", p->fractions);
    rpt_fmt_cgy(dose, sizeof dose, p->dose_per_fraction_cgy);
    rpt_session_date(imported, sizeof imported, p->created_at);
    snprintf(n, sizeof n, "%lld", (long long)p->measurement_count);
    rpt_session_date(a, sizeof a, p->first_treated_at);
    rpt_session_date(b, sizeof b, p->last_treated_at);
    if (a[0])
        snprintf(period, sizeof period, "%s to %s", a, b);
    else
        snprintf(period, sizeof period, "no measurement");
    cells[0] = p->label;
    cells[1] = p->site;
    cells[2] = p->technique;
    cells[3] = fx;
    cells[4] = dose;
    cells[5] = imported;
    cells[6] = p->replaces_label[0] ? p->replaces_label : "\xE2\x80\x93";
    cells[7] = n;
    cells[8] = period;
    rpt_table_row(&r->table, cells, NULL);
    return 0;
}

static void title_block(preport *r)
{
    rpt_doc *d = &r->s->doc;
    char period[160], a[32], b[32], n[64], plans[64];
    double top, ycol;

    rpt_text(d, d->bold, 17, 0, d->left, d->y - 17, "In vivo dosimetry record");
    rpt_text(d, d->font, 9.5, 0.3, d->left, d->y - 31,
             "Results of patient dose measurements, fraction by fraction, with their review");
    d->y -= 44;
    top = d->y;
    rpt_keyval(d, d->left, 80, 260, "Patient", r->name);
    rpt_keyval(d, d->left, 80, 260, "Patient ID", r->mrn);
    rpt_keyval(d, d->left, 80, 260, "Date of birth", r->birth[0] ? r->birth : "not recorded");
    ycol = d->y;
    d->y = top;
    rpt_session_date(a, sizeof a, r->first);
    rpt_session_date(b, sizeof b, r->last);
    if (a[0])
        snprintf(period, sizeof period, "%s to %s (%s)", a, b, r->s->tz_name);
    else
        snprintf(period, sizeof period, "no measurement recorded");
    snprintf(n, sizeof n, "%lld", (long long)r->total);
    if (r->plan_label)
        snprintf(plans, sizeof plans, "plan '%.40s' only", r->plan_label);
    else
        snprintf(plans, sizeof plans, "%d (all plans of the patient)", r->nplans);
    rpt_keyval(d, d->left + 390, 110, 270, "Period covered", period);
    rpt_keyval(d, d->left + 390, 110, 270, "Measurements listed", n);
    rpt_keyval(d, d->left + 390, 110, 270, "Plans", plans);
    if (ycol < d->y)
        d->y = ycol;
    d->y -= 6;
}

/* ---- the measurement table ------------------------------------------------------ */

static const rpt_col meas_cols[] = {
    {"No.", 30, RPT_RIGHT},          {"Date", 52, RPT_LEFT},
    {"Fx", 22, RPT_RIGHT},           {"Field", 74, RPT_LEFT},
    {"Point", 42, RPT_LEFT},         {"Detector serial", 70, RPT_LEFT},
    {"Reading", 54, RPT_RIGHT},      {"Corrected dose", 56, RPT_RIGHT},
    {"Expected dose", 56, RPT_RIGHT}, {"Deviation", 46, RPT_RIGHT},
    {"Verdict", 86, RPT_LEFT},       {"Review disposition", 100, RPT_LEFT},
    {"Amendment", 82, RPT_LEFT},
};
#define NMEAS_COLS ((int)(sizeof meas_cols / sizeof meas_cols[0]))

static int on_measurement(void *arg, const fxl_rq_measurement *m)
{
    preport *r = arg;
    pstats *st = &r->st;
    char id[24], date[32], fx[16], reading[80], corr[32], exp[32], dev[32], amend[600];
    char verdict[120];
    const char *cells[NMEAS_COLS], *disp;
    rpt_row_style style = {0, 0, 0};
    int vi = rpt_verdict_index(m->verdict);

    snprintf(id, sizeof id, "%lld", (long long)m->id);
    rpt_session_date(date, sizeof date, m->treated_at);
    snprintf(fx, sizeof fx, "%d", m->fraction);
    rpt_fmt_reading(reading, sizeof reading, m->reading, m->reading_unit);
    if (m->temp_assumed) {
        size_t l = strlen(reading);
        snprintf(reading + l, sizeof reading - l, "\nT assumed");
        r->temp_assumed++;
    }
    /* An implausible entry is a probable typing or unit error, never shown
     * as a dose result (its arithmetic stays in the database). */
    int dose_result = strcmp(m->verdict, "implausible") != 0;

    rpt_fmt_cgy(corr, sizeof corr, dose_result ? m->corrected_dose_cgy : NAN);
    rpt_fmt_cgy(exp, sizeof exp, m->expected_dose_cgy);
    rpt_fmt_pct(dev, sizeof dev, dose_result ? m->deviation_pct : NAN, 2, 1);
    disp = m->review == FXL_RQ_REVIEW_PENDING ? "review pending"
           : m->review == FXL_RQ_REVIEW_CLOSED
               ? (m->disposition[0] ? m->disposition : "closed")
               : "\xE2\x80\x93";
    amend[0] = '\0';
    if (m->superseded_by)
        snprintf(amend, sizeof amend, "superseded by %lld", (long long)m->superseded_by);
    else if (m->supersedes_id)
        snprintf(amend, sizeof amend, "replaces %lld (reason under Amendments)",
                 (long long)m->supersedes_id);
    cells[0] = id;
    cells[1] = date;
    cells[2] = fx;
    cells[3] = m->field;
    cells[4] = m->point;
    cells[5] = m->detector_serial;  /* unique and short; labels are in the corrections table */
    cells[6] = reading;
    cells[7] = corr;
    cells[8] = exp;
    cells[9] = dev;
    snprintf(verdict, sizeof verdict, "%s%s", rpt_verdict_label(m->verdict),
             rpt_is_escalated(m->reasons_json) ? " (escalated)" : "");
    cells[10] = verdict;
    cells[11] = disp;
    cells[12] = amend;
    if (vi != 0)
        style.bold_mask |= 1u << 10;
    if (vi == 2 || vi == 4)
        style.alert_mask |= 1u << 10;
    style.muted = m->superseded_by != 0;
    rpt_table_row(&r->table, cells, &style);

    st->listed++;
    if (m->superseded_by) {
        st->superseded++;
        return 0;
    }
    st->counted++;
    if (vi >= 0)
        st->verdict[vi]++;
    if (is_level_verdict(vi) && isfinite(m->deviation_pct)) {
        double x = m->deviation_pct, delta;
        if (st->n == 0 || x < st->min)
            st->min = x;
        if (st->n == 0 || x > st->max)
            st->max = x;
        st->n++;
        delta = x - st->mean;
        st->mean += delta / (double)st->n;
        st->m2 += delta * (x - st->mean);
    }
    return 0;
}

/* ---- summary ------------------------------------------------------------------------ */

static const rpt_col sum_cols[] = {
    {"Verdict", 150, RPT_LEFT}, {"Results", 60, RPT_RIGHT}, {"Share", 60, RPT_RIGHT}};

static void summary(preport *r)
{
    rpt_doc *d = &r->s->doc;
    pstats *st = &r->st;
    rpt_table t;
    char cap[160], n[32], share[32], line[400], mean[32], sd[32], lo[32], hi[32];
    const char *cells[3];
    int i;

    snprintf(cap, sizeof cap, "Summary statistics, plan %s", r->plan);
    rpt_table_begin(&t, d, sum_cols, 3, 8, 1, cap);
    for (i = 0; i < NVERDICT; i++) {
        fxl_verdict v = (fxl_verdict)i;
        snprintf(n, sizeof n, "%ld", st->verdict[i]);
        rpt_fmt_pct(share, sizeof share,
                    st->counted ? 100.0 * (double)st->verdict[i] / (double)st->counted : NAN, 1, 0);
        cells[0] = fxl_verdict_label(v);
        cells[1] = n;
        cells[2] = share;
        rpt_table_row(&t, cells, NULL);
    }
    snprintf(n, sizeof n, "%ld", st->counted);
    cells[0] = "all counted results";
    cells[1] = n;
    cells[2] = st->counted ? "100.0 %" : "\xE2\x80\x93";
    {
        rpt_row_style bold = {7u, 0, 0};
        rpt_table_row(&t, cells, &bold);
    }
    rpt_table_end(&t);

    if (st->n > 0) {
        rpt_fmt_pct(mean, sizeof mean, st->mean, 2, 1);
        rpt_fmt_pct(sd, sizeof sd, st->n > 1 ? sqrt(st->m2 / (double)(st->n - 1)) : NAN, 2, 0);
        rpt_fmt_pct(lo, sizeof lo, st->min, 2, 1);
        rpt_fmt_pct(hi, sizeof hi, st->max, 2, 1);
        snprintf(line, sizeof line,
                 "Deviation of the %ld results judged against levels: mean %s, standard deviation "
                 "%s%s, range %s to %s.",
                 st->n, mean, sd, st->n > 1 ? " (n - 1 denominator)" : " (one result)", lo, hi);
    } else {
        snprintf(line, sizeof line,
                 "No result of this plan could be judged against levels, so no mean or standard "
                 "deviation is given.");
    }
    rpt_paragraph(d, d->font, 8.5, d->left, d->right - d->left, line);
    if (st->superseded > 0) {
        snprintf(line, sizeof line,
                 "%ld superseded reading%s (struck through in the table) %s listed for the record and "
                 "not counted.",
                 st->superseded, st->superseded == 1 ? "" : "s", st->superseded == 1 ? "is" : "are");
        rpt_paragraph(d, d->font, 8.5, d->left, d->right - d->left, line);
    }
    d->y -= 4;
}

/* ---- charts -------------------------------------------------------------------------- */

#define CHART_H 178.0
#define CHART_GAP 20.0

typedef struct chart_ctx {
    rpt_devchart c;
} chart_ctx;

static int on_point(void *arg, const fxl_rq_point *p)
{
    chart_ctx *k = arg;

    rpt_devchart_point(&k->c, p->fraction, p->deviation_pct, p->verdict);
    return 0;
}

static int on_field_chart(void *arg, const fxl_rq_field *f)
{
    preport *r = arg;
    rpt_doc *d = &r->s->doc;
    double w = (d->right - d->left - CHART_GAP) / 2, x;
    char title[200], sub[300], levels[128];
    chart_ctx k;
    int maxfx;

    if (f->measured == 0) {
        size_t len = strlen(r->unmeasured);
        snprintf(r->unmeasured + len, sizeof r->unmeasured - len, "%s%s (%s)",
                 len ? ", " : "", f->name, f->point);
        return 0;
    }
    if (r->chart_col == 0) {
        rpt_need(d, CHART_H + 6);
        r->chart_top = d->y;
        x = d->left;
    } else {
        x = d->left + w + CHART_GAP;
    }
    snprintf(title, sizeof title, "Field %s, %s", f->name, f->point);
    if (isfinite(f->tolerance_pct))
        snprintf(levels, sizeof levels, "tolerance \xC2\xB1%g %%, action \xC2\xB1%g %%%s",
                 f->tolerance_pct, f->action_pct,
                 f->level_variants > 1 ? " (most used; levels changed during the course)" : "");
    else
        snprintf(levels, sizeof levels, "no levels applied");
    snprintf(sub, sizeof sub, "%s %s, %s %g %s; %lld of %lld results judged; %s", f->machine,
             f->beam, f->modality, f->energy, strcmp(f->modality, "electron") == 0 ? "MeV" : "MV",
             (long long)f->evaluable, (long long)f->measured, levels);
    maxfx = r->plan_fractions > f->max_fraction ? r->plan_fractions : f->max_fraction;
    rpt_devchart_begin(&k.c, d, x, r->chart_top, w, CHART_H, title, sub, maxfx, f->max_abs_dev_pct,
                       f->tolerance_pct, f->action_pct);
    if (fxl_rq_field_points_each(r->s->ctx, f->id, on_point, &k) != 0)
        return -1;
    rpt_devchart_end(&k.c);
    if (r->chart_col == 0) {
        r->chart_col = 1;
    } else {
        r->chart_col = 0;
        d->y = r->chart_top - CHART_H - 6;
    }
    return 0;
}

static int charts(preport *r)
{
    rpt_doc *d = &r->s->doc;
    char line[1200];
    int rc;

    rpt_heading(d, "Deviation by fraction, per field", CHART_H + 22);
    rpt_chart_legend(d, d->left, d->y - 8);
    d->y -= 16;
    r->chart_col = 0;
    r->unmeasured[0] = '\0';
    rc = fxl_rq_fields_each(r->s->ctx, r->plan_id, on_field_chart, r);
    if (rc != 0)
        return rc;
    if (r->chart_col == 1)
        d->y = r->chart_top - CHART_H - 6;
    if (r->unmeasured[0]) {
        snprintf(line, sizeof line, "Fields of this plan without measurements: %s.", r->unmeasured);
        rpt_paragraph(d, d->font, 8.5, d->left, d->right - d->left, line);
    }
    return 0;
}

/* ---- one plan ------------------------------------------------------------------------- */

static int on_plan_section(void *arg, const fxl_rq_plan *p)
{
    preport *r = arg;
    rpt_doc *d = &r->s->doc;
    char head[300], cap[160], dose[32];
    int rc;

    r->plan_id = p->id;
    r->plan_fractions = p->fractions;
    snprintf(r->plan, sizeof r->plan, "%s", p->label);
    memset(&r->st, 0, sizeof r->st);
    rpt_fmt_cgy(dose, sizeof dose, p->dose_per_fraction_cgy);
    snprintf(head, sizeof head, "Plan %s: %s, %s, %d fractions prescribed%s%s", p->label, p->site,
             p->technique, p->fractions, isfinite(p->dose_per_fraction_cgy) ? " of " : "",
             isfinite(p->dose_per_fraction_cgy) ? dose : "");
    rpt_heading(d, head, 60);
    if (p->measurement_count == 0) {
        rpt_paragraph(d, d->font, 9, d->left, d->right - d->left,
                      "No measurement is recorded under this plan.");
        return 0;
    }
    snprintf(cap, sizeof cap, "Measurements, plan %s", p->label);
    r->temp_assumed = 0;
    rpt_table_begin(&r->table, d, meas_cols, NMEAS_COLS, 7, 3, cap);
    rc = fxl_rq_measurements_each(r->s->ctx, p->id, on_measurement, r);
    rpt_table_end(&r->table);
    if (rc != 0)
        return rc;
    rpt_paragraph(d, d->font, 7, d->left, d->right - d->left,
                  "Dates are local to the department. Fx: fraction number. Readings are shown "
                  "as entered. Deviation = (corrected - expected) / expected x 100 %. A dash "
                  "marks a value that could not be computed. \"T assumed\": no temperature was "
                  "entered, so the default skin temperature (setting skin_temp_c) was used for "
                  "the temperature correction. \"(escalated)\": raised to the action level by "
                  "the rule over two consecutive fractions.");
    if (r->temp_assumed > 0) {
        char line[200];
        snprintf(line, sizeof line, "%ld reading%s of this plan %s an assumed temperature.",
                 r->temp_assumed, r->temp_assumed == 1 ? "" : "s",
                 r->temp_assumed == 1 ? "uses" : "use");
        rpt_paragraph(d, d->font, 7, d->left, d->right - d->left, line);
    }
    d->y -= 6;
    if ((rc = rpt_section_amendments(r->s, p->id)) != 0 ||
        (rc = rpt_section_reasons(r->s, p->id)) != 0 ||
        (rc = rpt_section_review(r->s, p->id)) != 0 ||
        (rc = rpt_section_midline(r->s, r->mrn, p->label)) != 0)
        return rc;
    summary(r);
    return charts(r);
}

static int on_signature(void *arg, const fxl_rq_signature *g)
{
    preport *r = arg;
    rpt_doc *d = &r->s->doc;
    char line[900];

    snprintf(line, sizeof line, "%s: %s, signed by %s (%s) at %s UTC", g->subject, g->meaning,
             g->printed_name, g->login, g->signed_at);
    rpt_paragraph(d, d->font, 8.5, d->left, d->right - d->left, line);
    return 0;
}

/* Every electronic signature on the patient's review items and plans: the
 * name, login, time and meaning of each (21 CFR Part 11 section 11.50). */
static int signatures_section(preport *r)
{
    rpt_heading(&r->s->doc, "Electronic signatures", 40);
    rpt_paragraph(&r->s->doc, r->s->doc.font, 8, r->s->doc.left,
                  r->s->doc.right - r->s->doc.left,
                  "Each entry was signed by re-entering the signer's password; 'fxledger verify' "
                  "checks every signature against the signed record.");
    return fxl_rq_patient_signatures_each(r->s->ctx, r->patient_id, on_signature, r);
}

static void signature_block(rpt_doc *d)
{
    static const char *const labels[3] = {"Name of the reviewing medical physicist", "Signature",
                                          "Date"};
    const double widths[3] = {300, 220, 120};
    double x = d->left, y;
    int i;

    rpt_heading(d, "Review by the medical physicist", 110);
    rpt_paragraph(d, d->font, 9, d->left, d->right - d->left,
                  "I have reviewed the results above, including every result outside tolerance or "
                  "outside the action level and its disposition.");
    d->y -= 36;
    y = d->y;
    for (i = 0; i < 3; i++) {
        rpt_line(d, x, y, x + widths[i], y, 0.7, 0.2);
        rpt_text(d, d->font, 7.5, 0.3, x, y - 10, labels[i]);
        x += widths[i] + 25;
    }
    d->y = y - 30;
    rpt_text(d, d->font, 7.5, 0.3, d->left, d->y, "Comments");
    rpt_line(d, d->left + 45, d->y, d->right, d->y, 0.5, 0.5);
    rpt_line(d, d->left, d->y - 20, d->right, d->y - 20, 0.5, 0.5);
    d->y -= 28;
}

int fxl_report_patient(fxl_ctx *ctx, fxl_report_result *out, const char *path, const char *mrn,
                       const char *plan_label, const fxl_report_options *opt)
{
    rpt_session s;
    preport r;
    rpt_doc *d;
    char sub[1400], text[1600];
    fxl_rq_scope scope;
    int rc;

    if (out)
        memset(out, 0, sizeof *out);
    if (!mrn || !*mrn)
        return fxl_fail(ctx, FXL_EINVAL, "patient ID is required (1 to 64 characters)");
    if (!path || !*path)
        return fxl_fail(ctx, FXL_EINVAL, "output file is required (a path ending in .pdf)");
    memset(&r, 0, sizeof r);
    r.s = &s;
    r.plan_label = plan_label && *plan_label ? plan_label : NULL;
    if ((rc = rpt_session_open(&s, ctx, opt, 1)) != 0)
        goto cleanup;
    d = &s.doc;
    if ((rc = fxl_rq_patient_get(ctx, mrn, on_patient, &r)) != 0 ||
        (rc = fxl_rq_plans_each(ctx, r.patient_id, r.plan_label, on_plan_totals, &r)) != 0)
        goto cleanup;

    snprintf(d->title, sizeof d->title, "In vivo dosimetry \xE2\x80\x94 patient record");
    snprintf(sub, sizeof sub, "Patient ID %s \xC2\xB7 %s%s%s", r.mrn, r.name,
             r.plan_label ? " \xC2\xB7 plan " : "", r.plan_label ? r.plan_label : "");
    rpt_fit(d, d->font, 8, sub, d->right - d->left, d->subtitle, sizeof d->subtitle);
    snprintf(text, sizeof text, "In vivo dosimetry record, patient %s", r.mrn);
    rpt_doc_info(d, text, s.generated_utc);

    rpt_page_new(d);
    title_block(&r);
    if (r.total == 0) {
        snprintf(text, sizeof text,
                 "No in vivo measurement is recorded for patient %s (%s)%s%s%s. There is nothing to "
                 "list, chart or summarise; this page records that the absence of data was checked "
                 "on the date below.",
                 r.mrn, r.name, r.plan_label ? " under plan '" : "",
                 r.plan_label ? r.plan_label : "", r.plan_label ? "'" : "");
        rpt_notice(d, "No measurements recorded", text);
    }
    if (r.nplans > 0) {
        rpt_table_begin(&r.table, d, plan_cols, NPLAN_COLS, 7.5, 2, "Treatment plans");
        rc = fxl_rq_plans_each(ctx, r.patient_id, r.plan_label, on_plan_row, &r);
        rpt_table_end(&r.table);
        if (rc != 0)
            goto cleanup;
    } else {
        rpt_paragraph(d, d->font, 9, d->left, d->right - d->left,
                      "No treatment plan is recorded for this patient.");
    }
    d->y -= 4;
    rpt_method_limits(d);
    if (r.total > 0) {
        memset(&scope, 0, sizeof scope);
        scope.patient_id = r.patient_id;
        scope.as_of = s.generated_utc;
        scope.plan_id = r.plan_label ? r.single_plan_id : 0;
        if ((rc = rpt_method_corrections(&s, &scope)) != 0)
            goto cleanup;
        if ((rc = fxl_rq_plans_each(ctx, r.patient_id, r.plan_label, on_plan_section, &r)) != 0)
            goto cleanup;
        if ((rc = signatures_section(&r)) != 0)
            goto cleanup;
        signature_block(d);
    }
    if (out) {
        out->pages = d->npages;
        out->measurements = r.total;
        out->empty = r.total == 0;
        snprintf(out->timezone, sizeof out->timezone, "%s", s.tz_name);
    }
cleanup:
    return rpt_session_close(&s, rc == 0 ? path : NULL, rc);
}
