/* The therapist's day: today's worklist, logging a fraction field by field
 * from it (each field's verdict and guidance as soon as its reading is
 * committed, the holds shown before the readings and after them) and
 * closing it. All through the store's worklist and fraction functions. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/core.h"
#include "fxl/detectors.h"
#include "fxl/fraction.h"
#include "fxl/record.h"
#include "fxl/worklist.h"
#include "web/web.h"

/* The holds and other open items of a patient, as a console shows them
 * before the readings and beside the verdicts. */
static void show_items(web_req *r, const fxl_worklist_item *items, size_t n, int fold_others)
{
    size_t i, holds = fxl_holds_count(items, n);
    char guidance[1024];

    if (holds) {
        fxl_holds_guidance(guidance, sizeof guidance, items, n);
        web_printf(&r->out, "<section class=\"hold\" role=\"alert\" aria-label=\"Hold\"><h2>\xE2\x96\xA0 HOLD: "
                            "%d unresolved action-level result%s</h2>\n<ul>",
                   (int)holds, holds == 1 ? "" : "s");
        for (i = 0; i < n; i++)
            if (items[i].is_hold)
                web_printf(&r->out, "<li><a href=\"/item?id=%L\">Item %L</a>: %h</li>", items[i].id, items[i].id,
                           items[i].summary);
        web_printf(&r->out, "</ul><p><strong>%h</strong></p></section>\n", guidance);
    }
    if (n > holds) {
        web_printf(&r->out, "<div class=\"openitems\"><strong>Open items (%d)</strong>%s<ul>", (int)(n - holds),
                   fold_others ? "" : "");
        for (i = 0; i < n; i++)
            if (!items[i].is_hold)
                web_printf(&r->out, "<li><span class=\"sev sev-%d\">severity %d</span> <a href=\"/item?id=%L\">Item %L"
                                    "</a> (%h%s%h): %h</li>",
                           items[i].severity, items[i].severity, items[i].id, items[i].id, items[i].status,
                           items[i].on_detector ? ", detector " : "", items[i].on_detector ? items[i].detector : "",
                           items[i].summary);
        web_printf(&r->out, "</ul></div>\n");
    }
}

