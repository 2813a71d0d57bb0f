/* fxledger calib: record a cross-calibration of a detector against an ion
 * chamber and list calibrations. The factor is computed in the library. */
#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "cli/cli.h"
#include "cli/table.h"
#include "cli/signature_view.h"
#include "cli/session.h"
#include "fxl/number.h"
#include "cli/json_put.h"
#include "fxl/calibrations.h"
#include "fxl/fraction.h"
#include "fxl/settings.h"

/* Splits "10.01,10.03,9.98" into numbers; prints a one-line error naming the
 * first bad one. */
static int parse_readings(double *out, size_t *n, const char *text, const char *unit)
{
    const char *p = text;
    size_t count = 0;

    if (!text || !*text) {
        cli_error("--readings is required: comma-separated readings %s, e.g. 10.01,10.03,9.98",
                  unit);
        return -1;
    }
    while (*p) {
        char item[64], *end = NULL;
        const char *comma = strchr(p, ',');
        size_t len = comma ? (size_t)(comma - p) : strlen(p), t;
        double v;
        if (count == FXL_CALIB_READINGS_MAX) {
            cli_error("at most %d readings are accepted", FXL_CALIB_READINGS_MAX);
            return -1;
        }
        if (len == 0 || len >= sizeof item) {
            cli_error("reading %zu '%.*s' is not a number (> 0, %s)", count + 1, (int)(len < 40 ? len : 40),
                      p, unit);
            return -1;
        }
        memcpy(item, p, len);
        item[len] = '\0';
        for (t = len; t > 0 && (item[t - 1] == ' ' || item[t - 1] == '\t'); t--)
            item[t - 1] = '\0';  /* "10.01, 10.03" is fine; strtod skips leading blanks */
        (void)end;
        if (fxl_number_parse(&v, item + strspn(item, " \t"), 0) != FXL_NUM_OK) {
            cli_error("reading %zu '%s' is not a number (> 0, %s)", count + 1, item, unit);
            return -1;
        }
        if (v <= 0) {
            cli_error("reading %zu '%s' must be > 0 (%s)", count + 1, item, unit);
            return -1;
        }
        out[count++] = v;
        p += len;
        if (*p == ',') {
            p++;
            if (!*p) {
                cli_error("reading %zu is empty (trailing comma)", count + 1);
                return -1;
            }
        }
    }
    *n = count;
    return 0;
}

static cJSON *calib_json(const fxl_calibration *c)
{
    cJSON *o = cJSON_CreateObject(), *r = cJSON_Parse(c->readings_json);

    cJSON_AddNumberToObject(o, "id", (double)c->id);
    cJSON_AddStringToObject(o, "serial", c->serial);
    cJSON_AddStringToObject(o, "machine", c->machine);
    cJSON_AddStringToObject(o, "beam", c->beam);
    cJSON_AddStringToObject(o, "point", c->point);
    cJSON_AddStringToObject(o, "calibrated_at", c->calibrated_at);
    cJSON_AddStringToObject(o, "valid_until", c->valid_until);
    cJSON_AddNumberToObject(o, "chamber_dose_cgy", c->chamber_dose_cgy);
    cJSON_AddItemToObject(o, "readings", r ? r : cJSON_CreateArray());
    cJSON_AddStringToObject(o, "reading_unit", c->reading_unit);
    cJSON_AddNumberToObject(o, "n", c->n);
    cJSON_AddNumberToObject(o, "reading_mean", c->mean);
    cJSON_AddNumberToObject(o, "reading_sd", c->sd);
    cJSON_AddNumberToObject(o, "reading_sd_pct", c->mean > 0 ? c->sd / c->mean * 100 : 0);
    cJSON_AddNumberToObject(o, "factor_cgy_per_unit", c->factor_cgy_per_unit);
    cJSON_AddNumberToObject(o, "temp_c", c->temp_c);
    cJSON_AddNumberToObject(o, "ssd_cm", c->ssd_cm);
    cJSON_AddNumberToObject(o, "field_size_cm", c->field_size_cm);
    cli_json_put_number(o, "ref_thickness_cm", c->ref_thickness_cm);
    cli_json_put_text(o, "confirmed_change", c->confirmed_change);
    cli_json_put_text(o, "chamber", c->chamber);
    cli_json_put_text(o, "notes", c->notes);
    cJSON_AddStringToObject(o, "user", c->user);
    cJSON_AddStringToObject(o, "state", c->state);
    if (isnan(c->previous_factor)) {
        cJSON_AddNullToObject(o, "previous_factor_cgy_per_unit");
        cJSON_AddNullToObject(o, "change_pct");
    } else {
        cJSON_AddNumberToObject(o, "previous_factor_cgy_per_unit", c->previous_factor);
        cJSON_AddNumberToObject(o, "change_pct",
                                (c->factor_cgy_per_unit - c->previous_factor) / c->previous_factor * 100);
    }
    return o;
}

