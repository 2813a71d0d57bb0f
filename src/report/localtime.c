/* Department time zone for reports: validating the IANA name, switching TZ
 * for the duration of a report, month boundaries and local display. */
#include "report/localtime.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "core/civil.h"

static int valid_zone_name(const char *name)
{
    const char *p;

    if (!name || !*name || strlen(name) > 100 || name[0] == '/' || strstr(name, ".."))
        return 0;
    for (p = name; *p; p++)
        if (!((*p >= 'A' && *p <= 'Z') || (*p >= 'a' && *p <= 'z') || (*p >= '0' && *p <= '9') ||
              *p == '/' || *p == '_' || *p == '-' || *p == '+'))
            return 0;
    return 1;
}

int rpt_tz_enter(rpt_tz *tz, fxl_ctx *ctx, const char *name)
{
    const char *dir = getenv("TZDIR"), *old = getenv("TZ");
    char path[512];

    memset(tz, 0, sizeof *tz);
    if (!name || !*name)
        name = "UTC";
    if (strcmp(name, "UTC") != 0) {
        /* glibc quietly falls back to UTC for a zone it cannot find; a report
         * for the wrong month boundaries must not pass silently. */
        snprintf(path, sizeof path, "%s/%s", dir && *dir ? dir : "/usr/share/zoneinfo", name);
        if (!valid_zone_name(name) || access(path, R_OK) != 0)
            return fxl_fail(ctx, FXL_EINVAL,
                            "setting 'timezone' is '%s', which is not a known time zone "
                            "(an IANA name such as 'Europe/Paris', or 'UTC')", name);
    }
    snprintf(tz->name, sizeof tz->name, "%s", name);
    if (old) {
        tz->had_saved = 1;
        snprintf(tz->saved, sizeof tz->saved, "%s", old);
    }
    /* "UTC0" is the POSIX form and needs no zone file. */
    setenv("TZ", strcmp(name, "UTC") == 0 ? "UTC0" : name, 1);
    tzset();
    tz->active = 1;
    return 0;
}

void rpt_tz_leave(rpt_tz *tz)
{
    if (!tz->active)
        return;
    if (tz->had_saved)
        setenv("TZ", tz->saved, 1);
    else
        unsetenv("TZ");
    tzset();
    tz->active = 0;
}

int rpt_epoch_from_stored(time_t *out, const char *stored)
{
    int y, mo, d, h, mi, s;

    if (!stored || sscanf(stored, "%4d-%2d-%2dT%2d:%2d:%2d", &y, &mo, &d, &h, &mi, &s) != 6)
        return FXL_EINVAL;
    *out = (time_t)fxl_days_from_civil(y, mo, d) * 86400 + h * 3600 + mi * 60 + s;
    return 0;
}

void rpt_stored_from_epoch(char out[FXL_TIME_LEN], time_t t)
{
    struct tm tm;

    gmtime_r(&t, &tm);
    strftime(out, FXL_TIME_LEN, "%Y-%m-%dT%H:%M:%SZ", &tm);
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
