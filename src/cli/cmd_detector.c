/* fxledger detector: add detectors, list them with status and accumulated
 * dose, show one in full, and record status changes (retirement included). */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "cli/cli.h"
#include "cli/table.h"
#include "cli/json_put.h"
#include "fxl/calibrations.h"
#include "fxl/corrections.h"
#include "fxl/detectors.h"
#include "fxl/fraction.h"

static cJSON *detector_json(const fxl_detector *d)
{
    cJSON *o = cJSON_CreateObject();

    cJSON_AddNumberToObject(o, "id", (double)d->id);
    cJSON_AddStringToObject(o, "serial", d->serial);
    cJSON_AddStringToObject(o, "label", d->label);
    cJSON_AddStringToObject(o, "kind", d->kind);
    cJSON_AddStringToObject(o, "reading_unit", d->reading_unit);
    cli_json_put_number(o, "sensitivity", d->sensitivity);
    cJSON_AddNumberToObject(o, "temp_coeff_per_c", d->temp_coeff_per_c);
    cli_json_put_text(o, "buildup", d->buildup);
    cli_json_put_number(o, "dose_limit_cgy", d->dose_limit_cgy);
    cJSON_AddStringToObject(o, "created_at", d->created_at);
    cJSON_AddStringToObject(o, "status", d->status);
    cli_json_put_text(o, "status_since", d->status_since);
    cli_json_put_text(o, "status_reason", d->status_reason);
    cli_json_put_text(o, "last_calibrated_at", d->last_calibrated_at);
    cJSON_AddNumberToObject(o, "accumulated_dose_cgy", d->accumulated_dose_cgy);
    cJSON_AddNumberToObject(o, "accumulated_measurements", (double)d->measurement_count);
    cJSON_AddBoolToObject(o, "over_dose_limit",
                          !isnan(d->dose_limit_cgy) && d->accumulated_dose_cgy >= d->dose_limit_cgy);
    return o;
}

static int detector_add(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"label", "TEXT", "short label written on the detector (required)", NULL},
        {"kind", "KIND", "photon_diode, electron_diode, small_field_diode, mosfet, osl, tld or other (required)", NULL},
        {"unit", "UNIT", "reading unit: nC (default), pC, mV, count or cGy", NULL},
        {"sensitivity", "X", "nominal sensitivity, reading unit per cGy", NULL},
        {"temp-coeff", "A", "temperature coefficient as a FRACTION per degC (0.003 = 0.3 %/degC); required for diodes, 0 allowed; default 0 for other kinds", NULL},
        {"buildup", "TEXT", "build-up cap, e.g. 'brass cap, 6-12 MV'", NULL},
        {"dose-limit", "CGY", "accumulated dose after which it is due for recalibration, cGy", NULL},
        {NULL, NULL, NULL, NULL}};
    const char *pos[1];
    fxl_detector_spec d;
    fxl_detector got;
    int64_t id = 0;
    int npos, rc;

    rc = cli_parse(env,
                   "detector add SERIAL --label L --kind KIND [--unit nC] [--sensitivity X] "
                   "[--temp-coeff A] [--buildup TEXT] [--dose-limit CGY]",
                   "Adds an in vivo detector, in service from now (physicist or admin).\n"
                   "The temperature coefficient is a fraction per degC: CF_T = 1 / (1 + A (T - T_cal)).",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("detector add needs a SERIAL (see 'fxledger detector add --help')");
        return CLI_EXIT_USAGE;
    }
    memset(&d, 0, sizeof d);
    d.serial = pos[0];
    d.label = cli_get(opts, "label");
    d.kind = cli_get(opts, "kind");
    d.reading_unit = cli_get(opts, "unit");
    d.buildup = cli_get(opts, "buildup");
    d.sensitivity = d.dose_limit_cgy = NAN;
    d.temp_coeff_per_c = NAN;  /* required for diodes (store/detectors.c) */
    if (!d.label || !*d.label) {
        cli_error("--label is required (1 to 64 characters)");
        return CLI_EXIT_USAGE;
    }
    if (!d.kind) {
        cli_error("--kind is required (photon_diode, electron_diode, small_field_diode, mosfet, osl, tld, other)");
        return CLI_EXIT_USAGE;
    }
    if (cli_get(opts, "sensitivity") &&
        cli_double(&d.sensitivity, cli_get(opts, "sensitivity"), "sensitivity", 1e-6, 1e6,
                   "reading unit per cGy") != 0)
        return CLI_EXIT_DATA;
    if (cli_get(opts, "temp-coeff") &&
        cli_double(&d.temp_coeff_per_c, cli_get(opts, "temp-coeff"),
                   "temperature coefficient (a fraction: 0.003 = 0.3 %/degC)", -FXL_TEMP_COEFF_MAX,
                   FXL_TEMP_COEFF_MAX, "per degC") != 0)
        return CLI_EXIT_DATA;
    if (cli_get(opts, "dose-limit") &&
        cli_double(&d.dose_limit_cgy, cli_get(opts, "dose-limit"), "dose limit", 1, 1e9, "cGy") != 0)
        return CLI_EXIT_DATA;
    if ((rc = fxl_detector_add(env->ctx, &id, &d)) != 0)
        return cli_fail(env, rc);
    if ((rc = fxl_detector_get(env->ctx, &got, d.serial, NULL)) != 0)
        return cli_fail(env, rc);
    if (env->json)
        return cli_print_json(detector_json(&got));
    printf("added detector '%s' (%s, %s, reading unit %s), in service\n", got.serial, got.label,
           got.kind, got.reading_unit);
    return CLI_EXIT_OK;
}

