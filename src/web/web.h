/* The web console's private plumbing: the output buffer and its escaping
 * formatter, the request as handlers see it, the route table's entry and the
 * page emitters. No SQL and no physics here: handlers call the store. */
#ifndef FXL_WEB_H
#define FXL_WEB_H

#include <cjson/cJSON.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include "fxl/fxl.h"

/* ---- output buffer and the one formatter ------------------------------- */

typedef struct web_buf {
    char *data;        /* NUL-terminated, heap */
    size_t len, cap;
    int failed;        /* out of memory: the response becomes a 500 */
} web_buf;

#define WEB_BUF_INIT {NULL, 0, 0, 0}
void web_buf_release(web_buf *b);
void web_buf_add(web_buf *b, const void *data, size_t len);

/* Appends to b under `fmt`, whose conversions escape by context:
 *   %h  text (const char *), escaped for HTML element content
 *   %a  text escaped for a double-quoted HTML attribute value
 *   %u  text percent-encoded as one URL component (query value, path part)
 *   %s  trusted markup: only string literals and other emitters' output,
 *       never text from a request or the database
 *   %d  int, %ld long, %L int64_t (decimal)
 *   %.Nf double with N (0..9) decimals; NaN or infinity prints an em dash
 *   %%  a percent sign
 * Text from a person or the database reaches a page only through %h, %a or
 * %u. Invalid UTF-8 becomes U+FFFD, control characters are dropped, and the
 * bidirectional-override characters are shown as a visible "[U+202E]" so a
 * name cannot reorder the text around it. */
void web_printf(web_buf *b, const char *fmt, ...);
void web_vprintf(web_buf *b, const char *fmt, va_list ap);

/* The escapers behind %h, %a and %u (tested in tests/unit/test_web_escape.c). */
void web_escape_text(web_buf *b, const char *s);
void web_escape_attr(web_buf *b, const char *s);
void web_escape_url(web_buf *b, const char *s);

/* ---- a request ------------------------------------------------------------ */

#define WEB_FIELDS_MAX 256

typedef struct web_field {
    char *name;
    char *value;
} web_field;

typedef struct web_req {
    /* what came in */
    const char *method;          /* "GET", "POST" */
    const char *path;            /* without the query */
    char client[64];             /* peer address, for the audit log and limits */
    int tls;                     /* served over TLS: cookies get Secure */
    void *conn;                  /* the libmicrohttpd connection (server.c only) */
    char *body;                  /* request body, NUL-terminated, may be NULL */
    size_t body_len;
    const char *content_type;
    size_t n_form;               /* urlencoded body fields */
    web_field form[WEB_FIELDS_MAX];
    cJSON *json;                 /* a JSON body (API), else NULL */
    fxl_ctx *ctx;                /* this worker thread's database connection */

    /* who is asking (filled by the session check) */
    int authenticated;
    int by_token;                /* API token, not a browser session */
    int must_change_password;
    char login[65];
    char full_name[201];
    fxl_role role;
    char csrf[65];               /* the session's CSRF token, hex */
    char token[65];              /* the session (or API) token as presented */
    const struct web_route *route;

    /* what goes out */
    int status;
    web_buf out;
    const char *out_type;        /* content type; default HTML */
    char location[512];          /* redirect target, "" if none */
    char cookie[512];            /* a Set-Cookie header, "" if none */
    const char *download_name;   /* attachment file name, NULL if inline */
} web_req;

/* A request header or cookie; NULL when absent (server.c). */
const char *web_header(web_req *r, const char *name);
const char *web_cookie(web_req *r, const char *name);
/* 1 while this address has made fewer login attempts than the limit in the
 * last minute (and counts this one); 0: answer 429. */
int web_login_rate_ok(const char *addr);
void web_set_login_rate(unsigned per_minute);

/* Query (GET) or form (POST) value; NULL when absent. */
const char *web_arg(web_req *r, const char *name);
/* Integer argument > 0, or 0 when absent or not a positive integer. */
int64_t web_arg_id(web_req *r, const char *name);

/* ---- routes (routes.c) ---------------------------------------------------- */

/* Route flags, checked in one place (web_dispatch). */
#define WEB_PUBLIC 1     /* no session needed (login page, assets) */
#define WEB_WRITE 2      /* changes something: POST with a valid CSRF token */
#define WEB_SIGN 4       /* an electronic signature: the password again */
#define WEB_API 8        /* JSON in and out; a session or an API token */
#define WEB_NOTXN 16     /* the handler opens its own transactions (reports) */
#define WEB_ANY_STATE 32 /* reachable while a password change is pending */

typedef int (*web_handler)(web_req *r);

typedef struct web_route {
    const char *method;
    const char *path;
    web_handler handler;
    unsigned roles;      /* FXL_ROLE_* mask; 0 with WEB_PUBLIC */
    int flags;
} web_route;

