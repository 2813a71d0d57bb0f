/* fxledger machine: add treatment machines, add their beams, load the beam
 * data of the independent model, list and show them. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "cli/cli.h"
#include "cli/table.h"
#include "cli/session.h"
#include "cli/json_put.h"
#include "fxl/beam_data.h"
#include "fxl/machines.h"

static int machine_add(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"sad", "CM", "source-axis distance (default 100 cm)", NULL},
        {NULL, NULL, NULL, NULL}};
    const char *pos[1];
    double sad = 100;
    int64_t id = 0;
    int npos, rc;

    rc = cli_parse(env, "machine add NAME [--sad CM]",
                   "Adds a treatment machine (physicist or admin). Add its beams with\n"
                   "'fxledger machine beam'.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("machine add needs a NAME (see 'fxledger machine add --help')");
        return CLI_EXIT_USAGE;
    }
    if (cli_get(opts, "sad") &&
        cli_double(&sad, cli_get(opts, "sad"), "SAD", FXL_SAD_CM_MIN, FXL_SAD_CM_MAX, "cm") != 0)
        return CLI_EXIT_DATA;
    if ((rc = fxl_machine_add(env->ctx, &id, pos[0], sad)) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddNumberToObject(o, "id", (double)id);
        cJSON_AddStringToObject(o, "name", pos[0]);
        cJSON_AddNumberToObject(o, "sad_cm", sad);
        return cli_print_json(o);
    }
    printf("added machine '%s' (SAD %g cm)\n", pos[0], sad);
    return CLI_EXIT_OK;
}

static int machine_beam(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"machine", "NAME", "the machine (required)", NULL},
        {"modality", "KIND", "photon or electron (required)", NULL},
        {"energy", "E", "nominal energy, MV for photons, MeV for electrons (required)", NULL},
        {"dmax", "CM", "depth of maximum dose, cm (e.g. 1.5 for 6 MV)", NULL},
        {"dose-per-mu", "CGY", "reference dose per MU at the normalisation point, cGy/MU (e.g. 1.0)", NULL},
        {"norm-distance", "CM", "normalisation distance SSD0 + d0, cm (e.g. 101.5; 100 if isocentric)", NULL},
        {NULL, NULL, NULL, NULL}};
    const char *pos[1];
    fxl_beam_spec b;
    int64_t id = 0;
    int npos, rc;

    rc = cli_parse(env,
                   "machine beam NAME --machine M --modality photon|electron --energy E "
                   "[--dmax CM] [--dose-per-mu CGY] [--norm-distance CM]",
                   "Adds a beam NAME (e.g. 6X, 9E) to a machine (physicist or admin). d_max, dose\n"
                   "per MU and normalisation distance feed the independent expected-dose model;\n"
                   "a beam without them cannot be used by that model.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("machine beam needs a beam NAME (see 'fxledger machine beam --help')");
        return CLI_EXIT_USAGE;
    }
    memset(&b, 0, sizeof b);
    b.name = pos[0];
    b.machine = cli_get(opts, "machine");
    b.modality = cli_get(opts, "modality");
    b.dmax_cm = b.ref_dose_cgy_per_mu = b.norm_distance_cm = NAN;
    if (!b.machine || !*b.machine) {
        cli_error("--machine is required (see 'fxledger machine list')");
        return CLI_EXIT_USAGE;
    }
    if (!b.modality || (strcmp(b.modality, "photon") != 0 && strcmp(b.modality, "electron") != 0)) {
        cli_error("modality '%s' must be photon or electron", b.modality ? b.modality : "");
        return CLI_EXIT_DATA;
    }
    if (cli_double(&b.energy, cli_get(opts, "energy"), "energy", FXL_ENERGY_MIN, FXL_ENERGY_MAX,
                   strcmp(b.modality, "photon") == 0 ? "MV" : "MeV") != 0)
        return CLI_EXIT_DATA;
    if (cli_get(opts, "dmax") &&
        cli_double(&b.dmax_cm, cli_get(opts, "dmax"), "d_max", FXL_DMAX_CM_MIN, FXL_DMAX_CM_MAX, "cm") != 0)
        return CLI_EXIT_DATA;
    if (cli_get(opts, "dose-per-mu") &&
        cli_double(&b.ref_dose_cgy_per_mu, cli_get(opts, "dose-per-mu"), "dose per MU",
                   FXL_DOSE_PER_MU_MIN, FXL_DOSE_PER_MU_MAX, "cGy/MU") != 0)
        return CLI_EXIT_DATA;
    if (cli_get(opts, "norm-distance") &&
        cli_double(&b.norm_distance_cm, cli_get(opts, "norm-distance"), "normalisation distance",
                   FXL_NORM_DISTANCE_CM_MIN, FXL_NORM_DISTANCE_CM_MAX, "cm") != 0)
        return CLI_EXIT_DATA;
    if ((rc = fxl_beam_add(env->ctx, &id, &b)) != 0)
        return cli_fail(env, rc);
    if (env->json) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddNumberToObject(o, "id", (double)id);
        cJSON_AddStringToObject(o, "machine", b.machine);
        cJSON_AddStringToObject(o, "name", b.name);
        cJSON_AddStringToObject(o, "modality", b.modality);
        cJSON_AddNumberToObject(o, "energy", b.energy);
        cli_json_put_number(o, "dmax_cm", b.dmax_cm);
        cli_json_put_number(o, "ref_dose_cgy_per_mu", b.ref_dose_cgy_per_mu);
        cli_json_put_number(o, "norm_distance_cm", b.norm_distance_cm);
        return cli_print_json(o);
    }
    printf("added beam '%s' to machine '%s': %s %g %s\n", b.name, b.machine, b.modality, b.energy,
           strcmp(b.modality, "photon") == 0 ? "MV" : "MeV");
    return CLI_EXIT_OK;
}

static cJSON *beam_data_json(const fxl_beam_data_info *d)
{
    cJSON *o = cJSON_CreateObject();

    cJSON_AddNumberToObject(o, "id", (double)d->id);
    cJSON_AddStringToObject(o, "machine", d->machine);
    cJSON_AddStringToObject(o, "beam", d->beam);
    cJSON_AddStringToObject(o, "effective_from", d->effective_from);
    cJSON_AddBoolToObject(o, "in_force", d->in_force);
    cJSON_AddStringToObject(o, "sha256", d->sha256);
    cli_json_put_text(o, "source", d->source);
    cJSON_AddStringToObject(o, "loaded_by", d->loaded_by);
    cJSON_AddStringToObject(o, "loaded_at", d->created_at);
    return o;
}

static int machine_beamdata(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"effective", "DATE", "in force from this date, YYYY-MM-DD or a UTC time (default: now)", NULL},
        {NULL, NULL, NULL, NULL}};
    const char *pos[1];
    fxl_beam_data_info d;
    int npos, rc;

    rc = cli_parse(env, "machine beamdata FILE [--effective DATE]",
                   "Loads the beam data of the independent expected-dose model for one photon beam\n"
                   "from a file in fxledger's beam-data format (docs/format-beam-data.md): output\n"
                   "factors, wedge and tray factors, TMR or PDD tables. The machine and beam the\n"
                   "file names must exist and agree with it. Each load is a new version in force\n"
                   "from its effective date; earlier versions are kept, and every field keeps the\n"
                   "version it was checked with at plan import. Physicists and admins only.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("machine beamdata needs the beam data FILE (see 'fxledger machine beamdata --help')");
        return CLI_EXIT_USAGE;
    }
    if ((rc = cli_sign_begin(env, "beam data loaded")) != 0)
        return rc;
    if ((rc = fxl_beam_data_load(env->ctx, &d, pos[0], cli_get(opts, "effective"))) != 0)
        return cli_fail(env, rc);
    if (env->json)
        return cli_print_json(beam_data_json(&d));
    printf("loaded beam data #%lld for beam '%s' of machine '%s' (%g MV), effective from %s%s\n",
           (long long)d.id, d.beam, d.machine, d.energy, d.effective_from,
           d.in_force ? "" : " (not yet in force)");
    printf("  sha256 %s\n", d.sha256);
    if (d.source[0])
        cli_wrap_hang(stdout, "  source: ", 4, d.source, CLI_WIDTH);
    cli_wrap_hang(stdout, "  ", 4, "plans imported from now on get the model's expected dose and "
                  "cross-check for this beam", CLI_WIDTH);
    return CLI_EXIT_OK;
}

/* The version in force for a beam (NULL if none) and how many versions exist. */
static const fxl_beam_data_info *in_force(const fxl_beam_data_info *list, size_t n, int64_t beam_id,
                                          int *versions)
{
    const fxl_beam_data_info *found = NULL;
    size_t i;

    *versions = 0;
    for (i = 0; i < n; i++) {
        if (list[i].beam_id != beam_id)
            continue;
        (*versions)++;
        if (list[i].in_force)
            found = &list[i];
    }
    return found;
}

