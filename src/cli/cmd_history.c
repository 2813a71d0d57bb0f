/* fxledger history: every logged measurement of a patient, superseded rows
 * included and marked, as a table or JSON. docs/record.md. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli/cli.h"
#include "cli/table.h"
#include "fxl/fraction.h"
#include "cli/json_put.h"
#include "cli/midline_view.h"
#include "cli/record_view.h"
#include "fxl/record.h"

static void num(char *buf, size_t size, double v, const char *fmt, const char *unit)
{
    size_t used;

    if (!isfinite(v)) {
        snprintf(buf, size, "-");
        return;
    }
    snprintf(buf, size, fmt, v);
    used = strlen(buf);
    if (unit && *unit)
        snprintf(buf + used, size - used, " %s", unit);
}

static cJSON *row_json(const fxl_history_row *r)
{
    cJSON *o = cJSON_CreateObject(), *cf, *reasons;
    int i;

    cli_json_put_id(o, "measurement_id", r->measurement_id);
    cli_json_put_id(o, "fraction_id", r->fraction_id);
    cJSON_AddNumberToObject(o, "fraction", r->fraction_number);
    cJSON_AddStringToObject(o, "plan", r->plan);
    cJSON_AddStringToObject(o, "treated_at", r->treated_at);
    cJSON_AddStringToObject(o, "recorded_at", r->recorded_at);
    cJSON_AddStringToObject(o, "recorded_by", r->recorded_by);
    cJSON_AddStringToObject(o, "field", r->field);
    cJSON_AddStringToObject(o, "point", r->point);
    cJSON_AddStringToObject(o, "detector", r->detector);
    cli_json_put_number(o, "reading", r->reading);
    cJSON_AddStringToObject(o, "reading_unit", r->reading_unit);
    cli_json_put_number(o, "temp_c", r->temp_c);
    cJSON_AddBoolToObject(o, "temp_entered", r->temp_entered);
    cJSON_AddBoolToObject(o, "temperature_assumed", !r->temp_entered);
    cli_json_put_number(o, "background", r->background);
    cJSON_AddBoolToObject(o, "gross", r->gross);
    cli_json_put_id(o, "calibration_id", r->calibration_id);
    cli_json_put_number(o, "factor_n_cgy_per_unit", r->factor_n);
    cf = cJSON_AddObjectToObject(o, "factors");
    for (i = 0; i < FXL_CF_COUNT; i++)
        cli_json_put_number(cf, fxl_cf_name((fxl_cf_param)i), r->cf[i]);
    cli_json_put_number(cf, "temp", r->cf_temp);
    cli_json_put_number(o, "corrected_dose_cgy", r->corrected_dose_cgy);
    cli_json_put_number(o, "expected_dose_cgy", r->expected_dose_cgy);
    cli_json_put_number(o, "deviation_pct", r->deviation_pct);
    cli_json_put_id(o, "threshold_set_id", r->threshold_set_id);
    cli_json_put_number(o, "tolerance_pct", r->tolerance_pct);
    cli_json_put_number(o, "action_pct", r->action_pct);
    cli_json_put_number(o, "floor_cgy", r->floor_cgy);
    cJSON_AddStringToObject(o, "verdict", fxl_verdict_name(r->verdict));
    reasons = cJSON_AddArrayToObject(o, "reasons");
    for (i = 0; i < r->reasons.n && i < FXL_REASONS_MAX; i++)
        cJSON_AddItemToArray(reasons, cJSON_CreateString(r->reasons.text[i]));
    cli_json_put_id(o, "supersedes_id", r->supersedes_id);
    if (r->supersedes_id)
        cJSON_AddStringToObject(o, "amend_reason", r->amend_reason);
    cli_json_put_id(o, "superseded_by", r->superseded_by);
    cJSON_AddBoolToObject(o, "current", r->superseded_by == 0);
    return o;
}

int cmd_history(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"patient", "MRN", "patient (required)", NULL},
        {"plan", "LABEL", "only this plan (default: every plan of the patient)", NULL},
        {"field", "NAME", "only this field", NULL},
        {NULL, NULL, NULL, NULL}};
    fxl_history_query q;
    fxl_history_row *rows = NULL;
    fxl_midline_pair *pairs = NULL;
    const char *pos[1];
    size_t n = 0, n_pairs = 0, i;
    int npos, rc;

    rc = cli_parse(env, "history --patient MRN [--plan LABEL] [--field NAME]",
                   "Lists every logged measurement of a patient, oldest first: treatment date,\n"
                   "fraction, field, point, detector, reading, corrected and expected dose,\n"
                   "deviation and verdict. A mistyped reading stays listed, marked 'superseded\n"
                   "by #id'; its amendment is marked 'amends #id'. When a field has a current\n"
                   "entrance and exit reading in one fraction, the midline dose estimated from\n"
                   "the two corrected doses follows the table (method named). --json adds every\n"
                   "factor, the levels used and the reasons, and on both rows of a pair its\n"
                   "midline estimate under 'midline' (null on other rows).",
                   opts, argc, argv, pos, 0, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    memset(&q, 0, sizeof q);
    q.mrn = cli_get(opts, "patient");
    q.plan = cli_get(opts, "plan");
    q.field = cli_get(opts, "field");
    if (!q.mrn) {
        cli_error("--patient MRN is required");
        return CLI_EXIT_USAGE;
    }
    if ((rc = fxl_history_list(env->ctx, &rows, &n, &q)) != 0)
        return cli_fail(env, rc);
    if (fxl_history_midlines(&pairs, &n_pairs, rows, n) != 0) {
        free(rows);
        cli_error("out of memory pairing entrance and exit readings");
        return CLI_EXIT_DB;
    }

    if (env->json) {
        cJSON *arr = cJSON_CreateArray();
        for (i = 0; i < n; i++) {
            cJSON *o = row_json(&rows[i]), *pair = NULL;
            size_t k;
            for (k = 0; k < n_pairs && !pair; k++)
                if (pairs[k].entrance_id == rows[i].measurement_id || pairs[k].exit_id == rows[i].measurement_id) {
                    cJSON *one = cli_midline_json(&pairs[k], 1);
                    pair = cJSON_DetachItemFromArray(one, 0);
                    cJSON_Delete(one);
                }
            if (pair)
                cJSON_AddItemToObject(o, "midline", pair);
            else
                cJSON_AddNullToObject(o, "midline");
            cJSON_AddItemToArray(arr, o);
        }
        free(rows);
        free(pairs);
        return cli_print_json(arr);
    }
    if (n == 0) {
        printf("no measurements logged for patient %s%s%s%s%s%s\n", q.mrn, q.plan ? ", plan '" : "",
               q.plan ? q.plan : "", q.plan ? "'" : "", q.field ? ", field " : "", q.field ? q.field : "");
        free(rows);
        return CLI_EXIT_OK;
    }
    {
        static const char *const head[] = {"#", "date", "plan", "fx", "field", "pt", "detector",
                                           "reading", "cGy", "exp.", "dev %", "verdict", NULL};
        cli_table t;

        int one_plan = 1;
        for (i = 1; i < n; i++)
            if (strcmp(rows[i].plan, rows[0].plan) != 0)
                one_plan = 0;
        if (one_plan)
            printf("Plan '%s':\n", rows[0].plan);
        cli_table_init(&t, head);
        t.right[0] = t.right[3] = t.right[7] = t.right[8] = t.right[9] = t.right[10] = 1;
        t.gap = 1;
        for (i = 0; i < n; i++) {
            const fxl_history_row *r = &rows[i];
            char id[16], when[48], reading[32], dose[20], expected[20], dev[16], fx[12];
            const char *cells[12];

            snprintf(id, sizeof id, "#%lld", (long long)r->measurement_id);
            fxl_time_show_local(env->ctx, when, sizeof when, r->treated_at);
            when[10] = '\0';   /* the local date; times with their offset: --json, queue show */
            num(reading, sizeof reading, r->reading, "%.3f", r->reading_unit);
            num(dose, sizeof dose, r->corrected_dose_cgy, "%.1f", NULL);
            num(expected, sizeof expected, r->expected_dose_cgy, "%.1f", NULL);
            num(dev, sizeof dev, r->deviation_pct, "%+.2f", NULL);
            snprintf(fx, sizeof fx, "%d", r->fraction_number);
            cells[0] = id;
            cells[1] = when;
            cells[2] = one_plan ? "" : r->plan;   /* an empty column is left out */
            cells[3] = fx;
            cells[4] = r->field;
            cells[5] = strcmp(r->point, "entrance") == 0 ? "ent" : r->point;
            cells[6] = r->detector;
            cells[7] = reading;
            cells[8] = dose;
            cells[9] = expected;
            cells[10] = dev;
            cells[11] = cli_verdict_short(r->verdict);
            cli_table_add(&t, cells);
        }
        cli_table_print(stdout, &t, CLI_WIDTH, 0);
        cli_table_release(&t);
        /* Amendments under the table, wrapped: a reason can be long. */
        for (i = 0; i < n; i++) {
            const fxl_history_row *r = &rows[i];
            char note[700] = "", lead[24];
            if (r->superseded_by)
                snprintf(note, sizeof note, "superseded by #%lld", (long long)r->superseded_by);
            if (r->supersedes_id) {
                size_t used = strlen(note);
                snprintf(note + used, sizeof note - used, "%samends #%lld: %s", used ? "; " : "",
                         (long long)r->supersedes_id, r->amend_reason);
            }
            if (r->gross) {
                size_t used = strlen(note);
                snprintf(note + used, sizeof note - used, "%sgross deviation", used ? "; " : "");
            }
            if (!r->temp_entered) {
                size_t used = strlen(note);
                snprintf(note + used, sizeof note - used, "%stemperature assumed", used ? "; " : "");
            }
            if (!note[0])
                continue;
            snprintf(lead, sizeof lead, "#%lld: ", (long long)r->measurement_id);
            cli_wrap_hang(stdout, lead, 4, note, CLI_WIDTH);
        }

    }
    printf("\n%zu measurement%s.\n", n, n == 1 ? "" : "s");
    cli_midline_print(pairs, n_pairs, 1);
    free(rows);
    free(pairs);
    return CLI_EXIT_OK;
}
