/* Read-only pages over the record: patients and one patient's history with
 * its trend chart, detectors, calibrations and the levels in force. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/calibrations.h"
#include "fxl/core.h"
#include "fxl/detectors.h"
#include "fxl/fraction.h"
#include "fxl/patients.h"
#include "fxl/record.h"
#include "fxl/thresholds.h"
#include "web/web.h"

int web_page_patients(web_req *r)
{
    fxl_patient *p = NULL;
    size_t n = 0, i;
    int rc;

    if ((rc = fxl_patient_list(r->ctx, &p, &n)) != 0)
        return web_fail_store(r, rc);
    web_page_begin(r, "Patients");
    web_printf(&r->out, "<table class=\"list\"><thead><tr><th>Patient</th><th>MRN</th><th>Born</th><th>Plans</th>"
                        "<th>Fractions logged</th></tr></thead><tbody>\n");
    for (i = 0; i < n; i++)
        web_printf(&r->out, "<tr><td><a href=\"/patient?mrn=%u\">%h, %h</a></td><td class=\"mrn\">%h</td><td>%h</td>"
                            "<td>%d</td><td>%d</td></tr>\n",
                   p[i].mrn, p[i].family_name, p[i].given_name, p[i].mrn, p[i].birth_date, p[i].plans,
                   p[i].fractions_logged);
    web_printf(&r->out, "</tbody></table>\n");
    if (!n)
        web_printf(&r->out, "<p class=\"empty\">No patient yet.</p>\n");
    web_page_end(r);
    free(p);
    return 0;
}

int web_page_patient(web_req *r)
{
    const char *mrn = web_arg(r, "mrn");
    fxl_patient p;
    fxl_history_row *h = NULL;
    fxl_history_query q;
    web_chart_point *pts = NULL;
    char (*labels)[160] = NULL;
    size_t n = 0, i, k = 0;
    double tol = NAN, act = NAN;
    char title[500];
    int rc;

    if (!mrn || !*mrn)
        return web_fail(r, 400, "Which patient? Choose one from the list.");
    if ((rc = fxl_patient_get(r->ctx, &p, mrn)) != 0)
        return web_fail_store(r, rc);
    memset(&q, 0, sizeof q);
    q.mrn = mrn;
    if ((rc = fxl_history_list(r->ctx, &h, &n, &q)) != 0)
        return web_fail_store(r, rc);
    snprintf(title, sizeof title, "%s, %s", p.family_name, p.given_name);
    web_page_begin(r, title);
    web_printf(&r->out, "<p><span class=\"mrn\">%h</span> \xC2\xB7 born %h \xC2\xB7 %d plan%s \xC2\xB7 %d fractions "
                        "logged</p>\n",
               p.mrn, p.birth_date[0] ? p.birth_date : "(not given)", p.plans, p.plans == 1 ? "" : "s",
               p.fractions_logged);
    if (n) {
        pts = calloc(n, sizeof *pts);
        labels = calloc(n, sizeof *labels);
    }
    for (i = 0; pts && labels && i < n; i++) {
        snprintf(labels[k], sizeof labels[k], "fraction %d %s %s: %.1f %% (%s)", h[i].fraction_number, h[i].field,
                 h[i].point, h[i].deviation_pct, fxl_verdict_label(h[i].verdict));
        pts[k].x = h[i].fraction_number;
        pts[k].y = h[i].deviation_pct;
        pts[k].label = labels[k];
        pts[k].verdict = fxl_verdict_name(h[i].verdict);
        pts[k].superseded = h[i].superseded_by != 0;
        /* The bands of the latest result judged by levels. */
        if (h[i].threshold_set_id && isfinite(h[i].tolerance_pct)) {
            tol = h[i].tolerance_pct;
            act = h[i].action_pct;
        }
        k++;
    }
    if (k)
        web_chart(&r->out, "Deviation per fraction, every field of the patient", pts, k, tol, act);
    web_printf(&r->out, "<table class=\"list\"><thead><tr><th>Fraction</th><th>Plan</th><th>Treated</th><th>Field"
                        "</th><th>Detector</th><th>Reading</th><th>Dose cGy</th><th>Expected cGy</th><th>Deviation</th>"
                        "<th>Verdict</th></tr></thead><tbody>\n");
    for (i = 0; i < n; i++) {
        web_printf(&r->out, "<tr%s><td>%d</td><td>%h</td><td class=\"when\">", h[i].superseded_by ? " class=\"superseded\"" : "",
                   h[i].fraction_number, h[i].plan);
        web_time(r, h[i].treated_at);
        web_printf(&r->out, "</td><td>%h %h</td><td>%h</td><td>%.4f %h</td><td>%.1f</td><td>%.1f</td><td class=\"dev\">"
                            "%.1f %%</td><td>",
                   h[i].field, h[i].point, h[i].detector, h[i].reading, h[i].reading_unit, h[i].corrected_dose_cgy,
                   h[i].expected_dose_cgy, h[i].deviation_pct);
        web_verdict_badge(&r->out, fxl_verdict_name(h[i].verdict));
        if (h[i].superseded_by)
            web_printf(&r->out, " superseded by %L", h[i].superseded_by);
        web_printf(&r->out, "</td></tr>\n");
    }
    web_printf(&r->out, "</tbody></table>\n");
    if (!n)
        web_printf(&r->out, "<p class=\"empty\">No measurement logged yet.</p>\n");
    web_page_end(r);
    free(labels);
    free(pts);
    free(h);
    return 0;
}

