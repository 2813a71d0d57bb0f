/* The therapist's view of a logged fraction: verdict table, reasons and
 * plain guidance, caveat, JSON; the worst result as exit code; the alert
 * hook after the commit with its outcome audited. No SQL, no physics. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli/alert.h"
#include "cli/midline_view.h"
#include "cli/record_view.h"
#include "fxl/readings_json.h"

/* Bounds of setting alert_timeout_s (docs/settings.md default 10 s). */
#define ALERT_TIMEOUT_DEFAULT_S 10
#define ALERT_TIMEOUT_MAX_S 600

int cli_record_exit_code(const fxl_record_result *r)
{
    int worst = 0;
    size_t i;

    for (i = 0; i < r->n; i++) {
        int rank = fxl_verdict_rank(r->items[i].verdict);
        if (rank > worst)
            worst = rank;
    }
    switch (worst) {
    case 3: return CLI_EXIT_ACTION;
    case 2: return CLI_EXIT_TOLERANCE;
    case 1: return CLI_EXIT_NOT_EVALUABLE;
    }
    return CLI_EXIT_OK;
}

static const char *verdict_color(fxl_verdict v)
{
    switch (v) {
    case FXL_VERDICT_WITHIN: return CLI_GREEN;
    case FXL_VERDICT_OUTSIDE_ACTION: return CLI_RED;
    default: return CLI_YELLOW;
    }
}

static void num(char *buf, size_t size, double v, const char *fmt, const char *unit)
{
    if (!isfinite(v)) {
        snprintf(buf, size, "-");
        return;
    }
    snprintf(buf, size, fmt, v);
    if (unit && *unit) {
        size_t used = strlen(buf);
        snprintf(buf + used, size - used, " %s", unit);
    }
}

/* "2026-11-02 09:00 UTC" from the stored form. */
static void when(char *buf, size_t size, const char *stored)
{
    if (strlen(stored) >= 16)
        snprintf(buf, size, "%.10s %.5s UTC", stored, stored + 11);
    else
        snprintf(buf, size, "%s", stored);
}

void cli_record_print(const cli_env *env, const fxl_record_result *r)
{
    char t[40], reading[32], dose[24], expected[24], dev[16], id[16];
    fxl_midline_pair *pairs = NULL;
    size_t i, n_pairs = 0;
    int j, flagged = 0, implausible;
    double assumed_c = NAN;

    when(t, sizeof t, r->treated_at);
    printf("%sFraction %d of %d%s - patient %s (%s), plan '%s' (%s, %s), treated %s\n\n",
           cli_color(env, CLI_BOLD), r->fraction_number, r->plan_fractions, cli_color(env, CLI_RESET),
           r->mrn, r->patient_name, r->plan, r->site, r->technique, t);
    printf("%-6s %-12s %-9s %-12s %-14s %-12s %-12s %-10s %s\n", "id", "field", "point", "detector",
           "reading", "corrected", "expected", "deviation", "verdict");
    for (i = 0; i < r->n; i++) {
        const fxl_measurement_result *m = &r->items[i];

        snprintf(id, sizeof id, "#%lld", (long long)m->measurement_id);
        num(reading, sizeof reading, m->reading, "%.3f", m->reading_unit);
        /* An implausible entry is a probable typing or unit error, never a
         * dose result: its arithmetic stays in the record, not on screen. */
        implausible = m->verdict == FXL_VERDICT_IMPLAUSIBLE;
        num(dose, sizeof dose, implausible ? NAN : m->corrected_dose_cgy, "%.1f", "cGy");
        num(expected, sizeof expected, m->expected_dose_cgy, "%.1f", "cGy");
        num(dev, sizeof dev, implausible ? NAN : m->deviation_pct, "%+.2f", "%");
        printf("%-6s %-12s %-9s %-12s %-14s %-12s %-12s %-10s %s%s%s%s\n", id, m->field, m->point,
               m->detector, reading, dose, expected, dev, cli_color(env, verdict_color(m->verdict)),
               fxl_verdict_label(m->verdict),
               m->gross ? " (gross)" : m->escalated ? " (escalated)" : "",
               cli_color(env, CLI_RESET));
        if (m->verdict != FXL_VERDICT_WITHIN)
            flagged = 1;
    }
    /* A temperature nobody measured is an assumption behind CF_T: say so
     * where the verdict is read (docs/hazards.md). */
    for (i = 0, j = 0; i < r->n; i++) {
        const fxl_measurement_result *m = &r->items[i];

        if (m->temp_entered || !isfinite(m->temp_c))
            continue;
        printf("%s%s %s", j++ ? ", " : "Temperature assumed (none entered) for ", m->field, m->point);
        assumed_c = m->temp_c;
    }
    if (j)
        printf(": %.1f degC assumed (setting skin_temp_c); give --temp with the measured value.\n",
               assumed_c);
    for (i = 0; i < r->n; i++) {
        const fxl_measurement_result *m = &r->items[i];

        if (m->verdict == FXL_VERDICT_WITHIN)
            continue;
        printf("\n%s%s %s: %s%s\n", cli_color(env, verdict_color(m->verdict)), m->field, m->point,
               fxl_verdict_label(m->verdict), cli_color(env, CLI_RESET));
        for (j = 0; j < m->reasons.n && j < FXL_REASONS_MAX; j++)
            printf("  - %s\n", m->reasons.text[j]);
        printf("  What to do: %s\n",
               m->gross ? fxl_gross_guidance() : fxl_verdict_guidance(m->verdict));
        if (m->review_item_id)
            printf("  Review item #%lld opened for a physicist.\n", (long long)m->review_item_id);
    }
    if (!flagged)
        printf("\nAll results within tolerance: %s\n", fxl_verdict_guidance(FXL_VERDICT_WITHIN));
    if (fxl_record_midlines(&pairs, &n_pairs, r) == 0) {
        cli_midline_print(pairs, n_pairs, 0);
        free(pairs);
    }
    printf("\n");
    cli_print_caveat(stdout);
}

