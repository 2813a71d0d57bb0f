/* The department's time zone for the console: switching TZ to setting
 * 'timezone' around a conversion, local dates and day bounds, times shown
 * with their UTC offset, and typed times (ISO 8601 with an offset, or local
 * wall-clock time) turned into the stored UTC form. */
#include <ctype.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "core/civil.h"
#include "fxl/fraction.h"
#include "store/zone.h"

static int valid_zone_name(const char *name)
{
    const char *p;

    if (!name || !*name || strlen(name) > 100 || name[0] == '/' || strstr(name, ".."))
        return 0;
    for (p = name; *p; p++)
        if (!isalnum((unsigned char)*p) && *p != '/' && *p != '_' && *p != '-' && *p != '+')
            return 0;
    return 1;
}

int fxl_zone_enter(fxl_ctx *ctx, fxl_zone *z)
{
    char name[128] = "";
    int rc;

    memset(z, 0, sizeof *z);
    rc = fxl_setting_get(ctx, "timezone", name, sizeof name);
    if (rc != 0 && rc != FXL_ENOTFOUND)
        return rc;
    return fxl_zone_enter_named(ctx, z, name);
}

/* TZ is process-wide: in the web console several worker threads may need
 * the zone at once, so one (recursive: a zoned function may call another)
 * lock is held from entering the zone to leaving it. */
static pthread_mutex_t g_zone_lock;
static pthread_once_t g_zone_once = PTHREAD_ONCE_INIT;

static void zone_lock_init(void)
{
    pthread_mutexattr_t a;
    pthread_mutexattr_init(&a);
    pthread_mutexattr_settype(&a, PTHREAD_MUTEX_RECURSIVE);
    pthread_mutex_init(&g_zone_lock, &a);
    pthread_mutexattr_destroy(&a);
}

static int zone_enter_locked(fxl_ctx *ctx, fxl_zone *z, const char *name);

int fxl_zone_enter_named(fxl_ctx *ctx, fxl_zone *z, const char *name)
{
    int rc;
    pthread_once(&g_zone_once, zone_lock_init);
    pthread_mutex_lock(&g_zone_lock);
    if ((rc = zone_enter_locked(ctx, z, name)) != 0 || !z->active)
        pthread_mutex_unlock(&g_zone_lock);
    return rc;
}

static int zone_enter_locked(fxl_ctx *ctx, fxl_zone *z, const char *name)
{
    const char *dir = getenv("TZDIR"), *old = getenv("TZ");
    char path[512];

    memset(z, 0, sizeof *z);
    if (!name || !*name)
        name = "UTC";
    if (strcmp(name, "UTC") != 0) {
        /* glibc falls back to UTC for a zone it cannot find: a wrong "today"
         * or wrong month boundaries must not pass silently. */
        snprintf(path, sizeof path, "%s/%s", dir && *dir ? dir : "/usr/share/zoneinfo", name);
        if (!valid_zone_name(name) || access(path, R_OK) != 0)
            return fxl_fail(ctx, FXL_EINVAL,
                            "setting 'timezone' is '%s', which is not a known time zone "
                            "(an IANA name such as 'Europe/Paris', or 'UTC')", name);
    }
    snprintf(z->name, sizeof z->name, "%s", name);
    if (old) {
        z->had_saved = 1;
        snprintf(z->saved, sizeof z->saved, "%s", old);
    }
    /* "UTC0" is the POSIX form and needs no zone file. */
    setenv("TZ", strcmp(name, "UTC") == 0 ? "UTC0" : name, 1);
    tzset();
    z->active = 1;
    return 0;
}

void fxl_zone_leave(fxl_zone *z)
{
    if (!z->active)
        return;
    if (z->had_saved)
        setenv("TZ", z->saved, 1);
    else
        unsetenv("TZ");
    tzset();
    z->active = 0;
    pthread_mutex_unlock(&g_zone_lock);
}

int fxl_zone_epoch(time_t *out, const char *stored)
{
    int y, mo, d, h, mi, s;

    if (!stored || sscanf(stored, "%4d-%2d-%2dT%2d:%2d:%2d", &y, &mo, &d, &h, &mi, &s) != 6)
        return FXL_EINVAL;
    *out = (time_t)fxl_days_from_civil(y, mo, d) * 86400 + h * 3600 + mi * 60 + s;
    return 0;
}

void fxl_zone_stored(char out[FXL_TIME_LEN], time_t t)
{
    struct tm tm;

    gmtime_r(&t, &tm);
    strftime(out, FXL_TIME_LEN, "%Y-%m-%dT%H:%M:%SZ", &tm);
}

