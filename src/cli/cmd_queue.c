/* fxledger queue: list the review queue with filters, show one item with its
 * measurement, trend and events, and sign events on it (acknowledge,
 * comment, close with a disposition, reopen). No SQL here. */
#include <limits.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include "cli/cli.h"
#include "cli/session.h"
#include "cli/signature_view.h"
#include "cli/table.h"
#include "fxl/fraction.h"
#include "cli/json_put.h"
#include "fxl/review.h"
#include "fxl/rules.h"

/* ---- small helpers ---------------------------------------------------------- */

static int parse_item_id(int64_t *out, const char *text)
{
    long v;

    if (text && text[0] == '#')
        text++;
    if (cli_int(&v, text, "review item id", 1, LONG_MAX) != 0)
        return -1;
    *out = v;
    return 0;
}

static int parse_severity(int *out, const char *text)
{
    static const char *const names[] = {"low", "medium", "high", "critical"};
    long v;
    int i;

    for (i = 0; i < 4; i++) {
        if (strcasecmp(text, names[i]) == 0) {
            *out = i + 1;
            return 0;
        }
    }
    if (cli_int(&v, text, "severity", 1, 4) != 0)
        return -1;
    *out = (int)v;
    return 0;
}

static int parse_status(unsigned *out, const char *text)
{
    if (!text)
        *out = FXL_QUEUE_ACTIVE;
    else if (strcmp(text, "open") == 0)
        *out = FXL_QUEUE_OPEN;
    else if (strcmp(text, "acknowledged") == 0)
        *out = FXL_QUEUE_ACKNOWLEDGED;
    else if (strcmp(text, "closed") == 0)
        *out = FXL_QUEUE_CLOSED;
    else if (strcmp(text, "active") == 0)
        *out = FXL_QUEUE_ACTIVE;
    else if (strcmp(text, "all") == 0)
        *out = FXL_QUEUE_ALL;
    else {
        cli_error("status '%s' must be open, acknowledged, closed, active or all", text);
        return -1;
    }
    return 0;
}

static cJSON *item_json(const fxl_review_item *it)
{
    cJSON *o = cJSON_CreateObject();

    cJSON_AddNumberToObject(o, "id", (double)it->id);
    cJSON_AddStringToObject(o, "rule", it->rule);
    cli_json_put_text(o, "rule_key", it->rule_key);
    cJSON_AddNumberToObject(o, "severity", it->severity);
    cJSON_AddStringToObject(o, "severity_name", fxl_severity_name(it->severity));
    cJSON_AddStringToObject(o, "status", it->status);
    cli_json_put_text(o, "disposition", strcmp(it->status, "closed") == 0 ? it->disposition : "");
    cli_json_put_id(o, "measurement_id", it->measurement_id);
    cli_json_put_id(o, "superseded_by", it->superseded_by);
    cli_json_put_text(o, "mrn", it->mrn);
    cli_json_put_text(o, "patient_name", it->patient_name);
    cli_json_put_text(o, "plan", it->plan);
    cli_json_put_text(o, "field", it->field);
    cli_json_put_text(o, "point", it->point);
    if (it->fraction_number)
        cJSON_AddNumberToObject(o, "fraction", it->fraction_number);
    else
        cJSON_AddNullToObject(o, "fraction");
    cli_json_put_text(o, "detector", it->detector);
    cJSON_AddStringToObject(o, "summary", it->summary);
    cJSON_AddStringToObject(o, "opened_at", it->opened_at);
    cJSON_AddNumberToObject(o, "age_days", (double)it->age_days);
    cli_json_put_text(o, "last_event", it->last_event);
    cli_json_put_text(o, "last_event_by", it->last_event_by);
    cli_json_put_text(o, "last_event_at", it->last_event_at);
    return o;
}

/* "P-0001 / AP entrance / D-1001", whatever the item has. */
static void subject_line(char *buf, size_t size, const fxl_review_item *it)
{
    char part[200];

    buf[0] = '\0';
    if (it->mrn[0]) {
        snprintf(part, sizeof part, "patient %s", it->mrn);
        strncat(buf, part, size - strlen(buf) - 1);
    }
    if (it->field[0]) {
        snprintf(part, sizeof part, "%sfield %s %s", buf[0] ? ", " : "", it->field, it->point);
        strncat(buf, part, size - strlen(buf) - 1);
    }
    if (it->fraction_number) {
        snprintf(part, sizeof part, "%sfraction %d", buf[0] ? ", " : "", it->fraction_number);
        strncat(buf, part, size - strlen(buf) - 1);
    }
    if (it->detector[0]) {
        snprintf(part, sizeof part, "%sdetector %s", buf[0] ? ", " : "", it->detector);
        strncat(buf, part, size - strlen(buf) - 1);
    }
}

