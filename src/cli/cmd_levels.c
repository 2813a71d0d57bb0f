/* fxledger levels: save new versions of tolerance/action level sets and list
 * the sets in force. Matching and the tie rule: docs/levels.md. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "cli/cli.h"
#include "fxl/fraction.h"
#include "cli/table.h"
#include "cli/signature_view.h"
#include "cli/session.h"
#include "cli/json_put.h"
#include "fxl/plans.h"
#include "fxl/scope.h"
#include "fxl/thresholds.h"

static cJSON *set_json(const fxl_threshold_set *t)
{
    cJSON *o = cJSON_CreateObject(), *scope;
    fxl_scope s;

    fxl_threshold_set_scope(&s, t);

    cJSON_AddNumberToObject(o, "id", (double)t->id);
    cJSON_AddStringToObject(o, "name", t->name);
    cJSON_AddNumberToObject(o, "version", t->version);
    cJSON_AddStringToObject(o, "effective_from", t->effective_from);
    cJSON_AddBoolToObject(o, "active", t->active);
    scope = cJSON_AddObjectToObject(o, "scope");
    cli_json_put_text(scope, "site", t->site);
    cli_json_put_text(scope, "technique", t->technique);
    cli_json_put_text(scope, "modality", t->modality);
    cli_json_put_number(scope, "energy", t->energy);
    cli_json_put_text(scope, "point", t->point);
    cli_json_put_text(scope, "detector_kind", t->detector_kind);
    cJSON_AddNumberToObject(o, "specificity", fxl_scope_specificity(&s));
    cJSON_AddNumberToObject(o, "tolerance_pct", t->tolerance_pct);
    cJSON_AddNumberToObject(o, "action_pct", t->action_pct);
    cJSON_AddNumberToObject(o, "floor_cgy", t->floor_cgy);
    cJSON_AddStringToObject(o, "saved_by", t->created_by);
    cJSON_AddStringToObject(o, "saved_at", t->created_at);
    return o;
}

/* The date alone when the time is local midnight (a set in force from a
 * day), else the local time with its offset. */
static void when_text(const cli_env *env, char *buf, size_t size, const char *stored)
{
    char full[48];

    cli_local_time(env, full, sizeof full, stored);
    if (strlen(full) >= 16 && strncmp(full + 10, " 00:00", 6) == 0)
        snprintf(buf, size, "%.10s", full);
    else
        snprintf(buf, size, "%s", full);
}

static void add_set_row(const cli_env *env, cli_table *tab, const fxl_threshold_set *t)
{
    fxl_scope s;
    char scope[300], ver[16], when[48], tol[24], act[24], floor_[24];
    const char *cells[8];

    fxl_threshold_set_scope(&s, t);
    fxl_scope_describe(scope, sizeof scope, &s);
    snprintf(ver, sizeof ver, "v%d", t->version);
    when_text(env, when, sizeof when, t->effective_from);
    snprintf(tol, sizeof tol, "%.1f %%", t->tolerance_pct);
    snprintf(act, sizeof act, "%.1f %%", t->action_pct);
    snprintf(floor_, sizeof floor_, "%.1f cGy", t->floor_cgy);
    cells[0] = t->name;
    cells[1] = ver;
    cells[2] = when;
    cells[3] = t->active ? "active" : "inactive";
    cells[4] = tol;
    cells[5] = act;
    cells[6] = floor_;
    cells[7] = scope;
    cli_table_add(tab, cells);
}

/* A scope option: NULL not given; "any" opens the column (stored as ""). */
static const char *scope_opt(const cli_opt *opts, const char *name)
{
    const char *v = cli_get(opts, name);
    return v && strcmp(v, "any") == 0 ? "" : v;
}

/* A site or technique no plan uses is most likely misspelt: the set would
 * silently never apply. Saved anyway (plans may follow), with a warning. */
static void warn_unused_scope(cli_env *env, const fxl_threshold_set *t)
{
    char what[200];
    int n = 0;

    if (!t->active || (!t->site[0] && !t->technique[0]))
        return;
    if (fxl_plan_count_matching(env->ctx, &n, t->site, t->technique) != 0 || n > 0)
        return;
    if (t->site[0] && t->technique[0])
        snprintf(what, sizeof what, "site '%s' and technique '%s'", t->site, t->technique);
    else if (t->site[0])
        snprintf(what, sizeof what, "site '%s'", t->site);
    else
        snprintf(what, sizeof what, "technique '%s'", t->technique);
    fprintf(stderr, "fxledger: warning: no plan has %s yet; check the spelling against "
                    "'fxledger plan list'\n", what);
}

