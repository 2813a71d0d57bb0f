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

static void format_time(char out[FXL_TIME_LEN], int y, int mo, int d, int h, int mi, int s)
{
    char buf[64];

    snprintf(buf, sizeof buf, "%04d-%02d-%02dT%02d:%02d:%02dZ", y, mo, d, h, mi, s);
    memcpy(out, buf, FXL_TIME_LEN - 1);
    out[FXL_TIME_LEN - 1] = '\0';
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
    int y, mo, d, h = 0, mi = 0, s = 0, n = 0;
    size_t len;

    if (!in)
        return FXL_EINVAL;
    /* sscanf alone would take spaces and signs inside a field. */
    if (!matches_shape(in, "dddd-dd-dd") && !matches_shape(in, "dddd-dd-ddTdd:dd") &&
        !matches_shape(in, "dddd-dd-ddTdd:ddZ") && !matches_shape(in, "dddd-dd-ddTdd:dd:dd") &&
        !matches_shape(in, "dddd-dd-ddTdd:dd:ddZ"))
        return FXL_EINVAL;
    len = strlen(in);
    if (len == 10) {
        if (sscanf(in, "%4d-%2d-%2d%n", &y, &mo, &d, &n) != 3 || n != 10)
            return FXL_EINVAL;
        if (end_of_day) {
            h = 23;
            mi = 59;
            s = 59;
        }
    } else if (len >= 16 && len <= 20) {
        char rest[8] = "";
        if (sscanf(in, "%4d-%2d-%2dT%2d:%2d%n", &y, &mo, &d, &h, &mi, &n) != 5 || n != 16)
            return FXL_EINVAL;
        snprintf(rest, sizeof rest, "%s", in + 16);
        if (strcmp(rest, "") == 0 || strcmp(rest, "Z") == 0) {
            s = 0;
        } else {
            int n2 = 0;
            if (sscanf(rest, ":%2d%n", &s, &n2) != 1 || n2 != 3 ||
                !(rest[3] == '\0' || (rest[3] == 'Z' && rest[4] == '\0')))
                return FXL_EINVAL;
        }
    } else {
        return FXL_EINVAL;
    }
    if (in[4] != '-' || in[7] != '-')
        return FXL_EINVAL;
    if (y < 1900 || y > 2999 || mo < 1 || mo > 12 || d < 1 || d > days_in_month(y, mo) ||
        h < 0 || h > 23 || mi < 0 || mi > 59 || s < 0 || s > 59)
        return FXL_EINVAL;
    format_time(out, y, mo, d, h, mi, s);
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

    if (fxl_time_normalize(norm, in, 0) != 0)
        return FXL_EINVAL;
    sscanf(norm, "%4d-%2d-%2dT%2d:%2d:%2d", &y, &m, &d, &h, &mi, &s);
    civil_from_days(fxl_days_from_civil(y, m, d) + days, &y, &m, &d);
    format_time(out, y, m, d, h, mi, s);
    return 0;
}
