/* Treatment machines and their beams: adding them (validated, audited, one
 * transaction each), listing them, and finding a beam by machine and name. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/machines.h"
#include "store/audit.h"
#include "store/grow.h"
#include "store/json_put.h"
#include "store/lookup.h"
#include "store/stmt.h"

static int name_ok(const char *s, size_t max)
{
    size_t len = s ? strlen(s) : 0;
    return len >= 1 && len <= max;
}

static int machine_find(fxl_ctx *ctx, int64_t *out_id, const char *name)
{
    int rc = fxl_lookup_id(ctx, out_id, "SELECT id FROM machines WHERE name = :name", ":name", name);

    if (rc == 0)
        return fxl_fail(ctx, FXL_ENOTFOUND, "unknown machine '%s' (see 'fxledger machine list')", name);
    return rc < 0 ? rc : 0;
}

int fxl_beam_find(fxl_ctx *ctx, int64_t *out_id, const char *machine, const char *beam)
{
    fxl_stmt s = FXL_STMT_INIT;
    int64_t machine_id = 0;
    int rc;

    if ((rc = machine_find(ctx, &machine_id, machine)) != 0)
        return rc;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT id FROM beams WHERE machine_id = :m AND name = :name")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":m", machine_id);
    fxl_stmt_bind_text(&s, ":name", beam);
    rc = fxl_stmt_step(&s);
    if (rc == 1) {
        *out_id = fxl_stmt_int(&s, 0);
        rc = 0;
    } else if (rc == 0) {
        rc = fxl_fail(ctx, FXL_ENOTFOUND,
                      "machine '%s' has no beam '%s' (see 'fxledger machine list')", machine, beam);
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_machine_add(fxl_ctx *ctx, int64_t *out_id, const char *name, double sad_cm)
{
    fxl_stmt s = FXL_STMT_INIT;
    cJSON *audit = NULL;
    char now[FXL_TIME_LEN];
    int64_t id = 0;
    int rc;

    if ((rc = fxl_require_role(ctx, FXL_ROLES_PHYSICS, "adding a machine")) != 0)
        return rc;
    if (!name_ok(name, 64))
        return fxl_fail(ctx, FXL_EINVAL, "machine name '%s' must be 1 to 64 characters",
                        name ? name : "");
    if (!(sad_cm >= FXL_SAD_CM_MIN && sad_cm <= FXL_SAD_CM_MAX))
        return fxl_fail(ctx, FXL_EINVAL, "SAD '%g' for machine '%s' must be %g to %g cm", sad_cm,
                        name, FXL_SAD_CM_MIN, FXL_SAD_CM_MAX);
    if (machine_find(ctx, &id, name) == 0)
        return fxl_fail(ctx, FXL_ECONFLICT, "machine '%s' already exists", name);

    fxl_now(ctx, now);
    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "INSERT INTO machines (name, sad_cm, created_at) "
                               "VALUES (:name, :sad, :now)")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":name", name);
    fxl_stmt_bind_double(&s, ":sad", sad_cm);
    fxl_stmt_bind_text(&s, ":now", now);
    if ((rc = fxl_stmt_exec(&s)) != 0)
        goto cleanup;
    id = sqlite3_last_insert_rowid(ctx->db);
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "name", name);
    cJSON_AddNumberToObject(audit, "sad_cm", sad_cm);
    if ((rc = fxl_audit_append(ctx, "create", "machines", id, audit)) != 0)
        goto cleanup;
    rc = fxl_commit(ctx);
    if (rc == 0 && out_id)
        *out_id = id;
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    fxl_stmt_finalize(&s);
    cJSON_Delete(audit);
    return rc;
}

/* An optional number: NaN (not given) or inside [lo, hi]. */
static int opt_in_range(double v, double lo, double hi)
{
    return isnan(v) || (v >= lo && v <= hi);
}