int web_page_detectors(web_req *r)
{
    fxl_detector *d = NULL;
    fxl_calibration *c = NULL;
    size_t n = 0, nc = 0, i, k;
    int rc;

    if ((rc = fxl_detector_list(r->ctx, &d, &n, NULL)) != 0)
        return web_fail_store(r, rc);
    if ((rc = fxl_calib_list(r->ctx, &c, &nc, NULL, NULL)) != 0) {
        free(d);
        return web_fail_store(r, rc);
    }
    web_page_begin(r, "Detectors");
    web_printf(&r->out, "<table class=\"list\"><thead><tr><th>Serial</th><th>Label</th><th>Kind</th><th>Status</th>"
                        "<th>Last calibrated</th><th>Calibration due</th><th>Accumulated dose since</th></tr></thead>"
                        "<tbody>\n");
    for (i = 0; i < n; i++) {
        const char *due = "";
        for (k = 0; k < nc; k++)
            if (strcmp(c[k].serial, d[i].serial) == 0 && strcmp(c[k].state, "superseded") != 0 &&
                (!*due || strcmp(c[k].valid_until, due) < 0))
                due = c[k].valid_until;
        web_printf(&r->out, "<tr><td class=\"mrn\">%h</td><td>%h</td><td>%h</td><td><span class=\"status\">%s%h</span>"
                            "</td><td>",
                   d[i].serial, d[i].label, d[i].kind, strcmp(d[i].status, "in_service") == 0 ? "\xE2\x9C\x93 " : "\xE2\x9A\xA0 ",
                   d[i].status);
        web_time(r, d[i].last_calibrated_at);
        web_printf(&r->out, "</td><td>");
        web_time(r, due);
        web_printf(&r->out, "</td><td>%.1f cGy in %L measurements", d[i].accumulated_dose_cgy, d[i].measurement_count);
        if (isfinite(d[i].dose_limit_cgy))
            web_printf(&r->out, " (limit %.0f cGy)%s", d[i].dose_limit_cgy,
                       d[i].accumulated_dose_cgy >= d[i].dose_limit_cgy ? " <strong>\xE2\x9A\xA0 limit reached</strong>" : "");
        web_printf(&r->out, "</td></tr>\n");
    }
    web_printf(&r->out, "</tbody></table>\n<p><a href=\"/calibrations\">Calibrations</a></p>\n");
    web_page_end(r);
    free(c);
    free(d);
    return 0;
}

