/* Amendments, reasons, review decisions and midline estimates of one plan
 * in the per-patient report (report/record_sections.h). */
#include "report/record_sections.h"

#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/record.h"
#include "fxl/record_midline.h"
#include "report/table.h"

#define DASH "\xE2\x80\x93"

int rpt_is_escalated(const char *reasons_json)
{
    return reasons_json && strstr(reasons_json, RPT_ESCALATED_MARK) != NULL;
}

/* "a; b; c" from a JSON array of strings. */
static void join_reasons(char *out, size_t n, const char *json)
{
    cJSON *a = cJSON_Parse(json ? json : "[]"), *it;
    size_t used = 0;

    out[0] = '\0';
    cJSON_ArrayForEach(it, a) {
        if (!cJSON_IsString(it) || used >= n)
            continue;
        used += (size_t)snprintf(out + used, n - used, "%s%s", used ? "; " : "", it->valuestring);
    }
    cJSON_Delete(a);
    if (!out[0])
        snprintf(out, n, "no reason recorded");
}

/* ---- amendments ------------------------------------------------------------ */

typedef struct walk {
    rpt_session *s;
    int heading;
    long n;
} walk;

static void para(rpt_doc *d, const char *text)
{
    rpt_paragraph(d, d->font, 8, d->left + 10, d->right - d->left - 10, text);
    d->y -= 2;
}

static int on_amend(void *arg, const fxl_rq_measurement *m)
{
    walk *w = arg;
    rpt_doc *d = &w->s->doc;
    char text[1400], reading[48];

    if (!m->supersedes_id)
        return 0;
    if (!w->heading) {
        rpt_heading(d, "Amendments (superseded readings and the reason given)", 40);
        w->heading = 1;
    }
    rpt_fmt_reading(reading, sizeof reading, m->reading, m->reading_unit);
    snprintf(text, sizeof text, "No. %lld replaces No. %lld (fraction %d, field %s, %s; "
             "corrected reading %s). Reason: %s", (long long)m->id, (long long)m->supersedes_id,
             m->fraction, m->field, m->point, reading, m->amend_reason);
    para(d, text);
    w->n++;
    return 0;
}

int rpt_section_amendments(rpt_session *s, int64_t plan_id)
{
    walk w = {s, 0, 0};

    return fxl_rq_measurements_each(s->ctx, plan_id, on_amend, &w);
}

/* ---- reasons of results not within tolerance ------------------------------- */

static int on_reason(void *arg, const fxl_rq_measurement *m)
{
    walk *w = arg;
    rpt_doc *d = &w->s->doc;
    char text[2600], reasons[2000], dev[32], lv[96];

    if (strcmp(m->verdict, "within_tolerance") == 0)
        return 0;
    if (!w->heading) {
        rpt_heading(d, "Results not within tolerance: verdict and reasons", 40);
        w->heading = 1;
    }
    join_reasons(reasons, sizeof reasons, m->reasons_json);
    rpt_fmt_pct(dev, sizeof dev, m->deviation_pct, 2, 1);
    if (isfinite(m->tolerance_pct))
        snprintf(lv, sizeof lv, "tolerance %g %%, action %g %%", m->tolerance_pct, m->action_pct);
    else
        snprintf(lv, sizeof lv, "no levels applied");
    snprintf(text, sizeof text, "No. %lld (fraction %d, field %s, %s)%s: %s%s, deviation %s, "
             "%s. Reasons: %s.", (long long)m->id, m->fraction, m->field, m->point,
             m->superseded_by ? " [superseded]" : "", rpt_verdict_label(m->verdict),
             rpt_is_escalated(m->reasons_json) ? " (escalated by the rule over history)" : "",
             dev, lv, reasons);
    para(d, text);
    return 0;
}

int rpt_section_reasons(rpt_session *s, int64_t plan_id)
{
    walk w = {s, 0, 0};

    return fxl_rq_measurements_each(s->ctx, plan_id, on_reason, &w);
}

/* ---- review decisions -------------------------------------------------------- */

static const rpt_col ev_cols[] = {
    {"Item", 30, RPT_RIGHT},     {"Result No.", 40, RPT_RIGHT}, {"Time", 66, RPT_LEFT},
    {"Event", 60, RPT_LEFT},     {"By (printed name, login, role)", 150, RPT_LEFT},
    {"Meaning", 150, RPT_LEFT},  {"Comment", 275, RPT_LEFT}};
#define NEV ((int)(sizeof ev_cols / sizeof ev_cols[0]))

typedef struct evwalk {
    rpt_session *s;
    rpt_table t;
    int begun;
} evwalk;

static const char *meaning_of(const char *kind)
{
    if (strcmp(kind, "open") == 0)
        return "queued for review";
    if (strcmp(kind, "acknowledge") == 0)
        return "seen; the investigation is under way";
    if (strcmp(kind, "comment") == 0)
        return "comment added";
    if (strcmp(kind, "close") == 0)
        return "review decision: closed with disposition";
    if (strcmp(kind, "reopen") == 0)
        return "review decision withdrawn: reopened";
    return kind;
}