int web_page_worklist(web_req *r)
{
    fxl_worklist w = FXL_WORKLIST_INIT;
    size_t i, j;
    int rc, focused = 0;

    if ((rc = fxl_worklist_build(r->ctx, &w, NULL)) != 0)
        return web_fail_store(r, rc);
    web_page_begin(r, "Today");
    web_printf(&r->out, "<p>%h (%h). %d patient%s under treatment. ", w.date, w.timezone, (int)w.n,
               w.n == 1 ? "" : "s");
    if (w.daylist_imported_at[0]) {
        web_printf(&r->out, "Day list imported ");
        web_time(r, w.daylist_imported_at);
        web_printf(&r->out, ".</p>\n");
    } else
        web_printf(&r->out, "No day list imported for today: patients in MRN order.</p>\n");
    for (i = 0; i < w.n_unmatched; i++)
        web_printf(&r->out, "<p class=\"warn\">\xE2\x9A\xA0 Day list: %h</p>\n", w.unmatched[i]);
    if (w.n == 0)
        web_printf(&r->out, "<p class=\"empty\">No patient is under treatment today.</p>\n");
    for (i = 0; i < w.n; i++) {
        fxl_worklist_entry *e = &w.entries[i];
        web_printf(&r->out, "<section class=\"card entry%s\" aria-labelledby=\"e%d\">\n<h2 id=\"e%d\"><span class=\"line\">"
                            "%d</span> %h <span class=\"mrn\">%h</span></h2>\n",
                   e->n_holds ? " has-hold" : "", (int)i, (int)i, e->line, e->patient_name, e->mrn);
        web_printf(&r->out, "<p>Plan <strong>%h</strong> \xC2\xB7 %h \xC2\xB7 %h \xC2\xB7 next fraction <strong>%d</strong> of %d",
                   e->plan, e->site, e->technique, e->next_fraction, e->fractions);
        if (e->scheduled_at[0]) {
            web_printf(&r->out, " \xC2\xB7 scheduled ");
            web_time(r, e->scheduled_at);
        }
        web_printf(&r->out, "%s</p>\n", e->treated_today ? " \xC2\xB7 <strong>\xE2\x9C\x93 treated today</strong>" : "");
        show_items(r, e->items, e->n_items, 1);
        for (j = 0; j < e->n_warnings; j++)
            web_printf(&r->out, "<p class=\"warn\">\xE2\x9A\xA0 %h</p>\n", e->warnings[j]);
        web_printf(&r->out, "<table class=\"list\"><thead><tr><th>Field</th><th>Point</th><th>Measure today</th>"
                            "<th>Detector</th></tr></thead><tbody>");
        for (j = 0; j < e->n_fields; j++) {
            fxl_worklist_field *f = &e->fields[j];
            web_printf(&r->out, "<tr><td>%h</td><td>%h</td><td>%s%h</td><td>%h%s%h</td></tr>", f->name, f->point,
                       f->due_reason != FXL_DUE_NOT ? "<strong>\xE2\x97\x8F due</strong>: " : "",
                       f->due_reason != FXL_DUE_NOT ? fxl_due_reason_text(f->due_reason) : "not due", f->detector,
                       f->detector_ok || !f->detector[0] ? "" : " \xE2\x9A\xA0 ", f->detector_warning);
        }
        web_printf(&r->out, "</tbody></table>\n");
        if (e->open_fraction_id) {
            web_printf(&r->out, "<p><a class=\"button primary\" href=\"/fraction?id=%L\"%s>Resume fraction %d</a></p>\n",
                       e->open_fraction_id, focused ? "" : " data-focus", e->next_fraction);
            focused = 1;
        } else if (!e->treated_today) {
            web_printf(&r->out, "<form method=\"post\" action=\"/fraction/begin\">");
            web_csrf_field(r);
            web_printf(&r->out, "<input type=\"hidden\" name=\"mrn\" value=\"%a\"><input type=\"hidden\" name=\"plan\" "
                                "value=\"%a\"><button class=\"primary\" type=\"submit\"%s>Log fraction %d for %h</button>"
                                "</form>\n",
                       e->mrn, e->plan, focused ? "" : " autofocus", e->next_fraction, e->patient_name);
            focused = 1;
        } else if (e->next_fraction <= e->fractions) {
            /* Treated already today: a second fraction the same day (twice
             * daily) stays possible, but is not the button the focus lands on. */
            web_printf(&r->out, "<form method=\"post\" action=\"/fraction/begin\">");
            web_csrf_field(r);
            web_printf(&r->out, "<input type=\"hidden\" name=\"mrn\" value=\"%a\"><input type=\"hidden\" name=\"plan\" "
                                "value=\"%a\"><button type=\"submit\">Log a second fraction today (%d)</button></form>\n",
                       e->mrn, e->plan, e->next_fraction);
        }
        web_printf(&r->out, "<p><a href=\"/patient?mrn=%u\">History of %h</a></p></section>\n", e->mrn,
                   e->patient_name);
    }
    web_page_end(r);
    fxl_worklist_release(&w);
    return 0;
}

int web_do_fraction_begin(web_req *r)
{
    fxl_fraction_begin_request req;
    fxl_fraction_state st = FXL_FRACTION_STATE_INIT;
    const char *plan = web_arg(r, "plan");
    int rc;

    memset(&req, 0, sizeof req);
    req.mrn = web_arg(r, "mrn");
    req.plan = plan && *plan ? plan : NULL;
    if (!req.mrn || !*req.mrn)
        return web_fail(r, 400, "Choose a patient from the worklist.");
    if ((rc = fxl_fraction_begin(r->ctx, &st, &req)) != 0)
        return web_fail_store(r, rc);
    web_redirect(r, "/fraction?id=%L", st.fraction_id);
    fxl_fraction_state_release(&st);
    return 0;
}

/* The measurements of this fraction that stand (not superseded). */
static int fraction_rows(web_req *r, const fxl_fraction_state *st, fxl_history_row **rows, size_t *n)
{
    fxl_history_query q = {st->mrn, st->plan, NULL};
    fxl_history_row *all = NULL;
    size_t na = 0, i, k = 0;
    int rc;

    *rows = NULL;
    *n = 0;
    if ((rc = fxl_history_list(r->ctx, &all, &na, &q)) != 0)
        return rc;
    for (i = 0; i < na; i++)
        if (all[i].fraction_id == st->fraction_id && all[i].superseded_by == 0)
            all[k++] = all[i];
    *rows = all;
    *n = k;
    return 0;
}

