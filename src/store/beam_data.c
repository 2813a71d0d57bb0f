/* Beam data of the independent model in the database: loading a file as a
 * new version (checked against its machine and beam, audited, one
 * transaction), listing versions, and evaluating the model for one field
 * point with the version in force (used by plan import). */
#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <sodium.h>

#include "fxl/number.h"
#include "fxl/audit.h"
#include "fxl/beam_data.h"
#include "fxl/beam_json.h"
#include "store/audit.h"
#include "store/auth_int.h"
#include "store/grow.h"
#include "store/model_store.h"
#include "store/stmt.h"

/* The same limit as the file reader of src/io/beam_json.c. */
#define BEAM_FILE_MAX_BYTES (1024 * 1024)

static void copy(char *dst, size_t size, const char *src)
{
    snprintf(dst, size, "%s", src ? src : "");
}

/* Reads the whole file into a NUL-terminated heap buffer. */
static int read_file(fxl_ctx *ctx, char **out, size_t *len, const char *path)
{
    FILE *f = NULL;
    char *buf = NULL;
    int rc = 0;

    *out = NULL;
    *len = 0;
    if (!(f = fopen(path, "rb")))
        return fxl_fail(ctx, errno == ENOENT || errno == ENOTDIR ? FXL_ENOTFOUND : FXL_EINVAL,
                        "cannot open beam data file '%s': %s", path, strerror(errno));
    if (!(buf = malloc(BEAM_FILE_MAX_BYTES + 2))) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory reading '%s'", path);
        goto cleanup;
    }
    *len = fread(buf, 1, BEAM_FILE_MAX_BYTES + 1, f);
    if (ferror(f)) {
        rc = fxl_fail(ctx, FXL_EINVAL, "cannot read beam data file '%s': %s", path, strerror(errno));
        goto cleanup;
    }
    if (*len > BEAM_FILE_MAX_BYTES) {
        rc = fxl_fail(ctx, FXL_EINVAL, "beam data file '%s' is larger than %d bytes", path,
                      BEAM_FILE_MAX_BYTES);
        goto cleanup;
    }
    buf[*len] = '\0';
    /* Stored as text: a NUL inside would cut it. */
    if (strlen(buf) != *len) {
        rc = fxl_fail(ctx, FXL_EINVAL, "beam data file '%s' contains a NUL byte: not a JSON text", path);
        goto cleanup;
    }
    *out = buf;
    buf = NULL;
cleanup:
    if (f)
        fclose(f);
    free(buf);
    return rc;
}

/* The beam a file describes, with what the machine and beam already state. */
typedef struct beam_row {
    int64_t id;
    char modality[9];
    double energy;
    double dmax_cm, dose_per_mu, norm_distance_cm;   /* NaN when not stated */
    double sad_cm;
} beam_row;

static int find_beam_row(fxl_ctx *ctx, beam_row *out, const char *machine, const char *beam,
                         const char *path)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT b.id, b.modality, b.energy, b.dmax_cm, b.ref_dose_cgy_per_mu, "
                               "b.norm_distance_cm, m.sad_cm FROM beams b JOIN machines m ON m.id = b.machine_id "
                               "WHERE m.name = :machine AND b.name = :beam")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":machine", machine);
    fxl_stmt_bind_text(&s, ":beam", beam);
    rc = fxl_stmt_step(&s);
    if (rc == 1) {
        out->id = fxl_stmt_int(&s, 0);
        copy(out->modality, sizeof out->modality, fxl_stmt_text(&s, 1));
        out->energy = fxl_stmt_double(&s, 2);
        out->dmax_cm = fxl_stmt_double_opt(&s, 3);
        out->dose_per_mu = fxl_stmt_double_opt(&s, 4);
        out->norm_distance_cm = fxl_stmt_double_opt(&s, 5);
        out->sad_cm = fxl_stmt_double(&s, 6);
        rc = 0;
        goto cleanup;
    }
    if (rc < 0)
        goto cleanup;
    fxl_stmt_finalize(&s);
    if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT 1 FROM machines WHERE name = :machine")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":machine", machine);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 0)
        rc = fxl_fail(ctx, FXL_ENOTFOUND,
                      "beam data file '%s' names machine '%s', which is not known (see 'fxledger machine list')",
                      path, machine);
    else
        rc = fxl_fail(ctx, FXL_ENOTFOUND,
                      "beam data file '%s' names beam '%s', which is not a beam of machine '%s' (see "
                      "'fxledger machine list')",
                      path, beam, machine);
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