static int on_event(void *arg, const fxl_rq_event *e)
{
    evwalk *w = arg;
    rpt_doc *d = &w->s->doc;
    char item[24], mid[24], at[40], who[400], meaning[400];
    const char *cells[NEV];
    rpt_row_style style = {0, 0, 0};

    if (!w->begun) {
        rpt_heading(d, "Review of flagged results: every event and who made it", 60);
        rpt_table_begin(&w->t, d, ev_cols, NEV, 7, 6, "");
        w->begun = 1;
    }
    snprintf(item, sizeof item, "%lld", (long long)e->item_id);
    if (e->measurement_id)
        snprintf(mid, sizeof mid, "%lld", (long long)e->measurement_id);
    else
        snprintf(mid, sizeof mid, DASH);
    rpt_session_datetime(at, sizeof at, e->at);
    snprintf(who, sizeof who, "%s (%s, %s)", e->full_name, e->login, e->role);
    if (strcmp(e->kind, "close") == 0)
        snprintf(meaning, sizeof meaning, "%s '%s'", meaning_of(e->kind), e->disposition);
    else if (strcmp(e->kind, "open") == 0)
        snprintf(meaning, sizeof meaning, "%s: %s", meaning_of(e->kind), e->summary);
    else
        snprintf(meaning, sizeof meaning, "%s", meaning_of(e->kind));
    cells[0] = item;
    cells[1] = mid;
    cells[2] = at;
    cells[3] = e->kind;
    cells[4] = who;
    cells[5] = meaning;
    cells[6] = e->comment[0] ? e->comment : DASH;
    if (strcmp(e->kind, "close") == 0 || strcmp(e->kind, "reopen") == 0)
        style.bold_mask = (1u << 3) | (1u << 4) | (1u << 5);
    rpt_table_row(&w->t, cells, &style);
    return 0;
}

int rpt_section_review(rpt_session *s, int64_t plan_id)
{
    evwalk w;
    int rc;

    memset(&w, 0, sizeof w);
    w.s = s;
    rc = fxl_rq_review_events_each(s->ctx, plan_id, on_event, &w);
    if (w.begun) {
        rpt_table_end(&w.t);
        rpt_text(&s->doc, s->doc.font, 7, 0.3, s->doc.left, s->doc.y - 7,
                 "Times are local to the department. A decision (close, reopen) is recorded "
                 "under the name of the user who made it; events are never edited.");
        s->doc.y -= 14;
    }
    return rc;
}

/* ---- midline estimates -------------------------------------------------------- */

static const rpt_col ml_cols[] = {
    {"Fx", 24, RPT_RIGHT},           {"Field", 90, RPT_LEFT},
    {"Entrance No.", 50, RPT_RIGHT}, {"Exit No.", 44, RPT_RIGHT},
    {"Entrance dose", 60, RPT_RIGHT}, {"Exit dose", 60, RPT_RIGHT},
    {"Transmission", 56, RPT_RIGHT}, {"Midline (geometric mean)", 80, RPT_RIGHT},
    {"Arithmetic mean", 66, RPT_RIGHT}, {"Remark", 240, RPT_LEFT}};
#define NML ((int)(sizeof ml_cols / sizeof ml_cols[0]))

int rpt_section_midline(rpt_session *s, const char *mrn, const char *plan_label)
{
    rpt_doc *d = &s->doc;
    fxl_history_query q;
    fxl_history_row *rows = NULL;
    fxl_midline_pair *pairs = NULL;
    size_t n = 0, np = 0, i;
    rpt_table t;
    char c[NML][600];
    const char *cells[NML];
    int rc, k;

    memset(&q, 0, sizeof q);
    q.mrn = mrn;
    q.plan = plan_label;
    if ((rc = fxl_history_list(s->ctx, &rows, &n, &q)) != 0)
        goto cleanup;
    if (fxl_history_midlines(&pairs, &np, rows, n) != 0) {
        rc = fxl_fail(s->ctx, FXL_EIO, "out of memory pairing entrance and exit readings");
        goto cleanup;
    }
    if (np == 0)
        goto cleanup;
    rpt_heading(d, "Midline dose estimates (entrance-exit pairs)", 60);
    rpt_table_begin(&t, d, ml_cols, NML, 7, 3, "");
    for (i = 0; i < np; i++) {
        const fxl_midline_pair *p = &pairs[i];
        snprintf(c[0], sizeof c[0], "%d", p->fraction_number);
        snprintf(c[1], sizeof c[1], "%s", p->field);
        snprintf(c[2], sizeof c[2], "%lld", (long long)p->entrance_id);
        snprintf(c[3], sizeof c[3], "%lld", (long long)p->exit_id);
        rpt_fmt_cgy(c[4], sizeof c[4], p->estimate.entrance_cgy);
        rpt_fmt_cgy(c[5], sizeof c[5], p->estimate.exit_cgy);
        if (p->estimate.computed) {
            snprintf(c[6], sizeof c[6], "%.3f", p->estimate.transmission);
            rpt_fmt_cgy(c[7], sizeof c[7], p->estimate.geometric_cgy);
            rpt_fmt_cgy(c[8], sizeof c[8], p->estimate.arithmetic_cgy);
            snprintf(c[9], sizeof c[9], "estimate");
        } else {
            snprintf(c[6], sizeof c[6], DASH);
            snprintf(c[7], sizeof c[7], DASH);
            snprintf(c[8], sizeof c[8], DASH);
            snprintf(c[9], sizeof c[9], "not computed: %s",
                     p->estimate.reasons.n > 0 ? p->estimate.reasons.text[0] : "no dose result");
        }
        for (k = 0; k < NML; k++)
            cells[k] = c[k];
        rpt_table_row(&t, cells, NULL);
    }
    rpt_table_end(&t);
    rpt_paragraph(d, d->font, 7, d->left, d->right - d->left,
                  "Midline dose estimated from the corrected entrance and exit doses of the same "
                  "field and fraction: geometric mean sqrt(D_E x D_X), arithmetic mean beside it "
                  "(ESTRO Booklet 1). An estimate for review, not a measured dose.");
    d->y -= 4;
cleanup:
    free(rows);
    free(pairs);
    return rc;
}
