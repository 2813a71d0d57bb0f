/* Known department settings: what each accepts and its fallback, the
 * validated change and the listing. Raw get/set are in db.c. */
#include <errno.h>
#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "fxl/beam_model.h"
#include "fxl/calibrations.h"
#include "fxl/drift.h"
#include "fxl/review.h"
#include "fxl/rules.h"
#include "fxl/settings.h"
#include "fxl/number.h"
#include "store/grow.h"
#include "store/stmt.h"

typedef enum { KIND_TEXT, KIND_NUMBER, KIND_INT, KIND_TIMEZONE, KIND_DISPOSITIONS } value_kind;

/* Fallbacks shown by 'setting list' come from the readers' own defaults. */
#define STR_(x) #x
#define STR(x) STR_(x)

typedef struct setting_rule {
    fxl_setting_def def;
    value_kind kind;
    double lo, hi;          /* numbers: inclusive range; text: length range */
} setting_rule;

/* Ranges: skin temperature (skin 28 to 34 degC, common practice) widened to what
 * the measurements table accepts; the rules-over-history keys use the ranges
 * their reader checks (src/store/rules_hook.c, docs/rules.md); the rest are
 * local policy choices documented in docs/equipment.md. Sorted by key. */
static const setting_rule rules[] = {
    {{"alert_command", "command run on an outside-action result (empty: none)",
      "0 to 1000 characters", ""}, KIND_TEXT, 0, 1000},
    {{"alert_timeout_s", "seconds the alert command may run before it is stopped",
      "1 to 300 s", "10"}, KIND_INT, 1, 300},
    {{"auth_failure_window_minutes", "failed logins counted over this many minutes",
      "1 to 1440 min", "15"}, KIND_INT, 1, 1440},
    {{"auth_idle_minutes", "a session ends after this many minutes without use",
      "1 to 240 min", "15"}, KIND_INT, 1, 240},
    {{"auth_lock_minutes", "how long a lock lasts unless an admin unlocks the account",
      "1 to 10080 min", "30"}, KIND_INT, 1, 10080},
    {{"auth_max_failures", "failed logins inside the window that lock the account",
      "3 to 20", "5"}, KIND_INT, 3, 20},
    {{"auth_session_hours", "a session ends at the latest this many hours after login",
      "1 to 24 h", "12"}, KIND_INT, 1, 24},
    {{"calibration_change_limit_pct", "largest change of N against the previous calibration of "
      "the same detector, beam and point accepted without a physicist's confirmation",
      "0.1 to 50 %", STR(FXL_CALIB_CHANGE_LIMIT_PCT_DEFAULT)}, KIND_NUMBER, 0.1, 50},
    {{"calibration_due_days", "warn this many days before a calibration expires",
      "0 to 365 days", "14"}, KIND_INT, 0, 365},
    {{"calibration_interval_days", "validity of a new calibration when none is given",
      "1 to 3650 days", "90"}, KIND_INT, 1, 3650},
    {{"calibration_nominal_limit_pct", "largest difference of a detector's first N from its "
      "nominal sensitivity accepted without a physicist's confirmation", "1 to 100 %",
      STR(FXL_CALIB_NOMINAL_LIMIT_PCT_DEFAULT)}, KIND_NUMBER, 1, 100},
    {{"calibration_sd_limit_pct", "largest SD of the calibration readings (percent of their mean) "
      "accepted without a physicist's confirmation", "0.01 to 20 %",
      STR(FXL_CALIB_SD_LIMIT_PCT_DEFAULT)}, KIND_NUMBER, 0.01, 20},
    {{"cusum_h_sd", "drift CUSUM decision interval, in spreads of the series",
      "1 to 20", STR(FXL_DRIFT_H_SIGMA_DEFAULT)}, KIND_NUMBER, 1, 20},
    {{"cusum_k_sd", "drift CUSUM allowance (slack), in spreads of the series",
      "0 to 3", STR(FXL_DRIFT_K_SIGMA_DEFAULT)}, KIND_NUMBER, 0, 3},
    {{"cusum_startup", "results of a drift series before its chart starts (spread estimate)",
      "10 to 100", STR(FXL_DRIFT_STARTUP_DEFAULT)}, KIND_INT, 10, 100},
    {{"cusum_target_pct", "CUSUM target mean deviation", "-20 to 20 %",
      STR(FXL_CUSUM_TARGET_PCT_DEFAULT)}, KIND_NUMBER, -20, 20},
    {{"department", "department name printed on reports", "1 to 200 characters", NULL},
     KIND_TEXT, 1, 200},
    {{"dispositions", "comma-separated dispositions offered when closing a review item",
      "a comma-separated list of at most " STR(FXL_DISPOSITIONS_MAX) " entries of at most "
      STR(FXL_DISPOSITION_MAX) " characters", FXL_DISPOSITIONS_DEFAULT}, KIND_DISPOSITIONS, 0, 4000},
    {{"implausible_pct", "plausibility bound: |deviation| above this is a gross deviation "
      "(outside the action level; re-read and unit check asked for first)",
      "5 to 100 %", "50"}, KIND_NUMBER, 5, 100},
    {{"model_crosscheck_pct", "disagreement between a planning-system expected dose and the "
      "independent model that opens a review item at plan import", "0.1 to 50 %",
      STR(FXL_MODEL_CROSSCHECK_PCT_DEFAULT)}, KIND_NUMBER, 0.1, 50},
    {{"skin_temp_c", "skin temperature used when none is entered", "10 to 45 degC", "32"},
     KIND_NUMBER, 10, 45},
    {{"timezone", "department time zone for monthly reports", "UTC or an IANA zone name such as Europe/Paris",
      "UTC"}, KIND_TIMEZONE, 1, 64},
    {{"weekly_interval_days", "days between measurements for a field measured weekly",
      "1 to 60 days", STR(FXL_WEEKLY_INTERVAL_DAYS_DEFAULT)}, KIND_INT, 1, 60},
};
#define N_RULES (sizeof rules / sizeof rules[0])