/* The file must describe the beam it is loaded onto: a stated value that
 * differs is a wrong file or a wrong beam, and either would bias every
 * expected dose computed from it. */
static int check_against_beam(fxl_ctx *ctx, const fxl_beam_model *m, const beam_row *b, const char *path)
{
    if (strcmp(b->modality, "photon") != 0)
        return fxl_fail(ctx, FXL_EINVAL,
                        "beam data file '%s': beam '%s' of machine '%s' is an electron beam: the "
                        "independent model covers photon beams only",
                        path, m->beam, m->machine);
    if (fabs(m->energy - b->energy) > 1e-6)
        return fxl_fail(ctx, FXL_EINVAL,
                        "beam data file '%s' energy '%g' MV differs from beam '%s' of machine '%s' (%g MV)",
                        path, m->energy, m->beam, m->machine, b->energy);
    if (fabs(m->sad_cm - b->sad_cm) > FXL_BEAM_DATA_LENGTH_TOL_CM)
        return fxl_fail(ctx, FXL_EINVAL,
                        "beam data file '%s' sad_cm '%g' differs from machine '%s' (SAD %g cm) by more "
                        "than %g cm",
                        path, m->sad_cm, m->machine, b->sad_cm, FXL_BEAM_DATA_LENGTH_TOL_CM);
    if (!isnan(b->dmax_cm) && fabs(m->dmax_cm - b->dmax_cm) > FXL_BEAM_DATA_LENGTH_TOL_CM)
        return fxl_fail(ctx, FXL_EINVAL,
                        "beam data file '%s' dmax_cm '%g' differs from beam '%s' of machine '%s' (d_max "
                        "%g cm) by more than %g cm",
                        path, m->dmax_cm, m->beam, m->machine, b->dmax_cm, FXL_BEAM_DATA_LENGTH_TOL_CM);
    if (!isnan(b->dose_per_mu) &&
        fabs(m->ref_dose_cgy_per_mu - b->dose_per_mu) > FXL_BEAM_DATA_DOSE_TOL_REL * b->dose_per_mu)
        return fxl_fail(ctx, FXL_EINVAL,
                        "beam data file '%s' reference dose_cgy_per_mu '%g' differs from beam '%s' of "
                        "machine '%s' (%g cGy/MU) by more than %g %%",
                        path, m->ref_dose_cgy_per_mu, m->beam, m->machine, b->dose_per_mu,
                        FXL_BEAM_DATA_DOSE_TOL_REL * 100);
    if (!isnan(b->norm_distance_cm) &&
        fabs(m->ref_distance_cm - b->norm_distance_cm) > FXL_BEAM_DATA_LENGTH_TOL_CM)
        return fxl_fail(ctx, FXL_EINVAL,
                        "beam data file '%s' reference distance_cm '%g' differs from beam '%s' of machine "
                        "'%s' (normalisation distance %g cm) by more than %g cm",
                        path, m->ref_distance_cm, m->beam, m->machine, b->norm_distance_cm,
                        FXL_BEAM_DATA_LENGTH_TOL_CM);
    return 0;
}

