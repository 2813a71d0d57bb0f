/* The auditor's pages (PDF reports made on request by the report code, the
 * verification with the anchor line) and the admin's users and API tokens. */
#include <sodium.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "fxl/api_tokens.h"
#include "fxl/audit.h"
#include "fxl/auth.h"
#include "fxl/server.h"
#include "fxl/patients.h"
#include "fxl/report.h"
#include "fxl/users.h"
#include "web/web.h"

int web_page_reports(web_req *r)
{
    fxl_patient *p = NULL;
    size_t n = 0, i;
    char now[FXL_TIME_LEN], month[8];
    int rc;

    if ((rc = fxl_patient_list(r->ctx, &p, &n)) != 0)
        return web_fail_store(r, rc);
    fxl_now(r->ctx, now);
    snprintf(month, sizeof month, "%.7s", now);
    web_page_begin(r, "Reports");
    web_printf(&r->out, "<div class=\"cards\"><form class=\"card\" method=\"get\" action=\"/report\"><h2>Monthly "
                        "summary</h2><input type=\"hidden\" name=\"kind\" value=\"month\"><label for=\"month\">Month "
                        "(YYYY-MM, department time zone)</label><input id=\"month\" name=\"month\" value=\"%a\" "
                        "pattern=\"[0-9]{4}-[0-9]{2}\" required autofocus><button class=\"primary\" type=\"submit\">"
                        "Download the PDF</button></form>\n",
               month);
    web_printf(&r->out, "<form class=\"card\" method=\"get\" action=\"/report\"><h2>Patient record</h2><input "
                        "type=\"hidden\" name=\"kind\" value=\"patient\"><label for=\"mrn\">Patient</label><select "
                        "id=\"mrn\" name=\"mrn\" required>");
    for (i = 0; i < n; i++)
        web_printf(&r->out, "<option value=\"%a\">%h, %h (%h)</option>", p[i].mrn, p[i].family_name, p[i].given_name,
                   p[i].mrn);
    web_printf(&r->out, "</select><button class=\"primary\" type=\"submit\">Download the PDF</button></form></div>\n"
                        "<p>Reports are made from the database as it is when you ask, and carry the audit anchor line "
                        "on every page (see <a href=\"/verify\">Verify</a>).</p>\n");
    web_page_end(r);
    free(p);
    return 0;
}

static void safe_name(char *out, size_t size, const char *s)
{
    size_t i;
    for (i = 0; s[i] && i + 1 < size; i++)
        out[i] = ((s[i] >= 'A' && s[i] <= 'Z') || (s[i] >= 'a' && s[i] <= 'z') || (s[i] >= '0' && s[i] <= '9') ||
                  s[i] == '-' || s[i] == '_')
                     ? s[i]
                     : '_';
    out[i] = '\0';
}

int web_get_report(web_req *r)
{
    const char *kind = web_arg(r, "kind"), *month = web_arg(r, "month"), *mrn = web_arg(r, "mrn");
    const char *tmp = getenv("TMPDIR");
    fxl_report_options opt = FXL_REPORT_OPTIONS_INIT;
    fxl_report_result res;
    char dir[512], path[600], part[80];
    FILE *f = NULL;
    char buf[8192];
    size_t got;
    int rc, is_month;

    if (!kind || (strcmp(kind, "month") != 0 && strcmp(kind, "patient") != 0))
        return web_fail(r, 400, "Choose a monthly summary or a patient record.");
    is_month = strcmp(kind, "month") == 0;
    if (is_month && (!month || strlen(month) != 7 || month[4] != '-'))
        return web_fail(r, 400, "The month must be written YYYY-MM, for example 2026-11.");
    if (!is_month && (!mrn || !*mrn))
        return web_fail(r, 400, "Choose a patient.");
    snprintf(dir, sizeof dir, "%s/fxlweb-XXXXXX", tmp && *tmp ? tmp : "/tmp");
    if (!mkdtemp(dir))
        return web_fail(r, 500, "The report could not be written (no temporary space).");
    snprintf(path, sizeof path, "%s/report.pdf", dir);
    rc = is_month ? fxl_report_month(r->ctx, &res, path, month, &opt)
                  : fxl_report_patient(r->ctx, &res, path, mrn, NULL, &opt);
    if (rc == 0 && (f = fopen(path, "rb")) != NULL) {
        while ((got = fread(buf, 1, sizeof buf, f)) > 0)
            web_buf_add(&r->out, buf, got);
        fclose(f);
    }
    unlink(path);
    rmdir(dir);
    if (rc != 0)
        return web_fail_store(r, rc);
    if (!f)
        return web_fail(r, 500, "The report was written but could not be read back.");
    safe_name(part, sizeof part, is_month ? month : mrn);
    snprintf(r->location, sizeof r->location, "%s", "");
    {
        static __thread char fname[128];
        snprintf(fname, sizeof fname, "fxledger-%s-%s.pdf", is_month ? "month" : "patient", part);
        r->download_name = fname;
    }
    r->out_type = "application/pdf";
    r->status = 200;
    return 0;
}

