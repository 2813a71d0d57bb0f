/* The physicist's review queue: the list with its filters, one item with
 * its measurement, every factor, the trend and the events, and the events
 * that work it (acknowledge and comment; close and reopen signed with the
 * password again). Through the store's review functions. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/auth.h"
#include "fxl/core.h"
#include "fxl/review.h"
#include "web/web.h"

static unsigned status_mask(const char *s)
{
    if (!s || !*s || strcmp(s, "active") == 0)
        return FXL_QUEUE_ACTIVE;
    if (strcmp(s, "open") == 0)
        return FXL_QUEUE_OPEN;
    if (strcmp(s, "acknowledged") == 0)
        return FXL_QUEUE_ACKNOWLEDGED;
    if (strcmp(s, "closed") == 0)
        return FXL_QUEUE_CLOSED;
    if (strcmp(s, "all") == 0)
        return FXL_QUEUE_ALL;
    return 0;
}

static void option(web_req *r, const char *value, const char *label, const char *current)
{
    web_printf(&r->out, "<option value=\"%a\"%s>%h</option>", value,
               current && strcmp(current, value) == 0 ? " selected" : "", label);
}

int web_page_queue(web_req *r)
{
    fxl_queue_filter f;
    fxl_review_item *items = NULL;
    size_t n = 0, i;
    const char *st = web_arg(r, "status"), *mrn = web_arg(r, "mrn"), *det = web_arg(r, "detector");
    const char *sev = web_arg(r, "severity");
    int rc;

    memset(&f, 0, sizeof f);
    if (!(f.status_mask = status_mask(st)))
        return web_fail(r, 400, "Status must be active, open, acknowledged, closed or all.");
    f.mrn = mrn && *mrn ? mrn : NULL;
    f.detector = det && *det ? det : NULL;
    f.min_severity = sev && *sev >= '1' && *sev <= '4' && !sev[1] ? *sev - '0' : 0;
    if ((rc = fxl_queue_list(r->ctx, &items, &n, &f)) != 0)
        return web_fail_store(r, rc);
    web_page_begin(r, "Review queue");
    web_printf(&r->out, "<form class=\"filters\" method=\"get\" action=\"/queue\"><span><label for=\"status\">Status"
                        "</label><select id=\"status\" name=\"status\">");
    option(r, "active", "open or acknowledged", st ? st : "active");
    option(r, "open", "open", st);
    option(r, "acknowledged", "acknowledged", st);
    option(r, "closed", "closed", st);
    option(r, "all", "all", st);
    web_printf(&r->out, "</select></span><span><label for=\"mrn\">Patient MRN</label><input id=\"mrn\" name=\"mrn\" "
                        "value=\"%a\" size=\"12\"></span><span><label for=\"detector\">Detector</label><input "
                        "id=\"detector\" name=\"detector\" value=\"%a\" size=\"10\"></span><span><label "
                        "for=\"severity\">Severity at least</label><select id=\"severity\" name=\"severity\">",
               f.mrn ? f.mrn : "", f.detector ? f.detector : "");
    option(r, "", "any", sev ? sev : "");
    option(r, "2", "2", sev);
    option(r, "3", "3", sev);
    option(r, "4", "4 (action level)", sev);
    web_printf(&r->out, "</select></span><button type=\"submit\">Filter</button></form>\n");
    web_printf(&r->out, "<p class=\"count\">%d item%s, most severe first, then oldest.</p>\n", (int)n, n == 1 ? "" : "s");
    if (n) {
        web_printf(&r->out, "<table class=\"list\"><thead><tr><th>Item</th><th>Severity</th><th>Status</th><th>Patient"
                            "</th><th>Field / detector</th><th>Fraction</th><th>What</th><th>Opened</th><th>Last event"
                            "</th></tr></thead><tbody>\n");
        for (i = 0; i < n; i++) {
            fxl_review_item *it = &items[i];
            web_printf(&r->out, "<tr><td><a href=\"/item?id=%L\"%s>%L</a></td><td><span class=\"sev sev-%d\">%d</span>"
                                "</td><td><span class=\"status st-%a\">%h</span></td><td>%h <span class=\"mrn\">%h</span>"
                                "</td><td>%h %h %h</td><td>%d</td><td class=\"note\">%h</td><td class=\"when\">",
                       it->id, i == 0 ? " data-focus" : "", it->id, it->severity, it->severity, it->status, it->status,
                       it->patient_name, it->mrn, it->field, it->point, it->detector, it->fraction_number, it->summary);
            web_time(r, it->opened_at);
            web_printf(&r->out, " (%ld d)</td><td>%h %h</td></tr>\n", it->age_days, it->last_event, it->last_event_by);
        }
        web_printf(&r->out, "</tbody></table>\n");
    } else
        web_printf(&r->out, "<p class=\"empty\">No item matches.</p>\n");
    web_page_end(r);
    free(items);
    return 0;
}

static void fact_num(web_req *r, const char *label, double v, int dec, const char *unit)
{
    char fmt[64];
    snprintf(fmt, sizeof fmt, "<tr><th>%%h</th><td>%%.%df %%h</td></tr>", dec);
    web_printf(&r->out, fmt, label, v, unit);
}

static void show_measurement(web_req *r, const fxl_review_measurement *m)
{
    int i;
    web_printf(&r->out, "<section class=\"card\"><h2>Measurement %L</h2><p>", m->id);
    web_verdict_badge(&r->out, m->verdict);
    web_printf(&r->out, " deviation <span class=\"dev\">%.1f %%</span></p><table class=\"facts\"><tbody>",
               m->deviation_pct);
    web_printf(&r->out, "<tr><th>Fraction</th><td>%d</td></tr><tr><th>Treated</th><td>", m->fraction_number);
    web_time(r, m->treated_at);
    web_printf(&r->out, "</td></tr><tr><th>Recorded by</th><td>%h</td></tr><tr><th>Field, point, beam</th><td>%h, %h, %h"
                        "</td></tr><tr><th>Detector</th><td>%h</td></tr>",
               m->recorded_by, m->field, m->point, m->beam, m->detector);
    fact_num(r, "Reading M", m->reading, 4, m->reading_unit);
    fact_num(r, "Background M\xE2\x82\x80", m->background, 4, m->reading_unit);
    fact_num(r, m->temp_entered ? "Temperature (entered)" : "Temperature (skin setting assumed)", m->temp_c, 1, "\xC2\xB0" "C");
    fact_num(r, "Calibration factor N", m->factor_n, 5, "cGy per reading unit");
    for (i = 0; i < FXL_CF_COUNT; i++)
        if (isfinite(m->cf[i]))
            fact_num(r, fxl_cf_name((fxl_cf_param)i), m->cf[i], 4, "");
    fact_num(r, "CF temperature", m->cf_temp, 4, "");
    fact_num(r, "Corrected dose", m->corrected_dose_cgy, 2, "cGy");
    fact_num(r, "Expected dose", m->expected_dose_cgy, 2, "cGy");
    web_printf(&r->out, "<tr><th>Levels</th><td>%h v%d: tolerance %.1f %%, action %.1f %%</td></tr>",
               m->threshold_name[0] ? m->threshold_name : "none", m->threshold_version, m->tolerance_pct, m->action_pct);
    if (m->gross)
        web_printf(&r->out, "<tr><th>Plausibility</th><td><strong>beyond the plausibility bound</strong></td></tr>");
    if (m->superseded_by)
        web_printf(&r->out, "<tr><th>Superseded</th><td>by measurement %L (%h): ", m->superseded_by, m->superseded_reason);
    if (m->superseded_by) {
        web_verdict_badge(&r->out, m->superseded_verdict);
        web_printf(&r->out, " %.1f %%</td></tr>", m->superseded_deviation_pct);
    }
    web_printf(&r->out, "</tbody></table>");
    if (m->reasons.n) {
        web_printf(&r->out, "<ul>");
        for (i = 0; i < m->reasons.n; i++)
            web_printf(&r->out, "<li>%h</li>", m->reasons.text[i]);
        web_printf(&r->out, "</ul>");
    }
    web_printf(&r->out, "</section>\n");
}

static void show_events(web_req *r, const fxl_review_detail *d)
{
    size_t i, k;
    web_printf(&r->out, "<section class=\"card\"><h2>Events</h2><ol class=\"events\">");
    for (i = 0; i < d->n_events; i++) {
        const fxl_review_event *e = &d->events[i];
        fxl_signature *sig = NULL;
        size_t ns = 0;
        web_printf(&r->out, "<li><span class=\"ev-kind\">%h</span> by %h (%h, %h) ", e->kind, e->user_name, e->user,
                   e->user_role);
        web_time(r, e->at);
        if (e->disposition[0])
            web_printf(&r->out, " \xC2\xB7 disposition: <strong>%h</strong>", e->disposition);
        if (e->comment[0])
            web_printf(&r->out, "<blockquote>%h</blockquote>", e->comment);
        if (fxl_signature_list(r->ctx, "review_events", e->id, &sig, &ns) == 0)
            for (k = 0; k < ns; k++) {
                web_printf(&r->out, "<div class=\"signature\">\xE2\x9C\x8D Signed by %h (%h), ", sig[k].printed_name,
                           sig[k].login);
                web_time(r, sig[k].signed_at);
                web_printf(&r->out, ", meaning: <span class=\"meaning\">%h</span></div>", sig[k].meaning);
            }
        free(sig);
        web_printf(&r->out, "</li>");
    }
    web_printf(&r->out, "</ol></section>\n");
}

int web_page_item(web_req *r)
{
    fxl_review_detail d = FXL_REVIEW_DETAIL_INIT;
    fxl_disposition_list disp;
    web_chart_point *pts = NULL;
    int64_t id = web_arg_id(r, "id");
    size_t i;
    int rc, physics = (r->role & FXL_ROLES_PHYSICS) != 0, clinical = (r->role & FXL_ROLES_CLINICAL) != 0;
    char title[80], label[64][160];

    if (!id)
        return web_fail(r, 400, "Which item? Choose one from the review queue.");
    if ((rc = fxl_queue_show(r->ctx, &d, id)) != 0)
        return web_fail_store(r, rc);
    if ((rc = fxl_review_dispositions(r->ctx, &disp)) != 0) {
        fxl_review_detail_release(&d);
        return web_fail_store(r, rc);
    }
    snprintf(title, sizeof title, "Review item %lld", (long long)id);
    web_page_begin(r, title);
    if (web_arg(r, "done"))
        web_printf(&r->out, "<div class=\"notice done\" role=\"status\">Recorded: %h.</div>\n",
                   strcmp(web_arg(r, "done"), "closed") == 0     ? "closed, signed"
                   : strcmp(web_arg(r, "done"), "reopened") == 0 ? "reopened, signed"
                   : strcmp(web_arg(r, "done"), "comment") == 0  ? "comment added"
                                                                 : "acknowledged");
    web_printf(&r->out, "<section class=\"card\"><p><span class=\"sev sev-%d\">severity %d</span> \xC2\xB7 "
                        "<span class=\"status st-%a\">%h</span> \xC2\xB7 rule %h</p><p><strong>%h</strong></p>"
                        "<table class=\"facts\"><tbody><tr><th>Patient</th><td>%h <span class=\"mrn\">%h</span> %s</td>"
                        "</tr><tr><th>Plan, field</th><td>%h %h %h</td></tr><tr><th>Detector</th><td>%h</td></tr>"
                        "<tr><th>Opened</th><td>",
               d.item.severity, d.item.severity, d.item.status, d.item.status, d.item.rule, d.item.summary,
               d.item.patient_name, d.item.mrn, "", d.item.plan, d.item.field, d.item.point, d.item.detector);
    web_time(r, d.item.opened_at);
    web_printf(&r->out, " (%ld days ago)</td></tr></tbody></table>", d.item.age_days);
    if (d.item.mrn[0])
        web_printf(&r->out, "<p><a href=\"/patient?mrn=%u\">Patient history</a></p>", d.item.mrn);
    web_printf(&r->out, "</section>\n");
    if (d.has_measurement)
        show_measurement(r, &d.m);
    if (d.n_trend) {
        size_t n = d.n_trend < 64 ? d.n_trend : 64, off = d.n_trend - n;
        pts = calloc(n, sizeof *pts);
        for (i = 0; pts && i < n; i++) {
            const fxl_review_trend_point *t = &d.trend[off + i];
            snprintf(label[i], sizeof label[i], "fraction %d %s: %.1f %% (%s)%s", t->fraction_number, t->field,
                     t->deviation_pct, t->verdict, t->superseded ? ", superseded" : "");
            pts[i].x = d.trend_is_detector ? (double)(off + i + 1) : t->fraction_number;
            pts[i].y = t->deviation_pct;
            pts[i].label = label[i];
            pts[i].verdict = t->verdict;
            pts[i].highlight = t->is_item;
            pts[i].superseded = t->superseded;
        }
        if (pts) {
            web_printf(&r->out, "<section class=\"card\"><h2>Trend%s%h</h2>", d.trend_is_detector ? ": detector " : "",
                       d.trend_is_detector ? d.trend_series : "");
            web_chart(&r->out, d.trend_is_detector ? "Deviation per measurement of this detector"
                                                   : "Deviation per fraction of this field",
                      pts, n, d.trend_tolerance_pct, d.trend_action_pct);
            web_printf(&r->out, "</section>\n");
        }
        free(pts);
    }
    show_events(r, &d);

    /* The forms that work the item, for the roles that may. */
    if (clinical && strcmp(d.item.status, "open") == 0) {
        web_printf(&r->out, "<form class=\"card\" method=\"post\" action=\"/item/event\"><h2>Acknowledge</h2>");
        web_csrf_field(r);
        web_printf(&r->out, "<input type=\"hidden\" name=\"id\" value=\"%L\"><input type=\"hidden\" name=\"action\" "
                            "value=\"acknowledge\"><label for=\"ackc\">Comment (optional)</label><textarea id=\"ackc\" "
                            "name=\"comment\" rows=\"2\" maxlength=\"2000\"></textarea><button type=\"submit\">"
                            "Acknowledge</button></form>\n",
                   id);
    }
    if (clinical) {
        web_printf(&r->out, "<form class=\"card\" method=\"post\" action=\"/item/event\"><h2>Comment</h2>");
        web_csrf_field(r);
        web_printf(&r->out, "<input type=\"hidden\" name=\"id\" value=\"%L\"><input type=\"hidden\" name=\"action\" "
                            "value=\"comment\"><label for=\"cc\">Comment</label><textarea id=\"cc\" name=\"comment\" "
                            "rows=\"2\" maxlength=\"2000\" required></textarea><button type=\"submit\">Add the comment"
                            "</button></form>\n",
                   id);
    }
    if (physics && strcmp(d.item.status, "closed") != 0) {
        web_printf(&r->out, "<form class=\"card sign\" method=\"post\" action=\"/item/sign\"><h2>Close with a "
                            "disposition</h2>");
        web_csrf_field(r);
        web_printf(&r->out, "<input type=\"hidden\" name=\"id\" value=\"%L\"><input type=\"hidden\" name=\"action\" "
                            "value=\"close\"><label for=\"disp\">Disposition</label><select id=\"disp\" "
                            "name=\"disposition\" required>",
                   id);
        for (i = 0; i < disp.n; i++)
            option(r, disp.name[i], disp.name[i], NULL);
        web_printf(&r->out, "</select><label for=\"clc\">Comment (optional)</label><textarea id=\"clc\" name=\"comment\" "
                            "rows=\"2\" maxlength=\"2000\"></textarea><label for=\"clp\">Your password (signature)"
                            "</label><input id=\"clp\" name=\"password\" type=\"password\" autocomplete=\"current-password\" "
                            "required><p class=\"meaning\">Signing as %h (%h). Meaning: \"review closed\" with the "
                            "disposition chosen above: you have reviewed this result and its disposition is right."
                            "</p><button class=\"primary\" type=\"submit\">Sign and close</button></form>\n",
                   r->full_name, r->login);
    }
    if (physics && strcmp(d.item.status, "closed") == 0) {
        web_printf(&r->out, "<form class=\"card sign\" method=\"post\" action=\"/item/sign\"><h2>Reopen</h2>");
        web_csrf_field(r);
        web_printf(&r->out, "<input type=\"hidden\" name=\"id\" value=\"%L\"><input type=\"hidden\" name=\"action\" "
                            "value=\"reopen\"><label for=\"roc\">Why it is reopened</label><textarea id=\"roc\" "
                            "name=\"comment\" rows=\"2\" maxlength=\"2000\" required></textarea><label for=\"rop\">Your "
                            "password (signature)</label><input id=\"rop\" name=\"password\" type=\"password\" "
                            "autocomplete=\"current-password\" required><p class=\"meaning\">Signing as %h (%h). "
                            "Meaning: \"review reopened\".</p><button class=\"primary\" type=\"submit\">Sign and reopen"
                            "</button></form>\n",
                   id, r->full_name, r->login);
    }
    web_page_end(r);
    fxl_review_detail_release(&d);
    return 0;
}

