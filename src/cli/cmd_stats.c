/* fxledger stats: statistics of the deviations of a period by site,
 * technique, energy, point and detector, with I-MR limits and a level
 * suggestion beside the levels in force; as a table, JSON or a PDF.
 * docs/statistics.md. Reads the database only. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "cli/cli.h"
#include "cli/table.h"
#include "cli/json_put.h"
#include "fxl/outfile.h"
#include "fxl/period_stats.h"
#include "fxl/report.h"

static void fmt(char *buf, size_t n, double v, const char *f)
{
    if (isfinite(v))
        snprintf(buf, n, f, v);
    else
        snprintf(buf, n, "-");
}

static void group_name(char *out, size_t n, const fxl_ps_group *g)
{
    size_t used = 0;

#define PART(...)                                                                       \
    do {                                                                                \
        if (used < n)                                                                   \
            used += (size_t)snprintf(out + used, n - used, "%s", used ? " / " : "");   \
        if (used < n)                                                                   \
            used += (size_t)snprintf(out + used, n - used, __VA_ARGS__);                \
    } while (0)
    out[0] = '\0';
    if (g->site[0])
        PART("%s", g->site);
    if (g->technique[0])
        PART("%s", g->technique);
    if (g->modality[0])
        PART("%g %s", g->energy, strcmp(g->modality, "electron") == 0 ? "MeV" : "MV");
    if (g->point[0])
        PART("%s", g->point);
    if (g->detector[0])
        PART("%s (%s)", g->detector, g->detector_serial);
    if (!out[0])
        snprintf(out, n, "all results");
#undef PART
}

static cJSON *group_json(const fxl_ps_group *g)
{
    cJSON *o = cJSON_CreateObject(), *k, *st, *imr, *lv, *sg, *series;
    size_t i;

    k = cJSON_AddObjectToObject(o, "group");
    cli_json_put_text(k, "site", g->site);
    cli_json_put_text(k, "technique", g->technique);
    cli_json_put_text(k, "modality", g->modality);
    cli_json_put_number(k, "energy", g->energy);
    cli_json_put_text(k, "point", g->point);
    cli_json_put_text(k, "detector", g->detector);
    cli_json_put_text(k, "detector_serial", g->detector_serial);
    cJSON_AddNumberToObject(o, "n", (double)g->n);
    cJSON_AddNumberToObject(o, "not_judged", (double)g->n_not_judged);
    st = cJSON_AddObjectToObject(o, "deviation_pct");
    cli_json_put_number(st, "mean", g->summary.mean);
    cli_json_put_number(st, "sd", g->summary.sd);
    cli_json_put_number(st, "median", g->summary.median);
    cli_json_put_number(st, "p05", g->summary.p05);
    cli_json_put_number(st, "p95", g->summary.p95);
    cli_json_put_number(st, "min", g->summary.min);
    cli_json_put_number(st, "max", g->summary.max);
    cJSON_AddNumberToObject(o, "outside_tolerance", (double)g->n_outside_tol);
    cJSON_AddNumberToObject(o, "outside_action", (double)g->n_outside_action);
    cli_json_put_number(o, "share_outside_tolerance",
                        g->n ? (double)g->n_outside_tol / (double)g->n : NAN);
    cli_json_put_number(o, "share_outside_action",
                        g->n ? (double)g->n_outside_action / (double)g->n : NAN);
    imr = cJSON_AddObjectToObject(o, "imr");
    cli_json_put_number(imr, "centre", g->n ? g->imr.centre : NAN);
    cli_json_put_number(imr, "mr_mean", g->imr.mr_mean);
    cli_json_put_number(imr, "ucl", g->imr.ucl);
    cli_json_put_number(imr, "lcl", g->imr.lcl);
    cli_json_put_number(imr, "mr_ucl", g->imr.mr_ucl);
    cJSON_AddNumberToObject(imr, "points_beyond_limits", (double)g->imr.beyond);
    cJSON_AddNumberToObject(imr, "ranges_beyond_limit", (double)g->imr.mr_beyond);
    lv = cJSON_AddObjectToObject(o, "levels_in_force");
    cli_json_put_number(lv, "tolerance_pct", g->tolerance_pct);
    cli_json_put_number(lv, "action_pct", g->action_pct);
    cJSON_AddNumberToObject(lv, "variants", (double)g->level_variants);
    sg = cJSON_AddObjectToObject(o, "suggested_levels");
    cJSON_AddBoolToObject(sg, "offered", g->suggestion.offered);
    cli_json_put_number(sg, "tolerance_pct", g->suggestion.tolerance_pct);
    cli_json_put_number(sg, "action_pct", g->suggestion.action_pct);
    if (g->suggestion.offered)
        cJSON_AddStringToObject(sg, "basis", g->suggestion.basis);
    else {
        char why[96];
        snprintf(why, sizeof why, "fewer than %d results judged against levels",
                 FXL_STATS_SUGGEST_MIN_N);
        cJSON_AddStringToObject(sg, "basis", why);
    }
    cJSON_AddBoolToObject(sg, "applied", 0);
    series = cJSON_AddArrayToObject(o, "series");
    for (i = 0; i < g->n; i++) {
        cJSON *p = cJSON_CreateObject();
        cli_json_put_id(p, "measurement_id", g->ids[i]);
        cJSON_AddNumberToObject(p, "deviation_pct", g->series[i]);
        cJSON_AddItemToArray(series, p);
    }
    return o;
}

static int print_stats(cli_env *env, const fxl_report_period *per, const fxl_period_stats *ps,
                       const char *file, const fxl_report_result *res)
{
    char by[96], name[300], a[7][24];
    size_t i;

    fxl_ps_format_by(by, sizeof by, ps->by);
    if (env->json) {
        cJSON *o = cJSON_CreateObject(), *groups;
        cJSON_AddStringToObject(o, "period", per->label);
        cJSON_AddStringToObject(o, "first_day", per->first_day);
        cJSON_AddStringToObject(o, "last_day", per->last_day);
        cJSON_AddStringToObject(o, "timezone", per->timezone);
        cJSON_AddStringToObject(o, "from_utc", ps->from);
        cJSON_AddStringToObject(o, "to_utc", ps->to);
        cJSON_AddStringToObject(o, "by", by);
        cJSON_AddStringToObject(o, "percentile_method",
                                "linear interpolation at p(n-1) between order statistics "
                                "(Python statistics.quantiles method='inclusive')");
        cJSON_AddNumberToObject(o, "results", (double)ps->total);
        cJSON_AddNumberToObject(o, "not_judged", (double)ps->total_not_judged);
        if (file && res) {
            cJSON_AddStringToObject(o, "file", file);
            cJSON_AddNumberToObject(o, "pages", res->pages);
        }
        groups = cJSON_AddArrayToObject(o, "groups");
        for (i = 0; i < ps->ngroups; i++)
            cJSON_AddItemToArray(groups, group_json(&ps->groups[i]));
        return cli_print_json(o);
    }
    {
        char head[600];
        snprintf(head, sizeof head, "Statistics of deviations, %s (%s to %s, %s), by %s: %zu result%s "
                 "judged against levels, %zu not judged", per->label, per->first_day, per->last_day,
                 per->timezone, by, ps->total, ps->total == 1 ? "" : "s", ps->total_not_judged);
        cli_wrap(stdout, "", head, CLI_WIDTH);
        printf("\n");
    }
    if (ps->ngroups == 0) {
        printf("No results in this period.\n\n");
        cli_print_caveat(stdout);
        return CLI_EXIT_OK;
    }
    for (i = 0; i < ps->ngroups; i++) {
        const fxl_ps_group *g = &ps->groups[i];

        group_name(name, sizeof name, g);
        printf("%s", cli_color(env, CLI_BOLD));
        cli_wrap(stdout, "", name, CLI_WIDTH);
        printf("%s", cli_color(env, CLI_RESET));
        if (g->n == 0) {
            printf("  no result judged against levels (%zu not judged)\n\n", g->n_not_judged);
            continue;
        }
        fmt(a[0], sizeof a[0], g->summary.mean, "%+.2f");
        fmt(a[1], sizeof a[1], g->summary.sd, "%.2f");
        fmt(a[2], sizeof a[2], g->summary.median, "%+.2f");
        fmt(a[3], sizeof a[3], g->summary.p05, "%+.2f");
        fmt(a[4], sizeof a[4], g->summary.p95, "%+.2f");
        /* 80 columns: counts on one line, the distribution on the next */
        printf("  n %zu (%zu not judged)  mean %s %%  SD %s %%\n", g->n, g->n_not_judged, a[0], a[1]);
        printf("  median %s %%  P5 %s %%  P95 %s %%\n", a[2], a[3], a[4]);
        printf("  outside tolerance %zu (%.1f %%)  outside action %zu (%.1f %%)\n",
               g->n_outside_tol, 100.0 * (double)g->n_outside_tol / (double)g->n,
               g->n_outside_action, 100.0 * (double)g->n_outside_action / (double)g->n);
        fmt(a[0], sizeof a[0], g->imr.centre, "%+.3f");
        fmt(a[1], sizeof a[1], g->imr.lcl, "%+.3f");
        fmt(a[2], sizeof a[2], g->imr.ucl, "%+.3f");
        fmt(a[3], sizeof a[3], g->imr.mr_mean, "%.3f");
        fmt(a[4], sizeof a[4], g->imr.mr_ucl, "%.3f");
        {
            char imr[400];
            snprintf(imr, sizeof imr, "centre %s %%, limits %s / %s %%, average moving range %s %%, "
                     "MR limit %s %%; %zu point%s beyond the limits", a[0], a[1], a[2], a[3], a[4],
                     g->imr.beyond, g->imr.beyond == 1 ? "" : "s");
            cli_wrap_hang(stdout, "  I-MR: ", 4, imr, CLI_WIDTH);
        }
        fmt(a[5], sizeof a[5], g->tolerance_pct, "%.2f");
        fmt(a[6], sizeof a[6], g->action_pct, "%.2f");
        {
            char lv[300];
            snprintf(lv, sizeof lv, "tolerance %s %%, action %s %%%s", a[5], a[6],
                     g->level_variants > 1 ? " (most used; levels changed within the period)" : "");
            cli_wrap_hang(stdout, "  levels in force: ", 4, lv, CLI_WIDTH);
        }
        if (g->suggestion.offered)
            printf("  suggested from the spread (not applied): tolerance %.1f %%, action %.1f %%\n",
                   g->suggestion.tolerance_pct, g->suggestion.action_pct);
        else
            printf("  no level suggestion: fewer than %d results\n", FXL_STATS_SUGGEST_MIN_N);
        printf("\n");
    }
    {
        char sug[1200];
        snprintf(sug, sizeof sug, "%s. They are never applied by fxledger; levels change only "
                 "through 'fxledger levels'.", ps->groups[0].suggestion.basis);
        cli_wrap_hang(stdout, "Suggested levels: ", 0, sug, CLI_WIDTH);
        printf("\n");
    }
    cli_print_caveat(stdout);
    return CLI_EXIT_OK;
}