int web_page_verify(web_req *r)
{
    fxl_whole_verify v;
    const fxl_record_report *rr = &v.record;
    const char *given = web_arg(r, "anchor");
    char anchor[FXL_ANCHOR_LEN], at[32], head[65];
    int64_t rows;
    int rc, arc, i;

    if (given && !*given)
        given = NULL;
    if (given && (rc = fxl_anchor_parse(r->ctx, given, &rows, at, head)) != 0)
        return web_fail_store(r, rc);
    if ((rc = fxl_begin_read(r->ctx)) != 0)
        return web_fail_store(r, rc);
    rc = fxl_verify_whole(r->ctx, given, &v);
    arc = fxl_audit_anchor(r->ctx, anchor, sizeof anchor);
    fxl_rollback(r->ctx);
    if (rc == FXL_EBUSY)
        return web_fail_store(r, FXL_EBUSY);
    web_page_begin(r, "Verify the record");
    if (v.ok)
        web_printf(&r->out, "<div class=\"notice done big\" role=\"status\">Verified: the audit chain of %L rows is "
                            "intact, the record matches it (%L rows, %L seals, %L schema objects), SQLite's integrity "
                            "and foreign-key checks pass, and all %L signatures are valid.%s</div>\n",
                   v.chain.rows_checked, rr->rows_checked, rr->seals_checked, rr->objects_checked,
                   v.signatures_checked, rr->anchor_given ? " The anchor line given holds." : "");
    else {
        web_printf(&r->out, "<div class=\"notice refusal big\" role=\"alert\">\xE2\x9C\x95 Verification FAILED.");
        if (v.chain_rc != 0)
            web_printf(&r->out, " Audit chain: %h.", v.chain_msg);
        if (v.sig_rc != 0)
            web_printf(&r->out, " Signatures: %h.", v.sig_first_bad);
        web_printf(&r->out, " Tell the physicist in charge and keep the file as it is.</div>\n");
        if (rr->n_problems) {
            web_printf(&r->out, "<ul class=\"stop\">");
            for (i = 0; i < rr->n_problems; i++)
                web_printf(&r->out, "<li>%h</li>", rr->problem[i]);
            web_printf(&r->out, "</ul>\n");
        }
    }
    web_printf(&r->out, "<table class=\"facts\"><tbody><tr><th>Audit rows checked</th><td>%L</td></tr><tr><th>"
                        "Record rows and seals matched</th><td>%L, %L</td></tr><tr><th>"
                        "Integrity check</th><td>%s</td></tr><tr><th>Foreign keys</th><td>%s</td></tr><tr><th>"
                        "Signatures checked</th><td>%L</td></tr>",
               v.chain.rows_checked, rr->rows_checked, rr->seals_checked, v.chain.integrity_ok ? "\xE2\x9C\x93 ok" : "\xE2\x9C\x95 failed",
               v.chain.foreign_keys_ok ? "\xE2\x9C\x93 ok" : "\xE2\x9C\x95 failed", v.signatures_checked);
    if (rr->anchor_given)
        web_printf(&r->out, "<tr><th>Anchor given</th><td>%s rows 1 to %L</td></tr>",
                   rr->n_problems ? "checked:" : "\xE2\x9C\x93 holds for", rr->anchor_rows);
    web_printf(&r->out, "</tbody></table>\n");
    if (arc == 0)
        web_printf(&r->out, "<h2>Anchor line</h2><p>Keep this line outside the database (on paper, in an e-mail, on "
                            "another machine): checking it here later, or with <code>fxledger verify --anchor "
                            "'LINE'</code>, proves that rows 1 to N are unchanged and none was removed.</p>"
                            "<pre class=\"anchor\">%h</pre>\n",
                   anchor);
    web_printf(&r->out, "<form class=\"card\" method=\"get\" action=\"/verify\"><h2>Check a kept anchor line</h2>"
                        "<label for=\"anc\">Anchor line</label><input id=\"anc\" name=\"anchor\" value=\"%a\" "
                        "placeholder=\"fxledger-anchor rows=N at=... head=...\"><button type=\"submit\">Verify against "
                        "it</button></form>\n",
               given ? given : "");
    web_page_end(r);
    return 0;
}

/* ---- users ---------------------------------------------------------------------------- */

