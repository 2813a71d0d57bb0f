/* The page frame: head, the bar with the department, the user and the
 * navigation for the user's role, the footer with the caution; the verdict
 * badge and the time as every page shows them. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "fxl/core.h"
#include "fxl/fraction.h"
#include "web/web.h"

typedef struct nav_entry {
    const char *path;
    const char *label;
    unsigned roles;
} nav_entry;

static const nav_entry g_nav[] = {
    {"/worklist", "Today", FXL_ROLES_CLINICAL},
    {"/queue", "Review queue", FXL_ROLES_ANY},
    {"/patients", "Patients", FXL_ROLES_ANY},
    {"/detectors", "Detectors", FXL_ROLES_ANY},
    {"/calibrations", "Calibrations", FXL_ROLES_PHYSICS | FXL_ROLE_AUDITOR},
    {"/levels", "Levels", FXL_ROLES_ANY},
    {"/reports", "Reports", FXL_ROLE_AUDITOR | FXL_ROLES_PHYSICS},
    {"/verify", "Verify", FXL_ROLE_AUDITOR | FXL_ROLES_PHYSICS},
    {"/users", "Users", FXL_ROLE_ADMIN},
};

void web_csrf_field(web_req *r)
{
    web_printf(&r->out, "<input type=\"hidden\" name=\"csrf\" value=\"%a\">", r->csrf);
}

void web_page_begin(web_req *r, const char *title)
{
    web_buf *b = &r->out;
    char dept[201] = "";
    size_t i;

    if (r->ctx && fxl_setting_get(r->ctx, "department", dept, sizeof dept) != 0)
        dept[0] = '\0';
    r->out_type = "text/html; charset=utf-8";
    web_printf(b,
               "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
               "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
               "<title>%h \xC2\xB7 fxledger</title>\n"
               "<link rel=\"stylesheet\" href=\"/assets/console.css\">\n"
               "<script src=\"/assets/console.js\" defer></script>\n</head>\n<body>\n"
               "<a class=\"skip\" href=\"#main\">Skip to the page</a>\n"
               "<header class=\"bar\">\n<span class=\"brand\"><span class=\"mark\" aria-hidden=\"true\">"
               "\xE2\x8C\x81</span> fxledger<span class=\"dept\">%h</span></span>\n",
               title, dept);
    if (r->authenticated && !r->by_token) {
        web_printf(b, "<nav aria-label=\"Main\"><ul>");
        for (i = 0; i < sizeof g_nav / sizeof g_nav[0]; i++) {
            if (!(g_nav[i].roles & (unsigned)r->role))
                continue;
            web_printf(b, "<li><a href=\"%s\"%s>%s</a></li>", g_nav[i].path,
                       strcmp(r->path, g_nav[i].path) == 0 ? " aria-current=\"page\"" : "", g_nav[i].label);
        }
        web_printf(b, "</ul></nav>\n<div class=\"who\"><span>%h</span> <span class=\"role\">%h</span>"
                      "<a href=\"/password\">Password</a>"
                      "<form class=\"inline\" method=\"post\" action=\"/logout\">",
                   r->full_name, fxl_role_name(r->role));
        web_csrf_field(r);
        web_printf(b, "<button type=\"submit\">Log out</button></form></div>\n");
    }
    web_printf(b, "</header>\n<main id=\"main\" tabindex=\"-1\">\n<h1>%h</h1>\n", title);
}

void web_caveat(web_req *r)
{
    web_printf(&r->out, "<p class=\"small\">Results support, and do not replace, the judgement of a "
                        "qualified medical physicist. Tolerance and action levels are local policy; "
                        "follow your department's procedures and local regulations.</p>\n");
}

void web_page_end(web_req *r)
{
    web_printf(&r->out, "</main>\n<footer>");
    web_caveat(r);
    web_printf(&r->out, "<p class=\"small\">fxledger %s. Times are shown in the department's time zone.</p>"
                        "</footer>\n</body>\n</html>\n",
               FXL_VERSION);
}

/* Shape and words for each verdict; the style sheet only repeats them in
 * colour and border. */
void web_verdict_badge(web_buf *b, const char *name)
{
    fxl_verdict v;
    const char *shape = "?", *label = "unknown";
    const char *cls = "unknown";

    if (name && fxl_verdict_parse(&v, name) == 0) {
        label = fxl_verdict_label(v);
        cls = fxl_verdict_name(v);
        switch (v) {
        case FXL_VERDICT_WITHIN: shape = "\xE2\x9C\x93"; break;             /* check mark */
        case FXL_VERDICT_OUTSIDE_TOLERANCE: shape = "\xE2\x96\xB2"; break;  /* triangle */
        case FXL_VERDICT_OUTSIDE_ACTION: shape = "\xE2\x96\xA0"; break;     /* square */
        case FXL_VERDICT_NOT_EVALUABLE: shape = "?"; break;
        case FXL_VERDICT_IMPLAUSIBLE: shape = "!"; break;
        }
    }
    web_printf(b, "<span class=\"verdict v-%s\"><span class=\"shape\" aria-hidden=\"true\">%s</span> %h</span>",
               cls, shape, label);
}

void web_time(web_req *r, const char *stored)
{
    char shown[64];
    if (!stored || !*stored) {
        web_printf(&r->out, "\xE2\x80\x94");
        return;
    }
    fxl_time_show_local(r->ctx, shown, sizeof shown, stored);
    web_printf(&r->out, "<time datetime=\"%a\">%h</time>", stored, shown);
}