void fxl_zone_local_date(char out[11], const char *stored)
{
    struct tm tm;
    time_t t;

    if (fxl_zone_epoch(&t, stored) != 0 || !localtime_r(&t, &tm)) {
        snprintf(out, 11, "%.10s", stored ? stored : "");
        return;
    }
    strftime(out, 11, "%Y-%m-%d", &tm);
}

void fxl_zone_show(char *buf, size_t size, const char *stored)
{
    char z[8] = "";
    struct tm tm;
    time_t t;

    if (fxl_zone_epoch(&t, stored) != 0 || !localtime_r(&t, &tm)) {
        snprintf(buf, size, "%s", stored ? stored : "");
        return;
    }
    strftime(z, sizeof z, "%z", &tm);  /* "+0100": shown as "+01:00" (ISO 8601) */
    snprintf(buf, size, "%04d-%02d-%02d %02d:%02d %.3s:%.2s", tm.tm_year + 1900, tm.tm_mon + 1,
             tm.tm_mday, tm.tm_hour, tm.tm_min, z, strlen(z) >= 5 ? z + 3 : "00");
}

/* Local wall-clock time to an instant: the earlier of the instants that show
 * exactly this wall-clock time (autumn overlap), none in a spring gap. */
static int local_to_epoch(time_t *out, int y, int mo, int d, int h, int mi, int s)
{
    int isdst[2] = {0, 1}, k, found = 0;
    time_t best = 0;

    for (k = 0; k < 2; k++) {
        struct tm tm, back;
        time_t t;

        memset(&tm, 0, sizeof tm);
        tm.tm_year = y - 1900;
        tm.tm_mon = mo - 1;
        tm.tm_mday = d;
        tm.tm_hour = h;
        tm.tm_min = mi;
        tm.tm_sec = s;
        tm.tm_isdst = isdst[k];
        t = mktime(&tm);
        if (t == (time_t)-1 || !localtime_r(&t, &back))
            continue;
        if (back.tm_year != y - 1900 || back.tm_mon != mo - 1 || back.tm_mday != d ||
            back.tm_hour != h || back.tm_min != mi || back.tm_sec != s)
            continue;
        if (!found || t < best)
            best = t;
        found = 1;
    }
    if (!found)
        return FXL_EINVAL;
    *out = best;
    return 0;
}

int fxl_zone_day_bounds(char from[FXL_TIME_LEN], char to[FXL_TIME_LEN], const char *date)
{
    int y, mo, d, k;
    time_t a, b;
    long days;

    if (!date || sscanf(date, "%4d-%2d-%2d", &y, &mo, &d) != 3)
        return FXL_EINVAL;
    /* Midnight can fall in a gap in a few zones: take the first hour that exists. */
    for (k = 0; k < 3 && local_to_epoch(&a, y, mo, d, k, 0, 0) != 0; k++)
        ;
    if (k == 3)
        return FXL_EINVAL;
    days = fxl_days_from_civil(y, mo, d) + 1;
    {
        time_t next = (time_t)days * 86400;
        struct tm tm;
        gmtime_r(&next, &tm);
        for (k = 0; k < 3 && local_to_epoch(&b, tm.tm_year + 1900, tm.tm_mon + 1, tm.tm_mday, k,
                                            0, 0) != 0; k++)
            ;
        if (k == 3)
            return FXL_EINVAL;
    }
    fxl_zone_stored(from, a);
    fxl_zone_stored(to, b);
    return 0;
}

static int digits(const char *p, int n)
{
    int i;
    for (i = 0; i < n; i++)
        if (!isdigit((unsigned char)p[i]))
            return 0;
    return 1;
}

