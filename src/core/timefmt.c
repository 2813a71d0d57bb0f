/* Dates and times as fxledger stores them: UTC ISO 8601 text that sorts and
 * compares as a string. Pure functions, no I/O. */
#include <stdio.h>
#include <string.h>
#include <time.h>

#include "core/civil.h"
#include "fxl/fxl.h"

static int days_in_month(int y, int m)
{
    static const int days[] = {31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
    int leap = (y % 4 == 0 && y % 100 != 0) || y % 400 == 0;
    return m == 2 && leap ? 29 : days[m - 1];
}

/* Two decimal digits of v (0..99) at out. */
static void put2(char *out, int v)
{
    out[0] = (char)('0' + v / 10);
    out[1] = (char)('0' + v % 10);
}

/* 'YYYY-MM-DDTHH:MM:SSZ' (the fields already range-checked), written digit
 * by digit: this runs for every timestamp a fraction touches. */
static void format_time(char out[FXL_TIME_LEN], int y, int mo, int d, int h, int mi, int s)
{
    put2(out, y / 100);
    put2(out + 2, y % 100);
    out[4] = '-';
    put2(out + 5, mo);
    out[7] = '-';
    put2(out + 8, d);
    out[10] = 'T';
    put2(out + 11, h);
    out[13] = ':';
    put2(out + 14, mi);
    out[16] = ':';
    put2(out + 17, s);
    out[19] = 'Z';
    out[20] = '\0';
}

/* The number written by n decimal digits at p (their shape checked before). */
static int digits(const char *p, int n)
{
    int v = 0;

    while (n-- > 0)
        v = v * 10 + (*p++ - '0');
    return v;
}

/* The shape of each accepted form: 'd' a digit, anything else itself. */
static int matches_shape(const char *in, const char *shape)
{
    for (; *shape; in++, shape++) {
        if (*shape == 'd' ? (*in < '0' || *in > '9') : *in != *shape)
            return 0;
    }
    return *in == '\0';
}

int fxl_time_normalize(char out[FXL_TIME_LEN], const char *in, int end_of_day)
{
    int y, mo, d, h = 0, mi = 0, s = 0;

    if (!in)
        return FXL_EINVAL;
    /* Exactly one of the accepted forms, digit by digit (no space, sign or
     * missing digit inside a field); then every field is where the form
     * puts it. */
    if (matches_shape(in, "dddd-dd-dd")) {
        if (end_of_day) {
            h = 23;
            mi = 59;
            s = 59;
        }
    } else if (matches_shape(in, "dddd-dd-ddTdd:dd") || matches_shape(in, "dddd-dd-ddTdd:ddZ")) {
        h = digits(in + 11, 2);
        mi = digits(in + 14, 2);
    } else if (matches_shape(in, "dddd-dd-ddTdd:dd:dd") || matches_shape(in, "dddd-dd-ddTdd:dd:ddZ")) {
        h = digits(in + 11, 2);
        mi = digits(in + 14, 2);
        s = digits(in + 17, 2);
    } else {
        return FXL_EINVAL;
    }
    y = digits(in, 4);
    mo = digits(in + 5, 2);
    d = digits(in + 8, 2);
    if (y < 1900 || y > 2999 || mo < 1 || mo > 12 || d < 1 || d > days_in_month(y, mo) ||
        h < 0 || h > 23 || mi < 0 || mi > 59 || s < 0 || s > 59)
        return FXL_EINVAL;
    format_time(out, y, mo, d, h, mi, s);
    return 0;
}

int fxl_time_fields(const char *norm, int *y, int *m, int *d, int *h, int *mi, int *s)
{
    if (!norm || !matches_shape(norm, "dddd-dd-ddTdd:dd:ddZ"))
        return FXL_EINVAL;
    *y = digits(norm, 4);
    *m = digits(norm + 5, 2);
    *d = digits(norm + 8, 2);
    if (h)
        *h = digits(norm + 11, 2);
    if (mi)
        *mi = digits(norm + 14, 2);
    if (s)
        *s = digits(norm + 17, 2);
    return 0;
}

/* See civil.h. */
long fxl_days_from_civil(int y, int m, int d)
{
    long era, yoe, doy, doe;

    y -= m <= 2;
    era = (y >= 0 ? y : y - 399) / 400;
    yoe = y - era * 400;
    doy = (153 * (m + (m > 2 ? -3 : 9)) + 2) / 5 + d - 1;
    doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    return era * 146097 + doe - 719468;
}

static void civil_from_days(long z, int *y, int *m, int *d)
{
    long era, doe, yoe, doy, mp;

    z += 719468;
    era = (z >= 0 ? z : z - 146096) / 146097;
    doe = z - era * 146097;
    yoe = (doe - doe / 1460 + doe / 36524 - doe / 146096) / 365;
    doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    mp = (5 * doy + 2) / 153;
    *d = (int)(doy - (153 * mp + 2) / 5 + 1);
    *m = (int)(mp < 10 ? mp + 3 : mp - 9);
    *y = (int)(yoe + era * 400 + (*m <= 2));
}

int fxl_time_add_days(char out[FXL_TIME_LEN], const char *in, int days)
{
    char norm[FXL_TIME_LEN];
    int y, m, d, h, mi, s;

    if (fxl_time_normalize(norm, in, 0) != 0 || fxl_time_fields(norm, &y, &m, &d, &h, &mi, &s) != 0)
        return FXL_EINVAL;
    civil_from_days(fxl_days_from_civil(y, m, d) + days, &y, &m, &d);
    /* the years fxl_time_normalize accepts: a date it can read back */
    if (y < 1900 || y > 2999)
        return FXL_EINVAL;
    format_time(out, y, m, d, h, mi, s);
    return 0;
}
