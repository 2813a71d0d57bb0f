/* Threshold sets in the database: choosing the set in force for a
 * measurement, saving new versions (never editing) with the tie check, and
 * listing. Rules: docs/levels.md; pure matching in src/core/scope.c. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/scope.h"
#include "fxl/thresholds.h"
#include "store/audit.h"
#include "store/auth_int.h"
#include "store/grow.h"
#include "store/json_put.h"
#include "store/stmt.h"

static const char *const detector_kinds[] = {"photon_diode", "electron_diode", "small_field_diode",
                                             "mosfet", "osl", "tld", "other", NULL};

#define SET_COLUMNS                                                                          \
    "t.id, t.name, t.version, t.effective_from, t.active, t.scope_site, t.scope_technique, " \
    "t.scope_modality, t.scope_energy, t.scope_point, t.scope_detector_kind, "               \
    "t.tolerance_pct, t.action_pct, t.floor_cgy, coalesce(u.login, ''), t.created_at "       \
    "FROM threshold_sets t LEFT JOIN users u ON u.id = t.user_id "

static void copy(char *dst, size_t size, const char *src)
{
    snprintf(dst, size, "%s", src ? src : "");
}

static void read_set(fxl_stmt *s, fxl_threshold_set *t)
{
    memset(t, 0, sizeof *t);
    t->id = fxl_stmt_int(s, 0);
    copy(t->name, sizeof t->name, fxl_stmt_text(s, 1));
    t->version = (int)fxl_stmt_int(s, 2);
    copy(t->effective_from, sizeof t->effective_from, fxl_stmt_text(s, 3));
    t->active = (int)fxl_stmt_int(s, 4);
    copy(t->site, sizeof t->site, fxl_stmt_text(s, 5));
    copy(t->technique, sizeof t->technique, fxl_stmt_text(s, 6));
    copy(t->modality, sizeof t->modality, fxl_stmt_text(s, 7));
    t->energy = fxl_stmt_double_opt(s, 8);
    copy(t->point, sizeof t->point, fxl_stmt_text(s, 9));
    copy(t->detector_kind, sizeof t->detector_kind, fxl_stmt_text(s, 10));
    t->tolerance_pct = fxl_stmt_double(s, 11);
    t->action_pct = fxl_stmt_double(s, 12);
    t->floor_cgy = fxl_stmt_double(s, 13);
    copy(t->created_by, sizeof t->created_by, fxl_stmt_text(s, 14));
    copy(t->created_at, sizeof t->created_at, fxl_stmt_text(s, 15));
}

void fxl_threshold_set_scope(fxl_scope *out, const fxl_threshold_set *set)
{
    out->site = set->site[0] ? set->site : NULL;
    out->technique = set->technique[0] ? set->technique : NULL;
    out->modality = set->modality[0] ? set->modality : NULL;
    out->energy = set->energy;
    out->point = set->point[0] ? set->point : NULL;
    out->detector_kind = set->detector_kind[0] ? set->detector_kind : NULL;
}

void fxl_threshold_change_init(fxl_threshold_change *chg)
{
    memset(chg, 0, sizeof *chg);
    chg->tolerance_pct = NAN;
    chg->action_pct = NAN;
    chg->floor_cgy = NAN;
    chg->energy = NAN;
}

/* Every stored row (or those effective at or before where_at), ordered by
 * name, effective_from and version, or with by_version by name and version. */
static int load_rows(fxl_ctx *ctx, fxl_threshold_set **out, size_t *n, const char *where_at,
                     int by_version)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_threshold_set *list = NULL;
    size_t cap = 0, count = 0;
    int rc;

    *out = NULL;
    *n = 0;
    if (by_version)
        rc = fxl_stmt_prepare_cached(&s, ctx, "SELECT " SET_COLUMNS "ORDER BY t.name, t.version");
    else if (where_at)
        rc = fxl_stmt_prepare_cached(&s, ctx, "SELECT " SET_COLUMNS "WHERE t.effective_from <= :at "
                                       "ORDER BY t.name, t.effective_from, t.version");
    else
        rc = fxl_stmt_prepare_cached(&s, ctx, "SELECT " SET_COLUMNS "ORDER BY t.name, t.effective_from, t.version");
    if (rc != 0)
        goto cleanup;
    if (where_at)
        fxl_stmt_bind_text(&s, ":at", where_at);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        if ((rc = fxl_grow(ctx, (void **)&list, &cap, count, sizeof *list, "reading threshold sets")) != 0)
            goto cleanup;
        read_set(&s, &list[count++]);
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

