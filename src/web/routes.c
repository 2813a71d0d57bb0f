/* The route table and the one place where every request is checked before
 * a handler runs: session (or API token), role, CSRF token, signature
 * password, the client address for the audit rows, and the transaction of a
 * reading request. Handlers only do their work. */
#include <sodium.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/auth.h"
#include "fxl/server.h"
#include "web/web.h"

#define ANY FXL_ROLES_ANY
#define CLIN FXL_ROLES_CLINICAL
#define PHYS FXL_ROLES_PHYSICS
#define AUDIT (FXL_ROLE_AUDITOR | FXL_ROLE_PHYSICIST | FXL_ROLE_ADMIN)
#define ADMIN FXL_ROLE_ADMIN

static const web_route g_routes[] = {
    {"GET", "/login", web_page_login, 0, WEB_PUBLIC},
    {"POST", "/login", web_do_login, 0, WEB_PUBLIC | WEB_WRITE | WEB_NOTXN},
    {"POST", "/password/first", web_do_first_password, 0, WEB_PUBLIC | WEB_WRITE | WEB_NOTXN},
    {"GET", "/", web_page_home, ANY, 0},
    {"POST", "/logout", web_do_logout, ANY, WEB_WRITE | WEB_ANY_STATE},
    {"GET", "/password", web_page_password, ANY, 0},
    {"POST", "/password", web_do_password, ANY, WEB_WRITE},

    {"GET", "/worklist", web_page_worklist, CLIN, 0},
    {"POST", "/fraction/begin", web_do_fraction_begin, CLIN, WEB_WRITE},
    {"GET", "/fraction", web_page_fraction, CLIN, 0},
    {"POST", "/fraction/field", web_do_fraction_field, CLIN, WEB_WRITE},
    {"POST", "/fraction/close", web_do_fraction_close, CLIN, WEB_WRITE},
    {"GET", "/patients", web_page_patients, ANY, 0},
    {"GET", "/patient", web_page_patient, ANY, 0},

    {"GET", "/queue", web_page_queue, ANY, 0},
    {"GET", "/item", web_page_item, ANY, 0},
    {"POST", "/item/event", web_do_item_event, CLIN, WEB_WRITE},
    {"POST", "/item/sign", web_do_item_sign, PHYS, WEB_WRITE | WEB_SIGN},
    {"GET", "/detectors", web_page_detectors, ANY, 0},
    {"GET", "/calibrations", web_page_calibrations, ANY, 0},
    {"GET", "/levels", web_page_levels, ANY, 0},
    {"POST", "/levels", web_do_levels, PHYS, WEB_WRITE | WEB_SIGN},

    {"GET", "/reports", web_page_reports, AUDIT, 0},
    {"GET", "/report", web_get_report, AUDIT, WEB_NOTXN},
    {"GET", "/verify", web_page_verify, AUDIT, WEB_NOTXN},

    {"GET", "/users", web_page_users, ADMIN, 0},
    {"POST", "/users", web_do_users, ADMIN, WEB_WRITE},
    {"POST", "/users/deactivate", web_do_users_deactivate, ADMIN, WEB_WRITE | WEB_SIGN},

    {"GET", "/api/v1/me", web_api_me, ANY, WEB_API},
    {"GET", "/api/v1/worklist", web_api_worklist, CLIN, WEB_API},
    {"GET", "/api/v1/queue", web_api_queue, ANY, WEB_API},
    {"GET", "/api/v1/item", web_api_item, ANY, WEB_API},
    {"POST", "/api/v1/item/event", web_api_item_event, CLIN, WEB_API | WEB_WRITE},
    {"GET", "/api/v1/patient/history", web_api_patient_history, ANY, WEB_API},
    {"GET", "/api/v1/detectors", web_api_detectors, ANY, WEB_API},
    {"GET", "/api/v1/levels", web_api_levels, ANY, WEB_API},
    {"POST", "/api/v1/record", web_api_record, CLIN, WEB_API | WEB_WRITE},
    {"GET", "/api/v1/verify", web_api_verify, AUDIT, WEB_API | WEB_NOTXN},
};