static int valid_civil(int y, int mo, int d, int h, int mi, int s)
{
    static const int mdays[] = {31, 29, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
    int leap = (y % 4 == 0 && y % 100 != 0) || y % 400 == 0;

    if (y < 1900 || y > 2999 || mo < 1 || mo > 12 || d < 1 || h > 23 || mi > 59 || s > 59)
        return 0;
    if (d > mdays[mo - 1] || (mo == 2 && d == 29 && !leap))
        return 0;
    return 1;
}

int fxl_zone_parse(char out[FXL_TIME_LEN], const char *text, const char *date, char *why,
                   size_t why_size)
{
    int y = 0, mo = 0, d = 0, h = 0, mi = 0, s = 0, has_offset = 0, off_min = 0;
    const char *p = text;
    time_t t;

    why[0] = '\0';
    if (!text || !*text) {
        snprintf(why, why_size, "empty");
        return FXL_EINVAL;
    }
    if (strlen(p) == 5 && digits(p, 2) && p[2] == ':' && digits(p + 3, 2)) {
        if (!date || sscanf(date, "%4d-%2d-%2d", &y, &mo, &d) != 3) {
            snprintf(why, why_size, "a time of day needs a date");
            return FXL_EINVAL;
        }
        h = atoi(p);
        mi = atoi(p + 3);
        p += 5;
    } else {
        if (!(digits(p, 4) && p[4] == '-' && digits(p + 5, 2) && p[7] == '-' && digits(p + 8, 2))) {
            snprintf(why, why_size, "expected YYYY-MM-DD");
            return FXL_EINVAL;
        }
        y = atoi(p);
        mo = atoi(p + 5);
        d = atoi(p + 8);
        p += 10;
        if (*p == 'T' || *p == ' ') {
            p++;
            if (!(digits(p, 2) && p[2] == ':' && digits(p + 3, 2))) {
                snprintf(why, why_size, "expected HH:MM after the date");
                return FXL_EINVAL;
            }
            h = atoi(p);
            mi = atoi(p + 3);
            p += 5;
            if (*p == ':') {
                if (!digits(p + 1, 2)) {
                    snprintf(why, why_size, "expected seconds SS");
                    return FXL_EINVAL;
                }
                s = atoi(p + 1);
                p += 3;
            }
        }
    }
    if (*p == 'Z' && p[1] == '\0') {
        has_offset = 1;
        p++;
    } else if ((*p == '+' || *p == '-') && digits(p + 1, 2)) {
        int sign = *p == '-' ? -1 : 1, oh = atoi(p + 1), om = 0;
        const char *q = p + 3;
        if (*q == ':')
            q++;
        if (digits(q, 2)) {
            om = atoi(q);
            q += 2;
        } else if (q != p + 3) {
            snprintf(why, why_size, "expected the offset as +HH:MM");
            return FXL_EINVAL;
        }
        if (oh > 14 || om > 59) {
            snprintf(why, why_size, "offset out of range (-14:00 to +14:00)");
            return FXL_EINVAL;
        }
        has_offset = 1;
        off_min = sign * (oh * 60 + om);
        p = q;
    }
    if (*p != '\0') {
        snprintf(why, why_size, "unexpected '%s'", p);
        return FXL_EINVAL;
    }
    if (!valid_civil(y, mo, d, h, mi, s)) {
        snprintf(why, why_size, "no such date or time");
        return FXL_EINVAL;
    }
    if (has_offset) {
        t = (time_t)fxl_days_from_civil(y, mo, d) * 86400 + h * 3600 + mi * 60 + s -
            (time_t)off_min * 60;
    } else if (local_to_epoch(&t, y, mo, d, h, mi, s) != 0) {
        snprintf(why, why_size, "this local time does not exist in the department's zone "
                                "(clocks go forward); give the offset");
        return FXL_EINVAL;
    }
    fxl_zone_stored(out, t);
    return 0;
}

int fxl_time_parse_local(fxl_ctx *ctx, char out[FXL_TIME_LEN], const char *text)
{
    fxl_zone z;
    char why[160], now[FXL_TIME_LEN], today[11];
    int rc;

    if ((rc = fxl_zone_enter(ctx, &z)) != 0)
        return rc;
    fxl_now(ctx, now);
    fxl_zone_local_date(today, now);
    rc = fxl_zone_parse(out, text, today, why, sizeof why);
    fxl_zone_leave(&z);
    if (rc != 0)
        return fxl_fail(ctx, FXL_EINVAL,
                        "time '%s' is not valid (%s): use YYYY-MM-DD[THH:MM[:SS]] in the department's "
                        "time zone (%s), HH:MM today, or ISO 8601 with an offset such as "
                        "2026-11-02T10:00+01:00", text ? text : "", why, z.name);
    return 0;
}

void fxl_time_show_local(fxl_ctx *ctx, char *buf, size_t size, const char *stored)
{
    fxl_zone z;

    if (fxl_zone_enter(ctx, &z) != 0) {
        snprintf(buf, size, "%.10s %.5s UTC", stored, strlen(stored) >= 16 ? stored + 11 : "");
        return;
    }
    fxl_zone_show(buf, size, stored);
    fxl_zone_leave(&z);
}