static const char *severity_color(const cli_env *env, int severity)
{
    if (severity >= FXL_SEVERITY_CRITICAL)
        return cli_color(env, CLI_RED);
    if (severity >= FXL_SEVERITY_HIGH)
        return cli_color(env, CLI_YELLOW);
    return "";
}

/* ---- queue list ------------------------------------------------------------- */

static int queue_list(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"patient", "MRN", "only items of this patient", NULL},
        {"detector", "SERIAL", "only items on or measured with this detector", NULL},
        {"status", "STATUS", "open, acknowledged, closed, active (open and acknowledged; default) or all", NULL},
        {"severity", "N", "minimum severity: 1 low, 2 medium, 3 high, 4 critical (or the name)", NULL},
        {"since", "DATE", "only items opened on or after DATE (YYYY-MM-DD)", NULL},
        {NULL, NULL, NULL, NULL}};
    fxl_queue_filter f;
    fxl_review_item *items = NULL;
    const char *pos[1], *v;
    size_t n = 0, i;
    int npos, rc;

    rc = cli_parse(env, "queue list [--patient MRN] [--detector SERIAL] [--status STATUS] "
                   "[--severity N] [--since DATE]",
                   "Lists review items, most severe first, then oldest first. By default only\n"
                   "items still to be worked (open or acknowledged) are shown.",
                   opts, argc, argv, pos, 0, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    memset(&f, 0, sizeof f);
    f.mrn = cli_get(opts, "patient");
    f.detector = cli_get(opts, "detector");
    f.since = cli_get(opts, "since");
    if (parse_status(&f.status_mask, cli_get(opts, "status")) != 0)
        return CLI_EXIT_USAGE;
    if ((v = cli_get(opts, "severity")) && parse_severity(&f.min_severity, v) != 0)
        return CLI_EXIT_USAGE;
    if ((rc = fxl_queue_list(env->ctx, &items, &n, &f)) != 0)
        return cli_fail(env, rc);

    if (env->json) {
        cJSON *arr = cJSON_CreateArray();
        for (i = 0; i < n; i++)
            cJSON_AddItemToArray(arr, item_json(&items[i]));
        free(items);
        return cli_print_json(arr);
    }
    if (n == 0) {
        printf("review queue: no items match\n");
        free(items);
        return CLI_EXIT_OK;
    }
    printf("review queue: %zu item%s, most severe first, then oldest\n\n", n, n == 1 ? "" : "s");
    for (i = 0; i < n; i++) {
        const fxl_review_item *it = &items[i];
        char subject[400], state[160];
        if (strcmp(it->status, "closed") == 0 && it->disposition[0])
            snprintf(state, sizeof state, "closed (%s)", it->disposition);
        else
            snprintf(state, sizeof state, "%s", it->status);
        subject_line(subject, sizeof subject, it);
        {
            /* 80 columns: the first line is short, the rest wrapped under it */
            char line[1400], when[48];
            fxl_time_show_local(env->ctx, when, sizeof when, it->opened_at);
            printf("%s#%-5lld %-8s%s ", severity_color(env, it->severity), (long long)it->id,
                   fxl_severity_name(it->severity), cli_color(env, CLI_RESET));
            snprintf(line, sizeof line, "%s, %s, opened %.10s (%ld day%s)", state, it->rule, when,
                     it->age_days, it->age_days == 1 ? "" : "s");
            cli_wrap_hang(stdout, "", 16, line, CLI_WIDTH - 16);
            if (subject[0])
                cli_wrap(stdout, "        ", subject, CLI_WIDTH);
            cli_wrap(stdout, "        ", it->summary, CLI_WIDTH);
            if (it->last_event[0] && strcmp(it->last_event, "open") != 0) {
                fxl_time_show_local(env->ctx, when, sizeof when, it->last_event_at);
                snprintf(line, sizeof line, "last: %s by %s at %s", it->last_event, it->last_event_by,
                         when);
                cli_wrap(stdout, "        ", line, CLI_WIDTH);
            }
            if (it->superseded_by) {
                snprintf(line, sizeof line, "reading superseded by measurement #%lld (see 'fxledger "
                         "queue show %lld')", (long long)it->superseded_by, (long long)it->id);
                cli_wrap(stdout, "        ", line, CLI_WIDTH);
            }
        }
        if (i + 1 < n)
            printf("\n");
    }
    free(items);
    return CLI_EXIT_OK;
}