static int levels_set(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"tolerance", "PCT", "tolerance level, percent (> 0 and <= 50)", NULL},
        {"action", "PCT", "action level, percent (>= tolerance, <= 50)", NULL},
        {"floor", "CGY", "absolute floor: |D - D_exp| at or below it is within tolerance (0 to 5 cGy)", NULL},
        {"site", "S", "scope: treatment site as in plans ('any' to open)", NULL},
        {"technique", "T", "scope: technique as in plans ('any' to open)", NULL},
        {"modality", "M", "scope: photon or electron ('any' to open)", NULL},
        {"energy", "E", "scope: nominal energy, MV or MeV ('any' to open)", NULL},
        {"point", "P", "scope: entrance or exit ('any' to open)", NULL},
        {"detector-kind", "K", "scope: photon_diode, electron_diode, small_field_diode, mosfet, osl, tld, other ('any' to open)", NULL},
        {"effective", "DATE", "in force from DATE (YYYY-MM-DD or YYYY-MM-DDTHH:MM, UTC; default now)", NULL},
        {"deactivate", NULL, "save a version that takes the set out of use", NULL},
        {NULL, NULL, NULL, NULL}};
    const char *pos[1], *v;
    fxl_threshold_change chg;
    fxl_threshold_set saved;
    int npos, rc;

    rc = cli_parse(env,
                   "levels set NAME [--tolerance PCT --action PCT] [--floor CGY] [--site S] [--technique T]\n"
                   "                [--modality photon|electron] [--energy E] [--point entrance|exit]\n"
                   "                [--detector-kind K] [--effective DATE] [--deactivate]",
                   "Saves a new version of the level set NAME (the version number goes up by one;\n"
                   "no version is ever edited). A new set needs --tolerance and --action; a new\n"
                   "version of an existing set keeps every value not given (a scope option 'any'\n"
                   "opens that column). Scope columns left open match any measurement; the most\n"
                   "specific matching set wins. Two sets that are equally specific and could both\n"
                   "match one measurement are refused as a tie. Physicists and admins only.\n"
                   "Levels are local policy: see docs/levels.md.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("levels set needs the set NAME (see 'fxledger levels set --help')");
        return CLI_EXIT_USAGE;
    }
    fxl_threshold_change_init(&chg);
    chg.name = pos[0];
    if ((v = cli_get(opts, "tolerance")) && cli_double(&chg.tolerance_pct, v, "tolerance", 0.01, 50, "%") != 0)
        return CLI_EXIT_DATA;
    if ((v = cli_get(opts, "action")) && cli_double(&chg.action_pct, v, "action level", 0.01, 50, "%") != 0)
        return CLI_EXIT_DATA;
    if ((v = cli_get(opts, "floor")) && cli_double(&chg.floor_cgy, v, "floor", 0, FXL_FLOOR_CGY_MAX, "cGy") != 0)
        return CLI_EXIT_DATA;
    if ((v = cli_get(opts, "energy"))) {
        if (strcmp(v, "any") == 0)
            chg.clear_energy = 1;
        else if (cli_double(&chg.energy, v, "energy", 0.1, 50, "MV or MeV") != 0)
            return CLI_EXIT_DATA;
    }
    chg.site = scope_opt(opts, "site");
    chg.technique = scope_opt(opts, "technique");
    chg.modality = scope_opt(opts, "modality");
    chg.point = scope_opt(opts, "point");
    chg.detector_kind = scope_opt(opts, "detector-kind");
    chg.effective_from = cli_get(opts, "effective");
    chg.deactivate = cli_get(opts, "deactivate") != NULL;
    if ((rc = cli_sign_begin(env, chg.deactivate ? "levels withdrawn" : "levels in force")) != 0)
        return rc;
    if ((rc = fxl_thresholds_save(env->ctx, &saved, &chg)) != 0)
        return cli_fail(env, rc);
    warn_unused_scope(env, &saved);
    if (env->json) {
        cJSON *o = set_json(&saved);
        cJSON_AddItemToObject(o, "signatures", signatures_json(env, "threshold_sets", saved.id));
        return cli_print_json(o);
    }
    if (saved.active) {
        fxl_scope s;
        char scope[300];
        fxl_threshold_set_scope(&s, &saved);
        fxl_scope_describe(scope, sizeof scope, &s);
        printf("saved level set %s version %d, in force from %s: tolerance %.1f %%, action %.1f %%, "
               "floor %.1f cGy; applies to %s\n",
               saved.name, saved.version, saved.effective_from, saved.tolerance_pct, saved.action_pct,
               saved.floor_cgy, scope);
    } else {
        printf("saved level set %s version %d: deactivated from %s\n", saved.name, saved.version,
               saved.effective_from);
    }
    return CLI_EXIT_OK;
}