static void format_dose(char *buf, size_t size, const fxl_detector *d)
{
    if (isnan(d->dose_limit_cgy))
        snprintf(buf, size, "%.1f cGy", d->accumulated_dose_cgy);
    else
        snprintf(buf, size, "%.1f / %.0f cGy%s", d->accumulated_dose_cgy, d->dose_limit_cgy,
                 d->accumulated_dose_cgy >= d->dose_limit_cgy ? " OVER LIMIT" : "");
}

static int detector_list(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    fxl_detector *list = NULL;
    size_t n = 0, i;
    int npos, rc;

    rc = cli_parse(env, "detector list",
                   "Lists the detectors with their current status, latest calibration and the dose\n"
                   "accumulated since it (sum of the corrected doses of their measurements treated\n"
                   "after the latest calibration; amended readings count once).",
                   opts, argc, argv, pos, 0, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if ((rc = fxl_detector_list(env->ctx, &list, &n, NULL)) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *arr = cJSON_CreateArray();
        for (i = 0; i < n; i++)
            cJSON_AddItemToArray(arr, detector_json(&list[i]));
        free(list);
        return cli_print_json(arr);
    }
    if (n == 0) {
        printf("no detectors yet (add one with 'fxledger detector add')\n");
    } else {
        /* 80 columns: the label wraps at words; dates in the department's zone */
        static const char *const head[] = {"serial", "label", "kind", "status", "calibrated",
                                           "dose since calib.", NULL};
        cli_table tab;
        cli_table_init(&tab, head);
        tab.wrap[1] = 1;
        for (i = 0; i < n; i++) {
            char dose[64], cal[16];
            const char *cells[6];
            format_dose(dose, sizeof dose, &list[i]);
            if (list[i].last_calibrated_at[0])
                cli_local_date(env, cal, list[i].last_calibrated_at);
            else
                snprintf(cal, sizeof cal, "never");
            cells[0] = list[i].serial;
            cells[1] = list[i].label;
            cells[2] = list[i].kind;
            cells[3] = list[i].status;
            cells[4] = cal;
            cells[5] = dose;
            cli_table_add(&tab, cells);
        }
        cli_table_print(stdout, &tab, CLI_WIDTH, 0);
        cli_table_release(&tab);
    }
    free(list);
    return CLI_EXIT_OK;
}

static int detector_show(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    fxl_detector d;
    fxl_detector_status_row *hist = NULL;
    fxl_calibration *cals = NULL;
    fxl_corr_table *tabs = NULL;
    size_t nh = 0, nc = 0, nt = 0, i;
    char dose[64];
    int npos, rc;

    rc = cli_parse(env, "detector show SERIAL",
                   "Shows one detector: its properties, status history, calibrations and\n"
                   "correction tables.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("detector show needs a SERIAL (see 'fxledger detector list')");
        return CLI_EXIT_USAGE;
    }
    if ((rc = fxl_detector_get(env->ctx, &d, pos[0], NULL)) != 0 ||
        (rc = fxl_detector_status_history(env->ctx, &hist, &nh, pos[0])) != 0 ||
        (rc = fxl_calib_list(env->ctx, &cals, &nc, pos[0], NULL)) != 0 ||
        (rc = fxl_corr_list(env->ctx, &tabs, &nt, pos[0], NULL)) != 0) {
        rc = cli_fail(env, rc);
        goto cleanup;
    }
    if (env->json) {
        cJSON *o = detector_json(&d), *a;
        a = cJSON_AddArrayToObject(o, "status_history");
        for (i = 0; i < nh; i++) {
            cJSON *r = cJSON_CreateObject();
            cJSON_AddStringToObject(r, "status", hist[i].status);
            cJSON_AddStringToObject(r, "effective_at", hist[i].effective_at);
            cli_json_put_text(r, "reason", hist[i].reason);
            cJSON_AddStringToObject(r, "user", hist[i].user);
            cJSON_AddStringToObject(r, "recorded_at", hist[i].created_at);
            cJSON_AddItemToArray(a, r);
        }
        a = cJSON_AddArrayToObject(o, "calibrations");
        for (i = 0; i < nc; i++) {
            cJSON *r = cJSON_CreateObject();
            cJSON_AddNumberToObject(r, "id", (double)cals[i].id);
            cJSON_AddStringToObject(r, "machine", cals[i].machine);
            cJSON_AddStringToObject(r, "beam", cals[i].beam);
            cJSON_AddStringToObject(r, "point", cals[i].point);
            cJSON_AddStringToObject(r, "calibrated_at", cals[i].calibrated_at);
            cJSON_AddStringToObject(r, "valid_until", cals[i].valid_until);
            cJSON_AddNumberToObject(r, "factor_cgy_per_unit", cals[i].factor_cgy_per_unit);
            cJSON_AddStringToObject(r, "state", cals[i].state);
            cJSON_AddItemToArray(a, r);
        }
        a = cJSON_AddArrayToObject(o, "correction_tables");
        for (i = 0; i < nt; i++) {
            cJSON *r = cJSON_CreateObject();
            cJSON_AddNumberToObject(r, "id", (double)tabs[i].id);
            cJSON_AddStringToObject(r, "machine", tabs[i].machine);
            cJSON_AddStringToObject(r, "beam", tabs[i].beam);
            cJSON_AddStringToObject(r, "parameter", tabs[i].parameter);
            cJSON_AddStringToObject(r, "effective_from", tabs[i].effective_from);
            cJSON_AddNumberToObject(r, "points", (double)tabs[i].n_points);
            cJSON_AddBoolToObject(r, "in_force", tabs[i].in_force);
            cJSON_AddItemToArray(a, r);
        }
        rc = cli_print_json(o);
        goto cleanup;
    }
    format_dose(dose, sizeof dose, &d);
    {
        char line[900], when[48] = "", cal[48] = "";
        snprintf(line, sizeof line, "detector %s (%s)", d.serial, d.label);
        cli_wrap(stdout, "", line, CLI_WIDTH);
        printf("  kind               %s\n", d.kind);
        printf("  reading unit       %s\n", d.reading_unit);
        if (isnan(d.sensitivity))
            printf("  sensitivity        -\n");
        else
            printf("  sensitivity        %g %s/cGy\n", d.sensitivity, d.reading_unit);
        printf("  temp. coefficient  %g per degC (%.3g %%/degC)\n", d.temp_coeff_per_c,
               d.temp_coeff_per_c * 100);
        printf("  build-up           %s\n", d.buildup[0] ? d.buildup : "-");
        cli_local_time(env, when, sizeof when, d.status_since);
        snprintf(line, sizeof line, "%s%s%s%s%s%s", d.status, when[0] ? " since " : "", when,
                 d.status_reason[0] ? " (" : "", d.status_reason, d.status_reason[0] ? ")" : "");
        cli_wrap_hang(stdout, "  status             ", 21, line, CLI_WIDTH);
        if (d.last_calibrated_at[0])
            cli_local_time(env, cal, sizeof cal, d.last_calibrated_at);
        printf("  last calibrated    %s\n", cal[0] ? cal : "never");
        printf("  dose since then    %s (%lld measurements)\n", dose, (long long)d.measurement_count);
    }
    printf("\nstatus history:\n");
    {
        static const char *const hh[] = {"since", "status", "by", "reason", NULL};
        cli_table tab;
        cli_table_init(&tab, hh);
        tab.wrap[3] = 1;
        for (i = 0; i < nh; i++) {
            char when[48];
            const char *cells[4];
            cli_local_time(env, when, sizeof when, hist[i].effective_at);
            cells[0] = when;
            cells[1] = hist[i].status;
            cells[2] = hist[i].user;
            cells[3] = hist[i].reason;
            cli_table_add(&tab, cells);
        }
        cli_table_print(stdout, &tab, CLI_WIDTH, 2);
        cli_table_release(&tab);
    }
    printf("\ncalibrations:\n");
    if (nc == 0) {
        printf("  none\n");
    } else {
        static const char *const ch[] = {"#", "date", "machine", "beam", "point", "N", "valid until",
                                         "state", NULL};
        cli_table tab;
        cli_table_init(&tab, ch);
        tab.right[0] = 1;
        for (i = 0; i < nc; i++) {
            char id[24], date[16], until[16], factor[48];
            const char *cells[8];
            snprintf(id, sizeof id, "#%lld", (long long)cals[i].id);
            cli_local_date(env, date, cals[i].calibrated_at);
            cli_local_date(env, until, cals[i].valid_until);
            snprintf(factor, sizeof factor, "%.5g cGy/%s", cals[i].factor_cgy_per_unit,
                     cals[i].reading_unit);
            cells[0] = id;
            cells[1] = date;
            cells[2] = cals[i].machine;
            cells[3] = cals[i].beam;
            cells[4] = cals[i].point;
            cells[5] = factor;
            cells[6] = until;
            cells[7] = cals[i].state;
            cli_table_add(&tab, cells);
        }
        cli_table_print(stdout, &tab, CLI_WIDTH, 2);
        cli_table_release(&tab);
    }
    printf("\ncorrection tables:\n");
    if (nt == 0) {
        printf("  none\n");
    } else {
        static const char *const th[] = {"#", "machine", "beam", "parameter", "from", "points",
                                         "in force", NULL};
        cli_table tab;
        cli_table_init(&tab, th);
        tab.right[0] = tab.right[5] = 1;
        for (i = 0; i < nt; i++) {
            char id[24], from[16], pts[24];
            const char *cells[7];
            snprintf(id, sizeof id, "#%lld", (long long)tabs[i].id);
            cli_local_date(env, from, tabs[i].effective_from);
            snprintf(pts, sizeof pts, "%zu", tabs[i].n_points);
            cells[0] = id;
            cells[1] = tabs[i].machine;
            cells[2] = tabs[i].beam;
            cells[3] = tabs[i].parameter;
            cells[4] = from;
            cells[5] = pts;
            cells[6] = tabs[i].in_force ? "yes" : "no";
            cli_table_add(&tab, cells);
        }
        cli_table_print(stdout, &tab, CLI_WIDTH, 2);
        cli_table_release(&tab);
    }
    rc = CLI_EXIT_OK;
cleanup:
    free(hist);
    free(cals);
    fxl_corr_list_free(tabs, nt);
    return rc;
}

static int set_status(cli_env *env, const char *serial, const char *status, const char *reason,
                      const char *at_text)
{
    char at[FXL_TIME_LEN];
    int rc;

    if (!reason || !*reason) {
        cli_error("--reason is required (1 to 200 characters)");
        return CLI_EXIT_USAGE;
    }
    if (at_text && fxl_time_parse_local(env->ctx, at, at_text) != 0) {
        cli_error("date '%s': %s", at_text, fxl_errmsg(env->ctx));
        return CLI_EXIT_DATA;
    }
    if ((rc = fxl_detector_set_status(env->ctx, serial, status, reason, at_text ? at : NULL)) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        fxl_detector d;
        if ((rc = fxl_detector_get(env->ctx, &d, serial, NULL)) != 0)
            return cli_fail(env, rc);
        return cli_print_json(detector_json(&d));
    }
    {
        char when[48] = "";
        if (at_text)
            cli_local_time(env, when, sizeof when, at);
        printf("detector '%s' is now %s%s%s\n", serial, status, at_text ? " from " : "", when);
    }
    return CLI_EXIT_OK;
}

static int detector_status(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"reason", "TEXT", "why (required)", NULL},
        {"at", "TIME", "when it took effect, local or with an offset (default now; not before the last change)", NULL},
        {NULL, NULL, NULL, NULL}};
    const char *pos[2];
    int npos, rc;

    rc = cli_parse(env, "detector status SERIAL in_service|out_for_service|retired --reason TEXT [--at DATE]",
                   "Records a status change (physicist or admin). The history is append-only;\n"
                   "retirement is final. A detector out for service or retired gives no dose\n"
                   "results.",
                   opts, argc, argv, pos, 2, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 2) {
        cli_error("detector status needs SERIAL and a status (in_service, out_for_service, retired)");
        return CLI_EXIT_USAGE;
    }
    if (!fxl_detector_status_valid(pos[1])) {
        cli_error("status '%s' must be one of in_service, out_for_service, retired", pos[1]);
        return CLI_EXIT_DATA;
    }
    return set_status(env, pos[0], pos[1], cli_get(opts, "reason"), cli_get(opts, "at"));
}

