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
#include "cli/table.h"
#include "cli/worklist_view.h"
#include "fxl/number.h"
#include "fxl/fraction.h"
#include "fxl/readings_json.h"
#include "fxl/text.h"

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

/* The short verdict of the table; the full label and guidance follow it. */
const char *cli_verdict_short(fxl_verdict v)
{
    switch (v) {
    case FXL_VERDICT_WITHIN: return "within tol.";
    case FXL_VERDICT_OUTSIDE_TOLERANCE: return "OUTSIDE TOL.";
    case FXL_VERDICT_OUTSIDE_ACTION: return "ACTION LEVEL";
    case FXL_VERDICT_NOT_EVALUABLE: return "not evaluable";
    case FXL_VERDICT_IMPLAUSIBLE: return "implausible";
    }
    return "unknown";
}

void cli_record_field_verdict(const cli_env *env, const fxl_measurement_result *m,
                              const fxl_worklist_item *items, size_t n_items)
{
    char dev[32], line[1200], hold[600];
    int j;

    num(dev, sizeof dev, m->verdict == FXL_VERDICT_IMPLAUSIBLE ? NAN : m->deviation_pct, "%+.2f", "%");
    snprintf(line, sizeof line, "%s%s%s%s (measurement #%lld)",
             cli_color(env, verdict_color(m->verdict)), fxl_verdict_label(m->verdict),
             m->escalated ? ", escalated" : "", cli_color(env, CLI_RESET),
             (long long)m->measurement_id);
    printf("  -> ");
    if (strcmp(dev, "-") != 0)
        printf("deviation %s, ", dev);
    printf("%s\n", line);
    for (j = 0; j < m->reasons.n && j < FXL_REASONS_MAX; j++)
        cli_wrap(stdout, "     - ", m->reasons.text[j], CLI_WIDTH);
    fxl_holds_guidance(hold, sizeof hold, items, n_items);
    if (m->verdict == FXL_VERDICT_WITHIN && hold[0])
        cli_wrap(stdout, "     ", hold, CLI_WIDTH);
    else
        cli_wrap(stdout, "     What to do: ", fxl_verdict_guidance(m->verdict), CLI_WIDTH);
    if (m->review_item_id)
        printf("     Review item #%lld opened for a physicist.\n", (long long)m->review_item_id);
}

