/* fxledger plan import-dicom: a DICOM RT Plan, as a Part 10 file or in the
 * DICOM JSON Model (PS3.18 Annex F), turned into an fxledger plan. The reader
 * refuses anything unsupported; here each DICOM beam is mapped onto a beam of
 * the named machine by modality and energy (or as --beam-map chooses among
 * several), the patient must already exist under the plan's Patient ID with
 * the same name (fxl/names.h), and every beam becomes a field with
 * an entrance point (and, when asked, an exit point) whose expected dose is
 * the independent model's, computed at import. All or nothing: one store
 * transaction. docs/dicom-import.md. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli/cli.h"
#include "cli/session.h"
#include "cli/plan_view.h"
#include "fxl/dicom_plan.h"
#include "fxl/machines.h"
#include "fxl/names.h"
#include "fxl/patients.h"
#include "fxl/plans.h"

/* One "--exit BEAM=CM" entry. */
typedef struct exit_req {
    char beam[65];
    double thickness_cm;
    int used;
} exit_req;

/* Parses "AP=21.5,PA=21" into reqs; prints the error and returns -1. */
static int parse_exits(exit_req *reqs, size_t *n, size_t max, const char *text)
{
    const char *p = text;

    *n = 0;
    while (p && *p) {
        const char *end = strchr(p, ','), *eq;
        char item[128], num[64];
        size_t len = end ? (size_t)(end - p) : strlen(p);
        double t;

        if (len == 0 || len >= sizeof item) {
            cli_error("--exit '%s' must be BEAM=CM[,BEAM=CM...] (beam name = patient thickness in cm)", text);
            return -1;
        }
        memcpy(item, p, len);
        item[len] = '\0';
        eq = strrchr(item, '=');
        if (!eq || eq == item || (size_t)(eq - item) >= sizeof reqs->beam || !eq[1]) {
            cli_error("--exit entry '%s' must be BEAM=CM (beam name = patient thickness in cm)", item);
            return -1;
        }
        if (*n >= max) {
            cli_error("--exit lists more than %zu beams", max);
            return -1;
        }
        snprintf(num, sizeof num, "%s", eq + 1);
        if (cli_double(&t, num, "exit thickness", 0.1, FXL_FIELD_THICKNESS_CM_MAX, "cm") != 0)
            return -1;
        memcpy(reqs[*n].beam, item, (size_t)(eq - item));
        reqs[*n].beam[eq - item] = '\0';
        reqs[*n].thickness_cm = t;
        reqs[*n].used = 0;
        (*n)++;
        p = end ? end + 1 : NULL;
    }
    return 0;
}

static int one_of(const char *v, const char *const *list)
{
    for (; *list; list++)
        if (strcmp(v, *list) == 0)
            return 1;
    return 0;
}

/* One "--beam-map PLANBEAM=MACHINEBEAM" entry. */
typedef struct beam_req {
    char plan_beam[65];
    char machine_beam[65];
    int used;
} beam_req;

/* Parses "AP=6X,LAT=6FFF" into reqs; prints the error and returns -1. */
static int parse_beam_map(beam_req *reqs, size_t *n, size_t max, const char *text)
{
    const char *p = text;
    size_t k;

    *n = 0;
    while (p && *p) {
        const char *end = strchr(p, ','), *eq;
        size_t len = end ? (size_t)(end - p) : strlen(p);
        char item[160];

        if (len == 0 || len >= sizeof item) {
            cli_error("--beam-map '%s' must be PLANBEAM=MACHINEBEAM[,...] (a beam name of the plan = a beam "
                      "of the machine)", text);
            return -1;
        }
        memcpy(item, p, len);
        item[len] = '\0';
        eq = strchr(item, '=');
        if (!eq || eq == item || (size_t)(eq - item) >= sizeof reqs->plan_beam || !eq[1] ||
            strlen(eq + 1) >= sizeof reqs->machine_beam) {
            cli_error("--beam-map entry '%s' must be PLANBEAM=MACHINEBEAM (a beam name of the plan = a beam "
                      "of the machine)", item);
            return -1;
        }
        if (*n >= max) {
            cli_error("--beam-map lists more than %zu beams", max);
            return -1;
        }
        memcpy(reqs[*n].plan_beam, item, (size_t)(eq - item));
        reqs[*n].plan_beam[eq - item] = '\0';
        snprintf(reqs[*n].machine_beam, sizeof reqs[*n].machine_beam, "%s", eq + 1);
        reqs[*n].used = 0;
        for (k = 0; k < *n; k++)
            if (strcmp(reqs[k].plan_beam, reqs[*n].plan_beam) == 0) {
                cli_error("--beam-map names plan beam '%s' twice", reqs[*n].plan_beam);
                return -1;
            }
        (*n)++;
        p = end ? end + 1 : NULL;
    }
    return 0;
}