/* Of rows sorted by name, effective_from, version: keeps the last row of
 * each name (the version in force), and of those only the active ones.
 * Compacts in place; returns the new count. */
static size_t keep_in_force(fxl_threshold_set *rows, size_t n)
{
    size_t i, kept = 0;

    for (i = 0; i < n; i++) {
        if (i + 1 < n && strcmp(rows[i].name, rows[i + 1].name) == 0)
            continue;
        if (!rows[i].active)
            continue;
        rows[kept++] = rows[i];
    }
    return kept;
}

int fxl_thresholds_choose(fxl_ctx *ctx, fxl_threshold_choice *out, const fxl_scope *scope,
                          const char *at)
{
    fxl_threshold_set *rows = NULL;
    fxl_scope *scopes = NULL;
    char now[FXL_TIME_LEN];
    size_t n = 0, i, best = 0, other = 0;
    int rc;

    memset(out, 0, sizeof *out);
    if (!at) {
        fxl_now(ctx, now);
        at = now;
    }
    if ((rc = load_rows(ctx, &rows, &n, at, 0)) != 0)
        goto cleanup;
    n = keep_in_force(rows, n);
    if (n > 0 && !(scopes = calloc(n, sizeof *scopes))) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory choosing threshold sets");
        goto cleanup;
    }
    for (i = 0; i < n; i++)
        fxl_threshold_set_scope(&scopes[i], &rows[i]);

    rc = fxl_scope_choose(&best, &other, scopes, n, scope);
    if (rc == FXL_ENOTFOUND) {
        snprintf(out->reason, sizeof out->reason,
                 "no tolerance and action levels apply to this measurement");
        rc = 0;
    } else if (rc == FXL_ECONFLICT) {
        out->ambiguous = 1;
        copy(out->name, sizeof out->name, rows[best].name);
        copy(out->other_name, sizeof out->other_name, rows[other].name);
        snprintf(out->reason, sizeof out->reason, "ambiguous action levels (sets %.64s and %.64s)",
                 rows[best].name, rows[other].name);
        rc = 0;
    } else {
        out->set_id = rows[best].id;
        copy(out->name, sizeof out->name, rows[best].name);
        out->version = rows[best].version;
        out->levels.present = 1;
        out->levels.tolerance_pct = rows[best].tolerance_pct;
        out->levels.action_pct = rows[best].action_pct;
        out->levels.floor_cgy = rows[best].floor_cgy;
    }
cleanup:
    free(rows);
    free(scopes);
    return rc;
}

/* ---- saving ------------------------------------------------------------- */

static int one_of(const char *v, const char *const *allowed)
{
    for (; *allowed; allowed++)
        if (strcmp(v, *allowed) == 0)
            return 1;
    return 0;
}

/* Builds the new row from the previous version (if any) and the change, and
 * checks every value. */