const fxl_setting_def *fxl_setting_defs(void)
{
    static fxl_setting_def defs[N_RULES + 1];
    size_t i;

    for (i = 0; i < N_RULES; i++)
        defs[i] = rules[i].def;
    defs[N_RULES].key = NULL;
    return defs;
}

static const setting_rule *find_rule(const char *key)
{
    size_t i;

    for (i = 0; key && i < N_RULES; i++)
        if (strcmp(rules[i].def.key, key) == 0)
            return &rules[i];
    return NULL;
}

/* An IANA zone name: letters, digits, '/', '_', '+', '-'; no '..'. When the
 * system zone database is installed the name must exist in it. */
static int timezone_valid(const char *tz)
{
    char path[256];
    struct stat st;
    size_t i, len = strlen(tz);

    if (len < 1 || len > 64 || strstr(tz, "..") || tz[0] == '/')
        return 0;
    for (i = 0; i < len; i++) {
        char c = tz[i];
        if (!((c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') ||
              c == '/' || c == '_' || c == '+' || c == '-'))
            return 0;
    }
    if (strcmp(tz, "UTC") == 0)
        return 1;
    if (stat("/usr/share/zoneinfo", &st) != 0)
        return 1;
    snprintf(path, sizeof path, "/usr/share/zoneinfo/%s", tz);
    return stat(path, &st) == 0 && S_ISREG(st.st_mode);
}

int fxl_setting_validate(fxl_ctx *ctx, const char *key, const char *value)
{
    const setting_rule *r = find_rule(key);
    char *end = NULL;
    double v;
    size_t len;

    if (!r) {
        char known[1024] = "";
        size_t i;
        for (i = 0; i < N_RULES; i++) {
            if (i)
                strcat(known, ", ");
            strcat(known, rules[i].def.key);
        }
        return fxl_fail(ctx, FXL_EINVAL, "unknown setting '%s' (known: %s)", key ? key : "", known);
    }
    if (!value)
        value = "";
    len = strlen(value);
    switch (r->kind) {
    case KIND_TEXT:
        if (len < r->lo || len > r->hi)
            return fxl_fail(ctx, FXL_EINVAL, "setting '%s' must be %s", key, r->def.accepts);
        break;
    case KIND_DISPOSITIONS: {
        fxl_disposition_list list;
        if (len > r->hi || fxl_disposition_list_parse(&list, value) != 0)
            return fxl_fail(ctx, FXL_EINVAL, "setting '%s' must be %s", key, r->def.accepts);
        break;
    }
    case KIND_TIMEZONE:
        if (!timezone_valid(value))
            return fxl_fail(ctx, FXL_EINVAL, "timezone '%s' is not known: must be %s", value,
                            r->def.accepts);
        break;
    case KIND_NUMBER:
    case KIND_INT:
        (void)end;
        if (len == 0 || fxl_number_parse(&v, value, 0) != FXL_NUM_OK ||
            (r->kind == KIND_INT && v != floor(v)))
            return fxl_fail(ctx, FXL_EINVAL, "setting '%s' value '%s' is not a %s (%s)", key, value,
                            r->kind == KIND_INT ? "whole number" : "number", r->def.accepts);
        if (v < r->lo || v > r->hi)
            return fxl_fail(ctx, FXL_EINVAL, "setting '%s' value '%s' is out of range: must be %s",
                            key, value, r->def.accepts);
        break;
    }
    return 0;
}

int fxl_setting_change(fxl_ctx *ctx, const char *key, const char *value)
{
    int rc;

    if ((rc = fxl_require_role(ctx, FXL_ROLES_PHYSICS, "changing settings")) != 0)
        return rc;
    if ((rc = fxl_setting_validate(ctx, key, value)) != 0)
        return rc;
    return fxl_setting_set(ctx, key, value);
}

int fxl_setting_get_int(fxl_ctx *ctx, long *out, const char *key, long fallback)
{
    char buf[64], *end = NULL;
    long v;
    int rc = fxl_setting_get(ctx, key, buf, sizeof buf);

    if (rc == FXL_ENOTFOUND) {
        *out = fallback;
        return 0;
    }
    if (rc != 0)
        return rc;
    {
        double d = 0;
        (void)end;
        if (fxl_number_in_range(&d, buf, FXL_NUM_WHOLE, (double)LONG_MIN / 2, (double)LONG_MAX / 2) != FXL_NUM_OK)
            return fxl_fail(ctx, FXL_EINVAL, "stored setting '%s' value '%s' is not a whole number",
                            key, buf);
        v = (long)d;
    }
    *out = v;
    return 0;
}

static int add_row(fxl_ctx *ctx, fxl_setting **list, size_t *n, size_t *cap, const char *key,
                   const char *value, int is_default)
{
    const setting_rule *r = find_rule(key);
    fxl_setting *row;
    int rc;

    if ((rc = fxl_grow(ctx, (void **)list, cap, *n, sizeof **list, "listing settings")) != 0)
        return rc;
    row = &(*list)[(*n)++];
    memset(row, 0, sizeof *row);
    snprintf(row->key, sizeof row->key, "%s", key);
    snprintf(row->value, sizeof row->value, "%s", value);
    row->is_default = is_default;
    row->known = r != NULL;
    row->about = r ? r->def.about : "";
    return 0;
}

static int by_key(const void *a, const void *b)
{
    return strcmp(((const fxl_setting *)a)->key, ((const fxl_setting *)b)->key);
}

int fxl_setting_list(fxl_ctx *ctx, fxl_setting **out, size_t *n)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_setting *list = NULL;
    size_t count = 0, cap = 0, i, j;
    int rc;

    *out = NULL;
    *n = 0;
    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT key, value FROM settings ORDER BY key")) != 0)
        goto cleanup;
    while ((rc = fxl_stmt_step(&s)) == 1)
        if ((rc = add_row(ctx, &list, &count, &cap, fxl_stmt_text(&s, 0), fxl_stmt_text(&s, 1), 0)) != 0)
            goto cleanup;
    if (rc < 0)
        goto cleanup;
    for (i = 0; i < N_RULES; i++) {
        int stored = 0;
        for (j = 0; j < count; j++)
            if (strcmp(list[j].key, rules[i].def.key) == 0)
                stored = 1;
        if (!stored && rules[i].def.fallback &&
            (rc = add_row(ctx, &list, &count, &cap, rules[i].def.key, rules[i].def.fallback, 1)) != 0)
            goto cleanup;
    }
    if (count)
        qsort(list, count, sizeof *list, by_key);
    *out = list;
    *n = count;
    list = NULL;
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    free(list);
    return rc;
}