int fxl_beam_data_load(fxl_ctx *ctx, fxl_beam_data_info *out, const char *path, const char *effective)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_beam_model m;
    beam_row b;
    cJSON *audit = NULL;
    char *text = NULL, now[FXL_TIME_LEN], eff[FXL_TIME_LEN], sha[65];
    const char *name;
    size_t len = 0;
    int64_t id = 0;
    int rc;

    fxl_beam_model_init(&m);
    memset(&b, 0, sizeof b);
    if (out)
        memset(out, 0, sizeof *out);
    if ((rc = fxl_require_role(ctx, FXL_ROLES_PHYSICS, "loading beam data")) != 0)
        return rc;
    if ((rc = fxl_sign_require(ctx, "loading beam data")) != 0)
        return rc;
    if (!path || !*path)
        return fxl_fail(ctx, FXL_EINVAL, "a beam data FILE is required");
    fxl_now(ctx, now);
    if (effective) {
        if (fxl_time_normalize(eff, effective, 0) != 0)
            return fxl_fail(ctx, FXL_EINVAL,
                            "effective date '%s' must be YYYY-MM-DD or YYYY-MM-DDTHH:MM[:SS]Z (UTC)",
                            effective);
    } else {
        copy(eff, sizeof eff, now);
    }
    if ((rc = read_file(ctx, &text, &len, path)) != 0)
        goto cleanup;
    if ((rc = fxl_beam_json_parse(ctx, &m, text, len, path)) != 0)
        goto cleanup;
    if (sodium_init() < 0) {
        rc = fxl_fail(ctx, FXL_EIO, "cannot initialise libsodium");
        goto cleanup;
    }
    fxl_sha256_hex(sha, text, len);

    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    if ((rc = find_beam_row(ctx, &b, m.machine, m.beam, path)) != 0 ||
        (rc = check_against_beam(ctx, &m, &b, path)) != 0)
        goto cleanup;
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT id FROM beam_data WHERE beam_id = :beam AND effective_from = :eff")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":beam", b.id);
    fxl_stmt_bind_text(&s, ":eff", eff);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 1) {
        rc = fxl_fail(ctx, FXL_ECONFLICT,
                      "beam '%s' of machine '%s' already has beam data effective from %s (#%lld); versions "
                      "are never replaced: load the new data with a later --effective date",
                      m.beam, m.machine, eff, (long long)fxl_stmt_int(&s, 0));
        goto cleanup;
    }
    fxl_stmt_finalize(&s);

    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "INSERT INTO beam_data (beam_id, effective_from, data, sha256, source, "
                               "user_id, created_at) VALUES (:beam, :eff, :data, :sha, :source, :user, :now)")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":beam", b.id);
    fxl_stmt_bind_text(&s, ":eff", eff);
    fxl_stmt_bind_text(&s, ":data", text);
    fxl_stmt_bind_text(&s, ":sha", sha);
    fxl_stmt_bind_text(&s, ":source", m.source[0] ? m.source : NULL);
    fxl_stmt_bind_int(&s, ":user", fxl_user_id(ctx));
    fxl_stmt_bind_text(&s, ":now", now);
    if ((rc = fxl_stmt_exec(&s)) != 0)
        goto cleanup;
    id = sqlite3_last_insert_rowid(ctx->db);

    name = strrchr(path, '/');
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "machine", m.machine);
    cJSON_AddStringToObject(audit, "beam", m.beam);
    cJSON_AddNumberToObject(audit, "beam_id", (double)b.id);
    cJSON_AddStringToObject(audit, "effective_from", eff);
    cJSON_AddStringToObject(audit, "file", name ? name + 1 : path);
    cJSON_AddNumberToObject(audit, "bytes", (double)len);
    cJSON_AddStringToObject(audit, "sha256", sha);
    if (m.source[0])
        cJSON_AddStringToObject(audit, "source", m.source);
    if ((rc = fxl_audit_append(ctx, "load", "beam_data", id, audit)) != 0)
        goto cleanup;
    if ((rc = fxl_signature_add(ctx, "beam_data", id, "beam data loaded")) != 0)
        goto cleanup;
    if ((rc = fxl_commit(ctx)) != 0)
        goto cleanup;
    if (out) {
        out->id = id;
        out->beam_id = b.id;
        copy(out->machine, sizeof out->machine, m.machine);
        copy(out->beam, sizeof out->beam, m.beam);
        out->energy = m.energy;
        copy(out->effective_from, sizeof out->effective_from, eff);
        copy(out->sha256, sizeof out->sha256, sha);
        copy(out->source, sizeof out->source, m.source);
        copy(out->loaded_by, sizeof out->loaded_by, fxl_user_login(ctx));
        copy(out->created_at, sizeof out->created_at, now);
        out->in_force = strcmp(eff, now) <= 0;
    }
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    fxl_stmt_finalize(&s);
    cJSON_Delete(audit);
    fxl_beam_model_release(&m);
    free(text);
    return rc;
}