void cli_record_print_with(const cli_env *env, const fxl_record_result *r,
                           const fxl_worklist_item *items, size_t n_items)
{
    static const char *const head[] = {"#", "field", "pt", "detector", "reading", "cGy", "exp.",
                                       "dev.", "verdict", NULL};
    char t[48], reading[32], dose[24], expected[24], dev[16], id[16], verdict[40], title[900];
    char hold[600];
    fxl_midline_pair *pairs = NULL;
    size_t i, n_pairs = 0;
    int j, flagged = 0, implausible;
    double assumed_c = NAN;
    cli_table tab;

    fxl_time_show_local(env->ctx, t, sizeof t, r->treated_at);
    snprintf(title, sizeof title, "Fraction %d of %d - patient %s (%s), plan '%s' (%s, %s), treated %s",
             r->fraction_number, r->plan_fractions, r->mrn, r->patient_name, r->plan, r->site,
             r->technique, t);
    printf("%s", cli_color(env, CLI_BOLD));
    cli_wrap(stdout, "", title, CLI_WIDTH);
    printf("%s\n", cli_color(env, CLI_RESET));
    cli_table_init(&tab, head);
    tab.right[0] = tab.right[4] = tab.right[5] = tab.right[6] = tab.right[7] = 1;
    for (i = 0; i < r->n; i++) {
        const fxl_measurement_result *m = &r->items[i];
        const char *cells[9];

        snprintf(id, sizeof id, "#%lld", (long long)m->measurement_id);
        num(reading, sizeof reading, m->reading, "%.3f", m->reading_unit);
        /* An implausible entry is a probable typing or unit error, never a
         * dose result: its arithmetic stays in the record, not on screen. */
        implausible = m->verdict == FXL_VERDICT_IMPLAUSIBLE;
        num(dose, sizeof dose, implausible ? NAN : m->corrected_dose_cgy, "%.1f", NULL);
        num(expected, sizeof expected, m->expected_dose_cgy, "%.1f", NULL);
        num(dev, sizeof dev, implausible ? NAN : m->deviation_pct, "%+.2f", "%");
        snprintf(verdict, sizeof verdict, "%s%s", cli_verdict_short(m->verdict),
                 m->gross ? " gross" : m->escalated ? " esc." : "");
        cells[0] = id;
        cells[1] = m->field;
        cells[2] = strcmp(m->point, "entrance") == 0 ? "ent" : m->point;
        cells[3] = m->detector;
        cells[4] = reading;
        cells[5] = dose;
        cells[6] = expected;
        cells[7] = dev;
        cells[8] = verdict;
        cli_table_add(&tab, cells);
        if (m->verdict != FXL_VERDICT_WITHIN)
            flagged = 1;
    }
    cli_table_print(stdout, &tab, CLI_WIDTH, 0);
    cli_table_release(&tab);
    /* A temperature nobody measured is an assumption behind CF_T: say so
     * where the verdict is read (docs/hazards.md). */
    {
        char names[600] = "";
        for (i = 0, j = 0; i < r->n; i++) {
            const fxl_measurement_result *m = &r->items[i];
            size_t used = strlen(names);
            if (m->temp_entered || !isfinite(m->temp_c))
                continue;
            snprintf(names + used, sizeof names - used, "%s%s %s", j++ ? ", " : "", m->field, m->point);
            assumed_c = m->temp_c;
        }
        if (j) {
            char text[900];
            snprintf(text, sizeof text, "Temperature assumed (none entered) for %s: %.1f degC assumed (setting "
                     "skin_temp_c); give --temp with the measured value.", names, assumed_c);
            cli_wrap(stdout, "", text, CLI_WIDTH);
        }
    }
    /* Due fields the fraction was logged without, named now with the items
     * they opened (options form; the interactive form names them itself). */
    if (r->n_missing) {
        printf("\n");
        cli_record_print_missing(stdout, r);
    }
    for (i = 0; i < r->n; i++) {
        const fxl_measurement_result *m = &r->items[i];
        char line[200];

        if (m->verdict == FXL_VERDICT_WITHIN)
            continue;
        snprintf(line, sizeof line, "%s %s: %s", m->field, m->point, fxl_verdict_label(m->verdict));
        printf("\n%s", cli_color(env, verdict_color(m->verdict)));
        cli_wrap(stdout, "", line, CLI_WIDTH);
        printf("%s", cli_color(env, CLI_RESET));
        for (j = 0; j < m->reasons.n && j < FXL_REASONS_MAX; j++)
            cli_wrap(stdout, "  - ", m->reasons.text[j], CLI_WIDTH);
        cli_wrap(stdout, "  What to do: ",
                 m->gross ? fxl_gross_guidance() : fxl_verdict_guidance(m->verdict), CLI_WIDTH);
        if (m->review_item_id)
            printf("  Review item #%lld opened for a physicist.\n", (long long)m->review_item_id);
    }
    /* Beside the verdicts: what is open on this patient and the detectors
     * used; never "continue as planned" while a hold is open. */
    if (n_items) {
        printf("\nOpen on this patient and its detectors:\n");
        cli_items_print(env, stdout, items, n_items, 2);
    }
    fxl_holds_guidance(hold, sizeof hold, items, n_items);
    if (!flagged && hold[0]) {
        printf("\n");
        cli_wrap(stdout, "All results within tolerance, but: ", hold, CLI_WIDTH);
    } else if (!flagged) {
        printf("\n");
        cli_wrap(stdout, "All results within tolerance: ", fxl_verdict_guidance(FXL_VERDICT_WITHIN),
                 CLI_WIDTH);
    } else if (hold[0]) {
        printf("\n");
        cli_wrap(stdout, "", hold, CLI_WIDTH);
    }
    if (fxl_record_midlines(&pairs, &n_pairs, r) == 0) {
        cli_midline_print(pairs, n_pairs, 0);
        free(pairs);
    }
    printf("\n");
    cli_print_caveat(stdout);
}

/* The open items of the result's patient and detectors; none on error (the
 * record is written: the listing is a courtesy, printed as a warning). */
static void load_items(cli_env *env, const fxl_record_result *r, fxl_worklist_item **items,
                       size_t *n)
{
    const char *dets[FXL_RECORD_READINGS_MAX];
    size_t i, k = 0;

    *items = NULL;
    *n = 0;
    for (i = 0; i < r->n && k < FXL_RECORD_READINGS_MAX; i++)
        dets[k++] = r->items[i].detector;
    if (fxl_holds_for_patient(env->ctx, items, n, r->mrn, dets, k) != 0)
        fprintf(stderr, "fxledger: warning: open items could not be listed: %s\n",
                fxl_errmsg(env->ctx));
}

void cli_record_print_missing(FILE *out, const fxl_record_result *r)
{
    size_t i;

    for (i = 0; i < r->n_missing; i++) {
        const fxl_fraction_missing *m = &r->missing[i];
        char text[400];
        snprintf(text, sizeof text, "%s %s was due (%s) and was not measured: review item #%lld "
                 "is open for a physicist.", m->field, m->point, fxl_due_reason_text(m->due_reason),
                 (long long)m->review_item_id);
        cli_wrap(out, "Not measured: ", text, CLI_WIDTH);
    }
}

void cli_record_print(const cli_env *env, const fxl_record_result *r)
{
    fxl_worklist_item *items = NULL;
    size_t n = 0;

    load_items((cli_env *)env, r, &items, &n);
    cli_record_print_with(env, r, items, n);
    free(items);
}

