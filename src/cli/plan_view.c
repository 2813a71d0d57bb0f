/* Showing plans and what the independent model said about each field at
 * import: JSON objects, the import report and the model lines of 'plan
 * show'. No SQL, no physics: the values shown were computed and stored by
 * the import (docs/expected-dose.md). */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli/json_put.h"
#include "cli/plan_view.h"
#include "cli/table.h"

cJSON *cli_plan_json(const fxl_plan *p)
{
    cJSON *o = cJSON_CreateObject();

    cJSON_AddNumberToObject(o, "id", (double)p->id);
    cJSON_AddStringToObject(o, "patient_mrn", p->mrn);
    cJSON_AddStringToObject(o, "label", p->label);
    cJSON_AddStringToObject(o, "site", p->site);
    cJSON_AddStringToObject(o, "technique", p->technique);
    cJSON_AddNumberToObject(o, "fractions", p->fractions);
    cli_json_put_number(o, "dose_per_fraction_cgy", p->dose_per_fraction_cgy);
    cli_json_put_text(o, "replaces", p->replaces_label);
    cli_json_put_text(o, "replaced_by", p->replaced_by_label);
    cJSON_AddStringToObject(o, "source", p->source);
    cJSON_AddNumberToObject(o, "field_rows", (double)p->n_fields);
    cJSON_AddNumberToObject(o, "fractions_logged", p->fractions_logged);
    cJSON_AddStringToObject(o, "imported_by", p->created_by);
    cJSON_AddStringToObject(o, "imported_at", p->created_at);
    return o;
}

cJSON *cli_field_json(const fxl_field *f)
{
    cJSON *o = cJSON_CreateObject(), *model = NULL, *xc;

    cJSON_AddNumberToObject(o, "id", (double)f->id);
    cJSON_AddStringToObject(o, "name", f->name);
    cJSON_AddStringToObject(o, "point", f->point);
    cJSON_AddStringToObject(o, "machine", f->machine);
    cJSON_AddStringToObject(o, "beam", f->beam);
    cJSON_AddStringToObject(o, "modality", f->modality);
    cJSON_AddNumberToObject(o, "energy", f->energy);
    cJSON_AddStringToObject(o, "setup", f->setup);
    cJSON_AddNumberToObject(o, "mu", f->mu);
    cJSON_AddNumberToObject(o, "ssd_cm", f->ssd_cm);
    cJSON_AddNumberToObject(o, "x_cm", f->x_cm);
    cJSON_AddNumberToObject(o, "y_cm", f->y_cm);
    cJSON_AddNumberToObject(o, "wedge_deg", f->wedge_deg);
    cJSON_AddBoolToObject(o, "tray", f->tray);
    cJSON_AddNumberToObject(o, "gantry_deg", f->gantry_deg);
    cJSON_AddNumberToObject(o, "incidence_deg", f->incidence_deg);
    cli_json_put_number(o, "thickness_cm", f->thickness_cm);
    cli_json_put_number(o, "expected_dose_cgy", f->expected_dose_cgy);
    cli_json_put_text(o, "expected_source", f->expected_source);
    cJSON_AddStringToObject(o, "policy", f->policy);
    cli_json_put_number(o, "model_dose_cgy", f->model_dose_cgy);
    cli_json_put_id(o, "model_beam_data_id", f->model_beam_data_id);
    if (!f->crosscheck[0]) {
        cJSON_AddNullToObject(o, "crosscheck");
        cJSON_AddNullToObject(o, "model");
        return o;
    }
    xc = cJSON_AddObjectToObject(o, "crosscheck");
    cJSON_AddStringToObject(xc, "outcome", f->crosscheck);
    cli_json_put_number(xc, "deviation_pct", f->crosscheck_dev_pct);
    cli_json_put_number(xc, "level_pct", f->crosscheck_level_pct);
    cJSON_AddStringToObject(xc, "summary", f->model_note);
    cli_json_put_id(xc, "review_item_id", f->crosscheck_item_id);
    /* Every factor as stored with the field, without the cross-check that
     * is already above. */
    if ((model = cJSON_Parse(f->model_factors)) != NULL) {
        cJSON_DeleteItemFromObjectCaseSensitive(model, "crosscheck");
        cJSON_AddItemToObject(o, "model", model);
    } else {
        cJSON_AddNullToObject(o, "model");
    }
    return o;
}

