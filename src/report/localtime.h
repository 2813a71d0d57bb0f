/* The department's time zone for reports: month boundaries and the local
 * dates and times printed. Uses the C library's zone handling (TZ, tzset,
 * mktime, localtime_r) with the IANA database under /usr/share/zoneinfo.
 * Private to src/report. */
#ifndef FXL_REPORT_LOCALTIME_H
#define FXL_REPORT_LOCALTIME_H

#include <stddef.h>
#include <time.h>

#include "fxl/fxl.h"
#include "store/zone.h"

/* While a report is drawn, TZ is set to the department's zone; the previous
 * value of TZ is put back by rpt_tz_leave. */
typedef fxl_zone rpt_tz;

/* Checks that `name` is "UTC" or a zone present in the zone database
 * (FXL_EINVAL naming it otherwise) and makes it the process's local zone. */
int rpt_tz_enter(rpt_tz *tz, fxl_ctx *ctx, const char *name);
void rpt_tz_leave(rpt_tz *tz);

/* Stored UTC text 'YYYY-MM-DDTHH:MM:SSZ' to seconds since 1970 and back. */
int rpt_epoch_from_stored(time_t *out, const char *stored);
void rpt_stored_from_epoch(char out[FXL_TIME_LEN], time_t t);

/* strftime of a stored UTC time in the current local zone; "" when the
 * input is empty or malformed. */
void rpt_local(char *out, size_t n, const char *stored, const char *fmt);

/* UTC bounds [from, to) of calendar month `month` (1..12) of `year` in the
 * current local zone. */
int rpt_month_bounds(fxl_ctx *ctx, char from[FXL_TIME_LEN], char to[FXL_TIME_LEN], int year,
                     int month);

/* UTC time of the local midnight that starts day `day` of the month (day
 * past the month's end carries into the next one). */
int rpt_day_start(fxl_ctx *ctx, char out[FXL_TIME_LEN], int year, int month, int day);

/* English name of a month, 1..12. */
const char *rpt_month_name(int month);

#endif
