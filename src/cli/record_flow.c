/* The interactive 'record': the patient from today's worklist (its line
 * number) or from --patient, the fraction begun or resumed, the holds shown
 * before the readings, then field by field - detector pre-filled, reading,
 * temperature - each field committed and its verdict shown at once, a hold
 * before the next field on an action-level result, and at the end the due
 * fields left unmeasured named with their items. docs/record.md. */
#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli/record_flow.h"
#include "cli/record_view.h"
#include "cli/table.h"
#include "cli/worklist_view.h"
#include "fxl/fraction.h"
#include "fxl/number.h"
#include "fxl/readings_json.h"
#include "fxl/text.h"
#include "fxl/worklist.h"

static FILE *prompt_out(const cli_env *env)
{
    return env->json ? stderr : stdout;
}

/* Why the last answer was refused (ask() returned -1 with it set), or "":
 * an answer too long for its buffer or holding a NUL byte is refused whole,
 * never cut and never carried over into the next prompt. */
static char refused_answer[160];

/* Reads one line without its newline and surrounding blanks into buf[size].
 * 0, -1 at end of input, or -2 when the line is longer than size - 1
 * characters or holds a NUL byte: the whole line is then read and dropped
 * (so nothing of it is taken as the answer to the next prompt). */
static int read_line(char *buf, size_t size)
{
    size_t len = 0, k;
    int c, got = 0, too_long = 0, nul = 0;

    while ((c = getchar()) != EOF) {
        got = 1;
        if (c == '\n')
            break;
        if (c == '\0')
            nul = 1;
        if (len + 1 < size)
            buf[len++] = (char)c;
        else
            too_long = 1;
    }
    buf[len] = '\0';
    if (!got)
        return -1;
    if (too_long || nul) {
        buf[0] = '\0';
        snprintf(refused_answer, sizeof refused_answer, too_long ? "an answer longer than %zu characters"
                 : "an answer holding a NUL byte", size - 1);
        return -2;
    }
    while (len && (buf[len - 1] == '\r' || buf[len - 1] == ' ' || buf[len - 1] == '\t'))
        buf[--len] = '\0';
    k = strspn(buf, " \t");
    if (k)
        memmove(buf, buf + k, len - k + 1);
    return 0;
}

static int ask(const cli_env *env, char *buf, size_t size, const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));

/* Shows the prompt and reads the answer. -1 at end of input or when the
 * answer is refused as too long (refused_answer says so). At a terminal a
 * refused answer is asked again; piped input is stopped there, because the
 * lines after it were meant for later prompts. */
static int ask(const cli_env *env, char *buf, size_t size, const char *fmt, ...)
{
    char prompt[512], shown[1024];
    va_list ap;
    FILE *out = prompt_out(env);
    int rc;

    va_start(ap, fmt);
    vsnprintf(prompt, sizeof prompt, fmt, ap);
    va_end(ap);
    refused_answer[0] = '\0';
    for (;;) {
        fputs(prompt, out);
        fflush(out);
        rc = read_line(buf, size);
        if (rc == -1) {
            fputc('\n', out);
            return -1;
        }
        if (rc == 0)
            break;
        if (!env->interactive) {
            fputc('\n', out);
            return -1;
        }
        cli_error("%s is refused (nothing of it was used): type it again", refused_answer);
        refused_answer[0] = '\0';
    }
    /* Piped answers are not echoed by a terminal: show them, so that the
     * transcript reads like the session - made printable, so that piped
     * escape sequences or invalid UTF-8 never reach the terminal raw. */
    if (!env->interactive) {
        fxl_text_printable(shown, sizeof shown, buf);
        fprintf(out, "%s\n", shown);
    }
    return 0;
}

/* Appends one logged item to the session's result (the header from the first). */
static int add_result(fxl_record_result *all, const fxl_record_result *one)
{
    fxl_measurement_result *items;

    if (one->n == 0)
        return 0;
    items = realloc(all->items, (all->n + 1) * sizeof *items);
    if (!items)
        return -1;
    if (all->n == 0) {
        fxl_measurement_result *keep = items;
        *all = *one;
        all->items = keep;
        all->n = 0;
    }
    all->items = items;
    all->items[all->n++] = one->items[0];
    return 0;
}

