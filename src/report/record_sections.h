/* The parts of the per-patient report that make it a faithful record:
 * amendments with their full reasons, the reasons behind every result that
 * is not within tolerance (escalations included), every review decision
 * with who made it, and the midline estimates of entrance-exit pairs.
 * Private to src/report. */
#ifndef FXL_REPORT_RECORD_SECTIONS_H
#define FXL_REPORT_RECORD_SECTIONS_H

#include <stdint.h>

#include "report/session.h"

/* Text of an escalation reason written by the rule over history. */
#define RPT_ESCALATED_MARK "escalated to the action level"

/* 1 when the measurement's reasons say the history rule escalated it. */
int rpt_is_escalated(const char *reasons_json);

/* Each section draws its heading only when it has something to list;
 * returns 0 or a negative FXL_E code. */
int rpt_section_amendments(rpt_session *s, int64_t plan_id);
int rpt_section_reasons(rpt_session *s, int64_t plan_id);
int rpt_section_review(rpt_session *s, int64_t plan_id);
int rpt_section_midline(rpt_session *s, const char *mrn, const char *plan_label);

#endif