static int detector_retire(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"reason", "TEXT", "why (required)", NULL},
        {"at", "TIME", "when it took effect, local or with an offset (default now)", NULL},
        {NULL, NULL, NULL, NULL}};
    const char *pos[1];
    int npos, rc;

    rc = cli_parse(env, "detector retire SERIAL --reason TEXT [--at DATE]",
                   "Retires a detector for good (physicist or admin); same as\n"
                   "'detector status SERIAL retired'.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("detector retire needs a SERIAL");
        return CLI_EXIT_USAGE;
    }
    return set_status(env, pos[0], "retired", cli_get(opts, "reason"), cli_get(opts, "at"));
}

static const cli_sub subs[] = {
    {"add", detector_add, "add a detector (physicist or admin)"},
    {"list", detector_list, "list detectors, status and dose since calibration"},
    {"show", detector_show, "show one detector in full"},
    {"status", detector_status, "record a status change (physicist or admin)"},
    {"retire", detector_retire, "retire a detector for good (physicist or admin)"},
    {NULL, NULL, NULL}};

int cmd_detector(cli_env *env, int argc, char **argv)
{
    return cli_dispatch_sub(env, subs, "In vivo detectors: diodes, MOSFETs, OSL and TL dosimeters.",
                            argc, argv);
}