int cmd_stats(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"month", "YYYY-MM", "calendar month in the department's time zone", NULL},
        {"from", "YYYY-MM-DD", "first local day of the period (with --to)", NULL},
        {"to", "YYYY-MM-DD", "last local day of the period, inclusive", NULL},
        {"by", "KEYS", "grouping: comma-separated site, technique, energy, point, detector, "
                       "or all (default all)", NULL},
        {"out", "FILE", "also write the statistics as a PDF report (must not exist; see --force)", NULL},
        {"force", NULL, "replace an existing regular file (never a database, directory or device)", NULL},
        {"generated-at", "DATETIME", "fix the generation time printed on the PDF (UTC)", NULL},
        {NULL, NULL, NULL, NULL}};
    fxl_period_stats ps = FXL_PERIOD_STATS_INIT;
    fxl_report_period per;
    fxl_report_options ropt = FXL_REPORT_OPTIONS_INIT;
    fxl_report_result res;
    char when[FXL_TIME_LEN];
    unsigned by = FXL_PS_ALL;
    const char *out;
    int npos, rc;

    rc = cli_parse(env, "stats (--month YYYY-MM | --from DAY --to DAY) [--by KEYS] [--out FILE.pdf [--force]]",
                   "Statistics of the deviations of the results treated in a period, for the\n"
                   "periodic review of the levels: per group n, mean, SD, median, 5th and 95th\n"
                   "percentiles, the shares outside tolerance and action, the individuals and\n"
                   "moving-range (I-MR) chart limits, and levels suggested from the spread\n"
                   "beside the levels in force. Suggestions are never applied. Superseded\n"
                   "readings are left out. Any role may run it; it reads the database only.",
                   opts, argc, argv, NULL, 0, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (!cli_get(opts, "month") && !cli_get(opts, "from") && !cli_get(opts, "to")) {
        cli_error("a period is required: --month YYYY-MM, or --from DAY --to DAY");
        return CLI_EXIT_USAGE;
    }
    if (cli_get(opts, "by") && fxl_ps_parse_by(env->ctx, &by, cli_get(opts, "by")) != 0)
        return cli_fail(env, FXL_EINVAL);
    if (cli_get(opts, "generated-at")) {
        if (fxl_time_normalize(when, cli_get(opts, "generated-at"), 0) != 0) {
            cli_error("generation time '%s' must be YYYY-MM-DD or YYYY-MM-DDTHH:MM[:SS]Z (UTC)",
                      cli_get(opts, "generated-at"));
            return CLI_EXIT_USAGE;
        }
        ropt.generated_at = when;
    }
    if ((rc = fxl_require_role(env->ctx, FXL_ROLES_ANY, "reading statistics")) != 0)
        return cli_fail(env, rc);
    ropt.force = cli_get(opts, "force") != NULL;
    if (cli_get(opts, "out") && *cli_get(opts, "out") &&
        (rc = fxl_outfile_check(env->ctx, cli_get(opts, "out"), ropt.force ? FXL_OUT_FORCE : 0)) != 0)
        return cli_fail(env, rc);
    if ((rc = fxl_report_period_resolve(env->ctx, &per, cli_get(opts, "month"),
                                        cli_get(opts, "from"), cli_get(opts, "to"))) != 0)
        return cli_fail(env, rc);
    out = cli_get(opts, "out");
    if (out) {
        if (!*out) {
            cli_error("--out needs a file name (the PDF to write)");
            return CLI_EXIT_USAGE;
        }
        if ((rc = fxl_report_stats(env->ctx, &res, out, &per, by, &ropt)) != 0)
            return cli_fail(env, rc);
        if (!env->json)
            printf("wrote %s: statistics report for %s, %d page%s\n", out, per.label, res.pages,
                   res.pages == 1 ? "" : "s");
    }
    if ((rc = fxl_period_stats_compute(env->ctx, &ps, per.from, per.to, by)) != 0) {
        rc = cli_fail(env, rc);
        goto cleanup;
    }
    if (out && !env->json) {
        rc = CLI_EXIT_OK;
        goto cleanup;
    }
    /* with --json one document: the statistics and what was written */
    rc = print_stats(env, &per, &ps, out, out ? &res : NULL);
cleanup:
    fxl_period_stats_release(&ps);
    return rc;
}