cJSON *cli_plan_with_fields_json(const fxl_plan *p)
{
    cJSON *o = cli_plan_json(p), *fa = cJSON_AddArrayToObject(o, "fields");
    size_t k;

    for (k = 0; k < p->n_fields; k++)
        cJSON_AddItemToArray(fa, cli_field_json(&p->fields[k]));
    return o;
}

static const char *source_words(const char *source)
{
    if (strcmp(source, "tps") == 0)
        return "planning system";
    if (strcmp(source, "model") == 0)
        return "independent model";
    if (strcmp(source, "manual") == 0)
        return "hand calculation";
    return source;
}

/* "expected 112.4 cGy (planning system)" or "NO expected dose". */
static void expected_text(char *buf, size_t size, const fxl_field *f)
{
    if (isnan(f->expected_dose_cgy))
        snprintf(buf, size, "NO expected dose");
    else
        snprintf(buf, size, "expected %.1f cGy (%s)", f->expected_dose_cgy, source_words(f->expected_source));
}

/* The cross-check in words, for one line. */
static void crosscheck_text(char *buf, size_t size, const fxl_field *f)
{
    if (!f->crosscheck[0])
        snprintf(buf, size, "model not evaluated (imported before the independent model)");
    else if (strcmp(f->crosscheck, "agrees") == 0)
        snprintf(buf, size, "model %.1f cGy: agrees (%+.2f %%, level %.2f %%)", f->model_dose_cgy,
                 f->crosscheck_dev_pct, f->crosscheck_level_pct);
    else if (strcmp(f->crosscheck, "disagrees") == 0)
        snprintf(buf, size, "model %.1f cGy: DISAGREES (%+.2f %%, level %.2f %%)", f->model_dose_cgy,
                 f->crosscheck_dev_pct, f->crosscheck_level_pct);
    else if (isfinite(f->model_dose_cgy) && strcmp(f->expected_source, "model") == 0)
        snprintf(buf, size, "from beam data #%lld, no planning-system value to cross-check",
                 (long long)f->model_beam_data_id);
    else if (isfinite(f->model_dose_cgy))
        snprintf(buf, size, "model %.1f cGy, %s", f->model_dose_cgy, f->model_note);
    else
        snprintf(buf, size, "%s", f->model_note);
}

void cli_plan_print_import(const fxl_plan *p)
{
    int agree = 0, disagree = 0, unchecked = 0, missing = 0;
    double level = NAN;
    size_t k;

    for (k = 0; k < p->n_fields; k++) {
        const fxl_field *f = &p->fields[k];
        char expected[64], xc[320];
        expected_text(expected, sizeof expected, f);
        crosscheck_text(xc, sizeof xc, f);
        /* 80 columns: the field and its expected dose, the cross-check
         * wrapped below it */
        {
            char line[200], review[200];
            snprintf(line, sizeof line, "  %-12s %-9s %s", f->name, f->point, expected);
            cli_wrap_hang(stdout, "", 6, line, CLI_WIDTH);
            cli_wrap(stdout, "      ", xc, CLI_WIDTH);
            if (f->crosscheck_item_id && strcmp(f->crosscheck, "disagrees") == 0) {
                snprintf(review, sizeof review, "review item #%lld opened: check the plan transfer "
                         "before the first fraction", (long long)f->crosscheck_item_id);
                cli_wrap(stdout, "      ", review, CLI_WIDTH);
            }
        }
        if (strcmp(f->crosscheck, "agrees") == 0)
            agree++;
        else if (strcmp(f->crosscheck, "disagrees") == 0)
            disagree++;
        else
            unchecked++;
        if (isnan(f->expected_dose_cgy))
            missing++;
        if (isfinite(f->crosscheck_level_pct))
            level = f->crosscheck_level_pct;
    }
    printf("cross-check of planning-system values");
    if (isfinite(level))
        printf(" (level %.2f %%)", level);
    printf(":\n  %d agree, %d disagree, %d not checked\n", agree, disagree, unchecked);
    if (disagree)
        printf("  %d review item%s opened (see 'fxledger queue list')\n", disagree, disagree == 1 ? "" : "s");
    if (missing) {
        char w[200];
        snprintf(w, sizeof w, "%d measured point%s without an expected dose: %s results will be not "
                 "evaluable", missing, missing == 1 ? "" : "s", missing == 1 ? "its" : "their");
        cli_wrap(stdout, "  WARNING: ", w, CLI_WIDTH);
    }
}