static void users_page(web_req *r, const char *notice, const char *secret_for, const char *secret)
{
    fxl_user *u = NULL;
    fxl_api_token *t = NULL;
    size_t n = 0, nt = 0, i;
    int rc;

    if ((rc = fxl_user_list(r->ctx, &u, &n)) != 0) {
        web_fail_store(r, rc);
        return;
    }
    if (fxl_api_token_list(r->ctx, &t, &nt) != 0)
        nt = 0;
    web_page_begin(r, "Users");
    if (notice)
        web_printf(&r->out, "<div class=\"notice done\" role=\"status\">%h</div>\n", notice);
    if (secret)
        web_printf(&r->out, "<div class=\"notice secret\" role=\"status\"><p>%h, shown once only: hand it over in "
                            "person.</p><pre>%h</pre></div>\n",
                   secret_for, secret);
    web_printf(&r->out, "<table class=\"list\"><thead><tr><th>Login</th><th>Name</th><th>Role</th><th>State</th>"
                        "<th>Actions</th></tr></thead><tbody>\n");
    for (i = 0; i < n; i++) {
        fxl_auth_state st;
        int have = fxl_auth_state_get(r->ctx, u[i].login, &st) == 0;
        web_printf(&r->out, "<tr><td class=\"mrn\">%h</td><td>%h</td><td>%h</td><td>%s%s%s</td><td>", u[i].login,
                   u[i].full_name, fxl_role_name(u[i].role), u[i].active ? "active" : "\xE2\x9C\x95 deactivated",
                   have && st.locked ? ", <strong>\xF0\x9F\x94\x92 locked</strong>" : "",
                   have && st.must_change ? ", one-time password pending" : "");
        if (u[i].active && strcmp(u[i].login, r->login) != 0) {
            web_printf(&r->out, "<form class=\"inline\" method=\"post\" action=\"/users\">");
            web_csrf_field(r);
            web_printf(&r->out, "<input type=\"hidden\" name=\"login\" value=\"%a\"><button name=\"action\" "
                                "value=\"reset\" type=\"submit\">Reset password</button>",
                       u[i].login);
            if (have && st.locked)
                web_printf(&r->out, " <button name=\"action\" value=\"unlock\" type=\"submit\">Unlock</button>");
            web_printf(&r->out, "</form><form class=\"inline\" method=\"post\" action=\"/users/deactivate\">");
            web_csrf_field(r);
            web_printf(&r->out, "<input type=\"hidden\" name=\"login\" value=\"%a\"><label>Your password <input "
                                "name=\"password\" type=\"password\" size=\"10\" required autocomplete=\"current-password\">"
                                "</label> <button type=\"submit\">Deactivate (signed)</button></form>",
                       u[i].login);
        }
        web_printf(&r->out, "</td></tr>\n");
    }
    web_printf(&r->out, "</tbody></table>\n<div class=\"cards\"><form class=\"card\" method=\"post\" action=\"/users\">"
                        "<h2>Add a user</h2>");
    web_csrf_field(r);
    web_printf(&r->out, "<input type=\"hidden\" name=\"action\" value=\"add\"><label for=\"nl\">Login</label><input "
                        "id=\"nl\" name=\"login\" required maxlength=\"64\" pattern=\"[A-Za-z0-9._-]+\"><label "
                        "for=\"nn\">Full name (printed on signatures)</label><input id=\"nn\" name=\"full_name\" "
                        "required maxlength=\"200\"><label for=\"nr\">Role</label><select id=\"nr\" name=\"role\">"
                        "<option>therapist</option><option>physicist</option><option>auditor</option><option>admin"
                        "</option></select><button class=\"primary\" type=\"submit\">Add with a one-time password"
                        "</button></form>\n");
    web_printf(&r->out, "<form class=\"card\" method=\"post\" action=\"/users\"><h2>Issue an API token</h2>");
    web_csrf_field(r);
    web_printf(&r->out, "<input type=\"hidden\" name=\"action\" value=\"token_issue\"><label for=\"tl\">Acting as "
                        "login</label><input id=\"tl\" name=\"login\" required><label for=\"tb\">Label (which system "
                        "uses it)</label><input id=\"tb\" name=\"label\" required maxlength=\"64\"><button "
                        "type=\"submit\">Issue</button></form></div>\n");
    if (nt) {
        web_printf(&r->out, "<h2>API tokens</h2><table class=\"list\"><thead><tr><th>Id</th><th>Acts as</th><th>Label"
                            "</th><th>Issued</th><th>State</th></tr></thead><tbody>\n");
        for (i = 0; i < nt; i++) {
            web_printf(&r->out, "<tr><td>%L</td><td>%h</td><td>%h</td><td>", t[i].id, t[i].login, t[i].label);
            web_time(r, t[i].created_at);
            web_printf(&r->out, " by %h</td><td>", t[i].created_by);
            if (t[i].revoked_at[0]) {
                web_printf(&r->out, "revoked ");
                web_time(r, t[i].revoked_at);
            } else {
                web_printf(&r->out, "valid <form class=\"inline\" method=\"post\" action=\"/users\">");
                web_csrf_field(r);
                web_printf(&r->out, "<input type=\"hidden\" name=\"token\" value=\"%L\"><button name=\"action\" "
                                    "value=\"token_revoke\" type=\"submit\">Revoke</button></form>",
                           t[i].id);
            }
            web_printf(&r->out, "</td></tr>\n");
        }
        web_printf(&r->out, "</tbody></table>\n");
    }
    web_page_end(r);
    free(t);
    free(u);
}

