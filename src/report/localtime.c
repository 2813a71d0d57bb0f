/* Department time zone for reports: validating the IANA name, switching TZ
 * for the duration of a report, month boundaries and local display. */
#include "report/localtime.h"

#include <stdio.h>
#include <string.h>

/* The zone switch and the stored-time conversions are the store's
 * (store/zone.c), shared with the console. */
int rpt_tz_enter(rpt_tz *tz, fxl_ctx *ctx, const char *name)
{
    return fxl_zone_enter_named(ctx, tz, name);
}

void rpt_tz_leave(rpt_tz *tz)
{
    fxl_zone_leave(tz);
}

int rpt_epoch_from_stored(time_t *out, const char *stored)
{
    return fxl_zone_epoch(out, stored);
}

void rpt_stored_from_epoch(char out[FXL_TIME_LEN], time_t t)
{
    fxl_zone_stored(out, t);
}

void rpt_local(char *out, size_t n, const char *stored, const char *fmt)
{
    struct tm tm;
    time_t t;

    out[0] = '\0';
    if (rpt_epoch_from_stored(&t, stored) != 0 || !localtime_r(&t, &tm))
        return;
    if (strftime(out, n, fmt, &tm) == 0)
        out[0] = '\0';
}

static int local_midnight_day(time_t *out, int year, int month, int day)
{
    struct tm tm;

    memset(&tm, 0, sizeof tm);
    tm.tm_year = year - 1900;
    tm.tm_mon = month - 1;
    tm.tm_mday = day;   /* mktime carries day 32 into the next month */
    tm.tm_isdst = -1;  /* let the zone decide summer or winter time */
    *out = mktime(&tm);
    return *out == (time_t)-1 ? FXL_EINVAL : 0;
}

static int local_midnight(time_t *out, int year, int month)
{
    return local_midnight_day(out, year, month, 1);
}

int rpt_day_start(fxl_ctx *ctx, char out[FXL_TIME_LEN], int year, int month, int day)
{
    time_t t;

    if (local_midnight_day(&t, year, month, day) != 0)
        return fxl_fail(ctx, FXL_EINVAL, "cannot place day '%04d-%02d-%02d' in the local time zone",
                        year, month, day);
    rpt_stored_from_epoch(out, t);
    return 0;
}

int rpt_month_bounds(fxl_ctx *ctx, char from[FXL_TIME_LEN], char to[FXL_TIME_LEN], int year,
                     int month)
{
    time_t a, b;

    if (month < 1 || month > 12 || year < 1900 || year > 2999)
        return fxl_fail(ctx, FXL_EINVAL, "month '%04d-%02d' must be YYYY-MM with month 01 to 12",
                        year, month);
    if (local_midnight(&a, year, month) != 0 ||
        local_midnight(&b, month == 12 ? year + 1 : year, month == 12 ? 1 : month + 1) != 0)
        return fxl_fail(ctx, FXL_EINVAL, "cannot place month '%04d-%02d' in the local time zone",
                        year, month);
    rpt_stored_from_epoch(from, a);
    rpt_stored_from_epoch(to, b);
    return 0;
}

const char *rpt_month_name(int month)
{
    static const char *const names[] = {"January", "February", "March", "April", "May", "June",
                                        "July", "August", "September", "October", "November",
                                        "December"};
    return month >= 1 && month <= 12 ? names[month - 1] : "?";
}
