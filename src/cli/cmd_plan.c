/* fxledger plan: import a plan from fxledger's JSON plan format
 * (docs/format-plan.md) or from a DICOM RT Plan (docs/dicom-import.md, in
 * cmd_plan_dicom.c), list plans, show one plan with every field parameter and
 * what the independent model said about it. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "cli/cli.h"
#include "cli/table.h"
#include "cli/session.h"
#include "cli/plan_view.h"
#include "fxl/plan_json.h"
#include "fxl/plans.h"

static int plan_import(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"replaces", "LABEL", "label of the patient's plan this one replaces (a plan change)", NULL},
        {NULL, NULL, NULL, NULL}};
    const char *pos[1], *replaces;
    fxl_plan_spec spec;
    fxl_plan plan;
    int npos, rc;

    rc = cli_parse(env, "plan import FILE [--replaces LABEL]",
                   "Imports one plan for one existing patient from a JSON file in fxledger's plan\n"
                   "format (docs/format-plan.md). Every value is checked before anything is\n"
                   "written; machines and beams must exist. A plan is never changed afterwards:\n"
                   "a plan change is a new plan with a new label that names the one it replaces\n"
                   "(--replaces, or \"replaces\" in the file). In the same transaction each\n"
                   "point is checked against the independent expected-dose model (beam data\n"
                   "loaded with 'fxledger machine beamdata'): a planning-system expected dose that\n"
                   "differs from the model by more than setting model_crosscheck_pct (default 5 %)\n"
                   "opens a review item. Physicists and admins only.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("plan import needs the plan FILE (see 'fxledger plan import --help')");
        return CLI_EXIT_USAGE;
    }
    if ((rc = fxl_require_role(env->ctx, FXL_ROLES_PHYSICS, "importing a plan")) != 0)
        return cli_fail(env, rc);
    if ((rc = fxl_plan_json_read(env->ctx, &spec, pos[0])) != 0)
        return cli_fail(env, rc);
    replaces = cli_get(opts, "replaces");
    if (replaces) {
        if (spec.replaces[0] && strcmp(spec.replaces, replaces) != 0) {
            cli_error("--replaces '%s' contradicts \"replaces\": \"%s\" in '%s'; give one", replaces,
                      spec.replaces, pos[0]);
            fxl_plan_spec_release(&spec);
            return CLI_EXIT_DATA;
        }
        if (!*replaces || strlen(replaces) > 64) {
            cli_error("--replaces '%s' must be a plan label of 1 to 64 characters", replaces);
            fxl_plan_spec_release(&spec);
            return CLI_EXIT_USAGE;
        }
        snprintf(spec.replaces, sizeof spec.replaces, "%s", replaces);
    }
    if ((rc = cli_sign_begin(env, spec.replaces[0] ? "plan replaced" : "plan imported")) != 0) {
        fxl_plan_spec_release(&spec);
        return rc;
    }
    rc = fxl_plan_import(env->ctx, NULL, &spec);
    if (rc == 0)
        rc = fxl_plan_get(env->ctx, &plan, spec.mrn, spec.label);
    fxl_plan_spec_release(&spec);
    if (rc != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *o = cli_plan_with_fields_json(&plan);
        fxl_plan_release(&plan);
        return cli_print_json(o);
    }
    printf("imported plan %s for patient %s: %zu measured point%s%s%s\n", plan.label, plan.mrn,
           plan.n_fields, plan.n_fields == 1 ? "" : "s", plan.replaces_label[0] ? "; replaces plan " : "",
           plan.replaces_label);
    cli_plan_print_import(&plan);
    fxl_plan_release(&plan);
    return CLI_EXIT_OK;
}

static int plan_list(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    fxl_plan *list = NULL;
    size_t n = 0, i;
    int npos, rc;

    rc = cli_parse(env, "plan list [MRN]",
                   "Lists the plans of one patient, or of every patient; replaced plans are marked.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if ((rc = fxl_plan_list(env->ctx, &list, &n, npos ? pos[0] : NULL)) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *a = cJSON_CreateArray();
        for (i = 0; i < n; i++)
            cJSON_AddItemToArray(a, cli_plan_json(&list[i]));
        free(list);
        return cli_print_json(a);
    }
    if (n == 0) {
        printf("no plans%s%s\n", npos ? " for patient " : "", npos ? pos[0] : "");
    } else {
        /* 80 columns: site and technique wrap at words; the measured points
         * are in 'plan show' and --json */
        static const char *const head[] = {"MRN", "plan", "site", "technique", "fx", "cGy/fx",
                                           "logged", "status", NULL};
        cli_table tab;
        cli_table_init(&tab, head);
        tab.right[4] = tab.right[5] = tab.right[6] = 1;
        tab.wrap[2] = tab.wrap[3] = 1;
        for (i = 0; i < n; i++) {
            char dose[24], status[100], fx[16], logged[16];
            const char *cells[8];
            const fxl_plan *p = &list[i];
            if (isnan(p->dose_per_fraction_cgy))
                snprintf(dose, sizeof dose, "-");
            else
                snprintf(dose, sizeof dose, "%.1f", p->dose_per_fraction_cgy);
            if (p->replaced_by_label[0])
                snprintf(status, sizeof status, "replaced by %s", p->replaced_by_label);
            else
                snprintf(status, sizeof status, "current");
            snprintf(fx, sizeof fx, "%d", p->fractions);
            snprintf(logged, sizeof logged, "%d", p->fractions_logged);
            cells[0] = p->mrn;
            cells[1] = p->label;
            cells[2] = p->site;
            cells[3] = p->technique;
            cells[4] = fx;
            cells[5] = dose;
            cells[6] = logged;
            cells[7] = status;
            cli_table_add(&tab, cells);
        }
        cli_table_print(stdout, &tab, CLI_WIDTH, 0);
        cli_table_release(&tab);
    }
    free(list);
    return CLI_EXIT_OK;
}

