/* Writing review items from inside another write transaction: the rules over
 * history open their items here, and an amendment links the items of the
 * superseded reading to the new one. Private to src/store. */
#ifndef FXL_STORE_REVIEW_STORE_H
#define FXL_STORE_REVIEW_STORE_H

#include <stddef.h>
#include <stdint.h>

#include "store/ctx.h"

typedef struct fxl_review_open_spec {
    const char *rule;           /* review_items.rule, e.g. "detector_drift" */
    const char *rule_key;       /* what the rule fired on; NULL for a single result */
    int severity;               /* 1..4 */
    int64_t measurement_id;     /* 0 = none */
    int64_t patient_id;         /* 0 = none */
    int64_t detector_id;        /* 0 = none */
    int64_t field_id;           /* 0 = none */
    const char *summary;        /* one line for the queue listing */
} fxl_review_open_spec;

/* Opens an item with its 'open' event (signed by the acting user) and one
 * audit row, inside the caller's transaction. When rule_key is given and an
 * item with the same rule and key already exists, in any status, nothing is
 * written and *out_id is 0: one hit opens one item however often the rule
 * is evaluated. out_id may be NULL. */
int fxl_review_open_item(fxl_ctx *ctx, int64_t *out_id, const fxl_review_open_spec *spec);

/* After measurement new_id superseding old_id has been written (and its own
 * item opened, if any), in the caller's transaction: adds to every item of
 * old_id a comment event "superseded by measurement #new: <reason>; new
 * result: <verdict>" and to every item of new_id a comment naming old_id
 * and its items, each with an audit row. Items keep their status: an
 * amendment never closes an item (docs/review.md). Idempotent: an item that
 * already carries the link is left alone. */
int fxl_review_follow_amendment(fxl_ctx *ctx, int64_t old_id, int64_t new_id);

/* ---- shared with the rules hook (implemented in rules_hook.c) ---------- */

/* Settings of the rules over history, each from the settings table or its
 * default (docs/rules.md). A stored value that is not a number in range is
 * FXL_EINVAL naming the key, the value and the accepted range. */
typedef struct fxl_rule_settings {
    int calibration_due_days;   /* calibration_due_days, 0..365, default 14 */
    int weekly_interval_days;   /* weekly_interval_days, 1..60, default 7 */
    double cusum_target_pct;    /* cusum_target_pct, -20..20 %, default 0 */
    double cusum_k_sd;          /* cusum_k_sd, 0..3 spreads, default 0.5 */
    double cusum_h_sd;          /* cusum_h_sd, 1..20 spreads, default 5.5 */
    int cusum_startup;          /* cusum_startup, 10..100 results, default 10 */
} fxl_rule_settings;

int fxl_rule_settings_load(fxl_ctx *ctx, fxl_rule_settings *out);

/* One deviation in a detector's drift series. */
typedef struct fxl_drift_point {
    int64_t measurement_id;
    int fraction_number;
    char treated_at[FXL_TIME_LEN];
    char mrn[65];
    char field[65];
    char verdict[24];
    double deviation_pct;
} fxl_drift_point;

/* The deviations the drift chart of detector `detector_id`, beam `beam_id`
 * and measured point `point` runs over, oldest first: its evaluable
 * measurements (within tolerance, outside tolerance, outside action, not
 * gross), not superseded, treated after the restart point. The restart
 * point (into since, "" when none) is the later of the detector's latest
 * calibration for that beam and point and the latest closing of the
 * detector_drift item of that series. beam_id 0 and point NULL read every
 * series of the detector together (items opened before schema version 5).
 * *out is a heap array (free()), NULL when *n is 0. */
int fxl_drift_series(fxl_ctx *ctx, fxl_drift_point **out, size_t *n, char since[FXL_TIME_LEN],
                     int64_t detector_id, int64_t beam_id, const char *point);

/* The review item key of one drift series: "detector:<id>:beam:<id>:point:<p>". */
void fxl_drift_series_key(char *buf, size_t size, int64_t detector_id, int64_t beam_id,
                          const char *point);

#endif