const web_route *web_routes(size_t *n)
{
    *n = sizeof g_routes / sizeof g_routes[0];
    return g_routes;
}

/* ---- responses ----------------------------------------------------------------- */

int web_json(web_req *r, int status, cJSON *v)
{
    char *text = v ? cJSON_PrintUnformatted(v) : NULL;
    cJSON_Delete(v);
    web_buf_release(&r->out);
    r->status = text ? status : 500;
    r->out_type = "application/json";
    if (text) {
        web_buf_add(&r->out, text, strlen(text));
        web_buf_add(&r->out, "\n", 1);
        free(text);
    } else
        web_buf_add(&r->out, "{\"error\":\"out of memory\"}\n", 26);
    return status < 400 ? 0 : -1;
}

int web_fail(web_req *r, int status, const char *msg)
{
    if (r->route && (r->route->flags & WEB_API)) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "error", msg);
        cJSON_AddNumberToObject(o, "status", status);
        web_json(r, status, o);
        return -1;
    }
    web_buf_release(&r->out);
    r->location[0] = '\0';
    r->download_name = NULL;
    r->out_type = "text/html; charset=utf-8";
    web_page_begin(r, status == 403 ? "Refused" : status >= 500 ? "Not available" : "Not done");
    web_printf(&r->out, "<div class=\"notice refusal big\" role=\"alert\">%h</div>\n", msg);
    if (status == 401)
        web_printf(&r->out, "<p><a class=\"button primary\" href=\"/login\" data-focus>Log in</a></p>\n");
    else
        web_printf(&r->out, "<p><a class=\"button\" href=\"/\" data-focus>Back to the start page</a></p>\n");
    web_page_end(r);
    r->status = status;
    return -1;
}

int web_fail_store(web_req *r, int code)
{
    char msg[700];
    switch (code) {
    case FXL_EBUSY:
        return web_fail(r, 503, "The database is busy with another request. Nothing was written: "
                                "wait a moment and send it again.");
    case FXL_EDB:
    case FXL_EIO:
    case FXL_EVERSION:
        /* SQLite's own words stay in the server's log, never in a page. */
        fprintf(stderr, "fxledger serve: %s %s: %s\n", r->method, r->path, fxl_errmsg(r->ctx));
        return web_fail(r, 500, "The database could not complete the request; nothing was written. "
                                "The console's log has the details for the administrator.");
    default:
        break;
    }
    snprintf(msg, sizeof msg, "%s", fxl_errmsg(r->ctx));
    if (msg[0])
        msg[0] = (char)(msg[0] >= 'a' && msg[0] <= 'z' ? msg[0] - 32 : msg[0]);
    switch (code) {
    case FXL_EPERM: return web_fail(r, 403, msg);
    case FXL_EAUTH: return web_fail(r, 403, msg);
    case FXL_EEXPIRED: return web_fail(r, 403, msg);
    case FXL_ENOTFOUND: return web_fail(r, 404, msg);
    case FXL_ECONFLICT: return web_fail(r, 409, msg);
    default: return web_fail(r, 422, msg);
    }
}

void web_redirect(web_req *r, const char *fmt, ...)
{
    web_buf b = WEB_BUF_INIT;
    va_list ap;
    va_start(ap, fmt);
    web_vprintf(&b, fmt, ap);
    va_end(ap);
    /* Local paths only: an open redirect would turn a link into a trap. */
    if (!b.data || b.data[0] != '/' || b.data[1] == '/' || b.data[1] == '\\')
        snprintf(r->location, sizeof r->location, "/");
    else
        snprintf(r->location, sizeof r->location, "%s", b.data);
    web_buf_release(&b);
    web_buf_release(&r->out);
    r->status = 303;
}

/* ---- dispatch ------------------------------------------------------------------------- */