static const char *energy_unit(const char *modality)
{
    return strcmp(modality, "photon") == 0 ? "MV" : "MeV";
}

static int same_kind(const fxl_beam *b, const fxl_dicom_beam *db)
{
    return strcmp(b->modality, db->modality) == 0 && fabs(b->energy - db->energy) <= 1e-6;
}

/* The beam of `m` that a DICOM beam maps onto: the machine's one beam of the
 * same modality and nominal energy, or, where the physicist chose with
 * --beam-map, the beam named there, which must be of that modality and
 * energy too. None, several without a choice, or a choice that does not fit
 * is an error naming the DICOM beam and the candidates. */
static const fxl_beam *map_beam(const fxl_machine *m, const fxl_dicom_beam *db, beam_req *maps, size_t n_maps)
{
    const fxl_beam *found = NULL;
    beam_req *req = NULL;
    char names[256] = "";
    size_t i;
    int count = 0;

    for (i = 0; i < n_maps; i++)
        if (strcmp(maps[i].plan_beam, db->name) == 0)
            req = &maps[i];
    for (i = 0; i < m->n_beams; i++) {
        const fxl_beam *b = &m->beams[i];
        if (!same_kind(b, db))
            continue;
        count++;
        found = b;
        snprintf(names + strlen(names), sizeof names - strlen(names), "%s%s", count > 1 ? ", " : "", b->name);
    }
    if (req) {
        req->used = 1;
        for (i = 0; i < m->n_beams; i++)
            if (strcmp(m->beams[i].name, req->machine_beam) == 0)
                break;
        if (i == m->n_beams) {
            cli_error("--beam-map maps beam '%s' onto '%s', but machine '%s' has no beam '%s' (see 'fxledger "
                      "machine list'); nothing imported",
                      db->name, req->machine_beam, m->name, req->machine_beam);
            return NULL;
        }
        if (!same_kind(&m->beams[i], db)) {
            cli_error("--beam-map maps beam '%s' (number %d, %s %g %s) onto '%s', which is %s %g %s: a plan beam "
                      "maps only onto a beam of its modality and energy (candidates: %s); nothing imported",
                      db->name, db->number, db->modality, db->energy, energy_unit(db->modality),
                      m->beams[i].name, m->beams[i].modality, m->beams[i].energy,
                      energy_unit(m->beams[i].modality), count ? names : "none");
            return NULL;
        }
        return &m->beams[i];
    }
    if (count == 1)
        return found;
    if (count == 0)
        cli_error("beam '%s' (number %d) is %s %g %s, but machine '%s' has no such beam (see 'fxledger "
                  "machine list'); nothing imported",
                  db->name, db->number, db->modality, db->energy, energy_unit(db->modality), m->name);
    else
        cli_error("beam '%s' (number %d) is %s %g %s, and machine '%s' has several such beams (%s): the "
                  "import cannot tell which; choose one with --beam-map '%s=BEAM'; nothing imported",
                  db->name, db->number, db->modality, db->energy, energy_unit(db->modality), m->name, names,
                  db->name);
    return NULL;
}

/* A plan for another person with a recycled or mistyped ID must not land on
 * this patient. Names are compared in their folded forms (fxl/names.h): the
 * family name always, the given name where both have one. Prints the error
 * with both forms and returns CLI_EXIT_DATA, or 0. */
static int check_patient_name(const fxl_dicom_plan *dp, const fxl_patient *pt)
{
    char pf[FXL_NAME_KEY_MAX], pg[FXL_NAME_KEY_MAX], sf[FXL_NAME_KEY_MAX], sg[FXL_NAME_KEY_MAX];
    int bad = fxl_name_key(pf, sizeof pf, dp->family_name) != 0 || fxl_name_key(pg, sizeof pg, dp->given_name) != 0 ||
              fxl_name_key(sf, sizeof sf, pt->family_name) != 0 || fxl_name_key(sg, sizeof sg, pt->given_name) != 0;

    if (!bad && !pf[0]) {
        cli_error("the plan's Patient's Name (0010,0010) '%s' has no family name, so it cannot be checked "
                  "against patient '%s' (%s%s%s); nothing imported",
                  dp->patient_name, pt->mrn, pt->family_name, pt->given_name[0] ? ", " : "", pt->given_name);
        return CLI_EXIT_DATA;
    }
    if (!bad && strcmp(pf, sf) == 0 && (!pg[0] || !sg[0] || strcmp(pg, sg) == 0))
        return 0;
    cli_error("patient name in the plan '%s' does not match patient '%s' (%s%s%s): compared as '%s' / '%s' and "
              "'%s' / '%s' (Unicode NFC, case folded, spaces collapsed); nothing imported",
              dp->patient_name, pt->mrn, pt->family_name, pt->given_name[0] ? ", " : "", pt->given_name, pf, pg,
              sf, sg);
    return CLI_EXIT_DATA;
}