int fxl_beam_add(fxl_ctx *ctx, int64_t *out_id, const fxl_beam_spec *b)
{
    fxl_stmt s = FXL_STMT_INIT;
    cJSON *audit = NULL;
    char now[FXL_TIME_LEN];
    int64_t machine_id = 0, id = 0;
    const char *unit;
    int rc;

    if ((rc = fxl_require_role(ctx, FXL_ROLES_PHYSICS, "adding a beam")) != 0)
        return rc;
    if (!name_ok(b->name, 32))
        return fxl_fail(ctx, FXL_EINVAL, "beam name '%s' must be 1 to 32 characters",
                        b->name ? b->name : "");
    if (!b->modality || (strcmp(b->modality, "photon") != 0 && strcmp(b->modality, "electron") != 0))
        return fxl_fail(ctx, FXL_EINVAL, "modality '%s' for beam '%s' must be photon or electron",
                        b->modality ? b->modality : "", b->name);
    unit = strcmp(b->modality, "photon") == 0 ? "MV" : "MeV";
    if (!(b->energy >= FXL_ENERGY_MIN && b->energy <= FXL_ENERGY_MAX))
        return fxl_fail(ctx, FXL_EINVAL, "energy '%g' for beam '%s' must be %g to %g %s", b->energy,
                        b->name, FXL_ENERGY_MIN, FXL_ENERGY_MAX, unit);
    if (!opt_in_range(b->dmax_cm, FXL_DMAX_CM_MIN, FXL_DMAX_CM_MAX))
        return fxl_fail(ctx, FXL_EINVAL, "d_max '%g' for beam '%s' must be %g to %g cm", b->dmax_cm,
                        b->name, FXL_DMAX_CM_MIN, FXL_DMAX_CM_MAX);
    if (!opt_in_range(b->ref_dose_cgy_per_mu, FXL_DOSE_PER_MU_MIN, FXL_DOSE_PER_MU_MAX))
        return fxl_fail(ctx, FXL_EINVAL,
                        "reference dose per MU '%g' for beam '%s' must be %g to %g cGy/MU",
                        b->ref_dose_cgy_per_mu, b->name, FXL_DOSE_PER_MU_MIN, FXL_DOSE_PER_MU_MAX);
    if (!opt_in_range(b->norm_distance_cm, FXL_NORM_DISTANCE_CM_MIN, FXL_NORM_DISTANCE_CM_MAX))
        return fxl_fail(ctx, FXL_EINVAL,
                        "normalisation distance '%g' for beam '%s' must be %g to %g cm",
                        b->norm_distance_cm, b->name, FXL_NORM_DISTANCE_CM_MIN,
                        FXL_NORM_DISTANCE_CM_MAX);
    if ((rc = machine_find(ctx, &machine_id, b->machine ? b->machine : "")) != 0)
        return rc;
    if (fxl_beam_find(ctx, &id, b->machine, b->name) == 0)
        return fxl_fail(ctx, FXL_ECONFLICT, "machine '%s' already has a beam '%s'", b->machine,
                        b->name);

    fxl_now(ctx, now);
    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "INSERT INTO beams (machine_id, name, modality, energy, dmax_cm, "
                               "ref_dose_cgy_per_mu, norm_distance_cm, created_at) "
                               "VALUES (:m, :name, :modality, :energy, :dmax, :dpmu, :norm, :now)")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":m", machine_id);
    fxl_stmt_bind_text(&s, ":name", b->name);
    fxl_stmt_bind_text(&s, ":modality", b->modality);
    fxl_stmt_bind_double(&s, ":energy", b->energy);
    fxl_stmt_bind_double_opt(&s, ":dmax", b->dmax_cm);
    fxl_stmt_bind_double_opt(&s, ":dpmu", b->ref_dose_cgy_per_mu);
    fxl_stmt_bind_double_opt(&s, ":norm", b->norm_distance_cm);
    fxl_stmt_bind_text(&s, ":now", now);
    if ((rc = fxl_stmt_exec(&s)) != 0)
        goto cleanup;
    id = sqlite3_last_insert_rowid(ctx->db);
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "machine", b->machine);
    cJSON_AddStringToObject(audit, "name", b->name);
    cJSON_AddStringToObject(audit, "modality", b->modality);
    cJSON_AddNumberToObject(audit, "energy", b->energy);
    fxl_json_put_number(audit, "dmax_cm", b->dmax_cm);
    fxl_json_put_number(audit, "ref_dose_cgy_per_mu", b->ref_dose_cgy_per_mu);
    fxl_json_put_number(audit, "norm_distance_cm", b->norm_distance_cm);
    if ((rc = fxl_audit_append(ctx, "create", "beams", id, audit)) != 0)
        goto cleanup;
    rc = fxl_commit(ctx);
    if (rc == 0 && out_id)
        *out_id = id;
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    fxl_stmt_finalize(&s);
    cJSON_Delete(audit);
    return rc;
}