/* The patient from the worklist: its line number or an MRN. */
static int choose_patient(cli_env *env, char mrn[65], char plan[65])
{
    fxl_worklist w = FXL_WORKLIST_INIT;
    char line[128];
    long k;
    int rc, code = 0;
    size_t i;

    if ((rc = fxl_worklist_build(env->ctx, &w, NULL)) != 0)
        return cli_fail(env, rc);
    if (w.n == 0) {
        cli_error("no patient is under treatment today: give --patient MRN");
        code = CLI_EXIT_USAGE;
        goto cleanup;
    }
    if (env->json) {
        for (i = 0; i < w.n; i++)
            fprintf(stderr, "%2d  %s  %s\n", w.entries[i].line, w.entries[i].mrn,
                    w.entries[i].patient_name);
    } else {
        cli_worklist_print(env, &w);
        printf("\n");
    }
    for (;;) {
        double v;
        if (ask(env, line, sizeof line, "Patient: line 1-%zu or MRN: ", w.n) != 0 || !line[0]) {
            if (refused_answer[0]) {
                cli_error("%s is refused as the patient; nothing recorded", refused_answer);
                code = CLI_EXIT_DATA;
            } else {
                cli_error("no patient chosen; nothing recorded");
                code = CLI_EXIT_USAGE;
            }
            goto cleanup;
        }
        if (fxl_number_parse(&v, line, FXL_NUM_WHOLE) == FXL_NUM_OK) {
            k = (long)v;
            if (v >= 1 && v <= (double)w.n) {
                snprintf(mrn, 65, "%s", w.entries[k - 1].mrn);
                snprintf(plan, 65, "%s", w.entries[k - 1].plan);
                break;
            }
        }
        for (i = 0; i < w.n; i++)
            if (strcmp(w.entries[i].mrn, line) == 0)
                break;
        if (i < w.n) {
            snprintf(mrn, 65, "%s", w.entries[i].mrn);
            snprintf(plan, 65, "%s", w.entries[i].plan);
            break;
        }
        cli_error("'%s' is neither a line 1 to %zu nor an MRN on today's list", line, w.n);
    }
cleanup:
    fxl_worklist_release(&w);
    return code;
}

/* The detector for one field: typed, checked to exist; "" = skip the field.
 * Returns 0, or -1 at end of input. */
static int ask_detector(cli_env *env, char det[65], char unit[8], const char *def_in)
{
    char line[256], def[65];

    snprintf(def, sizeof def, "%s", def_in ? def_in : "");
    for (;;) {
        if (def[0]) {
            if (ask(env, line, sizeof line, "  detector [%s]: ", def) != 0)
                return -1;
        } else if (ask(env, line, sizeof line, "  detector serial (Enter skips the field): ") != 0) {
            return -1;
        }
        if (!line[0] && !def[0]) {
            det[0] = '\0';
            return 0;
        }
        if (strlen(line) > 64) {
            cli_error("detector serial '%.20s...' must be 1 to 64 characters", line);
            continue;
        }
        snprintf(det, 65, "%s", line[0] ? line : def);
        if (fxl_record_detector_unit(env->ctx, unit, det) == 0)
            return 0;
        cli_error("%s", fxl_errmsg(env->ctx));
    }
}

typedef struct flow_out {
    fxl_record_result all;          /* every field logged in this session */
    fxl_fraction_close_result closed;
    int closed_done;
    int stopped;                    /* stopped on a hold: fraction left open */
    int ended;                      /* input ended mid-fraction */
} flow_out;

/* Asks one field and logs it. Returns 0 (logged or skipped), -1 at end of
 * input, or an exit code > 0 on a database error. */