static int levels_list(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"all-versions", NULL, "every stored version, active or not", NULL},
        {"at", "TIME", "the sets in force at TIME, local or with an offset (default now)", NULL},
        {NULL, NULL, NULL, NULL}};
    const char *pos[1], *at_text;
    char at[FXL_TIME_LEN], now[FXL_TIME_LEN];
    fxl_threshold_set *list = NULL;
    size_t n = 0, i;
    int npos, rc, all;

    rc = cli_parse(env, "levels list [--all-versions] [--at DATE]",
                   "Lists the tolerance and action level sets in force (now or at DATE) with their\n"
                   "scope, levels, version and effective date; or every stored version.",
                   opts, argc, argv, pos, 0, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    all = cli_get(opts, "all-versions") != NULL;
    at_text = cli_get(opts, "at");
    if (at_text && all) {
        cli_error("give --at or --all-versions, not both");
        return CLI_EXIT_USAGE;
    }
    if (at_text) {
        /* local time in the department's zone or an offset, as record --at */
        if (fxl_time_parse_local(env->ctx, at, at_text) != 0) {
            cli_error("--at: %s", fxl_errmsg(env->ctx));
            return CLI_EXIT_USAGE;
        }
    } else {
        fxl_now(env->ctx, now);
        memcpy(at, now, sizeof at);
    }
    if ((rc = fxl_thresholds_list(env->ctx, &list, &n, at, all)) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *a = cJSON_CreateArray();
        for (i = 0; i < n; i++) {
            cJSON *o = set_json(&list[i]);
            cJSON_AddItemToObject(o, "signatures", signatures_json(env, "threshold_sets", list[i].id));
            cJSON_AddItemToArray(a, o);
        }
        free(list);
        return cli_print_json(a);
    }
    if (all)
        printf("every stored version of every level set:\n");
    else {
        char when[48];
        cli_local_time(env, when, sizeof when, at);
        printf("level sets in force at %s:\n", when);
    }
    if (n == 0) {
        printf("  none: every measurement is not evaluable until a level set applies\n"
               "  (add one with 'fxledger levels set NAME --tolerance PCT --action PCT')\n");
    } else {
        /* 80 columns: the scope under its row; times in the department's zone */
        static const char *const head[] = {"name", "ver", "from", "status", "tol.", "action",
                                           "floor", "scope", NULL};
        cli_table tab;
        cli_table_init(&tab, head);
        tab.right[4] = tab.right[5] = tab.right[6] = 1;
        tab.below[7] = 1;
        for (i = 0; i < n; i++)
            add_set_row(env, &tab, &list[i]);
        cli_table_print(stdout, &tab, CLI_WIDTH, 0);
        cli_table_release(&tab);
    }
    free(list);
    printf("\nLevels are local policy, set by the department's physicists.\n");
    return CLI_EXIT_OK;
}

static const cli_sub subs[] = {
    {"set", levels_set, "save a new version of a level set (physicist or admin)"},
    {"list", levels_list, "list the level sets in force, or every version"},
    {NULL, NULL, NULL}};

int cmd_levels(cli_env *env, int argc, char **argv)
{
    return cli_dispatch_sub(env, subs,
                            "Tolerance and action levels, scoped by site, technique, modality, energy,\n"
                            "measured point and detector kind, versioned by effective date.",
                            argc, argv);
}