/* ---- queue show -------------------------------------------------------------- */

#define TREND_COLS 41
#define TREND_MAX_ROWS 40

static double trend_scale(const fxl_review_detail *d)
{
    double w = isfinite(d->trend_action_pct) ? d->trend_action_pct : 5.0;
    size_t i;

    for (i = 0; i < d->n_trend; i++)
        if (isfinite(d->trend[i].deviation_pct) && fabs(d->trend[i].deviation_pct) > w)
            w = fabs(d->trend[i].deviation_pct);
    return ceil(w);
}

static int trend_col(double v, double w, int cols)
{
    int c = (int)lround((v + w) / (2.0 * w) * (cols - 1));
    return c < 0 ? 0 : c >= cols ? cols - 1 : c;
}

/* One lane of the text trend, `cols` wide (at most TREND_COLS): the axis,
 * the levels and the point. */
static void trend_lane(char lane[TREND_COLS + 1], const fxl_review_detail *d, double w, double v,
                       char mark, int cols)
{
    int i;

    if (cols > TREND_COLS)
        cols = TREND_COLS;
    memset(lane, ' ', (size_t)cols);
    lane[cols] = '\0';
    lane[trend_col(0.0, w, cols)] = '.';
    if (isfinite(d->trend_tolerance_pct)) {
        lane[trend_col(-d->trend_tolerance_pct, w, cols)] = ':';
        lane[trend_col(d->trend_tolerance_pct, w, cols)] = ':';
    }
    if (isfinite(d->trend_action_pct)) {
        lane[trend_col(-d->trend_action_pct, w, cols)] = '|';
        lane[trend_col(d->trend_action_pct, w, cols)] = '|';
    }
    if (isfinite(v))
        lane[trend_col(v, w, cols)] = mark;
    for (i = cols - 1; i >= 0 && lane[i] == ' '; i--)
        lane[i] = '\0';
}

/* Columns before the lane on a trend row (80 columns: the lane takes the
 * rest of the line). */
#define TREND_PREFIX_DETECTOR 55
#define TREND_PREFIX_FIELD 52

