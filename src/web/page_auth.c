/* Logging in and out, the first-login password change and changing one's
 * own password. The identity layer (fxl/auth.h) does the checking, the
 * counting, the lockout and the audit rows; these pages carry the forms. */
#include <sodium.h>
#include <stdio.h>
#include <string.h>

#include "fxl/auth.h"
#include "web/web.h"

static const char *home_for(fxl_role role)
{
    switch (role) {
    case FXL_ROLE_THERAPIST: return "/worklist";
    case FXL_ROLE_PHYSICIST: return "/queue";
    case FXL_ROLE_AUDITOR: return "/reports";
    case FXL_ROLE_ADMIN: return "/users";
    }
    return "/queue";
}

/* A "next" target after login: a local path of the console only. */
static const char *safe_next(const char *next)
{
    size_t i;
    if (!next || next[0] != '/' || next[1] == '/' || strlen(next) > 200)
        return NULL;
    for (i = 0; next[i]; i++)
        if (next[i] == '\\' || (unsigned char)next[i] < 0x21 || next[i] == ':')
            return NULL;
    if (strcmp(next, "/login") == 0)
        return NULL;
    return next;
}

int web_page_home(web_req *r)
{
    web_redirect(r, "%s", home_for(r->role));
    return 0;
}

static void login_form(web_req *r, const char *notice, int refusal, const char *login)
{
    const char *next = safe_next(web_arg(r, "next"));
    web_prelogin(r);
    web_page_begin(r, "Log in");
    if (notice)
        web_printf(&r->out, "<div class=\"notice%s\" role=\"%s\">%h</div>\n", refusal ? " refusal" : "",
                   refusal ? "alert" : "status", notice);
    web_printf(&r->out, "<form class=\"card narrow\" method=\"post\" action=\"/login\">\n");
    web_csrf_field(r);
    if (next)
        web_printf(&r->out, "<input type=\"hidden\" name=\"next\" value=\"%a\">", next);
    web_printf(&r->out,
               "<label for=\"login\">Login</label><input id=\"login\" name=\"login\" autocomplete=\"username\" "
               "required maxlength=\"64\" value=\"%a\"%s>\n"
               "<label for=\"password\">Password</label><input id=\"password\" name=\"password\" type=\"password\" "
               "autocomplete=\"current-password\" required maxlength=\"512\"%s>\n"
               "<button class=\"primary\" type=\"submit\">Log in</button>\n</form>\n"
               "<p class=\"small\">Each account locks after repeated wrong passwords; an administrator can "
               "unlock it. A session ends after a period without activity.</p>\n",
               login ? login : "", login && *login ? "" : " autofocus", login && *login ? " autofocus" : "");
    web_page_end(r);
}

int web_page_login(web_req *r)
{
    const char *why = NULL;
    if (r->authenticated) {
        web_redirect(r, "%s", home_for(r->role));
        return 0;
    }
    if (web_arg(r, "out"))
        why = "You have logged out.";
    else if (web_arg(r, "next"))
        why = "Log in to continue. (A session ends after a period without activity.)";
    login_form(r, why, 0, NULL);
    return 0;
}

static void first_password_form(web_req *r, const char *login, const char *notice)
{
    web_prelogin(r);
    web_page_begin(r, "Choose your password");
    if (notice)
        web_printf(&r->out, "<div class=\"notice refusal\" role=\"alert\">%h</div>\n", notice);
    web_printf(&r->out,
               "<p>The password you entered for <strong>%h</strong> is a one-time password. Choose your own "
               "before you start: %d to %d characters, not containing your login.</p>\n"
               "<form class=\"card narrow\" method=\"post\" action=\"/password/first\">\n",
               login, FXL_PASSWORD_MIN, FXL_PASSWORD_MAX);
    web_csrf_field(r);
    web_printf(&r->out,
               "<input type=\"hidden\" name=\"login\" value=\"%a\">\n"
               "<label for=\"otp\">One-time password</label><input id=\"otp\" name=\"otp\" type=\"password\" "
               "autocomplete=\"off\" required autofocus>\n"
               "<label for=\"new\">New password</label><input id=\"new\" name=\"new\" type=\"password\" "
               "autocomplete=\"new-password\" required minlength=\"%d\">\n"
               "<label for=\"repeat\">New password again</label><input id=\"repeat\" name=\"repeat\" "
               "type=\"password\" autocomplete=\"new-password\" required minlength=\"%d\">\n"
               "<button class=\"primary\" type=\"submit\">Set the password and log in</button>\n</form>\n",
               login, FXL_PASSWORD_MIN, FXL_PASSWORD_MIN);
    web_page_end(r);
}

static int opened(web_req *r, const char *token, const fxl_session_info *info)
{
    const char *next = safe_next(web_arg(r, "next"));
    web_set_session_cookie(r, token);
    web_redirect(r, "%s", next ? next : home_for(info->user.role));
    return 0;
}

/* Both password forms count against the login rate limit. */
static int too_many_attempts(web_req *r)
{
    return web_fail(r, 429, "Too many login attempts from this workstation in the last minute. "
                            "Wait a minute and try again.");
}

