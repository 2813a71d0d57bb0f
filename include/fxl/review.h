/* The review queue: items opened for every result that is not within
 * tolerance and for every rule hit, the listing with its filters, one item
 * shown with its measurement, the field's (or detector's) history and its
 * events, and the signed events that work an item: acknowledge, comment,
 * close with a disposition, reopen. Workflow, roles and dispositions:
 * docs/review.md. Units: deviations percent, doses cGy, times stored form. */
#ifndef FXL_REVIEW_H
#define FXL_REVIEW_H

#include <stddef.h>
#include <stdint.h>

#include "fxl/core.h"
#include "fxl/fxl.h"

/* Status filter bits for fxl_queue_list. */
#define FXL_QUEUE_OPEN 1u
#define FXL_QUEUE_ACKNOWLEDGED 2u
#define FXL_QUEUE_CLOSED 4u
#define FXL_QUEUE_ACTIVE (FXL_QUEUE_OPEN | FXL_QUEUE_ACKNOWLEDGED)
#define FXL_QUEUE_ALL (FXL_QUEUE_ACTIVE | FXL_QUEUE_CLOSED)

/* Lengths of free text. */
#define FXL_REVIEW_COMMENT_MAX 2000
#define FXL_DISPOSITION_MAX 100
#define FXL_DISPOSITIONS_MAX 32

/* Dispositions offered when the setting 'dispositions' is unset or empty. */
#define FXL_DISPOSITIONS_DEFAULT                                                              \
    "set-up error, detector placement, detector fault, calibration, expected-dose error, "    \
    "anatomy change, clinically accepted, other"

typedef struct fxl_queue_filter {
    const char *mrn;            /* patient; NULL = any. Unknown MRN: FXL_ENOTFOUND */
    const char *detector;       /* detector serial; NULL = any. Unknown: FXL_ENOTFOUND */
    unsigned status_mask;       /* FXL_QUEUE_* bits; 0 = FXL_QUEUE_ACTIVE */
    int min_severity;           /* 0 = any; else items with severity >= this (1..4) */
    const char *since;          /* stored form; items opened at or after it; NULL = any */
} fxl_queue_filter;

/* One item as listed. Ids that do not apply are 0, text that does not apply "". */
typedef struct fxl_review_item {
    int64_t id;
    char rule[41];              /* "result", "missing_measurement", "detector_drift", ... */
    char rule_key[129];
    int severity;               /* 1..4, 4 the most severe */
    char status[16];            /* "open", "acknowledged", "closed" */
    int64_t measurement_id;
    int64_t superseded_by;      /* the measurement amending this item's one, else 0 */
    int64_t patient_id;
    char mrn[65];
    char patient_name[402];     /* "Family, Given" */
    int64_t detector_id;
    char detector[65];          /* serial */
    int64_t field_id;
    char field[65];
    char point[16];
    char plan[65];
    int fraction_number;        /* of the item's measurement, else 0 */
    char summary[1024];
    char opened_at[FXL_TIME_LEN];
    long age_days;              /* whole days from opened_at to now */
    char last_event[16];        /* kind of the latest event */
    char last_event_by[65];     /* its user */
    char last_event_at[FXL_TIME_LEN];
    char disposition[FXL_DISPOSITION_MAX + 1];  /* of the latest close, "" if none */
} fxl_review_item;

/* Items matching the filter (any role may read), sorted by severity (most
 * severe first), then age (oldest first), then id. *out is a heap array
 * owned by the caller (free()), NULL when *n is 0. */
int fxl_queue_list(fxl_ctx *ctx, fxl_review_item **out, size_t *n, const fxl_queue_filter *f);

/* A signed event on an item. */
typedef struct fxl_review_event {
    int64_t id;
    char kind[16];              /* open, acknowledge, comment, close, reopen */
    char disposition[FXL_DISPOSITION_MAX + 1];   /* close only, else "" */
    char comment[FXL_REVIEW_COMMENT_MAX + 1];
    char user[65];              /* login */
    char user_name[201];
    char user_role[16];
    char at[FXL_TIME_LEN];
} fxl_review_event;

/* The measurement behind an item, with everything it was judged by. Numbers
 * that do not apply are NaN. */