static void print_trend(const cli_env *env, const fxl_review_detail *d)
{
    char lane[TREND_COLS + 1];
    double w = trend_scale(d);
    size_t i, first = d->n_trend > TREND_MAX_ROWS ? d->n_trend - TREND_MAX_ROWS : 0;
    int cols = CLI_WIDTH - (d->trend_is_detector ? TREND_PREFIX_DETECTOR : TREND_PREFIX_FIELD);

    if (d->trend_is_detector) {
        char head[700];
        snprintf(head, sizeof head, "Deviations measured with detector %s%s%s since its latest "
                 "calibration or closed drift review, all patients, with the standardised CUSUM sums "
                 "in spreads (target %.2f %%, k = %.2f, h = %.2f spreads, start-up %d results; spread "
                 "from the series' moving ranges):", d->item.detector, d->trend_series[0] ? ", " : "",
                 d->trend_series, d->cusum_target_pct, d->cusum_k_sd, d->cusum_h_sd,
                 d->cusum_startup);
        printf("\n");
        cli_wrap(stdout, "", head, CLI_WIDTH);
    } else {
        char head[300];
        snprintf(head, sizeof head, "History of field %s %s (patient %s), deviation per fraction:",
                 d->item.field, d->item.point, d->item.mrn);
        printf("\n");
        cli_wrap(stdout, "", head, CLI_WIDTH);
    }
    if (d->n_trend == 0) {
        printf("  no measurements\n");
        return;
    }
    printf("  scale -%.0f %% .. +%.0f %%   '.' 0 %%", w, w);
    if (isfinite(d->trend_tolerance_pct))
        printf("   ':' tolerance %.2f %%", d->trend_tolerance_pct);
    if (isfinite(d->trend_action_pct))
        printf("   '|' action %.2f %%", d->trend_action_pct);
    printf("\n");
    if (first)
        printf("  (%zu earlier measurement%s not shown)\n", first, first == 1 ? "" : "s");
    if (d->trend_is_detector)
        printf("  %-10s %-10s %-6s %9s %6s %6s\n", "treated", "patient", "field", "deviation",
               "C+", "C-");
    for (i = first; i < d->n_trend; i++) {
        const fxl_review_trend_point *t = &d->trend[i];
        char mark = t->is_item ? '*' : t->superseded ? 'x' : 'o';
        char dev[24], day[16];
        if (isfinite(t->deviation_pct))
            snprintf(dev, sizeof dev, "%+7.2f %%", t->deviation_pct);
        else
            snprintf(dev, sizeof dev, "%9s", "--");
        cli_local_date(env, day, t->treated_at);
        trend_lane(lane, d, w, t->deviation_pct, mark, cols);
        if (d->trend_is_detector)
            printf("  %-10s %-10.10s %-6.6s %s %6.2f %6.2f %s\n", day, t->mrn, t->field, dev,
                   t->cusum_high, t->cusum_low, lane);
        else
            /* a superseded reading says so in place of its verdict (80 columns) */
            printf("  fx %3d  %-10s  %s  %-18s %s\n", t->fraction_number, day, dev,
                   t->superseded ? "(superseded)" : t->verdict, lane);
    }
    /* once, after the rows (it was printed inside the loop) */
    if (d->trend_is_detector && d->n_trend && isfinite(d->trend[d->n_trend - 1].sigma_pct))
        printf("  spread used at the last result: %.2f %%\n", d->trend[d->n_trend - 1].sigma_pct);
    if (!d->trend_is_detector)
        printf("  * this item's measurement   o other measurements   x superseded readings\n");
}

/* "  label            value", the value wrapped at words under itself
 * (80 columns). */