static int calib_add(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"machine", "M", "machine (required)", NULL},
        {"beam", "B", "beam of that machine (required)", NULL},
        {"point", "P", "entrance or exit (required)", NULL},
        {"chamber-dose", "CGY", "dose measured by the ion chamber, cGy (required)", NULL},
        {"readings", "R1,R2,...", "the detector's readings in its unit, comma-separated (required)", NULL},
        {"temp", "DEGC", "temperature during calibration (default 20 degC, stated as assumed)", NULL},
        {"ssd", "CM", "SSD of the reference set-up (default 100 cm)", NULL},
        {"field-size", "CM", "field size of the reference set-up (default 10 cm)", NULL},
        {"thickness", "CM", "exit only: phantom thickness of the reference set-up (the reference "
                            "source-to-detector distance is SSD + thickness)", NULL},
        {"confirm-change", "CHECKS", "physicist only: put the calibration in force although it "
                                     "fails the named acceptance checks, comma-separated: sd "
                                     "(readings spread), n-change (N against the previous "
                                     "calibration), nominal (first N against the nominal "
                                     "sensitivity)", NULL},
        {"valid-days", "N", "valid for N days (default: setting calibration_interval_days, else 90)", NULL},
        {"valid-until", "DATE", "valid until the end of DATE (instead of --valid-days)", NULL},
        {"at", "TIME", "when it was measured, local or with an offset (default now; not in the future)", NULL},
        {"chamber", "TEXT", "ion chamber and electrometer used", NULL},
        {"notes", "TEXT", "free notes", NULL},
        {NULL, NULL, NULL, NULL}};
    const char *pos[1];
    double readings[FXL_CALIB_READINGS_MAX];
    char at[FXL_TIME_LEN], until[FXL_TIME_LEN];
    fxl_calib_spec c;
    fxl_calibration out;
    size_t i;
    long days = 0;
    int npos, rc;

    rc = cli_parse(env,
                   "calib add SERIAL --machine M --beam B --point entrance|exit --chamber-dose CGY "
                   "--readings R1,R2,... [--temp DEGC] [--ssd CM] [--field-size CM] [--thickness CM] "
                   "[--confirm-change sd,n-change,nominal] "
                   "[--valid-days N | --valid-until DATE] [--at DATE] [--chamber TEXT] [--notes TEXT]",
                   "Records a cross-calibration against an ion chamber (physicist or admin):\n"
                   "N = chamber dose / mean reading, in cGy per reading unit. Prints N, the mean,\n"
                   "the sample SD (also as % of the mean) and n. Never edited: a newer calibration\n"
                   "of the same detector, beam and point supersedes it. A retired detector is refused.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("calib add needs a detector SERIAL (see 'fxledger calib add --help')");
        return CLI_EXIT_USAGE;
    }
    memset(&c, 0, sizeof c);
    c.serial = pos[0];
    c.machine = cli_get(opts, "machine");
    c.beam = cli_get(opts, "beam");
    c.point = cli_get(opts, "point");
    c.chamber = cli_get(opts, "chamber");
    c.notes = cli_get(opts, "notes");
    c.temp_c = c.ssd_cm = c.field_size_cm = c.ref_thickness_cm = NAN;
    if (cli_get(opts, "confirm-change") &&
        fxl_calib_confirm_parse(&c.confirm, cli_get(opts, "confirm-change")) != 0) {
        cli_error("--confirm-change '%s' must name the checks confirmed: sd, n-change, nominal "
                  "(comma-separated)", cli_get(opts, "confirm-change"));
        return CLI_EXIT_USAGE;
    }
    if (cli_get(opts, "thickness") &&
        cli_double(&c.ref_thickness_cm, cli_get(opts, "thickness"), "phantom thickness", 0.1, 60,
                   "cm") != 0)
        return CLI_EXIT_DATA;
    if (!c.machine || !c.beam) {
        cli_error("--machine and --beam are required (see 'fxledger machine list')");
        return CLI_EXIT_USAGE;
    }
    if (!c.point || (strcmp(c.point, "entrance") != 0 && strcmp(c.point, "exit") != 0)) {
        cli_error("--point '%s' must be entrance or exit", c.point ? c.point : "");
        return CLI_EXIT_USAGE;
    }
    if (cli_double(&c.chamber_dose_cgy, cli_get(opts, "chamber-dose"), "chamber dose", 0.001,
                   FXL_CALIB_CHAMBER_DOSE_MAX_CGY, "cGy") != 0)
        return CLI_EXIT_DATA;
    if (parse_readings(readings, &c.n_readings, cli_get(opts, "readings"), "in the detector's reading unit") != 0)
        return CLI_EXIT_DATA;
    c.readings = readings;
    if ((cli_get(opts, "temp") &&
         cli_double(&c.temp_c, cli_get(opts, "temp"), "calibration temperature", 10, 45, "degC") != 0) ||
        (cli_get(opts, "ssd") &&
         cli_double(&c.ssd_cm, cli_get(opts, "ssd"), "calibration SSD", 50, 200, "cm") != 0) ||
        (cli_get(opts, "field-size") &&
         cli_double(&c.field_size_cm, cli_get(opts, "field-size"), "calibration field size", 1, 50, "cm") != 0))
        return CLI_EXIT_DATA;
    if (cli_get(opts, "valid-days") && cli_get(opts, "valid-until")) {
        cli_error("give --valid-days or --valid-until, not both");
        return CLI_EXIT_USAGE;
    }
    if (cli_get(opts, "valid-days")) {
        if (cli_int(&days, cli_get(opts, "valid-days"), "validity in days", 1, FXL_CALIB_VALID_DAYS_MAX) != 0)
            return CLI_EXIT_DATA;
        c.valid_days = (int)days;
    }
    if (cli_get(opts, "valid-until")) {
        if (fxl_time_normalize(until, cli_get(opts, "valid-until"), 1) != 0) {
            cli_error("valid-until date '%s' is not valid (YYYY-MM-DD)", cli_get(opts, "valid-until"));
            return CLI_EXIT_DATA;
        }
        c.valid_until = until;
    }
    if (cli_get(opts, "at")) {
        /* typed by a person: local time in the department's zone or an offset */
        if (fxl_time_parse_local(env->ctx, at, cli_get(opts, "at")) != 0) {
            cli_error("calibration date '%s': %s", cli_get(opts, "at"), fxl_errmsg(env->ctx));
            return CLI_EXIT_DATA;
        }
        c.calibrated_at = at;
    }
    if ((rc = cli_sign_begin(env, "calibration confirmed")) != 0)
        return rc;
    if ((rc = fxl_calib_add(env->ctx, &out, &c)) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *o = calib_json(&out);
        cJSON_AddItemToObject(o, "signatures", signatures_json(env, "calibrations", out.id));
        cJSON_AddBoolToObject(o, "temp_assumed", isnan(c.temp_c));
        return cli_print_json(o);
    }
    printf("calibration #%lld: detector %s on %s %s, %s\n", (long long)out.id, out.serial,
           out.machine, out.beam, out.point);
    printf("  chamber dose   %.2f cGy\n", out.chamber_dose_cgy);
    printf("  readings       ");
    for (i = 0; i < c.n_readings; i++)
        printf("%s%g", i ? ", " : "", readings[i]);
    printf(" %s\n", out.reading_unit);
    printf("  n              %d\n", out.n);
    printf("  mean           %.4f %s\n", out.mean, out.reading_unit);
    printf("  SD             %.4f %s (%.2f %% of mean)\n", out.sd, out.reading_unit,
           out.sd / out.mean * 100);
    printf("  N              %.5f cGy/%s\n", out.factor_cgy_per_unit, out.reading_unit);
    printf("  conditions     SSD %g cm, field %g cm, %.1f degC%s\n", out.ssd_cm, out.field_size_cm,
           out.temp_c, isnan(c.temp_c) ? " (assumed: no --temp given)" : "");
    if (isfinite(out.ref_thickness_cm))
        printf("  exit reference phantom %g cm, source-to-detector distance %g cm\n",
               out.ref_thickness_cm, out.ssd_cm + out.ref_thickness_cm);
    printf("  valid          %s to %s\n", out.calibrated_at, out.valid_until);
    if (out.confirmed_change[0])
        printf("  confirmed      %s\n", out.confirmed_change);
    if (!isnan(out.previous_factor))
        printf("  previous N     %.5f cGy/%s (change %+.2f %%)\n", out.previous_factor,
               out.reading_unit, (out.factor_cgy_per_unit - out.previous_factor) / out.previous_factor * 100);
    if (out.n == 1)
        printf("note: a single reading gives no SD; take several readings where you can\n");
    return CLI_EXIT_OK;
}

