/* fxledger patient: add, list and show patients (show includes their plans,
 * fields and the number of fractions logged). */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "cli/cli.h"
#include "cli/json_put.h"
#include "cli/table.h"
#include "fxl/fraction.h"
#include "fxl/patients.h"
#include "fxl/plans.h"

static cJSON *patient_json(const fxl_patient *p)
{
    cJSON *o = cJSON_CreateObject();

    cJSON_AddStringToObject(o, "mrn", p->mrn);
    cJSON_AddStringToObject(o, "family_name", p->family_name);
    cJSON_AddStringToObject(o, "given_name", p->given_name);
    cli_json_put_text(o, "birth_date", p->birth_date);
    cJSON_AddNumberToObject(o, "plan_count", p->plans);
    cJSON_AddNumberToObject(o, "fractions_logged", p->fractions_logged);
    cJSON_AddStringToObject(o, "created_at", p->created_at);
    return o;
}

static int patient_add(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"family", "NAME", "family name (required)", NULL},
        {"given", "NAME", "given name(s)", NULL},
        {"birth-date", "DATE", "date of birth, YYYY-MM-DD", NULL},
        {NULL, NULL, NULL, NULL}};
    const char *pos[1];
    fxl_patient p;
    int npos, rc;

    rc = cli_parse(env, "patient add MRN --family NAME [--given NAME] [--birth-date YYYY-MM-DD]",
                   "Adds a patient by medical record number (MRN). Therapists, physicists and\n"
                   "admins may add patients. A patient is never deleted; a mistyped value is\n"
                   "corrected with 'fxledger patient correct' and its history kept.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("patient add needs the MRN (see 'fxledger patient add --help')");
        return CLI_EXIT_USAGE;
    }
    if (!cli_get(opts, "family")) {
        cli_error("--family is required (the family name, 1 to 200 characters)");
        return CLI_EXIT_USAGE;
    }
    rc = fxl_patient_add(env->ctx, NULL, pos[0], cli_get(opts, "family"), cli_get(opts, "given"),
                         cli_get(opts, "birth-date"));
    if (rc == 0)
        rc = fxl_patient_get(env->ctx, &p, pos[0]);
    if (rc != 0)
        return cli_fail(env, rc);
    if (env->json)
        return cli_print_json(patient_json(&p));
    printf("added patient %s: %s%s%s\n", p.mrn, p.family_name, p.given_name[0] ? ", " : "",
           p.given_name);
    return CLI_EXIT_OK;
}