static void kv(const char *label, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
static void kv(const char *label, const char *fmt, ...)
{
    char lead[64], text[1600];
    va_list ap;

    va_start(ap, fmt);
    vsnprintf(text, sizeof text, fmt, ap);
    va_end(ap);
    snprintf(lead, sizeof lead, "  %-16s ", label);
    cli_wrap_hang(stdout, lead, 19, text, CLI_WIDTH);
}

static void print_factor(const char *name, double v, const char *fmt_unit)
{
    if (isfinite(v))
        kv(name, "%.4f%s", v, fmt_unit);
    else
        kv(name, "--");
}

static void print_measurement(const cli_env *env, const fxl_review_measurement *m)
{
    static const char *const cf_names[FXL_CF_COUNT] = {"CF field size", "CF SSD", "CF wedge",
                                                       "CF tray", "CF angle", "CF thickness",
                                                       "CF SDD"};
    int i;

    {
        char treated[48], recorded[48], head[300];
        cli_local_time(env, treated, sizeof treated, m->treated_at);
        cli_local_time(env, recorded, sizeof recorded, m->recorded_at);
        snprintf(head, sizeof head, "Measurement #%lld: fraction %d, treated %s, recorded by %s at %s",
                 (long long)m->id, m->fraction_number, treated, m->recorded_by, recorded);
        printf("\n");
        cli_wrap(stdout, "", head, CLI_WIDTH);
    }
    kv("field", "%s %s, beam %s, detector %s", m->field, m->point, m->beam,
           m->detector);
    kv("reading", "%.4g %s", m->reading, m->reading_unit);
    if (isfinite(m->background))
        kv("background M0", "%.4g %s", m->background, m->reading_unit);
    kv("temperature", "%.1f degC (%s)", m->temp_c,
           m->temp_entered ? "entered" : "temperature assumed: skin-temperature setting");
    if (m->gross)
        kv("gross deviation", "beyond the plausibility bound: re-read and unit check first; a confirmed "
               "reading stands");
    if (m->calibration_id)
        kv("calibration", "#%lld, N = %.5g cGy/%s", (long long)m->calibration_id,
               m->factor_n, m->reading_unit);
    else
        kv("calibration", "none found");
    for (i = 0; i < FXL_CF_COUNT; i++)
        print_factor(cf_names[i], m->cf[i], "");
    print_factor("CF temperature", m->cf_temp, "");
    if (isfinite(m->corrected_dose_cgy))
        kv("corrected dose", "%.2f cGy", m->corrected_dose_cgy);
    else
        kv("corrected dose", "--");
    if (isfinite(m->expected_dose_cgy))
        kv("expected dose", "%.2f cGy", m->expected_dose_cgy);
    else
        kv("expected dose", "missing");
    if (isfinite(m->deviation_pct))
        kv("deviation", "%+.2f %%", m->deviation_pct);
    else
        kv("deviation", "--");
    if (m->threshold_set_id)
        kv("levels", "set '%s' v%d: tolerance %.2f %%, action %.2f %%, floor %.2f cGy", m->threshold_name, m->threshold_version, m->tolerance_pct, m->action_pct,
               m->floor_cgy);
    else
        kv("levels", "none applied");
    kv("verdict", "%s", m->verdict);
    for (i = 0; i < m->reasons.n; i++)
        kv(i == 0 ? "reasons" : "", "%s", m->reasons.text[i]);
    if (m->supersedes_id)
        kv("amends", "#%lld: %s", (long long)m->supersedes_id, m->amend_reason);
    if (m->superseded_by) {
        if (isfinite(m->superseded_deviation_pct))
            kv("SUPERSEDED by", "#%lld: %s (new result: %s, %+.2f %%)",
                   (long long)m->superseded_by, m->superseded_reason, m->superseded_verdict,
                   m->superseded_deviation_pct);
        else
            kv("SUPERSEDED by", "#%lld: %s (new result: %s)",
                   (long long)m->superseded_by, m->superseded_reason, m->superseded_verdict);
    }
}

static cJSON *measurement_json(const fxl_review_measurement *m)
{
    static const char *const cf_keys[FXL_CF_COUNT] = {"cf_field_size", "cf_ssd", "cf_wedge",
                                                      "cf_tray", "cf_angle", "cf_thickness",
                                                      "cf_sdd"};
    cJSON *o = cJSON_CreateObject(), *reasons = cJSON_CreateArray();
    int i;

    cJSON_AddNumberToObject(o, "id", (double)m->id);
    cJSON_AddNumberToObject(o, "fraction", m->fraction_number);
    cJSON_AddStringToObject(o, "treated_at", m->treated_at);
    cJSON_AddStringToObject(o, "recorded_at", m->recorded_at);
    cJSON_AddStringToObject(o, "recorded_by", m->recorded_by);
    cJSON_AddStringToObject(o, "field", m->field);
    cJSON_AddStringToObject(o, "point", m->point);
    cJSON_AddStringToObject(o, "beam", m->beam);
    cJSON_AddStringToObject(o, "detector", m->detector);
    cli_json_put_number(o, "reading", m->reading);
    cJSON_AddStringToObject(o, "reading_unit", m->reading_unit);
    cli_json_put_number(o, "temp_c", m->temp_c);
    cJSON_AddBoolToObject(o, "temp_entered", m->temp_entered);
    cJSON_AddBoolToObject(o, "temperature_assumed", !m->temp_entered);
    cli_json_put_number(o, "background", m->background);
    cJSON_AddBoolToObject(o, "gross", m->gross);
    cli_json_put_id(o, "calibration_id", m->calibration_id);
    cli_json_put_number(o, "factor_n_cgy_per_unit", m->factor_n);
    for (i = 0; i < FXL_CF_COUNT; i++)
        cli_json_put_number(o, cf_keys[i], m->cf[i]);
    cli_json_put_number(o, "cf_temp", m->cf_temp);
    cli_json_put_number(o, "corrected_dose_cgy", m->corrected_dose_cgy);
    cli_json_put_number(o, "expected_dose_cgy", m->expected_dose_cgy);
    cli_json_put_number(o, "deviation_pct", m->deviation_pct);
    cli_json_put_id(o, "threshold_set_id", m->threshold_set_id);
    cli_json_put_text(o, "threshold_name", m->threshold_name);
    cli_json_put_number(o, "tolerance_pct", m->tolerance_pct);
    cli_json_put_number(o, "action_pct", m->action_pct);
    cli_json_put_number(o, "floor_cgy", m->floor_cgy);
    cJSON_AddStringToObject(o, "verdict", m->verdict);
    for (i = 0; i < m->reasons.n; i++)
        cJSON_AddItemToArray(reasons, cJSON_CreateString(m->reasons.text[i]));
    cJSON_AddItemToObject(o, "reasons", reasons);
    cli_json_put_id(o, "supersedes_id", m->supersedes_id);
    cli_json_put_text(o, "amend_reason", m->amend_reason);
    cli_json_put_id(o, "superseded_by", m->superseded_by);
    cli_json_put_text(o, "superseded_reason", m->superseded_reason);
    cli_json_put_text(o, "superseded_verdict", m->superseded_verdict);
    return o;
}

static int queue_show(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    fxl_review_detail d = FXL_REVIEW_DETAIL_INIT;
    const char *pos[1];
    int64_t id;
    char subject[400];
    size_t i;
    int npos, rc;

    rc = cli_parse(env, "queue show ID",
                   "Shows one review item: the measurement with every factor it was judged by,\n"
                   "the history of its field (or, for an item on a detector, the detector's\n"
                   "deviations and CUSUM sums) as a small text trend, and every signed event.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("queue show needs an item id (see 'fxledger queue list')");
        return CLI_EXIT_USAGE;
    }
    if (parse_item_id(&id, pos[0]) != 0)
        return CLI_EXIT_USAGE;
    if ((rc = fxl_queue_show(env->ctx, &d, id)) != 0)
        return cli_fail(env, rc);

    if (env->json) {
        cJSON *o = item_json(&d.item), *trend = cJSON_CreateArray(), *events = cJSON_CreateArray();
        if (d.has_measurement)
            cJSON_AddItemToObject(o, "measurement", measurement_json(&d.m));
        else
            cJSON_AddNullToObject(o, "measurement");
        cJSON_AddStringToObject(o, "trend_kind", d.trend_is_detector ? "detector" : "field");
        cli_json_put_number(o, "trend_tolerance_pct", d.trend_tolerance_pct);
        cli_json_put_number(o, "trend_action_pct", d.trend_action_pct);
        if (d.trend_is_detector) {
            cli_json_put_number(o, "cusum_target_pct", d.cusum_target_pct);
            cli_json_put_number(o, "cusum_k_sd", d.cusum_k_sd);
            cli_json_put_number(o, "cusum_h_sd", d.cusum_h_sd);
            cJSON_AddNumberToObject(o, "cusum_startup", d.cusum_startup);
            cJSON_AddStringToObject(o, "series", d.trend_series);
        }
        for (i = 0; i < d.n_trend; i++) {
            const fxl_review_trend_point *t = &d.trend[i];
            cJSON *p = cJSON_CreateObject();
            cJSON_AddNumberToObject(p, "measurement_id", (double)t->measurement_id);
            cJSON_AddNumberToObject(p, "fraction", t->fraction_number);
            cJSON_AddStringToObject(p, "treated_at", t->treated_at);
            cJSON_AddStringToObject(p, "mrn", t->mrn);
            cJSON_AddStringToObject(p, "field", t->field);
            cli_json_put_number(p, "deviation_pct", t->deviation_pct);
            cJSON_AddStringToObject(p, "verdict", t->verdict);
            cJSON_AddBoolToObject(p, "superseded", t->superseded);
            cJSON_AddBoolToObject(p, "this_item", t->is_item);
            if (d.trend_is_detector) {
                cli_json_put_number(p, "cusum_high_sd", t->cusum_high);
                cli_json_put_number(p, "cusum_low_sd", t->cusum_low);
                cli_json_put_number(p, "sigma_pct", t->sigma_pct);
            }
            cJSON_AddItemToArray(trend, p);
        }
        cJSON_AddItemToObject(o, "trend", trend);
        for (i = 0; i < d.n_events; i++) {
            const fxl_review_event *e = &d.events[i];
            cJSON *p = cJSON_CreateObject();
            cJSON_AddNumberToObject(p, "id", (double)e->id);
            cJSON_AddStringToObject(p, "kind", e->kind);
            cli_json_put_text(p, "disposition", e->disposition);
            cli_json_put_text(p, "comment", e->comment);
            cJSON_AddStringToObject(p, "user", e->user);
            cJSON_AddStringToObject(p, "user_name", e->user_name);
            cJSON_AddStringToObject(p, "role", e->user_role);
            cJSON_AddStringToObject(p, "at", e->at);
            cJSON_AddItemToObject(p, "signatures", signatures_json(env, "review_events", e->id));
            cJSON_AddItemToArray(events, p);
        }
        cJSON_AddItemToObject(o, "events", events);
        fxl_review_detail_release(&d);
        return cli_print_json(o);
    }

    subject_line(subject, sizeof subject, &d.item);
    printf("%sReview item #%lld%s  [%s%s%s, %s]  rule: %s\n", cli_color(env, CLI_BOLD),
           (long long)d.item.id, cli_color(env, CLI_RESET), severity_color(env, d.item.severity),
           fxl_severity_name(d.item.severity), cli_color(env, CLI_RESET), d.item.status,
           d.item.rule);
    {
        char opened[48];
        cli_local_time(env, opened, sizeof opened, d.item.opened_at);
        printf("  opened %s (%ld day%s ago)\n", opened, d.item.age_days,
               d.item.age_days == 1 ? "" : "s");
    }
    if (d.item.patient_name[0]) {
        char line[700];
        snprintf(line, sizeof line, "patient %s (%s)%s%s%s", d.item.mrn, d.item.patient_name,
                 d.item.plan[0] ? ", plan '" : "", d.item.plan, d.item.plan[0] ? "'" : "");
        cli_wrap(stdout, "  ", line, CLI_WIDTH);
    }
    /* field, fraction and detector (the patient is on the line above) */
    if (subject[0])
        cli_wrap(stdout, "  ", d.item.patient_name[0] && strchr(subject, ',')
                                   ? strchr(subject, ',') + 2
                                   : subject, CLI_WIDTH);
    cli_wrap(stdout, "  ", d.item.summary, CLI_WIDTH);
    if (d.has_measurement)
        print_measurement(env, &d.m);
    if (d.item.field_id || d.item.detector_id)
        print_trend(env, &d);
    printf("\nEvents:\n");
    for (i = 0; i < d.n_events; i++) {
        const fxl_review_event *e = &d.events[i];
        char when[48], line[900];
        cli_local_time(env, when, sizeof when, e->at);
        snprintf(line, sizeof line, "%s  %-6s %s (%s, %s)%s%s", when, e->kind, e->user, e->user_name,
                 e->user_role, e->disposition[0] ? "; disposition: " : "", e->disposition);
        cli_wrap_hang(stdout, "  ", 6, line, CLI_WIDTH);
        if (e->comment[0])
            cli_wrap(stdout, "      ", e->comment, CLI_WIDTH);
        print_signatures(env, "review_events", e->id, "      ");
    }
    printf("\n");
    cli_print_caveat(stdout);
    fxl_review_detail_release(&d);
    return CLI_EXIT_OK;
}

/* ---- events ------------------------------------------------------------------- */

static int print_event_done(cli_env *env, int64_t id, const char *kind, const char *done)
{
    fxl_review_detail d = FXL_REVIEW_DETAIL_INIT;
    int rc = fxl_queue_show(env->ctx, &d, id);

    if (rc != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddNumberToObject(o, "id", (double)id);
        cJSON_AddStringToObject(o, "event", kind);
        cJSON_AddStringToObject(o, "status", d.item.status);
        cli_json_put_text(o, "disposition", strcmp(d.item.status, "closed") == 0 ? d.item.disposition : "");
        cJSON_AddStringToObject(o, "user", fxl_user_login(env->ctx));
        fxl_review_detail_release(&d);
        return cli_print_json(o);
    }
    printf("review item #%lld %s by %s; status now %s\n", (long long)id, done,
           fxl_user_login(env->ctx), d.item.status);
    fxl_review_detail_release(&d);
    return CLI_EXIT_OK;
}

static int queue_ack(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{"comment", "TEXT", "what was checked or done (optional)", NULL},
                      {NULL, NULL, NULL, NULL}};
    const char *pos[1];
    int64_t id;
    int npos, rc;

    rc = cli_parse(env, "queue ack ID [--comment TEXT]",
                   "Acknowledges an open item: someone has seen it and is on it. Therapists,\n"
                   "physicists and admins may acknowledge; only physicists and admins close.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("queue ack needs an item id");
        return CLI_EXIT_USAGE;
    }
    if (parse_item_id(&id, pos[0]) != 0)
        return CLI_EXIT_USAGE;
    if ((rc = fxl_review_acknowledge(env->ctx, id, cli_get(opts, "comment"))) != 0)
        return cli_fail(env, rc);
    return print_event_done(env, id, "acknowledge", "acknowledged");
}