/* hold_line: the guidance to show instead of "continue" while holds are
 * open ("" when none). */
static void show_result(web_req *r, const fxl_history_row *h, int just, const char *hold_line)
{
    const char *next;
    int i;
    web_printf(&r->out, "<div class=\"result%s\"%s>", just ? " just" : "", just ? " role=\"status\"" : "");
    web_verdict_badge(&r->out, fxl_verdict_name(h->verdict));
    web_printf(&r->out, " deviation <span class=\"dev\">%.1f %%</span> \xC2\xB7 dose %.1f cGy of %.1f cGy expected "
                        "\xC2\xB7 reading %.4f %h on %h",
               h->deviation_pct, h->corrected_dose_cgy, h->expected_dose_cgy, h->reading, h->reading_unit, h->detector);
    next = h->gross ? fxl_gross_guidance() : fxl_verdict_guidance(h->verdict);
    if (hold_line[0] && h->verdict == FXL_VERDICT_WITHIN)
        next = hold_line;
    web_printf(&r->out, "<p class=\"guidance\"><strong>Next:</strong> %h</p>", next);
    if (h->reasons.n) {
        web_printf(&r->out, "<ul class=\"small\">");
        for (i = 0; i < h->reasons.n; i++)
            web_printf(&r->out, "<li>%h</li>", h->reasons.text[i]);
        web_printf(&r->out, "</ul>");
    }
    web_printf(&r->out, "</div>\n");
}