static int build_row(fxl_ctx *ctx, fxl_threshold_set *row, const fxl_threshold_set *prev,
                     const fxl_threshold_change *chg)
{
    static const char *const modalities[] = {"photon", "electron", NULL};
    static const char *const points[] = {"entrance", "exit", NULL};
    const char *name = chg->name;
    size_t len = name ? strlen(name) : 0;

    if (len < 1 || len > 64)
        return fxl_fail(ctx, FXL_EINVAL, "level set name '%s' must be 1 to 64 characters",
                        name ? name : "");
    if (prev) {
        *row = *prev;
    } else {
        memset(row, 0, sizeof *row);
        row->energy = NAN;
        row->tolerance_pct = NAN;
        row->action_pct = NAN;
        row->floor_cgy = 0;
    }
    copy(row->name, sizeof row->name, name);
    row->id = 0;
    row->version = prev ? prev->version + 1 : 1;
    row->active = !chg->deactivate;
    if (!isnan(chg->tolerance_pct))
        row->tolerance_pct = chg->tolerance_pct;
    if (!isnan(chg->action_pct))
        row->action_pct = chg->action_pct;
    if (!isnan(chg->floor_cgy))
        row->floor_cgy = chg->floor_cgy;
    if (chg->site)
        copy(row->site, sizeof row->site, chg->site);
    if (chg->technique)
        copy(row->technique, sizeof row->technique, chg->technique);
    if (chg->modality)
        copy(row->modality, sizeof row->modality, chg->modality);
    if (chg->point)
        copy(row->point, sizeof row->point, chg->point);
    if (chg->detector_kind)
        copy(row->detector_kind, sizeof row->detector_kind, chg->detector_kind);
    if (chg->clear_energy)
        row->energy = NAN;
    else if (!isnan(chg->energy))
        row->energy = chg->energy;

    if (isnan(row->tolerance_pct) || isnan(row->action_pct))
        return fxl_fail(ctx, FXL_EINVAL,
                        "new level set '%s' needs a tolerance and an action level (> 0 and <= %g %%)",
                        name, FXL_LEVEL_PCT_MAX);
    if (!(row->tolerance_pct > 0 && row->tolerance_pct <= FXL_LEVEL_PCT_MAX))
        return fxl_fail(ctx, FXL_EINVAL, "tolerance '%g' must be > 0 and <= %g %%",
                        row->tolerance_pct, FXL_LEVEL_PCT_MAX);
    if (!(row->action_pct > 0 && row->action_pct <= FXL_LEVEL_PCT_MAX))
        return fxl_fail(ctx, FXL_EINVAL, "action level '%g' must be > 0 and <= %g %%",
                        row->action_pct, FXL_LEVEL_PCT_MAX);
    if (row->action_pct < row->tolerance_pct)
        return fxl_fail(ctx, FXL_EINVAL,
                        "action level '%g %%' must be >= the tolerance '%g %%' (the action level is the wider one)",
                        row->action_pct, row->tolerance_pct);
    if (!(row->floor_cgy >= 0 && row->floor_cgy <= FXL_FLOOR_CGY_MAX))
        return fxl_fail(ctx, FXL_EINVAL, "floor '%g' must be >= 0 and <= %g cGy", row->floor_cgy,
                        FXL_FLOOR_CGY_MAX);
    if (strlen(chg->site ? chg->site : "") > 64)
        return fxl_fail(ctx, FXL_EINVAL, "site '%s' must be at most 64 characters", chg->site);
    if (strlen(chg->technique ? chg->technique : "") > 32)
        return fxl_fail(ctx, FXL_EINVAL, "technique '%s' must be at most 32 characters",
                        chg->technique);
    if (row->modality[0] && !one_of(row->modality, modalities))
        return fxl_fail(ctx, FXL_EINVAL, "modality '%s' must be photon or electron", row->modality);
    if (row->point[0] && !one_of(row->point, points))
        return fxl_fail(ctx, FXL_EINVAL, "point '%s' must be entrance or exit", row->point);
    if (row->detector_kind[0] && !one_of(row->detector_kind, detector_kinds))
        return fxl_fail(ctx, FXL_EINVAL,
                        "detector kind '%s' must be one of photon_diode, electron_diode, "
                        "small_field_diode, mosfet, osl, tld, other",
                        row->detector_kind);
    if (!isnan(row->energy) && !(row->energy > 0 && row->energy <= 50))
        return fxl_fail(ctx, FXL_EINVAL, "energy '%g' must be > 0 and <= 50 MV or MeV", row->energy);
    return 0;
}

/* End of the time a row is in force: the effective_from of the next version
 * of the same name ("" = open-ended). Sets *never when a later version has
 * the same effective_from (it shadows this one). rows sorted by name,
 * effective_from, version; i indexes rows. */
static const char *in_force_until(const fxl_threshold_set *rows, size_t n, size_t i, int *never)
{
    *never = 0;
    if (i + 1 >= n || strcmp(rows[i + 1].name, rows[i].name) != 0)
        return "";
    if (strcmp(rows[i + 1].effective_from, rows[i].effective_from) == 0) {
        *never = 1;
        return "";
    }
    return rows[i + 1].effective_from;
}

