/* fxledger table: load correction-factor tables from a JSON file (format in
 * docs/format-corrections.md), list them and show one with its points. */
#include <errno.h>
#include <stdlib.h>
#include <string.h>

#include "cli/cli.h"
#include "cli/table.h"
#include "cli/session.h"
#include "cli/json_put.h"
#include "fxl/corrections.h"

static cJSON *table_json(const fxl_corr_table *t)
{
    cJSON *o = cJSON_CreateObject();
    const char *unit = "";
    size_t i;

    fxl_corr_param_range(t->parameter, NULL, NULL, &unit);
    cJSON_AddNumberToObject(o, "id", (double)t->id);
    cJSON_AddStringToObject(o, "serial", t->serial);
    cJSON_AddStringToObject(o, "machine", t->machine);
    cJSON_AddStringToObject(o, "beam", t->beam);
    cJSON_AddStringToObject(o, "point", t->point);
    cJSON_AddStringToObject(o, "parameter", t->parameter);
    cJSON_AddStringToObject(o, "x_unit", unit);
    cJSON_AddStringToObject(o, "effective_from", t->effective_from);
    cJSON_AddBoolToObject(o, "in_force", t->in_force);
    cli_json_put_text(o, "source", t->source);
    cJSON_AddStringToObject(o, "user", t->user);
    cJSON_AddStringToObject(o, "created_at", t->created_at);
    cJSON_AddNumberToObject(o, "n_points", (double)t->n_points);
    cJSON_AddNumberToObject(o, "x_min", t->x_min);
    cJSON_AddNumberToObject(o, "x_max", t->x_max);
    if (t->points) {
        cJSON *a = cJSON_AddArrayToObject(o, "points");
        for (i = 0; i < t->n_points; i++) {
            cJSON *p = cJSON_CreateObject();
            cJSON_AddNumberToObject(p, "x", t->points[i].x);
            cJSON_AddNumberToObject(p, "factor", t->points[i].factor);
            cJSON_AddItemToArray(a, p);
        }
    }
    return o;
}

static int table_load(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    fxl_corr_file file = FXL_CORR_FILE_INIT;
    int64_t *ids = NULL;
    size_t i;
    int npos, rc;

    rc = cli_parse(env, "table load FILE",
                   "Loads correction-factor tables for one detector from a JSON file (format:\n"
                   "docs/format-corrections.md). Every table is checked first (strictly\n"
                   "increasing x, factors inside (0.5, 2.0), known parameter, detector and\n"
                   "machine/beam exist, valid effective date); then the whole file is written in\n"
                   "one transaction, or nothing is. Tables are never edited: load a new version\n"
                   "with a later effective date.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("table load needs a FILE (see 'fxledger table load --help')");
        return CLI_EXIT_USAGE;
    }
    if ((rc = fxl_corr_file_read(env->ctx, &file, pos[0])) != 0) {
        rc = cli_fail(env, rc);
        goto cleanup;
    }
    if ((rc = cli_sign_begin(env, "correction table loaded")) != 0)
        goto cleanup;
    if ((rc = fxl_corr_store(env->ctx, &ids, &file)) != 0) {
        rc = cli_fail(env, rc);
        goto cleanup;
    }
    if (env->json) {
        cJSON *o = cJSON_CreateObject(), *a;
        cJSON_AddStringToObject(o, "file", pos[0]);
        cJSON_AddStringToObject(o, "serial", file.detector);
        a = cJSON_AddArrayToObject(o, "tables");
        for (i = 0; i < file.n_tables; i++) {
            cJSON *t = cJSON_CreateObject();
            cJSON_AddNumberToObject(t, "id", (double)ids[i]);
            cJSON_AddStringToObject(t, "machine", file.tables[i].machine);
            cJSON_AddStringToObject(t, "beam", file.tables[i].beam);
            cJSON_AddStringToObject(t, "point", file.tables[i].point);
            cJSON_AddStringToObject(t, "parameter", file.tables[i].parameter);
            cJSON_AddStringToObject(t, "effective_from", file.tables[i].effective_from);
            cJSON_AddNumberToObject(t, "n_points", (double)file.tables[i].n_points);
            cJSON_AddItemToArray(a, t);
        }
        rc = cli_print_json(o);
        goto cleanup;
    }
    printf("loaded %zu correction table%s for detector '%s' from %s\n", file.n_tables,
           file.n_tables == 1 ? "" : "s", file.detector, pos[0]);
    for (i = 0; i < file.n_tables; i++) {
        const fxl_corr_table_spec *t = &file.tables[i];
        const char *unit = "";
        fxl_corr_param_range(t->parameter, NULL, NULL, &unit);
        {
            char line[300];
            snprintf(line, sizeof line, "#%-4lld %s %s %s %s from %.10s, %zu points, x %g to %g %s",
                     (long long)ids[i], t->machine, t->beam, t->point, t->parameter, t->effective_from,
                     t->n_points, t->points[0].x, t->points[t->n_points - 1].x, unit);
            cli_wrap_hang(stdout, "  ", 8, line, CLI_WIDTH);
        }
    }
    rc = CLI_EXIT_OK;
cleanup:
    free(ids);
    fxl_corr_file_release(&file);
    return rc;
}