static const web_route *find_route(const char *method, const char *path, int *path_known)
{
    size_t i;
    *path_known = 0;
    for (i = 0; i < sizeof g_routes / sizeof g_routes[0]; i++)
        if (strcmp(g_routes[i].path, path) == 0) {
            *path_known = 1;
            if (strcmp(g_routes[i].method, method) == 0)
                return &g_routes[i];
        }
    return NULL;
}

static void run_handler(web_req *r)
{
    int txn = !(r->route->flags & (WEB_WRITE | WEB_NOTXN));
    int rc;

    if (txn && (rc = fxl_begin_read(r->ctx)) != 0) {
        web_fail_store(r, rc);
        return;
    }
    r->route->handler(r);
    if (txn)
        fxl_rollback(r->ctx);
}

void web_dispatch(web_req *r)
{
    const web_route *rt;
    int known, api, rc;
    fxl_client client;

    rt = find_route(r->method, r->path, &known);
    api = strncmp(r->path, "/api/", 5) == 0;
    if (!rt) {
        web_route none = {r->method, r->path, NULL, 0, api ? WEB_API : 0};
        r->route = &none;
        if (!api && r->authenticated == 0 && web_session_check(r, 0) != 0)
            r->authenticated = 0;
        web_fail(r, known ? 405 : 404, known ? "This address does not take that method."
                                             : "There is no such page in the console.");
        fxl_clear_user(r->ctx);
        r->route = NULL;
        return;
    }
    r->route = rt;
    web_client(r, &client);
    fxl_set_origin(r->ctx, r->client);

    if (!(rt->flags & WEB_PUBLIC)) {
        if ((rc = web_session_check(r, api)) != 0) {
            if (rc == FXL_EBUSY)
                web_fail_store(r, rc);
            else if (api)
                web_fail(r, 401, rc == FXL_EPERM ? "api token not valid"
                                                 : "not authenticated: log in or send a valid API token");
            else if (strcmp(r->method, "GET") == 0)
                web_redirect(r, "/login?next=%u", r->path);
            else
                web_fail(r, 401, "Your session has ended (logged out, or idle too long). "
                                 "Log in again; nothing was written.");
            goto done;
        }
        if (!(rt->roles & (unsigned)r->role)) {
            char msg[200];
            snprintf(msg, sizeof msg, "Your role (%s) may not use this page or action.", fxl_role_name(r->role));
            web_fail(r, 403, msg);
            goto done;
        }
    } else if (web_session_check(r, 0) != 0) {
        r->authenticated = 0;
        fxl_clear_user(r->ctx);
    }

    if (rt->flags & WEB_WRITE) {
        if (api && !r->by_token && !r->json && r->body) {
            web_fail(r, 415, "send the request body as application/json");
            goto done;
        }
        if (web_csrf_check(r) != 0) {
            web_fail(r, 403, "This form has expired or did not come from this console (CSRF token "
                             "missing or wrong). Reload the page and try again; nothing was written.");
            goto done;
        }
    }
    if (rt->flags & WEB_SIGN) {
        const char *pw = web_arg(r, "password");
        if (!pw && r->json) {
            cJSON *p = cJSON_GetObjectItemCaseSensitive(r->json, "password");
            pw = cJSON_IsString(p) ? p->valuestring : NULL;
        }
        if (!pw || !*pw) {
            web_fail(r, 403, "This is an electronic signature: enter your password to sign. Nothing was written.");
            goto done;
        }
        if ((rc = fxl_sign_begin(r->ctx, pw, &client)) != 0) {
            web_fail(r, 403, rc == FXL_EAUTH ? "Signature refused: the password is wrong (the attempt is "
                                               "counted like a failed login). Nothing was signed."
                                             : fxl_errmsg(r->ctx));
            goto done;
        }
    }
    /* Activity keeps the session alive; a refused request above does not. */
    if (r->authenticated && !r->by_token)
        fxl_session_touch(r->ctx, r->token);
    run_handler(r);

done:
    fxl_sign_end(r->ctx);
    fxl_set_origin(r->ctx, NULL);
    fxl_clear_user(r->ctx);
    sodium_memzero(r->token, sizeof r->token);
}