static int one_field(cli_env *env, const fxl_fraction_state *st, const fxl_worklist_field *f,
                     flow_out *fo, fxl_worklist_item **items, size_t *n_items, char last[65])
{
    FILE *out = prompt_out(env);
    fxl_record_result one = FXL_RECORD_RESULT_INIT;
    fxl_reading_entry e;
    char det[65] = "", unit[8] = "", line[256], head[400], exp[40];
    double reading = NAN, temp = NAN;
    int rc;

    if (isfinite(f->expected_dose_cgy))
        snprintf(exp, sizeof exp, "expected %.1f cGy", f->expected_dose_cgy);
    else
        snprintf(exp, sizeof exp, "no expected dose");
    snprintf(head, sizeof head, "Field %s %s: beam %s, %.0f MU, %s%s%s.", f->name, f->point, f->beam,
             f->mu, exp, f->due_reason != FXL_DUE_NOT ? "; due: " : "",
             f->due_reason != FXL_DUE_NOT ? fxl_due_reason_text(f->due_reason) : "");
    fputc('\n', out);
    cli_wrap(out, "", head, CLI_WIDTH);
    snprintf(det, sizeof det, "%s", f->detector[0] ? f->detector : last);
    if (det[0] && f->detector_ok && fxl_record_detector_unit(env->ctx, unit, det) == 0) {
        fprintf(out, "  place %s at the %s\n", det, f->point);
    } else {
        if (f->detector_warning[0] && (f->detector[0] || !det[0]))
            cli_wrap(out, "  (!) ", f->detector_warning, CLI_WIDTH);
        if (ask_detector(env, det, unit, det) != 0)
            return -1;
        if (!det[0]) {
            fprintf(out, "  skipped\n");
            return 0;
        }
    }
    for (;;) {
        char *end = NULL;
        if (ask(env, line, sizeof line, "  reading %s (Enter skips, d: other detector): ", unit) != 0)
            return -1;
        if (!line[0]) {
            fprintf(out, "  skipped\n");
            return 0;
        }
        if (strcmp(line, "d") == 0 || strcmp(line, "D") == 0) {
            if (ask_detector(env, det, unit, det) != 0)
                return -1;
            if (!det[0]) {
                fprintf(out, "  skipped\n");
                return 0;
            }
            continue;
        }
        (void)end;
        if (fxl_number_parse(&reading, line, 0) == FXL_NUM_OK && reading > 0)
            break;
        cli_error("reading '%s' for field '%s' must be a number > 0 %s", line, f->name, unit);
    }
    for (;;) {
        if (ask(env, line, sizeof line, "  temperature degC [%g]: ", st->skin_temp_c) != 0)
            return -1;
        if (!line[0])
            break;  /* not entered: the skin-temperature setting applies */
        if (cli_double(&temp, line, "temperature", FXL_RECORD_TEMP_MIN_C, FXL_RECORD_TEMP_MAX_C,
                       "degC") == 0)
            break;
        temp = NAN;
    }
    fxl_reading_entry_init(&e);
    e.field = f->name;
    e.point = f->point;
    e.detector = det;
    e.reading = reading;
    e.temp_c = temp;
    if ((rc = fxl_fraction_log_field(env->ctx, &one, st->fraction_id, &e)) != 0) {
        /* Nothing of this field was written; the fields before it stay. */
        cli_error("%s; fraction %d stays open with the fields saved so far", fxl_errmsg(env->ctx),
                  st->fraction_number);
        return cli_exit_code(rc);
    }
    snprintf(last, 65, "%s", det);
    /* The items as they stand now (this result's own item included). */
    free(*items);
    *items = NULL;
    *n_items = 0;
    {
        const char *dets[1] = {det};
        if (fxl_holds_for_patient(env->ctx, items, n_items, st->mrn, dets, 1) != 0)
            fprintf(stderr, "fxledger: warning: open items could not be listed: %s\n",
                    fxl_errmsg(env->ctx));
    }
    if (!env->json) {
        cli_record_field_verdict(env, &one.items[0], *items, *n_items);
        fflush(stdout);
    }
    cli_record_alert(env, &one);
    if (add_result(&fo->all, &one) != 0) {
        fxl_record_result_release(&one);
        cli_error("out of memory");
        return CLI_EXIT_DB;
    }
    cli_record_note_saved(env, &fo->all);
    if (one.items[0].verdict == FXL_VERDICT_OUTSIDE_ACTION) {
        fprintf(out, "\n%sHOLD TREATMENT: do not deliver the next field.%s Call the physicist now.\n",
                cli_color(env, CLI_RED), cli_color(env, CLI_RESET));
        if (ask(env, line, sizeof line, "  Go on logging fields already delivered? [y/N]: ") != 0)
            return -1;
        if (line[0] != 'y' && line[0] != 'Y')
            fo->stopped = 1;
    }
    fxl_record_result_release(&one);
    return 0;
}

