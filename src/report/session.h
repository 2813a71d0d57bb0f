/* What every report run shares: the resolved generation time, one read
 * snapshot of the database, the department's name and time zone, and the
 * PDF document. Private to src/report. */
#ifndef FXL_REPORT_SESSION_H
#define FXL_REPORT_SESSION_H

#include "fxl/report.h"
#include "report/layout.h"
#include "report/localtime.h"
#include "store/report_query.h"

typedef struct rpt_session {
    fxl_ctx *ctx;
    rpt_doc doc;
    rpt_tz tz;
    char generated_utc[FXL_TIME_LEN];
    char tz_name[64];
    int snapshot;
} rpt_session;

/* Validates the options, opens the snapshot, reads the settings, switches
 * to the department's zone and creates the document. On failure the message
 * is in ctx; call rpt_session_close anyway. */
int rpt_session_open(rpt_session *s, fxl_ctx *ctx, const fxl_report_options *opt, int landscape);

/* Saves the document to path (when path is not NULL and rc == 0), ends the
 * snapshot, restores TZ, frees everything; returns rc or the save's error. */
int rpt_session_close(rpt_session *s, const char *path, int rc);

/* Local display of a stored time: "%Y-%m-%d" (date) or "%Y-%m-%d %H:%M". */
void rpt_session_date(char *out, size_t n, const char *stored);
void rpt_session_datetime(char *out, size_t n, const char *stored);
/* The date part of a stored time as it was entered, for dates that people
 * type as calendar days (valid until, effective from): no zone shift. */
void rpt_session_calendar_date(char *out, size_t n, const char *stored);

/* The verdicts the reports count, one column each, in this order:
 * within_tolerance, outside_tolerance, outside_action, not_evaluable,
 * implausible. rpt_verdict_index gives the column of a stored verdict name,
 * -1 for any other text. */
#define RPT_NVERDICT 5
int rpt_verdict_index(const char *verdict);

/* The limits of the method: a paragraph on relative detectors,
 * cross-calibration and commissioned ranges (report's first page). */
void rpt_method_limits(rpt_doc *d);

/* The correction tables in force for the detectors and beams of the scope,
 * with their commissioned ranges. */
int rpt_method_corrections(rpt_session *s, const fxl_rq_scope *scope);

#endif