int web_page_fraction(web_req *r)
{
    fxl_fraction_state st = FXL_FRACTION_STATE_INIT;
    fxl_history_row *rows = NULL;
    size_t nrows = 0, i, k;
    int64_t id = web_arg_id(r, "id"), just = web_arg_id(r, "just");
    int rc, open, focused = 0;
    char title[200], hold_line[1024];

    if (!id)
        return web_fail(r, 400, "Which fraction? Open it from the worklist.");
    if ((rc = fxl_fraction_load(r->ctx, &st, id)) != 0)
        return web_fail_store(r, rc);
    if ((open = fxl_fraction_is_open(r->ctx, id)) < 0) {
        rc = open;
        goto fail;
    }
    if ((rc = fraction_rows(r, &st, &rows, &nrows)) != 0)
        goto fail;
    snprintf(title, sizeof title, "Fraction %d of %d", st.fraction_number, st.plan_fractions);
    web_page_begin(r, title);
    web_printf(&r->out, "<p><strong>%h</strong> <span class=\"mrn\">%h</span> \xC2\xB7 plan %h \xC2\xB7 %h \xC2\xB7 %h "
                        "\xC2\xB7 treated ",
               st.patient_name, st.mrn, st.plan, st.site, st.technique);
    web_time(r, st.treated_at);
    web_printf(&r->out, "%s</p>\n", st.resumed ? " \xC2\xB7 resumed" : "");
    show_items(r, st.items, st.n_items, 0);
    fxl_holds_guidance(hold_line, sizeof hold_line, st.items, st.n_items);
    web_printf(&r->out, "<ol class=\"fields\">\n");
    for (i = 0; i < st.n_fields; i++) {
        fxl_worklist_field *f = &st.fields[i];
        const fxl_history_row *h = NULL;
        for (k = 0; k < nrows; k++)
            if (strcmp(rows[k].field, f->name) == 0 && strcmp(rows[k].point, f->point) == 0)
                h = &rows[k];
        web_printf(&r->out, "<li class=\"field%s\" id=\"f%d\"><h2>%h <span class=\"small\">%h \xC2\xB7 %h \xC2\xB7 %.0f MU "
                            "\xC2\xB7 expected %.1f cGy \xC2\xB7 %h</span></h2>\n",
                   h ? " done" : f->due_reason != FXL_DUE_NOT ? " due" : "", (int)i, f->name, f->point, f->beam, f->mu,
                   f->expected_dose_cgy,
                   f->due_reason != FXL_DUE_NOT ? fxl_due_reason_text(f->due_reason) : "not due today");
        if (h)
            show_result(r, h, h->measurement_id == just, hold_line);
        else if (open == 1) {
            char unit[8] = "";
            int focus = !focused && f->due_reason != FXL_DUE_NOT;
            if (f->detector[0] && fxl_record_detector_unit(r->ctx, unit, f->detector) != 0)
                unit[0] = '\0';
            if (f->detector[0] && !f->detector_ok)
                web_printf(&r->out, "<p class=\"warn\">\xE2\x9A\xA0 %h</p>", f->detector_warning);
            web_printf(&r->out, "<form class=\"reading\" method=\"post\" action=\"/fraction/field\">");
            web_csrf_field(r);
            web_printf(&r->out,
                       "<input type=\"hidden\" name=\"id\" value=\"%L\"><input type=\"hidden\" name=\"field\" "
                       "value=\"%a\"><input type=\"hidden\" name=\"point\" value=\"%a\">"
                       "<span><label for=\"r%d\">Reading%s%h%s</label><input id=\"r%d\" name=\"reading\" "
                       "inputmode=\"decimal\" autocomplete=\"off\" required%s></span>"
                       "<span><label for=\"d%d\">Detector</label><input id=\"d%d\" name=\"detector\" value=\"%a\" "
                       "required size=\"10\" list=\"detectors\" autocomplete=\"off\"></span>"
                       "<span><label for=\"t%d\">Temperature \xC2\xB0" "C (blank: %.1f)</label><input id=\"t%d\" "
                       "name=\"temp\" inputmode=\"decimal\" size=\"6\"></span>"
                       "<button type=\"submit\">Commit %h</button></form>\n",
                       st.fraction_id, f->name, f->point, (int)i, unit[0] ? " (" : "", unit, unit[0] ? ")" : "",
                       (int)i, focus ? " autofocus" : "", (int)i, (int)i, f->detector, (int)i, st.skin_temp_c, (int)i,
                       f->name);
            if (focus)
                focused = 1;
        } else
            web_printf(&r->out, "<p>Not measured.</p>\n");
        web_printf(&r->out, "</li>\n");
    }
    web_printf(&r->out, "</ol>\n");
    if (open == 1) {
        /* Suggestions for the detector field: the detectors in service. */
        fxl_detector *dets = NULL;
        size_t nd = 0;
        if (fxl_detector_list(r->ctx, &dets, &nd, NULL) == 0) {
            web_printf(&r->out, "<datalist id=\"detectors\">");
            for (k = 0; k < nd; k++)
                if (strcmp(dets[k].status, "in_service") == 0)
                    web_printf(&r->out, "<option value=\"%a\">%h</option>", dets[k].serial, dets[k].label);
            web_printf(&r->out, "</datalist>\n");
        }
        free(dets);
    }
    if (open == 1) {
        web_printf(&r->out, "<form method=\"post\" action=\"/fraction/close\">");
        web_csrf_field(r);
        web_printf(&r->out, "<input type=\"hidden\" name=\"id\" value=\"%L\"><button class=\"primary\" type=\"submit\"%s>"
                            "Close fraction %d</button> <span class=\"small\">Due fields left without a reading are "
                            "named as missing and opened as review items.</span></form>\n",
                   st.fraction_id, focused ? "" : " autofocus", st.fraction_number);
    } else
        web_printf(&r->out, "<p class=\"notice done\">This fraction is closed.</p><p><a class=\"button\" "
                            "href=\"/worklist\" data-focus>Back to today's worklist</a></p>\n");
    web_page_end(r);
    free(rows);
    fxl_fraction_state_release(&st);
    return 0;
fail:
    free(rows);
    fxl_fraction_state_release(&st);
    return web_fail_store(r, rc);
}

/* A number typed by a person: the whole text, finite. */
static int parse_number(double *out, const char *s)
{
    char *end;
    if (!s)
        return -1;
    while (*s == ' ')
        s++;
    if (!*s)
        return -1;
    *out = strtod(s, &end);
    while (*end == ' ')
        end++;
    return *end || !isfinite(*out) ? -1 : 0;
}