static void print_opt(const char *label, double v, const char *fmt_unit)
{
    if (isnan(v))
        printf("  %s -", label);
    else
        printf("  %s %g %s", label, v, fmt_unit);
}

static int machine_list(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    fxl_machine *list = NULL;
    fxl_beam_data_info *data = NULL;
    size_t n = 0, n_data = 0, i, j;
    int npos, rc, versions;

    rc = cli_parse(env, "machine list",
                   "Lists the treatment machines and their beams, with the beam data of the\n"
                   "independent model in force for each beam (or none).",
                   opts, argc, argv, pos, 0, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if ((rc = fxl_machine_list(env->ctx, &list, &n)) != 0)
        return cli_fail(env, rc);
    if ((rc = fxl_beam_data_list(env->ctx, &data, &n_data, NULL)) != 0) {
        fxl_machine_list_free(list, n);
        return cli_fail(env, rc);
    }
    if (env->json) {
        cJSON *arr = cJSON_CreateArray();
        for (i = 0; i < n; i++) {
            cJSON *m = cJSON_CreateObject(), *beams;
            cJSON_AddNumberToObject(m, "id", (double)list[i].id);
            cJSON_AddStringToObject(m, "name", list[i].name);
            cJSON_AddNumberToObject(m, "sad_cm", list[i].sad_cm);
            cJSON_AddStringToObject(m, "created_at", list[i].created_at);
            beams = cJSON_AddArrayToObject(m, "beams");
            for (j = 0; j < list[i].n_beams; j++) {
                const fxl_beam *b = &list[i].beams[j];
                const fxl_beam_data_info *bd;
                cJSON *o = cJSON_CreateObject();
                cJSON_AddNumberToObject(o, "id", (double)b->id);
                cJSON_AddStringToObject(o, "name", b->name);
                cJSON_AddStringToObject(o, "modality", b->modality);
                cJSON_AddNumberToObject(o, "energy", b->energy);
                cJSON_AddStringToObject(o, "energy_unit", strcmp(b->modality, "photon") == 0 ? "MV" : "MeV");
                cli_json_put_number(o, "dmax_cm", b->dmax_cm);
                cli_json_put_number(o, "ref_dose_cgy_per_mu", b->ref_dose_cgy_per_mu);
                cli_json_put_number(o, "norm_distance_cm", b->norm_distance_cm);
                bd = in_force(data, n_data, b->id, &versions);
                if (bd)
                    cJSON_AddItemToObject(o, "beam_data", beam_data_json(bd));
                else
                    cJSON_AddNullToObject(o, "beam_data");
                cJSON_AddNumberToObject(o, "beam_data_versions", versions);
                cJSON_AddItemToArray(beams, o);
            }
            cJSON_AddItemToArray(arr, m);
        }
        fxl_machine_list_free(list, n);
        free(data);
        return cli_print_json(arr);
    }
    if (n == 0)
        printf("no machines yet (add one with 'fxledger machine add NAME')\n");
    for (i = 0; i < n; i++) {
        printf("%s (SAD %g cm)\n", list[i].name, list[i].sad_cm);
        if (list[i].n_beams == 0)
            printf("  no beams yet\n");
        for (j = 0; j < list[i].n_beams; j++) {
            const fxl_beam *b = &list[i].beams[j];
            const fxl_beam_data_info *bd;
            printf("  %-8s %-8s %5g %-3s", b->name, b->modality, b->energy,
                   strcmp(b->modality, "photon") == 0 ? "MV" : "MeV");
            print_opt("d_max", b->dmax_cm, "cm");
            print_opt(" dose/MU", b->ref_dose_cgy_per_mu, "cGy/MU");
            print_opt(" norm. distance", b->norm_distance_cm, "cm");
            printf("\n");
            bd = in_force(data, n_data, b->id, &versions);
            if (bd)
                printf("           beam data #%lld in force since %.10s (%d version%s)\n", (long long)bd->id,
                       bd->effective_from, versions, versions == 1 ? "" : "s");
            else if (strcmp(b->modality, "photon") == 0)
                printf("           beam data: none in force%s (no model expected dose or cross-check)\n",
                       versions ? " yet" : "");
        }
    }
    fxl_machine_list_free(list, n);
    free(data);
    return CLI_EXIT_OK;
}

static int machine_show(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    fxl_machine *list = NULL;
    const fxl_machine *m = NULL;
    fxl_beam_data_info *data = NULL;
    size_t n = 0, n_data = 0, i, j, k;
    int npos, rc, versions;

    rc = cli_parse(env, "machine show NAME",
                   "Shows one machine, its beams and every version of their beam data (the one\n"
                   "in force marked), with the SHA-256 of each file as loaded.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("machine show needs a machine NAME (see 'fxledger machine list')");
        return CLI_EXIT_USAGE;
    }
    if ((rc = fxl_beam_data_list(env->ctx, &data, &n_data, pos[0])) != 0)
        return cli_fail(env, rc);
    if ((rc = fxl_machine_list(env->ctx, &list, &n)) != 0) {
        free(data);
        return cli_fail(env, rc);
    }
    for (i = 0; i < n; i++)
        if (strcmp(list[i].name, pos[0]) == 0)
            m = &list[i];
    if (!m) {
        cli_error("unknown machine '%s' (see 'fxledger machine list')", pos[0]);
        fxl_machine_list_free(list, n);
        free(data);
        return CLI_EXIT_DATA;
    }
    if (env->json) {
        cJSON *o = cJSON_CreateObject(), *beams = NULL;
        cJSON_AddNumberToObject(o, "id", (double)m->id);
        cJSON_AddStringToObject(o, "name", m->name);
        cJSON_AddNumberToObject(o, "sad_cm", m->sad_cm);
        cJSON_AddStringToObject(o, "created_at", m->created_at);
        beams = cJSON_AddArrayToObject(o, "beams");
        for (j = 0; j < m->n_beams; j++) {
            const fxl_beam *b = &m->beams[j];
            cJSON *bo = cJSON_CreateObject(), *va;
            cJSON_AddNumberToObject(bo, "id", (double)b->id);
            cJSON_AddStringToObject(bo, "name", b->name);
            cJSON_AddStringToObject(bo, "modality", b->modality);
            cJSON_AddNumberToObject(bo, "energy", b->energy);
            cJSON_AddStringToObject(bo, "energy_unit", strcmp(b->modality, "photon") == 0 ? "MV" : "MeV");
            cli_json_put_number(bo, "dmax_cm", b->dmax_cm);
            cli_json_put_number(bo, "ref_dose_cgy_per_mu", b->ref_dose_cgy_per_mu);
            cli_json_put_number(bo, "norm_distance_cm", b->norm_distance_cm);
            va = cJSON_AddArrayToObject(bo, "beam_data");
            for (k = 0; k < n_data; k++)
                if (data[k].beam_id == b->id)
                    cJSON_AddItemToArray(va, beam_data_json(&data[k]));
            cJSON_AddItemToArray(beams, bo);
        }
        fxl_machine_list_free(list, n);
        free(data);
        return cli_print_json(o);
    }
    printf("machine %s (SAD %g cm), added %s\n", m->name, m->sad_cm, m->created_at);
    if (m->n_beams == 0)
        printf("  no beams yet\n");
    for (j = 0; j < m->n_beams; j++) {
        const fxl_beam *b = &m->beams[j];
        printf("\n  beam %s: %s %g %s", b->name, b->modality, b->energy,
               strcmp(b->modality, "photon") == 0 ? "MV" : "MeV");
        print_opt("d_max", b->dmax_cm, "cm");
        print_opt(" dose/MU", b->ref_dose_cgy_per_mu, "cGy/MU");
        print_opt(" norm. distance", b->norm_distance_cm, "cm");
        printf("\n");
        in_force(data, n_data, b->id, &versions);
        if (versions == 0)
            printf("    beam data: none%s\n", strcmp(b->modality, "photon") == 0
                                                 ? " (load with 'fxledger machine beamdata FILE')"
                                                 : " (the model covers photon beams only)");
        for (k = 0; k < n_data; k++) {
            const fxl_beam_data_info *d = &data[k];
            if (d->beam_id != b->id)
                continue;
            printf("    beam data #%-4lld effective %s%s, loaded by %s at %s\n", (long long)d->id,
                   d->effective_from, d->in_force ? " IN FORCE" : "", d->loaded_by, d->created_at);
            printf("      sha256 %s%s%s\n", d->sha256, d->source[0] ? "; source: " : "", d->source);
        }
    }
    fxl_machine_list_free(list, n);
    free(data);
    return CLI_EXIT_OK;
}

static const cli_sub subs[] = {
    {"add", machine_add, "add a treatment machine (physicist or admin)"},
    {"beam", machine_beam, "add a beam to a machine (physicist or admin)"},
    {"beamdata", machine_beamdata, "load the beam data of the independent model for a beam (physicist or admin)"},
    {"list", machine_list, "list machines and their beams"},
    {"show", machine_show, "show one machine, its beams and their beam data versions"},
    {NULL, NULL, NULL}};

int cmd_machine(cli_env *env, int argc, char **argv)
{
    return cli_dispatch_sub(env, subs,
                            "Treatment machines, their beams and the beam data of the independent\n"
                            "expected-dose model (docs/expected-dose.md).",
                            argc, argv);
}