static int patient_list(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    fxl_patient *list = NULL;
    size_t n = 0, i;
    int npos, rc;

    rc = cli_parse(env, "patient list", "Lists every patient with the number of plans and of fractions logged.",
                   opts, argc, argv, pos, 0, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if ((rc = fxl_patient_list(env->ctx, &list, &n)) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *a = cJSON_CreateArray();
        for (i = 0; i < n; i++)
            cJSON_AddItemToArray(a, patient_json(&list[i]));
        free(list);
        return cli_print_json(a);
    }
    if (n == 0) {
        printf("no patients yet (add one with 'fxledger patient add MRN --family NAME')\n");
    } else {
        printf("%-16s %-32s %-10s %5s %9s\n", "MRN", "name", "born", "plans", "fractions");
        for (i = 0; i < n; i++) {
            char name[420];
            snprintf(name, sizeof name, "%s%s%s", list[i].family_name, list[i].given_name[0] ? ", " : "",
                     list[i].given_name);
            printf("%-16s %-32s %-10s %5d %9d\n", list[i].mrn, name,
                   list[i].birth_date[0] ? list[i].birth_date : "-", list[i].plans,
                   list[i].fractions_logged);
        }
    }
    free(list);
    return CLI_EXIT_OK;
}

static cJSON *field_summary_json(const fxl_field *f)
{
    cJSON *o = cJSON_CreateObject();

    cJSON_AddStringToObject(o, "name", f->name);
    cJSON_AddStringToObject(o, "point", f->point);
    cJSON_AddStringToObject(o, "machine", f->machine);
    cJSON_AddStringToObject(o, "beam", f->beam);
    cJSON_AddNumberToObject(o, "mu", f->mu);
    cli_json_put_number(o, "expected_dose_cgy", f->expected_dose_cgy);
    cJSON_AddStringToObject(o, "policy", f->policy);
    return o;
}

static int patient_show(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    fxl_patient p;
    fxl_plan *plans = NULL;
    cJSON *root = NULL, *arr = NULL;
    size_t n = 0, i, k;
    int npos, rc;

    rc = cli_parse(env, "patient show MRN",
                   "Shows a patient, each plan (replaced plans included, marked) with its fields,\n"
                   "and the number of fractions logged.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("patient show needs the MRN (see 'fxledger patient show --help')");
        return CLI_EXIT_USAGE;
    }
    if ((rc = fxl_patient_get(env->ctx, &p, pos[0])) != 0 ||
        (rc = fxl_plan_list(env->ctx, &plans, &n, pos[0])) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        root = patient_json(&p);
        arr = cJSON_AddArrayToObject(root, "plans");
    } else {
        printf("patient %s: %s%s%s\n", p.mrn, p.family_name, p.given_name[0] ? ", " : "", p.given_name);
        printf("  born %s; %d plan%s; %d fraction%s logged\n", p.birth_date[0] ? p.birth_date : "(not given)",
               p.plans, p.plans == 1 ? "" : "s", p.fractions_logged, p.fractions_logged == 1 ? "" : "s");
    }
    for (i = 0; i < n; i++) {
        fxl_plan full;
        if ((rc = fxl_plan_get(env->ctx, &full, p.mrn, plans[i].label)) != 0) {
            free(plans);
            cJSON_Delete(root);
            return cli_fail(env, rc);
        }
        if (env->json) {
            cJSON *o = cJSON_CreateObject(), *fa;
            cJSON_AddStringToObject(o, "label", full.label);
            cJSON_AddStringToObject(o, "site", full.site);
            cJSON_AddStringToObject(o, "technique", full.technique);
            cJSON_AddNumberToObject(o, "fractions", full.fractions);
            cJSON_AddNumberToObject(o, "fractions_logged", full.fractions_logged);
            cli_json_put_text(o, "replaces", full.replaces_label);
            cli_json_put_text(o, "replaced_by", full.replaced_by_label);
            fa = cJSON_AddArrayToObject(o, "fields");
            for (k = 0; k < full.n_fields; k++)
                cJSON_AddItemToArray(fa, field_summary_json(&full.fields[k]));
            cJSON_AddItemToArray(arr, o);
        } else {
            static const char *const head[] = {"field", "point", "beam", "MU", "expected",
                                               "measure", NULL};
            cli_table tab;
            char line[600];
            snprintf(line, sizeof line, "plan %s: %s, %s, %d fraction%s, %d logged%s%s%s%s", full.label,
                     full.site, full.technique, full.fractions, full.fractions == 1 ? "" : "s",
                     full.fractions_logged, full.replaces_label[0] ? "; replaces " : "",
                     full.replaces_label, full.replaced_by_label[0] ? "; REPLACED by " : "",
                     full.replaced_by_label);
            printf("\n");
            cli_wrap(stdout, "  ", line, CLI_WIDTH);
            /* 80 columns: the fields as a fitted table */
            cli_table_init(&tab, head);
            tab.right[3] = tab.right[4] = 1;
            for (k = 0; k < full.n_fields; k++) {
                const fxl_field *f = &full.fields[k];
                char expected[32], beam[140], mu[32];
                const char *cells[6];
                if (isnan(f->expected_dose_cgy))
                    snprintf(expected, sizeof expected, "(none)");
                else
                    snprintf(expected, sizeof expected, "%.1f cGy", f->expected_dose_cgy);
                snprintf(beam, sizeof beam, "%s/%s", f->machine, f->beam);
                snprintf(mu, sizeof mu, "%.1f", f->mu);
                cells[0] = f->name;
                cells[1] = f->point;
                cells[2] = beam;
                cells[3] = mu;
                cells[4] = expected;
                cells[5] = f->policy;
                cli_table_add(&tab, cells);
            }
            cli_table_print(stdout, &tab, CLI_WIDTH, 4);
            cli_table_release(&tab);
        }
        fxl_plan_release(&full);
    }
    free(plans);
    if (env->json)
        return cli_print_json(root);
    return CLI_EXIT_OK;
}

static int patient_correct(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"mrn", "MRN", "the corrected MRN", NULL},
        {"family", "NAME", "the corrected family name", NULL},
        {"given", "NAME", "the corrected given name(s) ('' clears)", NULL},
        {"birth-date", "DATE", "the corrected date of birth, YYYY-MM-DD ('' clears)", NULL},
        {"reason", "TEXT", "why (required): kept with the old value", NULL},
        {NULL, NULL, NULL, NULL}};
    const char *pos[1];
    fxl_patient_correction c;
    fxl_patient p;
    int npos, rc;

    rc = cli_parse(env, "patient correct MRN [--mrn MRN] [--family NAME] [--given NAME] "
                   "[--birth-date DATE] --reason TEXT",
                   "Corrects a mistyped MRN, name or date of birth (physicist or admin). The old\n"
                   "value is kept in the patient's history ('fxledger patient history MRN') and\n"
                   "in the audit trail with the reason; nothing is edited without a trace.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("patient correct needs the MRN (see 'fxledger patient correct --help')");
        return CLI_EXIT_USAGE;
    }
    if (!cli_get(opts, "reason")) {
        cli_error("--reason is required (why the value is corrected, 1 to %d characters)",
                  FXL_PATIENT_REASON_MAX);
        return CLI_EXIT_USAGE;
    }
    memset(&c, 0, sizeof c);
    c.mrn = cli_get(opts, "mrn");
    c.family_name = cli_get(opts, "family");
    c.given_name = cli_get(opts, "given");
    c.birth_date = cli_get(opts, "birth-date");
    c.reason = cli_get(opts, "reason");
    if ((rc = fxl_patient_correct(env->ctx, pos[0], &c)) != 0 ||
        (rc = fxl_patient_get(env->ctx, &p, c.mrn ? c.mrn : pos[0])) != 0)
        return cli_fail(env, rc);
    if (env->json)
        return cli_print_json(patient_json(&p));
    printf("corrected patient %s: %s%s%s%s%s (the old values stay in 'fxledger patient history %s')\n",
           p.mrn, p.family_name, p.given_name[0] ? ", " : "", p.given_name,
           p.birth_date[0] ? ", born " : "", p.birth_date, p.mrn);
    return CLI_EXIT_OK;
}