int web_page_users(web_req *r)
{
    const char *done = web_arg(r, "done");
    /* Only the console's own notices, never text from a link. */
    const char *notice = !done ? NULL
                         : strcmp(done, "unlocked") == 0 ? "Account unlocked."
                         : strcmp(done, "revoked") == 0 ? "API token revoked."
                         : strcmp(done, "deactivated") == 0 ? "User deactivated (signed)."
                                                            : NULL;
    users_page(r, notice, NULL, NULL);
    return 0;
}

int web_do_users(web_req *r)
{
    const char *action = web_arg(r, "action"), *login = web_arg(r, "login");
    char secret[FXL_API_TOKEN_HEX_LEN + 1], what[200];
    fxl_client client;
    fxl_role role;
    int rc;

    web_client(r, &client);
    if (!action)
        return web_fail(r, 400, "Which action?");
    if (strcmp(action, "add") == 0) {
        const char *role_name = web_arg(r, "role");
        if (!login || !role_name || fxl_role_parse(&role, role_name) != 0)
            return web_fail(r, 400, "A new user needs a login, a full name and a role.");
        if ((rc = fxl_auth_user_add(r->ctx, NULL, login, web_arg(r, "full_name") ? web_arg(r, "full_name") : "", role,
                                    secret)) != 0)
            return web_fail_store(r, rc);
        snprintf(what, sizeof what, "One-time password for '%s' (to be changed at the first login)", login);
        /* The password is shown in this response only; the store keeps its hash. */
        users_page(r, "User added.", what, secret);
        sodium_memzero(secret, sizeof secret);
        return 0;
    }
    if (strcmp(action, "reset") == 0) {
        if (!login)
            return web_fail(r, 400, "Whose password?");
        if ((rc = fxl_auth_reset_password(r->ctx, login, secret, &client)) != 0)
            return web_fail_store(r, rc);
        snprintf(what, sizeof what, "New one-time password for '%s' (their sessions were ended)", login);
        users_page(r, "Password reset.", what, secret);
        sodium_memzero(secret, sizeof secret);
        return 0;
    }
    if (strcmp(action, "unlock") == 0) {
        if (!login)
            return web_fail(r, 400, "Whose account?");
        if ((rc = fxl_auth_unlock(r->ctx, login, &client)) != 0)
            return web_fail_store(r, rc);
        web_redirect(r, "/users?done=unlocked");
        return 0;
    }
    if (strcmp(action, "token_issue") == 0) {
        if (!login)
            return web_fail(r, 400, "Which login does the token act as?");
        if ((rc = fxl_api_token_issue(r->ctx, NULL, login, web_arg(r, "label") ? web_arg(r, "label") : "", secret)) != 0)
            return web_fail_store(r, rc);
        snprintf(what, sizeof what, "API token acting as '%s' (send as 'Authorization: Bearer TOKEN')", login);
        users_page(r, "API token issued.", what, secret);
        sodium_memzero(secret, sizeof secret);
        return 0;
    }
    if (strcmp(action, "token_revoke") == 0) {
        int64_t id = web_arg_id(r, "token");
        if (!id)
            return web_fail(r, 400, "Which token?");
        if ((rc = fxl_api_token_revoke(r->ctx, id)) != 0)
            return web_fail_store(r, rc);
        web_redirect(r, "/users?done=revoked");
        return 0;
    }
    return web_fail(r, 400, "Unknown action.");
}

int web_do_users_deactivate(web_req *r)
{
    const char *login = web_arg(r, "login");
    int rc;
    if (!login || !*login)
        return web_fail(r, 400, "Whom to deactivate?");
    if ((rc = fxl_user_deactivate(r->ctx, login)) != 0)
        return web_fail_store(r, rc);
    web_redirect(r, "/users?done=deactivated");
    return 0;
}