int web_page_calibrations(web_req *r)
{
    fxl_calibration *c = NULL;
    size_t n = 0, i;
    const char *serial = web_arg(r, "serial");
    int rc;

    if ((rc = fxl_calib_list(r->ctx, &c, &n, serial && *serial ? serial : NULL, NULL)) != 0)
        return web_fail_store(r, rc);
    web_page_begin(r, "Calibrations");
    web_printf(&r->out, "<table class=\"list\"><thead><tr><th>Detector</th><th>Machine, beam, point</th><th>Calibrated"
                        "</th><th>Valid until</th><th>State</th><th>N (cGy per unit)</th><th>Readings n, mean, SD</th>"
                        "<th>By</th></tr></thead><tbody>\n");
    for (i = 0; i < n; i++) {
        web_printf(&r->out, "<tr><td class=\"mrn\">%h</td><td>%h %h %h</td><td class=\"when\">", c[i].serial, c[i].machine,
                   c[i].beam, c[i].point);
        web_time(r, c[i].calibrated_at);
        web_printf(&r->out, "</td><td class=\"when\">");
        web_time(r, c[i].valid_until);
        web_printf(&r->out, "</td><td>%s%h</td><td>%.5f</td><td>%d, %.4f, %.4f %h</td><td>%h</td></tr>\n",
                   strcmp(c[i].state, "current") == 0 ? "\xE2\x9C\x93 " : strcmp(c[i].state, "expired") == 0 ? "\xE2\x9A\xA0 " : "",
                   c[i].state, c[i].factor_cgy_per_unit, c[i].n, c[i].mean, c[i].sd, c[i].reading_unit, c[i].user);
    }
    web_printf(&r->out, "</tbody></table>\n");
    if (!n)
        web_printf(&r->out, "<p class=\"empty\">No calibration recorded.</p>\n");
    web_page_end(r);
    free(c);
    return 0;
}

int web_page_levels(web_req *r)
{
    fxl_threshold_set *t = NULL;
    size_t n = 0, i;
    int rc;

    if ((rc = fxl_thresholds_list(r->ctx, &t, &n, NULL, 0)) != 0)
        return web_fail_store(r, rc);
    web_page_begin(r, "Levels in force");
    if (web_arg(r, "done"))
        web_printf(&r->out, "<div class=\"notice done\" role=\"status\">Saved and signed: a new version is in "
                            "force from its date.</div>\n");
    web_printf(&r->out, "<p>Tolerance and action levels are local policy. The most specific set in force judges each "
                        "result (docs/levels.md). A change saves a new version; no version is ever edited.</p>\n");
    web_printf(&r->out, "<table class=\"list\"><thead><tr><th>Set</th><th>Version</th><th>In force from</th><th>Scope"
                        "</th><th>Tolerance</th><th>Action</th><th>Floor</th><th>Saved by</th></tr></thead><tbody>\n");
    for (i = 0; i < n; i++) {
        web_printf(&r->out, "<tr><td>%h</td><td>%d</td><td class=\"when\">", t[i].name, t[i].version);
        web_time(r, t[i].effective_from);
        web_printf(&r->out, "</td><td>%h %h %h %h %h</td><td>\xC2\xB1%.1f %%</td><td>\xC2\xB1%.1f %%</td><td>%.1f cGy</td>"
                            "<td>%h</td></tr>\n",
                   t[i].site, t[i].technique, t[i].modality, t[i].point, t[i].detector_kind, t[i].tolerance_pct,
                   t[i].action_pct, t[i].floor_cgy, t[i].created_by);
    }
    web_printf(&r->out, "</tbody></table>\n");
    if (!n)
        web_printf(&r->out, "<p class=\"warn\">\xE2\x9A\xA0 No levels are in force: every result is not evaluable "
                            "until a physicist sets them.</p>\n");
    if (r->role & FXL_ROLES_PHYSICS) {
        web_printf(&r->out, "<form class=\"card sign narrow\" method=\"post\" action=\"/levels\"><h2>Save a new version "
                            "(signed)</h2><p class=\"small\">A field left blank keeps the previous version's value; "
                            "\"any\" opens a scope column. A new set needs tolerance and action.</p>");
        web_csrf_field(r);
        web_printf(&r->out,
                   "<label for=\"ln\">Set name</label><input id=\"ln\" name=\"name\" required maxlength=\"64\" "
                   "list=\"sets\"><datalist id=\"sets\">");
        for (i = 0; i < n; i++)
            web_printf(&r->out, "<option value=\"%a\">", t[i].name);
        web_printf(&r->out,
                   "</datalist><label for=\"lt\">Tolerance, \xC2\xB1%%</label><input id=\"lt\" name=\"tolerance\" "
                   "inputmode=\"decimal\"><label for=\"la\">Action level, \xC2\xB1%%</label><input id=\"la\" "
                   "name=\"action\" inputmode=\"decimal\"><label for=\"lf\">Floor, cGy</label><input id=\"lf\" "
                   "name=\"floor\" inputmode=\"decimal\"><label for=\"ls\">Site</label><input id=\"ls\" "
                   "name=\"site\"><label for=\"lq\">Technique</label><input id=\"lq\" name=\"technique\">"
                   "<label for=\"lm\">Modality (photon, electron or any)</label><input id=\"lm\" name=\"modality\">"
                   "<label for=\"le\">Energy, MV or MeV (or any)</label><input id=\"le\" name=\"energy\">"
                   "<label for=\"lp\">Point (entrance, exit or any)</label><input id=\"lp\" name=\"point\">"
                   "<label for=\"lk\">Detector kind (or any)</label><input id=\"lk\" name=\"detector_kind\">"
                   "<label for=\"lw\">In force from (department time; blank: now)</label><input id=\"lw\" "
                   "name=\"effective\" placeholder=\"2026-11-02 08:00\">"
                   "<label for=\"lpw\">Your password (signature)</label><input id=\"lpw\" name=\"password\" "
                   "type=\"password\" required autocomplete=\"current-password\"><p class=\"meaning\">Signing as %h "
                   "(%h). Meaning: \"levels in force\": these levels judge every matching result from the date "
                   "given.</p><button class=\"primary\" type=\"submit\">Sign and save</button></form>\n",
                   r->full_name, r->login);
    }
    web_page_end(r);
    free(t);
    return 0;
}