static double factor(const cJSON *o, const char *key)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, key);
    return cJSON_IsNumber(v) ? v->valuedouble : NAN;
}

/* Appends "name value" to buf, the parts joined by '\t' (a break allowed
 * there only: a factor's name never parts from its value). */
static void factor_part(char *buf, size_t size, const char *name, double v, const char *fmt)
{
    size_t used = strlen(buf);
    if (!isfinite(v))
        return;
    snprintf(buf + used, size - used, "%s%s ", used ? "\t" : "", name);
    used = strlen(buf);
    snprintf(buf + used, size - used, fmt, v);
}

/* Prints the '\t'-separated parts after `lead`, joined by `sep`, a new line
 * (indented as lead is wide) before a part that would pass 80 columns. */
static void print_parts(const char *lead, const char *parts, const char *sep)
{
    size_t indent = strlen(lead), col = indent, sepw = strlen(sep);
    const char *p = parts;
    int first = 1;

    fputs(lead, stdout);
    while (*p) {
        const char *e = strchr(p, '\t');
        size_t len = e ? (size_t)(e - p) : strlen(p);
        if (!first && col + sepw + len > CLI_WIDTH) {
            printf("%s\n%*s", sep[0] == ',' ? "," : " x", (int)indent, "");
            col = indent;
            first = 1;
        }
        if (!first) {
            fputs(sep, stdout);
            col += sepw;
        }
        fwrite(p, 1, len, stdout);
        col += len;
        first = 0;
        p = e ? e + 1 : p + len;
    }
    fputc('\n', stdout);
}

void cli_plan_print_model(const fxl_field *f)
{
    char parts[400] = "";
    cJSON *o;

    if (!f->crosscheck[0]) {
        printf("    model         not evaluated (imported before the independent model)\n");
        return;
    }
    if (isfinite(f->model_dose_cgy))
        printf("    model         %.1f cGy (beam data #%lld)\n", f->model_dose_cgy,
               (long long)f->model_beam_data_id);
    else
        printf("    model         no value\n");
    printf("    cross-check   %s\n", strcmp(f->crosscheck, "agrees") == 0 ? "agrees with the planning system"
                                     : strcmp(f->crosscheck, "disagrees") == 0
                                         ? "DISAGREES with the planning system"
                                         : "not checked");
    cli_wrap(stdout, "                  ", f->model_note, CLI_WIDTH);
    if (f->crosscheck_item_id)
        printf("                  review item #%lld\n", (long long)f->crosscheck_item_id);
    if (!(o = cJSON_Parse(f->model_factors)))
        return;
    /* Every factor the model got to, also when it stopped on a later one. */
    if (!isfinite(factor(o, "ref_dose_cgy_per_mu"))) {
        cJSON_Delete(o);
        return;
    }
    factor_part(parts, sizeof parts, "MU", factor(o, "mu"), "%g");
    factor_part(parts, sizeof parts, "D0'", factor(o, "ref_dose_cgy_per_mu"), "%.3f cGy/MU");
    factor_part(parts, sizeof parts, "S_c", factor(o, "sc"), "%.4f");
    factor_part(parts, sizeof parts, "S_p", factor(o, "sp"), "%.4f");
    if (cJSON_IsTrue(cJSON_GetObjectItemCaseSensitive(o, "output_combined")))
        factor_part(parts, sizeof parts, "S_cp", factor(o, "scp"), "%.4f");
    factor_part(parts, sizeof parts, "TMR", factor(o, "tmr"), "%.4f");
    factor_part(parts, sizeof parts, "ISF", factor(o, "inverse_square"), "%.4f");
    factor_part(parts, sizeof parts, "WF", factor(o, "wedge_factor"), "%.4f");
    factor_part(parts, sizeof parts, "TF", factor(o, "tray_factor"), "%.4f");
    if (parts[0])
        print_parts("    factors       ", parts, " x ");
    if (isfinite(factor(o, "spd_cm"))) {
        char geo[200];
        snprintf(geo, sizeof geo, "depth %.2f cm\tsource-point %.2f cm\tr_c %.2f cm\tr_d %.2f cm",
                 factor(o, "depth_cm"), factor(o, "spd_cm"), factor(o, "rc_cm"), factor(o, "rd_cm"));
        print_parts("    geometry      ", geo, ", ");
    }
    cJSON_Delete(o);
}