/* Fills the plan spec from the DICOM plan; prints the error and returns an
 * exit code, or 0. */
static int build_spec(cli_env *env, fxl_plan_spec *spec, const fxl_dicom_plan *dp, const fxl_machine *m,
                      const char *file, const char *site, const char *technique, const char *setup,
                      const char *policy, const char *replaces, exit_req *exits, size_t n_exits,
                      beam_req *maps, size_t n_maps)
{
    size_t i, k;

    (void)env;
    memset(spec, 0, sizeof *spec);
    snprintf(spec->mrn, sizeof spec->mrn, "%s", dp->patient_id);
    snprintf(spec->label, sizeof spec->label, "%s", dp->label);
    snprintf(spec->site, sizeof spec->site, "%s", site);
    snprintf(spec->technique, sizeof spec->technique, "%s", technique);
    spec->fractions = dp->fractions;
    spec->dose_per_fraction_cgy = dp->dose_per_fraction_cgy;
    snprintf(spec->replaces, sizeof spec->replaces, "%s", replaces ? replaces : "");
    snprintf(spec->origin, sizeof spec->origin, "dicom");
    snprintf(spec->origin_note, sizeof spec->origin_note, "file '%.120s'%s%.64s", file,
             dp->sop_instance_uid[0] ? ", SOP Instance UID " : "", dp->sop_instance_uid);
    if (dp->n_beams == 0) {
        cli_error("file '%s' holds no treatment beam; nothing imported", file);
        return CLI_EXIT_DATA;
    }
    if (!(spec->fields = calloc(dp->n_beams, sizeof *spec->fields))) {
        cli_error("out of memory importing '%s'", file);
        return CLI_EXIT_DB;
    }
    spec->n_fields = dp->n_beams;
    for (i = 0; i < dp->n_beams; i++) {
        const fxl_dicom_beam *db = &dp->beams[i];
        fxl_field_spec *f = &spec->fields[i];
        const fxl_beam *b = map_beam(m, db, maps, n_maps);

        if (!b)
            return CLI_EXIT_DATA;
        snprintf(f->name, sizeof f->name, "%s", db->name);
        snprintf(f->machine, sizeof f->machine, "%s", m->name);
        snprintf(f->beam, sizeof f->beam, "%s", b->name);
        snprintf(f->setup, sizeof f->setup, "%s", setup);
        snprintf(f->policy, sizeof f->policy, "%s", policy);
        f->mu = db->mu;
        f->ssd_cm = db->ssd_cm;
        f->x_cm = db->jaw_x_cm;
        f->y_cm = db->jaw_y_cm;
        /* The MLC-shaped field sets the phantom scatter (docs/dicom-import.md). */
        f->shaped_eqsq_cm = db->mlc ? db->field_eqsq_cm : 0;
        f->wedge_deg = db->wedge_deg;
        f->tray = db->tray;
        f->gantry_deg = db->gantry_deg;
        f->incidence_deg = 0;   /* detector on the central axis facing the source */
        f->n_points = 1;
        snprintf(f->points[0].point, sizeof f->points[0].point, "entrance");
        snprintf(f->points[0].expected_source, sizeof f->points[0].expected_source, "model");
        f->points[0].expected_dose_cgy = NAN;
        f->points[0].thickness_cm = NAN;
        for (k = 0; k < n_exits; k++) {
            if (strcmp(exits[k].beam, db->name) != 0)
                continue;
            exits[k].used = 1;
            f->n_points = 2;
            snprintf(f->points[1].point, sizeof f->points[1].point, "exit");
            snprintf(f->points[1].expected_source, sizeof f->points[1].expected_source, "model");
            f->points[1].expected_dose_cgy = NAN;
            f->points[1].thickness_cm = exits[k].thickness_cm;
        }
    }
    for (k = 0; k < n_maps; k++)
        if (!maps[k].used) {
            cli_error("--beam-map names beam '%s', which is not a treatment beam of the plan; nothing imported",
                      maps[k].plan_beam);
            return CLI_EXIT_DATA;
        }
    for (k = 0; k < n_exits; k++)
        if (!exits[k].used) {
            cli_error("--exit names beam '%s', which is not a treatment beam of the plan; nothing imported",
                      exits[k].beam);
            return CLI_EXIT_DATA;
        }
    return 0;
}