/* Does [a_from, a_until) overlap [b_from, b_until)? "" until is open-ended. */
static int periods_overlap(const char *a_from, const char *a_until, const char *b_from,
                           const char *b_until)
{
    int a_before_b_ends = !*b_until || strcmp(a_from, b_until) < 0;
    int b_before_a_ends = !*a_until || strcmp(b_from, a_until) < 0;
    return a_before_b_ends && b_before_a_ends;
}

/* The new row is in force from its effective_from until the next version of
 * its own name takes over. Any active version of another name in force
 * during some part of that period, equally specific and compatible, ties. */
static int check_ties(fxl_ctx *ctx, const fxl_threshold_set *row, const fxl_threshold_set *rows,
                      size_t n)
{
    const char *until = "";
    fxl_scope mine, theirs, both;
    char what[200], with[200];
    size_t i;
    int never;

    if (!row->active)
        return 0;
    /* A later-effective version of the same name ends the new row's period. */
    for (i = 0; i < n; i++)
        if (strcmp(rows[i].name, row->name) == 0 && strcmp(rows[i].effective_from, row->effective_from) > 0 &&
            (!*until || strcmp(rows[i].effective_from, until) < 0))
            until = rows[i].effective_from;
    fxl_threshold_set_scope(&mine, row);
    for (i = 0; i < n; i++) {
        const char *their_until;
        if (strcmp(rows[i].name, row->name) == 0 || !rows[i].active)
            continue;
        their_until = in_force_until(rows, n, i, &never);
        if (never || !periods_overlap(row->effective_from, until, rows[i].effective_from, their_until))
            continue;
        fxl_threshold_set_scope(&theirs, &rows[i]);
        if (!fxl_scope_ties(&mine, &theirs))
            continue;
        fxl_scope_intersection(&both, &mine, &theirs);
        fxl_scope_describe(what, sizeof what, &both);
        fxl_scope_describe(with, sizeof with, &theirs);
        return fxl_fail(ctx, FXL_ECONFLICT,
                        "level set '%.64s' would tie with set '%.64s' (version %d, scope %s, in force "
                        "from %s): both are equally specific and %s%.150s would match both; add a "
                        "more specific set for that case or narrow one of the scopes",
                        row->name, rows[i].name, rows[i].version, with, rows[i].effective_from,
                        fxl_scope_specificity(&both) ? "a measurement with " : "", what);
    }
    return 0;
}

static cJSON *set_to_audit(const fxl_threshold_set *t)
{
    cJSON *o = cJSON_CreateObject();

    cJSON_AddStringToObject(o, "name", t->name);
    cJSON_AddNumberToObject(o, "version", t->version);
    cJSON_AddStringToObject(o, "effective_from", t->effective_from);
    cJSON_AddBoolToObject(o, "active", t->active);
    fxl_json_put_text(o, "site", t->site);
    fxl_json_put_text(o, "technique", t->technique);
    fxl_json_put_text(o, "modality", t->modality);
    fxl_json_put_number(o, "energy", t->energy);
    fxl_json_put_text(o, "point", t->point);
    fxl_json_put_text(o, "detector_kind", t->detector_kind);
    cJSON_AddNumberToObject(o, "tolerance_pct", t->tolerance_pct);
    cJSON_AddNumberToObject(o, "action_pct", t->action_pct);
    cJSON_AddNumberToObject(o, "floor_cgy", t->floor_cgy);
    return o;
}

