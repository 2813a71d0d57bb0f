/* The department's time zone (setting 'timezone', default UTC) for what the
 * console shows and what people type: local dates, times with their offset,
 * local times and ISO 8601 offsets parsed into the stored UTC form. Private
 * to src/store; the public part is in fxl/fraction.h. */
#ifndef FXL_STORE_ZONE_H
#define FXL_STORE_ZONE_H

#include <stddef.h>
#include <time.h>

#include "fxl/fxl.h"

/* While a conversion runs TZ is the department's zone; zone_leave puts the
 * previous TZ back. */
typedef struct fxl_zone {
    char name[128];
    char saved[256];
    int had_saved;
    int active;
} fxl_zone;

/* Reads setting 'timezone' and makes it the process's zone; an unknown zone
 * is FXL_EINVAL naming it. */
int fxl_zone_enter(fxl_ctx *ctx, fxl_zone *z);
/* The same for a zone named by the caller ("" or NULL is UTC). */
int fxl_zone_enter_named(fxl_ctx *ctx, fxl_zone *z, const char *name);
void fxl_zone_leave(fxl_zone *z);

/* Stored UTC text to seconds since 1970 and back. */
int fxl_zone_epoch(time_t *out, const char *stored);
void fxl_zone_stored(char out[FXL_TIME_LEN], time_t t);

/* Within an entered zone: the local date 'YYYY-MM-DD' of a stored time. */
void fxl_zone_local_date(char out[11], const char *stored);

/* Within an entered zone: '2026-11-02 10:00 +01:00'. */
void fxl_zone_show(char *buf, size_t size, const char *stored);

/* Within an entered zone: UTC bounds [from, to) of a local date. */
int fxl_zone_day_bounds(char from[FXL_TIME_LEN], char to[FXL_TIME_LEN], const char *date);

/* Within an entered zone: a typed time (see fxl_time_parse_local) to stored
 * UTC; `date` (may be NULL) is the local day a bare 'HH:MM' belongs to.
 * Returns 0, or FXL_EINVAL with the reason in why. */
int fxl_zone_parse(char out[FXL_TIME_LEN], const char *text, const char *date, char *why,
                   size_t why_size);

#endif