int web_do_item_event(web_req *r)
{
    int64_t id = web_arg_id(r, "id");
    const char *action = web_arg(r, "action"), *comment = web_arg(r, "comment");
    int rc;

    if (!id || !action)
        return web_fail(r, 400, "Which item and which action?");
    if (comment && !*comment)
        comment = NULL;
    if (strcmp(action, "acknowledge") == 0)
        rc = fxl_review_acknowledge(r->ctx, id, comment);
    else if (strcmp(action, "comment") == 0)
        rc = fxl_review_comment(r->ctx, id, comment ? comment : "");
    else
        return web_fail(r, 400, "The action must be acknowledge or comment.");
    if (rc != 0)
        return web_fail_store(r, rc);
    web_redirect(r, "/item?id=%L&done=%u", id, strcmp(action, "comment") == 0 ? "comment" : "acknowledged");
    return 0;
}

int web_do_item_sign(web_req *r)
{
    int64_t id = web_arg_id(r, "id");
    const char *action = web_arg(r, "action"), *comment = web_arg(r, "comment");
    int rc;

    if (!id || !action)
        return web_fail(r, 400, "Which item and which action?");
    if (comment && !*comment)
        comment = NULL;
    if (strcmp(action, "close") == 0 && !web_arg(r, "disposition"))
        return web_fail(r, 400, "Choose a disposition.");
    if (strcmp(action, "close") == 0)
        rc = fxl_review_close(r->ctx, id, web_arg(r, "disposition"), comment);
    else if (strcmp(action, "reopen") == 0)
        rc = fxl_review_reopen(r->ctx, id, comment);
    else
        return web_fail(r, 400, "The action must be close or reopen.");
    if (rc != 0)
        return web_fail_store(r, rc);
    web_redirect(r, "/item?id=%L&done=%u", id, strcmp(action, "close") == 0 ? "closed" : "reopened");
    return 0;
}
