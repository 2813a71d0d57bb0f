/* Calendar arithmetic on civil dates (proleptic Gregorian). Private to
 * src/core and the layers above it; pure, no I/O. */
#ifndef FXL_CORE_CIVIL_H
#define FXL_CORE_CIVIL_H

/* Days from 1970-01-01 of year y, month m (1..12), day d, after H. Hinnant's
 * days_from_civil algorithm; negative before 1970. */
long fxl_days_from_civil(int y, int m, int d);

/* The fields of a normalised timestamp 'YYYY-MM-DDTHH:MM:SSZ' (as
 * fxl_time_normalize writes it); h, mi, s may be NULL. FXL_EINVAL for any
 * other text. */
int fxl_time_fields(const char *norm, int *y, int *m, int *d, int *h, int *mi, int *s);

#endif