int fxl_thresholds_save(fxl_ctx *ctx, fxl_threshold_set *out, const fxl_threshold_change *chg)
{
    fxl_threshold_set *rows = NULL, row;
    const fxl_threshold_set *prev = NULL;
    fxl_stmt ins = FXL_STMT_INIT;
    cJSON *audit = NULL;
    size_t n = 0, i;
    int rc;

    if ((rc = fxl_require_role(ctx, FXL_ROLES_PHYSICS, "setting tolerance and action levels")) != 0)
        return rc;
    if ((rc = fxl_sign_require(ctx, "putting levels in force")) != 0)
        return rc;
    if ((rc = fxl_begin(ctx)) != 0)
        return rc;
    if ((rc = load_rows(ctx, &rows, &n, NULL, 0)) != 0)
        goto cleanup;
    for (i = 0; i < n; i++)   /* the highest version number of this name */
        if (chg->name && strcmp(rows[i].name, chg->name) == 0 && (!prev || rows[i].version > prev->version))
            prev = &rows[i];
    if (!prev && chg->deactivate) {
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "level set '%s' does not exist; nothing to deactivate",
                      chg->name ? chg->name : "");
        goto cleanup;
    }
    if ((rc = build_row(ctx, &row, prev, chg)) != 0)
        goto cleanup;
    if (chg->effective_from) {
        if (fxl_time_normalize(row.effective_from, chg->effective_from, 0) != 0) {
            rc = fxl_fail(ctx, FXL_EINVAL,
                          "effective date '%s' must be YYYY-MM-DD or YYYY-MM-DDTHH:MM[:SS]Z (UTC)",
                          chg->effective_from);
            goto cleanup;
        }
    } else {
        fxl_now(ctx, row.effective_from);
    }
    if ((rc = check_ties(ctx, &row, rows, n)) != 0)
        goto cleanup;

    fxl_now(ctx, row.created_at);
    copy(row.created_by, sizeof row.created_by, fxl_user_login(ctx));
    if ((rc = fxl_stmt_prepare(&ins, ctx,
                               "INSERT INTO threshold_sets (name, version, effective_from, active, "
                               "scope_site, scope_technique, scope_modality, scope_energy, scope_point, "
                               "scope_detector_kind, tolerance_pct, action_pct, floor_cgy, user_id, "
                               "created_at) VALUES (:name, :version, :eff, :active, :site, :technique, "
                               ":modality, :energy, :point, :kind, :tol, :act, :floor, :user, :now)")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&ins, ":name", row.name);
    fxl_stmt_bind_int(&ins, ":version", row.version);
    fxl_stmt_bind_text(&ins, ":eff", row.effective_from);
    fxl_stmt_bind_int(&ins, ":active", row.active);
    fxl_stmt_bind_text(&ins, ":site", row.site[0] ? row.site : NULL);
    fxl_stmt_bind_text(&ins, ":technique", row.technique[0] ? row.technique : NULL);
    fxl_stmt_bind_text(&ins, ":modality", row.modality[0] ? row.modality : NULL);
    fxl_stmt_bind_double_opt(&ins, ":energy", row.energy);
    fxl_stmt_bind_text(&ins, ":point", row.point[0] ? row.point : NULL);
    fxl_stmt_bind_text(&ins, ":kind", row.detector_kind[0] ? row.detector_kind : NULL);
    fxl_stmt_bind_double(&ins, ":tol", row.tolerance_pct);
    fxl_stmt_bind_double(&ins, ":act", row.action_pct);
    fxl_stmt_bind_double(&ins, ":floor", row.floor_cgy);
    fxl_stmt_bind_int(&ins, ":user", fxl_user_id(ctx));
    fxl_stmt_bind_text(&ins, ":now", row.created_at);
    if ((rc = fxl_stmt_exec(&ins)) != 0)
        goto cleanup;
    row.id = sqlite3_last_insert_rowid(ctx->db);
    audit = set_to_audit(&row);
    if ((rc = fxl_audit_append(ctx, row.active ? "set" : "deactivate", "threshold_sets", row.id, audit)) != 0)
        goto cleanup;
    if ((rc = fxl_signature_add(ctx, "threshold_sets", row.id,
                                row.active ? "levels in force" : "levels withdrawn")) != 0)
        goto cleanup;
    if ((rc = fxl_commit(ctx)) != 0)
        goto cleanup;
    if (out)
        *out = row;
cleanup:
    if (rc != 0)
        fxl_rollback(ctx);
    fxl_stmt_finalize(&ins);
    cJSON_Delete(audit);
    free(rows);
    return rc;
}

int fxl_thresholds_list(fxl_ctx *ctx, fxl_threshold_set **out, size_t *n, const char *at,
                        int all_versions)
{
    char now[FXL_TIME_LEN];
    int rc;

    if (all_versions)
        return load_rows(ctx, out, n, NULL, 1);
    if (!at) {
        fxl_now(ctx, now);
        at = now;
    }
    if ((rc = load_rows(ctx, out, n, at, 0)) != 0)
        return rc;
    *n = keep_in_force(*out, *n);
    if (*n == 0) {
        free(*out);
        *out = NULL;
    }
    return 0;
}