void fxl_machine_list_free(fxl_machine *list, size_t n)
{
    size_t i;

    if (!list)
        return;
    for (i = 0; i < n; i++)
        free(list[i].beams);
    free(list);
}

static int load_beams(fxl_ctx *ctx, fxl_machine *m)
{
    fxl_stmt s = FXL_STMT_INIT;
    size_t cap = 0;
    int rc;

    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT id, name, modality, energy, dmax_cm, ref_dose_cgy_per_mu, "
                               "norm_distance_cm, created_at FROM beams WHERE machine_id = :m "
                               "ORDER BY modality DESC, energy, name")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":m", m->id);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        fxl_beam *b;
        if ((rc = fxl_grow(ctx, (void **)&m->beams, &cap, m->n_beams, sizeof *m->beams,
                           "listing beams")) != 0)
            goto cleanup;
        b = &m->beams[m->n_beams++];
        memset(b, 0, sizeof *b);
        b->id = fxl_stmt_int(&s, 0);
        b->machine_id = m->id;
        snprintf(b->machine, sizeof b->machine, "%s", m->name);
        snprintf(b->name, sizeof b->name, "%s", fxl_stmt_text(&s, 1));
        snprintf(b->modality, sizeof b->modality, "%s", fxl_stmt_text(&s, 2));
        b->energy = fxl_stmt_double(&s, 3);
        b->dmax_cm = fxl_stmt_double_opt(&s, 4);
        b->ref_dose_cgy_per_mu = fxl_stmt_double_opt(&s, 5);
        b->norm_distance_cm = fxl_stmt_double_opt(&s, 6);
        snprintf(b->created_at, sizeof b->created_at, "%s", fxl_stmt_text(&s, 7));
    }
cleanup:
    fxl_stmt_finalize(&s);
    return rc < 0 ? rc : 0;
}

int fxl_machine_list(fxl_ctx *ctx, fxl_machine **out, size_t *n)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_machine *list = NULL;
    size_t count = 0, cap = 0, i;
    int rc;

    *out = NULL;
    *n = 0;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT id, name, sad_cm, created_at FROM machines ORDER BY name")) != 0)
        goto cleanup;
    while ((rc = fxl_stmt_step(&s)) == 1) {
        fxl_machine *m;
        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list, "listing machines")) != 0)
            goto cleanup;
        m = &list[count++];
        memset(m, 0, sizeof *m);
        m->id = fxl_stmt_int(&s, 0);
        snprintf(m->name, sizeof m->name, "%s", fxl_stmt_text(&s, 1));
        m->sad_cm = fxl_stmt_double(&s, 2);
        snprintf(m->created_at, sizeof m->created_at, "%s", fxl_stmt_text(&s, 3));
    }
    if (rc < 0)
        goto cleanup;
    fxl_stmt_finalize(&s);
    for (i = 0; i < count; i++)
        if ((rc = load_beams(ctx, &list[i])) != 0)
            goto cleanup;
    *out = list;
    *n = count;
    list = NULL;
    rc = 0;
cleanup:
    fxl_stmt_finalize(&s);
    fxl_machine_list_free(list, count);
    return rc;
}