/* A number typed in a form: blank keeps the previous value (NaN). */
static int form_number(web_req *r, double *out, const char *name)
{
    const char *s = web_arg(r, name);
    char *end;
    *out = NAN;
    if (!s || !*s)
        return 0;
    *out = strtod(s, &end);
    return *end || !isfinite(*out) ? -1 : 0;
}

/* A scope column: blank keeps it (NULL), "any" opens it (""). */
static const char *form_scope(web_req *r, const char *name)
{
    const char *s = web_arg(r, name);
    if (!s || !*s)
        return NULL;
    return strcmp(s, "any") == 0 ? "" : s;
}

int web_do_levels(web_req *r)
{
    fxl_threshold_change chg;
    char effective[FXL_TIME_LEN];
    const char *energy = web_arg(r, "energy"), *eff = web_arg(r, "effective");
    int rc;

    fxl_threshold_change_init(&chg);
    chg.name = web_arg(r, "name");
    if (!chg.name || !*chg.name)
        return web_fail(r, 400, "Name the level set.");
    if (form_number(r, &chg.tolerance_pct, "tolerance") != 0 || form_number(r, &chg.action_pct, "action") != 0 ||
        form_number(r, &chg.floor_cgy, "floor") != 0)
        return web_fail(r, 400, "Tolerance, action level and floor must be numbers (or blank to keep them). "
                                "Nothing was saved.");
    if (energy && *energy) {
        if (strcmp(energy, "any") == 0)
            chg.clear_energy = 1;
        else if (form_number(r, &chg.energy, "energy") != 0)
            return web_fail(r, 400, "The energy must be a number in MV or MeV, or any. Nothing was saved.");
    }
    chg.site = form_scope(r, "site");
    chg.technique = form_scope(r, "technique");
    chg.modality = form_scope(r, "modality");
    chg.point = form_scope(r, "point");
    chg.detector_kind = form_scope(r, "detector_kind");
    if (eff && *eff) {
        if ((rc = fxl_time_parse_local(r->ctx, effective, eff)) != 0)
            return web_fail_store(r, rc);
        chg.effective_from = effective;
    }
    if ((rc = fxl_thresholds_save(r->ctx, NULL, &chg)) != 0)
        return web_fail_store(r, rc);
    web_redirect(r, "/levels?done=1");
    return 0;
}