int web_do_login(web_req *r)
{
    const char *login = web_arg(r, "login"), *pw = web_arg(r, "password");
    char token[FXL_TOKEN_HEX_LEN + 1];
    fxl_session_info info;
    fxl_client client;
    int rc;

    if (!web_login_rate_ok(r->client))
        return too_many_attempts(r);
    if (!login || !*login || !pw || !*pw) {
        login_form(r, "Enter your login and your password.", 1, login);
        r->status = 400;
        return -1;
    }
    web_client(r, &client);
    rc = fxl_auth_login(r->ctx, login, pw, NULL, &client, token, &info);
    if (rc == 0) {
        rc = opened(r, token, &info);
        sodium_memzero(token, sizeof token);
        return rc;
    }
    if (rc == FXL_EEXPIRED) {
        first_password_form(r, login, NULL);
        return 0;
    }
    if (rc == FXL_EAUTH) {
        login_form(r, fxl_errmsg(r->ctx), 1, login);
        r->status = 401;
        return -1;
    }
    return web_fail_store(r, rc);
}

int web_do_first_password(web_req *r)
{
    const char *login = web_arg(r, "login"), *otp = web_arg(r, "otp");
    const char *nw = web_arg(r, "new"), *rep = web_arg(r, "repeat");
    char token[FXL_TOKEN_HEX_LEN + 1];
    fxl_session_info info;
    fxl_client client;
    int rc;

    if (!web_login_rate_ok(r->client))
        return too_many_attempts(r);
    if (!login || !*login || !otp || !nw || !rep) {
        login_form(r, "Enter your login and your password.", 1, login);
        r->status = 400;
        return -1;
    }
    if (strcmp(nw, rep) != 0) {
        first_password_form(r, login, "The two new passwords differ. Nothing was changed.");
        r->status = 400;
        return -1;
    }
    if ((rc = fxl_password_policy_check(r->ctx, login, nw)) != 0) {
        first_password_form(r, login, fxl_errmsg(r->ctx));
        r->status = 400;
        return -1;
    }
    web_client(r, &client);
    rc = fxl_auth_login(r->ctx, login, otp, nw, &client, token, &info);
    if (rc == 0) {
        rc = opened(r, token, &info);
        sodium_memzero(token, sizeof token);
        return rc;
    }
    if (rc == FXL_EAUTH || rc == FXL_EINVAL) {
        first_password_form(r, login, fxl_errmsg(r->ctx));
        r->status = rc == FXL_EAUTH ? 401 : 400;
        return -1;
    }
    return web_fail_store(r, rc);
}

int web_do_logout(web_req *r)
{
    fxl_client client;
    web_client(r, &client);
    if (!r->by_token)
        fxl_session_end(r->ctx, r->token, &client);
    web_set_session_cookie(r, NULL);
    web_redirect(r, "/login?out=1");
    return 0;
}

static void password_form(web_req *r, const char *notice, int refusal)
{
    web_page_begin(r, "Change your password");
    if (notice)
        web_printf(&r->out, "<div class=\"notice %s\" role=\"%s\">%h</div>\n", refusal ? "refusal" : "done",
                   refusal ? "alert" : "status", notice);
    web_printf(&r->out, "<form class=\"card narrow\" method=\"post\" action=\"/password\">\n");
    web_csrf_field(r);
    web_printf(&r->out,
               "<label for=\"old\">Current password</label><input id=\"old\" name=\"old\" type=\"password\" "
               "autocomplete=\"current-password\" required autofocus>\n"
               "<label for=\"new\">New password (%d to %d characters, not containing your login)</label>"
               "<input id=\"new\" name=\"new\" type=\"password\" autocomplete=\"new-password\" required "
               "minlength=\"%d\">\n"
               "<label for=\"repeat\">New password again</label><input id=\"repeat\" name=\"repeat\" "
               "type=\"password\" autocomplete=\"new-password\" required minlength=\"%d\">\n"
               "<button class=\"primary\" type=\"submit\">Change the password</button>\n</form>\n",
               FXL_PASSWORD_MIN, FXL_PASSWORD_MAX, FXL_PASSWORD_MIN, FXL_PASSWORD_MIN);
    web_page_end(r);
}

int web_page_password(web_req *r)
{
    password_form(r, web_arg(r, "done") ? "Your password was changed." : NULL, 0);
    return 0;
}

int web_do_password(web_req *r)
{
    const char *old = web_arg(r, "old"), *nw = web_arg(r, "new"), *rep = web_arg(r, "repeat");
    fxl_client client;
    int rc;

    if (!old || !nw || !rep || strcmp(nw, rep) != 0) {
        password_form(r, "The two new passwords differ (or a field is empty). Nothing was changed.", 1);
        r->status = 400;
        return -1;
    }
    web_client(r, &client);
    if ((rc = fxl_auth_change_password(r->ctx, old, nw, &client)) != 0) {
        if (rc == FXL_EAUTH || rc == FXL_EINVAL) {
            password_form(r, fxl_errmsg(r->ctx), 1);
            r->status = rc == FXL_EAUTH ? 403 : 400;
            return -1;
        }
        return web_fail_store(r, rc);
    }
    web_redirect(r, "/password?done=1");
    return 0;
}