static cJSON *session_json(const flow_out *fo, const fxl_fraction_state *st,
                           const fxl_worklist_item *items, size_t n_items)
{
    cJSON *j = fo->all.n ? fxl_record_result_json(&fo->all) : cJSON_CreateObject(), *miss;
    size_t i;

    if (!j)
        return NULL;
    if (!fo->all.n) {
        cJSON_AddStringToObject(j, "patient", st->mrn);
        cJSON_AddStringToObject(j, "plan", st->plan);
        cJSON_AddNumberToObject(j, "fraction", st->fraction_number);
    }
    cJSON_AddBoolToObject(j, "fraction_closed", fo->closed_done);
    miss = cJSON_AddArrayToObject(j, "missing");
    for (i = 0; i < fo->closed.n_missing; i++) {
        cJSON *m = cJSON_CreateObject();
        cJSON_AddStringToObject(m, "field", fo->closed.missing[i].field);
        cJSON_AddStringToObject(m, "point", fo->closed.missing[i].point);
        cJSON_AddStringToObject(m, "due_reason", fxl_due_reason_text(fo->closed.missing[i].due_reason));
        cJSON_AddNumberToObject(m, "review_item_id", (double)fo->closed.missing[i].review_item_id);
        cJSON_AddItemToArray(miss, m);
    }
    cJSON_AddItemToObject(j, "open_items", fxl_worklist_items_json(items, n_items));
    return j;
}