static int patient_history(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    fxl_patient_change *list = NULL;
    size_t n = 0, i;
    int npos, rc;

    rc = cli_parse(env, "patient history MRN",
                   "Lists the corrections of a patient's MRN, name and date of birth, oldest\n"
                   "first, with the old and new value, the reason, who and when. An MRN the\n"
                   "patient had before a correction finds the patient too.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("patient history needs the MRN (see 'fxledger patient history --help')");
        return CLI_EXIT_USAGE;
    }
    if ((rc = fxl_patient_history(env->ctx, &list, &n, pos[0])) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *arr = cJSON_CreateArray();
        for (i = 0; i < n; i++) {
            cJSON *o = cJSON_CreateObject();
            cJSON_AddNumberToObject(o, "id", (double)list[i].id);
            cJSON_AddStringToObject(o, "item", list[i].item);
            cli_json_put_text(o, "old_value", list[i].old_value);
            cli_json_put_text(o, "new_value", list[i].new_value);
            cJSON_AddStringToObject(o, "reason", list[i].reason);
            cJSON_AddStringToObject(o, "user", list[i].user);
            cJSON_AddStringToObject(o, "at", list[i].at);
            cJSON_AddItemToArray(arr, o);
        }
        free(list);
        return cli_print_json(arr);
    }
    if (n == 0)
        printf("no corrections of patient %s\n", pos[0]);
    for (i = 0; i < n; i++) {
        char when[48], line[1200];
        fxl_time_show_local(env->ctx, when, sizeof when, list[i].at);
        snprintf(line, sizeof line, "%s: '%s' -> '%s' by %s on %s; reason: %s", list[i].item,
                 list[i].old_value, list[i].new_value, list[i].user, when, list[i].reason);
        cli_wrap_hang(stdout, "", 4, line, CLI_WIDTH);
    }
    free(list);
    return CLI_EXIT_OK;
}

static const cli_sub subs[] = {
    {"add", patient_add, "add a patient by MRN (therapist, physicist or admin)"},
    {"list", patient_list, "list patients with their numbers of plans and fractions"},
    {"show", patient_show, "show a patient with plans, fields and fractions logged"},
    {"correct", patient_correct, "correct a mistyped MRN, name or birth date (physicist or admin)"},
    {"history", patient_history, "list the corrections of a patient's identity"},
    {NULL, NULL, NULL}};

int cmd_patient(cli_env *env, int argc, char **argv)
{
    return cli_dispatch_sub(env, subs, "Patients: add, list, show, correct and their history.", argc, argv);
}