int cli_plan_import_dicom(cli_env *env, int argc, char **argv)
{
    static const char *const setups[] = {"isocentric", "ssd", NULL};
    static const char *const policies[] = {"first", "weekly", "every", "none", NULL};
    cli_opt opts[] = {
        {"machine", "NAME", "the machine the plan is treated on (required)", NULL},
        {"site", "SITE", "treatment site, as the levels are scoped (required)", NULL},
        {"technique", "T", "technique, as the levels are scoped (required)", NULL},
        {"setup", "KIND", "isocentric (default) or ssd, for every field", NULL},
        {"exit", "BEAM=CM,...", "also measure these beams at exit, with the patient thickness in cm", NULL},
        {"beam-map", "PLANBEAM=BEAM,...", "the machine beam for these plan beams, where several match", NULL},
        {"policy", "P", "when to measure: first (default), weekly, every, none", NULL},
        {"replaces", "LABEL", "label of the patient's plan this one replaces (a plan change)", NULL},
        {NULL, NULL, NULL, NULL}};
    const char *pos[1], *machine, *site, *technique, *setup, *policy, *replaces;
    fxl_dicom_plan dp;
    fxl_plan_spec spec;
    fxl_patient patient;
    fxl_machine *machines = NULL;
    const fxl_machine *m = NULL;
    fxl_plan plan;
    exit_req exits[FXL_DICOM_BEAMS_MAX];
    beam_req maps[FXL_DICOM_BEAMS_MAX];
    size_t n_machines = 0, n_exits = 0, n_maps = 0, i;
    int npos, rc, code = CLI_EXIT_OK;

    memset(&dp, 0, sizeof dp);
    memset(&spec, 0, sizeof spec);
    memset(&plan, 0, sizeof plan);
    rc = cli_parse(env,
                   "plan import-dicom FILE --machine NAME --site SITE --technique T "
                   "[--setup isocentric|ssd] [--exit BEAM=CM,...] [--beam-map PLANBEAM=BEAM,...] [--policy P] "
                   "[--replaces LABEL]",
                   "Imports a DICOM RT Plan: a DICOM Part 10 file (.dcm, as planning systems export\n"
                   "it; implicit, explicit or deflated little endian) or the DICOM JSON Model\n"
                   "(PS3.18 Annex F) as pydicom's to_json_dict() or dcmtk's dcm2json write it\n"
                   "(docs/dicom-import.md).\n"
                   "Arcs, modulated beams, protons, ions and other unsupported plans are refused\n"
                   "with a message naming what; nothing is written then. The patient must already\n"
                   "exist with the plan's Patient ID as MRN and the same name. Each treatment beam\n"
                   "is mapped onto the machine's beam of the same modality and energy (where several\n"
                   "match, --beam-map AP=6X,LAT=6FFF says which) and becomes\n"
                   "a field measured at entrance (and at exit for --exit), whose expected dose is\n"
                   "the independent model's (beam data loaded with 'fxledger machine beamdata').\n"
                   "A point the model cannot compute is imported without an expected dose and its\n"
                   "results are not evaluable. Physicists and admins only.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("plan import-dicom needs the plan FILE (see 'fxledger plan import-dicom --help')");
        return CLI_EXIT_USAGE;
    }
    machine = cli_get(opts, "machine");
    site = cli_get(opts, "site");
    technique = cli_get(opts, "technique");
    setup = cli_get(opts, "setup") ? cli_get(opts, "setup") : "isocentric";
    policy = cli_get(opts, "policy") ? cli_get(opts, "policy") : "first";
    replaces = cli_get(opts, "replaces");
    if (!machine || !*machine) {
        cli_error("--machine NAME is required: the machine the plan is treated on (see 'fxledger machine list')");
        return CLI_EXIT_USAGE;
    }
    /* The levels are scoped by site and technique: a guessed default would
     * silently pick the wrong ones. */
    if (!site || !*site || strlen(site) > 64) {
        cli_error("--site '%s' is required: 1 to 64 characters (the RT Plan does not say)", site ? site : "");
        return CLI_EXIT_USAGE;
    }
    if (!technique || !*technique || strlen(technique) > 32) {
        cli_error("--technique '%s' is required: 1 to 32 characters (the RT Plan does not say)",
                  technique ? technique : "");
        return CLI_EXIT_USAGE;
    }
    if (!one_of(setup, setups)) {
        cli_error("--setup '%s' must be isocentric or ssd", setup);
        return CLI_EXIT_USAGE;
    }
    if (!one_of(policy, policies)) {
        cli_error("--policy '%s' must be first, weekly, every or none", policy);
        return CLI_EXIT_USAGE;
    }
    if (replaces && (!*replaces || strlen(replaces) > 64)) {
        cli_error("--replaces '%s' must be a plan label of 1 to 64 characters", replaces);
        return CLI_EXIT_USAGE;
    }
    if (cli_get(opts, "exit") &&
        parse_exits(exits, &n_exits, FXL_DICOM_BEAMS_MAX, cli_get(opts, "exit")) != 0)
        return CLI_EXIT_USAGE;
    if (cli_get(opts, "beam-map") &&
        parse_beam_map(maps, &n_maps, FXL_DICOM_BEAMS_MAX, cli_get(opts, "beam-map")) != 0)
        return CLI_EXIT_USAGE;
    if ((rc = fxl_require_role(env->ctx, FXL_ROLES_PHYSICS, "importing a plan")) != 0)
        return cli_fail(env, rc);

    if ((rc = fxl_dicom_plan_read(env->ctx, &dp, pos[0])) != 0) {
        code = cli_fail(env, rc);
        goto cleanup;
    }
    if ((rc = fxl_patient_get(env->ctx, &patient, dp.patient_id)) != 0) {
        if (rc == FXL_ENOTFOUND)
            cli_error("patient '%s' (the plan's Patient ID) is not known: add the patient first with "
                      "'fxledger patient add %s --family NAME'; nothing imported",
                      dp.patient_id, dp.patient_id);
        else
            cli_error("%s", fxl_errmsg(env->ctx));
        code = cli_exit_code(rc);
        goto cleanup;
    }
    if ((code = check_patient_name(&dp, &patient)) != 0)
        goto cleanup;
    if ((rc = fxl_machine_list(env->ctx, &machines, &n_machines)) != 0) {
        code = cli_fail(env, rc);
        goto cleanup;
    }
    for (i = 0; i < n_machines; i++)
        if (strcmp(machines[i].name, machine) == 0)
            m = &machines[i];
    if (!m) {
        cli_error("unknown machine '%s' (see 'fxledger machine list'); nothing imported", machine);
        code = CLI_EXIT_DATA;
        goto cleanup;
    }
    if ((code = build_spec(env, &spec, &dp, m, pos[0], site, technique, setup, policy, replaces, exits,
                           n_exits, maps, n_maps)) != 0)
        goto cleanup;
    if ((code = cli_sign_begin(env, spec.replaces[0] ? "plan replaced" : "plan imported")) != 0)
        goto cleanup;
    if ((rc = fxl_plan_import(env->ctx, NULL, &spec)) != 0 ||
        (rc = fxl_plan_get(env->ctx, &plan, spec.mrn, spec.label)) != 0) {
        code = cli_fail(env, rc);
        goto cleanup;
    }
    if (env->json) {
        cJSON *o = cli_plan_with_fields_json(&plan), *notes = cJSON_AddArrayToObject(o, "notes");
        int j;
        for (j = 0; j < dp.notes.n && j < FXL_REASONS_MAX; j++)
            cJSON_AddItemToArray(notes, cJSON_CreateString(dp.notes.text[j]));
        code = cli_print_json(o);
        goto cleanup;
    }
    printf("imported DICOM plan %s for patient %s (%s%s%s) on %s: %zu beam%s, %zu measured point%s%s%s\n",
           plan.label, plan.mrn, patient.family_name, patient.given_name[0] ? ", " : "",
           patient.given_name, m->name, dp.n_beams, dp.n_beams == 1 ? "" : "s",
           plan.n_fields, plan.n_fields == 1 ? "" : "s", plan.replaces_label[0] ? "; replaces plan " : "",
           plan.replaces_label);
    for (i = 0; i < dp.n_beams; i++)
        if (dp.beams[i].machine[0] && strcmp(dp.beams[i].machine, m->name) != 0) {
            printf("  note: the plan names treatment machine '%s'; imported on '%s' as asked\n",
                   dp.beams[i].machine, m->name);
            break;
        }
    for (i = 0; i < (size_t)dp.notes.n && i < FXL_REASONS_MAX; i++)
        printf("  note: %s\n", dp.notes.text[i]);
    cli_plan_print_import(&plan);
cleanup:
    fxl_plan_release(&plan);
    fxl_plan_spec_release(&spec);
    fxl_dicom_plan_release(&dp);
    fxl_machine_list_free(machines, n_machines);
    return code;
}