int cli_record_flow(cli_env *env, const cli_flow_args *a)
{
    FILE *out = prompt_out(env);
    fxl_fraction_begin_request req;
    fxl_fraction_state st = FXL_FRACTION_STATE_INIT;
    fxl_worklist_item *items = NULL;
    flow_out fo;
    char mrn[65] = "", plan[65] = "", last[65] = "", head[900], when[48];
    const fxl_worklist_field **ask_list = NULL;
    size_t i, n_ask = 0, n_items = 0, n_measured = 0;
    int rc, code = CLI_EXIT_OK, any_due = 0;

    memset(&fo, 0, sizeof fo);
    if (a->patient) {
        snprintf(mrn, sizeof mrn, "%s", a->patient);
        if (a->plan)
            snprintf(plan, sizeof plan, "%s", a->plan);
    } else if ((code = choose_patient(env, mrn, plan)) != 0) {
        goto cleanup;
    }
    memset(&req, 0, sizeof req);
    req.mrn = mrn;
    req.plan = plan[0] ? plan : NULL;
    req.fraction = a->fraction;
    req.treated_at = a->treated_at;
    if ((rc = fxl_fraction_begin(env->ctx, &st, &req)) != 0) {
        code = cli_fail(env, rc);
        goto cleanup;
    }
    if (a->def_detector)
        snprintf(last, sizeof last, "%s", a->def_detector);
    for (i = 0; i < st.n_fields; i++) {
        if (st.fields[i].measured)
            n_measured++;
        if (st.fields[i].due_reason != FXL_DUE_NOT)
            any_due = 1;
    }
    fxl_time_show_local(env->ctx, when, sizeof when, st.treated_at);
    snprintf(head, sizeof head, "%s (%s), plan '%s' (%s, %s): fraction %d of %d, %s%s", st.mrn,
             st.patient_name, st.plan, st.site, st.technique, st.fraction_number, st.plan_fractions,
             when, st.resumed ? ", resumed" : "");
    fputc('\n', out);
    fprintf(out, "%s", cli_color(env, CLI_BOLD));
    cli_wrap(out, "", head, CLI_WIDTH);
    fprintf(out, "%s", cli_color(env, CLI_RESET));
    if (st.resumed && n_measured)
        fprintf(out, "%zu field%s already logged in this fraction.\n", n_measured,
                n_measured == 1 ? "" : "s");
    /* Before the readings: holds and open items. */
    items = st.items;
    n_items = st.n_items;
    st.items = NULL;
    st.n_items = 0;
    if (n_items) {
        fprintf(out, "\n");
        cli_items_print(env, out, items, n_items, 0);
    }
    if (!(ask_list = calloc(st.n_fields ? st.n_fields : 1, sizeof *ask_list))) {
        cli_error("out of memory");
        code = CLI_EXIT_DB;
        goto cleanup;
    }
    for (i = 0; i < st.n_fields; i++)
        if (!st.fields[i].measured && (!any_due || st.fields[i].due_reason != FXL_DUE_NOT))
            ask_list[n_ask++] = &st.fields[i];
    fprintf(out, "\n%zu field%s to log%s. Enter accepts the value in brackets.\n", n_ask,
            n_ask == 1 ? "" : "s", any_due ? " (due today)" : "");
    for (i = 0; i < n_ask && !fo.stopped; i++) {
        rc = one_field(env, &st, ask_list[i], &fo, &items, &n_items, last);
        if (rc < 0) {
            fo.ended = 1;
            break;
        }
        if (rc > 0) {
            code = rc;
            goto cleanup;
        }
    }
    if (fo.ended) {
        cli_error("%s%s: the %zu field%s entered %s saved; fraction %d stays open - run "
                  "'fxledger record --patient %s' to go on", refused_answer[0] ? refused_answer : "input ended",
                  refused_answer[0] ? " is refused and the input after it is not read" : "",
                  fo.all.n, fo.all.n == 1 ? "" : "s", fo.all.n == 1 ? "is" : "are", st.fraction_number,
                  st.mrn);
        code = refused_answer[0] ? CLI_EXIT_DATA : CLI_EXIT_USAGE;
        goto cleanup;
    }
    if (!fo.stopped) {
        if ((rc = fxl_fraction_close(env->ctx, &fo.closed, st.fraction_id)) != 0) {
            code = cli_fail(env, rc);
            goto cleanup;
        }
        fo.closed_done = 1;
    }
    /* The items as they stand after the close. */
    {
        const char **dets = calloc(fo.all.n + 1, sizeof *dets);
        free(items);
        items = NULL;
        n_items = 0;
        for (i = 0; dets && i < fo.all.n; i++)
            dets[i] = fo.all.items[i].detector;
        if (fxl_holds_for_patient(env->ctx, &items, &n_items, st.mrn, dets, fo.all.n) != 0)
            fprintf(stderr, "fxledger: warning: open items could not be listed: %s\n",
                    fxl_errmsg(env->ctx));
        free(dets);
    }
    if (env->json) {
        cJSON *j = session_json(&fo, &st, items, n_items);
        if (!j || cli_print_json(j) != CLI_EXIT_OK) {
            code = CLI_EXIT_DB;
            goto cleanup;
        }
    } else {
        printf("\n");
        if (fo.stopped)
            cli_wrap(stdout, "", "Stopped on a hold: the fraction stays open. After the physicist "
                     "has cleared the hold, run 'fxledger record' again to log the remaining fields.",
                     CLI_WIDTH);
        else
            printf("Fraction %d closed: %zu field%s measured.\n", st.fraction_number,
                   fo.closed.n_measured, fo.closed.n_measured == 1 ? "" : "s");
        for (i = 0; i < fo.closed.n_missing; i++) {
            char text[400];
            snprintf(text, sizeof text, "%s %s was due (%s) and was not measured: review item #%lld "
                     "is open for a physicist.", fo.closed.missing[i].field, fo.closed.missing[i].point,
                     fxl_due_reason_text(fo.closed.missing[i].due_reason),
                     (long long)fo.closed.missing[i].review_item_id);
            cli_wrap(stdout, "Not measured: ", text, CLI_WIDTH);
        }
        printf("\n");
        if (fo.all.n)
            cli_record_print_with(env, &fo.all, items, n_items);
        else
            cli_print_caveat(stdout);
    }
    code = fo.all.n ? cli_record_exit_code(&fo.all) : CLI_EXIT_OK;
cleanup:
    free(ask_list);
    free(items);
    fxl_fraction_state_release(&st);
    fxl_fraction_close_release(&fo.closed);
    fxl_record_result_release(&fo.all);
    return code;
}