typedef struct fxl_review_measurement {
    int64_t id;
    int fraction_number;
    char treated_at[FXL_TIME_LEN];
    char recorded_at[FXL_TIME_LEN];
    char recorded_by[65];
    char field[65];
    char point[16];
    char beam[33];
    char detector[65];
    char reading_unit[8];
    double reading;
    double temp_c;
    int temp_entered;
    int64_t calibration_id;     /* 0 = none */
    double factor_n;            /* cGy per reading unit */
    double cf[FXL_CF_COUNT];    /* field size, SSD, wedge, tray, angle, thickness, SDD */
    double background;          /* M_0; NaN in rows older than schema 5 */
    int gross;                  /* 1: beyond the plausibility bound */
    double cf_temp;
    double corrected_dose_cgy;
    double expected_dose_cgy;
    double deviation_pct;
    int64_t threshold_set_id;   /* 0 = none */
    char threshold_name[65];
    int threshold_version;
    double tolerance_pct, action_pct, floor_cgy;
    char verdict[24];           /* schema name */
    fxl_reasons reasons;
    int64_t supersedes_id;      /* 0 unless this row is an amendment */
    char amend_reason[501];
    int64_t superseded_by;      /* the row that amends it, else 0 */
    char superseded_reason[501];  /* that row's amend_reason */
    char superseded_verdict[24];  /* that row's verdict */
    double superseded_deviation_pct;  /* that row's deviation, NaN if none */
} fxl_review_measurement;

/* One point of the history trend shown with an item: a measurement of the
 * item's field, or (for items on a detector) a measurement by the detector
 * since its latest calibration, with the CUSUM sums after it. */
typedef struct fxl_review_trend_point {
    int64_t measurement_id;
    int fraction_number;
    char treated_at[FXL_TIME_LEN];
    char mrn[65];               /* detector trends span patients */
    char field[65];
    double deviation_pct;       /* NaN when not evaluable */
    char verdict[24];
    int superseded;             /* 1: an amendment replaced this reading */
    int is_item;                /* 1: the item's own measurement */
    double cusum_high, cusum_low;   /* detector trends only, in spreads, else NaN */
    double sigma_pct;           /* detector trends: spread used (NaN in the start-up) */
} fxl_review_trend_point;

typedef struct fxl_review_detail {
    fxl_review_item item;
    int has_measurement;
    fxl_review_measurement m;
    int trend_is_detector;      /* 0: field history; 1: detector deviations */
    double trend_tolerance_pct; /* levels to draw on the trend, NaN if unknown */
    double trend_action_pct;
    double cusum_target_pct;    /* detector trends: target, percent */
    double cusum_k_sd, cusum_h_sd;   /* ... allowance and decision interval, spreads */
    int cusum_startup;          /* ... results before the chart starts */
    char trend_series[120];     /* ... "LINAC-A 6X entrance", "" for every series */
    size_t n_trend;
    fxl_review_trend_point *trend;     /* heap, oldest first */
    size_t n_events;
    fxl_review_event *events;          /* heap, oldest first */
} fxl_review_detail;

#define FXL_REVIEW_DETAIL_INIT {0}

/* Loads item `id` (any role may read); FXL_ENOTFOUND if it does not exist.
 * Release with fxl_review_detail_release. */
int fxl_queue_show(fxl_ctx *ctx, fxl_review_detail *out, int64_t id);
void fxl_review_detail_release(fxl_review_detail *d);

/* ---- events (each one transaction: event, item status, audit row) -------- */

/* Acknowledge: therapist, physicist or admin; only an open item; the comment
 * is optional (NULL). The item becomes 'acknowledged'. */
int fxl_review_acknowledge(fxl_ctx *ctx, int64_t id, const char *comment);

/* Comment: therapist, physicist or admin; any status, unchanged; comment
 * required, 1..FXL_REVIEW_COMMENT_MAX characters. */
int fxl_review_comment(fxl_ctx *ctx, int64_t id, const char *comment);

/* Close: physicist or admin; an open or acknowledged item; disposition must
 * be one of the configured list (fxl_review_dispositions, compared without
 * regard to case; the list's spelling is stored); comment optional. */
int fxl_review_close(fxl_ctx *ctx, int64_t id, const char *disposition, const char *comment);

/* Reopen: physicist or admin; a closed item; comment required. The item
 * becomes 'open'. */
int fxl_review_reopen(fxl_ctx *ctx, int64_t id, const char *comment);

/* The configured dispositions: setting 'dispositions' (comma-separated,
 * blanks around each trimmed, empty entries skipped), or
 * FXL_DISPOSITIONS_DEFAULT when unset or empty. */
typedef struct fxl_disposition_list {
    size_t n;
    char name[FXL_DISPOSITIONS_MAX][FXL_DISPOSITION_MAX + 1];
} fxl_disposition_list;

int fxl_review_dispositions(fxl_ctx *ctx, fxl_disposition_list *out);

/* Parses a comma-separated list as above into *out (pure); FXL_EINVAL for
 * more than FXL_DISPOSITIONS_MAX entries or one longer than
 * FXL_DISPOSITION_MAX characters. An empty text gives n == 0. */
int fxl_disposition_list_parse(fxl_disposition_list *out, const char *text);

#endif