static int table_list(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    fxl_corr_table *list = NULL;
    size_t n = 0, i;
    int npos, rc;

    rc = cli_parse(env, "table list [SERIAL]",
                   "Lists correction tables of one detector or of all; 'in force' marks the\n"
                   "version that applies now for its detector, beam and parameter.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if ((rc = fxl_corr_list(env->ctx, &list, &n, npos ? pos[0] : NULL, NULL)) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *arr = cJSON_CreateArray();
        for (i = 0; i < n; i++)
            cJSON_AddItemToArray(arr, table_json(&list[i]));
        fxl_corr_list_free(list, n);
        return cli_print_json(arr);
    }
    if (n == 0) {
        printf("no correction tables\n");
    } else {
        /* 80 columns; dates in the department's zone */
        static const char *const head[] = {"#", "serial", "machine", "beam", "pt", "parameter",
                                           "from", "n", "range", "in force", NULL};
        cli_table tab;
        cli_table_init(&tab, head);
        tab.gap = 1;
        tab.right[0] = tab.right[7] = 1;
        for (i = 0; i < n; i++) {
            const char *unit = "";
            const char *cells[10];
            char range[40], id[24], from[16], pts[16];
            fxl_corr_param_range(list[i].parameter, NULL, NULL, &unit);
            snprintf(range, sizeof range, "%g to %g %s", list[i].x_min, list[i].x_max, unit);
            snprintf(id, sizeof id, "#%lld", (long long)list[i].id);
            cli_local_date(env, from, list[i].effective_from);
            snprintf(pts, sizeof pts, "%zu", list[i].n_points);
            cells[0] = id;
            cells[1] = list[i].serial;
            cells[2] = list[i].machine;
            cells[3] = list[i].beam;
            cells[4] = strcmp(list[i].point, "entrance") == 0 ? "ent" : list[i].point;
            cells[5] = list[i].parameter;
            cells[6] = from;
            cells[7] = pts;
            cells[8] = range;
            cells[9] = list[i].in_force ? "yes" : "no";
            cli_table_add(&tab, cells);
        }
        cli_table_print(stdout, &tab, CLI_WIDTH, 0);
        cli_table_release(&tab);
    }
    fxl_corr_list_free(list, n);
    return CLI_EXIT_OK;
}

static int table_show(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    fxl_corr_table t;
    const char *unit = "";
    long id = 0;
    size_t i;
    int npos, rc;

    rc = cli_parse(env, "table show ID", "Shows one correction table with all its points.", opts,
                   argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("table show needs a table ID (see 'fxledger table list')");
        return CLI_EXIT_USAGE;
    }
    if (cli_int(&id, pos[0], "table ID", 1, 2147483647L) != 0)
        return CLI_EXIT_DATA;
    if ((rc = fxl_corr_get(env->ctx, &t, (int64_t)id, NULL)) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        rc = cli_print_json(table_json(&t));
        fxl_corr_table_release(&t);
        return rc;
    }
    fxl_corr_param_range(t.parameter, NULL, NULL, &unit);
    printf("correction table #%lld\n", (long long)t.id);
    printf("  detector        %s\n", t.serial);
    printf("  beam            %s %s\n", t.machine, t.beam);
    printf("  point           %s\n", t.point);
    printf("  parameter       %s (%s)\n", t.parameter, unit);
    {
        char when[48], line[700];
        cli_local_time(env, when, sizeof when, t.effective_from);
        printf("  effective from  %s%s\n", when, t.in_force ? " (in force)" : " (not in force)");
        cli_wrap(stdout, "  source          ", t.source[0] ? t.source : "-", CLI_WIDTH);
        cli_local_time(env, when, sizeof when, t.created_at);
        snprintf(line, sizeof line, "%s by %s", when, t.user);
        cli_wrap(stdout, "  loaded          ", line, CLI_WIDTH);
    }
    printf("  %12s  %s\n", "x", "factor");
    for (i = 0; i < t.n_points; i++) {
        char x[32];
        snprintf(x, sizeof x, "%g %s", t.points[i].x, unit);
        printf("  %12s  %.4f\n", x, t.points[i].factor);
    }
    if (strcmp(t.parameter, "wedge") == 0 || strcmp(t.parameter, "tray") == 0) {
        cli_wrap(stdout, "", "only the values listed are commissioned (exact match); others are "
                 "not evaluable", CLI_WIDTH);
    } else {
        char line[200];
        snprintf(line, sizeof line, "linear interpolation from %g to %g %s; not evaluable outside "
                 "that range", t.x_min, t.x_max, unit);
        cli_wrap(stdout, "", line, CLI_WIDTH);
    }
    fxl_corr_table_release(&t);
    return CLI_EXIT_OK;
}

static const cli_sub subs[] = {
    {"load", table_load, "load correction tables from a JSON file (physicist or admin)"},
    {"list", table_list, "list correction tables"},
    {"show", table_show, "show one table with its points"},
    {NULL, NULL, NULL}};

int cmd_table(cli_env *env, int argc, char **argv)
{
    return cli_dispatch_sub(env, subs,
                            "Correction-factor tables: factor versus field size, SSD, wedge, tray or\n"
                            "angle, per detector and beam, versioned by effective date.",
                            argc, argv);
}