static int queue_comment(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{"comment", "TEXT", "the comment (required), as for the other events", NULL},
                      {NULL, NULL, NULL, NULL}};
    const char *pos[2], *text;
    int64_t id;
    int npos, rc;

    rc = cli_parse(env, "queue comment ID --comment TEXT",
                   "Adds a signed comment to an item in any status (therapist, physicist, admin).\n"
                   "The text may also follow the id (queue comment ID TEXT), as before.",
                   opts, argc, argv, pos, 2, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    text = cli_get(opts, "comment");
    if (npos < 1 || npos > 2 || (npos == 2 && text) || (npos == 1 && !text)) {
        cli_error("queue comment needs an item id and --comment TEXT");
        return CLI_EXIT_USAGE;
    }
    if (npos == 2)
        text = pos[1];
    if (parse_item_id(&id, pos[0]) != 0)
        return CLI_EXIT_USAGE;
    if ((rc = fxl_review_comment(env->ctx, id, text)) != 0)
        return cli_fail(env, rc);
    return print_event_done(env, id, "comment", "commented");
}

static int queue_close(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{"disposition", "D", "the outcome, one of the configured list (required)", NULL},
                      {"comment", "TEXT", "findings and action taken (optional)", NULL},
                      {NULL, NULL, NULL, NULL}};
    const char *pos[1];
    int64_t id;
    int npos, rc;

    rc = cli_parse(env, "queue close ID --disposition D [--comment TEXT]",
                   "Closes an open or acknowledged item with a disposition (physicist or admin).\n"
                   "The dispositions are the setting 'dispositions' (comma-separated); by default:\n"
                   "set-up error, detector placement, detector fault, calibration, expected-dose\n"
                   "error, anatomy change, clinically accepted, other.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("queue close needs an item id");
        return CLI_EXIT_USAGE;
    }
    if (!cli_get(opts, "disposition")) {
        cli_error("--disposition is required (see 'fxledger queue close --help')");
        return CLI_EXIT_USAGE;
    }
    if (parse_item_id(&id, pos[0]) != 0)
        return CLI_EXIT_USAGE;
    if ((rc = cli_sign_begin(env, "review closed")) != 0)
        return rc;
    if ((rc = fxl_review_close(env->ctx, id, cli_get(opts, "disposition"), cli_get(opts, "comment"))) != 0)
        return cli_fail(env, rc);
    return print_event_done(env, id, "close", "closed");
}