static int calib_list(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    fxl_calibration *list = NULL;
    size_t n = 0, i;
    int npos, rc;

    rc = cli_parse(env, "calib list [SERIAL]",
                   "Lists calibrations, newest first, of one detector or of all, each marked\n"
                   "current, expired or superseded.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if ((rc = fxl_calib_list(env->ctx, &list, &n, npos ? pos[0] : NULL, NULL)) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *arr = cJSON_CreateArray();
        for (i = 0; i < n; i++) {
            cJSON *o = calib_json(&list[i]);
            cJSON_AddItemToObject(o, "signatures", signatures_json(env, "calibrations", list[i].id));
            cJSON_AddItemToArray(arr, o);
        }
        free(list);
        return cli_print_json(arr);
    }
    if (n == 0) {
        printf("no calibrations\n");
    } else {
        /* 80 columns; dates in the department's zone */
        static const char *const head[] = {"#", "serial", "machine", "beam", "point", "date",
                                           "until", "N", "n", "state", NULL};
        cli_table tab;
        cli_table_init(&tab, head);
        tab.gap = 1;
        tab.right[0] = tab.right[8] = 1;
        for (i = 0; i < n; i++) {
            char id[24], factor[40], date[16], until[16], cnt[16];
            const char *cells[10];
            snprintf(id, sizeof id, "#%lld", (long long)list[i].id);
            snprintf(factor, sizeof factor, "%.5f cGy/%s", list[i].factor_cgy_per_unit,
                     list[i].reading_unit);
            cli_local_date(env, date, list[i].calibrated_at);
            cli_local_date(env, until, list[i].valid_until);
            snprintf(cnt, sizeof cnt, "%d", list[i].n);
            cells[0] = id;
            cells[1] = list[i].serial;
            cells[2] = list[i].machine;
            cells[3] = list[i].beam;
            cells[4] = list[i].point;
            cells[5] = date;
            cells[6] = until;
            cells[7] = factor;
            cells[8] = cnt;
            cells[9] = list[i].state;
            cli_table_add(&tab, cells);
        }
        cli_table_print(stdout, &tab, CLI_WIDTH, 0);
        cli_table_release(&tab);
    }
    free(list);
    return CLI_EXIT_OK;
}

static const cli_sub subs[] = {
    {"add", calib_add, "record a cross-calibration (physicist or admin)"},
    {"list", calib_list, "list calibrations"},
    {NULL, NULL, NULL}};

int cmd_calib(cli_env *env, int argc, char **argv)
{
    return cli_dispatch_sub(env, subs, "Cross-calibrations of detectors against an ion chamber.",
                            argc, argv);
}
