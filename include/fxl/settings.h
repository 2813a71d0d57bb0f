/* Department settings with validation: the known keys, their ranges and their
 * defaults (docs/equipment.md, "Settings"). The raw accessors
 * fxl_setting_get / fxl_setting_set live in fxl/fxl.h. */
#ifndef FXL_SETTINGS_H
#define FXL_SETTINGS_H

#include <stddef.h>

#include "fxl/fxl.h"

/* A known setting key and what it accepts. */
typedef struct fxl_setting_def {
    const char *key;
    const char *about;          /* one line for people */
    const char *accepts;        /* e.g. "10 to 45 degC", for messages */
    const char *fallback;       /* value used when unset, NULL if none */
} fxl_setting_def;

/* The table of known keys, ended by an entry with key NULL. Static storage. */
const fxl_setting_def *fxl_setting_defs(void);

/* FXL_EINVAL with a message naming key, value and the accepted range unless
 * `value` is acceptable for `key`; an unknown key is FXL_EINVAL too. Pure
 * check, no database access (ctx only carries the message). */
int fxl_setting_validate(fxl_ctx *ctx, const char *key, const char *value);

/* Validates, then writes and audits through fxl_setting_set (physicist or
 * admin; one transaction). */
int fxl_setting_change(fxl_ctx *ctx, const char *key, const char *value);

/* One setting as listed: the stored value, or the fallback for a known key
 * that is not stored (is_default 1). */
typedef struct fxl_setting {
    char key[65];
    char value[1024];
    int is_default;
    int known;                  /* 0 for a stored key that this build does not know */
    const char *about;          /* static text or "" */
} fxl_setting;

/* Every stored setting plus every known key with a fallback, ordered by key.
 * *out is a heap array owned by the caller (free()). */
int fxl_setting_list(fxl_ctx *ctx, fxl_setting **out, size_t *n);

/* Default validity of a new calibration when neither days nor a date are
 * given: setting 'calibration_interval_days' when set, else this. */
#define FXL_CALIBRATION_INTERVAL_DAYS_DEFAULT 90

/* Reads an integer setting, falling back to `fallback` when unset. A stored
 * value that is not a whole number is FXL_EINVAL. */
int fxl_setting_get_int(fxl_ctx *ctx, long *out, const char *key, long fallback);

#endif
