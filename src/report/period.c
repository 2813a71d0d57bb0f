/* Periods of the periodic review: a month or a run of local days in the
 * department's time zone, turned into UTC bounds of treatment times. */
#include <stdio.h>
#include <string.h>

#include "fxl/report.h"
#include "report/localtime.h"

static int parse_day(fxl_ctx *ctx, const char *s, const char *what, int *y, int *m, int *d)
{
    char norm[FXL_TIME_LEN];
    int n = 0;

    if (!s || strlen(s) != 10 || fxl_time_normalize(norm, s, 0) != 0 ||
        sscanf(s, "%4d-%2d-%2d%n", y, m, d, &n) != 3 || n != 10)
        return fxl_fail(ctx, FXL_EINVAL, "%s '%s' must be a calendar day YYYY-MM-DD", what,
                        s ? s : "");
    return 0;
}

int fxl_report_period_resolve(fxl_ctx *ctx, fxl_report_period *out, const char *month,
                              const char *first_day, const char *last_day)
{
    rpt_tz tz;
    int rc, y = 0, m = 0, d = 0, y2 = 0, m2 = 0, d2 = 0, n = 0;

    memset(out, 0, sizeof *out);
    memset(&tz, 0, sizeof tz);
    if (month && (first_day || last_day))
        return fxl_fail(ctx, FXL_EINVAL, "give either a month or a first and last day, not both");
    if (!month && (!first_day || !last_day))
        return fxl_fail(ctx, FXL_EINVAL, "period needs a month YYYY-MM or a first and a last day");
    if (month) {
        if (strlen(month) != 7 || sscanf(month, "%4d-%2d%n", &y, &m, &n) != 2 || n != 7 ||
            month[4] != '-' || m < 1 || m > 12 || y < 1900 || y > 2999)
            return fxl_fail(ctx, FXL_EINVAL, "month '%s' must be YYYY-MM with month 01 to 12",
                            month);
        d = 1;
        y2 = m == 12 ? y + 1 : y;
        m2 = m == 12 ? 1 : m + 1;
        d2 = 1;
        snprintf(out->label, sizeof out->label, "%s", month);
    } else {
        if ((rc = parse_day(ctx, first_day, "first day", &y, &m, &d)) != 0 ||
            (rc = parse_day(ctx, last_day, "last day", &y2, &m2, &d2)) != 0)
            return rc;
        if (strcmp(first_day, last_day) > 0)
            return fxl_fail(ctx, FXL_EINVAL, "last day '%s' must not be before first day '%s'",
                            last_day, first_day);
        d2++;   /* the bound is the midnight after the last day */
        snprintf(out->label, sizeof out->label, "%s to %s", first_day, last_day);
    }
    if ((rc = fxl_setting_get(ctx, "timezone", out->timezone, sizeof out->timezone)) != 0) {
        if (rc != FXL_ENOTFOUND)
            return rc;
        out->timezone[0] = '\0';
    }
    if (!out->timezone[0])
        snprintf(out->timezone, sizeof out->timezone, "UTC");
    if ((rc = rpt_tz_enter(&tz, ctx, out->timezone)) != 0)
        goto cleanup;
    if ((rc = rpt_day_start(ctx, out->from, y, m, d)) != 0 ||
        (rc = rpt_day_start(ctx, out->to, y2, m2, d2)) != 0)
        goto cleanup;
    rpt_local(out->first_day, sizeof out->first_day, out->from, "%Y-%m-%d");
    {
        /* the last local day is the day of one second before `to` */
        time_t t;
        char prev[FXL_TIME_LEN];

        if (rpt_epoch_from_stored(&t, out->to) == 0) {
            rpt_stored_from_epoch(prev, t - 1);
            rpt_local(out->last_day, sizeof out->last_day, prev, "%Y-%m-%d");
        }
    }
cleanup:
    rpt_tz_leave(&tz);
    return rc;
}