static int plan_show(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[2];
    fxl_plan plan;
    size_t k;
    int npos, rc;

    rc = cli_parse(env, "plan show MRN LABEL",
                   "Shows one plan and every parameter of each field, with units, and the\n"
                   "independent model's expected dose, its factors and the cross-check made at\n"
                   "import.", opts, argc, argv,
                   pos, 2, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 2) {
        cli_error("plan show needs the patient MRN and the plan LABEL (see 'fxledger plan show --help')");
        return CLI_EXIT_USAGE;
    }
    if ((rc = fxl_plan_get(env->ctx, &plan, pos[0], pos[1])) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *o = cli_plan_with_fields_json(&plan);
        fxl_plan_release(&plan);
        return cli_print_json(o);
    }
    printf("plan %s of patient %s\n", plan.label, plan.mrn);
    {
        char line[400], dose[40] = "";
        if (!isnan(plan.dose_per_fraction_cgy))
            snprintf(dose, sizeof dose, " of %.1f cGy", plan.dose_per_fraction_cgy);
        snprintf(line, sizeof line, "site %s, technique %s, %d fraction%s%s; %d logged", plan.site,
                 plan.technique, plan.fractions, plan.fractions == 1 ? "" : "s", dose,
                 plan.fractions_logged);
        cli_wrap(stdout, "  ", line, CLI_WIDTH);
    }
    if (plan.replaces_label[0])
        printf("  replaces plan %s\n", plan.replaces_label);
    if (plan.replaced_by_label[0])
        printf("  REPLACED by plan %s: measure against that plan\n", plan.replaced_by_label);
    {
        char line[700], when[48];
        cli_local_time(env, when, sizeof when, plan.created_at);
        snprintf(line, sizeof line, "imported %s by %s from %s", when, plan.created_by, plan.source);
        cli_wrap(stdout, "  ", line, CLI_WIDTH);
    }
    for (k = 0; k < plan.n_fields; k++) {
        const fxl_field *f = &plan.fields[k];
        printf("\n  field %s, %s point (measure: %s)\n", f->name, f->point, f->policy);
        printf("    beam          %s on %s (%s, %g %s)\n", f->beam, f->machine, f->modality, f->energy,
               strcmp(f->modality, "electron") == 0 ? "MeV" : "MV");
        printf("    set-up        %s, SSD %.1f cm\n", strcmp(f->setup, "ssd") == 0 ? "SSD" : "isocentric",
               f->ssd_cm);
        printf("    MU            %.1f MU\n", f->mu);
        printf("    jaws          %.1f x %.1f cm\n", f->x_cm, f->y_cm);
        if (f->wedge_deg > 0)
            printf("    wedge         %g degrees\n", f->wedge_deg);
        else
            printf("    wedge         open (0 degrees)\n");
        printf("    tray          %s\n", f->tray ? "yes" : "no");
        printf("    gantry        %g degrees\n", f->gantry_deg);
        printf("    incidence     %g degrees on the detector\n", f->incidence_deg);
        if (!isnan(f->thickness_cm))
            printf("    thickness     %.1f cm\n", f->thickness_cm);
        if (isnan(f->expected_dose_cgy))
            printf("    expected      (none)\n");
        else
            printf("    expected      %.1f cGy (%s)\n", f->expected_dose_cgy,
                   strcmp(f->expected_source, "tps") == 0     ? "planning system"
                   : strcmp(f->expected_source, "model") == 0 ? "independent model"
                   : strcmp(f->expected_source, "manual") == 0 ? "hand calculation"
                                                               : f->expected_source);
        cli_plan_print_model(f);
    }
    fxl_plan_release(&plan);
    return CLI_EXIT_OK;
}

static const cli_sub subs[] = {
    {"import", plan_import, "import a plan from a JSON file (physicist or admin)"},
    {"import-dicom", cli_plan_import_dicom, "import a DICOM RT Plan in the DICOM JSON Model (physicist or admin)"},
    {"list", plan_list, "list plans of one patient or of all"},
    {"show", plan_show, "show one plan with every field parameter"},
    {NULL, NULL, NULL}};

int cmd_plan(cli_env *env, int argc, char **argv)
{
    return cli_dispatch_sub(env, subs,
                            "Treatment plans and their fields: import from fxledger's JSON plan format\n"
                            "or from a DICOM RT Plan (DICOM JSON Model), list and show. Plans are never\n"
                            "edited; a change is a replacement plan.",
                            argc, argv);
}