int fxl_beam_data_list(fxl_ctx *ctx, fxl_beam_data_info **out, size_t *n, const char *machine)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_beam_data_info *list = NULL;
    char now[FXL_TIME_LEN];
    size_t cap = 0, count = 0;
    int rc;

    *out = NULL;
    *n = 0;
    if (machine) {
        if ((rc = fxl_stmt_prepare(&s, ctx, "SELECT 1 FROM machines WHERE name = :m")) != 0)
            goto cleanup;
        fxl_stmt_bind_text(&s, ":m", machine);
        if ((rc = fxl_stmt_step(&s)) == 0)
            rc = fxl_fail(ctx, FXL_ENOTFOUND, "unknown machine '%s' (see 'fxledger machine list')", machine);
        if (rc < 0)
            goto cleanup;
        fxl_stmt_finalize(&s);
    }
    fxl_now(ctx, now);
    /* in_force: the latest version (by effective date, then id) not after now. */
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT d.id, d.beam_id, m.name, b.name, b.energy, d.effective_from, d.sha256, "
                               "coalesce(d.source, ''), coalesce(u.login, ''), d.created_at, "
                               "d.id = (SELECT x.id FROM beam_data x WHERE x.beam_id = d.beam_id "
                               "        AND x.effective_from <= :now ORDER BY x.effective_from DESC, x.id DESC "
                               "        LIMIT 1) "
                               "FROM beam_data d JOIN beams b ON b.id = d.beam_id "
                               "JOIN machines m ON m.id = b.machine_id LEFT JOIN users u ON u.id = d.user_id "
                               "WHERE (:machine IS NULL OR m.name = :machine) "
                               "ORDER BY m.name, b.name, d.effective_from, d.id")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":now", now);
    fxl_stmt_bind_text(&s, ":machine", machine);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        fxl_beam_data_info *d;
        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list, "listing beam data")) != 0)
            goto cleanup;
        d = &list[count++];
        memset(d, 0, sizeof *d);
        d->id = fxl_stmt_int(&s, 0);
        d->beam_id = fxl_stmt_int(&s, 1);
        copy(d->machine, sizeof d->machine, fxl_stmt_text(&s, 2));
        copy(d->beam, sizeof d->beam, fxl_stmt_text(&s, 3));
        d->energy = fxl_stmt_double(&s, 4);
        copy(d->effective_from, sizeof d->effective_from, fxl_stmt_text(&s, 5));
        copy(d->sha256, sizeof d->sha256, fxl_stmt_text(&s, 6));
        copy(d->source, sizeof d->source, fxl_stmt_text(&s, 7));
        copy(d->loaded_by, sizeof d->loaded_by, fxl_stmt_text(&s, 8));
        copy(d->created_at, sizeof d->created_at, fxl_stmt_text(&s, 9));
        d->in_force = (int)fxl_stmt_int(&s, 10);
    }
cleanup:
    fxl_stmt_finalize(&s);
    if (rc < 0) {
        free(list);
        return rc;
    }
    *out = list;
    *n = count;
    return 0;
}

/* ---- the model at plan import ------------------------------------------------ */