/* The table (for tests of the table itself). */
const web_route *web_routes(size_t *n);

/* Finds the route, checks session, role, CSRF token and signature, runs the
 * handler and fills r's response. Never fails: errors become pages. */
void web_dispatch(web_req *r);

/* ---- sessions (session.c) ------------------------------------------------- */

/* Reads the session cookie (or an "Authorization: Bearer" API token on API
 * routes), checks it with the store and fills the identity members of r,
 * setting the acting user on r->ctx. 0 when authenticated. */
int web_session_check(web_req *r, int api);
/* Constant-time check of the CSRF token sent with a state-changing request
 * (form field "csrf" or header "X-CSRF-Token"). 0 when it matches. */
int web_csrf_check(web_req *r);
/* The client as the identity functions want it (kind "web", address). */
struct fxl_client;
void web_client(web_req *r, struct fxl_client *out);
/* The login form's CSRF token, bound to a pre-login cookie set here. */
void web_prelogin(web_req *r);
/* The Set-Cookie value opening (token) or ending (NULL) the session. */
void web_set_session_cookie(web_req *r, const char *token);

/* ---- responses --------------------------------------------------------------- */

/* An error page (or JSON {"error": msg} for API routes) with this status.
 * msg is plain text (escaped here). Returns -1 for one-line returns. */
int web_fail(web_req *r, int status, const char *msg);
/* Maps a store error code to a status and shows fxl_errmsg (the store's
 * messages name the field, never SQL). FXL_EBUSY gives 503 "busy, retry". */
int web_fail_store(web_req *r, int code);
/* 303 See Other to a local path (with its query), built with web_printf. */
void web_redirect(web_req *r, const char *fmt, ...);
/* JSON response; takes ownership of v. */
int web_json(web_req *r, int status, cJSON *v);

/* ---- page frame (layout.c) ------------------------------------------------------ */

/* Opens the page: head, header with the department and the user, navigation
 * for the user's role, and <main>. title is plain text. */
void web_page_begin(web_req *r, const char *title);
/* Closes <main>, the footer with the caveat, and the document. */
void web_page_end(web_req *r);
/* <input type=hidden name=csrf ...> for the session. */
void web_csrf_field(web_req *r);
/* A verdict badge: shape + words, never colour alone. name is the schema
 * name ("within_tolerance", ...). */
void web_verdict_badge(web_buf *b, const char *name);
/* A stored UTC time shown in the department's zone ("2026-11-02 10:00
 * +01:00") inside <time>; "" prints a dash. */
void web_time(web_req *r, const char *stored);
/* The caution every clinical screen keeps. */
void web_caveat(web_req *r);

/* ---- the SVG trend chart (chart.c) ------------------------------------------------ */

typedef struct web_chart_point {
    double x;            /* fraction number (or index) */
    double y;            /* deviation, percent; NaN: not evaluable (marked on the axis) */
    const char *label;   /* tooltip text, plain */
    const char *verdict; /* schema name, chooses the marker shape */
    int highlight;       /* the item's own measurement */
    int superseded;      /* drawn hollow */
} web_chart_point;

/* Deviation per fraction with the tolerance and action bands (NaN: no band
 * drawn and the chart says so). */
void web_chart(web_buf *b, const char *title, const web_chart_point *pts, size_t n,
               double tolerance_pct, double action_pct);

/* ---- handlers ---------------------------------------------------------------------- */

int web_page_home(web_req *r);
int web_page_login(web_req *r);
int web_do_login(web_req *r);
int web_do_logout(web_req *r);
int web_do_first_password(web_req *r);
int web_do_users_deactivate(web_req *r);
int web_page_password(web_req *r);
int web_do_password(web_req *r);
int web_page_queue(web_req *r);
int web_page_item(web_req *r);
int web_do_item_event(web_req *r);
int web_do_item_sign(web_req *r);
int web_page_patients(web_req *r);
int web_page_patient(web_req *r);
int web_page_detectors(web_req *r);
int web_page_calibrations(web_req *r);
int web_page_levels(web_req *r);
int web_do_levels(web_req *r);
int web_page_reports(web_req *r);
int web_get_report(web_req *r);
int web_page_verify(web_req *r);
int web_page_users(web_req *r);
int web_do_users(web_req *r);
int web_page_worklist(web_req *r);
int web_do_fraction_begin(web_req *r);
int web_page_fraction(web_req *r);
int web_do_fraction_field(web_req *r);
int web_do_fraction_close(web_req *r);

int web_api_me(web_req *r);
int web_api_queue(web_req *r);
int web_api_item(web_req *r);
int web_api_item_event(web_req *r);
int web_api_patient_history(web_req *r);
int web_api_detectors(web_req *r);
int web_api_levels(web_req *r);
int web_api_record(web_req *r);
int web_api_verify(web_req *r);
int web_api_worklist(web_req *r);

#endif