int web_do_fraction_field(web_req *r)
{
    fxl_reading_entry e;
    fxl_record_result res = FXL_RECORD_RESULT_INIT;
    int64_t id = web_arg_id(r, "id");
    const char *temp = web_arg(r, "temp"), *bg = web_arg(r, "background");
    int rc;

    fxl_reading_entry_init(&e);
    e.field = web_arg(r, "field");
    e.point = web_arg(r, "point");
    e.detector = web_arg(r, "detector");
    if (e.point && !*e.point)
        e.point = NULL;
    if (!id || !e.field || !e.detector || !*e.detector)
        return web_fail(r, 400, "The reading form is incomplete (fraction, field and detector are needed).");
    if (parse_number(&e.reading, web_arg(r, "reading")) != 0)
        return web_fail(r, 400, "The reading must be a number, for example 1.234. Nothing was written.");
    if (temp && *temp && parse_number(&e.temp_c, temp) != 0)
        return web_fail(r, 400, "The temperature must be a number in degrees Celsius, or left blank. Nothing was written.");
    if (bg && *bg && parse_number(&e.background, bg) != 0)
        return web_fail(r, 400, "The background must be a number, or left blank. Nothing was written.");
    if ((rc = fxl_fraction_log_field(r->ctx, &res, id, &e)) != 0)
        return web_fail_store(r, rc);
    web_redirect(r, "/fraction?id=%L&just=%L", id, res.n ? res.items[0].measurement_id : (int64_t)0);
    fxl_record_result_release(&res);
    return 0;
}

int web_do_fraction_close(web_req *r)
{
    fxl_fraction_close_result cr = FXL_FRACTION_CLOSE_RESULT_INIT;
    fxl_fraction_state st = FXL_FRACTION_STATE_INIT;
    fxl_worklist_item *items = NULL;
    size_t n = 0, i;
    int64_t id = web_arg_id(r, "id");
    int rc;
    char title[120];

    if (!id)
        return web_fail(r, 400, "Which fraction? Open it from the worklist.");
    if ((rc = fxl_fraction_close(r->ctx, &cr, id)) != 0)
        return web_fail_store(r, rc);
    /* The holds after the readings, read fresh after the close committed. */
    if ((rc = fxl_fraction_load(r->ctx, &st, id)) != 0 ||
        (rc = fxl_holds_for_patient(r->ctx, &items, &n, st.mrn, NULL, 0)) != 0) {
        fxl_fraction_close_release(&cr);
        fxl_fraction_state_release(&st);
        return web_fail_store(r, rc);
    }
    snprintf(title, sizeof title, "Fraction %d closed", cr.fraction_number);
    web_page_begin(r, title);
    web_printf(&r->out, "<div class=\"notice done\" role=\"status\">%s fraction %d of %h (%h): %d measurement%s.</div>\n",
               cr.already_closed ? "Already closed:" : "Closed", cr.fraction_number, st.patient_name, st.mrn,
               (int)cr.n_measured, cr.n_measured == 1 ? "" : "s");
    if (cr.n_missing) {
        web_printf(&r->out, "<div class=\"openitems\"><strong>Due but not measured:</strong><ul>");
        for (i = 0; i < cr.n_missing; i++)
            web_printf(&r->out, "<li>%h %h (%h): <a href=\"/item?id=%L\">item %L</a> opened</li>", cr.missing[i].field,
                       cr.missing[i].point, fxl_due_reason_text(cr.missing[i].due_reason),
                       cr.missing[i].review_item_id, cr.missing[i].review_item_id);
        web_printf(&r->out, "</ul></div>\n");
    }
    if (!fxl_holds_count(items, n))
        web_printf(&r->out, "<p>No hold is open for this patient.</p>\n");
    show_items(r, items, n, 0);
    web_printf(&r->out, "<p><a class=\"button\" href=\"/fraction?id=%L\">The fraction's results</a> "
                        "<a class=\"button primary\" href=\"/worklist\" data-focus>Back to today's worklist</a></p>\n",
               id);
    web_page_end(r);
    free(items);
    fxl_fraction_close_release(&cr);
    fxl_fraction_state_release(&st);
    return 0;
}
