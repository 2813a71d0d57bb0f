/* One report run: generation time, read snapshot, department settings, time
 * zone and document, opened together and closed in reverse order. */
#include "report/session.h"

#include <stdio.h>
#include <string.h>

#include "fxl/audit.h"
#include "store/report_query.h"

int rpt_session_open(rpt_session *s, fxl_ctx *ctx, const fxl_report_options *opt, int landscape)
{
    char dept[256] = "", when[32], zone[16];
    int rc;

    memset(s, 0, sizeof *s);
    s->ctx = ctx;
    if (opt && opt->generated_at) {
        if (fxl_time_normalize(s->generated_utc, opt->generated_at, 0) != 0)
            return fxl_fail(ctx, FXL_EINVAL,
                            "generation time '%s' must be YYYY-MM-DD or YYYY-MM-DDTHH:MM[:SS][Z] (UTC)",
                            opt->generated_at);
    } else {
        fxl_now(ctx, s->generated_utc);
    }
    if ((rc = fxl_rq_snapshot_begin(ctx)) != 0)
        return rc;
    s->snapshot = 1;
    if ((rc = fxl_setting_get(ctx, "department", dept, sizeof dept)) != 0 && rc != FXL_ENOTFOUND)
        return rc;
    if ((rc = fxl_setting_get(ctx, "timezone", s->tz_name, sizeof s->tz_name)) != 0) {
        if (rc != FXL_ENOTFOUND)
            return rc;
        snprintf(s->tz_name, sizeof s->tz_name, "UTC");
    }
    if (!s->tz_name[0])
        snprintf(s->tz_name, sizeof s->tz_name, "UTC");
    if ((rc = rpt_tz_enter(&s->tz, ctx, s->tz_name)) != 0)
        return rc;
    if ((rc = rpt_doc_init(&s->doc, ctx, opt ? opt->font_dir : NULL, landscape)) != 0)
        return rc;
    snprintf(s->doc.department, sizeof s->doc.department, "%s",
             dept[0] ? dept : "(department name not set)");
    s->doc.force = opt ? opt->force : 0;
    if ((rc = fxl_audit_anchor(ctx, s->doc.anchor, sizeof s->doc.anchor)) != 0)
        return rc;
    rpt_local(when, sizeof when, s->generated_utc, "%Y-%m-%d %H:%M");
    rpt_local(zone, sizeof zone, s->generated_utc, "%Z");
    if (strcmp(zone, s->tz_name) == 0 || strcmp(s->tz_name, "UTC") == 0)
        snprintf(s->doc.generated, sizeof s->doc.generated, "%s %s", when, zone);
    else
        snprintf(s->doc.generated, sizeof s->doc.generated, "%s %s (%s)", when, zone, s->tz_name);
    return 0;
}

int rpt_session_close(rpt_session *s, const char *path, int rc)
{
    if (rc == 0 && path)
        rc = rpt_doc_save(&s->doc, s->ctx, path);
    rpt_doc_release(&s->doc);
    rpt_tz_leave(&s->tz);
    if (s->snapshot)
        fxl_rq_snapshot_end(s->ctx);
    s->snapshot = 0;
    return rc;
}

void rpt_session_date(char *out, size_t n, const char *stored)
{
    rpt_local(out, n, stored, "%Y-%m-%d");
}

void rpt_session_datetime(char *out, size_t n, const char *stored)
{
    rpt_local(out, n, stored, "%Y-%m-%d %H:%M");
}

void rpt_session_calendar_date(char *out, size_t n, const char *stored)
{
    snprintf(out, n, "%.10s", stored ? stored : "");
}

static const char *const verdict_names[RPT_NVERDICT] = {"within_tolerance", "outside_tolerance",
                                                        "outside_action", "not_evaluable",
                                                        "implausible"};

int rpt_verdict_index(const char *verdict)
{
    int i;

    for (i = 0; i < RPT_NVERDICT; i++)
        if (strcmp(verdict, verdict_names[i]) == 0)
            return i;
    return -1;
}