/* Reads alert_timeout_s; an unusable value falls back to the default (the
 * hook must run even when the setting is mistyped). */
static int alert_timeout(cli_env *env)
{
    char buf[32], *end = NULL;
    long v;

    if (fxl_setting_get(env->ctx, "alert_timeout_s", buf, sizeof buf) != 0)
        return ALERT_TIMEOUT_DEFAULT_S;
    v = strtol(buf, &end, 10);
    if (end == buf || *end != '\0' || v < 1 || v > ALERT_TIMEOUT_MAX_S)
        return ALERT_TIMEOUT_DEFAULT_S;
    return (int)v;
}

static void run_alert(cli_env *env, const fxl_record_result *r)
{
    char command[2048];
    fxl_alert_outcome outcome;
    cJSON *json = NULL;
    char *text = NULL;
    int n_action = 0, code = 0, rc;
    size_t i;

    for (i = 0; i < r->n; i++)
        if (r->items[i].verdict == FXL_VERDICT_OUTSIDE_ACTION)
            n_action++;
    if (n_action == 0)
        return;
    if (fxl_setting_get(env->ctx, "alert_command", command, sizeof command) != 0 || !command[0])
        return;
    json = fxl_record_result_json(r);
    if (json) {
        cJSON_AddStringToObject(json, "event", "outside_action_level");
        cJSON_AddNumberToObject(json, "action_results", n_action);
        text = cJSON_Print(json);
    }
    cli_alert_run(&outcome, &code, command, text ? text : "{}", alert_timeout(env));
    rc = fxl_record_alert_outcome(env->ctx, r->fraction_id, command, outcome, code, n_action);
    if (outcome == FXL_ALERT_TIMED_OUT)
        fprintf(stderr, "fxledger: warning: the alert command did not finish within %d s and was "
                        "stopped; the record is saved - call the physicist directly\n",
                alert_timeout(env));
    else if (outcome == FXL_ALERT_NOT_STARTED)
        fprintf(stderr, "fxledger: warning: the alert command could not be started; the record is "
                        "saved - call the physicist directly\n");
    else if (outcome == FXL_ALERT_FAILED && code < 0)
        fprintf(stderr, "fxledger: warning: the alert command was killed by signal %d; the record "
                        "is saved - call the physicist directly\n", -code);
    else if (outcome == FXL_ALERT_FAILED)
        fprintf(stderr, "fxledger: warning: the alert command failed (exit %d); the record is saved "
                        "- call the physicist directly\n", code);
    if (rc != 0)
        fprintf(stderr, "fxledger: warning: the alert outcome could not be written to the audit log: "
                        "%s\n", fxl_errmsg(env->ctx));
    free(text);
    cJSON_Delete(json);
}

int cli_record_finish(cli_env *env, const fxl_record_result *r)
{
    int code = cli_record_exit_code(r);

    if (env->json) {
        cJSON *json = fxl_record_result_json(r);
        fxl_midline_pair *pairs = NULL;
        size_t n_pairs = 0;
        if (json && fxl_record_midlines(&pairs, &n_pairs, r) == 0) {
            cJSON_AddItemToObject(json, "midline", cli_midline_json(pairs, n_pairs));
            free(pairs);
        }
        if (!json || cli_print_json(json) != CLI_EXIT_OK)
            return CLI_EXIT_DB;
    } else {
        cli_record_print(env, r);
    }
    fflush(stdout);
    run_alert(env, r);
    return code;
}
