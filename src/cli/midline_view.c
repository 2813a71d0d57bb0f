/* The midline estimates of entrance-exit pairs on screen and in JSON: the
 * method is named, and the two corrected doses it came from are shown
 * beside it. No SQL, no physics (the estimate is src/core/midline.c's). */
#include <math.h>
#include <stdio.h>

#include "cli/json_put.h"
#include "cli/midline_view.h"
#include "cli/table.h"

cJSON *cli_midline_json(const fxl_midline_pair *pairs, size_t n)
{
    cJSON *arr = cJSON_CreateArray();
    size_t i;
    int j;

    for (i = 0; i < n; i++) {
        const fxl_midline_pair *p = &pairs[i];
        cJSON *o = cJSON_CreateObject(), *reasons;
        cJSON_AddStringToObject(o, "plan", p->plan);
        cJSON_AddNumberToObject(o, "fraction", p->fraction_number);
        cJSON_AddStringToObject(o, "field", p->field);
        cJSON_AddNumberToObject(o, "entrance_measurement_id", (double)p->entrance_id);
        cJSON_AddNumberToObject(o, "exit_measurement_id", (double)p->exit_id);
        cli_json_put_number(o, "entrance_dose_cgy", p->estimate.entrance_cgy);
        cli_json_put_number(o, "exit_dose_cgy", p->estimate.exit_cgy);
        cJSON_AddBoolToObject(o, "computed", p->estimate.computed);
        cli_json_put_number(o, "midline_dose_cgy", p->estimate.geometric_cgy);
        cli_json_put_number(o, "geometric_mean_cgy", p->estimate.geometric_cgy);
        cli_json_put_number(o, "arithmetic_mean_cgy", p->estimate.arithmetic_cgy);
        cli_json_put_number(o, "transmission", p->estimate.transmission);
        cJSON_AddStringToObject(o, "method", fxl_midline_method());
        reasons = cJSON_AddArrayToObject(o, "reasons");
        for (j = 0; j < p->estimate.reasons.n && j < FXL_REASONS_MAX; j++)
            cJSON_AddItemToArray(reasons, cJSON_CreateString(p->estimate.reasons.text[j]));
        cJSON_AddItemToArray(arr, o);
    }
    return arr;
}

static void dose(char *buf, size_t size, double v)
{
    if (isfinite(v))
        snprintf(buf, size, "%.1f cGy", v);
    else
        snprintf(buf, size, "-");
}

void cli_midline_print(const fxl_midline_pair *pairs, size_t n, int with_fraction)
{
    char e[24], x[24], where[96];
    size_t i;

    if (n == 0)
        return;
    {
        char head[300];
        snprintf(head, sizeof head, "Midline dose from entrance and exit (%s):", fxl_midline_method());
        printf("\n");
        cli_wrap(stdout, "", head, CLI_WIDTH);
    }
    /* 80 columns: the estimate on the field's line, the arithmetic mean and
     * the transmission (or why there is no estimate) wrapped under it */
    for (i = 0; i < n; i++) {
        const fxl_midline_pair *p = &pairs[i];
        char line[400], more[400];
        dose(e, sizeof e, p->estimate.entrance_cgy);
        dose(x, sizeof x, p->estimate.exit_cgy);
        if (with_fraction)
            snprintf(where, sizeof where, "%s fx %d %s", p->plan, p->fraction_number, p->field);
        else
            snprintf(where, sizeof where, "%s", p->field);
        if (p->estimate.computed) {
            snprintf(line, sizeof line, "%s  entrance %s, exit %s -> midline %.1f cGy", where, e, x,
                     p->estimate.geometric_cgy);
            snprintf(more, sizeof more, "(arithmetic mean %.1f cGy, transmission %.3f)",
                     p->estimate.arithmetic_cgy, p->estimate.transmission);
        } else {
            snprintf(line, sizeof line, "%s  entrance %s, exit %s ->", where, e, x);
            snprintf(more, sizeof more, "%s",
                     p->estimate.reasons.n ? p->estimate.reasons.text[0] : "no midline estimate");
        }
        cli_wrap_hang(stdout, "  ", 6, line, CLI_WIDTH);
        cli_wrap(stdout, "      ", more, CLI_WIDTH);
    }
}