cJSON *cli_record_missing_json(const fxl_record_result *r)
{
    cJSON *miss = cJSON_CreateArray();
    size_t i;

    for (i = 0; miss && i < r->n_missing; i++) {
        const fxl_fraction_missing *f = &r->missing[i];
        cJSON *m = cJSON_CreateObject();
        cJSON_AddStringToObject(m, "field", f->field);
        cJSON_AddStringToObject(m, "point", f->point);
        cJSON_AddStringToObject(m, "due_reason", fxl_due_reason_text(f->due_reason));
        cJSON_AddNumberToObject(m, "review_item_id", (double)f->review_item_id);
        cJSON_AddItemToArray(miss, m);
    }
    return miss;
}

/* Reads alert_timeout_s; an unusable value falls back to the default (the
 * hook must run even when the setting is mistyped). */
static int alert_timeout(cli_env *env)
{
    char buf[32], *end = NULL;
    long v;

    if (fxl_setting_get(env->ctx, "alert_timeout_s", buf, sizeof buf) != 0)
        return ALERT_TIMEOUT_DEFAULT_S;
    {
        double d = 0;
        (void)end;
        if (fxl_number_in_range(&d, buf, FXL_NUM_WHOLE, 1, ALERT_TIMEOUT_MAX_S) != FXL_NUM_OK)
            return ALERT_TIMEOUT_DEFAULT_S;
        v = (long)d;
    }
    return (int)v;
}

/* What the alert command wrote, on standard error, one "fxledger: alert
 * command: " line per line of its output, with control characters (escape
 * sequences, carriage returns) shown as '?' (fxl_text_printable) and bidi
 * controls too, so nothing it prints can move the cursor, clear the screen,
 * recolour or reorder what the therapist reads. At most ALERT_SHOWN_LINES. */
#define ALERT_SHOWN_LINES 10
static void show_alert_output(char *said, int more)
{
    char shown[CLI_WIDTH * 2 + 8];
    char *line = said, *nl;
    int lines = 0;

    while (line && *line) {
        long at;
        if ((nl = strchr(line, '\n')) != NULL)
            *nl = '\0';
        if (lines == ALERT_SHOWN_LINES) {
            more = 1;
            break;
        }
        /* bidi formatting characters out first, then the control characters */
        while ((at = fxl_text_bidi_at(line)) >= 0)   /* U+061C is 2 bytes, the others 3 */
            memset(line + at, '?', (unsigned char)line[at] >= 0xe0 ? 3 : 2);
        fxl_text_printable(shown, sizeof shown, line);
        fprintf(stderr, "fxledger: alert command: %s\n", shown);
        lines++;
        line = nl ? nl + 1 : NULL;
    }
    if (more)
        fprintf(stderr, "fxledger: alert command: (more output not shown)\n");
}

void cli_record_alert(cli_env *env, const fxl_record_result *r)
{
    char command[2048], said[2048];
    int said_more = 0;
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
    cli_alert_run(&outcome, &code, command, text ? text : "{}", alert_timeout(env), said,
                  sizeof said, &said_more);
    show_alert_output(said, said_more);
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

void cli_record_note_saved(cli_env *env, const fxl_record_result *r)
{
    int64_t lo = 0, hi = 0;
    size_t i;

    for (i = 0; i < r->n; i++) {
        int64_t id = r->items[i].measurement_id;
        if (!lo || id < lo)
            lo = id;
        if (id > hi)
            hi = id;
    }
    if (lo == hi)
        snprintf(env->saved, sizeof env->saved,
                 "fraction %d of patient '%s' was saved (fraction id %lld, measurement id %lld; see "
                 "'fxledger history --patient %s')", r->fraction_number, r->mrn, (long long)r->fraction_id,
                 (long long)lo, r->mrn);
    else
        snprintf(env->saved, sizeof env->saved,
                 "fraction %d of patient '%s' was saved (fraction id %lld, measurement ids %lld to %lld; "
                 "see 'fxledger history --patient %s')", r->fraction_number, r->mrn,
                 (long long)r->fraction_id, (long long)lo, (long long)hi, r->mrn);
}

int cli_record_finish(cli_env *env, const fxl_record_result *r)
{
    int code = cli_record_exit_code(r);

    cli_record_note_saved(env, r);

    if (env->json) {
        cJSON *json = fxl_record_result_json(r);
        fxl_midline_pair *pairs = NULL;
        size_t n_pairs = 0;
        if (json && fxl_record_midlines(&pairs, &n_pairs, r) == 0) {
            cJSON_AddItemToObject(json, "midline", cli_midline_json(pairs, n_pairs));
            free(pairs);
        }
        if (json)
            cJSON_AddItemToObject(json, "missing", cli_record_missing_json(r));
        if (!json || cli_print_json(json) != CLI_EXIT_OK)
            return CLI_EXIT_DB;
    } else {
        cli_record_print(env, r);
    }
    fflush(stdout);
    cli_record_alert(env, r);
    return code;
}