int fxl_model_crosscheck_level(fxl_ctx *ctx, double *out_pct)
{
    char buf[64], *end = NULL;
    double v;
    int rc = fxl_setting_get(ctx, "model_crosscheck_pct", buf, sizeof buf);

    *out_pct = FXL_MODEL_CROSSCHECK_PCT_DEFAULT;
    if (rc == FXL_ENOTFOUND)
        return 0;
    if (rc != 0)
        return rc;
    (void)end;
    if (fxl_number_parse(&v, buf, 0) != FXL_NUM_OK || !(v > 0) || v > 50)
        return fxl_fail(ctx, FXL_EINVAL,
                        "stored setting 'model_crosscheck_pct' value '%s' must be a number > 0 and <= 50 %%",
                        buf);
    *out_pct = v;
    return 0;
}

/* A result that was never computed, with one reason. */
static void not_computed(fxl_model_result *out, const fxl_model_input *in, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
static void not_computed(fxl_model_result *out, const fxl_model_input *in, const char *fmt, ...)
{
    char text[FXL_REASON_LEN];
    va_list ap;

    memset(out, 0, sizeof *out);
    out->point = in->point;
    out->setup = in->setup;
    out->mu = in->mu;
    out->dose_cgy = out->ref_dose_cgy_per_mu = out->ref_distance_cm = out->sad_cm = NAN;
    out->dmax_cm = out->ssd_cm = out->depth_cm = out->spd_cm = out->rc_cm = out->rd_cm = NAN;
    out->sc = out->sp = out->scp = out->tmr = out->pdd_pct = out->inverse_square = NAN;
    out->wedge_factor = out->tray_factor = NAN;
    va_start(ap, fmt);
    vsnprintf(text, sizeof text, fmt, ap);
    va_end(ap);
    fxl_reasons_add(&out->reasons, "%s", text);
}

int fxl_model_eval_field(fxl_ctx *ctx, fxl_model_result *out, int64_t *out_beam_data_id,
                         int64_t beam_id, const char *machine, const char *beam,
                         const char *modality, const fxl_model_input *in, const char *at)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_beam_model m;
    int64_t id = 0;
    int rc;

    fxl_beam_model_init(&m);
    *out_beam_data_id = 0;
    if (strcmp(modality, "photon") != 0) {
        not_computed(out, in,
                     "beam '%s' is an %s beam: the independent model covers photon beams only",
                     beam, modality);
        return 0;
    }
    if ((rc = fxl_stmt_prepare(&s, ctx,
                               "SELECT id, data FROM beam_data WHERE beam_id = :beam AND effective_from <= :at "
                               "ORDER BY effective_from DESC, id DESC LIMIT 1")) != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":beam", beam_id);
    fxl_stmt_bind_text(&s, ":at", at);
    if ((rc = fxl_stmt_step(&s)) < 0)
        goto cleanup;
    if (rc == 0) {
        not_computed(out, in,
                     "no beam data in force for beam '%s' of machine '%s' (load them with 'fxledger "
                     "machine beamdata FILE')",
                     beam, machine);
        rc = 0;
        goto cleanup;
    }
    id = fxl_stmt_int(&s, 0);
    /* The stored text passed every check when it was loaded; a failure here
     * means a damaged database, reported as no model value, not as an error
     * that would block the import. */
    rc = fxl_beam_json_parse(ctx, &m, fxl_stmt_text(&s, 1), strlen(fxl_stmt_text(&s, 1)), "stored beam data");
    if (rc != 0) {
        not_computed(out, in, "stored beam data #%lld of beam '%s' cannot be read: %.120s", (long long)id,
                     beam, fxl_errmsg(ctx));
        *out_beam_data_id = id;
        rc = 0;
        goto cleanup;
    }
    *out_beam_data_id = id;
    rc = fxl_model_expected(out, &m, in) == 0 ? 0 : fxl_fail(ctx, FXL_EINVAL, "internal: model input");
cleanup:
    fxl_stmt_finalize(&s);
    fxl_beam_model_release(&m);
    return rc;
}