static int queue_reopen(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{"comment", "TEXT", "why it is reopened (required)", NULL},
                      {NULL, NULL, NULL, NULL}};
    const char *pos[1];
    int64_t id;
    int npos, rc;

    rc = cli_parse(env, "queue reopen ID --comment TEXT",
                   "Reopens a closed item (physicist or admin); the reason is required.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("queue reopen needs an item id");
        return CLI_EXIT_USAGE;
    }
    if (!cli_get(opts, "comment")) {
        cli_error("--comment is required: say why the item is reopened");
        return CLI_EXIT_USAGE;
    }
    if (parse_item_id(&id, pos[0]) != 0)
        return CLI_EXIT_USAGE;
    if ((rc = cli_sign_begin(env, "review reopened")) != 0)
        return rc;
    if ((rc = fxl_review_reopen(env->ctx, id, cli_get(opts, "comment"))) != 0)
        return cli_fail(env, rc);
    return print_event_done(env, id, "reopen", "reopened");
}

int cmd_queue(cli_env *env, int argc, char **argv)
{
    static const cli_sub subs[] = {
        {"list", queue_list, "list review items (filters: patient, detector, status, severity, since)"},
        {"show", queue_show, "show one item: measurement, factors, field trend, events"},
        {"ack", queue_ack, "acknowledge an open item"},
        {"comment", queue_comment, "add a signed comment to an item"},
        {"close", queue_close, "close an item with a disposition (physicist, admin)"},
        {"reopen", queue_reopen, "reopen a closed item (physicist, admin)"},
        {NULL, NULL, NULL}};

    return cli_dispatch_sub(env, subs,
                            "The review queue: every result not within tolerance and every rule hit\n"
                            "opens one item; physicists work and sign them (docs/review.md).",
                            argc, argv);
}
